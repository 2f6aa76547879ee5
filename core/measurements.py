"""The measurement file: received levels logged on a prototype, one CSV row per level.

Wheelreach's own format (``wheelreach-measurements/1``, docs/measurement-format.md; the JSON
Schema of one row is ``docs/measurement-format.json``, generated from :data:`COLUMNS`). Comment
lines start with ``#``; the first other line is the header naming the columns; every further
line is one measured level:

- ``vehicle``: the vehicle's ``name`` as in its file, or the vehicle file's name (``sedan.json``);
- ``spot``: a spot name of the vehicle file, or a label for the position given in ``x_m``, ``y_m``,
  ``z_m`` (m, vehicle axes; optional receiver antenna axis ``axis_x``, ``axis_y``, ``axis_z``);
- ``wheel``: the wheel id; ``wheel_angle_deg``: the wheel angle in degrees (0 with the sensor at
  the top, increasing as the wheel turns driving forward), or empty for a level of a drive log
  whose angle is not known;
- ``level_dbm``: the logged level; optional ``frequency_hz`` (empty: the vehicle file's) and
  ``chain_gain_db``, the gain of the receiver chain between the antenna's terminal and the logged
  level (empty: 0 dB). The level at the antenna terminal is ``level_dbm - chain_gain_db``.

Reading is all or nothing: the file goes through core.files.read_regular_file (regular files
only, bounded size) and every row is checked before anything is returned; the first problem
raises :class:`MeasurementFileError`, whose text is ``FILE:LINE:COLUMN: problem`` (line and
character column 1-based, the column of the field at fault).
"""

from __future__ import annotations

import math
import os
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from core.bounds import (
    MAX_FREQUENCY_HZ,
    MAX_MEASUREMENT_BYTES,
    MAX_MEASUREMENT_FREQUENCIES,
    MAX_MEASUREMENT_ROWS,
    MAX_MEASUREMENT_SPOTS,
    MAX_NAME_CHARS,
    MIN_FREQUENCY_HZ,
    MIN_LEVELS_WITHOUT_ANGLE,
)
from core.files import InputFileError, read_regular_file
from core.provenance import sha256_hex
from core.vehicle import Vehicle

FORMAT_NAME = "wheelreach-measurements"
FORMAT_VERSION = 1
FORMAT_TAG = f"{FORMAT_NAME}/{FORMAT_VERSION}"
#: a named spot given with coordinates as well must lie within this of the file's spot, m
POSITION_TOLERANCE_M = 0.01


@dataclass(frozen=True)
class Column:
    """One column of the file: name, whether the header must have it, kind ("text" or "number"), unit,
    allowed range (numbers), whether a row may leave it empty, and what it holds."""

    name: str
    required: bool
    kind: str
    unit: str
    lo: float | None
    hi: float | None
    empty_ok: bool
    description: str


COLUMNS: tuple[Column, ...] = (
    Column("vehicle", True, "text", "", None, None, False,
           "the vehicle's name as in its file, or the vehicle file's name (e.g. sedan.json)"),
    Column("spot", True, "text", "", None, None, True,
           "a receiver spot of the vehicle file, or a label for the position in x_m, y_m, z_m "
           "(may be empty when the position is given)"),
    Column("x_m", False, "number", "m", -100.0, 100.0, True, "receiver position x, vehicle axes (with y_m, z_m)"),
    Column("y_m", False, "number", "m", -100.0, 100.0, True, "receiver position y, vehicle axes"),
    Column("z_m", False, "number", "m", -100.0, 100.0, True, "receiver position z, vehicle axes"),
    Column("axis_x", False, "number", "", -1e3, 1e3, True,
           "receiver antenna axis x for a position given by coordinates (with axis_y, axis_z; default: the "
           "radio's receiver axis)"),
    Column("axis_y", False, "number", "", -1e3, 1e3, True, "receiver antenna axis y"),
    Column("axis_z", False, "number", "", -1e3, 1e3, True, "receiver antenna axis z"),
    Column("wheel", True, "text", "", None, None, False, "the id of the wheel whose sensor sent (e.g. FL)"),
    Column("wheel_angle_deg", True, "number", "deg", -3600.0, 3600.0, True,
           "wheel angle: 0 with the sensor at the top, increasing as the wheel turns when driving forward; "
           "empty when not known (a drive log)"),
    Column("level_dbm", True, "number", "dBm", -200.0, 50.0, False, "the logged received level"),
    Column("frequency_hz", False, "number", "Hz", MIN_FREQUENCY_HZ, MAX_FREQUENCY_HZ, True,
           "frequency of the sensor's transmission (empty: the vehicle file's radio frequency)"),
    Column("chain_gain_db", False, "number", "dB", -100.0, 100.0, True,
           "gain of the receiver chain from the antenna terminal to the logged level (empty: 0 dB)"),
)
_BY_NAME = {c.name: c for c in COLUMNS}
_POSITION = ("x_m", "y_m", "z_m")
_AXIS = ("axis_x", "axis_y", "axis_z")
_NUMBER = re.compile(r"^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$")
_NOT_FINITE = re.compile(r"^[+-]?(nan|inf|infinity)$", re.IGNORECASE)


class MeasurementFileError(ValueError):
    """A measurement file (or set of records) is invalid; str() is ``FILE:LINE:COLUMN: problem``.

    Attributes: ``path`` ("" for records built in code), ``line`` and ``column`` (1-based; 0 when
    not applicable), ``problem``."""

    def __init__(self, problem: str, line: int = 0, column: int = 0, path: str | os.PathLike | None = None):
        self.path = str(path) if path else ""
        self.line = line
        self.column = column
        self.problem = problem
        where = self.path or "measurements"
        if line:
            where += f":{line}:{max(column, 1)}"
        super().__init__(f"{where}: {problem}")


@dataclass(frozen=True, eq=False)
class MeasurementSet:
    """Measured levels of one vehicle (SI units inside; angles in rad, nan where not known).

    Spots: ``spot_names`` (K,), ``spot_positions`` (K, 3) m, ``spot_axes`` (K, 3) unit receiver
    axes, ``spot_in_file`` (K,) whether the spot is one of the vehicle file's. Rows (N,): ``spot``
    and ``wheel`` (indices into the spots and the vehicle's ``wheel_ids``), ``angle_rad`` in [0, 2 pi)
    or nan, ``level_dbm`` as logged, ``frequency_hz``, ``chain_gain_db``, ``line`` (the file line, 0
    for records built in code)."""

    path: str
    sha256: str
    vehicle_name: str
    wheel_ids: tuple[str, ...]
    spot_names: tuple[str, ...]
    spot_positions: np.ndarray
    spot_axes: np.ndarray
    spot_in_file: tuple[bool, ...]
    spot: np.ndarray
    wheel: np.ndarray
    angle_rad: np.ndarray
    level_dbm: np.ndarray
    frequency_hz: np.ndarray
    chain_gain_db: np.ndarray
    line: np.ndarray

    def __len__(self) -> int:
        return len(self.level_dbm)

    @property
    def antenna_level_dbm(self) -> np.ndarray:
        """Level at the receiver antenna's terminal, dBm: the logged level less the receiver chain's gain."""
        return self.level_dbm - self.chain_gain_db

    @property
    def has_angle(self) -> np.ndarray:
        """(N,) True where the row gives the wheel angle."""
        return np.isfinite(self.angle_rad)

    @property
    def frequencies_hz(self) -> tuple[float, ...]:
        return tuple(float(f) for f in np.unique(self.frequency_hz))

    def rows(self, keep) -> MeasurementSet:
        """The set with only the rows ``keep`` (a boolean mask or indices); the spot list is kept."""
        keep = np.asarray(keep)
        fields = {k: getattr(self, k)[keep] for k in ("spot", "wheel", "angle_rad", "level_dbm", "frequency_hz",
                                                       "chain_gain_db", "line")}
        return MeasurementSet(**{**self.__dict__, **fields})

    def of_spots(self, spots) -> MeasurementSet:
        """The rows measured at the given spot indices."""
        return self.rows(np.isin(self.spot, np.asarray(list(spots), int)))

    def summary(self) -> dict:
        """Counts for records and messages: rows, with and without angle, spots, wheels, frequencies."""
        return {"rows": len(self), "with_angle": int(self.has_angle.sum()),
                "without_angle": int((~self.has_angle).sum()),
                "spots": sorted({self.spot_names[i] for i in np.unique(self.spot)}),
                "wheels": sorted({self.wheel_ids[i] for i in np.unique(self.wheel)}),
                "frequencies_hz": list(self.frequencies_hz)}


# ----- reading ----------------------------------------------------------------------------------
def _fields(text: str, line: int, path) -> list[tuple[str, int]]:
    """The comma-separated fields of one line with the 1-based character column of each; a field may
    be double-quoted (a quote inside doubled). Unquoted fields are stripped of surrounding blanks."""
    out: list[tuple[str, int]] = []
    i, n = 0, len(text)
    while True:
        start = i
        while i < n and text[i] in " \t":
            i += 1
        if i < n and text[i] == '"':
            col = i + 1
            i += 1
            buf = []
            while True:
                if i >= n:
                    raise MeasurementFileError("a quoted field has no closing quote", line, col, path)
                if text[i] == '"':
                    if i + 1 < n and text[i + 1] == '"':
                        buf.append('"')
                        i += 2
                        continue
                    i += 1
                    break
                buf.append(text[i])
                i += 1
            while i < n and text[i] in " \t":
                i += 1
            if i < n and text[i] != ",":
                raise MeasurementFileError("text after a quoted field's closing quote", line, i + 1, path)
            out.append(("".join(buf), col))
        else:
            j = text.find(",", i)
            j = n if j < 0 else j
            raw = text[i:j]
            out.append((raw.strip(), i + 1 if raw.strip() else start + 1))
            i = j
        if i >= n:
            return out
        i += 1  # the comma


def _number(text: str, col: Column, line: int, column: int, path) -> float:
    if _NOT_FINITE.match(text):
        raise MeasurementFileError(f"{col.name}: {text!r} is not a finite number", line, column, path)
    if not _NUMBER.match(text):
        raise MeasurementFileError(f"{col.name}: {text!r} is not a number", line, column, path)
    x = float(text)
    if not math.isfinite(x):
        raise MeasurementFileError(f"{col.name}: {text!r} is not a finite number", line, column, path)
    if not col.lo <= x <= col.hi:
        unit = f" {col.unit}" if col.unit else ""
        raise MeasurementFileError(f"{col.name}: {x:g}{unit} is outside {col.lo:g}..{col.hi:g}{unit}", line, column,
                                   path)
    return x


def _decode(raw: bytes, path) -> str:
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as e:
        line = raw[: e.start].count(b"\n") + 1
        column = e.start - (raw.rfind(b"\n", 0, e.start) + 1) + 1
        raise MeasurementFileError("not UTF-8 text", line, column, path) from None
    text = text.removeprefix("\ufeff")
    if "\x00" in text:
        line = text[: text.index("\x00")].count("\n") + 1
        raise MeasurementFileError("the file holds a NUL character: not a text file", line, 1, path)
    return text


def parse_measurements(data: str | bytes, vehicle: Vehicle, path: str | os.PathLike | None = None,
                       vehicle_file: str | os.PathLike | None = None) -> MeasurementSet:
    """Read a measurement document against the vehicle it measures; raise MeasurementFileError (never
    another error) with the file, line and column of the first problem.

    ``vehicle_file``: the vehicle's file, whose name a row's ``vehicle`` may give instead of the
    vehicle's own name."""
    raw = data.encode("utf-8") if isinstance(data, str) else bytes(data)
    text = _decode(raw, path)
    reader = _Reader(vehicle, path, vehicle_file)
    lines = text.splitlines()
    for ln, body in enumerate(lines, 1):
        stripped = body.strip()
        if not stripped:
            continue
        if stripped.startswith("#"):
            reader.comment(ln, body, stripped)
        elif reader.header is None:
            reader.read_header(ln, _fields(body, ln, path))
        else:
            reader.read_row(ln, body, _fields(body, ln, path))
    return reader.finish(raw, len(lines))


class _Reader:
    """The state of one reading: header, spots seen, rows so far (all discarded on an error)."""

    def __init__(self, vehicle: Vehicle, path, vehicle_file):
        self.v = vehicle
        self.path = path
        self.header: dict[str, int] | None = None
        self.header_cols: list[int] = []
        self.header_line = 0
        self.names_ok = {vehicle.name} | ({Path(vehicle_file).name} if vehicle_file else set())
        self.file_spots = {s.name: s for s in vehicle.spots}
        self.wheel_ids = tuple(w.id for w in vehicle.wheels)
        self.wheel_index = {w: i for i, w in enumerate(self.wheel_ids)}
        axis = np.asarray(vehicle.radio.receiver.axis, float)
        self.default_axis = axis / np.linalg.norm(axis)
        self.spots: dict[str, tuple[int, np.ndarray, np.ndarray, int]] = {}  # label -> (index, position, axis, line)
        self.cols: dict[str, list] = {k: [] for k in ("spot", "wheel", "angle", "level", "freq", "gain", "line")}

    def error(self, problem: str, line: int, column: int) -> MeasurementFileError:
        return MeasurementFileError(problem, line, column, self.path)

    def comment(self, ln: int, body: str, stripped: str) -> None:
        key, sep, value = stripped[1:].partition(":")
        value = value.strip()
        if sep and key.strip().lower() == "format" and value != FORMAT_TAG:
            col = body.index(value) + 1 if value else len(body) + 1
            raise self.error(f"format {value!r} is not readable by this program (reads {FORMAT_TAG!r})", ln, col)

    def read_header(self, ln: int, fields: list[tuple[str, int]]) -> None:
        header: dict[str, int] = {}
        for k, (name, col) in enumerate(fields):
            key = name.strip().lower()
            if key not in _BY_NAME:
                raise self.error(f"unknown column {name!r} (the columns: {', '.join(_BY_NAME)})", ln, col)
            if key in header:
                raise self.error(f"column {key!r} appears twice", ln, col)
            header[key] = k
            self.header_cols.append(col)
        required = [c.name for c in COLUMNS if c.required]
        for name in required:
            if name not in header:
                raise self.error(f"missing column {name!r} (the header needs {', '.join(required)})", ln, 1)
        for group in (_POSITION, _AXIS):
            if any(g in header for g in group) and not all(g in header for g in group):
                missing = next(g for g in group if g not in header)
                raise self.error(f"missing column {missing!r}: {', '.join(group)} go together", ln, 1)
        if "axis_x" in header and "x_m" not in header:
            raise self.error("axis columns need the position columns x_m, y_m, z_m", ln,
                             self.header_cols[header["axis_x"]])
        self.header = header
        self.header_line = ln

    def read_row(self, ln: int, body: str, fields: list[tuple[str, int]]) -> None:
        header = self.header
        if len(self.cols["level"]) >= MAX_MEASUREMENT_ROWS:
            raise self.error(f"more than {MAX_MEASUREMENT_ROWS:,} rows (the limit)", ln, 1)
        if len(fields) != len(header):
            col = fields[len(header)][1] if len(fields) > len(header) else len(body) + 1
            raise self.error(f"the row has {len(fields)} fields; the header has {len(header)}", ln, col)
        cell = {name: fields[k] for name, k in header.items()}
        values: dict[str, float | None] = {}
        for c in COLUMNS:
            if c.kind != "number" or c.name not in header:
                continue
            t, col = cell[c.name]
            if not t:
                if not c.empty_ok:
                    raise self.error(f"{c.name}: empty; a value is needed", ln, col)
                values[c.name] = None
            else:
                values[c.name] = _number(t, c, ln, col, self.path)
        for name in ("vehicle", "spot", "wheel"):
            t, col = cell[name]
            if len(t) > MAX_NAME_CHARS:
                raise self.error(f"{name}: longer than {MAX_NAME_CHARS} characters", ln, col)
        vname, vcol = cell["vehicle"]
        if not vname:
            raise self.error("vehicle: empty; name the vehicle measured", ln, vcol)
        if vname not in self.names_ok:
            raise self.error(f"vehicle {vname!r} is not the vehicle being calibrated "
                             f"({' or '.join(repr(n) for n in sorted(self.names_ok))})", ln, vcol)
        spot = self._spot(ln, cell, values)
        wid, wcol = cell["wheel"]
        if wid not in self.wheel_index:
            raise self.error(f"unknown wheel {wid!r} (the vehicle's wheels: {', '.join(self.wheel_ids)})", ln, wcol)
        angle = values["wheel_angle_deg"]
        f = values.get("frequency_hz")
        g = values.get("chain_gain_db")
        for key, value in (("spot", spot), ("wheel", self.wheel_index[wid]),
                           ("angle", math.nan if angle is None else math.radians(angle) % (2.0 * math.pi)),
                           ("level", values["level_dbm"]), ("freq", self.v.radio.frequency_hz if f is None else f),
                           ("gain", 0.0 if g is None else g), ("line", ln)):
            self.cols[key].append(value)

    def _spot(self, ln: int, cell: dict, values: dict) -> int:
        """The index of the row's receiver position (a file spot by name, or coordinates with a label)."""
        label, scol = cell["spot"]
        col_of = {k: cell[k][1] for k in _POSITION + _AXIS if k in cell}
        for group, what in ((_POSITION, "x_m, y_m and z_m"), (_AXIS, "axis_x, axis_y and axis_z")):
            given = [values.get(k) for k in group]
            if any(x is not None for x in given) and any(x is None for x in given):
                k = next(k for k, x in zip(group, given) if x is None)
                raise self.error(f"{k}: empty; {what} go together (all three or none)", ln, col_of[k])
        has_pos = values.get("x_m") is not None
        has_axis = values.get("axis_x") is not None
        if has_axis and not has_pos:
            raise self.error("axis_x: an antenna axis is given only with a position in x_m, y_m, z_m (a named "
                             "spot's axis comes from the vehicle file)", ln, col_of["axis_x"])
        axis = self.default_axis
        if has_axis:
            axis = np.array([values[k] for k in _AXIS], float)
            if np.linalg.norm(axis) < 1e-9:
                raise self.error("axis_x: the antenna axis must not be the zero vector", ln, col_of["axis_x"])
            axis = axis / np.linalg.norm(axis)
        fs = self.file_spots.get(label)
        if has_pos:
            pos = np.array([values[k] for k in _POSITION], float)
            label = label or f"({pos[0]:.3f}, {pos[1]:.3f}, {pos[2]:.3f})"
            fs = self.file_spots.get(label)
            if fs is not None:
                fpos = np.asarray(self.v.resolve_spot(fs), float)
                if np.linalg.norm(fpos - pos) > POSITION_TOLERANCE_M:
                    raise self.error(
                        f"spot {label!r} of the vehicle file is at ({fpos[0]:.3f}, {fpos[1]:.3f}, {fpos[2]:.3f}) m; "
                        f"this row puts it at ({pos[0]:.3f}, {pos[1]:.3f}, {pos[2]:.3f}) m, more than "
                        f"{POSITION_TOLERANCE_M * 1000:.0f} mm away: give another position another name",
                        ln, col_of["x_m"])
                if has_axis and float(np.dot(axis, self.v.spot_axis(fs))) < math.cos(math.radians(1.0)):
                    raise self.error(f"spot {label!r}: the antenna axis differs from the vehicle file's", ln,
                                     col_of["axis_x"])
        elif not label:
            raise self.error("spot: empty; give a spot of the vehicle file or x_m, y_m, z_m", ln, scol)
        elif fs is None:
            known = ", ".join(repr(s) for s in self.file_spots) or "none"
            raise self.error(f"unknown spot {label!r} (the vehicle's spots: {known}; or give its position in x_m, "
                             "y_m, z_m)", ln, scol)
        if fs is not None:
            pos, axis = np.asarray(self.v.resolve_spot(fs), float), self.v.spot_axis(fs)
        if label in self.spots:
            k, p0, a0, l0 = self.spots[label]
            if np.linalg.norm(p0 - pos) > 1e-6 or float(np.dot(a0, axis)) < 1.0 - 1e-9:
                raise self.error(f"spot {label!r} was given another position or antenna axis on line {l0}", ln,
                                 col_of.get("x_m", scol))
            return k
        if len(self.spots) >= MAX_MEASUREMENT_SPOTS:
            raise self.error(f"more than {MAX_MEASUREMENT_SPOTS} receiver positions (the limit)", ln, scol)
        self.spots[label] = (len(self.spots), pos, axis, ln)
        return len(self.spots) - 1

    def finish(self, raw: bytes, n_lines: int) -> MeasurementSet:
        path = self.path
        if self.header is None:
            raise self.error("the file is empty: expected a header line naming the columns "
                             f"({', '.join(c.name for c in COLUMNS if c.required)})", max(1, n_lines), 1)
        c = self.cols
        if not c["level"]:
            raise self.error("no measurements: the header is followed by no rows", self.header_line, 1)
        order = sorted(self.spots.items(), key=lambda kv: kv[1][0])
        ms = MeasurementSet(
            path=str(path) if path else "", sha256=sha256_hex(raw), vehicle_name=self.v.name, wheel_ids=self.wheel_ids,
            spot_names=tuple(k for k, _ in order), spot_positions=np.array([v[1] for _, v in order], float),
            spot_axes=np.array([v[2] for _, v in order], float),
            spot_in_file=tuple(k in self.file_spots for k, _ in order),
            spot=np.asarray(c["spot"], int), wheel=np.asarray(c["wheel"], int), angle_rad=np.asarray(c["angle"], float),
            level_dbm=np.asarray(c["level"], float), frequency_hz=np.asarray(c["freq"], float),
            chain_gain_db=np.asarray(c["gain"], float), line=np.asarray(c["line"], int),
        )
        fcol = self.header.get("frequency_hz")
        check_set(ms, path, self.header_cols[fcol] if fcol is not None else 1)
        return ms


def check_set(ms: MeasurementSet, path=None, freq_column: int = 1) -> None:
    """Checks over the whole set: the number of frequencies, and enough levels in every group without
    wheel angles. Raise MeasurementFileError at the first row concerned (``freq_column``: the character
    column of frequency_hz in the header)."""
    freqs = np.unique(ms.frequency_hz)
    if len(freqs) > MAX_MEASUREMENT_FREQUENCIES:
        i = int(np.nonzero(ms.frequency_hz == freqs[MAX_MEASUREMENT_FREQUENCIES])[0][0])
        raise MeasurementFileError(f"more than {MAX_MEASUREMENT_FREQUENCIES} distinct frequencies (the limit)",
                                   int(ms.line[i]), freq_column, path)
    free = np.flatnonzero(~ms.has_angle)
    if len(free):
        keys = np.stack([ms.spot[free], ms.wheel[free], np.searchsorted(freqs, ms.frequency_hz[free])], axis=1)
        groups, first, counts = np.unique(keys, axis=0, return_index=True, return_counts=True)
        small = np.flatnonzero(counts < MIN_LEVELS_WITHOUT_ANGLE)
        if len(small):
            g = small[np.argmin(free[first[small]])]  # the group that starts first in the file
            i = int(free[first[g]])
            s, w, _ = groups[g]
            raise MeasurementFileError(
                f"only {counts[g]} level{'s' if counts[g] != 1 else ''} without a wheel angle for spot "
                f"{ms.spot_names[s]!r}, wheel {ms.wheel_ids[w]} at {ms.frequency_hz[i] / 1e6:g} MHz; at least "
                f"{MIN_LEVELS_WITHOUT_ANGLE} are needed to compare their percentiles (or give the wheel angles)",
                int(ms.line[i]), 1, path)


def load_measurements(path: str | os.PathLike, vehicle: Vehicle,
                      vehicle_file: str | os.PathLike | None = None) -> MeasurementSet:
    """Read and check a measurement file (a regular file of at most MAX_MEASUREMENT_BYTES); raise
    MeasurementFileError naming the file, line and column."""
    try:
        raw = read_regular_file(path, MAX_MEASUREMENT_BYTES)
    except InputFileError as e:
        raise MeasurementFileError(e.problem, 0, 0, path) from None
    except OSError as e:
        raise MeasurementFileError(f"cannot read the file: {e.strerror or e}", 0, 0, path) from None
    return parse_measurements(raw, vehicle, path, vehicle_file)


def measurements_from_records(vehicle: Vehicle, spots, wheels, angles_deg, levels_dbm, frequency_hz=None,
                              chain_gain_db=None, label: str = "records") -> MeasurementSet:
    """A measurement set from arrays built in code (e.g. stored full-wave levels used as measurements):
    ``spots`` names of the vehicle's spots, ``wheels`` wheel ids, ``angles_deg`` (nan: not known),
    ``levels_dbm``; optional ``frequency_hz`` and ``chain_gain_db`` per row. Checked like a file
    (MeasurementFileError naming the row as its line)."""
    n = len(levels_dbm)
    freq = np.full(n, vehicle.radio.frequency_hz) if frequency_hz is None else np.asarray(frequency_hz, float)
    gain = np.zeros(n) if chain_gain_db is None else np.asarray(chain_gain_db, float)
    lines = ["vehicle,spot,wheel,wheel_angle_deg,level_dbm,frequency_hz,chain_gain_db"]
    for s, w, a, lv, f, g in zip(spots, wheels, angles_deg, levels_dbm, freq, gain):
        quoted = '"' + str(s).replace('"', '""') + '"'
        name = '"' + vehicle.name.replace('"', '""') + '"'
        a_text = "" if a is None or not np.isfinite(a) else repr(float(a))
        lines.append(f"{name},{quoted},{w},{a_text},{float(lv)!r},{float(f)!r},{float(g)!r}")
    return parse_measurements("\n".join(lines) + "\n", vehicle, label)


def measurement_schema() -> dict:
    """JSON Schema of one row of the measurement file (its columns as an object; empty cells as null).
    The rules across columns (x_m, y_m, z_m together; a spot name or a position) are checked by the
    reader and stated in docs/measurement-format.md."""
    props = {}
    for c in COLUMNS:
        if c.kind == "text":
            p: dict = {"type": ["string", "null"] if c.empty_ok else "string", "maxLength": MAX_NAME_CHARS}
            if not c.empty_ok:
                p["minLength"] = 1
        else:
            p = {"type": ["number", "null"] if c.empty_ok else "number", "minimum": c.lo, "maximum": c.hi}
        p["description"] = c.description + (f" ({c.unit})" if c.unit else "")
        props[c.name] = p
    return {
        "$schema": "https://json-schema.org/draft/2020-12/schema",
        "title": f"Wheelreach measurement file, format {FORMAT_TAG}: one row",
        "description": "One CSV row of a measurement file as an object keyed by the header's column names; an "
                       "empty cell is null. Comment lines start with '#'; '# format: " + FORMAT_TAG + "' is optional.",
        "type": "object",
        "properties": props,
        "required": [c.name for c in COLUMNS if c.required],
        "additionalProperties": False,
    }


__all__ = ["COLUMNS", "FORMAT_TAG", "MeasurementFileError", "MeasurementSet", "load_measurements",
           "measurement_schema", "measurements_from_records", "parse_measurements"]

"""The setup record every output carries: what produced the numbers, enough to produce them again.

One record, built here and nowhere else, goes into the rank JSON, the heatmap CSV header and the
report's JSON, CSV and PDF:

- ``program``: name, version, and the git commit and dirty flag when run from a checkout (absent
  otherwise); the Python and numpy versions;
- ``command_line``: the words of the command (None from the desktop program);
- ``vehicle_file``: the path as given, its absolute path and the SHA-256 of the bytes read (for an
  unsaved document: the SHA-256 of its canonical JSON, and no path);
- ``overrides``: what the command changed on top of the file (angles per turn, road reflection,
  wheel model, spots added with ``--spot``, the calibration given with ``--calibration``: its file,
  hash and the values applied): :func:`apply_overrides` applies them, the one place where this is
  done (the calibration through core.calibration.apply_calibration);
- ``data_tables``: SHA-256 of every shipped data table (``core/data/*.npz``, ``*.json``);
- ``wheel_model``: requested and used (``Scene.wheel_model_label``), the tables used per wheel and
  the provenance of the table set;
- ``score_method``: ``Scene.score_method`` (statistic and angle method of the worst case);
- ``radio``: the effective radio setup in the file's own format, and ``sensor_eirp``: the peak
  EIRP and how it was built;
- ``spots``: each spot's resolved position and receiver antenna axis (unit vector, and whether it
  is the spot's own or the radio default).

:func:`vehicle_from_setup` reads the recorded file back (refusing it when its hash differs) and
applies the recorded overrides; :func:`setup_differences` lists what differs between the record
and the running program (version, commit, data tables).
"""

from __future__ import annotations

import functools
import hashlib
import json
import os
import platform
import subprocess
from importlib.metadata import PackageNotFoundError, version
from pathlib import Path

import numpy as np

from core.propagation import mismatch_loss_db
from core.vehicle import (
    Vehicle,
    VehicleFileError,
    parse_vehicle,
    read_vehicle_bytes,
    vehicle_from_dict,
    vehicle_to_dict,
    vehicle_to_json,
)

SETUP_FORMAT = "wheelreach-setup/1"
PACKAGE_ROOT = Path(__file__).resolve().parent.parent
DATA_DIR = Path(__file__).resolve().parent / "data"

__all__ = [
    "SETUP_FORMAT",
    "apply_overrides",
    "csv_preamble",
    "data_table_hashes",
    "load_with_source",
    "no_overrides",
    "program_info",
    "program_version",
    "read_csv_preamble",
    "setup_differences",
    "setup_record",
    "sha256_hex",
    "vehicle_from_setup",
    "vehicle_source",
]


def sha256_hex(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def program_version() -> str:
    """The installed package version ("unknown (not installed)" from a tree that was never installed)."""
    try:
        return version("wheelreach")
    except PackageNotFoundError:
        return "unknown (not installed)"


@functools.lru_cache(maxsize=1)
def _git_state() -> tuple[str, bool] | None:
    """(commit, dirty) when the running code is a git checkout's top level, else None (a regular install)."""
    if not (PACKAGE_ROOT / ".git").exists():
        return None

    def git(*args: str) -> str:
        return subprocess.run(["git", "-C", str(PACKAGE_ROOT), *args], capture_output=True, text=True,
                              timeout=10, check=True).stdout.strip()

    try:
        top = Path(git("rev-parse", "--show-toplevel")).resolve()
        if top != PACKAGE_ROOT:
            return None
        commit = git("rev-parse", "HEAD")
        dirty = bool(git("status", "--porcelain", "--untracked-files=no"))
    except (OSError, subprocess.SubprocessError):
        return None
    return commit, dirty


def program_info() -> dict:
    """Name and version; git commit and dirty flag only when run from a checkout; Python and numpy versions."""
    out = {"name": "wheelreach", "version": program_version()}
    git = _git_state()
    if git is not None:
        out["git_commit"], out["git_dirty"] = git
    out["python"] = platform.python_version()
    out["numpy"] = np.__version__
    return out


@functools.lru_cache(maxsize=8)
def _file_hash(path: str, size: int, mtime_ns: int) -> str:
    with open(path, "rb") as f:
        return hashlib.file_digest(f, "sha256").hexdigest()


def data_table_hashes() -> dict[str, str]:
    """SHA-256 of each shipped data table, keyed by its path relative to the package (``core/data/NAME``)."""
    out = {}
    for p in sorted(DATA_DIR.iterdir()):
        if p.suffix in (".npz", ".json") and p.is_file():
            st = p.stat()
            out[f"core/data/{p.name}"] = _file_hash(str(p), st.st_size, st.st_mtime_ns)
    return out


# ----- the vehicle file ---------------------------------------------------------------------------
def vehicle_source(path: str | os.PathLike | None, raw: bytes) -> dict:
    """The ``vehicle_file`` part of a record: path as given, absolute path, SHA-256 and what it covers."""
    if path is None:
        return {"path": None, "absolute_path": None, "sha256": sha256_hex(raw),
                "hash_of": "canonical JSON of the unsaved document"}
    return {"path": str(path), "absolute_path": os.path.abspath(path), "sha256": sha256_hex(raw),
            "hash_of": "input file"}


def load_with_source(path_or_vehicle) -> tuple[Vehicle, dict]:
    """(vehicle, ``vehicle_file`` record) from a file path (read once: the hash covers the bytes parsed) or from
    an in-memory Vehicle (hash of its canonical JSON). A bad file raises VehicleFileError."""
    if isinstance(path_or_vehicle, Vehicle):
        return path_or_vehicle, vehicle_source(None, vehicle_to_json(path_or_vehicle).encode("utf-8"))
    raw = read_vehicle_bytes(path_or_vehicle)
    return parse_vehicle(raw, path_or_vehicle), vehicle_source(path_or_vehicle, raw)


# ----- overrides ----------------------------------------------------------------------------------
def no_overrides() -> dict:
    return {"angles_per_turn": None, "ground_reflection": None, "wheel_model": None, "extra_spots": [],
            "calibration": None}


def apply_overrides(v: Vehicle, overrides: dict | None, path: str | os.PathLike | None = None) -> Vehicle:
    """The vehicle with a command's overrides applied (None or missing keys: the file's values).

    ``overrides``: ``angles_per_turn`` (int), ``ground_reflection`` (bool), ``wheel_model`` (name),
    ``extra_spots`` (spot objects in the file format, appended to the file's spots), ``calibration``
    (the record of core.calibration.calibration_override: applied last, by
    core.calibration.apply_calibration). The result is validated like a file (VehicleFileError naming
    ``path`` and the field, e.g. an added spot whose name is already used, or an angle count out of
    range; core.calibration.CalibrationFileError naming the calibration file when its values do not fit).
    """
    o = {**no_overrides(), **(overrides or {})}
    update = {k: o[k] for k in ("angles_per_turn", "ground_reflection", "wheel_model") if o[k] is not None}
    if update or o["extra_spots"]:
        d = vehicle_to_dict(v)
        d["radio"].update(update)
        d["spots"] = list(d.get("spots", [])) + [dict(s) for s in o["extra_spots"]]
        v = vehicle_from_dict(d, path)
    if o["calibration"]:
        from core.calibration import apply_calibration

        v = apply_calibration(v, o["calibration"], o["calibration"].get("file"))
    return v


# ----- the record -----------------------------------------------------------------------------
def _r(x, nd=6) -> float:
    return round(float(x), nd)


def _sensor_eirp(v: Vehicle) -> dict:
    s = v.radio.sensor
    if s.eirp_dbm is not None:
        return {"peak_dbm": _r(s.eirp_dbm), "built_from": "eirp_dbm given in the file (peak EIRP)"}
    ml = float(mismatch_loss_db(s.return_loss_db))
    return {"peak_dbm": _r(v.radio.sensor_eirp_dbm),
            "built_from": "conducted_power_dbm + antenna_gain_dbi - mismatch loss of return_loss_db",
            "conducted_power_dbm": s.conducted_power_dbm, "antenna_gain_dbi": s.antenna_gain_dbi,
            "return_loss_db": s.return_loss_db, "mismatch_loss_db": _r(ml)}


def _wheel_model(v: Vehicle, scene) -> dict:
    out = {"requested": v.radio.wheel_model, "used": scene.wheel_model_label}
    tables = getattr(scene, "wheel_tables", ())
    if tables:
        out["tables_per_wheel"] = {w.id: t.provenance for w, t in zip(scene.wheels, tables)}
        from core.wheel_patterns import load_table_set

        prov = load_table_set().provenance
        out["table_set"] = {k: prov[k] for k in ("description", "solver", "model_version", "command", "date_utc")
                            if k in prov}
    return out


def _spots(v: Vehicle) -> list[dict]:
    out = []
    for s in v.spots:
        out.append({"name": s.name, "position_m": [_r(c, 4) for c in v.resolve_spot(s)],
                    "receiver_axis": [_r(a) for a in v.spot_axis(s)],
                    "axis_from": "spot" if s.axis is not None else "radio default"})
    return out


def _body_loss_path() -> str:
    from core import kernels

    return kernels.status()


def setup_record(v: Vehicle, scene, source: dict, command_line: list[str] | None = None,
                 overrides: dict | None = None, extra: dict | None = None) -> dict:
    """The setup record of an output (module notes), JSON-ready.

    Parameters
    ----------
    v : the vehicle as computed (the file's vehicle with the overrides applied)
    scene : the ``core.scoring.Scene`` the numbers came from
    source : the ``vehicle_file`` record (:func:`vehicle_source` / :func:`load_with_source`)
    command_line : the command's words, or None (desktop program)
    overrides : the overrides applied to the file (:func:`apply_overrides`)
    extra : output-specific settings (e.g. the heatmap grid), stored under ``output``
    """
    rec = {
        "format": SETUP_FORMAT,
        "program": program_info(),
        "command_line": list(command_line) if command_line is not None else None,
        "vehicle_file": dict(source),
        "overrides": {**no_overrides(), **(overrides or {})},
        "data_tables": data_table_hashes(),
        "wheel_model": _wheel_model(v, scene),
        "score_method": scene.score_method,
        # which code computed the body losses (core.kernels; both paths agree within 0.01 dB, tests/test_kernels.py)
        "body_loss_path": _body_loss_path(),
        "radio": {**vehicle_to_dict(v)["radio"], "ground_reflection": bool(scene.ground_reflection)},
        "sensor_eirp": _sensor_eirp(v),
        "spots": _spots(v),
    }
    if extra:
        rec["output"] = dict(extra)
    return rec


def vehicle_from_setup(setup: dict, path: str | os.PathLike | None = None) -> Vehicle:
    """Read the vehicle file named by a setup record and apply its overrides.

    ``path`` replaces the recorded file name (e.g. a copy elsewhere). Raises VehicleFileError when
    the record names no file (an unsaved document) or the file's SHA-256 differs from the record.
    """
    src = setup["vehicle_file"]
    p = path or src.get("absolute_path") or src.get("path")
    if not p:
        raise VehicleFileError("the setup was recorded from an unsaved document; there is no file to read",
                               "vehicle_file")
    raw = read_vehicle_bytes(p)
    if sha256_hex(raw) != src["sha256"]:
        raise VehicleFileError("the file differs from the one recorded (SHA-256 does not match)", "", p)
    return apply_overrides(parse_vehicle(raw, p), setup.get("overrides"))


def setup_differences(setup: dict) -> list[str]:
    """What differs between a record and the running program: version, git commit, data-table hashes."""
    diffs = []
    now, then = program_info(), setup.get("program", {})
    for key in ("version", "git_commit"):
        if then.get(key) != now.get(key):
            diffs.append(f"program {key}: recorded {then.get(key)!r}, running {now.get(key)!r}")
    tables_now, tables_then = data_table_hashes(), setup.get("data_tables", {})
    for name in sorted(set(tables_now) | set(tables_then)):
        if tables_now.get(name) != tables_then.get(name):
            diffs.append(f"data table {name}: SHA-256 differs from the record")
    return diffs


# ----- CSV files ----------------------------------------------------------------------------------
CSV_WARNING = "# "
CSV_RADIO_LIMIT = "# radio_limit: "
CSV_SETUP = "# setup: "


def csv_preamble(check, setup: dict) -> str:
    """The comment lines that open every CSV output, each ending in a newline: the radio-limit warning first
    when the EIRP is over the ceiling, then ``# radio_limit: {JSON}`` and ``# setup: {JSON}`` (one line each)."""
    lines = []
    if check.over_ceiling:
        lines.append(CSV_WARNING + check.warning())
    lines.append(CSV_RADIO_LIMIT + json.dumps(check.to_dict(), separators=(",", ":")))
    lines.append(CSV_SETUP + json.dumps(setup, separators=(",", ":")))
    return "".join(line + "\n" for line in lines)


def read_csv_preamble(text: str) -> tuple[dict, dict, str]:
    """(radio_limit, setup, the CSV without its comment lines) of a CSV written with :func:`csv_preamble`."""
    radio_limit, setup, rest = {}, {}, []
    for line in text.splitlines(keepends=True):
        if line.startswith(CSV_RADIO_LIMIT):
            radio_limit = json.loads(line[len(CSV_RADIO_LIMIT):])
        elif line.startswith(CSV_SETUP):
            setup = json.loads(line[len(CSV_SETUP):])
        elif not line.startswith("#"):
            rest.append(line)
    return radio_limit, setup, "".join(rest)

"""Calibrations: the model parameters fitted to measurements, their file, and applying them to a vehicle.

The parameters that carry the most uncertainty (:data:`PARAMETERS`) are fitted by
core.calibration_fit; the result is a small JSON file (``wheelreach-calibration/1``,
docs/calibration-format.md, schema docs/calibration-format.json) that ``rank``, ``heatmap``,
``report`` and ``compare`` accept with ``--calibration``. :func:`apply_calibration` is the one
place where a calibration changes a vehicle: material losses become material entries of the
vehicle (``Vehicle.materials``), the EIRP offset is added to the sensor's EIRP (or to its
conducted power when the EIRP is built from it), the null floor replaces the radio's. Only the
parameters the measurements depend on are applied (``applied`` in the file,
core.calibration_fit); the others keep the vehicle's own values. The values applied are recorded in every output's setup
(core.provenance, ``overrides.calibration``), so a recorded output can be produced again.

A parameter is one entry of :data:`PARAMETERS`; core.link_terms evaluates the present ones fast (the
rays and the cabin's diffuse field, core.cavity, for any material losses), and core.calibration_fit
evaluates any other exactly by building the vehicle with the value (slower, never wrong). The cabin
contents' absorption (``Body.cabin_absorption_m2``, which sets the cabin's diffuse level, core.cavity) is
fitted in dB relative to 1 m^2 (dBsm): a cross-section spans orders of magnitude and its prior is a factor.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Annotated, Literal

from pydantic import BaseModel, ConfigDict, Field, ValidationError

from core.files import InputFileError, atomic_write_text, read_regular_file
from core.materials import material_loss_db
from core.vehicle import Vehicle, VehicleFileError, vehicle_from_dict, vehicle_to_dict

FORMAT_NAME = "wheelreach-calibration"
FORMAT_VERSION = 1
FORMAT_TAG = f"{FORMAT_NAME}/{FORMAT_VERSION}"
#: largest calibration file read, bytes
MAX_CALIBRATION_BYTES = 2_000_000


# ----- the parameters ---------------------------------------------------------------------------
@dataclass(frozen=True)
class Parameter:
    """A fitted model parameter, dB.

    ``kind``: "material" (the crossing loss of ``material``), "eirp_offset" (added to the sensor's
    EIRP), "null_floor" (the radio's null floor) or "contents" (the cabin contents' absorption
    cross-section in dB relative to 1 m^2, dBsm, :func:`contents_db`). ``prior_width`` is the standard deviation of the
    prior around the vehicle's own value (the documented default unless its file overrides it);
    ``lower``, ``upper`` bound the fit (:meth:`bounds`). ``why`` says where the prior and its width come
    from. ``hull_panel``: a material of the body's panels, whose loss also decides whether the panel is an
    opening that feeds the cabin (core.cavity.OPENING_LOSS_DB).
    """

    key: str
    label: str
    kind: str
    prior_width_db: float
    lower: float
    upper: float
    why: str
    material: str = ""
    hull_panel: bool = False

    def prior(self, v: Vehicle) -> float:
        """The vehicle's own value at its frequency, dB: the prior's centre."""
        if self.kind == "material":
            if self.material in v.materials:
                return float(v.materials[self.material].loss_db)
            return float(material_loss_db(self.material, v.radio.frequency_hz))
        if self.kind == "eirp_offset":
            return 0.0
        if self.kind == "null_floor":
            return float(v.radio.null_floor_db)
        if self.kind == "contents":
            return contents_db(v.body.cabin_absorption_m2)
        raise ValueError(f"unknown parameter kind {self.kind!r}")

    def bounds(self, v: Vehicle) -> tuple[float, float]:
        """The fit's bounds for vehicle ``v``, dB: ``lower``..``upper`` widened to hold the prior; for a hull
        panel's material, also kept on the prior's side of the opening threshold (core.cavity.OPENING_LOSS_DB:
        under it a panel is an opening that feeds the cabin, at or over it a conducting wall). Which panels
        are openings is the model's structure, not a number to fit: across the threshold the level jumps
        (a metal shell under 10 dB would feed the cabin over its whole area), which a least-squares fit
        cannot cross meaningfully."""
        from core.cavity import OPENING_LOSS_DB

        prior = self.prior(v)
        lo, hi = min(self.lower, prior), max(self.upper, prior)
        if self.hull_panel:
            if prior < OPENING_LOSS_DB:
                hi = min(hi, OPENING_LOSS_DB - OPENING_MARGIN_DB)
            else:
                lo = max(lo, OPENING_LOSS_DB)
        return lo, hi


#: the smallest contents' absorption a calibration works with, m^2 (an empty cabin's 0 m^2 has no dB value)
MIN_CONTENTS_M2 = 0.01


def contents_db(area_m2: float) -> float:
    """A contents' absorption cross-section (m^2) in dB relative to 1 m^2, floored at MIN_CONTENTS_M2."""
    return 10.0 * math.log10(max(float(area_m2), MIN_CONTENTS_M2))


def contents_m2(value_db: float) -> float:
    """The cross-section (m^2) of a value in dB relative to 1 m^2 (:func:`contents_db`)."""
    return 10.0 ** (float(value_db) / 10.0)


#: a hull panel's fitted loss stays this far under the opening threshold when its prior is under it, dB
OPENING_MARGIN_DB = 0.01


#: The fitted parameters, in the order of every table and file. The prior widths are engineering
#: defaults of this program (no published spread exists for them), stated with their reasons.
PARAMETERS: tuple[Parameter, ...] = (
    Parameter("metal_loss_db", "metal crossing loss", "material", 10.0, 0.0, 60.0,
              "built-in 20 dB is an engineering default (leakage through seams and gaps); width 10 dB, twice the "
              "5 dB spread of whole-car penetration loss in 3GPP TR 38.901 sec. 7.4.3.2 (engineering default)",
              material="metal", hull_panel=True),
    Parameter("glass_loss_db", "glass crossing loss", "material", 4.0, 0.0, 30.0,
              "built-in 3GPP TR 38.901 Table 7.4.3-1 standard glass; width 4 dB for heated or coated glass and "
              "frames (engineering default)", material="glass", hull_panel=True),
    Parameter("plastic_loss_db", "plastic crossing loss", "material", 3.0, 0.0, 20.0,
              "built-in slab loss of a typical polymer (under 0.1 dB); width 3 dB for paint, brackets and parts "
              "behind the panel (engineering default)", material="plastic", hull_panel=True),
    Parameter("tread_loss_db", "tire tread loss", "material", 4.0, 0.0, 40.0,
              "built-in 10 dB engineering default, typical range 8-15 dB; used by the knife-edge wheel only (the "
              "installed wheel pattern holds the steel belt itself)", material="tire_tread"),
    Parameter("sensor_eirp_offset_db", "sensor EIRP offset", "eirp_offset", 6.0, -30.0, 30.0,
              "added to the file's sensor EIRP; width 6 dB for the spread between the data-sheet and a fitted "
              "sensor's EIRP (engineering default)"),
    Parameter("null_floor_db", "null floor", "null_floor", 10.0, -60.0, -6.0,
              "the radio's null floor, -30 dB engineering default (cross-polar discrimination, scattering); width "
              "10 dB (engineering default)"),
    Parameter("cabin_absorption_db", "contents absorption (dBsm)", "contents", 6.0, -20.0, 13.0,
              "the vehicle's cabin_absorption_m2 (0.5 m^2 = -3 dB re 1 m^2 engineering default: two seated occupants "
              "with their seats, core.cavity.DEFAULT_CONTENTS_M2); width 6 dB, a factor 4 either way, the range the "
              "sensitivity analysis spans (engineering default); bounds 0.01-20 m^2, the vehicle file's upper limit"),
)
PARAMETER_KEYS: tuple[str, ...] = tuple(p.key for p in PARAMETERS)
_BY_KEY = {p.key: p for p in PARAMETERS}


def parameter(key: str) -> Parameter:
    try:
        return _BY_KEY[key]
    except KeyError:
        raise KeyError(f"unknown parameter {key!r} (known: {', '.join(PARAMETER_KEYS)})") from None


def apply_values(v: Vehicle, values: Mapping[str, float], note: str = "calibrated",
                 path: str | os.PathLike | None = None,
                 standard_errors: Mapping[str, float] | None = None) -> Vehicle:
    """The vehicle with parameter values (key -> dB) applied and validated like a file (VehicleFileError
    naming ``path`` and the field when a value takes the vehicle out of its allowed ranges).

    Material losses become entries of ``Vehicle.materials`` whose description starts with ``note``
    (and the standard error); the EIRP offset is added to ``radio.sensor.eirp_dbm``, or to
    ``conducted_power_dbm`` when the EIRP is built from it; the null floor replaces
    ``radio.null_floor_db``; the contents' absorption (dB re 1 m^2) sets ``body.cabin_absorption_m2``.
    Values are applied to 0.01 dB."""
    if not values:
        return v
    d = vehicle_to_dict(v)
    materials = dict(d.get("materials", {}))
    radio = d["radio"]
    for key, value in values.items():
        p = parameter(key)
        value = float(value)
        if p.kind == "material":
            se = (standard_errors or {}).get(key)
            text = f"{note}: {value:.2f} dB" + (f" +- {se:.2f} dB" if se is not None else "")
            materials[p.material] = {"loss_db": round(value, 2), "description": text[:200]}
        elif p.kind == "eirp_offset":
            sensor = dict(radio["sensor"])
            field = "eirp_dbm" if sensor.get("eirp_dbm") is not None else "conducted_power_dbm"
            sensor[field] = round(sensor[field] + round(value, 2), 6)
            radio["sensor"] = sensor
        elif p.kind == "null_floor":
            radio["null_floor_db"] = round(value, 2)
        elif p.kind == "contents":
            d["body"] = dict(d["body"], cabin_absorption_m2=contents_m2(round(value, 2)))
    d["materials"] = materials
    return vehicle_from_dict(d, path)


# ----- the calibration file ---------------------------------------------------------------------
class _Strict(BaseModel):
    model_config = ConfigDict(frozen=True, extra="forbid", allow_inf_nan=False)


Db = Annotated[float, Field(ge=-1000.0, le=1000.0)]


class FittedParameter(_Strict):
    """One fitted parameter: prior (centre and width), fitted value and standard error, dB; whether the
    measurements determine it alone (``informed``), how much they depend on it (``sensitivity``, their
    information on it alone over the prior's), whether it is applied, and its strongest correlation."""

    key: Literal[PARAMETER_KEYS]  # type: ignore[valid-type]
    label: str
    prior_db: Db
    prior_width_db: Annotated[float, Field(gt=0.0, le=1000.0)]
    value_db: Db
    standard_error_db: Annotated[float, Field(ge=0.0, le=1000.0)]
    informed: bool
    sensitivity: Annotated[float, Field(ge=0.0)]
    applied: bool
    correlated_with: Literal[PARAMETER_KEYS] | None = None  # type: ignore[valid-type]
    correlation: Annotated[float, Field(ge=-1.0001, le=1.0001)] | None = None
    lower_db: Db
    upper_db: Db

    def at_bound(self) -> str:
        """"lower" or "upper" when the fitted value sits on that bound of the fit, else ""."""
        tol = 1e-3 * max(self.upper_db - self.lower_db, 1e-9)
        if self.value_db - self.lower_db <= tol:
            return "lower"
        if self.upper_db - self.value_db <= tol:
            return "upper"
        return ""

    def status(self, labels: Mapping[str, str] | None = None) -> str:
        """The parameter's state in words, for tables."""
        if not self.applied:
            return "not informed by the measurements: the vehicle's value is kept"
        parts = ["applied"]
        if self.correlated_with:
            other = (labels or {}).get(self.correlated_with, self.correlated_with)
            parts.append(f"correlated with {other} (r = {self.correlation:+.2f}): the measurements fix their "
                         "combination" + ("" if self.informed else ", not each alone"))
        elif not self.informed:
            parts.append("weakly determined (standard error near the prior width)")
        bound = self.at_bound()
        if bound:
            parts.append(f"at its {bound} bound: the measurements ask for more than the model's range")
        return "; ".join(parts)


class HoldOutRecord(_Strict):
    """k-fold hold-out over spots: prediction RMS of the held-out spots, uncalibrated and calibrated, dB."""

    folds: Annotated[int, Field(ge=2)]
    items: Annotated[int, Field(ge=1)]
    rms_before_db: Annotated[float, Field(ge=0.0)]
    rms_after_db: Annotated[float, Field(ge=0.0)]
    fold_spots: list[list[str]]


class FitRecord(_Strict):
    """How the fit went: residual RMS before and after (dB), the noise scale found, the method."""

    items: Annotated[int, Field(ge=1)]
    items_with_angle: Annotated[int, Field(ge=0)]
    percentile_items: Annotated[int, Field(ge=0)]
    rms_before_db: Annotated[float, Field(ge=0.0)]
    rms_after_db: Annotated[float, Field(ge=0.0)]
    noise_db: Annotated[float, Field(gt=0.0)]
    method: str
    function_evaluations: Annotated[int, Field(ge=0)]
    message: str


class Calibration(_Strict):
    """A calibration file (format ``wheelreach-calibration/1``): what was measured, what was fitted."""

    format: str = FORMAT_TAG
    created: str
    vehicle: dict
    measurements: dict
    model: dict
    parameters: list[FittedParameter]
    fit: FitRecord
    holdout: HoldOutRecord | None = None
    setup: dict = {}
    caution: str = ""

    def applied_values(self) -> dict[str, float]:
        """The values applied to a vehicle: the parameters the measurements depend on, key -> dB."""
        return {p.key: p.value_db for p in self.parameters if p.applied}

    def labels(self) -> dict[str, str]:
        return {p.key: p.label for p in self.parameters}

    def standard_errors(self) -> dict[str, float]:
        return {p.key: p.standard_error_db for p in self.parameters}

    @property
    def measurement_count(self) -> int:
        return int(self.measurements.get("rows", 0))

    def note(self) -> str:
        """One line for reports: "calibrated from N measurements, hold-out RMS x dB (...)"."""
        text = f"calibrated from {self.measurement_count:,} measurements"
        h = self.holdout
        if h is not None:
            text += (f", hold-out RMS {h.rms_after_db:.1f} dB (uncalibrated {h.rms_before_db:.1f} dB; {h.folds}-fold "
                     "over spots)")
        else:
            text += f", residual RMS {self.fit.rms_after_db:.1f} dB (no hold-out: fewer than two spots)"
        return text

    def values_text(self) -> str:
        """The applied values, e.g. "metal crossing loss 23.1 +- 0.4 dB; ..." ("none" when none was applied)."""
        parts = [f"{p.label} {p.value_db:.1f} +- {p.standard_error_db:.1f} dB" for p in self.parameters if p.applied]
        return "; ".join(parts) or "none (the measurements depend on no parameter)"


class CalibrationFileError(VehicleFileError):
    """A calibration file is invalid or cannot be applied; the message names the file and field."""


def calibration_to_json(cal: Calibration) -> str:
    return json.dumps(cal.model_dump(mode="json"), indent=1) + "\n"


def save_calibration(cal: Calibration, path: str | os.PathLike) -> None:
    """Write the calibration atomically (core.files)."""
    atomic_write_text(path, calibration_to_json(cal))


def parse_calibration(text: str | bytes, path: str | os.PathLike | None = None) -> Calibration:
    """Parse and validate a calibration document; raise CalibrationFileError (never another error)."""
    try:
        data = json.loads(text)
    except (json.JSONDecodeError, UnicodeDecodeError, RecursionError, ValueError) as e:
        raise CalibrationFileError(f"not readable as JSON: {e}", "", path) from None
    if not isinstance(data, dict):
        raise CalibrationFileError("the document must be a JSON object", "", path)
    fmt = data.get("format")
    if fmt != FORMAT_TAG:
        what = "version is not readable by this program" if isinstance(fmt, str) and fmt.startswith(FORMAT_NAME) \
            else "is not a Wheelreach calibration"
        raise CalibrationFileError(f"{fmt!r} {what} (expected {FORMAT_TAG!r})", "format", path)
    try:
        cal = Calibration.model_validate(data)
    except ValidationError as e:
        err = e.errors()[0]
        field = ".".join(str(p) if not isinstance(p, int) else f"[{p}]" for p in err["loc"]).replace(".[", "[")
        msg = {"missing": "required field is missing", "extra_forbidden": "unknown field"}.get(err["type"], err["msg"])
        raise CalibrationFileError(msg, field, path) from None
    keys = [p.key for p in cal.parameters]
    if len(set(keys)) != len(keys):
        raise CalibrationFileError("a parameter appears twice", "parameters", path)
    for i, p in enumerate(cal.parameters):
        if p.applied and not p.lower_db <= p.value_db <= p.upper_db:
            raise CalibrationFileError(f"{p.value_db:g} dB lies outside its bounds {p.lower_db:g}..{p.upper_db:g} dB",
                                       f"parameters[{i}].value_db", path)
    return cal


def load_calibration(path: str | os.PathLike) -> Calibration:
    """Read a calibration file (a regular file of at most MAX_CALIBRATION_BYTES); CalibrationFileError on any problem."""
    return calibration_record(path)[0]


def calibration_override(cal: Calibration, path: str | os.PathLike | None, sha256: str = "") -> dict:
    """The ``overrides.calibration`` record of an output's setup: the file, its hash, the values applied
    (re-applied by core.provenance.apply_overrides) and the one-line note."""
    return {"file": str(path) if path else None, "sha256": sha256, "values": cal.applied_values(),
            "standard_errors": {k: v for k, v in cal.standard_errors().items() if k in cal.applied_values()},
            "note": cal.note(), "measured_vehicle": cal.vehicle.get("name"),
            "frequencies_hz": list(cal.model.get("frequencies_hz", [])), "wheel_model": cal.model.get("wheel_model")}


#: a body within this share of a calibrated frequency counts as the same band
SAME_BAND_SHARE = 0.03


def calibration_warnings(v: Vehicle, record: Mapping) -> list[str]:
    """Why a calibration (its ``overrides.calibration`` record) may not carry over to vehicle ``v``: fitted at
    another frequency, or with the other wheel model. Empty when neither."""
    out = []
    f = v.radio.frequency_hz
    freqs = [float(x) for x in record.get("frequencies_hz") or []]
    if freqs and not any(abs(f - x) <= SAME_BAND_SHARE * x for x in freqs):
        out.append(f"the calibration was fitted at {', '.join(f'{x / 1e6:.2f}' for x in freqs)} MHz and "
                   f"'{v.name}' runs at {f / 1e6:.2f} MHz: the fitted losses and EIRP offset may not carry over")
    label = record.get("wheel_model") or ""
    if label:
        fitted = "installed_pattern" if label.startswith("installed pattern") else "knife_edge"
        if fitted != v.radio.wheel_model:
            out.append(f"the calibration was fitted with the {fitted.replace('_', ' ')} wheel model and '{v.name}' "
                       f"uses the {v.radio.wheel_model.replace('_', ' ')} one")
    return out


def calibration_record(path: str | os.PathLike) -> tuple[Calibration, dict]:
    """Read a calibration file once: (calibration, its ``overrides.calibration`` record with the file's
    SHA-256); CalibrationFileError on any problem."""
    try:
        raw = read_regular_file(path, MAX_CALIBRATION_BYTES)
    except InputFileError as e:
        raise CalibrationFileError(e.problem, "", path) from None
    except OSError as e:
        raise CalibrationFileError(f"cannot read the file: {e.strerror or e}", "", path) from None
    cal = parse_calibration(raw, path)
    return cal, calibration_override(cal, path, hashlib.sha256(raw).hexdigest())


def apply_calibration(v: Vehicle, cal: Calibration | Mapping, path: str | os.PathLike | None = None) -> Vehicle:
    """The vehicle with a calibration applied: the one place where this is done.

    ``cal``: a :class:`Calibration`, or the ``overrides.calibration`` record of a setup
    (:func:`calibration_override`). A value that takes the vehicle out of its allowed ranges raises
    CalibrationFileError naming the calibration file and the field."""
    if isinstance(cal, Calibration):
        values, errors, note = cal.applied_values(), cal.standard_errors(), cal.note()
    else:
        values, errors, note = dict(cal.get("values", {})), dict(cal.get("standard_errors", {})), cal.get("note", "")
    try:
        return apply_values(v, values, note or "calibrated", path, errors)
    except VehicleFileError as e:
        raise CalibrationFileError(f"applying the calibration: {e.problem}", e.field, path) from None


def calibration_schema() -> dict:
    """JSON Schema of the calibration file, generated from the model."""
    schema = Calibration.model_json_schema()
    schema["$schema"] = "https://json-schema.org/draft/2020-12/schema"
    schema["title"] = "Wheelreach calibration file, format " + FORMAT_TAG
    return schema


__all__ = [
    "FORMAT_TAG",
    "PARAMETERS",
    "PARAMETER_KEYS",
    "Calibration",
    "CalibrationFileError",
    "FitRecord",
    "FittedParameter",
    "HoldOutRecord",
    "Parameter",
    "apply_calibration",
    "apply_values",
    "calibration_override",
    "calibration_record",
    "calibration_schema",
    "calibration_warnings",
    "contents_db",
    "contents_m2",
    "load_calibration",
    "parameter",
    "parse_calibration",
    "save_calibration",
]

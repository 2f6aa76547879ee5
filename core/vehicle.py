"""The vehicle file: data model, validation with located messages, load and atomic save.

One JSON file describes one body style. Coordinates follow ISO 8855 vehicle axes
(x forward, y left, z up; origin on the ground below the midpoint of the front axle);
every length is in metres, frequencies in Hz, levels in dBm, gains and losses in dB,
times in s, speeds in m/s. The format reference is ``docs/vehicle-format.md``; the JSON
Schema generated from this module is ``docs/vehicle-format.json``.

The model objects are frozen (immutable); an edit makes a new object with
``model_copy(update=...)`` followed by :func:`check_vehicle`.
"""

from __future__ import annotations

import functools
import json
import math
import os
from pathlib import Path
from typing import Annotated, Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator
from shapely.geometry import Polygon
from shapely.validation import explain_validity

from core import files
from core.files import InputFileError, read_regular_file
from core.bounds import (
    MAX_ANGLES_PER_TURN,
    MAX_BODY_HEIGHT_M,
    MAX_BODY_LENGTH_M,
    MAX_BODY_OUTLINE_POINTS,
    MAX_BODY_WIDTH_M,
    MAX_DESCRIPTION_CHARS,
    MAX_FREQUENCY_HZ,
    MAX_MATERIALS,
    MAX_NAME_CHARS,
    MAX_NESTING,
    MAX_NOTE_CHARS,
    MAX_OUTLINE_POINTS,
    MAX_REGIONS,
    MAX_RIM_WIDTH_M,
    MAX_SECTION_WIDTH_M,
    MAX_SPOTS,
    MAX_TIRE_CODE_CHARS,
    MAX_TIRE_DIAMETER_M,
    MAX_WHEELS,
    MAX_ZONES,
    MIN_ANGLES_PER_TURN,
    MIN_FREQUENCY_HZ,
    MIN_RIM_DIAMETER_M,
    MIN_RIM_WIDTH_M,
    MIN_SECTION_WIDTH_M,
    MIN_SENSOR_RADIUS_M,
    MIN_TIRE_DIAMETER_M,
    REACH_MARGIN_M,
    check_rank_work,
)
from core.cavity import DEFAULT_CONTENTS_M2
from core.materials import BUILTIN_MATERIALS
from core.tires import TireSize, parse_tire_code

# The atomic writers live in core.files (permissions, links, read-only files, signals); kept here for callers.
atomic_path = files.atomic_path
atomic_write_bytes = files.atomic_write_bytes
atomic_write_text = files.atomic_write_text

FORMAT_NAME = "wheelreach-vehicle"
FORMAT_VERSION = 1
FORMAT_TAG = f"{FORMAT_NAME}/{FORMAT_VERSION}"

# the limits (sizes, counts, text lengths) live in core.bounds, documented in docs/vehicle-format.md
Length = Annotated[float, Field(ge=-100.0, le=100.0)]
Point2 = tuple[Length, Length]
BodyOutline = Annotated[tuple[Point2, ...], Field(min_length=3, max_length=MAX_BODY_OUTLINE_POINTS)]
Outline = Annotated[tuple[Point2, ...], Field(min_length=3, max_length=MAX_OUTLINE_POINTS)]
Axis3 = tuple[float, float, float]
Name = Annotated[str, Field(min_length=1, max_length=MAX_NAME_CHARS)]


class VehicleFileError(ValueError):
    """A vehicle file or document is invalid. The message names the file, field path and problem.

    Attributes
    ----------
    path : file path or "" for in-memory documents
    field : field path such as ``wheels[2].tire`` ("" for the whole document)
    problem : what is wrong with it
    """

    def __init__(self, problem: str, field: str = "", path: str | os.PathLike | None = None):
        self.path = str(path) if path else ""
        self.field = field
        self.problem = problem
        where = ": ".join(p for p in (self.path, field) if p)
        super().__init__(f"{where}: {problem}" if where else problem)


class _Strict(BaseModel):
    model_config = ConfigDict(frozen=True, extra="forbid", allow_inf_nan=False, strict=True)


class Body(_Strict):
    """The body without wheel arches, in top view (x, y) and side view (x, z), m."""

    top_outline: BodyOutline
    side_outline: BodyOutline
    wheelhouse_clearance_m: float = Field(0.04, ge=0.0, le=0.5)
    wheelhouse_material: Name = "metal"
    floor_height_m: float | None = Field(None, ge=0.0, le=3.0)
    cabin_absorption_m2: float = Field(DEFAULT_CONTENTS_M2, ge=0.0, le=20.0)


class Zone(_Strict):
    """A panel zone drawn on one view with the material of the panels it covers.

    A top-view zone sets the material of roof and floor crossings at its (x, y); it may be
    limited to heights ``z_min_m``..``z_max_m``. A side-view zone sets the material of side
    and end face crossings at its (x, z).
    """

    name: Name
    view: Literal["top", "side"]
    material: Name
    outline: Outline
    z_min_m: float | None = Field(None, ge=-1.0, le=MAX_BODY_HEIGHT_M)
    z_max_m: float | None = Field(None, ge=-1.0, le=MAX_BODY_HEIGHT_M)


class UserMaterial(_Strict):
    """A material defined in the file, or an override of a built-in one: fixed crossing loss, dB."""

    loss_db: float = Field(ge=0.0, le=100.0)
    description: Annotated[str, Field(max_length=MAX_NOTE_CHARS)] = ""


class ExplicitTire(_Strict):
    outer_diameter_m: float = Field(ge=MIN_TIRE_DIAMETER_M, le=MAX_TIRE_DIAMETER_M)
    rim_diameter_m: float = Field(ge=MIN_RIM_DIAMETER_M, le=MAX_TIRE_DIAMETER_M)
    section_width_m: float = Field(ge=MIN_SECTION_WIDTH_M, le=MAX_SECTION_WIDTH_M)


class Wheel(_Strict):
    """A wheel: centre in top view, tire size, rim width and the sensor's place on the rim."""

    id: Annotated[str, Field(min_length=1, max_length=8, pattern=r"^[A-Za-z0-9_]+$")]
    x_m: Length
    y_m: Length
    tire: Annotated[str, Field(max_length=MAX_TIRE_CODE_CHARS)] | ExplicitTire
    rim_width_m: float = Field(ge=MIN_RIM_WIDTH_M, le=MAX_RIM_WIDTH_M)
    sensor_radius_m: float | None = Field(None, ge=MIN_SENSOR_RADIUS_M, le=1.0)
    sensor_offset_m: float | None = Field(None, ge=-0.5, le=0.5)
    valve_side: Literal["outboard", "inboard"] = "outboard"

    @field_validator("tire")
    @classmethod
    def _tire_code(cls, v):
        if isinstance(v, str):
            parse_tire_code(v)
        return v

    @property
    def tire_size(self) -> TireSize:
        if isinstance(self.tire, str):
            return parse_tire_code(self.tire)
        t = self.tire
        return TireSize(t.outer_diameter_m, t.rim_diameter_m, t.section_width_m)

    @property
    def centre_z_m(self) -> float:
        """Wheel centre height = unloaded tire radius (tire standing on the ground), m."""
        return self.tire_size.outer_radius_m

    @property
    def outboard_sign(self) -> float:
        """+1 for a wheel on the left (outboard = +y), -1 on the right."""
        return 1.0 if self.y_m >= 0 else -1.0

    @property
    def sensor_radius(self) -> float:
        """Sensor mounting radius, m; default: the rim's bead-seat radius (valve-stem sensor on the well)."""
        return self.sensor_radius_m if self.sensor_radius_m is not None else self.tire_size.rim_radius_m

    @property
    def sensor_offset(self) -> float:
        """Sensor axial offset from the wheel centre plane, m, positive outboard.

        Default: a quarter rim width toward the valve side (engineering default)."""
        if self.sensor_offset_m is not None:
            return self.sensor_offset_m
        q = 0.25 * self.rim_width_m
        return q if self.valve_side == "outboard" else -q


class Spot(_Strict):
    """A candidate receiver location, m, with its antenna axis (None: the radio default).

    ``x_from`` and ``z_from`` name a landmark the coordinate is measured from, so that the same
    spot can be placed on several bodies of a platform (see ``resolve_spot``).
    """

    name: Name
    x_m: Length
    y_m: Length
    z_m: Length
    axis: Axis3 | None = None
    x_from: Literal["origin", "front_axle", "rear_axle", "front_end", "rear_end"] = "origin"
    z_from: Literal["ground", "floor"] = "ground"


class Region(_Strict):
    """A mounting region for heatmaps: a top-view area at a height, or a side-view area at a lateral position."""

    name: Name
    view: Literal["top", "side"]
    outline: Outline
    height_m: float | None = Field(None, ge=0.0, le=MAX_BODY_HEIGHT_M)
    lateral_m: float | None = Field(None, ge=-MAX_BODY_WIDTH_M, le=MAX_BODY_WIDTH_M)


class Sensor(_Strict):
    """The wheel sensor's transmitter: peak EIRP given directly, or conducted power + antenna gain."""

    eirp_dbm: float | None = Field(None, ge=-80.0, le=40.0)
    conducted_power_dbm: float | None = Field(None, ge=-80.0, le=40.0)
    antenna_gain_dbi: float | None = Field(None, ge=-40.0, le=10.0)
    return_loss_db: float = Field(10.0, gt=0.0, le=60.0)
    pattern: Literal["dipole", "isotropic"] = "dipole"
    axis: Literal["radial", "tangential", "axial"] = "radial"


class Receiver(_Strict):
    """The receiver: peak antenna gain, pattern, default antenna axis and sensitivity."""

    gain_dbi: float = Field(0.0, ge=-40.0, le=20.0)
    pattern: Literal["dipole", "isotropic"] = "dipole"
    axis: Axis3 = (0.0, 0.0, 1.0)
    sensitivity_dbm: float = Field(-105.0, ge=-160.0, le=0.0)


class Radio(_Strict):
    """The radio setup and the scoring options."""

    frequency_hz: float = 433.92e6
    sensor: Sensor = Sensor(eirp_dbm=-10.0)
    receiver: Receiver = Receiver()
    required_margin_db: float = Field(6.0, ge=-50.0, le=50.0)
    null_floor_db: float = Field(-30.0, ge=-80.0, le=0.0)
    fade_probability: float = Field(0.01, ge=0.0, le=0.5)
    angles_per_turn: int = Field(72, ge=MIN_ANGLES_PER_TURN, le=MAX_ANGLES_PER_TURN)
    worst_case_percentile: float = Field(0.0, ge=0.0, le=50.0)
    frames_per_burst: int = Field(4, ge=1, le=100)
    frame_interval_s: float = Field(0.1, gt=0.0, le=10.0)
    frame_duration_s: float | None = Field(None, gt=0.0, le=1.0)
    burst_period_s: float | None = Field(None, gt=0.0, le=86400.0)
    averaging_factor_db: float | None = Field(None, ge=-60.0, le=0.0)
    market: Literal["US", "EU"] | None = None
    speed_min_mps: float = Field(0.0, ge=0.0, le=100.0)
    speed_max_mps: float = Field(44.5, ge=0.0, le=100.0)
    ground_reflection: bool = True
    road_surface: Name = "dry asphalt/concrete"
    wheel_model: Literal["knife_edge", "installed_pattern"] = "installed_pattern"

    @property
    def sensor_eirp_dbm(self) -> float:
        """Peak sensor EIRP (power while a frame is on the air), dBm: given directly, or conducted power + gain -
        mismatch loss. Against the radio limits: core.regulatory.check_sensor_eirp (uses the timing fields)."""
        from core.propagation import mismatch_loss_db

        s = self.sensor
        if s.eirp_dbm is not None:
            return s.eirp_dbm
        return s.conducted_power_dbm + s.antenna_gain_dbi - float(mismatch_loss_db(s.return_loss_db))


class Vehicle(_Strict):
    """One body style: body, zones, wheels, candidate spots, regions and radio setup."""

    format: Name = FORMAT_TAG
    name: Name
    body_style: Name
    description: Annotated[str, Field(max_length=MAX_DESCRIPTION_CHARS)] = ""
    body: Body
    zones: Annotated[tuple[Zone, ...], Field(max_length=MAX_ZONES)] = ()
    materials: Annotated[dict[Name, UserMaterial], Field(max_length=MAX_MATERIALS)] = {}
    wheels: Annotated[tuple[Wheel, ...], Field(min_length=1, max_length=MAX_WHEELS)]
    spots: Annotated[tuple[Spot, ...], Field(max_length=MAX_SPOTS)] = ()
    regions: Annotated[tuple[Region, ...], Field(max_length=MAX_REGIONS)] = ()
    radio: Radio = Radio()

    # ----- derived landmarks -------------------------------------------------
    def material_names(self) -> set[str]:
        return set(BUILTIN_MATERIALS) | set(self.materials)

    def axle_xs(self) -> list[float]:
        """Distinct axle positions x, m, front to rear (wheels within 5 cm share an axle)."""
        xs = sorted(w.x_m for w in self.wheels)
        axles: list[list[float]] = []
        for x in xs:
            if axles and abs(x - axles[-1][-1]) < 0.05:
                axles[-1].append(x)
            else:
                axles.append([x])
        return [float(np.mean(a)) for a in reversed(axles)]

    def floor_height(self) -> float:
        """Floor height, m: given, or the side outline's underside midway between the outer axles."""
        if self.body.floor_height_m is not None:
            return self.body.floor_height_m
        axles = self.axle_xs()
        x_mid = 0.5 * (axles[0] + axles[-1])
        side = np.asarray(self.body.side_outline)
        return float(_lower_envelope(side, x_mid))

    def floor_height_at(self, x: float) -> float:
        """Floor height under x, m: the body's floor height (:meth:`floor_height`), or the underside of
        the side outline at x where that is higher (a pickup bed, a raised load floor, a kicked-up
        overhang: a floor never lies below the body's underside). Beyond the side outline's x range,
        the floor height. ``z_from = "floor"`` spots are measured from here."""
        base = self.floor_height()
        side = np.asarray(self.body.side_outline)
        if not side[:, 0].min() <= x <= side[:, 0].max():
            return base
        return max(base, float(_lower_envelope(side, x)))

    def landmark_x(self, name: str) -> float:
        top = np.asarray(self.body.top_outline)
        axles = self.axle_xs()
        return {
            "origin": 0.0,
            "front_axle": axles[0],
            "rear_axle": axles[-1],
            "front_end": float(top[:, 0].max()),
            "rear_end": float(top[:, 0].min()),
        }[name]

    def resolve_spot(self, spot: Spot) -> tuple[float, float, float]:
        """The spot's position in this body's vehicle axes, m."""
        x = spot.x_m + self.landmark_x(spot.x_from)
        z = spot.z_m + (self.floor_height_at(x) if spot.z_from == "floor" else 0.0)
        return (x, spot.y_m, z)

    def spot_axis(self, spot: Spot) -> np.ndarray:
        a = np.asarray(spot.axis if spot.axis is not None else self.radio.receiver.axis, float)
        return a / np.linalg.norm(a)


def _lower_envelope(poly: np.ndarray, x: float) -> float:
    """Lowest z of the polygon boundary over the vertical line at x, m."""
    p0, p1 = poly, np.roll(poly, -1, axis=0)
    lo, hi = np.minimum(p0[:, 0], p1[:, 0]), np.maximum(p0[:, 0], p1[:, 0])
    ok = (lo <= x) & (x <= hi) & (hi > lo)
    t = (x - p0[ok, 0]) / (p1[ok, 0] - p0[ok, 0])
    z = p0[ok, 1] + t * (p1[ok, 1] - p0[ok, 1])
    return float(z.min()) if z.size else float(poly[:, 1].min())


# ----- validation ---------------------------------------------------------------
def _loc(loc: tuple) -> str:
    out = ""
    for part in loc:
        if isinstance(part, int):
            out += f"[{part}]"
        elif part in _UNION_TAGS or part == "[key]":
            continue
        elif not str(part).isidentifier():
            out += f"[{str(part)!r}]"
        else:
            out += f".{part}" if out else str(part)
    return out


# Names pydantic puts into an error location for the branch of a union (not part of the file's path).
_UNION_TAGS = ("str", "ExplicitTire", "tuple[float, float, float]", "function-after[_tire_code(), str]",
               "constrained-str", "function-after[_tire_code(), constrained-str]")


def _pick_error(errors: list[dict]) -> dict:
    """The most telling of pydantic's errors: for a union such as ``tire`` (code or object), prefer the
    branch that matches what the file gave (an object's missing key, not "should be a valid string")."""
    first = errors[0]
    if first["type"].endswith("_type") and any(t in first["loc"] for t in _UNION_TAGS):
        i = next(k for k, t in enumerate(first["loc"]) if t in _UNION_TAGS)
        stem = first["loc"][:i]
        for e in errors[1:]:
            if e["loc"][:i] == stem and len(e["loc"]) > i + 1:
                return e
    return first


class _KeysSeenTwice(dict):
    """A JSON object in which a key appeared more than once (``duplicates`` names them, in order)."""

    duplicates: tuple[str, ...] = ()


def _object_pairs(pairs: list[tuple[str, object]]) -> dict:
    """json ``object_pairs_hook``: a plain dict, or a _KeysSeenTwice that remembers the repeated keys
    (json.loads would silently keep the last value; the file is refused instead, with the key's place)."""
    d = dict(pairs)
    if len(d) == len(pairs):
        return d
    seen: set[str] = set()
    dups = [k for k, _ in pairs if k in seen or seen.add(k)]
    out = _KeysSeenTwice(d)
    out.duplicates = tuple(dict.fromkeys(dups))
    return out


def _json_problem(data) -> tuple[str, str] | None:
    """(field, problem) for JSON data pydantic's parser would reject without naming the field:
    nesting deeper than MAX_NESTING, text with an unpaired UTF-16 surrogate escape, or a key given
    twice in one object. Iterative."""
    stack = [(data, (), 0)]
    while stack:
        node, loc, depth = stack.pop()
        if depth > MAX_NESTING:
            return _loc(loc[:3]), f"nested more than {MAX_NESTING} levels deep"
        if isinstance(node, _KeysSeenTwice):
            key = node.duplicates[0]
            return _loc((*loc, key)) if isinstance(key, str) and _encodable(key) else _loc(loc), (
                f"key {key[:MAX_NAME_CHARS]!r} is given more than once in the same object (JSON keeps only one; "
                f"remove the other)")
        if isinstance(node, dict):
            for k, val in node.items():
                if isinstance(k, str) and not _encodable(k):
                    return _loc(loc), f"key {k!r} contains an unpaired surrogate escape"
                stack.append((val, (*loc, k), depth + 1))
        elif isinstance(node, (list, tuple)):
            stack.extend((val, (*loc, i), depth + 1) for i, val in enumerate(node))
        elif isinstance(node, str) and not _encodable(node):
            return _loc(loc), "text contains an unpaired surrogate escape (e.g. \\ud800)"
    return None


def _encodable(text: str) -> bool:
    try:
        text.encode("utf-8")
    except UnicodeEncodeError:
        return False
    return True


@functools.lru_cache(maxsize=1024)
def _polygon_problem(outline: tuple) -> str | None:
    """What is wrong with a polygon outline (a tuple of (u, v) points, m), or None. Kept per outline: an
    edit re-checks the whole vehicle, and every outline but the one edited is the same as before."""
    pts = np.asarray(outline, float)
    if len(pts) < 3:
        return "needs at least 3 points"
    collinear = _collinear_problem(pts)
    if collinear:
        return collinear
    poly = Polygon(pts)
    # validity first: a symmetric bow tie has zero signed area but is a crossing, not a sliver
    if not poly.is_valid:
        why = explain_validity(poly)
        if "Self-intersection" in why or "Ring Self-intersection" in why:
            return f"crosses itself ({why})"
        return f"is not a simple polygon ({why})"
    if poly.area < 1e-6:
        return "encloses no area"
    return None


def _collinear_problem(pts: np.ndarray) -> str | None:
    """Degenerate outlines that shapely reports as self-intersections: every point on one line, or a
    point where the outline turns straight back along itself (a zero-width spike). Points in a row
    along an edge (the outline goes straight on) are fine and are accepted as they are."""
    p = pts[np.r_[True, np.any(np.diff(pts, axis=0) != 0.0, axis=1)]]  # repeated points are harmless
    if len(p) > 1 and np.all(p[-1] == p[0]):
        p = p[:-1]  # a closed ring: the last point repeats the first
    scale = max(float(np.ptp(p, axis=0).max()) if len(p) else 0.0, 1e-9)
    if len(p) < 3 or np.linalg.matrix_rank(p - p.mean(axis=0), tol=1e-9 * scale) < 2:
        return "encloses no area: all its points lie on one straight line"
    prev = p - np.roll(p, 1, axis=0)
    nxt = np.roll(p, -1, axis=0) - p
    cross = prev[:, 0] * nxt[:, 1] - prev[:, 1] * nxt[:, 0]
    dot = np.einsum("ij,ij->i", prev, nxt)
    norms = np.linalg.norm(prev, axis=1) * np.linalg.norm(nxt, axis=1)
    spike = (np.abs(cross) <= 1e-9 * norms) & (dot < 0)
    if spike.any():
        i = int(np.argmax(spike))
        k = int(np.nonzero(np.all(pts == p[i], axis=1))[0][0])
        return (f"turns straight back along itself at point {k} ({p[i, 0]:g}, {p[i, 1]:g}): the points before and "
                f"after it lie on one line with it on the same side (a zero-width spike); remove that point")
    return None


def _reach_problem(outline, lo, hi, what: str) -> str | None:
    """Whether an outline leaves the body's bounding box (lo, hi) grown by REACH_MARGIN_M."""
    pts = np.asarray(outline, float)
    lo = np.asarray(lo, float) - REACH_MARGIN_M
    hi = np.asarray(hi, float) + REACH_MARGIN_M
    out = np.any((pts < lo) | (pts > hi), axis=1)
    if not out.any():
        return None
    i = int(np.argmax(out))
    return (f"point {i} ({pts[i, 0]:g}, {pts[i, 1]:g}) m lies outside the body's {what} "
            f"({lo[0]:g}..{hi[0]:g}, {lo[1]:g}..{hi[1]:g} m: the body's extent plus {REACH_MARGIN_M:g} m)")


def check_vehicle(v: Vehicle) -> None:
    """Checks across fields that the per-field validation cannot see; raise VehicleFileError."""
    if v.format != FORMAT_TAG:
        name, _, ver = v.format.partition("/")
        if name != FORMAT_NAME:
            raise VehicleFileError(f"{v.format!r} is not a Wheelreach vehicle file (expected {FORMAT_TAG!r})", "format")
        raise VehicleFileError(f"version {ver!r} is not readable by this program (reads {FORMAT_VERSION})", "format")
    for key in ("top_outline", "side_outline"):
        problem = _polygon_problem(getattr(v.body, key))
        if problem:
            raise VehicleFileError(f"outline {problem}", f"body.{key}")
    top = np.asarray(v.body.top_outline)
    side = np.asarray(v.body.side_outline)
    length = np.ptp(top[:, 0])
    if length > MAX_BODY_LENGTH_M:
        raise VehicleFileError(f"body is {length:.1f} m long; the limit is {MAX_BODY_LENGTH_M:.0f} m", "body.top_outline")
    if np.ptp(top[:, 1]) > MAX_BODY_WIDTH_M:
        raise VehicleFileError(f"body is {np.ptp(top[:, 1]):.1f} m wide; the limit is {MAX_BODY_WIDTH_M:.0f} m", "body.top_outline")
    if np.ptp(side[:, 1]) > MAX_BODY_HEIGHT_M or side[:, 1].min() < 0.0:
        raise VehicleFileError(f"body must lie between the ground and {MAX_BODY_HEIGHT_M:.0f} m", "body.side_outline")
    if np.ptp(side[:, 0]) > MAX_BODY_LENGTH_M:
        raise VehicleFileError(f"body is {np.ptp(side[:, 0]):.1f} m long; the limit is {MAX_BODY_LENGTH_M:.0f} m", "body.side_outline")
    if v.body.wheelhouse_material not in v.material_names():
        raise VehicleFileError(f"unknown material {v.body.wheelhouse_material!r}", "body.wheelhouse_material")
    materials = v.material_names()
    for i, z in enumerate(v.zones):
        if z.material not in materials:
            raise VehicleFileError(
                f"unknown material {z.material!r} (known: {', '.join(sorted(materials))})", f"zones[{i}].material"
            )
        problem = _polygon_problem(z.outline)
        if problem:
            raise VehicleFileError(f"outline {problem}", f"zones[{i}].outline")
        if z.z_min_m is not None and z.z_max_m is not None and z.z_min_m >= z.z_max_m:
            raise VehicleFileError("z_min_m must be below z_max_m", f"zones[{i}].z_min_m")
        reach = _reach_problem(z.outline, *_view_box(v, z.view), f"{z.view} view")
        if reach:
            raise VehicleFileError(f"zone outline {reach}", f"zones[{i}].outline")
    _unique([w.id for w in v.wheels], "wheels", "id")
    _unique([s.name for s in v.spots], "spots", "name")
    _unique([r.name for r in v.regions], "regions", "name")
    xmin, ymin = top.min(axis=0)
    xmax, ymax = top.max(axis=0)
    for i, w in enumerate(v.wheels):
        t = w.tire_size
        if t.outer_diameter_m > MAX_TIRE_DIAMETER_M:
            raise VehicleFileError(
                f"tire is {t.outer_diameter_m:.3f} m across; the limit is {MAX_TIRE_DIAMETER_M:.0f} m",
                f"wheels[{i}].tire",
            )
        for size, lo, what in ((t.outer_diameter_m, MIN_TIRE_DIAMETER_M, "overall diameter"),
                               (t.rim_diameter_m, MIN_RIM_DIAMETER_M, "rim diameter"),
                               (t.section_width_m, MIN_SECTION_WIDTH_M, "section width")):
            if size < lo:
                raise VehicleFileError(f"tire {what} is {size:.3f} m; the smallest allowed is {lo:g} m", f"wheels[{i}].tire")
        if t.rim_diameter_m >= t.outer_diameter_m:
            raise VehicleFileError("rim diameter must be smaller than the overall diameter", f"wheels[{i}].tire")
        tol = t.section_width_m
        if not (xmin - tol <= w.x_m <= xmax + tol and ymin - tol <= w.y_m <= ymax + tol):
            raise VehicleFileError(
                f"wheel centre ({w.x_m:.3f}, {w.y_m:.3f}) m lies outside the body's top outline "
                f"(x {xmin:.2f}..{xmax:.2f}, y {ymin:.2f}..{ymax:.2f} m) by more than a tire width",
                f"wheels[{i}]",
            )
        if w.sensor_radius > t.outer_radius_m:
            raise VehicleFileError("sensor radius is larger than the tire radius", f"wheels[{i}].sensor_radius_m")
        if w.sensor_radius < MIN_SENSOR_RADIUS_M:
            raise VehicleFileError(f"sensor radius is {w.sensor_radius:.3f} m; the smallest allowed is "
                                   f"{MIN_SENSOR_RADIUS_M:g} m", f"wheels[{i}].sensor_radius_m")
        if abs(w.sensor_offset) > 0.5 * w.rim_width_m:
            raise VehicleFileError("sensor offset lies outside the rim width", f"wheels[{i}].sensor_offset_m")
    for i, s in enumerate(v.spots):
        if s.axis is not None and math.hypot(*s.axis) < 1e-9:
            raise VehicleFileError("antenna axis must not be the zero vector", f"spots[{i}].axis")
    if math.hypot(*v.radio.receiver.axis) < 1e-9:
        raise VehicleFileError("antenna axis must not be the zero vector", "radio.receiver.axis")
    for i, r in enumerate(v.regions):
        problem = _polygon_problem(r.outline)
        if problem:
            raise VehicleFileError(f"outline {problem}", f"regions[{i}].outline")
        if r.view == "top" and r.height_m is None:
            raise VehicleFileError("a top-view region needs height_m", f"regions[{i}].height_m")
        if r.view == "side" and r.lateral_m is None:
            raise VehicleFileError("a side-view region needs lateral_m", f"regions[{i}].lateral_m")
        lo, hi = _view_box(v, r.view)
        reach = _reach_problem(r.outline, lo, hi, f"{r.view} view")
        if reach:
            raise VehicleFileError(f"region outline {reach}", f"regions[{i}].outline")
        # a top region's height lies within the side view's z extent; a side region's y within the top view's
        key, value = ("height_m", r.height_m) if r.view == "top" else ("lateral_m", r.lateral_m)
        box = _view_box(v, "side" if r.view == "top" else "top")
        lo_f, hi_f = box[0][1] - REACH_MARGIN_M, box[1][1] + REACH_MARGIN_M
        if not lo_f <= value <= hi_f:
            raise VehicleFileError(f"{value:g} m lies outside the body's extent plus {REACH_MARGIN_M:g} m "
                                   f"({lo_f:g}..{hi_f:g} m)", f"regions[{i}].{key}")
    radio = v.radio
    if not MIN_FREQUENCY_HZ <= radio.frequency_hz <= MAX_FREQUENCY_HZ:
        raise VehicleFileError(
            f"{radio.frequency_hz:g} Hz is outside {MIN_FREQUENCY_HZ:g}-{MAX_FREQUENCY_HZ:g} Hz", "radio.frequency_hz"
        )
    s = radio.sensor
    if s.eirp_dbm is None and (s.conducted_power_dbm is None or s.antenna_gain_dbi is None):
        raise VehicleFileError("give eirp_dbm, or both conducted_power_dbm and antenna_gain_dbi", "radio.sensor")
    if s.eirp_dbm is not None and (s.conducted_power_dbm is not None or s.antenna_gain_dbi is not None):
        raise VehicleFileError("give eirp_dbm or conducted_power_dbm + antenna_gain_dbi, not both", "radio.sensor")
    work = check_rank_work(len(v.spots), len(v.wheels), radio.angles_per_turn)
    if work:
        raise VehicleFileError(work, "spots" if len(v.spots) * len(v.wheels) > MAX_SPOTS else "radio.angles_per_turn")
    if radio.speed_max_mps < radio.speed_min_mps:
        raise VehicleFileError("speed_max_mps is below speed_min_mps", "radio.speed_max_mps")
    _check_timing(radio)
    from core.materials import ROAD_SURFACES

    if radio.road_surface not in ROAD_SURFACES:
        raise VehicleFileError(
            f"unknown road surface {radio.road_surface!r} (known: {', '.join(ROAD_SURFACES)})", "radio.road_surface"
        )


def _check_timing(radio: Radio) -> None:
    """Transmission timing used by the radio-limit check (core.regulatory.check_sensor_eirp)."""
    tau = radio.frame_duration_s
    if tau is not None and radio.frames_per_burst > 1 and tau > radio.frame_interval_s:
        raise VehicleFileError(
            f"frames of {tau * 1e3:g} ms overlap at the frame interval of {radio.frame_interval_s * 1e3:g} ms",
            "radio.frame_duration_s")
    if radio.burst_period_s is not None:
        burst = (radio.frames_per_burst - 1) * radio.frame_interval_s + (tau or 0.0)
        if radio.burst_period_s < burst:
            raise VehicleFileError(f"burst period is shorter than one burst ({burst:g} s)", "radio.burst_period_s")
    if tau is not None and radio.averaging_factor_db is not None:
        raise VehicleFileError("give frame_duration_s (averaging computed from the timing) or averaging_factor_db "
                               "(an assumed factor), not both", "radio.averaging_factor_db")


def _view_box(v: Vehicle, view: str) -> tuple[np.ndarray, np.ndarray]:
    """The body's bounding box in one view: (x, y) for top, (x, z) for side, m."""
    pts = np.asarray(v.body.top_outline if view == "top" else v.body.side_outline, float)
    return pts.min(axis=0), pts.max(axis=0)


def _unique(names: list[str], group: str, key: str) -> None:
    seen: dict[str, int] = {}
    for i, n in enumerate(names):
        if n in seen:
            raise VehicleFileError(f"{n!r} is used twice (also at {group}[{seen[n]}])", f"{group}[{i}].{key}")
        seen[n] = i


# ----- load and save -------------------------------------------------------------
def parse_vehicle(text: str | bytes, path: str | os.PathLike | None = None) -> Vehicle:
    """Parse and validate a vehicle document; raise VehicleFileError (never another error)."""
    try:
        data = json.loads(text, object_pairs_hook=_object_pairs)
    except json.JSONDecodeError as e:
        raise VehicleFileError(f"not valid JSON: {e.msg} at line {e.lineno}, column {e.colno}", "", path) from None
    except RecursionError:
        raise VehicleFileError("not readable: the JSON is nested too deeply", "", path) from None
    except (UnicodeDecodeError, ValueError) as e:  # ValueError: e.g. an integer literal of over 4300 digits
        raise VehicleFileError(f"not readable as JSON text: {e}", "", path) from None
    if not isinstance(data, dict):
        raise VehicleFileError("the document must be a JSON object", "", path)
    return vehicle_from_dict(data, path)


def vehicle_from_dict(data: dict, path: str | os.PathLike | None = None) -> Vehicle:
    """Build and validate a Vehicle from plain JSON data (dicts, lists, numbers, strings)."""
    fmt = data.get("format")
    if isinstance(fmt, str) and fmt != FORMAT_TAG and fmt.startswith(FORMAT_NAME + "/"):
        raise VehicleFileError(
            f"version {fmt.partition('/')[2]!r} is not readable by this program (reads {FORMAT_VERSION})", "format", path
        )
    problem = _json_problem(data)
    if problem:
        raise VehicleFileError(problem[1], problem[0], path)
    try:
        text = json.dumps(data, allow_nan=True)
        v = Vehicle.model_validate_json(text, strict=True)
    except ValidationError as e:
        err = _pick_error(e.errors())
        field = _loc(err["loc"])
        msg = err["msg"]
        if err["type"] == "missing":
            msg = "required field is missing"
        elif err["type"] == "extra_forbidden":
            msg = "unknown field"
        elif err["type"] == "value_error" and "ctx" in err:
            msg = str(err["ctx"].get("error", msg))
        raise VehicleFileError(msg, field, path) from None
    except (ValueError, TypeError, RecursionError, OverflowError) as e:
        raise VehicleFileError(f"cannot read the document: {e}", "", path) from None
    try:
        check_vehicle(v)
    except VehicleFileError as e:
        raise VehicleFileError(e.problem, e.field, path) from None
    return v


def load_vehicle(path: str | os.PathLike) -> Vehicle:
    """Load and validate a vehicle file; raise VehicleFileError naming the file and field."""
    p = Path(path)
    return parse_vehicle(read_vehicle_bytes(p), p)


#: largest vehicle file read, bytes
MAX_FILE_BYTES = 20_000_000


def read_vehicle_bytes(path: str | os.PathLike) -> bytes:
    """The bytes of a vehicle file: a regular file of at most MAX_FILE_BYTES (core.files.read_regular_file:
    folders, named pipes and devices are refused before reading); raise VehicleFileError naming the file."""
    try:
        return read_regular_file(path, MAX_FILE_BYTES)
    except InputFileError as e:
        raise VehicleFileError(e.problem, "", path) from None
    except OSError as e:
        raise VehicleFileError(f"cannot read the file: {e.strerror or e}", "", path) from None


def vehicle_to_dict(v: Vehicle) -> dict:
    return v.model_dump(mode="json", exclude_none=True)


def vehicle_to_json(v: Vehicle) -> str:
    return json.dumps(vehicle_to_dict(v), indent=2) + "\n"


def save_vehicle(v: Vehicle, path: str | os.PathLike) -> None:
    """Write the vehicle atomically: temporary file in the same folder, flush, fsync, replace.

    An error at any point leaves an existing file at ``path`` untouched.
    """
    check_vehicle(v)
    atomic_write_text(Path(path), vehicle_to_json(v))


def json_schema() -> dict:
    """JSON Schema of the vehicle format, generated from the model."""
    schema = Vehicle.model_json_schema()
    schema["$schema"] = "https://json-schema.org/draft/2020-12/schema"
    schema["title"] = "Wheelreach vehicle file, format " + FORMAT_TAG
    return schema

"""Edits of a vehicle as pure functions: old Vehicle in, new validated Vehicle out (no Qt).

Each function goes through a dict round trip (``vehicle_to_dict`` / ``vehicle_from_dict``), so the
result is fully validated; an edit that makes the vehicle invalid raises ``VehicleFileError``
naming the field, and the old vehicle is untouched (the models are frozen). Lengths in m.
"""

from __future__ import annotations

from typing import Any

from core.vehicle import Vehicle, VehicleFileError, vehicle_from_dict, vehicle_to_dict

#: positions closer than this are the same position (floating-point noise of landmark offsets), m
SAME_POSITION_M = 1e-9


def snap(value: float, grid_m: float | None) -> float:
    """Round ``value`` (m) to the grid (m); no change when grid_m is None or 0."""
    if not grid_m:
        return float(value)
    return round(round(value / grid_m) * grid_m, 6)


def _rebuild(d: dict) -> Vehicle:
    return vehicle_from_dict(d)


def spot_index(v: Vehicle, name: str) -> int:
    for i, s in enumerate(v.spots):
        if s.name == name:
            return i
    raise KeyError(name)


def move_spot(v: Vehicle, name: str, pos: tuple[float, float, float]) -> Vehicle:
    """Place spot ``name`` at the resolved position ``pos`` (x, y, z) in vehicle axes, m.

    The spot keeps its landmarks (``x_from``, ``z_from``): the stored offsets are adjusted. A move
    to where the spot already is returns ``v`` itself (no rounding noise in the stored offsets, so
    no undo step that changes nothing)."""
    i = spot_index(v, name)
    s = v.spots[i]
    x, y, z = (float(c) for c in pos)
    if all(abs(a - b) <= SAME_POSITION_M for a, b in zip((x, y, z), v.resolve_spot(s))):
        return v
    d = vehicle_to_dict(v)
    d["spots"][i]["x_m"] = x - v.landmark_x(s.x_from)
    d["spots"][i]["y_m"] = y
    d["spots"][i]["z_m"] = z - (v.floor_height_at(x) if s.z_from == "floor" else 0.0)
    return _rebuild(d)


def unique_spot_name(v: Vehicle, stem: str = "spot") -> str:
    names = {s.name for s in v.spots}
    n = len(v.spots) + 1
    while f"{stem} {n}" in names:
        n += 1
    return f"{stem} {n}"


def add_spot(v: Vehicle, name: str, pos: tuple[float, float, float], axis=None) -> Vehicle:
    d = vehicle_to_dict(v)
    spot: dict[str, Any] = {"name": name, "x_m": float(pos[0]), "y_m": float(pos[1]), "z_m": float(pos[2])}
    if axis is not None:
        spot["axis"] = [float(a) for a in axis]
    d.setdefault("spots", []).append(spot)
    return _rebuild(d)


def rename_spot(v: Vehicle, name: str, new_name: str) -> Vehicle:
    i = spot_index(v, name)
    d = vehicle_to_dict(v)
    d["spots"][i]["name"] = new_name
    return _rebuild(d)


def delete_spot(v: Vehicle, name: str) -> Vehicle:
    i = spot_index(v, name)
    d = vehicle_to_dict(v)
    del d["spots"][i]
    return _rebuild(d)


def set_spot_axis(v: Vehicle, name: str, axis) -> Vehicle:
    """Set the spot's antenna axis (3 components), or None for the receiver's default axis."""
    i = spot_index(v, name)
    d = vehicle_to_dict(v)
    if axis is None:
        d["spots"][i].pop("axis", None)
    else:
        d["spots"][i]["axis"] = [float(a) for a in axis]
    return _rebuild(d)


def delete_wheel(v: Vehicle, wheel_id: str) -> Vehicle:
    """Remove the wheel ``wheel_id``; the last wheel of a vehicle cannot be removed."""
    ids = [w.id for w in v.wheels]
    if wheel_id not in ids:
        raise KeyError(f"no wheel {wheel_id!r}")
    if len(ids) == 1:
        raise VehicleFileError(f"{wheel_id} is the only wheel; a vehicle needs at least one", "wheels")
    d = vehicle_to_dict(v)
    del d["wheels"][ids.index(wheel_id)]
    return _rebuild(d)


def wheel_index(v: Vehicle, wheel_id: str) -> int:
    for i, w in enumerate(v.wheels):
        if w.id == wheel_id:
            return i
    raise KeyError(wheel_id)


def set_item_value(v: Vehicle, group: str, index: int, key: str, value) -> Vehicle:
    """Set one stored field of ``v.<group>[index]`` (group 'spots', 'wheels', 'zones' or 'regions').

    ``value`` is stored as given (SI units, as in the file); None removes an optional field. The
    result is validated like a loaded file, so a refused value raises ``VehicleFileError`` naming
    the field (e.g. ``wheels[2].tire``)."""
    if group not in ("spots", "wheels", "zones", "regions"):
        raise KeyError(group)
    d = vehicle_to_dict(v)
    item = d[group][index]
    if value is None:
        item.pop(key, None)
    else:
        item[key] = value
    return _rebuild(d)


def set_wheel_value(v: Vehicle, wheel_id: str, key: str, value) -> Vehicle:
    """Set one stored field of wheel ``wheel_id``: 'x_m', 'y_m' (m), 'tire' (ISO metric code such as
    '225/50R17', checked by ``core.tires``), 'rim_width_m' (m), ..."""
    return set_item_value(v, "wheels", wheel_index(v, wheel_id), key, value)


def set_outline(v: Vehicle, key: str, points) -> Vehicle:
    """Replace ``body.top_outline`` or ``body.side_outline`` (key 'top_outline' / 'side_outline')."""
    d = vehicle_to_dict(v)
    d["body"][key] = [[float(p[0]), float(p[1])] for p in points]
    return _rebuild(d)


def move_wheels(v: Vehicle, moves: dict[str, tuple[float, float]]) -> Vehicle:
    """Move wheels to new centres: {wheel id: (x_m, y_m)}."""
    d = vehicle_to_dict(v)
    found = set()
    for w in d["wheels"]:
        if w["id"] in moves:
            w["x_m"], w["y_m"] = (float(c) for c in moves[w["id"]])
            found.add(w["id"])
    missing = set(moves) - found
    if missing:
        raise KeyError(", ".join(sorted(missing)))
    return _rebuild(d)


def set_zone_outline(v: Vehicle, index: int, points) -> Vehicle:
    d = vehicle_to_dict(v)
    d["zones"][index]["outline"] = [[float(p[0]), float(p[1])] for p in points]
    return _rebuild(d)


def set_zone_material(v: Vehicle, index: int, material: str) -> Vehicle:
    d = vehicle_to_dict(v)
    d["zones"][index]["material"] = material
    return _rebuild(d)


def _centre_rect(v: Vehicle, view: str, shrink: float) -> list[list[float]]:
    """A rectangle centred in the body's outline of that view, 1/shrink of its size, m."""
    import numpy as np

    pts = np.asarray(v.body.top_outline if view == "top" else v.body.side_outline)
    lo, hi = pts.min(axis=0), pts.max(axis=0)
    c, h = 0.5 * (lo + hi), (hi - lo) / (2.0 * shrink)
    return [[c[0] - h[0], c[1] - h[1]], [c[0] + h[0], c[1] - h[1]], [c[0] + h[0], c[1] + h[1]], [c[0] - h[0], c[1] + h[1]]]


def _free_name(taken: set[str], stem: str, n: int) -> str:
    while f"{stem} {n}" in taken:
        n += 1
    return f"{stem} {n}"


def add_zone(v: Vehicle, view: str, material: str, name: str | None = None) -> Vehicle:
    """Add a rectangular zone in the middle of the body's outline of that view (a third of its size)."""
    d = vehicle_to_dict(v)
    name = name or _free_name({z.name for z in v.zones}, "zone", len(v.zones) + 1)
    d.setdefault("zones", []).append({"name": name, "view": view, "material": material, "outline": _centre_rect(v, view, 3.0)})
    return _rebuild(d)


def add_region(v: Vehicle, view: str) -> Vehicle:
    """Add a mounting region in the middle of the body's outline of that view (two thirds of its size):
    a top-view region at the floor height + 0.25 m, a side-view region on the centre line (y = 0)."""
    d = vehicle_to_dict(v)
    name = _free_name({r.name for r in v.regions}, f"{view}-view region", len(v.regions) + 1)
    region = {"name": name, "view": view, "outline": _centre_rect(v, view, 1.5)}
    if view == "top":
        region["height_m"] = round(v.floor_height() + 0.25, 3)
    else:
        region["lateral_m"] = 0.0
    d.setdefault("regions", []).append(region)
    return _rebuild(d)


def delete_region(v: Vehicle, index: int) -> Vehicle:
    d = vehicle_to_dict(v)
    del d["regions"][index]
    return _rebuild(d)


def delete_zone(v: Vehicle, index: int) -> Vehicle:
    d = vehicle_to_dict(v)
    del d["zones"][index]
    return _rebuild(d)


def set_region_outline(v: Vehicle, index: int, points) -> Vehicle:
    d = vehicle_to_dict(v)
    d["regions"][index]["outline"] = [[float(p[0]), float(p[1])] for p in points]
    return _rebuild(d)


def set_region_fixed(v: Vehicle, index: int, value_m: float) -> Vehicle:
    """Set a region's height (top view) or lateral position (side view), m."""
    d = vehicle_to_dict(v)
    r = d["regions"][index]
    r["height_m" if r["view"] == "top" else "lateral_m"] = float(value_m)
    return _rebuild(d)


def set_radio(v: Vehicle, path: str, value) -> Vehicle:
    """Set one radio field by dotted path inside ``radio``, e.g. 'sensor.eirp_dbm' or 'frequency_hz'.

    Setting ``sensor.eirp_dbm`` drops conducted power and antenna gain (the file gives one or the other)."""
    d = vehicle_to_dict(v)
    node = d.setdefault("radio", {})
    parts = path.split(".")
    for p in parts[:-1]:
        node = node.setdefault(p, {})
    if value is None:
        node.pop(parts[-1], None)
    else:
        node[parts[-1]] = value
    if path == "sensor.eirp_dbm" and value is not None:
        node.pop("conducted_power_dbm", None)
        node.pop("antenna_gain_dbi", None)
    return _rebuild(d)


def set_material_override(v: Vehicle, name: str, loss_db: float | None, description: str = "") -> Vehicle:
    """Give material ``name`` a fixed crossing loss, dB, in this file; None removes the override."""
    d = vehicle_to_dict(v)
    mats = d.setdefault("materials", {})
    if loss_db is None:
        mats.pop(name, None)
    else:
        mats[name] = {"loss_db": float(loss_db), "description": description or f"loss set in the file for {name}"}
    return _rebuild(d)


def new_vehicle() -> Vehicle:
    """A plain starting body for File > New: a 4.5 m box-like car with four wheels and one spot."""
    d = {
        "name": "New vehicle",
        "body_style": "sedan",
        "body": {
            "top_outline": [[0.9, -0.85], [0.9, 0.85], [-3.6, 0.85], [-3.6, -0.85]],
            "side_outline": [[0.9, 0.25], [0.9, 0.8], [-0.5, 1.0], [-1.2, 1.45], [-2.8, 1.45], [-3.6, 1.0], [-3.6, 0.25]],
        },
        "wheels": [
            {"id": "FL", "x_m": 0.0, "y_m": 0.78, "tire": "215/55R17", "rim_width_m": 0.18},
            {"id": "FR", "x_m": 0.0, "y_m": -0.78, "tire": "215/55R17", "rim_width_m": 0.18},
            {"id": "RL", "x_m": -2.7, "y_m": 0.78, "tire": "215/55R17", "rim_width_m": 0.18},
            {"id": "RR", "x_m": -2.7, "y_m": -0.78, "tire": "215/55R17", "rim_width_m": 0.18},
        ],
        "spots": [{"name": "centre console", "x_m": -1.35, "y_m": 0.0, "z_m": 0.55}],
        "regions": [
            {"name": "floor plan", "view": "top", "outline": [[-3.4, -0.65], [0.6, -0.65], [0.6, 0.65], [-3.4, 0.65]],
             "height_m": 0.45},
            {"name": "centre section", "view": "side", "outline": [[-3.5, 0.3], [0.8, 0.3], [0.8, 1.35], [-3.5, 1.35]],
             "lateral_m": 0.0},
        ],
    }
    return vehicle_from_dict(d)

"""Comparison across body styles: the same receiver spot on several bodies of a platform.

Two ways to say "the same spot" (docs/vehicle-format.md, "Same spot on several bodies"):

- by name: spots of the same name in several files are the same part location, each body
  placing it at its own coordinates;
- by landmark: a spot whose ``x_from`` / ``z_from`` name a landmark (front or rear axle centre,
  body front or rear end, floor height) resolves on every body to that body's own coordinates.
  Such a spot is portable: a body whose file lacks a spot of that name gets it from the first
  file that defines it relative to a landmark (``carry_landmark_spots``). A spot in absolute
  coordinates (``x_from = "origin"`` and ``z_from = "ground"``) belongs to its own body only.

:func:`compare_bodies` scores every spot on every body and gives the table spot x body of
margins (dB) and worst wheels, the per-spot minimum over the bodies and the platform-common
best spot: the spot, present on all bodies, with the highest minimum margin.

:func:`search_common_position` searches the shared mounting region, expressed relative to a
landmark, for the position whose smallest margin over all bodies is largest (a grid search with
one local refinement). Only positions inside every body, outside the wheelhouses, are scored
(core.placement.candidate_mask).

All lengths in m, margins in dB. No Qt.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from shapely.geometry import Polygon
from shapely.ops import unary_union

from core.placement import candidate_mask
from core.scoring import Scene, score_spots
from core.vehicle import Spot, Vehicle

LANDMARKS = ("origin", "front_axle", "rear_axle", "front_end", "rear_end")


def is_landmark_relative(spot: Spot) -> bool:
    """True when the spot is measured from a landmark (portable between bodies)."""
    return spot.x_from != "origin" or spot.z_from != "ground"


@dataclass(frozen=True)
class Comparison:
    """Spot x body table of margins.

    Attributes
    ----------
    body_names : (B,) vehicle names; body_styles : (B,) body styles
    spot_names : (S,) union of the spot names, in order of first appearance
    margin_db : (S, B) worst-wheel worst-case margin, dB; nan where the body has no such spot
    worst_wheel : (S, B) id of the limiting wheel ("" where absent)
    worst_angle_deg : (S, B) wheel angle of that worst case, deg (nan where absent)
    positions_m : (S, B, 3) resolved spot positions, m (nan where absent)
    carried : (S, B) True where the spot came from another file's landmark-relative definition
    definition : (S,) the spot as defined in the first file that has it
    min_margin_db : (S,) minimum over the bodies that have the spot, dB
    limiting_body : (S,) index of the body giving that minimum
    present_all : (S,) True when every body has the spot
    common_best : index of the platform-common best spot (highest minimum margin among spots present
        on all bodies; among all spots when none is present on all), -1 when there are no spots
    """

    body_names: tuple[str, ...]
    body_styles: tuple[str, ...]
    spot_names: tuple[str, ...]
    margin_db: np.ndarray
    worst_wheel: np.ndarray
    worst_angle_deg: np.ndarray
    positions_m: np.ndarray
    carried: np.ndarray
    definition: tuple[Spot, ...]
    min_margin_db: np.ndarray
    limiting_body: np.ndarray
    present_all: np.ndarray
    common_best: int

    def order(self) -> np.ndarray:
        """Spot indices, best minimum margin first (spots present on all bodies before the others)."""
        key = np.where(np.isnan(self.min_margin_db), -np.inf, self.min_margin_db)
        return np.lexsort((-key, ~self.present_all))


def platform_spots(vehicles: list[Vehicle], carry_landmark_spots: bool = True) -> list[list[Spot]]:
    """Per body, its own spots plus (optionally) the portable spots of other files it lacks."""
    portable: dict[str, Spot] = {}
    for v in vehicles:
        for s in v.spots:
            if is_landmark_relative(s) and s.name not in portable:
                portable[s.name] = s
    out = []
    for v in vehicles:
        own = list(v.spots)
        names = {s.name for s in own}
        if carry_landmark_spots:
            own += [s for n, s in portable.items() if n not in names]
        out.append(own)
    return out


def compare_bodies(
    vehicles: list[Vehicle], scenes: list[Scene] | None = None, carry_landmark_spots: bool = True
) -> Comparison:
    """Score every spot on every body and find the platform-common best spot.

    Parameters
    ----------
    vehicles : the bodies (one Vehicle per body style)
    scenes : prepared scenes of the same vehicles (made when not given)
    carry_landmark_spots : give each body the landmark-relative spots of the other files it lacks
    """
    if not vehicles:
        raise ValueError("compare_bodies needs at least one vehicle")
    scenes = scenes or [Scene.from_vehicle(v) for v in vehicles]
    per_body = platform_spots(vehicles, carry_landmark_spots)
    names: list[str] = []
    definition: dict[str, Spot] = {}
    for spots in per_body:
        for s in spots:
            if s.name not in definition:
                definition[s.name] = s
                names.append(s.name)
    S, B = len(names), len(vehicles)
    idx = {n: i for i, n in enumerate(names)}
    margin = np.full((S, B), np.nan)
    wheel = np.full((S, B), "", dtype=object)
    angle = np.full((S, B), np.nan)
    pos = np.full((S, B, 3), np.nan)
    carried = np.zeros((S, B), bool)
    for b, (v, scene, spots) in enumerate(zip(vehicles, scenes, per_body)):
        if not spots:
            continue
        p = np.array([v.resolve_spot(s) for s in spots], float)
        ax = np.array([v.spot_axis(s) for s in spots], float)
        sc = score_spots(scene, p, ax, [s.name for s in spots])
        own = {s.name for s in v.spots}
        for k, s in enumerate(spots):
            i = idx[s.name]
            w = int(sc.worst_wheel[k])
            margin[i, b] = sc.margin_db[k]
            wheel[i, b] = sc.wheel_ids[w]
            angle[i, b] = sc.worst_angle_deg[k, w]
            pos[i, b] = p[k]
            carried[i, b] = s.name not in own
    present = ~np.isnan(margin)
    present_all = present.all(axis=1)
    with np.errstate(invalid="ignore"):
        masked = np.where(present, margin, np.inf)
        limiting = np.argmin(masked, axis=1)
        min_margin = np.where(present.any(axis=1), masked[np.arange(S), limiting], np.nan)
    common = -1
    if S:
        pool = present_all if present_all.any() else present.any(axis=1)
        key = np.where(pool, min_margin, -np.inf)
        common = int(np.argmax(key))
    return Comparison(
        body_names=tuple(v.name for v in vehicles),
        body_styles=tuple(v.body_style for v in vehicles),
        spot_names=tuple(names),
        margin_db=margin,
        worst_wheel=wheel,
        worst_angle_deg=angle,
        positions_m=pos,
        carried=carried,
        definition=tuple(definition[n] for n in names),
        min_margin_db=min_margin,
        limiting_body=limiting.astype(int),
        present_all=present_all,
        common_best=common,
    )


# ----- search over the shared mounting region ------------------------------------------------
@dataclass(frozen=True)
class CommonSearch:
    """Result of the shared-region search.

    Attributes
    ----------
    landmark : the x landmark the region is expressed from
    height_above_floor_m : z of the search as height above each body's floor, m; None when each
        body's own top-view region height is used
    step_m : grid spacing of the coarse search, m
    shared_outline : (N, 2) outline of the shared region, (x - landmark x, y), m
    offsets_m : (P, 2) searched points (dx from the landmark, y), m
    margin_db : (B, P) margin of every point on every body, dB; nan where the point is not a candidate
        on that body (outside the body or inside a wheelhouse: not scored, never the best)
    best_offset_m : (dx, y) of the best position (after refinement), m
    best_positions_m : (B, 3) the best position resolved on each body, m
    best_margins_db : (B,) margin there per body, dB
    best_worst_wheel : (B,) limiting wheel per body
    best_min_margin_db : smallest margin over the bodies at the best position, dB
    limiting_body : index of the body that sets that minimum
    """

    landmark: str
    height_above_floor_m: float | None
    step_m: float
    shared_outline: np.ndarray
    offsets_m: np.ndarray
    margin_db: np.ndarray
    best_offset_m: tuple[float, float]
    best_positions_m: np.ndarray
    best_margins_db: np.ndarray
    best_worst_wheel: tuple[str, ...]
    best_min_margin_db: float
    limiting_body: int

    def min_margin_db(self) -> np.ndarray:
        """(P,) smallest margin over the bodies at each searched point, dB; nan where the point is not
        a candidate position on some body (outside it or in a wheelhouse; core.placement)."""
        return self.margin_db.min(axis=0)

    def as_spot(self, name: str = "shared best position") -> Spot | None:
        """The best position as a portable spot (only when the height is measured from the floor)."""
        if self.height_above_floor_m is None:
            return None
        dx, y = self.best_offset_m
        return Spot(name=name, x_m=round(dx, 4), y_m=round(y, 4), z_m=self.height_above_floor_m,
                    x_from=self.landmark, z_from="floor")


class NoSharedRegion(ValueError):
    """The bodies' top-view mounting regions do not overlap once expressed relative to the landmark."""


def _top_regions(v: Vehicle, landmark: str) -> list[tuple[Polygon, float]]:
    x0 = v.landmark_x(landmark)
    out = []
    for r in v.regions:
        if r.view == "top":
            pts = np.asarray(r.outline, float) - [x0, 0.0]
            out.append((Polygon(pts).buffer(0), float(r.height_m)))
    return out


def shared_region(vehicles: list[Vehicle], landmark: str = "rear_axle") -> Polygon:
    """Intersection over the bodies of (the union of each body's top-view regions), x relative to the landmark."""
    if landmark not in LANDMARKS:
        raise ValueError(f"unknown landmark {landmark!r}; use one of {', '.join(LANDMARKS)}")
    shared = None
    for v in vehicles:
        regs = _top_regions(v, landmark)
        if not regs:
            raise NoSharedRegion(f"{v.name}: the file has no top-view mounting region")
        body = unary_union([p for p, _ in regs])
        shared = body if shared is None else shared.intersection(body)
    if shared is None or shared.is_empty or shared.area < 1e-6:
        raise NoSharedRegion(
            f"the bodies' top-view mounting regions do not overlap when measured from the {landmark.replace('_', ' ')}"
        )
    return shared


def _heights(v: Vehicle, landmark: str, offsets: np.ndarray, above_floor: float | None) -> np.ndarray:
    """z per point on body v: the floor under the point + above_floor (Vehicle.floor_height_at, the
    rule of ``z_from = "floor"`` spots), or the height of the first top region containing it."""
    if above_floor is not None:
        x0 = v.landmark_x(landmark)
        return np.array([v.floor_height_at(float(dx) + x0) + above_floor for dx in offsets[:, 0]])
    from shapely import contains_xy

    z = np.full(len(offsets), np.nan)
    for poly, h in _top_regions(v, landmark):
        inside = contains_xy(poly.buffer(1e-9), offsets[:, 0], offsets[:, 1]) & np.isnan(z)
        z[inside] = h
    # a point on the shared region's boundary may miss every buffered polygon by rounding
    z[np.isnan(z)] = _top_regions(v, landmark)[0][1]
    return z


def _score_offsets(vehicles, scenes, landmark, offsets, above_floor):
    """(B, P) margins, (B, P) worst-wheel ids and (B, P, 3) positions of offset points.

    A point that is not a candidate on a body (outside it or in a wheelhouse: core.placement) is not
    scored there: its margin is nan and its wheel ""."""
    margins, wheels, positions = [], [], []
    for v, sc in zip(vehicles, scenes):
        x0 = v.landmark_x(landmark)
        z = _heights(v, landmark, offsets, above_floor)
        p = np.column_stack([offsets[:, 0] + x0, offsets[:, 1], z])
        ok = candidate_mask(sc, p[:, 0], p[:, 1], p[:, 2])
        m = np.full(len(p), np.nan)
        w = [""] * len(p)
        if ok.any():
            s = score_spots(sc, p[ok])
            m[ok] = s.margin_db
            for k, i in enumerate(np.flatnonzero(ok)):
                w[i] = s.wheel_ids[s.worst_wheel[k]]
        margins.append(m)
        wheels.append(w)
        positions.append(p)
    return np.array(margins).reshape(len(vehicles), len(offsets)), wheels, np.array(positions)


def _smallest_over_bodies(margins: np.ndarray) -> np.ndarray:
    """(P,) smallest margin over the bodies; -inf where the point is not a candidate on some body."""
    return np.where(np.isnan(margins), -np.inf, margins).min(axis=0)


def _check_search_work(shared, step_m: float, scenes: list[Scene]) -> None:
    """Raise WorkLimitError (core.bounds) when the search grid at ``step_m`` exceeds MAX_HEATMAP_CELLS
    cells or its links over every body (cells x wheels x angles, summed) exceed MAX_LINKS; the message
    gives the step that fits. The refinement (81 points) is not counted."""
    import math

    from core.bounds import MAX_HEATMAP_CELLS, MAX_LINKS, WorkLimitError

    lo_x, lo_y, hi_x, hi_y = shared.bounds
    box = max(1, math.floor((hi_x - lo_x) / step_m + 1e-9)) * max(1, math.floor((hi_y - lo_y) / step_m + 1e-9))
    per_cell = sum(len(s.wheels) * len(s.angles_rad) for s in scenes)
    cells = shared.area / step_m**2
    if box <= MAX_HEATMAP_CELLS and cells * per_cell <= MAX_LINKS:
        return
    need = max((hi_x - lo_x) * (hi_y - lo_y) / MAX_HEATMAP_CELLS, shared.area * per_cell / MAX_LINKS)
    fit = math.ceil(math.sqrt(need) * 1.02 * 1000.0) / 1000.0
    raise WorkLimitError(
        f"the shared-region search at a step of {step_m:g} m would need about {cells:,.0f} cells x "
        f"{per_cell:,} links per cell over the bodies; the limits are {MAX_HEATMAP_CELLS:,} cells and "
        f"{MAX_LINKS:,} links: a step of {fit:g} m or more fits")


def search_common_position(
    vehicles: list[Vehicle],
    landmark: str = "rear_axle",
    step_m: float = 0.10,
    height_above_floor_m: float | None = None,
    scenes: list[Scene] | None = None,
    refine: bool = True,
    progress: Callable[[int, int], None] | None = None,
) -> CommonSearch:
    """Grid search of the shared top-view region for the position with the largest smallest margin.

    The region searched is the intersection over the bodies of each body's top-view mounting
    regions with x measured from ``landmark`` (y is shared as it is: every body is centred on
    y = 0). A point (dx, y) sits on body b at x = dx + landmark_x(b), y, and at z = the body's
    floor height + ``height_above_floor_m``, or, when that is None, at the height of the body's
    own top-view region. The coarse grid (spacing ``step_m``) is followed by one refinement
    around the best cell (spacing step/4 over +-step). The receiver axis is the radio default of
    each body. ``progress(done, total)`` is called after each body.

    Raises NoSharedRegion when the regions do not overlap.
    """
    if not step_m > 0:
        raise ValueError("step_m must be positive")
    scenes = scenes or [Scene.from_vehicle(v) for v in vehicles]
    shared = shared_region(vehicles, landmark)
    from shapely import contains_xy

    lo_x, lo_y, hi_x, hi_y = shared.bounds
    _check_search_work(shared, step_m, scenes)
    nx = max(1, int(np.floor((hi_x - lo_x) / step_m + 1e-9)))
    ny = max(1, int(np.floor((hi_y - lo_y) / step_m + 1e-9)))
    xs = lo_x + (np.arange(nx) + 0.5) * (hi_x - lo_x) / nx
    ys = lo_y + (np.arange(ny) + 0.5) * (hi_y - lo_y) / ny
    xx, yy = np.meshgrid(xs, ys)
    keep = contains_xy(shared, xx.ravel(), yy.ravel())
    offsets = np.column_stack([xx.ravel()[keep], yy.ravel()[keep]])
    if len(offsets) == 0:  # a sliver narrower than the step: use its representative point
        rp = shared.representative_point()
        offsets = np.array([[rp.x, rp.y]])
    total = len(vehicles) * (2 if refine else 1)
    margins, _, _ = _score_offsets(vehicles, scenes, landmark, offsets, height_above_floor_m)
    if progress:
        progress(len(vehicles), total)
    mins = _smallest_over_bodies(margins)
    if not np.isfinite(mins).any():
        raise NoSharedRegion("no point of the shared mounting region lies inside every body (outside the "
                             "wheelhouses) at the search height")
    best = offsets[int(np.argmax(mins))]
    cand = best[None, :]
    if refine:
        d = np.arange(-4, 5) * (step_m / 4.0)
        gx, gy = np.meshgrid(best[0] + d, best[1] + d)
        pts = np.column_stack([gx.ravel(), gy.ravel()])
        pts = pts[contains_xy(shared, pts[:, 0], pts[:, 1])]
        cand = np.vstack([best[None, :], pts])
    cm, cw, cp = _score_offsets(vehicles, scenes, landmark, cand, height_above_floor_m)
    if progress:
        progress(total, total)
    k = int(np.argmax(_smallest_over_bodies(cm)))  # the coarse best (index 0) is a candidate on every body
    per_body = cm[:, k]
    lim = int(np.argmin(per_body))
    return CommonSearch(
        landmark=landmark,
        height_above_floor_m=height_above_floor_m,
        step_m=step_m,
        shared_outline=np.asarray(shared.exterior.coords if shared.geom_type == "Polygon"
                                  else max(shared.geoms, key=lambda g: g.area).exterior.coords),
        offsets_m=offsets,
        margin_db=margins,
        best_offset_m=(float(cand[k, 0]), float(cand[k, 1])),
        best_positions_m=cp[:, k, :],
        best_margins_db=per_body,
        best_worst_wheel=tuple(cw[b][k] for b in range(len(vehicles))),
        best_min_margin_db=float(per_body[lim]),
        limiting_body=lim,
    )


# ----- what the comparison recommends ------------------------------------------------------------
#: a definition that differs by more than this between files is "a different place", m
SAME_PLACE_TOLERANCE_M = 0.01


@dataclass(frozen=True)
class NameAtSeveralPlaces:
    """A spot name defined by several files at different places: the table then compares different places under
    one name. ``definitions``: per body that defines it, (body index, the definition in words)."""

    name: str
    definitions: tuple[tuple[int, str], ...]

    def text(self, labels) -> str:
        return (f"'{self.name}' is defined at different places: "
                + "; ".join(f"{labels[b]} {d}" for b, d in self.definitions)
                + " (each file places it in its own coordinates, so the row compares different places)")


def _definition_words(s: Spot) -> str:
    x = f"x = {s.x_m:+.3f} m" + ("" if s.x_from == "origin" else f" from the {s.x_from.replace('_', ' ')}")
    z = f"z = {s.z_m:.3f} m" + (" above the floor" if s.z_from == "floor" else "")
    return f"{x}, y = {s.y_m:+.3f} m, {z}"


def names_at_several_places(vehicles: list[Vehicle]) -> list[NameAtSeveralPlaces]:
    """Spot names whose definitions differ between the files that define them (landmark, or any coordinate by more
    than SAME_PLACE_TOLERANCE_M). A landmark-relative spot carried to a body that lacks it is the same place by
    construction and never flagged."""
    by_name: dict[str, list[tuple[int, Spot]]] = {}
    for b, v in enumerate(vehicles):
        for s in v.spots:
            by_name.setdefault(s.name, []).append((b, s))
    out = []
    for name, defs in by_name.items():
        if len(defs) < 2:
            continue
        first = defs[0][1]
        differ = any(s.x_from != first.x_from or s.z_from != first.z_from
                     or max(abs(s.x_m - first.x_m), abs(s.y_m - first.y_m), abs(s.z_m - first.z_m))
                     > SAME_PLACE_TOLERANCE_M for _, s in defs[1:])
        if differ:
            out.append(NameAtSeveralPlaces(name, tuple((b, _definition_words(s)) for b, s in defs)))
    return out


@dataclass(frozen=True)
class Recommendation:
    """Which of the platform-common spot and the searched position the comparison recommends, and why.

    ``common_meets`` (B,): the common spot's margin >= 0 on each body (False where it is absent);
    ``search_meets`` (B,) the same for the searched position (None without a search)."""

    choice: str  # "common spot" or "searched position"
    reason: str
    common_meets: tuple[bool, ...]
    search_meets: tuple[bool, ...] | None


def recommend(c: Comparison, search: CommonSearch | None = None) -> Recommendation | None:
    """The rule: a spot that already exists in the files (the platform-common spot) is preferred when it meets the
    requirement on every body; otherwise the searched position when it does; when neither does, the one with the
    larger smallest margin, saying that neither meets it. None when there is no spot at all."""
    if c.common_best < 0:
        return None
    i = c.common_best
    cm = tuple(bool(np.isfinite(m) and m >= 0) for m in c.margin_db[i])
    common_all = all(cm) and bool(c.present_all[i])
    name = c.spot_names[i]
    if search is None:
        reason = (f"'{name}' meets the requirement on every body (smallest margin {c.min_margin_db[i]:+.1f} dB)"
                  if common_all else f"'{name}' does not meet the requirement on every body and no shared-region "
                  f"search was run; the smallest margin is {c.min_margin_db[i]:+.1f} dB")
        return Recommendation("common spot", reason, cm, None)
    sm = tuple(bool(m >= 0) for m in search.best_margins_db)
    search_all = all(sm)
    gain = search.best_min_margin_db - float(c.min_margin_db[i])
    if common_all:
        extra = (f"; the searched position would add {gain:+.1f} dB on the weakest body but is a new location to "
                 "package" if gain > 0 else "")
        return Recommendation("common spot", f"'{name}' already meets the requirement on every body (smallest margin "
                              f"{c.min_margin_db[i]:+.1f} dB){extra}", cm, sm)
    if search_all:
        fails = [c.body_styles[b] for b, ok in enumerate(cm) if not ok]
        return Recommendation("searched position", f"'{name}' fails on {', '.join(fails)}; the searched position "
                              f"meets the requirement on every body (smallest margin {search.best_min_margin_db:+.1f} "
                              "dB)", cm, sm)
    if gain > 0:
        return Recommendation("searched position", f"neither meets the requirement on every body; the searched position "
                              f"has the larger smallest margin ({search.best_min_margin_db:+.1f} dB against "
                              f"{c.min_margin_db[i]:+.1f} dB for '{name}')", cm, sm)
    return Recommendation("common spot", f"neither meets the requirement on every body; '{name}' has the larger "
                          f"smallest margin ({c.min_margin_db[i]:+.1f} dB against {search.best_min_margin_db:+.1f} dB "
                          "for the searched position)", cm, sm)


__all__ = [
    "LANDMARKS",
    "CommonSearch",
    "Comparison",
    "NameAtSeveralPlaces",
    "NoSharedRegion",
    "Recommendation",
    "compare_bodies",
    "is_landmark_relative",
    "names_at_several_places",
    "platform_spots",
    "recommend",
    "search_common_position",
    "shared_region",
]

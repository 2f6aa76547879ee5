"""Limits on sizes and on work, in one place, and the checks that enforce them.

Two kinds of limit:

- **Sizes in the vehicle file** (refused at load by ``core.vehicle.check_vehicle`` and the model's
  field bounds, documented in docs/vehicle-format.md): body extent, tire and rim sizes, how far
  zones and mounting regions may reach beyond the body, outline point counts, list lengths and
  text lengths. They keep every file physically plausible and every message short.
- **Work per computation** (documented in docs/performance.md and the README): the links of one
  ranking (spots x wheels x angles, checked at load) and of one heatmap or one report's heatmaps
  (cells x wheels x angles, checked before computing, with the grid step that would fit), the grid
  cells of one heatmap, and the resonant speeds listed per wheel. A link is one (position, wheel,
  wheel angle) level.

The numbers are engineering choices of this program, not physical constants; each says why.
"""

from __future__ import annotations

import math

import numpy as np

# ----- sizes in the vehicle file ---------------------------------------------------------------
MAX_BODY_LENGTH_M = 30.0
MAX_BODY_WIDTH_M = 5.0
MAX_BODY_HEIGHT_M = 6.0
#: outer diameter of a tire: 0.30 m is below the smallest road tires with a pressure sensor
#: (10-inch rims give about 0.45 m); 2 m is above the largest truck and farm tires in question
MIN_TIRE_DIAMETER_M = 0.30
MAX_TIRE_DIAMETER_M = 2.0
#: nominal rim (bead seat) diameter: 8 in (0.2032 m) and up; tire codes allow 10-30 in
MIN_RIM_DIAMETER_M = 0.20
#: section width of a tire, and rim width: narrower than any road tire or rim in question
MIN_SECTION_WIDTH_M = 0.08
MAX_SECTION_WIDTH_M = 1.0
MIN_RIM_WIDTH_M = 0.05
MAX_RIM_WIDTH_M = 1.0
#: sensor mounting radius: a sensor sits on the rim, well away from the hub
MIN_SENSOR_RADIUS_M = 0.05
#: zones and mounting regions lie within the body's bounding box grown by this margin on every side
#: (a zone is a panel of the body; a region is where a receiver can be mounted on or in it)
REACH_MARGIN_M = 0.5
MIN_FREQUENCY_HZ = 1e6
MAX_FREQUENCY_HZ = 10e9
#: wheel angles per turn (the file's ``radio.angles_per_turn`` and the ``--angles`` option)
MIN_ANGLES_PER_TURN = 4
MAX_ANGLES_PER_TURN = 3600
MAX_WHEELS = 16
MAX_SPOTS = 500
MAX_ZONES = 32
MAX_REGIONS = 8
MAX_MATERIALS = 32
#: points of the body's top and side outlines (the cost of every link grows with them; 200 points
#: resolve a 5 m body to 2.5 cm, well below a tenth of the wavelength at 433.92 MHz, 6.9 cm)
MAX_BODY_OUTLINE_POINTS = 200
#: points of a zone or region outline
MAX_OUTLINE_POINTS = 100
#: lengths of text fields, characters
MAX_NAME_CHARS = 80
MAX_DESCRIPTION_CHARS = 2000
MAX_NOTE_CHARS = 200  # a material's description
MAX_TIRE_CODE_CHARS = 24
#: JSON nesting the loader accepts
MAX_NESTING = 32

# ----- the measurement file (core.measurements, docs/measurement-format.md) --------------------
#: size of a measurement file, bytes, and its rows of measured levels (a slow turn of every wheel at
#: 1 degree steps on 40 receiver positions is 57,600 rows; a long drive log at a few frames a second
#: per wheel stays well within)
MAX_MEASUREMENT_BYTES = 20_000_000
MAX_MEASUREMENT_ROWS = 200_000
#: distinct receiver positions in one file (as many as a vehicle file's spots)
MAX_MEASUREMENT_SPOTS = MAX_SPOTS
#: distinct frequencies in one file: the model is prepared once per frequency
MAX_MEASUREMENT_FREQUENCIES = 8
#: levels without a wheel angle needed per (position, wheel, frequency): the fit compares their
#: percentiles (10th to 90th) with the model's, which needs at least this many to mean anything
MIN_LEVELS_WITHOUT_ANGLE = 10
#: links the fit prepares (one per level with an angle, FIT_TURN_ANGLES per group without angles);
#: about 0.3 kB each stays in memory for the whole fit (core.link_terms)
MAX_FIT_LINKS = 400_000

# ----- work per computation --------------------------------------------------------------------
#: links (position x wheel x wheel angle) of one ranking, one heatmap, all heatmaps of one report, or
#: one shared-region search. Measured on a shared 2-core machine (docs/performance.md, Work limits):
#: a ranking at the limit took 40 s on a sample body and 118 s with the most detailed outlines and
#: zones the format allows, with a peak RSS under 0.5 GB (the levels alone take 40 MB).
MAX_LINKS = 5_000_000
#: grid cells of one heatmap (the grid covers the region's bounding box)
MAX_HEATMAP_CELLS = 100_000
#: resonant speeds listed per wheel in a burst result (the rest are counted, not listed)
MAX_RESONANT_SPEEDS = 20


class WorkLimitError(ValueError):
    """A computation would exceed a documented work limit; the message names the limit and what fits."""


class NonFiniteResultError(ValueError):
    """A level, margin or heatmap cell is not a finite number; nothing is tabulated or drawn from it."""


def _n(x: float) -> str:
    return f"{x:,.0f}"


def check_rank_work(spots: int, wheels: int, angles: int) -> str | None:
    """The problem with a ranking of ``spots`` x ``wheels`` x ``angles`` links, or None when it fits."""
    links = spots * wheels * angles
    if links <= MAX_LINKS:
        return None
    fit = MAX_LINKS // max(1, wheels * angles)
    return (f"{_n(spots)} spots x {wheels} wheels x {angles} angles per turn = {_n(links)} links; the limit is "
            f"{_n(MAX_LINKS)} links per ranking: use at most {_n(fit)} spots or fewer angles per turn")


def grid_shape(outline, step_m: float) -> tuple[int, int]:
    """(nu, nv): the heatmap grid over the outline's bounding box at ``step_m`` (as core.scoring lays it)."""
    poly = np.asarray(outline, float)
    w, h = poly.max(axis=0) - poly.min(axis=0)
    nu = max(1, math.floor(w / step_m + 1e-9))
    nv = max(1, math.floor(h / step_m + 1e-9))
    return nu, nv


def heatmap_work(regions, step_m: float, wheels: int, angles: int) -> tuple[int, int, int]:
    """(largest grid of one region, cells inside the regions, links) of heatmaps over ``regions``.

    Cells inside a region are counted exactly (core.scoring.grid_for_region) only when every grid
    is within MAX_HEATMAP_CELLS, so the count itself stays cheap; otherwise the inside count is
    estimated from the regions' areas (the grid is refused anyway)."""
    from shapely.geometry import Polygon

    from core.scoring import grid_for_region

    boxes = [grid_shape(r.outline, step_m) for r in regions]
    largest = max((nu * nv for nu, nv in boxes), default=0)
    if largest <= MAX_HEATMAP_CELLS:
        cells = sum(int(grid_for_region(r, step_m)[2].sum()) for r in regions)
    else:
        cells = int(sum(Polygon(r.outline).area for r in regions) / step_m**2)
    return largest, cells, cells * wheels * angles


def check_heatmap_work(regions, step_m: float, wheels: int, angles: int, what: str = "the heatmap") -> None:
    """Raise WorkLimitError when heatmaps over ``regions`` at ``step_m`` exceed MAX_HEATMAP_CELLS
    cells in one grid or MAX_LINKS links in all; the message gives the smallest step that fits."""
    if not (math.isfinite(step_m) and step_m > 0):
        raise WorkLimitError(f"{what}: the grid step must be a positive length in m, not {step_m!r}")
    regions = list(regions)
    largest, cells, links = heatmap_work(regions, step_m, wheels, angles)
    if largest <= MAX_HEATMAP_CELLS and links <= MAX_LINKS:
        return
    fit = step_that_fits(regions, step_m, wheels, angles)
    if largest > MAX_HEATMAP_CELLS:
        why = f"a grid of {_n(largest)} cells; the limit is {_n(MAX_HEATMAP_CELLS)} cells per heatmap"
    else:
        why = (f"{_n(cells)} cells x {wheels} wheels x {angles} angles per turn = {_n(links)} links; "
               f"the limit is {_n(MAX_LINKS)} links")
    raise WorkLimitError(f"{what} at a step of {step_m:g} m would need {why}; a step of {fit:g} m or more fits")


def step_that_fits(regions, step_m: float, wheels: int, angles: int) -> float:
    """The smallest step (rounded up to 1 mm) at which the heatmaps fit both work limits."""
    regions = list(regions)
    from shapely.geometry import Polygon

    area = sum(Polygon(r.outline).area for r in regions)
    box = max((float(np.prod(np.ptp(np.asarray(r.outline, float), axis=0))) for r in regions), default=0.0)
    need = max(box / MAX_HEATMAP_CELLS, area * wheels * angles / MAX_LINKS, 1e-12)
    step = max(step_m, math.ceil(math.sqrt(need) * 1000.0) / 1000.0)
    for _ in range(200):  # the area estimate is close; walk up in 1 mm until the exact count fits
        largest, _, links = heatmap_work(regions, step, wheels, angles)
        if largest <= MAX_HEATMAP_CELLS and links <= MAX_LINKS:
            return step
        step = round(step + 0.001, 3)
    return step


def first_non_finite(values: np.ndarray) -> tuple | None:
    """Index of the first entry that is not finite (nan or +-inf), or None."""
    bad = ~np.isfinite(np.asarray(values, float))
    if not bad.any():
        return None
    return tuple(int(i) for i in np.argwhere(bad)[0])


def require_finite_scores(scores, source: str = "") -> None:
    """Raise NonFiniteResultError naming the spot (and wheel) when a score of ``scores`` is not finite.

    ``scores`` is a core.scoring.SpotScores; ``source`` names the file for the message. This is the
    guard before levels and margins become a table, a JSON document or a figure."""
    where = f"{source}: " if source else ""
    for label, arr, unit in (("level", scores.levels_dbm, "dBm"), ("worst-case level", scores.worst_dbm, "dBm"),
                             ("median level", scores.median_dbm, "dBm"), ("margin", scores.margin_db, "dB")):
        idx = first_non_finite(arr)
        if idx is None:
            continue
        s = idx[0]
        x, y, z = (float(c) for c in scores.positions[s])
        wheel = f", wheel {scores.wheel_ids[idx[1]]}" if len(idx) > 1 else ""
        raise NonFiniteResultError(
            f"{where}spot {scores.names[s]!r} at ({x:.3f}, {y:.3f}, {z:.3f}) m{wheel}: the {label} is "
            f"{float(np.asarray(arr)[idx])} {unit}, not a finite number (is the spot on a sensor's path?); "
            f"nothing is reported for it: move the spot")


def require_finite_heatmap(hm, region_name: str, source: str = "") -> None:
    """Raise NonFiniteResultError when a cell inside the region (worst wheel set) has a non-finite
    margin. Cells outside the region are NaN by design and are not checked."""
    inside = np.asarray(hm.worst_wheel) >= 0
    bad = inside & ~np.isfinite(hm.margin_db)
    if not bad.any():
        return
    iv, iu = (int(i) for i in np.argwhere(bad)[0])
    x, y, z = (float(c) for c in hm.points()[iv, iu])
    where = f"{source}: " if source else ""
    raise NonFiniteResultError(
        f"{where}heatmap of region {region_name!r}: the margin at ({x:.3f}, {y:.3f}, {z:.3f}) m is "
        f"{float(hm.margin_db[iv, iu])}, not a finite number; nothing is reported for this heatmap")


def bounded_resonant(speeds: np.ndarray) -> tuple[np.ndarray, int]:
    """The first MAX_RESONANT_SPEEDS of ``speeds`` and how many there were."""
    speeds = np.asarray(speeds, float)
    return speeds[:MAX_RESONANT_SPEEDS], len(speeds)

"""Scores: per-(spot, wheel) worst case over a turn, spot margins, ranking, heatmap grids.

Scene.from_vehicle prepares everything that does not depend on the receiver spot (hull, wheel
geometry, sensor positions and axes over the turn, losses at the frequency); ``spot_levels``
computes the received level for any set of spots, shape (S, W, A) in dBm.

- worst case of (spot, wheel): the minimum over the turn, or a low percentile when the radio setup
  asks for one; its angle; the median;
- spot margin: the worst wheel's worst-case level - sensitivity - required margin, dB;
- ranking: by margin, ties by the worst wheel's median; spots within RANK_RESOLUTION_DB of the best
  are reported as not ranked apart (SpotScores.tied_with_best).
"""

from __future__ import annotations

import dataclasses
import itertools
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field

import numpy as np

from core import kernels
from core.geometry import Hull, build_hull, inside_hull, start_bits
from core.links import LinkField, level_dbm, turn_field, turn_fields
from core.materials import material_loss_db, road_permittivity
from core.propagation import SHORT_DIPOLE_GAIN_DBI, near_field_limit_m, wavelength_m
from core.turn_minimum import REFINE_INTERVALS, refine_minimum
from core.vehicle import Region, Vehicle
from core.wheel import WheelGeometry, sensor_axes, sensor_positions

#: margins closer than this are not ranked apart, dB: against the whole-vehicle full-wave reference the
#: engine's cabin levels agree to 1.6-3.0 dB RMS after one mean offset per body, and it does not rank
#: spots whose levels lie that close (Spearman rho 0.16-0.52; docs/VALIDATION.md, "The engine with the
#: cabin as a lossy cavity"). The difference of two spots' levels, each uncertain by up to 3.0 dB RMS,
#: is uncertain by about sqrt(2) x 3.0 = 4.3 dB: rounded up to 4.5 dB. An engineering rule from our own
#: validation (tests/test_fullwave_agreement.py keeps it covering the measured disagreement).
RANK_RESOLUTION_DB = 4.5
#: the engine against the whole-vehicle full-wave reference (sedan, hatchback, SUV at their bands, no road,
#: mean level; docs/VALIDATION.md): lowest and highest RMS after one mean offset per body, and lowest and
#: highest offset (reference - engine), dB; tests/test_fullwave_agreement.py recomputes them
FULLWAVE_RMS_RANGE_DB = (1.64, 3.00)
FULLWAVE_OFFSET_RANGE_DB = (-4.9, -1.3)

#: links per work chunk: bounds memory (about 2 kB per link in flight) and sets cancel latency
CHUNK_LINKS = 12_000


@dataclass(frozen=True, eq=False)
class Scene:
    """A vehicle prepared for fast link computation (SI units, dB)."""

    vehicle: Vehicle
    hull: Hull
    wheels: tuple[WheelGeometry, ...]
    angles_rad: np.ndarray  # (A,)
    sensor_pos: np.ndarray  # (W, A, 3)
    sensor_axis: np.ndarray  # (W, A, 3)
    sensor_inside: np.ndarray  # (W, A) bool
    sensor_bits: np.ndarray  # (W, A) packed hull membership bits (core.geometry.start_bits)
    freq_hz: float
    wavelength_m: float
    eirp_dbm: float
    receiver_gain_dbi: float
    receiver_pattern: str
    sensor_kind: str  # "dipole", "isotropic" or "table"
    null_floor_db: float
    sensitivity_dbm: float
    required_margin_db: float
    worst_percentile: float
    ground_reflection: bool
    road_eps: complex
    use_wheel_loss: bool
    sidewall_loss_db: float
    tread_loss_db: float
    wheel_tables: tuple = ()
    wheel_model_label: str = "knife edge"
    #: why the wheel model asked for in the file is not the one in use ("" when it is), e.g. no
    #: installed-pattern table for the band; set where the fallback happens (Scene.from_vehicle)
    wheel_model_fallback: str = ""
    cavity: object = None  # core.cavity.Cavity: the diffuse level inside the hull, or None
    fade_probability: float = 0.0  # the scores' level is the one exceeded with probability 1 - this (core.links.fade_power)

    @property
    def wheel_ids(self) -> tuple[str, ...]:
        return tuple(w.id for w in self.wheels)

    @property
    def wavenumber(self) -> float:
        """Free-space wavenumber 2 pi / lambda, rad/m."""
        return 2.0 * np.pi / self.wavelength_m

    @property
    def score_method(self) -> str:
        """How the worst case over a turn is taken (statistic and angle method), for every output."""
        n = len(self.angles_rad)
        floor = f"nulls held at {self.null_floor_db:g} dB below the rays' matched power sum"
        if getattr(self, "cavity", None) is not None:
            q = self.fade_probability
            fade = (f"the level exceeded with probability {1 - q:.3g} (Rician fade of the diffuse part)" if q > 0
                    else "its mean level")
            floor += (f"; inside the hull, the cabin's diffuse field fed through its openings (core.cavity, contents "
                      f"{self.vehicle.body.cabin_absorption_m2:g} m^2) added to the rays, {fade}")
        if self.worst_percentile > 0:
            return f"{self.worst_percentile:g}th percentile of the level over {n} sampled angles; {floor}"
        return (f"minimum over the continuous turn: {n} sampled angles, the {REFINE_INTERVALS} lowest intervals "
                f"refined by complex-field interpolation (core.turn_minimum); {floor}")

    @classmethod
    def from_vehicle(cls, v: Vehicle, wheel_model: str | None = None, ground_reflection: bool | None = None,
                     cavity: bool = True) -> Scene:
        """Prepare a scene; ``wheel_model`` and ``ground_reflection`` override the file's radio setup;
        ``cavity=False`` leaves out the diffuse level inside the hull (core.cavity)."""
        r = v.radio
        f = r.frequency_hz
        overrides = {name: m.loss_db for name, m in v.materials.items()}

        def loss(name: str) -> float:
            return float(material_loss_db(name, f, overrides))

        wheels = tuple(WheelGeometry.from_wheel(w) for w in v.wheels)
        hull = vehicle_hull(v, wheels, loss)
        n = r.angles_per_turn
        angles = np.arange(n) * (2.0 * np.pi / n)
        pos = np.stack([sensor_positions(w, angles) for w in wheels])
        axis = np.broadcast_to(sensor_axes(angles, r.sensor.axis), pos.shape).copy()
        inside = inside_hull(hull, pos[..., 0], pos[..., 1], pos[..., 2])
        bits = start_bits(hull, pos[..., 0], pos[..., 1], pos[..., 2])
        model = wheel_model or r.wheel_model
        sensor_kind = r.sensor.pattern
        tables: tuple = ()
        label = "knife edge"
        fallback = ""
        if model == "installed_pattern" and r.sensor.pattern == "dipole":
            from core.wheel_patterns import table_for_wheel

            try:
                tables = tuple(table_for_wheel(w, f, r.sensor.axis) for w in wheels)
            except (FileNotFoundError, ValueError) as e:  # no table for this band or size
                fallback = f"installed pattern unavailable: {e}"
            else:
                sensor_kind = "table"
                label = "installed pattern: " + "; ".join(sorted({t.provenance for t in tables}))
        elif model == "installed_pattern":
            fallback = "installed patterns need a dipole sensor"
        if fallback:
            label = f"knife edge ({fallback})"
        rx_gain = r.receiver.gain_dbi
        scene = cls(
            vehicle=v,
            hull=hull,
            wheels=wheels,
            angles_rad=angles,
            sensor_pos=pos,
            sensor_axis=axis,
            sensor_inside=inside,
            sensor_bits=bits,
            freq_hz=f,
            wavelength_m=float(wavelength_m(f)),
            eirp_dbm=r.sensor_eirp_dbm,
            receiver_gain_dbi=rx_gain,
            receiver_pattern=r.receiver.pattern,
            sensor_kind=sensor_kind,
            null_floor_db=r.null_floor_db,
            sensitivity_dbm=r.receiver.sensitivity_dbm,
            required_margin_db=r.required_margin_db,
            worst_percentile=r.worst_case_percentile,
            ground_reflection=r.ground_reflection if ground_reflection is None else ground_reflection,
            road_eps=complex(road_permittivity(r.road_surface, f)),
            use_wheel_loss=sensor_kind != "table",
            sidewall_loss_db=loss("tire_sidewall"),
            tread_loss_db=loss("tire_tread"),
            wheel_tables=tables,
            wheel_model_label=label,
            wheel_model_fallback=fallback,
            fade_probability=r.fade_probability,
        )
        if cavity:
            scene = dataclasses.replace(scene, cavity=_cavity_of(scene))
        return scene


#: cavities already built, by what they depend on (body, zones, materials, wheels, radio; not the
#: spots or regions): an edit of a spot or a region, undo and redo reuse them
_CAVITIES: dict[str, object] = {}
_CAVITY_CACHE_SIZE = 48  # the sensitivity analysis rebuilds a dozen per body (core.sensitivity)


def _cavity_of(scene: Scene):
    """core.cavity.build_cavity for the scene, reused when nothing it depends on has changed."""
    import hashlib
    import json

    from core.cavity import build_cavity

    v = scene.vehicle
    data = v.model_dump(mode="json", exclude={"spots", "regions", "name", "description", "body_style"})
    data["_scene"] = [scene.sensor_kind, scene.ground_reflection, scene.use_wheel_loss, scene.wheel_model_label]
    key = hashlib.sha256(json.dumps(data, sort_keys=True).encode()).hexdigest()
    cav = _CAVITIES.get(key)
    if cav is None:
        cav = build_cavity(scene, v.body.cabin_absorption_m2)
        if len(_CAVITIES) >= _CAVITY_CACHE_SIZE:
            _CAVITIES.pop(next(iter(_CAVITIES)))
        _CAVITIES[key] = cav
    return cav


def vehicle_hull(v: Vehicle, wheels: tuple[WheelGeometry, ...], loss: Callable[[str], float]) -> Hull:
    """The vehicle's 2.5-D hull (core.geometry.build_hull): outlines, wheelhouses (tire radius plus the
    body's clearance), zones with their names and materials. ``loss(material name)`` gives each panel's
    crossing loss, dB; a body panel in no zone is ``metal``. (core.link_terms builds the same hull with
    material numbers in place of the losses, to learn which material each crossing goes through.)"""
    clearance = v.body.wheelhouse_clearance_m
    wh = []
    for w in wheels:
        inner = abs(w.centre[1]) - 0.5 * w.tire_width_m - clearance
        wh.append((w.centre[0], w.centre[2], w.tire_radius_m + clearance, w.outboard_sign, inner))
    top_zones, side_zones, top_labels, side_labels = [], [], [], []
    for z in v.zones:
        if z.view == "top":
            zmin = z.z_min_m if z.z_min_m is not None else -np.inf
            zmax = z.z_max_m if z.z_max_m is not None else np.inf
            top_zones.append((np.asarray(z.outline), loss(z.material), zmin, zmax))
            top_labels.append((z.name, z.material))
        else:
            side_zones.append((np.asarray(z.outline), loss(z.material)))
            side_labels.append((z.name, z.material))
    return build_hull(
        v.body.top_outline, v.body.side_outline, wh, top_zones, side_zones,
        default_loss_db=loss("metal"), wheelhouse_loss_db=loss(v.body.wheelhouse_material),
        top_zone_labels=top_labels, side_zone_labels=side_labels, default_material="metal",
        wheelhouse_material=v.body.wheelhouse_material,
    )


def _spot_inputs(scene: Scene, spots, axes):
    spots = np.atleast_2d(np.asarray(spots, float))
    if axes is None:
        a = np.asarray(scene.vehicle.radio.receiver.axis, float)
        axes = np.broadcast_to(a / np.linalg.norm(a), spots.shape)
    axes = np.atleast_2d(np.asarray(axes, float))
    axes = axes / np.linalg.norm(axes, axis=1, keepdims=True)
    bits = start_bits(scene.hull, spots[:, 0], spots[:, 1], spots[:, 2]) if scene.ground_reflection else None
    return spots, axes, bits


def spot_levels(scene: Scene, spots, axes=None) -> np.ndarray:
    """Received level, dBm, for spots (S, 3) m and receiver axes (S, 3) at the sampled angles: (S, W, A)."""
    return spot_turns(scene, spots, axes, refine=False).levels_dbm


@dataclass(frozen=True)
class TurnLevels:
    """Levels of S spots from W wheels over the turn (dBm) and each (spot, wheel)'s worst case.

    ``worst_dbm`` / ``worst_angle_rad`` (S, W): the minimum over the continuous turn
    (core.turn_minimum) when refined; otherwise None.
    """

    levels_dbm: np.ndarray  # (S, W, A) at the sampled angles
    worst_dbm: np.ndarray | None = None  # (S, W)
    worst_angle_rad: np.ndarray | None = None  # (S, W)

    @staticmethod
    def concatenate(parts: list[TurnLevels]) -> TurnLevels:
        """The turn levels of consecutive chunks of spots as one."""
        levels = np.concatenate([p.levels_dbm for p in parts])
        if any(p.worst_dbm is None for p in parts):
            return TurnLevels(levels)
        return TurnLevels(levels, np.concatenate([p.worst_dbm for p in parts]),
                          np.concatenate([p.worst_angle_rad for p in parts]))


def spot_turns(scene: Scene, spots, axes=None, refine: bool = True, chunk_links: int = CHUNK_LINKS,
               tick: Callable[[int], None] | None = None) -> TurnLevels:
    """Levels over the turn for spots (S, 3) m with receiver axes (S, 3), and (with ``refine`` and
    no percentile score) the minimum of each (spot, wheel) over the continuous turn.

    The sampled levels are computed in chunks of about ``chunk_links`` links (bounded memory);
    ``tick(done)`` is called after each chunk with the number of spots done (it may raise
    Cancelled). The refinement then runs over all S spots at once, so call this with a few hundred
    spots at a time for speed (core.turn_minimum: each of its steps is one vectorised call)."""
    spots, axes, bits = _spot_inputs(scene, spots, axes)
    S, W, A = len(spots), len(scene.wheels), len(scene.angles_rad)
    refine = refine and scene.worst_percentile <= 0
    re = np.empty((S, W, A))
    im = np.empty((S, W, A))
    floor2 = np.empty((S, W, A))
    diffuse = np.zeros((S, W, A))
    dfac = None
    if scene.cavity is not None:
        from core.cavity import spot_factor

        dfac = spot_factor(scene, spots, axes)
    per_chunk = max(1, chunk_links // max(1, W * A))
    all_wheels = kernels.available()  # the compiled link field takes every wheel of a chunk in one call
    for start in range(0, S, per_chunk):
        sl = slice(start, min(S, start + per_chunk))
        if all_wheels:
            f = turn_fields(scene, spots[sl], axes[sl], None if bits is None else bits[sl],
                            None if dfac is None else dfac[sl])
            re[sl], im[sl], floor2[sl], diffuse[sl] = f.re, f.im, f.floor2, f.diffuse
        for wi in range(W if not all_wheels else 0):
            f = turn_field(scene, wi, spots[sl], axes[sl], None if bits is None else bits[sl],
                           None if dfac is None else dfac[sl])
            re[sl, wi], im[sl, wi], floor2[sl, wi] = f.re, f.im, f.floor2
            diffuse[sl, wi] = f.diffuse
        if tick is not None:
            tick(sl.stop)
    field = LinkField(re, im, floor2, diffuse, scene.fade_probability)
    levels = level_dbm(scene, field.power())
    if not refine:
        return TurnLevels(levels)
    p, th = refine_minimum(scene, spots, axes, field, bits, dfac)
    return TurnLevels(levels, level_dbm(scene, p), th)


def vehicle_spot_arrays(v: Vehicle) -> tuple[list[str], np.ndarray, np.ndarray]:
    """Names, resolved positions (S, 3) and unit antenna axes (S, 3) of the file's spots."""
    names = [s.name for s in v.spots]
    pos = np.array([v.resolve_spot(s) for s in v.spots], float).reshape(-1, 3)
    ax = np.array([v.spot_axis(s) for s in v.spots], float).reshape(-1, 3)
    return names, pos, ax


@dataclass(frozen=True)
class SpotScores:
    """Scores of S spots over W wheels (levels dBm, margins dB, angles deg)."""

    names: tuple[str, ...]
    positions: np.ndarray  # (S, 3) m
    wheel_ids: tuple[str, ...]
    angles_deg: np.ndarray  # (A,)
    levels_dbm: np.ndarray  # (S, W, A)
    worst_dbm: np.ndarray  # (S, W)
    worst_angle_deg: np.ndarray  # (S, W)
    median_dbm: np.ndarray  # (S, W)
    margin_db: np.ndarray  # (S,)
    worst_wheel: np.ndarray  # (S,) index into wheel_ids
    sensitivity_dbm: float
    required_margin_db: float
    near_field: np.ndarray = field(default=None)  # (S,) True when a sensor comes nearer than lambda/2pi

    def order(self) -> np.ndarray:
        """Spot indices best first: by margin, ties by the worst wheel's median."""
        med = self.median_dbm[np.arange(len(self.names)), self.worst_wheel]
        return np.lexsort((-med, -self.margin_db))

    def tied_with_best(self, candidate=None, resolution_db: float = RANK_RESOLUTION_DB) -> list[int]:
        """Spot indices, best first, whose margin lies within ``resolution_db`` (dB) of the best one's: the
        spots the engine cannot rank apart (:data:`RANK_RESOLUTION_DB`), the best included. ``candidate``
        (S,) bool: only those spots count (core.placement; all when None or when none is a candidate)."""
        order = [int(i) for i in self.order()]
        if candidate is not None:
            order = [i for i in order if candidate[i]] or order
        if not order:
            return []
        best = float(self.margin_db[order[0]])
        return [i for i in order if float(self.margin_db[i]) >= best - resolution_db]

    def swing_db(self) -> np.ndarray:
        """Level swing over the turn, max - min, per (spot, wheel), dB."""
        return self.levels_dbm.max(axis=2) - self.levels_dbm.min(axis=2)


def tie_note(scores: SpotScores, tied: list[int], max_names: int = 6) -> str:
    """One sentence on the spots the engine cannot rank apart (:meth:`SpotScores.tied_with_best`); "" when
    the best stands alone."""
    if len(tied) < 2:
        return ""
    names = [f"'{scores.names[i]}'" for i in tied[:max_names]]
    more = f" and {len(tied) - max_names} more" if len(tied) > max_names else ""
    low = float(scores.margin_db[tied[-1]])
    high = float(scores.margin_db[tied[0]])
    return (f"{len(tied)} spots lie within {RANK_RESOLUTION_DB:g} dB of the best margin ({', '.join(names)}{more}: "
            f"{low:+.1f} to {high:+.1f} dB): closer than the model resolves (its cabin levels agree with a "
            f"whole-vehicle full-wave reference to {FULLWAVE_RMS_RANGE_DB[0]:.1f}-{FULLWAVE_RMS_RANGE_DB[1]:.1f} dB "
            f"RMS, docs/VALIDATION.md). Treat them as equal, choose "
            f"among them by packaging, and confirm the choice by full-wave simulation and measurement.")


def worst_case(levels: np.ndarray, percentile: float) -> tuple[np.ndarray, np.ndarray]:
    """Worst-case level over the last axis (minimum, or the given low percentile) and its index."""
    idx = np.argmin(levels, axis=-1)
    if percentile <= 0:
        return np.take_along_axis(levels, idx[..., None], axis=-1)[..., 0], idx
    value = np.percentile(levels, percentile, axis=-1)
    below = np.where(levels <= value[..., None], levels, -np.inf)
    return value, np.argmax(below, axis=-1)


def score_levels(scene: Scene, levels, names=None, positions=None) -> SpotScores:
    """Turn levels into worst cases, margins and worst wheels.

    ``levels``: a :class:`TurnLevels` (its refined worst cases are used when present) or a plain
    (S, W, A) array of levels at the sampled angles, dBm (worst case = the scene's statistic of the
    samples)."""
    turns = levels if isinstance(levels, TurnLevels) else TurnLevels(np.asarray(levels, float))
    levels = turns.levels_dbm
    if turns.worst_dbm is not None:
        worst, worst_angle = turns.worst_dbm, np.degrees(turns.worst_angle_rad)
    else:
        worst, widx = worst_case(levels, scene.worst_percentile)
        worst_angle = np.degrees(scene.angles_rad)[widx]
    med = np.median(levels, axis=2)
    margin_w = worst - scene.sensitivity_dbm - scene.required_margin_db
    worst_wheel = np.argmin(margin_w, axis=1)
    margin = margin_w[np.arange(len(levels)), worst_wheel]
    s = len(levels)
    positions = np.zeros((s, 3)) if positions is None else np.asarray(positions, float)
    return SpotScores(
        names=tuple(names) if names is not None else tuple(f"spot {i + 1}" for i in range(s)),
        positions=positions,
        wheel_ids=scene.wheel_ids,
        angles_deg=np.degrees(scene.angles_rad),
        levels_dbm=levels,
        worst_dbm=worst,
        worst_angle_deg=worst_angle,
        median_dbm=med,
        margin_db=margin,
        worst_wheel=worst_wheel,
        sensitivity_dbm=scene.sensitivity_dbm,
        required_margin_db=scene.required_margin_db,
        near_field=near_field_flags(scene, positions),
    )


def near_field_flags(scene: Scene, positions: np.ndarray) -> np.ndarray:
    """(S,) True where the link model is indicative only: a sensor comes nearer than lambda / 2 pi
    (core.propagation.near_field_limit_m) anywhere on its circle over the turn, or, with the
    installed wheel patterns, the spot lies within the radius below which the pattern's near-field
    term is held (core.wheel_patterns.NEAR_MIN_RADIUS_M) of a wheel centre."""
    positions = np.atleast_2d(np.asarray(positions, float))
    near = np.zeros(len(positions), bool)
    limit = float(near_field_limit_m(scene.freq_hz))
    for w in scene.wheels:
        # distance to the sensor's circle: radius r_s in the plane y = centre + offset, about the centre
        cx, cy, cz = w.centre
        dy = positions[:, 1] - (cy + w.outboard_sign * w.sensor_offset_m)
        rho = np.hypot(positions[:, 0] - cx, positions[:, 2] - cz)
        near |= np.hypot(dy, rho - w.sensor_radius_m) < limit
    if scene.sensor_kind == "table":
        from core.wheel_patterns import NEAR_MIN_RADIUS_M

        centres = np.array([w.centre for w in scene.wheels], float)
        d_c = np.linalg.norm(positions[:, None, :] - centres[None], axis=-1).min(axis=1)
        near |= d_c < NEAR_MIN_RADIUS_M
    return near


#: spots refined together (core.turn_minimum works on all of them in each vectorised step), at most
REFINE_BLOCK = 2048
#: links (spots x wheels x angles) held for the refinement at once: bounds the memory of a block (its
#: fields stay until the block's minima are refined); 512 spots of 4 wheels at 72 angles per turn. At
#: 1440 angles per turn and the work limit (core.bounds) a heatmap held 1.0 GB with blocks of 2048 spots;
#: the sedan's 2,352-cell heatmap peaks at 43 MiB with this bound (157 MiB with 2,048-spot blocks) in
#: the same CPU time (interleaved A/B, docs/performance.md).
REFINE_LINKS = 512 * 4 * 72


def refine_block(scene: Scene) -> int:
    """Spots per refinement block for this scene: REFINE_BLOCK, fewer when a spot has many links."""
    per_spot = max(1, len(scene.wheels) * len(scene.angles_rad))
    return max(1, min(REFINE_BLOCK, REFINE_LINKS // per_spot))


def _turns_in_blocks(scene: Scene, positions: np.ndarray, axes, progress, cancel, chunk_links: int) -> TurnLevels:
    """spot_turns over many spots in blocks of :func:`refine_block` spots, with progress (spots) and cancel per
    chunk. Each spot's levels do not depend on the block it is computed in."""
    total = len(positions)
    ax = None if axes is None else np.broadcast_to(np.asarray(axes, float), positions.shape)
    parts = []
    block = refine_block(scene)
    for start in range(0, total, block):
        sl = slice(start, min(total, start + block))

        def tick(done, base=start):
            if progress is not None:
                progress(base + done, total)
            if cancel is not None and cancel():
                raise Cancelled()

        if cancel is not None and cancel():
            raise Cancelled()
        parts.append(spot_turns(scene, positions[sl], None if ax is None else ax[sl], chunk_links=chunk_links,
                                tick=tick))
    return TurnLevels.concatenate(parts)


def score_spots(scene: Scene, positions, axes=None, names=None,
                progress: Callable[[int, int], None] | None = None, cancel: Callable[[], bool] | None = None,
                chunk_links: int = CHUNK_LINKS) -> SpotScores:
    """Levels and scores for spots at positions (S, 3) m (the single-spot path when S = 1).

    The levels are computed in chunks of about ``chunk_links`` links, so the memory in flight stays
    bounded whatever S is; ``progress(done, total)`` (spots) is called after each chunk, and when
    ``cancel()`` returns True the computation raises Cancelled before the next chunk."""
    positions = np.atleast_2d(np.asarray(positions, float))
    turns = _turns_in_blocks(scene, positions, axes, progress, cancel, chunk_links)
    return score_levels(scene, turns, names, positions)


def score_vehicle(v: Vehicle, scene: Scene | None = None, progress: Callable[[int, int], None] | None = None,
                  cancel: Callable[[], bool] | None = None) -> SpotScores:
    """Scores of the file's own spots (``progress`` and ``cancel`` as in score_spots)."""
    scene = scene or Scene.from_vehicle(v)
    names, pos, ax = vehicle_spot_arrays(v)
    return score_spots(scene, pos, ax, names, progress=progress, cancel=cancel)


# ----- heatmaps ------------------------------------------------------------------------
#: states of a heatmap cell (``Heatmap.cell_state``)
CELL_OUTSIDE_REGION = 0  # not in the mounting region: not part of the map
CELL_COMPUTED = 1  # a candidate position: computed, coloured and counted
CELL_OUTSIDE_BODY = 2  # in the region but outside the body: not computed (core.placement)
CELL_IN_WHEELHOUSE = 3  # in the region but inside a wheelhouse clearance: not computed

#: what the excluded states are called in outputs
EXCLUDED_CELL_NAMES = {CELL_OUTSIDE_BODY: "outside the body", CELL_IN_WHEELHOUSE: "inside a wheelhouse"}


@dataclass(frozen=True)
class Heatmap:
    """Margin over a grid: view 'top' (u = x, v = y at height ``fixed_m``) or 'side' (u = x, v = z at y = fixed_m).

    Only candidate positions (inside the body, outside the wheelhouses: core.placement) are
    computed; the margin is nan everywhere else, and ``cell_state`` says why (CELL_* codes).
    "% meeting the margin" is over the computed cells (:meth:`meeting`); best cells are computed ones.
    """

    view: str
    fixed_m: float
    u_m: np.ndarray  # (nu,) cell centres
    v_m: np.ndarray  # (nv,)
    step_m: float
    margin_db: np.ndarray  # (nv, nu), nan where not computed (outside the region, outside the body, in a wheelhouse)
    worst_wheel: np.ndarray  # (nv, nu) int, -1 where not computed
    complete: bool = True  # False for a coarse stage of a progressive heatmap (heatmap_stages)
    cell_state: np.ndarray | None = None  # (nv, nu) int8 CELL_* codes; None: every finite cell was computed
    stride: int = 1  # a coarse stage: every ``stride``-th cell of the full grid in each direction

    def points(self) -> np.ndarray:
        """(nv, nu, 3) positions of the cells, m."""
        uu, vv = np.meshgrid(self.u_m, self.v_m)
        ff = np.full_like(uu, self.fixed_m)
        return np.stack([uu, vv, ff] if self.view == "top" else [uu, ff, vv], axis=-1)

    @property
    def computed(self) -> np.ndarray:
        """(nv, nu) True where the cell was computed (a candidate position inside the region)."""
        if self.cell_state is None:
            return np.isfinite(self.margin_db)
        return self.cell_state == CELL_COMPUTED

    def excluded(self) -> dict[str, int]:
        """Cells of the region left out, by reason ("outside the body", "inside a wheelhouse")."""
        if self.cell_state is None:
            return {name: 0 for name in EXCLUDED_CELL_NAMES.values()}
        return {name: int((self.cell_state == code).sum()) for code, name in EXCLUDED_CELL_NAMES.items()}

    def meeting(self, threshold_db: float = 0.0) -> tuple[int, int]:
        """(cells with margin >= threshold, computed cells): the share meeting the margin is over computed cells."""
        ok = self.computed
        return int((self.margin_db[ok] >= threshold_db).sum()), int(ok.sum())

    def best_cells(self, n: int = 10) -> list[tuple[float, float, float, float, int]]:
        """The n best computed cells as (x, y, z, margin_db, worst_wheel), best first."""
        pts = self.points().reshape(-1, 3)
        m = self.margin_db.reshape(-1)
        ok = np.nonzero(self.computed.reshape(-1) & ~np.isnan(m))[0]
        best = ok[np.argsort(-m[ok], kind="stable")][:n]
        ww = self.worst_wheel.reshape(-1)
        return [(*pts[i], float(m[i]), int(ww[i])) for i in best]


class Cancelled(Exception):
    """Raised inside a long computation when its cancel flag was set."""


def _cell_points(view: str, u: np.ndarray, v: np.ndarray, fixed: float) -> np.ndarray:
    """(nv, nu, 3) positions of the grid's cell centres, m."""
    uu, vv = np.meshgrid(u, v)
    ff = np.full_like(uu, fixed)
    return np.stack([uu, vv, ff] if view == "top" else [uu, ff, vv], axis=-1)


def grid_for_region(
    region: Region, step_m: float, hull: Hull | None = None
) -> tuple[np.ndarray, np.ndarray, np.ndarray, float]:
    """Cell centres covering the region's bounding box, a mask of the cells to compute, and the fixed coordinate.

    The mask holds the cells inside the region; with ``hull`` given, only those that are candidate
    positions as well (inside the body, outside the wheelhouses: core.placement.candidate_mask)."""
    from core.geometry import points_in_polygon

    poly = np.asarray(region.outline, float)
    lo, hi = poly.min(axis=0), poly.max(axis=0)
    nu = max(1, int(np.floor((hi[0] - lo[0]) / step_m + 1e-9)))
    nv = max(1, int(np.floor((hi[1] - lo[1]) / step_m + 1e-9)))
    u = lo[0] + (np.arange(nu) + 0.5) * (hi[0] - lo[0]) / nu
    v = lo[1] + (np.arange(nv) + 0.5) * (hi[1] - lo[1]) / nv
    uu, vv = np.meshgrid(u, v)
    mask = points_in_polygon(uu, vv, poly)
    fixed = float(region.height_m if region.view == "top" else region.lateral_m)
    if hull is not None:
        from core.placement import candidate_mask

        pts = _cell_points(region.view, u, v, fixed)
        mask &= candidate_mask(hull, pts[..., 0], pts[..., 1], pts[..., 2])
    return u, v, mask, fixed


#: the stages of a progressive heatmap: every 4th cell of the grid in each direction (1/16 of the work),
#: then every 2nd, then all; each stage computes only the cells the earlier ones have not
PROGRESSIVE_STRIDES = (4, 2, 1)


def _stage_offset(strides) -> int:
    """Index of the first cell of the coarsest stage in each direction; every stage takes the cells whose
    index is this offset modulo its stride, so each stage's cells hold all of the coarser stages' cells."""
    return (max(strides) - 1) // 2


def heatmap_stages(
    scene: Scene,
    region: Region,
    step_m: float = 0.05,
    strides=PROGRESSIVE_STRIDES,
    axis=None,
    progress: Callable[[int, int], None] | None = None,
    cancel: Callable[[], bool] | None = None,
    chunk_links: int = CHUNK_LINKS,
) -> Iterator[Heatmap]:
    """The heatmap of ``heatmap(scene, region, step_m)`` in stages, coarse first (a generator).

    ``strides`` descending, ending at 1: the stage of stride k holds the cells of the full grid whose
    row and column indices are ``offset mod k`` (``_stage_offset``); its Heatmap has those cells only
    (``u_m``/``v_m`` every k-th centre, ``step_m`` k times the step, ``stride`` k, ``complete`` False).
    Every cell is computed once, by the first stage that holds it, with the same engine call as
    ``heatmap``: a coarse cell's margin is the full grid's margin at that cell, and the last stage is
    the full heatmap. ``progress(done, total)`` counts computed cells over all stages; ``cancel`` as
    in ``heatmap`` (raises Cancelled before the next chunk).
    """
    if not step_m > 0:
        raise ValueError("step_m must be positive")
    strides = tuple(int(k) for k in strides)
    if not strides or strides[-1] != 1 or any(a <= b for a, b in itertools.pairwise(strides)):
        raise ValueError("strides must be descending whole numbers ending at 1")
    from core.placement import EXCLUDED_IN_WHEELHOUSE, EXCLUDED_OUTSIDE_BODY, exclusion

    u, v, in_region, fixed = grid_for_region(region, step_m)
    grid = _cell_points(region.view, u, v, fixed)
    why = exclusion(scene.hull, grid[..., 0], grid[..., 1], grid[..., 2])
    state = np.full(in_region.shape, CELL_OUTSIDE_REGION, np.int8)
    state[in_region & (why == EXCLUDED_OUTSIDE_BODY)] = CELL_OUTSIDE_BODY
    state[in_region & (why == EXCLUDED_IN_WHEELHOUSE)] = CELL_IN_WHEELHOUSE
    mask = in_region & (why == 0)
    state[mask] = CELL_COMPUTED
    margin = np.full(in_region.shape, np.nan)
    worst = np.full(in_region.shape, -1, int)
    done = np.zeros(in_region.shape, bool)
    total, counted = int(mask.sum()), 0
    offset = _stage_offset(strides)
    iv, iu = np.indices(in_region.shape)
    for k in strides:
        o = offset % k
        todo = mask & ~done & (iv % k == o) & (iu % k == o)
        pts = grid[todo]
        if len(pts):
            tick = None
            if progress is not None:
                def tick(d, _t, base=counted):
                    progress(base + d, total)
            sc = score_levels(scene, _turns_in_blocks(scene, pts, axis, tick, cancel, chunk_links), positions=pts)
            margin[todo] = sc.margin_db
            worst[todo] = sc.worst_wheel
            done |= todo
            counted += len(pts)
        if k == 1:
            yield Heatmap(region.view, fixed, u, v, step_m, margin, worst, cell_state=state)
        else:
            sl = (slice(o, None, k), slice(o, None, k))
            yield Heatmap(region.view, fixed, u[o::k], v[o::k], step_m * k, margin[sl].copy(), worst[sl].copy(),
                          complete=False, cell_state=state[sl].copy(), stride=k)


def heatmap(
    scene: Scene,
    region: Region,
    step_m: float = 0.05,
    axis=None,
    progress: Callable[[int, int], None] | None = None,
    cancel: Callable[[], bool] | None = None,
    chunk_links: int = CHUNK_LINKS,
) -> Heatmap:
    """Spot margin over a mounting region's grid (cell spacing ``step_m``, m).

    Only the cells that are candidate receiver positions are computed (inside the body, outside
    the wheelhouses: core.placement); the others of the region are nan with their reason in
    ``Heatmap.cell_state``. Work is split into chunks of about ``chunk_links`` links;
    ``progress(done, total)`` is called after each chunk (computed cells), and when ``cancel()``
    returns True the computation raises Cancelled before the next chunk. (The one-stage case of
    ``heatmap_stages``.)
    """
    *_, hm = heatmap_stages(scene, region, step_m, (1,), axis, progress, cancel, chunk_links)
    return hm


__all__ = [
    "PROGRESSIVE_STRIDES",
    "RANK_RESOLUTION_DB",
    "SHORT_DIPOLE_GAIN_DBI",
    "Cancelled",
    "Heatmap",
    "Scene",
    "SpotScores",
    "TurnLevels",
    "grid_for_region",
    "heatmap",
    "heatmap_stages",
    "near_field_flags",
    "score_levels",
    "score_spots",
    "score_vehicle",
    "spot_levels",
    "spot_turns",
    "tie_note",
    "vehicle_hull",
    "vehicle_spot_arrays",
    "worst_case",
]

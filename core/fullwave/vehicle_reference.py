"""Whole-vehicle full-wave reference: received level at every spot from every wheel over a turn.

One NEC-2 solve (one matrix fill and factorisation) per body and frequency on the wire grid of
:mod:`core.fullwave.vehicle_grid`; by reciprocity one excitation per receiver spot (a current
element along the spot's antenna axis) gives the field at all sensor positions of all wheels over
the turn at once.

Reciprocity and normalisation (same definitions as the engine, core.links)
--------------------------------------------------------------------------
Lorentz reciprocity for two current elements (moments m_a, m_b along unit axes a, b at p_a, p_b)
in the presence of any passive reciprocal structure: m_b b . E_a(p_b) = m_a a . E_b(p_a). With the
spot excited by a unit moment (1 A m along its axis r), the field that a sensor of moment m_s along
its axis s (at p_s) produces at the spot, along r, is therefore

    E_s(p_r) . r = m_s c,    c = s . E_r(p_s)   (V/m per A m, NEC-2 field of the unit spot source).

The engine's EIRP_s is the bare sensor's peak EIRP and the installed wheel pattern is normalised
to the same total radiated power (core.wheel_patterns). A bare short dipole of moment m radiates
P = eta (k m)^2 / (12 pi) with directivity 1.5, so EIRP = eta k^2 m^2 / (8 pi); on its wheel the
same moment radiates power_ratio x P. The reference sets m_s so that the sensor on its wheel (the
wheel alone, as tabulated) radiates EIRP_s / 1.5:

    m_s^2 = 8 pi EIRP_s / (eta k^2 power_ratio).

A receiving short dipole of peak gain G_r (the engine's receiver gain, its pattern and polarization
being the projection on r) delivers P_rx = |E . r|^2 / (2 eta) x G_r lambda^2 / (4 pi). Hence

    P_rx = m_s^2 |c|^2 / (2 eta) x G_r lambda^2 / (4 pi),

which in free space is Friis' EIRP_s G_r (lambda / 4 pi d)^2 times the dipoles' pattern and
polarization factor (tests/validation/test_fullwave_vehicle.py checks both this and the equality of
the reciprocal and the direct link). An isotropic receiver is taken as polarization-matched, like
the engine: three excitations (x, y, z) give the vector E_s(p_r) and |E_s| is used. The sensor is a
fixed-current element: the body's (small) change of its radiation resistance is neglected.

Statistics: single-frequency levels inside a closed, nearly lossless cabin swing with its cavity
modes; the reference averages the received power over frequencies within +-2 % of the band centre
(:func:`frequency_average_db`) and reports per (spot, wheel) the minimum, a low percentile and the
median over the turn (:func:`turn_statistics`); which one is converged is measured by
validation/fullwave_vehicle.py (docs/VALIDATION.md).

References
----------
- R. F. Harrington, Time-Harmonic Electromagnetic Fields (1961), sec. 3-8 (reciprocity, reaction).
- C. A. Balanis, Antenna Theory, secs. 2.11-2.16 and 4.2 (effective area, Friis, short dipole).
- Burke & Poggio, NEC-2 user's guide (LLNL 1981): EX type 4, NE, GX and LD cards.
- D. A. Hill et al., IEEE Trans. EMC 36(3), 1994: averaging over frequency (mode stirring) as the
  way to compare levels inside electrically large cavities.
"""

from __future__ import annotations

import csv
import math
import time
from dataclasses import asdict, dataclass, field
from pathlib import Path

import numpy as np

from core.fullwave import nec_models as nm
from core.fullwave.vehicle_grid import ContentsSpec, build_vehicle_grid

__all__ = [
    "ReferenceSetup",
    "agreement",
    "band_frequencies",
    "block_absorption",
    "compare_stored",
    "coupling_to_level_dbm",
    "engine_levels",
    "free_space_scene",
    "frequency_average_db",
    "frequency_halves",
    "load_reference_csv",
    "solve_frequency",
    "turn_statistics",
    "wheel_power_ratio",
    "within_band",
]


@dataclass(frozen=True)
class ReferenceSetup:
    """Everything that sets a reference run (engineering defaults; docs/VALIDATION.md)."""

    cells_per_wavelength: float = 8.0  # body grid lambda/8
    wheel_cells_per_wavelength: float = 12.0  # rims lambda/12, uniform around (receive mode)
    belt_cells_per_wavelength: float = 20.0  # steel belt lambda/20
    belt: bool = True
    contents: ContentsSpec | None = field(default_factory=ContentsSpec)
    n_frequencies: int = 5
    span: float = 0.02  # +-2 % of the band centre
    angles_per_turn: int = 36

    def label(self) -> str:
        occ = 0 if self.contents is None else self.contents.occupants
        freqs = (f"{self.n_frequencies} frequencies over +-{100 * self.span:g} %" if self.n_frequencies > 1
                 else "band centre only")
        return (f"lambda/{self.cells_per_wavelength:g} body, lambda/{self.wheel_cells_per_wavelength:g} rims"
                f"{f', belt lambda/{self.belt_cells_per_wavelength:g}' if self.belt else ''}, {occ} occupants, {freqs}, "
                f"{self.angles_per_turn} angles")

    def as_dict(self) -> dict:
        return asdict(self)


def band_frequencies(centre_hz: float, n: int = 5, span: float = 0.02) -> np.ndarray:
    """n frequencies evenly spread over centre x (1 +- span), Hz (the centre alone when n = 1)."""
    if n <= 1:
        return np.array([float(centre_hz)])
    return float(centre_hz) * (1.0 + np.linspace(-span, span, n))


def coupling_to_level_dbm(coupling, freq_hz: float, eirp_dbm: float, gain_dbi: float, power_ratio=1.0):
    """Received level, dBm, from the reciprocal coupling c = s . E_r(p_s) (V/m per A m); see the module doc."""
    k = 2.0 * math.pi * freq_hz / nm.C0_M_PER_S
    lam = nm.C0_M_PER_S / freq_hz
    eirp_w = 10.0 ** (eirp_dbm / 10.0) * 1e-3
    m2 = 8.0 * math.pi * eirp_w / (nm.ETA0_OHM * k * k * np.asarray(power_ratio, float))
    p_w = m2 * np.abs(coupling) ** 2 / (2.0 * nm.ETA0_OHM) * 10.0 ** (gain_dbi / 10.0) * lam * lam / (4.0 * math.pi)
    return 10.0 * np.log10(np.maximum(p_w, 1e-300)) + 30.0


def wheel_power_ratio(wheel, freq_hz: float, axis: str, belt: bool, cache_dir=None) -> float:
    """Power radiated by the sensor on its wheel alone / by the bare sensor (same current).

    From the exact wheel table of core.wheel_patterns.compute_table (the tables' refined wheel mesh,
    this wheel's sensor position and tire), so that the reference's EIRP means what the engine's does.
    """
    from core.wheel_patterns import table_for_wheel

    return float(table_for_wheel(wheel, freq_hz, axis, belt=belt, exact=True, cache_dir=cache_dir).power_ratio)


def solve_frequency(vehicle, freq_hz: float, setup: ReferenceSetup, spots=None, cache_dir=None,
                    progress=None) -> dict:
    """One body at one frequency: levels (S, W, A) in dBm at the file's (or the given) spots.

    ``spots``: (names, positions (S, 3) m, unit axes (S, 3)); default the file's spots
    (core.scoring.vehicle_spot_arrays). Needs PyNEC. Returns ``levels_dbm``, ``coupling`` (complex,
    (S, W, A) or (S, W, A, 3) for an isotropic receiver), ``power_ratio`` (W,), ``names``,
    ``wheel_ids``, ``angles_deg``, ``segments``, ``solve_s``, ``notes``.
    """
    from core.scoring import vehicle_spot_arrays
    from core.wheel import WheelGeometry, sensor_axes, sensor_positions

    r = vehicle.radio
    if r.sensor.pattern != "dipole":
        raise ValueError("the full-wave reference models the sensor as a short dipole (radio.sensor.pattern)")
    names, pos, axes = spots if spots is not None else vehicle_spot_arrays(vehicle)
    pos = np.atleast_2d(np.asarray(pos, float))
    axes = np.atleast_2d(np.asarray(axes, float))
    wheels = [WheelGeometry.from_wheel(w) for w in vehicle.wheels]
    angles = np.arange(setup.angles_per_turn) * (2.0 * math.pi / setup.angles_per_turn)
    s_pos = np.stack([sensor_positions(w, angles) for w in wheels])  # (W, A, 3)
    s_ax = np.broadcast_to(sensor_axes(angles, r.sensor.axis), s_pos.shape)
    t0 = time.time()
    grid = build_vehicle_grid(vehicle, freq_hz, cells_per_wavelength=setup.cells_per_wavelength,
                              wheel_cells_per_wavelength=setup.wheel_cells_per_wavelength,
                              belt_cells_per_wavelength=setup.belt_cells_per_wavelength, belt=setup.belt,
                              contents=setup.contents)
    solver = nm.NecSolver(grid.model, freq_hz, mirror_y_plane=grid.mirror_y)
    isotropic = r.receiver.pattern != "dipole"
    pts = s_pos.reshape(-1, 3)
    out = []
    for i in range(len(pos)):
        dirs = np.eye(3) if isotropic else axes[i: i + 1] / np.linalg.norm(axes[i])
        cs = []
        for d in dirs:
            solver.set_source(pos[i], d, 1.0)
            e = solver.near_field(pts).reshape(s_pos.shape)
            cs.append(np.sum(e * s_ax, axis=-1))
        out.append(np.stack(cs, -1) if isotropic else cs[0])
        if progress is not None:
            progress(i + 1, len(pos))
    coupling = np.stack(out)
    pr = np.array([wheel_power_ratio(w, freq_hz, r.sensor.axis, setup.belt, cache_dir) for w in wheels])
    mag = np.linalg.norm(coupling, axis=-1) if isotropic else coupling
    levels = coupling_to_level_dbm(mag, freq_hz, r.sensor_eirp_dbm, r.receiver.gain_dbi, pr[None, :, None])
    return {
        "levels_dbm": levels, "coupling": coupling, "power_ratio": pr, "names": list(names),
        "wheel_ids": [w.id for w in wheels], "angles_deg": np.degrees(angles), "freq_hz": float(freq_hz),
        "segments": grid.segments, "mirror_y": grid.mirror_y, "solve_s": time.time() - t0, "notes": grid.notes,
    }


def block_absorption(spec: ContentsSpec | None = None, freq_hz: float = 433.92e6) -> float:
    """Orientation-averaged absorption cross-section of one lossy block of ``spec``, m^2 (needs PyNEC).

    The block alone in free space is lit by a plane wave of 1 V/m (NEC-2 EX type 1) from 6 directions
    (+-x, +-y, +-z and two oblique ones) in 2 polarizations; the absorbed power is the sum over the
    segments of |I|^2 R' dl / 2, divided by the incident power density 1 / (2 eta).
    """
    from PyNEC import nec_context

    from core.fullwave.vehicle_grid import _box_corners, lossy_cage

    spec = spec or ContentsSpec()
    wires = lossy_cage(_box_corners((0.0, 0.0, 0.0), spec.size_m), spec, nm.C0_M_PER_S / freq_hz / 8.0)
    ctx = nec_context()
    geo = ctx.get_geometry()
    for i, w in enumerate(wires):
        geo.wire(i + 1, int(w.segments), *w.start, *w.end, float(w.radius_m), 1.0, 1.0)
    ctx.geometry_complete(0)
    ctx.fr_card(0, 1, freq_hz / 1e6, 0.0)
    for i, w in enumerate(wires):
        ctx.ld_card(2, i + 1, 0, 0, float(w.load_ohm_per_m), 0.0, 0.0)
    acs = []
    n = 0
    for theta, phi in ((90, 0), (90, 90), (0, 0), (90, 45), (45, 0), (135, 90)):
        for eta in (0.0, 90.0):
            ctx.ex_card(1, 1, 1, 0, float(theta), float(phi), eta, 0.0, 0.0, 0.0)
            ctx.xq_card(0)
            sc = ctx.get_structure_currents(n)
            n += 1
            cur = np.asarray(sc.get_current())
            dl = np.asarray(sc.get_current_segment_length())
            p_abs = 0.5 * float(np.sum(np.abs(cur) ** 2 * spec.ohm_per_m * dl))
            acs.append(p_abs * 2.0 * nm.ETA0_OHM)
    return float(np.mean(acs))


# --------------------------------------------------------------------------------------------
# Statistics and agreement
# --------------------------------------------------------------------------------------------


def frequency_average_db(levels_dbm, axis: int = 0) -> np.ndarray:
    """Power average over frequencies (linear mean of 10^(L/10)), back in dB(m)."""
    lv = np.asarray(levels_dbm, float)
    return 10.0 * np.log10(np.mean(10.0 ** (lv / 10.0), axis=axis))


def turn_statistics(levels_dbm, percentile: float = 10.0) -> dict:
    """Per (spot, wheel) statistics over the turn (last axis) and the spot's worst wheel for each.

    Returns {"min", "p<percentile>", "median"}: each a dict with ``wheel`` (S, W) and ``spot`` (S,)
    (the lowest wheel's value), dBm.
    """
    lv = np.asarray(levels_dbm, float)
    stats = {"min": lv.min(axis=-1), f"p{percentile:g}": np.percentile(lv, percentile, axis=-1),
             "median": np.median(lv, axis=-1)}
    return {k: {"wheel": v, "spot": v.min(axis=-1)} for k, v in stats.items()}


def within_band(entry: dict, span: float) -> dict:
    """A stored entry (:func:`load_reference_csv`) kept to the frequencies within centre x (1 +- span),
    the centre being the entry's middle frequency (the band centre of a symmetric run)."""
    f = np.asarray(entry["freq_mhz"], float)
    centre = float(f[len(f) // 2])
    keep = np.abs(f / centre - 1.0) <= span + 1e-6
    return entry | {"freq_mhz": f[keep], "levels_dbm": np.asarray(entry["levels_dbm"])[keep]}


def frequency_halves(levels_dbm, statistic: str = "median", percentile: float = 10.0) -> dict:
    """How well a frequency-averaged spot statistic repeats: the statistic (worst wheel) of the power
    average over one half of the frequencies against that over the other half, :func:`agreement` for
    two splits of ``levels_dbm`` (F, S, W, A): ``"interleaved"`` (every other frequency, the first half
    taking the odd one out: both halves span the band, so they agree once the band is sampled densely
    enough) and ``"low_high"`` (the lower against the upper frequencies, the middle one left out when F
    is odd: whether the band is narrow enough for one average to stand for all of it).

    A split-half test of reproducibility, as for any averaged measurement; averaging over frequency stands
    in for averaging over the states of a stirred cavity (frequency stirring of reverberation chambers,
    IEC 61000-4-21).
    """
    lv = np.asarray(levels_dbm, float)
    n = lv.shape[0]
    key = statistic if statistic != "p10" else f"p{percentile:g}"

    def stat(sel):
        return turn_statistics(frequency_average_db(lv[sel]), percentile)[key]["spot"]

    idx = np.arange(n)
    return {"interleaved": agreement(stat(idx[0::2]), stat(idx[1::2])),
            "low_high": agreement(stat(idx[: n // 2]), stat(idx[(n + 1) // 2:]))}


def agreement(engine_db, reference_db) -> dict:
    """Spearman rho, mean offset (reference - engine), RMS and max after the offset, dB, over spots."""
    from scipy.stats import spearmanr

    e = np.asarray(engine_db, float)
    f = np.asarray(reference_db, float)
    ok = np.isfinite(e) & np.isfinite(f)
    e, f = e[ok], f[ok]
    d = f - e
    off = float(np.mean(d)) if d.size else float("nan")
    res = d - off
    rho = float(spearmanr(e, f).statistic) if d.size > 2 and np.ptp(e) > 0 and np.ptp(f) > 0 else float("nan")
    return {"rho": rho, "offset_db": off, "rms_db": float(np.sqrt(np.mean(res**2))) if d.size else float("nan"),
            "max_db": float(np.max(np.abs(res))) if d.size else float("nan"), "n": int(d.size)}


def engine_levels(vehicle, spots, angles_per_turn: int) -> np.ndarray:
    """The fast engine's levels (S, W, A), dBm, for spots (names, positions, axes), free space (no road:
    the reference has no ground, i.e. ``wheelreach rank --no-ground``), at the reference's angles."""
    from core.scoring import spot_levels

    scene = free_space_scene(vehicle, angles_per_turn)
    return spot_levels(scene, np.atleast_2d(spots[1]), np.atleast_2d(spots[2]))


def free_space_scene(vehicle, angles_per_turn: int):
    """The engine's scene of ``vehicle`` as the reference sees it: free space (no road), the reference's
    angles per turn, and the mean level (fade probability 0: the reference's levels are power averages over
    frequency, the counterpart of the cabin field's mean, not of its 1 % fade level) (core.scoring.Scene)."""
    from core.scoring import Scene

    radio = vehicle.radio.model_copy(update={"angles_per_turn": int(angles_per_turn), "ground_reflection": False,
                                             "fade_probability": 0.0})
    return Scene.from_vehicle(vehicle.model_copy(update={"radio": radio}))


def compare_stored(vehicle, entry: dict, statistic: str = "median", percentile: float = 10.0) -> dict:
    """Agreement of the engine with one stored reference entry (:func:`load_reference_csv`) for a body.

    The reference's spot statistic (``"min"``, ``"p10"`` or ``"median"`` over the turn of the
    frequency-averaged level, worst wheel) against the same statistic of the engine's levels at the
    stored angles, free space. Returns :func:`agreement` plus ``engine_db`` and ``reference_db`` (S,).
    """
    from core.scoring import vehicle_spot_arrays

    names, pos, axes = vehicle_spot_arrays(vehicle)
    idx = [names.index(s) for s in entry["spots"]]
    ang = entry["angles_deg"]
    n = round(360.0 / float(ang[1] - ang[0])) if len(ang) > 1 else 1
    eng = engine_levels(vehicle, ([names[i] for i in idx], pos[idx], axes[idx]), n)
    key = statistic if statistic != "p10" else f"p{percentile:g}"
    e = turn_statistics(eng, percentile)[key]["spot"]
    f = turn_statistics(frequency_average_db(entry["levels_dbm"]), percentile)[key]["spot"]
    return agreement(e, f) | {"engine_db": e, "reference_db": f}


# --------------------------------------------------------------------------------------------
# Stored results
# --------------------------------------------------------------------------------------------

#: Columns of the stored level files (tests/data/fullwave_levels_*.csv).
LEVEL_COLUMNS = ("body", "config", "freq_mhz", "spot", "wheel", "angle_deg", "level_dbm")


def write_levels_csv(path, body: str, config: str, result: dict, append: bool = True) -> None:
    """Append one solve_frequency result to a level file (one row per spot, wheel and angle)."""
    path = Path(path)
    new = not path.exists() or not append
    with path.open("a" if append else "w", newline="") as fh:
        w = csv.writer(fh)
        if new:
            w.writerow(LEVEL_COLUMNS)
        lv = result["levels_dbm"]
        for i, s in enumerate(result["names"]):
            for j, wid in enumerate(result["wheel_ids"]):
                for k, a in enumerate(result["angles_deg"]):
                    w.writerow([body, config, f"{result['freq_hz'] / 1e6:.4f}", s, wid, f"{a:g}", f"{lv[i, j, k]:.3f}"])


def load_reference_csv(path) -> dict:
    """Stored levels by (body, config): {"freq_mhz" (F,), "spots", "wheels", "angles_deg",
    "levels_dbm" (F, S, W, A)}; spots, wheels and angles in file order."""
    rows: dict[tuple, dict] = {}
    with Path(path).open(newline="") as fh:
        for r in csv.DictReader(fh):
            key = (r["body"], r["config"])
            d = rows.setdefault(key, {"f": {}, "spots": {}, "wheels": {}, "angles": {}})
            f, s, w, a = float(r["freq_mhz"]), r["spot"], r["wheel"], float(r["angle_deg"])
            for name, v in (("spots", s), ("wheels", w), ("angles", a)):
                d[name].setdefault(v, len(d[name]))
            d["f"].setdefault(f, {})[(s, w, a)] = float(r["level_dbm"])
    out = {}
    for key, d in rows.items():
        freqs = sorted(d["f"])
        lv = np.full((len(freqs), len(d["spots"]), len(d["wheels"]), len(d["angles"])), np.nan)
        for fi, f in enumerate(freqs):
            for (s, w, a), v in d["f"][f].items():
                lv[fi, d["spots"][s], d["wheels"][w], d["angles"][a]] = v
        out[key] = {"freq_mhz": np.array(freqs), "spots": list(d["spots"]), "wheels": list(d["wheels"]),
                    "angles_deg": np.array(list(d["angles"])), "levels_dbm": lv}
    return out

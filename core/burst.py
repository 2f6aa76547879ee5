"""Burst (time-diversity) success over vehicle speed.

A sensor sends a burst of K frames spaced dt apart. At speed v the wheel turns by
omega dt = v dt / R_rolling between frames, so the frames sample the angles
theta0 + k v dt / R (k = 0..K-1). The burst succeeds when at least one frame's level clears
the threshold (the receiver sensitivity). With the start angle theta0 uniformly distributed,
P(success) is the share of start angles for which some frame clears it. Parked (v = 0) all
frames fall on one angle; at the resonant speeds v_n = 2 pi n R / dt every frame lands on the
same angle again, so the burst gains nothing from diversity there. At most
``core.bounds.MAX_RESONANT_SPEEDS`` of them are listed per wheel (the lowest); ``resonant_count``
says how many fall inside the speed range.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from core import kernels
from core.bounds import MAX_RESONANT_SPEEDS
from core.scoring import Cancelled

START_ANGLES = 720
#: frame angles evaluated at once (speeds x start angles x frames): bounds memory to a few tens of MB
CHUNK_EVALUATIONS = 2_000_000


@dataclass(frozen=True)
class BurstResult:
    """P(success) per wheel vs speed; speeds in m/s, radius in m."""

    wheel_ids: tuple[str, ...]
    speeds_mps: np.ndarray  # (V,)
    success: np.ndarray  # (W, V) probability 0..1
    parked: np.ndarray  # (W,) probability with all frames at one angle
    resonant_mps: tuple[np.ndarray, ...]  # per wheel, the lowest resonant speeds inside the speed range
    resonant_count: tuple[int, ...] = ()  # per wheel, how many resonant speeds the range holds (>= listed)
    margin_db: np.ndarray | None = None  # (W, V) burst margin: the extra loss every burst still survives, dB
    parked_margin_db: np.ndarray | None = None  # (W,) the same parked (all frames at one angle)

    def worst(self) -> tuple[int, int]:
        """(wheel index, speed index) of the lowest success probability."""
        i = int(np.argmin(self.success))
        return divmod(i, self.success.shape[1])


def _periodic_interp(levels: np.ndarray, angles_rad: np.ndarray, query: np.ndarray) -> np.ndarray:
    return np.interp(np.mod(query, 2 * np.pi), angles_rad, levels, period=2 * np.pi)


def _on_start_grid(angles_rad: np.ndarray, start_angles: int) -> bool:
    """True when the level's angles are uniform from 0 and every one of them is a start angle: the
    level is then linear between neighbouring start angles too."""
    a = len(angles_rad)
    return (a > 0 and start_angles % a == 0
            and np.allclose(angles_rad, np.arange(a) * (2 * np.pi / a), rtol=0.0, atol=1e-12))


def _best_frames(l0: np.ndarray, step_rad: np.ndarray, frames: int) -> np.ndarray:
    """max over k of level(theta0_j + k step) for every speed and start angle: (V, T), dBm.

    ``l0`` (T,) is the level at the T uniform start angles; the level is linear between them
    (``_on_start_grid``), so a frame k s = (m + r) start spacings ahead reads
    l0[j + m] + r (l0[j + m + 1] - l0[j + m]) (indices modulo T): the same linear interpolation as
    np.interp on the level's own angles, without searching the angle for every frame.

    With the compiled kernels (core.kernels.available) one compiled loop computes it without the
    interpreter lock (a burst figure's worker then runs beside a busy event loop instead of waiting
    for the lock between numpy calls); same arithmetic in the same order, so the same bits."""
    T = len(l0)
    best = np.broadcast_to(l0, (len(step_rad), T)).copy()  # frame 0 sits on the start angle
    pos = np.outer(step_rad, np.arange(1, frames)) * (T / (2 * np.pi))  # (V, K-1) in start spacings
    m = np.floor(pos)
    r = pos - m
    m = m.astype(np.int64) % T
    if kernels.available():
        _best_frames_kernel(np.ascontiguousarray(l0, float), m, r, best)
        return best
    # row s of ``ahead`` is l0 read s start spacings ahead, l0[(j + s) % T] for every j: whole rows are
    # gathered instead of one index per start angle
    ahead = np.lib.stride_tricks.sliding_window_view(np.concatenate([l0, l0]), T)  # (T + 1, T), a view
    for k in range(frames - 1):
        a, b = ahead[m[:, k]], ahead[m[:, k] + 1]
        lk = a + r[:, k, None] * (b - a)
        np.maximum(best, lk, out=best)
    return best


if kernels.numba is not None:

    @kernels.njit(cache=True, error_model="numpy", nogil=True)
    def _best_frames_kernel(l0, m, r, best):  # pragma: no cover - compiled; checked against the numpy path
        """``_best_frames`` in one loop: ``best`` (V, T) holds l0 on entry and the best frame on return."""
        nv, nt = best.shape
        for v in range(nv):
            for j in range(nt):
                b = best[v, j]
                for k in range(m.shape[1]):
                    i0 = j + m[v, k]
                    if i0 >= nt:
                        i0 -= nt
                    i1 = i0 + 1
                    if i1 >= nt:
                        i1 -= nt
                    lk = l0[i0] + r[v, k] * (l0[i1] - l0[i0])
                    if lk > b or lk != lk:  # np.maximum: a NaN wins
                        b = lk
                best[v, j] = b


def warm_up() -> None:
    """Compile (or load from the cache) the burst kernel with the engine's argument types."""
    if kernels.numba is not None:
        _best_frames_kernel(np.zeros(2), np.zeros((1, 1), np.int64), np.zeros((1, 1)), np.zeros((1, 2)))


def burst_success(
    levels_dbm: np.ndarray,
    angles_rad: np.ndarray,
    threshold_dbm: float,
    frames: int,
    interval_s: float,
    speeds_mps: np.ndarray,
    rolling_radius_m: np.ndarray,
    wheel_ids=None,
    start_angles: int = START_ANGLES,
    cancel=None,
) -> BurstResult:
    """P(at least one of ``frames`` frames >= threshold) per wheel and speed, and the burst margin.

    Burst margin: over the start angles, the smallest of the best frame's level above the threshold,
    min over theta0 of max over k of (level(theta0 + k v dt / R) - threshold), dB: the extra loss
    at which the first burst would fail. Parked it is the worst case over the turn (of the
    interpolated levels); diversity raises it at speed, except at the resonant speeds.

    Parameters
    ----------
    levels_dbm : (W, A) level over the turn per wheel, dBm (linear interpolation between angles)
    angles_rad : (A,) wheel angles of the levels, rad
    threshold_dbm : level a frame must reach, dBm (the receiver sensitivity)
    frames : frames per burst K
    interval_s : frame spacing dt, s
    speeds_mps : (V,) vehicle speeds, m/s
    rolling_radius_m : (W,) rolling radius per wheel, m
    cancel : optional callable checked between chunks of speeds; when it returns True the
        computation raises core.scoring.Cancelled
    """
    lv = np.atleast_2d(np.asarray(levels_dbm, float))
    W = lv.shape[0]
    speeds = np.asarray(speeds_mps, float)
    radius = np.broadcast_to(np.asarray(rolling_radius_m, float), (W,))
    th0 = np.arange(start_angles) * (2 * np.pi / start_angles)
    k = np.arange(frames)
    success = np.empty((W, len(speeds)))
    margin = np.empty((W, len(speeds)))
    parked = np.empty(W)
    parked_margin = np.empty(W)
    resonant = []
    counts = []
    on_grid = _on_start_grid(np.asarray(angles_rad, float), start_angles)
    for w in range(W):
        l0 = _periodic_interp(lv[w], angles_rad, th0)
        parked[w] = (l0 >= threshold_dbm).mean()
        parked_margin[w] = l0.min() - threshold_dbm
        step = speeds * interval_s / radius[w]  # (V,) rad between frames
        per = max(1, CHUNK_EVALUATIONS // (len(th0) * frames))
        for a in range(0, len(speeds), per):
            if cancel is not None and cancel():
                raise Cancelled()
            sl = slice(a, a + per)
            if on_grid:
                best = _best_frames(l0, step[sl], frames)
            else:
                ang = th0[None, :, None] + step[sl, None, None] * k[None, None, :]  # (v, T, K)
                best = _periodic_interp(lv[w], angles_rad, ang.reshape(-1)).reshape(ang.shape).max(axis=2)  # (v, T)
            success[w, sl] = (best >= threshold_dbm).mean(axis=1)
            margin[w, sl] = best.min(axis=1) - threshold_dbm
        period = 2 * np.pi * radius[w] / interval_s
        lo, hi = (speeds.min(), speeds.max()) if len(speeds) else (0.0, 0.0)
        n_lo, n_hi = max(1, int(np.ceil(lo / period))), int(np.floor(hi / period))
        counts.append(max(0, n_hi - n_lo + 1))
        n = np.arange(n_lo, min(n_hi, n_lo + MAX_RESONANT_SPEEDS - 1) + 1)  # bounded: never the whole list
        resonant.append(n * period)
    ids = tuple(wheel_ids) if wheel_ids is not None else tuple(str(i) for i in range(W))
    return BurstResult(ids, speeds, success, parked, tuple(resonant), tuple(counts), margin, parked_margin)


def speed_sweep(speed_min_mps: float, speed_max_mps: float, step_mps: float = 0.25) -> np.ndarray:
    """Speeds from min to max inclusive (m/s); always includes 0 when min is 0."""
    n = max(2, int(round((speed_max_mps - speed_min_mps) / step_mps)) + 1)
    return np.linspace(speed_min_mps, speed_max_mps, n)


def burst_for_spot(scene, scores, spot_index: int, cancel=None) -> BurstResult:
    """Burst success of one scored spot with the scene's radio setup (threshold = sensitivity)."""
    r = scene.vehicle.radio
    return burst_success(
        scores.levels_dbm[spot_index],
        scene.angles_rad,
        scene.sensitivity_dbm,
        r.frames_per_burst,
        r.frame_interval_s,
        speed_sweep(r.speed_min_mps, r.speed_max_mps),
        np.array([w.rolling_radius_m for w in scene.wheels]),
        scene.wheel_ids,
        cancel=cancel,
    )

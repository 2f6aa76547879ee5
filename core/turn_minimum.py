"""The worst case of a link over the continuous wheel turn, refined between the sampled angles.

The level over one turn has narrow nulls (the sensor's polarization turning through the receiver's,
the road ray interfering with the direct ray) that a fixed set of sampled angles can step over, so
the minimum of the samples alone depends on how many there are. Between panel boundaries the
received field V(theta) is a smooth complex function of the wheel angle; this module brackets and
refines its smallest magnitude:

1. Prediction: on each interval between neighbouring samples the field is interpolated linearly in
   the complex plane, and the smallest |V|^2 on that chord is found in closed form (a field that
   changes sign between two samples, as at a polarization null, predicts zero there). The
   prediction is held at the null floor (linear between the ends).
2. Interpolation: the ``REFINE_INTERVALS`` intervals with the lowest prediction get two
   evaluations of the true link: first at the predicted point (mid-interval when the prediction
   sits at an end), then at the minimum of a complex quadratic through the interval's two ends and
   that point (searched on a grid of ``QUAD_GRID`` points). This lands in narrow smooth nulls.
3. Golden-section search: where the interpolation cannot be trusted (its quadratic missed the
   true level at its minimum by more than ``SMOOTH_DB``, or the best point found is a sample rather
   than an interior point), ``GOLDEN_STEPS`` steps of a golden-section search on the true link
   within one sample step either side of the best point. This finds a minimum at the edge of a
   jump of the body loss (the path moving from one panel to another, where the field is not smooth
   and the interpolation cannot help). Skipped where it cannot change the score by more than
   ``SMOOTH_DB``: inside the cabin the scored power is the fade quantile of the rays plus the cabin's
   diffuse power (core.links.fade_power, rising with the rays' power), so even a perfect null of the
   rays leaves at least the quantile of the diffuse part alone, taken at its smallest over the search
   window (the diffuse power is interpolated in dB between the cavity's tabulated angles, so its
   smallest value there is at a window end or a table angle).
4. The worst case is the smallest floored power among the samples and every evaluated point:
   always a level computed at a real wheel angle, never an extrapolation, so it can only come down
   toward the true minimum as the sampling gets finer. Its angle is that point's.

All (spot, wheel) pairs are refined together, a step at a time, so each step is one vectorised
call of the link model (core.links.link_field) over every pair. The convergence is checked in
tests/test_turn_minimum.py (72 against 1,440 sampled angles on every sample, both wheel models).

References
----------
The bracketing-then-interpolation idea is that of a safeguarded parabolic line search (R. P. Brent,
Algorithms for Minimization without Derivatives, 1973, ch. 5), applied here to the complex field
rather than to the level in dB, because |V|^2 of a smooth complex V is smooth even at a null while
the level in dB is not.
"""

from __future__ import annotations

import numpy as np

from core import kernels
from core.links import LinkField, fade_power, link_field, sensor_states

#: intervals refined per (spot, wheel)
REFINE_INTERVALS = 3
#: points of the quadratic's search grid per interval
QUAD_GRID = 33
#: the interpolation is trusted where its quadratic predicts the true level at its minimum within this, dB
SMOOTH_DB = 0.1
#: golden-section steps around each refined interval's best point (each shrinks the bracket by 0.618)
GOLDEN_STEPS = 7
_T = np.linspace(0.0, 1.0, QUAD_GRID)
_GOLD = (np.sqrt(5.0) - 1.0) / 2.0


def _chord_minimum(r0, i0, r1, i1) -> tuple[np.ndarray, np.ndarray]:
    """Parameter t in [0, 1] of the smallest |v0 + t (v1 - v0)| and that |.|^2, for complex v0, v1
    given as real and imaginary parts (real arithmetic, in place: this runs over every interval)."""
    dr = r1 - r0
    di = i1 - i0
    dd = dr * dr
    dd += di * di
    np.maximum(dd, 1e-300, out=dd)
    t = r0 * dr
    t += i0 * di
    t /= dd
    np.negative(t, out=t)
    np.clip(t, 0.0, 1.0, out=t)
    dr *= t
    dr += r0
    di *= t
    di += i0
    dr *= dr
    di *= di
    dr += di
    return t, dr


def _candidate_intervals(predicted: np.ndarray, k: int) -> np.ndarray:
    """Per row, k intervals to refine, (P, k) indices: the lowest prediction; the lowest that is not
    its neighbour (another basin of the turn, e.g. the sensor's mirror position); then the lowest of
    the rest, neighbours allowed (a basin split by a jump of the body loss)."""
    P, A = predicted.shape
    pool = min(A, 4 * k)
    order = np.argsort(predicted, axis=1)[:, :pool]
    rows = np.arange(P)
    taken = [order[:, 0]]
    free = np.ones((P, pool), bool)
    free[:, 0] = False
    if k >= 2:
        gap = np.abs(order - taken[0][:, None]) % A
        apart = free & (np.minimum(gap, A - gap) > 1)
        j = np.where(apart.any(axis=1), np.argmax(apart, axis=1), 1)
        taken.append(order[rows, j])
        free[rows, j] = False
    for _ in range(2, k):
        j = np.argmax(free, axis=1)
        taken.append(order[rows, j])
        free[rows, j] = False
    return np.stack(taken, axis=1)


class _Pairs:
    """The (spot, wheel) pairs being refined, flattened: pair p is spot p // W, wheel p % W."""

    def __init__(self, scene, spots: np.ndarray, axes: np.ndarray, spot_bits: np.ndarray | None,
                 spot_diffuse: np.ndarray | None = None):
        self.scene = scene
        if spot_diffuse is None and getattr(scene, "cavity", None) is not None:
            from core.cavity import spot_factor

            spot_diffuse = spot_factor(scene, spots, axes)
        self.spot_diffuse = spot_diffuse
        S, W = len(spots), len(scene.wheels)
        self.spot = np.repeat(np.arange(S), W)
        self.wheel = np.tile(np.arange(W), S)
        self.spots, self.axes, self.spot_bits = spots, axes, spot_bits

    def subset(self, idx: np.ndarray) -> _Pairs:
        """The pairs ``idx`` only."""
        sub = object.__new__(_Pairs)
        sub.__dict__.update(self.__dict__)
        sub.spot, sub.wheel = self.spot[idx], self.wheel[idx]
        return sub

    def evaluate(self, theta: np.ndarray) -> np.ndarray:
        """Floored field power (1/m^2) of every pair at wheel angles theta (P, K) rad: (P, K)."""
        return self.field(theta).power()

    def diffuse_floor(self, lo: np.ndarray, hi: np.ndarray) -> np.ndarray | None:
        """The smallest diffuse power (1/m^2, core.cavity) of every pair over wheel angles [lo, hi] (P,) rad, or
        None without a cabin field: the least of the window's ends and the cavity's tabulated angles inside it."""
        cav = getattr(self.scene, "cavity", None)
        if cav is None or self.spot_diffuse is None:
            return None
        nodes = cav.input_angles
        two_pi = 2.0 * np.pi
        ends = np.stack([lo, hi], axis=1)
        best = cav.input_at(self.wheel[:, None], ends).min(axis=1)
        for j, a in enumerate(nodes):  # a table angle inside the window (in any turn of it)
            inside = a + np.ceil((lo - a) / two_pi) * two_pi <= hi
            if inside.any():
                best = np.where(inside, np.minimum(best, cav.input[self.wheel, j]), best)
        return best * self.spot_diffuse[self.spot]

    def field(self, theta: np.ndarray) -> LinkField:
        """The link field of every pair at wheel angles theta (P, K) rad: arrays (P, K)."""
        P, K = theta.shape
        sc = self.scene
        th = theta.reshape(-1)
        wheel = np.repeat(self.wheel, K)
        spot = np.repeat(self.spot, K)
        src, s_axis, bits0 = sensor_states(sc, wheel, th)
        sb = None if self.spot_bits is None else self.spot_bits[spot]
        dif = None if self.spot_diffuse is None else self.spot_diffuse[spot]
        f = link_field(sc, wheel, th, src, s_axis, bits0, self.spots[spot], self.axes[spot], sb, dif)
        d = np.reshape(f.diffuse, (P, K)) if np.ndim(f.diffuse) else f.diffuse
        return LinkField(f.re.reshape(P, K), f.im.reshape(P, K), f.floor2.reshape(P, K), d, f.fade_q)


def _golden(pairs: _Pairs, best_p: np.ndarray, best_t: np.ndarray, step: float) -> tuple[np.ndarray, np.ndarray]:
    """GOLDEN_STEPS golden-section steps on [best_t - step, best_t + step] for every pair; the best
    power and angle seen (never worse than the given ones). Arrays (n,)."""
    lo, hi = best_t - step, best_t + step
    x1, x2 = hi - _GOLD * (hi - lo), lo + _GOLD * (hi - lo)
    f12 = pairs.evaluate(np.stack([x1, x2], axis=1))
    f1, f2 = f12[:, 0], f12[:, 1]
    for x, fx in ((x1, f1), (x2, f2)):
        better = fx < best_p
        best_p, best_t = np.where(better, fx, best_p), np.where(better, x, best_t)
    for _ in range(GOLDEN_STEPS):
        left = f1 < f2  # the minimum lies in [lo, x2]
        hi = np.where(left, x2, hi)
        lo = np.where(left, lo, x1)
        new_x = np.where(left, hi - _GOLD * (hi - lo), lo + _GOLD * (hi - lo))
        fx = pairs.evaluate(new_x[:, None])[:, 0]
        x1, x2 = np.where(left, new_x, x2), np.where(left, x1, new_x)
        f1, f2 = np.where(left, fx, f2), np.where(left, f1, fx)
        better = fx < best_p
        best_p, best_t = np.where(better, fx, best_p), np.where(better, new_x, best_t)
    return best_p, best_t


def refine_minimum(scene, spots: np.ndarray, axes: np.ndarray, sampled: LinkField,
                   spot_bits: np.ndarray | None = None,
                   spot_diffuse: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Smallest floored field power of every (spot, wheel) over the continuous turn, and its angle.

    Parameters
    ----------
    scene : core.scoring.Scene
    spots, axes : (S, 3) receiver positions (m) and unit antenna axes
    sampled : the field at the scene's sampled angles, arrays (S, W, A) (core.links.turn_field per wheel)
    spot_bits : (S,) the spots' hull membership bits, or None
    spot_diffuse : (S,) the spots' diffuse factor (core.cavity.spot_factor), or None

    Returns
    -------
    power : (S, W) the smallest |field|^2 held at the null floor, 1/m^2 (core.links.level_dbm turns
        it into dBm)
    theta : (S, W) its wheel angle, rad, in [0, 2 pi)
    """
    S, W, A = sampled.re.shape
    angles = scene.angles_rad
    step = 2.0 * np.pi / A
    pairs = _Pairs(scene, spots, axes, spot_bits, spot_diffuse)
    re = sampled.re.reshape(S * W, A)
    im = sampled.im.reshape(S * W, A)
    floor2 = sampled.floor2.reshape(S * W, A)
    dif = np.broadcast_to(sampled.diffuse, (S, W, A)).reshape(S * W, A)
    q = sampled.fade_q
    p = fade_power(np.maximum(re * re + im * im, floor2), dif, q)
    re_n, im_n, f_next, d_next = (np.concatenate([x[:, 1:], x[:, :1]], axis=1) for x in (re, im, floor2, dif))
    t, m = _chord_minimum(re, im, re_n, im_n)
    predicted = fade_power(np.maximum(m, floor2 + t * (f_next - floor2)), dif + t * (d_next - dif), q)
    k = min(REFINE_INTERVALS, A)
    cand = _candidate_intervals(predicted, k)  # (P, k) interval starts
    rows = np.arange(S * W)[:, None]
    v0 = re[rows, cand] + 1j * im[rows, cand]
    v2 = re_n[rows, cand] + 1j * im_n[rows, cand]
    f0, f2 = floor2[rows, cand], f_next[rows, cand]
    g0, g2 = dif[rows, cand], d_next[rows, cand]
    base = angles[cand]

    # interpolation: at the chord's minimum (mid-interval when that sits at an end), then at the
    # minimum of the complex quadratic through (0, v0), (t1, v1), (1, v2)
    t1 = t[rows, cand]
    t1 = np.where((t1 > 0.02) & (t1 < 0.98), t1, 0.5)
    e1 = pairs.field(base + t1 * step)
    p1, v1 = e1.power(), e1.re + 1j * e1.im
    # V(t) = v0 + B t + C t^2 through the three nodes
    cq = ((v1 - v0) - t1 * (v2 - v0)) / (t1 * (t1 - 1.0))
    bq = (v2 - v0) - cq
    if kernels.available():  # the same grid search compiled (core.link_kernel), no (P, k, QUAD_GRID) arrays
        from core import link_kernel

        i2, q2 = link_kernel.quad_grid_minimum(v0, bq, cq, f0, f2, g0, g2, _T, q)
    else:
        tt = _T[None, None, :]
        qr = v0.real[..., None] + tt * (bq.real[..., None] + tt * cq.real[..., None])
        qi = v0.imag[..., None] + tt * (bq.imag[..., None] + tt * cq.imag[..., None])
        qp = fade_power(np.maximum(qr * qr + qi * qi, f0[..., None] + tt * (f2 - f0)[..., None]),
                        g0[..., None] + tt * (g2 - g0)[..., None], q)
        i2 = np.argmin(qp, axis=-1)
        q2 = np.take_along_axis(qp, i2[..., None], axis=-1)[..., 0]
    t2 = _T[i2]
    p2 = pairs.evaluate(base + t2 * step)

    # per interval, the best of its ends and the two evaluations
    pts_p = np.stack([p[rows, cand], fade_power(np.maximum(v2.real**2 + v2.imag**2, f2), g2, q), p1, p2], axis=-1)
    pts_t = np.stack([base, base + step, base + t1 * step, base + t2 * step], axis=-1)
    j = np.argmin(pts_p, axis=-1)[..., None]
    best_p = np.take_along_axis(pts_p, j, axis=-1)[..., 0]  # (P, k)
    best_t = np.take_along_axis(pts_t, j, axis=-1)[..., 0]

    # golden-section search within one sample step either side of the best interval's best point,
    # for the pairs where the interpolation cannot be trusted: the quadratic missed the true level
    # at its own minimum by more than SMOOTH_DB, or the best point is an interval end (a sample)
    pick = np.argmin(best_p, axis=1)[:, None]
    bp = np.take_along_axis(best_p, pick, axis=1)[:, 0]
    bt = np.take_along_axis(best_t, pick, axis=1)[:, 0]
    smooth = (np.abs(10.0 * np.log10(np.maximum(q2, 1e-300) / np.maximum(p2, 1e-300))) < SMOOTH_DB)
    interior = np.take_along_axis(j[..., 0], pick, axis=1)[:, 0] >= 2
    rough = np.flatnonzero(~(np.take_along_axis(smooth, pick, axis=1)[:, 0] & interior))
    if len(rough):  # only where a deeper null of the rays could still lower the score by more than SMOOTH_DB
        sub = pairs.subset(rough)
        d_lo = sub.diffuse_floor(bt[rough] - step, bt[rough] + step)
        if d_lo is not None:
            can_drop = fade_power(np.zeros(len(rough)), d_lo, q) < bp[rough] * 10.0 ** (-SMOOTH_DB / 10.0)
            rough = rough[can_drop]
            sub = pairs.subset(rough)
    if len(rough):
        bp[rough], bt[rough] = _golden(sub, bp[rough], bt[rough], step)
    best_p, best_t = bp[:, None], bt[:, None]

    # the smallest of the samples and every refined interval
    i_s = np.argmin(p, axis=1)
    r = np.arange(S * W)
    sp, st = p[r, i_s], angles[i_s]
    i_k = np.argmin(best_p, axis=1)
    rp, rt = best_p[r, i_k], best_t[r, i_k]
    use = rp < sp
    power = np.where(use, rp, sp).reshape(S, W)
    theta = np.mod(np.where(use, rt, st), 2.0 * np.pi).reshape(S, W)
    return power, theta

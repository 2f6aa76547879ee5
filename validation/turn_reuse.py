"""Experiment (issue 17 item 2): can the body loss be reused along the wheel's turn?

The sensor moves on a circle of about 0.2 m in the wheel's plane, so the straight path to a receiver
changes little from one angle to the next. This script measures, on every sample and for grids of
receiver positions inside the body, the error of computing the direct ray's body loss at every k-th
angle only and taking the others from the computed ones (nearest computed angle, or linear
interpolation around the turn), against the exact body loss at every angle (core.geometry.body_loss_db,
the engine's own function). It prints, per sample and k, the largest error, the 99th percentile, and the
share of links off by more than the 0.01 dB bound of issue 17; and an adaptive variant (linear between
computed angles whose values agree within 0.01 dB, every angle computed elsewhere) with the share of
angles it computes.

    python validation/turn_reuse.py [--step 0.1] [--k 2 3 4]
"""

from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np
from core.samples import DEFAULT_SAMPLE

from core.geometry import body_loss_db
from core.scoring import Scene, grid_for_region
from core.vehicle import load_vehicle

TOL_DB = 0.01


def grid_points(v, hull, step: float) -> np.ndarray:
    """Receiver positions: the candidate cells (inside the body, outside the wheelhouses, as the heatmap's)
    of the file's top-view mounting regions, m."""
    from core.placement import exclusion

    pts = []
    for r in v.regions:
        if r.view != "top":
            continue
        u, w, mask, fixed = grid_for_region(r, step)
        uu, ww = np.meshgrid(u, w)
        p = np.stack([uu, ww, np.full_like(uu, fixed)], axis=-1)[mask]
        pts.append(p[exclusion(hull, p[:, 0], p[:, 1], p[:, 2]) == 0])
    p = np.concatenate(pts) if pts else np.zeros((0, 3))
    return p


def reuse_errors(scene, pts: np.ndarray, k: int) -> tuple[np.ndarray, np.ndarray, np.ndarray, float]:
    """Errors of the body loss, dB, over every link: nearest computed angle, linear interpolation, and
    adaptive (linear where the two computed ends agree within TOL_DB, exact elsewhere); the share of
    angles the adaptive scheme computes."""
    W, A = scene.sensor_pos.shape[:2]
    src = scene.sensor_pos.reshape(-1, 3)
    bits = scene.sensor_bits.reshape(-1)
    a = np.ascontiguousarray(np.broadcast_to(src[None], (len(pts), *src.shape)).reshape(-1, 3))
    b = np.repeat(pts, len(src), axis=0)
    exact = body_loss_db(scene.hull, a, b, scene.freq_hz, np.tile(bits, len(pts))).reshape(len(pts), W, A)
    kept = np.arange(0, A, k)
    idx = np.arange(A)
    # nearest kept angle around the turn
    d = np.abs(idx[:, None] - kept[None, :])
    d = np.minimum(d, A - d)
    near = kept[np.argmin(d, axis=1)]
    e_near = exact[..., near] - exact
    # linear interpolation between the kept angles around the turn (periodic)
    lo = (idx // k) * k
    hi = (lo + k) % A
    hi = np.where(lo + k >= A, 0, hi)
    span = np.where(lo + k >= A, A - lo, k)
    f = (idx - lo) / span
    lin = exact[..., lo] * (1 - f) + exact[..., hi] * f
    e_lin = lin - exact
    # adaptive: an interval whose computed ends differ by more than TOL_DB is computed in full
    agree = np.abs(exact[..., hi] - exact[..., lo]) <= TOL_DB
    on_kept = np.isin(idx, kept)
    adaptive = np.where(agree | on_kept, lin, exact)
    computed = (~agree & ~on_kept).mean() + on_kept.mean()
    return e_near.ravel(), e_lin.ravel(), (adaptive - exact).ravel(), float(computed)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--step", type=float, default=0.1, help="grid spacing, m (default 0.1)")
    ap.add_argument("--k", type=int, nargs="+", default=[2, 3, 4], help="compute every k-th angle")
    args = ap.parse_args()
    for path in sorted(Path(DEFAULT_SAMPLE).parent.glob("*.json")):
        v = load_vehicle(path)
        scene = Scene.from_vehicle(v, wheel_model="knife_edge")
        pts = grid_points(v, scene.hull, args.step)
        if not len(pts):
            continue
        for k in args.k:
            e_near, e_lin, e_ad, share = reuse_errors(scene, pts, k)
            for name, e in (("nearest", e_near), ("linear", e_lin), ("adaptive", e_ad)):
                a = np.abs(e)
                print(f"{path.stem:17s} {len(pts):5d} spots x {scene.sensor_pos.shape[0]} wheels x "
                      f"{scene.sensor_pos.shape[1]} angles, every {k}th angle, {name:8s}: max {a.max():7.3f} dB, "
                      f"99th pct {np.percentile(a, 99):5.2f} dB, 95th {np.percentile(a, 95):5.2f} dB, "
                      f"> {TOL_DB} dB: {int(np.sum(a > TOL_DB))} links ({100 * np.mean(a > TOL_DB):.2f} %)"
                      + (f"; {100 * share:.1f} % of the angles computed" if name == "adaptive" else ""))


if __name__ == "__main__":
    main()

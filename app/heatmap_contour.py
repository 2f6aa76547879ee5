"""The 0 dB contour of a margin heatmap, shared by the desktop program and the report.

The contour is traced (pyqtgraph's isocurve) on the margins with every cell that was not computed
(outside the region, outside the body, inside a wheelhouse: ``core.scoring.Heatmap.computed``)
filled from its nearest computed cell, so the edge of the computed area is not taken for a contour.
The filled cells carry no data, so the pieces of line that run between them are then cut away: a
contour vertex is kept only where both cells it lies between are computed.
"""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from scipy.ndimage import distance_transform_edt


def zero_contour(hm, level_db: float = 0.0) -> list[np.ndarray]:
    """The ``level_db`` contour of a core.scoring.Heatmap as (K, 2) polylines in (u, v) metres."""
    m = hm.margin_db
    ok = hm.computed & np.isfinite(m)
    if not ok.any() or (m[ok] >= level_db).all() or (m[ok] < level_db).all():
        return []
    if not ok.all():
        _, (ii, jj) = distance_transform_edt(~ok, return_indices=True)
        m = m[ii, jj]
    nv, nu = m.shape
    du = hm.u_m[1] - hm.u_m[0] if nu > 1 else hm.step_m
    dv = hm.v_m[1] - hm.v_m[0] if nv > 1 else hm.step_m
    lines = pg.functions.isocurve(m.T, level_db, connected=True, extendToEdge=True)
    out = []
    for ln in lines:
        a = np.asarray(ln, float)
        if len(a) < 2:
            continue
        # isocurve's pixel (i, j) spans [i, i + 1]: cell centres at i + 0.5; fi, fj are cell-centre indices
        fi, fj = a[:, 0] - 0.5, a[:, 1] - 0.5
        keep = np.ones(len(a), bool)
        for ci in (np.floor(fi), np.ceil(fi)):
            for cj in (np.floor(fj), np.ceil(fj)):
                keep &= ok[np.clip(cj.astype(int), 0, nv - 1), np.clip(ci.astype(int), 0, nu - 1)]
        uv = np.column_stack([hm.u_m[0] + fi * du, hm.v_m[0] + fj * dv])
        # split into the runs of kept vertices
        edges = np.flatnonzero(np.diff(np.concatenate([[0], keep.astype(np.int8), [0]])))
        for s, e in zip(edges[::2], edges[1::2]):
            if e - s >= 2:
                out.append(uv[s:e])
    return out


def polylines_for_plot(lines: list[np.ndarray]) -> tuple[np.ndarray, np.ndarray]:
    """The polylines joined into x, y arrays with nan between them (for a curve drawn with connect='finite')."""
    if not lines:
        return np.empty(0), np.empty(0)
    parts = []
    for ln in lines:
        parts.append(ln)
        parts.append(np.full((1, 2), np.nan))
    xy = np.concatenate(parts[:-1])
    return xy[:, 0], xy[:, 1]

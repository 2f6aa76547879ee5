"""Wheel distinctness: can the receiver tell the wheels apart by signal strength?

Location by signal strength assigns a sensor to a wheel position from its typical level. For
one spot, each wheel's level over a turn is a distribution; two wheels are hard to tell apart
when their medians are close and their distributions overlap. Reported per pair (i, j) with
median_i <= median_j: the difference of medians (dB) and the overlap, the share of wheel i's
frames (angles) that are louder than wheel j's median.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class Distinctness:
    wheel_ids: tuple[str, ...]
    medians_dbm: np.ndarray  # (W,)
    separation_db: np.ndarray  # (W, W) |median_i - median_j|
    overlap: np.ndarray  # (W, W) share of the quieter wheel's frames above the louder wheel's median
    closest_pair: tuple[int, int]  # (quieter, louder) of the smallest separation
    min_separation_db: float
    closest_overlap: float


def wheel_distinctness(levels_dbm: np.ndarray, wheel_ids=None) -> Distinctness:
    """Distinctness from levels (W, A) in dBm (one spot, all wheels over a turn)."""
    lv = np.atleast_2d(np.asarray(levels_dbm, float))
    W = lv.shape[0]
    med = np.median(lv, axis=1)
    sep = np.abs(med[:, None] - med[None, :])
    overlap = np.zeros((W, W))
    for i in range(W):
        for j in range(W):
            if i == j:
                continue
            q, loud = (i, j) if med[i] <= med[j] else (j, i)
            overlap[i, j] = float(np.mean(lv[q] > med[loud]))
    ids = tuple(wheel_ids) if wheel_ids is not None else tuple(str(i) for i in range(W))
    if W < 2:
        return Distinctness(ids, med, sep, overlap, (0, 0), float("inf"), 0.0)
    iu, ju = np.triu_indices(W, 1)
    k = int(np.argmin(sep[iu, ju]))
    i, j = int(iu[k]), int(ju[k])
    pair = (i, j) if med[i] <= med[j] else (j, i)
    return Distinctness(ids, med, sep, overlap, pair, float(sep[i, j]), float(overlap[i, j]))

"""Tracing over a picture (core.picture_trace): a rectangle photographed at a known scale, turned and
clicked with pixel noise, comes back within 0.5 % once the scale is set by two points (issue 14)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from core.body_import import BodyImportError
from core.picture_trace import PictureScale, trace_outline

# the known body: a 4.2 m x 1.45 m rectangle from x = -3.4 to 0.8 m, z = 0.15 to 1.6 m; the wheel centres
# at x = 0 and -2.7 m (the wheelbase), z = 0.33 m
RECT = np.array([(0.8, 0.15), (0.8, 1.6), (-3.4, 1.6), (-3.4, 0.15)])
WHEELS = np.array([(0.0, 0.33), (-2.7, 0.33)])
PX_PER_M = 151.3
TILT = math.radians(2.5)  # the camera was not quite level
ORIGIN_PX = np.array([830.0, 612.0])  # where the vehicle origin lands in the picture


def to_picture(xz: np.ndarray, front_right: bool = True) -> np.ndarray:
    """Vehicle (x, z), m -> picture pixels (x right, y down), turned by TILT."""
    u = xz[:, 0] * (1 if front_right else -1)
    v = xz[:, 1]
    c, s = math.cos(TILT), math.sin(TILT)
    uu, vv = c * u - s * v, s * u + c * v
    return ORIGIN_PX + PX_PER_M * np.c_[uu, -vv]


@pytest.mark.parametrize("front", ["right", "left"])
def test_traced_rectangle_scaled_by_two_points_is_within_half_a_percent(front):
    rng = np.random.default_rng(2026)  # clicks land within half a pixel
    right = front == "right"
    clicks = to_picture(RECT, right) + rng.uniform(-0.5, 0.5, (4, 2))
    w1, w2 = to_picture(WHEELS, right) + rng.uniform(-0.5, 0.5, (2, 2))
    ground = to_picture(np.array([(0.0, 0.0)]), right)[0]
    scale = PictureScale(tuple(w1), tuple(w2), 2.7, level=True)
    imp = trace_outline(clicks, scale, "side", ground, (0.0, 0.0), front)
    got = imp.points
    length, height = np.ptp(got, axis=0)
    assert length == pytest.approx(4.2, rel=0.005) and height == pytest.approx(1.45, rel=0.005)
    # every corner where it belongs, within 0.5 % of the body length
    for corner in RECT:
        assert np.min(np.linalg.norm(got - corner, axis=1)) < 0.005 * 4.2
    assert math.degrees(scale.tilt_rad) == pytest.approx(2.5, abs=0.5)  # the camera tilt, whichever way the car faces


def test_without_levelling_the_tilt_stays_in_the_outline():
    clicks = to_picture(RECT)
    w1, w2 = to_picture(WHEELS)
    imp = trace_outline(clicks, PictureScale(tuple(w1), tuple(w2), 2.7), "side", to_picture(np.zeros((1, 2)))[0])
    # the 4.2 m top edge rises by 4.2 sin(2.5 deg) = 0.18 m when the picture is not levelled
    top = imp.points[np.argsort(imp.points[:, 1])[-2:]]
    assert abs(top[0, 1] - top[1, 1]) == pytest.approx(4.2 * math.sin(TILT), rel=0.01)


def test_bad_tracing_input():
    with pytest.raises(BodyImportError, match="positive length"):
        PictureScale((0, 0), (100, 0), 0.0)
    with pytest.raises(BodyImportError, match="2 pixels apart"):
        PictureScale((5, 5), (5, 6), 2.7)
    s = PictureScale((0, 0), (100, 0), 1.0)
    with pytest.raises(BodyImportError, match="at least 3 outline points"):
        trace_outline([(0, 0), (1, 1)], s, "side", (0, 0))
    with pytest.raises(BodyImportError, match="crosses itself"):
        trace_outline([(0, 0), (100, 100), (100, 0), (0, 100)], s, "side", (0, 0))

"""Tracing a body outline over a picture: picture pixels -> vehicle axes, m (pure numpy, no Qt).

The user loads a side or top view (a drawing or a photo), clicks two points of known distance (for
example the two wheel centres, the wheelbase apart), types that distance, clicks a reference point
(for example the front wheel's ground contact) and then the outline. This module turns the clicked
pixels into the vehicle outline:

- scale: metres per pixel = typed distance / pixel distance of the two points (a similarity
  transform; the picture must show the view without perspective: a drawing, or a photo taken from
  far away square to the vehicle. Perspective is not corrected, and the user is told so);
- level (optional): the picture is turned so that the line through the two points is horizontal
  (two wheel centres lie on one horizontal line in a side view; in a top view, on a line along x);
- picture y points down; drawing v = -y;
- then the same placement as a drawing (core.body_import.place: reference point to its vehicle
  position, front left or right) and the same simplification and checks.

Lengths in metres, picture coordinates in pixels (x right, y down, image top-left origin).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from shapely.geometry import Polygon

from core.body_import import BodyImportError, Imported, Placement, View, place, simplify_to_budget
from core.bounds import MAX_BODY_OUTLINE_POINTS


@dataclass(frozen=True)
class PictureScale:
    """The picture's scale from two clicked points ``p1``, ``p2`` (pixels) ``distance_m`` apart.

    level : turn the picture so that p1 -> p2 is horizontal (p2 to the right of p1 when the front is
            on the right, or simply along the drawing's u axis)
    """

    p1: tuple[float, float]
    p2: tuple[float, float]
    distance_m: float
    level: bool = False

    def __post_init__(self):
        if not (math.isfinite(self.distance_m) and self.distance_m > 0):
            raise BodyImportError("the scale distance must be a positive length in m")
        if self.pixels < 2.0:
            raise BodyImportError("the two scale points must lie at least 2 pixels apart")

    @property
    def pixels(self) -> float:
        return float(np.hypot(self.p2[0] - self.p1[0], self.p2[1] - self.p1[1]))

    @property
    def m_per_px(self) -> float:
        return self.distance_m / self.pixels

    @property
    def tilt_rad(self) -> float:
        """Angle of p1 -> p2 above the picture's horizontal (drawing axes, v up), rad; 0 unless ``level``."""
        if not self.level:
            return 0.0
        du, dv = self.p2[0] - self.p1[0], -(self.p2[1] - self.p1[1])
        a = math.atan2(dv, du)
        # the line's direction, not which end was clicked first: within +-90 degrees
        if a > math.pi / 2:
            a -= math.pi
        elif a < -math.pi / 2:
            a += math.pi
        return a

    def to_drawing(self, px) -> np.ndarray:
        """Pixels (N, 2) -> drawing coordinates (u right, v up) in m, origin at p1, levelled if asked."""
        p = np.atleast_2d(np.asarray(px, float)) - np.asarray(self.p1, float)
        uv = np.c_[p[:, 0], -p[:, 1]] * self.m_per_px
        c, s = math.cos(-self.tilt_rad), math.sin(-self.tilt_rad)
        return uv @ np.array([[c, s], [-s, c]])


def trace_outline(pixels, scale: PictureScale, view: View, ref_px, ref_at=(0.0, 0.0), front="right",
                  max_points: int = MAX_BODY_OUTLINE_POINTS, source: str = "picture") -> Imported:
    """The clicked outline (pixels) in vehicle axes of ``view``, m, simplified to ``max_points``.

    ref_px : the clicked reference point, pixels; ref_at : its vehicle position in the view's axes, m."""
    pts = np.asarray(pixels, float)
    if pts.ndim != 2 or len(pts) < 3:
        raise BodyImportError(f"{source}: click at least 3 outline points (have {len(pts) if pts.ndim == 2 else 0})")
    ref = scale.to_drawing(ref_px)[0]
    placed = place(scale.to_drawing(pts), view, 1.0, Placement(ref=(float(ref[0]), float(ref[1])),
                                                               ref_at=tuple(ref_at), front=front))
    poly = Polygon(placed)
    if not poly.is_valid or poly.area < 1e-6:
        raise BodyImportError(f"{source}: the clicked outline crosses itself or encloses no area")
    kept, dev = simplify_to_budget(placed, max_points)
    notes = [f"scale {scale.m_per_px * 1000:.3f} mm per pixel from {scale.distance_m:g} m over "
             f"{scale.pixels:.1f} px" + (f", levelled by {math.degrees(scale.tilt_rad):.2f} deg" if scale.level else "")]
    return Imported(view, kept, source, len(pts), dev, tuple(notes))

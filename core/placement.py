"""Where a receiver position lies relative to the body: inside, outside, in a wheelhouse, or on a panel.

The body is the 2.5-D hull of :mod:`core.geometry`: inside the top outline at (x, y), inside the
side outline at (x, z), and not inside a wheelhouse (the arch about the wheel in x-z, from the
wheelhouse inner wall outward). This module is the one place that decides whether a receiver
position is a candidate; the CLI, the report, the desktop program, the heatmaps and the
cross-body search all call it.

Statuses (``Placement.status``), most serious first:

- ``outside_body``: outside the top outline (seen from above) or outside the side outline (above
  the body's upper line, below its underside, or beyond its front or rear at that x);
- ``in_wheelhouse``: inside the clearance zone of a wheel's wheelhouse (the wheels are named);
- ``near_surface``: inside, but closer than the mounting clearance to a hull surface (a panel,
  the floor, a wheelhouse wall);
- ``inside``: a candidate with room to mount.

Only positions inside the hull (``inside`` or ``near_surface``) are candidates
(:func:`candidate_mask`); the others get a located warning.

Distance to the nearest hull surface, m (``Placement.distance_m``): the hull is
H = T x R  intersected with  S (in x-z) x R  minus the union of the wheelhouses W_h = A_h x Y_h
(A_h the arch region in x-z, Y_h the half-line of y beyond the inner wall). For a point p inside H
the distance to the boundary of H is the distance to the complement, which is the union of the
three kinds of parts, so it is exactly the minimum of: the 2-D distance of (x, y) to the top
outline, the 2-D distance of (x, z) to the side outline, and per wheelhouse the distance to the
product set A_h x Y_h, sqrt(d(A_h)^2 + d(Y_h)^2) (the two factors lie in orthogonal coordinates).
For a point outside H the value is negative: minus the largest distance by which the point is
outside one part (outside the top outline, outside the side outline, or into a wheelhouse).
That is a lower bound of the distance to the body, exact when a single part is violated and its
nearest point is inside the others.

``MOUNTING_CLEARANCE_M`` (20 mm) is an engineering default, not a published value: a receiver
module or its antenna closer than that to a panel either does not fit (housings are about that
thick) or sits where the model's free-space receiver antenna no longer describes it (a metal panel
at lambda/35 at 433.92 MHz detunes and shorts a wire antenna: image theory, e.g. Balanis, Antenna
Theory, ch. 4.7). Results for such positions are flagged, not refused.

All lengths in m. No Qt.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from core.geometry import Hull, PolygonEdges, start_bits

#: engineering default: the least distance from a receiver position to any hull surface, m
MOUNTING_CLEARANCE_M = 0.020

INSIDE = "inside"
NEAR_SURFACE = "near_surface"
IN_WHEELHOUSE = "in_wheelhouse"
OUTSIDE_BODY = "outside_body"
STATUSES = (INSIDE, NEAR_SURFACE, IN_WHEELHOUSE, OUTSIDE_BODY)

#: short labels for table columns
FLAG_LABELS = {INSIDE: "", NEAR_SURFACE: "near panel", IN_WHEELHOUSE: "in wheelhouse", OUTSIDE_BODY: "OUTSIDE BODY"}

#: (points x edges) elements per block of the distance computation
_BLOCK = 1 << 16


@dataclass(frozen=True)
class _Outline:
    """One outline's edges with their outward unit normals."""

    p0: np.ndarray  # (E, 2)
    e: np.ndarray  # (E, 2)
    len2: np.ndarray  # (E,)
    normal: np.ndarray  # (E, 2) outward


def _outline(ed: PolygonEdges) -> _Outline:
    """The edges of an outline prepared by core.geometry.polygon_edges, with outward normals."""
    len2 = np.einsum("ij,ij->i", ed.e, ed.e)
    keep = len2 > 0.0
    p0, e = ed.p0[keep], ed.e[keep]
    area2 = float(np.sum(p0[:, 0] * (p0[:, 1] + e[:, 1]) - (p0[:, 0] + e[:, 0]) * p0[:, 1]))
    # counter-clockwise ring (area > 0): the outward normal of edge e is (e_v, -e_u)
    n = np.column_stack([e[:, 1], -e[:, 0]]) * (1.0 if area2 > 0 else -1.0)
    n /= np.sqrt(len2[keep])[:, None]
    return _Outline(p0, e, len2[keep], n)


def _edge_distance(ol: _Outline, u: np.ndarray, v: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Distance of points (u, v) (1-D, m) to the outline's boundary, and the nearest edge's index."""
    n = len(u)
    dist = np.empty(n)
    idx = np.empty(n, np.intp)
    step = max(1, _BLOCK // max(1, len(ol.p0)))
    for i in range(0, n, step):
        bu, bv = u[i : i + step, None], v[i : i + step, None]
        wu, wv = bu - ol.p0[:, 0], bv - ol.p0[:, 1]
        t = np.clip((wu * ol.e[:, 0] + wv * ol.e[:, 1]) / ol.len2, 0.0, 1.0)
        d2 = (wu - t * ol.e[:, 0]) ** 2 + (wv - t * ol.e[:, 1]) ** 2
        k = np.argmin(d2, axis=1)
        idx[i : i + step] = k
        dist[i : i + step] = np.sqrt(d2[np.arange(len(k)), k])
    return dist, idx


def _face_name(normal: np.ndarray, view: str) -> str:
    """Name of a hull face from its outward normal: walls in the top view, roof/floor in the side view."""
    a, b = float(normal[0]), float(normal[1])
    if view == "top":
        if abs(b) >= abs(a):
            return "left side wall" if b > 0 else "right side wall"
        return "front end" if a > 0 else "rear end"
    if abs(b) >= abs(a):
        return "upper outline (roof, hood or deck)" if b > 0 else "underside (floor)"
    return "front face" if a > 0 else "rear face"


def _arch_distance(hull: Hull, x: np.ndarray, z: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per wheelhouse (N, H): distance of (x, z) to the arch region (0 inside) and depth inside it (0 outside), m.

    The arch region is the upper half disc of radius r about (xc, zc) and the strip |x - xc| < r
    below zc (core.geometry.in_wheelhouse_parts)."""
    dx = x[:, None] - hull.wh_xc
    dz = z[:, None] - hull.wh_zc
    rho = np.hypot(dx, dz)
    upper = dz >= 0
    to_region = np.where(upper, np.maximum(rho - hull.wh_r, 0.0), np.maximum(np.abs(dx) - hull.wh_r, 0.0))
    depth = np.where(upper, np.maximum(hull.wh_r - rho, 0.0), np.maximum(hull.wh_r - np.abs(dx), 0.0))
    return to_region, depth


@dataclass(frozen=True)
class Placement:
    """Placement of N receiver positions relative to the body hull (lengths in m).

    Attributes
    ----------
    positions_m : (N, 3) the positions
    status : (N,) one of STATUSES per position
    distance_m : (N,) distance to the nearest hull surface: exact and >= 0 inside; < 0 outside
        (minus a lower bound of the distance to the body, see the module docstring)
    nearest : (N,) name of the nearest hull surface of an inside position ("" outside)
    in_top, in_side : (N,) inside the top / side outline
    in_wheelhouse : (N, H) inside wheelhouse h's clearance zone (arch and lateral test)
    wheelhouse_depth_m : (N, H) how far inside that zone, m (0 where not inside)
    outside_top_m : (N,) distance outside the top outline (0 inside it); outside_top_face: its face
    side_z_m : (N, 2) lower and upper z of the side outline at the position's x (nan beyond it)
    wheel_ids : (H,) the wheel of each wheelhouse
    clearance_m : the mounting clearance used for ``near_surface``
    """

    positions_m: np.ndarray
    status: tuple[str, ...]
    distance_m: np.ndarray
    nearest: tuple[str, ...]
    in_top: np.ndarray
    in_side: np.ndarray
    in_wheelhouse: np.ndarray
    wheelhouse_depth_m: np.ndarray
    outside_top_m: np.ndarray
    outside_top_face: tuple[str, ...]
    side_z_m: np.ndarray
    wheel_ids: tuple[str, ...]
    clearance_m: float

    def __len__(self) -> int:
        return len(self.status)

    @property
    def candidate(self) -> np.ndarray:
        """(N,) True where the position is inside the hull (``inside`` or ``near_surface``)."""
        return np.array([s in (INSIDE, NEAR_SURFACE) for s in self.status], bool)

    @property
    def flagged(self) -> np.ndarray:
        """(N,) True where the position gets a warning (any status but ``inside``)."""
        return np.array([s != INSIDE for s in self.status], bool)

    def wheels_of(self, i: int) -> list[str]:
        """Ids of the wheels whose wheelhouse clearance zone holds position i."""
        return [w for w, hit in zip(self.wheel_ids, self.in_wheelhouse[i]) if hit]

    def flag(self, i: int) -> str:
        """Short label for a table column ("" for a position with room to mount)."""
        s = self.status[i]
        if s == IN_WHEELHOUSE:
            return f"in wheelhouse {'/'.join(self.wheels_of(i))}"
        return FLAG_LABELS[s]

    def message(self, i: int) -> str:
        """The located warning for position i, e.g. "lies below the body's underside at x = -4.70 m (...)"; "" if none."""
        s = self.status[i]
        x, y, z = (float(c) for c in self.positions_m[i])
        if s == INSIDE:
            return ""
        if s == NEAR_SURFACE:
            return (f"lies {1000 * self.distance_m[i]:.0f} mm from the body's {self.nearest[i]}, closer than the "
                    f"mounting clearance of {1000 * self.clearance_m:.0f} mm")
        parts = []
        if not self.in_side[i]:
            zlo, zhi = self.side_z_m[i]
            if not np.isfinite(zlo):
                parts.append(f"lies beyond the body's {'front' if x > 0 else 'rear'} end in the side view at x = {x:.2f} m")
            elif z < zlo:
                parts.append(f"lies below the body's underside at x = {x:.2f} m (underside at z = {zlo:.2f} m, "
                             f"the spot at z = {z:.2f} m)")
            elif z > zhi:
                parts.append(f"lies above the body's upper outline at x = {x:.2f} m (outline at z = {zhi:.2f} m, "
                             f"the spot at z = {z:.2f} m)")
            else:
                parts.append(f"lies outside the side outline at (x, z) = ({x:.2f}, {z:.2f}) m")
        if not self.in_top[i]:
            parts.append(f"lies outside the top outline at (x, y) = ({x:.2f}, {y:.2f}) m, "
                         f"{1000 * self.outside_top_m[i]:.0f} mm beyond the {self.outside_top_face[i]}")
        wheels = self.wheels_of(i)
        if wheels and s == IN_WHEELHOUSE:
            depth = float(self.wheelhouse_depth_m[i].max())
            parts.append(f"lies inside the wheelhouse clearance of wheel {'/'.join(wheels)} ({1000 * depth:.0f} mm in)")
        return "; ".join(parts)

    def messages(self) -> list[tuple[int, str]]:
        """(index, located warning) of every flagged position, in order."""
        return [(i, self.message(i)) for i in range(len(self)) if self.status[i] != INSIDE]

    def record(self, i: int) -> dict:
        """Plain JSON data of position i: status, distance to the nearest surface (m), wheels, message."""
        return {
            "status": self.status[i],
            "distance_to_surface_m": round(float(self.distance_m[i]), 4),
            "wheelhouse_of": self.wheels_of(i),
            "message": self.message(i),
        }


def _hull_and_ids(body, wheel_ids) -> tuple[Hull, tuple[str, ...]]:
    """Accept a Hull (with wheel ids) or anything with ``hull`` and ``wheel_ids`` (a core.scoring.Scene)."""
    if isinstance(body, Hull):
        ids = tuple(wheel_ids) if wheel_ids is not None else tuple(f"wheel {h + 1}" for h in range(len(body.wh_xc)))
        return body, ids
    return body.hull, tuple(body.wheel_ids)


def candidate_mask(body, x, y, z) -> np.ndarray:
    """True where (x, y, z) m (any shapes that broadcast) is a candidate receiver position: inside
    the hull, outside every wheelhouse. ``body``: a Hull or a Scene. The cheap test for grids."""
    hull, _ = _hull_and_ids(body, None)
    return exclusion(hull, x, y, z) == 0


#: exclusion codes of :func:`exclusion`
EXCLUDED_NONE, EXCLUDED_OUTSIDE_BODY, EXCLUDED_IN_WHEELHOUSE = 0, 1, 2


def exclusion(body, x, y, z) -> np.ndarray:
    """Why a position is not a candidate (int8, the shape of the broadcast inputs):
    0 a candidate, 1 outside the body (outside the top or the side outline), 2 in a wheelhouse."""
    hull, _ = _hull_and_ids(body, None)
    bits = start_bits(hull, x, y, z)
    out = np.where((bits & 3) == 3, EXCLUDED_NONE, EXCLUDED_OUTSIDE_BODY).astype(np.int8)
    n_wh = len(hull.wh_xc)
    if n_wh:
        arch_bits = sum(1 << (2 * h) for h in range(n_wh))
        in_wh = ((bits >> 2) & (bits >> 3) & arch_bits) != 0
        out[(out == EXCLUDED_NONE) & in_wh] = EXCLUDED_IN_WHEELHOUSE
    return out


def classify(body, positions, wheel_ids=None, clearance_m: float = MOUNTING_CLEARANCE_M) -> Placement:
    """Classify receiver positions (N, 3) m against the body hull.

    Parameters
    ----------
    body : a core.geometry.Hull (then ``wheel_ids`` names its wheelhouses, in order) or a
        core.scoring.Scene (its hull and wheel ids)
    positions : (N, 3) or (3,) positions, m
    clearance_m : mounting clearance, m (default MOUNTING_CLEARANCE_M, an engineering default)
    """
    hull, ids = _hull_and_ids(body, wheel_ids)
    p = np.asarray(positions, float).reshape(-1, 3)
    x, y, z = p[:, 0], p[:, 1], p[:, 2]
    n = len(p)
    bits = start_bits(hull, x, y, z)
    in_top = (bits & 1) != 0
    in_side = (bits & 2) != 0
    n_wh = len(hull.wh_xc)
    h_idx = np.arange(n_wh)
    arch = ((bits[:, None] >> (2 + 2 * h_idx)) & 1) != 0
    lateral = ((bits[:, None] >> (3 + 2 * h_idx)) & 1) != 0
    in_wh = arch & lateral
    top = _outline(hull.top_edges)
    side = _outline(hull.side_edges)
    d_top, k_top = _edge_distance(top, x, y)
    d_side, k_side = _edge_distance(side, x, z)
    # wheelhouses: distance to A_h x Y_h from outside, and depth inside it
    to_arch, arch_depth = _arch_distance(hull, x, z)
    sy = hull.wh_sign * y[:, None]
    to_lateral = np.maximum(hull.wh_inner - sy, 0.0)
    lateral_depth = np.maximum(sy - hull.wh_inner, 0.0)
    d_wh = np.where(in_wh, 0.0, np.hypot(to_arch, to_lateral)) if n_wh else np.empty((n, 0))
    wh_depth = np.where(in_wh, np.minimum(arch_depth, lateral_depth), 0.0) if n_wh else np.empty((n, 0))
    # inside: exact distance to the boundary and the nearest face
    cands = np.column_stack([d_top, d_side, d_wh])
    which = np.argmin(cands, axis=1)
    dist_in = cands[np.arange(n), which]
    # outside: minus the largest violation of one part
    viol = np.column_stack([np.where(in_top, 0.0, d_top), np.where(in_side, 0.0, d_side),
                            wh_depth.max(axis=1) if n_wh else np.zeros(n)])
    inside = in_top & in_side & ~in_wh.any(axis=1)
    distance = np.where(inside, dist_in, -viol.max(axis=1))
    status, nearest = [], []
    for i in range(n):
        if not (in_top[i] and in_side[i]):
            status.append(OUTSIDE_BODY)
        elif not inside[i]:
            status.append(IN_WHEELHOUSE)
        elif dist_in[i] < clearance_m:
            status.append(NEAR_SURFACE)
        else:
            status.append(INSIDE)
        if not inside[i]:
            nearest.append("")
        elif which[i] == 0:
            nearest.append(_face_name(top.normal[k_top[i]], "top"))
        elif which[i] == 1:
            nearest.append(_face_name(side.normal[k_side[i]], "side"))
        else:
            nearest.append(f"wheelhouse of wheel {ids[which[i] - 2]}")
    zlo = np.interp(x, hull.env_x, hull.env_zbot, left=np.nan, right=np.nan)
    zhi = np.interp(x, hull.env_x, hull.env_ztop, left=np.nan, right=np.nan)
    return Placement(
        positions_m=p,
        status=tuple(status),
        distance_m=distance,
        nearest=tuple(nearest),
        in_top=in_top,
        in_side=in_side,
        in_wheelhouse=in_wh,
        wheelhouse_depth_m=wh_depth,
        outside_top_m=np.where(in_top, 0.0, d_top),
        outside_top_face=tuple("" if in_top[i] else _face_name(top.normal[k_top[i]], "top") for i in range(n)),
        side_z_m=np.column_stack([zlo, zhi]),
        wheel_ids=ids,
        clearance_m=float(clearance_m),
    )


__all__ = [
    "EXCLUDED_IN_WHEELHOUSE",
    "EXCLUDED_NONE",
    "EXCLUDED_OUTSIDE_BODY",
    "FLAG_LABELS",
    "INSIDE",
    "IN_WHEELHOUSE",
    "MOUNTING_CLEARANCE_M",
    "NEAR_SURFACE",
    "OUTSIDE_BODY",
    "STATUSES",
    "Placement",
    "candidate_mask",
    "classify",
    "exclusion",
]

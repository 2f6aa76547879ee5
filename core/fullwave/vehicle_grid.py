"""Wire-grid model of a whole vehicle for NEC-2, generated from the vehicle file's 2.5-D body.

The body is the engine's hull (core.geometry, design brief sec. 5): a point is inside when it is
inside the top outline at (x, y) and inside the side outline at (x, z), minus the wheelhouses (the
side-view arch of radius tire radius + clearance about each wheel centre, with the strip below the
centre, from the wheelhouse inner wall outward). At every x the hull's cross-section is therefore
the rectangle [y_min(x), y_max(x)] x [z_bot(x), z_top(x)] of the two outlines' envelopes, with the
wheelhouse notches cut from its lower corners; the outlines must be crossed at most twice by a
vertical line (the same assumption as the engine's envelope tables).

Grid (one half of the body at a time, y >= 0 and y <= 0):
- stations along x at every outline vertex, wheelhouse leg and arch apex, subdivided so that no
  grid edge is longer than the spacing ``spacing_m`` (lambda/8 by default);
- at each station the half cross-section's perimeter carries nodes on global lines: floor, roof
  and wheelhouse-arch nodes at fixed |y| lines, side-wall and inner-wall nodes at fixed z lines
  (lines closer than 0.35 spacing to a corner are left out there); the same node at the next
  station is joined by a longitudinal wire, neighbours on the perimeter by ring wires. No wire lies
  in the plane y = 0 (the first |y| line sits half a spacing from it), so a mirror-symmetric body
  is solved as one half with NEC-2's symmetry (GX card, 4x less matrix work);
- the planar faces at constant x (front and rear end faces, the wheelhouse legs below the wheel
  centre) are structured grids on the same lines, so every seam is conforming (shared nodes).
- openings: a wire is kept when at least one of the grid cells beside it is conducting. A cell
  takes the material of the panel it lies on by the engine's rule (roof/floor: top-view zones at
  (x, y) with their z limits; walls and end faces: side-view zones at (x, z); wheelhouse surfaces:
  the body's wheelhouse material; later zones win; default metal). A material is conducting when
  its crossing loss at the frequency is at least ``CONDUCTING_LOSS_DB`` (metal 20 dB; glass
  2 dB and plastic 0.004 dB are openings) -- an engineering rule, see docs/VALIDATION.md.
- wheels: the wheel builder's own model (core.fullwave.nec_models.wheel: rim barrel, flanges,
  hub and spokes, optionally the steel belt) at each wheel, uniform around (the sensor visits the
  whole circumference), right-hand wheels mirrored. The rim does not turn with the sensor in the
  model (one matrix serves the whole turn); the barrel and belt are bodies of revolution, only the
  spokes inside the barrel are fixed.
- cabin contents: lossy blocks (wire cages with distributed series resistance, NEC-2 LD type 2)
  at the seat positions, see :func:`contents_blocks`.

Wire rules: as core.fullwave.nec_models (equal-area radius a = spacing / 2 pi; segment <= spacing;
checks after Trueman & Kubina).

References
----------
- Burke & Poggio, NEC-2 user's guide (LLNL 1981): GX (symmetry), LD (loading), EX type 4, NE cards.
- Ludwig, IEEE Trans. AP-35(9), 1987 (from memory); Rubinstein et al., IEEE Trans. EMC 48(2), 2006
  (equal-area rule).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from itertools import pairwise

import numpy as np

from core.fullwave import nec_models as nm

__all__ = [
    "CONDUCTING_LOSS_DB",
    "ContentsSpec",
    "VehicleGrid",
    "build_vehicle_grid",
    "contents_blocks",
    "cross_section",
]

#: A panel material is modelled as conducting (grid) when its crossing loss is at least this, dB
#: (engineering rule: metal is 20 dB by default, glass about 2 dB, plastic well under 0.1 dB).
CONDUCTING_LOSS_DB = 10.0
#: Grid lines closer than this fraction of the spacing to a corner are left out at that station.
_TOL = 0.35
_ROUND = 6  # node identity: coordinates rounded to 1 um


# --------------------------------------------------------------------------------------------
# Outline envelopes
# --------------------------------------------------------------------------------------------


def _envelope(poly: np.ndarray, x: float) -> tuple[float, float]:
    """(upper, lower) boundary of a closed polygon on the vertical line at x (nan when missed)."""
    p0 = poly
    p1 = np.roll(poly, -1, axis=0)
    lo = np.minimum(p0[:, 0], p1[:, 0])
    hi = np.maximum(p0[:, 0], p1[:, 0])
    ok = (lo <= x) & (x <= hi) & (hi > lo)
    if not ok.any():
        return math.nan, math.nan
    t = (x - p0[ok, 0]) / (p1[ok, 0] - p0[ok, 0])
    v = p0[ok, 1] + t * (p1[ok, 1] - p0[ok, 1])
    return float(v.max()), float(v.min())


#: Outline edges steeper than this (|dz/dx| or |dy/dx|) are made vertical in the grid (both ends moved
#: to their mean x; the shift is at most half the edge's x extent), so that the loft along x needs no
#: tiny station steps; the vertical face is then meshed as a planar step (engineering rule).
STEEP_SLOPE = 2.5


def snap_steep_edges(poly, max_slope: float = STEEP_SLOPE) -> np.ndarray:
    """A copy of a closed outline (n, 2) whose edges steeper than ``max_slope`` are vertical."""
    p = np.array(poly, dtype=float)
    n = len(p)
    for i in range(n):
        j = (i + 1) % n
        dx, dv = p[j, 0] - p[i, 0], p[j, 1] - p[i, 1]
        if dx != 0.0 and abs(dv) > max_slope * abs(dx):
            p[i, 0] = p[j, 0] = 0.5 * (p[i, 0] + p[j, 0])
    return p


@dataclass(frozen=True)
class _Arch:
    """A wheelhouse on one side: centre (x, z), radius, |y| of its inner wall, x range of its notch."""

    xc: float
    zc: float
    r: float
    inner: float
    x0: float
    x1: float

    def top(self, x: float) -> float:
        return self.zc + math.sqrt(max(0.0, self.r * self.r - (x - self.xc) ** 2))

    def angle(self, x: float) -> float:
        """Angle of the arch point above x, from the rear (0) over the top (pi/2) to the front (pi)."""
        return math.acos(min(1.0, max(-1.0, (self.xc - x) / self.r)))


def cross_section(vehicle_or_body, x: float) -> tuple[float, float, float, float]:
    """(y_min, y_max, z_bot, z_top) of the hull at x from the two outlines, m (nan outside)."""
    body = getattr(vehicle_or_body, "body", vehicle_or_body)
    ymax, ymin = _envelope(np.asarray(body.top_outline, float), x)
    ztop, zbot = _envelope(np.asarray(body.side_outline, float), x)
    return ymin, ymax, zbot, ztop


# --------------------------------------------------------------------------------------------
# Materials
# --------------------------------------------------------------------------------------------


class _Materials:
    """Conducting / open per panel kind at a point (the engine's zone rules)."""

    def __init__(self, vehicle, freq_hz: float):
        from core.geometry import points_in_polygon
        from core.materials import material_loss_db

        self._pip = points_in_polygon
        overrides = {name: m.loss_db for name, m in vehicle.materials.items()}

        def conducting(name: str) -> bool:
            return float(material_loss_db(name, freq_hz, overrides)) >= CONDUCTING_LOSS_DB

        self.default = conducting("metal")
        self.wheelhouse = conducting(vehicle.body.wheelhouse_material)
        self.top = []
        self.side = []
        for z in vehicle.zones:
            if z.view == "top":
                zmin = -math.inf if z.z_min_m is None else z.z_min_m
                zmax = math.inf if z.z_max_m is None else z.z_max_m
                self.top.append((np.asarray(z.outline, float), conducting(z.material), zmin, zmax))
            else:
                self.side.append((np.asarray(z.outline, float), conducting(z.material)))

    def conducting(self, p: np.ndarray, kind: str) -> np.ndarray:
        """Conducting flags for points p (N, 3) on panels of ``kind`` ('roof', 'wall', 'wheelhouse')."""
        p = np.atleast_2d(p)
        if kind == "wheelhouse":
            return np.full(len(p), self.wheelhouse)
        out = np.full(len(p), self.default)
        if kind == "roof":
            for poly, cond, zmin, zmax in self.top:
                hit = self._pip(p[:, 0], p[:, 1], poly) & (p[:, 2] >= zmin) & (p[:, 2] <= zmax)
                out = np.where(hit, cond, out)
        else:
            for poly, cond in self.side:
                out = np.where(self._pip(p[:, 0], p[:, 2], poly), cond, out)
        return out


# --------------------------------------------------------------------------------------------
# Grid assembly
# --------------------------------------------------------------------------------------------


class _Graph:
    """Nodes (deduplicated by rounded coordinates) and edges with the cell samples beside them."""

    def __init__(self):
        self.index: dict[tuple, int] = {}
        self.points: list[tuple[float, float, float]] = []
        self.edges: dict[tuple[int, int], list] = {}

    def node(self, p) -> int:
        key = tuple(round(float(c), _ROUND) for c in p)
        i = self.index.get(key)
        if i is None:
            i = len(self.points)
            self.index[key] = i
            self.points.append(tuple(float(c) for c in p))
        return i

    def edge(self, a, b, samples) -> None:
        i, j = self.node(a), self.node(b)
        if i == j:
            return
        key = (min(i, j), max(i, j))
        self.edges.setdefault(key, []).extend(samples)


def _lines(breaks, spacing: float, first_half: bool) -> np.ndarray:
    """Grid lines through the sorted breakpoints, <= spacing apart; with ``first_half`` the first
    interval starts at 0 and its first line sits half a spacing from 0 (no line at 0). Breakpoints
    nearer than 0.35 spacing to the previous one are dropped, so lines are never closer than that."""
    out = []
    b = []
    for v in sorted({float(v) for v in breaks}):
        if not b or v - b[-1] >= _TOL * spacing:
            b.append(v)
    for i in range(len(b) - 1):
        lo, hi = b[i], b[i + 1]
        if hi - lo <= 1e-9:
            continue
        if first_half and i == 0 and lo == 0.0:
            n = max(1, math.ceil((2.0 * hi / spacing + 1.0) / 2.0 - 1e-9))
            out.extend(hi * (2 * k - 1) / (2 * n - 1) for k in range(1, n + 1))
        else:
            n = max(1, math.ceil((hi - lo) / spacing - 1e-9))
            out.extend(lo + (hi - lo) * k / n for k in range(1 if out else 0, n + 1))
    return np.unique(np.round(out, 9))


def _between(lines: np.ndarray, lo: float, hi: float, tol: float) -> list[float]:
    return [float(v) for v in lines if lo + tol < v < hi - tol]


class _HalfBody:
    """One half (side = +1: y >= 0, -1: y <= 0) of the body grid."""

    def __init__(self, vehicle, side: int, spacing: float, arches: list[_Arch], mats: _Materials):
        self.v = vehicle
        self.side = side
        self.h = spacing
        self.tol = _TOL * spacing
        self.arches = arches
        self.mats = mats
        self.top = snap_steep_edges(vehicle.body.top_outline)
        self.side_outline = snap_steep_edges(vehicle.body.side_outline)
        top, sd = self.top, self.side_outline
        self.x_lo = max(top[:, 0].min(), sd[:, 0].min())
        self.x_hi = min(top[:, 0].max(), sd[:, 0].max())
        # vertical edges inside the body: the cross-section jumps there (a step face)
        self.jumps = sorted({float(a[0]) for poly in (top, sd) for a, b in zip(poly, np.roll(poly, -1, axis=0))
                             if a[0] == b[0] and self.x_lo + 1e-6 < a[0] < self.x_hi - 1e-6})
        half_w = [self._w(x) for x in np.linspace(self.x_lo, self.x_hi, 401)]
        w_max = max(half_w)
        ybreaks = [0.0, w_max] + [a.inner for a in arches if a.inner < w_max - self.tol]
        self.ylines = _lines(ybreaks, spacing, first_half=True)
        z_all = [self._z(x) for x in np.linspace(self.x_lo, self.x_hi, 401)]
        z_lo = min(z[0] for z in z_all if not math.isnan(z[0]))
        z_hi = max(z[1] for z in z_all if not math.isnan(z[1]))
        zbreaks = [z_lo, z_hi] + [a.top(a.x0) for a in arches if z_lo < a.top(a.x0) < z_hi]
        self.zlines = _lines(zbreaks, spacing, first_half=False)

    # ----- the cross-section at x
    def _clip(self, x: float, lean: int = 0) -> float:
        return min(max(x + lean * 1e-7, self.x_lo + 1e-7), self.x_hi - 1e-7)

    def _w(self, x: float, lean: int = 0) -> float:
        ymax, ymin = _envelope(self.top, self._clip(x, lean))
        return ymax if self.side > 0 else -ymin

    def _z(self, x: float, lean: int = 0) -> tuple[float, float]:
        ztop, zbot = _envelope(self.side_outline, self._clip(x, lean))
        return zbot, ztop

    def perimeter(self, x: float, arch: _Arch | None, lean: int = 0) -> list[tuple[tuple, tuple[float, float], str]]:
        """Labelled perimeter nodes (label, (|y|, z), kind of the panel up to the next node), floor
        centre first, round the half section to the roof centre. ``lean`` -1 / +1: the section just
        behind / ahead of x (where the outline has a vertical edge)."""
        w = self._w(x, lean)
        zb, zt = self._z(x, lean)
        t = self.tol
        out = [(("F0",), (0.0, zb), "roof")]
        if arch is None:
            out += [(("Fy", y), (y, zb), "roof") for y in _between(self.ylines, 0.0, w, t)]
            out.append((("Cfs",), (w, zb), "wall"))
            out += [(("Sz", z), (w, z), "wall") for z in _between(self.zlines, zb, zt, t)]
        else:
            yi = arch.inner
            za = min(arch.top(x), zt)
            out += [(("Fy", y), (y, zb), "roof") for y in _between(self.ylines, 0.0, yi, t)]
            out.append((("Fy", yi), (yi, zb), "wheelhouse"))
            out += [(("Wz", z), (yi, z), "wheelhouse") for z in _between(self.zlines, zb, za, t)]
            out.append((("Cwa",), (yi, za), "wheelhouse"))
            out += [(("Ay", y), (y, za), "wheelhouse") for y in _between(self.ylines, yi, w, t)]
            out.append((("Cas",), (w, za), "wall"))
            out += [(("Sz", z), (w, z), "wall") for z in _between(self.zlines, za, zt, t)]
        out.append((("Crs",), (w, zt), "roof"))
        out += [(("Ry", y), (y, zt), "roof") for y in reversed(_between(self.ylines, 0.0, w, t))]
        out.append((("R0",), (0.0, zt), "roof"))
        return out

    def _p(self, x: float, yz) -> np.ndarray:
        return np.array([x, self.side * yz[0], yz[1]])

    # ----- stations
    def arch_at(self, x: float) -> _Arch | None:
        for a in self.arches:
            if a.x0 - 1e-9 <= x <= a.x1 + 1e-9:
                return a
        return None

    def stations(self) -> list[tuple[float, float, _Arch | None]]:
        """Station positions along x and the arch of each interval: [(x_k, x_k+1, arch or None)].

        Mandatory stations: the body's ends, every outline vertex, each arch's leg positions and
        points spaced <= one grid spacing along the arch circle (so the arch top needs no long
        wires where it is steep); stations nearer than 0.35 spacing are merged (the more important
        kept); the remaining gaps are subdivided until no longitudinal wire is longer than the spacing.
        """
        top, sd = self.top, self.side_outline
        prio: dict[float, int] = {self.x_lo: 3, self.x_hi: 3}
        for x in self.jumps:
            prio[x] = 3
        for x in np.concatenate([top[:, 0], sd[:, 0]]):
            if self.x_lo < x < self.x_hi:
                prio.setdefault(float(x), 1)
        for a in self.arches:
            prio[a.x0] = prio[a.x1] = 3
            al0, al1 = a.angle(a.x0), a.angle(a.x1)
            n = max(1, math.ceil(a.r * (al1 - al0) / self.h - 1e-9))
            for k in range(1, n):
                x = a.xc - a.r * math.cos(al0 + (al1 - al0) * k / n)
                prio[float(x)] = max(prio.get(float(x), 0), 2)
        xs = sorted(prio)
        kept = [xs[0]]
        for x in xs[1:]:
            if x - kept[-1] < _TOL * self.h:
                if prio[x] > prio[kept[-1]]:
                    if prio[kept[-1]] == 3:
                        raise ValueError(f"body features at x = {kept[-1]:.3f} and {x:.3f} m are closer than the grid")
                    kept[-1] = x
            else:
                kept.append(x)
        out = []
        for lo, hi in pairwise(kept):
            mid = 0.5 * (lo + hi)
            arch = next((a for a in self.arches if a.x0 < mid < a.x1), None)
            for x0, x1 in self._subdivide(lo, hi, arch):
                out.append((x0, x1, arch))
        return out

    def _lean(self, x: float, at_start: bool) -> int:
        if x in self.jumps:
            return 1 if at_start else -1
        return 0

    def _subdivide(self, lo: float, hi: float, arch) -> list[tuple[float, float]]:
        n = max(1, math.ceil((hi - lo) / self.h - 1e-9))
        while True:
            xs = np.linspace(lo, hi, n + 1)
            leans = [self._lean(lo, True)] + [0] * (n - 1) + [self._lean(hi, False)]
            pers = [{lab: yz for lab, yz, _ in self.perimeter(x, arch, ln)} for x, ln in zip(xs, leans)]
            worst = 0.0
            for k in range(n):
                for lab, yz in pers[k].items():
                    if lab in pers[k + 1] and lab[0] not in ("F0", "R0"):
                        a, b = self._p(xs[k], yz), self._p(xs[k + 1], pers[k + 1][lab])
                        worst = max(worst, float(np.linalg.norm(b - a)))
            if worst <= self.h * 1.0001 or n >= 200:
                return list(pairwise(xs))
            n = max(n + 1, math.ceil(n * worst / self.h))

    # ----- wires
    def build(self, g: _Graph) -> None:
        runs: list[tuple[list[float], _Arch | None]] = []
        for x0, x1, arch in self.stations():
            if runs and runs[-1][1] is arch and abs(runs[-1][0][-1] - x0) < 1e-12 and x0 not in self.jumps:
                runs[-1][0].append(x1)
            else:
                runs.append(([x0, x1], arch))
        for xs, arch in runs:
            leans = [self._lean(xs[0], True)] + [0] * (len(xs) - 2) + [self._lean(xs[-1], False)]
            pers = [self.perimeter(x, arch, ln) for x, ln in zip(xs, leans)]
            for k, (x, per) in enumerate(zip(xs, pers)):
                # ring wires, with the cells toward the neighbouring stations as samples
                for i in range(len(per) - 1):
                    (_, a, kind), (_, b, _) = per[i], per[i + 1]
                    pa, pb = self._p(x, a), self._p(x, b)
                    mid = 0.5 * (pa + pb)
                    samples = [(mid + 0.5 * np.array([xs[kk] - x, 0.0, 0.0]), kind)
                               for kk in (k - 1, k + 1) if 0 <= kk < len(xs)]
                    g.edge(pa, pb, samples)
                if k + 1 < len(xs):
                    nxt = {lab: yz for lab, yz, _ in pers[k + 1]}
                    for i, (lab, yz, kind) in enumerate(per):
                        if lab[0] in ("F0", "R0") or lab not in nxt:
                            continue
                        pa, pb = self._p(x, yz), self._p(xs[k + 1], nxt[lab])
                        mid = 0.5 * (pa + pb)
                        samples = []
                        for j, kd in ((i - 1, per[i - 1][2] if i > 0 else kind), (i + 1, kind)):
                            if 0 <= j < len(per):
                                samples.append((mid + 0.5 * (self._p(x, per[j][1]) - pa), kd))
                        g.edge(pa, pb, samples)
        self._caps(g)

    def _cap_grid(self, g: _Graph, x: float, ys: list[float], zs_of, kind: str, inside) -> None:
        """Planar grid at constant x: columns at |y| in ``ys``, nodes at the z values zs_of(y)."""
        cols = [(y, zs_of(y)) for y in ys]
        for y, zs in cols:
            if y <= 0.0:
                continue
            for z0, z1 in pairwise(zs):
                pa, pb = self._p(x, (y, z0)), self._p(x, (y, z1))
                mid = 0.5 * (pa + pb)
                g.edge(pa, pb, [(mid + np.array([0.0, self.side * d, 0.0]), kind)
                                for d in (-0.5 * self.h, 0.5 * self.h) if inside(y + d, 0.5 * (z0 + z1))])
        for (y0, zs0), (y1, zs1) in pairwise(cols):
            for z in sorted(set(zs0) & set(zs1)):
                pa, pb = self._p(x, (y0, z)), self._p(x, (y1, z))
                mid = 0.5 * (pa + pb)
                g.edge(pa, pb, [(mid + np.array([0.0, 0.0, d]), kind)
                                for d in (-0.5 * self.h, 0.5 * self.h) if inside(0.5 * (y0 + y1), z + d)])

    def _caps(self, g: _Graph) -> None:
        t = self.tol
        # front and rear end faces (planar, side-view zones)
        for x in (self.x_lo, self.x_hi):
            if self.arch_at(x) is not None:
                raise ValueError("a wheelhouse reaches the end of the body: the full-wave grid needs the "
                                 "wheel arches inside the body's length")
            w = self._w(x)
            zb, zt = self._z(x)
            if w < t or zt - zb < t:
                continue
            ys = [0.0] + _between(self.ylines, 0.0, w, t) + [w]
            zs = [zb] + _between(self.zlines, zb, zt, t) + [zt]
            self._cap_grid(g, x, ys, lambda y, zs=zs: zs, "wall",
                           lambda y, z, w=w, zb=zb, zt=zt: 0.0 <= y <= w and zb <= z <= zt)
        # steps where the side outline has a vertical edge inside the body (e.g. a cab's back wall)
        for x in self.jumps:
            if self.arch_at(x) is not None:
                raise ValueError(f"a vertical outline edge at x = {x:.3f} m lies over a wheel arch: not supported "
                                 "by the full-wave grid")
            wb, wa = self._w(x, -1), self._w(x, 1)
            if abs(wb - wa) > 1e-6:
                raise ValueError(f"the top outline has a vertical edge inside the body at x = {x:.3f} m: not "
                                 "supported by the full-wave grid (only the side outline may step)")
            (zb0, zt0), (zb1, zt1) = self._z(x, -1), self._z(x, 1)
            for lo, hi in ((min(zt0, zt1), max(zt0, zt1)), (min(zb0, zb1), max(zb0, zb1))):
                if hi - lo < 1e-6:
                    continue
                zs = [lo] + _between(self.zlines, lo, hi, t) + [hi]
                ys = [0.0] + _between(self.ylines, 0.0, wb, t) + [wb]
                self._cap_grid(g, x, ys, lambda y, zs=zs: zs, "wall",
                               lambda y, z, w=wb, lo=lo, hi=hi: 0.0 <= y <= w and lo <= z <= hi)
        # wheelhouse legs: the faces at x0 / x1 below the arch's start height
        for a in self.arches:
            for x in (a.x0, a.x1):
                w = self._w(x)
                zb, _ = self._z(x)
                za = a.top(x)
                if za - zb < t or w - a.inner < t:
                    continue
                ys = [a.inner] + _between(self.ylines, a.inner, w, t) + [w]
                zs = [zb] + _between(self.zlines, zb, za, t) + [za]
                self._cap_grid(g, x, ys, lambda y, zs=zs: zs, "wheelhouse",
                               lambda y, z, a=a, w=w, zb=zb, za=za: a.inner <= y <= w and zb <= z <= za)


def _arches(vehicle, wheels, side: int, spacing: float) -> list[_Arch]:
    """Wheelhouses on one side (wheels of one axle and side share one; the innermost wall counts)."""
    clearance = vehicle.body.wheelhouse_clearance_m
    groups: dict[tuple, list] = {}
    for w in wheels:
        if w.outboard_sign != side:
            continue
        key = (round(w.centre[0], 6), round(w.centre[2], 6), round(w.tire_radius_m + clearance, 6))
        groups.setdefault(key, []).append(abs(w.centre[1]) - 0.5 * w.tire_width_m - clearance)
    out = []
    tol = _TOL * spacing
    for (xc, zc, r), inners in groups.items():
        inner = min(inners)

        def depth(x, xc=xc, zc=zc, r=r):
            zb = cross_section(vehicle, x)[2]
            return zc + math.sqrt(max(0.0, r * r - (x - xc) ** 2)) - zb

        # where the circle is nearly vertical, the leg face stands in for it: the notch starts at
        # angle al0 above the horizontal, the smallest for which the first of the equal steps
        # (<= one spacing) along the arch advances at least 0.4 spacing in x
        al0 = 0.0
        while al0 < 1.2:
            n = max(1, math.ceil(r * (math.pi - 2.0 * al0) / spacing - 1e-9))
            d_al = (math.pi - 2.0 * al0) / n
            if r * (math.cos(al0) - math.cos(al0 + d_al)) >= 0.4 * spacing:
                break
            al0 += 0.005
        x0, x1 = xc - r * math.cos(al0), xc + r * math.cos(al0)
        if depth(xc) < tol:
            continue  # the arch does not rise above the floor by a grid cell: no notch
        if depth(x0) < tol:  # the arch starts above the floor: its notch begins where it is one tol deep
            lo, hi = x0, xc
            for _ in range(60):
                m = 0.5 * (lo + hi)
                lo, hi = (m, hi) if depth(m) < tol else (lo, m)
            x0 = hi
        if depth(x1) < tol:
            lo, hi = xc, x1
            for _ in range(60):
                m = 0.5 * (lo + hi)
                lo, hi = (lo, m) if depth(m) < tol else (m, hi)
            x1 = lo
        out.append(_Arch(xc, zc, r, inner, x0, x1))
    return out


# --------------------------------------------------------------------------------------------
# Cabin contents
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class ContentsSpec:
    """Cabin contents as lossy blocks (engineering defaults; docs/VALIDATION.md, full-wave section).

    Each occupied seat (seat and occupant together) is a box of ``size_m`` (x, y, z) whose 12 edges
    and 6 face diagonals are wires of radius ``wire_radius_m`` with a distributed series resistance
    ``ohm_per_m`` (NEC-2 LD type 2), standing ``seat_height_m`` above the floor (its top at most
    0.1 m under the roof). Seats: a front and a rear row at the fractions
    ``rows`` of the side-window length behind its front end, at |y| = ``seat_y_m`` (clipped into
    the body); ``occupants`` seats are filled, front row first (driver's side, y > 0, first).
    The absorption this represents is measured by :func:`core.fullwave.vehicle_reference.block_absorption`:
    an orientation-averaged absorption cross-section of 0.27 m^2 at 315 MHz and 0.24 m^2 at
    433.92 MHz per block with 200 ohm/m (0.12 / 0.10 m^2 with 50 ohm/m, 0.35 / 0.37 m^2 with 1 kohm/m),
    of the order of the averaged absorption cross-section of a seated adult reported from
    reverberation-chamber measurements (a few tenths of a m^2; from memory, measured mostly
    above 1 GHz): an engineering default, docs/VALIDATION.md.
    """

    occupants: int = 2
    size_m: tuple[float, float, float] = (0.45, 0.40, 0.75)
    ohm_per_m: float = 200.0
    wire_radius_m: float = 0.005
    seat_height_m: float = 0.15
    seat_y_m: float = 0.37
    rows: tuple[float, float] = (0.35, 0.72)


def _box_corners(centre, size) -> np.ndarray:
    """The 8 corners of an axis-aligned box (bottom face first, counter-clockwise), m."""
    cx, cy, cz = centre
    sx, sy, sz = size
    return np.array([[cx + dx * 0.5 * sx, cy + dy * 0.5 * sy, cz + dz * 0.5 * sz] for dz in (-1, 1)
                     for dx, dy in ((-1, -1), (1, -1), (1, 1), (-1, 1))])


def lossy_cage(corners: np.ndarray, spec: ContentsSpec, spacing: float) -> list[nm.Wire]:
    """The wires of one lossy block: 12 edges and 6 face diagonals of the box ``corners``, each with
    the distributed series resistance ``spec.ohm_per_m`` (NEC-2 LD type 2)."""
    m = nm.WireModel()
    edges = [(0, 1), (1, 2), (2, 3), (3, 0), (4, 5), (5, 6), (6, 7), (7, 4), (0, 4), (1, 5), (2, 6), (3, 7),
             (0, 5), (1, 6), (2, 7), (3, 4), (0, 2), (4, 6)]
    for i, j in edges:
        nm._add(m, corners[i], corners[j], min(spacing, 0.1), spec.wire_radius_m)
    return [nm.Wire(w.start, w.end, w.segments, w.radius_m, spec.ohm_per_m) for w in m.wires]


def _glass_x_range(vehicle) -> tuple[float, float] | None:
    xs = [p[0] for z in vehicle.zones if z.view == "side" and z.material == "glass" for p in z.outline]
    return (min(xs), max(xs)) if xs else None


def contents_blocks(vehicle, spec: ContentsSpec, spacing: float) -> list[nm.Wire]:
    """Lossy wire cages at the occupied seats (see :class:`ContentsSpec`); empty when occupants = 0."""
    if spec.occupants <= 0:
        return []
    rng = _glass_x_range(vehicle)
    top = np.asarray(vehicle.body.top_outline, float)
    if rng is None:
        rng = (float(top[:, 0].min()), float(top[:, 0].max()))
    x_back, x_front = rng
    seats = []
    for frac in spec.rows:
        for sy in (1.0, -1.0):
            seats.append((x_front - frac * (x_front - x_back), sy * spec.seat_y_m))
    wires: list[nm.Wire] = []
    sx, sy_, sz = spec.size_m
    for xs, ys in seats[: spec.occupants]:
        ymin, ymax, zb, zt = cross_section(vehicle, xs)
        if math.isnan(zb):
            continue
        half = ymax if ys > 0 else -ymin
        yc = float(np.clip(abs(ys), 0.5 * sy_ + 0.05, half - 0.5 * sy_ - 0.1))
        z0 = zb + spec.seat_height_m
        z1 = min(z0 + sz, zt - 0.1)
        if z1 - z0 < 0.2:
            continue
        corners = _box_corners((xs, yc, 0.5 * (z0 + z1)), (sx, sy_, z1 - z0))
        if ys < 0:  # the right-hand seat is the mirror image of the left-hand one
            corners[:, 1] *= -1.0
        wires += lossy_cage(corners, spec, spacing)
    return wires


# --------------------------------------------------------------------------------------------
# The whole model
# --------------------------------------------------------------------------------------------


@dataclass
class VehicleGrid:
    """The wire model of one body at one frequency, and what it was built from."""

    model: nm.WireModel  # the y >= 0 half when ``mirror_y`` (NEC-2 completes it by symmetry)
    mirror_y: bool
    spacing_m: float
    wheel_spacing_m: float
    body_segments: int  # whole body (both halves)
    wheel_segments: int  # all wheels
    contents_segments: int
    notes: list[str]
    body_wires: int = 0  # the first body_wires wires of ``model`` are the body's

    @property
    def segments(self) -> int:
        """Segments of the whole structure (both halves)."""
        return self.body_segments + self.wheel_segments + self.contents_segments


def _key(w: nm.Wire, mirror: bool = False) -> tuple:
    s = np.round(np.asarray(w.start) * ([1, -1, 1] if mirror else 1), 5)
    e = np.round(np.asarray(w.end) * ([1, -1, 1] if mirror else 1), 5)
    a, b = sorted([tuple(s), tuple(e)])
    return a, b, round(w.radius_m, 7), w.load_ohm_per_m


def build_vehicle_grid(vehicle, freq_hz: float, *, cells_per_wavelength: float = 8.0,
                       wheel_cells_per_wavelength: float = 12.0, belt_cells_per_wavelength: float = 20.0,
                       belt: bool = True,
                       contents: ContentsSpec | None = None, allow_symmetry: bool = True) -> VehicleGrid:
    """Wire-grid model of ``vehicle``'s body, wheels and (optionally) cabin contents at ``freq_hz``.

    Parameters
    ----------
    vehicle : core.vehicle.Vehicle.
    freq_hz : frequency, Hz (sets the grid spacing).
    cells_per_wavelength : body grid spacing = lambda / this (8: lambda/8, the coarsest allowed).
    wheel_cells_per_wavelength : spacing of the rim models = lambda / this, uniform around the wheel
        (the sensor visits the whole circumference). 12 by default: in receive mode (the field at
        the sensor from a distant source) the rim converges faster than in transmit mode, where
        the tables refine to 15 mm next to the sensor; measured against the tables' refined wheel
        (direct link) over a turn at 1.5-2.6 m: 0.6-0.8 dB rms, 1.9-4.9 dB at worst (nulls),
        docs/VALIDATION.md.
    belt_cells_per_wavelength : spacing of the steel belt = lambda / this (20: a belt at lambda/10
        errs by up to 15 dB against the refined wheel at 433.92 MHz).
    belt : model the tire's steel belt (radius = tire radius - core.wheel_patterns.BELT_DEPTH_M,
        width = BELT_WIDTH_FRACTION x section width, as the wheel tables).
    contents : cabin contents (None: empty cabin).
    allow_symmetry : solve a mirror-symmetric vehicle as one half (NEC-2 GX card).
    """
    from core.wheel import WheelGeometry
    from core.wheel_patterns import BELT_DEPTH_M, BELT_WIDTH_FRACTION

    if cells_per_wavelength < 8.0:
        raise ValueError("the body grid must be at or below lambda/8 (cells_per_wavelength >= 8)")
    lam = nm.C0_M_PER_S / freq_hz
    h = lam / cells_per_wavelength
    hw = lam / wheel_cells_per_wavelength
    mats = _Materials(vehicle, freq_hz)
    wheels = [WheelGeometry.from_wheel(w) for w in vehicle.wheels]
    radius = nm.equal_area_radius_m(h)
    halves = {}
    for side in (1, -1):
        g = _Graph()
        _HalfBody(vehicle, side, h, _arches(vehicle, wheels, side, h), mats).build(g)
        m = nm.WireModel()
        pts = np.asarray(g.points)
        for (i, j), samples in g.edges.items():
            keep = any(bool(mats.conducting(p, kind)[0]) for p, kind in samples) if samples else mats.default
            if keep:
                nm._add(m, pts[i], pts[j], h, radius)
        halves[side] = m
    body_segments = halves[1].segment_count + halves[-1].segment_count
    # wheels, in vehicle axes
    wheel_models = {}
    for w in wheels:
        spec = nm.WheelSpec(
            2.0 * w.rim_radius_m, w.rim_width_m, sensor_radius_m=w.sensor_radius_m, sensor_offset_m=w.sensor_offset_m,
            belt_radius_m=(w.tire_radius_m - BELT_DEPTH_M) if belt else None,
            belt_width_m=BELT_WIDTH_FRACTION * w.tire_width_m, refine_m=None, axial_spacing_m=min(hw, 0.035),
        )
        local = nm.wheel(spec, hw, lam / belt_cells_per_wavelength)
        m = local.transformed(None, mirror_y=w.outboard_sign < 0)
        c = np.asarray(w.centre)
        wheel_models[w.id] = (w, nm.WireModel([nm.Wire(tuple(np.add(x.start, c)), tuple(np.add(x.end, c)),
                                                       x.segments, x.radius_m) for x in m.wires], m.notes))
    wheel_segments = sum(m.segment_count for _, m in wheel_models.values())
    cont = contents_blocks(vehicle, contents, h) if contents is not None else []
    contents_segments = sum(w.segments for w in cont)
    # symmetry: the right half (body, wheels, contents) is the mirror image of the left half
    left = halves[1].wires + [x for w, m in wheel_models.values() if w.outboard_sign > 0 for x in m.wires]
    right = halves[-1].wires + [x for w, m in wheel_models.values() if w.outboard_sign < 0 for x in m.wires]
    left += [x for x in cont if 0.5 * (x.start[1] + x.end[1]) > 0]
    right += [x for x in cont if 0.5 * (x.start[1] + x.end[1]) < 0]
    centred = [x for x in cont if 0.5 * (x.start[1] + x.end[1]) == 0]
    symmetric = (allow_symmetry and not centred and len(left) == len(right)
                 and {_key(x) for x in left} == {_key(x, mirror=True) for x in right})
    if symmetric:
        wires, body_wires = left, len(halves[1].wires)
    else:
        nl, nr = len(halves[1].wires), len(halves[-1].wires)
        wires = left[:nl] + right[:nr] + left[nl:] + right[nr:] + centred
        body_wires = nl + nr
    notes = [(f"body grid lambda/{cells_per_wavelength:g} = {h * 1000:.1f} mm, wire radius {radius * 1000:.1f} mm, "
              f"{body_segments} segments; openings where the panel's crossing loss is under "
              f"{CONDUCTING_LOSS_DB:g} dB"),
             (f"wheels: rim barrel, flanges, hub and spokes at lambda/{wheel_cells_per_wavelength:g} = "
              f"{hw * 1000:.1f} mm" + (f", steel belt at lambda/{belt_cells_per_wavelength:g}" if belt else "")
              + f", {wheel_segments} segments"),
             f"contents: {contents.occupants if contents else 0} lossy blocks, {contents_segments} segments",
             "solved as one half with NEC-2 mirror symmetry (GX)" if symmetric else "solved whole (not symmetric)"]
    model = nm.fit_radii(nm.WireModel(wires, notes))
    return VehicleGrid(model, symmetric, h, hw, body_segments, wheel_segments,
                       contents_segments, notes, body_wires)

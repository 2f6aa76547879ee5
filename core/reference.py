"""Scalar reference of the link model: one path at a time, plain Python, math and shapely.

This is the oracle the vectorised engine (core.geometry, core.wheel, core.links, core.scoring)
is checked against. It is written from the model as the engine's docstrings state it, not from
the engine's code, and it shares no geometry with it: it reads the vehicle file model
(core.vehicle), the material losses (core.materials) and the textbook formulas of
core.propagation (P.526 J(v), Fresnel coefficients). It is slow (about a millisecond per link)
and meant to stay small and obvious.

Model, as the reference reads it:

- Hull: a point is inside when it is inside the top outline at (x, y), inside the side outline
  at (x, z), and in no wheelhouse. A wheelhouse is, in x-z, the upper half disc of radius
  (tire radius + clearance) about the wheel centre plus the strip of the same half width below
  the centre, and in y everything outboard of the inner wall |y| = |y_wheel| - tire width / 2 -
  clearance (on the wheel's side).
- Crossings of a segment: every place where a boundary (top-outline edge in the (x, y)
  projection, side-outline edge in the (x, z) projection, wheelhouse arch or inner wall) is met
  and the inside/outside state differs on the two sides. The state is tested at the midpoints
  between consecutive boundary hits, so no parity bookkeeping is needed.
- Loss of a crossing: a top-outline wall takes the side-view zone at (x, z), a side-outline
  edge the top-view zone at (x, y) within its z limits (later zones win), a wheelhouse surface
  the wheelhouse material; in no zone, metal.
- A passage (entering, then leaving) costs min(sum of its two panel losses, J(v_max)), v_max
  the largest P.526 v over DIFFRACTION_SAMPLES points at the centres of equal sub-intervals of
  the passage, the clearance h at a point being the smallest of (roof - z, z - floor,
  left side - y, y - right side) of the outlines' envelopes at that x (0 outside either outline).
- Wheel (knife-edge model): rim barrel entry, knife edge over the receiver-side flange (or the
  axial distance to the nearer flange when the path never reaches a flange plane), tread or
  sidewall exit; see ``wheel_loss_db``.
- Link: direct ray plus, optionally, the road-reflected ray (image method, Fresnel TE/TM
  coefficients, the TM coefficient referred to the field component normal to the road); the
  reflected ray's legs shadowed like the direct ray. Null floor: the received power is at least
  the null floor squared times the sum of the rays' powers with a matched, peak coupling
  (10^(-L/10) / d^2 per ray).

References
----------
ITU-R P.525 (free space), ITU-R P.526-15 section 4.1 (knife edge, eq. 26 and 31),
Balanis, Antenna Theory (short dipole, polarization), Rappaport, Wireless Communications
sec. 4.5-4.6 (Fresnel reflection, two-ray model), ITU-R P.2040 (road parameters).
"""

from __future__ import annotations

import cmath
import math

from shapely.geometry import LineString, Point, Polygon

from core.materials import material_loss_db, road_permittivity
from core.propagation import C0_M_PER_S, fresnel_reflection, knife_edge_loss_db

#: points per passage searched for the dominant edge (the engine's documented value)
DIFFRACTION_SAMPLES = 8
#: hits nearer than this (m) to an outline vertex or to another hit make a case degenerate
DEGENERATE_TOL_M = 1e-9
#: drop-centre depth of the rim below the bead seat, m (the engine's documented default)
DROP_CENTRE_DEPTH_M = 0.025


class DegenerateCase(Exception):
    """The path meets a vertex or two boundaries at one point: the model is ambiguous there."""


def _sub(a, b):
    return (a[0] - b[0], a[1] - b[1], a[2] - b[2])


def _dot(a, b):
    return a[0] * b[0] + a[1] * b[1] + a[2] * b[2]


def _scale(s, a):
    return (s * a[0], s * a[1], s * a[2])


def _add(a, b):
    return (a[0] + b[0], a[1] + b[1], a[2] + b[2])


def _cross(a, b):
    return (a[1] * b[2] - a[2] * b[1], a[2] * b[0] - a[0] * b[2], a[0] * b[1] - a[1] * b[0])


def _norm(a):
    return math.sqrt(_dot(a, a))


def _perp(a, u):
    """Part of a perpendicular to the unit vector u."""
    return _sub(a, _scale(_dot(a, u), u))


def _j_db(v: float) -> float:
    return float(knife_edge_loss_db(v))


class ReferenceModel:
    """The link model of one vehicle, evaluated one link at a time (levels in dBm)."""

    def __init__(self, vehicle, ground_reflection: bool | None = None, cavity: bool = True,
                 cavity_spacing_m: float | None = None, cavity_angles: int | None = None):
        r = vehicle.radio
        self.vehicle = vehicle
        self.freq_hz = r.frequency_hz
        self.lam = C0_M_PER_S / self.freq_hz
        self.k = 2.0 * math.pi / self.lam
        self.ground = r.ground_reflection if ground_reflection is None else ground_reflection
        overrides = {name: m.loss_db for name, m in vehicle.materials.items()}

        def loss(name):
            return float(material_loss_db(name, self.freq_hz, overrides))

        self.metal_db = loss("metal")
        self.wheelhouse_db = loss(vehicle.body.wheelhouse_material)
        self.sidewall_db = loss("tire_sidewall")
        self.tread_db = loss("tire_tread")
        self.top = Polygon(vehicle.body.top_outline)
        self.side = Polygon(vehicle.body.side_outline)
        self.top_vertices = list(vehicle.body.top_outline)
        self.side_vertices = list(vehicle.body.side_outline)
        self.side_zones = []  # (polygon in x-z, loss)
        self.top_zones = []  # (polygon in x-y, loss, z_min, z_max)
        for z in vehicle.zones:
            if z.view == "side":
                self.side_zones.append((Polygon(z.outline), loss(z.material)))
            else:
                zmin = -math.inf if z.z_min_m is None else z.z_min_m
                zmax = math.inf if z.z_max_m is None else z.z_max_m
                self.top_zones.append((Polygon(z.outline), loss(z.material), zmin, zmax))
        clearance = vehicle.body.wheelhouse_clearance_m
        self.wheels = []
        self.wheelhouses = []
        for w in vehicle.wheels:
            t = w.tire_size
            wheel = {
                "centre": (w.x_m, w.y_m, t.outer_radius_m),
                "sign": w.outboard_sign,
                "rim_r": t.rim_radius_m,
                "barrel_r": t.rim_radius_m - DROP_CENTRE_DEPTH_M,
                "rim_half_w": 0.5 * w.rim_width_m,
                "tire_r": t.outer_radius_m,
                "tire_half_w": 0.5 * t.section_width_m,
                "sensor_r": w.sensor_radius,
                "sensor_off": w.sensor_offset,
            }
            self.wheels.append(wheel)
            self.wheelhouses.append(
                {
                    "xc": w.x_m,
                    "zc": t.outer_radius_m,
                    "r": t.outer_radius_m + clearance,
                    "sign": w.outboard_sign,
                    "inner": abs(w.y_m) - 0.5 * t.section_width_m - clearance,
                }
            )
        self.angles_per_turn = r.angles_per_turn
        self.eirp_dbm = r.sensor_eirp_dbm
        self.rx_gain_dbi = r.receiver.gain_dbi
        self.rx_pattern = r.receiver.pattern
        self.sensor_pattern = r.sensor.pattern
        self.sensor_axis_kind = r.sensor.axis
        self.floor_amp = 10.0 ** (r.null_floor_db / 20.0)
        self.road_eps = complex(road_permittivity(r.road_surface, self.freq_hz))
        self.fade_q = r.fade_probability
        self.cavity = self._cavity_patches(cavity_spacing_m, cavity_angles) if cavity else None
        self._input_cache: dict[tuple[int, int], float] = {}

    # ----- the cavity ----------------------------------------------------------------------
    def _cavity_patches(self, spacing_m, n_angles):
        """Opening patches (centre, outward normal, area, tau) and the absorption cross-section.

        The patches are the engine's discretisation of the hull surface (core.cavity.surface_samples:
        centres, normals, areas - the one piece shared with the engine, a description of where to
        sample); their materials, the losses of the paths to them and the power balance are
        computed here from the model's statement (core.cavity module notes)."""
        from core import cavity as cav
        from core.geometry import build_hull  # only to obtain the same sample points

        v = self.vehicle
        wh = [(h["xc"], h["zc"], h["r"], h["sign"], h["inner"]) for h in self.wheelhouses]
        hull = build_hull(v.body.top_outline, v.body.side_outline, wh, [], [], 0.0, 0.0)
        pts, nrm, area, _ = cav.surface_samples(hull, spacing_m or cav.SAMPLE_SPACING_M)
        patches, leak, metal_area = [], 0.0, 0.0
        for p, n, a in zip(pts, nrm, area):
            p, n = tuple(float(c) for c in p), tuple(float(c) for c in n)
            # on a wall of the top outline (also an end face drawn in both views), or a roof/floor face
            kind = "wall" if self.top.exterior.distance(Point(p[0], p[1])) < 1e-7 else "roof"
            loss = self.panel_loss_db(kind, p)
            if loss >= cav.OPENING_LOSS_DB:
                metal_area += float(a)
                continue
            tau = 10.0 ** (-loss / 10.0)
            patches.append((p, n, float(a), tau))
            leak += tau * float(a) / 4.0
        delta = 1.0 / math.sqrt(math.pi * self.freq_hz * 4e-7 * math.pi * cav.WALL_CONDUCTIVITY_S_PER_M)
        sigma = (leak + v.body.cabin_absorption_m2 + 4.0 * math.pi / 3.0 * delta * metal_area / self.lam
                 + self.lam**2 / (8.0 * math.pi))
        return {"patches": patches, "sigma_m2": sigma, "angles": n_angles or cav.INPUT_ANGLES,
                "incidence": cav.INCIDENCE_FACTOR, "opening_db": cav.OPENING_LOSS_DB}

    def _sensor_at(self, wheel_index: int, th: float):
        w = self.wheels[wheel_index]
        cx, cy, cz = w["centre"]
        pos = (cx + w["sensor_r"] * math.sin(th), cy + w["sign"] * w["sensor_off"], cz + w["sensor_r"] * math.cos(th))
        axis = {"radial": (math.sin(th), 0.0, math.cos(th)), "tangential": (math.cos(th), 0.0, -math.sin(th)),
                "axial": (0.0, 1.0, 0.0)}[self.sensor_axis_kind]
        return pos, axis

    def cavity_input(self, wheel_index: int, k: int) -> float:
        """P_t / EIRP of a wheel at the k-th of the cavity's input angles: the sensor's power density at
        every opening patch (direct and, with the road, its image times the unpolarized mean |Gamma|^2)
        times tau * incidence factor * area."""
        key = (wheel_index, k)
        if key in self._input_cache:
            return self._input_cache[key]
        c = self.cavity
        th = 2.0 * math.pi * k / c["angles"]
        src, s_axis = self._sensor_at(wheel_index, th)
        total = 0.0
        for p, n, a, tau in c["patches"]:
            out = _add(p, _scale(1e-3, n))
            w = tau * a * c["incidence"] / (4.0 * math.pi)
            d = _sub(out, src)
            dist = max(_norm(d), 1e-3)
            e = self._sensor_field(s_axis, _scale(1.0 / dist, d), (0.0, 0.0, 1.0))
            loss = self.body_loss_db(src, out) + self.wheel_loss_db(wheel_index, src, out)
            total += w * _dot(e, e) * 10.0 ** (-loss / 10.0) / dist**2
            if self.ground:
                img = (src[0], src[1], -src[2])
                dr = _sub(out, img)
                dist_r = max(_norm(dr), 1e-3)
                up = _scale(1.0 / dist_r, dr)
                f = src[2] / (src[2] + out[2])
                road = (img[0] + f * dr[0], img[1] + f * dr[1], 0.0)
                e_i = self._sensor_field(s_axis, (up[0], up[1], -up[2]), (0.0, 0.0, 1.0))
                g_te, g_tm = (complex(g) for g in fresnel_reflection(self.road_eps, math.asin(min(max(up[2], 0.0), 1.0))))
                refl = 0.5 * (abs(g_te) ** 2 + abs(g_tm) ** 2)
                loss_r = self.body_loss_db(src, road) + self.body_loss_db(out, road) + self.wheel_loss_db(wheel_index, src, road)
                total += w * _dot(e_i, e_i) * refl * 10.0 ** (-loss_r / 10.0) / dist_r**2
        self._input_cache[key] = total
        return total

    def _wall(self, poly: Polygon, u: float, v: float):
        """(distance, unit normal in the view's plane) of the point (u, v) to the polygon's outline."""
        q = Point(u, v)
        near = poly.exterior.interpolate(poly.exterior.project(q))
        du, dv = u - near.x, v - near.y
        dist = math.hypot(du, dv)
        n = (du / dist, dv / dist) if dist > 0 else (0.0, 0.0)
        # the panel is looked up a micrometre off the foot toward the point (a corner takes the panel faced)
        return dist, n, (near.x + 1e-6 * n[0], near.y + 1e-6 * n[1])

    def diffuse_factor(self, spot, r_axis) -> float:
        """Diffuse power per unit cavity input at a receiver (LinkField units, core.cavity.spot_factor)."""
        if self.cavity is None or not self.inside(spot):
            return 0.0
        k = 2.0 * math.pi / self.lam

        def factors(z):
            x = max(2.0 * k * z, 1e-6)
            ft = 1.0 - 1.5 * (math.sin(x) / x + math.cos(x) / x**2 - math.sin(x) / x**3)
            fn = 1.0 - 3.0 * (math.cos(x) / x**2 - math.sin(x) / x**3)
            return ft, fn

        f = 1.0
        d, n2, foot = self._wall(self.top, spot[0], spot[1])
        if self.panel_loss_db("wall", (foot[0], foot[1], spot[2])) >= self.cavity["opening_db"]:
            ft, fn = factors(d)
            c2 = (r_axis[0] * n2[0] + r_axis[1] * n2[1]) ** 2 if self.rx_pattern == "dipole" else None
            f *= c2 * fn + (1.0 - c2) * ft if c2 is not None else (fn + 2.0 * ft) / 3.0
        d, n2, foot = self._wall(self.side, spot[0], spot[2])
        if self.panel_loss_db("roof", (foot[0], spot[1], foot[1])) >= self.cavity["opening_db"]:
            ft, fn = factors(d)
            c2 = (r_axis[0] * n2[0] + r_axis[2] * n2[1]) ** 2 if self.rx_pattern == "dipole" else None
            f *= c2 * fn + (1.0 - c2) * ft if c2 is not None else (fn + 2.0 * ft) / 3.0
        kr = 4.0 * math.pi / 3.0 if self.rx_pattern == "dipole" else 2.0 * math.pi
        return kr * f / self.cavity["sigma_m2"]

    def diffuse_power(self, spot, wheel_index: int, theta: float, r_axis) -> float:
        """The cavity's mean diffuse power at the spot (LinkField units): the input interpolated
        linearly in dB between the input angles, times the spot's factor."""
        fac = self.diffuse_factor(spot, r_axis)
        if fac == 0.0:
            return 0.0
        n = self.cavity["angles"]
        f = (theta % (2.0 * math.pi)) / (2.0 * math.pi) * n
        k0 = int(math.floor(f)) % n
        t = f - math.floor(f)
        a, b = self.cavity_input(wheel_index, k0), self.cavity_input(wheel_index, (k0 + 1) % n)
        return fac * 10.0 ** ((10.0 * math.log10(a) * (1.0 - t) + 10.0 * math.log10(b) * t) / 10.0)

    # ----- the sensor --------------------------------------------------------------------
    def sensor(self, wheel_index: int, angle_index: int):
        """Sensor position (m) and unit antenna axis at one wheel angle."""
        w = self.wheels[wheel_index]
        th = 2.0 * math.pi * angle_index / self.angles_per_turn
        cx, cy, cz = w["centre"]
        pos = (cx + w["sensor_r"] * math.sin(th), cy + w["sign"] * w["sensor_off"], cz + w["sensor_r"] * math.cos(th))
        axis = {
            "radial": (math.sin(th), 0.0, math.cos(th)),
            "tangential": (math.cos(th), 0.0, -math.sin(th)),
            "axial": (0.0, 1.0, 0.0),
        }[self.sensor_axis_kind]
        return pos, axis

    # ----- the hull ----------------------------------------------------------------------
    def in_wheelhouse(self, p) -> bool:
        for h in self.wheelhouses:
            dx, dz = p[0] - h["xc"], p[2] - h["zc"]
            in_arch = (dx * dx + dz * dz < h["r"] ** 2) if dz >= 0 else abs(dx) < h["r"]
            if in_arch and h["sign"] * p[1] > h["inner"]:
                return True
        return False

    def inside(self, p) -> bool:
        return (
            self.top.contains(Point(p[0], p[1]))
            and self.side.contains(Point(p[0], p[2]))
            and not self.in_wheelhouse(p)
        )

    def _outline_hits(self, poly: Polygon, vertices, p, q) -> list[float]:
        """Parameters t in (0, 1) where the 2-D segment p -> q meets the polygon's boundary."""
        seg = LineString([p, q])
        if seg.length < 1e-12:
            return []
        hit = seg.intersection(poly.exterior)
        parts = getattr(hit, "geoms", [hit])
        out = []
        for g in parts:
            if g.is_empty:
                continue
            if g.geom_type != "Point":
                raise DegenerateCase("segment runs along an outline edge")
            if any(math.dist((g.x, g.y), v) < DEGENERATE_TOL_M for v in vertices):
                raise DegenerateCase("segment passes through an outline vertex")
            t = seg.project(g) / seg.length
            if 0.0 < t < 1.0:
                out.append(t)
        return out

    def _wheelhouse_hits(self, a, d) -> list[float]:
        """Parameters t in (0, 1) where a + t d meets a wheelhouse arch or inner wall."""
        out = []
        for h in self.wheelhouses:
            ox, oz = a[0] - h["xc"], a[2] - h["zc"]
            qa = d[0] ** 2 + d[2] ** 2
            if qa > 0:
                qb = 2.0 * (ox * d[0] + oz * d[2])
                qc = ox * ox + oz * oz - h["r"] ** 2
                disc = qb * qb - 4.0 * qa * qc
                if disc > 0:
                    for t in ((-qb - math.sqrt(disc)) / (2 * qa), (-qb + math.sqrt(disc)) / (2 * qa)):
                        if oz + t * d[2] >= 0:  # the upper half of the circle
                            out.append(t)
            if d[0] != 0:
                for xl in (h["r"], -h["r"]):  # the strip's sides below the centre
                    t = (xl - ox) / d[0]
                    if oz + t * d[2] < 0:
                        out.append(t)
            if d[1] != 0:
                out.append((h["sign"] * h["inner"] - a[1]) / d[1])
        return [t for t in out if 0.0 < t < 1.0]

    def crossings(self, a, b) -> list[tuple[float, float, int]]:
        """Hull crossings of the segment a -> b: (t, loss_db, +1 entering / -1 leaving), in order."""
        d = _sub(b, a)
        length = _norm(d)
        hits = [(t, "wall") for t in self._outline_hits(self.top, self.top_vertices, a[:2], b[:2])]
        hits += [(t, "roof") for t in self._outline_hits(self.side, self.side_vertices, (a[0], a[2]), (b[0], b[2]))]
        hits += [(t, "wheelhouse") for t in self._wheelhouse_hits(a, d)]
        merged: list[tuple[float, str]] = []
        for t, kind in sorted(hits):
            if merged and (t - merged[-1][0]) * length < DEGENERATE_TOL_M:
                kinds = {kind, merged[-1][1]}
                if kinds == {"wall", "roof"}:
                    # a face vertical in both views (an end face drawn as an edge of both
                    # outlines): a side or end face, so the side-view zone governs it
                    merged[-1] = (merged[-1][0], "wall")
                elif len(kinds) > 1:
                    raise DegenerateCase(f"two boundaries met at one point ({' and '.join(sorted(kinds))})")
                continue  # else wheels on one axle (or twin wheels) share their arch in x-z
            merged.append((t, kind))
        hits = merged
        ts = [0.0] + [t for t, _ in hits] + [1.0]
        states = [self.inside(_add(a, _scale(0.5 * (t0 + t1), d))) for t0, t1 in zip(ts, ts[1:])]
        out = []
        for i, (t, kind) in enumerate(hits):
            if states[i] == states[i + 1]:
                continue
            p = _add(a, _scale(t, d))
            out.append((t, self.panel_loss_db(kind, p), 1 if states[i + 1] else -1))
        return out

    def panel_loss_db(self, kind: str, p) -> float:
        if kind == "wheelhouse":
            return self.wheelhouse_db
        loss = self.metal_db
        if kind == "wall":
            for poly, l_db in self.side_zones:
                if poly.contains(Point(p[0], p[2])):
                    loss = l_db
        else:
            for poly, l_db, zmin, zmax in self.top_zones:
                if zmin <= p[2] <= zmax and poly.contains(Point(p[0], p[1])):
                    loss = l_db
        return loss

    @staticmethod
    def _envelope(poly: Polygon, x: float):
        """(lowest, highest) ordinate of the polygon on the vertical line at x; None if it misses."""
        lo, hi = poly.bounds[1] - 1.0, poly.bounds[3] + 1.0
        cut = LineString([(x, lo), (x, hi)]).intersection(poly)
        if cut.is_empty:
            return None
        _, ymin, _, ymax = cut.bounds
        return ymin, ymax

    def escape_clearance_m(self, p) -> float:
        zs = self._envelope(self.side, p[0])
        ys = self._envelope(self.top, p[0])
        if zs is None or ys is None:
            return 0.0
        return max(0.0, min(zs[1] - p[2], p[2] - zs[0], ys[1] - p[1], p[1] - ys[0]))

    def body_loss_db(self, a, b) -> float:
        d = _sub(b, a)
        length = _norm(d)
        cr = self.crossings(a, b)
        total = sum(c[1] for c in cr)
        for (t0, l0, dir0), (t1, l1, dir1) in zip(cr, cr[1:]):
            if not (dir0 == 1 and dir1 == -1):
                continue
            v_max = -math.inf
            for m in range(DIFFRACTION_SAMPLES):
                t = t0 + (m + 0.5) / DIFFRACTION_SAMPLES * (t1 - t0)
                h = self.escape_clearance_m(_add(a, _scale(t, d)))
                d1, d2 = max(t * length, 1e-6), max((1.0 - t) * length, 1e-6)
                v_max = max(v_max, h * math.sqrt(2.0 / self.lam * (1.0 / d1 + 1.0 / d2)))
            pen = l0 + l1
            total -= pen - min(pen, _j_db(v_max))
        return total

    # ----- the wheel -------------------------------------------------------------------------
    def wheel_loss_db(self, wheel_index: int, src, dst) -> float:
        """Rim knife edge + tire exit on the path src -> dst, dB.

        In the wheel frame (X forward, Z up from the wheel centre, W axial, outboard positive):
        the path is shadowed when it meets the rim barrel (radius rim - drop centre) within the
        rim width; then it bends over the flange on the receiver's side (the plane W = +-rim
        width / 2 the path goes toward), h = rim radius - the path's radius in that plane, or,
        if the path ends before that plane, h = the axial distance from the barrel entry to the
        nearer flange (distances d1, d2 from the entry). An unshadowed path that passes the
        flange plane within the tire's radius sees the same edge (lit side, small loss). The
        path leaves the tire through the tread when it meets the tread cylinder before the
        sidewall plane (and before its end), else through the sidewall; a shadowed path is
        taken out through the sidewall.
        """
        w = self.wheels[wheel_index]
        cx, cy, cz = w["centre"]
        s = (src[0] - cx, src[2] - cz, w["sign"] * (src[1] - cy))
        e = (dst[0] - cx, dst[2] - cz, w["sign"] * (dst[1] - cy))
        dv = _sub(e, s)
        length = max(_norm(dv), 1e-9)
        u = _scale(1.0 / length, dv)

        def radial_roots(radius):
            qa = u[0] ** 2 + u[1] ** 2
            qb = 2.0 * (s[0] * u[0] + s[1] * u[1])
            qc = s[0] ** 2 + s[1] ** 2 - radius**2
            disc = qb * qb - 4.0 * qa * qc
            if qa <= 1e-12 or disc <= 0:
                return None
            return (-qb - math.sqrt(disc)) / (2 * qa), (-qb + math.sqrt(disc)) / (2 * qa)

        half = w["rim_half_w"]
        enters, t_entry, w_entry = False, 0.0, 0.0
        roots = radial_roots(w["barrel_r"])
        if roots is not None:
            t_entry = roots[0]
            w_entry = s[2] + t_entry * u[2]
            enters = 1e-9 < t_entry < length and abs(w_entry) <= half
        reaches_flange, t_fl, rho = False, 0.0, 0.0
        if abs(u[2]) > 1e-12:
            t_fl = ((half if u[2] >= 0 else -half) - s[2]) / u[2]
            reaches_flange = 0.0 < t_fl < length
            rho = math.hypot(s[0] + t_fl * u[0], s[1] + t_fl * u[1])
        rim_db = 0.0
        if enters or (reaches_flange and rho < w["tire_r"]):
            if enters and not reaches_flange:
                h = half - min(abs(w_entry), half)
                d1, d2 = t_entry, length - t_entry
            else:
                h = w["rim_r"] - rho
                d1, d2 = t_fl, length - t_fl
            d1, d2 = max(d1, 1e-6), max(d2, 1e-6)
            rim_db = _j_db(h * math.sqrt(2.0 / self.lam * (1.0 / d1 + 1.0 / d2)))
        if enters:
            return rim_db + self.sidewall_db
        roots = radial_roots(w["tire_r"])
        t_tread = roots[1] if roots is not None and roots[1] > 0 else math.inf
        t_side = math.inf
        if abs(u[2]) > 1e-12:
            t_side = ((w["tire_half_w"] if u[2] >= 0 else -w["tire_half_w"]) - s[2]) / u[2]
            t_side = t_side if t_side > 0 else math.inf
        through_tread = t_tread < t_side and t_tread < length
        return rim_db + (self.tread_db if through_tread else self.sidewall_db)

    # ----- the link ----------------------------------------------------------------------------
    def _sensor_field(self, s_axis, u, r_axis):
        """Sensor far field toward unit u, relative to the bare sensor's peak (real 3-vector)."""
        if self.sensor_pattern == "dipole":
            return _perp(s_axis, u)
        ref = _perp(r_axis if self.rx_pattern == "dipole" else s_axis, u)
        n = _norm(ref)
        return _scale(1.0 / max(n, 1e-12), ref)

    def level_dbm(self, spot, wheel_index: int, angle_index: int, r_axis=None) -> float:
        """Received level, dBm, at ``spot`` (m) from the sensor of one wheel at one angle index.

        ``r_axis`` is the receiver antenna axis (default: the radio's receiver axis).
        """
        spot = tuple(float(c) for c in spot)
        if r_axis is None:
            r_axis = self.vehicle.radio.receiver.axis
        r_axis = _scale(1.0 / _norm(r_axis), tuple(float(c) for c in r_axis))
        src, s_axis = self.sensor(wheel_index, angle_index)

        dvec = _sub(spot, src)
        dist = _norm(dvec)
        u = _scale(1.0 / dist, dvec)
        e_d = self._sensor_field(s_axis, u, r_axis)
        loss_d = self.body_loss_db(src, spot) + self.wheel_loss_db(wheel_index, src, spot)
        if self.rx_pattern == "dipole":
            c_d = complex(_dot(e_d, r_axis))
        else:
            c_d = complex(_norm(e_d))
            pol = _scale(1.0 / max(_norm(e_d), 1e-12), e_d)  # the direct ray's polarization
        g_d = 10.0 ** (-loss_d / 20.0) / dist
        field = c_d * g_d * cmath.exp(-1j * self.k * dist)
        matched_power = g_d * g_d  # the rays' powers with a matched, peak coupling

        if self.ground:
            image = (src[0], src[1], -src[2])
            rvec = _sub(spot, image)
            dist_r = _norm(rvec)
            u_up = _scale(1.0 / dist_r, rvec)  # the reflected ray, road -> receiver
            u_down = (u_up[0], u_up[1], -u_up[2])  # sensor -> road
            f = src[2] / (src[2] + spot[2])
            road_pt = (src[0] + f * (spot[0] - src[0]), src[1] + f * (spot[1] - src[1]), 0.0)
            e_i = self._sensor_field(s_axis, u_down, r_axis)
            n_te = _cross((0.0, 0.0, 1.0), u_down)
            n_len = _norm(n_te)
            n_te = (0.0, 1.0, 0.0) if n_len < 1e-9 else _scale(1.0 / n_len, n_te)
            t_in = _cross(n_te, u_down)  # TM unit vector of the incident ray
            t_out = (-t_in[0], -t_in[1], t_in[2])  # TM unit vector of the reflected ray, same normal part
            grazing = math.asin(min(max(u_up[2], 0.0), 1.0))
            g_te, g_tm = (complex(g) for g in fresnel_reflection(self.road_eps, grazing))
            # TE keeps its direction; TM: the field component normal to the road scales by g_tm
            e_r = [g_te * _dot(e_i, n_te) * n_te[i] + g_tm * _dot(e_i, t_in) * t_out[i] for i in range(3)]
            if self.rx_pattern == "dipole":
                c_r = sum(e_r[i] * r_axis[i] for i in range(3))
            else:
                c_r = sum(e_r[i] * pol[i] for i in range(3))
            loss_r = (
                self.body_loss_db(src, road_pt)
                + self.body_loss_db(road_pt, spot)
                + self.wheel_loss_db(wheel_index, src, road_pt)
            )
            g_r = 10.0 ** (-loss_r / 20.0) / dist_r
            field += c_r * g_r * cmath.exp(-1j * self.k * dist_r)
            matched_power += g_r * g_r

        # the null floor: the power is held at floor^2 times the rays' matched power sum
        power = max(abs(field) ** 2, self.floor_amp**2 * matched_power)
        # the cavity's diffuse power (mean), and the level exceeded with probability 1 - q when it fades
        diffuse = 0.0
        if self.cavity is not None:
            th = 2.0 * math.pi * angle_index / self.angles_per_turn
            diffuse = self.diffuse_power(spot, wheel_index, th, r_axis)
        if diffuse > 0.0 and self.fade_q > 0.0:
            from scipy.stats import ncx2

            power = 0.5 * diffuse * float(ncx2.ppf(self.fade_q, 2, 2.0 * power / diffuse))
        else:
            power += diffuse
        amp = math.sqrt(power) * self.lam / (4.0 * math.pi)
        return self.eirp_dbm + self.rx_gain_dbi + 20.0 * math.log10(max(amp, 1e-30))

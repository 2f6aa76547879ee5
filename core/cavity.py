"""The closed body as a lossy cavity fed through its openings: the diffuse level inside it.

A closed steel body with windows and plastic parts is, at 315-434 MHz, an electrically large,
lossy cavity: a few wavelengths long, fed through its openings. Charging each straight path the
loss of the metal panel it crosses leaves the cabin about 20 dB too dark against a whole-vehicle
full-wave solution (docs/VALIDATION.md, whole-vehicle reference). This module adds, for receiver
positions inside the hull, the diffuse level of the power-balance method (Hill et al. 1994):

    power in    P_t = sum over opening patches of S_inc tau cos(theta_i) dA
    power lost  P_d = S_c sigma_d,   sigma_d = sigma_leak + sigma_contents + sigma_walls + sigma_rx
    balance     S_c = P_t / sigma_d

with S_inc the sensor's power density at the patch (the installed pattern toward it, the wheel and
body losses of the straight path from the sensor to the patch's outer face, and - road on - the
road-reflected image of the sensor), tau = 10^(-L/10) the patch material's transmission and
cos(theta_i) the incidence factor. The losses are expressed as absorption cross-sections:

- ``sigma_leak`` = sum of tau dA / 4 over the openings: power leaking back out through an
  electrically large aperture in a diffuse field (the flux of an isotropic field through a plane is
  a quarter of its power density times the area);
- ``sigma_contents``: seats and occupants, ``Body.cabin_absorption_m2`` (engineering default
  0.5 m^2, two seated occupants; see :data:`DEFAULT_CONTENTS_M2`);
- ``sigma_walls`` = (4 pi / 3) mu_r delta S / lambda for metal walls of area S and skin depth delta
  (ITU-R P.2040 metal, sigma = 1e7 S/m, mu_r = 1): negligible next to the others, kept for
  completeness;
- ``sigma_rx`` = lambda^2 / (8 pi): the matched receiving antenna itself.

A receiving short dipole in a diffuse field of power density S_c (S_c = |E|^2 / (2 eta) with E the
total field, each Cartesian component carrying a third) picks up S_c G_r lambda^2 / (12 pi), its
peak gain G_r included; an isotropic (polarization-matched) receiver half of S_c G_r lambda^2 /
(4 pi). Within a wavelength of a conducting wall the diffuse field is not uniform: the tangential
electric field vanishes on the wall and the normal one doubles. With x = 2 k z at distance z the
mean-square tangential and normal components relative to the free interior are

    F_t = 1 - 3/2 (sin x / x + cos x / x^2 - sin x / x^3),   F_n = 1 - 3 (cos x / x^2 - sin x / x^3)

(Hill 1995, from memory; F_t -> 0 and F_n -> 2 on the wall, both -> 1 far from it). The dipole's
factor is F_n cos^2 + F_t sin^2 of its angle to the wall normal, for the nearest wall of the top
outline and the nearest face of the side outline (multiplied), where those faces are conducting
(crossing loss of at least ``OPENING_LOSS_DB``; an opening imposes no boundary).

Openings are the panels whose crossing loss is under ``OPENING_LOSS_DB`` (glass, plastic, user
materials below 10 dB; the same rule as the full-wave wire grid, core.fullwave.vehicle_grid). Metal
panels feed no diffuse power: their crossing loss stands for the seams and gaps along a straight
path, and spread over the whole shell it would overstate what a closed steel body lets in; the
straight paths through metal keep their panel loss in core.links.

The incidence factor: the sensor sits in a wheelhouse, inside the body's plan outline, so it sees
almost no opening from the outside in a straight line; the wave reaches an opening after bending
round the body (the body loss of the straight path charges that as a knife-edge passage), and it
arrives there at no particular angle: the factor is the mean of cos(theta_i) over a hemisphere of
incidence directions weighted as a diffuse flux, 1/2 (engineering default, :data:`INCIDENCE_FACTOR`).

The whole hull is one cavity (no inner partitions such as a firewall or a rear bulkhead).

Code: :func:`build_cavity` (the engine, through core.scoring) and the calibration's fast model
(core.link_terms.Cabin, which re-assembles the cavity for other material losses) share every step:
the patches (:func:`surface_samples`), the sensor -> patch paths (:func:`input_paths`), the opening
rule and tau (:func:`is_opening`, :func:`transmission`), the input sum (:func:`input_power`), the
cross-sections (:func:`cross_sections`), the assembly (:func:`cavity_from`) and the receiver's factor
(:func:`wall_terms`, :func:`combine_wall_factors`, :func:`diffuse_factor`).

References
----------
- D. A. Hill, M. T. Ma, A. R. Ondrejka, B. F. Riddle, M. L. Crawford, R. T. Johnk, "Aperture
  excitation of electrically large, lossy cavities", IEEE Trans. EMC 36(3), 1994: the power
  balance, transmission / absorption cross-sections, sigma_w for conducting walls (from memory).
- D. A. Hill, "Plane wave integral representation for fields in reverberation chambers", IEEE
  Trans. EMC 40(3), 1998, and "Boundary fields in reverberation chambers", IEEE Trans. EMC 47(2),
  2005: the fields near a wall (from memory).
- ITU-R P.2040 Table 3 (metal conductivity).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from core.geometry import Hull, body_loss_db, inside_hull, points_in_polygon, start_bits, zone_loss_at
from core.propagation import fresnel_reflection

__all__ = [
    "DEFAULT_CONTENTS_M2",
    "INCIDENCE_FACTOR",
    "OPENING_LOSS_DB",
    "Cavity",
    "CrossSections",
    "InputPaths",
    "build_cavity",
    "cavity_from",
    "combine_wall_factors",
    "conducting",
    "cross_sections",
    "diffuse_factor",
    "input_angles_of",
    "input_paths",
    "input_power",
    "is_opening",
    "path_losses",
    "spot_factor",
    "surface_samples",
    "transmission",
    "wall_factor",
    "wall_terms",
]

#: a panel whose crossing loss is under this is an opening (dB; metal 20 dB, glass 2 dB, plastic ~0)
OPENING_LOSS_DB = 10.0
#: engineering default absorption of the cabin contents, m^2: two seated occupants with their seats.
#: A seat with its occupant modelled as a lossy block in our own NEC-2 runs absorbs 0.27 m^2 at 315
#: MHz and 0.24 m^2 at 433.92 MHz (core.fullwave.vehicle_reference.block_absorption); published
#: averaged absorption cross-sections of seated adults are a few tenths of a m^2 (from memory,
#: measured mostly above 1 GHz).
DEFAULT_CONTENTS_M2 = 0.5
#: mean cos(incidence) of the power reaching an opening after bending round the body (engineering default)
INCIDENCE_FACTOR = 0.5
#: spacing of the patches the openings are divided into, m
SAMPLE_SPACING_M = 0.15
#: wheel angles at which the cavity input is computed (interpolated between them)
INPUT_ANGLES = 8
#: metal wall conductivity for the wall absorption, S/m (ITU-R P.2040 Table 3)
WALL_CONDUCTIVITY_S_PER_M = 1.0e7
_MU0 = 4e-7 * math.pi


@dataclass(frozen=True)
class Cavity:
    """The hull as a cavity: its openings, losses and the power fed in per wheel over a turn.

    ``input`` (W, INPUT_ANGLES): P_t / EIRP, the power entering through the openings per watt of
    sensor EIRP (m^0: an area times a power density per EIRP), at ``input_angles`` (rad).
    Cross-sections in m^2; ``openings`` (N, 3) patch centres, m; ``normals`` outward.
    """

    openings: np.ndarray
    normals: np.ndarray
    areas_m2: np.ndarray
    tau: np.ndarray
    surface_area_m2: float
    sigma_leak_m2: float
    sigma_contents_m2: float
    sigma_walls_m2: float
    sigma_rx_m2: float
    input_angles: np.ndarray
    input: np.ndarray
    wavelength_m: float

    @property
    def sigma_total_m2(self) -> float:
        return self.sigma_leak_m2 + self.sigma_contents_m2 + self.sigma_walls_m2 + self.sigma_rx_m2

    @property
    def opening_area_m2(self) -> float:
        return float(self.areas_m2.sum())

    def input_at(self, wheel, theta) -> np.ndarray:
        """P_t / EIRP of wheel(s) at wheel angle(s) theta (rad): periodic linear interpolation of
        the tabulated input in dB (it changes smoothly over a turn: a sum over many patches)."""
        wheel = np.asarray(wheel)
        th = np.mod(np.asarray(theta, float), 2.0 * np.pi)
        n = len(self.input_angles)
        f = th / (2.0 * np.pi) * n
        i0 = np.floor(f).astype(np.intp) % n
        t = f - np.floor(f)
        db = 10.0 * np.log10(np.maximum(self.input, 1e-300))
        i1 = (i0 + 1) % n
        return 10.0 ** ((db[wheel, i0] * (1.0 - t) + db[wheel, i1] * t) / 10.0)


def surface_samples(hull: Hull, spacing_m: float = SAMPLE_SPACING_M):
    """Patches of the hull surface: centres (N, 3) m, outward normals (N, 3), areas (N,) m^2 and
    panel crossing loss (N,) dB by the engine's rule (walls: side-view zones at (x, z); roof and
    floor faces: top-view zones at (x, y) with their z limits; default metal). Walls are the top
    outline's edges extruded in z, roofs and floors the side outline's edges extruded in y; a patch
    is kept where it lies on the hull's boundary (inside just under it, outside just over it)."""
    top, side = hull.top, hull.side
    h = float(spacing_m)
    def centred(lo, hi):  # cell centres spanning [lo, hi] evenly (a mirror-symmetric body gets a symmetric grid)
        n = max(1, int(np.ceil((hi - lo) / h)))
        return lo + (np.arange(n) + 0.5) * (hi - lo) / n

    zs_all = centred(side[:, 1].min(), side[:, 1].max())
    ys_all = centred(top[:, 1].min(), top[:, 1].max())
    pts, nrm, area, loss, kinds = [], [], [], [], []
    for outline, cross, kind in ((top, zs_all, "wall"), (side, ys_all, "face")):
        for a, b in zip(outline, np.roll(outline, -1, axis=0)):
            length = float(np.hypot(*(b - a)))
            if length < 1e-9 or len(cross) == 0:
                continue
            n2 = np.array([b[1] - a[1], a[0] - b[0]]) / length
            ns = max(1, int(np.ceil(length / h)))
            s = (np.arange(ns) + 0.5) / ns
            uv = a + s[:, None] * (b - a)
            u = np.repeat(uv[:, 0], len(cross))
            v = np.repeat(uv[:, 1], len(cross))
            c = np.tile(cross, len(uv))
            if kind == "wall":  # (x, y) along the top outline, z across
                p = np.stack([u, v, c], axis=1)
                n3 = np.tile([n2[0], n2[1], 0.0], (len(u), 1))
                lz = zone_loss_at(hull.side_zones, u, c, None, hull.default_loss_db)
            else:  # (x, z) along the side outline, y across
                p = np.stack([u, c, v], axis=1)
                n3 = np.tile([n2[0], 0.0, n2[1]], (len(u), 1))
                lz = zone_loss_at(hull.top_zones, u, c, v, hull.default_loss_db)
            pts.append(p)
            kinds.append(0 if kind == "wall" else 1)
            nrm.append(n3)
            area.append(np.full(len(u), length / ns * h))
            loss.append(lz)
    if not pts:
        return np.empty((0, 3)), np.empty((0, 3)), np.empty(0), np.empty(0)
    p, n, a, lz = (np.concatenate(x) for x in (pts, nrm, area, loss))
    kind = np.concatenate([np.full(len(x), k) for x, k in zip(pts, kinds)])
    # a face of the side outline that is also a wall of the top outline (an end face drawn in both
    # views) is a wall: keep the wall patches there (its material is the side-view zone's, as for a
    # crossing: core.geometry)
    eps = 1e-4
    face = kind == 1
    also_wall = face & (points_in_polygon(p[:, 0] + eps * n[:, 0], p[:, 1], hull.top_edges)
                        != points_in_polygon(p[:, 0] - eps * n[:, 0], p[:, 1], hull.top_edges))
    p, n, a, lz = p[~also_wall], n[~also_wall], a[~also_wall], lz[~also_wall]
    # orient the normals outward, keep the patches that lie on the boundary
    flip = inside_hull(hull, *(p + 0.01 * n).T)
    n[flip] *= -1.0
    eps = 0.005
    on = inside_hull(hull, *(p - eps * n).T) & ~inside_hull(hull, *(p + eps * n).T)
    return p[on], n[on], a[on], lz[on]


def _boundary_factors(x):
    """(F_t, F_n) of a diffuse field at x = 2 k z from a conducting wall (Hill; see the module notes)."""
    x = np.maximum(x, 1e-6)
    s, c = np.sin(x), np.cos(x)
    ft = 1.0 - 1.5 * (s / x + c / x**2 - s / x**3)
    fn = 1.0 - 3.0 * (c / x**2 - s / x**3)
    return ft, fn


def wall_terms(hull: Hull, positions: np.ndarray, axes: np.ndarray | None,
               wavelength_m: float) -> tuple[np.ndarray, np.ndarray]:
    """The two wall factors of each receiver and the panel each one belongs to: ``factors`` (2, S), the
    diffuse field's mean-square projection on the receiver axis relative to the free interior near
    the nearest top-outline wall and the nearest side-outline face (``axes`` None: an isotropic
    receiver, the mean of the three directions), and ``panel`` (2, S), the crossing value of the panel
    at the foot point on the hull (dB; on a hull built with material numbers, the material's number).
    :func:`wall_factor` applies the factors where the panel conducts (:func:`conducting`)."""
    from core.placement import _edge_distance, _outline

    p = np.atleast_2d(np.asarray(positions, float))
    k = 2.0 * np.pi / wavelength_m
    top, side = _outline(hull.top_edges), _outline(hull.side_edges)
    d_t, k_t = _edge_distance(top, p[:, 0], p[:, 1])
    d_s, k_s = _edge_distance(side, p[:, 0], p[:, 2])
    zero = np.zeros(len(p))

    def foot_and_dir(ol, k, uv, d):
        """Nearest point on edge k and the unit direction from it to the point (the wall normal there;
        at a corner, the direction from the corner)."""
        p0, e = ol.p0[k], ol.e[k]
        t = np.clip(np.einsum("ij,ij->i", uv - p0, e) / ol.len2[k], 0.0, 1.0)
        foot = p0 + t[:, None] * e
        return foot, (uv - foot) / np.maximum(d, 1e-12)[:, None]

    foot_t, dir_t = foot_and_dir(top, k_t, p[:, :2], d_t)
    foot_s, dir_s = foot_and_dir(side, k_s, p[:, [0, 2]], d_s)
    n_t = np.column_stack([dir_t[:, 0], dir_t[:, 1], zero])
    n_s = np.column_stack([dir_s[:, 0], zero, dir_s[:, 1]])
    # the panel at the foot point, looked up a micrometre toward the receiver (a foot on a corner
    # between two panels takes the one the receiver faces)
    foot_t = foot_t + 1e-6 * dir_t
    foot_s = foot_s + 1e-6 * dir_s
    panel_t = zone_loss_at(hull.side_zones, foot_t[:, 0], p[:, 2], None, hull.default_loss_db)
    panel_s = zone_loss_at(hull.top_zones, foot_s[:, 0], p[:, 1], foot_s[:, 1], hull.default_loss_db)
    factors = []
    for d, n in ((d_t, n_t), (d_s, n_s)):
        ft, fn = _boundary_factors(2.0 * k * d)
        if axes is None:
            f = (fn + 2.0 * ft) / 3.0
        else:
            c2 = np.einsum("ij,ij->i", np.atleast_2d(axes), n) ** 2
            f = c2 * fn + (1.0 - c2) * ft
        factors.append(f)
    return np.stack(factors), np.stack([panel_t, panel_s]).astype(float)


def conducting(loss_db) -> np.ndarray:
    """Whether panels of crossing loss ``loss_db`` (dB) are conducting walls: not openings."""
    return ~is_opening(loss_db)


def combine_wall_factors(factors: np.ndarray, panel_loss_db: np.ndarray) -> np.ndarray:
    """(S,) the product of the wall factors (2, S) of :func:`wall_terms` over the faces whose panel
    (crossing loss (2, S), dB) conducts; an opening imposes no boundary."""
    return np.prod(np.where(conducting(panel_loss_db), factors, 1.0), axis=0)


def wall_factor(hull: Hull, positions: np.ndarray, axes: np.ndarray | None, wavelength_m: float) -> np.ndarray:
    """(S,) the diffuse field's mean-square projection on each receiver axis near the walls,
    relative to the free interior: the factors of the nearest top-outline wall and of the nearest
    side-outline face, each where that face is conducting (``axes`` None: an isotropic receiver, the
    mean of the three directions)."""
    return combine_wall_factors(*wall_terms(hull, positions, axes, wavelength_m))


@dataclass(frozen=True)
class InputPaths:
    """The straight paths from every wheel's sensor, at the input angles, to the outer face of P hull
    patches: K = W * A * P paths ordered wheel, angle, patch. ``density`` (K,): the sensor's power
    density at the patch per watt of EIRP before any loss, e^2 / d^2 (1/m^2, the installed or bare
    pattern toward the patch); with the road on, ``road_density`` (K,) the road-reflected image's,
    Fresnel power reflection (unpolarized mean) included, and ``road_point`` (K, 3) where it meets the
    road. ``src``, ``outside`` (K, 3) m, ``bits`` (K,) the sensor's hull membership bits,
    ``wheel`` (K,) the wheel index. The losses along these paths are the caller's: the engine's body and
    wheel losses at the scene's values (:func:`path_losses`), or re-summed for other values
    (core.link_terms)."""

    shape: tuple[int, int, int]
    src: np.ndarray
    outside: np.ndarray
    bits: np.ndarray
    wheel: np.ndarray
    density: np.ndarray
    road_point: np.ndarray | None = None
    road_density: np.ndarray | None = None


def input_paths(scene, openings: np.ndarray, normals: np.ndarray, angles: np.ndarray) -> InputPaths:
    """The sensor -> patch paths of :class:`InputPaths` for patches at ``openings`` (P, 3) m with outward
    unit ``normals``, at wheel angles ``angles`` (A,) rad: all angles and patches of a wheel in one pass."""
    from core.links import sensor_field
    from core.wheel import sensor_axes, sensor_positions

    n_p, A = len(openings), len(angles)
    W = len(scene.wheels)
    outside1 = np.tile(openings + 1e-3 * normals, (A, 1))  # the patch's outer face (A * n_p, 3)
    th = np.repeat(angles, n_p)
    r_axis = np.broadcast_to(np.array([0.0, 0.0, 1.0]), (A * n_p, 3))  # the field's magnitude is used
    mirror = np.array([1.0, 1.0, -1.0])
    srcs, dens, points, road_dens = [], [], [], []
    for wi, w in enumerate(scene.wheels):
        src = np.repeat(sensor_positions(w, angles), n_p, axis=0)
        s_ax = np.repeat(sensor_axes(angles, scene.vehicle.radio.sensor.axis), n_p, axis=0)
        d = outside1 - src
        dist = np.maximum(np.linalg.norm(d, axis=1), 1e-3)
        u = d / dist[:, None]
        e2 = np.sum(np.abs(sensor_field(scene, wi, th, s_ax, u, r_axis, dist)) ** 2, axis=1)
        srcs.append(src)
        dens.append(e2 / dist**2)
        if scene.ground_reflection:
            img = src * mirror
            dr = outside1 - img
            dist_r = np.maximum(np.linalg.norm(dr, axis=1), 1e-3)
            u_up = dr / dist_r[:, None]
            tg = src[:, 2] / np.maximum(src[:, 2] + outside1[:, 2], 1e-9)
            road = img + tg[:, None] * dr
            road[:, 2] = 0.0
            e2r = np.sum(np.abs(sensor_field(scene, wi, th, s_ax, u_up * mirror, r_axis, dist_r)) ** 2, axis=1)
            g_te, g_tm = fresnel_reflection(scene.road_eps, np.arcsin(np.clip(u_up[:, 2], 0.0, 1.0)))
            refl = 0.5 * (np.abs(g_te) ** 2 + np.abs(g_tm) ** 2)  # unpolarized mean: the patch takes both
            points.append(road)
            road_dens.append(e2r * refl / dist_r**2)
    src = np.concatenate(srcs) if srcs else np.empty((0, 3))
    road = scene.ground_reflection
    return InputPaths(
        shape=(W, A, n_p), src=src, outside=np.tile(outside1, (W, 1)),
        bits=start_bits(scene.hull, src[:, 0], src[:, 1], src[:, 2]),
        wheel=np.repeat(np.arange(W), A * n_p), density=np.concatenate(dens) if dens else np.empty(0),
        road_point=(np.concatenate(points) if points else np.empty((0, 3))) if road else None,
        road_density=(np.concatenate(road_dens) if road_dens else np.empty(0)) if road else None)


def path_losses(scene, paths: InputPaths) -> tuple[np.ndarray, np.ndarray | None]:
    """The engine's losses along the input paths at the scene's values, dB: (direct (K,), road (K,) or
    None): body loss of the legs (core.geometry.body_loss_db) plus, with the knife-edge wheel, the
    wheel loss (core.wheel.wheel_loss_db)."""
    from core.wheel import wheel_loss_db

    hull, f = scene.hull, scene.freq_hz
    _, A, P = paths.shape
    road = paths.road_point is not None
    loss = np.empty(len(paths.src))
    loss_r = np.empty(len(paths.src)) if road else None
    for wi, w in enumerate(scene.wheels):  # one wheel at a time (arrays of A * P paths)
        g = slice(wi * A * P, (wi + 1) * A * P)
        src, out, bits = paths.src[g], paths.outside[g], paths.bits[g]
        loss[g] = body_loss_db(hull, src, out, f, bits)
        if road:
            pt = paths.road_point[g]
            loss_r[g] = body_loss_db(hull, src, pt, f, bits) + body_loss_db(hull, out, pt, f)
        if scene.use_wheel_loss:
            loss[g] += wheel_loss_db(w, src, out, f, scene.sidewall_loss_db, scene.tread_loss_db)
            if road:
                loss_r[g] += wheel_loss_db(w, src, pt, f, scene.sidewall_loss_db, scene.tread_loss_db)
    return loss, loss_r


def input_power(paths: InputPaths, keep: np.ndarray, tau: np.ndarray, areas: np.ndarray, loss_db: np.ndarray,
                road_loss_db: np.ndarray | None) -> np.ndarray:
    """P_t / EIRP per wheel at the input angles (W, A): over the patches ``keep`` (P,) bool of the
    paths (the openings), the power density at each (direct, plus the road-reflected one) after the
    path's loss (dB, (K,) over all paths) times tau * cos * dA, with tau (P_open,) and the areas
    (P_open,) m^2 of the kept patches."""
    W, A, P = paths.shape
    n = int(np.count_nonzero(keep))
    if n == 0:
        return np.zeros((W, A))
    weight = tau * areas * INCIDENCE_FACTOR / (4.0 * np.pi)

    def kept(x):
        return x.reshape(W, A, P)[:, :, keep]

    per = weight * kept(paths.density) * 10.0 ** (-kept(loss_db) / 10.0)
    if paths.road_density is not None:
        per = per + weight * kept(paths.road_density) * 10.0 ** (-kept(road_loss_db) / 10.0)
    return per.sum(axis=2)


def is_opening(loss_db) -> np.ndarray:
    """Whether panels of crossing loss ``loss_db`` (dB) are openings that feed the cavity."""
    return np.asarray(loss_db) < OPENING_LOSS_DB


def transmission(loss_db) -> np.ndarray:
    """tau = 10^(-L/10) of panels of crossing loss L, dB."""
    return 10.0 ** (-np.asarray(loss_db, float) / 10.0)


@dataclass(frozen=True)
class CrossSections:
    """The cavity's absorption cross-sections, m^2 (see the module notes)."""

    leak: float
    contents: float
    walls: float
    rx: float


def cross_sections(tau: np.ndarray, opening_areas_m2: np.ndarray, metal_area_m2: float, contents_m2: float,
                   freq_hz: float, wavelength_m: float) -> CrossSections:
    """sigma_leak (sum tau dA / 4 over the openings), sigma_contents, sigma_walls ((4 pi / 3) mu_r delta S /
    lambda over the conducting area S) and sigma_rx (lambda^2 / 8 pi), m^2."""
    delta = 1.0 / math.sqrt(math.pi * freq_hz * _MU0 * WALL_CONDUCTIVITY_S_PER_M)
    return CrossSections(
        leak=float(np.sum(tau * opening_areas_m2) / 4.0), contents=float(contents_m2),
        walls=4.0 * math.pi / 3.0 * delta * float(metal_area_m2) / wavelength_m,
        rx=wavelength_m**2 / (8.0 * np.pi))


def cavity_from(patches, patch_loss_db: np.ndarray, paths: InputPaths, path_patches: np.ndarray,
                loss_db: np.ndarray, road_loss_db: np.ndarray | None, contents_m2: float, freq_hz: float,
                wavelength_m: float, angles: np.ndarray) -> Cavity:
    """The :class:`Cavity` of hull patches ``patches`` = (centres (P, 3), normals (P, 3), areas (P,)) with
    crossing losses ``patch_loss_db`` (P,) dB: the openings (:func:`is_opening`), their tau, the
    cross-sections and the input over a turn along ``paths``, traced to the patches ``path_patches``
    (increasing indices; every opening among them) with losses ``loss_db`` and ``road_loss_db`` (dB).
    The one place where a cavity is assembled: :func:`build_cavity` (the engine, paths to the openings
    only) and core.link_terms (paths to every patch, re-assembled for other material losses)."""
    p, n, a = patches
    opening = is_opening(patch_loss_db)
    keep = opening[path_patches]
    if int(np.count_nonzero(keep)) != int(np.count_nonzero(opening)):
        raise ValueError("the input paths do not reach every opening")
    tau = transmission(patch_loss_db[opening])
    area = a[opening]
    cs = cross_sections(tau, area, float(a[~opening].sum()), contents_m2, freq_hz, wavelength_m)
    return Cavity(
        openings=p[opening], normals=n[opening], areas_m2=area, tau=tau, surface_area_m2=float(a.sum()),
        sigma_leak_m2=cs.leak, sigma_contents_m2=cs.contents, sigma_walls_m2=cs.walls, sigma_rx_m2=cs.rx,
        input_angles=angles, input=input_power(paths, keep, tau, area, loss_db, road_loss_db),
        wavelength_m=wavelength_m)


def input_angles_of(count: int = INPUT_ANGLES) -> np.ndarray:
    """The wheel angles the cavity input is computed at, rad."""
    return np.arange(count) * (2.0 * np.pi / count)


def build_cavity(scene, contents_m2: float = DEFAULT_CONTENTS_M2, spacing_m: float = SAMPLE_SPACING_M,
                 input_angles: int = INPUT_ANGLES) -> Cavity:
    """The cavity of a prepared scene (core.scoring.Scene): openings, losses, input over a turn."""
    p, n, a, loss = surface_samples(scene.hull, spacing_m)
    to = np.flatnonzero(is_opening(loss))  # the engine traces the paths to the openings only
    angles = input_angles_of(input_angles)
    paths = input_paths(scene, p[to], n[to], angles)
    loss_d, loss_r = path_losses(scene, paths)
    return cavity_from((p, n, a), loss, paths, to, loss_d, loss_r, contents_m2, scene.freq_hz, scene.wavelength_m,
                       angles)


def spot_factor(scene, positions, axes) -> np.ndarray:
    """(S,) diffuse power per unit cavity input for receivers at positions (S, 3) with unit axes
    (S, 3), in the units of core.links.LinkField (the level adds EIRP, G_r and 20 log(lambda/4pi)):
    (4 pi / 3) F / sigma_d for a dipole, 2 pi F / sigma_d for an isotropic receiver; 0 outside the
    hull (and in the wheelhouses)."""
    cav = scene.cavity
    p = np.atleast_2d(np.asarray(positions, float))
    if cav is None or len(p) == 0:
        return np.zeros(len(p))
    dipole = scene.receiver_pattern == "dipole"
    f = wall_factor(scene.hull, p, axes if dipole else None, cav.wavelength_m)
    inside = inside_hull(scene.hull, p[:, 0], p[:, 1], p[:, 2])
    return diffuse_factor(inside, f, cav.sigma_total_m2, dipole)


def diffuse_factor(inside: np.ndarray, wall: np.ndarray, sigma_total_m2: float, dipole: bool) -> np.ndarray:
    """(S,) :func:`spot_factor` from the receivers' membership of the hull, their wall factors
    (:func:`wall_factor`) and the cavity's total cross-section sigma_d, m^2."""
    k = 4.0 * np.pi / 3.0 if dipole else 2.0 * np.pi
    return np.where(inside, k * wall / sigma_total_m2, 0.0)

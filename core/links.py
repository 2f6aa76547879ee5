"""Link budget for every (spot, wheel, wheel angle): the received level in dBm.

    P_rx = EIRP_s + G_r + 20 log10 | sum over rays of c_ray A_ray e^{-jk d_ray} lambda / (4 pi d_ray) |

with two rays, the direct one and (optionally) the one reflected by the road. For each ray,
c_ray is the pattern-and-polarization coupling of the sensor's field toward the ray and the
receiver antenna (<= 1; floored at the null floor), and A_ray = 10^(-L/20) with L the wheel
loss (rim knife edge and tire, or none when the installed wheel pattern already holds the wheel)
plus the body loss of the ray's legs. With the road reflection off, this is the link budget

    P_rx = EIRP_s + G_s,rel + G_r + G_pol - L_fs - L_wheel - L_body.

Sensor field toward a unit direction u (amplitude relative to the bare sensor's peak):
- short dipole along a_s: a_s_perp (Balanis: pattern sin, field along the projected axis);
- isotropic: unit field along the receiver's projected axis (polarization-matched), or along the
  sensor axis when the receiver is isotropic too;
- installed wheel pattern: g(u) / sqrt(1.5), g the tabulated field of the sensor on its rim with
  |g|^2 the directivity (core.wheel_patterns), so EIRP_s keeps its meaning of the bare sensor's peak.
Receiver: a short dipole along a_r responds to E . a_r; an isotropic receiver is taken as matched to
the direct ray's polarization.

Road reflection: image method with the Fresnel coefficients of the road for the components
perpendicular (TE) and parallel (TM) to the plane of incidence; the reflected ray's legs (sensor ->
road point, road point -> receiver) carry the wheel and body losses like the direct ray.

References
----------
ITU-R P.525 (free space), Balanis, Antenna Theory (short dipole, polarization loss factor),
Rappaport, Wireless Communications sec. 4.5-4.6 (Fresnel reflection, two-ray model),
ITU-R P.2040 (road permittivity and conductivity).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from core import kernels
from core.geometry import body_loss_db, body_loss_terms, start_bits
from core.propagation import fresnel_reflection
from core.wheel import WheelLossParts, sensor_axes, sensor_positions, wheel_loss_db, wheel_loss_parts

_Z = np.array([0.0, 0.0, 1.0])
_MIRROR = np.array([1.0, 1.0, -1.0])


def _unit(v: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    n = np.linalg.norm(v, axis=-1)
    return v / np.maximum(n, 1e-12)[..., None], n


def _dot(a, b):
    return np.einsum("...i,...i->...", a, b)


def _perp(a, u):
    return a - _dot(a, u)[..., None] * u


def sensor_field(scene, wheel_index: int, theta: np.ndarray, s_axis: np.ndarray, u: np.ndarray,
                 r_axis: np.ndarray, distance_m: np.ndarray | None = None) -> np.ndarray:
    """Sensor field vector toward unit directions u (N, 3), relative to the bare peak; complex (N, 3).

    ``theta`` (N,) is the wheel angle of each link, rad. ``distance_m`` (N,) is the path length to
    the field point; the installed wheel pattern uses it for its near-field term (for the
    road-reflected ray: the image path length, i.e. the distance to the receiver's mirror point,
    which is exact for the image method)."""
    kind = scene.sensor_kind
    if kind == "dipole":
        return _perp(s_axis, u).astype(complex)
    if kind == "isotropic":
        ref = r_axis if scene.receiver_pattern == "dipole" else s_axis
        f, _ = _unit(_perp(ref, u))
        return f.astype(complex)
    # installed wheel pattern
    w = scene.wheels[wheel_index]
    table = scene.wheel_tables[wheel_index]
    from core.wheel_patterns import field_vectors

    return field_vectors(table, u, theta, w.outboard_sign, distance_m=distance_m) / np.sqrt(1.5)


#: shortest path length the link model evaluates, m: a receiver closer than this to the sensor is
#: held at this distance (such a spot lies inside the wheel and is flagged near field anyway)
MIN_PATH_M = 1e-3


@dataclass(frozen=True)
class LinkField:
    """The received field of N links, before the antenna gains and EIRP are applied.

    ``re``, ``im`` (N,): the coherent sum over the rays of c_ray 10^(-L_ray/20) / d_ray, phase
    referred to the direct ray, 1/m; ``floor2`` (N,): the null floor's power, f^2 times the sum over
    the rays of 10^(-L_ray/10) / d_ray^2 (1/m^2), f = 10^(null_floor_db/20); ``diffuse`` (N,): the
    diffuse power of the cavity inside the hull (core.cavity), added incoherently, same units.
    """

    re: np.ndarray
    im: np.ndarray
    floor2: np.ndarray
    diffuse: np.ndarray | float = 0.0
    fade_q: float = 0.0

    def coherent_power(self) -> np.ndarray:
        """|field|^2 of the rays held at the null floor, 1/m^2."""
        return np.maximum(self.re * self.re + self.im * self.im, self.floor2)

    def mean_power(self) -> np.ndarray:
        """The mean power: the coherent rays plus the mean diffuse cavity power (core.cavity), 1/m^2."""
        return self.coherent_power() + self.diffuse

    def power(self) -> np.ndarray:
        """The power the scores use: the level exceeded with probability 1 - fade_q when the diffuse
        part fades (:func:`fade_power`); the mean power when fade_q is 0 or there is no diffuse part."""
        return fade_power(self.coherent_power(), self.diffuse, self.fade_q)


_LN10 = math.log(10.0)


@lru_cache(maxsize=8)
def _fade_table(q: float) -> tuple[np.ndarray, np.ndarray, float]:
    """log10 K grid, log10 g(K) with g = x_q / (P_c + P_d) the Rician power's q-quantile, the
    Rayleigh value -ln(1 - q) and the standard normal q-quantile."""
    from scipy.special import chndtrix, ndtri  # chndtrix: the noncentral chi-square quantile (= scipy.stats.ncx2.ppf)

    lk = np.linspace(-6.0, 4.0, 1001)
    k = 10.0**lk
    g = 0.5 * chndtrix(q, 2, 2.0 * k) / (k + 1.0)
    return lk, np.log10(g), -math.log1p(-q), float(ndtri(q))


def fade_power(coherent: np.ndarray, diffuse, q: float) -> np.ndarray:
    """Power exceeded with probability 1 - q when a steady part ``coherent`` adds to a diffuse part
    of mean power ``diffuse`` that fades (a circular complex Gaussian field: Rayleigh amplitude;
    their sum is Rician with K = coherent / diffuse). q = 0: the mean power coherent + diffuse.

    The power X = |c + d|^2 with d ~ CN(0, P_d) is (P_d / 2) times a noncentral chi-square variable
    with 2 degrees of freedom and noncentrality 2 K, so x_q = (P_d / 2) F^-1(q; 2, 2K) (scipy
    special.chndtrix, tabulated over K once per q; Rayleigh: x_q = -ln(1 - q) P_d).

    References: S. O. Rice, "Mathematical analysis of random noise" (1944-45); the Rician model of
    a steady component in a diffuse field, e.g. Hill, Electromagnetic Fields in Cavities (2009),
    ch. 7 (from memory)."""
    total = coherent + diffuse
    if q <= 0.0 or np.all(np.asarray(diffuse) == 0.0):
        return total
    if kernels.available():  # the compiled table interpolation (core.link_kernel), same arithmetic
        from core import link_kernel

        return link_kernel.fade_power(coherent, diffuse, q, _fade_table(float(q)))
    lk_grid, g, _rayleigh, z_q = _fade_table(float(q))
    d = np.broadcast_to(np.asarray(diffuse, total.dtype), np.shape(total))
    out = np.array(total, copy=True)
    on = d > 0.0
    if not on.any():
        return out
    c, dd = np.broadcast_to(coherent, np.shape(total))[on], d[on]
    with np.errstate(divide="ignore"):
        lk = np.log10(c / dd)
    # log g interpolated linearly in log K on the table's uniform grid (within 0.001 dB of scipy's
    # quantile); below K = 1e-6 the Rayleigh value; above K = 1e4 the amplitude is nearly normal,
    # N(sqrt(P_c), P_d / 2), so g = (sqrt(K) + z_q / sqrt(2))^2 / (K + 1), z_q the normal q-quantile
    n = len(lk_grid) - 1
    x = (np.clip(lk, lk_grid[0], lk_grid[-1]) - lk_grid[0]) * (n / (lk_grid[-1] - lk_grid[0]))
    i = np.minimum(x.astype(np.intp), n - 1)
    f = x - i
    gk = np.exp((g[i] * (1.0 - f) + g[i + 1] * f) * _LN10)
    big = lk > lk_grid[-1]
    if big.any():
        kk = 10.0 ** np.minimum(lk[big], 300.0)
        gk[big] = (np.sqrt(kk) + z_q / math.sqrt(2.0)) ** 2 / (kk + 1.0)
    out[on] = (c + dd) * gk
    return out


def level_dbm(scene, power: np.ndarray) -> np.ndarray:
    """Received level, dBm, from the floored field power of :class:`LinkField` (1/m^2)."""
    lam = scene.wavelength_m
    return (scene.eirp_dbm + scene.receiver_gain_dbi + 20.0 * np.log10(lam / (4.0 * np.pi))
            + 10.0 * np.log10(np.maximum(power, 1e-60)))


def _wheel_groups(wheel_index, n: int) -> list[tuple[int, slice | np.ndarray]]:
    """(wheel, link selection) pairs for a wheel index given per link (N,) or once for all links."""
    if np.ndim(wheel_index) == 0:
        return [(int(wheel_index), slice(None))]
    wi = np.asarray(wheel_index)
    return [(int(k), np.flatnonzero(wi == k)) for k in np.unique(wi)]


def _sensor_fields(scene, groups, theta, s_axis, u, r_axis, dist) -> np.ndarray:
    """sensor_field over links of several wheels (the installed pattern is looked up per wheel)."""
    if scene.sensor_kind != "table" or len(groups) == 1:
        return sensor_field(scene, groups[0][0], theta, s_axis, u, r_axis, dist)
    out = np.empty(u.shape, complex)
    for wi, g in groups:
        out[g] = sensor_field(scene, wi, theta[g], s_axis[g], u[g], r_axis[g], dist[g])
    return out


def _wheel_losses(scene, groups, src, dst, detail: bool = False):
    """Knife-edge wheel loss (core.wheel.wheel_loss_db) over links of several wheels, dB; with
    ``detail`` its parts (core.wheel.WheelLossParts over all links)."""
    fn = wheel_loss_parts if detail else wheel_loss_db
    if len(groups) == 1:
        w = scene.wheels[groups[0][0]]
        return fn(w, src, dst, scene.freq_hz, scene.sidewall_loss_db, scene.tread_loss_db)
    if not detail:
        out = np.empty(len(src))
        for wi, g in groups:
            out[g] = wheel_loss_db(scene.wheels[wi], src[g], dst[g], scene.freq_hz, scene.sidewall_loss_db,
                                   scene.tread_loss_db)
        return out
    n = len(src)
    parts = {k: np.empty(n, dt) for k, dt in (("rim_db", float), ("rim_v", float), ("rim_shadowed", bool),
                                               ("through_tread", bool), ("tire_db", float))}
    for wi, g in groups:
        p = wheel_loss_parts(scene.wheels[wi], src[g], dst[g], scene.freq_hz, scene.sidewall_loss_db,
                             scene.tread_loss_db)
        for k, arr in parts.items():
            arr[g] = getattr(p, k)
    return WheelLossParts(**parts)


@dataclass(frozen=True)
class Ray:
    """One ray of N links: ``d`` (N,) path length, m (held at MIN_PATH_M); ``c`` (N,) complex
    pattern-and-polarization coupling of the sensor field with the receiver (relative to the bare
    sensor's peak); ``loss_db`` (N,) the ray's wheel loss (knife-edge model) plus body loss, dB."""

    d: np.ndarray
    c: np.ndarray
    loss_db: np.ndarray


@dataclass(frozen=True)
class RayDetail:
    """What a ray's terms are made of (``link_rays(..., detail=True)``), for the link budget by term
    (core.budget) and the sensitivity analysis (core.sensitivity). Arrays over the N links.

    e : (N, 3) complex sensor field toward the ray (direct ray: toward the receiver; road ray: toward
        the road point), relative to the bare sensor's peak (core.links.sensor_field)
    u : (N, 3) unit direction the ray leaves the sensor in
    body : core.geometry.BodyTerms per leg (one for the direct ray; sensor -> road point and
        receiver -> road point for the road ray)
    body_db : (N,) the ray's body loss, dB; wheel : core.wheel.WheelLossParts (knife-edge model) or None
    bare_c : (N,) complex, the coupling the bare sensor (short dipole, no wheel) would give on this ray
        (direct ray only; None on the road ray)
    Road ray only: point (N, 3) the road point, m; grazing (N,) rad; n_te, t_tm (N, 3) the TE unit
    vector and the reflected TM unit vector; e_te, e_tm (N,) complex, the incident field's TE and TM
    components; gamma_te, gamma_tm (N,) complex Fresnel coefficients (core.propagation.fresnel_reflection).
    """

    e: np.ndarray
    u: np.ndarray
    body: tuple
    body_db: np.ndarray
    wheel: object = None
    bare_c: np.ndarray | None = None
    point: np.ndarray | None = None
    grazing: np.ndarray | None = None
    n_te: np.ndarray | None = None
    t_tm: np.ndarray | None = None
    e_te: np.ndarray | None = None
    e_tm: np.ndarray | None = None
    gamma_te: np.ndarray | None = None
    gamma_tm: np.ndarray | None = None


@dataclass(frozen=True)
class LinkRays:
    """The rays of N links before they are summed: the direct ray, the road ray (or None) and its
    phase lag behind the direct ray, rad; ``floor_ratio`` = f^2 of the null floor. :meth:`field` is
    the one place where the rays become the received field (:class:`LinkField`)."""

    direct: Ray
    road: Ray | None
    phase: np.ndarray | None
    floor_ratio: float
    direct_detail: RayDetail | None = None
    road_detail: RayDetail | None = None

    def field(self) -> LinkField:
        """The coherent ray sum relative to the direct ray's phase and the null floor's power."""
        dr = self.direct
        # The ray sum in real arithmetic, relative to the direct ray's phase e^{-jkd} (which drops out
        # of the magnitude): field = c_d g_d + c_r g_r e^{-jk (d_r - d)}, g = 10^(-L/20) / d.
        g_d = 10.0 ** (-dr.loss_db / 20.0) / dr.d
        field_re = dr.c.real * g_d
        field_im = dr.c.imag * g_d
        floor2 = g_d * g_d
        if self.road is not None:
            rr = self.road
            g_r = 10.0 ** (-rr.loss_db / 20.0) / rr.d
            b = rr.c * g_r
            cos, sin = np.cos(self.phase), np.sin(self.phase)
            field_re = field_re + (b.real * cos + b.imag * sin)  # b e^{-j phase}
            field_im = field_im + (b.imag * cos - b.real * sin)
            floor2 = floor2 + g_r * g_r
        return LinkField(field_re, field_im, self.floor_ratio * floor2)


def link_field(scene, wheel_index, theta: np.ndarray, src: np.ndarray, s_axis: np.ndarray,
               bits0: np.ndarray, dst: np.ndarray, r_axis: np.ndarray,
               spot_bits: np.ndarray | None = None, diffuse_factor: np.ndarray | None = None) -> LinkField:
    """The received field of N links (arrays of N links).

    wheel_index : the wheel whose sensor sends, an int for all links or (N,) per link (the body
    loss, most of the work, is then computed for the links of every wheel at once);
    theta : (N,) wheel angle, rad; src, s_axis : (N, 3) sensor position (m) and unit antenna axis;
    bits0 : (N,) the sensor positions' hull membership bits (core.geometry.start_bits); dst, r_axis :
    (N, 3) receiver position (m) and unit antenna axis; spot_bits : (N,) the receivers' membership
    bits (computed when None and the road ray is on); diffuse_factor : (N,) the receivers' diffuse
    factor (core.cavity.spot_factor; computed when None and the scene has a cavity).

    Inside the hull the diffuse level of the cavity fed through the openings (core.cavity) is
    added to the power of the coherent rays.

    Null floor: exact nulls are not physical (antennas have finite cross-polar discrimination, and
    the road's roughness and the surroundings scatter some power into a two-ray null), so the
    received power is held at or above the null floor f^2 times the incoherent, polarization-matched
    sum of the rays' powers. With one ray this is the pattern-and-polarization floor
    max(|c|, f) of the design; with the road ray it also bounds the two-ray nulls. The depth f is
    the radio setup's ``null_floor_db`` (engineering default -30 dB).
    """
    if kernels.available():  # the compiled link field unless WHEELREACH_KERNEL=numpy or no numba
        from core import link_kernel

        return link_kernel.link_field(scene, wheel_index, theta, src, s_axis, bits0, dst, r_axis, spot_bits,
                                      diffuse_factor)
    return link_field_numpy(scene, wheel_index, theta, src, s_axis, bits0, dst, r_axis, spot_bits, diffuse_factor)


def link_field_numpy(scene, wheel_index, theta: np.ndarray, src: np.ndarray, s_axis: np.ndarray,
                     bits0: np.ndarray, dst: np.ndarray, r_axis: np.ndarray,
                     spot_bits: np.ndarray | None = None, diffuse_factor: np.ndarray | None = None) -> LinkField:
    """:func:`link_field` on the pure-numpy path: the reference core.link_kernel is checked against."""
    f = link_rays(scene, wheel_index, theta, src, s_axis, bits0, dst, r_axis, spot_bits).field()
    return with_cavity(scene, f, wheel_index, theta, dst, r_axis, diffuse_factor)


def with_cavity(scene, f: LinkField, wheel_index, theta: np.ndarray, dst: np.ndarray, r_axis: np.ndarray,
                diffuse_factor: np.ndarray | None = None) -> LinkField:
    """The coherent field ``f`` of N links with the scene's cavity term: the diffuse power of the cabin fed
    through its openings (core.cavity) at the receivers ``dst`` (N, 3) with axes ``r_axis`` (N, 3), and the
    scene's fade probability. The one place where the diffuse part joins the rays."""
    if getattr(scene, "cavity", None) is None:
        return LinkField(f.re, f.im, f.floor2, 0.0, getattr(scene, "fade_probability", 0.0))
    from core.cavity import spot_factor

    if diffuse_factor is None:
        diffuse_factor = spot_factor(scene, dst, r_axis)
    wheel = np.broadcast_to(np.asarray(wheel_index), np.shape(theta))
    diffuse = scene.cavity.input_at(wheel, theta) * diffuse_factor
    return LinkField(f.re, f.im, f.floor2, diffuse, scene.fade_probability)


def link_rays(scene, wheel_index, theta: np.ndarray, src: np.ndarray, s_axis: np.ndarray,
              bits0: np.ndarray, dst: np.ndarray, r_axis: np.ndarray,
              spot_bits: np.ndarray | None = None, detail: bool = False) -> LinkRays:
    """The rays of N links (arguments as :func:`link_field`, which sums them); with ``detail`` every
    intermediate value of each ray as well (:class:`RayDetail`: panels crossed, wheel parts, fields,
    Fresnel coefficients), computed by the same code, so a budget built from them is the engine's."""
    groups = _wheel_groups(wheel_index, len(src))
    body = body_loss_terms if detail else body_loss_db

    def body_of(a, b, bits):
        res = body(scene.hull, a, b, scene.freq_hz, bits)
        return (res.total_db, res) if detail else (res, None)

    # direct ray
    u, d = _unit(dst - src)
    d = np.maximum(d, MIN_PATH_M)
    e_d = _sensor_fields(scene, groups, theta, s_axis, u, r_axis, d)
    body_d, terms_d = body_of(src, dst, bits0)
    loss_d = body_d
    wheel_d = None
    if scene.use_wheel_loss:
        wheel_d = _wheel_losses(scene, groups, src, dst, detail)
        loss_d = loss_d + (wheel_d.total_db if detail else wheel_d)
    if scene.receiver_pattern == "dipole":
        c_d = _dot(e_d, r_axis)
    else:
        norm_d = np.linalg.norm(e_d, axis=-1)
        ref = e_d / np.maximum(norm_d, 1e-12)[:, None]  # the direct ray's polarization
        c_d = norm_d.astype(complex)
    direct = Ray(d, c_d, loss_d)
    direct_detail = None
    if detail:
        bare = _perp(s_axis, u)
        bare_c = _dot(bare, r_axis) if scene.receiver_pattern == "dipole" else np.linalg.norm(bare, axis=-1)
        if scene.sensor_kind != "table":
            bare_c = c_d
        direct_detail = RayDetail(e=e_d, u=u, body=(terms_d,), body_db=body_d, wheel=wheel_d,
                                  bare_c=np.asarray(bare_c, complex))
    if not scene.ground_reflection:
        return LinkRays(direct, None, None, 10.0 ** (scene.null_floor_db / 10.0), direct_detail)

    img = src * _MIRROR
    u_r, d_r = _unit(dst - img)
    d_r = np.maximum(d_r, MIN_PATH_M)
    u_i = u_r * _MIRROR  # direction leaving the sensor toward the road
    tg = src[:, 2] / np.maximum(src[:, 2] + dst[:, 2], 1e-9)
    g_pt = img + tg[:, None] * (dst - img)
    g_pt[:, 2] = 0.0
    e_i = _sensor_fields(scene, groups, theta, s_axis, u_i, r_axis, d_r)
    n_te, n_len = _unit(np.cross(_Z, u_i))
    vertical = n_len < 1e-9
    if vertical.any():
        n_te[vertical] = np.array([0.0, 1.0, 0.0])
    t_i = np.cross(n_te, u_i)
    grazing = np.arcsin(np.clip(u_r[:, 2], 0.0, 1.0))
    g_perp, g_par = fresnel_reflection(scene.road_eps, grazing)
    e_te, e_tm = _dot(e_i, n_te), _dot(e_i, t_i)
    t_tm = t_i * _MIRROR
    e_r = (g_perp * e_te)[:, None] * n_te - (g_par * e_tm)[:, None] * t_tm
    body_r1, terms_r1 = body_of(src, g_pt, bits0)
    # the road point -> receiver leg, traced from the receiver end (same panels and passages),
    # so the start membership is the spot's, shared by every angle
    if spot_bits is None:
        spot_bits = start_bits(scene.hull, dst[:, 0], dst[:, 1], dst[:, 2])
    body_r2, terms_r2 = body_of(dst, g_pt, spot_bits)
    body_r = body_r1 + body_r2
    loss_r = body_r
    wheel_r = None
    if scene.use_wheel_loss:
        wheel_r = _wheel_losses(scene, groups, src, g_pt, detail)
        loss_r = loss_r + (wheel_r.total_db if detail else wheel_r)
    if scene.receiver_pattern == "dipole":
        c_r = _dot(e_r, r_axis)
    else:
        c_r = _dot(e_r, np.conj(ref))
    phase = scene.wavenumber * (d_r - d)  # the reflected ray's lag behind the direct ray, rad
    road_detail = None
    if detail:
        road_detail = RayDetail(e=e_i, u=u_i, body=(terms_r1, terms_r2), body_db=body_r, wheel=wheel_r,
                                point=g_pt, grazing=grazing, n_te=n_te, t_tm=t_tm, e_te=e_te, e_tm=e_tm,
                                gamma_te=np.broadcast_to(g_perp, grazing.shape),
                                gamma_tm=np.broadcast_to(g_par, grazing.shape))
    return LinkRays(direct, Ray(d_r, c_r, loss_r), phase, 10.0 ** (scene.null_floor_db / 10.0), direct_detail,
                    road_detail)


def sensor_states(scene, wheel_index: np.ndarray, theta: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Sensor positions (N, 3) m, unit antenna axes (N, 3) and hull membership bits (N,) of wheels
    ``wheel_index`` (N,) at wheel angles ``theta`` (N,) rad (core.wheel.sensor_positions / sensor_axes)."""
    th = np.asarray(theta, float).reshape(-1)
    wheel = np.asarray(wheel_index).reshape(-1)
    src = np.empty((len(th), 3))
    for wi, w in enumerate(scene.wheels):
        g = wheel == wi
        if g.any():
            src[g] = sensor_positions(w, th[g])
    axes = sensor_axes(th, scene.vehicle.radio.sensor.axis)
    return src, axes, start_bits(scene.hull, src[:, 0], src[:, 1], src[:, 2])


def turn_field(scene, wheel_index: int, spots: np.ndarray, axes: np.ndarray,
               spot_bits: np.ndarray | None = None, spot_diffuse: np.ndarray | None = None) -> LinkField:
    """The received field for spots (S, 3) with receiver axes (S, 3) from one wheel at the scene's
    sampled angles; arrays (S, A)."""
    S = len(spots)
    A = len(scene.angles_rad)
    src = np.broadcast_to(scene.sensor_pos[wheel_index][None, :, :], (S, A, 3)).reshape(-1, 3)
    s_axis = np.broadcast_to(scene.sensor_axis[wheel_index][None, :, :], (S, A, 3)).reshape(-1, 3)
    dst = np.broadcast_to(spots[:, None, :], (S, A, 3)).reshape(-1, 3)
    r_axis = np.broadcast_to(axes[:, None, :], (S, A, 3)).reshape(-1, 3)
    theta = np.broadcast_to(scene.angles_rad[None, :], (S, A)).reshape(-1)
    bits0 = np.broadcast_to(scene.sensor_bits[wheel_index][None, :], (S, A)).reshape(-1)
    bits_p = None
    if scene.ground_reflection:
        if spot_bits is None:
            spot_bits = start_bits(scene.hull, spots[:, 0], spots[:, 1], spots[:, 2])
        bits_p = np.broadcast_to(spot_bits[:, None], (S, A)).reshape(-1)
    dif = None
    if getattr(scene, "cavity", None) is not None:
        if spot_diffuse is None:
            from core.cavity import spot_factor

            spot_diffuse = spot_factor(scene, spots, axes)
        dif = np.broadcast_to(spot_diffuse[:, None], (S, A)).reshape(-1)
    f = link_field(scene, wheel_index, theta, src, s_axis, bits0, dst, r_axis, bits_p, dif)
    return LinkField(f.re.reshape(S, A), f.im.reshape(S, A), f.floor2.reshape(S, A), np.reshape(f.diffuse, (S, A))
                     if np.ndim(f.diffuse) else f.diffuse, f.fade_q)


def turn_fields(scene, spots: np.ndarray, axes: np.ndarray, spot_bits: np.ndarray | None = None,
                spot_diffuse: np.ndarray | None = None) -> LinkField:
    """:func:`turn_field` of every wheel in one call of :func:`link_field` (per-link wheel index): arrays
    (S, W, A). The same link-by-link arithmetic, fewer and larger calls (the compiled kernel runs one
    parallel loop over them)."""
    if kernels.available():
        from core import link_kernel

        return link_kernel.turn_fields(scene, spots, axes, spot_bits, spot_diffuse)
    S, W, A = len(spots), len(scene.wheels), len(scene.angles_rad)
    shape = (S, W, A)
    src = np.broadcast_to(scene.sensor_pos[None], (S, W, A, 3)).reshape(-1, 3)
    s_axis = np.broadcast_to(scene.sensor_axis[None], (S, W, A, 3)).reshape(-1, 3)
    dst = np.broadcast_to(spots[:, None, None, :], (S, W, A, 3)).reshape(-1, 3)
    r_axis = np.broadcast_to(axes[:, None, None, :], (S, W, A, 3)).reshape(-1, 3)
    theta = np.broadcast_to(scene.angles_rad[None, None, :], shape).reshape(-1)
    wheel = np.broadcast_to(np.arange(W)[None, :, None], shape).reshape(-1)
    bits0 = np.broadcast_to(scene.sensor_bits[None], shape).reshape(-1)
    bits_p = None
    if scene.ground_reflection:
        if spot_bits is None:
            spot_bits = start_bits(scene.hull, spots[:, 0], spots[:, 1], spots[:, 2])
        bits_p = np.broadcast_to(spot_bits[:, None, None], shape).reshape(-1)
    dif = None
    if getattr(scene, "cavity", None) is not None:
        if spot_diffuse is None:
            from core.cavity import spot_factor

            spot_diffuse = spot_factor(scene, spots, axes)
        dif = np.broadcast_to(spot_diffuse[:, None, None], shape).reshape(-1)
    f = link_field(scene, wheel, theta, src, s_axis, bits0, dst, r_axis, bits_p, dif)
    return LinkField(f.re.reshape(shape), f.im.reshape(shape), f.floor2.reshape(shape),
                     np.reshape(f.diffuse, shape) if np.ndim(f.diffuse) else f.diffuse, f.fade_q)


def link_levels_for_wheel(scene, wheel_index: int, spots: np.ndarray, axes: np.ndarray,
                          spot_bits: np.ndarray | None = None) -> np.ndarray:
    """Received level, dBm, for spots (S, 3) with receiver axes (S, 3) from one wheel: (S, A)."""
    return level_dbm(scene, turn_field(scene, wheel_index, spots, axes, spot_bits).power())

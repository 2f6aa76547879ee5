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

from core.geometry import body_loss_db, start_bits
from core.propagation import fresnel_reflection
from core.wheel import wheel_loss_db

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


@lru_cache(maxsize=8)
def _fade_table(q: float) -> tuple[np.ndarray, np.ndarray, float]:
    """log10 K grid, log10 g(K) with g = x_q / (P_c + P_d) the Rician power's q-quantile, the
    Rayleigh value -ln(1 - q) and the standard normal q-quantile."""
    from scipy.special import ndtri
    from scipy.stats import ncx2

    lk = np.linspace(-6.0, 4.0, 1001)
    k = 10.0**lk
    g = 0.5 * ncx2.ppf(q, 2, 2.0 * k) / (k + 1.0)
    return lk, np.log10(g), -math.log1p(-q), float(ndtri(q))


def fade_power(coherent: np.ndarray, diffuse, q: float) -> np.ndarray:
    """Power exceeded with probability 1 - q when a steady part ``coherent`` adds to a diffuse part
    of mean power ``diffuse`` that fades (a circular complex Gaussian field: Rayleigh amplitude;
    their sum is Rician with K = coherent / diffuse). q = 0: the mean power coherent + diffuse.

    The power X = |c + d|^2 with d ~ CN(0, P_d) is (P_d / 2) times a noncentral chi-square variable
    with 2 degrees of freedom and noncentrality 2 K, so x_q = (P_d / 2) F^-1(q; 2, 2K) (scipy
    ncx2.ppf, tabulated over K once per q; Rayleigh: x_q = -ln(1 - q) P_d).

    References: S. O. Rice, "Mathematical analysis of random noise" (1944-45); the Rician model of
    a steady component in a diffuse field, e.g. Hill, Electromagnetic Fields in Cavities (2009),
    ch. 7 (from memory)."""
    total = coherent + diffuse
    if q <= 0.0 or np.all(np.asarray(diffuse) == 0.0):
        return total
    lk_grid, g, _rayleigh, z_q = _fade_table(float(q))
    d = np.broadcast_to(np.asarray(diffuse, float), np.shape(total))
    with np.errstate(divide="ignore", invalid="ignore"):
        lk = np.log10(coherent / d)
    # log g interpolated in log K (within 0.001 dB of scipy's quantile); below K = 1e-6 the Rayleigh
    # value; above K = 1e4 the amplitude is nearly normal, N(sqrt(P_c), P_d / 2), so
    # g = (sqrt(K) + z_q / sqrt(2))^2 / (K + 1) with z_q the standard normal q-quantile
    gk = 10.0 ** np.interp(lk, lk_grid, g, left=g[0], right=g[-1])
    with np.errstate(invalid="ignore", over="ignore"):
        kk = 10.0 ** np.minimum(lk, 300.0)
        g_big = (np.sqrt(kk) + z_q / math.sqrt(2.0)) ** 2 / (kk + 1.0)
    gk = np.where(lk > lk_grid[-1], g_big, gk)
    return np.where(d > 0.0, total * gk, total)


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


def _wheel_losses(scene, groups, src, dst) -> np.ndarray:
    """Knife-edge wheel loss (core.wheel.wheel_loss_db) over links of several wheels, dB."""
    if len(groups) == 1:
        w = scene.wheels[groups[0][0]]
        return wheel_loss_db(w, src, dst, scene.freq_hz, scene.sidewall_loss_db, scene.tread_loss_db)
    out = np.empty(len(src))
    for wi, g in groups:
        out[g] = wheel_loss_db(scene.wheels[wi], src[g], dst[g], scene.freq_hz, scene.sidewall_loss_db,
                               scene.tread_loss_db)
    return out


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
    groups = _wheel_groups(wheel_index, len(src))
    floor2_amp = 10.0 ** (scene.null_floor_db / 10.0)

    # direct ray
    u, d = _unit(dst - src)
    d = np.maximum(d, MIN_PATH_M)
    e_d = _sensor_fields(scene, groups, theta, s_axis, u, r_axis, d)
    loss_d = body_loss_db(scene.hull, src, dst, scene.freq_hz, bits0)
    if scene.use_wheel_loss:
        loss_d = loss_d + _wheel_losses(scene, groups, src, dst)
    if scene.receiver_pattern == "dipole":
        c_d = _dot(e_d, r_axis)
    else:
        norm_d = np.linalg.norm(e_d, axis=-1)
        ref = e_d / np.maximum(norm_d, 1e-12)[:, None]  # the direct ray's polarization
        c_d = norm_d.astype(complex)
    # The ray sum in real arithmetic, relative to the direct ray's phase e^{-jkd} (which drops out
    # of the magnitude): field = c_d g_d + c_r g_r e^{-jk (d_r - d)}, g = 10^(-L/20) / d.
    g_d = 10.0 ** (-loss_d / 20.0) / d
    field_re = c_d.real * g_d
    field_im = c_d.imag * g_d
    floor2 = g_d * g_d

    if scene.ground_reflection:
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
        e_r = (g_perp * _dot(e_i, n_te))[:, None] * n_te - (g_par * _dot(e_i, t_i))[:, None] * (t_i * _MIRROR)
        loss_r = body_loss_db(scene.hull, src, g_pt, scene.freq_hz, bits0)
        # the road point -> receiver leg, traced from the receiver end (same panels and passages),
        # so the start membership is the spot's, shared by every angle
        if spot_bits is None:
            spot_bits = start_bits(scene.hull, dst[:, 0], dst[:, 1], dst[:, 2])
        loss_r = loss_r + body_loss_db(scene.hull, dst, g_pt, scene.freq_hz, spot_bits)
        if scene.use_wheel_loss:
            loss_r = loss_r + _wheel_losses(scene, groups, src, g_pt)
        if scene.receiver_pattern == "dipole":
            c_r = _dot(e_r, r_axis)
        else:
            c_r = _dot(e_r, np.conj(ref))
        g_r = 10.0 ** (-loss_r / 20.0) / d_r
        b = c_r * g_r
        phase = scene.wavenumber * (d_r - d)  # the reflected ray's lag behind the direct ray, rad
        cos, sin = np.cos(phase), np.sin(phase)
        field_re = field_re + (b.real * cos + b.imag * sin)  # b e^{-j phase}
        field_im = field_im + (b.imag * cos - b.real * sin)
        floor2 = floor2 + g_r * g_r

    diffuse = 0.0
    if getattr(scene, "cavity", None) is not None:
        from core.cavity import spot_factor

        if diffuse_factor is None:
            diffuse_factor = spot_factor(scene, dst, r_axis)
        wheel = np.broadcast_to(np.asarray(wheel_index), np.shape(theta))
        diffuse = scene.cavity.input_at(wheel, theta) * diffuse_factor
    return LinkField(field_re, field_im, floor2_amp * floor2, diffuse, getattr(scene, "fade_probability", 0.0))


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


def link_levels_for_wheel(scene, wheel_index: int, spots: np.ndarray, axes: np.ndarray,
                          spot_bits: np.ndarray | None = None) -> np.ndarray:
    """Received level, dBm, for spots (S, 3) with receiver axes (S, 3) from one wheel: (S, A)."""
    return level_dbm(scene, turn_field(scene, wheel_index, spots, axes, spot_bits).power())

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

from dataclasses import dataclass

import numpy as np

from core.geometry import body_loss_db, start_bits
from core.propagation import fresnel_reflection
from core.wheel import wheel_loss_parts as _wheel_parts

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
    the rays of 10^(-L_ray/10) / d_ray^2 (1/m^2), f = 10^(null_floor_db/20).
    """

    re: np.ndarray
    im: np.ndarray
    floor2: np.ndarray

    def power(self) -> np.ndarray:
        """|field|^2 held at the null floor, 1/m^2."""
        return np.maximum(self.re * self.re + self.im * self.im, self.floor2)


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
    rim_db, tread = wheel_loss_parts(scene, groups, src, dst)
    return rim_db + np.where(tread, scene.tread_loss_db, scene.sidewall_loss_db)


def wheel_loss_parts(scene, groups, src, dst) -> tuple[np.ndarray, np.ndarray]:
    """core.wheel.wheel_loss_parts over links of several wheels: rim knife-edge loss (dB), leaves through the tread."""
    if len(groups) == 1:
        return _wheel_parts(scene.wheels[groups[0][0]], src, dst, scene.freq_hz)
    rim_db = np.empty(len(src))
    tread = np.empty(len(src), bool)
    for wi, g in groups:
        rim_db[g], tread[g] = _wheel_parts(scene.wheels[wi], src[g], dst[g], scene.freq_hz)
    return rim_db, tread


@dataclass(frozen=True)
class Rays:
    """The rays of N links before any loss: geometry, antenna coupling and the road's reflection.

    ``c_d`` (N,) complex: the direct ray's pattern-and-polarization coupling; ``d`` (N,): its length, m.
    With the road ray (``road`` True): ``c_r`` the reflected ray's coupling (Fresnel coefficients
    included), ``d_r`` its image path length (m), ``cos_phase``, ``sin_phase`` of its lag behind the
    direct ray k (d_r - d), and ``g_pt`` (N, 3) the road point. The legs whose body loss each ray
    takes: direct ``src -> dst`` (start bits ``bits0``), reflected ``src -> g_pt`` (``bits0``) and
    ``dst -> g_pt`` (``spot_bits``). ``groups``: (wheel, link selection) pairs.
    """

    groups: list
    src: np.ndarray
    dst: np.ndarray
    bits0: np.ndarray
    c_d: np.ndarray
    d: np.ndarray
    road: bool = False
    spot_bits: np.ndarray | None = None
    g_pt: np.ndarray | None = None
    c_r: np.ndarray | None = None
    d_r: np.ndarray | None = None
    cos_phase: np.ndarray | None = None
    sin_phase: np.ndarray | None = None


def link_rays(scene, wheel_index, theta: np.ndarray, src: np.ndarray, s_axis: np.ndarray,
              bits0: np.ndarray, dst: np.ndarray, r_axis: np.ndarray,
              spot_bits: np.ndarray | None = None) -> Rays:
    """The rays of N links (arguments as :func:`link_field`), without their losses."""
    groups = _wheel_groups(wheel_index, len(src))
    # direct ray
    u, d = _unit(dst - src)
    d = np.maximum(d, MIN_PATH_M)
    e_d = _sensor_fields(scene, groups, theta, s_axis, u, r_axis, d)
    if scene.receiver_pattern == "dipole":
        c_d = _dot(e_d, r_axis)
    else:
        norm_d = np.linalg.norm(e_d, axis=-1)
        ref = e_d / np.maximum(norm_d, 1e-12)[:, None]  # the direct ray's polarization
        c_d = norm_d.astype(complex)
    if not scene.ground_reflection:
        return Rays(groups, src, dst, bits0, c_d, d)
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
    # the road point -> receiver leg is traced from the receiver end (same panels and passages),
    # so its start membership is the spot's, shared by every angle
    if spot_bits is None:
        spot_bits = start_bits(scene.hull, dst[:, 0], dst[:, 1], dst[:, 2])
    if scene.receiver_pattern == "dipole":
        c_r = _dot(e_r, r_axis)
    else:
        c_r = _dot(e_r, np.conj(ref))
    phase = scene.wavenumber * (d_r - d)  # the reflected ray's lag behind the direct ray, rad
    return Rays(groups, src, dst, bits0, c_d, d, True, spot_bits, g_pt, c_r, d_r, np.cos(phase), np.sin(phase))


def ray_losses(scene, rays: Rays) -> tuple[np.ndarray, np.ndarray | None]:
    """Losses of the direct and the road ray (None without it), dB: body loss of their legs
    (core.geometry.body_loss_db) plus, for the knife-edge wheel, the wheel loss."""
    loss_d = body_loss_db(scene.hull, rays.src, rays.dst, scene.freq_hz, rays.bits0)
    if scene.use_wheel_loss:
        loss_d = loss_d + _wheel_losses(scene, rays.groups, rays.src, rays.dst)
    if not rays.road:
        return loss_d, None
    loss_r = body_loss_db(scene.hull, rays.src, rays.g_pt, scene.freq_hz, rays.bits0)
    loss_r = loss_r + body_loss_db(scene.hull, rays.dst, rays.g_pt, scene.freq_hz, rays.spot_bits)
    if scene.use_wheel_loss:
        loss_r = loss_r + _wheel_losses(scene, rays.groups, rays.src, rays.g_pt)
    return loss_d, loss_r


def combine_rays(rays: Rays, loss_d: np.ndarray, loss_r: np.ndarray | None, null_floor_db: float) -> LinkField:
    """The received field of the rays with their losses (dB) and the null floor (dB, see :func:`link_field`)."""
    floor2_amp = 10.0 ** (null_floor_db / 10.0)
    # The ray sum in real arithmetic, relative to the direct ray's phase e^{-jkd} (which drops out
    # of the magnitude): field = c_d g_d + c_r g_r e^{-jk (d_r - d)}, g = 10^(-L/20) / d.
    c_d = rays.c_d
    g_d = 10.0 ** (-loss_d / 20.0) / rays.d
    field_re = c_d.real * g_d
    field_im = c_d.imag * g_d
    floor2 = g_d * g_d
    if rays.road:
        g_r = 10.0 ** (-loss_r / 20.0) / rays.d_r
        b = rays.c_r * g_r
        cos, sin = rays.cos_phase, rays.sin_phase
        field_re = field_re + (b.real * cos + b.imag * sin)  # b e^{-j phase}
        field_im = field_im + (b.imag * cos - b.real * sin)
        floor2 = floor2 + g_r * g_r
    return LinkField(field_re, field_im, floor2_amp * floor2)


def link_field(scene, wheel_index, theta: np.ndarray, src: np.ndarray, s_axis: np.ndarray,
               bits0: np.ndarray, dst: np.ndarray, r_axis: np.ndarray,
               spot_bits: np.ndarray | None = None) -> LinkField:
    """The received field of N links (arrays of N links).

    wheel_index : the wheel whose sensor sends, an int for all links or (N,) per link (the body
    loss, most of the work, is then computed for the links of every wheel at once);
    theta : (N,) wheel angle, rad; src, s_axis : (N, 3) sensor position (m) and unit antenna axis;
    bits0 : (N,) the sensor positions' hull membership bits (core.geometry.start_bits); dst, r_axis :
    (N, 3) receiver position (m) and unit antenna axis; spot_bits : (N,) the receivers' membership
    bits (computed when None and the road ray is on).

    Null floor: exact nulls are not physical (antennas have finite cross-polar discrimination, and
    the road's roughness and the surroundings scatter some power into a two-ray null), so the
    received power is held at or above the null floor f^2 times the incoherent, polarization-matched
    sum of the rays' powers. With one ray this is the pattern-and-polarization floor
    max(|c|, f) of the design; with the road ray it also bounds the two-ray nulls. The depth f is
    the radio setup's ``null_floor_db`` (engineering default -30 dB).

    The work is split in three (:func:`link_rays`, :func:`ray_losses`, :func:`combine_rays`) so that a
    caller varying only losses, EIRP or the null floor (core.link_terms) traces the rays once.
    """
    rays = link_rays(scene, wheel_index, theta, src, s_axis, bits0, dst, r_axis, spot_bits)
    loss_d, loss_r = ray_losses(scene, rays)
    return combine_rays(rays, loss_d, loss_r, scene.null_floor_db)


def turn_field(scene, wheel_index: int, spots: np.ndarray, axes: np.ndarray,
               spot_bits: np.ndarray | None = None) -> LinkField:
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
    f = link_field(scene, wheel_index, theta, src, s_axis, bits0, dst, r_axis, bits_p)
    return LinkField(f.re.reshape(S, A), f.im.reshape(S, A), f.floor2.reshape(S, A))


def link_levels_for_wheel(scene, wheel_index: int, spots: np.ndarray, axes: np.ndarray,
                          spot_bits: np.ndarray | None = None) -> np.ndarray:
    """Received level, dBm, for spots (S, 3) with receiver axes (S, 3) from one wheel: (S, A)."""
    return level_dbm(scene, turn_field(scene, wheel_index, spots, axes, spot_bits).power())

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


def sensor_field(scene, wheel_index: int, theta_idx: np.ndarray, s_axis: np.ndarray, u: np.ndarray,
                 r_axis: np.ndarray, distance_m: np.ndarray | None = None) -> np.ndarray:
    """Sensor field vector toward unit directions u (N, 3), relative to the bare peak; complex (N, 3).

    ``distance_m`` (N,) is the path length to the field point; the installed wheel pattern uses it
    for its near-field term (for the road-reflected ray: the image path length, i.e. the distance to
    the receiver's mirror point, which is exact for the image method)."""
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

    th = scene.angles_rad[theta_idx]
    return field_vectors(table, u, th, w.outboard_sign, distance_m=distance_m) / np.sqrt(1.5)


def _floor(c: np.ndarray, floor_amp: float) -> np.ndarray:
    mag = np.abs(c)
    phase = np.where(mag > 0, c / np.maximum(mag, 1e-300), 1.0)
    return phase * np.maximum(mag, floor_amp)


def link_levels_for_wheel(scene, wheel_index: int, spots: np.ndarray, axes: np.ndarray,
                          spot_bits: np.ndarray | None = None) -> np.ndarray:
    """Received level, dBm, for spots (S, 3) with receiver axes (S, 3) from one wheel: (S, A)."""
    S = len(spots)
    A = len(scene.angles_rad)
    w = scene.wheels[wheel_index]
    src_all = scene.sensor_pos[wheel_index]  # (A, 3)
    s_axis_all = scene.sensor_axis[wheel_index]
    src = np.broadcast_to(src_all[None, :, :], (S, A, 3)).reshape(-1, 3)
    s_axis = np.broadcast_to(s_axis_all[None, :, :], (S, A, 3)).reshape(-1, 3)
    dst = np.broadcast_to(spots[:, None, :], (S, A, 3)).reshape(-1, 3)
    r_axis = np.broadcast_to(axes[:, None, :], (S, A, 3)).reshape(-1, 3)
    theta_idx = np.broadcast_to(np.arange(A)[None, :], (S, A)).reshape(-1)
    bits0 = np.broadcast_to(scene.sensor_bits[wheel_index][None, :], (S, A)).reshape(-1)
    lam = scene.wavelength_m
    k = 2.0 * np.pi / lam
    floor_amp = 10.0 ** (scene.null_floor_db / 20.0)

    # direct ray
    u, d = _unit(dst - src)
    e_d = sensor_field(scene, wheel_index, theta_idx, s_axis, u, r_axis, d)
    loss_d = body_loss_db(scene.hull, src, dst, scene.freq_hz, bits0)
    if scene.use_wheel_loss:
        loss_d = loss_d + wheel_loss_db(w, src, dst, scene.freq_hz, scene.sidewall_loss_db, scene.tread_loss_db)
    if scene.receiver_pattern == "dipole":
        c_d = _dot(e_d, r_axis)
    else:
        norm_d = np.linalg.norm(e_d, axis=-1)
        ref = e_d / np.maximum(norm_d, 1e-12)[:, None]  # the direct ray's polarization
        c_d = norm_d.astype(complex)
    c_d = _floor(c_d, floor_amp)
    # The ray sum in real arithmetic, relative to the direct ray's phase e^{-jkd} (which drops out
    # of the magnitude): field = c_d g_d + c_r g_r e^{-jk (d_r - d)}, g = 10^(-L/20) / d.
    g_d = 10.0 ** (-loss_d / 20.0) / d
    field_re = c_d.real * g_d
    field_im = c_d.imag * g_d

    if scene.ground_reflection:
        img = src * _MIRROR
        u_r, d_r = _unit(dst - img)
        u_i = u_r * _MIRROR  # direction leaving the sensor toward the road
        tg = src[:, 2] / np.maximum(src[:, 2] + dst[:, 2], 1e-9)
        g_pt = img + tg[:, None] * (dst - img)
        g_pt[:, 2] = 0.0
        e_i = sensor_field(scene, wheel_index, theta_idx, s_axis, u_i, r_axis, d_r)
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
        if spot_bits is None:  # hull membership of the spots (core.geometry.start_bits), shared by all wheels
            spot_bits = start_bits(scene.hull, spots[:, 0], spots[:, 1], spots[:, 2])
        bits_p = np.broadcast_to(spot_bits[:, None], (S, A)).reshape(-1)
        loss_r = loss_r + body_loss_db(scene.hull, dst, g_pt, scene.freq_hz, bits_p)
        if scene.use_wheel_loss:
            loss_r = loss_r + wheel_loss_db(w, src, g_pt, scene.freq_hz, scene.sidewall_loss_db, scene.tread_loss_db)
        if scene.receiver_pattern == "dipole":
            c_r = _dot(e_r, r_axis)
        else:
            c_r = _dot(e_r, np.conj(ref))
        b = _floor(c_r, floor_amp) * (10.0 ** (-loss_r / 20.0) / d_r)
        phase = k * (d_r - d)  # the reflected ray's lag behind the direct ray, rad
        cos, sin = np.cos(phase), np.sin(phase)
        field_re += b.real * cos + b.imag * sin  # b e^{-j phase}
        field_im += b.imag * cos - b.real * sin

    amp = np.hypot(field_re, field_im) * lam / (4.0 * np.pi)
    level = scene.eirp_dbm + scene.receiver_gain_dbi + 20.0 * np.log10(np.maximum(amp, 1e-30))
    return level.reshape(S, A)


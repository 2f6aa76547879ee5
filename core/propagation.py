"""Propagation building blocks: free space, knife edge, antennas, mismatch, ground reflection.

Pure numpy (plus ``scipy.special.fresnel`` for the exact knife edge). Every function
broadcasts over numpy arrays; scalars in give numpy scalars / floats out. SI units
throughout: m, Hz, dB, rad. Vectors are in the last axis (``(..., 3)``).

References
----------
- ITU-R P.525-4, Calculation of free-space attenuation.
- ITU-R P.526-15, Propagation by diffraction, section 4.1 (single knife edge).
- C. A. Balanis, Antenna Theory: Analysis and Design (short dipole; polarization
  loss factor).
- T. S. Rappaport, Wireless Communications: Principles and Practice (two-ray ground
  reflection model, Fresnel reflection coefficients).
- ITU-R P.2040, Effects of building materials and structures on radiowave propagation
  above about 100 MHz (complex permittivity from conductivity, reflection coefficients).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike
from scipy.special import fresnel as _scipy_fresnel

__all__ = [
    "C0_M_PER_S",
    "EPS0_F_PER_M",
    "SHORT_DIPOLE_DIRECTIVITY",
    "SHORT_DIPOLE_GAIN_DBI",
    "complex_permittivity",
    "dipole_coupling_db",
    "dipole_pattern_rel_db",
    "free_space_loss_db",
    "fresnel_reflection",
    "knife_edge_loss_db",
    "knife_edge_loss_exact_db",
    "knife_edge_loss_slope_db",
    "knife_edge_v",
    "mismatch_loss_db",
    "near_field_limit_m",
    "perpendicular_part",
    "two_ray_loss_db",
    "wavelength_m",
]

#: Speed of light in vacuum, m/s (exact, SI definition).
C0_M_PER_S = 299_792_458.0
#: Vacuum permittivity, F/m (CODATA 2018).
EPS0_F_PER_M = 8.8541878128e-12

#: Directivity of a short (Hertzian) dipole, linear (Balanis, Antenna Theory, sec. 4.2).
SHORT_DIPOLE_DIRECTIVITY = 1.5
#: The same in dBi: 10 log10(1.5) = 1.76 dBi.
SHORT_DIPOLE_GAIN_DBI = float(10.0 * np.log10(SHORT_DIPOLE_DIRECTIVITY))

# Below this v the P.526 eq. 31 approximation is taken as 0 dB (P.526-15 sec. 4.1).
_V_MIN_EQ31 = -0.78
# Above this |v| the exact knife-edge loss uses the asymptote of the Fresnel integrals
# (|F| -> 1 / (sqrt(2) pi v)); below it scipy's Fresnel integrals are accurate.
_V_ASYMPTOTE = 100.0


def wavelength_m(freq_hz: ArrayLike) -> np.ndarray:
    """Free-space wavelength lambda = c / f, in m.

    Parameters
    ----------
    freq_hz : array_like
        Frequency in Hz (> 0).
    """
    return C0_M_PER_S / np.asarray(freq_hz, dtype=float)


def free_space_loss_db(distance_m: ArrayLike, freq_hz: ArrayLike) -> np.ndarray:
    """Free-space (Friis) basic transmission loss between isotropic antennas, in dB.

    L = 20 log10(4 pi d f / c).

    Parameters
    ----------
    distance_m : array_like
        Path length in m (> 0). The far-field formula is indicative only below
        :func:`near_field_limit_m`.
    freq_hz : array_like
        Frequency in Hz (> 0).

    References
    ----------
    ITU-R P.525-4, eq. (1)/(4): L_bf = 20 log10(4 pi d / lambda).
    """
    d = np.asarray(distance_m, dtype=float)
    f = np.asarray(freq_hz, dtype=float)
    return 20.0 * np.log10(4.0 * np.pi * d * f / C0_M_PER_S)


def near_field_limit_m(freq_hz: ArrayLike) -> np.ndarray:
    """Radian distance lambda / (2 pi), in m, below which the far-field model is indicative only.

    References
    ----------
    Balanis, Antenna Theory: the reactive and radiating fields of a small antenna
    are equal at k r = 1, i.e. r = lambda / (2 pi).
    """
    return wavelength_m(freq_hz) / (2.0 * np.pi)


def knife_edge_v(h_m: ArrayLike, d1_m: ArrayLike, d2_m: ArrayLike, freq_hz: ArrayLike) -> np.ndarray:
    """Fresnel-Kirchhoff diffraction parameter v of a single knife edge (dimensionless).

    v = h sqrt( (2 / lambda) (1/d1 + 1/d2) ).

    Parameters
    ----------
    h_m : array_like
        Height of the edge above the straight line between the ends, in m; positive
        when the edge blocks the line of sight, negative when the line clears it.
    d1_m, d2_m : array_like
        Distances from each end to the edge along the path, in m (> 0).
    freq_hz : array_like
        Frequency in Hz.

    References
    ----------
    ITU-R P.526-15, section 4.1, eq. (26).
    """
    h = np.asarray(h_m, dtype=float)
    d1 = np.asarray(d1_m, dtype=float)
    d2 = np.asarray(d2_m, dtype=float)
    lam = wavelength_m(freq_hz)
    return h * np.sqrt(2.0 / lam * (1.0 / d1 + 1.0 / d2))


def knife_edge_loss_db(v: ArrayLike) -> np.ndarray:
    """Single knife-edge diffraction loss J(v), in dB (>= 0), ITU-R P.526 approximation.

    J(v) = 6.9 + 20 log10( sqrt((v - 0.1)^2 + 1) + v - 0.1 )  for v > -0.78, else 0.

    Evaluated without floating-point warnings for any finite or infinite v (NaN in
    gives NaN out).

    References
    ----------
    ITU-R P.526-15, section 4.1, eq. (31).
    """
    v = np.asarray(v, dtype=float)
    # Only the v > -0.78 branch is used, so clamp first: no cancellation, no log of 0.
    x = np.maximum(v, _V_MIN_EQ31) - 0.1
    with np.errstate(over="ignore"):  # v = +inf -> hypot(inf, 1) + inf = inf, loss inf
        loss = 6.9 + 20.0 * np.log10(np.hypot(x, 1.0) + x)
    out = np.where(v > _V_MIN_EQ31, loss, 0.0)
    return np.where(np.isnan(v), np.nan, out)


def knife_edge_loss_slope_db(v: ArrayLike) -> np.ndarray:
    """Derivative dJ/dv of :func:`knife_edge_loss_db`, dB per unit v (>= 0).

    dJ/dv = (20 / ln 10) / sqrt((v - 0.1)^2 + 1) for v > -0.78, else 0 (the derivative of
    ln(sqrt(x^2 + 1) + x) is 1 / sqrt(x^2 + 1)).

    References
    ----------
    ITU-R P.526-15, section 4.1, eq. (31), differentiated.
    """
    v = np.asarray(v, dtype=float)
    x = np.maximum(v, _V_MIN_EQ31) - 0.1
    out = np.where(v > _V_MIN_EQ31, (20.0 / np.log(10.0)) / np.hypot(x, 1.0), 0.0)
    return np.where(np.isnan(v), np.nan, out)


def knife_edge_loss_exact_db(v: ArrayLike) -> np.ndarray:
    """Single knife-edge diffraction loss J(v) from the Fresnel integrals, in dB.

    J(v) = -20 log10( sqrt((1 - C(v) - S(v))^2 + (C(v) - S(v))^2) / 2 ),

    with C, S the Fresnel cosine and sine integrals (``scipy.special.fresnel``).
    For |v| > 100 the asymptote of the integrals is used (J = 20 log10(sqrt(2) pi v)
    for large positive v, 0 dB for large negative v) so that the result stays exact
    to well under 0.01 dB and free of round-off.

    Note the lit side (v < 0) oscillates around 0 dB (down to about -1.2 dB near
    v = -1.2: the classic Fresnel ripple).

    References
    ----------
    ITU-R P.526-15, section 4.1, eq. (30).
    """
    v = np.asarray(v, dtype=float)
    vc = np.clip(v, -_V_ASYMPTOTE, _V_ASYMPTOTE)
    s, c = _scipy_fresnel(vc)  # scipy returns (S, C)
    amp = np.sqrt((1.0 - c - s) ** 2 + (c - s) ** 2) / 2.0
    exact = -20.0 * np.log10(amp)
    with np.errstate(over="ignore", invalid="ignore"):
        big = np.abs(v) > _V_ASYMPTOTE
        # Large positive v: |F| = 1 / (sqrt(2) pi v); large negative v: |F| -> 1.
        va = np.where(big & (v > 0), v, 1.0)
        asym = np.where(v > 0, 20.0 * np.log10(np.sqrt(2.0) * np.pi * va), 0.0)
    out = np.where(big, asym, exact)
    return np.where(np.isnan(v), np.nan, out)


def mismatch_loss_db(return_loss_db: ArrayLike) -> np.ndarray:
    """Mismatch loss from an antenna return loss, in dB (>= 0).

    L = -10 log10(1 - |Gamma|^2), |Gamma|^2 = 10^(-RL/10).

    Parameters
    ----------
    return_loss_db : array_like
        Return loss RL in dB, positive (RL = -S11[dB]); RL = 10 dB -> 0.46 dB.
        RL = inf gives 0 dB; RL = 0 (total reflection) gives inf.

    References
    ----------
    Textbook transmission-line relation (e.g. D. M. Pozar, Microwave Engineering,
    sec. 2.3: return loss and power delivered, P = P_inc (1 - |Gamma|^2)).
    """
    rl = np.asarray(return_loss_db, dtype=float)
    with np.errstate(divide="ignore"):
        return -10.0 * np.log10(1.0 - 10.0 ** (-rl / 10.0)) + 0.0  # + 0.0: no -0.0


def perpendicular_part(a: ArrayLike, u: ArrayLike) -> np.ndarray:
    """Component of vector(s) ``a`` perpendicular to unit direction(s) ``u``.

    a_perp = a - (a . u) u, broadcast over leading axes; vectors in the last axis (3).

    Parameters
    ----------
    a : array_like, shape (..., 3)
    u : array_like, shape (..., 3)
        Unit vectors (not normalised here).
    """
    a = np.asarray(a, dtype=float)
    u = np.asarray(u, dtype=float)
    return a - np.sum(a * u, axis=-1, keepdims=True) * u


def _floored_db20(amplitude: np.ndarray, floor_db: float) -> np.ndarray:
    """20 log10(amplitude) clamped below at floor_db (floor_db may be -inf)."""
    floor_amp = 10.0 ** (floor_db / 20.0)
    with np.errstate(divide="ignore"):
        return 20.0 * np.log10(np.maximum(np.abs(amplitude), floor_amp))


def dipole_pattern_rel_db(axis: ArrayLike, path_dir: ArrayLike, floor_db: float = -30.0) -> np.ndarray:
    """Short-dipole field pattern relative to its peak toward ``path_dir``, in dB (<= 0).

    20 log10 |a_perp| = 20 log10 |sin(angle between axis and path)|, clamped below
    at ``floor_db`` (the real null is filled by the structure around the antenna).
    Use it when the other end is isotropic, so no polarization term applies.

    Parameters
    ----------
    axis : array_like, shape (..., 3)
        Unit dipole axis.
    path_dir : array_like, shape (..., 3)
        Unit direction of the path.
    floor_db : float
        Null floor in dB (default -30 dB, engineering default).

    References
    ----------
    Balanis, Antenna Theory, sec. 4.2: short-dipole power pattern sin^2(theta).
    """
    a_perp = perpendicular_part(axis, path_dir)
    return _floored_db20(np.linalg.norm(a_perp, axis=-1), floor_db)


def dipole_coupling_db(
    sensor_axis: ArrayLike,
    receiver_axis: ArrayLike,
    path_dir: ArrayLike,
    floor_db: float = -30.0,
) -> np.ndarray:
    """Pattern (both ends, relative to peak) plus polarization match of two short dipoles, in dB.

    G = 20 log10 | a_s_perp . a_r_perp |, both perpendicular parts taken with respect
    to the same line (``path_dir``), clamped below at ``floor_db``.

    The far field of a short dipole along a_s toward u is polarized along a_s_perp
    with amplitude |a_s_perp| = sin(theta_s); a receiving short dipole picks up the
    component along its own axis, a_r . a_s_perp = a_r_perp . a_s_perp. So the term
    is sin(theta_s) sin(theta_r) cos(psi) in amplitude: both power patterns (sin^2) and
    the polarization loss factor cos^2(psi), psi the angle between the field and the
    receiving antenna's projected axis. It is <= 0 dB; add SHORT_DIPOLE_GAIN_DBI per end
    for the absolute gains.

    Parameters
    ----------
    sensor_axis, receiver_axis : array_like, shape (..., 3)
        Unit dipole axes.
    path_dir : array_like, shape (..., 3)
        Unit direction from sensor to receiver (the sign does not matter).
    floor_db : float
        Null floor in dB (default -30 dB, engineering default).

    References
    ----------
    Balanis, Antenna Theory: short-dipole pattern (sec. 4.2) and polarization loss
    factor PLF = |rho_w . rho_a|^2 = cos^2(psi_p) (sec. 2.12).
    """
    u = np.asarray(path_dir, dtype=float)
    s_perp = perpendicular_part(sensor_axis, u)
    r_perp = perpendicular_part(receiver_axis, u)
    return _floored_db20(np.sum(s_perp * r_perp, axis=-1), floor_db)


def complex_permittivity(eps_real: ArrayLike, sigma_s_per_m: ArrayLike, freq_hz: ArrayLike) -> np.ndarray:
    """Complex relative permittivity eps = eps' - j sigma / (omega eps0) (time factor e^{j omega t}).

    Parameters
    ----------
    eps_real : array_like
        Real relative permittivity eta' (dimensionless).
    sigma_s_per_m : array_like
        Conductivity in S/m.
    freq_hz : array_like
        Frequency in Hz.

    References
    ----------
    ITU-R P.2040, section 2: eta = eta' - j eta'', eta'' = sigma / (2 pi f eps0)
    (= 17.98 sigma / f[GHz]).
    """
    er = np.asarray(eps_real, dtype=float)
    sig = np.asarray(sigma_s_per_m, dtype=float)
    omega = 2.0 * np.pi * np.asarray(freq_hz, dtype=float)
    return er - 1j * sig / (omega * EPS0_F_PER_M)


def fresnel_reflection(eps_complex: ArrayLike, grazing_rad: ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    """Fresnel reflection coefficients of a homogeneous half-space seen from air.

    With psi the grazing angle (0 = grazing, pi/2 = normal incidence) and
    q = sqrt(eps - cos^2 psi) (principal branch, Re q >= 0):

        gamma_perp = (sin psi - q) / (sin psi + q)                 (E perpendicular to the
                     plane of incidence: TE, horizontal polarization over flat ground)
        gamma_par  = (eps sin psi - q) / (eps sin psi + q)         (E in the plane of
                     incidence: TM, vertical polarization over flat ground)

    Sign convention: both coefficients tend to -1 at grazing incidence, so in a two-ray
    sum the reflected ray is E_direct-like field times gamma for either polarization and
    both give the 40 log10 d far asymptote. For gamma_par this is the convention where
    gamma relates the field components normal to the ground (the form usually written
    for vertical polarization in two-ray ground-wave models); it is the negative of the
    form referred to the transverse field vectors (used e.g. in ITU-R P.2040's TM
    coefficient and in some editions of Rappaport, where gamma_par -> +1 at grazing and
    equals gamma_perp at normal incidence) (from memory: check the edition). With
    the convention used here gamma_par = -gamma_perp at normal incidence, and
    gamma_par = 0 at the Brewster angle tan psi_B = 1/sqrt(eps) of a lossless dielectric.
    A perfect conductor (|eps| -> inf) gives |gamma| -> 1 for both.

    Parameters
    ----------
    eps_complex : array_like (complex)
        Relative complex permittivity of the lower medium, eps' - j eps''
        (see :func:`complex_permittivity`).
    grazing_rad : array_like
        Grazing angle psi in rad, 0..pi/2.

    Returns
    -------
    gamma_perp, gamma_par : ndarray (complex)

    References
    ----------
    Rappaport, Wireless Communications, sec. 4.5 (reflection from dielectrics and the
    ground); ITU-R P.2040, section 2 (reflection coefficients of a half-space).
    """
    eps = np.asarray(eps_complex, dtype=complex)
    psi = np.asarray(grazing_rad, dtype=float)
    sin_psi = np.sin(psi)
    q = np.sqrt(eps - np.cos(psi) ** 2)
    gamma_perp = (sin_psi - q) / (sin_psi + q)
    gamma_par = (eps * sin_psi - q) / (eps * sin_psi + q)
    return gamma_perp, gamma_par


def two_ray_loss_db(
    horizontal_distance_m: ArrayLike,
    h_t_m: ArrayLike,
    h_r_m: ArrayLike,
    freq_hz: ArrayLike,
    gamma: ArrayLike = -1.0,
) -> np.ndarray:
    """Two-ray (direct + ground-reflected) path loss between isotropic antennas, in dB.

    E_total / E_0 = e^{-jk d_dir} / d_dir + gamma e^{-jk d_ref} / d_ref,
    L = -20 log10( lambda / (4 pi) |E_total / E_0| ).

    With gamma = -1 and d >> h_t h_r / lambda the loss tends to
    40 log10 d - 20 log10(h_t h_r) (Rappaport's far-distance asymptote).

    Parameters
    ----------
    horizontal_distance_m : array_like
        Horizontal separation of the two antennas in m.
    h_t_m, h_r_m : array_like
        Antenna heights above the reflecting plane in m.
    freq_hz : array_like
        Frequency in Hz.
    gamma : array_like (complex)
        Reflection coefficient of the ground for the polarization in play, e.g. from
        :func:`fresnel_reflection` at the grazing angle atan((h_t + h_r) / d);
        default -1 (perfect reflector at grazing incidence).

    References
    ----------
    Rappaport, Wireless Communications, sec. 4.6 (two-ray ground reflection model).
    """
    d = np.asarray(horizontal_distance_m, dtype=float)
    ht = np.asarray(h_t_m, dtype=float)
    hr = np.asarray(h_r_m, dtype=float)
    lam = wavelength_m(freq_hz)
    k = 2.0 * np.pi / lam
    d_dir = np.hypot(d, ht - hr)
    d_ref = np.hypot(d, ht + hr)
    g = np.asarray(gamma, dtype=complex)
    # Factor out the direct phase; d_ref - d_dir = 4 h_t h_r / (d_ref + d_dir) exactly,
    # which keeps precision at large d.
    delta = 4.0 * ht * hr / (d_ref + d_dir)
    field = 1.0 / d_dir + g * np.exp(-1j * k * delta) / d_ref
    return -20.0 * np.log10(lam / (4.0 * np.pi) * np.abs(field))

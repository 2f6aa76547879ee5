"""Reference checks of core.propagation against published formulas and values."""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.special import fresnel

from core import propagation as prop


# --- Free space -------------------------------------------------------------------------


@pytest.mark.parametrize("f_mhz", [315.0, 433.92, 900.0, 2400.0])
@pytest.mark.parametrize("d_km", [0.001, 0.0035, 0.1, 10.0])
def test_friis_matches_itu_p525_practical_formula(f_mhz, d_km):
    # ITU-R P.525-4 eq. (4): L_bf = 32.4 + 20 log f[MHz] + 20 log d[km]; the constant is
    # 20 log10(4 pi 1e9 / c) = 32.45 dB (written independently of the Friis code).
    expected_db = 32.45 + 20 * math.log10(f_mhz) + 20 * math.log10(d_km)
    got_db = prop.free_space_loss_db(d_km * 1e3, f_mhz * 1e6)
    assert got_db == pytest.approx(expected_db, abs=0.01)


def test_friis_broadcasts():
    d = np.array([[1.0], [2.0], [4.0]])
    f = np.array([315e6, 433.92e6])
    loss = prop.free_space_loss_db(d, f)
    assert loss.shape == (3, 2)
    # Friis: doubling the distance adds 20 log10 2 = 6.02 dB (inverse-square law).
    np.testing.assert_allclose(np.diff(loss, axis=0), 6.0206, atol=1e-3)


def test_wavelength_and_near_field_limit():
    # lambda = c / f with c = 299 792 458 m/s (SI definition); radian distance lambda/(2 pi)
    # (Balanis, field regions of a small antenna).
    assert prop.wavelength_m(299_792_458.0) == pytest.approx(1.0)
    assert prop.near_field_limit_m(315e6) == pytest.approx(299_792_458.0 / 315e6 / (2 * math.pi))
    assert prop.near_field_limit_m(315e6) == pytest.approx(0.1515, abs=1e-4)


# --- Knife edge (ITU-R P.526-15 section 4.1) -------------------------------------------


@pytest.mark.parametrize(
    ("v", "j_db"),
    # ITU-R P.526-15 eq. (31) check values (as listed in the design brief's source list).
    [(0.0, 6.03), (1.0, 13.93), (2.0, 19.04), (-0.78, 0.00)],
)
def test_knife_edge_eq31_check_values(v, j_db):
    assert prop.knife_edge_loss_db(v) == pytest.approx(j_db, abs=0.015)


def test_knife_edge_eq31_is_zero_below_minus_078():
    # ITU-R P.526-15 eq. (31) is stated for v > -0.78 only; J = 0 dB below.
    v = np.array([-0.7801, -1.0, -5.0, -1e6, -np.inf])
    np.testing.assert_array_equal(prop.knife_edge_loss_db(v), 0.0)


def test_knife_edge_exact_zero_is_6_02_db():
    # ITU-R P.526-15 eq. (30) at v = 0: C(0) = S(0) = 0, |F| = 1/2 -> 20 log10 2 = 6.02 dB.
    assert prop.knife_edge_loss_exact_db(0.0) == pytest.approx(20 * math.log10(2.0), abs=1e-9)
    assert prop.knife_edge_loss_exact_db(0.0) == pytest.approx(6.02, abs=0.005)


def test_knife_edge_exact_matches_scipy_fresnel_written_out():
    # ITU-R P.526-15 eq. (30) written out here from scipy.special.fresnel (returns S, C).
    v = np.linspace(-3.0, 10.0, 27)
    s, c = fresnel(v)
    expected = -20 * np.log10(np.sqrt((1 - c - s) ** 2 + (c - s) ** 2) / 2)
    np.testing.assert_allclose(prop.knife_edge_loss_exact_db(v), expected, atol=1e-9)


def test_knife_edge_eq31_within_half_db_of_exact():
    # ITU-R P.526-15: eq. (31) approximates eq. (30); checked to 0.5 dB over v in [-0.7, 5].
    v = np.linspace(-0.7, 5.0, 571)
    diff = prop.knife_edge_loss_db(v) - prop.knife_edge_loss_exact_db(v)
    assert np.max(np.abs(diff)) < 0.5


def test_knife_edge_exact_large_v_asymptote_is_continuous():
    # Fresnel-integral asymptote (Abramowitz & Stegun 7.3.27/28): |F| -> 1/(sqrt(2) pi v),
    # i.e. J -> 20 log10(sqrt(2) pi v); eq. (31) tends to 6.9 + 20 log10(2 v) = 12.92 + 20 log v.
    for v in (99.99, 100.01, 1e3, 1e6):
        assert prop.knife_edge_loss_exact_db(v) == pytest.approx(
            20 * math.log10(math.sqrt(2) * math.pi * v), abs=1e-3
        )
    assert prop.knife_edge_loss_exact_db(-1e6) == pytest.approx(0.0, abs=1e-3)


@settings(derandomize=True, database=None)  # a fixed set of examples: no run-to-run variation
@given(st.floats(min_value=-1e300, max_value=1e300))
def test_knife_edge_no_warnings_and_monotone_for_any_v(v):
    # Runs under -W error: any floating-point warning fails the test. Eq. (31) is monotone
    # non-decreasing in v and >= 0 (ITU-R P.526-15 eq. (31)). Between two neighbouring doubles the
    # computed value may drop by a rounding step (about 1 % of v in (-0.78, 10) drop by <= 3.6e-15 dB,
    # one or two ULPs), so monotone is checked to 1e-12 dB.
    j = prop.knife_edge_loss_db(v)
    j_exact = prop.knife_edge_loss_exact_db(v)
    assert j >= 0.0
    assert prop.knife_edge_loss_db(np.nextafter(v, np.inf)) >= j - 1e-12
    assert not np.isnan(j_exact)


def test_knife_edge_infinite_and_nan_inputs():
    # Limits of ITU-R P.526-15 eqs. (30)/(31): J -> inf deep in the shadow, 0 dB far on the lit
    # side; NaN propagates. Runs under -W error, so no floating-point warnings either.
    v = np.array([np.inf, -np.inf, np.nan])
    np.testing.assert_array_equal(prop.knife_edge_loss_db(v), [np.inf, 0.0, np.nan])
    np.testing.assert_array_equal(prop.knife_edge_loss_exact_db(v), [np.inf, 0.0, np.nan])


def test_knife_edge_v_equals_sqrt2_h_over_first_fresnel_radius():
    # ITU-R P.526-15: v = sqrt(2) h / r1 with the first Fresnel zone radius
    # r1 = sqrt(lambda d1 d2 / (d1 + d2)) (P.526-15 eq. (2)), an independent form of eq. (26).
    f = 433.92e6
    lam = 299_792_458.0 / f
    h, d1, d2 = np.array([0.05, -0.1, 0.3]), np.array([0.2, 1.0, 3.0]), np.array([2.0, 0.5, 7.0])
    r1 = np.sqrt(lam * d1 * d2 / (d1 + d2))
    np.testing.assert_allclose(prop.knife_edge_v(h, d1, d2, f), math.sqrt(2) * h / r1, rtol=1e-12)


# --- Mismatch -------------------------------------------------------------------------------


def test_mismatch_loss_10db_return_loss():
    # Textbook transmission-line relation: |Gamma|^2 = 0.1 -> -10 log10(0.9) = 0.46 dB.
    assert prop.mismatch_loss_db(10.0) == pytest.approx(0.4576, abs=1e-4)
    assert prop.mismatch_loss_db(10.0) == pytest.approx(0.46, abs=0.005)


def test_mismatch_loss_limits():
    # Textbook: RL = 3.01 dB (|Gamma|^2 = 1/2) -> 3.01 dB; perfect match -> 0 dB.
    assert prop.mismatch_loss_db(10 * math.log10(2)) == pytest.approx(10 * math.log10(2))
    np.testing.assert_array_equal(prop.mismatch_loss_db([np.inf]), [0.0])


# --- Antennas and polarization (Balanis, Antenna Theory) -------------------------------------


def test_short_dipole_directivity_by_integration():
    # Balanis, Antenna Theory sec. 4.2: D = 4 pi / integral(sin^2 theta dOmega) = 1.5.
    # Integrate the module's own pattern (power = 10^(G/10)) over the sphere numerically.
    n_theta, n_phi = 721, 73
    theta = np.linspace(0.0, np.pi, n_theta)
    phi = np.linspace(0.0, 2 * np.pi, n_phi)
    th, ph = np.meshgrid(theta, phi, indexing="ij")
    dirs = np.stack([np.sin(th) * np.cos(ph), np.sin(th) * np.sin(ph), np.cos(th)], axis=-1)
    g_db = prop.dipole_pattern_rel_db([0.0, 0.0, 1.0], dirs, floor_db=-np.inf)
    power = 10 ** (g_db / 10)
    inner = np.trapezoid(power * np.sin(th), theta, axis=0)
    total = np.trapezoid(inner, phi)
    directivity = 4 * np.pi * power.max() / total
    assert directivity == pytest.approx(1.5, abs=1e-4)
    assert prop.SHORT_DIPOLE_DIRECTIVITY == 1.5
    assert prop.SHORT_DIPOLE_GAIN_DBI == pytest.approx(1.7609, abs=1e-4)


def test_dipole_pattern_sin_theta():
    # Balanis sec. 4.2: field pattern sin(theta); 30 deg off axis -> 20 log10(0.5) = -6.02 dB.
    t = math.radians(30)
    g = prop.dipole_pattern_rel_db([0, 0, 1], [math.sin(t), 0, math.cos(t)], floor_db=-60)
    assert g == pytest.approx(-6.0206, abs=1e-3)
    # On axis: the null, clamped at the floor.
    assert prop.dipole_pattern_rel_db([0, 0, 1], [0, 0, 1], floor_db=-25.0) == pytest.approx(-25.0)


def test_dipole_coupling_parallel_broadside_is_0db():
    # Balanis: co-polarized broadside dipoles, PLF = 1, pattern peak at both ends.
    assert prop.dipole_coupling_db([0, 0, 1], [0, 0, 1], [1, 0, 0]) == pytest.approx(0.0, abs=1e-12)


def test_dipole_coupling_crossed_hits_floor():
    # Balanis sec. 2.12: orthogonal linear polarizations, PLF = cos^2(90 deg) = 0 -> floor.
    assert prop.dipole_coupling_db([0, 0, 1], [0, 1, 0], [1, 0, 0], floor_db=-30.0) == -30.0
    assert prop.dipole_coupling_db([0, 0, 1], [0, 1, 0], [1, 0, 0], floor_db=-45.0) == -45.0


@pytest.mark.parametrize(("tilt_deg", "expected_db"), [(45.0, -3.0103), (60.0, -6.0206), (30.0, -1.2494)])
def test_dipole_coupling_tilted_is_cos_squared(tilt_deg, expected_db):
    # Balanis sec. 2.12: PLF = cos^2(psi); receiver tilted by psi in the plane normal to the path.
    p = math.radians(tilt_deg)
    g = prop.dipole_coupling_db([0, 0, 1], [0, math.sin(p), math.cos(p)], [1, 0, 0])
    assert g == pytest.approx(10 * math.log10(math.cos(p) ** 2), abs=1e-9)
    assert g == pytest.approx(expected_db, abs=1e-3)


def test_dipole_coupling_combines_pattern_and_polarization_and_broadcasts():
    # Balanis: pattern sin^2 at each end times PLF cos^2. Sensor axis 60 deg off the path
    # (sin = 0.866), receiver parallel to the sensor: |a_s_perp . a_r_perp| = sin^2(60 deg).
    t = math.radians(60)
    axis = np.array([math.cos(t), 0.0, math.sin(t)])
    path = np.array([1.0, 0.0, 0.0])
    g = prop.dipole_coupling_db(axis, axis, path)
    assert g == pytest.approx(20 * math.log10(math.sin(t) ** 2), abs=1e-9)
    # Broadcast: 5 sensor axes x 1 receiver x 1 path.
    axes = np.tile(axis, (5, 1))
    assert prop.dipole_coupling_db(axes, axis, path).shape == (5,)


def test_perpendicular_part():
    a = np.array([[1.0, 2.0, 3.0], [0.0, 0.0, 1.0]])
    u = np.array([0.0, 0.0, 1.0])
    np.testing.assert_allclose(prop.perpendicular_part(a, u), [[1.0, 2.0, 0.0], [0.0, 0.0, 0.0]])


# --- Permittivity and Fresnel reflection -----------------------------------------------------


def test_complex_permittivity_matches_p2040_shorthand():
    # ITU-R P.2040 sec. 2: eta'' = 17.98 sigma / f[GHz].
    eps = prop.complex_permittivity(5.0, 0.1, 2e9)
    assert eps.real == pytest.approx(5.0)
    assert eps.imag == pytest.approx(-17.98 * 0.1 / 2.0, rel=1e-3)


@pytest.mark.parametrize("eps", [2.25, 6.31, 15.0, 30.0 - 5.0j, 5.24 - 0.9j])
def test_fresnel_normal_incidence(eps):
    # Textbook normal-incidence reflection: |Gamma| = |(1 - sqrt(eps)) / (1 + sqrt(eps))|.
    expected = abs((1 - np.sqrt(complex(eps))) / (1 + np.sqrt(complex(eps))))
    g_perp, g_par = prop.fresnel_reflection(eps, np.pi / 2)
    assert abs(g_perp) == pytest.approx(expected, rel=1e-12)
    assert abs(g_par) == pytest.approx(expected, rel=1e-12)
    # Sign convention of this module (docstring): gamma_par = -gamma_perp at normal incidence.
    assert g_par == pytest.approx(-g_perp, rel=1e-12)


@pytest.mark.parametrize("eps", [2.25, 4.0, 6.31, 15.0])
def test_fresnel_brewster_angle_parallel(eps):
    # Textbook Brewster angle: tan(theta_B) = sqrt(eps) from the normal, i.e. the grazing
    # angle tan(psi_B) = 1 / sqrt(eps); the parallel (TM) reflection vanishes there.
    psi_b = math.atan(1 / math.sqrt(eps))
    _, g_par = prop.fresnel_reflection(eps, psi_b)
    assert abs(g_par) < 1e-12
    g_perp, _ = prop.fresnel_reflection(eps, psi_b)
    assert abs(g_perp) > 0.1  # TE has no Brewster angle for a non-magnetic medium (textbook)


def test_fresnel_perfect_conductor_and_grazing():
    # Perfect conductor: |Gamma| = 1 for both polarizations at every angle (textbook).
    psi = np.linspace(0.0, np.pi / 2, 19)
    eps_pec = prop.complex_permittivity(1.0, 1e7, 315e6)  # P.2040 metal, sigma = 1e7 S/m
    g_perp, g_par = prop.fresnel_reflection(eps_pec, psi)
    np.testing.assert_allclose(np.abs(g_perp), 1.0, atol=1e-3)
    np.testing.assert_allclose(np.abs(g_par), 1.0, atol=1e-3)
    # Grazing incidence on any medium: Gamma -> -1 (Rappaport sec. 4.5, two-ray model).
    g_perp0, g_par0 = prop.fresnel_reflection(15.0 - 2.0j, 0.0)
    assert g_perp0 == pytest.approx(-1.0)
    assert g_par0 == pytest.approx(-1.0)


def test_fresnel_passive_medium_never_amplifies():
    # Energy conservation for a passive half-space: |Gamma| <= 1 (textbook).
    psi = np.linspace(0.0, np.pi / 2, 91)[:, None]
    eps = np.array([1.5, 5.24 - 0.5j, 30 - 40j, 3.0 - 1e-4j])
    g_perp, g_par = prop.fresnel_reflection(eps, psi)
    assert g_perp.shape == (91, 4)
    assert np.all(np.abs(g_perp) <= 1 + 1e-12)
    assert np.all(np.abs(g_par) <= 1 + 1e-12)


# --- Two-ray ground reflection (Rappaport) -------------------------------------------------


def test_two_ray_far_asymptote():
    # Rappaport, Wireless Communications sec. 4.6: with Gamma = -1 and d >> 2 pi h_t h_r / lambda,
    # L = 40 log10 d - 20 log10(h_t h_r).
    ht, hr, f = 0.35, 0.9, 433.92e6
    d = np.array([500.0, 2000.0, 1e4])
    expected = 40 * np.log10(d) - 20 * np.log10(ht * hr)
    np.testing.assert_allclose(prop.two_ray_loss_db(d, ht, hr, f), expected, atol=0.05)


def test_two_ray_without_reflection_is_friis():
    # With Gamma = 0 only the direct ray remains: Friis (ITU-R P.525).
    d, ht, hr, f = 3.0, 0.3, 1.2, 315e6
    direct = math.hypot(d, ht - hr)
    assert prop.two_ray_loss_db(d, ht, hr, f, gamma=0.0) == pytest.approx(
        prop.free_space_loss_db(direct, f), abs=1e-9
    )

"""core.wheel_patterns: table lookup, rotation with the wheel, mirror, size interpolation (numpy only).

NEC-2 based checks of the shipped tables are in tests/validation/test_nec_wheel_patterns.py.
"""

import math

import numpy as np
import pytest

from core import wheel_patterns as wp
from core.tires import parse_tire_code
from core.wheel import WheelGeometry

INCH = 0.0254
RNG = np.random.default_rng(20240607)


def _unit(v):
    v = np.asarray(v, float)
    return v / np.linalg.norm(v, axis=-1, keepdims=True)


def _sensor_axis(axis, th):
    # Engine convention (core.wheel.sensor_axes): radial (sin, 0, cos), tangential (cos, 0, -sin), axial (0, 1, 0)
    if axis == "radial":
        return np.stack([np.sin(th), 0 * th, np.cos(th)], -1)
    if axis == "tangential":
        return np.stack([np.cos(th), 0 * th, -np.sin(th)], -1)
    return np.stack([0 * th, 1 + 0 * th, 0 * th], -1)


def _sphere_integral(values, theta_deg, n_phi):
    t = np.radians(theta_deg)
    w = np.sin(t) * (t[1] - t[0])
    w[0] *= 0.5
    w[-1] *= 0.5
    return float(np.sum(values * w[:, None]) * 2 * math.pi / n_phi)


@pytest.fixture(scope="module")
def tables():
    return wp.load_table_set()


@pytest.mark.parametrize("axis", wp.AXES)
@pytest.mark.parametrize("side", [1.0, -1.0])
def test_bare_dipole_table_reproduces_short_dipole_pattern(axis, side):
    # Balanis, Antenna Theory, sec. 4.2: directivity 1.5 sin^2(psi), field along the axis'
    # component perpendicular to the direction. Looked up through the rotation and mirror.
    table = wp.bare_dipole_table(axis, 433.92e6)
    n = 4000
    d = _unit(RNG.normal(size=(n, 3)))
    th = RNG.uniform(0, 2 * math.pi, n)
    e = wp.field_vectors(table, d, th, side, reference="centre")
    a = _sensor_axis(axis, th)
    cos = np.sum(a * d, -1)
    sin2 = 1 - cos**2
    ok = sin2 > 0.05
    err_db = 10 * np.log10(np.sum(np.abs(e) ** 2, -1)[ok] / (1.5 * sin2[ok]))
    assert np.max(np.abs(err_db)) < 0.2
    a_perp = _unit(a - cos[:, None] * d)[ok]
    align = np.abs(np.sum(e[ok] * a_perp, -1)) / np.linalg.norm(e[ok], axis=-1)
    assert np.min(align) > 0.999


def test_bare_dipole_table_integrates_to_four_pi():
    # Directivity normalisation: the integral of D over the sphere is 4 pi (definition).
    t = wp.bare_dipole_table("radial", 315e6)
    assert _sphere_integral(wp.directivity(t), t.theta_deg, len(t.phi_deg)) == pytest.approx(4 * math.pi, rel=1e-3)


def test_sensor_reference_removes_the_sensor_offset_phase():
    # A dipole displaced to r0 has far-field phase exp(j k u.r0) about the centre (Balanis, far-zone
    # approximation); referred to the sensor itself its phase is the same in every direction (-90 deg
    # for the -j convention of the tables).
    table = wp.bare_dipole_table("radial", 433.92e6, sensor_radius_m=0.22, sensor_offset_m=0.05)
    d = _unit(RNG.normal(size=(500, 3)))
    th = RNG.uniform(0, 2 * math.pi, 500)
    e = wp.field_vectors(table, d, th, 1.0, reference="sensor")
    a = _sensor_axis("radial", th)
    a_perp = a - np.sum(a * d, -1, keepdims=True) * d
    strong = np.linalg.norm(a_perp, axis=-1) > 0.3
    ph = np.angle(np.sum(e * a_perp, -1)[strong], deg=True)
    assert np.max(np.abs(ph + 90.0)) < 2.0
    centre = wp.field_vectors(table, d, th, 1.0, reference="centre")
    assert np.std(np.angle(np.sum(centre * a_perp, -1)[strong])) > 0.3  # the offset phase is really there


@pytest.mark.parametrize("freq_hz", [315e6, 433.92e6])
def test_near_term_reproduces_the_exact_dipole_field(freq_hz):
    # Exact short-dipole field with all terms (Balanis, Antenna Theory, eqs. 4-8a to 4-10c):
    # E = j sqrt(1.5) e^{-jkr}/r [-a_perp + (3 u (u.a) - a)(1/(jkr) + 1/(jkr)^2)] in the tables'
    # units. The table keeps the 1/r term of the expansion; the 1/r^2 term left out is below
    # 0.2 dB from 1 m on.
    k = 2 * math.pi * freq_hz / 299792458.0
    table = wp.bare_dipole_table("axial", freq_hz)
    d = _unit(RNG.normal(size=(800, 3)))
    r = RNG.uniform(1.0, 3.0, 800)
    th = np.zeros(800)
    g = wp.field_vectors(table, d, th, 1.0, reference="centre", distance_m=r)
    approx = g * (np.exp(-1j * k * r) / r)[:, None]
    a = np.array([0.0, 1.0, 0.0])
    ua = np.sum(d * a, -1, keepdims=True)
    jkr = (1j * k * r)[:, None]
    exact = 1j * math.sqrt(1.5) * (np.exp(-1j * k * r) / r)[:, None] * (
        -(a - ua * d) + (3 * ua * d - a) * (1 / jkr + 1 / jkr**2))
    strong = np.linalg.norm(a - ua * d, axis=-1) > 0.3
    err = 20 * np.log10(np.linalg.norm(approx, axis=-1) / np.linalg.norm(exact, axis=-1))[strong]
    assert np.max(np.abs(err)) < 0.2
    far = wp.field_vectors(table, d, th, 1.0, reference="centre") * (np.exp(-1j * k * r) / r)[:, None]
    err_far = 20 * np.log10(np.linalg.norm(far, axis=-1) / np.linalg.norm(exact, axis=-1))[strong]
    assert np.max(np.abs(err)) < np.max(np.abs(err_far))  # the near term does improve on the far field


def test_rotation_turns_the_pattern_with_the_wheel(tables):
    # Table convention (module docstring): E_theta(d) = R(theta) E_0(R(theta)^T d).
    t = tables.table(17 * INCH, 7.5 * INCH, 433.92e6, "radial", True)
    d = _unit(RNG.normal(size=(300, 3)))
    th = RNG.uniform(0, 2 * math.pi, 300)
    rot = wp.rotation_y(th)
    e_rot = wp.field_vectors(t, d, th, 1.0, reference="centre")
    d0 = np.einsum("aji,aj->ai", rot, d)
    e0 = wp.field_vectors(t, d0, 0.0, 1.0, reference="centre")
    assert np.allclose(e_rot, np.einsum("aij,aj->ai", rot, e0), atol=1e-9)
    # +Z of the wheel frame goes to the sensor's position (sin theta, 0, cos theta)
    assert np.allclose(wp.rotation_y(0.3) @ [0, 0, 1], [math.sin(0.3), 0, math.cos(0.3)])


def test_right_wheel_is_the_mirror_image_of_the_left(tables):
    # Mirror in the vehicle's x-z plane: E_right(d) = M E_left(M d), M = diag(1, -1, 1).
    t = tables.table(19 * INCH, 8.5 * INCH, 315e6, "axial", True)
    m = np.array([1.0, -1.0, 1.0])
    d = _unit(RNG.normal(size=(300, 3)))
    th = RNG.uniform(0, 2 * math.pi, 300)
    right = wp.field_vectors(t, d, th, -1.0, reference="centre")
    left = wp.field_vectors(t, d * m, th, 1.0, reference="centre")
    assert np.allclose(right, left * m, atol=1e-9)
    far_side = wp.field_vectors(t, [0.0, 1.0, 0.0], 0.0, -1.0)  # toward +y is inboard for a right wheel
    inboard_left = wp.field_vectors(t, [0.0, -1.0, 0.0], 0.0, 1.0)
    assert np.linalg.norm(far_side) == pytest.approx(np.linalg.norm(inboard_left), rel=1e-9)


def test_shipped_tables_cover_standard_rims_bands_axes_and_belt(tables):
    assert tables.rim_diameter_in.min() <= 15 and tables.rim_diameter_in.max() >= 22
    assert tables.rim_width_in.min() <= 6.5 and tables.rim_width_in.max() >= 9.0
    assert any(abs(f - 315e6) < 1e3 for f in tables.freq_hz)
    assert any(abs(f - 433.92e6) < 1e3 for f in tables.freq_hz)
    assert set(tables.axes) == set(wp.AXES)
    assert set(tables.belt) == {True, False}
    assert np.diff(tables.theta_deg).max() <= 5.0 and np.diff(tables.phi_deg).max() <= 5.0
    assert tables.theta_deg[0] == 0 and tables.theta_deg[-1] == 180
    prov = tables.provenance
    assert "make_wheel_patterns.py" in prov["command"] and "NEC-2" in prov["solver"]
    assert prov["date_utc"] and prov["grid_rules"]


def test_shipped_tables_are_normalised_to_the_radiated_power(tables):
    # |E|^2 = directivity: the integral over the sphere is 4 pi for every table (float16 storage).
    d = np.abs(tables.e_theta) ** 2 + np.abs(tables.e_phi) ** 2
    t = np.radians(tables.theta_deg)
    w = np.sin(t) * (t[1] - t[0])
    w[0] *= 0.5
    w[-1] *= 0.5
    integral = np.sum(d * w[:, None], axis=(-2, -1)) * 2 * math.pi / len(tables.phi_deg)
    assert np.allclose(integral, 4 * math.pi, rtol=0.01)
    assert np.all(tables.power_ratio > 0)


@pytest.mark.parametrize("size", [(18.0, 7.5), (16.0, 8.0), (20.3, 9.1), (17.0, 7.0), (21.5, 6.5)])
@pytest.mark.parametrize("freq_hz", [315e6, 433.92e6])
def test_interpolated_sizes_lie_between_their_neighbours(tables, size, freq_hz):
    d_in, w_in = size
    for axis in wp.AXES:
        t = tables.table(d_in * INCH, w_in * INCH, freq_hz, axis, True)
        assert t.kind == "interpolated" and "interpolated" in t.provenance
        i = np.searchsorted(tables.rim_diameter_in, d_in)
        j = np.searchsorted(tables.rim_width_in, w_in)
        ii = sorted({max(i - 1, 0), min(i, len(tables.rim_diameter_in) - 1)})
        jj = sorted({max(j - 1, 0), min(j, len(tables.rim_width_in) - 1)})
        fi = tables.band_index(freq_hz)
        ai = tables.axes.index(axis)
        bi = tables.belt.index(True)
        corners = np.array([np.abs(tables.e_theta[a, b, fi, ai, bi]) ** 2 + np.abs(tables.e_phi[a, b, fi, ai, bi]) ** 2
                            for a in ii for b in jj])
        dint = wp.directivity(t)
        assert np.all(dint >= corners.min(0) * (1 - 1e-9) - 1e-12)
        assert np.all(dint <= corners.max(0) * (1 + 1e-9) + 1e-12)
        assert _sphere_integral(dint, t.theta_deg, len(t.phi_deg)) == pytest.approx(4 * math.pi, rel=0.01)


def test_tabulated_size_is_returned_as_stored(tables):
    i, j = 1, 2
    d_in, w_in = tables.rim_diameter_in[i], tables.rim_width_in[j]
    t = tables.table(d_in * INCH, w_in * INCH, 433.92e6, "tangential", False)
    fi, ai, bi = tables.band_index(433.92e6), tables.axes.index("tangential"), tables.belt.index(False)
    assert t.kind == "table"
    assert np.allclose(t.e_theta, tables.e_theta[i, j, fi, ai, bi], atol=1e-12)
    assert np.allclose(t.near, tables.near[i, j, fi, ai, bi], atol=1e-12)
    assert t.belt_radius_m is None


def test_unfold_half_rebuilds_a_mirror_symmetric_pattern():
    # A dipole on the x = 0 plane (radial, axial: even; tangential: odd) has E(M r) = s M E(r);
    # rebuilding the full azimuth range from -90..90 deg must give the full pattern back.
    for axis, parity in (("radial", 1.0), ("tangential", -1.0), ("axial", 1.0)):
        t = wp.bare_dipole_table(axis, 433.92e6, sensor_radius_m=0.2, sensor_offset_m=0.04)
        phi = t.phi_deg
        half = np.arange(-90.0, 90.1, 5.0)
        idx = [int(np.argmin(np.abs((phi - h + 180) % 360 - 180))) for h in half]
        full = np.stack([t.e_theta, t.e_phi], -1)
        rebuilt = wp.unfold_half(full[:, idx], half, phi, np.array(parity), "spherical")
        assert np.allclose(rebuilt, full, atol=1e-12)
        nidx = [int(np.argmin(np.abs((t.near_phi_deg - h + 180) % 360 - 180))) for h in np.arange(-90.0, 90.1, 10.0)]
        rebuilt_near = wp.unfold_half(t.near[:, nidx], np.arange(-90.0, 90.1, 10.0), t.near_phi_deg,
                                      np.array(parity), "cartesian")
        assert np.allclose(rebuilt_near, t.near, atol=1e-12)


def test_table_for_wheel_follows_the_wheel_and_band():
    tire = parse_tire_code("225/50R17")
    w = WheelGeometry(id="FL", centre=(1.4, 0.78, tire.outer_radius_m), outboard_sign=1.0,
                      rim_radius_m=tire.rim_radius_m, rim_width_m=7.5 * INCH, tire_radius_m=tire.outer_radius_m,
                      tire_width_m=tire.section_width_m, sensor_radius_m=tire.rim_radius_m,
                      sensor_offset_m=7.5 * INCH / 4)
    t = wp.table_for_wheel(w, 433.92e6, "radial")
    assert "17.0 x 7.5 in" in t.provenance and "433.92 MHz" in t.provenance and "steel belt" in t.provenance
    assert t.sensor_radius_m == pytest.approx(tire.rim_radius_m, abs=1e-6)
    near_band = wp.table_for_wheel(w, 434.5e6, "radial")
    assert "used for 434.50 MHz" in near_band.provenance
    with pytest.raises(ValueError, match="no wheel-pattern table"):
        wp.table_for_wheel(w, 868e6, "radial")
    with pytest.raises(ValueError, match="unknown sensor axis"):
        wp.table_for_wheel(w, 315e6, "diagonal")


def test_sizes_outside_the_tables_use_the_nearest_edge_and_say_so(tables):
    t = tables.table(14 * INCH, 5.5 * INCH, 315e6, "radial", False)
    assert "outside the tabulated range" in t.provenance
    edge = tables.table(tables.rim_diameter_in[0] * INCH, tables.rim_width_in[0] * INCH, 315e6, "radial", False)
    assert np.allclose(wp.directivity(t), wp.directivity(edge))


def test_installed_pattern_differs_from_the_bare_dipole(tables):
    # The point of the tables: on its rim the sensor's pattern is not the bare sin^2 (NEC-2 shows
    # several dB of change; design brief sec. 5). Every tabulated radial pattern departs from it.
    bare = wp.directivity(wp.bare_dipole_table("radial"))
    ai = tables.axes.index("radial")
    dirs = np.abs(tables.e_theta[:, :, :, ai]) ** 2 + np.abs(tables.e_phi[:, :, :, ai]) ** 2
    strong = bare > 0.3
    dev = np.max(np.abs(10 * np.log10(dirs[..., strong] / bare[strong])), axis=-1)
    assert np.all(dev > 2.0)

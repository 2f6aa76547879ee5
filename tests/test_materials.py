"""Reference checks of core.materials against ITU-R P.2040, 3GPP TR 38.901 and textbook slab theory."""

import math

import numpy as np
import pytest

from core import materials as mat
from core.propagation import C0_M_PER_S, complex_permittivity

# --- ITU-R P.2040 Table 3 -------------------------------------------------------------------


def test_p2040_glass_at_1ghz():
    # ITU-R P.2040 Table 3, glass: a = 6.31, b = 0, c = 0.0036, d = 1.3394; at f = 1 GHz
    # f^b = f^d = 1, so eta' = 6.31 and sigma = 0.0036 S/m; valid 0.1-100 GHz.
    eps_real, sigma, in_range = mat.p2040_properties("glass", 1e9)
    assert eps_real == pytest.approx(6.31)
    assert sigma == pytest.approx(0.0036)
    assert bool(in_range)


def test_p2040_glass_frequency_law():
    # ITU-R P.2040 Table 3: sigma = c f[GHz]^d; glass at 10 GHz: 0.0036 * 10^1.3394.
    _, sigma, _ = mat.p2040_properties("glass", 10e9)
    assert sigma == pytest.approx(0.0036 * 10**1.3394, rel=1e-12)
    # Glass is specified from 0.1 GHz: 315 MHz is inside its range.
    assert bool(mat.p2040_properties("glass", 315e6)[2])


def test_p2040_concrete_and_metal():
    # ITU-R P.2040 Table 3: concrete a = 5.24, c = 0.0462, d = 0.7822; metal eta' = 1,
    # sigma = 1e7 S/m; both specified from 1 GHz.
    eps_real, sigma, in_range = mat.p2040_properties("concrete", 2e9)
    assert eps_real == pytest.approx(5.24)
    assert sigma == pytest.approx(0.0462 * 2**0.7822, rel=1e-12)
    assert bool(in_range)
    eps_real, sigma, _ = mat.p2040_properties("metal", 5e9)
    assert eps_real == pytest.approx(1.0)
    assert sigma == pytest.approx(1e7)


@pytest.mark.parametrize("name", ["concrete", "metal", "very dry ground", "medium dry ground", "wet ground"])
def test_p2040_tpms_bands_are_extrapolation(name):
    # ITU-R P.2040 Table 3: these rows start at 1 GHz, so 315/433.92 MHz are outside.
    _, _, in_range = mat.p2040_properties(name, np.array([315e6, 433.92e6]))
    assert not np.any(in_range)


@pytest.mark.parametrize(
    ("name", "a", "b", "c", "d"),
    # ITU-R P.2040 Table 3 ground rows (from memory; agree with secondary copies of the table).
    [
        ("very dry ground", 3.0, 0.0, 0.00015, 2.52),
        ("medium dry ground", 15.0, -0.1, 0.035, 1.63),
        ("wet ground", 30.0, -0.4, 0.15, 1.30),
    ],
)
def test_p2040_ground_rows(name, a, b, c, d):
    eps_real, sigma, in_range = mat.p2040_properties(name, 3e9)
    assert eps_real == pytest.approx(a * 3.0**b)
    assert sigma == pytest.approx(c * 3.0**d)
    assert bool(in_range)


def test_p2040_unknown_row():
    with pytest.raises(KeyError, match="unknown ITU-R P.2040 material 'brick'"):
        mat.p2040_properties("brick", 1e9)


# --- Road surfaces ----------------------------------------------------------------------------


@pytest.mark.parametrize("name", list(mat.ROAD_SURFACES))
def test_road_permittivity_matches_p2040_definition(name):
    # ITU-R P.2040 sec. 2: eta = eta' - j 17.98 sigma / f[GHz].
    f = 433.92e6
    row = mat.ROAD_SURFACES[name].p2040_row
    eps_real, sigma, _ = mat.p2040_properties(row, f)
    eps = mat.road_permittivity(name, f)
    assert eps.real == pytest.approx(eps_real)
    assert eps.imag == pytest.approx(-17.98 * sigma / 0.43392, rel=1e-3)
    assert "extrapolat" in mat.ROAD_SURFACES[name].note


def test_dry_road_uses_concrete_proxy():
    # ITU-R P.2040 Table 3 concrete row (5.24) stands in for dry asphalt/concrete.
    assert mat.road_permittivity("dry asphalt/concrete", 1e9).real == pytest.approx(5.24)
    with pytest.raises(KeyError, match="unknown road surface"):
        mat.road_permittivity("ice", 1e9)


# --- Slab transmission --------------------------------------------------------------------------


def _abcd_slab_loss_db(eps, t, f):
    """Textbook ABCD matrix of a line section (Pozar, Microwave Engineering, Table 4.1),
    written independently of the module: T = 2 / (A + B/Z0 + C Z0 + D)."""
    z0 = 376.730313
    n = np.sqrt(complex(eps))
    z = z0 / n
    bl = 2 * math.pi * f * n * t / C0_M_PER_S
    a_, b_, c_, d_ = np.cos(bl), 1j * z * np.sin(bl), 1j * np.sin(bl) / z, np.cos(bl)
    s21 = 2 / (a_ + b_ / z0 + c_ * z0 + d_)
    return -20 * math.log10(abs(s21))


@pytest.mark.parametrize("eps", [2.25, 6.31, 10.0])
def test_lossless_half_wave_slab_is_transparent(eps):
    # Textbook: a slab half a wavelength thick in the material (n t = lambda / 2) is
    # transparent at normal incidence (lossless case: 0 dB).
    n = math.sqrt(eps)
    f = 433.92e6
    t = C0_M_PER_S / f / (2 * n)
    loss = mat.slab_transmission_loss_db(eps, t, f)
    assert loss == pytest.approx(0.0, abs=1e-9)


@pytest.mark.parametrize("eps", [2.25, 6.31, 15.0])
def test_quarter_wave_slab_maximum_reflection(eps):
    # Textbook quarter-wave slab (n t = lambda/4): |T|^2 = 4 n^2 / (1 + n^2)^2.
    n = math.sqrt(eps)
    f = 315e6
    t = C0_M_PER_S / f / (4 * n)
    expected = -10 * math.log10(4 * n**2 / (1 + n**2) ** 2)
    assert mat.slab_transmission_loss_db(eps, t, f) == pytest.approx(expected, abs=1e-9)


@pytest.mark.parametrize(
    ("eps", "t", "f"),
    [(6.31 - 0.02j, 0.004, 315e6), (2.8 - 0.028j, 0.003, 433.92e6), (5.24 - 1.07j, 0.12, 1e9), (4.5, 0.5, 2e9)],
)
def test_slab_matches_independent_abcd(eps, t, f):
    # Pozar, Microwave Engineering: ABCD of a transmission-line section vs the module's
    # multiple-reflection form (Balanis, Advanced Engineering Electromagnetics sec. 5.5).
    assert mat.slab_transmission_loss_db(eps, t, f) == pytest.approx(_abcd_slab_loss_db(eps, t, f), abs=1e-9)


def test_slab_thick_lossy_and_metal():
    # Textbook: a thick lossy slab loses the two interface transmissions plus 8.686 alpha t,
    # internal echoes negligible; alpha = -Im(k0 n).
    f, t = 2e9, 0.3
    eps = complex_permittivity(5.24, 0.0462 * 2**0.7822, f)  # P.2040 concrete at 2 GHz
    n = np.sqrt(eps)
    alpha = -(2 * math.pi * f / C0_M_PER_S * n).imag
    gamma = (1 - n) / (1 + n)
    expected = -20 * math.log10(abs(1 - gamma**2)) + 8.686 * alpha * t
    assert mat.slab_transmission_loss_db(eps, t, f) == pytest.approx(expected, abs=0.01)
    # P.2040 metal (sigma = 1e7 S/m), 1 mm: huge loss, finite, no warnings (run with -W error).
    metal = mat.slab_transmission_loss_db(complex_permittivity(1.0, 1e7, 315e6), 1e-3, 315e6)
    assert 300.0 < metal <= 3000.0


# --- Material registry ----------------------------------------------------------------------------


def test_builtin_material_keys():
    assert set(mat.BUILTIN_MATERIALS) == {
        "metal", "glass", "plastic", "open", "tire_sidewall", "tire_tread", "composite",
    }
    assert mat.MATERIAL_NAMES == tuple(mat.BUILTIN_MATERIALS)
    for name, m in mat.BUILTIN_MATERIALS.items():
        assert m.name == name
        assert m.source and m.description


def test_glass_is_3gpp_standard_glass():
    # 3GPP TR 38.901 Table 7.4.3-1: standard glass L = 2 + 0.2 f[GHz] dB.
    np.testing.assert_allclose(mat.material_loss_db("glass", [0.5e9, 2e9, 6e9]), [2.1, 2.4, 3.2])
    # Below 0.5 GHz it is an extrapolation: 315 MHz -> 2.063 dB, and the source says so.
    assert mat.material_loss_db("glass", 315e6) == pytest.approx(2.063)
    assert "extrapolated" in mat.BUILTIN_MATERIALS["glass"].source


def test_engineering_defaults_are_marked_and_in_their_bands():
    # Engineering defaults (not published values): metal 20-25 dB, sidewall 1-2 dB, tread 8-15 dB.
    for name in ("metal", "plastic", "tire_sidewall", "tire_tread", "composite"):
        assert mat.BUILTIN_MATERIALS[name].engineering_default
        assert "engineering default" in mat.BUILTIN_MATERIALS[name].source
    assert 20.0 <= mat.material_loss_db("metal", 315e6) <= 25.0
    assert 1.0 <= mat.material_loss_db("tire_sidewall", 315e6) <= 2.0
    assert 8.0 <= mat.material_loss_db("tire_tread", 433.92e6) <= 15.0
    assert mat.material_loss_db("open", 315e6) == 0.0


def test_plastic_and_composite_are_thin_slab_losses():
    # Textbook slab at normal incidence: a 3 mm polymer panel is electrically thin at
    # 315/434 MHz (lambda in the material ~0.4 m), so its loss is well under 0.1 dB, and
    # it equals the ABCD result (Pozar) for the stated default permittivity and thickness.
    f = np.array([315e6, 433.92e6])
    loss = mat.material_loss_db("plastic", f)
    assert np.all((loss > 0) & (loss < 0.1))
    eps = mat.PLASTIC_EPS_REAL * (1 - 1j * mat.PLASTIC_LOSS_TANGENT)
    assert loss[0] == pytest.approx(_abcd_slab_loss_db(eps, mat.PLASTIC_THICKNESS_M, 315e6), abs=1e-9)
    assert np.all(mat.material_loss_db("composite", f) < 0.2)


def test_material_loss_overrides_and_shapes():
    f = np.linspace(300e6, 450e6, 4)
    assert mat.material_loss_db("metal", f).shape == (4,)
    assert mat.material_loss_db("open", f).shape == (4,)
    # An override replaces a built-in value and can define a new material.
    ov = {"metal": 27.5, "heated windscreen": 12.0}
    np.testing.assert_array_equal(mat.material_loss_db("metal", f, ov), 27.5)
    assert mat.material_loss_db("heated windscreen", 315e6, ov) == 12.0
    assert mat.material_loss_db("glass", 315e6, ov) == pytest.approx(2.063)


def test_unknown_material_raises_clear_keyerror():
    with pytest.raises(KeyError, match="unknown material 'wood'.*known materials: metal, glass"):
        mat.material_loss_db("wood", 315e6)
    with pytest.raises(KeyError, match="heated windscreen"):
        mat.material_loss_db("wood", 315e6, {"heated windscreen": 12.0})

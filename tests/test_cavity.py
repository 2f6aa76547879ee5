"""The closed body as a lossy cavity (core.cavity) and the fade quantile of the scores (core.links).

Sources: D. A. Hill et al., IEEE Trans. EMC 36(3), 1994 (power balance: shielding effectiveness
SE = sigma_d / sigma_t, leakage cross-section A/4 of a large aperture, a matched antenna's pickup
S_c lambda^2 / (8 pi) in a diffuse field) and Hill's boundary-field results (F_t -> 0, F_n -> 2 on a
conducting wall, both -> 1 far from it); all recalled from memory. Rician quantiles from scipy.stats
(noncentral chi-square); Rayleigh power quantile -ln(1 - q) (textbook). The whole-vehicle NEC-2
agreement is in tests/validation/test_fullwave_agreement.py.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from scipy.stats import ncx2

from core.cavity import _boundary_factors, build_cavity, spot_factor, surface_samples, wall_factor
from core.links import fade_power, level_dbm
from core.scoring import Scene, spot_levels
from tests.engine_vehicles import box_cabin, open_space_vehicle

CENTRE = np.array([[0.0, 0.0, 0.8]])  # the box cabin's middle (x -1..1, y -0.8..0.8, z 0.2..1.4 m)


def test_boundary_factors_have_the_wall_limits():
    # Hill's boundary fields (from memory): on a conducting wall the tangential E vanishes and the
    # normal E doubles (image theory); far from it both return to the free interior's value.
    ft, fn = _boundary_factors(np.array([1e-4, 1e3]))
    assert ft[0] == pytest.approx(0.0, abs=1e-6) and fn[0] == pytest.approx(2.0, abs=1e-6)
    assert ft[1] == pytest.approx(1.0, abs=2e-3) and fn[1] == pytest.approx(1.0, abs=2e-3)
    # the mean over three directions at the wall: (2 + 0 + 0) / 3
    scene = Scene.from_vehicle(box_cabin(None))
    lam = scene.wavelength_m
    near_roof = np.array([[0.0, 0.0, 1.4 - 1e-4]])
    assert wall_factor(scene.hull, near_roof, np.array([[1.0, 0.0, 0.0]]), lam)[0] == pytest.approx(0.0, abs=1e-4)
    # normal to the roof, and tangential to the side walls 0.8 m away (their factor multiplies)
    ft_side, _ = _boundary_factors(np.array([2 * (2 * math.pi / lam) * 0.8]))
    assert wall_factor(scene.hull, near_roof, np.array([[0.0, 0.0, 1.0]]), lam)[0] == pytest.approx(
        2.0 * ft_side[0], abs=1e-3)


def test_power_balance_matches_the_shielding_effectiveness_formula():
    # Hill et al. 1994: S_c = S_inc sigma_t / sigma_d, with sigma_t the opening's transmission
    # cross-section (tau A times the incidence factor) and sigma_d = A tau / 4 + contents + walls +
    # the receiving antenna lambda^2 / (8 pi); a short dipole of peak gain G_r picks up
    # S_c G_r lambda^2 / (12 pi) (a third of the field on its axis). Feed a known uniform power
    # density into the box's one window and compare the engine's diffuse level with the formula.
    v = box_cabin("glass")
    scene = Scene.from_vehicle(v, ground_reflection=False, wheel_model="knife_edge", cavity=False)
    cav = build_cavity(scene, v.body.cabin_absorption_m2, spacing_m=0.05)
    area_tau = float(np.sum(cav.areas_m2 * cav.tau))
    # a side-view zone governs both side walls: two windows of 1.2 m x 0.85 m (patches of 5 cm)
    assert float(cav.areas_m2.sum()) == pytest.approx(2 * 1.2 * 0.85, rel=0.05)
    s_inc_per_eirp = 1e-3  # 1/m^2: the power density at the window per watt of EIRP
    fed = dataclasses.replace(cav, input=np.full_like(cav.input, s_inc_per_eirp * 0.5 * area_tau))
    scene = dataclasses.replace(scene, cavity=fed)
    lam = scene.wavelength_m
    sigma_d = area_tau / 4 + v.body.cabin_absorption_m2 + cav.sigma_walls_m2 + lam**2 / (8 * math.pi)
    assert cav.sigma_total_m2 == pytest.approx(sigma_d, rel=1e-12)
    s_c = s_inc_per_eirp * 0.5 * area_tau / sigma_d  # per watt of EIRP
    f = wall_factor(scene.hull, CENTRE, np.array([[0.0, 0.0, 1.0]]), lam)[0]
    g_r = 10 ** (scene.receiver_gain_dbi / 10)
    expected_dbm = scene.eirp_dbm + 10 * math.log10(s_c * g_r * lam**2 / (12 * math.pi) * f)
    diffuse = spot_factor(scene, CENTRE, np.array([[0.0, 0.0, 1.0]]))[0] * fed.input[0, 0]
    assert level_dbm(scene, diffuse) == pytest.approx(expected_dbm, abs=1e-9)


def test_closing_every_opening_leaves_the_metal_crossing_alone():
    # With no opening the cavity is fed nothing, and a cabin spot hears the wheel only through the
    # panel: the open-space level minus the metal crossing loss (road off, mean level).
    closed = box_cabin(None)
    closed = closed.model_copy(update={"radio": closed.radio.model_copy(update={"ground_reflection": False})})
    scene = Scene.from_vehicle(closed, wheel_model="knife_edge")
    assert len(scene.cavity.openings) == 0 and np.all(scene.cavity.input == 0.0)
    no_body = Scene.from_vehicle(closed, wheel_model="knife_edge", cavity=False)
    no_body = dataclasses.replace(no_body, hull=dataclasses.replace(no_body.hull, default_loss_db=0.0))
    spot = np.array([[0.0, 0.6, 0.9]])  # 0.2 m behind the left side, facing the wheel
    diff = spot_levels(no_body, spot) - spot_levels(scene, spot)
    np.testing.assert_allclose(diff, scene.hull.default_loss_db, atol=1e-9)


def test_window_lets_the_diffuse_level_in():
    # the same cabin with a glass window: the diffuse level lifts every cabin spot, even one whose
    # straight path crosses metal, far above the closed cabin (issue: a spot behind a window sees more)
    # mean levels (fade_probability 0): the fade quantile of a diffuse part comparable to the steady
    # one lies below both (deeper fades), which is a different question
    glazed = Scene.from_vehicle(box_cabin("glass"), ground_reflection=False, wheel_model="knife_edge")
    closed = Scene.from_vehicle(box_cabin(None), ground_reflection=False, wheel_model="knife_edge")
    glazed = dataclasses.replace(glazed, fade_probability=0.0)
    closed = dataclasses.replace(closed, fade_probability=0.0)
    behind_metal = np.array([[0.9, -0.6, 0.4]])  # the far corner, away from the window
    assert np.median(spot_levels(glazed, behind_metal)) > np.median(spot_levels(closed, behind_metal)) + 10.0


def test_surface_patches_cover_the_hull_once():
    # the box's surface: 2 (2 x 1.6) + 2 (2 x 1.2) + 2 (1.6 x 1.2) = 15.04 m^2, with no face counted twice
    scene = Scene.from_vehicle(box_cabin(None), cavity=False)
    p, n, a, _ = surface_samples(scene.hull, 0.1)
    assert a.sum() == pytest.approx(15.04, rel=0.01)
    assert np.allclose(np.linalg.norm(n, axis=1), 1.0)


@pytest.mark.parametrize("q", [0.01, 0.1])
def test_fade_quantile_matches_the_rician_distribution(q):
    # Rician power X = |c + d|^2, d ~ CN(0, P_d): X / (P_d / 2) is noncentral chi-square with 2 degrees
    # of freedom and noncentrality 2 K (scipy.stats.ncx2); Rayleigh (no steady part): -ln(1 - q) P_d.
    rng = np.random.default_rng(5)
    c = 10 ** rng.uniform(-8, 3, 4000)
    d = 10 ** rng.uniform(-8, 3, 4000)
    k = c / d
    ok = k < 1e7  # scipy's ppf loses accuracy beyond
    want = 0.5 * d * ncx2.ppf(q, 2, 2 * k)
    got = fade_power(c, d, q)
    assert np.max(np.abs(10 * np.log10(got[ok] / want[ok]))) < 0.001
    assert fade_power(np.array([0.0]), np.array([1.0]), q)[0] == pytest.approx(-math.log1p(-q), rel=1e-3)
    # no diffuse part: the steady power itself; q = 0: the mean
    assert fade_power(np.array([2.0]), np.array([0.0]), q)[0] == 2.0
    assert fade_power(np.array([2.0]), np.array([1.0]), 0.0)[0] == 3.0


def test_outside_the_body_nothing_fades():
    # a spot outside the hull gets no diffuse level, so the fade probability changes nothing there
    v = open_space_vehicle()
    scene = Scene.from_vehicle(v, wheel_model="knife_edge")
    mean = dataclasses.replace(scene, fade_probability=0.0)
    spot = [[2.0, 0.0, 0.5]]
    np.testing.assert_allclose(spot_levels(scene, spot), spot_levels(mean, spot))

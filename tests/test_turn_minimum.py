"""The worst case over the continuous wheel turn (core.turn_minimum) and the null floor (core.links).

The worst case of a (spot, wheel) is a minimum over a continuous angle; a number an engineer signs
off must not depend on how many angles were sampled. These checks hold the refined minimum to a
dense brute-force one and to itself at other angle counts, on every sample body with both wheel
models (the sample bodies are invented demo data; the reference here is the engine's own dense
sampling, i.e. a numerical-convergence check, not an outside source).
"""

import dataclasses
from pathlib import Path

import numpy as np
import pytest

from core.links import level_dbm, link_field
from core.scoring import Scene, score_vehicle, spot_turns, vehicle_spot_arrays
from core.turn_minimum import _Pairs
from core.vehicle import load_vehicle
from tests.engine_vehicles import open_space_vehicle

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = sorted((ROOT / "sample_vehicles").glob("*.json"))
#: issue 12: the worst case may move by at most this between 72 and 1,440 angles per turn
CONVERGED_DB = 0.5


def _with(v, **radio):
    return v.model_copy(update={"radio": v.radio.model_copy(update=radio)})


@pytest.mark.parametrize("model", ["installed_pattern", "knife_edge"])
@pytest.mark.parametrize("path", SAMPLES, ids=lambda p: p.stem)
def test_worst_case_does_not_move_with_the_angle_count(path, model):
    v = load_vehicle(path)
    worst = {n: score_vehicle(_with(v, angles_per_turn=n, wheel_model=model)).worst_dbm for n in (72, 73, 1440)}
    assert np.abs(worst[72] - worst[1440]).max() <= CONVERGED_DB
    assert np.abs(worst[73] - worst[1440]).max() <= CONVERGED_DB  # an angle count with no common multiple


@pytest.mark.parametrize("path", SAMPLES[:2], ids=lambda p: p.stem)
def test_refined_worst_case_matches_a_dense_brute_force_minimum(path):
    # 72 sampled angles refined, against the plain minimum of 7,200 sampled angles (0.05 deg apart)
    v = _with(load_vehicle(path), wheel_model="knife_edge")
    names, pos, ax = vehicle_spot_arrays(v)
    refined = spot_turns(Scene.from_vehicle(v), pos, ax)
    dense = spot_turns(Scene.from_vehicle(_with(v, angles_per_turn=7200)), pos, ax, refine=False)
    brute = dense.levels_dbm.min(axis=2)
    assert np.abs(refined.worst_dbm - brute).max() <= CONVERGED_DB
    # never above what the 72 samples themselves show
    assert np.all(refined.worst_dbm <= refined.levels_dbm.min(axis=2) + 1e-9)


def test_worst_case_is_a_level_computed_at_its_own_angle():
    # the refined worst case is an evaluation of the link model at a real wheel angle, not an
    # extrapolation: evaluating the model again at the reported angle gives the same level
    v = load_vehicle(SAMPLES[0])
    scene = Scene.from_vehicle(v)
    names, pos, ax = vehicle_spot_arrays(v)
    t = spot_turns(scene, pos[:3], ax[:3])
    pairs = _Pairs(scene, pos[:3], ax[:3], None)
    again = level_dbm(scene, pairs.evaluate(t.worst_angle_rad.reshape(-1, 1))).reshape(t.worst_dbm.shape)
    np.testing.assert_allclose(again, t.worst_dbm, atol=1e-9)


def test_null_floor_holds_an_exact_two_ray_null_at_its_depth():
    # Two rays of equal strength in antiphase cancel without limit in the ideal model; the floor
    # keeps the power at null_floor_db below the rays' matched power sum (|E_d|^2 + |E_r|^2 with
    # peak coupling). With a road reflection coefficient of -1 the rays cancel to about
    # 2 sin^2(k h_t h_r / d) of that sum (Rappaport sec. 4.6), below -30 dB beyond roughly 130 m here.
    # A perfectly conducting road (Fresnel TE coefficient -1: Rappaport sec. 4.6) and horizontal
    # dipoles along y: the rays cancel to within (d_r - d)/d, far below the 30 dB floor.
    v = open_space_vehicle(sensor_axis="axial", receiver_axis=(0.0, 1.0, 0.0), ground=True)
    scene = dataclasses.replace(Scene.from_vehicle(v, wheel_model="knife_edge"), road_eps=complex(1.0, -1e12),
                                use_wheel_loss=False)  # the bare sensor: both rays leave it unshadowed
    src = scene.sensor_pos[0, 18][None, :]
    # receivers along x 1 m up, out to where the two rays cancel by more than the floor
    d = np.geomspace(2.0, 1000.0, 4000)
    dst = np.stack([src[0, 0] + d, np.full_like(d, src[0, 1]), np.full_like(d, 1.0)], axis=1)
    n = len(d)
    f = link_field(scene, 0, np.full(n, scene.angles_rad[18]), np.repeat(src, n, axis=0),
                   np.repeat(scene.sensor_axis[0, 18][None], n, axis=0), np.repeat(scene.sensor_bits[0, 18], n),
                   dst, np.tile([0.0, 1.0, 0.0], (n, 1)))
    raw = f.re**2 + f.im**2
    ratio_db = 10 * np.log10(f.power() / (f.floor2 / 10 ** (scene.null_floor_db / 10)))
    assert ratio_db.min() == pytest.approx(scene.null_floor_db, abs=1e-9)  # held exactly at the floor
    assert (raw < f.floor2).any()  # the sweep does pass through deeper (unphysical) cancellation
    # away from the nulls the floor changes nothing: the coherent two-ray sum is returned as it is
    clear = raw > 2 * f.floor2
    np.testing.assert_allclose(f.power()[clear], raw[clear])


def test_null_floor_with_one_ray_is_the_polarization_floor():
    # With the road off, the floor is the pattern-and-polarization floor of DESIGN.md section 5:
    # 20 log10 max(|a_s_perp . a_r|, f) (Balanis, polarization loss factor) - a receiver crossed
    # with the sensor dipole sits exactly at the floor below the matched level.
    crossed = open_space_vehicle(sensor_axis="axial", receiver_axis=(0.0, 0.0, 1.0), ground=False)
    matched = open_space_vehicle(sensor_axis="axial", receiver_axis=(0.0, 1.0, 0.0), ground=False)
    sc, sm = Scene.from_vehicle(crossed, wheel_model="knife_edge"), Scene.from_vehicle(matched, wheel_model="knife_edge")
    spot = [[2.0, sc.sensor_pos[0, 0, 1], 0.5]]  # in the sensor's plane: the path is normal to its axis
    lc = spot_turns(sc, spot, refine=False).levels_dbm
    lm = spot_turns(sm, spot, refine=False).levels_dbm
    np.testing.assert_allclose(lc - lm, crossed.radio.null_floor_db, atol=1e-9)

"""The vectorised engine against the scalar reference (core.reference), and the heatmap's chunking.

The oracle, core.reference.ReferenceModel, computes the same link model one path at a time with
shapely geometry and the textbook formulas (ITU-R P.525 free space, ITU-R P.526-15 eq. 26/31
knife edge, Fresnel reflection per Rappaport sec. 4.5), written from the engine's documented model
and sharing no code with core.geometry / core.wheel / core.links. The two must agree within
0.01 dB (issue 4) on random (spot, wheel, angle) cases on every sample body, with and without the
road reflection, the cavity's diffuse level (core.cavity: power balance, wall factors) and the fade
quantile (scipy's noncentral chi-square against the engine's table) included.

Excluded cases (narrow rule): the reference raises DegenerateCase when a path meets an outline
vertex, runs along an outline edge, or meets two different boundaries within 1e-9 m of each
other (the model is ambiguous exactly there). At most 1 % of the draws may be excluded, so the rule
cannot hide a real disagreement.
"""

from __future__ import annotations

import dataclasses
import zlib
from pathlib import Path

import numpy as np
import pytest

from core.cavity import build_cavity
from core.reference import DegenerateCase, ReferenceModel
from core.scoring import Cancelled, Scene, heatmap, spot_levels
from core.vehicle import load_vehicle

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = sorted((ROOT / "sample_vehicles").glob("*.json"))
CASES = 220  # per body and per road-reflection setting (issue 4: at least 200)
TOLERANCE_DB = 0.01  # issue 4
#: opening patch spacing of the cavity in these comparisons, m (the product uses core.cavity.SAMPLE_SPACING_M;
#: the model is the same at any spacing, and the scalar input sum costs a shapely path per patch)
CAVITY_SPACING_M = 0.6
#: wheel angles of the cavity input table in these comparisons (the product uses core.cavity.INPUT_ANGLES)
CAVITY_ANGLES = 6


def _random_cases(v, rng, n):
    """Spots uniformly in the body's bounding box grown by 0.3 m (z from 5 cm above the road),
    random receiver axes, wheels and angle indices."""
    top = np.asarray(v.body.top_outline)
    side = np.asarray(v.body.side_outline)
    lo = np.array([top[:, 0].min() - 0.3, top[:, 1].min() - 0.3, 0.05])
    hi = np.array([top[:, 0].max() + 0.3, top[:, 1].max() + 0.3, side[:, 1].max() + 0.3])
    spots = lo + rng.random((n, 3)) * (hi - lo)
    axes = rng.normal(size=(n, 3))
    axes /= np.linalg.norm(axes, axis=1, keepdims=True)
    wheels = rng.integers(0, len(v.wheels), n)
    angles = rng.integers(0, v.radio.angles_per_turn, n)
    return spots, axes, wheels, angles


def _compare(v, ground: bool, seed: int, n: int = CASES):
    rng = np.random.default_rng(seed)
    spots, axes, wheels, angles = _random_cases(v, rng, n)
    # the cavity's opening patches at a coarse spacing (CAVITY_SPACING_M) keep the scalar input sums short
    scene = Scene.from_vehicle(v, ground_reflection=ground, wheel_model="knife_edge", cavity=False)
    scene = dataclasses.replace(scene, cavity=build_cavity(scene, v.body.cabin_absorption_m2, CAVITY_SPACING_M,
                                                           CAVITY_ANGLES))
    ref = ReferenceModel(v, ground_reflection=ground, cavity_spacing_m=CAVITY_SPACING_M, cavity_angles=CAVITY_ANGLES)
    engine = spot_levels(scene, spots, axes)  # (S, W, A)
    diffs, excluded, inside = [], 0, 0
    for i in range(n):
        try:
            expected = ref.level_dbm(spots[i], int(wheels[i]), int(angles[i]), axes[i])
        except DegenerateCase:
            excluded += 1
            continue
        inside += ref.inside(tuple(spots[i]))
        diffs.append((abs(engine[i, wheels[i], angles[i]] - expected), i, expected))
    return diffs, excluded, inside


@pytest.mark.parametrize("ground", [False, True], ids=["direct only", "with road reflection"])
@pytest.mark.parametrize("path", SAMPLES, ids=[p.stem for p in SAMPLES])
def test_engine_agrees_with_scalar_reference(path, ground):
    v = load_vehicle(path)
    diffs, excluded, inside = _compare(v, ground, seed=zlib.crc32(f"{path.stem} {ground}".encode()))
    assert excluded <= CASES // 100, f"{excluded} degenerate draws: the exclusion rule is too wide"
    assert len(diffs) >= 200
    # both spots in the cabin/boot and spots outside the body are exercised
    assert 20 <= inside <= len(diffs) - 20
    worst, i, expected = max(diffs)
    assert worst <= TOLERANCE_DB, f"case {i}: engine differs from the reference ({expected:.3f} dBm) by {worst:.4f} dB"


@pytest.mark.parametrize(
    "sensor_pattern, sensor_axis, receiver_pattern",
    [("isotropic", "radial", "dipole"), ("dipole", "tangential", "isotropic"), ("isotropic", "axial", "isotropic")],
)
def test_antenna_variants_agree_with_scalar_reference(sensor_pattern, sensor_axis, receiver_pattern):
    """The other antenna branches of the link model (the samples all use dipoles, radial sensor)."""
    v = load_vehicle(ROOT / "sample_vehicles" / "sedan.json")
    r = v.radio
    radio = r.model_copy(
        update={
            "sensor": r.sensor.model_copy(update={"pattern": sensor_pattern, "axis": sensor_axis}),
            "receiver": r.receiver.model_copy(update={"pattern": receiver_pattern}),
        }
    )
    v = v.model_copy(update={"radio": radio})
    diffs, excluded, _ = _compare(v, True, seed=11, n=60)
    assert excluded <= 1 and len(diffs) >= 59
    assert max(diffs)[0] <= TOLERANCE_DB


def test_reference_reproduces_a_hand_worked_link():
    """The FL sensor at theta = 90 deg (radial axis along +x) and a spot 10 m straight outboard of it
    (+y), receiver axis along x: no body crossing (the sensor is outboard of the wheelhouse wall), the
    path runs parallel to the wheel axis at the rim radius, so it grazes the outer flange (h = 0,
    J(0) = 6.03 dB, ITU-R P.526-15 eq. 31 check value) and leaves through the sidewall (1.5 dB,
    the engineering default of core.materials); the dipoles are parallel and broadside (coupling 1).
    Level = EIRP + G_r - L_fs - J(0) - sidewall, L_fs = 20 log10(4 pi d / lambda) (ITU-R P.525)."""
    v = load_vehicle(ROOT / "sample_vehicles" / "sedan.json")
    ref = ReferenceModel(v, ground_reflection=False)
    a = v.radio.angles_per_turn // 4  # theta = 90 deg
    src, axis = ref.sensor(0, a)
    assert np.allclose(axis, (1.0, 0.0, 0.0))
    spot = (src[0], src[1] + 10.0, src[2])
    assert ref.crossings(src, spot) == []
    assert ref.wheel_loss_db(0, src, spot) == pytest.approx(6.03 + 1.5, abs=0.005)
    lam = 299_792_458.0 / v.radio.frequency_hz
    friis_db = 20 * np.log10(4 * np.pi * 10.0 / lam)
    expected = v.radio.sensor_eirp_dbm + v.radio.receiver.gain_dbi - friis_db - 6.03 - 1.5
    assert ref.level_dbm(spot, 0, a, (1.0, 0.0, 0.0)) == pytest.approx(expected, abs=0.005)


def test_end_face_in_both_outlines_takes_the_side_view_zone():
    """core.geometry's docstring: a crossing through a side or end face takes its material from the
    side-view zones at (x, z). The sedan's front face at x = 0.95 m is an edge of the top outline and of
    the side outline (z 0.30-0.62 m); make its side-view zone 'open' (0 dB) and keep the top-view
    bumper zone plastic: a path through the face must lose 0 dB there."""
    from core.geometry import hull_crossings

    v = load_vehicle(ROOT / "sample_vehicles" / "sedan.json")
    zones = tuple(z.model_copy(update={"material": "open"}) if z.name == "front bumper fascia" else z for z in v.zones)
    v = v.model_copy(update={"zones": zones})
    scene = Scene.from_vehicle(v, wheel_model="knife_edge")
    a = np.array([[1.5, 0.1, 0.45]])
    b = np.array([[0.3, -0.1, 0.50]])
    ref = ReferenceModel(v)
    assert ref.crossings(tuple(a[0]), tuple(b[0]))[0][1] == 0.0
    c = hull_crossings(scene.hull, a, b)
    assert c.loss_db[0, 0] == 0.0
    # and leaving through the face (the path reversed)
    assert ref.crossings(tuple(b[0]), tuple(a[0]))[-1][1] == 0.0
    back = hull_crossings(scene.hull, b, a)
    assert back.direction[0, 0] == -1 and back.loss_db[0, 0] == 0.0


# ----- heatmap chunking --------------------------------------------------------------------
@pytest.fixture(scope="module")
def sedan_scene():
    v = load_vehicle(ROOT / "sample_vehicles" / "sedan.json")
    region = next(r for r in v.regions if r.view == "top")
    return Scene.from_vehicle(v, wheel_model="knife_edge"), region


def test_chunked_and_unchunked_heatmaps_are_identical(sedan_scene):
    scene, region = sedan_scene
    links_per_spot = len(scene.wheels) * len(scene.angles_rad)
    whole = heatmap(scene, region, 0.2, chunk_links=10**9)
    calls = []
    chunked = heatmap(scene, region, 0.2, chunk_links=7 * links_per_spot, progress=lambda d, t: calls.append((d, t)))
    cells = int(np.isfinite(whole.margin_db).sum())
    assert cells > 50
    assert len(calls) == -(-cells // 7)  # one progress call per chunk of 7 spots
    assert calls[-1] == (cells, cells)
    np.testing.assert_array_equal(chunked.margin_db, whole.margin_db)
    np.testing.assert_array_equal(chunked.worst_wheel, whole.worst_wheel)


def test_cancel_stops_within_one_chunk(sedan_scene):
    scene, region = sedan_scene
    links_per_spot = len(scene.wheels) * len(scene.angles_rad)
    done = []
    flag = {"cancel": False}

    def progress(d, t):
        done.append(d)
        flag["cancel"] = True  # the user presses cancel while the first chunk runs

    with pytest.raises(Cancelled):
        heatmap(scene, region, 0.2, chunk_links=5 * links_per_spot, progress=progress, cancel=lambda: flag["cancel"])
    assert done == [5]  # the chunk in flight finished; no further chunk started


def test_cancel_before_the_start_computes_nothing(sedan_scene):
    scene, region = sedan_scene
    done = []
    with pytest.raises(Cancelled):
        heatmap(scene, region, 0.2, progress=lambda d, t: done.append(d), cancel=lambda: True)
    assert done == []

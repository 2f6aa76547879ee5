"""Engine-level checks of the scores (issue 3): burst success, wheel distinctness, ranking and
worst case, heatmap grids with progress and cancel."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from shapely.geometry import Point, Polygon

from core.burst import START_ANGLES, burst_for_spot, burst_success
from core.distinctness import wheel_distinctness
from core.scoring import (
    Cancelled,
    Scene,
    grid_for_region,
    heatmap,
    heatmap_stages,
    score_levels,
    score_spots,
    score_vehicle,
    tie_note,
)
from core.vehicle import Region
from engine_vehicles import sedan

R_M = 0.3284  # rolling radius of a 225/50R17 (ISO: 17 x 25.4 / 2 + 225 x 0.50 mm = 328.4 mm)
DT_S = 0.1


def _angles(n):
    return np.arange(n) * (2 * np.pi / n)


# --- burst success ---------------------------------------------------------------------------


def test_parked_success_is_the_share_of_angles_above_threshold():
    # Definition (DESIGN.md section 5): parked, all frames fall on the start angle, so P is the
    # share of start angles whose level clears the threshold. With levels given at the burst's own
    # start angles the share is exact.
    rng = np.random.default_rng(3)
    a = _angles(START_ANGLES)
    levels = -100 + 15 * np.sin(a) + 5 * np.sin(3 * a + 1) + rng.normal(0, 2, a.size)
    r = burst_success(levels, a, -99.0, frames=4, interval_s=DT_S, speeds_mps=[0.0], rolling_radius_m=R_M)
    share = np.mean(levels >= -99.0)
    assert 0.2 < share < 0.8
    assert r.parked[0] == pytest.approx(share, abs=1e-12)
    assert r.success[0, 0] == pytest.approx(share, abs=1e-12)  # v = 0 is the parked case


def test_parked_success_of_a_cosine_level_is_its_arc_share():
    # Elementary trigonometry: cos(theta) >= 1/2 on |theta| <= 60 deg, a third of the turn.
    # 72 samples with linear interpolation (the crossings fall on samples): within one start angle.
    a = _angles(72)
    levels = -95 + 10 * np.cos(a)
    r = burst_success(levels, a, -90.0, frames=1, interval_s=DT_S, speeds_mps=[0.0, 7.0], rolling_radius_m=R_M)
    assert r.parked[0] == pytest.approx(1 / 3, abs=1.0 / START_ANGLES + 1e-12)
    # one frame per burst: no diversity at any speed
    np.testing.assert_allclose(r.success[0], r.parked[0], atol=1e-12)


def test_resonant_speed_gains_nothing_and_other_speeds_gain():
    # DESIGN.md section 5: at v_n = 2 pi n R / dt every frame lands on the start angle again, so the
    # success equals the parked value; frames at other speeds can only add (frame 0 is the parked
    # frame). With the golden-angle step (2 pi (1 - 1/phi) = 137.5 deg between frames) eight frames
    # leave no gap wider than 52.5 deg (three-distance theorem, Steinhaus/Sos), so a 120 deg arc
    # above the threshold is always hit: P = 1.
    a = _angles(72)
    levels = -95 + 10 * np.cos(a)
    v_res = 2 * np.pi * R_M / DT_S
    golden = 2 * np.pi * (1 - 2 / (1 + math.sqrt(5)))
    v_golden = golden * R_M / DT_S
    speeds = np.array([0.0, 1.3, v_golden, v_res, 2 * v_res, 17.0])
    r = burst_success(levels, a, -90.0, frames=8, interval_s=DT_S, speeds_mps=speeds, rolling_radius_m=R_M)
    tol = 2.0 / START_ANGLES  # floating-point rounding of theta0 + 2 pi k at a crossing
    assert r.success[0, 3] == pytest.approx(r.parked[0], abs=tol)
    assert r.success[0, 4] == pytest.approx(r.parked[0], abs=tol)
    assert np.all(r.success[0] >= r.parked[0] - 1e-12)
    assert r.success[0, 2] == pytest.approx(1.0)
    assert r.success[0, 1] > r.parked[0] + 0.1
    # the resonant speeds in the sweep range are reported
    np.testing.assert_allclose(r.resonant_mps[0], [v_res, 2 * v_res], rtol=1e-12)


def test_half_turn_hand_worked_example():
    # Worked by hand: the level clears the threshold on exactly half the turn (+10 dB on
    # 0..180 deg, -10 dB on 180..360 deg, threshold 0 dB; linear interpolation puts the crossings at
    # 177.5 and 357.5 deg, half a turn apart).
    a = _angles(72)
    levels = np.where(a < np.pi - 1e-9, 10.0, -10.0)
    half = np.pi * R_M / DT_S  # frames half a turn apart
    quarter = 0.5 * np.pi * R_M / DT_S
    full = 2 * np.pi * R_M / DT_S
    r = burst_success(levels, a, 0.0, frames=2, interval_s=DT_S, speeds_mps=[0.0, half, quarter, full],
                      rolling_radius_m=R_M)
    assert r.parked[0] == pytest.approx(0.5, abs=1.0 / START_ANGLES + 1e-12)
    # K = 2 half a turn apart: one of the two frames is always in the good half -> P = 1
    assert r.success[0, 1] == pytest.approx(1.0)
    # a quarter turn apart: both frames miss only when theta0 lies in the last quarter of the bad half -> 3/4
    assert r.success[0, 2] == pytest.approx(0.75, abs=1.0 / START_ANGLES + 1e-12)
    # a full turn apart: the parked value
    assert r.success[0, 3] == pytest.approx(r.parked[0], abs=2.0 / START_ANGLES)


def test_burst_for_sedan_spot_parked_equals_share_of_its_angles():
    # Same definition on the engine's own levels: with 720 angles per turn the start angles are the
    # scored angles, so parked = share of the spot's angles at or above the sensitivity.
    v = sedan(angles_per_turn=START_ANGLES)
    scene = Scene.from_vehicle(v, wheel_model="knife_edge")
    s = score_vehicle(v, scene)
    # a receiver sensitivity at the median level of the first spot's worst wheel, so some angles fail
    sens = float(np.median(s.levels_dbm[0, s.worst_wheel[0]]))
    v = v.model_copy(update={"radio": v.radio.model_copy(
        update={"receiver": v.radio.receiver.model_copy(update={"sensitivity_dbm": sens})})})
    scene = Scene.from_vehicle(v, wheel_model="knife_edge")
    s = score_vehicle(v, scene)
    shares = np.mean(s.levels_dbm >= scene.sensitivity_dbm, axis=2)  # (S, W)
    i = int(np.argmin(np.abs(shares.min(axis=1) - 0.5)))  # a spot whose worst wheel is partly heard
    r = burst_for_spot(scene, s, i)
    np.testing.assert_allclose(r.parked, shares[i], atol=1e-12)
    w = int(np.argmin(r.parked))
    assert 0.0 < r.parked[w] < 1.0
    assert np.all(r.success >= r.parked[:, None] - 1e-12)
    assert r.success[w].max() > r.parked[w] + 0.1  # four frames while moving help the partly heard wheel
    assert r.success[:, 0] == pytest.approx(r.parked)  # the sweep starts at v = 0


# --- wheel distinctness ------------------------------------------------------------------------


def test_wheel_distinctness_hand_made_example():
    # Worked by hand (definitions in DESIGN.md section 5 / core.distinctness): medians 4.5, 3 and
    # 22 dBm; the closest pair is (A quieter, B louder), 1.5 dB apart; one of A's five frames (5)
    # is louder than B's median 4.5 -> overlap 0.2.
    b = [2.5, 3.5, 4.5, 5.5, 6.5]
    a = [1.0, 2.0, 3.0, 4.0, 5.0]
    c = [20.0, 21.0, 22.0, 23.0, 24.0]
    d = wheel_distinctness(np.array([b, a, c]), ("B", "A", "C"))
    np.testing.assert_allclose(d.medians_dbm, [4.5, 3.0, 22.0])
    assert d.closest_pair == (1, 0)
    assert d.min_separation_db == pytest.approx(1.5)
    assert d.closest_overlap == pytest.approx(0.2)
    assert d.separation_db[0, 2] == pytest.approx(17.5)
    assert d.separation_db[1, 2] == pytest.approx(19.0)
    assert d.overlap[0, 1] == pytest.approx(0.2) and d.overlap[1, 0] == pytest.approx(0.2)
    assert d.overlap[0, 2] == 0.0 and d.overlap[1, 2] == 0.0
    # two identical wheels: 0 dB apart, and 2 of 5 frames lie above the shared median
    same = wheel_distinctness(np.array([a, a]))
    assert same.min_separation_db == 0.0
    assert same.closest_overlap == pytest.approx(0.4)


# --- ranking and worst case --------------------------------------------------------------------


def _hand_levels(scene):
    """Four spots over the scene's wheels and angles, worst cases and medians set by hand (dBm)."""
    W, A = len(scene.wheels), len(scene.angles_rad)
    lv = np.full((4, W, A), -85.0)
    lv[0, 2, :] = -92.0
    lv[0, 2, 10] = -100.0  # worst -100 on wheel 2, its median -92
    lv[1, :, 5] = -95.0  # worst -95 on every wheel
    lv[2, 1, :] = -88.0
    lv[2, 1, 40] = -100.0  # worst -100 on wheel 1, its median -88
    lv[3, 3, 0] = -110.0  # worst -110 on wheel 3
    return lv


def test_order_sorts_by_margin_then_worst_wheel_median():
    # Ranking rule of DESIGN.md section 5 (margin = worst wheel's worst case - sensitivity -
    # required margin; ties by the median), worked by hand with the sedan's -105 dBm and 6 dB.
    scene = Scene.from_vehicle(sedan(), wheel_model="knife_edge")
    assert scene.worst_percentile == 0.0
    s = score_levels(scene, _hand_levels(scene), names=["a", "b", "c", "d"])
    sens, req = scene.sensitivity_dbm, scene.required_margin_db
    np.testing.assert_allclose(s.margin_db, np.array([-100.0, -95.0, -100.0, -110.0]) - sens - req)
    assert list(s.worst_wheel[[0, 2, 3]]) == [2, 1, 3]
    assert s.worst_angle_deg[0, 2] == pytest.approx(50.0) and s.worst_angle_deg[2, 1] == pytest.approx(200.0)
    assert list(s.order()) == [1, 2, 0, 3]


def test_spots_within_the_rank_resolution_are_not_ranked_apart():
    # Same hand-made levels: worst cases -95 (b), -100 (c: median -88), -100 (a), -110 (d) dBm. With the
    # default 4.5 dB resolution the best stands alone; with 5 dB, b, c and a (within 5 dB of -95) go together,
    # in rank order; d (15 dB down) never does. Excluding the best as a candidate moves the group down.
    scene = Scene.from_vehicle(sedan(), wheel_model="knife_edge")
    s = score_levels(scene, _hand_levels(scene), names=["a", "b", "c", "d"])
    assert s.tied_with_best() == [1] and tie_note(s, [1]) == ""
    assert s.tied_with_best(resolution_db=5.0) == [1, 2, 0]
    assert s.tied_with_best(np.array([True, False, True, True]), resolution_db=5.0) == [2, 0]
    assert s.tied_with_best(np.zeros(4, bool)) == [1]  # no candidate at all: every spot counts
    note = tie_note(s, [1, 2, 0])
    assert note.startswith("3 spots lie within 4.5 dB of the best margin ('b', 'c', 'a': ") and "docs/VALIDATION.md" in note


def test_percentile_worst_case_is_not_below_the_minimum():
    # Order statistics: a low percentile of a sample is never below its minimum nor above its
    # median; the reported angle carries a level at or below the percentile value.
    v = sedan()
    base = Scene.from_vehicle(v, wheel_model="knife_edge")
    pct = dataclasses.replace(base, worst_percentile=10.0)
    s_min = score_vehicle(v, base)
    s_pct = score_vehicle(v, pct)
    np.testing.assert_allclose(s_pct.levels_dbm, s_min.levels_dbm)
    lv = s_min.levels_dbm
    assert np.all(s_pct.worst_dbm >= lv.min(axis=2) - 1e-12)
    assert np.all(s_pct.worst_dbm <= s_pct.median_dbm + 1e-12)
    assert np.any(s_pct.worst_dbm > lv.min(axis=2) + 0.5)  # the percentile does change something
    assert np.all(s_pct.margin_db >= s_min.margin_db - 1e-12)
    idx = np.rint(s_pct.worst_angle_deg / (360.0 / lv.shape[2])).astype(int)
    at = np.take_along_axis(lv, idx[..., None], axis=2)[..., 0]
    assert np.all(at <= s_pct.worst_dbm + 1e-9)


# --- heatmaps ----------------------------------------------------------------------------------

TRIANGLE = ((-3.5, -0.6), (0.4, -0.6), (-3.5, 0.6))


@pytest.fixture(scope="module")
def small_scene():
    return Scene.from_vehicle(sedan(angles_per_turn=24), wheel_model="knife_edge")


def _triangle_region():
    return Region(name="triangle", view="top", outline=TRIANGLE, height_m=0.45)


def test_heatmap_cells_outside_the_region_are_nan_and_cells_match_score_spots(small_scene):
    # Independent point-in-polygon (shapely) for the mask; each cell is the single-spot score at
    # its centre (same engine path, so equality within rounding).
    region = _triangle_region()
    hm = heatmap(small_scene, region, step_m=0.2)
    u, v, mask, fixed = grid_for_region(region, 0.2)
    poly = Polygon(TRIANGLE)
    pts = hm.points()
    assert fixed == 0.45 and np.all(pts[..., 2] == 0.45)
    expected_mask = np.array([[poly.contains(Point(p[0], p[1])) for p in row] for row in pts])
    np.testing.assert_array_equal(mask, expected_mask)
    assert 0 < mask.sum() < mask.size
    np.testing.assert_array_equal(np.isnan(hm.margin_db), ~mask)
    np.testing.assert_array_equal(hm.worst_wheel == -1, ~mask)
    cells = np.argwhere(mask)[:: max(1, int(mask.sum()) // 6)]
    for iv, iu in cells:
        one = score_spots(small_scene, [pts[iv, iu]])
        assert hm.margin_db[iv, iu] == pytest.approx(one.margin_db[0], abs=1e-9)
        assert hm.worst_wheel[iv, iu] == one.worst_wheel[0]


def test_side_view_heatmap_cell_matches_score_spots(small_scene):
    region = Region(name="side", view="side", outline=((-3.0, 0.3), (-0.6, 0.3), (-0.6, 1.2), (-3.0, 1.2)),
                    lateral_m=0.25)
    hm = heatmap(small_scene, region, step_m=0.3)
    pts = hm.points()
    assert np.all(pts[..., 1] == 0.25)
    assert not np.isnan(hm.margin_db).any()
    for iv, iu in [(0, 0), (pts.shape[0] - 1, pts.shape[1] - 1), (1, 2)]:
        x, y, z = pts[iv, iu]
        assert (x, z) == (hm.u_m[iu], hm.v_m[iv])
        assert hm.margin_db[iv, iu] == pytest.approx(score_spots(small_scene, [[x, y, z]]).margin_db[0], abs=1e-9)


def test_heatmap_progress_reaches_total(small_scene):
    region = _triangle_region()
    calls = []
    links_per_spot = len(small_scene.wheels) * len(small_scene.angles_rad)
    hm = heatmap(small_scene, region, 0.2, progress=lambda d, t: calls.append((d, t)), chunk_links=5 * links_per_spot)
    total = int(np.isfinite(hm.margin_db).sum())
    assert len(calls) == math.ceil(total / 5)
    assert all(t == total for _, t in calls)
    done = [d for d, _ in calls]
    assert done == sorted(done) and done[-1] == total


def test_heatmap_cancel_raises_before_the_next_chunk(small_scene):
    region = _triangle_region()
    links_per_spot = len(small_scene.wheels) * len(small_scene.angles_rad)
    calls = []
    with pytest.raises(Cancelled):
        heatmap(small_scene, region, 0.2, progress=lambda d, t: calls.append(d), cancel=lambda: len(calls) >= 1,
                chunk_links=5 * links_per_spot)
    assert calls == [5]  # the first chunk finished; the second never started
    calls.clear()
    with pytest.raises(Cancelled):
        heatmap(small_scene, region, 0.2, progress=lambda d, t: calls.append(d), cancel=lambda: True)
    assert calls == []


@pytest.mark.parametrize("n_angles", [72, 90, 360])
def test_burst_on_the_start_grid_equals_general_interpolation(n_angles, monkeypatch):
    # The burst's shortcut when the level's angles are start angles (core.burst._best_frames: linear
    # interpolation between start angles, which is exact there) against np.interp on the level's own
    # angles for every frame (the general path): same linear interpolation, so equal to round-off.
    from core import burst

    rng = np.random.default_rng(11)
    a = _angles(n_angles)
    levels = -95 + 12 * np.sin(a[None, :] + np.array([[0.0], [1.3]])) + rng.normal(0, 3, (2, n_angles))
    speeds = np.linspace(0.0, 20.0, 97)
    radius = np.array([R_M, 1.1 * R_M])
    assert burst._on_start_grid(a, START_ANGLES)
    fast = burst_success(levels, a, -88.0, 3, DT_S, speeds, radius)
    monkeypatch.setattr(burst, "_on_start_grid", lambda _a, _t: False)
    general = burst_success(levels, a, -88.0, 3, DT_S, speeds, radius)
    np.testing.assert_allclose(fast.margin_db, general.margin_db, atol=1e-9)
    np.testing.assert_allclose(fast.success, general.success, atol=1.0 / START_ANGLES + 1e-12)
    assert np.mean(fast.success == general.success) > 0.99
    assert 0.05 < float(general.success.mean()) < 0.95  # the threshold cuts the turn: the test can fail


def test_burst_off_the_start_grid_takes_the_general_path():
    # 7 angles per turn are not start angles (720 / 7 is not whole): the shortcut must not apply
    from core import burst

    assert not burst._on_start_grid(_angles(7), START_ANGLES)
    assert not burst._on_start_grid(_angles(72) + 0.01, START_ANGLES)


# --- progressive heatmap (issue 17 item 3) ---------------------------------------------------


def test_heatmap_stages_coarse_cells_are_the_full_heatmaps_cells_and_the_last_stage_is_the_heatmap(small_scene):
    # Each stage computes only new cells; the last stage must equal the one-stage heatmap exactly
    # (same engine call per cell), and a coarse stage's cell must be the full grid's cell at that point.
    region = _triangle_region()
    full = heatmap(small_scene, region, 0.1)
    stages = list(heatmap_stages(small_scene, region, 0.1))
    assert [h.stride for h in stages] == [4, 2, 1]
    assert [h.complete for h in stages] == [False, False, True]
    last = stages[-1]
    np.testing.assert_array_equal(last.margin_db, full.margin_db)  # nan in the same places too
    np.testing.assert_array_equal(last.worst_wheel, full.worst_wheel)
    np.testing.assert_array_equal(last.cell_state, full.cell_state)
    np.testing.assert_array_equal(last.u_m, full.u_m)
    for h in stages[:-1]:
        k, o = h.stride, 1  # offset (4 - 1) // 2 = 1 in both directions, the same for every stage
        np.testing.assert_array_equal(h.u_m, full.u_m[o::k])
        np.testing.assert_array_equal(h.v_m, full.v_m[o::k])
        np.testing.assert_array_equal(h.margin_db, full.margin_db[o::k, o::k])
        np.testing.assert_array_equal(h.cell_state, full.cell_state[o::k, o::k])
        assert h.step_m == pytest.approx(0.1 * k)
        assert 0 < int(h.computed.sum()) < int(full.computed.sum())
    # the coarse cells are where the engine puts a single spot (a cell of the coarse stage, scored alone)
    iv, iu = np.argwhere(stages[0].computed)[0]
    p = stages[0].points()[iv, iu]
    assert stages[0].margin_db[iv, iu] == pytest.approx(score_spots(small_scene, [p]).margin_db[0], abs=1e-9)


def test_heatmap_stages_progress_counts_every_cell_once_and_cancel_stops(small_scene):
    region = _triangle_region()
    calls = []
    stages = list(heatmap_stages(small_scene, region, 0.1, progress=lambda d, t: calls.append((d, t))))
    total = int(stages[-1].computed.sum())
    assert all(t == total for _, t in calls) and calls[-1][0] == total
    assert [d for d, _ in calls] == sorted(d for d, _ in calls)
    seen = []
    gen = heatmap_stages(small_scene, region, 0.1, cancel=lambda: len(seen) >= 1)
    seen.append(next(gen))  # the coarse stage arrives, then the cancel flag stops the next one
    with pytest.raises(Cancelled):
        next(gen)
    with pytest.raises(ValueError):
        list(heatmap_stages(small_scene, region, 0.1, strides=(2, 4, 1)))


def test_refinement_blocks_bound_the_links_held_and_do_not_change_results(monkeypatch):
    # core.scoring.refine_block: many angles per turn make smaller blocks (the memory of a block is bounded by
    # REFINE_LINKS links); a spot's levels, worst cases and angles are the same whatever block it lands in.
    import core.scoring as scoring

    scene = Scene.from_vehicle(sedan(angles_per_turn=1440), wheel_model="knife_edge")
    assert scoring.refine_block(scene) == scoring.REFINE_LINKS // (len(scene.wheels) * 1440) < scoring.REFINE_BLOCK
    rng = np.random.default_rng(5)
    pts = np.column_stack([rng.uniform(-3.0, -0.5, 7), rng.uniform(-0.5, 0.5, 7), rng.uniform(0.3, 1.0, 7)])
    whole = score_spots(scene, pts)
    monkeypatch.setattr(scoring, "REFINE_LINKS", 2 * len(scene.wheels) * 1440)  # blocks of 2 spots: 4 blocks
    assert scoring.refine_block(scene) == 2
    split = score_spots(scene, pts)
    np.testing.assert_array_equal(split.levels_dbm, whole.levels_dbm)
    np.testing.assert_array_equal(split.worst_dbm, whole.worst_dbm)
    np.testing.assert_array_equal(split.worst_angle_deg, whole.worst_angle_deg)

"""Engine-level physical checks of the link budget (issue 3): the whole chain of core.scoring,
core.links, core.geometry and core.wheel against published bands, textbook laws and symmetry.

Formula-level checks of core.propagation / materials / regulatory live in their own test files.
"""

from __future__ import annotations

import numpy as np
import pytest

from core.geometry import body_loss_db, inside_hull
from core.propagation import free_space_loss_db, fresnel_reflection, two_ray_loss_db
from core.scoring import Scene, score_spots, score_vehicle, spot_levels, vehicle_spot_arrays
from core.wheel import wheel_loss_db
from engine_vehicles import BOX_HALF_WIDTH_M, box_cabin, open_space_vehicle, sedan

MIRROR = np.array([1.0, -1.0, 1.0])


# --- 3GPP TR 38.901 car penetration: cabin spots seen from around the car -------------------


def _cabin_spots(v, scene):
    """The sedan's spots inside the hull and between the windscreen foot and the rear window foot."""
    names, pos, _ = vehicle_spot_arrays(v)
    glass_x = [x for z in v.zones if z.view == "top" and z.material == "glass" for x, _ in z.outline]
    x_lo, x_hi = min(glass_x), max(glass_x)
    keep = inside_hull(scene.hull, pos[:, 0], pos[:, 1], pos[:, 2]) & (pos[:, 0] >= x_lo) & (pos[:, 0] <= x_hi)
    return [n for n, k in zip(names, keep) if k], pos[keep]


def _ring_around(v, radius_m: float, heights_m, n: int = 72) -> np.ndarray:
    """Points on a circle of ``radius_m`` about the plan centre of the body, at each height."""
    top = np.asarray(v.body.top_outline)
    xc, yc = 0.5 * (top.min(axis=0) + top.max(axis=0))
    phi = np.arange(n) * (2 * np.pi / n)
    return np.array([[xc + radius_m * np.cos(p), yc + radius_m * np.sin(p), h] for h in heights_m for p in phi])


def test_cabin_loss_from_outside_lies_in_3gpp_car_penetration_band():
    # 3GPP TR 38.901 (v16/v17) section 7.4.3.2: car penetration loss ~ normal, mean 9 dB, sd 5 dB
    # (standard, non-metallized windows). It is specified for 0.6-60 GHz: using it at the sedan's
    # 433.92 MHz is an extrapolation below 600 MHz, so it is a sanity band only (DESIGN.md sec. 9).
    # "Within two sd" is applied to the mean over the cabin spots and the outside points.
    v = sedan()
    scene = Scene.from_vehicle(v, wheel_model="knife_edge")
    names, spots = _cabin_spots(v, scene)
    assert len(names) >= 4, names
    w = scene.wheels[0]
    # outside points at sensor-like heights: the sensor's lowest, centre and highest heights
    heights = [w.centre[2] - w.sensor_radius_m, w.centre[2], w.centre[2] + w.sensor_radius_m]
    ring = _ring_around(v, 5.0, heights)
    assert not inside_hull(scene.hull, ring[:, 0], ring[:, 1], ring[:, 2]).any()
    per_spot = []
    for p in spots:
        loss = body_loss_db(scene.hull, ring, np.broadcast_to(p, ring.shape), scene.freq_hz)
        per_spot.append(loss.mean())
    per_spot = np.array(per_spot)
    mean_db = per_spot.mean()
    # measured at the time of writing: 15.2 dB over 7 cabin spots (per spot 5.9-19.1 dB)
    assert 9.0 - 2 * 5.0 <= mean_db <= 9.0 + 2 * 5.0, (mean_db, dict(zip(names, per_spot.round(1))))
    # Tanghe et al., IEEE Trans. Veh. Technol. 57(4), 2008: vehicle penetration loss measured
    # 3.2-23.8 dB at 600-2400 MHz (also extrapolated below 600 MHz here): every cabin spot's mean
    # loss from around the car lies in the measured range.
    assert np.all((per_spot >= 3.2) & (per_spot <= 23.8)), dict(zip(names, per_spot.round(1)))


# --- mirror symmetry ---------------------------------------------------------------------------


def _assert_sedan_is_mirror_symmetric(v):
    def mirrored_set(outline):
        return {(round(x, 9), round(-y, 9)) for x, y in outline}, {(round(x, 9), round(y, 9)) for x, y in outline}

    m, o = mirrored_set(v.body.top_outline)
    assert m == o
    for z in v.zones:
        if z.view == "top":
            m, o = mirrored_set(z.outline)
            assert m == o, z.name
    ys = {w.id: w.y_m for w in v.wheels}
    assert ys["FL"] == -ys["FR"] and ys["RL"] == -ys["RR"]


@pytest.mark.parametrize("ground", [False, True])
def test_mirror_symmetric_body_swaps_left_and_right_wheels(ground):
    # Common practice (symmetry): a body symmetric under y -> -y, with the spot and its antenna
    # axis mirrored, must give the left wheel's result for the right wheel and vice versa.
    v = sedan()
    _assert_sedan_is_mirror_symmetric(v)
    scene = Scene.from_vehicle(v, ground_reflection=ground, wheel_model="knife_edge")
    _, file_pos, file_ax = vehicle_spot_arrays(v)
    extra = np.array([[-0.85, 0.3, 0.7], [-1.75, 0.4, 0.3], [-1.2, 0.6, 1.2], [-2.0, 1.3, 0.4], [0.5, 0.5, 0.5],
                      [-3.5, 0.3, 0.4], [-2.8, 0.55, 0.33]])
    extra_ax = np.array([[1, 1, 1], [0, 1, 0], [1, 0.3, 0.2], [0.2, 1, 0.5], [1, 0, 0], [0.5, -0.5, 0.7], [0, 1, 1]],
                        float)
    pos = np.vstack([file_pos, extra])
    ax = np.vstack([file_ax, extra_ax])
    a = spot_levels(scene, pos, ax)
    b = spot_levels(scene, pos * MIRROR, ax * MIRROR)
    ids = scene.wheel_ids
    swap = [ids.index({"FL": "FR", "FR": "FL", "RL": "RR", "RR": "RL"}[i]) for i in ids]
    diff = np.abs(a - b[:, swap, :])
    assert diff.max() <= 0.1, np.unravel_index(diff.argmax(), diff.shape)


# --- distance laws in open space ---------------------------------------------------------------

# theta index of the sensor at the front of the wheel (72 angles, 5 deg apart: 18 -> 90 deg)
FRONT = 18


def test_unobstructed_level_falls_as_friis_with_ground_off():
    # Friis / ITU-R P.525: free-space loss grows by 20 log10(d2/d1); absolute level
    # P_rx = EIRP + G_r - L_fs - L_wheel for matched, peak-gain short dipoles (Balanis: two
    # dipoles along y, path perpendicular to both -> no pattern or polarization loss).
    v = open_space_vehicle(sensor_axis="axial", receiver_axis=(0.0, 1.0, 0.0), ground=False)
    scene = Scene.from_vehicle(v, wheel_model="knife_edge")
    assert scene.angles_rad[FRONT] == pytest.approx(np.pi / 2)
    src = scene.sensor_pos[0, FRONT]
    d = np.array([0.5, 1.0, 2.0, 4.0, 8.0, 16.0, 64.0])
    for elev_deg in (0.0, 30.0, 60.0):  # rays in the wheel plane, leaving the rim outward
        e = np.radians(elev_deg)
        spots = src + d[:, None] * np.array([np.cos(e), 0.0, np.sin(e)])
        # the rim does not shadow these rays: the wheel costs only the tread crossing, at every distance
        wl = wheel_loss_db(scene.wheels[0], np.broadcast_to(src, spots.shape), spots, scene.freq_hz,
                           scene.sidewall_loss_db, scene.tread_loss_db)
        np.testing.assert_allclose(wl, scene.tread_loss_db, atol=1e-9)
        level = spot_levels(scene, spots)[:, 0, FRONT]
        np.testing.assert_allclose(np.diff(level), -20 * np.log10(d[1:] / d[:-1]), atol=0.01)
        expected = scene.eirp_dbm + scene.receiver_gain_dbi - free_space_loss_db(d, scene.freq_hz) - scene.tread_loss_db
        np.testing.assert_allclose(level, expected, atol=0.01)


def test_unobstructed_level_follows_two_ray_model_with_ground_on_horizontal_polarization():
    # Rappaport, Wireless Communications sec. 4.6, two-ray model with the road's Fresnel
    # coefficient for E perpendicular to the plane of incidence (horizontal dipoles along y, path
    # along x) at the grazing angle atan((h_t + h_r)/d); core.propagation.two_ray_loss_db is checked
    # against Rappaport's asymptote in tests/test_propagation.py. Both rays leave the tire through
    # the tread (10 dB, same on both), so the level is EIRP + G_r - L_two_ray - L_tread.
    v = open_space_vehicle(sensor_axis="axial", receiver_axis=(0.0, 1.0, 0.0), ground=True, null_floor_db=-80.0)
    scene = Scene.from_vehicle(v, wheel_model="knife_edge")
    src = scene.sensor_pos[0, FRONT]
    h_t = src[2]
    d = np.array([1.0, 2.0, 4.0, 8.0, 16.0, 32.0, 100.0, 200.0, 400.0])
    for h_r in (h_t, 0.3, 1.0):
        spots = np.stack([src[0] + d, np.full_like(d, src[1]), np.full_like(d, h_r)], axis=1)
        level = spot_levels(scene, spots)[:, 0, FRONT]
        gamma_perp, _ = fresnel_reflection(scene.road_eps, np.arctan((h_t + h_r) / d))
        expected = (scene.eirp_dbm + scene.receiver_gain_dbi - two_ray_loss_db(d, h_t, h_r, scene.freq_hz, gamma_perp)
                    - scene.tread_loss_db)
        np.testing.assert_allclose(level, expected, atol=0.05)
        # far beyond the crossover distance: 40 log10 d (Rappaport eq. 4.52), 12.04 dB per doubling
        assert level[-2] - level[-1] == pytest.approx(40 * np.log10(2.0), abs=0.1)
        # and well below free space there (the ground ray cancels the direct one)
        fs = scene.eirp_dbm - free_space_loss_db(d[-1], scene.freq_hz) - scene.tread_loss_db
        assert level[-1] < fs - 20.0


def test_unobstructed_level_follows_two_ray_model_with_ground_on_vertical_polarization():
    # Rappaport sec. 4.6 two-ray model, E in the plane of incidence (vertical dipoles: sensor
    # radial at the top of the wheel, receiver along z). two_ray_loss_db takes isotropic antennas,
    # so the comparison holds once the two rays' dipole patterns agree (elevations of a few
    # degrees: d >= 8 m gives cos(elevation) > 0.99).
    v = open_space_vehicle(sensor_axis="radial", receiver_axis=(0.0, 0.0, 1.0), ground=True, null_floor_db=-80.0)
    scene = Scene.from_vehicle(v, wheel_model="knife_edge")
    src = scene.sensor_pos[0, 0]
    h_t = src[2]
    d = np.array([8.0, 16.0, 32.0, 100.0, 200.0, 400.0])
    for h_r in (h_t, 1.0):
        spots = np.stack([src[0] + d, np.full_like(d, src[1]), np.full_like(d, h_r)], axis=1)
        level = spot_levels(scene, spots)[:, 0, 0]
        _, gamma_par = fresnel_reflection(scene.road_eps, np.arctan((h_t + h_r) / d))
        expected = (scene.eirp_dbm + scene.receiver_gain_dbi - two_ray_loss_db(d, h_t, h_r, scene.freq_hz, gamma_par)
                    - scene.tread_loss_db)
        np.testing.assert_allclose(level, expected, atol=0.1)
        assert level[-2] - level[-1] == pytest.approx(40 * np.log10(2.0), abs=0.1)


# --- metal cabin versus glass window ------------------------------------------------------------

P_INSIDE = [0.0, 0.6, 0.9]  # inside the box, 0.2 m behind the left side
P_OUTSIDE = [0.0, BOX_HALF_WIDTH_M + 0.05, 0.9]  # 5 cm outside the left side's window


def test_closed_metal_cabin_scores_below_a_spot_just_outside_the_window():
    # Common practice: a closed metal body shields the cabin; a spot just outside the window has
    # no body between it and the wheel. Default setup (road reflection on).
    metal = Scene.from_vehicle(box_cabin(None), wheel_model="knife_edge")
    glazed = Scene.from_vehicle(box_cabin("glass"), wheel_model="knife_edge")
    inside_metal = score_spots(metal, [P_INSIDE])
    outside = score_spots(glazed, [P_OUTSIDE])
    assert inside_metal.margin_db[0] < outside.margin_db[0] - 10.0
    assert inside_metal.median_dbm[0, 0] < outside.median_dbm[0, 0] - 10.0


def test_spot_behind_glass_beats_the_same_spot_behind_metal():
    # 3GPP TR 38.901 Table 7.4.3-1 standard glass (2 + 0.2 f[GHz] dB) versus the metal panel's
    # crossing loss (an engineering default, core.materials): with the road reflection off every
    # direct ray enters through the window panel once, so the levels differ by exactly the two
    # crossing losses at every angle; with it on the glazed cabin still wins on margin and median.
    # (the straight rays alone: cavity=False; the diffuse level through the window is tests/test_cavity.py)
    metal = Scene.from_vehicle(box_cabin(None), ground_reflection=False, wheel_model="knife_edge", cavity=False)
    glazed = Scene.from_vehicle(box_cabin("glass"), ground_reflection=False, wheel_model="knife_edge", cavity=False)
    expected_db = metal.hull.default_loss_db - (2.0 + 0.2 * glazed.freq_hz / 1e9)
    diff = spot_levels(glazed, [P_INSIDE]) - spot_levels(metal, [P_INSIDE])
    np.testing.assert_allclose(diff, expected_db, atol=0.01)
    metal_g = score_spots(Scene.from_vehicle(box_cabin(None), wheel_model="knife_edge"), [P_INSIDE])
    glazed_g = score_spots(Scene.from_vehicle(box_cabin("glass"), wheel_model="knife_edge"), [P_INSIDE])
    assert glazed_g.margin_db[0] > metal_g.margin_db[0] + 5.0
    assert glazed_g.median_dbm[0, 0] > metal_g.median_dbm[0, 0] + 5.0


# --- level swing over a turn ---------------------------------------------------------------------


def test_sedan_level_swing_over_a_turn_is_tens_of_db():
    # Common practice (from memory, no published figure found): a wheel sensor's level swings by
    # roughly 20-40 dB over one turn. Loose band of issue 3: mostly within 10-45 dB. This holds for
    # the straight rays (cavity=False). With the cabin's diffuse level the engine's swing inside the
    # body is only 4-6 dB, against 12-14 dB in the whole-vehicle full-wave reference averaged over
    # frequency (17-24 dB at one frequency): a known disagreement, documented in docs/VALIDATION.md.
    v = sedan()
    s = score_vehicle(v, Scene.from_vehicle(v, wheel_model="knife_edge", cavity=False))
    swing = s.swing_db().ravel()
    in_band = np.mean((swing >= 10.0) & (swing <= 45.0))
    assert in_band >= 0.75, np.round(swing, 1)
    assert 20.0 <= np.median(swing) <= 40.0, np.round(swing, 1)


# --- rim shadow ----------------------------------------------------------------------------------


def _segment_enters_barrel(w, a, b, n=2001) -> bool:
    """Independent geometry: does the straight segment a -> b pass inside the rim barrel cylinder?"""
    t = np.linspace(0.0, 1.0, n)[:, None]
    p = a + t * (b - a)
    cx, cy, cz = w.centre
    rho = np.hypot(p[:, 0] - cx, p[:, 2] - cz)
    axial = np.abs(p[:, 1] - cy)
    return bool(np.any((rho < w.barrel_radius_m) & (axial <= 0.5 * w.rim_width_m)))


@pytest.mark.parametrize("dx, dz", [(0.3, 0.0), (-0.3, 0.0), (0.0, 0.3), (0.25, -0.15), (-0.2, 0.2)])
def test_rim_shadow_worst_angle_is_on_the_far_side_of_the_barrel(dx, dz):
    # Geometry of the wheel frame (core/wheel.py: sensor at centre + r_s (sin theta, 0, cos theta)):
    # a spot 0.5 m inboard whose offset in the wheel plane points at angle phi = atan2(dx, dz) is
    # worst heard when the sensor is at phi + 180 deg, behind the rim barrel (common practice: the
    # rim shadows the far side). Isotropic antennas and no road reflection, so only the wheel and
    # the distance shape the level; nothing of the body lies in the way.
    v = open_space_vehicle(sensor_pattern="isotropic", receiver_pattern="isotropic", ground=False)
    scene = Scene.from_vehicle(v, wheel_model="knife_edge")
    w = scene.wheels[0]
    cx, cy, cz = w.centre
    spot = np.array([cx + dx, cy - 0.5 * w.outboard_sign, cz + dz])
    s = score_spots(scene, [spot])
    far_deg = np.degrees(np.arctan2(dx, dz)) + 180.0
    off = (s.worst_angle_deg[0, 0] - far_deg + 180.0) % 360.0 - 180.0
    step = 360.0 / len(scene.angles_rad)
    assert abs(off) <= step + 1e-9, (s.worst_angle_deg[0, 0], far_deg)
    assert s.swing_db()[0, 0] > 3.0
    # at the worst angle the straight path crosses the barrel; with the sensor on the spot's side it does not
    i_worst = int(np.argmin(s.levels_dbm[0, 0]))
    i_near = (i_worst + len(scene.angles_rad) // 2) % len(scene.angles_rad)
    assert _segment_enters_barrel(w, scene.sensor_pos[0, i_worst], spot)
    assert not _segment_enters_barrel(w, scene.sensor_pos[0, i_near], spot)

"""Placement of receiver positions (issue 12, deliverable 1): inside the body, or said loudly.

core.placement classifies positions against the 2.5-D hull; every front end and the heatmaps use it.
Checks: hand-made points on a box body (each status, each direction, hand-computed distances); the
exact distance to the hull surface against shapely and against a ray-marched distance on the engine's
own inside test; every sample's spots are candidates; heatmap cells that are not are absent; the
command line's located warning; the report never calls a flagged spot the best; the shared-region
search skips positions outside a body.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from shapely.geometry import Point, Polygon

from app.cli.main import main
from core.compare import search_common_position
from core.geometry import inside_hull
from core.placement import (
    IN_WHEELHOUSE,
    INSIDE,
    MOUNTING_CLEARANCE_M,
    NEAR_SURFACE,
    OUTSIDE_BODY,
    candidate_mask,
    classify,
    exclusion,
)
from core.scoring import CELL_COMPUTED, CELL_IN_WHEELHOUSE, CELL_OUTSIDE_BODY, Scene, heatmap, vehicle_spot_arrays
from core.vehicle import Body, Radio, Vehicle, Wheel, check_vehicle, load_vehicle

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = sorted((ROOT / "sample_vehicles").glob("*.json"))

# The box body of the hand checks: x -1..1, y -0.8..0.8, z 0.2..1.4 m; one 225/50R17 wheel W at
# x = 0.5, y = 0.7 under it. ISO code arithmetic: D = 17 x 25.4 + 2 x 225 x 0.50 = 656.8 mm, so the
# wheel centre is at z = 0.3284 m and the wheelhouse arch radius is 0.3284 + 0.04 (clearance) =
# 0.3684 m; its inner wall is at y = 0.7 - 0.225 / 2 - 0.04 = 0.5475 m.
ZC, R_ARCH, INNER = 0.3284, 0.3684, 0.5475


@pytest.fixture(scope="module")
def box():
    body = Body(top_outline=((-1.0, -0.8), (1.0, -0.8), (1.0, 0.8), (-1.0, 0.8)),
                side_outline=((-1.0, 0.2), (1.0, 0.2), (1.0, 1.4), (-1.0, 1.4)), wheelhouse_clearance_m=0.04)
    wheel = Wheel(id="W", x_m=0.5, y_m=0.7, tire="225/50R17", rim_width_m=0.19)
    v = Vehicle(name="box", body_style="test", body=body, wheels=(wheel,), radio=Radio(angles_per_turn=8))
    check_vehicle(v)
    return Scene.from_vehicle(v)


def test_box_hand_made_points_get_the_right_status_distance_and_message(box):
    # each status and each direction on the box, with distances worked out by hand above
    pts = {
        "middle": (0.0, 0.0, 0.9),  # 0.5 m below the roof, 0.7 m above the floor, 0.8 m from the side walls
        "near floor": (0.0, 0.0, 0.21),  # 10 mm above the floor: inside but within the 20 mm clearance
        "below": (0.0, 0.0, 0.1),
        "above": (0.0, 0.0, 1.5),
        "left": (0.0, 0.9, 0.8),
        "right": (0.0, -0.95, 0.8),
        "ahead": (1.2, 0.0, 0.8),
        "in wheelhouse": (0.5, 0.7025, 0.5),
        "beside wheelhouse": (0.5, 0.45, 0.8),
    }
    pl = classify(box, np.array(list(pts.values())))
    st = dict(zip(pts, pl.status))
    d = dict(zip(pts, pl.distance_m))
    msg = {k: pl.message(i) for i, k in enumerate(pts)}
    assert st["middle"] == INSIDE and d["middle"] == pytest.approx(0.5, abs=1e-12)
    assert pl.nearest[0].startswith("upper outline") and msg["middle"] == ""
    assert st["near floor"] == NEAR_SURFACE and d["near floor"] == pytest.approx(0.01, abs=1e-12)
    assert MOUNTING_CLEARANCE_M == 0.02
    assert msg["near floor"] == "lies 10 mm from the body's underside (floor), closer than the mounting clearance of 20 mm"
    assert st["below"] == OUTSIDE_BODY and d["below"] == pytest.approx(-0.1, abs=1e-12)
    assert msg["below"] == ("lies below the body's underside at x = 0.00 m (underside at z = 0.20 m, the spot at "
                            "z = 0.10 m)")
    assert st["above"] == OUTSIDE_BODY and "above the body's upper outline at x = 0.00 m" in msg["above"]
    assert st["left"] == OUTSIDE_BODY and "100 mm beyond the left side wall" in msg["left"]
    assert st["right"] == OUTSIDE_BODY and "150 mm beyond the right side wall" in msg["right"]
    assert st["ahead"] == OUTSIDE_BODY
    assert "beyond the body's front end in the side view" in msg["ahead"] and "beyond the front end" in msg["ahead"]
    # in the wheelhouse: arch depth R - |dz| = 0.3684 - 0.1716 = 0.1968 m, lateral depth 0.7025 - 0.5475 = 0.155 m
    i = list(pts).index("in wheelhouse")
    assert st["in wheelhouse"] == IN_WHEELHOUSE and pl.wheels_of(i) == ["W"]
    assert d["in wheelhouse"] == pytest.approx(-0.155, abs=1e-9)
    assert msg["in wheelhouse"] == "lies inside the wheelhouse clearance of wheel W (155 mm in)"
    assert pl.flag(i) == "in wheelhouse W"
    # beside it, inside the arch's height but inboard of the wall: the distance to the product set
    # arch x (y > wall) is sqrt(d_arch^2 + d_y^2) = sqrt((0.4716 - 0.3684)^2 + (0.5475 - 0.45)^2)
    assert st["beside wheelhouse"] == INSIDE
    assert d["beside wheelhouse"] == pytest.approx(np.hypot(0.8 - ZC - R_ARCH, INNER - 0.45), abs=1e-9)
    assert pl.nearest[list(pts).index("beside wheelhouse")] == "wheelhouse of wheel W"
    assert pl.candidate.tolist() == [s in (INSIDE, NEAR_SURFACE) for s in pl.status]
    rec = pl.record(i)
    assert rec == {"status": "in_wheelhouse", "distance_to_surface_m": -0.155, "wheelhouse_of": ["W"],
                   "message": msg["in wheelhouse"]}


def test_placement_agrees_with_the_engine_inside_test(box):
    # one rule: classify's "inside the hull" is core.geometry.inside_hull, and exclusion() / candidate_mask() too
    rng = np.random.default_rng(12)
    for scene in (box, Scene.from_vehicle(load_vehicle(ROOT / "sample_vehicles" / "pickup_dual_rear.json"))):
        lo, hi = scene.hull.box_lo - 0.2, scene.hull.box_hi + 0.2
        p = lo + rng.random((3000, 3)) * (hi - lo)
        pl = classify(scene, p)
        inside = inside_hull(scene.hull, p[:, 0], p[:, 1], p[:, 2])
        np.testing.assert_array_equal(pl.candidate, inside)
        np.testing.assert_array_equal(candidate_mask(scene, p[:, 0], p[:, 1], p[:, 2]), inside)
        code = exclusion(scene.hull, p[:, 0], p[:, 1], p[:, 2])
        np.testing.assert_array_equal(code == 1, np.array(pl.status) == OUTSIDE_BODY)
        np.testing.assert_array_equal(code == 2, np.array(pl.status) == IN_WHEELHOUSE)
        assert (pl.distance_m[inside] >= 0).all() and (pl.distance_m[~inside] <= 0).all()


def _arch_polygon(xc, zc, r):
    """The wheelhouse arch region in x-z (upper half disc + strip below the centre, cut at z = zc - 10 m)."""
    a = np.linspace(0.0, np.pi, 721)
    upper = np.column_stack([xc + r * np.cos(a), zc + r * np.sin(a)])
    return Polygon(np.vstack([upper, [[xc - r, zc - 10.0], [xc + r, zc - 10.0]]]))


def test_distance_to_the_hull_matches_shapely_on_every_part():
    # the distance of an inside point is min(top-outline distance, side-outline distance, per wheelhouse
    # sqrt(d_arch^2 + d_lateral^2)); here each part's distance comes from shapely (arch drawn as a
    # 721-point polygon: chord error r (1 - cos(pi / 1440)) < 1 um)
    scene = Scene.from_vehicle(load_vehicle(ROOT / "sample_vehicles" / "sedan.json"))
    h = scene.hull
    rng = np.random.default_rng(3)
    lo, hi = h.box_lo, h.box_hi
    p = lo + rng.random((4000, 3)) * (hi - lo)
    p = p[inside_hull(h, p[:, 0], p[:, 1], p[:, 2])][:300]
    assert len(p) == 300
    top, side = Polygon(h.top).exterior, Polygon(h.side).exterior
    arches = [_arch_polygon(*a) for a in zip(h.wh_xc, h.wh_zc, h.wh_r)]
    ref = []
    for x, y, z in p:
        parts = [top.distance(Point(x, y)), side.distance(Point(x, z))]
        for k, arch in enumerate(arches):
            d_lat = max(h.wh_inner[k] - h.wh_sign[k] * y, 0.0)
            parts.append(float(np.hypot(arch.distance(Point(x, z)), d_lat)))
        ref.append(min(parts))
    np.testing.assert_allclose(classify(scene, p).distance_m, ref, atol=2e-6)


def test_distance_is_exact_against_a_ray_marched_distance_on_the_hull():
    # the claim "exactly the distance to the hull boundary": march 2,000 directions (Fibonacci sphere)
    # out of each point until core.geometry.inside_hull says outside (5 mm steps, then bisection to
    # 1 um); the shortest exit is an upper bound of the true distance d, within d (1 / cos(theta) - 1)
    # of it when the nearest surface is a face and a sampled direction lies within theta of its normal
    # (theta = the direction spacing sqrt(4 pi / n) here, a safe bound for a Fibonacci sphere).
    # classify must not exceed the march and must lie within that bound below it.
    scene = Scene.from_vehicle(load_vehicle(ROOT / "sample_vehicles" / "pickup_dual_rear.json"))
    h = scene.hull
    rng = np.random.default_rng(7)
    lo, hi = h.box_lo, h.box_hi
    p = lo + rng.random((3000, 3)) * (hi - lo)
    p = p[inside_hull(h, p[:, 0], p[:, 1], p[:, 2])][:12]
    n = 2000
    k = np.arange(n) + 0.5
    phi = np.arccos(1 - 2 * k / n)
    th = np.pi * (1 + 5**0.5) * k
    dirs = np.column_stack([np.cos(th) * np.sin(phi), np.sin(th) * np.sin(phi), np.cos(phi)])
    spacing = np.sqrt(4 * np.pi / n)
    got = classify(scene, p).distance_m
    for q, d in zip(p, got):
        t_in = np.zeros(n)
        t_out = np.full(n, np.nan)
        for t in np.arange(0.005, 1.5, 0.005):
            pts = q + t * dirs
            out = ~inside_hull(h, pts[:, 0], pts[:, 1], pts[:, 2]) & np.isnan(t_out)
            t_out[out] = t
            t_in[np.isnan(t_out)] = t
            if not np.isnan(t_out).any():
                break
        for _ in range(13):  # bisection: 5 mm / 2^13 < 1 um
            mid = 0.5 * (t_in + t_out)
            pts = q + mid[:, None] * dirs
            ins = inside_hull(h, pts[:, 0], pts[:, 1], pts[:, 2])
            t_in = np.where(ins, mid, t_in)
            t_out = np.where(ins, t_out, mid)
        march = float(np.nanmin(t_out))
        assert d <= march + 2e-6
        assert march - d <= d * (1 / np.cos(spacing) - 1) + 2e-6


def test_every_sample_spot_is_inside_the_body_and_check_prints_no_warning(capsys):
    # after the fix no sample spot is flagged (none is a deliberate demo of a flagged spot)
    for path in SAMPLES:
        v = load_vehicle(path)
        names, pos, _ = vehicle_spot_arrays(v)
        pl = classify(Scene.from_vehicle(v), pos)
        flagged = [(names[i], m) for i, m in pl.messages()]
        assert not flagged, (path.name, flagged)
    assert main(["check", *map(str, SAMPLES)]) == 0
    assert "warn" not in capsys.readouterr().out


def test_pickup_rear_floor_spot_is_measured_from_the_bed_floor():
    # z_from = "floor" takes the floor under the spot's own x: over the bed the side outline's underside
    # (z = 0.95 m) lies above the cab floor height (0.62 m), so 0.25 m above the floor is z = 1.20 m
    v = load_vehicle(ROOT / "sample_vehicles" / "pickup_dual_rear.json")
    spot = next(s for s in v.spots if s.name == "platform rear floor")
    assert (spot.x_from, spot.x_m, spot.z_from, spot.z_m) == ("rear_axle", -0.45, "floor", 0.25)
    assert v.floor_height() == 0.62
    assert v.floor_height_at(-4.70) == pytest.approx(0.95, abs=1e-12)
    assert v.floor_height_at(-1.0) == 0.62  # the cab: underside 0.33 m, below the given floor
    assert v.floor_height_at(-9.0) == 0.62  # beyond the body: the floor height
    assert v.resolve_spot(spot) == pytest.approx((-4.70, 0.0, 1.20), abs=1e-12)


def test_check_prints_a_located_warning_line_and_keeps_exit_0(tmp_path, capsys):
    # the spot of the old pickup sample, below the bed floor, and one in a wheelhouse of the sedan
    d = json.loads((ROOT / "sample_vehicles" / "pickup_dual_rear.json").read_text())
    d["spots"].append({"name": "below the bed", "x_m": -4.70, "y_m": 0.0, "z_m": 0.87})
    pickup = tmp_path / "pickup.json"
    pickup.write_text(json.dumps(d))
    d = json.loads((ROOT / "sample_vehicles" / "sedan.json").read_text())
    d["spots"].insert(0, {"name": "arch", "x_m": 0.1, "y_m": 0.75, "z_m": 0.5})
    sedan = tmp_path / "sedan.json"
    sedan.write_text(json.dumps(d))
    assert main(["check", str(pickup), str(sedan)]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert len(lines) == 4 and lines[0].startswith(f"ok   {pickup}") and lines[2].startswith(f"ok   {sedan}")
    n = len(d["spots"])
    assert lines[1] == (f"warn {pickup}: spots[{n - 1}] 'below the bed': lies below the body's underside at "
                        f"x = -4.70 m (underside at z = 0.95 m, the spot at z = 0.87 m)")
    assert lines[3].startswith(f"warn {sedan}: spots[0] 'arch': lies inside the wheelhouse clearance of wheel FL (")


def test_rank_shows_the_flag_and_the_json_carries_the_placement(capsys):
    sedan = ROOT / "sample_vehicles" / "sedan.json"
    assert main(["rank", str(sedan), "--angles", "8", "--spot", "roof top=-2,0,1.6"]) == 0
    out = capsys.readouterr().out
    row = next(line for line in out.splitlines() if "roof top" in line and "spots[" not in line)
    assert row.rstrip().endswith("OUTSIDE BODY")
    assert "warning: spots[10] 'roof top': lies above the body's upper outline at x = -2.00 m" in out
    assert main(["rank", str(sedan), "--angles", "8", "--spot", "roof top=-2,0,1.6", "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    by = {s["name"]: s["placement"] for s in doc["spots"]}
    assert by["roof top"]["status"] == "outside_body" and by["roof top"]["distance_to_surface_m"] < 0
    assert by["centre console"] == {"status": "inside", "distance_to_surface_m": pytest.approx(0.36, abs=1e-3),
                                    "wheelhouse_of": [], "message": ""}


@pytest.mark.parametrize("path", SAMPLES, ids=lambda p: p.stem)
def test_heatmap_cells_outside_the_body_are_absent(path):
    # every region of every sample: a cell whose centre is not a candidate position is nan, has no wheel,
    # is not counted in "% meeting" and is never a best cell; every candidate cell of the region is computed
    v = load_vehicle(path)
    v = v.model_copy(update={"radio": v.radio.model_copy(update={"angles_per_turn": 6})})
    scene = Scene.from_vehicle(v)
    from core.geometry import points_in_polygon

    for region in v.regions:
        hm = heatmap(scene, region, 0.2)
        pts = hm.points()
        code = exclusion(scene.hull, pts[..., 0], pts[..., 1], pts[..., 2])
        uu, vv = np.meshgrid(hm.u_m, hm.v_m)
        in_region = points_in_polygon(uu, vv, np.asarray(region.outline))
        np.testing.assert_array_equal(hm.computed, in_region & (code == 0))
        np.testing.assert_array_equal(hm.cell_state == CELL_OUTSIDE_BODY, in_region & (code == 1))
        np.testing.assert_array_equal(hm.cell_state == CELL_IN_WHEELHOUSE, in_region & (code == 2))
        assert np.isfinite(hm.margin_db[hm.computed]).all()
        assert np.isnan(hm.margin_db[~hm.computed]).all() and (hm.worst_wheel[~hm.computed] == -1).all()
        ok, cells = hm.meeting(0.0)
        assert cells == int(hm.computed.sum()) and ok == int((hm.margin_db[hm.computed] >= 0).sum())
        ex = hm.excluded()
        assert ex == {"outside the body": int((hm.cell_state == CELL_OUTSIDE_BODY).sum()),
                      "inside a wheelhouse": int((hm.cell_state == CELL_IN_WHEELHOUSE).sum())}
        assert cells + sum(ex.values()) == int(in_region.sum())
        best = np.array([c[:3] for c in hm.best_cells(50)])
        assert candidate_mask(scene, best[:, 0], best[:, 1], best[:, 2]).all()
        assert (hm.cell_state == CELL_COMPUTED).sum() == cells


def test_side_heatmap_of_the_pickup_leaves_out_the_space_under_the_bed():
    # the pickup's side region spans the whole vehicle: the cells under the bed floor (z < 0.95 m, x -5.2..-3.05)
    # are outside the body and are not computed
    v = load_vehicle(ROOT / "sample_vehicles" / "pickup_dual_rear.json")
    v = v.model_copy(update={"radio": v.radio.model_copy(update={"angles_per_turn": 6})})
    region = next(r for r in v.regions if r.view == "side")
    hm = heatmap(Scene.from_vehicle(v), region, 0.1)
    uu, vv = np.meshgrid(hm.u_m, hm.v_m)
    under_bed = (uu > -5.1) & (uu < -3.2) & (vv < 0.9)
    assert under_bed.sum() > 20
    assert (hm.cell_state[under_bed] == CELL_OUTSIDE_BODY).all()
    assert hm.excluded()["outside the body"] > 0


def test_shared_region_search_skips_positions_outside_a_body():
    # 1.0 m above each body's floor the search grid leaves the lower bodies through their roofs and
    # screens: those points are not scored (nan) and the best position is inside every body
    vs = [load_vehicle(p) for p in SAMPLES]
    vs = [v.model_copy(update={"radio": v.radio.model_copy(update={"angles_per_turn": 6})}) for v in vs]
    scenes = [Scene.from_vehicle(v) for v in vs]
    r = search_common_position(vs, "rear_axle", step_m=0.3, height_above_floor_m=1.0, scenes=scenes)
    bad = np.isnan(r.margin_db)
    assert bad.any() and not bad.all()
    for b, (v, sc) in enumerate(zip(vs, scenes)):
        x = r.offsets_m[:, 0] + v.landmark_x("rear_axle")
        z = np.array([v.floor_height_at(xx) + 1.0 for xx in x])
        np.testing.assert_array_equal(~bad[b], candidate_mask(sc, x, r.offsets_m[:, 1], z))
        p = r.best_positions_m[b]
        assert candidate_mask(sc, p[0], p[1], p[2])
    assert np.isfinite(r.best_min_margin_db)


def test_report_marks_a_flagged_spot_and_never_calls_it_best():
    # with every panel metal (no openings, so no diffuse level inside), a spot under the floor hears every
    # wheel without crossing the body and ranks first; the report must name it first as a placement
    # warning, mark it, and take the best spot and detail pages from the others
    from app.report.data import build_report_data, report_csv

    d = json.loads((ROOT / "sample_vehicles" / "sedan.json").read_text())
    d["radio"]["angles_per_turn"] = 12
    d["regions"] = d["regions"][:1]
    d["zones"] = []
    d["spots"].append({"name": "under the floor", "x_m": -1.4, "y_m": 0.0, "z_m": 0.1})
    from core.vehicle import vehicle_from_dict

    v = vehicle_from_dict(d)
    rd = build_report_data(v, step_m=0.4)
    s = rd.scores
    i = s.names.index("under the floor")
    assert int(s.order()[0]) == i  # precondition: the engine alone would rank it first
    assert rd.placement.status[i] == OUTSIDE_BODY
    best = rd.best_index()
    assert best != i and rd.placement.candidate[best]
    assert rd.findings.startswith("PLACEMENT WARNING: 1 of the 11 spots are not receiver positions: 'under the floor' "
                                  "lies below the body's underside at x = -1.40 m")
    assert f"The best of the 10 candidate spots is '{s.names[best]}'" in rd.findings
    assert i not in [det.index for det in rd.details]
    row = next(r for r in rd.ranking["spots"] if r["name"] == "under the floor")
    assert row["rank"] == 1 and row["placement"]["status"] == "outside_body"
    spot_row = next(line for line in report_csv(rd).splitlines() if line.startswith("spot,1,under the floor,"))
    assert ",outside_body," in spot_row + ","  # the placement column


def test_contour_is_drawn_only_between_computed_cells():
    # a margin that changes sign along v, computed on the left half only: the contour must stop at the
    # computed area's edge, not run on through the cells filled for tracing (app.heatmap_contour)
    from app.heatmap_contour import zero_contour
    from core.scoring import Heatmap

    u = np.arange(20) * 0.1
    v = np.arange(10) * 0.1
    m = np.tile((v - 0.45)[:, None], (1, 20))
    state = np.full(m.shape, CELL_COMPUTED, np.int8)
    state[:, 10:] = CELL_OUTSIDE_BODY
    m[:, 10:] = np.nan
    hm = Heatmap("top", 0.5, u, v, 0.1, m, np.zeros(m.shape, int), cell_state=state)
    lines = zero_contour(hm)
    assert lines
    pts = np.vstack(lines)
    assert pts[:, 0].max() <= u[9] + 1e-9  # not past the last computed cell centre
    assert pts[:, 0].min() <= u[1]  # but it does cross the computed half
    np.testing.assert_allclose(pts[:, 1], 0.45, atol=1e-9)

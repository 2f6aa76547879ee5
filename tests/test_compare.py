"""Comparison across bodies (issue 6): table = single-body rankings, common spot = argmax, landmarks by hand."""

from __future__ import annotations

import csv
import io
import json
import os
from pathlib import Path

import numpy as np
import pytest

from core.compare import compare_bodies, search_common_position, shared_region
from core.scoring import Scene, score_spots, score_vehicle
from core.vehicle import Spot, load_vehicle, vehicle_from_dict

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = sorted((ROOT / "sample_vehicles").glob("*.json"))


@pytest.fixture(scope="module")
def bodies():
    vs = [load_vehicle(p) for p in SAMPLES]
    return vs, [Scene.from_vehicle(v) for v in vs]


@pytest.fixture(scope="module")
def comparison(bodies):
    vs, scenes = bodies
    return compare_bodies(vs, scenes)


def test_minimum_over_bodies_equals_the_single_body_rankings(bodies, comparison):
    vs, scenes = bodies
    c = comparison
    single = [dict(zip(s.names, s.margin_db)) for s in (score_vehicle(v, sc) for v, sc in zip(vs, scenes))]
    assert not c.carried.any()  # every sample defines its spots itself
    for i, name in enumerate(c.spot_names):
        have = [m[name] for m in single if name in m]
        assert c.min_margin_db[i] == pytest.approx(min(have), abs=1e-9)
        assert c.present_all[i] == (len(have) == len(vs))
        for b, m in enumerate(single):
            assert (name in m) == (not np.isnan(c.margin_db[i, b]))


def test_common_spot_is_the_argmax_of_the_minimum(comparison):
    c = comparison
    shared = [i for i in range(len(c.spot_names)) if c.present_all[i]]
    assert len(shared) >= 3  # the samples share the three platform spots and more
    best = max(shared, key=lambda i: c.min_margin_db[i])
    assert c.common_best == best
    assert all(c.min_margin_db[c.common_best] >= c.min_margin_db[i] for i in shared)


def test_landmark_relative_spot_resolves_on_two_bodies_by_hand():
    sedan = load_vehicle(ROOT / "sample_vehicles" / "sedan.json")
    pickup = load_vehicle(ROOT / "sample_vehicles" / "pickup_dual_rear.json")
    spot = Spot(name="platform console", x_m=1.40, y_m=0.0, z_m=0.35, x_from="rear_axle", z_from="floor")
    # Sedan: wheels at x = 0 and x = -2.80 m, so the rear axle is at x = -2.80 and x = -2.80 + 1.40 = -1.40 m.
    # No floor_height_m in the file: the floor is the side outline's underside midway between the axles
    # (x = -1.40 m), on the edge from (-3.20, 0.20) to (0.60, 0.18):
    # z_floor = 0.20 + (-1.40 + 3.20) / (0.60 + 3.20) * (0.18 - 0.20) = 0.20 - 0.0094737 = 0.1905263 m,
    # so z = 0.1905263 + 0.35 = 0.5405263 m.
    assert sedan.resolve_spot(spot) == pytest.approx((-1.40, 0.0, 0.5405263), abs=1e-6)
    # Pickup: rear wheels at x = -4.25 m, so x = -4.25 + 1.40 = -2.85 m; the file gives floor_height_m = 0.62,
    # so z = 0.62 + 0.35 = 0.97 m.
    assert pickup.resolve_spot(spot) == pytest.approx((-2.85, 0.0, 0.97), abs=1e-9)


def test_a_landmark_spot_missing_from_one_file_is_carried_to_it(bodies):
    vs, scenes = bodies
    sedan_i = next(k for k, v in enumerate(vs) if v.body_style == "sedan")
    pickup_i = next(k for k, v in enumerate(vs) if v.body_style == "pickup")
    sedan = vs[sedan_i]
    d = json.loads((ROOT / "sample_vehicles" / "sedan.json").read_text())
    d["spots"] = [s for s in d["spots"] if s["name"] != "platform console"]
    trimmed = vehicle_from_dict(d)
    pair = [trimmed, vs[pickup_i]]
    c = compare_bodies(pair)
    i = c.spot_names.index("platform console")
    assert c.carried[i, 0] and not c.carried[i, 1]
    np.testing.assert_allclose(c.positions_m[i, 0], (-1.40, 0.0, 0.5405263), atol=1e-6)  # the sedan, as above
    own = score_spots(scenes[sedan_i], [sedan.resolve_spot(next(s for s in sedan.spots if s.name == "platform console"))])
    assert c.margin_db[i, 0] == pytest.approx(own.margin_db[0], abs=1e-9)
    # an absolute spot of one body is not carried to the other
    j = c.spot_names.index("trunk floor")
    assert np.isnan(c.margin_db[j, 1])


def test_shared_region_relative_to_the_rear_axle_by_hand(bodies):
    vs, _ = bodies
    # Top-view regions minus the rear-axle x: sedan -3.70..0.60 -> -0.90..3.40; hatchback -3.10..0.50 with the
    # axle at -2.55 -> -0.55..3.05; SUV -3.70..0.55 (axle -2.82) -> -0.88..3.37; pickup cab floor -2.90..0.60
    # (axle -4.25) -> 1.35..4.85; van -4.80..0.55 (axle -3.66) -> -1.14..4.21. Intersection x 1.35..3.05;
    # y: the hatchback's +-0.65 is the narrowest.
    x0, y0, x1, y1 = shared_region(vs, "rear_axle").bounds
    assert (x0, x1) == pytest.approx((1.35, 3.05), abs=1e-9)
    assert (y0, y1) == pytest.approx((-0.65, 0.65), abs=1e-9)


def test_search_finds_the_best_grid_point_and_its_margins_are_the_engine_s(bodies):
    vs, scenes = bodies
    r = search_common_position(vs, "rear_axle", step_m=0.25, height_above_floor_m=0.35, scenes=scenes)
    # refinement includes the coarse best point, so the result is at least as good as every grid point
    assert r.best_min_margin_db >= np.nanmax(r.min_margin_db()) - 1e-9  # nan: not inside every body
    for b, (v, sc) in enumerate(zip(vs, scenes)):
        x = r.best_offset_m[0] + v.landmark_x("rear_axle")
        p = (x, r.best_offset_m[1], v.floor_height_at(x) + 0.35)  # the floor under x (z_from = "floor")
        np.testing.assert_allclose(r.best_positions_m[b], p, atol=1e-9)
        assert r.best_margins_db[b] == pytest.approx(score_spots(sc, [p]).margin_db[0], abs=1e-9)
    assert r.best_min_margin_db == pytest.approx(r.best_margins_db.min())
    spot = r.as_spot()
    assert spot.x_from == "rear_axle" and spot.z_from == "floor"
    np.testing.assert_allclose(vs[0].resolve_spot(spot), r.best_positions_m[0], atol=1e-3)


def test_cli_compare_names_the_common_spot_and_writes_the_table(tmp_path, capsys, comparison):
    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    from app.cli.main import main

    out_csv = tmp_path / "cmp.csv"
    out_pdf = tmp_path / "cmp.pdf"
    rc = main(["compare", *map(str, SAMPLES), "--csv", str(out_csv), "-o", str(out_pdf), "--search-step", "0.3"])
    text = capsys.readouterr().out
    assert rc == 0
    c = comparison
    name = c.spot_names[c.common_best]
    assert f"Platform-common best spot: '{name}', smallest margin over the bodies {c.min_margin_db[c.common_best]:+.1f} dB" in text
    assert "Searched best position:" in text and "ahead of the rear axle" in text
    rows = list(csv.DictReader(io.StringIO(out_csv.read_text())))
    mins = {row["spot"]: float(row["margin_db"]) for row in rows if row["record"] == "min"}
    for i, n in enumerate(c.spot_names):
        assert mins[n] == pytest.approx(c.min_margin_db[i], abs=6e-4)
    assert [row["spot"] for row in rows if row["record"] == "min" and row["common_best"] == "1"] == [name]
    pypdf = pytest.importorskip("pypdf")
    pdf_text = " ".join(" ".join(p.extract_text() for p in pypdf.PdfReader(str(out_pdf)).pages).split())
    assert name in pdf_text and "results are approximate" in pdf_text


def test_cli_compare_bad_file_names_the_field(tmp_path, capsys):
    from app.cli.main import main

    d = json.loads((ROOT / "sample_vehicles" / "suv.json").read_text())
    d["spots"][0]["x_from"] = "rear_bumper"
    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps(d))
    rc = main(["compare", str(SAMPLES[0]), str(bad), "-o", str(tmp_path / "x.pdf")])
    assert rc == 1
    assert f"{bad}: spots[0].x_from" in capsys.readouterr().err
    assert not (tmp_path / "x.pdf").exists()

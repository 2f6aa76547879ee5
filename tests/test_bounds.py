"""Limits that keep inputs plausible and work finite (issue 12 item 6, issue 18 items 5 and 7):
absurd sizes refused at load with the field named, duplicate keys and degenerate outlines refused
with a correct message, work beyond the documented limits refused before computing, the resonant
speed list bounded, and non-finite levels stopped before any table or figure."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from core import bounds
from core.bounds import (
    MAX_DESCRIPTION_CHARS,
    MAX_LINKS,
    MAX_RESONANT_SPEEDS,
    NonFiniteResultError,
    WorkLimitError,
    check_heatmap_work,
    require_finite_heatmap,
    require_finite_scores,
)
from core.burst import burst_success
from core.vehicle import VehicleFileError, parse_vehicle

ROOT = Path(__file__).resolve().parents[1]
SEDAN_TEXT = (ROOT / "sample_vehicles" / "sedan.json").read_text()
DOCS = (ROOT / "docs" / "vehicle-format.md").read_text()


def _refusal(mutate) -> VehicleFileError:
    d = json.loads(SEDAN_TEXT)
    mutate(d)
    with pytest.raises(VehicleFileError) as e:
        parse_vehicle(json.dumps(d), "car.json")
    assert str(e.value).startswith(f"car.json: {e.value.field}: ") and "\n" not in str(e.value)
    return e.value


def _set(path, value):
    def mutate(d):
        node = d
        for k in path[:-1]:
            node = node[k]
        node[path[-1]] = value
    return mutate


UM = 1e-6
ABSURD = [
    # (what, mutation, field named, words in the problem)
    ("1 um explicit tire", _set(("wheels", 0, "tire"), {"outer_diameter_m": UM, "rim_diameter_m": UM / 2,
                                                         "section_width_m": UM}),
     "wheels[0].tire.outer_diameter_m", "0.3"),
    ("1 um rim diameter", _set(("wheels", 0, "tire"), {"outer_diameter_m": 0.6, "rim_diameter_m": UM,
                                                        "section_width_m": 0.2}),
     "wheels[0].tire.rim_diameter_m", "0.2"),
    ("1 um section width", _set(("wheels", 0, "tire"), {"outer_diameter_m": 0.6, "rim_diameter_m": 0.4,
                                                         "section_width_m": UM}),
     "wheels[0].tire.section_width_m", "0.08"),
    ("tiny tire code", _set(("wheels", 1, "tire"), "010/10R10"), "wheels[1].tire", "smallest allowed is 0.3 m"),
    ("1 um rim width", _set(("wheels", 2, "rim_width_m"), UM), "wheels[2].rim_width_m", "0.05"),
    ("1 um sensor radius", _set(("wheels", 3, "sensor_radius_m"), UM), "wheels[3].sensor_radius_m", "0.05"),
    ("200 m x 200 m region", _set(("regions", 0, "outline"), [[-100, -100], [100, -100], [100, 100], [-100, 100]]),
     "regions[0].outline", "outside the body's top view"),
    ("region height far above the roof", _set(("regions", 0, "height_m"), 5.0), "regions[0].height_m",
     "outside the body's extent"),
    ("side region far to one side", _set(("regions", 1, "lateral_m"), 4.0), "regions[1].lateral_m",
     "outside the body's extent"),
    ("200 m zone", _set(("zones", 3, "outline"), [[-100, -100], [100, -100], [100, 100], [-100, 100]]),
     "zones[3].outline", "outside the body's top view"),
    ("5 MB description", _set(("description",), "x" * 5_000_000), "description", str(MAX_DESCRIPTION_CHARS)),
    ("over-long material note", _set(("materials",), {"foam": {"loss_db": 1.0, "description": "y" * 1000}}),
     "materials.foam.description", "200"),
    ("over-long road surface", _set(("radio", "road_surface"), "z" * 10_000), "radio.road_surface", "80"),
    ("over-long tire code", _set(("wheels", 0, "tire"), "2" * 10_000), "wheels[0].tire", "24"),
    ("too many zones", lambda d: d.update(zones=[dict(d["zones"][0], name=f"z{i}") for i in range(33)]),
     "zones", "32"),
    ("zone outline of 101 points", _set(("zones", 0, "outline"),
                                        [[-1 + 0.01 * np.cos(t), 1 + 0.01 * np.sin(t)]
                                         for t in np.linspace(0, 6, 101)]), "zones[0].outline", "100"),
    ("work of a ranking", lambda d: (d.update(spots=[dict(d["spots"][0], name=f"s{i}") for i in range(500)]),
                                     d["radio"].update(angles_per_turn=3600)),
     "spots", f"{MAX_LINKS:,} links"),
]


@pytest.mark.parametrize("mutate, field, words", [a[1:] for a in ABSURD], ids=[a[0] for a in ABSURD])
def test_absurd_sizes_are_refused_with_the_field_named(mutate, field, words):
    err = _refusal(mutate)
    assert err.field == field, str(err)
    assert words in err.problem, str(err)


def test_the_samples_are_within_every_limit():
    for f in sorted((ROOT / "sample_vehicles").glob("*.json")):
        parse_vehicle(f.read_text(), f)


def test_every_limit_is_documented_in_the_file_format():
    # the vehicle-format reference names each size limit with the value core.bounds enforces
    b = bounds
    for value in (f"overall diameter {b.MIN_TIRE_DIAMETER_M:.2f}-{b.MAX_TIRE_DIAMETER_M:g} m",
                  f"rim diameter at least {b.MIN_RIM_DIAMETER_M:.2f} m",
                  f"section width {b.MIN_SECTION_WIDTH_M:.2f}-{b.MAX_SECTION_WIDTH_M:g} m",
                  f"rim width | {b.MIN_RIM_WIDTH_M:.2f}-{b.MAX_RIM_WIDTH_M:g} m",
                  f"sensor radius | {b.MIN_SENSOR_RADIUS_M:.2f} m up to the tire radius",
                  f"grown by {b.REACH_MARGIN_M:g} m", f"`description` 0-{b.MAX_DESCRIPTION_CHARS:,}",
                  f"a material's `description` 0-{b.MAX_NOTE_CHARS}", f"a tire code {b.MAX_TIRE_CODE_CHARS}",
                  f"3-{b.MAX_BODY_OUTLINE_POINTS} points each", f"3-{b.MAX_OUTLINE_POINTS} points each",
                  (f"1-{b.MAX_WHEELS} wheels, 0-{b.MAX_SPOTS} spots, 0-{b.MAX_ZONES} zones, 0-{b.MAX_REGIONS} regions, "
                  f"0-{b.MAX_MATERIALS} materials"), f"at most {b.MAX_LINKS:,} links",
                  f"{b.MIN_ANGLES_PER_TURN}-{b.MAX_ANGLES_PER_TURN}"):
        assert value in DOCS, value
    readme = (ROOT / "README.md").read_text()
    for value in (f"at most {b.MAX_LINKS:,} links", f"at most {b.MAX_HEATMAP_CELLS:,} cells",
                  f"at most {b.MAX_RESONANT_SPEEDS} are listed"):
        assert value in readme, value


def test_duplicate_keys_are_refused_with_their_place():
    text = SEDAN_TEXT.replace('"body_style":', '"name": "again", "body_style":', 1)
    with pytest.raises(VehicleFileError) as e:
        parse_vehicle(text, "car.json")
    assert e.value.field == "name" and "given more than once" in e.value.problem
    d = json.loads(SEDAN_TEXT)
    body = json.dumps(d["wheels"][2])
    nested = json.dumps(d).replace(body, body[:-1] + ', "rim_width_m": 0.2}', 1)
    with pytest.raises(VehicleFileError) as e:
        parse_vehicle(nested, "car.json")
    assert str(e.value).startswith("car.json: wheels[2].rim_width_m: key 'rim_width_m' is given more than once")


@pytest.mark.parametrize("outline, words", [
    ([[-1.0, 0.3], [-0.5, 0.3], [0.0, 0.3]], "all its points lie on one straight line"),
    ([[-1.0, 0.3], [-1.0, 0.3], [-1.0, 0.3]], "all its points lie on one straight line"),
    ([[-1.0, 0.3], [-0.5, 0.3], [-0.5, 0.8], [-0.5, 0.5], [-1.0, 0.8]], "turns straight back along itself at point 2"),
    ([[-1.0, 0.3], [-0.5, 0.8], [-0.5, 0.3], [-1.0, 0.8]], "crosses itself"),
])
def test_degenerate_outlines_get_the_right_message(outline, words):
    err = _refusal(_set(("zones", 0, "outline"), outline))
    assert err.field == "zones[0].outline" and words in err.problem, str(err)


def test_collinear_points_along_an_edge_are_accepted():
    d = json.loads(SEDAN_TEXT)
    d["zones"][0]["outline"] = [[-1.0, 0.3], [-0.75, 0.3], [-0.5, 0.3], [-0.5, 0.8], [-1.0, 0.8]]
    v = parse_vehicle(json.dumps(d))
    assert len(v.zones[0].outline) == 5  # kept as given


def test_resonant_speeds_are_bounded():
    # a wheel whose frames land on the same angle every 0.1 m/s: thousands of resonant speeds in 0-100 m/s
    angles = np.linspace(0, 2 * np.pi, 72, endpoint=False)
    levels = -80 + 10 * np.cos(angles)[None, :]
    radius = 0.16  # m; resonant spacing 2 pi R / dt = 0.1 m/s at dt = 10 s
    r = burst_success(levels, angles, -85.0, 2, 10.0, np.linspace(0, 100, 11), np.array([radius]))
    assert len(r.resonant_mps[0]) == MAX_RESONANT_SPEEDS
    expected = int(np.floor(100 / (2 * np.pi * radius / 10.0)))  # n = 1 .. floor(v_max / spacing)
    assert r.resonant_count[0] == expected > 900
    np.testing.assert_allclose(r.resonant_mps[0], np.arange(1, MAX_RESONANT_SPEEDS + 1) * 2 * np.pi * radius / 10)


def test_heatmap_work_check_names_the_limit_and_a_step_that_fits():
    v = parse_vehicle(SEDAN_TEXT)
    region = v.regions[0]
    with pytest.raises(WorkLimitError) as e:
        check_heatmap_work([region], 1e-6, 4, 72)
    assert "100,000 cells per heatmap" in str(e.value)
    fit = float(str(e.value).split("a step of ")[-1].split(" m")[0])
    check_heatmap_work([region], fit, 4, 72)  # the step it names fits
    with pytest.raises(WorkLimitError):
        check_heatmap_work([region], round(fit - 0.001, 3), 4, 72)  # and is the smallest in mm


def test_ranking_at_the_limit_is_chunked_and_matches_the_unchunked_scores():
    from core.scoring import Scene, score_spots

    v = parse_vehicle(SEDAN_TEXT)
    scene = Scene.from_vehicle(v, wheel_model="knife_edge")
    pts = np.random.default_rng(3).uniform([-3, -0.6, 0.4], [0, 0.6, 1.0], (40, 3))
    whole = score_spots(scene, pts)
    seen = []
    chunked = score_spots(scene, pts, progress=lambda d, t: seen.append((d, t)), chunk_links=1000)
    np.testing.assert_array_equal(whole.levels_dbm, chunked.levels_dbm)
    np.testing.assert_array_equal(whole.margin_db, chunked.margin_db)
    assert len(seen) > 5 and seen[-1] == (40, 40)


def _scores(levels):
    from core.scoring import SpotScores

    s, w, a = levels.shape
    return SpotScores(names=tuple(f"s{i}" for i in range(s)), positions=np.zeros((s, 3)), wheel_ids=("FL", "FR"),
                      angles_deg=np.arange(a) * 360.0 / a, levels_dbm=levels, worst_dbm=levels.min(axis=2),
                      worst_angle_deg=np.zeros((s, w)), median_dbm=np.median(levels, axis=2),
                      margin_db=levels.min(axis=(1, 2)) + 100, worst_wheel=np.zeros(s, int),
                      sensitivity_dbm=-105.0, required_margin_db=6.0, near_field=np.zeros(s, bool))


@pytest.mark.parametrize("bad", [np.inf, -np.inf, np.nan])
def test_non_finite_scores_are_stopped_with_the_spot_named(bad):
    levels = np.full((2, 2, 8), -80.0)
    require_finite_scores(_scores(levels), "car.json")  # finite: passes
    levels[1, 1, 3] = bad
    with pytest.raises(NonFiniteResultError) as e:
        require_finite_scores(_scores(levels), "car.json")
    assert str(e.value).startswith("car.json: spot 's1'") and "wheel FR" in str(e.value)


def test_non_finite_heatmap_cell_is_stopped_but_outside_cells_are_not():
    from core.scoring import Heatmap

    margin = np.array([[1.0, np.nan], [2.0, 3.0]])
    worst = np.array([[0, -1], [1, 0]])  # -1: outside the region (NaN by design)
    hm = Heatmap("top", 0.5, np.array([0.0, 0.1]), np.array([0.0, 0.1]), 0.1, margin, worst)
    require_finite_heatmap(hm, "floor")
    bad = Heatmap("top", 0.5, hm.u_m, hm.v_m, 0.1, np.array([[1.0, np.nan], [np.inf, 3.0]]), worst)
    with pytest.raises(NonFiniteResultError) as e:
        require_finite_heatmap(bad, "floor", "car.json")
    assert "region 'floor'" in str(e.value) and "(0.000, 0.100, 0.500)" in str(e.value)


def test_report_data_refuses_non_finite_levels(monkeypatch):
    from app.report import data

    real = data.score_vehicle

    def with_inf(v, scene, **kw):
        s = real(v, scene, **kw)
        s.levels_dbm[0, 0, 0] = np.inf
        return s

    monkeypatch.setattr(data, "score_vehicle", with_inf)
    with pytest.raises(NonFiniteResultError, match="not a finite number"):
        data.build_report_data(ROOT / "sample_vehicles" / "sedan.json", step_m=0.5)


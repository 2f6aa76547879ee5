"""The engine's command line: ``wheelreach rank`` (table and JSON) and ``wheelreach heatmap`` (CSV).

The JSON document is described in docs/cli-json.md; these tests hold the command to it and to the
engine (core.scoring) it reports.
"""

from __future__ import annotations

import csv
import hashlib
import io
import json
import subprocess
import sys

import numpy as np
import pytest

from app.cli.main import main
from core.provenance import read_csv_preamble
from core.scoring import Scene, heatmap, score_spots, score_vehicle
from core.vehicle import load_vehicle
from engine_vehicles import REPO, SEDAN_PATH, sedan

WHEEL_KEYS = {"wheel", "worst_dbm", "worst_angle_deg", "median_dbm", "levels_dbm"}
SPOT_KEYS = {"rank", "name", "position_m", "receiver_axis", "margin_db", "margin_at_ceiling_db", "worst_wheel",
             "worst_angle_deg", "near_field", "placement", "wheels", "p_pass", "link_budget", "sensitivity",
             "measure_first"}
BUDGET_KEYS = {"spot", "wheel", "at", "wheel_angle_deg", "position_m", "receiver_axis", "path_length_m", "terms",
               "level_dbm", "sensitivity_dbm", "required_margin_db", "margin_db", "road_ray", "road_ray_level_dbm"}
TERM_KEYS = {"key", "group", "label", "value_db", "note"}
SENSITIVITY_KEYS = {"spot", "margin_db", "p_pass", "draws", "seed", "margin_p05_db", "margin_median_db",
                    "fast_model_nominal_offset_db", "tornado", "not_varied"}
BAR_KEYS = {"input", "label", "nominal", "low", "high", "margin_at_low_db", "margin_at_high_db", "swing_db", "source",
            "effect"}
INPUT_KEYS = {"input", "label", "nominal", "range", "distribution", "source", "effect"}
PLACEMENT_KEYS = {"status", "distance_to_surface_m", "wheelhouse_of", "message"}
TOP_KEYS = {"radio_limit", "vehicle", "body_style", "frequency_hz", "sensitivity_dbm", "required_margin_db",
            "angles_deg", "sensitivity_method", "uncertain_inputs", "rank_resolution_db", "not_ranked_apart", "spots",
            "setup", "caution"}


def _rank_json(capsys, *extra) -> dict:
    assert main(["rank", str(SEDAN_PATH), "--json", *extra]) == 0
    return json.loads(capsys.readouterr().out)


def test_rank_json_matches_the_engine(capsys):
    doc = _rank_json(capsys)
    v = load_vehicle(SEDAN_PATH)
    s = score_vehicle(v, Scene.from_vehicle(v))
    assert set(doc) == TOP_KEYS
    assert doc["vehicle"] == v.name and doc["frequency_hz"] == v.radio.frequency_hz
    assert len(doc["angles_deg"]) == v.radio.angles_per_turn
    np.testing.assert_allclose(doc["angles_deg"], s.angles_deg, atol=1e-4)
    assert [d["rank"] for d in doc["spots"]] == list(range(1, len(v.spots) + 1))
    assert [d["name"] for d in doc["spots"]] == [s.names[i] for i in s.order()]
    margins = [d["margin_db"] for d in doc["spots"]]
    assert margins == sorted(margins, reverse=True)
    # the spots not ranked apart: the best receiver position and every candidate within the resolution
    cand = [d for d in doc["spots"] if d["placement"]["status"] in ("inside", "near_surface")] or doc["spots"]
    best = cand[0]["margin_db"]
    assert doc["not_ranked_apart"] == [d["name"] for d in cand if d["margin_db"] >= best - doc["rank_resolution_db"]]
    for d in doc["spots"]:
        assert set(d) == SPOT_KEYS
        i = s.names.index(d["name"])
        assert d["margin_db"] == pytest.approx(s.margin_db[i], abs=1e-3)
        assert d["worst_wheel"] == s.wheel_ids[s.worst_wheel[i]]
        np.testing.assert_allclose(d["position_m"], s.positions[i], atol=1e-4)
        assert [w["wheel"] for w in d["wheels"]] == list(s.wheel_ids)
        for w, wd in enumerate(d["wheels"]):
            assert set(wd) == WHEEL_KEYS
            lv = np.array(wd["levels_dbm"])
            assert lv.shape == (v.radio.angles_per_turn,)
            np.testing.assert_allclose(lv, s.levels_dbm[i, w], atol=1e-3)
            # worst case = the minimum over the continuous turn (core.turn_minimum): the engine's, and never
            # above the sampled levels' minimum
            assert wd["worst_dbm"] == pytest.approx(s.worst_dbm[i, w], abs=1e-3)
            assert wd["worst_dbm"] <= lv.min() + 1e-3
            assert wd["worst_angle_deg"] == pytest.approx(s.worst_angle_deg[i, w], abs=1e-3)
            assert 0.0 <= wd["worst_angle_deg"] < 360.0
            assert wd["median_dbm"] == pytest.approx(np.median(lv), abs=1e-3)
        # margin = worst wheel's worst case - sensitivity - required margin (DESIGN.md section 5)
        worst = min(wd["worst_dbm"] for wd in d["wheels"])
        assert d["margin_db"] == pytest.approx(worst - doc["sensitivity_dbm"] - doc["required_margin_db"], abs=2e-3)
        # the link budget by term: its terms add up to the worst wheel's worst case, and to the margin
        b = d["link_budget"]["worst"]
        assert set(b) == BUDGET_KEYS and b["wheel"] == d["worst_wheel"]
        assert sum(t["value_db"] for t in b["terms"]) == pytest.approx(s.worst_dbm[i, s.worst_wheel[i]], abs=0.01)
        assert b["margin_db"] == pytest.approx(d["margin_db"], abs=0.01)
        assert d["link_budget"]["median"]["wheel"] == d["worst_wheel"]
        assert 0.0 <= d["p_pass"] <= 1.0 and d["sensitivity"]["p_pass"] == d["p_pass"]
        assert len(d["sensitivity"]["tornado"]) == len(doc["uncertain_inputs"])
        assert d["measure_first"] and all(isinstance(t, str) for t in d["measure_first"])


def test_rank_json_angles_option_sets_the_length_of_the_level_lists(capsys):
    doc = _rank_json(capsys, "--angles", "36")
    assert len(doc["angles_deg"]) == 36
    assert all(len(w["levels_dbm"]) == 36 for d in doc["spots"] for w in d["wheels"])


def test_rank_spot_option_adds_a_spot(capsys):
    doc = _rank_json(capsys, "--spot", "glovebox=-0.9,-0.45,0.62", "--spot", "tail=-3.6,0.2,0.8")
    n_file = len(sedan().spots)
    assert len(doc["spots"]) == n_file + 2
    by_name = {d["name"]: d for d in doc["spots"]}
    scene = Scene.from_vehicle(sedan())
    for name, p in (("glovebox", [-0.9, -0.45, 0.62]), ("tail", [-3.6, 0.2, 0.8])):
        assert by_name[name]["position_m"] == p
        assert by_name[name]["margin_db"] == pytest.approx(score_spots(scene, [p]).margin_db[0], abs=1e-3)


def test_rank_table_names_the_spots_and_carries_the_caution(capsys):
    assert main(["rank", str(SEDAN_PATH), "--spot", "probe=-1.0,0,0.6"]) == 0
    out = capsys.readouterr().out
    assert "probe" in out and all(s.name in out for s in sedan().spots)
    assert "approximate" in out  # DESIGN.md section 8 caution
    assert "P(pass)" in out and "axis" in out
    row = next(ln for ln in out.splitlines() if "roof lining" in ln)
    assert "(1,0,0)" in row  # the spot's own receiver axis is shown (issue 13)


def test_rank_explain_prints_the_budget_tornado_and_what_to_measure(capsys):
    assert main(["rank", str(SEDAN_PATH), "--explain", "roof lining"]) == 0
    out = capsys.readouterr().out
    v = sedan()
    scene = Scene.from_vehicle(v)
    s = score_vehicle(v, scene)
    i = s.names.index("roof lining")
    assert f"margin {s.margin_db[i]:+.2f} dB" in out
    assert "Link budget, wheel FL at its worst angle" in out and "at the median angle" in out
    assert "metal crossing loss" in out and "Measure first" in out and "P(pass)" in out
    assert f"{s.worst_dbm[i, s.worst_wheel[i]]:.2f}" in out  # the budget's received level is the engine's worst case
    assert "approximate" in out


def test_rank_explain_unknown_spot_is_one_located_line(capsys):
    assert main(["rank", str(SEDAN_PATH), "--explain", "glovebox"]) == 1
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "--explain" in err and "'glovebox'" in err and "roof lining" in err


@pytest.mark.parametrize("bad", ["console", "console=-1.3,0", "console=-1.3,0,0.5,1", "console=a,b,c", "=1,0,0.5",
                                 "console=nan,0,0.5", "console=1000,0,0.5"])
def test_bad_spot_gives_a_clear_message_and_nonzero_exit(bad):
    r = subprocess.run([sys.executable, "-m", "app.cli.main", "rank", str(SEDAN_PATH), "--spot", bad],
                       capture_output=True, text=True, cwd=REPO, timeout=120)
    assert r.returncode == 2  # an argparse usage error (tests/test_cli_options.py)
    assert "Traceback" not in r.stderr and len(r.stderr.splitlines()) == 1
    assert r.stderr.startswith("wheelreach rank: error: argument --spot: ") and repr(bad) in r.stderr, r.stderr
    assert r.stdout == ""


def test_heatmap_csv_holds_every_cell_of_the_grid(capsys, tmp_path):
    out = tmp_path / "floor.csv"
    assert main(["heatmap", str(SEDAN_PATH), "--view", "top", "--step", "0.3", "--angles", "24", "--quiet",
                 "--csv", str(out)]) == 0
    assert f"wrote {out}" in capsys.readouterr().out
    radio_limit, setup, body = read_csv_preamble(out.read_text())
    rows = list(csv.DictReader(io.StringIO(body)))
    assert rows and list(rows[0]) == ["x_m", "y_m", "z_m", "margin_db", "worst_wheel", "margin_at_ceiling_db"]
    # the header comment carries the setup (docs/cli-json.md): file hash, overrides, grid
    assert setup["overrides"]["angles_per_turn"] == 24 and setup["output"]["heatmap"]["step_m"] == 0.3
    assert setup["vehicle_file"]["sha256"] == hashlib.sha256(SEDAN_PATH.read_bytes()).hexdigest()
    assert radio_limit["over_ceiling"] is False
    assert all(float(r["margin_at_ceiling_db"]) == float(r["margin_db"]) for r in rows)  # within the ceiling
    v = sedan(angles_per_turn=24)
    scene = Scene.from_vehicle(v)
    region = [r for r in v.regions if r.view == "top"][0]
    hm = heatmap(scene, region, 0.3)
    pts = hm.points()[np.isfinite(hm.margin_db)]
    assert len(rows) == len(pts)
    got = np.array([[float(r["x_m"]), float(r["y_m"]), float(r["z_m"]), float(r["margin_db"])] for r in rows])
    np.testing.assert_allclose(got[:, :3], pts, atol=1e-4)
    np.testing.assert_allclose(got[:, 3], hm.margin_db[np.isfinite(hm.margin_db)], atol=1e-3)
    assert {r["worst_wheel"] for r in rows} <= set(scene.wheel_ids)


def test_side_heatmap_csv_at_a_lateral_position(capsys, tmp_path):
    out = tmp_path / "side.csv"
    assert main(["heatmap", str(SEDAN_PATH), "--view", "side", "--y", "0.2", "--step", "0.4", "--angles", "24",
                 "--quiet", "--csv", str(out)]) == 0
    rows = list(csv.DictReader(io.StringIO(read_csv_preamble(out.read_text())[2])))
    assert rows and all(float(r["y_m"]) == 0.2 for r in rows)
    assert all(np.isfinite(float(r["margin_db"])) for r in rows)


def test_cli_json_doc_describes_every_key(capsys):
    # docs/cli-json.md documents the rank document: every key the command prints has a table row.
    text = (REPO / "docs" / "cli-json.md").read_text(encoding="utf-8")
    doc = _rank_json(capsys, "--angles", "8")
    sp = doc["spots"][0]
    keys = set(doc) | set(sp) | set(sp["wheels"][0]) | set(sp["placement"])
    assert keys == TOP_KEYS | SPOT_KEYS | WHEEL_KEYS | PLACEMENT_KEYS
    nested = set(sp["link_budget"]["worst"]) | set(sp["link_budget"]["worst"]["terms"][0]) | set(sp["sensitivity"])
    nested |= set(sp["sensitivity"]["tornado"][0]) | set(doc["uncertain_inputs"][0])
    assert nested >= BUDGET_KEYS | TERM_KEYS | SENSITIVITY_KEYS | BAR_KEYS | INPUT_KEYS
    keys |= nested | {"part", "worst", "median"}
    keys |= set(doc["radio_limit"]) | set(doc["setup"]) | set(doc["setup"]["vehicle_file"])
    keys |= set(doc["setup"]["program"]) | set(doc["setup"]["overrides"]) | set(doc["setup"]["wheel_model"])
    missing = [k for k in sorted(keys) if f"| `{k}` |" not in text]
    assert not missing, missing

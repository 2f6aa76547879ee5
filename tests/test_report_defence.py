"""Defending a placement in the outputs (issue 13): the report's page-1 verdict (read back with pypdf, a reader
independent of Qt's writer), the budget and tornado exports, the comparison's verdict per body, and the burst
margin shown when every burst gets through."""

from __future__ import annotations

import csv
import io
import json
import os
from pathlib import Path

import numpy as np
import pytest

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

pypdf = pytest.importorskip("pypdf")

from app.cli.main import main
from core.burst import burst_for_spot
from core.compare import compare_bodies, names_at_several_places, recommend, search_common_position
from core.provenance import read_csv_preamble
from core.scoring import Scene, score_vehicle
from core.vehicle import load_vehicle

ROOT = Path(__file__).resolve().parents[1]
SEDAN = ROOT / "sample_vehicles" / "sedan.json"
SUV = ROOT / "sample_vehicles" / "suv.json"


def _words(text: str) -> str:
    return " ".join(text.split())


@pytest.fixture(scope="module")
def sedan_report(tmp_path_factory):
    out = tmp_path_factory.mktemp("defence")
    pdf, csv_p, json_p = out / "sedan.pdf", out / "sedan.csv", out / "sedan.json"
    assert main(["report", str(SEDAN), "-o", str(pdf), "--csv", str(csv_p), "--json", str(json_p), "--step", "0.3",
                 "--quiet"]) == 0
    reader = pypdf.PdfReader(str(pdf))
    return {"pages": [_words(p.extract_text()) for p in reader.pages], "json": json.loads(json_p.read_text()),
            "csv": csv_p.read_text()}


def test_page_one_opens_with_the_verdict(sedan_report):
    """Page 1: the recommended spot, its margin against the requirement, P(pass), the two most sensitive inputs and
    what to measure first, before the title table and the findings."""
    p1 = sedan_report["pages"][0]
    doc = sedan_report["json"]
    best = doc["ranking"]["spots"][0]
    assert doc["verdict"]["spot"] == best["name"]
    assert doc["verdict"]["margin_db"] == pytest.approx(best["margin_db"], abs=1e-3)
    assert doc["verdict"]["p_pass"] == pytest.approx(best["p_pass"], abs=1e-4)
    head = (f"Verdict. Recommended receiver spot: '{best['name']}', worst-case margin {best['margin_db']:+.1f} dB over "
            f"the requirement, P(pass) {100 * best['p_pass']:.0f} %.")
    assert head in p1
    # the verdict opens page 1, before the title table and the findings (which may run onto page 2: the table
    # holds the command line, as long as the caller's)
    both = p1 + " " + sedan_report["pages"][1]
    assert p1.index("Verdict.") < both.index("SHA-256 of the input file") < both.index("Findings")
    top = [b for b in best["sensitivity"]["tornado"] if b["swing_db"] > 0][:2]
    assert "Most sensitive to: " + top[0]["label"] in p1 and top[1]["label"] in p1
    assert "Measure first on a vehicle:" in p1 and "over a slow full turn" in p1
    axis = ", ".join(f"{a:g}" for a in best["receiver_axis"])
    assert f"receiver antenna axis ({axis})" in p1  # the spot's own axis is stated (issue 13)


def test_each_top_spot_has_its_budget_and_tornado_page(sedan_report):
    text = " ".join(sedan_report["pages"])
    spots = [d["spot"] for d in sedan_report["json"]["details"]]
    assert len(spots) == 3
    for name in spots:
        assert f"{name} — link budget and what it depends on" in text
    assert text.count("What the margin depends on: P(pass)") == 3
    assert "Uncertain inputs" in text and "engineering default" in text and "Tanghe" in text


def test_csv_budget_terms_add_up_to_the_worst_case_and_p_pass_is_a_column(sedan_report):
    doc = sedan_report["json"]
    _, _, body = read_csv_preamble(sedan_report["csv"])
    rows = list(csv.DictReader(io.StringIO(body)))
    v = load_vehicle(SEDAN)
    s = score_vehicle(v, Scene.from_vehicle(v))
    for sp in doc["ranking"]["spots"]:
        i = s.names.index(sp["name"])
        terms = [float(r["value_db"]) for r in rows if r["record"] == "term" and r["spot"] == sp["name"]
                 and r["at"] == "worst"]
        assert sum(terms) == pytest.approx(s.worst_dbm[i, s.worst_wheel[i]], abs=0.01)
        spot_row = next(r for r in rows if r["record"] == "spot" and r["spot"] == sp["name"])
        assert float(spot_row["p_pass"]) == pytest.approx(sp["p_pass"], abs=1e-4)
        bars = [r for r in rows if r["record"] == "bar" and r["spot"] == sp["name"]]
        assert len(bars) == len(sp["sensitivity"]["tornado"])


def test_comparison_states_pass_or_fail_of_the_common_spot_per_body(tmp_path, capsys):
    """Sedan and SUV, the SUV's sensor 25 dB weaker: the common spot fails there; the text and the PDF say so per
    body and recommend one of the two places with the reason; names placed differently are flagged."""
    suv = json.loads(SUV.read_text())
    suv["radio"]["sensor"]["eirp_dbm"] -= 25.0
    weak = tmp_path / "weak_suv.json"
    weak.write_text(json.dumps(suv))
    pdf = tmp_path / "cmp.pdf"
    assert main(["compare", str(SEDAN), str(weak), "-o", str(pdf), "--search-step", "0.3", "--quiet"]) == 0
    out = capsys.readouterr().out
    vs = [load_vehicle(SEDAN), load_vehicle(weak)]
    scenes = [Scene.from_vehicle(v) for v in vs]
    c = compare_bodies(vs, scenes)
    search = search_common_position(vs, "rear_axle", 0.3, None, scenes)
    rec = recommend(c, search)
    i = c.common_best
    assert rec.common_meets == tuple(bool(m >= 0) for m in c.margin_db[i])
    assert rec.common_meets[0] and not rec.common_meets[1]  # meets on the sedan, fails on the weakened SUV
    line = next(ln for ln in out.splitlines() if ln.startswith("Platform-common spot"))
    assert f"meets the requirement on 1 of 2 bodies: sedan {c.margin_db[i, 0]:+.1f} dB meets; SUV " \
           f"{c.margin_db[i, 1]:+.1f} dB FAILS" in line
    assert f"Recommended: the {rec.choice}, because" in out
    assert ("neither meets" in rec.reason) == (not all(rec.search_meets))
    flagged = {f.name for f in names_at_several_places(vs)}
    assert "under dash centre" in flagged and "platform console" not in flagged  # landmark spot: one definition
    assert "Same name, different places: 'under dash centre'" in out
    text = _words(" ".join(p.extract_text() for p in pypdf.PdfReader(str(pdf)).pages))
    assert "Verdict" in text and "FAILS" in text and f"Recommended: the {rec.choice}" in text


def test_recommendation_rule_prefers_the_existing_spot_when_it_passes_everywhere():
    vs = [load_vehicle(SEDAN), load_vehicle(SUV)]
    scenes = [Scene.from_vehicle(v) for v in vs]
    c = compare_bodies(vs, scenes)
    search = search_common_position(vs, "rear_axle", 0.3, None, scenes)
    rec = recommend(c, search)
    assert all(rec.common_meets)  # the samples' platform console passes on both
    assert rec.choice == "common spot" and "already meets the requirement on every body" in rec.reason


def test_burst_margin_parked_is_the_worst_sampled_level_and_diversity_raises_it():
    """Parked, every frame falls on one angle: the burst margin is the lowest level over the (interpolated) turn
    minus the sensitivity; with frames at different angles it can only be as high or higher; at a resonant speed
    the frames coincide again (by the frame-timing arithmetic of core.burst)."""
    v = load_vehicle(SEDAN)
    scene = Scene.from_vehicle(v)
    s = score_vehicle(v, scene)
    b = burst_for_spot(scene, s, 0)
    lv = s.levels_dbm[0]
    np.testing.assert_allclose(b.parked_margin_db, lv.min(axis=1) - scene.sensitivity_dbm, atol=1e-9)
    assert np.all(b.margin_db >= b.parked_margin_db[:, None] - 1e-9)
    assert np.all((b.margin_db >= 0) == (b.success >= 1.0))
    k = np.argmin(np.abs(b.speeds_mps - b.resonant_mps[0][0]))
    assert b.margin_db[0, k] < b.margin_db[0].max()


def test_tornado_range_text_writes_a_shared_unit_once():
    """Beside each tornado bar (report and desktop panel) the input's range: a unit both ends share is written
    once, so the range fits a narrow panel; different words stay whole; an input without effect says so."""
    from app.report.figures import tornado_range_text
    from core.sensitivity import TornadoBar

    def bar(lo, hi, key="x", effect=""):
        return TornadoBar(key, "input", "", lo, hi, 0.0, 1.0, "", effect)

    assert tornado_range_text(bar("433.052 MHz", "434.788 MHz")) == "433.052 .. 434.788 MHz"
    assert tornado_range_text(bar("-15.0 dBm", "-9.0 dBm")) == "-15.0 .. -9.0 dBm"
    assert tornado_range_text(bar("reflection off", "wet ground")) == "reflection off .. wet ground"
    assert tornado_range_text(bar("10 dB", "30 dBm")) == "10 dB .. 30 dBm"
    assert tornado_range_text(bar("15 deg, toward x", "15 deg, toward y", key="axis_tilt")) == "15 deg: worst / best"
    assert tornado_range_text(bar("1 dB", "2 dB", effect="not in this setup")) == "no effect here"

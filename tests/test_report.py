"""Placement report (issue 6): PDF of every sample, data export equal to the engine, bad files leave nothing.

The reference for "report numbers" is the engine itself run independently on the same file
(core.scoring.score_vehicle / heatmap), and the input hash is recomputed with hashlib.
Text is extracted from the PDF with pypdf (a reader independent of Qt's writer).
"""

from __future__ import annotations

import csv
import hashlib
import io
import json
import os
import re
from pathlib import Path

import numpy as np
import pytest

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

pypdf = pytest.importorskip("pypdf")

from app.cli.main import main
from app.report.data import CAUTION
from core.provenance import read_csv_preamble
from core.scoring import Scene, heatmap, score_vehicle
from core.vehicle import load_vehicle

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = sorted((ROOT / "sample_vehicles").glob("*.json"))
STEP_M = 0.3  # coarse heatmap grid: keeps the five reports to a few seconds


def _words(text: str) -> str:
    """Whitespace-normalised text (pypdf separates words by tabs and breaks lines)."""
    return " ".join(text.split())


@pytest.fixture(scope="module")
def reports(tmp_path_factory):
    out = tmp_path_factory.mktemp("reports")
    done = {}
    for path in SAMPLES:
        pdf, csv_p, json_p = (out / f"{path.stem}{ext}" for ext in (".pdf", ".csv", ".json"))
        rc = main(["report", str(path), "-o", str(pdf), "--csv", str(csv_p), "--json", str(json_p),
                   "--step", str(STEP_M)])
        assert rc == 0
        reader = pypdf.PdfReader(str(pdf))
        text = _words(" ".join(p.extract_text() for p in reader.pages))
        done[path.stem] = {"path": path, "pdf": pdf, "csv": csv_p, "json": json_p, "pages": len(reader.pages),
                           "text": text}
    return done


@pytest.mark.parametrize("path", SAMPLES, ids=lambda p: p.stem)
def test_report_is_a_pdf_with_title_hash_spots_margin_and_caution(reports, path):
    r = reports[path.stem]
    assert r["pdf"].read_bytes()[:5] == b"%PDF-"
    assert r["pages"] >= 4
    v = load_vehicle(path)
    text = r["text"]
    assert v.name in text
    assert hashlib.sha256(path.read_bytes()).hexdigest() in text
    for s in v.spots:
        assert s.name in text, s.name
    assert "margin" in text
    assert _words(CAUTION) in text
    assert f"page 1 of {r['pages']}" in text and f"page {r['pages']} of {r['pages']}" in text


@pytest.mark.parametrize("path", SAMPLES, ids=lambda p: p.stem)
def test_report_states_the_method_and_limits_of_the_model(reports, path):
    # core.model_limits: the setup's own method (its worst-case statistic, wheel model) and every limit, with the
    # validation figures of core.scoring (checked against the stored full-wave reference in
    # tests/test_fullwave_agreement.py), and which spots are not ranked apart on page 1
    from core.model_limits import limits, method_text
    from core.scoring import RANK_RESOLUTION_DB, Scene, score_vehicle, tie_note
    from core.placement import classify

    def norm(t: str) -> str:  # a line may break after a hyphen ("knife- edge" in the extracted text)
        return _words(t).replace("- ", "-")

    text = norm(reports[path.stem]["text"])
    v = load_vehicle(path)
    scene = Scene.from_vehicle(v)
    assert norm(method_text(scene)) in text
    for title, sentence in limits(scene):
        assert norm(f"{title}. {sentence}") in text, title
    assert f"Spots within {RANK_RESOLUTION_DB:g} dB of each other are not ranked apart" in text
    scores = score_vehicle(v, scene)
    note = tie_note(scores, scores.tied_with_best(classify(scene, scores.positions).candidate))
    if note:
        assert norm("Not ranked apart: " + note) in text


@pytest.mark.parametrize("path", SAMPLES, ids=lambda p: p.stem)
def test_json_and_csv_equal_the_engine(reports, path):
    r = reports[path.stem]
    v = load_vehicle(path)
    scene = Scene.from_vehicle(v)
    sc = score_vehicle(v, scene)
    doc = json.loads(r["json"].read_text())
    assert doc["report"]["sha256"] == hashlib.sha256(path.read_bytes()).hexdigest()
    spots = {s["name"]: s for s in doc["ranking"]["spots"]}
    assert set(spots) == set(sc.names)
    assert [s["name"] for s in doc["ranking"]["spots"]] == [sc.names[i] for i in sc.order()]
    tol = 6e-4  # the export rounds to 3 decimals
    for i, name in enumerate(sc.names):
        s = spots[name]
        assert s["margin_db"] == pytest.approx(sc.margin_db[i], abs=tol)
        assert s["worst_wheel"] == sc.wheel_ids[sc.worst_wheel[i]]
        for w, wd in enumerate(s["wheels"]):
            assert wd["wheel"] == sc.wheel_ids[w]
            assert wd["worst_dbm"] == pytest.approx(sc.worst_dbm[i, w], abs=tol)
            np.testing.assert_allclose(wd["levels_dbm"], sc.levels_dbm[i, w], atol=tol)
    rows = list(csv.DictReader(io.StringIO(read_csv_preamble(r["csv"].read_text())[2])))
    spot_rows = {row["spot"]: row for row in rows if row["record"] == "spot"}
    for i, name in enumerate(sc.names):
        assert float(spot_rows[name]["margin_db"]) == pytest.approx(sc.margin_db[i], abs=tol)
    wheel_rows = [row for row in rows if row["record"] == "wheel"]
    assert len(wheel_rows) == len(sc.names) * len(sc.wheel_ids)
    levels = [row for row in rows if row["record"] == "level"]
    assert len(levels) == sc.levels_dbm.size
    # the best spot's margin as printed in the PDF's findings equals the engine's, to the printed 0.1 dB
    b = int(sc.order()[0])
    assert f"'{sc.names[b]}' with a worst-case margin of {sc.margin_db[b]:+.1f} dB" in r["text"]


def test_heatmap_export_equals_the_engine_grid(reports):
    r = reports["sedan"]
    v = load_vehicle(r["path"])
    scene = Scene.from_vehicle(v)
    doc = json.loads(r["json"].read_text())
    rows = [row for row in csv.DictReader(io.StringIO(read_csv_preamble(r["csv"].read_text())[2]))
            if row["record"] == "cell"]
    for region, exported in zip(v.regions, doc["heatmaps"]):
        hm = heatmap(scene, region, STEP_M)
        got = np.array([[np.nan if m is None else m for m in row] for row in exported["margin_db"]], float)
        np.testing.assert_allclose(got, hm.margin_db, atol=6e-4, equal_nan=True)
        cells = [row for row in rows if row["region"] == region.name]
        assert len(cells) == int(np.isfinite(hm.margin_db).sum())
        best = max(cells, key=lambda row: float(row["margin_db"]))
        assert float(best["margin_db"]) == pytest.approx(np.nanmax(hm.margin_db), abs=6e-4)


def test_bad_file_fails_with_the_located_message_and_leaves_no_pdf(tmp_path, capsys):
    d = json.loads((ROOT / "sample_vehicles" / "sedan.json").read_text())
    d["wheels"][2]["tire"] = "225/50X17"
    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps(d))
    out = tmp_path / "out.pdf"
    rc = main(["report", str(bad), "-o", str(out), "--csv", str(tmp_path / "out.csv")])
    err = capsys.readouterr().err
    assert rc == 1
    assert f"{bad}: wheels[2].tire:" in err
    assert not out.exists() and not (tmp_path / "out.csv").exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["bad.json"]  # no temporary file left either


def test_failure_while_painting_keeps_an_existing_pdf(tmp_path, monkeypatch):
    """An error after the PDF was started leaves the previous report untouched and no temporary file."""
    from app.report import pdf as report

    out = tmp_path / "old.pdf"
    out.write_bytes(b"previous report")

    def broken(*_args, **_kw):
        raise RuntimeError("disk trouble")

    monkeypatch.setattr(report, "paint_pages", broken)
    with pytest.raises(RuntimeError):
        report.write_report(ROOT / "sample_vehicles" / "hatchback.json", out, step_m=0.5)
    assert out.read_bytes() == b"previous report"
    assert [p.name for p in tmp_path.iterdir()] == ["old.pdf"]


def test_report_of_an_unsaved_document_hashes_its_canonical_json(tmp_path):
    from app.report.pdf import write_report
    from core.vehicle import vehicle_to_json

    v = load_vehicle(ROOT / "sample_vehicles" / "hatchback.json")
    v = v.model_copy(update={"name": "Edited hatchback"})
    d, n = write_report(v, tmp_path / "r.pdf", step_m=0.5)
    assert d.sha256 == hashlib.sha256(vehicle_to_json(v).encode()).hexdigest()
    text = _words(" ".join(p.extract_text() for p in pypdf.PdfReader(str(tmp_path / "r.pdf")).pages))
    assert "Edited hatchback" in text and d.sha256 in text and n >= 4
    assert re.search(r"SHA-256 of the canonical JSON of the unsaved document", text)

"""Reproducible outputs (issue 12 item 5): the setup record of core.provenance in every output.

Intent: the setup carried by an output is enough to run it again: read the file it names (same
SHA-256), apply the recorded overrides, and the engine gives the same numbers. The reference is the
engine itself (core.scoring) run on the reconstructed vehicle, and hashlib for the hashes.
"""

from __future__ import annotations

import csv
import hashlib
import io
import json
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest

from app.cli.main import main
from core import provenance as prov
from core.regulatory import check_sensor_eirp
from core.scoring import Scene, heatmap, score_vehicle
from core.vehicle import VehicleFileError, load_vehicle, vehicle_from_dict, vehicle_to_dict

ROOT = Path(__file__).resolve().parents[1]
SEDAN = ROOT / "sample_vehicles" / "sedan.json"
HATCH = ROOT / "sample_vehicles" / "hatchback.json"
TOL = 6e-4  # outputs round levels and margins to 0.001 dB


@pytest.fixture
def sedan_copy(tmp_path) -> Path:
    f = tmp_path / "sedan.json"
    shutil.copy(SEDAN, f)
    return f


def _rank_json(capsys, *args) -> dict:
    assert main(["rank", *map(str, args), "--json"]) == 0
    return json.loads(capsys.readouterr().out)


def _assert_same_numbers(doc: dict, v) -> None:
    """The ranking in ``doc`` equals the engine's scores of ``v`` (names, order, margins, every level)."""
    scene = Scene.from_vehicle(v)
    sc = score_vehicle(v, scene)
    assert [s["name"] for s in doc["spots"]] == [sc.names[i] for i in sc.order()]
    np.testing.assert_allclose(doc["angles_deg"], sc.angles_deg, atol=1e-4)
    for s in doc["spots"]:
        i = sc.names.index(s["name"])
        assert s["margin_db"] == pytest.approx(sc.margin_db[i], abs=TOL)
        for w, wd in enumerate(s["wheels"]):
            np.testing.assert_allclose(wd["levels_dbm"], sc.levels_dbm[i, w], atol=TOL)


def test_rank_json_round_trip_reproduces_the_numbers(sedan_copy, capsys):
    # every override a command can make: angle count, road reflection, wheel model, an added spot
    doc = _rank_json(capsys, sedan_copy, "--angles", "36", "--no-ground", "--wheel-model", "knife_edge",
                     "--spot", "probe=-1.0,0.1,0.7")
    setup = json.loads(json.dumps(doc["setup"]))  # only what survives the JSON text
    assert setup["overrides"] == {"angles_per_turn": 36, "ground_reflection": False, "wheel_model": "knife_edge",
                                  "extra_spots": [{"name": "probe", "x_m": -1.0, "y_m": 0.1, "z_m": 0.7,
                                                   "x_from": "origin", "z_from": "ground"}],
                                  "calibration": None}
    v = prov.vehicle_from_setup(setup)  # reads the named file, checks its hash, applies the overrides
    assert v.radio.angles_per_turn == 36 and not v.radio.ground_reflection and v.radio.wheel_model == "knife_edge"
    assert "probe" in [s.name for s in v.spots]
    _assert_same_numbers(doc, v)
    assert prov.setup_differences(setup) == []
    # the file named by the record must be the one that was used
    sedan_copy.write_text(sedan_copy.read_text().replace('"Demo', '"Changed demo', 1))
    with pytest.raises(VehicleFileError, match="SHA-256 does not match"):
        prov.vehicle_from_setup(setup)


def test_setup_names_version_commit_hashes_method_eirp_and_axes(capsys):
    doc = _rank_json(capsys, SEDAN)
    st = doc["setup"]
    v = load_vehicle(SEDAN)
    scene = Scene.from_vehicle(v)
    assert st["format"] == prov.SETUP_FORMAT
    assert st["program"]["version"] == prov.program_version()
    assert st["command_line"] == ["wheelreach", "rank", str(SEDAN), "--json"]
    assert st["vehicle_file"]["sha256"] == hashlib.sha256(SEDAN.read_bytes()).hexdigest()
    assert st["vehicle_file"]["absolute_path"] == str(SEDAN.resolve())
    for name, digest in st["data_tables"].items():
        assert digest == hashlib.sha256((ROOT / name).read_bytes()).hexdigest()
    assert set(st["data_tables"]) == {"core/data/wheel_patterns.npz", "core/data/wheel_patterns.json"}
    assert st["score_method"] == scene.score_method  # always read from the Scene property
    from core import kernels

    assert st["body_loss_path"] == kernels.status()  # compiled kernel or numpy path, and why
    assert st["wheel_model"]["used"] == scene.wheel_model_label
    assert set(st["wheel_model"]["tables_per_wheel"]) == {w.id for w in v.wheels}
    assert st["wheel_model"]["table_set"]["solver"].startswith("NEC-2")
    assert st["sensor_eirp"] == {"peak_dbm": v.radio.sensor_eirp_dbm, "built_from": "eirp_dbm given in the file "
                                 "(peak EIRP)"}
    by_name = {s["name"]: s for s in st["spots"]}
    for s in v.spots:
        np.testing.assert_allclose(by_name[s.name]["receiver_axis"], v.spot_axis(s), atol=1e-6)
        assert by_name[s.name]["axis_from"] == ("spot" if s.axis is not None else "radio default")
    assert any(s["axis_from"] == "spot" for s in st["spots"])  # the sedan has spots with their own axis
    for s in doc["spots"]:  # and each ranked spot carries its resolved axis
        assert s["receiver_axis"] == by_name[s["name"]]["receiver_axis"]


def test_git_commit_only_from_a_checkout(monkeypatch, tmp_path):
    git = shutil.which("git")
    if git and (prov.PACKAGE_ROOT / ".git").exists():
        head = subprocess.run([git, "-C", str(prov.PACKAGE_ROOT), "rev-parse", "HEAD"], capture_output=True,
                              text=True, check=True).stdout.strip()
        assert prov.program_info()["git_commit"] == head
        assert isinstance(prov.program_info()["git_dirty"], bool)
    # a regular install (no .git beside the package): no commit, no dirty flag
    monkeypatch.setattr(prov, "PACKAGE_ROOT", tmp_path)
    prov._git_state.cache_clear()
    try:
        info = prov.program_info()
        assert "git_commit" not in info and "git_dirty" not in info and info["version"]
    finally:
        prov._git_state.cache_clear()


def test_eirp_built_from_conducted_power_is_recorded(sedan_copy, capsys):
    d = vehicle_to_dict(load_vehicle(sedan_copy))
    d["radio"]["sensor"] = {"conducted_power_dbm": -14.0, "antenna_gain_dbi": 2.0, "return_loss_db": 10.0}
    sedan_copy.write_text(json.dumps(d))
    st = _rank_json(capsys, sedan_copy, "--angles", "8")["setup"]["sensor_eirp"]
    # mismatch loss of 10 dB return loss: -10 log10(1 - 0.1) = 0.458 dB (textbook transmission-line relation)
    assert st["mismatch_loss_db"] == pytest.approx(0.4576, abs=1e-4)
    assert st["peak_dbm"] == pytest.approx(-14.0 + 2.0 - 0.4576, abs=1e-4)
    assert "conducted_power_dbm" in st["built_from"]


def test_heatmap_csv_setup_reproduces_the_cells(sedan_copy, tmp_path, capsys):
    out = tmp_path / "cells.csv"
    assert main(["heatmap", str(sedan_copy), "--view", "side", "--y", "0.1", "--step", "0.4", "--angles", "12",
                 "--quiet", "--csv", str(out)]) == 0
    capsys.readouterr()
    radio_limit, setup, body = prov.read_csv_preamble(out.read_text())
    assert out.read_text().startswith("# radio_limit: ")  # within the ceiling: no warning line before it
    rows = list(csv.DictReader(io.StringIO(body)))
    grid = setup["output"]["heatmap"]
    v = prov.vehicle_from_setup(setup)
    region = next(r for r in v.regions if r.name == grid["region"])
    region = region.model_copy(update={"lateral_m": grid["fixed_m"]})
    hm = heatmap(Scene.from_vehicle(v), region, grid["step_m"])
    np.testing.assert_allclose([float(r["margin_db"]) for r in rows], hm.margin_db[np.isfinite(hm.margin_db)],
                               atol=TOL)
    assert radio_limit == check_sensor_eirp(v.radio).to_dict()


def test_over_the_ceiling_every_output_says_so_first_and_gives_margins_at_the_ceiling(tmp_path, capsys):
    # the hatchback without its frame timing: -14 dBm peak against the 15.231(b) -19.6 dBm average limit
    d = vehicle_to_dict(load_vehicle(HATCH))
    del d["radio"]["frame_duration_s"]
    f = tmp_path / "hatch.json"
    f.write_text(json.dumps(d))
    check = check_sensor_eirp(vehicle_from_dict(d).radio)
    shift = check.excess_db
    assert check.over_ceiling and shift == pytest.approx(5.606, abs=1e-3)
    # rank table: the warning is the first line; the at-ceiling column is the margin minus the excess
    assert main(["rank", str(f), "--angles", "12"]) == 0
    out = capsys.readouterr().out.splitlines()
    assert out[0].startswith("RADIO LIMIT EXCEEDED") and "at ceiling" in "".join(out[:5])
    # rank JSON: radio_limit is the first key; margin_at_ceiling_db = margin_db - (EIRP - ceiling)
    doc = _rank_json(capsys, f, "--angles", "12")
    assert next(iter(doc)) == "radio_limit" and doc["radio_limit"]["over_ceiling"] is True
    for s in doc["spots"]:
        assert s["margin_at_ceiling_db"] == pytest.approx(s["margin_db"] - shift, abs=2e-3)
    # heatmap: first printed line and first CSV line
    csv_out = tmp_path / "cells.csv"
    assert main(["heatmap", str(f), "--angles", "12", "--step", "0.3", "--quiet", "--csv", str(csv_out)]) == 0
    assert capsys.readouterr().out.startswith("RADIO LIMIT EXCEEDED")
    text = csv_out.read_text()
    assert text.startswith("# RADIO LIMIT EXCEEDED")
    rows = list(csv.DictReader(io.StringIO(prov.read_csv_preamble(text)[2])))
    for r in rows:
        assert float(r["margin_at_ceiling_db"]) == pytest.approx(float(r["margin_db"]) - shift, abs=2e-3)


def test_over_the_ceiling_report_says_so_on_page_1_first(tmp_path, capsys):
    pypdf = pytest.importorskip("pypdf")
    d = vehicle_to_dict(load_vehicle(HATCH))
    del d["radio"]["frame_duration_s"]
    d["radio"]["angles_per_turn"] = 12
    f = tmp_path / "hatch.json"
    f.write_text(json.dumps(d))
    out = tmp_path / "r"
    assert main(["report", str(f), "-o", f"{out}.pdf", "--csv", f"{out}.csv", "--json", f"{out}.json",
                 "--step", "0.5"]) == 0
    assert capsys.readouterr().out.startswith("RADIO LIMIT EXCEEDED")
    page1 = " ".join(pypdf.PdfReader(f"{out}.pdf").pages[0].extract_text().split())
    assert "RADIO LIMIT EXCEEDED" in page1
    assert page1.index("RADIO LIMIT EXCEEDED") < page1.index("Vehicle")  # before the title table and findings
    doc = json.loads(Path(f"{out}.json").read_text())
    assert next(iter(doc)) == "radio_limit" and doc["radio_limit"]["over_ceiling"]
    assert doc["findings"].startswith("RADIO LIMIT EXCEEDED")
    assert Path(f"{out}.csv").read_text().startswith("# RADIO LIMIT EXCEEDED")
    # the report's own setup reproduces its ranking
    v = prov.vehicle_from_setup(doc["setup"])
    _assert_same_numbers(doc["ranking"], v)
    assert doc["setup"]["command_line"][:2] == ["wheelreach", "report"]

"""``wheelreach calibrate`` and ``--calibration`` of rank, heatmap, report and compare, on the invented demo
measurements of the sample sedan (sample_vehicles/sedan_measurements.csv, tools/make_demo_measurements.py)."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest

from app.caution import SAFETY_NOTE
from app.cli.main import main
from core import provenance as prov
from core.provenance import read_csv_preamble
from core.samples import SAMPLES_DIR
from core.scoring import Scene, score_vehicle
from tools.make_demo_measurements import HIDDEN

SEDAN = SAMPLES_DIR / "sedan.json"
DEMO = SAMPLES_DIR / "sedan_measurements.csv"


@pytest.fixture(scope="module")
def cal_file(tmp_path_factory):
    """A calibration of the demo set, written once by the command (copies of the inputs in a temporary folder)."""
    d = tmp_path_factory.mktemp("cal")
    shutil.copy(SEDAN, d / "sedan.json")
    shutil.copy(DEMO, d / "meas.csv")
    out = d / "cal.json"
    # two folds: the hold-out itself is checked by the calibrate test below and tests/test_calibration.py
    assert main(["calibrate", str(d / "sedan.json"), str(d / "meas.csv"), "-o", str(out), "--folds", "2"]) == 0
    return out


def test_calibrate_prints_the_fit_and_writes_the_calibration(tmp_path, capsys):
    out = tmp_path / "c.json"
    assert main(["calibrate", str(SEDAN), str(DEMO), "-o", str(out), "--folds", "3"]) == 0
    text = capsys.readouterr().out
    assert "1,088 measurements" in text and "768 with wheel angles, 320 without" in text
    assert "metal crossing loss" in text and "not informed by the measurements" in text  # tread, null floor
    assert "hold-out (3-fold over spots)" in text
    assert text.rstrip().endswith(SAFETY_NOTE)
    cal = json.loads(out.read_text())
    assert cal["format"] == "wheelreach-calibration/1" and cal["holdout"]["folds"] == 3
    fitted = {p["key"]: p for p in cal["parameters"]}
    # the demo's hidden values (tools/make_demo_measurements.py) come back: the sensor's EIRP offset and the
    # plastic loss within 1 dB. The metal and glass losses are applied but the demo's spots fix them only to a
    # few dB: inside the cabin the diffuse field fed through the glazing and plastic sets the level, and the
    # level depends on these losses far from linearly (the straight path through the metal sinks under the
    # diffuse field as the metal loss grows), so the Jacobian's standard errors (about 1.0 and 1.4 dB) understate
    # the spread: the demo's fit lands 4.1 dB under the hidden metal loss and 3.6 dB over the glass loss, while
    # its residual RMS at the hidden values is within 0.5 % of the fitted one. The recovery within 1 dB of every
    # parameter is checked on designs that separate them (tests/test_calibration.py). The null floor and the
    # tread do not act on these levels (the installed pattern holds the tread; the diffuse field fills the nulls
    # inside, and the tripods' levels never reach the floor): kept at the vehicle's values.
    for key in ("plastic_loss_db", "sensor_eirp_offset_db"):
        assert fitted[key]["applied"] and abs(fitted[key]["value_db"] - HIDDEN[key]) <= 1.0, fitted[key]
    for key in ("metal_loss_db", "glass_loss_db"):
        assert fitted[key]["applied"] and abs(fitted[key]["value_db"] - HIDDEN[key]) <= 4.5, fitted[key]
    for key in ("tread_loss_db", "null_floor_db"):
        assert not fitted[key]["applied"] and fitted[key]["sensitivity"] == 0.0, fitted[key]
    # the residual and the hold-out RMS fall to the noise the demo was made with, within 10 %: 2 dB Gaussian
    # noise and 1 % of frames 15 dB low, sqrt(2^2 + 0.01 * 15^2) = 2.5 dB; the uncalibrated model is 3.9 dB off
    # (with the cabin field the demo's hidden metal loss matters less to the cabin's levels than before, so the
    # uncalibrated RMS is not twice the calibrated one any more)
    noise = (2.0**2 + 0.01 * 15.0**2) ** 0.5
    for rec in (cal["fit"], cal["holdout"]):
        assert abs(rec["rms_after_db"] - noise) <= 0.1 * noise and rec["rms_before_db"] > 1.4 * rec["rms_after_db"], rec


def test_parameters_option_fits_only_those(tmp_path, capsys):
    out = tmp_path / "c.json"
    assert main(["calibrate", str(SEDAN), str(DEMO), "-o", str(out), "--parameters",
                 "metal_loss_db,sensor_eirp_offset_db", "--folds", "2"]) == 0
    keys = [p["key"] for p in json.loads(out.read_text())["parameters"]]
    assert keys == ["metal_loss_db", "sensor_eirp_offset_db"]


@pytest.mark.parametrize("argv, option", [
    (["--folds", "1"], "--folds"),
    (["--folds", "x"], "--folds"),
    (["--parameters", "metal"], "--parameters"),
    (["--parameters", "metal_loss_db,metal_loss_db"], "--parameters"),
    (["--wheel-model", "spokes"], "--wheel-model"),
])
def test_bad_options_are_one_line_and_exit_2(argv, option, capsys, tmp_path):
    with pytest.raises(SystemExit) as e:
        main(["calibrate", str(SEDAN), str(DEMO), "-o", str(tmp_path / "c.json"), *argv])
    err = capsys.readouterr().err
    assert e.value.code == 2 and option in err and len(err.strip().splitlines()) == 1


def test_bad_inputs_and_outputs_are_one_located_line_and_exit_1(tmp_path, capsys):
    bad = tmp_path / "bad.csv"
    bad.write_text("vehicle,spot,wheel,wheel_angle_deg,level_dbm\nDemo mid-size sedan,glovebox,FL,0,-70\n")
    out = tmp_path / "c.json"
    assert main(["calibrate", str(SEDAN), str(bad), "-o", str(out)]) == 1
    err = capsys.readouterr().err.strip()
    assert err == f"error: {bad}:2:21: unknown spot 'glovebox' (the vehicle's spots: " + err.split("spots: ", 1)[1]
    assert not out.exists()
    # the output may not be one of the inputs
    copy = tmp_path / "meas.csv"
    shutil.copy(DEMO, copy)
    assert main(["calibrate", str(SEDAN), str(copy), "-o", str(copy)]) == 1
    assert "is an input of this command" in capsys.readouterr().err
    assert copy.read_bytes() == DEMO.read_bytes()
    # a bad calibration file is named by rank
    badcal = tmp_path / "cal.json"
    badcal.write_text('{"format": "wheelreach-calibration/1"}')
    assert main(["rank", str(SEDAN), "--calibration", str(badcal)]) == 1
    err = capsys.readouterr().err.strip()
    assert err.startswith(f"error: {badcal}: ") and len(err.splitlines()) == 1


def test_rank_with_the_calibration_records_it_and_reproduces(cal_file, capsys):
    assert main(["rank", str(SEDAN), "--calibration", str(cal_file), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    rec = doc["setup"]["overrides"]["calibration"]
    assert rec["file"] == str(cal_file) and len(rec["sha256"]) == 64
    assert set(rec["values"]) == {"metal_loss_db", "glass_loss_db", "plastic_loss_db", "sensor_eirp_offset_db",
                                  "cabin_absorption_db"}
    assert rec["note"].startswith("calibrated from 1,088 measurements, hold-out RMS")
    # the record re-applies the same values: the numbers come back from the setup alone
    v = prov.vehicle_from_setup(json.loads(json.dumps(doc["setup"])))
    assert v.materials["metal"].loss_db == pytest.approx(rec["values"]["metal_loss_db"], abs=0.005)
    sc = score_vehicle(v, Scene.from_vehicle(v))
    for s in doc["spots"]:
        assert s["margin_db"] == pytest.approx(sc.margin_db[sc.names.index(s["name"])], abs=2e-3)
    # and they differ from the uncalibrated ranking
    assert main(["rank", str(SEDAN), "--json"]) == 0
    plain = json.loads(capsys.readouterr().out)
    m_cal = {s["name"]: s["margin_db"] for s in doc["spots"]}
    m_plain = {s["name"]: s["margin_db"] for s in plain["spots"]}
    assert max(abs(m_cal[k] - m_plain[k]) for k in m_cal) > 3.0
    assert plain["setup"]["overrides"]["calibration"] is None


def test_rank_text_and_heatmap_name_the_calibration(cal_file, tmp_path, capsys):
    assert main(["rank", str(SEDAN), "--calibration", str(cal_file), "--angles", "24"]) == 0
    assert f"calibration {cal_file}: calibrated from 1,088 measurements" in capsys.readouterr().out
    csv_path = tmp_path / "h.csv"
    assert main(["heatmap", str(SEDAN), "--calibration", str(cal_file), "--step", "0.3", "--angles", "12",
                 "--csv", str(csv_path)]) == 0
    assert "calibration" in capsys.readouterr().out
    _, setup, _ = read_csv_preamble(csv_path.read_text())
    assert setup["overrides"]["calibration"]["values"]["metal_loss_db"] > 20.0


def test_report_says_calibrated_from_n_measurements_on_page_1(cal_file, tmp_path, capsys):
    from pypdf import PdfReader

    pdf = tmp_path / "r.pdf"
    js = tmp_path / "r.json"
    assert main(["report", str(SEDAN), "--calibration", str(cal_file), "-o", str(pdf), "--json", str(js),
                 "--step", "0.6"]) == 0
    capsys.readouterr()
    page1 = " ".join(PdfReader(str(pdf)).pages[0].extract_text().split())
    assert "calibrated from 1,088 measurements, hold-out RMS" in page1
    doc = json.loads(js.read_text())
    metal = next(m for m in doc["materials"] if m["material"] == "metal")
    assert metal["calibrated"] and "calibration" in metal["source"]
    assert doc["setup"]["overrides"]["calibration"]["file"] == str(cal_file)


def test_compare_applies_the_calibration_to_every_body(cal_file, capsys):
    hatch = SAMPLES_DIR / "hatchback.json"
    assert main(["compare", str(SEDAN), str(hatch), "--no-search"]) == 0
    plain = capsys.readouterr().out
    assert main(["compare", str(SEDAN), str(hatch), "--no-search", "--calibration", str(cal_file)]) == 0
    out = capsys.readouterr().out
    assert f"Calibration {cal_file} applied to every body: calibrated from 1,088 measurements" in out
    # fitted on the 433.92 MHz sedan, applied to the 315 MHz hatchback: said so
    assert ("Warning: the calibration was fitted at 433.92 MHz and 'Demo compact hatchback' runs at 315.00 MHz"
            in out) and "'Demo mid-size sedan' runs" not in out
    assert out != plain and out.rstrip().endswith(SAFETY_NOTE)


def test_schema_command_prints_the_measurement_and_calibration_schemas(capsys):
    assert main(["schema", "measurements"]) == 0
    s = json.loads(capsys.readouterr().out)
    assert "level_dbm" in s["properties"] and "level_dbm" in s["required"]
    assert main(["schema", "calibration"]) == 0
    assert "parameters" in json.loads(capsys.readouterr().out)["properties"]


def test_docs_describe_every_column_and_key():
    from core.calibration import Calibration, FitRecord, FittedParameter, HoldOutRecord
    from core.measurements import COLUMNS

    text = (Path(__file__).resolve().parents[1] / "docs" / "measurement-format.md").read_text()
    assert all(f"| `{c.name}` |" in text for c in COLUMNS)
    text = (Path(__file__).resolve().parents[1] / "docs" / "calibration-format.md").read_text()
    keys = set()
    for model in (Calibration, FitRecord, FittedParameter, HoldOutRecord):
        keys |= set(model.model_fields)
    missing = [k for k in sorted(keys) if f"`{k}`" not in text]
    assert not missing, missing

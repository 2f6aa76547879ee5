"""The measurement file (core.measurements, docs/measurement-format.md): good files load completely, every
malformed file gives one located error FILE:LINE:COLUMN (the column of the field at fault), nothing half-loaded."""

from __future__ import annotations

import json
import math
import os
from pathlib import Path

import jsonschema
import numpy as np
import pytest

from core.measurements import (
    COLUMNS,
    MeasurementFileError,
    load_measurements,
    measurement_schema,
    measurements_from_records,
    parse_measurements,
)
from core.samples import SAMPLES_DIR
from core.vehicle import load_vehicle

REPO = Path(__file__).resolve().parents[1]
SEDAN = SAMPLES_DIR / "sedan.json"
DEMO = SAMPLES_DIR / "sedan_measurements.csv"
HEAD = "vehicle,spot,wheel,wheel_angle_deg,level_dbm\n"
ROW = "Demo mid-size sedan,under dash centre,FL,30,-71.5\n"


@pytest.fixture(scope="module")
def sedan():
    return load_vehicle(SEDAN)


def _error(sedan, text: str, tmp_path) -> MeasurementFileError:
    p = tmp_path / "m.csv"
    p.write_bytes(text.encode("utf-8") if isinstance(text, str) else text)
    with pytest.raises(MeasurementFileError) as e:
        load_measurements(p, sedan, SEDAN)
    assert str(e.value).startswith(f"{p}:")
    assert "\n" not in str(e.value)  # one line
    return e.value


# ----- the malformed files the issue names, each with its exact location --------------------------
def test_missing_column(sedan, tmp_path):
    e = _error(sedan, "vehicle,spot,wheel,wheel_angle_deg\nDemo mid-size sedan,under dash centre,FL,30\n", tmp_path)
    assert (e.line, e.column) == (1, 1) and "missing column 'level_dbm'" in e.problem


def test_unknown_spot(sedan, tmp_path):
    e = _error(sedan, HEAD + ROW + "Demo mid-size sedan,glovebox,FL,30,-70\n", tmp_path)
    assert (e.line, e.column) == (3, 21) and "unknown spot 'glovebox'" in e.problem
    assert "'under dash centre'" in e.problem  # names the vehicle's spots


def test_unknown_wheel(sedan, tmp_path):
    e = _error(sedan, HEAD + ROW + "Demo mid-size sedan,under dash centre,FR2,30,-70\n", tmp_path)
    assert (e.line, e.column) == (3, 39) and "unknown wheel 'FR2'" in e.problem and "FL, FR, RL, RR" in e.problem


def test_text_in_a_number(sedan, tmp_path):
    e = _error(sedan, HEAD + ROW + ROW + "Demo mid-size sedan,under dash centre,FL,30,-7O.5\n", tmp_path)
    assert (e.line, e.column) == (4, 45) and e.problem == "level_dbm: '-7O.5' is not a number"


@pytest.mark.parametrize("text", ["nan", "NaN", "inf", "-Infinity"])
def test_not_a_finite_number(sedan, tmp_path, text):
    e = _error(sedan, HEAD + f"Demo mid-size sedan,under dash centre,FL,{text},-70\n", tmp_path)
    assert (e.line, e.column) == (2, 42) and e.problem == f"wheel_angle_deg: {text!r} is not a finite number"


def test_empty_file(sedan, tmp_path):
    e = _error(sedan, "", tmp_path)
    assert (e.line, e.column) == (1, 1) and "the file is empty" in e.problem
    e = _error(sedan, "# only a comment\n\n", tmp_path)
    assert (e.line, e.column) == (2, 1) and "the file is empty" in e.problem


def test_header_without_rows(sedan, tmp_path):
    e = _error(sedan, "# format: wheelreach-measurements/1\n" + HEAD, tmp_path)
    assert (e.line, e.column) == (2, 1) and "no measurements" in e.problem


# ----- more located errors ---------------------------------------------------------------------------
@pytest.mark.parametrize("body, line, column, words", [
    (HEAD + "Other car,under dash centre,FL,30,-70\n", 2, 1, "vehicle 'Other car' is not the vehicle"),
    (HEAD + "Demo mid-size sedan,under dash centre,FL,30,-70,5\n", 2, 49, "the row has 6 fields; the header has 5"),
    (HEAD + "Demo mid-size sedan,under dash centre,FL,30\n", 2, 44, "the row has 4 fields"),
    (HEAD + "Demo mid-size sedan,under dash centre,FL,30,\n", 2, 45, "level_dbm: empty"),
    (HEAD + "Demo mid-size sedan,under dash centre,FL,30,-250\n", 2, 45, "-250 dBm is outside -200..50 dBm"),
    (HEAD + 'Demo mid-size sedan,"under dash centre,FL,30,-70\n', 2, 21, "no closing quote"),
    ("vehicle,spot,wheel,wheel_angle_deg,level_dbm,colour\n" + ROW, 1, 46, "unknown column 'colour'"),
    ("vehicle,spot,wheel,spot,wheel_angle_deg,level_dbm\n" + ROW, 1, 20, "column 'spot' appears twice"),
    ("# format: wheelreach-measurements/2\n" + HEAD + ROW, 1, 11, "'wheelreach-measurements/2' is not readable"),
    ("vehicle,spot,x_m,y_m,wheel,wheel_angle_deg,level_dbm\n", 1, 1, "missing column 'z_m'"),
    ("vehicle,spot,x_m,y_m,z_m,wheel,wheel_angle_deg,level_dbm\nDemo mid-size sedan,probe,-1.0,,0.5,FL,0,-70\n", 2,
     32, "y_m: empty; x_m, y_m and z_m go together"),
    ("vehicle,spot,x_m,y_m,z_m,wheel,wheel_angle_deg,level_dbm\nDemo mid-size sedan,roof lining,-1.0,0,0.5,FL,0,-70\n",
     2, 33, "spot 'roof lining' of the vehicle file is at (-1.900, 0.000, 1.360) m"),
    (HEAD + ROW + "Demo mid-size sedan,under dash centre,FL,,-70\n", 3, 1,
     "only 1 level without a wheel angle for spot 'under dash centre', wheel FL at 433.92 MHz"),
    ("vehicle,spot,wheel,wheel_angle_deg,level_dbm,frequency_hz\nDemo mid-size sedan,under dash centre,FL,0,-70,5e11\n",
     2, 48, "frequency_hz: 5e+11 Hz is outside"),
])
def test_located_errors(sedan, tmp_path, body, line, column, words):
    e = _error(sedan, body, tmp_path)
    assert (e.line, e.column) == (line, column), str(e)
    assert words in e.problem


def test_not_utf8_and_not_a_regular_file(sedan, tmp_path):
    e = _error(sedan, HEAD.encode() + b"Demo mid-size sedan,under dash \xff centre,FL,0,-70\n", tmp_path)
    assert (e.line, e.column) == (2, 32) and e.problem == "not UTF-8 text"
    with pytest.raises(MeasurementFileError, match="is a folder, not a regular file"):
        load_measurements(tmp_path, sedan)
    if hasattr(os, "mkfifo"):  # a named pipe is refused without blocking (core.files.read_regular_file)
        fifo = tmp_path / "pipe.csv"
        os.mkfifo(fifo)
        with pytest.raises(MeasurementFileError, match="named pipe"):
            load_measurements(fifo, sedan)


def test_nothing_half_loaded(sedan, tmp_path):
    # 500 good rows and one bad one at the end: an error, never a partial set
    body = HEAD + ROW * 500 + "Demo mid-size sedan,under dash centre,FL,30,x\n"
    e = _error(sedan, body, tmp_path)
    assert e.line == 502


# ----- good files ---------------------------------------------------------------------------------------
def test_good_file_with_positions_angles_gain_and_quotes(sedan):
    text = ("# format: wheelreach-measurements/1\n"
            "# a comment\n"
            "vehicle,spot,x_m,y_m,z_m,axis_x,axis_y,axis_z,wheel,wheel_angle_deg,level_dbm,frequency_hz,chain_gain_db\n"
            '"Demo mid-size sedan","roof lining",,,,,,,RL,-90,-80.5,,\n'
            "sedan.json,tripod,-1.6,1.95,0.6,1,0,0,FL,370,-60.25,433.92e6,12\n"
            "\n"
            "sedan.json,,-1.0,0.0,0.9,,,,FR,720,-75,315000000,-3.5\n")
    ms = parse_measurements(text, sedan, "x.csv", SEDAN)
    assert len(ms) == 3 and ms.spot_names == ("roof lining", "tripod", "(-1.000, 0.000, 0.900)")
    assert ms.spot_in_file == (True, False, False)
    np.testing.assert_allclose(ms.spot_positions[0], sedan.resolve_spot(sedan.spots[3]))
    np.testing.assert_allclose(ms.spot_axes[0], sedan.spot_axis(sedan.spots[3]))  # the file spot's own axis
    np.testing.assert_allclose(ms.spot_axes[1], [1.0, 0.0, 0.0])
    np.testing.assert_allclose(ms.spot_axes[2], [0.0, 0.0, 1.0])  # the radio's receiver axis
    np.testing.assert_allclose(np.degrees(ms.angle_rad), [270.0, 10.0, 0.0], atol=1e-9)  # wrapped into one turn
    np.testing.assert_allclose(ms.frequency_hz, [433.92e6, 433.92e6, 315e6])
    np.testing.assert_allclose(ms.antenna_level_dbm, [-80.5, -72.25, -71.5])  # level - chain gain
    np.testing.assert_array_equal(ms.line, [4, 5, 7])


def test_the_demo_set_is_invented_complete_and_valid_against_the_schema(sedan):
    text = DEMO.read_text(encoding="utf-8")
    assert "INVENTED DEMO DATA - NOT A MEASUREMENT" in text
    ms = load_measurements(DEMO, sedan, SEDAN)
    s = ms.summary()
    assert s["rows"] == len([ln for ln in text.splitlines() if ln and not ln.startswith("#")]) - 1
    assert s["with_angle"] > 0 and s["without_angle"] > 0 and len(s["spots"]) == 10
    # every row, as an object of its columns (empty cells null), validates against the published schema
    schema = json.loads((REPO / "docs" / "measurement-format.json").read_text())
    assert schema == measurement_schema()  # docs/measurement-format.json is current (tools/write_schema.py)
    lines = [ln for ln in text.splitlines() if ln and not ln.startswith("#")]
    header = lines[0].split(",")
    kinds = {c.name: c.kind for c in COLUMNS}
    for ln in lines[1:50]:
        row = {h: (None if not x else float(x) if kinds[h] == "number" else x) for h, x in zip(header, ln.split(","))}
        jsonschema.validate(row, schema)
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate({**row, "level_dbm": 99.0}, schema)


def test_records_built_in_code(sedan):
    ms = measurements_from_records(sedan, ["roof lining"] * 12, ["FL"] * 12, [math.nan] * 12, np.linspace(-80, -70, 12),
                                   frequency_hz=[425e6] * 12)
    assert len(ms) == 12 and not ms.has_angle.any() and ms.frequencies_hz == (425e6,)
    with pytest.raises(MeasurementFileError, match="unknown wheel 'XX'"):
        measurements_from_records(sedan, ["roof lining"], ["XX"], [0.0], [-70.0])

"""The vehicle file: samples round-trip; every required check of issue 2 item 6 gives one located message.

Each bad-file test writes a real file and loads it with ``load_vehicle``, then asserts that the message
names the file, the field path and the problem. Limits under test are the project's own (issue 2):
body at most 30 m long, tire at most 2 m across, frequency 1 MHz-10 GHz.
"""

from __future__ import annotations

import copy
import json
import os
from pathlib import Path

import pytest

from core.vehicle import (
    FORMAT_TAG,
    Vehicle,
    VehicleFileError,
    check_vehicle,
    json_schema,
    load_vehicle,
    parse_vehicle,
    save_vehicle,
    vehicle_from_dict,
    vehicle_to_json,
)

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = sorted((ROOT / "sample_vehicles").glob("*.json"))
SEDAN = ROOT / "sample_vehicles" / "sedan.json"


def sedan() -> dict:
    return json.loads(SEDAN.read_text())


def load_error(tmp_path: Path, doc: dict | None = None, text: str | None = None) -> VehicleFileError:
    """Write doc (or raw text) to a file, load it, and return the VehicleFileError it must raise."""
    f = tmp_path / "broken.json"
    f.write_text(text if text is not None else json.dumps(doc, indent=2, allow_nan=True))
    with pytest.raises(VehicleFileError) as e:
        load_vehicle(f)
    err = e.value
    assert str(f) in str(err), "the message must name the file"
    assert err.path == str(f)
    return err


def located(err: VehicleFileError, field: str, *words: str) -> None:
    """The message has the form '<file>: <field>: <problem>' and the problem says what is wrong."""
    assert err.field == field, f"field {err.field!r} != {field!r} in: {err}"
    assert f": {field}: " in str(err), str(err)
    for w in words:
        assert w in err.problem, f"{w!r} not in problem: {err.problem!r}"


# ----- samples --------------------------------------------------------------------------------
def test_there_are_five_samples():
    # issue 2 item 8: hatchback, sedan, SUV, dual-rear-wheel pickup, cargo van
    styles = {load_vehicle(f).body_style.lower() for f in SAMPLES}
    assert {"hatchback", "sedan", "suv", "pickup", "van"} <= styles
    pickup = load_vehicle(ROOT / "sample_vehicles" / "pickup_dual_rear.json")
    assert len(pickup.wheels) == 6
    freqs = {load_vehicle(f).radio.frequency_hz for f in SAMPLES}
    assert {315e6, 433.92e6} <= freqs


@pytest.mark.parametrize("path", SAMPLES, ids=lambda p: p.stem)
def test_sample_loads_validates_and_round_trips(path, tmp_path):
    v = load_vehicle(path)
    assert isinstance(v, Vehicle)
    check_vehicle(v)  # raises on any cross-field problem
    assert len(v.spots) >= 6 and len(v.regions) >= 1
    # the sample file is exactly what the program itself writes (no stale keys, canonical form)
    assert path.read_text() == vehicle_to_json(v)
    out = tmp_path / path.name
    save_vehicle(v, out)
    v2 = load_vehicle(out)
    assert v2 == v
    assert out.read_bytes() == vehicle_to_json(v2).encode("utf-8")
    save_vehicle(v2, out)  # and a second trip changes nothing
    assert out.read_text() == path.read_text()
    assert sorted(os.listdir(tmp_path)) == [path.name]


def test_sample_wheel_uses_iso_tire_arithmetic():
    # ISO 4000-1 / ETRTO: 225/50R17 -> 17 x 25.4 + 2 x 225 x 0.50 = 656.8 mm, centre at half of it
    v = load_vehicle(SEDAN)
    w = v.wheels[0]
    assert w.tire == "225/50R17"
    assert w.tire_size.outer_diameter_m == pytest.approx(0.6568, abs=1e-9)
    assert w.centre_z_m == pytest.approx(0.3284, abs=1e-9)


def test_explicit_tire_diameters_are_accepted():
    d = sedan()
    d["wheels"][0]["tire"] = {"outer_diameter_m": 0.66, "rim_diameter_m": 0.432, "section_width_m": 0.225}
    v = vehicle_from_dict(d)
    assert v.wheels[0].tire_size.outer_diameter_m == 0.66
    assert v.wheels[0].tire_size.rim_diameter_m == 0.432


def test_models_are_frozen():
    v = load_vehicle(SEDAN)
    with pytest.raises(Exception):  # pydantic raises ValidationError for a frozen instance
        v.name = "x"  # type: ignore[misc]


def test_user_material_can_be_used_by_a_zone():
    d = sedan()
    d["materials"] = {"heated windscreen": {"loss_db": 12.0, "description": "metal-coated glass"}}
    d["zones"][0]["material"] = "heated windscreen"
    v = vehicle_from_dict(d)
    assert v.materials["heated windscreen"].loss_db == 12.0
    assert "heated windscreen" in v.material_names()


# ----- located messages: one test per required check of issue 2 item 6 ------------------------
def test_json_syntax_error_gives_line_and_column(tmp_path):
    text = SEDAN.read_text()
    # drop the comma after the "name" line (line 3); the parser then stops at line 4, column 3,
    # where "body_style" starts after two spaces of indentation
    lines = text.split("\n")
    assert lines[2].startswith('  "name"') and lines[2].endswith(",")
    lines[2] = lines[2][:-1]
    err = load_error(tmp_path, text="\n".join(lines))
    assert err.field == ""
    assert "not valid JSON" in err.problem
    assert "line 4, column 3" in err.problem


def test_truncated_file(tmp_path):
    text = SEDAN.read_text()
    err = load_error(tmp_path, text=text[: len(text) // 2])
    assert "not valid JSON" in err.problem and "line" in err.problem


def test_top_level_must_be_an_object(tmp_path):
    err = load_error(tmp_path, text="[1, 2, 3]")
    assert "must be a JSON object" in err.problem


@pytest.mark.parametrize(
    ("drop", "field"),
    [
        (("name",), "name"),
        (("body",), "body"),
        (("body", "side_outline"), "body.side_outline"),
        (("wheels", 1, "rim_width_m"), "wheels[1].rim_width_m"),
        (("spots", 2, "z_m"), "spots[2].z_m"),
    ],
)
def test_missing_key(tmp_path, drop, field):
    d = sedan()
    parent = d
    for k in drop[:-1]:
        parent = parent[k]
    del parent[drop[-1]]
    located(load_error(tmp_path, d), field, "required field is missing")


@pytest.mark.parametrize(
    ("where", "field"),
    [((), "colour"), (("wheels", 0), "wheels[0].colour"), (("radio", "sensor"), "radio.sensor.colour")],
)
def test_unknown_key(tmp_path, where, field):
    d = sedan()
    target = d
    for k in where:
        target = target[k]
    target["colour"] = "red"
    located(load_error(tmp_path, d), field, "unknown field")


@pytest.mark.parametrize(
    ("path", "value", "field", "word"),
    [
        (("radio", "frequency_hz"), "433.92 MHz", "radio.frequency_hz", "number"),
        (("radio", "frequency_hz"), True, "radio.frequency_hz", "number"),  # strict: a bool is not a number
        (("wheels", 2, "x_m"), [0.0], "wheels[2].x_m", "number"),
        (("name",), 7, "name", "string"),
        (("radio", "angles_per_turn"), 72.5, "radio.angles_per_turn", "integer"),
        (("wheels", 2, "tire"), 17, "wheels[2].tire", "string"),
        (("spots", 0, "axis"), [0.0, "up", 1.0], "spots[0].axis[1]", "number"),
        (("radio", "sensor"), "strong", "radio.sensor", "object"),
    ],
)
def test_wrong_type(tmp_path, path, value, field, word):
    d = sedan()
    target = d
    for k in path[:-1]:
        target = target[k]
    target[path[-1]] = value
    located(load_error(tmp_path, d), field, word)


def test_wheels_must_be_a_list(tmp_path):
    d = sedan()
    d["wheels"] = {"FL": d["wheels"][0]}
    located(load_error(tmp_path, d), "wheels", "array")


def test_tire_object_missing_a_diameter_names_the_key(tmp_path):
    d = sedan()
    d["wheels"][1]["tire"] = {"outer_diameter_m": 0.66, "section_width_m": 0.225}
    located(load_error(tmp_path, d), "wheels[1].tire.rim_diameter_m", "missing")


def test_bad_tire_code_message_of_the_issue(tmp_path):
    # issue 2 item 6 gives this exact message as its example
    d = sedan()
    d["wheels"][2]["tire"] = "225/50X17"
    err = load_error(tmp_path, d)
    assert str(err).startswith(f"{tmp_path / 'broken.json'}: wheels[2].tire: '225/50X17' is not a tire size")


@pytest.mark.parametrize(
    ("literal", "path", "field"),
    [
        ("NaN", ("radio", "frequency_hz"), "radio.frequency_hz"),
        ("Infinity", ("wheels", 1, "x_m"), "wheels[1].x_m"),
        ("-Infinity", ("spots", 3, "z_m"), "spots[3].z_m"),
        ("1e999", ("radio", "sensor", "eirp_dbm"), "radio.sensor.eirp_dbm"),  # overflows to inf
        ("NaN", ("body", "top_outline", 4, 1), "body.top_outline[4][1]"),
        ("NaN", ("spots", 0, "axis"), "spots[0].axis[0]"),
    ],
)
def test_nan_and_inf_are_rejected_with_the_field_named(tmp_path, literal, path, field):
    # Python's json module reads NaN, Infinity, -Infinity literals (not JSON per RFC 8259) and turns
    # 1e999 into inf; the loader must still refuse them and name the field.
    d = sedan()
    if path[-1] == "axis":
        d["spots"][0]["axis"] = "__X__"
        text = json.dumps(d, indent=2).replace('"__X__"', f"[{literal}, 0.0, 1.0]")
    else:
        target = d
        for k in path[:-1]:
            target = target[k]
        target[path[-1]] = "__X__"
        text = json.dumps(d, indent=2).replace('"__X__"', literal)
    err = load_error(tmp_path, text=text)
    located(err, field, "finite")


@pytest.mark.parametrize(
    ("path", "value", "field"),
    [
        (("wheels", 0, "rim_width_m"), -0.19, "wheels[0].rim_width_m"),
        (("wheels", 3, "sensor_radius_m"), -0.2, "wheels[3].sensor_radius_m"),
        (("body", "wheelhouse_clearance_m"), -0.01, "body.wheelhouse_clearance_m"),
        (("radio", "frame_interval_s"), 0.0, "radio.frame_interval_s"),
        (("radio", "speed_max_mps"), -1.0, "radio.speed_max_mps"),
    ],
)
def test_negative_sizes(tmp_path, path, value, field):
    d = sedan()
    target = d
    for k in path[:-1]:
        target = target[k]
    target[path[-1]] = value
    located(load_error(tmp_path, d), field, "greater than")


def test_negative_explicit_tire_diameter(tmp_path):
    d = sedan()
    d["wheels"][0]["tire"] = {"outer_diameter_m": -0.66, "rim_diameter_m": 0.43, "section_width_m": 0.22}
    located(load_error(tmp_path, d), "wheels[0].tire.outer_diameter_m", "greater than or equal to 0.3")


def test_body_longer_than_30_m(tmp_path):
    d = sedan()
    # stretch the 4.80 m plan view eightfold: 38.4 m long
    d["body"]["top_outline"] = [[8 * x, y] for x, y in d["body"]["top_outline"]]
    located(load_error(tmp_path, d), "body.top_outline", "38.4 m long", "30 m")


def test_body_below_the_ground(tmp_path):
    d = sedan()
    d["body"]["side_outline"] = [[x, z - 0.5] for x, z in d["body"]["side_outline"]]
    located(load_error(tmp_path, d), "body.side_outline", "ground")


def test_explicit_tire_over_2_m(tmp_path):
    d = sedan()
    d["wheels"][1]["tire"] = {"outer_diameter_m": 2.4, "rim_diameter_m": 1.2, "section_width_m": 0.6}
    located(load_error(tmp_path, d), "wheels[1].tire.outer_diameter_m", "less than or equal to 2")


def test_tire_code_over_2_m(tmp_path):
    # ISO 4000-1 / ETRTO arithmetic: 30 x 25.4 + 2 x 999 x 0.99 = 762.0 + 1978.0 = 2740.0 mm > 2 m
    d = sedan()
    d["wheels"][1]["tire"] = "999/99R30"
    located(load_error(tmp_path, d), "wheels[1].tire", "2.740 m", "2 m")


@pytest.mark.parametrize(
    ("where", "field"),
    [(("body", "top_outline"), "body.top_outline"), (("zones", 1, "outline"), "zones[1].outline")],
)
def test_outline_with_fewer_than_3_points(tmp_path, where, field):
    d = sedan()
    target = d[where[0]][where[1]]
    if len(where) == 3:
        target[where[2]] = target[where[2]][:2]
    else:
        d[where[0]][where[1]] = target[:2]
    located(load_error(tmp_path, d), field, "at least 3")


def test_self_crossing_top_outline(tmp_path):
    d = sedan()
    # a bow tie: the edges (1,1)-(-4,-1) and (-4,1)-(1,-1) cross at (-1.5, 0)
    d["body"]["top_outline"] = [[1.0, 1.0], [-4.0, -1.0], [-4.0, 1.0], [1.0, -1.0]]
    located(load_error(tmp_path, d), "body.top_outline", "crosses itself")


def test_self_crossing_zone_and_region(tmp_path):
    d = sedan()
    d["zones"][0]["outline"] = [[-0.5, 1.0], [-2.5, 1.3], [-2.5, 1.0], [-0.5, 1.3]]
    located(load_error(tmp_path, d), "zones[0].outline", "crosses itself")
    d = sedan()
    d["regions"][0]["outline"] = [[-3.0, -0.5], [0.5, 0.5], [0.5, -0.5], [-3.0, 0.5]]
    located(load_error(tmp_path, d), "regions[0].outline", "crosses itself")


def test_outline_with_no_area(tmp_path):
    d = sedan()
    d["body"]["side_outline"] = [[0.0, 0.3], [-1.0, 0.6], [-2.0, 0.9]]  # three points on a line
    located(load_error(tmp_path, d), "body.side_outline", "no area")


def test_wheel_centre_outside_the_outline_by_more_than_a_tire_width(tmp_path):
    # sedan plan view: x from -3.85 to 0.95 m; 225/50R17 section width 0.225 m
    d = sedan()
    d["wheels"][2]["x_m"] = -3.85 - 0.225 - 0.05
    located(load_error(tmp_path, d), "wheels[2]", "outside")
    d = sedan()
    d["wheels"][1]["y_m"] = -(0.92 + 0.30)
    located(load_error(tmp_path, d), "wheels[1]", "outside")


def test_wheel_centre_just_within_a_tire_width_is_accepted():
    d = sedan()
    d["wheels"][2]["x_m"] = -3.85 - 0.20  # 0.20 m < 0.225 m beyond the rear end
    assert vehicle_from_dict(d).wheels[2].x_m == pytest.approx(-4.05)


def test_duplicate_wheel_id(tmp_path):
    d = sedan()
    d["wheels"][3]["id"] = "FL"
    located(load_error(tmp_path, d), "wheels[3].id", "'FL' is used twice", "wheels[0]")


def test_duplicate_spot_name(tmp_path):
    d = sedan()
    d["spots"][4]["name"] = d["spots"][1]["name"]
    located(load_error(tmp_path, d), "spots[4].name", "used twice", "spots[1]")


def test_unknown_material(tmp_path):
    d = sedan()
    d["zones"][2]["material"] = "unobtainium"
    err = load_error(tmp_path, d)
    located(err, "zones[2].material", "unknown material 'unobtainium'", "glass", "metal")
    d = sedan()
    d["body"]["wheelhouse_material"] = "cardboard"
    located(load_error(tmp_path, d), "body.wheelhouse_material", "unknown material")


@pytest.mark.parametrize("freq_hz", [0.5e6, 999_999.0, 10.5e9, 2.4e12, -433.92e6, 0.0])
def test_frequency_outside_1_mhz_to_10_ghz(tmp_path, freq_hz):
    d = sedan()
    d["radio"]["frequency_hz"] = freq_hz
    located(load_error(tmp_path, d), "radio.frequency_hz", "outside")


@pytest.mark.parametrize("freq_hz", [1e6, 10e9, 315e6])
def test_frequency_limits_are_inclusive(freq_hz):
    d = sedan()
    d["radio"]["frequency_hz"] = freq_hz
    assert vehicle_from_dict(d).radio.frequency_hz == freq_hz


def test_newer_format_version(tmp_path):
    d = sedan()
    d["format"] = "wheelreach-vehicle/2"
    located(load_error(tmp_path, d), "format", "version '2'", "not readable")


def test_newer_format_with_new_keys_reports_the_version_not_the_keys(tmp_path):
    d = sedan()
    d["format"] = "wheelreach-vehicle/7"
    d["antenna_cables"] = [{"loss_db": 1.5}]  # a key a later version might add
    located(load_error(tmp_path, d), "format", "version '7'")


def test_other_format(tmp_path):
    d = sedan()
    d["format"] = "some-other-format/1"
    located(load_error(tmp_path, d), "format", "not a Wheelreach vehicle file")


def test_missing_file(tmp_path):
    f = tmp_path / "nowhere.json"
    with pytest.raises(VehicleFileError) as e:
        load_vehicle(f)
    assert str(f) in str(e.value) and "cannot read" in e.value.problem


def test_in_memory_document_has_no_file_part():
    d = sedan()
    d["wheels"][2]["tire"] = "225/50X17"
    with pytest.raises(VehicleFileError) as e:
        parse_vehicle(json.dumps(d))
    assert str(e.value).startswith("wheels[2].tire: '225/50X17' is not a tire size")
    assert e.value.path == ""


def test_one_error_type_only():
    # the project's single error type is a ValueError, so callers may catch either
    assert issubclass(VehicleFileError, ValueError)


def test_sensor_power_must_be_given_one_way():
    d = sedan()
    d["radio"]["sensor"]["conducted_power_dbm"] = -15.0  # and eirp_dbm is also given
    with pytest.raises(VehicleFileError, match="not both") as e:
        vehicle_from_dict(copy.deepcopy(d))
    assert e.value.field == "radio.sensor"


# ----- the JSON Schema in docs/ is the one the model generates ---------------------------------
def test_docs_schema_is_current():
    # regenerate with: python tools/write_schema.py
    on_disk = json.loads((ROOT / "docs" / "vehicle-format.json").read_text())
    assert on_disk == json_schema()
    assert FORMAT_TAG in on_disk["title"]


# ----- atomic save (issue 2 item 7) ------------------------------------------------------------
class _Boom(OSError):
    pass


@pytest.fixture
def saved(tmp_path):
    """A previous good file on disk, its bytes, and a changed vehicle to save over it."""
    f = tmp_path / "car.json"
    v = load_vehicle(SEDAN)
    save_vehicle(v, f)
    changed = v.model_copy(update={"name": "Demo sedan, edited"})
    return f, f.read_bytes(), changed


def _only_file_left(f: Path) -> None:
    assert sorted(os.listdir(f.parent)) == [f.name], "no temporary file may be left behind"


def test_save_interrupted_in_fsync_leaves_previous_file(saved, monkeypatch):
    f, before, changed = saved

    def fsync(fd):
        raise _Boom("disk went away during fsync")

    monkeypatch.setattr(os, "fsync", fsync)
    with pytest.raises(_Boom):
        save_vehicle(changed, f)
    assert f.read_bytes() == before
    _only_file_left(f)


def test_save_interrupted_halfway_through_write_leaves_previous_file(saved, monkeypatch):
    f, before, changed = saved
    real_fdopen = os.fdopen
    seen: dict = {}

    class HalfWriter:
        """Writes half of the data to the temporary file, then fails like a full disk."""

        def __init__(self, fobj):
            self.fobj = fobj

        def write(self, data):
            self.fobj.write(data[: len(data) // 2])
            self.fobj.flush()
            seen["during"] = sorted(os.listdir(f.parent))
            raise _Boom("No space left on device")

        def __getattr__(self, name):
            return getattr(self.fobj, name)

        def __enter__(self):
            return self

        def __exit__(self, *exc):
            self.fobj.close()
            return False

    monkeypatch.setattr(os, "fdopen", lambda fd, *a, **k: HalfWriter(real_fdopen(fd, *a, **k)))
    with pytest.raises(_Boom):
        save_vehicle(changed, f)
    # while writing, the half-written data lived in a temporary file in the same folder
    assert len(seen["during"]) == 2 and f.name in seen["during"]
    assert f.read_bytes() == before
    _only_file_left(f)


def test_save_interrupted_before_rename_leaves_previous_file(saved, monkeypatch):
    f, before, changed = saved

    def replace(src, dst):
        raise KeyboardInterrupt  # not an Exception: the clean-up must still run

    monkeypatch.setattr(os, "replace", replace)
    with pytest.raises(KeyboardInterrupt):
        save_vehicle(changed, f)
    assert f.read_bytes() == before
    _only_file_left(f)


def test_save_fsyncs_before_it_replaces(saved, monkeypatch):
    f, before, changed = saved
    calls = []
    real_fsync, real_replace = os.fsync, os.replace
    monkeypatch.setattr(os, "fsync", lambda fd: (calls.append("fsync"), real_fsync(fd))[1])

    def replace(a, b):
        calls.append(("replace", Path(a).parent, Path(b)))
        return real_replace(a, b)

    monkeypatch.setattr(os, "replace", replace)
    save_vehicle(changed, f)
    assert calls[0] == "fsync"
    assert calls[1] == ("replace", f.parent, f)  # temporary file in the same folder, renamed over the target
    assert load_vehicle(f) == changed and f.read_bytes() != before
    _only_file_left(f)


def test_invalid_vehicle_is_not_saved(saved):
    f, before, changed = saved
    # model_copy does not validate; save_vehicle must check before it writes anything
    bad = changed.model_copy(update={"wheels": changed.wheels + (changed.wheels[0],)})
    with pytest.raises(VehicleFileError, match="used twice"):
        save_vehicle(bad, f)
    assert f.read_bytes() == before
    _only_file_left(f)


# ----- the human reference in docs/vehicle-format.md --------------------------------------------
def _doc_text() -> str:
    return (ROOT / "docs" / "vehicle-format.md").read_text()


def test_docs_minimal_example_is_a_valid_file():
    text = _doc_text()
    block = text.split("```json", 1)[1].split("```", 1)[0]
    v = parse_vehicle(block, "docs/vehicle-format.md")
    assert len(v.wheels) == 4 and v.radio.frequency_hz == 433.92e6
    # ISO 4000-1 / ETRTO: 205/55R16 -> 16 x 25.4 + 2 x 205 x 0.55 = 406.4 + 225.5 = 631.9 mm
    assert v.wheels[0].tire_size.outer_diameter_m == pytest.approx(0.6319, abs=1e-9)


def test_docs_name_every_key_of_the_format():
    from core.vehicle import Body, ExplicitTire, Radio, Receiver, Region, Sensor, Spot, UserMaterial, Wheel, Zone

    text = _doc_text()
    models = (Vehicle, Body, Zone, UserMaterial, ExplicitTire, Wheel, Spot, Region, Sensor, Receiver, Radio)
    missing = [f"{m.__name__}.{k}" for m in models for k in m.model_fields if f"`{k}`" not in text]
    assert missing == [], f"docs/vehicle-format.md does not describe: {missing}"

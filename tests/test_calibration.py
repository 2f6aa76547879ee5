"""Calibration of the model from measurements (core.link_terms, core.calibration_fit, core.calibration).

The measurements here are synthetic: made with the engine itself at known parameter offsets plus seeded
Gaussian noise of 2 dB (issue "calibrate the model from measurements", Tests). A fit that recovers the
offsets within 1 dB and two standard errors, and whose residual RMS falls to the noise, shows that the
fit, its priors and its standard errors work; it says nothing about the model's physics (the full-wave
pseudo-measurement check does that; see core.calibration_fit.holdout_rank_agreement).
"""

from __future__ import annotations

import json
from pathlib import Path

import jsonschema
import numpy as np
import pytest

from core import calibration_fit as cf
from core.calibration import (
    PARAMETERS,
    CalibrationFileError,
    apply_calibration,
    apply_values,
    calibration_schema,
    contents_m2,
    load_calibration,
    parse_calibration,
    save_calibration,
)
from core.calibration_fit import MeasurementModel, calibrate, fit_model, holdout, holdout_rank_agreement
from core.geometry import start_bits
from core.link_terms import LinkTerms
from core.links import level_dbm, link_field
from core.measurements import measurements_from_records
from core.provenance import load_with_source
from core.samples import SAMPLES_DIR
from core.scoring import Scene, vehicle_spot_arrays
from core.vehicle import load_vehicle, vehicle_from_dict, vehicle_to_dict
from core.wheel import sensor_axes, sensor_positions
from tests.engine_vehicles import calibration_box

REPO = Path(__file__).resolve().parents[1]
NOISE_DB = 2.0
#: the known offsets from the vehicle's own values (dB) the synthetic measurements are made with
OFFSETS = {"metal_loss_db": 5.0, "glass_loss_db": 3.0, "plastic_loss_db": 2.0, "tread_loss_db": 4.0,
           "sensor_eirp_offset_db": -3.0, "null_floor_db": 6.0, "cabin_absorption_db": 3.0}
WITHOUT_TREAD = tuple(p for p in PARAMETERS if p.key != "tread_loss_db")


def synthetic(v, params, with_angles: bool, seed: int = 7, per_turn: int = 72, frames: int = 60,
              dropouts: float = 0.0, spots=None):
    """(measurement set, true values, noise added) of the vehicle's spots: with angles, a turn of every wheel at
    ``per_turn`` steps; without, ``frames`` levels per (spot, wheel) at random angles with the angles left out."""
    rng = np.random.default_rng(seed)
    S, W, A = [], [], []
    for s in spots or [s.name for s in v.spots]:
        for w in (w.id for w in v.wheels):
            angles = np.arange(0.0, 360.0, 360.0 / per_turn) if with_angles else rng.uniform(0.0, 360.0, frames)
            S += [s] * len(angles)
            W += [w] * len(angles)
            A += list(angles)
    A = np.asarray(A)
    m0 = MeasurementModel.build(v, measurements_from_records(v, S, W, A, np.zeros(len(S))), params)
    x_true = m0.priors() + np.array([OFFSETS[p.key] for p in params])
    noise = rng.normal(0.0, NOISE_DB, len(S))
    drop = rng.random(len(S)) < dropouts
    levels = m0.predict(x_true) + noise - 20.0 * drop
    ms = measurements_from_records(v, S, W, A if with_angles else np.full(len(S), np.nan), levels)
    return ms, x_true, noise


@pytest.fixture(scope="module")
def box_with_angles():
    v = calibration_box()
    ms, x_true, noise = synthetic(v, WITHOUT_TREAD, True)
    model = MeasurementModel.build(v, ms, WITHOUT_TREAD)
    return v, model, x_true, noise, fit_model(model)


def _recovery_table(fit, x_true) -> str:
    return "\n".join(f"{k}: true {t:.2f} fitted {x:.2f} +- {s:.2f}" for k, t, x, s in
                     zip(fit.keys, x_true, fit.x, fit.standard_error))


def assert_recovered(fit, x_true) -> None:
    """Every offset within 1 dB, which is at least two standard errors (SE <= 0.5 dB); and the standard errors
    are honest: no error beyond 3 SE, and the errors' RMS in SE units at most 2 (a 95 % band per parameter
    does not hold for all six at once: with this design about 1 seed in 12 has one error between 2 and 3 SE)."""
    err = fit.x - x_true
    table = _recovery_table(fit, x_true)
    assert fit.success and fit.informed.all(), table
    assert np.all(np.abs(err) <= 1.0), table
    assert np.all(fit.standard_error <= 0.5), table
    z = err / fit.standard_error
    assert np.all(np.abs(z) <= 3.0) and np.sqrt(np.mean(z ** 2)) <= 2.0, table


# ----- the fast model is the engine -----------------------------------------------------------------------
#: parameter values the fast model is checked at: ordinary ones, and ones across the opening threshold
#: (core.cavity.OPENING_LOSS_DB, 10 dB): metal at 8 dB feeds the cabin as an opening, glass at 12 dB is a
#: conducting wall (fewer openings, other tau, sigma_leak, wall area and wall factors)
OTHER_VALUES = (
    {"metal_loss_db": 27.0, "glass_loss_db": 5.0, "plastic_loss_db": 1.5, "tread_loss_db": 14.0,
     "sensor_eirp_offset_db": 2.5, "null_floor_db": -22.0, "cabin_absorption_db": 1.0},
    {"metal_loss_db": 8.0, "glass_loss_db": 12.0, "plastic_loss_db": 0.5, "tread_loss_db": 6.0,
     "sensor_eirp_offset_db": -1.0, "null_floor_db": -35.0, "cabin_absorption_db": -12.0},
)


@pytest.mark.parametrize("wheel_model", ["installed_pattern", "knife_edge"])
@pytest.mark.parametrize("which", ["sedan", "box"])
def test_fast_links_equal_the_engine_at_other_parameter_values(which, wheel_model):
    """The fast model (core.link_terms: rays and the cabin's diffuse field re-summed from paths traced once)
    gives the engine's level for a vehicle built with the values, to 1e-9 dB (the same arithmetic; the
    difference found is 0 or rounding), also where a value moves a material across the opening threshold."""
    v = load_vehicle(SAMPLES_DIR / "sedan.json") if which == "sedan" else calibration_box()
    v = v.model_copy(update={"radio": v.radio.model_copy(update={"wheel_model": wheel_model})})
    scene = Scene.from_vehicle(v)
    assert scene.cavity is not None
    _, pos, ax = vehicle_spot_arrays(v)
    rng = np.random.default_rng(3)
    n = 2000
    si, wi, th = rng.integers(0, len(pos), n), rng.integers(0, len(v.wheels), n), rng.uniform(0, 2 * np.pi, n)
    terms = LinkTerms.build(scene, wi, th, pos[si], ax[si])
    src = np.empty((n, 3))
    for k, w in enumerate(scene.wheels):
        src[wi == k] = sensor_positions(w, th[wi == k])

    def engine(sc):
        bits = start_bits(sc.hull, src[:, 0], src[:, 1], src[:, 2])
        f = link_field(sc, wi, th, src, sensor_axes(th, v.radio.sensor.axis), bits, pos[si], ax[si])
        return level_dbm(sc, f.power())

    np.testing.assert_allclose(terms.levels_dbm(), engine(scene), rtol=0, atol=1e-9)
    for values in OTHER_VALUES:
        changed = Scene.from_vehicle(apply_values(v, values))  # the vehicle built with the values, as a file would be
        fast = terms.levels_dbm({m: values[f"{m}_loss_db"] for m in ("metal", "glass", "plastic")},
                                values["tread_loss_db"], values["null_floor_db"], values["sensor_eirp_offset_db"],
                                contents_m2(values["cabin_absorption_db"]))
        np.testing.assert_allclose(fast, engine(changed), rtol=0, atol=1e-9)
        # the cavity itself: the same openings, cross-sections and input as core.scoring's
        cav, _ = terms.cavity({m: values[f"{m}_loss_db"] for m in ("metal", "glass", "plastic")},
                              values["tread_loss_db"], contents_m2(values["cabin_absorption_db"]))
        assert len(cav.tau) == len(changed.cavity.tau)
        assert cav.sigma_total_m2 == pytest.approx(changed.cavity.sigma_total_m2, rel=1e-12)
        np.testing.assert_allclose(cav.input, changed.cavity.input, rtol=1e-12, atol=0)
        # the values do change the levels
        assert np.abs(fast - terms.levels_dbm()).max() > 2.0


def test_the_exact_path_for_parameters_without_a_fast_form_agrees(box_with_angles, monkeypatch):
    # a parameter core.link_terms cannot vary (e.g. a future cabin term) is evaluated by building the vehicle
    _, model, x_true, _, _ = box_with_angles
    fast = model.predict(x_true)
    monkeypatch.setattr(MeasurementModel, "_fast_arguments", lambda self, x: None)
    np.testing.assert_allclose(model.predict(x_true), fast, rtol=0, atol=0.006)  # values applied to 0.01 dB


# ----- recovery of known offsets ------------------------------------------------------------------------
def test_recovery_with_angles_within_1_db_and_two_standard_errors(box_with_angles):
    _, _, x_true, noise, fit = box_with_angles
    assert_recovered(fit, x_true)
    # the residual RMS falls to the noise: within 5 % of the RMS of the noise actually added
    noise_rms = float(np.sqrt(np.mean(noise ** 2)))
    assert fit.rms_before_db > 2.5 * noise_rms
    assert abs(fit.rms_after_db - noise_rms) <= 0.05 * noise_rms, (fit.rms_after_db, noise_rms)
    assert abs(fit.noise_db - NOISE_DB) <= 0.15 * NOISE_DB  # the noise scale found


def test_tread_loss_recovered_with_the_knife_edge_wheel():
    v = calibration_box("knife_edge")
    ms, x_true, noise = synthetic(v, PARAMETERS, True, seed=11)
    fit = fit_model(MeasurementModel.build(v, ms, PARAMETERS))
    assert_recovered(fit, x_true)
    assert abs(fit.rms_after_db - np.sqrt(np.mean(noise ** 2))) <= 0.1


def test_recovery_without_angles_within_2_db():
    v = calibration_box()
    ms, x_true, _ = synthetic(v, WITHOUT_TREAD, False)
    model = MeasurementModel.build(v, ms, WITHOUT_TREAD)
    assert model.n_angle_items == 0 and len(model.measured) == len(v.spots) * 2 * len(cf.PERCENTILES)
    fit = fit_model(model)
    table = _recovery_table(fit, x_true)
    for k, key in enumerate(fit.keys):
        if key == "null_floor_db":
            # the 10th-90th percentiles of a turn do not reach the nulls: the floor is not informed, and
            # the fit says so and keeps the prior rather than reporting a value it cannot know
            assert not fit.informed[k] and fit.x[k] == pytest.approx(fit.prior[k], abs=0.1), table
            assert "null_floor_db" not in fit.applied_values()
        else:
            assert fit.informed[k] and abs(fit.x[k] - x_true[k]) <= 2.0, table


def test_outliers_weigh_less():
    """3 % of the levels 20 dB low (frames lost to someone walking past): the robust loss still recovers every
    offset within 1 dB but the null floor, within 1.5 dB. Why the floor's bound is wider than before the cabin
    field: the floor acts only where a level sits in a null, and inside the box the cabin's diffuse field fills
    every null, so only the four outside spots inform it (its standard error without dropouts is 0.41 dB at this
    seed); a dropout at an angle near a null looks like a deeper floor, and here the dropouts move the fitted
    floor from -24.3 dB (same seed without them) to -25.3 dB. The other offsets move by at most 0.15 dB."""
    v = calibration_box()
    ms, x_true, _ = synthetic(v, WITHOUT_TREAD, True, seed=5, dropouts=0.03)
    fit = fit_model(MeasurementModel.build(v, ms, WITHOUT_TREAD))
    bound = np.array([1.5 if k == "null_floor_db" else 1.0 for k in fit.keys])
    assert np.all(np.abs(fit.x - x_true) <= bound), _recovery_table(fit, x_true)


def test_a_parameter_the_design_cannot_identify_is_held_at_its_prior():
    """Levels at the cabin's centre and outside only: inside a closed cabin fed through its windows the diffuse
    field sets the level, and the straight path through the metal is 20-25 dB below it, so the metal loss moves
    these levels by about 0.01 dB per dB (sensitivity about 3 prior units, standard error about 7 dB of the 10 dB
    prior width if fitted). The fit says so: it holds the metal at the vehicle's value (not informed, not applied,
    standard error = prior width) and fits the rest, which are recovered within 1 dB."""
    v = calibration_box()
    spots = ["behind glass", "behind plastic", "outside left", "outside right", "outside front", "outside rear"]
    ms, x_true, noise = synthetic(v, WITHOUT_TREAD, True, spots=spots, per_turn=36)
    fit = fit_model(MeasurementModel.build(v, ms, WITHOUT_TREAD))
    table = _recovery_table(fit, x_true)
    fitted = {p.key: p for p in fit.fitted_parameters()}
    metal = fitted["metal_loss_db"]
    assert fit.held.tolist() == [k == "metal_loss_db" for k in fit.keys], table
    assert metal.value_db == metal.prior_db and metal.standard_error_db == metal.prior_width_db, table
    assert 0.0 < metal.sensitivity and not metal.informed and not metal.applied, table
    assert "metal_loss_db" not in fit.applied_values() and metal.status().startswith("not informed")
    others = [k != "metal_loss_db" for k in fit.keys]
    assert fit.informed[others].all() and np.all(np.abs(fit.x - x_true)[others] <= 1.0), table
    assert fit.rms_after_db == pytest.approx(np.sqrt(np.mean(noise ** 2)), rel=0.05)


def test_parameters_the_measurements_do_not_touch_are_not_applied_and_correlated_ones_are():
    """Three spots of the sample sedan, in the cabin and the boot, with the installed wheel pattern. The
    installed pattern holds the tread itself, and inside the body the cabin's diffuse field fills every null so
    the null floor never acts: neither moves these levels (sensitivity 0), so both keep the vehicle's values.
    (Before the cabin field the glass was the untouched one: no straight path to these spots crosses glass; now
    the cabin is fed through the glazing, and the glass loss is informed.) The plastic loss and the EIRP offset
    move these levels alike (most of the power enters through plastic panels): each alone is known less well,
    their combination is fixed; both are applied and said to be correlated, and together with the rest they
    reproduce the measurements to the noise."""
    v = load_vehicle(SAMPLES_DIR / "sedan.json")
    spots = ["under dash centre", "rear bumper", "roof lining"]
    ms, x_true, noise = synthetic(v, PARAMETERS, True, per_turn=24, spots=spots)
    fit = fit_model(MeasurementModel.build(v, ms, PARAMETERS))
    fitted = {p.key: p for p in fit.fitted_parameters()}
    table = _recovery_table(fit, x_true)
    for key in ("tread_loss_db", "null_floor_db"):
        assert fitted[key].sensitivity == 0.0 and not fitted[key].applied and not fitted[key].informed, table
        assert fitted[key].standard_error_db == pytest.approx(fitted[key].prior_width_db, rel=1e-3)
        assert fitted[key].value_db == pytest.approx(fitted[key].prior_db, abs=1e-6)
        assert key not in fit.applied_values()
    assert fitted["glass_loss_db"].applied and fitted["glass_loss_db"].sensitivity > 1.0
    plastic, eirp = fitted["plastic_loss_db"], fitted["sensor_eirp_offset_db"]
    assert plastic.applied and eirp.applied
    assert plastic.correlated_with == "sensor_eirp_offset_db" and plastic.correlation >= 0.9, table
    assert "the measurements fix their combination" in plastic.status()
    assert fit.rms_after_db == pytest.approx(np.sqrt(np.mean(noise ** 2)), rel=0.05)


# ----- hold-out ----------------------------------------------------------------------------------------
def test_calibrating_on_half_the_spots_lowers_the_prediction_rms_on_the_other_half(box_with_angles):
    _, model, _, _, _ = box_with_angles
    half = ("behind glass", "metal wall front", "outside left", "outside front")
    names = model.measurements.spot_names
    train = np.isin(model.item_spot, [names.index(n) for n in half])
    fit = fit_model(model, train)
    test = ~train
    before = np.sqrt(np.mean((fit.predicted_before[test] - model.measured[test]) ** 2))
    after = np.sqrt(np.mean((fit.predicted_after[test] - model.measured[test]) ** 2))
    assert after < 0.5 * before and after < 1.3 * NOISE_DB, (before, after)


def test_k_fold_holdout_predicts_every_item_once(box_with_angles):
    _, model, _, _, fit = box_with_angles
    h = holdout(model, folds=4)
    spots = sorted(s for f in h.fold_spots for s in f)
    assert h.folds == 4 and spots == sorted(set(model.item_spot.tolist()))
    assert h.rms_after_db < 0.5 * h.rms_before_db
    assert h.rms_after_db >= fit.rms_after_db - 1e-9  # predicting unseen spots is never better than the fit itself
    assert holdout(MeasurementModel.build(model.vehicle, model.measurements.of_spots([0]), model.parameters)) is None


def test_rank_agreement_function(box_with_angles):
    _, model, _, _, _ = box_with_angles
    r = holdout_rank_agreement(model, train_spots=[0, 2, 4, 6], test_spots=[1, 3, 5, 7])
    assert len(r.spots) == 4 and -1.0 <= r.rho_before <= 1.0 and -1.0 <= r.rho_after <= 1.0
    # the calibrated statistic lies nearer the measured one than the uncalibrated
    assert np.mean(np.abs(r.after - r.measured)) < np.mean(np.abs(r.before - r.measured))


# ----- the calibration file and applying it ---------------------------------------------------------------
@pytest.fixture(scope="module")
def demo_run():
    v, src = load_with_source(SAMPLES_DIR / "sedan.json")
    from core.measurements import load_measurements

    ms = load_measurements(SAMPLES_DIR / "sedan_measurements.csv", v, SAMPLES_DIR / "sedan.json")
    return v, calibrate(v, ms, src, folds=3, caution="test caution")  # 3 folds: enough to check the record


def test_calibration_file_round_trip_and_apply(demo_run, tmp_path):
    v, run = demo_run
    cal = run.calibration
    path = tmp_path / "c.json"
    save_calibration(cal, path)
    assert load_calibration(path) == cal
    jsonschema.validate(json.loads(path.read_text()), calibration_schema())
    applied = cal.applied_values()
    assert set(applied) == {"metal_loss_db", "glass_loss_db", "plastic_loss_db", "sensor_eirp_offset_db",
                            "cabin_absorption_db"}
    v2 = apply_calibration(v, cal)
    assert v2.body.cabin_absorption_m2 == pytest.approx(10 ** (applied["cabin_absorption_db"] / 10), rel=0.0024)
    assert v2.materials["metal"].loss_db == pytest.approx(applied["metal_loss_db"], abs=0.005)
    assert v2.materials["metal"].description.startswith("calibrated from 1,088 measurements")
    assert v2.radio.sensor.eirp_dbm == pytest.approx(v.radio.sensor.eirp_dbm + applied["sensor_eirp_offset_db"],
                                                     abs=0.005)
    assert v2.materials["glass"].loss_db == pytest.approx(applied["glass_loss_db"], abs=0.005)
    # not informed (the null floor does not act on these levels, the installed pattern holds the tread): the
    # vehicle's own values stay
    assert v2.radio.null_floor_db == v.radio.null_floor_db and "tire_tread" not in v2.materials
    # another body of the platform whose EIRP is built from conducted power: the offset goes there
    d = vehicle_to_dict(load_vehicle(SAMPLES_DIR / "hatchback.json"))
    d["radio"]["sensor"] = {"conducted_power_dbm": -10.0, "antenna_gain_dbi": -3.0, "return_loss_db": 10.0}
    h2 = apply_calibration(vehicle_from_dict(d), cal)
    assert h2.radio.sensor.conducted_power_dbm == pytest.approx(-10.0 + applied["sensor_eirp_offset_db"], abs=0.005)


def test_docs_calibration_schema_is_current():
    assert json.loads((REPO / "docs" / "calibration-format.json").read_text()) == calibration_schema()


def test_bad_calibration_files_name_the_file_and_field(demo_run, tmp_path):
    v, run = demo_run
    good = json.loads(run.calibration.model_dump_json())
    cases = [
        ("{", "", "not readable as JSON"),
        (json.dumps({**good, "format": "wheelreach-calibration/9"}), "format", "version is not readable"),
        (json.dumps({**good, "format": "something"}), "format", "is not a Wheelreach calibration"),
        (json.dumps({k: x for k, x in good.items() if k != "fit"}), "fit", "required field is missing"),
        (json.dumps({**good, "parameters": [{**good["parameters"][0], "key": "cabin"}]}), "parameters[0].key", ""),
        (json.dumps({**good, "parameters": [{**good["parameters"][0], "value_db": 99.0}]}), "parameters[0].value_db",
         "outside its bounds"),
    ]
    for i, (text, field, words) in enumerate(cases):
        p = tmp_path / f"bad{i}.json"
        p.write_text(text)
        with pytest.raises(CalibrationFileError) as e:
            load_calibration(p)
        assert e.value.path == str(p) and e.value.field == field and words in e.value.problem, str(e.value)
    # values that take a vehicle out of its allowed ranges name the calibration and the field
    bad = json.loads(json.dumps(good))
    eirp = next(p for p in bad["parameters"] if p["key"] == "sensor_eirp_offset_db")
    eirp.update(value_db=29.0, lower_db=-30.0, upper_db=30.0)
    cal = parse_calibration(json.dumps(bad), "big.json")
    d = vehicle_to_dict(v)
    d["radio"]["sensor"]["eirp_dbm"] = 20.0
    with pytest.raises(CalibrationFileError) as e:
        apply_calibration(vehicle_from_dict(d), cal, "big.json")
    assert e.value.path == "big.json" and e.value.field == "radio.sensor.eirp_dbm"


def test_the_calibration_records_what_produced_it(demo_run):
    _, run = demo_run
    cal = run.calibration
    assert cal.measurements["rows"] == 1088 and cal.measurements["sha256"]
    assert cal.vehicle["sha256"] == cal.setup["vehicle_file"]["sha256"]
    assert cal.setup["output"]["calibration"]["method"] == cf.METHOD
    assert cal.holdout is not None and cal.holdout.folds == 3 and len(cal.holdout.fold_spots) == 3
    assert cal.fit.rms_after_db < cal.fit.rms_before_db and cal.holdout.rms_after_db < cal.holdout.rms_before_db
    assert cal.note().startswith("calibrated from 1,088 measurements, hold-out RMS ")

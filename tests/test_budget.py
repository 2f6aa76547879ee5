"""The link budget by term (core.budget): its terms add up to the engine's level, and the terms that have an
outside formula agree with it."""

from __future__ import annotations

import numpy as np
import pytest

from core.budget import link_budgets, median_angle_index, spot_budgets
from core.geometry import body_loss_db
from core.propagation import mismatch_loss_db
from core.samples import SAMPLES_DIR
from core.scoring import Scene, score_vehicle, vehicle_spot_arrays
from core.vehicle import Sensor, load_vehicle
from core.wheel import sensor_positions
from engine_vehicles import box_cabin, sedan

SAMPLES = sorted(SAMPLES_DIR.glob("*.json"))


@pytest.mark.parametrize("path", SAMPLES, ids=lambda p: p.stem)
@pytest.mark.parametrize("wheel_model", ["knife_edge", "installed_pattern"])
@pytest.mark.parametrize("road", [True, False], ids=["road on", "road off"])
def test_terms_sum_to_the_engines_level_for_every_spot_and_wheel(path, wheel_model, road):
    """At each wheel's worst case over the turn and at its median angle, the sum of the terms is the level the
    ranking computed (within 0.01 dB: the issue's requirement; it is exact to rounding here)."""
    v = load_vehicle(path)
    scene = Scene.from_vehicle(v, wheel_model=wheel_model, ground_reflection=road)
    s = score_vehicle(v, scene)
    _, _, axes = vehicle_spot_arrays(v)
    budgets = spot_budgets(scene, s, axes, wheels="all")
    assert len(budgets) == len(s.names)
    for i, per in budgets.items():
        assert len(per) == 2 * len(s.wheel_ids)
        for w, wid in enumerate(s.wheel_ids):
            worst, med = per[f"worst {wid}"], per[f"median {wid}"]
            assert worst.level_dbm == pytest.approx(s.worst_dbm[i, w], abs=0.01)
            a = int(median_angle_index(s.levels_dbm[i, w]))
            assert med.level_dbm == pytest.approx(s.levels_dbm[i, w, a], abs=0.01)
            for b in (worst, med):
                assert b.level_dbm == pytest.approx(b.engine_level_dbm, abs=1e-9)
                assert b.margin_db == pytest.approx(b.level_dbm - s.sensitivity_dbm - s.required_margin_db)
                keys = {t.key for t in b.terms}
                assert ("road" in keys) == road
                assert ("wheel_pattern" in keys) == (scene.sensor_kind == "table")
                assert ("tire_exit" in keys) == (scene.sensor_kind != "table")
        # the spot's own margin is its worst wheel's budget at the worst angle
        ww = s.wheel_ids[int(s.worst_wheel[i])]
        assert per[f"worst {ww}"].margin_db == pytest.approx(s.margin_db[i], abs=0.01)


def test_free_space_term_is_itu_r_p525():
    """ITU-R P.525: L = 32.45 + 20 log f[MHz] + 20 log d[km] (independent of the Friis code)."""
    v = sedan(ground_reflection=False)
    scene = Scene.from_vehicle(v)
    _, pos, ax = vehicle_spot_arrays(v)
    for b in link_budgets(scene, pos, ax, [0] * len(pos), [0.3] * len(pos)):
        fs = next(t for t in b.terms if t.key == "free_space")
        ref = 32.45 + 20 * np.log10(scene.freq_hz / 1e6) + 20 * np.log10(b.path_m / 1e3)
        assert -fs.value_db == pytest.approx(ref, abs=0.01)  # 32.45 is P.525's rounded constant (32.4478)


def test_eirp_built_from_conducted_power_shows_the_mismatch_loss():
    """A 10 dB return loss costs 0.46 dB (textbook transmission-line relation, Pozar sec. 2.3); the conducted
    power, antenna gain and mismatch terms add up to the EIRP the engine uses."""
    v = sedan()
    sensor = Sensor(conducted_power_dbm=-8.0, antenna_gain_dbi=-4.0, return_loss_db=10.0)
    v = v.model_copy(update={"radio": v.radio.model_copy(update={"sensor": sensor})})
    scene = Scene.from_vehicle(v)
    _, pos, ax = vehicle_spot_arrays(v)
    b = link_budgets(scene, pos[:1], ax[:1], [0], [1.0])[0]
    t = {x.key: x.value_db for x in b.terms}
    assert "eirp" not in t
    assert t["mismatch"] == pytest.approx(-0.46, abs=0.005)
    assert t["conducted_power"] + t["antenna_gain"] + t["mismatch"] == pytest.approx(scene.eirp_dbm, abs=1e-12)
    assert t["mismatch"] == pytest.approx(-float(mismatch_loss_db(10.0)))


@pytest.mark.parametrize("window", [None, "glass"])
def test_panel_terms_name_the_material_and_add_up_to_the_body_loss(window):
    """Through the box cabin's left side: each crossing's term carries its material; the panel and diffraction
    terms together are the engine's body loss of the path (core.geometry.body_loss_db)."""
    v = box_cabin(window)
    scene = Scene.from_vehicle(v, wheel_model="knife_edge", ground_reflection=False)
    spot = np.array([[0.0, 0.0, 0.8]])
    b = link_budgets(scene, spot, [[0.0, 0.0, 1.0]], [0], [0.0])[0]  # sensor at the top: the path meets the window
    panels = [t for t in b.terms if t.key in ("panel", "diffraction")]
    assert panels, "the path enters the closed box"
    src = sensor_positions(scene.wheels[0], np.array([0.0]))
    loss = float(body_loss_db(scene.hull, src, spot, scene.freq_hz)[0])
    assert -sum(t.value_db for t in panels) == pytest.approx(loss, abs=1e-9)
    mats = {t.note for t in panels if t.key == "panel"}
    assert mats == {"material glass" if window else "material metal"}
    expected = 2.0 + 0.2 * scene.freq_hz / 1e9 if window else 20.0  # 3GPP TR 38.901 Table 7.4.3-1 glass; metal default
    assert -panels[0].value_db == pytest.approx(expected, abs=1e-9)


def test_budget_dict_has_the_terms_and_the_margin():
    v = sedan()
    scene = Scene.from_vehicle(v)
    s = score_vehicle(v, scene)
    _, _, axes = vehicle_spot_arrays(v)
    b = spot_budgets(scene, s, axes, [0])[0]["worst"]
    d = b.to_dict()
    assert d["at"] == "worst" and d["wheel"] == s.wheel_ids[int(s.worst_wheel[0])]
    assert sum(t["value_db"] for t in d["terms"]) == pytest.approx(d["level_dbm"], abs=0.01)
    assert d["margin_db"] == pytest.approx(s.margin_db[0], abs=0.01)
    assert d["receiver_axis"] == pytest.approx(list(axes[0]), abs=1e-6)

"""Write sample_vehicles/sedan_measurements.csv: an INVENTED measurement set for the sample sedan.

Nothing here was measured. The levels are the engine's own (core.calibration_fit.MeasurementModel)
with the model parameters set to the values in ``HIDDEN`` (not written into the CSV, so a new user
can calibrate and compare), plus seeded Gaussian noise of ``NOISE_DB`` and a few dropouts (a frame
received ``DROPOUT_DB`` low, as when someone walks past the antenna) to show the robust fit. It
imitates a prototype campaign:

- a slow turn of every wheel at ``TURN_STEP_DEG`` steps with the receiver at five of the sample's
  spots and at three tripod positions outside the body (free-space references that separate the
  sensor's EIRP from the body losses);
- a drive log without wheel angles at two further spots (``DRIVE_FRAMES`` frames per wheel at
  random angles);
- a receiver chain gain of ``CHAIN_GAIN_DB`` between the antenna terminal and the logged level.

Run from the checkout: python tools/make_demo_measurements.py
"""

from __future__ import annotations

import csv
import io
from pathlib import Path

import numpy as np

from core.calibration import PARAMETERS
from core.calibration_fit import MeasurementModel
from core.measurements import FORMAT_TAG, measurements_from_records
from core.samples import SAMPLES_DIR
from core.vehicle import Vehicle, load_vehicle

OUT = SAMPLES_DIR / "sedan_measurements.csv"
VEHICLE = SAMPLES_DIR / "sedan.json"
#: the parameter values the invented levels were made with (dB); not in the CSV
HIDDEN = {"metal_loss_db": 26.0, "glass_loss_db": 3.5, "plastic_loss_db": 1.2, "sensor_eirp_offset_db": -2.5,
          "null_floor_db": -24.0}
NOISE_DB = 2.0
DROPOUT_SHARE = 0.01
DROPOUT_DB = -15.0
CHAIN_GAIN_DB = 12.0
TURN_STEP_DEG = 15.0
DRIVE_FRAMES = 40
SEED = 20240611
TURN_SPOTS = ("under dash centre", "centre console", "roof lining", "rear parcel shelf", "rear bumper")
DRIVE_SPOTS = ("under driver seat", "trunk floor")
#: tripod positions outside the body (m, vehicle axes): label -> (x, y, z)
TRIPODS = {"tripod left 1 m": (-1.6, 1.95, 0.6), "tripod right 1 m": (-1.6, -1.95, 0.6),
           "tripod behind 1 m": (-4.85, 0.0, 0.6)}


def demo_rows(v: Vehicle) -> list[dict]:
    """The invented rows (dicts keyed by the CSV's columns)."""
    rng = np.random.default_rng(SEED)
    wheels = [w.id for w in v.wheels]
    plan = []  # (label, position or None, wheel, angle deg, angle written)
    for s in TURN_SPOTS:
        for w in wheels:
            for a in np.arange(0.0, 360.0, TURN_STEP_DEG):
                plan.append((s, None, w, a, True))
    for label, pos in TRIPODS.items():
        for w in wheels:
            for a in np.arange(0.0, 360.0, TURN_STEP_DEG):
                plan.append((label, pos, w, a, True))
    for s in DRIVE_SPOTS:
        for w in wheels:
            for a in rng.uniform(0.0, 360.0, DRIVE_FRAMES):
                plan.append((s, None, w, float(a), False))
    # the levels at the hidden values: every row evaluated at its (true) angle, tripods as extra spots
    tripod_spots = [{"name": k, "x_m": p[0], "y_m": p[1], "z_m": p[2]} for k, p in TRIPODS.items()]
    from core.vehicle import vehicle_from_dict, vehicle_to_dict

    d = vehicle_to_dict(v)
    d["spots"] = list(d["spots"]) + tripod_spots
    v_all = vehicle_from_dict(d)
    ms = measurements_from_records(v_all, [p[0] for p in plan], [p[2] for p in plan], [p[3] for p in plan],
                                   np.zeros(len(plan)))
    model = MeasurementModel.build(v_all, ms, tuple(p for p in PARAMETERS if p.key in HIDDEN))
    truth = model.predict(np.array([HIDDEN[p.key] for p in model.parameters]))
    level = truth + rng.normal(0.0, NOISE_DB, len(plan)) + CHAIN_GAIN_DB
    drop = rng.random(len(plan)) < DROPOUT_SHARE
    level[drop] += DROPOUT_DB
    rows = []
    for (label, pos, w, a, with_angle), lv in zip(plan, level):
        rows.append({"vehicle": v.name, "spot": label,
                     "x_m": "" if pos is None else f"{pos[0]:.3f}", "y_m": "" if pos is None else f"{pos[1]:.3f}",
                     "z_m": "" if pos is None else f"{pos[2]:.3f}", "wheel": w,
                     "wheel_angle_deg": f"{a:.1f}" if with_angle else "", "level_dbm": f"{lv:.2f}",
                     "frequency_hz": f"{v.radio.frequency_hz:.0f}", "chain_gain_db": f"{CHAIN_GAIN_DB:.1f}"})
    return rows


def demo_csv(v: Vehicle) -> str:
    columns = ["vehicle", "spot", "x_m", "y_m", "z_m", "wheel", "wheel_angle_deg", "level_dbm", "frequency_hz",
               "chain_gain_db"]
    buf = io.StringIO()
    buf.write(f"# format: {FORMAT_TAG}\n")
    buf.write("# INVENTED DEMO DATA - NOT A MEASUREMENT. Made by tools/make_demo_measurements.py with the Wheelreach\n"
              "# engine at parameter values not given here, plus 2 dB Gaussian noise and a few dropouts, to try\n"
              "# 'wheelreach calibrate' on the sample sedan. Turns at 15 deg steps at five spots and three tripod\n"
              "# positions outside the body; a drive log without wheel angles at two spots; receiver chain gain 12 dB.\n")
    wr = csv.DictWriter(buf, fieldnames=columns, lineterminator="\n")
    wr.writeheader()
    wr.writerows(demo_rows(v))
    return buf.getvalue()


def main() -> None:
    v = load_vehicle(VEHICLE)
    Path(OUT).write_text(demo_csv(v), encoding="utf-8")
    print(f"wrote {OUT}")


if __name__ == "__main__":
    main()

"""Write the invented demo bodies in sample_vehicles/ (plausible, made-up dimensions).

Run: python tools/make_sample_vehicles.py
The bodies are our own: no real vehicle was measured or copied.
"""

from __future__ import annotations

from pathlib import Path

from core.vehicle import FORMAT_TAG, save_vehicle, vehicle_from_dict

OUT = Path(__file__).resolve().parents[1] / "sample_vehicles"


def plan(x_front, x_rear, half_w, taper_f=0.18, taper_r=0.12, flare=None):
    """Top outline: a rectangle with chamfered corners; optional rear flare (x_start, x_end, half_width)."""
    right = [
        (x_front, -(half_w - taper_f)),
        (x_front - 0.12, -(half_w - 0.03)),
        (x_front - 0.45, -half_w),
    ]
    if flare:
        xs, xe, hw = flare
        right += [(xs + 0.15, -half_w), (xs, -hw), (xe, -hw)]
    right += [(x_rear + 0.35, -half_w), (x_rear + 0.08, -(half_w - 0.04)), (x_rear, -(half_w - taper_r))]
    left = [(x, -y) for x, y in reversed(right)]
    return [list(p) for p in right + left]


def box(x0, x1, y0, y1):
    return [[x0, y0], [x1, y0], [x1, y1], [x0, y1]]


def wheel(id_, x, y, tire, rim_w):
    return {"id": id_, "x_m": x, "y_m": y, "tire": tire, "rim_width_m": rim_w}


def spot(name, x, y, z, axis=None):
    d = {"name": name, "x_m": x, "y_m": y, "z_m": z}
    if axis:
        d["axis"] = list(axis)
    return d


#: Spots placed relative to landmarks every body has (the axles and the floor), so that the same
#: spot exists on all five bodies and a platform comparison is meaningful (see
#: docs/vehicle-format.md, "Same spot on several bodies"). Each body resolves them to its own
#: coordinates: x = offset + the landmark's x, z = offset + the floor under that x (the body's floor
#: height, or the side outline's underside where that is higher, e.g. over the pickup's bed).
PLATFORM_SPOTS = [
    {"name": "platform console", "x_from": "rear_axle", "x_m": 1.40, "y_m": 0.0, "z_from": "floor", "z_m": 0.35},
    {"name": "platform dash", "x_from": "front_axle", "x_m": -0.80, "y_m": 0.0, "z_from": "floor", "z_m": 0.55},
    {"name": "platform rear floor", "x_from": "rear_axle", "x_m": -0.45, "y_m": 0.0, "z_from": "floor", "z_m": 0.25},
]


def four_wheels(wheelbase, half_track, tire, rim_w):
    return [
        wheel("FL", 0.0, half_track, tire, rim_w),
        wheel("FR", 0.0, -half_track, tire, rim_w),
        wheel("RL", -wheelbase, half_track, tire, rim_w),
        wheel("RR", -wheelbase, -half_track, tire, rim_w),
    ]


def radio(freq_hz, eirp_dbm, sensitivity_dbm=-105.0, **kw):
    """Radio setup of a demo body (invented values). ``eirp_dbm`` is the peak EIRP while a frame is on the air.

    Timing (invented, plausible for a tire sensor): 10 ms frames, 4 per burst, a burst every 60 s while
    driving. Against the radio limits (core.regulatory.check_sensor_eirp): at 315 MHz (US 47 CFR 15.231(b),
    an average limit of -19.6 dBm EIRP) a 0.1 s averaging window holds one 10 ms frame, so the averaging
    factor is 20 log10(0.1) = -20 dB and the highest allowed peak is +0.4 dBm (also the 15.35(b) peak
    limit, average limit + 20 dB); -14 dBm peak is -34 dBm average-equivalent. At 433.92 MHz (EU
    EN 300 220: 12.15 dBm EIRP during transmission) -12 dBm is within, at a duty cycle of 0.07 %.
    """
    r = {
        "frequency_hz": freq_hz,
        "sensor": {"eirp_dbm": eirp_dbm, "return_loss_db": 10.0, "pattern": "dipole", "axis": "radial"},
        "receiver": {"gain_dbi": -3.0, "pattern": "dipole", "axis": [0.0, 0.0, 1.0], "sensitivity_dbm": sensitivity_dbm},
        "required_margin_db": 6.0,
        "frames_per_burst": 4,
        "frame_interval_s": 0.1,
        "frame_duration_s": 0.010,
        "burst_period_s": 60.0,
        "speed_min_mps": 0.0,
        "speed_max_mps": 44.5,
    }
    r.update(kw)
    return r


def sedan():
    wb, fo, ro = 2.80, 0.95, 1.05
    xr = -(wb + ro)
    side = [
        [fo, 0.30], [fo, 0.62], [0.70, 0.76], [-0.45, 0.96], [-1.30, 1.42], [-2.55, 1.44],
        [-3.20, 1.06], [-3.80, 1.00], [xr, 0.42], [xr + 0.15, 0.28], [-3.20, 0.20], [0.60, 0.18],
    ]
    return {
        "format": FORMAT_TAG,
        "name": "Demo mid-size sedan",
        "body_style": "sedan",
        "description": "Invented four-door sedan, 4.80 m long, 2.80 m wheelbase. Demo data only.",
        "body": {"top_outline": plan(fo, xr, 0.92), "side_outline": side, "wheelhouse_clearance_m": 0.04},
        "zones": [
            {"name": "side windows", "view": "side", "material": "glass",
             "outline": [[-0.55, 1.00], [-1.35, 1.36], [-2.50, 1.38], [-3.05, 1.04]]},
            {"name": "front bumper fascia", "view": "side", "material": "plastic", "outline": box(0.62, 0.96, 0.25, 0.62)},
            {"name": "rear bumper fascia", "view": "side", "material": "plastic", "outline": box(xr - 0.01, -3.55, 0.25, 0.62)},
            {"name": "windscreen", "view": "top", "material": "glass", "outline": box(-1.30, -0.45, -0.80, 0.80), "z_min_m": 0.9},
            {"name": "rear window", "view": "top", "material": "glass", "outline": box(-3.20, -2.55, -0.78, 0.78), "z_min_m": 1.0},
            {"name": "front bumper", "view": "top", "material": "plastic", "outline": box(0.60, 0.97, -0.80, 0.80), "z_max_m": 0.66},
            {"name": "rear bumper", "view": "top", "material": "plastic", "outline": box(xr - 0.01, -3.50, -0.85, 0.85), "z_max_m": 0.66},
        ],
        "wheels": four_wheels(wb, 0.79, "225/50R17", 0.19),
        "spots": [
            spot("under dash centre", -0.85, 0.0, 0.70),
            spot("centre console", -1.35, 0.0, 0.55),
            spot("under driver seat", -1.75, 0.40, 0.30),
            spot("roof lining", -1.90, 0.0, 1.36, (1.0, 0.0, 0.0)),
            spot("rear parcel shelf", -3.00, 0.0, 1.00),
            spot("trunk floor", -3.40, 0.0, 0.40),
            spot("rear bumper", -3.75, 0.0, 0.45, (0.0, 1.0, 0.0)),
        ],
        "regions": [
            {"name": "floor plan at 0.45 m", "view": "top", "outline": box(-3.70, 0.60, -0.70, 0.70), "height_m": 0.45},
            {"name": "centre section", "view": "side", "outline": box(-3.80, 0.90, 0.22, 1.38), "lateral_m": 0.0},
        ],
        "radio": radio(433.92e6, -12.0),
    }


def hatchback():
    wb, fo, ro = 2.55, 0.85, 0.70
    xr = -(wb + ro)
    side = [
        [fo, 0.28], [fo, 0.62], [0.60, 0.78], [-0.40, 0.98], [-1.20, 1.46], [-2.70, 1.46],
        [xr + 0.05, 1.30], [xr, 0.42], [xr + 0.12, 0.28], [-2.90, 0.20], [0.55, 0.17],
    ]
    return {
        "format": FORMAT_TAG,
        "name": "Demo compact hatchback",
        "body_style": "hatchback",
        "description": "Invented five-door hatchback, 4.10 m long, 2.55 m wheelbase. Demo data only.",
        "body": {"top_outline": plan(fo, xr, 0.88, 0.20, 0.15), "side_outline": side},
        "zones": [
            {"name": "side windows", "view": "side", "material": "glass",
             "outline": [[-0.50, 1.02], [-1.25, 1.40], [-2.70, 1.40], [-3.05, 1.10]]},
            {"name": "tailgate window", "view": "side", "material": "glass", "outline": box(xr - 0.01, -3.10, 0.95, 1.36)},
            {"name": "front bumper fascia", "view": "side", "material": "plastic", "outline": box(0.55, 0.86, 0.25, 0.62)},
            {"name": "rear bumper fascia", "view": "side", "material": "plastic", "outline": box(xr - 0.01, -3.05, 0.25, 0.60)},
            {"name": "windscreen", "view": "top", "material": "glass", "outline": box(-1.20, -0.40, -0.78, 0.78), "z_min_m": 0.9},
            {"name": "tailgate glass", "view": "top", "material": "glass", "outline": box(xr - 0.01, -3.10, -0.75, 0.75), "z_min_m": 0.95, "z_max_m": 1.40},
            {"name": "front bumper", "view": "top", "material": "plastic", "outline": box(0.50, 0.87, -0.78, 0.78), "z_max_m": 0.66},
            {"name": "rear bumper", "view": "top", "material": "plastic", "outline": box(xr - 0.01, -3.05, -0.80, 0.80), "z_max_m": 0.62},
        ],
        "wheels": four_wheels(wb, 0.76, "195/65R15", 0.152),
        "spots": [
            spot("under dash centre", -0.80, 0.0, 0.72),
            spot("centre console", -1.25, 0.0, 0.55),
            spot("under driver seat", -1.55, 0.38, 0.30),
            spot("roof lining", -1.80, 0.0, 1.40, (1.0, 0.0, 0.0)),
            spot("parcel shelf", -2.95, 0.0, 0.95),
            spot("load floor", -2.95, 0.0, 0.45),
            spot("rear bumper", -3.20, 0.0, 0.42, (0.0, 1.0, 0.0)),
        ],
        "regions": [
            {"name": "floor plan at 0.45 m", "view": "top", "outline": box(-3.10, 0.50, -0.65, 0.65), "height_m": 0.45},
            {"name": "centre section", "view": "side", "outline": box(-3.20, 0.80, 0.22, 1.40), "lateral_m": 0.0},
        ],
        "radio": radio(315e6, -14.0, frame_interval_s=0.12),
    }


def suv():
    wb, fo, ro = 2.82, 0.92, 1.01
    xr = -(wb + ro)
    side = [
        [fo, 0.38], [fo, 0.80], [0.65, 0.98], [-0.40, 1.12], [-1.15, 1.66], [-3.40, 1.72],
        [xr + 0.05, 1.55], [xr, 0.50], [xr + 0.15, 0.36], [-3.40, 0.24], [0.55, 0.22],
    ]
    return {
        "format": FORMAT_TAG,
        "name": "Demo mid-size SUV",
        "body_style": "SUV",
        "description": "Invented five-seat SUV, 4.75 m long, 1.72 m high. Demo data only.",
        "body": {"top_outline": plan(fo, xr, 0.95, 0.20, 0.12), "side_outline": side, "wheelhouse_clearance_m": 0.05},
        "zones": [
            {"name": "side windows", "view": "side", "material": "glass",
             "outline": [[-0.50, 1.18], [-1.20, 1.60], [-3.45, 1.64], [-3.70, 1.20]]},
            {"name": "tailgate window", "view": "side", "material": "glass", "outline": box(xr - 0.01, -3.70, 1.15, 1.55)},
            {"name": "front bumper fascia", "view": "side", "material": "plastic", "outline": box(0.60, 0.93, 0.32, 0.78)},
            {"name": "rear bumper fascia", "view": "side", "material": "plastic", "outline": box(xr - 0.01, -3.55, 0.32, 0.75)},
            {"name": "windscreen", "view": "top", "material": "glass", "outline": box(-1.15, -0.40, -0.82, 0.82), "z_min_m": 1.05},
            {"name": "panoramic roof", "view": "top", "material": "glass", "outline": box(-2.60, -1.40, -0.55, 0.55), "z_min_m": 1.6},
            {"name": "tailgate glass", "view": "top", "material": "glass", "outline": box(xr - 0.01, -3.75, -0.78, 0.78), "z_min_m": 1.15, "z_max_m": 1.56},
            {"name": "front bumper", "view": "top", "material": "plastic", "outline": box(0.55, 0.93, -0.85, 0.85), "z_max_m": 0.82},
            {"name": "rear bumper", "view": "top", "material": "plastic", "outline": box(xr - 0.01, -3.55, -0.88, 0.88), "z_max_m": 0.78},
        ],
        "wheels": four_wheels(wb, 0.82, "235/60R18", 0.19),
        "spots": [
            spot("under dash centre", -0.80, 0.0, 0.85),
            spot("centre console", -1.30, 0.0, 0.70),
            spot("under driver seat", -1.70, 0.42, 0.42),
            spot("roof lining", -2.00, 0.0, 1.64, (1.0, 0.0, 0.0)),
            spot("cargo floor", -3.30, 0.0, 0.62),
            spot("tailgate trim", -3.75, 0.0, 1.10, (0.0, 1.0, 0.0)),
            spot("rear bumper", -3.70, 0.0, 0.55, (0.0, 1.0, 0.0)),
        ],
        "regions": [
            {"name": "floor plan at 0.55 m", "view": "top", "outline": box(-3.70, 0.55, -0.72, 0.72), "height_m": 0.55},
            {"name": "centre section", "view": "side", "outline": box(-3.80, 0.90, 0.28, 1.66), "lateral_m": 0.0},
        ],
        "radio": radio(433.92e6, -12.0),
    }


def pickup():
    wb, fo, ro = 4.25, 1.00, 1.45
    xr = -(wb + ro)
    cab_rear = -2.95
    side = [
        [fo, 0.45], [fo, 1.02], [0.70, 1.20], [-0.60, 1.30], [-1.25, 1.92], [-2.80, 1.96],
        [cab_rear, 1.90], [cab_rear, 1.40], [xr + 0.05, 1.40], [xr, 1.30], [xr, 0.55],
        [xr + 0.20, 0.45], [-5.20, 0.95], [cab_rear - 0.10, 0.95], [cab_rear, 0.36], [0.55, 0.30],
    ]
    return {
        "format": FORMAT_TAG,
        "name": "Demo crew-cab pickup, dual rear wheels",
        "body_style": "pickup",
        "description": "Invented heavy-duty crew-cab pickup with an open bed and dual rear wheels (six wheels), "
                       "6.70 m long, 4.25 m wheelbase. Demo data only.",
        "body": {
            "top_outline": plan(fo, xr, 1.01, 0.22, 0.08, flare=(-3.60, -5.05, 1.24)),
            "side_outline": side,
            "wheelhouse_clearance_m": 0.06,
            "floor_height_m": 0.62,
        },
        "zones": [
            {"name": "cab side windows", "view": "side", "material": "glass",
             "outline": [[-0.70, 1.38], [-1.30, 1.86], [-2.85, 1.88], [-2.85, 1.40]]},
            {"name": "rear cab window", "view": "side", "material": "glass", "outline": box(-2.97, -2.93, 1.45, 1.85)},
            {"name": "front bumper fascia", "view": "side", "material": "plastic", "outline": box(0.70, 1.01, 0.40, 0.75)},
            {"name": "windscreen", "view": "top", "material": "glass", "outline": box(-1.25, -0.60, -0.88, 0.88), "z_min_m": 1.25},
            {"name": "open bed", "view": "top", "material": "open", "outline": box(xr + 0.08, cab_rear - 0.05, -0.90, 0.90), "z_min_m": 1.3},
            {"name": "rear cab window", "view": "top", "material": "glass", "outline": box(-2.97, -2.93, -0.60, 0.60), "z_min_m": 1.45},
            {"name": "front bumper", "view": "top", "material": "plastic", "outline": box(0.65, 1.02, -0.90, 0.90), "z_max_m": 0.80},
        ],
        "wheels": [
            wheel("FL", 0.0, 0.87, "LT245/75R17", 0.165),
            wheel("FR", 0.0, -0.87, "LT245/75R17", 0.165),
            wheel("RLI", -wb, 0.82, "LT245/75R17", 0.165),
            wheel("RLO", -wb, 1.12, "LT245/75R17", 0.165),
            wheel("RRI", -wb, -0.82, "LT245/75R17", 0.165),
            wheel("RRO", -wb, -1.12, "LT245/75R17", 0.165),
        ],
        "spots": [
            spot("under dash centre", -0.95, 0.0, 1.05),
            spot("centre console", -1.45, 0.0, 0.90),
            spot("under rear seat", -2.55, 0.30, 0.70),
            spot("roof lining", -2.00, 0.0, 1.88, (1.0, 0.0, 0.0)),
            spot("back of cab", -2.90, 0.0, 1.20),
            spot("bed floor front", -3.20, 0.0, 1.00),
            spot("rear bumper", -5.60, 0.0, 0.70, (0.0, 1.0, 0.0)),
        ],
        "regions": [
            {"name": "cab floor at 0.75 m", "view": "top", "outline": box(-2.90, 0.60, -0.80, 0.80), "height_m": 0.75},
            {"name": "centre section", "view": "side", "outline": box(-5.65, 0.95, 0.40, 1.88), "lateral_m": 0.0},
        ],
        "radio": radio(315e6, -14.0),
    }


def van():
    wb, fo, ro = 3.66, 0.98, 1.26
    xr = -(wb + ro)
    side = [
        [fo, 0.40], [fo, 0.90], [0.70, 1.10], [0.10, 1.22], [-0.70, 1.95], [-1.20, 2.48],
        [xr + 0.05, 2.48], [xr, 2.40], [xr, 0.52], [xr + 0.15, 0.40], [-4.40, 0.30], [0.55, 0.26],
    ]
    return {
        "format": FORMAT_TAG,
        "name": "Demo cargo van",
        "body_style": "van",
        "description": "Invented high-roof panel van, 5.90 m long, 3.66 m wheelbase; windows only in the cab. "
                       "Demo data only.",
        "body": {"top_outline": plan(fo, xr, 1.02, 0.20, 0.06), "side_outline": side, "wheelhouse_clearance_m": 0.05},
        "zones": [
            {"name": "cab door windows", "view": "side", "material": "glass",
             "outline": [[0.05, 1.30], [-0.60, 1.95], [-1.25, 1.95], [-1.25, 1.30]]},
            {"name": "front bumper fascia", "view": "side", "material": "plastic", "outline": box(0.70, 0.99, 0.36, 0.85)},
            {"name": "windscreen", "view": "top", "material": "glass", "outline": box(-1.20, 0.10, -0.92, 0.92), "z_min_m": 1.2, "z_max_m": 2.45},
            {"name": "front bumper", "view": "top", "material": "plastic", "outline": box(0.65, 0.99, -0.95, 0.95), "z_max_m": 0.90},
        ],
        "wheels": four_wheels(wb, 0.86, "235/65R16", 0.165),
        "spots": [
            spot("under dash centre", -0.70, 0.0, 1.00),
            spot("cab floor", -1.20, 0.0, 0.45),
            spot("cab bulkhead", -1.80, 0.0, 1.30),
            spot("cargo roof front", -2.20, 0.0, 2.40, (1.0, 0.0, 0.0)),
            spot("cargo floor middle", -2.80, 0.0, 0.60),
            spot("cargo floor rear", -4.40, 0.0, 0.60),
            spot("rear step", -4.85, 0.0, 0.50, (0.0, 1.0, 0.0)),
        ],
        "regions": [
            {"name": "load floor at 0.6 m", "view": "top", "outline": box(-4.80, 0.55, -0.80, 0.80), "height_m": 0.6},
            {"name": "centre section", "view": "side", "outline": box(-4.85, 0.95, 0.35, 2.40), "lateral_m": 0.0},
        ],
        "radio": radio(433.92e6, -12.0, speed_max_mps=36.0),
    }


SAMPLES = {
    "hatchback.json": hatchback,
    "sedan.json": sedan,
    "suv.json": suv,
    "pickup_dual_rear.json": pickup,
    "cargo_van.json": van,
}


def main() -> None:
    OUT.mkdir(exist_ok=True)
    for name, make in SAMPLES.items():
        d = make()
        d["spots"] = d["spots"] + [dict(p) for p in PLATFORM_SPOTS]
        v = vehicle_from_dict(d)
        save_vehicle(v, OUT / name)
        print("wrote", OUT / name)


if __name__ == "__main__":
    main()

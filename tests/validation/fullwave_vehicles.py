"""A small body built in code for the full-wave tests (invented dimensions; passes check_vehicle).

A box 1.6 m long, 1.2 m wide, 0.2-0.9 m high, one glass window on each side, two 195/65R15 wheels
(one axle) in wheelhouses, 315 MHz, a dipole sensor and receiver: about 1,300 NEC-2 segments, a
few seconds per solve.
"""

from __future__ import annotations

from core.vehicle import Body, Radio, Receiver, Sensor, Spot, Vehicle, Wheel, Zone, check_vehicle


def small_box(freq_hz: float = 315e6) -> Vehicle:
    body = Body(
        top_outline=((-1.0, -0.6), (0.6, -0.6), (0.6, 0.6), (-1.0, 0.6)),
        side_outline=((-1.0, 0.2), (0.6, 0.2), (0.6, 0.9), (-1.0, 0.9)),
        wheelhouse_clearance_m=0.04,
    )
    zones = (Zone(name="side windows", view="side", material="glass",
                  outline=((-0.9, 0.6), (-0.45, 0.6), (-0.45, 0.85), (-0.9, 0.85))),)
    wheels = (Wheel(id="L", x_m=0.0, y_m=0.5, tire="195/65R15", rim_width_m=0.165),
              Wheel(id="R", x_m=0.0, y_m=-0.5, tire="195/65R15", rim_width_m=0.165))
    spots = (Spot(name="centre", x_m=-0.6, y_m=0.0, z_m=0.5),
             Spot(name="by the window", x_m=-0.7, y_m=0.35, z_m=0.7),
             Spot(name="front", x_m=0.45, y_m=0.1, z_m=0.4))
    radio = Radio(frequency_hz=freq_hz, sensor=Sensor(eirp_dbm=-14.0, pattern="dipole", axis="radial"),
                  receiver=Receiver(gain_dbi=-3.0, pattern="dipole", axis=(0.0, 0.0, 1.0)),
                  angles_per_turn=36, ground_reflection=False)
    v = Vehicle(name="small box", body_style="test", body=body, zones=zones, wheels=wheels, spots=spots, radio=radio)
    check_vehicle(v)
    return v

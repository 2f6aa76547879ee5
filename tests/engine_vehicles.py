"""Small vehicles built in code for the engine tests (tests/test_engine_*.py).

Every vehicle here passes ``check_vehicle``; the dimensions are invented.
"""

from __future__ import annotations

from pathlib import Path

from core.vehicle import Body, Radio, Receiver, Sensor, Spot, Vehicle, Wheel, Zone, check_vehicle, load_vehicle

REPO = Path(__file__).resolve().parents[1]
SEDAN_PATH = REPO / "sample_vehicles" / "sedan.json"


def sedan(**radio_updates) -> Vehicle:
    """The sample sedan, with optional changes to its radio setup."""
    v = load_vehicle(SEDAN_PATH)
    if radio_updates:
        v = v.model_copy(update={"radio": v.radio.model_copy(update=radio_updates)})
    return v


def open_space_vehicle(
    sensor_pattern: str = "dipole",
    sensor_axis: str = "radial",
    receiver_pattern: str = "dipole",
    receiver_axis=(0.0, 0.0, 1.0),
    ground: bool = False,
    angles: int = 72,
    null_floor_db: float = -30.0,
) -> Vehicle:
    """One 225/50R17 wheel at the origin (centre plane y = 0) and a 10 cm body 1.9-2.0 m up.

    ``null_floor_db``: the radio's null floor (core.links.link_field); the two-ray checks far
    beyond the crossover distance set it deep, where the rays cancel by more than the default 30 dB.

    The body only satisfies the file rules (a wheel must sit under its outline); paths from the
    sensor to spots below 1.9 m, and their road reflections, never reach it.
    """
    body = Body(
        top_outline=((-0.05, -0.05), (0.05, -0.05), (0.05, 0.05), (-0.05, 0.05)),
        side_outline=((-0.05, 1.9), (0.05, 1.9), (0.05, 2.0), (-0.05, 2.0)),
    )
    wheel = Wheel(id="W", x_m=0.0, y_m=0.0, tire="225/50R17", rim_width_m=0.19)
    radio = Radio(
        sensor=Sensor(eirp_dbm=-10.0, pattern=sensor_pattern, axis=sensor_axis),
        receiver=Receiver(gain_dbi=0.0, pattern=receiver_pattern, axis=tuple(receiver_axis)),
        angles_per_turn=angles,
        ground_reflection=ground,
        null_floor_db=null_floor_db,
    )
    v = Vehicle(name="open space", body_style="test", body=body, wheels=(wheel,), radio=radio)
    check_vehicle(v)
    return v


#: the box cabin of :func:`box_cabin`: x -1..1, y -0.8..0.8, z 0.2..1.4 m
BOX_HALF_WIDTH_M = 0.8


def box_cabin(window_material: str | None) -> Vehicle:
    """A closed box cabin with one wheel beside its left side (centre y = 1.0 m, clear of the box).

    ``window_material`` gives the left side's window panel (side-view zone x -0.6..0.6 m, z 0.45..1.3
    m); None leaves the whole box in the default panel material (metal).
    """
    body = Body(
        top_outline=((-1.0, -BOX_HALF_WIDTH_M), (1.0, -BOX_HALF_WIDTH_M), (1.0, BOX_HALF_WIDTH_M),
                     (-1.0, BOX_HALF_WIDTH_M)),
        side_outline=((-1.0, 0.2), (1.0, 0.2), (1.0, 1.4), (-1.0, 1.4)),
    )
    zones = ()
    if window_material is not None:
        zones = (
            Zone(
                name="left window",
                view="side",
                material=window_material,
                outline=((-0.6, 0.45), (0.6, 0.45), (0.6, 1.3), (-0.6, 1.3)),
            ),
        )
    wheel = Wheel(id="W", x_m=0.0, y_m=1.0, tire="225/50R17", rim_width_m=0.19)
    v = Vehicle(name="box cabin", body_style="test", body=body, zones=zones, wheels=(wheel,))
    check_vehicle(v)
    return v


def calibration_box(wheel_model: str = "installed_pattern") -> Vehicle:
    """A closed box (x -1..1, y -0.8..0.8, z 0.2..1.4 m) with a wheel beside each side (clear of the box) and
    receiver spots that separate the fitted parameters: behind a glass window (side-view zone x -0.7..-0.05 m),
    behind a plastic panel (x 0.05..0.7 m), 3 cm from each metal end wall with the antenna along the wall
    (there the cabin's diffuse field, fed through the glass and plastic, is weak: the tangential field
    vanishes on a conducting wall, core.cavity.wall_factor; so the straight path through the metal counts),
    and four outside the box (free-space references for the sensor's EIRP). The calibration tests
    (tests/test_calibration.py) make measurements of it."""
    body = Body(top_outline=((-1.0, -0.8), (1.0, -0.8), (1.0, 0.8), (-1.0, 0.8)),
                side_outline=((-1.0, 0.2), (1.0, 0.2), (1.0, 1.4), (-1.0, 1.4)))
    zones = (Zone(name="window", view="side", material="glass",
                  outline=((-0.7, 0.6), (-0.05, 0.6), (-0.05, 1.3), (-0.7, 1.3))),
             Zone(name="panel", view="side", material="plastic",
                  outline=((0.05, 0.6), (0.7, 0.6), (0.7, 1.3), (0.05, 1.3))))
    wheels = (Wheel(id="L", x_m=0.0, y_m=1.0, tire="225/50R17", rim_width_m=0.19),
              Wheel(id="R", x_m=0.0, y_m=-1.0, tire="225/50R17", rim_width_m=0.19))
    spots = (Spot(name="behind glass", x_m=-0.4, y_m=0.0, z_m=1.0), Spot(name="behind plastic", x_m=0.4, y_m=0.0, z_m=1.0),
             Spot(name="metal wall front", x_m=0.97, y_m=0.0, z_m=0.4, axis=(0.0, 0.0, 1.0)),
             Spot(name="metal wall rear", x_m=-0.97, y_m=0.0, z_m=0.4, axis=(0.0, 0.0, 1.0)),
             Spot(name="outside left", x_m=0.0, y_m=2.2, z_m=0.6), Spot(name="outside right", x_m=0.0, y_m=-2.2, z_m=0.6),
             Spot(name="outside front", x_m=2.0, y_m=0.0, z_m=0.5), Spot(name="outside rear", x_m=-2.0, y_m=0.0, z_m=0.5))
    radio = Radio(sensor=Sensor(eirp_dbm=-10.0), receiver=Receiver(gain_dbi=0.0), wheel_model=wheel_model)
    v = Vehicle(name="calibration box", body_style="test", body=body, zones=zones, wheels=wheels, spots=spots,
                radio=radio)
    check_vehicle(v)
    return v

"""Rim barrel over a wheel turn: NEC-2 against the engine's rim knife-edge model and against the
installed-pattern method.

Model (core/fullwave/nec_checks.rim_barrel): a wire-grid 17 in (0.432 m) open cylinder, 0.2 m wide, at
315 MHz; a short radial dipole 20 mm above its surface at mid-width; the receiver 1.16 m away on the
inboard side at (0.5, -1.0, 0.3) m from the wheel centre; 36 sensor angles. Levels are for the same
radiated power as the bare dipole, relative to its peak field at the receiver's distance.

Targets of the full-wave check: worst case within 4 dB, angle of the worst case within 20 deg;
report the correlation. The knife-edge rim model misses them (known disagreement, strict xfail):
NEC-2 shows the barrel, under half a wavelength across, re-radiating rather than shadowing, and
the level over the turn is anti-correlated with the knife-edge prediction. The installed-pattern
method (core.wheel_patterns) meets them.
"""

import numpy as np
import pytest

pytest.importorskip("PyNEC", exc_type=ImportError)  # absent or broken install: skip

from core.fullwave import nec_checks

pytestmark = pytest.mark.nec

RECEIVER = (0.5, -1.0, 0.3)


@pytest.fixture(scope="module")
def run():
    return nec_checks.rim_barrel(315e6, RECEIVER, n_angles=36)


def _report(r, name):
    m = r[name]
    return (f"{name}: correlation {m['correlation']:.2f}, worst case {m['model_worst_db']:.1f} dB at "
            f"{m['model_worst_deg']:.0f} deg vs NEC-2 {m['nec_worst_db']:.1f} dB at {m['nec_worst_deg']:.0f} deg, "
            f"max |diff| {m['max_abs_diff_db']:.1f} dB")


def test_barrel_mesh_is_converged():
    # Mesh check (common practice: refine until the answer stops moving): the graded mesh used
    # here (15 mm cells next to the sensor) against a uniform lambda/40 mesh, over the turn.
    graded = nec_checks.rim_barrel(315e6, RECEIVER, n_angles=12)
    fine = nec_checks.rim_barrel(315e6, RECEIVER, n_angles=12, mesh="uniform")
    assert np.max(np.abs(graded["nec_db"] - fine["nec_db"])) <= 1.5


def test_radial_dipole_on_the_barrel_radiates_more_than_alone(run):
    # Image principle (Balanis, Antenna Theory, sec. 4.7): a dipole normal to a conducting surface
    # and close to it radiates about twice the power for the same current (image in phase); a
    # finite barrel gives somewhat more or less, but clearly above 1.
    assert 1.5 < run["power_ratio"] < 4.0


@pytest.mark.xfail(strict=True, reason="known disagreement: the rim knife-edge model does not reproduce NEC-2 "
                                       "(docs/VALIDATION.md); use the installed wheel patterns")
def test_knife_edge_rim_model_meets_the_targets(run):
    m = run["engine"]
    assert abs(m["worst_case_diff_db"]) <= 4.0, _report(run, "engine")
    assert abs(m["worst_angle_diff_deg"]) <= 20.0, _report(run, "engine")
    assert m["correlation"] >= 0.5, _report(run, "engine")


def test_nec_worst_case_is_with_the_sensor_facing_the_receiver(run):
    # What NEC-2 shows (design brief sec. 5: the rim re-radiates rather than shadowing): the lowest
    # level comes with the sensor on the receiver's side of the barrel, where the barrel's
    # re-radiation cancels the direct field, not with the sensor behind it. The receiver's angle in
    # the wheel plane is atan2(x, z).
    facing = np.degrees(np.arctan2(RECEIVER[0], RECEIVER[2]))
    off = (run["engine"]["nec_worst_deg"] - facing + 180.0) % 360.0 - 180.0
    assert abs(off) <= 20.0, _report(run, "engine")


def test_installed_pattern_method_meets_the_targets(run):
    # Far-field table + near-field term (core.wheel_patterns.field_vectors) of the same barrel.
    m = run["table"]
    assert abs(m["worst_case_diff_db"]) <= 1.5, _report(run, "table")
    assert abs(m["worst_angle_diff_deg"]) <= 20.0, _report(run, "table")
    assert m["correlation"] >= 0.95, _report(run, "table")
    assert m["max_abs_diff_db"] <= 1.5, _report(run, "table")

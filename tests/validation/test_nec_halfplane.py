"""Half-plane edge: a short dipole in front of a large wire-grid plate (NEC-2), receivers moving
from the lit region into the shadow behind the straight edge, against the UTD half-plane and the
engine's knife edge (ITU-R P.526).

Geometry (core/fullwave/nec_checks.halfplane): plate 3.6 m along the edge x 4.5 m deep, lambda/10 grid at
315 MHz, equal-area wire radius; source 1 m in front of the plate and 0.6 m below the edge,
receivers 1 m behind it at heights giving v = -0.5 ... 2.5 in steps of 0.25. The paths bend by up
to about 90 deg at these distances (the knife edge's paraxial assumption is stretched, as it is on a
vehicle). Polarization: "hard" = E perpendicular to the edge (dipole in the plane normal to it),
"soft" = E parallel to the edge. The engine's scalar knife edge (Fresnel-Kirchhoff, i.e. the
polarization average) is checked against the hard case, the one it follows closely up to v = 1.25
and which it never under-estimates (so the engine's loss stays on the safe side); the soft case is
reported and shows the larger disagreement (docs/VALIDATION.md).
"""

import numpy as np
import pytest

pytest.importorskip("PyNEC", exc_type=ImportError)  # absent or broken install: skip

from core.fullwave import nec_checks

pytestmark = pytest.mark.nec


@pytest.fixture(scope="module")
def run():
    return nec_checks.halfplane(315e6, width_m=3.6, depth_m=4.5)


def _report(r):
    rows = ["   v    J(v)  NEC hard  UTD hard  NEC soft  UTD soft"]
    for i in range(len(r["v"])):
        rows.append(f"{r['v'][i]:5.2f} {r['knife_edge_db'][i]:6.1f} {r['nec_hard_db'][i]:8.1f} "
                    f"{r['utd_hard_db'][i]:9.1f} {r['nec_soft_db'][i]:9.1f} {r['utd_soft_db'][i]:9.1f}")
    return "\n".join(rows)


def test_receivers_span_the_requested_v_range(run):
    # ITU-R P.526-15 eq. (26) via core.propagation.knife_edge_v on the geometry of the path.
    assert run["v"].min() == pytest.approx(-0.5, abs=0.02)
    assert run["v"].max() == pytest.approx(2.5, abs=0.02)


def test_nec_plate_behaves_as_a_conducting_half_plane(run):
    # Reference: uniform GTD half-plane coefficients (Kouyoumjian & Pathak, Proc. IEEE 62(11), 1974)
    # with the short dipole's incident field. The finite plate's other edges and the mesh leave
    # ripples; E perpendicular to the edge agrees over the whole range, E parallel to the edge
    # until the field behind the plate falls some 20 dB below free space, where the plate's far
    # edges and the grid's leakage take over (deep soft shadow, reported only).
    hard = np.abs(run["nec_hard_db"] - run["utd_hard_db"])
    assert np.max(hard) <= 1.5, _report(run)
    lit = run["v"] <= 0.75
    soft = np.abs(run["nec_soft_db"] - run["utd_soft_db"])[lit]
    assert np.max(soft) <= 2.0, _report(run)


def test_knife_edge_matches_nec_for_e_perpendicular_to_the_edge(run):
    # Target of the full-wave check: knife edge (ITU-R P.526-15 eq. 31, core.propagation) within
    # 3 dB of NEC-2. Met for v <= 1.25. Known disagreement beyond (kept in the suite): from
    # v = 1.5 to 2.5 the knife edge over-estimates the loss by 3-4.5 dB (the exact half-plane
    # itself is 2-5 dB above J(v) there: large diffraction angles); asserted as bounded and on the
    # conservative side.
    diff = run["knife_edge_db"] - run["nec_hard_db"]
    near = run["v"] <= 1.25
    assert np.max(np.abs(diff[near])) <= 3.0, _report(run)
    deep = ~near
    assert np.all(diff[deep] > 0.0), _report(run)
    assert np.max(diff[deep]) <= 5.0, _report(run)


def test_e_parallel_to_the_edge_is_shadowed_more_than_e_perpendicular(run):
    # Sommerfeld's half-plane solution: with E parallel to a conducting edge the field vanishes on
    # the plate and the shadow is deeper; with E perpendicular it bends further into the shadow
    # (design brief sec. 5). NEC-2 must show it by several dB once in the shadow.
    shadow = (run["v"] >= 0.5) & (run["v"] <= 1.5)
    assert np.all(run["nec_soft_db"][shadow] >= run["nec_hard_db"][shadow] + 3.0), _report(run)

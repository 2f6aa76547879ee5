"""Wire-grid NEC-2 models for the full-wave checks and the installed wheel patterns.

The structures (a flat plate with a straight edge, a rim barrel with an outboard hub-and-spoke face
and flanges, a steel-belt cylinder at the tread radius) are built as wire grids and solved with
NEC-2 (method of moments) through the PyNEC package. PyNEC is imported inside the functions that
run the solver, so this module imports with numpy alone (the geometry builders and the analytic
dipole field work without PyNEC).

Source
------
The sensor is an elementary current source (NEC-2 ``EX`` type 4: an infinitesimal current element,
the ideal short dipole) of moment ``moment_am`` (A m). NEC-2 puts its field on the structure as the
exciting field but leaves it out of the near-field (``NE``) and radiation-pattern (``RP``) output,
which hold the field scattered by the structure only. The total field is therefore the analytic
field of the element (:func:`dipole_field`, exact near and far field) plus NEC-2's scattered field;
:class:`NecSolver` does that sum. One matrix factorisation serves every source position and axis.
With no wires at all (free space) the scattered field is zero and NEC-2 is not called.

Wire-grid rules used (and checked by :func:`check_model`)
---------------------------------------------------------
- Segment length at most lambda/10 (NEC-2 user's guide: segments "less than about 0.1 lambda";
  Burke & Poggio 1981, part III). The grid spacing ``spacing_m`` is the largest segment length;
  :func:`grid_spacing_m` gives lambda/10 by default, the wheel models use a finer lambda/20 near
  the sensor so that the 20 mm gap between sensor and rim is not small against the mesh.
- Wire radius by the equal-area rule: the surface area of the grid wires running in one direction
  equals the area of the surface they model, i.e. 2 pi a = Delta, a = Delta / (2 pi), with Delta
  the grid spacing (wire circumference = grid spacing). Source: A. C. Ludwig, "Wire grid modeling
  of surfaces", IEEE Trans. Antennas Propag. AP-35(9), 1987 (from memory), discussed and given a
  physical interpretation by A. Rubinstein, M. Rubinstein, F. Rachidi, "A physical interpretation
  of the equal area rule", IEEE Trans. Electromagn. Compat. 48(2), 2006.
- Junction checks after C. W. Trueman and S. J. Kubina, "Verifying wire-grid model integrity with
  program CHECK", ACES Journal 5(2), 1990: segment length / radius >= 2, length ratio of
  segments meeting at a junction <= 5, radius ratio <= 10 (here 2*pi = 6.3 on the grid wires).
- PyNEC (necpp) only joins wires at their end points: every grid edge is its own wire, so grid
  lines never cross at an interior segment end.
- Spokes are flat strips of width w modelled by one wire of radius w/4 (the equivalent radius of a
  thin flat strip; King, from memory).

Fields
------
Time factor exp(+j omega t) (as in NEC-2). Far fields are r E exp(+j k r) in volts (phase referred
to the origin), split into theta and phi components of the usual spherical system (theta from +z,
phi from +x toward +y). Near fields are complex peak phasors in V/m.

References
----------
- G. J. Burke, A. J. Poggio, "Numerical Electromagnetics Code (NEC) - Method of Moments", Lawrence
  Livermore National Laboratory, 1981 (NEC-2 user's guide, parts I-III): EX card type 4, wire
  modelling guidelines.
- A. C. Ludwig, IEEE Trans. AP-35(9), 1987; Rubinstein et al., IEEE Trans. EMC 48(2), 2006 (equal
  area rule).
- C. A. Balanis, Antenna Theory: Analysis and Design, sec. 4.2 (infinitesimal dipole fields).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from core.wheel import DROP_CENTRE_DEPTH_M

__all__ = [
    "C0_M_PER_S",
    "ETA0_OHM",
    "NecSolver",
    "WheelSpec",
    "Wire",
    "WireModel",
    "check_model",
    "cylinder",
    "dipole_far_field",
    "dipole_field",
    "equal_area_radius_m",
    "fit_radii",
    "grid_spacing_m",
    "installed_pattern",
    "pattern_with_near",
    "plate",
    "rim",
    "sphere_grid",
    "sphere_integral",
    "steel_belt",
    "to_spherical",
    "wheel",
    "wheel_mesh_spacing_m",
    "wheel_patterns",
    "wire_dipole",
]

#: Speed of light in vacuum, m/s (SI definition).
C0_M_PER_S = 299_792_458.0
#: Impedance of free space, ohm (CODATA 2018).
ETA0_OHM = 376.730313412

INCH_M = 0.0254


# --------------------------------------------------------------------------------------------
# Geometry
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Wire:
    """One straight NEC-2 wire: end points in m, number of segments, radius in m, and an optional
    distributed series resistance in ohm/m (NEC-2 LD type 2; 0: perfectly conducting)."""

    start: tuple[float, float, float]
    end: tuple[float, float, float]
    segments: int
    radius_m: float
    load_ohm_per_m: float = 0.0

    @property
    def length_m(self) -> float:
        return float(np.linalg.norm(np.subtract(self.end, self.start)))


@dataclass
class WireModel:
    """A list of wires plus a free-text description (for provenance)."""

    wires: list[Wire] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)

    def __add__(self, other: WireModel) -> WireModel:
        return WireModel(self.wires + other.wires, self.notes + other.notes)

    @property
    def segment_count(self) -> int:
        return int(sum(w.segments for w in self.wires))

    @property
    def max_segment_m(self) -> float:
        return max((w.length_m / w.segments for w in self.wires), default=0.0)

    def transformed(self, rotation: np.ndarray | None = None, mirror_y: bool = False) -> WireModel:
        """A copy rotated by the 3x3 matrix ``rotation`` (about the origin), optionally mirrored y -> -y."""
        m = np.eye(3) if rotation is None else np.asarray(rotation, dtype=float)
        if mirror_y:
            m = np.diag([1.0, -1.0, 1.0]) @ m
        out = []
        for w in self.wires:
            a = tuple(float(x) for x in m @ np.asarray(w.start))
            b = tuple(float(x) for x in m @ np.asarray(w.end))
            out.append(Wire(a, b, w.segments, w.radius_m, w.load_ohm_per_m))
        return WireModel(out, list(self.notes))


def grid_spacing_m(freq_hz: float, fraction: float = 0.1) -> float:
    """Grid spacing (largest segment length) ``fraction`` x lambda, in m (default lambda/10)."""
    return fraction * C0_M_PER_S / float(freq_hz)


def equal_area_radius_m(spacing_m: float) -> float:
    """Equal-area-rule wire radius a = Delta / (2 pi), in m (Ludwig 1987; see the module docstring)."""
    return float(spacing_m) / (2.0 * math.pi)


def _nseg(length_m: float, max_seg_m: float) -> int:
    return max(1, math.ceil(length_m / max_seg_m - 1e-9))


def _add(model: WireModel, a, b, max_seg_m: float, radius_m: float) -> None:
    a = tuple(float(x) for x in a)
    b = tuple(float(x) for x in b)
    length = float(np.linalg.norm(np.subtract(b, a)))
    if length <= 0.0:
        return
    # at most max_seg_m per segment, but never below the thin-wire limit segment/radius = 2: a
    # thick wire gets fewer, longer segments; a short single-segment wire gets its radius capped
    n = max(1, min(_nseg(length, max_seg_m), int(length / (2.05 * radius_m))))
    model.wires.append(Wire(a, b, n, min(radius_m, length / n / 2.05)))


def check_model(model: WireModel, max_segment_m: float | None = None) -> list[str]:
    """Return a list of wire-grid rule violations (empty when the model follows the rules).

    Checks: every segment <= ``max_segment_m`` (x 1.0001); segment length / radius >= 2; at every
    junction the longest / shortest segment <= 5 and the largest / smallest radius <= 10
    (Trueman & Kubina 1990, see the module docstring).
    """
    problems: list[str] = []
    ends: dict[tuple, list[tuple[float, float]]] = {}
    for i, w in enumerate(model.wires):
        seg = w.length_m / w.segments
        if max_segment_m is not None and seg > max_segment_m * 1.0001:
            problems.append(f"wire {i}: segment {seg:.4f} m > {max_segment_m:.4f} m")
        if seg / w.radius_m < 2.0:
            problems.append(f"wire {i}: segment/radius {seg / w.radius_m:.2f} < 2")
        for p in (w.start, w.end):
            key = tuple(round(x, 6) for x in p)
            ends.setdefault(key, []).append((seg, w.radius_m))
    # necpp refuses a wire whose first or last segment midpoint lies inside an earlier wire; the
    # candidates are found with a k-d tree of the wire centres (scipy), so large grids check quickly
    if model.wires:
        rad = np.array([w.radius_m for w in model.wires])
        flagged = set()
        for i, cand, dist in _end_midpoint_neighbours(model, earlier_only=True):
            if i in flagged:
                continue
            hit = cand[dist < rad[cand]]
            if hit.size:
                flagged.add(i)
                problems.append(f"wire {i}: end-segment midpoint inside wire {int(hit.min())}")
    for key, items in ends.items():
        if len(items) < 2:
            continue
        segs = [s for s, _ in items]
        rads = [r for _, r in items]
        if max(segs) / min(segs) > 5.0:
            problems.append(f"junction {key}: segment length ratio {max(segs) / min(segs):.1f} > 5")
        if max(rads) / min(rads) > 10.0:
            problems.append(f"junction {key}: radius ratio {max(rads) / min(rads):.1f} > 10")
    return problems


def _end_midpoint_neighbours(model: WireModel, earlier_only: bool):
    """For each end-segment midpoint of each wire (first ends, then last ends): (its wire i, the other
    wires near it (earlier ones only when ``earlier_only``), its distance to each of their axes, m).
    Candidates come from a k-d tree of the wire centres (scipy), so large grids check quickly."""
    from scipy.spatial import cKDTree

    a = np.array([w.start for w in model.wires])
    b = np.array([w.end for w in model.wires])
    rad = np.array([w.radius_m for w in model.wires])
    nseg = np.array([w.segments for w in model.wires])
    ab = b - a
    ab2 = np.maximum(np.sum(ab * ab, axis=1), 1e-30)
    step = ab / nseg[:, None]
    mids = np.concatenate([a + 0.5 * step, b - 0.5 * step])  # (2N, 3)
    owner = np.concatenate([np.arange(len(a)), np.arange(len(a))])
    reach = 0.5 * float(np.sqrt(ab2.max())) + float(rad.max())
    tree = cKDTree(0.5 * (a + b))
    for q, cand in enumerate(tree.query_ball_point(mids, reach)):
        i = int(owner[q])
        cand = np.asarray([c for c in cand if (c < i if earlier_only else c != i)], dtype=int)
        if not cand.size:
            continue
        t = np.clip(np.sum((mids[q] - a[cand]) * ab[cand], axis=1) / ab2[cand], 0.0, 1.0)
        yield i, cand, np.linalg.norm(a[cand] + t[:, None] * ab[cand] - mids[q], axis=1)


def fit_radii(model: WireModel, margin: float = 0.9) -> WireModel:
    """A copy whose wire radii are capped so that no end-segment midpoint lies inside another wire.

    necpp refuses such a model (see :func:`check_model`); where two wires meet at an acute angle (a
    chamfered corner of a body grid) the equal-area radius of one of them is reduced to ``margin``
    times the distance to the nearest foreign end-segment midpoint. Other radii are unchanged.
    """
    if not model.wires:
        return model
    new = np.array([w.radius_m for w in model.wires])
    for _i, cand, dist in _end_midpoint_neighbours(model, earlier_only=False):
        hit = dist < new[cand]
        new[cand[hit]] = np.minimum(new[cand[hit]], margin * dist[hit])
    wires = [w if new[i] == w.radius_m else Wire(w.start, w.end, w.segments, float(new[i]), w.load_ohm_per_m)
             for i, w in enumerate(model.wires)]
    return WireModel(wires, list(model.notes))


def plate(width_m: float, depth_m: float, spacing_m: float, *, symmetric_half: bool = False) -> WireModel:
    """Flat rectangular wire-grid plate in the plane x = 0 with its straight edge along y at z = 0.

    The plate covers y in [-width/2, width/2] and z in [-depth, 0]; its top edge (z = 0) is the
    straight edge under test. Grid lines parallel to z sit at y = +-spacing/2, +-3 spacing/2, ...
    (none in the plane y = 0), so the model can be solved as half a structure mirrored in y = 0
    (``symmetric_half=True`` returns only the y >= 0 half, to be used with ``NecSolver(...,
    mirror_y_plane=True)``). Wire radius by the equal-area rule.

    Parameters
    ----------
    width_m : plate extent along the edge (y), m.
    depth_m : plate extent away from the edge (-z), m.
    spacing_m : grid spacing, m (<= lambda/10).
    """
    n_half = max(1, round(width_m / spacing_m / 2.0))
    ny = max(1, math.ceil(depth_m / spacing_m - 1e-9))
    dz = depth_m / ny
    a = equal_area_radius_m(spacing_m)
    y_lines = (np.arange(n_half) + 0.5) * spacing_m
    if not symmetric_half:
        y_lines = np.concatenate([-y_lines[::-1], y_lines])
    zs = -np.arange(ny + 1) * dz
    m = WireModel(notes=[f"plate {2 * n_half * spacing_m:.3f} x {depth_m:.3f} m, grid {spacing_m:.4f} m, a={a:.4f} m"])
    for y in y_lines:
        for i in range(ny):
            _add(m, (0.0, y, zs[i]), (0.0, y, zs[i + 1]), spacing_m, a)
    y_cross = np.concatenate([[0.0], y_lines]) if symmetric_half else y_lines
    for z in zs:
        for j in range(len(y_cross) - 1):
            _add(m, (0.0, y_cross[j], z), (0.0, y_cross[j + 1], z), spacing_m, a)
    return m


def _ring_point(radius_m: float, y_m: float, phi_rad: float) -> tuple[float, float, float]:
    # Wheel frame: angle phi from +Z toward +X (the wheel-angle convention), axis along Y.
    return (radius_m * math.sin(phi_rad), y_m, radius_m * math.cos(phi_rad))


def _n_around(radius_m: float, spacing_m: float, multiple: int = 1) -> int:
    """Smallest node count around a circle with chords <= spacing, rounded up to ``multiple``."""
    n = max(3, math.ceil(math.pi / math.asin(min(1.0, spacing_m / (2.0 * radius_m))) - 1e-9))
    return int(math.ceil(n / multiple) * multiple)


def graded_angles(
    radius_m: float,
    fine_m: float,
    coarse_m: float,
    *,
    fine_halfwidth_m: float = 0.0,
    growth: float = 0.5,
    anchors_rad=(),
) -> np.ndarray:
    """Node angles around a circle (rad, from +Z toward +X, in [-pi, pi)), fine near angle 0.

    The local node spacing (arc length, m) is ``fine_m`` within +-``fine_halfwidth_m`` of angle 0
    and grows linearly (``growth`` m of spacing per m of arc) up to ``coarse_m``. Every angle in
    ``anchors_rad`` (e.g. the spoke roots) is a node. Without refinement (fine = coarse) the nodes
    are uniform. Adjacent spacings differ by far less than the 5:1 junction limit.
    """
    coarse_m = max(coarse_m, fine_m)

    def spacing(arc):
        return np.minimum(coarse_m, fine_m + growth * np.maximum(0.0, np.abs(arc) - fine_halfwidth_m))

    anchors = sorted({float(np.mod(a + math.pi, 2.0 * math.pi) - math.pi) for a in anchors_rad})
    if not anchors:
        anchors = [-math.pi]
    nodes: list[float] = []
    for i, a in enumerate(anchors):
        b = anchors[i + 1] if i + 1 < len(anchors) else anchors[0] + 2.0 * math.pi
        phi = np.linspace(a, b, 2001)
        arc = radius_m * (np.mod(phi + math.pi, 2.0 * math.pi) - math.pi)
        dens = radius_m / spacing(arc)
        cum = np.concatenate([[0.0], np.cumsum(0.5 * (dens[1:] + dens[:-1]) * np.diff(phi))])
        n = max(1, math.ceil(cum[-1] - 1e-9))
        # chord <= arc: taking n = ceil(integral) keeps every chord within the local spacing
        nodes.extend(np.interp(np.arange(n) * cum[-1] / n, cum, phi)[: n])
    out = np.mod(np.asarray(nodes) + math.pi, 2.0 * math.pi) - math.pi
    return np.sort(out)


def cylinder(
    radius_m: float,
    y0_m: float,
    y1_m: float,
    spacing_m: float,
    *,
    n_around: int | None = None,
    phi0_rad: float = 0.0,
    phis_rad=None,
    ys_m=None,
) -> tuple[WireModel, int]:
    """Open wire-grid cylinder about the Y axis from y0 to y1 (rings + axial lines).

    Node angles ``phis_rad`` (from +Z toward +X) and ring positions ``ys_m`` may be given (graded
    mesh); by default they are uniform with chords and axial edges <= ``spacing_m`` (``n_around``
    nodes starting at ``phi0_rad``). Wire radii follow the equal-area rule with the local spacing:
    a ring wire gets (mean distance to the neighbouring rings) / (2 pi), an axial wire (mean arc to
    the neighbouring axial lines) / (2 pi). Returns the model and the node count around.
    """
    if phis_rad is None:
        n = n_around or _n_around(radius_m, spacing_m)
        phis = phi0_rad + 2.0 * math.pi * np.arange(n) / n
    else:
        phis = np.asarray(phis_rad, dtype=float)
        n = len(phis)
    ys = np.linspace(y0_m, y1_m, _nseg(abs(y1_m - y0_m), spacing_m) + 1) if ys_m is None else np.asarray(ys_m)
    gap_y = np.diff(ys)
    ring_sp = np.empty(len(ys))
    ring_sp[0], ring_sp[-1] = gap_y[0], gap_y[-1]
    ring_sp[1:-1] = 0.5 * (gap_y[1:] + gap_y[:-1])
    arcs = radius_m * np.mod(np.diff(np.concatenate([phis, [phis[0] + 2.0 * math.pi]])), 2.0 * math.pi)
    line_sp = 0.5 * (arcs + np.roll(arcs, 1))
    m = WireModel()
    for j, y in enumerate(ys):
        a = equal_area_radius_m(ring_sp[j])
        for i in range(n):
            p, q = _ring_point(radius_m, y, phis[i]), _ring_point(radius_m, y, phis[(i + 1) % n])
            _add(m, p, q, spacing_m, a)
    for i in range(n):
        a = equal_area_radius_m(line_sp[i])
        for j in range(len(ys) - 1):
            _add(m, _ring_point(radius_m, ys[j], phis[i]), _ring_point(radius_m, ys[j + 1], phis[i]), spacing_m, a)
    return m, n


def rim(
    diameter_m: float,
    width_m: float,
    spacing_m: float,
    *,
    well_depth_m: float = 0.0,
    flange_height_m: float = 0.0,
    n_spokes: int = 5,
    hub_radius_m: float = 0.08,
    spoke_width_m: float = 0.04,
    face: bool = True,
    refine_m: float | None = None,
    refine_halfwidth_m: float = 0.03,
    axial_spacing_m: float | None = None,
) -> WireModel:
    """Wire-grid rim: barrel cylinder, optional flanges, optional outboard face (hub + spokes).

    Wheel frame (m): axis along Y (outboard = +Y), centre at the origin, angles from +Z toward +X;
    the sensor is expected near the top (angle 0). The barrel (the drop well) has radius
    ``diameter/2 - well_depth`` and spans y in [-width/2, width/2]. With ``flange_height > 0`` each
    end carries a flange: radial wires from the barrel up to ``diameter/2 + flange_height`` and a
    ring there. The outboard face at y = +width/2 is a hub ring of radius ``hub_radius`` with
    radial wires to the centre and ``n_spokes`` spokes out to the barrel; spokes sit at
    phi = pi/n + 2 pi k/n, so the sensor (phi = 0) lies midway between two spokes.

    Mesh: around the barrel the node spacing is ``spacing_m`` (coarse), refined to ``refine_m``
    within +-``refine_halfwidth_m`` of the sensor angle (graded, :func:`graded_angles`); the rings
    are ``axial_spacing_m`` apart (default ``spacing_m``). A sensor a few centimetres from the
    metal needs mesh cells no larger than that distance near it, or it sees the holes of the grid;
    the coarse spacing is capped at 2.8 x the axial spacing so that every axial wire keeps
    segment/radius >= 2 under the equal-area rule.

    Parameters
    ----------
    diameter_m : nominal rim (bead-seat) diameter, m (17 in = 0.4318 m).
    width_m : barrel width, m.
    spacing_m : coarse grid spacing, m (<= lambda/10).
    """
    r_b = diameter_m / 2.0 - well_depth_m
    dy = axial_spacing_m or spacing_m
    coarse = min(spacing_m, 0.9 * math.pi * dy)
    fine = refine_m or coarse
    anchors = [math.pi / n_spokes + 2.0 * math.pi * k / n_spokes for k in range(n_spokes)] if face else []
    phis = graded_angles(r_b, fine, coarse, fine_halfwidth_m=refine_halfwidth_m, anchors_rad=anchors)
    ys = np.linspace(-width_m / 2.0, width_m / 2.0, _nseg(width_m, dy) + 1)
    m, n = cylinder(r_b, -width_m / 2.0, width_m / 2.0, coarse, phis_rad=phis, ys_m=ys)
    m.notes = [
        (f"rim D={diameter_m:.4f} m, barrel r={r_b:.4f} m, width {width_m:.4f} m, {n} nodes around "
        f"(coarse {coarse:.4f} m, fine {fine:.4f} m), {len(ys)} rings")
    ]
    arcs = r_b * np.mod(np.diff(np.concatenate([phis, [phis[0] + 2.0 * math.pi]])), 2.0 * math.pi)
    line_sp = 0.5 * (arcs + np.roll(arcs, 1))
    if flange_height_m > 0.0:
        r_f = diameter_m / 2.0 + flange_height_m
        # Equal-area radius of the flange annulus, capped at 0.4 x the shortest ring chord: NEC-2
        # (necpp) refuses a wire whose end-segment midpoint lies inside a neighbouring wire.
        chord_min = 2.0 * r_f * math.sin(0.5 * float(np.min(arcs)) / r_b)
        a_ring = min(equal_area_radius_m(r_f - r_b), 0.4 * chord_min)
        for y in (-width_m / 2.0, width_m / 2.0):
            for i in range(n):
                _add(m, _ring_point(r_b, y, phis[i]), _ring_point(r_f, y, phis[i]), coarse,
                     equal_area_radius_m(line_sp[i]))
                _add(m, _ring_point(r_f, y, phis[i]), _ring_point(r_f, y, phis[(i + 1) % n]), coarse, a_ring)
        m.notes.append(f"flanges to r={r_f:.4f} m")
    if face:
        y = width_m / 2.0
        # equivalent radius of a flat strip (w/4), capped at 0.4 x the neighbouring segments so
        # that no segment midpoint next to a spoke root lies inside the spoke (necpp refuses that)
        a_s = min(spoke_width_m / 4.0, 0.4 * dy, 0.4 * coarse)
        for p in anchors:
            i = int(np.argmin(np.abs(np.mod(phis - p + math.pi, 2.0 * math.pi) - math.pi)))
            _add(m, _ring_point(hub_radius_m, y, phis[i]), _ring_point(r_b, y, phis[i]), coarse, a_s)
            _add(m, (0.0, y, 0.0), _ring_point(hub_radius_m, y, phis[i]), coarse, a_s)
        n_hub = _n_around(hub_radius_m, max(coarse, 3.0 * a_s), n_spokes)
        hub_phis = anchors[0] + 2.0 * math.pi * np.arange(n_hub) / n_hub
        a_h = equal_area_radius_m(coarse)
        for i in range(n_hub):
            _add(m, _ring_point(hub_radius_m, y, hub_phis[i]),
                 _ring_point(hub_radius_m, y, hub_phis[(i + 1) % n_hub]), coarse, a_h)
        m.notes.append(f"outboard face: hub r={hub_radius_m:.3f} m, {n_spokes} spokes (strip {spoke_width_m:.3f} m)")
    return m


def steel_belt(radius_m: float, width_m: float, spacing_m: float) -> WireModel:
    """The tire's steel belt as an open wire-grid cylinder about Y, radius ``radius_m``, centred on y = 0."""
    m, n = cylinder(radius_m, -width_m / 2.0, width_m / 2.0, spacing_m)
    m.notes = [f"steel belt r={radius_m:.4f} m, width {width_m:.4f} m, {n} nodes around, grid {spacing_m:.4f} m"]
    return m


@dataclass(frozen=True)
class WheelSpec:
    """A wheel to model: rim, sensor placement and (optionally) the tire's steel belt. SI units.

    Defaults follow the vehicle file's and the engine's defaults: the sensor sits at the rim's
    bead-seat radius, a quarter rim width toward the outboard side, ``well_depth_m`` above the
    drop well, which the barrel models (``core.wheel.DROP_CENTRE_DEPTH_M``, 25 mm). Flange height
    17.5 mm (from memory, the usual passenger-car J flange), 5 spokes, hub radius 80 mm and spoke
    strips 40 mm wide are engineering defaults for passenger-car alloy wheels. Mesh: 15 mm cells
    next to the sensor, 20 mm between rings (see :func:`rim`).
    """

    rim_diameter_m: float
    rim_width_m: float
    sensor_radius_m: float | None = None  # default: rim_diameter / 2
    sensor_offset_m: float | None = None  # axial, + outboard; default +rim_width / 4
    well_depth_m: float = DROP_CENTRE_DEPTH_M
    flange_height_m: float = 0.0175
    n_spokes: int = 5
    hub_radius_m: float = 0.08
    spoke_width_m: float = 0.04
    face: bool = True
    belt_radius_m: float | None = None  # None: no steel belt
    belt_width_m: float = 0.0
    refine_m: float = 0.015
    axial_spacing_m: float = 0.02

    @property
    def sensor_radius(self) -> float:
        return self.rim_diameter_m / 2.0 if self.sensor_radius_m is None else self.sensor_radius_m

    @property
    def sensor_offset(self) -> float:
        return self.rim_width_m / 4.0 if self.sensor_offset_m is None else self.sensor_offset_m

    def sensor_position(self, theta_rad: float = 0.0) -> np.ndarray:
        """Sensor position in the wheel frame at wheel angle theta (0 = top), m."""
        r = self.sensor_radius
        return np.array([r * math.sin(theta_rad), self.sensor_offset, r * math.cos(theta_rad)])


def wheel(spec: WheelSpec, spacing_m: float, belt_spacing_m: float | None = None) -> WireModel:
    """Wire-grid wheel of ``spec`` in the wheel frame (sensor at theta = 0, top).

    ``spacing_m`` is the coarse spacing of the rim mesh; the belt uses ``belt_spacing_m``
    (default: the same).
    """
    m = rim(
        spec.rim_diameter_m,
        spec.rim_width_m,
        spacing_m,
        well_depth_m=spec.well_depth_m,
        flange_height_m=spec.flange_height_m,
        n_spokes=spec.n_spokes,
        hub_radius_m=spec.hub_radius_m,
        spoke_width_m=spec.spoke_width_m,
        face=spec.face,
        refine_m=spec.refine_m,
        axial_spacing_m=spec.axial_spacing_m,
    )
    if spec.belt_radius_m is not None:
        m = m + steel_belt(spec.belt_radius_m, spec.belt_width_m, belt_spacing_m or spacing_m)
    return m


# --------------------------------------------------------------------------------------------
# Analytic short-dipole field
# --------------------------------------------------------------------------------------------


def _unit(v) -> np.ndarray:
    v = np.asarray(v, dtype=float)
    return v / np.linalg.norm(v, axis=-1, keepdims=True)


def dipole_field(points_m, position_m, axis, freq_hz: float, moment_am: complex = 1.0) -> np.ndarray:
    """Exact E field (V/m, complex peak) of an infinitesimal current element at ``points_m``.

    E = A [ -p_perp + (3 r (r.p) - p)(1/(jkR) + 1/(jkR)^2) ],  A = j k eta Il exp(-jkR) / (4 pi R),
    with p the unit axis, r the unit vector from the element to the point, p_perp = p - (p.r) r.
    Time factor exp(+j omega t).

    Parameters
    ----------
    points_m : (..., 3) field points, m.
    position_m : (3,) element position, m.
    axis : (3,) element direction (normalised here).
    freq_hz : frequency, Hz.
    moment_am : current moment I l, A m.

    References
    ----------
    Balanis, Antenna Theory, sec. 4.2, eqs. (4-8a)-(4-10c) (infinitesimal dipole, all field terms).
    """
    k = 2.0 * math.pi * freq_hz / C0_M_PER_S
    p = _unit(axis)
    d = np.asarray(points_m, dtype=float) - np.asarray(position_m, dtype=float)
    r = np.linalg.norm(d, axis=-1, keepdims=True)
    u = d / r
    pu = np.sum(u * p, axis=-1, keepdims=True)
    jkr = 1j * k * r
    amp = 1j * k * ETA0_OHM * moment_am * np.exp(-jkr) / (4.0 * math.pi * r)
    return amp * (-(p - pu * u) + (3.0 * pu * u - p) * (1.0 / jkr + 1.0 / jkr**2))


def dipole_far_field(directions, position_m, axis, freq_hz: float, moment_am: complex = 1.0) -> np.ndarray:
    """Far field r E exp(+jkr) (V, Cartesian, phase referred to the origin) of a current element.

    F = -(j k eta Il / (4 pi)) exp(+j k r.r0) p_perp; |F|^2 / (2 eta) is the power per steradian.

    References
    ----------
    Balanis, Antenna Theory, sec. 4.2 (far field of the infinitesimal dipole), with the usual
    far-zone phase exp(j k r.r0) of a displaced source.
    """
    k = 2.0 * math.pi * freq_hz / C0_M_PER_S
    p = _unit(axis)
    u = _unit(directions)
    pu = np.sum(u * p, axis=-1, keepdims=True)
    phase = np.exp(1j * k * np.sum(u * np.asarray(position_m, dtype=float), axis=-1, keepdims=True))
    return -(1j * k * ETA0_OHM * moment_am / (4.0 * math.pi)) * phase * (p - pu * u)


def dipole_radiated_power_w(freq_hz: float, moment_am: complex = 1.0) -> float:
    """Power radiated by a current element in free space, W: P = eta (k |Il|)^2 / (12 pi) (Balanis eq. 4-16)."""
    k = 2.0 * math.pi * freq_hz / C0_M_PER_S
    return ETA0_OHM * (k * abs(moment_am)) ** 2 / (12.0 * math.pi)


# --------------------------------------------------------------------------------------------
# Spherical grid helpers
# --------------------------------------------------------------------------------------------


def sphere_grid(step_deg: float = 5.0) -> tuple[np.ndarray, np.ndarray]:
    """Polar angles 0..180 deg and azimuths 0..360-step deg (step must divide 180), in degrees."""
    n_t = round(180.0 / step_deg)
    if abs(n_t * step_deg - 180.0) > 1e-9:
        raise ValueError(f"step {step_deg} deg does not divide 180 deg")
    return np.arange(n_t + 1) * step_deg, np.arange(2 * n_t) * step_deg


def _basis(theta_deg, phi_deg):
    t = np.radians(theta_deg)
    p = np.radians(phi_deg)
    st, ct, sp, cp = np.sin(t), np.cos(t), np.sin(p), np.cos(p)
    r_hat = np.stack([st * cp, st * sp, ct], axis=-1)
    t_hat = np.stack([ct * cp, ct * sp, -st], axis=-1)
    p_hat = np.stack([-sp, cp, np.zeros_like(sp)], axis=-1)
    return r_hat, t_hat, p_hat


def to_spherical(vec, theta_deg, phi_deg) -> tuple[np.ndarray, np.ndarray]:
    """Theta and phi components of Cartesian vectors ``vec`` (..., 3) at directions (theta, phi)."""
    _, t_hat, p_hat = _basis(theta_deg, phi_deg)
    return np.sum(vec * t_hat, axis=-1), np.sum(vec * p_hat, axis=-1)


def sphere_integral(values, theta_deg, phi_deg) -> float:
    """Integral over the sphere of ``values`` (n_theta, n_phi) on a regular grid (trapezoid in theta).

    Theta from 0 to 180 deg inclusive, phi a full period without the 360 deg duplicate.
    """
    t = np.radians(theta_deg)
    dt = t[1] - t[0]
    dp = 2.0 * math.pi / len(phi_deg)
    w = np.sin(t) * dt
    w[0] *= 0.5
    w[-1] *= 0.5
    return float(np.sum(np.asarray(values) * w[:, None]) * dp)


# --------------------------------------------------------------------------------------------
# Solver
# --------------------------------------------------------------------------------------------


class NecSolver:
    """A wire model loaded into NEC-2 at one frequency; fields of current-element sources on it.

    The structure matrix is factored once (on the first request) and reused for every source.

    Parameters
    ----------
    model : the wire model (may be empty: free space, NEC-2 not called).
    freq_hz : frequency, Hz.
    mirror_y_plane : the model is the y >= 0 half of a structure symmetric about y = 0
        (NEC-2 GX card); the solver completes it by reflection (4x less matrix work).
    """

    def __init__(self, model: WireModel, freq_hz: float, *, mirror_y_plane: bool = False):
        self.freq_hz = float(freq_hz)
        self.model = model
        self._ctx = None
        self._n_ne = 0
        self._n_rp = 0
        self._source = None
        if model.wires:
            from PyNEC import nec_context  # optional dependency (validation extra)

            problems = check_model(model)
            if problems:
                raise ValueError("wire model breaks the NEC-2 wire rules: " + "; ".join(problems[:5]))

            ctx = nec_context()
            geo = ctx.get_geometry()
            for i, w in enumerate(model.wires):
                geo.wire(i + 1, int(w.segments), *w.start, *w.end, float(w.radius_m), 1.0, 1.0)
            if mirror_y_plane:
                geo.reflect(0, 1, 0, 0)  # tag increment 0: images keep their tags (and loads)
            ctx.geometry_complete(0)
            ctx.fr_card(0, 1, self.freq_hz / 1e6, 0.0)
            for i, w in enumerate(model.wires):
                if w.load_ohm_per_m:
                    # LD type 2: distributed series R (ohm/m), L = 0, C = 0 (no capacitor) on every segment
                    ctx.ld_card(2, i + 1, 0, 0, float(w.load_ohm_per_m), 0.0, 0.0)
            self._ctx = ctx

    def set_source(self, position_m, axis, moment_am: float = 1.0) -> None:
        """Place the current element (NEC-2 EX type 4) at ``position_m`` along ``axis``."""
        p = _unit(axis)
        self._source = (np.asarray(position_m, dtype=float), p, float(moment_am))
        if self._ctx is not None:
            alpha = math.degrees(math.asin(max(-1.0, min(1.0, p[2]))))
            beta = math.degrees(math.atan2(p[1], p[0]))
            x, y, z = (float(v) for v in position_m)
            self._ctx.ex_card(4, 0, 0, 0, x, y, z, alpha, beta, float(moment_am))

    def scattered_near_field(self, points_m) -> np.ndarray:
        """Field scattered by the structure at ``points_m`` (..., 3), V/m."""
        pts = np.asarray(points_m, dtype=float)
        flat = pts.reshape(-1, 3)
        out = np.zeros(flat.shape, dtype=complex)
        if self._ctx is not None:
            for i, (x, y, z) in enumerate(flat):
                self._ctx.ne_card(0, 1, 1, 1, float(x), float(y), float(z), 0.0, 0.0, 0.0)
                nf = self._ctx.get_near_field_pattern(self._n_ne)
                self._n_ne += 1
                out[i] = (nf.get_field_x()[0], nf.get_field_y()[0], nf.get_field_z()[0])
        return out.reshape(pts.shape)

    def scattered_sphere_field(self, radius_m: float, theta_deg, phi_deg) -> np.ndarray:
        """Scattered field on the sphere r = radius_m about the origin, regular grid: (T, P, 3) V/m.

        One NEC-2 ``NE`` card in spherical point coordinates (Cartesian field components).
        """
        theta_deg = np.asarray(theta_deg, dtype=float)
        phi_deg = np.asarray(phi_deg, dtype=float)
        out = np.zeros((len(theta_deg), len(phi_deg), 3), dtype=complex)
        if self._ctx is None:
            return out
        dt = float(theta_deg[1] - theta_deg[0]) if len(theta_deg) > 1 else 0.0
        dp = float(phi_deg[1] - phi_deg[0]) if len(phi_deg) > 1 else 0.0
        # ne_card(1 = spherical, n_r, n_phi, n_theta, r0, phi0, theta0, dr, dphi, dtheta)
        self._ctx.ne_card(1, 1, len(phi_deg), len(theta_deg), float(radius_m), float(phi_deg[0]),
                          float(theta_deg[0]), 0.0, dp, dt)
        nf = self._ctx.get_near_field_pattern(self._n_ne)
        self._n_ne += 1
        # points come theta-major (phi varies fastest)
        for c, getter in enumerate((nf.get_field_x, nf.get_field_y, nf.get_field_z)):
            out[..., c] = np.asarray(getter()).reshape(len(theta_deg), len(phi_deg))
        return out

    def near_field(self, points_m) -> np.ndarray:
        """Total field (element + structure) at ``points_m`` (..., 3), V/m (complex peak)."""
        pos, axis, mom = self._source
        return dipole_field(points_m, pos, axis, self.freq_hz, mom) + self.scattered_near_field(points_m)

    def scattered_far_field(self, theta_deg, phi_deg) -> tuple[np.ndarray, np.ndarray]:
        """Scattered far field r E exp(jkr) on the regular grid theta x phi: (E_theta, E_phi), V."""
        theta_deg = np.asarray(theta_deg, dtype=float)
        phi_deg = np.asarray(phi_deg, dtype=float)
        shape = (len(theta_deg), len(phi_deg))
        if self._ctx is None:
            z = np.zeros(shape, dtype=complex)
            return z, z.copy()
        dt = float(theta_deg[1] - theta_deg[0]) if len(theta_deg) > 1 else 0.0
        dp = float(phi_deg[1] - phi_deg[0]) if len(phi_deg) > 1 else 0.0
        # rp_card(calc_mode, n_theta, n_phi, output_format, normalization, D, A, theta0, phi0,
        #         delta_theta, delta_phi, radial_distance, gain_norm)
        self._ctx.rp_card(0, len(theta_deg), len(phi_deg), 0, 0, 0, 0,
                          float(theta_deg[0]), float(phi_deg[0]), dt, dp, 0.0, 0.0)
        rp = self._ctx.get_radiation_pattern(self._n_rp)
        self._n_rp += 1
        # necpp orders the points phi-major (theta varies fastest).
        e_t = np.asarray(rp.get_e_theta()).reshape(shape[1], shape[0]).T
        e_p = np.asarray(rp.get_e_phi()).reshape(shape[1], shape[0]).T
        return e_t, e_p

    def far_field(self, theta_deg, phi_deg) -> tuple[np.ndarray, np.ndarray]:
        """Total far field r E exp(jkr) (element + structure) on the grid theta x phi: (E_theta, E_phi), V."""
        theta_deg = np.asarray(theta_deg, dtype=float)
        phi_deg = np.asarray(phi_deg, dtype=float)
        tt, pp = np.meshgrid(theta_deg, phi_deg, indexing="ij")
        r_hat, _, _ = _basis(tt, pp)
        pos, axis, mom = self._source
        inc = dipole_far_field(r_hat, pos, axis, self.freq_hz, mom)
        it, ip = to_spherical(inc, tt, pp)
        st, sp = self.scattered_far_field(theta_deg, phi_deg)
        return it + st, ip + sp


def installed_pattern(solver: NecSolver, position_m, axis, step_deg: float = 5.0) -> dict:
    """Normalised installed far-field pattern of a current element at ``position_m`` on the structure.

    Returns a dict with ``theta_deg`` (n_t), ``phi_deg`` (n_p, 0..360-step), ``e_theta``, ``e_phi``
    (n_t, n_p complex, phase referred to the origin) scaled so that |E_theta|^2 + |E_phi|^2 is the
    directivity relative to the total radiated power (linear; its integral over the sphere is 4 pi),
    and ``power_ratio``: power radiated with the structure / power radiated by the same element in
    free space (same current moment).
    """
    theta, phi = sphere_grid(step_deg)
    solver.set_source(position_m, axis, 1.0)
    e_t, e_p = solver.far_field(theta, phi)
    p_int = sphere_integral(np.abs(e_t) ** 2 + np.abs(e_p) ** 2, theta, phi)
    scale = math.sqrt(4.0 * math.pi / p_int)
    # Radiated power P = integral |F|^2 / (2 eta) dOmega (peak phasors).
    p_free = dipole_radiated_power_w(solver.freq_hz, 1.0)
    return {
        "theta_deg": theta,
        "phi_deg": phi,
        "e_theta": e_t * scale,
        "e_phi": e_p * scale,
        "power_ratio": p_int / (2.0 * ETA0_OHM) / p_free,
    }


def wheel_mesh_spacing_m(freq_hz: float) -> float:
    """Coarse mesh spacing of the wheel models: lambda/20, m.

    Finer than the lambda/10 rule because the steel belt and the rim are resonant scatterers at
    these sizes: against a finer reference mesh (10 mm cells, lambda/30) a belt at lambda/10 moved
    the pattern by up to 6-9 dB in some directions, the lambda/20 mesh by 1.0-2.3 dB at most
    (0.2-0.4 dB rms); validation/nec_sweeps.py mesh, docs/VALIDATION.md. Next to the sensor the rim
    mesh is refined further (WheelSpec.refine_m).
    """
    return grid_spacing_m(freq_hz, 0.05)


#: Radius of the sphere on which the near-field correction of the wheel tables is sampled, m.
NEAR_RADIUS_M = 1.5
#: Angular step of the near-field correction grid, deg.
NEAR_STEP_DEG = 10.0


def pattern_with_near(solver: NecSolver, position_m, axis, step_deg: float = 5.0,
                      near_radius_m: float = NEAR_RADIUS_M, near_step_deg: float = NEAR_STEP_DEG) -> dict:
    """:func:`installed_pattern` plus the near-field term ``near`` (T1, P1, 3) and its grid.

    With r E exp(jkr) = F0 + F1 / r + ... (the expansion of the field outside the sphere enclosing
    the structure in powers of 1/r; Wilcox 1956), F1 = r0 (r0 E(r0) exp(jk r0) - F0) is sampled on
    the sphere r0 = ``near_radius_m`` about the origin (Cartesian components, grid
    ``near_step_deg``, same normalisation as the far field), so that (F0 + F1/r) exp(-jkr)/r
    reproduces NEC-2 at r0 and at infinity.

    References
    ----------
    C. H. Wilcox, "An expansion theorem for electromagnetic fields", Comm. Pure Appl. Math. 9,
    1956 (from memory): E = exp(-jkr)/r sum_n F_n(theta, phi) / r^n outside the enclosing sphere.
    """
    freq_hz = solver.freq_hz
    k = 2.0 * math.pi * freq_hz / C0_M_PER_S
    pat = installed_pattern(solver, position_m, axis, step_deg)
    t1, p1 = sphere_grid(near_step_deg)
    tt, pp = np.meshgrid(t1, p1, indexing="ij")
    r_hat, t_hat, p_hat = _basis(tt, pp)
    it = np.isin(np.round(pat["theta_deg"], 6), np.round(t1, 6))
    jt = np.isin(np.round(pat["phi_deg"], 6), np.round(p1, 6))
    scale = math.sqrt(4.0 * math.pi / (pat["power_ratio"] * 2.0 * ETA0_OHM * dipole_radiated_power_w(freq_hz)))
    f0 = pat["e_theta"][np.ix_(it, jt)][..., None] * t_hat + pat["e_phi"][np.ix_(it, jt)][..., None] * p_hat
    e_r0 = solver.scattered_sphere_field(near_radius_m, t1, p1) + dipole_field(
        r_hat * near_radius_m, position_m, axis, freq_hz)
    f_r0 = e_r0 * scale * near_radius_m * np.exp(1j * k * near_radius_m)
    pat["near"] = near_radius_m * (f_r0 - f0)
    pat["near_theta_deg"], pat["near_phi_deg"], pat["near_radius_m"] = t1, p1, near_radius_m
    pat["scale"] = scale  # normalised field = scale x (field of the 1 A m element)
    return pat


def wheel_patterns(spec: WheelSpec, freq_hz: float, step_deg: float = 5.0, axes=None) -> dict:
    """Installed patterns (:func:`pattern_with_near`) of the sensor on the wire-grid wheel ``spec``.

    One NEC-2 solve (one matrix factorisation) serves all axes. Returns ``theta_deg``, ``phi_deg``,
    ``near_theta_deg``, ``near_phi_deg``, ``near_radius_m``, ``patterns`` {axis: dict with
    ``e_theta``, ``e_phi``, ``power_ratio``, ``near`` (T1, P1, 3)}, ``segments``, ``notes``,
    ``solver`` and ``model``. Axes (wheel frame, sensor on top): radial +Z, tangential +X, axial +Y.
    """
    from core.wheel_patterns import AXES, axis_vector

    model = wheel(spec, wheel_mesh_spacing_m(freq_hz))
    solver = NecSolver(model, freq_hz)
    out = {name: pattern_with_near(solver, spec.sensor_position(0.0), axis_vector(name), step_deg)
           for name in axes or AXES}
    first = next(iter(out.values()))
    return {
        "theta_deg": first["theta_deg"],
        "phi_deg": first["phi_deg"],
        "near_theta_deg": first["near_theta_deg"],
        "near_phi_deg": first["near_phi_deg"],
        "near_radius_m": first["near_radius_m"],
        "patterns": out,
        "segments": model.segment_count,
        "notes": list(model.notes),
        "solver": solver,
        "model": model,
    }


def wire_dipole(freq_hz: float, position_m, axis, length_m: float = 0.03, radius_m: float = 0.0005,
                segments: int = 5, structure: WireModel | None = None):
    """A short centre-fed wire dipole (NEC-2 voltage source, EX type 0), alone or next to ``structure``.

    An independent source model for the checks: its current follows from NEC-2's own solution
    instead of being imposed. Returns (context, tag of the dipole wire); use
    :func:`wire_dipole_fields` for fields and input power.
    """
    from PyNEC import nec_context

    p = _unit(axis)
    c = np.asarray(position_m, dtype=float)
    ctx = nec_context()
    geo = ctx.get_geometry()
    wires = list(structure.wires) if structure is not None else []
    for i, w in enumerate(wires):
        geo.wire(i + 1, int(w.segments), *w.start, *w.end, float(w.radius_m), 1.0, 1.0)
    tag = len(wires) + 1
    a, b = c - 0.5 * length_m * p, c + 0.5 * length_m * p
    geo.wire(tag, int(segments), *a, *b, float(radius_m), 1.0, 1.0)
    ctx.geometry_complete(0)
    ctx.fr_card(0, 1, float(freq_hz) / 1e6, 0.0)
    ctx.ex_card(0, tag, int(segments) // 2 + 1, 0, 1.0, 0.0, 0.0, 0.0, 0.0, 0.0)
    return ctx, tag


def wire_dipole_fields(ctx, points_m, theta_deg=None, phi_deg=None) -> dict:
    """Near fields at ``points_m`` (N, 3), optional far field on a grid, and the input power (W)."""
    pts = np.atleast_2d(np.asarray(points_m, dtype=float))
    e = np.zeros(pts.shape, complex)
    for i, (x, y, z) in enumerate(pts):
        ctx.ne_card(0, 1, 1, 1, float(x), float(y), float(z), 0.0, 0.0, 0.0)
        nf = ctx.get_near_field_pattern(i)
        e[i] = (nf.get_field_x()[0], nf.get_field_y()[0], nf.get_field_z()[0])
    out = {"near": e, "input_power_w": float(np.real(ctx.get_input_parameters(0).get_power()[0]))}
    if theta_deg is not None:
        theta_deg = np.asarray(theta_deg, float)
        phi_deg = np.asarray(phi_deg, float)
        ctx.rp_card(0, len(theta_deg), len(phi_deg), 0, 0, 0, 0, float(theta_deg[0]), float(phi_deg[0]),
                    float(theta_deg[1] - theta_deg[0]), float(phi_deg[1] - phi_deg[0]), 0.0, 0.0)
        rp = ctx.get_radiation_pattern(0)
        shape = (len(phi_deg), len(theta_deg))
        out["e_theta"] = np.asarray(rp.get_e_theta()).reshape(shape).T
        out["e_phi"] = np.asarray(rp.get_e_phi()).reshape(shape).T
    return out

"""Comparison harnesses of the engine's simple models against NEC-2 (used by tests and sweeps).

Each function builds a small wire-grid model (core/fullwave/nec_models.py), runs NEC-2 through PyNEC, runs
the engine's model on the same geometry and returns the numbers side by side, so that the tests in
tests/validation/ and the longer sweeps in validation/ share one definition of every check.

- :func:`halfplane`: short dipole in front of a large plate, receivers moving from the lit region
  into the shadow behind the straight edge; NEC-2 shadow loss (relative to the same dipole in free
  space) for both polarizations, the UTD half-plane reference, and the engine's knife edge
  (core.propagation: v from h, d1, d2 as in core.fullwave.edge_reference.knife_edge_geometry; ITU-R P.526
  eq. 31 and the exact eq. 30).
- :func:`rim_barrel`: short radial dipole 20 mm above a bare rim barrel (open cylinder), field at an
  inboard receiver over a full turn; NEC-2 versus the engine's rim knife-edge model
  (core.wheel.wheel_loss_db with the short-dipole pattern of core.propagation), and versus the
  installed-pattern method (far field + near term of the same barrel, core.wheel_patterns).
- :func:`table_vs_direct`: a wheel-pattern table looked up by core.wheel_patterns.field_vectors
  against direct NEC-2 runs of the same wheel at receiver points over a full turn.

Levels are in dB; NEC-2 fields are for the same radiated power as the bare dipole (the installed
patterns' normalisation, so that EIRP keeps its meaning).
"""

from __future__ import annotations

import math
import time

import numpy as np

from core.fullwave import edge_reference as er
from core.fullwave import nec_models as nm
from core.propagation import (
    dipole_pattern_rel_db,
    knife_edge_loss_db,
    knife_edge_loss_exact_db,
    knife_edge_v,
)
from core.wheel import WheelGeometry, wheel_loss_db
from core.wheel_patterns import PatternTable, axis_vector, field_vectors, rotation_y


def db20(x) -> np.ndarray:
    return 20.0 * np.log10(np.maximum(np.abs(x), 1e-300))


def _norm(e) -> np.ndarray:
    return np.linalg.norm(e, axis=-1)


# --------------------------------------------------------------------------------------------
# Half-plane edge
# --------------------------------------------------------------------------------------------


def halfplane(freq_hz: float = 315e6, d1_m: float = 1.0, d2_m: float = 1.0, z_source_m: float = -0.6,
              width_m: float = 4.0, depth_m: float = 4.0, v_targets=None, spacing_fraction: float = 0.1) -> dict:
    """NEC-2 plate edge vs UTD half-plane vs knife edge, both polarizations.

    Plate in x = 0, z in [-depth, 0], y in [-width/2, width/2], edge along y at z = 0, solved as
    half a structure mirrored in y = 0. Source (current element) at (-d1, 0, z_source); receivers at
    (d2, 0, z_r) with z_r chosen for the target knife-edge v values (default -0.5..2.5 in 0.25).
    "soft": dipole along y (E parallel to the edge); "hard": dipole along z (E perpendicular to the
    edge, in the plane normal to it). Losses in dB relative to the same dipole in free space.
    """
    if v_targets is None:
        v_targets = np.arange(-0.5, 2.5001, 0.25)
    v_targets = np.asarray(v_targets, float)
    spacing = nm.grid_spacing_m(freq_hz, spacing_fraction)
    src = np.array([-d1_m, 0.0, z_source_m])
    # receiver heights for the target v (v grows monotonically as the receiver goes down)
    z_dense = np.linspace(3.0, -depth_m + 0.3, 4001)
    rx_dense = np.stack([np.full_like(z_dense, d2_m), 0 * z_dense, z_dense], 1)
    h, a1, a2 = er.knife_edge_geometry(src, rx_dense)
    v_dense = knife_edge_v(h, a1, a2, freq_hz)
    z_r = np.interp(v_targets, v_dense, z_dense)
    rx = np.stack([np.full_like(z_r, d2_m), 0 * z_r, z_r], 1)
    h, a1, a2 = er.knife_edge_geometry(src, rx)
    v = knife_edge_v(h, a1, a2, freq_hz)
    t0 = time.time()
    model = nm.plate(width_m, depth_m, spacing, symmetric_half=True)
    solver = nm.NecSolver(model, freq_hz, mirror_y_plane=True)
    out = {"v": v, "z_r": z_r, "h": h, "d1": a1, "d2": a2, "receivers": rx, "source": src,
           "segments": 2 * model.segment_count, "spacing_m": spacing,
           "knife_edge_db": knife_edge_loss_db(v), "knife_edge_exact_db": knife_edge_loss_exact_db(v)}
    for pol, axis in (("soft", (0.0, 1.0, 0.0)), ("hard", (0.0, 0.0, 1.0))):
        solver.set_source(src, axis)
        e = solver.near_field(rx)
        e0 = nm.dipole_field(rx, src, axis, freq_hz)
        out[f"nec_{pol}_db"] = db20(_norm(e0)) - db20(_norm(e))
        out[f"utd_{pol}_db"] = -db20(er.utd_half_plane(src, rx, freq_hz, pol))
    out["solve_s"] = time.time() - t0
    return out


# --------------------------------------------------------------------------------------------
# Rim barrel over a turn
# --------------------------------------------------------------------------------------------


def barrel_model(freq_hz: float, diameter_m: float = 0.4318, width_m: float = 0.2, mesh: str = "graded"):
    """Open wire-grid cylinder (rim barrel) about Y; graded mesh (15 mm cells next to the sensor at
    the top, 20 mm between rings, lambda/20 elsewhere) or a uniform lambda/40 reference mesh."""
    lam = nm.C0_M_PER_S / freq_hz
    r = diameter_m / 2.0
    if mesh == "uniform":
        return nm.cylinder(r, -width_m / 2.0, width_m / 2.0, lam / 40.0)[0]
    fy = 0.02
    coarse = min(lam / 20.0, 0.9 * math.pi * fy)
    phis = nm.graded_angles(r, 0.015, coarse, fine_halfwidth_m=0.03)
    ys = np.linspace(-width_m / 2.0, width_m / 2.0, math.ceil(width_m / fy) + 1)
    return nm.cylinder(r, -width_m / 2.0, width_m / 2.0, coarse, phis_rad=phis, ys_m=ys)[0]


def rim_barrel(freq_hz: float = 315e6, receiver_m=(0.5, -1.0, 0.3), n_angles: int = 36, axis: str = "radial",
               diameter_m: float = 0.4318, width_m: float = 0.2, height_m: float = 0.02, mesh: str = "graded",
               tire_radius_m: float | None = None) -> dict:
    """Field at an inboard receiver as the sensor turns on a bare rim barrel: NEC-2 vs the engine.

    Wheel frame = vehicle frame of a left wheel centred at the origin (axis along y, outboard +y),
    so "inboard" is y < 0. The sensor (current element along ``axis``) sits ``height_m`` above the
    barrel surface at mid-width; NEC-2 is solved once with the sensor on top and the receiver
    rotated by -theta (the barrel is a body of revolution, so this is the same as turning the
    sensor). The engine sees a rim of radius diameter/2 and width ``width_m`` (its flange knife
    edge at the barrel's edge), no tire losses, an isotropic receiver (total field) and the
    short-dipole pattern with its -30 dB floor. Levels (dB) are relative to the bare dipole's peak
    field at the receiver's distance from the wheel centre, same radiated power.
    """
    rc = np.asarray(receiver_m, float)
    r = diameter_m / 2.0
    th = np.arange(n_angles) * (2.0 * math.pi / n_angles)
    rot = rotation_y(th)  # (A, 3, 3)
    rx_w = np.einsum("aji,j->ai", rot, rc)  # R^T rc: receiver in the frame where the sensor is on top
    pos0 = np.array([0.0, 0.0, r + height_m])
    ax0 = axis_vector(axis)
    t0 = time.time()
    model = barrel_model(freq_hz, diameter_m, width_m, mesh)
    solver = nm.NecSolver(model, freq_hz)
    pat = nm.pattern_with_near(solver, pos0, ax0)
    solver.set_source(pos0, ax0)
    e = solver.near_field(rx_w) / math.sqrt(pat["power_ratio"])  # same radiated power as the bare dipole
    solve_s = time.time() - t0
    k = 2.0 * math.pi * freq_hz / nm.C0_M_PER_S
    d0 = float(np.linalg.norm(rc))
    ref = k * nm.ETA0_OHM / (4.0 * math.pi * d0)  # bare dipole peak field at d0 for 1 A m
    nec_db = db20(_norm(e) / ref)
    # engine: knife-edge rim model
    src = np.einsum("aij,j->ai", rot, pos0)
    axes = np.einsum("aij,j->ai", rot, ax0)
    dst = np.broadcast_to(rc, src.shape)
    path = dst - src
    dist = np.linalg.norm(path, axis=1)
    u = path / dist[:, None]
    wg = WheelGeometry(id="T", centre=(0.0, 0.0, 0.0), outboard_sign=1.0, rim_radius_m=r, rim_width_m=width_m,
                       tire_radius_m=tire_radius_m or r + 0.11, tire_width_m=width_m + 0.03,
                       sensor_radius_m=r + height_m, sensor_offset_m=0.0)
    loss = wheel_loss_db(wg, src, dst, freq_hz, 0.0, 0.0)
    pattern = dipole_pattern_rel_db(axes, u, -30.0)
    engine_db = pattern - loss - db20(dist / d0)
    # installed-pattern method on the same barrel
    table = PatternTable(pat["theta_deg"], pat["phi_deg"], pat["e_theta"], pat["e_phi"], freq_hz, axis,
                         diameter_m, width_m, r + height_m, 0.0, None, "computed", "bare barrel",
                         pat["power_ratio"], pat["near"], pat["near_theta_deg"], pat["near_phi_deg"],
                         pat["near_radius_m"])
    g = field_vectors(table, u, th, 1.0, reference="sensor", distance_m=dist)
    # |E| = sqrt(eta P / (2 pi)) |g| / d; relative to the bare peak sqrt(1.5 eta P / (2 pi)) / d0
    table_db = db20(_norm(g) / math.sqrt(1.5) * d0 / dist)
    return _turn_metrics(th, nec_db, engine_db, table_db) | {
        "theta_rad": th, "nec_db": nec_db, "engine_db": engine_db, "table_db": table_db,
        "knife_edge_loss_db": loss, "segments": model.segment_count, "solve_s": solve_s,
        "power_ratio": pat["power_ratio"],
    }


def _wrap_deg(x):
    return (np.asarray(x) + 180.0) % 360.0 - 180.0


def _turn_metrics(th, ref_db, eng_db, tab_db) -> dict:
    out = {}
    for name, model_db in (("engine", eng_db), ("table", tab_db)):
        diff = model_db - ref_db
        i_ref, i_mod = int(np.argmin(ref_db)), int(np.argmin(model_db))
        out[name] = {
            "correlation": float(np.corrcoef(ref_db, model_db)[0, 1]) if np.std(ref_db) > 0 and np.std(model_db) > 0
            else float("nan"),
            "worst_case_diff_db": float(model_db[i_mod] - ref_db[i_ref]),
            "worst_angle_diff_deg": float(_wrap_deg(math.degrees(th[i_mod] - th[i_ref]))),
            "max_abs_diff_db": float(np.max(np.abs(diff))),
            "rms_diff_db": float(np.sqrt(np.mean(diff ** 2))),
            "nec_worst_db": float(ref_db[i_ref]), "nec_worst_deg": float(math.degrees(th[i_ref])),
            "model_worst_db": float(model_db[i_mod]), "model_worst_deg": float(math.degrees(th[i_mod])),
            "nec_swing_db": float(ref_db.max() - ref_db.min()), "model_swing_db": float(model_db.max() - model_db.min()),
        }
    return out


# --------------------------------------------------------------------------------------------
# Wheel-pattern table vs direct NEC-2
# --------------------------------------------------------------------------------------------


def table_vs_direct(spec: nm.WheelSpec, freq_hz: float, tables: dict, receivers_m, n_angles: int = 36,
                    solved=None, rotated_angles_deg=(), mirror: bool = False) -> dict:
    """Table lookups (core.wheel_patterns.field_vectors, near term included) vs direct NEC-2 runs.

    ``tables`` maps sensor axis -> PatternTable of ``spec``. Receivers are in vehicle axes with the
    wheel centre at the origin (a left wheel, or with ``mirror`` a right wheel: the NEC-2 model is
    then mirrored y -> -y and the lookup uses outboard_sign = -1). Full turn: NEC-2 solved with the
    sensor on top and the receivers turned by -theta (exact for the rotated wheel). In addition, for
    each angle in ``rotated_angles_deg`` the wire model itself is rotated and solved again (an
    independent check of the rotation convention). Returns per-axis error arrays (dB, lookup minus
    NEC-2, total field) and their max / rms.
    """
    rcv = np.atleast_2d(np.asarray(receivers_m, float))
    th = np.arange(n_angles) * (2.0 * math.pi / n_angles)
    m_y = np.diag([1.0, -1.0, 1.0]) if mirror else np.eye(3)
    sign = -1.0 if mirror else 1.0
    res = solved or nm.wheel_patterns(spec, freq_hz)
    solver = res["solver"]
    model = res["model"]
    k = 2.0 * math.pi * freq_hz / nm.C0_M_PER_S
    out = {"axes": {}, "segments": model.segment_count}
    rot = rotation_y(th)
    extra = []
    for deg in rotated_angles_deg:
        a = math.radians(deg)
        m = m_y @ rotation_y(a)
        extra.append((a, m, nm.NecSolver(model.transformed(m), freq_hz)))
    for axis, table in tables.items():
        ax0 = axis_vector(axis)
        s0 = spec.sensor_position(0.0)
        pat_scale = math.sqrt(4 * math.pi / (table.power_ratio * 2 * nm.ETA0_OHM * nm.dipole_radiated_power_w(freq_hz)))
        solver.set_source(s0, ax0)
        errs, levels = [], []
        for rc in rcv:
            rw = np.einsum("aji,j->ai", rot, m_y @ rc)  # into the frame of the unrotated left wheel
            e_w = solver.near_field(rw)
            e = np.einsum("ij,ajk,ak->ai", m_y, rot, e_w) * pat_scale  # back: M R e
            src = np.einsum("ij,ajk,k->ai", m_y, rot, s0)
            path = rc - src
            dist = np.linalg.norm(path, axis=1)
            g = field_vectors(table, path / dist[:, None], th, sign, reference="sensor", distance_m=dist)
            e_tab = g * (np.exp(-1j * k * dist) / dist)[:, None]
            errs.append(db20(_norm(e_tab)) - db20(_norm(e)))
            levels.append(db20(_norm(e)))
        rot_errs = []
        for a, m, sv in extra:
            sv.set_source(m @ s0, m @ ax0)
            e = sv.near_field(rcv) * pat_scale
            src = m @ s0
            path = rcv - src
            dist = np.linalg.norm(path, axis=1)
            g = field_vectors(table, path / dist[:, None], a, sign, reference="sensor", distance_m=dist)
            e_tab = g * (np.exp(-1j * k * dist) / dist)[:, None]
            rot_errs.append(db20(_norm(e_tab)) - db20(_norm(e)))
        errs = np.array(errs)
        levels = np.array(levels)
        out["axes"][axis] = {
            "err_db": errs, "level_db": levels, "rotated_err_db": np.array(rot_errs),
            "max_abs_db": float(np.max(np.abs(errs))), "rms_db": float(np.sqrt(np.mean(errs ** 2))),
            "rotated_max_abs_db": float(np.max(np.abs(rot_errs))) if rot_errs else float("nan"),
            "swing_db": float(np.max(levels.max(1) - levels.min(1))),
        }
    return out

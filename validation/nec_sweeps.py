"""Longer NEC-2 sweeps behind docs/VALIDATION.md (not tests; run niced, a few minutes).

    nice -n 10 python validation/nec_sweeps.py            # all sweeps
    nice -n 10 python validation/nec_sweeps.py halfplane  # one of: halfplane, rim, tables

Writes CSV files to tests/data/ (described in tests/data/README.md):
- nec_halfplane_sweep.csv: knife edge vs NEC-2 plate vs UTD half-plane, both polarizations, both
  bands, two source/receiver geometries;
- nec_rim_barrel_sweep.csv: bare 17 in rim barrel over a turn, knife-edge rim model and installed
  pattern vs NEC-2, several inboard receivers, both bands, three sensor axes;
- nec_wheel_tables_sweep.csv: shipped / interpolated wheel tables vs direct NEC-2 runs at receivers
  1.5-3 m away over a full turn, several rim sizes, with and without the belt, with and without
  the near-field term;
- nec_wheel_mesh_sweep.csv (``mesh``, not in the default set): the wheel mesh used for the tables
  against finer and coarser meshes (directivity differences over the sphere).
"""

from __future__ import annotations

import csv
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from core import wheel_patterns as wp
from core.fullwave import nec_checks
from core.fullwave import nec_models as nm
from core.tires import parse_tire_code

DATA = ROOT / "tests" / "data"
INCH = 0.0254
RECEIVERS = np.array([[1.5, -0.8, 0.2], [-1.2, -1.5, 0.6], [0.3, -2.5, -0.3], [2.0, 1.5, 0.5],
                      [-1.1, -1.1, -0.3], [2.5, -1.0, 0.4]])


def _write(name: str, rows: list[dict]) -> None:
    path = DATA / name
    with path.open("w", newline="") as fh:
        w = csv.DictWriter(fh, fieldnames=list(rows[0]))
        w.writeheader()
        for r in rows:
            w.writerow({k: (f"{v:.3f}" if isinstance(v, float) else v) for k, v in r.items()})
    print(f"wrote {path} ({len(rows)} rows)")


def halfplane() -> None:
    rows = []
    for f in (315e6, 433.92e6):
        for geom in ({"d1_m": 1.0, "d2_m": 1.0, "z_source_m": -0.6}, {"d1_m": 0.6, "d2_m": 1.4, "z_source_m": -0.3}):
            r = nec_checks.halfplane(f, width_m=3.6, depth_m=4.5, **geom)
            for i in range(len(r["v"])):
                rows.append({"freq_mhz": f / 1e6, **{k: float(v) for k, v in geom.items()}, "v": float(r["v"][i]),
                             "knife_edge_eq31_db": float(r["knife_edge_db"][i]),
                             "knife_edge_eq30_db": float(r["knife_edge_exact_db"][i]),
                             "nec_hard_db": float(r["nec_hard_db"][i]), "utd_hard_db": float(r["utd_hard_db"][i]),
                             "nec_soft_db": float(r["nec_soft_db"][i]), "utd_soft_db": float(r["utd_soft_db"][i])})
            print(f"halfplane {f / 1e6:.2f} MHz {geom}: {r['segments']} segments, {r['solve_s']:.1f} s")
    _write("nec_halfplane_sweep.csv", rows)


def rim() -> None:
    rows = []
    receivers = [(0.5, -1.0, 0.3), (0.3, -1.5, -0.2), (-0.8, -0.6, 0.1), (1.0, -0.4, 0.0), (0.0, -2.0, 0.8)]
    for f in (315e6, 433.92e6):
        for axis in wp.AXES:
            for rc in receivers:
                r = nec_checks.rim_barrel(f, rc, n_angles=36, axis=axis)
                for model in ("engine", "table"):
                    m = r[model]
                    rows.append({"freq_mhz": f / 1e6, "axis": axis, "receiver": " ".join(f"{x:g}" for x in rc),
                                 "model": "knife_edge" if model == "engine" else "installed_pattern",
                                 "correlation": m["correlation"], "worst_case_diff_db": m["worst_case_diff_db"],
                                 "worst_angle_diff_deg": m["worst_angle_diff_deg"],
                                 "max_abs_diff_db": m["max_abs_diff_db"], "rms_diff_db": m["rms_diff_db"],
                                 "nec_swing_db": m["nec_swing_db"], "model_swing_db": m["model_swing_db"]})
    _write("nec_rim_barrel_sweep.csv", rows)


def tables() -> None:
    rows = []
    cases = [(15.0, 6.5, "195/65R15"), (17.0, 7.5, "225/50R17"), (19.0, 8.5, "245/40R19"),
             (18.0, 7.5, "235/45R18"), (20.0, 9.0, "255/40R20"), (17.0, 7.0, "225/50R17")]
    for d_in, w_in, tire in cases:
        t = parse_tire_code(tire)
        for f in (315e6, 433.92e6):
            for belt in (True, False):
                spec = nm.WheelSpec(d_in * INCH, w_in * INCH,
                                    belt_radius_m=(t.outer_radius_m - wp.BELT_DEPTH_M) if belt else None,
                                    belt_width_m=wp.BELT_WIDTH_FRACTION * t.section_width_m)
                t0 = time.time()
                solved = nm.wheel_patterns(spec, f)
                shipped = {a: wp.select_table(spec.rim_diameter_m, spec.rim_width_m, f, a, belt) for a in wp.AXES}
                exact = {}
                for a in wp.AXES:
                    p = solved["patterns"][a]
                    exact[a] = wp.PatternTable(p["theta_deg"], p["phi_deg"], p["e_theta"], p["e_phi"], f, a,
                                               spec.rim_diameter_m, spec.rim_width_m, spec.sensor_radius,
                                               spec.sensor_offset, spec.belt_radius_m, "computed", "fresh",
                                               p["power_ratio"], p["near"], p["near_theta_deg"], p["near_phi_deg"],
                                               p["near_radius_m"])
                far_only = {a: wp.PatternTable(x.theta_deg, x.phi_deg, x.e_theta, x.e_phi, f, a, x.rim_diameter_m,
                                               x.rim_width_m, x.sensor_radius_m, x.sensor_offset_m, x.belt_radius_m,
                                               "computed", "far only", x.power_ratio) for a, x in exact.items()}
                for label, tabs in (("shipped", shipped), ("computed", exact), ("computed_far_only", far_only)):
                    out = nec_checks.table_vs_direct(spec, f, tabs, RECEIVERS, 36, solved=solved)
                    for a, r in out["axes"].items():
                        rows.append({"rim_in": f"{d_in:g}x{w_in:g}", "freq_mhz": f / 1e6, "belt": belt,
                                     "table": label if label != "shipped" else shipped[a].kind, "axis": a,
                                     "max_abs_err_db": r["max_abs_db"], "rms_err_db": r["rms_db"],
                                     "nec_swing_db": r["swing_db"]})
                print(f"tables {d_in:g}x{w_in:g} {f / 1e6:.2f} MHz belt={belt}: {time.time() - t0:.1f} s")
    _write("nec_wheel_tables_sweep.csv", rows)


def mesh() -> None:
    """Mesh convergence of the wheel model (17 x 7.5 in with belt): table mesh vs finer / coarser."""
    rows = []
    t = parse_tire_code("225/50R17")
    for f in (315e6, 433.92e6):
        lam = nm.C0_M_PER_S / f
        base = {"rim_diameter_m": 17 * INCH, "rim_width_m": 7.5 * INCH,
                "belt_radius_m": t.outer_radius_m - wp.BELT_DEPTH_M,
                "belt_width_m": wp.BELT_WIDTH_FRACTION * t.section_width_m}
        variants = [
            ("reference: 10 mm cells, rings 15 mm, lambda/30, belt lambda/20",
             {"refine_m": 0.01, "axial_spacing_m": 0.015}, lam / 30, lam / 20),
            ("tables: 15 mm cells, rings 20 mm, lambda/20", {}, lam / 20, lam / 20),
            ("belt at lambda/10", {}, lam / 20, lam / 10),
            ("rings 30 mm, lambda/12, belt lambda/10", {"axial_spacing_m": 0.03}, lam / 12, lam / 10),
        ]
        ref = None
        for label, kw, coarse, belt_sp in variants:
            spec = nm.WheelSpec(**base, **kw)
            model = nm.wheel(spec, coarse, belt_sp)
            solver = nm.NecSolver(model, f)
            pats = {a: nm.installed_pattern(solver, spec.sensor_position(0), wp.axis_vector(a)) for a in wp.AXES}
            d_db = {a: 10 * np.log10(np.abs(p["e_theta"]) ** 2 + np.abs(p["e_phi"]) ** 2) for a, p in pats.items()}
            if ref is None:
                ref = d_db
            for a in wp.AXES:
                sel = ref[a] > ref[a].max() - 15.0
                diff = (d_db[a] - ref[a])[sel]
                rows.append({"freq_mhz": f / 1e6, "mesh": label, "segments": model.segment_count, "axis": a,
                             "max_abs_diff_db": float(np.max(np.abs(diff))),
                             "rms_diff_db": float(np.sqrt(np.mean(diff**2))),
                             "power_ratio": float(pats[a]["power_ratio"])})
            print(f"mesh {f / 1e6:.2f} MHz {label}: {model.segment_count} segments")
    _write("nec_wheel_mesh_sweep.csv", rows)


if __name__ == "__main__":
    which = sys.argv[1:] or ["halfplane", "rim", "tables"]
    for name in which:
        {"halfplane": halfplane, "rim": rim, "tables": tables, "mesh": mesh}[name]()

"""Compute the installed wheel-pattern tables (NEC-2) and store them in core/data/wheel_patterns.npz.

For every rim size (diameter x width), band, and with and without the tire's steel belt, the
sensor dipole on its wire-grid wheel is solved once with NEC-2 (core/fullwave/nec_models.py, PyNEC from
the ``validation`` extra) and its installed far field over the whole sphere (5 deg grid) and the
near-field correction term (10 deg grid, sampled on a 1.5 m sphere) are stored for the three sensor
axes. The wheel is mirror-symmetric about its x = 0 plane (sensor midway between two spokes), so
only the x >= 0 half of each pattern is stored (azimuth -90..90 deg); the loader rebuilds the rest
(core.wheel_patterns.unfold_half). The symmetry is checked on every solve before the half is
dropped. Values are stored as float16 re/im pairs (about 0.004 dB resolution).

Usage (from the repository root; run it niced, it takes minutes):

    nice -n 10 python tools/make_wheel_patterns.py
    nice -n 10 python tools/make_wheel_patterns.py --diameters 15,17 --widths 6.5 --out /tmp/t.npz

The command line, date, solver and versions are written into the file and into the JSON next to it.

Tire for each rim diameter (the belt follows from it): a common passenger-car size per diameter
(common practice): 195/65R15, 205/55R16, 225/50R17, 235/45R18, 245/40R19, 255/40R20, 265/35R21,
275/35R22. Belt radius = outer radius - core.wheel_patterns.BELT_DEPTH_M, width =
BELT_WIDTH_FRACTION x section width.
"""

from __future__ import annotations

import argparse
import datetime as _dt
import json
import math
import platform
import shlex
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from core.fullwave import nec_models as nm
from core.tires import parse_tire_code
from core.wheel_patterns import AXES, BELT_DEPTH_M, BELT_WIDTH_FRACTION, MODEL_VERSION, _parity

INCH_M = 0.0254
TYPICAL_TIRES = {
    15: "195/65R15", 16: "205/55R16", 17: "225/50R17", 18: "235/45R18",
    19: "245/40R19", 20: "255/40R20", 21: "265/35R21", 22: "275/35R22",
}
DEFAULT_DIAMETERS = "15,17,19,21,22"
DEFAULT_WIDTHS = "6.5,7.5,8.5,9.5"
DEFAULT_BANDS = "315e6,433.92e6"


def belt_for(diameter_in: float) -> tuple[float, float, str]:
    """(belt radius m, belt width m, tire code) for a rim diameter, from the typical tire."""
    code = TYPICAL_TIRES[round(diameter_in)]
    t = parse_tire_code(code)
    return t.outer_radius_m - BELT_DEPTH_M, BELT_WIDTH_FRACTION * t.section_width_m, code


def half_indices(phi_deg: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Indices of azimuths -90..90 deg in a 0..360 grid, and those azimuths."""
    step = phi_deg[1] - phi_deg[0]
    half = np.arange(-90.0, 90.0 + 1e-9, step)
    idx = np.array([int(np.argmin(np.abs(((phi_deg - h) + 180.0) % 360.0 - 180.0))) for h in half])
    return idx, half


def symmetry_residual(e_t, e_p, near, phi, near_phi, parity: float) -> float:
    """Largest relative departure from the x = 0 mirror symmetry (see core.wheel_patterns.unfold_half)."""
    def mirror_idx(ph):
        return np.array([int(np.argmin(np.abs(((ph - (180.0 - p)) + 180.0) % 360.0 - 180.0))) for p in ph])

    m = mirror_idx(phi)
    scale = math.sqrt(float(np.max(np.abs(e_t) ** 2 + np.abs(e_p) ** 2)))
    r1 = np.max(np.abs(e_t[:, m] - parity * e_t)) / scale
    r2 = np.max(np.abs(e_p[:, m] + parity * e_p)) / scale
    mn = mirror_idx(near_phi)
    sgn = np.array([-1.0, 1.0, 1.0]) * parity
    nscale = float(np.max(np.abs(near)))
    r3 = np.max(np.abs(near[:, mn] - sgn * near)) / nscale
    return float(max(r1, r2, r3))


def to_f16(a: np.ndarray) -> np.ndarray:
    a = np.asarray(a)
    return np.stack([a.real, a.imag], axis=-1).astype(np.float16)


def write_json(npz_path: Path) -> Path:
    """Write the provenance JSON next to the table file (a readable copy of what the file holds)."""
    with np.load(npz_path, allow_pickle=False) as z:
        meta = json.loads(str(z["provenance"]))
        meta.update(
            file=npz_path.name, file_bytes=npz_path.stat().st_size,
            rim_diameter_in=[float(x) for x in z["rim_diameter_in"]],
            rim_width_in=[float(x) for x in z["rim_width_in"]], freq_hz=[float(x) for x in z["freq_hz"]],
            axes=[str(a) for a in z["axes"]], belt_variants=[bool(b) for b in z["belt"]],
            segments_min=int(z["segments"].min()), segments_max=int(z["segments"].max()),
        )
    path = npz_path.with_suffix(".json")
    path.write_text(json.dumps(meta, indent=2) + "\n")
    return path


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--diameters", default=DEFAULT_DIAMETERS, help="rim diameters, inch (comma list)")
    ap.add_argument("--widths", default=DEFAULT_WIDTHS, help="rim widths, inch (comma list)")
    ap.add_argument("--bands", default=DEFAULT_BANDS, help="frequencies, Hz (comma list)")
    ap.add_argument("--out", default=str(ROOT / "core" / "data" / "wheel_patterns.npz"))
    ap.add_argument("--step", type=float, default=5.0, help="far-field grid step, deg (default 5)")
    ap.add_argument("--rewrite-json", action="store_true", help="only rewrite the JSON next to --out")
    args = ap.parse_args(argv)
    if args.rewrite_json:
        print(f"wrote {write_json(Path(args.out))}")
        return 0

    diameters = [float(x) for x in args.diameters.split(",")]
    widths = [float(x) for x in args.widths.split(",")]
    bands = [float(x) for x in args.bands.split(",")]
    belts = [False, True]
    out = Path(args.out)
    command = "python " + " ".join(shlex.quote(a) for a in [str(Path(sys.argv[0]).as_posix())] + list(
        sys.argv[1:] if argv is None else argv))

    shape = (len(diameters), len(widths), len(bands), len(AXES), len(belts))
    far = near = None
    power = np.zeros(shape, np.float32)
    segments = np.zeros(shape[:3] + shape[4:], np.int32)
    s_r = np.zeros(shape[:2])
    s_o = np.zeros(shape[:2])
    belt_r = np.zeros(len(diameters))
    belt_w = np.zeros(len(diameters))
    tires = []
    worst_sym = 0.0
    t_start = time.time()
    n_done, n_total = 0, len(diameters) * len(widths) * len(bands) * len(belts)
    theta = phi = near_theta = near_phi = None
    notes_example = []
    for i, d_in in enumerate(diameters):
        br, bw, code = belt_for(d_in)
        belt_r[i], belt_w[i] = br, bw
        tires.append(code)
        for j, w_in in enumerate(widths):
            for f_i, f in enumerate(bands):
                for b_i, with_belt in enumerate(belts):
                    spec = nm.WheelSpec(d_in * INCH_M, w_in * INCH_M,
                                        belt_radius_m=br if with_belt else None, belt_width_m=bw)
                    s_r[i, j], s_o[i, j] = spec.sensor_radius, spec.sensor_offset
                    t0 = time.time()
                    res = nm.wheel_patterns(spec, f, step_deg=args.step)
                    if far is None:
                        theta, phi = res["theta_deg"], res["phi_deg"]
                        near_theta, near_phi = res["near_theta_deg"], res["near_phi_deg"]
                        idx, phi_half = half_indices(phi)
                        nidx, near_phi_half = half_indices(near_phi)
                        far = np.zeros(shape + (len(theta), len(idx), 2, 2), np.float16)
                        near = np.zeros(shape + (len(near_theta), len(nidx), 3, 2), np.float16)
                        notes_example = res["notes"]
                    segments[i, j, f_i, b_i] = res["segments"]
                    for a_i, axis in enumerate(AXES):
                        pat = res["patterns"][axis]
                        par = float(_parity([axis])[0])
                        sym = symmetry_residual(pat["e_theta"], pat["e_phi"], pat["near"], phi, near_phi, par)
                        worst_sym = max(worst_sym, sym)
                        if sym > 1e-3:
                            raise SystemExit(f"model not mirror-symmetric ({sym:.2e}) at {d_in} x {w_in} in, "
                                             f"{f / 1e6} MHz, {axis}: cannot store half patterns")
                        far[i, j, f_i, a_i, b_i] = to_f16(np.stack([pat["e_theta"][:, idx],
                                                                     pat["e_phi"][:, idx]], axis=-1))
                        near[i, j, f_i, a_i, b_i] = to_f16(pat["near"][:, nidx])
                        power[i, j, f_i, a_i, b_i] = pat["power_ratio"]
                    n_done += 1
                    print(f"[{n_done}/{n_total}] {d_in:g} x {w_in:g} in, {f / 1e6:.2f} MHz, "
                          f"{'belt' if with_belt else 'no belt'}: {res['segments']} segments, "
                          f"{time.time() - t0:.1f} s", flush=True)
    runtime = time.time() - t_start
    try:
        from importlib.metadata import PackageNotFoundError, version

        try:
            pynec_version = version("PyNEC")
        except PackageNotFoundError:
            pynec_version = "unknown"
    except ImportError:  # pragma: no cover - metadata missing
        pynec_version = "unknown"
    provenance = {
        "description": "Installed far-field patterns of a short sensor dipole on wire-grid wheels (NEC-2).",
        "solver": f"NEC-2 method of moments via PyNEC {pynec_version} (necpp)",
        "model_version": MODEL_VERSION,
        "command": command,
        "date_utc": _dt.datetime.now(_dt.UTC).strftime("%Y-%m-%dT%H:%M:%SZ"),
        "runtime_s": round(runtime, 1),
        "python": platform.python_version(),
        "numpy": np.__version__,
        "source": "elementary current source (NEC-2 EX type 4) + its analytic field; 1 A m",
        "grid_rules": (
            "coarse mesh lambda/20 (segment length <= lambda/10 rule, halved for the resonant rim and belt); "
            "15 mm cells within 30 mm of the sensor, growing to the coarse spacing; rings 20 mm apart; "
            "wire radius by the equal-area rule a = spacing/(2 pi) (Ludwig 1987), capped where necpp's "
            "overlap check or the segment/radius >= 2 limit requires; spokes 40 mm strips (radius w/4)"
        ),
        "wheel": (
            "barrel at bead-seat radius - drop-centre depth (core.wheel.DROP_CENTRE_DEPTH_M), flanges "
            "17.5 mm above the bead seat at both ends, outboard face: hub r = 80 mm and 5 spokes, sensor "
            "midway between two spokes at the bead-seat radius, a quarter rim width outboard"
        ),
        "belt": f"radius = tire outer radius - {BELT_DEPTH_M} m, width = {BELT_WIDTH_FRACTION} x section width",
        "tires": dict(zip([f"{d:g}" for d in diameters], tires)),
        "normalisation": "|E_t|^2 + |E_p|^2 = directivity (linear), integral over the sphere = 4 pi; phase "
                         "referred to the wheel centre; near term F1 in the same units x m",
        "storage": "float16 re/im; azimuths -90..90 deg only (x = 0 mirror symmetry; parity radial/axial +1, "
                   "tangential -1)",
        "symmetry_residual_max": worst_sym,
        "mesh_notes_first_model": notes_example,
        "near_radius_m": float(nm.NEAR_RADIUS_M),
    }
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = out.with_name(out.name + ".tmp.npz")
    np.savez_compressed(
        tmp,
        theta_deg=theta.astype(np.float32), phi_deg=phi.astype(np.float32),
        phi_half_deg=phi_half.astype(np.float32),
        near_theta_deg=near_theta.astype(np.float32), near_phi_deg=near_phi.astype(np.float32),
        near_phi_half_deg=near_phi_half.astype(np.float32), near_radius_m=np.float64(nm.NEAR_RADIUS_M),
        rim_diameter_in=np.array(diameters), rim_width_in=np.array(widths), freq_hz=np.array(bands),
        axes=np.array(AXES), belt=np.array(belts),
        far=far, near=near, power_ratio=power, segments=segments,
        sensor_radius_m=s_r, sensor_offset_m=s_o, belt_radius_m=belt_r, belt_width_m=belt_w,
        provenance=np.array(json.dumps(provenance)),
    )
    tmp.replace(out)
    write_json(out)
    print(f"wrote {out} ({out.stat().st_size / 1e6:.2f} MB) in {runtime / 60:.1f} min; "
          f"symmetry residual {worst_sym:.1e}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())

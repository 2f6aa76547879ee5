"""CLI command ``calibrate``: fit the model to a prototype's measured levels and write a calibration.

``wheelreach calibrate FILE MEAS.csv -o CALIBRATED.json`` reads the vehicle file and the measurement
file (docs/measurement-format.md), fits the parameters of core.calibration (core.calibration_fit),
prints the fitted values with their standard errors, the residual RMS before and after and the
k-fold hold-out over spots, and writes the calibration (docs/calibration-format.md) that ``rank``,
``heatmap``, ``report`` and ``compare`` take with ``--calibration``.
"""

from __future__ import annotations

import argparse
import time

from app.caution import CAUTION, print_safety_note
from app.cli import options
from core.calibration import PARAMETER_KEYS, PARAMETERS


def parameter_list(text: str) -> tuple[str, ...]:
    """argparse type: comma-separated parameter keys (core.calibration.PARAMETERS)."""
    keys = tuple(k.strip() for k in text.split(",") if k.strip())
    bad = [k for k in keys if k not in PARAMETER_KEYS]
    if not keys or bad:
        raise argparse.ArgumentTypeError(f"{text!r}: expected parameter names separated by commas from "
                                         f"{', '.join(PARAMETER_KEYS)}")
    if len(set(keys)) != len(keys):
        raise argparse.ArgumentTypeError(f"{text!r}: a parameter is named twice")
    return keys


def _cmd_calibrate(args) -> int:
    from core.calibration import save_calibration
    from core.calibration_fit import calibrate
    from core.files import check_outputs
    from core.measurements import load_measurements
    from core.provenance import load_with_source

    check_outputs({"-o": args.output}, [args.file, args.measurements])  # before any computing
    v, source = load_with_source(args.file)
    ms = load_measurements(args.measurements, v, args.file)
    params = PARAMETERS if args.parameters is None else tuple(p for p in PARAMETERS if p.key in args.parameters)
    t0 = time.perf_counter()
    run = calibrate(v, ms, source, params, folds=args.folds, wheel_model=args.wheel_model,
                    ground_reflection=False if args.no_ground else None,
                    command_line=getattr(args, "command_line", None), caution=CAUTION)
    seconds = time.perf_counter() - t0
    cal, fit, hold = run.calibration, run.fit, run.holdout
    s = ms.summary()
    freqs = ", ".join(f"{f / 1e6:.2f}" for f in s["frequencies_hz"])
    print(f"{v.name} ({v.body_style}): {s['rows']:,} measurements from {args.measurements} ({s['with_angle']:,} with "
          f"wheel angles, {s['without_angle']:,} without; {len(s['spots'])} spots, {len(s['wheels'])} wheels, "
          f"{freqs} MHz)")
    print(f"wheel model: {cal.model['wheel_model']}; road reflection {'on' if cal.model['ground_reflection'] else 'off'}")
    lw = max([len("parameter")] + [len(p.label) for p in cal.parameters])
    print(f"{'parameter':<{lw}} {'prior dB':>9} {'width':>6} {'fitted dB':>10} {'s.e.':>6} {'change':>7}  status")
    for p in cal.parameters:
        status = p.status(cal.labels())
        print(f"{p.label:<{lw}} {p.prior_db:9.2f} {p.prior_width_db:6.1f} {p.value_db:10.2f} {p.standard_error_db:6.2f} "
              f"{p.value_db - p.prior_db:+7.2f}  {status}")
    f = cal.fit
    print(f"residual RMS: {f.rms_before_db:.2f} dB uncalibrated, {f.rms_after_db:.2f} dB calibrated; noise scale "
          f"{f.noise_db:.2f} dB; {f.items_with_angle:,} levels with angles and {f.percentile_items:,} percentiles of "
          f"levels without angles")
    if hold is not None:
        print(f"hold-out ({hold.folds}-fold over spots): prediction RMS {hold.rms_before_db:.2f} dB uncalibrated, "
              f"{hold.rms_after_db:.2f} dB calibrated")
    else:
        print("hold-out: not possible with fewer than two measured spots")
    if not fit.success:
        print(f"warning: the solver stopped without converging: {fit.message}")
    print(f"fit and hold-out took {seconds:.2f} s")
    save_calibration(cal, args.output)
    print(f"wrote {args.output}: {cal.note()}")
    print_safety_note()
    return 0


def register(sub) -> None:
    c = sub.add_parser("calibrate", help="fit the model to measured levels of a prototype and write a calibration "
                                         "for --calibration")
    c.add_argument("file", help="the vehicle file measured")
    c.add_argument("measurements", metavar="MEAS.csv", help="measurement file (docs/measurement-format.md)")
    c.add_argument("-o", "--output", required=True, metavar="CALIBRATED.json", help="calibration file to write")
    c.add_argument("--folds", type=options.count(2, 50, "a number of folds"), default=5, metavar="K",
                   help="k of the k-fold hold-out over spots, 2-50 (default 5; at most the number of spots is used)")
    c.add_argument("--parameters", type=parameter_list, metavar="LIST",
                   help=f"the parameters to fit, separated by commas (default all: {', '.join(PARAMETER_KEYS)})")
    c.add_argument("--wheel-model", choices=["knife_edge", "installed_pattern"], help="override the file's wheel model")
    c.add_argument("--no-ground", action="store_true", help="leave out the road reflection")
    c.set_defaults(func=_cmd_calibrate)

"""CLI commands ``report`` (placement report PDF with CSV/JSON export) and ``compare`` (several bodies)."""

from __future__ import annotations

import sys

from app.caution import SAFETY_NOTE, print_safety_note
from app.cli import options
from app.cli.engine import (
    _Progress,
    add_calibration_option,
    add_progress_options,
    calibration_override,
    print_calibration,
)
from core.compare import LANDMARKS
from core.vehicle import MAX_BODY_HEIGHT_M


def _cmd_report(args) -> int:
    import os

    from core.files import check_outputs

    # every output path first, before Qt is even loaded (write_report checks them again for other callers)
    check_outputs({"-o": args.output, "--csv": args.csv, "--json": args.json}, [args.file, args.calibration])
    calibration = calibration_override(args)  # a bad calibration file stops here, before Qt is loaded
    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    from app.report.pdf import write_report

    show = args.progress or (sys.stderr.isatty() and not args.quiet)
    d, n = write_report(args.file, args.output, args.csv, args.json, step_m=args.step,
                        progress=_Progress(show, "spots and cells"), command_line=getattr(args, "command_line", None),
                        calibration=calibration)
    s = d.scores
    b = d.best_index()  # the best-ranked spot that is a receiver position (core.placement)
    if d.eirp_check.over_ceiling:
        print(d.eirp_check.warning())
    print(f"wrote {args.output}: {n} pages; {d.vehicle.name}; best spot '{s.names[b]}' at {s.margin_db[b]:+.1f} dB "
          f"(worst wheel {s.wheel_ids[s.worst_wheel[b]]})")
    if calibration:
        print_calibration({"calibration": calibration}, [d.vehicle])
    for p in (args.csv, args.json):
        if p:
            print(f"wrote {p}")
    print_safety_note()
    return 0


def _cmd_compare(args) -> int:
    from app.report.compare import comparison_csv, comparison_text
    from core.compare import NoSharedRegion, compare_bodies, search_common_position
    from core.files import atomic_write_text, check_outputs
    from core.scoring import Scene
    from core.vehicle import load_vehicle

    check_outputs({"-o": args.output, "--csv": args.csv}, [*args.files, args.calibration])  # before any computing
    vehicles = [load_vehicle(f) for f in args.files]  # a bad file stops here with its located message
    calibration = calibration_override(args)
    if calibration:  # the same calibration on every body (core.provenance.apply_overrides)
        from core.provenance import apply_overrides

        vehicles = [apply_overrides(v, {"calibration": calibration}, f) for v, f in zip(vehicles, args.files)]
    note = ""
    if calibration:
        from core.calibration import calibration_warnings

        note = f"Calibration {calibration['file']} applied to every body: {calibration['note']}"
        for v in vehicles:
            for w in calibration_warnings(v, calibration):
                note += f"\nWarning: {w}"
    scenes = [Scene.from_vehicle(v) for v in vehicles]
    c = compare_bodies(vehicles, scenes)
    search, err = None, ""
    if not args.no_search:
        try:
            search = search_common_position(vehicles, args.landmark, args.search_step, args.above_floor, scenes,
                                            progress=_Progress(args.progress or (sys.stderr.isatty() and not args.quiet),
                                                               "bodies"))
        except NoSharedRegion as e:
            err = str(e)
    text = comparison_text(c, search, err, vehicles, note)
    if text.endswith(SAFETY_NOTE):  # the note ends the text; here it is printed last, after the files
        text = text[: -len(SAFETY_NOTE)].rstrip("\n")
    print(text)
    if args.csv:
        atomic_write_text(args.csv, comparison_csv(c, search))
        print(f"wrote {args.csv}")
    if args.output:
        import os

        os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
        from app.report.compare import write_comparison_pdf

        n = write_comparison_pdf(args.output, vehicles, list(args.files), c, search, err, note)
        print(f"wrote {args.output}: {n} pages")
    print_safety_note()
    return 0


def register(sub) -> None:
    r = sub.add_parser("report", help="write the placement report of a vehicle file as PDF (and CSV/JSON data)")
    r.add_argument("file")
    r.add_argument("-o", "--output", required=True, metavar="OUT.pdf", help="PDF to write")
    r.add_argument("--csv", metavar="OUT.csv", help="also write the report's numbers as CSV")
    r.add_argument("--json", metavar="OUT.json", help="also write the report's numbers as JSON")
    r.add_argument("--step", type=options.step, default=0.05,
                   help=f"heatmap cell spacing, m, above 0 and at most {options.MAX_STEP_M:g} (default 0.05); the "
                        "report's heatmaps must fit the work limits (README, Limits)")
    add_calibration_option(r)
    add_progress_options(r)
    r.set_defaults(func=_cmd_report)
    c = sub.add_parser("compare", help="compare spots across several bodies; name the platform-common best spot")
    c.add_argument("files", nargs="+", metavar="FILE")
    c.add_argument("-o", "--output", metavar="OUT.pdf", help="also write the comparison as PDF")
    c.add_argument("--csv", metavar="OUT.csv", help="also write the table as CSV")
    c.add_argument("--landmark", choices=[x for x in LANDMARKS], default="rear_axle",
                   help="landmark the shared mounting region is measured from (default rear_axle)")
    c.add_argument("--above-floor", type=options.length(0.0, MAX_BODY_HEIGHT_M), metavar="H",
                   help=f"search at H m above each body's floor, 0-{MAX_BODY_HEIGHT_M:g} (default: each body's own "
                        "region height)")
    c.add_argument("--search-step", type=options.step, default=0.10,
                   help=f"grid spacing of the search, m, above 0 and at most {options.MAX_STEP_M:g} (default 0.10); "
                        "the search must fit the work limits (README, Limits)")
    c.add_argument("--no-search", action="store_true", help="skip the shared-region search")
    add_calibration_option(c)
    add_progress_options(c)
    c.set_defaults(func=_cmd_compare)

"""CLI commands of the engine: ``rank`` and ``heatmap``."""

from __future__ import annotations

import argparse
import json
import sys

import numpy as np

from app.caution import SAFETY_NOTE, print_safety_note
from app.cli import options
from app.report.rank_json import rank_document
from core.bounds import (
    MAX_ANGLES_PER_TURN,
    MAX_HEATMAP_CELLS,
    MIN_ANGLES_PER_TURN,
    check_heatmap_work,
    require_finite_heatmap,
    require_finite_scores,
)
from core.vehicle import MAX_BODY_HEIGHT_M, MAX_BODY_WIDTH_M, VehicleFileError


def _load_with_spots(args):
    """(vehicle with the command's overrides, its ``vehicle_file`` record, the overrides) - core.provenance.

    A problem the overrides cause names the file and the option (``--spot NAME``, ``--angles``)."""
    from core.calibration import CalibrationFileError
    from core.provenance import apply_overrides, load_with_source

    v, source = load_with_source(args.file)
    n_file = len(v.spots)
    extra = list(args.spot or ())  # Spot objects (app.cli.options.spot)
    overrides = {
        "angles_per_turn": getattr(args, "angles", None),
        "ground_reflection": False if getattr(args, "no_ground", False) else None,
        "wheel_model": getattr(args, "wheel_model", None),
        "extra_spots": [s.model_dump(mode="json", exclude_none=True) for s in extra],
        "calibration": calibration_override(args),
    }
    try:
        v = apply_overrides(v, overrides, args.file)
    except CalibrationFileError:
        raise  # names the calibration file
    except VehicleFileError as e:
        problem = e.problem
        if e.field.startswith("spots[") and extra:
            i = int(e.field[6:e.field.index("]")])
            if i >= n_file:  # a spot of the command line
                problem = f"--spot {extra[i - n_file].name!r}: {problem}"
        elif e.field == "spots" or e.field == "radio.angles_per_turn":
            problem = f"with the command line's --spot/--angles: {problem}"
        raise VehicleFileError(problem, e.field, args.file) from None
    return v, source, overrides


def calibration_override(args) -> dict | None:
    """The ``overrides.calibration`` record of ``--calibration FILE`` (None without it); a bad file raises
    core.calibration.CalibrationFileError naming it."""
    path = getattr(args, "calibration", None)
    if not path:
        return None
    from core.calibration import calibration_record

    return calibration_record(path)[1]


def print_calibration(overrides: dict, vehicles=()) -> None:
    """One line naming the calibration applied, and a warning line for each of ``vehicles`` it may not
    fit (core.calibration.calibration_warnings); nothing without a calibration."""
    rec = overrides.get("calibration")
    if rec:
        from core.calibration import calibration_warnings

        values = ", ".join(f"{k} {x:.2f}" for k, x in rec["values"].items()) or "no value (none was informed)"
        print(f"calibration {rec['file']}: {rec['note']}; applied: {values}")
        for v in vehicles:
            for w in calibration_warnings(v, rec):
                print(f"warning: {w}")


def _setup(args, v, scene, source, overrides, extra=None) -> dict:
    from core.provenance import setup_record

    return setup_record(v, scene, source, getattr(args, "command_line", None), overrides, extra)


def _show_progress(args) -> bool:
    return args.progress or (sys.stderr.isatty() and not args.quiet)


def _cmd_rank(args) -> int:
    from core.defence import defend
    from core.regulatory import check_sensor_eirp
    from core.scoring import Scene, score_vehicle, tie_note, vehicle_spot_arrays

    v, source, overrides = _load_with_spots(args)
    if not v.spots:
        print(f"error: {args.file}: spots: the file has no receiver spots; add some with --spot NAME=X,Y,Z",
              file=sys.stderr)
        return 1
    names = [s.name for s in v.spots]
    if args.explain is not None and args.explain not in names:
        print(f"error: {args.file}: --explain: no spot named {args.explain!r} (spots: "
              f"{', '.join(repr(n) for n in names)})", file=sys.stderr)
        return 1
    from core.placement import classify

    scene = Scene.from_vehicle(v)
    scores = score_vehicle(v, scene, progress=_Progress(_show_progress(args), "spots"))
    require_finite_scores(scores, args.file)
    placement = classify(scene, scores.positions)
    _, _, axes = vehicle_spot_arrays(v)
    if args.explain is not None:
        return _explain(args, v, scene, scores, axes, names.index(args.explain))
    defence = defend(scene, scores, axes)
    if args.json:
        doc = rank_document(v, scores, _setup(args, v, scene, source, overrides), placement, defence=defence)
        json.dump({**doc, "caution": SAFETY_NOTE}, sys.stdout, indent=1)  # streamed: no copy of the whole text
        print()
        return 0
    check = check_sensor_eirp(v.radio)
    if check.over_ceiling:
        print(check.warning())
    print(f"{v.name} ({v.body_style}), {v.radio.frequency_hz / 1e6:.2f} MHz, sensitivity "
          f"{scores.sensitivity_dbm:.1f} dBm, required margin {scores.required_margin_db:.1f} dB, "
          f"{len(scores.angles_deg)} angles per turn, wheel model: {scene.wheel_model_label}")
    print(f"worst case: {scene.score_method}")
    print_calibration(overrides, [v])
    if not check.over_ceiling:
        print(f"radio limit: {check.summary()}")
    at = f" {'at ceiling':>10}" if check.over_ceiling else ""
    print(f"{'rank':>4}  {'spot':<24} {'x m':>7} {'y m':>7} {'z m':>7} {'axis':<15} {'margin dB':>10}{at} "
          f"{'P(pass)':>7}  {'worst wheel':<11} {'at deg':>6}  placement")
    for rank, i in enumerate(scores.order(), 1):
        x, y, z = scores.positions[i]
        w = scores.worst_wheel[i]
        flag = placement.flag(i) or "ok"
        if scores.near_field[i]:
            flag += ", near field"
        at = f" {float(check.margin_at_ceiling_db(scores.margin_db[i])):10.1f}" if check.over_ceiling else ""
        axis = "(" + ",".join(f"{a:.2g}" for a in axes[i]) + ")"
        p = defence.p_pass(i)
        print(f"{rank:>4}  {scores.names[i]:<24} {x:7.3f} {y:7.3f} {z:7.3f} {axis:<15} {scores.margin_db[i]:10.1f}{at} "
              f"{100 * p:6.0f}%  {scores.wheel_ids[w]:<11} {scores.worst_angle_deg[i, w]:6.0f}  {flag}")
    for i, msg in placement.messages():
        print(f"warning: spots[{i}] {scores.names[i]!r}: {msg}")
    note = tie_note(scores, scores.tied_with_best(placement.candidate))
    if note:
        print(f"not ranked apart: {note}")
    print(f"P(pass): share of {defence.cases[0].sensitivity.draws} Monte-Carlo draws of the uncertain inputs with "
          f"margin >= 0 dB; the inputs, ranges and a spot's link budget: rank FILE --explain SPOT")
    print_safety_note()
    return 0


def _explain(args, v, scene, scores, axes, i: int) -> int:
    """``rank FILE --explain SPOT``: the spot's budget by term, its tornado, P(pass) and what to measure first."""
    from app.cli.explain import explain_text
    from core.defence import defend

    d = defend(scene, scores, axes, [i])
    own = v.spots[i].axis is not None
    print(explain_text(v, scores, i, d.cases[i], axes[i], "the spot's own" if own else "the radio's default",
                       d.inputs))
    print_safety_note()
    return 0


class _Progress:
    """A text progress bar on stderr for long work (``unit``: what is counted)."""

    def __init__(self, enabled: bool, unit: str = "spots"):
        self.enabled = enabled
        self.unit = unit

    def __call__(self, done: int, total: int) -> None:
        if not self.enabled:
            return
        n = 30
        k = int(n * done / max(total, 1))
        sys.stderr.write(f"\r[{'#' * k}{'.' * (n - k)}] {done}/{total} {self.unit}")
        if done >= total:
            sys.stderr.write("\n")
        sys.stderr.flush()


def _cmd_heatmap(args) -> int:
    from core.files import atomic_write_text, check_outputs
    from core.provenance import csv_preamble
    from core.regulatory import check_sensor_eirp
    from core.scoring import Scene, heatmap
    from core.vehicle import Region

    check_outputs({"--csv": args.csv}, [args.file, getattr(args, "calibration", None)])  # before any computing
    v, source, overrides = _load_with_spots(args)
    regions = [r for r in v.regions if r.view == args.view]
    if args.region:
        regions = [r for r in regions if r.name == args.region]
    if not regions:
        print(f"error: {args.file}: regions: no {args.view}-view region"
              + (f" named {args.region!r}" if args.region else ""), file=sys.stderr)
        return 1
    region = regions[0]
    if args.view == "top" and args.height is not None:
        region = Region(**{**region.model_dump(), "height_m": args.height})
    if args.view == "side" and args.y is not None:
        region = Region(**{**region.model_dump(), "lateral_m": args.y})
    scene = Scene.from_vehicle(v)
    check_heatmap_work([region], args.step, len(scene.wheels), len(scene.angles_rad),
                       what=f"{args.file}: heatmap of region {region.name!r}")
    hm = heatmap(scene, region, args.step, progress=_Progress(_show_progress(args), "cells"))
    require_finite_heatmap(hm, region.name, args.file)
    check = check_sensor_eirp(v.radio)
    fixed = "z" if hm.view == "top" else "y"
    ok, cells = hm.meeting(0.0)
    excluded = ", ".join(f"{n} {why}" for why, n in hm.excluded().items() if n)
    if check.over_ceiling:
        ok_c, _ = hm.meeting(check.margin_shift_db)
        print(check.warning() + f" At the ceiling {ok_c} of {cells} computed cells meet the margin.")
    print(f"{v.name}: {region.name!r}, {hm.view} view at {fixed} = {hm.fixed_m:.3f} m, step {args.step * 1000:.0f} mm, "
          f"{cells} cells computed, {ok} with margin >= 0 dB ({100.0 * ok / max(cells, 1):.0f} % of the computed cells)")
    if excluded:
        print(f"not computed (not a receiver position): {excluded}")
    print_calibration(overrides, [v])
    at = f" {'at ceiling':>10}" if check.over_ceiling else ""
    print(f"{'x m':>7} {'y m':>7} {'z m':>7} {'margin dB':>10}{at}  worst wheel")
    for x, y, z, m, w in hm.best_cells(args.top):
        at = f" {float(check.margin_at_ceiling_db(m)):10.1f}" if check.over_ceiling else ""
        print(f"{x:7.3f} {y:7.3f} {z:7.3f} {m:10.1f}{at}  {scene.wheel_ids[w]}")
    if args.csv:
        axis = np.asarray(v.radio.receiver.axis, float)
        grid = {"heatmap": {"region": region.name, "view": hm.view, "fixed_coordinate": fixed,
                            "fixed_m": round(float(hm.fixed_m), 4), "step_m": args.step,
                            "receiver_axis": [round(float(a), 6) for a in axis / np.linalg.norm(axis)]}}
        lines = [csv_preamble(check, _setup(args, v, scene, source, overrides, grid)) +
                 "x_m,y_m,z_m,margin_db,worst_wheel,margin_at_ceiling_db"]
        pts = hm.points().reshape(-1, 3)
        at_ceiling = check.margin_at_ceiling_db(hm.margin_db).reshape(-1)
        for p, m, w, mc in zip(pts, hm.margin_db.reshape(-1), hm.worst_wheel.reshape(-1), at_ceiling):
            if np.isfinite(m):
                lines.append(f"{p[0]:.4f},{p[1]:.4f},{p[2]:.4f},{m:.3f},{scene.wheel_ids[w]},{mc:.3f}")
        atomic_write_text(args.csv, "\n".join(lines) + "\n")
        print(f"wrote {args.csv}")
    print_safety_note()
    return 0


def add_progress_options(p) -> None:
    """--progress / --quiet (one or the other): the progress bar on stderr, shown by default on a terminal."""
    g = p.add_mutually_exclusive_group()
    g.add_argument("--progress", action="store_true", help="show a progress bar on stderr even when not on a terminal")
    g.add_argument("--quiet", action="store_true", help="no progress bar")


def add_calibration_option(p) -> None:
    p.add_argument("--calibration", metavar="C.json",
                   help="apply a calibration written by 'wheelreach calibrate' (fitted losses, EIRP offset, null floor)")


def register(sub) -> None:
    angles_help = (f"wheel angles per turn, {MIN_ANGLES_PER_TURN}-{MAX_ANGLES_PER_TURN} "
                   "(default: the file's)")
    r = sub.add_parser("rank", help="rank the receiver spots by worst-case link margin")
    r.add_argument("file")
    r.add_argument("--spot", action="append", type=options.spot, metavar="NAME=X,Y,Z",
                   help="add a spot (m, vehicle axes)")
    r.add_argument("--angles", type=options.angles, metavar="N", help=angles_help)
    r.add_argument("--no-ground", action="store_true", help="leave out the road reflection")
    r.add_argument("--wheel-model", choices=["knife_edge", "installed_pattern"], help="override the file's wheel model")
    r.add_argument("--json", action="store_true", help="print the ranking as JSON with per-angle levels, link "
                                                       "budgets by term, tornado and P(pass) per spot")
    r.add_argument("--explain", metavar="SPOT", help="print one spot's link budget by term (worst and median angle), "
                                                     "what its margin depends on, P(pass) and what to measure first")
    add_calibration_option(r)
    add_progress_options(r)
    r.set_defaults(func=_cmd_rank)
    h = sub.add_parser("heatmap", help="link margin over a mounting region grid")
    h.add_argument("file")
    h.add_argument("--view", choices=["top", "side"], default="top")
    h.add_argument("--region", help="region name (default: the first of the view)")
    h.add_argument("--step", type=options.step, default=0.05,
                   help=f"cell spacing, m, above 0 and at most {options.MAX_STEP_M:g} (default 0.05); the grid "
                        "must fit the work limits (README, Limits)")
    h.add_argument("--height", type=options.length(0.0, MAX_BODY_HEIGHT_M), metavar="Z",
                   help=f"top view: height z of the grid, m, 0-{MAX_BODY_HEIGHT_M:g} (default: the region's)")
    h.add_argument("--y", type=options.length(-MAX_BODY_WIDTH_M, MAX_BODY_WIDTH_M), metavar="Y",
                   help="side view: lateral position y of the grid, m (default: the region's)")
    h.add_argument("--top", type=options.count(1, MAX_HEATMAP_CELLS), default=10, metavar="N",
                   help="how many best cells to print (default 10)")
    h.add_argument("--csv", metavar="OUT.csv", help="write every cell to a CSV file")
    add_calibration_option(h)
    add_progress_options(h)
    h.add_argument("--spot", action="append", type=options.spot, help=argparse.SUPPRESS)
    h.add_argument("--angles", type=options.angles, metavar="N", help=angles_help)
    h.add_argument("--no-ground", action="store_true", help="leave out the road reflection")
    h.add_argument("--wheel-model", choices=["knife_edge", "installed_pattern"])
    h.set_defaults(func=_cmd_heatmap)

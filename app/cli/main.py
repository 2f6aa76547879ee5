"""Command line: ``wheelreach`` (GUI), ``check``, ``schema``, and the batch commands.

A bad option value prints one line and exits with status 2 (app.cli.options); a bad vehicle,
measurement or calibration file, a bad output path, or work beyond a documented limit (core.bounds) prints one located line and
exits with status 1; never a traceback.
"""

from __future__ import annotations

import argparse
import json
import sys

from app.cli.options import Parser
from core.body_import import BodyImportError
from core.bounds import NonFiniteResultError, WorkLimitError
from core.files import install_signal_cleanup
from core.measurements import MeasurementFileError
from core.vehicle import VehicleFileError, json_schema, load_vehicle


def _cmd_check(args) -> int:
    """One line per file, then one ``warn`` line per spot that is not a clean candidate position
    (core.placement: outside the body, in a wheelhouse, or nearer a panel than the mounting
    clearance). Warnings leave the exit status alone: the file is valid, the spot is the user's call."""
    from core.placement import classify
    from core.scoring import Scene, vehicle_spot_arrays

    bad = 0
    for f in args.files:
        try:
            v = load_vehicle(f)
        except VehicleFileError as e:
            print(f"FAIL {e}")
            bad += 1
            continue
        print(
            f"ok   {f}: {v.name} ({v.body_style}), {len(v.wheels)} wheels, {len(v.spots)} spots, "
            f"{len(v.zones)} zones, {v.radio.frequency_hz / 1e6:.2f} MHz"
        )
        if v.spots:
            names, pos, _ = vehicle_spot_arrays(v)
            placement = classify(Scene.from_vehicle(v), pos)
            for i, msg in placement.messages():
                print(f"warn {f}: spots[{i}] {names[i]!r}: {msg}")
    return 1 if bad else 0


def _cmd_schema(args) -> int:
    if args.format == "measurements":
        from core.measurements import measurement_schema as schema
    elif args.format == "calibration":
        from core.calibration import calibration_schema as schema
    else:
        schema = json_schema
    print(json.dumps(schema(), indent=2))
    return 0


def _cmd_gui(args) -> int:
    from core.files import check_outputs

    check_outputs({"--screenshot": args.screenshot}, [args.file])  # OutputPathError: one line, exit 1
    from app.gui.main import run_gui

    return run_gui(args.file, screenshot=getattr(args, "screenshot", None))


def build_parser() -> argparse.ArgumentParser:
    p = Parser(
        prog="wheelreach",
        description="Placement aid for tire-pressure sensor receivers. With no command, opens the desktop program.",
    )
    sub = p.add_subparsers(dest="command", metavar="COMMAND")
    g = sub.add_parser("gui", help="open the desktop program (the default when no command is given)")
    g.add_argument("file", nargs="?", default=None, help="vehicle file to open (default: the sample sedan)")
    g.add_argument("--screenshot", metavar="OUT.png", help="render the main window offscreen to a PNG and exit")
    g.set_defaults(func=_cmd_gui)
    c = sub.add_parser("check", help="validate vehicle files; one line per file, a warning line per spot outside "
                                     "the body, in a wheelhouse or on a panel; exit 1 if any file is bad")
    c.add_argument("files", nargs="+")
    c.set_defaults(func=_cmd_check)
    s = sub.add_parser("schema", help="print the JSON Schema of the vehicle file format (or of a measurement-file row, "
                                      "or of the calibration file)")
    s.add_argument("format", nargs="?", choices=["vehicle", "measurements", "calibration"], default="vehicle",
                   help="which format (default vehicle)")
    s.set_defaults(func=_cmd_schema)
    _register_more(sub)
    return p


def _register_more(sub) -> None:
    """Commands of the engine, benchmark and report modules (registered when present)."""
    import importlib

    for mod in ("app.cli.engine", "app.cli.bench", "app.cli.report", "app.cli.confirm", "app.cli.body",
                "app.cli.calibrate"):
        try:
            m = importlib.import_module(mod)
        except ModuleNotFoundError as e:
            if e.name == mod:
                continue
            raise
        m.register(sub)


def main(argv: list[str] | None = None) -> int:
    argv = sys.argv[1:] if argv is None else argv
    parser = build_parser()
    # "wheelreach [FILE] [--screenshot OUT]" opens the GUI; a first word that is a command runs it.
    commands = set(parser._subparsers._group_actions[0].choices)
    if not argv or (argv[0] not in commands and argv[0] not in ("-h", "--help")):
        argv = ["gui", *argv]
    args = parser.parse_args(argv)
    args.command_line = ["wheelreach", *argv]  # recorded in every output's setup (core.provenance)
    if args.command != "gui":  # batch commands: SIGTERM/SIGHUP end through SystemExit, temporary files removed
        install_signal_cleanup()
    try:
        return args.func(args)
    except (VehicleFileError, MeasurementFileError, WorkLimitError, NonFiniteResultError, BodyImportError) as e:
        print(f"error: {e}", file=sys.stderr)
        return 1
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:  # output piped into e.g. head
        sys.stderr.close()
        return 0
    except OSError as e:  # an output path refused before computing (core.files), or a write that failed
        print(f"error: {e}", file=sys.stderr)
        return 1


if __name__ == "__main__":
    sys.exit(main())

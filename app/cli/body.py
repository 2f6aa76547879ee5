"""``wheelreach import-body``: body outlines and zones from DXF/SVG drawings into a vehicle file.

The drawing work is core.body_import; this module parses the options, prints one line per outline
(points read and kept, the largest deviation, units and what was ignored) and writes the vehicle
file atomically (core.vehicle.atomic_write_text), only after the whole result validated.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from core.samples import SAMPLES_DIR

from app.cli import options
from core.body_import import UNITS_M, BodyImportError, Placement, Source, apply_outlines, import_outline, import_zone
from core.body_import import parse_source as _split
from core.files import check_outputs
from core.vehicle import atomic_write_text, load_vehicle, vehicle_to_json


def _pair(text: str) -> tuple[float, float]:
    parts = text.split(",")
    if len(parts) != 2:
        raise argparse.ArgumentTypeError(f"expected two numbers U,V, not {text!r}")
    return options._number(parts[0]), options._number(parts[1])


def _zone(text: str) -> tuple[str, str, str, str]:
    """NAME,VIEW,MATERIAL=DRAWING[:SELECTION]"""
    head, eq, src = text.partition("=")
    parts = head.split(",")
    if not eq or len(parts) != 3 or not src or not all(parts):
        raise argparse.ArgumentTypeError(f"expected NAME,VIEW,MATERIAL=DRAWING[:LAYER_OR_ID], not {text!r}")
    if parts[1] not in ("top", "side"):
        raise argparse.ArgumentTypeError(f"the zone view must be top or side, not {parts[1]!r}")
    return parts[0], parts[1], parts[2], src


def _positive(text: str) -> float:
    x = options._number(text)
    if x <= 0:
        raise argparse.ArgumentTypeError(f"must be above 0, not {text}")
    return x


def _placement(args, view: str) -> Placement:
    units = getattr(args, f"{view}_units") or args.units
    scale = getattr(args, f"{view}_mm_per_unit")
    return Placement(units=units, m_per_unit=(scale / 1000.0 if scale else None),
                     ref=getattr(args, f"{view}_ref"), ref_at=getattr(args, f"{view}_ref_at"),
                     front=getattr(args, f"{view}_front") or args.front)


def _source(text: str, placement: Placement) -> Source:
    path, sel = _split(text)
    return Source(path, sel, placement)


def _base(args):
    if args.base is None:
        if not Path(args.file).exists():
            raise BodyImportError(f"{args.file}: no such vehicle file; give --from BASE.json (or a sample name such "
                                  f"as sedan) to start a new one")
        return load_vehicle(args.file)
    p = Path(args.base)
    if not p.exists() and (SAMPLES_DIR / f"{args.base}.json").exists():
        p = SAMPLES_DIR / f"{args.base}.json"
    return load_vehicle(p)


def _cmd_import_body(args) -> int:
    if not (args.top or args.side or args.zone):
        raise BodyImportError("nothing to import: give --top, --side or --zone")
    check_outputs({"FILE": args.file}, [])
    v = _base(args)
    top = import_outline(_source(args.top, _placement(args, "top")), "top") if args.top else None
    side = import_outline(_source(args.side, _placement(args, "side")), "side") if args.side else None
    zones = tuple((name, material, import_zone(_source(src, _placement(args, view)), view))
                  for name, view, material, src in (args.zone or []))
    for imp in [top, side, *(z[2] for z in zones)]:
        if imp is not None:
            print(f"{imp.summary()}; {'; '.join(imp.notes)}")
    new = apply_outlines(v, top=top, side=side, zones=zones)
    if args.dry_run:
        print(f"checked: {v.name} with the imported outlines is a valid vehicle; nothing written (--dry-run)")
        return 0
    atomic_write_text(Path(args.file), vehicle_to_json(new))
    print(f"wrote {args.file}")
    return 0


def register(sub) -> None:
    units = ", ".join(UNITS_M)
    b = sub.add_parser(
        "import-body",
        help="read body outlines (and zones) from DXF or SVG drawings into a vehicle file",
        description="Read the top and side outlines of the body from drawings: a DXF layer or an SVG element id "
                    "(DRAWING:LAYER or DRAWING:ID; without it, the whole drawing). The largest closed contour is "
                    "used, converted to m, moved so that the reference point lands at its stated vehicle position, "
                    "turned so that the drawing's front is +x, simplified to the format's point limit, and checked "
                    "like a loaded file before FILE is written (atomically).")
    b.add_argument("file", metavar="FILE.json", help="vehicle file to update (or to create with --from)")
    b.add_argument("--from", dest="base", metavar="BASE.json",
                   help="start from this vehicle file or sample name (wheels, spots, radio) and write FILE.json")
    b.add_argument("--top", metavar="DRAWING[:LAYER_OR_ID]", help="top-view (plan) outline")
    b.add_argument("--side", metavar="DRAWING[:LAYER_OR_ID]", help="side-view outline")
    b.add_argument("--zone", action="append", type=_zone, metavar="NAME,VIEW,MATERIAL=DRAWING[:LAYER_OR_ID]",
                   help="a zone outline (repeatable); replaces a zone of the same name and view")
    b.add_argument("--units", choices=list(UNITS_M),
                   help=f"drawing units of every drawing ({units}); default: the file's own (DXF $INSUNITS, "
                        "SVG width over viewBox)")
    b.add_argument("--top-units", choices=list(UNITS_M), help="drawing units of the top view only")
    b.add_argument("--side-units", choices=list(UNITS_M), help="drawing units of the side view only")
    b.add_argument("--front", choices=["left", "right"], default="right",
                   help="where the vehicle's front points in the drawings (default right); a top view is seen "
                        "from above")
    for view, axes in (("top", "X,Y"), ("side", "X,Z")):
        b.add_argument(f"--{view}-front", choices=["left", "right"], help=f"--front for the {view} drawing only")
        b.add_argument(f"--{view}-mm-per-unit", type=_positive, metavar="MM",
                       help=f"scale of the {view} drawing (and its zones): mm per drawing unit (overrides units)")
        b.add_argument(f"--{view}-ref", type=_pair, default=(0.0, 0.0), metavar="U,V",
                       help=f"reference point in the {view} drawing, drawing units (default its origin 0,0), "
                            "e.g. the front axle centre")
        b.add_argument(f"--{view}-ref-at", type=_pair, default=(0.0, 0.0), metavar=axes,
                       help=f"where the {view} reference point lies in vehicle axes, m (default 0,0: "
                            "on the ground below the front axle's midpoint)")
    b.add_argument("--dry-run", action="store_true", help="import and check, print, write nothing")
    b.set_defaults(func=_cmd_import_body)

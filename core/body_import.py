"""Body outlines from drawings: DXF (ezdxf) and SVG (svgpathtools) to vehicle-file outlines, m.

A drawing gives closed contours in its own units and axes. This module

1. reads the contours of the chosen layer (DXF) or element id (SVG): DXF LWPOLYLINE, POLYLINE,
   SPLINE, LINE, ARC, CIRCLE, ELLIPSE and block INSERTs (curves flattened by ezdxf.path, loose
   pieces chained end to end); SVG path, polygon, polyline, line, rect, circle, ellipse with every
   ``transform`` of the element and its groups applied (svgpathtools.Document);
2. takes the largest closed contour of the selection as the outline;
3. converts the file's units to metres (DXF ``$INSUNITS``; SVG user units by the unit the user
   states, or by the root's physical ``width`` over its ``viewBox`` width);
4. places it in vehicle axes (docs/vehicle-format.md, ISO 8855: x forward, y left, z up, origin on
   the ground below the front axle's midpoint): the drawing's reference point goes to a stated vehicle
   position, the drawing's "front" (left or right) becomes +x, drawing up is +z in a side view; a top
   view is seen from above, so drawing up is +y (the car's left) when the front points right and -y
   when it points left (a half turn, never a mirror image);
5. simplifies it to the vertex budget of the vehicle format (core.bounds) with shapely, reporting the
   largest deviation from the drawn contour;
6. leaves validation to core.vehicle (``apply_outlines`` rebuilds the vehicle through
   ``vehicle_from_dict``: crossing, size and wheel checks exactly as for a loaded file).

Every failure raises :class:`BodyImportError` naming the file, the selection and what is wrong.
Lengths in metres unless a name says otherwise.
"""

from __future__ import annotations

import functools
import io
import math
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Literal

import numpy as np
import shapely
from shapely.geometry import LinearRing, Polygon

from core.bounds import MAX_BODY_OUTLINE_POINTS, MAX_OUTLINE_POINTS
from core.files import InputFileError, read_regular_file
from core.vehicle import Vehicle, VehicleFileError, vehicle_from_dict, vehicle_to_dict

View = Literal["top", "side"]
Front = Literal["left", "right"]

#: metres per drawing unit, by the unit names accepted from the user
UNITS_M: dict[str, float] = {
    "mm": 1e-3,
    "cm": 1e-2,
    "m": 1.0,
    "in": 0.0254,
    "ft": 0.3048,
    "px": 0.0254 / 96.0,  # CSS pixel, 1/96 in (W3C CSS Values and Units, absolute lengths)
}
#: DXF header $INSUNITS codes with the unit names above (AutoCAD DXF reference, HEADER section)
DXF_INSUNITS: dict[int, str] = {1: "in", 2: "ft", 4: "mm", 5: "cm", 6: "m"}
#: largest drawing read, bytes
MAX_DRAWING_BYTES = 50_000_000
#: curves are flattened to this fraction of the drawing's extent before simplification
FLATTEN_FRACTION = 1e-4
#: loose pieces whose ends lie closer than this fraction of the drawing's extent are joined
JOIN_FRACTION = 1e-6


class BodyImportError(ValueError):
    """A drawing cannot be imported; the message names the file, the selection and the problem."""


@dataclass(frozen=True)
class Placement:
    """How drawing coordinates become vehicle coordinates.

    units : a name of UNITS_M, or None for the file's own (DXF $INSUNITS, SVG width/viewBox)
    m_per_unit : metres per drawing unit; overrides ``units`` (e.g. a scanned drawing's scale)
    ref : the reference point in drawing units (default the drawing's origin)
    ref_at : where the reference point lies in the view's vehicle axes, m ((x, y) top, (x, z) side)
    front : where the vehicle's front points in the drawing
    """

    units: str | None = None
    m_per_unit: float | None = None
    ref: tuple[float, float] = (0.0, 0.0)
    ref_at: tuple[float, float] = (0.0, 0.0)
    front: Front = "right"


@dataclass(frozen=True)
class Source:
    """One outline to import: a drawing file and the layer (DXF) or element id (SVG) to read."""

    path: Path
    select: str | None = None
    placement: Placement = field(default_factory=Placement)

    @property
    def kind(self) -> str:
        ext = Path(self.path).suffix.lower()
        if ext == ".dxf":
            return "dxf"
        if ext == ".svg":
            return "svg"
        raise BodyImportError(f"{self.path}: not a DXF or SVG drawing (the name must end in .dxf or .svg)")

    def label(self) -> str:
        what = {"dxf": "layer", "svg": "id"}.get(Path(self.path).suffix.lower()[1:], "selection")
        return f"{Path(self.path).name}" + (f" ({what} {self.select!r})" if self.select else "")


@dataclass(frozen=True)
class Imported:
    """An outline in vehicle axes, m: (x, y) for the top view, (x, z) for the side view.

    points_read : points of the drawn contour after flattening curves
    deviation_m : largest distance between the drawn contour and the kept points (Hausdorff), m
    notes : what was assumed or ignored, for the user and the setup record
    """

    view: View
    points: np.ndarray
    source: str
    points_read: int
    deviation_m: float
    notes: tuple[str, ...] = ()

    def summary(self) -> str:
        ext = np.ptp(self.points, axis=0)
        size = f"{ext[0]:.3f} m long, {ext[1]:.3f} m {'wide' if self.view == 'top' else 'high'}"
        return (f"{self.view} outline from {self.source}: {size}; {self.points_read} points read, {len(self.points)} "
                f"kept, largest deviation {self.deviation_m * 1000:.1f} mm")


# ----- reading ---------------------------------------------------------------------------------
def parse_source(text: str) -> tuple[Path, str | None]:
    """``FILE`` or ``FILE:SELECTION`` (layer or id); an existing file name containing ':' is kept whole."""
    if Path(text).exists() or ":" not in text:
        return Path(text), None
    name, _, sel = text.rpartition(":")
    if not sel or "/" in sel or "\\" in sel:
        return Path(text), None
    return Path(name), sel


def _read(path: Path) -> bytes:
    try:
        return read_regular_file(path, MAX_DRAWING_BYTES)
    except InputFileError as e:
        raise BodyImportError(f"{path}: {e.problem}") from None
    except OSError as e:
        raise BodyImportError(f"{path}: cannot read the file: {e.strerror or e}") from None


def _chain(pieces: list[np.ndarray], tol: float) -> tuple[list[np.ndarray], list[np.ndarray]]:
    """Join open pieces end to end (reversing where needed); returns (closed contours, open chains)."""
    closed, open_ = [], []
    todo = [p for p in pieces if len(p) >= 2]
    while todo:
        cur = todo.pop(0)
        grown = True
        while grown and np.linalg.norm(cur[-1] - cur[0]) > tol:
            grown = False
            for k, p in enumerate(todo):
                if np.linalg.norm(p[0] - cur[-1]) <= tol:
                    cur = np.vstack([cur, p[1:]])
                elif np.linalg.norm(p[-1] - cur[-1]) <= tol:
                    cur = np.vstack([cur, p[::-1][1:]])
                elif np.linalg.norm(p[-1] - cur[0]) <= tol:
                    cur = np.vstack([p, cur[1:]])
                elif np.linalg.norm(p[0] - cur[0]) <= tol:
                    cur = np.vstack([p[::-1], cur[1:]])
                else:
                    continue
                todo.pop(k)
                grown = True
                break
        if len(cur) >= 4 and np.linalg.norm(cur[-1] - cur[0]) <= tol:
            closed.append(cur[:-1])
        else:
            open_.append(cur)
    return closed, open_


def _extent(pieces: list[np.ndarray]) -> float:
    pts = np.vstack(pieces)
    return max(float(np.ptp(pts, axis=0).max()), 1e-12)


def _dxf_entities(entities):
    for e in entities:
        if e.dxftype() == "INSERT":
            yield from _dxf_entities(list(e.virtual_entities()))
        else:
            yield e


def _dxf_entities_of(path: Path):
    """The DXF document and its modelspace lines and curves (block inserts expanded)."""
    from ezdxf import recover

    data = _read(path)
    try:
        doc, auditor = recover.read(io.BytesIO(data))
    except Exception as e:  # noqa: BLE001 - ezdxf raises several types for damaged files
        raise BodyImportError(f"{path}: not a readable DXF file ({type(e).__name__}: {e})") from None
    if auditor.has_errors:
        raise BodyImportError(f"{path}: the DXF file is damaged ({len(auditor.errors)} errors found while reading)")
    kinds = {"LINE", "ARC", "CIRCLE", "ELLIPSE", "LWPOLYLINE", "POLYLINE", "SPLINE"}
    return doc, [e for e in _dxf_entities(doc.modelspace()) if e.dxftype() in kinds]


def read_dxf(path: Path, layer: str | None = None) -> tuple[list[np.ndarray], list[np.ndarray], str | None, list[str]]:
    """Contours of the modelspace (or of ``layer``, case-insensitive) in drawing units.

    Returns (closed contours, open chains, unit name from $INSUNITS or None, notes)."""
    from ezdxf import path as dxfpath

    doc, ents = _dxf_entities_of(path)
    layers = sorted({e.dxf.layer for e in ents})
    if layer is not None:
        ents = [e for e in ents if e.dxf.layer.lower() == layer.lower()]
        if not ents:
            raise BodyImportError(
                f"{path}: layer {layer!r} not found or holds no lines or curves"
                f" (layers with lines or curves: {', '.join(layers) or 'none'})")
    if not ents:
        raise BodyImportError(f"{path}: the drawing holds no lines, polylines or curves")
    notes = []
    skipped = [e.dxftype() for e in ents if e.dxftype() == "POLYLINE" and not e.is_2d_polyline]
    ents = [e for e in ents if not (e.dxftype() == "POLYLINE" and not e.is_2d_polyline)]
    if skipped:
        notes.append(f"{len(skipped)} 3-D polylines or meshes ignored")
    paths = [dxfpath.make_path(e) for e in ents]
    # extent from control points first, then flatten to a fraction of it
    rough = [np.array([(v.x, v.y) for v in p.control_vertices()]) for p in paths if len(p) or p.start]
    rough = [r for r in rough if len(r)]
    ext = _extent(rough) if rough else 1.0
    pieces = []
    for p in paths:
        pts = np.array([(v.x, v.y) for v in p.flattening(FLATTEN_FRACTION * ext)], float)
        if len(pts) >= 2:
            pieces.append(pts)
    if not pieces:
        raise BodyImportError(f"{path}: the selection holds no lines or curves with length")
    code = int(doc.header.get("$INSUNITS", 0))
    unit = DXF_INSUNITS.get(code)
    if unit is None and code != 0:
        notes.append(f"$INSUNITS {code} is not a length unit this program reads")
    closed, open_ = _chain(pieces, JOIN_FRACTION * _extent(pieces))
    return closed, open_, unit, notes


_LENGTH = re.compile(r"^\s*([0-9.eE+-]+)\s*(mm|cm|m|in|ft|px|pt|pc)?\s*$")
_SVG_UNIT_MM = {"mm": 1.0, "cm": 10.0, "in": 25.4, "pt": 25.4 / 72.0, "pc": 25.4 / 6.0}


def svg_unit_from_root(root) -> float | None:
    """Metres per SVG user unit from the root's physical ``width`` and its ``viewBox``, or None."""
    width, vb = root.get("width"), root.get("viewBox")
    if not width or not vb:
        return None
    m = _LENGTH.match(width)
    if not m or m.group(2) not in _SVG_UNIT_MM:
        return None
    try:
        vb_w = float(re.split(r"[\s,]+", vb.strip())[2])
        w = float(m.group(1))
    except (IndexError, ValueError):
        return None
    if not (vb_w > 0 and w > 0):
        return None
    return w * _SVG_UNIT_MM[m.group(2)] * 1e-3 / vb_w


class _SvgPaths(list):
    root = None


def _svg_paths(path: Path) -> _SvgPaths:
    """Every drawable element of the SVG as an svgpathtools Path in user units (transforms applied)."""
    import warnings
    from xml.etree.ElementTree import ParseError

    from svgpathtools import Document

    data = _read(path)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("error")
            doc = Document.from_svg_string(data.decode("utf-8"))
            out = _SvgPaths(doc.paths())
    except (ParseError, UnicodeDecodeError, ValueError, Warning) as e:
        raise BodyImportError(f"{path}: not a readable SVG file ({type(e).__name__}: {e})") from None
    out.root = doc.root
    return out


def read_svg(path: Path, element_id: str | None = None) -> tuple[list[np.ndarray], list[np.ndarray], float | None, list[str]]:
    """Contours of the SVG (or of the element ``element_id``) in user units, y up (the file's y is down).

    Returns (closed contours, open chains, metres per user unit from the root or None, notes)."""
    from svgpathtools import Line

    paths = _svg_paths(path)
    root = paths.root
    ids = sorted({p.element.get("id") for p in paths if p.element.get("id")})
    if element_id is not None:
        paths = [p for p in paths if p.element.get("id") == element_id]
        if not paths:
            raise BodyImportError(
                f"{path}: no path, polygon, polyline, line, rect, circle or ellipse with id {element_id!r}"
                f" (ids found: {', '.join(ids) or 'none'})")
    if not paths:
        raise BodyImportError(f"{path}: the drawing holds no path, polygon, polyline, rect, circle or ellipse")
    sub = [s for p in paths for s in p.continuous_subpaths() if len(s)]
    bbox = np.array([s.bbox() for s in sub])  # xmin, xmax, ymin, ymax
    ext = max(float(bbox[:, 1].max() - bbox[:, 0].min()), float(bbox[:, 3].max() - bbox[:, 2].min()), 1e-12)
    step = FLATTEN_FRACTION * ext * 20.0  # sample spacing along curves; simplification removes the excess
    pieces, closed_flags = [], []
    for s in sub:
        pts = []
        for seg in s:
            if isinstance(seg, Line):
                pts.append(seg.start)
            else:
                n = max(8, min(2000, math.ceil(seg.length(error=1e-6) / step)))
                pts.extend(seg.point(t) for t in np.linspace(0.0, 1.0, n, endpoint=False))
        pts.append(s[-1].end)
        arr = np.array([(z.real, -z.imag) for z in pts], float)
        pieces.append(arr)
        closed_flags.append(s.isclosed())
    closed = [p[:-1] for p, c in zip(pieces, closed_flags) if c and len(p) >= 4]
    loose = [p for p, c in zip(pieces, closed_flags) if not c]
    more, open_ = _chain(loose, JOIN_FRACTION * ext) if loose else ([], [])
    return closed + more, open_, svg_unit_from_root(root), []


def drawing_choices(path: Path) -> list[str]:
    """The layers holding lines or curves (DXF) or the element ids (SVG) a drawing offers, sorted."""
    if Source(Path(path)).kind == "dxf":
        _doc, ents = _dxf_entities_of(Path(path))
        return sorted({e.dxf.layer for e in ents})
    return sorted({p.element.get("id") for p in _svg_paths(Path(path)) if p.element.get("id")})


# ----- placing and simplifying -----------------------------------------------------------------
def unit_scale(p: Placement, file_unit: str | float | None, where: str) -> tuple[float, str]:
    """Metres per drawing unit and how it was chosen: the user's value, else the file's."""
    if p.m_per_unit is not None:
        if not (math.isfinite(p.m_per_unit) and p.m_per_unit > 0):
            raise BodyImportError(f"{where}: the scale must be a positive number of metres per unit")
        return p.m_per_unit, f"{p.m_per_unit * 1000:g} mm per drawing unit (given)"
    if p.units is not None:
        if p.units not in UNITS_M:
            raise BodyImportError(f"{where}: unknown units {p.units!r} (known: {', '.join(UNITS_M)})")
        how = f"units {p.units} (given)"
        if isinstance(file_unit, str) and file_unit != p.units:
            how += f"; the file says {file_unit}"
        return UNITS_M[p.units], how
    if isinstance(file_unit, str):
        return UNITS_M[file_unit], f"units {file_unit} (from the file)"
    if isinstance(file_unit, float):
        return file_unit, f"{file_unit * 1000:g} mm per user unit (from the file's width and viewBox)"
    raise BodyImportError(f"{where}: units unknown: the file does not state them; give the units "
                          f"({', '.join(UNITS_M)}) or the mm per drawing unit")


def place(points: np.ndarray, view: View, m_per_unit: float, p: Placement) -> np.ndarray:
    """Drawing points (u right, v up, drawing units) -> vehicle axes of ``view``, m (module docstring, step 4)."""
    d = (np.asarray(points, float) - np.asarray(p.ref, float)) * m_per_unit
    sign = 1.0 if p.front == "right" else -1.0
    out = np.empty_like(d)
    out[:, 0] = sign * d[:, 0]
    out[:, 1] = d[:, 1] if view == "side" else sign * d[:, 1]
    return out + np.asarray(p.ref_at, float)


def simplify_to_budget(points: np.ndarray, max_points: int) -> tuple[np.ndarray, float]:
    """Fewest changes that fit ``max_points``: the smallest shapely simplification tolerance (to 0.01 %
    of the outline's size) whose result has at most that many points and stays a simple polygon.

    Returns (points without closing point, Hausdorff distance to the input contour, same unit)."""
    pts = np.asarray(points, float)
    keep = np.r_[True, np.any(np.abs(np.diff(pts, axis=0)) > 0, axis=1)]
    pts = pts[keep]
    if len(pts) > 1 and np.all(pts[-1] == pts[0]):
        pts = pts[:-1]
    ring = LinearRing(pts)
    if len(pts) <= max_points:
        return pts, 0.0
    size = float(np.ptp(pts, axis=0).max())
    lo, hi = 0.0, size
    best = None
    for _ in range(40):
        tol = 0.5 * (lo + hi)
        s = Polygon(pts).simplify(tol, preserve_topology=True).exterior
        n = len(s.coords) - 1
        if n <= max_points and n >= 3:
            best, hi = s, tol
        else:
            lo = tol
        if hi - lo < 1e-4 * size:
            break
    if best is None:
        raise BodyImportError(f"the outline cannot be reduced to {max_points} points")
    out = np.asarray(best.coords)[:-1]
    return out, float(shapely.hausdorff_distance(ring, best, densify=0.1))


def _largest(closed: list[np.ndarray]) -> tuple[np.ndarray, int]:
    areas = [abs(Polygon(c).area) if len(c) >= 3 else 0.0 for c in closed]
    i = int(np.argmax(areas))
    return closed[i], len(closed)


@functools.lru_cache(maxsize=8)
def _contour(path: str, kind: str, select: str | None, _stamp: tuple[int, int]):
    """The largest closed contour of a drawing's selection in drawing units (u right, v up), the file's
    unit and notes; cached by the file's modification time and size (a dialog re-places it on every change)."""
    where = Source(Path(path), select).label()
    if kind == "dxf":
        closed, open_, file_unit, notes = read_dxf(Path(path), select)
    else:
        closed, open_, file_unit, notes = read_svg(Path(path), select)
    notes = list(notes)
    if not closed:
        gaps = ""
        if open_:
            c = max(open_, key=len)
            gaps = (f"; {len(open_)} open contour(s), e.g. one from ({c[0, 0]:g}, {c[0, 1]:g}) to "
                    f"({c[-1, 0]:g}, {c[-1, 1]:g}) drawing units that does not return to its start")
        raise BodyImportError(f"{where}: no closed outline{gaps}")
    if open_:
        notes.append(f"{len(open_)} open contour(s) ignored")
    contour, n = _largest(closed)
    if n > 1:
        notes.append(f"{n} closed contours; the largest by area is used")
    contour = contour.copy()
    contour.flags.writeable = False
    return contour, file_unit, tuple(notes)


def import_outline(src: Source, view: View, max_points: int | None = None) -> Imported:
    """Read, place and simplify one outline (see the module docstring); raise BodyImportError."""
    max_points = max_points or MAX_BODY_OUTLINE_POINTS
    where = src.label()
    kind = src.kind
    try:
        st = Path(src.path).stat()
        stamp = (st.st_mtime_ns, st.st_size)
    except OSError:
        stamp = (0, 0)  # the reader names the problem
    contour, file_unit, notes = _contour(str(src.path), kind, src.select, stamp)
    notes = list(notes)
    m_per_unit, how = unit_scale(src.placement, file_unit, where)
    notes.append(how)
    placed = place(contour, view, m_per_unit, src.placement)
    if Polygon(placed).area < 1e-6 or not Polygon(placed).is_valid:
        raise BodyImportError(f"{where}: the outline crosses itself or encloses no area")
    kept, dev = simplify_to_budget(placed, max_points)
    return Imported(view, kept, where, len(contour), dev, tuple(notes))


def apply_outlines(v: Vehicle, top: Imported | None = None, side: Imported | None = None,
                   zones: tuple[tuple[str, str, Imported], ...] = ()) -> Vehicle:
    """The vehicle with new body outlines and zones (name, material, outline; a zone of the same name
    and view is replaced, else added), validated like a loaded file (VehicleFileError names the field)."""
    d = vehicle_to_dict(v)
    for imp, key in ((top, "top_outline"), (side, "side_outline")):
        if imp is not None:
            d["body"][key] = [[float(a), float(b)] for a, b in imp.points]
    for name, material, imp in zones:
        z = {"name": name, "view": imp.view, "material": material,
             "outline": [[float(a), float(b)] for a, b in imp.points]}
        same = [i for i, old in enumerate(d.get("zones", [])) if old["name"] == name and old["view"] == imp.view]
        if same:
            d["zones"][same[0]] = z
        else:
            d.setdefault("zones", []).append(z)
    return vehicle_from_dict(d)


def import_zone(src: Source, view: View) -> Imported:
    """A zone outline (budget: the zone limit of core.bounds)."""
    return import_outline(src, view, MAX_OUTLINE_POINTS)


__all__ = [
    "UNITS_M",
    "BodyImportError",
    "Imported",
    "Placement",
    "Source",
    "VehicleFileError",
    "apply_outlines",
    "drawing_choices",
    "import_outline",
    "import_zone",
    "parse_source",
    "place",
    "simplify_to_budget",
    "unit_scale",
]

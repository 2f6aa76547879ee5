"""Body outlines from DXF and SVG drawings (core.body_import).

The drawings are written here (ezdxf writes the DXF files, the SVG is plain text) from the sample
sedan's own outlines, moved, scaled and turned the way drawings are; importing them must give the
sample's outlines back within 1 mm (issue 14). Bad drawings give one message naming the problem.
"""

from __future__ import annotations

import math

import ezdxf
import numpy as np
import pytest
import shapely
from core.samples import DEFAULT_SAMPLE
from shapely.geometry import LinearRing

from core.body_import import (
    BodyImportError,
    Placement,
    Source,
    apply_outlines,
    import_outline,
    parse_source,
    simplify_to_budget,
)
from core.vehicle import VehicleFileError, load_vehicle

SEDAN = load_vehicle(DEFAULT_SAMPLE)
TOP = np.asarray(SEDAN.body.top_outline)
SIDE = np.asarray(SEDAN.body.side_outline)


def hausdorff_m(a, b) -> float:
    return shapely.hausdorff_distance(LinearRing(np.asarray(a)), LinearRing(np.asarray(b)), densify=0.05)


def _dxf(path, units=4):
    doc = ezdxf.new()
    doc.header["$INSUNITS"] = units
    return doc, doc.modelspace()


def test_dxf_polyline_in_mm_front_left_reference_moved(tmp_path):
    # top view drawn in mm with the front to the left (a half turn) and the front axle centre at (5000, 2000)
    ref = np.array([5000.0, 2000.0])
    drawn = ref + (-TOP) * 1000.0
    doc, msp = _dxf(tmp_path, units=4)
    msp.add_lwpolyline(drawn.tolist(), close=True, dxfattribs={"layer": "BODY_TOP"})
    msp.add_circle((0, 0), 9000.0, dxfattribs={"layer": "FRAME"})  # a larger contour on another layer
    f = tmp_path / "top.dxf"
    doc.saveas(f)
    imp = import_outline(Source(f, "body_top", Placement(ref=tuple(ref), front="left")), "top")
    assert hausdorff_m(imp.points, TOP) < 1e-3
    assert len(imp.points) == len(TOP) and imp.deviation_m == 0.0
    assert any("units mm (from the file)" in n for n in imp.notes)


def test_dxf_loose_lines_and_arc_are_chained_in_metres(tmp_path):
    # side view in m ($INSUNITS 6) as shuffled, partly reversed LINE pieces, front to the right
    doc, msp = _dxf(tmp_path, units=6)
    rng = np.random.default_rng(14)
    segs = [(SIDE[i], SIDE[(i + 1) % len(SIDE)]) for i in range(len(SIDE))]
    for k in rng.permutation(len(segs)):
        a, b = segs[k]
        if rng.random() < 0.5:
            a, b = b, a
        msp.add_line(tuple(a), tuple(b), dxfattribs={"layer": "SIDE"})
    f = tmp_path / "side.dxf"
    doc.saveas(f)
    imp = import_outline(Source(f, "SIDE"), "side")
    assert hausdorff_m(imp.points, SIDE) < 1e-3


def test_dxf_curve_is_flattened_and_simplified_to_the_budget(tmp_path):
    # a circle of radius 1 m (a SPLINE through 400 points on it): flattened, then simplified to 60 points;
    # the kept points lie on the circle within 1 mm and the reported deviation is the chord's sagitta
    doc, msp = _dxf(tmp_path, units=4)
    t = np.linspace(0, 2 * math.pi, 401)
    msp.add_spline_control_frame([(1000 * math.cos(a) + 1500, 1000 * math.sin(a) + 1200) for a in t],
                                 dxfattribs={"layer": "B"})
    f = tmp_path / "c.dxf"
    doc.saveas(f)
    imp = import_outline(Source(f, "B", Placement(ref=(1500, 0))), "side", max_points=60)
    assert len(imp.points) <= 60
    r = np.hypot(imp.points[:, 0], imp.points[:, 1] - 1.2)
    assert np.all(np.abs(r - 1.0) < 1e-3)
    # sagitta of the longest kept chord: r (1 - cos(theta / 2)); 60 chords give at least 1.37 mm
    ang = np.sort(np.arctan2(imp.points[:, 1] - 1.2, imp.points[:, 0]))
    widest = np.max(np.diff(np.r_[ang, ang[0] + 2 * math.pi]))
    assert imp.deviation_m == pytest.approx(1.0 - math.cos(widest / 2), rel=0.05, abs=2e-4)


SVG = """<svg xmlns="http://www.w3.org/2000/svg" {size}>
  <g transform="translate(100,50)">
    <g transform="scale(2)">
      <path id="side" d="{d}" transform="translate(10,0)"/>
      <rect id="label" x="0" y="0" width="20" height="5"/>
    </g>
  </g>
</svg>"""


def _svg_side(unit_m: float, size: str = "") -> tuple[str, tuple[float, float]]:
    """The sedan's side outline in SVG user units of ``unit_m``, y down, front to the left, inside
    translate(100,50) scale(2) translate(10,0); returns the text and the reference point (front axle
    at the ground) in the drawing's own coordinates (u right, v up) after the transforms."""
    # path coordinates: u = -x / (2 unit), v_svg = -z / (2 unit) + 300
    pts = np.c_[-SIDE[:, 0] / (2 * unit_m), -SIDE[:, 1] / (2 * unit_m) + 300.0]
    d = "M " + " L ".join(f"{a:.6f},{b:.6f}" for a, b in pts) + " Z"
    # the reference (x = 0, z = 0) is path point (0, 300) -> file (2 * (0 + 10) + 100, 2 * 300 + 50)
    return SVG.format(d=d, size=size), (120.0, -650.0)


def test_svg_path_by_id_with_transforms_and_stated_unit(tmp_path):
    text, ref = _svg_side(0.01)
    f = tmp_path / "side.svg"
    f.write_text(text)
    imp = import_outline(Source(f, "side", Placement(m_per_unit=0.01, ref=ref, front="left")), "side")
    assert hausdorff_m(imp.points, SIDE) < 1e-3


def test_svg_units_from_width_and_viewbox(tmp_path):
    # width 500 mm over a viewBox 1000 units wide: 0.5 mm per user unit
    text, ref = _svg_side(0.0005, size='width="500mm" height="250mm" viewBox="0 0 1000 500"')
    f = tmp_path / "side.svg"
    f.write_text(text)
    imp = import_outline(Source(f, "side", Placement(ref=ref, front="left")), "side")
    assert hausdorff_m(imp.points, SIDE) < 1e-3
    assert any("from the file's width and viewBox" in n for n in imp.notes)


def test_imported_outlines_give_a_valid_vehicle(tmp_path):
    doc, msp = _dxf(tmp_path, units=6)
    msp.add_lwpolyline(TOP.tolist(), close=True, dxfattribs={"layer": "T"})
    msp.add_lwpolyline(SIDE.tolist(), close=True, dxfattribs={"layer": "S"})
    f = tmp_path / "body.dxf"
    doc.saveas(f)
    top = import_outline(Source(f, "T"), "top")
    side = import_outline(Source(f, "S"), "side")
    v = apply_outlines(SEDAN, top=top, side=side)
    assert hausdorff_m(v.body.top_outline, TOP) < 1e-3 and hausdorff_m(v.body.side_outline, SIDE) < 1e-3
    # the same drawing with the wrong reference point: the body moves 2 m back; the vehicle check says what
    # no longer fits (the zones first, then the wheels)
    off = import_outline(Source(f, "T", Placement(ref=(2.0, 0.0))), "top")
    with pytest.raises(VehicleFileError, match=r"zones\[\d\]\.outline: .*lies outside the body's top view"):
        apply_outlines(SEDAN, top=off)
    bare = SEDAN.model_copy(update={"zones": ()})
    with pytest.raises(VehicleFileError, match=r"wheels\[\d\].*outside the body's top outline"):
        apply_outlines(bare, top=off)


def test_bad_drawings_give_one_clear_message(tmp_path):
    doc, msp = _dxf(tmp_path, units=0)
    msp.add_lwpolyline(TOP.tolist(), close=True, dxfattribs={"layer": "T"})
    msp.add_lwpolyline(SIDE.tolist(), close=False, dxfattribs={"layer": "OPEN"})
    msp.add_lwpolyline([(0, 0), (1, 1), (1, 0), (0, 1)], close=True, dxfattribs={"layer": "BOW"})
    f = tmp_path / "bad.dxf"
    doc.saveas(f)
    with pytest.raises(BodyImportError, match=r"layer 'ROOF' not found .*layers with lines or curves: BOW, OPEN, T"):
        import_outline(Source(f, "ROOF"), "top")
    with pytest.raises(BodyImportError, match=r"no closed outline; 1 open contour"):
        import_outline(Source(f, "OPEN", Placement(units="m")), "side")
    with pytest.raises(BodyImportError, match=r"units unknown"):
        import_outline(Source(f, "T"), "top")
    with pytest.raises(BodyImportError, match=r"unknown units 'furlong'"):
        import_outline(Source(f, "T", Placement(units="furlong")), "top")
    with pytest.raises(BodyImportError, match=r"crosses itself"):
        import_outline(Source(f, "BOW", Placement(units="m")), "top")
    text, _ = _svg_side(0.01)
    s = tmp_path / "s.svg"
    s.write_text(text)
    with pytest.raises(BodyImportError, match=r"no path, .* with id 'roof' \(ids found: label, side\)"):
        import_outline(Source(s, "roof", Placement(units="mm")), "side")
    (tmp_path / "junk.svg").write_text("<svg")
    with pytest.raises(BodyImportError, match=r"junk.svg: not a readable SVG file"):
        import_outline(Source(tmp_path / "junk.svg"), "side")
    (tmp_path / "junk.dxf").write_text("not a dxf")
    with pytest.raises(BodyImportError, match=r"junk.dxf: not a readable DXF file"):
        import_outline(Source(tmp_path / "junk.dxf"), "side")
    with pytest.raises(BodyImportError, match=r"not a DXF or SVG drawing"):
        import_outline(Source(tmp_path / "x.png"), "side")
    with pytest.raises(BodyImportError, match=r"missing.dxf"):
        import_outline(Source(tmp_path / "missing.dxf"), "side")


def test_simplify_reports_the_largest_deviation():
    # a square with 400 points on its edges keeps its 4 corners: nothing is lost
    t = np.linspace(0, 1, 101)[:-1]
    sq = np.vstack([np.c_[t, 0 * t], np.c_[1 + 0 * t, t], np.c_[1 - t, 1 + 0 * t], np.c_[0 * t, 1 - t]])
    kept, dev = simplify_to_budget(sq, 10)
    assert len(kept) <= 10 and dev < 1e-9 and hausdorff_m(kept, [(0, 0), (1, 0), (1, 1), (0, 1)]) < 1e-9


def test_parse_source(tmp_path):
    assert parse_source("a/b.dxf:BODY") == (__import__("pathlib").Path("a/b.dxf"), "BODY")
    assert parse_source("a/b.svg") == (__import__("pathlib").Path("a/b.svg"), None)

"""`wheelreach import-body`: outlines from a DXF and an SVG made here land in the vehicle file within
1 mm (issue 14); a bad drawing or option is one line and leaves the existing file untouched."""

from __future__ import annotations

import ezdxf
import numpy as np
import pytest
import shapely
from core.samples import SAMPLES_DIR
from shapely.geometry import LinearRing

from app.cli.main import main
from core.vehicle import load_vehicle

SUV = load_vehicle(SAMPLES_DIR / "suv.json")
TOP = np.asarray(SUV.body.top_outline)
SIDE = np.asarray(SUV.body.side_outline)


def _close(a, b, tol=1e-3) -> bool:
    return shapely.hausdorff_distance(LinearRing(np.asarray(a)), LinearRing(np.asarray(b)), densify=0.05) < tol


@pytest.fixture
def drawings(tmp_path):
    doc = ezdxf.new()
    doc.header["$INSUNITS"] = 4  # mm
    doc.modelspace().add_lwpolyline((TOP * 1000 + [1000, 3000]).tolist(), close=True, dxfattribs={"layer": "PLAN"})
    doc.saveas(tmp_path / "plan.dxf")
    # side view in SVG user units of 2 mm, y down, front to the left, reference at the drawing origin
    d = "M " + " L ".join(f"{-x * 500:.4f},{-z * 500:.4f}" for x, z in SIDE) + " Z"
    (tmp_path / "side.svg").write_text(f'<svg xmlns="http://www.w3.org/2000/svg"><path id="body" d="{d}"/></svg>')
    return tmp_path


def test_new_file_from_a_sample_with_both_outlines(drawings, capsys):
    out = drawings / "new.json"
    rc = main(["import-body", str(out), "--from", "suv", "--top", f"{drawings / 'plan.dxf'}:PLAN",
               "--top-ref", "1000,3000", "--side", f"{drawings / 'side.svg'}:body", "--side-mm-per-unit", "2",
               "--side-front", "left"])
    text = capsys.readouterr().out
    assert rc == 0, text
    assert "top outline from plan.dxf (layer 'PLAN'): 4.750 m long" in text and "units mm (from the file)" in text
    v = load_vehicle(out)
    assert _close(v.body.top_outline, TOP)
    assert _close(v.body.side_outline, SIDE)
    assert v.wheels == SUV.wheels and v.spots == SUV.spots


def test_update_in_place_and_zone(drawings, capsys):
    f = drawings / "suv.json"
    f.write_bytes((SAMPLES_DIR / "suv.json").read_bytes())
    doc = ezdxf.new()
    doc.header["$INSUNITS"] = 6
    glass = [(-0.6, 0.95), (-1.4, 0.95), (-1.4, 1.3), (-0.6, 1.3)]
    doc.modelspace().add_lwpolyline(glass, close=True, dxfattribs={"layer": "GLASS"})
    doc.saveas(drawings / "zones.dxf")
    rc = main(["import-body", str(f), "--top", f"{drawings / 'plan.dxf'}:PLAN", "--top-ref", "1000,3000",
               "--zone", f"rear glass,side,glass={drawings / 'zones.dxf'}:GLASS"])
    assert rc == 0, capsys.readouterr()
    v = load_vehicle(f)
    assert _close(v.body.top_outline, TOP)
    z = [z for z in v.zones if z.name == "rear glass"]
    assert len(z) == 1 and z[0].material == "glass" and _close(z[0].outline, glass)


def test_bad_input_is_one_line_and_the_file_stays(drawings, capsys):
    f = drawings / "suv.json"
    f.write_bytes((SAMPLES_DIR / "suv.json").read_bytes())
    before = f.read_bytes()
    cases = [
        (["--top", f"{drawings / 'plan.dxf'}:ROOF"], "layer 'ROOF' not found"),
        (["--side", f"{drawings / 'side.svg'}:body"], "units unknown"),
        # the side drawing read with its front on the wrong side: the body lies behind the rear wheels
        (["--side", f"{drawings / 'side.svg'}:body", "--side-mm-per-unit", "2"], "error: "),
        # the plan placed 1 m too far back: the zones and wheels no longer fit, the vehicle check says which
        (["--top", f"{drawings / 'plan.dxf'}:PLAN", "--top-ref", "2000,3000"], "lies outside the body's top view"),
        ([], "nothing to import"),
    ]
    for extra, message in cases:
        rc = main(["import-body", str(f), *extra])
        err = capsys.readouterr().err
        assert rc == 1 and message in err and len(err.strip().splitlines()) == 1, err
    assert f.read_bytes() == before
    rc = main(["import-body", str(drawings / "none.json"), "--top", str(drawings / "plan.dxf")])
    assert rc == 1 and "give --from" in capsys.readouterr().err

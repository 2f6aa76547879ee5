"""File > Import body outline and File > Trace body over a picture (issue 14): the dialogs preview what
core.body_import / core.picture_trace make of the input, and the result goes into the body as one
undoable edit."""

from __future__ import annotations

import ezdxf
import numpy as np
import shapely
from PySide6.QtCore import QPointF, Qt
from PySide6.QtGui import QColor, QImage, QPainter, QPen, QPolygonF
from shapely.geometry import LinearRing

from app.gui import commands
from app.gui.body_import import ImportOutlineDialog, TraceDialog


def _close(a, b, tol) -> bool:
    return shapely.hausdorff_distance(LinearRing(np.asarray(a)), LinearRing(np.asarray(b)), densify=0.05) < tol


def test_import_dxf_outline_is_one_undoable_edit(window, qtbot, tmp_path):
    doc = window.doc
    old = doc.vehicle
    top = np.asarray(old.body.top_outline)
    # the plan drawn in mm, front to the left, the front axle centre at (4000, 1500); 5 mm longer than now
    new_top = top * [1.0, 1.0] + np.where(top[:, :1] > 0, [0.005, 0.0], [0.0, 0.0])
    d = ezdxf.new()
    d.header["$INSUNITS"] = 4
    d.modelspace().add_lwpolyline((np.array([4000.0, 1500.0]) - new_top * 1000).tolist(), close=True,
                                  dxfattribs={"layer": "PLAN"})
    d.modelspace().add_line((0, 0), (10, 10), dxfattribs={"layer": "NOTES"})
    d.saveas(tmp_path / "plan.dxf")
    dlg = ImportOutlineDialog(window)
    qtbot.addWidget(dlg)
    dlg.set_file(str(tmp_path / "plan.dxf"))
    assert [dlg.select.itemText(i) for i in range(dlg.select.count())][1:] == ["NOTES", "PLAN"]
    dlg.where.view.setCurrentIndex(dlg.where.view.findData("top"))
    dlg.select.setCurrentIndex(dlg.select.findData("NOTES"))
    assert "no closed outline" in dlg.status.text() and dlg.result_outline is None
    dlg.select.setCurrentIndex(dlg.select.findData("PLAN"))
    dlg.where.front.setCurrentIndex(dlg.where.front.findData("left"))
    dlg.where.ref_u.setValue(4000.0)
    dlg.where.ref_v.setValue(1500.0)
    imp = dlg.result_outline
    assert imp is not None and "units mm (from the file)" in dlg.status.text()
    assert _close(imp.points, new_top, 1e-3)
    depth = doc.undo_stack.count()
    assert commands.apply_imported(doc, None, imp)
    assert doc.undo_stack.count() == depth + 1 and _close(doc.vehicle.body.top_outline, new_top, 1e-3)
    assert doc.vehicle.wheels == old.wheels and doc.vehicle.body.side_outline == old.body.side_outline
    doc.undo_stack.undo()
    assert doc.vehicle == old


def test_an_outline_that_leaves_the_wheels_outside_is_refused(window, qtbot, tmp_path):
    doc = window.doc
    old, depth = doc.vehicle, doc.undo_stack.count()
    d = ezdxf.new()
    d.header["$INSUNITS"] = 6
    d.modelspace().add_lwpolyline([(5, -1), (9, -1), (9, 1), (5, 1)], close=True)  # 5 m ahead of the car
    d.saveas(tmp_path / "far.dxf")
    dlg = ImportOutlineDialog(window)
    qtbot.addWidget(dlg)
    dlg.set_file(str(tmp_path / "far.dxf"))
    dlg.where.view.setCurrentIndex(dlg.where.view.findData("top"))
    assert dlg.result_outline is not None
    assert not commands.apply_imported(doc, None, dlg.result_outline)
    assert doc.vehicle is old and doc.undo_stack.count() == depth


def _side_picture(path, px_per_m=120.0):
    """A 1200 x 500 picture of a side view: body 4.2 m x 1.45 m, wheels 2.7 m apart, front to the right;
    returns the pixel positions of the body corners, wheel centres and front ground point."""
    img = QImage(1200, 500, QImage.Format.Format_RGB32)
    img.fill(QColor("white"))
    origin = np.array([900.0, 450.0])  # vehicle origin (front axle on the ground)

    def px(x, z):
        return origin + px_per_m * np.array([x, -z])

    corners = np.array([px(0.8, 0.15), px(0.8, 1.6), px(-3.4, 1.6), px(-3.4, 0.15)])
    wheels = np.array([px(0.0, 0.33), px(-2.7, 0.33)])
    p = QPainter(img)
    p.setPen(QPen(QColor("black"), 3))
    p.drawPolygon(QPolygonF([QPointF(*c) for c in corners]))
    for w in wheels:
        p.drawEllipse(QPointF(*w), 0.33 * px_per_m, 0.33 * px_per_m)
    p.drawLine(QPointF(0, origin[1]), QPointF(1200, origin[1]))
    p.end()
    img.save(str(path))
    return corners, wheels, origin


def test_trace_over_a_picture_scaled_by_two_points(window, qtbot, tmp_path):
    doc = window.doc
    old = doc.vehicle
    corners, wheels, ground = _side_picture(tmp_path / "side.png")
    dlg = TraceDialog(window)
    qtbot.addWidget(dlg)
    assert "load a picture" in dlg.status.text()
    assert dlg.load_picture(str(tmp_path / "side.png"))
    for w in wheels:
        dlg.add_point("scale", w)
    dlg.distance.setValue(2700.0)
    dlg.add_point("ref", ground)
    for c in corners:
        dlg.add_point("outline", c)
    dlg.add_point("outline", (5.0, 5.0))
    dlg.remove_last()
    imp = dlg.result_outline
    assert imp is not None and "mm per pixel" in dlg.status.text()
    length, height = np.ptp(imp.points, axis=0)
    assert abs(length / 4.2 - 1) < 0.005 and abs(height / 1.45 - 1) < 0.005
    assert commands.apply_imported(doc, None, imp)
    assert _close(doc.vehicle.body.side_outline, [(0.8, 0.15), (0.8, 1.6), (-3.4, 1.6), (-3.4, 0.15)], 0.02)
    doc.undo_stack.undo()
    assert doc.vehicle == old
    # a click on the picture in outline mode adds a point where it lands
    n = len(dlg.outline_px)
    dlg.set_mode("outline")
    vb = dlg.plot.getViewBox()
    dlg.show()
    qtbot.waitExposed(dlg)
    scene_pt = vb.mapViewToScene(QPointF(600.0, 250.0))
    view_pt = dlg.plot.mapFromScene(scene_pt)
    qtbot.mouseClick(dlg.plot.viewport(), Qt.MouseButton.LeftButton, pos=view_pt)
    assert len(dlg.outline_px) == n + 1
    assert np.allclose(dlg.outline_px[-1], (600.0, 250.0), atol=3.0)


def test_the_file_menu_offers_both(window):
    labels = [a.text() for a in window.menuBar().actions()[0].menu().actions()]
    assert "&Import body outline..." in labels and "&Trace body over a picture..." in labels


def test_import_a_zone_from_svg(window, qtbot, tmp_path):
    doc = window.doc
    old, depth = doc.vehicle, doc.undo_stack.count()
    # a side window in SVG user units of 1 mm (width 400 mm over a 400-unit viewBox), y down, front right
    glass = [(-0.6, 0.95), (-1.4, 0.95), (-1.4, 1.25), (-0.6, 1.25)]
    pts = " ".join(f"{x * 1000:.1f},{-z * 1000:.1f}" for x, z in glass)
    (tmp_path / "w.svg").write_text('<svg xmlns="http://www.w3.org/2000/svg" width="400mm" height="400mm" '
                                    f'viewBox="0 0 400 400"><polygon id="window" points="{pts}"/></svg>')
    dlg = ImportOutlineDialog(window, materials=sorted(old.material_names()))
    qtbot.addWidget(dlg)
    dlg.set_file(str(tmp_path / "w.svg"))
    dlg.select.setCurrentIndex(dlg.select.findData("window"))
    dlg.target.setCurrentIndex(dlg.target.findData("zone"))
    assert dlg.result_outline is None and "Name the zone" in dlg.status.text()
    dlg.zone_name.setText("test window")
    dlg.zone_material.setCurrentIndex(dlg.zone_material.findData("glass"))
    assert dlg.result_outline is not None and dlg.zone() == ("test window", "glass")
    assert commands.apply_imported(doc, None, dlg.result_outline, dlg.zone())
    z = doc.vehicle.zones[-1]
    assert z.name == "test window" and z.view == "side" and z.material == "glass" and _close(z.outline, glass, 1e-3)
    assert doc.undo_stack.count() == depth + 1
    doc.undo_stack.undo()
    assert doc.vehicle == old

"""The Properties panel: typed values of spots, wheels, zones and regions, validated and undoable."""

import pytest
from PySide6.QtCore import Qt

from app.gui.properties_panel import axis_text, parse_axis, spot_axis_note


def _panel(window):
    return window.properties_panel


def _type(qtbot, box, text):
    box.setFocus()
    box.selectAll()
    qtbot.keyClicks(box, text)
    qtbot.keyClick(box, Qt.Key.Key_Return)


def test_typing_xyz_moves_the_spot_and_undo_restores_it(window, qtbot):
    doc, p = window.doc, _panel(window)
    name = doc.selected
    before = doc.spot_position(name)
    for box, mm in ((p.spot_x, -1234.5), (p.spot_y, 321.0), (p.spot_z, 456.0)):
        box.setFocus()
        box.lineEdit().selectAll()
        qtbot.keyClicks(box.lineEdit(), f"{mm}")
        qtbot.keyClick(box.lineEdit(), Qt.Key.Key_Return)
    assert doc.spot_position(name) == pytest.approx((-1.2345, 0.321, 0.456), abs=1e-9)
    # the views follow: the marker of the top view sits at the typed x, y
    m = window.top.markers[name].pos()
    assert (m.x(), m.y()) == pytest.approx((-1.2345, 0.321), abs=1e-9)
    assert doc.undo_stack.count() == 3  # one undoable edit per typed value
    for _ in range(3):
        doc.undo_stack.undo()
    assert doc.spot_position(name) == pytest.approx(before, abs=1e-12)
    assert p.spot_x.value() == pytest.approx(before[0] * 1000.0)


def test_a_bad_tire_code_is_refused_with_a_message_and_nothing_changes(window, qtbot):
    doc, p = window.doc, _panel(window)
    v0, n0 = doc.vehicle, doc.undo_stack.count()
    _type(qtbot, p.wheel_tire, "205/55 R1X")
    assert doc.vehicle is v0 and doc.undo_stack.count() == n0
    assert p.message is p.messages["wheel"] and p.message.isVisibleTo(p)  # shown beside the tire box
    text = p.message.text()
    assert "wheels[0].tire" in text and "205/55 R1X" in text and "not a tire size" in text
    assert p.wheel_tire.text() == v0.wheels[0].tire  # the box shows the stored code again


def test_a_good_tire_code_sets_the_iso_diameter_and_is_undoable(window, qtbot):
    doc, p = window.doc, _panel(window)
    old = doc.vehicle.wheels[0].tire
    _type(qtbot, p.wheel_tire, "235/60R18")
    assert doc.vehicle.wheels[0].tire == "235/60R18"
    # ISO 4000-1 / ETRTO: D = rim[in] x 25.4 + 2 x width x aspect / 100 = 457.2 + 282.0 = 739.2 mm
    assert doc.vehicle.wheels[0].tire_size.outer_diameter_m == pytest.approx(0.7392, abs=1e-9)
    assert "overall diameter 739.2 mm" in p.wheel_sizes.text()
    assert not p.message.isVisibleTo(p)
    doc.undo_stack.undo()
    assert doc.vehicle.wheels[0].tire == old


def test_a_wheel_position_edit_is_undoable_and_follows_the_wheel_selection(window, qtbot):
    doc, p = window.doc, _panel(window)
    wid = doc.vehicle.wheels[2].id
    doc.select_wheel(wid)
    assert p.wheel_choice.currentData() == wid
    x0 = doc.vehicle.wheels[2].x_m
    p.wheel_x.setValue(x0 * 1000.0 - 50.0)
    assert doc.vehicle.wheels[2].x_m == pytest.approx(x0 - 0.05, abs=1e-9)
    doc.undo_stack.undo()
    assert doc.vehicle.wheels[2].x_m == x0


def test_a_rim_width_outside_the_file_limits_is_refused(window, qtbot):
    doc, p = window.doc, _panel(window)
    v0 = doc.vehicle
    p.wheel_rim_width.setValue(1500.0)  # 1.5 m: beyond the file's rim width limit
    assert doc.vehicle is v0
    assert "wheels[0].rim_width_m" in p.message.text()


def test_a_zone_material_edit_is_undoable(window, qtbot):
    doc, p = window.doc, _panel(window)
    doc.select_zone(0)
    old = doc.vehicle.zones[0].material
    new = next(m for m in sorted(doc.vehicle.material_names()) if m != old)
    k = p.zone_material.findData(new)
    p.zone_material.setCurrentIndex(k)
    p.zone_material.activated.emit(k)
    assert doc.vehicle.zones[0].material == new
    doc.undo_stack.undo()
    assert doc.vehicle.zones[0].material == old


def test_spot_axis_override_is_set_shown_and_undone(window, qtbot):
    doc, p = window.doc, _panel(window)
    name = doc.selected
    assert spot_axis_note(doc.vehicle, name) == ""
    k = p.spot_axis.findText("y, left")
    p.spot_axis.setCurrentIndex(k)
    p.spot_axis.activated.emit(k)
    assert spot_axis_note(doc.vehicle, name) == "own (0, 1, 0)"
    assert "axis: own (0, 1, 0)" in window.readout.text()
    row = window.ranking.table.names_in_order().index(name)
    cell = window.ranking.table.item(row, window.ranking.table.AXIS_COLUMN)
    assert cell.text() == "own" and "(0, 1, 0)" in cell.toolTip()
    _type(qtbot, p.spot_axis_vector, "1 2")
    assert "not a direction" in p.message.text() and spot_axis_note(doc.vehicle, name) == "own (0, 1, 0)"
    doc.undo_stack.undo()
    assert spot_axis_note(doc.vehicle, name) == ""


def test_renaming_a_spot_keeps_it_selected_and_a_duplicate_name_is_refused(window, qtbot):
    doc, p = window.doc, _panel(window)
    name = doc.selected
    other = next(s.name for s in doc.vehicle.spots if s.name != name)
    _type(qtbot, p.spot_name, "renamed spot")
    assert doc.selected == "renamed spot"
    v1 = doc.vehicle
    _type(qtbot, p.spot_name, other)
    assert doc.vehicle is v1 and "spots" in p.message.text()


def test_axis_text_and_parse():
    assert axis_text((0, 0, 2)) == "(0, 0, 1)"
    assert axis_text((0, 1, 1)) == "(0, 0.71, 0.71)"
    assert axis_text((0, -1, 0)) == "(0, -1, 0)" and axis_text((-1, 0, 1)) == "(-0.71, 0, 0.71)"
    assert parse_axis("0, 0.7 0.7") == (0.0, 0.7, 0.7)
    for bad in ("0 0 0", "a b c", "1 2"):
        with pytest.raises(ValueError):
            parse_axis(bad)


def test_the_view_menu_command_brings_the_properties_tab_forward(window, qtbot):
    window.settings_tabs.setCurrentIndex(0)
    window.actions["show_properties"].trigger()
    assert window.settings_tabs.tabText(window.settings_tabs.currentIndex()) == "Properties"


def test_clicking_a_wheel_in_the_top_view_shows_it_in_the_panel(window, qtbot):
    from PySide6.QtCore import QPointF, QRectF

    from app.gui.body_views import WHEEL_SELECTED_PEN

    doc, p = window.doc, _panel(window)
    w = doc.vehicle.wheels[3]
    vb = window.top.plot.getPlotItem().vb
    roi = window.top.wheel_rois[w.id]
    scene = window.top.plot.scene()
    r = w.tire_size.outer_radius_m
    vb.setRange(xRange=(w.x_m - 1.2 * r, w.x_m + 1.2 * r), yRange=(w.y_m - 0.3, w.y_m + 0.3), padding=0)  # zoomed in
    qtbot.wait(50)

    def clear(pt) -> bool:
        """Within 8 px only this wheel's item takes clicks (an outline or region edge there would add a corner)."""
        near = scene.items(QRectF(pt.x() - 8, pt.y() - 8, 16, 16))
        takers = [it for it in near if hasattr(it, "mouseClickEvent") and it.acceptedMouseButtons() & Qt.MouseButton.LeftButton
                  and it.isVisible() and type(it).__name__ not in ("ViewBox", "PlotItem")]
        return takers == [roi]

    points = [vb.mapViewToScene(QPointF(w.x_m + fx * r, w.y_m + fy * 0.1))
              for fx in (0.8, -0.8, 0.6, -0.6) for fy in (0.0, 0.4, -0.4, 0.8, -0.8)]
    scene_pt = next(pt for pt in points if clear(pt))
    widget_pt = window.top.plot.mapFromScene(scene_pt)
    qtbot.mouseClick(window.top.plot.viewport(), Qt.MouseButton.LeftButton, pos=widget_pt)
    qtbot.waitUntil(lambda: doc.selected_wheel == w.id, timeout=3000)
    assert p.wheel_choice.currentData() == w.id
    assert p.wheel_x.value() == pytest.approx(w.x_m * 1000.0)
    assert window.top.wheel_rois[w.id].pen.color() == WHEEL_SELECTED_PEN.color()


def test_a_refused_zone_height_is_reported_in_the_zone_group(window, qtbot):
    doc, p = window.doc, _panel(window)
    i = next(k for k, z in enumerate(doc.vehicle.zones) if z.view == "top")
    doc.select_zone(i)
    v0 = doc.vehicle
    _type(qtbot, p.zone_z_min, "-5000")  # 5 m below the ground: outside the file's limit for z_min_m
    assert doc.vehicle is v0
    assert p.message is p.messages["zone"] and p.message.isVisibleTo(p)
    assert f"zones[{i}].z_min_m" in p.message.text()
    assert not p.messages["spot"].isVisibleTo(p)
    _type(qtbot, p.zone_z_min, "300")
    assert doc.vehicle.zones[i].z_min_m == pytest.approx(0.3)
    assert not p.message.isVisibleTo(p)
    doc.undo_stack.undo()
    assert doc.vehicle.zones[i].z_min_m == v0.zones[i].z_min_m


def test_a_click_where_the_outline_runs_over_a_wheel_selects_the_wheel(window, qtbot):
    """In the side view the body's lower edge runs over every tire circle: a click on that edge inside a
    wheel selects the wheel (as a click elsewhere on it does) instead of adding an outline corner; the
    same edge clicked away from the wheels still adds one."""
    import numpy as np
    from PySide6.QtCore import QPointF
    from shapely.geometry import LineString, Point

    doc, view = window.doc, window.side
    w = doc.vehicle.wheels[2]
    r = w.tire_size.outer_radius_m
    outline = [tuple(p) for p in doc.vehicle.body.side_outline]
    circle = Point(w.x_m, w.tire_size.outer_radius_m).buffer(0.8 * r)  # well inside the tire (centre at z = r)
    k, inside = next((k, seg.intersection(circle)) for k, seg in
                     ((k, LineString([outline[k], outline[(k + 1) % len(outline)]])) for k in range(len(outline)))
                     if seg.intersects(circle))
    pt = inside.interpolate(0.5, normalized=True)
    vb = view.plot.getPlotItem().vb
    vb.setRange(xRange=(w.x_m - 1.5 * r, w.x_m + 1.5 * r), yRange=(-0.2, 2.2 * r), padding=0)
    qtbot.wait(50)
    before = len(view.body_roi.getHandles())
    doc.select_wheel(doc.vehicle.wheels[0].id)
    click = view.plot.mapFromScene(vb.mapViewToScene(QPointF(pt.x, pt.y)))
    qtbot.mouseClick(view.plot.viewport(), Qt.MouseButton.LeftButton, pos=click)
    qtbot.waitUntil(lambda: doc.selected_wheel in {g.id for g in doc.vehicle.wheels if abs(g.x_m - w.x_m) < 1e-6},
                    timeout=3000)
    assert len(view.body_roi.getHandles()) == before and not doc.undo_stack.canUndo()
    # the same segment away from the wheels (the part outside every tire) still takes a corner
    seg = LineString([outline[k], outline[(k + 1) % len(outline)]])
    far = next(seg.interpolate(f, normalized=True) for f in np.linspace(0.05, 0.95, 19)
               if view.wheel_at(QPointF(seg.interpolate(f, normalized=True).x, seg.interpolate(f, normalized=True).y)) is None)
    assert view.body_roi.segmentClicked(view.body_roi.segments[k], pos=QPointF(far.x, far.y)) is None
    assert len(view.body_roi.getHandles()) == before + 1

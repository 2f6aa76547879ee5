"""Desktop program: dragging a spot, undo/redo, refused edits, heatmap worker, bad files, screenshot.

The reference for every margin is the engine itself (core.scoring.score_spots / score_vehicle /
heatmap), called here independently of the GUI: the tests check that the GUI stores and shows what
the engine computes for the geometry the user made with the mouse.
"""

import json
import math

import numpy as np
import pytest
from core.samples import DEFAULT_SAMPLE
from PySide6.QtCore import QEvent, QPoint, QPointF, Qt
from PySide6.QtGui import QImage, QMouseEvent
from PySide6.QtWidgets import QApplication

from core.scoring import Scene, heatmap, score_spots, score_vehicle
from core.vehicle import check_vehicle, load_vehicle


def _send(widget, kind, pos: QPoint, buttons) -> None:
    btn = Qt.MouseButton.LeftButton if kind != QEvent.Type.MouseMove else Qt.MouseButton.NoButton
    ev = QMouseEvent(kind, QPointF(pos), QPointF(widget.mapToGlobal(pos)), btn, buttons, Qt.KeyboardModifier.NoModifier)
    QApplication.sendEvent(widget, ev)


def mouse_drag(plot, start: QPoint, end: QPoint, steps: int = 8) -> None:
    """Press the left button at ``start``, move in steps to ``end`` and release (viewport pixels).

    pyqtgraph drops mouse moves that follow the previous one within 1/mouseRateLimit s (10 ms):
    the moves are spaced wider, or the drag would stop short wherever the moves came too fast."""
    import time

    import pyqtgraph as pg

    gap_s = 1.5 / max(1.0, float(pg.getConfigOption("mouseRateLimit")))
    vp = plot.viewport()
    _send(vp, QEvent.Type.MouseButtonPress, start, Qt.MouseButton.LeftButton)
    for k in range(1, steps + 1):
        p = start + (end - start) * (k / steps)
        time.sleep(gap_s)
        _send(vp, QEvent.Type.MouseMove, p, Qt.MouseButton.LeftButton)
        QApplication.processEvents()
    _send(vp, QEvent.Type.MouseButtonRelease, end, Qt.MouseButton.NoButton)
    QApplication.processEvents()


def _pixel(plot, scene_pos) -> QPoint:
    return plot.mapFromScene(scene_pos)


def _engine_margin(doc, name, pos):
    spot = doc.vehicle.spots[[s.name for s in doc.vehicle.spots].index(name)]
    axis = doc.vehicle.spot_axis(spot)[None, :]
    return float(score_spots(Scene.from_vehicle(doc.vehicle), np.asarray(pos)[None, :], axis).margin_db[0])


def test_drag_spot_in_top_view_then_undo_redo(window, qtbot):
    doc = window.doc
    name = doc.vehicle.spots[0].name
    doc.select(name)
    before = doc.spot_position(name)
    before_margin = window.readout.margin_db
    live = []
    doc.liveScore.connect(lambda n, sc: live.append(n))

    marker = window.top.markers[name]
    start = _pixel(window.top.plot, marker.scenePos())
    mouse_drag(window.top.plot, start, start + QPoint(0, -45))  # up on screen = towards +y (left)
    qtbot.wait(10)

    after = doc.spot_position(name)
    assert live and set(live) == {name}  # live scoring ran while dragging
    assert after[1] > before[1] + 0.05  # moved left by more than 5 cm
    assert after[0] == pytest.approx(before[0], abs=1e-9)  # a vertical drag keeps x
    assert after[2] == pytest.approx(before[2], abs=1e-12)  # the top view does not change z
    side = window.side.markers[name].pos()
    assert side.x() == pytest.approx(after[0], abs=1e-9)  # the spot's x is shared with the side view
    assert side.y() == pytest.approx(after[2], abs=1e-9)
    engine = _engine_margin(doc, name, after)
    assert window.readout.margin_db == pytest.approx(engine, abs=1e-9)
    assert f"{engine:+.2f} dB" in window.readout.text()
    assert doc.modified and window.isWindowModified()

    window.actions["undo"].trigger()
    qtbot.wait(10)
    assert doc.spot_position(name) == pytest.approx(before, abs=1e-12)
    assert window.readout.margin_db == pytest.approx(before_margin, abs=1e-12)
    assert window.top.markers[name].pos().y() == pytest.approx(before[1], abs=1e-9)
    assert not window.isWindowModified()

    window.actions["redo"].trigger()
    qtbot.wait(10)
    assert doc.spot_position(name) == pytest.approx(after, abs=1e-12)
    assert window.readout.margin_db == pytest.approx(engine, abs=1e-9)


def test_self_crossing_vertex_drag_is_refused(window, qtbot):
    doc = window.doc
    outline = doc.vehicle.body.top_outline
    depth = doc.undo_stack.count()
    messages = []
    doc.statusMessage.connect(messages.append)
    roi = window.top.body_roi
    h = roi.getHandles()[0]  # the vertex at the front right corner
    start = _pixel(window.top.plot, h.scenePos())
    # drag it beyond the left side, rearwards: both of its edges then cut the left side edge (y = 0.92 m)
    target = window.top.plot.getPlotItem().vb.mapViewToScene(QPointF(-3.0, 1.3))
    mouse_drag(window.top.plot, start, _pixel(window.top.plot, target), steps=12)
    qtbot.wait(10)
    assert doc.vehicle.body.top_outline == outline
    assert doc.undo_stack.count() == depth
    check_vehicle(doc.vehicle)
    assert any("refused" in m and "crosses itself" in m for m in messages)
    assert window.statusBar().currentMessage().startswith("Edit refused")
    # the view went back to the last valid outline
    qtbot.wait(20)
    pts = window.top._roi_points(window.top.body_roi)
    assert np.allclose(pts, outline)


def test_heatmap_through_worker_cancel_and_table_order(window, qtbot):
    panel = window.ranking.heatmap
    doc = window.doc
    panel.step.setCurrentIndex(panel.step.findData(0.2))
    with qtbot.waitSignal(panel.heatmapReady, timeout=60000) as blocker:
        panel.start()
    hm = blocker.args[0]
    region = doc.vehicle.regions[doc.region_index]
    ref = heatmap(Scene.from_vehicle(doc.vehicle), region, 0.2)
    np.testing.assert_array_equal(np.isnan(hm.margin_db), np.isnan(ref.margin_db))
    np.testing.assert_allclose(hm.margin_db[~np.isnan(ref.margin_db)], ref.margin_db[~np.isnan(ref.margin_db)])
    assert panel.image.image is not None and panel.image.image.shape == hm.margin_db.T.shape
    assert panel.compute.isEnabled() and not panel.cancel_button.isEnabled()

    # a fine grid takes many chunks: cancel stops it before the end
    panel.step.setCurrentIndex(panel.step.findData(0.025))
    results, cancelled = [], []
    panel.heatmapReady.connect(results.append)
    panel.start()
    panel.job.cancelled.connect(lambda: cancelled.append(True))
    with qtbot.waitSignal(panel.job.finished, timeout=60000):
        panel.cancel()
    assert cancelled == [True] and results == []
    assert panel.result is hm  # the last complete heatmap stays on screen
    assert "cancelled" in panel.readout.text()

    sc = score_vehicle(doc.vehicle, Scene.from_vehicle(doc.vehicle))
    assert window.ranking.table.names_in_order() == [sc.names[i] for i in sc.order()]


def test_add_spot_from_heatmap_cell(window, qtbot):
    panel = window.ranking.heatmap
    panel.step.setCurrentIndex(panel.step.findData(0.2))
    with qtbot.waitSignal(panel.heatmapReady, timeout=60000):
        panel.start()
    hm = panel.result
    x, y, z, m, _w = hm.best_cells(1)[0]
    menu = panel.spot_menu(x, y if hm.view == "top" else z)
    labels = [a.text() for a in menu.actions()]
    assert "Add a spot here" in labels
    n = len(window.doc.vehicle.spots)
    name = panel.add_spot_here(x, y if hm.view == "top" else z)
    assert len(window.doc.vehicle.spots) == n + 1
    assert window.doc.selected == name
    assert window.doc.spot_position(name) == pytest.approx((x, y, z), abs=1e-9)
    i = window.doc.scores.names.index(name)
    assert window.doc.scores.margin_db[i] == pytest.approx(m, abs=1e-9)  # the cell's margin is the spot's


def test_broken_file_shows_dialog_and_keeps_document(window, tmp_path, monkeypatch):
    import app.gui.dialogs

    shown = []
    monkeypatch.setattr(app.gui.dialogs.QMessageBox, "critical", lambda parent, title, text, *a: shown.append((title, text)))
    d = json.loads(DEFAULT_SAMPLE.read_text())
    d["wheels"][1]["tire"] = "225/50X17"
    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps(d))
    doc = window.doc
    vehicle, path, depth = doc.vehicle, doc.path, doc.undo_stack.count()
    assert window.open_path(bad) is False
    assert len(shown) == 1
    title, text = shown[0]
    assert title == "Cannot open the vehicle file"
    assert "wheels[1].tire" in text and str(bad) in text
    assert doc.vehicle is vehicle and doc.path == path and doc.undo_stack.count() == depth
    assert str(bad.resolve()) not in window.recent_files()


def test_open_good_file_goes_to_recent_files(window, tmp_path):
    from core.samples import SAMPLES_DIR

    p = SAMPLES_DIR / "cargo_van.json"
    assert window.open_path(p)
    assert window.doc.vehicle == load_vehicle(p)
    assert window.recent_files()[0] == str(p.resolve())
    assert "cargo_van.json" in window.windowTitle()


def test_recovery_copy_round_trip(qtbot, settings, monkeypatch):
    """A window's copy is written after an edit; a later start offers it once that window is gone."""
    import app.gui.dialogs
    from app.gui import edits
    from app.gui.document import Document
    from app.gui.recovery import find_orphans, recovery_dir
    from app.gui.window import MainWindow

    win = MainWindow(Document(load_vehicle(DEFAULT_SAMPLE), DEFAULT_SAMPLE), settings=settings)
    qtbot.addWidget(win)
    win.ranking.heatmap.auto.setChecked(False)
    doc = win.doc
    name = doc.vehicle.spots[0].name
    doc.apply(lambda v: edits.move_spot(v, name, (-1.0, 0.1, 0.5)), "move")
    f = win.write_recovery()
    assert f is not None and f.exists() and f.parent == recovery_dir(settings)
    assert find_orphans(recovery_dir(settings)) == []  # its window is open: not an orphan
    edited = doc.vehicle
    win.recovery._lock.unlock()  # as if the window's process had died (its lock is gone, the copy stays)
    win.recovery._lock = None

    other = MainWindow(Document(load_vehicle(DEFAULT_SAMPLE), DEFAULT_SAMPLE), settings=settings)
    qtbot.addWidget(other)
    other.ranking.heatmap.auto.setChecked(False)
    offered = []
    monkeypatch.setattr(app.gui.dialogs, "ask_recover", lambda _p, orphans: (offered.extend(orphans), ("open", [0]))[1])
    assert other.offer_recovery()
    assert [o.title for o in offered] == [DEFAULT_SAMPLE.name]
    assert other.doc.vehicle == edited and other.doc.modified and other.doc.path == DEFAULT_SAMPLE
    assert not f.exists()  # adopted: the new window keeps its own copy instead
    assert other.recovery.exists()
    other.doc.undo_stack.setClean()
    doc.undo_stack.setClean()


def test_screenshot_writes_png(tmp_path):
    from app.cli.main import main

    out = tmp_path / "shot.png"
    assert main([str(DEFAULT_SAMPLE), "--screenshot", str(out)]) == 0
    img = QImage(str(out))
    assert not img.isNull() and img.width() >= 1200 and img.height() >= 700


def test_outline_segments_keep_their_shape_only_while_it_holds(window, qtbot):
    """The editable outlines' segments keep their shape between repaints (app.gui.body_views._OutlineSegment),
    and only while it holds: after a vertex moves, or the view zooms, the shape is a band a few pixels wide
    around the segment as it now stands (pyqtgraph's band is 4 px, or 16 px once its shared pixel-vector
    cache has been scaled in place by a segment's ``pxv *= 4``; either is accepted, a stale band is not)."""
    from PySide6.QtWidgets import QGraphicsItem

    from app.gui.body_views import _OutlineSegment

    roi = window.top.body_roi
    qtbot.wait(20)

    def band(seg):
        """(largest distance of the shape's corners from the segment's line, px; the segment's ends, px)."""
        dt = seg.deviceTransform_()
        a, b = (dt.map(QGraphicsItem.pos(h["item"])) for h in seg.handles)
        ux, uy = b.x() - a.x(), b.y() - a.y()
        n = math.hypot(ux, uy)
        pts = [dt.map(p) for p in seg.shape().toFillPolygon()]
        dist = max(abs((p.x() - a.x()) * uy - (p.y() - a.y()) * ux) / n for p in pts)
        along = [((p.x() - a.x()) * ux + (p.y() - a.y()) * uy) / n for p in pts]
        return dist, min(along), max(along), n

    assert roi.segments and all(isinstance(s, _OutlineSegment) for s in roi.segments)
    seg = roi.segments[0]
    assert seg.shape() is seg.shape()  # kept while nothing changed
    d, lo, hi, n = band(seg)
    assert 2.0 <= d <= 20.0 and lo == pytest.approx(0.0, abs=1e-6) and hi == pytest.approx(n, rel=1e-9)
    h = seg.handles[1]["item"]
    roi.movePoint(h, h.scenePos() + QPointF(25, 15), coords="scene", finish=False)  # the band follows the vertex
    d, lo, hi, n2 = band(seg)
    assert n2 != pytest.approx(n) and 2.0 <= d <= 20.0
    assert lo == pytest.approx(0.0, abs=1e-6) and hi == pytest.approx(n2, rel=1e-9)
    window.top.plot.getPlotItem().vb.scaleBy((0.05, 0.05))  # zoom in 20x: a kept band would be 20x wider
    qtbot.wait(20)
    d, lo, hi, n3 = band(seg)
    assert n3 > 10 * n2 and 2.0 <= d <= 20.0

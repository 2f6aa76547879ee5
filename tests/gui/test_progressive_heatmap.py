"""Desktop program: the progressive heatmap (issue 17 item 3).

A coarse grid is shown first and refined while the user looks; while an outline vertex is dragged
(with "auto" on) the heatmap is recomputed for the outline under the mouse, each move cancelling the
run of the move before. The reference for every value is the engine itself: ``core.scoring.heatmap``
called here, independently of the GUI, on the same geometry (equal to the last bit).
"""

from __future__ import annotations

import numpy as np
from PySide6.QtCore import QPointF

from app.gui import edits
from core.scoring import Scene, heatmap


def _events(panel) -> list:
    seen = []
    panel.stageShown.connect(lambda hm: seen.append(("stage", hm)))
    panel.heatmapReady.connect(lambda hm: seen.append(("full", hm)))
    return seen


def test_the_coarse_stage_shows_before_the_fine_one_and_the_end_is_the_engines_heatmap(window, qtbot):
    panel = window.ranking.heatmap
    panel.step.setCurrentIndex(panel.step.findData(0.1))
    seen = _events(panel)
    panel.start()
    qtbot.waitUntil(lambda: bool(seen) and seen[-1][0] == "full", timeout=120_000)
    kinds = [k for k, _ in seen]
    assert kinds == ["stage", "stage", "full"]
    assert [hm.stride for _, hm in seen] == [4, 2, 1]
    coarse, full = seen[0][1], seen[-1][1]
    assert coarse.step_m == 4 * full.step_m and coarse.margin_db.size < full.margin_db.size
    ref = heatmap(Scene.from_vehicle(window.doc.vehicle), panel.region(), 0.1)
    np.testing.assert_array_equal(full.margin_db, ref.margin_db)  # the non-progressive engine heatmap, exactly
    np.testing.assert_array_equal(full.worst_wheel, ref.worst_wheel)
    np.testing.assert_array_equal(coarse.margin_db, ref.margin_db[1::4, 1::4])  # the same cells' values
    assert panel.result is full and panel.image.image is not None
    assert panel.compute.isEnabled() and not panel.cancel_button.isEnabled()
    assert "cells at" in panel.readout.text()


def _top_roi_vertex(window, k: int):
    roi = window.top.body_roi
    return roi, roi.getHandles()[k]


def test_dragging_an_outline_vertex_recomputes_and_each_move_cancels_the_last(window, qtbot):
    doc, panel = window.doc, window.ranking.heatmap
    panel.auto.setChecked(True)
    panel.step.setCurrentIndex(panel.step.findData(0.05))  # long enough runs that a move lands mid-run
    roi, handle = _top_roi_vertex(window, 0)
    start = roi.mapToParent(handle.pos())
    before = doc.vehicle
    seen = _events(panel)
    states = []
    for k in range(1, 5):  # what the handle's mouseDragEvent does on each move: ROI.movePoint
        roi.movePoint(handle, QPointF(start.x() + 0.01 * k, start.y()), finish=False)
        qtbot.waitUntil(lambda: panel.job is not None, timeout=10_000)
        qtbot.wait(50)
        states.append((panel.compute.isEnabled(), panel.cancel_button.isEnabled(), panel.readout.text()))
    assert doc.vehicle is before  # nothing is edited while dragging
    for compute, cancel, text in states:
        assert not compute and cancel and "cancelled" not in text
    qtbot.waitUntil(lambda: any(k == "full" for k, _ in seen), timeout=180_000)
    full = [hm for k, hm in seen if k == "full"]
    assert len(full) == 1  # only the last move's run ended: the others were cancelled by the next move
    last = edits.set_outline(before, "top_outline", window.top._roi_points(roi))
    assert last != before
    assert panel._shown_for[0] == last
    ref = heatmap(Scene.from_vehicle(last), panel.region(), 0.05)
    np.testing.assert_array_equal(full[0].margin_db, ref.margin_db)
    assert panel.compute.isEnabled() and not panel.cancel_button.isEnabled()
    # the drop makes the edit; the heatmap shown is already of that outline: not computed again
    roi.stateChangeFinished()
    qtbot.wait(600)  # longer than the auto-restart delay
    assert doc.vehicle == last and panel.job is None and panel.result is full[0]
    assert doc.undo_stack.count() == 1


def test_cancel_during_a_drag_stops_for_good(window, qtbot):
    panel = window.ranking.heatmap
    panel.auto.setChecked(True)
    panel.step.setCurrentIndex(panel.step.findData(0.025))
    roi, handle = _top_roi_vertex(window, 1)
    start = roi.mapToParent(handle.pos())
    stopped = []
    for k in range(1, 3):
        roi.movePoint(handle, QPointF(start.x() + 0.01 * k, start.y()), finish=False)
        qtbot.waitUntil(lambda: panel.job is not None, timeout=10_000)
        qtbot.wait(50)  # the move's preview is sent on the next turn of the event loop
    job = panel.job
    job.ended.connect(stopped.append)
    panel.cancel()
    assert not panel.cancel_button.isEnabled()
    qtbot.waitUntil(lambda: bool(stopped), timeout=60_000)
    qtbot.wait(100)
    assert panel.job is None and not panel.is_running()
    assert panel.compute.isEnabled() and not panel.cancel_button.isEnabled()
    assert panel.readout.text() == "Heatmap cancelled."


def test_a_spot_edit_leaves_the_heatmap_alone_and_a_body_edit_recomputes_it(window, qtbot):
    """The margin map's cells are receiver positions of their own: moving, adding or removing a spot changes
    nothing it depends on, so with "auto" on a spot edit keeps the map shown (no run started, the map object
    the same); a body edit (a zone's material) starts a new run."""
    panel = window.ranking.heatmap
    panel.step.setCurrentIndex(panel.step.findData(0.1))
    panel.auto.setChecked(True)
    seen = _events(panel)
    panel.start()
    qtbot.waitUntil(lambda: any(k == "full" for k, _ in seen), timeout=120_000)
    shown = panel.result
    spot = window.doc.vehicle.spots[0]
    x, y, z = window.doc.vehicle.resolve_spot(spot)
    assert window.doc.apply(lambda v: edits.move_spot(v, spot.name, (x - 0.1, y, z)), "move spot")
    qtbot.wait(2 * panel._debounce.interval())
    assert panel.job is None and not panel._debounce.isActive() and panel.result is shown
    assert window.doc.apply(lambda v: edits.set_zone_material(v, 0, "plastic"), "zone material")
    qtbot.waitUntil(lambda: panel.job is not None, timeout=10_000)

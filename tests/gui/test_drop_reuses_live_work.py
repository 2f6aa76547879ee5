"""Desktop program: a dropped spot is not scored again where it was scored while dragged (issue 14 item 4).

The reference is the engine itself (core.scoring.score_spots and core.burst.burst_for_spot) called
here on the geometry the drop left in the document; the drop must show exactly those numbers, whether
it reused the live score or scored the spot anew. Speed is measured by ``wheelreach bench``, not here.
"""

from __future__ import annotations

import numpy as np
import pytest

from app.gui import document, edits
from core.burst import burst_for_spot
from core.scoring import score_spots


@pytest.fixture
def scored_rows(monkeypatch):
    """The rows the document scores (app.gui.document.score_rows), one list per call."""
    calls = []
    real = document.score_rows

    def spy(scene, positions, axes, rows, *a, **k):
        calls.append([int(r) for r in rows])
        return real(scene, positions, axes, rows, *a, **k)

    monkeypatch.setattr(document, "score_rows", spy)
    return calls


def _engine_row(doc, name):
    i = doc.spot_row(name)
    return score_spots(doc.scene, doc.scores.positions[i][None, :], doc._spot_axis(name))


def test_a_drop_where_the_live_score_was_computed_scores_nothing_again(window, qtbot, scored_rows):
    doc = window.doc
    name = doc.selected
    x, y, z = doc.spot_position(name)
    pos = (x + 0.02, y - 0.01, z)
    doc.live_move(name, pos)  # what a mouse move of the drag does
    live = doc.live[1]
    scored_rows.clear()
    assert doc.apply(lambda v: edits.move_spot(v, name, pos), "move")  # the drop at the same position
    assert all(rows == [] for rows in scored_rows)  # nothing scored: the live score was taken
    i = doc.spot_row(name)
    ref = _engine_row(doc, name)
    assert doc.scores.margin_db[i] == ref.margin_db[0] == live.margin_db[0]
    np.testing.assert_array_equal(doc.scores.levels_dbm[i], ref.levels_dbm[0])
    # the figures show the dropped spot (no "moving"), with its burst from the engine
    figs = window.ranking.figures
    qtbot.waitUntil(lambda: not figs.burst_pending(), timeout=30_000)
    assert "(moving)" not in figs.levels.getPlotItem().titleLabel.text
    curves = figs._level_items[3]
    for w, curve in enumerate(curves):
        np.testing.assert_array_equal(curve.yData[:-1], doc.scores.levels_dbm[i, w])
    expected = burst_for_spot(doc.scene, doc.scores, i)
    np.testing.assert_array_equal(figs.burst_result.success, expected.success)


def test_a_drop_elsewhere_scores_the_spot_again(window, scored_rows):
    doc = window.doc
    name = doc.selected
    x, y, z = doc.spot_position(name)
    doc.live_move(name, (x + 0.02, y, z))
    scored_rows.clear()
    pos = (x + 0.03, y, z)  # released somewhere the live score was not computed
    assert doc.apply(lambda v: edits.move_spot(v, name, pos), "move")
    assert [doc.spot_row(name)] in scored_rows
    i = doc.spot_row(name)
    assert doc.scores.margin_db[i] == _engine_row(doc, name).margin_db[0]


def test_live_curves_follow_the_drag_without_new_plot_items(window, qtbot):
    doc, figs = window.doc, window.ranking.figures
    name = doc.selected
    qtbot.waitUntil(lambda: not figs.burst_pending(), timeout=30_000)
    items = list(figs.levels.getPlotItem().items)
    x, y, z = doc.spot_position(name)
    for k in range(1, 4):
        doc.live_move(name, (x + 0.02 * k, y, z))
        sc = doc.live[1]
        assert list(figs.levels.getPlotItem().items) == items  # the same curves, new data
        for w, curve in enumerate(figs._level_items[3]):
            np.testing.assert_array_equal(curve.yData[:-1], sc.levels_dbm[0, w])
        assert "(moving)" in figs.levels.getPlotItem().titleLabel.text


def test_the_burst_started_at_the_release_is_the_dropped_spots(window, qtbot, monkeypatch):
    """The burst figure's worker starts as the mouse is released (before the edit is made); the figure then
    shows that result, computed once, and it is the engine's burst of the spot where it was dropped. A drop
    somewhere else does not take it."""
    from app.gui import ranking_panel

    doc, figs = window.doc, window.ranking.figures
    name = doc.selected
    qtbot.waitUntil(lambda: not figs.burst_pending(), timeout=30_000)
    calls = []
    real = ranking_panel.burst_for_spot

    def spy(scene, scores, i, cancel=None):
        calls.append(np.array(scores.levels_dbm[i]))
        return real(scene, scores, i, cancel=cancel)

    monkeypatch.setattr(ranking_panel, "burst_for_spot", spy)
    x, y, z = doc.spot_position(name)
    pos = (x + 0.02, y - 0.01, z)
    doc.live_move(name, pos)
    doc.live_released(name, pos)  # what the release does before the edit
    assert len(calls) <= 1
    qtbot.waitUntil(lambda: len(calls) == 1 and figs._ahead is not None and figs._ahead[2] is not None, timeout=30_000)
    assert doc.apply(lambda v: edits.move_spot(v, name, pos), "move")
    qtbot.waitUntil(lambda: not figs.burst_pending(), timeout=30_000)
    assert len(calls) == 1  # the result computed at the release was drawn; no second worker
    i = doc.spot_row(name)
    np.testing.assert_array_equal(figs.burst_result.success, burst_for_spot(doc.scene, doc.scores, i).success)
    # released at one place, the edit made at another (e.g. snapped differently): computed anew for the latter
    doc.live_move(name, (x + 0.04, y, z))
    doc.live_released(name, (x + 0.04, y, z))
    other = (x + 0.05, y, z)
    assert doc.apply(lambda v: edits.move_spot(v, name, other), "move")
    qtbot.waitUntil(lambda: not figs.burst_pending(), timeout=30_000)
    i = doc.spot_row(name)
    np.testing.assert_array_equal(calls[-1], doc.scores.levels_dbm[i])
    np.testing.assert_array_equal(figs.burst_result.success, burst_for_spot(doc.scene, doc.scores, i).success)

"""Desktop program: a spot dragged outside the body is flagged live (markers, table, readout) and after the drop.

The reference is core.placement.classify, called here on the same position.
"""

from app.gui import edits
from app.gui.body_views import OUTSIDE_BRUSH, SELECTED_BRUSH, SPOT_BRUSH
from core.placement import classify


def _placement_cell(window, name):
    t = window.ranking.table
    row = next(r for r in range(t.rowCount()) if t.item(r, 2).text() == name)
    return t.item(row, t.PLACEMENT_COLUMN)


def test_spot_moved_outside_is_flagged_live_and_after_the_edit(window, qtbot):
    doc = window.doc
    name = "centre console"
    other = "trunk floor"
    doc.select(other)
    assert _placement_cell(window, name).text() == "ok"
    assert window.top.markers[name].brush.color() == SPOT_BRUSH.color()
    below = (-1.35, 0.0, 0.05)  # under the sedan's floor (underside about 0.19 m there)
    expected = classify(doc.scene, [below])
    assert expected.status[0] == "outside_body"

    doc.live_move(name, below)  # what a drag in the side view does on every mouse move
    qtbot.wait(10)
    for view in (window.top, window.side):
        assert view.placement[name] == ("outside_body", expected.message(0))
        assert view.markers[name].brush.color() == OUTSIDE_BRUSH.color()
        assert "Warning: lies below the body's underside" in view.markers[name].toolTip()
    cell = _placement_cell(window, name)
    assert cell.text() == "OUTSIDE BODY" and cell.toolTip() == expected.message(0)

    assert doc.apply(lambda v: edits.move_spot(v, name, below), f"Move spot '{name}'")
    qtbot.wait(20)  # the views rebuild after the event
    assert window.top.markers[name].brush.color() == OUTSIDE_BRUSH.color()
    assert _placement_cell(window, name).text() == "OUTSIDE BODY"
    doc.select(name)
    assert "OUTSIDE BODY" in window.readout.text()

    window.actions["undo"].trigger()
    qtbot.wait(20)
    assert _placement_cell(window, name).text() == "ok"
    assert window.top.markers[name].brush.color() == SELECTED_BRUSH.color()  # selected, no longer flagged
    assert "OUTSIDE" not in window.readout.text()

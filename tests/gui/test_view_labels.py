"""Body views: spot labels that never overlap, each spot's receiver axis, the side the side view shows."""

import numpy as np
import pytest
from PySide6.QtWidgets import QGraphicsEllipseItem, QGraphicsLineItem

from app.gui import edits
from app.gui.body_views import (
    LABEL_GAP_PX,
    LABEL_INSET_PX,
    LABEL_PLACES,
    MARKER_CLEAR_PX,
    SIDE_VIEW_TITLE,
    place_labels,
)


def _rect(c, size, k):
    (ox, oy), (ax, ay) = LABEL_PLACES[k]
    w, h = size
    x0 = c[0] + ox - ax * w + LABEL_INSET_PX
    top = c[1] + oy + ay * h - LABEL_INSET_PX
    return (x0, top - (h - 2 * LABEL_INSET_PX), x0 + w - 2 * LABEL_INSET_PX, top)


def test_placed_labels_do_not_overlap_each_other_or_other_markers():
    rng = np.random.default_rng(7)  # fixed seed: a crowd of 30 markers in a 200 x 120 px patch
    centres = rng.uniform((0, 0), (200, 120), size=(30, 2))
    sizes = [(24.0, 22.0)] * 30
    sizes[0] = (140.0, 22.0)  # the selected spot's label carries its name
    ks = place_labels(centres, sizes, range(30))
    assert ks[0] >= 0  # the first (selected) label always finds a place in a crowd like this
    rects = {i: _rect(centres[i], sizes[i], k) for i, k in enumerate(ks) if k >= 0}
    assert len(rects) >= 20  # most labels are shown
    for i, a in rects.items():
        for j, b in rects.items():
            if i < j:
                g = LABEL_GAP_PX - 1e-9  # apart by at least the gap
                assert not (a[0] < b[2] + g and b[0] < a[2] + g and a[1] < b[3] + g and b[1] < a[3] + g), (i, j)
        for j, c in enumerate(centres):
            if j != i:
                nx, ny = np.clip(c[0], a[0], a[2]) - c[0], np.clip(c[1], a[1], a[3]) - c[1]
                assert np.hypot(nx, ny) >= MARKER_CLEAR_PX - 1e-9, (i, j)


def test_labels_keep_off_the_axis_lines():
    rng = np.random.default_rng(11)  # fixed seed: 12 markers, each with an axis line 15 px each way
    centres = rng.uniform((0, 0), (160, 100), size=(12, 2))
    angles = rng.uniform(0, np.pi, 12)
    axes = 15.0 * np.column_stack([np.cos(angles), np.sin(angles)])
    sizes = [(24.0, 22.0)] * 12
    ks = place_labels(centres, sizes, range(12), axes)
    assert sum(k >= 0 for k in ks) >= 8
    t = np.linspace(-1, 1, 41)  # finer than the placement's own sampling: a crossing line is found
    for i, k in enumerate(ks):
        if k < 0:
            continue
        a = _rect(centres[i], sizes[i], k)
        for j in range(12):
            pts = centres[j] + t[:, None] * axes[j]
            inside = (pts[:, 0] > a[0]) & (pts[:, 0] < a[2]) & (pts[:, 1] > a[1]) & (pts[:, 1] < a[3])
            assert not inside.any(), (i, j)


def test_labels_keep_off_the_outline_where_they_can():
    """The body outline's lines are a soft rule: a label takes the first place clear of them, and where every
    place crosses one it is still shown (at its first free place) rather than hidden."""
    c, size = (100.0, 100.0), (120.0, 22.0)
    first = place_labels([c], [size], [0])[0]
    a = _rect(c, size, first)
    line = np.column_stack([np.linspace(0, 300, 301), np.full(301, 0.5 * (a[1] + a[3]))])  # through that place
    k = place_labels([c], [size], [0], avoid=line)[0]
    assert k >= 0 and k != first
    b = _rect(c, size, k)
    assert not ((line[:, 0] > b[0]) & (line[:, 0] < b[2]) & (line[:, 1] > b[1]) & (line[:, 1] < b[3])).any()
    grid = np.stack(np.meshgrid(np.arange(0, 300, 2.0), np.arange(0, 300, 2.0)), -1).reshape(-1, 2)
    assert place_labels([c], [size], [0], avoid=grid)[0] == first  # nowhere clear: shown all the same


def test_two_spots_at_one_place_get_labels_on_different_sides():
    ks = place_labels([(50.0, 50.0), (50.0, 50.0)], [(24.0, 22.0), (24.0, 22.0)], [0, 1])
    assert ks[0] >= 0 and ks[1] >= 0 and ks[0] != ks[1]


def test_side_view_title_matches_the_drawing_direction(window):
    # ISO 8855: x forward, y left, z up. Seen from the right (viewer at -y looking toward +y) with z up,
    # the viewer's right hand points along (+y) x (+z) = +x: forward is drawn to the right, as in this view.
    assert np.allclose(np.cross([0, 1, 0], [0, 0, 1]), [1, 0, 0])
    assert window.side.plot.getPlotItem().titleLabel.text == SIDE_VIEW_TITLE
    assert "from the right" in SIDE_VIEW_TITLE
    vb = window.side.plot.getPlotItem().vb
    assert not vb.xInverted()  # forward to the right


def test_each_spot_axis_is_drawn_in_both_views(window, qtbot):
    doc = window.doc
    name = doc.selected
    # the sedan's receiver setting is z (up): a vertical line in the side view, a dot in the top view
    assert tuple(doc.vehicle.radio.receiver.axis) == (0.0, 0.0, 1.0)
    assert isinstance(window.side.markers[name].axis_item, QGraphicsLineItem)
    assert isinstance(window.top.markers[name].axis_item, QGraphicsEllipseItem)
    line = window.side.markers[name].axis_item.line()
    assert line.dx() == pytest.approx(0.0) and abs(line.dy()) > 0
    assert doc.apply(lambda v: edits.set_spot_axis(v, name, (1.0, 1.0, 0.0)), "axis")
    qtbot.waitUntil(lambda: not window.top._rebuild_pending and not window.side._rebuild_pending)
    top = window.top.markers[name].axis_item
    assert isinstance(top, QGraphicsLineItem)  # 45 deg in the top view: x and y alike (y up = -dy in pixels)
    assert top.line().dx() == pytest.approx(-top.line().dy())
    side = window.side.markers[name].axis_item
    assert isinstance(side, QGraphicsLineItem) and side.line().dy() == pytest.approx(0.0)
    assert "own (0.71, 0.71, 0)" in window.top.markers[name].toolTip()


def test_view_labels_do_not_overlap_on_the_sedan(window, qtbot):
    qtbot.wait(200)  # the label timer (60 ms) runs after the views settle
    for view in (window.top, window.side):
        rects = []
        for m in view.markers.values():
            lab = m.label()
            if lab is not None and lab.isVisible():
                r = lab.sceneBoundingRect().adjusted(LABEL_INSET_PX, LABEL_INSET_PX, -LABEL_INSET_PX, -LABEL_INSET_PX)
                rects.append(r)
        assert len(rects) >= len(view.markers) - 2
        for i, a in enumerate(rects):
            for b in rects[i + 1:]:
                assert not a.intersects(b), view.view

"""Top view and side view of the body: outlines, zones, wheels, mounting region and receiver spots.

Both views are editable: drag an outline vertex, click an outline segment to add a vertex (where it
runs over a wheel the click selects the wheel),
right-click a vertex to remove it; drag a wheel; drag a receiver spot (live margin while dragging,
the edit is made when the mouse is released). The views write user input to the document only;
they redraw from the document's signals. A spot's x is shared by both views.
"""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from pyqtgraph.graphicsItems.ROI import _PolyLineSegment  # the segment PolyLineROI builds (pyqtgraph 0.14)
from PySide6.QtCore import QPointF, QRectF, Qt, QTimer, Signal
from PySide6.QtGui import QBrush, QPen, QPolygonF
from PySide6.QtWidgets import (
    QGraphicsEllipseItem,
    QGraphicsItem,
    QGraphicsLineItem,
    QGraphicsPolygonItem,
    QGraphicsRectItem,
    QHBoxLayout,
    QLabel,
    QVBoxLayout,
    QWidget,
)

from app.gui import edits
from app.gui.document import Document
from app.gui.look import BODY_COLOUR, lock_aspect, material_colour, show_grid
from app.gui.properties_panel import axis_text, spot_axis_note
from app.gui.tasks import run_soon
from core.placement import INSIDE, NEAR_SURFACE

#: above this many spots a view draws them as one scatter item, with a marker for the selected one only
MAX_SPOT_MARKERS = 40
SPOT_BRUSH = pg.mkBrush(255, 255, 255, 220)
SPOT_PEN = pg.mkPen(20, 20, 20, width=1.5)
SELECTED_BRUSH = pg.mkBrush(250, 200, 40, 255)
SELECTED_PEN = pg.mkPen(0, 0, 0, width=2.5)
#: spots that are not a receiver position (outside the body, in a wheelhouse) and spots too near a panel
OUTSIDE_BRUSH = pg.mkBrush(215, 30, 30, 255)
OUTSIDE_PEN = pg.mkPen(120, 0, 0, width=2.0)
NEAR_BRUSH = pg.mkBrush(255, 150, 40, 255)


#: the side view draws x (forward) to the right and z up: the body as seen from its right side
SIDE_VIEW_TITLE = "Side view (seen from the right, front to the right)"
#: half length of a spot's receiver axis line, px, for an axis lying in the view's plane
AXIS_HALF_PX = 15.0
#: below this projected length (unit axis) the axis points mostly along the line of sight: drawn as a dot
AXIS_DOT_BELOW = 0.3
AXIS_PEN = pg.mkPen(20, 80, 190, width=2.5)
WHEEL_PEN = pg.mkPen(30, 30, 30, width=1.5)
WHEEL_SELECTED_PEN = pg.mkPen(20, 80, 190, width=3)


#: where a spot's label may go around its marker, tried in this order: (offset px, x right / y up; TextItem anchor)
_LABEL_AROUND = (((6, 3), (0, 1)), ((8, 0), (0, 0.5)), ((6, -3), (0, 0)), ((-6, 3), (1, 1)), ((-8, 0), (1, 0.5)),
                 ((-6, -3), (1, 0)), ((0, 8), (0.5, 1)), ((0, -8), (0.5, 0)))
LABEL_PLACES = tuple(((ox * k, oy * k), a) for k in (1.0, 2.5) for (ox, oy), a in _LABEL_AROUND)
#: radius kept free around each marker centre, px (the marker is 11 px across)
MARKER_CLEAR_PX = 6.5
#: blank border of a text item around its text, px (not counted as overlap)
LABEL_INSET_PX = 3.5
#: least gap between two labels, px (so that neighbouring numbers do not read as one label)
LABEL_GAP_PX = 4.0


def place_labels(centres, sizes, order, axes=None, avoid=None) -> list[int]:
    """Choose a place for each label so that no two labels overlap and no label covers another marker or
    any spot's axis line; among those places, one that covers none of the points ``avoid`` (M, 2) px (the
    body outline's lines) when there is one.

    ``centres`` (N, 2) marker centres in pixels (x right, y up); ``sizes`` (N, 2) label width and height,
    px; ``order`` the markers by priority (the selected spot first); ``axes`` (N, 2) half of each axis
    line, px (the line runs from centre - axis to centre + axis; zero for none). Returns, per marker, the
    index into ``LABEL_PLACES`` or -1 when every place is taken (that label is hidden; the number stays
    in the tooltip)."""
    c = np.asarray(centres, float).reshape(-1, 2)
    ax = np.zeros_like(c) if axes is None else np.asarray(axes, float).reshape(-1, 2)
    t = np.linspace(-1.0, 1.0, 17)
    # points along every axis line (N * 17, 2), under 2 px apart; lines shorter than the marker are inside its disc already
    line_pts = (c[:, None, :] + t[None, :, None] * ax[:, None, :]).reshape(-1, 2)
    placed: list[tuple[float, float, float, float]] = []
    out = [-1] * len(c)
    soft = np.zeros((0, 2)) if avoid is None else np.asarray(avoid, float).reshape(-1, 2)

    def covers(pts, r) -> bool:
        return bool(np.any((pts[:, 0] > r[0] - 1) & (pts[:, 0] < r[2] + 1) & (pts[:, 1] > r[1] - 1)
                           & (pts[:, 1] < r[3] + 1)))

    for i in order:
        w, h = (float(t) - 2 * LABEL_INSET_PX for t in sizes[i])
        first_free = None  # the first place that breaks only the soft rule (covers an outline line)
        for k, ((ox, oy), (ax, ay)) in enumerate(LABEL_PLACES):
            x0 = c[i, 0] + ox - ax * (w + 2 * LABEL_INSET_PX) + LABEL_INSET_PX
            top = c[i, 1] + oy + ay * (h + 2 * LABEL_INSET_PX) - LABEL_INSET_PX
            r = (x0, top - h, x0 + w, top)
            g = LABEL_GAP_PX
            if any(r[0] < q[2] + g and q[0] < r[2] + g and r[1] < q[3] + g and q[1] < r[3] + g for q in placed):
                continue
            # the nearest point of the rectangle to each other marker centre must be clear of its disc
            nx = np.clip(c[:, 0], r[0], r[2]) - c[:, 0]
            ny = np.clip(c[:, 1], r[1], r[3]) - c[:, 1]
            hit = np.hypot(nx, ny) < MARKER_CLEAR_PX
            hit[i] = False
            if hit.any():
                continue
            if covers(line_pts, r):
                continue
            if covers(soft, r):
                first_free = first_free or (k, r)
                continue
            first_free = (k, r)
            break
        if first_free is not None:
            placed.append(first_free[1])
            out[i] = first_free[0]
    return out


def _cosmetic(pen: QPen) -> QPen:
    pen = QPen(pen)
    pen.setCosmetic(True)
    return pen


def _on_white(c, alpha: float):
    """The colour ``c`` painted at opacity ``alpha`` on white (for swatches in labels)."""
    from PySide6.QtGui import QColor

    return QColor(*(round(255 + alpha * (ch - 255)) for ch in (c.red(), c.green(), c.blue())))


def same_but_spots(a, b) -> bool:
    """True when vehicles ``a`` and ``b`` differ at most in their spots (added, removed, moved, renamed):
    everything a margin map depends on is the same (its cells are receiver positions of their own)."""
    return a.model_copy(update={"spots": ()}) == b.model_copy(update={"spots": ()})


def _only_spots_moved(a, b) -> bool:
    """True when vehicles ``a`` and ``b`` differ at most in where their spots are (same names, same order)."""
    return [s.name for s in a.spots] == [s.name for s in b.spots] and same_but_spots(a, b)


class SpotMarker(pg.TargetItem):
    """A draggable receiver spot; emits sigClicked on a left click."""

    sigClicked = Signal(object)

    def mouseClickEvent(self, ev):
        if ev.button() == Qt.MouseButton.LeftButton and not self.moving:
            ev.accept()
            self.sigClicked.emit(self)
            return
        super().mouseClickEvent(ev)

    def mouseDragEvent(self, ev):
        if ev.isStart() and ev.button() == Qt.MouseButton.LeftButton:
            self.sigClicked.emit(self)
        super().mouseDragEvent(ev)


class _HandleFreeEllipse(pg.EllipseROI):
    """A circle that can only be dragged (the tire in the side view)."""

    def __init__(self, pos, size, **kw):
        super().__init__(pos, size, **kw)
        for h in list(self.getHandles()):
            self.removeHandle(h)


class _OutlineSegment(_PolyLineSegment):
    """A segment of an editable outline that keeps its shape while its ends and the view's scale stay.

    Qt asks every item of a view for its bounding rectangle on every repaint, and pyqtgraph's line
    segment builds its shape (a band 4 px wide around the line) anew each time: about a third of the
    repaint of a view while a spot is dragged. The shape depends on the two ends and on the view's
    scale and rotation only (translation is ignored, as in ``pixelVectors``), so it is kept for those."""

    _key: tuple | None = None
    _path = None

    def shape(self):
        h1, h2 = (QGraphicsItem.pos(h["item"]) for h in self.handles)
        dt = self.deviceTransform_()
        key = None if dt is None else (h1.x(), h1.y(), h2.x(), h2.y(), dt.m11(), dt.m12(), dt.m21(), dt.m22())
        if key is None or key != self._key:
            self._path, self._key = super().shape(), key
        return self._path


class _Outline(pg.PolyLineROI):
    """pyqtgraph's editable polygon, built from segments that keep their shape (``_OutlineSegment``)."""

    def addSegment(self, h1, h2, index=None):
        # pyqtgraph 0.14's PolyLineROI.addSegment, with the segment class replaced
        seg = _OutlineSegment(handles=(h1, h2), pen=self.pen, hoverPen=self.hoverPen,
                              parent=self, movable=False, antialias=self._antialias)
        if index is None:
            self.segments.append(seg)
        else:
            self.segments.insert(index, seg)
        seg.sigClicked.connect(self.segmentClicked)
        seg.setAcceptedMouseButtons(Qt.MouseButton.LeftButton)
        seg.setZValue(self.zValue() + 1)
        for h in seg.handles:
            h["item"].setDeletable(True)
            # the handles take left clicks too, so that a handle cannot be added on top of another
            h["item"].setAcceptedMouseButtons(h["item"].acceptedMouseButtons() | Qt.MouseButton.LeftButton)


class _BodyOutline(_Outline):
    """The body outline: a click on a segment adds a vertex there, except where the segment runs over a
    wheel - there the click selects the wheel (``wheel_at(point)`` names the wheel under a point of the
    view, m, or None), as a click anywhere else on the wheel does."""

    def __init__(self, points, wheel_at, select_wheel, **kw):
        super().__init__(points, **kw)
        self._wheel_at, self._select_wheel = wheel_at, select_wheel

    def segmentClicked(self, segment, ev=None, pos=None):
        at = segment.mapToParent(ev.pos()) if ev is not None else pos
        wid = self._wheel_at(at) if at is not None else None
        if wid is not None:
            if ev is not None:
                ev.accept()
            self._select_wheel(wid)
            return
        super().segmentClicked(segment, ev, pos)


class BodyView(QWidget):
    """One view of the body: 'top' (x, y) or 'side' (x, z), in metres; readouts in mm."""

    def __init__(self, doc: Document, view: str, parent: QWidget | None = None):
        super().__init__(parent)
        self.doc, self.view = doc, view
        self._sync = False  # True while the view moves its own items (no edits, no live scoring)
        self._rebuild_pending = False
        self.markers: dict[str, SpotMarker] = {}
        self.placement: dict[str, tuple[str, str]] = {}  # spot name -> (core.placement status, warning)
        self.spot_cloud: pg.ScatterPlotItem | None = None
        self._drawn = None  # the vehicle the editable items were built from
        self.body_roi: pg.PolyLineROI | None = None
        self.zone_roi: pg.PolyLineROI | None = None
        self.region_roi: pg.PolyLineROI | None = None
        self.wheel_rois: dict[str, pg.ROI] = {}
        self._items: list = []

        self.plot = pg.PlotWidget(background="w")
        lock_aspect(self.plot)
        show_grid(self.plot)
        vert = "y, left" if view == "top" else "z, up"
        for side, text in (("bottom", "x, forward"), ("left", vert)):
            ax = self.plot.getAxis(side)
            ax.enableAutoSIPrefix(False)
            self.plot.setLabel(side, text, units="m")
        # x forward is drawn to the right with z up: that is the car as seen from its right side (viewer at -y
        # looking toward +y, ISO 8855 axes), so the title says so (the x axis is shared with the top view)
        title = "Top view (from above, front to the right)" if view == "top" else SIDE_VIEW_TITLE
        self.plot.setTitle(title, size="10pt")
        self.plot.setMenuEnabled(False)
        self.legend = QLabel(" ")
        self.legend.setToolTip("Panel zones drawn in this view, by material")
        self.readout = QLabel(" ")
        self.readout.setToolTip("Cursor position in vehicle axes, mm (origin on the ground below the front axle)")
        lay = QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        lay.setSpacing(2)
        lay.addWidget(self.plot, 1)
        row = QHBoxLayout()
        row.addWidget(self.legend)
        row.addStretch(1)
        row.addWidget(self.readout)
        lay.addLayout(row)
        self.plot.scene().sigMouseMoved.connect(self._mouse_moved)

        self.label_place: dict[str, int] = {}  # spot name -> index into LABEL_PLACES (-1: hidden)
        self._label_timer = QTimer(self)
        self._label_timer.setSingleShot(True)
        self._label_timer.setInterval(60)
        self._label_timer.timeout.connect(self.place_labels)
        vb = self.plot.getPlotItem().vb
        vb.sigRangeChanged.connect(lambda *_a: self._label_timer.start())
        vb.sigResized.connect(lambda *_a: self._label_timer.start())
        doc.vehicleChanged.connect(self._label_timer.start)
        doc.selectionChanged.connect(lambda _n: self._label_timer.start())
        doc.vehicleChanged.connect(self._on_vehicle_changed)
        doc.vehicleChanged.connect(self._refresh_axes)
        doc.wheelSelectionChanged.connect(self._restyle_wheels)  # a spot's axis changed: the markers stay, their axes follow
        doc.liveScore.connect(self._on_live)
        doc.selectionChanged.connect(self._restyle_markers)
        doc.zoneSelectionChanged.connect(lambda _i: self.schedule_rebuild())
        doc.regionSelectionChanged.connect(lambda _i: self.schedule_rebuild())
        self.rebuild()
        self.plot.autoRange(padding=0.06)

    # ----- coordinates -----------------------------------------------------------------
    def to_view(self, pos) -> tuple[float, float]:
        """(x, y, z) m -> this view's plane coordinates."""
        return (pos[0], pos[1]) if self.view == "top" else (pos[0], pos[2])

    def from_view(self, u: float, w: float, pos) -> tuple[float, float, float]:
        """This view's plane coordinates plus the spot's other coordinate -> (x, y, z) m."""
        return (u, w, pos[2]) if self.view == "top" else (u, pos[1], w)

    def _mouse_moved(self, scene_pos) -> None:
        vb = self.plot.getPlotItem().vb
        if not vb.sceneBoundingRect().contains(scene_pos):
            return
        p = vb.mapSceneToView(scene_pos)
        name = "y" if self.view == "top" else "z"
        self.readout.setText(f"cursor  x {p.x() * 1000:.0f} mm   {name} {p.y() * 1000:.0f} mm")

    # ----- redraw ----------------------------------------------------------------------
    def _on_vehicle_changed(self) -> None:
        v = self.doc.vehicle
        drawn, self._drawn = self._drawn, v
        if drawn is not None and v is not drawn and _only_spots_moved(drawn, v) and self._place_markers():
            return  # a spot moved: its markers moved, nothing else needs drawing again
        self._place_markers()
        self.schedule_rebuild()  # also when the vehicle is the one drawn: an edit was refused, undo the drag

    def schedule_rebuild(self) -> None:
        """Rebuild the editable items after the current event (an item may be handling a mouse event now)."""
        if not self._rebuild_pending:
            self._rebuild_pending = True
            run_soon(self, self._rebuild_if_pending)

    def _rebuild_if_pending(self) -> None:
        try:
            if self._rebuild_pending:
                self.rebuild()
        except RuntimeError:  # the view was destroyed while its redraw waited
            pass

    def rebuild(self) -> None:
        self._rebuild_pending = False
        self._drawn = self.doc.vehicle
        self._sync = True
        try:
            pi = self.plot.getPlotItem()
            for it in self._items:
                pi.removeItem(it)
            self._items = []
            self.markers = {}
            self.spot_cloud = None
            self.wheel_rois = {}
            v = self.doc.vehicle
            self._draw_zones(v)
            self._draw_region(v)
            self._draw_body(v)
            self._draw_wheels()
            self._draw_spots()
            self._restyle_wheels()
        finally:
            self._sync = False
        self._label_timer.start()

    def _add(self, item):
        self.plot.addItem(item)
        self._items.append(item)
        return item

    def _draw_body(self, v) -> None:
        pts = v.body.top_outline if self.view == "top" else v.body.side_outline
        roi = _BodyOutline([list(p) for p in pts], self.wheel_at, self.doc.select_wheel, closed=True, movable=False,
                           pen=pg.mkPen(BODY_COLOUR, width=2))
        roi.setZValue(10)
        roi.sigRegionChangeFinished.connect(self._body_edited)
        roi.sigRegionChanged.connect(lambda r: self._outline_moving("body", -1, r))
        self.body_roi = self._add(roi)

    def _draw_zones(self, v) -> None:
        seen: dict = {}
        for i, z in enumerate(v.zones):
            if z.view != self.view:
                continue
            poly = QGraphicsPolygonItem(QPolygonF([QPointF(*p) for p in z.outline]))
            poly.setBrush(QBrush(material_colour(z.material)))
            poly.setPen(_cosmetic(pg.mkPen(material_colour(z.material, 200), width=1)))
            poly.setZValue(1)
            poly.setToolTip(f"{z.name}: {z.material}")
            self._add(poly)
            seen.setdefault(z.material, _on_white(material_colour(z.material, 255), 0.45))
            if i == self.doc.selected_zone:
                roi = _Outline([list(p) for p in z.outline], closed=True, movable=True,
                                     pen=pg.mkPen(material_colour(z.material, 255), width=2))
                roi.setZValue(12)
                roi.sigRegionChangeFinished.connect(lambda r, i=i: self._zone_edited(i, r))
                roi.sigRegionChanged.connect(lambda r, i=i: self._outline_moving("zone", i, r))
                self.zone_roi = self._add(roi)
        parts = [f"<span style='background-color:{c.name()}'>&nbsp;&nbsp;&nbsp;&nbsp;</span> {m}" for m, c in seen.items()]
        self.legend.setText("zones: " + " &nbsp; ".join(parts) if parts else "no panel zones in this view")

    def _draw_region(self, v) -> None:
        self.region_roi = None
        if not v.regions:
            return
        i = self.doc.region_index
        r = v.regions[i]
        if r.view != self.view:
            return
        roi = _Outline([list(p) for p in r.outline], closed=True, movable=True,
                             pen=pg.mkPen(90, 90, 90, width=1.5, style=Qt.PenStyle.DashLine))
        roi.setZValue(5)
        roi.setToolTip(f"Mounting region '{r.name}' (heatmap area)")
        roi.sigRegionChangeFinished.connect(lambda rr, i=i: self._region_edited(i, rr))
        roi.sigRegionChanged.connect(lambda rr, i=i: self._outline_moving("region", i, rr))
        self.region_roi = self._add(roi)

    def _draw_wheels(self) -> None:
        tire_pen = WHEEL_PEN
        rim_pen = _cosmetic(pg.mkPen(110, 110, 110, width=1))
        groups: dict[tuple, list] = {}
        for w in self.doc.scene.wheels:
            # the side view shows one circle per axle position and size (left, right and dual wheels overlap)
            key = (w.id,) if self.view == "top" else (round(w.centre[0], 3), round(w.tire_radius_m, 4))
            groups.setdefault(key, []).append(w)
        for ws in groups.values():
            if self.view == "side":
                ws = sorted(ws, key=lambda g: g.centre[1])  # seen from the right: the right-hand wheel is the near one
            w = ws[0]
            ids = [g.id for g in ws]
            cx, cy, cz = w.centre
            r, rr = w.tire_radius_m, w.rim_radius_m
            if self.view == "top":
                roi = pg.ROI((cx - r, cy - 0.5 * w.tire_width_m), (2 * r, w.tire_width_m), movable=True,
                             rotatable=False, resizable=False, removable=False, pen=tire_pen)
                rim = QGraphicsRectItem(QRectF(r - rr, 0.5 * (w.tire_width_m - w.rim_width_m), 2 * rr, w.rim_width_m), roi)
            else:
                roi = _HandleFreeEllipse((cx - r, cz - r), (2 * r, 2 * r), movable=True, rotatable=False,
                                         resizable=False, pen=tire_pen)
                rim = QGraphicsEllipseItem(QRectF(r - rr, r - rr, 2 * rr, 2 * rr), roi)
            rim.setPen(rim_pen)
            rim.setBrush(QBrush(pg.mkColor(200, 200, 200, 120)))
            roi.setZValue(8)
            what = "drag to move" if self.view == "top" else "drag to move the axle along x"
            roi.setToolTip(f"wheel {'/'.join(ids)}: {what} (tire {2 * r * 1000:.0f} mm, rim {2 * rr * 1000:.0f} mm)")
            if self.view == "side":  # below the tire: several wheels may share the circle
                label = pg.TextItem("/".join(ids), color=(60, 60, 60), anchor=(0.5, 0.0))
                label.setParentItem(roi)
                label.setPos(r, -0.02)
            else:
                label = pg.TextItem(w.id, color=(60, 60, 60), anchor=(0.5, 0.5))
                label.setParentItem(roi)
                label.setPos(r, 0.5 * w.tire_width_m)
            roi.sigRegionChangeFinished.connect(lambda rr_, ids=tuple(ids): self._wheel_edited(ids, rr_))
            # a click or the start of a drag selects the wheel (its values in the Properties panel)
            roi.setAcceptedMouseButtons(Qt.MouseButton.LeftButton)  # pyqtgraph: needed for sigClicked
            roi.sigClicked.connect(lambda _r, _ev, wid=ids[0]: self.doc.select_wheel(wid))
            roi.sigRegionChangeStarted.connect(lambda _r, wid=ids[0]: self.doc.select_wheel(wid))
            for i in ids:
                self.wheel_rois[i] = roi
            self._add(roi)

    def wheel_at(self, point) -> str | None:
        """The id of the wheel drawn under ``point`` (QPointF in the view's coordinates, m), or None."""
        for wid, roi in self.wheel_rois.items():
            if roi.shape().contains(roi.mapFromParent(point)):
                return wid
        return None

    def _restyle_wheels(self, selected: str = "") -> None:
        """The selected wheel (Properties panel) drawn with a thick blue outline, the others plain."""
        selected = selected or self.doc.selected_wheel
        for wid, roi in self.wheel_rois.items():
            if roi is self.wheel_rois.get(selected) and wid != selected:
                continue  # a shared side-view circle: styled through the selected wheel's own entry
            try:
                roi.setPen(WHEEL_SELECTED_PEN if wid == selected else WHEEL_PEN)
            except RuntimeError:  # the item was removed by a rebuild
                pass

    def _draw_spots(self) -> None:
        sc = self.doc.scores
        pl = self.doc.placement()
        self.placement = {name: (pl.status[i], pl.message(i)) for i, name in enumerate(sc.names)}
        if len(sc.names) > MAX_SPOT_MARKERS:
            self._draw_spot_cloud(sc)
            return
        for i, name in enumerate(sc.names):
            m = SpotMarker(self.to_view(sc.positions[i]), size=11, symbol="o", movable=True,
                           label=str(i + 1), labelOpts={"offset": (7, -7), "color": (20, 20, 20), "anchor": (0, 1)})
            m.setZValue(20)
            m.sigPositionChanged.connect(lambda mk, n=name: self._spot_dragging(n, mk))
            m.sigPositionChangeFinished.connect(lambda mk, n=name: self._spot_dropped(n, mk))
            m.sigClicked.connect(lambda _mk, n=name: self.doc.select(n))
            self._draw_axis(m, name)
            self.markers[name] = self._add(m)
        self._restyle_markers(self.doc.selected)

    def _draw_spot_cloud(self, sc) -> None:
        """Many spots: one scatter item for all of them (click one to select it); only the selected
        spot is a draggable marker. Hundreds of marker items would take seconds per redraw."""
        pts = np.array([self.to_view(p) for p in sc.positions]).reshape(-1, 2)
        cloud = pg.ScatterPlotItem(pts[:, 0], pts[:, 1], data=list(sc.names), size=7, pen=SPOT_PEN, brush=SPOT_BRUSH,
                                   hoverable=True, tip=lambda x, y, data: f"receiver spot '{data}': click to select")
        cloud.setZValue(19)
        cloud.sigClicked.connect(lambda _item, points, _ev: self.doc.select(points[0].data()) if len(points) else None)
        self.spot_cloud = self._add(cloud)
        self._selected_marker(self.doc.selected)

    def _selected_marker(self, selected: str) -> None:
        """Many-spot mode: a draggable marker for the selected spot only."""
        for name, m in list(self.markers.items()):
            self.plot.removeItem(m)
            if m in self._items:
                self._items.remove(m)
        self.markers = {}
        sc = self.doc.scores
        if not selected or selected not in sc.names:
            return
        i = sc.names.index(selected)
        m = SpotMarker(self.to_view(sc.positions[i]), size=11, symbol="o", movable=True,
                       label=f"{i + 1} {selected}", labelOpts={"offset": (7, -7), "color": (0, 0, 0), "anchor": (0, 1)})
        m.setBrush(SELECTED_BRUSH)
        m.setPen(SELECTED_PEN)
        m.setZValue(21)
        m.sigPositionChanged.connect(lambda mk, n=selected: self._spot_dragging(n, mk))
        m.sigPositionChangeFinished.connect(lambda mk, n=selected: self._spot_dropped(n, mk))
        m.setToolTip(f"receiver spot '{selected}': drag to move")
        self._draw_axis(m, selected)
        self.markers[selected] = self._add(m)

    def _refresh_axes(self) -> None:
        """Redraw the axis of every marker whose spot's receiver axis changed (markers that stay in place)."""
        changed = False
        for name, m in list(self.markers.items()):
            try:
                now = self.axis_in_view(name)
            except StopIteration:
                continue  # the spot is gone: the pending rebuild removes its marker
            if getattr(m, "axis_drawn", None) != now:
                self._draw_axis(m, name)
                changed = True
        if changed:
            self._restyle_markers(self.doc.selected)
            self._label_timer.start()

    def place_labels(self) -> None:
        """Put each spot's label where it overlaps no other label and no other marker (selected spot first)."""
        try:
            vb = self.plot.getPlotItem().vb
        except RuntimeError:  # the view was destroyed while the timer waited
            return
        if not self.markers:
            return
        px, py = vb.viewPixelSize()
        if not (px > 0 and py > 0):
            return
        names = list(self.markers)
        centres, sizes = [], []
        for n in names:
            m = self.markers[n]
            p = m.pos()
            centres.append((p.x() / px, p.y() / py))
            lab = m.label()
            r = lab.boundingRect() if lab is not None else QRectF()
            sizes.append((r.width(), r.height()))
        axes = []
        for n in names:
            au, aw = getattr(self.markers[n], "axis_drawn", (0.0, 0.0))
            drawn = float(np.hypot(au, aw)) >= AXIS_DOT_BELOW
            axes.append((AXIS_HALF_PX * au, AXIS_HALF_PX * aw) if drawn else (0.0, 0.0))
        sel = self.doc.selected
        order = sorted(range(len(names)), key=lambda j: (names[j] != sel, j))
        for n, k in zip(names, place_labels(centres, sizes, order, axes, self._outline_points_px(px, py))):
            if self.label_place.get(n, 0) == k and self.markers[n].label() is not None:
                continue
            self.label_place[n] = k
            lab = self.markers[n].label()
            if lab is None:
                continue
            (ox, oy), anchor = LABEL_PLACES[max(k, 0)]
            lab.offset = pg.Point(ox, oy)
            lab.setAnchor(anchor)
            lab.viewTransformChanged()
            lab.setVisible(k >= 0)

    def _outline_points_px(self, px: float, py: float) -> np.ndarray:
        """Points every 2 px along the body outline's lines as drawn, in the pixel frame of
        :meth:`place_labels` (labels keep off them where they can)."""
        roi = getattr(self, "body_roi", None)
        if roi is None:
            return np.zeros((0, 2))
        try:
            pts = np.array([[p.x(), p.y()] for p in (roi.mapToParent(h.pos()) for h in roi.getHandles())])
        except RuntimeError:
            return np.zeros((0, 2))
        if len(pts) < 2:
            return np.zeros((0, 2))
        a = pts / (px, py)
        b = np.roll(a, -1, axis=0)
        n = np.maximum(2, np.ceil(np.hypot(*(b - a).T) / 2.0).astype(int))
        return np.concatenate([a[j] + np.linspace(0.0, 1.0, n[j])[:, None] * (b[j] - a[j]) for j in range(len(a))])

    def axis_in_view(self, name: str) -> tuple[float, float]:
        """The spot's receiver axis (unit vector) projected on this view's plane: (along x, along y or z)."""
        v = self.doc.vehicle
        spot = next(s for s in v.spots if s.name == name)
        a = v.spot_axis(spot)
        return (float(a[0]), float(a[1] if self.view == "top" else a[2]))

    def _draw_axis(self, marker: SpotMarker, name: str) -> None:
        """The spot's receiver antenna axis at its marker, in the view's projection: a line through the
        marker (a dipole axis has no sign), its length the projected length; an axis mostly along the
        line of sight is a dot. Drawn in pixels (the views keep x and y at one scale), moving with the marker."""
        try:
            au, aw = self.axis_in_view(name)
        except StopIteration:
            return
        old = getattr(marker, "axis_item", None)
        if old is not None and old.scene() is not None:
            old.scene().removeItem(old)
        marker.axis_drawn = (au, aw)
        length = float(np.hypot(au, aw))
        if length < AXIS_DOT_BELOW:
            item = QGraphicsEllipseItem(QRectF(-2.5, -2.5, 5.0, 5.0), marker)
            item.setBrush(QBrush(AXIS_PEN.color()))
            item.setPen(QPen(Qt.PenStyle.NoPen))
        else:
            du, dw = AXIS_HALF_PX * au, -AXIS_HALF_PX * aw  # device pixels: y grows downwards
            item = QGraphicsLineItem(-du, -dw, du, dw, marker)
            item.setPen(_cosmetic(AXIS_PEN))
            item.setFlag(QGraphicsItem.GraphicsItemFlag.ItemStacksBehindParent, True)  # through the marker
        item.setFlag(QGraphicsItem.GraphicsItemFlag.ItemIgnoresTransformations, True)
        item.setAcceptedMouseButtons(Qt.MouseButton.NoButton)
        marker.axis_item = item

    def _restyle_markers(self, selected: str) -> None:
        if self._rebuild_pending:
            return  # the rebuild draws the selection
        if len(self.doc.scores.names) > MAX_SPOT_MARKERS:
            self._selected_marker(selected)
            return
        for i, (name, m) in enumerate(self.markers.items()):
            self._style_marker(i, name, m, name == selected)

    def _style_marker(self, i: int, name: str, m: SpotMarker, sel: bool) -> None:
        """Selected: thick black ring. Outside the body or in a wheelhouse: red with '!'; near a panel: orange."""
        status, warning = self.placement.get(name, (INSIDE, ""))
        bad = status not in (INSIDE, NEAR_SURFACE)
        mark = " !" if status != INSIDE else ""
        k = self.label_place.get(name, 0)
        (ox, oy), anchor = LABEL_PLACES[max(k, 0)]
        m.setLabel(f"{i + 1}{mark} {name}" if sel else f"{i + 1}{mark}",
                   {"offset": (ox, oy), "color": (160, 0, 0) if bad else (0, 0, 0) if sel else (40, 40, 40),
                    "anchor": anchor})
        if m.label() is not None:
            m.label().setVisible(k >= 0)
        brush = OUTSIDE_BRUSH if bad else NEAR_BRUSH if status == NEAR_SURFACE else SELECTED_BRUSH if sel else SPOT_BRUSH
        m.setBrush(brush)
        m.setPen(SELECTED_PEN if sel else OUTSIDE_PEN if bad else SPOT_PEN)
        m.setZValue(21 if sel else 20)
        own = spot_axis_note(self.doc.vehicle, name)
        axis = (f"receiver axis: {own} (overrides the Receiver antenna setting)" if own else
                f"receiver axis: the Receiver antenna setting {axis_text(self.doc.vehicle.radio.receiver.axis)}")
        tip = f"{i + 1}: receiver spot '{name}': drag to move, click to select\n{axis} (blue line: its projection)"
        m.setToolTip(f"{tip}\nWarning: {warning}" if warning else tip)

    def _place_markers(self) -> bool:
        """Move the markers to the document's spot positions (no rebuild); False when the drawn
        markers are not the document's spots."""
        sc = self.doc.scores
        cloud = len(sc.names) > MAX_SPOT_MARKERS
        if cloud:
            if self.spot_cloud is None or len(self.spot_cloud.data) != len(sc.names) or not set(self.markers) <= set(sc.names):
                return False
            pts = np.array([self.to_view(p) for p in sc.positions]).reshape(-1, 2)
            self.spot_cloud.setData(pts[:, 0], pts[:, 1], data=list(sc.names))
        elif set(sc.names) != set(self.markers):
            return False
        self._sync = True
        try:
            for name, m in self.markers.items():
                m.setPos(*self.to_view(sc.positions[sc.names.index(name)]))
        finally:
            self._sync = False
        pl = self.doc.placement()  # a moved spot may have left the body (or come back)
        placement = {name: (pl.status[i], pl.message(i)) for i, name in enumerate(sc.names)}
        if placement != self.placement:
            self.placement = placement
            self._restyle_markers(self.doc.selected)
        return True

    # ----- user edits -> document ------------------------------------------------------
    def _spot_dragging(self, name: str, marker: SpotMarker) -> None:
        if self._sync:
            return
        p = marker.pos()
        u, w = edits.snap(p.x(), self.doc.snap_m), edits.snap(p.y(), self.doc.snap_m)
        if (u, w) != (p.x(), p.y()):
            self._sync = True
            try:
                marker.setPos(u, w)
            finally:
                self._sync = False
        base = self.doc.live[1].positions[0] if self.doc.live and self.doc.live[0] == name else self.doc.spot_position(name)
        self.doc.live_move(name, self.from_view(u, w, base))

    def _spot_dropped(self, name: str, marker: SpotMarker) -> None:
        if self._sync:
            return
        p = marker.pos()
        u, w = edits.snap(p.x(), self.doc.snap_m), edits.snap(p.y(), self.doc.snap_m)
        base = self.doc.live[1].positions[0] if self.doc.live and self.doc.live[0] == name else self.doc.spot_position(name)
        pos = self.from_view(u, w, base)
        self.doc.live_released(name, pos)
        self.doc.apply(lambda v: edits.move_spot(v, name, pos), f"Move spot '{name}'")

    def _on_live(self, name: str, sc) -> None:
        m = self.markers.get(name)
        if m is None:
            return
        pl = self.doc.live_placement  # the dragged spot's placement, for its marker style
        if self.placement.get(name, (None,))[0] != pl.status[0] or self.placement[name][1] != pl.message(0):
            self.placement[name] = (pl.status[0], pl.message(0))
            self._style_marker(list(self.markers).index(name), name, m, name == self.doc.selected)
        target = self.to_view(sc.positions[0])
        cur = m.pos()
        if (cur.x(), cur.y()) != target:
            self._sync = True
            try:
                m.setPos(*target)
            finally:
                self._sync = False

    def _roi_points(self, roi: pg.ROI) -> list[tuple[float, float]]:
        pts = []
        for _name, p in roi.getLocalHandlePositions():
            q = roi.mapToParent(p)
            pts.append((edits.snap(q.x(), self.doc.snap_m), edits.snap(q.y(), self.doc.snap_m)))
        return pts

    def _outline_moving(self, kind: str, index: int, roi) -> None:
        """An outline ("body"), zone or region is being dragged: the document previews the state under the
        mouse (the heatmap follows it); one preview per turn of the event loop, the latest winning."""
        if self._sync:
            return
        pts = self._roi_points(roi)
        if kind == "body":
            key = "top_outline" if self.view == "top" else "side_outline"
            make = lambda v: edits.set_outline(v, key, pts)
        elif kind == "zone":
            make = lambda v: edits.set_zone_outline(v, index, pts)
        else:
            make = lambda v: edits.set_region_outline(v, index, pts)
        run_soon((self, "preview"), lambda: self.doc.preview(make))

    def _body_edited(self, roi) -> None:
        if self._sync:
            return
        key = "top_outline" if self.view == "top" else "side_outline"
        pts = self._roi_points(roi)
        self.doc.apply(lambda v: edits.set_outline(v, key, pts), f"Edit {self.view} outline")

    def _zone_edited(self, index: int, roi) -> None:
        if self._sync:
            return
        pts = self._roi_points(roi)
        name = self.doc.vehicle.zones[index].name
        self.doc.apply(lambda v: edits.set_zone_outline(v, index, pts), f"Edit zone '{name}'")

    def _region_edited(self, index: int, roi) -> None:
        if self._sync:
            return
        pts = self._roi_points(roi)
        name = self.doc.vehicle.regions[index].name
        self.doc.apply(lambda v: edits.set_region_outline(v, index, pts), f"Edit region '{name}'")

    def _wheel_edited(self, wheel_ids: tuple[str, ...], roi) -> None:
        if self._sync:
            return
        geo = {g.id: g for g in self.doc.scene.wheels}
        w = geo[wheel_ids[0]]
        p = roi.pos()
        x = edits.snap(p.x() + w.tire_radius_m, self.doc.snap_m)
        if self.view == "top":
            moves = {w.id: (x, edits.snap(p.y() + 0.5 * w.tire_width_m, self.doc.snap_m))}
        else:
            moves = {i: (x, geo[i].centre[1]) for i in wheel_ids}
        self.doc.apply(lambda v: edits.move_wheels(v, moves), f"Move wheel {'/'.join(wheel_ids)}")

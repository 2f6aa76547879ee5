"""Ranking panel: margin heatmap of the mounting region, the sorted spot table and the selected spot's figures.

All numbers come from ``core``: the heatmap from ``core.scoring.heatmap`` (in a worker thread), the
table from the document's ``SpotScores`` in the order of ``SpotScores.order()``, burst success from
``core.burst`` and wheel distinctness from ``core.distinctness``.
"""

from __future__ import annotations

import math
from typing import ClassVar

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QPointF, QRectF, Qt, QTimer, Signal
from PySide6.QtGui import QColor, QPolygonF
from PySide6.QtWidgets import (
    QAbstractItemView,
    QCheckBox,
    QComboBox,
    QGraphicsPolygonItem,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QMenu,
    QProgressBar,
    QPushButton,
    QSplitter,
    QTableWidget,
    QTableWidgetItem,
    QTabWidget,
    QVBoxLayout,
    QWidget,
)

from app.gui import edits
from app.gui.body_views import _only_spots_moved, same_but_spots
from app.gui.document import Document
from app.gui.heatmap_worker import HeatmapJob
from app.gui.look import BODY_COLOUR, lock_aspect, margin_colormap, show_grid, signed, wheel_colour
from app.gui.properties_panel import spot_axis_note
from app.gui.tasks import Task, run_soon
from app.heatmap_contour import polylines_for_plot, zero_contour
from app.margin_scale import MARGIN_RANGE_DB
from core.burst import burst_for_spot
from core.distinctness import wheel_distinctness
from core.placement import INSIDE, NEAR_SURFACE
from core.regulatory import check_sensor_eirp
from core.scoring import EXCLUDED_CELL_NAMES, RANK_RESOLUTION_DB

KMH_PER_MPS = 3.6
#: speeds where the frames repeat drawn in the burst figure, over all wheels (the title says when more exist)
MAX_REPEAT_MARKERS = 48
STEPS_MM = (25, 50, 100, 200)


def _plot(title: str, bottom: str, left: str, bottom_units: str | None = None, left_units: str | None = None) -> pg.PlotWidget:
    p = pg.PlotWidget(background="w")
    p.setTitle(title, size="9pt")
    for side, text, units in (("bottom", bottom, bottom_units), ("left", left, left_units)):
        p.getAxis(side).enableAutoSIPrefix(False)
        p.setLabel(side, text, units=units)
    show_grid(p)
    p.setMenuEnabled(False)
    p.getPlotItem().setContentsMargins(2, 2, 14, 2)  # room for the last tick label at the right end
    return p


class _Dot(pg.ScatterPlotItem):
    """A marker that never sets its view's range: moving it repaints the marker only (pyqtgraph's view
    repaints its whole area when an item's bounds change while the view ranges itself automatically)."""

    def informViewBoundsChanged(self):
        pass


class HeatmapPanel(QWidget):
    """Heatmap of the worst-case margin over the mounting region, computed in a worker thread.

    The heatmap is progressive: a coarse grid (every 4th cell) is shown first, then refined while the
    user looks (app.gui.heatmap_worker). With "auto" on it is recomputed after every edit, and while an
    outline, zone or region is dragged (``preview``), each move cancelling the run of the one before."""

    heatmapReady = Signal(object)  # the full heatmap (core.scoring.Heatmap) is shown
    stageShown = Signal(object)  # a coarse stage (Heatmap with stride > 1) is shown

    def __init__(self, doc: Document, parent: QWidget | None = None):
        super().__init__(parent)
        self.doc = doc
        self.job: HeatmapJob | None = None
        self.result = None  # the heatmap shown: the last complete core.scoring.Heatmap, or a coarse stage
        self._shown_for = None  # (vehicle, region, step) of the heatmap shown (or being refined)
        self._preview = None  # the latest dragged vehicle waiting for the run it superseded to stop
        self._outline_items: list = []
        lay = QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        lay.setSpacing(2)
        row = QHBoxLayout()
        self.step = QComboBox()
        for mm in STEPS_MM:
            self.step.addItem(f"{mm} mm grid", mm / 1000.0)
        self.step.setCurrentIndex(1)
        self.step.setToolTip("Spacing of the heatmap cells")
        self.auto = QCheckBox("auto")
        self.auto.setChecked(True)
        self.auto.setToolTip("Recompute the heatmap after every edit")
        self.compute = QPushButton("Compute")
        self.compute.setToolTip("Compute the margin over the mounting region (runs in the background)")
        self.cancel_button = QPushButton("Cancel")
        self.cancel_button.setEnabled(False)
        self.progress = QProgressBar()
        self.progress.setRange(0, 100)
        self.progress.setTextVisible(True)
        self.progress.setFormat("%p %")
        self.progress.setMaximumWidth(130)
        for w in (self.step, self.auto, self.compute, self.cancel_button, self.progress):
            row.addWidget(w)
        row.addStretch(1)
        lay.addLayout(row)

        self.plot = _plot("Margin over the mounting region", "x, forward", "y, left", "m", "m")
        lock_aspect(self.plot)
        self.image = pg.ImageItem(axisOrder="col-major")
        self.image.setZValue(-10)
        self.plot.addItem(self.image)
        # the 0 dB contour, drawn only between computed cells (app.heatmap_contour)
        self.iso = pg.PlotCurveItem(pen=pg.mkPen(0, 0, 0, width=2), connect="finite")
        self.iso.setZValue(-5)
        self.plot.addItem(self.iso)
        self.colorbar = self.plot.getPlotItem().addColorBar(
            self.image, colorMap=margin_colormap(), values=(-MARGIN_RANGE_DB, MARGIN_RANGE_DB), label="worst-case margin (dB)",
            interactive=False, width=14,
        )
        self.spots = pg.ScatterPlotItem(size=8, pen=pg.mkPen("k"), brush=pg.mkBrush(255, 255, 255, 230))
        self.spots.setZValue(5)
        self.plot.addItem(self.spots)
        # the dragged spot's dot, on its own: a move repaints a dot, not the box around all the spots
        self.live_dot = _Dot(size=8, pen=pg.mkPen("k"), brush=pg.mkBrush(255, 255, 255, 230))
        self.live_dot.setZValue(6)
        self.live_dot.hide()
        self.plot.addItem(self.live_dot, ignoreBounds=True)
        self._live_name: str | None = None  # the spot drawn as live_dot, left out of self.spots
        lay.addWidget(self.plot, 1)
        self.readout = QLabel("Click a cell to add a spot there. Black line: 0 dB margin.")
        self.readout.setWordWrap(True)  # a long summary wraps instead of widening the window
        lay.addWidget(self.readout)

        self.compute.clicked.connect(self.start)
        self.cancel_button.clicked.connect(self.cancel)
        self.step.activated.connect(lambda _i: self.start())
        self._debounce = QTimer(self)
        self._debounce.setSingleShot(True)
        self._debounce.setInterval(400)
        self._debounce.timeout.connect(self.start)
        doc.vehicleChanged.connect(self._vehicle_changed)
        doc.regionSelectionChanged.connect(lambda _i: self._vehicle_changed())
        doc.documentReplaced.connect(self._document_replaced)
        doc.previewChanged.connect(self.preview)
        doc.liveScore.connect(self._live_spot)
        self._drawn_vehicle = None  # the vehicle the body outline was drawn from
        self.plot.scene().sigMouseMoved.connect(self._hover)
        self.plot.scene().sigMouseClicked.connect(self._clicked)
        self._draw_context()

    # ----- computation -----------------------------------------------------------------
    def region(self):
        v = self.doc.vehicle
        return v.regions[self.doc.region_index] if v.regions else None

    def start(self, vehicle=None) -> None:
        """Start (or restart) the heatmap of the current region in a worker thread (of ``vehicle``, a
        dragged state not yet in the document, when given; its scene is built in the worker).

        A run still going is asked to stop and dropped: its result, if it still comes, is ignored.
        Nothing waits for its thread."""
        self._preview = None
        self._debounce.stop()
        v = vehicle if vehicle is not None else self.doc.vehicle
        region = v.regions[self.doc.region_index] if v.regions and self.doc.region_index < len(v.regions) else None
        self._drop_job()
        if region is None:
            self._ended("This vehicle has no mounting region: add one to the file to get a heatmap.")
            return
        step = float(self.step.currentData())
        job = HeatmapJob(vehicle if vehicle is not None else self.doc.scene, region, step)
        job.key = (v, region, step)
        job.stage.connect(self._stage)
        job.progress.connect(self._progress)
        job.done.connect(self._done)
        job.cancelled.connect(self._cancelled)
        job.failed.connect(self._failed)
        job.ended.connect(self._job_ended)
        self.job = job
        self.progress.setValue(0)
        self.compute.setEnabled(False)
        self.cancel_button.setEnabled(True)
        self.readout.setText(f"Computing the margin over '{region.name}'...")
        job.start()

    def cancel(self) -> None:
        """Ask the running heatmap to stop (returns at once; the panel says so when it has stopped)."""
        job = self.job
        if job is None or (job.cancel_requested() and not getattr(job, "superseded", False)):
            return
        self._preview = None  # no run for a dragged outline after this one either
        job.superseded = False  # the user's cancel: said so when the run has stopped
        job.cancel()
        self.cancel_button.setEnabled(False)
        self.readout.setText("Cancelling the heatmap...")

    def _drop_job(self) -> None:
        """Stop listening to the current run and ask it to stop."""
        job, self.job = self.job, None
        if job is not None:
            job.cancel()

    def preview(self, vehicle) -> None:
        """An outline, zone or region is being dragged (``vehicle``: the state under the mouse): with
        "auto" on, recompute for it, coarse first. The next move cancels the run; the run after it starts
        when the cancelled one has stopped (within a chunk), so drags never pile up worker threads."""
        if not self.auto.isChecked() or vehicle is None:
            return
        job = self.job
        if job is not None and job.isRunning() and getattr(job, "key", (None,))[0] is not vehicle:
            self._preview = vehicle  # started by _job_ended once this run has stopped
            job.superseded = True
            job.cancel()
            self.readout.setText("Recomputing the margin for the dragged outline...")
            return
        self.start(vehicle)

    def abandon(self) -> None:
        """Drop the running heatmap without waiting (the window closes or shows another document)."""
        if self.job is not None:
            self._drop_job()
            self._ended("Heatmap stopped.")
        self._debounce.stop()

    def _document_replaced(self) -> None:
        self.abandon()
        self.result = None
        self.image.clear()
        self.iso.setData(None)
        self._draw_context()
        if self.auto.isChecked():
            self._debounce.start()

    def is_running(self) -> bool:
        return self.job is not None

    def _progress(self, job, done: int, total: int) -> None:
        if job is self.job:
            self.progress.setValue(int(100 * done / max(1, total)))

    def _ended(self, text: str) -> None:
        self.compute.setEnabled(True)
        self.cancel_button.setEnabled(False)
        self.readout.setText(text)

    def _cancelled(self, job) -> None:
        if job is self.job and not getattr(job, "superseded", False):
            self.job = None
            self._ended("Heatmap cancelled.")

    def _failed(self, job, msg: str) -> None:
        if job is self.job:
            self.job = None
            self._ended(f"Heatmap failed: {msg}")

    def _job_ended(self, job) -> None:
        if job is self.job and self._preview is not None:  # superseded by a drag: the latest state's turn
            self.start(self._preview)
            return
        if job is self.job:  # the thread stopped without a result (should not happen): leave a usable state
            self.job = None
            self._ended("Heatmap stopped.")

    def _stage(self, job, hm) -> None:
        """A coarse stage arrived: shown at once, the refinement goes on."""
        if job is not self.job or getattr(job, "superseded", False):
            return
        self.result = hm
        self._shown_for = job.key
        self.show_heatmap(hm, job.key[0])
        self.readout.setText(f"Coarse map on a {hm.step_m * 1000:.0f} mm grid shown; refining to "
                             f"{job.step_m * 1000:.0f} mm...")
        self.stageShown.emit(hm)

    def _done(self, job, hm) -> None:
        if job is not self.job or getattr(job, "superseded", False):
            return  # a run that was superseded or belongs to a vehicle no longer shown
        self.job = None
        self._ended(self._summary(hm))
        self.progress.setValue(100)
        self.result = hm
        self._shown_for = job.key
        self.show_heatmap(hm, job.key[0])
        self.heatmapReady.emit(hm)

    def _summary(self, hm) -> str:
        n_ok, cells = hm.meeting(0.0)
        share = n_ok / cells if cells else 0.0
        best = hm.best_cells(1)
        fixed = "height z" if hm.view == "top" else "lateral y"
        text = f"{cells} cells at {fixed} {hm.fixed_m * 1000:.0f} mm; {100 * share:.0f} % reach 0 dB margin"
        left_out = ", ".join(f"{n} {why}" for why, n in hm.excluded().items() if n)
        if left_out:
            text += f" (not computed: {left_out})"
        if best:
            x, y, z, mb, _w = best[0]
            text += f"; best {mb:+.1f} dB at x {x * 1000:.0f}, y {y * 1000:.0f}, z {z * 1000:.0f} mm"
        return text

    def _vehicle_changed(self) -> None:
        v, drawn = self.doc.vehicle, self._drawn_vehicle
        if drawn is not None and v is not drawn and _only_spots_moved(drawn, v):
            self._drawn_vehicle = v
            self._draw_spots()  # a spot moved: the body outline stays
        else:
            self._draw_context()
        if self.auto.isChecked() and not self._computed_for_current():
            self._debounce.start()

    def _computed_for_current(self) -> bool:
        """True when the heatmap shown, or the one being computed, is of the document's vehicle as it stands
        (e.g. a dragged outline was dropped where its last preview was computed) or differs from it only in
        the spots, which a margin map does not depend on: nothing to recompute."""
        region, step = self.region(), float(self.step.currentData())
        job = self.job
        key = job.key if job is not None and not job.cancel_requested() else self._shown_for if job is None else None
        return (key is not None and key[1] == region and key[2] == step
                and (key[0] == self.doc.vehicle or same_but_spots(key[0], self.doc.vehicle)))

    def _live_spot(self, name: str, sc) -> None:
        """A spot is being dragged: its dot follows (the margin map itself does not depend on the spots)."""
        names = self.doc.scores.names
        if name not in names:
            return
        if self._live_name != name:
            self._set_spots(self.doc.scores.positions[[i for i, n in enumerate(names) if n != name]])
            self._live_name = name
        u, w = self._in_view(sc.positions[:1])
        self.live_dot.setData(u, w)
        self.live_dot.show()

    # ----- drawing ---------------------------------------------------------------------
    def show_heatmap(self, hm, vehicle=None) -> None:
        m = hm.margin_db  # (nv, nu)
        nu, nv = len(hm.u_m), len(hm.v_m)
        du = (hm.u_m[-1] - hm.u_m[0]) / (nu - 1) if nu > 1 else hm.step_m
        dv = (hm.v_m[-1] - hm.v_m[0]) / (nv - 1) if nv > 1 else hm.step_m
        # the one fixed colour scale of every margin map (app.margin_scale): maps of two bodies compare by colour
        span = MARGIN_RANGE_DB
        self.image.setImage(m.T, autoLevels=False, levels=(-span, span))
        self.image.setRect(QRectF(hm.u_m[0] - du / 2, hm.v_m[0] - dv / 2, nu * du, nv * dv))
        self.colorbar.setLevels((-span, span))
        self.iso.setData(*polylines_for_plot(zero_contour(hm)))
        self._draw_context(hm, vehicle)

    def _draw_context(self, hm=None, vehicle=None) -> None:
        """Body outline (of ``vehicle``, the one the heatmap shown was computed for, by default the
        document's) and spots of the heatmap's view, for orientation."""
        pi = self.plot.getPlotItem()
        for it in self._outline_items:
            pi.removeItem(it)
        self._outline_items = []
        region = self.region()
        view = hm.view if hm is not None else (region.view if region is not None else "top")
        if self.result is not None and region is not None and (self.result.view != region.view):
            self.image.clear()
            self.iso.setData([], [])
        v = vehicle if vehicle is not None else self.doc.vehicle
        self._drawn_vehicle = v
        pts = v.body.top_outline if view == "top" else v.body.side_outline
        poly = QGraphicsPolygonItem(QPolygonF([QPointF(*p) for p in pts]))
        pen = pg.mkPen(BODY_COLOUR, width=1.2)
        poly.setPen(pen)
        pi.addItem(poly)
        self._outline_items.append(poly)
        self.plot.setLabel("left", "y, left" if view == "top" else "z, up", units="m")
        self._context_view = view
        self._draw_spots()

    def _draw_spots(self) -> None:
        self._live_name = None
        self.live_dot.hide()
        self._set_spots(self.doc.scores.positions)

    def _in_view(self, pos) -> tuple:
        """Positions (n, 3) m -> this map's plane coordinates (u, w), each (n,)."""
        pos = np.asarray(pos, float).reshape(-1, 3)
        return pos[:, 0], pos[:, 1] if getattr(self, "_context_view", "top") == "top" else pos[:, 2]

    def _set_spots(self, pos) -> None:
        self.spots.setData(*self._in_view(pos))

    # ----- mouse -----------------------------------------------------------------------
    def cell_at(self, u: float, w: float):
        """(margin_db, worst wheel id) of the heatmap cell containing (u, w) m, or None."""
        hm = self.result
        if hm is None:
            return None
        iu = int(np.argmin(np.abs(hm.u_m - u)))
        iv = int(np.argmin(np.abs(hm.v_m - w)))
        if abs(hm.u_m[iu] - u) > hm.step_m or abs(hm.v_m[iv] - w) > hm.step_m:
            return None
        m = hm.margin_db[iv, iu]
        if np.isnan(m):
            return None
        return float(m), self.doc.scene.wheel_ids[int(hm.worst_wheel[iv, iu])]

    def _view_point(self, scene_pos):
        vb = self.plot.getPlotItem().vb
        if not vb.sceneBoundingRect().contains(scene_pos):
            return None
        p = vb.mapSceneToView(scene_pos)
        return p.x(), p.y()

    def excluded_reason(self, u: float, w: float) -> str:
        """Why the heatmap cell at (u, w) m was not computed ("outside the body", ...), or ""."""
        hm = self.result
        if hm is None or hm.cell_state is None:
            return ""
        iu = int(np.argmin(np.abs(hm.u_m - u)))
        iv = int(np.argmin(np.abs(hm.v_m - w)))
        if abs(hm.u_m[iu] - u) > hm.step_m or abs(hm.v_m[iv] - w) > hm.step_m:
            return ""
        return EXCLUDED_CELL_NAMES.get(int(hm.cell_state[iv, iu]), "")

    def _hover(self, scene_pos) -> None:
        uv = self._view_point(scene_pos)
        if uv is None or self.result is None or self.is_running():
            return
        cell = self.cell_at(*uv)
        name = "y" if self.result.view == "top" else "z"
        where = f"x {uv[0] * 1000:.0f} mm, {name} {uv[1] * 1000:.0f} mm"
        if cell is None:
            why = self.excluded_reason(*uv)
            self.readout.setText(f"{where}: not computed, {why}" if why else where)
        else:
            self.readout.setText(f"{where}: margin {cell[0]:+.1f} dB, worst wheel {cell[1]}")

    def _clicked(self, ev) -> None:
        if ev.button() != Qt.MouseButton.LeftButton:
            return
        uv = self._view_point(ev.scenePos())
        if uv is None or self.cell_at(*uv) is None:
            return
        ev.accept()
        menu = self.spot_menu(*uv)
        menu.exec(ev.screenPos().toPoint())

    def spot_menu(self, u: float, w: float) -> QMenu:
        """The menu offered on a heatmap cell."""
        menu = QMenu(self)
        cell = self.cell_at(u, w)
        title = menu.addAction(f"margin {cell[0]:+.1f} dB, worst wheel {cell[1]}" if cell else "outside the region")
        title.setEnabled(False)
        act = menu.addAction("Add a spot here")
        act.triggered.connect(lambda: self.add_spot_here(u, w))
        return menu

    def position_of(self, u: float, w: float) -> tuple[float, float, float]:
        hm = self.result
        su, sw = edits.snap(u, self.doc.snap_m), edits.snap(w, self.doc.snap_m)
        return (su, sw, hm.fixed_m) if hm.view == "top" else (su, hm.fixed_m, sw)

    def add_spot_here(self, u: float, w: float) -> str:
        """Add a receiver spot at the heatmap point (u, w) m; returns its name."""
        pos = self.position_of(u, w)
        name = edits.unique_spot_name(self.doc.vehicle)
        if self.doc.apply(lambda v: edits.add_spot(v, name, pos), f"Add spot '{name}' from the heatmap"):
            self.doc.select(name)
        return name


def _level_range(sc, i: int, legend_share: float = 0.3) -> tuple[float, float]:
    """y range of the level plot, dBm: the spot's levels and the sensitivity with 5 dB below, and the top
    ``legend_share`` of the plot's height (the wheel legend's, :meth:`SpotFigures._legend_share`) above the
    highest curve, at least 12 dB. Both ends widened to whole multiples of 2 dB: while a spot is dragged the
    range (and so the axes) stays put unless the levels move by more than that."""
    lo = math.floor((min(float(sc.levels_dbm[i].min()), sc.sensitivity_dbm) - 5.0) / 2.0) * 2.0
    top = max(float(sc.levels_dbm[i].max()), sc.sensitivity_dbm + sc.required_margin_db)
    f = min(max(legend_share, 0.0), 0.6)
    return lo, math.ceil(max(top + 12.0, (top - f * lo) / (1.0 - f)) / 2.0) * 2.0


class SpotTable(QTableWidget):
    """The spots best first (``SpotScores.order()``); selecting a row selects the spot everywhere."""

    COLUMNS = ("rank", "no.", "spot", "margin dB", "wheel", "at deg", "place",
               "full-wave dB", "axis")
    HEADER_TIPS: ClassVar[dict[int, str]] = {
        4: "the spot's worst wheel", 5: "the worst wheel's worst-case angle of its turn, degrees",
        6: "placement: ok inside the body; flagged near a panel, in a wheelhouse or outside the body",
        8: "receiver antenna axis: the Receiver antenna setting, or the spot's own (x, y, z)"}
    PLACEMENT_COLUMN = 6
    FULLWAVE_COLUMN = 7  # shown only while a full-wave confirmation of this very vehicle exists
    AXIS_COLUMN = 8  # "own" (its vector in the tooltip) where the spot's axis overrides the Receiver antenna setting

    def __init__(self, doc: Document, parent: QWidget | None = None):
        super().__init__(0, len(self.COLUMNS), parent)
        self.doc = doc
        self._loading = False
        self.setHorizontalHeaderLabels(list(self.COLUMNS))
        self.verticalHeader().setVisible(False)
        self.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
        self.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
        self.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.setWordWrap(False)  # one line per spot: more rows fit a laptop screen (long names are elided)
        self.setToolTip("Receiver spots ranked by worst-case margin (worst wheel, worst angle); ties by the worst wheel's median")
        hh = self.horizontalHeader()
        # every column as wide as its header and cells, the names take the rest: at 1366 px the table
        # fits its dock without scrolling sideways (a fixed width per column did not)
        hh.setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
        hh.setSectionResizeMode(2, QHeaderView.ResizeMode.Stretch)
        hh.setMinimumSectionSize(24)
        for c, tip in self.HEADER_TIPS.items():
            self.horizontalHeaderItem(c).setToolTip(tip)
        self.setColumnHidden(self.FULLWAVE_COLUMN, True)
        self.horizontalHeaderItem(self.FULLWAVE_COLUMN).setToolTip(
            "Full-wave margin, dB, in free space (the full-wave model has no road), of the spots confirmed with "
            "Tools > Confirm with full-wave; shown while the vehicle is the one confirmed")
        self.itemSelectionChanged.connect(self._selected)
        doc.scoresReady.connect(self.refresh)
        doc.liveScore.connect(self._live)
        doc.selectionChanged.connect(self._select_row)
        self._cmap = margin_colormap()
        self.refresh()

    def names_in_order(self) -> list[str]:
        return [self.item(r, 2).text() for r in range(self.rowCount())]

    def refresh(self) -> None:
        self._loading = True
        try:
            sc = self.doc.scores
            order = sc.order()
            pl = self.doc.placement()
            check = check_sensor_eirp(self.doc.vehicle.radio)  # over the ceiling: show the margin there too
            self.horizontalHeaderItem(3).setText("margin dB (at ceiling)" if check.over_ceiling else "margin dB")
            self.setRowCount(len(order))
            pending = self.doc.pending
            # the spots within the rank resolution of the best are not ranked apart (core.scoring)
            tied = set() if pending.any() else set(sc.tied_with_best(pl.candidate)[1:])
            for rank, i in enumerate(order):
                w = int(sc.worst_wheel[i])
                m = float(sc.margin_db[i])
                if pending[i]:  # scored in the background: no numbers yet (pending rows sort last)
                    cells = ("", str(i + 1), sc.names[i], "...", "", "")
                else:
                    mt = (f"{signed(m, 1)} ({signed(float(check.margin_at_ceiling_db(m)), 1)})" if check.over_ceiling
                          else signed(m, 1))
                    cells = (f"\u2248 {rank + 1}" if i in tied else str(rank + 1), str(i + 1), sc.names[i], mt,
                             sc.wheel_ids[w], f"{sc.worst_angle_deg[i, w]:.0f}")
                for c, text in enumerate(cells):
                    tip, back = "", None
                    if c == 0 and i in tied:
                        tip = (f"within {RANK_RESOLUTION_DB:g} dB of the best margin: not ranked apart from the best "
                               "(the model's resolution against a whole-vehicle full-wave reference, "
                               "docs/VALIDATION.md)")
                    if c == 2:
                        tip = f"spot {i + 1}: {sc.names[i]}"
                    if c == 3 and pending[i]:
                        tip = "being scored in the background"
                    elif c == 3:
                        back = self._cmap.map(np.clip(0.5 + 0.5 * m / MARGIN_RANGE_DB, 0, 1), mode="qcolor")
                        back.setAlpha(150)
                        if sc.near_field is not None and sc.near_field[i]:
                            tip = "a sensor comes nearer than lambda/2pi: near field, indicative only"
                    self._put(rank, c, text, tip, right=c in (0, 1, 3, 5), background=back)
                self._set_placement(rank, pl.status[i], pl.flag(i), pl.message(i))
                self._set_fullwave(rank, sc.names[i])
                self._set_axis(rank, sc.names[i])
        finally:
            self._loading = False
        self._select_row(self.doc.selected)

    def _put(self, row: int, col: int, text: str, tip: str = "", right: bool = False, background=None,
             foreground=None, bold: bool = False) -> None:
        """Cell (row, col) shows exactly this: its item is updated in place (Qt skips a value that did not
        change, so a refresh after one spot moved repaints and re-measures only what changed; a new item
        per cell made the columns re-measure on every one of them)."""
        item = self.item(row, col)
        fresh = item is None  # a new item is filled before it joins the table: one change, not six
        if fresh:
            item = QTableWidgetItem()
        item.setText(text)
        item.setToolTip(tip)
        align = Qt.AlignmentFlag.AlignRight if right else Qt.AlignmentFlag.AlignLeft
        item.setTextAlignment(align | Qt.AlignmentFlag.AlignVCenter)
        item.setData(Qt.ItemDataRole.BackgroundRole, background)
        item.setData(Qt.ItemDataRole.ForegroundRole, foreground)
        if item.font().bold() != bold:
            font = item.font()
            font.setBold(bold)
            item.setFont(font)
        if fresh:
            self.setItem(row, col, item)

    def _set_axis(self, row: int, name: str) -> None:
        own = spot_axis_note(self.doc.vehicle, name)
        # the vector in the tooltip: the column stays narrow
        self._put(row, self.AXIS_COLUMN, "own" if own else "setting",
                  f"This spot's own receiver antenna axis {own[4:]} overrides the Receiver antenna setting"
                  if own else "This spot uses the Receiver antenna setting's axis")

    def fullwave_current(self) -> dict | None:
        """The document's full-wave confirmation when it was run on the vehicle as it stands, else None."""
        fw = self.doc.fullwave
        return fw if fw is not None and fw["vehicle"] == self.doc.vehicle else None

    def _set_fullwave(self, row: int, name: str) -> None:
        """The full-wave margin beside the fast one (free space both: the full-wave model has no road)."""
        fw = self.fullwave_current()
        self.setColumnHidden(self.FULLWAVE_COLUMN, fw is None)
        if fw is None:
            return
        if name not in fw["margins"]:
            self._put(row, self.FULLWAVE_COLUMN, "", "not among the spots confirmed with the full-wave model")
        else:
            self._put(row, self.FULLWAVE_COLUMN, f"{fw['margins'][name]:+.1f}",
                      f"full-wave margin {fw['margins'][name]:+.1f} dB against the fast engine's "
                      f"{fw['fast'][name]:+.1f} dB, both in free space (the margin column includes the road "
                      f"ray when it is on); full-wave setup: {fw['setup']}", right=True)

    def _set_placement(self, row: int, status: str, flag: str, message: str) -> None:
        """The placement cell (core.placement): red for a spot that is not a receiver position, orange near a panel."""
        if status == INSIDE:
            self._put(row, self.PLACEMENT_COLUMN, flag or "ok")
        else:
            self._put(row, self.PLACEMENT_COLUMN, flag or "ok", message, bold=True,
                      foreground=QColor(170, 0, 0) if status != NEAR_SURFACE else QColor(170, 90, 0))

    def _live(self, name: str, sc) -> None:
        """A spot is being dragged: update its placement cell (classified by the document)."""
        pl = self.doc.live_placement
        for r in range(self.rowCount()):
            if self.item(r, 2) is not None and self.item(r, 2).text() == name:
                self._set_placement(r, pl.status[0], pl.flag(0), pl.message(0))
                return

    def _select_row(self, name: str) -> None:
        self._loading = True
        try:
            for r in range(self.rowCount()):
                if self.item(r, 2).text() == name:
                    self.selectRow(r)
                    break
            else:
                self.clearSelection()
        finally:
            self._loading = False

    def _selected(self) -> None:
        if self._loading:
            return
        rows = {i.row() for i in self.selectedItems()}
        if rows:
            self.doc.select(self.item(min(rows), 2).text())


class SpotFigures(QWidget):
    """For the selected spot: level over the turn per wheel, burst success vs speed, wheel separation."""

    burstReady = Signal(object)  # the BurstResult drawn

    def __init__(self, doc: Document, parent: QWidget | None = None):
        super().__init__(parent)
        self.doc = doc
        lay = QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        split = QSplitter(Qt.Orientation.Vertical)
        self.levels = _plot("Level over the wheel turn", "wheel angle", "received level", "deg", "dBm")
        self.levels.setXRange(0, 360, padding=0)
        self.levels.getAxis("bottom").setTicks([[(a, str(a)) for a in range(0, 361, 90)]])
        self.levels_legend = self.levels.addLegend(offset=(-6, 6), labelTextSize="8pt", colCount=3,
                                                   brush=pg.mkBrush(255, 255, 255, 200))
        self._range_of = None  # (scores, row) of the levels drawn: the y range is kept clear of the legend
        self.levels.getPlotItem().vb.sigResized.connect(self._keep_legend_room)
        split.addWidget(self.levels)
        # the burst and separation figures share the lower half as tabs: each gets the column's full width,
        # so their two-line titles and axis labels fit at 1366 x 768
        lower = QTabWidget()
        lower.setDocumentMode(True)
        self.burst = _plot("Burst success vs speed", "vehicle speed", "bursts heard", "km/h", "%")
        self.burst.setYRange(0, 100, padding=0.03)
        self.burst_legend = self.burst.addLegend(offset=(6, -6), labelTextSize="8pt", colCount=3,
                                                 brush=pg.mkBrush(255, 255, 255, 200))
        self.separation = _plot("Wheel separation by signal strength", "wheel", "level", None, "dBm")
        lower.addTab(self.burst, "Burst success vs speed")
        lower.setTabToolTip(0, "Share of bursts heard (or the burst margin when all get through) over vehicle speed")
        lower.addTab(self.separation, "Wheel separation")
        lower.setTabToolTip(1, "Level distributions per wheel over a turn, for wheel location by signal strength")
        self.lower_tabs = lower
        split.addWidget(lower)
        split.setSizes([300, 260])
        lay.addWidget(split)
        self.burst_result = None
        self.distinctness = None
        self._burst_task: Task | None = None  # the burst the figure waits for
        # (key, task, result) of the burst started when a dragged spot was released (_compute_ahead)
        self._ahead: tuple | None = None
        self._levels_drawn = None  # what the level figure shows (_levels_key)
        self._level_items = None  # (wheel ids, sensitivity, required margin, curves, worst-case mark) drawn
        # the plot items of the burst and separation figures, kept while the wheels stay the same: a redraw
        # sets their data (new items, legend entries and all, made a drop cost tens of ms more)
        self._burst_items = None  # (wheel ids, right-side ids, curves, parked squares, repeat lines, need line)
        self._separation_items = None  # (wheel count, range bars, quartile boxes, medians)
        self._refresh_pending = False  # scores and selection often change together: draw once
        doc.scoresReady.connect(self.schedule_refresh)
        doc.selectionChanged.connect(lambda _n: self.schedule_refresh())
        doc.liveScore.connect(self._live)
        doc.liveDropped.connect(lambda name, sc: self._compute_ahead(sc) if name == self.doc.selected else None)
        self.refresh()

    def _row(self):
        sc = self.doc.scores
        if not self.doc.selected or self.doc.selected not in sc.names:
            return None
        return sc.names.index(self.doc.selected)

    def schedule_refresh(self) -> None:
        """Redraw on a coming turn of the event loop (after the views, one redraw per turn)."""
        if not self._refresh_pending:
            self._refresh_pending = True
            run_soon(self, self._refresh_if_pending)

    def _refresh_if_pending(self) -> None:
        try:
            if self._refresh_pending:
                self.refresh()
        except RuntimeError:  # destroyed while the redraw waited
            pass

    def refresh(self) -> None:
        self._refresh_pending = False
        i = self._row()
        self._hide_burst()  # the figure waits for its worker: nothing of the last spot is shown meanwhile
        if i is None or self.doc.pending[i]:
            for p in (self.burst, self.separation):
                p.clear()
            self._burst_items = self._separation_items = None
            self.levels.clear()
            self._levels_drawn = self._level_items = self._range_of = None
        self._drop_burst()
        self.burst_result = None
        if i is None:
            self.levels.setTitle("Level over the wheel turn (select a spot)", size="9pt")
            return
        if self.doc.pending[i]:
            self.separation.getAxis("bottom").setTicks(None)
            self.levels.setTitle(f"{self.doc.selected}: being scored in the background...", size="9pt")
            self.burst.setTitle("Burst success vs speed", size="8pt")
            self.separation.setTitle("Wheel separation by signal strength", size="8pt")
            return
        sc = self.doc.scores
        key = self._levels_key(sc, i, self.doc.selected)
        drawn = self._levels_drawn
        if drawn is not None and drawn[:-1] == key[:-1] and np.array_equal(drawn[-1], key[-1]):
            self._levels_title(sc, i, self.doc.selected)  # a dropped spot: its live curves are these levels
        else:
            self.levels.clear()
            self._draw_levels(sc, i, self.doc.selected)
            self._levels_drawn = key
        self._start_burst(sc, i)
        self._draw_separation(sc, i)

    def _burst_key(self, sc, i: int) -> tuple:
        """What the burst of spot row ``i`` depends on: the physics (radio, wheels, angles) and its levels."""
        return (self.doc.physics, float(sc.sensitivity_dbm), sc.levels_dbm[i].tobytes())

    def _burst_worker(self, sc, i: int) -> Task:
        """Burst success of spot row ``i`` in a worker (up to 16 wheels x 400 speeds x 720 start angles
        x 100 frames inside the file limits)."""
        scene = self.doc.scene
        task = Task(lambda _p, cancel: burst_for_spot(scene, sc, i, cancel=cancel), "burst success")
        task.key = self._burst_key(sc, i)
        task.done.connect(self._burst_done)
        task.failed.connect(self._burst_failed)
        task.start()
        return task

    def _start_burst(self, sc, i: int) -> None:
        """The burst figure of spot row ``i``: drawn when its worker's result arrives unless the figure moved
        on; the worker started when the spot was released there is taken over (drawn at once when done)."""
        key = self._burst_key(sc, i)
        ahead, self._ahead = self._ahead, None
        if ahead is not None and ahead[0] == key and ahead[2] is not None:
            self._draw_burst(ahead[2])
            self.burstReady.emit(ahead[2])
            return
        if ahead is not None and ahead[0] == key:
            self._burst_task = ahead[1]  # still computing: drawn when it arrives
        else:
            if ahead is not None and ahead[1] is not None:
                ahead[1].cancel()
            self._burst_task = self._burst_worker(sc, i)
        self.burst.setTitle("Burst success vs speed: computing...", size="8pt")

    def _compute_ahead(self, sc) -> None:
        """The dropped spot's burst (row 0 of its live score), started in a worker as the mouse is released,
        while the edit is made and the views redraw (started during the drag it would compete with the
        live scoring for the cores); the figure's refresh after the edit adopts it."""
        key = self._burst_key(sc, 0)
        if self._ahead is not None:
            if self._ahead[0] == key:
                return
            if self._ahead[1] is not None:
                self._ahead[1].cancel()
        self._ahead = (key, self._burst_worker(sc, 0), None)

    def burst_pending(self) -> bool:
        """True while the figures wait for a redraw or the burst figure for its worker."""
        return self._burst_task is not None or self._refresh_pending

    def _drop_burst(self) -> None:
        task, self._burst_task = self._burst_task, None
        if task is not None:
            task.cancel()

    def abandon(self) -> None:
        """Drop the burst computations without waiting (the window closes)."""
        self._refresh_pending = False
        self._drop_burst()
        ahead, self._ahead = self._ahead, None
        if ahead is not None and ahead[1] is not None:
            ahead[1].cancel()

    def _burst_done(self, task, r) -> None:
        if self._ahead is not None and task is self._ahead[1]:
            self._ahead = (self._ahead[0], None, r)
        if task is self._burst_task:
            self._burst_task = None
            self._draw_burst(r)
            self.burstReady.emit(r)

    def _burst_failed(self, task, msg: str) -> None:
        if self._ahead is not None and task is self._ahead[1]:
            self._ahead = None  # a drop computes it again (and reports the failure)
        if task is self._burst_task:
            self._burst_task = None
            self.burst.setTitle(f"Burst success: failed ({msg})", size="8pt")

    def _live(self, name: str, sc) -> None:
        if name == self.doc.selected:
            if not self._move_levels(sc, name + " (moving)"):
                self.levels.clear()
                self._draw_levels(sc, 0, name + " (moving)")
            self._levels_drawn = self._levels_key(sc, 0, name)

    def _levels_key(self, sc, i: int, name: str) -> tuple:
        """What the level figure of spot row ``i`` is drawn from (the levels last)."""
        return (name, sc.sensitivity_dbm, sc.required_margin_db, sc.wheel_ids, self.doc.physics,
                np.array(sc.levels_dbm[i]))

    def _draw_levels(self, sc, i: int, title: str) -> None:
        p = self.levels
        ang = np.append(sc.angles_deg, 360.0)
        right = {g.id for g in self.doc.scene.wheels if g.outboard_sign < 0}
        self.levels_legend.setColumnCount(max(1, len(sc.wheel_ids)))
        curves = []
        for w, wid in enumerate(sc.wheel_ids):
            lv = np.append(sc.levels_dbm[i, w], sc.levels_dbm[i, w, 0])
            # right-side wheels dashed: a spot on the centre line hears mirrored wheels alike
            style = Qt.PenStyle.DashLine if wid in right else Qt.PenStyle.SolidLine
            curves.append(p.plot(ang, lv, pen=pg.mkPen(wheel_colour(w), width=1.8, style=style), name=wid))
        ww = int(sc.worst_wheel[i])
        # a scatter item, not a plot item with a symbol: that would rebuild its point at every range change
        worst = pg.ScatterPlotItem([sc.worst_angle_deg[i, ww]], [sc.worst_dbm[i, ww]], symbol="x", size=11,
                                   pen=pg.mkPen(wheel_colour(ww), width=2.5))
        p.addItem(worst)
        self._level_items = (sc.wheel_ids, sc.sensitivity_dbm, sc.required_margin_db, curves, worst)
        sens = sc.sensitivity_dbm
        need = sens + sc.required_margin_db
        p.addItem(pg.InfiniteLine(sens, angle=0, pen=pg.mkPen(180, 30, 30, width=1.5, style=Qt.PenStyle.DashLine),
                                  label=f"sensitivity {sens:.0f} dBm", labelOpts={"position": 0.2, "color": (150, 20, 20)}))
        p.addItem(pg.InfiniteLine(need, angle=0, pen=pg.mkPen(120, 120, 120, width=1, style=Qt.PenStyle.DotLine),
                                  label=f"+ required margin {sc.required_margin_db:.0f} dB",
                                  labelOpts={"position": 0.75, "color": (90, 90, 90)}))
        self._range_of = (sc, i)
        p.setYRange(*_level_range(sc, i, self._legend_share()), padding=0)
        p.setXRange(0, 360, padding=0)
        self._levels_title(sc, i, title)

    def _keep_legend_room(self, *_args) -> None:
        """The plot was resized: the legend's share of its height changed, so its y range is set again."""
        if self._range_of is not None:
            self.levels.setYRange(*_level_range(*self._range_of, self._legend_share()), padding=0)

    def _legend_share(self, plot=None, legend=None) -> float:
        """The share of a plot's height (the level plot's by default) its wheel legend takes from the edge it
        sits at (its box, its offset and 6 px), or 0.3 before the plot has a size."""
        plot, legend = plot or self.levels, legend or self.levels_legend
        h = plot.getPlotItem().vb.height()
        if h <= 20:
            return 0.3
        return (legend.boundingRect().height() + 12.0) / h

    def _move_levels(self, sc, title: str) -> bool:
        """The dragged spot's new levels (row 0 of ``sc``) into the curves already drawn (no new plot items:
        a mouse move costs a data update, not a redraw of the figure); False when there is nothing to update."""
        items = self._level_items
        if items is None or items[:3] != (sc.wheel_ids, sc.sensitivity_dbm, sc.required_margin_db):
            return False
        curves, worst = items[3], items[4]
        ang = np.append(sc.angles_deg, 360.0)
        for w, curve in enumerate(curves):
            curve.setData(ang, np.append(sc.levels_dbm[0, w], sc.levels_dbm[0, w, 0]))
        ww = int(sc.worst_wheel[0])
        worst.setData([sc.worst_angle_deg[0, ww]], [sc.worst_dbm[0, ww]], pen=pg.mkPen(wheel_colour(ww), width=2.5))
        self._range_of = (sc, 0)
        self.levels.setYRange(*_level_range(sc, 0, self._legend_share()), padding=0)
        self._levels_title(sc, 0, title)
        return True

    def _levels_title(self, sc, i: int, title: str) -> None:
        ww = int(sc.worst_wheel[i])
        m = float(sc.margin_db[i])
        self.levels.setTitle(f"{title}: margin {m:+.1f} dB, worst wheel {sc.wheel_ids[ww]} at "
                             f"{sc.worst_angle_deg[i, ww]:.0f} deg", size="9pt")

    def _draw_burst(self, r) -> None:
        """Burst success vs speed; when every burst gets through, the burst margin instead (the extra loss the
        bursts still survive, core.burst), so the figure says how much is to spare rather than a flat 100 %."""
        p = self.burst
        self.burst_result = r
        kmh = r.speeds_mps * KMH_PER_MPS
        all_pass = r.margin_db is not None and float(r.success.min()) >= 1.0
        data = r.margin_db if all_pass else 100 * r.success
        parked = r.parked_margin_db if all_pass else 100 * r.parked
        _ids, _right, curves, squares, repeats, need_line = self._burst_plot_items(r)
        for w in range(len(r.wheel_ids)):
            curves[w].setData(kmh, data[w])
        squares.setData(np.zeros(len(r.wheel_ids)), np.asarray(parked, float),
                        brush=[pg.mkBrush(wheel_colour(w)) for w in range(len(r.wheel_ids))])
        # one grey dotted line per speed at which the frames repeat, the lowest MAX_REPEAT_MARKERS of them (one item)
        lowest = [np.asarray(rs, float)[:MAX_REPEAT_MARKERS] for rs in r.resonant_mps]  # ascending per wheel
        speeds = np.unique(np.round(np.concatenate(lowest), 6)) if lowest else np.zeros(0)
        counts = getattr(r, "resonant_count", ())  # core may list only the lowest ones and count them all
        total = int(sum(counts)) if len(counts) else sum(len(rs) for rs in r.resonant_mps)
        shown = speeds[:MAX_REPEAT_MARKERS] * KMH_PER_MPS
        repeat = "dotted: frames repeat" + (f" (lowest {len(shown):,} of {total:,} drawn)" if len(shown) < total else "")
        lo_y, hi_y = (min(0.0, float(data.min())) - 50, float(data.max()) + 50) if all_pass else (0.0, 100.0)
        repeats.setData(np.repeat(shown, 2), np.tile([lo_y, hi_y], len(shown)))
        for item in (*curves, squares, repeats):
            item.setVisible(True)
        need_line.setVisible(all_pass)
        rad = self.doc.vehicle.radio
        if all_pass:
            need = self.doc.scores.required_margin_db
            need_line.setValue(need)
            lo, hi = min(0.0, float(data.min()), need) - 2, max(float(data.max()), need) + 4
            f = min(0.5, self._legend_share(self.burst, self.burst_legend))  # room below for the wheel legend
            y_range = (lo - f * (hi - lo) / (1.0 - f), hi)
            p.setLabel("left", "burst margin", units="dB")
            p.setTitle(f"every burst gets through: lowest burst margin {float(data.min()):.0f} dB<br>dashed: "
                       f"required margin; squares: parked<br>{repeat}", size="8pt")
        else:
            wi, vi = r.worst()
            y_range = (-3.0, 103.0)  # 0..100 % with 3 % of room at both ends
            p.setLabel("left", "bursts heard", units="%")
            p.setTitle(f"{rad.frames_per_burst} frames / {rad.frame_interval_s * 1000:.0f} ms: lowest "
                       f"{100 * r.success[wi, vi]:.0f} % ({r.wheel_ids[wi]}, {kmh[vi]:.0f} km/h)<br>"
                       f"squares: parked<br>{repeat}", size="8pt")
        x0, x1 = float(kmh.min()), float(kmh.max())
        dx = 0.02 * (x1 - x0)
        p.setRange(xRange=(x0 - dx, x1 + dx), yRange=y_range, padding=0)  # one range change: one update of the items

    def _burst_plot_items(self, r) -> tuple:
        """The burst figure's items for these wheels: the ones drawn last time when the wheels are the same
        (their data is set again), else new ones (right-side wheels dashed: mirrored wheels give the same
        curve, both stay visible)."""
        right = frozenset(g.id for g in self.doc.scene.wheels if g.outboard_sign < 0)
        ids = tuple(r.wheel_ids)
        if self._burst_items is not None and self._burst_items[:2] == (ids, right):
            return self._burst_items
        p = self.burst
        p.clear()
        self.burst_legend.setColumnCount(max(1, min(len(ids), 6)))  # one row: less of the figure covered
        curves = []
        for w, wid in enumerate(ids):
            style = Qt.PenStyle.DashLine if wid in right else Qt.PenStyle.SolidLine
            curves.append(p.plot([], [], pen=pg.mkPen(wheel_colour(w), width=1.8, style=style), name=wid))
        # the parked values, one square per wheel in its colour: one scatter item (a plot item with symbols
        # would rebuild its points on every change of the figure's range)
        squares = pg.ScatterPlotItem(symbol="s", size=7, pen=pg.mkPen("k"))
        p.addItem(squares)
        repeats = p.plot([], [], connect="pairs", pen=pg.mkPen(120, 120, 120, width=1, style=Qt.PenStyle.DotLine))
        need_line = pg.InfiniteLine(0.0, angle=0, pen=pg.mkPen(60, 60, 60, width=1, style=Qt.PenStyle.DashLine))
        need_line.setVisible(False)
        p.addItem(need_line)
        self._burst_items = (ids, right, curves, squares, repeats, need_line)
        return self._burst_items

    def _hide_burst(self) -> None:
        """Hide the burst curves while the next spot's are computed (kept for reuse, not removed)."""
        if self._burst_items is not None:
            for item in (*self._burst_items[2], *self._burst_items[3:]):
                item.setVisible(False)

    def _draw_separation(self, sc, i: int) -> None:
        p = self.separation
        lv = sc.levels_dbm[i]
        d = wheel_distinctness(lv, sc.wheel_ids)
        self.distinctness = d
        x = np.arange(len(sc.wheel_ids))
        q25, q75 = np.percentile(lv, 25, axis=1), np.percentile(lv, 75, axis=1)
        brushes = [pg.mkBrush(wheel_colour(w)) for w in x]
        mid, span = (lv.min(axis=1) + lv.max(axis=1)) / 2, lv.max(axis=1) - lv.min(axis=1)
        items = self._separation_items
        if items is not None and items[0] == len(x):  # the same wheels: new data into the items drawn
            items[1].setData(x=x, y=mid, height=span)
            items[2].setOpts(x=x, y0=q25, y1=q75, brushes=brushes)
            items[3].setData(x, d.medians_dbm)
        else:
            p.clear()
            bars = pg.ErrorBarItem(x=x, y=mid, height=span, beam=0.15, pen=pg.mkPen(80, 80, 80))
            boxes = pg.BarGraphItem(x=x, y0=q25, y1=q75, width=0.45, brushes=brushes, pen=pg.mkPen(40, 40, 40))
            p.addItem(bars)
            p.addItem(boxes)
            medians = pg.ScatterPlotItem(x, d.medians_dbm, symbol="_", size=26, pen=pg.mkPen("k", width=2.5))
            p.addItem(medians)
            self._separation_items = (len(x), bars, boxes, medians)
        p.getAxis("bottom").setTicks([[(int(k), wid) for k, wid in zip(x, sc.wheel_ids)]])
        p.setXRange(-0.7, len(x) - 0.3, padding=0)
        if len(x) > 1:
            a, b = d.closest_pair
            p.setTitle(f"Closest {sc.wheel_ids[a]} / {sc.wheel_ids[b]}: {d.min_separation_db:.1f} dB apart, "
                       f"overlap {100 * d.closest_overlap:.0f} %<br>box: middle half, bar: range, line: median",
                       size="8pt")


class RankingPanel(QWidget):
    """Heatmap | spot table | figures of the selected spot."""

    def __init__(self, doc: Document, parent: QWidget | None = None):
        super().__init__(parent)
        self.doc = doc
        self.heatmap = HeatmapPanel(doc)
        self.table = SpotTable(doc)
        self.figures = SpotFigures(doc)
        left = QSplitter(Qt.Orientation.Vertical)
        left.addWidget(self.heatmap)
        left.addWidget(self.table)
        left.setSizes([330, 230])
        split = QSplitter(Qt.Orientation.Horizontal)
        split.addWidget(left)
        split.addWidget(self.figures)
        split.setSizes([600, 660])
        lay = QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        lay.addWidget(split)

"""The comparison window: several bodies side by side, the spot x body table, the platform-common spot.

``open_compare_window(parent)`` opens it. Bodies come from a file dialog or the "Load the five
samples" button; each is drawn as a small top view (all at one scale) with its spots; the table
below gives margin and worst wheel per body, the minimum over the bodies, and highlights the
platform-common best spot (ringed in the top views; a selected row is ringed instead). The
shared-region search (core.compare.search_common_position) runs in a worker thread and its best
position is drawn as a square marker in every top view.
"""

from __future__ import annotations

import numpy as np
from core.samples import SAMPLES_DIR
from PySide6.QtCore import QRectF, QSize, Qt, Signal
from PySide6.QtGui import QAction, QBrush, QColor, QFont, QPainter
from PySide6.QtWidgets import (
    QComboBox,
    QFileDialog,
    QHBoxLayout,
    QLabel,
    QMainWindow,
    QMessageBox,
    QScrollArea,
    QSplitter,
    QTableWidget,
    QTableWidgetItem,
    QToolBar,
    QVBoxLayout,
    QWidget,
)

from app.gui.tasks import Task
from app.report import figures as fig
from app.report.compare import body_labels, describe_position
from core.compare import LANDMARKS, CommonSearch, Comparison, NoSharedRegion, compare_bodies, search_common_position
from core.scoring import Scene
from core.vehicle import Vehicle, VehicleFileError, load_vehicle

COMMON_ROW = QColor(255, 236, 160)


class BodyThumb(QWidget):
    """A small top view of one body with its spots (drawn by app.report.figures)."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self.vehicle: Vehicle | None = None
        self.positions = np.zeros((0, 3))
        self.labels: list[str] = []
        self.highlight = -1
        self.title = ""
        self.span: tuple[float, float] | None = None
        self.square = None
        self.setMinimumSize(QSize(260, 150))

    def set_content(self, v, positions, labels, highlight, title, span, square=None):
        self.vehicle, self.positions, self.labels = v, positions, labels
        self.highlight, self.title, self.span, self.square = highlight, title, span, square
        self.update()

    def paintEvent(self, _event):
        p = QPainter(self)
        p.setRenderHint(QPainter.RenderHint.Antialiasing, True)
        p.fillRect(self.rect(), QColor(255, 255, 255))
        if self.vehicle is not None:
            s = self.logicalDpiX() / 72.0
            ax = fig.draw_top_thumbnail(p, QRectF(self.rect()), s, self.vehicle, self.positions, self.labels,
                                        self.highlight, self.title, self.span)
            if self.square is not None:
                fig.draw_square(ax, self.square)
        p.end()


def _search_task(vehicles, scenes, landmark) -> Task:
    """The shared-region search in a worker (``core.compare.search_common_position``); its result is
    the CommonSearch, or the NoSharedRegion message as a string."""

    def run(progress, _cancel):
        try:
            return search_common_position(vehicles, landmark, 0.10, None, scenes, progress=progress)
        except NoSharedRegion as e:
            return str(e)

    return Task(run, "shared-position search")


class CompareWindow(QMainWindow):
    """Several bodies of a platform side by side with the spot x body margin table."""

    comparisonReady = Signal()
    searchReady = Signal()

    def __init__(self, parent=None):
        super().__init__(parent)
        self.setWindowTitle("Compare bodies")
        self.resize(1300, 820)
        self.paths: list[str] = []
        self.vehicles: list[Vehicle] = []
        self.scenes: list[Scene] = []
        self.comparison: Comparison | None = None
        self.search: CommonSearch | None = None
        self.errors: list[str] = []
        self._worker: Task | None = None
        self._selected = -1
        self._search_error = ""

        tb = QToolBar("Bodies", self)
        tb.setMovable(False)
        self.addToolBar(tb)
        self.act_add = QAction("Add body files...", self, triggered=self._add_dialog)
        self.act_samples = QAction("Load the five samples", self, triggered=self.load_samples)
        self.act_clear = QAction("Clear", self, triggered=self.clear)
        self.act_search = QAction("Search shared position", self, triggered=self.start_search)
        self.act_pdf = QAction("Export comparison PDF...", self, triggered=self._export_dialog)
        for a in (self.act_add, self.act_samples, self.act_clear):
            tb.addAction(a)
        tb.addSeparator()
        tb.addWidget(QLabel(" measured from: "))
        self.landmark = QComboBox()
        self.landmark.addItems([x for x in LANDMARKS if x != "origin"])
        self.landmark.setCurrentText("rear_axle")
        tb.addWidget(self.landmark)
        tb.addAction(self.act_search)
        tb.addSeparator()
        tb.addAction(self.act_pdf)

        self.thumb_row = QWidget()
        self.thumb_layout = QHBoxLayout(self.thumb_row)
        self.thumb_layout.setContentsMargins(4, 4, 4, 4)
        self.thumbs: list[BodyThumb] = []
        scroll = QScrollArea()
        scroll.setWidgetResizable(True)
        scroll.setWidget(self.thumb_row)
        scroll.setMinimumHeight(190)

        self.summary = QLabel("Load two or more bodies to compare them.")
        self.summary.setWordWrap(True)
        self.summary.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.table = QTableWidget(0, 0)
        self.table.setSelectionBehavior(QTableWidget.SelectionBehavior.SelectRows)
        self.table.setSelectionMode(QTableWidget.SelectionMode.SingleSelection)
        self.table.setEditTriggers(QTableWidget.EditTrigger.NoEditTriggers)
        self.table.itemSelectionChanged.connect(self._on_select)
        caution = QLabel("Results are approximate: confirm by detailed simulation and vehicle measurement; radio "
                         "limits follow each market's rules.")
        caution.setWordWrap(True)

        lower = QWidget()
        lv = QVBoxLayout(lower)
        lv.setContentsMargins(4, 4, 4, 4)
        lv.addWidget(self.summary)
        lv.addWidget(self.table, 1)
        lv.addWidget(caution)
        split = QSplitter(Qt.Orientation.Vertical)
        split.addWidget(scroll)
        split.addWidget(lower)
        split.setSizes([210, 590])
        self.setCentralWidget(split)
        self._update_actions()

    # ----- loading ----------------------------------------------------------------------------
    def _add_dialog(self):
        files, _ = QFileDialog.getOpenFileNames(self, "Add body files", str(SAMPLES_DIR), "Vehicle files (*.json)")
        if files:
            self.add_paths(files)

    def load_samples(self):
        self.clear()
        self.add_paths(sorted(str(p) for p in SAMPLES_DIR.glob("*.json")))

    def add_paths(self, paths) -> None:
        """Load files (a bad file is reported and skipped; the others are kept) and recompute."""
        bad = []
        for p in paths:
            if str(p) in self.paths:
                continue
            try:
                v = load_vehicle(p)
            except VehicleFileError as e:
                bad.append(str(e))
                continue
            self.paths.append(str(p))
            self.vehicles.append(v)
            self.scenes.append(Scene.from_vehicle(v))
        self.errors = bad
        if bad:
            self.statusBar().showMessage(bad[0], 15000)
            box = QMessageBox(QMessageBox.Icon.Warning, "Compare bodies",
                              "These files were not loaded:\n\n" + "\n".join(bad), parent=self)
            box.setWindowModality(Qt.WindowModality.NonModal)
            box.show()
        self.search = None
        self._drop_search()
        self.recompute()

    def clear(self):
        self.paths, self.vehicles, self.scenes = [], [], []
        self.comparison, self.search, self._selected = None, None, -1
        self._drop_search()
        self.recompute()

    def _drop_search(self):
        """A search of other bodies is still running: ask it to stop and ignore its result."""
        if self._worker is not None:
            self._worker.cancel()
            self._worker = None

    # ----- computing ----------------------------------------------------------------------------
    def recompute(self):
        self.comparison = compare_bodies(self.vehicles, self.scenes) if self.vehicles else None
        self._fill_table()
        self._fill_thumbs()
        self._update_summary()
        self._update_actions()
        self.comparisonReady.emit()

    def start_search(self):
        if len(self.vehicles) < 1 or self._worker is not None:
            return
        self.statusBar().showMessage("Searching the shared mounting region...")
        self._worker = _search_task(self.vehicles, self.scenes, self.landmark.currentText())
        self._worker.done.connect(self._search_done)
        self._worker.failed.connect(lambda task, msg: self._search_done(task, f"search failed: {msg}"))
        self._worker.start()
        self._update_actions()

    def _search_done(self, task, result):
        if task is not self._worker:
            return  # the bodies changed or the window closed while it ran
        self._worker = None
        result, error = (None, result) if isinstance(result, str) else (result, "")
        self.search = result
        self.statusBar().showMessage(error or "Search finished", 10000)
        self._search_error = error
        self._fill_thumbs()
        self._update_summary()
        self._update_actions()
        self.searchReady.emit()

    def _update_actions(self):
        have = bool(self.vehicles)
        self.act_search.setEnabled(have and self._worker is None)
        self.act_pdf.setEnabled(have)
        self.act_clear.setEnabled(have)

    # ----- views ----------------------------------------------------------------------------------
    def _fill_table(self):
        c = self.comparison
        self.table.clear()
        if c is None:
            self.table.setRowCount(0)
            self.table.setColumnCount(0)
            return
        labels = body_labels(c)
        head = ["Spot", *labels, "Min dB", "Limited by"]
        self.table.setColumnCount(len(head))
        self.table.setHorizontalHeaderLabels(head)
        order = list(c.order())
        self.table.setRowCount(len(order))
        bold = QFont()
        bold.setBold(True)
        for r, i in enumerate(order):
            name = c.spot_names[i] + ("" if c.present_all[i] else "  (not on all bodies)")
            items = [QTableWidgetItem(name)]
            for b in range(len(labels)):
                m = c.margin_db[i, b]
                txt = "-" if np.isnan(m) else f"{m:+.1f} {c.worst_wheel[i, b]}" + ("*" if c.carried[i, b] else "")
                items.append(QTableWidgetItem(txt))
            items.append(QTableWidgetItem(f"{c.min_margin_db[i]:+.1f}"))
            items.append(QTableWidgetItem(labels[c.limiting_body[i]]))
            for k, it in enumerate(items):
                if k:
                    it.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
                if i == c.common_best:
                    it.setBackground(QBrush(COMMON_ROW))
                    it.setFont(bold)
                it.setData(Qt.ItemDataRole.UserRole, int(i))
                it.setFlags(it.flags() & ~Qt.ItemFlag.ItemIsEditable)
                self.table.setItem(r, k, it)
        self.table.resizeColumnsToContents()

    def common_row(self) -> int:
        """Table row of the platform-common best spot (-1 when none)."""
        c = self.comparison
        if c is None or c.common_best < 0:
            return -1
        return list(c.order()).index(c.common_best)

    def _on_select(self):
        rows = self.table.selectionModel().selectedRows() if self.table.selectionModel() else []
        self._selected = int(self.table.item(rows[0].row(), 0).data(Qt.ItemDataRole.UserRole)) if rows else -1
        self._fill_thumbs()

    def _fill_thumbs(self):
        c = self.comparison
        while len(self.thumbs) > len(self.vehicles):
            t = self.thumbs.pop()
            self.thumb_layout.removeWidget(t)
            t.deleteLater()
        while len(self.thumbs) < len(self.vehicles):
            t = BodyThumb()
            self.thumbs.append(t)
            self.thumb_layout.addWidget(t)
        if c is None:
            return
        span = fig.thumbnail_span(self.vehicles)
        labels = body_labels(c)
        order = list(c.order())
        ring = self._selected if self._selected >= 0 else c.common_best
        for b, (t, v) in enumerate(zip(self.thumbs, self.vehicles)):
            present = np.nonzero(~np.isnan(c.margin_db[:, b]))[0]
            labs = [str(order.index(i) + 1) for i in present]
            hl = present.tolist().index(ring) if ring in present else -1
            sq = self.search.best_positions_m[b][:2] if self.search is not None else None
            t.set_content(v, c.positions_m[present, b], labs, hl, f"{labels[b]}: {v.name}", span, sq)

    def _update_summary(self):
        c = self.comparison
        if c is None:
            self.summary.setText("Load two or more bodies to compare them.")
            return
        lines = []
        if c.common_best >= 0:
            i = c.common_best
            lb = int(c.limiting_body[i])
            lines.append(f"<b>Platform-common best spot: {c.spot_names[i]}</b>, smallest margin "
                         f"{c.min_margin_db[i]:+.1f} dB over {len(self.vehicles)} bodies (limited by the "
                         f"{c.body_styles[lb]}, wheel {c.worst_wheel[i, lb]}). Spots are numbered by table row; the "
                         f"ringed spot is the common one (or the selected row).")
        if self.search is not None:
            s = self.search
            lines.append(f"Searched best position: {describe_position(s)}; smallest margin "
                         f"{s.best_min_margin_db:+.1f} dB (limited by the {c.body_styles[s.limiting_body]}); "
                         f"square marker.")
        elif self._search_error:
            lines.append(f"Search: {self._search_error}")
        self.summary.setText("<br>".join(lines))

    # ----- export -----------------------------------------------------------------------------------
    def _export_dialog(self):
        path, _ = QFileDialog.getSaveFileName(self, "Export comparison", "comparison.pdf", "PDF files (*.pdf)")
        if path:
            self.export_pdf(path)

    def export_pdf(self, path) -> int:
        from app.report.compare import write_comparison_pdf

        n = write_comparison_pdf(path, self.vehicles, self.paths, self.comparison, self.search,
                                 self._search_error)
        self.statusBar().showMessage(f"Wrote {path} ({n} pages)", 8000)
        return n

    def closeEvent(self, event):
        self._drop_search()  # nothing waits for it: it finishes unseen and is cleaned up
        super().closeEvent(event)


def open_compare_window(parent=None, paths=None) -> CompareWindow:
    """Open the comparison window (optionally with files loaded) and return it."""
    w = CompareWindow(parent)  # a QMainWindow is a top-level window even with a parent
    if paths:
        w.add_paths(paths)
    w.show()
    return w

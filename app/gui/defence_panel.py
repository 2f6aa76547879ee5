"""The selected spot's defence in the desktop program: its link budget by term (worst or median angle), the
tornado of what its margin depends on, P(pass) and what to measure first (core.defence).

A dock beside the settings (``install_defence_panel(window)``, one line in the main window). The analysis of
one spot takes a fraction of a second; it runs on the GUI thread a moment after the scores or the selection
settle, and only while the panel is shown. Views only read the document.
"""

from __future__ import annotations

import numpy as np
from PySide6.QtCore import QRectF, Qt, QTimer
from PySide6.QtGui import QColor, QPainter
from PySide6.QtWidgets import (
    QButtonGroup,
    QDockWidget,
    QHBoxLayout,
    QHeaderView,
    QLabel,
    QRadioButton,
    QSizePolicy,
    QSplitter,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from app.gui.look import signed
from app.gui.tasks import Task
from app.report import figures as fig
from core.defence import defend
from core.scoring import vehicle_spot_arrays

#: wait this long after the last change before analysing, ms
SETTLE_MS = 300


class TornadoView(QWidget):
    """The tornado of a core.sensitivity.SpotSensitivity, painted with the report's figure code."""

    def __init__(self, parent: QWidget | None = None):
        super().__init__(parent)
        self.sensitivity = None
        self.setMinimumHeight(200)
        self.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Expanding)

    def set_sensitivity(self, ss) -> None:
        self.sensitivity = ss
        self.update()

    def paintEvent(self, _ev) -> None:
        p = QPainter(self)
        p.fillRect(self.rect(), QColor(255, 255, 255))
        if self.sensitivity is not None:
            p.setRenderHint(QPainter.RenderHint.Antialiasing, True)
            s = self.logicalDpiY() / 72.0
            fig.draw_tornado(p, QRectF(4, 4, self.width() - 8, self.height() - 8), s, self.sensitivity,
                             title="What the margin depends on")
        p.end()


class DefencePanel(QWidget):
    """Link budget by term, tornado, P(pass) and what to measure first for the selected spot."""

    COLUMNS = ("term", "dB", "running dBm")

    def __init__(self, doc, parent: QWidget | None = None):
        super().__init__(parent)
        self.doc = doc
        self.case = None
        self.header = QLabel()
        self.header.setWordWrap(True)
        self.header.setTextFormat(Qt.TextFormat.RichText)
        self.worst = QRadioButton("at the worst angle")
        self.median = QRadioButton("at the median angle")
        self.worst.setChecked(True)
        self.worst.setToolTip("the worst wheel at its worst case over the continuous turn")
        self.median.setToolTip("the worst wheel at the sampled angle whose level is nearest the turn's median")
        group = QButtonGroup(self)
        group.addButton(self.worst)
        group.addButton(self.median)
        group.buttonToggled.connect(lambda *_a: self._show_budget())
        row = QHBoxLayout()
        row.addWidget(QLabel("Link budget by term"))
        row.addStretch(1)
        row.addWidget(self.worst)
        row.addWidget(self.median)
        self.table = QTableWidget(0, len(self.COLUMNS))
        self.table.setHorizontalHeaderLabels(list(self.COLUMNS))
        self.table.verticalHeader().setVisible(False)
        self.table.setEditTriggers(QTableWidget.EditTrigger.NoEditTriggers)
        hh = self.table.horizontalHeader()
        hh.setSectionResizeMode(0, QHeaderView.ResizeMode.Stretch)
        for c in (1, 2):
            hh.setSectionResizeMode(c, QHeaderView.ResizeMode.ResizeToContents)
        self.table.setToolTip("The terms add up to the received level the ranking computed (core.budget); hover a "
                              "term for how it was obtained")
        self.tornado = TornadoView()
        self.tornado.setToolTip("One input at a time at the ends of its range (blue: low end, orange: high end); "
                                "black: the nominal margin, red: the requirement")
        self.measure = QLabel()
        self.measure.setWordWrap(True)
        top = QWidget()
        tl = QVBoxLayout(top)
        tl.setContentsMargins(0, 0, 0, 0)
        tl.addLayout(row)
        tl.addWidget(self.table)
        split = QSplitter(Qt.Orientation.Vertical)
        split.addWidget(top)
        split.addWidget(self.tornado)
        split.setSizes([330, 300])
        lay = QVBoxLayout(self)
        lay.setContentsMargins(4, 4, 4, 4)
        lay.addWidget(self.header)
        lay.addWidget(split, 1)
        lay.addWidget(self.measure)
        self.timer = QTimer(self)
        self.timer.setSingleShot(True)
        self.timer.setInterval(SETTLE_MS)
        self.timer.timeout.connect(self.refresh)
        self.active = True
        self.task = None
        self.case = None
        doc.scoresReady.connect(self.schedule)
        doc.selectionChanged.connect(lambda _n: self.schedule())
        self.schedule()

    def schedule(self) -> None:
        """Analyse again a moment after the last change (only while the panel is shown)."""
        self.header.setText("<i>analysing the selected spot...</i>" if self.doc.selected else
                            "Select a spot to see its link budget by term and what its margin depends on.")
        if self.active:
            self.timer.start()

    def set_active(self, on: bool) -> None:
        self.active = on
        if on:
            self.schedule()

    def refresh(self) -> None:
        """Start the analysis of the selected spot (core.defence.defend) in a worker; shown when it arrives
        unless the selection or the scores moved on meanwhile."""
        doc = self.doc
        sc = doc.scores
        name = doc.selected
        self._drop_task()
        if not name or name not in sc.names:
            self._clear("Select a spot to see its link budget by term and what its margin depends on.")
            return
        i = sc.names.index(name)
        if doc.pending[i]:  # no levels yet (scored in the background): analysed when its scores arrive
            self._clear(f"<i>'{name}' is being scored in the background; its link budget follows.</i>")
            return
        axes = vehicle_spot_arrays(doc.vehicle)[2]
        scene = doc.scene
        task = Task(lambda _p, _c: defend(scene, sc, axes, [i]), f"link budget of '{name}'")
        task.done.connect(lambda t, d: self._arrived(t, d, sc, i, name, axes))
        task.failed.connect(self._failed)
        self.task = task
        task.start()

    def _clear(self, header: str) -> None:
        """No analysis shown: an empty table and tornado, and ``header`` saying why."""
        self.case = None
        self.table.setRowCount(0)
        self.tornado.set_sensitivity(None)
        self.measure.setText("")
        self.header.setText(header)

    def _drop_task(self) -> None:
        task, self.task = self.task, None
        if task is not None:
            task.cancel()

    def abandon(self) -> None:
        """Drop a running analysis without waiting (the window closes)."""
        self.timer.stop()
        self._drop_task()

    def pending(self) -> bool:
        """True while an analysis waits to start or runs."""
        return self.timer.isActive() or self.task is not None

    def _failed(self, task, message: str) -> None:
        if task is self.task:
            self.task = None
            self.header.setText(f"The analysis failed: {message}")

    def _arrived(self, task, d, sc, i: int, name: str, axes) -> None:
        if task is not self.task:
            return  # superseded
        self.task = None
        self.case = d.cases[i]
        ss = self.case.sensitivity
        w = int(sc.worst_wheel[i])
        shown = signed(float(sc.margin_db[i]), 1)
        colour = "#0a6b2a" if float(shown) >= 0 else "#a3141e"  # by the value shown: never a red "-0.0"
        top = ", ".join(b.label for b in ss.most_sensitive(2))
        ax = ", ".join(f"{a:.3g}" for a in np.asarray(axes[i]))
        self.header.setText(
            f"<b>{name}</b>: margin <b style='color:{colour}'>{shown} dB</b>, P(pass) "
            f"<b>{100 * ss.p_pass:.0f} %</b> ({ss.draws} draws); worst wheel {sc.wheel_ids[w]} at "
            f"{sc.worst_angle_deg[i, w]:.0f} deg; receiver axis ({ax}). Most sensitive to: {top or 'nothing varied'}.")
        self.tornado.set_sensitivity(ss)
        self.measure.setText("<b>Measure first on a vehicle:</b> " + "; ".join(
            f"({k + 1}) {t}" for k, t in enumerate(self.case.measure_first)))
        self._show_budget()

    def budget(self):
        if self.case is None:
            return None
        return self.case.budgets["median" if self.median.isChecked() else "worst"]

    def _show_budget(self) -> None:
        b = self.budget()
        if b is None:
            return
        rows = [(t.label, t.value_db, t.note) for t in b.terms]
        self.table.setRowCount(len(rows) + 2)
        run = 0.0
        for r, (label, val, note) in enumerate(rows):
            run += val
            self._set_row(r, label, f"{val:+.2f}", f"{run:.2f}", note)
        self._set_row(len(rows), f"received level (wheel {b.wheel} at {b.angle_deg:.1f} deg)", "", f"{b.level_dbm:.2f}",
                      "the sum of the terms: the engine's level of this link", bold=True)
        self._set_row(len(rows) + 1, f"margin (- sensitivity {b.sensitivity_dbm:.1f} dBm - required "
                      f"{b.required_margin_db:.1f} dB)", f"{b.margin_db:+.2f}", "", "", bold=True)

    def _set_row(self, r: int, label: str, val: str, run: str, note: str, bold: bool = False) -> None:
        for c, text in enumerate((label, val, run)):
            item = QTableWidgetItem(text)
            if c:
                item.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
            if note:
                item.setToolTip(note)
            if bold:
                f = item.font()
                f.setBold(True)
                item.setFont(f)
            self.table.setItem(r, c, item)


def install_defence_panel(window) -> DefencePanel:
    """Add the panel to the main window as a dock tabbed with the settings (the settings stay in front)."""
    panel = DefencePanel(window.doc)
    dock = QDockWidget("Link budget and sensitivity")
    dock.setObjectName("defence")
    dock.setWidget(panel)
    dock.setFeatures(QDockWidget.DockWidgetFeature.DockWidgetMovable | QDockWidget.DockWidgetFeature.DockWidgetFloatable)
    window.addDockWidget(Qt.DockWidgetArea.RightDockWidgetArea, dock)
    settings = getattr(window, "dock", None)
    if settings is not None:
        window.tabifyDockWidget(settings, dock)
        settings.raise_()
    panel.set_active(not dock.visibleRegion().isEmpty())
    dock.visibilityChanged.connect(panel.set_active)
    window.defence_panel, window.defence_dock = panel, dock
    return panel

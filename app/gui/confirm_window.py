"""Tools > Confirm with full-wave: the best spots of the open document through the full-wave model.

The options dialog asks for the number of spots (the fast ranking's best N in free space, the rule of
``core.fullwave.confirm.select_spots``), the frequencies (as ``wheelreach confirm --frequencies``) and
the local Dask worker processes. The run is ``core.fullwave.confirm.confirm`` in a worker
(``app.gui.tasks.Task``): its progress (tasks done / total) shows in a bar in the window's status bar,
whose Cancel button is a request (Dask's tasks are cancelled at the next poll; nobody waits). The
result opens in a results window: per spot the fast and the full-wave level and margin side by side,
their agreement, and the setup that produced them; the full-wave margins are kept as
``Document.fullwave`` for the ranked spot table's full-wave column (shown while the vehicle is the one
confirmed). Results are cached by ``core`` (a repeat is immediate).
"""

from __future__ import annotations

import os

import numpy as np
from PySide6.QtCore import QObject, Qt, Signal
from PySide6.QtGui import QColor, QGuiApplication
from PySide6.QtWidgets import (
    QDialog,
    QDialogButtonBox,
    QFormLayout,
    QHBoxLayout,
    QLabel,
    QMainWindow,
    QMessageBox,
    QProgressBar,
    QPushButton,
    QSpinBox,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from app.gui.tasks import Task

TITLE = "Confirm with full-wave"
#: what the user is told before starting (the order of magnitude measured on the sample sedan, issue 16)
DURATION_NOTE = ("Full-wave runs take minutes per body and frequency (the sample sedan at lambda/8: about "
                 "9 minutes per frequency on a 2-core machine); finished runs are cached, so a repeat is immediate.")
#: the CLI's default number of frequencies (``wheelreach confirm --frequencies``)
DEFAULT_FREQUENCIES = 5
DEFAULT_SPOTS = 3


class ConfirmOptionsDialog(QDialog):
    """Spots N, frequencies K and local workers for one confirmation run."""

    def __init__(self, parent: QWidget | None, n_spots: int, body: str):
        super().__init__(parent)
        self.setWindowTitle(TITLE)
        form = QFormLayout()
        self.spots = QSpinBox()
        self.spots.setRange(1, max(1, n_spots))
        self.spots.setValue(min(DEFAULT_SPOTS, max(1, n_spots)))
        self.spots.setToolTip("The N best spots of the fast ranking in free space (the full-wave model has no road)")
        self.frequencies = QSpinBox()
        self.frequencies.setRange(1, 21)
        self.frequencies.setValue(DEFAULT_FREQUENCIES)
        self.frequencies.setToolTip("Frequencies within +-2 % of the band centre, power-averaged (1: centre only); "
                                    "one full-wave run each")
        self.workers = QSpinBox()
        self.workers.setRange(1, max(1, os.cpu_count() or 1))
        self.workers.setValue(1)
        self.workers.setToolTip("Local Dask worker processes, one full-wave run each at a time")
        form.addRow("Best spots to confirm:", self.spots)
        form.addRow("Frequencies:", self.frequencies)
        form.addRow("Local workers:", self.workers)
        intro = QLabel(f"Confirm the best spots of <b>{body}</b> with the full-wave (NEC-2) model of the body "
                       f"(wire grid, free space, no road), one run per frequency.")
        intro.setWordWrap(True)
        note = QLabel(DURATION_NOTE)
        note.setWordWrap(True)
        note.setStyleSheet("color: #7a4a00")
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok | QDialogButtonBox.StandardButton.Cancel)
        buttons.button(QDialogButtonBox.StandardButton.Ok).setText("Start")
        buttons.accepted.connect(self.accept)
        buttons.rejected.connect(self.reject)
        lay = QVBoxLayout(self)
        lay.addWidget(intro)
        lay.addLayout(form)
        lay.addWidget(note)
        lay.addWidget(buttons)
        self.setMinimumWidth(460)

    def options(self) -> dict:
        return {"spots": self.spots.value(), "n_frequencies": self.frequencies.value(), "workers": self.workers.value()}


class ConfirmJob(QObject):
    """One confirmation run of a vehicle: ``start()``; ``finished(result)`` or ``stopped(reason)``.

    ``result`` is {"confirmation": core.fullwave.confirm.Confirmation, "margins": its margins(vehicle)}."""

    finished = Signal(object)
    stopped = Signal(str)

    def __init__(self, window, vehicle, label: str, spots: int, n_frequencies: int, workers: int):
        super().__init__(window)
        self.window = window
        self.vehicle = vehicle
        self.running = True

        def run(progress, cancel):
            from core.fullwave.confirm import confirm

            conf = confirm([(vehicle, label)], spots=spots, n_frequencies=n_frequencies, workers=workers,
                           progress=progress, cancel=cancel)[0]
            return {"confirmation": conf, "margins": conf.margins(vehicle)}

        self.task = Task(run, f"full-wave confirmation of {vehicle.name}")
        self.task.progress.connect(self._progress)
        self.task.done.connect(self._done)
        self.task.cancelled.connect(self._cancelled)
        self.task.failed.connect(self._failed)
        self.bar, self.cancel_button = _status_widgets(window)
        self.cancel_button.clicked.connect(self.cancel)

    def start(self) -> None:
        self.bar.setRange(0, 0)  # busy until the first count arrives
        self.bar.show()
        self.cancel_button.show()
        self.task.start()

    def cancel(self) -> None:
        """Ask the run to stop (returns at once; the worker ends on its own)."""
        if not self.running:
            return
        self.task.cancel()
        self._finish()
        self.window.statusBar().showMessage("Full-wave confirmation cancelled (finished runs stay cached).", 8000)
        self.stopped.emit("cancelled")

    def _finish(self) -> None:
        self.running = False
        self.cancel_button.clicked.disconnect(self.cancel)
        for sig, slot in ((self.task.progress, self._progress), (self.task.done, self._done),
                          (self.task.cancelled, self._cancelled), (self.task.failed, self._failed)):
            sig.disconnect(slot)
        self.bar.hide()
        self.cancel_button.hide()

    def _progress(self, _task, done: int, total: int) -> None:
        self.bar.setRange(0, max(1, total))
        self.bar.setValue(min(done, total))

    def _cancelled(self, _task) -> None:
        self._finish()
        self.stopped.emit("cancelled")

    def _failed(self, _task, msg: str) -> None:
        self._finish()
        QMessageBox.critical(self.window, TITLE, "The full-wave confirmation stopped with an error; nothing was "
                             f"shown or changed.\n\n{msg}")
        self.stopped.emit(msg)

    def _done(self, _task, result) -> None:
        self._finish()
        conf, m = result["confirmation"], result["margins"]
        self.window.doc.fullwave = {"vehicle": self.vehicle, "setup": conf.setup.label(),
                                    "margins": {s: float(m["fullwave"][i]) for i, s in enumerate(conf.spots)},
                                    "fast": {s: float(m["fast"][i]) for i, s in enumerate(conf.spots)}}
        self.window.ranking.table.refresh()  # the full-wave margin beside the fast one
        self.results_window = ConfirmResultsWindow(result["confirmation"], result["margins"], self.window)
        self.results_window.show()
        self.window.statusBar().showMessage(f"Full-wave confirmation of {self.vehicle.name} done.", 8000)
        self.finished.emit(result)


def _status_widgets(window) -> tuple[QProgressBar, QPushButton]:
    """The window's full-wave progress bar and its Cancel button (made on first use, hidden when idle)."""
    if getattr(window, "fullwave_bar", None) is None:
        bar = QProgressBar()
        bar.setMinimumWidth(170)
        bar.setMaximumWidth(220)
        bar.setFormat("full-wave %v/%m runs")
        bar.setToolTip("Full-wave confirmation runs (one per frequency) done / total")
        button = QPushButton("Cancel full-wave")
        button.setToolTip("Stop the full-wave confirmation (finished runs stay cached)")
        window.statusBar().addPermanentWidget(bar)
        window.statusBar().addPermanentWidget(button)
        bar.hide()
        button.hide()
        window.fullwave_bar, window.fullwave_cancel = bar, button
    return window.fullwave_bar, window.fullwave_cancel


COLUMNS = ("Spot", "Fast median\n(dBm)", "Full-wave median\n(dBm)", "Full-wave - fast\n(dB)",
           "After mean offset\n(dB)", "Fast margin\n(dB)", "Full-wave margin\n(dB)", "Margins agree",
           "Full-wave\nworst wheel")


class ConfirmResultsWindow(QMainWindow):
    """The confirmation of one body: the setup, per spot the fast and the full-wave numbers, the agreement."""

    def __init__(self, conf, margins: dict, parent: QWidget | None = None):
        super().__init__(parent)
        self.conf, self.margins = conf, margins
        self.setWindowTitle(f"Full-wave confirmation - {conf.body}")
        sec = conf.section()
        a = sec["agreement"]
        freqs = ", ".join(f"{f:.2f}" for f in sec["frequencies_mhz"])
        avg = " (power average)" if len(sec["frequencies_mhz"]) > 1 else " (one frequency)"
        rho = f"{a['rho']:.2f}" if np.isfinite(a["rho"]) else "n/a (needs 3 spots that differ)"
        header = QLabel(
            f"<b>{conf.body}</b> ({conf.file})<br>"
            f"Full-wave: {sec['method']}.<br>"
            f"Mesh and setup: {sec['setup']}; {sec['segments']} segments.<br>"
            f"Frequencies: {freqs} MHz{avg}. Solver time {sec['solver_s']:.0f} s"
            f"{f', {conf.cached} of {len(conf.freq_hz)} runs from the cache' if conf.cached else ''}.<br>"
            f"Fast engine: free space (no road), wheel model: {margins['wheel_model']}.<br>"
            f"Levels: {sec['statistic']} over the turn of the worst wheel. Margins (engine's rule): worst case over "
            f"the turn - sensitivity {margins['sensitivity_dbm']:.0f} dBm - required margin "
            f"{margins['required_margin_db']:.0f} dB.")
        header.setTextFormat(Qt.TextFormat.RichText)
        header.setWordWrap(True)
        header.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.table = QTableWidget(len(conf.spots), len(COLUMNS))
        self.table.setHorizontalHeaderLabels(COLUMNS)
        self.table.verticalHeader().hide()
        self.table.setEditTriggers(QTableWidget.EditTrigger.NoEditTriggers)
        off = a["offset_db"]
        for i, sp in enumerate(sec["spots"]):
            d = sp["fullwave_dbm"] - sp["fast_dbm"]
            mf, mw = float(margins["fast"][i]), float(margins["fullwave"][i])
            agree = (mf >= 0) == (mw >= 0)
            cells = (sp["name"], f"{sp['fast_dbm']:.1f}", f"{sp['fullwave_dbm']:.1f}", f"{d:+.1f}",
                     f"{d - off:+.1f}", f"{mf:+.1f}", f"{mw:+.1f}",
                     ("yes, both pass" if mf >= 0 else "yes, both fail") if agree else "NO", sp["worst_wheel"])
            for j, text in enumerate(cells):
                item = QTableWidgetItem(text)
                if j:
                    item.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
                if j == len(cells) - 2 and not agree:
                    item.setForeground(QColor("#a3141e"))
                self.table.setItem(i, j, item)
        self.table.resizeColumnsToContents()
        self.table.resizeRowsToContents()
        self.table.horizontalHeader().setStretchLastSection(True)
        rows_h = sum(self.table.rowHeight(i) for i in range(self.table.rowCount()))
        fit = min(420, self.table.horizontalHeader().sizeHint().height() + rows_h + 2 * self.table.frameWidth() + 4)
        self.table.setMinimumHeight(fit)
        self.table.setMaximumHeight(fit)  # the rows, no empty space (a scroll bar beyond 420 px)
        self.agreement = QLabel(
            f"Agreement over {a['n']} spots: Spearman rho {rho}, mean offset {a['offset_db']:+.1f} dB (full-wave - "
            f"fast), RMS {a['rms_db']:.1f} dB and largest {a['max_db']:.1f} dB after the offset.")
        self.agreement.setWordWrap(True)
        notes = "".join(f"<br>{n}" for n in sec["notes"])
        foot = QLabel(f"{DURATION_NOTE}{notes}<br><b>{sec['caution']}</b>")
        foot.setTextFormat(Qt.TextFormat.RichText)
        foot.setWordWrap(True)
        copy = QPushButton("Copy as text")
        copy.setToolTip("Copy the confirmation section (plain text) to the clipboard")
        copy.clicked.connect(lambda: QGuiApplication.clipboard().setText(conf.text()))
        close = QPushButton("Close")
        close.clicked.connect(self.close)
        row = QHBoxLayout()
        row.addStretch(1)
        row.addWidget(copy)
        row.addWidget(close)
        central = QWidget()
        lay = QVBoxLayout(central)
        lay.addWidget(header)
        lay.addWidget(self.table)
        lay.addWidget(self.agreement)
        lay.addWidget(foot)
        lay.addStretch(1)
        lay.addLayout(row)
        self.setCentralWidget(central)
        self.resize(1000, central.minimumSizeHint().height() + 30)


def start_confirmation(window, options: dict) -> ConfirmJob:
    """Start a confirmation of the window's document with the dialog's ``options``."""
    doc = window.doc
    label = str(doc.path) if doc.path and doc.undo_stack.isClean() else f"{doc.display_name()} (as edited)"
    job = ConfirmJob(window, doc.vehicle, label, **options)
    window.fullwave_job = job
    job.start()
    return job


def confirm_fullwave(window) -> ConfirmJob | None:
    """Tools > Confirm with full-wave: check the extra and the spots, ask the options, start in a worker."""
    from core.fullwave.confirm import missing_extra

    hint = missing_extra()
    if hint:
        QMessageBox.critical(window, TITLE, f"The full-wave confirmation is not available: {hint}.")
        return None
    job = getattr(window, "fullwave_job", None)
    if job is not None and job.running:
        QMessageBox.information(window, TITLE, "A full-wave confirmation is already running; cancel it first "
                                "(the button beside its progress bar).")
        return None
    v = window.doc.vehicle
    if not v.spots:
        QMessageBox.critical(window, TITLE, f"{v.name} has no receiver spots: add a spot (Spots > Add spot) first.")
        return None
    dlg = ConfirmOptionsDialog(window, len(v.spots), v.name)
    window.confirm_dialog = dlg
    if dlg.exec() != QDialog.DialogCode.Accepted:
        return None
    return start_confirmation(window, dlg.options())

"""File > Import measurements: fit the model to a prototype's measured levels and show how well it explains them.

``open_measurements_window(parent, doc, path)`` reads the measurement file against the document's
vehicle (a bad file: one message naming file, line and column; nothing opened), fits the model in a
worker thread (core.calibration_fit.calibrate: fit and k-fold hold-out over spots) and shows:

- the fitted parameters with their priors and standard errors, the residual RMS before and after and
  the hold-out RMS;
- measured against predicted levels, uncalibrated and calibrated, with the 1:1 line (levels with
  wheel angles as dots, percentiles of levels without angles as triangles);
- for a chosen measured spot, each wheel's level over the turn, calibrated (solid) and uncalibrated
  (dashed), with the measured levels at their angles (or, for a drive log, its measured 10th, 50th
  and 90th percentiles as dotted lines).

"Save calibration..." writes the calibration file (``--calibration`` of the command line); "Apply
to the vehicle" puts the fitted values into the document as one undo step.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, QThread, Signal
from PySide6.QtWidgets import (
    QComboBox,
    QFileDialog,
    QHBoxLayout,
    QLabel,
    QMainWindow,
    QMessageBox,
    QPushButton,
    QSplitter,
    QTableWidget,
    QTableWidgetItem,
    QVBoxLayout,
    QWidget,
)

from app.caution import CAUTION
from app.gui.look import show_grid, wheel_colour
from core.measurements import MeasurementFileError, MeasurementSet, load_measurements

GREY = (150, 150, 150)


class _FitWorker(QThread):
    """core.calibration_fit.calibrate off the GUI thread; ``done(run or None, error text)``."""

    done = Signal(object, str)

    def __init__(self, vehicle, ms, source, parent=None):
        super().__init__(parent)
        self.args = (vehicle, ms, source)

    def run(self):
        from core.calibration_fit import calibrate

        vehicle, ms, source = self.args
        try:
            self.done.emit(calibrate(vehicle, ms, source, caution=CAUTION), "")
        except Exception as e:  # noqa: BLE001 - any failure is shown to the user in the GUI thread
            self.done.emit(None, f"{type(e).__name__}: {e}")


class MeasurementsWindow(QMainWindow):
    """Measured against predicted levels of one measurement set, and the calibration fitted to it."""

    fitReady = Signal()

    def __init__(self, doc, vehicle, ms: MeasurementSet, source: dict, parent=None):
        super().__init__(parent)
        self.doc = doc
        self.vehicle = vehicle
        self.measurements = ms
        self.source = source
        self.run = None
        self.error = ""
        name = Path(ms.path).name if ms.path else "measurements"
        self.setWindowTitle(f"Measurements: {name} on {self.vehicle.name}")
        self.resize(1300, 860)

        self.summary = QLabel()
        self.summary.setTextFormat(Qt.TextFormat.RichText)
        self.summary.setWordWrap(True)
        self.table = QTableWidget(0, 6)
        self.table.setHorizontalHeaderLabels(["Parameter", "Prior dB", "Fitted dB", "Std. error dB", "Change dB",
                                              "Status"])
        self.table.verticalHeader().setVisible(False)
        self.table.setEditTriggers(QTableWidget.EditTrigger.NoEditTriggers)
        self.table.horizontalHeader().setStretchLastSection(True)

        self.scatter = pg.PlotWidget(background="w")
        self.scatter.setLabel("bottom", "predicted level", units="dBm")
        self.scatter.setLabel("left", "measured level", units="dBm")
        self.scatter.setTitle("Measured against predicted (antenna terminal)")
        show_grid(self.scatter)
        self.scatter.setAspectLocked(True)
        self.scatter.addLegend(offset=(10, 10))
        self.turn = pg.PlotWidget(background="w")
        self.turn.setLabel("bottom", "wheel angle", units="deg")
        self.turn.setLabel("left", "level", units="dBm")
        show_grid(self.turn)
        self.turn.addLegend(offset=(10, 10))
        self.turn.setXRange(0, 360, padding=0.01)
        self.spot_box = QComboBox()
        self.spot_box.setToolTip("The measured spot whose levels over the turn are shown")
        self.spot_box.currentIndexChanged.connect(lambda _i: self._draw_turn())
        self.turn_note = QLabel()
        self.turn_note.setWordWrap(True)

        self.save_button = QPushButton("Save calibration...")
        self.save_button.setToolTip("Write the calibration file for --calibration of rank, heatmap, report, compare")
        self.save_button.clicked.connect(self.save_dialog)
        self.apply_button = QPushButton("Apply to the vehicle")
        self.apply_button.setToolTip("Put the fitted values into the vehicle being edited (one undo step)")
        self.apply_button.clicked.connect(self.apply_to_document)
        for b in (self.save_button, self.apply_button):
            b.setEnabled(False)

        right = QWidget()
        rl = QVBoxLayout(right)
        rl.setContentsMargins(0, 0, 0, 0)
        row = QHBoxLayout()
        row.addWidget(QLabel("Spot:"))
        row.addWidget(self.spot_box, 1)
        rl.addLayout(row)
        rl.addWidget(self.turn, 1)
        rl.addWidget(self.turn_note)
        plots = QSplitter(Qt.Orientation.Horizontal)
        plots.addWidget(self.scatter)
        plots.addWidget(right)
        plots.setSizes([620, 680])
        buttons = QHBoxLayout()
        buttons.addStretch(1)
        buttons.addWidget(self.apply_button)
        buttons.addWidget(self.save_button)
        caution = QLabel(CAUTION)
        caution.setWordWrap(True)
        caution.setStyleSheet("color: #6b3000")
        central = QWidget()
        lay = QVBoxLayout(central)
        lay.addWidget(self.summary)
        lay.addWidget(self.table)
        lay.addWidget(plots, 1)
        lay.addLayout(buttons)
        lay.addWidget(caution)
        self.setCentralWidget(central)
        s = ms.summary()
        self.summary.setText(f"<b>{len(ms):,} measurements</b> from {name} ({s['with_angle']:,} with wheel angles, "
                             f"{s['without_angle']:,} without; {len(s['spots'])} spots) &mdash; fitting...")
        self.table.setMinimumHeight(60 + 26 * 6)
        self.worker: _FitWorker | None = None

    # ----- the fit ---------------------------------------------------------------------
    def start(self) -> None:
        """Fit in a worker thread; ``fitReady`` is emitted when the results are shown."""
        self.worker = _FitWorker(self.vehicle, self.measurements, self.source, self)
        self.worker.done.connect(self._done)
        self.worker.start()

    def _done(self, run, error: str) -> None:
        self.run, self.error = run, error
        if run is None:
            self.summary.setText(f"<b>The fit failed:</b> {error}")
            QMessageBox.warning(self, "Import measurements", f"The model could not be fitted.\n\n{error}")
        else:
            self._show()
        self.fitReady.emit()

    def _show(self) -> None:
        cal, fit = self.run.calibration, self.run.fit
        f = cal.fit
        hold = self.run.holdout
        held = (f"hold-out RMS <b>{hold.rms_after_db:.2f} dB</b> (uncalibrated {hold.rms_before_db:.2f} dB, "
                f"{hold.folds}-fold over spots)" if hold is not None else "no hold-out (fewer than two spots)")
        name = Path(self.measurements.path).name if self.measurements.path else "measurements"
        self.summary.setText(
            f"<b>{cal.note()}</b> &mdash; {name} on {self.vehicle.name}<br/>residual RMS {f.rms_before_db:.2f} dB "
            f"uncalibrated, <b>{f.rms_after_db:.2f} dB</b> calibrated; noise scale {f.noise_db:.2f} dB; {held}. "
            f"Wheel model: {cal.model['wheel_model']}.")
        self.table.setRowCount(len(cal.parameters))
        for i, p in enumerate(cal.parameters):
            status = p.status(cal.labels())
            cells = [p.label, f"{p.prior_db:.2f} (width {p.prior_width_db:g})", f"{p.value_db:.2f}",
                     f"{p.standard_error_db:.2f}", f"{p.value_db - p.prior_db:+.2f}", status]
            for j, text in enumerate(cells):
                item = QTableWidgetItem(text)
                if 1 <= j <= 4:
                    item.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
                if not p.applied:
                    item.setForeground(pg.mkColor(GREY))
                self.table.setItem(i, j, item)
        self.table.resizeColumnsToContents()
        self._draw_scatter(fit)
        ms = self.measurements
        self.spot_box.blockSignals(True)
        self.spot_box.clear()
        for k in np.unique(ms.spot):
            self.spot_box.addItem(ms.spot_names[k], int(k))
        self.spot_box.blockSignals(False)
        self._draw_turn()
        for b in (self.save_button, self.apply_button):
            b.setEnabled(True)

    def _draw_scatter(self, fit) -> None:
        model = self.run.model
        p = self.scatter.getPlotItem()
        p.clear()
        meas = model.measured
        angle = model.item_row >= 0
        lo = float(min(meas.min(), fit.predicted_before.min(), fit.predicted_after.min())) - 3.0
        hi = float(max(meas.max(), fit.predicted_before.max(), fit.predicted_after.max())) + 3.0
        p.plot([lo, hi], [lo, hi], pen=pg.mkPen((0, 0, 0), width=1.5, style=Qt.PenStyle.DashLine), name="1:1")
        for pred, label, brush, pen in ((fit.predicted_before, f"uncalibrated (RMS {fit.rms_before_db:.1f} dB)",
                                         pg.mkBrush(*GREY, 90), pg.mkPen(*GREY)),
                                        (fit.predicted_after, f"calibrated (RMS {fit.rms_after_db:.1f} dB)",
                                         pg.mkBrush(20, 90, 200, 140), pg.mkPen(20, 90, 200))):
            p.plot(pred[angle], meas[angle], pen=None, symbol="o", symbolSize=5, symbolBrush=brush, symbolPen=pen,
                   name=label)
            if (~angle).any():
                p.plot(pred[~angle], meas[~angle], pen=None, symbol="t", symbolSize=9, symbolBrush=brush,
                       symbolPen=pen)
        p.setXRange(lo, hi, padding=0)
        p.setYRange(lo, hi, padding=0)

    def spot_index(self) -> int:
        return int(self.spot_box.currentData()) if self.spot_box.count() else -1

    def _draw_turn(self) -> None:
        if self.run is None or self.spot_box.count() == 0:
            return
        k = self.spot_index()
        model, fit = self.run.model, self.run.fit
        ms = self.measurements
        p = self.turn.getPlotItem()
        p.clear()
        theta, after = model.turn_curves(k, fit.x)
        _, before = model.turn_curves(k)
        deg = np.degrees(theta)
        level = ms.antenna_level_dbm
        notes = []
        for w, wid in enumerate(ms.wheel_ids):
            col = wheel_colour(w)
            p.plot(deg, before[w], pen=pg.mkPen(col, width=1, style=Qt.PenStyle.DashLine))
            p.plot(deg, after[w], pen=pg.mkPen(col, width=2), name=wid)
            rows = (ms.spot == k) & (ms.wheel == w)
            with_angle = rows & ms.has_angle
            if with_angle.any():
                p.plot(np.degrees(ms.angle_rad[with_angle]), level[with_angle], pen=None, symbol="o", symbolSize=6,
                       symbolBrush=pg.mkBrush(col), symbolPen=pg.mkPen("k", width=0.5))
            free = rows & ~ms.has_angle
            if free.any():
                for q in np.percentile(level[free], (10.0, 50.0, 90.0)):
                    p.addItem(pg.InfiniteLine(pos=q, angle=0, pen=pg.mkPen(col, width=1, style=Qt.PenStyle.DotLine)))
                notes.append(wid)
        f_mhz = self.vehicle.radio.frequency_hz / 1e6
        text = (f"Solid: calibrated model; dashed: uncalibrated; dots: measured levels at their wheel angles (antenna "
                f"terminal, {f_mhz:.2f} MHz).")
        if notes:
            text += (f" Levels without wheel angles ({', '.join(notes)}): their measured 10th, 50th and 90th "
                     "percentiles as dotted lines.")
        same = [f"{ms.wheel_ids[a]} and {ms.wheel_ids[b]}" for a in range(len(ms.wheel_ids))
                for b in range(a + 1, len(ms.wheel_ids)) if np.max(np.abs(after[a] - after[b])) < 0.05]
        if same:
            text += f" The curves of {'; '.join(same)} coincide (the spot sees them alike), so one hides the other."
        self.turn_note.setText(text)
        self.turn.setTitle(f"Level over the turn at '{ms.spot_names[k]}'")

    # ----- results out ---------------------------------------------------------------------
    def save_dialog(self) -> str | None:
        if self.run is None:
            return None
        start = str(Path(self.measurements.path).with_suffix(".calibration.json")) if self.measurements.path \
            else "calibration.json"
        path, _ = QFileDialog.getSaveFileName(self, "Save the calibration", start, "Calibration (*.json)")
        if not path:
            return None
        return self.save_to(path)

    def save_to(self, path: str) -> str | None:
        from core.calibration import save_calibration
        from core.files import check_outputs

        try:  # never over the measurement or vehicle file; a refused path (core.files) is an OSError
            check_outputs({"calibration": path}, [self.measurements.path, self.source.get("path")])
            save_calibration(self.run.calibration, path)
        except OSError as e:
            QMessageBox.warning(self, "Save the calibration", f"The calibration was not written.\n\n{e}")
            return None
        self.statusBar().showMessage(f"Wrote {path}", 8000)
        return path

    def apply_to_document(self) -> bool:
        """Put the fitted values into the document's vehicle: one undo step."""
        if self.run is None:
            return False
        from core.calibration import apply_calibration

        cal = self.run.calibration
        ok = self.doc.apply(lambda v: apply_calibration(v, cal), f"Apply calibration ({cal.measurement_count:,} "
                                                                 "measurements)")
        if ok:
            self.statusBar().showMessage("Applied to the vehicle: " + cal.values_text(), 8000)
        return ok


def open_measurements_window(parent, doc, path: str) -> MeasurementsWindow | None:
    """Read ``path`` against the document's vehicle and open the window (the fit starts at once);
    a bad file is named in a message box, with its line and column, and nothing opens."""
    from core.provenance import load_with_source

    clean_file = doc.path if doc.path and doc.undo_stack.isClean() else None
    try:
        vehicle, source = load_with_source(clean_file or doc.vehicle)
        ms = load_measurements(path, vehicle, doc.path)
    except (MeasurementFileError, ValueError) as e:
        QMessageBox.warning(parent, "Import measurements", f"The measurements were not imported.\n\n{e}")
        return None
    w = MeasurementsWindow(doc, vehicle, ms, source, parent)
    w.show()
    w.start()
    return w


__all__ = ["MeasurementsWindow", "open_measurements_window"]

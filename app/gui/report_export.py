"""File > Export report in the window: the engine runs in a worker, the window stays usable.

A non-modal progress dialog follows the computation (``app.report.data.build_report_data``, whose
heatmaps check the cancel flag between chunks); Cancel is a request and nothing waits for the
worker. The worker also lays out and writes the PDF (atomically, ``app.report.pdf.write_report_pdf``;
Qt paints PDFs, text documents and fonts outside the GUI thread), which takes about a second.
Closing the window cancels the export.
"""

from __future__ import annotations

from pathlib import Path

from PySide6.QtCore import QObject, Qt, Signal
from PySide6.QtWidgets import QFileDialog, QMessageBox, QProgressDialog

from app.gui.tasks import Task
from core.scoring import Cancelled
from core.vehicle import Vehicle

TITLE = "Export placement report"


class ReportExport(QObject):
    """One report export: ``start()``; ``written(path)`` when the PDF is on disk, ``stopped(reason)`` otherwise."""

    written = Signal(str)
    stopped = Signal(str)

    def __init__(self, parent, source, out_pdf: str, step_m: float = 0.05):
        super().__init__(parent)
        from app.report.data import build_report_data

        self.source, self.out_pdf = source, out_pdf
        self._open = True
        stem = Path(source).stem if not isinstance(source, Vehicle) else "the edited vehicle"
        def run(progress, cancel):
            from app.report.pdf import write_report_pdf

            data = build_report_data(source, step_m, progress=progress, cancel=cancel)
            if cancel():
                raise Cancelled()
            try:
                return write_report_pdf(data, out_pdf)
            except OSError as e:  # reported with the file the user chose, never a temporary name
                raise OSError(f"{out_pdf}: {e.strerror or e}") from None

        self.task = Task(run, f"report of {stem}")
        self.dialog = QProgressDialog(f"Computing the report of {stem}...", "Cancel", 0, 100, parent)
        self.dialog.setWindowTitle(TITLE)
        self.dialog.setWindowModality(Qt.WindowModality.NonModal)
        self.dialog.setMinimumDuration(0)
        self.dialog.setAutoClose(False)
        self.dialog.setAutoReset(False)
        self.dialog.canceled.connect(self.cancel)
        self.task.progress.connect(self._progress)
        self.task.done.connect(self._done)
        self.task.cancelled.connect(self._cancelled)
        self.task.failed.connect(self._failed)
        if parent is not None:
            parent.destroyed.connect(self.task.cancel)

    def start(self) -> None:
        self.dialog.show()
        self.task.start()

    def cancel(self) -> None:
        """Ask the computation to stop (returns at once)."""
        if not self._open:
            return
        self.task.cancel()
        self._finish()
        self.stopped.emit("cancelled")

    def _finish(self) -> None:
        self._open = False
        self.dialog.canceled.disconnect(self.cancel)
        self.dialog.close()
        for sig, slot in ((self.task.progress, self._progress), (self.task.done, self._done),
                          (self.task.cancelled, self._cancelled), (self.task.failed, self._failed)):
            sig.disconnect(slot)

    def _progress(self, _task, done: int, total: int) -> None:
        self.dialog.setMaximum(max(1, total))
        self.dialog.setValue(min(done, total))

    def _cancelled(self, _task) -> None:
        self._finish()
        self.stopped.emit("cancelled")

    def _failed(self, _task, msg: str) -> None:
        self._finish()
        QMessageBox.warning(self.parent(), TITLE, f"The report was not written.\n\n{msg}")
        self.stopped.emit(msg)

    def _done(self, _task, pages: int) -> None:
        self._finish()
        parent = self.parent()
        if parent is not None and hasattr(parent, "statusBar"):
            parent.statusBar().showMessage(f"Wrote {self.out_pdf} ({pages} pages)", 8000)
        self.written.emit(self.out_pdf)


def export_report(parent, source, step_m: float = 0.05) -> ReportExport | None:
    """Ask for the PDF name and start the export; returns it (None when the user cancelled the name)."""
    start = str(Path(source).with_suffix(".pdf")) if not isinstance(source, Vehicle) else "report.pdf"
    path, _ = QFileDialog.getSaveFileName(parent, TITLE, start, "PDF files (*.pdf)")
    if not path:
        return None
    if not path.lower().endswith(".pdf"):
        path += ".pdf"
    job = ReportExport(parent, source, path, step_m)
    job.start()
    return job

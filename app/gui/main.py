"""Start the desktop program (the window lives in app.gui.window)."""

from __future__ import annotations

import sys
from pathlib import Path

SCREENSHOT_SIZE = (1600, 1000)


def run_gui(file: str | None = None, screenshot: str | None = None) -> int:
    """Open the program on ``file`` (default: the sample sedan).

    With ``screenshot``, render the window offscreen after a full scoring and a heatmap, save the
    PNG there and return 0 without entering the event loop for the user."""
    import os

    if screenshot:
        os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    from PySide6.QtCore import QCoreApplication, QEventLoop, QTimer
    from PySide6.QtWidgets import QApplication

    from core.samples import DEFAULT_SAMPLE
    from app.gui.document import Document
    from app.gui.window import MainWindow
    from core.vehicle import load_vehicle

    QCoreApplication.setOrganizationName("Wheelreach")
    QCoreApplication.setApplicationName("Wheelreach")
    app = QApplication.instance() or QApplication(sys.argv[:1])
    path = Path(file) if file else DEFAULT_SAMPLE
    v = load_vehicle(path)  # a bad file: VehicleFileError, reported by the CLI
    doc = Document(v, path)
    win = MainWindow(doc, autosave=not screenshot)
    win.resize(*SCREENSHOT_SIZE)
    if screenshot:
        win.show()
        loop = QEventLoop()
        QTimer.singleShot(120_000, loop.quit)  # a safety limit; the heatmap takes a few seconds
        win.ranking.heatmap.start()
        job = win.ranking.heatmap.job
        if job is not None:
            job.finished.connect(loop.quit)
            if job.is_running():
                loop.exec()
        app.processEvents()
        win.fit_views()
        app.processEvents()
        ok = win.grab().save(str(screenshot))
        win.ranking.heatmap.cancel(wait=True)
        win.autosave_timer.stop()
        win.deleteLater()
        app.processEvents()
        return 0 if ok else 1
    win.show()
    QTimer.singleShot(0, win.offer_recovery)
    win.ranking.heatmap.start()
    return app.exec()

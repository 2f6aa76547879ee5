"""Start the desktop program (the window lives in app.gui.window)."""

from __future__ import annotations

import sys
from pathlib import Path

SCREENSHOT_SIZE = (1600, 1000)
#: the screenshot waits at most this long for the scoring, heatmap and figures to finish, s
SCREENSHOT_LIMIT_S = 600
#: at exit, time left to workers that were asked to stop (each stops within one chunk), s
EXIT_WAIT_S = 10.0


def window_busy(win) -> bool:
    """True while the window's document, heatmap or figures still wait for a worker."""
    from app.gui import tasks

    return (win.doc.scoring or win.ranking.heatmap.is_running() or win.ranking.figures.burst_pending()
            or tasks.redraws_pending())


def wait_until_idle(app, win, limit_s: float) -> bool:
    """Run the event loop until the window's work is done (True) or ``limit_s`` passed (False)."""
    from PySide6.QtCore import QEventLoop, QTimer

    loop = QEventLoop()
    poll = QTimer()
    poll.setInterval(50)
    poll.timeout.connect(lambda: None if window_busy(win) else loop.quit())
    QTimer.singleShot(int(limit_s * 1000), loop.quit)
    poll.start()
    if window_busy(win):
        loop.exec()
    poll.stop()
    app.processEvents()
    return not window_busy(win)


def run_gui(file: str | None = None, screenshot: str | None = None) -> int:
    """Open the program on ``file`` (default: the sample sedan).

    With ``screenshot``, render the window offscreen after the spots' scores, a heatmap and the
    figures are complete, save the PNG there and return 0 without entering the event loop for the user."""
    import os

    if screenshot:
        os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    from core.samples import DEFAULT_SAMPLE
    from PySide6.QtCore import QCoreApplication, QTimer
    from PySide6.QtWidgets import QApplication

    from app.gui import tasks
    from app.gui.document import Document
    from app.gui.window import MainWindow
    from core import kernels
    from core.vehicle import load_vehicle

    # compile (first start of this installed copy) or load the link kernel in the background; the numpy path
    # serves the window until it is ready, so the window never waits for the compiler
    kernels.start_warm_up()
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
        win.ranking.heatmap.start()
        complete = wait_until_idle(app, win, SCREENSHOT_LIMIT_S)
        win.fit_views()
        app.processEvents()
        ok = win.grab().save(str(screenshot))
        if not complete:
            print(f"warning: the window was still computing after {SCREENSHOT_LIMIT_S} s; the screenshot shows "
                  "the state at that time", file=sys.stderr)
        win.close()
        win.deleteLater()
        app.processEvents()
        tasks.shutdown(EXIT_WAIT_S)
        return 0 if ok else 1
    win.show()
    QTimer.singleShot(0, win.offer_recovery)
    win.ranking.heatmap.start()
    rc = app.exec()
    if not tasks.shutdown(EXIT_WAIT_S):
        # a worker that cannot be stopped is still computing (nothing is written from a worker):
        # leave without destroying its running thread, which would abort the process
        sys.stdout.flush()
        sys.stderr.flush()
        os._exit(rc)
    return rc

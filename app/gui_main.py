"""Start the desktop program (the full window lives in app.main_window)."""

from __future__ import annotations

import sys


def run_gui(file: str | None = None, screenshot: str | None = None) -> int:
    from PySide6.QtWidgets import QApplication, QLabel

    from app.cli import DEFAULT_SAMPLE
    from core.vehicle import load_vehicle

    app = QApplication.instance() or QApplication(sys.argv[:1])
    v = load_vehicle(file or DEFAULT_SAMPLE)
    w = QLabel(f"Wheelreach: {v.name}")
    w.resize(1400, 800)
    if screenshot:
        w.grab().save(screenshot)
        return 0
    w.show()
    return app.exec()

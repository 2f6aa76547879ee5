"""Screenshots of the main window on every sample vehicle, for looking at the layout.

Opens each ``sample_vehicles/*.json`` in the main window at the given size (default 1366 x 768, a
common laptop screen), runs the heatmap to completion, waits until the window is idle and saves
``widget.grab()`` as ``<out>/<sample>_<w>x<h>.png``. Nothing is written into the repository unless
``--out`` points there. With ``--tab properties`` the settings dock shows the Properties tab.

    QT_QPA_PLATFORM=offscreen python tools/screenshots.py --out /tmp/shots [--size 1366x768] [FILE ...]
"""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path

#: the longest wait for one sample's scoring, heatmap and figures, s
LIMIT_S = 600.0


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("files", nargs="*", help="vehicle files (default: every sample)")
    ap.add_argument("--out", required=True, help="folder for the PNG files (created)")
    ap.add_argument("--size", default="1366x768", help="window size WxH in pixels (default 1366x768)")
    ap.add_argument("--tab", default="", help="settings tab to show: radio, zones or properties")
    args = ap.parse_args(argv)
    try:
        width, height = (int(t) for t in args.size.lower().split("x"))
    except ValueError:
        print(f"--size: {args.size!r} is not WxH (e.g. 1366x768)", file=sys.stderr)
        return 2
    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    from core.samples import SAMPLES_DIR
    from PySide6.QtCore import QSettings
    from PySide6.QtWidgets import QApplication

    from app.gui import tasks
    from app.gui.document import Document
    from app.gui.main import wait_until_idle
    from app.gui.window import MainWindow
    from core.vehicle import load_vehicle

    out = Path(args.out)
    out.mkdir(parents=True, exist_ok=True)
    files = [Path(f) for f in args.files] or sorted(SAMPLES_DIR.glob("*.json"))
    app = QApplication.instance() or QApplication(sys.argv[:1])
    settings = QSettings(str(out / "screenshots-settings.ini"), QSettings.Format.IniFormat)
    tabs = {"radio": 0, "zones": 1, "properties": 2}
    rc = 0
    for path in files:
        win = MainWindow(Document(load_vehicle(path), path), settings=settings, autosave=False)
        win.resize(width, height)
        if args.tab in tabs:
            win.settings_tabs.setCurrentIndex(tabs[args.tab])
        win.show()
        app.processEvents()
        win.fit_views()
        win.ranking.heatmap.start()
        complete = wait_until_idle(app, win, LIMIT_S)
        win.fit_views()
        app.processEvents()
        suffix = f"_{args.tab}" if args.tab else ""
        png = out / f"{path.stem}_{width}x{height}{suffix}.png"
        if not win.grab().save(str(png)):
            rc = 1
        print(f"{png}{'' if complete else '  (still computing at the time limit)'}")
        win.doc.undo_stack.setClean()
        win.close()
        win.deleteLater()
        app.processEvents()
    tasks.shutdown(30.0)
    return rc


if __name__ == "__main__":
    sys.exit(main())

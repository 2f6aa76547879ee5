"""GUI tests run offscreen with settings and recovery files in a temporary folder."""

import os
import tempfile

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
_TMP = tempfile.mkdtemp(prefix="wheelreach-gui-tests-")
os.environ["XDG_CONFIG_HOME"] = os.path.join(_TMP, "config")
os.environ["XDG_DATA_HOME"] = os.path.join(_TMP, "data")

import pytest
from PySide6.QtCore import QSettings, QStandardPaths

QStandardPaths.setTestModeEnabled(True)


@pytest.fixture
def settings(tmp_path):
    return QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat)


@pytest.fixture
def window(qtbot, settings):
    """The main window on the sample sedan, heatmap auto-update off (tests start it when needed)."""
    from core.samples import DEFAULT_SAMPLE
    from app.gui.document import Document
    from app.gui.window import MainWindow
    from core.vehicle import load_vehicle

    doc = Document(load_vehicle(DEFAULT_SAMPLE), DEFAULT_SAMPLE)
    win = MainWindow(doc, settings=settings, autosave=False)
    win.ranking.heatmap.auto.setChecked(False)

    def before_close(w):
        w.ranking.heatmap.cancel(wait=True)
        w.doc.undo_stack.setClean()  # no unsaved-changes prompt when the test closes the window

    qtbot.addWidget(win, before_close_func=before_close)
    win.resize(1600, 1000)
    win.show()
    qtbot.waitExposed(win)
    win.fit_views()
    qtbot.wait(20)
    return win

"""GUI tests run offscreen with settings and recovery files in a temporary folder.

After every test the workers still running (heatmaps, scoring, figures) are asked to stop and
waited for, so no test leaves a thread behind for the next one.
"""

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
    """Settings of one test, in an INI file; recovery copies go to ``tmp_path / 'recovery'``."""
    s = QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat)
    s.setValue("recovery_folder", str(tmp_path / "recovery"))
    return s


@pytest.fixture(autouse=True)
def _no_worker_left(qapp):
    yield
    from app.gui import tasks

    assert tasks.shutdown(120.0), "a worker thread did not stop within 120 s of being cancelled"
    qapp.processEvents()
    tasks.restore_automatic_gc()


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
        w.doc.undo_stack.setClean()  # no unsaved-changes prompt when the test closes the window

    qtbot.addWidget(win, before_close_func=before_close)
    win.resize(1600, 1000)
    win.show()
    qtbot.waitExposed(win)
    win.fit_views()
    qtbot.wait(20)
    return win

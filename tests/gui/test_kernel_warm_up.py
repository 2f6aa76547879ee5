"""First start of an installed copy: while core.kernels compiles in the background the window works on the
numpy path and says so in the status bar; when the kernel is ready the note goes and the window says so."""

from __future__ import annotations

import threading

from core.samples import DEFAULT_SAMPLE

from app.gui.document import Document
from app.gui.window import MainWindow
from core import kernels
from core.vehicle import load_vehicle


def test_window_says_while_the_kernel_is_prepared_and_computes_meanwhile(qtbot, settings, monkeypatch):
    ready, warming = threading.Event(), threading.Event()
    warming.set()  # as start_warm_up leaves it while the child interpreter compiles
    monkeypatch.setattr(kernels, "_READY", ready)
    monkeypatch.setattr(kernels, "_WARMING", warming)
    doc = Document(load_vehicle(DEFAULT_SAMPLE), DEFAULT_SAMPLE)
    win = MainWindow(doc, settings=settings, autosave=False)
    win.ranking.heatmap.auto.setChecked(False)
    qtbot.addWidget(win, before_close_func=lambda w: w.doc.undo_stack.setClean())
    win.show()
    qtbot.waitExposed(win)
    assert kernels.kernel_name() == "numpy" or not kernels.enabled()
    if not kernels.enabled():
        return  # numba missing: nothing is ever prepared (the note is not shown either)
    note = win.kernel_note
    assert note.isVisible() and "compiled link kernel" in note.text()
    assert doc.scores is not None and len(doc.scores.names) > 0  # the spots were scored meanwhile (numpy path)
    warming.clear()
    ready.set()
    qtbot.waitUntil(lambda: not win.kernel_timer.isActive(), timeout=3000)
    assert "compiled kernel" in win.statusBar().currentMessage()
    assert kernels.kernel_name() == "numba"

"""The spot table marks the spots the model does not rank apart from the best (core.scoring.RANK_RESOLUTION_DB,
from the engine's agreement with the whole-vehicle full-wave reference, docs/VALIDATION.md)."""

from __future__ import annotations

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

from core.samples import SAMPLES_DIR

from core.placement import classify
from core.vehicle import load_vehicle


def test_spots_within_the_rank_resolution_are_marked_in_the_table(qtbot, settings):
    from app.gui.document import Document
    from app.gui.window import MainWindow

    path = SAMPLES_DIR / "suv.json"
    win = MainWindow(Document(load_vehicle(path), path), settings=settings, autosave=False)
    win.ranking.heatmap.auto.setChecked(False)
    qtbot.addWidget(win)
    doc = win.doc
    qtbot.waitUntil(lambda: not doc.scoring, timeout=60_000)
    sc = doc.scores
    tied = sc.tied_with_best(classify(doc.scene, sc.positions).candidate)
    assert 2 <= len(tied) < len(sc.names)  # the SUV sample: a group of cabin spots and at least one apart
    table = win.ranking.table
    for row in range(table.rowCount()):
        i = sc.names.index(table.item(row, 2).text())
        text = table.item(row, 0).text()
        if i in tied[1:]:
            assert text == f"\u2248 {row + 1}" and "not ranked apart" in table.item(row, 0).toolTip()
        else:
            assert text == str(row + 1) and table.item(row, 0).toolTip() == ""

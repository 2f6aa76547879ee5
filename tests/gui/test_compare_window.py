"""The comparison window (issue 6): five samples side by side, the platform-common spot highlighted."""

from __future__ import annotations

import json
import os
from pathlib import Path

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

from PySide6.QtCore import Qt

from app.gui.compare_window import COMMON_ROW, CompareWindow, open_compare_window

ROOT = Path(__file__).resolve().parents[2]


def test_samples_side_by_side_with_the_common_spot_highlighted(qtbot):
    w = CompareWindow()
    qtbot.addWidget(w)
    w.load_samples()
    c = w.comparison
    assert len(w.vehicles) == 5 and len(w.thumbs) == 5
    assert w.table.rowCount() == len(c.spot_names)
    row = w.common_row()
    assert w.table.item(row, 0).text() == c.spot_names[c.common_best]
    assert w.table.item(row, 0).background().color() == COMMON_ROW
    assert w.table.item(row, 0).font().bold()
    other = (row + 1) % w.table.rowCount()
    assert w.table.item(other, 0).background().color() != COMMON_ROW
    # every top view rings the common spot until a row is selected
    for b, t in enumerate(w.thumbs):
        assert t.vehicle is w.vehicles[b]
        assert t.labels[t.highlight] == str(row + 1)
    w.table.selectRow(other)
    for t in w.thumbs:
        assert t.highlight == -1 or t.labels[t.highlight] == str(other + 1)
    assert c.spot_names[c.common_best] in w.summary.text()


def test_a_bad_file_is_reported_and_the_others_stay(qtbot, tmp_path):
    d = json.loads((ROOT / "sample_vehicles" / "cargo_van.json").read_text())
    d["wheels"][0]["rim_width_m"] = -1
    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps(d))
    w = open_compare_window(None, [str(ROOT / "sample_vehicles" / "sedan.json"), str(bad)])
    qtbot.addWidget(w)
    assert len(w.vehicles) == 1
    assert w.errors and "wheels[0].rim_width_m" in w.errors[0]
    assert w.table.rowCount() == len(w.vehicles[0].spots)


def test_search_runs_in_a_worker_and_marks_every_body(qtbot):
    w = CompareWindow()
    qtbot.addWidget(w)
    w.add_paths([str(ROOT / "sample_vehicles" / n) for n in ("sedan.json", "hatchback.json")])
    with qtbot.waitSignal(w.searchReady, timeout=60_000):
        w.start_search()
    assert w.search is not None
    assert all(t.square is not None for t in w.thumbs)
    assert "Searched best position" in w.summary.text()
    assert w.table.item(0, 0).flags() & Qt.ItemFlag.ItemIsEditable == Qt.ItemFlag.NoItemFlags

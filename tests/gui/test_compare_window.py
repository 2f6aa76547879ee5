"""The comparison window (issue 6): five samples side by side, the platform-common spot highlighted."""

from __future__ import annotations

import json
import os
from pathlib import Path

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import pytest
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


def test_compare_from_the_window_uses_the_open_document_as_edited(window, qtbot, tmp_path):
    """Tools > Compare bodies compares the document in memory (issue 14: it read the saved file): a spot moved
    and not saved is compared where it now is, and the PDF names it an unsaved document with the hash of its
    canonical JSON (core.provenance.vehicle_source)."""
    import pypdf

    from app.gui import commands, edits
    from core.provenance import vehicle_source
    from core.vehicle import vehicle_to_json

    doc = window.doc
    name = doc.vehicle.spots[0].name
    commands.compare_bodies(doc, window)
    w = window.compare_window
    qtbot.addWidget(w)
    assert w.paths == [str(doc.path)]  # unchanged: the file itself, named and hashed as a file
    saved_margin = float(w.comparison.margin_db[w.comparison.spot_names.index(name), 0])
    w.close()

    doc.apply(lambda v: edits.move_spot(v, name, (-2.6, 0.0, 0.45)), "move")
    commands.compare_bodies(doc, window)
    w = window.compare_window
    qtbot.addWidget(w)
    assert w.paths == [""] and w.vehicles[0] is doc.vehicle
    c = w.comparison
    moved = float(c.margin_db[c.spot_names.index(name), 0])
    spot = next(sp for sp in w.vehicles[0].spots if sp.name == name)
    assert (spot.x_m, spot.y_m, spot.z_m) == (-2.6, 0.0, 0.45) and moved != saved_margin
    qtbot.waitUntil(lambda: not doc.scoring, timeout=60_000)  # the window's own scores of the edited document
    assert moved == pytest.approx(float(doc.scores.margin_db[doc.scores.names.index(name)]), abs=1e-6)
    out = tmp_path / "cmp.pdf"
    assert w.export_pdf(str(out)) >= 1
    text = " ".join(" ".join(p.extract_text() for p in pypdf.PdfReader(str(out)).pages).split())
    assert "unsaved document" in text
    # the hash may break over two lines of its table cell
    assert vehicle_source(None, vehicle_to_json(doc.vehicle).encode("utf-8"))["sha256"] in text.replace(" ", "")

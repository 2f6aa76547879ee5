"""File > Import measurements (app.gui.measurements_window): the fit in a worker, the measured-vs-predicted scatter
with the 1:1 line, the per-wheel level over the turn with the measured points, saving and applying."""

from __future__ import annotations

import json
import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import numpy as np
import pytest
from PySide6.QtWidgets import QMessageBox

from app.gui import commands
from app.gui.measurements_window import open_measurements_window
from core.samples import SAMPLES_DIR

DEMO = str(SAMPLES_DIR / "sedan_measurements.csv")


def _open(qtbot, window, path=DEMO):
    w = open_measurements_window(window, window.doc, path)
    assert w is not None
    qtbot.addWidget(w)
    if w.run is None:
        with qtbot.waitSignal(w.fitReady, timeout=60_000):
            pass
    return w


def test_the_command_is_in_the_file_menu(window):
    assert any(c.func is commands.import_measurements and c.menu == "&File" for c in commands.COMMANDS)
    assert window.actions["import_measurements"].text() == "&Import measurements..."


def test_fit_scatter_and_turn_curves(qtbot, window):
    w = _open(qtbot, window)
    run = w.run
    assert run is not None and w.error == ""
    assert "calibrated from 1,088 measurements, hold-out RMS" in w.summary.text()
    # the parameter table: one row per parameter, the uninformed ones say so
    labels = [w.table.item(i, 0).text() for i in range(w.table.rowCount())]
    assert labels[0] == "metal crossing loss" and len(labels) == len(run.calibration.parameters)
    tread = labels.index("tire tread loss")  # the installed wheel pattern holds the tread
    assert w.table.item(tread, 5).text().startswith("not informed")
    # the scatter: the 1:1 line over the whole range, then measured against predicted, before and after
    items = w.scatter.getPlotItem().listDataItems()
    x, y = items[0].getData()
    np.testing.assert_allclose(x, y)
    n = len(run.model.measured)
    n_angle = run.model.n_angle_items
    points = sum(len(it.getData()[0]) for it in items[1:])
    assert points == 2 * n  # every item twice: uncalibrated and calibrated
    assert x.min() <= run.model.measured.min() and x.max() >= run.model.measured.max()
    assert len(items[1].getData()[0]) == n_angle
    # the turn plot: two curves per wheel over 360 angles, and the spot's measured levels at their angles
    k = w.spot_index()
    ms = run.model.measurements
    curves = [it for it in w.turn.getPlotItem().listDataItems() if it.opts["symbol"] is None]
    dots = [it for it in w.turn.getPlotItem().listDataItems() if it.opts["symbol"] is not None]
    assert len(curves) == 2 * len(ms.wheel_ids) and all(len(c.getData()[0]) == 360 for c in curves)
    assert sum(len(d.getData()[0]) for d in dots) == int(((ms.spot == k) & ms.has_angle).sum())
    # a drive-log spot: percentiles as dotted lines and a note
    drive = next(i for i in range(w.spot_box.count())
                 if not ms.has_angle[ms.spot == w.spot_box.itemData(i)].any())
    w.spot_box.setCurrentIndex(drive)
    assert "Levels without wheel angles" in w.turn_note.text()


def test_save_and_apply(qtbot, window, tmp_path):
    w = _open(qtbot, window)
    out = tmp_path / "c.json"
    assert w.save_to(str(out)) == str(out)
    assert json.loads(out.read_text())["format"] == "wheelreach-calibration/1"
    metal = w.run.calibration.applied_values()["metal_loss_db"]
    depth = window.doc.undo_stack.count()
    assert w.apply_to_document()
    assert window.doc.undo_stack.count() == depth + 1
    assert window.doc.vehicle.materials["metal"].loss_db == pytest.approx(metal, abs=0.005)
    window.doc.undo_stack.undo()
    assert "metal" not in window.doc.vehicle.materials


def test_a_bad_file_is_one_message_and_nothing_opens(qtbot, window, tmp_path, monkeypatch):
    bad = tmp_path / "bad.csv"
    bad.write_text("vehicle,spot,wheel,wheel_angle_deg,level_dbm\nDemo mid-size sedan,under dash centre,XX,0,-70\n")
    shown = []
    monkeypatch.setattr(QMessageBox, "warning", lambda *a, **k: shown.append(a[2]))
    assert open_measurements_window(window, window.doc, str(bad)) is None
    assert len(shown) == 1 and f"{bad}:2:39: unknown wheel 'XX'" in shown[0]

"""Small display rules: no red "-0.00", and the material override box's up arrow starts at the model's value."""

import pytest

from app.gui.look import signed
from core.materials import material_loss_db


def test_signed_never_shows_a_negative_zero():
    assert signed(-0.001, 2) == "+0.00"
    assert signed(-0.004, 1) == "+0.0"
    assert signed(-0.006, 2) == "-0.01"
    assert signed(0.0, 1) == "+0.0" and signed(3.14159, 1) == "+3.1"


def test_a_margin_that_rounds_to_zero_is_not_red(window):
    r = window.readout
    r.margin_db = None
    sc = window.doc.scores
    i = sc.names.index(window.doc.selected)
    sc.margin_db[i] = -0.001  # a margin a hair below zero: shown as +0.00 dB, in the passing colour
    r.refresh()
    assert "+0.00 dB" in r.text() and "-0.00" not in r.text() and "#a3141e'>+0.00" not in r.text()


def test_the_up_arrow_of_a_material_on_model_starts_at_the_model_value(window):
    doc, panel = window.doc, window.radio_panel
    table = panel.materials
    row = next(r for r in range(table.rowCount()) if table.item(r, 0).text() == "glass")
    spin = table.cellWidget(row, 2)
    assert "glass" not in doc.vehicle.materials and spin.text() == "model"
    spin.stepUp()
    want = round(float(material_loss_db("glass", doc.vehicle.radio.frequency_hz)), 1)
    assert doc.vehicle.materials["glass"].loss_db == pytest.approx(want)
    doc.undo_stack.undo()
    assert "glass" not in doc.vehicle.materials

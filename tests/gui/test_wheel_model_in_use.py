"""The settings' Wheel model control shows the model the engine uses, and why it falls back (issue 14).

The installed-pattern tables cover 315 and 433.92 MHz (core/data, core.wheel_patterns); at 868.3 MHz
there is none, so the engine (core.scoring.Scene.from_vehicle) falls back to the knife edge.
"""

from __future__ import annotations

import pytest

from app.gui.settings_panel import installed_pattern_available


@pytest.mark.skipif(not installed_pattern_available(), reason="no installed-pattern tables in this install")
def test_868_mhz_shows_the_fallback_to_the_knife_edge_in_the_control(window, qtbot):
    panel = window.radio_panel
    assert window.doc.vehicle.radio.wheel_model == "installed_pattern"  # the sample asks for the tables
    assert panel.wheel_model_status.text().startswith("In use: installed pattern: NEC-2 table")
    assert "433.92 MHz" in panel.wheel_model_status.text()
    panel.freq.setValue(868.3)
    qtbot.waitUntil(lambda: abs(window.doc.vehicle.radio.frequency_hz - 868.3e6) < 1.0, timeout=10000)
    text = panel.wheel_model_status.text()
    assert text.startswith("In use: knife edge (fallback). Reason: ")
    assert "no wheel-pattern table near 868.30 MHz" in text  # the engine's own reason, not a copy of its rule
    assert text.endswith(window.doc.scene.wheel_model_fallback)
    assert panel.wheel_model.currentData() == "installed_pattern"  # the choice is kept, the fallback shown
    window.doc.undo_stack.undo()
    assert panel.wheel_model_status.text().startswith("In use: installed pattern")

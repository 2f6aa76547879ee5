"""The desktop program's link-budget dock (issue 13): the selected spot's budget by term adds up to the margin the
ranking shows, its tornado and P(pass) are those of core.defence, and the dock renders offscreen."""

from __future__ import annotations

import pytest

from core.defence import defend
from core.scoring import vehicle_spot_arrays


def test_dock_shows_the_selected_spots_budget_tornado_and_p_pass(window, qtbot, tmp_path):
    panel = window.defence_panel
    window.defence_dock.raise_()
    qtbot.waitUntil(lambda: panel.active, timeout=3000)
    window.doc.select("centre console")
    qtbot.waitUntil(lambda: panel.case is not None and panel.case.name == "centre console", timeout=60_000)
    sc = window.doc.scores
    i = sc.names.index("centre console")
    ref = defend(window.doc.scene, sc, vehicle_spot_arrays(window.doc.vehicle)[2], [i]).cases[i]
    b = panel.budget()
    assert b.at == "worst" and b.margin_db == pytest.approx(sc.margin_db[i], abs=0.01)
    n = len(b.terms)
    assert panel.table.rowCount() == n + 2
    assert float(panel.table.item(n - 1, 2).text()) == pytest.approx(b.level_dbm, abs=0.006)  # running total
    assert float(panel.table.item(n + 1, 1).text()) == pytest.approx(sc.margin_db[i], abs=0.006)
    assert f"P(pass) <b>{100 * ref.p_pass:.0f} %</b>" in panel.header.text()
    assert panel.tornado.sensitivity.bars == ref.sensitivity.bars
    assert "Measure first" in panel.measure.text()
    panel.median.setChecked(True)
    assert panel.budget().at == "median"
    assert panel.table.item(panel.table.rowCount() - 2, 0).text().startswith("received level")
    png = tmp_path / "dock.png"
    assert window.defence_dock.grab().save(str(png)) and png.stat().st_size > 5000


def test_no_selection_clears_the_panel(window, qtbot):
    panel = window.defence_panel
    window.defence_dock.raise_()
    window.doc.select("")
    qtbot.waitUntil(lambda: panel.case is None, timeout=3000)
    assert panel.table.rowCount() == 0 and "Select a spot" in panel.header.text()

"""What the desktop program shows must not say more than the numbers hold: spots the model does not rank apart
from the best are marked (core.scoring.RANK_RESOLUTION_DB, from the engine's agreement with the whole-vehicle
full-wave reference, docs/VALIDATION.md); every heatmap on the one fixed colour scale; a temporary status
message never reads as part of the setup line."""

from __future__ import annotations

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import numpy as np
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


def test_the_heatmap_uses_the_one_fixed_colour_scale(window, qtbot):
    # app.margin_scale: every margin map on the same scale (not fitted to each map), so two bodies compare by
    # colour; the sedan's cabin margins (about +17 to +20 dB) once set a 20 dB scale of their own
    from app.margin_scale import MARGIN_RANGE_DB

    panel = window.ranking.heatmap
    panel.step.setCurrentIndex(panel.step.findData(0.2))
    done = []
    panel.heatmapReady.connect(done.append)
    panel.start()
    qtbot.waitUntil(lambda: bool(done), timeout=120_000)
    finite = done[-1].margin_db[~np.isnan(done[-1].margin_db)]
    assert finite.size and np.abs(finite).max() < MARGIN_RANGE_DB - 5.0  # a map a fitted scale would narrow
    assert tuple(panel.image.getLevels()) == (-MARGIN_RANGE_DB, MARGIN_RANGE_DB)
    assert tuple(panel.colorbar.levels()) == (-MARGIN_RANGE_DB, MARGIN_RANGE_DB)


def test_a_temporary_status_message_does_not_run_into_the_setup_line(window, qtbot):
    bar = window.statusBar()
    assert window.model_label.isVisibleTo(window)
    bar.showMessage("Edit refused: a message long enough to reach the permanent setup line of the status bar", 200)
    assert not window.model_label.isVisibleTo(window)
    qtbot.waitUntil(lambda: window.model_label.isVisibleTo(window), timeout=5000)  # back when the message ends


def test_a_long_status_line_is_shortened_part_by_part_never_inside_a_value(qapp):
    """The setup line in the status bar is shortened where the window is narrow: its longest part (the wheel
    model's description) is cut at its end, the frequency, EIRP and sensitivity stay whole; a cut in the
    middle of the line once joined "-105 dBm" and "433.92 MHz" into "-105 dB...2 MHz"."""
    from PySide6.QtGui import QFont, QFontMetrics

    from app.gui.look import elide_parts

    m = QFontMetrics(QFont())
    parts = ["433.92 MHz", "sensor EIRP -12.0 dBm", "sensitivity -105 dBm",
             "wheel model: installed pattern: NEC-2 table: 17.0 x 7.5 in rim, 433.92 MHz, radial sensor, with steel belt",
             "road reflection on"]
    line = "  |  ".join(parts)
    full = m.horizontalAdvance(line)
    assert elide_parts(line, m, full + 2) == line
    width = int(full * 0.75)
    short = elide_parts(line, m, width)
    assert m.horizontalAdvance(short) <= width
    kept = short.split("  |  ")
    assert kept[:3] == parts[:3] and kept[4] == parts[4]
    assert kept[3] != parts[3] and parts[3].startswith(kept[3].rstrip("…").rstrip("."))
    tiny = elide_parts(line, m, 80)  # too narrow for the parts: the line's start, cut at its end
    assert m.horizontalAdvance(tiny) <= 80 and tiny.startswith("433")


def test_the_wheel_legend_of_the_level_plot_covers_no_curve(window, qtbot):
    """The level plot keeps room above its highest curve for the wheel legend (0.4 of the span, at least 15 dB):
    no point of any wheel's curve lies under the legend box, for the spots of the sample at 1366 x 768."""
    from PySide6.QtCore import QPointF

    window.resize(1366, 768)
    figs, doc = window.ranking.figures, window.doc
    qtbot.waitUntil(lambda: figs._level_items is not None and not doc.pending.any(), timeout=60_000)
    for name in doc.scores.names[:4]:
        doc.select(name)
        qtbot.waitUntil(lambda: "(moving)" not in figs.levels.getPlotItem().titleLabel.text, timeout=10_000)
        qtbot.wait(50)
        box = figs.levels_legend.sceneBoundingRect()
        vb = figs.levels.getPlotItem().vb
        for curve in figs._level_items[3]:
            pts = [vb.mapViewToScene(QPointF(float(x), float(y))) for x, y in zip(curve.xData, curve.yData)]
            assert not any(box.contains(p) for p in pts), name

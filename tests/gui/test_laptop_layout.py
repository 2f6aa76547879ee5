"""At 1366 x 768 (a common laptop screen) the figures' titles fit their plots (nothing clipped)."""

import pytest


@pytest.mark.parametrize("sample", ["sedan", "pickup_dual_rear"])
def test_figure_titles_fit_at_1366x768(window, qtbot, sample):
    from core.samples import SAMPLES_DIR

    assert window.open_path(SAMPLES_DIR / f"{sample}.json", confirm=False)
    window.resize(1366, 768)
    figs = window.ranking.figures
    qtbot.waitUntil(lambda: figs.burst_result is not None and not figs.burst_pending(), timeout=60_000)
    qtbot.wait(50)
    for tab in range(figs.lower_tabs.count()):
        figs.lower_tabs.setCurrentIndex(tab)
        qtbot.wait(20)
        for plot in (figs.levels, figs.burst, figs.separation):
            if not plot.isVisible():
                continue
            title = plot.getPlotItem().titleLabel
            text_w = title.item.boundingRect().width()
            assert 0 < text_w <= plot.width(), (sample, title.text[:60], text_w, plot.width())

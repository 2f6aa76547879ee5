"""`wheelreach bench --quick` (issue 4): runs in-process and ends with the summary line of positive
figures. No timing assertion (speed belongs in the benchmark itself, not in tests)."""

from __future__ import annotations

import re

from app.cli.main import main

SUMMARY = re.compile(
    r"^heatmap_s=(\S+) spot_ms=(\S+) speedup=(\S+) links_per_s=(\S+) peak_mib=(\S+)$"
)


def test_bench_quick_prints_the_summary_line_with_positive_figures(capsys):
    assert main(["bench", "--quick", "--quiet"]) == 0
    lines = capsys.readouterr().out.strip().splitlines()
    m = SUMMARY.match(lines[-1])
    assert m, lines[-1]
    values = [float(x) for x in m.groups()]
    assert all(x > 0 for x in values), values
    # one line per figure before the summary
    for key in ("heatmap:", "heatmap links per second:", "single spot", "scalar reference:",
                "peak memory of the heatmap call:", "peak memory of a", "cost growth:", "defence analysis of 10 spots"):
        assert any(line.startswith(key) for line in lines), key


def test_step_for_spots_gives_at_least_the_asked_number_of_spots():
    """The grid helper of the benchmark: the largest spacing whose grid holds >= n spots; on the
    sedan's 4.3 m x 1.4 m rectangular region 2,400 spots need 5 cm (86 x 28 = 2,408 cells, by hand)."""
    from app.cli.bench import _count, step_for_spots
    from core.vehicle import load_vehicle
    from core.samples import DEFAULT_SAMPLE

    region = next(r for r in load_vehicle(DEFAULT_SAMPLE).regions if r.view == "top")
    step = step_for_spots(region, 2400)
    assert _count(region, step) == 86 * 28
    assert _count(region, step * 1.001) < 2400

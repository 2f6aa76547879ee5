"""`wheelreach bench --quick` (issue 4): runs in-process and ends with the summary line of positive
figures. No timing assertion (speed belongs in the benchmark itself, not in tests)."""

from __future__ import annotations

import re

import pytest

from app.cli.main import main

SUMMARY = re.compile(
    r"^heatmap_s=(\S+) spot_ms=(\S+) speedup=(\S+) links_per_s=(\S+) peak_mib=(\S+)$"
)


def test_bench_quick_prints_the_summary_line_with_positive_figures(capsys):
    # one wheel model (the knife edge: the one the scalar reference covers); the other runs the same code
    assert main(["bench", "--quick", "--quiet", "--wheel-model", "knife_edge"]) == 0
    lines = capsys.readouterr().out.strip().splitlines()
    m = SUMMARY.match(lines[-1])
    assert m, lines[-1]
    values = [float(x) for x in m.groups()]
    assert all(x > 0 for x in values), values
    # one line per figure before the summary
    for key in ("heatmap:", "heatmap links per second:", "single spot", "scalar reference:",
                "peak memory of the heatmap call:", "peak memory of a", "cost growth:", "defence analysis of 10 spots",
                "progressive heatmap: first coarse stage", "heatmap cells on a thread pool:",
                "bare numpy crossing test of the heatmap's"):
        assert any(line.startswith(key) for line in lines), key
    # the compiled kernel's figures (issue 17 item 4), or the line saying the numpy path ran
    from core import kernels

    keys = (("compiled kernel (numba", "single spot: numpy path", "body loss of the heatmap's", "kernel heatmap: 1 core",
             "kernel heatmap on all cores =", "scalar reference (") if kernels.enabled()
            else ("compiled kernel: not in use",))
    for key in keys:
        assert any(line.startswith(key) for line in lines), key
    # the desktop section (issue 14 item 4, issue 17 item 3): the real window offscreen, figures and limits
    text = "\n".join(lines)
    spot = float(re.search(r"^desktop engine single spot: (\S+) ms", text, re.MULTILINE).group(1))
    for what, limit in (("drag step", 3), ("drop", 5)):
        m = re.search(rf"^desktop {what}: (\S+) ms \(median of \d+\) = (\S+) x the single spot \(limit {limit} x\)$",
                      text, re.MULTILINE)
        assert m, what
        ms, ratio = float(m.group(1)), float(m.group(2))
        assert ms > 0 and ratio == pytest.approx(ms / spot, abs=0.006)  # the ratio is of the figures printed
    m = re.search(r"^desktop progressive heatmap .*first coarse map shown after (\S+) s, full map after (\S+) s: "
                  r"first = (\S+) % of the full", text, re.MULTILINE)
    assert m and 0 < float(m.group(1)) <= float(m.group(2))


def test_bench_can_skip_the_desktop_section(capsys, monkeypatch):
    from app.cli import bench

    def fail(*_a, **_k):
        raise AssertionError("the desktop section ran")

    monkeypatch.setattr(bench, "desktop_figures", fail)
    # the engine's figures are checked by the quick run above: here only whether the desktop section runs
    fig = {"heatmap_s": 1.0, "spot_ms": 1.0, "speedup": None, "links_per_s": 1.0, "peak_mib": 1.0}
    monkeypatch.setattr(bench, "bench_model", lambda *_a, **_k: fig)
    assert main(["bench", "--quick", "--quiet", "--no-desktop", "--wheel-model", "knife_edge"]) == 0
    out = capsys.readouterr().out
    assert "desktop" not in out and out.strip().splitlines()[-1].startswith("heatmap_s=1.000")
    monkeypatch.setattr(bench, "desktop_figures", lambda *_a, **_k: print("desktop section ran"))
    assert main(["bench", "--quick", "--quiet", "--wheel-model", "knife_edge"]) == 0
    assert "desktop section ran" in capsys.readouterr().out  # and without the option it does run


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

"""Every option of every command is checked by argparse (issue 12 item 7): a bad value is one line on
stderr and exit status 2, never a traceback; a bad output folder is one located line and exit 1,
before any computing; every printed placement result ends with the safety note (README, Usage)."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from app.caution import SAFETY_NOTE
from app.cli.main import main
from core.bounds import MAX_ANGLES_PER_TURN, MIN_ANGLES_PER_TURN

ROOT = Path(__file__).resolve().parents[1]
SEDAN = str(ROOT / "sample_vehicles" / "sedan.json")
SUV = str(ROOT / "sample_vehicles" / "suv.json")

# (command line, option named in the message)
BAD_VALUES = [
    (["heatmap", SEDAN, "--step", "0"], "--step"),
    (["heatmap", SEDAN, "--step", "-0.1"], "--step"),
    (["heatmap", SEDAN, "--step", "nan"], "--step"),
    (["heatmap", SEDAN, "--step", "inf"], "--step"),
    (["heatmap", SEDAN, "--step", "5.5"], "--step"),
    (["heatmap", SEDAN, "--step", "fine"], "--step"),
    (["heatmap", SEDAN, "--height", "-1"], "--height"),
    (["heatmap", SEDAN, "--height", "7"], "--height"),
    (["heatmap", SEDAN, "--y", "6"], "--y"),
    (["heatmap", SEDAN, "--top", "0"], "--top"),
    (["heatmap", SEDAN, "--top", "2.5"], "--top"),
    (["heatmap", SEDAN, "--view", "front"], "--view"),
    (["heatmap", SEDAN, "--angles", "0"], "--angles"),
    (["heatmap", SEDAN, "--wheel-model", "spokes"], "--wheel-model"),
    (["heatmap", SEDAN, "--progress", "--quiet"], "--quiet"),
    (["rank", SEDAN, "--angles", "-5"], "--angles"),
    (["rank", SEDAN, "--angles", "0"], "--angles"),
    (["rank", SEDAN, "--angles", "1"], "--angles"),
    (["rank", SEDAN, "--angles", str(MAX_ANGLES_PER_TURN + 1)], "--angles"),
    (["rank", SEDAN, "--angles", "72.5"], "--angles"),
    (["rank", SEDAN, "--spot", "console"], "--spot"),
    (["rank", SEDAN, "--spot", "=1,2,3"], "--spot"),
    (["rank", SEDAN, "--spot", "a=1,2"], "--spot"),
    (["rank", SEDAN, "--spot", "a=1,2,nan"], "--spot"),
    (["rank", SEDAN, "--spot", "a=1,2,500"], "--spot"),
    (["report", SEDAN, "-o", "r.pdf", "--step", "0"], "--step"),
    (["report", SEDAN], "-o"),
    (["compare", SEDAN, SUV, "--search-step", "0"], "--search-step"),
    (["compare", SEDAN, SUV, "--search-step", "-1"], "--search-step"),
    (["compare", SEDAN, SUV, "--above-floor", "-0.5"], "--above-floor"),
    (["compare", SEDAN, SUV, "--above-floor", "nan"], "--above-floor"),
    (["compare", SEDAN, SUV, "--landmark", "roof"], "--landmark"),
    (["bench", "--repeats", "0"], "--repeats"),
    (["bench", "--repeats", "-3"], "--repeats"),
    (["bench", "--repeats", "1000"], "--repeats"),
    (["bench", "--wheel-model", "none"], "--wheel-model"),
    (["gui", "a.json", "b.json"], "b.json"),  # reported by the top-level parser, "wheelreach: error: ..."
    (["check"], "files"),
]


@pytest.mark.parametrize("argv, option", BAD_VALUES, ids=[" ".join(a[:1] + a[2:]) for a, _ in BAD_VALUES])
def test_bad_option_value_is_one_line_and_exit_2(argv, option, capsys):
    with pytest.raises(SystemExit) as e:
        main(argv)
    out, err = capsys.readouterr()
    assert e.value.code == 2
    assert out == ""
    lines = err.splitlines()
    assert len(lines) == 1, err
    prog = "wheelreach" if argv[0] == "gui" else f"wheelreach {argv[0]}"
    assert lines[0].startswith(f"{prog}: error: ") and option in lines[0], err
    assert "Traceback" not in err


def test_angle_limits_are_the_file_formats():
    from core.vehicle import Radio

    bounds = {m.__class__.__name__: m for m in Radio.model_fields["angles_per_turn"].metadata}
    assert bounds["Ge"].ge == MIN_ANGLES_PER_TURN and bounds["Le"].le == MAX_ANGLES_PER_TURN


def test_angles_at_the_limits_are_accepted(capsys):
    assert main(["rank", SEDAN, "--angles", str(MIN_ANGLES_PER_TURN)]) == 0
    assert f"{MIN_ANGLES_PER_TURN} angles per turn" in capsys.readouterr().out


def _run(*args: str, cwd=ROOT) -> subprocess.CompletedProcess:
    env = dict(os.environ, QT_QPA_PLATFORM="offscreen")
    return subprocess.run([sys.executable, "-m", "app.cli.main", *args], check=False, cwd=cwd, capture_output=True,
                          text=True, timeout=120, env=env)


def test_bad_values_in_a_subprocess():
    # the real entry point: exit status and streams, as a user sees them
    for args in (["heatmap", SEDAN, "--step", "0"], ["rank", SEDAN, "--angles", "-5"], ["bench", "--repeats", "0"]):
        r = _run(*args)
        assert r.returncode == 2, r.stderr
        assert r.stdout == "" and len(r.stderr.splitlines()) == 1, r.stderr
        assert "Traceback" not in r.stderr


@pytest.mark.parametrize("argv, option", [
    (["heatmap", SEDAN, "--csv", "{missing}/cells.csv"], "--csv"),
    (["report", SEDAN, "-o", "{missing}/r.pdf"], "-o"),
    (["report", SEDAN, "-o", "{tmp}/r.pdf", "--json", "{missing}/r.json"], "--json"),
    (["report", SEDAN, "-o", "{tmp}"], "-o"),
    (["compare", SEDAN, SUV, "--csv", "{missing}/c.csv"], "--csv"),
    (["gui", SEDAN, "--screenshot", "{missing}/w.png"], "--screenshot"),
])
def test_bad_output_folder_is_one_located_line_and_exit_1_before_computing(argv, option, tmp_path, capsys,
                                                                           monkeypatch):
    import core.scoring

    def no_work(*a, **k):  # the check comes before any computing
        raise AssertionError("computing started before the output path was checked")

    monkeypatch.setattr(core.scoring.Scene, "from_vehicle", no_work)
    missing = tmp_path / "no such folder"
    argv = [a.format(missing=missing, tmp=tmp_path) for a in argv]
    assert main(argv) == 1
    _, err = capsys.readouterr()
    lines = err.splitlines()
    assert len(lines) == 1, err
    path = argv[argv.index(option) + 1]
    assert lines[0].startswith(f"error: {path} ({option}): "), err  # core.files.check_outputs names path and option
    assert "does not exist" in lines[0] or "is a folder" in lines[0]
    assert not list(tmp_path.iterdir())  # nothing written


def test_rank_without_spots_names_the_file(tmp_path, capsys):
    d = json.loads(Path(SEDAN).read_text())
    d["spots"] = []
    f = tmp_path / "no_spots.json"
    f.write_text(json.dumps(d))
    assert main(["rank", str(f)]) == 1
    err = capsys.readouterr().err
    assert err.startswith(f"error: {f}: spots: ") and "no receiver spots" in err and len(err.splitlines()) == 1


def test_spot_name_already_used_names_the_file_and_the_option(capsys):
    assert main(["rank", SEDAN, "--spot", "platform dash=-0.8,0,0.7"]) == 1
    err = capsys.readouterr().err
    assert err.startswith(f"error: {SEDAN}: spots[10].name: --spot 'platform dash': ") and "used twice" in err
    assert len(err.splitlines()) == 1


def test_heatmap_beyond_the_cell_limit_is_refused_before_computing(capsys, monkeypatch):
    import core.scoring

    calls = []
    monkeypatch.setattr(core.scoring, "spot_levels", lambda *a, **k: calls.append(1))
    assert main(["heatmap", SEDAN, "--step", "0.001"]) == 1
    err = capsys.readouterr().err
    assert not calls
    assert len(err.splitlines()) == 1
    assert "100,000 cells per heatmap" in err and "a step of 0.019 m or more fits" in err, err


def test_heatmap_beyond_the_link_limit_names_the_step_that_fits(capsys):
    assert main(["heatmap", SEDAN, "--step", "0.012"]) == 1
    err = capsys.readouterr().err
    assert "the limit is 5,000,000 links" in err and "a step of 0.019 m or more fits" in err, err
    # and that step passes the same check the command makes (not run here: about 5 M links)
    from core.bounds import check_heatmap_work
    from core.vehicle import load_vehicle

    v = load_vehicle(SEDAN)
    check_heatmap_work([v.regions[0]], 0.019, len(v.wheels), v.radio.angles_per_turn)


def test_report_step_beyond_the_limits_is_refused_before_writing(tmp_path, capsys):
    out = tmp_path / "r.pdf"
    assert main(["report", SEDAN, "-o", str(out), "--step", "0.002"]) == 1
    err = capsys.readouterr().err
    assert err.startswith(f"error: {SEDAN}: the report's heatmaps at a step of 0.002 m") and "fits" in err
    assert not out.exists()


def test_compare_search_step_beyond_the_limits_is_refused(capsys):
    assert main(["compare", SEDAN, SUV, "--search-step", "0.001"]) == 1
    err = capsys.readouterr().err
    assert "shared-region search" in err and "or more fits" in err and len(err.splitlines()) == 1


def test_printed_results_end_with_the_safety_note(tmp_path, capsys):
    assert main(["rank", SEDAN]) == 0
    assert capsys.readouterr().out.splitlines()[-1] == SAFETY_NOTE
    assert main(["rank", SEDAN, "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["caution"] == SAFETY_NOTE
    assert main(["heatmap", SEDAN, "--step", "0.3", "--csv", str(tmp_path / "c.csv")]) == 0
    assert capsys.readouterr().out.splitlines()[-1] == SAFETY_NOTE
    assert main(["compare", SEDAN, SUV, "--no-search", "--csv", str(tmp_path / "c2.csv")]) == 0
    out = capsys.readouterr().out
    assert out.splitlines()[-1] == SAFETY_NOTE and out.count(SAFETY_NOTE) == 1


@pytest.mark.filterwarnings("ignore::RuntimeWarning")  # the engine's own division at the sensor (not tested here)
def test_non_finite_level_never_reaches_the_table(capsys):
    # a spot exactly on a sensor's path: whatever the engine gives there, the output is a clear error
    # or a finite table, never inf/nan in the table
    from core.scoring import Scene
    from core.vehicle import load_vehicle

    scene = Scene.from_vehicle(load_vehicle(SEDAN))
    x, y, z = (float(c) for c in scene.sensor_pos[0, 0])
    rc = main(["rank", SEDAN, "--spot", f"on sensor={x!r},{y!r},{z!r}", "--json"])
    out, err = capsys.readouterr()
    if rc == 0:
        assert "Infinity" not in out and "NaN" not in out
    else:
        assert rc == 1 and "on sensor" in err and "not a finite number" in err and len(err.splitlines()) == 1

"""`wheelreach check` and `wheelreach schema` (issue 2 item 9): one line per file, exit 0/1,
a located message and never a traceback for a bad file."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from app.cli.main import main
from core.vehicle import json_schema

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = sorted((ROOT / "sample_vehicles").glob("*.json"))


def _broken(tmp_path: Path) -> Path:
    d = json.loads((ROOT / "sample_vehicles" / "sedan.json").read_text())
    d["wheels"][2]["tire"] = "225/50X17"
    f = tmp_path / "broken.json"
    f.write_text(json.dumps(d, indent=2))
    return f


def test_check_all_samples_exits_0_with_one_line_each(capsys):
    assert len(SAMPLES) >= 5
    rc = main(["check", *map(str, SAMPLES)])
    out, err = capsys.readouterr()
    assert rc == 0
    lines = out.splitlines()
    assert len(lines) == len(SAMPLES)
    for line, path in zip(lines, SAMPLES):
        assert line.startswith("ok ") and str(path) in line
    assert err == ""


def test_check_broken_file_prints_located_message_and_exits_1(tmp_path, capsys):
    bad = _broken(tmp_path)
    rc = main(["check", str(SAMPLES[0]), str(bad)])
    out, err = capsys.readouterr()
    assert rc == 1
    lines = out.splitlines()
    assert len(lines) == 2
    assert lines[0].startswith("ok ")
    assert lines[1].startswith("FAIL ")
    assert f"{bad}: wheels[2].tire: '225/50X17' is not a tire size" in lines[1]
    assert "Traceback" not in out + err


def test_check_missing_and_garbage_files(tmp_path, capsys):
    garbage = tmp_path / "garbage.json"
    garbage.write_bytes(b"\x00\xff{not json")
    missing = tmp_path / "missing.json"
    rc = main(["check", str(garbage), str(missing)])
    out, err = capsys.readouterr()
    assert rc == 1
    lines = out.splitlines()
    assert len(lines) == 2 and all(line.startswith("FAIL ") for line in lines)
    assert str(garbage) in lines[0] and str(missing) in lines[1]
    assert "Traceback" not in out + err


def _run_cli(*args: str) -> subprocess.CompletedProcess:
    env = dict(os.environ, QT_QPA_PLATFORM="offscreen")
    return subprocess.run(
        [sys.executable, "-m", "app.cli.main", *args], cwd=ROOT, capture_output=True, text=True, timeout=120, env=env
    )


def test_check_in_a_subprocess(tmp_path):
    # the real entry point, as a user runs it: exit status and streams
    ok = _run_cli("check", *map(str, SAMPLES))
    assert ok.returncode == 0, ok.stdout + ok.stderr
    assert len(ok.stdout.splitlines()) == len(SAMPLES)
    bad = _run_cli("check", str(_broken(tmp_path)))
    assert bad.returncode == 1
    assert "wheels[2].tire: '225/50X17' is not a tire size" in bad.stdout
    assert "Traceback" not in bad.stdout + bad.stderr


def test_nan_file_in_a_subprocess(tmp_path):
    text = (ROOT / "sample_vehicles" / "suv.json").read_text()
    assert '"frequency_hz": 433920000.0' in text
    f = tmp_path / "nan.json"
    f.write_text(text.replace('"frequency_hz": 433920000.0', '"frequency_hz": NaN'))
    r = _run_cli("check", str(f))
    assert r.returncode == 1
    assert f"{f}: radio.frequency_hz:" in r.stdout and "finite" in r.stdout
    assert "Traceback" not in r.stdout + r.stderr


def test_schema_command_prints_the_generated_schema(capsys):
    assert main(["schema"]) == 0
    out, _ = capsys.readouterr()
    assert json.loads(out) == json_schema()


def test_check_needs_a_file(capsys):
    with pytest.raises(SystemExit) as e:  # argparse usage error
        main(["check"])
    assert e.value.code == 2
    assert "Traceback" not in capsys.readouterr().err

"""Outputs that respect what is there, and inputs that are not regular files (issue 18 items 3 and 4).

Intent: no command may destroy its own input or another of its outputs, turn a symbolic link into a
plain file, change a file's permission bits, replace a read-only file, or leave temporary files behind
(also when killed with SIGTERM); every output path is checked before the computing starts (one located
line, exit 1). Inputs that are folders, named pipes or devices are refused before anything is read.
The rules are core.files; these tests drive them through the commands a user runs (docs/report-export.md).
"""

from __future__ import annotations

import os
import signal
import stat
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

from app.cli.main import main
from core.files import OutputPathError, atomic_write_text, check_outputs, read_regular_file
from core.vehicle import VehicleFileError, load_vehicle, save_vehicle

ROOT = Path(__file__).resolve().parents[1]
SAMPLE = ROOT / "sample_vehicles" / "hatchback.json"
FAST = ["--step", "0.5"]  # coarse heatmap: these tests are about files, not numbers
CLI = [sys.executable, "-m", "app.cli.main"]


@pytest.fixture
def car(tmp_path) -> Path:
    """A copy of a sample vehicle file in an empty folder."""
    f = tmp_path / "car.json"
    f.write_bytes(SAMPLE.read_bytes())
    return f


def _listing(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir())


def _one_error_line(err: str) -> str:
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert len(lines) == 1, err
    assert lines[0].startswith("error: ") and "Traceback" not in err
    return lines[0]


# ----- outputs that are inputs or other outputs ---------------------------------------------------
def test_report_onto_its_own_input_is_refused_and_the_input_unchanged(car, capsys):
    before = car.read_bytes()
    assert main(["report", str(car), "-o", str(car)]) == 1
    line = _one_error_line(capsys.readouterr().err)
    assert str(car) in line and "input" in line
    assert car.read_bytes() == before and _listing(car.parent) == ["car.json"]


@pytest.mark.parametrize("opt", ["--csv", "--json"])
def test_export_onto_the_input_or_onto_the_pdf_is_refused(car, capsys, opt):
    before = car.read_bytes()
    assert main(["report", str(car), "-o", str(car.parent / "r.pdf"), opt, str(car)]) == 1
    assert "input" in _one_error_line(capsys.readouterr().err)
    assert main(["report", str(car), "-o", str(car.parent / "r.pdf"), opt, str(car.parent / "r.pdf")]) == 1
    assert "same file as the -o output" in _one_error_line(capsys.readouterr().err)
    assert car.read_bytes() == before and _listing(car.parent) == ["car.json"]


def test_a_hard_link_or_a_symlink_to_the_input_counts_as_the_input(car, capsys):
    hard, soft = car.parent / "hard.pdf", car.parent / "soft.pdf"
    os.link(car, hard)
    soft.symlink_to(car)
    before = car.read_bytes()
    for out in (hard, soft):
        assert main(["report", str(car), "-o", str(out)]) == 1
        assert "input" in _one_error_line(capsys.readouterr().err)
    assert car.read_bytes() == before


def test_compare_and_heatmap_refuse_an_input_as_output(car, tmp_path, capsys):
    other = tmp_path / "other.json"
    other.write_bytes(car.read_bytes())
    before = other.read_bytes()
    assert main(["compare", str(car), str(other), "--no-search", "--csv", str(other)]) == 1
    assert "input" in _one_error_line(capsys.readouterr().err)
    assert main(["heatmap", str(car), "--quiet", "--csv", str(car)]) == 1
    assert "input" in _one_error_line(capsys.readouterr().err)
    assert other.read_bytes() == before


# ----- checks before computing --------------------------------------------------------------------
def test_report_into_a_missing_folder_is_one_line_and_exit_1():
    # the reproduction, as a user runs it: no traceback, one located line, exit status 1
    r = subprocess.run([*CLI, "report", str(SAMPLE), "-o", "/nonexistent/dir/r.pdf"], capture_output=True,
                       text=True, cwd=ROOT, timeout=120)
    assert r.returncode == 1
    line = _one_error_line(r.stderr)
    assert "/nonexistent/dir/r.pdf" in line and "folder /nonexistent/dir does not exist" in line


def test_an_unusable_json_path_fails_before_the_pdf_is_written(tmp_path, capsys, monkeypatch):
    from app.report import data

    def must_not_run(*a, **k):
        raise AssertionError("the engine ran before the output paths were checked")

    monkeypatch.setattr(data, "score_vehicle", must_not_run)
    pdf = tmp_path / "r.pdf"
    ro = tmp_path / "ro.json"
    ro.write_text("{}")
    ro.chmod(0o444)
    for bad, words in ((tmp_path / "missing" / "r.json", "does not exist"), (ro, "read-only"),
                       (tmp_path, "is a folder")):
        assert main(["report", str(SAMPLE), "-o", str(pdf), "--json", str(bad), *FAST]) == 1
        line = _one_error_line(capsys.readouterr().err)
        assert words in line and "(--json)" in line
        assert not pdf.exists()
    assert ro.read_text() == "{}" and stat.S_IMODE(ro.stat().st_mode) == 0o444
    assert _listing(tmp_path) == ["ro.json"]  # no PDF, no temporary file


def test_a_read_only_file_is_refused_not_replaced(tmp_path):
    f = tmp_path / "kept.csv"
    f.write_text("old\n")
    f.chmod(0o444)
    with pytest.raises(OutputPathError, match="read-only"):
        atomic_write_text(f, "new\n")
    assert f.read_text() == "old\n" and _listing(tmp_path) == ["kept.csv"]


def test_a_hard_linked_output_is_refused_rather_than_split(tmp_path):
    f, twin = tmp_path / "a.csv", tmp_path / "b.csv"
    f.write_text("old\n")
    os.link(f, twin)
    with pytest.raises(OutputPathError, match="2 hard links"):
        check_outputs({"--csv": f})
    with pytest.raises(OutputPathError, match="hard links"):
        atomic_write_text(f, "new\n")
    assert twin.read_text() == "old\n" and os.path.samefile(f, twin)


# ----- what is there is kept ------------------------------------------------------------------------
def test_a_symlinked_output_keeps_the_link_and_writes_its_target(car, tmp_path, capsys):
    real = tmp_path / "data" / "cells.csv"
    real.parent.mkdir()
    real.write_text("old\n")
    link = tmp_path / "cells.csv"
    link.symlink_to(real)
    assert main(["heatmap", str(car), "--quiet", "--angles", "8", "--csv", str(link), *FAST]) == 0
    capsys.readouterr()
    assert link.is_symlink() and os.readlink(link) == str(real)
    assert "x_m,y_m,z_m,margin_db" in real.read_text()
    # the same through save_vehicle (File > Save of the desktop program)
    vlink = tmp_path / "car_link.json"
    vlink.symlink_to(car)
    v = load_vehicle(car).model_copy(update={"name": "Saved through a link"})
    save_vehicle(v, vlink)
    assert vlink.is_symlink() and load_vehicle(car).name == "Saved through a link"


@pytest.mark.parametrize("mode", [0o644, 0o640, 0o600])
def test_an_existing_file_keeps_its_permission_bits(tmp_path, mode):
    f = tmp_path / "out.csv"
    f.write_text("old\n")
    f.chmod(mode)
    atomic_write_text(f, "new\n")
    assert f.read_text() == "new\n" and stat.S_IMODE(f.stat().st_mode) == mode
    assert _listing(tmp_path) == ["out.csv"]


def test_a_report_pdf_replacing_a_0644_file_stays_0644(car, capsys):
    pdf = car.parent / "r.pdf"
    pdf.write_bytes(b"old report")
    pdf.chmod(0o644)
    assert main(["report", str(car), "-o", str(pdf), *FAST]) == 0
    capsys.readouterr()
    assert pdf.read_bytes()[:5] == b"%PDF-" and stat.S_IMODE(pdf.stat().st_mode) == 0o644


@pytest.mark.parametrize("umask, mode", [(0o022, 0o644), (0o027, 0o640), (0o077, 0o600), (0o002, 0o664)])
def test_new_files_follow_the_umask(tmp_path, umask, mode):
    # in a subprocess, so the test process's umask is never changed; new files get 0666 minus the umask
    # (POSIX open(2) with mode 0666), whatever the umask is
    script = textwrap.dedent(f"""
        import os, sys
        os.umask({umask:#o})
        from core.files import atomic_write_text
        atomic_write_text(sys.argv[1], "x\\n")
    """)
    out = tmp_path / "new.csv"
    subprocess.run([sys.executable, "-c", script, str(out)], check=True, cwd=ROOT, timeout=60)
    assert stat.S_IMODE(out.stat().st_mode) == mode


def test_a_report_from_the_command_line_follows_the_umask(car):
    out = car.parent / "r"
    r = subprocess.run(["sh", "-c", 'umask 027 && exec "$@"', "sh", *CLI, "report", str(car), "-o", f"{out}.pdf",
                        "--csv", f"{out}.csv", "--json", f"{out}.json", *FAST], capture_output=True, text=True,
                       cwd=ROOT, timeout=300)
    assert r.returncode == 0, r.stderr
    for ext in (".pdf", ".csv", ".json"):  # mkstemp wrote 0600 whatever the umask before
        assert stat.S_IMODE(Path(f"{out}{ext}").stat().st_mode) == 0o640, ext


# ----- temporary files on every exit path --------------------------------------------------------
# the writer takes SIGINT as a program run from a terminal does: a shell without job control starts background
# commands with SIGINT ignored, and the child would inherit that when the suite itself runs in the background
_WRITER = textwrap.dedent("""
    import signal, sys, time
    from core.files import atomic_path, install_signal_cleanup
    signal.signal(signal.SIGINT, signal.default_int_handler)
    install_signal_cleanup()
    with atomic_path(sys.argv[1]) as tmp:
        with open(tmp, "w") as f:
            f.write("half of the new content")
        print("writing", tmp, flush=True)
        time.sleep(60)
    print("finished", flush=True)
""")


@pytest.mark.parametrize("sig, code", [(signal.SIGTERM, 128 + signal.SIGTERM), (signal.SIGINT, None)])
def test_temporary_file_is_removed_when_killed_mid_write(tmp_path, sig, code):
    # a write interrupted by SIGTERM (handler -> SystemExit) or SIGINT (KeyboardInterrupt) leaves the old file
    # and no ".NAME.xxxx.tmp" beside it (issue 18: interrupted writes left hidden temporary files)
    target = tmp_path / "out.csv"
    target.write_text("previous\n")
    with subprocess.Popen([sys.executable, "-c", _WRITER, str(target)], cwd=ROOT, stdout=subprocess.PIPE,
                          stderr=subprocess.PIPE, text=True) as p:
        try:
            line = p.stdout.readline()
            assert line.startswith("writing "), p.stderr.read()
            tmp = Path(line.split(" ", 1)[1].strip())
            assert tmp.exists() and tmp.parent == tmp_path and tmp.name.startswith(".out.csv.")
            p.send_signal(sig)
            rc = p.wait(timeout=30)
        finally:
            p.kill()
    assert rc != 0 and (code is None or rc == code)
    assert not tmp.exists() and _listing(tmp_path) == ["out.csv"]
    assert target.read_text() == "previous\n"


def test_cli_ends_with_143_on_sigterm_and_leaves_no_file(car):
    # the command line installs the handler: SIGTERM during a long heatmap ends cleanly (exit 128 + 15)
    out = car.parent / "cells.csv"
    with subprocess.Popen([*CLI, "heatmap", str(car), "--step", "0.02", "--progress", "--csv", str(out)], cwd=ROOT,
                          stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True) as p:
        try:
            t0 = time.monotonic()
            while time.monotonic() - t0 < 120:  # wait until the progress bar has started
                ch = p.stderr.read(1)
                if ch in ("[", ""):
                    break
            p.send_signal(signal.SIGTERM)
            rc = p.wait(timeout=60)
        finally:
            p.kill()
    assert rc == 128 + signal.SIGTERM, p.stderr.read() if p.stderr else ""
    assert _listing(car.parent) == ["car.json"]


# ----- inputs that are not regular files ---------------------------------------------------------
_KINDS = {"/dev/zero": "a character device", "fifo": "a named pipe", "folder": "a folder"}


def _special(tmp_path, kind) -> Path:
    src = {"/dev/zero": Path("/dev/zero"), "fifo": tmp_path / "pipe.json", "folder": tmp_path}[kind]
    if kind == "fifo":
        os.mkfifo(src)
    if not src.exists():
        pytest.skip(f"{src} not on this system")
    return src


def _run(*words) -> subprocess.CompletedProcess:
    # a subprocess with a timeout: a named pipe used to hang every command
    return subprocess.run([*CLI, *map(str, words)], capture_output=True, text=True, cwd=ROOT, timeout=60,
                          stdin=subprocess.DEVNULL)


@pytest.mark.parametrize("kind", list(_KINDS))
def test_special_files_are_refused_with_one_located_line(tmp_path, kind):
    # /dev/zero used to be read in full (MemoryError traceback), a named pipe hung every command:
    # both are refused before reading, with one line naming the file, exit status 1
    src = _special(tmp_path, kind)
    words = (["rank", src], ["report", src, "-o", tmp_path / "r.pdf"]) if kind == "fifo" else (["rank", src],)
    for w in words:
        r = _run(*w)
        assert r.returncode == 1 and r.stdout == "", r.stdout
        line = _one_error_line(r.stderr)
        assert str(src) in line and f"is {_KINDS[kind]}, not a regular file" in line
    assert not (tmp_path / "r.pdf").exists()


def test_check_names_each_special_file_on_its_own_line(tmp_path):
    srcs = [_special(tmp_path, k) for k in _KINDS]
    r = _run("check", *srcs, SAMPLE)
    assert r.returncode == 1 and "Traceback" not in r.stdout + r.stderr
    lines = r.stdout.splitlines()
    assert len(lines) == 4 and lines[3].startswith("ok ")
    for src, kind, line in zip(srcs, _KINDS, lines):
        assert line.startswith(f"FAIL {src}: is {_KINDS[kind]}, not a regular file"), line


def test_size_is_checked_on_the_handle_before_reading(tmp_path, monkeypatch):
    big = tmp_path / "big.json"
    with big.open("wb") as f:  # sparse: 30 MB long, nothing written
        f.truncate(30_000_000)
    reads = []
    real_read = os.read
    monkeypatch.setattr(os, "read", lambda fd, n: (reads.append(n), real_read(fd, n))[1])
    with pytest.raises(VehicleFileError, match="over the limit of 20,000,000") as e:
        load_vehicle(big)
    assert e.value.path == str(big) and reads == []  # refused from fstat, nothing read
    small = tmp_path / "small.txt"
    small.write_bytes(b"0123456789")
    assert read_regular_file(small, 10) == b"0123456789"
    with pytest.raises(OSError, match="over the limit"):
        read_regular_file(small, 9)

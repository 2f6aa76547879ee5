"""A regular (non-editable) install finds its samples and defaults (issue 12 item 9).

The source tree is copied, built into a wheel without network (``pip wheel --no-deps
--no-build-isolation``, with the build tools of the test extra), and the wheel is installed with
``pip install --no-deps --no-index`` into a fresh venv created with ``--system-site-packages`` (so
numpy, PySide6 and the other dependencies come from the interpreter running the tests). From a
temporary folder outside the checkout, the venv's own ``wheelreach`` then checks and ranks the default
sample (its NEC-2 wheel tables are package data) and takes an offscreen screenshot of the desktop
program on the default sample (on the numpy path: the compiled kernels are tested in the checkout); the packages it imports are
asserted to be the venv's installed copies, not the checkout.

Marked ``slow`` (about 20-30 s on 2 cores) but part of the default suite; ``-m "not slow"`` skips it.
"""

from __future__ import annotations

import importlib.util
import os
import shutil
import subprocess
import sys
import venv
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
IGNORE = shutil.ignore_patterns(".git", "*.egg-info", "build", "dist", "__pycache__", ".pytest_cache", "*.pyc",
                                ".ruff_cache", "venv*", ".venv*")

pytestmark = pytest.mark.slow


def _run(cmd, cwd, env, timeout=300) -> subprocess.CompletedProcess:
    r = subprocess.run([str(c) for c in cmd], cwd=cwd, env=env, capture_output=True, text=True, timeout=timeout,
                       check=False)
    assert r.returncode == 0, f"{cmd}\nstdout:\n{r.stdout[-3000:]}\nstderr:\n{r.stderr[-3000:]}"
    return r


@pytest.fixture(scope="module")
def installed(tmp_path_factory):
    """(venv folder, environment, working folder outside the checkout) of a fresh regular install."""
    for tool in ("setuptools", "wheel", "pip"):
        if importlib.util.find_spec(tool) is None:  # not imported here: setuptools patches distutils on import
            pytest.fail(f"{tool} is needed to build the wheel: install the test extra (pip install -e '.[test]')")
    base = tmp_path_factory.mktemp("regular_install")
    src = base / "src"
    shutil.copytree(ROOT, src, ignore=IGNORE)
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "PYTHONHOME", "VIRTUAL_ENV")}
    # the numpy path: the compiled kernels are tested in the checkout (tests/test_kernels.py), and compiling them
    # again for this copy would add about a minute to the suite
    env.update(QT_QPA_PLATFORM="offscreen", PIP_NO_INPUT="1", PIP_DISABLE_PIP_VERSION_CHECK="1",
               WHEELREACH_CACHE=str(base / "cache"), WHEELREACH_KERNEL="numpy")
    dist = base / "dist"
    _run([sys.executable, "-m", "pip", "wheel", "--no-deps", "--no-build-isolation", "--no-index", "-q", "-w", dist,
          src], cwd=base, env=env)
    wheels = list(dist.glob("wheelreach-*.whl"))
    assert len(wheels) == 1, wheels
    target = base / "venv"
    venv.EnvBuilder(system_site_packages=True, with_pip=False, clear=True).create(target)
    py = target / "bin" / "python"
    _run([py, "-m", "pip", "install", "--no-deps", "--no-index", "-q", wheels[0]], cwd=base, env=env)
    work = base / "elsewhere"
    work.mkdir()
    return target, env, work


def test_installed_package_is_the_one_imported(installed):
    target, env, work = installed
    r = _run([target / "bin" / "python", "-c",
              ("import app, core, core.samples as s; print(app.__file__); print(core.__file__); "
              "print(s.DEFAULT_SAMPLE); print(s.DEFAULT_SAMPLE.is_file())")], cwd=work, env=env)
    app_file, core_file, sample, exists = r.stdout.split("\n")[:4]
    site = str(target / "lib")
    for f in (app_file, core_file, sample):
        assert f.startswith(site) and "site-packages" in f, f  # the venv's copy, not the checkout
        assert not f.startswith(str(ROOT)), f
    assert exists == "True"


def test_installed_program_checks_and_ranks_the_default_sample(installed):
    target, env, work = installed
    exe = target / "bin" / "wheelreach"
    sample = _run([target / "bin" / "python", "-c", "import core.samples as s; print(s.DEFAULT_SAMPLE)"],
                  cwd=work, env=env).stdout.strip()
    r = _run([exe, "check", sample], cwd=work, env=env)
    assert r.stdout.startswith(f"ok   {sample}: ") and "site-packages" in sample
    # the engine's numbers are checked in the checkout: here the installed copy finds its package data
    # (the sample and the NEC-2 wheel tables of core/data) and ranks the sample's spots
    r = _run([exe, "rank", sample, "--quiet"], cwd=work, env=env)
    lines = r.stdout.splitlines()
    assert "wheel model: installed pattern: NEC-2 table" in lines[0], lines[0]
    assert any(line.split()[:1] == ["1"] for line in lines), r.stdout  # a ranked first spot
    assert "confirm by detailed simulation and vehicle measurement" in r.stdout


def test_installed_program_opens_the_default_sample_offscreen(installed):
    target, env, work = installed
    png = work / "window.png"
    _run([target / "bin" / "wheelreach", "gui", "--screenshot", png], cwd=work, env=env)
    data = png.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n" and len(data) > 10_000
    width, height = int.from_bytes(data[16:20], "big"), int.from_bytes(data[20:24], "big")  # the IHDR chunk
    assert width >= 800 and height >= 500

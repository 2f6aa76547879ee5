"""The full-wave models work from a regular (non-editable) install (issue 16).

A copy of the package sources is installed with ``pip install --no-deps --no-build-isolation`` into a
fresh virtual environment that sees the system site packages (numpy, scipy, PyNEC), and a wheel
table is computed there by ``core.wheel_patterns.compute_table`` on a small rim with no belt, run
from a folder outside the source tree so that only the installed package can be imported. The
table must be a proper installed pattern: it integrates to 4 pi (definition of directivity).
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
import venv
from pathlib import Path

import pytest

pytest.importorskip("PyNEC")

ROOT = Path(__file__).resolve().parents[2]

_PROBE = r"""
import json, math, sys
import numpy as np
import core, core.fullwave.nec_models
from core import wheel_patterns as wp
t = wp.compute_table(0.381, 0.1651, 433.92e6, "radial", cache_dir=sys.argv[1])
d = wp.directivity(t)
th = np.radians(t.theta_deg)
w = np.sin(th) * (th[1] - th[0]); w[0] *= 0.5; w[-1] *= 0.5
total = float(np.sum(d * w[:, None]) * 2 * math.pi / len(t.phi_deg))
print(json.dumps({"core": core.__file__, "models": core.fullwave.nec_models.__file__, "kind": t.kind,
                  "integral_over_4pi": total / (4 * math.pi), "provenance": t.provenance}))
"""


@pytest.mark.nec
def test_exact_wheel_table_computes_from_a_regular_install(tmp_path):
    src = tmp_path / "src"
    src.mkdir()
    for name in ("pyproject.toml", "README.md"):
        shutil.copy2(ROOT / name, src / name)
    ignore = shutil.ignore_patterns("__pycache__", "*.pyc", "*.egg-info")
    for name in ("core", "app", "sample_vehicles"):
        shutil.copytree(ROOT / name, src / name, ignore=ignore)
    env_dir = tmp_path / "venv"
    venv.EnvBuilder(system_site_packages=True, with_pip=False).create(env_dir)
    py = env_dir / "bin" / "python"
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "WHEELREACH_CACHE")}
    # --no-build-isolation builds with the environment's own setuptools; before setuptools 70.1 that
    # needs the separate ``wheel`` package, which a fresh environment may lack: add it (build tool only)
    new_enough = ("import setuptools, sys; v = tuple(int(x) for x in setuptools.__version__.split('.')[:2]); "
                  "sys.exit(0 if v >= (70, 1) else 1)")
    probe = subprocess.run([str(py), "-c", new_enough], capture_output=True, env=env, check=False)
    has_wheel = subprocess.run([str(py), "-c", "import wheel"], capture_output=True, env=env, check=False)
    if probe.returncode != 0 and has_wheel.returncode != 0:
        r = subprocess.run([sys.executable, "-m", "pip", "--python", str(py), "install", "-q", "wheel"],
                           capture_output=True, text=True, env=env, timeout=300,
                           check=False)
        if r.returncode != 0:
            pytest.skip("the fresh environment cannot build: no 'wheel' package and none installable")
    r = subprocess.run([sys.executable, "-m", "pip", "--python", str(py), "install", "-q", "--no-deps",
                        "--no-build-isolation", str(src)], capture_output=True, text=True, env=env, timeout=300,
                           check=False)
    assert r.returncode == 0, r.stdout + r.stderr
    shutil.rmtree(src)  # nothing left to import from but the installed copy
    work = tmp_path / "elsewhere"
    work.mkdir()
    r = subprocess.run([str(py), "-c", _PROBE, str(tmp_path / "cache")], cwd=work, capture_output=True, text=True,
                       env=env, timeout=300, check=False)
    assert r.returncode == 0, r.stderr
    out = json.loads(r.stdout.strip().splitlines()[-1])
    site = str(env_dir)
    assert out["core"].startswith(site) and out["models"].startswith(site), out
    assert out["kind"] == "computed"
    # directivity of the computed table integrates to 4 pi (definition; 5 deg grid, trapezoid rule)
    assert out["integral_over_4pi"] == pytest.approx(1.0, rel=2e-3)
    assert list((tmp_path / "cache").glob("wheel_*.npz")), "the computed table was not cached"

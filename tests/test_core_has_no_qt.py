"""`core` never imports Qt (RULES.md, DESIGN.md section 2): import every core module in a fresh
interpreter and check that no PySide6, shiboken6 or pyqtgraph module was loaded."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]

_PROBE = r"""
import importlib, json, pkgutil, sys
import core
names = ["core"] + [m.name for m in pkgutil.walk_packages(core.__path__, "core.")]
for name in names:
    importlib.import_module(name)
qt = sorted(m for m in sys.modules if m.split(".")[0] in ("PySide6", "shiboken6", "pyqtgraph", "PyQt5", "PyQt6"))
print(json.dumps({"modules": names, "qt": qt}))
"""


def test_importing_all_of_core_loads_no_qt():
    r = subprocess.run([sys.executable, "-c", _PROBE], cwd=ROOT, capture_output=True, text=True, timeout=120)
    assert r.returncode == 0, r.stderr
    result = json.loads(r.stdout.strip().splitlines()[-1])
    # the probe really walked the package (the vehicle model and tire code at least)
    assert {"core", "core.vehicle", "core.tires"} <= set(result["modules"])
    expected = {p.stem for p in (ROOT / "core").glob("*.py") if p.stem != "__init__"}
    assert expected <= {m.split(".")[-1] for m in result["modules"]}
    assert result["qt"] == [], f"core pulled in Qt: {result['qt']}"

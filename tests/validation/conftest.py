"""Full-wave (NEC-2) validation tests: marker registration and import path.

The tests here need PyNEC (the ``validation`` extra); each module skips cleanly with
``pytest.importorskip("PyNEC")`` when it is absent. They share the models of tools/nec_models.py
and the harnesses of tools/nec_checks.py, so the repository root is put on sys.path.
"""

import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))


def pytest_configure(config):
    config.addinivalue_line("markers", "nec: full-wave NEC-2 comparisons (need PyNEC from the validation extra)")

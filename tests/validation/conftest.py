"""Full-wave (NEC-2) validation tests: marker registration.

The tests here need PyNEC (the ``fullwave`` or ``validation`` extra); each module skips cleanly with
``pytest.importorskip("PyNEC")`` when it is absent. They share the models of
core/fullwave/nec_models.py and the harnesses of core/fullwave/nec_checks.py (imported from the
installed package).
"""


def pytest_configure(config):
    config.addinivalue_line("markers", "nec: full-wave NEC-2 comparisons (need PyNEC from the fullwave extra)")

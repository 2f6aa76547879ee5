"""Work-around for a reference-count bug of PySide6 6.12.0 seen with Python 3.11.

Emitting a Qt signal whose ``object`` argument is (or contains) a Python bool drops one reference
to ``True``/``False`` per emission. pyqtgraph emits such signals on every view-range change
(``ViewBox.sigRangeChanged`` carries a list of two bools), so after a few hundred pans, zooms or
auto-ranges the interpreter aborts with "bool_dealloc: deallocating True or False".

From Python 3.12 on, True, False and None are immortal and the bug is harmless. On older
interpreters, ``protect_singletons()`` checks whether the installed PySide6 shows the leak and, if
it does, gives the three singletons a very large reference count, which is what Python 3.12 does
for them. The proper fix is a PySide6 release without the bug (or Python >= 3.12).
"""

from __future__ import annotations

import ctypes
import sys

_RESERVE = 1 << 40
_done = False


def pyside_leaks_bool_refs() -> bool:
    """True when emitting a bool through an ``object`` signal loses references (the 6.12.0 bug)."""
    from PySide6.QtCore import QObject, Signal

    class _Probe(QObject):
        sig = Signal(object)

    p = _Probe()
    before = sys.getrefcount(True)
    for _ in range(4):
        p.sig.emit((True,))
    after = sys.getrefcount(True)
    if after < before:  # give back what the probe took
        ctypes.c_ssize_t.from_address(id(True)).value += before - after
        return True
    return False


def protect_singletons() -> bool:
    """Apply the work-around when needed; returns True when it was applied (once per process)."""
    global _done
    if _done:
        return True
    if sys.version_info >= (3, 12) or not pyside_leaks_bool_refs():
        return False
    for obj in (True, False, None):
        ctypes.c_ssize_t.from_address(id(obj)).value += _RESERVE
    _done = True
    return True

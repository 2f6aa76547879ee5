"""Long work off the GUI thread: a task runs one function in its own QThread, with progress and cancel.

Rules every front-end task follows:

- ``cancel()`` is a request: it sets a flag that the function checks between its chunks (``core``
  raises ``Cancelled``); nobody waits for the thread. The function's result, if it still comes, is
  ignored by whoever dropped the task (its signals carry the task, so a receiver compares it with
  the task it is waiting for).
- A running thread is never destroyed: every started task is held in a module registry until its
  thread has ended (``finished`` is delivered to the GUI thread); the registry lets go of it on a
  later turn of the event loop, never inside the task's own signal. Windows may close while a
  task still finishes its current chunk.
- ``shutdown()`` at program exit cancels what is left and waits a bounded time for it.
"""

from __future__ import annotations

import gc
import threading
import time
import traceback
from collections.abc import Callable

from PySide6.QtCore import QThread, QTimer, Signal

from core.scoring import Cancelled

#: tasks whose thread was started and has not been reaped yet (keeps the QThread objects alive)
_RUNNING: set[Task] = set()
#: tasks whose thread has ended, released on the next turn of the event loop
_ENDED: list[Task] = []


def _release_ended() -> None:
    _ENDED.clear()


def _collect_in_gui_thread() -> None:
    """Python's cyclic garbage collector runs in whichever thread allocates; a worker could then
    destroy plot items of the window. From the first task on, automatic collection is replaced by
    pyqtgraph's collector, which collects on a timer in the GUI thread."""
    global _GC
    if _GC is None:
        from pyqtgraph.util.garbage_collector import GarbageCollector

        _GC = GarbageCollector(interval=1.0)


def restore_automatic_gc() -> None:
    """Back to Python's automatic collection once no task runs (used between tests)."""
    global _GC
    if _GC is not None and not _RUNNING:
        _GC.timer.stop()
        _GC = None
        gc.collect()
        gc.enable()


_GC = None


class Task(QThread):
    """Runs ``fn(progress, cancel)`` once in its own thread.

    ``progress(done, total)`` may be called by ``fn`` from the worker thread; ``cancel()`` returns
    True once a stop was requested. Signals (queued to the GUI thread, each carries the task):
    ``progress(task, done, total)``, then one of ``done(task, result)``, ``cancelled(task)`` or
    ``failed(task, message)``, and last ``ended(task)`` after the thread has stopped."""

    progress = Signal(object, int, int)
    done = Signal(object, object)
    cancelled = Signal(object)
    failed = Signal(object, str)
    ended = Signal(object)

    def __init__(self, fn: Callable[[Callable[[int, int], None], Callable[[], bool]], object], label: str = ""):
        super().__init__()  # no Qt parent: the registry owns the task until its thread ends
        self.fn = fn
        self.label = label
        self._stop = threading.Event()
        self.finished.connect(self._reap)

    def start(self) -> None:
        """Start the thread; the task is kept alive until its thread has ended."""
        _collect_in_gui_thread()
        _RUNNING.add(self)
        super().start()

    def cancel(self) -> None:
        """Ask the function to stop at its next check (thread-safe, returns at once)."""
        self._stop.set()

    def cancel_requested(self) -> bool:
        return self._stop.is_set()

    def run(self) -> None:
        # the worker keeps the GUI thread's CPU priority: a lowered one starves it on a busy machine
        # whenever the worker holds the interpreter lock and waits for the CPU (priority inversion)
        try:
            result = self.fn(lambda d, t: self.progress.emit(self, int(d), int(t)), self._stop.is_set)
        except Cancelled:
            self.cancelled.emit(self)
        except Exception as e:  # noqa: BLE001 - reported to the user; the window stays usable
            traceback.print_exc()
            self.failed.emit(self, f"{type(e).__name__}: {e}")
        else:
            if self._stop.is_set():
                self.cancelled.emit(self)
            else:
                self.done.emit(self, result)

    def _reap(self) -> None:
        _RUNNING.discard(self)
        _ENDED.append(self)  # the last reference may go only after this slot has returned
        QTimer.singleShot(0, _release_ended)
        self.ended.emit(self)


#: GUI redraws waiting for their turn: key -> callable, run one per turn of the event loop
_SOON: dict[object, Callable[[], None]] = {}


def run_soon(key, fn: Callable[[], None]) -> None:
    """Run ``fn`` on a coming turn of the event loop, one queued redraw per turn (a later request
    with the same ``key`` replaces an earlier one). Several views redrawing after one edit then
    never hold the event loop together: input and timers are served between them."""
    first = not _SOON
    _SOON.pop(key, None)
    _SOON[key] = fn
    if first:
        QTimer.singleShot(0, _run_next)


def redraws_pending() -> bool:
    """True while redraws queued with ``run_soon`` wait for their turn."""
    return bool(_SOON)


def _run_next() -> None:
    if not _SOON:
        return
    key = next(iter(_SOON))
    fn = _SOON.pop(key)
    if _SOON:
        QTimer.singleShot(0, _run_next)  # due on the next turn, after the events waiting now
    fn()


def running() -> list[Task]:
    """Tasks whose thread has not been reaped yet."""
    return [t for t in _RUNNING]


def shutdown(timeout_s: float = 10.0) -> bool:
    """Cancel every task and wait up to ``timeout_s`` in all for their threads; True when all ended.

    Called when the program exits (after the last window closed), never while a window is open."""
    tasks = running()
    for t in tasks:
        t.cancel()
    end = time.monotonic() + timeout_s
    ok = True
    for t in tasks:
        left = max(0, int(1000 * (end - time.monotonic())))
        ok = t.wait(left) and ok
    for t in tasks:
        if t.isFinished():
            _RUNNING.discard(t)
    return ok

"""Heatmap computation off the GUI thread: a QObject worker in a QThread, with progress and cancel."""

from __future__ import annotations

import threading

from PySide6.QtCore import QObject, QThread, Signal, Slot

from core.scoring import Cancelled, Scene, heatmap
from core.vehicle import Region


class HeatmapWorker(QObject):
    """Runs ``core.scoring.heatmap`` once; emits progress(done, total), then done(Heatmap), cancelled() or failed(str)."""

    progress = Signal(int, int)
    done = Signal(object)
    cancelled = Signal()
    failed = Signal(str)

    def __init__(self, scene: Scene, region: Region, step_m: float, axis=None):
        super().__init__()
        self.scene, self.region, self.step_m, self.axis = scene, region, step_m, axis
        self._stop = threading.Event()

    def cancel(self) -> None:
        """Ask the computation to stop before its next chunk (thread-safe)."""
        self._stop.set()

    @Slot()
    def run(self) -> None:
        try:
            hm = heatmap(self.scene, self.region, self.step_m, axis=self.axis,
                         progress=lambda d, t: self.progress.emit(d, t), cancel=self._stop.is_set)
        except Cancelled:
            self.cancelled.emit()
        except Exception as e:  # noqa: BLE001 - reported to the user, the window stays usable
            self.failed.emit(f"{type(e).__name__}: {e}")
        else:
            self.done.emit(hm)


class HeatmapJob(QObject):
    """Owns one worker and its thread; ``start()``, ``cancel()``; forwards the worker's signals."""

    progress = Signal(int, int)
    done = Signal(object)
    cancelled = Signal()
    failed = Signal(str)
    finished = Signal()

    def __init__(self, scene: Scene, region: Region, step_m: float, axis=None, parent: QObject | None = None):
        super().__init__(parent)
        self.thread = QThread()
        self.worker = HeatmapWorker(scene, region, step_m, axis)
        self.worker.moveToThread(self.thread)
        self.thread.started.connect(self.worker.run)
        for sig in ("progress", "done", "cancelled", "failed"):
            getattr(self.worker, sig).connect(getattr(self, sig))
        for sig in (self.worker.done, self.worker.cancelled, self.worker.failed):
            sig.connect(self.thread.quit)
        self.thread.finished.connect(self.finished)

    def start(self) -> None:
        self.thread.start()

    def cancel(self) -> None:
        self.worker.cancel()

    def is_running(self) -> bool:
        return self.thread.isRunning()

    def wait(self, ms: int = 30000) -> bool:
        return self.thread.wait(ms)

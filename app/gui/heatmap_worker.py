"""Heatmap computation off the GUI thread (a ``tasks.Task`` around ``core.scoring.heatmap``).

``core.scoring.heatmap`` checks the cancel flag before every chunk of links and reports progress
after each one; cancelling is a request and nothing waits for the thread (see ``app.gui.tasks``).
"""

from __future__ import annotations

from app.gui.tasks import Task
from core.scoring import Scene, heatmap
from core.vehicle import Region


class HeatmapJob(Task):
    """One heatmap of ``region`` at cell spacing ``step_m`` (m); ``done(job, Heatmap)`` when complete."""

    def __init__(self, scene: Scene, region: Region, step_m: float, axis=None):
        self.scene, self.region, self.step_m, self.axis = scene, region, step_m, axis
        super().__init__(self._compute, f"heatmap of '{region.name}'")

    def _compute(self, progress, cancel):
        return heatmap(self.scene, self.region, self.step_m, axis=self.axis, progress=progress, cancel=cancel)

    def is_running(self) -> bool:
        return self.isRunning()

"""Heatmap computation off the GUI thread (a ``tasks.Task`` around ``core.scoring.heatmap_stages``).

The heatmap comes in stages, coarse first (``core.scoring.PROGRESSIVE_STRIDES``: every 4th cell of
the grid, every 2nd, then all): each coarse stage is sent with ``stage(job, Heatmap)`` as soon as it
is computed, the full heatmap with ``done``. ``core.scoring`` checks the cancel flag before every
chunk of links and reports progress after each one; cancelling is a request and nothing waits for
the thread (see ``app.gui.tasks``). A job may be given a vehicle instead of a prepared scene (a
preview while an outline or zone is dragged): its scene is then built in the worker.
"""

from __future__ import annotations

from PySide6.QtCore import Signal

from app.gui.tasks import Task
from core.scoring import PROGRESSIVE_STRIDES, Cancelled, Scene, heatmap_stages
from core.vehicle import Region, Vehicle


class HeatmapJob(Task):
    """One heatmap of ``region`` at cell spacing ``step_m`` (m); ``stage(job, Heatmap)`` for each coarse
    stage, then ``done(job, Heatmap)`` with the full heatmap.

    ``scene`` is a prepared ``core.scoring.Scene``, or a ``Vehicle`` whose scene the worker builds.
    ``progressive=False`` computes the full grid in one stage."""

    stage = Signal(object, object)

    def __init__(self, scene: Scene | Vehicle, region: Region, step_m: float, axis=None, progressive: bool = True):
        self.scene, self.region, self.step_m, self.axis = scene, region, step_m, axis
        self.vehicle = scene if isinstance(scene, Vehicle) else scene.vehicle
        self.strides = PROGRESSIVE_STRIDES if progressive else (1,)
        super().__init__(self._compute, f"heatmap of '{region.name}'")

    def _compute(self, progress, cancel):
        scene = self.scene
        if isinstance(scene, Vehicle):
            scene = Scene.from_vehicle(scene)
            if cancel():
                raise Cancelled()
        for hm in heatmap_stages(scene, self.region, self.step_m, self.strides, axis=self.axis,
                                 progress=progress, cancel=cancel):
            if hm.stride == 1:
                return hm
            self.stage.emit(self, hm)
        raise AssertionError("heatmap_stages ends with the full grid")

    def is_running(self) -> bool:
        return self.isRunning()

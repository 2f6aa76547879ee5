"""The observable document: the current vehicle, its file, the prepared scene and the latest scores.

Views receive the document in their constructor, listen to its signals and write user input to it
(``apply``), never to a sibling view. Every finished edit pushes one undo command; an edit that
``core`` refuses (VehicleFileError) is not applied and the views are told to redraw the last
valid state.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

import numpy as np
from PySide6.QtCore import QObject, Signal
from PySide6.QtGui import QUndoCommand, QUndoStack

from core.scoring import Scene, SpotScores, score_spots, score_vehicle
from core.vehicle import Vehicle, VehicleFileError, check_vehicle, load_vehicle, save_vehicle


class VehicleEdit(QUndoCommand):
    """One finished edit: swaps the document's vehicle between ``before`` and ``after``."""

    def __init__(self, doc: Document, before: Vehicle, after: Vehicle, text: str):
        super().__init__(text)
        self._doc, self._before, self._after = doc, before, after

    def redo(self) -> None:
        self._doc._set_vehicle(self._after)

    def undo(self) -> None:
        self._doc._set_vehicle(self._before)


def _without_spots(v: Vehicle) -> Vehicle:
    return v.model_copy(update={"spots": (), "regions": (), "name": "", "description": ""})


class Document(QObject):
    """The vehicle being edited, with its scene and scores (SI units inside)."""

    vehicleChanged = Signal()  # the vehicle (or the file) changed: redraw everything
    scoresReady = Signal()  # scores of the file's spots were recomputed
    liveScore = Signal(str, object)  # spot name, SpotScores of one spot at its dragged position
    selectionChanged = Signal(str)  # selected spot name ("" for none)
    zoneSelectionChanged = Signal(int)  # index into vehicle.zones, -1 for none
    regionSelectionChanged = Signal(int)  # index into vehicle.regions (the heatmap's region)
    pathChanged = Signal()
    cleanChanged = Signal(bool)
    statusMessage = Signal(str)

    def __init__(self, vehicle: Vehicle, path: str | Path | None = None, parent: QObject | None = None):
        super().__init__(parent)
        self.undo_stack = QUndoStack(self)
        self.undo_stack.cleanChanged.connect(self.cleanChanged)
        self.vehicle: Vehicle = vehicle
        self.path: Path | None = Path(path) if path else None
        self.scene: Scene = Scene.from_vehicle(vehicle)
        self.scores: SpotScores = score_vehicle(vehicle, self.scene)
        self.selected: str = vehicle.spots[int(self.scores.order()[0])].name if vehicle.spots else ""
        self.snap_m: float | None = None
        self.selected_zone: int = -1
        self.region_index: int = 0
        self.live: tuple[str, SpotScores] | None = None

    # ----- state --------------------------------------------------------------------
    @property
    def modified(self) -> bool:
        return not self.undo_stack.isClean()

    def display_name(self) -> str:
        return self.path.name if self.path else "untitled"

    def _set_vehicle(self, v: Vehicle) -> None:
        if _without_spots(v) != _without_spots(self.scene.vehicle):
            self.scene = Scene.from_vehicle(v)  # body, wheels, zones or radio changed
        else:
            self.scene = _rebind(self.scene, v)  # only spots, regions or names changed
        self.vehicle = v
        self.scores = score_vehicle(v, self.scene)
        self.live = None
        if self.selected and self.selected not in self.scores.names:
            self.selected = ""
        if self.selected_zone >= len(v.zones):
            self.selected_zone = -1
        if self.region_index >= len(v.regions):
            self.region_index = 0
        self.vehicleChanged.emit()
        self.scoresReady.emit()

    def replace(self, v: Vehicle, path: str | Path | None) -> None:
        """Start over with a new vehicle (File > New / Open): clears the undo history."""
        check_vehicle(v)
        self.undo_stack.clear()
        self.path = Path(path) if path else None
        self.selected = ""
        self.selected_zone = -1
        self.region_index = 0
        self._set_vehicle(v)
        if v.spots:
            self.select(v.spots[int(self.scores.order()[0])].name)
        self.undo_stack.setClean()
        self.pathChanged.emit()

    # ----- edits --------------------------------------------------------------------
    def apply(self, make: Callable[[Vehicle], Vehicle], text: str) -> bool:
        """Run an edit ``make(vehicle) -> vehicle``; push it on the undo stack when core accepts it.

        Returns False (and reports in the status bar) when the edit is refused; the views are then
        told to redraw the last valid state."""
        before = self.vehicle
        try:
            after = make(before)
            check_vehicle(after)
        except VehicleFileError as e:
            self.statusMessage.emit(f"Edit refused ({text}): {e}")
            self.vehicleChanged.emit()
            return False
        except (KeyError, ValueError) as e:
            self.statusMessage.emit(f"Edit refused ({text}): {e}")
            self.vehicleChanged.emit()
            return False
        if after == before:
            self.vehicleChanged.emit()
            return True
        self.undo_stack.push(VehicleEdit(self, before, after, text))
        self.statusMessage.emit(text)
        return True

    def select(self, name: str) -> None:
        if name != self.selected:
            self.selected = name
            self.selectionChanged.emit(name)

    def select_zone(self, index: int) -> None:
        if index != self.selected_zone:
            self.selected_zone = index
            self.zoneSelectionChanged.emit(index)

    def select_region(self, index: int) -> None:
        if index != self.region_index:
            self.region_index = index
            self.regionSelectionChanged.emit(index)

    # ----- scores -------------------------------------------------------------------
    def spot_row(self, name: str) -> int:
        return self.scores.names.index(name)

    def spot_position(self, name: str) -> tuple[float, float, float]:
        return self.scores_position(self.spot_row(name))

    def scores_position(self, row: int) -> tuple[float, float, float]:
        return tuple(float(c) for c in self.scores.positions[row])

    def score_at(self, name: str, pos) -> SpotScores:
        """Scores of spot ``name`` moved to ``pos`` (x, y, z) m: the engine's single-spot path."""
        spot = self.vehicle.spots[[s.name for s in self.vehicle.spots].index(name)]
        axis = self.vehicle.spot_axis(spot)[None, :]
        return score_spots(self.scene, np.asarray(pos, float)[None, :], axis, [name])

    def live_move(self, name: str, pos) -> SpotScores:
        """A spot is being dragged: score it at ``pos`` and tell the views (no edit is made)."""
        sc = self.score_at(name, pos)
        self.live = (name, sc)
        self.liveScore.emit(name, sc)
        return sc

    # ----- files --------------------------------------------------------------------
    def save(self, path: str | Path | None = None) -> None:
        """Save atomically to ``path`` (or the current file); raises OSError / VehicleFileError."""
        target = Path(path) if path else self.path
        if target is None:
            raise ValueError("no file name")
        save_vehicle(self.vehicle, target)
        self.path = target
        self.undo_stack.setClean()
        self.pathChanged.emit()

    @staticmethod
    def read(path: str | Path) -> Vehicle:
        """Load a vehicle file without touching any document (raises VehicleFileError)."""
        return load_vehicle(path)


def _rebind(scene: Scene, v: Vehicle) -> Scene:
    """The same prepared scene for a vehicle that differs only in spots/regions/names."""
    from dataclasses import replace

    return replace(scene, vehicle=v)

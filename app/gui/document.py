"""The observable document: the current vehicle, its file, the prepared scene and the latest scores.

Views receive the document in their constructor, listen to its signals and write user input to it
(``apply``), never to a sibling view. Every finished edit pushes one undo command. An edit is
prepared completely before it is pushed (the new vehicle validated by ``core``, its scene built):
an edit that fails at any of these steps is not applied, pushes nothing and the views are told to
redraw the last valid state.

Scoring the file's spots is small work for ordinary files and is done at once. A large file (up to
500 spots x 16 wheels x 3,600 angles, about 29 million links) is scored in a worker thread with
progress: until a spot's row is scored its entry in ``pending`` is True and its numbers are NaN.
After an edit only the spots whose position, axis or physics changed are scored again.
"""

from __future__ import annotations

import itertools
from collections.abc import Callable
from dataclasses import dataclass
from dataclasses import replace as dc_replace
from pathlib import Path

import numpy as np
from PySide6.QtCore import QObject, Signal
from PySide6.QtGui import QUndoCommand, QUndoStack

from app.gui.tasks import Task
from core.placement import Placement, classify
from core.scoring import CHUNK_LINKS, Cancelled, Scene, SpotScores, score_spots, vehicle_spot_arrays
from core.vehicle import Vehicle, VehicleFileError, check_vehicle, load_vehicle, save_vehicle

#: links (spots x wheels x angles) scored on the GUI thread; more go to a worker thread.
#: About 0.1 s at the engine's speed on a laptop core (docs/performance.md): the ten-spot
#: samples (3,000-4,500 links) stay immediate, the largest allowed file (29 million) is not.
SYNC_LINKS = 20_000
#: undo steps kept (each holds its prepared scene)
UNDO_LIMIT = 200
_SCORE_FIELDS = ("levels_dbm", "worst_dbm", "worst_angle_deg", "median_dbm", "margin_db", "worst_wheel", "near_field")
_physics_ids = itertools.count(1)


@dataclass(frozen=True, eq=False)
class Prepared:
    """A vehicle ready to be shown: its scene, and the id of the scene's physics (shared by states
    that differ only in spots, regions or names, so their spot scores can be reused)."""

    vehicle: Vehicle
    scene: Scene
    physics: int


class VehicleEdit(QUndoCommand):
    """One finished edit: swaps the document between two prepared states."""

    def __init__(self, doc: Document, before: Prepared, after: Prepared, text: str):
        super().__init__(text)
        self._doc, self._before, self._after = doc, before, after

    def redo(self) -> None:
        self._doc._install(self._after)

    def undo(self) -> None:
        self._doc._install(self._before)


def _without_spots(v: Vehicle) -> Vehicle:
    return v.model_copy(update={"spots": (), "regions": (), "name": "", "description": ""})


def blank_scores(scene: Scene, names, positions, levels=None) -> SpotScores:
    """Scores of spots not computed yet: NaN margins, worst wheel -1. ``levels`` (S, W, A) may be
    given; by default a read-only NaN view that takes no memory (the largest file's levels take 230 MB)."""
    s, w, a = len(names), len(scene.wheels), len(scene.angles_rad)
    return SpotScores(
        names=tuple(names), positions=np.asarray(positions, float).reshape(s, 3), wheel_ids=scene.wheel_ids,
        angles_deg=np.degrees(scene.angles_rad),
        levels_dbm=np.broadcast_to(np.nan, (s, w, a)) if levels is None else levels,
        worst_dbm=np.full((s, w), np.nan), worst_angle_deg=np.full((s, w), np.nan),
        median_dbm=np.full((s, w), np.nan), margin_db=np.full(s, np.nan), worst_wheel=np.full(s, -1, int),
        sensitivity_dbm=scene.sensitivity_dbm, required_margin_db=scene.required_margin_db,
        near_field=np.zeros(s, bool),
    )


def score_rows(scene: Scene, positions, axes, rows, progress=None, cancel=None) -> list[tuple[np.ndarray, SpotScores]]:
    """Score the spots ``rows`` in chunks of about ``CHUNK_LINKS`` links (at least one spot each).

    ``cancel()`` is checked before every chunk (raises Cancelled); ``progress(done, total)`` counts spots."""
    rows = np.asarray(rows, int)
    per = max(1, CHUNK_LINKS // max(1, len(scene.wheels) * len(scene.angles_rad)))
    out = []
    for start in range(0, len(rows), per):
        if cancel is not None and cancel():
            raise Cancelled()
        r = rows[start:start + per]
        out.append((r, score_spots(scene, positions[r], axes[r])))
        if progress is not None:
            progress(min(len(rows), start + per), len(rows))
    return out


def assemble_scores(scene: Scene, names, positions, old: SpotScores, reuse: np.ndarray, parts) -> SpotScores:
    """Complete scores: row i taken from ``old`` row ``reuse[i]`` (when >= 0) or from the scored ``parts``.

    Builds new arrays (never writes into ``old``, which views may still show)."""
    s, w, a = len(names), len(scene.wheels), len(scene.angles_rad)
    out = blank_scores(scene, names, positions, levels=np.empty((s, w, a)))
    have = reuse >= 0
    for f in _SCORE_FIELDS:
        if have.any():
            getattr(out, f)[have] = getattr(old, f)[reuse[have]]
        for rows, part in parts:
            getattr(out, f)[rows] = getattr(part, f)
    return out


class Document(QObject):
    """The vehicle being edited, with its scene and scores (SI units inside)."""

    vehicleChanged = Signal()  # the vehicle (or the file) changed: redraw everything
    scoresReady = Signal()  # scores of the file's spots changed (check ``pending`` for rows not scored yet)
    scoringProgress = Signal(int, int)  # spots scored, spots to score (a worker is scoring); (0, 0): idle
    liveScore = Signal(str, object)  # spot name, SpotScores of one spot at its dragged position
    liveDropped = Signal(str, object)  # a dragged spot is released where it was last scored: name, that SpotScores
    previewChanged = Signal(object)  # an outline, zone or region is being dragged: the (valid) Vehicle under the mouse
    selectionChanged = Signal(str)  # selected spot name ("" for none)
    zoneSelectionChanged = Signal(int)  # index into vehicle.zones, -1 for none
    regionSelectionChanged = Signal(int)  # index into vehicle.regions (the heatmap's region)
    wheelSelectionChanged = Signal(str)  # selected wheel id ("" for none; shown in the Properties panel)
    documentReplaced = Signal()  # File > New / Open / a recovered copy: a different document
    pathChanged = Signal()
    cleanChanged = Signal(bool)
    statusMessage = Signal(str)

    def __init__(self, vehicle: Vehicle, path: str | Path | None = None, parent: QObject | None = None):
        super().__init__(parent)
        self.undo_stack = QUndoStack(self)
        self.undo_stack.setUndoLimit(UNDO_LIMIT)
        self.undo_stack.cleanChanged.connect(self.cleanChanged)
        self.path: Path | None = Path(path) if path else None
        self.snap_m: float | None = None
        self.selected: str = ""
        self.selected_zone: int = -1
        self.region_index: int = 0
        self.selected_wheel: str = ""
        self.live: tuple[str, SpotScores] | None = None
        self._live_axis = np.zeros(3)  # the receiver axis the live score was computed with
        self.live_placement: Placement | None = None  # core.placement of the live score's position
        self._placement: tuple[SpotScores, Placement] | None = None  # (scores, their placement): placement()
        self.vehicle: Vehicle = vehicle
        self.scene: Scene = Scene.from_vehicle(vehicle)
        self.physics: int = next(_physics_ids)
        self.scores: SpotScores = blank_scores(self.scene, [], np.zeros((0, 3)))
        self.pending: np.ndarray = np.zeros(0, bool)
        self._score_task: Task | None = None
        self._old_axes = np.zeros((0, 3))
        self._live_task: Task | None = None
        self._live_request: tuple[str, tuple[float, float, float]] | None = None
        self._generation = 0
        self._auto_select = True
        #: the latest full-wave confirmation of this document (app.gui.confirm_window), shown while the
        #: vehicle is the one it was run on: {"vehicle", "margins" by spot name, "fast" by spot name, "setup"}
        self.fullwave: dict | None = None
        self._install(Prepared(vehicle, self.scene, self.physics), first=True)
        if vehicle.spots and not self.pending.any():
            self.selected = vehicle.spots[int(self.scores.order()[0])].name
        elif vehicle.spots:
            self.selected = vehicle.spots[0].name

    # ----- state --------------------------------------------------------------------
    @property
    def modified(self) -> bool:
        return not self.undo_stack.isClean()

    @property
    def scoring(self) -> bool:
        """True while a worker scores some of the file's spots."""
        return self._score_task is not None

    def display_name(self) -> str:
        return self.path.name if self.path else "untitled"

    def prepare(self, v: Vehicle) -> Prepared:
        """The scene for ``v``: the current one rebound when only spots, regions or names differ."""
        if _without_spots(v) == _without_spots(self.scene.vehicle):
            return Prepared(v, dc_replace(self.scene, vehicle=v), self.physics)
        return Prepared(v, Scene.from_vehicle(v), next(_physics_ids))

    def _install(self, p: Prepared, first: bool = False, emit: bool = True) -> None:
        """Show the prepared state: keep the scores of unchanged spots, score the others."""
        self._generation += 1
        self._drop_tasks()
        old, old_pending, same_physics = self.scores, self.pending, p.physics == self.physics and not first
        self.vehicle, self.scene, self.physics = p.vehicle, p.scene, p.physics
        names, pos, ax = vehicle_spot_arrays(p.vehicle)
        reuse = np.full(len(names), -1)  # row of the old scores that holds this spot's scores
        if same_physics and len(old.names):
            known = {}
            for j in range(len(old.names)):
                if not old_pending[j]:
                    known[(tuple(old.positions[j]), tuple(self._old_axes[j]))] = j
            for i in range(len(names)):
                reuse[i] = known.get((tuple(pos[i]), tuple(ax[i])), -1)
        self._old_axes = ax
        todo = np.nonzero(reuse < 0)[0]
        scene = p.scene
        # a dropped spot was scored at this very position while it was dragged: not scored again
        live = self._live_parts(names, pos, ax, todo) if same_physics else []
        if live:
            todo = np.setdiff1d(todo, np.concatenate([r for r, _ in live]))
        if len(todo) * len(scene.wheels) * len(scene.angles_rad) <= SYNC_LINKS:
            scores = assemble_scores(scene, names, pos, old, reuse, live + score_rows(scene, pos, ax, todo))
            pending = np.zeros(len(names), bool)
        else:
            # until the worker is done: the reused rows are shown when they keep their places (a spot
            # moved, the others did not), otherwise every row waits for the worker
            in_place = len(old.names) == len(names) and bool(np.all((reuse == -1) | (reuse == np.arange(len(names)))))
            scores = blank_scores(scene, names, pos, levels=old.levels_dbm if in_place else None)
            pending = np.ones(len(names), bool)
            if in_place:
                keep = reuse >= 0
                for f in _SCORE_FIELDS[1:]:
                    getattr(scores, f)[keep] = getattr(old, f)[keep]
                pending = ~keep
            self._start_scoring(scene, names, pos, ax, old, reuse, todo, live)
        self.scores, self.pending = scores, pending
        self.live = None
        self._live_request = None
        if self.selected and self.selected not in scores.names:
            self.selected = ""
        if self.selected_zone >= len(p.vehicle.zones):
            self.selected_zone = -1
        if self.region_index >= len(p.vehicle.regions):
            self.region_index = 0
        if emit and not first:
            self.vehicleChanged.emit()
            self.scoresReady.emit()

    def _live_parts(self, names, pos, ax, todo) -> list[tuple[np.ndarray, SpotScores]]:
        """The live score of the dragged spot as an assembled part, when one of the rows ``todo`` is that
        spot at the position and axis it was scored at while dragged (the same engine call, the same
        physics: the drop needs no new scoring)."""
        if self.live is None:
            return []
        name, sc = self.live
        for i in todo:
            if names[i] == name and np.array_equal(pos[i], sc.positions[0]) and np.array_equal(ax[i], self._live_axis):
                return [(np.array([i]), sc)]
        return []

    def replace(self, v: Vehicle, path: str | Path | None) -> None:
        """Start over with a new vehicle (File > New / Open): clears the undo history."""
        check_vehicle(v)
        p = Prepared(v, Scene.from_vehicle(v), next(_physics_ids))
        self.undo_stack.clear()
        self.path = Path(path) if path else None
        self.selected = ""
        self.selected_zone = -1
        self.region_index = 0
        self._auto_select = True
        self._install(p, emit=False)
        self.selected = v.spots[self._best_row()].name if v.spots else ""
        self.vehicleChanged.emit()
        self.scoresReady.emit()
        self.selectionChanged.emit(self.selected)
        self.undo_stack.setClean()
        self.pathChanged.emit()
        self.documentReplaced.emit()

    def _best_row(self) -> int:
        return int(self.scores.order()[0]) if not self.pending.any() else 0

    # ----- scoring in a worker ----------------------------------------------------------
    def _start_scoring(self, scene: Scene, names, pos, ax, old: SpotScores, reuse, rows, known=()) -> None:
        known = list(known)

        def run(progress, cancel):
            return assemble_scores(scene, names, pos, old, reuse,
                                   known + score_rows(scene, pos, ax, rows, progress, cancel))

        task = Task(run, f"scoring {len(rows)} spots")
        task.gen = self._generation
        task.count = len(rows)
        task.progress.connect(self._score_progress)
        task.done.connect(self._score_done)
        task.failed.connect(self._score_failed)
        self._score_task = task
        self.scoringProgress.emit(0, len(rows))
        self.statusMessage.emit(f"Scoring {len(rows)} spots in the background...")
        task.start()

    def _score_progress(self, task, done: int, total: int) -> None:
        if task is self._score_task:
            self.scoringProgress.emit(done, total)

    def _score_done(self, task, scores: SpotScores) -> None:
        if task is not self._score_task or task.gen != self._generation:
            return
        self._score_task = None
        self.scores, self.pending = scores, np.zeros(len(scores.names), bool)
        self.scoringProgress.emit(0, 0)
        self.statusMessage.emit(f"Scored {task.count} spots.")
        if self._auto_select and self.vehicle.spots:
            self.select(self.vehicle.spots[self._best_row()].name, auto=True)
        self.scoresReady.emit()

    def _score_failed(self, task, msg: str) -> None:
        if task is self._score_task:
            self._score_task = None
            self.scoringProgress.emit(0, 0)
            self.statusMessage.emit(f"Scoring the spots failed: {msg}")

    def _drop_tasks(self) -> None:
        for name in ("_score_task", "_live_task"):
            task = getattr(self, name)
            if task is not None:
                task.cancel()
                setattr(self, name, None)
        self.scoringProgress.emit(0, 0)

    def abandon_work(self) -> None:
        """Ask every worker of this document to stop and ignore its results (the window closes)."""
        self._generation += 1
        self._drop_tasks()

    # ----- edits --------------------------------------------------------------------
    def apply(self, make: Callable[[Vehicle], Vehicle], text: str) -> bool:
        """Run an edit ``make(vehicle) -> vehicle``; push it on the undo stack when it is complete.

        The new vehicle is validated by ``core`` and its scene is built before anything is pushed.
        Returns False (and reports in the status bar) when any step refuses or fails: nothing is
        pushed and the views are told to redraw the last valid state. An edit that changes nothing
        pushes nothing and returns True."""
        before = self.vehicle
        try:
            after = make(before)
            check_vehicle(after)
            if after == before:
                self.vehicleChanged.emit()
                return True
            prepared = self.prepare(after)
        except VehicleFileError as e:
            return self._refuse(text, str(e))
        except Exception as e:  # noqa: BLE001 - any failure refuses the edit; the document stays valid
            return self._refuse(text, f"{type(e).__name__}: {e}")
        self.undo_stack.push(VehicleEdit(self, Prepared(before, self.scene, self.physics), prepared, text))
        self.statusMessage.emit(text)
        return True

    def preview(self, make: Callable[[Vehicle], Vehicle]) -> bool:
        """An outline, zone or region is being dragged: ``make(vehicle)`` is the state under the mouse. When
        it is a valid vehicle, ``previewChanged`` tells the views (the heatmap recomputes for it); nothing is
        edited or pushed, the drop makes the edit. Returns False for a state ``core`` refuses (shown at the drop)."""
        try:
            v = make(self.vehicle)
            check_vehicle(v)
        except Exception:  # noqa: BLE001 - a state in the middle of a drag may be invalid; the drop says why
            return False
        if v != self.vehicle:
            self.previewChanged.emit(v)
        return True

    def _refuse(self, text: str, why: str) -> bool:
        self.statusMessage.emit(f"Edit refused ({text}): {why}")
        self.vehicleChanged.emit()
        return False

    def select(self, name: str, auto: bool = False) -> None:
        self._auto_select = auto
        if name != self.selected:
            self.selected = name
            self.selectionChanged.emit(name)

    def select_zone(self, index: int) -> None:
        if index != self.selected_zone:
            self.selected_zone = index
            self.zoneSelectionChanged.emit(index)

    def select_wheel(self, wheel_id: str) -> None:
        if wheel_id != self.selected_wheel:
            self.selected_wheel = wheel_id
            self.wheelSelectionChanged.emit(wheel_id)

    def select_region(self, index: int) -> None:
        if index != self.region_index:
            self.region_index = index
            self.regionSelectionChanged.emit(index)

    # ----- scores -------------------------------------------------------------------
    def spot_row(self, name: str) -> int:
        return self.scores.names.index(name)

    def is_scored(self, name: str) -> bool:
        """True when the spot's scores are computed (False while a worker still scores it)."""
        i = self.scores.names.index(name)
        return not bool(self.pending[i])

    def spot_position(self, name: str) -> tuple[float, float, float]:
        return self.scores_position(self.spot_row(name))

    def scores_position(self, row: int) -> tuple[float, float, float]:
        return tuple(float(c) for c in self.scores.positions[row])

    def _spot_axis(self, name: str) -> np.ndarray:
        spot = self.vehicle.spots[[s.name for s in self.vehicle.spots].index(name)]
        return self.vehicle.spot_axis(spot)[None, :]

    def score_at(self, name: str, pos) -> SpotScores:
        """Scores of spot ``name`` moved to ``pos`` (x, y, z) m: the engine's single-spot path."""
        return score_spots(self.scene, np.asarray(pos, float)[None, :], self._spot_axis(name), [name])

    def live_move(self, name: str, pos) -> SpotScores | None:
        """A spot is being dragged: score it at ``pos`` and tell the views (no edit is made).

        When one spot is heavy work (many wheels and angles) it is scored in a worker, the latest
        position winning: ``liveScore`` then follows the mouse as fast as the engine allows and
        None is returned."""
        if len(self.scene.wheels) * len(self.scene.angles_rad) <= SYNC_LINKS:
            sc = self.score_at(name, pos)
            self._show_live(name, sc, self._spot_axis(name)[0])
            return sc
        self._live_request = (name, tuple(float(c) for c in pos))
        if self._live_task is None:
            self._start_live()
        return None

    def placement(self) -> Placement:
        """core.placement of every spot of ``scores`` (inside, near a panel, outside...), classified once
        per set of scores for every view that shows it."""
        if self._placement is None or self._placement[0] is not self.scores:
            self._placement = (self.scores, classify(self.scene, self.scores.positions))
        return self._placement[1]

    def live_released(self, name: str, pos) -> None:
        """A dragged spot is released at ``pos`` (x, y, z) m, before its move is applied: when its live
        score is of that very position, ``liveDropped`` passes it on, so that work that follows from it
        (the burst figure) starts while the edit is made."""
        if self.live is not None and self.live[0] == name and tuple(self.live[1].positions[0]) == tuple(pos):
            self.liveDropped.emit(name, self.live[1])

    def _start_live(self) -> None:
        name, pos = self._live_request
        self._live_request = None
        scene, axis = self.scene, self._spot_axis(name)
        task = Task(lambda _p, _c: score_spots(scene, np.asarray(pos)[None, :], axis, [name]), "live score")
        task.gen, task.spot, task.axis = self._generation, name, axis[0]
        task.done.connect(self._live_done)
        self._live_task = task
        task.start()

    def _live_done(self, task, sc) -> None:
        if task is not self._live_task or task.gen != self._generation:
            return
        self._live_task = None
        if self._live_request is not None:
            self._start_live()  # the mouse moved on: only the latest position is shown
            return
        self._show_live(task.spot, sc, task.axis)

    def _show_live(self, name: str, sc: SpotScores, axis: np.ndarray) -> None:
        """The dragged spot's score at its latest position: kept, with its placement (core.placement,
        classified once here for every view that shows it), and told to the views."""
        self.live, self._live_axis = (name, sc), axis
        self.live_placement = classify(self.scene, sc.positions[:1])
        self.liveScore.emit(name, sc)

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

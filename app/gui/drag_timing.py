"""What a spot drag costs in the desktop program, for ``wheelreach bench`` (never a timed test).

The window is the real one (``Document`` + ``MainWindow``), usually on the offscreen platform. A drag
step is what the marker's ``mouseDragEvent`` does on a mouse move: ``TargetItem.setPos`` (which emits
``sigPositionChanged``) and the event loop turned until the live margin is shown. The drop is what it
does on release: ``sigPositionChangeFinished``, then the event loop turned until the window is idle
again (views redrawn, the spot scored, the selected spot's figures and burst figure drawn). The
heatmap's automatic restart is switched off for these timings: the heatmap runs in its own worker and
is timed by the engine figures of the benchmark.
"""

from __future__ import annotations

import statistics
import time

from PySide6.QtCore import QEventLoop
from PySide6.QtWidgets import QApplication

from app.gui import tasks

#: the drag steps alternate between two positions this far apart in the view, m (a short hand move)
DRAG_STEP_M = 0.01
#: longest wait for the window to go idle after a drop, s (a hang is reported, not timed)
IDLE_LIMIT_S = 60.0


def window_idle(win) -> bool:
    """True when nothing of a spot edit is left to do: no queued redraw, no view rebuild, no scoring,
    no burst figure or link-budget analysis on its way."""
    doc = win.doc
    return not (tasks.redraws_pending() or win.top._rebuild_pending or win.side._rebuild_pending
                or doc.scoring or doc._live_task is not None or win.ranking.figures.burst_pending()
                or (win.defence_panel.active and win.defence_panel.pending()))


def _turn(app) -> None:
    app.processEvents(QEventLoop.ProcessEventsFlag.AllEvents)


def settle(win, limit_s: float = IDLE_LIMIT_S) -> None:
    """Turn the event loop until the window is idle (and its paint events are done)."""
    app = QApplication.instance()
    end = time.perf_counter() + limit_s
    _turn(app)
    while not window_idle(win):
        if time.perf_counter() > end:
            raise RuntimeError(f"the window did not go idle within {limit_s:.0f} s")
        _turn(app)
        time.sleep(0.0005)  # a worker (burst figure) is computing: give it the interpreter
    _turn(app)


def drag_step(win, view, name: str, to: tuple[float, float]) -> float:
    """One mouse move of a drag: the marker moved to ``to`` (view coordinates, m) as its mouseDragEvent
    does, until the live margin at the new position is shown; wall-clock seconds."""
    app = QApplication.instance()
    marker = view.markers[name]
    doc = win.doc
    t0 = time.perf_counter()
    marker.setPos(*to)  # TargetItem.setPos emits sigPositionChanged: BodyView._spot_dragging
    while not (doc.live and doc.live[0] == name and tuple(view.to_view(doc.live[1].positions[0])) == tuple(to)):
        _turn(app)  # a heavy spot is scored in a worker: wait for its result
    _turn(app)  # the views, table, readout and figures repaint
    return time.perf_counter() - t0


def drop(win, view, name: str) -> float:
    """The mouse released: ``sigPositionChangeFinished`` as mouseDragEvent emits it, until the window is
    idle again; wall-clock seconds."""
    marker = view.markers[name]
    t0 = time.perf_counter()
    marker.sigPositionChangeFinished.emit(marker)
    settle(win)
    return time.perf_counter() - t0


def time_drag_and_drop(win, repeats: int, name: str | None = None, between=None) -> tuple[list[float], list[float], str]:
    """Median material for the bench: per repeat, a few drag steps of the selected spot in the top view
    and one drop; returns (drag step seconds, drop seconds, spot name). Every drop is one undo step,
    undone after its timing so each repeat starts from the file's own position. ``between()`` is called
    before every repeat (the bench times the engine's single spot there, so that both figures of a ratio
    see the same load of the machine)."""
    doc = win.doc
    name = name or doc.selected or doc.vehicle.spots[0].name
    doc.select(name)
    win.ranking.heatmap.auto.setChecked(False)
    win.ranking.heatmap.abandon()
    settle(win)
    view = win.top
    steps, drops = [], []
    for _ in range(repeats):
        if between is not None:
            between()
        u, w = view.to_view(doc.spot_position(name))
        for k in range(4):
            steps.append(drag_step(win, view, name, (u + DRAG_STEP_M * ((k % 2) + 1), w)))
        drops.append(drop(win, view, name))
        doc.undo_stack.undo()
        settle(win)
    return steps, drops, name


def time_progressive_heatmap(win, step_m: float) -> tuple[float, float, object]:
    """The heatmap panel's Compute: seconds until the first coarse stage is shown and until the full
    heatmap is shown, and the full Heatmap."""
    app = QApplication.instance()
    panel = win.ranking.heatmap
    panel.step.setCurrentIndex(panel.step.findData(step_m))
    got: dict = {}
    t0 = time.perf_counter()

    def stage(_hm):
        got.setdefault("stage", time.perf_counter() - t0)

    def ready(hm):
        got["full"], got["hm"] = time.perf_counter() - t0, hm

    panel.stageShown.connect(stage)
    panel.heatmapReady.connect(ready)
    try:
        t0 = time.perf_counter()
        panel.start()
        end = t0 + 600.0
        while "full" not in got:
            if time.perf_counter() > end:
                raise RuntimeError("the heatmap did not finish within 600 s")
            _turn(app)
            time.sleep(0.001)
    finally:
        panel.stageShown.disconnect(stage)
        panel.heatmapReady.disconnect(ready)
    settle(win)
    return got.get("stage", got["full"]), got["full"], got["hm"]


def median_ms(xs: list[float]) -> float:
    return 1e3 * statistics.median(xs)

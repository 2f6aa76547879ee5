"""The window never freezes and never loses work (issue 18 items 1, 2, 5, 7; issue 14 hang items).

Hang detectors, not timings: each limit is far above what a working program needs and far below
what the faults did (a 30 s wait for the worker, a repaint loop that never ends). The references
for the numbers are the engine itself (core.scoring), called independently of the GUI.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
from core.samples import DEFAULT_SAMPLE, SAMPLES_DIR
from PySide6.QtCore import QEvent, QEventLoop, QObject, QSettings, QTimer
from PySide6.QtWidgets import QApplication

from app.gui import dialogs, edits, tasks
from app.gui.document import Document
from app.gui.heatmap_worker import HeatmapJob
from app.gui.recovery import find_orphans, recovery_dir
from app.gui.window import MainWindow
from core.burst import BurstResult
from core.scoring import Scene, score_vehicle
from core.vehicle import load_vehicle, vehicle_from_dict, vehicle_to_dict

ROOT = Path(__file__).resolve().parents[2]
#: after each action the event loop must never go longer than this without answering (the faults blocked it for 30 s)
ANSWER_S = 0.5
#: an action itself (an edit, opening a sample, closing) is ordinary GUI work of a fraction of a second
ACTION_S = 2.0


def responsiveness(action, follow_s: float = 1.2) -> tuple[float, float]:
    """(seconds ``action()`` took, longest gap between answers of the event loop in the ``follow_s``
    after it). A 10 ms heartbeat timer measures the gaps, so work the action only schedules (a
    debounced heatmap restart, a view rebuild) is caught too."""
    app = QApplication.instance()
    t0 = time.monotonic()
    action()
    t1 = time.monotonic()
    beats = [t1]
    timer = QTimer()
    timer.setInterval(10)
    timer.timeout.connect(lambda: beats.append(time.monotonic()))
    timer.start()
    while time.monotonic() - t1 < follow_s:
        app.processEvents(QEventLoop.ProcessEventsFlag.AllEvents, 10)
    timer.stop()
    beats.append(time.monotonic())
    return t1 - t0, float(np.max(np.diff(beats)))


#: on a busy machine the answer may take this many times what the same action takes with no
#: worker running (the window's own redraw work, measured in the same test just before)
BUSY_FACTOR = 3.0


def idle_gap(action, tries: int = 2) -> float:
    """The shortest gap after ``action(k)`` over ``tries`` tries, with no worker running: the
    window's own work for that action on this machine at this moment."""
    app, t0 = QApplication.instance(), time.monotonic()
    while tasks.running() and time.monotonic() - t0 < 60:  # e.g. the burst figure of the selected spot
        app.processEvents(QEventLoop.ProcessEventsFlag.AllEvents, 20)
    return min(responsiveness(lambda k=k: action(k))[1] for k in range(tries))


def assert_responsive(action, follow_s: float = 1.2, tries: int = 1, before=None, idle_s: float = 0.0) -> None:
    """The action returns within ACTION_S and the event loop then answers within ANSWER_S, or
    within BUSY_FACTOR x ``idle_s`` when the machine is so busy that the same action alone takes
    longer (``idle_s`` from ``idle_gap``; a window that waits for a worker takes seconds more).

    With ``tries`` > 1 the action (called with the try number) is repeated until one try meets
    both limits: a window that waits for a worker fails every try, while a single slow turn of a
    shared, busy machine (the scheduler, a garbage collection) does not fail the test.
    ``before(k)`` runs ahead of each try (e.g. to check that the heatmap is still running)."""
    limit = max(ANSWER_S, BUSY_FACTOR * idle_s)
    seen = []
    for k in range(tries):
        if before is not None:
            before(k)
        took, gap = responsiveness(lambda k=k: action(k) if tries > 1 else action(), follow_s)
        seen.append((round(took, 2), round(gap, 2)))
        if took < ACTION_S and gap < limit:
            return
    pytest.fail(f"the window did not answer within {limit:.2f} s (action s, longest gap s after it): {seen}")


def heatmap_jobs() -> list:
    return [t for t in tasks.running() if isinstance(t, HeatmapJob)]


def new_window(qtbot, settings, path=DEFAULT_SAMPLE, vehicle=None, autosave=True, auto=False) -> MainWindow:
    v = vehicle if vehicle is not None else load_vehicle(path)
    win = MainWindow(Document(v, path if vehicle is None else None), settings=settings, autosave=autosave)
    win.ranking.heatmap.auto.setChecked(auto)
    qtbot.addWidget(win, before_close_func=lambda w: w.doc.undo_stack.setClean())
    win.resize(1600, 1000)
    win.show()
    return win


# ----- long work never blocks the window ---------------------------------------------------------------
def test_edit_open_and_close_during_a_heatmap_answer_at_once(window, qtbot):
    panel = window.ranking.heatmap
    doc = window.doc
    files = ("cargo_van.json", "suv.json", "cargo_van.json")

    def edit(k):  # a body edit (a zone's material, alternately): with auto on it restarts the heatmap
        doc.apply(lambda v: edits.set_zone_material(v, 0, ("plastic", "glass")[k % 2]), "zone material")

    def open_file(k):
        window.open_path(SAMPLES_DIR / files[k], confirm=False)

    # the same actions with no heatmap running, for the busy-machine allowance
    idle_edit = idle_gap(lambda k: edit(10 + k))
    idle_open = idle_gap(lambda k: open_file(1 - k))  # suv, then the van: ends on the van
    window.open_path(DEFAULT_SAMPLE, confirm=False)

    panel.auto.setChecked(True)
    panel.step.setCurrentIndex(panel.step.findData(0.025))  # a fine grid: many chunks, several seconds
    panel.start()
    assert panel.is_running()

    def running(_k):  # each try happens while a heatmap runs (auto restarts it after an edit or open)
        qtbot.waitUntil(lambda: panel.is_running() and panel.job.scene.vehicle is doc.vehicle, timeout=10_000)

    assert_responsive(edit, tries=3, before=running, idle_s=idle_edit)
    assert_responsive(open_file, tries=3, before=running, idle_s=idle_open)
    assert doc.vehicle in (load_vehicle(SAMPLES_DIR / n) for n in files)
    assert panel.result is None or panel.result.fixed_m == panel.region().height_m  # nothing of the sedan's
    panel.step.setCurrentIndex(panel.step.findData(0.025))
    panel.start()
    assert panel.is_running()

    assert_responsive(window.close)
    assert not window.isVisible()
    # the dropped workers stop within a chunk on their own (the autouse fixture waits for them)
    qtbot.waitUntil(lambda: not heatmap_jobs(), timeout=60_000)


def test_restarting_the_heatmap_keeps_cancel_until_the_last_run_ends(window, qtbot):
    panel = window.ranking.heatmap
    panel.step.setCurrentIndex(panel.step.findData(0.05))
    seen = []  # the panel's state each time a superseded run has stopped

    def record(_job):
        seen.append((panel.job is last, panel.compute.isEnabled(), panel.cancel_button.isEnabled(), panel.readout.text()))

    dropped = []
    for _ in range(3):  # F5 three times
        window.actions["compute_heatmap"].trigger()
        assert not panel.compute.isEnabled() and panel.cancel_button.isEnabled()
        dropped.append(panel.job)
    last = dropped.pop()
    for job in dropped:
        job.ended.connect(record)
    results = []
    panel.heatmapReady.connect(results.append)
    qtbot.waitUntil(lambda: bool(results) and len(seen) == 2, timeout=180_000)
    # a superseded run stops within one chunk (milliseconds), long before a 50 mm grid is done
    assert any(r[0] for r in seen)
    for last_running, compute, cancel, text in seen:
        if last_running:  # the last run was still going: still shown as running
            assert not compute and cancel and "cancelled" not in text
    assert len(results) == 1  # only the last run's result is shown
    assert panel.result is results[0] and panel.image.image is not None
    assert panel.compute.isEnabled() and not panel.cancel_button.isEnabled()
    assert "cells at" in panel.readout.text()


def test_an_edit_with_auto_on_restarts_without_a_cancelled_state(window, qtbot):
    panel = window.ranking.heatmap
    panel.auto.setChecked(True)
    panel.step.setCurrentIndex(panel.step.findData(0.1))
    panel.start()
    first = panel.job
    doc = window.doc
    doc.apply(lambda v: edits.set_zone_material(v, 0, "plastic"), "zone material")  # a body edit: the map changes
    qtbot.waitUntil(lambda: panel.job is not None and panel.job is not first, timeout=10_000)
    assert not panel.compute.isEnabled() and panel.cancel_button.isEnabled()
    with qtbot.waitSignal(panel.heatmapReady, timeout=120_000) as blocker:
        pass
    assert blocker.args[0].margin_db.shape == panel.result.margin_db.shape
    assert panel.compute.isEnabled() and not panel.cancel_button.isEnabled()
    assert "cancelled" not in panel.readout.text()


def _largest_vehicle(spots: int = 500, wheels: int = 16, angles: int = 600):
    """The pickup sample grown to the file limits (500 spots, 16 wheels; 600 angles per turn keep the
    4.8 million links under core.bounds.MAX_LINKS)."""
    d = vehicle_to_dict(load_vehicle(SAMPLES_DIR / "pickup_dual_rear.json"))
    w0 = d["wheels"][0]
    d["wheels"] = [{**w0, "id": f"A{k // 2}{'LR'[k % 2]}", "x_m": -0.5 * (k // 2), "y_m": 0.8 if k % 2 == 0 else -0.8}
                   for k in range(wheels)]
    rng = np.random.default_rng(7)
    d["spots"] = [{"name": f"s{i}", "x_m": float(rng.uniform(-3.5, 0.5)), "y_m": float(rng.uniform(-0.6, 0.6)),
                   "z_m": float(rng.uniform(0.5, 1.2))} for i in range(spots)]
    d["radio"]["angles_per_turn"] = angles
    return vehicle_from_dict(d)


def test_the_largest_file_opens_at_once_and_scores_in_the_background(window, qtbot):
    v = _largest_vehicle()
    doc = window.doc
    took, gap = responsiveness(lambda: doc.replace(v, None))
    assert took < 5.0  # the scene is built at once (about 0.3 s); the 4.8 million links are not
    # the two views of 16 wheels and 500 spots and the table of 500 rows are drawn, each once, one per
    # turn of the loop (about 0.3-0.9 s longest gap alone on 2 cores, up to 1.4 s while the suite's other
    # worker runs); the fault this guards against held the loop for the whole scoring (tens of seconds)
    assert gap < ACTION_S
    assert doc.scoring and doc.pending.all()
    qtbot.waitUntil(window.work_bar.isVisible, timeout=5_000)
    assert "being computed" in window.readout.text()
    assert window.ranking.table.item(0, 3).text() == "..."
    # no link budget of a spot without levels yet (its worst angles are unknown): the dock says it waits
    panel = window.defence_panel
    panel.set_active(True)  # as when its dock is shown (it analyses only while visible)
    qtbot.waitUntil(lambda: "being scored in the background" in panel.header.text(), timeout=5_000)
    assert panel.task is None and panel.table.rowCount() == 0
    assert len(window.top.markers) <= 1  # one scatter item for 500 spots, a marker for the selected one only
    assert_responsive(lambda k: doc.select(v.spots[7 + k].name), tries=3)
    assert_responsive(window.close)


def test_background_scores_equal_the_engine(window, qtbot):
    v = _largest_vehicle(spots=12, wheels=8, angles=360)  # 34,560 links: scored by a worker
    doc = window.doc
    doc.replace(v, None)
    assert doc.scoring
    with qtbot.waitSignal(doc.scoresReady, timeout=120_000):
        pass
    assert not doc.scoring and not doc.pending.any()
    ref = score_vehicle(v, Scene.from_vehicle(v))
    np.testing.assert_allclose(doc.scores.margin_db, ref.margin_db, rtol=0, atol=1e-9)
    np.testing.assert_array_equal(doc.scores.worst_wheel, ref.worst_wheel)
    assert window.ranking.table.names_in_order() == [ref.names[i] for i in ref.order()]
    assert doc.selected == ref.names[int(ref.order()[0])]  # the best spot, once it is known
    # moving one spot scores that spot only (the others keep their rows)
    name = v.spots[3].name
    doc.apply(lambda vv: edits.move_spot(vv, name, (-1.5, 0.2, 0.8)), "move")
    assert doc.pending.tolist() == [False] * 12 or doc.pending.sum() == 1
    qtbot.waitUntil(lambda: not doc.pending.any(), timeout=60_000)
    ref2 = score_vehicle(doc.vehicle, Scene.from_vehicle(doc.vehicle))
    np.testing.assert_allclose(doc.scores.margin_db, ref2.margin_db, rtol=0, atol=1e-9)


def test_burst_figure_draws_a_bounded_number_of_repeat_markers(window, qtbot):
    """A 1 um tire repeats its frames at about 1.4 million speeds: a few are drawn and the title says so."""
    from app.gui.ranking_panel import MAX_REPEAT_MARKERS

    figs = window.ranking.figures
    qtbot.waitUntil(lambda: not figs.burst_pending(), timeout=30_000)
    speeds = np.linspace(0.0, 44.5, 179)
    r = BurstResult(("FL", "FR"), speeds, np.ones((2, len(speeds))), np.ones(2),
                    (np.arange(1, 1_400_001) * 3.18e-5, np.arange(1, 11) * 4.0))
    assert_responsive(lambda: figs._draw_burst(r))
    items = figs.burst.getPlotItem().items
    assert len(items) < 20
    drawn = sum(len(it.xData) // 2 for it in figs.burst.getPlotItem().listDataItems() if it.opts.get("connect") == "pairs")
    assert drawn <= MAX_REPEAT_MARKERS
    assert f"of {1_400_000 + 10:,} drawn" in figs.burst.getPlotItem().titleLabel.text


# ----- smaller items -----------------------------------------------------------------------------------
def test_delete_wheel_through_the_undo_stack(window, monkeypatch):
    doc = window.doc
    ids = [w.id for w in doc.vehicle.wheels]
    monkeypatch.setattr(dialogs, "ask_wheel", lambda _p, _t, choices: "RR" if "RR" in choices else None)
    window.actions["delete_wheel"].trigger()
    assert [w.id for w in doc.vehicle.wheels] == [i for i in ids if i != "RR"]
    assert doc.scores.wheel_ids == tuple(i for i in ids if i != "RR")
    assert doc.undo_stack.undoText() == "Delete wheel RR"
    window.actions["undo"].trigger()
    assert [w.id for w in doc.vehicle.wheels] == ids and not doc.modified


def test_the_last_wheel_cannot_be_deleted(window, monkeypatch):
    d = vehicle_to_dict(window.doc.vehicle)
    d["wheels"] = d["wheels"][:1]
    window.doc.replace(vehicle_from_dict(d), None)
    told = []
    monkeypatch.setattr(dialogs, "refuse", lambda _p, title, text: told.append(text))
    monkeypatch.setattr(dialogs, "ask_wheel", lambda *a: pytest.fail("no choice is offered for the only wheel"))
    window.actions["delete_wheel"].trigger()
    assert len(window.doc.vehicle.wheels) == 1 and window.doc.undo_stack.count() == 0
    assert told and "only wheel" in told[0]
    with pytest.raises(ValueError, match="only wheel"):
        edits.delete_wheel(window.doc.vehicle, window.doc.vehicle.wheels[0].id)


def test_a_failed_edit_pushes_no_undo_entry(window, monkeypatch):
    doc = window.doc
    messages = []
    doc.statusMessage.connect(messages.append)
    v0 = doc.vehicle

    def broken(_v):
        raise TypeError("a bug in an edit")

    assert doc.apply(broken, "broken edit") is False
    assert doc.undo_stack.count() == 0 and doc.vehicle is v0
    assert "Edit refused (broken edit)" in messages[-1]

    # validation passes but preparing the scene fails: refused before anything is pushed
    from app.gui import document

    def no_scene(_v, *a, **k):
        raise ValueError("no scene for this vehicle")

    monkeypatch.setattr(document.Scene, "from_vehicle", no_scene)
    assert doc.apply(lambda v: edits.set_radio(v, "frequency_hz", 434.0e6), "Frequency") is False
    assert doc.undo_stack.count() == 0 and doc.vehicle is v0
    assert "no scene for this vehicle" in messages[-1]
    monkeypatch.undo()

    # a move to where a landmark-based spot already is changes nothing: no entry either
    spot = next(s for s in v0.spots if s.x_from != "origin" or s.z_from != "ground")
    assert doc.apply(lambda v: edits.move_spot(v, spot.name, v.resolve_spot(spot)), "Move spot") is True
    assert doc.undo_stack.count() == 0 and doc.vehicle is v0


def test_save_error_names_the_chosen_file_not_the_temporary_one(window, tmp_path, monkeypatch):
    shown = []
    monkeypatch.setattr(dialogs.QMessageBox, "critical", lambda _p, title, text, *a: shown.append((title, text)))
    target = tmp_path / "no such folder" / "car.json"
    assert window.save_to(target) is False
    title, text = shown[0]
    assert title == "Cannot save the vehicle file"
    assert f"File: {target}" in text and ".tmp" not in text
    assert "does not exist" in text or "No such file or directory" in text
    assert window.doc.path == DEFAULT_SAMPLE


# ----- recovery per window -----------------------------------------------------------------------------
def test_each_window_keeps_its_own_copy(qtbot, settings, monkeypatch):
    a = new_window(qtbot, settings)
    b = new_window(qtbot, settings, SAMPLES_DIR / "suv.json")
    name = a.doc.vehicle.spots[0].name
    a.doc.apply(lambda v: edits.move_spot(v, name, (-1.2, 0.1, 0.5)), "move")
    qtbot.waitUntil(a.recovery.exists, timeout=10_000)  # debounced: written a couple of seconds later
    saved = json.loads(a.recovery.path.read_text())
    assert saved["original_path"] == str(DEFAULT_SAMPLE) and saved["pid"] == os.getpid() and saved["saved_at"]
    assert vehicle_from_dict(saved["vehicle"]) == a.doc.vehicle

    monkeypatch.setattr(dialogs, "ask_recover", lambda *a: pytest.fail("a copy of an open window was offered"))
    assert b.offer_recovery() is False  # a's window is open: its copy is not an orphan
    b.doc.apply(lambda v: edits.move_spot(v, b.doc.vehicle.spots[0].name, (-1.0, 0.0, 0.6)), "move")
    qtbot.waitUntil(b.recovery.exists, timeout=10_000)
    assert b.recovery.path != a.recovery.path
    b.doc.undo_stack.setClean()  # b closes cleanly (as after a save): only its own copy goes
    b.close()
    assert not b.recovery.path.exists() and a.recovery.path.exists()
    a_copy = a.recovery.path
    a.doc.undo_stack.setClean()
    a.close()
    assert not a_copy.exists() and not list(recovery_dir(settings).glob("*.lock"))


_CHILD = r"""
import sys, time
from PySide6.QtCore import QSettings, QTimer
from PySide6.QtWidgets import QApplication
app = QApplication([])
from app.gui import edits
from app.gui.document import Document
from app.gui.window import MainWindow
from core.vehicle import load_vehicle
ini, path = sys.argv[1], sys.argv[2]
win = MainWindow(Document(load_vehicle(path), path), settings=QSettings(ini, QSettings.Format.IniFormat))
win.ranking.heatmap.auto.setChecked(False)
win.show()
def edit():
    name = win.doc.vehicle.spots[0].name
    win.doc.apply(lambda v: edits.move_spot(v, name, (-1.234, 0.111, 0.555)), "move")
    print("edited", flush=True)
QTimer.singleShot(0, edit)
app.exec()
"""


def test_a_killed_window_is_offered_and_another_windows_close_leaves_it(qtbot, settings, tmp_path, monkeypatch):
    folder = recovery_dir(settings)
    ini = tmp_path / "child.ini"
    child_settings = QSettings(str(ini), QSettings.Format.IniFormat)
    child_settings.setValue("recovery_folder", str(folder))
    child_settings.sync()
    path = SAMPLES_DIR / "hatchback.json"
    env = {**os.environ, "QT_QPA_PLATFORM": "offscreen"}
    child = subprocess.Popen([sys.executable, "-c", _CHILD, str(ini), str(path)], cwd=ROOT, env=env,
                             stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True)
    try:
        other = new_window(qtbot, settings)  # a window of this process, alive all along, with its own copy
        other.doc.apply(lambda v: edits.move_spot(v, other.doc.vehicle.spots[0].name, (-1.3, 0.0, 0.5)), "move")
        assert child.stdout.readline().strip() == "edited"
        edited_at = time.monotonic()
        qtbot.waitUntil(other.recovery.exists, timeout=10_000)
        qtbot.wait(int(1000 * max(0.0, 5.0 - (time.monotonic() - edited_at))))  # kill -9, 5 s after its edit
    finally:
        child.kill()
        child.wait(30)
        child.stdout.close()
    assert child.returncode == -9

    asked = []
    monkeypatch.setattr(dialogs, "ask_recover", lambda _p, orphans: (asked.append(list(orphans)), ("later", []))[1])
    first = new_window(qtbot, settings, autosave=False)
    assert first.offer_recovery() is False
    assert len(asked) == 1 and len(asked[0]) == 1  # the killed window's copy only, not the open window's
    orphan = asked[0][0]
    assert orphan.title == "hatchback.json" and orphan.original_path == str(path) and orphan.saved_at

    other.doc.undo_stack.setClean()
    other.close()  # a clean close of another window leaves the orphan alone
    assert orphan.path.exists()

    monkeypatch.setattr(dialogs, "ask_recover", lambda _p, orphans: ("open", list(range(len(orphans)))))
    again = new_window(qtbot, settings)
    assert again.offer_recovery() is True
    spot = again.doc.vehicle.spots[0]
    assert again.doc.vehicle.resolve_spot(spot) == pytest.approx((-1.234, 0.111, 0.555), abs=1e-9)
    assert again.doc.modified and again.doc.path == path
    assert not orphan.path.exists() and again.recovery.exists()
    assert find_orphans(folder) == []


# ----- no repaint loops --------------------------------------------------------------------------------
class _PaintCounter(QObject):
    def __init__(self):
        super().__init__()
        self.last = time.monotonic()
        self.count = 0

    def eventFilter(self, _obj, ev):
        if ev.type() == QEvent.Type.Paint:
            self.last = time.monotonic()
            self.count += 1
        return False


SIZES = ((1366, 768), (1600, 1000), (1920, 1080))


@pytest.mark.parametrize("sample", sorted(p.name for p in SAMPLES_DIR.glob("*.json")))
def test_every_sample_goes_idle_at_three_sizes(qtbot, settings, sample):
    """A hang detector, not a timing (issue 14): the sample opens in three windows at once, at 1366x768,
    1600x1000 and 1920x1080, and within 30 s no view of any of them repaints for 2 s. The pickup's linked
    top and side views once swapped ranges for ever at 1600x1000."""
    import pyqtgraph as pg

    counters = []
    for size in SIZES:
        win = new_window(qtbot, settings, SAMPLES_DIR / sample, autosave=False)
        win.resize(*size)
        counter = _PaintCounter()
        for view in win.findChildren(pg.GraphicsView):
            view.viewport().installEventFilter(counter)
        counters.append(counter)
    t0 = time.monotonic()
    qtbot.waitUntil(lambda: all(time.monotonic() - c.last > 2.0 for c in counters), timeout=30_000)
    assert all(c.count > 0 for c in counters)  # each did paint, then stopped
    assert time.monotonic() - t0 < 30.0


# ----- other workers -----------------------------------------------------------------------------------
def test_report_export_keeps_the_window_usable(window, qtbot, tmp_path, monkeypatch):
    from app.gui import report_export

    out = tmp_path / "sedan.pdf"
    monkeypatch.setattr(report_export.QFileDialog, "getSaveFileName", lambda *a, **k: (str(out), ""))
    job = None

    def start():
        nonlocal job
        job = report_export.export_report(window, DEFAULT_SAMPLE, step_m=0.2)

    def select(k):
        window.doc.select(window.doc.vehicle.spots[k % 10].name)

    idle = idle_gap(lambda k: select(5 + k))
    assert_responsive(start, idle_s=idle)
    with qtbot.waitSignal(job.written, timeout=180_000):
        assert_responsive(lambda k: select(2 + k), tries=3, idle_s=idle)
    assert out.read_bytes().startswith(b"%PDF")


def test_compare_window_closes_during_its_search(qtbot):
    from app.gui.compare_window import CompareWindow

    w = CompareWindow()
    qtbot.addWidget(w)
    w.add_paths([str(SAMPLES_DIR / n) for n in ("sedan.json", "hatchback.json", "suv.json")])
    w.start_search()
    assert w._worker is not None
    assert_responsive(w.close)


def test_dragging_a_spot_of_a_heavy_file_scores_in_a_worker(window, qtbot):
    """One spot of 16 wheels x 3,600 angles is 57,600 links: the live margin comes from a worker,
    only the latest mouse position is scored and shown."""
    v = _largest_vehicle(spots=2, angles=3600)
    doc = window.doc
    doc.replace(v, None)
    qtbot.wait(300)  # the views redraw the new body
    name = v.spots[0].name
    shown = []
    doc.liveScore.connect(lambda n, sc: shown.append(tuple(sc.positions[0])))
    moves = []

    def drag(k):
        batch = [(-1.0 - 0.05 * j, 0.1 + 0.1 * k, 0.8) for j in range(6)]
        moves.extend(batch)
        for p in batch:
            assert doc.live_move(name, p) is None  # returns at once

    assert_responsive(drag, tries=3)
    qtbot.waitUntil(lambda: bool(shown) and shown[-1] == moves[-1], timeout=120_000)
    assert len(shown) < len(moves)  # positions the mouse left before they were scored are skipped
    ref = doc.score_at(name, moves[-1])
    assert doc.live[1].margin_db[0] == pytest.approx(float(ref.margin_db[0]), abs=1e-9)

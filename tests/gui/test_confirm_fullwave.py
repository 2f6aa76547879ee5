"""Tools > Confirm with full-wave (issue 16, deliverable 3): the GUI wiring around core.fullwave.confirm.

No NEC-2 solve runs here (minutes per body): the solve is replaced at the core boundary
(``core.fullwave.confirm.run_task``) by a stand-in that returns the fast engine's own free-space levels
lowered by a known offset per spot, and the Dask cluster is an in-process LocalCluster (threads, so
the stand-in is seen by the workers). Everything else is the real path: the menu action, the
options dialog, ``confirm`` on Dask in a worker thread, progress, cancel, the results window.
The expected numbers follow from the stand-in: the full-wave - fast difference of spot i is exactly
-OFFSETS_DB[i] (a constant shift moves the median of every wheel by the same amount).
"""

from __future__ import annotations

import threading

import numpy as np
import pytest
from PySide6.QtCore import QThread, QTimer

pytest.importorskip("distributed")

from app.gui import confirm_window as cw
from core.fullwave import confirm as cf
from core.fullwave import vehicle_reference as vr
from core.vehicle import vehicle_from_dict

OFFSETS_DB = np.array([3.0, 5.0, 8.0, 1.0, 2.0, 4.0, 6.0, 7.0, 9.0, 10.0])
GATE = threading.Event()  # the stand-in waits on it while BLOCK is set
BLOCK = threading.Event()
CALLS: list[float] = []
CANCELS: list[int] = []  # client.cancel calls (futures each)


def fake_run_task(task: dict, cache_dir=None) -> dict:
    """Stand-in of run_task: the engine's free-space levels - OFFSETS_DB[spot], same return format."""
    CALLS.append(task["freq_hz"])
    if BLOCK.is_set():
        GATE.wait(30.0)
    v = vehicle_from_dict(task["vehicle"])
    sp = task["spots"]
    a = task["setup"]["angles_per_turn"]
    spots = (sp["names"], np.asarray(sp["positions_m"]), np.asarray(sp["axes"]))
    lv = vr.engine_levels(v, spots, a) - OFFSETS_DB[: len(sp["names"]), None, None]
    return {"levels_dbm": lv.tolist(), "power_ratio": [1.0] * len(v.wheels), "names": sp["names"],
            "wheel_ids": [w.id for w in v.wheels], "angles_deg": (np.arange(a) * 360.0 / a).tolist(),
            "freq_hz": task["freq_hz"], "segments": 4321, "solve_s": 0.5,
            "notes": ["stand-in solver of the GUI test"], "key": cf.task_key(task)}


def _in_process_client(workers, scheduler, timeout_s):
    from distributed import Client, LocalCluster

    cluster = LocalCluster(n_workers=max(1, int(workers or 1)), threads_per_worker=1, processes=False,
                           dashboard_address=":0")
    client = Client(cluster)
    real_cancel = client.cancel

    def cancel(futures, *a, **k):
        CANCELS.append(len(futures))
        return real_cancel(futures, *a, **k)

    client.cancel = cancel
    return client, cluster


@pytest.fixture
def stand_in(monkeypatch, tmp_path):
    """The solve replaced at the core boundary, an in-process cluster, a fresh cache; records confirm's thread."""
    monkeypatch.setenv("WHEELREACH_CACHE", str(tmp_path / "cache"))
    monkeypatch.setattr(cf, "run_task", fake_run_task)
    monkeypatch.setattr(cf, "_client", _in_process_client)
    threads, returned = [], []
    real = cf.confirm

    def recording_confirm(*args, **kwargs):
        threads.append(QThread.currentThread())
        out = real(*args, **kwargs)
        returned.append(out)
        return out

    monkeypatch.setattr(cf, "confirm", recording_confirm)
    CALLS.clear()
    CANCELS.clear()
    BLOCK.clear()
    GATE.clear()
    yield {"threads": threads, "returned": returned, "cache": tmp_path / "cache" / "fullwave"}
    GATE.set()


@pytest.fixture
def errors(monkeypatch):
    shown = []
    monkeypatch.setattr(cw.QMessageBox, "critical", lambda parent, title, text: shown.append((title, text)))
    return shown


def _start_from_menu(window, qtbot, spots=3, freqs=2, workers=1):
    """Trigger the menu action and fill in the options dialog; returns the job."""
    def fill():
        dlg = window.confirm_dialog
        assert dlg.spots.value() == 3 and dlg.frequencies.value() == 5 and dlg.workers.value() == 1  # defaults
        dlg.spots.setValue(spots)
        dlg.frequencies.setValue(freqs)
        dlg.workers.setValue(workers)
        dlg.accept()

    QTimer.singleShot(0, fill)
    window.actions["confirm_fullwave"].trigger()
    return window.fullwave_job


def test_menu_action_runs_in_a_worker_with_progress_and_shows_the_numbers_core_returned(window, qtbot, stand_in,
                                                                                        errors):
    act = window.actions["confirm_fullwave"]
    assert act.shortcut().toString() == "Ctrl+Shift+F" and "full-wave" in act.toolTip()
    assert act in window.menuBar().actions()[[a.text() for a in window.menuBar().actions()].index("&Tools")].menu().actions()
    seen = []
    job = _start_from_menu(window, qtbot, spots=3, freqs=2)
    job.task.progress.connect(lambda _t, d, n: seen.append((d, n, window.fullwave_bar.value(), window.fullwave_bar.maximum())))
    assert window.fullwave_bar.isVisible() and window.fullwave_cancel.isVisible()
    with qtbot.waitSignal(job.finished, timeout=60000) as sig:
        pass
    # confirm ran in the task's thread, not in the GUI thread
    assert stand_in["threads"] == [job.task] and job.task is not QThread.currentThread()
    assert len(CALLS) == 2  # one run per frequency
    assert seen and seen[-1][:2] == (2, 2)  # progress reached 2 of 2 runs
    assert not window.fullwave_bar.isVisible() and not window.fullwave_cancel.isVisible()
    assert errors == []
    conf = sig.args[0]["confirmation"]
    assert conf is stand_in["returned"][0][0]
    assert conf.freq_hz.size == 2 and conf.segments == 4321
    assert len(list(stand_in["cache"].glob("task_*.json"))) == 2  # core cached both runs
    # the three best spots of the fast ranking in free space (core.fullwave.confirm.select_spots)
    assert conf.spots == cf.select_spots(window.doc.vehicle, 3)[0]
    res = job.results_window
    assert res.isVisible()
    t = res.table
    assert t.rowCount() == 3
    sec, m = conf.section(), conf.margins(window.doc.vehicle)
    for i, sp in enumerate(sec["spots"]):
        assert t.item(i, 0).text() == sp["name"]
        assert float(t.item(i, 1).text()) == pytest.approx(sp["fast_dbm"], abs=0.051)
        assert float(t.item(i, 2).text()) == pytest.approx(sp["fullwave_dbm"], abs=0.051)
        # the stand-in lowered spot i by OFFSETS_DB[i]: the difference column shows exactly that
        assert float(t.item(i, 3).text()) == pytest.approx(-OFFSETS_DB[i], abs=0.051)
        assert float(t.item(i, 5).text()) == pytest.approx(m["fast"][i], abs=0.051)
        assert float(t.item(i, 6).text()) == pytest.approx(m["fullwave"][i], abs=0.051)
        # the margin is worst case - sensitivity - required: the same shift as the level
        assert m["fullwave"][i] - m["fast"][i] == pytest.approx(-OFFSETS_DB[i], abs=1e-6)
        assert t.item(i, 7).text() == ("NO" if (m["fast"][i] >= 0) != (m["fullwave"][i] >= 0)
                                       else ("yes, both pass" if m["fast"][i] >= 0 else "yes, both fail"))
    # agreement: offsets 3, 5, 8 dB -> mean offset -5.33 dB; ranks follow the levels
    assert sec["agreement"]["offset_db"] == pytest.approx(-np.mean(OFFSETS_DB[:3]), abs=1e-3)
    assert f"{sec['agreement']['offset_db']:+.1f} dB" in res.agreement.text()
    # the setup is stated: mesh, frequencies, wheel model, the duration note
    text = res.centralWidget().findChildren(cw.QLabel)
    joined = " ".join(lab.text() for lab in text)
    assert "lambda/8 body" in joined and "4321 segments" in joined
    assert f"wheel model: {window.doc.scene.wheel_model_label}" in joined
    assert "minutes per body" in joined and "confirm" in joined.lower()
    res.close()
    # the ranking table shows the full-wave margin beside the fast one for the confirmed spots
    table = window.ranking.table
    col = table.FULLWAVE_COLUMN
    assert not table.isColumnHidden(col)
    shown = {table.item(r, 2).text(): table.item(r, col).text() for r in range(table.rowCount())}
    for i, s in enumerate(conf.spots):
        assert float(shown[s]) == pytest.approx(m["fullwave"][i], abs=0.051)
    assert all(shown[s] == "" for s in shown if s not in conf.spots)
    # an edit makes it another vehicle: the column goes; undo brings it back
    window.doc.apply(lambda v: v.model_copy(update={"radio": v.radio.model_copy(update={"required_margin_db": 7.0})}),
                     "Required margin 7 dB")
    qtbot.waitUntil(lambda: table.isColumnHidden(col), timeout=10000)
    window.doc.undo_stack.undo()
    qtbot.waitUntil(lambda: not table.isColumnHidden(col), timeout=10000)


def test_cancel_while_a_run_is_going_stops_at_once_and_the_worker_ends(window, qtbot, stand_in, errors):
    BLOCK.set()  # the stand-in hangs as a long solve would
    job = _start_from_menu(window, qtbot, spots=2, freqs=2)
    qtbot.waitUntil(lambda: len(CALLS) >= 1, timeout=30000)  # a run is going on a Dask worker
    stopped = []
    job.stopped.connect(stopped.append)
    window.fullwave_cancel.click()
    assert stopped == ["cancelled"] and not job.running  # the window is free at once
    assert not window.fullwave_bar.isVisible()
    # core notices the request while the solve still runs (it polls) and cancels the Dask tasks; the
    # in-process test cluster then waits for its blocked thread (worker processes would be ended)
    qtbot.waitUntil(lambda: CANCELS == [2], timeout=10000)
    assert not GATE.is_set() and not job.task.isFinished()
    GATE.set()
    qtbot.waitUntil(job.task.isFinished, timeout=30000)
    assert not hasattr(job, "results_window") and errors == []
    # a new run can start after a cancel
    BLOCK.clear()
    job2 = _start_from_menu(window, qtbot, spots=2, freqs=1)
    with qtbot.waitSignal(job2.finished, timeout=60000):
        pass
    job2.results_window.close()


def test_errors_show_one_clear_dialog(window, qtbot, stand_in, errors, monkeypatch):
    def broken(task, cache_dir=None):
        raise ValueError("the wire grid has a segment shorter than its radius")

    monkeypatch.setattr(cf, "run_task", broken)
    job = _start_from_menu(window, qtbot, spots=1, freqs=1)
    with qtbot.waitSignal(job.stopped, timeout=60000):
        pass
    assert len(errors) == 1 and errors[0][0] == "Confirm with full-wave"
    assert "ValueError: the wire grid has a segment shorter than its radius" in errors[0][1]
    assert not window.fullwave_bar.isVisible() and not hasattr(job, "results_window")
    # without the fullwave extra: the install hint, no dialog of options, no run
    monkeypatch.setattr(cf, "missing_extra", lambda: "full-wave confirmation needs PyNEC: install the fullwave extra")
    window.fullwave_job = None
    window.actions["confirm_fullwave"].trigger()
    assert len(errors) == 2 and "install the fullwave extra" in errors[1][1] and window.fullwave_job is None

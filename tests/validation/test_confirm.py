"""``wheelreach confirm`` and core.fullwave.confirm: Dask runs equal the serial run, the cache, a
worker killed mid-run, and the error paths (issue 16).

The body is the small box of tests/validation/fullwave_vehicles.py (about 2,000 segments, a few
seconds per NEC-2 solve) at two frequencies, no belt, empty cabin, so a run takes seconds.
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("PyNEC")
pytest.importorskip("distributed")

sys.path.insert(0, str(Path(__file__).resolve().parent))
from fullwave_vehicles import small_box

from app.cli.main import main
from core.fullwave import confirm as cf
from core.fullwave import vehicle_reference as vr
from core.vehicle import save_vehicle

SETUP = vr.ReferenceSetup(belt=False, contents=None, n_frequencies=2)


def _die_once(task, cache_dir):
    """Task function that kills its worker process the first time it runs (then runs normally)."""
    marker = Path(cache_dir) / "worker-killed-once"
    if not marker.exists():
        marker.parent.mkdir(parents=True, exist_ok=True)
        marker.write_text("killed")
        os._exit(1)  # the worker process dies mid-run, without a Python exception
    return cf.run_task(task, cache_dir)


@pytest.fixture(scope="module")
def serial_result(tmp_path_factory):
    return cf.confirm([small_box()], spots=None, n_frequencies=2, setup=SETUP, serial=True,
                      cache_dir=tmp_path_factory.mktemp("serial"), use_cache=False)[0]


@pytest.mark.nec
def test_two_local_workers_give_the_serial_numbers_and_the_second_call_is_cached(serial_result, tmp_path):
    r = cf.confirm([small_box()], spots=None, n_frequencies=2, setup=SETUP, workers=2, cache_dir=tmp_path)[0]
    assert r.cached == 0
    assert r.levels_dbm.shape == (2, 3, 2, 36) and np.isfinite(r.levels_dbm).all()
    # the same solver on the same inputs: identical numbers, whichever process ran them
    np.testing.assert_allclose(r.levels_dbm, serial_result.levels_dbm, rtol=0, atol=1e-9)
    assert len(list(tmp_path.glob("task_*.json"))) == 2
    calls = []
    again = cf.confirm([small_box()], spots=None, n_frequencies=2, setup=SETUP, workers=2, cache_dir=tmp_path,
                       task_function=lambda t, c: calls.append(t))[0]
    assert again.cached == 2 and calls == []  # served from the cache: no task ran, no cluster started
    np.testing.assert_array_equal(again.levels_dbm, r.levels_dbm)
    # the confirmation section: every spot, the agreement over 3 spots, the caution
    sec = r.section()
    assert [s["name"] for s in sec["spots"]] == ["centre", "by the window", "front"]
    assert set(sec["agreement"]) >= {"rho", "offset_db", "rms_db"} and "confirm" in sec["caution"]
    # a changed input (one more occupant) is a different cache key
    other = vr.ReferenceSetup(belt=False, contents=None, n_frequencies=2, angles_per_turn=18)
    spots = cf.select_spots(small_box())
    assert cf.task_key(cf.make_task(small_box(), 315e6, SETUP, spots)) != cf.task_key(
        cf.make_task(small_box(), 315e6, other, spots))


@pytest.mark.nec
def test_a_worker_killed_mid_run_is_retried_and_the_result_is_complete(serial_result, tmp_path):
    import cloudpickle

    cloudpickle.register_pickle_by_value(sys.modules[__name__])
    try:
        r = cf.confirm([small_box()], spots=None, n_frequencies=2, setup=SETUP, workers=2, cache_dir=tmp_path,
                       task_function=_die_once)[0]
    finally:
        cloudpickle.unregister_pickle_by_value(sys.modules[__name__])
    assert (tmp_path / "worker-killed-once").exists()  # a worker really died
    assert np.isfinite(r.levels_dbm).all()
    np.testing.assert_allclose(r.levels_dbm, serial_result.levels_dbm, rtol=0, atol=1e-9)


@pytest.mark.nec
def test_bad_scheduler_address_is_one_clear_line_and_exit_1(tmp_path, monkeypatch, capsys):
    monkeypatch.setenv("WHEELREACH_CACHE", str(tmp_path / "cache"))
    f = tmp_path / "box.json"
    save_vehicle(small_box(), f)
    code = main(["confirm", str(f), "--scheduler", "tcp://127.0.0.1:9", "--quiet", "--frequencies", "1"])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 1
    assert len(err) == 1 and err[0].startswith("error: cannot reach the Dask scheduler at tcp://127.0.0.1:9")


@pytest.mark.nec
def test_cancel_stops_after_the_running_task_and_keeps_it_cached(tmp_path):
    from core.scoring import Cancelled

    with pytest.raises(Cancelled):
        cf.confirm([small_box()], spots=["centre"], n_frequencies=2, setup=SETUP, serial=True, cache_dir=tmp_path,
                   cancel=lambda: True)
    assert len(list(tmp_path.glob("task_*.json"))) == 1  # the finished task is kept, the second never ran

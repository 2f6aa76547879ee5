"""Full-wave confirmation of the best spots: the whole-vehicle reference run on Dask, cached.

:func:`confirm` takes one or more vehicles (a platform), picks the spots to confirm (the fast
ranking's best N, or named spots), and runs one task per (body, frequency) -- build the wire grid,
one NEC-2 matrix, one excitation per spot (:func:`core.fullwave.vehicle_reference.solve_frequency`)
-- on a dask.distributed cluster: a LocalCluster of ``workers`` processes by default, or the
scheduler at ``scheduler`` (any machine that has the fullwave extra installed). Each task's result
is cached on disk under :func:`fullwave_cache_dir` by a hash of everything that affects it (the
vehicle, the spots, the frequency, the reference setup and the model version), so a repeated call
costs nothing. A task whose worker dies is rescheduled by Dask itself (the scheduler's
``allowed-failures``) and the submission asks for ``retries`` more on errors.

The result per body (:class:`Confirmation`) holds the full-wave levels per spot, wheel, angle and
frequency, the frequency-averaged statistics, the same statistics from the fast engine (free space,
no road: the reference has no ground), their agreement (Spearman rho, mean offset, RMS after the
offset; :func:`core.fullwave.vehicle_reference.agreement`), and :meth:`Confirmation.section`, the
confirmation section for the placement report (data) and :meth:`Confirmation.text` (plain text).

Dask (dask[distributed]) and PyNEC come with the ``fullwave`` extra; :func:`missing_extra` says
what is missing.
"""

from __future__ import annotations

import hashlib
import importlib.util
import json
import os
import time
from collections.abc import Callable
from dataclasses import asdict, dataclass, field
from pathlib import Path

import numpy as np

from core.fullwave import vehicle_reference as vr

__all__ = [
    "CONVERGED_STATISTIC",
    "MODEL_VERSION",
    "Confirmation",
    "SchedulerUnreachable",
    "confirm",
    "fullwave_cache_dir",
    "missing_extra",
    "run_task",
    "select_spots",
    "task_key",
]

#: Version of the whole-vehicle model (grid rules, normalisation); part of every cache key.
MODEL_VERSION = "vehicle-grid-1"
#: The statistic over the turn compared with the fast ranking by default (see docs/VALIDATION.md,
#: full-wave reference: the one that is stable against mesh and frequency).
CONVERGED_STATISTIC = "median"
CAUTION = ("Full-wave confirmation of a simplified 2.5-D body (wire grid, NEC-2): approximate; confirm by "
           "detailed simulation of the real body and measurement on the vehicle.")


class SchedulerUnreachable(RuntimeError):
    """The Dask scheduler address given cannot be reached."""


def missing_extra() -> str | None:
    """None when PyNEC and dask.distributed are importable, else the one-line install hint."""
    missing = [name for name, mod in (("PyNEC", "PyNEC"), ("dask[distributed]", "distributed"))
               if importlib.util.find_spec(mod) is None]
    if not missing:
        return None
    return (f"full-wave confirmation needs {' and '.join(missing)}: install the fullwave extra "
            "(pip install 'wheelreach[fullwave]')")


def fullwave_cache_dir() -> Path:
    """Cache of confirmation results: $WHEELREACH_CACHE/fullwave, else the user cache dir's wheelreach/fullwave."""
    env = os.environ.get("WHEELREACH_CACHE")
    if env:
        return Path(env) / "fullwave"
    from core.wheel_patterns import user_cache_dir

    return user_cache_dir().parent / "fullwave"


# --------------------------------------------------------------------------------------------
# Tasks
# --------------------------------------------------------------------------------------------


def _setup_to_dict(setup: vr.ReferenceSetup) -> dict:
    return asdict(setup)


def _setup_from_dict(d: dict) -> vr.ReferenceSetup:
    from core.fullwave.vehicle_grid import ContentsSpec

    d = dict(d)
    c = d.pop("contents")
    contents = None if c is None else ContentsSpec(**{k: tuple(v) if isinstance(v, list) else v for k, v in c.items()})
    return vr.ReferenceSetup(contents=contents, **d)


def make_task(vehicle, freq_hz: float, setup: vr.ReferenceSetup, spots) -> dict:
    """A self-contained, JSON-able task: one body at one frequency for the given spots."""
    from core.vehicle import vehicle_to_dict

    names, pos, axes = spots
    return {"vehicle": vehicle_to_dict(vehicle), "freq_hz": float(freq_hz), "setup": _setup_to_dict(setup),
            "spots": {"names": list(names), "positions_m": np.round(np.asarray(pos, float), 6).tolist(),
                      "axes": np.round(np.asarray(axes, float), 9).tolist()},
            "model_version": MODEL_VERSION}


def task_key(task: dict) -> str:
    """Hash of everything that affects a task's result (vehicle, spots, frequency, setup, model version)."""
    return hashlib.sha256(json.dumps(task, sort_keys=True, default=str).encode()).hexdigest()[:24]


def run_task(task: dict, cache_dir: str | None = None) -> dict:
    """Solve one task (on a worker); returns plain arrays and numbers (picklable, JSON-able)."""
    from core.vehicle import vehicle_from_dict

    v = vehicle_from_dict(task["vehicle"])
    sp = task["spots"]
    res = vr.solve_frequency(v, task["freq_hz"], _setup_from_dict(task["setup"]),
                             spots=(sp["names"], np.asarray(sp["positions_m"]), np.asarray(sp["axes"])),
                             cache_dir=None if cache_dir is None else Path(cache_dir) / "wheel_patterns")
    return {"levels_dbm": np.asarray(res["levels_dbm"]).tolist(), "power_ratio": res["power_ratio"].tolist(),
            "names": res["names"], "wheel_ids": res["wheel_ids"], "angles_deg": res["angles_deg"].tolist(),
            "freq_hz": res["freq_hz"], "segments": res["segments"], "solve_s": res["solve_s"],
            "notes": res["notes"], "key": task_key(task)}


def _cache_read(folder: Path, key: str) -> dict | None:
    f = folder / f"task_{key}.json"
    if not f.exists():
        return None
    try:
        return json.loads(f.read_text())
    except (OSError, ValueError):
        return None  # a damaged entry is recomputed


def _cache_write(folder: Path, key: str, result: dict) -> None:
    folder.mkdir(parents=True, exist_ok=True)
    f = folder / f"task_{key}.json"
    tmp = f.with_name(f.name + f".{os.getpid()}.tmp")
    tmp.write_text(json.dumps(result))
    os.replace(tmp, f)


# --------------------------------------------------------------------------------------------
# Spots and the engine's side
# --------------------------------------------------------------------------------------------


def select_spots(vehicle, spots=None, angles_per_turn: int = 36):
    """(names, positions (S, 3), axes (S, 3)) to confirm.

    ``spots``: None (every spot of the file), an int N (the N best of the fast ranking, free space),
    or a sequence of spot names (ValueError naming an unknown one).
    """
    from core.scoring import Scene, score_spots, vehicle_spot_arrays

    names, pos, axes = vehicle_spot_arrays(vehicle)
    if not names:
        raise ValueError(f"{vehicle.name}: the file has no receiver spots")
    if spots is None:
        idx = list(range(len(names)))
    elif isinstance(spots, int):
        if spots < 1:
            raise ValueError("--spots: the number of spots must be at least 1")
        radio = vehicle.radio.model_copy(update={"ground_reflection": False})
        scene = Scene.from_vehicle(vehicle.model_copy(update={"radio": radio}))
        idx = [int(i) for i in score_spots(scene, pos, axes, names).order()[:spots]]
    else:
        unknown = [s for s in spots if s not in names]
        if unknown:
            raise ValueError(f"{vehicle.name}: no spot named {unknown[0]!r} (spots: {', '.join(names)})")
        idx = [names.index(s) for s in spots]
    return [names[i] for i in idx], pos[idx], axes[idx]


# --------------------------------------------------------------------------------------------
# The result
# --------------------------------------------------------------------------------------------


@dataclass
class Confirmation:
    """Full-wave confirmation of one body (levels dBm; statistics per spot = worst wheel)."""

    body: str
    file: str
    setup: vr.ReferenceSetup
    freq_hz: np.ndarray  # (F,)
    spots: list[str]
    positions_m: np.ndarray  # (S, 3)
    wheel_ids: list[str]
    angles_deg: np.ndarray  # (A,)
    levels_dbm: np.ndarray  # (F, S, W, A)
    engine_levels_dbm: np.ndarray  # (S, W, A), free space
    segments: int
    solve_s: float  # solver time summed over the tasks (cached tasks: their original time)
    cached: int  # tasks served from the cache
    notes: list[str] = field(default_factory=list)

    @property
    def averaged_dbm(self) -> np.ndarray:
        """Frequency-averaged level (S, W, A), dBm."""
        return vr.frequency_average_db(self.levels_dbm)

    def statistics(self) -> dict:
        """{"min"/"p10"/"median": {"reference": (S,), "engine": (S,), "worst_wheel": [ids]}} (worst wheel)."""
        ref = vr.turn_statistics(self.averaged_dbm, 10.0)
        eng = vr.turn_statistics(self.engine_levels_dbm, 10.0)
        return {k: {"reference": ref[k]["spot"], "engine": eng[k]["spot"],
                    "worst_wheel": [self.wheel_ids[i] for i in np.argmin(ref[k]["wheel"], axis=1)]}
                for k in ref}

    def agreement(self, statistic: str = CONVERGED_STATISTIC) -> dict:
        """Spearman rho, mean offset (full-wave - engine), RMS / max after the offset, over the spots."""
        st = self.statistics()[statistic]
        return vr.agreement(st["engine"], st["reference"])

    def margins(self, vehicle) -> dict:
        """Spot margins, dB, of the full-wave (frequency-averaged) and the fast (free space) levels by the
        engine's own rule (core.scoring.score_levels: the worst wheel's worst case over the turn -
        sensitivity - required margin), with ``vehicle``'s receiver; also the two worst wheels' ids and the
        scene's wheel model label (the fast engine's wheel model)."""
        from core.scoring import score_levels

        scene = vr.free_space_scene(vehicle, len(self.angles_deg))
        fw = score_levels(scene, self.averaged_dbm, self.spots)
        fa = score_levels(scene, self.engine_levels_dbm, self.spots)
        return {"fullwave": fw.margin_db, "fast": fa.margin_db,
                "fullwave_worst_wheel": [self.wheel_ids[i] for i in fw.worst_wheel],
                "fast_worst_wheel": [self.wheel_ids[i] for i in fa.worst_wheel],
                "sensitivity_dbm": scene.sensitivity_dbm, "required_margin_db": scene.required_margin_db,
                "wheel_model": scene.wheel_model_label}

    def section(self, statistic: str = CONVERGED_STATISTIC) -> dict:
        """The confirmation section for the placement report (plain data)."""
        st = self.statistics()
        return {
            "title": "Full-wave confirmation",
            "body": self.body,
            "file": self.file,
            "method": ("NEC-2 (method of moments) on a wire grid of the file's 2.5-D body, by reciprocity; "
                       "free space, no road"),
            "setup": self.setup.label(),
            "frequencies_mhz": [round(f / 1e6, 4) for f in self.freq_hz],
            "statistic": statistic,
            "spots": [{"name": s, "position_m": [round(float(c), 4) for c in self.positions_m[i]],
                       "fullwave_dbm": round(float(st[statistic]["reference"][i]), 2),
                       "fast_dbm": round(float(st[statistic]["engine"][i]), 2),
                       "worst_wheel": st[statistic]["worst_wheel"][i],
                       "fullwave_min_dbm": round(float(st["min"]["reference"][i]), 2),
                       "fullwave_p10_dbm": round(float(st["p10"]["reference"][i]), 2)}
                      for i, s in enumerate(self.spots)],
            "agreement": {k: (round(v, 3) if isinstance(v, float) else v) for k, v in self.agreement(statistic).items()},
            "segments": self.segments,
            "solver_s": round(self.solve_s, 1),
            "notes": list(self.notes),
            "caution": CAUTION,
        }

    def text(self, statistic: str = CONVERGED_STATISTIC) -> str:
        """The confirmation section as plain text."""
        s = self.section(statistic)
        a = s["agreement"]
        lines = [f"Full-wave confirmation: {self.body} ({self.file})",
                 f"  {s['method']}", f"  setup: {s['setup']}; {self.segments} segments",
                 f"  frequencies: {', '.join(f'{f:.2f}' for f in s['frequencies_mhz'])} MHz"
                 + (" (power average)" if len(self.freq_hz) > 1 else " (one frequency: not averaged)"),
                 f"  statistic: {statistic} over the turn of the worst wheel",
                 f"  {'spot':<24} {'full-wave dBm':>13} {'fast dBm':>9} {'worst wheel':>11} {'fw min dBm':>10}"]
        for sp in s["spots"]:
            lines.append(f"  {sp['name']:<24} {sp['fullwave_dbm']:13.1f} {sp['fast_dbm']:9.1f} {sp['worst_wheel']:>11} "
                         f"{sp['fullwave_min_dbm']:10.1f}")
        lines.append(f"  agreement with the fast ranking: Spearman rho {a['rho']:.2f}, mean offset "
                     f"{a['offset_db']:+.1f} dB (full-wave - fast), RMS {a['rms_db']:.1f} dB after the offset "
                     f"over {a['n']} spots")
        lines.append(f"  {CAUTION}")
        return "\n".join(lines)

    def levels_rows(self) -> list[dict]:
        """One row per frequency, spot, wheel and angle (the CSV written by ``wheelreach confirm``)."""
        rows = []
        for fi, f in enumerate(self.freq_hz):
            for si, s in enumerate(self.spots):
                for wi, w in enumerate(self.wheel_ids):
                    for ai, a in enumerate(self.angles_deg):
                        rows.append({"body": self.body, "freq_mhz": round(f / 1e6, 4), "spot": s, "wheel": w,
                                     "angle_deg": round(float(a), 3),
                                     "level_dbm": round(float(self.levels_dbm[fi, si, wi, ai]), 3),
                                     "fast_level_dbm": round(float(self.engine_levels_dbm[si, wi, ai]), 3)})
        return rows


# --------------------------------------------------------------------------------------------
# Running
# --------------------------------------------------------------------------------------------


def _client(workers: int | None, scheduler: str | None, timeout_s: float):
    from distributed import Client, LocalCluster

    if scheduler:
        try:
            return Client(scheduler, timeout=timeout_s), None
        except (OSError, TimeoutError, ValueError) as e:
            raise SchedulerUnreachable(f"cannot reach the Dask scheduler at {scheduler}: {e}") from None
    cluster = LocalCluster(n_workers=max(1, int(workers or 1)), threads_per_worker=1, processes=True,
                           dashboard_address=":0")
    return Client(cluster), cluster


def confirm(vehicles, *, spots=None, n_frequencies: int = 5, setup: vr.ReferenceSetup | None = None,
            workers: int | None = None, scheduler: str | None = None, serial: bool = False,
            cache_dir=None, use_cache: bool = True, progress: Callable[[int, int], None] | None = None,
            task_function: Callable | None = None, retries: int = 2, timeout_s: float = 10.0,
            cancel: Callable[[], bool] | None = None, poll_s: float = 0.2) -> list[Confirmation]:
    """Confirm spots of each vehicle with the full-wave reference (one task per body and frequency).

    Parameters
    ----------
    vehicles : sequence of core.vehicle.Vehicle, or (vehicle, label) pairs.
    spots : None (all spots), int N (the fast ranking's best N) or spot names (see :func:`select_spots`).
    n_frequencies : frequencies within +-2 % of the band centre (5 by default; 1 = centre only).
    setup : the reference setup (default :class:`core.fullwave.vehicle_reference.ReferenceSetup`).
    workers : LocalCluster worker processes (default 1); ignored with ``scheduler`` or ``serial``.
    scheduler : address of an existing Dask scheduler (``tcp://host:8786``).
    serial : run the tasks in this process, no Dask (same numbers).
    cache_dir : cache folder (default :func:`fullwave_cache_dir`); use_cache False recomputes.
    progress : progress(done, total) after each task (cached tasks count at once).
    task_function : replaces :func:`run_task` (tests); called as f(task, cache_dir).
    cancel : checked after each finished task (serial) or every ``poll_s`` seconds while tasks run
        (Dask); when it returns True the outstanding tasks are cancelled and core.scoring.Cancelled is
        raised (finished tasks stay cached).
    """
    from core.scoring import Cancelled

    base = setup or vr.ReferenceSetup(n_frequencies=n_frequencies)
    if setup is not None and setup.n_frequencies != n_frequencies:
        base = vr.ReferenceSetup(**{**asdict(setup), "contents": setup.contents, "n_frequencies": n_frequencies})
    folder = Path(cache_dir) if cache_dir is not None else fullwave_cache_dir()
    fn = task_function or run_task
    plans = []  # per body: (vehicle, label, spots, [(task, key)])
    for item in vehicles:
        v, label = item if isinstance(item, tuple) else (item, item.name)
        sel = select_spots(v, spots, base.angles_per_turn)
        freqs = vr.band_frequencies(v.radio.frequency_hz, base.n_frequencies, base.span)
        tasks = [make_task(v, f, base, sel) for f in freqs]
        plans.append((v, label, sel, [(t, task_key(t)) for t in tasks]))
    all_tasks = [tk for p in plans for tk in p[3]]
    results: dict[str, dict] = {}
    cached = set()
    if use_cache:
        for _, key in all_tasks:
            hit = _cache_read(folder, key)
            if hit is not None:
                results[key] = hit
                cached.add(key)
    todo = [(t, k) for t, k in all_tasks if k not in results]
    total = len(all_tasks)
    done = len(results)
    if progress is not None:
        progress(done, total)
    if todo and serial:
        for t, k in todo:
            results[k] = fn(t, str(folder))
            if use_cache:
                _cache_write(folder, k, results[k])
            done += 1
            if progress is not None:
                progress(done, total)
            if cancel is not None and cancel() and done < total:
                raise Cancelled()
    elif todo:
        from distributed import as_completed

        client, cluster = _client(workers, scheduler, timeout_s)
        try:
            futures = {client.submit(fn, t, str(folder), key=f"wheelreach-confirm-{k}", retries=retries,
                                     pure=False): k for t, k in todo}
            finished = as_completed(futures)
            while not finished.is_empty():
                # the stop request is polled while tasks run (a body takes minutes): the outstanding
                # tasks are cancelled and a LocalCluster's worker processes end when it closes below
                if cancel is not None and cancel():
                    client.cancel(list(futures))
                    raise Cancelled()
                if not finished.has_ready():
                    time.sleep(poll_s)
                    continue
                fut = next(finished)
                k = futures[fut]
                results[k] = fut.result()
                if use_cache:
                    _cache_write(folder, k, results[k])
                done += 1
                if progress is not None:
                    progress(done, total)
        finally:
            client.close()
            if cluster is not None:
                cluster.close()
    out = []
    for v, label, sel, tks in plans:
        rs = [results[k] for _, k in tks]
        first = rs[0]
        out.append(Confirmation(
            body=v.name, file=str(label), setup=base, freq_hz=np.array([r["freq_hz"] for r in rs]),
            spots=list(sel[0]), positions_m=np.asarray(sel[1]), wheel_ids=list(first["wheel_ids"]),
            angles_deg=np.asarray(first["angles_deg"]), levels_dbm=np.array([r["levels_dbm"] for r in rs]),
            engine_levels_dbm=vr.engine_levels(v, sel, base.angles_per_turn), segments=int(first["segments"]),
            solve_s=float(sum(r["solve_s"] for r in rs)), cached=sum(k in cached for _, k in tks),
            notes=list(first["notes"])))
    return out


def wall_clock(fn: Callable, *args, **kwargs):
    """(result, seconds) of fn(*args, **kwargs); for the CLI's summary line."""
    t0 = time.time()
    r = fn(*args, **kwargs)
    return r, time.time() - t0

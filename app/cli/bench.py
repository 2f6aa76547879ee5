"""``wheelreach bench [FILE]``: speed and memory of the engine, against the scalar reference.

In one process and one run, after a warm-up, it measures (medians of several repeats where timed):

- heatmap: the top-view grid of the file's first top-view mounting region at 5 cm spacing (or a
  finer grid of at least 2,400 spots if the region is smaller), all wheels, the file's angles per
  turn: seconds and links per second (a link = one spot, one wheel, one angle);
- single spot (the drag update): ``score_spots`` of one spot, all wheels and angles: ms;
- the heatmap's cells on a thread pool and a process pool (1 and all cores), and the bare numpy crossing
  test of the same direct links (issue 17);
- the compiled body-loss kernel (core.kernels, when numba is in use): the heatmap on the numpy path and
  with the kernel on 1 thread, the single spot on both paths, the body loss of the heatmap's direct links
  in one call on 1 and all threads; then the ratios of issue 17 (1 core and all cores, parallel speed-up,
  against the bare crossing test and the scalar reference). The figures above them take the default path
  (the kernel with all its threads when numba is installed);
- the scalar reference (core.reference) on a random subset of the same links, its time scaled to
  the heatmap's link count: the speedup of the engine over it;
- peak memory of the heatmap call and of a 10,000-spot grid: the tracemalloc peak of the call
  (numpy reports its buffers to tracemalloc), measured in separate untimed runs;
- cost growth: one run each for grids of 600, 2,400 and 9,600 spots;
- defence analysis (issue 13): scoring 10 spots and core.defence.defend of them (link budgets by term,
  tornado, Monte-Carlo P(pass)), median time and its ratio to the heatmap of the same run;
- desktop program (issue 14, when PySide6 is importable; ``--no-desktop`` skips it): the real window
  built offscreen; one drag step of a spot until its live margin is shown and the drop until the
  window is idle again (app.gui.drag_timing), medians, each as a ratio to the engine's single-spot
  time of the same spot measured in the same run, against the limits 3x and 5x.

One line per figure, then the summary line
``heatmap_s=<x> spot_ms=<y> speedup=<z> links_per_s=<w> peak_mib=<m>``.
Numbers depend on the machine and its load; quote medians of several runs.
"""

from __future__ import annotations

import os
import platform
import statistics
import sys
import time
import tracemalloc

import numpy as np

from app.cli import options
from app.cli.engine import _Progress, add_progress_options
from core.sensitivity import DEFAULT_DRAWS
from core.vehicle import load_vehicle

MAIN_STEP_M = 0.05
MIN_MAIN_SPOTS = 2400
MEMORY_SPOTS = 10_000
GROWTH_SPOTS = (600, 2400, 9600)
QUICK_MAIN_SPOTS = 150
QUICK_MEMORY_SPOTS = 400
QUICK_GROWTH_SPOTS = (40, 80, 160)
MAX_REPEATS = 100


def cpu_model() -> str:
    """The CPU model name from /proc/cpuinfo (Linux), else the platform's processor string."""
    try:
        with open("/proc/cpuinfo", encoding="utf-8") as f:
            for line in f:
                if line.lower().startswith("model name"):
                    return line.split(":", 1)[1].strip()
    except OSError:
        pass
    return platform.processor() or "unknown CPU"


def _count(region, step_m: float) -> int:
    from core.scoring import grid_for_region

    return int(grid_for_region(region, step_m)[2].sum())


def step_for_spots(region, n: int) -> float:
    """The largest cell spacing, m, whose grid over the region holds at least n spots."""
    poly = np.asarray(region.outline, float)
    w, h = poly.max(axis=0) - poly.min(axis=0)
    hi = 2.0 * (w * h / n) ** 0.5  # a box grid of n / 4 cells: too coarse
    lo = hi / 4.0
    while _count(region, lo) < n:  # a region filling little of its box needs a finer start
        lo /= 2.0
        if w * h / lo**2 > 1e3 * n:
            raise ValueError(f"region {region.name!r} cannot hold {n} spots")
    for _ in range(40):
        mid = (lo * hi) ** 0.5
        if _count(region, mid) >= n:
            lo = mid
        else:
            hi = mid
    return lo


def _median_time(fn, repeats: int) -> tuple[float, object, float]:
    """Median wall-clock time, s, the last result, and the median process CPU time, s."""
    times, cpu, out = [], [], None
    for _ in range(repeats):
        c0, t0 = time.process_time(), time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
        cpu.append(time.process_time() - c0)
    return statistics.median(times), out, statistics.median(cpu)


def _peak_mib(fn) -> float:
    """tracemalloc peak of one call, MiB (allocations made during the call, numpy buffers included)."""
    tracemalloc.start()
    tracemalloc.reset_peak()
    try:
        fn()
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    return peak / 2**20


#: patch spacing of the reference's cavity input table in the benchmark, m (set-up, not timed)
REFERENCE_CAVITY_SPACING_M = 0.6


def reference_seconds_per_link(v, scene, points: np.ndarray, n_links: int, seed: int = 0) -> tuple[float, int]:
    """Mean time of the scalar reference per link, s, over n_links random links of the grid.

    The reference's cavity input (one sum over the hull's opening patches per wheel and tabulated
    angle) is computed before the timing starts, as the engine's is when its scene is built (the
    heatmap time excludes it too); the patches are taken at REFERENCE_CAVITY_SPACING_M, which changes
    the table's values but not the per-link work that is timed."""
    from core.reference import DegenerateCase, ReferenceModel

    ref = ReferenceModel(v, ground_reflection=scene.ground_reflection, cavity=scene.cavity is not None,
                         cavity_spacing_m=REFERENCE_CAVITY_SPACING_M)
    if ref.cavity is not None:
        for w in range(len(scene.wheels)):
            for k in range(ref.cavity["angles"]):
                ref.cavity_input(w, k)
    rng = np.random.default_rng(seed)
    spots = points[rng.integers(0, len(points), n_links)]
    wheels = rng.integers(0, len(scene.wheels), n_links)
    angles = rng.integers(0, len(scene.angles_rad), n_links)
    axis = v.radio.receiver.axis
    degenerate = 0
    t0 = time.perf_counter()
    for p, w, a in zip(spots, wheels, angles):
        try:
            ref.level_dbm(p, int(w), int(a), axis)
        except DegenerateCase:
            degenerate += 1
    return (time.perf_counter() - t0) / n_links, degenerate


def bare_crossings(a: np.ndarray, b: np.ndarray, top, side) -> int:
    """The bare numpy crossing test: how many outline edges (top view in x-y, side view in x-z) the
    segments a -> b (N, 3) m cross; no order, no zones, no wheelhouses, no passages (the floor a
    per-link kernel is measured against, issue 17)."""
    n = 0
    for (i, j), ed in (((0, 1), top), ((0, 2), side)):
        au, av = a[:, i, None], a[:, j, None]
        du, dv = b[:, i, None] - au, b[:, j, None] - av
        ex, ey = ed.e[None, :, 0], ed.e[None, :, 1]
        wx, wy = ed.p0[None, :, 0] - au, ed.p0[None, :, 1] - av
        den = du * ey - dv * ex
        with np.errstate(divide="ignore", invalid="ignore"):
            inv = 1.0 / den
            t = (wx * ey - wy * ex) * inv
            s = (wx * dv - wy * du) * inv
        n += int(np.count_nonzero((t > 0.0) & (t < 1.0) & (s >= 0.0) & (s < 1.0)))
    return n


def heatmap_segments(scene, points: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The direct-ray segments of a heatmap: every (spot, wheel, angle) sensor -> spot, (N, 3) each, m."""
    src = scene.sensor_pos.reshape(-1, 3)
    a = np.broadcast_to(src[None], (len(points), *src.shape)).reshape(-1, 3)
    b = np.repeat(points, len(src), axis=0)
    return a, b


def bare_crossing_seconds(scene, points: np.ndarray, chunk_links: int) -> tuple[float, int]:
    """Time of :func:`bare_crossings` over all direct links of the heatmap, in chunks of the engine's size, s;
    and the number of edge crossings found."""
    per = max(1, chunk_links // max(1, scene.sensor_pos.shape[0] * scene.sensor_pos.shape[1]))
    t0 = time.perf_counter()
    n = 0
    for i in range(0, len(points), per):
        a, b = heatmap_segments(scene, points[i:i + per])
        n += bare_crossings(a, b, scene.hull.top_edges, scene.hull.side_edges)
    return time.perf_counter() - t0, n


def threaded_heatmap_seconds(scene, points: np.ndarray, threads: int) -> float:
    """Wall-clock time, s, of the heatmap's cells scored in ``threads`` equal parts on a thread pool
    (concurrent.futures; numpy releases the interpreter lock inside its array operations only)."""
    from concurrent.futures import ThreadPoolExecutor

    from core.scoring import score_spots

    parts = np.array_split(points, threads)
    t0 = time.perf_counter()
    with ThreadPoolExecutor(max_workers=threads) as pool:
        list(pool.map(lambda p: score_spots(scene, p), parts))
    return time.perf_counter() - t0


_POOL_SCENE = None  # the scene of a worker process of the process-pool figure


def _pool_init(blob: bytes) -> None:
    import pickle

    global _POOL_SCENE
    _POOL_SCENE = pickle.loads(blob)


def _pool_margins(points: np.ndarray) -> np.ndarray:
    from core.scoring import score_spots

    return score_spots(_POOL_SCENE, points).margin_db


def process_pool_seconds(scene, points: np.ndarray, workers: int, repeats: int) -> tuple[float, float, bool]:
    """The heatmap's cells scored in ``workers`` equal parts on a process pool (spawned processes, the scene
    sent once, pickled): pool start-up s, median wall-clock s of the scoring on the started pool, and whether
    the margins equal those of one call in this process."""
    import multiprocessing
    import pickle
    from concurrent.futures import ProcessPoolExecutor

    from core.scoring import score_spots

    parts = np.array_split(points, workers)
    t0 = time.perf_counter()
    with ProcessPoolExecutor(workers, mp_context=multiprocessing.get_context("spawn"), initializer=_pool_init,
                             initargs=(pickle.dumps(scene),)) as pool:
        list(pool.map(_pool_margins, [p[:1] for p in parts]))  # every worker started and warm
        start_s = time.perf_counter() - t0
        times, margins = [], None
        for _ in range(repeats):
            t1 = time.perf_counter()
            margins = np.concatenate(list(pool.map(_pool_margins, parts)))
            times.append(time.perf_counter() - t1)
    same = bool(np.array_equal(margins, score_spots(scene, points).margin_db, equal_nan=True))
    return start_s, statistics.median(times), same


def parallel_figures(scene, points: np.ndarray, heat_s: float, repeats: int, out=print) -> dict:
    """Issue 17 item 4: the heatmap's cells on 1 thread and on all cores (a thread pool; each thread's body losses
    take the compiled kernel when it is in use), a process pool, and the bare numpy crossing test of the same
    direct links, from the same run."""
    from core.scoring import CHUNK_LINKS

    n_all = os.cpu_count() or 1
    threaded_heatmap_seconds(scene, points[: max(1, len(points) // 8)], n_all)  # warm-up of the pool
    one = statistics.median(threaded_heatmap_seconds(scene, points, 1) for _ in range(repeats))
    every = statistics.median(threaded_heatmap_seconds(scene, points, n_all) for _ in range(repeats))
    out(f"heatmap cells on a thread pool: {one:.3f} s on 1 thread, {every:.3f} s on {n_all} "
        f"(speed-up x{one / every:.2f}; numpy releases the interpreter lock only inside array operations)")
    start_s, procs, same = process_pool_seconds(scene, points, n_all, repeats)
    out(f"heatmap cells on a process pool of {n_all}: {procs:.3f} s (median of {repeats}; pool start-up "
        f"{start_s:.3f} s not included) against {one:.3f} s in one process: speed-up x{one / procs:.2f}; "
        f"margins {'identical' if same else 'DIFFERENT'} to one call")
    every = min(every, procs)
    bare_s, n_cross = min((bare_crossing_seconds(scene, points, CHUNK_LINKS) for _ in range(repeats)),
                          key=lambda r: r[0])
    n_links = len(points) * scene.sensor_pos.shape[0] * scene.sensor_pos.shape[1]
    best = min(heat_s, every)
    out(f"bare numpy crossing test of the heatmap's {n_links} direct links against the same outlines "
        f"({n_cross} edge crossings, no zones, wheelhouses, passages or road ray): {bare_s:.3f} s (best of "
        f"{repeats}); heatmap = {heat_s / bare_s:.1f} x the bare test, on all cores {best / bare_s:.1f} x")
    return {"threads_1_s": one, "threads_all_s": every, "processes_s": procs, "bare_s": bare_s}


class _kernel_path:
    """Context: the engine on the given path ("numpy" or "numba") with n compiled-kernel threads (None: all)."""

    def __init__(self, name: str, threads: int | None = None):
        self.name, self.threads = name, threads

    def __enter__(self):
        from core import kernels

        self.old = os.environ.get(kernels.ENV_VAR)
        os.environ[kernels.ENV_VAR] = self.name
        kernels.set_threads(self.threads)
        return self

    def __exit__(self, *exc):
        from core import kernels

        if self.old is None:
            os.environ.pop(kernels.ENV_VAR, None)
        else:
            os.environ[kernels.ENV_VAR] = self.old
        kernels.set_threads(None)
        return False


def kernel_figures(scene, region, step: float, points: np.ndarray, one: np.ndarray, repeats: int,
                   out=print) -> dict:
    """The compiled body-loss kernel against the numpy path (issue 17 item 4), from the same run: the heatmap
    on the numpy path and with the kernel on 1 thread (medians), the single spot on both paths, and the
    body loss of the heatmap's direct links in one kernel call on 1 thread and on all cores. (The heatmap on
    all cores is the bench's main heatmap figure, which takes the kernel with all its threads.)"""
    from core import kernels
    from core.scoring import heatmap, score_spots

    if not kernels.enabled():
        out(f"compiled kernel: not in use ({kernels.status()}); every figure above is the numpy path's")
        return {"kernel": "numpy"}
    kernels.warm_up()
    n_all = kernels.max_threads()
    fig: dict = {"kernel": "numba", "threads": n_all}
    spot_repeats = max(5, 3 * repeats)
    with _kernel_path("numpy"):
        heatmap(scene, region, step)
        fig["heat_numpy_s"] = _median_time(lambda: heatmap(scene, region, step), repeats)[0]
        fig["spot_numpy_ms"] = 1e3 * _median_time(lambda: score_spots(scene, one), spot_repeats)[0]
    with _kernel_path("numba"):
        fig["spot_kernel_ms"] = 1e3 * _median_time(lambda: score_spots(scene, one), spot_repeats)[0]
    with _kernel_path("numba", 1):
        heatmap(scene, region, step)
        fig["heat_1t_s"] = _median_time(lambda: heatmap(scene, region, step), repeats)[0]
    a, b = heatmap_segments(scene, points)
    a = np.ascontiguousarray(a)
    bits = np.ascontiguousarray(np.tile(scene.sensor_bits.reshape(-1), len(points)))
    for th in (1, n_all):
        with _kernel_path("numba", th):
            kernels.body_loss_db(scene.hull, a, b, scene.freq_hz, bits)  # warm-up (thread pool start)
            fig[f"direct_{th}t_s"] = _median_time(
                lambda: kernels.body_loss_db(scene.hull, a, b, scene.freq_hz, bits), repeats)[0]
    out(f"compiled kernel (numba {kernels.numba.__version__}, threading layer {kernels.threading_layer()}, "
        f"{n_all} threads): heatmap on 1 thread {fig['heat_1t_s']:.3f} s (median of {repeats}); numpy path "
        f"{fig['heat_numpy_s']:.3f} s: kernel on 1 thread x{fig['heat_numpy_s'] / fig['heat_1t_s']:.2f} faster")
    out(f"single spot: numpy path {fig['spot_numpy_ms']:.2f} ms, kernel {fig['spot_kernel_ms']:.2f} ms (medians of "
        f"{spot_repeats}) = {fig['spot_kernel_ms'] / fig['spot_numpy_ms']:.2f} x the numpy path (target 0.25 x)")
    out(f"body loss of the heatmap's {len(a)} direct links in one kernel call: {fig['direct_1t_s']:.3f} s on 1 "
        f"thread, {fig[f'direct_{n_all}t_s']:.3f} s on {n_all} (x{fig['direct_1t_s'] / fig[f'direct_{n_all}t_s']:.2f})")
    return fig


def kernel_summary(fig: dict, kfig: dict, par: dict, scaled_ref_s: float | None, out=print) -> None:
    """The ratios of issue 17's targets from figures of this run: heatmap on 1 core and on all cores (the
    faster of the kernel's own threads and the thread pool of cells), against the scalar reference, the bare
    numpy crossing test and the numpy path."""
    if kfig.get("kernel") != "numba":
        return
    one = kfig["heat_1t_s"]
    own, pool = fig["heatmap_s"], par["threads_all_s"]
    every, how = (own, "kernel threads") if own <= pool else (pool, "thread pool of cells")
    n = kfig["threads"]
    out(f"kernel heatmap: 1 core {one:.3f} s, all {n} cores {every:.3f} s ({how}; kernel threads {own:.3f} s, "
        f"thread pool {pool:.3f} s): parallel speed-up x{one / every:.2f} (target 1.7 on 2 cores)")
    out(f"kernel heatmap on all cores = {every / par['bare_s']:.2f} x the bare numpy crossing test of the same "
        f"links ({par['bare_s']:.3f} s; target 1.0 x); numpy path {kfig['heat_numpy_s'] / par['bare_s']:.2f} x")
    if scaled_ref_s is not None:
        out(f"scalar reference ({scaled_ref_s:.1f} s for the heatmap's links) / heatmap: numpy path "
            f"{scaled_ref_s / kfig['heat_numpy_s']:.0f}x, kernel on 1 core {scaled_ref_s / one:.0f}x, on all cores "
            f"{scaled_ref_s / every:.0f}x (target 3000x)")


DEFENCE_SPOTS = 10


def defence_seconds(v, scene, hm, repeats: int) -> tuple[float, int, int]:
    """Median time, s, of the whole defence analysis of 10 spots (core.defence.defend after scoring them): the
    file's spots, topped up with the heatmap's best cells when the file has fewer; also the spot count and the
    links its fast model traced."""
    from core.defence import defend
    from core.scoring import score_spots, vehicle_spot_arrays
    from core.sensitivity import PerturbationModel, uncertain_inputs

    names, pos, axes = vehicle_spot_arrays(v)
    names, pos, axes = list(names[:DEFENCE_SPOTS]), pos[:DEFENCE_SPOTS], axes[:DEFENCE_SPOTS]
    extra = DEFENCE_SPOTS - len(names)
    if extra > 0:
        cells = np.array([c[:3] for c in hm.best_cells(extra)], float).reshape(-1, 3)
        a = np.asarray(v.radio.receiver.axis, float)
        names += [f"cell {k + 1}" for k in range(len(cells))]
        pos = np.vstack([pos, cells])
        axes = np.vstack([axes, np.broadcast_to(a / np.linalg.norm(a), cells.shape)])

    def run():
        sc = score_spots(scene, pos, axes, names)
        return defend(scene, sc, axes)

    run()  # warm-up
    t, _, _ = _median_time(run, repeats)
    sc = score_spots(scene, pos, axes, names)
    links = PerturbationModel(scene, uncertain_inputs(v, scene), pos, axes, np.radians(sc.worst_angle_deg)).links
    return t, len(names), links


def bench_model(v, wheel_model: str | None, quick: bool, repeats: int, show_progress: bool, with_reference: bool,
                out=print) -> dict:
    """Run every figure for one wheel model; print one line per figure; return the figures."""
    from core.scoring import Scene, grid_for_region, heatmap, score_spots

    scene = Scene.from_vehicle(v, wheel_model=wheel_model)
    regions = [r for r in v.regions if r.view == "top"]
    if not regions:
        raise SystemExit(f"error: {v.name}: regions: no top-view mounting region to bench")
    region = regions[0]
    W, A = len(scene.wheels), len(scene.angles_rad)
    if quick:
        step = step_for_spots(region, QUICK_MAIN_SPOTS)
    else:
        step = MAIN_STEP_M if _count(region, MAIN_STEP_M) >= MIN_MAIN_SPOTS else step_for_spots(region, MIN_MAIN_SPOTS)
    n_spots = _count(region, step)
    links = n_spots * W * A
    progress = _Progress(show_progress)
    out(f"wheel model: {scene.wheel_model_label}; road reflection {'on' if scene.ground_reflection else 'off'}; "
        f"{W} wheels x {A} angles")

    def run_main():
        return heatmap(scene, region, step)

    run_main()  # warm-up
    heat_s, hm, heat_cpu_s = _median_time(run_main, repeats)
    cells = int(np.isfinite(hm.margin_db).sum())
    out(f"heatmap: {region.name!r}, step {step * 1000:.1f} mm, {cells} spots x {W} wheels x {A} angles = "
        f"{links} links: {heat_s:.3f} s (median of {repeats}; CPU time {heat_cpu_s:.3f} s)")
    out(f"heatmap links per second: {links / heat_s:,.0f}")

    from core.scoring import heatmap_stages

    coarse_s, coarse, _ = _median_time(lambda: next(heatmap_stages(scene, region, step)), repeats)
    out(f"progressive heatmap: first coarse stage (every {coarse.stride}th cell, {coarse.step_m * 1000:.0f} mm, "
        f"{int(coarse.computed.sum())} spots): {coarse_s:.3f} s (median of {repeats}) = "
        f"{100 * coarse_s / heat_s:.1f} % of the full heatmap (target 10 %)")

    u, vv, mask, fixed = grid_for_region(region, step)
    uu, vg = np.meshgrid(u, vv)
    pts = np.stack([uu, vg, np.full_like(uu, fixed)], axis=-1)[mask]
    centre = 0.5 * (pts.min(axis=0) + pts.max(axis=0))
    one = pts[np.argmin(np.linalg.norm(pts - centre, axis=1))][None, :]  # the grid spot nearest the centre
    spot_repeats = 5 if quick else 30
    for _ in range(3):
        score_spots(scene, one)
    spot_s, _, _ = _median_time(lambda: score_spots(scene, one), spot_repeats)
    out(f"single spot ({one[0, 0]:.2f}, {one[0, 1]:.2f}, {one[0, 2]:.2f}) m, {W} wheels x {A} angles: "
        f"{spot_s * 1e3:.2f} ms (median of {spot_repeats})")
    par = parallel_figures(scene, pts, heat_s, max(1, min(3, repeats)), out)
    kfig = kernel_figures(scene, region, step, pts, one, repeats, out)

    defence_s, n_def, d_links = defence_seconds(v, scene, hm, repeats)
    out(f"defence analysis of {n_def} spots (scores, budgets by term, tornado, {DEFAULT_DRAWS}-draw P(pass); "
        f"{d_links} links traced): {defence_s:.3f} s (median of {repeats}) = {defence_s / heat_s:.2f} x the heatmap")

    speedup = scaled = None
    if with_reference:
        n_ref = 20 if quick else 1000
        per_link, degenerate = reference_seconds_per_link(v, scene, pts, n_ref)
        scaled = per_link * links
        speedup = scaled / heat_s
        extra = f", {degenerate} degenerate" if degenerate else ""
        out(f"scalar reference: {per_link * 1e3:.3f} ms per link over {n_ref} random links of the grid{extra}; "
            f"scaled to {links} links: {scaled:.1f} s; speedup {speedup:.0f}x")
    else:
        out("scalar reference: not available for this wheel model (the reference models the knife-edge wheel)")
    kernel_summary({"heatmap_s": heat_s}, kfig, par, scaled, out)

    peak = _peak_mib(run_main)
    out(f"peak memory of the heatmap call: {peak:.1f} MiB (tracemalloc peak, numpy buffers included)")

    n_mem = QUICK_MEMORY_SPOTS if quick else MEMORY_SPOTS
    step_mem = step_for_spots(region, n_mem)
    n_mem_actual = _count(region, step_mem)
    peak_mem = _peak_mib(lambda: heatmap(scene, region, step_mem, progress=progress))
    out(f"peak memory of a {n_mem_actual}-spot grid: {peak_mem:.1f} MiB (tracemalloc peak)")

    growth = []
    for n in QUICK_GROWTH_SPOTS if quick else GROWTH_SPOTS:
        s = step_for_spots(region, n)
        n_act = _count(region, s)
        t0 = time.perf_counter()
        heatmap(scene, region, s, progress=progress)
        dt = time.perf_counter() - t0
        growth.append((n_act, dt))
    base_n, base_t = growth[0]
    parts = [f"{n} spots {t:.3f} s (x{t / base_t:.2f} for x{n / base_n:.2f} work)" for n, t in growth]
    out("cost growth: " + "; ".join(parts))
    return {
        "heatmap_s": heat_s,
        "spot_ms": spot_s * 1e3,
        "speedup": speedup,
        "links_per_s": links / heat_s,
        "peak_mib": peak,
        "peak_10k_mib": peak_mem,
        "growth": growth,
        "kernel": kfig,
    }


#: limits of issue 14 item 4: a drag step and a drop as multiples of the engine's single-spot time
DRAG_LIMIT = 3.0
DROP_LIMIT = 5.0


def desktop_figures(path, repeats: int, out=print) -> dict | None:
    """Drag step and drop of the selected spot in the real window (offscreen), against the engine's
    single-spot time of that spot in the same run; None when PySide6 is not importable."""
    try:
        import PySide6  # noqa: F401
    except ImportError:
        out("desktop program: not benched (PySide6 is not installed)")
        return None
    v = load_vehicle(path)
    if not v.spots or not v.regions:
        out("desktop program: not benched (the file needs a receiver spot to drag and a mounting region)")
        return None
    import tempfile

    from PySide6.QtCore import QSettings
    from PySide6.QtWidgets import QApplication

    app = QApplication.instance()
    if app is None:
        os.environ["QT_QPA_PLATFORM"] = "offscreen"  # never opens a window on the user's screen
        app = QApplication([sys.argv[0]])
    from app.gui import tasks
    from app.gui.document import Document
    from app.gui.drag_timing import median_ms, settle, time_drag_and_drop, time_progressive_heatmap
    from app.gui.window import MainWindow
    from core.scoring import score_spots

    with tempfile.TemporaryDirectory(prefix="wheelreach-bench-") as tmp:
        settings = QSettings(os.path.join(tmp, "settings.ini"), QSettings.Format.IniFormat)
        settings.setValue("recovery_folder", os.path.join(tmp, "recovery"))
        doc = Document(v, path)
        win = MainWindow(doc, settings=settings, autosave=False)
        win.ranking.heatmap.auto.setChecked(False)
        win.resize(1600, 1000)
        win.show()
        try:
            settle(win)
            time_drag_and_drop(win, 1)  # warm-up: first paints, caches
            name = doc.selected
            spot = doc.scores.positions[doc.spot_row(name)][None, :]
            axis = doc._spot_axis(name)
            for _ in range(3):
                score_spots(doc.scene, spot, axis)
            spot_times: list[float] = []

            def time_spot():  # interleaved with the drags: the same load of the machine for both
                for _ in range(6):
                    t0 = time.perf_counter()
                    score_spots(doc.scene, spot, axis)
                    spot_times.append(time.perf_counter() - t0)

            steps, drops, name = time_drag_and_drop(win, max(3, repeats), between=time_spot)
            spot_s, n_spot = statistics.median(spot_times), len(spot_times)
            step_m = 0.2 if repeats <= 1 else 0.05  # --quick: the panel's coarsest grid
            runs = [time_progressive_heatmap(win, step_m) for _ in range(1 if repeats <= 1 else 3)]
        finally:
            win.ranking.heatmap.abandon()
            doc.undo_stack.setClean()
            win.close()
            tasks.shutdown(30.0)
            app.processEvents()
    # rounded as printed, so each ratio printed is the ratio of the two figures printed beside it
    step_ms, drop_ms, spot_ms = round(median_ms(steps), 2), round(median_ms(drops), 2), round(spot_s * 1e3, 2)
    out(f"desktop program: {doc.vehicle.name}, spot {name!r}, wheel model {doc.scene.wheel_model_label}, "
        f"window 1600 x 1000 ({app.platformName()} platform)")
    out(f"desktop engine single spot: {spot_ms:.2f} ms (median of {n_spot}, taken between the drags; the dragged "
        f"spot, its own axis)")
    out(f"desktop drag step: {step_ms:.2f} ms (median of {len(steps)}) = {step_ms / spot_ms:.2f} x the single spot "
        f"(limit {DRAG_LIMIT:.0f} x)")
    out(f"desktop drop: {drop_ms:.2f} ms (median of {len(drops)}) = {drop_ms / spot_ms:.2f} x the single spot "
        f"(limit {DROP_LIMIT:.0f} x)")
    first = statistics.median(r[0] for r in runs)
    full = statistics.median(r[1] for r in runs)
    hm = runs[-1][2]
    out(f"desktop progressive heatmap ({int(hm.computed.sum())} cells, {hm.step_m * 1000:.0f} mm, median of "
        f"{len(runs)}): first coarse map shown after {first:.3f} s, full map after {full:.3f} s: first = "
        f"{100 * first / full:.1f} % of the full (target 10 %)")
    return {"spot_ms": spot_ms, "drag_ms": step_ms, "drop_ms": drop_ms, "first_s": first, "full_s": full}


def summary_line(fig: dict) -> str:
    sp = "n/a" if fig["speedup"] is None else f"{fig['speedup']:.0f}"
    return (f"heatmap_s={fig['heatmap_s']:.3f} spot_ms={fig['spot_ms']:.2f} speedup={sp} "
            f"links_per_s={fig['links_per_s']:.0f} peak_mib={fig['peak_mib']:.1f}")


def _cmd_bench(args) -> int:
    from core.samples import DEFAULT_SAMPLE

    path = args.file or DEFAULT_SAMPLE
    v = load_vehicle(path)
    import numpy

    print(f"machine: {os.cpu_count()} logical CPUs, {cpu_model()}; Python {platform.python_version()}, "
          f"numpy {numpy.__version__}")
    print(f"vehicle: {v.name} ({path})")
    # default: both wheel models; the knife-edge figures (which the scalar reference covers) make the summary
    models = ["knife_edge", "installed_pattern"]
    if args.wheel_model == "both" or not args.wheel_model:
        try:
            import core.wheel_patterns  # noqa: F401
        except ModuleNotFoundError:
            print("error: --wheel-model both needs core/wheel_patterns.py (installed wheel patterns)", file=sys.stderr)
            return 1
        models = ["knife_edge", "installed_pattern"]
    elif args.wheel_model:
        models = [args.wheel_model]
    repeats = args.repeats if args.repeats else (1 if args.quick else 5)
    show = args.progress or (sys.stderr.isatty() and not args.quiet)
    figures = []
    for m in models:
        effective = m or v.radio.wheel_model
        if effective == "installed_pattern":
            from core.scoring import Scene

            try:
                Scene.from_vehicle(v, wheel_model=effective)
            except (FileNotFoundError, ModuleNotFoundError) as e:
                print(f"installed wheel patterns not available, not benched: {e}")
                continue
        with_ref = effective == "knife_edge" and v.radio.sensor.pattern in ("dipole", "isotropic")
        figures.append((effective, bench_model(v, m, args.quick, repeats, show, with_ref)))
    if not figures:
        print("error: nothing to bench", file=sys.stderr)
        return 1
    if not args.no_desktop:
        desktop_figures(path, repeats)
    for name, fig in figures[1:]:
        print(f"{name}: {summary_line(fig)}")
    print(f"{figures[0][0]}: see the summary line below")
    print(summary_line(figures[0][1]))
    return 0


def register(sub) -> None:
    b = sub.add_parser("bench", help="speed and memory benchmark of the engine against the scalar reference")
    b.add_argument("file", nargs="?", default=None, help="vehicle file (default: the sample sedan)")
    b.add_argument("--quick", action="store_true", help="small grids and few repeats (a smoke run, not a measurement)")
    b.add_argument("--repeats", type=options.count(1, MAX_REPEATS), metavar="N",
                   help=f"timed repeats of the heatmap, 1-{MAX_REPEATS} (default 5; 1 with --quick)")
    b.add_argument("--wheel-model", choices=["knife_edge", "installed_pattern", "both"],
                   help="wheel model to bench (default: both; the summary line is the knife-edge model's, "
                        "which the scalar reference covers)")
    b.add_argument("--no-desktop", action="store_true",
                   help="skip the desktop program's drag and drop timings (they build the window offscreen)")
    add_progress_options(b)
    b.set_defaults(func=_cmd_bench)

"""Compiled per-link kernels (numba): the body loss of straight paths through the 2.5-D hull.

The pure-numpy code in :mod:`core.geometry` is the reference; this module computes the same
quantity, link by link, in one compiled loop that runs in parallel over the links (``prange``):

- the start points' packed hull membership bits (as ``core.geometry.start_bits``);
- the crossings of each segment with the top- and side-outline edges and the wheelhouse arches and
  inner walls (as ``core.geometry.hull_flips``: the same arithmetic, the same order of events and
  the same rule for an end face drawn in both outlines), the zone loss of every crossing;
- each passage (in and out again): the smaller of both panels and the knife edge over its dominant
  edge (ITU-R P.526-15 eq. 26 and 31, ``DIFFRACTION_SAMPLES`` points along the passage, escape
  clearance from the hull's envelope tables, as ``core.geometry._body_loss``).

core.link_kernel builds the whole link field on these kernels (rays, wheel, road, cavity, fade quantile).

Which path runs is chosen by the environment variable ``WHEELREACH_KERNEL``: ``numba`` (default
when numba imports) or ``numpy`` (the reference). When numba cannot be imported, everything runs on
numpy.

Compilation: ``cache=True`` writes the machine code next to this module's bytecode (or numba's
user cache folder when that is read-only), so it is paid once per installed copy; later processes
load it. The first call compiles (or loads) every kernel at once (:func:`warm_up`) in the calling
thread. A front end that must not wait calls :func:`start_warm_up` at start: a child interpreter
compiles into the cache (so the compiler never holds this process's interpreter lock), a background
thread then loads the kernels, and until that is finished :func:`available` is False and the numpy
path runs, so no caller ever blocks on the compiler (:func:`status` says which).

Threads: the parallel kernel (large calls) is entered by one Python thread at a time, because numba's
portable thread pool ("workqueue" layer) must not be entered from two at once; a call that finds it
busy, and every call under ``PARALLEL_MIN_SEGMENTS``, runs the serial kernel on its own thread. Both release the GIL (``nogil=True``), so a
front end's event loop keeps running and a thread pool of Python threads computes on every core.

Results agree with the numpy path to round-off (tests/test_kernels.py checks 0.01 dB on random
links of every sample, both wheel models, road reflection on and off).
"""

from __future__ import annotations

import math
import os
import threading

import numpy as np

# idle OpenMP workers sleep at once instead of spinning: on a shared or busy machine a spinning worker takes
# the core a front end's event loop (or another process) needs; the kernels' launches are few and large
os.environ.setdefault("OMP_WAIT_POLICY", "PASSIVE")

try:  # numba is a declared dependency; without it (or disabled) the numpy path runs
    import numba
    from numba import njit, prange
except ImportError:  # pragma: no cover - exercised by the test that disables the kernel
    numba = None

ENV_VAR = "WHEELREACH_KERNEL"
_LOCK = threading.Lock()
_EPS = 1e-12
_BOX_SLACK_M = 1e-9
_V_MIN_EQ31 = -0.78  # ITU-R P.526 eq. 31 is used above this v (core.propagation)
_TIE_T = 1e-9  # two events closer than this along a segment are at the same point (core.geometry)
#: calls with fewer segments run on the calling thread: a thread-pool launch costs more than it saves
#: there, and far more on a loaded machine (measured: 7 ms per launch with 2 threads on 2 busy cores)
PARALLEL_MIN_SEGMENTS = 8192


_READY = threading.Event()  # every kernel compiled or loaded in this process
_WARMING = threading.Event()  # a background warm-up (start_warm_up) is running
_WARM_LOCK = threading.Lock()
_WARM_INFO: dict = {}


def enabled() -> bool:
    """True when numba is importable and the kernel is not disabled by ``WHEELREACH_KERNEL=numpy``."""
    return numba is not None and os.environ.get(ENV_VAR, "numba").strip().lower() != "numpy"


def available() -> bool:
    """True when body losses take the compiled kernel now: :func:`enabled`, and not while a background
    warm-up is still compiling (the numpy path runs meanwhile, so no caller waits for the compiler)."""
    return enabled() and "error" not in _WARM_INFO and (_READY.is_set() or not _WARMING.is_set())


def kernel_name() -> str:
    """``"numba"`` or ``"numpy"``: the path body losses take now."""
    return "numba" if available() else "numpy"


def warm_up() -> float:
    """Compile (first time for this installed copy) or load from numba's cache every kernel, in the
    calling thread; returns the seconds it took (0 when already done or numba is missing)."""
    if numba is None or _READY.is_set():
        return 0.0
    import time

    with _WARM_LOCK:
        if _READY.is_set():
            return 0.0
        t0 = time.perf_counter()
        tab = np.zeros((0, 5))
        seg = np.zeros((0, 4))
        wh = np.zeros((0, 5))
        pts = np.zeros((2, 3))
        pts[1] = 1.0
        _start_bits_kernel(pts, tab, tab, wh)
        args = (pts[:1].copy(), pts[1:].copy(), np.zeros(1, np.int64), seg, seg, wh, np.zeros((0, 3)),
                np.zeros(0, np.int64), np.zeros(1, np.int64), np.zeros(0, np.int64), tab, np.zeros(1, np.int64),
                np.zeros(0), np.zeros(0), np.zeros(0), tab, np.zeros(1, np.int64), np.zeros(0),
                np.zeros((5, 2)), np.array([[0.0, 0.0, 0.0], [1.0, 1.0, 1.0]]), 1.0, 1.0, 0.7, 8, 1)
        _body_loss_serial(*args)
        with _LOCK:
            _body_loss_kernel(*args)
        from core import link_kernel  # the fused link field (it calls the kernels above)

        link_kernel.warm_up()
        from core import burst  # the burst figure's frame maxima

        burst.warm_up()
        _WARM_INFO["seconds"] = time.perf_counter() - t0
        _READY.set()
        return _WARM_INFO["seconds"]


def _compile_in_child() -> None:
    """Compile the kernels into numba's on-disk cache in a child interpreter (same cache folder), so the
    compiler's hold on the interpreter lock stays out of this process; errors are left to :func:`warm_up`."""
    import subprocess
    import sys

    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))  # the folder holding the core package
    env = dict(os.environ)
    env["PYTHONPATH"] = root + (os.pathsep + env["PYTHONPATH"] if env.get("PYTHONPATH") else "")
    try:
        subprocess.run([sys.executable, "-c", "from core import kernels; kernels.warm_up()"], env=env,
                       stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, timeout=900, check=False)
    except (OSError, subprocess.SubprocessError):
        pass


def start_warm_up(done=None) -> bool:
    """Prepare the kernels in the background (the numpy path serves every call until they are ready): a
    child interpreter compiles them into the on-disk cache when it is cold, then a thread of this process
    loads them (:func:`warm_up`, about 0.5 s). ``done(seconds, error)`` is called from that thread at the
    end. False when there is nothing to do."""
    if not enabled() or _READY.is_set() or _WARMING.is_set():
        return False
    _WARMING.set()

    def run():
        import time

        err = None
        t0 = time.perf_counter()
        try:
            _compile_in_child()
            warm_up()
        except Exception as e:  # noqa: BLE001 - whatever breaks the build (a broken numba install): stay on numpy
            err = e
            _WARM_INFO["error"] = repr(e)
        finally:
            _WARMING.clear()
        _WARM_INFO["background_seconds"] = time.perf_counter() - t0
        if done is not None:
            done(_WARM_INFO["background_seconds"], err)

    threading.Thread(target=run, name="wheelreach-kernel-warm-up", daemon=True).start()
    return True


def warming() -> bool:
    """True while a background warm-up (:func:`start_warm_up`) is compiling or loading the kernels."""
    return _WARMING.is_set() and not _READY.is_set()


def status() -> str:
    """One line for a front end: which path runs and why."""
    if numba is None:
        return "numpy path (numba not installed)"
    if not enabled():
        return f"numpy path ({ENV_VAR}=numpy)"
    if "error" in _WARM_INFO:
        return f"numpy path (the compiled kernel failed to build: {_WARM_INFO['error']})"
    if _WARMING.is_set() and not _READY.is_set():
        return "numpy path while the compiled kernel is prepared (first start on a machine: about 30-70 s)"
    return f"compiled kernel (numba {numba.__version__})"


def set_threads(n: int | None) -> int:
    """Use n threads in the compiled kernels (None: all cores); returns the number in use (1 on numpy)."""
    if numba is None:
        return 1
    n_max = numba.config.NUMBA_NUM_THREADS
    numba.set_num_threads(n_max if n is None else max(1, min(int(n), n_max)))
    return numba.get_num_threads()


def threading_layer() -> str:
    """numba's threading layer in use ("omp", "tbb", "workqueue"), or "none" before the first parallel call."""
    if numba is None:
        return "none"
    try:
        return str(numba.threading_layer())
    except ValueError:
        return "none"


def max_threads() -> int:
    """All cores the compiled kernels may use (1 without numba)."""
    return 1 if numba is None else int(numba.config.NUMBA_NUM_THREADS)


# ----- packing the hull once ---------------------------------------------------------------------
def _pip_pack(edges_list) -> tuple[np.ndarray, np.ndarray]:
    """Non-horizontal edges of several polygons as one (E, 5) table (x0, y0, y1, run, rise) and offsets."""
    rows, offs = [], [0]
    for ed in edges_list:
        t = np.column_stack([ed.x0[:, 0], ed.y0[:, 0], ed.y1[:, 0], ed.run[:, 0], ed.rise[:, 0]]) if len(ed.x0) \
            else np.empty((0, 5))
        rows.append(t)
        offs.append(offs[-1] + len(t))
    return np.ascontiguousarray(np.concatenate(rows) if rows else np.empty((0, 5))), np.array(offs, np.int64)


class PackedHull:
    """The arrays of a :class:`core.geometry.Hull` in the flat form the kernels take (built once per hull)."""

    def __init__(self, hull):
        from core.geometry import polygon_edges

        def seg(ed):
            return np.ascontiguousarray(np.column_stack([ed.p0, ed.e]))  # (E, 4): x0, y0, ex, ey

        self.top_seg = seg(hull.top_edges)
        self.side_seg = seg(hull.side_edges)
        self.top_pip, self.top_off = _pip_pack([hull.top_edges])
        self.side_pip, self.side_off = _pip_pack([hull.side_edges])
        tz, sz = hull.top_zones, hull.side_zones
        self.tz_pip, self.tz_off = _pip_pack(tz.edges or [polygon_edges(p) for p in tz.polygons])
        self.sz_pip, self.sz_off = _pip_pack(sz.edges or [polygon_edges(p) for p in sz.polygons])
        flat = np.ascontiguousarray  # one array layout, so the engine's calls use the warm-up's specialisation
        self.tz_loss = flat(np.asarray(tz.loss_db, float).reshape(-1))
        self.tz_zmin = flat(np.asarray(tz.z_min, float).reshape(-1))
        self.tz_zmax = flat(np.asarray(tz.z_max, float).reshape(-1))
        self.sz_loss = flat(np.asarray(sz.loss_db, float).reshape(-1))
        self.wh = np.ascontiguousarray(np.column_stack([hull.wh_xc, hull.wh_zc, hull.wh_r, hull.wh_sign,
                                                        hull.wh_inner]).reshape(-1, 5))
        self.arch = np.ascontiguousarray(np.column_stack([hull.arch_xc, hull.arch_zc, hull.arch_r]).reshape(-1, 3))
        self.arch_bits = flat(np.asarray(hull.arch_bits, np.int64).reshape(-1))
        members = [list(m) for m in hull.arch_members]
        self.arch_mem_off = np.array([0] + list(np.cumsum([len(m) for m in members])), np.int64)
        self.arch_mem = np.array([h for m in members for h in m], np.int64)
        self.env = np.ascontiguousarray(np.stack([hull.env_x, hull.env_ztop, hull.env_zbot, hull.env_ymax,
                                                  hull.env_ymin]))
        self.box = np.ascontiguousarray(np.stack([hull.box_lo, hull.box_hi]))
        self.default_loss = float(hull.default_loss_db)
        self.wheelhouse_loss = float(hull.wheelhouse_loss_db)


_PACKED: dict[int, tuple[object, PackedHull]] = {}


def packed(hull) -> PackedHull:
    """The packed form of a hull, cached by identity (hulls are frozen)."""
    hit = _PACKED.get(id(hull))
    if hit is not None and hit[0] is hull:
        return hit[1]
    p = PackedHull(hull)
    if len(_PACKED) > 64:
        _PACKED.clear()
    _PACKED[id(hull)] = (hull, p)
    return p


# ----- the compiled kernels -----------------------------------------------------------------------
if numba is not None:

    @njit(cache=True, error_model="numpy", inline="always")
    def _pip(px, py, tab, lo, hi):
        """Crossing-number test (core.geometry.points_in_polygon) of one point against edges tab[lo:hi]."""
        inside = False
        for k in range(lo, hi):
            y0 = tab[k, 1]
            y1 = tab[k, 2]
            if (y0 > py) != (y1 > py):
                xc = tab[k, 0] + (py - y0) * tab[k, 3] / tab[k, 4]
                if px < xc:
                    inside = not inside
        return inside

    @njit(cache=True, error_model="numpy", inline="always")
    def _bits_one(x, y, z, top_pip, side_pip, wh):
        b = np.int64(0)
        if _pip(x, y, top_pip, 0, top_pip.shape[0]):
            b |= 1
        if _pip(x, z, side_pip, 0, side_pip.shape[0]):
            b |= 2
        for h in range(wh.shape[0]):
            dx = x - wh[h, 0]
            dz = z - wh[h, 1]
            r = wh[h, 2]
            if dz >= 0:
                arch = dx * dx + dz * dz < r * r
            else:
                arch = abs(dx) < r
            if arch:
                b |= np.int64(1) << (2 + 2 * h)
            if wh[h, 3] * y > wh[h, 4]:
                b |= np.int64(1) << (3 + 2 * h)
        return b

    @njit(cache=True, error_model="numpy", nogil=True)
    def _start_bits_kernel(p, top_pip, side_pip, wh):
        n = p.shape[0]
        out = np.empty(n, np.int64)
        for i in range(n):
            out[i] = _bits_one(p[i, 0], p[i, 1], p[i, 2], top_pip, side_pip, wh)
        return out

    @njit(cache=True, error_model="numpy", inline="always")
    def _inside_from_bits(bits, n_wh):
        if (bits & 3) != 3:
            return False
        for h in range(n_wh):
            if (bits >> (2 + 2 * h)) & (bits >> (3 + 2 * h)) & 1:
                return False
        return True

    @njit(cache=True, error_model="numpy", inline="always")
    def _interp_at(x, xp, fp, lo, hi):
        """np.interp(x, xp, fp) between the breakpoints lo, hi found by :func:`_bracket` (nan outside)."""
        if lo < 0:
            return np.nan
        if hi == lo:
            return fp[lo]
        slope = (fp[hi] - fp[lo]) / (xp[hi] - xp[lo])
        return slope * (x - xp[lo]) + fp[lo]

    @njit(cache=True, error_model="numpy", inline="always")
    def _bracket(x, xp):
        """Breakpoints (lo, hi) of np.interp around x (lo = hi at the last one); (-1, -1) outside (left/right nan)."""
        n = xp.shape[0]
        if not (x >= xp[0]) or not (x <= xp[n - 1]):
            return -1, -1
        if x == xp[n - 1]:
            return n - 1, n - 1
        lo = 0
        hi = n - 1
        while hi - lo > 1:  # xp[lo] <= x < xp[hi]
            mid = (lo + hi) >> 1
            if xp[mid] <= x:
                lo = mid
            else:
                hi = mid
        return lo, hi

    @njit(cache=True, error_model="numpy", inline="always")
    def _zone_of(px, py, pz, tab, off, zmin, zmax, use_z):
        idx = -1
        for k in range(off.shape[0] - 1):
            if ((not use_z) or (pz >= zmin[k] and pz <= zmax[k])) and _pip(px, py, tab, off[k], off[k + 1]):
                idx = k
        return idx

    @njit(cache=True, error_model="numpy", inline="always")
    def _edge_events(au, av, du, dv, seg, bit, ev_t, ev_b, m):
        """Crossings of the 2-D segment with the outline edges (core.geometry._edge_hits), appended.

        An edge whose bounding box misses the segment's (grown by _BOX_SLACK_M) cannot be crossed
        and is skipped before the division."""
        ulo = min(au, au + du) - _BOX_SLACK_M
        uhi = max(au, au + du) + _BOX_SLACK_M
        vlo = min(av, av + dv) - _BOX_SLACK_M
        vhi = max(av, av + dv) + _BOX_SLACK_M
        for k in range(seg.shape[0]):
            ex = seg[k, 2]
            ey = seg[k, 3]
            x0 = seg[k, 0]
            y0 = seg[k, 1]
            if max(x0, x0 + ex) < ulo or min(x0, x0 + ex) > uhi or max(y0, y0 + ey) < vlo or min(y0, y0 + ey) > vhi:
                continue
            wx = seg[k, 0] - au
            wy = seg[k, 1] - av
            den = du * ey - dv * ex
            if abs(den) > _EPS:
                inv = 1.0 / den
                t = (wx * ey - wy * ex) * inv
                s = (wx * dv - wy * du) * inv
                if t > 0.0 and t < 1.0 and s >= 0.0 and s < 1.0:
                    ev_t[m] = t
                    ev_b[m] = bit
                    m += 1
        return m

    @njit(cache=True, error_model="numpy", inline="always")
    def _row(i, m, off):
        """Row of an input array for segment i: i - off (m = 0), i % m (m > 0) or i // -m (m < 0)."""
        if m > 0:
            return i % m
        if m < 0:
            return i // -m
        return i - off

    @njit(cache=True, error_model="numpy")
    def _segments(i_lo, i_hi, out, a, b, bits0_arr, top_seg, side_seg, wh, arch, arch_bits, arch_mem_off,
                  arch_mem, tz_pip, tz_off, tz_zmin, tz_zmax, tz_loss, sz_pip, sz_off, sz_loss, env, box,
                  default_loss, wheelhouse_loss, lam, n_samples, ev_t, ev_b, ev_o, fl_t, fl_l, fl_d,
                  a_m, b_m, b_off, out_off):
        """Body loss of the segments a -> b, i in [i_lo, i_hi), into out[i - out_off] (one chunk of the parallel
        loop). Segment i runs from a[_row(i, a_m, 0)] (start bits from the same row of bits0_arr) to
        b[_row(i, b_m, b_off)]: so the link kernel (core.link_kernel) pairs sensor states with receivers without
        a copy of them per link."""
        n_wh = wh.shape[0]
        for i in range(i_lo, i_hi):
            ia = _row(i, a_m, 0)
            ib = _row(i, b_m, b_off)
            io = i - out_off
            ax, ay, az = a[ia, 0], a[ia, 1], a[ia, 2]
            bx, by, bz = b[ib, 0], b[ib, 1], b[ib, 2]
            bits0 = bits0_arr[ia]
            lo_x, hi_x = min(ax, bx), max(ax, bx)
            lo_y, hi_y = min(ay, by), max(ay, by)
            lo_z, hi_z = min(az, bz), max(az, bz)
            if hi_x < box[0, 0] or lo_x > box[1, 0] or hi_y < box[0, 1] or lo_y > box[1, 1] \
                    or hi_z < box[0, 2] or lo_z > box[1, 2]:
                out[io] = 0.0
                continue
            dx = bx - ax
            dy = by - ay
            dz = bz - az
            m = 0
            m = _edge_events(ax, ay, dx, dy, top_seg, np.int64(1), ev_t, ev_b, m)
            m = _edge_events(ax, az, dx, dz, side_seg, np.int64(2), ev_t, ev_b, m)
            slack = _BOX_SLACK_M
            for g in range(arch.shape[0]):
                xc = arch[g, 0]
                zc = arch[g, 1]
                r = arch[g, 2]
                if not (hi_x >= xc - r - slack and lo_x <= xc + r + slack and lo_z <= zc + r + slack):
                    continue
                ox = ax - xc
                oz = az - zc
                qa = dx * dx + dz * dz
                qb = 2.0 * (ox * dx + oz * dz)
                qc = ox * ox + oz * oz - r * r
                disc = qb * qb - 4.0 * qa * qc
                if disc > 0 and qa > _EPS:
                    sq = math.sqrt(disc)
                    inv2a = 0.5 / qa
                    for sgn in (-1.0, 1.0):
                        t = (-qb + sgn * sq) * inv2a
                        if t > 0 and t < 1 and oz + t * dz >= 0:
                            ev_t[m] = t
                            ev_b[m] = arch_bits[g]
                            m += 1
                if abs(dx) > _EPS:
                    inv = 1.0 / dx
                    for sgn in (1.0, -1.0):
                        t = (sgn * r - ox) * inv
                        if t > 0 and t < 1 and oz + t * dz < 0:
                            ev_t[m] = t
                            ev_b[m] = arch_bits[g]
                            m += 1
                for j in range(arch_mem_off[g], arch_mem_off[g + 1]):
                    h = arch_mem[j]
                    sg = wh[h, 3]
                    inner = wh[h, 4]
                    reach = hi_y >= inner - slack if sg > 0 else lo_y <= -inner + slack
                    if not reach:
                        continue
                    sdy = sg * dy
                    if abs(sdy) > _EPS:
                        t = (inner - sg * ay) / sdy
                        if t > 0 and t < 1:
                            ev_t[m] = t
                            ev_b[m] = np.int64(1) << (3 + 2 * h)
                            m += 1
            if m == 0:
                out[io] = 0.0
                continue
            # stable insertion sort of the events along the segment
            for e in range(m):
                ev_o[e] = e
            for e in range(1, m):
                k = ev_o[e]
                tk = ev_t[k]
                j = e - 1
                while j >= 0 and ev_t[ev_o[j]] > tk:
                    ev_o[j + 1] = ev_o[j]
                    j -= 1
                ev_o[j + 1] = k
            # membership after each event; flips of the inside-hull state become crossings
            state = bits0
            prev_in = _inside_from_bits(bits0, n_wh)
            nf = 0
            for e in range(m):
                k = ev_o[e]
                eb = ev_b[k]
                state ^= eb
                now_in = _inside_from_bits(state, n_wh)
                if now_in == prev_in:
                    continue
                prev_in = now_in
                t = ev_t[k]
                if eb == 2:  # an end face drawn in both outlines is a wall crossing (core.geometry.hull_flips)
                    before = e > 0 and ev_b[ev_o[e - 1]] == 1 and abs(t - ev_t[ev_o[e - 1]]) < _TIE_T
                    after = e + 1 < m and ev_b[ev_o[e + 1]] == 1 and abs(ev_t[ev_o[e + 1]] - t) < _TIE_T
                    if before or after:
                        eb = 1
                px = ax + t * dx
                if eb == 1:
                    zi = _zone_of(px, az + t * dz, 0.0, sz_pip, sz_off, sz_loss, sz_loss, False)
                    loss = sz_loss[zi] if zi >= 0 else default_loss
                elif eb == 2:
                    zi = _zone_of(px, ay + t * dy, az + t * dz, tz_pip, tz_off, tz_zmin, tz_zmax, True)
                    loss = tz_loss[zi] if zi >= 0 else default_loss
                else:
                    loss = wheelhouse_loss
                fl_t[nf] = t
                fl_l[nf] = loss
                fl_d[nf] = 1 if now_in else -1
                nf += 1
            # panels, and each passage (in, then out) as min(both panels, knife edge over its dominant edge)
            total = 0.0
            length = math.sqrt(dx * dx + dy * dy + dz * dz)
            e = 0
            while e < nf:
                if e + 1 < nf and fl_d[e] == 1 and fl_d[e + 1] == -1:
                    t0 = fl_t[e]
                    t1 = fl_t[e + 1]
                    v_max = -np.inf
                    for s in range(n_samples):
                        ts = t0 + ((s + 0.5) / n_samples) * (t1 - t0)
                        qx = ax + ts * dx
                        qy = ay + ts * dy
                        qz = az + ts * dz
                        jl, jh = _bracket(qx, env[0])
                        ztop = _interp_at(qx, env[0], env[1], jl, jh)
                        zbot = _interp_at(qx, env[0], env[2], jl, jh)
                        ymax = _interp_at(qx, env[0], env[3], jl, jh)
                        ymin = _interp_at(qx, env[0], env[4], jl, jh)
                        if math.isnan(ztop) or math.isnan(zbot) or math.isnan(ymax) or math.isnan(ymin):
                            h = 0.0  # outside an envelope (np.minimum propagates nan, np.fmax makes it 0)
                        else:
                            h = max(min(min(ztop - qz, qz - zbot), min(ymax - qy, qy - ymin)), 0.0)
                        d1 = max(ts * length, 1e-6)
                        d2 = max((1.0 - ts) * length, 1e-6)
                        v = h * math.sqrt(2.0 / lam * (1.0 / d1 + 1.0 / d2))
                        v_max = max(v_max, v)
                    if v_max > _V_MIN_EQ31:
                        x = max(v_max, _V_MIN_EQ31) - 0.1
                        j_db = 6.9 + 20.0 * math.log10(math.hypot(x, 1.0) + x)
                    else:
                        j_db = 0.0
                    pen = fl_l[e] + fl_l[e + 1]
                    total += min(pen, j_db)
                    e += 2
                else:
                    total += fl_l[e]
                    e += 1
            out[io] = total

    @njit(cache=True, error_model="numpy", nogil=True)
    def _body_loss_serial(a, b, bits0, top_seg, side_seg, wh, arch, arch_bits, arch_mem_off, arch_mem, tz_pip,
                          tz_off, tz_zmin, tz_zmax, tz_loss, sz_pip, sz_off, sz_loss, env, box, default_loss,
                          wheelhouse_loss, lam, n_samples, n_chunks):
        """:func:`_body_loss_kernel` on the calling thread (small calls: no thread-pool launch)."""
        n = a.shape[0]
        out = np.zeros(n)
        cap = top_seg.shape[0] + side_seg.shape[0] + 4 * arch.shape[0] + wh.shape[0] + 1
        zero = np.int64(0)  # not the literal 0: one compiled signature of _segments for every caller
        _segments(zero, n, out, a, b, bits0, top_seg, side_seg, wh, arch, arch_bits, arch_mem_off, arch_mem,
                  tz_pip, tz_off, tz_zmin, tz_zmax, tz_loss, sz_pip, sz_off, sz_loss, env, box, default_loss,
                  wheelhouse_loss, lam, n_samples, np.empty(cap), np.empty(cap, np.int64), np.empty(cap, np.int64),
                  np.empty(cap), np.empty(cap), np.empty(cap, np.int8), zero, zero, zero, zero)
        return out

    @njit(cache=True, error_model="numpy", nogil=True, parallel=True)
    def _body_loss_kernel(a, b, bits0, top_seg, side_seg, wh, arch, arch_bits, arch_mem_off, arch_mem, tz_pip,
                          tz_off, tz_zmin, tz_zmax, tz_loss, sz_pip, sz_off, sz_loss, env, box, default_loss,
                          wheelhouse_loss, lam, n_samples, n_chunks):
        n = a.shape[0]
        out = np.zeros(n)
        cap = top_seg.shape[0] + side_seg.shape[0] + 4 * arch.shape[0] + wh.shape[0] + 1
        zero = np.int64(0)
        for c in prange(n_chunks):
            ev_t = np.empty(cap)
            ev_b = np.empty(cap, np.int64)
            ev_o = np.empty(cap, np.int64)
            fl_t = np.empty(cap)
            fl_l = np.empty(cap)
            fl_d = np.empty(cap, np.int8)
            lo = c * n // n_chunks
            hi = (c + 1) * n // n_chunks
            _segments(lo, hi, out, a, b, bits0, top_seg, side_seg, wh, arch, arch_bits, arch_mem_off, arch_mem,
                      tz_pip, tz_off, tz_zmin, tz_zmax, tz_loss, sz_pip, sz_off, sz_loss, env, box, default_loss,
                      wheelhouse_loss, lam, n_samples, ev_t, ev_b, ev_o, fl_t, fl_l, fl_d, zero, zero, zero, zero)
        return out


# ----- entry points -------------------------------------------------------------------------------
def start_bits(hull, points: np.ndarray) -> np.ndarray:
    """Packed membership bits of (N, 3) points (core.geometry.start_bits) by the compiled kernel."""
    p = packed(hull)
    pts = np.ascontiguousarray(np.asarray(points, float).reshape(-1, 3))
    pts = pts if pts.flags.writeable else pts.copy()
    warm_up()
    return _start_bits_kernel(pts, p.top_pip, p.side_pip, p.wh)


def body_loss_db(hull, a: np.ndarray, b: np.ndarray, freq_hz: float, bits0=None) -> np.ndarray:
    """Body loss of the straight paths a -> b (N, 3), dB (core.geometry.body_loss_db) by the compiled kernel."""
    from core.geometry import DIFFRACTION_SAMPLES
    from core.propagation import wavelength_m

    p = packed(hull)
    a = np.ascontiguousarray(np.asarray(a, float).reshape(-1, 3))
    b = np.ascontiguousarray(np.asarray(b, float).reshape(-1, 3))
    if len(a) == 0:
        return np.zeros(0)
    if bits0 is None:
        bits0 = start_bits(hull, a)
    bits0 = np.ascontiguousarray(np.broadcast_to(np.asarray(bits0, np.int64).reshape(-1), (len(a),)))
    # read-only views (broadcasts) would compile a second specialisation of the kernel: pass copies
    a, b, bits0 = (x if x.flags.writeable else x.copy() for x in (a, b, bits0))
    lam = float(wavelength_m(freq_hz))
    warm_up()
    threads = numba.get_num_threads()
    args = (a, b, bits0, p.top_seg, p.side_seg, p.wh, p.arch, p.arch_bits, p.arch_mem_off, p.arch_mem, p.tz_pip,
            p.tz_off, p.tz_zmin, p.tz_zmax, p.tz_loss, p.sz_pip, p.sz_off, p.sz_loss, p.env, p.box, p.default_loss,
            p.wheelhouse_loss, lam, DIFFRACTION_SAMPLES, min(len(a), 16 * threads))
    # the parallel kernel when its thread pool is free; a caller finding it busy (another Python thread,
    # e.g. a pool of heatmap cells) computes on its own thread instead of waiting: the same results, bit for bit
    if threads > 1 and len(a) >= PARALLEL_MIN_SEGMENTS and _LOCK.acquire(blocking=False):
        try:
            return _body_loss_kernel(*args)
        finally:
            _LOCK.release()
    return _body_loss_serial(*args)

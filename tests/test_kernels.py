"""The compiled kernels (core.kernels: body loss; core.link_kernel: the whole link field and the fade
quantile) against the pure-numpy reference path (core.geometry, core.links).

The numpy path is the reference: both compute the same panel crossings and the same ITU-R P.526-15
single knife edge (eq. 26 and 31) over each passage's dominant edge, so they must agree to round-off;
the acceptance bound of issue 17 is 0.01 dB on every level. Random inputs use fixed seeds.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from core.samples import DEFAULT_SAMPLE

from core import geometry, kernels, link_kernel, links
from core.scoring import Cancelled, Scene, heatmap, heatmap_stages, score_spots, spot_levels, vehicle_spot_arrays
from core.vehicle import load_vehicle

pytestmark = pytest.mark.skipif(not kernels.enabled(), reason="numba not installed or WHEELREACH_KERNEL=numpy: only the numpy path")

SAMPLES = sorted(Path(DEFAULT_SAMPLE).parent.glob("*.json"))
TOL_DB = 0.01  # issue 17 acceptance bound


def _random_segments(hull, n: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
    """n segments with both ends uniform in the hull's box grown by 0.5 m (inside, outside, through)."""
    rng = np.random.default_rng(seed)
    lo, hi = hull.box_lo - 0.5, hull.box_hi + 0.5
    return lo + rng.random((n, 3)) * (hi - lo), lo + rng.random((n, 3)) * (hi - lo)


def _spots(v, scene, n_random: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
    """The file's spots plus random points of the hull's box, with the receiver axis."""
    _, pos, axes = vehicle_spot_arrays(v)
    rng = np.random.default_rng(seed)
    lo, hi = scene.hull.box_lo, scene.hull.box_hi
    extra = lo + rng.random((n_random, 3)) * (hi - lo)
    a = np.asarray(v.radio.receiver.axis, float)
    axes = np.vstack([axes.reshape(-1, 3), np.broadcast_to(a / np.linalg.norm(a), extra.shape)])
    return np.vstack([pos.reshape(-1, 3), extra]), axes


@pytest.mark.parametrize("path", SAMPLES, ids=lambda p: p.stem)
def test_body_loss_matches_numpy_on_random_segments(path):
    scene = Scene.from_vehicle(load_vehicle(path), wheel_model="knife_edge")
    a, b = _random_segments(scene.hull, 4000, seed=17)
    ref = geometry._body_loss_numpy(scene.hull, a, b, scene.freq_hz, None, False)
    got = kernels.body_loss_db(scene.hull, a, b, scene.freq_hz)
    assert (ref > 0).mean() > 0.3, "the random segments must cross the body often for the check to mean anything"
    assert np.max(np.abs(got - ref)) < TOL_DB
    # with the start bits given (as the engine passes the sensor positions')
    bits = geometry.start_bits(scene.hull, a[:, 0], a[:, 1], a[:, 2])
    assert np.array_equal(kernels.start_bits(scene.hull, a), bits)
    got_b = kernels.body_loss_db(scene.hull, a, b, scene.freq_hz, bits)
    assert np.array_equal(got_b, got)


@pytest.mark.parametrize("path", SAMPLES, ids=lambda p: p.stem)
@pytest.mark.parametrize("wheel_model", ["knife_edge", "installed_pattern"])
@pytest.mark.parametrize("road", [True, False], ids=["road", "no_road"])
def test_levels_match_numpy_path(path, wheel_model, road, monkeypatch):
    """spot_levels (all wheels, all angles) of the file's spots and random spots, kernel vs numpy path."""
    v = load_vehicle(path)
    scene = Scene.from_vehicle(v, wheel_model=wheel_model, ground_reflection=road)
    spots, axes = _spots(v, scene, 6, seed=3)
    monkeypatch.setenv(kernels.ENV_VAR, "numpy")
    assert kernels.kernel_name() == "numpy"
    ref = spot_levels(scene, spots, axes)
    monkeypatch.setenv(kernels.ENV_VAR, "numba")
    assert kernels.kernel_name() == "numba"
    got = spot_levels(scene, spots, axes)
    assert np.isfinite(ref).all() and ref.shape == got.shape
    assert np.max(np.abs(got - ref)) < TOL_DB


def test_parallel_and_chunked_runs_are_identical(monkeypatch):
    """One thread or all, one call or chunks, the kernel returns the same bits; so does a chunked score."""
    scene = Scene.from_vehicle(load_vehicle(DEFAULT_SAMPLE), wheel_model="knife_edge")
    a, b = _random_segments(scene.hull, 20_000, seed=5)
    monkeypatch.setattr(kernels, "PARALLEL_MIN_SEGMENTS", 1)
    n_all = kernels.max_threads()
    try:
        kernels.set_threads(1)
        one = kernels.body_loss_db(scene.hull, a, b, scene.freq_hz)
        kernels.set_threads(n_all)
        many = kernels.body_loss_db(scene.hull, a, b, scene.freq_hz)
    finally:
        kernels.set_threads(n_all)
    parts = np.concatenate([kernels.body_loss_db(scene.hull, a[i:i + 3001], b[i:i + 3001], scene.freq_hz)
                            for i in range(0, len(a), 3001)])
    assert np.array_equal(one, many) and np.array_equal(one, parts)
    v = load_vehicle(DEFAULT_SAMPLE)
    spots, axes = _spots(v, scene, 12, seed=9)
    whole = score_spots(scene, spots, axes, chunk_links=10**9)
    chunked = score_spots(scene, spots, axes, chunk_links=500)
    assert np.array_equal(whole.worst_dbm, chunked.worst_dbm)


def test_cancelled_staged_and_thread_pool_heatmaps_are_identical():
    """On the kernel: a heatmap cancelled part-way and then run again, the staged (progressive) heatmap and the
    cells scored on a pool of Python threads (the serial kernel runs without a lock, the GIL released) all give
    the margins of one uninterrupted call, bit for bit."""
    from concurrent.futures import ThreadPoolExecutor

    assert kernels.kernel_name() == "numba"
    v = load_vehicle(DEFAULT_SAMPLE)
    scene = Scene.from_vehicle(v, wheel_model="knife_edge")
    region = next(r for r in v.regions if r.view == "top")
    step = 0.12
    ref = heatmap(scene, region, step, chunk_links=3000)
    calls = []

    def cancel():
        calls.append(1)
        return len(calls) > 3

    with pytest.raises(Cancelled):
        heatmap(scene, region, step, cancel=cancel, chunk_links=3000)
    again = heatmap(scene, region, step, chunk_links=3000)
    staged = list(heatmap_stages(scene, region, step, chunk_links=3000))[-1]
    assert np.isfinite(ref.margin_db).sum() > 20
    for other in (again, staged):
        assert np.array_equal(other.margin_db, ref.margin_db, equal_nan=True)
    pts = ref.points()[np.isfinite(ref.margin_db)]
    one = score_spots(scene, pts).margin_db
    with ThreadPoolExecutor(max_workers=2) as pool:
        parts = list(pool.map(lambda p: score_spots(scene, p).margin_db, np.array_split(pts, 4)))
    assert np.array_equal(np.concatenate(parts), one)


def test_warm_up_covers_the_engine_and_a_background_warm_up_leaves_numpy_serving(monkeypatch):
    """The warm-up compiles the very specialisation the engine calls (one signature per kernel after real
    work: nothing compiles later, e.g. in a front end's event loop); while a background warm-up is still
    running, body losses take the numpy path (nobody waits for the compiler) and equal it exactly."""
    v = load_vehicle(DEFAULT_SAMPLE)
    scene = Scene.from_vehicle(v, wheel_model="knife_edge")
    _, pos, axes = vehicle_spot_arrays(v)
    spot_levels(scene, pos, axes)
    score_spots(scene, pos, axes)  # the refinement and the fade quantile too
    for k in (kernels._body_loss_serial, kernels._body_loss_kernel, kernels._start_bits_kernel,
              link_kernel._links_serial, link_kernel._links_parallel, link_kernel._fade_kernel,
              link_kernel._fade_parallel, link_kernel._quad_serial, link_kernel._quad_parallel):
        assert len(k.signatures) == 1, k
    a, b = _random_segments(scene.hull, 500, seed=11)
    monkeypatch.setattr(kernels, "_READY", __import__("threading").Event())
    warming = __import__("threading").Event()
    warming.set()
    monkeypatch.setattr(kernels, "_WARMING", warming)
    assert kernels.warming() and not kernels.available() and kernels.kernel_name() == "numpy"
    assert "while the compiled kernel is prepared" in kernels.status()
    assert kernels.start_warm_up() is False  # one warm-up at a time
    got = geometry.body_loss_db(scene.hull, a, b, scene.freq_hz)
    assert np.array_equal(got, geometry._body_loss_numpy(scene.hull, a, b, scene.freq_hz, None, False))


_CHILD = """
import json, sys
if sys.argv[1] == "missing":
    sys.modules["numba"] = None  # import numba -> ImportError: as if it were not installed
from core import kernels
from core.scoring import Scene, spot_levels, vehicle_spot_arrays
from core.samples import DEFAULT_SAMPLE
from core.vehicle import load_vehicle
v = load_vehicle(DEFAULT_SAMPLE)
_, pos, axes = vehicle_spot_arrays(v)
lv = spot_levels(Scene.from_vehicle(v, wheel_model="knife_edge"), pos, axes)
print(json.dumps({"kernel": kernels.kernel_name(), "numba_loaded": "numba.core" in sys.modules,
                  "levels": lv.ravel().tolist()}))
"""


@pytest.mark.parametrize("how", ["disabled", "missing"])
def test_runs_on_numpy_without_the_kernel(how):
    """WHEELREACH_KERNEL=numpy, or numba not importable: the engine runs on numpy and gives the same levels."""
    env = dict(os.environ)
    env[kernels.ENV_VAR] = "numpy" if how == "disabled" else "numba"
    out = subprocess.run([sys.executable, "-c", _CHILD, how], env=env, capture_output=True, text=True,
                         check=True, cwd=str(Path(__file__).parents[1]))
    res = json.loads(out.stdout.strip().splitlines()[-1])
    assert res["kernel"] == "numpy"
    if how == "missing":
        assert not res["numba_loaded"]
    v = load_vehicle(DEFAULT_SAMPLE)
    _, pos, axes = vehicle_spot_arrays(v)
    here = spot_levels(Scene.from_vehicle(v, wheel_model="knife_edge"), pos, axes).ravel()
    assert kernels.kernel_name() == "numba"
    assert np.max(np.abs(np.asarray(res["levels"]) - here)) < TOL_DB


def _random_links(scene, n: int, seed: int):
    """n random links: any wheel, any wheel angle (between the sampled ones), receivers anywhere in the hull's
    box grown by 0.3 m with random unit axes; the arguments of core.links.link_field."""
    rng = np.random.default_rng(seed)
    wheel = rng.integers(0, len(scene.wheels), n)
    theta = rng.random(n) * 2.0 * np.pi
    src, s_axis, bits0 = links.sensor_states(scene, wheel, theta)
    lo, hi = scene.hull.box_lo - 0.3, scene.hull.box_hi + 0.3
    dst = lo + rng.random((n, 3)) * (hi - lo)
    r_axis = rng.normal(size=(n, 3))
    r_axis /= np.linalg.norm(r_axis, axis=1, keepdims=True)
    return wheel, theta, src, s_axis, bits0, dst, r_axis


def _db(p):
    return 10.0 * np.log10(np.maximum(p, 1e-60))


@pytest.mark.parametrize("path", SAMPLES, ids=lambda p: p.stem)
@pytest.mark.parametrize("wheel_model", ["knife_edge", "installed_pattern"])
@pytest.mark.parametrize("road", [True, False], ids=["road", "no_road"])
def test_link_field_matches_numpy_on_random_links(path, wheel_model, road):
    """core.link_kernel.link_field against core.links.link_field_numpy on 3,000 random links per case: the
    coherent part, the null floor and the diffuse part each within 0.01 dB, and the scored power (Rician
    quantile); also with isotropic antennas, without the cabin and without the fade quantile."""
    import dataclasses

    base = Scene.from_vehicle(load_vehicle(path), wheel_model=wheel_model, ground_reflection=road)
    assert base.cavity is not None and base.fade_probability > 0
    variants = [base, dataclasses.replace(base, cavity=None), dataclasses.replace(base, fade_probability=0.0)]
    if base.sensor_kind != "table":
        variants += [dataclasses.replace(base, sensor_kind="isotropic"),
                     dataclasses.replace(base, sensor_kind="isotropic", receiver_pattern="isotropic"),
                     dataclasses.replace(base, receiver_pattern="isotropic")]
    else:
        variants += [dataclasses.replace(base, receiver_pattern="isotropic")]
    for k, scene in enumerate(variants):
        args = _random_links(scene, 3000, seed=100 + k)
        ref = links.link_field_numpy(scene, *args)
        got = link_kernel.link_field(scene, *args)
        coh_ref, coh = ref.coherent_power(), got.coherent_power()
        assert (ref.re * ref.re + ref.im * ref.im > ref.floor2).mean() > 0.5  # mostly above the floor: a real check
        assert np.max(np.abs(_db(coh) - _db(coh_ref))) < TOL_DB
        assert np.max(np.abs(_db(got.floor2) - _db(ref.floor2))) < TOL_DB
        assert np.allclose(got.re, ref.re, rtol=1e-9, atol=1e-12 * np.abs(ref.re).max())
        assert np.allclose(got.im, ref.im, rtol=1e-9, atol=1e-12 * np.abs(ref.im).max())
        assert np.allclose(np.broadcast_to(got.diffuse, (3000,)), np.broadcast_to(ref.diffuse, (3000,)),
                           rtol=1e-9, atol=0.0)
        assert got.fade_q == ref.fade_q
        assert np.max(np.abs(_db(got.power()) - _db(ref.power()))) < TOL_DB


def test_fade_power_matches_numpy(monkeypatch):
    """The compiled Rician quantile (core.link_kernel.fade_power) equals core.links.fade_power's table
    interpolation over K from 0 (and no steady part) to 1e8 (the normal limit above the table), broadcast
    diffuse arrays and links without a diffuse part."""
    rng = np.random.default_rng(4)
    coh = 10.0 ** rng.uniform(-12, 2, (50, 40))
    coh[0] = 0.0
    dif = 10.0 ** rng.uniform(-8, -2, (50, 1))
    dif[3] = 0.0
    for q in (0.01, 0.1, 0.5):
        got = link_kernel.fade_power(coh, dif, q, links._fade_table(q))
        monkeypatch.setenv(kernels.ENV_VAR, "numpy")
        ref = links.fade_power(coh, dif, q)
        monkeypatch.setenv(kernels.ENV_VAR, "numba")
        assert got.shape == ref.shape == coh.shape
        assert np.array_equal(got[3], coh[3])  # no diffuse part: the coherent power itself
        assert np.max(np.abs(_db(got) - _db(ref))) < 1e-9
        assert np.array_equal(links.fade_power(coh, dif, q), got)  # the engine's call takes the kernel
    big = np.tile(coh, (40, 20))  # large enough for the parallel kernel: the same bits
    big_d = np.tile(dif, (40, 1))
    monkeypatch.setattr(kernels, "PARALLEL_MIN_SEGMENTS", 8)
    par = link_kernel.fade_power(big, big_d, 0.01, links._fade_table(0.01))
    monkeypatch.setattr(kernels, "PARALLEL_MIN_SEGMENTS", 10**12)
    assert np.array_equal(par, link_kernel.fade_power(big, big_d, 0.01, links._fade_table(0.01)))


@pytest.mark.parametrize("path", SAMPLES, ids=lambda p: p.stem)
@pytest.mark.parametrize("wheel_model", ["knife_edge", "installed_pattern"])
def test_refined_worst_case_matches_numpy_path(path, wheel_model, monkeypatch):
    """score_spots (levels, the minimum over the continuous turn, its angle, margins) on the kernel and on the
    numpy path: within 0.01 dB, the same worst wheel."""
    v = load_vehicle(path)
    scene = Scene.from_vehicle(v, wheel_model=wheel_model)
    spots, axes = _spots(v, scene, 5, seed=21)
    monkeypatch.setenv(kernels.ENV_VAR, "numpy")
    ref = score_spots(scene, spots, axes)
    monkeypatch.setenv(kernels.ENV_VAR, "numba")
    got = score_spots(scene, spots, axes)
    assert np.max(np.abs(got.levels_dbm - ref.levels_dbm)) < TOL_DB
    assert np.max(np.abs(got.worst_dbm - ref.worst_dbm)) < TOL_DB
    assert np.max(np.abs(got.margin_db - ref.margin_db)) < TOL_DB
    assert np.array_equal(got.worst_wheel, ref.worst_wheel)


def test_link_field_parallel_and_chunked_are_identical(monkeypatch):
    """The compiled link field on 1 thread or all, in one call or in chunks, serial or parallel: the same bits."""
    scene = Scene.from_vehicle(load_vehicle(DEFAULT_SAMPLE), wheel_model="knife_edge")
    args = _random_links(scene, 20_000, seed=8)
    n_all = kernels.max_threads()
    monkeypatch.setattr(kernels, "PARALLEL_MIN_SEGMENTS", 1)
    try:
        kernels.set_threads(1)
        one = link_kernel.link_field(scene, *args)
        kernels.set_threads(n_all)
        many = link_kernel.link_field(scene, *args)
    finally:
        kernels.set_threads(n_all)
    monkeypatch.setattr(kernels, "PARALLEL_MIN_SEGMENTS", 10**9)
    serial = link_kernel.link_field(scene, *args)
    parts = [link_kernel.link_field(scene, *(a[i:i + 2999] for a in args)) for i in range(0, 20_000, 2999)]
    for f in (many, serial):
        for x in ("re", "im", "floor2", "diffuse"):
            assert np.array_equal(getattr(f, x), getattr(one, x)), x
    for x in ("re", "im", "floor2", "diffuse"):
        assert np.array_equal(np.concatenate([getattr(p, x) for p in parts]), getattr(one, x)), x


def test_quad_grid_minimum_matches_numpy(monkeypatch):
    """The compiled grid search of core.turn_minimum's interpolation step (core.link_kernel.quad_grid_minimum)
    against its numpy form: the same first grid index of the minimum and its value, with and without the fade
    quantile, serial and parallel."""
    from core.turn_minimum import _T

    rng = np.random.default_rng(12)
    shape = (3000, 3)

    def cplx():
        return rng.normal(size=shape) + 1j * rng.normal(size=shape)

    v0, bq, cq = cplx() * 1e-2, cplx() * 1e-2, cplx() * 1e-2
    f0, f2 = 10.0 ** rng.uniform(-8, -5, shape), 10.0 ** rng.uniform(-8, -5, shape)
    g0, g2 = 10.0 ** rng.uniform(-7, -3, shape), 10.0 ** rng.uniform(-7, -3, shape)
    g0[0] = g2[0] = 0.0
    tt = _T[None, None, :]
    qr = v0.real[..., None] + tt * (bq.real[..., None] + tt * cq.real[..., None])
    qi = v0.imag[..., None] + tt * (bq.imag[..., None] + tt * cq.imag[..., None])
    for q in (0.0, 0.01):
        monkeypatch.setenv(kernels.ENV_VAR, "numpy")
        qp = links.fade_power(np.maximum(qr * qr + qi * qi, f0[..., None] + tt * (f2 - f0)[..., None]),
                              g0[..., None] + tt * (g2 - g0)[..., None], q)
        monkeypatch.setenv(kernels.ENV_VAR, "numba")
        i_ref = np.argmin(qp, axis=-1)
        v_ref = np.take_along_axis(qp, i_ref[..., None], axis=-1)[..., 0]
        assert len(np.unique(i_ref)) > 10  # minima all over the grid: a real check
        monkeypatch.setattr(kernels, "PARALLEL_MIN_SEGMENTS", 10**12)
        i_s, v_s = link_kernel.quad_grid_minimum(v0, bq, cq, f0, f2, g0, g2, _T, q)
        monkeypatch.setattr(kernels, "PARALLEL_MIN_SEGMENTS", 1)
        i_p, v_p = link_kernel.quad_grid_minimum(v0, bq, cq, f0, f2, g0, g2, _T, q)
        assert np.array_equal(i_s, i_ref) and np.array_equal(i_p, i_s) and np.array_equal(v_p, v_s)
        assert np.allclose(v_s, v_ref, rtol=1e-12, atol=0.0)


def test_installed_pattern_looked_up_in_numpy_when_tables_cannot_be_packed(monkeypatch):
    """Wheel tables the kernel cannot pack together (e.g. grids of different sizes) are looked up by
    core.wheel_patterns in numpy and handed to the kernel: the same link field as the compiled lookup."""
    scene = Scene.from_vehicle(load_vehicle(DEFAULT_SAMPLE), wheel_model="installed_pattern")
    assert scene.sensor_kind == "table" and link_kernel._compiled_tables(scene) is not None
    args = _random_links(scene, 2000, seed=31)
    compiled = link_kernel.link_field(scene, *args)
    monkeypatch.setattr(link_kernel, "_compiled_tables", lambda sc: None)
    looked_up = link_kernel.link_field(scene, *args)
    ref = links.link_field_numpy(scene, *args)
    for f in (compiled, looked_up):
        assert np.max(np.abs(_db(f.power()) - _db(ref.power()))) < TOL_DB
    assert not np.array_equal(compiled.re, np.zeros_like(compiled.re))


@pytest.mark.parametrize("path", SAMPLES, ids=lambda p: p.stem)
def test_burst_frames_match_numpy_path(path, monkeypatch):
    """The compiled burst maxima (core.burst._best_frames_kernel) give the numpy path's success and burst
    margin bit for bit, for every spot of every sample (the same levels fed to both)."""
    from core.burst import burst_for_spot

    v = load_vehicle(path)
    scene = Scene.from_vehicle(v)
    names, pos, axes = vehicle_spot_arrays(v)
    sc = score_spots(scene, pos, axes, names)
    for i in range(len(names)):
        got = burst_for_spot(scene, sc, i)
        monkeypatch.setenv(kernels.ENV_VAR, "numpy")
        ref = burst_for_spot(scene, sc, i)
        monkeypatch.setenv(kernels.ENV_VAR, "numba")
        assert np.array_equal(got.success, ref.success), names[i]
        assert np.array_equal(got.margin_db, ref.margin_db), names[i]
    assert len(__import__("core.burst").burst._best_frames_kernel.signatures) == 1  # the warm-up's signature

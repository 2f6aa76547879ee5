"""Whole-vehicle NEC-2 reference runs behind docs/VALIDATION.md (heavy: minutes per body and frequency).

    nice -n 10 python validation/fullwave_vehicle.py run hatchback:l8_contents sedan:l8_contents ...
    nice -n 10 python validation/fullwave_vehicle.py run small_box:l8_contents   # the tests' small body
    python validation/fullwave_vehicle.py summary      # statistics and convergence from the stored levels
    nice -n 10 python validation/fullwave_vehicle.py refresh hatchback:l8_empty "platform rear floor"

``run`` solves each BODY:CONFIG (BODY a sample vehicle name, CONFIG one of CONFIGS) at the band
centre and +-1, +-2 % (5 frequencies), appending one row per (spot, wheel, angle) to
tests/data/fullwave_levels_<body>.csv and one line per solve to tests/data/fullwave_runs.csv; a
(body, config, frequency) already stored is skipped, so an interrupted run resumes, and a frequency
that a configuration differing only in its frequency set has stored is copied, not solved again.
``refresh`` solves the named spots again at every stored frequency of BODY:CONFIG and replaces their
rows (after a spot's position changed: a landmark rule, a sample edit), printing how far they moved. ``summary``
writes tests/data/fullwave_summary.csv: per body and configuration, the spot statistics (minimum,
10th percentile and median over the turn of the frequency-averaged level, worst wheel) and, where
two configurations of one body differ in one step (mesh, contents, frequency averaging), how that
step moves them (Spearman rho between spots, mean and max change). One solver process at a time.
"""

from __future__ import annotations

import csv
import dataclasses
import datetime as _dt
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from core.samples import SAMPLES_DIR

from core.fullwave import vehicle_reference as vr
from core.fullwave.vehicle_grid import ContentsSpec
from core.vehicle import load_vehicle

DATA = ROOT / "tests" / "data"
#: Reference configurations: body grid, cabin contents (the other settings are ReferenceSetup defaults).
CONFIGS = {
    "l8_contents": vr.ReferenceSetup(cells_per_wavelength=8.0, contents=ContentsSpec()),
    "l8_empty": vr.ReferenceSetup(cells_per_wavelength=8.0, contents=None),
    "l10_contents": vr.ReferenceSetup(cells_per_wavelength=10.0, contents=ContentsSpec()),
    "l10_empty": vr.ReferenceSetup(cells_per_wavelength=10.0, contents=None),
    # frequency averaging over a wider band: 13 frequencies over +-6 % (1 % apart) instead of 5 over +-2 %
    "l8_empty_wide": vr.ReferenceSetup(cells_per_wavelength=8.0, contents=None, n_frequencies=13, span=0.06),
    # the same 1 % steps over +-4 % (9 frequencies): the average whose ranking repeats (docs/VALIDATION.md)
    "l8_empty_4pc": vr.ReferenceSetup(cells_per_wavelength=8.0, contents=None, n_frequencies=9, span=0.04),
    "l8_contents_wide": vr.ReferenceSetup(cells_per_wavelength=8.0, contents=ContentsSpec(), n_frequencies=13,
                                          span=0.06),
    # the wheels' own mesh: rims and belt at lambda/10 (first hatchback runs) instead of lambda/12 + lambda/20
    "l8_contents_w10": vr.ReferenceSetup(cells_per_wavelength=8.0, contents=ContentsSpec(),
                                         wheel_cells_per_wavelength=10.0, belt_cells_per_wavelength=10.0),
}
#: (step, configuration before, configuration after) compared by ``summary``.
STEPS = [
    ("mesh lambda/8 -> lambda/10 (contents)", "l8_contents", "l10_contents"),
    ("mesh lambda/8 -> lambda/10 (empty)", "l8_empty", "l10_empty"),
    ("contents: empty -> 2 occupants (lambda/8)", "l8_empty", "l8_contents"),
    ("contents: empty -> 2 occupants (lambda/10)", "l10_empty", "l10_contents"),
    ("wheels lambda/10 -> rims lambda/12, belt lambda/20", "l8_contents_w10", "l8_contents"),
]
STATS = ("min", "p10", "median")


def levels_path(body: str) -> Path:
    return DATA / f"fullwave_levels_{body}.csv"


def _stored(body: str) -> set[tuple[str, float]]:
    p = levels_path(body)
    if not p.exists():
        return set()
    with p.open(newline="") as fh:
        return {(r["config"], round(float(r["freq_mhz"]), 3)) for r in csv.DictReader(fh)}


def _vehicle(body: str):
    """A sample vehicle by name, or ``small_box`` (tests/validation/fullwave_vehicles.py, for the tests)."""
    if body == "small_box":
        sys.path.insert(0, str(ROOT / "tests" / "validation"))
        from fullwave_vehicles import small_box

        return small_box()
    return load_vehicle(SAMPLES_DIR / f"{body}.json")


def _same_solution(a: vr.ReferenceSetup, b: vr.ReferenceSetup) -> bool:
    """Two setups give the same solve at a shared frequency (they differ at most in the frequency set)."""
    keep = {"n_frequencies": 1, "span": 0.0}
    return dataclasses.replace(a, **keep) == dataclasses.replace(b, **keep)


def _read_rows(body: str) -> list[dict]:
    with levels_path(body).open(newline="") as fh:
        return list(csv.DictReader(fh))


def _write_rows(body: str, rows: list[dict]) -> None:
    """Replace the level file in one step (a temporary file renamed over it)."""
    path = levels_path(body)
    tmp = path.with_suffix(".tmp")
    with tmp.open("w", newline="") as fh:
        w = csv.DictWriter(fh, fieldnames=list(vr.LEVEL_COLUMNS))
        w.writeheader()
        w.writerows(rows)
    tmp.replace(path)


def _copy_frequency(body: str, config: str, freq_mhz: float) -> str | None:
    """Copy the rows of a configuration that solved the same setup at freq_mhz; its name, or None."""
    donors = [c for c in CONFIGS if c != config and _same_solution(CONFIGS[c], CONFIGS[config])]
    rows = _read_rows(body) if levels_path(body).exists() else []
    for donor in donors:
        got = [r for r in rows if r["config"] == donor and round(float(r["freq_mhz"]), 3) == round(freq_mhz, 3)]
        if got:
            with levels_path(body).open("a", newline="") as fh:
                csv.DictWriter(fh, fieldnames=list(vr.LEVEL_COLUMNS)).writerows([r | {"config": config} for r in got])
            return donor
    return None


def run(items: list[str]) -> None:
    for item in items:
        body, config = item.split(":")
        setup = CONFIGS[config]
        v = _vehicle(body)
        done = _stored(body)
        for f in vr.band_frequencies(v.radio.frequency_hz, setup.n_frequencies, setup.span):
            if (config, round(f / 1e6, 3)) in done:
                continue
            donor = _copy_frequency(body, config, f / 1e6)
            if donor is not None:
                print(f"{body} {config} {f / 1e6:.3f} MHz: copied from {donor}", flush=True)
                continue
            t0 = time.time()
            res = vr.solve_frequency(v, f, setup)
            vr.write_levels_csv(levels_path(body), body, config, res)
            runs = DATA / "fullwave_runs.csv"
            new = not runs.exists()
            with runs.open("a", newline="") as fh:
                w = csv.writer(fh)
                if new:
                    w.writerow(["body", "config", "freq_mhz", "segments", "symmetric", "wall_s", "date", "setup"])
                w.writerow([body, config, f"{f / 1e6:.4f}", res["segments"], res["mirror_y"],
                            f"{time.time() - t0:.1f}", _dt.date.today().isoformat(), setup.label()])
            print(f"{body} {config} {f / 1e6:.3f} MHz: {res['segments']} segments, {time.time() - t0:.0f} s",
                  flush=True)


def refresh(item: str, spot_names: list[str]) -> None:
    """Solve the named spots again at every stored frequency of BODY:CONFIG and replace their rows."""
    from core.scoring import vehicle_spot_arrays

    body, config = item.split(":")
    v = _vehicle(body)
    names, pos, axes = vehicle_spot_arrays(v)
    idx = [names.index(s) for s in spot_names]
    spots = ([names[i] for i in idx], pos[idx], axes[idx])
    freqs = sorted({float(r["freq_mhz"]) for r in _read_rows(body) if r["config"] == config})
    for fm in freqs:
        t0 = time.time()
        res = vr.solve_frequency(v, fm * 1e6, CONFIGS[config], spots=spots)
        new = {}
        for i, s in enumerate(res["names"]):
            for j, wid in enumerate(res["wheel_ids"]):
                for k, a in enumerate(res["angles_deg"]):
                    new[(s, wid, f"{a:g}")] = f"{res['levels_dbm'][i, j, k]:.3f}"
        rows, moved = _read_rows(body), []
        for r in rows:
            key = (r["spot"], r["wheel"], r["angle_deg"])
            if r["config"] == config and round(float(r["freq_mhz"]), 3) == round(fm, 3) and key in new:
                moved.append(abs(float(new[key]) - float(r["level_dbm"])))
                r["level_dbm"] = new[key]
        if len(moved) != len(new):
            raise SystemExit(f"{body} {config} {fm} MHz: {len(moved)} stored rows for {len(new)} solved")
        _write_rows(body, rows)
        print(f"{body} {config} {fm:.3f} MHz: {len(moved)} rows replaced, moved median {np.median(moved):.2f} dB, "
              f"max {max(moved):.2f} dB, {time.time() - t0:.0f} s", flush=True)


def spot_statistics(entry: dict, freq_index=None) -> dict:
    """Spot statistics (worst wheel) of one stored (body, config): frequency-averaged, or one frequency."""
    lv = entry["levels_dbm"]
    avg = vr.frequency_average_db(lv) if freq_index is None else lv[freq_index]
    st = vr.turn_statistics(avg, 10.0)
    return {k: st[k]["spot"] for k in STATS}


def _band_rows(body: str, config: str, entry: dict) -> list[dict]:
    """Rows for a configuration solved over more than +-2 %: how widening the average moves the spot
    statistics (+-2 -> +-4 -> +-6 %), and the split-half agreement of each width (vr.frequency_halves)."""
    rows, before = [], None
    if len(entry["freq_mhz"]) <= 5:
        return rows
    for span in (0.02, 0.04, 0.06):
        band = vr.within_band(entry, span)
        if before is not None and len(band["freq_mhz"]) == len(before[1]["freq_mhz"]):
            break
        st = spot_statistics(band)
        for k in STATS:
            found = []
            if before is not None:
                found.append((f"frequency: +-{before[0]:.0%} -> +-{span:.0%} average", vr.agreement(before[2][k], st[k])))
            halves = vr.frequency_halves(band["levels_dbm"], k)
            found += [(f"frequency halves +-{span:.0%}: {split}", halves[split]) for split in ("interleaved", "low_high")]
            rows += [{"body": body, "step": step, "config": config, "statistic": k, "rho": a["rho"],
                      "mean_change_db": a["offset_db"], "rms_change_db": a["rms_db"], "max_change_db": a["max_db"],
                      "spots": a["n"]} for step, a in found]
        before = (span, band, st)
    return rows


def summary() -> list[dict]:
    rows = []
    for path in sorted(DATA.glob("fullwave_levels_*.csv")):
        data = vr.load_reference_csv(path)
        for (body, config), e in sorted(data.items()):
            nf = len(e["freq_mhz"])
            st = spot_statistics(e)
            centre = spot_statistics(e, nf // 2)
            for k in STATS:
                # frequency averaging: the centre frequency alone vs the average (same mesh and contents)
                a = vr.agreement(centre[k], st[k])
                rows.append({"body": body, "step": f"frequency: centre only -> {nf}-point average", "config": config,
                             "statistic": k, "rho": a["rho"], "mean_change_db": a["offset_db"],
                             "rms_change_db": a["rms_db"], "max_change_db": a["max_db"], "spots": a["n"]})
                # single frequencies against each other: the spread that averaging removes
                per_f = [spot_statistics(e, i)[k] for i in range(nf)]
                rhos = [vr.agreement(per_f[i], per_f[j])["rho"] for i in range(nf) for j in range(i + 1, nf)]
                spread = np.max(per_f, axis=0) - np.min(per_f, axis=0)
                rows.append({"body": body, "step": "single frequencies against each other", "config": config,
                             "statistic": k, "rho": float(np.min(rhos)) if rhos else float("nan"),
                             "mean_change_db": float(np.mean(spread)), "rms_change_db": float("nan"),
                             "max_change_db": float(np.max(spread)), "spots": len(spread)})
            rows += _band_rows(body, config, e)
        for (body, config), e in sorted(data.items()):
            if body == "small_box" or len(e["freq_mhz"]) < 5:
                continue
            for k in STATS:  # the engine as it is at this commit (free space) against the reference
                a = vr.compare_stored(_vehicle(body), e, k)
                rows.append({"body": body, "step": "engine (this commit, no ground) vs reference", "config": config,
                             "statistic": k, "rho": a["rho"], "mean_change_db": a["offset_db"],
                             "rms_change_db": a["rms_db"], "max_change_db": a["max_db"], "spots": a["n"]})
        bodies = {b for b, _ in data}
        for body in bodies:
            for step, c0, c1 in STEPS:
                if (body, c0) not in data or (body, c1) not in data:
                    continue
                s0, s1 = spot_statistics(data[(body, c0)]), spot_statistics(data[(body, c1)])
                for k in STATS:
                    a = vr.agreement(s0[k], s1[k])
                    rows.append({"body": body, "step": step, "config": f"{c0} -> {c1}", "statistic": k,
                                 "rho": a["rho"], "mean_change_db": a["offset_db"], "rms_change_db": a["rms_db"],
                                 "max_change_db": a["max_db"], "spots": a["n"]})
    out = DATA / "fullwave_summary.csv"
    with out.open("w", newline="") as fh:
        w = csv.DictWriter(fh, fieldnames=list(rows[0]))
        w.writeheader()
        for r in rows:
            w.writerow({k: (f"{v:.3f}" if isinstance(v, float) else v) for k, v in r.items()})
    print(f"wrote {out} ({len(rows)} rows)")
    return rows


if __name__ == "__main__":
    if len(sys.argv) < 2 or sys.argv[1] not in ("run", "summary", "refresh"):
        raise SystemExit(__doc__)
    if sys.argv[1] == "run":
        run(sys.argv[2:])
    elif sys.argv[1] == "refresh":
        refresh(sys.argv[2], sys.argv[3:])
    else:
        summary()

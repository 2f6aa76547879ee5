"""CLI command ``confirm``: full-wave (NEC-2) confirmation of the best spots, on Dask (core.fullwave.confirm)."""

from __future__ import annotations

import csv
import json
import sys
import time
from pathlib import Path


class _Bar:
    """A text progress bar on stderr."""

    def __init__(self, enabled: bool):
        self.enabled = enabled
        self.t0 = time.time()

    def __call__(self, done: int, total: int) -> None:
        if not self.enabled or total <= 0:
            return
        n = int(30 * done / total)
        sys.stderr.write(f"\r  full-wave tasks [{'#' * n}{'.' * (30 - n)}] {done}/{total}  {time.time() - self.t0:5.0f} s")
        if done >= total:
            sys.stderr.write("\n")
        sys.stderr.flush()


def _spots_arg(text: str | None):
    if text is None:
        return None
    if text.isdigit():
        return int(text)
    names = [s.strip() for s in text.split(",") if s.strip()]
    if not names:
        raise SystemExit("error: --spots: give a number or comma-separated spot names")
    return names


def _cmd_confirm(args) -> int:
    from core.fullwave.confirm import missing_extra

    hint = missing_extra()
    if hint:
        print(f"error: {hint}", file=sys.stderr)
        return 1
    from core.fullwave.confirm import SchedulerUnreachable, confirm
    from core.fullwave.vehicle_grid import ContentsSpec
    from core.fullwave.vehicle_reference import ReferenceSetup
    from core.vehicle import load_vehicle

    if args.frequencies < 1:
        print("error: --frequencies must be at least 1", file=sys.stderr)
        return 1
    if args.workers is not None and args.workers < 1:
        print("error: --workers must be at least 1", file=sys.stderr)
        return 1
    vehicles = [(load_vehicle(f), f) for f in args.files]
    setup = ReferenceSetup(cells_per_wavelength=args.cells_per_wavelength, n_frequencies=args.frequencies,
                           contents=None if args.occupants == 0 else ContentsSpec(occupants=args.occupants),
                           angles_per_turn=args.angles)
    t0 = time.time()
    try:
        results = confirm(vehicles, spots=_spots_arg(args.spots), n_frequencies=args.frequencies, setup=setup,
                          workers=args.workers, scheduler=args.scheduler, serial=args.serial,
                          use_cache=not args.no_cache, progress=_Bar(not args.quiet), timeout_s=5.0)
    except SchedulerUnreachable as e:
        print(f"error: {e}", file=sys.stderr)
        return 1
    except ValueError as e:
        print(f"error: {e}", file=sys.stderr)
        return 1
    wall = time.time() - t0
    out = Path(args.out) if args.out else None
    if out is not None:
        out.mkdir(parents=True, exist_ok=True)
    for c in results:
        print(c.text())
        if out is not None:
            stem = Path(c.file).stem
            rows = c.levels_rows()
            with (out / f"{stem}_fullwave_levels.csv").open("w", newline="") as fh:
                w = csv.DictWriter(fh, fieldnames=list(rows[0]))
                w.writeheader()
                w.writerows(rows)
            (out / f"{stem}_confirmation.json").write_text(json.dumps(c.section(), indent=1))
    cached = sum(c.cached for c in results)
    tasks = sum(len(c.freq_hz) for c in results)
    print(f"{tasks} tasks ({cached} from the cache), wall time {wall:.1f} s, solver time {sum(c.solve_s for c in results):.1f} s"
          + (f"; written to {out}" if out is not None else ""))
    return 0


def register(sub) -> None:
    p = sub.add_parser("confirm", help="confirm the best spots with a full-wave (NEC-2) run, on Dask; needs the "
                                       "fullwave extra")
    p.add_argument("files", nargs="+", metavar="FILE", help="vehicle files (several: a platform)")
    p.add_argument("--spots", metavar="N|NAMES", default="3",
                   help="the N best spots of the fast ranking (free space), or comma-separated spot names (default 3)")
    p.add_argument("--frequencies", type=int, default=5, metavar="K",
                   help="frequencies within +-2 %% of the band centre, power-averaged (default 5)")
    g = p.add_mutually_exclusive_group()
    g.add_argument("--workers", type=int, default=None, metavar="N", help="local Dask worker processes (default 1)")
    g.add_argument("--scheduler", metavar="ADDRESS", help="an existing Dask scheduler, e.g. tcp://10.0.0.5:8786")
    g.add_argument("--serial", action="store_true", help="run in this process without Dask (same numbers)")
    p.add_argument("--occupants", type=int, default=2, help="occupied seats as lossy blocks (default 2; 0: empty cabin)")
    p.add_argument("--cells-per-wavelength", type=float, default=8.0, help="body grid lambda/N, N >= 8 (default 8)")
    p.add_argument("--angles", type=int, default=36, help="wheel angles per turn (default 36)")
    p.add_argument("--out", metavar="DIR", help="write <file>_fullwave_levels.csv and <file>_confirmation.json here")
    p.add_argument("--no-cache", action="store_true", help="recompute even when a cached result exists")
    p.add_argument("--quiet", action="store_true", help="no progress bar")
    p.set_defaults(func=_cmd_confirm)

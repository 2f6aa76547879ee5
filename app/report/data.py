"""The numbers of a placement report, computed once and shared by the PDF, the CSV and the JSON export.

No Qt here: ``build_report_data`` runs the engine (scores, heatmaps, bursts, distinctness) and
writes the findings paragraph from the results; ``report_json`` and ``report_csv`` give the data
export that sits beside the PDF (docs/report-export.md describes both).
"""

from __future__ import annotations

import csv
import hashlib
import io
import json
from collections.abc import Callable
from dataclasses import dataclass, field
from datetime import UTC, datetime

import numpy as np

from app.caution import CAUTION
from app.report.rank_json import rank_document
from core.bounds import check_heatmap_work, require_finite_heatmap, require_finite_scores
from core.burst import BurstResult, burst_for_spot
from core.defence import Defence, Verdict, defend, verdict
from core.distinctness import Distinctness, wheel_distinctness
from core.materials import BUILTIN_MATERIALS, ROAD_SURFACES, material_loss_db
from core.placement import Placement, classify
from core.propagation import near_field_limit_m
from core.provenance import csv_preamble, load_with_source, program_version, setup_record
from core.regulatory import EirpCheck, check_sensor_eirp
from core.scoring import Heatmap, Scene, SpotScores, heatmap, score_vehicle, vehicle_spot_arrays
from core.vehicle import Region, Vehicle

#: how many of the best spots get their own page (levels, burst, distinctness)
DETAIL_SPOTS = 3
MPS_TO_KMH = 3.6



__all__ = ["CAUTION", "ReportData", "build_report_data", "file_sha256", "program_version", "report_csv",
           "report_json", "report_json_text"]


@dataclass(frozen=True)
class SpotDetail:
    """The detail page of one of the best spots."""

    index: int  # into scores
    rank: int
    burst: BurstResult
    distinctness: Distinctness


@dataclass(frozen=True)
class ReportData:
    """Everything a placement report shows (SI units, dB)."""

    vehicle: Vehicle
    source: str  # file path, or a description of an in-memory document
    sha256: str
    hash_of: str  # what the hash covers
    created: datetime
    program_version: str
    scene: Scene
    scores: SpotScores
    ranking: dict  # rank_document(v, scores): the JSON of ``wheelreach rank --json``
    regions: tuple[Region, ...]
    heatmaps: tuple[Heatmap, ...]
    step_m: float
    details: tuple[SpotDetail, ...]
    materials: tuple[dict, ...]
    radio_rows: tuple[tuple[str, str, str], ...]  # (quantity, value, source / note)
    findings: str = ""
    eirp_note: str = ""
    near_field_limit_m: float = 0.0
    extra: dict = field(default_factory=dict)
    placement: Placement | None = None  # core.placement.classify of the spots (scores order)
    setup: dict = field(default_factory=dict)  # core.provenance.setup_record: what produced these numbers
    eirp_check: EirpCheck | None = None  # the sensor EIRP against the market's ceiling (core.regulatory)
    defence: Defence | None = None  # per spot: budget by term, tornado, P(pass), what to measure (core.defence)
    verdict: Verdict | None = None  # the recommended spot and why (page 1)
    axes: np.ndarray | None = None  # (S, 3) the receiver axes the spots were scored with
    calibration: dict | None = None  # the calibration applied (core.calibration.calibration_override), or None

    def best_index(self) -> int:
        """Index (into scores) of the best-ranked spot that is a receiver position (inside the body,
        outside the wheelhouses); the best-ranked spot when none is."""
        return best_candidate(self.scores, self.placement)


def best_candidate(scores: SpotScores, placement: Placement | None) -> int:
    """The best-ranked spot that is a candidate position (core.placement); order()[0] when none is."""
    order = [int(i) for i in scores.order()]
    if placement is None:
        return order[0]
    return next((i for i in order if placement.candidate[i]), order[0])


def file_sha256(raw: bytes) -> str:
    return hashlib.sha256(raw).hexdigest()


def load_for_report(path_or_vehicle) -> tuple[Vehicle, dict]:
    """(vehicle, the ``vehicle_file`` setup record: path, sha256, hash_of); a bad file raises VehicleFileError."""
    return load_with_source(path_or_vehicle)


def _materials_in_use(v: Vehicle, calibration: dict | None = None) -> tuple[dict, ...]:
    """The materials the body model uses, with their crossing loss at the frequency and source (a
    calibrated value names the calibration)."""
    from core.calibration import parameter

    calibrated = {parameter(k).material: k for k in (calibration or {}).get("values", {})
                  if parameter(k).kind == "material"}
    used: list[tuple[str, str]] = [("metal", "body panels outside any zone")]
    used.append((v.body.wheelhouse_material, "wheelhouse"))
    for z in v.zones:
        used.append((z.material, f"zone '{z.name}'"))
    if v.radio.wheel_model == "knife_edge" or v.radio.sensor.pattern == "isotropic":
        used += [("tire_sidewall", "tire sidewall"), ("tire_tread", "tire tread")]
    rows: dict[str, dict] = {}
    fitted: set[str] = set()
    f = v.radio.frequency_hz
    for name, where in used:
        if name in rows:
            if where not in rows[name]["used_by"]:
                rows[name]["used_by"].append(where)
            continue
        if name in calibrated:
            key = calibrated[name]
            se = calibration.get("standard_errors", {}).get(key)
            src = (f"calibration {calibration.get('file')}: fitted {calibration['values'][key]:.2f}"
                   + (f" +- {se:.2f}" if se is not None else "") + f" dB ({calibration.get('note', '')})")
            default = False
            loss = v.materials[name].loss_db
            fitted.add(name)
        elif name in v.materials:
            m = v.materials[name]
            src = "value given in the vehicle file" + (f": {m.description}" if m.description else "")
            default = False
            loss = m.loss_db
        else:
            bm = BUILTIN_MATERIALS[name]
            src, default = bm.source, bm.engineering_default
            loss = float(material_loss_db(name, f))
        rows[name] = {"material": name, "loss_db": float(loss), "source": src,
                      "engineering_default": bool(default), "calibrated": name in fitted, "used_by": [where]}
    return tuple(rows.values())


def _radio_rows(v: Vehicle, scene: Scene, check: EirpCheck,
                calibration: dict | None = None) -> tuple[tuple[tuple[str, str, str], ...], str]:
    r = v.radio
    s, rx = r.sensor, r.receiver
    cal = (calibration or {}).get("values", {})
    if s.eirp_dbm is not None:
        eirp = (f"{s.eirp_dbm:.2f} dBm peak", "given in the file (power while a frame is on the air)")
    else:
        eirp = (f"{r.sensor_eirp_dbm:.2f} dBm peak",
                (f"conducted {s.conducted_power_dbm:.1f} dBm + antenna {s.antenna_gain_dbi:.1f} dBi - mismatch "
                 f"loss of {s.return_loss_db:.1f} dB return loss (textbook transmission-line relation)"))
    if "sensor_eirp_offset_db" in cal:
        eirp = (eirp[0], eirp[1] + f"; includes the calibration's EIRP offset of {cal['sensor_eirp_offset_db']:+.2f} dB")
    floor_note = ("fitted by the calibration" if "null_floor_db" in cal
                  else "engineering default for the dipole-dipole null")
    timing = (f"{r.frame_duration_s * 1e3:g} ms frames" if r.frame_duration_s is not None else "frame duration not given")
    timing += f", burst every {r.burst_period_s:g} s" if r.burst_period_s is not None else ""
    if check.preset is None:
        limit = ("none built in", "check the market's rules")
    else:
        limit = (f"{check.allowed_peak_dbm:.2f} dBm peak" + (" (EXCEEDED)" if check.over_ceiling else ""),
                 f"{check.preset.source}. {check.summary()}")
    road = ROAD_SURFACES[r.road_surface]
    rows = [
        ("Frequency", f"{r.frequency_hz / 1e6:.2f} MHz", f"wavelength {scene.wavelength_m:.3f} m"),
        ("Sensor EIRP", *eirp),
        ("Radio limit", *limit),
        ("Transmission timing", timing, f"{r.frames_per_burst} frames per burst, every {r.frame_interval_s * 1e3:g} ms"
         + (f"; averaging factor {r.averaging_factor_db:g} dB given in the file (an assumption)"
            if r.averaging_factor_db is not None else "")),
        ("Sensor antenna", f"{s.pattern}, {s.axis} axis", "short dipole directivity 1.5 (Balanis, Antenna Theory)"
         if s.pattern == "dipole" else "isotropic"),
        ("Sensor return loss", f"{s.return_loss_db:.1f} dB", "about 10 dB is common practice for a tuned sensor antenna"),
        ("Receiver antenna", f"{rx.pattern}, gain {rx.gain_dbi:.1f} dBi, axis ({', '.join(f'{a:g}' for a in rx.axis)})",
         "default axis; a spot may set its own"),
        ("Receiver sensitivity", f"{rx.sensitivity_dbm:.1f} dBm", "from the file"),
        ("Required margin", f"{r.required_margin_db:.1f} dB", "margin = worst level - sensitivity - required margin"),
        ("Polarization null floor", f"{r.null_floor_db:.1f} dB", floor_note),
        ("Wheel angles per turn", f"{r.angles_per_turn}", f"every {360 / r.angles_per_turn:g} deg"),
        ("Worst case", scene.score_method, "statistic and angle method of the worst case over a turn"),
        ("Burst", f"{r.frames_per_burst} frames every {r.frame_interval_s * 1e3:.0f} ms",
         f"speeds {r.speed_min_mps * MPS_TO_KMH:.0f}-{r.speed_max_mps * MPS_TO_KMH:.0f} km/h"),
        ("Road reflection", f"{'on' if scene.ground_reflection else 'off'}, {r.road_surface}", road.note),
        ("Wheel model", scene.wheel_model_label,
         "ITU-R P.526 knife edge over the rim flange" if r.wheel_model == "knife_edge" else "full-wave table (NEC-2)"),
        ("Free space", "Friis (ITU-R P.525)", f"near field below lambda/2pi = {float(near_field_limit_m(r.frequency_hz)):.3f} m"),
    ]
    return tuple(rows), check.summary()


def _kmh_list(values) -> str:
    return ", ".join(f"{v * MPS_TO_KMH:.0f}" for v in values)


def resonant_kmh(burst: BurstResult, k: int) -> str:
    """Wheel k's listed resonant speeds in km/h; says how many more the range holds when the list is cut."""
    rs = burst.resonant_mps[k]
    total = burst.resonant_count[k] if burst.resonant_count else len(rs)
    more = f" (the lowest {len(rs)} of {total:,})" if total > len(rs) else ""
    return _kmh_list(rs) + more


def _placement_findings(scores: SpotScores, placement: Placement) -> list[str]:
    """Sentences on the spots that are not clean receiver positions (core.placement), loudest first."""
    out = []
    bad = [i for i in scores.order() if not placement.candidate[i]]
    if bad:
        what = "; ".join(f"'{scores.names[i]}' {placement.message(i)}" for i in bad)
        out.append(f"PLACEMENT WARNING: {len(bad)} of the {len(scores.names)} spots are not receiver positions: {what}. "
                   f"Their margins are not results; they are marked in the tables and left out of the findings below.")
    near = [i for i in scores.order() if placement.status[i] == "near_surface"]
    if near:
        what = "; ".join(f"'{scores.names[i]}' {placement.message(i)}" for i in near)
        out.append(f"Mounting check: {what}. The model takes the receiver antenna in free space; that close to a "
                   f"panel the installation decides (marked in the tables).")
    return out


def _findings(v: Vehicle, scene: Scene, scores: SpotScores, details, heatmaps, regions, eirp_note: str,
              placement: Placement, calibration: dict | None = None) -> str:
    cand = placement.candidate
    order = [int(i) for i in scores.order() if cand[i]] or [int(i) for i in scores.order()]
    b = int(order[0])
    w = int(scores.worst_wheel[b])
    m = float(scores.margin_db[b])
    n_ok = int((scores.margin_db[order] >= 0).sum())
    lead = _placement_findings(scores, placement)
    paras = [lead] if lead else []
    parts = [
        (f"The best of the {len(order)} candidate spots is '{scores.names[b]}' with a worst-case margin of "
        f"{m:+.1f} dB (the required margin of {scores.required_margin_db:.1f} dB over the sensitivity of "
        f"{scores.sensitivity_dbm:.1f} dBm is already taken off). Its weakest wheel is {scores.wheel_ids[w]}, "
        f"at {scores.worst_dbm[b, w]:.1f} dBm at a wheel angle of {scores.worst_angle_deg[b, w]:.0f} deg.")
    ]
    if n_ok == 0:
        parts.append(f"No spot meets the required margin; the best falls {-m:.1f} dB short.")
    elif n_ok == len(order):
        parts.append("Every spot meets the required margin.")
    else:
        passing = [f"'{scores.names[i]}'" for i in order if scores.margin_db[i] >= 0]
        parts.append(f"{n_ok} of {len(order)} spots meet the required margin: {', '.join(passing)}.")
    if len(order) > 1:
        s2 = int(order[1])
        parts.append(f"The runner-up is '{scores.names[s2]}' at {scores.margin_db[s2]:+.1f} dB.")
    if calibration:
        parts.append(f"These margins use the calibrated model: {calibration.get('note', '')}.")
    check = check_sensor_eirp(v.radio)
    if check.over_ceiling:
        paras.insert(0, [check.warning()])
        b_at = float(check.margin_at_ceiling_db(m))
        n_ok_at = int((check.margin_at_ceiling_db(scores.margin_db[order]) >= 0).sum())
        parts.append(f"At the ceiling the best spot keeps {b_at:+.1f} dB and {n_ok_at} of {len(order)} spots meet "
                     "the required margin.")
    paras.append(parts)
    parts = []
    paras.append(parts)
    d0 = details[0]
    br = d0.burst
    wi, vi = br.worst()
    res = {}
    for k, (wid, rs) in enumerate(zip(br.wheel_ids, br.resonant_mps)):
        if len(rs):
            res.setdefault(resonant_kmh(br, k), []).append(wid)
    if res:
        txt = "; ".join(f"{k} km/h ({', '.join(ids)})" for k, ids in res.items())
        parts.append(f"At the best spot the burst frames land on the same wheel angle every turn (resonant "
                     f"speeds, no angle diversity) at {txt}.")
    else:
        parts.append("No resonant speed (frames landing on the same angle every turn) falls inside the speed range.")
    parts.append(f"Its lowest burst success is {100 * br.success[wi, vi]:.0f} % for wheel {br.wheel_ids[wi]} at "
                 f"{br.speeds_mps[vi] * MPS_TO_KMH:.0f} km/h; parked, the weakest wheel gets a frame through from "
                 f"{100 * br.parked.min():.0f} % of its resting angles.")
    dd = d0.distinctness
    if len(dd.wheel_ids) > 1:
        i, j = dd.closest_pair
        parts.append(f"For wheel location by signal strength the closest pair there is {dd.wheel_ids[i]}/"
                     f"{dd.wheel_ids[j]}, medians {dd.min_separation_db:.1f} dB apart with "
                     f"{100 * dd.closest_overlap:.0f} % overlap.")
    parts = []
    paras.append(parts)
    nf = [scores.names[i] for i in order if scores.near_field[i]]
    lim = float(near_field_limit_m(scene.freq_hz))
    if nf:
        parts.append(f"Near-field warning: {', '.join(repr(n) for n in nf)} come within lambda/2pi = {lim:.3f} m "
                     f"of a sensor; the far-field model is only indicative there.")
    else:
        parts.append(f"No spot comes within the near field (lambda/2pi = {lim:.3f} m) of a sensor.")
    for r, hm in zip(regions, heatmaps):
        ok, cells = hm.meeting(0.0)
        left_out = excluded_text(hm)
        if not cells:
            parts.append(f"Region '{r.name}' holds no receiver position ({left_out}).")
            continue
        x, y, z, mm, ww = hm.best_cells(1)[0]
        parts.append(f"In region '{r.name}' {ok} of the {cells} computed cells ({100 * ok / cells:.0f} %) meet the "
                     f"margin" + (f" ({left_out}, not computed)" if left_out else "") + f"; the best cell, at "
                     f"({x:.2f}, {y:.2f}, {z:.2f}) m, reaches {mm:+.1f} dB (limited by {scene.wheel_ids[ww]}).")
    if not check.over_ceiling:
        paras.append([eirp_note])
    return "\n\n".join(" ".join(p) for p in paras if p)


def build_report_data(
    path_or_vehicle,
    step_m: float = 0.05,
    progress: Callable[[int, int], None] | None = None,
    cancel: Callable[[], bool] | None = None,
    now: datetime | None = None,
    command_line: list[str] | None = None,
    calibration: dict | None = None,
) -> ReportData:
    """Run the engine for a report. ``progress(done, total)`` counts positions: the spots, then the
    heatmap cells over all regions; ``command_line`` (the command's words, None from the desktop
    program) goes into the setup record; ``calibration`` (core.calibration.calibration_override) is
    applied to the vehicle (core.provenance.apply_overrides) and named on the first page.

    Before any computing, the report's heatmaps are held to the work limits of core.bounds
    (WorkLimitError names the limit and the step that fits); afterwards every level, margin and
    heatmap cell is checked to be finite (NonFiniteResultError) before it reaches a table or figure."""
    v, src = load_for_report(path_or_vehicle)
    overrides = {"calibration": calibration} if calibration else None
    if overrides:
        from core.provenance import apply_overrides

        v = apply_overrides(v, overrides, src["path"])
    if not v.spots:
        from core.vehicle import VehicleFileError

        raise VehicleFileError("the file has no receiver spots; a placement report needs at least one", "spots",
                               src["path"])
    source = src["path"] or "unsaved document"
    scene = Scene.from_vehicle(v)
    regions = tuple(v.regions)
    n_wheels, n_angles = len(scene.wheels), len(scene.angles_rad)
    check_heatmap_work(regions, step_m, n_wheels, n_angles, what=f"{source}: the report's heatmaps")
    from core.scoring import grid_for_region

    sizes = [int(grid_for_region(r, step_m, scene.hull)[2].sum()) for r in regions]  # the cells computed
    n_spots = len(v.spots)
    total = max(1, n_spots + sum(sizes))

    def spots_done(d, t):
        if progress:
            progress(d, total)

    scores = score_vehicle(v, scene, progress=spots_done, cancel=cancel)
    require_finite_scores(scores, source)
    placement = classify(scene, scores.positions)
    axes = vehicle_spot_arrays(v)[2]
    defence = defend(scene, scores, axes)
    ranking = rank_document(v, scores, placement=placement, defence=defence)
    done = [n_spots]
    maps = []
    for r, n in zip(regions, sizes):
        base = done[0]

        def sub(d, t, base=base):
            if progress:
                progress(base + d, total)

        hm = heatmap(scene, r, step_m, progress=sub, cancel=cancel)
        require_finite_heatmap(hm, r.name, source)
        maps.append(hm)
        done[0] += n
    # detail pages for the best spots that are receiver positions (rank as in the ranking table)
    rank_of = {int(i): k + 1 for k, i in enumerate(scores.order())}
    shown = [int(i) for i in scores.order() if placement.candidate[i]] or [int(i) for i in scores.order()]
    details = tuple(
        SpotDetail(i, rank_of[i], burst_for_spot(scene, scores, i), wheel_distinctness(scores.levels_dbm[i], scores.wheel_ids))
        for i in shown[:DETAIL_SPOTS]
    )
    check = check_sensor_eirp(v.radio)
    radio_rows, eirp_note = _radio_rows(v, scene, check, calibration)
    setup = setup_record(v, scene, src, command_line, overrides, extra={"heatmap_step_m": step_m})
    data = ReportData(
        vehicle=v, source=src["path"] or "unsaved document", sha256=src["sha256"], hash_of=src["hash_of"],
        created=now or datetime.now(UTC).astimezone(),
        program_version=program_version(), scene=scene, scores=scores, ranking=ranking,
        regions=regions, heatmaps=tuple(maps), step_m=step_m, details=details,
        materials=_materials_in_use(v, calibration), radio_rows=radio_rows, eirp_note=eirp_note,
        near_field_limit_m=float(near_field_limit_m(scene.freq_hz)), placement=placement, setup=setup,
        eirp_check=check, defence=defence, verdict=verdict(scores, defence, axes, placement), axes=axes,
        calibration=calibration,
    )
    findings = _findings(v, scene, scores, details, data.heatmaps, regions, eirp_note, placement, calibration)
    return ReportData(**{**data.__dict__, "findings": findings})


def excluded_text(hm: Heatmap) -> str:
    """"12 cells outside the body, 3 inside a wheelhouse" ("" when none was left out)."""
    return ", ".join(f"{n} cell{'s' if n != 1 else ''} {why}" for why, n in hm.excluded().items() if n)


# ----- data export ---------------------------------------------------------------------------
#: JSON keys of the reasons a heatmap cell was not computed (core.scoring.EXCLUDED_CELL_NAMES)
_JSON_EXCLUDED = {"outside the body": "outside_body", "inside a wheelhouse": "in_wheelhouse"}


def _r(x, nd=3):
    x = float(x)
    return None if not np.isfinite(x) else round(x, nd)


def report_json(d: ReportData) -> dict:
    """The JSON export: title block, the ranking of ``wheelreach rank --json``, heatmap grids, details."""
    maps = []
    for r, hm in zip(d.regions, d.heatmaps):
        maps.append({
            "region": r.name,
            "view": hm.view,
            "fixed_coordinate": "z" if hm.view == "top" else "y",
            "fixed_m": _r(hm.fixed_m, 4),
            "step_m": hm.step_m,
            "u_m": [_r(u, 4) for u in hm.u_m],
            "v_m": [_r(x, 4) for x in hm.v_m],
            "margin_db": [[_r(m) for m in row] for row in hm.margin_db],
            "cells_computed": hm.meeting(0.0)[1],
            "cells_not_computed": {_JSON_EXCLUDED[why]: n for why, n in hm.excluded().items()},
            "worst_wheel": [[d.scene.wheel_ids[w] if w >= 0 else None for w in row] for row in hm.worst_wheel],
        })
    details = []
    for det in d.details:
        b, dd = det.burst, det.distinctness
        details.append({
            "rank": det.rank,
            "spot": d.scores.names[det.index],
            "burst": {
                "speeds_mps": [_r(s, 4) for s in b.speeds_mps],
                "success": {wid: [_r(p, 4) for p in b.success[k]] for k, wid in enumerate(b.wheel_ids)},
                "parked": {wid: _r(b.parked[k], 4) for k, wid in enumerate(b.wheel_ids)},
                "resonant_mps": {wid: [_r(s, 4) for s in rs] for wid, rs in zip(b.wheel_ids, b.resonant_mps)},
                "resonant_count": {wid: int(n) for wid, n in zip(b.wheel_ids, b.resonant_count)},
            },
            "distinctness": {
                "medians_dbm": {wid: _r(m) for wid, m in zip(dd.wheel_ids, dd.medians_dbm)},
                "closest_pair": [dd.wheel_ids[dd.closest_pair[0]], dd.wheel_ids[dd.closest_pair[1]]],
                "min_separation_db": _r(dd.min_separation_db),
                "closest_overlap": _r(dd.closest_overlap, 4),
            },
        })
    return {
        "radio_limit": d.eirp_check.to_dict(),
        "report": {
            "vehicle": d.vehicle.name,
            "body_style": d.vehicle.body_style,
            "source": d.source,
            "sha256": d.sha256,
            "hash_of": d.hash_of,
            "created": d.created.isoformat(timespec="seconds"),
            "program_version": d.program_version,
            "wheel_model": d.scene.wheel_model_label,
            "heatmap_step_m": d.step_m,
        },
        "setup": d.setup,
        "ranking": d.ranking,
        "heatmaps": maps,
        "details": details,
        "materials": [dict(m) for m in d.materials],
        "findings": d.findings,
        "verdict": None if d.verdict is None else {"spot": d.verdict.name, "margin_db": _r(d.verdict.margin_db),
                                                    "p_pass": _r(d.verdict.p_pass, 4), "text": d.verdict.lines()},
        "caution": CAUTION,
    }


CSV_COLUMNS = ("record", "rank", "spot", "region", "wheel", "x_m", "y_m", "z_m", "angle_deg", "level_dbm",
               "worst_dbm", "median_dbm", "margin_db", "worst_wheel", "near_field", "placement", "margin_at_ceiling_db",
               "p_pass", "at", "term", "value_db")


def report_csv(d: ReportData) -> str:
    """One flat CSV after the comment lines of core.provenance.csv_preamble (radio-limit warning first when
    over the ceiling, ``# radio_limit: {JSON}``, ``# setup: {JSON}``); the ``record`` column says what a row is:

    - ``spot``: rank, spot, x/y/z, margin_db, margin_at_ceiling_db, worst_wheel, angle_deg (of that worst case),
      near_field, placement (core.placement status: inside, near_surface, in_wheelhouse, outside_body)
    - ``wheel``: spot, wheel, worst_dbm, angle_deg (of the worst case), median_dbm
    - ``level``: spot, wheel, angle_deg, level_dbm (every angle of the turn)
    - ``cell``: region, x/y/z, margin_db, margin_at_ceiling_db, worst_wheel (every computed heatmap cell: inside
      the region and a receiver position)
    - ``term``: spot, wheel, at (worst / median), angle_deg, term (its label), value_db: the link budget by term of
      the spot's worst wheel (core.budget; the terms of one budget add up to its level)
    - ``bar``: spot, term (the input), margin_db at its low end (value_db column: at its high end): the tornado
    """
    buf = io.StringIO()
    buf.write(csv_preamble(d.eirp_check, d.setup))
    shift = d.eirp_check.margin_shift_db
    wr = csv.DictWriter(buf, fieldnames=CSV_COLUMNS, lineterminator="\n")
    wr.writeheader()
    for s in d.ranking["spots"]:
        x, y, z = s["position_m"]
        wr.writerow({"record": "spot", "rank": s["rank"], "spot": s["name"], "x_m": x, "y_m": y, "z_m": z,
                     "margin_db": s["margin_db"], "margin_at_ceiling_db": s["margin_at_ceiling_db"],
                     "worst_wheel": s["worst_wheel"],
                     "angle_deg": s["worst_angle_deg"], "near_field": int(s["near_field"]),
                     "placement": s["placement"]["status"], "p_pass": s.get("p_pass")})
    for s in d.ranking["spots"]:
        for w in s["wheels"]:
            wr.writerow({"record": "wheel", "rank": s["rank"], "spot": s["name"], "wheel": w["wheel"],
                         "worst_dbm": w["worst_dbm"], "angle_deg": w["worst_angle_deg"], "median_dbm": w["median_dbm"]})
    angles = d.ranking["angles_deg"]
    for s in d.ranking["spots"]:
        for w in s["wheels"]:
            for a, lv in zip(angles, w["levels_dbm"]):
                wr.writerow({"record": "level", "rank": s["rank"], "spot": s["name"], "wheel": w["wheel"],
                             "angle_deg": a, "level_dbm": lv})
    for s in d.ranking["spots"]:
        for at, b in s.get("link_budget", {}).items():
            for t in b["terms"]:
                wr.writerow({"record": "term", "rank": s["rank"], "spot": s["name"], "wheel": b["wheel"], "at": at,
                             "angle_deg": b["wheel_angle_deg"], "term": t["label"], "value_db": t["value_db"]})
        for bar in s.get("sensitivity", {}).get("tornado", []):
            wr.writerow({"record": "bar", "rank": s["rank"], "spot": s["name"], "term": bar["label"],
                         "margin_db": bar["margin_at_low_db"], "value_db": bar["margin_at_high_db"]})
    for r, hm in zip(d.regions, d.heatmaps):
        pts = hm.points().reshape(-1, 3)
        for p, m, w in zip(pts, hm.margin_db.reshape(-1), hm.worst_wheel.reshape(-1)):
            if np.isfinite(m):
                wr.writerow({"record": "cell", "region": r.name, "x_m": round(float(p[0]), 4),
                             "y_m": round(float(p[1]), 4), "z_m": round(float(p[2]), 4),
                             "margin_db": round(float(m), 3), "margin_at_ceiling_db": round(float(m) - shift, 3),
                             "worst_wheel": d.scene.wheel_ids[w]})
    return buf.getvalue()


def report_json_text(d: ReportData) -> str:
    return json.dumps(report_json(d), indent=1) + "\n"

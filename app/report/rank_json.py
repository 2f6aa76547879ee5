"""The JSON document of ``wheelreach rank --json`` (see docs/cli-json.md), shared by the CLI and the report."""

from __future__ import annotations

from core.regulatory import check_sensor_eirp
from core.scoring import RANK_RESOLUTION_DB, vehicle_spot_arrays


def rank_document(v, scores, setup: dict | None = None, placement=None, defence=None) -> dict:
    """The documented JSON of ``wheelreach rank --json`` (see docs/cli-json.md).

    ``radio_limit`` comes first (the sensor EIRP against the market's ceiling, core.regulatory);
    each spot carries its resolved receiver axis, its margin at the ceiling, its placement
    (``placement``: core.placement.classify of the scores' positions, computed when not given) and,
    from ``defence`` (core.defence.defend, computed when not given), its P(pass), link budget by term at
    the worst and the median angle, tornado and what to measure first; ``setup`` (the record of
    core.provenance.setup_record) is added last when given.
    """
    if placement is None or defence is None:
        from core.scoring import Scene

        scene = Scene.from_vehicle(v)
        if placement is None:
            from core.placement import classify

            placement = classify(scene, scores.positions)
        if defence is None:
            from core.defence import defend

            defence = defend(scene, scores, vehicle_spot_arrays(v)[2])
    check = check_sensor_eirp(v.radio)
    names, _pos, axes = vehicle_spot_arrays(v)
    axis_of = dict(zip(names, axes))
    order = scores.order()
    spots = []
    for rank, i in enumerate(order, 1):
        wheels = []
        for w, wid in enumerate(scores.wheel_ids):
            wheels.append(
                {
                    "wheel": wid,
                    "worst_dbm": round(float(scores.worst_dbm[i, w]), 3),
                    "worst_angle_deg": round(float(scores.worst_angle_deg[i, w]), 3),
                    "median_dbm": round(float(scores.median_dbm[i, w]), 3),
                    "levels_dbm": [round(float(x), 3) for x in scores.levels_dbm[i, w]],
                }
            )
        axis = axis_of.get(scores.names[i])
        spots.append(
            {
                "rank": rank,
                "name": scores.names[i],
                "position_m": [round(float(c), 4) for c in scores.positions[i]],
                "receiver_axis": None if axis is None else [round(float(a), 6) for a in axis],
                "margin_db": round(float(scores.margin_db[i]), 3),
                "margin_at_ceiling_db": round(float(check.margin_at_ceiling_db(scores.margin_db[i])), 3),
                "worst_wheel": scores.wheel_ids[scores.worst_wheel[i]],
                "worst_angle_deg": round(float(scores.worst_angle_deg[i, scores.worst_wheel[i]]), 3),
                "near_field": bool(scores.near_field[i]),
                "placement": placement.record(i),
                "wheels": wheels,
                **({"p_pass": None} if int(i) not in defence.cases else defence.cases[int(i)].to_dict()),
            }
        )
    doc = {
        "radio_limit": check.to_dict(),
        "vehicle": v.name,
        "body_style": v.body_style,
        "frequency_hz": v.radio.frequency_hz,
        "sensitivity_dbm": scores.sensitivity_dbm,
        "required_margin_db": scores.required_margin_db,
        "angles_deg": [round(float(a), 4) for a in scores.angles_deg],
        "sensitivity_method": defence.method,
        "uncertain_inputs": defence.inputs_dict(),
        "rank_resolution_db": RANK_RESOLUTION_DB,
        "not_ranked_apart": [scores.names[i] for i in scores.tied_with_best(placement.candidate)],
        "spots": spots,
    }
    if setup is not None:
        doc["setup"] = setup
    return doc

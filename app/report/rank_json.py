"""The JSON document of ``wheelreach rank --json`` (see docs/cli-json.md), shared by the CLI and the report."""

from __future__ import annotations


def rank_document(v, scores, placement=None) -> dict:
    """The documented JSON of ``wheelreach rank --json`` (see docs/cli-json.md).

    ``placement``: core.placement.classify of the scores' positions (computed when not given)."""
    if placement is None:
        from core.placement import classify
        from core.scoring import Scene

        placement = classify(Scene.from_vehicle(v), scores.positions)
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
        spots.append(
            {
                "rank": rank,
                "name": scores.names[i],
                "position_m": [round(float(c), 4) for c in scores.positions[i]],
                "margin_db": round(float(scores.margin_db[i]), 3),
                "worst_wheel": scores.wheel_ids[scores.worst_wheel[i]],
                "worst_angle_deg": round(float(scores.worst_angle_deg[i, scores.worst_wheel[i]]), 3),
                "near_field": bool(scores.near_field[i]),
                "placement": placement.record(i),
                "wheels": wheels,
            }
        )
    return {
        "vehicle": v.name,
        "body_style": v.body_style,
        "frequency_hz": v.radio.frequency_hz,
        "sensitivity_dbm": scores.sensitivity_dbm,
        "required_margin_db": scores.required_margin_db,
        "angles_deg": [round(float(a), 4) for a in scores.angles_deg],
        "spots": spots,
    }

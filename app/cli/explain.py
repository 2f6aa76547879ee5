"""Plain-text rendering of a spot's defence for ``wheelreach rank FILE --explain SPOT``: the link budget by
term at the worst and the median angle, the tornado, P(pass) and what to measure first (core.defence)."""

from __future__ import annotations

import numpy as np

WIDTH = 100


def budget_lines(b, width: int = WIDTH) -> list[str]:
    """A core.budget.LinkBudget as lines: each term, its dB and the running level, then the margin."""
    w = width - 22
    lines = [f"{'term':<{w}} {'dB':>9}  {'running dBm':>11}"]
    run = 0.0
    for t in b.terms:
        run += t.value_db
        label = t.label if len(t.label) <= w else t.label[: w - 3] + "..."
        lines.append(f"{label:<{w}} {t.value_db:+9.2f}  {run:11.2f}")
    lines.append(f"{'= received level, dBm':<{w}} {b.level_dbm:9.2f}")
    lines.append(f"{'- sensitivity':<{w}} {-b.sensitivity_dbm:+9.2f}")
    lines.append(f"{'- required margin':<{w}} {-b.required_margin_db:+9.2f}")
    lines.append(f"{'= margin, dB':<{w}} {b.margin_db:+9.2f}")
    if b.road_ray:
        lines.append(f"  road ray alone: {b.road_ray_level_dbm:.1f} dBm ("
                     + "; ".join(f"{t.label} {t.value_db:+.1f} dB" for t in b.road_ray) + ")")
    return lines


def tornado_lines(ss, width: int = WIDTH) -> list[str]:
    """The tornado of a core.sensitivity.SpotSensitivity as text bars around the nominal margin."""
    bars = ss.bars
    lo = min([ss.margin_db] + [min(b.margin_low_db, b.margin_high_db) for b in bars])
    hi = max([ss.margin_db] + [max(b.margin_low_db, b.margin_high_db) for b in bars])
    span = max(hi - lo, 1e-9)
    cols = 30

    def col(x):
        return round((x - lo) / span * (cols - 1))

    c0 = col(ss.margin_db)
    name_w = 28
    rng_w = 40
    out = [(f"{'input':<{name_w}} {'at low .. at high end of the range':<{rng_w}} {'margin dB':>15}  "
           f"{lo:+.1f} .. {hi:+.1f} dB (| = nominal {ss.margin_db:+.1f})")]
    for b in bars:
        row = [" "] * cols
        a, c = sorted((col(b.margin_low_db), col(b.margin_high_db)))
        for k in range(a, c + 1):
            row[k] = "#"
        row[c0] = "|"
        rng = f"{b.low_text} .. {b.high_text}"
        rng = rng if len(rng) <= rng_w else rng[: rng_w - 3] + "..."
        note = f"  ({b.effect})" if b.effect else ""
        out.append(f"{b.label[:name_w]:<{name_w}} {rng:<{rng_w}} {b.margin_low_db:+7.1f}..{b.margin_high_db:+6.1f}  "
                   f"{''.join(row)}{note}")
    return out


def explain_text(v, scores, i: int, case, axis, axis_from: str, inputs) -> str:
    """The whole explanation of spot i (scores index) as text."""
    x, y, z = scores.positions[i]
    w = int(scores.worst_wheel[i])
    ss = case.sensitivity
    ax = ", ".join(f"{a:.3g}" for a in np.asarray(axis, float))
    out = [f"Spot '{scores.names[i]}' at ({x:.3f}, {y:.3f}, {z:.3f}) m, receiver axis ({ax}) ({axis_from})",
           (f"margin {scores.margin_db[i]:+.2f} dB (worst wheel {scores.wheel_ids[w]} at "
           f"{scores.worst_angle_deg[i, w]:.1f} deg); P(pass) {100 * ss.p_pass:.0f} % over {ss.draws} draws "
           f"(seed {ss.seed}); 5th percentile of the margin {ss.margin_p05_db:+.1f} dB"), ""]
    for key, title in (("worst", "at its worst angle"), ("median", ("at the median angle (the sampled angle whose "
                                                                    "level is nearest the turn's median)"))):
        b = case.budgets[key]
        out.append(f"Link budget, wheel {b.wheel} {title}, {b.angle_deg:.1f} deg; path {b.path_m:.3f} m:")
        out += ["  " + s for s in budget_lines(b, WIDTH - 2)]
        out.append("")
    out.append("What the margin depends on (one input at a time at the ends of its range, the others nominal):")
    out += ["  " + s for s in tornado_lines(ss, WIDTH - 2)]
    for what, why in ss.not_varied:
        out.append(f"  not varied: {what}: {why}")
    out.append("")
    out.append("Ranges and sources:")
    for inp in inputs:
        rng = (", ".join(inp.text(o) for o in inp.options) if inp.kind == "road"
               else f"{inp.text(inp.low)} .. {inp.text(inp.high)}")
        out.append(f"  {inp.label}: nominal {inp.text(inp.nominal)}, {rng}; {inp.distribution}; {inp.source}")
    out.append("")
    out.append("Measure first on a vehicle:")
    out += [f"  {k + 1}. {t}" for k, t in enumerate(case.measure_first)]
    return "\n".join(out)

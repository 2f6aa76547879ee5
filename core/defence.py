"""Defending a placement: per spot the link budget by term (core.budget), what the margin depends on
(core.sensitivity), what to measure first on a vehicle, and the verdict that opens a report.

:func:`defend` runs the analysis for the scored spots; :func:`verdict` picks the recommended spot (the
best-ranked receiver position, the ranking's own rule) and states its margin against the requirement,
its pass probability, the two inputs it is most sensitive to and the first measurements that would
confirm or refute it. No Qt here.
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np

from core.budget import LinkBudget, spot_budgets
from core.scoring import tie_note
from core.sensitivity import DEFAULT_DRAWS, DEFAULT_SEED, SpotSensitivity, TornadoBar, UncertainInput, analyse_scores


@dataclass(frozen=True)
class SpotCase:
    """Everything a reviewer needs about one spot: its budgets ("worst", "median"), its sensitivity and the
    measurements that would confirm it first."""

    index: int  # into the scores
    name: str
    margin_db: float
    budgets: dict
    sensitivity: SpotSensitivity
    measure_first: tuple[str, ...]

    @property
    def p_pass(self) -> float:
        return self.sensitivity.p_pass

    def to_dict(self) -> dict:
        return {"link_budget": {k: b.to_dict() for k, b in self.budgets.items()},
                "p_pass": round(self.p_pass, 4), "sensitivity": self.sensitivity.to_dict(),
                "measure_first": list(self.measure_first)}


@dataclass(frozen=True)
class Defence:
    """The analysis of several spots (``cases`` by spot index) with the inputs it varied."""

    cases: dict
    inputs: tuple[UncertainInput, ...]
    method: str
    seconds: float

    def p_pass(self, i: int) -> float | None:
        c = self.cases.get(int(i))
        return None if c is None else c.p_pass

    def inputs_dict(self) -> list[dict]:
        from core.sensitivity import Sensitivity

        return Sensitivity(self.inputs, (), self.method).inputs_dict()


def _zones_of(budget: LinkBudget, material: str) -> list[str]:
    """The panels of ``material`` the budget's direct path crosses, as named in its terms."""
    parts = [t.part for t in budget.terms if t.key == "panel" and t.note == f"material {material}"]
    return list(dict.fromkeys(parts))


def measurement_advice(bar: TornadoBar, worst: LinkBudget, scene) -> str:
    """What to measure on a vehicle to pin down the input of ``bar`` for this spot (plain words)."""
    f = f"{scene.freq_hz / 1e6:.2f} MHz"
    wheel = f"wheel {worst.wheel}"
    if bar.key.startswith("material:"):
        mat = bar.key.split(":", 1)[1]
        where = _zones_of(worst, mat)
        at = f" ({'; '.join(where[:2])})" if where else ""
        return (f"the crossing loss of the {mat} panels on the path from {wheel}{at}: insertion loss at {f} with a "
                f"test transmitter in place of the sensor, against free space")
    if bar.key == "null_floor":
        return (f"the depth of the level minimum: turn {wheel} slowly through {worst.angle_deg:.0f} deg with a sensor "
                f"sending continuously and record the level at the spot (the null floor decides the worst case)")
    if bar.key == "road":
        return "the level with the vehicle on the road surface against on a lift or turntable (the road reflection)"
    if bar.key == "axis_tilt":
        return "the receiver antenna's orientation as mounted (bracket, connector and cable routing, tolerances)"
    if bar.key == "eirp":
        return "the radiated power (EIRP) of production sensors mounted in a wheel, over temperature and battery state"
    if bar.key in ("tire_tread", "tire_sidewall"):
        return f"the tire's loss at {f} (tread over the steel belt, and sidewall), on the tire fitted"
    if bar.key == "frequency":
        return "the level at both ends of the sensor's frequency tolerance"
    if bar.key == "cabin_absorption":
        return "the spot's mean level over a turn, cabin empty and then occupied (the contents set the cabin level)"
    return f"the input '{bar.label}'"


def defend(scene, scores, axes, spots=None, n_draws: int = DEFAULT_DRAWS, seed: int = DEFAULT_SEED) -> Defence:
    """Budgets (worst wheel at its worst and median angles), tornado, P(pass) and measurement advice of the scored
    spots (``spots``: indices, default all). ``axes`` (S, 3): the receiver axes the spots were scored with."""
    t0 = time.perf_counter()
    idx = list(range(len(scores.names))) if spots is None else [int(i) for i in spots]
    budgets = spot_budgets(scene, scores, axes, idx)
    sens = analyse_scores(scene, scores, axes, idx, n_draws, seed)
    cases = {}
    for i, ss in zip(idx, sens.spots):
        worst = budgets[i]["worst"]
        advice = [(f"the level from {worst.wheel} over a slow full turn at the spot (worst case {worst.level_dbm:.1f} dBm "
                  f"near {worst.angle_deg:.0f} deg in the model)")]
        advice += [measurement_advice(b, worst, scene) for b in ss.most_sensitive(2)]
        cases[i] = SpotCase(i, scores.names[i], float(scores.margin_db[i]), budgets[i], ss, tuple(advice))
    return Defence(cases, sens.inputs, sens.method, time.perf_counter() - t0)


@dataclass(frozen=True)
class Verdict:
    """The verdict of a report's first page (margins dB, P(pass) 0..1)."""

    index: int
    name: str
    position_m: tuple[float, float, float]
    receiver_axis: tuple[float, float, float]
    margin_db: float
    required_margin_db: float
    sensitivity_dbm: float
    worst_wheel: str
    worst_angle_deg: float
    worst_dbm: float
    p_pass: float
    draws: int
    top: tuple[TornadoBar, ...]
    measure_first: tuple[str, ...]
    candidates: int
    passing: int
    more_robust: tuple[str, float, float] | None  # (spot, margin, P(pass)) of a passing spot with a clearly higher P
    not_ranked_apart: str = ""  # core.scoring.tie_note of the spots within the rank resolution of this one

    @property
    def meets(self) -> bool:
        return self.margin_db >= 0.0

    def headline(self) -> str:
        if self.meets:
            return (f"Recommended receiver spot: '{self.name}', worst-case margin {self.margin_db:+.1f} dB over the "
                    f"requirement, P(pass) {100 * self.p_pass:.0f} %.")
        return (f"No spot meets the requirement. The best, '{self.name}', falls {-self.margin_db:.1f} dB short; "
                f"P(pass) {100 * self.p_pass:.0f} %.")

    def lines(self) -> list[str]:
        """The verdict in plain sentences (headline first)."""
        x, y, z = self.position_m
        ax = ", ".join(f"{a:.3g}" for a in self.receiver_axis)
        out = [self.headline(),
               (f"Position ({x:.3f}, {y:.3f}, {z:.3f}) m, receiver antenna axis ({ax}). The requirement is the "
               f"sensitivity {self.sensitivity_dbm:.1f} dBm plus a {self.required_margin_db:.1f} dB margin; the "
               f"weakest link is wheel {self.worst_wheel} at {self.worst_dbm:.1f} dBm near {self.worst_angle_deg:.0f} "
               f"deg of its turn. {self.passing} of {self.candidates} candidate spots meet the requirement."),
               (f"P(pass): the share of {self.draws} Monte-Carlo draws of the uncertain inputs (ranges and sources in "
               f"the report) in which the margin stays at or above 0 dB.")]
        if self.not_ranked_apart:
            out.append("Not ranked apart: " + self.not_ranked_apart)
        if self.top:
            parts = [f"{b.label} ({_range_words(b)}: margin {min(b.margin_low_db, b.margin_high_db):+.1f} to "
                     f"{max(b.margin_low_db, b.margin_high_db):+.1f} dB)" for b in self.top]
            out.append("Most sensitive to: " + "; ".join(parts) + ".")
        if self.more_robust is not None:
            n, m, p = self.more_robust
            out.append(f"More robust alternative: '{n}' at {m:+.1f} dB with P(pass) {100 * p:.0f} %.")
        out.append("Measure first on a vehicle: " + "; ".join(f"({k + 1}) {t}" for k, t in
                                                                enumerate(self.measure_first)) + ".")
        return out


def _range_words(b: TornadoBar) -> str:
    """The range of a bar's input in words (the tilt and the road by what was tried)."""
    if b.key == "axis_tilt":
        return f"tilted up to {b.low_text.split(',')[0]} in any direction"
    if b.key == "road":
        return "reflection off or any road surface"
    return f"{b.low_text} to {b.high_text}"


def verdict(scores, defence: Defence, axes, placement=None) -> Verdict:
    """The recommended spot: the best-ranked receiver position (core.placement; the best-ranked spot when none is)."""
    order = [int(i) for i in scores.order()]
    cand = [i for i in order if placement is None or placement.candidate[i]] or order
    analysed = [i for i in cand if i in defence.cases] or [i for i in order if i in defence.cases]
    b = analysed[0]
    case = defence.cases[b]
    w = int(scores.worst_wheel[b])
    passing = [i for i in cand if scores.margin_db[i] >= 0]
    robust = None
    if scores.margin_db[b] >= 0:
        better = [i for i in passing if i in defence.cases and defence.cases[i].p_pass >= case.p_pass + 0.1]
        if better:
            j = max(better, key=lambda i: defence.cases[i].p_pass)
            robust = (scores.names[j], float(scores.margin_db[j]), defence.cases[j].p_pass)
    ax = np.atleast_2d(np.asarray(axes, float))[b]
    return Verdict(
        index=b, name=scores.names[b], position_m=tuple(float(c) for c in scores.positions[b]),
        receiver_axis=tuple(float(a) for a in ax / np.linalg.norm(ax)), margin_db=float(scores.margin_db[b]),
        required_margin_db=scores.required_margin_db, sensitivity_dbm=scores.sensitivity_dbm,
        worst_wheel=scores.wheel_ids[w], worst_angle_deg=float(scores.worst_angle_deg[b, w]),
        worst_dbm=float(scores.worst_dbm[b, w]), p_pass=case.p_pass, draws=case.sensitivity.draws,
        top=tuple(case.sensitivity.most_sensitive(2)), measure_first=case.measure_first, candidates=len(cand),
        passing=len(passing), more_robust=robust,
        not_ranked_apart=tie_note(scores, scores.tied_with_best(None if placement is None else placement.candidate)))

"""The engine at its defaults against the stored whole-vehicle NEC-2 reference (issue: the cabin is fed
through its openings).

The reference (tests/data/fullwave_levels_*.csv, made by validation/fullwave_vehicle.py with PyNEC,
method of moments; docs/VALIDATION.md, whole-vehicle reference) solves the samples' own 2.5-D bodies as
wire grids with the openings open, two occupants as lossy blocks and no ground, at five frequencies
within +-2 % of the band centre. Its converged statistic is the median over the turn of the
frequency-averaged level of each spot's worst wheel (mesh lambda/8 -> lambda/10: 0.8-1.0 dB RMS;
widening the average to +-4 %: 0.9-1.2 dB RMS).
The engine is configured the same way: no road, the mean level (fade_probability 0, the frequency
average's counterpart), the same contents absorption (0.5 m^2 default; the NEC-2 blocks absorb
0.24-0.27 m^2 each).

Targets (issue): per body, |mean offset| <= 6 dB, RMS after the offset <= 4 dB, Spearman rho >= 0.8.
The offset and RMS targets are met; the rank correlation is not (a known disagreement, kept below as
a strict xfail): the reference's spots lie within about 10 dB of each other, its mesh-to-mesh change
alone is 0.8-1.0 dB RMS, its residual structure - front spots hearing the front wheels 5-10 dB
better than the rear ones - is local, while the engine's cavity level is one diffuse value per wheel
and angle, shaped only by the walls near each spot; and the reference's own spot order moves with
frequency (its lower and upper frequencies rank the spots with rho 0.15-0.76; last section).
"""

from __future__ import annotations

from functools import cache
from pathlib import Path

import numpy as np
import pytest

from core.fullwave.vehicle_reference import (
    agreement,
    frequency_average_db,
    frequency_halves,
    load_reference_csv,
    turn_statistics,
    within_band,
)
from core.scoring import Scene, spot_turns, vehicle_spot_arrays
from core.vehicle import load_vehicle

ROOT = Path(__file__).resolve().parents[1]
BODIES = [("sedan", "l8_contents"), ("hatchback", "l8_contents"), ("suv", "l8_contents")]


#: the reference without cabin contents (both sides configured alike: the engine's contents absorption 0)
EMPTY = [("sedan", "l8_empty"), ("hatchback", "l8_empty"), ("hatchback", "l10_empty"), ("suv", "l8_empty")]


#: the empty cabin averaged over +-4 % of the band centre (9 frequencies 1 % apart; the hatchback's run spans
#: +-6 % and is cut to +-4 %): the average whose ranking repeats (docs/VALIDATION.md, frequency halves)
WIDE = [("sedan", "l8_empty_4pc"), ("hatchback", "l8_empty_wide"), ("suv", "l8_empty_4pc")]


@cache
def _stored(body: str) -> dict:
    return load_reference_csv(ROOT / "tests" / "data" / f"fullwave_levels_{body}.csv")


def _reference(body: str, config: str, span: float | None = None) -> dict:
    entry = _stored(body)[(body, config)]
    return entry if span is None else within_band(entry, span)


def _reference_medians(body: str, config: str) -> np.ndarray:
    """(S, W) median over the turn of the frequency-averaged reference level, dBm."""
    return turn_statistics(frequency_average_db(_reference(body, config)["levels_dbm"]))["median"]["wheel"]


@cache
def _medians(body: str, config: str, cavity: bool = True, span: float | None = None) -> tuple[np.ndarray, np.ndarray]:
    """(engine, reference) median over the turn of each stored spot's worst wheel, dBm: the engine configured
    as the reference (no road, mean level, contents absorption 0 for an empty cabin), the reference
    frequency-averaged (over +-span of the band centre when given)."""
    ref = _reference(body, config, span)
    v = load_vehicle(ROOT / "sample_vehicles" / f"{body}.json")
    n = len(ref["angles_deg"])
    body_update = {"cabin_absorption_m2": 0.0} if "_empty" in config else {}
    v = v.model_copy(update={"body": v.body.model_copy(update=body_update), "radio": v.radio.model_copy(
        update={"angles_per_turn": n, "ground_reflection": False, "fade_probability": 0.0})})
    names, pos, axes = vehicle_spot_arrays(v)
    idx = [names.index(s) for s in ref["spots"]]
    levels = spot_turns(Scene.from_vehicle(v, cavity=cavity), pos[idx], axes[idx], refine=False).levels_dbm
    engine = turn_statistics(levels)["median"]["spot"]
    reference = turn_statistics(frequency_average_db(ref["levels_dbm"]))["median"]["spot"]
    return engine, reference


@cache
def _agreement(body: str, config: str, cavity: bool = True, span: float | None = None) -> dict:
    return agreement(*_medians(body, config, cavity, span))


def _misordered(first: np.ndarray, second: np.ndarray, gap_db: float) -> tuple[int, int]:
    """(pairs of spots more than gap_db apart in ``first``, how many of them ``second`` orders the other way)."""
    i, j = np.triu_indices(len(first), 1)
    far = np.abs(first[i] - first[j]) > gap_db
    flipped = np.sign(first[i] - first[j]) != np.sign(second[i] - second[j])
    return int(far.sum()), int((far & flipped).sum())


@pytest.mark.parametrize("body, config", BODIES)
def test_cabin_level_agrees_with_the_full_wave_reference(body, config):
    a = _agreement(body, config)
    assert abs(a["offset_db"]) <= 6.0, a
    assert a["rms_db"] <= 4.0, a
    # the straight rays alone (every metal crossing charged its panel loss) were 10-15 dB too dark
    before = _agreement(body, config, cavity=False)
    assert before["offset_db"] > 9.0 and abs(a["offset_db"]) < before["offset_db"] - 5.0, (before, a)


@pytest.mark.xfail(strict=True, reason="known disagreement (module docstring): the engine does not rank the "
                   "reference's cabin spots (rho 0.16-0.52 against the 0.8 target)")
@pytest.mark.parametrize("body, config", BODIES)
def test_cabin_spot_ranking_agrees_with_the_full_wave_reference(body, config):
    assert _agreement(body, config)["rho"] >= 0.8


@pytest.mark.parametrize("body, config", EMPTY)
def test_without_contents_on_both_sides_offset_and_rms_meet_the_targets(body, config):
    """The same comparison with the cabin empty on both sides (reference l8_empty / l10_empty, the engine's
    contents absorption 0): offset and RMS within the issue's targets (measured: offset -4.6 to +0.9 dB, RMS
    1.2-1.9 dB)."""
    a = _agreement(body, config)
    assert abs(a["offset_db"]) <= 6.0 and a["rms_db"] <= 4.0, a


@pytest.mark.parametrize("body, config", [c for c in EMPTY if c[0] != "suv"])
def test_without_contents_the_sedan_and_hatchback_rank_closer(body, config):
    """Without the contents the engine ranks the sedan's and hatchback's spots closer to the reference (measured
    rho 0.68 sedan, 0.67 / 0.79 hatchback at lambda/8 / lambda/10, against 0.49 / 0.52 with them); the SUV does
    not gain (0.18 against 0.16: its contents barely move the reference's order, rho 0.93 between empty and
    occupied). The bound 0.6 is a regression guard at the measured values, not a target."""
    a = _agreement(body, config)
    assert a["rho"] >= 0.6, a
    with_contents = _agreement(body, "l8_contents")
    assert a["rho"] > with_contents["rho"] + 0.15, (a, with_contents)


@pytest.mark.xfail(strict=True, reason="known disagreement: rho 0.18-0.79 without contents against the 0.8 target")
@pytest.mark.parametrize("body, config", EMPTY)
def test_without_contents_the_ranking_meets_the_target(body, config):
    assert _agreement(body, config)["rho"] >= 0.8


@pytest.mark.parametrize("body", ["sedan", "hatchback"])
def test_the_reference_contents_scatter_as_well_as_absorb(body):
    """Why the empty cabin is compared as well (docs/VALIDATION.md): adding the two occupant blocks to the
    reference raises some (spot, wheel) medians by more than 3 dB (up to 5.7 dB on the hatchback, 3.6 dB on
    the sedan), which absorption alone - all the engine's contents term models, one cross-section in the
    power balance (Hill et al. 1994) - can only lower; on the hatchback they reshuffle the spots' order
    (Spearman rho between the empty and the occupied cabin under 0.3)."""
    from scipy.stats import spearmanr

    empty, full = _reference_medians(body, "l8_empty"), _reference_medians(body, "l8_contents")
    assert (full - empty).max() > 3.0
    if body == "hatchback":
        assert spearmanr(empty.min(axis=1), full.min(axis=1)).statistic < 0.3


@pytest.mark.parametrize("body, config", BODIES)
def test_rank_resolution_covers_the_measured_disagreement(body, config):
    """Outputs call spots within core.scoring.RANK_RESOLUTION_DB of the best "not ranked apart"; the rule must
    cover the uncertainty of a difference of two spots' levels, each off by the engine's measured RMS
    disagreement with the reference after the offset (sqrt(2) x RMS for independent errors), or it would claim
    a resolution the model does not have."""
    from core.scoring import RANK_RESOLUTION_DB

    assert np.sqrt(2.0) * _agreement(body, config)["rms_db"] <= RANK_RESOLUTION_DB


def test_the_stated_agreement_figures_are_the_measured_ones():
    """core.scoring states the RMS and offset ranges in every report's limits (core.model_limits) and in the
    "not ranked apart" note: they must be what this comparison measures (to their 0.05 dB rounding)."""
    from core.scoring import FULLWAVE_OFFSET_RANGE_DB, FULLWAVE_RMS_RANGE_DB

    found = [_agreement(body, config) for body, config in BODIES]
    rms = [a["rms_db"] for a in found]
    off = [a["offset_db"] for a in found]
    assert min(rms) == pytest.approx(FULLWAVE_RMS_RANGE_DB[0], abs=0.05)
    assert max(rms) == pytest.approx(FULLWAVE_RMS_RANGE_DB[1], abs=0.05)
    assert min(off) == pytest.approx(FULLWAVE_OFFSET_RANGE_DB[0], abs=0.05)
    assert max(off) == pytest.approx(FULLWAVE_OFFSET_RANGE_DB[1], abs=0.05)


# ----- how far the reference's ranking carries across its band ------------------------------------------
def test_frequency_halves_split_as_documented():
    """frequency_halves on made-up levels whose answer is known by construction: six frequencies holding two
    spot orders in pairs, a a b b a a (every other frequency gives a b a both times: rho 1, RMS 0), and the lower three against the
    upper three of six frequencies that differ by a constant 2 dB (offset 2, RMS 0)."""
    rng = np.random.default_rng(3)
    a, b = rng.normal(-60, 4, (8, 2, 12)), rng.normal(-60, 4, (8, 2, 12))  # (spots, wheels, angles), dBm
    pairs = np.stack([a, a, b, b, a, a])
    h = frequency_halves(pairs)["interleaved"]
    assert h["rho"] == pytest.approx(1.0) and h["rms_db"] == pytest.approx(0.0, abs=1e-9)
    drift = np.stack([a] * 3 + [a + 2.0] * 3)
    h = frequency_halves(drift)["low_high"]
    assert h["offset_db"] == pytest.approx(2.0) and h["rms_db"] == pytest.approx(0.0, abs=1e-9)


@pytest.mark.parametrize("body, config", WIDE)
def test_the_reference_ranking_over_2_percent_does_not_repeat_across_its_band(body, config):
    """The reference's spot order (median over the turn, worst wheel) from the lower two of the five frequencies
    within +-2 % against that from the upper two (frequency_halves, "low_high"): Spearman rho under 0.8 on every
    body (measured: 0.32-0.72; docs/VALIDATION.md). A ranking target of 0.8 against the +-2 % average asks the
    engine for more than the reference reproduces across its own 4 % of band."""
    h = frequency_halves(_reference(body, config, 0.02)["levels_dbm"])
    assert h["low_high"]["rho"] < 0.8, h


@pytest.mark.parametrize("body, config", WIDE)
def test_the_reference_average_over_4_percent_is_sampled_densely_enough(body, config):
    """Split-half test of the +-4 % average (nine frequencies 1 % apart): every other frequency against the
    rest, both halves spanning the band, rank the spots alike (rho >= 0.9) within 1 dB RMS (measured 0.96-0.98,
    0.5-0.7 dB; docs/VALIDATION.md): the average is a property of the band, not of the frequencies picked."""
    h = frequency_halves(_reference(body, config, 0.04)["levels_dbm"])
    assert h["interleaved"]["rho"] >= 0.9 and h["interleaved"]["rms_db"] <= 1.0, h


@pytest.mark.parametrize("body, config", WIDE)
def test_against_the_4_percent_average_offset_and_rms_meet_the_targets(body, config):
    """The engine (cabin empty on both sides) against the +-4 % average: the issue's offset and RMS targets
    hold there too (measured offset -4.1 to +1.3 dB, RMS 1.5-2.1 dB)."""
    a = _agreement(body, config, span=0.04)
    assert abs(a["offset_db"]) <= 6.0 and a["rms_db"] <= 4.0, a


_UNRANKED = pytest.mark.xfail(strict=True, reason="known disagreement: rho 0.59 sedan, 0.47 SUV against the +-4 % "
                              "average (0.8 target)")


@pytest.mark.parametrize("body, config", [pytest.param(*WIDE[0], marks=_UNRANKED), WIDE[1],
                                          pytest.param(*WIDE[2], marks=_UNRANKED)])
def test_against_the_4_percent_average_the_ranking_meets_the_target(body, config):
    """Spearman rho >= 0.8 against the +-4 % average: met on the hatchback (0.82) only; widening the average
    from +-2 % does not help consistently (sedan 0.68 -> 0.59, SUV 0.18 -> 0.47, hatchback 0.67 -> 0.82)."""
    assert _agreement(body, config, span=0.04)["rho"] >= 0.8


def _pairs_across_halves(body: str, config: str) -> list[tuple[float, bool]]:
    """Every pair of spots: (their gap in the +-4 % average, dB; whether the lower and the upper half of the
    band both order them as the whole band does)."""
    lv = _reference(body, config, 0.04)["levels_dbm"]
    n = len(lv)

    def medians(sel):
        return turn_statistics(frequency_average_db(lv[sel]))["median"]["spot"]

    whole, low, high = medians(slice(None)), medians(slice(0, n // 2)), medians(slice((n + 1) // 2, None))
    i, j = np.triu_indices(len(whole), 1)
    sign = np.sign(whole[i] - whole[j])
    kept = (np.sign(low[i] - low[j]) == sign) & (np.sign(high[i] - high[j]) == sign)
    return [(float(g), bool(k)) for g, k in zip(np.abs(whole[i] - whole[j]), kept)]


@pytest.mark.parametrize("body, config", [*WIDE, ("hatchback", "l8_contents_wide")])
def test_spots_further_apart_than_the_rank_resolution_keep_their_order_across_the_band(body, config):
    """Where the reference's own order of two spots is stable: pairs whose +-4 % averages lie more than
    core.scoring.RANK_RESOLUTION_DB (4.5 dB) apart keep their order in both the lower and the upper half of the
    band in 49 of 51 pairs (the other two, hatchback empty, 4.9 and 5.0 dB apart; docs/VALIDATION.md), while
    closer pairs swap in 32-51 % of cases. Checked: at most two swapped pairs beyond the rule per body, none
    beyond rule + 1 dB, and the pairs beyond the rule swap less often than the pairs within it."""
    from core.scoring import RANK_RESOLUTION_DB

    pairs = _pairs_across_halves(body, config)
    far = [kept for gap, kept in pairs if gap > RANK_RESOLUTION_DB]
    near = [kept for gap, kept in pairs if gap <= RANK_RESOLUTION_DB]
    assert far.count(False) <= 2, pairs
    assert all(gap <= RANK_RESOLUTION_DB + 1.0 for gap, kept in pairs if not kept), pairs
    assert far.count(False) / len(far) < near.count(False) / len(near)


@pytest.mark.parametrize("body, config, span", [(b, c, None) for b, c in BODIES + EMPTY]
                         + [(b, c, 0.04) for b, c in [*WIDE, ("hatchback", "l8_contents_wide")]])
def test_spots_the_engine_ranks_apart_are_ordered_alike_by_the_reference(body, config, span):
    """What an output's ranking claims: two spots whose engine levels differ by more than RANK_RESOLUTION_DB
    (4.5 dB) are ranked apart, the others are not. Every such pair has the same order in the reference
    (measured: 99 of 99 pairs over the eleven comparisons; they are the roof lining or the SUV's tailgate trim
    against the rest)."""
    from core.scoring import RANK_RESOLUTION_DB

    engine, reference = _medians(body, config, span=span)
    pairs, flipped = _misordered(engine, reference, RANK_RESOLUTION_DB)
    assert pairs > 0 and flipped == 0, (pairs, flipped)


@pytest.mark.parametrize("body, config", [*WIDE, ("hatchback", "l8_contents_wide")])
def test_spots_the_reference_resolves_are_ordered_alike_by_the_engine(body, config):
    """The converse, on the +-4 % averages: of the pairs of spots more than RANK_RESOLUTION_DB apart in the
    reference (the pairs whose order holds across the band, test above), the engine orders all alike in the
    empty cabin (39 of 39 over the three bodies) and 11 of 12 in the occupied hatchback (the other pair 4.8 dB
    apart in the reference, 0.9 dB the other way in the engine). Allowed: one pair per body."""
    from core.scoring import RANK_RESOLUTION_DB

    engine, reference = _medians(body, config, span=0.04)
    pairs, flipped = _misordered(reference, engine, RANK_RESOLUTION_DB)
    assert pairs >= 8 and flipped <= 1, (pairs, flipped)

"""The engine at its defaults against the stored whole-vehicle NEC-2 reference (issue: the cabin is fed
through its openings).

The reference (tests/data/fullwave_levels_*.csv, made by validation/fullwave_vehicle.py with PyNEC,
method of moments; docs/VALIDATION.md, whole-vehicle reference) solves the samples' own 2.5-D bodies as
wire grids with the openings open, two occupants as lossy blocks and no ground, at five frequencies
within +-2 % of the band centre. Its converged statistic is the median over the turn of the
frequency-averaged level of each spot's worst wheel (mesh lambda/8 -> lambda/10: 0.8-0.9 dB RMS).
The engine is configured the same way: no road, the mean level (fade_probability 0, the frequency
average's counterpart), the same contents absorption (0.5 m^2 default; the NEC-2 blocks absorb
0.24-0.27 m^2 each).

Targets (issue): per body, |mean offset| <= 6 dB, RMS after the offset <= 4 dB, Spearman rho >= 0.8.
The offset and RMS targets are met; the rank correlation is not (a known disagreement, kept below as
a strict xfail): the reference's spots lie within about 10 dB of each other, its mesh-to-mesh change
alone is 0.9 dB RMS, and its residual structure - front spots hearing the front wheels 5-10 dB
better than the rear ones - is local, while the engine's cavity level is one diffuse value per wheel
and angle, shaped only by the walls near each spot.
"""

from __future__ import annotations

from functools import cache
from pathlib import Path

import numpy as np
import pytest

from core.fullwave.vehicle_reference import agreement, frequency_average_db, load_reference_csv, turn_statistics
from core.scoring import Scene, spot_turns, vehicle_spot_arrays
from core.vehicle import load_vehicle

ROOT = Path(__file__).resolve().parents[1]
BODIES = [("sedan", "l8_contents"), ("hatchback", "l8_contents"), ("suv", "l8_contents")]


#: the reference without cabin contents (both sides configured alike: the engine's contents absorption 0)
EMPTY = [("sedan", "l8_empty"), ("hatchback", "l8_empty"), ("hatchback", "l10_empty"), ("suv", "l8_empty")]


def _reference(body: str, config: str) -> dict:
    return load_reference_csv(ROOT / "tests" / "data" / f"fullwave_levels_{body}.csv")[(body, config)]


def _reference_medians(body: str, config: str) -> np.ndarray:
    """(S, W) median over the turn of the frequency-averaged reference level, dBm."""
    return turn_statistics(frequency_average_db(_reference(body, config)["levels_dbm"]))["median"]["wheel"]


@cache
def _agreement(body: str, config: str, cavity: bool = True) -> dict:
    ref = _reference(body, config)
    v = load_vehicle(ROOT / "sample_vehicles" / f"{body}.json")
    n = len(ref["angles_deg"])
    body_update = {"cabin_absorption_m2": 0.0} if config.endswith("_empty") else {}
    v = v.model_copy(update={"body": v.body.model_copy(update=body_update), "radio": v.radio.model_copy(
        update={"angles_per_turn": n, "ground_reflection": False, "fade_probability": 0.0})})
    names, pos, axes = vehicle_spot_arrays(v)
    idx = [names.index(s) for s in ref["spots"]]
    levels = spot_turns(Scene.from_vehicle(v, cavity=cavity), pos[idx], axes[idx], refine=False).levels_dbm
    engine = turn_statistics(levels)["median"]["spot"]
    reference = turn_statistics(frequency_average_db(ref["levels_dbm"]))["median"]["spot"]
    return agreement(engine, reference)


@pytest.mark.parametrize("body, config", BODIES)
def test_cabin_level_agrees_with_the_full_wave_reference(body, config):
    a = _agreement(body, config)
    assert abs(a["offset_db"]) <= 6.0, a
    assert a["rms_db"] <= 4.0, a
    # the straight rays alone (every metal crossing charged its panel loss) were 10-15 dB too dark
    before = _agreement(body, config, cavity=False)
    assert before["offset_db"] > 9.0 and abs(a["offset_db"]) < before["offset_db"] - 5.0, (before, a)


@pytest.mark.xfail(strict=True, reason="known disagreement (module docstring): the engine does not rank the "
                   "reference's cabin spots (rho 0.2-0.5 against the 0.8 target)")
@pytest.mark.parametrize("body, config", BODIES)
def test_cabin_spot_ranking_agrees_with_the_full_wave_reference(body, config):
    assert _agreement(body, config)["rho"] >= 0.8


@pytest.mark.parametrize("body, config", EMPTY)
def test_without_contents_on_both_sides_offset_and_rms_meet_the_targets(body, config):
    """The same comparison with the cabin empty on both sides (reference l8_empty / l10_empty, the engine's
    contents absorption 0): offset and RMS within the issue's targets (measured: offset -4.6 to +0.8 dB, RMS
    1.3-1.9 dB)."""
    a = _agreement(body, config)
    assert abs(a["offset_db"]) <= 6.0 and a["rms_db"] <= 4.0, a


@pytest.mark.parametrize("body, config", [c for c in EMPTY if c[0] != "suv"])
def test_without_contents_the_sedan_and_hatchback_rank_closer(body, config):
    """Without the contents the engine ranks the sedan's and hatchback's spots closer to the reference (measured
    rho 0.68 sedan, 0.68 / 0.79 hatchback at lambda/8 / lambda/10, against 0.49 / 0.43 with them); the SUV does
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
    reference raises some (spot, wheel) medians by more than 3 dB (up to 5.8 dB on the hatchback, 3.7 dB on
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

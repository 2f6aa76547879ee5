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

from functools import lru_cache
from pathlib import Path

import numpy as np
import pytest

from core.fullwave.vehicle_reference import agreement, frequency_average_db, load_reference_csv, turn_statistics
from core.scoring import Scene, spot_turns, vehicle_spot_arrays
from core.vehicle import load_vehicle

ROOT = Path(__file__).resolve().parents[1]
BODIES = [("sedan", "l8_contents"), ("hatchback", "l8_contents"), ("suv", "l8_contents")]


@lru_cache(maxsize=None)
def _agreement(body: str, config: str, cavity: bool = True) -> dict:
    ref = load_reference_csv(ROOT / "tests" / "data" / f"fullwave_levels_{body}.csv")[(body, config)]
    v = load_vehicle(ROOT / "sample_vehicles" / f"{body}.json")
    n = len(ref["angles_deg"])
    v = v.model_copy(update={"radio": v.radio.model_copy(
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

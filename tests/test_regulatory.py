"""Reference checks of core.regulatory against 47 CFR 15.231(b), ERC/REC 70-03 / ETSI EN 300 220."""

import math

import numpy as np
import pytest

from core import regulatory as reg


def test_field_to_eirp_written_out():
    # E = sqrt(30 EIRP) / d (free-space field of an isotropic radiator): 1 V/m at 1 m
    # needs 1/30 W = 15.23 dBm.
    assert reg.eirp_dbm_from_field(1e6, 1.0) == pytest.approx(10 * math.log10(1000 / 30), abs=1e-9)
    # And from the power flux density EIRP / (4 pi d^2) = E^2 / (120 pi), written independently.
    e, d = 5000e-6, 3.0
    eirp_w = e**2 / (120 * math.pi) * 4 * math.pi * d**2
    assert reg.eirp_dbm_from_field(5000.0, d) == pytest.approx(10 * math.log10(eirp_w * 1e3), abs=1e-9)


def test_field_eirp_round_trip():
    # E = sqrt(30 EIRP)/d and its inverse round-trip, broadcast over arrays.
    eirp = np.array([-40.0, -19.6, 0.0, 12.15])
    d = np.array([[1.0], [3.0], [10.0]])
    e = reg.field_uv_per_m_from_eirp(eirp, d)
    assert e.shape == (3, 4)
    np.testing.assert_allclose(reg.eirp_dbm_from_field(e, d), np.broadcast_to(eirp, (3, 4)), atol=1e-12)


def test_fcc_15_231b_at_315_mhz():
    # 47 CFR 15.231(b): 260-470 MHz, linear interpolation 3,750 -> 12,500 uV/m at 3 m:
    # 3750 + (315 - 260) * 8750 / 210 = 6,041.67 uV/m = 75.6 dBuV/m.
    e = reg.fcc_15_231b_field_limit_uv_per_m(315e6)
    assert e == pytest.approx(6041.67, abs=0.01)
    assert 20 * math.log10(e) == pytest.approx(75.6, abs=0.05)
    # With E = sqrt(30 EIRP)/d at d = 3 m: (6041.67e-6 * 3)^2 / 30 W = -19.6 dBm.
    assert reg.fcc_15_231b_eirp_dbm(315e6) == pytest.approx(-19.6, abs=0.05)


def test_fcc_15_231b_segment_ends_and_range():
    # 47 CFR 15.231(b) table: 3,750 uV/m at 260 MHz and 12,500 uV/m at 470 MHz.
    np.testing.assert_allclose(reg.fcc_15_231b_field_limit_uv_per_m([260e6, 470e6]), [3750.0, 12500.0])
    # 433.92 MHz: 3750 + 173.92 * 8750 / 210 = 10,996.67 uV/m (same interpolation).
    assert reg.fcc_15_231b_field_limit_uv_per_m(433.92e6) == pytest.approx(3750 + 173.92 * 8750 / 210)
    for f in (259.9e6, 470.1e6, 915e6):
        with pytest.raises(ValueError, match="260-470 MHz"):
            reg.fcc_15_231b_field_limit_uv_per_m(f)


def test_etsi_433_eirp():
    # ERC/REC 70-03, EU Decision 2006/771/EC, ETSI EN 300 220-2: 10 mW e.r.p. = 10 dBm e.r.p.;
    # EIRP = e.r.p. + 2.15 dB (half-wave dipole gain) = 12.15 dBm.
    assert reg.etsi_en300220_eirp_dbm() == pytest.approx(12.15, abs=1e-9)


def test_presets_and_ceiling_lookup():
    labels = [p.label for p in reg.EIRP_PRESETS]
    assert len(set(labels)) == len(labels)
    # 47 CFR 15.231(b) at 315 MHz -> about -19.6 dBm EIRP.
    p315 = reg.eirp_ceiling_dbm(315e6)
    assert p315 is not None and p315.market == "US"
    assert p315.eirp_dbm == pytest.approx(-19.6, abs=0.05)
    assert "15.231(b)" in p315.source and "sqrt(30 EIRP)" in p315.source
    # ETSI EN 300 220 / ERC/REC 70-03 at 433.92 MHz -> 12.15 dBm EIRP (EU by default).
    p434 = reg.eirp_ceiling_dbm(433.92e6)
    assert p434 is not None and p434.market == "EU"
    assert p434.eirp_dbm == pytest.approx(12.15)
    assert p434.f_low_hz == 433.05e6 and p434.f_high_hz == 434.79e6
    # US market at 433.92 MHz: the 15.231(b) interpolation there.
    us434 = reg.eirp_ceiling_dbm(433.92e6, market="US")
    assert us434.eirp_dbm == pytest.approx(float(reg.fcc_15_231b_eirp_dbm(433.92e6)))
    # Outside every implemented rule: None; EU outside its band: None.
    assert reg.eirp_ceiling_dbm(868.3e6) is None
    assert reg.eirp_ceiling_dbm(315e6, market="EU") is None
    # A 15.231(b) frequency that is not a listed preset is evaluated at that frequency.
    p390 = reg.eirp_ceiling_dbm(390e6)
    assert p390.freq_hz == 390e6
    assert p390.eirp_dbm == pytest.approx(float(reg.fcc_15_231b_eirp_dbm(390e6)))
    with pytest.raises(ValueError, match="unknown market"):
        reg.eirp_ceiling_dbm(315e6, market="JP")

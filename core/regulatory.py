"""Radio-limit presets for the sensor EIRP ceiling (315 MHz and 433.92 MHz bands).

The field strength E of an isotropic radiator in free space at distance d is

    E [V/m] = sqrt(30 EIRP[W]) / d[m],

so a field-strength limit at a measuring distance converts to an EIRP ceiling. These are
the limits of the rules as written for the fundamental emission; the program uses them
as defaults for the sensor's peak EIRP. Radio limits follow the rules of each market:
confirm against the current text of the rule for the product.

References
----------
- 47 CFR 15.231(b) (periodic operation in the band 40.66-40.70 MHz and above 70 MHz):
  table of fundamental field strength limits at 3 m.
- ERC Recommendation 70-03, Annex 1; Commission Decision 2006/771/EC (and amendments);
  ETSI EN 300 220-2: 433.05-434.79 MHz, 10 mW e.r.p., duty cycle <= 10 %.
- E = sqrt(30 EIRP)/d: free-space far field of an isotropic radiator, from the power
  flux density EIRP / (4 pi d^2) = E^2 / Z0 with Z0 = 120 pi ohm (ITU-R P.525 Table 1
  lists e = sqrt(30 p)/d for an isotropic antenna (from memory)).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

__all__ = [
    "ERP_TO_EIRP_DB",
    "eirp_dbm_from_field",
    "field_uv_per_m_from_eirp",
    "fcc_15_231b_field_limit_uv_per_m",
    "fcc_15_231b_eirp_dbm",
    "etsi_en300220_eirp_dbm",
    "EirpPreset",
    "EIRP_PRESETS",
    "eirp_ceiling_dbm",
]

#: Gain of a half-wave dipole over isotropic, dB: EIRP = e.r.p. + 2.15 dB.
ERP_TO_EIRP_DB = 2.15

#: 47 CFR 15.231 measuring distance, m.
FCC_MEASURING_DISTANCE_M = 3.0

# 47 CFR 15.231(b): 260-470 MHz, limit interpolated linearly between these (uV/m at 3 m).
_FCC_SEG_F_LOW_HZ = 260e6
_FCC_SEG_F_HIGH_HZ = 470e6
_FCC_SEG_E_LOW_UV_PER_M = 3750.0
_FCC_SEG_E_HIGH_UV_PER_M = 12500.0

# ERC/REC 70-03 and 2006/771/EC band for non-specific short-range devices at 433 MHz.
ETSI_433_F_LOW_HZ = 433.05e6
ETSI_433_F_HIGH_HZ = 434.79e6
ETSI_433_ERP_MW = 10.0


def eirp_dbm_from_field(e_uv_per_m: ArrayLike, distance_m: ArrayLike) -> np.ndarray:
    """EIRP in dBm that produces field strength E at distance d in free space.

    EIRP[W] = (E[V/m] d[m])^2 / 30, from E = sqrt(30 EIRP) / d.

    Parameters
    ----------
    e_uv_per_m : array_like
        Field strength in uV/m (rms).
    distance_m : array_like
        Distance in m.
    """
    e_v_per_m = np.asarray(e_uv_per_m, dtype=float) * 1e-6
    d = np.asarray(distance_m, dtype=float)
    eirp_w = (e_v_per_m * d) ** 2 / 30.0
    return 10.0 * np.log10(eirp_w * 1e3)


def field_uv_per_m_from_eirp(eirp_dbm: ArrayLike, distance_m: ArrayLike) -> np.ndarray:
    """Free-space field strength in uV/m at distance d from a source of the given EIRP.

    E[V/m] = sqrt(30 EIRP[W]) / d[m].

    Parameters
    ----------
    eirp_dbm : array_like
        EIRP in dBm.
    distance_m : array_like
        Distance in m.
    """
    eirp_w = 10.0 ** (np.asarray(eirp_dbm, dtype=float) / 10.0) * 1e-3
    d = np.asarray(distance_m, dtype=float)
    return np.sqrt(30.0 * eirp_w) / d * 1e6


def fcc_15_231b_field_limit_uv_per_m(freq_hz: ArrayLike) -> np.ndarray:
    """47 CFR 15.231(b) fundamental field-strength limit at 3 m, in uV/m.

    Implemented segment: 260-470 MHz, linearly interpolated from 3,750 uV/m at 260 MHz to
    12,500 uV/m at 470 MHz (315 MHz -> 6,041.67 uV/m = 75.6 dBuV/m; 433.92 MHz ->
    10,996.7 uV/m). The rule's other segments are not built in.

    The 15.231(b) limits apply to the average field strength; 15.35 allows averaging over
    the pulse train and sets a peak limit 20 dB above (from memory: check the rule's text
    before relying on a peak-to-average allowance). The lower limits of 15.231(e) are not
    built in.

    Raises
    ------
    ValueError
        If any frequency lies outside 260-470 MHz.

    References
    ----------
    47 CFR 15.231(b), table of field strength of fundamental.
    """
    f = np.asarray(freq_hz, dtype=float)
    if np.any(~((f >= _FCC_SEG_F_LOW_HZ) & (f <= _FCC_SEG_F_HIGH_HZ))):
        raise ValueError(
            "47 CFR 15.231(b) limit is implemented for 260-470 MHz only; got "
            f"{np.atleast_1d(f / 1e6).tolist()} MHz"
        )
    slope = (_FCC_SEG_E_HIGH_UV_PER_M - _FCC_SEG_E_LOW_UV_PER_M) / (_FCC_SEG_F_HIGH_HZ - _FCC_SEG_F_LOW_HZ)
    return _FCC_SEG_E_LOW_UV_PER_M + slope * (f - _FCC_SEG_F_LOW_HZ)


def fcc_15_231b_eirp_dbm(freq_hz: ArrayLike) -> np.ndarray:
    """EIRP ceiling in dBm equivalent to the 47 CFR 15.231(b) limit at 3 m (about -19.6 dBm at 315 MHz).

    See :func:`fcc_15_231b_field_limit_uv_per_m` (ValueError outside 260-470 MHz).
    """
    return eirp_dbm_from_field(fcc_15_231b_field_limit_uv_per_m(freq_hz), FCC_MEASURING_DISTANCE_M)


def etsi_en300220_eirp_dbm() -> float:
    """EIRP ceiling in dBm for 433.05-434.79 MHz: 10 mW e.r.p. = 10 dBm + 2.15 dB = 12.15 dBm.

    Duty cycle <= 10 % applies to this entry.

    References
    ----------
    ERC/REC 70-03 Annex 1; Commission Decision 2006/771/EC; ETSI EN 300 220-2.
    """
    return float(10.0 * np.log10(ETSI_433_ERP_MW)) + ERP_TO_EIRP_DB


@dataclass(frozen=True)
class EirpPreset:
    """A sensor EIRP ceiling preset.

    Attributes
    ----------
    label : str
        Short label for menus and reports.
    freq_hz : float
        Frequency the preset is evaluated at, in Hz.
    eirp_dbm : float
        EIRP ceiling in dBm.
    source : str
        The rule and the conversion used.
    market : str
        "US" or "EU".
    f_low_hz, f_high_hz : float
        Band over which the rule entry applies, in Hz.
    """

    label: str
    freq_hz: float
    eirp_dbm: float
    source: str
    market: str
    f_low_hz: float
    f_high_hz: float


def _fcc_preset(freq_hz: float) -> EirpPreset:
    e = float(fcc_15_231b_field_limit_uv_per_m(freq_hz))
    return EirpPreset(
        label=f"{freq_hz / 1e6:.2f} MHz, US 47 CFR 15.231(b)",
        freq_hz=float(freq_hz),
        eirp_dbm=float(fcc_15_231b_eirp_dbm(freq_hz)),
        source=(
            f"47 CFR 15.231(b): {e:,.2f} uV/m at 3 m ({20 * np.log10(e):.1f} dBuV/m, linear "
            "interpolation 3,750-12,500 uV/m over 260-470 MHz; average limit), converted with "
            "E = sqrt(30 EIRP)/d"
        ),
        market="US",
        f_low_hz=_FCC_SEG_F_LOW_HZ,
        f_high_hz=_FCC_SEG_F_HIGH_HZ,
    )


_ETSI_PRESET = EirpPreset(
    label="433.92 MHz, EU ERC/REC 70-03 / ETSI EN 300 220",
    freq_hz=433.92e6,
    eirp_dbm=etsi_en300220_eirp_dbm(),
    source=(
        "ERC/REC 70-03 Annex 1 and EU Decision 2006/771/EC, restated in ETSI EN 300 220-2: "
        "433.05-434.79 MHz, 10 mW e.r.p., duty cycle <= 10 %; EIRP = e.r.p. + 2.15 dB"
    ),
    market="EU",
    f_low_hz=ETSI_433_F_LOW_HZ,
    f_high_hz=ETSI_433_F_HIGH_HZ,
)

#: Presets offered by the GUI and the docs: the 315 MHz US ceiling, the 433.92 MHz EU
#: ceiling and, for US products at 433.92 MHz, the 15.231(b) value there.
EIRP_PRESETS: list[EirpPreset] = [_fcc_preset(315e6), _ETSI_PRESET, _fcc_preset(433.92e6)]


def eirp_ceiling_dbm(freq_hz: float, market: str | None = None) -> EirpPreset | None:
    """The EIRP ceiling preset for the band containing ``freq_hz``, or None.

    Parameters
    ----------
    freq_hz : float
        Frequency in Hz.
    market : {"US", "EU"}, optional
        Restrict to one market. Without it the EU entry wins inside 433.05-434.79 MHz
        (the usual market for 433.92 MHz tire sensors: common practice) and the US
        15.231(b) entry applies elsewhere in 260-470 MHz.

    Returns
    -------
    EirpPreset or None
        A listed preset when its frequency matches (within 1 kHz); for the US rule,
        whose limit varies with frequency, a preset evaluated at ``freq_hz`` otherwise.
        None when no implemented rule covers the frequency.
    """
    f = float(freq_hz)
    if market is not None and market not in ("US", "EU"):
        raise ValueError(f"unknown market {market!r}; use 'US' or 'EU'")
    for preset in EIRP_PRESETS:
        if market is not None and preset.market != market:
            continue
        if preset.market == "EU" and preset.f_low_hz <= f <= preset.f_high_hz:
            return preset
        if preset.market == "US" and abs(preset.freq_hz - f) <= 1e3:
            return preset
    if market in (None, "US") and _FCC_SEG_F_LOW_HZ <= f <= _FCC_SEG_F_HIGH_HZ:
        return _fcc_preset(f)
    return None

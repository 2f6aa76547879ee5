"""Radio-limit presets for the sensor EIRP ceiling (315 MHz and 433.92 MHz bands).

The field strength E of an isotropic radiator in free space at distance d is

    E [V/m] = sqrt(30 EIRP[W]) / d[m],

so a field-strength limit at a measuring distance converts to an EIRP ceiling. These are
the limits of the rules as written for the fundamental emission. Radio limits follow the
rules of each market: confirm against the current text of the rule for the product.

Peak and average (:func:`check_sensor_eirp`). The engine's link budget uses the sensor's
*peak* EIRP: the power while a frame is on the air. The rules measure differently:

- 47 CFR 15.231(b): the table's limits are average values (from memory; confirm against the
  rule's text). For pulsed emissions 15.35(c) averages the field over one complete pulse
  train, including its blanking intervals, when the train lasts at most 0.1 s, and otherwise
  over the 0.1 s during which the field is largest (from memory; confirm against the rule's
  text). With the average detector acting on the field envelope, the average field is the
  peak field times the on-air share of that window, so the averaging factor is
  20 log10(on-air share) dB (common practice) and the average-equivalent EIRP is the peak
  EIRP plus that factor (E^2 is proportional to EIRP). 15.35(b): where average limits apply,
  the peak emission may not exceed the average limit by more than 20 dB (text checked at
  ecfr.io, 47 CFR 15.35(b)). The highest allowed peak EIRP is therefore
  min(limit - factor, limit + 20 dB). Frames are taken as carrier on for their whole
  duration (FSK); with on-off keying the true factor is lower, and the file may state its
  own factor instead (a labelled assumption). Without frame timing no credit is taken: the
  peak EIRP is compared with the average limit (conservative).
- ERC/REC 70-03 / ETSI EN 300 220: the 10 mW e.r.p. is the power during transmission, so
  the peak EIRP is compared with it directly; the duty cycle (<= 10 %) is a separate limit,
  checked when the burst period is known.

References
----------
- 47 CFR 15.231(b) (periodic operation in the band 40.66-40.70 MHz and above 70 MHz):
  table of fundamental field strength limits at 3 m.
- 47 CFR 15.35(b) (peak limit 20 dB above the average limit; text checked) and 15.35(c)
  (averaging of pulsed emissions; from memory).
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
    "EIRP_PRESETS",
    "ERP_TO_EIRP_DB",
    "FCC_AVERAGING_WINDOW_S",
    "FCC_PEAK_ABOVE_AVERAGE_DB",
    "EirpCheck",
    "EirpPreset",
    "averaging_factor_db",
    "check_sensor_eirp",
    "eirp_ceiling_dbm",
    "eirp_dbm_from_field",
    "etsi_en300220_eirp_dbm",
    "fcc_15_231b_eirp_dbm",
    "fcc_15_231b_field_limit_uv_per_m",
    "field_uv_per_m_from_eirp",
    "pulse_train_on_share",
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

    The 15.231(b) limits apply to the average field strength (from memory; confirm against the
    rule's text); how a peak EIRP is compared with them is :func:`check_sensor_eirp`. The lower
    limits of 15.231(e) are not built in.

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


# ----- peak EIRP against the limits ---------------------------------------------------------------
#: 47 CFR 15.35(c) averaging window for pulsed emissions, s (from memory; confirm against the rule's text).
FCC_AVERAGING_WINDOW_S = 0.1
#: 47 CFR 15.35(b): peak limit above the average limit, dB (text checked at ecfr.io, 47 CFR 15.35(b)).
FCC_PEAK_ABOVE_AVERAGE_DB = 20.0
#: ERC/REC 70-03 duty-cycle limit of the 433.05-434.79 MHz entry.
ETSI_433_DUTY_CYCLE = 0.10
#: An EIRP within this of the allowed value counts as at the ceiling (the GUI presets round to 0.01 dB).
EIRP_TOLERANCE_DB = 0.01


def pulse_train_on_share(frame_duration_s: float, frames: int, interval_s: float,
                         window_s: float = FCC_AVERAGING_WINDOW_S) -> tuple[float, float, str]:
    """On-air share of the 47 CFR 15.35(c) averaging window for a burst of equal frames.

    The burst ("pulse train") is ``frames`` frames of ``frame_duration_s`` (carrier on), one every
    ``interval_s``. When the train lasts at most ``window_s`` (0.1 s) the average is taken over the
    complete train including its gaps; otherwise over the ``window_s`` window holding the most
    on-air time (15.35(c), from memory; confirm against the rule's text). The on-air time of a
    sliding window is piecewise linear in its start, so its maximum is at a start where the window
    begins at a frame start or ends at a frame end; all such starts are tried.

    Returns
    -------
    (share, averaging time in s, description)
    """
    tau, k, t = float(frame_duration_s), int(frames), float(interval_s)
    if not (tau > 0 and k >= 1 and t > 0 and window_s > 0):
        raise ValueError("frame duration, frame count, interval and window must be positive")
    if k > 1 and tau > t:
        raise ValueError(f"frames of {tau * 1e3:g} ms overlap at an interval of {t * 1e3:g} ms")
    train = (k - 1) * t + tau
    if train <= window_s:
        share = k * tau / train
        return share, train, (f"{k} x {tau * 1e3:g} ms on air over the complete {train * 1e3:g} ms pulse train")
    starts = np.arange(k) * t
    ends = starts + tau
    cand = np.concatenate([starts, ends - window_s])
    on = np.clip(np.minimum(cand[:, None] + window_s, ends) - np.maximum(cand[:, None], starts), 0.0, None).sum(axis=1)
    best = float(on.max())
    return best / window_s, window_s, (f"{best * 1e3:g} ms on air in the {window_s * 1e3:g} ms window with the most "
                                       f"(train of {k} x {tau * 1e3:g} ms frames every {t * 1e3:g} ms)")


def averaging_factor_db(on_share: ArrayLike) -> np.ndarray:
    """Averaging factor, dB (<= 0), of a field averaged over a window with the given on-air share.

    An average detector on the field envelope reads peak field x share, so the factor is
    20 log10(share) (common practice for the 15.35 average of pulsed emissions); in EIRP terms the
    average-equivalent EIRP is the peak EIRP plus this factor, since E^2 is proportional to EIRP.
    """
    share = np.asarray(on_share, dtype=float)
    if np.any((share <= 0) | (share > 1)):
        raise ValueError("on-air share must lie in (0, 1]")
    return 20.0 * np.log10(share)


@dataclass(frozen=True)
class EirpCheck:
    """The sensor's peak EIRP against the radio limit of its market (see the module notes).

    Attributes
    ----------
    preset : the rule entry, or None when no built-in rule covers the frequency
    peak_eirp_dbm : peak EIRP (power while a frame is on the air), dBm
    averaging_factor_db : average minus peak, dB (<= 0; 0 for EN 300 220, which limits the power
        during transmission)
    averaging : how the factor was obtained
    average_eirp_dbm : peak + averaging factor, dBm (what an average limit is compared with)
    limit_dbm : the rule's EIRP limit (average for 15.231(b), during transmission for EN 300 220), dBm
    peak_limit_dbm : the peak limit (15.231(b): limit + 20 dB per 15.35(b); EN 300 220: the limit), dBm
    allowed_peak_dbm : the highest peak EIRP the rule allows with this timing, dBm: the ceiling
    excess_db : peak EIRP - allowed peak, dB (> 0: over the ceiling)
    duty_cycle, duty_cycle_limit : EN 300 220 duty cycle and its limit, when the timing is known
    notes : further remarks (duty cycle unknown or over, no rule built in)
    """

    preset: EirpPreset | None
    peak_eirp_dbm: float
    averaging_factor_db: float
    averaging: str
    average_eirp_dbm: float
    limit_dbm: float | None
    peak_limit_dbm: float | None
    allowed_peak_dbm: float | None
    excess_db: float
    duty_cycle: float | None = None
    duty_cycle_limit: float | None = None
    notes: tuple[str, ...] = ()

    @property
    def over_ceiling(self) -> bool:
        """True when the peak EIRP exceeds the allowed peak (by more than EIRP_TOLERANCE_DB)."""
        return self.excess_db > EIRP_TOLERANCE_DB

    @property
    def duty_cycle_over(self) -> bool:
        return self.duty_cycle is not None and self.duty_cycle > self.duty_cycle_limit

    @property
    def margin_shift_db(self) -> float:
        """dB to take off every margin to get the margin at the ceiling (EIRP adds in dB to every level)."""
        return self.excess_db if self.over_ceiling else 0.0

    def margin_at_ceiling_db(self, margin_db: ArrayLike) -> np.ndarray:
        """Margin with the EIRP lowered to the ceiling: margin - (EIRP - ceiling) when over, else the margin."""
        return np.asarray(margin_db, dtype=float) - self.margin_shift_db

    def warning(self) -> str:
        """The line every output prints first when the EIRP is over the ceiling ("" otherwise)."""
        if not self.over_ceiling:
            return ""
        p = self.preset
        return (f"RADIO LIMIT EXCEEDED: sensor peak EIRP {self.peak_eirp_dbm:.2f} dBm is {self.excess_db:.2f} dB above "
                f"the {self.allowed_peak_dbm:.2f} dBm allowed by {p.label} ({self.averaging}); margins at the "
                f"ceiling are {self.excess_db:.2f} dB lower than the margins shown.")

    def short(self) -> str:
        """A short status for a settings panel or status bar."""
        p = self.preset
        if p is None:
            return "No built-in radio limit covers this frequency: check the market's rules."
        if self.over_ceiling:
            return (f"ABOVE the {p.label} ceiling of {self.allowed_peak_dbm:.1f} dBm peak by {self.excess_db:.1f} dB: "
                    f"margins at the ceiling are {self.excess_db:.1f} dB lower.")
        if p.market == "US":
            return (f"Within {p.label}: up to {self.allowed_peak_dbm:.1f} dBm peak allowed (averaging factor "
                    f"{self.averaging_factor_db:+.1f} dB" + ("" if self.averaging_factor_db else ", none taken") + ").")
        duty = "" if self.duty_cycle is None else f", duty cycle {100 * self.duty_cycle:.2g} %"
        return (f"Within {p.label}: up to {self.limit_dbm:.1f} dBm during transmission{duty}."
                + (" DUTY CYCLE OVER THE LIMIT." if self.duty_cycle_over else ""))

    def summary(self) -> str:
        """One sentence: the comparison and how averaging was treated."""
        p = self.preset
        if p is None:
            return (f"Sensor peak EIRP {self.peak_eirp_dbm:.2f} dBm: no built-in radio-limit rule covers this "
                    "frequency; check the market's rules.")
        if self.over_ceiling:
            text = self.warning()
        elif p.market == "US":
            text = (f"Sensor peak EIRP {self.peak_eirp_dbm:.2f} dBm is within {p.label}: average-equivalent "
                    f"{self.average_eirp_dbm:.2f} dBm against the {self.limit_dbm:.2f} dBm average limit "
                    f"({self.averaging}), peak against the {self.peak_limit_dbm:.2f} dBm peak limit (15.35(b): "
                    f"average limit + {FCC_PEAK_ABOVE_AVERAGE_DB:g} dB); highest allowed peak "
                    f"{self.allowed_peak_dbm:.2f} dBm.")
        else:
            text = (f"Sensor peak EIRP {self.peak_eirp_dbm:.2f} dBm is within {p.label}: {self.limit_dbm:.2f} dBm "
                    f"during transmission ({self.averaging}).")
        return " ".join([text, *self.notes])

    def to_dict(self) -> dict:
        p = self.preset

        def r(x, nd=3):
            return None if x is None else round(float(x), nd)

        return {
            "over_ceiling": self.over_ceiling,
            "message": self.summary(),
            "rule": p.label if p else None,
            "rule_source": p.source if p else None,
            "market": p.market if p else None,
            "peak_eirp_dbm": r(self.peak_eirp_dbm),
            "averaging_factor_db": r(self.averaging_factor_db),
            "averaging": self.averaging,
            "average_eirp_dbm": r(self.average_eirp_dbm),
            "limit_dbm": r(self.limit_dbm),
            "peak_limit_dbm": r(self.peak_limit_dbm),
            "ceiling_dbm": r(self.allowed_peak_dbm),
            "excess_db": r(self.excess_db),
            "margin_shift_db": r(self.margin_shift_db),
            "duty_cycle": r(self.duty_cycle, 6),
            "duty_cycle_limit": r(self.duty_cycle_limit, 6),
        }


def check_sensor_eirp(radio) -> EirpCheck:
    """Compare the sensor's peak EIRP with the radio limit of its market (module notes: peak and average).

    ``radio`` is a ``core.vehicle.Radio`` (read: frequency_hz, sensor_eirp_dbm, market,
    frames_per_burst, frame_interval_s, frame_duration_s, burst_period_s, averaging_factor_db).
    The market is ``radio.market`` or, when unset, the default of :func:`eirp_ceiling_dbm`.
    """
    peak = float(radio.sensor_eirp_dbm)
    market = getattr(radio, "market", None)
    preset = eirp_ceiling_dbm(radio.frequency_hz, market)
    tau = getattr(radio, "frame_duration_s", None)
    given = getattr(radio, "averaging_factor_db", None)
    k, t = int(radio.frames_per_burst), float(radio.frame_interval_s)
    if preset is None:
        return EirpCheck(None, peak, 0.0, "no rule built in", peak, None, None, None, 0.0)
    if preset.market == "EU":
        notes = []
        duty = limit = None
        period = getattr(radio, "burst_period_s", None)
        if tau is not None and period is not None:
            duty = k * float(tau) / float(period)
            limit = ETSI_433_DUTY_CYCLE
            if duty > limit:
                notes.append(f"DUTY CYCLE OVER THE LIMIT: {100 * duty:.3g} % ({k} x {tau * 1e3:g} ms every "
                             f"{period:g} s) against {100 * limit:g} %.")
            else:
                notes.append(f"Duty cycle {100 * duty:.3g} % ({k} x {tau * 1e3:g} ms every {period:g} s), limit "
                             f"{100 * limit:g} %.")
        else:
            notes.append("Duty cycle not checked (give radio.frame_duration_s and radio.burst_period_s).")
        how = "e.r.p. during transmission, no averaging; duty cycle limited separately"
        return EirpCheck(preset, peak, 0.0, how, peak, preset.eirp_dbm, preset.eirp_dbm, preset.eirp_dbm,
                         peak - preset.eirp_dbm, duty, limit, tuple(notes))
    if given is not None:
        factor = float(given)
        how = f"averaging factor {factor:.2f} dB as given in the file (an assumption, not computed)"
    elif tau is not None:
        share, _avg_s, what = pulse_train_on_share(float(tau), k, t)
        factor = float(averaging_factor_db(share))
        how = (f"averaging factor {factor:.2f} dB = 20 log10({share:.4g}): {what}; 47 CFR 15.35(c) averaging (from "
               "memory; confirm against the rule's text)")
    else:
        factor = 0.0
        how = "no frame timing given: peak compared with the average limit, no averaging credit (conservative)"
    limit = preset.eirp_dbm
    peak_limit = limit + FCC_PEAK_ABOVE_AVERAGE_DB
    allowed = min(limit - factor, peak_limit)
    return EirpCheck(preset, peak, factor, how, peak + factor, limit, peak_limit, allowed, peak - allowed)

"""What the engine computes and what it leaves out, in plain sentences for reports.

One place for the "method and limits" an output states beside its numbers: the terms of the link
budget as this scene uses them, the assumptions that move the results most, with their size where
our own validation measured it (docs/VALIDATION.md; docs/model-notes-engine.md, "Known
simplifications"), and how far the ranking can be trusted (core.scoring.RANK_RESOLUTION_DB).
"""

from __future__ import annotations

from core.scoring import FULLWAVE_OFFSET_RANGE_DB, FULLWAVE_RMS_RANGE_DB, RANK_RESOLUTION_DB, Scene


def method_text(scene: Scene) -> str:
    """The level computed per wheel and wheel angle, as this scene computes it (one paragraph)."""
    wheel = (f"the wheel's installed pattern from NEC-2 tables ({scene.wheel_model_label})"
             if scene.wheel_tables else "the wheel's shadow as a rim knife edge and tire losses")
    road = ("plus a two-ray road reflection (Fresnel coefficient, ITU-R P.2040 material parameters)"
            if scene.ground_reflection else "without the road reflection")
    text = (f"Received level per wheel and wheel angle: sensor EIRP, {wheel}, the receiver's pattern and polarization, "
            f"free-space loss (Friis, ITU-R P.525), body crossings through a 2.5-D hull (each panel's crossing loss "
            f"weighed against the dominant edge's ITU-R P.526 knife-edge loss), {road}.")
    if getattr(scene, "cavity", None) is not None:
        text += (" Inside the hull the cabin's diffuse field is added: the power entering through glass and plastic "
                 "openings, balanced against leakage, wall and contents absorption (power balance of D. A. Hill et "
                 "al., IEEE Trans. EMC 36(3), 1994).")
    text += f" Worst case: {scene.score_method}. The spot margin is its worst wheel's."
    return text


def limits(scene: Scene) -> list[tuple[str, str]]:
    """(title, sentence) of each assumption that bounds the results, the largest first."""
    lo, hi = FULLWAVE_RMS_RANGE_DB
    off_lo, off_hi = FULLWAVE_OFFSET_RANGE_DB
    out = [
        ("Ranking resolution",
         (f"Against a whole-vehicle full-wave (NEC-2) solution of three sample bodies the engine's cabin levels agree "
         f"to {lo:.1f}-{hi:.1f} dB RMS after one mean offset per body ({off_lo:+.1f} to {off_hi:+.1f} dB), but it "
         f"does not reproduce the order of cabin spots whose levels lie close together; nor is that order stable "
         f"in the full-wave solution itself, which reorders those spots between frequencies a few per cent "
         f"apart. Spots within {RANK_RESOLUTION_DB:g} dB of each other are not ranked apart (docs/VALIDATION.md).")),
        ("One cavity",
         ("The hull has no inner panels: engine bay, cabin, boot and bumpers are one cavity, so a spot in a bumper "
         "or the engine bay receives the cabin's diffuse field as if it were open to the cabin (likely optimistic "
         "there). Seats, occupants and cargo act only through their absorption, not as obstacles.")),
        ("Openings",
         ("Energy enters the cabin through glass and plastic zones as a diffuse field; diffraction at the rims of "
         "windows next to a metal panel is not traced (a straight ray meeting metal is charged the panel's loss).")),
        ("Materials and wheel",
         ("Metal, tire and plastic losses are engineering defaults unless the file or a calibration gives measured "
         "values; the other wheels are not obstacles; the road is flat and infinite; the receiver antenna is "
         "taken in free space (its installation and cable are not modelled).")),
        ("Far field",
         ("Every path uses far-field formulas; spots within lambda/2pi of a sensor are flagged, their levels only "
         "indicative.")),
    ]
    return out


__all__ = ["limits", "method_text"]

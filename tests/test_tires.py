"""ISO metric tire codes: overall diameter from the designation.

Source for every expected value: the ISO 4000-1 / ETRTO Standards Manual designation
"section width [mm] / aspect ratio [%] construction rim diameter code [in]", whose nominal
overall diameter is

    D = rim[in] x 25.4 + 2 x width x aspect / 100   (mm)

(the same arithmetic applies to LT-metric sizes such as LT235/80R17). Each size below is
worked by hand in its comment; the test does not reuse the program's formula.
"""

from __future__ import annotations

import pytest

from core.tires import parse_tire_code

# (code, overall diameter mm, rim diameter mm, section width mm), worked by hand:
HAND_WORKED = [
    # 17 x 25.4 = 431.8; 2 x 225 x 0.50 = 225.0; 431.8 + 225.0 = 656.8 (the DESIGN.md section 9 check value)
    ("225/50R17", 656.8, 431.8, 225),
    # 16 x 25.4 = 406.4; 2 x 205 x 0.55 = 225.5; 406.4 + 225.5 = 631.9
    ("205/55R16", 631.9, 406.4, 205),
    # 15 x 25.4 = 381.0; 2 x 195 x 0.65 = 253.5; 381.0 + 253.5 = 634.5
    ("195/65R15", 634.5, 381.0, 195),
    # 20 x 25.4 = 508.0; 2 x 275 x 0.40 = 220.0; 508.0 + 220.0 = 728.0
    ("275/40R20", 728.0, 508.0, 275),
    # 14 x 25.4 = 355.6; 2 x 185 x 0.60 = 222.0; 355.6 + 222.0 = 577.6
    ("185/60R14", 577.6, 355.6, 185),
    # ZR speed-rated construction, same arithmetic: 19 x 25.4 = 482.6; 2 x 245 x 0.35 = 171.5; 654.1
    ("245/35ZR19", 654.1, 482.6, 245),
    # P-metric prefix, same arithmetic: 15 x 25.4 = 381.0; 2 x 215 x 0.65 = 279.5; 660.5
    ("P215/65R15", 660.5, 381.0, 215),
]

LT_CODES = [
    # LT-metric: 17 x 25.4 = 431.8; 2 x 235 x 0.80 = 376.0; 431.8 + 376.0 = 807.8
    ("LT235/80R17", 807.8, 431.8, 235),
    # 17 x 25.4 = 431.8; 2 x 245 x 0.75 = 367.5; 431.8 + 367.5 = 799.3
    ("LT245/75R17", 799.3, 431.8, 245),
    # 16 x 25.4 = 406.4; 2 x 265 x 0.75 = 397.5; 406.4 + 397.5 = 803.9
    ("LT265/75R16", 803.9, 406.4, 265),
]


@pytest.mark.parametrize(("code", "outer_mm", "rim_mm", "width_mm"), HAND_WORKED + LT_CODES)
def test_overall_diameter_from_iso_code(code, outer_mm, rim_mm, width_mm):
    # ISO 4000-1 / ETRTO designation arithmetic, values worked by hand above
    t = parse_tire_code(code)
    assert t.outer_diameter_m == pytest.approx(outer_mm / 1000.0, abs=1e-9)
    assert t.rim_diameter_m == pytest.approx(rim_mm / 1000.0, abs=1e-9)
    assert t.section_width_m == pytest.approx(width_mm / 1000.0, abs=1e-9)
    assert t.outer_radius_m == pytest.approx(outer_mm / 2000.0, abs=1e-9)
    assert t.rim_radius_m == pytest.approx(rim_mm / 2000.0, abs=1e-9)


def test_code_is_case_and_space_tolerant():
    # "225/50 R 17" and lower case are common ways of writing the same ISO designation
    for text in ("225/50r17", " 225/50R17 ", "225/50 R17", "225/50R 17"):
        assert parse_tire_code(text).outer_diameter_m == pytest.approx(0.6568, abs=1e-9)
    assert parse_tire_code("lt235/80r17").code == "LT235/80R17"


@pytest.mark.parametrize(
    "bad",
    [
        "225/50X17",  # no such construction letter
        "225/50R",  # rim diameter code missing
        "22/50R17",  # section width must be three digits (mm)
        "225-50R17",
        "225/50R17 91V",  # load index / speed symbol are not part of the size
        "",
        "R17",
        "LTX235/80R17",
    ],
)
def test_malformed_code_is_rejected_naming_the_code(bad):
    with pytest.raises(ValueError) as e:
        parse_tire_code(bad)
    assert repr(bad) in str(e.value)
    assert "is not a tire size" in str(e.value)


def test_225_50x17_message_is_exact():
    # the example message of issue 2 item 6
    with pytest.raises(ValueError, match=r"^'225/50X17' is not a tire size"):
        parse_tire_code("225/50X17")


@pytest.mark.parametrize(("bad", "what"), [("225/05R17", "aspect ratio"), ("225/50R35", "rim diameter")])
def test_out_of_range_parts_are_rejected(bad, what):
    with pytest.raises(ValueError, match=what) as e:
        parse_tire_code(bad)
    assert repr(bad) in str(e.value)

"""Tire size arithmetic for ISO metric codes such as ``225/50R17`` or ``LT235/80R17``.

Overall diameter D = rim[in] x 25.4 + 2 x width x aspect / 100 (mm).

References
----------
ISO 4000-1 (passenger car tyres) and the ETRTO Standards Manual, designation
"section width / aspect ratio, construction, rim diameter code"; LT-metric sizes
(e.g. ``LT235/80R17``) follow the same arithmetic.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

INCH_M = 0.0254

_CODE = re.compile(
    r"^(?P<prefix>P|LT|ST|T)?(?P<width>\d{3})/(?P<aspect>\d{2,3})\s?"
    r"(?P<construction>ZR|R|D|B)\s?(?P<rim>\d{2}(?:\.\d)?)$"
)


@dataclass(frozen=True)
class TireSize:
    """Tire dimensions in metres.

    Attributes
    ----------
    outer_diameter_m : overall (unloaded) diameter, m
    rim_diameter_m : nominal rim (bead seat) diameter, m
    section_width_m : section width, m
    code : the ISO code it came from, or "" for explicit sizes
    """

    outer_diameter_m: float
    rim_diameter_m: float
    section_width_m: float
    code: str = ""

    @property
    def outer_radius_m(self) -> float:
        return self.outer_diameter_m / 2.0

    @property
    def rim_radius_m(self) -> float:
        return self.rim_diameter_m / 2.0


def parse_tire_code(code: str) -> TireSize:
    """Parse an ISO metric tire code; raise ValueError naming the code if it is not one."""
    m = _CODE.match(code.strip().upper())
    if not m:
        raise ValueError(f"{code!r} is not a tire size (expected e.g. '225/50R17' or 'LT235/80R17')")
    width_mm = int(m["width"])
    aspect = int(m["aspect"])
    rim_in = float(m["rim"])
    if not 10 <= aspect <= 120:
        raise ValueError(f"{code!r}: aspect ratio {aspect} is outside 10-120")
    if not 10 <= rim_in <= 30:
        raise ValueError(f"{code!r}: rim diameter {rim_in} in is outside 10-30 in")
    rim_mm = rim_in * 25.4
    outer_mm = rim_mm + 2.0 * width_mm * aspect / 100.0
    return TireSize(outer_mm / 1000.0, rim_mm / 1000.0, width_mm / 1000.0, code.strip().upper())

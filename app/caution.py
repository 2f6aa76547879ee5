"""The safety caution, in one place for every front end (DESIGN.md section 8).

``CAUTION`` is the full paragraph (reports, data exports); ``SAFETY_NOTE`` is the one line the
command line prints after every placement result (``rank``, ``heatmap``, ``report``, ``compare``)
and the ``caution`` of ``rank --json``. ``check``, ``schema`` and ``bench`` print no placement
result and so no note (README, Usage).
"""

from __future__ import annotations

import sys

CAUTION = (
    "Caution: the tire-pressure warning is a safety function required by law in many markets. "
    "Wheelreach is an early placement aid built on simplified models, so its results are approximate: "
    "confirm the receiver location by detailed simulation and by measurements on the vehicle. "
    "Radio limits follow the rules of each market and licensed practice."
)

SAFETY_NOTE = (
    "Caution: results are approximate; confirm by detailed simulation and vehicle measurement. "
    "Radio limits follow each market's rules."
)


def print_safety_note(file=None) -> None:
    """Print SAFETY_NOTE as the last line of a printed result (stdout by default)."""
    print(SAFETY_NOTE, file=file or sys.stdout)

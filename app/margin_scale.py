"""The one colour scale of margin maps: the report's heatmaps, the comparison and the desktop program.

Symmetric about 0 dB margin and fixed (not fitted to each map), so two heatmaps of different bodies
compare by colour; margins beyond the range take the end colours, and the colour bars say so.
"""

from __future__ import annotations

#: the colour scale spans -MARGIN_RANGE_DB .. +MARGIN_RANGE_DB dB of margin, 0 dB at the map's neutral centre
MARGIN_RANGE_DB = 30.0  # cabin spots sit near +20 dB with the cabin field (core.cavity): room to show them apart

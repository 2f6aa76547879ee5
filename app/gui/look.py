"""Colours and pens of the program, all taken from pyqtgraph's colour map library."""

from __future__ import annotations

from functools import cache

import pyqtgraph as pg
from PySide6.QtCore import Qt
from PySide6.QtGui import QColor
from PySide6.QtWidgets import QGraphicsItem, QLabel, QSizePolicy

#: diverging map for link margin, centred on 0 dB (CET-D1 from the CET perceptual library)
MARGIN_MAP = "CET-D1"
#: categorical palette for materials and wheels
PALETTE = "PAL-relaxed_bright"
#: the body outline and axes
BODY_COLOUR = QColor(40, 40, 40)


@cache
def _palette(name: str) -> tuple[QColor, ...]:
    cols = [QColor(c) for c in pg.colormap.get(name).getColors(mode="qcolor")]
    if len(cols) > 1 and cols[0] == cols[-1]:
        cols = cols[:-1]  # the palette closes on its first colour
    return tuple(cols)


# palette entries per material (glass blue, plastic orange, open green, ...)
_MATERIAL_INDEX = {"glass": 5, "plastic": 0, "open": 3, "composite": 6, "metal": 8, "tire_sidewall": 2, "tire_tread": 7}
# palette entries for wheel lines, most distinct first (the light yellow entry is left out)
_WHEEL_INDEX = (5, 8, 3, 6, 0, 4, 7, 2)


def material_colour(name: str, alpha: int = 90) -> QColor:
    """Fill colour of a panel zone of material ``name``."""
    pal = _palette(PALETTE)
    i = _MATERIAL_INDEX.get(name, 4 + sum(map(ord, name)) % 4)
    c = QColor(pal[i % len(pal)])
    c.setAlpha(alpha)
    return c


def wheel_colour(i: int) -> QColor:
    """Line colour of wheel i (levels, burst and distinctness figures)."""
    pal = _palette("PAL-relaxed")
    return QColor(pal[_WHEEL_INDEX[i % len(_WHEEL_INDEX)] % len(pal)])


def margin_colormap() -> pg.ColorMap:
    return pg.colormap.get(MARGIN_MAP)


def show_grid(plot: pg.PlotWidget, alpha: float = 0.25) -> None:
    """Grid lines on both axes of ``plot``, with each axis drawn from a pixmap cache.

    pyqtgraph draws the grid as part of its axes, so an axis covers the whole plot area and every
    repaint anywhere in it (a marker moving under the mouse) replayed both axes' pictures: about 1 ms
    each, several per drag step. Cached, the axes are re-rendered only when they change (range,
    size, labels) and a small repaint copies a small piece of the pixmap."""
    plot.showGrid(x=True, y=True, alpha=alpha)
    for axis in plot.getPlotItem().axes.values():
        axis["item"].setCacheMode(QGraphicsItem.CacheMode.DeviceCoordinateCache)


def lock_aspect(plot: pg.PlotWidget) -> None:
    """Draw ``plot`` at one scale on both axes, with a left axis that may widen but never narrows.

    With the aspect locked, the height of the view in metres follows its width in pixels. A left
    axis that narrows and widens with its tick labels changes that width, hence the range, hence
    the labels: the view can repaint for ever (the pickup at 1600x1000 did, both linked views
    swapping between two ranges about 13 times a second). A width that only grows settles after a
    few steps, since the labels' width is bounded."""
    plot.setAspectLocked(True)
    plot.getAxis("left").setStyle(autoReduceTextSpace=False)


class ElidedLabel(QLabel):
    """A one-line label that shortens its text with an ellipsis when the window is narrow (so a long status
    line never sets the window's minimum width; :func:`elide_parts`); the full text is its tooltip's first line."""

    def __init__(self, text: str = "", parent=None):
        super().__init__(parent)
        self._full = ""
        self._tip = ""
        self.setSizePolicy(QSizePolicy.Policy.Preferred, QSizePolicy.Policy.Preferred)
        self.set_full_text(text)

    def set_full_text(self, text: str, tip: str = "") -> None:
        self._full, self._tip = text, tip
        super().setToolTip("\n".join(t for t in (text.replace("  |  ", "\n"), tip) if t))
        self._elide()

    def full_text(self) -> str:
        return self._full

    #: the widest the label asks to be, px (a status line leaves room for the messages beside it)
    MAX_HINT_PX = 960

    def sizeHint(self):
        hint = super().sizeHint()
        hint.setWidth(min(self.fontMetrics().horizontalAdvance(self._full) + 8, self.MAX_HINT_PX))
        return hint

    def minimumSizeHint(self):
        hint = super().minimumSizeHint()
        hint.setWidth(120)
        return hint

    def resizeEvent(self, ev) -> None:
        super().resizeEvent(ev)
        self._elide()

    #: separator of the parts of a status line; a part is shortened whole, never a number in the middle
    SEPARATOR = "  |  "

    def _elide(self) -> None:
        super().setText(elide_parts(self._full, self.fontMetrics(), max(10, self.width() - 4), self.SEPARATOR))


def elide_parts(text: str, metrics, width_px: int, separator: str = "  |  ") -> str:
    """``text`` shortened to ``width_px``: its longest ``separator``-joined part first, cut at its end with
    an ellipsis (the other parts, e.g. frequency and sensitivity, stay whole), then the whole line at its
    end. Cutting the line in its middle could join two values into one that reads as another
    ("-105 dB...2 MHz")."""
    if metrics.horizontalAdvance(text) <= width_px:
        return text
    parts = text.split(separator)
    if len(parts) > 1:
        k = max(range(len(parts)), key=lambda i: metrics.horizontalAdvance(parts[i]))
        rest = metrics.horizontalAdvance(separator.join(parts[:k] + parts[k + 1:])) + metrics.horizontalAdvance(
            separator)
        room = width_px - rest
        if room >= 12 * metrics.averageCharWidth():
            parts[k] = metrics.elidedText(parts[k], Qt.TextElideMode.ElideRight, room)
            return separator.join(parts)
    return metrics.elidedText(text, Qt.TextElideMode.ElideRight, width_px)


def signed(value: float, decimals: int) -> str:
    """``value`` with its sign at ``decimals`` places, never "-0.00": a value that rounds to zero is "+0.00"
    (a margin shown as zero passes; its colour follows the shown value)."""
    text = f"{value:+.{decimals}f}"
    return f"{0.0:+.{decimals}f}" if float(text) == 0.0 else text


"""Figures of the placement report and the comparison window, drawn with QPainter as vector graphics.

Every function draws into a rectangle of the painter's device and takes ``s``, the number of
device pixels per typographic point (1/72 in), so the same code draws on a PDF page (s = dpi/72)
and on a widget. Text is drawn as text (selectable in the PDF). Colours come from pyqtgraph's
colour map library: the margin map is the diverging CET-D1 map centred on 0 dB, wheel lines use
the PAL-relaxed palette, zone fills the PAL-relaxed_bright palette.
"""

from __future__ import annotations

import math
from functools import cache

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QPointF, QRectF, Qt
from PySide6.QtGui import QBrush, QColor, QFont, QFontMetricsF, QImage, QPainter, QPainterPath, QPen, QPolygonF

from app.margin_scale import MARGIN_RANGE_DB
from core.scoring import Heatmap
from core.vehicle import Region, Vehicle

MARGIN_MAP = "CET-D1"
BODY = QColor(40, 40, 40)
GRID = QColor(215, 215, 215)
_MATERIAL_INDEX = {"glass": 5, "plastic": 0, "open": 3, "composite": 6, "metal": 8, "tire_sidewall": 2, "tire_tread": 7}
_WHEEL_INDEX = (5, 8, 3, 6, 0, 4, 7, 2)
FONT_FAMILY = "DejaVu Sans"


@cache
def _palette(name: str) -> tuple[tuple[int, int, int, int], ...]:
    cols = [tuple(int(c) for c in row) for row in pg.colormap.get(name).getColors(mode="byte")]
    if len(cols) > 1 and cols[0] == cols[-1]:
        cols = cols[:-1]
    return tuple(cols)


def wheel_colour(i: int) -> QColor:
    pal = _palette("PAL-relaxed")
    return QColor(*pal[_WHEEL_INDEX[i % len(_WHEEL_INDEX)] % len(pal)])


def material_colour(name: str, alpha: int = 90) -> QColor:
    pal = _palette("PAL-relaxed_bright")
    i = _MATERIAL_INDEX.get(name, 4 + sum(map(ord, name)) % 4)
    c = QColor(*pal[i % len(pal)])
    c.setAlpha(alpha)
    return c


def font(size_pt: float, bold: bool = False, s: float = 1.0) -> QFont:
    """A font of ``size_pt`` points on a device with ``s`` pixels per point (pixel-sized: no double scaling)."""
    f = QFont(FONT_FAMILY)
    f.setPixelSize(max(1, round(size_pt * s)))
    f.setBold(bold)
    return no_ligatures(f)


def no_ligatures(f: QFont) -> QFont:
    """Switch off ligatures, so text copied or extracted from the PDF reads "fl", "fi" as typed."""
    for tag in ("liga", "clig", "dlig"):
        f.setFeature(QFont.Tag(tag), 0)
    return f


def pen(colour, width_pt: float, s: float, style=Qt.PenStyle.SolidLine) -> QPen:
    p = QPen(QColor(colour), max(0.5, width_pt * s), style)
    p.setCapStyle(Qt.PenCapStyle.FlatCap)
    p.setJoinStyle(Qt.PenJoinStyle.RoundJoin)
    return p


def nice_ticks(lo: float, hi: float, n: int = 6) -> np.ndarray:
    """Round tick values covering lo..hi (about n of them)."""
    if not np.isfinite(lo) or not np.isfinite(hi) or hi <= lo:
        return np.array([lo])
    raw = (hi - lo) / max(1, n)
    mag = 10 ** math.floor(math.log10(raw))
    step = next(m * mag for m in (1, 2, 2.5, 5, 10) if m * mag >= raw)
    start = math.ceil(lo / step - 1e-9) * step
    return np.arange(start, hi + step * 1e-6, step)


def _fmt(t: float) -> str:
    return f"{t:.10g}" if abs(t - round(t)) > 1e-9 else f"{round(t)}"


class Axes:
    """A data -> device mapping inside a plot frame, with ticks, grid and labels."""

    def __init__(self, p: QPainter, rect: QRectF, s: float, xlim, ylim, xlabel="", ylabel="", title="",
                 equal=False, left_pt=38.0, bottom_pt=26.0, right_pt=6.0, top_pt=None):
        self.p, self.s = p, s
        top_pt = (14.0 if title else 6.0) if top_pt is None else top_pt
        self.frame = QRectF(rect.left() + left_pt * s, rect.top() + top_pt * s,
                            rect.width() - (left_pt + right_pt) * s, rect.height() - (top_pt + bottom_pt) * s)
        self.x0, self.x1 = map(float, xlim)
        self.y0, self.y1 = map(float, ylim)
        if equal:  # same metres per pixel on both axes; centre the frame
            kx = self.frame.width() / (self.x1 - self.x0)
            ky = self.frame.height() / (self.y1 - self.y0)
            k = min(kx, ky)
            w, h = k * (self.x1 - self.x0), k * (self.y1 - self.y0)
            self.frame = QRectF(self.frame.left(), self.frame.top(), w, h)
        self.rect, self.title, self.xlabel, self.ylabel = rect, title, xlabel, ylabel

    def map(self, x, y) -> QPointF:
        f = self.frame
        return QPointF(f.left() + (x - self.x0) / (self.x1 - self.x0) * f.width(),
                       f.bottom() - (y - self.y0) / (self.y1 - self.y0) * f.height())

    def poly(self, xs, ys) -> QPolygonF:
        return QPolygonF([self.map(float(x), float(y)) for x, y in zip(xs, ys)])

    def draw_frame(self, xticks=None, yticks=None, grid=True, xfmt=_fmt, yfmt=_fmt):
        p, s, f = self.p, self.s, self.frame
        p.save()
        p.setFont(font(7, s=s))
        fm = QFontMetricsF(p.font())
        xt = nice_ticks(self.x0, self.x1, max(2, int(f.width() / (42 * s)))) if xticks is None else xticks
        yt = nice_ticks(self.y0, self.y1, max(2, int(f.height() / (28 * s)))) if yticks is None else yticks
        for t in xt:
            if not self.x0 - 1e-9 <= t <= self.x1 + 1e-9:
                continue
            q = self.map(t, self.y0)
            if grid:
                p.setPen(pen(GRID, 0.4, s))
                p.drawLine(QPointF(q.x(), f.top()), QPointF(q.x(), f.bottom()))
            p.setPen(pen(BODY, 0.6, s))
            p.drawLine(q, QPointF(q.x(), q.y() + 3 * s))
            txt = xfmt(t)
            p.drawText(QPointF(q.x() - fm.horizontalAdvance(txt) / 2, q.y() + 4 * s + fm.ascent()), txt)
        for t in yt:
            if not self.y0 - 1e-9 <= t <= self.y1 + 1e-9:
                continue
            q = self.map(self.x0, t)
            if grid:
                p.setPen(pen(GRID, 0.4, s))
                p.drawLine(QPointF(f.left(), q.y()), QPointF(f.right(), q.y()))
            p.setPen(pen(BODY, 0.6, s))
            p.drawLine(q, QPointF(q.x() - 3 * s, q.y()))
            txt = yfmt(t)
            p.drawText(QPointF(q.x() - 5 * s - fm.horizontalAdvance(txt), q.y() + fm.ascent() / 2 - 1 * s), txt)
        p.setPen(pen(BODY, 0.7, s))
        p.setBrush(Qt.BrushStyle.NoBrush)
        p.drawRect(f)
        p.setFont(font(7.5, s=s))
        fm = QFontMetricsF(p.font())
        if self.xlabel:
            p.drawText(QPointF(f.center().x() - fm.horizontalAdvance(self.xlabel) / 2,
                               f.bottom() + 6 * s + 2 * fm.height()), self.xlabel)
        if self.ylabel:
            p.save()
            p.translate(self.rect.left() + fm.ascent() + 1 * s, f.center().y() + fm.horizontalAdvance(self.ylabel) / 2)
            p.rotate(-90)
            p.drawText(QPointF(0, 0), self.ylabel)
            p.restore()
        if self.title:
            p.setFont(font(8.5, True, s))
            p.drawText(QPointF(f.left(), f.top() - 4 * s), self.title)
        p.restore()


# ----- body drawings --------------------------------------------------------------------------
def body_extent(v: Vehicle, pad: float = 0.25):
    top = np.asarray(v.body.top_outline)
    side = np.asarray(v.body.side_outline)
    tire_r = max(w.tire_size.outer_radius_m for w in v.wheels)
    xs = np.concatenate([top[:, 0], side[:, 0], [w.x_m + tire_r for w in v.wheels], [w.x_m - tire_r for w in v.wheels]])
    ys = np.concatenate([top[:, 1], [w.y_m for w in v.wheels]])
    return (xs.min() - pad, xs.max() + pad), (ys.min() - pad, ys.max() + pad), (0.0 - 0.05, side[:, 1].max() + pad)


def _poly_path(ax: Axes, pts) -> QPainterPath:
    pts = np.asarray(pts, float)
    path = QPainterPath()
    path.addPolygon(ax.poly(pts[:, 0], pts[:, 1]))
    path.closeSubpath()
    return path


def draw_body(ax: Axes, v: Vehicle, view: str, zones: bool = True, regions: bool = False, light: bool = False):
    """Outline, zones, wheels and (optionally) mounting regions of one view ('top' or 'side')."""
    p, s = ax.p, ax.s
    p.save()
    p.setClipRect(ax.frame)
    outline = v.body.top_outline if view == "top" else v.body.side_outline
    if zones:
        for z in v.zones:
            if z.view != view:
                continue
            p.setPen(pen(material_colour(z.material, 200), 0.4, s))
            p.setBrush(QBrush(material_colour(z.material, 70 if not light else 40)))
            p.drawPath(_poly_path(ax, z.outline))
    p.setBrush(Qt.BrushStyle.NoBrush)
    p.setPen(pen(QColor(120, 120, 120) if light else BODY, 0.6 if light else 0.9, s))
    p.drawPath(_poly_path(ax, outline))
    draw_wheelhouses(ax, v, view, light)
    for w in v.wheels:
        t = w.tire_size
        if view == "top":
            r = QRectF(ax.map(w.x_m - t.outer_radius_m, w.y_m + t.section_width_m / 2),
                       ax.map(w.x_m + t.outer_radius_m, w.y_m - t.section_width_m / 2))
            p.setPen(pen(BODY, 0.5, s))
            p.setBrush(QBrush(QColor(90, 90, 90, 110 if not light else 60)))
            p.drawRect(r)
        else:
            c = ax.map(w.x_m, t.outer_radius_m)
            k = ax.frame.width() / (ax.x1 - ax.x0)
            p.setPen(pen(BODY, 0.5, s))
            p.setBrush(QBrush(QColor(90, 90, 90, 70 if not light else 40)))
            p.drawEllipse(c, t.outer_radius_m * k, t.outer_radius_m * k)
            p.setBrush(Qt.BrushStyle.NoBrush)
            p.drawEllipse(c, t.rim_radius_m * k, t.rim_radius_m * k)
    if regions:
        p.setBrush(Qt.BrushStyle.NoBrush)
        p.setPen(pen(QColor(60, 60, 160), 0.6, s, Qt.PenStyle.DashLine))
        for r in v.regions:
            if r.view == view:
                p.drawPath(_poly_path(ax, r.outline))
    p.restore()


WHEELHOUSE = QColor(110, 80, 40)


def wheelhouse_path(ax: Axes, v: Vehicle, w, view: str) -> QPainterPath:
    """Outline of wheel w's wheelhouse as the engine models it (core.geometry): in the side view the arch of
    radius tire radius + clearance about the wheel centre and the strip below it down to the ground; in the top
    view its footprint from the wheelhouse inner wall (|y| = |y_wheel| - tire width / 2 - clearance) outward
    (drawn to the tire's outer side plus the clearance)."""
    t = w.tire_size
    c = v.body.wheelhouse_clearance_m
    r = t.outer_radius_m + c
    path = QPainterPath()
    if view == "side":
        zc = t.outer_radius_m
        n = 40
        ang = np.linspace(0.0, math.pi, n)
        xs = np.concatenate([[w.x_m + r, w.x_m + r], w.x_m + r * np.cos(ang), [w.x_m - r]])
        zs = np.concatenate([[0.0, zc], zc + r * np.sin(ang), [0.0]])
        path.addPolygon(ax.poly(xs, zs))
    else:
        sg = 1.0 if w.y_m >= 0 else -1.0
        inner = abs(w.y_m) - t.section_width_m / 2 - c
        outer = abs(w.y_m) + t.section_width_m / 2 + c
        path.addPolygon(ax.poly([w.x_m - r, w.x_m + r, w.x_m + r, w.x_m - r],
                                [sg * inner, sg * inner, sg * outer, sg * outer]))
    path.closeSubpath()
    return path


def draw_wheelhouses(ax: Axes, v: Vehicle, view: str, light: bool = False):
    """The wheelhouses (hatched, dashed outline): the engine's own shape (core.geometry), a wheel's sensor starts there."""
    p, s = ax.p, ax.s
    p.save()
    p.setClipRect(ax.frame)
    col = QColor(WHEELHOUSE)
    col.setAlpha(110 if light else 170)
    p.setPen(pen(col, 0.5, s, Qt.PenStyle.DashLine))
    br = QBrush(col, Qt.BrushStyle.BDiagPattern)
    p.setBrush(br)
    done = set()
    for w in v.wheels:
        key = (round(w.x_m, 3), round(w.y_m, 3) if view == "top" else 0.0)
        if key in done:
            continue
        done.add(key)
        p.drawPath(wheelhouse_path(ax, v, w, view))
    p.restore()


def draw_wheel_labels(ax: Axes, v: Vehicle):
    p, s = ax.p, ax.s
    p.save()
    p.setFont(font(6, s=s))
    p.setPen(QColor(BODY))
    fm = QFontMetricsF(p.font())
    for w in v.wheels:
        t = w.tire_size
        dy = t.section_width_m / 2 + 0.03
        q = ax.map(w.x_m, w.y_m + (dy if w.y_m >= 0 else -dy))
        base = q.y() - 1.5 * s if w.y_m >= 0 else q.y() + fm.ascent() + 1 * s
        if abs(abs(w.y_m) - max(abs(x.y_m) for x in v.wheels if abs(x.x_m - w.x_m) < 0.05)) > 1e-6:
            base = q.y() + fm.ascent() / 2 if w.y_m >= 0 else q.y() - 1 * s  # inner dual wheel: inside
            q = ax.map(w.x_m + t.outer_radius_m + 0.02, w.y_m)
            p.drawText(QPointF(q.x(), q.y() + fm.ascent() / 2), w.id)
            continue
        p.drawText(QPointF(q.x() - fm.horizontalAdvance(w.id) / 2, base), w.id)
    p.restore()


def _label_boxes(marks: list[QPointF], sizes: list[tuple[float, float]], r: float, s: float, frame: QRectF,
                 fixed: list[QRectF]) -> list[tuple[QRectF, bool]]:
    """Places for the labels of markers at ``marks``: boxes that overlap no other label, no marker and stay in the
    frame. Next to the marker first (eight places), then further out with a leader line (rings of 16 directions
    at growing distance). Returns (box, needs a leader line) per label."""
    taken = list(fixed)
    out = []
    for q, (w, h) in zip(marks, sizes):
        near = [QRectF(q.x() + r + 1.5 * s, q.y() - h / 2, w, h), QRectF(q.x() - w / 2, q.y() - r - h - 1 * s, w, h),
                QRectF(q.x() - w / 2, q.y() + r + 1 * s, w, h), QRectF(q.x() - r - 1.5 * s - w, q.y() - h / 2, w, h),
                QRectF(q.x() + r, q.y() - r - h, w, h), QRectF(q.x() + r, q.y() + r, w, h),
                QRectF(q.x() - r - w, q.y() - r - h, w, h), QRectF(q.x() - r - w, q.y() + r, w, h)]
        cands = [(c, False) for c in near]
        for ring in (1, 2, 3, 4, 6):
            dist = r + ring * (h + 3 * s)
            for k in range(16):
                ang = 2 * math.pi * k / 16
                cx, cy = q.x() + dist * math.cos(ang), q.y() - dist * math.sin(ang)
                cands.append((QRectF(cx - w / 2, cy - h / 2, w, h), True))
        gap = 1.2 * s  # labels never touch: "2" next to "3" would read "23"
        box, lead = next(((c, ld) for c, ld in cands if frame.contains(c) and not any(
            c.adjusted(-gap, -0.2 * gap, gap, 0.2 * gap).intersects(o) for o in taken)), cands[0])
        taken.append(box)
        out.append((box, lead))
    return out


def draw_spots(ax: Axes, pts, labels, highlight: int = -1, colour=None, size_pt: float = 3.2,
               label_pt: float = 6.5, halo: bool = True, hollow=None):
    """Spot markers at (u, v) data points with text labels that never overlap (a leader line where a label had to
    move away from its marker); ``highlight`` gets a larger ring; ``hollow`` (per spot) draws an open marker (a spot
    projected onto the view from another plane)."""
    p, s = ax.p, ax.s
    colour = QColor(200, 20, 20) if colour is None else colour
    p.save()
    p.setClipRect(ax.frame.adjusted(-2 * s, -2 * s, 2 * s, 2 * s))
    p.setFont(font(label_pt, True, s))
    fm = QFontMetricsF(p.font())
    r = size_pt * s
    marks = [ax.map(float(u), float(v)) for u, v in pts]
    hollow = [False] * len(marks) if hollow is None else list(hollow)
    for k, q in enumerate(marks):
        if hollow[k]:
            p.setPen(pen(colour, 1.0, s))
            p.setBrush(QBrush(QColor(255, 255, 255, 200)))
        else:
            p.setPen(pen(QColor(255, 255, 255), 0.8, s))
            p.setBrush(QBrush(colour))
        p.drawEllipse(q, r, r)
        if k == highlight:
            p.setBrush(Qt.BrushStyle.NoBrush)
            p.setPen(pen(QColor(0, 0, 0), 1.2, s))
            p.drawEllipse(q, 2.3 * r, 2.3 * r)
    idx = [k for k, lab in enumerate(labels) if lab]
    dots = [QRectF(q.x() - r, q.y() - r, 2 * r, 2 * r) for q in marks]
    if highlight >= 0 and highlight < len(marks):
        q = marks[highlight]
        dots.append(QRectF(q.x() - 2.3 * r, q.y() - 2.3 * r, 4.6 * r, 4.6 * r))
    frame = ax.frame.adjusted(1 * s, 1 * s, -1 * s, -1 * s)
    boxes = _label_boxes([marks[k] for k in idx], [(fm.horizontalAdvance(labels[k]), fm.height()) for k in idx],
                         r, s, frame, dots)
    for k, (box, lead) in zip(idx, boxes):
        q = marks[k]
        if lead:
            p.setPen(pen(QColor(60, 60, 60), 0.5, s))
            c = box.center()
            d = math.hypot(c.x() - q.x(), c.y() - q.y()) or 1.0
            p.drawLine(QPointF(q.x() + (c.x() - q.x()) * r / d, q.y() + (c.y() - q.y()) * r / d),
                       QPointF(c.x() - (c.x() - q.x()) * 0.5 * box.height() / d,
                               c.y() - (c.y() - q.y()) * 0.5 * box.height() / d))
        if halo:
            p.setPen(Qt.PenStyle.NoPen)
            p.setBrush(QBrush(QColor(255, 255, 255, 190)))
            p.drawRect(box.adjusted(-0.5 * s, 0, 0.5 * s, 0))
        p.setPen(QColor(0, 0, 0))
        p.drawText(QPointF(box.left(), box.top() + fm.ascent()), labels[k])
    p.restore()


def _views_scale(v: Vehicle, width: float, s: float, max_height: float | None) -> float:
    """Device px per m of the stacked top and side views: fill the width, but keep within max_height."""
    (x0, x1), (y0, y1), (z0, z1) = body_extent(v)
    k = (width - 46 * s) / (x1 - x0)
    if max_height is not None:
        k = min(k, (max_height - 2 * 42 * s - 4 * s) / ((y1 - y0) + (z1 - z0)))
    return k


def draw_body_views(p: QPainter, rect: QRectF, s: float, v: Vehicle, positions, labels, highlight: int = -1,
                    max_height: float | None = None):
    """Top view above side view, same x scale, with zones, wheels, regions and the spots. Returns the height used."""
    (x0, x1), (y0, y1), (z0, z1) = body_extent(v)
    left, bottom, top_pt = 40.0, 28.0, 14.0
    k = _views_scale(v, rect.width(), s, max_height)
    fw = k * (x1 - x0) + (left + 6) * s
    h_top = (y1 - y0) * k + (top_pt + bottom) * s
    h_side = (z1 - z0) * k + (top_pt + bottom) * s
    ra = QRectF(rect.left(), rect.top(), fw, h_top)
    at = Axes(p, ra, s, (x0, x1), (y0, y1), "x (m, forward)", "y (m, left)", "Top view", equal=True, left_pt=left,
              bottom_pt=bottom)
    at.draw_frame()
    draw_body(at, v, "top", regions=True)
    draw_wheel_labels(at, v)
    pos = np.asarray(positions, float).reshape(-1, 3)
    draw_spots(at, pos[:, [0, 1]], labels, highlight)
    rb = QRectF(rect.left(), rect.top() + h_top + 4 * s, fw, h_side)
    asd = Axes(p, rb, s, (x0, x1), (z0, z1), "x (m, forward)", "z (m, up)", "Side view", equal=True, left_pt=left,
               bottom_pt=bottom)
    asd.draw_frame()
    draw_body(asd, v, "side", regions=True)
    draw_spots(asd, pos[:, [0, 2]], labels, highlight)
    return h_top + h_side + 4 * s


def body_views_height(v: Vehicle, width: float, s: float, max_height: float | None = None) -> float:
    _, (y0, y1), (z0, z1) = body_extent(v)
    k = _views_scale(v, width, s, max_height)
    return (y1 - y0 + z1 - z0) * k + 2 * 42 * s + 4 * s


def draw_top_thumbnail(p: QPainter, rect: QRectF, s: float, v: Vehicle, positions, labels, highlight: int = -1,
                       title: str = "", span_m: tuple[float, float] | None = None):
    """A small top view with the spots (comparison window and comparison PDF).

    ``span_m`` = (length, width) in m shown, centred on the body: give the same span to every
    thumbnail of a comparison so all bodies are drawn to one scale. Returns the Axes."""
    (x0, x1), (y0, y1), _ = body_extent(v, 0.15)
    if span_m is not None:
        cx, cy = 0.5 * (x0 + x1), 0.5 * (y0 + y1)
        x0, x1 = cx - span_m[0] / 2, cx + span_m[0] / 2
        y0, y1 = cy - span_m[1] / 2, cy + span_m[1] / 2
    top_pt = 12.0 if title else 4.0
    ax = Axes(p, rect, s, (x0, x1), (y0, y1), "", "", "", equal=True, left_pt=4, bottom_pt=4, right_pt=4,
              top_pt=top_pt)
    dx = (rect.width() - 8 * s - ax.frame.width()) / 2  # centre the equal-aspect frame
    ax.frame.translate(max(0.0, dx), 0)
    draw_body(ax, v, "top", regions=True, light=True)
    pos = np.asarray(positions, float).reshape(-1, 3)
    draw_spots(ax, pos[:, [0, 1]], labels, highlight, size_pt=2.6, label_pt=6)
    if title:
        p.save()
        p.setFont(font(7.5, True, s))
        p.setPen(QColor(BODY))
        fm = QFontMetricsF(p.font())
        text = fm.elidedText(title, Qt.TextElideMode.ElideRight, rect.width() - 8 * s)
        p.drawText(QPointF(rect.left() + 4 * s, rect.top() + fm.ascent()), text)
        p.restore()
    return ax


def thumbnail_span(vehicles) -> tuple[float, float]:
    """The (length, width) span, m, that holds every body's top view (one scale for all thumbnails)."""
    ext = [body_extent(v, 0.15) for v in vehicles]
    return (max(e[0][1] - e[0][0] for e in ext), max(e[1][1] - e[1][0] for e in ext))


# ----- heatmaps -------------------------------------------------------------------------------
def margin_limits_db(hm: Heatmap | None = None) -> tuple[float, float]:
    """Colour range (low, high) in dB: the one fixed scale, symmetric about 0 dB (app.margin_scale), whatever
    the map holds, so heatmaps of different bodies compare by colour."""
    return -MARGIN_RANGE_DB, MARGIN_RANGE_DB


def margin_to_unit(m, lo: float, hi: float) -> np.ndarray:
    """Map margins (dB) linearly to 0..1 of the diverging map, 0 dB at its neutral centre (0.5) when the range is
    symmetric; beyond the range the end colours."""
    m = np.asarray(m, float)
    return np.clip((m - lo) / (hi - lo), 0.0, 1.0)


def margin_image(hm: Heatmap, lo: float, hi: float, upscale: int = 6) -> QImage:
    """RGBA image of the margins (row 0 = highest v), transparent outside the region."""
    cmap = pg.colormap.get(MARGIN_MAP)
    m = hm.margin_db
    t = margin_to_unit(np.nan_to_num(m, nan=0.0), lo, hi)
    rgba = cmap.map(t.ravel(), mode="byte").reshape(*m.shape, 4).astype(np.uint8)
    rgba[..., 3] = np.where(np.isfinite(m), 255, 0)
    rgba = np.ascontiguousarray(rgba[::-1])
    if upscale > 1:
        rgba = np.ascontiguousarray(np.repeat(np.repeat(rgba, upscale, axis=0), upscale, axis=1))
    h, w = rgba.shape[:2]
    img = QImage(rgba.data, w, h, 4 * w, QImage.Format.Format_RGBA8888)
    return img.copy()  # own the pixels


def zero_contour(hm: Heatmap) -> list[np.ndarray]:
    """The 0 dB margin contour as polylines in (u, v) metres, only between computed cells
    (app.heatmap_contour, shared with the desktop program)."""
    from app.heatmap_contour import zero_contour as contour

    return contour(hm)


def projected_spots(hm: Heatmap, positions) -> np.ndarray:
    """(S,) True for spots that do not lie in the heatmap's plane (more than half a cell from it): drawn hollow,
    projected onto the map; their margins are the ranking's, not the map's at that place."""
    pos = np.asarray(positions, float).reshape(-1, 3)
    return np.abs(pos[:, 2 if hm.view == "top" else 1] - hm.fixed_m) > 0.5 * hm.step_m


def draw_heatmap(p: QPainter, rect: QRectF, s: float, v: Vehicle, hm: Heatmap, region: Region, positions, labels,
                 wheel_ids) -> None:
    """Margin heatmap of one region over the body view, with the 0 dB contour, spots (hollow: projected from
    another plane) and a colour bar on the fixed symmetric scale (app.margin_scale)."""
    (bx0, bx1), (by0, by1), (bz0, bz1) = body_extent(v, 0.15)
    cbar_pt = 52.0
    lo, hi = margin_limits_db(hm)
    view = hm.view
    ylim = (by0, by1) if view == "top" else (bz0, bz1)
    fixed = f"z = {hm.fixed_m:.2f} m" if view == "top" else f"y = {hm.fixed_m:.2f} m"
    title = f"'{region.name}' ({view} view at {fixed}, cells of {hm.step_m * 1000:.0f} mm)"
    ax = Axes(p, rect, s, (bx0, bx1), ylim, "x (m, forward)", "y (m, left)" if view == "top" else "z (m, up)", title,
              equal=True, right_pt=cbar_pt)
    ax.draw_frame()
    draw_body(ax, v, view, zones=False, light=True)
    du = hm.u_m[1] - hm.u_m[0] if len(hm.u_m) > 1 else hm.step_m
    dv = hm.v_m[1] - hm.v_m[0] if len(hm.v_m) > 1 else hm.step_m
    tl = ax.map(hm.u_m[0] - du / 2, hm.v_m[-1] + dv / 2)
    br = ax.map(hm.u_m[-1] + du / 2, hm.v_m[0] - dv / 2)
    p.save()
    p.setRenderHint(QPainter.RenderHint.SmoothPixmapTransform, False)
    p.drawImage(QRectF(tl, br), margin_image(hm, lo, hi))
    p.restore()
    draw_body(ax, v, view, zones=False, light=False, regions=True)
    # 0 dB contour
    p.save()
    p.setClipRect(ax.frame)
    p.setPen(pen(QColor(0, 0, 0), 1.3, s))
    p.setBrush(Qt.BrushStyle.NoBrush)
    for ln in zero_contour(hm):
        p.drawPolyline(ax.poly(ln[:, 0], ln[:, 1]))
    p.restore()
    pos = np.asarray(positions, float).reshape(-1, 3)
    off = projected_spots(hm, pos)
    draw_spots(ax, pos[:, [0, 1]] if view == "top" else pos[:, [0, 2]], labels, size_pt=2.6, label_pt=6, hollow=off)
    # colour bar
    f = ax.frame
    bar = QRectF(f.right() + 10 * s, f.top(), 9 * s, f.height())
    n = 96
    cmap = pg.colormap.get(MARGIN_MAP)
    for k in range(n):
        c = cmap.map(np.array([(k + 0.5) / n]), mode="byte")[0]
        seg = QRectF(bar.left(), bar.bottom() - (k + 1) * bar.height() / n, bar.width(), bar.height() / n + 0.5)
        p.fillRect(seg, QColor(int(c[0]), int(c[1]), int(c[2])))
    p.setPen(pen(BODY, 0.6, s))
    p.setBrush(Qt.BrushStyle.NoBrush)
    p.drawRect(bar)
    p.setFont(font(6.5, s=s))
    fm = QFontMetricsF(p.font())
    ticks = nice_ticks(lo, hi, 4)
    for t in ticks:
        yq = bar.bottom() - float(margin_to_unit(t, lo, hi)) * bar.height()
        p.setPen(pen(BODY, 0.5, s))
        p.drawLine(QPointF(bar.right(), yq), QPointF(bar.right() + 3 * s, yq))
        if abs(t) < 1e-9:
            p.setPen(pen(QColor(0, 0, 0), 1.3, s))
            p.drawLine(QPointF(bar.left() - 2 * s, yq), QPointF(bar.right() + 3 * s, yq))
        p.setPen(QColor(BODY))
        txt = ("+" if t > 0 else "") + _fmt(t) if t else "0"
        if abs(t - hi) < 1e-9:
            txt = "\u2265" + txt  # beyond the range: the end colour
        elif abs(t - lo) < 1e-9:
            txt = "\u2264" + txt
        p.drawText(QPointF(bar.right() + 4 * s, yq + fm.ascent() / 2 - 1 * s), txt)
    p.save()
    p.translate(bar.right() + 4 * s + fm.horizontalAdvance("\u2265+00") + 3 * s + fm.ascent(),
                bar.center().y() + fm.horizontalAdvance("margin (dB)") / 2)
    p.rotate(-90)
    p.drawText(QPointF(0, 0), "margin (dB)")
    p.restore()


def heatmap_height(v: Vehicle, hm: Heatmap, width: float, s: float) -> float:
    (bx0, bx1), (by0, by1), (bz0, bz1) = body_extent(v, 0.15)
    yr = (by1 - by0) if hm.view == "top" else (bz1 - bz0)
    k = (width - (38 + 52) * s) / (bx1 - bx0)
    return yr * k + (14 + 26) * s


# ----- per-spot figures ------------------------------------------------------------------------
def draw_legend(p: QPainter | None, s: float, x: float, y: float, items, max_width: float | None = None) -> float:
    """A wrapping legend of (label, colour, style) entries from (x, y); style None draws a ring marker.
    Returns its height; with ``p`` None it only measures."""
    f = font(6.5, s=s)
    fm = QFontMetricsF(f)
    if p is not None:
        p.save()
        p.setFont(f)
    cx, cy = x, y
    for label, colour, style in items:
        w = 14 * s + fm.horizontalAdvance(label) + 8 * s
        if max_width is not None and cx + w > x + max_width and cx > x:
            cx, cy = x, cy + fm.height() + 1 * s
        if p is not None:
            if style is None:  # a ring marker
                p.setPen(pen(colour, 1.0, s))
                p.setBrush(Qt.BrushStyle.NoBrush)
                p.drawEllipse(QPointF(cx + 5.5 * s, cy + fm.height() / 2), 3.2 * s, 3.2 * s)
            else:
                p.setPen(pen(colour, 1.4, s, style))
                p.drawLine(QPointF(cx, cy + fm.height() / 2), QPointF(cx + 11 * s, cy + fm.height() / 2))
            p.setPen(QColor(BODY))
            p.drawText(QPointF(cx + 14 * s, cy + fm.ascent()), label)
        cx += w
    if p is not None:
        p.restore()
    return cy - y + fm.height()


def same_as(curves, tol: float = 0.05) -> list[int]:
    """For each curve, the index of an earlier curve it coincides with (within ``tol``), or -1."""
    c = np.atleast_2d(curves)
    out = []
    for w in range(len(c)):
        out.append(next((k for k in range(w) if out[k] < 0 and np.max(np.abs(c[w] - c[k])) <= tol), -1))
    return out


def draw_levels(p: QPainter, rect: QRectF, s: float, scores, i: int) -> None:
    """Level vs wheel angle for every wheel of spot i, with the sensitivity and required-margin lines."""
    lv = scores.levels_dbm[i]
    ang = np.append(scores.angles_deg, 360.0)
    sens, req = scores.sensitivity_dbm, scores.required_margin_db
    lo = min(lv.min(), sens) - 3
    hi = max(lv.max(), sens + req) + 3
    lo, hi = 5 * math.floor(lo / 5), 5 * math.ceil(hi / 5)
    twins = same_as(lv)
    items = [(wid + (f" (= {scores.wheel_ids[twins[w]]})" if twins[w] >= 0 else ""), wheel_colour(w),
              Qt.PenStyle.DashLine if twins[w] >= 0 else Qt.PenStyle.SolidLine) for w, wid in enumerate(scores.wheel_ids)]
    items += [(f"sensitivity {sens:.0f} dBm", QColor(0, 0, 0), Qt.PenStyle.DashLine),
              (f"sensitivity + required margin ({req:g} dB)", QColor(0, 0, 0), Qt.PenStyle.DotLine),
              ("worst case (over the continuous turn)", QColor(0, 0, 0), None)]
    leg_w = rect.width() - 44 * s
    legend_h = draw_legend(None, s, 0, 0, items, leg_w) + 2 * s
    body = QRectF(rect.left(), rect.top(), rect.width(), rect.height() - legend_h)
    ax = Axes(p, body, s, (0, 360), (lo, hi), "wheel angle (deg; 0 = sensor at the top)", "received level (dBm)",
              "Level over one wheel turn", bottom_pt=28)
    ax.draw_frame(xticks=np.arange(0, 361, 45))
    p.save()
    p.setClipRect(ax.frame)
    p.setPen(pen(QColor(0, 0, 0), 1.0, s, Qt.PenStyle.DashLine))
    p.drawLine(ax.map(0, sens), ax.map(360, sens))
    p.setPen(pen(QColor(0, 0, 0), 0.8, s, Qt.PenStyle.DotLine))
    p.drawLine(ax.map(0, sens + req), ax.map(360, sens + req))
    for w in range(lv.shape[0]):
        dashed = twins[w] >= 0
        p.setPen(pen(wheel_colour(w), 1.2 if not dashed else 1.6, s,
                     Qt.PenStyle.DashLine if dashed else Qt.PenStyle.SolidLine))
        p.drawPolyline(ax.poly(ang, np.append(lv[w], lv[w, 0])))
    # the worst case of the worst wheel
    ww = int(scores.worst_wheel[i])
    q = ax.map(float(scores.worst_angle_deg[i, ww]), float(scores.worst_dbm[i, ww]))
    p.setPen(pen(QColor(0, 0, 0), 1.0, s))
    p.setBrush(Qt.BrushStyle.NoBrush)
    p.drawEllipse(q, 3.5 * s, 3.5 * s)
    p.restore()
    draw_legend(p, s, ax.frame.left(), rect.bottom() - legend_h + 2 * s, items, leg_w)


def twin_groups(curves, ids, tol: float = 0.05) -> list[tuple[int, str]]:
    """Curves that coincide (within ``tol``) drawn once: (index of the first, "FL = FR") per group, in order."""
    twins = same_as(curves, tol)
    groups: dict[int, list[str]] = {}
    for w, t in enumerate(twins):
        groups.setdefault(w if t < 0 else t, []).append(ids[w])
    return [(k, " = ".join(names)) for k, names in groups.items()]


def draw_burst(p: QPainter, rect: QRectF, s: float, burst, kmh: float = 3.6, required_margin_db: float | None = None) -> None:
    """Burst success vs speed per wheel (wheels with the same curve drawn once, named together); resonant speeds as
    grey dashed lines. When every burst gets through at every speed, the success is 100 % everywhere and says
    nothing: the figure shows the burst margin instead (core.burst: the extra loss the bursts still survive), with
    the required margin, so the speeds with margin to spare stand out."""
    v = burst.speeds_mps * kmh
    all_pass = burst.margin_db is not None and float(burst.success.min()) >= 1.0 - 1e-12
    if all_pass:
        data = burst.margin_db
        parked = burst.parked_margin_db
        ylabel, title = "burst margin (dB over sensitivity)", "Burst margin vs speed: every burst gets through"
    else:
        data = 100 * burst.success
        parked = 100 * burst.parked
        ylabel, title = "burst success (%)", "Burst success vs speed"
    groups = twin_groups(data, burst.wheel_ids)
    unit = "dB" if all_pass else "%"
    # a group drawn after another lies on top of it: dashed, so the one below shows through (as the legend says)
    styles = [Qt.PenStyle.SolidLine if k == 0 else Qt.PenStyle.DashLine for k in range(len(groups))]
    items = [(f"{names} (parked {parked[w]:.0f} {unit})", wheel_colour(w), st) for (w, names), st in zip(groups, styles)]
    items.append(("resonant speed (frames repeat)", QColor(120, 120, 120), Qt.PenStyle.DashLine))
    if all_pass and required_margin_db is not None:
        items.append((f"required margin {required_margin_db:g} dB", QColor(0, 0, 0), Qt.PenStyle.DotLine))
    legend_h = draw_legend(None, s, 0, 0, items, rect.width() - 8 * s) + 3 * s
    body = QRectF(rect.left(), rect.top(), rect.width(), rect.height() - legend_h)
    if all_pass:
        lo = min(0.0, float(np.min(data)), required_margin_db or 0.0)
        hi = max(float(np.max(data)), required_margin_db or 0.0)
        lo, hi = 5 * math.floor(lo / 5), 5 * math.ceil(hi / 5 + 0.2)
    else:
        lo, hi = -2.0, 105.0
    ax = Axes(p, body, s, (v.min(), v.max() if v.max() > v.min() else v.min() + 1), (lo, hi), "vehicle speed (km/h)",
              ylabel, title, left_pt=34)
    ax.draw_frame(yticks=None if all_pass else np.arange(0, 101, 20))
    p.save()
    p.setClipRect(ax.frame)
    for r in sorted({round(float(x), 6) for rs in burst.resonant_mps for x in rs}):
        p.setPen(pen(QColor(120, 120, 120), 0.7, s, Qt.PenStyle.DashLine))
        p.drawLine(ax.map(r * kmh, hi), ax.map(r * kmh, lo))
    if all_pass and required_margin_db is not None:
        p.setPen(pen(QColor(0, 0, 0), 0.8, s, Qt.PenStyle.DotLine))
        p.drawLine(ax.map(v.min(), required_margin_db), ax.map(v.max(), required_margin_db))
    for (w, _names), st in zip(groups, styles):
        p.setPen(pen(wheel_colour(w), 1.5 if st == Qt.PenStyle.SolidLine else 1.2, s, st))
        p.drawPolyline(ax.poly(v, data[w]))
    p.restore()
    draw_legend(p, s, rect.left() + 4 * s, rect.bottom() - legend_h + 3 * s, items, rect.width() - 8 * s)


def draw_distinctness(p: QPainter, rect: QRectF, s: float, levels, dist) -> None:
    """Level distribution per wheel over a turn: range, 25-75 % box and median; the closest pair marked."""
    lv = np.atleast_2d(levels)
    W = lv.shape[0]
    lo, hi = 5 * math.floor((lv.min() - 2) / 5), 5 * math.ceil((lv.max() + 2) / 5)
    ax = Axes(p, rect, s, (lo, hi), (-0.5, W - 0.5), "received level over the turn (dBm)", "",
              "Wheel distinctness", left_pt=30)
    ax.draw_frame(yticks=[], grid=True)
    p.save()
    p.setFont(font(7, s=s))
    fm = QFontMetricsF(p.font())
    pair = set(dist.closest_pair) if W > 1 else set()
    for w in range(W):
        yy = W - 1 - w
        q1, med, q3 = np.percentile(lv[w], [25, 50, 75])
        c = wheel_colour(w)
        p.setPen(pen(c, 1.0, s))
        p.drawLine(ax.map(lv[w].min(), yy), ax.map(lv[w].max(), yy))
        a, b = ax.map(q1, yy + 0.25), ax.map(q3, yy - 0.25)
        p.setBrush(QBrush(QColor(c.red(), c.green(), c.blue(), 90)))
        p.drawRect(QRectF(a, b))
        p.setPen(pen(QColor(0, 0, 0), 1.4, s))
        p.drawLine(ax.map(med, yy + 0.3), ax.map(med, yy - 0.3))
        p.setPen(QColor(0, 0, 0) if w in pair else QColor(BODY))
        p.setFont(font(7, w in pair, s))
        lab = dist.wheel_ids[w]
        q = ax.map(lo, yy)
        p.drawText(QPointF(q.x() - 4 * s - fm.horizontalAdvance(lab), q.y() + fm.ascent() / 2 - 1 * s), lab)
    p.restore()


def draw_square(ax: Axes, xy, colour=None, size_pt: float = 3.2) -> None:
    """A hollow square marker at data point xy (the searched best position)."""
    p, s = ax.p, ax.s
    q = ax.map(float(xy[0]), float(xy[1]))
    r = size_pt * s
    p.save()
    p.setPen(pen(QColor(20, 20, 20) if colour is None else colour, 1.2, s))
    p.setBrush(Qt.BrushStyle.NoBrush)
    p.drawRect(QRectF(q.x() - r, q.y() - r, 2 * r, 2 * r))
    p.restore()


# ----- tornado ---------------------------------------------------------------------------------
TORNADO_LOW = QColor(70, 120, 190)
TORNADO_HIGH = QColor(215, 120, 40)


def tornado_height(ss, s: float) -> float:
    """Height of :func:`draw_tornado` for a spot's sensitivity, device px."""
    return (len(ss.bars) * 15.0 + 70.0) * s


def tornado_range_text(b) -> str:
    """The range beside a tornado bar, short: a unit both ends share written once ("433.052 .. 434.788 MHz")."""
    if b.effect:
        return "no effect here"
    if b.key == "axis_tilt":
        return f"{b.low_text.split(',')[0]}: worst / best"
    lo, hi = b.low_text.rsplit(" ", 1), b.high_text.rsplit(" ", 1)
    if len(lo) == 2 and len(hi) == 2 and lo[1] == hi[1] and not lo[1][:1].isdigit():
        return f"{lo[0]} .. {hi[0]} {hi[1]}"
    return f"{b.low_text} .. {b.high_text}"


def draw_tornado(p: QPainter, rect: QRectF, s: float, ss, title: str | None = None) -> None:
    """The tornado of a spot (core.sensitivity.SpotSensitivity): per input a bar from its margin with the input at
    the low end of its range (blue) to the margin at the high end (orange), most influential on top; the nominal
    margin as a black line, the requirement (0 dB) as a red line; inputs without effect in this setup greyed."""
    bars = ss.bars
    vals = [ss.margin_db, 0.0] + [x for b in bars for x in (b.margin_low_db, b.margin_high_db)]
    lo, hi = min(vals), max(vals)
    pad = max(1.0, 0.06 * (hi - lo))
    lo, hi = lo - pad, hi + pad
    p.save()
    p.setFont(font(6.5, s=s))
    fm = QFontMetricsF(p.font())
    label_w = max(fm.horizontalAdvance(b.label) for b in bars) + 6 * s
    range_w = max(fm.horizontalAdvance(tornado_range_text(b)) for b in bars) + 8 * s
    range_w = min(range_w, rect.width() * 0.32)
    p.restore()
    items = [("input at the low end of its range", TORNADO_LOW, Qt.PenStyle.SolidLine),
             ("at the high end", TORNADO_HIGH, Qt.PenStyle.SolidLine),
             (f"nominal margin {ss.margin_db:+.1f} dB", QColor(0, 0, 0), Qt.PenStyle.SolidLine),
             ("requirement (0 dB)", QColor(190, 0, 0), Qt.PenStyle.DashLine)]
    legend_h = draw_legend(None, s, 0, 0, items, rect.width() - 8 * s) + 3 * s
    body = QRectF(rect.left(), rect.top(), rect.width() - range_w, rect.height() - legend_h)
    n = len(bars)
    title = title or f"What the margin depends on: P(pass) {100 * ss.p_pass:.0f} % over {ss.draws} draws"
    ax = Axes(p, body, s, (lo, hi), (-0.5, n - 0.5), "spot margin (dB)", "", title, left_pt=label_w / s)
    ax.draw_frame(yticks=[], grid=True)
    p.save()
    p.setFont(font(6.5, s=s))
    for k, b in enumerate(bars):
        yy = n - 1 - k
        grey = bool(b.effect) or b.swing_db == 0.0
        for val, col in ((b.margin_low_db, TORNADO_LOW), (b.margin_high_db, TORNADO_HIGH)):
            a, c = ax.map(ss.margin_db, yy + 0.32), ax.map(val, yy - 0.32)
            if abs(val - ss.margin_db) > 1e-9:
                p.setPen(pen(col.darker(130), 0.4, s))
                p.setBrush(QBrush(col))
                p.drawRect(QRectF(a, c).normalized())
        q = ax.map(lo, yy)
        p.setPen(QColor(150, 150, 150) if grey else QColor(BODY))
        p.drawText(QPointF(q.x() - 4 * s - fm.horizontalAdvance(b.label), q.y() + fm.ascent() / 2 - 1 * s), b.label)
        txt = fm.elidedText(tornado_range_text(b), Qt.TextElideMode.ElideRight, range_w - 6 * s)
        q2 = ax.map(hi, yy)
        p.drawText(QPointF(q2.x() + 5 * s, q2.y() + fm.ascent() / 2 - 1 * s), txt)
    p.setClipRect(ax.frame)
    p.setPen(pen(QColor(0, 0, 0), 1.0, s))
    p.drawLine(ax.map(ss.margin_db, -0.5), ax.map(ss.margin_db, n - 0.5))
    p.setPen(pen(QColor(190, 0, 0), 1.0, s, Qt.PenStyle.DashLine))
    p.drawLine(ax.map(0.0, -0.5), ax.map(0.0, n - 0.5))
    p.restore()
    draw_legend(p, s, ax.frame.left(), rect.bottom() - legend_h + 3 * s, items, rect.width() - 8 * s)

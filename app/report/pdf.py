"""The placement report: a PDF drawn with Qt (QPdfWriter, QTextDocument, QPainter), no browser.

``write_report(path_or_vehicle, out_pdf, ...)`` runs the engine (app.report.data), lays the report
out on A4 pages and writes it atomically: the PDF goes to a temporary file beside the target and is
renamed only when complete, so a bad vehicle file (VehicleFileError with its located message) or
any failure leaves no partial PDF. ``--csv`` / ``--json`` exports with the same numbers go beside it.

Text is drawn as text (selectable); figures are vector drawings (app.report.figures) except the
heatmap cells, which are an image. Pages are numbered "page i of N".
"""

from __future__ import annotations

import html
import os
import shlex
from collections.abc import Callable
from pathlib import Path

import numpy as np
from PySide6.QtCore import QMarginsF, QPointF, QRectF
from PySide6.QtGui import (
    QAbstractTextDocumentLayout,
    QColor,
    QFont,
    QFontMetricsF,
    QPageLayout,
    QPageSize,
    QPainter,
    QPdfWriter,
    QTextDocument,
)

from app.report import figures as fig
from app.report.data import (
    CAUTION,
    MPS_TO_KMH,
    ReportData,
    build_report_data,
    excluded_text,
    report_csv,
    report_json_text,
    resonant_kmh,
)
from core.files import OutputPathError, atomic_path, atomic_write_text, check_outputs

DPI = 300
S = DPI / 72.0  # device pixels per point
PAGE_W_PT, PAGE_H_PT = 595.0, 842.0  # A4
MARGIN_PT = 46.0
FOOTER_PT = 30.0
HEADER_PT = 18.0


def _ensure_app():
    """QTextDocument and fonts need a Qt application object (a GUI one for fonts)."""
    from PySide6.QtWidgets import QApplication

    if QApplication.instance() is None:
        os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
        _ensure_app.app = QApplication([])  # kept alive for the process
    return QApplication.instance()


CSS = """
body { font-family: 'DejaVu Sans'; font-size: 8.5pt; color: #202020; }
h1 { font-size: 16pt; margin: 0; }
h2 { font-size: 12pt; margin-top: 0; margin-bottom: 4px; }
h3 { font-size: 10pt; margin-top: 0; margin-bottom: 3px; }
p { margin-top: 0; margin-bottom: 5px; }
table { border-collapse: collapse; }
th { background-color: #e8e8e8; font-weight: bold; text-align: left; }
td, th { border: 0.5px solid #b0b0b0; padding: 2px; vertical-align: top; }
td.n, th.n { text-align: right; }
tr.hl td { background-color: #fff2b3; }
.small { font-size: 7pt; }
.mono { font-family: 'DejaVu Sans Mono'; font-size: 7.5pt; }
.caution { background-color: #fdf0e6; }
"""


class Flow:
    """Blocks laid out top to bottom on pages; each page is a list of (y, height, draw(painter, rect))."""

    def __init__(self, device):
        self.device = device
        self.left = MARGIN_PT * S
        self.width = (PAGE_W_PT - 2 * MARGIN_PT) * S
        self.top = (MARGIN_PT + HEADER_PT) * S
        self.bottom = (PAGE_H_PT - MARGIN_PT - FOOTER_PT + 10) * S
        self.pages: list[list[tuple[float, float, Callable]]] = [[]]
        self.y = self.top

    @property
    def room(self) -> float:
        return self.bottom - self.y

    def new_page(self) -> None:
        if self.pages[-1]:
            self.pages.append([])
        self.y = self.top

    def add(self, height: float, draw: Callable, gap_pt: float = 6.0) -> None:
        if height > self.room and self.y > self.top:
            self.new_page()
        self.pages[-1].append((self.y, height, draw))
        self.y += height + gap_pt * S

    def space(self, pt: float) -> None:
        self.y += pt * S

    # ----- text --------------------------------------------------------------------------------
    def doc(self, body_html: str, width: float | None = None) -> QTextDocument:
        d = QTextDocument()
        d.documentLayout().setPaintDevice(self.device)
        d.setDefaultFont(fig.no_ligatures(QFont("DejaVu Sans", 9)))
        d.setDefaultStyleSheet(CSS)
        d.setDocumentMargin(0)
        d.setHtml(f"<html><body>{body_html}</body></html>")
        d.setTextWidth(width or self.width)
        return d

    def html(self, body_html: str, gap_pt: float = 4.0, keep: float = 0.0) -> None:
        d = self.doc(body_html)
        h = d.size().height()
        if keep and h + keep > self.room and self.y > self.top:
            self.new_page()
        self.add(h, _draw_doc(d), gap_pt)

    def table(self, head: list[str], rows: list[list[str]], widths: list[int], numeric: set[int] = frozenset(),
              caption: str = "", highlight: set[int] = frozenset(), small: bool = False) -> None:
        """An HTML table split over pages between rows; the header repeats on each part."""

        # an inline style replaces the style sheet's cell rules in Qt's rich text: repeat them
        st = ' style="font-size:7.5pt; border: 0.5px solid #b0b0b0; padding: 2px"' if small else ""
        sth = (' style="font-size:7.5pt; border: 0.5px solid #b0b0b0; padding: 2px; background-color: #e8e8e8"'
               if small else "")

        def render(part: list[int], with_caption: bool) -> QTextDocument:
            cols = "".join(f'<th width="{w}%" class="{"n" if k in numeric else ""}"{sth}>{h}</th>'
                           for k, (h, w) in enumerate(zip(head, widths)))
            body = []
            for r in part:
                stc = st
                if small and r in highlight:
                    stc = st[:-1] + '; background-color: #fff2b3"'
                cells = "".join(f'<td class="{"n" if k in numeric else ""}"{stc}>{c}</td>' for k, c in enumerate(rows[r]))
                body.append(f'<tr class="{"hl" if r in highlight else ""}">{cells}</tr>')
            cap = f"<h3>{caption}</h3>" if with_caption and caption else ""
            return self.doc(f'{cap}<table width="100%" cellspacing="0" cellpadding="2"><tr>{cols}</tr>'
                            f'{"".join(body)}</table>')

        start, first = 0, True
        while start < len(rows) or (first and not rows):
            end = start + 1
            best = render(list(range(start, min(end, len(rows)))), first)
            while end < len(rows):
                trial = render(list(range(start, end + 1)), first)
                if trial.size().height() > self.room:
                    break
                best, end = trial, end + 1
            if best.size().height() > self.room and self.y > self.top:
                self.new_page()
                continue
            self.add(best.size().height(), _draw_doc(best), 6)
            start, first = end, False
            if not rows:
                break


def _draw_doc(d: QTextDocument) -> Callable:
    def draw(p: QPainter, rect: QRectF) -> None:
        p.save()
        p.translate(rect.topLeft())
        ctx = QAbstractTextDocumentLayout.PaintContext()
        d.documentLayout().draw(p, ctx)
        p.restore()

    return draw


def esc(x) -> str:
    return html.escape(str(x))


# ----- report content ---------------------------------------------------------------------------
def _program_text(setup: dict) -> str:
    p = setup.get("program", {})
    text = f"Wheelreach {p.get('version', '?')}"
    if "git_commit" in p:
        text += f", git commit {p['git_commit'][:12]}" + (" with uncommitted changes" if p.get("git_dirty") else "")
    return text + f" (Python {p.get('python', '?')}, numpy {p.get('numpy', '?')})"


def _overrides_text(o: dict) -> str:
    parts = []
    if o.get("angles_per_turn") is not None:
        parts.append(f"angles per turn {o['angles_per_turn']}")
    if o.get("ground_reflection") is not None:
        parts.append(f"road reflection {'on' if o['ground_reflection'] else 'off'}")
    if o.get("wheel_model"):
        parts.append(f"wheel model {o['wheel_model']}")
    for sp in o.get("extra_spots", []):
        parts.append(f"added spot '{sp['name']}'")
    if o.get("calibration"):
        parts.append("calibration applied (below)")
    return ", ".join(parts) or "none (the file as it is)"


def verdict_html(d: ReportData) -> str:
    """The boxed verdict that opens page 1 (core.defence.verdict): recommended spot, margin against the
    requirement, P(pass), the two most sensitive inputs and what to measure first; "" without a verdict."""
    vd = d.verdict
    if vd is None:
        return ""
    colour = "#e3f2e1" if vd.meets else "#f8d0d0"
    lines = vd.lines()
    at = ""
    ck = d.eirp_check
    if ck is not None and ck.over_ceiling:
        at = (f"<p><b>With the sensor EIRP lowered to the radio limit the margin is "
              f"{float(ck.margin_at_ceiling_db(vd.margin_db)):+.1f} dB.</b></p>")
    measure = "".join(f"<li>{esc(t)}</li>" for t in vd.measure_first)
    body = "".join(f"<p>{esc(t)}</p>" for t in lines[1:-1])
    return (f"<table width='100%' cellpadding='6' style='border: 1.2px solid #404040'><tr>"
            f"<td style='background-color:{colour}'><p style='font-size:10.5pt'><b>Verdict. {esc(lines[0])}</b></p>"
            f"{body}{at}<p><b>Measure first on a vehicle:</b></p><ol style='margin-top:0'>{measure}</ol>"
            f"</td></tr></table>")


def _verdict_box(f: Flow, d: ReportData) -> None:
    """Page 1's verdict box (kept in one function so other page-1 blocks can be added around it)."""
    box = verdict_html(d)
    if box:
        f.html(box, 8)


def _calibration_text(cal: dict | None, v=None) -> str:
    """The title page's calibration line: "calibrated from N measurements, hold-out RMS x dB", the file, the values
    and why it may not carry over to this vehicle (core.calibration.calibration_warnings)."""
    if not cal:
        return "none: the model's own parameter values (File &gt; Import measurements or 'wheelreach calibrate' fit them)"
    from core.calibration import calibration_warnings

    values = "; ".join(f"{esc(k)} {x:.2f} dB" for k, x in cal.get("values", {}).items()) or "no value applied"
    warn = "".join(f"<br/><b style='color:#a3141e'>Warning: {esc(w)}</b>"
                   for w in (calibration_warnings(v, cal) if v is not None else []))
    return (f"<b>{esc(cal.get('note', ''))}</b><br/><span class='small'>{esc(cal.get('file') or '')} "
            f"(SHA-256 <span class='mono'>{esc((cal.get('sha256') or '')[:16])}...</span>); applied: {values}; "
            f"measured on {esc(cal.get('measured_vehicle') or '?')}</span>{warn}")


def _title_page(f: Flow, d: ReportData) -> None:
    v, st = d.vehicle, d.setup
    f.html(f"<h1>Receiver placement report</h1><p style='font-size:11pt'>{esc(v.name)} "
           f"&mdash; body style: {esc(v.body_style)}</p>", 6)
    if d.eirp_check is not None and d.eirp_check.over_ceiling:
        f.html(f"<table width='100%' cellpadding='5'><tr><td style='background-color:#f8d0d0'><b>"
               f"{esc(d.eirp_check.warning())}</b></td></tr></table>", 6)
    _verdict_box(f, d)
    cmd = st.get("command_line")
    wm = st.get("wheel_model", {})
    ts = wm.get("table_set")
    tables = "<br/>".join(f"{esc(k)}: <span class='mono'>{h}</span>" for k, h in st.get("data_tables", {}).items())
    rows = [
        ["Vehicle", esc(v.name)],
        ["Body style", esc(v.body_style)],
        ["Description", esc(v.description) or "&ndash;"],
        ["Input", esc(d.source)],
        [f"SHA-256 of the {esc(d.hash_of)}", f"<span class='mono'>{d.sha256}</span>"],
        ["Date", d.created.strftime("%Y-%m-%d %H:%M %Z").strip()],
        ["Program", esc(_program_text(st))],
        ["Command line", f"<span class='mono'>{esc(shlex.join(cmd))}</span>" if cmd
         else "desktop program (File &gt; Export report)"],
        ["Overrides", esc(_overrides_text(st.get("overrides", {})))],
        ["Calibration", _calibration_text(d.calibration, v)],
        ["Wheel model", esc(d.scene.wheel_model_label)
         + (f"<br/><span class='small'>tables: {esc(ts.get('solver', ''))}, model {esc(ts.get('model_version', ''))}, "
            f"{esc(ts.get('date_utc', ''))}</span>" if ts else "")],
        ["Worst case", esc(d.scene.score_method)],
        ["Data tables (SHA-256)", tables or "&ndash;"],
        ["Body", (f"{len(v.wheels)} wheels ({', '.join(w.id for w in v.wheels)}), {len(v.zones)} panel zones, "
                  f"{len(v.spots)} candidate spots, {len(v.regions)} mounting regions")],
    ]
    f.table(["Item", "Value"], rows, [26, 74])
    paras = "".join(f"<p>{esc(t)}</p>" for t in d.findings.split("\n\n"))
    f.html(f"<h2>Findings</h2>{paras}", 4)
    f.html(f"<table width='100%' cellpadding='5'><tr><td class='caution'><b>{esc(CAUTION)}</b></td></tr></table>", 8)


def _setup_tables(f: Flow, d: ReportData) -> None:
    """Radio setup, materials and the uncertain inputs."""
    f.html("<h2>Radio setup</h2>", 2, keep=120 * S)
    f.table(["Quantity", "Value", "Source or note"], [[esc(a), esc(b), f"<span class='small'>{esc(c)}</span>"]
                                                       for a, b, c in d.radio_rows], [20, 30, 50])
    f.html("<h2>Materials</h2><p>Crossing loss of each panel material at the frequency, and where the value comes "
           "from. Values marked <i>engineering default</i> are parameters, not published figures: replace them by "
           "measurements where available.</p>", 2, keep=120 * S)
    rows = []
    for m in d.materials:
        kind = ("calibrated from measurements" if m.get("calibrated") else
                "engineering default" if m["engineering_default"] else "published / by definition")
        rows.append([esc(m["material"]), f"{m['loss_db']:.2f}", esc(kind),
                     f"<span class='small'>{esc(', '.join(m['used_by']))}</span>",
                     f"<span class='small'>{esc(m['source'])}</span>"])
    f.table(["Material", "Loss dB", "Kind", "Used by", "Source"], rows, [11, 8, 14, 22, 45], numeric={1})
    _inputs_table(f, d)


def _inputs_table(f: Flow, d: ReportData) -> None:
    """The uncertain inputs of the tornado and P(pass): nominal, range, distribution, source."""
    if d.defence is None:
        return
    f.html("<h2>Uncertain inputs</h2><p>What the tornado figures vary one at a time and the Monte-Carlo P(pass) "
           f"draws together ({esc(d.defence.method)}). Ranges marked <i>engineering default</i> are judgement, not "
           "published figures.</p>", 2, keep=120 * S)
    rows = []
    for i in d.defence.inputs:
        rng = (", ".join(esc(i.text(o)) for o in i.options) if i.kind == "road"
               else f"{esc(i.text(i.low))} .. {esc(i.text(i.high))}")
        note = f" <i>({esc(i.effect)})</i>" if i.effect else ""
        rows.append([esc(i.label), esc(i.text(i.nominal)), rng, f"<span class='small'>{esc(i.distribution)}</span>",
                     f"<span class='small'>{esc(i.source)}{note}</span>"])
    case = next(iter(d.defence.cases.values()), None)
    for what, why in (case.sensitivity.not_varied if case else ()):
        rows.append([esc(what), "&ndash;", "not varied", "", f"<span class='small'>{esc(why)}</span>"])
    f.table(["Input", "Nominal", "Range", "Distribution", "Source"], rows, [16, 11, 20, 15, 38])


def _ranked(d: ReportData) -> tuple[list[int], dict[int, int]]:
    order = [int(i) for i in d.scores.order()]
    return order, {i: k + 1 for k, i in enumerate(order)}


def _placement_mark(d: ReportData, i: int) -> str:
    """HTML mark of a spot that is not a clean receiver position (core.placement), "" otherwise."""
    pl = d.placement
    if pl is None or not pl.flagged[i]:
        return ""
    colour = "#b00000" if not pl.candidate[i] else "#a05a00"
    return f" <b style='color:{colour}'>[{esc(pl.flag(i))}]</b>"


def _placement_notes(d: ReportData, order: list[int]) -> str:
    """Paragraph listing the located warnings of the flagged spots ("" when none)."""
    pl = d.placement
    if pl is None:
        return ""
    items = [f"<b>{esc(d.scores.names[i])}</b>: {esc(pl.message(i))}" for i in order if pl.flagged[i]]
    if not items:
        return ""
    return ("<p class='small'><b style='color:#b00000'>Placement warnings</b> (marked in the table; a spot outside "
            "the body or in a wheelhouse is not a receiver position and its margin is not a result; the mounting "
            f"clearance of {1000 * pl.clearance_m:.0f} mm is an engineering default): " + "; ".join(items) + ".</p>")


def _drawings(f: Flow, d: ReportData) -> None:
    v, sc = d.vehicle, d.scores
    order, rank = _ranked(d)
    f.new_page()
    f.html("<h2>Body drawings</h2><p>Top and side view of the body without wheel arches, with the panel zones "
           "(filled by material), the wheels, the mounting regions (dashed) and the candidate spots numbered by "
           "rank.</p>", 2)
    labels = [str(rank[i]) for i in range(len(sc.names))]
    # leave room on the page for the spot key below (a row is about 13 pt)
    max_h = f.room - (75 + 15 * len(sc.names)) * S
    max_h = max(max_h, 300 * S)
    h = fig.body_views_height(v, f.width, S, max_h)
    best = d.best_index()
    f.add(h, lambda p, r: fig.draw_body_views(p, r, S, v, sc.positions, labels, highlight=best, max_height=max_h))
    mats = sorted({z.material for z in v.zones})
    key = " &nbsp; ".join(f"<span style='background-color:{fig.material_colour(m, 255).name()}'>&nbsp;&nbsp;&nbsp;"
                          f"</span> {esc(m)}" for m in mats)
    f.html(f"<p class='small'>Zones: {key} &nbsp; (body panels outside any zone: metal). Hatched: the wheelhouses "
           f"(wheel arch of tire radius + {1000 * v.body.wheelhouse_clearance_m:.0f} mm clearance, from the inner wall "
           f"outward). The ringed spot is the best ranked.</p>", 2)
    axes = {s["name"]: s for s in d.setup.get("spots", [])}

    def axis(name: str) -> str:
        a = axes.get(name)
        if a is None:
            return ""
        return f"({', '.join(f'{c:.3g}' for c in a['receiver_axis'])}) {'own' if a['axis_from'] == 'spot' else 'default'}"

    rows = [[str(rank[i]), esc(sc.names[i]) + _placement_mark(d, i), *(f"{c:.3f}" for c in sc.positions[i]), _spot_def(v, sc.names[i]),
             esc(axis(sc.names[i]))] for i in order]
    f.table(["#", "Spot", "x m", "y m", "z m", "Defined as", "Receiver axis"], rows, [5, 26, 8, 8, 8, 26, 19],
            numeric={0, 2, 3, 4}, caption="Spot key")
    notes = _placement_notes(d, order)
    if notes:
        f.html(notes, 4)


def _spot_def(v, name: str) -> str:
    s = next((s for s in v.spots if s.name == name), None)
    if s is None:
        return ""
    if s.x_from == "origin" and s.z_from == "ground":
        return "vehicle axes"
    xs = f"x: {s.x_from.replace('_', ' ')} {s.x_m:+.3f} m" if s.x_from != "origin" else f"x: {s.x_m:.3f} m"
    zs = f"z: floor {s.z_m:+.3f} m" if s.z_from == "floor" else f"z: {s.z_m:.3f} m"
    return esc(f"{xs}; {zs}")


def _heatmaps(f: Flow, d: ReportData) -> None:
    if not d.heatmaps:
        return
    v, sc = d.vehicle, d.scores
    _, rank = _ranked(d)
    labels = [str(rank[i]) for i in range(len(sc.names))]
    f.new_page()
    lo, hi = fig.margin_limits_db()
    f.html("<h2>Heatmaps of the mounting regions</h2><p>Worst-wheel worst-case margin of a receiver placed in each "
           f"cell (default receiver axis). One colour scale for every map and every body: {lo:+.0f} to {hi:+.0f} dB, "
           "0 dB at the neutral centre, beyond the ends the end colours; the black line is the 0 dB contour (the edge "
           "of the area that meets the required margin). Hatched: the wheelhouses. Spots numbered by rank; a hollow "
           "marker is a spot at another height (top view) or lateral position (side view), projected onto the map: "
           "its margin is the ranking's, not the map's colour there.</p>", 2)
    ck = d.eirp_check
    if ck is not None and ck.over_ceiling:
        f.html(f"<p><b>{esc(ck.warning())}</b> At the ceiling the 0 dB contour of these maps moves to the "
               f"{ck.margin_shift_db:+.1f} dB level.</p>", 2)
    for region, hm in zip(d.regions, d.heatmaps):
        h = fig.heatmap_height(v, hm, f.width, S)
        f.add(h, lambda p, r, hm=hm, region=region: fig.draw_heatmap(p, r, S, v, hm, region, sc.positions, labels,
                                                                     sc.wheel_ids), gap_pt=2)
        ok, cells = hm.meeting(0.0)
        best = hm.best_cells(1)
        proj = fig.projected_spots(hm, sc.positions)
        txt = f"{cells} cells computed, {ok} ({100 * ok / max(cells, 1):.0f} %) with margin &ge; 0 dB"
        if proj.any():
            txt += (f"; spots projected from another {'height' if hm.view == 'top' else 'lateral position'} "
                    f"(hollow): {', '.join(labels[i] for i in np.flatnonzero(proj))}")
        left_out = excluded_text(hm)
        if left_out:
            txt += f"; not computed and left blank (not a receiver position): {left_out}"
        if best:
            x, y, z, m, w = best[0]
            txt += (f"; best cell ({x:.2f}, {y:.2f}, {z:.2f}) m at {m:+.1f} dB, limited by {d.scene.wheel_ids[w]}; "
                    f"worst {np.nanmin(hm.margin_db):+.1f} dB")
        f.html(f"<p class='small'>{txt}.</p>", 8)


def _ranking(f: Flow, d: ReportData) -> None:
    sc = d.scores
    order, _ = _ranked(d)
    if f.room < 160 * S:
        f.new_page()
    else:
        f.space(10)
    f.html(f"<h2>Ranked spots</h2><p>Margin = worst-case level of the worst wheel &minus; sensitivity "
           f"({sc.sensitivity_dbm:.1f} dBm) &minus; required margin ({sc.required_margin_db:.1f} dB). Ranked by "
           f"margin, ties by the worst wheel's median. Swing = largest level swing of a wheel over the turn.</p>", 2)
    ck = d.eirp_check
    over = ck is not None and ck.over_ceiling
    if over:
        f.html(f"<p><b>{esc(ck.warning())}</b> Column <i>At ceiling</i>: the margin with the sensor EIRP lowered to "
               f"the {ck.allowed_peak_dbm:.2f} dBm ceiling.</p>", 2)
    rows = []
    for k, i in enumerate(order, 1):
        w = int(sc.worst_wheel[i])
        x, y, z = sc.positions[i]
        at = [f"<b>{float(ck.margin_at_ceiling_db(sc.margin_db[i])):+.1f}</b>"] if over else []
        pp = d.defence.p_pass(i) if d.defence is not None else None
        rows.append([str(k), esc(sc.names[i]) + (" <i>(near field)</i>" if sc.near_field[i] else "")
                     + _placement_mark(d, i),
                     f"{x:.3f}", f"{y:.3f}", f"{z:.3f}", f"<b>{sc.margin_db[i]:+.1f}</b>", *at,
                     "&ndash;" if pp is None else f"{100 * pp:.0f}", esc(sc.wheel_ids[w]),
                     f"{sc.worst_angle_deg[i, w]:.0f}", f"{sc.worst_dbm[i, w]:.1f}", f"{sc.median_dbm[i, w]:.1f}",
                     f"{sc.swing_db()[i].max():.1f}"])
    if over:
        f.table(["#", "Spot", "x m", "y m", "z m", "Margin dB", "At ceiling dB", "P(pass) %", "Worst wheel", "at deg",
                 "Worst dBm", "Median dBm", "Swing dB"], rows, [4, 20, 7, 7, 7, 7, 7, 7, 7, 6, 7, 8, 6],
                numeric={0, 2, 3, 4, 5, 6, 7, 9, 10, 11, 12}, highlight={order.index(d.best_index())})
    else:
        f.table(["#", "Spot", "x m", "y m", "z m", "Margin dB", "P(pass) %", "Worst wheel", "at deg", "Worst dBm",
                 "Median dBm", "Swing dB"], rows, [4, 21, 7, 7, 7, 8, 8, 8, 6, 8, 8, 8],
                numeric={0, 2, 3, 4, 5, 6, 8, 9, 10, 11}, highlight={order.index(d.best_index())})
    f.html("<p class='small'>P(pass): the share of the Monte-Carlo draws of the uncertain inputs (table "
           "<i>Uncertain inputs</i>) in which the spot's margin stays at or above 0 dB.</p>", 4)
    notes = _placement_notes(d, order)
    if notes:
        f.html(notes, 4)
    head = ["Spot"] + [esc(w) for w in sc.wheel_ids]
    rows = [[esc(sc.names[i])] + [f"{sc.worst_dbm[i, w]:.1f} @ {sc.worst_angle_deg[i, w]:.0f}&deg;"
                                  + ("*" if w == sc.worst_wheel[i] else "") for w in range(len(sc.wheel_ids))]
            for i in order]
    nw = len(sc.wheel_ids)
    first = 28 if nw <= 4 else 22
    f.table(head, rows, [first] + [int((100 - first) / nw)] * nw, numeric=set(range(1, nw + 1)),
            caption="Worst case per wheel (dBm at wheel angle; * = the spot's limiting wheel)", small=nw > 4)


def _details(f: Flow, d: ReportData) -> None:
    sc = d.scores
    for det in d.details:
        i = det.index
        w = int(sc.worst_wheel[i])
        f.new_page()
        f.html(f"<h2>Spot {det.rank}: {esc(sc.names[i])}</h2><p>Position ({', '.join(f'{c:.3f}' for c in sc.positions[i])})"
               f" m; margin <b>{sc.margin_db[i]:+.1f} dB</b>, limited by wheel {esc(sc.wheel_ids[w])} at "
               f"{sc.worst_dbm[i, w]:.1f} dBm, wheel angle {sc.worst_angle_deg[i, w]:.0f}&deg;."
               + (" <b>Near field:</b> a sensor comes within lambda/2pi; the result is indicative only." if
                  sc.near_field[i] else "")
               + (f" <b>Placement:</b> {esc(d.placement.message(i))}." if d.placement is not None
                  and d.placement.flagged[i] else "") + "</p>", 2)
        f.add(230 * S, lambda p, r, i=i: fig.draw_levels(p, r, S, sc, i))
        half = (f.width - 12 * S) / 2
        b, dd = det.burst, det.distinctness

        def two(p, r, b=b, dd=dd, i=i, half=half):
            fig.draw_burst(p, QRectF(r.left(), r.top(), half, r.height()), S, b, MPS_TO_KMH, sc.required_margin_db)
            fig.draw_distinctness(p, QRectF(r.left() + half + 12 * S, r.top(), half, r.height()), S,
                                  sc.levels_dbm[i], dd)

        f.add(190 * S, two)
        rows = []
        for k, wid in enumerate(sc.wheel_ids):
            vi = int(np.argmin(b.success[k]))
            rs = resonant_kmh(b, k) or "none in range"
            rows.append([esc(wid), f"{sc.worst_dbm[i, k]:.1f}", f"{sc.worst_angle_deg[i, k]:.0f}",
                         f"{sc.median_dbm[i, k]:.1f}", f"{sc.swing_db()[i, k]:.1f}", f"{100 * b.parked[k]:.0f}",
                         f"{100 * b.success[k, vi]:.0f} at {b.speeds_mps[vi] * MPS_TO_KMH:.0f}", rs])
        f.table(["Wheel", "Worst dBm", "at deg", "Median dBm", "Swing dB", "Parked %", "Lowest burst % at km/h",
                 "Resonant speeds km/h"], rows, [8, 10, 8, 11, 9, 9, 18, 27], numeric={1, 2, 3, 4, 5})
        if len(dd.wheel_ids) > 1:
            a, c = dd.closest_pair
            f.html(f"<p class='small'>Wheel distinctness: closest pair {esc(dd.wheel_ids[a])}/{esc(dd.wheel_ids[c])}, "
                   f"medians {dd.min_separation_db:.1f} dB apart, {100 * dd.closest_overlap:.0f} % of the quieter "
                   f"wheel's frames louder than the other's median (figure: line = full range over the turn, box = "
                   f"25-75 %, bar = median). Burst: {d.vehicle.radio.frames_per_burst} frames "
                   f"every {d.vehicle.radio.frame_interval_s * 1e3:.0f} ms; success = share of start angles with at "
                   f"least one frame at or above the sensitivity; burst margin = the extra loss at which the first "
                   f"burst would fail (shown when every burst gets through).</p>", 2)
        _defence_of_spot(f, d, det)


def _budget_rows(b) -> list[list[str]]:
    rows, run = [], 0.0
    for t in b.terms:
        run += t.value_db
        rows.append([esc(t.label), f"{t.value_db:+.2f}", f"{run:.2f}", f"<span class='small'>{esc(t.note)}</span>"])
    rows.append(["<b>received level</b>", "", f"<b>{b.level_dbm:.2f}</b>", "dBm"])
    req = f"&minus; sensitivity &minus; required margin ({b.sensitivity_dbm:.1f} dBm, {b.required_margin_db:.1f} dB)"
    rows.append([req, f"{-b.sensitivity_dbm - b.required_margin_db:+.2f}", "", ""])
    rows.append(["<b>margin</b>", f"<b>{b.margin_db:+.2f}</b>", "", "dB"])
    return rows


def _defence_of_spot(f: Flow, d: ReportData, det) -> None:
    """A top spot's link budget by term (worst and median angle), its tornado and what to measure first."""
    if d.defence is None or det.index not in d.defence.cases:
        return
    case = d.defence.cases[det.index]
    sc = d.scores
    f.new_page()
    f.html(f"<h2>Spot {det.rank}: {esc(sc.names[det.index])} &mdash; link budget and what it depends on</h2>", 2)
    b = case.budgets["worst"]
    cap = (f"Link budget by term at the worst case: wheel {esc(b.wheel)} at {b.angle_deg:.1f}&deg;, path "
           f"{b.path_m:.3f} m")
    f.table(["Term", "dB", "Running dBm", "How"], _budget_rows(b), [47, 8, 10, 35], numeric={1, 2}, caption=cap,
            small=True)
    m = case.budgets["median"]
    groups: dict[str, float] = {}
    for t in m.terms:
        groups[t.group] = groups.get(t.group, 0.0) + t.value_db
    road = ("" if not b.road_ray else "Road ray on its own at the worst case: " + "; ".join(
        f"{esc(t.label)} {t.value_db:+.1f} dB" for t in b.road_ray) + f"; its level alone {b.road_ray_level_dbm:.1f} "
        "dBm. ")
    f.html(f"<p class='small'>The terms add up to the engine's level. {road}At the median angle "
           f"({m.angle_deg:.0f}&deg;, the sampled angle whose level is nearest the turn's median), by part: "
           + ", ".join(f"{esc(g)} {v:+.1f} dB" for g, v in groups.items())
           + f" &rarr; {m.level_dbm:.1f} dBm, margin {m.margin_db:+.1f} dB (every term: JSON/CSV export).</p>", 4)
    ss = case.sensitivity
    h = fig.tornado_height(ss, S)
    f.add(h, lambda p, r, ss=ss: fig.draw_tornado(p, r, S, ss))
    f.html(f"<p class='small'>One input at a time at the ends of its range, the others nominal (ranges and sources: "
           f"table <i>Uncertain inputs</i>). Monte-Carlo: P(pass) {100 * ss.p_pass:.0f} %, 5th percentile of the "
           f"margin {ss.margin_p05_db:+.1f} dB, median {ss.margin_p50_db:+.1f} dB ({ss.draws} draws, seed {ss.seed}). "
           "Not varied: " + "; ".join(f"{esc(a)} ({esc(b)})" for a, b in ss.not_varied) + "</p>"
           "<p><b>Measure first on a vehicle:</b> " + "; ".join(f"({k + 1}) {esc(t)}" for k, t in
                                                               enumerate(case.measure_first)) + ".</p>", 4)


def _closing(f: Flow, d: ReportData) -> None:
    from core.model_limits import limits, method_text

    items = "".join(f"<li><b>{esc(title)}.</b> {esc(text)}</li>" for title, text in limits(d.scene))
    f.html(f"<h2>Method and limits</h2><p>{esc(method_text(d.scene))}</p><p><b>Limits of the model</b></p><ul>{items}</ul>"
           f"<p>Data export: the same numbers are available as CSV and JSON from <span class='mono'>wheelreach report "
           f"FILE -o OUT.pdf --csv OUT.csv --json OUT.json</span> (heatmap cells of {d.step_m * 1000:.0f} mm).</p>",
           6, keep=80 * S)
    f.html(f"<table width='100%' cellpadding='5'><tr><td class='caution'><b>{esc(CAUTION)}</b></td></tr></table>", 4)


def layout_report(f: Flow, d: ReportData) -> None:
    _title_page(f, d)
    _ranking(f, d)
    _setup_tables(f, d)
    _drawings(f, d)
    _heatmaps(f, d)
    _details(f, d)
    _closing(f, d)


# ----- painting -------------------------------------------------------------------------------
def paint_pages(writer: QPdfWriter, f: Flow, header: str, footer: str) -> int:
    p = QPainter()
    if not p.begin(writer):
        raise OSError("cannot start the PDF writer")
    try:
        n = len(f.pages)
        for k, blocks in enumerate(f.pages):
            if k:
                writer.newPage()
            p.setRenderHint(QPainter.RenderHint.Antialiasing, True)
            for y, h, draw in blocks:
                draw(p, QRectF(f.left, y, f.width, h))
            p.setFont(fig.font(7, s=S))
            fm = QFontMetricsF(p.font())
            p.setPen(QColor(90, 90, 90))
            ytop = MARGIN_PT * S
            p.drawText(QPointF(f.left, ytop + fm.ascent()), header)
            p.setPen(fig.pen(QColor(170, 170, 170), 0.5, S))
            p.drawLine(QPointF(f.left, ytop + fm.height() + 2 * S), QPointF(f.left + f.width, ytop + fm.height() + 2 * S))
            yb = (PAGE_H_PT - MARGIN_PT) * S
            p.drawLine(QPointF(f.left, yb - fm.height() - 3 * S), QPointF(f.left + f.width, yb - fm.height() - 3 * S))
            p.setPen(QColor(90, 90, 90))
            p.drawText(QPointF(f.left, yb - fm.descent()), footer)
            num = f"page {k + 1} of {n}"
            p.drawText(QPointF(f.left + f.width - fm.horizontalAdvance(num), yb - fm.descent()), num)
    finally:
        p.end()
    return n


def new_writer(path: str, title: str) -> QPdfWriter:
    w = QPdfWriter(path)
    w.setResolution(DPI)
    w.setPageLayout(QPageLayout(QPageSize(QPageSize.PageSizeId.A4), QPageLayout.Orientation.Portrait,
                                QMarginsF(0, 0, 0, 0)))
    w.setTitle(title)
    w.setCreator("Wheelreach")
    return w


def render_pdf_atomic(out_pdf: str | os.PathLike, title: str, build: Callable[[Flow], None], header: str,
                      footer: str) -> int:
    """Lay out with ``build(flow)`` and paint to a temporary PDF beside ``out_pdf``; rename when complete."""
    _ensure_app()
    with atomic_path(out_pdf) as tmp:
        writer = new_writer(tmp, title)
        f = Flow(writer)
        build(f)
        n = paint_pages(writer, f, header, footer)
        del writer  # flushes and closes the file
    return n


def write_report_pdf(d: ReportData, out_pdf: str | os.PathLike) -> int:
    """Write the PDF of report data ``d``; returns the page count."""
    return render_pdf_atomic(
        out_pdf, f"Receiver placement report: {d.vehicle.name}", lambda f: layout_report(f, d),
        header=f"Wheelreach receiver placement report  |  {d.vehicle.name} ({d.vehicle.body_style})",
        footer=f"SHA-256 {d.sha256[:16]}...  |  {d.created.strftime('%Y-%m-%d')}  |  results approximate: "
               f"confirm by simulation and measurement",
    )


def write_report(path_or_vehicle, out_pdf, csv_path=None, json_path=None, step_m: float = 0.05,
                 progress=None, cancel=None, command_line: list[str] | None = None,
                 calibration: dict | None = None) -> tuple[ReportData, int]:
    """Compute and write the report (and the CSV/JSON exports). Returns (data, page count).

    Every output path is checked first (core.files.check_outputs: OutputPathError for a missing or
    unwritable folder, a read-only file, an output that is the input or another output), then a
    bad vehicle file raises VehicleFileError; in both cases before anything is computed or written."""
    from core.vehicle import Vehicle

    check_outputs({"-o": out_pdf, "--csv": csv_path, "--json": json_path},
                  [] if isinstance(path_or_vehicle, Vehicle) else [path_or_vehicle])
    d = build_report_data(path_or_vehicle, step_m, progress=progress, cancel=cancel, command_line=command_line,
                          calibration=calibration)
    n = write_report_pdf(d, out_pdf)
    if csv_path:
        atomic_write_text(csv_path, report_csv(d))
    if json_path:
        atomic_write_text(json_path, report_json_text(d))
    return d, n


# ----- GUI entry point ---------------------------------------------------------------------------
def export_report_dialog(parent, vehicle_path_or_vehicle, step_m: float = 0.05):
    """Ask for a PDF name, compute the report in a worker thread (progress, cancel) and write it.

    ``vehicle_path_or_vehicle``: a file path, or the Vehicle being edited (then the hash covers its
    canonical JSON). Returns the written path, or None when cancelled or failed (a message box says why).
    """
    from PySide6.QtCore import QThread, Signal
    from PySide6.QtWidgets import QFileDialog, QMessageBox, QProgressDialog

    from core.scoring import Cancelled
    from core.vehicle import Vehicle, VehicleFileError

    src = vehicle_path_or_vehicle
    stem = Path(src).stem if not isinstance(src, Vehicle) else "report"
    start = str(Path(src).with_suffix(".pdf")) if not isinstance(src, Vehicle) else "report.pdf"
    path, _ = QFileDialog.getSaveFileName(parent, "Export placement report", start, "PDF files (*.pdf)")
    if not path:
        return None
    if not path.lower().endswith(".pdf"):
        path += ".pdf"
    try:  # before computing: the report must not replace its own input, a read-only file, ...
        check_outputs({"report": path}, [] if isinstance(src, Vehicle) else [src])
    except OutputPathError as e:
        QMessageBox.warning(parent, "Export placement report", f"The report was not written.\n\n{e}")
        return None

    class Worker(QThread):
        step = Signal(int, int)

        def __init__(self):
            super().__init__()
            self.result = None
            self.error = None
            self.stop = False

        def run(self):
            try:
                self.result = build_report_data(src, step_m, progress=lambda a, b: self.step.emit(a, b),
                                                cancel=lambda: self.stop)
            except Cancelled:
                self.error = None
            except Exception as e:  # noqa: BLE001 - any failure is reported to the user in the GUI thread
                self.error = e

    dlg = QProgressDialog(f"Computing the report of {stem}...", "Cancel", 0, 100, parent)
    dlg.setWindowTitle("Export placement report")
    dlg.setMinimumDuration(0)
    w = Worker()
    w.step.connect(lambda a, b: (dlg.setMaximum(max(1, b)), dlg.setValue(a)))
    dlg.canceled.connect(lambda: setattr(w, "stop", True))
    w.finished.connect(dlg.reset)
    w.start()
    dlg.exec()
    w.wait()
    if w.error is not None:
        msg = str(w.error) if isinstance(w.error, VehicleFileError) else f"{type(w.error).__name__}: {w.error}"
        QMessageBox.warning(parent, "Export placement report", f"The report was not written.\n\n{msg}")
        return None
    if w.result is None:
        return None
    try:
        n = write_report_pdf(w.result, path)
    except OSError as e:
        QMessageBox.warning(parent, "Export placement report", f"The report was not written.\n\n{e}")
        return None
    if parent is not None and hasattr(parent, "statusBar"):
        parent.statusBar().showMessage(f"Wrote {path} ({n} pages)", 8000)
    return path

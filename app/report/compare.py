"""Comparison across bodies as text, CSV and PDF (the ``wheelreach compare`` outputs)."""

from __future__ import annotations

import csv
import io
from datetime import UTC, datetime
from pathlib import Path

import numpy as np

from app.caution import SAFETY_NOTE
from app.report.data import CAUTION, file_sha256, program_version
from core.compare import CommonSearch, Comparison, names_at_several_places, recommend
from core.provenance import load_with_source
from core.vehicle import read_vehicle_bytes


def _short(style: str, k: int) -> str:
    return style if len(style) <= 10 else style[:9] + "."


def body_labels(c: Comparison) -> list[str]:
    """Column labels: the body styles, numbered when two bodies share a style."""
    out = []
    for k, st in enumerate(c.body_styles):
        lab = _short(st, k)
        out.append(lab if c.body_styles.count(st) == 1 else f"{lab}#{k + 1}")
    return out


def describe_position(search: CommonSearch) -> str:
    dx, y = search.best_offset_m
    where = "ahead of" if dx >= 0 else "behind"
    lm = search.landmark.replace("_", " ")
    z = (f"{search.height_above_floor_m:.3f} m above the floor" if search.height_above_floor_m is not None
         else "at each body's own mounting-region height")
    return f"{abs(dx):.3f} m {where} the {lm}, y = {y + 0.0:+.3f} m, {z}"


def verdict_lines(c: Comparison, search: CommonSearch | None, vehicles=None) -> list[str]:
    """The comparison's verdict: per body whether the platform-common spot meets the requirement, which of the
    common spot and the searched position is recommended and why, and spot names defined at different places."""
    rec = recommend(c, search)
    if rec is None:
        return ["No spot to compare."]
    labels = body_labels(c)
    i = c.common_best
    per_body = []
    for b, lab in enumerate(labels):
        m = c.margin_db[i, b]
        per_body.append(f"{lab} {'-' if np.isnan(m) else f'{m:+.1f} dB'} "
                        f"{'meets' if rec.common_meets[b] else 'FAILS'}")
    n_ok = sum(rec.common_meets)
    out = [f"Platform-common spot '{c.spot_names[i]}' meets the requirement on {n_ok} of {len(labels)} bodies: "
           + "; ".join(per_body) + "."]
    if rec.search_meets is not None:
        out.append(f"Searched position meets it on {sum(rec.search_meets)} of {len(labels)} bodies: "
                   + "; ".join(f"{lab} {m:+.1f} dB" for lab, m in zip(labels, search.best_margins_db)) + ".")
    out.append(f"Recommended: the {rec.choice}, because {rec.reason}.")
    if vehicles is not None:
        flags = names_at_several_places(list(vehicles))
        if flags:
            out.append("Same name, different places: " + ", ".join(f"'{f.name}'" for f in flags) + ": each file "
                       "places these in its own coordinates, at different places on different bodies, so their rows "
                       "compare different places (the definitions per body follow the table).")
    return out


def name_flag_lines(c: Comparison, vehicles) -> list[str]:
    """Every spot name defined at different places, with its definitions per body."""
    labels = body_labels(c)
    return [f.text(labels) for f in names_at_several_places(list(vehicles))] if vehicles is not None else []


def verdict_box_html(c: Comparison, search: CommonSearch | None, vehicles) -> str:
    """The comparison PDF's boxed verdict (first on page 1): green when the recommended place meets the requirement
    on every body, red otherwise."""
    from app.report.pdf import esc

    rec = recommend(c, search)
    lines = verdict_lines(c, search, vehicles)
    good = rec is not None and all(rec.common_meets if rec.choice == "common spot" else (rec.search_meets or ()))
    colour = "#e3f2e1" if good else "#f8d0d0"
    body = "".join(f"<p>{'<b>' + esc(t) + '</b>' if t.startswith('Recommended') else esc(t)}</p>" for t in lines)
    return (f"<table width='100%' cellpadding='6' style='border: 1.2px solid #404040'><tr>"
            f"<td style='background-color:{colour}'><p style='font-size:10.5pt'><b>Verdict</b></p>{body}</td></tr>"
            "</table>")


def comparison_text(c: Comparison, search: CommonSearch | None = None, search_error: str = "",
                    vehicles=None, calibration_note: str = "") -> str:
    labels = body_labels(c)
    w = max(24, max(len(n) for n in c.spot_names) + 1)
    head = f"{'spot':<{w}}" + "".join(f"{lab:^14}" for lab in labels) + f"{'min dB':>9}  limited by"
    lines = [("Worst-case margin, dB, and worst wheel per body (* = landmark-relative spot carried from another file;"
              " - = not on this body)"), head]
    for i in c.order():
        cells = []
        for b in range(len(labels)):
            m = c.margin_db[i, b]
            num, wid = ("-", "") if np.isnan(m) else (f"{m:.1f}", c.worst_wheel[i, b])
            cells.append(f"{num:>7} {wid:<5}{'*' if c.carried[i, b] else ' '}")
        flag = "" if c.present_all[i] else "  (not on all bodies)"
        lines.append(f"{c.spot_names[i]:<{w}}" + "".join(cells) + f"{c.min_margin_db[i]:9.1f}  "
                     f"{labels[c.limiting_body[i]]}{flag}")
    lines.append("")
    if c.common_best >= 0:
        i = c.common_best
        lines.append(f"Platform-common best spot: '{c.spot_names[i]}', smallest margin over the bodies "
                     f"{c.min_margin_db[i]:+.1f} dB (limited by the {c.body_styles[c.limiting_body[i]]}, wheel "
                     f"{c.worst_wheel[i, c.limiting_body[i]]})"
                     + ("" if c.present_all[i] else "; no spot is on every body, so this is the best of all spots"))
    if search is not None:
        lines.append(f"Searched best position: {describe_position(search)}; smallest margin "
                     f"{search.best_min_margin_db:+.1f} dB (limited by the {c.body_styles[search.limiting_body]}, "
                     f"wheel {search.best_worst_wheel[search.limiting_body]}); {len(search.offsets_m)} grid points of "
                     f"{search.step_m * 1000:.0f} mm over the shared region, refined to {search.step_m * 250:.0f} mm")
        for b, lab in enumerate(labels):
            x, y, z = search.best_positions_m[b]
            lines.append(f"  {lab:<12} at ({x:.3f}, {y:+.3f}, {z:.3f}) m: {search.best_margins_db[b]:+.1f} dB "
                         f"({search.best_worst_wheel[b]})")
    elif search_error:
        lines.append(f"Shared-region search: {search_error}")
    if calibration_note:
        lines.append(calibration_note)
    lines.append("")
    lines += verdict_lines(c, search, vehicles)
    lines += ["  " + t for t in name_flag_lines(c, vehicles)]
    lines.append(SAFETY_NOTE)
    return "\n".join(lines)


def comparison_csv(c: Comparison, search: CommonSearch | None = None) -> str:
    """Rows spot x body: margin_db, worst_wheel, angle, position; plus one ``min`` row per spot and the search."""
    buf = io.StringIO()
    wr = csv.writer(buf, lineterminator="\n")
    wr.writerow(["record", "spot", "body", "body_style", "margin_db", "worst_wheel", "worst_angle_deg", "x_m", "y_m",
                 "z_m", "carried", "present_on_all", "common_best"])
    for i in c.order():
        for b in range(len(c.body_names)):
            if np.isnan(c.margin_db[i, b]):
                continue
            x, y, z = c.positions_m[i, b]
            wr.writerow(["cell", c.spot_names[i], c.body_names[b], c.body_styles[b], round(float(c.margin_db[i, b]), 3),
                         c.worst_wheel[i, b], round(float(c.worst_angle_deg[i, b]), 3), round(float(x), 4),
                         round(float(y), 4), round(float(z), 4), int(c.carried[i, b]), "", ""])
        lb = int(c.limiting_body[i])
        wr.writerow(["min", c.spot_names[i], c.body_names[lb], c.body_styles[lb], round(float(c.min_margin_db[i]), 3),
                     c.worst_wheel[i, lb], "", "", "", "", "", int(c.present_all[i]), int(i == c.common_best)])
    if search is not None:
        for b in range(len(c.body_names)):
            x, y, z = search.best_positions_m[b]
            wr.writerow(["search", f"{search.best_offset_m[0]:.4f} m from {search.landmark}, y {search.best_offset_m[1]:.4f}",
                         c.body_names[b], c.body_styles[b], round(float(search.best_margins_db[b]), 3),
                         search.best_worst_wheel[b], "", round(float(x), 4), round(float(y), 4), round(float(z), 4),
                         "", "", ""])
    return buf.getvalue()


def write_comparison_pdf(out_pdf, vehicles, paths, c: Comparison, search: CommonSearch | None,
                         search_error: str = "", calibration_note: str = "") -> int:
    """The comparison as a PDF: inputs with hashes, small top views, the table, the search, the caution."""
    from PySide6.QtCore import QRectF

    from app.report import figures as fig
    from app.report.pdf import S, esc, render_pdf_atomic

    now = datetime.now(UTC).astimezone()
    # a file: its bytes; the open document: its canonical JSON (core.provenance, as the placement report)
    hashes = [file_sha256(read_vehicle_bytes(p)) if p else load_with_source(v)[1]["sha256"]
              for v, p in zip(vehicles, paths)]
    labels = body_labels(c)
    best = c.common_best

    def build(f):
        f.html(f"<h1>Body-style comparison</h1><p style='font-size:11pt'>{len(vehicles)} bodies, "
               f"{len(c.spot_names)} spots &mdash; {now.strftime('%Y-%m-%d %H:%M %Z')}, Wheelreach "
               f"{esc(program_version())}</p>", 6)
        f.html(verdict_box_html(c, search, vehicles), 8)
        f.table(["Body", "Vehicle", "Input", "SHA-256"],
                [[esc(lab), esc(v.name), esc(Path(p).name if p else "unsaved document"), f"<span class='mono'>{h}</span>"]
                 for lab, v, p, h in zip(labels, vehicles, paths, hashes)], [11, 24, 18, 47], small=True)
        if calibration_note:
            f.html("".join(f"<p><b>{esc(line)}</b></p>" for line in calibration_note.splitlines()), 4)
        if best >= 0:
            lb = int(c.limiting_body[best])
            f.html(f"<h2>Platform-common best spot</h2><p><b>{esc(c.spot_names[best])}</b>: smallest margin over the "
                   f"bodies <b>{c.min_margin_db[best]:+.1f} dB</b>, limited by the {esc(c.body_styles[lb])} (wheel "
                   f"{esc(c.worst_wheel[best, lb])}). It is ringed in the top views below.</p>", 4)
        if search is not None:
            f.html(f"<h2>Best position in the shared region</h2><p>{esc(describe_position(search))}: smallest margin "
                   f"<b>{search.best_min_margin_db:+.1f} dB</b>, limited by the "
                   f"{esc(c.body_styles[search.limiting_body])}. Grid of {search.step_m * 1000:.0f} mm over the "
                   f"intersection of the bodies' top-view mounting regions measured from the "
                   f"{esc(search.landmark.replace('_', ' '))}, refined around the best cell. Shown as a square "
                   f"marker in the top views.</p>", 4)
        elif search_error:
            f.html(f"<h2>Best position in the shared region</h2><p>{esc(search_error)}</p>", 4)
        cols = 2
        cw = (f.width - 2 * 8 * S) / cols
        span = fig.thumbnail_span(vehicles)
        ch = cw * span[1] / span[0] + 16 * S
        order = list(c.order())
        for k in range(0, len(vehicles), cols):
            def draw(p, r, k0=k):
                for j, vv in enumerate(vehicles[k0:k0 + cols]):
                    b = k0 + j
                    present = np.nonzero(~np.isnan(c.margin_db[:, b]))[0]
                    labs = [str(order.index(i) + 1) for i in present]
                    hl = present.tolist().index(best) if best in present else -1
                    rr = QRectF(r.left() + j * (cw + 8 * S), r.top(), cw, ch)
                    ax = fig.draw_top_thumbnail(p, rr, S, vv, c.positions_m[present, b], labs, highlight=hl,
                                                title=f"{labels[b]}: {vv.name}", span_m=span)
                    if search is not None:
                        fig.draw_square(ax, search.best_positions_m[b][:2])

            f.add(ch, draw, 4)
        f.html("<p class='small'>Spots numbered by their row in the table below; ringed: the platform-common best "
               "spot.</p>", 4)
        head = ["#", "Spot"] + [esc(lab) for lab in labels] + ["Min dB", "Limited by"]
        moved = {fl.name for fl in names_at_several_places(list(vehicles))}
        rows = []
        for n, i in enumerate(c.order(), 1):
            cells = []
            for b in range(len(labels)):
                m = c.margin_db[i, b]
                cells.append("&ndash;" if np.isnan(m) else f"{m:+.1f} {esc(c.worst_wheel[i, b])}"
                             + ("*" if c.carried[i, b] else ""))
            rows.append([str(n), esc(c.spot_names[i]) + ("" if c.present_all[i] else " &dagger;")
                         + (" &Dagger;" if c.spot_names[i] in moved else ""), *cells,
                         f"<b>{c.min_margin_db[i]:+.1f}</b>", esc(labels[c.limiting_body[i]])])
        nb = len(labels)
        wcell = int(55 / max(nb, 1))
        f.table(head, rows, [4, 22] + [wcell] * nb + [8, 11], numeric=set(range(2, nb + 3)) | {0},
                caption="Worst-case margin (dB) and worst wheel per body",
                highlight={order.index(best)} if best >= 0 else set(), small=True)
        f.html("<p class='small'>&dagger; not on every body (cannot be the platform-common spot); * = landmark-relative "
               "spot carried from another file; &ndash; = not on this body. Min dB: the smallest margin over the bodies "
               "that have the spot. &Dagger; = the same name at different places on different bodies (below).</p>", 4)
        flags = name_flag_lines(c, vehicles)
        if flags:
            f.html("<p class='small'><b>Same name, different places:</b> " + " ".join(esc(t) + "." for t in flags)
                   + "</p>", 4)
        f.html(f"<table width='100%' cellpadding='5'><tr><td class='caution'><b>{esc(CAUTION)}</b></td></tr></table>",
               4)

    return render_pdf_atomic(out_pdf, "Body-style comparison", build,
                             header="Wheelreach body-style comparison  |  " + ", ".join(c.body_styles),
                             footer=f"{now.strftime('%Y-%m-%d')}  |  results approximate: confirm by simulation and "
                                    f"measurement")

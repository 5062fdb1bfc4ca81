"""Contour sheets for permit paperwork: a vector PDF drawn with Qt (QPdfWriter + QPainter).

Page 1: map, legend, title block, methods and cautions. Page 2 (and more if needed): radial
table with the ground sections crossed. Then (when the study has neighbours or night settings)
night limit and interference; then the operating periods' hours and one antenna-pattern page
per period (gui/patternsheet.py). All numbers come from the StudyResult.
"""

from __future__ import annotations

import dataclasses

import pathlib
import re

import numpy as np
from PySide6.QtCore import QMarginsF, QPointF, QRectF, Qt
from PySide6.QtGui import QColor, QFont, QPageLayout, QPageSize, QPainter, QPdfWriter, QPen

from mwreach.coverage import version
from mwreach.coverage.export import KM_PER_MI
from mwreach.coverage.geodesy import dms, inverse
from mwreach.coverage.report import citation, describe_max_power, summary_cells

from .patternsheet import period_pages
from .render import MapOptions, draw_legend, draw_map, fit_view, night_view, overview_view

__all__ = ["write_sheet", "table_bearings", "sheet_rows", "CAUTIONS", "methods_lines"]

DPI = 300
PT = DPI / 72.0  # device units per point

CAUTIONS = (
    "Planning estimate only: not a compliance determination or measured proof. Filings must "
    "follow the local regulator's rules and be checked by a licensed engineer. "
    "RF exposure near towers is not assessed on this sheet (mwreach exposure screens the tower "
    "fields only): fields near medium-wave towers are reactive "
    "near fields, and contact and induced currents (RF burns from guys, fences, vehicles) dominate "
    "the hazard (reference levels: FCC 47 CFR 1.1310, ICNIRP 2010). Tower work follows local "
    "codes and qualified practice."
)


def methods_lines(result) -> list[str]:
    spec = result.spec
    lines = [
        "Ground wave: smooth homogeneous earth, vertical polarisation (ITU-R P.368 theory): "
        "Sommerfeld–Norton flat earth with curvature correction below x = 0.1, "
        "Van der Pol–Bremmer/Wait residue series beyond.",
        "Mixed paths: " + ("Millington (ITU-R P.368 Annex 2)." if spec.mixed_path == "millington"
                           else "equivalent distance (Kirke; 47 CFR 73.183(d))."),
        f"Effective earth radius factor K = {spec.earth_k:.4g}; radials every "
        f"{spec.bearing_step_deg:g}°, distance step {spec.step_km:g} km, radial length "
        f"{result.max_km:.0f} km.",
        "Antenna: sinusoidal-current towers (47 CFR 73.160 vertical characteristic), power "
        "normalised over the upper hemisphere; losses per 47 CFR 73.150 convention.",
    ]
    inter = result.interference
    if inter is not None:
        s = inter.settings
        sky = "47 CFR 73.190 Formulas 1–2" if s.method == "cfr" else (
            "ITU-R P.1147 (constants from memory, see documentation)")
        lines.append(f"Night sky wave: {sky}, {s.percent} % of the time, layer "
                     f"{s.layer_height_km:g} km; RSS with {s.exclusion_percent} % exclusion.")
    return lines


def key_figures(result) -> list[str]:
    """The figures a reader looks for first: areas, community share, maximum powers and the
    worst margin (no scientific notation)."""
    from mwreach.coverage.report import format_kw, people_parts, people_text

    out = []
    plan = result.spec.interference
    protected = plan.protected_day_mv_m if plan is not None else 0.5
    pop = result.population
    for i, c in enumerate(result.contours):
        share = ("" if c.community_share is None
                 else f"; {100 * c.community_share:.1f} % of {result.spec.community.name}")
        people = "" if pop is None else f"; {people_text(pop['levels'][i])} people"
        mark = " (protected)" if c.level_mv_m == protected else ""
        out.append(f"{c.level_mv_m:g} mV/m{mark}: {c.area_km2:,.0f} km²{people}{share}")
    if pop is not None:
        parts = people_parts(pop, result.spec.community.name if result.spec.community else "")
        if parts:
            out.append("People: " + "; ".join(parts))
    inter = result.interference
    if inter is not None:
        for period, mp in inter.max_power.items():
            if mp is not None:
                out.append(f"Maximum {period} power: {format_kw(mp['max_power_kw'])} kW "
                           f"(now {format_kw(mp['current_power_kw'])} kW), limited by "
                           f"{mp['limiting_neighbour']}")
        rows = inter.neighbour_summary()
        failed = [r for r in rows if not r["passed"]]
        worst = inter.worst()
        if worst is not None:
            out.append(f"Worst D/U margin: {worst.margin_db:.1f} dB ({worst.neighbour}, "
                       f"{worst.kind})")
        out.append(f"Checks failing: {len(failed)} of {len(rows)}"
                   + (" — " + ", ".join(f"{r['neighbour']} ({r['kind']})" for r in failed)
                      if failed else ""))
    return out


def table_bearings(result) -> np.ndarray:
    """Bearings of the printed radial table: every ``table_step_deg`` plus the study's extras."""
    step = float(result.spec.output.get("table_step_deg", 10.0))
    regular = np.arange(0.0, 360.0 - 1e-9, step)
    return np.unique(np.round(np.concatenate([regular, result.spec.extra_bearings]), 6) % 360.0)


def sheet_rows(result) -> list[dict]:
    """Rows of the radial table as printed: bearing, per level (km, mi) text, ground sections."""
    rows = []
    b_all = result.radials.bearings_deg
    for b in table_bearings(result):
        j = int(np.argmin(np.abs((b_all - b + 180) % 360 - 180)))
        cells = []
        far = 0.0
        for c in result.contours:
            d = c.first_km[j]
            if np.isnan(d):
                cells.append(("n/r", "n/r"))
            elif np.isinf(d):
                cells.append((f">{result.max_km:.0f}", f">{result.max_km / KM_PER_MI:.0f}"))
                far = result.max_km
            else:
                mark = "*" if c.further[j] else ""
                cells.append((f"{d:.1f}{mark}", f"{d / KM_PER_MI:.1f}{mark}"))
                far = max(far, d)
        secs = [s for s in result.radials.sections[j] if s.start_km < max(far, 1.0)]
        text = "; ".join(
            f"{(s.ground.name or 'default')} {s.ground.sigma_ms_m:g} mS/m "
            f"{s.start_km:.1f}–{min(s.end_km, max(far, 1.0)):.1f}" for s in secs
        )
        rows.append({"bearing_deg": float(b_all[j]), "cells": cells, "sections": text})
    return rows


class _Doc:
    def __init__(self, device, paper: str, orientation: str, title: str):
        self.writer = QPdfWriter(device)
        self.writer.setResolution(DPI)
        size = QPageSize(QPageSize.A4 if paper == "A4" else QPageSize.Letter)
        orient = QPageLayout.Portrait if orientation == "portrait" else QPageLayout.Landscape
        self.writer.setPageLayout(QPageLayout(size, orient, QMarginsF(12, 12, 12, 12),
                                              QPageLayout.Millimeter))
        self.writer.setTitle(title)
        self.writer.setCreator(f"mwreach {version()}")
        self.painter = QPainter(self.writer)
        r = self.writer.pageLayout().paintRectPixels(DPI)
        self.page = QRectF(0, 0, r.width(), r.height())

    def font(self, pt: float, bold: bool = False) -> QFont:
        f = QFont("DejaVu Sans", 1)
        f.setPointSizeF(pt)
        f.setBold(bold)
        self.painter.setFont(f)
        return f

    def text(self, rect: QRectF, s: str, pt=8.0, bold=False, flags=None, colour=Qt.black) -> float:
        """Draw wrapped text; returns the height used."""
        self.font(pt, bold)
        self.painter.setPen(colour)
        fl = (Qt.AlignLeft | Qt.AlignTop | Qt.TextWordWrap) if flags is None else flags
        used = self.painter.boundingRect(rect, fl, s)
        self.painter.drawText(rect, fl, s)
        return used.height()

    def footer(self, n: int, total: int, title: str):
        r = QRectF(self.page.left(), self.page.bottom() - 12 * PT, self.page.width(), 12 * PT)
        self.painter.setPen(QPen(QColor(120, 120, 120), 0.5 * PT))
        self.painter.drawLine(QPointF(r.left(), r.top()), QPointF(r.right(), r.top()))
        self.text(r.adjusted(0, 2 * PT, 0, 0), f"{title} — mwreach {version()} — planning "
                  "estimate, see cautions", 7, flags=Qt.AlignLeft | Qt.AlignVCenter)
        self.text(r.adjusted(0, 2 * PT, 0, 0), f"Page {n} of {total}", 7,
                  flags=Qt.AlignRight | Qt.AlignVCenter)


def _antenna_text(station) -> str:
    day = _one_antenna_text(station)
    others = [f"{p} {len(getattr(station, p).array.elements)} towers"
              for p in ("night", "critical") if station.has_own(p)]
    return day.replace("single tower", "tower") + ("; " + ", ".join(others) if others else "")


def _one_antenna_text(station) -> str:
    els = station.antenna.elements
    if len(els) == 1:
        t = els[0].tower
        loss = (f", efficiency {t.efficiency:g}" if t.efficiency is not None
                else f", loss {t.loss_ohm:g} Ω")
        top = f" + {t.top_loading_deg:.1f}° top loading" if t.top_loading_deg else ""
        return f"single tower {t.height_deg:.1f}°{top}{loss}"
    return f"directional array of {len(els)} towers, rotation {station.antenna.rotation_deg:g}°"


def _saved(path) -> str:
    """When the study file was last saved (UTC), for the title block: the study's date, not
    the moment the sheet was printed."""
    import datetime

    try:
        t = pathlib.Path(path).stat().st_mtime
    except (OSError, TypeError):
        return "unknown"
    return datetime.datetime.fromtimestamp(t, datetime.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")


def _title_block(doc: _Doc, rect: QRectF, result) -> None:
    p = doc.painter
    spec = result.spec
    st = spec.station
    p.setPen(QPen(Qt.black, 1.0 * PT))
    p.setBrush(Qt.NoBrush)
    p.drawRect(rect)
    pad = 4 * PT
    inner = rect.adjusted(pad, pad, -pad, -pad)
    h = doc.text(inner, st.name, 13, bold=True)
    h += doc.text(inner.adjusted(0, h, 0, 0), spec.title, 9)
    s = result.antenna_summary
    left = [
        f"Frequency: {st.freq_khz:g} kHz",
        f"Power: {st.power_day_kw:g} kW day, {st.power_night_kw:g} kW night",
        f"Antenna: {_antenna_text(st)}",
        f"RMS field at 1 km: {s['rms_mv_m']:.1f} mV/m ({s['power_kw']:g} kW)",
    ]
    right = [
        f"Site (WGS84): {st.lat:.5f}, {st.lon:.5f}",
        f"{dms(st.lat, 'N', 'S')}, {dms(st.lon, 'E', 'W')}",
        f"Computed {result.created}; study saved {_saved(spec.path).split(' ')[0]}",
        f"mwreach {version()}; file {pathlib.Path(spec.path).name}",
    ]
    col = inner.adjusted(0, h + 2 * PT, 0, 0)
    half = col.width() / 2
    doc.text(QRectF(col.left(), col.top(), half - 4 * PT, col.height()), "\n".join(left), 8)
    doc.text(QRectF(col.left() + half, col.top(), half, col.height()), "\n".join(right), 8)


def _boxed(doc: _Doc, rect: QRectF, heading: str, body: str, pt=7.0) -> float:
    p = doc.painter
    pad = 3 * PT
    doc.font(pt)
    hh = doc.text(rect.adjusted(pad, pad, -pad, 0), heading, pt + 0.5, bold=True)
    bh = doc.text(rect.adjusted(pad, pad + hh + 1 * PT, -pad, 0), body, pt)
    total = hh + bh + 2 * pad + 1 * PT
    p.setPen(QPen(Qt.black, 0.7 * PT))
    p.setBrush(Qt.NoBrush)
    p.drawRect(QRectF(rect.left(), rect.top(), rect.width(), total))
    return total


def key_text(labels) -> str:
    """The numbered stations of a map (labels too crowded to stand beside their symbol)."""
    if not labels.key:
        return ""
    return ". Numbered: " + "; ".join(f"{n} {t}" for n, t in labels.key)


def _page_map(doc: _Doc, result):
    page = doc.page
    landscape = page.width() > page.height()
    title_h = 74 * PT
    _title_block(doc, QRectF(page.left(), page.top(), page.width(), title_h), result)
    top = page.top() + title_h + 6 * PT
    bottom_reserved = 16 * PT
    if landscape:
        side = min(page.height() - title_h - 6 * PT - bottom_reserved, page.width() * 0.62)
        map_rect = QRectF(page.left(), top, side, side)
        side_rect = QRectF(map_rect.right() + 8 * PT, top, page.right() - map_rect.right() - 8 * PT,
                           side)
    else:
        avail = page.bottom() - bottom_reserved - top
        side = min(page.width(), avail * 0.6)
        map_rect = QRectF(page.left(), top, page.width(), side)
        side_rect = QRectF(page.left(), map_rect.bottom() + 6 * PT, page.width(),
                           page.bottom() - bottom_reserved - map_rect.bottom() - 6 * PT)
    opts = MapOptions(font_pt=6.5, line_scale=PT,
                      distance_units=result.spec.output.get("distance_units", "km"))
    # two maps side by side: the whole study (site, contours, neighbours, failures) and a
    # detail framed on the protected contour
    gap = 6 * PT
    w = (map_rect.width() - gap) / 2
    h = min(w * 1.25, map_rect.height())
    overview = QRectF(map_rect.left(), map_rect.top(), w, h)
    detail = QRectF(map_rect.left() + w + gap, map_rect.top(), w, h)
    view, outside = overview_view(result, overview)
    doc.map_labels = [draw_map(doc.painter, view, result, opts)]
    caption = "Overview: all contours, the neighbours and every failed check"
    if outside:
        st = result.spec.station
        far = []
        for nb in outside:
            dist, az, _ = inverse(st.lat, st.lon, nb.lat, nb.lon)
            far.append(f"{nb.name} ({nb.freq_khz:g} kHz, {float(dist):.0f} km at "
                       f"{float(az):.0f}°)")
        caption += ". Beyond the frame: " + "; ".join(far)
    caption += key_text(doc.map_labels[0])
    doc.text(QRectF(overview.left(), overview.bottom() + 1 * PT, overview.width(), 30 * PT),
             caption, 6.5)
    levels = [c.level_mv_m for c in result.contours]
    plan = result.spec.interference
    protected = plan.protected_day_mv_m if plan is not None else 0.5
    detail_level = (levels.index(protected) if protected in levels
                    else (1 if len(levels) > 2 else 0))
    doc.map_labels.append(draw_map(doc.painter, fit_view(result, detail, detail_level), result,
                                   opts))
    doc.text(QRectF(detail.left(), detail.bottom() + 1 * PT, detail.width(), 20 * PT),
             f"Detail: framed on the {levels[detail_level]:g} mV/m contour"
             + key_text(doc.map_labels[-1]), 6.5)
    if not landscape:
        side_rect = QRectF(page.left(), overview.bottom() + 26 * PT, page.width(),
                           page.bottom() - bottom_reserved - overview.bottom() - 26 * PT)
    # legend, methods and cautions
    if landscape:
        used = draw_legend(doc.painter, side_rect, result, opts)
        y = side_rect.top() + used + 4 * PT
        y += _boxed(doc, QRectF(side_rect.left(), y, side_rect.width(), 400 * PT), "Key figures",
                    "\n".join(key_figures(result)), pt=7.2) + 4 * PT
        y += _boxed(doc, QRectF(side_rect.left(), y, side_rect.width(), 400 * PT), "Method",
                    "\n".join(methods_lines(result))) + 4 * PT
        _boxed(doc, QRectF(side_rect.left(), y, side_rect.width(), 400 * PT), "Cautions", CAUTIONS)
    else:
        half = side_rect.width() / 2 - 4 * PT
        used = draw_legend(doc.painter, QRectF(side_rect.left(), side_rect.top(), half,
                                               side_rect.height()), result, opts)
        _boxed(doc, QRectF(side_rect.left(), side_rect.top() + used + 4 * PT, half, 400 * PT),
               "Key figures", "\n".join(key_figures(result)), pt=7.2)
        x = side_rect.left() + half + 8 * PT
        h = _boxed(doc, QRectF(x, side_rect.top(), half, 400 * PT), "Method",
                   "\n".join(methods_lines(result)))
        _boxed(doc, QRectF(x, side_rect.top() + h + 4 * PT, half, 400 * PT), "Cautions", CAUTIONS)


#: Point size of the ground sections under each bearing of the radial table (readable when
#: printed; the table takes more pages rather than a smaller type).
SECTION_PT = 7.2


def _section_height(doc: _Doc, text: str, width: float) -> float:
    doc.font(SECTION_PT)
    fm = doc.painter.fontMetrics()
    r = fm.boundingRect(QRectF(0, 0, width, 1e6).toRect(), int(Qt.AlignLeft | Qt.TextWordWrap),
                        text)
    return max(r.height(), fm.height()) + 1.5 * PT


def _table_pages(doc: _Doc, result) -> list:
    """Split the radial table into page-sized chunks (rows grow with their ground sections,
    printed in full); returns callables drawing each page."""
    rows = sheet_rows(result)
    bw = 40 * PT
    line_h = 8.2 * PT
    heights = [line_h + _section_height(doc, r["sections"], doc.page.width() - bw) for r in rows]
    header_h = 52 * PT
    usable = doc.page.height() - header_h - 20 * PT
    # as many pages as needed, with the rows shared evenly between them
    n_pages = max(1, int(np.ceil(sum(heights) / usable)))
    while True:
        target = sum(heights) / n_pages
        chunks, cur, used = [], [], 0.0
        for r, h in zip(rows, heights):
            if cur and (used + h > usable or (used + h / 2 > target and len(chunks) < n_pages - 1)):
                chunks.append(cur)
                cur, used = [], 0.0
            cur.append((r, h))
            used += h
        if cur:
            chunks.append(cur)
        if len(chunks) <= n_pages or n_pages > 50:
            break
        n_pages += 1
    return [lambda chunk=chunk, k=k: _page_table(doc, result, chunk, k, len(chunks))
            for k, chunk in enumerate(chunks)]


def _page_table(doc: _Doc, result, rows, k: int, nk: int):
    page = doc.page
    p = doc.painter
    miles = result.spec.output.get("distance_units", "km") == "mi"
    first, second = ("mi", "km") if miles else ("km", "mi")
    cont = f" (continued, {k + 1} of {nk})" if nk > 1 else ""
    h = doc.text(QRectF(page.left(), page.top(), page.width(), 20 * PT),
                 f"Radial table — distance to each contour along the bearing{cont}", 11, bold=True)
    note = (f"Distances in {first} (then {second}) from the site along geodesics, bearings true. "
            "n/r (not reached): the field is already below that level one wavelength from the "
            "tower, where the calculation starts. *: the field rises above the level again "
            "further out, over better ground such as water (radials.csv lists where). Under each "
            "bearing: the ground along it, as zone name, conductivity and from–to km.")
    h += doc.text(QRectF(page.left(), page.top() + h + 2 * PT, page.width(), 30 * PT), note, 7)
    y = page.top() + h + 6 * PT
    levels = result.contours
    bw = 40 * PT
    cw = (page.width() - bw) / max(len(levels), 1)
    doc.font(7.5, True)
    p.setPen(Qt.black)
    p.drawText(QRectF(page.left(), y, bw, 12 * PT), Qt.AlignLeft | Qt.AlignVCenter, "Bearing")
    for i, c in enumerate(levels):
        p.drawText(QRectF(page.left() + bw + i * cw, y, cw, 12 * PT), Qt.AlignCenter,
                   f"{c.level_mv_m:g} mV/m: {first} | {second}")
    y += 13 * PT
    p.setPen(QPen(Qt.black, 0.6 * PT))
    p.drawLine(QPointF(page.left(), y), QPointF(page.right(), y))
    line_h = 8.2 * PT
    for n, (r, row_h) in enumerate(rows):
        if n % 2 == 0:
            p.fillRect(QRectF(page.left(), y, page.width(), row_h), QColor(242, 242, 242))
        doc.font(7.5)
        p.setPen(Qt.black)
        p.drawText(QRectF(page.left(), y, bw, line_h), Qt.AlignLeft | Qt.AlignVCenter,
                   f"{r['bearing_deg']:g}°")
        for i, (km, mi) in enumerate(r["cells"]):
            a, b = (mi, km) if miles else (km, mi)
            p.drawText(QRectF(page.left() + bw + i * cw, y, cw, line_h), Qt.AlignCenter,
                       f"{a} | {b}")
        doc.font(SECTION_PT)
        p.setPen(QColor(50, 50, 50))
        p.drawText(QRectF(page.left() + bw, y + line_h, page.width() - bw, row_h - line_h),
                   Qt.AlignLeft | Qt.AlignTop | Qt.TextWordWrap, r["sections"])
        y += row_h


def _night_pages(doc: _Doc, result) -> list:
    """The night and interference page, and a continuation page for the ratio table and the
    notes when everything would not fit on one page."""
    inter = result.interference
    page = doc.page
    landscape = page.width() > page.height()
    map_h = page.height() * (0.42 if landscape else 0.30)
    rows = len(inter.neighbour_summary())
    text_h = 60 * PT if landscape else 110 * PT  # the summary lines (beside the map if wide)
    need = (30 * PT + max(text_h, map_h + 14 * PT) + (0 if landscape else text_h) + 26 * PT
            + rows * 10 * PT + 30 * PT + 8 * 2 * 9 * PT + len(inter.notes) * 2 * 9 * PT
            + 80 * PT)  # the cautions box
    if need <= page.height():
        return [lambda: _page_night(doc, result, True)]
    return [lambda: _page_night(doc, result, False), lambda: _page_night_more(doc, result)]


def _page_night_more(doc: _Doc, result):
    page = doc.page
    y = page.top()
    y += doc.text(QRectF(page.left(), y, page.width(), 20 * PT),
                  "Night service and interference (continued)", 11, bold=True) + 4 * PT
    y = _ratios_and_notes(doc, result, y)
    _boxed(doc, QRectF(page.left(), y, page.width(), 300 * PT), "Cautions", CAUTIONS)


OFFSET_NAMES = {0: "co-channel", 1: "first adjacent", 2: "second adjacent", 3: "third adjacent"}


def _ratios_and_notes(doc: _Doc, result, y: float) -> float:
    page = doc.page
    inter = result.interference
    y += doc.text(QRectF(page.left(), y, page.width(), 14 * PT), "Protection ratios used", 9.5,
                  bold=True) + 2 * PT
    lines, unread = [], []
    for r in inter.protection.rows():
        source, verified = citation(r["source"])
        if not verified:
            unread.append(f"{r['period']} {OFFSET_NAMES.get(r['offset_channels'], '')}")
        head = f"{r['period'].capitalize()}, {OFFSET_NAMES.get(r['offset_channels'], '')}: "
        if r["ratio_db"] is None:  # the source says what stands instead of a ratio
            source = re.sub(r"^(?:no ratio: )?(.*?) — (?:second|third) adjacent: ", r"\1 — ",
                            source)
            lines.append(head + source[0].lower() + source[1:] + ("" if verified else " †"))
        else:
            lines.append(head + f"{r['ratio_db']:g} dB — {source}" + ("" if verified else " †"))
    prot = "\n".join(lines)
    if unread:
        prot += ("\n† Not yet checked against the published text (recalled values; listed "
                 "once here): " + ", ".join(unread) + ".")
    y += doc.text(QRectF(page.left(), y, page.width(), 400 * PT),
                  f"Channel raster {inter.protection.raster_khz:g} kHz.\n" + prot, 7.5) + 8 * PT
    if inter.notes:
        y += doc.text(QRectF(page.left(), y, page.width(), 14 * PT), "Notes", 9.5, bold=True)
        y += doc.text(QRectF(page.left(), y + 2 * PT, page.width(), 400 * PT),
                      "\n".join(inter.notes), 7.5) + 8 * PT
    return y


def _page_night(doc: _Doc, result, with_ratios: bool = True):
    page = doc.page
    p = doc.painter
    inter = result.interference
    n = inter.night
    y = page.top()
    y += doc.text(QRectF(page.left(), y, page.width(), 20 * PT), "Night service and interference",
                  11, bold=True) + 4 * PT
    s = inter.settings
    method = "47 CFR 73.190" if s.method == "cfr" else "ITU-R P.1147"
    lines = [
        f"Night power {n.power_kw:g} kW. Interfering sky waves: {method}, {s.percent} % of the "
        f"time; RSS of (protection ratio × field) with {s.exclusion_percent} % exclusion; floor "
        f"{s.floor_mv_m:g} mV/m.",
        f"Night limit (usable field): {n.limit_mv_m.min():.2f} to {n.limit_mv_m.max():.2f} mV/m "
        f"(median {np.median(n.limit_mv_m):.2f} mV/m) over {n.bearings_deg.size} bearings.",
        f"Night service contour: {np.nanmin(n.contour_km):.1f} to {np.nanmax(n.contour_km):.1f} km "
        f"from the site, area {n.area_km2:.0f} km².",
    ]
    for period, mp in inter.max_power.items():
        lines.append(describe_max_power(period, mp) + ".")
    landscape = page.width() > page.height()
    text_w = page.width() * (0.5 if landscape else 1.0)
    y_text = y
    y += doc.text(QRectF(page.left(), y, text_w, 200 * PT), "\n".join(lines), 8) + 8 * PT
    # a map of the night: the service contour, the neighbours with their protected contours and
    # every failed check
    if landscape:
        map_rect = QRectF(page.left() + text_w + 8 * PT, y_text, page.width() - text_w - 8 * PT,
                          page.height() * 0.42)
    else:
        map_rect = QRectF(page.left(), y, page.width(), page.height() * 0.30)
    opts = MapOptions(font_pt=6.5, line_scale=PT, contours=False, legend=False,
                      distance_units=result.spec.output.get("distance_units", "km"))
    # two frames: the neighbours at their own scale, and the night service contour with the
    # failed checks near it (at neighbour scale a 10 km contour is a dot)
    gap = 6 * PT
    half = (map_rect.width() - gap) / 2
    wide = QRectF(map_rect.left(), map_rect.top(), half, map_rect.height())
    near = QRectF(map_rect.left() + half + gap, map_rect.top(), half, map_rect.height())
    view, _outside = overview_view(result, wide)
    doc.map_labels = getattr(doc, "map_labels", []) + [draw_map(p, view, result, opts)]
    near_opts = dataclasses.replace(opts, graticule=False)
    doc.map_labels.append(draw_map(p, night_view(result, near), result, near_opts))
    caption_h = doc.text(
        QRectF(map_rect.left(), map_rect.bottom() + 1 * PT, map_rect.width(), 24 * PT),
        "Left: the neighbours with their protected contours (day solid, night dashed). Right: "
        "the night service contour (dash-dot) and the failed checks (red ×) near it"
        + key_text(doc.map_labels[-2]) + key_text(doc.map_labels[-1]) + ".", 6.5)
    y = max(y, map_rect.bottom() + caption_h + 4 * PT)

    y += doc.text(QRectF(page.left(), y, page.width(), 14 * PT), "Worst D/U margin per neighbour",
                  9.5, bold=True) + 2 * PT
    summary = [(row, summary_cells(row)) for row in inter.neighbour_summary()]
    table = [[row["neighbour"], row["kind"], c["offset"], c["ratio"], c["value"], c["by"],
              c["result"], c["at"]] for row, c in summary]
    cols = _fit_columns(doc, ["Neighbour", "Check", "Offset", "Ratio dB", "Worst margin", "By",
                              "Result", "At (lat, lon)"], table, page.width(), 7.5)
    x = page.left()
    doc.font(7.5, True)
    p.setPen(Qt.black)
    for name, w in cols:
        p.drawText(QRectF(x, y, w * page.width(), 11 * PT), Qt.AlignLeft | Qt.AlignVCenter, name)
        x += w * page.width()
    y += 12 * PT
    p.setPen(QPen(Qt.black, 0.6 * PT))
    p.drawLine(QPointF(page.left(), y), QPointF(page.right(), y))
    for k, ((row, _c), vals) in enumerate(zip(summary, table)):
        if k % 2 == 0:
            p.fillRect(QRectF(page.left(), y, page.width(), 10 * PT), QColor(242, 242, 242))
        x = page.left()
        doc.font(7.5, not row["passed"])
        for (_name, w), v in zip(cols, vals):
            p.setPen(QColor("#d7191c") if not row["passed"] else Qt.black)
            p.drawText(QRectF(x, y, w * page.width(), 10 * PT), Qt.AlignLeft | Qt.AlignVCenter, v)
            x += w * page.width()
        y += 10 * PT
    y += 8 * PT
    if with_ratios:
        y = _ratios_and_notes(doc, result, y)
        _boxed(doc, QRectF(page.left(), y, page.width(), 300 * PT), "Cautions", CAUTIONS)


def _fit_columns(doc: _Doc, headers, rows, width: float, pt: float):
    """(header, share of ``width``) per column: each column as wide as its longest text in bold
    (a failed row is bold) plus a gap, the room left over shared in proportion."""
    from PySide6.QtGui import QFontMetricsF

    fm = QFontMetricsF(doc.font(pt, True))
    gap = 6 * PT
    need = [max([fm.horizontalAdvance(h)] + [fm.horizontalAdvance(str(r[i])) for r in rows]) + gap
            for i, h in enumerate(headers)]
    total = sum(need)
    scale = width / total  # > 1 shares the spare room; < 1 (too narrow) shrinks all alike
    return [(h, n * scale / width) for h, n in zip(headers, need)]


def write_sheet(result, path, paper: str | None = None, orientation: str | None = None) -> int:
    """Write the contour sheet PDF; returns the number of pages."""
    path = pathlib.Path(path)
    paper = paper or result.spec.output.get("paper", "A4")
    orientation = orientation or result.spec.output.get("orientation", "portrait")
    if paper not in ("A4", "Letter"):
        raise ValueError(f"paper must be 'A4' or 'Letter' (got {paper!r})")
    if orientation not in ("portrait", "landscape"):
        raise ValueError(f"orientation must be 'portrait' or 'landscape' (got {orientation!r})")
    from PySide6.QtCore import QBuffer, QByteArray, QIODevice

    from mwreach.coverage.safefiles import atomic_write, refuse_overwriting_inputs, writable_folder

    if path.is_dir():
        raise ValueError(f"{path}: is a folder; give a file name for the sheet")
    refuse_overwriting_inputs(path.parent, [path.name], result.spec.input_files)
    writable_folder(path.parent)  # fail before drawing, in one line
    data = QByteArray()
    buf = QBuffer(data)
    buf.open(QIODevice.WriteOnly)
    doc = _Doc(buf, paper, orientation, result.spec.title)
    pages = [lambda: _page_map(doc, result)] + _table_pages(doc, result)
    if result.interference is not None and result.interference.night is not None:
        pages += _night_pages(doc, result)
    pages += period_pages(doc, result, PT)
    from .exposureplan import exposure_pages

    pages += exposure_pages(doc, result, PT)
    try:
        for i, draw in enumerate(pages, 1):
            if i > 1:
                doc.writer.newPage()
            draw()
            doc.footer(i, len(pages), result.spec.station.name)
    finally:
        doc.painter.end()
        buf.close()

    def check(pdf: bytes):
        if not (pdf.startswith(b"%PDF-") and b"%%EOF" in pdf[-1024:]):
            raise ValueError(f"{path}: not saved; the PDF read back incomplete")

    # the sheet is drawn in memory and written in one step: a failure keeps the old sheet
    atomic_write(path, bytes(data.data()), check=check)
    return len(pages)

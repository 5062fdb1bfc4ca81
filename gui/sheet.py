"""Contour sheets for permit paperwork: a vector PDF drawn with Qt (QPdfWriter + QPainter).

Page 1: map, legend, title block, methods and cautions. Page 2 (and more if needed): radial
table with the ground sections crossed. Last page (when the study has neighbours or night
settings): night limit and interference. All numbers come from the StudyResult.
"""

from __future__ import annotations

import pathlib

import numpy as np
from PySide6.QtCore import QMarginsF, QPointF, QRectF, Qt
from PySide6.QtGui import QColor, QFont, QPageLayout, QPageSize, QPainter, QPdfWriter, QPen

from mwreach.coverage.export import KM_PER_MI, version
from mwreach.coverage.geodesy import dms
from mwreach.coverage.interference import describe_max_power, summary_cells

from .render import MapOptions, draw_legend, draw_map, fit_view

__all__ = ["write_sheet", "table_bearings", "sheet_rows", "CAUTIONS", "methods_lines"]

DPI = 300
PT = DPI / 72.0  # device units per point

CAUTIONS = (
    "Planning estimate only: not a compliance determination or measured proof. Filings must "
    "follow the local regulator's rules and be checked by a licensed engineer. "
    "RF exposure near towers is not assessed here: fields near medium-wave towers are reactive "
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
    els = station.antenna.elements
    if len(els) == 1:
        t = els[0].tower
        loss = (f", efficiency {t.efficiency:g}" if t.efficiency is not None
                else f", loss {t.loss_ohm:g} Ω")
        top = f" + {t.top_loading_deg:.1f}° top loading" if t.top_loading_deg else ""
        return f"single tower {t.height_deg:.1f}°{top}{loss}"
    return f"directional array of {len(els)} towers, rotation {station.antenna.rotation_deg:g}°"


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
        f"Study date: {result.created}",
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
    # two maps side by side: the whole study (lowest level) and a detail around the site
    gap = 6 * PT
    w = (map_rect.width() - gap) / 2
    h = min(w * 1.4, map_rect.height())
    overview = QRectF(map_rect.left(), map_rect.top(), w, h)
    detail = QRectF(map_rect.left() + w + gap, map_rect.top(), w, h)
    detail_level = 1 if len(result.contours) > 2 else 0
    for rect, level, caption in (
        (overview, None, "Overview: all contours"),
        (detail, detail_level, "Detail around the site"),
    ):
        draw_map(doc.painter, fit_view(result, rect, level), result, opts)
        doc.text(QRectF(rect.left(), rect.bottom() + 1 * PT, rect.width(), 10 * PT), caption, 7)
    if not landscape:
        side_rect = QRectF(page.left(), overview.bottom() + 12 * PT, page.width(),
                           page.bottom() - bottom_reserved - overview.bottom() - 12 * PT)
    # legend, methods and cautions
    if landscape:
        used = draw_legend(doc.painter, side_rect, result, opts)
        y = side_rect.top() + used + 4 * PT
        y += _boxed(doc, QRectF(side_rect.left(), y, side_rect.width(), 400 * PT), "Method",
                    "\n".join(methods_lines(result))) + 4 * PT
        _boxed(doc, QRectF(side_rect.left(), y, side_rect.width(), 400 * PT), "Cautions", CAUTIONS)
    else:
        half = side_rect.width() / 2 - 4 * PT
        draw_legend(doc.painter, QRectF(side_rect.left(), side_rect.top(), half, side_rect.height()),
                    result, opts)
        x = side_rect.left() + half + 8 * PT
        h = _boxed(doc, QRectF(x, side_rect.top(), half, 400 * PT), "Method",
                   "\n".join(methods_lines(result)))
        _boxed(doc, QRectF(x, side_rect.top() + h + 4 * PT, half, 400 * PT), "Cautions", CAUTIONS)


def _table_pages(doc: _Doc, result) -> list:
    """Split the radial table into page-sized chunks; returns callables drawing each page."""
    rows = sheet_rows(result)
    row_h = 2 * 8.2 * PT  # two text lines: distances and sections
    header_h = 40 * PT
    usable = doc.page.height() - header_h - 20 * PT
    per_page = max(1, int(usable // row_h))
    chunks = [rows[i:i + per_page] for i in range(0, len(rows), per_page)]
    return [lambda chunk=chunk, k=k: _page_table(doc, result, chunk, k, len(chunks))
            for k, chunk in enumerate(chunks)]


def _page_table(doc: _Doc, result, rows, k: int, nk: int):
    page = doc.page
    p = doc.painter
    cont = f" (continued, {k + 1} of {nk})" if nk > 1 else ""
    h = doc.text(QRectF(page.left(), page.top(), page.width(), 20 * PT),
                 f"Radial table — distance to each contour along the bearing{cont}", 11, bold=True)
    note = ("Distances in km and mi from the site along geodesics (bearings true). n/r: level not "
            "reached beyond one wavelength. *: the field rises above the level again further out "
            "(see radials.csv). Ground sections: name, conductivity, from–to km.")
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
                   f"{c.level_mv_m:g} mV/m: km | mi")
    y += 13 * PT
    p.setPen(QPen(Qt.black, 0.6 * PT))
    p.drawLine(QPointF(page.left(), y), QPointF(page.right(), y))
    row_h = 2 * 8.2 * PT
    for n, r in enumerate(rows):
        if n % 2 == 0:
            p.fillRect(QRectF(page.left(), y, page.width(), row_h), QColor(242, 242, 242))
        doc.font(7.5)
        p.setPen(Qt.black)
        p.drawText(QRectF(page.left(), y, bw, row_h / 2), Qt.AlignLeft | Qt.AlignVCenter,
                   f"{r['bearing_deg']:g}°")
        for i, (km, mi) in enumerate(r["cells"]):
            p.drawText(QRectF(page.left() + bw + i * cw, y, cw, row_h / 2), Qt.AlignCenter,
                       f"{km} | {mi}")
        doc.font(6.2)
        p.setPen(QColor(70, 70, 70))
        fm = p.fontMetrics()
        text = fm.elidedText(r["sections"], Qt.ElideRight, int(page.width() - bw))
        p.drawText(QRectF(page.left() + bw, y + row_h / 2, page.width() - bw, row_h / 2),
                   Qt.AlignLeft | Qt.AlignVCenter, text)
        y += row_h


def _page_night(doc: _Doc, result):
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
    y += doc.text(QRectF(page.left(), y, page.width(), 200 * PT), "\n".join(lines), 8) + 8 * PT

    y += doc.text(QRectF(page.left(), y, page.width(), 14 * PT), "Worst D/U margin per neighbour",
                  9.5, bold=True) + 2 * PT
    cols = [("Neighbour", 0.2), ("Check", 0.16), ("Offset", 0.06), ("Ratio dB", 0.07),
            ("Worst margin", 0.15), ("By", 0.1), ("Result", 0.08), ("At (lat, lon)", 0.18)]
    x = page.left()
    doc.font(7.5, True)
    p.setPen(Qt.black)
    for name, w in cols:
        p.drawText(QRectF(x, y, w * page.width(), 11 * PT), Qt.AlignLeft | Qt.AlignVCenter, name)
        x += w * page.width()
    y += 12 * PT
    p.setPen(QPen(Qt.black, 0.6 * PT))
    p.drawLine(QPointF(page.left(), y), QPointF(page.right(), y))
    for k, row in enumerate(inter.neighbour_summary()):
        if k % 2 == 0:
            p.fillRect(QRectF(page.left(), y, page.width(), 10 * PT), QColor(242, 242, 242))
        c = summary_cells(row)
        vals = [row["neighbour"], row["kind"], c["offset"], c["ratio"], c["value"], c["by"],
                c["result"], c["at"]]
        x = page.left()
        doc.font(7.5, not row["passed"])
        for (_name, w), v in zip(cols, vals):
            p.setPen(QColor("#d7191c") if not row["passed"] else Qt.black)
            p.drawText(QRectF(x, y, w * page.width(), 10 * PT), Qt.AlignLeft | Qt.AlignVCenter, v)
            x += w * page.width()
        y += 10 * PT
    y += 8 * PT
    y += doc.text(QRectF(page.left(), y, page.width(), 14 * PT), "Protection ratios used", 9.5,
                  bold=True) + 2 * PT
    prot = "\n".join(
        f"{r['period']}, offset {r['offset_channels']} channel(s): "
        + ("none — contributes nothing" if r["ratio_db"] is None else f"{r['ratio_db']:g} dB")
        + (f" — {r['source']}" if r["ratio_db"] is not None else "")
        for r in inter.protection.rows())
    y += doc.text(QRectF(page.left(), y, page.width(), 200 * PT),
                  f"Channel raster {inter.protection.raster_khz:g} kHz.\n" + prot, 7.5) + 8 * PT
    if inter.notes:
        y += doc.text(QRectF(page.left(), y, page.width(), 14 * PT), "Notes", 9.5, bold=True)
        y += doc.text(QRectF(page.left(), y + 2 * PT, page.width(), 200 * PT),
                      "\n".join(inter.notes), 7.5) + 8 * PT
    _boxed(doc, QRectF(page.left(), y, page.width(), 300 * PT), "Cautions", CAUTIONS)


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

    from mwreach.coverage.safefiles import atomic_write, writable_folder

    if path.is_dir():
        raise ValueError(f"{path}: is a folder; give a file name for the sheet")
    writable_folder(path.parent)  # fail before drawing, in one line
    data = QByteArray()
    buf = QBuffer(data)
    buf.open(QIODevice.WriteOnly)
    doc = _Doc(buf, paper, orientation, result.spec.title)
    pages = [lambda: _page_map(doc, result)] + _table_pages(doc, result)
    if result.interference is not None and result.interference.night is not None:
        pages.append(lambda: _page_night(doc, result))
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

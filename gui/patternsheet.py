"""Sheet pages for the operating periods: the hours (sunrise, sunset, critical hours) and one
page per period with its antenna, its horizontal pattern and the tabulation 47 CFR 73.150(b)(1)
asks for (every 5° of elevation to 60°). Every number comes from the core."""

from __future__ import annotations

import numpy as np
from PySide6.QtCore import QPointF, QRectF, Qt
from PySide6.QtGui import QColor, QPainterPath, QPen

from mwreach.coverage.antenna import height_m
from mwreach.coverage.export import sun_summary
from mwreach.coverage.pattern import elevation_table
from mwreach.coverage.report import describe_period, format_kw
from mwreach.coverage.station import period_rows

__all__ = ["period_pages", "CURVE_STYLES"]

#: curve name → (colour, dashed) on the polar plot; the legend says the same
CURVE_STYLES = {"theoretical": ("#7f7f7f", True), "standard": ("#2166ac", False),
                "augmented": ("#b2182b", False)}


def period_pages(doc, result, pt: float) -> list:
    """Callables drawing the hours page and one pattern page per operating period."""
    rows = period_rows(result.spec.station)
    return ([lambda: _page_hours(doc, result, rows, pt)]
            + [lambda row=row: _page_pattern(doc, result, row, pt) for row in rows])


def _page_hours(doc, result, rows, pt):
    page = doc.page
    p = doc.painter
    y = page.top()
    y += doc.text(QRectF(page.left(), y, page.width(), 20 * pt),
                  "Operating periods and hours", 11, bold=True) + 4 * pt
    lines = "\n".join(describe_period(r) for r in rows)
    y += doc.text(QRectF(page.left(), y, page.width(), 60 * pt), lines, 8) + 6 * pt
    sun = sun_summary(result.spec)
    note = (f"Sunrise and sunset at the site on day {sun['day_of_month']} of each month of "
            f"{sun['year']}, in {sun['clock']}; the sun's centre 0.833° below a level horizon "
            "(Meeus, Astronomical Algorithms, ch. 25 and 28; about a minute). Night runs from "
            "sunset to sunrise; the critical hours are the two hours after sunrise and the two "
            "before sunset (47 CFR 73.187(a)).")
    y += doc.text(QRectF(page.left(), y, page.width(), 40 * pt), note, 7.5) + 6 * pt
    head = ["Month", "Sunrise", "Sunset", "Critical hours, morning", "Critical hours, evening"]
    local = sun["utc_offset_h"] is not None
    widths = [0.12, 0.14, 0.14, 0.30, 0.30]
    doc.font(8, True)
    x = page.left()
    for h, w in zip(head, widths):
        p.drawText(QRectF(x, y, w * page.width(), 12 * pt), Qt.AlignLeft | Qt.AlignVCenter, h)
        x += w * page.width()
    y += 13 * pt
    p.setPen(QPen(Qt.black, 0.6 * pt))
    p.drawLine(QPointF(page.left(), y), QPointF(page.right(), y))
    months = ("January", "February", "March", "April", "May", "June", "July", "August",
              "September", "October", "November", "December")
    for i, m in enumerate(sun["months"]):
        if i % 2 == 0:
            p.fillRect(QRectF(page.left(), y, page.width(), 10 * pt), QColor(242, 242, 242))
        cells = [months[m["month"] - 1],
                 m["sunrise_local"] if local else m["sunrise_utc"],
                 m["sunset_local"] if local else m["sunset_utc"],
                 m["critical_morning"], m["critical_evening"]]
        doc.font(8)
        p.setPen(Qt.black)
        x = page.left()
        for c, w in zip(cells, widths):
            p.drawText(QRectF(x, y, w * page.width(), 10 * pt), Qt.AlignLeft | Qt.AlignVCenter, c)
            x += w * page.width()
        y += 10 * pt


def _towers_text(array, freq_khz) -> str:
    out = []
    for i, e in enumerate(array.elements, 1):
        t = e.tower
        loss = (f"efficiency {t.efficiency:g}" if t.efficiency is not None
                else f"loss {t.loss_ohm:g} Ω")
        top = f" + {t.top_loading_deg:.1f}° top loading" if t.top_loading_deg else ""
        out.append(f"Tower {i}: {t.height_deg:.1f}° ({float(height_m(t.height_deg, freq_khz)):.1f}"
                   f" m){top}, field ratio {e.field_ratio:g}, phase {e.phase_deg:g}°, spacing "
                   f"{e.spacing_deg:g}°, orientation {e.orientation_deg:g}°, {loss}")
    if array.rotation_deg:
        out.append(f"Array rotated {array.rotation_deg:g}° clockwise")
    return "\n".join(out)


def _curves(station, period, power):
    """The horizontal curves to overlay, every degree [mV/m at 1 km]."""
    rad = station.radiator(period)
    arr = station.facility(period).array
    az = np.arange(0.0, 361.0)
    curves = {"theoretical": arr.field_mv_m(az, 0.0, power)}
    if rad.kind == "standard":
        curves["standard"] = np.sqrt(power / rad.power_kw) * rad.unaugmented_mv_m(az, 0.0)
        if rad.augmentations:
            curves["augmented"] = rad.field_mv_m(az, 0.0, power)
    return az, curves


def _polar(doc, rect: QRectF, az, curves, pt):
    """A polar plot of ``curves`` in ``rect``: north up, rings at quarters of the largest."""
    p = doc.painter
    size = min(rect.width(), rect.height())
    r_px = size / 2 - 14 * pt
    c = QPointF(rect.left() + rect.width() / 2, rect.top() + size / 2)
    r_max = float(max(v.max() for v in curves.values())) or 1.0
    p.setBrush(Qt.NoBrush)
    for frac in (0.25, 0.5, 0.75, 1.0):
        p.setPen(QPen(QColor(190, 190, 190), 0.5 * pt))
        p.drawEllipse(c, frac * r_px, frac * r_px)
        doc.font(6)
        p.setPen(QColor(110, 110, 110))
        p.drawText(QPointF(c.x() + 2 * pt, c.y() - frac * r_px + 7 * pt), f"{frac * r_max:.0f}")
    for ang in range(0, 360, 30):
        a = np.radians(ang)
        p.setPen(QPen(QColor(210, 210, 210), 0.5 * pt))
        p.drawLine(c, QPointF(c.x() + r_px * np.sin(a), c.y() - r_px * np.cos(a)))
        doc.font(6.5)
        p.setPen(QColor(90, 90, 90))
        lx, ly = c.x() + (r_px + 8 * pt) * np.sin(a), c.y() - (r_px + 8 * pt) * np.cos(a)
        p.drawText(QRectF(lx - 12 * pt, ly - 5 * pt, 24 * pt, 10 * pt), Qt.AlignCenter, f"{ang}°")
    t = np.radians(az)
    for name, e in curves.items():
        colour, dashed = CURVE_STYLES[name]
        pen = QPen(QColor(colour), 1.2 * pt)
        if dashed:
            pen.setStyle(Qt.DashLine)
        p.setPen(pen)
        path = QPainterPath()
        x, y = c.x() + e * r_px / r_max * np.sin(t), c.y() - e * r_px / r_max * np.cos(t)
        path.moveTo(float(x[0]), float(y[0]))
        for xi, yi in zip(x[1:], y[1:]):
            path.lineTo(float(xi), float(yi))
        p.drawPath(path)
    return size


def _page_pattern(doc, result, row, pt):
    page = doc.page
    p = doc.painter
    st = result.spec.station
    period, power = row["period"], row["power_kw"]
    shown_power = power if power > 0 else 1.0
    kind = ("non-directional" if row["towers"] == 1 else
            f"{row['pattern']} pattern" + (" (47 CFR 73.150)" if row["pattern"] == "standard"
                                           else ""))
    y = page.top()
    y += doc.text(QRectF(page.left(), y, page.width(), 20 * pt),
                  f"Antenna pattern — {period}: {kind}", 11, bold=True) + 3 * pt
    fac = st.facility(period)
    lines = [describe_period(row)]
    if power <= 0:
        lines.append("No power in this period: the pattern is shown at 1 kW.")
    for a in row.get("augmentations") or ():
        lines.append(f"Augmentation at {a['azimuth_deg']:g}°, span {a['span_deg']:g}°: "
                     f"{a['field_mv_m']:g} mV/m at 1 km, A = {a['a_mv_m_sq']:.1f} (mV/m)² "
                     "(47 CFR 73.152)")
    lines.append(_towers_text(fac.array, st.freq_khz))
    y += doc.text(QRectF(page.left(), y, page.width(), 120 * pt), "\n".join(lines), 7.5) + 4 * pt
    landscape = page.width() > page.height()
    az, curves = _curves(st, period, shown_power)
    if landscape:
        plot = QRectF(page.left(), y, page.width() * 0.38, page.bottom() - y - 40 * pt)
        table = QRectF(page.left() + page.width() * 0.40, y, page.width() * 0.60,
                       page.bottom() - y - 16 * pt)
    else:
        side = min(page.width() * 0.55, 210 * pt)
        plot = QRectF(page.left() + (page.width() - side) / 2, y, side, side)
        table = QRectF(page.left(), y + side + 18 * pt, page.width(),
                       page.bottom() - y - side - 30 * pt)
    used = _polar(doc, plot, az, curves, pt)
    legend = "; ".join(f"{name} ({'grey dashed' if name == 'theoretical' else colour_name})"
                       for name, colour_name in (("theoretical", ""), ("standard", "blue"),
                                                 ("augmented", "red")) if name in curves)
    doc.text(QRectF(plot.left(), plot.top() + used, plot.width(), 14 * pt),
             f"Horizontal plane, mV/m at 1 km at {format_kw(shown_power)} kW: {legend}", 6.5,
             flags=Qt.AlignHCenter | Qt.AlignTop | Qt.TextWordWrap)
    _tabulation(doc, table, st, period, shown_power, result.spec.output, pt)


def _tabulation(doc, rect: QRectF, st, period, power, output, pt):
    """The pattern the rules use, azimuth × elevation (0–60° every 5°) [mV/m at 1 km]."""
    p = doc.painter
    rad = st.radiator(period)
    single = len(st.facility(period).array.elements) == 1
    step = float(output.get("table_step_deg", 10.0))
    azimuths = np.array([0.0]) if single else np.arange(0.0, 360.0 - 1e-9, step)
    t = elevation_table(rad, power, azimuths)
    what = "pattern" if single else ("standard pattern" if rad.kind == "standard"
                                     else "theoretical pattern")
    y = rect.top()
    y += doc.text(QRectF(rect.left(), y, rect.width(), 30 * pt),
                  f"Tabulated {what}, mV/m at 1 km, by azimuth (rows, degrees true) and "
                  "elevation angle (columns)" + (": the same at every azimuth" if single else ""),
                  7.5, bold=True) + 2 * pt
    cols = ["Az."] + [f"{e:g}°" for e in t["elevation_deg"]]
    n = len(cols)
    cw = rect.width() / n
    rows = len(azimuths) + 1  # + RMS row
    line_h = min(9 * pt, (rect.bottom() - y - 12 * pt) / rows)
    pt_font = min(6.8, line_h / pt * 0.78)
    doc.font(pt_font, True)
    p.setPen(Qt.black)
    for j, c in enumerate(cols):
        p.drawText(QRectF(rect.left() + j * cw, y, cw, line_h), Qt.AlignRight | Qt.AlignVCenter, c)
    y += line_h
    p.setPen(QPen(Qt.black, 0.5 * pt))
    p.drawLine(QPointF(rect.left(), y), QPointF(rect.right(), y))
    for i, az in enumerate(azimuths):
        if i % 2 == 0:
            p.fillRect(QRectF(rect.left(), y, rect.width(), line_h), QColor(242, 242, 242))
        doc.font(pt_font)
        p.setPen(Qt.black)
        cells = ["all" if single else f"{az:g}"] + [f"{v:.1f}" for v in t["pattern_mv_m"][:, i]]
        for j, c in enumerate(cells):
            p.drawText(QRectF(rect.left() + j * cw, y, cw, line_h),
                       Qt.AlignRight | Qt.AlignVCenter, c)
        y += line_h
    doc.font(pt_font, True)
    p.setPen(QPen(Qt.black, 0.5 * pt))
    p.drawLine(QPointF(rect.left(), y), QPointF(rect.right(), y))
    cells = ["RMS"] + [f"{v:.1f}" for v in t["rms_mv_m"]]
    for j, c in enumerate(cells):
        p.drawText(QRectF(rect.left() + j * cw, y, cw, line_h), Qt.AlignRight | Qt.AlignVCenter, c)

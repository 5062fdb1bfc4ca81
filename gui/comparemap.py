"""The compare picture (PNG): one panel per level with the old and new contours, the gained
region in green and the lost one in red, both sites and a scale bar. Drawn from
coverage/compare.py's regions only."""

from __future__ import annotations

import math

import numpy as np
import shapely
from PySide6.QtCore import QPointF, QRectF, Qt
from PySide6.QtGui import QColor, QImage, QPainterPath, QPen

from mwreach.coverage.geodesy import local_projection
from mwreach.coverage.report import people_text

from .qt import png_bytes, white_canvas

__all__ = ["render_compare", "compare_png"]

GAIN, LOSS = QColor(26, 150, 65, 150), QColor(215, 25, 28, 150)


def _path(geom_xy, dev) -> QPainterPath:
    path = QPainterPath()
    for poly in shapely.get_parts(geom_xy):
        if poly.geom_type != "Polygon" or poly.is_empty:
            continue
        for ring in (poly.exterior, *poly.interiors):
            pts = [dev(x, y) for x, y in np.asarray(ring.coords)[:, :2]]
            path.moveTo(pts[0])
            for q in pts[1:]:
                path.lineTo(q)
            path.closeSubpath()
    path.setFillRule(Qt.OddEvenFill)
    return path


def _nice(km: float) -> float:
    """A round scale-bar length [km] no longer than ``km``."""
    e = 10 ** math.floor(math.log10(km))
    return max(m * e for m in (1, 2, 5) if m * e <= km)


def render_compare(comparison: dict, before, after, width: int = 1400,
                   height: int = 1100) -> QImage:
    img, p, font = white_canvas(width, height)
    s0, s1 = before.spec.station, after.spec.station
    p.drawText(QRectF(20, 6, width - 40, 44), Qt.AlignLeft | Qt.AlignVCenter | Qt.TextWordWrap,
               f"What the change gains (green) and loses (red) — {s1.name}: before "
               f"{s0.power_day_kw:g} kW at {s0.lat:.4f}, {s0.lon:.4f}; after {s1.power_day_kw:g} kW "
               f"at {s1.lat:.4f}, {s1.lon:.4f}; north up")
    proj = local_projection(s1.lat, s1.lon)
    rows = comparison["levels"]
    ncol = 2 if len(rows) > 1 else 1
    nrow = math.ceil(len(rows) / ncol)
    cell_w = (width - 40) / ncol
    cell_h = (height - 60) / nrow
    old = {round(c.level_mv_m, 9): c for c in before.contours}
    new = {round(c.level_mv_m, 9): c for c in after.contours}
    for k, row in enumerate(rows):
        r, c = divmod(k, ncol)
        cell = QRectF(20 + c * cell_w, 52 + r * cell_h, cell_w - 10, cell_h - 10)
        key = round(row["level_mv_m"], 9)
        before_xy = proj.geom_to_xy(old[key].polygon_lonlat)
        after_xy = proj.geom_to_xy(new[key].polygon_lonlat)
        x0, y0, x1, y1 = shapely.union(before_xy, after_xy).bounds
        plot = cell.adjusted(10, 48, -10, -30)
        half = 1.08 * max(x1 - x0, y1 - y0) / 2 or 1.0
        scale = min(plot.width(), plot.height()) / (2 * half)
        mx, my = (x0 + x1) / 2, (y0 + y1) / 2
        ccx, ccy = plot.center().x(), plot.center().y()

        def dev(x, y, mx=mx, my=my, scale=scale, ccx=ccx, ccy=ccy):
            return QPointF(ccx + (x - mx) * scale, ccy - (y - my) * scale)

        p.setPen(QPen(QColor(150, 150, 150), 1))
        p.setBrush(Qt.NoBrush)
        p.drawRect(cell)
        for geom, colour in ((row["gain"], GAIN), (row["loss"], LOSS)):
            if geom is not None and not geom.is_empty:
                p.fillPath(_path(proj.geom_to_xy(geom), dev), colour)
        p.setPen(QPen(QColor(90, 90, 90), 1.5, Qt.DashLine))
        p.drawPath(_path(before_xy, dev))
        p.setPen(QPen(QColor(20, 20, 20), 2))
        p.drawPath(_path(after_xy, dev))
        for st, filled in ((s0, False), (s1, True)):
            x, y = proj.to_xy(st.lon, st.lat)
            q = dev(float(x), float(y))
            p.setPen(QPen(Qt.black, 1.5))
            p.setBrush(Qt.black if filled else Qt.white)
            p.drawEllipse(q, 5, 5)
        p.setBrush(Qt.NoBrush)
        gain_p, loss_p = row["gain_population"], row["loss_population"]
        people = ("" if gain_p is None else
                  f"; people +{people_text(gain_p)} / −{people_text(loss_p)}")
        p.setPen(Qt.black)
        font.setPointSizeF(10)
        p.setFont(font)
        p.drawText(QRectF(cell.left() + 8, cell.top() + 4, cell.width() - 16, 40),
                   Qt.AlignLeft | Qt.AlignTop | Qt.TextWordWrap,
                   f"{row['label']}: gained {row['gain_km2']:,.0f} km², lost "
                   f"{row['loss_km2']:,.0f} km²{people}. Dashed: before; solid: after; "
                   "○ old site, ● new site")
        bar = _nice(half)
        y_bar = cell.bottom() - 14
        p.setPen(QPen(Qt.black, 2))
        p.drawLine(QPointF(cell.left() + 12, y_bar), QPointF(cell.left() + 12 + bar * scale, y_bar))
        p.drawText(QRectF(cell.left() + 16 + bar * scale, y_bar - 10, 120, 20),
                   Qt.AlignLeft | Qt.AlignVCenter, f"{bar:g} km")
    p.end()
    return img


def compare_png(comparison: dict, before, after) -> bytes:
    return png_bytes(render_compare(comparison, before, after))

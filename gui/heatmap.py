"""The site-search heat map (PNG): the study's map with every candidate coloured by its score,
the best sites numbered, and a colour scale. Drawn by the same renderer as the sheet."""

from __future__ import annotations

import numpy as np
from PySide6.QtCore import QPointF, QRectF, Qt
from PySide6.QtGui import QColor, QFont, QImage, QPainter, QPen

from mwreach.coverage.geodesy import local_projection

from .qt import png_bytes
from .render import HeatLayer, MapOptions, View, draw_map, heat_colour

__all__ = ["heat_layer", "render_heatmap", "heatmap_png"]

SCORE_LABELS = {"community_share": "community share inside the service contour at the "
                                   "maximum day power",
                "area": "protected-contour area [km²]",
                "max_power": "maximum day power [kW]"}


def heat_layer(search, spec) -> HeatLayer:
    """The candidates of a search as a heat layer in the study site's plane."""
    proj = local_projection(spec.station.lat, spec.station.lon)
    c = search.candidates
    lat = np.array([x.lat for x in c])
    lon = np.array([x.lon for x in c])
    val = np.array([x.score for x in c], dtype=float)
    val = np.where(np.isfinite(val), val, np.nan)
    x, y = proj.to_xy(lon, lat) if c else (np.array([]), np.array([]))
    finite = val[np.isfinite(val)]
    vmin = float(finite.min()) if finite.size else 0.0
    vmax = float(finite.max()) if finite.size else 1.0
    return HeatLayer(np.atleast_1d(x), np.atleast_1d(y), val, search.settings.step_km, vmin, vmax,
                     SCORE_LABELS.get(search.settings.score, search.settings.score))


def render_heatmap(result, search, width: int = 1400, height: int = 1050) -> QImage:
    """The map around the candidates with the heat layer, the five best sites and a scale."""
    img = QImage(width, height, QImage.Format_ARGB32)
    img.fill(Qt.white)
    heat = heat_layer(search, result.spec)
    p = QPainter(img)
    p.setRenderHint(QPainter.Antialiasing, True)
    title_h = 60
    rect = QRectF(20, title_h, width - 40, height - title_h - 90)
    if heat.x_km.size:
        x0, x1 = heat.x_km.min() - heat.cell_km, heat.x_km.max() + heat.cell_km
        y0, y1 = heat.y_km.min() - heat.cell_km, heat.y_km.max() + heat.cell_km
    else:
        x0, y0, x1, y1 = -20.0, -20.0, 20.0, 20.0
    kpu = max((x1 - x0) * 1.1 / rect.width(), (y1 - y0) * 1.1 / rect.height())
    view = View((x0 + x1) / 2, (y0 + y1) / 2, kpu, rect)
    opts = MapOptions(night=False, legend=False, contours=False, heat=heat, font_pt=9.0)
    draw_map(p, view, result, opts)
    # the best five, numbered
    font = QFont("DejaVu Sans", 1)
    font.setPointSizeF(9.0)
    font.setBold(True)
    p.setFont(font)
    for rank, c in enumerate(search.candidates[:5], 1):
        proj = local_projection(result.spec.station.lat, result.spec.station.lon)
        x, y = proj.to_xy(c.lon, c.lat)
        dx, dy = view.to_dev(x, y)
        p.setPen(QPen(Qt.black, 2.0))
        p.setBrush(Qt.white)
        p.drawEllipse(QPointF(float(dx), float(dy)), 10, 10)
        p.drawText(QRectF(float(dx) - 10, float(dy) - 10, 20, 20), Qt.AlignCenter, str(rank))
    p.setPen(QPen(Qt.black, 1.0))
    p.setBrush(Qt.NoBrush)
    p.drawRect(rect)
    # title and colour scale
    font.setPointSizeF(12.0)
    p.setFont(font)
    st = result.spec.station
    p.drawText(QRectF(20, 8, width - 40, 24), Qt.AlignLeft | Qt.AlignVCenter,
               f"Site search — {result.spec.title}")
    font.setBold(False)
    font.setPointSizeF(9.0)
    p.setFont(font)
    p.drawText(QRectF(20, 32, width - 40, 22), Qt.AlignLeft | Qt.AlignVCenter,
               f"{len(search.candidates)} candidates every {search.settings.step_km:g} km; "
               f"{st.freq_khz:g} kHz, {st.power_day_kw:g} kW day; numbers: the five best sites. "
               "Planning estimate only.")
    bar = QRectF(20, height - 70, min(520, width - 40), 16)
    n = 100
    for i in range(n):
        p.fillRect(QRectF(bar.left() + bar.width() * i / n, bar.top(), bar.width() / n + 1,
                          bar.height()), heat_colour(i / (n - 1)))
    p.setPen(QPen(Qt.black, 1.0))
    p.drawRect(bar)
    lo = f"{heat.vmin:.3g}"
    hi = f"{heat.vmax:.3g}"
    p.drawText(QRectF(bar.left(), bar.bottom() + 2, 200, 18), Qt.AlignLeft, lo)
    p.drawText(QRectF(bar.right() - 200, bar.bottom() + 2, 200, 18), Qt.AlignRight, hi)
    p.drawText(QRectF(bar.right() + 14, bar.top() - 2, width - bar.right() - 30, 40),
               Qt.AlignLeft | Qt.TextWordWrap, f"score: {heat.label}")
    p.setPen(QColor(60, 60, 60))
    p.end()
    return img


def heatmap_png(result, search) -> bytes:
    """The heat map as PNG bytes."""
    return png_bytes(render_heatmap(result, search))

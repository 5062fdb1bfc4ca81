"""The band at a glance (channels.png and the window's band view): for every channel of a
channel search its largest day and night powers as bars on a logarithmic kW scale, coloured by
what limits them. Drawn from coverage/channels.py's rows only."""

from __future__ import annotations

import math

from PySide6.QtCore import QPointF, QRectF, Qt
from PySide6.QtGui import QColor, QPainter, QPen, QPolygonF
from PySide6.QtWidgets import QToolTip, QWidget

from .qt import png_bytes, white_canvas

__all__ = ["KIND_COLOURS", "BandLayout", "BandView", "draw_band", "render_band", "channels_png",
           "row_text"]

#: Bar colours by what limits the power (colour-blind-safe qualitative set).
KIND_COLOURS = {
    "co-channel": QColor(213, 94, 0),
    "off raster": QColor(204, 121, 167),
    "first adjacent": QColor(230, 159, 0),
    "second adjacent": QColor(240, 228, 66),
    "third adjacent": QColor(240, 228, 66),
    "class range": QColor(0, 158, 115),
    "open": QColor(0, 158, 115),
}
KIND_LABELS = (("co-channel", "co-channel"), ("off raster", "carrier off the raster"),
               ("first adjacent", "first adjacent"),
               ("second adjacent", "second or third adjacent (overlap)"),
               ("class range", "class power range only"))
LO_KW, HI_KW = 0.01, 100.0  # the power axis [kW], logarithmic


class BandLayout:
    """Where each channel's bars stand in a panel ``rect``: x of a frequency and back."""

    def __init__(self, freqs, rect: QRectF):
        self.freqs = list(freqs)
        self.rect = rect
        self.step = rect.width() / max(len(self.freqs), 1)

    def x(self, k: int) -> float:
        return self.rect.left() + (k + 0.5) * self.step

    def channel_at(self, x: float):
        """The frequency [kHz] of the channel under ``x``, or None."""
        k = int((x - self.rect.left()) // self.step)
        return self.freqs[k] if 0 <= k < len(self.freqs) else None


def _y(kw: float, rect: QRectF) -> float:
    kw = min(max(kw, LO_KW), HI_KW)
    t = (math.log10(kw) - math.log10(LO_KW)) / (math.log10(HI_KW) - math.log10(LO_KW))
    return rect.bottom() - t * rect.height()


def _panel(p: QPainter, rows, rect: QRectF, period: str, study_kw: float) -> BandLayout:
    lay = BandLayout([r["freq_khz"] for r in rows], rect)
    p.setPen(QPen(QColor(150, 150, 150), 1))
    p.setBrush(Qt.NoBrush)
    p.drawRect(rect)
    # power grid lines and labels
    for kw in (0.01, 0.1, 1.0, 10.0, 100.0):
        y = _y(kw, rect)
        p.setPen(QPen(QColor(215, 215, 215), 1, Qt.DashLine))
        p.drawLine(QPointF(rect.left(), y), QPointF(rect.right(), y))
        p.setPen(QColor(60, 60, 60))
        p.drawText(QRectF(rect.left() - 62, y - 9, 56, 18), Qt.AlignRight | Qt.AlignVCenter,
                   f"{kw:g} kW")
    if study_kw > 0:  # the study's own power, for reference
        y = _y(study_kw, rect)
        p.setPen(QPen(QColor(0, 114, 178), 1.5, Qt.DashLine))
        p.drawLine(QPointF(rect.left(), y), QPointF(rect.right(), y))
    w = max(lay.step * 0.8, 1.0)
    for k, r in enumerate(rows):
        kw = r[f"max_{period}_kw"]
        kind = r[f"{period}_limit_kind"]
        x = lay.x(k)
        if kw is None or kw > 0:
            top = _y(HI_KW if kw is None else kw, rect)
            p.setPen(Qt.NoPen)
            p.setBrush(KIND_COLOURS.get(kind, QColor(120, 120, 120)))
            p.drawRect(QRectF(x - w / 2, top, w, rect.bottom() - top))
        else:  # closed: not even the smallest power passes
            p.setPen(QPen(QColor(20, 20, 20), 1.4))
            s = min(w / 2, 4.0)
            yb = rect.bottom() - s - 2
            p.drawLine(QPointF(x - s, yb - s), QPointF(x + s, yb + s))
            p.drawLine(QPointF(x - s, yb + s), QPointF(x + s, yb - s))
        if r.get("study_channel"):
            p.setPen(Qt.NoPen)
            p.setBrush(QColor(0, 114, 178))
            p.drawPolygon(QPolygonF([QPointF(x, rect.top() + 10), QPointF(x - 6, rect.top()),
                                     QPointF(x + 6, rect.top())]))
    # frequency labels: about every 100 kHz
    p.setPen(QColor(60, 60, 60))
    every = max(1, round(len(rows) / 12))
    for k in range(0, len(rows), every):
        p.drawText(QRectF(lay.x(k) - 30, rect.bottom() + 2, 60, 16), Qt.AlignCenter,
                   f"{rows[k]['freq_khz']:g}")
    return lay


def draw_band(p: QPainter, summary: dict, width: float, height: float, top: float = 0.0):
    """Both panels and the legend into ``p`` (the band view paints the same); returns the day
    panel's :class:`BandLayout` (the night panel's channels stand at the same x)."""
    rows = summary["channels"]
    left, right = 80.0, 20.0
    legend_h = 48.0
    panel_h = (height - top - legend_h - 2 * 40) / 2
    layouts = []
    for i, period in enumerate(("day", "night")):
        y0 = top + 22 + i * (panel_h + 40)
        p.setPen(QColor(20, 20, 20))
        p.drawText(QRectF(left, y0 - 20, width - left - right, 18), Qt.AlignLeft,
                   f"Largest {period} power every neighbour allows [kW, log scale]; dashed: the "
                   f"study's {summary['powers_kw'][period]:g} kW")
        layouts.append(_panel(p, rows, QRectF(left, y0, width - left - right, panel_h), period,
                              summary["powers_kw"][period]))
    # legend
    y = height - legend_h + 4
    x = left
    p.setPen(QColor(20, 20, 20))
    p.drawText(QRectF(x, y, 200, 18), Qt.AlignLeft | Qt.AlignVCenter, "Limited by:")
    x += p.fontMetrics().horizontalAdvance("Limited by:") + 12
    for kind, label in KIND_LABELS:
        p.setPen(Qt.NoPen)
        p.setBrush(KIND_COLOURS[kind])
        p.drawRect(QRectF(x, y + 3, 14, 12))
        p.setPen(QColor(20, 20, 20))
        p.drawText(QRectF(x + 18, y, 300, 18), Qt.AlignLeft | Qt.AlignVCenter, label)
        x += 18 + p.fontMetrics().horizontalAdvance(label) + 20
    y += 22
    p.drawText(QRectF(left, y, width - left - right, 18), Qt.AlignLeft | Qt.AlignVCenter,
               "× closed: no power passes every check;  ▼ the study's channel;  full bar: no "
               "neighbour limits it below the class maximum.  Planning estimate only.")
    return layouts[0]


def render_band(summary: dict, width: int = 1400, height: int = 800):
    img, p, font = white_canvas(width, height, 10.0)
    p.setPen(QColor(20, 20, 20))
    p.drawText(QRectF(20, 6, width - 40, 40), Qt.AlignLeft | Qt.AlignVCenter | Qt.TextWordWrap,
               f"Channels open at {summary['station']}'s site ({summary['site']['lat']:.4f}, "
               f"{summary['site']['lon']:.4f}): {summary['from_khz']:g}–{summary['to_khz']:g} "
               f"kHz, {summary['raster_khz']:g} kHz raster, plan {summary['plan']!r}")
    draw_band(p, summary, width, height, top=50.0)
    p.end()
    return img


def channels_png(summary: dict) -> bytes:
    """channels.png of a channel search's summary (coverage.channels.channels_summary)."""
    return png_bytes(render_band(summary))


class BandView(QWidget):
    """The window's band view: the same drawing as channels.png; a click on a channel calls
    ``on_pick(freq_khz)``; the tooltip gives the channel's answers."""

    def __init__(self, summary: dict, on_pick, parent=None):
        super().__init__(parent)
        self.summary, self.on_pick = summary, on_pick
        self.layout_ = None
        self.setMouseTracking(True)
        self.setMinimumSize(900, 520)

    def paintEvent(self, _event):
        p = QPainter(self)
        p.setRenderHint(QPainter.Antialiasing, True)
        p.fillRect(self.rect(), Qt.white)
        self.layout_ = draw_band(p, self.summary, self.width(), self.height())
        p.end()

    def row_at(self, x: float):
        """The channel row under ``x`` [widget pixels], or None."""
        f = self.layout_.channel_at(x) if self.layout_ is not None else None
        return next((r for r in self.summary["channels"] if r["freq_khz"] == f), None)

    def mouseMoveEvent(self, event):
        r = self.row_at(event.position().x())
        if r is not None:
            QToolTip.showText(event.globalPosition().toPoint(), row_text(r), self)

    def mousePressEvent(self, event):
        r = self.row_at(event.position().x())
        if r is not None and event.button() == Qt.LeftButton:
            self.on_pick(r["freq_khz"])


def row_text(r: dict) -> str:
    """One channel's answers as the band view's tooltip says them."""
    def kw(v):
        return "not limited below the class maximum" if v is None else (
            "closed (no power passes)" if v == 0 else f"{v:.3g} kW")

    share = "" if r["community_share"] is None else \
        f"\ncommunity share at the largest day power: {r['community_share']:.0%}"
    return (f"{r['freq_khz']:g} kHz — click to move the study here\n"
            f"day: {kw(r['max_day_kw'])} ({r['day_limited_by'] or '—'})\n"
            f"night: {kw(r['max_night_kw'])} ({r['night_limited_by'] or '—'})" + share)

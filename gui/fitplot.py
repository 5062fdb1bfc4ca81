"""Measured against fitted field, per radial: PNG plots and a PDF page per radial in the style
of the contour sheet (title, plot, figures, method and cautions)."""

from __future__ import annotations

import numpy as np
from PySide6.QtCore import QBuffer, QByteArray, QIODevice, QPointF, QRectF, Qt
from PySide6.QtGui import QColor, QFont, QPainter, QPen

from mwreach.coverage.fit import curve_family

from .qt import png_bytes, white_canvas

__all__ = ["draw_fit_plot", "fit_png", "fit_pdf"]


def _curve(fit, family, paths_fn, sigma, d):
    return fit.curve_dbu(d, sigma, family, paths_fn(d) if paths_fn else None)


def draw_fit_plot(p: QPainter, rect: QRectF, fit, family, paths_fn=None, pt: float = 1.0):
    """Field [dBµV/m] against log distance: readings (used ●, near field △, outliers ×), the
    fitted curve and the curves at the ends of the 95 % interval of σ."""
    pts = fit.used + fit.near_field + fit.outliers
    d_all = np.array([r.dist_km for r in pts])
    y_all = np.array([r.field_dbu for r in pts])
    d0, d1 = max(d_all.min() * 0.7, 0.05), d_all.max() * 1.4
    dd = np.geomspace(max(d0, min(r.dist_km for r in fit.used) * 0.8), d1, 120)
    curves = [(fit.sigma_ms_m, QPen(QColor("#1a7f37"), 2.0 * pt), "fitted"),
              (fit.sigma_low_ms_m, QPen(QColor("#5e3c99"), 1.2 * pt, Qt.DashLine), "95 % low"),
              (fit.sigma_high_ms_m, QPen(QColor("#c51b7d"), 1.2 * pt, Qt.DotLine), "95 % high")]
    ys = [np.asarray(fit.curve_dbu(dd, s, family, paths_fn(dd) if paths_fn else None))
          for s, _, _ in curves]
    y0 = min(y_all.min(), min(c.min() for c in ys)) - 3
    y1 = max(y_all.max(), max(c.max() for c in ys)) + 3
    left, bottom = rect.left() + 48 * pt, rect.bottom() - 30 * pt
    plot = QRectF(QPointF(left, rect.top() + 8 * pt), QPointF(rect.right() - 8 * pt, bottom))

    def to_dev(d, y):
        x = plot.left() + (np.log10(d) - np.log10(d0)) / (np.log10(d1) - np.log10(d0)) * plot.width()
        v = plot.bottom() - (y - y0) / (y1 - y0) * plot.height()
        return x, v

    font = QFont("DejaVu Sans", 1)
    font.setPointSizeF(7.5)
    p.setFont(font)
    p.setPen(QPen(QColor(200, 200, 200), 0.5 * pt))
    for dec in range(int(np.floor(np.log10(d0))), int(np.ceil(np.log10(d1))) + 1):
        for m in (1, 2, 5):
            d = m * 10.0 ** dec
            if d0 <= d <= d1:
                x, _ = to_dev(d, y0)
                p.setPen(QPen(QColor(210, 210, 210), 0.5 * pt))
                p.drawLine(QPointF(x, plot.top()), QPointF(x, plot.bottom()))
                p.setPen(Qt.black)
                p.drawText(QRectF(x - 30 * pt, plot.bottom() + 2 * pt, 60 * pt, 12 * pt),
                           Qt.AlignHCenter | Qt.AlignTop, f"{d:g}")
    step = 10 if (y1 - y0) > 40 else 5
    for yv in np.arange(np.ceil(y0 / step) * step, y1, step):
        _, v = to_dev(d0, yv)
        p.setPen(QPen(QColor(210, 210, 210), 0.5 * pt))
        p.drawLine(QPointF(plot.left(), v), QPointF(plot.right(), v))
        p.setPen(Qt.black)
        p.drawText(QRectF(rect.left(), v - 6 * pt, 44 * pt, 12 * pt),
                   Qt.AlignRight | Qt.AlignVCenter, f"{yv:g}")
    p.setPen(QPen(Qt.black, 0.8 * pt))
    p.setBrush(Qt.NoBrush)
    p.drawRect(plot)
    p.drawText(QRectF(plot.left(), bottom + 14 * pt, plot.width(), 14 * pt), Qt.AlignHCenter,
               "distance [km], logarithmic")
    p.save()
    p.translate(rect.left() + 8 * pt, plot.center().y())
    p.rotate(-90)
    p.drawText(QRectF(-80 * pt, -8 * pt, 160 * pt, 14 * pt), Qt.AlignCenter, "field [dBµV/m]")
    p.restore()
    p.setClipRect(plot)
    for (s, pen, _), y in zip(curves, ys):
        x, v = to_dev(dd, y)
        p.setPen(pen)
        for k in range(dd.size - 1):
            p.drawLine(QPointF(x[k], v[k]), QPointF(x[k + 1], v[k + 1]))
    r_px = 3.0 * pt
    for r in fit.used:
        x, v = to_dev(r.dist_km, r.field_dbu)
        p.setPen(QPen(Qt.black, 0.8 * pt))
        p.setBrush(QColor("#1a7f37"))
        p.drawEllipse(QPointF(float(x), float(v)), r_px, r_px)
    for r in fit.near_field:
        x, v = to_dev(r.dist_km, r.field_dbu)
        p.setPen(QPen(QColor("#555555"), 1.0 * pt))
        p.setBrush(Qt.NoBrush)
        p.drawPolygon([QPointF(float(x), float(v) - r_px), QPointF(float(x) - r_px, float(v) + r_px),
                       QPointF(float(x) + r_px, float(v) + r_px)])
    for r in fit.outliers:
        x, v = to_dev(r.dist_km, r.field_dbu)
        p.setPen(QPen(QColor("#d7191c"), 1.6 * pt))
        p.drawLine(QPointF(x - r_px, v - r_px), QPointF(x + r_px, v + r_px))
        p.drawLine(QPointF(x - r_px, v + r_px), QPointF(x + r_px, v - r_px))
    p.setClipping(False)
    # legend
    lx, ly = plot.right() - 190 * pt, plot.top() + 6 * pt
    p.fillRect(QRectF(lx - 4 * pt, ly - 2 * pt, 190 * pt, 64 * pt), QColor(255, 255, 255, 230))
    for k, (s, pen, label) in enumerate(curves):
        p.setPen(pen)
        p.drawLine(QPointF(lx, ly + 8 * pt + 12 * pt * k), QPointF(lx + 18 * pt, ly + 8 * pt + 12 * pt * k))
        p.setPen(Qt.black)
        p.drawText(QPointF(lx + 24 * pt, ly + 11 * pt + 12 * pt * k), f"{label}: σ {s:.3g} mS/m")
    p.drawText(QPointF(lx, ly + 48 * pt), "● used  △ near field  × outlier")


def _radial_paths_fn(spec, fit):
    from mwreach.coverage.fit import Reading, radial_paths, unknown_grounds

    unknown = {k: 0 for k in unknown_grounds(spec)}

    def paths(d):
        reads = [Reading(float(x), 0.0, 0.0, 0.0, fit.bearing_deg) for x in np.atleast_1d(d)]
        return radial_paths(spec, reads, unknown)

    return paths


def fit_png(spec, fit, eps_r: float, width: int = 1000, height: int = 640) -> bytes:
    family = curve_family(spec.station.freq_khz, eps_r, spec.earth_k)
    img, p, font = white_canvas(width, height)
    font.setBold(True)
    p.setFont(font)
    p.drawText(QRectF(16, 6, width - 32, 24), Qt.AlignLeft,
               f"{spec.station.name}, radial {fit.radial} ({fit.bearing_deg:.1f}°): "
               f"σ = {fit.sigma_ms_m:.3g} mS/m [{fit.sigma_low_ms_m:.3g}–{fit.sigma_high_ms_m:.3g}], "
               f"E0 = {fit.e0_mv_m:.1f} mV/m at 1 km")
    draw_fit_plot(p, QRectF(8, 36, width - 16, height - 44), fit, family,
                  _radial_paths_fn(spec, fit))
    p.end()
    return png_bytes(img)


def fit_pdf(spec, fits, eps_r: float, near_km: float) -> bytes:
    """One page per radial in the style of the contour sheet."""
    from .sheet import CAUTIONS, PT, _Doc

    data = QByteArray()
    buf = QBuffer(data)
    buf.open(QIODevice.WriteOnly)
    doc = _Doc(buf, spec.output.get("paper", "A4"), "portrait",
               f"{spec.title} — ground conductivity from measurements")
    family = curve_family(spec.station.freq_khz, eps_r, spec.earth_k)
    try:
        for k, f in enumerate(fits, 1):
            if k > 1:
                doc.writer.newPage()
            page = doc.page
            y = page.top()
            y += doc.text(QRectF(page.left(), y, page.width(), 20 * PT),
                          f"Ground conductivity from measurements — radial {f.radial}", 12,
                          bold=True) + 4 * PT
            lines = [
                f"{spec.station.name}, {spec.station.freq_khz:g} kHz; radial {f.radial} at "
                f"{f.bearing_deg:.1f}° from the site; εr {f.eps_r:g} (fixed).",
                f"Conductivity σ = {f.sigma_ms_m:.3g} mS/m, 95 % interval "
                f"{f.sigma_low_ms_m:.3g}–{f.sigma_high_ms_m:.3g} mS/m.",
                f"Unattenuated field at 1 km E0 = {f.e0_mv_m:.1f} mV/m, 95 % interval "
                f"{f.e0_low_mv_m:.1f}–{f.e0_high_mv_m:.1f} mV/m. RMS residual {f.rms_db:.2f} dB.",
                f"Readings: {len(f.used)} used; {len(f.near_field)} in the near field (closer than "
                f"{near_km:.2f} km) and {len(f.outliers)} outlier(s) left out"
                + (": " + "; ".join(f"{r.dist_km:.2f} km ({r.note or 'line ' + str(r.line)})"
                                    for r in f.outliers) if f.outliers else "") + ".",
            ] + [f"Warning: {w}." for w in f.warnings]
            y += doc.text(QRectF(page.left(), y, page.width(), 120 * PT), "\n".join(lines),
                          8.5) + 6 * PT
            h = page.height() * 0.5
            draw_fit_plot(doc.painter, QRectF(page.left(), y, page.width(), h), f, family,
                          _radial_paths_fn(spec, f), pt=PT)
            y += h + 10 * PT
            doc.text(QRectF(page.left(), y, page.width(), 120 * PT),
                     "Method: least squares in dB of the readings against the smooth-earth "
                     "ground-wave curve (Millington where the radial crosses zones of known "
                     "ground), σ and E0 unknown; soft-L1 weights find outliers; the 95 % "
                     "interval of σ is where the misfit rises by less than F(0.95; 1, n−2)·s² "
                     "(docs/methods.md §7.2).\n\nCautions: " + CAUTIONS, 7.5)
            doc.footer(k, len(fits), spec.station.name)
    finally:
        doc.painter.end()
        buf.close()
    return bytes(data.data())

"""The map: draws the study with the shared renderer; pan, zoom, drag the site, readout."""

from __future__ import annotations

import math

import numpy as np

from PySide6.QtCore import QPointF, QRectF, Qt, Signal
from PySide6.QtGui import QColor, QPainter
from PySide6.QtWidgets import QWidget

from mwreach.coverage.geodesy import local_projection

from .render import MapOptions, View, draw_legend, draw_map, fit_view

__all__ = ["MapWidget"]


class MapWidget(QWidget):
    """Shows a StudyResult. Signals carry geographic positions; no physics state is kept."""

    siteDragged = Signal(float, float)  # lat, lon while dragging
    siteDropped = Signal(float, float)  # lat, lon on release
    hovered = Signal(float, float)  # x_km, y_km in the displayed result's projection
    candidateClicked = Signal(float, float)  # lat, lon of a site-search candidate clicked

    def __init__(self, parent=None):
        super().__init__(parent)
        self.setMinimumSize(420, 240)  # the window must fit a 1280×720 screen
        self.setMouseTracking(True)
        self.result = None
        self.view: View | None = None
        self.options = MapOptions(font_pt=8.0, line_scale=1.0)
        self._drag = None  # ("site" | "pan", start QPointF, start view centre)
        self._site_offset = (0.0, 0.0)  # km, while dragging the site
        self._search = None  # the last site search shown as a heat layer (lon/lat candidates)

    def set_search(self, search) -> None:
        """Show a site search's candidates as a heat layer (None hides it)."""
        self._search = search
        self._rebuild_heat()
        self.update()

    def _rebuild_heat(self):
        """The heat layer in the projection of the result shown now (the site may have moved
        since the search)."""
        if self._search is None or self.result is None:
            self.options.heat = None
            return
        from .heatmap import heat_layer

        self.options.heat = heat_layer(self._search, self.result.spec)

    def fit_heat(self) -> None:
        """Frame the search area."""
        heat = self.options.heat
        if heat is None or heat.x_km.size == 0 or self.view is None:
            return
        x0, x1 = heat.x_km.min() - heat.cell_km, heat.x_km.max() + heat.cell_km
        y0, y1 = heat.y_km.min() - heat.cell_km, heat.y_km.max() + heat.cell_km
        r = self.view.rect
        self.view.cx_km, self.view.cy_km = (x0 + x1) / 2, (y0 + y1) / 2
        self.view.km_per_unit = max((x1 - x0) * 1.15 / max(r.width(), 1.0),
                                    (y1 - y0) * 1.15 / max(r.height(), 1.0))
        self.update()

    def candidate_at(self, pos):
        """(lat, lon) of the candidate under a widget position, or None."""
        heat = self.options.heat
        if heat is None or self.view is None or heat.x_km.size == 0:
            return None
        x, y = self.view.to_world(pos.x(), pos.y())
        i = int(np.argmax(-np.maximum(np.abs(heat.x_km - x), np.abs(heat.y_km - y))))
        if max(abs(heat.x_km[i] - x), abs(heat.y_km[i] - y)) > heat.cell_km / 2:
            return None
        c = self._search.candidates[i]
        return c.lat, c.lon

    # --- data -------------------------------------------------------------------------------
    def set_result(self, result, refit: bool = False) -> None:
        old = self.result
        self.result = result
        if self.view is None or refit or old is None:
            self.fit()
        elif old.spec.station.lat != result.spec.station.lat or old.spec.station.lon != result.spec.station.lon:
            # keep the same geographic view although the projection centre moved
            p_old = local_projection(old.spec.station.lat, old.spec.station.lon)
            lon, lat = p_old.to_lonlat(self.view.cx_km, self.view.cy_km)
            p_new = local_projection(result.spec.station.lat, result.spec.station.lon)
            x, y = p_new.to_xy(lon, lat)
            self.view.cx_km, self.view.cy_km = float(x), float(y)
            if self._drag and self._drag[0] == "site":
                # the site is at the origin of the new projection: drag continues from there
                self._site_offset = (0.0, 0.0)
        if self._search is not None:
            self._rebuild_heat()
        self.update()

    def fit(self) -> None:
        if self.result is None:
            return
        self.view = fit_view(self.result, QRectF(self.rect()), margin=1.1)
        self.update()

    def set_units(self, distance_units: str) -> None:
        self.options.distance_units = distance_units
        self.update()

    # --- painting ---------------------------------------------------------------------------
    def paintEvent(self, event):  # noqa: N802 - Qt API
        p = QPainter(self)
        p.fillRect(self.rect(), Qt.white)
        if self.result is None or self.view is None:
            p.drawText(self.rect(), Qt.AlignCenter, "Open a study (File ▸ Open) or start from "
                       "the demo (File ▸ New from demo).")
            return
        self.view.rect = QRectF(self.rect())
        labels = draw_map(p, self.view, self.result, self.options)
        self._draw_key(p, labels)
        if self._drag and self._drag[0] == "site":
            x, y = self.view.to_dev(*self._site_offset)
            p.setPen(Qt.red)
            p.drawEllipse(QPointF(float(x), float(y)), 7, 7)
        if self.options.legend:  # View ▸ Legend on the map folds it away
            legend = QRectF(self.width() - 290, 64, 280, 260)  # below the north arrow
            draw_legend(p, legend, self.result, self.options,
                        background=QColor(255, 255, 255, 235))
        else:
            p.setPen(QColor(80, 80, 80))  # bottom right, clear of the north arrow
            p.drawText(QRectF(self.width() - 220, self.height() - 24, 210, 18),
                       Qt.AlignRight | Qt.AlignVCenter, "Legend: View ▸ Legend (Ctrl+L)")
        p.end()

    def key_lines(self, labels) -> list[str]:
        """Stations shown by a number (too crowded for their name beside the symbol) and
        neighbours outside the frame, with distance and bearing from the site."""
        lines = [f"{n}  {t}" for n, t in labels.key]
        spec = self.result.spec
        if spec.interference is not None and self.view is not None:
            from mwreach.coverage.geodesy import inverse, local_projection

            st = spec.station
            proj = local_projection(st.lat, st.lon)
            for nb in spec.interference.neighbours:
                x, y = self.view.to_dev(*proj.to_xy(nb.lon, nb.lat))
                if not self.view.rect.contains(QPointF(float(x), float(y))):
                    d, az, _ = inverse(st.lat, st.lon, nb.lat, nb.lon)
                    km = float(d) if self.options.distance_units == "km" else float(d) / 1.609344
                    lines.append(f"beyond the frame: {nb.name} ({nb.freq_khz:g} kHz), "
                                 f"{km:.0f} {self.options.distance_units} at {float(az):.0f}°")
        return lines

    def _draw_key(self, p: QPainter, labels) -> None:
        lines = self.key_lines(labels)
        self.shown_key = lines
        if not lines:
            return
        fm = p.fontMetrics()
        w = max(fm.horizontalAdvance(t) for t in lines) + 12
        h = fm.height() * len(lines) + 8
        box = QRectF(8, 8, w, h)
        p.setPen(QColor(120, 120, 120))
        p.setBrush(QColor(255, 255, 255, 230))
        p.drawRect(box)
        p.setPen(Qt.black)
        for i, t in enumerate(lines):
            p.drawText(QRectF(14, 12 + i * fm.height(), w, fm.height()), Qt.AlignVCenter, t)

    # --- interaction ------------------------------------------------------------------------
    def _site_hit(self, pos) -> bool:
        if self.view is None:
            return False
        x, y = self.view.to_dev(*self._site_offset)
        return math.hypot(pos.x() - float(x), pos.y() - float(y)) < 10

    def mousePressEvent(self, ev):  # noqa: N802
        if self.view is None:
            return
        if ev.button() == Qt.LeftButton and self._site_hit(ev.position()):
            self._drag = ("site", ev.position(), (self.view.cx_km, self.view.cy_km))
            self.setCursor(Qt.ClosedHandCursor)
        elif ev.button() in (Qt.LeftButton, Qt.MiddleButton, Qt.RightButton):
            self._drag = ("pan", ev.position(), (self.view.cx_km, self.view.cy_km))
            self.setCursor(Qt.SizeAllCursor)

    def _pos_to_lonlat(self, pos):
        x, y = self.view.to_world(pos.x(), pos.y())
        st = self.result.spec.station
        lon, lat = local_projection(st.lat, st.lon).to_lonlat(x, y)
        return float(lat), float(lon)

    def mouseMoveEvent(self, ev):  # noqa: N802
        if self.view is None:
            return
        pos = ev.position()
        if self._drag and self._drag[0] == "pan":
            start, (cx, cy) = self._drag[1], self._drag[2]
            self.view.cx_km = cx - (pos.x() - start.x()) * self.view.km_per_unit
            self.view.cy_km = cy + (pos.y() - start.y()) * self.view.km_per_unit
            self.update()
        elif self._drag and self._drag[0] == "site":
            self._site_offset = self.view.to_world(pos.x(), pos.y())
            lat, lon = self._pos_to_lonlat(pos)
            self.siteDragged.emit(lat, lon)
            self.update()
        x, y = self.view.to_world(pos.x(), pos.y())
        self.hovered.emit(float(x), float(y))

    def mouseReleaseEvent(self, ev):  # noqa: N802
        if (self._drag and self._drag[0] == "pan" and ev.button() == Qt.LeftButton
                and (ev.position() - self._drag[1]).manhattanLength() < 4):
            hit = self.candidate_at(ev.position())  # a click, not a pan: a candidate?
            if hit is not None:
                self._drag = None
                self.unsetCursor()
                self.candidateClicked.emit(*hit)
                return
        if self._drag and self._drag[0] == "site":
            lat, lon = self._pos_to_lonlat(ev.position())
            self._drag = None
            self._site_offset = (0.0, 0.0)
            self.siteDropped.emit(lat, lon)
        self._drag = None
        self.unsetCursor()
        self.update()

    def wheelEvent(self, ev):  # noqa: N802
        if self.view is None:
            return
        self.zoom(0.8 if ev.angleDelta().y() > 0 else 1.25, ev.position())  # about the cursor

    def zoom(self, factor: float, about=None) -> None:
        """Zoom by ``factor`` about a device point (default: the site), which stays put."""
        if self.view is None:
            return
        if about is None:
            ax, ay = self.view.to_dev(*self._site_offset)
            about = QPointF(float(ax), float(ay))
        wx, wy = self.view.to_world(about.x(), about.y())
        self.view.km_per_unit *= factor
        nx, ny = self.view.to_world(about.x(), about.y())
        self.view.cx_km += wx - nx
        self.view.cy_km += wy - ny
        self.update()

    def resizeEvent(self, ev):  # noqa: N802
        if self.view is not None:
            self.view.rect = QRectF(self.rect())
        super().resizeEvent(ev)


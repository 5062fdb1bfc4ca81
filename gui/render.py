"""One map renderer for the screen and for paper: draws a study result with a QPainter.

World coordinates are the site's azimuthal-equidistant projection in km (x east, y north);
the :class:`View` maps them into a device rectangle. No physics here: everything drawn comes
from :class:`mwreach.coverage.study.StudyResult`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from PySide6.QtCore import QPointF, QRectF, Qt
from PySide6.QtGui import QColor, QFont, QPainter, QPainterPath, QPen, QPolygonF

from mwreach.coverage.export import KM_PER_MI
from mwreach.coverage.geodesy import local_projection
from mwreach.coverage.levels import level_style

__all__ = ["View", "MapOptions", "draw_map", "fit_view", "conductivity_colour",
           "level_pen", "level_colour", "zone_legend_rows", "HeatLayer", "heat_colour",
           "LabelPlacer", "overview_view"]

#: Contour colours, strongest level first (chosen for print and screen; colour-blind safe set).
_DASH = {"solid": Qt.SolidLine, "dash": Qt.DashLine, "dot": Qt.DotLine,
         "dashdot": Qt.DashDotLine, "dashdotdot": Qt.DashDotDotLine}


def level_pen(level_mv_m: float, scale: float = 1.0) -> QPen:
    """The fixed pen of a contour level (colour, pattern and weight from
    :mod:`mwreach.coverage.levels`), scaled for the device."""
    st = level_style(level_mv_m)
    pen = QPen(QColor(st.hex), st.width_pt * scale, _DASH[st.dash])
    pen.setCapStyle(Qt.FlatCap)
    return pen


def level_colour(level_mv_m: float) -> QColor:
    return QColor(level_style(level_mv_m).hex)
NIGHT_COLOUR = "#202020"
FAIL_COLOUR = "#d7191c"


#: Land swatches by conductivity class, drier → wetter: distinct hues *and* lightness, so that
#: neighbouring classes can be told apart on screen and in greyscale print.
LAND_SWATCHES = ((0.3, (236, 214, 160)),    # very dry, dry: sand
                 (1.5, (214, 196, 140)),    # medium dry: ochre
                 (5.0, (205, 226, 170)),    # land 3–4 mS/m: pale green
                 (20.0, (150, 196, 120)),   # wet ground: mid green
                 (math.inf, (96, 160, 96)))  # land 30 mS/m and better: deep green
#: Water: sea (σ ≥ 1 S/m) deep blue, fresh water (εr ≥ 50 and low σ) light blue.
SEA_COLOUR = (120, 165, 225)
FRESH_WATER_COLOUR = (170, 210, 240)


def conductivity_colour(sigma_ms_m: float, eps_r: float | None = None) -> QColor:
    """Fill colour for a ground: sand → ochre → greens for land by conductivity class, blues
    for water (sea by its conductivity, fresh water by its permittivity)."""
    if sigma_ms_m >= 1000.0:
        return QColor(*SEA_COLOUR)
    if eps_r is not None and eps_r >= 50.0:
        return QColor(*FRESH_WATER_COLOUR)
    for upper, rgb in LAND_SWATCHES:
        if sigma_ms_m < upper:
            return QColor(*rgb)
    return QColor(*LAND_SWATCHES[-1][1])


@dataclass
class View:
    """Maps world km to device units: centre (km) and scale (km per device unit)."""

    cx_km: float
    cy_km: float
    km_per_unit: float
    rect: QRectF = field(default_factory=QRectF)

    def to_dev(self, x, y):
        x = np.asarray(x, float)
        y = np.asarray(y, float)
        c = self.rect.center()
        return c.x() + (x - self.cx_km) / self.km_per_unit, c.y() - (y - self.cy_km) / self.km_per_unit

    def to_world(self, px: float, py: float):
        c = self.rect.center()
        return self.cx_km + (px - c.x()) * self.km_per_unit, self.cy_km - (py - c.y()) * self.km_per_unit

    def world_extent(self):
        x0, y0 = self.to_world(self.rect.left(), self.rect.bottom())
        x1, y1 = self.to_world(self.rect.right(), self.rect.top())
        return x0, y0, x1, y1


@dataclass
class MapOptions:
    """What to draw and how large (sizes in points at the device's resolution)."""

    zones: bool = True
    contours: bool = True
    night: bool = True
    neighbours: bool = True
    community: bool = True
    graticule: bool = True
    legend: bool = True
    scale_bar: bool = True
    north_arrow: bool = True
    field_shading: bool = False  # translucent field raster under the contours
    bands: bool = True  # shade each level's 5–95 % band when the grounds have ranges
    heat: object = None  # a HeatLayer of site-search candidates, drawn over the zones
    exposure: object = None  # an RF exposure screening (coverage.exposure.screening) to draw
    font_pt: float = 8.0
    line_scale: float = 1.0  # device units per point
    distance_units: str = "km"


@dataclass(frozen=True)
class HeatLayer:
    """Site-search candidates as squares coloured by score, in the study site's plane [km]."""

    x_km: np.ndarray
    y_km: np.ndarray
    value: np.ndarray  # the score; NaN: not evaluated
    cell_km: float
    vmin: float
    vmax: float
    label: str


#: Colour ramp of heat layers, low → high: readable on the zone colours and in greyscale
#: (lightness rises monotonically).
HEAT_RAMP = ((48, 18, 59), (70, 99, 218), (27, 174, 167), (164, 219, 54), (253, 231, 37))


def heat_colour(t: float) -> QColor:
    """Colour of a value scaled to 0..1 on :data:`HEAT_RAMP`."""
    t = float(np.clip(t, 0.0, 1.0)) * (len(HEAT_RAMP) - 1)
    i = min(int(t), len(HEAT_RAMP) - 2)
    f = t - i
    a, b = HEAT_RAMP[i], HEAT_RAMP[i + 1]
    return QColor(*(int(round(a[k] + f * (b[k] - a[k]))) for k in range(3)))


def _draw_heat(p: QPainter, view: View, heat: HeatLayer):
    span = max(heat.vmax - heat.vmin, 1e-12)
    h = heat.cell_km / 2.0
    p.setPen(Qt.NoPen)
    for x, y, v in zip(heat.x_km, heat.y_km, heat.value):
        if not np.isfinite(v):
            continue
        c = heat_colour((v - heat.vmin) / span)
        c.setAlpha(215)
        p.setBrush(c)
        x0, y0 = view.to_dev(x - h, y + h)
        x1, y1 = view.to_dev(x + h, y - h)
        p.drawRect(QRectF(QPointF(float(x0), float(y0)), QPointF(float(x1), float(y1))))


def fit_view(result, rect: QRectF, level_index: int | None = None, margin: float = 1.08) -> View:
    """A view that shows the chosen contour (default: the lowest level drawn) with a margin."""
    contours = result.contours
    idx = len(contours) - 1 if level_index is None else level_index
    geom = contours[idx].polygon_xy if contours else None
    if geom is None or geom.is_empty:
        x0, y0, x1, y1 = -20.0, -20.0, 20.0, 20.0
    else:
        x0, y0, x1, y1 = geom.bounds
    x0, x1 = min(x0, 0.0), max(x1, 0.0)
    y0, y1 = min(y0, 0.0), max(y1, 0.0)
    w = max(x1 - x0, 1.0) * margin
    h = max(y1 - y0, 1.0) * margin
    kpu = max(w / max(rect.width(), 1.0), h / max(rect.height(), 1.0))
    return View((x0 + x1) / 2, (y0 + y1) / 2, kpu, QRectF(rect))


#: Share of the framed height added below on overview and night maps for the scale bar.
SCALE_BAR_BAND = 0.15


def night_view(result, rect: QRectF, margin: float = 1.25) -> View:
    """A view framed on the night service contour and the failed checks within 3 times its
    reach (the near field that an overview at neighbour scale shrinks to a dot)."""
    inter = getattr(result, "interference", None)
    xs, ys = [0.0], [0.0]
    if inter is not None and inter.night is not None and not inter.night.polygon_xy.is_empty:
        x0, y0, x1, y1 = inter.night.polygon_xy.bounds
        xs += [x0, x1]
        ys += [y0, y1]
    reach = max(max(abs(v) for v in xs + ys), 5.0)
    if inter is not None:
        st = result.spec.station
        proj = local_projection(st.lat, st.lon)
        bad = [(r.lat, r.lon) for r in inter.rows if not r.passed]
        bad += [pt for ov in getattr(inter, "overlaps", ()) if not ov.passed for pt in ov.points]
        for lat, lon in bad:
            x, y = proj.to_xy(lon, lat)
            if math.hypot(float(x), float(y)) <= 3 * reach:
                xs.append(float(x))
                ys.append(float(y))
    x0, x1, y0, y1 = min(xs), max(xs), min(ys), max(ys)
    y0 -= SCALE_BAR_BAND * max(y1 - y0, 2.0)
    w = max(x1 - x0, 2.0) * margin
    h = max(y1 - y0, 2.0) * margin
    kpu = max(w / max(rect.width(), 1.0), h / max(rect.height(), 1.0))
    return View((x0 + x1) / 2, (y0 + y1) / 2, kpu, QRectF(rect))


#: Neighbours farther than this from the site are not framed on an overview map (a distant
#: clear-channel station would shrink everything else to a dot); sheets list them in words.
OVERVIEW_NEIGHBOUR_KM = 1200.0


def overview_view(result, rect: QRectF, margin: float = 1.12):
    """A view holding the site, every contour, every neighbour within
    :data:`OVERVIEW_NEIGHBOUR_KM` and every failed check point. Returns (view, the names of the
    neighbours left outside the frame)."""
    spec = result.spec
    st = spec.station
    proj = local_projection(st.lat, st.lon)
    xs, ys = [0.0], [0.0]
    for c in result.contours:
        if not c.polygon_xy.is_empty:
            x0, y0, x1, y1 = c.polygon_xy.bounds
            xs += [x0, x1]
            ys += [y0, y1]
    outside = []
    inter = getattr(result, "interference", None)
    if spec.interference is not None:
        for nb in spec.interference.neighbours:
            x, y = proj.to_xy(nb.lon, nb.lat)
            if math.hypot(float(x), float(y)) <= OVERVIEW_NEIGHBOUR_KM:
                xs.append(float(x))
                ys.append(float(y))
            else:
                outside.append(nb)
    if inter is not None:
        for r in inter.rows:
            if not r.passed:
                x, y = proj.to_xy(r.lon, r.lat)
                if math.hypot(float(x), float(y)) <= OVERVIEW_NEIGHBOUR_KM:
                    xs.append(float(x))
                    ys.append(float(y))
    x0, x1, y0, y1 = min(xs), max(xs), min(ys), max(ys)
    y0 -= SCALE_BAR_BAND * max(y1 - y0, 1.0)  # a band below for the scale bar, clear of symbols
    w = max(x1 - x0, 1.0) * margin
    h = max(y1 - y0, 1.0) * margin
    kpu = max(w / max(rect.width(), 1.0), h / max(rect.height(), 1.0))
    return View((x0 + x1) / 2, (y0 + y1) / 2, kpu, QRectF(rect)), outside


def _path_from_geom(geom, view: View) -> QPainterPath:
    path = QPainterPath()
    path.setFillRule(Qt.OddEvenFill)
    polys = getattr(geom, "geoms", [geom])
    for p in polys:
        if p.is_empty or p.geom_type != "Polygon":
            continue
        for ring in [p.exterior, *p.interiors]:
            xy = np.asarray(ring.coords)
            dx, dy = view.to_dev(xy[:, 0], xy[:, 1])
            path.addPolygon(QPolygonF([QPointF(a, b) for a, b in zip(dx, dy)]))
            path.closeSubpath()
    return path


def _line_path(xy, view: View) -> QPainterPath:
    path = QPainterPath()
    dx, dy = view.to_dev(xy[:, 0], xy[:, 1])
    path.addPolygon(QPolygonF([QPointF(a, b) for a, b in zip(dx, dy)]))
    return path


def zone_legend_rows(spec) -> list[tuple[QColor, str]]:
    rows = [(conductivity_colour(spec.ground.default.sigma_ms_m, spec.ground.default.eps_r),
             f"default ground: {spec.ground.default.sigma_ms_m:g} mS/m, εr {spec.ground.default.eps_r:g}")]
    for z in spec.ground.zones:
        rows.append((conductivity_colour(z.ground.sigma_ms_m, z.ground.eps_r),
                     f"{z.name}: {z.ground.sigma_ms_m:g} mS/m, εr {z.ground.eps_r:g}"))
    return rows


def _nice_step(span: float, target: int = 5) -> float:
    raw = span / target
    for s in (0.01, 0.02, 0.05, 0.1, 0.2, 0.25, 0.5, 1.0, 2.0, 5.0, 10.0):
        if s >= raw:
            return s
    return 10.0


def _draw_graticule(p: QPainter, view: View, proj, opts: MapOptions, labels=None):
    x0, y0, x1, y1 = view.world_extent()
    corners = np.array([[x0, y0], [x0, y1], [x1, y0], [x1, y1], [(x0 + x1) / 2, y0],
                        [(x0 + x1) / 2, y1], [x0, (y0 + y1) / 2], [x1, (y0 + y1) / 2]])
    lon, lat = proj.to_lonlat(corners[:, 0], corners[:, 1])
    lat0, lat1, lon0, lon1 = lat.min(), lat.max(), lon.min(), lon.max()
    step = _nice_step(max(lat1 - lat0, lon1 - lon0))
    pen = QPen(QColor(120, 120, 120, 150), 0.5 * opts.line_scale, Qt.DotLine)
    font = QFont("DejaVu Sans", 1)
    font.setPointSizeF(opts.font_pt * 0.85)
    p.setFont(font)
    dec = max(0, -int(math.floor(math.log10(step))) if step < 1 else 0)
    p.setBrush(Qt.NoBrush)  # graticule lines are open paths: never fill them
    for is_lat, lo, hi, olo, ohi in ((True, lat0, lat1, lon0, lon1), (False, lon0, lon1, lat0, lat1)):
        for v in np.arange(math.floor(lo / step) * step, hi + step, step):
            other = np.linspace(olo, ohi, 60)
            fixed = np.full(other.shape, v)
            x, y = proj.to_xy(other, fixed) if is_lat else proj.to_xy(fixed, other)
            p.setPen(pen)
            p.drawPath(_line_path(np.column_stack([x, y]), view))
            dx, dy = view.to_dev(x, y)
            if is_lat:  # labels on the left edge
                inside = (dy > view.rect.top() + 8) & (dy < view.rect.bottom() - 8)
                at = QPointF(view.rect.left() + 2 * opts.line_scale, float(dy[inside][0]) - 2) if inside.any() else None
                text = f"{abs(v):.{dec}f}°{'N' if v >= 0 else 'S'}"
            else:  # labels along the bottom edge
                inside = (dx > view.rect.left() + 30) & (dx < view.rect.right() - 30)
                at = QPointF(float(dx[inside][0]) + 2, view.rect.bottom() - 3 * opts.line_scale) if inside.any() else None
                text = f"{abs(v):.{dec}f}°{'E' if v >= 0 else 'W'}"
            if at is not None and labels is not None:
                labels.pending.append((3, float(at.x()), float(at.y()), text,
                                       QColor(80, 80, 80), 0.85, False, True))


#: Field shading: dBµV/m range and colours (weak → strong), drawn translucent.
SHADE_DBU = (30.0, 100.0)


def _draw_field(p: QPainter, view: View, result):
    """Field raster (contours.field_raster) over the visible extent, as a translucent image."""
    from PySide6.QtGui import QImage

    from mwreach.coverage.contours import field_raster

    n = 240
    x0, y0, x1, y1 = view.world_extent()
    half = max(x1 - x0, y1 - y0) / 2
    cx, cy = (x0 + x1) / 2, (y0 + y1) / 2
    xs, ys, f = field_raster(result.radials, 1.0, n, centre_km=(cx, cy), half_km=half)
    ok = np.isfinite(f)
    t = np.clip((np.where(ok, f, SHADE_DBU[0]) - SHADE_DBU[0]) / (SHADE_DBU[1] - SHADE_DBU[0]),
                0.0, 1.0)
    ramp = np.array(HEAT_RAMP, dtype=float)
    pos = t * (len(ramp) - 1)
    i = np.minimum(pos.astype(int), len(ramp) - 2)
    w = (pos - i)[..., None]
    rgb = ((1 - w) * ramp[i] + w * ramp[i + 1]).astype(np.uint8)
    a = np.where(ok, 110, 0).astype(np.uint8)
    rgba = np.ascontiguousarray(np.dstack([rgb, a])[::-1])  # image rows run north → south
    img = QImage(rgba.data, n, n, 4 * n, QImage.Format_RGBA8888).copy()
    dx0, dy0 = view.to_dev(cx - half, cy + half)
    dx1, dy1 = view.to_dev(cx + half, cy - half)
    p.save()
    p.setRenderHint(QPainter.SmoothPixmapTransform, True)  # no stair steps when scaled up
    p.drawImage(QRectF(float(dx0), float(dy0), float(dx1 - dx0), float(dy1 - dy0)), img)
    p.restore()


def _draw_colour_scale(p: QPainter, view: View, opts: MapOptions, title: str, low: str,
                       high: str, above: QRectF | None = None) -> QRectF:
    """A colour scale of :func:`heat_colour`, bottom right of the map (above ``above`` when
    given), with its title over it and the values of its ends under it; returns its box."""
    s = opts.line_scale
    font = QFont("DejaVu Sans", 1)
    font.setPointSizeF(opts.font_pt * 0.8)
    p.save()
    p.setFont(font)
    w = max(150 * s, p.fontMetrics().horizontalAdvance(title) + 4 * s)
    h = 10 * s
    x = view.rect.right() - w - 12 * s
    y = (view.rect.bottom() if above is None else above.top()) - h - 22 * s
    box = QRectF(x - 6 * s, y - 14 * s, w + 12 * s, h + 30 * s)
    p.setPen(Qt.NoPen)
    p.setBrush(QColor(255, 255, 255, 225))
    p.drawRect(box)
    for k in range(60):
        p.fillRect(QRectF(x + w * k / 60, y, w / 60 + 1, h), heat_colour(k / 59))
    p.setPen(QPen(Qt.black, 0.6 * s))
    p.setBrush(Qt.NoBrush)
    p.drawRect(QRectF(x, y, w, h))
    p.drawText(QRectF(x, y - 13 * s, w, 12 * s), Qt.AlignCenter, title)
    p.drawText(QRectF(x - 4 * s, y + h + 1 * s, w / 2, 12 * s), Qt.AlignLeft, low)
    p.drawText(QRectF(x + w / 2, y + h + 1 * s, w / 2 + 4 * s, 12 * s), Qt.AlignRight, high)
    p.restore()
    return box


def _draw_scale_bar(p: QPainter, view: View, opts: MapOptions):
    width_km = view.rect.width() * view.km_per_unit
    unit_km = 1.0 if opts.distance_units == "km" else KM_PER_MI
    length = _nice_step(width_km / unit_km / 4.0, 1)
    for s in (1, 2, 5, 10, 20, 25, 50, 100, 200, 250, 500, 1000):
        if s >= width_km / unit_km / 5.0:
            length = s
            break
    dev = length * unit_km / view.km_per_unit
    s = opts.line_scale
    x = view.rect.left() + 12 * s
    y = view.rect.bottom() - 16 * s
    p.setPen(QPen(Qt.black, 1.0 * s))
    p.setBrush(Qt.white)
    p.drawRect(QRectF(x - 4 * s, y - 12 * s, dev + 40 * s, 18 * s))
    p.setBrush(Qt.black)
    p.drawRect(QRectF(x, y, dev / 2, 3 * s))
    p.setBrush(Qt.white)
    p.drawRect(QRectF(x + dev / 2, y, dev / 2, 3 * s))
    font = QFont("DejaVu Sans", 1)
    font.setPointSizeF(opts.font_pt * 0.85)
    p.setFont(font)
    p.drawText(QPointF(x, y - 2 * s), "0")
    p.drawText(QPointF(x + dev - 4 * s, y - 2 * s), f"{length:g} {opts.distance_units}")
    return QRectF(x - 4 * s, y - 12 * s, dev + 40 * s, 18 * s)


def _draw_north_arrow(p: QPainter, view: View, opts: MapOptions):
    s = opts.line_scale
    x = view.rect.right() - 18 * s
    y = view.rect.top() + 14 * s
    poly = QPolygonF([QPointF(x, y), QPointF(x - 6 * s, y + 18 * s), QPointF(x, y + 13 * s),
                      QPointF(x + 6 * s, y + 18 * s)])
    p.setPen(QPen(Qt.black, 0.8 * s))
    p.setBrush(Qt.black)
    p.drawPolygon(poly)
    font = QFont("DejaVu Sans", 1)
    font.setPointSizeF(opts.font_pt)
    font.setBold(True)
    p.setFont(font)
    p.drawText(QRectF(x - 10 * s, y + 19 * s, 20 * s, 12 * s), Qt.AlignCenter, "N")
    return QRectF(x - 10 * s, y - 2 * s, 20 * s, 34 * s)


class LabelPlacer:
    """Places map labels so that no two overlap and none crosses the frame.

    Each label is tried at its anchor point, then around it on growing rings (with a thin
    leader line from the anchor once it has moved away); a label that fits nowhere is left out
    and counted in :attr:`dropped`. :attr:`boxes` holds every placed label's box (device units),
    for tests and for a caller that wants to know."""

    def __init__(self, p: QPainter, frame: QRectF, opts: MapOptions, reserved=()):
        self.p, self.opts = p, opts
        s = opts.line_scale
        self.frame = frame.adjusted(2 * s, 2 * s, -2 * s, -2 * s)
        self.reserved = list(reserved)  # boxes labels must avoid (scale bar, north arrow)
        self.boxes: list[QRectF] = []
        self.texts: list[str] = []
        self.owners: list = []  # the symbol each placed label names (None: not a symbol's)
        self.dropped: list[str] = []
        #: (priority, x, y, text, colour, size, background, left[, owner, fallback])
        self.pending: list[tuple] = []
        #: symbols on the map: owner → device point; a symbol's label must be nearer its own
        #: symbol than any other, so that it cannot be read as another station's
        self.symbols: dict = {}
        #: (number, text) of the stations labelled by a number instead of their name
        self.key: list[tuple[int, str]] = []

    def _free(self, r: QRectF) -> bool:
        return (self.frame.contains(r) and not any(r.intersects(b) for b in self.boxes)
                and not any(r.intersects(b) for b in self.reserved))

    @staticmethod
    def distance(r: QRectF, pt: QPointF) -> float:
        """Distance [device units] from a point to a rectangle (0 inside it)."""
        dx = max(r.left() - pt.x(), 0.0, pt.x() - r.right())
        dy = max(r.top() - pt.y(), 0.0, pt.y() - r.bottom())
        return math.hypot(dx, dy)

    def nearest_own(self, r: QRectF, owner) -> bool:
        """True when the label box is strictly nearer its owner's symbol than any other."""
        own = self.distance(r, self.symbols[owner])
        return all(self.distance(r, q) > own for o, q in self.symbols.items() if o != owner)

    def place(self, x: float, y: float, text: str, colour: QColor, size: float = 0.9,
              background: bool = True, align_left: bool = False, owner=None):
        p, s = self.p, self.opts.line_scale
        font = QFont("DejaVu Sans", 1)
        font.setPointSizeF(self.opts.font_pt * size)
        p.setFont(font)
        fm = p.fontMetrics()
        w = fm.horizontalAdvance(text) + 4 * s
        h = fm.height()
        step = h * 0.9
        base = (w / 2, 0.0) if align_left else (0.0, 0.0)
        tries = [base]
        for ring in range(1, 9):
            d = ring * step
            for ang in range(0, 360, 30):
                a = math.radians(ang)
                tries.append((base[0] + d * math.cos(a) * max(1.0, w / (2 * h)),
                              base[1] - d * math.sin(a)))
        if owner is not None:  # then hugging the symbol itself: right, left, below, above
            sx, sy = self.symbols[owner].x() - x, self.symbols[owner].y() - y
            gap = 10 * s
            for k in range(1, 4):
                g = gap * k
                tries += [(sx + g + w / 2, sy), (sx - g - w / 2, sy),
                          (sx, sy + g + h / 2), (sx, sy - g - h / 2)]
        for ox, oy in tries:
            r = QRectF(x + ox - w / 2, y + oy - h / 2, w, h)
            if not self._free(r) or (owner is not None and not self.nearest_own(r, owner)):
                continue
            if math.hypot(ox - base[0], oy - base[1]) > 1.5 * step and not r.contains(QPointF(x, y)):
                p.setPen(QPen(QColor(90, 90, 90), 0.5 * s))
                p.drawLine(QPointF(x, y), QPointF(min(max(x, r.left()), r.right()),
                                                  min(max(y, r.top()), r.bottom())))
            if background:
                p.setPen(Qt.NoPen)
                p.setBrush(QColor(255, 255, 255, 215))
                p.drawRect(r)
            p.setPen(colour)
            p.drawText(r, Qt.AlignCenter, text)
            self.boxes.append(r)
            self.texts.append(text)
            self.owners.append(owner)
            return r
        self.dropped.append(text)
        return None

    def flush(self):
        """Place the labels queued in :attr:`pending`, most important first. A station's name
        that fits nowhere nearer its own symbol than any other is replaced by a number beside
        the symbol, listed in :attr:`key` (the caller prints the key under the map)."""
        for item in sorted(self.pending, key=lambda t: t[0]):
            args = item[1:8]
            owner = item[8] if len(item) > 8 else None
            fallback = item[9] if len(item) > 9 else None
            if self.place(*args, owner=owner) is None and fallback is not None:
                self.dropped.pop()
                number = len(self.key) + 1
                x, y, _text, colour, size = args[:5]
                if self.place(x, y, str(number), colour, size, True, args[6],
                              owner=owner) is not None:
                    self.key.append((number, args[2]))
        self.pending = []


def draw_map(p: QPainter, view: View, result, opts: MapOptions | None = None,
             failing_points=None):
    """Draw the study on ``p`` inside ``view.rect``."""
    opts = opts or MapOptions()
    spec = result.spec
    st = spec.station
    proj = local_projection(st.lat, st.lon)
    s = opts.line_scale
    p.save()
    p.setClipRect(view.rect)
    p.setRenderHint(QPainter.Antialiasing, True)
    p.fillRect(view.rect, conductivity_colour(spec.ground.default.sigma_ms_m, spec.ground.default.eps_r))
    labels = LabelPlacer(p, view.rect, opts)

    if opts.zones:
        for z, geom in zip(spec.ground.zones, spec.ground.zones_xy(proj)):
            p.setPen(QPen(QColor(90, 90, 90, 120), 0.4 * s))
            p.setBrush(conductivity_colour(z.ground.sigma_ms_m, z.ground.eps_r))
            p.drawPath(_path_from_geom(geom, view))

    if opts.field_shading:
        _draw_field(p, view, result)

    if opts.heat is not None:
        _draw_heat(p, view, opts.heat)

    if opts.graticule:
        _draw_graticule(p, view, proj, opts, labels)

    if opts.community and spec.community is not None:
        g = proj.geom_to_xy(spec.community.geometry)
        p.setPen(QPen(QColor(60, 60, 60), 1.0 * s, Qt.DashLine))
        p.setBrush(QColor(255, 255, 255, 70))
        p.drawPath(_path_from_geom(g, view))
        x0, y0, x1, _ = g.bounds  # name under the boundary, clear of the site label above it
        cx, cy = view.to_dev((x0 + x1) / 2, y0)
        labels.pending.append((1, float(cx), float(cy) + opts.font_pt * 1.6 * s,
                               spec.community.name, QColor(40, 40, 40), 0.9, True, False))

    if opts.contours and opts.bands and getattr(result, "bands", None):
        _draw_bands(p, view, result, proj)

    if opts.contours:
        n = len(result.contours)
        for c in result.contours:
            p.setPen(level_pen(c.level_mv_m, s))
            p.setBrush(Qt.NoBrush)
            p.drawPath(_path_from_geom(c.polygon_xy, view))
        for i, c in enumerate(result.contours):  # labels after lines, spread in bearing
            col = level_colour(c.level_mv_m)
            b = result.radials.bearings_deg
            want = (30.0 + 360.0 / max(n, 1) * i * 0.5 + 90.0 * (i % 2)) % 360
            j = int(np.argmin(np.abs((b - want + 180) % 360 - 180)))
            d = c.first_km[j]
            if not np.isfinite(d):
                continue
            x, y = d * math.sin(math.radians(b[j])), d * math.cos(math.radians(b[j]))
            dx, dy = view.to_dev(x, y)
            labels.pending.append((2, float(dx), float(dy), f"{c.level_mv_m:g} mV/m", col, 0.9,
                                   True, False))

    if opts.exposure is not None:
        _draw_exposure(p, view, opts.exposure, s)

    inter = getattr(result, "interference", None)
    if opts.night and inter is not None and inter.night is not None:
        p.setPen(QPen(QColor(NIGHT_COLOUR), 1.4 * s, Qt.DashDotLine))
        p.setBrush(Qt.NoBrush)
        p.drawPath(_path_from_geom(inter.night.polygon_xy, view))

    if opts.neighbours and inter is not None:
        # neighbours' protected contours (day solid, night dashed), contoured like our own
        for (_name, period), geom in inter.protected_contours.items():
            if geom.is_empty:
                continue
            style = Qt.DashLine if period == "night" else Qt.SolidLine
            p.setPen(QPen(QColor(70, 70, 70, 170), 0.8 * s, style))
            p.setBrush(Qt.NoBrush)
            p.drawPath(_path_from_geom(proj.geom_to_xy(geom), view))

    if opts.neighbours and spec.interference is not None:
        font = QFont("DejaVu Sans", 1)
        font.setPointSizeF(opts.font_pt * 0.85)
        for nb in spec.interference.neighbours:
            x, y = proj.to_xy(nb.lon, nb.lat)
            dx, dy = view.to_dev(x, y)
            dx, dy = float(dx), float(dy)
            if not view.rect.adjusted(-5, -5, 5, 5).contains(QPointF(dx, dy)):
                continue
            tri = QPolygonF([QPointF(dx, dy - 5 * s), QPointF(dx - 4.5 * s, dy + 3.5 * s),
                             QPointF(dx + 4.5 * s, dy + 3.5 * s)])
            p.setPen(QPen(Qt.black, 0.8 * s))
            p.setBrush(QColor(255, 255, 255))
            p.drawPolygon(tri)
            labels.symbols[("neighbour", nb.name)] = QPointF(dx, dy)
            labels.reserved.append(QRectF(dx - 5 * s, dy - 5.5 * s, 10 * s, 9.5 * s))
            labels.pending.append((1, dx + 6 * s, dy, f"{nb.name} ({nb.freq_khz:g} kHz)",
                                   QColor(0, 0, 0), 0.85, True, True, ("neighbour", nb.name),
                                   True))

    if failing_points is None and inter is not None:
        failing_points = [(r.lat, r.lon) for r in inter.rows if not r.passed]
        failing_points += [pt for ov in getattr(inter, "overlaps", ()) if not ov.passed
                           for pt in ov.points]
    if failing_points:
        lat = np.array([a for a, _ in failing_points])
        lon = np.array([b for _, b in failing_points])
        x, y = proj.to_xy(lon, lat)
        dx, dy = view.to_dev(x, y)
        p.setPen(QPen(QColor(FAIL_COLOUR), 1.6 * s))
        for a, b in zip(dx, dy):
            p.drawLine(QPointF(a - 3 * s, b - 3 * s), QPointF(a + 3 * s, b + 3 * s))
            p.drawLine(QPointF(a - 3 * s, b + 3 * s), QPointF(a + 3 * s, b - 3 * s))

    # the site: a tower symbol
    dx, dy = view.to_dev(0.0, 0.0)
    dx, dy = float(dx), float(dy)
    p.setPen(QPen(Qt.black, 1.2 * s))
    p.setBrush(QColor(255, 230, 0))
    p.drawEllipse(QPointF(dx, dy), 4.5 * s, 4.5 * s)
    p.drawLine(QPointF(dx, dy - 8 * s), QPointF(dx, dy + 8 * s))
    p.drawLine(QPointF(dx - 8 * s, dy), QPointF(dx + 8 * s, dy))
    labels.reserved.append(QRectF(dx - 9 * s, dy - 9 * s, 18 * s, 18 * s))  # the site symbol
    labels.symbols[("site", st.name)] = QPointF(dx, dy)
    labels.pending.append((0, dx, dy - 14 * s, st.name, QColor(0, 0, 0), 0.9, True, False,
                           ("site", st.name), True))

    if opts.scale_bar:
        labels.reserved.append(_draw_scale_bar(p, view, opts))
    if opts.north_arrow:
        labels.reserved.append(_draw_north_arrow(p, view, opts))
    scale_box = None
    if opts.field_shading:
        scale_box = _draw_colour_scale(p, view, opts, "field [dBµV/m]", f"{SHADE_DBU[0]:g}",
                                       f"{SHADE_DBU[1]:g}")
        labels.reserved.append(scale_box)
    if opts.heat is not None and opts.legend:  # the heat-map picture draws its own scale
        heat = opts.heat
        labels.reserved.append(_draw_colour_scale(
            p, view, opts, f"site search: {heat.label}", f"{heat.vmin:.4g}",
            f"{heat.vmax:.4g}", scale_box))
    labels.flush()
    p.setPen(QPen(Qt.black, 1.0 * s))
    p.setBrush(Qt.NoBrush)
    p.drawRect(view.rect)
    p.restore()
    return labels


def _draw_exposure(p: QPainter, view: View, data: dict, s: float):
    """RF exposure screening boundaries around the towers (metres from the array's reference
    point at the site), general public red, occupational blue; the towers as small rings."""
    from .exposureplan import boundary_colour

    for k, (name, std) in enumerate(data["standards"].items()):
        if std["largest_distance_m"] <= 0:
            continue
        pts = [view.to_dev(r["from_reference_m"] / 1e3 * math.sin(math.radians(r["bearing_deg"])),
                           r["from_reference_m"] / 1e3 * math.cos(math.radians(r["bearing_deg"])))
               for r in std["bearings"]]
        p.setPen(QPen(QColor(boundary_colour(name)), 1.8 * s,
                      Qt.SolidLine if k == 0 else Qt.DashLine))
        p.setBrush(Qt.NoBrush)
        p.drawPolygon(QPolygonF([QPointF(float(x), float(y)) for x, y in pts]))
    p.setPen(QPen(Qt.black, 1.0 * s))
    p.setBrush(QColor(255, 230, 0))
    for x, y in data["towers_xy_m"]:
        dx, dy = view.to_dev(x / 1e3, y / 1e3)
        p.drawEllipse(QPointF(float(dx), float(dy)), 3 * s, 3 * s)


def band_regions_xy(result, proj) -> list:
    """(level, region between the 5 % and 95 % contours in the site's plane) per level."""
    cache = getattr(result, "_band_xy", None)
    if cache is None:
        cache = []
        for band in result.bands or ():
            outer = proj.geom_to_xy(band.polygons["p95"])
            inner = proj.geom_to_xy(band.polygons["p05"])
            cache.append((band.level_mv_m, outer.difference(inner)))
        object.__setattr__(result, "_band_xy", cache)  # a frozen result: kept beside its fields
    return cache


def _draw_bands(p: QPainter, view: View, result, proj):
    """The band between each level's 5 % and 95 % contours, in the level's colour, faint."""
    p.setPen(Qt.NoPen)
    for level, region in band_regions_xy(result, proj):
        c = QColor(level_colour(level))
        c.setAlpha(70)
        p.setBrush(c)
        p.drawPath(_path_from_geom(region, view))


def _legend_entries(result, s: float, opts=None) -> list[tuple]:
    """What the legend shows, in order: ("head", text), ("line", pen, text),
    ("cross", text), ("swatch", colour, text) or ("gap",)."""
    from mwreach.coverage.report import people_text

    out: list[tuple] = [("head", "Contours (day ground wave)")]
    pop = getattr(result, "population", None)
    for i, c in enumerate(result.contours):
        base = f"{c.level_mv_m:g} mV/m"
        text = c.label if c.label.startswith(base) else f"{base} ({c.label})" if c.label else base
        if pop is not None:
            text += f": {people_text(pop['levels'][i])} people"
        out.append(("line", level_pen(c.level_mv_m, s), text))
    exposure = getattr(opts, "exposure", None)
    if exposure is not None:
        from .exposureplan import boundary_colour

        for name, std in exposure["standards"].items():
            far = std["largest_distance_m"]
            out.append(("line", QPen(QColor(boundary_colour(name)), 1.8 * s),
                        f"{name} exposure: " + (f"above within {far:g} m" if far > 0
                                                 else "below from 1 m")))
    if getattr(result, "bands", None):
        u = result.spec.uncertainty
        grey = QColor(110, 110, 110, 90)
        out.append(("swatch", grey, f"shaded: 5–95 % ground band ({u.draws} draws)"))
    inter = getattr(result, "interference", None)
    if inter is not None and inter.night is not None:
        night = "night service contour (night limit)"
        if pop is not None and pop["night_service"] is not None:
            night += f": {people_text(pop['night_service'])} people"
        out.append(("line", QPen(QColor(NIGHT_COLOUR), 1.6 * s, Qt.DashDotLine), night))
        out.append(("line", QPen(QColor(70, 70, 70), 1.0 * s),
                    "neighbour protected contour (day; night dashed)"))
        if any(not r.passed for r in inter.rows):
            out.append(("cross", "protection fails (D/U below ratio)"))
    out += [("gap",), ("head", "Ground conductivity")]
    out += [("swatch", colour, text) for colour, text in zone_legend_rows(result.spec)]
    return out


def draw_legend(p: QPainter, rect: QRectF, result, opts: MapOptions,
                background: QColor | None = None) -> float:
    """Contour and conductivity legend in ``rect``; returns the height used. With
    ``background``, the area it covers is filled first."""
    s = opts.line_scale
    font = QFont("DejaVu Sans", 1)
    font.setPointSizeF(opts.font_pt * 0.9)
    bold = QFont(font)
    bold.setBold(True)
    p.setFont(font)
    line = p.fontMetrics().height() * 1.15
    entries = _legend_entries(result, s, opts)
    height = sum(0.4 * line if e[0] == "gap" else line for e in entries) + line * 0.5
    if background is not None:
        p.fillRect(QRectF(rect.left() - 6 * s, rect.top() - 4 * s, rect.width() + 12 * s,
                          height + 8 * s), background)
    x, y = rect.left(), rect.top()
    for e in entries:
        kind = e[0]
        y += 0.4 * line if kind == "gap" else line
        if kind == "gap":
            continue
        if kind == "head":
            p.setFont(bold)
            p.setPen(Qt.black)
            p.drawText(QPointF(x, y), e[1])
            p.setFont(font)
            continue
        if kind == "line":
            p.setPen(e[1])
            p.drawLine(QPointF(x, y - line / 3), QPointF(x + 18 * s, y - line / 3))
        elif kind == "cross":
            p.setPen(QPen(QColor(FAIL_COLOUR), 1.6 * s))
            cx, cy = x + 9 * s, y - line / 3
            p.drawLine(QPointF(cx - 3 * s, cy - 3 * s), QPointF(cx + 3 * s, cy + 3 * s))
            p.drawLine(QPointF(cx - 3 * s, cy + 3 * s), QPointF(cx + 3 * s, cy - 3 * s))
        elif kind == "swatch":
            p.setPen(QPen(QColor(90, 90, 90), 0.5 * s))
            p.setBrush(e[1])
            p.drawRect(QRectF(x, y - line * 0.7, 18 * s, line * 0.6))
        p.setPen(Qt.black)
        p.drawText(QPointF(x + 24 * s, y), e[-1])
    return height

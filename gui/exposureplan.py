"""The RF exposure site plan (PNG): towers, |E| shading at the screened height, each standard's
screening boundary, a scale bar and the caution. Drawn from exposure.json's figures only (the
physics is coverage/exposure.py)."""

from __future__ import annotations

import math

import numpy as np
from PySide6.QtCore import QPointF, QRectF, Qt
from PySide6.QtGui import QColor, QImage, QPen, QPolygonF

from .qt import png_bytes, white_canvas

__all__ = ["render_exposure_plan", "exposure_png", "exposure_pages", "boundary_colour"]

#: boundary colour by population: general public red, occupational blue
BOUNDARY_COLOURS = {"public": "#d7191c", "occupational": "#2b83ba"}


def source_text(source: str) -> str:
    """A reference level's source as pictures and the sheet print it: without the reading
    markers, with † where a part was recalled rather than read (exposure.json keeps them)."""
    import re

    text = re.sub(r"\s*\([^()]*\b(?:read|from memory)\b[^()]*\)", "", source).strip()
    return text + (" †" if "from memory" in source else "")


def boundary_colour(name: str) -> str:
    """The boundary colour of a reference-level row (by its population)."""
    return BOUNDARY_COLOURS["occupational" if "occupational" in name else "public"]


def render_exposure_plan(data: dict, width: int = 1200, height: int = 1100) -> QImage:
    img, p, font = white_canvas(width, height)
    title = (f"RF exposure screening — {data['station']}, {data['freq_khz']:g} kHz, "
             f"{data['power_kw']:g} kW ({data['period']}), {data['height_m']:g} m above ground")
    p.drawText(QRectF(20, 10, width - 40, 30), Qt.AlignLeft | Qt.AlignVCenter, title)
    plan = QRectF(20, 50, width - 40, height - 230)
    # the frame holds the grid (±100 m) and every boundary, whichever is larger
    reach = max([100.0] + [b["from_reference_m"] for s in data["standards"].values()
                           for b in s["bearings"]]) * 1.1
    scale = min(plan.width(), plan.height()) / (2 * reach)  # px per m
    cx, cy = plan.center().x(), plan.center().y()

    def dev(x, y):
        return QPointF(cx + x * scale, cy - y * scale)

    # |E| shading from the grid, grey levels in dB below the largest value
    g = data["grid"]
    e = np.array([[np.nan if v is None else v for v in row] for row in g["e_v_m"]], dtype=float)
    emax = float(np.nanmax(e)) if np.isfinite(e).any() else 1.0
    step = (g["x_m"][1] - g["x_m"][0]) if len(g["x_m"]) > 1 else 5.0
    for j, y in enumerate(g["y_m"]):
        for i, x in enumerate(g["x_m"]):
            if not np.isfinite(e[j, i]):
                continue
            db = 20 * math.log10(max(e[j, i], 1e-9) / emax)
            t = min(max(-db / 40.0, 0.0), 1.0)  # 0 dB dark, −40 dB white
            c = QColor.fromHsvF(0.08, 0.6 * (1 - t), 1.0)
            a, b = dev(x - step / 2, y + step / 2), dev(x + step / 2, y - step / 2)
            p.fillRect(QRectF(a, b), c)
    p.setPen(QPen(QColor(120, 120, 120), 1))
    p.drawRect(plan)
    # boundaries
    legend = []
    for k, (name, s) in enumerate(data["standards"].items()):
        col = QColor(boundary_colour(name))
        pts = [dev(r["from_reference_m"] * math.sin(math.radians(r["bearing_deg"])),
                   r["from_reference_m"] * math.cos(math.radians(r["bearing_deg"])))
               for r in s["bearings"]]
        # solid, then dashed: equal boundaries stay visible one over the other
        p.setPen(QPen(col, 2.5, Qt.SolidLine if k == 0 else Qt.DashLine))
        p.setBrush(Qt.NoBrush)
        if s["largest_distance_m"] > 0:
            p.drawPolygon(QPolygonF(pts))
        legend.append((col, f"{name}: E {s['e_limit_v_m']:.4g} V/m, H {s['h_limit_a_m']:.4g} "
                            f"A/m — {source_text(s['source'])}; beyond the line the fields stay "
                            "below "
                            f"(largest {s['largest_distance_m']:g} m"
                            + (")" if s["largest_distance_m"] > 0 else "; nowhere above)")))
    # towers
    p.setPen(QPen(Qt.black, 1.5))
    p.setBrush(QColor(255, 230, 0))
    for x, y in data["towers_xy_m"]:
        p.drawEllipse(dev(x, y), 6, 6)
    # scale bar (bottom left of the plan) and north arrow
    bar_m = 10 ** math.floor(math.log10(reach / 2))
    x0, y0 = plan.left() + 20, plan.bottom() - 25
    p.setPen(QPen(Qt.black, 3))
    p.drawLine(QPointF(x0, y0), QPointF(x0 + bar_m * scale, y0))
    p.drawText(QPointF(x0, y0 - 8), f"{bar_m:g} m")
    p.drawText(QRectF(plan.right() - 40, plan.top() + 5, 30, 20), Qt.AlignCenter, "N ↑")
    # legend and caution
    y = plan.bottom() + 12
    font.setPointSizeF(9.5)
    p.setFont(font)
    for col, text in legend:
        p.setPen(QPen(col, 3, Qt.SolidLine if col is legend[0][0] else Qt.DashLine))
        p.drawLine(QPointF(22, y + 9), QPointF(52, y + 9))
        p.setPen(Qt.black)
        r = p.boundingRect(QRectF(60, y, width - 80, 60), Qt.TextWordWrap, text)
        p.drawText(r, Qt.TextWordWrap, text)
        y += r.height() + 6
    p.drawText(QRectF(60, y, width - 80, 20), Qt.AlignLeft,
               f"Shading: |E| at {data['height_m']:g} m, darkest = {emax:,.0f} V/m, white 40 dB "
               "below (not shown within 1 m of a tower). Yellow: towers. † recalled, not read: "
               "check against the published level.")
    y += 24
    font.setBold(True)
    p.setFont(font)
    p.drawText(QRectF(20, y, width - 40, height - y - 5), Qt.TextWordWrap, data["caution"])
    p.end()
    return img


def exposure_png(data: dict) -> bytes:
    return png_bytes(render_exposure_plan(data))


#: The sheet screens out to this distance [m] (the exposure command: 500 m): near a
#: medium-wave tower the reference levels are passed within a few tens of metres.
SHEET_REACH_M = 300.0


def exposure_pages(doc, result, pt: float) -> list:
    """Callables drawing one RF exposure screening page per operating period with power and
    its own towers (day; night and critical hours when they have their own antenna), with the
    study's ``[exposure]`` standard and height: the table, the site plan and the caution."""
    from mwreach.coverage.station import period_rows

    st = result.spec.station
    periods = [r["period"] for r in period_rows(st)
               if r["power_kw"] > 0 and r["period"] in ("day", "night")
               and (r["period"] == "day" or st.has_own(r["period"]))]
    return [lambda period=period: _page_exposure(doc, result, period, pt) for period in periods]


def _page_exposure(doc, result, period: str, pt: float):
    from mwreach.coverage.exposure import screening

    spec = result.spec
    conf = spec.exposure or {}
    data = screening(spec, period, conf.get("height_m", 2.0), None, max_m=SHEET_REACH_M,
                     far_step_m=5.0)
    page = doc.page
    p = doc.painter
    y = page.top()
    y += doc.text(QRectF(page.left(), y, page.width(), 20 * pt),
                  f"RF exposure screening near the towers — {period} "
                  f"({data['power_kw']:g} kW)", 11, bold=True) + 4 * pt
    y += doc.text(QRectF(page.left(), y, page.width(), 60 * pt),
                  f"Fields at {data['height_m']:g} m above ground from the assumed tower "
                  "currents (sinusoidal, as the antenna model) over perfectly conducting ground, "
                  "every current element summed; each tower's current and phases from the "
                  f"{period} antenna at {data['power_kw']:g} kW. Distances are where, along each "
                  f"bearing (every 5°; 1 m steps to 50 m, 5 m steps to {SHEET_REACH_M:g} m), "
                  "both |E| and |H| fall below "
                  "the reference level for good. Within 1 m of a tower nothing is screened, and "
                  "within a few metres of its base the field of the base voltage, which a "
                  "current model leaves out, may be larger than shown.", 8) + 6 * pt
    head = ["Reference level", "E [V/m]", "H [A/m]", "Farthest boundary from the reference "
            "point / nearest tower [m]", "Source"]
    widths = [0.2, 0.08, 0.08, 0.24, 0.40]
    doc.font(8, True)
    x, head_h = page.left(), 0.0
    for h, w in zip(head, widths):
        r = QRectF(x, y, w * page.width() - 4 * pt, 40 * pt)
        head_h = max(head_h, p.boundingRect(r, Qt.AlignLeft | Qt.AlignTop | Qt.TextWordWrap,
                                            h).height())
        p.drawText(r, Qt.AlignLeft | Qt.AlignTop | Qt.TextWordWrap, h)
        x += w * page.width()
    y += head_h + 2 * pt
    p.setPen(QPen(Qt.black, 0.6 * pt))
    p.drawLine(QPointF(page.left(), y), QPointF(page.right(), y))
    y += 2 * pt
    for name, s in data["standards"].items():
        far = max(s["bearings"], key=lambda r: r["from_reference_m"])
        dist = ("nowhere above" if s["largest_distance_m"] <= 0 else
                f"{far['from_reference_m']:g} / {far['from_nearest_tower_m']:g} toward "
                f"{far['bearing_deg']:g}°" + (" (still above: look farther)"
                                               if s["beyond_screened_range"] else ""))
        cells = [name, f"{s['e_limit_v_m']:.4g}", f"{s['h_limit_a_m']:.4g}", dist,
                 source_text(s["source"])]
        doc.font(7.5)
        p.setPen(Qt.black)
        x, row_h = page.left(), 0.0
        for c, w in zip(cells, widths):
            r = QRectF(x, y, w * page.width() - 4 * pt, 40 * pt)
            used = p.boundingRect(r, Qt.AlignLeft | Qt.AlignTop | Qt.TextWordWrap, c)
            p.drawText(r, Qt.AlignLeft | Qt.AlignTop | Qt.TextWordWrap, c)
            row_h = max(row_h, used.height())
            x += w * page.width()
        y += row_h + 3 * pt
    y += 4 * pt
    # the site plan, as exposure.png draws it
    box = QRectF(page.left(), y, page.width(), page.bottom() - y - 70 * pt)
    img = render_exposure_plan(data, 1200, 1100)
    s = min(box.width() / img.width(), box.height() / img.height())
    target = QRectF(box.left() + (box.width() - img.width() * s) / 2, box.top(),
                    img.width() * s, img.height() * s)
    p.drawImage(target, img)
    y = target.bottom() + 6 * pt
    p.setPen(QPen(QColor("#b00020"), 1.0 * pt))
    p.setBrush(Qt.NoBrush)
    caution = (data["caution"] + " The tower base and its fence need their own assessment: "
               "contact with the tower or anything it energises can cause burns at any power.")
    r = QRectF(page.left() + 4 * pt, y + 4 * pt, page.width() - 8 * pt, 60 * pt)
    used = doc.text(r, caution, 8, bold=True)
    p.setPen(QPen(QColor("#b00020"), 1.0 * pt))
    p.drawRect(QRectF(page.left(), y, page.width(), used + 8 * pt))

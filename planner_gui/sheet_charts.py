"""Charts of the printed sheets, drawn as vector operations on a layout Page.

* channel timeline: one row per channel over the test window, searches hatched, tracks
  solid, the expected first fix as a dashed line and the Monte Carlo TTFF median and
  95th percentile as marks on the time axis;
* sky plot: north up, east to the right (map view), elevation rings, the mask ring, each
  satellite's track while in view with its direction, a marker at its first search;
* Doppler search windows: every search of the timeline, the window at the search start
  and its bins to scale on one frequency axis.

Colours and marker shapes per constellation come from planner_gui.style (Okabe-Ito,
each system with its own shape). Every label is a measured text box (sheet_layout) and
labels that would collide are moved to a free place.
"""

from __future__ import annotations

import math
from datetime import UTC, datetime

import numpy as np

from core.api import state_word
from planner_gui.sheet_layout import (
    CAUTION,
    CAUTION_INK,
    INK,
    INK_FAINT,
    INK_SOFT,
    PANEL,
    PANEL_DARK,
    RULE,
    FontSpec,
    Page,
    Rect,
    nice_step,
    tint,
    wrap_lines,
)
from planner_gui.style import SEGMENT_COLOURS, SYSTEM_STYLES, style_for

F_AXIS = FontSpec(9.0, condensed=True)
F_AXIS_BOLD = FontSpec(9.0, bold=True, condensed=True)
F_LABEL = FontSpec(9.0, bold=True, condensed=True)
F_ROW = FontSpec(9.5, condensed=True)
F_ROW_BOLD = FontSpec(10.0, bold=True, condensed=True)
F_LEGEND = FontSpec(9.0)
F_COMPASS = FontSpec(11.0, bold=True)

SEARCH_EDGE = "#9A5A00"     # darker orange: hatching and outline of searches
TRACK_EDGE = "#2C7FB0"      # darker sky blue: outline of tracks

# Directions tried for a sky-plot label around its marker, degrees counter-clockwise from
# "to the right": the four sides, the diagonals, then the directions between them.
_LABEL_ANGLES = (0, 180, 90, 270, 45, 315, 135, 225, 22.5, 337.5, 157.5, 202.5, 67.5, 112.5,
                 247.5, 292.5)

TIME_STEPS_S = (60, 120, 300, 600, 900, 1800, 3600, 7200, 10800, 21600, 43200, 86400)


def _overlaps(a: Rect, b: Rect, pad: float = 0.0) -> bool:
    return (a[0] < b[0] + b[2] + pad and b[0] < a[0] + a[2] + pad
            and a[1] < b[1] + b[3] + pad and b[1] < a[1] + a[3] + pad)


def _inside(a: Rect, b: Rect) -> bool:
    return a[0] >= b[0] and a[1] >= b[1] and a[0] + a[2] <= b[0] + b[2] and a[1] + a[3] <= b[1] + b[3]


def marker_path(path_cls, point_cls, shape: str, cx: float, cy: float, r: float):
    """A QPainterPath of a constellation marker (shape names of planner_gui.style)."""
    p = path_cls()

    def polygon(pts):
        p.moveTo(point_cls(*pts[0]))
        for q in pts[1:]:
            p.lineTo(point_cls(*q))
        p.closeSubpath()

    if shape == "circle":
        p.addEllipse(point_cls(cx, cy), r, r)
    elif shape == "square":
        s = r * 0.86
        p.addRect(cx - s, cy - s, 2 * s, 2 * s)
    elif shape == "triangle":
        polygon([(cx, cy - r * 1.1), (cx + r, cy + r * 0.75), (cx - r, cy + r * 0.75)])
    elif shape == "diamond":
        polygon([(cx, cy - r * 1.15), (cx + r, cy), (cx, cy + r * 1.15), (cx - r, cy)])
    elif shape == "star":
        pts = []
        for i in range(10):
            a = -math.pi / 2 + i * math.pi / 5
            rr = r * 1.15 if i % 2 == 0 else r * 0.5
            pts.append((cx + rr * math.cos(a), cy + rr * math.sin(a)))
        polygon(pts)
    elif shape == "cross":
        t = r * 0.35
        polygon([(cx - r, cy - r + t), (cx - r + t, cy - r), (cx, cy - t), (cx + r - t, cy - r),
                 (cx + r, cy - r + t), (cx + t, cy), (cx + r, cy + r - t), (cx + r - t, cy + r),
                 (cx, cy + t), (cx - r + t, cy + r), (cx - r, cy + r - t), (cx - t, cy)])
    else:  # plus
        t = r * 0.3
        polygon([(cx - t, cy - r), (cx + t, cy - r), (cx + t, cy - t), (cx + r, cy - t),
                 (cx + r, cy + t), (cx + t, cy + t), (cx + t, cy + r), (cx - t, cy + r),
                 (cx - t, cy + t), (cx - r, cy + t), (cx - r, cy - t), (cx - t, cy - t)])
    return p


# --------------------------------------------------------------------------- time axis

def time_ticks(t0: float, t1: float, max_ticks: int, offset_s: float = 0.0) -> list[float]:
    """Tick instants on whole steps of the clock shifted by offset_s (local time)."""
    span = t1 - t0
    step = next((s for s in TIME_STEPS_S if span / s <= max_ticks), TIME_STEPS_S[-1])
    first = math.ceil((t0 + offset_s) / step) * step - offset_s
    out = []
    t = first
    while t <= t1 + 1e-6:
        out.append(t)
        t += step
    return out


def _tick_label(u: float, zone, multi_day: bool) -> str:
    d = datetime.fromtimestamp(round(u), UTC)
    if zone is not None:
        d = d.astimezone(zone)
    return d.strftime("%d %H:%M" if multi_day else "%H:%M")


def _axis_labels(page: Page, ticks: list[float], xof, y: float, h: float, bounds: Rect,
                 label) -> None:
    placed: list[Rect] = []
    for t in ticks:
        text = label(t)
        tw = page.measure(text, F_AXIS) + page.geo.mm(0.2)
        cx = xof(t)
        lx = min(max(cx - tw / 2, bounds[0]), bounds[0] + bounds[2] - tw)
        cell = (lx, y, tw, h)
        if any(_overlaps(cell, q, page.geo.mm(0.6)) for q in placed):
            continue
        placed.append(cell)
        page.text(cell, text, F_AXIS, align="center", colour=INK_SOFT, role="axis")


# --------------------------------------------------------------------------- timeline

def timeline_chart(ctx, page: Page, rect: Rect, ch_from: int, ch_to: int,
                   until_unix_s: float | None = None) -> None:
    """Channels ch_from..ch_to over the test window, or from its start to ``until_unix_s``
    (the inset of the first minutes)."""
    m = page.geo.mm
    plan, clock = ctx.plan, ctx.clock
    x, y, w, h = rect
    axis = m(7.0)
    label_w = m(14.0)
    px0, pw = x + label_w, w - label_w - m(2.5)
    t0, t1 = plan.times.start_unix_s, plan.times.end_unix_s
    if until_unix_s is not None:
        t1 = min(t1, max(until_unix_s, t0 + 60.0))

    def X(t: float) -> float:
        return px0 + (min(max(t, t0), t1) - t0) / (t1 - t0) * pw

    rows_top, rows_bottom = y + axis, y + h - axis
    strip = m(2.6)              # below the last channel: the TTFF marks
    n = ch_to - ch_from + 1
    rh = (rows_bottom - strip - rows_top) / n
    max_ticks = max(2, int(page.geo.to_mm(pw) // 16))
    ticks = time_ticks(t0, t1, max_ticks)
    # Frame, grid and axes.
    page.rect((px0, rows_top, pw, rows_bottom - rows_top), stroke=RULE, width_mm=0.2)
    for t in ticks:
        page.line(X(t), rows_top, X(t), rows_bottom, PANEL_DARK, 0.15)
        page.line(X(t), rows_bottom, X(t), rows_bottom + m(1.0), INK_SOFT, 0.2)
    _axis_labels(page, ticks, X, rows_bottom + m(1.3), m(4.2), (px0 - m(4), y, pw + m(6.5), h),
                 lambda t: _tick_label(t, None, clock.multi_day))
    page.text((x, rows_bottom + m(1.3), label_w - m(4.0), m(4.2)), "UTC", F_AXIS_BOLD,
              align="right", role="axis-name")
    if clock.has_local:
        off = datetime.fromtimestamp(t0, UTC).astimezone(clock.zone).utcoffset()
        lticks = time_ticks(t0, t1, max_ticks, off.total_seconds() if off else 0.0)
        for t in lticks:
            page.line(X(t), rows_top - m(1.0), X(t), rows_top, INK_SOFT, 0.2)
        _axis_labels(page, lticks, X, rows_top - m(5.4), m(4.2), (px0 - m(4), y, pw + m(6.5), h),
                     lambda t: _tick_label(t, clock.zone, clock.local_multi_day))
        zone_name = datetime.fromtimestamp(t0, UTC).astimezone(clock.zone).tzname() or "local"
        page.text((x, rows_top - m(5.4), label_w - m(4.0), m(4.2)), zone_name, F_AXIS_BOLD,
                  align="right", role="axis-name")
    search_c = SEGMENT_COLOURS["search"]
    track_c = SEGMENT_COLOURS["track"]
    page.line(px0, rows_bottom - strip, px0 + pw, rows_bottom - strip, PANEL_DARK, 0.15)
    bar_h = rh * 0.42
    pending: list[tuple[Rect, str]] = []          # labels, drawn after the first-fix line
    for i, ch in enumerate(range(ch_from, ch_to + 1)):
        ry = rows_top + i * rh
        if i:
            page.line(px0, ry, px0 + pw, ry, PANEL, 0.15)
        page.text((x, ry, label_w - m(1.5), rh), f"ch {ch}", F_ROW, align="right", role="row-label")
        by = ry + rh * 0.5
        segs = sorted((s for s in plan.timeline.segments if s.channel == ch and s.start_unix_s < t1),
                      key=lambda s: s.start_unix_s)
        for s in segs:
            x0, x1 = X(s.start_unix_s), X(s.end_unix_s)
            x1 = max(x1, x0 + m(0.35))
            if s.kind == "search":
                page.rect((x0, by, x1 - x0, bar_h), fill=tint(search_c, 0.55))
                page.hatch((x0, by, x1 - x0, bar_h), SEARCH_EDGE, spacing_mm=0.8, width_mm=0.15)
                page.rect((x0, by, x1 - x0, bar_h), stroke=SEARCH_EDGE, width_mm=0.15)
                if not s.acquired:
                    page.marker("cross", x1, by + bar_h / 2, 1.6, INK)
            else:
                page.rect((x0, by, x1 - x0, bar_h), fill=tint(track_c, 0.25), stroke=TRACK_EDGE,
                          width_mm=0.15)
        # One label per run of work on one satellite, above the bar: wanted at the run's
        # start, pushed right past the previous label, then pulled back left of the edge.
        band = (ry + m(0.3), by - ry - m(0.5))
        labels: list[list] = []
        prev_sat = None
        for s in segs:
            if s.sat_id == prev_sat:
                continue
            prev_sat = s.sat_id
            labels.append([s.sat_id, X(s.start_unix_s), page.measure(s.sat_id, F_LABEL) + m(0.3)])
        gap = m(0.8)
        edge = -math.inf
        for lab in labels:
            lab[1] = max(lab[1], edge + gap)
            edge = lab[1] + lab[2]
        limit = px0 + pw + gap
        for lab in reversed(labels):
            lab[1] = min(lab[1], limit - gap - lab[2])
            limit = lab[1]
        pending += [((lx, band[0], tw, band[1]), sat_id) for sat_id, lx, tw in labels]
    ff = plan.timeline.first_fix_unix_s
    if ff is not None:
        page.line(X(ff), rows_top, X(ff), rows_bottom, INK, 0.35, dash=True)
    for cell, sat_id in pending:
        page.text(cell, sat_id, F_LABEL, colour=INK, role="timeline-label", halo="#FFFFFF")
    # TTFF statistics in the strip under the channels.
    for v, filled in ((plan.ttff.median_s, True), (plan.ttff.p95_s, False)):
        if math.isfinite(v) and t0 + v <= t1:
            cx = X(t0 + v)
            page.poly([(cx, rows_bottom - m(1.9)), (cx + m(1.1), rows_bottom), (cx - m(1.1), rows_bottom)],
                      colour=INK, width_mm=0.2, closed=True, fill=INK if filled else "#FFFFFF")


def _legend_flow(page: Page, rect: Rect, items: list[tuple]) -> float:
    """Legend items (draw_fn(x, y, size), text) flowing left to right; returns the bottom y."""
    m = page.geo.mm
    x, y, w, h = rect
    sw = m(5.0)
    lh = m(4.6)
    cx, cy = x, y
    for draw, text in items:
        tw = page.measure(text, F_LEGEND) + m(0.3)
        sww = sw + m(1.2) if draw is not None else 0.0
        need = sww + tw
        if cx > x and cx + need > x + w:
            cx, cy = x, cy + lh + m(0.8)
        if draw is not None:
            draw(cx, cy + m(0.4), sw, lh - m(0.8))
        page.text((cx + sww, cy, min(tw, x + w - cx - sww), lh), text, F_LEGEND,
                  colour=INK_SOFT, role="legend")
        cx += need + m(4.0)
    return cy + lh


def timeline_legend(ctx, page: Page, rect: Rect) -> float:
    m = page.geo.mm
    plan, clock = ctx.plan, ctx.clock
    search_c, track_c = SEGMENT_COLOURS["search"], SEGMENT_COLOURS["track"]

    def search(x, y, w, h):
        page.rect((x, y, w, h), fill=tint(search_c, 0.55))
        page.hatch((x, y, w, h), SEARCH_EDGE, spacing_mm=0.8, width_mm=0.15)
        page.rect((x, y, w, h), stroke=SEARCH_EDGE, width_mm=0.15)

    def track(x, y, w, h):
        page.rect((x, y, w, h), fill=tint(track_c, 0.25), stroke=TRACK_EDGE, width_mm=0.15)

    def fix(x, y, w, h):
        page.line(x + w / 2, y - m(0.3), x + w / 2, y + h + m(0.3), INK, 0.35, dash=True)

    def tri(filled):
        def draw(x, y, w, h):
            cx = x + w / 2
            page.poly([(cx, y + h - m(1.9)), (cx + m(1.1), y + h), (cx - m(1.1), y + h)], colour=INK,
                      width_mm=0.2, closed=True, fill=INK if filled else "#FFFFFF")
        return draw

    def cross(x, y, w, h):
        page.marker("cross", x + w / 2, y + h / 2, 1.6, INK)

    ff = plan.timeline.first_fix_unix_s
    items = [(search, "search"), (track, "track (acquired, until it sets)")]
    if ff is not None:
        items.append((fix, f"expected first fix {clock.hms(ff)} UTC"))
    t = plan.ttff
    if math.isfinite(t.median_s):
        items.append((tri(True), f"TTFF median {t.median_s:.1f} s"))
    if math.isfinite(t.p95_s):
        items.append((tri(False), f"TTFF 95th percentile {t.p95_s:.1f} s"))
    if any(s.kind == "search" and not s.acquired for s in plan.timeline.segments):
        items.append((cross, "search abandoned (satellite set or window ended)"))
    return _legend_flow(page, rect, items)


# --------------------------------------------------------------------------- sky plot

def sky_chart(ctx, page: Page, rect: Rect) -> None:
    m = page.geo.mm
    plan = ctx.plan
    x, y, w, h = rect
    legend_w = m(46.0)
    below = h >= w + m(45.0)            # tall space: full-width plot, legend under it
    d = w if below else min(h, w - legend_w)
    margin = m(6.0)
    R = d / 2 - margin
    cx, cy = x + d / 2, y + d / 2
    mask = plan.scenario.mask.elevation_deg

    def rad(el):
        return R * (90.0 - np.clip(el, -5, 90)) / 90.0

    def pos(az, el):
        r = rad(el)
        a = np.radians(az)
        return cx + r * np.sin(a), cy - r * np.cos(a)

    chart_box = (x, y, d, d)
    # Background: the band below the mask is shaded.
    page.ellipse((cx - R, cy - R, 2 * R, 2 * R), fill=PANEL, stroke=INK_SOFT, width_mm=0.3)
    rm = float(rad(mask))
    if mask > 0:
        page.ellipse((cx - rm, cy - rm, 2 * rm, 2 * rm), fill="#FFFFFF", stroke=CAUTION,
                     width_mm=0.3, dash=True)
    for el in (30, 60):
        r = float(rad(el))
        page.ellipse((cx - r, cy - r, 2 * r, 2 * r), stroke=RULE, width_mm=0.2)
    for az in range(0, 360, 30):
        a = math.radians(az)
        page.line(cx, cy, cx + R * math.sin(a), cy - R * math.cos(a), RULE, 0.15)
    obstacles: list[Rect] = []
    for name, az in (("N", 0), ("E", 90), ("S", 180), ("W", 270)):
        a = math.radians(az)
        tx, ty = cx + (R + m(3.2)) * math.sin(a), cy - (R + m(3.2)) * math.cos(a)
        tw, th = m(4.0), m(4.0)
        box = page.text((tx - tw / 2, ty - th / 2, tw, th), name, F_COMPASS, align="center",
                        role="compass")
        obstacles.append(box.ink)
    for el in (30, 60):
        r = float(rad(el))
        box = page.text((cx + m(0.6), cy - r + m(0.3), m(8.0), m(4.2)), f"{el}°", F_AXIS,
                        colour=INK_FAINT, role="ring")
        obstacles.append(box.ink)
    if mask > 0:
        box = page.text((cx + m(0.6), cy - rm + m(0.3), m(20.0), m(4.2)), f"mask {mask:g}°", F_AXIS,
                        colour=CAUTION_INK, role="ring", halo="#FFFFFF")
        obstacles.append(box.ink)
    # Tracks, direction arrows, markers.
    az_all, el_all = plan.prediction.azimuth_deg, plan.prediction.elevation_deg
    first_search = {}
    for e in ctx.entries:
        first_search.setdefault(e.sat_id, e)
    points: list[tuple[str, float, float, str, str]] = []
    for s, sp in enumerate(plan.satellites):
        vis = plan.visible[s]
        if not vis.any():
            continue
        st = style_for(sp.system)
        idx = np.nonzero(vis)[0]
        runs = np.split(idx, np.nonzero(np.diff(idx) > 1)[0] + 1)
        for run in runs:
            xs, ys = pos(az_all[s, run], el_all[s, run])
            page.poly(list(zip(xs.tolist(), ys.tolist())), colour=st.colour, width_mm=0.3)
            if run.size >= 2:
                _arrow(page, xs[-2], ys[-2], xs[-1], ys[-1], st.colour)
        e = first_search.get(sp.sat_id)
        if e is not None:
            px, py = pos(e.azimuth_deg, e.elevation_deg)
            filled = True
        else:
            k = idx[0]
            px, py = pos(az_all[s, k], el_all[s, k])
            filled = False
        points.append((sp.sat_id, float(px), float(py), st.marker_name, st.colour))
        page.marker(st.marker_name, float(px), float(py), 2.4, st.colour, filled=filled)
        obstacles.append((float(px) - m(1.3), float(py) - m(1.3), m(2.6), m(2.6)))
    # Labels: the first free place around each marker.
    lh = page.line_height(F_LABEL)
    for sat_id, px, py, _, _ in sorted(points, key=lambda p: p[2]):
        tw = page.measure(sat_id, F_LABEL) + m(0.2)
        own = (px - m(1.3), py - m(1.3), m(2.6), m(2.6))
        placed = None
        for dist in (1.4, 2.4, 3.6, 5.0, 6.6, 8.5):
            dd = m(dist)
            for a_deg in _LABEL_ANGLES:
                a = math.radians(a_deg)
                ux, uy = math.cos(a), -math.sin(a)
                cxl = px + ux * (dd + tw / 2)
                cyl = py + uy * (dd + lh / 2)
                cell = (cxl - tw / 2, cyl - lh / 2, tw, lh)
                if not _inside(cell, chart_box):
                    continue
                if any(_overlaps(cell, o, m(0.15)) for o in obstacles if o != own):
                    continue
                placed = cell
                break
            if placed:
                break
        if placed is None:
            placed = (px + m(1.6), py - lh / 2, tw, lh)
        lc = (placed[0] + placed[2] / 2 - cx, placed[1] + placed[3] / 2 - cy)
        behind = PANEL if math.hypot(*lc) > rm and mask > 0 else "#FFFFFF"
        page.text(placed, sat_id, F_LABEL, colour=INK, role="sky-label", halo=behind)
        obstacles.append(placed)
    # Legend, to the right of the plot or under it.
    if below:
        _sky_legend(ctx, page, (x, y + d + m(2.0), w, h - d - m(2.0)), mask)
    else:
        _sky_legend(ctx, page, (x + d + m(4.0), y + m(4.0), w - d - m(4.0), h - m(4.0)), mask)


def _arrow(page: Page, x0: float, y0: float, x1: float, y1: float, colour: str) -> None:
    m = page.geo.mm
    dx, dy = x1 - x0, y1 - y0
    n = math.hypot(dx, dy)
    if n == 0:
        return
    ux, uy = dx / n, dy / n
    s = m(1.5)
    tip = (x1 + ux * s * 0.6, y1 + uy * s * 0.6)
    left = (tip[0] - ux * s - uy * s * 0.55, tip[1] - uy * s + ux * s * 0.55)
    right = (tip[0] - ux * s + uy * s * 0.55, tip[1] - uy * s - ux * s * 0.55)
    page.poly([tip, left, right], colour=colour, width_mm=0.1, closed=True, fill=colour)


def _sky_legend(ctx, page: Page, rect: Rect, mask: float) -> None:
    m = page.geo.mm
    x, y, w, _ = rect
    systems = sorted({sp.system for s, sp in enumerate(ctx.plan.satellites) if ctx.plan.visible[s].any()},
                     key=lambda k: list(SYSTEM_STYLES).index(k) if k in SYSTEM_STYLES else 99)
    lh = m(4.0)
    page.text((x, y, w, lh), "Constellations", FontSpec(10.0, bold=True), role="legend-title")
    y += lh + m(0.5)
    for sys_id in systems:
        st = style_for(sys_id)
        page.marker(st.marker_name, x + m(1.6), y + lh / 2, 2.4, st.colour)
        page.line(x + m(3.6), y + lh / 2, x + m(7.0), y + lh / 2, st.colour, 0.3)
        page.text((x + m(8.0), y, w - m(8.0), lh), f"{st.label} ({st.marker_name})", F_LEGEND,
                  role="legend")
        y += lh
    y += m(2.0)
    notes = [
        "Filled marker: position at the satellite's first search; hollow: where it is first in "
        "view (no search scheduled).",
        "Line: track while above the mask over the test window; arrow: direction of motion.",
        f"Dashed ring: elevation mask {mask:g}°; shaded: below the mask. Rings at 30° and 60°.",
        "North up, east to the right (as on a map).",
    ]
    for t in notes:
        fm = page.typesetter.metrics(F_LEGEND)
        lines = wrap_lines(t, w, fm)
        hh = (len(lines) - 1) * fm.lineSpacing() + fm.ascent() + fm.descent()
        page.text((x, y, w, hh), t, F_LEGEND, wrap=True, valign="top", colour=INK_SOFT, role="legend")
        y += hh + m(1.2)


# --------------------------------------------------------------------------- Doppler

def ladder_span(entries) -> tuple[float, float, float]:
    """Frequency range (low, high) covering every search and the tick step, Hz."""
    if not entries:
        return -5000.0, 5000.0, 1000.0
    lo = min(min(float(e.bin_centres_hz[0]) - e.bin_width_hz / 2, e.low_hz, e.nominal_hz) for e in entries)
    hi = max(max(float(e.bin_centres_hz[-1]) + e.bin_width_hz / 2, e.high_hz, e.nominal_hz) for e in entries)
    pad = 0.02 * (hi - lo) if hi > lo else 500.0
    lo, hi = lo - pad, hi + pad
    step = nice_step(hi - lo, 8)
    return math.floor(lo / step) * step, math.ceil(hi / step) * step, step


def _tick_formatter(ticks: list[float]):
    """Signed tick labels; in kHz steps ("+10k") when the axis reaches 10 kHz."""
    kilo = max((abs(t) for t in ticks), default=0.0) >= 10000

    def fmt(v: float) -> str:
        if abs(v) < 1e-9:
            return "0"
        return f"{v / 1000:+g}k" if kilo else f"{v:+g}"
    return fmt


def ladder_chart(ctx, page: Page, rect: Rect, entries, span: tuple[float, float, float]) -> None:
    m = page.geo.mm
    clock = ctx.clock
    x, y, w, h = rect
    axis = m(7.0)
    label_w, right_w = m(36.0), m(17.0)
    px0, pw = x + label_w, w - label_w - right_w
    f0, f1, step = span

    def X(f: float) -> float:
        return px0 + (f - f0) / (f1 - f0) * pw

    rows_top, rows_bottom = y + axis, y + h - axis
    page.rect((px0, rows_top, pw, rows_bottom - rows_top), stroke=RULE, width_mm=0.2)
    ticks = [f0 + i * step for i in range(int(round((f1 - f0) / step)) + 1)]
    for t in ticks:
        colour, width = (INK_FAINT, 0.3) if abs(t) < 1e-9 else (PANEL_DARK, 0.15)
        page.line(X(t), rows_top, X(t), rows_bottom, colour, width)
        page.line(X(t), rows_top - m(1.0), X(t), rows_top, INK_SOFT, 0.2)
        page.line(X(t), rows_bottom, X(t), rows_bottom + m(1.0), INK_SOFT, 0.2)
    bounds = (px0 - m(5), y, pw + m(10), h)
    fmt = _tick_formatter(ticks)
    _axis_labels(page, ticks, X, rows_top - m(5.4), m(4.2), bounds, fmt)
    _axis_labels(page, ticks, X, rows_bottom + m(1.3), m(4.2), bounds, fmt)
    page.text((x, rows_bottom + m(1.3), label_w - m(6.0), m(4.2)), "Doppler, Hz", F_AXIS_BOLD,
              align="right", role="axis-name")
    page.text((x, rows_top - m(5.4), label_w - m(6.0), m(4.2)), "Doppler, Hz", F_AXIS_BOLD,
              align="right", role="axis-name")
    if not entries:
        page.text((px0, rows_top, pw, rows_bottom - rows_top), "No search scheduled in the window.",
                  F_ROW, align="center", colour=INK_SOFT, role="empty")
        return
    rh = (rows_bottom - rows_top) / len(entries)
    for i, e in enumerate(entries):
        ry = rows_top + i * rh
        if i % 2 == 0:
            page.rect((x, ry, label_w - m(1.0), rh), fill=PANEL)
            page.rect((px0 + pw + m(1.0), ry, right_w - m(1.0), rh), fill=PANEL)
        st = style_for(e.system)
        page.marker(st.marker_name, x + m(1.8), ry + rh * 0.3, 2.0, st.colour)
        page.text((x + m(3.6), ry + m(0.2), m(11.0), rh * 0.5 - m(0.2)), e.sat_id, F_ROW_BOLD,
                  role="doppler-sat")
        state = state_word(e.state)
        page.text((x + m(15.0), ry + m(0.2), label_w - m(16.5), rh * 0.5 - m(0.2)),
                  f"ch {e.channel}", F_ROW, align="right", colour=INK_SOFT,
                  role="doppler-ch")
        page.text((x + m(3.6), ry + rh * 0.5, label_w - m(5.1), rh * 0.5 - m(0.2)),
                  f"{state} · {clock.hms(e.start_unix_s)}", F_ROW, colour=INK_SOFT, role="doppler-start")
        page.text((px0 + pw + m(1.5), ry, right_w - m(2.0), rh), f"{e.bins} bins", F_ROW,
                  align="right", role="doppler-bins")
        bar_h = rh * 0.38
        by = ry + (rh - bar_h) / 2 - rh * 0.06
        half = e.bin_width_hz / 2
        centres = np.asarray(e.bin_centres_hz, dtype=float)
        if X(centres[0] + half) - X(centres[0] - half) < m(0.5):
            page.rect((X(centres[0] - half), by, X(centres[-1] + half) - X(centres[0] - half), bar_h),
                      fill=tint(st.colour, 0.55))
        else:
            for j, c in enumerate(centres):
                page.rect((X(c - half), by, X(c + half) - X(c - half), bar_h),
                          fill=tint(st.colour, 0.35 if j % 2 == 0 else 0.7))
        # Window bracket below the bins; predicted Doppler as a tick through them.
        yb = by + bar_h + m(0.7)
        page.line(X(e.low_hz), yb, X(e.high_hz), yb, INK, 0.3)
        page.line(X(e.low_hz), by + bar_h, X(e.low_hz), yb, INK, 0.3)
        page.line(X(e.high_hz), by + bar_h, X(e.high_hz), yb, INK, 0.3)
        page.line(X(e.nominal_hz), by - m(0.6), X(e.nominal_hz), by + bar_h, INK, 0.4)


def ladder_legend(ctx, page: Page, rect: Rect) -> float:
    colour = style_for("G").colour

    def bins(x, y, w, h):
        for j in range(4):
            page.rect((x + j * w / 4, y + h * 0.15, w / 4, h * 0.55),
                      fill=tint(colour, 0.35 if j % 2 == 0 else 0.7))

    def bracket(x, y, w, h):
        page.line(x, y + h * 0.8, x + w, y + h * 0.8, INK, 0.3)
        page.line(x, y + h * 0.4, x, y + h * 0.8, INK, 0.3)
        page.line(x + w, y + h * 0.4, x + w, y + h * 0.8, INK, 0.3)

    def tick(x, y, w, h):
        page.line(x + w / 2, y, x + w / 2, y + h, INK, 0.4)

    items = [(bins, "frequency bins (alternating shades, width to scale)"),
             (bracket, "search window, low to high"),
             (tick, "predicted Doppler at the search start"),
             (None, "first: oscillator error unknown · narrowed: after the first acquisition")]
    return _legend_flow(page, rect, items)

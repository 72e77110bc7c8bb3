"""Sheets of a drive: the route page (stretches and events in the order of driving) and one
page per test event (where, when, what the receiver knows, the searches by channel with
their windows and bins, the time to fix and when to give up).

Built on the sheets' own page furniture (:mod:`planner_gui.sheets`: context, clock, fonts,
colours); :func:`drive_pages` is called by :func:`planner_gui.sheets.build_pages` when the
scenario has a route or events.
"""

from __future__ import annotations

import math

from core.api import duration_text
from core.files.plan_export import SearchEntry, search_entries
from planner_gui.sheet_layout import INK_FAINT, INK_SOFT, PANEL, PANEL_DARK, Page

from . import sheets as sh

EVENT_SHORT = {"cold": "cold start", "warm": "warm start", "hot": "hot start",
               "reacquire": "re-acquisition"}
EVENT_WORDS = {"cold": "cold start", "warm": "warm start", "hot": "hot start",
               "reacquire": "re-acquisition after an outage"}
STRETCH_WORDS = {"open": "open sky", "trees": "trees", "canyon": "street canyon",
                 "outage": "outage (nothing received)"}
ROW_MM = 6.0
HEAD_MM = 9.0
PAD_MM = 1.0


def _s(v: float | None) -> str:
    return "no fix" if v is None or not math.isfinite(v) else f"{v:.0f} s"


def _row_height(ctx, page: Page, row: list[str], widths: list[float]) -> float:
    m = ctx.geo.mm
    pad = m(PAD_MM)
    tallest = max((sh._wrapped_height(page, v, sh.F_TABLE, cw - 2 * pad) for v, cw in zip(row, widths) if v),
                  default=0.0)
    return max(m(ROW_MM), tallest + m(1.6))


def _widths(w: float, weights: list[float]) -> list[float]:
    total = sum(weights)
    return [w * k / total for k in weights]


def _table(ctx, page: Page, x: float, y: float, w: float, heads: list[str],
           weights: list[float], rows: list[list[str]], aligns: str, role: str) -> float:
    """A plain table: a dark header row, striped body rows that wrap long text. Returns
    the y below it."""
    m = ctx.geo.mm
    pad = m(PAD_MM)
    widths = _widths(w, weights)
    xs = [x]
    for cw in widths:
        xs.append(xs[-1] + cw)
    page.rect((x, y, w, m(HEAD_MM)), fill=PANEL_DARK)
    for head, x0, cw, a in zip(heads, xs, widths, aligns):
        page.text((x0 + pad, y + m(0.5), cw - 2 * pad, m(HEAD_MM) - m(1.0)), head, sh.F_TABLE_HEAD,
                  align="left" if a == "l" else "right", wrap=True, role=f"{role}-head")
    y += m(HEAD_MM)
    for n, row in enumerate(rows):
        rh = _row_height(ctx, page, row, widths)
        if n % 2 == 0:
            page.rect((x, y, w, rh), fill=PANEL)
        for v, x0, cw, a in zip(row, xs, widths, aligns):
            if v:
                page.text((x0 + pad, y + m(0.8), cw - 2 * pad, rh - m(1.6)), v, sh.F_TABLE,
                          align="left" if a == "l" else "right", wrap=True, valign="top",
                          min_pt=9.0, role=f"{role}-cell")
        y += rh
    page.line(x, y, x + w, y, INK_FAINT, 0.25)
    return y


def _fit_rows(ctx, page: Page, rows: list[list[str]], weights: list[float], w: float,
              room: float) -> int:
    """How many of ``rows`` fit in the height ``room`` (at least one)."""
    widths = _widths(w, weights)
    used, n = 0.0, 0
    for row in rows:
        used += _row_height(ctx, page, row, widths)
        if used > room and n:
            break
        n += 1
    return max(n, 1)


# --------------------------------------------------------------------------- route page

def route_rows(ctx, drive) -> list[list[str]]:
    """Everything the crew meets along the route, in the order of driving: stretch
    starts and ends and test events, by distance (then time)."""
    c = ctx.clock

    def when(distance_m: float) -> float:
        # the route's own timetable, not the nearest plan step (a stretch of 72 s
        # would otherwise print as 60 s or 90 s at a 30 s step)
        return drive.drive.route.time_at_distance(distance_m)

    items: list[tuple[float, float, list[str]]] = []
    for s in drive.drive.stretches:
        if s.kind == "open":
            continue
        what = STRETCH_WORDS.get(s.kind, s.kind)
        extra = []
        if s.extra_loss_db:
            extra.append(f"extra loss {s.extra_loss_db:g} dB")
        if s.kind == "canyon":
            extra.append(f"buildings {s.building_height_m:g} m, street {s.street_width_m:g} m wide")
        if s.kind == "outage":
            extra.append("no satellite received; re-acquisition at the end")
        for d, edge in ((s.from_m, "begins"), (s.to_m, "ends")):
            t = when(d)
            items.append((d, t, [c.hms(t), f"{d / 1000.0:.2f}",
                                 f"{s.name} ({what}) {edge}" if s.name else f"{what} {edge}",
                                 "; ".join(extra) if edge == "begins" else ""]))
    for e in drive.events:
        kind = EVENT_WORDS.get(e.event.kind, e.event.kind)
        ff = e.first_fix_unix_s
        note = (f"fix expected {c.hms(ff)} (median {_s(e.ttff_median_s)}, 95 % {_s(e.ttff_p95_s)}); "
                f"{len(e.visible_ids)} searchable, {len(e.blocked_ids)} blocked") if ff is not None else \
            f"no fix within the event's plan; {len(e.visible_ids)} searchable, {len(e.blocked_ids)} blocked"
        items.append((e.distance_m, e.event.unix_s,
                      [c.hms(e.event.unix_s), f"{e.distance_m / 1000.0:.2f}",
                       f"{e.event.id}: {e.event.name or kind}" + ("" if kind.split()[0] in (e.event.name or kind)
                                                                  else f" ({kind})"), note]))
    items.sort(key=lambda it: (it[1], it[0]))
    return [row for _d, _t, row in items]


def route_page(ctx, drive) -> list[Page]:
    m = ctx.geo.mm
    bx, by, bw, bh = ctx.geo.body
    route = drive.drive.route
    rows = route_rows(ctx, drive)
    weights = [1.1, 0.8, 3.4, 5.0]
    pages = []
    remaining = rows
    while remaining or not pages:
        page = ctx.new_page("The drive in order" + (" (continued)" if pages else ""), kind="route")
        n = _fit_rows(ctx, page, remaining, weights, bw, bh - m(13) - m(HEAD_MM) - m(18))
        chunk, remaining = remaining[:n], remaining[n:]
        worst = drive.worst
        intro = (f"Route {route.length_m / 1000.0:.1f} km, {ctx.clock.hms(route.start_unix_s)} to "
                 f"{ctx.clock.hms(route.end_unix_s)} UTC ({route.timing}); {len(drive.events)} test events"
                 + (f"; the longest time to fix is at {worst.event.id}" if worst is not None else "")
                 + ". Times UTC at the planned timetable; distances along the route from its start.")
        page.text((bx, by, bw, m(12)), intro, sh.F_BODY, wrap=True, valign="top", role="route-intro")
        y = _table(ctx, page, bx, by + m(13), bw, ["Time UTC", "km", "What", "Notes"],
                   weights, chunk, "lrll", "route")
        page.text((bx, y + m(2), bw, m(14)),
                  "Safety: the driver drives; a second person reads the sheets and works the laptop. "
                  "Stop where the traffic rules allow before handling anything.",
                  sh.F_SMALL, wrap=True, valign="top", colour=INK_SOFT, role="route-safety")
        pages.append(page)
    return pages


# --------------------------------------------------------------------------- event pages

def event_facts(ctx, ev) -> list[tuple[str, str]]:
    c = ctx.clock
    k = ev.event.knowledge
    t = ev.event.unix_s
    when = f"{c.hms(t)} UTC"
    if c.has_local:
        when += f" · {c.local_hms(t)}"
    when += f" · {c.gps(t)}"
    knows = []
    knows.append("time: nothing" if k.time_uncertainty_s is None else f"time ±{duration_text(k.time_uncertainty_s)}")
    knows.append("position: nothing" if k.horizontal_uncertainty_km is None
                 else f"position ±{k.horizontal_uncertainty_km:g} km, ±{k.vertical_uncertainty_m:g} m up"
                 + (f", ±{k.along_route_m / 1000.0:.2f} km along the route" if k.along_route_m else ""))
    knows.append(f"oscillator ±{k.oscillator_uncertainty_ppb:g} ppb")
    knows.append(f"ephemeris after {k.ephemeris_wait_s:g} s")
    ff = ev.first_fix_unix_s
    give_up = None if ev.ttff_p95_s is None or not math.isfinite(ev.ttff_p95_s) else t + ev.ttff_p95_s
    rows = [("Event", f"{ev.event.id}: {ev.event.name or EVENT_WORDS.get(ev.event.kind, ev.event.kind)}"
                      + ("" if ev.event.origin == "scenario" else " (made by the outage stretch)")),
            ("When", when),
            ("Where", f"{ev.distance_m / 1000.0:.2f} km along the route, {ev.stretch}; "
                      f"{ev.lat_deg:.5f}°, {ev.lon_deg:.5f}°, {ev.height_m:.0f} m; "
                      f"{ev.speed_m_s * 3.6:.0f} km/h heading {ev.heading_deg:.0f}°"),
            ("Receiver knows", "; ".join(knows)),
            ("Sky there", f"{len(ev.visible_ids)} satellites searchable, {len(ev.blocked_ids)} above the "
                          "mask but blocked by the surroundings"
                          + (f" ({' '.join(ev.blocked_ids[:12])}{' …' if len(ev.blocked_ids) > 12 else ''})"
                             if ev.blocked_ids else "")),
            ("Time to fix", ("no fix expected within the event's plan" if ff is None else
                             f"expected {c.hms(ff)} UTC; median {_s(ev.ttff_median_s)}, "
                             f"95 % {_s(ev.ttff_p95_s)}")),
            ("Give up", "— (more than 5 % of the simulated starts have no fix within the event's plan: "
                        "keep the receiver searching and note the time of the fix)" if give_up is None else
             f"at {c.hms(give_up)} UTC (95 % of simulated starts have a fix by then): restart the "
             "receiver and note it in the incident log")]
    if ev.event.outage_s:
        rows.insert(1, ("Outage", f"{ev.event.outage_s:.0f} s without signals, "
                                  f"{(ev.event.outage_driven_m or 0.0) / 1000.0:.2f} km driven"))
    return rows


def search_rows(ctx, entries: list[SearchEntry]) -> list[list[str]]:
    c = ctx.clock
    out = []
    for e in sorted(entries, key=lambda e: (e.channel, e.start_unix_s)):
        give = sh.give_up_unix_s(e)
        out.append([str(e.channel), e.sat_id, c.hms(e.start_unix_s),
                    f"{sh.fmt_hz(e.low_hz)} … {sh.fmt_hz(e.high_hz)}",
                    f"{len(e.bin_centres_hz)} × {sh.fmt_bin_width(e.bin_width_hz)}",
                    str(e.code_cells), sh.fmt_s(e.expected_search_s),
                    "—" if give is None else c.hms(give),
                    e.spare or "widen 1 bin",
                    "found" if e.acquired else
                    ("cut at plan end" if sh._ends_with_window(ctx, e.end_unix_s) else "satellite sets")])
    return out


def event_pages(ctx, ev) -> list[Page]:
    """``ctx``: a sheets context of the event's own plan."""
    m = ctx.geo.mm
    bx, by, bw, bh = ctx.geo.body
    facts = event_facts(ctx, ev)
    rows = search_rows(ctx, search_entries(ev.plan))
    title = f"Event {ev.event.id}: {EVENT_SHORT.get(ev.event.kind, ev.event.kind)}"
    heads = ["Ch", "Sat", "Start UTC", "Window Hz", "Bins × Hz", "Code cells", "Exp. s",
             "Give up UTC", "Then", "Result"]
    weights = [0.45, 0.6, 1.0, 1.8, 1.2, 0.9, 0.8, 1.0, 1.3, 1.2]
    pages = []
    first = True
    remaining = rows
    while first or remaining:
        page = ctx.new_page(title + ("" if first else " (continued)"), kind="event", event=ev.event.id)
        y = by
        if first:
            y = sh._kv_block(ctx, page, bx, y, bw, facts)
            y += m(3)
        n = _fit_rows(ctx, page, remaining, weights, bw, by + bh - y - m(HEAD_MM) - m(16))
        chunk, remaining = remaining[:n], remaining[n:]
        y = _table(ctx, page, bx, y, bw, heads, weights, chunk, "lllrrrrlll", "event")
        if not remaining:
            page.text((bx, y + m(1.5), bw, m(14)),
                      "Searches by channel in the order they start. Window: apparent Doppler at the search "
                      "start; bins × width tile it. Give up: 95 % of such searches have found the signal by "
                      "then; then re-task the channel to the spare named, or widen the window by one bin "
                      "each side. Result: found; cut at the end of the event's plan; or the satellite sets first.",
                      sh.F_SMALL, wrap=True, valign="top", colour=INK_SOFT, role="event-legend")
        pages.append(page)
        first = False
    return pages


def drive_pages(drive, device, geo, generated_unix_s, base_ctx) -> list[Page]:
    """The route page, then one page (or more) per event, in the order of driving."""
    pages: list[Page] = []
    if drive.samples is not None and drive.drive is not None:
        pages += route_page(base_ctx, drive)
    for ev in drive.events:
        ectx = sh._context(ev.plan, device, geo, generated_unix_s)
        pages += event_pages(ectx, ev)
    return pages

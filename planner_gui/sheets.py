"""The printed search-plan sheets: PDF, printer and print preview, drawn with QPainter.

Pages, in order:

1. Summary: scenario, site and its uncertainties, test window in UTC and local time,
   orbit files with epoch and age, receiver and search settings, headline figures,
   warnings, safety cautions and conventions (continued on a second page only when the
   plan's warnings do not fit).
2. Satellites in view: one row per satellite (a further row per extra pass), the search
   that the channel timeline gives it; the header repeats on every page.
3. Overview: channel timeline and sky plot (the timeline gets pages of its own when the
   receiver has more than OVERVIEW_MAX_CHANNELS channels, and the sky plot then follows
   on its own page).
4. Doppler search windows: every search of the timeline, bins drawn to scale.
5. Channel cards: one card per channel (a further card for every SEARCHES_PER_CARD
   searches) with tick boxes, for use in the vehicle.
6. Field record: the times to compare with the receiver log, and the incident log.
7. Only with a receiver record loaded onto the plan: the record against the plan
   (planner_gui.sheet_record).

Every page carries "page x of y", the scenario file name with the short content hash
(:func:`core.files.plan_export.content_hash`: first 10 hex digits of the SHA-256 of the scenario
file bytes followed by the orbit files' bytes, i.e. ``cat SCENARIO ORBITS... | sha256sum``),
the generation time and the program version.

The layout is designed for A4 and US Letter, portrait; on other page sizes chosen in a
print dialog it adapts (rows, cards per page) on a best-effort basis.

Entry points: :func:`write_sheet_pdf`, :func:`paint_sheets` (any QPagedPaintDevice,
QPrinter included), :func:`show_print_preview`, :func:`show_print_dialog` and
:func:`run_sheet_command` (``acqplan sheet``). Qt print support is imported lazily.
"""

from __future__ import annotations

import math
import os
import sys
import tempfile
import time as _time
from collections.abc import Callable
from dataclasses import dataclass, replace
from datetime import UTC, datetime
from pathlib import Path
from zoneinfo import ZoneInfo

import numpy as np

from core.api import (
    InputError,
    Plan,
    clock_text,
    gps_week_tow,
    hz_text,
    state_word,
    utc_stamp,
    whole_second,
)
from core.files.plan_export import (
    ContentHash,
    SearchEntry,
    content_hash,
    in_view_satellites,
    max_elevation_deg,
    search_entries,
    view_intervals,
)
from planner_gui import sheet_charts as charts
from planner_gui.sheet_layout import (
    ACCENT,
    CAUTION,
    CAUTION_INK,
    INK,
    INK_FAINT,
    INK_SOFT,
    PANEL,
    PANEL_DARK,
    PAPER_MM,
    RULE,
    FontSpec,
    Geometry,
    Page,
    Typesetter,
    layout_problems,
    tint,
    wrap_lines,
)
from planner_gui.style import SAFETY_CAUTIONS, style_for

DOCUMENT_TITLE = "Acquisition search plan"
PDF_DPI = 1200

# Layout constants, millimetres (see also sheet_layout).
TABLE_INTRO_MM = 11.0
TABLE_HEAD_MM = 10.0
TABLE_ROW_MM = 5.2
TABLE_LEGEND_MM = 18.0
TABLE_PAD_MM = 0.9
LADDER_INTRO_MM = 9.0
LADDER_AXIS_MM = 8.5
LADDER_LEGEND_MM = 10.0
LADDER_ROW_MM = 10.0
TIMELINE_ROW_MM = 8.5
TIMELINE_AXIS_MM = 8.5
TIMELINE_LEGEND_MM = 12.0
TIMELINE_INTRO_MM = 9.0
OVERVIEW_MAX_CHANNELS = 16
RECORD_MM = 30.0
CARD_COLUMNS_MAX = 3        # cards side by side: one per CARD_MIN_W_MM of width, at most this
CARD_ROWS = 3               # cards one above the other: one per CARD_MIN_H_MM, at most this
CARD_MIN_W_MM = 88.0
CARD_MIN_H_MM = 68.0
CARD_GAP_MM = 3.0
CARDS_INTRO_MM = 9.0
SEARCHES_PER_CARD = 3

# Type styles.
F_KICKER = FontSpec(9.0, bold=True)
F_SECTION = FontSpec(13.0, bold=True)
F_HEADER_NAME = FontSpec(9.0)
F_FOOT = FontSpec(6.5)
F_FOOT_BOLD = FontSpec(6.5, bold=True)
F_TITLE = FontSpec(15.0, bold=True)
F_SUBTITLE = FontSpec(10.0)
F_H2 = FontSpec(11.0, bold=True)
F_BODY = FontSpec(9.5)
F_BODY_BOLD = FontSpec(9.5, bold=True)
F_SMALL = FontSpec(9.0)
F_SMALL_ITALIC = FontSpec(9.0, italic=True)
F_TILE_CAPTION = FontSpec(9.0, bold=True)
F_TILE_VALUE = FontSpec(15.0, bold=True)
F_TILE_NOTE = FontSpec(9.0)
F_TABLE = FontSpec(9.5, condensed=True)
F_TABLE_HEAD = FontSpec(9.0, bold=True, condensed=True)
F_CARD_HEAD = FontSpec(12.0, bold=True)
F_CARD_SAT = FontSpec(14.0, bold=True)
F_CARD_START = FontSpec(13.0, bold=True)
F_CARD = FontSpec(11.0, condensed=True)
F_CARD_SOFT = FontSpec(10.0, condensed=True)
F_CARD_BOLD = FontSpec(11.0, bold=True, condensed=True)
CARD_HEAD_MM = 8.0          # the channel's title bar
CARD_TITLE_MM = 12.0        # a search's first line (satellite, start) and its time line


# --------------------------------------------------------------------------- formats

def fmt_hz(v: float) -> str:
    """Frequencies on the sheets: whole hertz (no '-0'), the rounding of every face."""
    return hz_text(v, unicode_minus=False)


def fmt_bin_width(v: float) -> str:
    return f"{v:.2f}"


def fmt_prob(p: float) -> str:
    """A small probability: 1e-4 rather than 0.0001."""
    if p == 0 or p >= 0.01:
        return f"{p:g}"
    exp = math.floor(math.log10(p) + 1e-12)
    return f"{p / 10 ** exp:.3g}e{exp}"


def fmt_mhz(carrier_hz: float) -> str:
    return f"{carrier_hz / 1e6:.4f}"


def fmt_s(v: float | None, digits: int = 1) -> str:
    if v is None or not math.isfinite(v):
        return "n/a"
    return f"{v:.{digits}f}"


def fmt_duration(seconds: float) -> str:
    s = int(round(seconds))
    d, rem = divmod(s, 86400)
    h, rem = divmod(rem, 3600)
    m, _ = divmod(rem, 60)
    if d:
        return f"{d} d {h} h {m:02d} min"
    return f"{h} h {m:02d} min"


class Clock:
    """Times on the sheets: UTC, and local time in the scenario's zone."""

    def __init__(self, plan: Plan):
        sc = plan.scenario
        self.zone_name = sc.time.timezone or "UTC"
        self.zone = ZoneInfo(self.zone_name)
        self.t0 = plan.times.start_unix_s
        self.t1 = plan.times.end_unix_s
        self.multi_day = self._utc(self.t0).date() != self._utc(self.t1).date()
        self.local_multi_day = self._loc(self.t0).date() != self._loc(self.t1).date()
        self.has_local = self.zone_name.upper() != "UTC"

    @staticmethod
    def _utc(u: float) -> datetime:
        return datetime.fromtimestamp(whole_second(u), UTC)

    def _loc(self, u: float) -> datetime:
        return self._utc(u).astimezone(self.zone)

    def hms(self, u: float) -> str:
        return clock_text(u, day=self.multi_day)

    def hm(self, u: float) -> str:
        d = datetime.fromtimestamp(u, UTC).replace(second=0, microsecond=0)
        return d.strftime("%d %H:%M" if self.multi_day else "%H:%M")

    def local_hms(self, u: float) -> str:
        d = self._loc(u)
        body = d.strftime("%d %H:%M:%S" if self.local_multi_day else "%H:%M:%S")
        return f"{body} {d.tzname()}"

    def gps(self, u: float) -> str:
        week, tow = gps_week_tow(u)
        return f"GPS {week} / {tow} s"

    def full(self, u: float) -> str:
        return utc_stamp(u)

    def full_local(self, u: float) -> str:
        d = self._loc(u)
        return f"{d.strftime('%Y-%m-%d %H:%M:%S')} {d.tzname()}"

    def offset_text(self, u: float) -> str:
        off = self._loc(u).utcoffset()
        minutes = int(off.total_seconds() // 60) if off is not None else 0
        sign = "+" if minutes >= 0 else "-"
        return f"UTC{sign}{abs(minutes) // 60:02d}:{abs(minutes) % 60:02d}"

    def view_range(self, rise: float, set_: float) -> str:
        """An in-view interval to the minute, rounded inwards (up at rise, down at set)."""
        a = math.ceil(round(rise, 3) / 60.0) * 60.0
        b = math.floor(round(set_, 3) / 60.0) * 60.0
        if b < a:
            return f"{self.hms(rise)}–{self.hms(set_)}"
        return f"{self.hm(a)}–{self.hm(b)}"

    @property
    def time_note(self) -> str:
        return "DD HH:MM:SS (day of month)" if self.multi_day else "HH:MM:SS"


def _version() -> str:
    from planner_gui import version as cli_version

    return cli_version()


# --------------------------------------------------------------------------- context

@dataclass
class Context:
    plan: Plan
    ts: Typesetter
    geo: Geometry
    clock: Clock
    digest: ContentHash
    scenario_file: str
    generated_unix_s: float
    version: str
    entries: list[SearchEntry]

    def new_page(self, section: str, **tags) -> Page:
        return Page(self.geo, section, typesetter=self.ts, tags=dict(tags))


def _context(plan: Plan, device, geo: Geometry, generated_unix_s: float | None) -> Context:
    sc = plan.scenario
    name = Path(sc.path).name if sc.path is not None else "(unsaved scenario)"
    return Context(plan=plan, ts=Typesetter(device), geo=geo, clock=Clock(plan),
                   digest=content_hash(sc), scenario_file=name,
                   generated_unix_s=_time.time() if generated_unix_s is None else generated_unix_s,
                   version=_version(), entries=search_entries(plan))


# --------------------------------------------------------------------------- furniture

def _header(ctx: Context, page: Page) -> None:
    x, y, w, h = ctx.geo.header
    m = ctx.geo.mm
    left_w = w * 0.55
    page.text((x, y, left_w, m(4.2)), DOCUMENT_TITLE.upper(), F_KICKER, colour=ACCENT,
              valign="top", role="kicker")
    page.text((x, y + m(4.3), left_w, h - m(5.0)), page.section, F_SECTION, valign="top",
              min_pt=9.0, role="section")
    page.text((x + left_w + m(4), y, w - left_w - m(4), h - m(1.5)), ctx.plan.scenario.name,
              F_HEADER_NAME, align="right", valign="top", wrap=True, colour=INK_SOFT,
              min_pt=5.5, role="header-name")
    page.rect((x, y + h - m(0.7), w, m(0.7)), fill=ACCENT)


def _footer(ctx: Context, page: Page, number: int, total: int) -> None:
    x, y, w, h = ctx.geo.footer
    m = ctx.geo.mm
    page.line(x, y, x + w, y, RULE, 0.2)
    saved = "" if ctx.digest.from_saved_file else " (as planned, not the saved file)"
    left = f"{ctx.scenario_file} · content {ctx.digest.short}{saved}"
    gen = datetime.fromtimestamp(ctx.generated_unix_s, UTC).strftime("%Y-%m-%d %H:%M UTC")
    centre = f"generated {gen} · acqplan {ctx.version} · {FOOTER_CONVENTIONS}"
    cy = y + m(0.8)
    ch = h - m(0.8)
    page.text((x, cy, w * 0.38, ch), left, F_FOOT, colour=INK_SOFT, min_pt=4.5, role="footer-file")
    page.text((x + w * 0.385, cy, w * 0.48, ch), centre, F_FOOT, align="center", colour=INK_SOFT,
              min_pt=4.5, role="footer-generated")
    page.text((x + w * 0.87, cy, w * 0.13, ch), f"page {number} of {total}", F_FOOT_BOLD,
              align="right", role="footer-page")


def _section_title(ctx: Context, page: Page, x: float, y: float, w: float, text: str) -> float:
    m = ctx.geo.mm
    page.text((x, y, w, m(4.2)), text, F_H2, valign="top", role="h2")
    page.line(x, y + m(4.6), x + w, y + m(4.6), RULE, 0.2)
    return y + m(5.6)


def _wrapped_height(page: Page, text: str, spec: FontSpec, width: float) -> float:
    fm = page.typesetter.metrics(spec)
    lines = wrap_lines(text, width, fm)
    return (len(lines) - 1) * fm.lineSpacing() + fm.ascent() + fm.descent()


# --------------------------------------------------------------------------- summary

def _settings_rows(ctx: Context) -> tuple[list[tuple[str, str]], list[tuple[str, str]]]:
    plan, clock = ctx.plan, ctx.clock
    sc = plan.scenario
    s = sc.site
    lat = f"{abs(s.lat_deg):.4f}° {'N' if s.lat_deg >= 0 else 'S'}"
    lon = f"{abs(s.lon_deg):.4f}° {'E' if s.lon_deg >= 0 else 'W'}"
    t0, t1 = plan.times.start_unix_s, plan.times.end_unix_s
    same_day = clock._utc(t0).date() == clock._utc(t1).date()
    utc_end = clock._utc(t1).strftime("%H:%M:%S" if same_day else "%Y-%m-%d %H:%M:%S")
    utc_text = f"{clock._utc(t0).strftime('%Y-%m-%d %H:%M:%S')} – {utc_end} UTC"
    if clock.has_local:
        l0, l1 = clock._loc(t0), clock._loc(t1)
        l_end = l1.strftime("%H:%M:%S" if l0.date() == l1.date() else "%Y-%m-%d %H:%M:%S")
        zone = clock.offset_text(t0)
        if clock.offset_text(t1) != zone:
            zone += f" to {clock.offset_text(t1)}"
        local_text = (f"{l0.strftime('%Y-%m-%d %H:%M:%S')} {l0.tzname()} – {l_end} {l1.tzname()} "
                      f"({clock.zone_name}, {zone})")
    else:
        local_text = "UTC (no local zone: set [time] timezone to an IANA name)"
    where = str(sc.path) if sc.path is not None else "not saved"
    left = [
        ("Scenario file", where),
        ("Site", f"{lat}, {lon}, {s.height_m:g} m above the WGS-84 ellipsoid"),
        ("Position uncertainty", f"±{s.horizontal_uncertainty_km:g} km horizontal, "
                                 f"±{s.vertical_uncertainty_m:g} m vertical"),
        ("Test window (UTC)", utc_text),
        ("Test window (local)", local_text),
        ("Length and step", f"{fmt_duration(t1 - t0)}, plan step {sc.time.step_s:g} s"),
        ("Time uncertainty", f"±{sc.time.uncertainty_s:g} s (receiver clock)"),
        ("Elevation mask", f"{sc.mask.elevation_deg:g}°"),
        *([("Defaults used", sc.defaults_note.removeprefix("defaults used for: ")
            + " (not in the scenario file)")] if sc.defaults_used else []),
        ("Signal level", f"C/N0 {sc.signal.cn0_zenith_dbhz:g} dB-Hz at zenith, "
                         f"{sc.signal.cn0_at_mask_dbhz:g} dB-Hz at the mask, "
                         f"extra loss {sc.signal.extra_loss_db:g} dB"),
    ]
    r, se = sc.receiver, sc.search
    code = ("parallel (a whole code period per dwell)" if r.parallel_code_search
            else f"serial, {r.correlators_per_channel} correlator(s) per channel")
    coh = f"{se.coherent_ms:g} ms coherent × {se.noncoherent} non-coherent"
    overrides = [f"{sid}: {o.coherent_ms if o.coherent_ms is not None else se.coherent_ms:g} ms × "
                 f"{o.noncoherent if o.noncoherent is not None else se.noncoherent}"
                 for sid, o in se.per_signal if sid in plan.bin_design]
    if overrides:
        coh += "; " + "; ".join(overrides)
    by_width: dict[str, list[str]] = {}
    for sid, d in sorted(plan.bin_design.items()):
        by_width.setdefault(fmt_bin_width(d.bin_width_hz), []).append(sid)
    widths = "; ".join(f"{wd} Hz ({', '.join(ids)})" for wd, ids in by_width.items())
    sens = ", ".join(f"{sid} {v:.1f}" for sid, v in sorted(plan.sensitivity_dbhz.items()))
    fine = ("none (the whole code period is searched)" if se.fine_time_uncertainty_us is None
            else f"±{se.fine_time_uncertainty_us:g} µs")
    margin = ("from each orbit file's age" if se.orbit_margin_hz is None
              else f"{se.orbit_margin_hz:g} Hz at L1, fixed")
    right = [
        ("Signals", ", ".join(r.signals)),
        ("Channels", f"{r.channels}; code search {code}"),
        ("Oscillator", f"offset {r.oscillator_offset_ppb:g} ppb, uncertainty ±{r.oscillator_uncertainty_ppb:g} ppb"),
        ("Receiver speed", f"up to {r.max_horizontal_speed_m_s:g} m/s horizontal, "
                           f"{r.max_vertical_speed_m_s:g} m/s vertical"),
        ("Integration", coh),
        ("Bin width", f"{widths}; edge loss at most {se.max_frequency_loss_db:g} dB"),
        ("Code step", f"{se.code_step_chips:g} chip (average loss "
                      + ", ".join(f"{sid} {v.average_loss_db:.2f}" for sid, v in sorted(plan.code_step_loss.items()))
                      + " dB)"),
        ("False alarms", f"{fmt_prob(se.false_alarm_per_cell)} per cell, {se.false_alarm_penalty_s:g} s lost per false alarm"),
        ("Fine time", fine),
        ("Orbit-data margin", margin),
        ("First fix", f"{se.first_fix_satellites} satellites, ephemeris {se.ephemeris_wait_s:g} s after acquisition"),
        ("Search order", f"{se.priority} first; Monte Carlo {se.monte_carlo_runs} runs, seed {se.seed}"),
        ("Sensitivity (Pd 0.9)", f"{sens} dB-Hz"),
    ]
    return left, right


def _kv_block(ctx: Context, page: Page, x: float, y: float, w: float, rows: list[tuple[str, str]],
              key_w_mm: float = 30.0, draw: bool = True) -> float:
    """Key/value rows; returns the y below the block (nothing drawn when draw is False)."""
    m = ctx.geo.mm
    kw = m(key_w_mm)
    gap = m(1.2)
    for key, value in rows:
        vh = _wrapped_height(page, value, F_BODY, w - kw)
        kh = _wrapped_height(page, key, F_BODY_BOLD, kw - m(1.5))
        hh = max(vh, kh)
        if draw:
            page.text((x, y, kw - m(1.5), hh), key, F_BODY_BOLD, valign="top", wrap=True,
                      colour=INK_SOFT, role="kv-key")
            page.text((x + kw, y, w - kw, hh), value, F_BODY, valign="top", wrap=True, role="kv-value")
        y += hh + gap
    return y


def _headline(ctx: Context) -> list[tuple[str, str, str]]:
    plan, clock = ctx.plan, ctx.clock
    in_view = in_view_satellites(plan)
    searched = sorted({e.sat_id for e in ctx.entries})
    first_bins = [plan.satellites[s].search.bins for s in in_view if plan.satellites[s].search]
    if first_bins:
        lo, hi = min(first_bins), max(first_bins)
        bins_value = f"{lo}" if lo == hi else f"{lo}–{hi}"
        bins_note = f"median {float(np.median(first_bins)):g} · {len(first_bins)} first searches"
    else:
        bins_value, bins_note = "–", "no search scheduled"
    ff = plan.timeline.first_fix_unix_s
    if ff is None:
        ff_value, ff_note = "none", "no fix within the test window"
    else:
        local = f" · {clock.local_hms(ff)}" if clock.has_local else ""
        ff_value = clock.hms(ff)
        ff_note = f"UTC{local} · TTFF {fmt_s(plan.timeline.ttff_s)} s on mean search times"
    t = plan.ttff

    def stat(v: float) -> str:
        return f"{v:.1f} s" if math.isfinite(v) else "beyond window"

    return [
        ("SATELLITES IN VIEW", f"{len(in_view)}",
         f"of {len(plan.satellites)} in the orbit files · {len(searched)} searched"),
        ("BINS PER SATELLITE", bins_value, bins_note),
        ("FIRST FIX", ff_value, ff_note),
        ("TTFF MEDIAN", stat(t.median_s), f"Monte Carlo, {t.n_runs} runs"),
        ("TTFF 95TH PERCENTILE", stat(t.p95_s), f"{t.n_no_fix} of {t.n_runs} runs without a fix"),
    ]


def _tiles(ctx: Context, page: Page, x: float, y: float, w: float) -> float:
    m = ctx.geo.mm
    tiles = _headline(ctx)
    gap = m(2.0)
    per_row = 3                          # three across: 9 pt captions and notes fit
    tw = (w - gap * (per_row - 1)) / per_row
    th = m(21.0)
    for i, (cap, value, note) in enumerate(tiles):
        r, c = divmod(i, per_row)
        tx = x + c * (tw + gap)
        ty = y + r * (th + gap)
        page.rect((tx, ty, tw, th), fill=PANEL)
        page.rect((tx, ty, m(0.9), th), fill=ACCENT)
        ix, iw = tx + m(2.4), tw - m(3.4)
        page.text((ix, ty + m(1.2), iw, m(4.0)), cap, F_TILE_CAPTION, colour=INK_SOFT,
                  role="tile-caption")
        page.text((ix, ty + m(5.2), iw, m(7.0)), value, F_TILE_VALUE, min_pt=9.0, role="tile-value")
        page.text((ix, ty + m(12.4), iw, th - m(12.8)), note, F_TILE_NOTE, wrap=True, valign="top",
                  colour=INK_SOFT, role="tile-note")
    rows = math.ceil(len(tiles) / per_row)
    return y + rows * th + (rows - 1) * gap


def _shown_path(ctx: Context, path: str) -> str:
    """A data file as named on the sheet: relative to the scenario's folder when inside it."""
    p = Path(path)
    try:
        return p.resolve().relative_to(Path(ctx.plan.scenario.base_dir).resolve()).as_posix()
    except (ValueError, OSError):
        return str(p)


def _orbit_table(ctx: Context, page: Page, x: float, y: float, w: float, draw: bool = True) -> float:
    m = ctx.geo.mm
    cols = [("File", 0.0), ("Format", m(16)), ("Satellites", m(19)), ("Epoch (UTC)", m(40)),
            ("Age at start", m(32))]
    first_w = w - sum(c[1] for c in cols[1:])
    widths = [first_w] + [c[1] for c in cols[1:]]
    pad = m(1.0)
    if draw:
        cx = x
        for (title, _), cw in zip(cols, widths):
            page.text((cx + pad, y, cw - 2 * pad, m(4.4)), title, F_SMALL, colour=INK_SOFT,
                      align="left" if cx == x else "right", role="orbit-head")
            cx += cw
    y += m(4.8)
    for f in ctx.plan.orbit_files:
        shown = _shown_path(ctx, f.path)
        h = max(_wrapped_height(page, shown, F_SMALL, first_w - 2 * pad), m(4.2))
        if draw:
            page.line(x, y - m(0.3), x + w, y - m(0.3), PANEL_DARK, 0.15)
            age = "n/a" if f.age_s is None else f"{f.age_s / 86400:.2f} d ({f.age_s / 3600:.1f} h)"
            cells = [shown, f.format, str(f.n_satellites),
                     ctx.clock._utc(f.epoch_unix_s).strftime("%Y-%m-%d %H:%M:%S"), age]
            cx = x
            for i, (val, cw) in enumerate(zip(cells, widths)):
                page.text((cx + pad, y, cw - 2 * pad, h), val, F_SMALL, wrap=(i == 0), valign="top",
                          align="left" if i == 0 else "right", role="orbit-cell")
                cx += cw
        y += h + m(1.0)
    mapping = ctx.plan.scenario.resolved_mapping()
    if mapping is not None:
        shown = _shown_path(ctx, str(mapping))
        h = max(_wrapped_height(page, shown, F_SMALL, first_w - 2 * pad), m(4.2))
        if draw:
            page.line(x, y - m(0.3), x + w, y - m(0.3), PANEL_DARK, 0.15)
            page.text((x + pad, y, first_w - 2 * pad, h), shown, F_SMALL, wrap=True,
                      valign="top", role="orbit-cell")
            page.text((x + first_w + pad, y, w - first_w - 2 * pad, h),
                      "GLONASS mapping (catalogue number, slot, channel k)", F_SMALL, align="right",
                      valign="top", colour=INK_SOFT, role="orbit-cell")
        y += h + m(1.0)
    return y


# The sign conventions in the few words of the footer line (in full in the README and the
# window's About box; how to re-compute the content hash is in the README).
FOOTER_CONVENTIONS = "Doppler + approaching · oscillator offset + = fast reference"


def _caution_box(ctx: Context, page: Page, x: float, y: float, w: float, draw: bool = True) -> float:
    m = ctx.geo.mm
    pad = m(2.5)
    icon = m(7.0)
    tx = x + pad + icon + m(2.5)
    tw = w - (tx - x) - pad
    hh = m(4.5)
    heights = [_wrapped_height(page, c, F_BODY, tw) for c in SAFETY_CAUTIONS]
    total = pad + hh + sum(heights) + m(1.5) * (len(heights) - 1) + pad
    if draw:
        page.rect((x, y, w, total), fill=tint(CAUTION, 0.9), stroke=CAUTION, width_mm=0.5)
        # A warning triangle with an exclamation mark, drawn.
        ix, iy = x + pad, y + pad
        page.poly([(ix + icon / 2, iy), (ix + icon, iy + icon * 0.9), (ix, iy + icon * 0.9)],
                  colour=CAUTION, width_mm=0.3, closed=True, fill=CAUTION)
        page.rect((ix + icon / 2 - m(0.35), iy + icon * 0.3, m(0.7), icon * 0.32), fill="#FFFFFF")
        page.rect((ix + icon / 2 - m(0.35), iy + icon * 0.68, m(0.7), m(0.7)), fill="#FFFFFF")
        page.text((tx, y + pad, tw, hh), "SAFETY — READ BEFORE THE TEST", F_BODY_BOLD,
                  colour=CAUTION_INK, valign="top", role="caution-title")
        cy = y + pad + hh
        for c, h in zip(SAFETY_CAUTIONS, heights):
            page.text((tx, cy, tw, h), c, F_BODY, wrap=True, valign="top", role="caution")
            cy += h + m(1.5)
    return y + total


RECORD_FIELDS = (("Receiver, firmware", "Antenna, vehicle"), ("Laptop operator", "Driver"),
                 ("Date, start of drive (local)", "Checked by"))


def _record_box(ctx: Context, page: Page, x: float, y: float, w: float, h: float) -> None:
    """Write-in fields for the test record (on the field-record page, every paper size)."""
    m = ctx.geo.mm
    yy = _section_title(ctx, page, x, y, w, "Test record (fill in)")
    gap = m(6.0)
    cw = (w - gap) / 2
    row_h = (y + h - yy) / len(RECORD_FIELDS)
    for i, pair in enumerate(RECORD_FIELDS):
        ry = yy + i * row_h
        for j, label in enumerate(pair):
            fx = x + j * (cw + gap)
            lw = m(52.0)
            page.text((fx, ry, lw, row_h), label, F_BODY, colour=INK_SOFT, role="record-label")
            page.line(fx + lw, ry + row_h * 0.75, fx + cw, ry + row_h * 0.75, RULE, 0.25)


def _summary_pages(ctx: Context) -> list[Page]:
    m = ctx.geo.mm
    bx, by, bw, bh = ctx.geo.body
    page = ctx.new_page("Summary", kind="summary")
    pages = [page]
    plan = ctx.plan
    y = by
    # Title block.
    th = min(_wrapped_height(page, plan.scenario.name, F_TITLE, bw), m(13.0))
    page.text((bx, y, bw, th), plan.scenario.name, F_TITLE, wrap=True, valign="top", min_pt=9.0,
              role="title")
    y += th + m(1.2)
    sub = (f"{DOCUMENT_TITLE} · test window {ctx.clock.full(plan.times.start_unix_s)} "
           f"to {ctx.clock.full(plan.times.end_unix_s)}")
    page.text((bx, y, bw, m(4.0)), sub, F_SUBTITLE, colour=INK_SOFT, min_pt=6.0, role="subtitle")
    y += m(6.0)
    y = _tiles(ctx, page, bx, y, bw) + m(5.0)
    # Two columns of settings.
    left, right = _settings_rows(ctx)
    col_gap = m(6.0)
    cw = (bw - col_gap) / 2
    ly = _section_title(ctx, page, bx, y, cw, "Site and test window")
    ly = _kv_block(ctx, page, bx, ly, cw, left)
    ry = _section_title(ctx, page, bx + cw + col_gap, y, cw, "Receiver and search")
    ry = _kv_block(ctx, page, bx + cw + col_gap, ry, cw, right)
    y = max(ly, ry) + m(3.0)
    # The cautions are anchored to the bottom of the first page.
    caution_h = _caution_box(ctx, page, bx, 0, bw, draw=False)
    bottom_top = by + bh - caution_h
    _caution_box(ctx, page, bx, bottom_top, bw)
    limit = bottom_top - m(3.0)

    def continuation() -> tuple[Page, float]:
        nxt = ctx.new_page("Summary (continued)", kind="summary")
        pages.append(nxt)
        return nxt, by

    # Orbit data (on a continuation page only if the settings left no room).
    orbit_h = m(5.6) + _orbit_table(ctx, page, bx, 0, bw, draw=False)
    if y + orbit_h > limit:
        page, y = continuation()
        limit = by + bh
    y = _section_title(ctx, page, bx, y, bw, "Orbit data")
    y = _orbit_table(ctx, page, bx, y, bw) + m(3.0)
    # Warnings flow into the space left, then onto continuation pages.
    warnings = list(plan.warnings)
    if warnings:
        y = _section_title(ctx, page, bx, y, bw, f"Plan warnings ({len(warnings)})")
        while warnings:
            h = _wrapped_height(page, "• " + warnings[0], F_BODY, bw)
            if y + h > limit:
                page, y = continuation()
                limit = by + bh
                y = _section_title(ctx, page, bx, y, bw, "Plan warnings (continued)")
            page.text((bx, y, bw, h), "• " + warnings.pop(0), F_BODY, wrap=True, valign="top",
                      role="warning")
            y += h + m(0.8)
    return pages


INCIDENT_COLUMNS = (("Time (UTC)", 0.16), ("Place (km post, landmark, lat/lon)", 0.32),
                    ("What happened (outage, re-task, restart, interference, ...)", 0.52))


def _field_record_pages(ctx: Context) -> list[Page]:
    """The test record and the incident log: always on a page of their own, so every
    paper size keeps them."""
    m = ctx.geo.mm
    bx, by, bw, bh = ctx.geo.body
    page = ctx.new_page("Field record", kind="record")
    plan, c = ctx.plan, ctx.clock
    t0 = plan.times.start_unix_s
    ff = plan.timeline.first_fix_unix_s
    times = [("Test start", t0)] + ([("Expected first fix", ff)] if ff is not None else [])
    y = _section_title(ctx, page, bx, by, bw, "Times to compare with the receiver log")
    for label, u in times:
        local = f" · {c.full_local(u)}" if c.has_local else ""
        text = f"{label}: {c.full(u)}{local} · {c.gps(u)}"
        page.text((bx, y, bw, m(5.5)), text, F_BODY, role="record-times")
        y += m(6.0)
    y += m(2.0)
    _record_box(ctx, page, bx, y, bw, m(RECORD_MM))
    y += m(RECORD_MM) + m(4.0)
    y = _section_title(ctx, page, bx, y, bw, "Incident log")
    hh = m(8.0)
    page.rect((bx, y, bw, hh), fill=PANEL_DARK)
    x = bx
    for title, frac in INCIDENT_COLUMNS:
        page.text((x + m(1.5), y, bw * frac - m(3.0), hh), title, F_TABLE_HEAD, role="log-head")
        x += bw * frac
    y += hh
    row = m(9.0)
    while y + row <= by + bh:
        page.line(bx, y + row, bx + bw, y + row, RULE, 0.3)
        x = bx
        for _t, frac in INCIDENT_COLUMNS[:-1]:
            x += bw * frac
            page.line(x, y, x, y + row, RULE, 0.3)
        y += row
    return [page]


# --------------------------------------------------------------------------- table

@dataclass
class Column:
    key: str
    head: str            # two lines, "\n"
    align: str = "right"


COLUMNS = [
    Column("ch", "Ch\n"),
    Column("id", "ID\n", "left"),
    Column("signal", "Signal\n", "left"),
    Column("view", "In view\nUTC", "center"),
    Column("state", "Window\n", "left"),
    Column("start", "Search\nstart UTC"),
    Column("low", "Window\nlow Hz"),
    Column("high", "Window\nhigh Hz"),
    Column("bins", "Bins\n"),
    Column("code", "Code\nchips"),
    Column("cn0", "C/N0\ndB-Hz"),
    Column("pd", "Pd\n"),
    Column("exp", "Exp.\nsearch s"),
    Column("acq", "Expected\nacq. UTC"),
]
SEARCH_KEYS = ["state", "start", "low", "high", "bins", "code", "cn0", "pd", "exp", "ch", "acq"]
NOT_SEARCHED_TEXT = "In view, no search scheduled"


@dataclass
class TableRow:
    sat_index: int
    cells: dict[str, str]
    continuation: bool = False
    system: str = ""
    folded: str = ""          # the one line of satellites in view that are never searched


def table_rows(ctx: Context) -> list[TableRow]:
    """Searched satellites in the order the crew works: by channel, then search start;
    the satellites in view that are never searched folded into one line at the end."""
    plan, clock = ctx.plan, ctx.clock
    rows: list[TableRow] = []
    idle: list[str] = []
    order = sorted(in_view_satellites(plan), key=lambda s: (
        (plan.satellites[s].search.channel, plan.satellites[s].search.start_unix_s)
        if plan.satellites[s].search is not None else (math.inf, math.inf)))
    for s in order:
        sp = plan.satellites[s]
        q = sp.search
        if q is None:
            idle.append(sp.sat_id)
            continue
        iv = view_intervals(plan, s)
        cells = {"id": sp.sat_id, "signal": sp.signal_id,
                 "view": clock.view_range(*iv[0]) if iv else "",
                 "maxel": f"{max_elevation_deg(plan, s):.1f}",
                 "state": state_word(q.state), "start": clock.hms(q.start_unix_s),
                 "low": fmt_hz(q.low_hz), "high": fmt_hz(q.high_hz),
                 "bins": str(q.bins),
                 "code": f"{q.code_window_chips:.1f}", "cn0": f"{q.cn0_dbhz:.1f}", "pd": f"{q.pd:.3f}",
                 "exp": fmt_s(q.expected_search_s), "ch": str(q.channel),
                 "acq": "—" if q.acquired_unix_s is None else clock.hms(q.acquired_unix_s)}
        rows.append(TableRow(s, cells, system=sp.system))
        for a, b in iv[1:]:
            rows.append(TableRow(s, {"view": clock.view_range(a, b)}, continuation=True,
                                 system=sp.system))
    if idle:
        rows.append(TableRow(-1, {}, folded=f"{NOT_SEARCHED_TEXT} ({len(idle)}): " + " ".join(idle)))
    return rows


def _table_widths(ctx: Context, page: Page, rows: list[TableRow], width: float
                  ) -> tuple[FontSpec, FontSpec, list[float]]:
    m = ctx.geo.mm
    pad = m(TABLE_PAD_MM)
    marker_w = m(2.6)
    size = F_TABLE.size_pt
    while True:
        body = F_TABLE.sized(size)
        head = F_TABLE_HEAD.sized(max(size - 0.5, 9.0))
        widths = []
        for col in COLUMNS:
            need = max(page.measure(line, head) for line in col.head.split("\n"))
            for r in rows:
                v = r.cells.get(col.key)
                if v:
                    need = max(need, page.measure(v, body))
            if col.key == "id":
                need += marker_w
            widths.append(need + 2 * pad)
        total = sum(widths)
        if total <= width or size <= 9.0:
            break
        size -= 0.25
    extra = max(0.0, width - total) / len(widths)
    return body, head, [w + extra for w in widths]


def _table_pages(ctx: Context) -> list[Page]:
    m = ctx.geo.mm
    bx, by, bw, bh = ctx.geo.body
    rows = table_rows(ctx)
    per_page = capacity(ctx.geo).table_rows
    chunks: list[list[TableRow]] = [[]]
    used = 0
    for r in rows:                       # the folded line takes up to four rows' height
        cost = 4 if r.folded else 1
        if used + cost > per_page and chunks[-1]:
            chunks.append([])
            used = 0
        chunks[-1].append(r)
        used += cost
    probe = ctx.new_page("probe")
    body, head, widths = _table_widths(ctx, probe, rows, bw)
    pad = m(TABLE_PAD_MM)
    pages = []
    for n, chunk in enumerate(chunks):
        title = "Satellites in view" + (f" ({n + 1} of {len(chunks)})" if len(chunks) > 1 else "")
        page = ctx.new_page(title, kind="table", rows=[r.cells.get("id", "") for r in chunk])
        intro = (f"{len(in_view_satellites(ctx.plan))} satellites above the {ctx.plan.scenario.mask.elevation_deg:g}° "
                 f"mask. Search values at each satellite's first scheduled search; times UTC "
                 f"({ctx.clock.time_note}); in-view times rounded inwards to the minute.")
        page.text((bx, by, bw, m(TABLE_INTRO_MM) - m(1.5)), intro, F_BODY, wrap=True, valign="top",
                  colour=INK_SOFT, role="table-intro")
        y = by + m(TABLE_INTRO_MM)
        hh = m(TABLE_HEAD_MM)
        page.rect((bx, y, bw, hh), fill=PANEL_DARK)
        xs = [bx]
        for w in widths:
            xs.append(xs[-1] + w)
        for col, x0, w in zip(COLUMNS, xs, widths):
            page.text((x0 + pad, y + m(0.5), w - 2 * pad, hh - m(1.0)), col.head.rstrip("\n"), head,
                      align=col.align, role="table-head")
        y += hh
        rh = m(TABLE_ROW_MM)
        prev_sys = None
        stripe = False
        for r in chunk:
            if r.folded:
                fh = _wrapped_height(page, r.folded, body, bw - 2 * pad)
                page.line(bx, y, bx + bw, y, INK_FAINT, 0.25)
                page.text((bx + pad, y + m(0.6), bw - 2 * pad, fh), r.folded, body, wrap=True,
                          valign="top", role="cell-folded")
                y += fh + m(1.2)
                continue
            if not r.continuation:
                stripe = not stripe
                if prev_sys is not None and r.system != prev_sys:
                    page.line(bx, y, bx + bw, y, INK_FAINT, 0.25)
                prev_sys = r.system
            if stripe:
                page.rect((bx, y, bw, rh), fill=PANEL)
            for col, x0, w in zip(COLUMNS, xs, widths):
                v = r.cells.get(col.key)
                if not v:
                    continue
                cx, cw = x0 + pad, w - 2 * pad
                if col.key == "id":
                    st = style_for(r.system)
                    page.marker(st.marker_name, cx + m(1.0), y + rh / 2, 1.9, st.colour)
                    cx += m(2.6)
                    cw -= m(2.6)
                page.text((cx, y, cw, rh), v, body, align=col.align, min_pt=body.size_pt,
                          role=f"cell-{col.key}")
            y += rh
        page.line(bx, y, bx + bw, y, INK_FAINT, 0.25)
        legend = ("Rows by channel (Ch) and search start, the order the crew works in. Window: "
                  "first = oscillator error still unknown; narrowed = after the first acquisition "
                  "(oscillator measured). Window low/high: apparent Doppler at the search start, "
                  "Hz; the bins (widths on the cards) tile it. Code: code-phase window. Exp. search: mean serial search "
                  "time. A second line under a satellite is a further pass in the window.")
        ly = y + m(1.5)
        page.text((bx, ly, bw, m(TABLE_LEGEND_MM) - m(1.5)), legend, F_SMALL, wrap=True,
                  valign="top", colour=INK_SOFT, role="table-legend")
        pages.append(page)
    return pages


def replace_italic(spec: FontSpec) -> FontSpec:
    return replace(spec, italic=True)


# --------------------------------------------------------------------------- cards

@dataclass
class Card:
    channel: int
    entries: list[SearchEntry]
    part: int
    parts: int


def channel_cards(ctx: Context) -> list[Card]:
    n = ctx.plan.scenario.receiver.channels
    cards: list[Card] = []
    for ch in range(1, n + 1):
        mine = [e for e in ctx.entries if e.channel == ch]
        mine.sort(key=lambda e: e.start_unix_s)
        parts = max(1, math.ceil(len(mine) / SEARCHES_PER_CARD))
        for p in range(parts):
            cards.append(Card(ch, mine[p * SEARCHES_PER_CARD:(p + 1) * SEARCHES_PER_CARD], p + 1, parts))
    return cards


def _ends_with_window(ctx: Context, u: float) -> bool:
    """True when ``u`` is the end of the test window (a search cut there is not 'setting')."""
    return abs(u - ctx.plan.times.end_unix_s) <= max(1.0, 0.5 * ctx.plan.scenario.time.step_s)


def _end_text(ctx: Context, e: SearchEntry) -> str:
    c = ctx.clock
    if e.acquired:
        txt = f"Expect acquisition {c.hms(e.end_unix_s)} (+{e.end_unix_s - e.start_unix_s:.0f} s)"
        if e.track_end_unix_s is not None:
            if _ends_with_window(ctx, e.track_end_unix_s) or e.track_end_reason == "window_end":
                why = "window end"
            else:
                why = {"set": "it sets"}.get(e.track_end_reason, e.track_end_reason)
            txt += f", then track to {c.hms(e.track_end_unix_s)} ({why})"
        return txt
    if e.end_reason == "set" and not _ends_with_window(ctx, e.end_unix_s):
        why = "it sets"
    else:
        why = "the test window ends"
    return f"Not expected before {why} at {c.hms(e.end_unix_s)}: the search is cut there"


def _settings_text(e: SearchEntry) -> tuple[str, str]:
    """The receiver settings of one search, in the order a receiver asks for them."""
    centre = 0.5 * (e.low_hz + e.high_hz)
    span = e.high_hz - e.low_hz
    first = (f"Doppler centre {hz_text(centre, signed=True, unicode_minus=False)} Hz, span "
             f"{fmt_hz(span)} Hz · {e.bins} bins × {fmt_bin_width(e.bin_width_hz)} Hz "
             f"(centres {fmt_hz(float(e.bin_centres_hz[0]))} … {fmt_hz(float(e.bin_centres_hz[-1]))} Hz)")
    second = (f"{e.coherent_ms:g} ms coherent × {e.noncoherent} non-coherent · code window "
              f"{e.code_window_chips:.1f} chips · threshold {e.threshold_db:.1f} dB over mean noise")
    return first, second


def give_up_unix_s(e: SearchEntry) -> float | None:
    return None if not math.isfinite(e.give_up_s) else e.start_unix_s + e.give_up_s


def _action_text(ctx: Context, e: SearchEntry) -> str:
    """When to give up, and what to do then."""
    c = ctx.clock
    t = give_up_unix_s(e)
    if t is None or t >= min(e.end_unix_s if not e.acquired else math.inf, ctx.plan.times.end_unix_s):
        if not e.acquired:
            return "No give-up inside the search: keep searching until it is cut."
    if t is None:
        return ""
    head = f"Give up at {c.hms(t)} (95 % of searches succeed by then): "
    if e.spare:
        return head + f"re-task channel {e.channel} to {e.spare} (spare)."
    return (head + f"widen the window by one bin each side (±{fmt_bin_width(e.bin_width_hz)} Hz) "
            "and search again.")


_SP = "\u2003"                      # em spaces: kept apart when the line is wrapped
RECORD_LINE = _SP.join(["☐ acquired", "☐ not acquired", "at ________", "C/N0 ______ dB-Hz",
                        "Doppler ________ Hz"])


def _search_lines(ctx: Context, e: SearchEntry) -> list[tuple[str, FontSpec, str]]:
    one, two = _settings_text(e)
    lines = [(one, F_CARD, "card-settings"), (two, F_CARD, "card-integration"),
             (_end_text(ctx, e), F_CARD, "card-end")]
    action = _action_text(ctx, e)
    if action:
        lines.append((action, F_CARD_BOLD, "card-action"))
    lines.append((RECORD_LINE, F_CARD, "card-record"))
    return lines


def _search_height(ctx: Context, page: Page, e: SearchEntry, width: float) -> float:
    m = ctx.geo.mm
    body = sum(_wrapped_height(page, t, f, width) + m(0.8) for t, f, _r in _search_lines(ctx, e))
    return m(CARD_TITLE_MM) + body + m(3.0)


def _search_block(ctx: Context, page: Page, e: SearchEntry, x: float, y: float, w: float) -> float:
    """One search: what to set, what to expect, when to give up and what then, and the
    blanks for what the receiver showed. Returns the y below it."""
    m = ctx.geo.mm
    clock = ctx.clock
    box = m(5.5)
    page.rect((x, y + m(0.6), box, box), stroke=INK, width_mm=0.45)
    ix = x + box + m(2.5)
    iw = x + w - ix
    st = style_for(e.system)
    page.marker(st.marker_name, ix + m(1.6), y + m(3.4), 3.2, st.colour)
    sat_w = page.measure(e.sat_id, F_CARD_SAT) + m(0.6)
    page.text((ix + m(4.0), y, sat_w, m(7.0)), e.sat_id, F_CARD_SAT, role="card-sat")
    sig = (e.signal_id + (f" k{e.glonass_k:+d}" if e.glonass_k is not None else "")
           + f" · {state_word(e.state)} window")
    sig_x = ix + m(4.0) + sat_w + m(1.5)
    start = clock.hms(e.start_unix_s)
    start_w = page.measure(start, F_CARD_START) + m(0.5)
    page.text((sig_x, y + m(0.8), ix + iw - start_w - m(2) - sig_x, m(6.2)), sig, F_CARD_SOFT,
              colour=INK_SOFT, role="card-signal")
    page.text((ix + iw - start_w, y, start_w, m(7.0)), start, F_CARD_START, align="right",
              role="card-start")
    times = (f"{clock.local_hms(e.start_unix_s)} · " if clock.has_local else "") + clock.gps(e.start_unix_s)
    page.text((ix, y + m(7.0), iw, m(4.6)), times, F_CARD_SOFT, align="right", colour=INK_SOFT,
              role="card-local")
    ry = y + m(CARD_TITLE_MM)
    for text, spec, role in _search_lines(ctx, e):
        h = _wrapped_height(page, text, spec, iw)
        page.text((ix, ry, iw, h), text, spec, wrap=True, valign="top", role=role)
        ry += h + m(0.8)
    return ry + m(3.0)


def _card_pages(ctx: Context) -> list[Page]:
    """One card per channel, full width, flowing down the pages; a card that does not fit
    continues on the next page under its channel's title."""
    m = ctx.geo.mm
    bx, by, bw, bh = ctx.geo.body
    bottom = by + bh
    pages: list[Page] = []
    inner_x, inner_w = bx + m(3.0), bw - m(6.0)
    text_w = inner_w - m(8.0)
    hh = m(CARD_HEAD_MM)

    def new_page() -> tuple[Page, float]:
        page = ctx.new_page("Channel cards", kind="cards", channels=[])
        intro = ("One card per receiver channel, searches in time order: set the receiver as "
                 "listed, tick acquired or not acquired and write what it shows. Times UTC"
                 + (f"; local time ({ctx.clock.zone_name}) and GPS week / time of week beside "
                    "each start." if ctx.clock.has_local else "; GPS week / time of week beside each start."))
        ih = _wrapped_height(page, intro, F_BODY, bw)
        page.text((bx, by, bw, ih), intro, F_BODY, wrap=True, valign="top", colour=INK_SOFT,
                  role="cards-intro")
        pages.append(page)
        return page, by + ih + m(2.5)

    page, y = new_page()
    n = ctx.plan.scenario.receiver.channels
    for ch in range(1, n + 1):
        mine = sorted((e for e in ctx.entries if e.channel == ch), key=lambda e: e.start_unix_s)
        heights = [_search_height(ctx, page, e, text_w) for e in mine]
        first_h = hh + (heights[0] if heights else m(9.0))
        if y + first_h > bottom:
            page, y = new_page()
        part = 0

        def head(page: Page, y: float, cont: bool, ch: int = ch, mine: list = mine) -> float:
            page.tags.setdefault("channels", []).append(ch)
            page.rect((bx, y, bw, hh), fill=tint(ACCENT, 0.85), stroke=INK_SOFT, width_mm=0.35)
            title = f"CHANNEL {ch}" + (" (continued)" if cont else "")
            page.text((bx + m(2.5), y, bw * 0.6, hh), title, F_CARD_HEAD, role="card-title")
            right = f"{len(mine)} search{'es' if len(mine) != 1 else ''}"
            page.text((bx + bw * 0.6, y, bw * 0.4 - m(2.5), hh), right, F_CARD_SOFT, align="right",
                      colour=INK_SOFT, role="card-count")
            return y + hh + m(2.0)

        y = head(page, y, False)
        if not mine:
            page.text((inner_x, y, inner_w, m(6.0)), "No search planned on this channel in the "
                      "test window.", F_CARD, role="card-idle")
            y += m(9.0)
        for e, h in zip(mine, heights):
            if y + h > bottom:
                page, y = new_page()
                y = head(page, y, True)
            if part:
                page.line(inner_x, y - m(1.5), inner_x + inner_w, y - m(1.5), RULE, 0.25)
            y = _search_block(ctx, page, e, inner_x, y, inner_w)
            part += 1
        y += m(CARD_GAP_MM)
    total = len(pages)
    for i, pg_ in enumerate(pages, start=1):
        if total > 1:
            pg_.section = f"Channel cards ({i} of {total})"
    return pages


# --------------------------------------------------------------------------- charts

@dataclass(frozen=True)
class Capacity:
    table_rows: int
    ladder_rows: int
    timeline_rows: int
    card_columns: int
    card_rows: int

    @property
    def cards_per_page(self) -> int:
        return self.card_columns * self.card_rows


def capacity(geo: Geometry) -> Capacity:
    """How many rows, searches, channels and cards one page holds for this geometry
    (A4 and US Letter portrait: 2 x 3 cards)."""
    bw, bh = geo.body_mm
    table = int((bh - TABLE_INTRO_MM - TABLE_HEAD_MM - TABLE_LEGEND_MM) // TABLE_ROW_MM)
    ladder = int((bh - LADDER_INTRO_MM - 2 * LADDER_AXIS_MM - LADDER_LEGEND_MM) // LADDER_ROW_MM)
    timeline = int((bh - TIMELINE_INTRO_MM - 2 * TIMELINE_AXIS_MM - TIMELINE_LEGEND_MM) // TIMELINE_ROW_MM)
    cols = max(1, int((bw + CARD_GAP_MM) // (CARD_MIN_W_MM + CARD_GAP_MM)))
    rows = int((bh - CARDS_INTRO_MM + CARD_GAP_MM) // (CARD_MIN_H_MM + CARD_GAP_MM))
    return Capacity(max(1, table), max(1, ladder), max(1, timeline),
                    min(cols, CARD_COLUMNS_MAX),
                    max(1, min(CARD_ROWS, rows)))


def _first_minutes_pages(ctx: Context) -> list[Page]:
    """The start of the test to scale: the searches before the first fix, which are
    slivers on the whole window's axis."""
    plan = ctx.plan
    m = ctx.geo.mm
    bx, by, bw, bh = ctx.geo.body
    n_ch = plan.scenario.receiver.channels
    ends = [plan.timeline.first_fix_unix_s or plan.times.start_unix_s]
    if plan.ttff is not None and math.isfinite(plan.ttff.p95_s):
        ends.append(plan.times.start_unix_s + plan.ttff.p95_s)
    until = max(ends) + 60.0
    if until >= plan.times.end_unix_s - 60.0:
        return []                       # the whole window is already the first minutes
    page = ctx.new_page("Channel timeline: the first minutes", kind="first-minutes")
    minutes = (until - plan.times.start_unix_s) / 60.0
    intro = (f"The first {minutes:.0f} minutes of the test to scale, up to a minute past the "
             "95th-percentile time to first fix: the searches before the first fix.")
    ih = _wrapped_height(page, intro, F_BODY, bw)
    page.text((bx, by, bw, ih), intro, F_BODY, wrap=True, valign="top", colour=INK_SOFT,
              role="first-minutes-intro")
    y = by + ih + m(3.0)
    tl_h = m(2 * TIMELINE_AXIS_MM) + n_ch * m(TIMELINE_ROW_MM)
    if y + tl_h + m(TIMELINE_LEGEND_MM) > by + bh:
        return []
    charts.timeline_chart(ctx, page, (bx, y, bw, tl_h), 1, n_ch, until_unix_s=until)
    y += tl_h + m(1.0)
    charts.timeline_legend(ctx, page, (bx, y, bw, m(TIMELINE_LEGEND_MM)))
    return [page]


def _chart_pages(ctx: Context) -> list[Page]:
    m = ctx.geo.mm
    bx, by, bw, bh = ctx.geo.body
    cap = capacity(ctx.geo)
    n_ch = ctx.plan.scenario.receiver.channels
    pages: list[Page] = []
    if n_ch <= OVERVIEW_MAX_CHANNELS:
        page = ctx.new_page("Overview: channel timeline and sky", kind="overview")
        y = _section_title(ctx, page, bx, by, bw, "Channel timeline")
        tl_h = m(2 * TIMELINE_AXIS_MM) + n_ch * m(TIMELINE_ROW_MM)
        charts.timeline_chart(ctx, page, (bx, y, bw, tl_h), 1, n_ch)
        y += tl_h + m(1.0)
        y = charts.timeline_legend(ctx, page, (bx, y, bw, m(TIMELINE_LEGEND_MM))) + m(3.0)
        y = _section_title(ctx, page, bx, y, bw, "Sky plot")
        charts.sky_chart(ctx, page, (bx, y, bw, by + bh - y))
        pages.append(page)
        pages.extend(_first_minutes_pages(ctx))
    else:
        per = cap.timeline_rows
        n_pages = math.ceil(n_ch / per)
        for n in range(n_pages):
            a, b = n * per + 1, min(n_ch, (n + 1) * per)
            title = "Channel timeline" + (f" ({n + 1} of {n_pages})" if n_pages > 1 else "")
            page = ctx.new_page(title, kind="timeline")
            page.text((bx, by, bw, m(TIMELINE_INTRO_MM) - m(1.5)),
                      f"Channels {a} to {b} of {n_ch}. Searches hatched, tracks solid; labels at "
                      "the start of each satellite's work.", F_BODY, wrap=True, valign="top",
                      colour=INK_SOFT, role="timeline-intro")
            y = by + m(TIMELINE_INTRO_MM)
            h = m(2 * TIMELINE_AXIS_MM) + (b - a + 1) * m(TIMELINE_ROW_MM)
            charts.timeline_chart(ctx, page, (bx, y, bw, h), a, b)
            charts.timeline_legend(ctx, page, (bx, y + h + m(1.0), bw, m(TIMELINE_LEGEND_MM)))
            pages.append(page)
        page = ctx.new_page("Sky plot", kind="sky")
        charts.sky_chart(ctx, page, (bx, by, bw, bh))
        pages.append(page)
    # Doppler windows of every search.
    per = cap.ladder_rows
    entries = ctx.entries
    n_pages = max(1, math.ceil(len(entries) / per))
    span = charts.ladder_span(entries)
    for n in range(n_pages):
        chunk = entries[n * per:(n + 1) * per]
        title = "Doppler search windows" + (f" ({n + 1} of {n_pages})" if n_pages > 1 else "")
        page = ctx.new_page(title, kind="doppler", searches=[(e.sat_id, e.channel) for e in chunk])
        page.text((bx, by, bw, m(LADDER_INTRO_MM) - m(1.5)),
                  "Every search of the channel timeline in time order: the frequency window at the "
                  "search start and the bins that tile it, to scale. Apparent Doppler, Hz; positive "
                  "while the satellite approaches.", F_BODY, wrap=True, valign="top",
                  colour=INK_SOFT, role="doppler-intro")
        y = by + m(LADDER_INTRO_MM)
        h = m(2 * LADDER_AXIS_MM) + max(1, len(chunk)) * m(LADDER_ROW_MM)
        charts.ladder_chart(ctx, page, (bx, y, bw, h), chunk, span)
        charts.ladder_legend(ctx, page, (bx, y + h + m(1.5), bw, m(LADDER_LEGEND_MM) - m(1.5)))
        pages.append(page)
    return pages


# --------------------------------------------------------------------------- document

def build_pages(plan: Plan, device, geo: Geometry, generated_unix_s: float | None = None,
                drive=None) -> list[Page]:
    """Lay out every page (no painting). With a ``drive`` (core.plan.events.DrivePlan) the
    route page and one page per test event follow the summary."""
    ctx = _context(plan, device, geo, generated_unix_s)
    pages = _summary_pages(ctx)
    if drive is not None:
        from planner_gui.sheet_drive import drive_pages

        pages += drive_pages(drive, device, geo, generated_unix_s, ctx)
    pages += (_table_pages(ctx) + _chart_pages(ctx) + _card_pages(ctx)
              + _field_record_pages(ctx))
    comparison = getattr(plan, "record_comparison", None)   # a record loaded onto the plan
    if comparison is not None:
        from planner_gui.sheet_record import record_pages

        pages += record_pages(ctx, comparison)
    for i, page in enumerate(pages, start=1):
        _header(ctx, page)
        _footer(ctx, page, i, len(pages))
    return pages


def _device_geometry(device) -> Geometry:
    from PySide6.QtGui import QPageLayout

    layout = device.pageLayout()
    full = layout.fullRect(QPageLayout.Unit.Millimeter)
    paint = layout.paintRect(QPageLayout.Unit.Millimeter)
    dpi = float(device.logicalDpiY())
    return Geometry.for_page(dpi, (full.width(), full.height()),
                             (paint.x(), paint.y(), paint.width(), paint.height()))


def _paint_page(painter, page: Page, ts: Typesetter) -> None:
    from PySide6.QtCore import QPointF, QRectF, Qt
    from PySide6.QtGui import QBrush, QColor, QPainterPath, QPen, QPolygonF

    def pen(colour, width, dash=False):
        if colour is None:
            return QPen(Qt.PenStyle.NoPen)
        p = QPen(QColor(colour))
        p.setWidthF(width)
        p.setCapStyle(Qt.PenCapStyle.FlatCap)
        p.setJoinStyle(Qt.PenJoinStyle.MiterJoin)
        if dash:
            p.setStyle(Qt.PenStyle.CustomDashLine)
            p.setDashPattern([4.0, 3.0])
        return p

    def brush(colour):
        return QBrush(QColor(colour)) if colour else QBrush(Qt.BrushStyle.NoBrush)

    for op in page.ops:
        a = op.args
        if op.kind == "rect":
            painter.setPen(pen(a["stroke"], a["width"], a["dash"]))
            painter.setBrush(brush(a["fill"]))
            r = QRectF(*a["rect"])
            if a["radius"]:
                painter.drawRoundedRect(r, a["radius"], a["radius"])
            else:
                painter.drawRect(r)
        elif op.kind == "line":
            painter.setPen(pen(a["colour"], a["width"], a["dash"]))
            x1, y1, x2, y2 = a["p"]
            painter.drawLine(QPointF(x1, y1), QPointF(x2, y2))
        elif op.kind == "poly":
            painter.setPen(pen(a["colour"], a["width"], a["dash"]))
            poly = QPolygonF([QPointF(x, y) for x, y in a["points"]])
            if a["closed"]:
                painter.setBrush(brush(a["fill"]))
                painter.drawPolygon(poly)
            else:
                painter.drawPolyline(poly)
        elif op.kind == "ellipse":
            painter.setPen(pen(a["stroke"], a["width"], a["dash"]))
            painter.setBrush(brush(a["fill"]))
            painter.drawEllipse(QRectF(*a["rect"]))
        elif op.kind == "hatch":
            x, y, w, h = a["rect"]
            painter.save()
            painter.setClipRect(QRectF(x, y, w, h))
            painter.setPen(pen(a["colour"], a["width"]))
            s = a["spacing"]
            k = 0.0
            while k < w + h:
                painter.drawLine(QPointF(x + k, y + h), QPointF(x + k - h, y))
                k += s
            painter.restore()
        elif op.kind == "marker":
            cx, cy = a["c"]
            path = charts.marker_path(QPainterPath, QPointF, a["shape"], cx, cy, a["r"])
            colour = a["colour"]
            painter.setPen(pen(colour if a["filled"] else colour, a["width"]))
            painter.setBrush(brush(colour if a["filled"] else "#FFFFFF"))
            painter.drawPath(path)
        elif op.kind == "text":
            b = a["box"]
            painter.setFont(ts.font(b.spec))
            painter.setPen(QColor(b.colour))
            for ln, (bx, by) in zip(b.lines, b.baselines):
                if ln:
                    painter.drawText(QPointF(bx, by), ln)


def paint_sheets(plan: Plan, device, *, generated_unix_s: float | None = None,
                 drive=None) -> list[Page]:
    """Paint every sheet onto ``device`` (QPdfWriter, QPrinter or any QPagedPaintDevice).

    The layout follows the device's page size and keeps at least MIN_MARGIN_MM from the
    paper edges. For a QPrinter a page range chosen in the print dialog is honoured.
    Returns the laid-out pages (their text boxes are what the tests check).
    """
    from PySide6.QtGui import QPainter

    ensure_gui_application()
    geo = _device_geometry(device)
    pages = build_pages(plan, device, geo, generated_unix_s, drive)
    first, last = 1, len(pages)
    from_page = getattr(device, "fromPage", None)
    if callable(from_page) and device.fromPage() > 0:
        first = max(1, device.fromPage())
        last = min(len(pages), device.toPage() or len(pages))
    painter = QPainter()
    if not painter.begin(device):
        raise InputError("cannot start printing on this device (is the file or printer writable?)")
    try:
        painter.setRenderHint(QPainter.RenderHint.Antialiasing, True)
        painter.setRenderHint(QPainter.RenderHint.TextAntialiasing, True)
        ts = pages[0].typesetter
        for n in range(first, last + 1):
            if n > first and not device.newPage():
                raise InputError("the device refused a new page")
            _paint_page(painter, pages[n - 1], ts)
    finally:
        painter.end()
    return pages


def ensure_gui_application():
    """A QGuiApplication for fonts; offscreen when there is no display (Linux without X/Wayland)."""
    from PySide6.QtGui import QGuiApplication

    from .qt_compat import guard_singleton_refcounts

    guard_singleton_refcounts()
    app = QGuiApplication.instance()
    if app is None:
        if (sys.platform.startswith("linux") and not os.environ.get("QT_QPA_PLATFORM")
                and not os.environ.get("DISPLAY") and not os.environ.get("WAYLAND_DISPLAY")):
            os.environ["QT_QPA_PLATFORM"] = "offscreen"
        app = QGuiApplication(["acqplan"])
    return app


def _pdf_writer(target, paper: str):
    from PySide6.QtCore import QMarginsF
    from PySide6.QtGui import QPageLayout, QPageSize, QPdfWriter

    w = QPdfWriter(target)
    w.setResolution(PDF_DPI)
    size = QPageSize(QPageSize.PageSizeId.A4 if paper == "a4" else QPageSize.PageSizeId.Letter)
    w.setPageLayout(QPageLayout(size, QPageLayout.Orientation.Portrait, QMarginsF(0, 0, 0, 0),
                                QPageLayout.Unit.Millimeter))
    w.setTitle(DOCUMENT_TITLE)
    w.setCreator(f"acqplan {_version()}")
    return w


def write_sheet_pdf(plan: Plan, path: str | os.PathLike[str], paper: str = "a4", *,
                    generated_unix_s: float | None = None,
                    on_pages: Callable[[list[Page]], None] | None = None, drive=None) -> int:
    """Write the sheets as PDF (``paper`` "a4" or "letter", portrait); returns the page count.

    Rendered in memory and written with core.files.atomic.write_bytes_atomic (temporary file
    in the target folder, fsync, rename; an existing file keeps its mode): any failure
    raises InputError and leaves no partial file.
    """
    from PySide6.QtCore import QBuffer, QIODevice

    from core.api import write_bytes_atomic

    paper = paper.lower()
    if paper not in PAPER_MM:
        raise InputError(f"'{paper}' is not a paper size (a4 or letter)", field="paper")
    target = Path(path)
    folder = target.parent if str(target.parent) else Path(".")
    if not folder.is_dir():
        why = "is not a folder" if folder.exists() else "does not exist"
        raise InputError(f"cannot write the PDF: {folder} {why}", file=str(target))
    ensure_gui_application()
    buf = QBuffer()
    buf.open(QIODevice.OpenModeFlag.WriteOnly)
    writer = _pdf_writer(buf, paper)
    pages = paint_sheets(plan, writer, generated_unix_s=generated_unix_s, drive=drive)
    del writer                # flushes the PDF into the buffer
    data = bytes(buf.data())
    buf.close()
    if not data:
        raise InputError("the PDF could not be rendered", file=str(target))
    write_bytes_atomic(target, data, what="write the PDF")
    if on_pages is not None:
        on_pages(pages)
    return len(pages)


def write_sheet_pngs(plan: Plan, folder: str | os.PathLike[str], paper: str = "a4",
                     dpi: float = 80.0, *, generated_unix_s: float | None = None,
                     drive=None) -> list[Path]:
    """Each sheet page as ``page-N-<paper>.png`` at ``dpi`` (for looking at the pages and
    for the README pictures), laid out exactly as the PDF: the pages are built for the
    PDF device and painted on an image that reports the PDF resolution, scaled down."""
    from PySide6.QtCore import QBuffer, QIODevice, Qt
    from PySide6.QtGui import QImage, QPainter

    from core.api import write_bytes_atomic

    paper = paper.lower()
    if paper not in PAPER_MM:
        raise InputError(f"'{paper}' is not a paper size (a4 or letter)", field="paper")
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    ensure_gui_application()
    buf = QBuffer()
    buf.open(QIODevice.OpenModeFlag.WriteOnly)
    writer = _pdf_writer(buf, paper)
    geo = _device_geometry(writer)
    pages = build_pages(plan, writer, geo, generated_unix_s, drive)
    w_mm, h_mm = PAPER_MM[paper]
    scale = dpi / PDF_DPI
    written = []
    for n, page in enumerate(pages, start=1):
        img = QImage(round(w_mm / 25.4 * dpi), round(h_mm / 25.4 * dpi), QImage.Format.Format_RGB32)
        img.setDotsPerMeterX(round(PDF_DPI / 0.0254))
        img.setDotsPerMeterY(round(PDF_DPI / 0.0254))
        img.fill(Qt.GlobalColor.white)
        painter = QPainter(img)
        painter.setRenderHint(QPainter.RenderHint.Antialiasing, True)
        painter.setRenderHint(QPainter.RenderHint.TextAntialiasing, True)
        painter.scale(scale, scale)
        _paint_page(painter, page, pages[0].typesetter)
        painter.end()
        img.setDotsPerMeterX(round(dpi / 0.0254))
        img.setDotsPerMeterY(round(dpi / 0.0254))
        out = QBuffer()
        out.open(QIODevice.OpenModeFlag.WriteOnly)
        img.save(out, "PNG")
        target = folder / f"page-{n}-{paper}.png"
        write_bytes_atomic(target, bytes(out.data()), what="write the page image")
        written.append(target)
    del writer
    return written


# --------------------------------------------------------------------------- window

def show_print_preview(plan: Plan, parent=None, drive=None) -> None:
    """Print preview (with its print button) of the sheets."""
    from PySide6.QtPrintSupport import QPrinter, QPrintPreviewDialog

    printer = QPrinter(QPrinter.PrinterMode.HighResolution)
    printer.setDocName(DOCUMENT_TITLE)
    dialog = QPrintPreviewDialog(printer, parent)
    dialog.setWindowTitle(f"{DOCUMENT_TITLE}: print preview")
    dialog.paintRequested.connect(lambda pr: _paint_guarded(plan, pr, parent, drive))
    dialog.exec()


def show_print_dialog(plan: Plan, parent=None, drive=None) -> bool:
    """The system print dialog; prints the sheets when accepted. Returns True if printed."""
    from PySide6.QtPrintSupport import QPrintDialog, QPrinter

    printer = QPrinter(QPrinter.PrinterMode.HighResolution)
    printer.setDocName(DOCUMENT_TITLE)
    dialog = QPrintDialog(printer, parent)
    if dialog.exec() != QPrintDialog.DialogCode.Accepted:
        return False
    return _paint_guarded(plan, printer, parent, drive)


def _paint_guarded(plan: Plan, printer, parent, drive=None) -> bool:
    try:
        paint_sheets(plan, printer, drive=drive)
        return True
    except Exception as err:  # shown to the user, never a traceback
        from PySide6.QtWidgets import QMessageBox

        QMessageBox.warning(parent, DOCUMENT_TITLE, f"The sheets could not be printed: {err}")
        return False


# --------------------------------------------------------------------------- command

def _write_outputs(scenario, args) -> int:
    """Plan the scenario (and its drive, when it has a route or events) and write the PDF,
    and the page images when asked (while the plan's files still exist)."""
    from core.api import make_plan, plan_drive

    plan = make_plan(scenario)
    drive = plan_drive(scenario) if (scenario.route is not None or scenario.events) else None
    pages = write_sheet_pdf(plan, args.output, args.paper, drive=drive)
    png_dir = getattr(args, "png", None)
    if png_dir:
        for path in write_sheet_pngs(plan, png_dir, args.paper, drive=drive):
            print(f"wrote {path}")
    return pages


def run_sheet_command(args) -> int:
    """``acqplan sheet SCENARIO.toml -o plan.pdf [--paper a4|letter] [--demo]``."""
    from core.api import load_scenario

    prog = "acqplan sheet"
    try:
        if bool(args.demo) == bool(args.scenario):
            raise InputError("give either a scenario file or --demo")
        if args.demo:
            from core.api import write_demo

            with tempfile.TemporaryDirectory(prefix="acqplan-demo-") as tmp:
                pages = _write_outputs(load_scenario(write_demo(tmp)), args)
        else:
            pages = _write_outputs(load_scenario(args.scenario), args)
    except InputError as err:
        # One line, also for a scenario with several problems (listed "; "-separated).
        lines = [ln.strip().lstrip("- ") for ln in str(err).splitlines() if ln.strip()]
        print(f"{prog}: {lines[0]} {'; '.join(lines[1:])}".rstrip(), file=sys.stderr)
        return 2
    print(f"wrote {args.output} ({pages} pages, {args.paper.upper() if args.paper == 'a4' else 'US Letter'})")
    return 0


__all__ = [
    "Capacity", "DOCUMENT_TITLE", "build_pages", "capacity", "channel_cards", "ensure_gui_application",
    "layout_problems", "paint_sheets", "run_sheet_command", "show_print_dialog",
    "show_print_preview", "table_rows", "write_sheet_pdf", "write_sheet_pngs",
]

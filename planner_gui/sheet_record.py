"""The result page of the sheets: the plan held against the receiver's record.

Printed after the drive when a record is loaded onto the plan (the window's record view
puts its comparison on the plan as ``plan.record_comparison``; :func:`record_pages` is
called by ``planner_gui.sheets.build_pages``). One row per compared satellite: the
window searched (lowest..highest edge over the record), the measured Doppler range,
inside yes/no, the residual after the common offset, C/N0 measured and planned, first
appearance and planned acquisition; above the table the verdict, the receiver
oscillator against the planned range and the fitted C/N0 end points to put back into the
scenario. Continued on further pages when the rows do not fit.
"""

from __future__ import annotations

from pathlib import Path

from core.api import clock_text, hz_text
from planner_gui.sheet_layout import INK_FAINT, INK_SOFT, PANEL, PANEL_DARK, Page
from planner_gui.sheets import (
    F_BODY,
    F_BODY_BOLD,
    F_SMALL,
    F_TABLE,
    F_TABLE_HEAD,
    TABLE_HEAD_MM,
    TABLE_PAD_MM,
    TABLE_ROW_MM,
    Context,
    _section_title,
)
from planner_gui.style import style_for

# (key, heading, width share, alignment)
COLUMNS = (
    ("id", "Sat.", 0.7, "left"), ("signal", "Signal", 1.0, "left"),
    ("source", "Doppler", 0.75, "left"), ("window", "Window searched (Hz)", 1.5, "right"),
    ("measured", "Measured (Hz)", 1.5, "right"), ("inside", "Inside", 0.95, "center"),
    ("residual", "Resid. med / max (Hz)", 1.15, "right"), ("cn0", "C/N0 meas. / plan", 1.0, "right"),
    ("first", "First seen", 0.8, "right"), ("planned", "Planned acq.", 0.8, "right"),
)
SUMMARY_MM = 33.0
LEGEND_MM = 16.0


def _span(lo, hi) -> str:
    if lo is None or hi is None:
        return "—"
    return f"{hz_text(lo)} … {hz_text(hi)}"


def rows(comparison) -> list[dict]:
    out = []
    for s in comparison.satellites:
        if s.inside_window_fraction is None:
            inside = "no Doppler"
        elif s.outside_samples == 0:
            inside = "yes"
        else:
            inside = f"NO ({100 * s.inside_window_fraction:.0f} %)"
        res = ("—" if s.residual_hz_median is None
               else f"{s.residual_hz_median:.3f} / {s.residual_hz_max:.3f}")
        cn0 = ("—" if s.cn0_dbhz_median is None
               else f"{s.cn0_dbhz_median:.1f} / {s.cn0_model_dbhz_median:.1f}")
        out.append({"id": s.sat_id, "signal": s.signal_id, "source": s.doppler_source or "—",
                    "window": _span(s.window_low_hz, s.window_high_hz),
                    "measured": _span(s.measured_low_hz, s.measured_high_hz), "inside": inside,
                    "residual": res, "cn0": cn0,
                    "first": "—" if s.first_seen_unix_s is None else clock_text(s.first_seen_unix_s),
                    "planned": ("—" if s.planned_acquisition_unix_s is None
                                else clock_text(s.planned_acquisition_unix_s)),
                    "_system": s.sat_id[0], "_bad": s.outside_samples > 0})
    return out


def _summary_lines(ctx: Context, c) -> list[tuple[str, str]]:
    sc = ctx.plan.scenario
    osc = ("no Doppler in the record" if c.oscillator_offset_ppb is None else
           f"{c.oscillator_offset_ppb:+.1f} ppb median: "
           f"{'inside' if c.offset_inside_fraction == 1.0 else 'OUTSIDE'} the planned "
           f"{sc.receiver.oscillator_offset_ppb:g} ± {sc.receiver.oscillator_uncertainty_ppb:g} ppb")
    hz = [o.hz for o in c.common_offset]
    common = "—" if not hz else f"{min(hz):+.2f} … {max(hz):+.2f} Hz at 1575.42 MHz"
    fit = ("not enough C/N0 samples" if c.cn0_fit is None else
           f"zenith {c.cn0_fit.zenith_dbhz:.1f}, mask {c.cn0_fit.mask_dbhz:.1f} dB-Hz "
           f"(planned {sc.signal.cn0_zenith_dbhz:g} / {sc.signal.cn0_at_mask_dbhz:g}; "
           f"rms {c.cn0_fit.rms_db:.1f} dB)")
    n_out, n = len(c.outside()), sum(1 for s in c.satellites if s.doppler_samples)
    return [("Record", f"{Path(c.record_source).name} ({c.record_format})"),
            ("Verdict", c.verdict.split(":", 1)[0] + f": {n_out} of {n} satellites left their window"),
            ("Receiver oscillator", osc),
            ("Common offset", common),
            ("C/N0 fit to put back", fit)]


def record_pages(ctx: Context, comparison) -> list[Page]:
    """The result page(s) for one comparison (see the module text)."""
    m = ctx.geo.mm
    bx, by, bw, bh = ctx.geo.body
    table = rows(comparison)
    rh, hh, pad = m(TABLE_ROW_MM), m(TABLE_HEAD_MM), m(TABLE_PAD_MM)
    first_rows = max(1, int((bh - m(SUMMARY_MM) - hh - m(LEGEND_MM)) // rh))
    later_rows = max(1, int((bh - hh - m(LEGEND_MM)) // rh))
    chunks = [table[:first_rows]]
    rest = table[first_rows:]
    while rest:
        chunks.append(rest[:later_rows])
        rest = rest[later_rows:]
    total = sum(c[2] for c in COLUMNS)
    widths = [bw * c[2] / total for c in COLUMNS]
    xs = [bx]
    for w in widths:
        xs.append(xs[-1] + w)
    pages = []
    for n, chunk in enumerate(chunks):
        title = "Record against the plan" + (f" ({n + 1} of {len(chunks)})" if len(chunks) > 1 else "")
        page = ctx.new_page(title, kind="record-result")
        y = by
        if n == 0:
            y = _section_title(ctx, page, bx, y, bw, "What the receiver recorded")
            label_w = m(44)
            for label, value in _summary_lines(ctx, comparison):
                page.text((bx, y, label_w, m(4.6)), label, F_BODY_BOLD, valign="top", role="record-label")
                page.text((bx + label_w, y, bw - label_w, m(4.6)), value, F_BODY, valign="top",
                          min_pt=9.0, role="record-value")
                y += m(5.0)
            y = by + m(SUMMARY_MM)
        page.rect((bx, y, bw, hh), fill=PANEL_DARK)
        for (_key, head, _w, align), x0, w in zip(COLUMNS, xs, widths):
            page.text((x0 + pad, y + m(0.5), w - 2 * pad, hh - m(1.0)), head, F_TABLE_HEAD,
                      align=align, wrap=True, role="record-head")
        y += hh
        for i, r in enumerate(chunk):
            if i % 2:
                page.rect((bx, y, bw, rh), fill=PANEL)
            for (key, _h, _w, align), x0, w in zip(COLUMNS, xs, widths):
                cx, cw = x0 + pad, w - 2 * pad
                if key == "id":
                    st = style_for(r["_system"])
                    page.marker(st.marker_name, cx + m(1.0), y + rh / 2, 1.9, st.colour)
                    cx, cw = cx + m(2.6), cw - m(2.6)
                spec = F_BODY_BOLD if (key == "inside" and r["_bad"]) else F_TABLE
                page.text((cx, y, cw, rh), r[key], spec, align=align, min_pt=9.0,
                          role=f"record-cell-{key}")
            y += rh
        page.line(bx, y, bx + bw, y, INK_FAINT, 0.25)
        legend = ("Window searched: lowest and highest edge of the window the plan searched at the "
                  "record's epochs (first window before the planned first acquisition, narrowed after "
                  "it, centred on the measured oscillator). Inside: every measured Doppler in its "
                  "window. Residual: measured minus predicted Doppler after the common offset. "
                  "C/N0 planned: the elevation model before the scenario's extra loss. Times UTC.")
        page.text((bx, y + m(1.5), bw, m(LEGEND_MM) - m(1.5)), legend, F_SMALL, wrap=True,
                  valign="top", colour=INK_SOFT, role="record-legend")
        pages.append(page)
    return pages

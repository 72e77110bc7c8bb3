"""The drive's sheets: a route page with the stretches and events in the order of driving,
and one page (or more) per test event with where, when, the searches by channel, the time
to fix and when to give up.

References: the core's own drive plan for the same scenario (core.plan.events.plan_drive,
computed here), its search entries (core.files.plan_export.search_entries), and the text
pypdf reads back out of the PDF (an independent reader of what was printed).
"""

from __future__ import annotations

import math
import os
import unicodedata
from pathlib import Path

import pytest

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
pytest.importorskip("pytestqt")
pypdf = pytest.importorskip("pypdf")
pytestmark = pytest.mark.gui

from core.files.demo import write_demo  # noqa: E402
from core.files.plan_export import search_entries  # noqa: E402
from core.files.scenario import load_scenario  # noqa: E402
from core.plan.events import plan_drive  # noqa: E402
from core.plan.pipeline import make_plan  # noqa: E402
from planner_gui import sheets  # noqa: E402
from planner_gui.sheet_layout import layout_problems  # noqa: E402


def _norm(text: str) -> str:
    return " ".join(unicodedata.normalize("NFKC", text).replace("\u2212", "-").split())


@pytest.fixture(scope="module")
def drive_sheets(tmp_path_factory, qapp):
    folder = write_demo(tmp_path_factory.mktemp("drive_sheets")).parent
    sc = load_scenario(folder / "demo_drive_scenario.toml")
    plan, drive = make_plan(sc), plan_drive(sc)
    out = {}
    for paper in ("a4", "letter"):
        got = {}
        path = Path(folder) / f"drive_{paper}.pdf"
        n = sheets.write_sheet_pdf(plan, path, paper, drive=drive,
                                   on_pages=lambda p, got=got: got.setdefault("pages", p))
        reader = pypdf.PdfReader(str(path))
        assert n == len(reader.pages) == len(got["pages"])
        out[paper] = (got["pages"], [_norm(p.extract_text()) for p in reader.pages])
    plain = {}
    sheets.write_sheet_pdf(plan, Path(folder) / "plain.pdf", "a4",
                           on_pages=lambda p: plain.setdefault("pages", p))
    return plan, drive, out, plain["pages"]


def test_drive_adds_a_route_page_and_pages_per_event(drive_sheets):
    plan, drive, out, plain = drive_sheets
    pages, texts = out["a4"]
    kinds = [p.tags.get("kind") for p in pages]
    n_route = kinds.count("route")
    events_paged = [p.tags.get("event") for p in pages if p.tags.get("kind") == "event"]
    assert n_route >= 1
    assert sorted(set(events_paged)) == sorted(e.event.id for e in drive.events)
    # the window's own sheets are all still there, after the drive's
    assert len(pages) == len(plain) + n_route + len(events_paged)
    assert not layout_problems(pages)
    # readable in a vehicle: no body text under 9 pt on the drive's pages (footer excepted)
    for page in pages:
        if page.tags.get("kind") in ("route", "event"):
            small = [b.text for b in page.boxes
                     if not b.role.startswith("footer") and b.spec.size_pt < 9.0 - 1e-6]
            assert not small, (page.section, small[:3])


@pytest.mark.parametrize("paper", ["a4", "letter"])
def test_route_page_lists_stretches_and_events_in_driving_order(drive_sheets, paper):
    _plan, drive, out, _ = drive_sheets
    pages, texts = out[paper]
    route_text = " ".join(t for p, t in zip(pages, texts) if p.tags.get("kind") == "route")
    # every event and every stretch that is not open sky, in the order of driving
    names = []
    for e in sorted(drive.events, key=lambda e: e.event.unix_s):
        names.append((e.event.unix_s, f"{e.event.id}:"))
    positions = [route_text.find(n) for _t, n in names]
    assert all(p >= 0 for p in positions), names
    assert positions == sorted(positions)
    for s in drive.drive.stretches:
        if s.kind != "open":
            assert route_text.count(s.name) >= 2, s.name        # where it begins and ends
    assert "driver drives" in route_text


def test_each_event_page_holds_its_searches_and_give_up(drive_sheets):
    _plan, drive, out, _ = drive_sheets
    pages, texts = out["a4"]
    for ev in drive.events:
        mine = [t for p, t in zip(pages, texts) if p.tags.get("event") == ev.event.id]
        text = " ".join(mine)
        assert f"Event {ev.event.id}" in text
        clock = sheets.Clock(ev.plan)
        assert clock.hms(ev.event.unix_s) in text
        entries = search_entries(ev.plan)
        # every search: its satellite, start and the window the plan gives it
        for e in entries:
            assert f"{e.sat_id} {clock.hms(e.start_unix_s)}" in text, (ev.event.id, e.sat_id)
            assert _norm(f"{sheets.fmt_hz(e.low_hz)} … {sheets.fmt_hz(e.high_hz)}") in text
        # the event's time to fix and its give-up time (event time + 95th percentile)
        p95 = ev.ttff_p95_s
        if p95 is not None and math.isfinite(p95):
            assert f"at {clock.hms(ev.event.unix_s + p95)} UTC" in text
        else:
            assert "no fix within the event's plan" in text


def test_window_sheets_without_route_are_unchanged(drive_sheets):
    _plan, _drive, _out, plain = drive_sheets
    assert not [p for p in plain if p.tags.get("kind") in ("route", "event")]


def test_route_page_times_follow_the_timetable_not_the_plan_step(drive_sheets):
    # The tunnel's re-acquisition comes when the outage ends: its event time is the
    # end of the outage stretch, and begin + outage length = that time (the event's own
    # outage_s). The route page prints the same instants (HH:MM:SS), not plan-step times.
    from datetime import UTC, datetime

    _plan, drive, out, _ = drive_sheets
    pages, texts = out["a4"]
    route_text = " ".join(t for p, t in zip(pages, texts) if p.tags.get("kind") == "route")
    reacq = [e for e in drive.events if e.event.kind == "reacquire"]
    assert reacq
    for e in reacq:
        end_t = e.event.unix_s
        begin_t = end_t - e.event.outage_s

        def hms(t):
            return datetime.fromtimestamp(round(t), UTC).strftime("%H:%M:%S")

        stretch = next(s for s in drive.drive.stretches if s.kind == "outage")
        assert f"{hms(begin_t)} {stretch.from_m / 1000:.2f} {stretch.name}" in route_text
        assert f"{hms(end_t)} {stretch.to_m / 1000:.2f} {stretch.name}" in route_text

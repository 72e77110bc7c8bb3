"""The printed sheets (planner_gui.sheets): PDF text equals the plan, page count, layout, CLI.

The PDF's text is read back with pypdf (positions from the text matrices) and compared
with values formatted here from the plan's own fields, so a sheet that prints a wrong,
rounded-differently or missing number fails. Layout: every text box recorded by the
layout engine must stay inside its cell and the printable area, and no two may overlap,
for A4 and US Letter.
"""

from __future__ import annotations

import math
import os
import re
import subprocess
import sys
import unicodedata
from datetime import UTC, datetime
from pathlib import Path
from zoneinfo import ZoneInfo

import numpy as np
import pytest

pytest.importorskip("PySide6.QtGui")
pypdf = pytest.importorskip("pypdf")

from core.files.demo import write_demo  # noqa: E402
from core.files.scenario import load_scenario  # noqa: E402
from core.ground.errors import InputError  # noqa: E402
from core.plan.pipeline import make_plan  # noqa: E402
from core.search import bins as binlib  # noqa: E402
from planner_gui import sheets  # noqa: E402
from planner_gui.sheet_layout import FontSpec, Geometry, Page, Typesetter, layout_problems  # noqa: E402
from planner_gui.style import SAFETY_CAUTIONS  # noqa: E402
from tests.conftest import HAVE_ORBIT_DATA, ORBIT_DATA, REPO  # noqa: E402

pytestmark = pytest.mark.gui

GENERATED = datetime(2030, 1, 2, 3, 4, tzinfo=UTC).timestamp()
GENERATED_TEXT = "generated 2030-01-02 03:04 UTC"

# Paper sizes in PDF points: ISO 216 A4 = 210 x 297 mm, ANSI Letter = 8.5 x 11 in.
PAPER_PT = {"a4": (210 / 25.4 * 72, 297 / 25.4 * 72), "letter": (8.5 * 72, 11 * 72)}


# --------------------------------------------------------------------------- fixtures

_CACHE: dict = {}


@pytest.fixture(scope="module")
def plans(tmp_path_factory):
    folder = tmp_path_factory.mktemp("sheets")
    demo = make_plan(load_scenario(write_demo(folder / "demo")))
    # A long window (multi-day times, several passes per satellite, continued tables) with
    # more channels than the overview holds; the edited scenario is not the saved file.
    long_sc = demo.scenario.with_changes(time={"end": "2027-05-19T02:00:00Z", "step_s": 120},
                                         receiver={"channels": 24})
    out = {"demo": demo, "long": make_plan(long_sc)}
    if HAVE_ORBIT_DATA:
        gps = ORBIT_DATA / "tle" / "perylune_gps-ops_2020-04-01.txt"
        gal = ORBIT_DATA / "tle" / "perylune_galileo_2020-04-01.txt"
        path = folder / "real.toml"
        path.write_text(f"""name = "Real TLE sheet check"
[orbits]
files = ["{gps.as_posix()}", "{gal.as_posix()}"]
[site]
lat_deg = 47.4
lon_deg = 8.5
height_m = 420
[time]
start = "2020-04-01T06:00:00Z"
end = "2020-04-01T08:00:00Z"
step_s = 30
timezone = "Europe/Zurich"
[receiver]
signals = ["GPS-L1CA", "GAL-E1"]
channels = 12
correlators_per_channel = 16
max_horizontal_speed_m_s = 40
[search]
coherent_ms = 4
false_alarm_per_cell = 1e-5
[mask]
elevation_deg = 10
""", encoding="utf-8")
        out["real"] = make_plan(load_scenario(path))
    return out


def _normal(text: str) -> str:
    return " ".join(unicodedata.normalize("NFKC", text).split())


def _items(page) -> list[tuple[str, float, float]]:
    """(text, x, y) of every text run of a PDF page, in drawing order; y grows upwards."""
    out = []

    def visit(text, cm, tm, font, size):
        if text.strip():
            x = tm[4] * cm[0] + tm[5] * cm[2] + cm[4]
            y = tm[4] * cm[1] + tm[5] * cm[3] + cm[5]
            out.append((_normal(text), x, y))
    page.extract_text(visitor_text=visit)
    return out


@pytest.fixture(scope="module")
def rendered(plans, tmp_path_factory, qapp):
    """render(name, paper) -> (pages, reader, items per page); each rendered once."""
    folder = tmp_path_factory.mktemp("pdf")

    def render(name: str, paper: str = "a4", parse: bool = True):
        key = (name, paper)
        if key not in _CACHE:
            if name not in plans:
                pytest.skip(f"real orbit files not found at {ORBIT_DATA}")
            got = {}
            path = folder / f"{name}_{paper}.pdf"
            n = sheets.write_sheet_pdf(plans[name], path, paper, generated_unix_s=GENERATED,
                                       on_pages=lambda p: got.setdefault("pages", p))
            reader = pypdf.PdfReader(str(path))
            assert n == len(reader.pages) == len(got["pages"])
            _CACHE[key] = {"pages": got["pages"], "reader": reader, "items": None}
        entry = _CACHE[key]
        if parse and entry["items"] is None:
            entry["items"] = [_items(p) for p in entry["reader"].pages]
        return entry
    return render


def _page_text(items) -> str:
    return " ".join(t for t, _, _ in items)


# --------------------------------------------------------------------------- layout

@pytest.mark.parametrize("paper", ["a4", "letter"])
@pytest.mark.parametrize("name", ["demo", "long", "real"])
def test_layout_has_no_overflow_or_overlap(rendered, name, paper):
    doc = rendered(name, paper, parse=False)
    assert sum(len(p.boxes) for p in doc["pages"]) > 300
    assert layout_problems(doc["pages"]) == []


def test_layout_check_finds_overflow_overlap_and_leaving_the_page(qapp, tmp_path):
    from PySide6.QtGui import QPdfWriter

    writer = QPdfWriter(str(tmp_path / "probe.pdf"))
    writer.setResolution(600)
    geo = Geometry.for_paper("a4", 600)
    page = Page(geo, "probe", typesetter=Typesetter(writer))
    x, y, _, _ = geo.body
    m = geo.mm
    page.text((x, y, m(5), m(3)), "a text far too long for a five millimetre cell", FontSpec(8))
    page.text((x, y + m(20), m(40), m(5)), "first", FontSpec(8))
    page.text((x + m(2), y + m(21), m(40), m(5)), "second", FontSpec(8))
    page.text((geo.content[0] - m(30), y + m(40), m(20), m(5)), "outside", FontSpec(8))
    problems = layout_problems([page])
    assert any("does not fit its cell" in p for p in problems)
    assert any("overlaps" in p and "first" in p for p in problems)
    assert any("leaves the printable area" in p and "outside" in p for p in problems)
    del writer


# --------------------------------------------------------------------------- pages

def _expected_table_pages(plan, paper: str) -> int:
    """Rows: one per pass of each searched satellite in view, plus the folded line of the
    satellites never searched (four rows' height), filled page by page."""
    cap = sheets.capacity(Geometry.for_paper(paper))
    costs = []
    idle = 0
    for s, sp in enumerate(plan.satellites):
        if not plan.visible[s].any():
            continue
        if sp.search is None:
            idle += 1
        else:
            costs += [1] * (len(sp.passes) or 1)
    if idle:
        costs.append(4)
    pages, used = 1, 0
    for c in costs:
        if used + c > cap.table_rows and used:
            pages, used = pages + 1, 0
        used += c
    return pages


@pytest.mark.parametrize("paper", ["a4", "letter"])
@pytest.mark.parametrize("name", ["demo", "long", "real"])
def test_page_count_follows_satellites_and_channels(rendered, plans, name, paper):
    doc = rendered(name, paper, parse=False)
    plan = plans[name]
    cap = sheets.capacity(Geometry.for_paper(paper))
    sections = [p.section for p in doc["pages"]]
    kinds = [p.tags.get("kind") for p in doc["pages"]] if "kind" in doc["pages"][0].tags else None
    assert len(doc["reader"].pages) == len(sections)
    # Summary first, then the table (its header on every page), charts, cards, field record.
    assert sections[0] == "Summary" and sections[-1] == "Field record"
    table = [x for x in sections if x.startswith("Satellites in view")]
    assert len(table) == _expected_table_pages(plan, paper)
    searches = [g for g in plan.timeline.segments if g.kind == "search"]
    ladder = [x for x in sections if x.startswith("Doppler")]
    assert len(ladder) == max(1, math.ceil(len(searches) / cap.ladder_rows))
    cards = [p for p in doc["pages"] if p.section.startswith("Channel cards")]
    assert cards and sorted({c for p in cards for c in p.tags["channels"]}) == \
        list(range(1, plan.scenario.receiver.channels + 1))
    assert kinds is None or kinds.count("record") == 1
    if name == "long":
        assert len(table) >= 3
        assert sum(x.startswith("Channel timeline") for x in sections) >= 1 and "Sky plot" in sections
    else:
        assert "Channel timeline: the first minutes" in sections


@pytest.mark.parametrize("name", ["demo", "long"])
def test_every_page_carries_page_number_file_hash_time_and_version(rendered, plans, name):
    import hashlib

    doc = rendered(name)
    sc = plans[name].scenario
    files = [*sc.resolved_orbit_files(), sc.resolved_mapping()]
    if name == "demo":                       # the saved file: hash of the file bytes
        data = Path(sc.path).read_bytes()
    else:                                    # edited in memory: the text as planned
        from core.files.scenario import scenario_to_toml
        data = scenario_to_toml(sc).encode("utf-8")
    digest = hashlib.sha256(data + b"".join(p.read_bytes() for p in files)).hexdigest()[:10]
    n = len(doc["items"])
    for i, items in enumerate(doc["items"], start=1):
        text = _page_text(items)
        assert f"page {i} of {n}" in text
        assert f"demo_scenario.toml · content {digest}" in text
        assert GENERATED_TEXT in text and "acqplan " in text
        assert "ACQUISITION SEARCH PLAN" in text
    if name == "long":
        assert "(as planned, not the saved file)" in _page_text(doc["items"][0])


@pytest.mark.parametrize("paper", ["a4", "letter"])
def test_paper_size(rendered, paper):
    box = rendered("demo", paper, parse=False)["reader"].pages[0].mediabox
    w, h = PAPER_PT[paper]
    assert abs(float(box.width) - w) < 1.0 and abs(float(box.height) - h) < 1.0


def test_charts_are_vector_drawings(rendered):
    doc = rendered("demo", parse=False)
    for page, laid in zip(doc["reader"].pages, doc["pages"]):
        xobjects = page["/Resources"].get("/XObject", {})
        for ref in getattr(xobjects, "values", lambda: [])():
            assert ref.get_object().get("/Subtype") != "/Image"
        if laid.section.startswith("Overview"):
            data = page.get_contents().get_data()
            assert data.count(b" l\n") > 500          # track polylines and bars as paths


# --------------------------------------------------------------------------- values

def _hms(u: float) -> str:
    """[calc] the nearest whole second, halves up."""
    return datetime.fromtimestamp(math.floor(u + 0.5), UTC).strftime("%H:%M:%S")


def _view(rise: float, set_: float) -> str:
    a = math.ceil(round(rise, 3) / 60) * 60
    b = math.floor(round(set_, 3) / 60) * 60
    f = "%H:%M"
    return f"{datetime.fromtimestamp(a, UTC).strftime(f)}–{datetime.fromtimestamp(b, UTC).strftime(f)}"


def _expected_row(sp) -> list[str]:
    q = sp.search
    acq = "—" if q.acquired_unix_s is None else _hms(q.acquired_unix_s)
    return [str(q.channel), sp.sat_id, sp.signal_id,
            _view(sp.passes[0].rise_unix_s, sp.passes[0].set_unix_s),
            "first" if q.state == "first" else "narrowed", _hms(q.start_unix_s),
            str(_half_up(q.low_hz)), str(_half_up(q.high_hz)), str(q.bins),
            f"{q.code_window_chips:.1f}", f"{q.cn0_dbhz:.1f}", f"{q.pd:.3f}",
            f"{q.expected_search_s:.1f}", acq]


def _half_up(v: float) -> int:
    return math.floor(v + 0.5)


@pytest.mark.parametrize("name", ["demo", "real"])
def test_satellite_table_prints_the_plans_values(rendered, plans, name):
    doc = rendered(name)
    plan = plans[name]
    table = [items for items, p in zip(doc["items"], doc["pages"]) if p.section.startswith("Satellites")]
    # Rows: text runs on one baseline, left to right.
    rows = []
    for items in table:
        by_y: dict[float, list] = {}
        for t, x, y in items:
            by_y.setdefault(round(y, 1), []).append((x, t))
        rows += [[t for _, t in sorted(v)] for v in by_y.values()]
    printed = [r for r in rows if len(r) > 1 and re.fullmatch(r"\d+", r[0])
               and re.fullmatch(r"[GECRJSI]\d\d", r[1])]
    in_view = [sp for s, sp in enumerate(plan.satellites) if plan.visible[s].any()]
    searched = sorted((sp for sp in in_view if sp.search is not None),
                      key=lambda sp: (sp.search.channel, sp.search.start_unix_s))
    # the order the crew works in: by channel, then search start
    assert [r[1] for r in printed] == [sp.sat_id for sp in searched]
    for r, sp in zip(printed, searched):
        assert r == _expected_row(sp), sp.sat_id
    assert len(searched) >= 4
    # the satellites never searched: one folded line naming each
    idle = [sp.sat_id for sp in in_view if sp.search is None]
    text = " ".join(_page_text(items) for items in table)
    assert f"{sheets.NOT_SEARCHED_TEXT} ({len(idle)}):" in text
    for sid in idle:
        assert sid in text
    assert "no search scheduled in the window" not in text


def _search_window(plan, seg):
    """Window and bins of a search segment from the plan arrays (grid step at or before it)."""
    s = plan.ids.index(seg.sat_id)
    k = max(0, int(np.searchsorted(plan.times.unix_s, seg.start_unix_s, side="right")) - 1)
    w = plan.windows_after if seg.search_state == "after" else plan.windows_first
    width = plan.bin_design[plan.satellites[s].signal_id].bin_width_hz
    lo, hi = float(w.low_hz[s, k]), float(w.high_hz[s, k])
    return lo, hi, int(binlib.bin_count(lo, hi, width)), width


@pytest.mark.parametrize("name", ["demo", "long"])
def test_channel_cards_list_every_search_with_its_window(rendered, plans, name):
    doc = rendered(name)
    plan = plans[name]
    cards = {}
    for items, p in zip(doc["items"], doc["pages"]):
        if p.section.startswith("Channel cards"):
            for ch in p.tags["channels"]:
                cards.setdefault(ch, []).append(_page_text(items))
    assert sorted(cards) == list(range(1, plan.scenario.receiver.channels + 1))
    first = {}
    for seg in sorted(plan.timeline.segments, key=lambda g: g.start_unix_s):
        if seg.kind != "search":
            continue
        text = " ".join(cards[seg.channel])
        assert f"CHANNEL {seg.channel}" in text
        sp = plan.satellites[plan.ids.index(seg.sat_id)]
        if seg.sat_id not in first and sp.search is not None:
            q = sp.search
            lo, hi, n, width = q.low_hz, q.high_hz, q.bins, q.bin_width_hz
        else:
            lo, hi, n, width = _search_window(plan, seg)
        first.setdefault(seg.sat_id, seg)
        centre = _half_up(0.5 * (lo + hi))
        line = (f"Doppler centre {'+' if centre > 0 else ''}{centre} Hz, span {_half_up(hi - lo)} Hz · "
                f"{n} bins × {width:.2f} Hz")
        assert _normal(line) in text, (seg.sat_id, line)
        assert _hms(seg.start_unix_s)[-8:] in text


def test_doppler_pages_show_every_search_in_time_order(rendered, plans):
    doc = rendered("demo")
    plan = plans["demo"]
    ids, bins = [], []
    for items, p in zip(doc["items"], doc["pages"]):
        if p.section.startswith("Doppler"):
            rows = sorted((-y, t) for t, x, y in items)
            ids += [t for _, t in rows if re.fullmatch(r"[GECRJSI]\d\d", t)]
            bins += [int(t.split()[0]) for _, t in rows if re.fullmatch(r"\d+ bins", t)]
    segs = sorted((g for g in plan.timeline.segments if g.kind == "search"),
                  key=lambda g: (g.start_unix_s, g.channel))
    assert ids == [g.sat_id for g in segs]
    assert bins == [_search_window(plan, g)[2] for g in segs]


def test_summary_page_states_data_assumptions_and_cautions(rendered, plans):
    doc = rendered("demo")
    plan = plans["demo"]
    text = " ".join(_page_text(items) for items, p in zip(doc["items"], doc["pages"])
                    if p.section.startswith("Summary"))
    assert "Field record" not in text and "SAFETY" in _page_text(doc["items"][0])
    sc = plan.scenario
    assert _normal(sc.name) in text
    assert "49.6183° N, 10.1327° E, 318 m" in text
    assert "±30 km horizontal, ±200 m vertical" in text
    assert "2027-05-18 04:00:00 – 06:00:00 UTC" in text
    # Local time of the window from zoneinfo (IANA tz database): CEST = UTC+2 in May.
    start_local = sc.time.start.astimezone(ZoneInfo("Europe/Berlin"))
    assert start_local.strftime("%H:%M:%S") == "06:00:00" and start_local.tzname() == "CEST"
    assert "2027-05-18 06:00:00 CEST – 08:00:00 CEST (Europe/Berlin, UTC+02:00)" in text
    for f in plan.orbit_files:
        assert Path(f.path).name in text
        epoch = datetime.fromtimestamp(round(f.epoch_unix_s), UTC).strftime("%Y-%m-%d %H:%M:%S")
        assert epoch in text and f"{f.age_s / 86400:.2f} d" in text
    in_view = int(plan.visible.any(axis=1).sum())
    assert f"SATELLITES IN VIEW {in_view}" in text
    assert f"TTFF MEDIAN {plan.ttff.median_s:.1f} s" in text
    assert f"TTFF 95TH PERCENTILE {plan.ttff.p95_s:.1f} s" in text
    assert f"FIRST FIX {_hms(plan.timeline.first_fix_unix_s)}" in text
    for caution in SAFETY_CAUTIONS:
        assert _normal(caution) in text


# --------------------------------------------------------------------------- failures

def test_pdf_into_a_file_as_folder_fails_cleanly(plans, tmp_path, qapp):
    blocker = tmp_path / "plain_file"
    blocker.write_text("x")
    with pytest.raises(InputError):
        sheets.write_sheet_pdf(plans["demo"], blocker / "plan.pdf")
    assert os.listdir(tmp_path) == ["plain_file"]


def test_failed_rename_keeps_the_old_pdf_and_leaves_no_part_file(plans, tmp_path, qapp, monkeypatch):
    target = tmp_path / "plan.pdf"
    target.write_bytes(b"old")

    def refuse(src, dst):
        raise OSError(13, "Permission denied")

    monkeypatch.setattr(os, "replace", refuse)
    with pytest.raises(InputError) as err:
        sheets.write_sheet_pdf(plans["demo"], target)
    assert "Permission denied" in str(err.value)
    assert target.read_bytes() == b"old" and os.listdir(tmp_path) == ["plan.pdf"]


def test_unknown_paper_is_bad_input(plans, tmp_path, qapp):
    with pytest.raises(InputError):
        sheets.write_sheet_pdf(plans["demo"], tmp_path / "p.pdf", paper="a3")
    assert os.listdir(tmp_path) == []


# --------------------------------------------------------------------------- devices, CLI

def test_paint_on_a_printer_honours_the_page_range(plans, tmp_path, qapp):
    from PySide6.QtPrintSupport import QPrinter

    full = sheets.write_sheet_pdf(plans["demo"], tmp_path / "all.pdf")
    printer = QPrinter(QPrinter.PrinterMode.HighResolution)
    printer.setOutputFormat(QPrinter.OutputFormat.PdfFormat)
    printer.setOutputFileName(str(tmp_path / "range.pdf"))
    printer.setFromTo(2, 3)
    pages = sheets.paint_sheets(plans["demo"], printer, generated_unix_s=GENERATED)
    del printer
    assert len(pages) == full
    reader = pypdf.PdfReader(str(tmp_path / "range.pdf"))
    assert len(reader.pages) == 2
    assert f"page 3 of {full}" in _normal(reader.pages[1].extract_text())
    assert layout_problems(pages) == []


def test_print_preview_paints_through_the_dialog(plans, qapp, monkeypatch, tmp_path):
    from PySide6.QtPrintSupport import QPrinter, QPrintPreviewDialog

    calls = []

    def fake_exec(self):
        printer = QPrinter(QPrinter.PrinterMode.HighResolution)
        printer.setOutputFormat(QPrinter.OutputFormat.PdfFormat)
        printer.setOutputFileName(str(tmp_path / "preview.pdf"))
        self.paintRequested.emit(printer)
        calls.append(printer)
        return 0

    monkeypatch.setattr(QPrintPreviewDialog, "exec", fake_exec)
    sheets.show_print_preview(plans["demo"], None)
    assert len(calls) == 1
    calls.clear()
    assert len(pypdf.PdfReader(str(tmp_path / "preview.pdf")).pages) >= 5


def test_sheet_command_demo_headless(tmp_path):
    env = {k: v for k, v in os.environ.items() if k not in ("QT_QPA_PLATFORM", "DISPLAY", "WAYLAND_DISPLAY")}
    out = tmp_path / "plan.pdf"
    proc = subprocess.run([sys.executable, "-m", "planner_gui.cli", "sheet", "--demo", "-o", str(out),
                           "--paper", "letter"], cwd=REPO, env=env, capture_output=True, text=True,
                          timeout=120)
    assert proc.returncode == 0, proc.stderr
    reader = pypdf.PdfReader(str(out))
    n = int(re.search(r"\((\d+) pages", proc.stdout).group(1))
    assert len(reader.pages) == n >= 5
    assert abs(float(reader.pages[0].mediabox.height) - PAPER_PT["letter"][1]) < 1.0
    assert "invented demo" in _normal(reader.pages[0].extract_text())
    assert [p.name for p in tmp_path.iterdir()] == ["plan.pdf"]


@pytest.mark.parametrize("argv", [
    ["sheet", "missing.toml", "-o", "x.pdf"],
    ["sheet", "-o", "x.pdf"],
    ["sheet", "--demo", "some.toml", "-o", "x.pdf"],
    ["sheet", "--demo", "-o", "no/such/folder/x.pdf"],
    ["sheet", "bad.toml", "-o", "x.pdf"],
])
def test_sheet_command_bad_input_is_one_line_and_exit_2(argv, tmp_path, monkeypatch, capsys, qapp):
    from planner_gui.cli import main

    monkeypatch.chdir(tmp_path)
    # Several bad fields at once: still one line.
    (tmp_path / "bad.toml").write_text('[site]\nlat_deg = 200\n[time]\nstart = "x"\n')
    assert main(argv) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("acqplan sheet")
    assert not (tmp_path / "x.pdf").exists()
    if "bad.toml" in argv:
        assert "site.lat_deg" in err[0] and "time.start" in err[0]


def test_print_dialog_prints_when_accepted(plans, qapp, monkeypatch, tmp_path):
    from PySide6.QtPrintSupport import QPrintDialog, QPrinter

    def accept(self):
        pr = self.printer()
        pr.setOutputFormat(QPrinter.OutputFormat.PdfFormat)
        pr.setOutputFileName(str(tmp_path / "printed.pdf"))
        return QPrintDialog.DialogCode.Accepted

    monkeypatch.setattr(QPrintDialog, "exec", accept)
    assert sheets.show_print_dialog(plans["demo"], None) is True
    assert len(pypdf.PdfReader(str(tmp_path / "printed.pdf")).pages) >= 5
    monkeypatch.setattr(QPrintDialog, "exec", lambda self: QPrintDialog.DialogCode.Rejected)
    assert sheets.show_print_dialog(plans["demo"], None) is False


def test_repeated_rendering_keeps_none_alive(plans, qapp, tmp_path):
    # PySide6 6.12 on CPython 3.11 drops a reference to None on each void call (the
    # project holds PySide6 below 6.12; planner_gui.qt_compat guards a faulty install).
    # Each render makes thousands of such calls: the count of None must hold.
    import gc

    sheets.write_sheet_pdf(plans["demo"], tmp_path / "warm.pdf")
    gc.collect()
    before = sys.getrefcount(None)
    for i in range(3):
        sheets.write_sheet_pdf(plans["demo"], tmp_path / f"r{i}.pdf")
    gc.collect()
    assert sys.getrefcount(None) >= before - 50


# --------------------------------------------------------------------------- read in a vehicle

def _relative_luminance(rgb) -> float:
    """[pub: WCAG 2.1, definition of relative luminance] from sRGB components 0..1."""
    def lin(c):
        c = float(c)
        return c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4
    r, g, b = (lin(c) for c in rgb)
    return 0.2126 * r + 0.7152 * g + 0.0722 * b


def _text_fills(reader, page) -> list[tuple[float, float, float]]:
    """The non-stroking (fill) colour in force at every text-showing operator of the page's
    content stream (q/Q save and restore it)."""
    from pypdf.generic import ContentStream

    fill, stack, out = (0.0, 0.0, 0.0), [], []
    for operands, op in ContentStream(page.get_contents(), reader).operations:
        if op == b"q":
            stack.append(fill)
        elif op == b"Q":
            fill = stack.pop() if stack else fill
        elif op in (b"scn", b"sc", b"rg") and len(operands) == 3:
            fill = tuple(float(v) for v in operands)
        elif op == b"g":
            fill = (float(operands[0]),) * 3
        elif op in (b"Tj", b"TJ", b"'", b'"'):
            out.append(fill)
    return out


@pytest.mark.parametrize("paper", ["a4", "letter"])
def test_every_page_is_readable_in_a_vehicle(rendered, paper):
    doc = rendered("demo", paper, parse=False)
    geo = Geometry.for_paper(paper)
    page_h_pt = PAPER_PT[paper][1]
    # the footer band, in PDF points from the bottom of the page
    footer_top_pt = page_h_pt - geo.to_mm(geo.footer[1]) / 25.4 * 72
    for n, page in enumerate(doc["reader"].pages, start=1):
        sizes = []

        def visit(text, cm, tm, font, size, sizes=sizes):
            if not text.strip():
                return
            y = tm[4] * cm[1] + tm[5] * cm[3] + cm[5]
            # the rendered height: font size times the vertical scale of text and user space
            eff = size * math.hypot(tm[2], tm[3]) * math.hypot(cm[2], cm[3])
            if y > footer_top_pt + 1.0:
                sizes.append((eff, text.strip()))
        page.extract_text(visitor_text=visit)
        assert sizes, n
        smallest = min(sizes)
        assert smallest[0] >= 9.0 - 0.05, (n, smallest)
        # every text fill dark: contrast at least 4.5:1 on white paper [pub: WCAG 2.1 SC
        # 1.4.3], i.e. relative luminance <= 0.183; holds in greyscale print as well
        fills = _text_fills(doc["reader"], page)
        assert fills
        light = {f for f in fills if (1.05 / (_relative_luminance(f) + 0.05)) < 4.5}
        assert not light, (n, light)


@pytest.mark.parametrize("paper", ["a4", "letter"])
def test_every_paper_keeps_the_test_record_and_incident_log(rendered, paper):
    doc = rendered("demo", paper)
    record = [items for items, p in zip(doc["items"], doc["pages"]) if p.section == "Field record"]
    assert len(record) == 1
    text = _page_text(record[0])
    for left, right in sheets.RECORD_FIELDS:
        assert left in text and right in text
    assert "Incident log" in text and "Time (UTC)" in text and "What happened" in text
    assert "GPS " in text and "Test start" in text


def test_cards_say_when_to_give_up_and_what_then(rendered, plans):
    """Every search on the cards names its give-up time, and its spare where it has one;
    the give-up time is the 95th percentile of the serial search, checked here against a
    numpy simulation of the same search [calc]."""
    from core.files.plan_export import search_entries
    from core.search import detection

    doc = rendered("demo")
    plan = plans["demo"]
    text = " ".join(_page_text(items) for items, p in zip(doc["items"], doc["pages"])
                    if p.section.startswith("Channel cards"))
    entries = search_entries(plan)
    with_spare = 0
    for e in entries:
        assert _hms(e.start_unix_s) in text
        if math.isfinite(e.give_up_s) and e.start_unix_s + e.give_up_s < plan.times.end_unix_s:
            assert f"Give up at {_hms(e.start_unix_s + e.give_up_s)}" in text, e.sat_id
        if e.spare:
            with_spare += 1
            assert f"re-task channel {e.channel} to {e.spare} (spare)" in text, e.sat_id
            assert e.spare != e.sat_id
    assert with_spare >= 4
    assert text.count("not acquired") >= len(entries) and "C/N0" in text and "Doppler" in text
    # the give-up time against a simulation: position j uniform in 0..q-1, visits geometric
    rng = np.random.default_rng(7)
    for q, pd, td in ((40, 0.9, 0.02), (300, 0.55, 0.004), (1, 0.3, 0.1)):
        j = rng.integers(0, q, 200_000)
        v = rng.geometric(pd, 200_000)
        t = (j + (v - 1) * (q - 1) + v) * td
        ref = float(np.quantile(t, 0.95, method="inverted_cdf"))   # smallest t with F(t) >= 0.95
        got = detection.serial_search_quantile_s(q, td, pd, 0.0, 0.0, 0.95)
        assert got == pytest.approx(ref, rel=0.01, abs=2 * td), (q, pd)
    # [calc] Pd = 1: the signal position is uniform, so 95 % by ceil(0.95 q) dwells
    assert detection.serial_search_quantile_s(100, 0.01, 1.0, 0.0, 0.0, 0.95) == pytest.approx(0.95)


def test_cut_searches_are_not_called_setting(rendered, plans):
    plan = plans["demo"]
    doc = rendered("demo")
    text = " ".join(_page_text(items) for items in doc["items"])
    end = datetime.fromtimestamp(plan.times.end_unix_s, UTC).strftime("%H:%M:%S")
    assert f"sets at {end}" not in text and f"it sets at {end}" not in text

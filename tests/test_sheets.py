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
from collections import Counter
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

def _expected_pages(plan, paper: str) -> int:
    cap = sheets.capacity(Geometry.for_paper(paper))
    # Layout constants for portrait A4 and Letter: 2 x 3 channel cards per page.
    assert (cap.card_columns, cap.card_rows) == (2, 3)
    rows = sum(len(sp.passes) or 1 for s, sp in enumerate(plan.satellites) if plan.visible[s].any())
    searches = [g for g in plan.timeline.segments if g.kind == "search"]
    n_ch = plan.scenario.receiver.channels
    per_ch = Counter(g.channel for g in searches)
    cards = sum(max(1, math.ceil(per_ch[c] / sheets.SEARCHES_PER_CARD)) for c in range(1, n_ch + 1))
    overview = 1 if n_ch <= sheets.OVERVIEW_MAX_CHANNELS else math.ceil(n_ch / cap.timeline_rows) + 1
    return (1 + math.ceil(rows / cap.table_rows) + overview
            + max(1, math.ceil(len(searches) / cap.ladder_rows))
            + math.ceil(cards / (cap.card_columns * cap.card_rows)))


@pytest.mark.parametrize("paper", ["a4", "letter"])
@pytest.mark.parametrize("name", ["demo", "long", "real"])
def test_page_count_follows_satellites_and_channels(rendered, plans, name, paper):
    doc = rendered(name, paper, parse=False)
    n = len(doc["reader"].pages)
    assert n == _expected_pages(plans[name], paper)
    # One summary page, then the table (its header on every page), then the rest.
    sections = [p.section for p in doc["pages"]]
    assert sections[0] == "Summary" and sections[1].startswith("Satellites in view")
    if name == "long":
        assert sum(s.startswith("Satellites in view") for s in sections) >= 3
        assert sum(s.startswith("Channel timeline") for s in sections) >= 1 and "Sky plot" in sections


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
    return datetime.fromtimestamp(round(u), UTC).strftime("%H:%M:%S")


def _view(rise: float, set_: float) -> str:
    a = math.ceil(round(rise, 3) / 60) * 60
    b = math.floor(round(set_, 3) / 60) * 60
    f = "%H:%M"
    return f"{datetime.fromtimestamp(a, UTC).strftime(f)}–{datetime.fromtimestamp(b, UTC).strftime(f)}"


def _expected_row(sp) -> list[str]:
    row = [sp.sat_id, sp.signal_id, f"{sp.carrier_hz / 1e6:.4f}",
           _view(sp.passes[0].rise_unix_s, sp.passes[0].set_unix_s),
           f"{max(p.max_elevation_deg for p in sp.passes):.1f}"]
    q = sp.search
    if q is None:
        return row + ["no search scheduled in the window"]
    return row + ["F" if q.state == "first" else "A", _hms(q.start_unix_s),
                  str(round(q.low_hz)), str(round(q.high_hz)), f"{q.bin_width_hz:.2f}", str(q.bins),
                  str(round(float(q.bin_centres_hz[0]))), str(round(float(q.bin_centres_hz[-1]))),
                  f"{q.code_window_chips:.1f}", f"{q.cn0_dbhz:.1f}", f"{q.pd:.3f}",
                  f"{q.expected_search_s:.1f}", str(q.channel)]


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
    printed = {r[0]: r for r in rows if re.fullmatch(r"[GECRJSI]\d\d", r[0])}
    in_view = [sp for s, sp in enumerate(plan.satellites) if plan.visible[s].any()]
    assert sorted(printed) == sorted(sp.sat_id for sp in in_view)
    for sp in in_view:
        assert printed[sp.sat_id] == _expected_row(sp), sp.sat_id
    assert sum(sp.search is not None for sp in in_view) >= 4


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
        line = f"window {round(lo)} … {round(hi)} Hz · {n} bins × {width:.2f} Hz"
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
    text = _page_text(doc["items"][0])
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

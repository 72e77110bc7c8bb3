"""The faces of one plan agree: the window's satellite table, the printed sheet and the
plan JSON write the same first-fix and acquisition times (one rounding, in
core.ground.display), and the words for the search state are the same everywhere.

Reference: the plan's own instants (floats) rounded here by hand to the nearest whole
second, halves up [calc]; the JSON is parsed with datetime.fromisoformat (Python's
ISO 8601 reader), the sheet text read back from the PDF with pypdf.
"""

from __future__ import annotations

import math
import os
import unicodedata
from datetime import UTC, date, datetime

import numpy as np
import pytest

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
pytest.importorskip("pytestqt")
pypdf = pytest.importorskip("pypdf")
pytestmark = pytest.mark.gui

from core.files.demo import write_demo  # noqa: E402
from core.files.scenario import load_scenario  # noqa: E402
from core.ground import display  # noqa: E402
from core.plan.pipeline import make_plan, plan_to_json  # noqa: E402

WAIT_MS = 60_000


def _by_hand(u: float) -> str:
    """[calc] nearest whole second, halves up, as HH:MM:SS."""
    return datetime.fromtimestamp(math.floor(u + 0.5), UTC).strftime("%H:%M:%S")


def _json_hms(text: str) -> str:
    return datetime.fromisoformat(text.replace("Z", "+00:00")).strftime("%H:%M:%S")


@pytest.fixture(scope="module")
def demo_file(tmp_path_factory):
    return write_demo(tmp_path_factory.mktemp("faces_demo"))


@pytest.fixture(scope="module")
def demo_plan(demo_file):
    return make_plan(load_scenario(demo_file))


def test_rounding_is_half_up_and_never_truncates():
    base = datetime(2027, 5, 18, 4, 1, 51, tzinfo=UTC).timestamp()
    # [calc] 51.5 s and 51.6 s round up to 52, 51.49 s stays at 51 (truncation gave 51
    # for all three; Python's round() gives 52 for 51.5 only because 51 is odd).
    assert display.clock_text(base + 0.6) == "04:01:52"
    assert display.clock_text(base + 0.5) == "04:01:52"
    assert display.clock_text(base + 0.49) == "04:01:51"
    assert display.clock_text(base + 1.5) == "04:01:53"     # round() would give 52 here
    assert display.iso_utc(base + 0.6) == "2027-05-18T04:01:52Z"
    # [calc] frequencies: whole hertz, halves up, no '-0'
    assert display.hz_text(-0.4) == "0" and display.hz_text(924.5) == "925"
    assert display.hz_text(-255.6, signed=True) == "−256"
    # [pub: IS-GPS-200 3.3.4] GPS weeks count from 1980-01-06 00:00 (a Sunday); GPS - UTC
    # = 18 s since 2017 (IERS Bulletin C; none announced since). Days by calendar [calc].
    days = (date(2027, 5, 18) - date(1980, 1, 6)).days
    week, tow = display.gps_week_tow(datetime(2027, 5, 18, 4, 0, 0, tzinfo=UTC).timestamp())
    assert week == days // 7 and tow == (days % 7) * 86400 + 4 * 3600 + 18
    assert date(2027, 5, 18).weekday() == 1 and days % 7 == 2      # a Tuesday


def test_state_has_one_word_for_people():
    assert display.state_word("after") == "narrowed"
    assert display.state_word("first") == "first"


def test_window_sheet_and_json_give_the_same_times(qtbot, demo_file, demo_plan, tmp_path):
    from planner_gui import sheets
    from planner_gui.main_window import PlannerWindow
    from planner_gui.settings import PlannerSettings, use_settings_folder

    use_settings_folder(tmp_path / "settings")
    plan = demo_plan
    tl = plan.timeline
    assert tl.first_fix_unix_s is not None and len(tl.acquisition_unix_s) >= 4
    expected_fix = _by_hand(tl.first_fix_unix_s)
    expected_acq = {sid: _by_hand(u) for sid, u in tl.acquisition_unix_s.items()}
    # the demo has at least one instant with a fraction (else rounding is not tested)
    assert any(abs(u - round(u)) > 0.05 for u in tl.acquisition_unix_s.values())

    # JSON
    js = plan_to_json(plan)
    assert _json_hms(js["first_fix_time"]) == expected_fix
    assert {k: _json_hms(v) for k, v in js["acquisitions"].items()} == expected_acq

    # window: the satellite table at the first fix shows each acquisition time
    w = PlannerWindow(settings=PlannerSettings(), interactive=False, restore_layout=False)
    qtbot.addWidget(w)
    w.resize(1366, 768)
    w.show()
    try:
        with qtbot.waitSignal(w.planShown, timeout=WAIT_MS, check_params_cb=lambda r: r.final):
            w.open_scenario(demo_file)
        w.model.set_cursor(w.model.plan.index_at(tl.first_fix_unix_s))
        shown = {}
        for r in range(w.table.proxy.rowCount()):
            sid = w.table.displayed(r, "id")
            if w.table.displayed(r, "acquired"):
                shown[sid] = w.table.displayed(r, "acquired")
        in_view = {sid for sid in expected_acq if sid in shown or sid in
                   {row["id"] for row in w.table.table_model.rows}}
        assert in_view and {sid: expected_acq[sid] for sid in in_view} == shown
        assert f"first fix {expected_fix} UTC" in w.channels.info.text()
    finally:
        w.worker.shutdown()

    # sheet
    path = tmp_path / "demo.pdf"
    sheets.write_sheet_pdf(plan, path, "a4")
    text = " ".join(unicodedata.normalize("NFKC", p.extract_text()) for p in pypdf.PdfReader(str(path)).pages)
    assert f"FIRST FIX {expected_fix}" in " ".join(text.split())
    for sid, hms in expected_acq.items():
        assert hms in text, sid


# --------------------------------------------------------------------------- the window

@pytest.fixture
def demo_window(qtbot, demo_file, tmp_path):
    from planner_gui.main_window import PlannerWindow
    from planner_gui.settings import PlannerSettings, use_settings_folder

    use_settings_folder(tmp_path / "settings")
    w = PlannerWindow(settings=PlannerSettings(), interactive=False, restore_layout=False)
    qtbot.addWidget(w)
    w.resize(1366, 768)
    w.show()
    qtbot.waitExposed(w)
    with qtbot.waitSignal(w.planShown, timeout=WAIT_MS, check_params_cb=lambda r: r.final):
        w.open_scenario(demo_file)
    yield w
    w.worker.shutdown()


def test_window_at_1366x768_shows_plan_views_together_and_the_whole_table(qtbot, demo_window):
    from PySide6.QtWidgets import QApplication

    w = demo_window
    for _ in range(5):
        QApplication.processEvents()
    assert (w.width(), w.height()) == (1366, 768)
    # the timeline and the Doppler windows on screen at once, neither squeezed to a strip
    for view in (w.channels, w.doppler):
        assert view.isVisible() and view.visibleRegion().boundingRect().height() >= 150
        assert view.width() >= 600
    # the satellite table with its default columns: no horizontal scrolling, and the
    # columns that matter (search time, channel, acquisition, state) shown
    table = w.table.table
    assert not table.horizontalScrollBar().isVisible()
    from planner_gui.models import COLUMN_INDEX

    for key in ("expected_search_s", "channel", "acquired", "state", "low_hz", "high_hz"):
        assert not table.isColumnHidden(COLUMN_INDEX[key])
    # the sky is the secondary view: smaller than the Doppler view
    assert w.sky.width() * w.sky.height() < w.doppler.width() * w.doppler.height()
    # no caption of a view wraps to three lines
    for view in (w.channels, w.doppler, w.sky, w.table, w.loss, w.search_grid):
        lines = view.info.height() / max(view.info.fontMetrics().lineSpacing(), 1)
        assert lines < 2.9, (view.objectName(), view.info.text())


def test_messages_count_once_and_safety_notes_once(qtbot, demo_window, demo_file):
    w = demo_window
    notes = w.messages.messages("note")
    assert sum("Safety" in n for n in notes) == 2
    with qtbot.waitSignal(w.planShown, timeout=WAIT_MS, check_params_cb=lambda r: r.final):
        w.open_scenario(demo_file)
    assert sum("Safety" in n for n in w.messages.messages("note")) == 2
    n = w.messages.attention_count()
    tab = w.lower_tabs.tabText(w.lower_tabs.indexOf(w.messages))
    assert tab == f"Messages ({n})"
    assert w.status_warnings.text().startswith(f"{n} warning")
    # rows sized to their text: none taller than a few lines
    w.lower_tabs.setCurrentWidget(w.messages)
    w.messages.fit_rows()
    line = w.messages.list.fontMetrics().lineSpacing()
    for r in range(w.messages.list.rowCount()):
        assert w.messages.list.rowHeight(r) <= 4 * line + 12


def test_form_labels_and_time_zones(demo_window):
    from core.api import zone_names

    w = demo_window
    from planner_gui.scenario_panel import FIELDS

    for label, _d, _s in FIELDS.values():
        for hint in ("(text)", "(choice)", "(integer)", "(y/n)", "(file)", "(count)"):
            assert hint not in label
    assert not w.panel.advanced.isChecked() and not w.panel.advanced_body.isVisible()
    zones = zone_names()
    assert "Factory" not in zones and "localtime" not in zones and "posixrules" not in zones
    assert zones[0] == "UTC" and "Europe/Berlin" in zones and "America/Argentina/Salta" in zones
    assert not any(z.startswith(("posix/", "right/")) for z in zones)


def test_bin_design_view_sets_the_accepted_loss(qtbot, demo_window):
    w = demo_window
    w.tabs.setCurrentWidget(w.loss)
    view = w.loss
    assert "bin" in view.figures.text() and "cells" in view.figures.text()
    before = w.model.plan.scenario.search.max_frequency_loss_db
    with qtbot.waitSignal(w.planShown, timeout=WAIT_MS, check_params_cb=lambda r: r.final):
        view.loss_spin.setValue(2.0)
        view.loss_spin.editingFinished.emit()
    plan = w.model.plan
    assert before != 2.0 and plan.scenario.search.max_frequency_loss_db == 2.0
    sid = view.shown_signal
    # [calc, numpy.sinc] the edge of the new bin loses the accepted 2 dB
    hw = plan.bin_design[sid].half_width_hz
    tc = plan.bin_design[sid].coherent_ms / 1000.0
    assert -20 * math.log10(abs(float(np.sinc(hw * tc)))) == pytest.approx(2.0, abs=1e-6)
    assert f"bin {plan.bin_design[sid].bin_width_hz:.1f} Hz" in view.figures.text()
    assert "sinc" not in view.info.text()          # the formula lives in the About box
    assert "sinc" in w.about_html()


# [pub: Machado, Oliveira & Fernandes, "A Physiologically-based Model for Simulation of
# Color Vision Deficiency", IEEE TVCG 15(6), 2009] deuteranopia, severity 1.0, applied to
# linear RGB (sRGB transfer function of IEC 61966-2-1).
DEUTERANOPIA = np.array([[0.367322, 0.860646, -0.227968],
                         [0.280085, 0.672501, 0.047413],
                         [-0.011820, 0.042940, 0.968881]])


def _deuteranope_sees(hex_colour: str) -> np.ndarray:
    c = np.array([int(hex_colour[i:i + 2], 16) for i in (1, 3, 5)]) / 255.0
    lin = np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)
    s = np.clip(DEUTERANOPIA @ lin, 0, 1)
    return 255 * np.where(s <= 0.0031308, 12.92 * s, 1.055 * s ** (1 / 2.4) - 0.055)


def test_doppler_view_keeps_galileo_beidou_glonass_apart_without_red_green(demo_window):
    from planner_gui.style import style_for

    w = demo_window
    drawn = {sy: w.doppler.lines[sy].opts["pen"] for sy in ("G", "E", "C", "R")}
    # a second cue: every constellation's lines have their own pattern and marker
    assert len({p.style() for p in drawn.values()}) == 4
    assert len({style_for(sy).marker for sy in drawn}) == 4
    assert len(w.doppler.line_marks.data) > 20
    # and the colours still differ for a deuteranope (sRGB distance, 0..441) [calc]
    for a, b in (("E", "C"), ("E", "R"), ("C", "R")):
        d = np.linalg.norm(_deuteranope_sees(drawn[a].color().name()) - _deuteranope_sees(drawn[b].color().name()))
        assert d > 45, (a, b, d)
    # legend names every constellation in the plan; hertz on the axis
    for label in ("GPS", "Galileo", "BeiDou", "GLONASS"):
        assert label in w.doppler.legend.text()
    assert w.doppler.plot.getPlotItem().getAxis("left").labelText == "Doppler (Hz)"
    # the selected satellite is highlighted and labelled
    sat = w.model.plan.first_acquired
    w.model.select(sat)
    assert w.doppler.selected_label.isVisible() and w.doppler.selected_label.toPlainText() == sat
    assert np.isfinite(w.doppler.selected_line.yData).any()


def test_duration_text_picks_a_readable_unit():
    # common practice: SI prefixes, three significant digits; never an exponent
    assert display.duration_text(2.9584e-06) == "2.96 µs"
    assert display.duration_text(0.04) == "40 ms"
    assert display.duration_text(2.0) == "2 s"
    assert display.duration_text(600.0) == "600 s"
    assert display.duration_text(0.0) == "0 s"
    assert "e" not in display.duration_text(1.234e-7)

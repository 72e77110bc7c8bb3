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

"""The receiver record in the window, offscreen: loaded onto the demo plan, compared off
the GUI thread, drawn in its own view, satellites outside their windows in Messages.

The record is a synthetic RINEX 3.03 file written from the plan's own geometry with a
known oscillator offset (tests/test_records_compare.py); what the view shows must be
what core.records.compare_record finds for the same plan and file [calc].
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

import numpy as np
import pytest

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
pytest.importorskip("pytestqt")
pytestmark = pytest.mark.gui

sys.path.insert(0, str(Path(__file__).resolve().parent))

from test_gui_window import demo, demo_master, open_demo, private_settings, window  # noqa: E402,F401
from test_records_compare import write_rinex3  # noqa: E402

WAIT_MS = 60_000


def test_record_loaded_onto_the_plan(qtbot, window, demo, tmp_path):  # noqa: F811
    from core.api import compare_record, load_record

    result = open_demo(qtbot, window, demo)
    plan = result.plan
    # from the plan's start at 5 s, -2000 ppb: outside the planned +-500 ppb, so every
    # satellite leaves its first window and must be listed in Messages
    times = plan.times.start_unix_s + 5.0 * np.arange(13)
    rec = tmp_path / "drive.23o"
    write_rinex3(rec, plan, times, osc_ppb=-2000.0)
    view = window.record_view
    with qtbot.waitSignal(view.compared, timeout=WAIT_MS) as blocker:
        window.record_view.load(str(rec))
    shown = blocker.args[0]
    expected = compare_record(window.model.plan, load_record(rec))
    assert shown.verdict == expected.verdict and not shown.held
    assert view.info.text() == expected.verdict
    texts = window.messages.messages()
    outside = [s.sat_id for s in expected.outside()]
    assert outside
    for sid in outside:
        assert any(t.startswith(f"record: {sid} measured Doppler outside") for t in texts)
    assert any(t.startswith(f"record {rec}: plan missed") for t in texts)
    # the three plots hold data
    assert len(view.doppler_plot.getPlotItem().listDataItems()) >= 2
    assert len(view.offset_plot.getPlotItem().listDataItems()) == 1
    assert len(view.cn0_plot.getPlotItem().listDataItems()) >= 3
    window.tabs.setCurrentWidget(view)
    qtbot.wait(200)
    out = os.environ.get("ACQPLAN_SCREENSHOT_DIR")
    if out:
        window.grab().save(str(Path(out) / "record_view.png"))


def test_bad_record_is_one_message_not_a_traceback(qtbot, window, demo, tmp_path):  # noqa: F811
    open_demo(qtbot, window, demo)
    bad = tmp_path / "bad.obs"
    bad.write_text("not a record\n")
    with qtbot.waitSignal(window.record_view.message, timeout=WAIT_MS,
                          check_params_cb=lambda kind, text: kind == "input"):
        window.record_view.load(str(bad))
    assert "not a RINEX observation file" in window.record_view.info.text()

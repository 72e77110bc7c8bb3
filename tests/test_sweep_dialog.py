"""The sweep dialog, offscreen: it computes off the GUI thread, its heat map shows the
sweep's TTFF p95 per (setting, departure), a click on a cell applies that setting and
departure, bad values are one line, Stop keeps nothing; the window's Plan menu opens it.

Reference: the core's own sweep (core.plan.sweep.run_sweep, run in the test on the same
inputs) for what the dialog must show; tests/test_sweep.py holds it against plans made
one by one and the square-law detector."""

from __future__ import annotations

import math
import os
import time
from pathlib import Path

import numpy as np
import pytest

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
pytest.importorskip("pytestqt")
pytestmark = pytest.mark.gui

from PySide6.QtCore import QPointF, Qt  # noqa: E402

from core.api import load_scenario, parse_iso_utc, run_sweep, save_scenario, write_demo  # noqa: E402

WAIT_MS = 120_000


@pytest.fixture(autouse=True)
def private_settings(tmp_path):
    from planner_gui import settings

    yield settings.use_settings_folder(tmp_path / "settings")


@pytest.fixture(scope="module")
def small(tmp_path_factory) -> Path:
    d = tmp_path_factory.mktemp("sweep_dialog")
    sc = load_scenario(write_demo(d / "demo"))
    sc = sc.with_changes(time={"end": "2027-05-18T04:40:00Z", "step_s": 60},
                         search={"monte_carlo_runs": 60})
    return save_scenario(sc, d / "small.toml").path


def _dialog(qtbot, scenario, workers=1):
    from planner_gui.sweep_dialog import SweepDialog

    d = SweepDialog(scenario, workers=workers)
    qtbot.addWidget(d)
    d.vary.cellWidget(0, 1).setText("4, 8")
    d.vary.selectRow(1)
    d._remove_vary()                                      # only coherent_ms varies
    d.dep_end.setDateTime(d.dep_start.dateTime().addSecs(3600))
    d.dep_step.setValue(30)                               # 04:00, 04:30, 05:00
    d.show()
    qtbot.waitExposed(d)
    return d


def _click_cell(qtbot, dialog, departure: int, setting: int) -> None:
    heat = dialog.heat
    centre = heat.cell_rect(departure, setting).center()
    vb = heat.plot.getPlotItem().getViewBox()
    scene = vb.mapViewToScene(QPointF(centre.x(), centre.y()))
    pos = heat.plot.mapFromScene(scene)
    qtbot.mouseClick(heat.plot.viewport(), Qt.MouseButton.LeftButton, pos=pos)


def test_heat_map_shows_the_sweep_and_a_click_applies_a_cell(qtbot, small):
    sc = load_scenario(small)
    d = _dialog(qtbot, sc)
    spec = d.build_spec()
    assert spec.n_combinations == 6
    with qtbot.waitSignal(d.sweep_finished, timeout=WAIT_MS) as got:
        t0 = time.perf_counter()
        assert d.start()
        returned_after = time.perf_counter() - t0
        assert d.thread is not None and d.thread.isRunning()
    assert returned_after < 0.5                            # the GUI thread did not wait
    result = got.args[0]
    reference = run_sweep(sc, spec, workers=1)
    assert result.rows == reference.rows
    shown = d.heat.image.image                             # (settings, departures), log10 s
    assert shown.shape == (2, 3)
    np.testing.assert_allclose(10 ** shown, reference.p95_grid_s(), rtol=1e-12)
    assert d.ranking.rowCount() == 2
    assert d.ranking.item(0, 1).text() == spec.setting_text(reference.best.setting)

    with qtbot.waitSignal(d.apply_requested, timeout=5000) as applied:
        _click_cell(qtbot, d, departure=2, setting=1)
    new = applied.args[0]
    assert new.search.coherent_ms == 8
    assert new.time.start_unix_s == parse_iso_utc("2027-05-18T05:00:00Z").timestamp()
    assert new.time.duration_s == sc.time.duration_s
    assert new.receiver == sc.receiver and new.site == sc.site
    assert d.heat.applied.isVisible()
    assert "Applied coherent_ms=8" in d.status.text()


def test_bad_value_is_one_line_and_nothing_runs(qtbot, small):
    d = _dialog(qtbot, load_scenario(small))
    d.vary.cellWidget(0, 1).setText("0.5, 4")
    assert not d.start()
    assert d.thread is None
    text = d.status.text()
    assert "coherent_ms" in text and "1 to 1000 ms" in text and "\n" not in text


def test_stop_keeps_nothing(qtbot, small):
    d = _dialog(qtbot, load_scenario(small))
    d.dep_end.setDateTime(d.dep_start.dateTime().addSecs(12 * 3600))   # 25 departures
    assert d.start()
    thread = d.thread
    with qtbot.waitSignal(thread.stopped, timeout=WAIT_MS):
        d.stop()
    qtbot.waitUntil(lambda: d.thread is None, timeout=WAIT_MS)
    assert d.result is None and "stopped" in d.status.text()
    assert d.run_button.isEnabled()


def test_window_menu_opens_the_dialog_and_a_cell_replans(qtbot, small):
    from planner_gui.main_window import PlannerWindow
    from planner_gui.settings import PlannerSettings
    from planner_gui.sweep_dialog import SweepDialog

    w = PlannerWindow(settings=PlannerSettings(), interactive=False, restore_layout=False)
    qtbot.addWidget(w)
    w.show()
    try:
        assert w.open_scenario(small)
        qtbot.waitUntil(lambda: w.model.plan is not None and not w._computing, timeout=WAIT_MS)
        w.act_sweep.trigger()
        dialogs = w.findChildren(SweepDialog)
        assert len(dialogs) == 1
        d = dialogs[0]
        d.workers.setValue(2)                              # the default path: a process pool
        d.vary.cellWidget(0, 1).setText("4, 8")
        d.vary.selectRow(1)
        d._remove_vary()
        d.dep_end.setDateTime(d.dep_start.dateTime().addSecs(1800))
        d.dep_step.setValue(30)
        with qtbot.waitSignal(d.sweep_finished, timeout=WAIT_MS):
            assert d.start()
        _click_cell(qtbot, d, departure=1, setting=1)
        want = parse_iso_utc("2027-05-18T04:30:00Z").timestamp()
        assert w.scenario.search.coherent_ms == 8 and w.scenario.time.start_unix_s == want
        assert w.panel.to_dict()["search"]["coherent_ms"] == 8
        qtbot.waitUntil(lambda: not w._computing and w.model.plan.scenario == w.scenario,
                        timeout=WAIT_MS)
        assert math.isfinite(w.model.plan.times.unix_s[0])
        assert w.model.plan.times.unix_s[0] == want
        assert w.dirty
    finally:
        w.worker.shutdown()

"""The planner window, offscreen: linked views, search-parameter changes, bad input,
save and reopen, settings in a temporary location.

Reference values: the core itself (core.plan.make_plan on the same inputs, computed in
the test) for what the views must show, and published bin-loss figures
(../shared/domain-notes.md section 5: the exact -1/-2/-3 dB half-widths 261.5/365.5/442.2
Hz at 1 ms, scaling as 1/Tc [calc, numpy.sinc]) for the loss curve and bin widths.
"""

from __future__ import annotations

import json
import math
import os
import shutil
import sys
from pathlib import Path

import numpy as np
import pytest

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
pytest.importorskip("pytestqt")
pytestmark = pytest.mark.gui

from PySide6.QtCore import QPointF, Qt  # noqa: E402

from core.files.demo import write_demo  # noqa: E402
from core.files.scenario import load_scenario  # noqa: E402
from core.plan.pipeline import make_plan, plan_to_json  # noqa: E402

WAIT_MS = 60_000


# --------------------------------------------------------------------------- fixtures

@pytest.fixture(autouse=True)
def private_settings(tmp_path):
    """Every test keeps its QSettings in its own temporary folder (never the user's)."""
    from planner_gui import settings

    folder = settings.use_settings_folder(tmp_path / "settings")
    yield folder


@pytest.fixture(scope="module")
def demo_master(tmp_path_factory) -> Path:
    return write_demo(tmp_path_factory.mktemp("demo_master"))


@pytest.fixture
def demo(tmp_path, demo_master) -> Path:
    """A private copy of the invented demo files (tests may break them)."""
    target = tmp_path / "demo"
    shutil.copytree(demo_master.parent, target)
    return target / demo_master.name


@pytest.fixture
def window(qtbot):
    from planner_gui.main_window import PlannerWindow
    from planner_gui.settings import PlannerSettings

    w = PlannerWindow(settings=PlannerSettings(), interactive=False, restore_layout=False)
    qtbot.addWidget(w)
    w.resize(1366, 768)
    w.show()
    qtbot.waitExposed(w)
    yield w
    w.worker.shutdown()


def wait_final(qtbot, window, action):
    """Run action and wait until a FINAL plan is on screen; returns the PlanResult."""
    with qtbot.waitSignal(window.planShown, timeout=WAIT_MS,
                          check_params_cb=lambda r: r.final) as blocker:
        action()
    return blocker.args[0]


def wait_problem(qtbot, window, action) -> str:
    with qtbot.waitSignal(window.problemShown, timeout=WAIT_MS) as blocker:
        action()
    return blocker.args[0]


def open_demo(qtbot, window, demo: Path):
    return wait_final(qtbot, window, lambda: window.open_scenario(demo))


def set_spin(qtbot, window, dotted: str, value: float):
    editor = window.panel.editors[dotted]
    return wait_final(qtbot, window, lambda: editor.spin.setValue(value))


# --------------------------------------------------------------------------- checks

def test_demo_opens_with_every_view_drawn(qtbot, window, demo):
    result = open_demo(qtbot, window, demo)
    plan = result.plan
    k = window.model.cursor
    n_up = int(plan.visible[:, k].sum())
    assert n_up > 0
    # Sky: one marker per satellite above the mask at the cursor, tracks drawn.
    assert sorted(window.sky.marker_ids()) == sorted(np.array(plan.ids)[plan.visible[:, k]].tolist())
    assert any(item.xData is not None and np.isfinite(item.xData).any() for item in window.sky.tracks.values())
    # Doppler: the nominal lines of every constellation in the plan.
    systems = {sp.system for sp in plan.satellites}
    for system in systems:
        x = window.doppler.lines[system].xData
        assert x is not None and np.isfinite(x).sum() > 0
    # Bins at cursor: every bin of every satellite in view.
    ref = plan.search_grid_at(k)
    assert window.search_grid.drawn_bins() == sum(len(g["bin_centres_hz"]) for g in ref)
    # Channel timeline: one bar per segment.
    n_track = sum(1 for g in plan.timeline.segments if g.kind == "track")
    n_search = sum(1 for g in plan.timeline.segments if g.kind == "search")
    assert np.asarray(window.channels.track_bars.opts["x0"]).size == n_track
    assert np.asarray(window.channels.search_hatch.opts["x0"]).size == n_search
    # Bin loss: a curve.
    assert window.loss.curve.xData is not None and window.loss.curve.xData.size > 10
    # Table: one row per satellite in view.
    assert window.table.table_model.rowCount() == n_up
    # Status bar: orbit-data age, warning count, compute time.
    assert "orbit data" in window.status_age.text() and "old" in window.status_age.text()
    assert window.status_warnings.text() == f"{len(plan.warnings)} warning" + ("" if len(plan.warnings) == 1 else "s")
    assert "computed in" in window.status_compute.text()
    # TTFF markers of the final plan.
    assert window.channels.median_line.isVisible() and window.channels.p95_line.isVisible()
    assert window.channels.median_line.value() == pytest.approx(plan.times.unix_s[0] + plan.ttff.median_s)


def test_cursor_and_table_follow_the_core(qtbot, window, demo):
    open_demo(qtbot, window, demo)
    ref_plan = make_plan(load_scenario(demo))          # the core on the same inputs
    n = len(ref_plan.times)
    for k in (0, n // 3, n - 1):
        window.cursor_bar.slider.setValue(k)
        assert window.model.cursor == k
        rows = {r["id"]: r for r in window.table.table_model.rows}
        ref = {g["id"]: g for g in ref_plan.search_grid_at(k)}
        assert set(rows) == set(ref)
        for sid, g in ref.items():
            assert rows[sid]["bins"] == len(g["bin_centres_hz"])
            assert rows[sid]["low_hz"] == pytest.approx(g["low_hz"], abs=1e-6)
            assert rows[sid]["high_hz"] == pytest.approx(g["high_hz"], abs=1e-6)
            s = ref_plan.ids.index(sid)
            assert rows[sid]["elevation_deg"] == pytest.approx(ref_plan.prediction.elevation_deg[s, k], abs=1e-9)
        assert window.search_grid.bin_counts() == {sid: len(g["bin_centres_hz"]) for sid, g in ref.items()}
        # The cursor strip shows the grid instant in UTC.
        from datetime import UTC, datetime

        stamp = datetime.fromtimestamp(float(ref_plan.times.unix_s[k]), UTC).strftime("%H:%M:%S UTC")
        assert stamp in window.cursor_bar.label.text()
        # Every plot's cursor line sits at the same instant.
        assert window.doppler.cursor_line.value() == pytest.approx(ref_plan.times.unix_s[k])
        assert window.channels.cursor_line.value() == pytest.approx(ref_plan.times.unix_s[k])


def test_coherent_time_and_accepted_loss_follow_the_core(qtbot, window, demo):
    open_demo(qtbot, window, demo)
    window.cursor_bar.slider.setValue(40)
    sc0 = load_scenario(demo)
    # 8 ms: two Galileo E1 code periods; BeiDou B1I keeps its own 1 ms (per-signal table).
    result = set_spin(qtbot, window, "search.coherent_ms", 8)
    assert result.plan.reused_geometry, "a search-only change must not propagate again"
    ref = make_plan(sc0.with_changes(search={"coherent_ms": 8.0}))
    _compare_table(window, ref)
    # [calc, numpy.sinc; domain-notes 5]: the 1 dB half-width is 261.5 Hz at 1 ms, so
    # 32.69 Hz at 8 ms: bins 65.4 Hz wide.
    assert result.plan.bin_design["GPS-L1CA"].bin_width_hz == pytest.approx(2 * 261.5 / 8, rel=2e-4)
    window.loss.signal_box.setCurrentIndex(window.loss.signal_box.findData("GPS-L1CA"))
    lo, hi = window.loss.bin_edges_hz()
    assert (lo, hi) == pytest.approx((-261.5 / 8, 261.5 / 8), rel=2e-4)

    result = set_spin(qtbot, window, "search.max_frequency_loss_db", 2.0)
    ref = make_plan(sc0.with_changes(search={"coherent_ms": 8.0, "max_frequency_loss_db": 2.0}))
    _compare_table(window, ref)
    # [calc; domain-notes 5]: -2 dB at 365.5 Hz for 1 ms -> 45.69 Hz at 8 ms.
    lo, hi = window.loss.bin_edges_hz()
    assert (lo, hi) == pytest.approx((-365.5 / 8, 365.5 / 8), rel=2e-4)
    # The 1/2/3 dB points marked on the curve [domain-notes 5: 261.5, 365.5, 442.2 Hz at 1 ms].
    xs = sorted(p.pos().x() for p in window.loss.marks.points() if p.pos().x() > 0)
    assert xs == pytest.approx([261.5 / 8, 365.5 / 8, 442.2 / 8], rel=3e-4)
    assert "2.00 dB" in window.loss.accepted.label.format


def _compare_table(window, ref):
    k = window.model.cursor
    rows = {r["id"]: r for r in window.table.table_model.rows}
    grid = {g["id"]: g for g in ref.search_grid_at(k)}
    assert set(rows) == set(grid)
    for sid, g in grid.items():
        assert rows[sid]["bins"] == len(g["bin_centres_hz"]), sid
        assert rows[sid]["bin_width_hz"] == pytest.approx(g["bin_width_hz"], rel=1e-12)
        s = ref.ids.index(sid)
        after = g["state"] == "after"
        pd = (ref.pd_after if after else ref.pd_first)[s, k]
        exp = (ref.expected_search_after_s if after else ref.expected_search_first_s)[s, k]
        assert rows[sid]["pd"] == pytest.approx(pd, rel=1e-12)
        assert rows[sid]["expected_search_s"] == pytest.approx(exp, rel=1e-12)
        # What the table DISPLAYS is the same number.
    view = window.table
    for r in range(view.proxy.rowCount()):
        sid = view.displayed(r, "id")
        assert int(view.displayed(r, "bins")) == len(grid[sid]["bin_centres_hz"])


def test_table_selection_selects_everywhere(qtbot, window, demo):
    plan = open_demo(qtbot, window, demo).plan
    window.cursor_bar.slider.setValue(20)
    view = window.table
    view.select_row(3)
    sid = view.displayed(3, "id")
    assert window.model.selected == sid
    s = plan.ids.index(sid)
    k = window.model.cursor
    # Sky: the ring sits on the satellite's marker, its track is drawn bold.
    from planner_gui.views.sky import sky_xy

    x, y = sky_xy(plan.prediction.azimuth_deg[s, k], plan.prediction.elevation_deg[s, k])
    ring = window.sky.ring.points()
    assert len(ring) == 1 and ring[0].pos().x() == pytest.approx(x) and ring[0].pos().y() == pytest.approx(y)
    assert np.nanmax(window.sky.selected_track.yData) == pytest.approx(
        np.nanmax(np.where(plan.visible[s], sky_xy(plan.prediction.azimuth_deg[s], plan.prediction.elevation_deg[s])[1], np.nan)))
    # Doppler: the selected satellite's nominal line.
    yd = window.doppler.selected_line.yData
    np.testing.assert_allclose(yd[plan.visible[s]], plan.windows_first.nominal_hz[s][plan.visible[s]])
    assert not window.doppler.first_band.path().isEmpty()
    # Bins at cursor: its row highlighted.
    row = [r["id"] for r in window.search_grid._rows].index(sid)
    assert window.search_grid.highlight.isVisible()
    assert float(np.asarray(window.search_grid.highlight.opts["y"])[0]) == row
    # Channel timeline: its segments outlined.
    mine = [g for g in plan.timeline.segments if g.sat_id == sid]
    assert np.asarray(window.channels.selected_bars.opts["x0"]).size == len(mine)
    # Bin loss follows the satellite's signal.
    assert window.loss.shown_signal == plan.satellites[s].signal_id


def test_click_in_sky_selects_in_table(qtbot, window, demo):
    plan = open_demo(qtbot, window, demo).plan
    k = window.model.cursor
    s = int(np.flatnonzero(plan.visible[:, k])[0])
    from planner_gui.views.sky import sky_xy

    x, y = sky_xy(plan.prediction.azimuth_deg[s, k], plan.prediction.elevation_deg[s, k])
    vb = window.sky.vb
    scene = vb.mapViewToScene(QPointF(float(x), float(y)))
    pos = window.sky.plot.mapFromScene(scene)
    qtbot.mouseClick(window.sky.plot.viewport(), Qt.MouseButton.LeftButton, pos=pos)
    assert window.model.selected == plan.ids[s]
    rows = window.table.table.selectionModel().selectedRows()
    assert len(rows) == 1 and rows[0].data() == plan.ids[s]


def test_click_on_doppler_line_selects(qtbot, window, demo):
    plan = open_demo(qtbot, window, demo).plan
    window.tabs.setCurrentWidget(window.doppler)
    qtbot.wait(50)
    k = len(plan.times) // 2
    s = int(np.flatnonzero(plan.visible[:, k])[0])
    scene = window.doppler.view_point(s, k)
    pos = window.doppler.plot.mapFromScene(scene)
    qtbot.mouseMove(window.doppler.plot.viewport(), pos=pos)
    qtbot.mouseClick(window.doppler.plot.viewport(), Qt.MouseButton.LeftButton, pos=pos)
    sel = window.model.selected
    assert sel is not None
    s_sel = plan.ids.index(sel)
    # The nearest line at that time: within a few pixels of the one aimed at.
    px = window.doppler._pi.getViewBox().viewPixelSize()[1]
    assert abs(plan.windows_first.nominal_hz[s_sel, k] - plan.windows_first.nominal_hz[s, k]) < 13 * px
    text = window.doppler.readout_text(s, k)
    assert plan.ids[s] in text and "Doppler" in text and "window" in text


def test_invalid_value_marked_at_its_field(qtbot, window, demo):
    before = open_demo(qtbot, window, demo).plan
    editor = window.panel.editors["time.end"]
    start = window.panel.editors["time.start"].edit.dateTime()
    wait_problem(qtbot, window, lambda: editor.edit.setDateTime(start.addSecs(-3600)))
    msg = window.panel.problem_of("time.end")
    # The core's message (core.plan.spec: "... is not after start ...").
    assert msg is not None and "not after start" in msg
    assert window.model.plan is before
    # Fixing the value clears the mark and plans again.
    wait_final(qtbot, window, lambda: editor.edit.setDateTime(start.addSecs(7200)))
    assert window.panel.problem_of("time.end") is None


def _bad_scenarios(demo: Path) -> dict[str, tuple[Path, list[str]]]:
    folder = demo.parent
    text = demo.read_text(encoding="utf-8")
    out: dict[str, tuple[Path, list[str]]] = {}
    p = folder / "broken_toml.toml"
    p.write_text(text.replace("[site]", "[site\n"), encoding="utf-8")
    out["toml syntax"] = (p, [p.name, "line"])
    p = folder / "bad_value.toml"
    p.write_text(text.replace("coherent_ms = 4 ", 'coherent_ms = "four" '), encoding="utf-8")
    out["bad value"] = (p, [p.name, "line", "search.coherent_ms"])
    p = folder / "end_before_start.toml"
    p.write_text(text.replace('end = "2027-05-18T06:00:00Z"', 'end = "2027-05-18T03:00:00Z"'), encoding="utf-8")
    out["end before start"] = (p, [p.name, "time.end", "not after start"])
    moved = folder / "elsewhere"
    moved.mkdir()
    p = moved / "orbits_moved.toml"
    p.write_text(text, encoding="utf-8")
    out["orbit files moved"] = (p, [p.name, "orbits.files", "not found"])
    p = folder / "garbage_yuma.toml"
    (folder / "garbage.txt").write_text("******** Week 423 almanac for PRN-01 ********\n"
                                        "ID:                         01\nHealth:  zero\n", encoding="utf-8")
    p.write_text(text.replace('files = ["demo_gps_yuma.txt", "demo_galileo.tle", "demo_beidou.tle", '
                              '"demo_glonass.tle"]', 'files = ["garbage.txt"]'), encoding="utf-8")
    out["malformed orbit file"] = (p, ["garbage.txt", "line"])
    p = folder / "not_utf8.toml"
    p.write_bytes(b"name = \"\xff\xfe\"\n")
    out["not UTF-8"] = (p, [p.name, "UTF-8"])
    return out


def test_bad_files_keep_the_old_plan(qtbot, window, demo):
    before = open_demo(qtbot, window, demo).plan
    for kind, (path, needles) in _bad_scenarios(demo).items():
        shown = []
        window.problemShown.connect(shown.append)
        window.open_scenario(path)
        # Errors found in the worker (the malformed orbit file) arrive later.
        qtbot.waitUntil(lambda shown=shown: bool(shown), timeout=WAIT_MS)
        qtbot.waitUntil(lambda: not window._computing, timeout=WAIT_MS)
        window.problemShown.disconnect(shown.append)
        text = window.message_bar.text.text()
        assert window.message_bar.isVisible(), kind
        for needle in needles:
            assert needle in text, f"{kind}: {needle!r} not in {text!r}"
        assert "Traceback" not in text
        assert window.model.plan is before, kind
        if kind == "malformed orbit file":
            # The scenario itself was valid (it is in the form now): back to the demo.
            wait_final(qtbot, window, lambda: window.open_scenario(demo))
            before = window.model.plan


def test_orbit_file_vanishing_before_compute(qtbot, window, demo):
    before = open_demo(qtbot, window, demo).plan
    gone = demo.parent / "demo_galileo.tle"
    gone.unlink()
    # The worker meets the missing file (geometry must be rebuilt: its mtime key changed).
    text = wait_problem(qtbot, window, lambda: window.request_plan(window.scenario))
    qtbot.waitUntil(lambda: not window._computing, timeout=WAIT_MS)
    assert "demo_galileo.tle" in window.message_bar.text.text()
    assert "not found" in window.message_bar.text.text()
    assert window.model.plan is before
    assert text
    # An edit now is stopped at the form, with the file named at its field.
    wait_problem(qtbot, window, lambda: window.panel.editors["search.coherent_ms"].spin.setValue(8))
    assert "demo_galileo.tle" in (window.panel.problem_of("orbits.files") or "")
    assert window.model.plan is before


def test_empty_constellation_after_mask(qtbot, window, demo):
    plan = open_demo(qtbot, window, demo).plan
    # One GPS satellite that never rises above the mask during the window.
    never = [sp.sat_id for s, sp in enumerate(plan.satellites)
             if sp.system == "G" and not plan.visible[s].any()]
    assert never
    lines = (demo.parent / "demo_gps.tle").read_text(encoding="utf-8").splitlines()
    prn = f"(PRN {int(never[0][1:]):02d})"
    i = next(i for i, ln in enumerate(lines) if prn in ln)
    (demo.parent / "low.tle").write_text("\n".join(lines[i:i + 3]) + "\n", encoding="utf-8")
    text = demo.read_text(encoding="utf-8")
    p = demo.parent / "nothing_up.toml"
    p.write_text(text.replace('files = ["demo_gps_yuma.txt", "demo_galileo.tle", "demo_beidou.tle", '
                              '"demo_glonass.tle"]', 'files = ["low.tle"]')
                 .replace('signals = ["GPS-L1CA", "GAL-E1", "BDS-B1I", "GLO-L1OF"]', 'signals = ["GPS-L1CA"]'),
                 encoding="utf-8")
    window.open_scenario(p)
    qtbot.waitUntil(lambda: not window._computing, timeout=WAIT_MS)
    assert "elevation mask" in window.message_bar.text.text()
    assert window.model.plan is plan


def test_site_at_a_pole(qtbot, window, demo):
    text = demo.read_text(encoding="utf-8")
    p = demo.parent / "pole.toml"
    p.write_text(text.replace("lat_deg = 49.6183", "lat_deg = 90.0"), encoding="utf-8")
    result = wait_final(qtbot, window, lambda: window.open_scenario(p))
    assert result.plan.scenario.site.lat_deg == 90.0
    notes = window.messages.messages("note")
    assert any("North Pole" in n and "meridian" in n for n in notes)
    assert window.table.table_model.rowCount() > 0


def test_save_and_reopen_gives_the_same_plan(qtbot, window, demo, tmp_path):
    open_demo(qtbot, window, demo)
    first = set_spin(qtbot, window, "search.noncoherent", 7).plan
    assert window.dirty
    target = tmp_path / "saved" / "trip.toml"
    target.parent.mkdir()
    assert window._save_to(target)
    assert not window.dirty
    assert str(target.resolve()) in window.settings.recent_files()
    again = wait_final(qtbot, window, lambda: window.open_scenario(target)).plan
    a, b = plan_to_json(first), plan_to_json(again)
    a.pop("scenario"), b.pop("scenario")
    assert a == b
    assert load_scenario(target).search.noncoherent == 7


def test_unsaved_changes_prompt(qtbot, window, demo):
    open_demo(qtbot, window, demo)
    set_spin(qtbot, window, "search.noncoherent", 9)
    window.interactive = True
    answers = ["cancel"]
    window.ask_unsaved = lambda: answers.pop(0)
    assert not window.close()
    assert window.isVisible()
    answers.append("discard")
    assert window.close()


def test_settings_stay_in_the_temporary_folder(qtbot, window, demo, private_settings):
    open_demo(qtbot, window, demo)
    window.save_layout()
    path = Path(window.settings.store.fileName())
    assert private_settings in path.parents
    from planner_gui.settings import PlannerSettings

    again = PlannerSettings()
    assert str(demo.resolve()) in again.recent_files()
    assert again.byte_array("geometry") is not None


def test_stale_results_are_dropped(qtbot, window, demo):
    open_demo(qtbot, window, demo)
    shown = []
    window.planShown.connect(lambda r: shown.append(r.scenario.search.noncoherent))
    sc = window.scenario
    window.request_plan(sc.with_changes(search={"noncoherent": 3}))
    window.request_plan(sc.with_changes(search={"noncoherent": 4}))
    last = window.request_plan(sc.with_changes(search={"noncoherent": 6}))
    qtbot.waitUntil(lambda: window.model.result.serial == last and window.model.ttff_final, timeout=WAIT_MS)
    assert shown and set(shown) == {6}


def test_progress_and_cancel_keep_the_previous_plan(qtbot, window, demo):
    before = open_demo(qtbot, window, demo).plan
    # New geometry and a long Monte Carlo (polled for cancel every 64 runs): this request
    # cannot finish before the cancel below arrives.
    sc = window.scenario.with_changes(time={"step_s": 5.0}, search={"monte_carlo_runs": 100_000})
    window.request_plan(sc)
    qtbot.waitUntil(lambda: window.progress.isVisible(), timeout=WAIT_MS)
    assert window.cancel_button.isVisible()
    qtbot.waitUntil(lambda: window.progress.value() > 0, timeout=WAIT_MS)
    with qtbot.waitSignal(window.worker.cancelled, timeout=WAIT_MS):
        window.cancel_compute()
    qtbot.waitUntil(lambda: not window._computing, timeout=WAIT_MS)
    assert window.model.plan is before
    assert not window.progress.isVisible()
    assert "cancelled" in window.status_compute.text()
    # A request cancelled before the worker took it is reported as well.
    with qtbot.waitSignal(window.worker.cancelled, timeout=WAIT_MS):
        window.request_plan(sc)
        window.request_plan(sc.with_changes(search={"noncoherent": 2}))
        window.cancel_compute()
    qtbot.waitUntil(lambda: not window._computing, timeout=WAIT_MS)
    assert window.model.plan is before


def test_two_stages_quick_then_final(qtbot, window, demo):
    open_demo(qtbot, window, demo)
    stages = []
    window.planShown.connect(lambda r: stages.append((r.final, window.channels.median_line.isVisible())))
    wait_final(qtbot, window, lambda: window.panel.editors["search.noncoherent"].spin.setValue(6))
    # Quick stage first (TTFF percentiles pending, their lines hidden), then the final one.
    assert stages[0] == (False, False)
    assert stages[-1] == (True, True)
    plan = window.model.plan
    assert plan.ttff.n_runs == load_scenario(demo).search.monte_carlo_runs


def test_table_sorts_numerically(qtbot, window, demo):
    from planner_gui.models import COLUMN_INDEX

    open_demo(qtbot, window, demo)
    view = window.table
    for key in ("nominal_hz", "bins", "cn0_dbhz"):
        view.table.sortByColumn(COLUMN_INDEX[key], Qt.SortOrder.AscendingOrder)
        shown = [float(view.displayed(r, key).replace("−", "-")) for r in range(view.proxy.rowCount())]
        assert shown == sorted(shown), key
    view.table.sortByColumn(COLUMN_INDEX["id"], Qt.SortOrder.DescendingOrder)
    ids = [view.displayed(r, "id") for r in range(view.proxy.rowCount())]
    assert ids == sorted(ids, reverse=True)


def test_exception_hook_reports_and_keeps_running(qtbot, window):
    import threading

    from planner_gui.app import install_excepthook

    previous, previous_thread_hook = sys.excepthook, threading.excepthook
    install_excepthook(window, show_dialog=False)
    try:
        try:
            raise RuntimeError("deliberate fault for the test")
        except RuntimeError:
            sys.excepthook(*sys.exc_info())
    finally:
        sys.excepthook = previous
        threading.excepthook = previous_thread_hook
    faults = window.messages.messages("fault")
    assert any("deliberate fault for the test" in f for f in faults)
    assert "Traceback" not in window.message_bar.text.text()


def test_drop_orbit_files_and_export(qtbot, window, demo, tmp_path):
    open_demo(qtbot, window, demo)
    extra = tmp_path / "extra.tle"
    shutil.copy(demo.parent / "demo_gps.tle", extra)
    from PySide6.QtCore import QMimeData, QUrl
    from PySide6.QtGui import QDropEvent

    mime = QMimeData()
    mime.setUrls([QUrl.fromLocalFile(str(extra))])
    event = QDropEvent(QPointF(200, 200), Qt.DropAction.CopyAction, mime,
                       Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier)
    result = wait_final(qtbot, window, lambda: window.dropEvent(event))
    assert str(extra.resolve()) in window.panel.editors["orbits.files"].value()
    assert not result.plan.reused_geometry
    out = tmp_path / "plan.json"
    with qtbot.waitSignal(window.exportFinished, timeout=WAIT_MS) as done:
        window.write_data(out, "json")
    assert done.args == [str(out), ""]
    assert json.loads(out.read_text()) == json.loads(json.dumps(plan_to_json(window.model.plan)))
    csv = tmp_path / "plan.csv"
    with qtbot.waitSignal(window.exportFinished, timeout=WAIT_MS):
        window.write_data(csv, "csv")
    from core.files.plan_export import read_search_csv, read_windows_csv

    assert len(read_search_csv(csv)) >= 12
    wcsv = tmp_path / "windows.csv"
    with qtbot.waitSignal(window.exportFinished, timeout=WAIT_MS):
        window.write_data(wcsv, "windows")
    assert len(read_windows_csv(wcsv)) > 100
    # A folder that does not exist: a clear message, nothing raised.
    with qtbot.waitSignal(window.exportFinished, timeout=WAIT_MS) as done:
        window.write_data(tmp_path / "no_such_folder" / "plan.json", "json")
    assert "Export failed" in done.args[1] and "no_such_folder" in window.message_bar.text.text()


def test_pdf_export_reports_clearly(qtbot, window, demo, tmp_path):
    import importlib.util

    open_demo(qtbot, window, demo)
    out = tmp_path / "sheets.pdf"
    assert importlib.util.find_spec("planner_gui.sheets") is not None
    with qtbot.waitSignal(window.exportFinished, timeout=WAIT_MS) as done:
        window.write_pdf(out, "a4")
    assert done.args == [str(out), ""]
    assert out.read_bytes()[:5] == b"%PDF-" and out.stat().st_size > 10_000
    # An unwritable target: a clear message in the window, no partial file.
    bad = tmp_path / "plan.json" / "sheets.pdf"
    (tmp_path / "plan.json").write_text("{}")
    with qtbot.waitSignal(window.exportFinished, timeout=WAIT_MS) as done:
        window.write_pdf(bad, "a4")
    assert "PDF export failed" in done.args[1]


def test_about_names_units_signs_and_safety(window):
    from planner_gui.style import SAFETY_CAUTIONS, SIGN_CONVENTIONS

    text = window.about_html()
    import html

    assert "acqplan" in text and "Hz" in text and "dB-Hz" in text
    for line in SIGN_CONVENTIONS + SAFETY_CAUTIONS:
        assert html.escape(line) in text


def test_every_scenario_key_has_an_editor_with_unit_and_range(window):
    from core.plan.spec import KEY_RULES

    panel = window.panel
    for rule in KEY_RULES:
        if rule.dotted == "format_version":
            continue
        editor = panel.editors[rule.dotted]
        if rule.unit:
            from planner_gui.scenario_panel import FIELDS

            unit = {"deg": "°", "us": "µs"}.get(rule.unit, rule.unit)
            assert unit in FIELDS[rule.dotted][0], rule.dotted
        spin = getattr(editor, "spin", None)
        if spin is not None:
            assert spin.minimum() == pytest.approx(rule.lo) and spin.maximum() == pytest.approx(rule.hi)
    assert math.isfinite(panel.editors["site.lat_deg"].spin.maximum())


def test_form_round_trips_every_key(window, demo):
    """Scenario -> form -> dict -> Scenario gives the same scenario (every key, optional
    keys set and unset, a seed beyond 32 bits)."""
    from core.plan.spec import Scenario

    base = load_scenario(demo)
    variants = [base, base.with_changes(
        name="round trip", site={"height_m": 318.25, "horizontal_uncertainty_km": 2.5},
        time={"uncertainty_s": 0.25, "timezone": "America/Santiago", "step_s": 15.0},
        receiver={"oscillator_offset_ppb": -12.345, "parallel_code_search": True,
                  "correlators_per_channel": 4096, "signals": ["GAL-E1", "GPS-L1CA"]},
        search={"fine_time_uncertainty_us": 10.0, "orbit_margin_hz": 50.0, "priority": "rising",
                "seed": 2**40 + 3, "false_alarm_per_cell": 3.5e-7, "monte_carlo_runs": 20000,
                "per_signal": {"GAL-E1": {"coherent_ms": 8.0, "noncoherent": 3}}},
        signal={"extra_loss_db": 12.5}, mask={"elevation_deg": -2.5})]
    for sc in variants:
        window.panel.set_scenario(sc)
        again = Scenario.from_dict(window.panel.to_dict(), base_dir=sc.base_dir)
        assert again == sc
        assert again.receiver.signals == sc.receiver.signals          # order kept


def test_exception_in_a_plain_thread_reaches_the_window(qtbot, window):
    import threading

    from planner_gui.app import install_excepthook

    previous = install_excepthook(window, show_dialog=False)
    previous_thread_hook = threading.excepthook
    try:
        def boom():
            raise ValueError("fault in a worker thread for the test")

        t = threading.Thread(target=boom)
        t.start()
        t.join()
        qtbot.waitUntil(lambda: any("fault in a worker thread" in f
                                    for f in window.messages.messages("fault")), timeout=5000)
    finally:
        sys.excepthook = previous
        threading.excepthook = previous_thread_hook


def test_messages_panel_keeps_a_bounded_history(window):
    from planner_gui.views.warnings import MAX_KEPT

    for i in range(MAX_KEPT + 40):
        window.messages.add_message("note", f"note {i}")
    notes = window.messages.messages("note")
    assert len([n for n in notes if n.startswith("note ")]) <= MAX_KEPT
    assert notes[-1] == f"note {MAX_KEPT + 39}"

"""The drive diagram in the window, offscreen: the route's stretches and test events are
drawn, choosing an event shows that event's own plan in every view, the plan-time cursor
moves the vehicle marker along the route.

Reference values: the core itself (core.plan.events.plan_drive on the same scenario,
computed in the test) and the route's own timetable (distance at a time, by linear
interpolation of the planned samples [calc]).
"""

from __future__ import annotations

import os
import shutil
from pathlib import Path

import numpy as np
import pytest

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
pytest.importorskip("pytestqt")
pytestmark = pytest.mark.gui

from core.files.demo import write_demo  # noqa: E402
from core.files.scenario import load_scenario  # noqa: E402
from core.plan.events import plan_drive  # noqa: E402

WAIT_MS = 90_000


@pytest.fixture(autouse=True)
def private_settings(tmp_path):
    from planner_gui import settings

    yield settings.use_settings_folder(tmp_path / "settings")


@pytest.fixture(scope="module")
def drive_scenario(tmp_path_factory) -> Path:
    folder = write_demo(tmp_path_factory.mktemp("drive")).parent
    path = folder / "demo_drive_scenario.toml"
    assert path.is_file(), "the demo writes the drive scenario"
    return path


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


def _open_drive(qtbot, window, path: Path):
    """Open the drive scenario and wait for the final result, which carries the drive."""
    with qtbot.waitSignal(window.planShown, timeout=WAIT_MS,
                          check_params_cb=lambda r: r.final and r.drive is not None):
        window.open_scenario(path)
    return window.model.drive


def test_drive_diagram_shows_route_stretches_and_events(qtbot, window, drive_scenario):
    drive = _open_drive(qtbot, window, drive_scenario)
    ref = plan_drive(load_scenario(drive_scenario))
    assert [e.event.id for e in drive.events] == [e.event.id for e in ref.events]
    view = window.route
    assert window.tabs.tabText(window.tabs.indexOf(view)) == f"Drive ({len(ref.events)} events)"
    # one marker per event, at the event's time and distance along the route
    spots = view.events.points()
    assert len(spots) == len(ref.events)
    for spot, ev in zip(spots, ref.events):
        assert spot.pos().x() == pytest.approx(ev.event.unix_s)
        assert spot.pos().y() == pytest.approx(ev.distance_m / 1000.0)
    # one patterned band per stretch that is not open sky, over its distances
    kinds = [s for s in ref.drive.stretches if s.kind != "open"]
    assert len(view._bands) == len(kinds)
    for band, s in zip(view._bands, kinds):
        lo, hi = band.getRegion()
        assert (lo, hi) == pytest.approx((s.from_m / 1000.0, s.to_m / 1000.0))
        assert band.brush.style() != 1 or s.kind == "open"     # 1 = solid: a pattern is the second cue
    # the chooser offers the whole window and every event
    assert view.chooser.count() == 1 + len(ref.events)


def test_choosing_an_event_drives_every_view(qtbot, window, drive_scenario):
    drive = _open_drive(qtbot, window, drive_scenario)
    base = window.model.plan
    ev = drive.events[2]
    with qtbot.waitSignal(window.model.planChanged, timeout=WAIT_MS):
        window.route.chooser.setCurrentIndex(3)
        window.route.chooser.activated.emit(3)
    assert window.model.event_id == ev.event.id
    shown = window.model.plan
    assert shown is ev.plan and shown is not base
    # the event's plan starts at the event and its satellites are the table's
    assert float(shown.times.unix_s[0]) == pytest.approx(ev.event.unix_s, abs=shown.scenario.time.step_s)
    table_ids = {r["id"] for r in window.model.cursor_rows()}
    assert table_ids <= set(shown.ids)
    # the channel timeline and the Doppler windows show the event's own span: the
    # timeline's first minutes start at the event, the Doppler plot covers its grid
    (x0, x1), _ = window.channels.vb.viewRange()
    assert x0 <= ev.event.unix_s + shown.scenario.time.step_s and x1 > ev.event.unix_s
    (d0, d1), _ = window.doppler._pi.viewRange()
    t = shown.times.unix_s
    assert d0 <= t[0] and d1 >= t[-1] and (d1 - d0) < 1.2 * (t[-1] - t[0])
    # back to the whole window
    with qtbot.waitSignal(window.model.planChanged, timeout=WAIT_MS):
        window.model.show_event(None)
    assert window.model.plan is base and window.model.event_id is None


def test_cursor_moves_the_vehicle_along_the_route(qtbot, window, drive_scenario):
    drive = _open_drive(qtbot, window, drive_scenario)
    st = drive.samples.states
    for k in (0, len(window.model.plan.times) // 3, len(window.model.plan.times) - 1):
        window.model.set_cursor(k)
        t = window.model.cursor_unix_s
        got = window.route.vehicle_position()
        assert got is not None
        assert got[0] == pytest.approx(t)
        assert got[1] == pytest.approx(float(np.interp(t, st.unix_s, st.distance_m)) / 1000.0, abs=1e-6)


def test_scenario_without_route_has_an_empty_diagram(qtbot, window, tmp_path):
    folder = write_demo(tmp_path / "plain").parent
    single = folder / "demo_scenario.toml"
    shutil.copy(single, tmp_path / "single.toml")
    with qtbot.waitSignal(window.planShown, timeout=WAIT_MS, check_params_cb=lambda r: r.final):
        window.open_scenario(single)
    assert window.model.drive is None
    assert len(window.route.events.points()) == 0
    assert "no route" in window.route.info.text()


def test_bad_drive_key_keeps_the_old_plan_and_marks_the_field(qtbot, window, drive_scenario, tmp_path):
    # A waypoint name not on the route is found once the route is read: the window keeps
    # the plan it shows and marks the field (its line from the file's own text [calc]).
    _open_drive(qtbot, window, drive_scenario)
    old_plan, old_drive = window.model.plan, window.model.drive
    text = drive_scenario.read_text(encoding="utf-8")
    bad = text.replace('at = "Altmarkt Kressing"', 'at = "Altmarkt"', 1)
    lines = bad.splitlines()
    third = [i for i, ln in enumerate(lines) if ln.strip() == "[[event]]"][2]
    line = next(j + 1 for j in range(third + 1, len(lines)) if lines[j].startswith("at ="))
    shutil.copytree(drive_scenario.parent, tmp_path / "demo")
    path = tmp_path / "demo" / "bad_drive.toml"
    path.write_text(bad, encoding="utf-8")
    with qtbot.waitSignal(window.problemShown, timeout=WAIT_MS,
                          check_params_cb=lambda t: "Altmarkt" in t):
        assert window.open_scenario(path) is True          # the checker passes; planning fails
    assert window.model.plan is old_plan and window.model.drive is old_drive
    marked = window.route.problem_text()
    assert f"line {line}" in marked and "event[3].at" in marked and "'Altmarkt'" in marked
    bar = window.message_bar.text.text()
    assert str(path) in bar and f"line {line}" in bar and "field 'event[3].at'" in bar
    assert "event[3].at" in window.panel.general_problem.text()
    # Fixed on disk and opened again: planned, the mark gone.
    path.write_text(text, encoding="utf-8")
    with qtbot.waitSignal(window.planShown, timeout=WAIT_MS,
                          check_params_cb=lambda r: r.final and r.drive is not None):
        window.open_scenario(path)
    assert window.route.problem_text() == ""

"""The window on bad input: a scenario with bad values comes up in the form with every
good value loaded and the bad fields marked; ``gui --screenshot`` on it exits 2 without
pictures; without a screen ``acqplan gui`` says how to run headless instead of Qt's abort.

Seen (issue: numbers a crew can trust, "The window on bad input"): the whole form came up
blank (latitude 0, 2000-01-01, no signals) for one bad value.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
from datetime import UTC, datetime
from pathlib import Path

import pytest

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
pytest.importorskip("pytestqt")
pytestmark = pytest.mark.gui

from core.files.demo import FILE_NAMES, write_demo  # noqa: E402
from planner_gui.app import no_screen_reason  # noqa: E402

REPO = Path(__file__).resolve().parents[1]
WAIT_MS = 60_000


@pytest.fixture(autouse=True)
def private_settings(tmp_path):
    from planner_gui import settings

    yield settings.use_settings_folder(tmp_path / "settings")


@pytest.fixture(scope="module")
def demo_master(tmp_path_factory) -> Path:
    return write_demo(tmp_path_factory.mktemp("demo_master"))


def _bad_copy(tmp_path: Path, demo_master: Path, *replacements: tuple[str, str]) -> Path:
    target = tmp_path / "demo"
    shutil.copytree(demo_master.parent, target)
    p = target / FILE_NAMES["scenario"]
    text = p.read_text(encoding="utf-8")
    for old, new in replacements:
        assert old in text
        text = text.replace(old, new)
    p.write_text(text, encoding="utf-8")
    return p


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


def test_bad_values_load_the_good_ones_and_mark_the_bad(qtbot, window, tmp_path, demo_master):
    path = _bad_copy(tmp_path, demo_master, ("lat_deg = 49.6183", "lat_deg = 95"),
                     ("channels = 12", "channels = 0"))
    assert window.open_scenario(path) is False
    ed = window.panel.editors
    # every good value of the file is in the form
    assert ed["site.lon_deg"].value() == pytest.approx(10.1327)
    assert ed["site.height_m"].value() == pytest.approx(318.0)
    start = ed["time.start"].value()
    start = start if isinstance(start, datetime) else datetime.fromisoformat(str(start).replace("Z", "+00:00"))
    assert start.astimezone(UTC) == datetime(2027, 5, 18, 4, 0, tzinfo=UTC)
    assert list(ed["receiver.signals"].value()) == ["GPS-L1CA", "GAL-E1", "BDS-B1I", "GLO-L1OF"]
    assert ed["search.coherent_ms"].value() == pytest.approx(4.0)
    # the bad ones are marked with the message of the scenario rules
    assert "95" in (window.panel.problem_of("site.lat_deg") or "")
    assert "-90 to 90 deg" in window.panel.problem_of("site.lat_deg")
    assert "1 to 256" in (window.panel.problem_of("receiver.channels") or "")
    assert window.panel.problem_of("site.lon_deg") is None
    text = window.message_bar.text.text()
    assert FILE_NAMES["scenario"] in text and "marked in the set-up form" in text
    assert window.model.plan is None                     # nothing planned from bad input
    assert window.current_path == path                  # Save goes back to the file
    # Fixing the two fields plans the file's scenario.
    ed["receiver.channels"].spin.setValue(12)
    with qtbot.waitSignal(window.planShown, timeout=WAIT_MS, check_params_cb=lambda r: r.final):
        ed["site.lat_deg"].spin.setValue(49.6183)
    sc = window.model.plan.scenario
    assert sc.site.lon_deg == pytest.approx(10.1327) and sc.receiver.channels == 12
    assert sc.time.start == datetime(2027, 5, 18, 4, 0, tzinfo=UTC)


def test_a_missing_orbit_file_still_shows_the_scenario(qtbot, window, tmp_path, demo_master):
    path = _bad_copy(tmp_path, demo_master)
    (path.parent / "demo_galileo.tle").unlink()
    assert window.open_scenario(path) is False
    assert window.panel.editors["site.lat_deg"].value() == pytest.approx(49.6183)
    assert "demo_galileo.tle" in (window.panel.problem_of("orbits.files") or "")


def _gui(tmp_path: Path, *args: str, env_changes: dict[str, str | None]) -> subprocess.CompletedProcess:
    env = dict(os.environ)
    env["ACQPLAN_SETTINGS_DIR"] = str(tmp_path / "settings")
    for k, v in env_changes.items():
        if v is None:
            env.pop(k, None)
        else:
            env[k] = v
    return subprocess.run([sys.executable, "-m", "planner_gui.cli", "gui", *args], cwd=REPO,
                          env=env, capture_output=True, text=True, timeout=180)


def test_screenshot_of_bad_values_exits_2_without_pictures(tmp_path, demo_master):
    path = _bad_copy(tmp_path, demo_master, ("lat_deg = 49.6183", "lat_deg = 95"))
    shots = tmp_path / "shots"
    proc = _gui(tmp_path, str(path), "--screenshot", str(shots), env_changes={"QT_QPA_PLATFORM": None})
    assert proc.returncode == 2, proc.stderr[-2000:]
    assert not shots.exists() or not any(shots.iterdir())
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1 and "site.lat_deg" in lines[0] and "no screenshots written" in lines[0]
    assert "Traceback" not in proc.stderr


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="X11/Wayland check is for Linux")
@pytest.mark.parametrize("platform", ["xcb", None])
def test_without_a_screen_gui_says_how_to_run_headless(tmp_path, platform):
    proc = _gui(tmp_path, "--demo", env_changes={"QT_QPA_PLATFORM": platform, "DISPLAY": None,
                                                  "WAYLAND_DISPLAY": None})
    assert proc.returncode == 2
    err = proc.stderr.strip()
    assert len(err.splitlines()) == 1, err
    assert "DISPLAY is not set" in err and "--screenshot" in err and "QT_QPA_PLATFORM=offscreen" in err
    assert "Aborted" not in err and "could not connect to display" not in err


def test_no_screen_reason_cases():
    linux = "linux"
    assert no_screen_reason({}, linux) == "DISPLAY is not set"
    assert no_screen_reason({"QT_QPA_PLATFORM": "xcb"}, linux) == "DISPLAY is not set"
    assert no_screen_reason({"DISPLAY": ":0"}, linux) is None
    assert no_screen_reason({"WAYLAND_DISPLAY": "wayland-0"}, linux) is None
    assert no_screen_reason({"QT_QPA_PLATFORM": "wayland"}, linux) == "WAYLAND_DISPLAY is not set"
    assert no_screen_reason({"QT_QPA_PLATFORM": "offscreen"}, linux) is None
    assert no_screen_reason({"QT_QPA_PLATFORM": "vnc:size=800x600"}, linux) is None
    assert no_screen_reason({}, "win32") is None and no_screen_reason({}, "darwin") is None

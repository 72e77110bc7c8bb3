"""``acqplan gui --demo --screenshot DIR``: a separate process renders the window and
every view to PNG files of the expected size, offscreen, and exits.

PNG layout [pub: PNG specification (ISO/IEC 15948), 5.2 and 11.2.2]: an 8-byte signature,
then the IHDR chunk whose data start with width and height as 4-byte big-endian integers
at byte offsets 16 and 20 of the file.
"""

from __future__ import annotations

import os
import struct
import subprocess
import sys
from pathlib import Path

import pytest

pytestmark = pytest.mark.gui

REPO = Path(__file__).resolve().parents[1]
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"
VIEWS = ("sky", "doppler", "search_grid", "channels", "loss_curve", "satellites", "messages",
         "scenario")


def png_size(path: Path) -> tuple[int, int]:
    head = path.read_bytes()[:24]
    assert head[:8] == PNG_SIGNATURE, f"{path.name} is not a PNG"
    assert head[12:16] == b"IHDR"
    return struct.unpack(">II", head[16:24])


def test_screenshot_command_writes_pngs(tmp_path):
    out = tmp_path / "shots"
    env = {k: v for k, v in os.environ.items() if k != "QT_QPA_PLATFORM"}   # must default itself
    env["ACQPLAN_SETTINGS_DIR"] = str(tmp_path / "settings")
    proc = subprocess.run([sys.executable, "-m", "planner_gui.cli", "gui", "--demo",
                           "--screenshot", str(out), "--size", "1024x700"],
                          cwd=REPO, env=env, capture_output=True, text=True, timeout=180)
    assert proc.returncode == 0, proc.stderr[-2000:]
    assert png_size(out / "window.png") == (1024, 700)
    for name in VIEWS:
        path = out / f"{name}.png"
        assert path.is_file(), f"{name}.png missing"
        w, h = png_size(path)
        assert w > 100 and h > 100, (name, w, h)
        if name != "scenario":                       # the whole form may be taller
            assert w <= 1024 and h <= 700, (name, w, h)
        assert path.stat().st_size > 2000, f"{name}.png looks empty"
    # No user settings were touched: the process wrote its own (temporary) store only.
    assert "Traceback" not in proc.stderr


def test_screenshot_of_a_bad_scenario_reports_and_fails(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text("[site\nlat_deg = 1\n", encoding="utf-8")
    env = {k: v for k, v in os.environ.items() if k != "QT_QPA_PLATFORM"}
    env["ACQPLAN_SETTINGS_DIR"] = str(tmp_path / "settings")
    proc = subprocess.run([sys.executable, "-m", "planner_gui.cli", "gui", str(bad),
                           "--screenshot", str(tmp_path / "shots"), "--size", "1100x720"],
                          cwd=REPO, env=env, capture_output=True, text=True, timeout=180)
    assert proc.returncode == 2
    assert "bad.toml" in proc.stderr and "line" in proc.stderr
    assert "Traceback" not in proc.stderr
    # No pictures of a window that shows no plan (earlier versions wrote them anyway).
    shots = tmp_path / "shots"
    assert not shots.exists() or not any(shots.iterdir())

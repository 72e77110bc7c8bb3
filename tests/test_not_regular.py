"""Paths that exist but are not regular files, and a mapping file that maps nothing.

Seen (issue: numbers a crew can trust, "Options and values"): a folder or /dev/null given as
an orbit file was reported "not found"; an empty mapping file passed without a word.
"""

from __future__ import annotations

import json
import os

import pytest

from core.files.demo import FILE_NAMES, write_demo
from planner_gui.cli import main


@pytest.fixture(scope="module")
def demo_dir(tmp_path_factory):
    return write_demo(tmp_path_factory.mktemp("demo")).parent


def _passes(demo_dir, orbits, *extra):
    return ["passes", "--orbits", str(orbits), "--site", "49.6,10.1,318", "--start",
            "2027-05-18T04:00:00Z", "--end", "2027-05-18T05:00:00Z", *extra]


@pytest.mark.parametrize("make, words", [
    (lambda t: "/dev/null", "not a regular file (a device)"),
    (lambda t: t, "is a folder, not a"),
])
def test_orbit_path_that_is_not_a_regular_file(capsys, demo_dir, tmp_path, make, words):
    # The readers' wording is core.ground.bounded_read's (which also bounds size and time).
    path = make(tmp_path)
    assert main(_passes(demo_dir, path)) == 2
    err = capsys.readouterr().err
    assert words in err and str(path) in err and "not found" not in err
    assert main(_passes(demo_dir, demo_dir / "demo_glonass.tle", "--mapping", str(path))) == 2
    err = capsys.readouterr().err
    assert words in err and "mapping file" in err and "not found" not in err


@pytest.mark.parametrize("name, words", [("/dev/null", "is a device"), ("", "is a folder")])
def test_scenario_naming_a_non_regular_orbit_file(capsys, demo_dir, tmp_path, name, words):
    target = name or str(tmp_path / "folder")
    if not name:
        os.mkdir(target)
    text = (demo_dir / FILE_NAMES["scenario"]).read_text()
    text = text.replace('"demo_gps_yuma.txt", ', f'"{target}", ')
    for n in os.listdir(demo_dir):
        (tmp_path / n).write_bytes((demo_dir / n).read_bytes())
    p = tmp_path / FILE_NAMES["scenario"]
    p.write_text(text)
    assert main(["plan", str(p)]) == 2
    err = capsys.readouterr().err
    assert f"orbit file '{target}' {words}, not a regular file" in err and "not found" not in err


def test_scenario_file_that_is_a_folder_or_device(capsys, tmp_path):
    assert main(["plan", str(tmp_path)]) == 2
    assert "is a folder" in capsys.readouterr().err
    assert main(["plan", "/dev/null"]) == 2
    assert "not a regular file" in capsys.readouterr().err


@pytest.mark.parametrize("kind, words", [("fifo", "is a named pipe, not a regular file"),
                                         ("folder", "is a folder, not a regular file")])
def test_scenario_check_names_the_kind_of_path(capsys, demo_dir, tmp_path, kind, words):
    target = tmp_path / "thing"
    os.mkfifo(target) if kind == "fifo" else os.mkdir(target)
    text = (demo_dir / FILE_NAMES["scenario"]).read_text()
    text = text.replace('mapping = "demo_glonass_mapping.txt"', f'mapping = "{target}"')
    for n in os.listdir(demo_dir):
        (tmp_path / n).write_bytes((demo_dir / n).read_bytes())
    p = tmp_path / FILE_NAMES["scenario"]
    p.write_text(text)
    assert main(["plan", str(p)]) == 2          # found by the check, never opened
    err = capsys.readouterr().err
    assert f"mapping file '{target}' {words}" in err and "not found" not in err


@pytest.mark.parametrize("text", ["", "# only a comment\n\n", "norad,id,k\n"])
def test_empty_mapping_file_is_a_warning(capsys, demo_dir, tmp_path, text):
    mapping = tmp_path / "empty_map.txt"
    mapping.write_text(text)
    argv = _passes(demo_dir, demo_dir / "demo_glonass.tle", "--mapping", str(mapping))
    assert main([*argv, "--format", "json"]) == 0
    warnings = json.loads(capsys.readouterr().out)["warnings"]
    assert any("empty_map.txt" in w and "holds no entries" in w for w in warnings)
    assert main(argv) == 0
    assert "warning:" in capsys.readouterr().err


def test_a_mapping_with_entries_gives_no_such_warning(capsys, demo_dir):
    argv = _passes(demo_dir, demo_dir / "demo_glonass.tle", "--mapping",
                   str(demo_dir / "demo_glonass_mapping.txt"), "--format", "json")
    assert main(argv) == 0
    assert not any("holds no entries" in w for w in json.loads(capsys.readouterr().out)["warnings"])

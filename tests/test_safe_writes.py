"""Writing files safely: through symbolic links, onto pipes and devices, sets all or
nothing, and the demo folder that does not overwrite edits.

Each case here once went wrong (issue: numbers a crew can trust, "Writing files"):
``-o`` onto a link replaced the link and left its target stale (and failed with "Invalid
cross-device link" for a target on another file system), ``--export-dir`` on a full disk
left ``plan.json`` without the CSVs, ``acqplan demo DIR`` overwrote edited files.
"""

from __future__ import annotations

import errno
import json
import os
import subprocess
import sys
import threading
from pathlib import Path

import pytest

from core.files import atomic
from core.files import plan_export as pe
from core.files.demo import FILE_NAMES, demo_files, write_demo
from core.files.scenario import load_scenario
from core.ground.errors import InputError
from core.plan.pipeline import make_plan
from planner_gui.cli import main

REPO = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def demo_dir(tmp_path_factory):
    return write_demo(tmp_path_factory.mktemp("demo")).parent


@pytest.fixture(scope="module")
def demo_plan(demo_dir):
    return make_plan(load_scenario(demo_dir / FILE_NAMES["scenario"]))


# --------------------------------------------------------------------------- links

def test_output_through_a_link_writes_the_target_and_keeps_the_link(tmp_path, demo_dir, capsys):
    real = tmp_path / "real" / "bins.json"
    real.parent.mkdir()
    real.write_text("stale")
    link = tmp_path / "out.json"
    link.symlink_to(real)
    assert main(["bins", "--coherent-ms", "4", "--max-loss-db", "1", "--format", "json",
                 "-o", str(link)]) == 0
    assert link.is_symlink() and os.readlink(link) == str(real)
    assert json.loads(real.read_text())["bin_width_hz"] > 0
    assert sorted(os.listdir(real.parent)) == ["bins.json"]   # no temporary left beside it
    assert sorted(os.listdir(tmp_path)) == ["out.json", "real"]


def test_link_to_a_file_on_another_file_system_is_written_there(tmp_path):
    # /dev/shm is a tmpfs on Linux, a different file system from the test folder; the
    # temporary file goes beside the TARGET, so the rename never crosses file systems.
    shm = Path("/dev/shm")
    if not shm.is_dir() or os.stat(shm).st_dev == os.stat(tmp_path).st_dev:
        pytest.skip("no second file system (/dev/shm) to link onto")
    real = shm / f"acqplan-test-{os.getpid()}.txt"
    try:
        real.write_text("stale")
        link = tmp_path / "out.txt"
        link.symlink_to(real)
        atomic.write_text_atomic(link, "fresh")
        assert real.read_text() == "fresh" and link.is_symlink()
    finally:
        real.unlink(missing_ok=True)


def test_dangling_link_creates_its_target(tmp_path):
    link = tmp_path / "out.txt"
    link.symlink_to(tmp_path / "new.txt")
    atomic.write_text_atomic(link, "made")
    assert (tmp_path / "new.txt").read_text() == "made" and link.is_symlink()


def test_existing_mode_is_kept_through_a_link(tmp_path):
    real = tmp_path / "real.txt"
    real.write_text("old")
    real.chmod(0o600)
    link = tmp_path / "l.txt"
    link.symlink_to(real)
    atomic.write_text_atomic(link, "new")
    assert real.stat().st_mode & 0o777 == 0o600


# --------------------------------------------------------------------------- pipes, devices

def test_output_to_a_device_is_written_in_place(capsys):
    assert main(["bins", "--coherent-ms", "4", "--max-loss-db", "1", "-o", "/dev/null"]) == 0
    assert os.path.exists("/dev/null") and not Path("/dev/null").is_file()


def test_output_to_a_named_pipe_is_written_directly(tmp_path):
    fifo = tmp_path / "pipe"
    os.mkfifo(fifo)
    got: list[bytes] = []
    reader = threading.Thread(target=lambda: got.append(fifo.read_bytes()))
    reader.start()
    atomic.write_text_atomic(fifo, "through the pipe\n")
    reader.join(5)
    assert got == [b"through the pipe\n"]
    assert sorted(os.listdir(tmp_path)) == ["pipe"]


def test_named_pipe_without_reader_is_refused_in_seconds(tmp_path, monkeypatch):
    monkeypatch.setattr(atomic, "PIPE_READER_WAIT_S", 0.3)
    fifo = tmp_path / "pipe"
    os.mkfifo(fifo)
    with pytest.raises(InputError, match="nothing reads the named pipe"):
        atomic.write_text_atomic(fifo, "x")


def test_output_onto_a_folder_is_one_line(tmp_path, capsys):
    assert main(["bins", "--coherent-ms", "4", "--max-loss-db", "1", "-o", str(tmp_path)]) == 2
    assert "is a folder" in capsys.readouterr().err


# --------------------------------------------------------------------------- sets

def _full_disk_on_call(monkeypatch, n_ok: int):
    calls = {"n": 0}
    real = atomic._write_fd

    def writer(fd, data):
        calls["n"] += 1
        if calls["n"] > n_ok:
            raise OSError(errno.ENOSPC, "No space left on device")
        real(fd, data)

    monkeypatch.setattr(atomic, "_write_fd", writer)


def test_export_dir_on_a_full_disk_writes_nothing(demo_plan, tmp_path, monkeypatch):
    _full_disk_on_call(monkeypatch, n_ok=1)        # plan.json fits, the first CSV does not
    with pytest.raises(InputError, match="No space left"):
        pe.export_all(demo_plan, tmp_path, "plan")
    assert os.listdir(tmp_path) == []


def test_export_dir_failure_keeps_the_previous_set(demo_plan, tmp_path, monkeypatch):
    names = ["plan.json", "plan_windows.csv", "plan_search.csv"]
    for n in names:
        (tmp_path / n).write_text(f"old {n}")
    _full_disk_on_call(monkeypatch, n_ok=2)
    with pytest.raises(InputError):
        pe.export_all(demo_plan, tmp_path, "plan")
    assert sorted(os.listdir(tmp_path)) == sorted(names)
    assert all((tmp_path / n).read_text() == f"old {n}" for n in names)


def test_a_rename_failing_half_way_puts_the_first_files_back(tmp_path, monkeypatch):
    a, b = tmp_path / "a.txt", tmp_path / "b.txt"
    a.write_text("old a")
    real_replace = os.replace
    calls = {"n": 0}

    def replace(src, dst):
        if str(dst) == str(b):
            calls["n"] += 1
            raise OSError(errno.EIO, "Input/output error")
        return real_replace(src, dst)

    monkeypatch.setattr(os, "replace", replace)
    with pytest.raises(InputError, match="Input/output error"):
        atomic.write_texts_atomic([(a, "new a"), (b, "new b")])
    assert calls["n"] == 1
    assert a.read_text() == "old a" and not b.exists()
    assert sorted(os.listdir(tmp_path)) == ["a.txt"]


def test_cli_export_dir_full_disk_exit_2_and_nothing_written(demo_dir, tmp_path, monkeypatch, capsys):
    _full_disk_on_call(monkeypatch, n_ok=1)
    out = tmp_path / "out"
    out.mkdir()
    code = main(["plan", str(demo_dir / FILE_NAMES["scenario"]), "--format", "json",
                 "-o", str(tmp_path / "stdout.json"), "--export-dir", str(out)])
    assert code == 2 and "No space left" in capsys.readouterr().err
    assert os.listdir(out) == []


# --------------------------------------------------------------------------- demo folder

def test_demo_does_not_overwrite_an_edited_file_without_force(tmp_path, capsys):
    assert main(["demo", str(tmp_path)]) == 0
    scenario = tmp_path / FILE_NAMES["scenario"]
    edited = scenario.read_text().replace("Hainvelde", "My own site")
    scenario.write_text(edited)
    other = tmp_path / sorted(set(FILE_NAMES.values()) - {FILE_NAMES["scenario"]})[0]
    other.unlink()
    assert main(["demo", str(tmp_path)]) == 2
    err = capsys.readouterr().err
    assert FILE_NAMES["scenario"] in err and "--force" in err
    assert scenario.read_text() == edited and not other.exists()   # nothing written
    assert main(["demo", str(tmp_path), "--force"]) == 0
    assert scenario.read_text() == demo_files()[FILE_NAMES["scenario"]]
    assert other.exists()


def test_demo_again_on_an_untouched_folder_is_fine(tmp_path):
    write_demo(tmp_path)
    before = {p.name: p.stat().st_mtime_ns for p in tmp_path.iterdir()}
    write_demo(tmp_path)
    assert {p.name: p.stat().st_mtime_ns for p in tmp_path.iterdir()} == before


def test_demo_cli_in_a_subprocess_refuses_edits(tmp_path):
    write_demo(tmp_path)
    (tmp_path / FILE_NAMES["scenario"]).write_text("# mine\n")
    r = subprocess.run([sys.executable, "-m", "planner_gui.cli", "demo", str(tmp_path)],
                       cwd=REPO, capture_output=True, text=True, timeout=120)
    assert r.returncode == 2 and len(r.stderr.strip().splitlines()) == 1
    assert (tmp_path / FILE_NAMES["scenario"]).read_text() == "# mine\n"

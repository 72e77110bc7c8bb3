"""Inputs that could exhaust memory or hang: every reader gives one clear line in seconds.

The issue's cases: /dev/zero (was a MemoryError), a 50 MB file (16.7 s), a named pipe with
no writer (a hang), a scenario with 5000 nested '[' (RecursionError inside tomllib) and a
file name with a NUL byte ("embedded null byte" as an internal error).
"""

from __future__ import annotations

import os
import threading
import time

import pytest

from core.files.scenario import load_scenario
from core.ground.bounded_read import ORBIT_FILE_LIMIT_BYTES, read_bytes_bounded
from core.ground.errors import InputError, OrbitFormatError, ScenarioError
from core.orbits.readers import load_orbits
from planner_gui.cli import main

FAST_S = 6.0     # "within seconds": the pipe timeout is 5 s [core.ground.bounded_read]


def _cli(capsys, *argv):
    t0 = time.monotonic()
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err, time.monotonic() - t0


def _doppler(path):
    return ["doppler", "--orbits", str(path), "--site", "47,8,400", "--start",
            "2021-04-15T00:00:00Z", "--end", "2021-04-15T01:00:00Z", "--step", "600"]


def _one_line(err: str) -> None:
    assert err.count("\n") == 1 and "internal error" not in err and "Traceback" not in err


@pytest.mark.skipif(not os.path.exists("/dev/zero"), reason="no /dev/zero on this system")
def test_dev_zero_is_refused_at_once(capsys):
    code, out, err, took = _cli(capsys, *_doppler("/dev/zero"))
    assert code == 2 and took < FAST_S
    _one_line(err)
    assert "/dev/zero" in err and "not a regular file" in err and "device" in err


def test_a_50_mb_file_is_refused_from_its_size(tmp_path, capsys):
    p = tmp_path / "big.tle"
    with open(p, "wb") as fh:            # sparse: 50 MB of size, nothing written
        fh.truncate(50 * 1024 * 1024)
    code, out, err, took = _cli(capsys, *_doppler(p))
    assert code == 2 and took < 2.0
    _one_line(err)
    assert str(p) in err and "50.0 MB" in err and "32.0 MB" in err


def test_a_file_just_under_the_limit_is_read(tmp_path):
    p = tmp_path / "pad.bin"
    with open(p, "wb") as fh:
        fh.truncate(ORBIT_FILE_LIMIT_BYTES)
    assert len(read_bytes_bounded(p, limit_bytes=ORBIT_FILE_LIMIT_BYTES, what="orbit file")) \
        == ORBIT_FILE_LIMIT_BYTES


def test_a_named_pipe_without_writer_times_out(tmp_path, capsys):
    p = tmp_path / "pipe.alm"
    os.mkfifo(p)
    code, out, err, took = _cli(capsys, *_doppler(p))
    assert code == 2 and took < FAST_S + 1.0
    _one_line(err)
    assert str(p) in err and "no data arrived within 5 s" in err


def test_a_named_pipe_with_a_writer_is_read(tmp_path):
    from test_plausibility import yuma

    p = tmp_path / "pipe.alm"
    os.mkfifo(p)
    text = yuma(3) + yuma(7)

    def write():
        with open(p, "w") as fh:
            fh.write(text)

    t = threading.Thread(target=write)
    t.start()
    s = load_orbits(p, reference_time=1_618_444_800.0)     # 2021-04-15
    t.join()
    assert s.ids == ["G03", "G07"]


def test_a_pipe_that_never_stops_is_cut_at_the_limit(tmp_path):
    p = tmp_path / "endless"
    os.mkfifo(p)
    stop = threading.Event()

    def write():
        try:
            with open(p, "wb") as fh:
                block = b"x" * 65536
                while not stop.is_set():
                    fh.write(block)
        except (BrokenPipeError, OSError):
            pass

    t = threading.Thread(target=write, daemon=True)
    t.start()
    with pytest.raises(OrbitFormatError) as err:
        read_bytes_bounded(p, limit_bytes=1024 * 1024, what="orbit file",
                           error_type=OrbitFormatError)
    stop.set()
    assert "more than 1.0 MB" in str(err.value)


def test_nul_byte_in_an_orbit_file_name():
    with pytest.raises(InputError) as err:
        load_orbits("gps\x00.alm")
    assert "NUL byte" in str(err.value) and "\n" not in str(err.value)


def test_a_folder_and_a_missing_file(tmp_path):
    with pytest.raises(OrbitFormatError, match="is a folder"):
        load_orbits(tmp_path)
    with pytest.raises(OrbitFormatError, match="file not found"):
        load_orbits(tmp_path / "nothing.alm")


# ---------------------------------------------------------------- scenario

def _scenario_text(files: str = '["a.alm"]') -> str:
    return (f'[orbits]\nfiles = {files}\n[site]\nlat_deg = 47.0\nlon_deg = 8.0\n[time]\n'
            'start = "2021-04-15T00:00:00Z"\nend = "2021-04-15T01:00:00Z"\n')


def test_scenario_with_5000_nested_brackets(tmp_path, capsys):
    p = tmp_path / "deep.toml"
    p.write_text("a = " + "[" * 5000)
    with pytest.raises(ScenarioError) as err:
        load_scenario(p)
    assert "nested" in str(err.value) and err.value.file == str(p)
    code, out, err, took = _cli(capsys, "plan", str(p))
    assert code == 2 and took < FAST_S
    _one_line(err)
    assert "nested" in err


def test_scenario_with_a_nul_byte_in_an_orbit_file_name(tmp_path, capsys):
    p = tmp_path / "nul.toml"
    p.write_text(_scenario_text('["gps\\u0000.alm"]'))
    code, out, err, took = _cli(capsys, "plan", str(p))
    assert code == 2
    _one_line(err)
    assert "orbits.files" in err and "NUL byte" in err


def test_scenario_file_name_with_a_nul_byte(capsys):
    with pytest.raises(ScenarioError) as err:
        load_scenario("plan\x00.toml")
    assert "NUL byte" in str(err.value)


def test_scenario_too_large_and_a_pipe(tmp_path, capsys):
    p = tmp_path / "big.toml"
    with open(p, "wb") as fh:
        fh.truncate(5 * 1024 * 1024)
    code, out, err, took = _cli(capsys, "plan", str(p))
    assert code == 2 and "5.0 MB" in err and "1.0 MB" in err
    _one_line(err)
    f = tmp_path / "pipe.toml"
    os.mkfifo(f)
    code, out, err, took = _cli(capsys, "plan", str(f))
    assert code == 2 and took < FAST_S + 1.0 and "no data arrived" in err

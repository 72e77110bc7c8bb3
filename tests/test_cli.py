"""The command line on the real public files and on bad input."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest
from conftest import ORBIT_DATA, REPO, requires_orbit_data

from planner_gui.cli import build_parser, main

# Dates near each real file's epoch, from ../shared/orbit-data/README.md (the planned
# start is the reference that resolves 10-bit weeks).
REAL_FILES = {
    "yuma/gpstk_gps_almanac_week819.txt": "2015-05-06T12:00:00Z",
    "yuma/gpstk_yuma377.txt": "2006-11-15T12:00:00Z",
    "yuma/orekit_20160331_week866.alm": "2016-04-02T12:00:00Z",
    "yuma/orekit_q2019034_qzss_week1015.alm": "2019-02-06T00:00:00Z",
    "yuma/orekit_yuma_week862.txt": "2016-03-02T12:00:00Z",
    "yuma/perylune_almanac.yuma.week0000.061440.txt": "2019-04-07T12:00:00Z",
    "yuma/perylune_yuma_2019-11-29_week34.txt": "2019-12-02T12:00:00Z",
    "sem/gpstk_sem387.txt": "2007-01-27T12:00:00Z",
    "sem/orekit_current_week862.al3": "2016-03-02T12:00:00Z",
    "sem/perylune_sem_2019-11-29_week34.txt": "2019-12-02T12:00:00Z",
    "tle/orekit_3gps_2016-03-24.txt": "2016-03-25T00:00:00Z",
    "tle/perylune_beidou_2020-04-01.txt": "2020-04-01T06:00:00Z",
    "tle/perylune_galileo_2020-04-01.txt": "2020-04-01T06:00:00Z",
    "tle/perylune_glo-ops_2020-04-01.txt": "2020-04-01T06:00:00Z",
    "tle/perylune_gps-ops_2020-04-01.txt": "2020-04-01T06:00:00Z",
    "tle/rtklib_TLE_GNSS_20121101.txt": "2012-11-01T00:00:00Z",
    "tle/rtklib_tle_nav_2012-10-31.txt": "2012-10-31T00:00:00Z",
    "tle/satkml_gps-ops_2014-10-29.txt": "2014-10-29T00:00:00Z",
    "tle/sgp4_SGP4-VER.TLE": "2006-06-25T00:00:00Z",
}
NOT_ORBIT_FILES = ["tle/rtklib_TLE_GNSS_SATNO.txt", "tle/rtklib_prn_name.txt", "tle/sgp4_tcppver.out"]


def run_cli(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def _end(start: str, hours: int = 2) -> str:
    from datetime import datetime, timedelta

    d = datetime.fromisoformat(start.replace("Z", "+00:00")) + timedelta(hours=hours)
    return d.strftime("%Y-%m-%dT%H:%M:%SZ")


@requires_orbit_data
@pytest.mark.parametrize("rel", sorted(REAL_FILES))
def test_doppler_and_passes_on_every_real_file(capsys, rel):
    start = REAL_FILES[rel]
    extra = ["--skip-bad-records"] if rel.endswith("SGP4-VER.TLE") else []
    code, out, err = run_cli(capsys, "doppler", "--orbits", str(ORBIT_DATA / rel), "--site",
                             "-33.92,-70.65,520", "--start", start, "--end", _end(start),
                             "--step", "600", "--all-elevations", "--format", "json", *extra)
    assert code == 0, err
    doc = json.loads(out)
    assert doc["satellites"], rel
    for sat in doc["satellites"]:
        assert set(sat) >= {"id", "signal", "samples"}
        smp = sat["samples"][0]
        assert set(smp) >= {"time", "azimuth_deg", "elevation_deg", "range_m", "range_rate_m_s",
                            "doppler_hz"}
        assert smp["time"].endswith("Z")
    # --all-elevations keeps every sample of every propagated satellite: 13 steps in 2 h at 600 s.
    assert max(len(s["samples"]) for s in doc["satellites"]) == 13
    # QZSS serves East Asia and Oceania: look from Tokyo for that file.
    site = "35.7,139.7,40" if "qzss" in rel else "47.4,8.5,420"
    code, out, err = run_cli(capsys, "passes", "--orbits", str(ORBIT_DATA / rel), "--site",
                             site, "--start", start, "--end", _end(start, 12),
                             "--format", "csv", *extra)
    assert code == 0, err
    assert out.splitlines()[0].startswith("id,rise,culmination,set")
    assert len(out.splitlines()) > 1


@requires_orbit_data
@pytest.mark.parametrize("rel", NOT_ORBIT_FILES)
def test_files_that_are_not_orbits_give_one_line_and_exit_2(capsys, rel):
    code, out, err = run_cli(capsys, "passes", "--orbits", str(ORBIT_DATA / rel), "--site",
                             "47,8,0", "--start", "2020-01-01T00:00:00Z", "--end", "2020-01-01T06:00:00Z")
    assert code == 2
    assert len(err.strip().splitlines()) == 1
    assert rel.split("/")[-1] in err and "line" in err


@requires_orbit_data
def test_mask_leaves_out_samples_below_it(capsys):
    f = str(ORBIT_DATA / "tle" / "perylune_gps-ops_2020-04-01.txt")
    args = ["doppler", "--orbits", f, "--site", "47.4,8.5,420", "--start", "2020-04-01T06:00:00Z",
            "--end", "2020-04-01T07:00:00Z", "--step", "300", "--format", "json"]
    code, out, _ = run_cli(capsys, *args, "--mask", "20")
    assert code == 0
    doc = json.loads(out)
    els = [s["elevation_deg"] for sat in doc["satellites"] for s in sat["samples"]]
    assert els and min(els) >= 20.0
    code, out_all, _ = run_cli(capsys, *args, "--all-elevations")
    assert len(json.loads(out_all)["satellites"]) == 31


@requires_orbit_data
def test_orbits_repeat_to_mix_constellations_and_signal_choice(capsys):
    gps = str(ORBIT_DATA / "tle" / "perylune_gps-ops_2020-04-01.txt")
    gal = str(ORBIT_DATA / "tle" / "perylune_galileo_2020-04-01.txt")
    base = ["doppler", "--site", "-33.92,-70.65,520", "--start", "2020-04-01T06:00:00Z",
            "--end", "2020-04-01T06:10:00Z", "--step", "300", "--format", "json", "--all-elevations"]
    code, out, _ = run_cli(capsys, *base, "--orbits", gps, "--orbits", gal)
    ids = {s["id"][0] for s in json.loads(out)["satellites"]}
    assert code == 0 and ids == {"G", "E"}
    code, out, _ = run_cli(capsys, *base, "--orbits", gps, "--orbits", gal, "--signal", "GPS-L5")
    doc = json.loads(out)
    assert {s["signal"] for s in doc["satellites"]} == {"GPS-L5"}
    # L5 Doppler = L1 Doppler x 1176.45 / 1575.42 (same range rate) [calc].
    code, out1, _ = run_cli(capsys, *base, "--orbits", gps, "--signal", "GPS-L1CA")
    d1 = {s["id"]: s["samples"][0]["doppler_hz"] for s in json.loads(out1)["satellites"]}
    for s in doc["satellites"]:
        assert s["samples"][0]["doppler_hz"] == pytest.approx(d1[s["id"]] * 1176.45 / 1575.42, abs=0.01)


def _truncated_almanac(tmp_path: Path) -> Path:
    src = (ORBIT_DATA / "yuma" / "orekit_yuma_week862.txt").read_text()
    bad = tmp_path / "cut.alm"
    bad.write_text(src[: src.index("Mean Anom", 2000) + 14])
    return bad


@requires_orbit_data
@pytest.mark.parametrize("case", ["truncated", "missing", "bad_site", "end_before_start",
                                  "bad_time", "bad_signal", "pole"])
def test_bad_input_one_line_exit_2(capsys, tmp_path, case):
    good = str(ORBIT_DATA / "tle" / "perylune_gps-ops_2020-04-01.txt")
    args = {"orbits": good, "site": "47.4,8.5,420", "start": "2020-04-01T06:00:00Z",
            "end": "2020-04-01T07:00:00Z", "signal": None}
    expect = None
    if case == "truncated":
        args["orbits"] = str(_truncated_almanac(tmp_path))
        args["start"], args["end"] = "2016-03-02T12:00:00Z", "2016-03-02T13:00:00Z"
        expect = "cut.alm"
    elif case == "missing":
        args["orbits"] = str(tmp_path / "nowhere.tle")
        expect = "nowhere.tle"
    elif case == "bad_site":
        args["site"] = "95,8,0"
        expect = "'--site': latitude 95.0 deg is outside -90..90 deg"   # the option typed
    elif case == "end_before_start":
        args["end"] = "2020-04-01T05:00:00Z"
        expect = "--end"
    elif case == "bad_time":
        args["start"] = "yesterday"
        expect = "--start"
    elif case == "bad_signal":
        args["signal"] = "GPS-L9"
        expect = "signal"
    elif case == "pole":
        args["site"] = "90,0,0"   # a site at the pole is valid input: exit 0
    argv = ["doppler", "--orbits", args["orbits"], "--site", args["site"], "--start", args["start"],
            "--end", args["end"], "--step", "600"]
    if args["signal"]:
        argv += ["--signal", args["signal"]]
    code, out, err = run_cli(capsys, *argv)
    if case == "pole":
        assert code == 0 and "G" in out
        return
    assert code == 2, (out, err)
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert expect in lines[0], lines[0]


def test_bins_command_json(capsys):
    code, out, _ = run_cli(capsys, "bins", "--coherent-ms", "1", "--max-loss-db", "1",
                           "--span-hz", "-1000,1000", "--curve", "--format", "json")
    assert code == 0
    doc = json.loads(out)
    for key in ("coherent_ms", "max_loss_db", "bin_width_hz", "half_width_hz", "worst_loss_db",
                "average_loss_db", "bins", "curve"):
        assert key in doc
    # [calc, domain-notes 5] -1 dB half-width at 1 ms: 261.5 Hz.
    assert doc["half_width_hz"] == pytest.approx(261.5, abs=0.05)
    assert doc["bins"][0] - doc["bin_width_hz"] / 2 <= -1000 and doc["bins"][-1] + doc["bin_width_hz"] / 2 >= 1000
    assert doc["curve"]["marks"]["1.0"] == pytest.approx(261.5, abs=0.05)


def test_help_on_every_command():
    for cmd in ("passes", "doppler", "bins", "plan", "demo", "gui", "sheet"):
        out = subprocess.run([sys.executable, "-m", "planner_gui.cli", cmd, "--help"], cwd=REPO,
                             capture_output=True, text=True, timeout=60)
        assert out.returncode == 0 and "usage:" in out.stdout, cmd


def test_several_scenario_problems_on_one_line(tmp_path, capsys):
    from core.files.demo import write_demo

    path = write_demo(tmp_path)
    text = path.read_text().replace("channels = 12", "channels = 0").replace("lat_deg = 49.6183", "lat_deg = 95")
    path.write_text(text)
    code, _, err = run_cli(capsys, "plan", str(path))
    assert code == 2
    lines = err.strip().splitlines()
    assert len(lines) == 1
    assert "site.lat_deg" in lines[0] and "receiver.channels" in lines[0] and "line" in lines[0]


@pytest.mark.parametrize("argv, field", [
    (["bins", "--coherent-ms", "1", "--max-loss-db", "1", "--span-hz", "-1e12,1e12"], "--span-hz"),
    (["bins", "--coherent-ms", "nan", "--max-loss-db", "1"], "coherent"),
])
def test_extreme_numbers_give_one_line(capsys, argv, field):
    code, _, err = run_cli(capsys, *argv)
    assert code == 2 and len(err.strip().splitlines()) == 1 and field in err


@requires_orbit_data
def test_nan_step_gives_one_line(capsys):
    f = str(ORBIT_DATA / "tle" / "perylune_gps-ops_2020-04-01.txt")
    for cmd in ("passes", "doppler"):
        code, _, err = run_cli(capsys, cmd, "--orbits", f, "--site", "47,8,0", "--start",
                               "2020-04-01T06:00:00Z", "--end", "2020-04-01T07:00:00Z", "--step", "nan")
        assert code == 2 and len(err.strip().splitlines()) == 1 and "step" in err, (cmd, err)


DEMO_YUMA = str(REPO / "sample_almanacs" / "demo_gps_yuma.txt")


@pytest.mark.parametrize("argv, field, words", [
    # passes over 100 years: refused up front, naming the option and the limit
    (["passes", "--start", "2027-05-18T00:00:00Z", "--end", "2127-05-18T00:00:00Z"], "--end",
     ["366 days"]),
    # a day of Doppler at 1 s for every GPS satellite: above the listing's limit
    (["doppler", "--start", "2027-05-18T00:00:00Z", "--end", "2027-05-19T00:00:00Z", "--step", "1"],
     "--step", ["400,000", "at least 6 s"]),
])
def test_resource_limits_refuse_up_front(capsys, argv, field, words):
    import time

    t0 = time.perf_counter()
    code, out, err = run_cli(capsys, *argv, "--orbits", DEMO_YUMA, "--site", "49.6,10.1,300")
    assert code == 2 and not out and len(err.strip().splitlines()) == 1
    assert field in err and all(w in err for w in words), err
    assert time.perf_counter() - t0 < 10.0


def test_plan_above_the_size_limit_is_refused_naming_the_key(tmp_path, capsys):
    """The JSON of a 7-day plan at 1 s (96 satellites x 604,800 steps) with its per-step
    window lists is refused before any array is made, with the key, the limit, a step that
    fits and the option that leaves the lists out (the plan itself is made block by block:
    tests/test_long_window.py)."""
    from core.files.demo import write_demo

    path = write_demo(tmp_path)
    text = path.read_text().replace('end = "2027-05-18T06:00:00Z"', 'end = "2027-05-25T04:00:00Z"')
    text = text.replace("step_s = 30", "step_s = 1")
    path.write_text(text)
    code, out, err = run_cli(capsys, "plan", str(path), "--format", "json")
    assert code == 2 and len(err.strip().splitlines()) == 1
    assert "time.step_s" in err and "700,000" in err and "at least" in err, err
    assert "--no-windows" in err, err


def test_output_cut_by_a_closed_pipe_is_quiet(tmp_path):
    """`acqplan plan ... | head -1`: the reader closes the pipe early; the command stops
    quietly (no "Broken pipe" error line) [trade: Unix filter behaviour]."""
    import subprocess as sp

    from core.files.demo import write_demo

    scenario = write_demo(tmp_path / "demo")
    proc = sp.Popen([sys.executable, "-m", "planner_gui.cli", "plan", str(scenario), "--format", "json"],
                    stdout=sp.PIPE, stderr=sp.PIPE, cwd=REPO)
    proc.stdout.read(10)
    proc.stdout.close()                      # the reader goes away after a few bytes
    err = proc.stderr.read().decode()
    assert proc.wait(timeout=120) == 0
    assert "Broken pipe" not in err and "error" not in err.lower(), err



def test_version_is_the_installed_distributions(capsys):
    # Reference: importlib.metadata (the version is looked up only for --version).
    from importlib.metadata import PackageNotFoundError, version

    try:
        expected = version("acqplan")
    except PackageNotFoundError:
        expected = "0.1.0"
    with pytest.raises(SystemExit) as stop:
        build_parser().parse_args(["--version"])
    assert stop.value.code == 0
    assert capsys.readouterr().out == f"acqplan {expected}\n"
    code, out, _ = run_cli(capsys, "--version")
    assert (code, out) == (0, f"acqplan {expected}\n")

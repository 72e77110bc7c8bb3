"""A plan made block by block (core.plan.long_window) against the whole-grid plan.

The reference is the project's own whole-grid pipeline (make_plan), run on windows small
enough for both; the block sizes are made small so that every window spans several
blocks. Memory is measured in fresh subprocesses with tracemalloc (numpy reports its
buffers to it).
"""

from __future__ import annotations

import datetime as dt
import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from conftest import ORBIT_DATA, requires_orbit_data

from core.files.demo import write_demo
from core.files.scenario import load_scenario
from core.plan.long_window import long_plan_rows, long_plan_to_json, make_long_plan
from core.plan.pipeline import make_plan, plan_rows, plan_to_json

REPO = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    return load_scenario(write_demo(tmp_path_factory.mktemp("long_window")))


def _window(sc, hours: float, step_s: float, **time):
    end = (sc.time.start + dt.timedelta(hours=hours)).isoformat().replace("+00:00", "Z")
    return sc.with_changes(time={"end": end, "step_s": step_s, **time})


def _both(sc):
    full = make_plan(sc)
    # 20,000 satellite-samples: blocks of one predict block (682 times for 96 satellites)
    long = make_long_plan(sc, block_samples=20_000)
    return full, long


def _kept_columns(full, long) -> np.ndarray:
    cols = np.searchsorted(full.times.unix_s, long.plan.times.unix_s)
    assert np.array_equal(full.times.unix_s[cols], long.plan.times.unix_s)
    return cols


@pytest.mark.parametrize("hours, step_s", [(1.0, 1.0), (24.0111, 30.0)])   # the second ends off the step
def test_blocked_plan_equals_the_whole_grid_plan(demo, hours, step_s):
    """[calc] every stage after the windows works sample by sample and the timeline reads
    only the kept times, so the block-by-block plan is the same plan: equal JSON (but the
    per-step lists), equal rows, equal timeline and Monte Carlo samples, and the kept
    columns of every figure bit for bit."""
    full, long = _both(_window(demo, hours, step_s))
    assert long.n_blocks >= 5
    assert long.kept_times < len(full.times) / 4
    a, b = plan_to_json(full), long_plan_to_json(long)
    for sat in a["satellites"]:
        sat["windows"] = None
    assert a == b
    assert plan_rows(full) == long_plan_rows(long)
    assert full.timeline.segments == long.plan.timeline.segments
    assert np.array_equal(full.ttff.samples_s, long.plan.ttff.samples_s)
    assert full.warnings == long.plan.warnings
    assert full.summary_text().splitlines()[:2] == long.summary_text().splitlines()[:2]
    cols = _kept_columns(full, long)
    for name in ("cn0_dbhz", "pd_first", "bins_first", "bins_after", "code_window_first_chips",
                 "expected_search_first_s", "expected_search_after_s"):
        x = np.broadcast_to(getattr(full, name), full.visible.shape)[:, cols]
        assert np.array_equal(x, getattr(long.plan, name)), name
    # Windows bit for bit on a grid that ends on its step; a grid whose last time is off the
    # step is not uniform, and np.gradient then takes its non-uniform formula everywhere
    # (the blocks before the end are uniform): the position term differs by float rounding.
    exact = long.n_times == round(hours * 3600 / step_s) + 1
    for name in ("windows_first", "windows_after"):
        for part in ("low_hz", "high_hz", "nominal_hz"):
            x = np.broadcast_to(getattr(getattr(full, name), part), full.visible.shape)[:, cols]
            y = getattr(getattr(long.plan, name), part)
            assert np.array_equal(x, y) if exact else np.allclose(x, y, rtol=0, atol=1e-9), (name, part)
    assert np.array_equal(full.visible[:, cols], long.plan.visible)
    # the whole-window figures come from the blocks' reductions
    assert np.array_equal(full.visible.sum(axis=1), long.in_view_steps)


def test_blocked_plan_with_a_large_time_uncertainty(demo):
    """600 s of time uncertainty: the shifted predictions are made per block on a lattice
    from the block's first time, so the windows agree to float noise (limit 1e-3 Hz, a
    tenth of the JSON's 0.01 Hz rounding) and the timeline exactly."""
    full, long = _both(_window(demo, 24.0, 30.0, uncertainty_s=600.0))
    cols = _kept_columns(full, long)
    for part in ("low_hz", "high_hz"):
        x = np.broadcast_to(getattr(full.windows_first, part), full.visible.shape)[:, cols]
        y = getattr(long.plan.windows_first, part)
        assert np.nanmax(np.abs(x - y)) < 1e-3
    assert [(s.sat_id, s.kind, s.channel) for s in full.timeline.segments] == \
        [(s.sat_id, s.kind, s.channel) for s in long.plan.timeline.segments]
    assert full.timeline.acquisition_unix_s.keys() == long.plan.timeline.acquisition_unix_s.keys()
    assert max(abs(full.timeline.acquisition_unix_s[k] - long.plan.timeline.acquisition_unix_s[k])
               for k in full.timeline.acquisition_unix_s) < 1e-3
    assert full.ttff_s == pytest.approx(long.plan.ttff_s, abs=1e-3)


@requires_orbit_data
def test_blocked_plan_on_a_real_navigation_file(demo):
    """BRDM00DLR (2023-03-14, real broadcast records, README pair 10) over 18 h at 2 s:
    four blocks; records in force, coverage gaps (failure counts summed over the blocks)
    and passes as in the whole-grid plan, the JSON equal (NaN azimuths compared as text)."""
    nav = ORBIT_DATA / "rinex-nav" / "gnsslibpy_BRDM00DLR_S_20230730000_01D_MN.rnx"
    sc = demo.with_changes(
        orbits={"files": [str(nav)], "allow_old_data": True, "skip_bad_records": True},
        time={"start": "2023-03-14T02:00:00Z", "end": "2023-03-14T20:00:00Z", "step_s": 2.0},
        receiver={"signals": ["GPS-L1CA", "GAL-E1", "GLO-L1OF", "BDS-B1I"]})
    full, long = _both(sc)
    assert long.n_blocks >= 4
    a, b = plan_to_json(full), long_plan_to_json(long)
    for sat in a["satellites"]:
        sat["windows"] = None
    assert json.dumps(a, sort_keys=True) == json.dumps(b, sort_keys=True)
    assert any("no valid broadcast record" in w for w in full.warnings)
    assert full.warnings == long.plan.warnings
    assert [s.broadcast_records for s in full.satellites] == \
        [s.broadcast_records for s in long.plan.satellites]
    assert plan_rows(full) == long_plan_rows(long)


_MEASURE = """
import datetime as dt, json, sys, tracemalloc
from core.files.demo import write_demo
from core.files.scenario import load_scenario
from core.plan.long_window import make_long_plan
sc = load_scenario(write_demo(sys.argv[1]))
end = (sc.time.start + dt.timedelta(hours=float(sys.argv[2]))).isoformat().replace("+00:00", "Z")
sc = sc.with_changes(time={"end": end, "step_s": float(sys.argv[3])}, search={"monte_carlo_runs": 20})
tracemalloc.start()
lp = make_long_plan(sc)
print(json.dumps({"peak": tracemalloc.get_traced_memory()[1], "times": lp.n_times,
                  "satellites": len(lp.plan.satellites)}))
"""


def _peak(tmp_path, hours: float, step_s: float) -> dict:
    folder = tmp_path / f"{hours:g}h"
    folder.mkdir()
    out = subprocess.run([sys.executable, "-c", _MEASURE, str(folder), str(hours), str(step_s)],
                         cwd=REPO, capture_output=True, text=True, timeout=600, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def test_peak_memory_does_not_follow_the_window(tmp_path):
    """Tripling the window (24 h -> 72 h at 10 s, fresh processes) adds less than half
    of what the prediction alone of the extra samples takes (57 bytes a satellite-sample,
    core.sky.predict; the whole-grid plan holds about ten times that): the blocks are
    the same size and only the kept times around each pass grow."""
    day, three = _peak(tmp_path, 24.0, 10.0), _peak(tmp_path, 72.0, 10.0)
    extra_samples = three["satellites"] * (three["times"] - day["times"])
    assert three["peak"] - day["peak"] < 0.5 * 57 * extra_samples


# --- the command line ---------------------------------------------------------------------

def _scenario_file(tmp_path, end: str, step_s: int) -> Path:
    path = write_demo(tmp_path / "demo")
    text = path.read_text(encoding="utf-8")
    text = text.replace('end = "2027-05-18T06:00:00Z"', f'end = "{end}"', 1)
    text = text.replace("step_s = 30", f"step_s = {step_s}", 1)
    out = path.with_name("long.toml")
    out.write_text(text, encoding="utf-8")
    return out


def _run(capsys, *argv):
    from planner_gui.cli import main

    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_cli_plan_above_the_limit(tmp_path, capsys):
    """2 h 6 min at 1 s for 96 satellites (726,336 satellite-steps, above the 700,000 of
    make_plan): the table and CSV come from the block-by-block plan; the JSON asks for
    --no-windows (naming the step that would fit) and then has no per-step lists;
    --export-dir is refused."""
    sc = _scenario_file(tmp_path, "2027-05-18T06:06:00Z", 1)
    code, out, err = _run(capsys, "plan", str(sc), "--format", "csv")
    assert code == 0, err
    rows = out.splitlines()
    assert rows[0].startswith("id,signal,in_view,max_el_deg") and len(rows) > 20
    code, out, err = _run(capsys, "plan", str(sc), "--format", "json")
    assert code == 2 and "--no-windows" in err and "step_s of at least" in err
    code, out, err = _run(capsys, "plan", str(sc), "--format", "json", "--no-windows")
    assert code == 0, err
    doc = json.loads(out)
    assert all(s["windows"] is None for s in doc["satellites"])
    assert doc["start"] == "2027-05-18T04:00:00Z" and doc["end"] == "2027-05-18T06:06:00Z"
    assert doc["ttff_runs"] == 500 and doc["timeline"]
    code, out, err = _run(capsys, "plan", str(sc), "--export-dir", str(tmp_path))
    assert code == 2 and "--export-dir" in err
    assert not list(tmp_path.glob("plan*"))


def test_cli_no_windows_within_the_limit(tmp_path, capsys):
    """--no-windows on the demo: the same JSON as without it but for the per-step lists."""
    sc = write_demo(tmp_path / "demo")
    code, with_lists, err = _run(capsys, "plan", str(sc), "--format", "json")
    assert code == 0, err
    code, without, err = _run(capsys, "plan", str(sc), "--format", "json", "--no-windows")
    assert code == 0, err
    a, b = json.loads(with_lists), json.loads(without)
    assert any(s["windows"] for s in a["satellites"])
    for s in a["satellites"]:
        s["windows"] = None
    assert a == b


# --- acqplan doppler: listings too long to hold are written as they are made ----------------

def _doppler_args(folder: Path, end: str, *extra: str) -> list[str]:
    return ["doppler", "--orbits", str(folder / "demo_gps.tle"), "--orbits",
            str(folder / "demo_galileo.tle"), "--site", "49.6,10.1,300",
            "--start", "2027-05-18T04:00:00Z", "--end", end, "--step", "10", *extra]


@pytest.mark.parametrize("fmt", ["csv", "json"])
@pytest.mark.parametrize("extra", [(), ("--all-elevations",), ("--mask", "60")])
def test_streamed_doppler_listing_equals_the_listing_held(tmp_path, capsys, monkeypatch, fmt, extra):
    """The listing written piece by piece (forced here by a limit of 10 satellite-steps for
    the listing held in memory) is the same text, to a file (atomic) and to stdout."""
    import core.api

    write_demo(tmp_path)
    argv = _doppler_args(tmp_path, "2027-05-18T05:00:00Z", "--format", fmt, *extra)
    code, held, err = _run(capsys, *argv)
    assert code == 0, err
    assert _run(capsys, *argv, "-o", str(tmp_path / "held.out"))[0] == 0
    monkeypatch.setattr(core.api, "DOPPLER_MAX_SATELLITE_STEPS", 10, raising=False)
    code, streamed, err = _run(capsys, *argv)
    assert code == 0, err
    assert streamed == held
    assert _run(capsys, *argv, "-o", str(tmp_path / "streamed.out"))[0] == 0
    assert (tmp_path / "streamed.out").read_bytes() == (tmp_path / "held.out").read_bytes()
    assert not list(tmp_path.glob(".*.part"))
    if fmt == "json":
        doc = json.loads(streamed)
        assert doc["satellites"] and all(s["samples"] for s in doc["satellites"])


def test_streamed_doppler_table_is_refused_naming_the_formats(tmp_path, capsys, monkeypatch):
    import core.api

    write_demo(tmp_path)
    monkeypatch.setattr(core.api, "DOPPLER_MAX_SATELLITE_STEPS", 10, raising=False)
    code, out, err = _run(capsys, *_doppler_args(tmp_path, "2027-05-18T05:00:00Z"))
    assert code == 2 and "--format csv" in err and "--step" in err, err

"""The sweep (core.plan.sweep, acqplan sweep): departures x settings, the same rows here,
on a local process pool and on a Dask cluster, checked against plans made one by one."""

from __future__ import annotations

import json
import math
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from core.api import (
    InputError,
    iso_z,
    load_scenario,
    make_plan,
    parse_iso_utc,
    save_scenario,
    write_demo,
)
from core.plan import sweep as sw

REPO = Path(__file__).resolve().parents[1]
START = "2027-05-18T04:00:00Z"


@pytest.fixture(scope="module")
def small(tmp_path_factory) -> Path:
    """The demo with a 40 min window and 60 Monte Carlo runs (fast plans)."""
    d = tmp_path_factory.mktemp("sweep")
    sc = load_scenario(write_demo(d / "demo"))
    sc = sc.with_changes(time={"end": "2027-05-18T04:40:00Z", "step_s": 60},
                         search={"monte_carlo_runs": 60})
    return save_scenario(sc, d / "small.toml").path


@pytest.fixture(scope="module")
def scenario(small):
    return load_scenario(small)


def _deps(n: int, step_s: float = 1800.0) -> tuple[float, ...]:
    s = parse_iso_utc(START).timestamp()
    return tuple(s + i * step_s for i in range(n))


# --- the spec: the user's key names, units and ranges -------------------------------------

@pytest.mark.parametrize("vary, words", [
    ({"coherent_ms": ["0.5"]}, ["--vary coherent_ms", "1 to 1000 ms"]),
    ({"noncoherent": ["2.5"]}, ["--vary noncoherent", "whole number", "1 to 1000"]),
    ({"max_frequency_loss_db": ["5"]}, ["--vary max_frequency_loss_db", "0.1 to 3 dB"]),
    ({"code_step_chips": ["x"]}, ["--vary code_step_chips", "not a number", "0.05 to 1 chips"]),
    ({"channels": ["0"]}, ["--vary channels", "1 to 256"]),
    ({"coherent_ms": ["2"]}, ["--vary coherent_ms", "GAL-E1", "4 ms"]),        # code period
    ({"cn0_at_mask_dbhz": ["50"]}, ["--vary cn0_at_mask_dbhz", "cn0_zenith_dbhz"]),  # cross-key
    ({"lat_deg": ["1"]}, ["--vary", "cannot be varied"]),
    ({"signals": ["GPS-L1CA"]}, ["--vary", "cannot be varied"]),
    ({"no_such_key": ["1"]}, ["--vary", "not a scenario key", "coherent_ms"]),
    ({"coherent_ms": ["4", "4"]}, ["--vary coherent_ms", "twice"]),
])
def test_bad_values_name_the_option_key_unit_and_range(scenario, vary, words):
    with pytest.raises(InputError) as exc:
        sw.sweep_spec(scenario, vary)
    text = str(exc.value)
    assert "\n" not in text
    for w in words:
        assert w in text, text


def test_departure_range_is_checked():
    with pytest.raises(InputError, match="STEP_S.*outside 1 to 604800 s"):
        sw.departure_times(START, "2027-05-18T05:00:00Z", 0)
    with pytest.raises(InputError, match="END.*before START"):
        sw.departure_times(START, "2027-05-17T05:00:00Z", 60)
    with pytest.raises(InputError, match="at most 10000"):
        sw.departure_times(START, "2027-06-18T05:00:00Z", 60)
    with pytest.raises(InputError, match="START.*not an ISO 8601"):
        sw.departure_times("tomorrow", "2027-06-18T05:00:00Z", 60)
    # [calc] 04:00 to 06:00 every 30 min, both ends included: 5 departures
    d = sw.departure_times(START, "2027-05-18T06:00:00Z", 1800)
    assert len(d) == 5 and d[-1] - d[0] == 7200.0


def test_product_of_all_values(scenario):
    spec = sw.sweep_spec(scenario, {"coherent_ms": [4, 8], "noncoherent": ["5", "10"],
                                    "channels": [8, 12, 16]}, _deps(2))
    # [calc] 2 x 2 x 3 settings, each exactly once
    assert len(spec.settings) == 12 and len(set(spec.settings)) == 12
    assert spec.n_combinations == 24
    assert spec.keys == ("search.coherent_ms", "search.noncoherent", "receiver.channels")
    assert all(isinstance(s[1], int) for s in spec.settings)


# --- rows equal the plans made one by one ---------------------------------------------------

def test_rows_equal_separate_full_plans(scenario):
    """Sharing the geometry across settings changes nothing: every row equals the plan of
    the same scenario made from scratch (its own propagation) [calc: same inputs, same seed]."""
    deps = _deps(2, 3600.0)
    spec = sw.sweep_spec(scenario, {"coherent_ms": [4, 8], "channels": [6, 12]}, deps)
    res = sw.run_sweep(scenario, spec, workers=1)
    assert len(res.rows) == 8
    for row in res.rows:
        coh, ch = spec.settings[row.setting]
        t = row.departure_unix_s
        sc = scenario.with_changes(time={"start": iso_z(t), "end": iso_z(t + 2400.0)},
                                   search={"coherent_ms": coh}, receiver={"channels": ch})
        plan = make_plan(sc)
        assert row.ttff_p95_s == plan.ttff.p95_s
        assert row.ttff_median_s == plan.ttff.median_s
        assert row.ttff_expected_s == plan.timeline.ttff_s
        assert row.sensitivity_dbhz == max(plan.sensitivity_dbhz.values())
        searches = [sp.search for sp in plan.satellites if sp.search is not None]
        assert row.max_bins == max(s.bins for s in searches)
        assert row.largest_search_s == max(s.expected_search_s for s in searches)
        assert row.n_searched == len(searches)


def test_ranking_and_best_scenario(scenario, tmp_path):
    deps = _deps(3, 1200.0)
    spec = sw.sweep_spec(scenario, {"coherent_ms": [4, 8, 12]}, deps)
    res = sw.run_sweep(scenario, spec, workers=1)
    worst = [max(res.row(d, s).ttff_p95_s for d in range(3)) for s in range(3)]
    assert [r.worst_p95_s for r in res.ranking] == sorted(worst)
    # [trade] longer coherent integration: narrower bins, so more of them to search
    bins = {spec.settings[r.setting][0]: r.max_bins for r in res.ranking}
    assert bins[4] < bins[8] < bins[12]
    # [calc] bin width ~ 1/Tc for a fixed edge loss: 8 ms needs about twice the bins of 4 ms
    assert abs(bins[8] - 2 * bins[4]) <= 3
    best = sw.best_scenario(scenario, res)
    b = res.best
    assert best.search.coherent_ms == spec.settings[b.setting][0]
    assert best.time.start_unix_s == b.best_departure_unix_s
    assert best.time.duration_s == scenario.time.duration_s


def _required_snr_db(pfa: float, n: int, pd: float = 0.9, gain=(1.0,)) -> float:
    """[pub] square-law detector of N non-coherent sums (e.g. Kaplan & Hegarty, Understanding
    GPS/GNSS, 3rd ed., ch. 8): noise-only 2S ~ chi2(2N), with signal 2S ~ ncx2(2N, 2 N snr);
    solved here with scipy's distributions and a root search of the test's own. ``gain``:
    power gains of the signal's offsets within its cell, over which Pd is averaged."""
    import numpy as np
    from scipy import optimize, stats

    g = np.asarray(gain, dtype=float)
    thr = stats.chi2.isf(pfa, 2 * n)
    snr = optimize.brentq(lambda x: stats.ncx2.sf(thr, 2 * n, 2 * n * x * g).mean() - pd,
                          1e-6, 100.0, xtol=1e-14)
    return 10 * math.log10(snr)


def test_sensitivity_follows_noncoherent_sums(scenario):
    """Between N = 5 and N = 10 non-coherent sums (same coherent time, so the same losses)
    the sensitivity column moves by the difference of the required SNRs, each for the Pd
    averaged over the signal's offset in its cell [calc: carrier uniform in the bin, code
    uniform in the step, 60 x 60 midpoint rule of sinc^2(f Tc) (1 - |x|)^2]."""
    import numpy as np

    spec = sw.sweep_spec(scenario, {"noncoherent": [5, 10]})
    res = sw.run_sweep(scenario, spec, workers=1)
    gps = [dict(res.row(0, s).sensitivity_by_signal_dbhz)["GPS-L1CA"] for s in range(2)]
    pfa = scenario.search.false_alarm_per_cell
    tc = scenario.search.integration_for("GPS-L1CA")[0] / 1000.0
    width = make_plan(scenario).bin_design["GPS-L1CA"].bin_width_hz
    u = (np.arange(60) + 0.5) / 60.0
    gain = (np.sinc(u * 0.5 * width * tc)[:, None] ** 2
            * ((1.0 - u * 0.5 * scenario.search.code_step_chips) ** 2)[None, :]).ravel()
    expected = _required_snr_db(pfa, 5, gain=gain) - _required_snr_db(pfa, 10, gain=gain)
    assert 1.0 < expected < 3.0
    assert gps[0] - gps[1] == pytest.approx(expected, abs=2e-3)


def test_no_satellite_in_view_is_a_row_without_a_fix(scenario):
    """A departure where nothing rises above the mask has no plan: its row says no fix
    (inf, never a plausible number) with the reason as a warning."""
    high = scenario.with_changes(mask={"elevation_deg": 60.0}, site={"lat_deg": 89.9})
    spec = sw.sweep_spec(high, {})
    res = sw.run_sweep(high, spec, workers=1)
    r = res.rows[0]
    if r.sensitivity_dbhz == r.sensitivity_dbhz:      # something was visible after all
        pytest.skip("a satellite rose above 60 deg at the pole in this window")
    assert math.isinf(r.ttff_p95_s) and r.fix_fraction == 0.0
    assert any("elevation mask" in w for w in res.warnings)
    assert sw.sweep_rows(res)[0]["ttff_p95_s"] is None


def test_event_hook_single_site(scenario):
    plan = make_plan(scenario)
    ev = sw.event_outcomes(plan)
    assert [e.event_id for e in ev] == ["start"]
    assert ev[0].p95_s == plan.ttff.p95_s


# --- a drive: the worst event of every plan ------------------------------------------------

@pytest.fixture(scope="module")
def drive():
    """The demo drive without its cold start (whose 10 min horizon has no 95th percentile),
    with fewer Monte Carlo runs per event."""
    from dataclasses import replace

    sc = load_scenario(REPO / "sample_almanacs" / "demo_drive_scenario.toml")
    sc = replace(sc, events=sc.events[1:], route=replace(sc.route, event_monte_carlo_runs=60))
    return sc.validated()


def test_drive_rows_are_the_worst_event_of_each_plan(drive):
    from dataclasses import replace
    from datetime import timedelta

    from core.plan.events import plan_drive

    later = drive.time.start_unix_s + 1800.0
    spec = sw.sweep_spec(drive, {"coherent_ms": [4, 8]}, (later,))
    res = sw.run_sweep(drive, spec, workers=1)
    # the same drive 30 min later, built by hand: window and the event given as a time
    moved = tuple(replace(e, at=e.at + timedelta(minutes=30)) if hasattr(e.at, "tzinfo") else e
                  for e in drive.events)
    assert moved != drive.events
    for row in res.rows:
        sc = replace(drive, events=moved).with_changes(
            time={"start": iso_z(later), "end": iso_z(later + drive.time.duration_s)},
            search={"coherent_ms": spec.settings[row.setting][0]})
        dp = plan_drive(sc)
        p95 = {e.event.id: e.ttff_p95_s for e in dp.events}
        assert row.worst_event == dp.worst.event.id
        assert row.ttff_p95_s == max(p95.values()) == dp.worst.ttff_p95_s
        assert math.isfinite(row.ttff_p95_s)
        assert row.ttff_median_s == dp.worst.ttff_median_s


def _assert_same_drive_plans(a, b):
    """Two DrivePlans planned with the same seeds: equal event by event [calc: the same
    computation on the same inputs]."""
    assert [e.event.id for e in a.events] == [e.event.id for e in b.events]
    for ea, eb in zip(a.events, b.events):
        pa, pb = ea.plan, eb.plan
        for wa, wb in ((pa.windows_first, pb.windows_first), (pa.windows_after, pb.windows_after)):
            assert np.array_equal(wa.low_hz, wb.low_hz) and np.array_equal(wa.high_hz, wb.high_hz)
        for x in ("bins_first", "bins_after", "code_cells_first", "code_cells_after", "pd_first",
                  "expected_search_first_s", "visible"):
            assert np.array_equal(getattr(pa, x), getattr(pb, x)), (ea.event.id, x)
        assert pa.timeline.first_fix_unix_s == pb.timeline.first_fix_unix_s
        assert (pa.ttff.median_s, pa.ttff.p95_s, pa.ttff.fix_fraction) == \
            (pb.ttff.median_s, pb.ttff.p95_s, pb.ttff.fix_fraction)
        assert (ea.visible_ids, ea.blocked_ids, ea.warnings) == (eb.visible_ids, eb.blocked_ids, eb.warnings)
    assert a.warnings == b.warnings


def test_drive_sweep_shares_geometry_and_equals_plain_plans(drive, monkeypatch):
    # Settings that change the search and what the events know (oscillator, ephemeris
    # wait), two departures: the geometry is made once per departure, and every row, plan
    # and Monte Carlo TTFF equals that of a plain plan_drive of the same setting.
    import core.plan.events as ev

    spec = sw.sweep_spec(drive, {"coherent_ms": [4, 8], "oscillator_uncertainty_ppb": [200, 900],
                                 "ephemeris_wait_s": [30]},
                         (drive.time.start_unix_s, drive.time.start_unix_s + 600.0))
    made = []
    real = ev.drive_geometry
    monkeypatch.setattr(ev, "drive_geometry", lambda sc, *a, **kw: made.append(sc.time.start) or real(sc, *a, **kw))
    shared = sw.run_sweep(drive, spec, workers=1)
    assert len(made) == 2                                     # one geometry per departure
    made.clear()
    plain = [row for u in sw.units(drive, spec, 1) for row in sw.run_unit(u, share_geometry=False)]
    assert len(made) == spec.n_combinations                   # plan_drive: one per setting
    assert sorted(plain, key=lambda r: (r.departure_unix_s, r.setting)) == shared.rows
    # The settings matter (the oscillator changes what the warm start knows).
    assert len({(r.ttff_p95_s, r.max_bins) for r in shared.rows if r.departure_unix_s == drive.time.start_unix_s}) == 4
    # Plan by plan, on one departure's shared geometry.
    sc_dep = sw.departure_scenario(drive, spec, spec.departures_unix_s[1])
    geometry = real(sw.setting_scenario(sc_dep, spec, 0))
    for s in range(len(spec.settings)):
        sc = sw.setting_scenario(sc_dep, spec, s)
        _assert_same_drive_plans(ev.plan_drive_search(sc, geometry), ev.plan_drive(sc))
    # A geometry is only planned for the scenario it was made for.
    with pytest.raises(ValueError, match="geometry"):
        ev.plan_drive_search(sw.setting_scenario(drive, spec, 0), geometry)   # another window


def test_drive_without_route_gets_a_geometry_per_vertical_speed(drive):
    # Events without a route stand at the site; their motion bound is the receiver's
    # vertical speed, so a sweep of it makes one geometry per value [calc], equal plans.
    from dataclasses import replace

    import core.plan.events as ev

    timed = tuple(e for e in drive.events if hasattr(e.at, "tzinfo"))
    assert timed
    static = replace(drive, route=None, events=timed).validated()
    spec = sw.sweep_spec(static, {"max_vertical_speed_m_s": [2, 8], "channels": [8, 12]})
    rows = sw.run_sweep(static, spec, workers=1).rows
    plain = [row for u in sw.units(static, spec, 1) for row in sw.run_unit(u, share_geometry=False)]
    assert plain == rows
    keys = {ev.drive_geometry_key(sw.setting_scenario(static, spec, s)) for s in range(4)}
    assert len(keys) == 2
    sc = sw.setting_scenario(static, spec, 1)
    _assert_same_drive_plans(ev.plan_drive_search(sc, ev.drive_geometry(sc)), ev.plan_drive(sc))
    with pytest.raises(ValueError, match="geometry"):
        ev.plan_drive_search(sw.setting_scenario(static, spec, 2), ev.drive_geometry(sc))


# --- the same rows on a process pool and on Dask --------------------------------------------

def test_pool_equals_here_and_dask_equals_pool(scenario):
    pytest.importorskip("distributed")
    from distributed import Client, LocalCluster

    spec = sw.sweep_spec(scenario, {"coherent_ms": [4, 8], "noncoherent": [5, 8]}, _deps(3, 900.0))
    here = sw.run_sweep(scenario, spec, workers=1)
    seen = []
    pool = sw.run_sweep(scenario, spec, workers=2, progress=lambda d, n: seen.append((d, n)))
    assert pool.where == "pool" and pool.rows == here.rows
    assert seen[-1] == (12, 12) and [d for d, _ in seen] == sorted(d for d, _ in seen)
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=False,
                      dashboard_address=":0") as cluster, Client(cluster) as client:
        on_dask = sw.run_sweep(scenario, spec, client=client)
        # the orbit files went to every worker once, byte for byte
        listed = client.run(_shipped_files)
    assert on_dask.rows == pool.rows
    assert on_dask.ranking == pool.ranking
    originals = sorted(p.read_bytes() for p in scenario.resolved_orbit_files()
                       + [scenario.resolved_mapping()])
    assert len(listed) == 2
    for files in listed.values():
        assert sorted(files) == originals


def _shipped_files(dask_worker):
    out = []
    for name, plugin in dask_worker.plugins.items():
        if name.startswith("acqplan-orbits-"):
            out += [Path(plugin.directory, rel).read_bytes() for rel, _ in plugin.files]
    return out


def test_drive_on_dask_ships_the_route_too(drive):
    pytest.importorskip("distributed")
    from distributed import Client, LocalCluster

    from core.plan.sweep_cluster import shipped_form

    shipped, files, _ = shipped_form(drive)
    assert shipped.route.file == "route/" + Path(drive.route.file).name
    assert any(rel == shipped.route.file for rel, _ in files)
    spec = sw.sweep_spec(drive, {"channels": [8]})
    here = sw.run_sweep(drive, spec, workers=1)
    with LocalCluster(n_workers=1, threads_per_worker=1, processes=False,
                      dashboard_address=":0") as cluster, Client(cluster) as client:
        assert sw.run_sweep(drive, spec, client=client).rows == here.rows


def test_shipped_units_name_no_local_file(scenario):
    """On a cluster a unit refers to the shipped copies only (no path of this machine)."""
    pytest.importorskip("distributed")
    from core.plan.sweep_cluster import shipped_form

    shipped, files, key = shipped_form(scenario)
    assert key.startswith("acqplan-orbits-")
    assert all(not Path(f).is_absolute() for f in shipped.orbits.files)
    assert not shipped.base_dir.exists()
    assert len(files) == len(scenario.orbits.files) + 1


# --- the command line -----------------------------------------------------------------------

def _cli(*args, timeout=300):
    return subprocess.run([sys.executable, "-m", "planner_gui.cli", "sweep", *args], cwd=REPO,
                          capture_output=True, text=True, timeout=timeout)


@pytest.mark.parametrize("args, words", [
    (["--vary", "coherent_ms=0.5"], ["--vary coherent_ms", "1 to 1000 ms"]),
    (["--vary", "coherent_ms"], ["--vary", "KEY=V1,V2"]),
    (["--departures", "2027-05-18T04:00Z,2027-05-18T05:00Z"], ["--departures", "START,END,STEP_S"]),
    (["--departures", "2027-05-18T04:00Z,2027-05-18T05:00Z,0"], ["STEP_S", "1 to 604800 s"]),
    (["--workers", "0"], ["--workers", "1 to 1024"]),
    (["--workers", "2", "--scheduler", "tcp://127.0.0.1:1"], ["--workers", "not both"]),
])
def test_cli_bad_input_is_one_line_exit_2(small, args, words):
    out = _cli(str(small), *args)
    assert out.returncode == 2, out.stderr
    lines = out.stderr.strip().splitlines()
    assert len(lines) == 1, out.stderr
    for w in words:
        assert w in lines[0]
    assert out.stdout == ""


def test_cli_outputs_and_write_best(small, tmp_path):
    csv_path, best_path = tmp_path / "s.csv", tmp_path / "best.toml"
    out = _cli(str(small), "--departures", "2027-05-18T04:00Z,2027-05-18T04:30Z,1800",
               "--vary", "coherent_ms=4,8", "--workers", "1", "--format", "csv",
               "-o", str(csv_path), "--write-best", str(best_path))
    assert out.returncode == 0, out.stderr
    lines = csv_path.read_text().splitlines()
    assert lines[0].startswith("departure,setting,rank,coherent_ms,ttff_median_s,ttff_p95_s")
    assert len(lines) == 1 + 4
    best = load_scenario(best_path)
    ranked = sorted((ln.split(",") for ln in lines[1:]), key=lambda c: int(c[2]))
    assert best.search.coherent_ms == float(ranked[0][3])
    js = _cli(str(small), "--vary", "channels=6,12", "--workers", "1", "--format", "json")
    assert js.returncode == 0, js.stderr
    d = json.loads(js.stdout)
    assert d["keys"] == ["channels"] and len(d["rows"]) == 2 and d["ranking"][0]["rank"] == 1
    table = _cli(str(small), "--workers", "1")
    assert table.returncode == 0 and "Settings, best first" in table.stdout


def _group_members(pgid: int) -> list[int]:
    pids = []
    for entry in os.listdir("/proc"):
        if entry.isdigit():
            try:
                fields = Path(f"/proc/{entry}/stat").read_text().rsplit(")", 1)[1].split()
            except OSError:
                continue
            if int(fields[2]) == pgid and fields[0] != "Z":
                pids.append(int(entry))
    return pids


@pytest.mark.skipif(not Path("/proc").is_dir() or sys.platform == "win32", reason="needs /proc and POSIX signals")
def test_ctrl_c_stops_workers_and_writes_nothing(small, tmp_path):
    out_path, best_path = tmp_path / "never.csv", tmp_path / "never.toml"
    proc = subprocess.Popen(
        [sys.executable, "-m", "planner_gui.cli", "sweep", str(small), "--departures",
         "2027-05-18T04:00Z,2027-05-19T04:00Z,600", "--vary", "coherent_ms=4,8",
         "--workers", "2", "--format", "csv", "-o", str(out_path), "--write-best", str(best_path)],
        cwd=REPO, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, start_new_session=True)
    try:
        deadline = time.monotonic() + 60
        while len(_group_members(proc.pid)) < 3 and time.monotonic() < deadline:  # parent + workers
            time.sleep(0.2)
        assert len(_group_members(proc.pid)) >= 3, "the worker processes never started"
        time.sleep(1.0)
        proc.send_signal(signal.SIGINT)
        _, err = proc.communicate(timeout=60)
    finally:
        if proc.poll() is None:
            proc.kill()
    assert proc.returncode == 130, err
    assert "cancelled; nothing written" in err and "Traceback" not in err
    assert not out_path.exists() and not best_path.exists()
    assert not [p for p in tmp_path.iterdir()]             # no temporary file either
    deadline = time.monotonic() + 10
    while _group_members(proc.pid) and time.monotonic() < deadline:
        time.sleep(0.2)
    assert _group_members(proc.pid) == [], "worker processes left behind"

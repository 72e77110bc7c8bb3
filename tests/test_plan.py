"""The search plan chain on the demo scenario and on real files."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from conftest import ORBIT_DATA, REPO, requires_orbit_data

from core.files.scenario import load_scenario
from core.ground.errors import InputError
from core.plan.pipeline import geometry_key, make_plan, plan_to_json
from core.search import bins as binlib

DEMO = REPO / "sample_almanacs" / "demo_scenario.toml"


@pytest.fixture(scope="module")
def demo_plan():
    return make_plan(load_scenario(DEMO))


def test_json_schema_of_the_plan(demo_plan):
    doc = json.loads(json.dumps(plan_to_json(demo_plan)))
    for key in ("satellites", "timeline", "first_fix_time", "ttff_s", "ttff_median_s",
                "ttff_p95_s", "warnings"):
        assert key in doc
    searched = [s for s in doc["satellites"] if s["search"]]
    assert len(searched) >= 12
    for sat in doc["satellites"]:
        assert {"id", "signal", "carrier_hz", "windows", "search"} <= set(sat)
        for w in sat["windows"]:
            assert {"time", "nominal_hz", "low_hz", "high_hz"} <= set(w)
            assert w["low_hz"] <= w["nominal_hz"] <= w["high_hz"]
    for s in searched:
        assert {"start", "low_hz", "high_hz", "bin_width_hz", "bins", "code_window_chips",
                "code_cells", "cn0_dbhz", "pd", "dwell_s", "expected_search_s", "channel"} <= set(s["search"])
    for seg in doc["timeline"]:
        assert {"channel", "id", "kind", "start", "end"} <= set(seg)
        assert seg["kind"] in ("search", "track")


def test_search_summary_follows_the_engine(demo_plan):
    """Bins and windows in each search summary equal core.search.bins on the plan's own window."""
    sc = demo_plan.scenario
    for sp in demo_plan.satellites:
        if sp.search is None:
            continue
        coh_ms, _ = sc.search.integration_for(sp.signal_id)
        design = binlib.design_bins(coh_ms / 1000.0, sc.search.max_frequency_loss_db)
        assert sp.search.bin_width_hz == pytest.approx(design.bin_width_hz)
        n = binlib.bin_count(sp.search.low_hz, sp.search.high_hz, design.bin_width_hz)
        assert sp.search.bins == n == sp.search.bin_centres_hz.size
        c = sp.search.bin_centres_hz
        assert c[0] - design.bin_width_hz / 2 <= sp.search.low_hz + 1e-9
        assert c[-1] + design.bin_width_hz / 2 >= sp.search.high_hz - 1e-9
        assert np.allclose(np.diff(c), design.bin_width_hz)
        # The worst loss inside a bin is the accepted loss [calc: |sinc| at half a bin].
        assert binlib.frequency_loss_db(design.bin_width_hz / 2, coh_ms / 1000.0) == pytest.approx(
            sc.search.max_frequency_loss_db, abs=1e-6)
        assert 0.0 <= sp.search.pd <= 1.0 and sp.search.expected_search_s > 0


def test_windows_after_first_acquisition_are_narrower(demo_plan):
    p = demo_plan
    wf, wa = p.windows_first, p.windows_after
    vis = p.visible
    width_f = (wf.high_hz - wf.low_hz)[vis]
    width_a = (wa.high_hz - wa.low_hz)[vis]
    assert np.all(width_a <= width_f + 1e-9)
    # After the acquisition the oscillator term is the carrier times one fraction for
    # every satellite: (half bin + own non-oscillator uncertainty) / carrier of the worst
    # candidate first satellite, at least that of the satellite actually acquired first.
    frac = wa.share_hz["oscillator"][vis] / np.broadcast_to(
        np.array([s.carrier_hz for s in p.satellites])[:, None], vis.shape)[vis]
    assert np.allclose(frac, frac[0], rtol=1e-9)
    s1 = p.ids.index(p.first_acquired)
    sp1 = p.satellites[s1]
    k1 = p.index_at(sp1.search.start_unix_s)
    lo1, hi1 = wf.non_oscillator_extent_hz()
    own = (sp1.search.bin_width_hz / 2 + max(-lo1[s1, k1], hi1[s1, k1])) / sp1.carrier_hz
    assert frac[0] >= own - 1e-12
    # With a 500 ppb TCXO the oscillator term (+-788 Hz at L1) is a large share of the
    # first window; once measured the windows shrink [calc: 500e-9 x 1575.42e6 = 787.7 Hz].
    assert np.median(width_a / width_f) < 0.8
    osc = wf.share_hz["oscillator"]
    gps = [i for i, s in enumerate(p.satellites) if s.signal_id == "GPS-L1CA"]
    assert np.allclose(osc[gps][vis[gps]], 500e-9 * 1575.42e6, rtol=1e-3)


def test_timeline_respects_the_mask_and_channels(demo_plan):
    p = demo_plan
    idx = {s.sat_id: i for i, s in enumerate(p.satellites)}
    by_channel: dict[int, list] = {}
    for seg in p.timeline.segments:
        by_channel.setdefault(seg.channel, []).append(seg)
        if seg.kind == "search":
            sat = p.satellites[idx[seg.sat_id]]
            assert any(ps.rise_unix_s - 1e-6 <= seg.start_unix_s and seg.end_unix_s <= ps.set_unix_s + 1e-6
                       for ps in sat.passes), seg
    for segs in by_channel.values():
        segs.sort(key=lambda s: s.start_unix_s)
        for a, b in zip(segs, segs[1:]):
            assert a.end_unix_s <= b.start_unix_s + 1e-9
    assert len(by_channel) <= p.scenario.receiver.channels
    assert p.timeline.first_fix_unix_s is not None
    assert p.ttff.median_s <= p.ttff.p95_s


def test_search_only_change_reuses_geometry_and_matches_a_fresh_plan(demo_plan):
    sc2 = demo_plan.scenario.with_changes(search={"coherent_ms": 8, "max_frequency_loss_db": 2.0,
                                                  "false_alarm_per_cell": 1e-5})
    assert geometry_key(sc2) == geometry_key(demo_plan.scenario)
    quick = make_plan(sc2, prepared=demo_plan.prepared)
    fresh = make_plan(sc2)
    assert quick.reused_geometry and not fresh.reused_geometry
    assert np.array_equal(quick.bins_first, fresh.bins_first)
    assert quick.timeline.first_fix_unix_s == fresh.timeline.first_fix_unix_s
    assert quick.ttff.median_s == fresh.ttff.median_s
    # 8 ms halves the 4 ms bin width and a 2 dB loss widens it: 1/Tc scaling [calc].
    b4 = demo_plan.bin_design["GAL-E1"].bin_width_hz
    b8 = quick.bin_design["GAL-E1"].bin_width_hz
    assert b8 == pytest.approx(binlib.design_bins(0.008, 2.0).bin_width_hz)
    assert b8 < b4


def test_plan_is_reproducible(demo_plan):
    again = make_plan(demo_plan.scenario)
    assert again.ttff.median_s == demo_plan.ttff.median_s
    assert [s.to_dict() for s in again.timeline.segments] == [s.to_dict() for s in demo_plan.timeline.segments]


def test_invalid_coherent_time_for_galileo(demo_plan):
    sc = demo_plan.scenario.with_changes(search={"coherent_ms": 1})
    with pytest.raises(InputError) as err:
        make_plan(sc, prepared=demo_plan.prepared)
    assert "coherent" in str(err.value) and "GAL-E1" in str(err.value)


def test_moved_orbit_file_is_reported(tmp_path):
    from core.files.demo import write_demo

    path = write_demo(tmp_path)
    sc = load_scenario(path)
    (tmp_path / "demo_galileo.tle").unlink()
    with pytest.raises(InputError) as err:
        make_plan(sc)
    assert "demo_galileo.tle" in str(err.value)


def test_cli_plan_and_demo_commands(tmp_path, capsys):
    from planner_gui.cli import main

    assert main(["demo", str(tmp_path / "d")]) == 0
    scen = tmp_path / "d" / "demo_scenario.toml"
    assert scen.is_file()
    out_file = tmp_path / "plan.json"
    assert main(["plan", str(scen), "--format", "json", "-o", str(out_file)]) == 0
    doc = json.loads(out_file.read_text())
    assert doc["ttff_s"] > 0 and doc["satellites"]
    capsys.readouterr()
    assert main(["plan", str(scen)]) == 0
    out = capsys.readouterr().out
    assert "TTFF" in out and "GAL-E1" in out
    bad = tmp_path / "bad.toml"
    bad.write_text(scen.read_text().replace("channels = 12", "channels = 0"))
    assert main(["plan", str(bad)]) == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1 and "receiver.channels" in err


@requires_orbit_data
def test_plan_on_real_files(tmp_path):
    """A scenario on the real 2020 TLE sets (CelesTrak via perylune) plans without error."""
    text = (DEMO.read_text()
            .replace('files = ["demo_gps_yuma.txt", "demo_galileo.tle", "demo_beidou.tle", "demo_glonass.tle"]',
                     'files = ["{}", "{}"]'.format(ORBIT_DATA / "tle" / "perylune_gps-ops_2020-04-01.txt",
                                                   ORBIT_DATA / "tle" / "perylune_galileo_2020-04-01.txt"))
            .replace('mapping = "demo_glonass_mapping.txt"', "")
            .replace('signals = ["GPS-L1CA", "GAL-E1", "BDS-B1I", "GLO-L1OF"]', 'signals = ["GPS-L1CA", "GAL-E1"]')
            .replace("2027-05-18T04:00:00Z", "2020-04-01T06:00:00Z")
            .replace("2027-05-18T06:00:00Z", "2020-04-01T08:00:00Z"))
    path = tmp_path / "real.toml"
    path.write_text(text)
    plan = make_plan(load_scenario(path))
    assert plan.timeline.first_fix_unix_s is not None
    assert {s.sat_id[0] for s in plan.satellites if s.search} == {"G", "E"}
    assert math.isfinite(plan.ttff.median_s)
    ages = [s.data_age_s for s in plan.satellites]
    assert 0 < min(ages) and max(ages) < 7 * 86400   # TLE epochs 2020-03-26..04-01


def test_demo_scenario_exists():
    assert DEMO.is_file() and Path(DEMO).read_text().startswith("# acqplan demo scenario")


def test_two_stage_monte_carlo_equals_one_stage(demo_plan):
    from core.plan.pipeline import add_monte_carlo

    quick = make_plan(demo_plan.scenario, prepared=demo_plan.prepared, monte_carlo=False)
    assert quick.ttff is None
    full = add_monte_carlo(quick)
    assert quick.ttff is None            # the quick plan is left as it was
    assert full.ttff.median_s == demo_plan.ttff.median_s
    assert np.array_equal(full.ttff.samples_s, demo_plan.ttff.samples_s)


def test_tabulated_pd_equals_the_detector_formula(demo_plan):
    """The plan's Pd (tabulated for speed) equals the square-law detector's Pd averaged over
    the signal's offset within its cell, evaluated directly here.

    Reference [pub: Kaplan & Hegarty, Understanding GPS, 2nd ed., eqs. 5.52-5.53 for Pd of
    the square-law detector; calc: the mean over a carrier offset uniform in the bin and a
    code offset uniform in the step, by a 100 x 100 midpoint rule of
    sinc^2(f Tc) R(x)^2 with scipy's non-central chi-square]. Earlier versions pinned Pd at
    the MEAN loss, which overstates the mean Pd (Jensen) by up to 0.04.
    """
    from scipy import stats

    from core.ground.signals import SIGNALS
    from core.search.bins import aligned_transition_loss_db

    p = demo_plan
    sc = p.scenario
    pfa = sc.search.false_alarm_per_cell
    u = (np.arange(100) + 0.5) / 100.0                     # midpoints of [0, 1]
    checked = 0
    for s, sp in enumerate(p.satellites[:20]):
        coh_ms, n = sc.search.integration_for(sp.signal_id)
        k = np.nonzero(p.visible[s])[0]
        if not k.size:
            continue
        k = k[np.linspace(0, k.size - 1, 4).astype(int)]
        tc = coh_ms / 1000.0
        sig = SIGNALS[sp.signal_id]
        other = sc.signal.extra_loss_db + aligned_transition_loss_db(tc, sig.symbol_period_s,
                                                                     sig.code_period_s)
        half_bin = 0.5 * p.bin_design[sp.signal_id].bin_width_hz
        half_step = 0.5 * sc.search.code_step_chips
        x = u * half_step
        r = 1.0 - 3.0 * x if p.code_step_loss[sp.signal_id].shape == "BOC11" else 1.0 - x
        gain = (np.sinc(u * half_bin * tc)[:, None] ** 2 * (r ** 2)[None, :]).ravel()
        snr = 10.0 ** ((p.cn0_dbhz[s, k] - other) / 10.0) * tc
        thr2 = stats.chi2.isf(pfa, 2 * n)
        direct = stats.ncx2.sf(thr2, 2 * n, 2 * n * snr[:, None] * gain[None, :]).mean(axis=1)
        assert np.max(np.abs(direct - p.pd_first[s, k])) < 2e-5, sp.sat_id
        # The sensitivity on the sheet is the C/N0 where this same mean Pd is 0.9.
        snr = 10.0 ** ((p.sensitivity_dbhz[sp.signal_id] - other) / 10.0) * tc
        assert stats.ncx2.sf(thr2, 2 * n, 2 * n * snr * gain).mean() == pytest.approx(0.9, abs=2e-5)
        checked += 1
    assert checked >= 5


def test_fine_time_narrows_the_code_window_of_almanac_satellites(demo_plan):
    """With fine time (10 us), the code window is the range uncertainty in chips: position
    h cos(el) + v sin(el), clock c dt, orbit and satellite-clock margins [calc]; TLE
    satellites (no clock in a TLE) keep the whole code."""
    sc = demo_plan.scenario.with_changes(search={"fine_time_uncertainty_us": 10.0})
    p = make_plan(sc, prepared=demo_plan.prepared, monte_carlo=False)
    for s, sp in enumerate(p.satellites):
        vis = p.visible[s]
        if not vis.any():
            continue
        cw = p.code_window_first_chips[s][vis]
        if sp.source_kind == "almanac":
            chip_m = 299_792_458.0 / 1.023e6
            # at least the clock term alone: 2 x c x 10 us = 5996 m = 20.5 chips
            assert np.all(cw >= 2 * 299_792_458.0 * 10e-6 / chip_m - 1e-9)
            assert np.all(cw < 1023)
        else:
            assert np.allclose(cw, {"GAL-E1": 4092, "BDS-B1I": 2046, "GLO-L1OF": 511}[sp.signal_id])
    assert any("TLE" in w for w in p.warnings)


def test_rising_priority_searches_rising_satellites_first(demo_plan):
    sc = demo_plan.scenario.with_changes(search={"priority": "rising", "monte_carlo_runs": 20})
    p = make_plan(sc, prepared=demo_plan.prepared)
    k0 = 0
    rate = p.prediction.elevation_rate_deg_s[:, k0]
    first = [seg for seg in p.timeline.segments if seg.kind == "search" and seg.start_unix_s == p.times.unix_s[0]]
    idx = {s.sat_id: i for i, s in enumerate(p.satellites)}
    chosen = {idx[seg.sat_id] for seg in first}
    visible_rising = [i for i in range(len(p.satellites)) if p.visible[i, k0] and rate[i] > 0]
    # 12 channels: if at least 12 rising satellites are up, all first searches are rising ones.
    if len(visible_rising) >= sc.receiver.channels:
        assert all(rate[i] > 0 for i in chosen)
    else:
        assert set(visible_rising) <= chosen


def test_cli_plan_exports(tmp_path, capsys):
    from core.files.plan_export import read_search_csv
    from planner_gui.cli import main

    assert main(["plan", str(DEMO), "--format", "csv", "--export-dir", str(tmp_path), "--stem", "run1"]) == 0
    names = sorted(p.name for p in tmp_path.iterdir())
    assert names == ["run1.json", "run1_search.csv", "run1_windows.csv"]
    rows = read_search_csv(tmp_path / "run1_search.csv")
    assert len(rows) >= 12
    assert main(["plan", str(DEMO), "--export-dir", str(tmp_path / "missing")]) == 2
    assert "missing" in capsys.readouterr().err


def test_failed_propagation_samples_do_not_break_the_plan(demo_plan):
    """SGP4 failures arrive as NaN samples with valid False (core.sky.predict): the plan must
    treat them as not visible, not crash (search costs need finite inputs)."""
    import copy

    g = copy.copy(demo_plan.prepared)
    pred = copy.copy(g.prediction)
    s = 3
    for name in ("elevation_deg", "azimuth_deg", "doppler_hz", "range_m",
                 "doppler_rate_hz_s", "elevation_rate_deg_s"):
        arr = getattr(pred, name).copy()
        arr[s, 100:] = np.nan
        setattr(pred, name, arr)
    pred.valid = pred.valid.copy()
    pred.valid[s, 100:] = False
    g.prediction = pred
    g.visible = g.visible & pred.valid
    g.window_cache = {}
    p = make_plan(demo_plan.scenario, prepared=g, monte_carlo=False)
    assert p.timeline.first_fix_unix_s is not None
    for seg in p.timeline.segments:
        if seg.sat_id == p.ids[s] and seg.kind == "search":
            assert seg.start_unix_s < p.times.unix_s[100]


def test_table_after_columns_match_the_search_when_after(demo_plan):
    from core.plan.pipeline import plan_rows

    rows = {r["id"]: r for r in plan_rows(demo_plan)}
    after = [sp for sp in demo_plan.satellites if sp.search and sp.search.state == "after"]
    assert after
    for sp in after:
        r = rows[sp.sat_id]
        assert r["after_low_hz"] == pytest.approx(r["low_hz"], abs=0.01)
        assert r["after_high_hz"] == pytest.approx(r["high_hz"], abs=0.01)
        assert r["after_bins"] == r["bins"]


def test_boc_signals_get_the_boc_code_step_loss(demo_plan):
    from core.search.codephase import code_step_loss

    step = demo_plan.scenario.search.code_step_chips
    assert demo_plan.code_step_loss["GAL-E1"] == code_step_loss(step, "BOC11")
    assert demo_plan.code_step_loss["GPS-L1CA"] == code_step_loss(step, "BPSK")
    assert demo_plan.code_step_loss["GAL-E1"].average_loss_db > demo_plan.code_step_loss["GPS-L1CA"].average_loss_db


def test_unknown_glonass_channel_window_holds_every_channel(tmp_path):
    """Without the mapping file the GLONASS windows must contain the window planned on
    each true carrier k = -7..+6 (recomputed here with the channel set on the entry)."""
    from dataclasses import replace as dc_replace

    from core.files.demo import write_demo
    from core.plan.pipeline import _uncertainty
    from core.search.windows import doppler_windows
    from core.sky.predict import predict

    path = write_demo(tmp_path)
    text = path.read_text().replace('mapping = "demo_glonass_mapping.txt"\n', "")
    path.write_text(text)
    p = make_plan(load_scenario(path), monte_carlo=False)
    assert any("channel k unknown" in w for w in p.warnings)
    g = p.prepared
    rows = [i for i, e in enumerate(g.orbits.entries) if e.info.system == "R"]
    sub_entries = [g.orbits.entries[i] for i in rows]
    unc = _uncertainty(p.scenario)
    for k in (-7, -3, 0, 4, 6):
        from core.orbits.orbit_set import OrbitSet

        ents = [dc_replace(e, info=dc_replace(e.info, glonass_k=k)) for e in sub_entries]
        pk = predict(OrbitSet(ents), g.site, g.grid, signals=["GLO-L1OF"])
        wk = doppler_windows(pk, unc, 0.0)
        vis = p.visible[rows]
        # The k-window without any orbit margin must sit inside the widened window less
        # its margin share (the widening is what holds the carrier offset).
        lo_ok = wk.low_hz[vis] >= (p.windows_first.low_hz[rows][vis] - 1e-6)
        hi_ok = wk.high_hz[vis] <= (p.windows_first.high_hz[rows][vis] + 1e-6)
        assert lo_ok.all() and hi_ok.all(), k


def test_monte_carlo_stops_on_cancel(demo_plan):
    from core.ground.errors import Cancelled
    from core.plan.pipeline import add_monte_carlo

    calls = []

    def cancel():
        calls.append(1)
        return len(calls) > 2

    with pytest.raises(Cancelled):
        add_monte_carlo(demo_plan, demo_plan.scenario.with_changes(search={"monte_carlo_runs": 100_000}),
                        cancel=cancel)
    assert len(calls) == 3          # polled every 64 runs: stopped after 128 of 100 000

"""Exports of a plan (JSON, CSV), the per-search list and the content hash (core.files.plan_export).

Checks: the files re-read to the plan's own numbers (within the documented rounding), a
failed export leaves no file, and the content hash equals the documented
``cat SCENARIO ORBITS... | sha256sum`` definition.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
from datetime import datetime
from pathlib import Path

import numpy as np
import pytest

from core.files import plan_export as pe
from core.files.demo import write_demo
from core.files.scenario import load_scenario
from core.ground.errors import InputError
from core.plan.pipeline import make_plan, plan_to_json
from core.search import bins as binlib
from tests.conftest import requires_orbit_data

# Rounding of the exports, as documented in core.files.plan_export: Hz to 0.01, degrees to
# 0.001, seconds to 0.001, dB to 0.01, Pd to 1e-4 -> half a unit in the last place.
HZ_TOL = 0.005 + 1e-9
DEG_TOL = 0.0005 + 1e-9
S_TOL = 0.0005 + 1e-9


@pytest.fixture(scope="module")
def demo_plan(tmp_path_factory):
    folder = tmp_path_factory.mktemp("demo")
    return make_plan(load_scenario(write_demo(folder)))


def _real_scenario_text(orbit_data: Path) -> str:
    gps = orbit_data / "tle" / "perylune_gps-ops_2020-04-01.txt"
    gal = orbit_data / "tle" / "perylune_galileo_2020-04-01.txt"
    return f"""name = "Real TLE export check"
[orbits]
files = ["{gps.as_posix()}", "{gal.as_posix()}"]
[site]
lat_deg = 47.4
lon_deg = 8.5
height_m = 420
[time]
start = "2020-04-01T06:00:00Z"
end = "2020-04-01T07:00:00Z"
step_s = 60
timezone = "Europe/Zurich"
[receiver]
signals = ["GPS-L1CA", "GAL-E1"]
channels = 8
[search]
coherent_ms = 4
[mask]
elevation_deg = 10
"""


@pytest.fixture(scope="module")
def real_plan(tmp_path_factory, orbit_data):
    folder = tmp_path_factory.mktemp("real")
    path = folder / "real.toml"
    path.write_text(_real_scenario_text(orbit_data), encoding="utf-8")
    return make_plan(load_scenario(path))


@pytest.fixture(params=["demo_plan", pytest.param("real_plan", marks=[requires_orbit_data,
                                                                        pytest.mark.realdata])])
def plan(request):
    return request.getfixturevalue(request.param)


# --------------------------------------------------------------------------- JSON

def test_json_round_trip_equals_plan_schema(plan, tmp_path):
    out = pe.export_plan_json(plan, tmp_path / "plan.json")
    got = json.loads(out.read_text(encoding="utf-8"))
    # The file is exactly the `acqplan plan` schema (through a JSON round trip).
    assert got == json.loads(json.dumps(plan_to_json(plan)))
    # ... and its numbers are the plan's own values (rounded to 0.01 Hz).
    by_id = {s["id"]: s for s in got["satellites"]}
    checked = 0
    for sp in plan.satellites:
        if sp.search is None:
            continue
        d = by_id[sp.sat_id]["search"]
        assert abs(d["low_hz"] - sp.search.low_hz) <= HZ_TOL
        assert abs(d["high_hz"] - sp.search.high_hz) <= HZ_TOL
        assert d["bins"] == sp.search.bins == len(sp.search.bin_centres_hz)
        assert d["channel"] == sp.search.channel
        checked += 1
    assert checked >= 4


# --------------------------------------------------------------------------- windows CSV

def test_windows_csv_round_trip(plan, tmp_path):
    path = pe.export_windows_csv(plan, tmp_path / "w.csv")
    rows = pe.read_windows_csv(path)
    assert len(rows) == int(plan.visible.sum())
    index = {sid: s for s, sid in enumerate(plan.ids)}
    iso = {t: k for k, t in enumerate(plan.times.iso())}
    wf, wa = plan.windows_first, plan.windows_after
    for r in rows:
        s, k = index[r["id"]], iso[r["time"]]
        assert plan.visible[s, k]
        assert r["signal"] == plan.satellites[s].signal_id
        for col, arr in (("low_hz", wf.low_hz), ("high_hz", wf.high_hz), ("nominal_hz", wf.nominal_hz),
                         ("after_low_hz", wa.low_hz), ("after_high_hz", wa.high_hz)):
            assert abs(r[col] - float(arr[s, k])) <= HZ_TOL, col
        assert abs(r["elevation_deg"] - float(plan.prediction.elevation_deg[s, k])) <= DEG_TOL
        assert abs(r["azimuth_deg"] - float(plan.prediction.azimuth_deg[s, k])) <= DEG_TOL
        assert r["bins"] == int(plan.bins_first[s, k])
        assert r["bins_after"] == int(plan.bins_after[s, k])
        assert abs(r["expected_search_s"] - float(plan.expected_search_first_s[s, k])) <= S_TOL
        # The bin count is the tiling of the window by the bin width (core.search.bins.bin_count).
        assert r["bins"] == binlib.bin_count(float(wf.low_hz[s, k]), float(wf.high_hz[s, k]),
                                             plan.bin_design[r["signal"]].bin_width_hz)


# --------------------------------------------------------------------------- search CSV

def test_search_csv_round_trip(plan, tmp_path):
    rows = pe.read_search_csv(pe.export_search_csv(plan, tmp_path / "s.csv"))
    in_view = [sp for s, sp in enumerate(plan.satellites) if plan.visible[s].any()]
    assert [r["id"] for r in rows] == [sp.sat_id for sp in in_view]
    searched = 0
    for r, sp in zip(rows, in_view):
        assert r["carrier_hz"] == sp.carrier_hz
        if sp.passes:
            assert r["passes"] == len(sp.passes)
            # [calc] the CSV writes the rise rounded to the nearest whole second
            t_csv = datetime.fromisoformat(r["in_view_from"].replace("Z", "+00:00")).timestamp()
            assert abs(t_csv - sp.passes[0].rise_unix_s) <= 0.5
        q = sp.search
        if q is None:
            assert all(r[c] is None for c in ("search_start", "low_hz", "bins", "channel"))
            continue
        searched += 1
        assert abs(r["low_hz"] - q.low_hz) <= HZ_TOL and abs(r["high_hz"] - q.high_hz) <= HZ_TOL
        assert abs(r["first_bin_hz"] - float(q.bin_centres_hz[0])) <= HZ_TOL
        assert abs(r["last_bin_hz"] - float(q.bin_centres_hz[-1])) <= HZ_TOL
        assert r["bins"] == q.bins and r["channel"] == q.channel and r["state"] == q.state
        assert abs(r["expected_search_s"] - q.expected_search_s) <= S_TOL
    assert searched >= 4


def test_export_all_writes_three_files(demo_plan, tmp_path):
    paths = pe.export_all(demo_plan, tmp_path, "morning")
    assert [p.name for p in paths] == ["morning.json", "morning_windows.csv", "morning_search.csv"]
    assert all(p.stat().st_size > 100 for p in paths)
    assert sorted(os.listdir(tmp_path)) == sorted(p.name for p in paths)


# --------------------------------------------------------------------------- failures

@pytest.mark.parametrize("writer", [pe.export_plan_json, pe.export_windows_csv, pe.export_search_csv])
def test_export_into_a_file_as_folder_fails_cleanly(demo_plan, tmp_path, writer):
    blocker = tmp_path / "not_a_folder"
    blocker.write_text("x")
    with pytest.raises(InputError) as err:
        writer(demo_plan, blocker / "out.dat")
    assert "not_a_folder" in str(err.value)
    assert sorted(os.listdir(tmp_path)) == ["not_a_folder"]


def test_export_all_into_missing_folder_writes_nothing(demo_plan, tmp_path):
    with pytest.raises(InputError):
        pe.export_all(demo_plan, tmp_path / "missing", "x")
    assert os.listdir(tmp_path) == []


@pytest.mark.parametrize("writer", [pe.export_plan_json, pe.export_windows_csv, pe.export_search_csv])
def test_failed_rename_leaves_no_partial_file_and_keeps_the_old_one(demo_plan, tmp_path,
                                                                    monkeypatch, writer):
    target = tmp_path / "out.dat"
    target.write_text("previous contents")

    def refuse(src, dst):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(os, "replace", refuse)
    with pytest.raises(InputError) as err:
        writer(demo_plan, target)
    assert "No space left" in str(err.value)
    assert target.read_text() == "previous contents"
    assert os.listdir(tmp_path) == ["out.dat"]          # no temporary file left behind


def test_read_csv_reports_missing_columns(tmp_path):
    p = tmp_path / "bad.csv"
    p.write_text("time,id\n2027-05-18T04:00:00Z,G01\n")
    with pytest.raises(InputError) as err:
        pe.read_windows_csv(p)
    assert err.value.line == 1 and "missing column" in str(err.value)


# --------------------------------------------------------------------------- searches, hash

def test_search_entries_follow_the_timeline(demo_plan):
    plan = demo_plan
    entries = pe.search_entries(plan)
    segs = sorted((s for s in plan.timeline.segments if s.kind == "search"),
                  key=lambda s: (s.start_unix_s, s.channel))
    assert [(e.sat_id, e.channel, e.start_unix_s) for e in entries] == \
        [(s.sat_id, s.channel, s.start_unix_s) for s in segs]
    seen = set()
    for e in entries:
        # Bins tile the window centred on it with the signal's bin width [core.search.bins doc].
        width = plan.bin_design[e.signal_id].bin_width_hz
        assert e.bins == binlib.bin_count(e.low_hz, e.high_hz, width)
        c = e.bin_centres_hz
        assert np.allclose(np.diff(c), width)
        assert math.isclose(0.5 * (c[0] + c[-1]), 0.5 * (e.low_hz + e.high_hz), abs_tol=1e-6)
        assert c[0] - width / 2 <= e.low_hz + 1e-9 and c[-1] + width / 2 >= e.high_hz - 1e-9
        sp = plan.satellites[plan.ids.index(e.sat_id)]
        if e.sat_id not in seen:
            seen.add(e.sat_id)
            q = sp.search
            assert (q.low_hz, q.high_hz, q.bins, q.channel) == (e.low_hz, e.high_hz, e.bins, e.channel)


def test_content_hash_is_sha256_of_the_concatenated_files(demo_plan, tmp_path):
    sc = demo_plan.scenario
    files = [Path(sc.path), *sc.resolved_orbit_files(), sc.resolved_mapping()]
    expected = hashlib.sha256(b"".join(p.read_bytes() for p in files)).hexdigest()
    got = pe.content_hash(sc)
    assert got.from_saved_file
    assert got.hex_digest == expected and got.short == expected[:10]


def test_content_hash_changes_with_data_and_marks_unsaved_scenarios(tmp_path):
    sc = load_scenario(write_demo(tmp_path))
    before = pe.content_hash(sc)
    orbit = sc.resolved_orbit_files()[0]
    orbit.write_bytes(orbit.read_bytes() + b"\n")
    assert pe.content_hash(sc).hex_digest != before.hex_digest
    edited = sc.with_changes(search={"coherent_ms": 2})
    h = pe.content_hash(edited)
    assert not h.from_saved_file and h.hex_digest != before.hex_digest

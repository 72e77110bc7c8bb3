"""Week numbers and data age: the era never puts data years after the plan, the real age
is reported in days, old data is refused unless asked for, and plan / passes / doppler
give the same age lines."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta

import pytest
from conftest import requires_orbit_data
from test_plausibility import yuma

from core.ground.errors import OrbitFormatError
from core.ground.timeutil import resolve_week
from core.orbits.readers import parse_yuma
from planner_gui.cli import main

GPS0 = datetime(1980, 1, 6, tzinfo=UTC)
LEAP_2021_S = 18        # GPS - UTC since 2017 [pub: IERS Bulletin C]


def _cli(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


# ---------------------------------------------------------------- era choice

def test_era_allows_a_lead_of_fourteen_days_and_no_more():
    # Week 105, TOA 405504 s; era 2 (full week 2153) is 2021-04-15 16:38:24 GPS [calc].
    toa = GPS0 + timedelta(weeks=2153, seconds=405504)
    assert toa == datetime(2021, 4, 15, 16, 38, 24, tzinfo=UTC)
    for days_before, week in ((0.0, 2153), (13.9, 2153), (14.1, 2153 - 1024), (-100.0, 2153)):
        ref = (toa - timedelta(days=days_before)).timestamp()
        assert resolve_week(105, 405504.0, ref) == week, days_before


def test_the_week_of_data_is_never_years_after_the_plan():
    # For any plan date, the chosen era puts the data at most 14 days after it and less than
    # 1024 weeks before it [calc]; only era 0 (nothing earlier exists) can lie further
    # ahead, and the age check refuses that.
    for year in range(1990, 2040, 3):
        ref = datetime(year, 6, 1, tzinfo=UTC)
        for w in (0, 105, 377, 862, 1023):
            full = resolve_week(w, 302400.0, ref.timestamp())
            epoch = GPS0 + timedelta(weeks=full, seconds=302400)
            assert epoch <= ref + timedelta(days=14, seconds=LEAP_2021_S) or full == w
            assert epoch > ref - timedelta(weeks=1024) - timedelta(days=14)


# ---------------------------------------------------------------- record weeks

def test_record_week_disagreeing_with_its_header_is_an_error():
    # The case: a truncated file left 'week: 8' under 'Week 862'.
    text = yuma(3, week=862) + yuma(7, week=8, header_week=862)
    with pytest.raises(OrbitFormatError) as err:
        parse_yuma(text, "cut.alm", datetime(2016, 3, 1, tzinfo=UTC))
    e = err.value
    assert e.field == "week" and e.file == "cut.alm"
    assert text.split("\n")[e.line - 1].startswith("week:")
    assert "PRN-07" in str(e) and "862" in str(e) and "\n" not in str(e)


def test_full_week_in_the_header_and_ten_bit_week_in_the_record_agree():
    s = parse_yuma(yuma(7, week=105, header_week=2153), "a.alm", datetime(2021, 4, 14, tzinfo=UTC))
    assert s.entries[0].almanac.week_full == 2153


def test_week_9999_is_outside_any_week_field():
    # The widest GPS week field has 13 bits: 0..8191 [mem: IS-GPS-200 CNAV week number].
    with pytest.raises(OrbitFormatError) as err:
        parse_yuma(yuma(7, week=9999), "w.alm", datetime(2021, 4, 14, tzinfo=UTC))
    assert err.value.field == "week" and "PRN-07" in str(err.value) and "9999" in str(err.value)


# ---------------------------------------------------------------- age: command line

def _scenario(tmp_path, orbit_file, start: str, extra: str = "") -> str:
    p = tmp_path / "s.toml"
    end = (datetime.fromisoformat(start.replace("Z", "+00:00")) + timedelta(hours=1)
           ).strftime("%Y-%m-%dT%H:%M:%SZ")
    p.write_text(f'[orbits]\nfiles = ["{orbit_file}"]\n{extra}\n[site]\nlat_deg = 47.0\n'
                 f'lon_deg = 8.0\n[time]\nstart = "{start}"\nend = "{end}"\nstep_s = 300\n'
                 '[mask]\nelevation_deg = 5\n')
    return str(p)


def _geometry_args(cmd, orbit_file, start):
    end = (datetime.fromisoformat(start.replace("Z", "+00:00")) + timedelta(hours=1)
           ).strftime("%Y-%m-%dT%H:%M:%SZ")
    return [cmd, "--orbits", str(orbit_file), "--site", "47,8,400", "--start", start, "--end", end,
            "--step", "300", "--mask", "5"]


@requires_orbit_data
def test_2016_almanac_for_a_2026_plan_is_refused_with_its_real_age(orbit_data, tmp_path, capsys):
    alm = orbit_data / "yuma/orekit_yuma_week862.txt"
    start = "2026-03-01T00:00:00Z"
    # TOA 2016-03-02 16:44:48 GPS = 16:44:31 UTC [pub: README; 17 s leap]: 3650.30 days [calc].
    age = (datetime(2026, 3, 1, tzinfo=UTC) - datetime(2016, 3, 2, 16, 44, 31, tzinfo=UTC))
    want = f"{age.total_seconds() / 86400:.1f} days before the start"
    assert want == "3650.3 days before the start"
    runs = [["plan", _scenario(tmp_path, alm, start)], _geometry_args("passes", alm, start),
            _geometry_args("doppler", alm, start)]
    for argv in runs:
        code, out, err = _cli(capsys, *argv)
        assert code == 2 and out == "", argv[0]
        assert err.count("\n") == 1 and str(alm) in err and want in err and "2016-03-02" in err
        assert "--allow-old-data" in err
        code, out, err = _cli(capsys, *argv, "--allow-old-data", "--format", "json")
        assert code == 0, (argv[0], err)
        assert want in out and "used because it was asked for" in out


@requires_orbit_data
def test_the_scenario_key_allows_old_data(orbit_data, tmp_path, capsys):
    alm = orbit_data / "yuma/orekit_yuma_week862.txt"
    sc = _scenario(tmp_path, alm, "2026-03-01T00:00:00Z", "allow_old_data = true")
    code, out, err = _cli(capsys, "plan", sc, "--format", "json")
    assert code == 0 and "3650.3 days before the start" in out


@requires_orbit_data
def test_plan_passes_and_doppler_give_the_same_age_warning(orbit_data, tmp_path, capsys):
    # 40 days after the TOA: beyond the 31.6 days the almanac margin was fitted on
    # [pub: docs/orbit-margin.md], inside the 120-day limit.
    alm = orbit_data / "yuma/orekit_yuma_week862.txt"
    start = "2016-04-11T00:00:00Z"
    lines = []
    for argv in (["plan", _scenario(tmp_path, alm, start)], _geometry_args("passes", alm, start),
                 _geometry_args("doppler", alm, start)):
        code, out, err = _cli(capsys, *argv, "--format", "json")
        assert code == 0, err
        import json

        doc = json.loads(out)
        age = [w for w in doc["warnings"] if "fitted on" in w and str(alm) in w]
        assert len(age) == 1, argv[0]
        lines.append(age[0])
    assert lines[0] == lines[1] == lines[2]
    assert "39.3 days before the start" in lines[0]   # 2016-04-11 - 2016-03-02 16:44 [calc]


@requires_orbit_data
def test_data_far_ahead_of_the_plan_is_refused(orbit_data, capsys):
    # A 2020 TLE set (full epochs, no era to choose) for a 2019 plan: 119 days ahead.
    tle = orbit_data / "tle/perylune_gps-ops_2020-04-01.txt"
    code, out, err = _cli(capsys, *_geometry_args("passes", tle, "2019-12-01T00:00:00Z"))
    assert code == 2 and "after the start" in err and "14 days ahead" in err


@pytest.mark.parametrize("week, header_week, shown", [(8, 862, "differs from week 862"),
                                                       (9999, 9999, "outside 0..8191")])
def test_bad_weeks_end_the_command_with_one_line(tmp_path, capsys, week, header_week, shown):
    p = tmp_path / "weeks.alm"
    p.write_text(yuma(3, week=header_week) + yuma(7, week=week, header_week=header_week))
    code, out, err = _cli(capsys, *_geometry_args("doppler", p, "2016-03-01T00:00:00Z"))
    assert code == 2 and out == "" and err.count("\n") == 1
    assert str(p) in err and "field 'week'" in err and "PRN-0" in err and shown in err

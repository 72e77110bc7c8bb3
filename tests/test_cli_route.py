"""``acqplan route`` and ``acqplan plan`` on a drive scenario (the command line's faces)."""

from __future__ import annotations

import json

import pytest
from test_route import GPX

from planner_gui.cli import main


def _run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_route_json_on_the_real_car_track(capsys):
    if not (GPX / "gpxpy_around-visnjan-with-car.gpx").is_file():
        pytest.skip(f"real GPX files not found at {GPX}")
    code, out, err = _run(capsys, "route", str(GPX / "gpxpy_around-visnjan-with-car.gpx"), "--format", "json")
    assert code == 0, err
    d = json.loads(out)
    # [pub: issue 8 section 4 names the keys; README: 104 points, 06:15:50-06:24:24]
    assert {"length_m", "duration_s", "points", "segments", "problems"} <= set(d)
    assert d["points"] == 104 and d["duration_s"] == 514.0 and d["problems"] == []
    code, out, _ = _run(capsys, "route", str(GPX / "gpxpy_route.gpx"), "--speed-kmh", "36")
    assert code == 0 and "at the planned speed" in out


@pytest.mark.parametrize("text, needle", [
    ("time_utc,lat_deg,lon_deg,height_m\n,52,9,0\n,95,9,0\n", "line 3, field 'row lat'"),
    ("lat,lon\n1,2\n", "line 1, field 'header'"),
])
def test_route_bad_input_is_one_line_exit_2(capsys, tmp_path, text, needle):
    p = tmp_path / "r.csv"
    p.write_text(text)
    code, out, err = _run(capsys, "route", str(p))
    assert code == 2 and out == ""
    assert err.count("\n") == 1 and str(p) in err and needle in err


def test_plan_json_gains_route_and_events_only_for_a_drive(capsys, tmp_path):
    from core.files.demo import write_demo

    write_demo(tmp_path)
    code, out, err = _run(capsys, "plan", str(tmp_path / "demo_drive_scenario.toml"), "--format", "json")
    assert code == 0, err
    d = json.loads(out)
    assert {"length_m", "duration_s", "stretches", "samples"} <= set(d["route"])
    assert len(d["events"]) == 6 and d["events"][3]["kind"] == "reacquire"
    assert d["drive_summary"]["worst_event"] == "E1"
    code, out, _ = _run(capsys, "plan", str(tmp_path / "demo_scenario.toml"), "--format", "json")
    plain = json.loads(out)
    assert "route" not in plain and "events" not in plain
    # A stretch past the route's end: exit 2, one line naming the scenario file and field.
    text = (tmp_path / "demo_drive_scenario.toml").read_text().replace('to = "Forsthaus Lindach"', "to = 99.0")
    (tmp_path / "bad.toml").write_text(text)
    code, out, err = _run(capsys, "plan", str(tmp_path / "bad.toml"))
    assert code == 2 and err.count("\n") == 1
    assert "bad.toml" in err and "route.stretch[1].to" in err and "past the route's end" in err

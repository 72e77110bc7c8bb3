"""Scenario files: validation (one message per bad field), defaults, paths, round trip.

The allowed ranges and defaults written here are the specification of the scenario format
(docs/scenario-keys.md), typed independently of core/scenario.py. Physical limits: latitude
-90..90 and longitude -180..180 deg [pub: WGS-84, NIMA TR8350.2]; IANA zone names [pub: IANA
tz database, via zoneinfo]; signal IDs as in core.signals [pub: domain-notes section 3].
"""

from __future__ import annotations

import copy
import os
import re
import tomllib
from datetime import UTC, datetime, timedelta, timezone
from pathlib import Path

import pytest

from core.files.scenario import load_scenario, save_scenario
from core.ground.errors import InputError, ScenarioError
from core.plan.spec import (
    KEY_RULES,
    MaskSpec,
    OrbitSpec,
    ReceiverSpec,
    Scenario,
    ScenarioValidationError,
    SearchSpec,
    SignalOverride,
    SignalSpec,
    SiteSpec,
    TimeSpec,
)

REPO = Path(__file__).resolve().parents[1]


def base() -> dict:
    """A valid scenario with every key given (invented values)."""
    return {
        "name": "Invented test", "format_version": 1,
        "orbits": {"files": ["alm.txt", "sub/gnss.tle"], "mapping": "map.txt"},
        "site": {"lat_deg": 47.25, "lon_deg": 8.5, "height_m": 450.0,
                 "horizontal_uncertainty_km": 20.0, "vertical_uncertainty_m": 100.0},
        "time": {"start": "2027-03-02T07:00:00Z", "end": "2027-03-02T09:00:00Z",
                 "step_s": 30, "uncertainty_s": 1.5, "timezone": "Europe/Zurich"},
        "receiver": {"signals": ["GPS-L1CA", "GAL-E1"], "channels": 16,
                     "oscillator_offset_ppb": -120.0, "oscillator_uncertainty_ppb": 250.0,
                     "max_horizontal_speed_m_s": 30.0, "max_vertical_speed_m_s": 2.0,
                     "correlators_per_channel": 3, "parallel_code_search": True},
        "search": {"coherent_ms": 4, "noncoherent": 3, "max_frequency_loss_db": 0.9,
                   "code_step_chips": 0.5, "false_alarm_per_cell": 1e-5,
                   "false_alarm_penalty_s": 0.2, "fine_time_uncertainty_us": 10.0,
                   "first_fix_satellites": 5, "ephemeris_wait_s": 36.0, "orbit_margin_hz": 25.0,
                   "priority": "rising", "monte_carlo_runs": 200, "seed": 7,
                   "per_signal": {"GAL-E1": {"coherent_ms": 8, "noncoherent": 2}}},
        "signal": {"cn0_zenith_dbhz": 46.0, "cn0_at_mask_dbhz": 34.0, "extra_loss_db": 3.0},
        "mask": {"elevation_deg": 7.5},
    }


def minimal() -> dict:
    return {"site": {"lat_deg": 47.25, "lon_deg": 8.5},
            "time": {"start": "2027-03-02T07:00:00Z", "end": "2027-03-02T09:00:00Z"}}


def with_value(d: dict, dotted: str, value) -> dict:
    d = copy.deepcopy(d)
    parts = dotted.split(".")
    target = d
    for p in parts[:-1]:
        target = target.setdefault(p, {})
    target[parts[-1]] = value
    return d


def problems_of(d: dict) -> list[ScenarioError]:
    with pytest.raises(ScenarioValidationError) as info:
        Scenario.from_dict(d)
    return info.value.problems


# ---------------------------------------------------------------- one message per bad field

# (field, bad value, text the message must contain). Out-of-range values sit just outside
# the documented limits; mistyped values are text, booleans, lists or fractions.
BAD = [
    ("name", 5, "text"), ("name", "   ", "empty"), ("name", "x" * 201, "200"),
    ("format_version", 2, "1 to 1"), ("format_version", "1", "whole number"),
    ("orbits.files", "a.tle", "list"), ("orbits.files", ["a.tle", 3], "entry 2"),
    ("orbits.files", ["a.tle", "a.tle"], "twice"),
    ("orbits.mapping", 5, "file name"), ("orbits.mapping", "", "empty"),
    ("orbits.skip_bad_records", 1, "true or false"), ("orbits.allow_old_data", "yes", "true or false"),
    ("site.lat_deg", 90.5, "-90 to 90 deg"), ("site.lat_deg", -91, "-90 to 90 deg"),
    ("site.lat_deg", "47.2", "without quotes"), ("site.lat_deg", True, "boolean"),
    ("site.lat_deg", float("nan"), "finite"),
    ("site.lon_deg", 180.01, "-180 to 180 deg"), ("site.lon_deg", -180.5, "-180 to 180 deg"),
    ("site.lon_deg", [8.5], "a list"),
    ("site.height_m", -501, "-500 to 20000 m"), ("site.height_m", 20_001, "-500 to 20000 m"),
    ("site.height_m", False, "boolean"),
    ("site.horizontal_uncertainty_km", -0.1, "0 to 20000 km"),
    ("site.horizontal_uncertainty_km", 20_000.5, "0 to 20000 km"),
    ("site.horizontal_uncertainty_km", "far", "number"),
    ("site.vertical_uncertainty_m", -1, "0 to 20000 m"),
    ("site.vertical_uncertainty_m", 20_001, "0 to 20000 m"),
    ("site.vertical_uncertainty_m", True, "boolean"),
    ("time.start", "yesterday", "ISO 8601"), ("time.start", 1_800_000_000, "ISO 8601"),
    ("time.end", "2027-13-01T00:00:00Z", "ISO 8601"), ("time.end", True, "ISO 8601"),
    ("time.step_s", 0.5, "1 to 3600 s"), ("time.step_s", 3601, "1 to 3600 s"),
    ("time.step_s", "60", "without quotes"),
    ("time.uncertainty_s", -1, "0 to 86400 s"), ("time.uncertainty_s", 86_401, "0 to 86400 s"),
    ("time.uncertainty_s", True, "boolean"),
    ("time.timezone", "Europe/Zurch", "Europe/Zurich"), ("time.timezone", "Mars/Olympus", "IANA"),
    ("time.timezone", 1, "IANA"),
    ("receiver.signals", [], "at least one"), ("receiver.signals", ["GPS-L2C"], "not a known signal"),
    ("receiver.signals", "GPS-L1CA", "list"), ("receiver.signals", ["GPS-L1CA", "gps-l1ca"], "twice"),
    ("receiver.channels", 0, "1 to 256"), ("receiver.channels", 257, "1 to 256"),
    ("receiver.channels", 12.5, "whole number"), ("receiver.channels", True, "boolean"),
    ("receiver.oscillator_offset_ppb", 50_001, "-50000 to 50000 ppb"),
    ("receiver.oscillator_offset_ppb", -50_001, "-50000 to 50000 ppb"),
    ("receiver.oscillator_offset_ppb", "0", "without quotes"),
    ("receiver.oscillator_uncertainty_ppb", -1, "0 to 50000 ppb"),
    ("receiver.oscillator_uncertainty_ppb", 50_001, "0 to 50000 ppb"),
    ("receiver.oscillator_uncertainty_ppb", True, "boolean"),
    ("receiver.max_horizontal_speed_m_s", -1, "0 to 1000 m/s"),
    ("receiver.max_horizontal_speed_m_s", 1000.5, "0 to 1000 m/s"),
    ("receiver.max_horizontal_speed_m_s", "fast", "number"),
    ("receiver.max_vertical_speed_m_s", -0.5, "0 to 500 m/s"),
    ("receiver.max_vertical_speed_m_s", 501, "0 to 500 m/s"),
    ("receiver.max_vertical_speed_m_s", True, "boolean"),
    ("receiver.correlators_per_channel", 0, "1 to 1_000_000"),
    ("receiver.correlators_per_channel", 1_000_001, "1 to 1_000_000"),
    ("receiver.correlators_per_channel", 2.5, "whole number"),
    ("receiver.parallel_code_search", 1, "true or false"),
    ("receiver.parallel_code_search", "yes", "true or false"),
    ("search.coherent_ms", 0.5, "1 to 1000 ms"), ("search.coherent_ms", 1001, "1 to 1000 ms"),
    ("search.coherent_ms", True, "boolean"),
    ("search.noncoherent", 0, "1 to 1000"), ("search.noncoherent", 1001, "1 to 1000"),
    ("search.noncoherent", 2.5, "whole number"), ("search.noncoherent", "5", "without quotes"),
    ("search.max_frequency_loss_db", 0.09, "0.1 to 3 dB"),
    ("search.max_frequency_loss_db", 3.01, "0.1 to 3 dB"),
    ("search.max_frequency_loss_db", True, "boolean"),
    ("search.code_step_chips", 0.04, "0.05 to 1 chips"),
    ("search.code_step_chips", 1.01, "0.05 to 1 chips"),
    ("search.code_step_chips", "half", "number"),
    ("search.false_alarm_per_cell", 1e-13, "1e-12 to 0.1"),
    ("search.false_alarm_per_cell", 0.2, "1e-12 to 0.1"),
    ("search.false_alarm_per_cell", True, "boolean"),
    ("search.false_alarm_penalty_s", -0.1, "0 to 600 s"),
    ("search.false_alarm_penalty_s", 601, "0 to 600 s"),
    ("search.false_alarm_penalty_s", [0.1], "a list"),
    ("search.fine_time_uncertainty_us", -1, "0 to 100000 us"),
    ("search.fine_time_uncertainty_us", 100_001, "0 to 100000 us"),
    ("search.fine_time_uncertainty_us", "10", "without quotes"),
    ("search.first_fix_satellites", 0, "1 to 64"), ("search.first_fix_satellites", 65, "1 to 64"),
    ("search.first_fix_satellites", 4.5, "whole number"),
    ("search.ephemeris_wait_s", -1, "0 to 3600 s"), ("search.ephemeris_wait_s", 3601, "0 to 3600 s"),
    ("search.ephemeris_wait_s", True, "boolean"),
    ("search.orbit_margin_hz", -1, "0 to 10000 Hz"),
    ("search.orbit_margin_hz", 10_001, "0 to 10000 Hz"),
    ("search.orbit_margin_hz", "auto", "number"),
    ("search.priority", "azimuth", "'elevation', 'rising'"), ("search.priority", 1, "one of"),
    ("search.monte_carlo_runs", 0, "1 to 100000"), ("search.monte_carlo_runs", 100_001, "1 to 100000"),
    ("search.monte_carlo_runs", 1.5, "whole number"),
    ("search.seed", -1, "0 to"), ("search.seed", 1.5, "whole number"), ("search.seed", "7", "whole number"),
    ("signal.cn0_zenith_dbhz", 9.9, "10 to 60 dB-Hz"), ("signal.cn0_zenith_dbhz", 60.1, "10 to 60 dB-Hz"),
    ("signal.cn0_zenith_dbhz", True, "boolean"),
    ("signal.cn0_at_mask_dbhz", 9, "10 to 60 dB-Hz"), ("signal.cn0_at_mask_dbhz", "35", "without quotes"),
    ("signal.extra_loss_db", -0.1, "0 to 50 dB"), ("signal.extra_loss_db", 50.1, "0 to 50 dB"),
    ("signal.extra_loss_db", True, "boolean"),
    ("mask.elevation_deg", -5.1, "-5 to 60 deg"), ("mask.elevation_deg", 60.5, "-5 to 60 deg"),
    ("mask.elevation_deg", "10", "without quotes"),
]


def _shown(v) -> str:
    """How the message must show the bad value (TOML spelling)."""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, str):
        return repr(v) if v.strip() and len(v) < 50 else ""
    if isinstance(v, list):
        return ""
    return repr(v)


@pytest.mark.parametrize("field,value,fragment", BAD, ids=[f"{f}={v!r}"[:60] for f, v, _ in BAD])
def test_each_bad_field_gets_its_own_message(field, value, fragment):
    d = with_value(base(), field, value)
    if field == "signal.cn0_at_mask_dbhz":
        d["signal"]["cn0_zenith_dbhz"] = 60.0      # keep the cross-check out of the way
    probs = problems_of(d)
    assert len(probs) == 1, [str(p) for p in probs]
    p = probs[0]
    assert isinstance(p, ScenarioError) and isinstance(p, InputError)
    assert p.field == field
    text = str(p)
    assert f"'{field}'" in text
    assert fragment in text
    assert _shown(value) in text
    # The single-problem exception carries the same field and message.
    with pytest.raises(ScenarioValidationError) as info:
        Scenario.from_dict(d)
    assert info.value.field == field and fragment in str(info.value)


def test_bad_table_covers_every_key():
    fields_tested = {f for f, _, _ in BAD}
    assert {r.dotted for r in KEY_RULES} <= fields_tested


def test_values_at_the_limits_are_accepted():
    d = base()
    d["site"].update(lat_deg=-90, lon_deg=180, height_m=20_000, horizontal_uncertainty_km=0)
    d["time"].update(step_s=3600, uncertainty_s=86_400)
    d["receiver"].update(channels=256, oscillator_uncertainty_ppb=50_000, correlators_per_channel=1)
    d["search"].update(coherent_ms=1000, noncoherent=1, max_frequency_loss_db=3.0,
                       code_step_chips=0.05, false_alarm_per_cell=1e-12, seed=2**63 - 1)
    d["signal"].update(cn0_zenith_dbhz=60, cn0_at_mask_dbhz=60)
    d["mask"]["elevation_deg"] = -5
    sc = Scenario.from_dict(d)
    assert sc.site.lat_deg == -90.0 and sc.search.seed == 2**63 - 1


def test_many_bad_fields_are_all_listed():
    d = base()
    d["site"]["lat_deg"] = 123
    d["search"]["coherent_ms"] = "4"
    d["mask"]["elevation_deg"] = 75
    with pytest.raises(ScenarioValidationError) as info:
        Scenario.from_dict(d)
    err = info.value
    assert [p.field for p in err.problems] == ["site.lat_deg", "search.coherent_ms", "mask.elevation_deg"]
    msg = str(err)
    assert msg.startswith("3 problems")
    for f in ("site.lat_deg", "search.coherent_ms", "mask.elevation_deg", "123", "'4'", "75"):
        assert f in msg


def test_cross_field_checks():
    d = base()
    d["time"]["end"] = d["time"]["start"]
    assert [p.field for p in problems_of(d)] == ["time.end"]
    d["time"]["end"] = "2027-03-09T07:00:01Z"            # 7 days + 1 s
    (p,) = problems_of(d)
    assert p.field == "time.end" and "7 days" in str(p)
    d["time"]["end"] = "2027-03-09T07:00:00Z"            # exactly 7 days: allowed
    Scenario.from_dict(d)
    d = base()
    d["signal"].update(cn0_zenith_dbhz=40, cn0_at_mask_dbhz=41)
    (p,) = problems_of(d)
    assert p.field == "signal.cn0_at_mask_dbhz" and "41" in str(p) and "40" in str(p)


def test_unknown_keys_and_sections_are_errors_with_a_hint():
    d = base()
    d["search"]["coherant_ms"] = 4
    d["serch"] = {"x": 1}
    d["speed"] = 3
    probs = problems_of(d)
    by_field = {p.field: str(p) for p in probs}
    assert set(by_field) == {"search.coherant_ms", "serch", "speed"}
    assert "did you mean 'coherent_ms'" in by_field["search.coherant_ms"]
    assert "did you mean 'search'" in by_field["serch"]
    assert "unknown key 'speed'" in by_field["speed"]


def test_missing_required_keys_each_reported():
    probs = problems_of({"name": "x"})
    assert sorted(p.field for p in probs) == ["site.lat_deg", "site.lon_deg", "time.end", "time.start"]
    assert all("required" in str(p) for p in probs)


def test_section_that_is_not_a_table():
    d = minimal()
    d["mask"] = 10
    (p,) = problems_of(d)
    assert p.field == "mask" and "table" in str(p)


# ---------------------------------------------------------------- per-signal overrides

def test_per_signal_override_and_its_errors():
    sc = Scenario.from_dict(base())
    assert sc.search.integration_for("GAL-E1") == (8.0, 2)
    assert sc.search.integration_for("GPS-L1CA") == (4.0, 3)
    d = base()
    d["search"]["per_signal"] = {"BDS-B1X": {"coherent_ms": 1}, "GPS-L1CA": {"coherant_ms": 1},
                                 "GAL-E1": {"noncoherent": 0}}
    fields = sorted(p.field for p in problems_of(d))
    assert fields == ["search.per_signal.BDS-B1X", "search.per_signal.GAL-E1.noncoherent",
                      "search.per_signal.GPS-L1CA.coherant_ms"]


# ---------------------------------------------------------------- defaults

def test_missing_optional_keys_take_the_documented_defaults():
    sc = Scenario.from_dict(minimal())
    assert sc.name == "Untitled scenario"
    assert sc.orbits == OrbitSpec(files=(), mapping=None)
    assert sc.site == SiteSpec(47.25, 8.5, height_m=0.0, horizontal_uncertainty_km=30.0,
                               vertical_uncertainty_m=500.0)
    assert sc.time.step_s == 60.0 and sc.time.uncertainty_s == 2.0 and sc.time.timezone == "UTC"
    assert sc.receiver == ReceiverSpec(signals=("GPS-L1CA",), channels=12, oscillator_offset_ppb=0.0,
                                       oscillator_uncertainty_ppb=500.0, max_horizontal_speed_m_s=0.0,
                                       max_vertical_speed_m_s=0.0, correlators_per_channel=1,
                                       parallel_code_search=False)
    assert sc.search == SearchSpec(coherent_ms=1.0, noncoherent=5, max_frequency_loss_db=1.0,
                                   code_step_chips=0.5, false_alarm_per_cell=1e-4,
                                   false_alarm_penalty_s=0.1, fine_time_uncertainty_us=None,
                                   first_fix_satellites=4, ephemeris_wait_s=30.0,
                                   orbit_margin_hz=None, priority="elevation",
                                   monte_carlo_runs=500, seed=1, per_signal=())
    assert sc.signal == SignalSpec(45.0, 35.0, 0.0)
    assert sc.mask == MaskSpec(5.0)


@pytest.mark.parametrize("spec_cls,section", [
    (OrbitSpec, "orbits"), (ReceiverSpec, "receiver"), (SearchSpec, "search"),
    (SignalSpec, "signal"), (MaskSpec, "mask")])
def test_dataclass_defaults_agree_with_the_key_table(spec_cls, section):
    made = spec_cls()
    for rule in (r for r in KEY_RULES if r.section == section):
        expected = rule.default
        assert getattr(made, rule.key) == (tuple(expected) if isinstance(expected, list) else expected), rule.dotted


def test_types_are_normalised():
    d = minimal()
    d["receiver"] = {"signals": ["gal-e1", " GPS-L1CA "], "channels": 8.0}
    d["search"] = {"priority": "Rising"}
    sc = Scenario.from_dict(d)
    assert sc.receiver.signals == ("GAL-E1", "GPS-L1CA")
    assert sc.receiver.channels == 8 and isinstance(sc.receiver.channels, int)
    assert sc.search.priority == "rising"
    assert isinstance(sc.site.lat_deg, float)
    assert [s.signal_id for s in sc.receiver.signal_objects()] == ["GAL-E1", "GPS-L1CA"]


# ---------------------------------------------------------------- times

def test_times_text_and_toml_datetimes():
    d = minimal()
    d["time"] = {"start": datetime(2027, 3, 2, 9, 0, tzinfo=timezone(timedelta(hours=2))),
                 "end": "2027-03-02T09:00:00"}           # no zone: UTC
    sc = Scenario.from_dict(d)
    assert sc.time.start == datetime(2027, 3, 2, 7, 0, tzinfo=UTC)
    assert sc.time.end == datetime(2027, 3, 2, 9, 0, tzinfo=UTC)
    # 2027-03-02T07:00Z as POSIX seconds [calc: 20879 days * 86400 + 7 h]
    assert sc.start_unix_s == 20_879 * 86_400 + 7 * 3600
    assert sc.time.duration_s == 7200.0
    assert len(sc.time.grid()) == 7200 // 60 + 1


def test_date_without_time_is_refused(tmp_path):
    f = tmp_path / "s.toml"
    f.write_text('[site]\nlat_deg = 1\nlon_deg = 2\n[time]\nstart = 2027-03-02\n'
                 'end = 2027-03-02T09:00:00Z\n', encoding="utf-8")
    with pytest.raises(ScenarioValidationError) as info:
        load_scenario(f)
    assert info.value.field == "time.start" and "time of day" in str(info.value)
    assert info.value.line == 5


def test_timezone_property():
    d = minimal()
    d["time"]["timezone"] = "Europe/Zurich"
    sc = Scenario.from_dict(d)
    # Zurich is UTC+1 in March before the switch on the last Sunday [pub: IANA tz database].
    assert sc.time.start.astimezone(sc.time.tzinfo).hour == 8


# ---------------------------------------------------------------- files

SCENARIO_TEXT = """\
# invented scenario
name = "File test"

[orbits]
files = ["alm.txt", "sub/gnss.tle"]

[site]
lat_deg = 47.25
lon_deg = 8.5

[time]
start = "2027-03-02T07:00:00Z"
end = "2027-03-02T09:00:00Z"
"""


def _write_orbit_files(folder: Path) -> None:
    (folder / "sub").mkdir(parents=True, exist_ok=True)
    (folder / "alm.txt").write_text("x", encoding="utf-8")
    (folder / "sub" / "gnss.tle").write_text("x", encoding="utf-8")


def test_relative_orbit_paths_resolve_against_the_scenario_folder(tmp_path, monkeypatch):
    folder = tmp_path / "campaign"
    folder.mkdir()
    _write_orbit_files(folder)
    (folder / "s.toml").write_text(SCENARIO_TEXT, encoding="utf-8")
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    monkeypatch.chdir(elsewhere)
    sc = load_scenario(Path("..") / "campaign" / "s.toml")
    assert sc.resolved_orbit_files() == [(folder / "alm.txt").resolve(),
                                         (folder / "sub" / "gnss.tle").resolve()]
    assert sc.base_dir == folder.resolve()
    assert sc.missing_orbit_files() == []


def test_absolute_orbit_path_kept(tmp_path):
    target = tmp_path / "abs.tle"
    target.write_text("x", encoding="utf-8")
    d = with_value(minimal(), "orbits.files", [str(target)])
    sc = Scenario.from_dict(d, base_dir=tmp_path / "nowhere")
    assert sc.resolved_orbit_files() == [target]


def test_missing_orbit_file_is_reported_with_line(tmp_path):
    (tmp_path / "s.toml").write_text(SCENARIO_TEXT, encoding="utf-8")
    (tmp_path / "alm.txt").write_text("x", encoding="utf-8")
    with pytest.raises(ScenarioValidationError) as info:
        load_scenario(tmp_path / "s.toml")
    (p,) = info.value.problems
    assert p.field == "orbits.files" and p.line == 5 and "sub/gnss.tle" in str(p)
    assert p.file == str(tmp_path / "s.toml")
    sc = load_scenario(tmp_path / "s.toml", check_files=False)
    assert sc.missing_orbit_files() == [(tmp_path / "sub" / "gnss.tle").resolve()]


def test_line_numbers_of_bad_and_unknown_keys(tmp_path):
    text = SCENARIO_TEXT + "\n[search]\ncoherent_ms = 0\nnoncoherant = 4\n[search.per_signal.GAL-E1]\ncoherent_ms = 3000\n"
    text = text.replace("lat_deg = 47.25", "lat_deg = 147.25")
    f = tmp_path / "s.toml"
    f.write_text(text, encoding="utf-8")
    with pytest.raises(ScenarioValidationError) as info:
        load_scenario(f, check_files=False)
    lines = {p.field: p.line for p in info.value.problems}
    # Line numbers counted in the text above.
    assert lines == {"site.lat_deg": 8, "search.coherent_ms": 16, "search.noncoherant": 17,
                     "search.per_signal.GAL-E1.coherent_ms": 19}
    assert all(p.file == str(f) for p in info.value.problems)
    assert f"{f}: 4 problems" in str(info.value)
    assert "line 8, field 'site.lat_deg'" in str(info.value)


def test_toml_syntax_error_names_the_line(tmp_path):
    f = tmp_path / "s.toml"
    f.write_text('name = "x"\n[site]\nlat_deg = = 4\n', encoding="utf-8")
    with pytest.raises(ScenarioError) as info:
        load_scenario(f)
    assert info.value.line == 3 and "TOML" in str(info.value)


def test_unreadable_file(tmp_path):
    with pytest.raises(ScenarioError) as info:
        load_scenario(tmp_path / "none.toml")
    assert "file not found" in str(info.value)   # the bounded reader says which problem
    f = tmp_path / "bin.toml"
    f.write_bytes(b"name = \"\xff\xfe\"\n")
    with pytest.raises(ScenarioError, match="UTF-8"):
        load_scenario(f)


def test_round_trip_save_load_equal(tmp_path):
    _write_orbit_files(tmp_path)
    (tmp_path / "map.txt").write_text("x", encoding="utf-8")
    sc = Scenario.from_dict(base(), base_dir=tmp_path)
    saved = save_scenario(sc, tmp_path / "out.toml")
    loaded = load_scenario(tmp_path / "out.toml")
    assert loaded == sc == saved
    assert loaded.to_dict() == sc.to_dict()
    assert loaded.search.per_signal == (("GAL-E1", SignalOverride(8.0, 2)),)
    assert loaded.path == tmp_path / "out.toml"
    # Saving again gives the same bytes.
    first = (tmp_path / "out.toml").read_bytes()
    save_scenario(loaded, tmp_path / "out.toml")
    assert (tmp_path / "out.toml").read_bytes() == first
    assert not [p for p in os.listdir(tmp_path) if p.endswith(".tmp")]


def test_round_trip_of_minimal_scenario_omits_unset_keys(tmp_path):
    sc = Scenario.from_dict(minimal(), base_dir=tmp_path)
    save_scenario(sc, tmp_path / "m.toml")
    text = (tmp_path / "m.toml").read_text(encoding="utf-8")
    assert "fine_time_uncertainty_us" not in text and "mapping" not in text
    assert load_scenario(tmp_path / "m.toml") == sc


def test_save_elsewhere_rewrites_relative_paths(tmp_path):
    src = tmp_path / "a"
    src.mkdir()
    _write_orbit_files(src)
    d = with_value(minimal(), "orbits.files", ["alm.txt", "sub/gnss.tle"])
    sc = Scenario.from_dict(d, base_dir=src)
    dest = tmp_path / "b" / "c"
    dest.mkdir(parents=True)
    saved = save_scenario(sc, dest / "s.toml")
    assert saved.orbits.files == ("../../a/alm.txt", "../../a/sub/gnss.tle")
    again = load_scenario(dest / "s.toml")
    assert again.resolved_orbit_files() == sc.resolved_orbit_files()


def test_save_is_atomic_when_the_rename_fails(tmp_path, monkeypatch):
    sc = Scenario.from_dict(minimal(), base_dir=tmp_path)
    target = tmp_path / "s.toml"
    target.write_text("old content", encoding="utf-8")

    def broken_replace(a, b):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(os, "replace", broken_replace)
    with pytest.raises(ScenarioError, match="cannot save"):
        save_scenario(sc, target)
    assert target.read_text(encoding="utf-8") == "old content"
    assert os.listdir(tmp_path) == ["s.toml"]


def test_with_changes_validates():
    sc = Scenario.from_dict(base())
    changed = sc.with_changes(search={"coherent_ms": 10}, name="Other")
    assert changed.search.coherent_ms == 10.0 and changed.name == "Other"
    assert changed.site == sc.site and sc.search.coherent_ms == 4.0
    assert sc.with_changes(mask=MaskSpec(12.0)).mask.elevation_deg == 12.0
    with pytest.raises(ScenarioValidationError) as info:
        sc.with_changes(site={"lat_deg": 91})
    assert info.value.field == "site.lat_deg"
    later = datetime(2027, 3, 2, 8, 0, tzinfo=UTC)
    assert sc.with_changes(time={"end": later}).end_unix_s == later.timestamp()


def test_hand_built_scenario_can_be_validated():
    sc = Scenario(site=SiteSpec(95.0, 0.0),
                  time=TimeSpec(datetime(2027, 1, 1, tzinfo=UTC), datetime(2027, 1, 1, 1, tzinfo=UTC)))
    with pytest.raises(ScenarioValidationError) as info:
        sc.validated()
    assert info.value.field == "site.lat_deg"


# ---------------------------------------------------------------- documentation

def test_every_key_is_documented():
    doc = (REPO / "docs" / "scenario-keys.md").read_text(encoding="utf-8")
    sections = {r.section for r in KEY_RULES if r.section}
    for s in sections:
        assert f"[{s}]" in doc, s
    for r in KEY_RULES:
        # Each key appears in a table row of its section: | `key` | ...
        assert re.search(rf"^\| `{re.escape(r.key)}` \|", doc, re.M), r.dotted
    assert "[search.per_signal." in doc


def test_examples_in_the_documentation_are_valid():
    doc = (REPO / "docs" / "scenario-keys.md").read_text(encoding="utf-8")
    blocks = re.findall(r"```toml\n(.*?)```", doc, re.S)
    assert len(blocks) == 2
    per_signal = tomllib.loads(blocks[0])
    full = Scenario.from_dict({**minimal(), "search": per_signal["search"]})
    assert full.search.integration_for("BDS-B1I") == (1.0, 20)
    example = Scenario.from_dict(tomllib.loads(blocks[1]))
    assert example.search.coherent_ms == 4.0 and example.receiver.signals == ("GPS-L1CA", "GAL-E1")


# --------------------------------------------------------------------------- salvage for the form

def _problems(d: dict):
    with pytest.raises(ScenarioValidationError) as info:
        Scenario.from_dict(d)
    return info.value.problems


@pytest.mark.parametrize("dotted, value", [
    ("site.lat_deg", 95), ("receiver.channels", 0), ("search.coherent_ms", "four"),
    ("time.end", "2027-03-02T06:00:00Z"), ("time.start", "yesterday"), ("site.latt", 1),
    ("mask", 5), ("search.per_signal", {"GPS-L9": {"coherent_ms": 2}}),
])
def test_salvage_keeps_every_good_value(dotted, value):
    from core.plan.spec import salvage_scenario

    d = with_value(base(), dotted, value)
    problems = _problems(d)
    sc = salvage_scenario(d, problems)
    good = Scenario.from_dict(base())
    section = dotted.split(".")[0]
    # every section the bad value is not in is exactly the file's
    for other in ("site", "time", "receiver", "search", "signal", "mask"):
        if other != section:
            assert getattr(sc, other) == getattr(good, other), (dotted, other)
    # the bad value is a default or a stand-in, never a value taken from nowhere
    if dotted == "site.lat_deg":
        assert sc.site.lat_deg == 0.0 and sc.site.lon_deg == 8.5
    if dotted == "time.end":          # not after start: two hours after the good start
        assert sc.time.end_unix_s - sc.time.start_unix_s == 7200.0
        assert sc.time.start == good.time.start
    if dotted == "time.start":        # unreadable: two hours before the good end
        assert sc.time.end == good.time.end and sc.time.end_unix_s - sc.time.start_unix_s == 7200.0
    if dotted == "receiver.channels":
        assert sc.receiver.channels == 12 and sc.receiver.signals == good.receiver.signals

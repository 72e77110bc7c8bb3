"""Options and values: the command line and the scenario share one set of ranges and
defaults, and a bad number is refused with the option's name, never an internal one.

Each case once went wrong (issue: numbers a crew can trust, "Options and values"):
``--mask nan`` and ``--mask 95`` gave exit 0 with empty output, ``--mask -1e3`` was taken
for a flag, longitude -180..360 and height -11000..100000 m on the command line against
-180..180 and -500..20000 m in a scenario, a 10 deg mask default against 5 deg,
``bins --max-loss-db 100`` accepted where a scenario allows 0.1 to 3 dB.
"""

from __future__ import annotations

import json

import pytest

from core.files.demo import write_demo
from core.ground.errors import InputError
from core.ground.geodesy import Site
from core.plan.spec import RULES_BY_DOTTED, Scenario
from planner_gui.cli import main


@pytest.fixture(scope="module")
def demo_dir(tmp_path_factory):
    return write_demo(tmp_path_factory.mktemp("demo")).parent


def _geometry(demo_dir, *extra, command="passes"):
    argv = [command, "--orbits", str(demo_dir / "demo_gps_yuma.txt"), "--site", "49.6,10.1,318",
            "--start", "2027-05-18T04:00:00Z", "--end", "2027-05-18T05:00:00Z",
            "--format", "json", *extra]
    if command == "doppler" and "--step" not in extra:
        argv += ["--step", "600"]
    return argv


def _run(capsys, argv):
    code = main(argv)
    out, err = capsys.readouterr()
    return code, out, err


@pytest.mark.parametrize("value", ["nan", "95", "-1e3", "inf", "61", "-5.01", "ten"])
def test_bad_mask_is_refused_with_its_range(capsys, demo_dir, value):
    code, out, err = _run(capsys, _geometry(demo_dir, "--mask", value))
    assert code == 2 and out == ""
    assert len(err.strip().splitlines()) == 1 and "--mask" in err
    if value != "ten":
        assert "-5 to 60 deg" in err                      # the mask.elevation_deg rule


@pytest.mark.parametrize("value", ["-1e0", "-5", "-2.5"])
def test_negative_mask_is_a_number_not_a_flag(capsys, demo_dir, value):
    code, out, err = _run(capsys, _geometry(demo_dir, "--mask", value))
    assert code == 0, err
    assert json.loads(out)["mask_deg"] == float(value)


def test_cli_mask_default_is_the_scenario_default(capsys, demo_dir):
    code, out, _ = _run(capsys, _geometry(demo_dir))
    assert code == 0
    scenario_default = Scenario.from_dict({"site": {"lat_deg": 0, "lon_deg": 0}, "time": {
        "start": "2027-05-18T04:00:00Z", "end": "2027-05-18T05:00:00Z"}}).mask.elevation_deg
    assert json.loads(out)["mask_deg"] == scenario_default == 5.0


# Pairs (option, scenario key): the command line must accept and refuse exactly what the
# scenario accepts and refuses, at both ends of the key's range.
OPTION_KEYS = [("--mask", "mask.elevation_deg", "passes"), ("--step", "time.step_s", "doppler"),
               ("--coherent-ms", "search.coherent_ms", "bins"),
               ("--max-loss-db", "search.max_frequency_loss_db", "bins")]


def _option_argv(demo_dir, option, command, value):
    if command == "bins":
        base = {"--coherent-ms": "4", "--max-loss-db": "1"}
        base[option] = value
        return ["bins", *[x for kv in base.items() for x in kv], "--format", "json"]
    return _geometry(demo_dir, option, value, command=command)


def _scenario_accepts(dotted, value) -> bool:
    section, key = dotted.split(".")
    d = {"site": {"lat_deg": 49.6, "lon_deg": 10.1},
         "time": {"start": "2027-05-18T04:00:00Z", "end": "2027-05-18T05:00:00Z"}}
    d.setdefault(section, {})[key] = value
    try:
        Scenario.from_dict(d)
        return True
    except InputError:
        return False


@pytest.mark.parametrize("option, dotted, command", OPTION_KEYS)
def test_option_and_scenario_key_share_the_range(capsys, demo_dir, option, dotted, command):
    rule = RULES_BY_DOTTED[dotted]
    span = rule.hi - rule.lo
    for value, inside in ((rule.lo, True), (rule.hi, True), (rule.lo - 1e-3 * span, False),
                          (rule.hi + 1e-3 * span, False)):
        if option == "--step" and value > 1800:
            continue        # a step longer than the 1 h window: the window check answers
        assert _scenario_accepts(dotted, value) is inside, (dotted, value)
        code, _, err = _run(capsys, _option_argv(demo_dir, option, command, repr(value)))
        assert (code == 0) is inside, (option, value, err)


def test_bins_max_loss_100_db_is_refused(capsys):
    code, _, err = _run(capsys, ["bins", "--coherent-ms", "4", "--max-loss-db", "100"])
    assert code == 2 and "--max-loss-db" in err and "0.1 to 3 dB" in err


def test_bins_without_curve_works(capsys):
    code, out, err = _run(capsys, ["bins", "--coherent-ms", "1.5", "--max-loss-db", "1",
                                   "--format", "json"])
    assert code == 0, err
    # [calc] |sinc(pi f T)|^2 = -1 dB at f T = 0.2615 (domain-notes 5): 261.5 Hz at 1 ms,
    # so 174.3 Hz at 1.5 ms.
    assert json.loads(out)["half_width_hz"] == pytest.approx(261.5 / 1.5, abs=0.05)


@pytest.mark.parametrize("site, words", [
    ("49.6,200,318", "longitude 200.0 deg is outside -180..180 deg"),
    ("49.6,10.1,-600", "height -600.0 m is outside -500..20000 m"),
    ("49.6,10.1,30000", "height 30000.0 m is outside -500..20000 m"),
    ("91,10.1,0", "latitude 91.0 deg is outside -90..90 deg"),
    ("nan,10.1,0", "latitude nan deg"),
])
def test_site_option_takes_the_scenario_site_ranges(capsys, demo_dir, site, words):
    argv = _geometry(demo_dir)
    argv[argv.index("--site") + 1] = site
    code, _, err = _run(capsys, argv)
    assert code == 2 and words in err and "'--site'" in err
    assert "lat_deg" not in err and "lon_deg" not in err and "height_m" not in err


def test_site_limits_are_the_scenario_key_rules():
    for key, lo_hi in (("lat_deg", (-90.0, 90.0)), ("lon_deg", (-180.0, 180.0)),
                       ("height_m", (-500.0, 20_000.0))):
        rule = RULES_BY_DOTTED[f"site.{key}"]
        assert (rule.lo, rule.hi) == lo_hi
        for value, ok in ((rule.lo, True), (rule.hi, True), (rule.lo - 1, False), (rule.hi + 1, False)):
            kwargs = {"lat_deg": 0.0, "lon_deg": 0.0, "height_m": 0.0, key: value}
            try:
                Site(**kwargs)
                accepted = True
            except InputError as err:
                accepted = False
                assert err.field == f"site.{key}"
            assert accepted is ok


@pytest.mark.parametrize("argv, option", [
    (["bins", "--coherent-ms", "1", "--max-loss-db", "1", "--span-hz", "-1e12,1e12"], "--span-hz"),
    (["bins", "--coherent-ms", "1", "--max-loss-db", "1", "--span-hz", "-inf,5"], "--span-hz"),
    (["bins", "--coherent-ms", "0.5", "--max-loss-db", "1"], "--coherent-ms"),
])
def test_bins_errors_name_the_option_not_the_parameter(capsys, argv, option):
    code, _, err = _run(capsys, argv)
    assert code == 2 and option in err
    for internal in ("coherent_s", "low_hz", "high_hz", "span_hz", "max_loss_db"):
        assert internal not in err


def test_a_code_step_too_wide_for_boc_names_the_scenario_key(capsys, demo_dir, tmp_path):
    # BOC(1,1) main peak half-width 1/3 chip (core.search.codephase): a 0.8 chip step puts
    # half a step beyond it. The message names the key the user typed, not the core's
    # parameter ('step_chips').
    import os

    text = (demo_dir / "demo_scenario.toml").read_text()
    assert "code_step_chips = 0.5" in text
    for n in os.listdir(demo_dir):
        (tmp_path / n).write_bytes((demo_dir / n).read_bytes())
    p = tmp_path / "demo_scenario.toml"
    p.write_text(text.replace("code_step_chips = 0.5", "code_step_chips = 0.8"))
    assert main(["plan", str(p)]) == 2
    err = capsys.readouterr().err
    assert "field 'search.code_step_chips'" in err and "GAL-E1" in err
    assert "field 'step_chips'" not in err

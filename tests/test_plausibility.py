"""Implausible orbit records never reach a plan: per-system physical ranges in the readers.

Each case the issue saw (two almanac values swapped, SQRT(A) 1e30, a rate of right
ascension of 1e300, eccentricity 0.9999999999, an impossible TLE mean motion) must end as
exit 2 with one line naming file, record and field, or, with --skip-bad-records, as a
warning and the satellite dropped. The limits must let every real file in orbit-data
through untouched.
"""

from __future__ import annotations

import math
import re
from datetime import UTC, datetime

import pytest
from conftest import requires_orbit_data

from core.ground.errors import OrbitFormatError
from core.orbits.plausibility import RecordScreen, check_elements, limits_for, shell_of
from core.orbits.readers import load_orbits, parse_sem, parse_tle, parse_yuma
from planner_gui.cli import main

REF = datetime(2022, 1, 1, tzinfo=UTC)

# Invented almanac record (fictional values; 0.31 semicircles inclination) [calc].
_FIELDS = {
    "Eccentricity": "0.1000000000E-001",
    "Time of Applicability(s)": "405504.0000",
    "Orbital Inclination(rad)": "0.9738937226",
    "Rate of Right Ascen(r/s)": "-0.2513274123E-008",
    "SQRT(A)  (m 1/2)": "5153.600000",
    "Right Ascen at Week(rad)": "0.1570796327E+001",
    "Argument of Perigee(rad)": "-0.785398163",
    "Mean Anom(rad)": "0.3141592654E+000",
    "Af0(s)": "0.1000000000E-003",
    "Af1(s/s)": "-0.1000000000E-010",
}


def yuma(prn: int, week: int = 105, header_week: int | None = None, **changes: str) -> str:
    fields = dict(_FIELDS)
    for k, v in changes.items():
        label = next(f for f in fields if f.lower().startswith(k.lower().replace("_", " ")))
        fields[label] = v
    lines = [f"******** Week {header_week if header_week is not None else week} almanac for "
             f"PRN-{prn:02d} ********", f"ID:                         {prn:02d}",
             "Health:                     000"]
    lines += [f"{k + ':':<28}{v}" for k, v in fields.items()]
    lines.append(f"week:                        {week}")
    return "\n".join(lines) + "\n\n"


def two_sats(**bad: str) -> str:
    return yuma(3) + yuma(7, **bad)


SEEN = [
    # (field changed, value, field named in the message) -- the "Seen" list.
    ("SQRT(A)", "1.0E+030", "SQRT(A)"),
    ("Rate of Right Ascen", "1.0E+300", "Rate of Right Ascen"),
    ("Eccentricity", "0.9999999999", "Eccentricity"),
    # Swapped: right ascension (1.57 rad) read as the rate, the rate as the right ascension.
    ("Rate of Right Ascen", "0.1570796327E+001", "Rate of Right Ascen"),
    ("Orbital Inclination", "3.0", "Orbital Inclination"),
    ("Af0", "0.5", "Af0"),
]


@pytest.mark.parametrize("label, value, field", SEEN, ids=[f"{c[0]}={c[1]}" for c in SEEN])
def test_implausible_yuma_record_stops_strict_reading(label, value, field):
    with pytest.raises(OrbitFormatError) as err:
        parse_yuma(two_sats(**{label: value}), "bad.alm", REF)
    e = err.value
    assert e.file == "bad.alm" and e.field == field
    # The line of the offending value: header at line 16, field lines follow in order [calc].
    text = two_sats(**{label: value}).split("\n")
    assert text[e.line - 1].lower().startswith(label.lower())
    msg = str(e)
    assert "\n" not in msg and "PRN-07" in msg and "GPS" in msg


@pytest.mark.parametrize("label, value, field", SEEN, ids=[f"{c[0]}={c[1]}" for c in SEEN])
def test_implausible_yuma_record_is_dropped_with_a_warning(label, value, field):
    s = parse_yuma(two_sats(**{label: value}), "bad.alm", REF, strict=False)
    assert s.ids == ["G03"]
    warn = [w for w in s.warnings if "dropped" in w]
    assert len(warn) == 1 and "bad.alm" in warn[0] and f"field '{field}'" in warn[0]
    assert "PRN-07" in warn[0]


def test_sem_record_out_of_range_names_its_column():
    # SEM: sqrt(A) is the first value of the second number line [pub: ICD-GPS-240 30-III].
    text = ("2  INVENTED.ALM\n 105 405504\n\n7\n99\n0\n"
            " 1.0E-02  1.0E-02 -8.0E-10\n 1.0E+30  5.0E-01 -2.5E-01\n 1.0E-01  1.0E-04 -1.0E-11\n"
            "0\n9\n\n8\n98\n0\n"
            " 1.0E-02  1.0E-02 -8.0E-10\n 5153.6  5.0E-01 -2.5E-01\n 1.0E-01  1.0E-04 -1.0E-11\n"
            "0\n9\n")
    with pytest.raises(OrbitFormatError) as err:
        parse_sem(text, "bad.al3", REF)
    assert err.value.line == 8 and err.value.field == "sqrt_a" and "PRN-07" in str(err.value)
    s = parse_sem(text, "bad.al3", REF, strict=False)
    assert s.ids == ["G08"] and any("line 8" in w and "dropped" in w for w in s.warnings)


# A TLE line pair with a modulo-10 checksum recomputed after editing [pub: CelesTrak format].
def _with_checksum(line: str) -> str:
    total = sum(int(c) if c.isdigit() else 1 if c == "-" else 0 for c in line[:68])
    return line[:68] + str(total % 10)


# Shaped like a GPS IIR element set (invented values); mean motion in columns 53-63
# [pub: CelesTrak TLE format].
_L1 = "1 24876U 97035A   16084.84416636  .00000015  00000-0  00000+0 0  9995"
_L2 = "2 24876  55.5074 244.3567 0037911  59.7367 300.6491  2.00562374138963"


@pytest.mark.parametrize("mean_motion, ok", [("2.00562374", True), ("15.0000000", False),
                                              ("1.00270000", False)])
def test_tle_mean_motion_outside_the_gps_shell(mean_motion, ok):
    l2 = _with_checksum(_L2[:52] + f"{mean_motion:>11}" + _L2[63:])
    text = f"GPS BIIR-2  (PRN 13)\n{_with_checksum(_L1)}\n{l2}\n"
    if ok:
        assert parse_tle(text, "g.tle").ids == ["G13"]
        return
    with pytest.raises(OrbitFormatError) as err:
        parse_tle(text, "g.tle")
    assert err.value.line == 3 and err.value.field == "line 2 mean motion"
    assert "rev/day" in str(err.value) and "GPS" in str(err.value)
    good = (f"GPS BIIR-3  (PRN 11)\n{_with_checksum(_L1.replace('24876', '24877'))}\n"
            f"{_with_checksum(_L2.replace('24876', '24877'))}\n")
    s = parse_tle(good + text, "g.tle", strict=False)
    assert s.ids == ["G11"]
    assert any("line 6, field 'line 2 mean motion'" in w and "dropped" in w for w in s.warnings)


def test_limits_are_the_icd_field_ranges():
    lim = limits_for("G", "almanac")
    # af0: 11-bit signed field at 2^-20 s -> +-2^-10 s = 9.765625e-4 s [mem: IS-GPS-200
    # Table 20-VI; calc]; af1: 11 bits at 2^-38 s/s -> +-3.7252903e-9 s/s.
    assert lim["clock_bias_s"].high == pytest.approx(9.765625e-4, rel=1e-12)
    assert lim["clock_drift_s_s"].high == pytest.approx(3.7252903e-9, rel=1e-7)
    # e: 16 bits at 2^-21 -> below 0.03125 [calc]; i = 0.30 +- 0.0625 sc = 42.75..65.25 deg.
    assert lim["eccentricity"].high == 0.03125
    assert math.degrees(lim["inclination_rad"].low) == pytest.approx(42.75)
    assert math.degrees(lim["inclination_rad"].high) == pytest.approx(65.25)
    # Rate of right ascension: the GPS J2 regression is about -8e-9 rad/s
    # [calc: 1.5 n J2 (Re/a)^2 cos 55 deg at a = 26,560 km]; the limit sits far above
    # it and far below the swapped value (radians, order 1).
    assert 3e-8 < lim["node_rate_rad_s"].high < 1e-7
    # GLONASS period band 43,200 +- 3,600 s -> a 25,110..28,050 km [calc: Kepler's third law].
    r = shell_of("R")
    assert r.a_min_m == pytest.approx(25.11e6, rel=1e-3) and r.a_max_m == pytest.approx(28.05e6, rel=1e-3)


def test_geosynchronous_radius():
    # a = (mu / omega_E^2)^(1/3) = 42,164.17 km [pub: the geostationary radius, e.g. Vallado].
    assert shell_of("S").a_bands_m[0][0] + 1e6 == pytest.approx(42_164.17e3, abs=50.0)


def test_not_finite_values_are_findings():
    f = check_elements("G", {"eccentricity": float("nan"), "semi_major_axis_m": float("inf")})
    assert {x.quantity for x in f} == {"eccentricity", "semi_major_axis_m"}
    assert all("not a finite number" in x.describe() for x in f)


def test_record_screen_reports_the_users_field_name():
    scr = RecordScreen("f.rnx", strict=False)
    ok = scr.keep("E", {"sqrt_a_m05": 5440.6, "eccentricity": 0.5}, {"eccentricity": "e"},
                  record="E11 at 2023-03-14T00:00Z", line=12, kind="ephemeris")
    assert not ok and scr.dropped == ["E11 at 2023-03-14T00:00Z"]
    assert re.match(r"f\.rnx: line 12, field 'e': E11 at .*Galileo.*record dropped$", scr.warnings[0])


# ---------------------------------------------------------------- command line

def _cli(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


@pytest.mark.parametrize("label, value, field", SEEN[:4], ids=[f"{c[0]}={c[1]}" for c in SEEN[:4]])
def test_doppler_on_an_implausible_almanac(tmp_path, capsys, label, value, field):
    p = tmp_path / "bad.alm"
    p.write_text(two_sats(**{label: value}))
    args = ["doppler", "--orbits", str(p), "--site", "47.0,8.0,400", "--start",
            "2021-04-15T00:00:00Z", "--end", "2021-04-15T01:00:00Z", "--step", "600",
            "--all-elevations"]
    code, out, err = _cli(capsys, *args)
    assert code == 2 and out == ""
    assert err.count("\n") == 1 and str(p) in err and f"field '{field}'" in err and "PRN-07" in err
    code, out, err = _cli(capsys, *args, "--skip-bad-records", "--format", "csv")
    assert code == 0
    assert "G03" in out and "G07" not in out
    assert "PRN-07" in err and "dropped" in err


# ---------------------------------------------------------------- real data

@requires_orbit_data
def test_every_real_file_passes_the_plausibility_check(orbit_data):
    not_orbit = {"rtklib_prn_name.txt", "rtklib_TLE_GNSS_SATNO.txt", "sgp4_tcppver.out"}
    seen = 0
    for folder in ("yuma", "sem", "tle"):
        for p in sorted((orbit_data / folder).iterdir()):
            if p.name in not_orbit:
                continue
            # SGP4-VER holds 3 records with bad checksums on purpose [pub: README]:
            # read it leniently; no record anywhere may be dropped as implausible.
            s = load_orbits(p, reference_time=REF, strict=not p.name.startswith("sgp4_"))
            assert not any("outside the plausible range" in w for w in s.warnings), p.name
            seen += 1
    assert seen == 19


@requires_orbit_data
def test_real_almanac_with_two_values_swapped(orbit_data, tmp_path):
    # The case: right ascension and its rate swapped in one record of a real file.
    text = (orbit_data / "yuma/orekit_yuma_week862.txt").read_text()
    block = text.split("********")
    first = next(i for i, b in enumerate(block) if "Rate of Right Ascen" in b)
    rec = block[first]
    rate = re.search(r"Rate of Right Ascen\(r/s\):\s*(\S+)", rec).group(1)
    ra = re.search(r"Right Ascen at Week\(rad\):\s*(\S+)", rec).group(1)
    swapped = rec.replace(rate, "@R").replace(ra, rate).replace("@R", ra)
    block[first] = swapped
    p = tmp_path / "swapped.alm"
    p.write_text("********".join(block))
    ref = datetime(2016, 3, 1, tzinfo=UTC)
    with pytest.raises(OrbitFormatError) as err:
        load_orbits(p, ref)
    assert err.value.field == "Rate of Right Ascen" and "PRN-01" in str(err.value)
    s = load_orbits(p, ref, strict=False)
    assert "G01" not in s.ids and len(s) == 30

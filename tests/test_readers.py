"""Unit tests of the orbit-file readers on small invented files (no real data needed).

Sources of the expected values are noted beside each check:
[pub] a public document, [mem] recalled from the named standard, [calc] worked by hand here.
"""

from __future__ import annotations

import gzip
import math
from datetime import UTC, datetime, timedelta

import pytest

from core.ground.errors import InputError, OrbitFormatError
from core.orbits.readers import (
    detect_format,
    identify_tle,
    load_mapping,
    load_orbit_files,
    load_orbits,
    parse_mapping,
    parse_sem,
    parse_tle,
    parse_yuma,
)
from core.orbits.readers.tle import checksum

ICD_PI = 3.1415926535898          # [pub: IS-GPS-200 Table 20-IV, domain-notes section 1]


# ---------------------------------------------------------------- invented almanac

def _yuma_record(prn: int, week_text: str = "Week 105", health: str = "000",
                 ecc: str = "0.1000000000E-001", toa: str = "405504.0000",
                 inc: str = "0.9738937226", trailing: str = "", sqrt_a: str = "5153.600000") -> str:
    # Invented values (fictional almanac); inclination 0.31 semicircles = 0.9738937226 rad [calc].
    return (f"******** {week_text} almanac for PRN-{prn:02d} ********{trailing}\n"
            f"ID:                         {prn:02d}{trailing}\n"
            f"Health:                     {health}\n"
            f"Eccentricity:               {ecc}\n"
            f"Time of Applicability(s):  {toa}\n"
            f"Orbital Inclination(rad):   {inc}\n"
            f"Rate of Right Ascen(r/s):  -0.2513274123E-008\n"
            f"SQRT(A)  (m 1/2):           {sqrt_a}{trailing}\n"
            f"Right Ascen at Week(rad):   0.1570796327E+001\n"
            f"Argument of Perigee(rad):  -0.785398163\n"
            f"Mean Anom(rad):             0.3141592654E+000\n"
            f"Af0(s):                     0.1000000000E-003\n"
            f"Af1(s/s):                  -0.1000000000E-010\n"
            f"week:                        105\n\n")


# The same invented almanac in SEM form: angles in semicircles [pub: ICD-GPS-240 Table 30-III].
SEM_TEXT = """1  INVENTED.ALM
 105 405504

7
99
0
 1.00000000000000E-02  1.00000000000000E-02 -8.00000000000000E-10
 5.15360000000000E+03  5.00000000000000E-01 -2.50000000000000E-01
 1.00000000000000E-01  1.00000000000000E-04 -1.00000000000000E-11
0
9
"""


def test_yuma_fields_in_si_units():
    s = parse_yuma(_yuma_record(7), "inv.yuma", reference_time=datetime(2022, 1, 1, tzinfo=UTC))
    assert len(s) == 1
    e = s.entries[0]
    a = e.almanac
    assert e.sat_id == "G07" and e.info.system == "G" and e.info.prn == 7
    assert e.info.healthy and e.info.source_kind == "almanac"
    # YUMA angles are radians and the inclination is the full i0 [pub: domain-notes section 2].
    assert a.inclination_rad == pytest.approx(0.9738937226, abs=1e-12)
    assert a.eccentricity == pytest.approx(0.01, abs=1e-15)
    assert a.sqrt_a_m05 == 5153.6
    assert a.omega0_rad == pytest.approx(math.pi / 2, abs=1e-9)
    assert a.arg_perigee_rad == pytest.approx(-math.pi / 4, abs=1e-9)
    assert a.omega_dot_rad_s == pytest.approx(-0.8e-9 * math.pi, rel=1e-9)
    assert a.af0_s == 1e-4 and a.af1_s_s == -1e-11
    assert a.week_raw == 105 and a.toa_s == 405504.0
    # Week 105 near 2022 is full week 2153 (105 + 2*1024) [calc: rollovers 1999, 2019 - gps.gov].
    assert a.week_full == 2153
    # Epoch = week 2153 (starts 2021-04-11) + 405504 s = 2021-04-15 16:38:24 GPS, minus
    # GPS-UTC 18 s [calc; pub: IERS leap-second list].
    gps0 = datetime(1980, 1, 6, tzinfo=UTC)
    want = gps0 + timedelta(weeks=2153, seconds=405504 - 18)
    assert e.info.epoch_unix_s == pytest.approx(want.timestamp(), abs=1e-6)


def test_yuma_header_tolerance_two_spaces_trailing_blanks_crlf_and_exponents():
    text = _yuma_record(3, week_text="Week  105", trailing="   ", ecc="1.000000000E-02",
                        toa="405504.0000 ")
    text = text.replace("\n", "\r\n").replace("0.1000000000E-003", "0.1000000000D-003")
    s = parse_yuma(text, "tolerant.alm", reference_time=1.6e9)
    a = s.entries[0].almanac
    assert a.eccentricity == pytest.approx(0.01, abs=1e-15)   # 'E-02' exponent
    assert a.af0_s == pytest.approx(1e-4)                      # 'D' exponent (Fortran style)
    assert s.entries[0].sat_id == "G03"


def test_yuma_qzss_prns_become_j_ids():
    # QZSS L1 C/A PRN 193 -> J01, 199 -> J07 [mem: RINEX 3.04 satellite numbers: Jnn = PRN - 192].
    # sqrt(A) of a geosynchronous orbit, 6493.3 m^1/2 = 42,164 km [calc].
    text = _yuma_record(193, inc="0.7204137038", sqrt_a="6493.3") \
        + _yuma_record(199, inc="0.0007490141", sqrt_a="6493.3")
    s = parse_yuma(text, "q.alm", reference_time=1.6e9)
    assert s.ids == ["J01", "J07"]
    assert [e.info.system for e in s.entries] == ["J", "J"]
    assert [e.info.prn for e in s.entries] == [193, 199]
    assert s.entries[1].almanac.inclination_rad == pytest.approx(0.0007490141)


def test_sem_conversion_semicircles_and_inclination_reference():
    s = parse_sem(SEM_TEXT, "inv.al3", reference_time=datetime(2022, 1, 1, tzinfo=UTC))
    a = s.entries[0].almanac
    # i = (0.30 + delta_i) semicircles * pi [pub: ICD-GPS-240 Table 30-III].
    assert a.inclination_rad == pytest.approx((0.30 + 0.01) * ICD_PI, rel=1e-15)
    assert a.omega0_rad == pytest.approx(0.5 * ICD_PI, rel=1e-15)
    assert a.arg_perigee_rad == pytest.approx(-0.25 * ICD_PI, rel=1e-15)
    assert a.mean_anomaly_rad == pytest.approx(0.1 * ICD_PI, rel=1e-15)
    assert a.omega_dot_rad_s == pytest.approx(-8e-10 * ICD_PI, rel=1e-15)
    assert a.sqrt_a_m05 == 5153.6 and a.af0_s == 1e-4 and a.af1_s_s == -1e-11
    assert a.week_full == 2153 and a.toa_s == 405504.0


def test_sem_qzss_uses_quarter_semicircle_reference():
    # A QZSS record carries a geosynchronous sqrt(A), 6493.3 m^1/2 = 42,164 km [calc].
    text = SEM_TEXT.replace("\n7\n", "\n193\n").replace(" 5.15360000000000E+03", " 6.49330000000000E+03")
    a = parse_sem(text, "q.al3", reference_time=1.6e9).entries[0].almanac
    # QZSS almanac reference inclination 0.25 semicircles [pub: IS-QZSS-PNT, domain-notes 2].
    assert a.inclination_rad == pytest.approx((0.25 + 0.01) * ICD_PI, rel=1e-15)


def test_yuma_and_sem_of_the_same_invented_almanac_agree():
    ref = datetime(2022, 1, 1, tzinfo=UTC)
    y = parse_yuma(_yuma_record(7), "a.yuma", ref).entries[0]
    s = parse_sem(SEM_TEXT, "a.sem", ref).entries[0]
    assert y.sat_id == s.sat_id and y.info.epoch_unix_s == s.info.epoch_unix_s
    for f in ("eccentricity", "inclination_rad", "omega_dot_rad_s", "sqrt_a_m05", "omega0_rad",
              "arg_perigee_rad", "mean_anomaly_rad", "af0_s", "af1_s_s", "toa_s", "week_full"):
        # YUMA prints 10 significant digits: agreement to 1e-9 [calc].
        assert getattr(y.almanac, f) == pytest.approx(getattr(s.almanac, f), rel=1e-9, abs=1e-12), f


def test_unhealthy_satellites_are_kept_flagged_and_listed():
    text = _yuma_record(1) + _yuma_record(2, health="063") + _yuma_record(3)
    s = parse_yuma(text, "h.alm", reference_time=1.6e9)
    assert s.ids == ["G01", "G02", "G03"]
    g02 = s.entries[1].info
    assert not g02.healthy and g02.health_code == 63
    assert s.entries[0].info.healthy and s.entries[2].info.healthy
    assert any("G02" in w and "unhealthy" in w for w in s.warnings)


def test_without_reference_week_taken_as_written_and_warned():
    s = parse_yuma(_yuma_record(7), "noref.alm")
    assert s.entries[0].almanac.week_full == 105
    assert s.files[0].reference_unix_s is None and s.files[0].age_s is None
    warn = [w for w in s.warnings if "no reference time" in w]
    assert len(warn) == 1 and "2153" in warn[0]     # names the other eras [calc: 105 + 2048]


def test_reference_time_sets_age_and_accepts_datetime_or_seconds():
    ref = datetime(2021, 4, 20, tzinfo=UTC)
    a = parse_yuma(_yuma_record(7), "x", ref)
    b = parse_yuma(_yuma_record(7), "x", ref.timestamp())
    assert a.files[0] == b.files[0]
    info = a.files[0]
    assert info.format == "YUMA" and info.n_satellites == 1
    assert info.age_s == pytest.approx(ref.timestamp() - info.epoch_unix_s)
    # the almanac (2021-04-15 16:38:06 UTC) is 4 d 7 h 21 min 54 s older than the plan [calc]
    assert info.age_s == pytest.approx(4 * 86400 + 7 * 3600 + 21 * 60 + 54, abs=1e-6)
    with pytest.raises(InputError):
        parse_yuma(_yuma_record(7), "x", datetime(2021, 4, 20))      # naive: refused
    with pytest.raises(InputError):
        parse_yuma(_yuma_record(7), "x", float("nan"))


@pytest.mark.parametrize("drop, field", [("Eccentricity:", "Eccentricity"),
                                         ("Mean Anom(rad):", "Mean Anom"),
                                         ("Health:", "Health")])
def test_yuma_missing_field_names_field_and_line(drop, field):
    # drop the field from the first record only; the error points at that record's header
    first = _yuma_record(1)
    dropped = next(ln for ln in first.split("\n") if ln.startswith(drop))
    text = first.replace(dropped + "\n", "") + _yuma_record(2)
    with pytest.raises(OrbitFormatError) as err:
        parse_yuma(text, "miss.alm", 1.6e9)
    assert err.value.field == field and err.value.line == 1 and err.value.file == "miss.alm"


def test_yuma_bad_values_are_errors_with_line():
    bad_number = _yuma_record(1).replace("5153.600000", "5153.6x")
    with pytest.raises(OrbitFormatError) as err:
        parse_yuma(bad_number, "b.alm", 1.6e9)
    assert err.value.line == 8 and err.value.field == "SQRT(A)"
    bad_ecc = _yuma_record(1, ecc="1.5")
    with pytest.raises(OrbitFormatError, match="eccentricity"):
        parse_yuma(bad_ecc, "b.alm", 1.6e9)
    twice = _yuma_record(1).replace("week:", "Health: 000\nweek:")
    with pytest.raises(OrbitFormatError, match="twice"):
        parse_yuma(twice, "b.alm", 1.6e9)
    with pytest.raises(OrbitFormatError):
        parse_yuma(_yuma_record(1, ecc="nan"), "b.alm", 1.6e9)


def test_sem_truncated_record_names_missing_field():
    cut = SEM_TEXT.split("\n")
    text = "\n".join(cut[:8])            # stops after the sqrtA line
    with pytest.raises(OrbitFormatError) as err:
        parse_sem(text, "cut.al3", 1.6e9)
    assert err.value.field == "mean_anomaly" and err.value.line == 8


def test_sem_record_count_mismatch_is_a_warning():
    s = parse_sem(SEM_TEXT.replace("1  INVENTED", "2  INVENTED"), "c.al3", 1.6e9)
    assert len(s) == 1 and any("announces 2 records" in w for w in s.warnings)


# ---------------------------------------------------------------- TLE

# Example element set from the published format description
# [pub: CelesTrak "NORAD Two-Line Element Set Format" (ISS example), also Wikipedia "Two-line element set"].
ISS = ("ISS (ZARYA)",
       "1 25544U 98067A   08264.51782528 -.00002182  00000-0 -11606-4 0  2927",
       "2 25544  51.6416 247.4627 0006703 130.5360 325.0288 15.72125391563537")


def _cs(line68: str) -> str:
    """Append the TLE checksum: sum of digits, '-' = 1, modulo 10 [pub: CelesTrak format]."""
    assert len(line68) == 68
    total = sum(int(c) if c.isdigit() else (1 if c == "-" else 0) for c in line68)
    return line68 + str(total % 10)


def _glonass_tle(cat: int, name: str | None = "COSMOS 9999 (799)") -> str:
    # Invented GLONASS-like elements: 64.8 deg, 2.1314 rev/day [mem: GLONASS ICD 5.1].
    l1 = _cs(f"1 {cat:05d}U 20001A   20092.50000000 -.00000040  00000-0  10000-3 0  999")
    l2 = _cs(f"2 {cat:05d}  64.8000 270.0000 0010000 100.0000 260.0000  2.13140000 1000")
    return (f"{name}\n" if name else "") + l1 + "\n" + l2 + "\n"


def test_checksum_rule():
    # Published example lines end in checksum 7 and 7 [pub: CelesTrak ISS example].
    assert checksum(ISS[1]) == 7 and checksum(ISS[2]) == 7
    # '-' counts one, letters, '.', '+' and spaces count zero [pub: CelesTrak format].
    assert checksum("-" * 68) == 68 % 10
    assert checksum("+. AZ" * 13 + "abc") == 0


def test_tle_epoch_and_satrec_from_published_example():
    s = parse_tle("\n".join(ISS) + "\n", "iss.tle")
    e = s.entries[0]
    assert e.info.norad_id == 25544 and e.info.name == "ISS (ZARYA)"
    # Epoch 08264.51782528 = 2008 day 264 + 0.51782528 d, UTC [pub: CelesTrak format].
    want = datetime(2008, 1, 1, tzinfo=UTC) + timedelta(days=263.51782528)
    assert e.info.epoch_unix_s == pytest.approx(want.timestamp(), abs=1e-4)
    assert math.degrees(e.satrec.inclo) == pytest.approx(51.6416, abs=1e-9)
    assert e.tle_lines == (ISS[1], ISS[2])
    assert e.info.sat_id == "X-25544"           # no PRN in the name: fallback ID
    assert s.files[0].format == "TLE" and s.files[0].epoch_unix_s == e.info.epoch_unix_s


def test_tle_two_and_three_line_forms_mixed_with_crlf_comments_and_extra_columns():
    text = ("# a comment line\r\n"
            f"{ISS[0]}   \r\n{ISS[1]}  \r\n{ISS[2]}      0.00   1440.0   360.00\r\n"
            "\r\n" + _glonass_tle(40001, name=None).replace("\n", "\r\n")
            + "0 GPS BIIR-2  (PRN 13)\r\n" + _glonass_tle(24876, name=None))
    s = parse_tle(text, "mixed.tle")
    # A two-line record has no name, so its system is unknown (X) even on a GLONASS-like orbit.
    assert s.ids == ["X-25544", "X-40001", "G13"]
    assert s.entries[1].info.name == "NORAD 40001"
    assert s.entries[0].tle_lines[1] == ISS[2]              # columns after 69 dropped
    assert s.entries[2].info.name == "GPS BIIR-2  (PRN 13)"  # Space-Track '0 ' prefix removed


def test_tle_checksum_error_names_line_and_field():
    bad = ISS[2][:60] + ("0" if ISS[2][60] != "0" else "1") + ISS[2][61:]
    text = "\n".join((ISS[0], ISS[1], bad)) + "\n"
    with pytest.raises(OrbitFormatError) as err:
        parse_tle(text, "bad.tle")
    assert err.value.line == 3 and err.value.field == "checksum"
    assert "line 3" in str(err.value) and "checksum" in str(err.value)


def test_tle_not_strict_skips_bad_record_with_warning():
    bad = ISS[1][:20] + "9" + ISS[1][21:]
    text = "\n".join((ISS[0], bad, ISS[2])) + "\n" + _glonass_tle(40001)
    s = parse_tle(text, "bad.tle", strict=False)
    assert len(s) == 1 and s.entries[0].info.norad_id == 40001
    assert any("line 2" in w and "checksum" in w and "skipped" in w for w in s.warnings)


@pytest.mark.parametrize("text, field", [
    (ISS[1] + "\n", "line 2"),                           # line 1 alone
    (ISS[2] + "\n", "line 1"),                           # line 2 alone
    (ISS[1] + "\n" + _cs("2 25545" + ISS[2][7:68]) + "\n", "catalogue number"),
    ("NAME ONE\nNAME TWO\n" + ISS[1] + "\n" + ISS[2] + "\n", "line 1"),
    (ISS[1] + "\n" + ISS[2][:50] + "\n", "length"),
    (_cs(ISS[1][:18] + "08400.51782528" + ISS[1][32:68]) + "\n" + ISS[2] + "\n", "epoch"),
    (ISS[1] + "\n" + _cs(ISS[2][:8] + "191.6416" + ISS[2][16:68]) + "\n", "inclination"),
    (ISS[1] + "\n" + _cs(ISS[2][:26] + "00x6703" + ISS[2][33:68]) + "\n", "eccentricity"),
])
def test_tle_malformed_records(text, field):
    with pytest.raises(OrbitFormatError) as err:
        parse_tle(text, "m.tle")
    assert err.value.field == field and err.value.line is not None


def test_tle_without_any_record_is_an_error():
    with pytest.raises(OrbitFormatError, match="no usable TLE"):
        parse_tle("# nothing\n\n", "empty.tle")


# ---------------------------------------------------------------- identity

@pytest.mark.parametrize("name, sat_id, system, prn", [
    # CelesTrak style names [pub: the perylune / satkml / Orekit sample files]
    ("GPS BIIR-2  (PRN 13)", "G13", "G", 13),
    ("GSAT0101 (PRN E11)", "E11", "E", 11),
    ("BEIDOU 3 (C01)", "C01", "C", 1),
    ("BEIDOU-3 M1 (C19)", "C19", "C", 19),
    # RTKLIB names that already are IDs, spares keep their suffix [pub: RTKLIB TLE_GNSS file]
    ("G32", "G32", "G", 32), ("R14S", "R14S", "R", 14), ("R22M", "R22M", "R", 22),
    ("C02", "C02", "C", 2), ("J01", "J01", "J", 193), ("E11", "E11", "E", 11),
    ("C02 # Beidou G6", "C02", "C", 2),
    # SBAS written as a plain PRN: S = PRN - 100 [mem: RINEX 3.04 satellite numbers]
    ("120", "S20", "S", 120), ("138", "S38", "S", 138),
    # QZSS: C/A PRN 193 -> J01; L1S PRN 183 belongs to QZS-1, whose C/A PRN is 193
    # [mem: IS-QZSS-PNT PRN table, L1S = C/A - 10]
    ("QZS-1 (QZSS/PRN 183)", "J01", "J", 193),
    ("QZS-1 (QZSS/PRN 193)", "J01", "J", 193),
    ("QZS-3 (QZSS/PRN 189)", "J07", "J", 199),
    # No PRN: stable fallback from the catalogue number (module docstring scheme)
    ("COSMOS 2426 (717)", "R-32393", "R", None),
    ("COSMOS 2394 (GLONASS)", "R-32393", "R", None),
    ("NAVSTAR 43 (USA 132)", "G-32393", "G", None),
    ("BEIDOU-2 G8", "C-32393", "C", None),
    ("HIPPARCOS", "X-32393", "X", None),
    ("", "X-32393", "X", None),
])
def test_identity_from_names(name, sat_id, system, prn):
    ident = identify_tle(name, 32393)
    assert (ident.sat_id, ident.system, ident.prn) == (sat_id, system, prn)


def test_cosmos_counts_as_glonass_only_on_a_glonass_orbit():
    # GLONASS: 2.13 rev/day, 64.8 deg [mem: GLONASS ICD 5.1]; Parus/Tsikada ~13.7 rev/day, 83 deg.
    assert identify_tle("COSMOS 2534 (758)", 44299, mean_motion_rev_day=2.1314,
                        inclination_deg=64.8).system == "R"
    assert identify_tle("COSMOS 2074", 20577, mean_motion_rev_day=13.74,
                        inclination_deg=83.0).sat_id == "X-20577"


# ---------------------------------------------------------------- mapping

MAPPING_TEXT = """# invented channel list
norad,id,k
32393, R07, 5
40001 R08 -7    # whitespace separated
24876, g13
"""


def test_mapping_parse_and_header():
    m = parse_mapping(MAPPING_TEXT, "map.txt")
    assert m == {32393: ("R07", 5), 40001: ("R08", -7), 24876: ("G13", None)}


@pytest.mark.parametrize("line, field", [
    ("32393, R7X9, 5", "sat_id"),
    ("32393, R07, 7", "glonass_k"),         # k runs -7..+6 [mem: GLONASS ICD 5.1]
    ("32393, G07, 1", "glonass_k"),         # k only for GLONASS
    ("R07, 32393", "catalogue_number"),
    ("32393", "line"),
    ("32393, R07, 5, 9", "line"),
])
def test_mapping_errors_name_file_line_field(line, field):
    with pytest.raises(OrbitFormatError) as err:
        parse_mapping("# head\n" + line + "\n", "m.txt")
    assert (err.value.file, err.value.line, err.value.field) == ("m.txt", 2, field)


def test_mapping_duplicate_catalogue_number():
    with pytest.raises(OrbitFormatError) as err:
        parse_mapping("1, G01\n1, G02\n", "d.txt")
    assert err.value.line == 2 and "line 1" in err.value.message


def test_mapping_overrides_tle_identity_and_sets_glonass_k(tmp_path):
    path = tmp_path / "map.txt"
    path.write_text(MAPPING_TEXT)
    text = _glonass_tle(32393) + _glonass_tle(40001) + _glonass_tle(40002)
    s = parse_tle(text, "g.tle", mapping=path)
    assert s.ids == ["R07", "R08", "R-40002"]
    assert [e.info.glonass_k for e in s.entries] == [5, -7, None]
    assert s.entries[0].info.prn == 7
    kw = [w for w in s.warnings if "channel k unknown" in w]
    assert len(kw) == 1 and "R-40002" in kw[0] and "R07" not in kw[0]
    assert load_mapping(path) == parse_mapping(MAPPING_TEXT)


def test_mapping_file_problems(tmp_path):
    with pytest.raises(OrbitFormatError, match="not found"):
        load_mapping(tmp_path / "none.txt")
    (tmp_path / "bin.txt").write_bytes(b"1,G01\x00")
    with pytest.raises(OrbitFormatError, match="binary"):
        load_mapping(tmp_path / "bin.txt")


# ---------------------------------------------------------------- load_orbits

def test_format_is_chosen_from_content_not_name(tmp_path):
    p = tmp_path / "looks_like.tle"
    p.write_text(_yuma_record(5))
    s = load_orbits(p, reference_time=1.6e9)
    assert s.files[0].format == "YUMA" and s.ids == ["G05"]
    q = tmp_path / "almanac.yuma"
    q.write_text(SEM_TEXT)
    assert load_orbits(q, 1.6e9).files[0].format == "SEM"
    r = tmp_path / "x.al3"
    r.write_text("\n".join(ISS) + "\n")
    assert load_orbits(r).files[0].format == "TLE"
    assert detect_format("hello\nworld\n") is None


def test_load_orbits_file_errors(tmp_path):
    cases = {
        "missing": None,
        "empty": b"",
        "blank": b"  \n\n",
        "binary": b"\x00\x01\x02abc",
        "gzip": gzip.compress(b"anything"),
        "unknown": b"just some text\nnothing here\n",
    }
    for name, data in cases.items():
        p = tmp_path / name
        if data is not None:
            p.write_bytes(data)
        with pytest.raises(OrbitFormatError) as err:
            load_orbits(p)
        assert err.value.file == str(p), name
    with pytest.raises(OrbitFormatError, match="folder"):
        load_orbits(tmp_path)


def test_tle_reference_time_fills_age(tmp_path):
    p = tmp_path / "iss.txt"
    p.write_text("\n".join(ISS) + "\n")
    ref = datetime(2008, 9, 21, 12, 25, 40, tzinfo=UTC)
    info = load_orbits(p, reference_time=ref).files[0]
    # 2008-09-21 12:25:40 - 2008-09-20 12:25:40.104 = 86399.896 s [calc].
    assert info.age_s == pytest.approx(86_399.896, abs=1e-2)


def test_load_orbit_files_merges_and_warns_once_about_glonass_k(tmp_path):
    a = tmp_path / "a.tle"
    b = tmp_path / "b.tle"
    a.write_text(_glonass_tle(40001) + "\n".join(ISS) + "\n")
    b.write_text(_glonass_tle(40002) + "\n".join(ISS) + "\n")
    s = load_orbit_files([a, b])
    assert s.ids == ["R-40001", "X-25544", "R-40002", "X-25544#2"]
    assert len(s.files) == 2
    kw = [w for w in s.warnings if "channel k unknown" in w]
    assert len(kw) == 1 and "R-40001" in kw[0] and "R-40002" in kw[0]
    with pytest.raises(InputError):
        load_orbit_files([])


def test_full_week_in_file_is_kept_whatever_the_reference():
    # A week >= 1024 is already a full week; no era is added [core.timeutil.resolve_week rule].
    text = _yuma_record(7, week_text="Week 2153").replace("week:                        105",
                                                          "week:                        2153")
    for ref in (None, 0.0, 2.0e9):
        s = parse_yuma(text, "full.alm", ref)
        assert s.entries[0].almanac.week_full == 2153 and s.entries[0].almanac.week_raw == 2153
        assert not any("no reference time" in w for w in s.warnings)


def test_yuma_unknown_label_ignored_with_one_warning():
    text = _yuma_record(7).replace("week:", "Extra Field(x):  12\nAnother: 3\nweek:")
    s = parse_yuma(text, "u.alm", 1.6e9)
    assert len(s) == 1
    warn = [w for w in s.warnings if "unknown YUMA labels" in w]
    assert len(warn) == 1 and "Extra Field(x)" in warn[0] and "Another" in warn[0]

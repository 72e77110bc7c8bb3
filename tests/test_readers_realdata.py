"""The readers on the real public orbit files in ../shared/orbit-data (read in place).

Expected counts, weeks and dates come from orbit-data/README.md ("Files", "Matched pairs",
"Oddities"), which records what each source library's file holds. Skips cleanly when the
folder is absent.
"""

from __future__ import annotations

import math
from collections import Counter
from datetime import UTC, datetime, timedelta

import pytest
from conftest import ORBIT_DATA, requires_orbit_data

from core.ground.errors import OrbitFormatError
from core.orbits.readers import load_orbit_files, load_orbits

pytestmark = [requires_orbit_data, pytest.mark.realdata]

GPS0 = datetime(1980, 1, 6, tzinfo=UTC)
# GPS - UTC in force at each almanac's date [pub: IERS Bulletin C leap-second list]:
# 14 s 2006-2008, 16 s from 2012-07, 17 s from 2015-07, 18 s from 2017.

# (file, reference near its real date, true full week, TOA s, GPS-UTC s, README date of TOA)
ROLLOVER_CASES = [
    ("yuma/gpstk_yuma377.txt", datetime(2006, 11, 14, tzinfo=UTC), 1401, 319488, 14,
     datetime(2006, 11, 15, 16, 44, 48, tzinfo=UTC)),
    ("sem/gpstk_sem387.txt", datetime(2007, 1, 25, tzinfo=UTC), 1411, 589824, 14,
     datetime(2007, 1, 27, 19, 50, 24, tzinfo=UTC)),
    ("yuma/gpstk_gps_almanac_week819.txt", datetime(2015, 5, 5, tzinfo=UTC), 1843, 319488, 16,
     datetime(2015, 5, 6, 16, 44, 48, tzinfo=UTC)),
    ("yuma/orekit_yuma_week862.txt", datetime(2016, 3, 1, tzinfo=UTC), 1886, 319488, 17,
     datetime(2016, 3, 2, 16, 44, 48, tzinfo=UTC)),
    ("sem/orekit_current_week862.al3", datetime(2016, 3, 1, tzinfo=UTC), 1886, 319488, 17,
     datetime(2016, 3, 2, 16, 44, 48, tzinfo=UTC)),
    ("yuma/orekit_20160331_week866.alm", datetime(2016, 3, 31, tzinfo=UTC), 1890, 589824, 17,
     datetime(2016, 4, 2, 19, 50, 24, tzinfo=UTC)),
    ("yuma/orekit_q2019034_qzss_week1015.alm", datetime(2019, 2, 3, tzinfo=UTC), 2039, 262144,
     18, datetime(2019, 2, 6, 0, 49, 4, tzinfo=UTC)),
    ("yuma/perylune_yuma_2019-11-29_week34.txt", datetime(2019, 11, 29, tzinfo=UTC), 2082,
     147456, 18, datetime(2019, 12, 2, 16, 57, 36, tzinfo=UTC)),
    ("sem/perylune_sem_2019-11-29_week34.txt", datetime(2019, 11, 29, tzinfo=UTC), 2082,
     147456, 18, datetime(2019, 12, 2, 16, 57, 36, tzinfo=UTC)),
    ("yuma/perylune_almanac.yuma.week0000.061440.txt", datetime(2019, 4, 7, tzinfo=UTC), 2048,
     61440, 18, datetime(2019, 4, 7, 17, 4, 0, tzinfo=UTC)),
]


@pytest.mark.parametrize("rel, ref, week_full, toa, leap, toa_gpst", ROLLOVER_CASES,
                         ids=[c[0].split("/")[1] for c in ROLLOVER_CASES])
def test_week_rollover_resolved_with_reference_near_real_date(rel, ref, week_full, toa, leap,
                                                              toa_gpst):
    s = load_orbits(ORBIT_DATA / rel, reference_time=ref)
    info = s.files[0]
    # True full weeks [pub: orbit-data/README.md "Files" table].
    assert info.week_full == week_full
    assert {e.almanac.week_full for e in s.entries} == {week_full}
    assert {e.almanac.toa_s for e in s.entries} == {float(toa)}
    # The README's GPST date of TOA equals week*604800 + toa from the GPS epoch [calc] ...
    assert GPS0 + timedelta(weeks=week_full, seconds=toa) == toa_gpst
    # ... and the epoch is that instant in UTC (GPS - UTC = leap) [pub: IERS leap list].
    want_utc = (toa_gpst - timedelta(seconds=leap)).timestamp()
    assert info.epoch_unix_s == pytest.approx(want_utc, abs=1e-6)
    assert info.reference_unix_s == ref.timestamp()
    assert info.age_s == pytest.approx(ref.timestamp() - want_utc, abs=1e-6)
    assert not any("no reference time" in w for w in s.warnings)


# (file, true full week [pub: README "Files"], week in the latest era before 2026-03-14,
# README date of TOA). In the latest era these land in 2026-2035 [pub: README "Oddities";
# 862 + 2048 = 2910, 2035-10 [calc]], i.e. after a 2026-03-14 plan.
OLD_ALMANACS = [
    ("yuma/gpstk_yuma377.txt", 1401, 2425, datetime(2006, 11, 15, 16, 44, 48, tzinfo=UTC)),
    ("sem/gpstk_sem387.txt", 1411, 2435, datetime(2007, 1, 27, 19, 50, 24, tzinfo=UTC)),
    ("yuma/gpstk_gps_almanac_week819.txt", 1843, 2867, datetime(2015, 5, 6, 16, 44, 48, tzinfo=UTC)),
    ("yuma/orekit_yuma_week862.txt", 1886, 2910, datetime(2016, 3, 2, 16, 44, 48, tzinfo=UTC)),
]


@pytest.mark.parametrize("rel, true_week, latest_week, toa_gpst", OLD_ALMANACS,
                         ids=[c[0].split("/")[1] for c in OLD_ALMANACS])
def test_old_almanac_is_never_placed_after_the_plan(rel, true_week, latest_week, toa_gpst):
    ref = datetime(2026, 3, 14, tzinfo=UTC)
    # The latest era would put the data after the plan, by far more than the 14-day lead
    # [calc: GPS week arithmetic] ...
    assert GPS0 + timedelta(weeks=latest_week) > ref + timedelta(days=14)
    s = load_orbits(ORBIT_DATA / rel, reference_time=ref)
    info = s.files[0]
    # ... so the data is placed in its true era, before the plan ...
    assert info.week_full == true_week
    # ... with its real age: the README date to the plan, in days (GPS - UTC <= 18 s) [calc].
    want_days = (ref - toa_gpst).total_seconds() / 86400.0
    assert info.age_s / 86400.0 == pytest.approx(want_days, abs=18.0 / 86400.0 + 1e-6)
    assert info.age_s > 0
    # The reference, not the computer clock, decides: a reference up to ~9 years off still
    # finds the right era [calc: 1024 weeks = 19.6 years].
    right = load_orbits(ORBIT_DATA / rel, reference_time=datetime(2012, 1, 1, tzinfo=UTC))
    assert right.files[0].week_full in (true_week, true_week - 1024)
    assert right.files[0].week_full == (true_week if toa_gpst.year < 2012 else true_week - 1024)


def test_no_reference_takes_week_as_written_and_warns(orbit_data):
    s = load_orbits(orbit_data / "yuma/orekit_yuma_week862.txt")
    assert s.files[0].week_full == 862 and s.files[0].age_s is None
    assert any("no reference time" in w and "1886" in w for w in s.warnings)


# ---------------------------------------------------------------- YUMA <-> SEM

MATCHED = [("yuma/orekit_yuma_week862.txt", "sem/orekit_current_week862.al3",
            datetime(2016, 3, 1, tzinfo=UTC)),
           ("yuma/perylune_yuma_2019-11-29_week34.txt", "sem/perylune_sem_2019-11-29_week34.txt",
            datetime(2019, 11, 29, tzinfo=UTC))]

# Tolerances from the print precision of the YUMA files [pub: README "Matched pairs" 2:
# largest difference 4.7e-7, from rounding]: sqrt(A) has 6 decimals (<= 5e-7 m^0.5),
# angles 9-10 decimals (<= 5e-10 rad), the E-format values 10 significant digits (5e-10
# relative). Measured: sqrtA 4.69e-7, angles 4.97e-10 rad, others <= 4.4e-10 relative.
ABS_TOL = {"sqrt_a_m05": 5.0e-7, "inclination_rad": 1e-10, "omega0_rad": 1e-9,
           "arg_perigee_rad": 1e-9, "mean_anomaly_rad": 1e-9, "eccentricity": 1e-11}
REL_TOL = 1e-9


@pytest.mark.parametrize("yuma, sem, ref", MATCHED, ids=["orekit862", "perylune34"])
def test_yuma_and_sem_give_the_same_almanac(yuma, sem, ref):
    y = load_orbits(ORBIT_DATA / yuma, ref)
    s = load_orbits(ORBIT_DATA / sem, ref)
    assert y.ids == s.ids
    assert y.files[0].epoch_unix_s == s.files[0].epoch_unix_s
    for ey, es in zip(y.entries, s.entries):
        assert ey.info.health_code == es.info.health_code, ey.sat_id
        assert ey.info.epoch_unix_s == es.info.epoch_unix_s
        for f in ("eccentricity", "inclination_rad", "omega_dot_rad_s", "sqrt_a_m05",
                  "omega0_rad", "arg_perigee_rad", "mean_anomaly_rad", "af0_s", "af1_s_s"):
            vy, vs = getattr(ey.almanac, f), getattr(es.almanac, f)
            assert math.isclose(vy, vs, rel_tol=REL_TOL, abs_tol=ABS_TOL.get(f, 0.0)), \
                (ey.sat_id, f, vy, vs)
        assert ey.almanac.week_full == es.almanac.week_full
        assert ey.almanac.toa_s == es.almanac.toa_s


# ---------------------------------------------------------------- every file loads

def _gps(numbers):
    return [f"G{n:02d}" for n in numbers]


# Satellite lists [pub: README "Files" table; health from the files themselves].
ALMANACS = {
    "yuma/orekit_yuma_week862.txt": (_gps(n for n in range(1, 33) if n != 4), {"G13", "G32"}),
    "sem/orekit_current_week862.al3": (_gps(n for n in range(1, 33) if n != 4), {"G13", "G32"}),
    "yuma/orekit_20160331_week866.alm": (_gps(n for n in range(1, 33) if n != 4), set()),
    "yuma/orekit_q2019034_qzss_week1015.alm": (["J01", "J02", "J03", "J07"], set()),
    "yuma/gpstk_gps_almanac_week819.txt": (_gps(n for n in range(1, 33) if n != 8), set()),
    "yuma/gpstk_yuma377.txt": (_gps(n for n in range(1, 33) if n not in (12, 32)),
                               {"G05", "G15"}),
    "sem/gpstk_sem387.txt": (_gps(n for n in range(1, 33) if n not in (15, 32)), {"G04"}),
    "yuma/perylune_yuma_2019-11-29_week34.txt": (_gps(n for n in range(1, 33) if n != 18),
                                                 {"G04"}),
    "sem/perylune_sem_2019-11-29_week34.txt": (_gps(n for n in range(1, 33) if n != 18),
                                               {"G04"}),
}


@pytest.mark.parametrize("rel", sorted(ALMANACS))
def test_almanac_files_satellites_and_health(rel):
    ids, unhealthy = ALMANACS[rel]
    s = load_orbits(ORBIT_DATA / rel, reference_time=datetime(2016, 1, 1, tzinfo=UTC))
    assert sorted(s.ids) == sorted(ids)
    assert s.files[0].n_satellites == len(ids)
    assert {e.sat_id for e in s.entries if not e.info.healthy} == unhealthy
    for e in s.entries:
        if e.sat_id in unhealthy:
            assert e.info.health_code == 63       # "health 063" [pub: README]
        assert e.almanac is not None and e.satrec is None
    if unhealthy:
        assert any("unhealthy" in w and all(u in w for u in unhealthy) for w in s.warnings)


def test_perylune_week0_has_31_gps(orbit_data):
    s = load_orbits(orbit_data / "yuma/perylune_almanac.yuma.week0000.061440.txt",
                    datetime(2019, 4, 7, tzinfo=UTC))
    assert len(s) == 31 and {e.info.system for e in s.entries} == {"G"}   # [pub: README]


def test_every_real_almanac_and_tle_file_loads(orbit_data):
    not_orbit = {"rtklib_prn_name.txt", "rtklib_TLE_GNSS_SATNO.txt", "sgp4_tcppver.out"}
    seen = 0
    for folder in ("yuma", "sem", "tle"):
        for p in sorted((orbit_data / folder).iterdir()):
            if p.name in not_orbit:
                continue
            s = load_orbits(p, reference_time=datetime(2016, 1, 1, tzinfo=UTC), strict=False)
            assert len(s) > 0 and s.files[0].n_satellites == len(s)
            seen += 1
    assert seen == 19       # 7 YUMA + 3 SEM + 9 TLE sets in the README table


@pytest.mark.parametrize("name", ["tle/rtklib_prn_name.txt", "tle/rtklib_TLE_GNSS_SATNO.txt",
                                  "tle/sgp4_tcppver.out", "sp3/orekit_gbm18432.sp3.Z",
                                  "sp3/rtklib_igs15904.sp3", "eop/rtklib_igs17127.erp"])
def test_non_orbit_files_give_a_clean_error(name):
    with pytest.raises(OrbitFormatError) as err:
        load_orbits(ORBIT_DATA / name)
    assert err.value.file == str(ORBIT_DATA / name)


# TLE files: counts [pub: README "Files" table].
TLE_COUNTS = {
    "tle/orekit_3gps_2016-03-24.txt": 3,
    "tle/perylune_gps-ops_2020-04-01.txt": 31,
    "tle/perylune_galileo_2020-04-01.txt": 26,
    "tle/perylune_glo-ops_2020-04-01.txt": 25,
    "tle/perylune_beidou_2020-04-01.txt": 49,
    "tle/rtklib_TLE_GNSS_20121101.txt": 93,
    "tle/rtklib_tle_nav_2012-10-31.txt": 113,
    "tle/satkml_gps-ops_2014-10-29.txt": 31,
}


@pytest.mark.parametrize("rel", sorted(TLE_COUNTS))
def test_tle_files_counts_and_epochs(rel):
    s = load_orbits(ORBIT_DATA / rel)
    assert len(s) == TLE_COUNTS[rel]
    for e in s.entries:
        assert e.satrec is not None and e.satrec.error == 0
        assert e.info.norad_id == e.satrec.satnum
        # Epoch from the satrec equals the epoch columns of line 1 [pub: CelesTrak format].
        yy, day = int(e.tle_lines[0][18:20]), float(e.tle_lines[0][20:32])
        year = 2000 + yy if yy < 57 else 1900 + yy
        want = datetime(year, 1, 1, tzinfo=UTC) + timedelta(days=day - 1)
        assert e.info.epoch_unix_s == pytest.approx(want.timestamp(), abs=1e-3)


def test_rtklib_tle_ids(orbit_data):
    s = load_orbits(orbit_data / "tle/rtklib_TLE_GNSS_20121101.txt")
    counts = Counter(e.info.system for e in s.entries)
    # G01-G32, 31 GLONASS incl. spares, E11-E14, J01, 15 BeiDou, 10 SBAS [pub: README + file].
    assert counts == {"G": 32, "R": 31, "E": 4, "J": 1, "C": 15, "S": 10}
    ids = set(s.ids)
    assert set(_gps(range(1, 33))) <= ids
    assert {"R14S", "R22M", "R21T", "R02S", "E11", "E14", "J01", "C02", "C30"} <= ids
    # SBAS plain PRNs -> S = PRN - 100 [mem: RINEX 3.04 satellite numbers].
    assert {"S20", "S24", "S29", "S38", "S35", "S26", "S37", "S33", "S27", "S40"} <= ids
    # R17 is written twice (two catalogue numbers): the second kept as R17#2, with a warning.
    assert "R17#2" in ids and any("R17" in w and "line 192" in w for w in s.warnings)
    # '#C02' / '#1 34779...' is commented out and ignored; 'C02 # Beidou G6' (line 261) is the
    # live C02, catalogue 38953, epoch 2012-11-19 [pub: README "C02 2012-11-19"].
    c02 = next(e for e in s.entries if e.sat_id == "C02")
    assert c02.info.norad_id == 38953 and c02.tle_lines[0][18:32] == "12324.97714303"
    assert datetime.fromtimestamp(c02.info.epoch_unix_s, UTC).date().isoformat() == "2012-11-19"
    assert 34779 not in {e.info.norad_id for e in s.entries}
    # Its commented-out older elements (#1 38953 ... day 300) are not read.
    assert sum(1 for e in s.entries if e.info.norad_id == 38953) == 1


def test_celestrak_names(orbit_data):
    gal = load_orbits(orbit_data / "tle/perylune_galileo_2020-04-01.txt")
    assert {e.info.system for e in gal.entries} == {"E"}
    assert gal.entries[0].sat_id == "E11" and gal.entries[0].info.name == "GSAT0101 (PRN E11)"
    bds = load_orbits(orbit_data / "tle/perylune_beidou_2020-04-01.txt")
    assert {e.info.system for e in bds.entries} == {"C"}
    by_name = {e.info.name: e.sat_id for e in bds.entries}
    assert by_name["BEIDOU 3 (C01)"] == "C01" and by_name["BEIDOU-3 M1 (C19)"] == "C19"
    # Names without a PRN get the stable fallback from the catalogue number.
    fallback = {n: i for n, i in by_name.items() if "(" not in n}
    assert len(fallback) == 7 and all(i.startswith("C-") for i in fallback.values())
    gps = load_orbits(orbit_data / "tle/perylune_gps-ops_2020-04-01.txt")
    assert sorted(gps.ids) == _gps(n for n in range(1, 33) if n != 18)
    assert gps.entries[0].info.name == "GPS BIIR-2  (PRN 13)"     # trailing blanks trimmed
    glo = load_orbits(orbit_data / "tle/perylune_glo-ops_2020-04-01.txt")
    assert {e.info.system for e in glo.entries} == {"R"}
    assert all(e.info.glonass_k is None for e in glo.entries)
    kw = [w for w in glo.warnings if "channel k unknown" in w]
    assert len(kw) == 1 and "25 satellite" in kw[0]


def test_space_track_names(orbit_data):
    s = load_orbits(orbit_data / "tle/rtklib_tle_nav_2012-10-31.txt")
    by_name = {e.info.name: e for e in s.entries}
    assert by_name["NAVSTAR 43 (USA 132)"].sat_id == "G-24876"
    assert by_name["COSMOS 2394 (GLONASS)"].sat_id == "R-27617"
    # COSMOS 2074 is on a 13.7 rev/day, 83 deg orbit: not GLONASS -> unknown system.
    assert by_name["COSMOS 2074"].info.system == "X"
    assert by_name["HIPPARCOS"].info.system == "X"
    counts = Counter(e.info.system for e in s.entries)
    assert counts["G"] == sum(1 for n in by_name if n.startswith("NAVSTAR"))
    assert counts["R"] == sum(1 for n in by_name if "(GLONASS)" in n)


def test_mapping_applied_to_real_glonass_file(orbit_data, tmp_path):
    mp = tmp_path / "glo.map"
    # Invented assignment for the test: catalogue numbers from the file, IDs/k made up.
    mp.write_text("norad,id,k\n32393, R07, 5\n29671 R01 1\n")
    s = load_orbits(orbit_data / "tle/perylune_glo-ops_2020-04-01.txt", mapping=mp)
    by_cat = {e.info.norad_id: e for e in s.entries}
    assert by_cat[32393].sat_id == "R07" and by_cat[32393].info.glonass_k == 5
    assert by_cat[29671].sat_id == "R01" and by_cat[29671].info.glonass_k == 1
    kw = [w for w in s.warnings if "channel k unknown" in w]
    assert len(kw) == 1 and "23 satellite" in kw[0]


def test_sgp4_verification_file_checksum_policy(orbit_data):
    p = orbit_data / "tle/sgp4_SGP4-VER.TLE"
    # Strict (default): the first bad checksum (case 33333, line 100) stops loading.
    with pytest.raises(OrbitFormatError) as err:
        load_orbits(p)
    assert err.value.line == 100 and err.value.field == "checksum"
    # Not strict: the 3 bad cases are skipped [pub: README "Oddities": 3 bad checksums],
    # the other 30 of 33 load; extra columns after 69 are ignored.
    s = load_orbits(p, strict=False)
    assert len(s) == 30
    skipped = [w for w in s.warnings if "skipped" in w]
    assert len(skipped) == 3 and all("checksum" in w for w in skipped)
    assert {33333, 33334, 33335}.isdisjoint(e.info.norad_id for e in s.entries)
    assert all(len(e.tle_lines[1]) == 69 for e in s.entries)
    # 28129 is the GPS case, 2.0056 rev/day (12-hour orbit) [pub: README].
    gps = next(e for e in s.entries if e.info.norad_id == 28129)
    assert gps.satrec.no_kozai * 1440 / (2 * math.pi) == pytest.approx(2.00562768, abs=1e-8)


def test_merge_of_real_files(orbit_data):
    ref = datetime(2016, 3, 25, tzinfo=UTC)
    s = load_orbit_files([orbit_data / "yuma/orekit_20160331_week866.alm",
                          orbit_data / "tle/orekit_3gps_2016-03-24.txt"], reference_time=ref)
    assert len(s) == 31 + 3 and [f.format for f in s.files] == ["YUMA", "TLE"]
    # G13, G11, G20 are in both: the TLE copies get '#2' [OrbitSet.merge rule].
    assert {"G13#2", "G11#2", "G20#2"} <= set(s.ids)
    assert s.files[1].age_s == pytest.approx(ref.timestamp() - s.files[1].epoch_unix_s)


def test_a_record_repeating_another_satellites_orbit_is_dropped(orbit_data):
    # The real 2021-04-28 GPS broadcast file (orbit-data README) holds, at line 385, a G11
    # record whose toe and orbital elements equal the G10 record at line 377 (checked
    # here on the file's text itself: only the transmission time differs). Two
    # satellites cannot share one orbit: G11 is not planned on G10's orbit, and the
    # warning names both lines.
    path = orbit_data / "rinex-nav" / "gnsslibpy_brdc1180.21n"
    lines = path.read_text().splitlines()
    g10, g11 = lines[376:384], lines[384:392]
    assert g10[0].startswith("10 ") and g11[0].startswith("11 ")
    assert g10[0][3:] == g11[0][3:] and g10[1:7] == g11[1:7] and g10[7] != g11[7]
    orbits = load_orbit_files([str(path)], strict=True)
    ids = {e.info.sat_id for e in orbits.entries}
    assert "G10" in ids
    g11_lines = {r.line for e in orbits.entries if e.info.sat_id == "G11" for r in e.broadcast}
    assert 385 not in g11_lines
    [msg] = [w for w in orbits.warnings if "line 385" in w]
    assert "G11" in msg and "G10" in msg and "line 377" in msg and str(path) in msg

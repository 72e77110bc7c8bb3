"""The invented demo data in sample_almanacs/: formats, geometry, reproducibility.

Sources beside each check. The YUMA/SEM layouts are compared with real public files in
../shared/orbit-data (read in place; those checks skip when the folder is absent).
"""

from __future__ import annotations

import importlib.util
import math
import re
from datetime import UTC, date, datetime
from pathlib import Path
from zoneinfo import ZoneInfo

import numpy as np
import pytest
from conftest import ORBIT_DATA, requires_orbit_data
from sgp4.api import Satrec

from core.files import demo
from core.files.scenario import load_scenario

REPO = Path(__file__).resolve().parents[1]
SAMPLES = REPO / "sample_almanacs"

ICD_PI = 3.1415926535898            # [pub: IS-GPS-200 20.3.3.5.2.1, semicircle conversion]
GPS_MU = 3.986005e14                # [pub: IS-GPS-200 Table 20-IV]
OMEGA_E = 7.2921151467e-5           # [pub: IS-GPS-200 Table 20-IV]
WGS72_MU = 3.986008e14              # [pub: AIAA 2006-6753 Table 1, SGP4's WGS-72 constants]
CAMPAIGN_START = datetime(2027, 5, 18, 4, 0, tzinfo=UTC)
CAMPAIGN_END = datetime(2027, 5, 18, 6, 0, tzinfo=UTC)
TLE_FILES = ("demo_gps.tle", "demo_galileo.tle", "demo_beidou.tle", "demo_glonass.tle")


def _text(name: str) -> str:
    return (SAMPLES / name).read_text(encoding="utf-8")


def _triples(name: str) -> list[tuple[str, str, str]]:
    lines = _text(name).splitlines()
    assert len(lines) % 3 == 0
    return [tuple(lines[i:i + 3]) for i in range(0, len(lines), 3)]


def _checksum(line: str) -> int:
    # [pub: TLE format as documented by NORAD/CelesTrak: digits summed, minus signs count 1,
    # letters, spaces, '.' and '+' count 0, modulo 10]
    return sum(int(c) if c.isdigit() else (1 if c == "-" else 0) for c in line[:68]) % 10


def _tle_elements(l2: str) -> dict[str, float]:
    # Column positions [pub: TLE format, line 2: 9-16 i, 18-25 RAAN, 27-33 e, 35-42 omega,
    # 44-51 M, 53-63 mean motion rev/day]
    return {"i": float(l2[8:16]), "raan": float(l2[17:25]), "e": float("0." + l2[26:33]),
            "argp": float(l2[34:42]), "m": float(l2[43:51]), "n": float(l2[52:63])}


def _a_from_rev_day(n_rev_day: float) -> float:
    n = n_rev_day * 2 * math.pi / 86400.0
    return (WGS72_MU / n**2) ** (1 / 3)


# ---------------------------------------------------------------- minimal parsers (test side)

def parse_yuma_min(text: str) -> dict[int, dict[str, float]]:
    out: dict[int, dict[str, float]] = {}
    cur: dict[str, float] = {}
    for line in text.splitlines():
        if ":" not in line:
            continue
        label, value = line.split(":", 1)
        cur[label.strip()] = float(value)
        if label.strip() == "week":
            out[int(cur["ID"])] = cur
            cur = {}
    return out


def parse_sem_min(text: str) -> tuple[int, int, dict[int, dict[str, float]]]:
    lines = [ln for ln in text.splitlines()]
    week, toa = (int(x) for x in lines[1].split())
    recs: dict[int, dict[str, float]] = {}
    i = 2
    while i < len(lines):
        if not lines[i].strip():
            i += 1
            continue
        prn = int(lines[i])
        nums = [float(x) for ln in lines[i + 3:i + 6] for x in ln.split()]
        recs[prn] = dict(zip(("e", "di", "odot", "sqrta", "om0", "w", "m0", "af0", "af1"), nums))
        recs[prn]["health"] = int(lines[i + 6])
        i += 8
    return week, toa, recs


# ---------------------------------------------------------------- reproducibility

def test_regeneration_is_byte_identical(tmp_path):
    scenario = demo.write_demo(tmp_path)
    assert scenario == tmp_path / "demo_scenario.toml"
    generated = sorted(p.name for p in tmp_path.iterdir())
    committed = sorted(p.name for p in SAMPLES.iterdir())
    assert generated == committed
    for name in generated:
        assert (tmp_path / name).read_bytes() == (SAMPLES / name).read_bytes(), name


def test_generator_script_check_mode_passes():
    spec = importlib.util.spec_from_file_location("generate_demo", REPO / "scripts" / "generate_demo.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    assert mod.main(["--check", str(SAMPLES)]) == 0


def test_files_are_plain_lf_text():
    for p in SAMPLES.iterdir():
        data = p.read_bytes()
        assert b"\r" not in data and data.endswith(b"\n"), p.name
        data.decode("ascii")                      # nothing outside ASCII


def test_readme_says_invented():
    readme = _text("README.md")
    assert "INVENTED" in readme and "generate_demo.py" in readme


# ---------------------------------------------------------------- TLE form

def test_tle_columns_and_checksums():
    for name in TLE_FILES:
        triples = _triples(name)
        assert len(triples) == 24, name
        for title, l1, l2 in triples:
            assert l1.startswith("1 ") and l2.startswith("2 ")
            assert len(l1) == 69 and len(l2) == 69, (name, title)
            assert int(l1[68]) == _checksum(l1) and int(l2[68]) == _checksum(l2), title
            assert l1[2:7] == l2[2:7]
            assert 90_001 <= int(l1[2:7]) <= 90_324


@requires_orbit_data
def test_checksum_functions_agree_with_real_tles():
    # Real CelesTrak lines carry valid checksums [pub: perylune gps-ops file, see orbit-data README].
    lines = (ORBIT_DATA / "tle" / "perylune_gps-ops_2020-04-01.txt").read_text().splitlines()
    tle_lines = [ln.rstrip() for ln in lines if ln[:2] in ("1 ", "2 ")]
    assert len(tle_lines) >= 60
    for ln in tle_lines:
        assert _checksum(ln) == int(ln[68]) == demo.tle_checksum(ln)


def test_sgp4_accepts_every_tle_and_propagates_over_the_campaign():
    # Nominal radii: GPS 26,559.7 km [pub: SPS PS 2001 Table 3-1]; Galileo 29,600.318 km
    # [pub: Galileo OS SDD]; BeiDou MEO 27,906 km and GLONASS 25,508 km [mem]. Allowed spread:
    # the eccentricity (<= 0.01 GPS, <= 0.002 others) plus SGP4's short-period terms.
    nominal_km = {"demo_gps.tle": (26_559.7, 300.0), "demo_galileo.tle": (29_600.318, 40.0),
                  "demo_beidou.tle": (27_906.0, 60.0), "demo_glonass.tle": (25_508.0, 80.0)}
    t = CAMPAIGN_START.timestamp() + np.arange(0, 7201, 600.0)
    jd = 2440587.5 + np.floor(t / 86400.0)
    fr = (t - np.floor(t / 86400.0) * 86400.0) / 86400.0
    for name, (a_km, tol_km) in nominal_km.items():
        for title, l1, l2 in _triples(name):
            sat = Satrec.twoline2rv(l1, l2)
            assert sat.satnum == int(l1[2:7])
            err, r, _v = sat.sgp4_array(jd, fr)
            assert not err.any(), title
            radius = np.linalg.norm(r, axis=1)
            assert np.all(np.abs(radius - a_km) < tol_km), (title, radius.min(), radius.max())
            # Epoch no more than a day before the campaign [demo design].
            epoch = (sat.jdsatepoch - 2440587.5 + sat.jdsatepochF) * 86400.0
            assert 0 < CAMPAIGN_START.timestamp() - epoch < 86400.0


def test_tle_names_carry_the_ids_the_usual_way():
    for title, _, _ in _triples("demo_gps.tle"):
        assert re.fullmatch(r"DEMO GPS [A-F][1-4] \(PRN \d\d\)", title)
    for title, _, _ in _triples("demo_galileo.tle"):
        assert re.fullmatch(r"DEMO GALILEO [A-C][1-8] \(PRN E\d\d\)", title)
    for title, _, _ in _triples("demo_beidou.tle"):
        assert re.fullmatch(r"DEMO BEIDOU [A-C][1-8] \(C\d\d\)", title)
    for title, _, _ in _triples("demo_glonass.tle"):
        assert re.fullmatch(r"DEMO GLONASS UNIT \d{3}", title)   # no slot: the mapping gives it
    prns = [int(re.search(r"PRN (\d\d)", t).group(1)) for t, _, _ in _triples("demo_gps.tle")]
    assert sorted(prns) == list(range(1, 25))


# ---------------------------------------------------------------- constellation geometry

def _walker_check(name: str, a_km: float, incl_deg: float, slot_step_deg: float) -> None:
    els = [_tle_elements(l2) for _, _, l2 in _triples(name)]
    assert len(els) == 24
    for e in els:
        assert _a_from_rev_day(e["n"]) / 1e3 == pytest.approx(a_km, abs=0.01)
        assert e["i"] == pytest.approx(incl_deg, abs=0.15)
    raans = sorted({e["raan"] for e in els})
    assert len(raans) == 3
    assert np.allclose(np.diff(raans), 120.0, atol=1e-3)          # 3 planes, 120 deg apart
    for p, raan in enumerate(raans):
        u = sorted((e["argp"] + e["m"]) % 360.0 for e in els if e["raan"] == raan)
        assert len(u) == 8
        gaps = np.diff(u + [u[0] + 360.0])
        assert np.allclose(gaps, 45.0, atol=1e-3)                  # 8 slots, 45 deg apart
        if p == 0:
            phase0 = u[0] % 45.0
        # Walker t/p/f = 24/3/1: phase step f*360/t = 15 deg per plane [pub: Walker notation]
        shift = (u[0] % 45.0 - phase0) % 45.0
        assert shift == pytest.approx((15.0 * p) % 45.0, abs=1e-3)


def test_galileo_is_walker_24_3_1():
    # a = 29,600.318 km, i = 56 deg, Walker 24/3/1 [pub: Galileo OS SDD]
    _walker_check("demo_galileo.tle", 29_600.318, 56.0, 45.0)


def test_beidou_meo_is_walker_24_3_1():
    # a = 27,906 km, i = 55 deg [mem]
    _walker_check("demo_beidou.tle", 27_906.0, 55.0, 45.0)


def test_glonass_layout():
    # 3 planes x 8, a = 25,508 km, i = 64.8 deg, 15 deg between planes [mem: GLONASS ICD]
    _walker_check("demo_glonass.tle", 25_508.0, 64.8, 45.0)


def test_glonass_mapping_pairs_share_channels():
    rows = []
    for line in _text("demo_glonass_mapping.txt").splitlines():
        if line.strip() and not line.startswith("#"):
            cat, sid, k = (x.strip() for x in line.split(","))
            rows.append((int(cat), sid, int(k)))
    tle = {int(l1[2:7]): _tle_elements(l2) for _, l1, l2 in _triples("demo_glonass.tle")}
    assert sorted(c for c, _, _ in rows) == sorted(tle)
    assert sorted(s for _, s, _ in rows) == [f"R{n:02d}" for n in range(1, 25)]
    # Channel numbers -7..+6 [mem: GLONASS ICD 5.1, 3.3.1.1]; antipodal satellites (same
    # plane, 180 deg apart) share k, and each pair has its own k.
    assert all(-7 <= k <= 6 for _, _, k in rows)
    ks = {}
    for cat, _sid, k in rows:
        e = tle[cat]
        ks[cat] = (e["raan"], (e["argp"] + e["m"]) % 360.0, k)
    for c1, (r1, u1, k1) in ks.items():
        for c2, (r2, u2, k2) in ks.items():
            if c1 >= c2:
                continue
            antipodal = r1 == r2 and abs(((u1 - u2) % 360.0) - 180.0) < 1e-3
            assert (k1 == k2) == antipodal, (c1, c2)


def test_gps_almanac_follows_the_24_slot_table():
    # [pub: GPS SPS Performance Standard 2001, Table 3-1]: six planes 60 deg apart, and the
    # slots' arguments of latitude. All slots share one mean motion and node rate in the demo,
    # so differences of node and of mean argument of latitude keep the table's values.
    table_raan = {"A": 272.847, "B": 332.847, "C": 32.847, "D": 92.847, "E": 152.847, "F": 212.847}
    table_u = {"A": (268.126, 161.786, 11.676, 41.806), "B": (80.956, 173.336, 309.976, 204.376),
               "C": (111.876, 11.796, 339.666, 241.556), "D": (135.226, 265.446, 35.156, 167.356),
               "E": (197.046, 302.596, 66.066, 333.686), "F": (238.886, 345.226, 105.206, 135.346)}
    yuma = parse_yuma_min(_text("demo_gps_yuma.txt"))
    slot_of = {}
    for title, _, _ in _triples("demo_gps.tle"):
        m = re.fullmatch(r"DEMO GPS ([A-F])([1-4]) \(PRN (\d\d)\)", title)
        slot_of[int(m.group(3))] = (m.group(1), int(m.group(2)))
    ref_prn = next(p for p, s in slot_of.items() if s == ("A", 1))
    ref = yuma[ref_prn]

    def wrap(x):
        return (x + 180.0) % 360.0 - 180.0

    for prn, (plane, slot) in slot_of.items():
        r = yuma[prn]
        d_node = math.degrees(r["Right Ascen at Week(rad)"] - ref["Right Ascen at Week(rad)"])
        assert wrap(d_node - (table_raan[plane] - table_raan["A"])) == pytest.approx(0.0, abs=1e-4)
        u = math.degrees(r["Argument of Perigee(rad)"] + r["Mean Anom(rad)"])
        u_ref = math.degrees(ref["Argument of Perigee(rad)"] + ref["Mean Anom(rad)"])
        expected = table_u[plane][slot - 1] - table_u["A"][0]
        assert wrap(u - u_ref - expected) == pytest.approx(0.0, abs=1e-4), prn
        # a = 26,559.7 km, i = 55 deg [pub: same table]; the demo adds <= 0.5 km and <= 0.3 deg
        assert r["SQRT(A)  (m 1/2)"] ** 2 / 1e3 == pytest.approx(26_559.7, abs=1.0)
        assert math.degrees(r["Orbital Inclination(rad)"]) == pytest.approx(55.0, abs=0.31)
        assert 0.001 <= r["Eccentricity"] <= 0.01


def test_gps_week_and_toa():
    # Week 0 began 1980-01-06 [pub: IS-GPS-200]; 2027-05-18 is in week 2471 [calc], written
    # as 2471 mod 1024 = 423 in YUMA/SEM (10-bit weeks) [pub: ICD-GPS-240].
    week = (date(2027, 5, 18) - date(1980, 1, 6)).days // 7
    assert week == 2471
    yuma = parse_yuma_min(_text("demo_gps_yuma.txt"))
    assert {int(r["week"]) for r in yuma.values()} == {week % 1024}
    toa = {r["Time of Applicability(s)"] for r in yuma.values()}
    assert toa == {147_456.0} and 147_456 % 4096 == 0      # toa on the 2^12 s grid [mem: IS-GPS-200]
    sem_week, sem_toa, _ = parse_sem_min(_text("demo_gps_sem.txt"))
    assert (sem_week, sem_toa) == (week % 1024, 147_456)


# ---------------------------------------------------------------- YUMA and SEM

def test_yuma_and_sem_hold_the_same_almanac():
    # SEM angles are semicircles, i = (0.30 + delta_i) semicircles [pub: ICD-GPS-240
    # Table 30-III]; YUMA is radians with the full inclination. YUMA prints 10 significant
    # digits (fixed fields 6-10 decimals), so agreement is to that print resolution.
    yuma = parse_yuma_min(_text("demo_gps_yuma.txt"))
    _, _, sem = parse_sem_min(_text("demo_gps_sem.txt"))
    assert sorted(yuma) == sorted(sem) == list(range(1, 25))
    for prn, y in yuma.items():
        s = sem[prn]
        pairs = [
            (y["Eccentricity"], s["e"], 1e-12),
            (y["Orbital Inclination(rad)"], (0.30 + s["di"]) * ICD_PI, 6e-11),
            (y["Rate of Right Ascen(r/s)"], s["odot"] * ICD_PI, 1e-18),
            (y["SQRT(A)  (m 1/2)"], s["sqrta"], 6e-7),
            (y["Right Ascen at Week(rad)"], s["om0"] * ICD_PI, 5e-10),
            (y["Argument of Perigee(rad)"], s["w"] * ICD_PI, 6e-10),
            (y["Mean Anom(rad)"], s["m0"] * ICD_PI, 5e-10),
            (y["Af0(s)"], s["af0"], 1e-13),
            (y["Af1(s/s)"], s["af1"], 1e-20),
        ]
        for a, b, tol in pairs:
            assert abs(a - b) <= tol, (prn, a, b)
        assert y["Health"] == s["health"] == 0


@pytest.mark.skipif(importlib.util.find_spec("core.orbits.readers") is None
                    or not hasattr(importlib.import_module("core.orbits.readers"), "load_orbits"),
                    reason="core.orbits.readers.load_orbits is not available yet")
def test_project_readers_read_yuma_and_sem_alike():
    from core.orbits.readers import load_orbits

    ref = CAMPAIGN_START.timestamp()
    y = load_orbits(SAMPLES / "demo_gps_yuma.txt", ref)
    s = load_orbits(SAMPLES / "demo_gps_sem.txt", ref)
    assert y.ids == s.ids == [f"G{p:02d}" for p in range(1, 25)]
    for ey, es in zip(y.entries, s.entries):
        a, b = ey.almanac, es.almanac
        assert a.week_full == b.week_full == 2471 and a.toa_s == b.toa_s == 147_456.0
        for f in ("eccentricity", "inclination_rad", "omega0_rad", "arg_perigee_rad",
                  "mean_anomaly_rad", "sqrt_a_m05"):
            assert getattr(a, f) == pytest.approx(getattr(b, f), abs=1e-6), f
    mapping = SAMPLES / "demo_glonass_mapping.txt"
    g = load_orbits(SAMPLES / "demo_glonass.tle", ref, mapping=mapping)
    assert sorted(g.ids) == [f"R{n:02d}" for n in range(1, 25)]
    assert all(e.info.glonass_k is not None for e in g.entries)
    for name, letter in (("demo_galileo.tle", "E"), ("demo_beidou.tle", "C"), ("demo_gps.tle", "G")):
        ids = load_orbits(SAMPLES / name, ref).ids
        assert len(ids) == 24 and all(i[0] == letter and len(i) == 3 for i in ids), name


def _shape(value: str) -> str:
    return re.sub(r"\d", "d", value).replace("-", " ").replace("+", " ")


@requires_orbit_data
def test_yuma_layout_matches_a_public_yuma_file():
    # The public YUMA layout [pub: orbit-data/yuma/orekit_yuma_week862.txt, a real file]:
    # same labels, values in the same columns, same number shapes.
    real = (ORBIT_DATA / "yuma" / "orekit_yuma_week862.txt").read_text().splitlines()[:14]
    ours = _text("demo_gps_yuma.txt").splitlines()[:15]
    assert re.fullmatch(r"\*{8} Week \d+ almanac for PRN-\d\d \*{8}", real[0])
    assert re.fullmatch(r"\*{8} Week \d+ almanac for PRN-\d\d \*{8}", ours[0])
    for r, o in zip(real[1:13], ours[1:13]):
        r_label, o_label = r.split(":")[0], o.split(":")[0]
        assert r_label == o_label
        assert len(r) == len(o), (r, o)
        assert _shape(r) == _shape(o), (r, o)
    assert ours[13].startswith("week:" + " " * 24) and real[13].startswith("week:" + " " * 24)
    assert ours[14] == ""


@requires_orbit_data
def test_sem_layout_matches_a_public_sem_file():
    # [pub: orbit-data/sem/orekit_current_week862.al3, a real SEM file; ICD-GPS-240 Table 30-III]
    real = (ORBIT_DATA / "sem" / "orekit_current_week862.al3").read_text().splitlines()
    ours = _text("demo_gps_sem.txt").splitlines()
    assert re.fullmatch(r"\d+  \S+", real[0]) and re.fullmatch(r"\d+  \S+", ours[0])
    assert int(ours[0].split()[0]) == 24
    assert re.fullmatch(r" \d+ \d+", ours[1]) and re.fullmatch(r" \d+ \d+", real[1])
    # One record: blank, PRN, SVN, URA, 3 number lines, health, configuration.
    for lines in (real, ours):
        assert lines[2] == "" and lines[11] == ""
        for k in (3, 4, 5, 9, 10):
            assert re.fullmatch(r"\d+", lines[k])
    for k in (6, 7, 8):
        assert _shape(ours[k]) == _shape(real[k]), (ours[k], real[k])
    number_lines = [ln for ln in ours[2:] if "E" in ln]
    assert len(number_lines) == 72
    assert {_shape(ln) for ln in number_lines} == {_shape(real[6])}


# ---------------------------------------------------------------- YUMA and TLE agree

def _almanac_ecef(r: dict[str, float], t_gps_s: float, toa_gps_s: float) -> np.ndarray:
    """IS-GPS-200 Table 20-IV with the almanac simplifications [pub: IS-GPS-200 20.3.3.5.2.1]."""
    a = r["SQRT(A)  (m 1/2)"] ** 2
    e = r["Eccentricity"]
    n = math.sqrt(GPS_MU / a**3)
    tk = t_gps_s - toa_gps_s
    m = r["Mean Anom(rad)"] + n * tk
    ek = m
    for _ in range(30):
        ek = m + e * math.sin(ek)
    nu = math.atan2(math.sqrt(1 - e * e) * math.sin(ek), math.cos(ek) - e)
    u = nu + r["Argument of Perigee(rad)"]
    rad = a * (1 - e * math.cos(ek))
    om = (r["Right Ascen at Week(rad)"] + (r["Rate of Right Ascen(r/s)"] - OMEGA_E) * tk
          - OMEGA_E * r["Time of Applicability(s)"])
    i = r["Orbital Inclination(rad)"]
    x, y = rad * math.cos(u), rad * math.sin(u)
    return np.array([x * math.cos(om) - y * math.cos(i) * math.sin(om),
                     x * math.sin(om) + y * math.cos(i) * math.cos(om), y * math.sin(i)])


def test_gps_tle_and_yuma_describe_the_same_orbits():
    # The TLE through SGP4 and skyfield's TEME -> ITRS (reference libraries) against an
    # IS-GPS-200 almanac propagation of the YUMA file, 11-13 h after toa. SGP4 (Kozai mean
    # elements, J2 terms) and two-body Kepler drift apart by tens of km over that time; a
    # wrong node, week or sign would put them thousands of km apart.
    from skyfield.api import EarthSatellite, load
    from skyfield.framelib import itrs

    ts = load.timescale(builtin=True)
    yuma = parse_yuma_min(_text("demo_gps_yuma.txt"))
    toa_gps = 2471 * 604_800.0 + 147_456.0
    gps_minus_utc = 18.0                     # [pub: IERS Bulletin C, since 2017-01-01]
    worst = 0.0
    for title, l1, l2 in _triples("demo_gps.tle"):
        prn = int(re.search(r"PRN (\d\d)", title).group(1))
        sat = EarthSatellite(l1, l2, title, ts)
        for minutes in (0, 60, 120):
            when = CAMPAIGN_START.timestamp() + 60.0 * minutes
            t = ts.from_datetime(datetime.fromtimestamp(when, UTC))
            tle_m = sat.at(t).frame_xyz(itrs).m
            t_gps = when - 315_964_800.0 + gps_minus_utc
            alm_m = _almanac_ecef(yuma[prn], t_gps, toa_gps)
            worst = max(worst, float(np.linalg.norm(tle_m - alm_m)))
    assert worst < 100e3, worst


# ---------------------------------------------------------------- the scenario

def test_demo_scenario_loads_and_describes_the_campaign():
    sc = load_scenario(SAMPLES / "demo_scenario.toml")
    assert sc.missing_orbit_files() == []
    assert 47.0 <= sc.site.lat_deg <= 52.0
    assert sc.time.start == CAMPAIGN_START and sc.time.end == CAMPAIGN_END
    local = sc.time.start.astimezone(ZoneInfo(sc.time.timezone))
    assert local.year == 2027 and 5 <= local.hour < 10          # a morning window
    assert sc.receiver.signals == ("GPS-L1CA", "GAL-E1", "BDS-B1I", "GLO-L1OF")
    assert sc.receiver.channels == 12 and sc.receiver.oscillator_uncertainty_ppb == 500
    assert [p.name for p in sc.resolved_orbit_files()] == [
        "demo_gps_yuma.txt", "demo_galileo.tle", "demo_beidou.tle", "demo_glonass.tle"]
    assert sc.resolved_mapping().name == "demo_glonass_mapping.txt"
    # Galileo E1 code period 4 ms [pub: Galileo OS SIS ICD]: the coherent time is a multiple.
    assert sc.search.coherent_ms % 4 == 0
    # BeiDou B1I MEO: NH20 secondary code of 1 ms chips [pub: BeiDou B1I ICD] -> 1 ms override.
    assert sc.search.integration_for("BDS-B1I")[0] == 1.0
    assert sc.mask.elevation_deg == 10.0


def test_demo_written_elsewhere_loads(tmp_path):
    path = demo.write_demo(tmp_path / "new" / "demo")
    sc = load_scenario(path)
    assert all(p.parent == path.parent.resolve() for p in sc.resolved_orbit_files())


def test_enough_satellites_in_view_at_the_site():
    # skyfield (reference library) on the demo TLEs: each constellation shows at least
    # 4 satellites above the scenario's 10 deg mask during the whole window.
    from skyfield.api import EarthSatellite, load, wgs84

    ts = load.timescale(builtin=True)
    sc = load_scenario(SAMPLES / "demo_scenario.toml")
    site = wgs84.latlon(sc.site.lat_deg, sc.site.lon_deg, sc.site.height_m)
    t = ts.utc(2027, 5, 18, 4, np.arange(0, 121, 20))
    for name in TLE_FILES:
        count = np.zeros(len(t), dtype=int)
        for title, l1, l2 in _triples(name):
            alt = (EarthSatellite(l1, l2, title, ts) - site).at(t).altaz()[0].degrees
            count += alt > sc.mask.elevation_deg
        assert count.min() >= 4, (name, count)

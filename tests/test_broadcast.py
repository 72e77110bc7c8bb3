"""Broadcast ephemeris as an orbit source: RINEX navigation files in OrbitSets, the record
choice, compressed files, the broadcast models of each system against precise orbits and
the plan's record report.

Real files are read in place from ../shared/orbit-data (skipped without it). "README pair
N" refers to the "Matched pairs" of orbit-data/README.md.
"""

from __future__ import annotations

import gzip
import json

import numpy as np
import pytest

from core.ground.constants import SPEED_OF_LIGHT_M_S
from core.ground.errors import OrbitFormatError
from core.ground.geodesy import Site
from core.ground.timeutil import gps_to_unix_s
from core.orbits.broadcast import orbit_data_age_s, select_records
from core.orbits.orbit_set import OrbitSet
from core.orbits.readers import detect_format, load_orbits
from core.orbits.readers.compressed import expand
from core.orbits.readers.sp3 import interpolate_sp3, read_sp3
from core.sky.predict import predict, propagate_ecef
from tests.conftest import HAVE_ORBIT_DATA, ORBIT_DATA

realdata = pytest.mark.skipif(
    not HAVE_ORBIT_DATA,
    reason=f"real orbit files not found at {ORBIT_DATA} (the shared/orbit-data folder beside the repo)")

NAV = ORBIT_DATA / "rinex-nav"
SP3 = ORBIT_DATA / "sp3"
BRDC1180 = NAV / "gnsslibpy_brdc1180.21n"
BRDM = NAV / "gnsslibpy_BRDM00DLR_S_20230730000_01D_MN.rnx"
MGX = SP3 / "gnsslibpy_COD0MGXFIN_20211180000_01D_05M_ORB.SP3"
RAP = SP3 / "gnsslibpy_COD0OPSRAP_20230730000_01D_05M_ORB.SP3"
L1 = 1575.42e6


def ordered(orbits: OrbitSet, ids: list[str]) -> OrbitSet:
    by_id = {e.sat_id: e for e in orbits.entries}
    return OrbitSet([by_id[i] for i in ids])


def _los(pos, vel, site: Site):
    """Range (m), range rate (m/s) and elevation (deg) written out here independently:
    range rate = unit line of sight . velocity [trade]."""
    rho = pos - site.ecef_m
    rng = np.sqrt(np.sum(rho * rho, axis=-1))
    rr = np.sum(rho * vel, axis=-1) / rng
    lat, lon = np.radians(site.lat_deg), np.radians(site.lon_deg)
    up = np.array([np.cos(lat) * np.cos(lon), np.cos(lat) * np.sin(lon), np.sin(lat)])
    return rng, rr, np.degrees(np.arcsin(np.sum(rho * up, axis=-1) / rng))


SITES = (Site(78.0, 15.0), Site(37.4, -122.2), Site(0.0, -60.0), Site(-24.0, 134.0),
         Site(-45.0, 170.0), Site(52.0, 0.0))


def _los_errors(test: OrbitSet, unix_s, truth_pos, truth_vel):
    """|range error| (m), |range-rate error| (m/s) per system letter, satellites >= 5 deg."""
    out: dict[str, list] = {}
    for site in SITES:
        pred = predict(test, site, unix_s)
        rng, rr, el = _los(truth_pos, truth_vel, site)
        ok = pred.valid & np.isfinite(rng) & np.isfinite(rr) & (el >= 5.0)
        for s, e in enumerate(test.entries):
            m = ok[s]
            out.setdefault(e.info.system, []).append(
                (np.abs(pred.range_m[s, m] - rng[s, m]), np.abs(pred.range_rate_m_s[s, m] - rr[s, m])))
    return {k: (np.concatenate([a for a, _ in v]), np.concatenate([b for _, b in v]))
            for k, v in out.items()}


# ------------------------------------------------------------------ reading
@realdata
def test_rinex_nav_is_an_orbit_file_kind(tmp_path):
    text = BRDC1180.read_text()
    assert detect_format(text) == "RINEX-NAV"
    orbits = load_orbits(BRDC1180, reference_time=1_619_636_400.0)   # 2021-04-28 19:00 UTC
    # README: 32 GPS, whole day 2021-04-28; G11's one record repeats G10's orbit exactly
    # (tests/test_readers_realdata.py checks it on the file's text) and is dropped: 31.
    assert len(orbits) == 31 and all(e.info.source_kind == "broadcast" for e in orbits.entries)
    assert orbits.files[0].format.startswith("RINEX") and orbits.files[0].n_satellites == 31
    assert orbits.entries[0].broadcast and orbits.entries[0].sat_id == "G01"
    # gzip as downloaded: the same set.
    gz = tmp_path / "brdc1180.21n.gz"
    gz.write_bytes(gzip.compress(BRDC1180.read_bytes()))
    z = load_orbits(gz, reference_time=1_619_636_400.0)
    assert z.ids == orbits.ids
    assert [len(e.broadcast) for e in z.entries] == [len(e.broadcast) for e in orbits.entries]


@realdata
def test_every_real_navigation_file_loads():
    # Satellite counts from the data README "Files" table (GLONASS .12g: 24, one record of
    # R13 with the impossible channel 254 is dropped with a warning, R13 keeps its others),
    # except 07590920.05n: 28 PRNs counted in the file (2005: no G12, G17, G31, G32), and
    # brdc1180.21n: 31 (G11's one record repeats G10's orbit exactly and is dropped).
    counts = {"rtklib_brdc3050.12n": 32, "rtklib_brdc3050.12g": 24, "rtklib_brdc3050.12q": 1,
              "rtklib_brdc1820.10n": 32, "gpstk_test_input_rinex3_76193040.14n": 9,
              "gpstk_test_input_rinex_nav_TestInput1.16n": 1, "gnsslibpy_brdc1190.21n": 32,
              "gnsslibpy_brdc1180.21n": 31, "rtklib_07590920.05n": 28}
    for name, n in counts.items():
        s = load_orbits(NAV / name)
        assert len(s) == n, name
    g = load_orbits(NAV / "rtklib_brdc3050.12g")
    assert any("R13" in w and "254" in w for w in g.warnings)
    assert all(e.info.glonass_k is not None and -7 <= e.info.glonass_k <= 6 for e in g.entries)


@realdata
def test_mixed_file_all_systems_and_glonass_channel():
    orbits = load_orbits(BRDM)
    # README: G01 G02 R01 R02 E01 E02 C01 C02 J02 J03 I02 I03 S22 S23; NavIC and SBAS skipped.
    assert sorted(orbits.ids) == ["C01", "C02", "E01", "E02", "G01", "G02", "J02", "J03",
                                  "R01", "R02"]
    assert any("NavIC" in w and "SBAS" in w for w in orbits.warnings)
    by = {e.sat_id: e for e in orbits.entries}
    # Frequency numbers as written in the file: R01 1, R02 -4 (lines 102 and 118).
    assert by["R01"].info.glonass_k == 1 and by["R02"].info.glonass_k == -4
    # BeiDou toe is BDT: 2023-03-14 00:00:00 BDT = 00:00:14 GPST [mem: BDT = GPST - 14 s].
    c01 = by["C01"].broadcast[0]
    assert c01.toe_sow_s == 172800.0 and c01.toe_gps_s == 2253 * 604800.0 + 172814.0


def test_compressed_garbage_is_an_orbit_format_error():
    with pytest.raises(OrbitFormatError, match="gzip"):
        expand(b"\x1f\x8b" + b"\x00" * 40, "x.gz")
    with pytest.raises(OrbitFormatError, match="compress"):
        expand(b"\x1f\x9d\x90" + bytes(range(200)), "x.Z")
    with pytest.raises(OrbitFormatError, match="zip"):
        expand(b"PK\x03\x04rest", "x.zip")
    assert expand(b"plain text", "x") == b"plain text"


# ------------------------------------------------------------------ record choice
@realdata
def test_record_choice_nearest_healthy_unexpired():
    orbits = load_orbits(BRDC1180)
    e = next(x for x in orbits.entries if x.sat_id == "G06")
    recs = e.broadcast
    gps = np.arange(recs[0].toe_gps_s - 3 * 3600.0, recs[-1].toe_gps_s + 3 * 3600.0, 60.0)
    idx = select_records(recs, gps)
    toe = np.array([r.toe_gps_s for r in recs])
    for t, k in zip(gps, idx):
        valid = [j for j, r in enumerate(recs)
                 if r.healthy and abs(t - r.toe_gps_s) <= r.fit_interval_h * 1800.0]
        if not valid:
            assert k == -1                     # expired everywhere: left out
            continue
        # [pub: IS-GPS-200 20.3.3.4.3.1] fit 4 h -> within 2 h; nearest toe wins.
        assert abs(t - toe[k]) == min(abs(t - toe[j]) for j in valid)
    assert (idx == -1).any() and (idx >= 0).mean() > 0.8
    # Every satellite of a mixed file and of a 32-satellite day file, every 5 min: the
    # same choice as the brute force over all records written here.
    for name in ("gnsslibpy_BRDM00DLR_S_20230730000_01D_MN.rnx", "rtklib_brdc1820.10n"):
        for ent in load_orbits(NAV / name).entries:
            rr = ent.broadcast
            pool = [j for j, r in enumerate(rr) if r.healthy] or list(range(len(rr)))
            tt = np.arange(rr[0].toe_gps_s - 7200.0, rr[-1].toe_gps_s + 7200.0, 300.0)
            got = select_records(rr, tt)
            for t, k in zip(tt, got):
                valid = [j for j in pool if abs(t - rr[j].toe_gps_s) <= rr[j].fit_interval_h * 1800.0]
                if not valid:
                    assert k == -1, ent.sat_id
                else:
                    assert k in valid and abs(t - rr[k].toe_gps_s) == min(
                        abs(t - rr[j].toe_gps_s) for j in valid), ent.sat_id
    # Data age follows the record in force: never more than 2 h (GPS fit interval).
    age = orbit_data_age_s(OrbitSet([e]), gps_to_unix_s(gps))[0]
    assert np.all(np.abs(age[idx >= 0]) <= 7200.0)


@realdata
def test_uncovered_times_are_left_out_with_a_warning():
    orbits = load_orbits(BRDM)
    u = gps_to_unix_s(np.array([2253 * 604800.0 + 172800.0 + k * 1800.0 for k in range(12)]))
    pos, _, valid, warnings = propagate_ecef(orbits, u)
    r02 = orbits.ids.index("R02")
    # R02's records: tb 00:15, 00:45, 01:15 UTC (+-15 min) cover 00:00-01:30 UTC; the
    # samples are 00:00, 00:30, ... GPST (= UTC + 18 s): 23:59:42 UTC and after 01:30 are out.
    assert valid[r02, 1:4].all() and not valid[r02, 0] and not valid[r02, 4:].any()
    assert np.isnan(pos[r02, 4:]).all()
    assert any(w.startswith("R02: no valid broadcast record") for w in warnings)


# ------------------------------------------------------------------ against precise orbits
@realdata
def test_gps_broadcast_vs_code_precise_same_day():
    """brdc1180.21n vs the CODE MGEX final orbit of 2021-04-28 (18-24 h, 5 min).

    Limits [mem: GPS SPS Performance Standard, 5th ed. 2020, sec. 3.4.1]: signal-in-space
    range error <= 2.0 m (95 %), range-rate error <= 0.006 m/s (95 %); the SP3 is the centre
    of mass and the broadcast orbit the antenna phase centre, which this comparison keeps.
    Measured: range 95 % 1.7 m, max 2.1 m; range rate 95 % 0.15 mm/s."""
    sp3 = read_sp3(MGX)
    gps = np.arange(sp3.gps_s[4], sp3.gps_s[-5] + 1.0, 600.0)
    nav = load_orbits(BRDC1180)
    ids = [e.sat_id for e in nav.entries if e.info.healthy and e.sat_id in sp3.sat_ids]
    pos, vel = interpolate_sp3(sp3.select(ids), gps)
    err = _los_errors(ordered(nav, ids), gps_to_unix_s(gps), pos, vel)
    rng, rr = err["G"]
    assert rng.size > 1000
    assert np.percentile(rng, 95) <= 2.0 and rng.max() < 4.0
    assert np.percentile(rr, 95) <= 0.006
    # As Doppler at L1: 0.006 m/s is 0.032 Hz.
    assert rr.max() * L1 / SPEED_OF_LIGHT_M_S < 0.032


@realdata
def test_multi_gnss_broadcast_vs_code_rapid():
    """BRDM00DLR (2023-03-14) vs the CODE rapid orbit, 00:00-00:10 (3 epochs: position at
    each; velocity truth at 00:05 from the broadcast velocity less the rate of the
    broadcast-minus-SP3 difference). Limits, per system:
    GPS [mem: GPS SPS PS 2020 sec. 3.4.1]: range <= 2.0 m (95 %), range rate <= 0.006 m/s;
    Galileo [mem: Galileo OS Service Definition Document 1.1 (2019), sec. 3.3]: SISE
    <= 7 m (95 %); GLONASS [mem: GLONASS ICD 5.1 (2008), sec. 3.3.1.4: ephemeris errors
    about 20 m along-track, 10 m cross-track, 5 m radial, 1 sigma]: 3-D <= 23 m, and a range
    rate below that error spread over a 15-minute record, 23 m / 450 s = 0.05 m/s [calc].
    Measured: 3-D GPS 1.4 m, Galileo 0.9 m, GLONASS 3.4 m."""
    sp3 = read_sp3(RAP)
    nav = load_orbits(BRDM)
    ids = [e.sat_id for e in nav.entries if e.info.healthy and e.sat_id in sp3.sat_ids]
    assert {i[0] for i in ids} == {"G", "R", "E"}
    test = ordered(nav, ids)
    u = gps_to_unix_s(sp3.gps_s)
    bpos, bvel, valid, _ = propagate_ecef(test, u)
    truth = sp3.select(ids).pos_m
    d3 = np.linalg.norm(bpos - truth, axis=-1)                     # (S, 3 epochs)
    limit_3d = {"G": 6.0, "E": 7.0, "R": 23.0}  # GPS: 3 x the 2.0 m range figure [calc]
    for s, sid in enumerate(ids):
        ok = valid[s]
        assert ok.sum() >= 2, sid
        assert d3[s, ok].max() <= limit_3d[sid[0]], (sid, d3[s, ok])
    delta = bpos - truth
    rate = np.where(np.isfinite(delta[:, 0]), (delta[:, 2] - delta[:, 0]) / 600.0,
                    (delta[:, 2] - delta[:, 1]) / 300.0)
    truth_vel = (bvel[:, 1] - rate)[:, None, :]
    err = _los_errors(test, u[1:2], truth[:, 1:2], truth_vel)
    assert err["G"][1].max() <= 0.006 and err["E"][1].max() <= 0.006
    assert err["R"][1].max() <= 0.05
    assert err["G"][0].max() <= 2.0 and err["E"][0].max() <= 7.0 and err["R"][0].max() <= 23.0


# ------------------------------------------------------------------ the plan says which record
@realdata
def test_plan_json_names_the_records_used(tmp_path):
    from core.files.scenario import load_scenario
    from core.plan.pipeline import make_plan, plan_to_json

    (tmp_path / "nav.21n.gz").write_bytes(gzip.compress(BRDC1180.read_bytes()))
    (tmp_path / "s.toml").write_text("""
name = "broadcast test"
format_version = 1
[orbits]
files = ["nav.21n.gz"]
[site]
lat_deg = 37.4161
lon_deg = -122.204
height_m = 50
horizontal_uncertainty_km = 10
vertical_uncertainty_m = 100
[time]
start = "2021-04-28T19:00:00Z"
end = "2021-04-28T20:30:00Z"
step_s = 60
uncertainty_s = 2
[receiver]
signals = ["GPS-L1CA"]
channels = 8
oscillator_uncertainty_ppb = 500
[search]
coherent_ms = 1
noncoherent = 1
monte_carlo_runs = 1
""")
    plan = make_plan(load_scenario(tmp_path / "s.toml"), monte_carlo=False)
    d = json.loads(json.dumps(plan_to_json(plan)))
    sat = d["satellites"][0]
    assert sat["source"] == "broadcast" and "windows" in sat and "search" in sat
    recs = sat["broadcast_records"]
    assert recs and recs[0]["from"] == "2021-04-28T19:00:00Z"
    assert recs[-1]["to"] == "2021-04-28T20:30:00Z"
    # The orbit term is the
    # broadcast margin (0.003 Hz at L1, docs/orbit-margin.md), not an almanac's.
    assert sat["window_terms_max_hz"]["orbit"] == pytest.approx(0.003, abs=1e-3)
    for r in recs:
        assert set(r) == {"toe", "iod", "line", "from", "to"}


# ------------------------------------------------------------------ BeiDou, QZSS: no precise pair
def _kepler_state(rec, t_gps: float, geo: bool | None = None):
    from dataclasses import replace as dc_replace

    from core.orbits.ephemeris_model import EphemerisArrays, ephemeris_ecef
    arr = EphemerisArrays.from_records([rec])
    if geo is not None:
        arr = dc_replace(arr, geo=np.array([geo]))
    p, v = ephemeris_ecef(arr, np.array([t_gps]))
    return p[0, 0], v[0, 0]


@realdata
def test_beidou_and_qzss_continuous_across_records():
    """No precise orbit of BeiDou or QZSS shares a day with a broadcast file here (the 2021
    MGEX SP3 has C and J, no broadcast file of 2021 has them). Checked instead: consecutive
    records agree at the midpoint of their reference times. Limit: twice the stated
    signal-in-space range error, BeiDou 2 x 1.5 m [mem: BDS Open Service Performance
    Standard 3.0 (2021), SISRE <= 1.5 m 95 % for GEO/IGSO/MEO], QZSS 2 x 2.6 m [mem: QZSS
    Performance Standard PS-QZSS, SIS-URE <= 2.6 m 95 %]; velocity within 5 mm/s [calc: the
    same error over a half-hour drift]. Measured: 0.67 m (C01), 0.67 m (J01), 0.03-0.11 mm/s."""
    limits = {"C": 3.0, "J": 5.2}
    seen = set()
    for name in ("gnsslibpy_BRDM00DLR_S_20230730000_01D_MN.rnx", "rtklib_brdc3050.12q"):
        for e in load_orbits(NAV / name).entries:
            if e.info.system not in limits:
                continue
            for a, b in zip(e.broadcast[:-1], e.broadcast[1:]):
                tm = 0.5 * (a.toe_gps_s + b.toe_gps_s)
                pa, va = _kepler_state(a, tm)
                pb, vb = _kepler_state(b, tm)
                assert np.linalg.norm(pa - pb) <= limits[e.info.system], e.sat_id
                assert np.linalg.norm(va - vb) <= 5e-3, e.sat_id
                seen.add(e.sat_id)
    assert seen == {"C01", "C02", "J01", "J02", "J03"}


@realdata
def test_beidou_geo_is_geostationary_with_its_own_rotation():
    """C01 and C02 are GEO [mem: BDS-SIS-ICD-B1I 3.0]: over their records the ICD's GEO
    algorithm (Rz(we tk) Rx(-5 deg)) must give a geostationary satellite: geocentric distance
    42164 km +- 100 km [calc: Kepler's third law for one sidereal day], latitude within
    +-3 deg, Earth-fixed speed below 150 m/s (a geostationary drift) [trade]. The MEO
    algorithm applied to the same records gives a place thousands of km away: the GEO
    branch is what makes the difference. Velocity = derivative of position [calc]."""
    orbits = load_orbits(BRDM)
    for sid in ("C01", "C02"):
        e = next(x for x in orbits.entries if x.sat_id == sid)
        for rec in e.broadcast:
            assert rec.beidou_geo
            for dt in (-3600.0, 0.0, 3600.0):
                t = rec.toe_gps_s + dt
                p, v = _kepler_state(rec, t)
                r = np.linalg.norm(p)
                assert abs(r - 42_164e3) < 100e3
                assert abs(np.degrees(np.arcsin(p[2] / r))) < 3.0
                assert np.linalg.norm(v) < 150.0
                pp, _ = _kepler_state(rec, t + 0.5)
                pm, _ = _kepler_state(rec, t - 0.5)
                assert np.linalg.norm((pp - pm) / 1.0 - v) < 1e-4
                p_meo, _ = _kepler_state(rec, t, geo=False)
                assert np.linalg.norm(p_meo - p) > 1000e3


@realdata
def test_galileo_record_without_accuracy_prediction_is_not_used():
    from dataclasses import replace as dc_replace

    e01 = next(e for e in load_orbits(BRDM).entries if e.sat_id == "E01")
    rec = e01.broadcast[0]
    assert rec.healthy and rec.sv_accuracy_m == pytest.approx(3.12)    # file line 133
    # SISA "NAPA" (no accuracy prediction) is written as -1 [mem: RINEX 3.04 sec. A8].
    napa = dc_replace(rec, sv_accuracy_m=-1.0)
    assert not napa.healthy
    assert select_records([napa], np.array([rec.toe_gps_s]))[0] == 0   # alone: shown, not healthy
    assert select_records([napa, rec], np.array([rec.toe_gps_s]))[0] == 1


@realdata
def test_qzss_health_bit_masked_and_plan_ready():
    # Data README oddity: RINEX 2.12 QZSS 'J 1' with health 1 (the L1C/A-only bit), masked.
    q = load_orbits(NAV / "rtklib_brdc3050.12q")
    assert q.ids == ["J01"] and q.entries[0].info.healthy
    assert {r.health_raw for r in q.entries[0].broadcast} == {1}


@realdata
def test_healthy_record_with_another_satellites_orbit_is_dropped():
    # Data README oddity: brdc1820.10n's "healthy" G01 06:00 record is G23's orbit.
    orbits = load_orbits(NAV / "rtklib_brdc1820.10n")
    msgs = [w for w in orbits.warnings if "G01 record" in w]
    assert len(msgs) == 1 and "matches G23" in msgs[0] and "dropped" in msgs[0]
    g01 = next(e for e in orbits.entries if e.sat_id == "G01")
    assert not g01.info.healthy                     # the rest of G01's day is health 63


# ------------------------------------------------------------------ GLONASS integration
@realdata
def test_glonass_rk4_against_scipy_and_step_halving():
    """The RK4 integration against scipy's DOP853 (rtol 1e-12) on the same equations of
    motion, written out here from the ICD [mem: GLONASS ICD 5.1 Appendix A.3.1.2], over
    the +-15 min of a real record: within 1 mm and 1e-6 m/s; halving the 60 s step changes
    the result by less than 1 mm [calc: RK4 error ~ h^4]."""
    from scipy.integrate import solve_ivp

    from core.orbits.glonass_model import glonass_ecef
    from core.orbits.readers.rinex_nav import read_rinex_nav

    rec = read_rinex_nav(BRDM, ("R",)).glonass[0]
    mu, ae, j2, w = 398600.4418e9, 6378136.0, 1082625.75e-9, 7.292115e-5

    def f(_t, y):
        x, yy, z, vx, vy, vz = y
        r = np.sqrt(x * x + yy * yy + z * z)
        k = 1.5 * j2 * mu * ae * ae / r ** 5
        ax = -mu * x / r ** 3 - k * x * (1 - 5 * z * z / r ** 2) + w * w * x + 2 * w * vy
        ay = -mu * yy / r ** 3 - k * yy * (1 - 5 * z * z / r ** 2) + w * w * yy - 2 * w * vx
        az = -mu * z / r ** 3 - k * z * (3 - 5 * z * z / r ** 2)
        return [vx, vy, vz, ax + rec.acc_m_s2[0], ay + rec.acc_m_s2[1], az + rec.acc_m_s2[2]]

    dts = np.array([-900.0, -300.0, 450.0, 900.0])
    p, v = glonass_ecef(np.tile(rec.pos_m, (4, 1)), np.tile(rec.vel_m_s, (4, 1)),
                        np.tile(rec.acc_m_s2, (4, 1)), dts)
    p_half, _ = glonass_ecef(np.tile(rec.pos_m, (4, 1)), np.tile(rec.vel_m_s, (4, 1)),
                             np.tile(rec.acc_m_s2, (4, 1)), dts, max_step_s=30.0)
    for k, dt in enumerate(dts):
        sol = solve_ivp(f, (0.0, dt), [*rec.pos_m, *rec.vel_m_s], method="DOP853",
                        rtol=1e-12, atol=1e-6)
        ref = sol.y[:, -1]
        assert np.linalg.norm(p[k] - ref[:3]) < 1e-3
        assert np.linalg.norm(v[k] - ref[3:]) < 1e-6
    assert np.abs(p - p_half).max() < 1e-3

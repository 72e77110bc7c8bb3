"""Routes: reading GPX/CSV, timing, and positions along the route.

The real GPX files are the public gpxpy test files in ../shared/field-data/gpx (read in
place; see that folder's README.md). References: gpxpy's own parse of the same file,
geographiclib's Inverse called independently, and a haversine sum.
"""

from __future__ import annotations

import math
import os
from pathlib import Path

import numpy as np
import pytest
from geographiclib.geodesic import Geodesic

from core.ground.errors import InputError
from core.sky.route import (
    RouteFile,
    SpeedStretch,
    geodesic_direct,
    geodesic_inverse,
    read_route_file,
    route_file_summary,
    time_route,
)

REPO = Path(__file__).resolve().parents[1]
GPX = Path(os.environ.get("ACQPLAN_FIELD_DATA", REPO.parent / "shared" / "field-data")) / "gpx"


@pytest.fixture(scope="module")
def gpx_dir() -> Path:
    if not (GPX / "gpxpy_around-visnjan-with-car.gpx").is_file():
        pytest.skip(f"real GPX files not found at {GPX} (the shared/field-data folder beside the repo)")
    return GPX


def _gpxpy_points(path: Path):
    import gpxpy

    with open(path, encoding="utf-8-sig") as fh:
        g = gpxpy.parse(fh)
    pts = [p for t in g.tracks for s in t.segments for p in s.points]
    if not pts:
        pts = [p for r in g.routes for p in r.points]
    return g, pts


@pytest.mark.parametrize("name", ["gpxpy_around-visnjan-with-car.gpx", "gpxpy_cerknicko-jezero.gpx",
                                  "gpxpy_korita-zbevnica.gpx", "gpxpy_route.gpx",
                                  "gpxpy_track-with-empty-segment.gpx", "gpxpy_Mojstrovka.gpx"])
def test_points_and_times_equal_gpxpy(gpx_dir, name):
    # [pub: gpxpy's own parse of the same file is the reference]
    _, pts = _gpxpy_points(gpx_dir / name)
    rf = read_route_file(gpx_dir / name)
    assert rf.n_points == len(pts)
    assert np.allclose(rf.lat_deg, [p.latitude for p in pts], atol=0, rtol=0)
    assert np.allclose(rf.lon_deg, [p.longitude for p in pts], atol=0, rtol=0)
    ref_t = np.array([p.time.timestamp() if p.time else np.nan for p in pts])
    assert np.array_equal(np.isnan(rf.time_unix_s), np.isnan(ref_t))
    ok = ~np.isnan(ref_t)
    assert np.array_equal(rf.time_unix_s[ok], ref_t[ok])


def test_readme_counts(gpx_dir):
    # [pub: shared/field-data/README.md: 104 car points 06:15:50-06:24:24, 55 rtept, 296 points]
    car = read_route_file(gpx_dir / "gpxpy_around-visnjan-with-car.gpx")
    assert car.n_points == 104
    r = time_route(car)
    assert r.duration_s == 8 * 60 + 34
    assert read_route_file(gpx_dir / "gpxpy_route.gpx").n_points == 55
    assert read_route_file(gpx_dir / "gpxpy_route.gpx").kind == "gpx-route"
    cj = read_route_file(gpx_dir / "gpxpy_cerknicko-jezero.gpx")
    assert cj.n_points == 296 and len(cj.waypoints) == 7


def test_1901_times_refused_with_a_clear_message(gpx_dir):
    rf = read_route_file(gpx_dir / "gpxpy_Mojstrovka.gpx")
    with pytest.raises(InputError) as exc:
        time_route(rf, start_unix_s=1.8e9)
    text = str(exc.value)
    assert "gpxpy_Mojstrovka.gpx" in text and "before 1980" in text and "1901-12-13" in text
    assert "speed_kmh" in text and "\n" not in text
    # With a planned speed it is timed, and the note says why the times were dropped.
    r = time_route(rf, start_unix_s=1.8e9, speed_m_s=1.2)
    assert any("before 1980" in n for n in r.notes)
    assert r.start_unix_s == 1.8e9


def test_empty_segment_is_named(gpx_dir):
    rf = read_route_file(gpx_dir / "gpxpy_track-with-empty-segment.gpx")
    assert rf.n_points == 9 and len(rf.segments) == 1
    assert rf.problems == ["track 1 segment 2 holds no points; skipped"]
    summary = route_file_summary(rf)
    assert summary["problems"] == rf.problems and summary["points"] == 9


def test_bom_unicode_file_reads(gpx_dir):
    rf = read_route_file(gpx_dir / "gpxpy_unicode_with_bom.gpx")
    assert rf.n_points == 0 and "no track or route points" in rf.problems[-1]
    with pytest.raises(InputError, match="no track or route points"):
        time_route(rf, start_unix_s=1.8e9, speed_m_s=10)


def test_partial_times_need_a_speed(gpx_dir):
    rf = read_route_file(gpx_dir / "gpxpy_cerknicko-without-times.gpx")
    with pytest.raises(InputError, match="times on only 5 of 296 points"):
        time_route(rf, start_unix_s=1.8e9)


def _haversine_m(lat, lon, radius_m=6_371_008.8):
    # Mean Earth radius R1 = (2a + b)/3 [pub: IUGG, Moritz 1980 "Geodetic Reference System 1980"]
    p1, p2 = np.radians(lat[:-1]), np.radians(lat[1:])
    dl = np.radians(np.diff(lon))
    a = np.sin((p2 - p1) / 2) ** 2 + np.cos(p1) * np.cos(p2) * np.sin(dl / 2) ** 2
    return float(np.sum(2 * radius_m * np.arcsin(np.sqrt(a))))


def test_car_track_length_against_haversine(gpx_dir):
    rf = read_route_file(gpx_dir / "gpxpy_around-visnjan-with-car.gpx")
    r = time_route(rf)
    hav = _haversine_m(rf.lat_deg, rf.lon_deg)
    # [calc] a sphere of the mean radius differs from the ellipsoid by well under 0.5 %
    assert abs(r.length_m - hav) / hav < 0.005
    assert 2000 < r.length_m < 4000        # [pub: README: a short drive around Visnjan]


def test_positions_on_the_geodesic_against_geographiclib(gpx_dir):
    # [pub: geographiclib Inverse, called independently on the interpolated positions]
    rf = read_route_file(gpx_dir / "gpxpy_around-visnjan-with-car.gpx")
    r = time_route(rf)
    g = Geodesic.WGS84
    for k in (0, 17, 50, 102):
        leg = g.Inverse(rf.lat_deg[k], rf.lon_deg[k], rf.lat_deg[k + 1], rf.lon_deg[k + 1])
        if leg["s12"] < 1.0:
            continue
        for frac in (0.25, 0.5, 0.9):
            d = r.distance_m[k] + frac * leg["s12"]
            lat, lon, _, hd = r.positions_at_distance(d)
            back = g.Inverse(rf.lat_deg[k], rf.lon_deg[k], lat[0], lon[0])
            assert abs(back["s12"] - frac * leg["s12"]) < 1e-6
            assert abs(back["azi1"] - leg["azi1"]) < 1e-6
            ahead = g.Inverse(lat[0], lon[0], rf.lat_deg[k + 1], rf.lon_deg[k + 1])
            assert abs((hd[0] - ahead["azi1"] + 180) % 360 - 180) < 1e-6
        # Distance per leg equals the independent Inverse.
        assert abs((r.distance_m[k + 1] - r.distance_m[k]) - leg["s12"]) < 1e-6


def test_array_geodesics_against_geographiclib():
    # [pub: geographiclib's Direct and Inverse, called point by point]: the array forms
    # the route uses for its legs and positions, over the whole globe (poles, the
    # dateline, the equator, meridians), from 1 mm to 20,000 km.
    g = Geodesic.WGS84
    rng = np.random.default_rng(8)
    n = 3000
    lat1 = rng.uniform(-90, 90, n)
    lat1[:20], lat1[20:40], lat1[40:60] = 90.0, -90.0, 0.0
    lon1 = rng.uniform(-180, 180, n)
    lon1[60:80] = 179.9999
    azi1 = rng.uniform(-180, 180, n)
    azi1[80:100], azi1[100:120], azi1[120:140] = 0.0, 180.0, 90.0
    s12 = 10 ** rng.uniform(-3, 7.3, n)
    mask = Geodesic.LATITUDE | Geodesic.LONGITUDE | Geodesic.AZIMUTH | Geodesic.LONG_UNROLL
    ref = [g.Direct(a, b, c, d, mask) for a, b, c, d in zip(lat1, lon1, azi1, s12)]
    lat2, lon2, azi2 = geodesic_direct(lat1, lon1, azi1, s12)
    assert np.max(np.abs(lat2 - [r["lat2"] for r in ref])) < 1e-12
    assert np.max(np.abs(lon2 - [r["lon2"] for r in ref])) < 1e-11
    assert np.max(np.abs((azi2 - [r["azi2"] for r in ref] + 180) % 360 - 180)) < 1e-11
    # Back to the start by the independent Inverse: the end points lie on the geodesic.
    back = np.array([g.Inverse(a, b, c, d)["s12"] for a, b, c, d in zip(lat1, lon1, lat2, lon2)])
    assert np.max(np.abs(back - s12)) < 1e-6

    # Inverse of the same pairs, of coincident points and of route-like short legs.
    lat2[:10], lon2[:10] = lat1[:10], lon1[:10]
    lat_a = np.concatenate((lat1, 49.6 + np.cumsum(rng.normal(0, 0.001, 300))))
    lon_a = np.concatenate((lon1, 10.1 + np.cumsum(rng.normal(0, 0.0015, 300))))
    lat_b = np.concatenate((lat2, np.roll(lat_a[n:], -1)))
    lon_b = np.concatenate((lon2, np.roll(lon_a[n:], -1)))
    s, a1, a2 = geodesic_inverse(lat_a, lon_a, lat_b, lon_b)
    inv = [g.Inverse(a, b, c, d) for a, b, c, d in zip(lat_a, lon_a, lat_b, lon_b)]
    ref_s = np.array([r["s12"] for r in inv])
    assert np.max(np.abs(s - ref_s)) < 1e-6
    far = ref_s > 5.0                   # azimuths of lines of a few mm are not defined to 1e-6 deg
    for got, key in ((a1, "azi1"), (a2, "azi2")):
        want = np.array([r[key] for r in inv])
        assert np.max(np.abs((got - want + 180) % 360 - 180)[far]) < 1e-6


def test_positions_through_dwells_keep_the_heading():
    # Stops at the middle and at the last point: stopped in the middle the vehicle faces
    # the leg it drives next, stopped at the end the way it came (the end azimuth of the
    # last leg) [pub: geographiclib Inverse of each leg, called independently].
    from core.sky.route import place_waypoints

    g = Geodesic.WGS84
    p1 = g.Direct(49.0, 10.0, 30.0, 500.0)
    p2 = g.Direct(p1["lat2"], p1["lon2"], 120.0, 500.0)
    lat = np.array([49.0, p1["lat2"], p2["lat2"]])
    lon = np.array([10.0, p1["lon2"], p2["lon2"]])
    rf = RouteFile("x.csv", "csv", lat, lon, np.zeros(3), np.full(3, np.nan), [(0, 3)], [],
                   ["line 2", "line 3", "line 4"])
    rf.waypoints = place_waypoints(rf, [("STOP", lat[1], lon[1]), ("END", lat[2], lon[2])])
    r = time_route(rf, start_unix_s=0.0, speed_m_s=10.0, dwell_s={"STOP": 60.0, "END": 30.0})
    # Driving: 0-50 s leg 1, 50-110 s stopped, 110-160 s leg 2, 160-190 s stopped at the end.
    st = r.state_at(np.array([25.0, 80.0, 150.0, 175.0, 500.0]))
    leg1 = g.Inverse(lat[0], lon[0], lat[1], lon[1])
    leg2 = g.Inverse(lat[1], lon[1], lat[2], lon[2])
    mid1 = g.Inverse(lat[0], lon[0], st.lat_deg[0], st.lon_deg[0])
    assert abs(mid1["s12"] - 250.0) < 1e-6 and abs(mid1["azi1"] - leg1["azi1"]) < 1e-6
    assert st.speed_m_s[1] == 0.0 and g.Inverse(st.lat_deg[1], st.lon_deg[1], lat[1], lon[1])["s12"] < 1e-6
    assert abs(st.heading_deg[1] - leg2["azi1"] % 360) < 1e-6
    back = g.Inverse(lat[1], lon[1], st.lat_deg[2], st.lon_deg[2])
    assert abs(back["s12"] - 400.0) < 1e-6 and abs(back["azi1"] - leg2["azi1"]) < 1e-6
    for k in (3, 4):                     # stopped at the end, and waiting after it
        assert st.speed_m_s[k] == 0.0
        assert g.Inverse(st.lat_deg[k], st.lon_deg[k], lat[2], lon[2])["s12"] < 1e-6
        assert abs(st.heading_deg[k] - leg2["azi2"] % 360) < 1e-6


def test_state_speed_and_time_as_recorded(gpx_dir):
    import gpxpy

    rf = read_route_file(gpx_dir / "gpxpy_around-visnjan-with-car.gpx")
    r = time_route(rf)
    with open(gpx_dir / "gpxpy_around-visnjan-with-car.gpx", encoding="utf-8") as fh:
        g = gpxpy.parse(fh)
    pts = g.tracks[0].segments[0].points
    # At a recorded point's time the vehicle is at that point [pub: the file's own times].
    for k in (5, 40, 90):
        t = pts[k].time.timestamp()
        st = r.state_at(t + 1e-9)
        back = Geodesic.WGS84.Inverse(st.lat_deg[0], st.lon_deg[0], pts[k].latitude, pts[k].longitude)
        assert back["s12"] < 0.01
    # Mean speed equals length / duration [calc]; a car track: 10-60 km/h [pub: README].
    t = np.linspace(r.start_unix_s, r.end_unix_s - 1e-6, 20001)
    st = r.state_at(t)
    mean_speed = np.trapezoid(st.speed_m_s, t) / r.duration_s
    assert mean_speed == pytest.approx(r.length_m / r.duration_s, rel=2e-3)
    assert 10 / 3.6 < mean_speed < 60 / 3.6


def test_shift_to_start(gpx_dir):
    rf = read_route_file(gpx_dir / "gpxpy_around-visnjan-with-car.gpx")
    r = time_route(rf, start_unix_s=1_810_000_000.0, shift_to_start=True)
    assert r.start_unix_s == 1_810_000_000.0 and r.duration_s == 514.0
    assert "shifted" in r.timing


def _csv(tmp_path, text, name="r.csv"):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


def test_csv_planned_speed_with_stretches_and_dwell(tmp_path):
    # A straight 10 km northward line on the meridian: distances from geographiclib Direct.
    g = Geodesic.WGS84
    rows = ["# a test line", "time_utc,lat_deg,lon_deg,height_m,name"]
    for k, s in enumerate(np.arange(0, 10_001, 1000.0)):
        p = g.Direct(52.0, 9.0, 0.0, s)
        rows.append(f",{p['lat2']:.10f},{p['lon2']:.10f},100,{'MID' if k == 5 else ''}")
    rf = read_route_file(_csv(tmp_path, "\n".join(rows) + "\n"))
    assert rf.n_points == 11 and [w.name for w in rf.waypoints] == ["MID"]
    r = time_route(rf, start_unix_s=1000.0, speed_m_s=10.0,
                   stretch_speeds=[SpeedStretch(0.0, 2000.0, 5.0)], dwell_s={"MID": 120.0})
    # [calc] 2 km at 5 m/s + 8 km at 10 m/s + 120 s dwell
    assert r.duration_s == pytest.approx(400 + 800 + 120, abs=1e-6)
    assert r.length_m == pytest.approx(10_000.0, abs=1e-3)
    mid_t = r.time_at_distance(5000.0)
    assert mid_t == pytest.approx(1000 + 400 + 300, abs=1e-6)
    st = r.state_at([mid_t + 60.0, mid_t + 200.0])
    assert st.speed_m_s[0] == 0.0 and st.distance_m[0] == pytest.approx(5000.0)
    assert st.speed_m_s[1] == pytest.approx(10.0) and abs((st.heading_deg[1] + 180) % 360 - 180) < 1e-9
    lo, hi = r.slip_range_m(mid_t + 200.0, 30.0)
    # [calc] it left MID at +120 s: 30 s late it is 50 s past MID, 30 s early 110 s past
    assert lo[()] == pytest.approx(5000 + 500, abs=1e-6) and hi[()] == pytest.approx(5000 + 1100, abs=1e-6)


@pytest.mark.parametrize("text, line, field", [
    ("time_utc,lat_deg,lon_deg\n", 1, "header"),
    ("time_utc,lat_deg,lon_deg,height_m\n,52,9,0\n,91,9,0\n", 3, "row lat"),
    ("time_utc,lat_deg,lon_deg,height_m\n,52,x,0\n", 2, "lon_deg"),
    ("time_utc,lat_deg,lon_deg,height_m\n2027-05-18T10:00:00Z,52,9,0\nnot a time,52.1,9,0\n", 3, "time_utc"),
])
def test_csv_bad_input_names_file_line_and_field(tmp_path, text, line, field):
    p = _csv(tmp_path, text)
    with pytest.raises(InputError) as exc:
        read_route_file(p)
    assert exc.value.line == line and exc.value.field == field and exc.value.file == str(p)
    assert "\n" not in str(exc.value)


def test_backwards_and_equal_times_are_refused(tmp_path):
    back = _csv(tmp_path, "time_utc,lat_deg,lon_deg,height_m\n2027-05-18T10:00:00Z,52,9,0\n"
                "2027-05-18T10:00:10Z,52.001,9,0\n2027-05-18T10:00:05Z,52.002,9,0\n", "b.csv")
    with pytest.raises(InputError, match="backwards at line 4"):
        time_route(read_route_file(back))
    same = _csv(tmp_path, "time_utc,lat_deg,lon_deg,height_m\n2027-05-18T10:00:00Z,52,9,0\n"
                "2027-05-18T10:00:00Z,52.001,9,0\n", "s.csv")
    with pytest.raises(InputError, match="all 2 times are equal"):
        time_route(read_route_file(same))


def test_not_gpx_nor_csv(tmp_path):
    p = tmp_path / "x.gpx"
    p.write_text("<kml><Document/></kml>")
    with pytest.raises(InputError, match="not GPX"):
        read_route_file(p)
    p.write_text("<?xml version='1.0'?>\n<gpx><trk><trkseg>\n<trkpt lat='1' lon='1'></trkseg></trk></gpx>")
    with pytest.raises(InputError) as exc:
        read_route_file(p)
    assert exc.value.line == 3


def test_speed_at_interpolated_point_never_leaves_the_ellipsoid():
    # A long leg (200 km): the midpoint lies on the geodesic, height interpolated, so the
    # ECEF point is on the ellipsoid at that height [calc], unlike a chord (about 785 m below).
    from core.ground.geodesy import ecef_to_geodetic, geodetic_to_ecef
    from core.sky.route import RouteFile

    rf = RouteFile("x", "csv", np.array([50.0, 51.5]), np.array([8.0, 10.0]), np.array([0.0, 0.0]),
                   np.array([1.8e9, 1.8e9 + 10_000.0]), [(0, 2)], [], ["line 2", "line 3"])
    r = time_route(rf)
    st = r.state_at(1.8e9 + 5000.0)
    xyz = geodetic_to_ecef(st.lat_deg[0], st.lon_deg[0], st.height_m[0])
    _, _, h = ecef_to_geodetic(xyz)
    assert abs(float(h)) < 1e-3
    chord = 0.5 * (geodetic_to_ecef(50.0, 8.0, 0.0) + geodetic_to_ecef(51.5, 10.0, 0.0))
    assert float(ecef_to_geodetic(chord)[2]) < -500
    assert math.isclose(st.speed_m_s[0], r.length_m / 10_000.0)

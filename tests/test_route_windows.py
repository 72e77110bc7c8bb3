"""Doppler windows along a route against brute force with skyfield.

For each visible satellite we draw points of the drive inside the stated uncertainties:
where the vehicle is (anywhere the schedule slip allows along the route, then, after an
outage, anywhere up to the along-route slip behind or ahead of that, waiting at an end
of the route beyond it, then inside the horizontal disc and vertical band around it), how it moves (the route's speed there +- the
speed uncertainty, its heading +- the heading uncertainty, its climb +- the climb
uncertainty), true time and oscillator offset. The true apparent Doppler comes from
skyfield's satellite positions and velocities (reference library), the drawn receiver
positions from pymap3d's geodesic offsets (reference library) and the route positions.
Required: every draw inside the window, and the window at most 1.10 x the draws' span.
"""

from __future__ import annotations

from datetime import UTC, datetime

import numpy as np
import pymap3d
import pymap3d.vincenty
import pytest
from conftest import requires_orbit_data
from geographiclib.geodesic import Geodesic
from test_windows_bruteforce import L1, _gps_tle

from core.ground.geodesy import Site
from core.search.motion import MotionUncertainty, route_motion
from core.search.windows import Uncertainty, apparent_doppler_hz, doppler_windows, shift_summary
from core.sky.predict import predict
from core.sky.route import RouteFile, time_route

C = 299_792_458.0
TOL_HZ = 5e-3
RATIOS: list[float] = []


def _route(lat0, lon0, t_start, speed_m_s, legs, dwell_after_first=0.0):
    """A route of straight geodesic legs [(azimuth_deg, length_m)], points every 200 m,
    timed from a planned speed; a named waypoint at the first corner with a dwell."""
    g = Geodesic.WGS84
    lat, lon = [lat0], [lon0]
    corner = None
    for j, (az, length) in enumerate(legs):
        for _s in np.arange(200.0, length + 1e-6, 200.0):
            p = g.Direct(lat[-1], lon[-1], az, 200.0)
            lat.append(p["lat2"])
            lon.append(p["lon2"])
        if j == 0:
            corner = len(lat) - 1
    n = len(lat)
    h = 300.0 + 30.0 * np.sin(np.arange(n) / 7.0)        # a hilly road
    from core.sky.route import place_waypoints

    rf = RouteFile("test.csv", "csv", np.array(lat), np.array(lon), h, np.full(n, np.nan),
                   [(0, n)], [], [f"line {k + 2}" for k in range(n)])
    rf.waypoints = place_waypoints(rf, [("CORNER", lat[corner], lon[corner])])
    dwell = {"CORNER": dwell_after_first} if dwell_after_first else None
    return time_route(rf, start_unix_s=t_start, speed_m_s=speed_m_s, dwell_s=dwell)


CASES = [
    # site, uncertainty (disc, band, time, -, vertical, osc offset, osc unc), motion, time offset
    ((47.5, 8.0), Uncertainty(500.0, 50.0, 5.0, 0.0, 0.0, 100.0, 200.0),
     MotionUncertainty(slip_s=120.0, speed_m_s=3.0, heading_deg=15.0, vertical_m_s=1.0), 400.0),
    ((-33.9, -70.6), Uncertainty(0.0, 0.0, 2.0, 0.0, 0.0, 0.0, 50.0),
     MotionUncertainty(slip_s=300.0, speed_m_s=5.0, heading_deg=10.0, vertical_m_s=0.5), 600.0),
    ((60.2, 24.9), Uncertainty(2000.0, 100.0, 300.0, 0.0, 0.0, -200.0, 100.0),
     MotionUncertainty(slip_s=60.0, speed_m_s=2.0, heading_deg=20.0, vertical_m_s=1.0), 300.0),
    # After an outage (core.plan.events): the hot start's disc, a clock within microseconds,
    # the oscillator grown, and a range along the route of +- speed uncertainty x outage.
    ((47.5, 8.0), Uncertainty(50.0, 20.0, 2.6e-6, 0.0, 0.0, 0.0, 32.0),
     MotionUncertainty(slip_s=0.0, speed_m_s=2.78, heading_deg=15.0, vertical_m_s=1.0, along_m=200.0), 150.0),
    # ... the range reaching behind the route's start (the vehicle waits there),
    ((-33.9, -70.6), Uncertainty(50.0, 20.0, 1e-5, 0.0, 0.0, 0.0, 40.0),
     MotionUncertainty(slip_s=0.0, speed_m_s=5.0, heading_deg=10.0, vertical_m_s=0.5, along_m=1000.0), 30.0),
    # ... and with a schedule slip, over the first corner and its 90 s stop.
    ((60.2, 24.9), Uncertainty(50.0, 20.0, 1e-5, 0.0, 0.0, 0.0, 40.0),
     MotionUncertainty(slip_s=30.0, speed_m_s=3.0, heading_deg=15.0, vertical_m_s=1.0, along_m=1500.0), 420.0),
]


@requires_orbit_data
@pytest.mark.parametrize("site, unc, mu, dt_in", CASES)
def test_route_window_holds_every_draw_and_is_tight(site, unc, mu, dt_in):
    from skyfield.api import wgs84
    from skyfield.framelib import itrs

    orbits, sky, ts = _gps_tle()
    t_start = 1585735200.0
    route = _route(site[0], site[1], t_start, 22.0, [(80.0, 6000.0), (350.0, 5000.0), (200.0, 4000.0)],
                   dwell_after_first=90.0)
    t0 = t_start + dt_in
    times = np.array([t0 - 30.0, t0, t0 + 30.0])
    motion = route_motion(route, times, mu)
    pred = predict(orbits, motion.path, times, keep_states=True)
    shifted = shift_summary(orbits, motion.path, pred.times, unc.time_s)
    w = doppler_windows(pred, unc, shifted=shifted, motion=motion)

    # Every sign combination of speed, climb, time and oscillator at the bounds, five
    # headings across the heading range (the extreme may be inside it), on a grid of slips
    # (the extreme may be anywhere along the route), then as many uniform draws inside.
    rng = np.random.default_rng(11)
    # Along the route: nine steps over the range, and every planned stop (a dwell) in it,
    # where the vehicle may stand [calc: a stop is a position with speed 0].
    rd, rt = route.distance_m, route.time_unix_s
    stops = rd[:-1][(np.diff(rd) == 0) & (np.diff(rt) > 0)]
    d0 = float(route.distance_at(t0))
    at_stops = [(x - d0) / mu.along_m for x in stops if mu.along_m and abs(x - d0) <= mu.along_m]
    alongs = np.concatenate((np.linspace(-1, 1, 9), at_stops)) if mu.along_m else [0.0]
    grid = np.array(np.meshgrid(np.linspace(-1, 1, 41), alongs, [-1, 1], [-1, -0.5, 0, 0.5, 1], [-1, 1],
                                [-1, 1], [-1, 1], indexing="ij")).reshape(7, -1)
    n_c = grid.shape[1]
    n = 2 * n_c
    boundary = np.arange(n) < n_c
    uniform = rng.uniform(-1, 1, (7, n - n_c))
    if not mu.along_m:
        uniform[1] = 0.0
    u_slip, u_along, u_speed, u_head, u_climb, u_tau, u_osc = np.concatenate((grid, uniform), axis=1)
    slip = u_slip * mu.slip_s
    st = route.state_at(t0 + slip)
    if mu.along_m:
        # Moved along the route from the slipped position: the state where the timetable
        # is at that distance; behind the start or past the end, stopped there.
        d = st.distance_m + u_along * mu.along_m
        beyond = (d < 0.0) | (d > route.length_m)
        d = np.clip(d, 0.0, route.length_m)
        for x in stops:
            d = np.where(np.abs(d - x) < 1e-6, x, d)
        at_d = route.state_at(np.array([route.time_at_distance(float(x)) for x in d]))
        moved = u_along != 0.0
        for name in ("lat_deg", "lon_deg", "height_m", "speed_m_s", "heading_deg", "vertical_m_s"):
            setattr(st, name, np.where(moved, getattr(at_d, name), getattr(st, name)))
        st.speed_m_s = np.where(beyond, 0.0, st.speed_m_s)
        st.vertical_m_s = np.where(beyond, 0.0, st.vertical_m_s)
    moving = st.speed_m_s > 0
    speed = np.where(moving, np.maximum(st.speed_m_s + u_speed * mu.speed_m_s, 0.0), 0.0)
    heading = np.radians(st.heading_deg + u_head * mu.heading_deg)
    climb = st.vertical_m_s + u_climb * mu.vertical_m_s

    def pm(width):
        return np.where(boundary, rng.choice([-1, 1], n), rng.uniform(-1, 1, n)) * width

    az = rng.uniform(0, 360, n)
    r = np.where(boundary, unc.horizontal_m, unc.horizontal_m * np.sqrt(rng.uniform(0, 1, n)))
    # Geodesic offsets on the ellipsoid [reference: pymap3d.vincenty.vreckon].
    lat, lon = pymap3d.vincenty.vreckon(st.lat_deg, st.lon_deg, r, az)
    lat, lon = np.asarray(lat, float), np.asarray(lon, float)
    top = wgs84.latlon(lat, lon, elevation_m=st.height_m + pm(unc.vertical_m))
    p_rx = top.itrs_xyz.m
    u_ecef = np.stack(pymap3d.enu2uvw(speed * np.sin(heading), speed * np.cos(heading), climb, lat, lon))
    tau = u_tau * unc.time_s
    osc = unc.oscillator_offset_ppb + u_osc * unc.oscillator_uncertainty_ppb
    d0 = datetime.fromtimestamp(t0, UTC)
    t = ts.utc(d0.year, d0.month, d0.day, d0.hour, d0.minute, d0.second + tau)
    checked = 0
    for k, sat in enumerate(sky):
        if pred.elevation_deg[k, 1] < 5.0:
            continue
        pos, vel = sat.at(t).frame_xyz_and_velocity(itrs)
        rho = pos.m - p_rx
        rho_hat = rho / np.linalg.norm(rho, axis=0)
        rr = np.sum(rho_hat * (vel.m_per_s - u_ecef), axis=0)
        truth = apparent_doppler_hz(-rr / (C / L1), L1, osc)
        lo, hi = w.low_hz[k, 1], w.high_hz[k, 1]
        assert truth.min() >= lo - TOL_HZ, (k, truth.min() - lo)
        assert truth.max() <= hi + TOL_HZ, (k, truth.max() - hi)
        span = truth.max() - truth.min()
        assert hi - lo <= 1.10 * span, (k, hi - lo, span)
        RATIOS.append((hi - lo) / span)
        checked += 1
    assert checked >= 4


@requires_orbit_data
def test_one_point_route_without_slip_equals_the_single_site_window():
    # [calc] a route of one point, no slip, is a receiver standing at that point: the
    # windows must equal today's single-site windows (vertical speed bound = climb bound).
    orbits, _, _ = _gps_tle()
    site = Site(47.5, 8.0, 450.0)
    rf = RouteFile("one.csv", "csv", np.array([47.5]), np.array([8.0]), np.array([450.0]),
                   np.array([1585735200.0]), [(0, 1)], [], ["line 2"])
    route = time_route(rf)
    times = 1585735200.0 + np.arange(0.0, 3600.0, 60.0)
    for time_s in (5.0, 120.0):
        unc = Uncertainty(3000.0, 100.0, time_s, 0.0, 1.5, 200.0, 500.0)
        motion = route_motion(route, times, MotionUncertainty(0.0, 3.0, 15.0, 1.5))
        pred_r = predict(orbits, motion.path, times, keep_states=True)
        w_r = doppler_windows(pred_r, unc, shifted=shift_summary(orbits, motion.path, pred_r.times, time_s),
                              motion=motion)
        pred_s = predict(orbits, site, times)
        w_s = doppler_windows(pred_s, unc, shifted=shift_summary(orbits, site, pred_s.times, time_s))
        up = pred_s.elevation_deg > 0
        assert np.max(np.abs(w_r.low_hz - w_s.low_hz)[up]) < 0.01
        assert np.max(np.abs(w_r.high_hz - w_s.high_hz)[up]) < 0.01
        assert np.max(np.abs(w_r.nominal_hz - w_s.nominal_hz)[up]) < 1e-9

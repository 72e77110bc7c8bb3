"""Doppler windows against brute force with skyfield.

For each visible satellite we draw thousands of points inside the stated uncertainties
(position on the ellipsoid within the horizontal disc and the vertical band, true time,
receiver velocity, oscillator offset), compute the true apparent Doppler with skyfield's
satellite and site positions (reference library), and require (a) every draw inside the
planned window and (b) the window no more than 10 % (+1 Hz) wider than the draws span.
Half the draws sit on the boundary of the uncertainty set (where the extremes are), half
are uniform inside it.
"""

from __future__ import annotations

from datetime import UTC, datetime

import numpy as np
import pymap3d
import pymap3d.vincenty
import pytest
from conftest import ORBIT_DATA, requires_orbit_data
from sgp4.api import Satrec

from core.ground.geodesy import Site
from core.orbits.orbit_set import OrbitEntry, OrbitSet, SatelliteInfo
from core.search.windows import Uncertainty, apparent_doppler_hz, doppler_windows, shift_summary
from core.sky.predict import predict

C = 299_792_458.0
L1 = 1575.42e6
# The core and skyfield agree to about 1e-4 Hz on the nominal Doppler (test_geometry), so
# containment is checked to 5 mHz.
TOL_HZ = 5e-3
RATIOS: list[float] = []


def _gps_tle():
    from skyfield.api import EarthSatellite, load

    ts = load.timescale(builtin=True)
    lines = [ln.rstrip() for ln in (ORBIT_DATA / "tle" / "perylune_gps-ops_2020-04-01.txt").open()]
    entries, sky = [], []
    for i in range(0, len(lines) - 2, 3):
        name, l1, l2 = lines[i:i + 3]
        entries.append(OrbitEntry(SatelliteInfo(f"S{i // 3:02d}", "G", name, "tle", "t", 0.0),
                                  satrec=Satrec.twoline2rv(l1, l2)))
        sky.append(EarthSatellite(l1, l2, name, ts))
    return OrbitSet(entries), sky, ts


CASES = [
    # site lat, lon, h; uncertainty; unix time
    ((47.5, 8.0, 500.0), Uncertainty(30e3, 200.0, 5.0, 40.0, 5.0, 100.0, 500.0), 1585735200.0),
    ((-33.9, -70.6, 520.0), Uncertainty(100e3, 1000.0, 60.0, 70.0, 10.0, -300.0, 2000.0), 1585760000.0),
    ((35.0, 139.0, 10.0), Uncertainty(50e3, 500.0, 25.0, 60.0, 5.0, 1000.0, 1000.0), 1585790000.0),
    ((60.2, 24.9, 30.0), Uncertainty(10e3, 100.0, 600.0, 30.0, 3.0, 0.0, 100.0), 1585800000.0),
    ((78.2, 15.6, 50.0), Uncertainty(5e3, 50.0, 0.5, 30.0, 2.0, 0.0, 50.0), 1585780000.0),
]


@requires_orbit_data
@pytest.mark.parametrize("site_t, unc, t0", CASES)
def test_window_contains_every_draw_and_is_tight(site_t, unc, t0):
    from skyfield.api import wgs84
    from skyfield.framelib import itrs

    orbits, sky, ts = _gps_tle()
    site = Site(*site_t)
    pred = predict(orbits, site, np.array([t0 - 30.0, t0, t0 + 30.0]))
    w = doppler_windows(pred, unc, shifted=shift_summary(orbits, site, pred.times, unc.time_s))
    rng = np.random.default_rng(7)
    n = 3000
    boundary = np.arange(n) < n // 2
    az = rng.uniform(0, 360, n)
    r = np.where(boundary, unc.horizontal_m, unc.horizontal_m * np.sqrt(rng.uniform(0, 1, n)))
    dh = np.where(boundary, rng.choice([-1, 1], n), rng.uniform(-1, 1, n)) * unc.vertical_m
    tau = np.where(boundary, rng.choice([-1, 1], n), rng.uniform(-1, 1, n)) * unc.time_s
    vaz = np.radians(rng.uniform(0, 360, n))
    vh = np.where(boundary, 1.0, np.sqrt(rng.uniform(0, 1, n))) * unc.max_horizontal_speed_m_s
    vv = np.where(boundary, rng.choice([-1, 1], n), rng.uniform(-1, 1, n)) * unc.max_vertical_speed_m_s
    osc = unc.oscillator_offset_ppb + np.where(
        boundary, rng.choice([-1, 1], n), rng.uniform(-1, 1, n)) * unc.oscillator_uncertainty_ppb
    # Geodesic offsets on the ellipsoid [reference: pymap3d.vincenty.vreckon].
    lat, lon = pymap3d.vincenty.vreckon(site.lat_deg, site.lon_deg, r, az)
    top = wgs84.latlon(np.asarray(lat), np.asarray(lon), elevation_m=site.height_m + dh)
    p_site = top.itrs_xyz.m  # (3, n)
    # Receiver velocity in ECEF from local east/north/up at each drawn point.
    ve, vn = vh * np.sin(vaz), vh * np.cos(vaz)
    u_ecef = np.stack(pymap3d.enu2uvw(ve, vn, vv, np.asarray(lat), np.asarray(lon)))
    d0 = datetime.fromtimestamp(t0, UTC)
    t = ts.utc(d0.year, d0.month, d0.day, d0.hour, d0.minute, d0.second + tau)
    checked = 0
    for k, sat in enumerate(sky):
        if pred.elevation_deg[k, 1] < 5.0:
            continue
        pos, vel = sat.at(t).frame_xyz_and_velocity(itrs)
        rho = pos.m - p_site
        rho_hat = rho / np.linalg.norm(rho, axis=0)
        rr = np.sum(rho_hat * (vel.m_per_s - u_ecef), axis=0)
        truth = apparent_doppler_hz(-rr / (C / L1), L1, osc)
        lo, hi = w.low_hz[k, 1], w.high_hz[k, 1]
        assert truth.min() >= lo - TOL_HZ, (k, truth.min() - lo)
        assert truth.max() <= hi + TOL_HZ, (k, truth.max() - hi)
        span = truth.max() - truth.min()
        assert hi - lo <= 1.10 * span + 1.0, (k, hi - lo, span)
        RATIOS.append((hi - lo) / span)
        checked += 1
    assert checked >= 4

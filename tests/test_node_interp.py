"""Node interpolation (core.orbits.node_interp): its error bound, and the interpolated
states against the models evaluated at every sample on every real TLE and almanac set.

References: the Lagrange remainder and the Bessel series are checked by independent
numpy computations [calc]; the bound on |J_m(x)| by scipy.special.jv [pub: Abramowitz &
Stegun 9.1.62]; the states by the models themselves (python-sgp4 at every sample, the
IS-GPS-200 almanac model at every sample) on the real files of ../shared/orbit-data.
"""

from __future__ import annotations

import math
from datetime import UTC, datetime

import numpy as np
import pytest
from conftest import ORBIT_DATA, requires_orbit_data

from core.orbits import node_interp as ni
from core.orbits.node_interp import (
    NODES,
    POSITION_TOLERANCE_M,
    VELOCITY_TOLERANCE_M_S,
    kepler_derivative_bound,
    kink_constants,
    remainder_constant,
)

# --- the bound's ingredients -------------------------------------------------------------


def test_remainder_constant_is_the_largest_node_polynomial_over_the_central_interval():
    """[calc] max |prod_j (x - j)| / N! on a fine grid of the central interval."""
    for n in (4, 6, 8, 10):
        x = np.linspace(n / 2 - 1, n / 2, 20001)
        p = np.prod([x - j for j in range(n)], axis=0)
        assert math.isclose(remainder_constant(n), np.max(np.abs(p)) / math.factorial(n),
                            rel_tol=1e-9)


def test_weights_reproduce_polynomials_up_to_degree_n_minus_1():
    """[calc] Lagrange interpolation on N nodes is exact for degree < N, not for degree N."""
    x = np.linspace(NODES / 2 - 1, NODES / 2, 37)
    w = ni._weights(x)
    nodes = np.arange(NODES, dtype=float)
    for deg in range(NODES):
        assert np.max(np.abs(nodes ** deg @ w - x ** deg)) < 1e-9 * max(1.0, NODES ** deg)
    assert np.max(np.abs(nodes ** NODES @ w - x ** NODES)) > 1.0


def test_kink_constants_bound_ramps_and_parabolas_anywhere_in_the_stencil():
    """[calc] Random kink positions and abscissae (independent of the constants' grid):
    the interpolation error of a ramp and a half parabola stays below K1 and K2; the sum
    of |weights| below Lambda; each is reached to within 5 %."""
    k1, k2, lebesgue = kink_constants()
    rng = np.random.default_rng(11)
    s = rng.uniform(0.0, NODES - 1.0, 4000)[:, None]
    x = rng.uniform(NODES / 2 - 1, NODES / 2, 4000)
    w = ni._weights(x)                                    # (N, X)
    nodes = np.arange(NODES, dtype=float)
    worst = []
    for power, scale in ((1, 1.0), (2, 0.5)):
        f_nodes = scale * np.maximum(nodes[None, :] - s, 0.0) ** power
        f_x = scale * np.maximum(x[None, :] - s, 0.0) ** power
        worst.append(np.max(np.abs(f_nodes @ w - f_x)))
    assert worst[0] <= k1 and worst[0] > 0.95 * k1 / 1.02
    assert worst[1] <= k2 and worst[1] > 0.95 * k2 / 1.02
    leb = np.max(np.sum(np.abs(w), axis=0))
    assert leb <= lebesgue and leb > 0.95 * lebesgue / 1.02


def test_bessel_bound_used_by_the_series():
    """|J_m(x)| <= (x/2)^m / m! for x >= 0 [pub: Abramowitz & Stegun 9.1.62; values from
    scipy.special.jv]."""
    from scipy.special import jv

    for e in (0.001, 0.02, 0.1, 0.3, 0.5):
        for k in range(1, 60):
            for m in (k - 1, k + 1):
                x = k * e
                assert abs(jv(m, x)) <= (x / 2) ** m / math.factorial(m) * (1 + 1e-12)


def _kepler_fft_sum(e: float, n: float, w: float, order: int) -> float:
    """sum_k |c_k| (|k| n + w)^order from the FFT of the unit ellipse z(M) [calc: an
    independent Kepler solution; coefficients below 1e-13 are rounding and dropped]."""
    k_n = 256
    m = 2 * np.pi * np.arange(k_n) / k_n
    big_e = m.copy()
    for _ in range(60):
        big_e -= (big_e - e * np.sin(big_e) - m) / (1 - e * np.cos(big_e))
    z = (np.cos(big_e) - e) + 1j * np.sqrt(1 - e * e) * np.sin(big_e)
    c = np.abs(np.fft.fft(z)) / k_n
    k = np.abs(np.fft.fftfreq(k_n, 1.0 / k_n))
    keep = c > 1e-13
    return float(np.sum(c[keep] * (k[keep] * n + w) ** order))


@pytest.mark.parametrize("e", [0.0, 0.005, 0.02, 0.08, 0.17, 0.3])
def test_kepler_series_bound_covers_the_exact_spectrum(e):
    """The closed-form series (Bessel bound) is at least the sum over the exact Fourier
    coefficients of the ellipse, and within a modest factor of it for GNSS eccentricities
    [calc: FFT of an independent Kepler solution]."""
    n, w = 1.458e-4, 7.292e-5
    for order in (NODES, NODES + 1):
        exact = _kepler_fft_sum(e, n, w, order)
        bound = float(kepler_derivative_bound(1.0, e, n, order, w))
        assert bound >= exact * (1 - 1e-9), (order, bound, exact)
        if e <= 0.08:
            assert bound <= 1.5 * exact, (order, bound, exact)


def test_bound_on_a_pure_kepler_orbit_holds_without_allowances():
    """A Kepler orbit turning with the Earth (the IS-GPS-200 almanac model, checked against
    PATRIUS in test_geometry) interpolated from nodes h apart: the error is below the
    Kepler part of the bound alone, for eccentricities up to 0.3 and h up to 900 s, and the
    bound is not loose by more than a few orders of magnitude at the widest spacing [calc]."""
    from core.ground.constants import EARTH_ROTATION_RAD_S, GPS_MU_M3_S2
    from core.orbits.almanac_model import AlmanacArrays, almanac_ecef

    ecc = np.array([0.0005, 0.01, 0.05, 0.17, 0.3])
    s = ecc.size
    arrays = AlmanacArrays(np.full(s, 1.2e9), np.full(s, 5153.6), ecc, np.full(s, 0.96),
                           np.linspace(0, 5, s), np.full(s, -8e-9), np.linspace(0.3, 2.0, s),
                           np.linspace(0.1, 6.0, s))
    u0 = 1.2e9 + 3600.0
    for h in (300.0, 600.0, 900.0):
        u = u0 + np.arange(0.0, 86400.0, h / 40.0) + 0.37

        def planes(t):
            p, v = almanac_ecef(arrays, t)
            return p.transpose(2, 0, 1), v.transpose(2, 0, 1), np.zeros(p.shape[:2], np.uint8)

        r1, v1, _ = planes(u)
        r2, v2, _ = ni.interpolated_states(planes, u, h)
        a = arrays.sqrt_a ** 2
        n = np.sqrt(GPS_MU_M3_S2 / a ** 3)
        c = remainder_constant() * h ** NODES
        frame = EARTH_ROTATION_RAD_S + 8e-9
        br = c * kepler_derivative_bound(a, ecc, n, NODES, frame)
        bv = c * kepler_derivative_bound(a, ecc, n, NODES + 1, frame)
        dr = np.max(np.abs(r1 - r2), axis=(0, 2))
        dv = np.max(np.abs(v1 - v2), axis=(0, 2))
        noise_r, noise_v = 1e-15 * a * 3, 1e-15 * a * n * 3     # rounding of the model itself
        assert np.all(dr <= br + noise_r), (h, dr, br)
        assert np.all(dv <= bv + noise_v), (h, dv, bv)
        if h == 900.0:
            assert np.all(dr[:3] > 1e-4 * br[:3]), (dr, br)


# --- every real TLE set ------------------------------------------------------------------

def _tle_files():
    from core.orbits.readers import load_orbits

    out = []
    for path in sorted((ORBIT_DATA / "tle").glob("*")):
        try:
            orbits = load_orbits(path, strict=False)
        except Exception:           # mapping files and reference output are not orbit data
            continue
        out.append((path.name, orbits))
    return out


@requires_orbit_data
def test_sgp4_interpolation_within_its_bound_on_every_real_tle_file():
    """Every satellite of every TLE file, 24 h around the file's median epoch at 7 s (off
    the node lattice by 0.37 s): the interpolated states equal SGP4 at every sample within
    the satellite's own bound, and every bound used is within the stated tolerances
    (2 cm, 1e-5 m/s). Orbits not interpolated (low, eccentric, near SGP4's Lyddane switch,
    strongly drifting resonant ones) are SGP4 itself, bit for bit. Reference: python-sgp4."""
    from core.orbits.sgp4_model import interpolation_bounds, node_step_s, sgp4_ecef_planes

    files = _tle_files()
    assert len(files) >= 8
    counts = {}
    worst_r = worst_v = 0.0
    for name, orbits in files:
        ents = [e for e in orbits.entries if e.satrec is not None]
        t0 = float(np.median([e.info.epoch_unix_s for e in ents]))
        u = t0 - 43200.0 + np.arange(0.0, 86400.0, 7.0) + 0.37
        for g in range(0, len(ents), 40):
            sats = [e.satrec for e in ents[g:g + 40]]
            r1, v1, e1 = sgp4_ecef_planes(sats, u, interpolate=False)
            r2, v2, e2 = sgp4_ecef_planes(sats, u)
            for k, s in enumerate(sats):
                h = node_step_s(s)
                counts[h] = counts.get(h, 0) + 1
                ok = (e1[k] == 0) & (e2[k] == 0)
                # A sample takes the failure of its nodes: never valid where SGP4 failed.
                assert not np.any((e1[k] != 0) & (e2[k] == 0)), (name, ents[g + k].info.sat_id)
                if not h:
                    assert np.array_equal(r1[:, k][:, ok], r2[:, k][:, ok]), ents[g + k].info.sat_id
                    assert np.array_equal(v1[:, k][:, ok], v2[:, k][:, ok])
                    continue
                br, bv = interpolation_bounds(s, h)
                assert br <= POSITION_TOLERANCE_M and bv <= VELOCITY_TOLERANCE_M_S
                dr = float(np.max(np.abs(r1[:, k][:, ok] - r2[:, k][:, ok])))
                dv = float(np.max(np.abs(v1[:, k][:, ok] - v2[:, k][:, ok])))
                assert dr <= br and dv <= bv, (name, ents[g + k].info.sat_id, h, dr, br, dv, bv)
                worst_r, worst_v = max(worst_r, dr), max(worst_v, dv)
    # The GNSS sets are interpolated at the widest spacing, most of them.
    assert counts.get(600.0, 0) > 300 and counts.get(0.0, 0) >= 40, counts
    assert worst_r < POSITION_TOLERANCE_M and worst_v < VELOCITY_TOLERANCE_M_S


@requires_orbit_data
def test_orbits_the_bound_refuses_are_propagated_at_every_sample():
    """Eccentric orbits (Molniya-type, e 0.56-0.97), low orbits, the verification case at
    SGP4's Lyddane switch (14128, i = 0.1996 rad: the model itself jumps by about 1.7 km
    near 2080 min) and the drifting resonant case 9998 get no nodes; the eccentric object
    20169 of the real navigation TLE file (e = 0.72, 2.26 rev/day: 7 m and 0.024 m/s off
    with 60 s cubic nodes) neither. Reference: the case list of SGP4-VER.TLE."""
    from core.orbits.readers import load_orbits
    from core.orbits.sgp4_model import node_step_s

    ver = load_orbits(ORBIT_DATA / "tle" / "sgp4_SGP4-VER.TLE", strict=False)
    steps = {e.info.sat_id: node_step_s(e.satrec) for e in ver.entries}
    for sid in ("X-08195", "X-09880", "X-21897", "X-22674", "X-23333", "X-26975", "X-28623",
                "X-14128", "X-09998", "X-06251", "X-28057"):
        assert steps[sid] == 0.0, sid
    assert steps["X-28129"] == 600.0          # the 12-hour GPS case
    nav = load_orbits(ORBIT_DATA / "tle" / "rtklib_tle_nav_2012-10-31.txt", strict=False)
    ecc = [e for e in nav.entries if e.satrec.ecco > 0.3]
    assert ecc and all(node_step_s(e.satrec) == 0.0 for e in ecc)


@requires_orbit_data
def test_predict_at_30_s_matches_skyfield_doppler_over_a_day():
    """The interpolated path (600 s nodes at a 30 s grid) against skyfield's
    frame_latlon_and_rates over 24 h for the four 2020 GNSS sets: Doppler within 1e-3 Hz
    (limit of the speed target: 0.01 Hz), range within 0.1 m. Reference: skyfield."""
    from skyfield.api import EarthSatellite, load, wgs84

    from core.ground.geodesy import Site
    from core.ground.timeutil import time_grid
    from core.orbits.readers import load_orbit_files
    from core.sky.predict import predict

    sets = ["perylune_gps-ops_2020-04-01.txt", "perylune_galileo_2020-04-01.txt",
            "perylune_glo-ops_2020-04-01.txt", "perylune_beidou_2020-04-01.txt"]
    orbits = load_orbit_files([ORBIT_DATA / "tle" / s for s in sets])
    site = Site(47.37, 8.54, 420.0)
    grid = time_grid(datetime(2020, 4, 1, tzinfo=UTC), datetime(2020, 4, 2, tzinfo=UTC), 30.0)
    pred = predict(orbits, site, grid)
    ts = load.timescale(builtin=True)
    t = ts.utc(2020, 4, 1, 0, 0, grid.unix_s - grid.unix_s[0])
    top = wgs84.latlon(site.lat_deg, site.lon_deg, site.height_m)
    worst_d = worst_r = 0.0
    for k, e in enumerate(orbits.entries):
        _, _, dist, _, _, rr = (EarthSatellite(*e.tle_lines, ts=ts) - top).at(t).frame_latlon_and_rates(top)
        ok = pred.valid[k]
        worst_d = max(worst_d, float(np.max(np.abs(-rr.m_per_s / pred.wavelength_m[k]
                                                  - pred.doppler_hz[k])[ok])))
        worst_r = max(worst_r, float(np.max(np.abs(dist.m - pred.range_m[k])[ok])))
    assert worst_d < 1e-3 and worst_r < 0.1, (worst_d, worst_r)


# --- every real almanac ------------------------------------------------------------------

@requires_orbit_data
def test_almanac_interpolation_within_its_bound_on_every_real_almanac():
    """Every YUMA and SEM file (GPS and the QZSS almanac, e up to 0.08), 24 h from the
    reference time at 7 s: predict's states equal the IS-GPS-200 model evaluated at every
    sample within each satellite's bound, within 2 cm and 1e-5 m/s."""
    from core.ground.timeutil import unix_to_gps_s
    from core.orbits.almanac_model import (
        AlmanacArrays,
        almanac_ecef,
        interpolation_bounds,
        node_steps_s,
    )
    from core.orbits.readers import load_orbits
    from core.sky.predict import propagate_ecef

    paths = sorted((ORBIT_DATA / "yuma").glob("*")) + sorted((ORBIT_DATA / "sem").glob("*"))
    assert len(paths) >= 8
    used = 0
    for path in paths:
        orbits = load_orbits(path)
        arrays = AlmanacArrays.from_records([e.almanac for e in orbits.entries])
        t0 = float(np.median([e.info.epoch_unix_s for e in orbits.entries]))
        u = t0 + np.arange(0.0, 86400.0, 7.0) + 0.37
        pos, vel, ok, _ = propagate_ecef(orbits, u)
        p_ref, v_ref = almanac_ecef(arrays, unix_to_gps_s(u))
        steps = node_steps_s(arrays)
        for k, h in enumerate(steps):
            dr = float(np.max(np.abs(pos[k] - p_ref[k])))
            dv = float(np.max(np.abs(vel[k] - v_ref[k])))
            if not h:
                assert dr == 0.0 and dv == 0.0
                continue
            used += 1
            br, bv = (float(b[k]) for b in interpolation_bounds(arrays, h))
            assert br <= POSITION_TOLERANCE_M and bv <= VELOCITY_TOLERANCE_M_S
            assert dr <= br and dv <= bv, (path.name, k, h, dr, br, dv, bv)
        assert ok.all()
    assert used > 200


@requires_orbit_data
def test_a_piece_on_the_whole_grids_lattice_equals_the_whole_grid():
    """A caller predicting a window piece by piece (core.plan.long_window, acqplan doppler)
    passes the whole grid's first time as node_anchor_s: a piece starting inside a node
    interval then equals the whole grid's columns to rounding; on its own lattice it
    differs by the interpolation error (sub-millimetre, above rounding) [calc]."""
    from core.ground.geodesy import Site
    from core.ground.timeutil import time_grid
    from core.orbits.readers import load_orbit_files
    from core.sky.predict import predict

    orbits = load_orbit_files([ORBIT_DATA / "tle" / n for n in
                               ("perylune_gps-ops_2020-04-01.txt", "perylune_beidou_2020-04-01.txt")])
    site = Site(47.37, 8.54, 420.0)
    grid = time_grid(datetime(2020, 4, 1, tzinfo=UTC), datetime(2020, 4, 1, 6, tzinfo=UTC), 30.0)
    u = grid.unix_s
    whole = predict(orbits, site, grid)
    a, b = 7, 500                                     # 600 s nodes: 20 samples an interval
    same = predict(orbits, site, u[a:b], node_anchor_s=float(u[0]))
    own = predict(orbits, site, u[a:b])
    assert np.allclose(same.range_m, whole.range_m[:, a:b], rtol=1e-13, atol=1e-7)
    assert np.allclose(same.doppler_hz, whole.doppler_hz[:, a:b], rtol=1e-12, atol=1e-9)
    d = np.max(np.abs(own.range_m - whole.range_m[:, a:b]))
    assert 1e-7 < d < POSITION_TOLERANCE_M * 2

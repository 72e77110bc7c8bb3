"""Benchmark: predict() against a per-satellite skyfield loop and bare SatrecArray.

Every satellite of the combined real TLE sets (../shared/orbit-data/tle/perylune_*, about
130 satellites) over 24 h at 10 s steps. In one run: time ``predict`` (azimuth, elevation,
range, range rate, Doppler, Doppler rate), a per-satellite skyfield loop computing the
same azimuth/elevation/Doppler, and the bare ``SatrecArray.sgp4`` call that predict
contains; check agreement within 0.01 Hz; print times and ratios.

Targets (foundation issue): predict >= 3x faster than the skyfield loop, and under 1.5x
the bare SatrecArray propagation.

Run: python benchmarks/bench_predict.py [--hours H] [--step S]
"""

from __future__ import annotations

import argparse
import sys
import time
from datetime import UTC, datetime
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))
DATA = REPO.parent / "shared" / "orbit-data" / "tle"
SETS = ["perylune_gps-ops_2020-04-01.txt", "perylune_galileo_2020-04-01.txt",
        "perylune_glo-ops_2020-04-01.txt", "perylune_beidou_2020-04-01.txt"]


def best_of(fn, repeat):
    best, out = np.inf, None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t0)
    return best, out


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--hours", type=float, default=24.0)
    ap.add_argument("--step", type=float, default=10.0)
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    if not DATA.is_dir():
        print(f"skipped: {DATA} not found")
        return 0
    from sgp4.api import SatrecArray
    from skyfield.api import EarthSatellite, load, wgs84

    from core.ground.geodesy import Site
    from core.ground.timeutil import jd_split_utc, time_grid
    from core.orbits.readers import load_orbit_files
    from core.sky.predict import predict

    orbits = load_orbit_files([DATA / s for s in SETS])
    site = Site(47.37, 8.54, 420.0)
    start = datetime(2020, 4, 1, tzinfo=UTC)
    end = datetime.fromtimestamp(start.timestamp() + args.hours * 3600, UTC)
    grid = time_grid(start, end, args.step)
    n_s, n_t = len(orbits), len(grid)
    print(f"{n_s} satellites x {n_t} times = {n_s * n_t:,} samples")

    t_pred, pred = best_of(lambda: predict(orbits, site, grid), args.repeat)

    satrecs = [e.satrec for e in orbits.entries]

    def bare():
        jd, fr = jd_split_utc(grid.unix_s)
        return SatrecArray(satrecs).sgp4(jd, fr)

    t_bare, _ = best_of(bare, args.repeat)

    # What predict itself propagates: slow orbits only at 60 s nodes (core.sgp4_model).
    from core.orbits.sgp4_model import NODE_STEP_S

    def bare_nodes():
        u = np.arange(grid.unix_s[0] - NODE_STEP_S, grid.unix_s[-1] + 2 * NODE_STEP_S, NODE_STEP_S)
        jd, fr = jd_split_utc(u)
        return SatrecArray(satrecs).sgp4(jd, fr)

    t_nodes, _ = best_of(bare_nodes, args.repeat)

    ts = load.timescale(builtin=True)
    top = wgs84.latlon(site.lat_deg, site.lon_deg, site.height_m)
    t_sky = ts.utc(2020, 4, 1, 0, 0, grid.unix_s - grid.unix_s[0])
    lam = pred.wavelength_m  # each satellite's own signal (GLONASS k=0, BeiDou B1I)

    def loop():
        out = np.empty((n_s, n_t))
        els = np.empty((n_s, n_t))
        for k, e in enumerate(orbits.entries):
            sat = EarthSatellite(*e.tle_lines, ts=ts)
            el, az, _, _, _, rr = (sat - top).at(t_sky).frame_latlon_and_rates(top)
            out[k] = -rr.m_per_s / lam[k]
            els[k] = el.degrees
        return out, els

    t_loop, (dop_sky, _) = best_of(loop, 1)
    ok = pred.valid
    dmax = float(np.max(np.abs(dop_sky[ok] - pred.doppler_hz[ok])))
    print(f"predict:              {t_pred:8.3f} s")
    print(f"bare SatrecArray:     {t_bare:8.3f} s")
    print(f"bare SatrecArray at the 60 s nodes predict propagates: {t_nodes:8.3f} s")
    print(f"skyfield loop:        {t_loop:8.3f} s")
    print(f"max |Doppler difference| predict vs skyfield: {dmax:.2e} Hz (limit 0.01 Hz)")
    print(f"ratio skyfield loop / predict : {t_loop / t_pred:6.2f}x  (target >= 3)")
    print(f"ratio predict / bare SatrecArray (every sample): {t_pred / t_bare:6.2f}x  (target < 1.5)")
    print(f"ratio predict / bare SatrecArray (its 60 s nodes): {t_pred / t_nodes:6.2f}x")
    return 0 if dmax < 0.01 else 1


if __name__ == "__main__":
    raise SystemExit(main())

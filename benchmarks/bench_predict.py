"""Benchmark: predict() against a per-satellite skyfield loop and bare SatrecArray.

Every satellite of the combined real TLE sets (../shared/orbit-data/tle/perylune_*, about
130 satellites) over a window at each of the steps given (default 30 s, 10 s and 1 s). In
one run, per step, three contenders compute on the same samples:

* ``predict`` (azimuth, elevation, range, Doppler, Doppler rate, elevation rate);
* a per-satellite skyfield loop computing azimuth/elevation/Doppler (``frame_latlon_and_rates``);
* the bare ``SatrecArray.sgp4`` call at every sample (TEME states only, no rotation, no
  geometry).

Every contender gets one untimed warm-up and the same number of timed repeats, run
interleaved (round robin: predict, loop, bare, predict, ...), so that a load change on the
shared machine hits all of them alike; the figures are medians. predict's Doppler is
checked against skyfield's within 0.01 Hz.

A second part measures peak memory: ``predict`` over 24 h at 1 s for the 96 satellites of
the demo, in a fresh subprocess (peak resident set from ``resource.getrusage``), against
the same subprocess stopping just before the call.

Targets (speed issue): predict >= 3x faster than the skyfield loop at every step, at most
1.5x the bare SatrecArray call; 24 h at 1 s, 96 satellites: peak <= 1 GB.

Run: python benchmarks/bench_predict.py [--hours H] [--steps 30,10,1] [--repeat N] [--no-memory]
"""

from __future__ import annotations

import argparse
import statistics
import subprocess
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


def interleaved(contenders: dict, repeat: int) -> tuple[dict[str, float], dict[str, object]]:
    """Median seconds per contender: one warm-up each, then ``repeat`` rounds, round robin."""
    results = {name: fn() for name, fn in contenders.items()}          # warm-up
    times: dict[str, list[float]] = {name: [] for name in contenders}
    for _ in range(repeat):
        for name, fn in contenders.items():
            t0 = time.perf_counter()
            results[name] = fn()
            times[name].append(time.perf_counter() - t0)
    return {name: statistics.median(v) for name, v in times.items()}, results


MEMORY_CHILD = r"""
import resource, sys, json
sys.path.insert(0, {repo!r})
import tempfile
from pathlib import Path
from core.files.demo import write_demo
from core.files.scenario import load_scenario
from core.orbits.readers import load_orbit_files
from core.ground.geodesy import Site
from core.ground.timeutil import TimeGrid
from core.sky.predict import predict
import numpy as np
with tempfile.TemporaryDirectory() as tmp:
    sc = load_scenario(write_demo(Path(tmp)))
    orbits = load_orbit_files(sc.resolved_orbit_files(), mapping=sc.resolved_mapping(),
                              reference_time=sc.time.start_unix_s)
grid = TimeGrid(sc.time.start_unix_s + np.arange(0.0, {hours} * 3600 + 0.5, {step}))
site = Site(sc.site.lat_deg, sc.site.lon_deg, sc.site.height_m)
before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
if {run}:
    p = predict(orbits, site, grid)
    n = p.doppler_hz.shape
else:
    n = (len(orbits), len(grid))
peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
print(json.dumps({{"before_kb": before, "peak_kb": peak, "shape": list(n)}}))
"""


def peak_memory(hours: float, step: float, run: bool) -> dict:
    import json

    code = MEMORY_CHILD.format(repo=str(REPO), hours=hours, step=step, run=run)
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--hours", type=float, default=24.0)
    ap.add_argument("--steps", default="30,10,1", help="comma-separated steps in seconds")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--no-memory", action="store_true")
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
    ts = load.timescale(builtin=True)
    top = wgs84.latlon(site.lat_deg, site.lon_deg, site.height_m)
    satrecs = [e.satrec for e in orbits.entries]
    sky_sats = [EarthSatellite(*e.tle_lines, ts=ts) for e in orbits.entries]
    ok_all = True
    for step in (float(s) for s in args.steps.split(",")):
        grid = time_grid(start, end, step)
        n_s, n_t = len(orbits), len(grid)
        t_sky = ts.utc(2020, 4, 1, 0, 0, grid.unix_s - grid.unix_s[0])
        jd, fr = jd_split_utc(grid.unix_s)
        lam = predict(orbits, site, grid.unix_s[:2]).wavelength_m

        def loop(t_sky=t_sky, n_t=n_t, lam=lam):
            out = np.empty((len(sky_sats), n_t))
            for k, sat in enumerate(sky_sats):
                _, _, _, _, _, rr = (sat - top).at(t_sky).frame_latlon_and_rates(top)
                out[k] = -rr.m_per_s / lam[k]
            return out

        contenders = {"predict": lambda grid=grid: predict(orbits, site, grid),
                      "skyfield loop": loop,
                      "bare SatrecArray": lambda jd=jd, fr=fr: SatrecArray(satrecs).sgp4(jd, fr)}
        med, res = interleaved(contenders, args.repeat)
        pred, dop_sky = res["predict"], res["skyfield loop"]
        ok = pred.valid
        dmax = float(np.max(np.abs(dop_sky[ok] - pred.doppler_hz[ok])))
        ok_all &= dmax < 0.01
        print(f"\nstep {step:g} s: {n_s} satellites x {n_t} times = {n_s * n_t:,} samples "
              f"(median of {args.repeat}, interleaved, one warm-up each)")
        for name, t in med.items():
            print(f"  {name:18s} {t:8.3f} s")
        print(f"  max |Doppler difference| predict vs skyfield: {dmax:.2e} Hz (limit 0.01 Hz)")
        print(f"  skyfield loop / predict : {med['skyfield loop'] / med['predict']:6.2f}x  (target >= 3)")
        print(f"  predict / bare SatrecArray: {med['predict'] / med['bare SatrecArray']:6.2f}x  "
              "(target <= 1.5)")
        del res, pred, dop_sky
    if not args.no_memory:
        base = peak_memory(24.0, 1.0, run=False)
        full = peak_memory(24.0, 1.0, run=True)
        print(f"\npredict, demo orbits, 24 h at 1 s ({full['shape'][0]} x {full['shape'][1]}): "
              f"peak RSS {full['peak_kb'] / 1024:.0f} MB (the same process without the call: "
              f"{base['peak_kb'] / 1024:.0f} MB; target <= 1024 MB)")
    return 0 if ok_all else 1


if __name__ == "__main__":
    raise SystemExit(main())

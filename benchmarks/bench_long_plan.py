"""Benchmark: plans over long windows (the demo's 96 satellites at 1 s), each in a fresh
subprocess that reports its own peak resident set (resource.getrusage) and wall time.

Contenders, one untimed warm-up each (fills the OS file cache and writes byte code), then
the same number of repeats, interleaved (round robin); medians and ratios per part:

1. the largest window the whole-grid plan takes (2 h at 1 s, 691,296 satellite-steps):
   ``make_plan`` against ``make_long_plan`` (block by block), same scenario;
2. a 7-day window at 1 s (58 million satellite-steps): ``make_long_plan`` against the bare
   propagation of the same grid (``predict`` over the same blocks, results dropped), the
   floor any plan of the window pays;
3. with ``--cli``: ``acqplan plan WEEK.toml --format json --no-windows -o FILE``, process
   start to file written;
4. with ``--doppler``: ``acqplan doppler`` over the long window at 1 s for the demo's GPS
   satellites, CSV written as it is made, against the bare propagation of the same grid.

The machine is shared: the load average is printed before each part; compare the ratios.

Run: python benchmarks/bench_long_plan.py [--repeat N] [--days D] [--cli] [--doppler]
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]

_CHILD = r"""
import datetime as dt, json, resource, sys, time
sys.path.insert(0, sys.argv[1])
from core.files.scenario import load_scenario
kind, scenario, hours, step = sys.argv[2], sys.argv[3], float(sys.argv[4]), float(sys.argv[5])
sc = load_scenario(scenario)
end = (sc.time.start + dt.timedelta(hours=hours)).isoformat().replace("+00:00", "Z")
sc = sc.with_changes(time={"end": end, "step_s": step})
t0 = time.perf_counter()
extra = {}
if kind == "make_plan":
    from core.plan.pipeline import make_plan
    p = make_plan(sc)
    extra["ttff_median_s"] = p.ttff.median_s
elif kind == "long_plan":
    from core.plan.long_window import make_long_plan
    lp = make_long_plan(sc)
    extra.update(ttff_median_s=lp.plan.ttff.median_s, blocks=lp.n_blocks, kept=lp.kept_times,
                 times=lp.n_times, satellites=len(lp.plan.satellites))
elif kind in ("propagation", "propagation_gps"):
    import numpy as np
    from core.ground.geodesy import Site
    from core.ground.timeutil import time_grid
    from core.plan.long_window import LONG_PLAN_BLOCK_SAMPLES, _outer_blocks
    from core.plan.pipeline import load_satellites
    from core.sky.predict import predict
    orbits, by_system, _ = load_satellites(sc)
    if kind == "propagation_gps":
        orbits = orbits.select([e.info.sat_id for e in orbits.entries if e.info.system == "G"])
    site = Site(sc.site.lat_deg, sc.site.lon_deg, sc.site.height_m)
    u = time_grid(sc.time.start, sc.time.end, sc.time.step_s).unix_s
    for a, b in _outer_blocks(len(orbits), u, LONG_PLAN_BLOCK_SAMPLES):
        predict(orbits, site, u[a:b], signals=by_system, failures={})
extra["seconds"] = time.perf_counter() - t0
extra["peak_mb"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
print(json.dumps(extra))
"""

_CLI_CHILD = r"""
import json, resource, sys, time
sys.path.insert(0, sys.argv[1])
t0 = time.perf_counter()
from planner_gui.cli import main
code = main(sys.argv[2:])
print(json.dumps({"code": code, "seconds": time.perf_counter() - t0,
                  "peak_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0}))
"""


def _load() -> str:
    return " ".join(f"{x:.2f}" for x in os.getloadavg())


def _child(code: str, *args: str) -> dict:
    env = dict(os.environ, OPENBLAS_NUM_THREADS="1", OMP_NUM_THREADS="1")
    out = subprocess.run([sys.executable, "-c", code, str(REPO), *args], capture_output=True,
                         text=True, env=env, timeout=3600)
    if out.returncode != 0:
        raise SystemExit(f"child failed: {out.stderr.strip()[-2000:]}")
    return json.loads(out.stdout.strip().splitlines()[-1])


def interleaved(contenders: dict, repeat: int) -> dict[str, list[dict]]:
    for fn in contenders.values():
        fn()
    runs: dict[str, list[dict]] = {name: [] for name in contenders}
    for _ in range(repeat):
        for name, fn in contenders.items():
            runs[name].append(fn())
    return runs


def _report(runs: dict[str, list[dict]], base: str) -> None:
    med = {n: (statistics.median(r["seconds"] for r in v), statistics.median(r["peak_mb"] for r in v))
           for n, v in runs.items()}
    b_s, b_mb = med[base]
    for name, (s, mb) in med.items():
        info = runs[name][-1]
        more = ", ".join(f"{k} {info[k]:g}" if isinstance(info[k], float) else f"{k} {info[k]}"
                         for k in ("blocks", "kept", "times", "satellites", "ttff_median_s") if k in info)
        print(f"  {name:<12} {s:8.2f} s ({s / b_s:5.2f}x)   peak {mb:7.0f} MB ({mb / b_mb:5.2f}x)"
              + (f"   [{more}]" if more else ""))


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=1, help="timed repeats per contender (default 1)")
    ap.add_argument("--days", type=float, default=7.0, help="long window in days (default 7)")
    ap.add_argument("--cli", action="store_true", help="also time acqplan plan on the long window")
    ap.add_argument("--doppler", action="store_true",
                    help="also time acqplan doppler (GPS, CSV) on the long window")
    ap.add_argument("--skip-small", action="store_true", help="leave part 1 out")
    ap.add_argument("--skip-plan", action="store_true", help="leave part 2 out")
    args = ap.parse_args()
    sys.path.insert(0, str(REPO))
    from core.files.demo import write_demo

    folder = Path(tempfile.mkdtemp(prefix="bench_long_plan_"))
    scenario = str(write_demo(folder))
    if not args.skip_small:
        print(f"1. demo, 2 h at 1 s (691,296 satellite-steps; load average {_load()})")
        runs = interleaved({k: (lambda k=k: _child(_CHILD, k, scenario, "2", "1"))
                            for k in ("make_plan", "long_plan")}, args.repeat)
        _report(runs, "make_plan")
    hours = args.days * 24.0
    if not args.skip_plan:
        print(f"2. demo, {args.days:g} days at 1 s (load average {_load()})")
        runs = interleaved({k: (lambda k=k: _child(_CHILD, k, scenario, str(hours), "1"))
                            for k in ("propagation", "long_plan")}, args.repeat)
        _report(runs, "propagation")
    if args.cli:
        text = Path(scenario).read_text(encoding="utf-8")
        from datetime import datetime, timedelta

        end = (datetime(2027, 5, 18, 4) + timedelta(hours=hours)).strftime("%Y-%m-%dT%H:%M:%SZ")
        text = text.replace('end = "2027-05-18T06:00:00Z"', f'end = "{end}"', 1)
        text = text.replace("step_s = 30", "step_s = 1", 1)
        week = Path(scenario).with_name("long.toml")
        week.write_text(text, encoding="utf-8")
        out = folder / "long.json"
        print(f"3. acqplan plan on {args.days:g} days at 1 s, JSON without per-step lists "
              f"(load average {_load()})")
        runs = interleaved({"acqplan plan": lambda: _child(
            _CLI_CHILD, "plan", str(week), "--format", "json", "--no-windows", "-o", str(out))},
            args.repeat)
        _report(runs, "acqplan plan")
        print(f"  JSON {out.stat().st_size / 1e6:.2f} MB")
    if args.doppler:
        from datetime import datetime, timedelta

        end = (datetime(2027, 5, 18, 4) + timedelta(hours=hours)).strftime("%Y-%m-%dT%H:%M:%SZ")
        out = folder / "doppler.csv"
        argv = ["doppler", "--orbits", str(Path(scenario).with_name("demo_gps_yuma.txt")),
                "--site", "49.6183,10.1327,318", "--start", "2027-05-18T04:00:00Z", "--end", end,
                "--step", "1", "--format", "csv", "-o", str(out)]
        print(f"4. acqplan doppler, GPS, {args.days:g} days at 1 s, CSV (load average {_load()})")
        runs = interleaved({
            "propagation": lambda: _child(_CHILD, "propagation_gps", scenario, str(hours), "1"),
            "doppler csv": lambda: _child(_CLI_CHILD, *argv)}, args.repeat)
        _report(runs, "propagation")
        print(f"  CSV {out.stat().st_size / 1e6:.0f} MB, {sum(1 for _ in out.open()) - 1:,} rows")


if __name__ == "__main__":
    main()

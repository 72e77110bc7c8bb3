"""Benchmark: planning a drive (route + events) against one single-site plan.

The demo drive scenario (sample data, invented): the 64 km loop over the 2 h window at
30 s, with 6 events (5 from the scenario and the re-acquisition the tunnel makes), each
planned over ``event_horizon_min`` (15 min here, the key's default) with its own Monte
Carlo (``event_monte_carlo_runs``, default 200). The baseline is ``make_plan`` of the plain
demo scenario over the same 2 h window (propagation, windows, timeline and a 500-run
Monte Carlo). Both start from the files on disk (route file read, orbit files read).

Contenders get the same warm-up (1 run each) and repeats, interleaved (baseline, drive,
baseline, drive, ...), so that the shared machine's load falls on both alike; the ratio
of the medians is the figure. Target: drive / single-site <= 3. The processor time of the
process (time.process_time) is printed beside the wall time: on a shared machine it is less
disturbed by the other work.
Run: python benchmarks/bench_route.py [--repeat N]
"""

from __future__ import annotations

import argparse
import statistics
import sys
import tempfile
import time
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=7)
    args = ap.parse_args(argv)

    from core.files.demo import write_demo
    from core.files.scenario import load_scenario
    from core.plan.events import plan_drive
    from core.plan.pipeline import make_plan

    with tempfile.TemporaryDirectory() as tmp:
        write_demo(tmp)
        text = (Path(tmp) / "demo_drive_scenario.toml").read_text()
        text = text.replace("event_horizon_min = 20", "event_horizon_min = 15")
        (Path(tmp) / "bench_drive.toml").write_text(text)
        drive_sc = load_scenario(Path(tmp) / "bench_drive.toml")
        site_sc = load_scenario(Path(tmp) / "demo_scenario.toml")
        assert drive_sc.time == site_sc.time

        contenders = {"single-site plan": lambda: make_plan(site_sc),
                      "drive (6 events)": lambda: plan_drive(drive_sc)}
        times = {k: [] for k in contenders}
        cpu = {k: [] for k in contenders}
        for fn in contenders.values():          # warm-up: imports, caches
            fn()
        n_events = len(plan_drive(drive_sc).events)
        for _ in range(args.repeat):
            for name, fn in contenders.items():
                t0, c0 = time.perf_counter(), time.process_time()
                fn()
                times[name].append(time.perf_counter() - t0)
                cpu[name].append(time.process_time() - c0)
    med = {k: statistics.median(v) for k, v in times.items()}
    med_cpu = {k: statistics.median(v) for k, v in cpu.items()}
    print(f"window {drive_sc.time.start.isoformat()} .. {drive_sc.time.end.isoformat()}, step "
          f"{drive_sc.time.step_s:g} s; {n_events} events, {args.repeat} interleaved repeats after 1 warm-up")
    for k, v in times.items():
        print(f"  {k:18s} median {med[k] * 1000:7.1f} ms   min {min(v) * 1000:7.1f} ms   "
              f"(processor time: median {med_cpu[k] * 1000:7.1f} ms)")
    ratio = med["drive (6 events)"] / med["single-site plan"]
    ratio_cpu = med_cpu["drive (6 events)"] / med_cpu["single-site plan"]
    print(f"  ratio drive / single-site: {ratio:.2f}x (target <= 3x): {'met' if ratio <= 3 else 'NOT met'}"
          f"; processor time {ratio_cpu:.2f}x")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())

"""Benchmark: a sweep of the demo, 288 departures x 12 search settings, on one core, on a
local process pool of every core, and on a two-worker Dask LocalCluster.

The sweep: departures every 5 min over 24 h from the demo's start (each keeps the demo's
2 h window), x coherent_ms {4, 8, 12} x noncoherent {5, 10} x channels {8, 12}. Every
contender first runs the same warm-up sweep (2 departures x 12 settings: imports loaded,
the pool's process server or the cluster's workers started), then the contenders run the
timed sweep in turn, interleaved, the same number of repeats each. Every process runs one
BLAS thread. Reported: the best
time of each, the speed-up over one core, and the speed-up per core (speed-up / workers).
The rows of every contender are compared: they must be equal (same seeds).

The local pool is created inside each timed sweep (as ``acqplan sweep`` does: its start
is part of the cost); the cluster exists before (as a cluster does), and each timed sweep
ships the orbit files to its workers again.

Run: python benchmarks/bench_sweep.py [--departures 288] [--mc-runs N] [--repeats 1]
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
from pathlib import Path

# One BLAS thread in this process too, so that "1 core" is one core (the pool's workers
# get one each from core.plan.sweep); set before numpy is imported.
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))
os.environ["PYTHONPATH"] = os.pathsep.join([str(REPO), os.environ.get("PYTHONPATH", "")]).rstrip(os.pathsep)

VARY = {"coherent_ms": [4, 8, 12], "noncoherent": [5, 10], "channels": [8, 12]}


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--departures", type=int, default=288, help="departures, every 5 min (default 288 = 24 h)")
    ap.add_argument("--mc-runs", type=int, default=None,
                    help="Monte Carlo runs per plan (default: the demo's 500)")
    ap.add_argument("--repeats", type=int, default=1)
    ap.add_argument("--no-dask", action="store_true")
    args = ap.parse_args()

    from core.api import load_scenario, run_sweep, sweep_spec, write_demo
    from core.plan.sweep import departure_times

    tmp = Path(tempfile.mkdtemp(prefix="bench_sweep_"))
    sc = load_scenario(write_demo(tmp))
    if args.mc_runs is not None:
        sc = sc.with_changes(search={"monte_carlo_runs": args.mc_runs})
    start = sc.time.start_unix_s

    def spec_for(n: int):
        from core.api import iso_z

        deps = departure_times(iso_z(start), iso_z(start + (n - 1) * 300.0), 300.0)
        return sweep_spec(sc, VARY, deps)

    spec = spec_for(args.departures)
    warm = spec_for(2)
    cores = os.cpu_count() or 1
    contenders: dict[str, tuple[int, object]] = {
        "1 core (in process)": (1, lambda s: run_sweep(sc, s, workers=1)),
        f"process pool, {cores} workers": (cores, lambda s: run_sweep(sc, s, workers=cores)),
    }
    cluster = client = None
    if not args.no_dask:
        from distributed import Client, LocalCluster

        cluster = LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                               dashboard_address=":0", silence_logs=50)
        client = Client(cluster)
        contenders["Dask LocalCluster, 2 workers"] = (2, lambda s: run_sweep(sc, s, client=client))

    print(f"sweep of the demo: {len(spec.departures_unix_s)} departures x {len(spec.settings)} "
          f"settings = {spec.n_combinations} plans, {sc.search.monte_carlo_runs} Monte Carlo runs each, "
          f"{spec.window_s / 3600:g} h window at {sc.time.step_s:g} s; machine: {cores} cores "
          f"(shared with other work: timings vary)")
    for name, (_, fn) in contenders.items():
        t0 = time.perf_counter()
        fn(warm)
        print(f"  warm-up {name}: {time.perf_counter() - t0:.1f} s", flush=True)
    best: dict[str, float] = {name: float("inf") for name in contenders}
    rows: dict[str, list] = {}
    for r in range(args.repeats):
        for name, (_, fn) in contenders.items():
            load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
            t0 = time.perf_counter()
            res = fn(spec)
            dt = time.perf_counter() - t0
            best[name] = min(best[name], dt)
            rows[name] = res.rows
            print(f"  repeat {r + 1} {name}: {dt:.1f} s (load average before: {load:.1f} "
                  f"on {cores} cores)", flush=True)
    if client is not None:
        client.close()
        cluster.close()

    base_name = next(iter(contenders))
    base = best[base_name]
    print()
    print(f"{'contender':32s} {'time':>9s} {'plans/s':>8s} {'speed-up':>9s} {'per core':>9s}")
    for name, (n, _) in contenders.items():
        t = best[name]
        up = base / t
        print(f"{name:32s} {t:8.1f}s {spec.n_combinations / t:8.1f} {up:8.2f}x {up / n:8.2f}x")
    same = all(rows[name] == rows[base_name] for name in contenders)
    print(f"\nrows equal across contenders: {same}")
    return 0 if same else 1


if __name__ == "__main__":
    sys.exit(main())

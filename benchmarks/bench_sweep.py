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

With ``--drive``: a small sweep of the demo drive (route, surroundings, 6 events; default
3 departures every 10 min x 8 settings: coherent_ms {4, 8} x oscillator_uncertainty_ppb
{200, 500} x channels {8, 12}), in this process, with every drive's geometry made once per
departure and shared by its settings (core.plan.events.drive_geometry / plan_drive_search,
what ``acqplan sweep`` does) against the geometry made again for every setting (a plain
plan_drive each, as before); same warm-up, repeats interleaved, rows compared.

Run: python benchmarks/bench_sweep.py [--departures 288] [--mc-runs N] [--repeats 1]
     python benchmarks/bench_sweep.py --drive [--departures 3] [--repeats 3]
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
DRIVE_VARY = {"coherent_ms": [4, 8], "oscillator_uncertainty_ppb": [200, 500], "channels": [8, 12]}


def drive_sweep(departures: int, repeats: int) -> int:
    """Shared drive geometry against the geometry per setting (see the module docstring)."""
    import statistics

    from core.api import iso_z, load_scenario, sweep_spec, write_demo
    from core.plan import sweep as sw
    from core.plan.sweep import departure_times

    tmp = Path(tempfile.mkdtemp(prefix="bench_sweep_drive_"))
    write_demo(tmp)
    sc = load_scenario(tmp / "demo_drive_scenario.toml")
    start = sc.time.start_unix_s
    deps = departure_times(iso_z(start), iso_z(start + (departures - 1) * 600.0), 600.0)
    spec = sweep_spec(sc, DRIVE_VARY, deps)
    warm = sweep_spec(sc, DRIVE_VARY, deps[:1])

    def run(s, share: bool):
        rows = [r for u in sw.units(sc, s, 1) for r in sw.run_unit(u, share_geometry=share)]
        return sorted(rows, key=lambda r: (r.departure_unix_s, r.setting))

    contenders = {"geometry per setting (plain plan_drive)": False, "geometry shared per departure": True}
    print(f"drive sweep of the demo drive: {len(deps)} departures x {len(spec.settings)} settings = "
          f"{spec.n_combinations} drive plans of {len(sc.events)} scenario events, in this process")
    for share in contenders.values():
        run(warm, share)
    times: dict[str, list[float]] = {k: [] for k in contenders}
    rows = {}
    for r in range(repeats):
        for name, share in contenders.items():
            load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
            t0 = time.perf_counter()
            rows[name] = run(spec, share)
            times[name].append(time.perf_counter() - t0)
            print(f"  repeat {r + 1} {name}: {times[name][-1]:.2f} s (load average before: {load:.1f})",
                  flush=True)
    names = list(contenders)
    med = {k: statistics.median(v) for k, v in times.items()}
    for k in names:
        print(f"  {k:40s} median {med[k]:7.2f} s   best {min(times[k]):7.2f} s")
    print(f"  speed-up of sharing: {med[names[0]] / med[names[1]]:.2f}x (medians), "
          f"{min(times[names[0]]) / min(times[names[1]]):.2f}x (best)")
    same = rows[names[0]] == rows[names[1]]
    print(f"  rows equal: {same}")
    return 0 if same else 1


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--departures", type=int, default=288, help="departures, every 5 min (default 288 = 24 h)")
    ap.add_argument("--mc-runs", type=int, default=None,
                    help="Monte Carlo runs per plan (default: the demo's 500)")
    ap.add_argument("--repeats", type=int, default=1)
    ap.add_argument("--no-dask", action="store_true")
    ap.add_argument("--drive", action="store_true",
                    help="a small drive sweep: shared drive geometry against the geometry per setting")
    args = ap.parse_args()
    if args.drive:
        return drive_sweep(args.departures if args.departures != 288 else 3, args.repeats)

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
        import dask
        from distributed import Client, LocalCluster

        # distributed leaves its worker settings in this process's environment
        # (MALLOC_TRIM_THRESHOLD_=65536 among them); the process pool's server, started
        # after it, would hand them to the pool's workers, whose glibc then returns memory
        # to the system at every large free: half their time in the kernel (96 departures:
        # the pool 1.13x instead of 1.86x). The environment is put back as it was.
        # And the cluster's own workers: distributed starts them with
        # MALLOC_TRIM_THRESHOLD_=65536 (its default pre-spawn environment), which costs a
        # plan that allocates and frees arrays of a few MB the same kernel time (96
        # departures: 1.02x with it, 1.77x with 128 MiB). Set as README advises for
        # clusters that run sweeps.
        dask.config.set({"distributed.nanny.pre-spawn-environ.MALLOC_TRIM_THRESHOLD_": 128 * 2**20})
        saved_environ = dict(os.environ)
        cluster = LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                               dashboard_address=":0", silence_logs=50)
        client = Client(cluster)
        os.environ.clear()
        os.environ.update(saved_environ)
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

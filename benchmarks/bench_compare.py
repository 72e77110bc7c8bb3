"""Benchmark: reading a receiver record and holding it against the plan, against the plan.

Case (issue 9): the real 2-hour SLAC station record (RINEX 2.11, 241 epochs at 30 s,
GPS + GLONASS + Galileo, 20 observation types) with the same day's GPS broadcast
navigation file, the plan made from the record's header position and first/last epoch.

Contenders, each with one warm-up call and the same number of repeats, interleaved
(one of each per round, so load changes on the shared machine hit all alike):

* plan: ``make_plan(scenario)`` as ``acqplan plan`` runs it (orbit file, propagation,
  windows, bins, detection, timeline, Monte Carlo TTFF); and without the Monte Carlo
  stage, as ``acqplan compare`` makes it;
* record + compare: ``load_record`` (the L1 band, as ``acqplan compare`` reads it with a
  scenario) and ``compare_record`` on the plan; and with every observation type read.

Target: record + compare at most as long as the plan (ratio <= 1).
Run: python benchmarks/bench_compare.py [--repeat N]   (skips without ../shared)
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))
SHARED = REPO.parent / "shared"
RECORD = SHARED / "field-data" / "rinex-obs" / "gnsslibpy_slac1180.21o"
NAV = SHARED / "orbit-data" / "rinex-nav" / "gnsslibpy_brdc1180.21n"


def main() -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeat", type=int, default=7)
    args = ap.parse_args()
    if not (RECORD.is_file() and NAV.is_file()):
        print(f"skipped: real data not found under {SHARED}")
        return 0
    from core.api import compare_record, load_record, make_plan, record_bands, record_scenario

    scenario = record_scenario(load_record(RECORD), [str(NAV)])
    bands = record_bands(scenario.receiver.signals)
    plan_nomc = make_plan(scenario, monte_carlo=False)

    contenders = {
        "plan (full, with Monte Carlo)": lambda: make_plan(scenario),
        "plan without Monte Carlo": lambda: make_plan(scenario, monte_carlo=False),
        "record (L1 band) + compare": lambda: compare_record(plan_nomc, load_record(RECORD, bands)),
        "record (all types) + compare": lambda: compare_record(plan_nomc, load_record(RECORD)),
        "  of which reading (L1 band)": lambda: load_record(RECORD, bands),
    }
    for fn in contenders.values():       # warm-up: imports, caches, first allocation
        fn()
    times: dict[str, list[float]] = {k: [] for k in contenders}
    for _ in range(args.repeat):
        for name, fn in contenders.items():
            t0 = time.perf_counter()
            fn()
            times[name].append(time.perf_counter() - t0)
    med = {k: statistics.median(v) for k, v in times.items()}
    rec = load_record(RECORD)
    print(f"SLAC record: {rec.n_epochs} epochs, {len(rec.sat_ids)} satellites, "
          f"{len(rec.codes_for('G'))} observation types; plan: {len(plan_nomc.satellites)} "
          f"satellites x {len(plan_nomc.times)} times; {args.repeat} interleaved repeats, medians")
    for name, v in med.items():
        print(f"  {name:34s} {1000 * v:8.1f} ms")
    full, nomc = med["plan (full, with Monte Carlo)"], med["plan without Monte Carlo"]
    ours, ours_all = med["record (L1 band) + compare"], med["record (all types) + compare"]
    print(f"  ratio record+compare / full plan        {ours / full:6.2f}   (target <= 1)")
    print(f"  ratio record+compare / plan without MC  {ours / nomc:6.2f}")
    print(f"  ratio all types + compare / full plan   {ours_all / full:6.2f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())

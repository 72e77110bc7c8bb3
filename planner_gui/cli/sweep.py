"""``acqplan sweep``: one scenario planned for many departure times and search settings.

The ranges are options, not part of the scenario file: a scenario describes one test;
a sweep is a question asked of it (README "Sweeps"). The output (table, CSV, JSON) and
``--write-best`` are written only once every plan is done: Ctrl+C stops the workers and
leaves no file behind.
"""

from __future__ import annotations

import json
import os
import signal
import sys

from ._common import EXIT_BAD_INPUT, EXIT_OK, emit, format_rows, output_options, print_warnings

EXIT_CANCELLED = 130            # the shell's code for a command ended by Ctrl+C (128 + SIGINT)
MAX_WORKERS = 1024


def _parse_departures(text: str):
    from core.api import InputError, departure_times

    parts = [p.strip() for p in text.split(",")]
    if len(parts) != 3:
        raise InputError(f"'{text}' must be START,END,STEP_S (ISO 8601 UTC times and a step "
                         "in s, e.g. 2027-05-18T00:00Z,2027-05-19T00:00Z,300)", field="--departures")
    try:
        step = float(parts[2])
    except ValueError:
        raise InputError(f"step '{parts[2]}' is not a number of seconds (1 to 604800 s)",
                         field="--departures STEP_S") from None
    return departure_times(parts[0], parts[1], step)


def _parse_vary(items: list[str]) -> list[tuple[str, list[str]]]:
    from core.api import InputError

    out = []
    for item in items:
        key, eq, values = item.partition("=")
        if not eq or not key.strip() or not values.strip():
            raise InputError(f"'{item}' must be KEY=V1,V2,... (e.g. coherent_ms=4,8,12)", field="--vary")
        out.append((key.strip(), [v for v in values.split(",")]))
    return out


def _workers(args) -> int | None:
    from core.api import InputError

    if args.workers is None:
        return None
    if args.scheduler:
        raise InputError("give --workers or --scheduler, not both (the cluster has its own workers)",
                         field="--workers")
    if not 1 <= args.workers <= MAX_WORKERS:
        raise InputError(f"{args.workers} is outside 1 to {MAX_WORKERS} worker processes",
                         field="--workers")
    return args.workers


def _progress_bar(total: int):
    """A tqdm bar on stderr, shown only on a terminal; returns (callback, close)."""
    from tqdm import tqdm

    bar = tqdm(total=total, unit="plan", desc="sweep", file=sys.stderr, disable=None,
               dynamic_ncols=True, leave=False)

    def update(done: int, _total: int) -> None:
        bar.update(done - bar.n)

    return update, bar.close


def _table(result, name: str) -> str:
    from core.api import SWEEP_RANK_COLUMNS as RANK_COLUMNS
    from core.api import iso_z, ranking_rows, short_key

    spec = result.spec
    keys = [short_key(k) for k in spec.keys]
    where = (f"{result.workers} local worker(s)" if result.where in ("local", "pool")
             else f"Dask at {result.where} ({result.workers} workers)")
    parts = [f"sweep of '{name}': {len(spec.departures_unix_s)} departure(s) x "
             f"{len(spec.settings)} setting(s) = {spec.n_combinations} plans, "
             f"{spec.window_s / 60:g} min window each, on {where} in {result.compute_s:.1f} s",
             "",
             "Settings, best first (by the worst 95th-percentile time to first fix over the departures)",
             format_rows(_shown(ranking_rows(result)), "table",
                         ["rank", *keys, *RANK_COLUMNS[2:]] if keys else RANK_COLUMNS)]
    best = result.best
    parts.append(f"Departures with the best setting ({spec.setting_text(best.setting)})")
    dep_rows = []
    for d, t in enumerate(spec.departures_unix_s):
        r = result.row(d, best.setting)
        dep_rows.append({"departure": iso_z(t), "ttff_median_s": r.ttff_median_s,
                         "ttff_p95_s": r.ttff_p95_s, "ttff_expected_s": r.ttff_expected_s,
                         "fix_fraction": r.fix_fraction, "worst_event": r.worst_event})
    parts.append(format_rows(_shown(dep_rows), "table"))
    parts.append(f"best departure {iso_z(best.best_departure_unix_s)}, worst departure "
                 f"{iso_z(best.worst_departure_unix_s)} (for the best setting)")
    if result.warnings:
        parts.append("Warnings:\n" + "\n".join(f"  - {w}" for w in result.warnings))
    return "\n".join(parts)


_TIMES = ("ttff_median_s", "ttff_p95_s", "ttff_expected_s", "worst_p95_s", "mean_p95_s",
          "worst_median_s")


def _shown(rows: list[dict]) -> list[dict]:
    """Table cells: 'no fix' where a time to fix does not exist (beyond the window) and
    'n/a' where a figure does not (no plan), never a number that looks real."""
    def cell(k, v):
        missing = v is None or (isinstance(v, float) and (v != v or v in (float("inf"), float("-inf"))))
        if not missing:
            return v
        return "no fix" if k in _TIMES else "n/a"

    return [{k: cell(k, v) for k, v in r.items()} for r in rows]


def _compute(args):
    from core.api import load_scenario, run_sweep, sweep_spec

    workers = _workers(args)
    scenario = load_scenario(args.scenario)
    deps = _parse_departures(args.departures) if args.departures else None
    spec = sweep_spec(scenario, _parse_vary(args.vary or []), deps)
    update, close = _progress_bar(spec.n_combinations)
    try:
        result = run_sweep(scenario, spec, workers=workers, scheduler=args.scheduler,
                           progress=update)
    finally:
        close()
    return scenario, spec, result


def cmd_sweep(args) -> int:
    from core.api import (
        SWEEP_ROW_COLUMNS,
        best_scenario,
        save_scenario,
        short_key,
        sweep_rows,
        sweep_to_json,
    )

    try:
        scenario, spec, result = _compute(args)
    except KeyboardInterrupt:           # at any moment before the results: nothing written
        print("acqplan sweep: cancelled; nothing written", file=sys.stderr)
        return EXIT_CANCELLED
    # The writes are short and atomic; Ctrl+C waits for them, so no file is left half-made.
    previous = signal.signal(signal.SIGINT, signal.SIG_IGN)
    try:
        if args.format == "json":
            text = json.dumps(sweep_to_json(result, scenario.name), indent=1)
        elif args.format == "csv":
            print_warnings(result.warnings)
            keys = [short_key(k) for k in spec.keys]
            text = format_rows(sweep_rows(result), "csv", SWEEP_ROW_COLUMNS[:3] + keys + SWEEP_ROW_COLUMNS[3:])
        else:
            text = _table(result, scenario.name)
        emit(text, args.output)
        if args.write_best:
            saved = save_scenario(best_scenario(scenario, result), args.write_best)
            print(f"wrote {os.fspath(saved.path)} (setting {spec.setting_text(result.best.setting)}, "
                  f"departure {saved.time.start.strftime('%Y-%m-%dT%H:%M:%SZ')})", file=sys.stderr)
    finally:
        signal.signal(signal.SIGINT, previous)
    return EXIT_OK


def register(sub) -> None:
    sp = sub.add_parser(
        "sweep", help="plan a scenario for many departure times and search settings; rank the settings",
        description="Plan SCENARIO.toml for every departure time x every combination of the "
                    "varied keys (their product) and rank the settings by their worst "
                    "95th-percentile time to first fix. Runs on every core by default.")
    sp.add_argument("scenario", metavar="SCENARIO.toml", help="scenario file to sweep (TOML)")
    sp.add_argument("--departures", metavar="START,END,STEP_S",
                    help="departure times: ISO 8601 UTC start and end (inclusive) and a step in s "
                         "(1 to 604800); each departure keeps the scenario's window length "
                         "(default: the scenario's own start only)")
    sp.add_argument("--vary", action="append", metavar="KEY=V1,V2,...",
                    help="values of one [search], [receiver] or [signal] key (e.g. coherent_ms=4,8,12, "
                         "noncoherent=5,10, max_frequency_loss_db=0.5,1, code_step_chips=0.5, "
                         "channels=8,12); repeat for more keys; checked against the key's range "
                         "(default: the scenario's own values)")
    output_options(sp)
    sp.add_argument("--write-best", metavar="FILE",
                    help="write the scenario with the best setting and its best departure to FILE "
                         "(default: not written)")
    sp.add_argument("--workers", type=int, metavar="N",
                    help="local worker processes (1 to 1024; default: every core; 1 = in this process)")
    sp.add_argument("--scheduler", metavar="ADDRESS",
                    help="run on a Dask distributed cluster (e.g. tcp://10.0.0.5:8786); needs "
                         "pip install 'acqplan[cluster]'; the orbit files are shipped to every worker once "
                         "(default: local processes, see --workers)")
    sp.set_defaults(func=cmd_sweep)


__all__ = ["EXIT_BAD_INPUT", "EXIT_CANCELLED", "cmd_sweep", "register"]

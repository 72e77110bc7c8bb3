"""``acqplan plan``: the full search plan of a scenario file."""

from __future__ import annotations

import json
import sys

from ._common import EXIT_OK, emit, format_rows, output_options, print_warnings


def cmd_plan(args) -> int:
    from core.api import (
        SUMMARY_COLUMNS,
        load_scenario,
        make_plan,
        plan_rows,
        plan_to_json,
        timeline_rows,
    )

    scenario = load_scenario(args.scenario)
    plan = make_plan(scenario)
    # A file cut short can still be valid TOML: say which sections came from defaults.
    note = (f"{scenario.defaults_note} (the file has no such section; is it complete?)"
            if scenario.defaults_used else "")
    if args.export_dir:
        from core.api import export_all

        for path in export_all(plan, args.export_dir, args.stem):
            print(f"wrote {path}", file=sys.stderr)
    if args.format == "json":
        emit(json.dumps(plan_to_json(plan), indent=1), args.output)
    elif args.format == "csv":
        print_warnings(([note] if note else []) + plan.warnings)
        emit(format_rows(plan_rows(plan), "csv", SUMMARY_COLUMNS), args.output)
    else:
        parts = [note[:1].upper() + note[1:]] if note else []
        parts += ["Searches (one row per satellite in view; 'after' = once the oscillator is known)",
                  format_rows(plan_rows(plan), "table", SUMMARY_COLUMNS),
                  "Channel timeline", format_rows(timeline_rows(plan), "table"),
                  plan.summary_text()]
        if plan.warnings:
            parts.append("Warnings:\n" + "\n".join(f"  - {w}" for w in plan.warnings))
        emit("\n".join(parts), args.output)
    return EXIT_OK


def register(sub) -> None:
    sp = sub.add_parser("plan", help="the full search plan of a scenario file")
    sp.add_argument("scenario", metavar="SCENARIO.toml")
    output_options(sp)
    sp.add_argument("--export-dir", metavar="DIR",
                    help="also write STEM.json (the plan), STEM_windows.csv (windows per "
                         "satellite per step) and STEM_search.csv (search per satellite) into DIR")
    sp.add_argument("--stem", default="plan", help="file name stem for --export-dir (default: plan)")
    sp.set_defaults(func=cmd_plan)

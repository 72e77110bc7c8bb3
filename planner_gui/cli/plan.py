"""``acqplan plan``: the full search plan of a scenario file."""

from __future__ import annotations

import json
import sys

from ._common import (
    EXIT_OK,
    emit,
    format_rows,
    output_options,
    print_warnings,
    skip_and_age_options,
)

# Short headings for the table on screen (the CSV keeps the full column names).
TABLE_HEADS = {"max_el_deg": "max_el", "search_start": "start", "bin_width_hz": "bin_hz",
               "code_window_chips": "code_chips", "cn0_dbhz": "cn0", "expected_search_s": "exp_s",
               "channel": "ch", "after_low_hz": "narr_low", "after_high_hz": "narr_high",
               "after_bins": "narr_bins", "in_view": "in_view"}


def _for_reading(rows: list[dict]) -> list[dict]:
    """Rows for the table on screen: clock times (HH:MM:SS) and the state in words; the
    CSV and JSON keep full ISO times and the stored values."""
    from core.api import state_word

    out = []
    for r in rows:
        r = dict(r)
        for key in ("search_start", "acquired", "start", "end"):
            v = r.get(key)
            if isinstance(v, str) and v.endswith("Z") and "T" in v:
                r[key] = v[11:19]
        if r.get("state"):
            r["state"] = state_word(r["state"])
        out.append(r)
    return out


def _make_plan(scenario, args):
    """(plan, None) from make_plan within its size limit; above it (None, long plan) made
    block by block, whose output has no per-step window lists: the JSON then needs
    --no-windows and --export-dir is refused, each with the step that would fit."""
    from core.api import InputError, PlanTooLarge, make_long_plan, make_plan

    try:
        return make_plan(scenario), None
    except PlanTooLarge as err:
        if args.export_dir:
            raise InputError(
                f"--export-dir writes the window of every satellite at every step in view "
                f"(STEM_windows.csv) and is limited so: {err.message}; for a longer window "
                "write the summaries with --format csv -o FILE or --format json --no-windows "
                "-o FILE", field=err.field) from None
        if args.format == "json" and not args.no_windows:
            raise InputError(
                f"the plan JSON lists the window of every satellite at every step in view "
                f"and is limited so: {err.message}; or add --no-windows to write it without "
                "those lists (passes, searches, timeline and TTFF stay)", field=err.field) from None
    return None, make_long_plan(scenario)


def cmd_plan(args) -> int:
    from core.api import (
        SUMMARY_COLUMNS,
        load_scenario,
        long_plan_rows,
        long_plan_to_json,
        plan_rows,
        plan_to_json,
        timeline_rows,
    )

    scenario = load_scenario(args.scenario)
    changes = {k: True for k in ("skip_bad_records", "allow_old_data") if getattr(args, k)}
    if changes:
        scenario = scenario.with_changes(orbits=changes)
    plan, long_plan = _make_plan(scenario, args)
    if long_plan is not None:
        plan = long_plan.plan            # its satellites, timeline and TTFF; rows below
    drive = None
    if scenario.route is not None or scenario.events:
        from core.api import plan_drive

        drive = plan_drive(scenario)
    # A file cut short can still be valid TOML: say which sections came from defaults.
    note = (f"{scenario.defaults_note} (the file has no such section; is it complete?)"
            if scenario.defaults_used else "")
    if args.export_dir:
        from core.api import export_all

        for path in export_all(plan, args.export_dir, args.stem):
            print(f"wrote {path}", file=sys.stderr)
    rows = plan_rows(plan) if long_plan is None else long_plan_rows(long_plan)
    if args.format == "json":
        out = plan_to_json(plan) if long_plan is None else long_plan_to_json(long_plan)
        if args.no_windows:
            for sat in out["satellites"]:
                sat["windows"] = None
        if drive is not None:
            out.update(drive.to_json())
        emit(json.dumps(out, indent=1), args.output)
    elif args.format == "csv":
        print_warnings(([note] if note else []) + plan.warnings + ([] if drive is None else drive.warnings))
        if drive is not None:       # one row per drive event
            emit(format_rows(drive.summary_rows(), "csv", DRIVE_COLUMNS), args.output)
            return EXIT_OK
        emit(format_rows(rows, "csv", SUMMARY_COLUMNS), args.output)
    else:
        parts = [note[:1].upper() + note[1:]] if note else []
        parts += ["Searches (one row per satellite in view; times UTC; in_view: fraction of the\n"
                  "window above the mask; narrowed (narr_*) = after the first acquisition)",
                  format_rows(_for_reading(rows), "table", SUMMARY_COLUMNS, TABLE_HEADS),
                  "Channel timeline", format_rows(_for_reading(timeline_rows(plan)), "table"),
                  plan.summary_text()]
        if drive is not None:
            parts += _drive_parts(drive)
        if plan.warnings:
            parts.append("Warnings:\n" + "\n".join(f"  - {w}" for w in plan.warnings))
        emit("\n".join(parts), args.output)
    return EXIT_OK


DRIVE_COLUMNS = ["id", "kind", "name", "time", "distance_km", "lat_deg", "lon_deg", "stretch", "visible",
                 "blocked", "ttff_median_s", "ttff_p95_s", "first_fix", "worst"]


def _drive_parts(drive) -> list[str]:
    """The drive's part of the table output: the route, then one row per event."""
    parts = []
    r = drive.route_json()
    if r is not None:
        parts.append(f"Route {r['file']}: {r['length_m'] / 1000:.1f} km, {r['duration_s'] / 60:.0f} min "
                     f"({r['timing']}); stretches: " + (", ".join(
                         f"{s['name'] or s['kind']} {s['from_m'] / 1000:.1f}-{s['to_m'] / 1000:.1f} km"
                         for s in r["stretches"]) or "none"))
    parts += ["Drive events (each planned from its own time and place; worst = longest 95th percentile)",
              format_rows(drive.summary_rows(), "table", DRIVE_COLUMNS)]
    if drive.warnings:
        parts.append("Drive warnings:\n" + "\n".join(f"  - {w}" for w in drive.warnings))
    return parts


def register(sub) -> None:
    from core.api import PLAN_MAX_SATELLITE_STEPS

    sp = sub.add_parser("plan", help="the full search plan of a scenario file (and of every drive event)")
    sp.add_argument("scenario", metavar="SCENARIO.toml", help="scenario file to plan (TOML)")
    output_options(sp)
    skip_and_age_options(sp)
    sp.add_argument("--export-dir", metavar="DIR",
                    help="also write STEM.json (the plan), STEM_windows.csv (windows per "
                         "satellite per step) and STEM_search.csv (search per satellite) into DIR "
                         "(default: no files)")
    sp.add_argument("--stem", default="plan", help="file name stem for --export-dir (default: plan)")
    sp.add_argument("--no-windows", action="store_true",
                    help="leave the per-step window lists out of the JSON (\"windows\": null for "
                         f"every satellite); needed above {PLAN_MAX_SATELLITE_STEPS:,} satellite-steps (satellites x "
                         "[time] steps: 96 satellites over 2 h at 1 s), where the plan is made "
                         "block by block (default: list them)")
    sp.set_defaults(func=cmd_plan)

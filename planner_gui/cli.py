"""The ``acqplan`` command line.

Commands that need no window (passes, doppler, bins, plan, demo, sheet's data side)
never import Qt; ``gui`` and ``sheet`` import it only when run. Every command prints
``--help``; bad input ends with exit code 2 and ONE line on stderr naming file, line
and field.
"""

from __future__ import annotations

import argparse
import csv
import io
import json
import sys
from collections.abc import Sequence
from pathlib import Path

from core.ground.errors import AcqplanError, InputError
from planner_gui import version

EXIT_OK, EXIT_FAILURE, EXIT_BAD_INPUT = 0, 1, 2

# Options whose values may start with a minus sign (southern/western coordinates,
# negative frequencies): "--site -33.9,-70.6,520" is rewritten to "--site=-33.9,..."
# before argparse sees it, since argparse would take the value for an option.
_SIGNED_VALUE_OPTIONS = ("--site", "--span-hz")


def _join_signed_values(argv: Sequence[str]) -> list[str]:
    out: list[str] = []
    i = 0
    while i < len(argv):
        arg = argv[i]
        if arg in _SIGNED_VALUE_OPTIONS and i + 1 < len(argv):
            out.append(f"{arg}={argv[i + 1]}")
            i += 2
            continue
        out.append(arg)
        i += 1
    return out


class _Parser(argparse.ArgumentParser):
    """argparse whose usage errors are one line and exit 2."""

    def error(self, message: str):  # noqa: D401
        self.exit(EXIT_BAD_INPUT, f"{self.prog}: error: {message}\n")


def one_line(err: InputError) -> str:
    """The error as one line; several scenario problems are joined with '; '."""
    problems = getattr(err, "problems", None) or []
    if len(problems) > 1:
        file = problems[0].file or err.file
        parts = []
        for p in problems:
            where = ", ".join(x for x in (f"line {p.line}" if p.line is not None else "",
                                          f"field '{p.field}'" if p.field else "") if x)
            parts.append(f"{where}: {p.message}" if where else p.message)
        return f"{file}: {len(problems)} problems: " + "; ".join(parts)
    return " ".join(str(err).split("\n")) if "\n" in str(err) else str(err)


def parse_site(text: str):
    from core.ground.geodesy import Site

    parts = [p.strip() for p in text.split(",")]
    if len(parts) != 3:
        raise InputError(f"'{text}' must be LAT_DEG,LON_DEG,HEIGHT_M (e.g. 47.4,8.5,420)", field="--site")
    try:
        lat, lon, h = (float(p) for p in parts)
    except ValueError:
        raise InputError(f"'{text}' must be three numbers LAT_DEG,LON_DEG,HEIGHT_M", field="--site") from None
    try:
        return Site(lat, lon, h)
    except InputError as err:
        raise InputError(err.message, field=f"--site {err.field}") from None


def parse_pair(text: str, field: str) -> tuple[float, float]:
    parts = text.split(",")
    try:
        a, b = (float(p) for p in parts)
    except ValueError:
        raise InputError(f"'{text}' must be two numbers LOW,HIGH", field=field) from None
    if not b > a:
        raise InputError(f"'{text}': HIGH must be above LOW", field=field)
    return a, b


# --- output helpers ------------------------------------------------------------------

def _emit(text: str, out_path: str | None) -> None:
    if out_path:
        from core.files.atomic import write_text_atomic

        write_text_atomic(out_path, text)
    else:
        sys.stdout.write(text)
        if not text.endswith("\n"):
            sys.stdout.write("\n")


def format_rows(rows: list[dict], fmt: str, columns: list[str] | None = None) -> str:
    columns = columns or (list(rows[0]) if rows else [])
    if fmt == "csv":
        buf = io.StringIO()
        w = csv.DictWriter(buf, fieldnames=columns, extrasaction="ignore", lineterminator="\n")
        w.writeheader()
        w.writerows(rows)
        return buf.getvalue()
    # Table: aligned columns, numbers right-aligned.
    cells = [[_cell(r.get(c)) for c in columns] for r in rows]
    widths = [max([len(c)] + [len(row[i]) for row in cells]) for i, c in enumerate(columns)]
    lines = ["  ".join(c.ljust(w) for c, w in zip(columns, widths))]
    lines.append("  ".join("-" * w for w in widths))
    for row in cells:
        lines.append("  ".join(v.rjust(w) if _numeric(v) else v.ljust(w) for v, w in zip(row, widths)))
    return "\n".join(lines) + "\n"


def _cell(v) -> str:
    if v is None:
        return ""
    if isinstance(v, float):
        return f"{v:.3f}"
    return str(v)


def _numeric(s: str) -> bool:
    try:
        float(s)
        return True
    except ValueError:
        return False


# --- commands --------------------------------------------------------------------------

def _load(args):
    from core.ground.timeutil import parse_iso_utc
    from core.orbits.readers import load_orbit_files

    start = parse_iso_utc(args.start, "--start")
    end = parse_iso_utc(args.end, "--end")
    if end <= start:
        raise InputError(f"end {args.end} is not after start {args.start}", field="--end")
    orbits = load_orbit_files(args.orbits, reference_time=start, mapping=args.mapping,
                              strict=not args.skip_bad_records)
    return orbits, parse_site(args.site), start, end


def _print_warnings(warnings: list[str]) -> None:
    for w in warnings:
        print(f"warning: {w}", file=sys.stderr)


def cmd_passes(args) -> int:
    from core.sky.predict import passes

    orbits, site, start, end = _load(args)
    found = passes(orbits, site, start, end, mask_deg=args.mask, step_s=args.step)
    rows = [p.to_dict() for p in found]
    if args.format == "json":
        _emit(json.dumps({"site": [site.lat_deg, site.lon_deg, site.height_m],
                          "mask_deg": args.mask, "passes": rows,
                          "warnings": orbits.warnings}, indent=2), args.output)
    else:
        _print_warnings(orbits.warnings)
        # A rise (set) equal to the window start (end) means the satellite was already up
        # (still up): the two flags say which.
        cols = ["id", "rise", "culmination", "set", "max_elevation_deg", "rise_azimuth_deg",
                "set_azimuth_deg", "rises_in_window", "sets_in_window"]
        _emit(format_rows(rows, args.format, cols), args.output)
    return EXIT_OK


def cmd_doppler(args) -> int:
    import numpy as np

    from core.ground.signals import get_signal
    from core.ground.timeutil import iso_z, time_grid
    from core.sky.predict import predict

    orbits, site, start, end = _load(args)
    if args.signal:
        sig = get_signal(args.signal)
        keep = [e.info.sat_id for e in orbits.entries if e.info.system == sig.system]
        if not keep:
            raise InputError(f"no satellite of the {sig.description} system in the orbit files",
                             field="--signal")
        orbits = orbits.select(keep)
    grid = time_grid(start, end, args.step)
    pred = predict(orbits, site, grid, signals=args.signal)
    iso = grid.iso()
    sats = []
    for k, sid in enumerate(pred.ids):
        show = np.nonzero(pred.valid[k] & (pred.elevation_deg[k] >= args.mask))[0]
        if not show.size:
            continue
        samples = [{"time": iso[j],
                    "azimuth_deg": round(float(pred.azimuth_deg[k, j]), 4),
                    "elevation_deg": round(float(pred.elevation_deg[k, j]), 4),
                    "range_m": round(float(pred.range_m[k, j]), 3),
                    "range_rate_m_s": round(float(pred.range_rate_m_s[k, j]), 4),
                    "doppler_hz": round(float(pred.doppler_hz[k, j]), 3),
                    "doppler_rate_hz_s": round(float(pred.doppler_rate_hz_s[k, j]), 5)}
                   for j in show]
        info = orbits.entries[k].info
        sats.append({"id": sid, "signal": pred.signal_ids[k],
                     "carrier_hz": float(pred.carrier_hz[k]), "healthy": info.healthy,
                     "samples": samples})
    warnings = pred.warnings
    if args.format == "json":
        _emit(json.dumps({"site": [site.lat_deg, site.lon_deg, site.height_m],
                          "start": iso_z(grid.start_unix_s), "end": iso_z(grid.end_unix_s),
                          "step_s": args.step, "mask_deg": args.mask,
                          "satellites": sats, "warnings": warnings}, indent=1), args.output)
    else:
        _print_warnings(warnings)
        rows = [{"id": s["id"], "signal": s["signal"], **smp} for s in sats for smp in s["samples"]]
        cols = ["time", "id", "signal", "azimuth_deg", "elevation_deg", "range_m",
                "range_rate_m_s", "doppler_hz", "doppler_rate_hz_s"]
        rows.sort(key=lambda r: (r["time"], r["id"]))
        _emit(format_rows(rows, args.format, cols), args.output)
    return EXIT_OK


def cmd_bins(args) -> int:
    from core.search.bins import bin_centres, design_bins, loss_curve

    design = design_bins(args.coherent_ms / 1000.0, args.max_loss_db)
    out = design.to_dict()
    if args.span_hz:
        low, high = parse_pair(args.span_hz, "--span-hz")
        out["span_hz"] = [low, high]
        out["bins"] = [round(float(c), 6) for c in bin_centres(low, high, design.bin_width_hz)]
    if args.curve:
        curve = loss_curve(args.coherent_ms / 1000.0)
        out["curve"] = {"offset_hz": [round(float(v), 4) for v in curve["offset_hz"]],
                        "loss_db": [round(float(v), 5) for v in curve["loss_db"]],
                        "marks": {k: round(float(v), 4) for k, v in curve["marks"].items()}}
    if args.format == "json":
        _emit(json.dumps(out, indent=1), args.output)
    else:
        rows = [{"key": k, "value": v if not isinstance(v, list | dict) else json.dumps(v)}
                for k, v in out.items() if k != "curve"]
        text = format_rows(rows, args.format, ["key", "value"])
        if args.curve:
            pts = [{"offset_hz": o, "loss_db": v} for o, v in
                   zip(out["curve"]["offset_hz"], out["curve"]["loss_db"])]
            text += "\n" + format_rows(pts, args.format, ["offset_hz", "loss_db"])
        _emit(text, args.output)
    return EXIT_OK


def cmd_plan(args) -> int:
    from core.files.scenario import load_scenario
    from core.plan.pipeline import (
        SUMMARY_COLUMNS,
        make_plan,
        plan_rows,
        plan_to_json,
        timeline_rows,
    )

    scenario = load_scenario(args.scenario)
    plan = make_plan(scenario)
    if args.export_dir:
        from core.files.plan_export import export_all

        for path in export_all(plan, args.export_dir, args.stem):
            print(f"wrote {path}", file=sys.stderr)
    if args.format == "json":
        _emit(json.dumps(plan_to_json(plan), indent=1), args.output)
    elif args.format == "csv":
        _print_warnings(plan.warnings)
        _emit(format_rows(plan_rows(plan), "csv", SUMMARY_COLUMNS), args.output)
    else:
        parts = ["Searches (one row per satellite in view; 'after' = once the oscillator is known)",
                 format_rows(plan_rows(plan), "table", SUMMARY_COLUMNS),
                 "Channel timeline", format_rows(timeline_rows(plan), "table"),
                 plan.summary_text()]
        if plan.warnings:
            parts.append("Warnings:\n" + "\n".join(f"  - {w}" for w in plan.warnings))
        _emit("\n".join(parts), args.output)
    return EXIT_OK


def cmd_demo(args) -> int:
    from core.files.demo import write_demo

    path = write_demo(Path(args.directory))
    print(f"demo scenario written to {path}")
    return EXIT_OK


def cmd_gui(args) -> int:
    from planner_gui.app import run_gui

    return run_gui(args)


def cmd_sheet(args) -> int:
    from planner_gui.sheets import run_sheet_command

    return run_sheet_command(args)


def build_parser() -> argparse.ArgumentParser:
    p = _Parser(prog="acqplan", description="Plan GNSS acquisition searches from almanac or TLE files.")
    p.add_argument("--version", action="version", version=f"acqplan {version()}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)

    def geometry_options(sp, with_step: bool, step_default: float | None = None):
        sp.add_argument("--orbits", action="append", required=True, metavar="FILE",
                        help="YUMA, SEM or TLE file (repeat to mix constellations)")
        sp.add_argument("--mapping", metavar="FILE",
                        help="optional catalogue-number -> ID (and GLONASS k) mapping file")
        sp.add_argument("--skip-bad-records", action="store_true",
                        help="skip TLE records with a bad checksum or field (with a warning) "
                             "instead of stopping")
        sp.add_argument("--site", required=True, metavar="LAT,LON,HEIGHT_M",
                        help="receiver site, degrees and metres above the WGS-84 ellipsoid "
                             "(negative values work as typed: --site -33.92,-70.65,520)")
        sp.add_argument("--start", required=True, metavar="ISO", help="start, ISO 8601 UTC")
        sp.add_argument("--end", required=True, metavar="ISO", help="end, ISO 8601 UTC")
        sp.add_argument("--mask", type=float, default=10.0, metavar="DEG",
                        help="elevation mask in degrees (default 10; -90 keeps all)")
        if with_step:
            sp.add_argument("--step", type=float, default=step_default, required=step_default is None,
                            metavar="S", help="time step in seconds")

    def output_options(sp):
        sp.add_argument("--format", choices=("table", "csv", "json"), default="table")
        sp.add_argument("-o", "--output", metavar="FILE", help="write to FILE (atomically) instead of stdout")

    sp = sub.add_parser("passes", help="rise, culmination and set of each satellite above the mask")
    geometry_options(sp, with_step=True, step_default=60.0)
    output_options(sp)
    sp.set_defaults(func=cmd_passes)

    sp = sub.add_parser("doppler", help="azimuth, elevation, range, range rate and Doppler over time")
    geometry_options(sp, with_step=True)
    sp.add_argument("--signal", metavar="ID", help="signal ID (GPS-L1CA, GPS-L5, GAL-E1, GAL-E5A, "
                    "BDS-B1I, BDS-B1C, GLO-L1OF, QZS-L1CA); default: each system's first")
    output_options(sp)
    sp.set_defaults(func=cmd_doppler)

    sp = sub.add_parser("bins", help="frequency-bin width for a coherent time and accepted loss")
    sp.add_argument("--coherent-ms", type=float, required=True, metavar="MS")
    sp.add_argument("--max-loss-db", type=float, required=True, metavar="DB",
                    help="largest accepted frequency-error loss (positive dB)")
    sp.add_argument("--span-hz", metavar="LOW,HIGH", help="window to tile with bins (lists centres)")
    sp.add_argument("--curve", action="store_true", help="include the loss curve")
    output_options(sp)
    sp.set_defaults(func=cmd_bins)

    sp = sub.add_parser("plan", help="the full search plan of a scenario file")
    sp.add_argument("scenario", metavar="SCENARIO.toml")
    output_options(sp)
    sp.add_argument("--export-dir", metavar="DIR",
                    help="also write STEM.json (the plan), STEM_windows.csv (windows per "
                         "satellite per step) and STEM_search.csv (search per satellite) into DIR")
    sp.add_argument("--stem", default="plan", help="file name stem for --export-dir (default: plan)")
    sp.set_defaults(func=cmd_plan)

    sp = sub.add_parser("demo", help="write the invented demo scenario and its orbit files into DIR")
    sp.add_argument("directory", metavar="DIR")
    sp.set_defaults(func=cmd_demo)

    sp = sub.add_parser("gui", help="open the planner window (or render it to PNG files)")
    sp.add_argument("scenario", nargs="?", metavar="SCENARIO.toml")
    sp.add_argument("--demo", action="store_true", help="open the bundled demo scenario")
    sp.add_argument("--screenshot", metavar="DIR",
                    help="render the window and each view to PNG files in DIR, then exit")
    sp.add_argument("--size", default="1600x1000", metavar="WxH", help="window size for --screenshot")
    sp.set_defaults(func=cmd_gui)

    sp = sub.add_parser("sheet", help="print the search-plan sheets to PDF")
    sp.add_argument("scenario", nargs="?", metavar="SCENARIO.toml")
    sp.add_argument("--demo", action="store_true", help="use the bundled demo scenario")
    sp.add_argument("-o", "--output", required=True, metavar="FILE.pdf")
    sp.add_argument("--paper", choices=("a4", "letter"), default="a4")
    sp.set_defaults(func=cmd_sheet)
    return p


def main(argv: Sequence[str] | None = None) -> int:
    argv = list(sys.argv[1:] if argv is None else argv)
    parser = build_parser()
    args = parser.parse_args(_join_signed_values(argv))
    if not getattr(args, "func", None):
        parser.print_help()
        return EXIT_BAD_INPUT
    try:
        return args.func(args)
    except InputError as err:
        print(f"acqplan {args.command}: {one_line(err)}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except AcqplanError as err:
        print(f"acqplan {args.command}: {err}", file=sys.stderr)
        return EXIT_FAILURE
    except OSError as err:
        name = getattr(err, "filename", None)
        where = f"{name}: " if name else ""
        print(f"acqplan {args.command}: {where}{err.strerror or err}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except Exception as err:  # a defect, not bad input: still one line, no traceback
        print(f"acqplan {args.command}: internal error ({type(err).__name__}: {err}); "
              "please report it with the command line used", file=sys.stderr)
        return EXIT_FAILURE


if __name__ == "__main__":
    raise SystemExit(main())

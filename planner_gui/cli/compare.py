"""``acqplan compare``: the plan held against what the receiver recorded.

``acqplan compare SCENARIO.toml RECORD`` plans the scenario and compares the record with
it; ``acqplan compare --record RECORD --orbits NAV`` plans from the record's own header
position and first/last epoch with the orbit files given. The last line (table) or the
``verdict`` key (JSON) says whether the plan held.
"""

from __future__ import annotations

import json

from core.api import InputError

from ._common import EXIT_OK, emit, format_rows, output_options, print_warnings

SAT_COLUMNS = ["id", "signal", "doppler_source", "epochs", "doppler_samples", "residual_hz_median",
               "residual_hz_p95", "residual_hz_max", "inside_window_fraction", "outside_samples",
               "measured_low_hz", "measured_high_hz", "window_low_hz", "window_high_hz",
               "cn0_dbhz_median", "cn0_model_dbhz_median", "first_seen", "planned_acquisition",
               "phase_breaks"]
OFFSET_COLUMNS = ["time", "hz", "ppb", "satellites"]


def _inputs(args):
    files = list(args.files)
    if len(files) > 2:
        raise InputError("give at most SCENARIO.toml and RECORD", field="compare")
    scenario_path = record_path = None
    if len(files) == 2:
        scenario_path, record_path = files
    elif len(files) == 1:
        if args.record:
            scenario_path = files[0]
        else:
            raise InputError(f"'{files[0]}': give the record after the scenario "
                             "(compare SCENARIO.toml RECORD) or as --record RECORD --orbits NAV",
                             field="RECORD")
    if args.record:
        if record_path is not None:
            raise InputError("the record is given twice (positional and --record)", field="--record")
        record_path = args.record
    if record_path is None:
        raise InputError("no record given (compare SCENARIO.toml RECORD, or --record RECORD "
                         "--orbits NAV)", field="RECORD")
    if scenario_path is None and not args.orbits:
        raise InputError("without a scenario, --orbits NAV is needed (RINEX navigation, "
                         "almanac or TLE file)", field="--orbits")
    if scenario_path is not None and args.orbits:
        raise InputError("--orbits is used only without a scenario (the scenario's [orbits] "
                         "files make the plan)", field="--orbits")
    return scenario_path, record_path


def cmd_compare(args) -> int:
    from core.api import (
        compare_record,
        load_record,
        load_scenario,
        make_plan,
        record_bands,
        record_scenario,
    )

    scenario_path, record_path = _inputs(args)
    if scenario_path is not None:
        scenario = load_scenario(scenario_path)
        # only the bands of the planned signals are read (the rest is never compared)
        record = load_record(record_path, bands=record_bands(scenario.receiver.signals))
    else:
        record = load_record(record_path)
        scenario = record_scenario(record, args.orbits)
    plan = make_plan(scenario, monte_carlo=False)
    result = compare_record(plan, record)
    warnings = record.warnings + plan.warnings + result.warnings
    if args.format == "json":
        out = result.to_json()
        out["warnings"] = warnings
        emit(json.dumps(out, indent=1), args.output)
        return EXIT_OK
    print_warnings(warnings)
    rows = [s.to_dict() for s in result.satellites]
    offsets = [c.to_dict() for c in result.common_offset]
    if args.format == "csv":
        emit(format_rows(rows, "csv", SAT_COLUMNS), args.output)
        return EXIT_OK
    parts = [f"Record {record.source} ({record.format}, {record.n_epochs} epochs) against plan "
             f"'{plan.scenario.name}'",
             "Per satellite: residual = measured - predicted Doppler after the common offset (Hz); "
             "inside = share of measured Doppler inside the window searched then; window and "
             "measured = lowest..highest Hz; times UTC",
             format_rows([_table_row(r) for r in rows], "table", TABLE_COLUMNS)]
    if offsets:
        parts += ["Common frequency offset (measured - predicted, median over satellites; Hz at "
                  "1575.42 MHz; the oscillator offset is minus the ppb figure)",
                  format_rows(_thin(offsets, 40), "table", OFFSET_COLUMNS)]
    if result.cn0_fit is not None:
        f = result.cn0_fit
        parts.append(f"C/N0 fit to put back into [signal]: cn0_zenith_dbhz = {f.zenith_dbhz:.1f}, "
                     f"cn0_at_mask_dbhz = {f.mask_dbhz:.1f} (rms {f.rms_db:.1f} dB over "
                     f"{f.samples} samples)")
    parts.append(result.verdict)
    emit("\n".join(parts), args.output)
    return EXIT_OK


TABLE_COLUMNS = ["id", "signal", "doppler", "epochs", "res_med", "res_p95", "res_max", "inside",
                 "window_hz", "measured_hz", "cn0_dbhz", "model_dbhz", "first_seen", "planned_acq"]


def _span(lo, hi) -> str:
    return "" if lo is None or hi is None else f"{lo:.0f}..{hi:.0f}"


def _table_row(r: dict) -> dict:
    """The table's short form of one satellite's comparison (CSV and JSON have it all)."""
    def clock(iso):
        return "" if not iso else iso[11:19]

    return {"id": r["id"], "signal": r["signal"], "doppler": r["doppler_source"] or "none",
            "epochs": r["epochs"], "res_med": r["residual_hz_median"], "res_p95": r["residual_hz_p95"],
            "res_max": r["residual_hz_max"],
            "inside": "" if r["inside_window_fraction"] is None else f"{100 * r['inside_window_fraction']:.0f}%",
            "window_hz": _span(r["window_low_hz"], r["window_high_hz"]),
            "measured_hz": _span(r["measured_low_hz"], r["measured_high_hz"]),
            "cn0_dbhz": None if r["cn0_dbhz_median"] is None else round(r["cn0_dbhz_median"], 1),
            "model_dbhz": None if r["cn0_model_dbhz_median"] is None else round(r["cn0_model_dbhz_median"], 1),
            "first_seen": clock(r["first_seen"]), "planned_acq": clock(r["planned_acquisition"])}


def _thin(rows: list[dict], n: int) -> list[dict]:
    """At most about n rows, evenly spaced, first and last kept (the table is a summary;
    JSON and the window have every epoch)."""
    if len(rows) <= n:
        return rows
    step = len(rows) / (n - 1)
    picked = sorted({min(len(rows) - 1, round(i * step)) for i in range(n)})
    return [rows[i] for i in picked]


def register(sub) -> None:
    sp = sub.add_parser("compare", help="hold a plan against a receiver record (RINEX observation "
                        "file or NMEA log)",
                        description="Compare what a receiver recorded with the plan: common "
                        "frequency offset, Doppler residuals and windows per satellite, C/N0 "
                        "against the elevation model, first appearance against the planned "
                        "acquisition.")
    sp.add_argument("files", nargs="*", metavar="SCENARIO.toml RECORD",
                    help="scenario file and record (RINEX 2.10/2.11/3.0x observation file, plain, "
                         ".gz, .Z or Hatanaka-compressed; or NMEA 0183 log)")
    sp.add_argument("--record", metavar="RECORD",
                    help="the record, when no scenario is given (default: the positional RECORD)")
    sp.add_argument("--orbits", action="append", metavar="NAV",
                    help="orbit file (RINEX navigation, almanac or TLE) for a plan made from the "
                         "record's header position and first/last epoch (repeat to mix; default: "
                         "none, the scenario's orbit files)")
    output_options(sp)
    sp.set_defaults(func=cmd_compare)

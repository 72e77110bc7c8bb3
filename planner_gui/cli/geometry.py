"""``acqplan passes`` and ``acqplan doppler``: satellite geometry at one site over a window."""

from __future__ import annotations

import json

from core.api import InputError

from ._common import (
    EXIT_OK,
    emit,
    format_rows,
    output_options,
    parse_site,
    print_warnings,
    rule_option,
    skip_and_age_options,
)


def _load(args):
    from core.api import check_data_age, load_orbit_files, parse_iso_utc

    start = parse_iso_utc(args.start, "--start")
    end = parse_iso_utc(args.end, "--end")
    if end <= start:
        raise InputError(f"end {args.end} is not after start {args.start}", field="--end")
    orbits = load_orbit_files(args.orbits, reference_time=start, mapping=args.mapping,
                              strict=not args.skip_bad_records)
    # The same age lines as a plan: refused when too old unless --allow-old-data.
    orbits.warnings.extend(check_data_age(orbits, start.timestamp(),
                                          allow_old=args.allow_old_data))
    return orbits, parse_site(args.site), start, end


def _files_json(orbits, start) -> list[dict]:
    from core.api import iso_z

    return [{"path": f.path, "format": f.format, "epoch": iso_z(f.epoch_unix_s, 0),
             "age_days": round((start.timestamp() - f.epoch_unix_s) / 86400.0, 2)}
            for f in orbits.files]


def cmd_passes(args) -> int:
    from core.api import (
        PASSES_MAX_SATELLITE_STEPS,
        PASSES_MAX_WINDOW_DAYS,
        check_grid_size,
        guard_prediction,
        passes,
        predict,
        time_grid,
        to_unix_s,
    )

    orbits, site, start, end = _load(args)
    span_s = to_unix_s(end) - to_unix_s(start)
    if span_s > PASSES_MAX_WINDOW_DAYS * 86400.0:
        raise InputError(f"the window from --start to --end is {span_s / 86400.0:,.0f} days; "
                         f"passes covers at most {PASSES_MAX_WINDOW_DAYS:g} days at once "
                         "(split it into several runs)", field="--end")
    check_grid_size(len(orbits), span_s, args.step, PASSES_MAX_SATELLITE_STEPS,
                    what="passes", step_option="a --step", field="--step",
                    memory="bounded, but minutes of computing")
    # The plausibility guard looks at the window on at most 2000 times (memory bounded);
    # passes() then predicts the kept satellites at --step in chunks.
    coarse = time_grid(start, end, max(args.step, span_s / 2000.0))
    orbits, _, _ = guard_prediction(orbits, predict(orbits, site, coarse))
    found = passes(orbits, site, start, end, mask_deg=args.mask, step_s=args.step)
    rows = [p.to_dict() for p in found]
    if args.format == "json":
        emit(json.dumps({"site": [site.lat_deg, site.lon_deg, site.height_m],
                          "mask_deg": args.mask, "orbit_files": _files_json(orbits, start),
                          "passes": rows, "warnings": orbits.warnings}, indent=2), args.output)
    else:
        print_warnings(orbits.warnings)
        # A rise (set) equal to the window start (end) means the satellite was already up
        # (still up): the two flags say which.
        cols = ["id", "rise", "culmination", "set", "max_elevation_deg", "rise_azimuth_deg",
                "set_azimuth_deg", "rises_in_window", "sets_in_window"]
        emit(format_rows(rows, args.format, cols), args.output)
    return EXIT_OK


DOPPLER_COLUMNS = ["time", "id", "signal", "azimuth_deg", "elevation_deg", "range_m",
                   "range_rate_m_s", "doppler_hz", "doppler_rate_hz_s"]


def _samples(pred, k: int, show, iso) -> list[tuple]:
    """(time, azimuth, elevation, range, range rate, Doppler, Doppler rate) of satellite
    row k at grid indices ``show``, rounded as listed."""
    range_rate = -pred.doppler_hz[k] * pred.wavelength_m[k]     # as Prediction.range_rate_m_s
    cols = [arr[show].tolist() for arr in (pred.azimuth_deg[k], pred.elevation_deg[k],
                                           pred.range_m[k], range_rate, pred.doppler_hz[k],
                                           pred.doppler_rate_hz_s[k])]
    return [(iso[j], round(az, 4), round(el, 4), round(rng, 3), round(rr, 4), round(dop, 3),
             round(rate, 5)) for j, az, el, rng, rr, dop, rate in zip(show.tolist(), *cols)]


def _shown(pred, k: int, args):
    import numpy as np

    above = True if args.all_elevations else pred.elevation_deg[k] >= args.mask
    return np.nonzero(pred.valid[k] & above)[0]


def _select_signal(orbits, args):
    from core.api import get_signal

    if not args.signal:
        return orbits
    sig = get_signal(args.signal)
    keep = [e.info.sat_id for e in orbits.entries if e.info.system == sig.system]
    if not keep:
        raise InputError(f"no satellite of the {sig.description} system in the orbit files",
                         field="--signal")
    return orbits.select(keep)


def _doppler_head(args, site, grid_start, grid_end, orbits, start) -> dict:
    from core.api import iso_z

    return {"site": [site.lat_deg, site.lon_deg, site.height_m],
            "start": iso_z(grid_start), "end": iso_z(grid_end), "step_s": args.step,
            "mask_deg": None if args.all_elevations else args.mask,
            "orbit_files": _files_json(orbits, start)}


def cmd_doppler(args) -> int:
    from core.api import (
        DOPPLER_MAX_SATELLITE_STEPS,
        DOPPLER_STREAM_MAX_SATELLITE_STEPS,
        check_grid_size,
        guard_prediction,
        predict,
        time_grid,
        to_unix_s,
    )

    orbits, site, start, end = _load(args)
    orbits = _select_signal(orbits, args)
    span_s = to_unix_s(end) - to_unix_s(start)
    try:
        check_grid_size(len(orbits), span_s, args.step, DOPPLER_MAX_SATELLITE_STEPS,
                        what="doppler table's", step_option="a --step", field="--step")
    except InputError as err:
        # Longer listings are written as they are made (CSV, JSON); the aligned table
        # needs every row first.
        if args.format == "table":
            raise InputError(f"{err.message}; --format csv or --format json write longer "
                             "listings as they are made", field=err.field) from None
        check_grid_size(len(orbits), span_s, args.step, DOPPLER_STREAM_MAX_SATELLITE_STEPS,
                        what="doppler listing's", step_option="a --step", field="--step",
                        memory="bounded, but a listing of tens of GB")
        return _doppler_streamed(args, orbits, site, start, end)
    grid = time_grid(start, end, args.step)
    orbits, pred, _ = guard_prediction(orbits, predict(orbits, site, grid, signals=args.signal))
    iso = grid.iso()
    sats = []
    for k, sid in enumerate(pred.ids):
        show = _shown(pred, k, args)
        if not show.size:
            continue
        samples = [dict(zip(DOPPLER_COLUMNS[:1] + DOPPLER_COLUMNS[3:], row))
                   for row in _samples(pred, k, show, iso)]
        info = orbits.entries[k].info
        sats.append({"id": sid, "signal": pred.signal_ids[k],
                     "carrier_hz": float(pred.carrier_hz[k]), "healthy": info.healthy,
                     "samples": samples})
    warnings = pred.warnings
    if args.format == "json":
        emit(json.dumps(_doppler_head(args, site, grid.start_unix_s, grid.end_unix_s, orbits, start)
                        | {"satellites": sats, "warnings": warnings}, indent=1), args.output)
    else:
        print_warnings(warnings)
        rows = [{"id": s["id"], "signal": s["signal"], **smp} for s in sats for smp in s["samples"]]
        rows.sort(key=lambda r: (r["time"], r["id"]))
        emit(format_rows(rows, args.format, DOPPLER_COLUMNS), args.output)
    return EXIT_OK


# Satellite-samples predicted per piece of a streamed listing.
_STREAM_SAMPLES = 1 << 18
_MARK = "@@listing@@"


def _doppler_streamed(args, orbits, site, start, end) -> int:
    """The listing of a window too long to hold, written as it is made (to a temporary
    file renamed at the end with -o FILE, or to stdout): the plausibility guard over
    every sample first (one pass in pieces), then the kept satellites in pieces, in time
    order for CSV and satellite by satellite for JSON. Same text as the listing held in
    memory."""
    import contextlib
    import csv
    import sys

    import numpy as np

    from core.api import (
        TimeGrid,
        failure_warnings,
        implausible_satellites,
        open_text_atomic,
        predict,
        time_grid,
    )

    grid = time_grid(start, end, args.step)
    u = grid.unix_s
    n_s = len(orbits)
    per = max(2, _STREAM_SAMPLES // max(n_s, 1))
    failures: dict = {}
    reasons: dict[int, str] = {}
    no_position: dict[int, str] = {}
    ever = np.zeros(n_s, dtype=bool)
    for a in range(0, u.size, per):
        pred = predict(orbits, site, u[a:a + per], signals=args.signal, failures=failures,
                       node_anchor_s=float(u[0]))
        ever |= pred.valid.any(axis=1)
        for s, why in implausible_satellites(orbits, pred).items():
            (reasons if pred.valid[s].any() else no_position).setdefault(s, why)
    bad = dict(reasons)
    bad.update({s: why for s, why in no_position.items() if not ever[s]})
    guard = [f"{orbits.entries[s].info.sat_id} ({orbits.entries[s].info.source_file}): {why}; "
             "satellite dropped (check its orbit record)" for s, why in sorted(bad.items())]
    warnings = list(orbits.warnings) + failure_warnings(orbits, failures, u.size) + guard
    if len(bad) == n_s:
        first = min(bad)
        raise InputError(f"no satellite with a possible orbit is left: {orbits.entries[first].info.sat_id}"
                         f" {bad[first]}", file=orbits.entries[first].info.source_file)
    kept = orbits.select([e.info.sat_id for s, e in enumerate(orbits.entries) if s not in bad])
    out_cm = open_text_atomic(args.output) if args.output else contextlib.nullcontext(sys.stdout)
    if args.format == "csv":
        print_warnings(warnings)
        per = max(2, _STREAM_SAMPLES // max(len(kept), 1))
        with out_cm as f:
            w = csv.writer(f, lineterminator="\n")
            w.writerow(DOPPLER_COLUMNS)
            for a in range(0, u.size, per):
                g = TimeGrid(u[a:a + per])
                pred = predict(kept, site, g, signals=args.signal, failures={},
                               node_anchor_s=float(u[0]))
                iso = g.iso()
                rows = []
                for k, sid in enumerate(pred.ids):
                    sig = pred.signal_ids[k]
                    rows.extend((r[0], sid, sig) + r[1:] for r in _samples(pred, k, _shown(pred, k, args), iso))
                rows.sort(key=lambda r: (r[0], r[1]))
                w.writerows(rows)
        return EXIT_OK
    head = json.dumps(_doppler_head(args, site, grid.start_unix_s, grid.end_unix_s, kept, start)
                      | {"satellites": [_MARK], "warnings": warnings}, indent=1)
    before, after = head.split(f'\n  "{_MARK}"')
    per = max(2, _STREAM_SAMPLES)
    with out_cm as f:
        f.write(before)
        written = 0
        for e in kept.entries:
            one = kept.select([e.info.sat_id])
            opened = False
            for a in range(0, u.size, per):
                g = TimeGrid(u[a:a + per])
                pred = predict(one, site, g, signals=args.signal, failures={},
                               node_anchor_s=float(u[0]))
                show = _shown(pred, 0, args)
                if not show.size:
                    continue
                if not opened:
                    sat = json.dumps({"id": e.info.sat_id, "signal": pred.signal_ids[0],
                                      "carrier_hz": float(pred.carrier_hz[0]),
                                      "healthy": e.info.healthy, "samples": [_MARK]}, indent=1)
                    sat_before = sat.split(f'\n  "{_MARK}"')[0]
                    f.write(("," if written else "") + "\n" + _indent(sat_before, 2))
                    opened, first = True, True
                f.write("".join(_sample_text(r, first and i == 0)
                                for i, r in enumerate(_samples(pred, 0, show, g.iso()))))
                first = False
            if opened:
                f.write("\n   ]\n  }")
                written += 1
        f.write(after if written else "]" + after[len("\n ]"):])
        if not args.output:
            f.write("\n")             # as emit() ends a listing on the terminal
    return EXIT_OK


def _indent(text: str, n: int) -> str:
    pad = " " * n
    return "\n".join(pad + line for line in text.split("\n"))


def _sample_text(r: tuple, first: bool) -> str:
    """One sample as json.dumps(..., indent=1) lays it out four levels deep."""
    return ((",\n" if not first else "\n") +
            f'    {{\n     "time": "{r[0]}",\n     "azimuth_deg": {r[1]!r},\n'
            f'     "elevation_deg": {r[2]!r},\n     "range_m": {r[3]!r},\n'
            f'     "range_rate_m_s": {r[4]!r},\n     "doppler_hz": {r[5]!r},\n'
            f'     "doppler_rate_hz_s": {r[6]!r}\n    }}')


def _geometry_options(sp, step_required: bool) -> None:
    sp.add_argument("--orbits", action="append", required=True, metavar="FILE",
                    help="YUMA, SEM, TLE or RINEX navigation file, plain, .gz or .Z "
                         "(repeat to mix constellations)")
    sp.add_argument("--mapping", metavar="FILE",
                    help="catalogue-number -> ID (and GLONASS k) mapping file "
                         "(default: none; TLE names and built-in tables identify satellites)")
    skip_and_age_options(sp)
    sp.add_argument("--site", required=True, metavar="LAT,LON,HEIGHT_M",
                    help="receiver site, degrees and metres above the WGS-84 ellipsoid "
                         "(negative values work as typed: --site -33.92,-70.65,520)")
    sp.add_argument("--start", required=True, metavar="ISO", help="start, ISO 8601 UTC")
    sp.add_argument("--end", required=True, metavar="ISO", help="end, ISO 8601 UTC")
    rule_option(sp, "--mask", "mask.elevation_deg", help="elevation mask")
    rule_option(sp, "--step", "time.step_s", required=step_required, help="time step")


def register(sub) -> None:
    sp = sub.add_parser("passes", help="rise, culmination and set of each satellite above the mask")
    _geometry_options(sp, step_required=False)
    output_options(sp)
    sp.set_defaults(func=cmd_passes)

    sp = sub.add_parser("doppler", help="azimuth, elevation, range, range rate and Doppler over time")
    _geometry_options(sp, step_required=True)
    sp.add_argument("--all-elevations", action="store_true",
                    help="list every sample, below the horizon too (no elevation mask)")
    sp.add_argument("--signal", metavar="ID", help="signal ID (GPS-L1CA, GPS-L5, GAL-E1, GAL-E5A, "
                    "BDS-B1I, BDS-B1C, GLO-L1OF, QZS-L1CA); default: each system's first")
    output_options(sp)
    sp.set_defaults(func=cmd_doppler)

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


def cmd_doppler(args) -> int:
    import numpy as np

    from core.api import (
        DOPPLER_MAX_SATELLITE_STEPS,
        check_grid_size,
        get_signal,
        guard_prediction,
        iso_z,
        predict,
        time_grid,
        to_unix_s,
    )

    orbits, site, start, end = _load(args)
    if args.signal:
        sig = get_signal(args.signal)
        keep = [e.info.sat_id for e in orbits.entries if e.info.system == sig.system]
        if not keep:
            raise InputError(f"no satellite of the {sig.description} system in the orbit files",
                             field="--signal")
        orbits = orbits.select(keep)
    check_grid_size(len(orbits), to_unix_s(end) - to_unix_s(start), args.step,
                    DOPPLER_MAX_SATELLITE_STEPS, what="doppler table's", step_option="a --step",
                    field="--step")
    grid = time_grid(start, end, args.step)
    orbits, pred, _ = guard_prediction(orbits, predict(orbits, site, grid, signals=args.signal))
    iso = grid.iso()
    range_rate = pred.range_rate_m_s          # derived from the Doppler: computed once
    sats = []
    for k, sid in enumerate(pred.ids):
        above = True if args.all_elevations else pred.elevation_deg[k] >= args.mask
        show = np.nonzero(pred.valid[k] & above)[0]
        if not show.size:
            continue
        cols = [arr[k, show].tolist() for arr in (pred.azimuth_deg, pred.elevation_deg,
                                                  pred.range_m, range_rate, pred.doppler_hz,
                                                  pred.doppler_rate_hz_s)]
        samples = [{"time": iso[j], "azimuth_deg": round(az, 4), "elevation_deg": round(el, 4),
                    "range_m": round(rng, 3), "range_rate_m_s": round(rr, 4),
                    "doppler_hz": round(dop, 3), "doppler_rate_hz_s": round(rate, 5)}
                   for j, az, el, rng, rr, dop, rate in zip(show.tolist(), *cols)]
        info = orbits.entries[k].info
        sats.append({"id": sid, "signal": pred.signal_ids[k],
                     "carrier_hz": float(pred.carrier_hz[k]), "healthy": info.healthy,
                     "samples": samples})
    warnings = pred.warnings
    if args.format == "json":
        emit(json.dumps({"site": [site.lat_deg, site.lon_deg, site.height_m],
                          "start": iso_z(grid.start_unix_s), "end": iso_z(grid.end_unix_s),
                          "step_s": args.step,
                          "mask_deg": None if args.all_elevations else args.mask,
                          "orbit_files": _files_json(orbits, start),
                          "satellites": sats, "warnings": warnings}, indent=1), args.output)
    else:
        print_warnings(warnings)
        rows = [{"id": s["id"], "signal": s["signal"], **smp} for s in sats for smp in s["samples"]]
        cols = ["time", "id", "signal", "azimuth_deg", "elevation_deg", "range_m",
                "range_rate_m_s", "doppler_hz", "doppler_rate_hz_s"]
        rows.sort(key=lambda r: (r["time"], r["id"]))
        emit(format_rows(rows, args.format, cols), args.output)
    return EXIT_OK


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

"""``acqplan route``: what a route file holds (length, duration, points, segments, problems)."""

from __future__ import annotations

import json
import math

from ._common import EXIT_OK, emit, format_rows, output_options

SEGMENT_COLUMNS = ["segment", "first_point", "points", "length_m", "start", "end"]


def cmd_route(args) -> int:
    from core.api import InputError, read_route_file, route_file_summary

    speed = None
    if args.speed_kmh is not None:
        if not (math.isfinite(args.speed_kmh) and 0 < args.speed_kmh <= 300):
            raise InputError(f"{args.speed_kmh:g} km/h is outside the allowed range above 0 to 300 km/h",
                             field="--speed-kmh")
        speed = args.speed_kmh / 3.6
    summary = route_file_summary(read_route_file(args.route_file), speed)
    if args.format == "json":
        emit(json.dumps(summary, indent=1), args.output)
        return EXIT_OK
    segments = [{"segment": i, **s} for i, s in enumerate(summary["segments"], 1)]
    if args.format == "csv":
        emit(format_rows(segments, "csv", SEGMENT_COLUMNS), args.output)
        return EXIT_OK
    dur = summary["duration_s"]
    head = [{"key": "file", "value": summary["file"]}, {"key": "kind", "value": summary["kind"]},
            {"key": "length_km", "value": round(summary["length_m"] / 1000.0, 3)},
            {"key": "duration", "value": "unknown (no usable times; give --speed-kmh)" if dur is None
             else f"{dur / 60:.1f} min" + (" at the planned speed" if speed else " as recorded")},
            {"key": "points", "value": summary["points"]},
            {"key": "waypoints", "value": ", ".join(w["name"] for w in summary["waypoints"]) or "none"}]
    parts = [format_rows(head, "table", ["key", "value"]), "Segments",
             format_rows(segments, "table", SEGMENT_COLUMNS)]
    if summary["problems"]:
        parts.append("Problems:\n" + "\n".join(f"  - {p}" for p in summary["problems"]))
    emit("\n".join(parts), args.output)
    return EXIT_OK


def register(sub) -> None:
    sp = sub.add_parser("route", help="summarise a route file (GPX or CSV): length, duration, segments")
    sp.add_argument("route_file", metavar="ROUTE_FILE", help="GPX 1.0/1.1 or CSV (time_utc, lat_deg, lon_deg, height_m)")
    sp.add_argument("--speed-kmh", type=float, metavar="V",
                    help="planned speed in km/h: the duration at this speed instead of the recorded "
                         "times (default: not set, the file's own times)")
    output_options(sp)
    sp.set_defaults(func=cmd_route)

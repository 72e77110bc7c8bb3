"""``acqplan bins``: the frequency-bin width for a coherent time and accepted loss."""

from __future__ import annotations

import json
import textwrap

from ._common import EXIT_OK, emit, format_rows, output_options, parse_pair, rule_option, user_names

# The core's parameter names and the options that set them (errors name the option).
OPTION_NAMES = {"coherent_s": "--coherent-ms", "max_loss_db": "--max-loss-db",
                "span_hz": "--span-hz", "low_hz": "--span-hz LOW", "high_hz": "--span-hz HIGH"}


def cmd_bins(args) -> int:
    from core.api import bin_centres, design_bins, loss_curve

    with user_names(OPTION_NAMES):
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
        emit(json.dumps(out, indent=1), args.output)
    else:
        rows = [{"key": k, "value": v if not isinstance(v, list | dict) else json.dumps(v)}
                for k, v in out.items() if k not in ("curve", "bins")]
        if "bins" in out and args.format == "csv":
            rows.append({"key": "bins", "value": json.dumps(out["bins"])})
        text = format_rows(rows, args.format, ["key", "value"])
        if "bins" in out and args.format == "table":
            # the centres as lines of a readable width, not one cell of hundreds of columns
            text += f"\n{len(out['bins'])} bin centres (Hz):\n" + textwrap.fill(
                "  ".join(f"{c:g}" for c in out["bins"]), width=78) + "\n"
        if args.curve:
            pts = [{"offset_hz": o, "loss_db": v} for o, v in
                   zip(out["curve"]["offset_hz"], out["curve"]["loss_db"])]
            text += "\n" + format_rows(pts, args.format, ["offset_hz", "loss_db"])
        emit(text, args.output)
    return EXIT_OK


def register(sub) -> None:
    sp = sub.add_parser("bins", help="frequency-bin width for a coherent time and accepted loss")
    rule_option(sp, "--coherent-ms", "search.coherent_ms", required=True,
                help="coherent integration time")
    rule_option(sp, "--max-loss-db", "search.max_frequency_loss_db", required=True,
                help="largest accepted frequency-error loss at a bin edge (positive dB)")
    sp.add_argument("--span-hz", metavar="LOW,HIGH",
                    help="Doppler window in Hz to tile with bins: lists the bin centres "
                         "(default: no window, the bin design only)")
    sp.add_argument("--curve", action="store_true",
                    help="include the loss curve, loss against offset (default: left out)")
    output_options(sp)
    sp.set_defaults(func=cmd_bins)

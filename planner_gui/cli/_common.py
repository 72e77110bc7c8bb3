"""What every ``acqplan`` command shares: the one-line error form, argument parsing of
sites and pairs, table/CSV formatting and atomic output."""

from __future__ import annotations

import argparse
import contextlib
import csv
import io
import math
import sys
from collections.abc import Iterator, Mapping, Sequence

from core.api import InputError

EXIT_OK, EXIT_FAILURE, EXIT_BAD_INPUT = 0, 1, 2

# Options whose values may start with a minus sign (southern/western coordinates,
# negative frequencies, masks below the horizon): "--site -33.9,-70.6,520" is rewritten to
# "--site=-33.9,..." before argparse sees it, since argparse would take a value such as
# "-1e3" for an option. Every option made by :func:`rule_option` joins the list.
SIGNED_VALUE_OPTIONS = {"--site", "--span-hz"}


def join_signed_values(argv: Sequence[str]) -> list[str]:
    out: list[str] = []
    i = 0
    while i < len(argv):
        arg = argv[i]
        if arg in SIGNED_VALUE_OPTIONS and i + 1 < len(argv):
            out.append(f"{arg}={argv[i + 1]}")
            i += 2
            continue
        out.append(arg)
        i += 1
    return out


# --- options that set the same value as a scenario key -----------------------------------
# The command line and the scenario share ONE set of ranges and defaults: an option that
# means what a scenario key means takes its range, unit and default from that key's rule in
# core.plan.spec.KEY_RULES (and --site from core.ground.geodesy's site ranges).

def key_rule(dotted: str):
    from core.api import KEY_RULES

    for rule in KEY_RULES:
        if rule.dotted == dotted:
            return rule
    raise KeyError(dotted)


def rule_type(dotted: str):
    """An argparse ``type`` reading a number inside the range of scenario key ``dotted``."""
    rule = key_rule(dotted)

    def parse(text: str) -> float:
        try:
            value = float(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"'{text}' is not a number") from None
        if not math.isfinite(value) or not rule.lo <= value <= rule.hi:
            raise argparse.ArgumentTypeError(
                f"{text} is outside {rule.range_text} (the range of scenario key {dotted})")
        if rule.kind == "integer":
            if not value.is_integer():
                raise argparse.ArgumentTypeError(f"{text} is not a whole number")
            return int(value)
        return value

    parse.__name__ = dotted
    return parse


def rule_option(sp, flag: str, dotted: str, *, required: bool = False, help: str = "") -> None:
    """Add option ``flag`` with the range, unit and default of scenario key ``dotted``."""
    rule = key_rule(dotted)
    unit = f" {rule.unit}" if rule.unit else ""
    default = "" if required else f"; default {rule.default:g}{unit}"
    sp.add_argument(flag, type=rule_type(dotted), required=required,
                    default=None if required else rule.default,
                    metavar=(rule.unit or "N").upper(),
                    help=f"{help} ({rule.range_text}{default}; as scenario key {dotted})".strip())
    SIGNED_VALUE_OPTIONS.add(flag)


@contextlib.contextmanager
def user_names(names: Mapping[str, str]) -> Iterator[None]:
    """Translate a core error's internal parameter names (``coherent_s``, ``low_hz``) into
    the options the user typed, in its field and its message."""
    try:
        yield
    except InputError as err:
        if err.field not in names and not any(k in err.message for k in names):
            raise
        message = err.message
        for internal, option in names.items():
            message = message.replace(internal, option)
        raise type(err)(message, file=err.file, line=err.line,
                        field=names.get(err.field, err.field)) from None


class Parser(argparse.ArgumentParser):
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
    from core.api import Site

    parts = [p.strip() for p in text.split(",")]
    if len(parts) != 3:
        raise InputError(f"'{text}' must be LAT_DEG,LON_DEG,HEIGHT_M (e.g. 47.4,8.5,420)", field="--site")
    try:
        lat, lon, h = (float(p) for p in parts)
    except ValueError:
        raise InputError(f"'{text}' must be three numbers LAT_DEG,LON_DEG,HEIGHT_M", field="--site") from None
    try:
        return Site(lat, lon, h)
    except InputError as err:      # Site names the scenario key; here the option was typed
        raise InputError(err.message, field="--site") from None


def parse_pair(text: str, field: str) -> tuple[float, float]:
    parts = text.split(",")
    try:
        a, b = (float(p) for p in parts)
    except ValueError:
        raise InputError(f"'{text}' must be two numbers LOW,HIGH", field=field) from None
    if not (math.isfinite(a) and math.isfinite(b)):
        raise InputError(f"'{text}': LOW and HIGH must be finite numbers", field=field)
    if not b > a:
        raise InputError(f"'{text}': HIGH must be above LOW", field=field)
    return a, b


# --- output ------------------------------------------------------------------------------

def emit(text: str, out_path: str | None) -> None:
    if out_path:
        from core.api import write_text_atomic

        write_text_atomic(out_path, text)
    else:
        sys.stdout.write(text)
        if not text.endswith("\n"):
            sys.stdout.write("\n")


def format_rows(rows: list[dict], fmt: str, columns: list[str] | None = None,
                heads: Mapping[str, str] | None = None) -> str:
    """CSV (full values) or an aligned table; ``heads`` gives shorter table headings. The
    table pads no column beyond its longest cell and leaves no trailing blanks."""
    columns = columns or (list(rows[0]) if rows else [])
    if fmt == "csv":
        buf = io.StringIO()
        w = csv.DictWriter(buf, fieldnames=columns, extrasaction="ignore", lineterminator="\n")
        w.writeheader()
        w.writerows(rows)
        return buf.getvalue()
    # Table: aligned columns, numbers right-aligned.
    titles = [(heads or {}).get(c, c) for c in columns]
    cells = [[_cell(r.get(c)) for c in columns] for r in rows]
    widths = [max([len(t)] + [len(row[i]) for row in cells]) for i, t in enumerate(titles)]
    lines = ["  ".join(t.ljust(w) for t, w in zip(titles, widths))]
    lines.append("  ".join("-" * w for w in widths))
    for row in cells:
        lines.append("  ".join(v.rjust(w) if _numeric(v) else v.ljust(w) for v, w in zip(row, widths)))
    return "\n".join(line.rstrip() for line in lines) + "\n"


def _cell(v) -> str:
    if v is None:
        return ""
    if isinstance(v, float):
        return format(v, ".6g")           # as many digits as the value has, up to six
    return str(v)


def _numeric(s: str) -> bool:
    try:
        float(s)
        return True
    except ValueError:
        return False


def print_warnings(warnings: list[str]) -> None:
    for w in warnings:
        print(f"warning: {w}", file=sys.stderr)


def output_options(sp) -> None:
    sp.add_argument("--format", choices=("table", "csv", "json"), default="table",
                    help="output layout: aligned columns for reading, CSV or JSON for programs "
                         "(default: table)")
    sp.add_argument("-o", "--output", metavar="FILE",
                    help="write to FILE (atomically) instead of stdout (default: stdout)")


def skip_and_age_options(sp) -> None:
    """--skip-bad-records and --allow-old-data, shared by plan, passes and doppler."""
    sp.add_argument("--skip-bad-records", action="store_true",
                    help="drop orbit records with a bad checksum or field, or with values no "
                         "satellite of their system can have, with a warning, instead of "
                         "stopping (scenario: orbits.skip_bad_records; default: stop)")
    sp.add_argument("--allow-old-data", action="store_true",
                    help="use orbit data more than 120 days older than the start (or more "
                         "than 14 days ahead of it), with a warning, instead of refusing it "
                         "(scenario: orbits.allow_old_data; default: refuse)")

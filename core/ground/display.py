"""How times, frequencies and search states are written wherever a person reads them.

One rounding and one set of words for the window, the sheets, the CSV and the JSON, so a
time or a frequency reads the same on every face of the plan:

- planned instants are rounded to the **nearest whole second** (half up) once, by
  :func:`whole_second`; every clock text (``HH:MM:SS``, ISO 8601) is made from that;
- frequencies are written in **hertz**, whole hertz on sheets and in windows
  (:func:`hz_text`), with a true minus sign where a person reads them;
- the search state before the first acquisition is ``first`` and after it ``narrowed``
  (the common oscillator error is then measured and every other window narrows).
  The plan JSON keeps its stored value ``"after"`` (files and scripts read it); only the
  words people read change (:data:`STATE_WORDS`).
"""

from __future__ import annotations

import math
from datetime import UTC, datetime, tzinfo

from .constants import SECONDS_PER_WEEK
from .timeutil import unix_to_gps_s

# stored state value (plan JSON, timeline) -> the word people read
STATE_WORDS: dict[str, str] = {"first": "first", "after": "narrowed", "narrowed": "narrowed"}
STATE_MEANING: dict[str, str] = {
    "first": "oscillator error still unknown: the full first window",
    "narrowed": "after the first acquisition: the oscillator error is measured and the "
                "window narrows",
}


def state_word(state: str) -> str:
    """'first' or 'narrowed' for a stored state ('first', 'after')."""
    return STATE_WORDS.get(state, state)


def whole_second(unix_s: float) -> int:
    """The planned instant rounded to the nearest whole second, halves up."""
    if not math.isfinite(unix_s):
        raise ValueError("a planned time must be finite")
    return int(math.floor(float(unix_s) + 0.5))


def _utc(unix_s: float) -> datetime:
    return datetime.fromtimestamp(whole_second(unix_s), UTC)


def clock_text(unix_s: float, zone: tzinfo | None = None, day: bool = False,
               seconds: bool = True) -> str:
    """HH:MM:SS (or HH:MM) of the rounded instant, in UTC or ``zone``; ``day`` prefixes
    the day of the month for windows that span midnight."""
    d = _utc(unix_s)
    if zone is not None:
        d = d.astimezone(zone)
    fmt = ("%H:%M:%S" if seconds else "%H:%M")
    return d.strftime(("%d " + fmt) if day else fmt)


def utc_stamp(unix_s: float) -> str:
    """'2027-05-18 04:01:52 UTC'."""
    return _utc(unix_s).strftime("%Y-%m-%d %H:%M:%S UTC")


def iso_utc(unix_s: float | None) -> str | None:
    """ISO 8601 UTC with date, whole seconds: '2027-05-18T04:01:52Z' (CSV, JSON)."""
    if unix_s is None:
        return None
    return _utc(unix_s).strftime("%Y-%m-%dT%H:%M:%SZ")


def gps_week_tow(unix_s: float) -> tuple[int, int]:
    """(GPS week, whole seconds of week) of the rounded instant (receivers log GPS time)."""
    gps = float(unix_to_gps_s(float(whole_second(unix_s))))
    week = int(gps // SECONDS_PER_WEEK)
    return week, int(round(gps - week * SECONDS_PER_WEEK))


def gps_text(unix_s: float) -> str:
    """'GPS week 2454, TOW 187312 s'."""
    week, tow = gps_week_tow(unix_s)
    return f"GPS week {week}, TOW {tow} s"


def hz_text(v: float, signed: bool = False, unicode_minus: bool = True) -> str:
    """Whole hertz ('-256' or '+925' when ``signed``); no '-0'."""
    if not math.isfinite(v):
        return "∞" if v > 0 else ("−∞" if v < 0 else "—")
    r = int(math.floor(float(v) + 0.5))
    text = f"{r:+d}" if signed and r != 0 else f"{r:d}"
    return text.replace("-", "−") if unicode_minus else text


def duration_text(seconds: float) -> str:
    """A short duration in the unit that reads best, three significant digits:
    '2.5 s', '40 ms', '2.96 µs' (never '2.9584e-06 s')."""
    v = float(seconds)
    if not math.isfinite(v):
        return "∞ s" if v > 0 else "—"
    a = abs(v)
    for scale, unit in ((1.0, "s"), (1e-3, "ms"), (1e-6, "µs")):
        if a >= scale or unit == "µs":
            if a == 0.0:
                return "0 s"
            return f"{v / scale:.3g} {unit}"
    raise AssertionError("unreachable")


def hz_range_text(low_hz: float, high_hz: float) -> str:
    """'−256 … +925 Hz'."""
    return f"{hz_text(low_hz, signed=True)} … {hz_text(high_hz, signed=True)} Hz"


# The areas of the IANA time zone database's geographic zones (tz "Area/Location" names);
# "Etc" holds the fixed offsets. Names outside these ("Factory", "localtime",
# "posixrules", "posix/...", "right/...", old aliases such as "US/Eastern") are not offered.
_ZONE_AREAS = ("Africa", "America", "Antarctica", "Arctic", "Asia", "Atlantic", "Australia",
               "Europe", "Indian", "Pacific", "Etc")


def is_region_zone(name: str) -> bool:
    """True for 'UTC' and the 'Area/Location' names of the IANA database."""
    if name == "UTC":
        return True
    area, sep, rest = name.partition("/")
    return bool(sep and rest) and area in _ZONE_AREAS


def zone_names() -> list[str]:
    """The time zones a person may pick: 'UTC' first, then the IANA region zones."""
    from zoneinfo import available_timezones

    return ["UTC", *sorted(n for n in available_timezones() if n != "UTC" and is_region_zone(n))]

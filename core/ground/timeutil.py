"""Time handling: UTC instants as POSIX seconds (float64 arrays), GPS time, UT1.

acqplan carries instants as UTC POSIX seconds in float64 (resolution about 0.2 us
around 2020), converts them to GPS seconds with the leap-second table in
:mod:`core.constants`, and to UT1 with skyfield's built-in timescale (offline, no
download). SGP4 is fed UTC-based Julian dates split into whole + fraction, as
AIAA 2006-6753 specifies.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from datetime import UTC, datetime, timedelta
from functools import lru_cache

import numpy as np

from .constants import (
    ALMANAC_LEAD_DAYS,
    GPS_EPOCH_UNIX_S,
    GPS_UTC_LEAP_TABLE,
    SECONDS_PER_DAY,
    SECONDS_PER_WEEK,
    UNIX_JD,
    WEEKS_PER_ROLLOVER,
)
from .errors import InputError

_LEAP_STARTS = np.array([t for t, _ in GPS_UTC_LEAP_TABLE])
_LEAP_VALUES = np.array([v for _, v in GPS_UTC_LEAP_TABLE], dtype=float)


def to_unix_s(when: datetime) -> float:
    """POSIX seconds of a timezone-aware datetime (naive datetimes are refused)."""
    if when.tzinfo is None or when.utcoffset() is None:
        raise InputError(f"time {when.isoformat()} has no timezone; give UTC, e.g. 2026-03-14T08:00:00Z")
    return when.timestamp()


def from_unix_s(unix_s: float) -> datetime:
    """Timezone-aware UTC datetime of POSIX seconds (microsecond resolution)."""
    whole = np.floor(unix_s)
    micro = int(round((unix_s - whole) * 1e6))
    return datetime(1970, 1, 1, tzinfo=UTC) + timedelta(seconds=int(whole), microseconds=micro)


def parse_iso_utc(text: str, field: str = "time") -> datetime:
    """Parse an ISO 8601 instant. A missing zone means UTC; any zone is converted to UTC."""
    s = text.strip()
    if s.endswith(("Z", "z")):
        s = s[:-1] + "+00:00"
    try:
        when = datetime.fromisoformat(s)
    except ValueError:
        raise InputError(f"'{text}' is not an ISO 8601 time such as 2026-03-14T08:00:00Z",
                         field=field) from None
    if when.tzinfo is None:
        when = when.replace(tzinfo=UTC)
    return when.astimezone(UTC)


def iso_z(unix_s: float, digits: int | None = None) -> str:
    """ISO 8601 UTC text with a Z; whole seconds unless a fraction is present, or the
    seconds rounded to ``digits`` decimals."""
    if digits is not None:
        unix_s = round(float(unix_s), digits)
        d = from_unix_s(unix_s)
        if digits == 0:
            return d.strftime("%Y-%m-%dT%H:%M:%SZ")
        frac = f"{d.microsecond / 1e6:.{digits}f}"[1:]
        return d.strftime("%Y-%m-%dT%H:%M:%S") + frac + "Z"
    d = from_unix_s(unix_s)
    if d.microsecond:
        return d.strftime("%Y-%m-%dT%H:%M:%S.%f").rstrip("0") + "Z"
    return d.strftime("%Y-%m-%dT%H:%M:%SZ")


def gps_minus_utc_s(unix_s: np.ndarray | float) -> np.ndarray:
    """GPS - UTC in seconds at the given UTC instants [pub: IERS Bulletin C]."""
    idx = np.searchsorted(_LEAP_STARTS, np.asarray(unix_s, dtype=float), side="right") - 1
    return _LEAP_VALUES[np.clip(idx, 0, len(_LEAP_VALUES) - 1)]


def unix_to_gps_s(unix_s: np.ndarray | float) -> np.ndarray:
    """Continuous GPS seconds since 1980-01-06 00:00 GPS from UTC POSIX seconds."""
    u = np.asarray(unix_s, dtype=float)
    return u - GPS_EPOCH_UNIX_S + gps_minus_utc_s(u)


def gps_to_unix_s(gps_s: np.ndarray | float) -> np.ndarray:
    """UTC POSIX seconds from continuous GPS seconds (inverse of :func:`unix_to_gps_s`)."""
    g = np.asarray(gps_s, dtype=float)
    guess = g + GPS_EPOCH_UNIX_S
    return guess - gps_minus_utc_s(guess - gps_minus_utc_s(guess))


def gps_week_tow_to_unix_s(week: int, tow_s: float) -> float:
    return float(gps_to_unix_s(week * SECONDS_PER_WEEK + tow_s))


def resolve_week(week_mod1024: int, tow_s: float, reference_unix_s: float,
                 lead_s: float = ALMANAC_LEAD_DAYS * SECONDS_PER_DAY) -> int:
    """Full GPS week for a 10-bit week number: the latest era whose week+tow is not after
    the reference by more than ``lead_s`` (an almanac is used before its time of
    applicability, never years ahead of it; see ALMANAC_LEAD_DAYS).

    The reference is the planned start (never "today") [pub: gps.gov rollover notes]. The
    resulting age (reference - epoch) lies between -lead and 1024 weeks - lead; how old
    data may be is decided by the caller (core.orbits.data_age).
    """
    if not 0 <= week_mod1024 < WEEKS_PER_ROLLOVER:
        # Some files already hold the full week; keep it.
        return int(week_mod1024)
    ref_gps_s = float(unix_to_gps_s(reference_unix_s))
    latest_week = (ref_gps_s + lead_s) / SECONDS_PER_WEEK
    era = np.floor((latest_week - week_mod1024 - tow_s / SECONDS_PER_WEEK) / WEEKS_PER_ROLLOVER)
    return int(week_mod1024 + max(era, 0) * WEEKS_PER_ROLLOVER)


def jd_split_utc(unix_s: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """UTC Julian date as whole day (ending .5) and fraction, for SGP4."""
    u = np.asarray(unix_s, dtype=float)
    day = np.floor(u / SECONDS_PER_DAY)
    whole = UNIX_JD + day
    frac = (u - day * SECONDS_PER_DAY) / SECONDS_PER_DAY
    return whole, frac


@lru_cache(maxsize=1)
def builtin_timescale():
    """skyfield's offline timescale (bundled leap seconds and UT1-UTC).

    Built the way skyfield's ``load.timescale(builtin=True)`` builds it, from the same
    bundled arrays, but without importing ``skyfield.api``, whose download machinery (ssl,
    urllib, certifi, the ephemeris readers) costs a plan's start-up about 35 ms; the public
    route stays as the fallback for a skyfield laid out otherwise (test_geometry checks the
    two give the same UT1 - UTC).
    """
    try:
        from skyfield.functions import load_bundled_npy
        from skyfield.timelib import Timescale

        arrays = load_bundled_npy("iers.npz")
        daily_tt = arrays["tt_jd_minus_arange"]
        daily_tt += np.arange(len(daily_tt))
        daily_delta_t = (arrays["delta_t_1e7"] / 1e7).round(7)
        return Timescale((daily_tt, daily_delta_t), arrays["leap_dates"], arrays["leap_offsets"])
    except (ImportError, KeyError, OSError):  # pragma: no cover - other skyfield layouts
        from skyfield.api import load

        return load.timescale(builtin=True)


DUT1_KNOT_S = 3600.0


def ut1_split(unix_s: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """UT1 Julian date as (whole, fraction) from skyfield's built-in UT1-UTC table."""
    whole, frac = jd_split_utc(unix_s)
    ts = builtin_timescale()
    # dut1 varies slowly: evaluate it at whole hours and interpolate (saves time on long
    # grids; the same knots whatever part of a grid is asked, so blocks agree).
    u = np.asarray(unix_s, dtype=float)
    if u.size == 0:
        return whole, frac
    h = DUT1_KNOT_S
    knots = h * np.arange(np.floor(u.min() / h), np.floor(u.max() / h) + 2.0)
    tt = ts.utc(1970, 1, 1, 0, 0, knots)
    dut1_knots = np.atleast_1d(tt.dut1)
    dut1 = np.interp(u, knots, dut1_knots)
    frac_ut1 = frac + dut1 / SECONDS_PER_DAY
    return whole, frac_ut1


@dataclass(frozen=True)
class TimeGrid:
    """A sequence of UTC instants held as POSIX seconds."""

    unix_s: np.ndarray

    def __len__(self) -> int:
        return int(self.unix_s.size)

    @property
    def start_unix_s(self) -> float:
        return float(self.unix_s[0])

    @property
    def end_unix_s(self) -> float:
        return float(self.unix_s[-1])

    def datetimes(self) -> list[datetime]:
        return [from_unix_s(u) for u in self.unix_s]

    def iso(self) -> list[str]:
        return [iso_z(u) for u in self.unix_s]

    def offsets_s(self) -> np.ndarray:
        return self.unix_s - self.unix_s[0]


def time_grid(start: datetime, end: datetime, step_s: float) -> TimeGrid:
    """Instants from start to end inclusive (end added if the step does not land on it)."""
    a, b = to_unix_s(start), to_unix_s(end)
    if not (np.isfinite(step_s) and step_s > 0):
        raise InputError(f"step {step_s} s must be a positive number", field="step_s")
    if b < a:
        raise InputError(f"end {end.isoformat()} is before start {start.isoformat()}", field="end")
    n = int(np.floor((b - a) / step_s + 1e-9))
    u = a + np.arange(n + 1) * step_s
    if b - u[-1] > 1e-6:
        u = np.append(u, b)
    return TimeGrid(u)


def as_time_grid(times: TimeGrid | Sequence[datetime] | Iterable[float] | np.ndarray) -> TimeGrid:
    """Accept a TimeGrid, datetimes, or POSIX seconds."""
    if isinstance(times, TimeGrid):
        return times
    seq = list(times) if not isinstance(times, np.ndarray) else times
    if isinstance(seq, np.ndarray):
        return TimeGrid(np.atleast_1d(seq.astype(float)))
    if seq and isinstance(seq[0], datetime):
        return TimeGrid(np.array([to_unix_s(d) for d in seq], dtype=float))
    return TimeGrid(np.atleast_1d(np.asarray(seq, dtype=float)))

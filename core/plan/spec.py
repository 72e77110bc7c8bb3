"""Scenario files: what to plan, where, when, for which receiver (TOML).

A scenario is read with :mod:`tomllib` and written back with ``tomli_w``. Every key is
described by one :class:`KeyRule` in :data:`KEY_RULES` (type, unit, default, allowed range);
``docs/scenario-keys.md`` documents the same keys for users.

Validation collects every bad field and raises one :class:`ScenarioValidationError` (a
:class:`~core.errors.ScenarioError`) whose ``problems`` list holds one ScenarioError per
field, each with ``field`` (dotted key such as ``search.coherent_ms``), ``file`` and, when
the key can be found in the file text, ``line``. Unknown keys are errors (typo protection),
with a "did you mean" hint.

Orbit file names are stored as written (relative names are relative to the scenario
file's folder); :meth:`Scenario.resolved_orbit_files` gives absolute paths.
"""

from __future__ import annotations

import math
import numbers
import os
import re
from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from datetime import UTC, date, datetime, time
from pathlib import Path
from typing import Any
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError, available_timezones

from ..ground.errors import InputError, ScenarioError
from ..ground.geodesy import SITE_HEIGHT_RANGE_M, SITE_LAT_RANGE_DEG, SITE_LON_RANGE_DEG
from ..ground.signals import SIGNALS, Signal
from ..ground.timeutil import TimeGrid, iso_z, parse_iso_utc, time_grid

FORMAT_VERSION = 1
MAX_WINDOW_S = 7 * 86_400.0      # longest planning window accepted (7 days)
PRIORITIES = ("elevation", "rising")
# Keys allowed inside [search.per_signal.<SIGNAL-ID>] tables.
PER_SIGNAL_KEYS = ("coherent_ms", "noncoherent")


def _close_matches(word: str, options, n: int = 1) -> list[str]:
    """difflib's close matches ("did you mean"), imported only when a key is wrong."""
    import difflib

    return difflib.get_close_matches(word, options, n=n)


class _Required:
    def __repr__(self) -> str:
        return "REQUIRED"


REQUIRED: Any = _Required()


@dataclass(frozen=True)
class KeyRule:
    """One scenario key: where it lives, what it holds, its default and allowed range."""

    section: str                 # "" for top-level keys
    key: str
    kind: str                    # number, integer, bool, text, choice, time, zone, path, paths, signals
    default: Any = REQUIRED      # REQUIRED: must be given; None: optional, absent means "not set"
    lo: float | None = None
    hi: float | None = None
    unit: str = ""
    choices: tuple[str, ...] = ()
    doc: str = ""

    @property
    def dotted(self) -> str:
        return f"{self.section}.{self.key}" if self.section else self.key

    @property
    def required(self) -> bool:
        return self.default is REQUIRED

    @property
    def range_text(self) -> str:
        """The allowed range as messages show it, e.g. '-5 to 60 deg'."""
        return _range_text(self)


def _r(section: str, key: str, kind: str, default: Any = REQUIRED, lo: float | None = None,
       hi: float | None = None, unit: str = "", choices: tuple[str, ...] = (), doc: str = "") -> KeyRule:
    return KeyRule(section, key, kind, default, lo, hi, unit, choices, doc)


KEY_RULES: tuple[KeyRule, ...] = (
    _r("", "name", "text", "Untitled scenario", doc="title shown in the window and on reports"),
    _r("", "format_version", "integer", FORMAT_VERSION, 1, FORMAT_VERSION,
       doc="version of this file layout; written by acqplan"),
    _r("orbits", "files", "paths", (), doc="almanac, TLE or RINEX navigation files (plain, .gz, .Z), relative to the scenario file"),
    _r("orbits", "mapping", "path", None, doc="GLONASS mapping file (catalogue number, ID, channel k)"),
    _r("orbits", "skip_bad_records", "bool", False,
       doc="true: drop bad or implausible orbit records with a warning instead of stopping"),
    _r("orbits", "allow_old_data", "bool", False,
       doc="true: plan with orbit data older than 120 days (or over 14 days ahead) anyway"),
    _r("site", "lat_deg", "number", REQUIRED, *SITE_LAT_RANGE_DEG, "deg", doc="geodetic latitude, WGS-84"),
    _r("site", "lon_deg", "number", REQUIRED, *SITE_LON_RANGE_DEG, "deg", doc="longitude, east positive"),
    _r("site", "height_m", "number", 0.0, *SITE_HEIGHT_RANGE_M, "m", doc="height above the WGS-84 ellipsoid"),
    _r("site", "horizontal_uncertainty_km", "number", 30.0, 0.0, 20_000.0, "km",
       doc="how far the true position may be from lat/lon"),
    _r("site", "vertical_uncertainty_m", "number", 500.0, 0.0, 20_000.0, "m",
       doc="how far the true height may be from height_m"),
    _r("time", "start", "time", REQUIRED, doc="start of the planning window, ISO 8601 UTC"),
    _r("time", "end", "time", REQUIRED, doc="end of the window; after start, at most 7 days later"),
    _r("time", "step_s", "number", 60.0, 1.0, 3600.0, "s", doc="time step of the plan"),
    _r("time", "uncertainty_s", "number", 2.0, 0.0, 86_400.0, "s",
       doc="how far the receiver's clock may be from true time"),
    _r("time", "timezone", "zone", "UTC", doc="IANA zone for local-time display, e.g. Europe/Zurich"),
    _r("receiver", "signals", "signals", ("GPS-L1CA",), doc="signals to search, see the list below"),
    _r("receiver", "channels", "integer", 12, 1, 256, doc="search channels working at the same time"),
    _r("receiver", "oscillator_offset_ppb", "number", 0.0, -50_000.0, 50_000.0, "ppb",
       doc="known frequency offset of the reference oscillator"),
    _r("receiver", "oscillator_uncertainty_ppb", "number", 500.0, 0.0, 50_000.0, "ppb",
       doc="unknown part of the oscillator offset (+-)"),
    _r("receiver", "max_horizontal_speed_m_s", "number", 0.0, 0.0, 1000.0, "m/s",
       doc="largest horizontal speed of the receiver"),
    _r("receiver", "max_vertical_speed_m_s", "number", 0.0, 0.0, 500.0, "m/s",
       doc="largest vertical speed of the receiver"),
    _r("receiver", "correlators_per_channel", "integer", 1, 1, 1_000_000,
       doc="code offsets one channel tests in one dwell"),
    _r("receiver", "parallel_code_search", "bool", False,
       doc="true: each dwell covers a whole code period (e.g. FFT search)"),
    _r("search", "coherent_ms", "number", 1.0, 1.0, 1000.0, "ms", doc="coherent integration time"),
    _r("search", "noncoherent", "integer", 5, 1, 1000, doc="coherent blocks summed non-coherently"),
    _r("search", "max_frequency_loss_db", "number", 1.0, 0.1, 3.0, "dB",
       doc="largest loss allowed at the edge of a frequency bin (sets the bin width)"),
    _r("search", "code_step_chips", "number", 0.5, 0.05, 1.0, "chips", doc="code-phase step"),
    _r("search", "false_alarm_per_cell", "number", 1e-4, 1e-12, 0.1,
       doc="false-alarm probability per search cell"),
    _r("search", "false_alarm_penalty_s", "number", 0.1, 0.0, 600.0, "s",
       doc="time lost to reject one false alarm"),
    _r("search", "fine_time_uncertainty_us", "number", None, 0.0, 100_000.0, "us",
       doc="fine time assistance: narrows the code window; absent = no fine time"),
    _r("search", "first_fix_satellites", "integer", 4, 1, 64,
       doc="satellites needed for the first fix"),
    _r("search", "ephemeris_wait_s", "number", 30.0, 0.0, 3600.0, "s",
       doc="time from acquisition to a usable ephemeris"),
    _r("search", "orbit_margin_hz", "number", None, 0.0, 10_000.0, "Hz",
       doc="override of the Doppler margin for orbit-data error; absent = from the data's age"),
    _r("search", "priority", "choice", "elevation", choices=PRIORITIES,
       doc="order of the search: highest first, or rising satellites first"),
    _r("search", "monte_carlo_runs", "integer", 500, 1, 100_000, doc="simulated acquisitions"),
    _r("search", "seed", "integer", 1, 0, 2**63 - 1, doc="random seed of the simulation"),
    _r("signal", "cn0_zenith_dbhz", "number", 45.0, 10.0, 60.0, "dB-Hz", doc="C/N0 at 90 deg elevation"),
    _r("signal", "cn0_at_mask_dbhz", "number", 35.0, 10.0, 60.0, "dB-Hz",
       doc="C/N0 at the elevation mask; not above cn0_zenith_dbhz"),
    _r("signal", "extra_loss_db", "number", 0.0, 0.0, 50.0, "dB",
       doc="extra attenuation (foliage, car body, indoor)"),
    _r("mask", "elevation_deg", "number", 5.0, -5.0, 60.0, "deg", doc="elevation mask"),
)

RULES_BY_DOTTED: dict[str, KeyRule] = {r.dotted: r for r in KEY_RULES}
DRIVE_SECTIONS: tuple[str, ...] = ("route", "event")     # their keys: core.plan.drive
SECTIONS: tuple[str, ...] = ("orbits", "site", "time", "receiver", "search", "signal", "mask")
# Sections with no required key: absent, every value is a default. A saved scenario holds
# them all, so their absence is reported (Scenario.defaults_used), never an error.
DEFAULTABLE_SECTIONS: tuple[str, ...] = ("orbits", "receiver", "search", "signal", "mask")
_SECTION_KEYS: dict[str, tuple[str, ...]] = {
    s: tuple(r.key for r in KEY_RULES if r.section == s) for s in ("", *SECTIONS)}
_PER_SIGNAL_RULES = {k: RULES_BY_DOTTED[f"search.{k}"] for k in PER_SIGNAL_KEYS}


# ---------------------------------------------------------------------------------------
# The scenario as frozen dataclasses

@dataclass(frozen=True)
class OrbitSpec:
    """[orbits]: the orbit files, GLONASS mapping and what to do with bad or old records."""

    files: tuple[str, ...] = ()
    mapping: str | None = None
    skip_bad_records: bool = False
    allow_old_data: bool = False


@dataclass(frozen=True)
class SiteSpec:
    """[site]: where the receiver is, and how well that is known."""

    lat_deg: float
    lon_deg: float
    height_m: float = 0.0
    horizontal_uncertainty_km: float = 30.0
    vertical_uncertainty_m: float = 500.0


@dataclass(frozen=True)
class TimeSpec:
    """[time]: the planning window, its step, the time uncertainty and display zone."""

    start: datetime             # timezone-aware, UTC
    end: datetime
    step_s: float = 60.0
    uncertainty_s: float = 2.0
    timezone: str = "UTC"

    @property
    def start_unix_s(self) -> float:
        return self.start.timestamp()

    @property
    def end_unix_s(self) -> float:
        return self.end.timestamp()

    @property
    def duration_s(self) -> float:
        return self.end_unix_s - self.start_unix_s

    @property
    def tzinfo(self) -> ZoneInfo:
        return ZoneInfo(self.timezone)

    def grid(self) -> TimeGrid:
        """The plan's instants, start to end inclusive, every step_s."""
        return time_grid(self.start, self.end, self.step_s)


@dataclass(frozen=True)
class ReceiverSpec:
    """[receiver]: signals, channels, oscillator, dynamics and correlators."""

    signals: tuple[str, ...] = ("GPS-L1CA",)
    channels: int = 12
    oscillator_offset_ppb: float = 0.0
    oscillator_uncertainty_ppb: float = 500.0
    max_horizontal_speed_m_s: float = 0.0
    max_vertical_speed_m_s: float = 0.0
    correlators_per_channel: int = 1
    parallel_code_search: bool = False

    def signal_objects(self) -> tuple[Signal, ...]:
        return tuple(SIGNALS[s] for s in self.signals)


@dataclass(frozen=True)
class SignalOverride:
    """Per-signal values that replace the [search] ones (None = use [search])."""

    coherent_ms: float | None = None
    noncoherent: int | None = None


@dataclass(frozen=True)
class SearchSpec:
    """[search]: integration, bin loss, code step, false alarms, fix rules and Monte Carlo."""

    coherent_ms: float = 1.0
    noncoherent: int = 5
    max_frequency_loss_db: float = 1.0
    code_step_chips: float = 0.5
    false_alarm_per_cell: float = 1e-4
    false_alarm_penalty_s: float = 0.1
    fine_time_uncertainty_us: float | None = None
    first_fix_satellites: int = 4
    ephemeris_wait_s: float = 30.0
    orbit_margin_hz: float | None = None
    priority: str = "elevation"
    monte_carlo_runs: int = 500
    seed: int = 1
    per_signal: tuple[tuple[str, SignalOverride], ...] = ()

    def integration_for(self, signal_id: str) -> tuple[float, int]:
        """(coherent_ms, noncoherent) for one signal: the per-signal override, else [search]."""
        over = dict(self.per_signal).get(signal_id.strip().upper(), SignalOverride())
        coh = self.coherent_ms if over.coherent_ms is None else over.coherent_ms
        nc = self.noncoherent if over.noncoherent is None else over.noncoherent
        return coh, nc


@dataclass(frozen=True)
class SignalSpec:
    """[signal]: the C/N0 model (zenith and mask values) and extra losses."""

    cn0_zenith_dbhz: float = 45.0
    cn0_at_mask_dbhz: float = 35.0
    extra_loss_db: float = 0.0


@dataclass(frozen=True)
class MaskSpec:
    """[mask]: the elevation mask."""

    elevation_deg: float = 5.0


_SECTION_CLASSES: dict[str, type] = {
    "orbits": OrbitSpec, "site": SiteSpec, "time": TimeSpec, "receiver": ReceiverSpec,
    "search": SearchSpec, "signal": SignalSpec, "mask": MaskSpec,
}


@dataclass(frozen=True)
class Scenario:
    """A validated scenario. ``path`` and ``base_dir`` do not take part in ``==``."""

    site: SiteSpec
    time: TimeSpec
    name: str = "Untitled scenario"
    orbits: OrbitSpec = OrbitSpec()
    receiver: ReceiverSpec = ReceiverSpec()
    search: SearchSpec = SearchSpec()
    signal: SignalSpec = SignalSpec()
    mask: MaskSpec = MaskSpec()
    # The drive (core.plan.drive): a route and test events; None / () = a single site.
    route: Any = None
    events: tuple = ()
    path: Path | None = field(default=None, compare=False)
    base_dir: Path = field(default_factory=Path.cwd, compare=False)
    # Sections that every saved scenario holds but this one's file left out (or left
    # empty), so that all their values are defaults; a file cut short that is still valid
    # TOML shows here. Kept through with_changes() for the sections not changed.
    defaults_used: tuple[str, ...] = field(default=(), compare=False)
    # Where each key stands in the file the scenario was read from (a _Locator; None when
    # built from a dict): problems found later, when the drive is planned, name the line.
    # Kept through with_changes(), where the keys a change touches are not the file's
    # values any more; their problems are found by the checker, which names no line then.
    locator: Any = field(default=None, compare=False, repr=False)

    # -- convenience
    def line_of(self, dotted: str) -> int | None:
        """The line of key ``dotted`` (``event[3].at``) in the scenario's file, if known."""
        return None if self.locator is None else self.locator.line_of(dotted)

    @property
    def defaults_note(self) -> str:
        """'defaults used for: [receiver], [mask]' or '' (plan header, JSON, sheet)."""
        if not self.defaults_used:
            return ""
        return "defaults used for: " + ", ".join(f"[{s}]" for s in self.defaults_used)

    @property
    def start_unix_s(self) -> float:
        return self.time.start_unix_s

    @property
    def end_unix_s(self) -> float:
        return self.time.end_unix_s

    def resolved_orbit_files(self) -> list[Path]:
        """Absolute paths of the orbit files (relative names are taken from base_dir)."""
        return [_resolve(self.base_dir, f) for f in self.orbits.files]

    def resolved_mapping(self) -> Path | None:
        return None if self.orbits.mapping is None else _resolve(self.base_dir, self.orbits.mapping)

    def missing_orbit_files(self) -> list[Path]:
        """Orbit and mapping files that do not exist (empty when all are there)."""
        paths = self.resolved_orbit_files()
        m = self.resolved_mapping()
        if m is not None:
            paths.append(m)
        return [p for p in paths if not p.is_file()]

    # -- conversion
    def to_dict(self) -> dict[str, Any]:
        """Plain nested dict in file layout (TOML-ready: times as ISO text, None left out)."""
        out: dict[str, Any] = {"name": self.name, "format_version": FORMAT_VERSION}
        for section in SECTIONS:
            spec = getattr(self, section)
            table: dict[str, Any] = {}
            for key in _SECTION_KEYS[section]:
                value = _to_file_value(getattr(spec, key))
                if value is not None:
                    table[key] = value
            if section == "search" and self.search.per_signal:
                per: dict[str, Any] = {}
                for sid, over in self.search.per_signal:
                    sub = {k: _to_file_value(getattr(over, k)) for k in PER_SIGNAL_KEYS
                           if getattr(over, k) is not None}
                    per[sid] = sub
                table["per_signal"] = per
            out[section] = table
        if self.route is not None or self.events:
            from .drive import drive_to_dict
            out.update(drive_to_dict(self.route, self.events))
        return out

    @classmethod
    def from_dict(cls, d: Mapping[str, Any], base_dir: str | os.PathLike[str] | None = None,
                  path: str | os.PathLike[str] | None = None) -> Scenario:
        """Validate a nested dict (file layout) and build the Scenario.

        Raises :class:`ScenarioValidationError` listing every bad field.
        """
        return _build(d, base_dir=base_dir, path=path, text=None)

    def with_changes(self, **updates: Any) -> Scenario:
        """A validated copy with some values changed.

        Each keyword is a section name with a dict of keys to change (or a whole spec
        object), or ``name=``. Example: ``sc.with_changes(search={"coherent_ms": 8})``.
        """
        d = self.to_dict()
        for key, value in updates.items():
            if key in ("name", "format_version"):
                d[key] = value
            elif key in SECTIONS:
                if isinstance(value, _SECTION_CLASSES[key]):
                    d[key] = _spec_to_table(key, value)
                elif isinstance(value, Mapping):
                    d[key] = {**d.get(key, {}), **value}
                else:
                    raise TypeError(f"with_changes({key}=...) needs a dict or a {_SECTION_CLASSES[key].__name__}")
            else:
                raise TypeError(f"with_changes: no section '{key}'")
        changed = _build(d, base_dir=self.base_dir, path=self.path, text=None)
        return replace(changed, defaults_used=tuple(
            s for s in self.defaults_used if s not in updates), locator=self.locator)

    def validated(self) -> Scenario:
        """Re-check a scenario built by hand (dataclass constructors do not validate)."""
        again = _build(self.to_dict(), base_dir=self.base_dir, path=self.path, text=None)
        return replace(again, defaults_used=self.defaults_used, locator=self.locator)


def _spec_to_table(section: str, spec: Any) -> dict[str, Any]:
    sc = Scenario(site=SiteSpec(0.0, 0.0), time=TimeSpec(datetime(2000, 1, 1, tzinfo=UTC),
                                                          datetime(2000, 1, 2, tzinfo=UTC)))
    return replace(sc, **{section: spec}).to_dict()[section]


def _resolve(base_dir: Path, name: str) -> Path:
    p = Path(name).expanduser()
    return p if p.is_absolute() else (Path(base_dir) / p).resolve()


def _to_file_value(v: Any) -> Any:
    if v is None:
        return None
    if isinstance(v, bool):
        return v
    if isinstance(v, datetime):
        return iso_z(v.timestamp())
    if isinstance(v, float):
        # Whole numbers are written without ".0"; loading turns them back into floats.
        return int(v) if v.is_integer() and abs(v) < 1e15 else v
    if isinstance(v, tuple):
        return list(v)
    return v


# ---------------------------------------------------------------------------------------
# Errors

class ScenarioValidationError(ScenarioError):
    """One or more scenario fields are bad. ``problems`` holds one ScenarioError per field."""

    def __init__(self, problems: list[ScenarioError], *, file: str | None = None):
        self.problems = list(problems)
        if len(self.problems) == 1:
            p = self.problems[0]
            super().__init__(p.message, file=p.file or file, line=p.line, field=p.field)
        else:
            lines = [f"{len(self.problems)} problems in the scenario:"]
            for p in self.problems:
                lines.append("  - " + _locate_without_file(p))
            super().__init__("\n".join(lines), file=file)


def _locate_without_file(p: ScenarioError) -> str:
    where = []
    if p.line is not None:
        where.append(f"line {p.line}")
    if p.field:
        where.append(f"field '{p.field}'")
    return (", ".join(where) + ": " + p.message) if where else p.message


# ---------------------------------------------------------------------------------------
# Locating keys in the file text (for line numbers)

_HEADER_RE = re.compile(r"^\s*\[\s*([^\[\]]+?)\s*\]\s*(#.*)?$")
_ARRAY_HEADER_RE = re.compile(r"^\s*\[\[\s*([^\[\]]+?)\s*\]\]\s*(#.*)?$")
_KEY_RE = re.compile(r"^\s*((?:[A-Za-z0-9_\-]+|\"[^\"]*\"|'[^']*')(?:\s*\.\s*(?:[A-Za-z0-9_\-]+|\"[^\"]*\"|'[^']*'))*)\s*=")
_INDEX_RE = re.compile(r"\[\d+\]")


def _split_key(text: str) -> list[str]:
    parts = re.findall(r"\"[^\"]*\"|'[^']*'|[A-Za-z0-9_\-]+", text)
    return [p[1:-1] if p[:1] in "\"'" else p for p in parts]


class _Locator:
    """Maps dotted keys and table headers to 1-based line numbers of a TOML text.

    Elements of an array of tables are numbered from 1 as the checker names them:
    the keys under the third ``[[event]]`` are ``event[3].kind``, ``event[3].at``, and
    ``event[3]`` is that header's line (``[[route.stretch]]``: ``route.stretch[2].from``)."""

    def __init__(self, text: str | None):
        self.keys: dict[str, int] = {}
        self.tables: dict[str, int] = {}
        if not text:
            return
        table: list[str] = []
        counts: dict[str, int] = {}          # indexed path of an array of tables -> elements so far
        for n, line in enumerate(text.splitlines(), start=1):
            a = _ARRAY_HEADER_RE.match(line)
            h = None if a else _HEADER_RE.match(line)
            if a or h:
                table = self._resolve(_split_key((a or h).group(1)), counts, is_array=bool(a))
                self.tables.setdefault(".".join(table), n)
                continue
            k = _KEY_RE.match(line)
            if k:
                self.keys.setdefault(".".join([*table, *_split_key(k.group(1))]), n)

    @staticmethod
    def _resolve(parts: list[str], counts: dict[str, int], is_array: bool) -> list[str]:
        """A header's path with the latest element index of every array of tables on it."""
        out: list[str] = []
        for i, part in enumerate(parts):
            name = ".".join([*out, part])
            if is_array and i == len(parts) - 1:
                counts[name] = counts.get(name, 0) + 1
            out.append(f"{part}[{counts[name]}]" if name in counts else part)
        return out

    def line_of(self, dotted: str) -> int | None:
        if dotted in self.keys:
            return self.keys[dotted]
        if dotted in self.tables:
            return self.tables[dotted]
        # A missing key: point at its table header, if there is one; an element of an
        # array written inline (event = [{...}]) at the array's key.
        parts = dotted.split(".")
        for i in range(len(parts) - 1, 0, -1):
            head = ".".join(parts[:i])
            bare = _INDEX_RE.sub("", head)
            if head in self.tables:
                return self.tables[head]
            if bare != head and bare in self.keys:
                return self.keys[bare]
        return None


# ---------------------------------------------------------------------------------------
# Validation

def _show(v: Any) -> str:
    """A value as the user wrote it (TOML spelling)."""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, str):
        return repr(v)
    if isinstance(v, datetime | date | time):
        return v.isoformat()
    if isinstance(v, Mapping):
        return "a table"
    if isinstance(v, list | tuple):
        return "[" + ", ".join(_show(x) for x in v) + "]"
    return repr(v)


def _type_name(v: Any) -> str:
    if isinstance(v, bool):
        return "a boolean"
    if isinstance(v, str):
        return "text"
    if isinstance(v, numbers.Integral):
        return "a whole number"
    if isinstance(v, numbers.Real):
        return "a number"
    if isinstance(v, Mapping):
        return "a table"
    if isinstance(v, list | tuple):
        return "a list"
    if isinstance(v, datetime):
        return "a date-time"
    if isinstance(v, date):
        return "a date"
    if isinstance(v, time):
        return "a time of day"
    return type(v).__name__


def _fmt_bound(x: float) -> str:
    if isinstance(x, int) or float(x).is_integer():
        return f"{int(x):,}".replace(",", "_") if abs(x) >= 1_000_000 else str(int(x))
    return f"{x:g}"


def _range_text(rule: KeyRule) -> str:
    unit = f" {rule.unit}" if rule.unit else ""
    return f"{_fmt_bound(rule.lo)} to {_fmt_bound(rule.hi)}{unit}"


class _Checker:
    def __init__(self, file: str | None, locator: _Locator):
        self.file = file
        self.loc = locator
        self.problems: list[ScenarioError] = []

    def add(self, dotted: str, message: str) -> None:
        self.problems.append(ScenarioError(message, file=self.file, line=self.loc.line_of(dotted),
                                           field=dotted))

    # Each check returns the converted value or _BAD.
    def number(self, rule: KeyRule, dotted: str, v: Any) -> Any:
        if isinstance(v, bool) or not isinstance(v, numbers.Real):
            hint = " (write it without quotes)" if isinstance(v, str) else ""
            self.add(dotted, f"{_show(v)} is {_type_name(v)}; a number is needed, "
                             f"{_range_text(rule)}{hint}")
            return _BAD
        x = float(v)
        if not math.isfinite(x):
            self.add(dotted, f"{_show(v)} is not a finite number; allowed {_range_text(rule)}")
            return _BAD
        if not rule.lo <= x <= rule.hi:
            self.add(dotted, f"{_show(v)} is outside the allowed range {_range_text(rule)}")
            return _BAD
        return x

    def integer(self, rule: KeyRule, dotted: str, v: Any) -> Any:
        if isinstance(v, bool) or not isinstance(v, numbers.Real):
            hint = " (write it without quotes)" if isinstance(v, str) else ""
            self.add(dotted, f"{_show(v)} is {_type_name(v)}; a whole number is needed, "
                             f"{_range_text(rule)}{hint}")
            return _BAD
        if not isinstance(v, numbers.Integral):
            if not (math.isfinite(float(v)) and float(v).is_integer()):
                self.add(dotted, f"{_show(v)} is not a whole number; allowed {_range_text(rule)}")
                return _BAD
        n = int(v)
        if not rule.lo <= n <= rule.hi:
            self.add(dotted, f"{_show(v)} is outside the allowed range {_range_text(rule)}")
            return _BAD
        return n

    def boolean(self, rule: KeyRule, dotted: str, v: Any) -> Any:
        if not isinstance(v, bool):
            self.add(dotted, f"{_show(v)} is {_type_name(v)}; write true or false (no quotes)")
            return _BAD
        return v

    def text(self, rule: KeyRule, dotted: str, v: Any) -> Any:
        if not isinstance(v, str):
            self.add(dotted, f"{_show(v)} is {_type_name(v)}; text in quotes is needed")
            return _BAD
        s = v.strip()
        if not s:
            self.add(dotted, "is empty; give some text")
            return _BAD
        if len(s) > 200:
            self.add(dotted, f"is {len(s)} characters long; at most 200 are allowed")
            return _BAD
        return s

    def choice(self, rule: KeyRule, dotted: str, v: Any) -> Any:
        allowed = ", ".join(f"'{c}'" for c in rule.choices)
        if not isinstance(v, str):
            self.add(dotted, f"{_show(v)} is {_type_name(v)}; one of {allowed} is needed")
            return _BAD
        s = v.strip().lower()
        if s not in rule.choices:
            self.add(dotted, f"{_show(v)} is not one of {allowed}")
            return _BAD
        return s

    def when(self, rule: KeyRule, dotted: str, v: Any) -> Any:
        if isinstance(v, datetime):
            return v.replace(tzinfo=UTC) if v.tzinfo is None else v.astimezone(UTC)
        if isinstance(v, str):
            try:
                return parse_iso_utc(v, field=dotted)
            except InputError:
                self.add(dotted, f"{_show(v)} is not an ISO 8601 time such as 2027-05-18T04:00:00Z")
                return _BAD
        extra = " (give a time of day too, e.g. 2027-05-18T04:00:00Z)" if isinstance(v, date | time) else ""
        self.add(dotted, f"{_show(v)} is {_type_name(v)}; an ISO 8601 UTC time is needed{extra}")
        return _BAD

    def zone(self, rule: KeyRule, dotted: str, v: Any) -> Any:
        if not isinstance(v, str):
            self.add(dotted, f"{_show(v)} is {_type_name(v)}; an IANA time zone name such as "
                             "'Europe/Zurich' is needed")
            return _BAD
        s = v.strip()
        try:
            if not s:
                raise ValueError("empty")
            ZoneInfo(s)
        except (ZoneInfoNotFoundError, ValueError, OSError):
            close = _close_matches(s, sorted(available_timezones()), n=1)
            hint = f"; did you mean '{close[0]}'?" if close else ""
            self.add(dotted, f"{_show(v)} is not a known IANA time zone (e.g. 'Europe/Zurich', 'UTC'){hint}")
            return _BAD
        return s

    def path(self, rule: KeyRule, dotted: str, v: Any) -> Any:
        if not isinstance(v, str):
            self.add(dotted, f"{_show(v)} is {_type_name(v)}; a file name in quotes is needed")
            return _BAD
        if not v.strip():
            self.add(dotted, "is empty; give a file name")
            return _BAD
        if "\x00" in v:
            shown = _show(v.replace("\x00", "\\0"))
            self.add(dotted, f"{shown} contains a NUL byte (\\0); no file can have that name")
            return _BAD
        return v.strip()

    def paths(self, rule: KeyRule, dotted: str, v: Any) -> Any:
        if not isinstance(v, list | tuple):
            self.add(dotted, f"{_show(v)} is {_type_name(v)}; a list of file names is needed, "
                             'e.g. ["almanac.txt", "gnss.tle"]')
            return _BAD
        out: list[str] = []
        ok = True
        for i, item in enumerate(v, start=1):
            if not isinstance(item, str) or not item.strip():
                what = "empty" if isinstance(item, str) else _type_name(item)
                self.add(dotted, f"entry {i} ({_show(item)}) is {what}; a file name in quotes is needed")
                ok = False
            elif "\x00" in item:
                shown = _show(item.replace("\x00", "\\0"))
                self.add(dotted, f"entry {i} ({shown}) contains a NUL byte (\\0); no file can "
                                 "have that name")
                ok = False
            elif item.strip() in out:
                self.add(dotted, f"entry {i} ({_show(item)}) is listed twice")
                ok = False
            else:
                out.append(item.strip())
        return tuple(out) if ok else _BAD

    def signals(self, rule: KeyRule, dotted: str, v: Any) -> Any:
        known = ", ".join(SIGNALS)
        if not isinstance(v, list | tuple):
            self.add(dotted, f"{_show(v)} is {_type_name(v)}; a list of signal IDs is needed, "
                             f'e.g. ["GPS-L1CA"]; known: {known}')
            return _BAD
        if not v:
            self.add(dotted, f"is empty; give at least one signal of: {known}")
            return _BAD
        out: list[str] = []
        ok = True
        for i, item in enumerate(v, start=1):
            sid = item.strip().upper() if isinstance(item, str) else None
            if sid is None or sid not in SIGNALS:
                close = _close_matches(sid or "", list(SIGNALS), n=1) if sid else []
                hint = f"; did you mean '{close[0]}'?" if close else ""
                self.add(dotted, f"entry {i} ({_show(item)}) is not a known signal{hint}; known: {known}")
                ok = False
            elif sid in out:
                self.add(dotted, f"entry {i} ({_show(item)}) is listed twice")
                ok = False
            else:
                out.append(sid)
        return tuple(out) if ok else _BAD

    def check(self, rule: KeyRule, dotted: str, v: Any) -> Any:
        method = {
            "number": self.number, "integer": self.integer, "bool": self.boolean,
            "text": self.text, "choice": self.choice, "time": self.when, "zone": self.zone,
            "path": self.path, "paths": self.paths, "signals": self.signals,
        }[rule.kind]
        return method(rule, dotted, v)

    def unknown(self, dotted: str, key: str, known: tuple[str, ...], what: str,
                where: str = "") -> None:
        close = _close_matches(key, known, n=1)
        hint = f"did you mean '{close[0]}'? " if close else ""
        place = f" in {where}" if where else ""
        self.add(dotted, f"unknown {what} '{key}'{place}; {hint}known: {', '.join(known)}")


class _Bad:
    def __repr__(self) -> str:
        return "BAD"


_BAD: Any = _Bad()


def _build(d: Mapping[str, Any], *, base_dir: Any, path: Any, text: str | None) -> Scenario:
    file = str(path) if path is not None else None
    locator = _Locator(text)
    chk = _Checker(file, locator)
    if not isinstance(d, Mapping):
        raise ScenarioValidationError([ScenarioError(
            f"a scenario must be a table of sections, not {_type_name(d)}", file=file)], file=file)

    values: dict[str, dict[str, Any]] = {s: {} for s in ("", *SECTIONS)}
    tables: dict[str, Mapping[str, Any]] = {"": {k: v for k, v in d.items() if k not in SECTIONS}}

    for key, v in d.items():
        if key in SECTIONS:
            if not isinstance(v, Mapping):
                chk.add(key, f"{_show(v)} is {_type_name(v)}; [{key}] must be a table of keys")
                tables[key] = {}
            else:
                tables[key] = v
        elif key not in _SECTION_KEYS[""] and key not in DRIVE_SECTIONS:
            kind = "section" if isinstance(v, Mapping) else "key"
            chk.unknown(key, key, (*_SECTION_KEYS[""], *SECTIONS, *DRIVE_SECTIONS), kind)

    per_signal: list[tuple[str, SignalOverride]] = []
    for section in ("", *SECTIONS):
        table = tables.get(section, {})
        for rule in (r for r in KEY_RULES if r.section == section):
            if rule.key not in table:
                if rule.required:
                    example = {"time": "2027-05-18T04:00:00Z"}.get(rule.kind, "...")
                    chk.add(rule.dotted, f"is missing; this key is required in [{section}] "
                                         f"(e.g. {rule.key} = {example})")
                    values[section][rule.key] = _BAD
                else:
                    values[section][rule.key] = rule.default
                continue
            values[section][rule.key] = chk.check(rule, rule.dotted, table[rule.key])
        if section == "":
            continue
        for key, v in table.items():
            if key in _SECTION_KEYS[section]:
                continue
            if section == "search" and key == "per_signal":
                per_signal = _check_per_signal(chk, v)
                continue
            known = _SECTION_KEYS[section] + (("per_signal",) if section == "search" else ())
            chk.unknown(f"{section}.{key}", key, known, "key", f"[{section}]")

    # Cross-field checks (only when both values are good).
    t = values["time"]
    if t["start"] is not _BAD and t["end"] is not _BAD:
        span = t["end"].timestamp() - t["start"].timestamp()
        if span <= 0:
            chk.add("time.end", f"{iso_z(t['end'].timestamp())} is not after start "
                                f"{iso_z(t['start'].timestamp())}")
        elif span > MAX_WINDOW_S:
            chk.add("time.end", f"{iso_z(t['end'].timestamp())} is {span / 86400:.2f} days after start; "
                                "the window may be at most 7 days")
    s = values["signal"]
    if (s["cn0_zenith_dbhz"] is not _BAD and s["cn0_at_mask_dbhz"] is not _BAD
            and s["cn0_at_mask_dbhz"] > s["cn0_zenith_dbhz"]):
        chk.add("signal.cn0_at_mask_dbhz",
                f"{_show(tables['signal'].get('cn0_at_mask_dbhz', s['cn0_at_mask_dbhz']))} dB-Hz is above "
                f"cn0_zenith_dbhz = {s['cn0_zenith_dbhz']:g} dB-Hz; C/N0 at the mask may not exceed "
                "the zenith value")

    if d.get("route") is None and d.get("event") is None:
        drive_route, drive_events = None, ()        # a single site: core.plan.drive not needed
    else:
        from .drive import check_drive

        drive_route, drive_events = check_drive(chk, d.get("route"), d.get("event"))

    if chk.problems:
        raise ScenarioValidationError(chk.problems, file=file)

    values["search"]["per_signal"] = tuple(per_signal)
    specs = {sec: _SECTION_CLASSES[sec](**values[sec]) for sec in SECTIONS}
    if path is not None:
        path = Path(path)
    if base_dir is None:
        base_dir = path.resolve().parent if path is not None else Path.cwd()
    defaulted = tuple(sec for sec in DEFAULTABLE_SECTIONS if not tables.get(sec))
    return Scenario(name=values[""]["name"], path=path, base_dir=Path(base_dir),
                    defaults_used=defaulted, route=drive_route, events=drive_events,
                    locator=locator if text else None, **specs)


def salvage_scenario(d: Mapping[str, Any], problems: list[ScenarioError], *,
                     base_dir: Any = None, path: Any = None) -> Scenario:
    """The scenario of ``d`` with every good value kept and each bad one left out.

    For the window, which shows a file with bad values as a form: a bad optional value (or
    an unknown key, or a section that is not a table) falls back to its default; a bad
    required value gets a stand-in (latitude/longitude 0, a start two hours before a good
    end or an end two hours after a good start). ``problems`` are those of
    :class:`ScenarioValidationError`; the form marks them at their fields, so the
    stand-ins are never taken for the file's values. Raises the validation error again
    when the values cannot be salvaged.
    """
    work: dict[str, Any] = {k: dict(v) if isinstance(v, Mapping) else v for k, v in d.items()}
    pending = list(problems)
    for _ in range(8):
        for problem in pending:
            _leave_out(work, problem.field)
        try:
            sc = _build(work, base_dir=base_dir, path=path, text=None)
        except ScenarioValidationError as err:
            pending = err.problems
            continue
        defaulted = tuple(sec for sec in DEFAULTABLE_SECTIONS
                          if not (isinstance(d.get(sec), Mapping) and d.get(sec)))
        return replace(sc, defaults_used=defaulted)
    raise ScenarioValidationError(list(problems), file=None if path is None else str(path))


def _leave_out(work: dict[str, Any], field_name: str | None) -> None:
    if not field_name:
        return
    parts = field_name.split(".")
    rule = RULES_BY_DOTTED.get(field_name)
    if parts[0] in SECTIONS and not isinstance(work.get(parts[0]), dict):
        work.pop(parts[0], None)                  # a section that is not a table
    if rule is not None and rule.required:
        table = work.setdefault(rule.section, {})
        table[rule.key] = _stand_in(work, rule)
    elif len(parts) == 1:
        work.pop(parts[0], None)
    elif parts[:2] == ["search", "per_signal"]:
        work.get("search", {}).pop("per_signal", None)
    elif isinstance(work.get(parts[0]), dict):
        work[parts[0]].pop(parts[1], None)


def _stand_in(work: dict[str, Any], rule: KeyRule) -> Any:
    if rule.kind != "time":
        return 0.0                                   # latitude, longitude
    other = work.get("time", {}).get("end" if rule.key == "start" else "start")
    t = None
    if isinstance(other, str):
        try:
            other = parse_iso_utc(other)
        except InputError:
            other = None
    if isinstance(other, datetime):
        t = (other if other.tzinfo else other.replace(tzinfo=UTC)).timestamp()
    elif isinstance(other, int | float) and not isinstance(other, bool):
        t = float(other)
    if t is None:
        now = datetime.now(UTC).replace(minute=0, second=0, microsecond=0)
        t = now.timestamp() + (7200.0 if rule.key == "start" else 0.0)
    return datetime.fromtimestamp(t + (-7200.0 if rule.key == "start" else 7200.0), UTC)


def _check_per_signal(chk: _Checker, v: Any) -> list[tuple[str, SignalOverride]]:
    out: list[tuple[str, SignalOverride]] = []
    if not isinstance(v, Mapping):
        chk.add("search.per_signal", f"{_show(v)} is {_type_name(v)}; a table of signal tables is "
                                     "needed, e.g. [search.per_signal.BDS-B1I]")
        return out
    for sid_raw, sub in v.items():
        dotted = f"search.per_signal.{sid_raw}"
        sid = str(sid_raw).strip().upper()
        if sid not in SIGNALS:
            close = _close_matches(sid, list(SIGNALS), n=1)
            hint = f"; did you mean '{close[0]}'?" if close else ""
            chk.add(dotted, f"'{sid_raw}' is not a known signal{hint}; known: {', '.join(SIGNALS)}")
            continue
        if not isinstance(sub, Mapping):
            chk.add(dotted, f"{_show(sub)} is {_type_name(sub)}; a table with "
                            f"{' and/or '.join(PER_SIGNAL_KEYS)} is needed")
            continue
        got: dict[str, Any] = {}
        ok = True
        for key, val in sub.items():
            if key not in PER_SIGNAL_KEYS:
                chk.unknown(f"{dotted}.{key}", key, PER_SIGNAL_KEYS, "key", f"[{dotted}]")
                ok = False
                continue
            conv = chk.check(_PER_SIGNAL_RULES[key], f"{dotted}.{key}", val)
            if conv is _BAD:
                ok = False
            got[key] = conv
        if any(sid == have for have, _ in out):
            chk.add(dotted, f"'{sid_raw}' is given twice (signal IDs ignore case)")
            continue
        if ok:
            out.append((sid, SignalOverride(**got)))
    return sorted(out, key=lambda item: item[0])


__all__ = [
    "DEFAULTABLE_SECTIONS", "FORMAT_VERSION", "KEY_RULES", "KeyRule", "MAX_WINDOW_S", "MaskSpec", "OrbitSpec",
    "PER_SIGNAL_KEYS", "PRIORITIES", "REQUIRED", "ReceiverSpec", "Scenario",
    "ScenarioValidationError", "SearchSpec", "salvage_scenario", "SignalOverride", "SignalSpec", "SiteSpec",
    "TimeSpec",
]

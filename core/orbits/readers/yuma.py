"""YUMA almanac reader, plus the almanac helpers the SEM reader shares.

A YUMA file is a series of records, each a header line
``******** Week N almanac for PRN-XX ********`` followed by ``Label: value`` lines
(ID, Health, Eccentricity, Time of Applicability(s), Orbital Inclination(rad),
Rate of Right Ascen(r/s), SQRT(A) (m 1/2), Right Ascen at Week(rad), Argument of
Perigee(rad), Mean Anom(rad), Af0(s), Af1(s/s), week). Angles are radians and the
inclination is the FULL inclination (not an offset) [pub: domain-notes section 2].

Tolerated: any run of spaces ('Week  377'), trailing spaces, CRLF, 'E-02' / 'E-002' / 'D'
exponents, QZSS PRNs 193-202 (-> J01-J10). Labels are matched by their leading words,
case-insensitively; an unknown label is ignored with one warning. A record's ``week``
line must agree with its header's week (an error naming the record otherwise). Each
record is checked against the physical ranges of its system
(:mod:`core.orbits.plausibility`). Week numbers are 10-bit: they are placed in a 1024-week era by :func:`core.timeutil.resolve_week`
using the reference time (the planned start), never the computer clock.
"""

from __future__ import annotations

import math
import re
from collections import Counter
from dataclasses import dataclass, field
from datetime import datetime
from numbers import Real

import numpy as np

from ...ground.arrays import median_value
from ...ground.constants import SECONDS_PER_WEEK, WEEKS_PER_ROLLOVER
from ...ground.errors import InputError, OrbitFormatError
from ...ground.timeutil import gps_week_tow_to_unix_s, iso_z, resolve_week, to_unix_s
from ..orbit_set import AlmanacRecord, OrbitEntry, OrbitFileInfo, OrbitSet, SatelliteInfo
from ..plausibility import RecordScreen
from .identity import almanac_identity, unique_ids

# ---------------------------------------------------------------- shared helpers

_NUMBER = re.compile(r"^[+-]?(?:\d{1,30}(?:\.\d{0,30})?|\.\d{1,30})(?:[EeDd][+-]?\d{1,4})?$")
_INTEGER = re.compile(r"^[+-]?\d{1,9}$")
# Largest week any file can hold: the widest GPS week field has 13 bits (0..8191, the year
# 2137) [mem: IS-GPS-200 30.3.3.1.1, CNAV week number]. 10-bit weeks are 0..1023; a larger
# value is taken as a full week.
_WEEK_MAX = 8191
_HEALTH_MAX = 255


def parse_float(text: str, source: str, line: int, field: str) -> float:
    """A finite decimal number ('0.41E-002', '-1.5D+00'); otherwise OrbitFormatError."""
    s = text.strip()
    if not _NUMBER.match(s):
        raise OrbitFormatError(f"'{text.strip()[:40]}' is not a number", file=source, line=line,
                               field=field)
    value = float(s.replace("D", "E").replace("d", "e"))
    if not math.isfinite(value):
        raise OrbitFormatError(f"'{s}' is out of range", file=source, line=line, field=field)
    return value


def parse_int(text: str, source: str, line: int, field: str) -> int:
    """A whole number ('063', '862', also '862.0'); otherwise OrbitFormatError."""
    s = text.strip()
    if _INTEGER.match(s):
        return int(s)
    value = parse_float(s, source, line, field)
    if value != int(value) or abs(value) > 1e9:
        raise OrbitFormatError(f"'{s}' is not a whole number", file=source, line=line,
                               field=field)
    return int(value)


def reference_to_unix_s(reference_time: datetime | float | None) -> float | None:
    """The reference (planned start) as UTC POSIX seconds; datetimes must carry a zone."""
    if reference_time is None:
        return None
    if isinstance(reference_time, datetime):
        return to_unix_s(reference_time)
    if isinstance(reference_time, bool) or not isinstance(reference_time, Real):
        raise InputError(f"reference time {reference_time!r} is neither a timezone-aware "
                         "datetime nor UTC POSIX seconds", field="reference_time")
    value = float(reference_time)
    if not math.isfinite(value):
        raise InputError(f"reference time {reference_time!r} is not finite", field="reference_time")
    return value


@dataclass
class RawAlmanac:
    """One almanac record as read, before identity and week resolution (SEM units converted)."""

    prn: int
    line: int                    # line of the record's first line
    health: int
    week_raw: int
    toa_s: float
    eccentricity: float
    inclination_rad: float
    omega_dot_rad_s: float
    sqrt_a_m05: float
    omega0_rad: float
    arg_perigee_rad: float
    mean_anomaly_rad: float
    af0_s: float
    af1_s_s: float
    # line of each value in the file, by element name (for messages); empty = record line
    field_lines: dict[str, int] = field(default_factory=dict)

    def plausibility_values(self) -> dict[str, float]:
        """The record's elements under the quantity names of core.orbits.plausibility."""
        return {"sqrt_a_m05": self.sqrt_a_m05, "eccentricity": self.eccentricity,
                "inclination_rad": self.inclination_rad, "node_rate_rad_s": self.omega_dot_rad_s,
                "angle_rad:right ascension at week": self.omega0_rad,
                "angle_rad:argument of perigee": self.arg_perigee_rad,
                "angle_rad:mean anomaly": self.mean_anomaly_rad,
                "clock_bias_s": self.af0_s, "clock_drift_s_s": self.af1_s_s}


def _check_raw(r: RawAlmanac, source: str) -> None:
    def bad(msg: str, field: str) -> OrbitFormatError:
        return OrbitFormatError(f"record for PRN-{r.prn:02d}: {msg}", file=source,
                                line=r.field_lines.get(field, r.line), field=field)

    if not 0 <= r.week_raw <= _WEEK_MAX:
        raise bad(f"week {r.week_raw} is outside 0..{_WEEK_MAX}, the range of any GPS week "
                  "field", "week")
    if not 0.0 <= r.toa_s < SECONDS_PER_WEEK:
        raise bad(f"time of applicability {r.toa_s} s is outside one week", "toa")
    if not 0 <= r.health <= _HEALTH_MAX:
        raise bad(f"health {r.health} is outside 0..{_HEALTH_MAX}", "health")


def _era_note(week_raw: int, toa_s: float) -> str:
    alts = []
    for era in (1, 2):
        w = week_raw + era * WEEKS_PER_ROLLOVER
        alts.append(f"{w} = {iso_z(gps_week_tow_to_unix_s(w, toa_s))[:10]}")
    return ", ".join(alts)


def finish_almanac_set(raws: list[RawAlmanac], fmt: str, source: str,
                       reference_unix_s: float | None, warnings: list[str],
                       field_names: dict[str, str] | None = None, *,
                       strict: bool = True) -> OrbitSet:
    """Build the OrbitSet of an almanac file: IDs, full weeks, epochs, health warnings.

    Each record is checked against the physical ranges of its system
    (:mod:`core.orbits.plausibility`, ``field_names`` maps its quantity names to the
    file's labels): ``strict`` stops at the first implausible record, otherwise it is
    dropped with a warning."""
    if not raws:
        raise OrbitFormatError(f"no almanac records found in this {fmt} file", file=source)
    items: list[tuple[OrbitEntry, int]] = []
    unhealthy: list[str] = []
    screen = RecordScreen(source, strict)
    names = field_names or {}
    kept: list[RawAlmanac] = []
    for r in raws:
        _check_raw(r, source)
        ident = almanac_identity(r.prn)
        if ident is None:
            raise OrbitFormatError(f"PRN {r.prn} is neither GPS (1-63) nor QZSS (193-202)",
                                   file=source, line=r.line, field="ID")
        if not screen.keep(ident.system, r.plausibility_values(), names,
                           record=f"record for PRN-{r.prn:02d}", line=r.line,
                           lines=r.field_lines, kind="almanac"):
            continue
        kept.append(r)
        if reference_unix_s is None:
            week_full = r.week_raw
        else:
            week_full = resolve_week(r.week_raw, r.toa_s, reference_unix_s)
        epoch = gps_week_tow_to_unix_s(week_full, r.toa_s)
        info = SatelliteInfo(sat_id=ident.sat_id, system=ident.system, name=f"PRN-{r.prn:02d}",
                             source_kind="almanac", source_file=source, epoch_unix_s=epoch,
                             healthy=r.health == 0, health_code=r.health, prn=ident.prn)
        alm = AlmanacRecord(week_raw=r.week_raw, week_full=week_full, toa_s=r.toa_s,
                            eccentricity=r.eccentricity, inclination_rad=r.inclination_rad,
                            omega_dot_rad_s=r.omega_dot_rad_s, sqrt_a_m05=r.sqrt_a_m05,
                            omega0_rad=r.omega0_rad, arg_perigee_rad=r.arg_perigee_rad,
                            mean_anomaly_rad=r.mean_anomaly_rad, af0_s=r.af0_s,
                            af1_s_s=r.af1_s_s)
        if r.health != 0:
            unhealthy.append(f"{ident.sat_id} (health {r.health:03d})")
        items.append((OrbitEntry(info=info, almanac=alm), r.line))
    if not items:
        raise OrbitFormatError(f"no usable almanac records ({len(raws)} implausible record(s) "
                               "dropped)", file=source)
    raws = kept
    entries, dup_warnings = unique_ids(items, source)
    warnings = list(warnings) + screen.warnings + dup_warnings
    if unhealthy:
        warnings.append(f"{source}: {len(unhealthy)} satellite(s) flagged unhealthy, kept and "
                        f"marked healthy=False: {', '.join(unhealthy)}")
    week_raw = Counter(r.week_raw for r in raws).most_common(1)[0][0]
    first = next(r for r in raws if r.week_raw == week_raw)
    if reference_unix_s is None:
        week_full = week_raw
        if week_raw < WEEKS_PER_ROLLOVER:
            warnings.append(
                f"{source}: no reference time given, so the 10-bit week {week_raw} is taken "
                f"as written (full week {week_raw}, "
                f"{iso_z(gps_week_tow_to_unix_s(week_raw, first.toa_s))[:10]}); it may "
                f"equally be {_era_note(week_raw, first.toa_s)}. Give the planned start "
                "time as the reference to place it in the right era.")
    else:
        week_full = resolve_week(week_raw, first.toa_s, reference_unix_s)
    epochs = np.array([e.info.epoch_unix_s for e in entries])
    epoch = median_value(epochs)
    info = OrbitFileInfo(path=source, format=fmt, n_satellites=len(entries), epoch_unix_s=epoch,
                         week_raw=week_raw, week_full=week_full,
                         reference_unix_s=reference_unix_s,
                         age_s=None if reference_unix_s is None else reference_unix_s - epoch)
    return OrbitSet(entries=entries, files=[info], warnings=warnings)


# ---------------------------------------------------------------- YUMA

_HEADER = re.compile(r"^\s*\*+\s*week\s+(\d{1,5})\s+almanac\s+for\s+prn[-\s]*(\d{1,3})\b.*$",
                     re.IGNORECASE)

# (label prefix, field key); longer prefixes first where they share words.
_LABELS: tuple[tuple[str, str], ...] = (
    ("id", "id"),
    ("health", "health"),
    ("eccentricity", "e"),
    ("time of applicability", "toa"),
    ("orbital inclination", "i"),
    ("rate of right ascen", "omega_dot"),
    ("sqrt(a)", "sqrt_a"),
    ("sqrt a", "sqrt_a"),
    ("right ascen at week", "omega0"),
    ("argument of perigee", "argp"),
    ("mean anom", "m0"),
    ("af0", "af0"),
    ("af1", "af1"),
    ("week", "week"),
)
_FIELD_NAMES = {
    "id": "ID", "health": "Health", "e": "Eccentricity", "toa": "Time of Applicability",
    "i": "Orbital Inclination", "omega_dot": "Rate of Right Ascen", "sqrt_a": "SQRT(A)",
    "omega0": "Right Ascen at Week", "argp": "Argument of Perigee", "m0": "Mean Anom",
    "af0": "Af0", "af1": "Af1", "week": "week",
}
_REQUIRED = ("health", "e", "toa", "i", "omega_dot", "sqrt_a", "omega0", "argp", "m0", "af0",
             "af1")
# plausibility quantity -> YUMA field key
_QUANTITY_KEYS = {
    "sqrt_a_m05": "sqrt_a", "eccentricity": "e", "inclination_rad": "i",
    "node_rate_rad_s": "omega_dot", "angle_rad:right ascension at week": "omega0",
    "angle_rad:argument of perigee": "argp", "angle_rad:mean anomaly": "m0",
    "clock_bias_s": "af0", "clock_drift_s_s": "af1",
}
_QUANTITY_NAMES = {q: _FIELD_NAMES[k] for q, k in _QUANTITY_KEYS.items()}


def _label_key(label: str) -> str | None:
    norm = " ".join(label.lower().split())
    for prefix, key in _LABELS:
        if norm == prefix or norm.startswith(prefix + " ") or norm.startswith(prefix + "("):
            return key
        if prefix.endswith(")") and norm.startswith(prefix):
            return key
    return None


def is_yuma(text: str) -> bool:
    """True if the text holds at least one YUMA record header."""
    return any(_HEADER.match(line) for line in text.split("\n"))


def _record(header_line: int, header_week: int, header_prn: int, fields: dict[str, tuple[str, int]],
            source: str) -> RawAlmanac:
    for key in _REQUIRED:
        if key not in fields:
            raise OrbitFormatError(
                f"record for PRN-{header_prn:02d} has no '{_FIELD_NAMES[key]}' line",
                file=source, line=header_line, field=_FIELD_NAMES[key])

    def num(key: str) -> float:
        text, line = fields[key]
        return parse_float(text, source, line, _FIELD_NAMES[key])

    def whole(key: str) -> int:
        text, line = fields[key]
        return parse_int(text, source, line, _FIELD_NAMES[key])

    prn = whole("id") if "id" in fields else header_prn
    if prn != header_prn:
        raise OrbitFormatError(f"ID {prn} differs from the header's PRN-{header_prn:02d}",
                               file=source, line=fields["id"][1], field="ID")
    week = whole("week") if "week" in fields else header_week
    if "week" in fields and not _same_week(week, header_week):
        # A record cut short or pasted from another file: its week would move the satellite
        # by years (seen: 'week: 8' under 'Week 862' put one satellite 102 deg off).
        raise OrbitFormatError(
            f"record for PRN-{header_prn:02d}: week {week} differs from week {header_week} in "
            f"its header (line {header_line})", file=source, line=fields["week"][1],
            field="week")
    return RawAlmanac(prn=prn, line=header_line, health=whole("health"), week_raw=week,
                      toa_s=num("toa"), eccentricity=num("e"), inclination_rad=num("i"),
                      omega_dot_rad_s=num("omega_dot"), sqrt_a_m05=num("sqrt_a"),
                      omega0_rad=num("omega0"), arg_perigee_rad=num("argp"),
                      mean_anomaly_rad=num("m0"), af0_s=num("af0"), af1_s_s=num("af1"),
                      field_lines={**{q: fields[k][1] for q, k in _QUANTITY_KEYS.items()},
                                   **({"week": fields["week"][1]} if "week" in fields else {})})


def _same_week(a: int, b: int) -> bool:
    """Equal weeks, or the same week once as a full and once as a 10-bit number."""
    return a == b or (min(a, b) < WEEKS_PER_ROLLOVER and a % WEEKS_PER_ROLLOVER == b % WEEKS_PER_ROLLOVER)


def parse_yuma(text: str, source: str = "<yuma>",
               reference_time: datetime | float | None = None, *,
               strict: bool = True) -> OrbitSet:
    """Parse YUMA almanac text into an OrbitSet (see the module docstring).

    ``strict``: a physically implausible record stops reading (True) or is dropped with a
    warning (False); see :mod:`core.orbits.plausibility`."""
    reference_unix_s = reference_to_unix_s(reference_time)
    raws: list[RawAlmanac] = []
    unknown: dict[str, int] = {}
    current: tuple[int, int, int] | None = None     # (header line, week, prn)
    fields: dict[str, tuple[str, int]] = {}
    for line_no, raw in enumerate(text.split("\n"), start=1):
        line = raw.strip().lstrip("\ufeff")
        if not line:
            continue
        m = _HEADER.match(line)
        if m:
            if current is not None:
                raws.append(_record(*current, fields, source))
            current = (line_no, int(m.group(1)), int(m.group(2)))
            fields = {}
            continue
        if current is None:
            raise OrbitFormatError("text before the first '**** Week N almanac for PRN-XX' "
                                   "header", file=source, line=line_no, field="header")
        if ":" not in line:
            raise OrbitFormatError(f"'{line[:40]}' is not a 'Label: value' line", file=source,
                                   line=line_no, field="line")
        label, value = line.split(":", 1)
        key = _label_key(label)
        if key is None:
            unknown.setdefault(label.strip()[:40], line_no)
            continue
        if key in fields:
            raise OrbitFormatError(f"'{_FIELD_NAMES[key]}' appears twice in the record that "
                                   f"starts at line {current[0]}", file=source, line=line_no,
                                   field=_FIELD_NAMES[key])
        fields[key] = (value, line_no)
    if current is not None:
        raws.append(_record(*current, fields, source))
    warnings: list[str] = []
    if unknown:
        listed = ", ".join(f"'{k}' (line {v})" for k, v in unknown.items())
        warnings.append(f"{source}: unknown YUMA labels ignored: {listed}")
    return finish_almanac_set(raws, "YUMA", source, reference_unix_s, warnings,
                              _QUANTITY_NAMES, strict=strict)

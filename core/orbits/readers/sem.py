"""SEM almanac reader [pub: ICD-GPS-240 Table 30-III; layout as in domain-notes section 2].

Layout: line 1 ``<number of records> <title>``; line 2 ``<week> <toa>`` (10-bit week,
seconds); then for each satellite, usually after a blank line: PRN, SVN, average URA
index, three lines of three numbers (e, delta-i, Omegadot / sqrtA, Omega0, omega /
M0, af0, af1), health, satellite configuration.

The record body is read as a stream of 14 numbers, so the exact line breaks do not
matter; error messages still name the line of the offending number. Angles and rates
are in semicircles and are multiplied by the ICD's pi (core.constants.GPS_PI); the
inclination is (0.30 + delta-i) semicircles for GPS, (0.25 + delta-i) for QZSS PRNs
>= 193. A record count that disagrees with the records found gives a warning.
"""

from __future__ import annotations

import re
from datetime import datetime

from ...ground.constants import GPS_PI, GPS_REFERENCE_INCLINATION_SC, QZSS_REFERENCE_INCLINATION_SC
from ...ground.errors import OrbitFormatError
from ..orbit_set import OrbitSet
from .yuma import RawAlmanac, finish_almanac_set, parse_float, parse_int, reference_to_unix_s

# QZSS almanacs use a 0.25-semicircle inclination reference from PRN 193 on
# [pub: IS-QZSS-PNT, via domain-notes section 2].
_QZSS_FIRST_PRN = 193

_FIELDS = ("PRN", "SVN", "URA", "eccentricity", "delta_i", "omega_dot", "sqrt_a", "omega0",
           "arg_perigee", "mean_anomaly", "af0", "af1", "health", "configuration")
_INT_FIELDS = {"PRN", "SVN", "URA", "health", "configuration"}
# plausibility quantity -> SEM field (named in messages as the reader names the column)
_QUANTITY_FIELDS = {
    "sqrt_a_m05": "sqrt_a", "eccentricity": "eccentricity", "inclination_rad": "delta_i",
    "node_rate_rad_s": "omega_dot", "angle_rad:right ascension at week": "omega0",
    "angle_rad:argument of perigee": "arg_perigee", "angle_rad:mean anomaly": "mean_anomaly",
    "clock_bias_s": "af0", "clock_drift_s_s": "af1",
}

_COUNT_LINE = re.compile(r"^\s*(\d{1,4})(?:\s+(.*))?$")
_WEEK_LINE = re.compile(r"^\s*(\d{1,5})\s+(\d{1,7}(?:\.\d*)?)\s*$")


def _content_lines(text: str) -> list[tuple[int, str]]:
    out = []
    for line_no, raw in enumerate(text.split("\n"), start=1):
        s = raw.strip().lstrip("\ufeff")
        if s:
            out.append((line_no, s))
    return out


def is_sem(text: str) -> bool:
    """True if the first two non-blank lines look like a SEM header and a PRN follows."""
    lines = _content_lines(text)
    if len(lines) < 2:
        return False
    return bool(_COUNT_LINE.match(lines[0][1]) and _WEEK_LINE.match(lines[1][1])
                and (len(lines) == 2 or re.match(r"^\d{1,3}$", lines[2][1])))


def parse_sem(text: str, source: str = "<sem>",
              reference_time: datetime | float | None = None, *,
              strict: bool = True) -> OrbitSet:
    """Parse SEM almanac text into an OrbitSet (same result as YUMA for the same almanac).

    ``strict``: as for :func:`core.orbits.readers.yuma.parse_yuma`."""
    reference_unix_s = reference_to_unix_s(reference_time)
    lines = _content_lines(text)
    if not lines:
        raise OrbitFormatError("the file is empty", file=source)
    line1_no, line1 = lines[0]
    m = _COUNT_LINE.match(line1)
    if not m:
        raise OrbitFormatError(f"first line '{line1[:40]}' should be '<record count> <title>'",
                               file=source, line=line1_no, field="record count")
    count = int(m.group(1))
    if len(lines) < 2:
        raise OrbitFormatError("the week / time-of-applicability line is missing",
                               file=source, line=line1_no + 1, field="week")
    line2_no, line2 = lines[1]
    m2 = _WEEK_LINE.match(line2)
    if not m2:
        raise OrbitFormatError(f"second line '{line2[:40]}' should be '<week> <toa>'",
                               file=source, line=line2_no, field="week")
    week = parse_int(m2.group(1), source, line2_no, "week")
    toa_s = parse_float(m2.group(2), source, line2_no, "toa")

    tokens: list[tuple[str, int]] = [(tok, n) for n, s in lines[2:] for tok in s.split()]
    raws: list[RawAlmanac] = []
    n_fields = len(_FIELDS)
    for start in range(0, len(tokens), n_fields):
        chunk = tokens[start:start + n_fields]
        if len(chunk) < n_fields:
            missing = _FIELDS[len(chunk)]
            last_line = chunk[-1][1]
            raise OrbitFormatError(
                f"the record that starts at line {chunk[0][1]} ends early: "
                f"'{missing}' and later values are missing",
                file=source, line=last_line, field=missing)
        values: dict[str, float] = {}
        for name, (tok, line_no) in zip(_FIELDS, chunk):
            if name in _INT_FIELDS:
                values[name] = parse_int(tok, source, line_no, name)
            else:
                values[name] = parse_float(tok, source, line_no, name)
        prn = int(values["PRN"])
        ref_sc = QZSS_REFERENCE_INCLINATION_SC if prn >= _QZSS_FIRST_PRN \
            else GPS_REFERENCE_INCLINATION_SC
        lines = {name: line_no for name, (_, line_no) in zip(_FIELDS, chunk)}
        raws.append(RawAlmanac(
            field_lines={q: lines[name] for q, name in _QUANTITY_FIELDS.items()},
            prn=prn, line=chunk[0][1], health=int(values["health"]), week_raw=week, toa_s=toa_s,
            eccentricity=values["eccentricity"],
            inclination_rad=(ref_sc + values["delta_i"]) * GPS_PI,
            omega_dot_rad_s=values["omega_dot"] * GPS_PI,
            sqrt_a_m05=values["sqrt_a"],
            omega0_rad=values["omega0"] * GPS_PI,
            arg_perigee_rad=values["arg_perigee"] * GPS_PI,
            mean_anomaly_rad=values["mean_anomaly"] * GPS_PI,
            af0_s=values["af0"], af1_s_s=values["af1"]))
    warnings: list[str] = []
    if raws and count != len(raws):
        warnings.append(f"{source}: the header announces {count} records but the file holds "
                        f"{len(raws)}")
    return finish_almanac_set(raws, "SEM", source, reference_unix_s, warnings,
                              dict(_QUANTITY_FIELDS), strict=strict)

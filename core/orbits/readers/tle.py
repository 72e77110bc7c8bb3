"""TLE reader: two-line and three-line (name line) element sets, mixed in one file.

Format [pub: CelesTrak "NORAD two-line element set format"; AIAA 2006-6753 appendix]:
line 1 and line 2 of 69 columns, column 69 a modulo-10 checksum of columns 1-68
(digits count their value, '-' counts 1, everything else 0).

Policy:
* Tolerated always: CRLF, trailing spaces, blank lines, ``#`` comment lines (RTKLIB,
  the SGP4 verification file), a ``0 `` prefix on name lines (Space-Track 3LE), and
  anything after column 69 (the SGP4 verification file writes start/stop/step there):
  only columns 1-69 are read.
* ``strict=True`` (default): a bad record (checksum, malformed field, line 1 without
  line 2, a name line without element lines, elements SGP4 refuses) raises
  :class:`OrbitFormatError` naming the line and the field (``checksum`` for checksums).
* ``strict=False``: such a record is skipped with one warning naming its line; the
  rest of the file is read. A file with no usable record is an error either way.
* Plausibility: mean motion, eccentricity, inclination and B* are checked against the
  orbit shell of the satellite's system (:mod:`core.orbits.plausibility`); an implausible
  record follows the same ``strict`` policy.
* Satrec: ``sgp4.api.Satrec.twoline2rv(line1[:69], line2[:69])`` with its default
  gravity model WGS-72, the one the element sets are fitted with [pub: AIAA 2006-6753].
  The epoch (UTC) is ``jdsatepoch + jdsatepochF``.
* Identity: :func:`core.readers.identity.identify_tle` from the name line, then the
  mapping (catalogue number -> ID, GLONASS k) overrides. GLONASS satellites without k
  get k=None and one warning listing them.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping
from dataclasses import replace
from pathlib import Path

import numpy as np
from sgp4.api import Satrec

from ...ground.arrays import median_value
from ...ground.constants import SECONDS_PER_DAY, UNIX_JD
from ...ground.errors import OrbitFormatError
from ..orbit_set import OrbitEntry, OrbitFileInfo, OrbitSet, SatelliteInfo
from ..plausibility import RecordScreen
from .identity import glonass_k_warning, identify_tle, parse_sat_id, unique_ids
from .mapping import as_mapping

TLE_LINE_LENGTH = 69

# Column fields (0-based slices) [pub: CelesTrak TLE format description].
_SATNUM = re.compile(r"^(?: {0,4}\d{1,5}|[A-HJ-NP-Z]\d{4})$")
_EPOCH = re.compile(r"^(\d\d)([ \d]{2}\d\.\d{1,8}) *$")
_DECIMAL = re.compile(r"^ *[+-]?(?:\d*\.\d+|\d+\.?\d*) *$")
_IMPLIED = re.compile(r"^ *[+-]?[ \d]{0,5}\d[+-]\d *$|^ *[+-]?0* *$")
_DIGITS = re.compile(r"^ *\d+ *$|^ *$")
_ECC = re.compile(r"^[ \d]{6}\d$")

_SGP4_ERRORS = {
    1: "mean elements out of range (eccentricity >= 1 or < -0.001, or a < 0.95 Earth radii)",
    2: "mean motion is negative",
    3: "perturbed eccentricity is out of range",
    4: "semi-latus rectum is negative",
    5: "the epoch elements are sub-orbital",
    6: "the satellite has decayed",
}


def checksum(line: str) -> int:
    """Modulo-10 checksum of columns 1-68: digits count their value, '-' counts 1."""
    total = 0
    for c in line[:68]:
        if c.isdigit() and c.isascii():
            total += int(c)
        elif c == "-":
            total += 1
    return total % 10


def decode_catalogue(text: str) -> int:
    """Catalogue number from the 5-column field, Alpha-5 included ('A0001' -> 100001)."""
    s = text.strip()
    if s and s[0].isalpha():
        letters = "ABCDEFGHJKLMNPQRSTUVWXYZ"      # A=10 ... Z=33, I and O skipped
        return (10 + letters.index(s[0])) * 10_000 + int(s[1:])
    return int(s)


def is_tle(text: str) -> bool:
    """True if some line starting '1 ' of 69+ columns is followed by a line starting '2 '."""
    lines = [ln.rstrip("\r") for ln in text.split("\n")]
    for a, b in zip(lines, lines[1:]):
        if a.startswith("1 ") and len(a.rstrip()) >= TLE_LINE_LENGTH and b.startswith("2 "):
            return True
    return False


class _Problem(Exception):
    def __init__(self, message: str, line: int, field: str):
        super().__init__(message)
        self.message, self.line, self.field = message, line, field


def _check_line(line: str, number: str, line_no: int) -> None:
    if len(line) < TLE_LINE_LENGTH:
        raise _Problem(f"TLE line {number} has {len(line)} columns, {TLE_LINE_LENGTH} needed",
                       line_no, "length")
    if not line[68].isdigit() or not line[68].isascii():
        raise _Problem(f"column 69 '{line[68]}' should be the checksum digit", line_no,
                       "checksum")
    want = checksum(line)
    if int(line[68]) != want:
        raise _Problem(f"checksum is {line[68]} but the line's digits give {want}", line_no,
                       "checksum")


def _field(line: str, a: int, b: int, pattern: re.Pattern[str], name: str, line_no: int) -> str:
    text = line[a:b]
    if not pattern.match(text):
        raise _Problem(f"columns {a + 1}-{b} '{text}' are not a valid {name}", line_no, name)
    return text


def _angle(line: str, a: int, b: int, name: str, line_no: int, top: float) -> float:
    value = float(_field(line, a, b, _DECIMAL, name, line_no))
    if not 0.0 <= value <= top:
        raise _Problem(f"{name} {value} is outside 0..{top:g}", line_no, name)
    return value


def _parse_pair(l1: str, l2: str, n1: int, n2: int) -> tuple[int, float, float]:
    """Validate the two lines; return (catalogue number, inclination deg, mean motion rev/day)."""
    _check_line(l1, "1", n1)
    _check_line(l2, "2", n2)
    cat1 = _field(l1, 2, 7, _SATNUM, "catalogue number", n1)
    cat2 = _field(l2, 2, 7, _SATNUM, "catalogue number", n2)
    if decode_catalogue(cat1) != decode_catalogue(cat2):
        raise _Problem(f"line 2 is for catalogue number {cat2.strip()}, line 1 for "
                       f"{cat1.strip()}", n2, "catalogue number")
    epoch = _field(l1, 18, 32, _EPOCH, "epoch", n1)
    day = float(epoch[2:])
    if not 1.0 <= day < 367.0:
        raise _Problem(f"epoch day of year {day} is outside 1..366", n1, "epoch")
    _field(l1, 33, 43, _DECIMAL, "first derivative of mean motion", n1)
    _field(l1, 44, 52, _IMPLIED, "second derivative of mean motion", n1)
    _field(l1, 53, 61, _IMPLIED, "bstar", n1)
    _field(l1, 64, 68, _DIGITS, "element set number", n1)
    inc = _angle(l2, 8, 16, "inclination", n2, 180.0)
    _angle(l2, 17, 25, "right ascension", n2, 360.0)
    _field(l2, 26, 33, _ECC, "eccentricity", n2)
    _angle(l2, 34, 42, "argument of perigee", n2, 360.0)
    _angle(l2, 43, 51, "mean anomaly", n2, 360.0)
    n = float(_field(l2, 52, 63, _DECIMAL, "mean motion", n2))
    if not n > 0.0:
        raise _Problem(f"mean motion {n} rev/day must be positive", n2, "mean motion")
    _field(l2, 63, 68, _DIGITS, "revolution number", n2)
    return decode_catalogue(cat1), inc, n


def _satrec(l1: str, l2: str, n1: int) -> Satrec:
    try:
        sat = Satrec.twoline2rv(l1, l2)
    except Exception as exc:  # third-party parser boundary: report, do not crash
        raise _Problem(f"SGP4 cannot read this element set ({exc})", n1, "elements") from None
    if sat.error:
        why = _SGP4_ERRORS.get(int(sat.error), f"error code {sat.error}")
        raise _Problem(f"SGP4 refuses these elements: {why}", n1, "elements")
    if not (math.isfinite(sat.jdsatepoch) and math.isfinite(sat.jdsatepochF)):
        raise _Problem("SGP4 gives no valid epoch", n1, "epoch")
    return sat


# plausibility quantity -> the field as the user finds it in the record
_QUANTITY_NAMES = {"mean_motion_rev_day": "line 2 mean motion",
                   "eccentricity": "line 2 eccentricity",
                   "inclination_rad": "line 2 inclination",
                   "bstar_per_earth_radius": "line 1 B*"}


def _plausibility_values(sat: Satrec) -> dict[str, float]:
    return {"mean_motion_rev_day": sat.no_kozai * 1440.0 / (2.0 * math.pi),
            "eccentricity": sat.ecco, "inclination_rad": sat.inclo,
            "bstar_per_earth_radius": sat.bstar}


def parse_tle(text: str, source: str = "<tle>",
              mapping: str | Path | Mapping[int, tuple[str, int | None]] | None = None, *,
              strict: bool = True, k_warning: bool = True) -> OrbitSet:
    """Parse TLE text (two- or three-line records, mixed) into an OrbitSet.

    ``mapping``: catalogue number -> (sat_id, glonass_k), a dict or a mapping-file path.
    ``strict``: see the module docstring. ``k_warning=False`` leaves out the GLONASS-k
    warning (``load_orbit_files`` issues one for all files together).
    """
    table = as_mapping(mapping) or {}
    lines = [ln.rstrip("\r").rstrip() for ln in text.split("\n")]
    items: list[tuple[OrbitEntry, int]] = []
    warnings: list[str] = []
    skipped = 0
    screen = RecordScreen(source, strict)

    def problem(p: _Problem) -> None:
        nonlocal skipped
        if strict:
            raise OrbitFormatError(p.message, file=source, line=p.line, field=p.field)
        skipped += 1
        warnings.append(f"{source}: line {p.line}, field '{p.field}': {p.message}; "
                        "record skipped")

    name: str | None = None
    name_line = 0
    i = 0
    while i < len(lines):
        line = lines[i].lstrip("\ufeff") if i == 0 else lines[i]
        line_no = i + 1
        i += 1
        if not line.strip() or line.lstrip().startswith("#"):
            continue
        if line.startswith("2 "):
            problem(_Problem("TLE line 2 without a line 1 before it", line_no, "line 1"))
            name = None
            continue
        if not line.startswith("1 "):
            if name is not None:
                problem(_Problem(f"name line '{name[:30]}' is not followed by TLE lines",
                                 name_line, "line 1"))
            name = line.strip()
            if name.startswith("0 "):
                name = name[2:].strip()
            name_line = line_no
            continue
        rec_line = name_line if name is not None else line_no
        this_name, name = name, None
        if i >= len(lines) or not lines[i].startswith("2 "):
            problem(_Problem("TLE line 1 is not followed by line 2", line_no, "line 2"))
            continue
        l1, l2 = line[:TLE_LINE_LENGTH], lines[i][:TLE_LINE_LENGTH]
        n2 = i + 1
        i += 1
        try:
            cat, inc_deg, n_rev_day = _parse_pair(l1, l2, line_no, n2)
            sat = _satrec(l1, l2, line_no)
        except _Problem as p:
            problem(p)
            continue
        ident = identify_tle(this_name, cat, mean_motion_rev_day=n_rev_day,
                             inclination_deg=inc_deg)
        sat_id, system, prn, k = ident.sat_id, ident.system, ident.prn, None
        if cat in table:
            mapped_id, k = table[cat]
            mapped = parse_sat_id(mapped_id)
            if mapped is not None:
                sat_id, system, prn = mapped.sat_id, mapped.system, mapped.prn
        label = this_name if this_name else f"NORAD {cat:05d}"
        if not screen.keep(system, _plausibility_values(sat), _QUANTITY_NAMES,
                           record=f"TLE record for {label} ({sat_id})", line=n2,
                           lines={"bstar_per_earth_radius": line_no}, kind="tle"):
            continue
        epoch = (sat.jdsatepoch - UNIX_JD) * SECONDS_PER_DAY + sat.jdsatepochF * SECONDS_PER_DAY
        info = SatelliteInfo(sat_id=sat_id, system=system,
                             name=this_name if this_name else f"NORAD {cat:05d}",
                             source_kind="tle", source_file=source, epoch_unix_s=float(epoch),
                             norad_id=cat, glonass_k=k, prn=prn)
        items.append((OrbitEntry(info=info, satrec=sat, tle_lines=(l1, l2)), rec_line))
    if name is not None:
        problem(_Problem(f"name line '{name[:30]}' is not followed by TLE lines", name_line,
                         "line 1"))
    skipped += len(screen.dropped)
    if not items:
        why = f" ({skipped} bad record(s) skipped)" if skipped else ""
        raise OrbitFormatError(f"no usable TLE records{why}", file=source)
    entries, dup = unique_ids(items, source)
    warnings.extend(screen.warnings)
    warnings.extend(dup)
    if k_warning:
        kw = glonass_k_warning(entries)
        if kw:
            warnings.append(f"{source}: {kw}")
    epochs = np.array([e.info.epoch_unix_s for e in entries])
    info = OrbitFileInfo(path=source, format="TLE", n_satellites=len(entries),
                         epoch_unix_s=median_value(epochs))
    return OrbitSet(entries=entries, files=[info], warnings=warnings)


def with_reference(orbits: OrbitSet, reference_unix_s: float | None) -> OrbitSet:
    """Fill reference time and age in the file infos of a TLE set."""
    if reference_unix_s is None:
        return orbits
    files = [replace(f, reference_unix_s=reference_unix_s,
                     age_s=reference_unix_s - f.epoch_unix_s) for f in orbits.files]
    return OrbitSet(orbits.entries, files, orbits.warnings)

"""Satellite identity: RINEX-style IDs from almanac PRNs, TLE names and catalogue numbers.

ID scheme (the same text is in docs/mapping-file.md):

* RINEX 3 system letters [mem: RINEX 3.04 satellite numbers]: G GPS, R GLONASS, E Galileo,
  C BeiDou, J QZSS, S SBAS, I NavIC/IRNSS; two digits after the letter:
  GPS, Galileo, BeiDou and NavIC PRN; GLONASS orbital slot; QZSS PRN - 192; SBAS PRN - 100.
* A letter after the digits (RTKLIB-style names ``R14S``, ``R22M``, ``R21T`` for spares or
  satellites in maintenance) is kept, so such a satellite never takes its slot's plain ID.
* When no PRN or slot can be found, the ID is ``<letter>-<catalogue number, 5 digits>``,
  e.g. ``R-32393``, ``G-24876``; the letter is ``X`` when the system is unknown too
  (``X-00005``). The ``-`` form cannot be mistaken for a RINEX ID and is safe in file
  names, CSV cells and unquoted shell arguments.
* A mapping file (:mod:`core.readers.mapping`) overrides all of this per catalogue number.

``SatelliteInfo.prn`` holds: the PRN (GPS, Galileo, BeiDou, NavIC), the L1 C/A PRN for
QZSS (193...), the PRN for SBAS (120...), the slot for GLONASS; None for fallback IDs.
"""

from __future__ import annotations

import re
from collections.abc import Iterable
from dataclasses import dataclass

from ..orbit_set import OrbitEntry

RINEX_LETTERS = "GRECJSI"

# PRN ranges [mem: IS-GPS-200 (PRN 1-63), IS-QZSS-PNT (L1 C/A PRN 193-202, L1S PRN 183-191),
# RINEX 3.04 satellite numbers (SBAS PRN 120-158 -> S20-S58, QZSS PRN 193-202 -> J01-J10)].
_GPS_PRN_MAX = 63
_QZSS_CA_PRN_FIRST, _QZSS_CA_PRN_LAST = 193, 202
_QZSS_L1S_PRN_FIRST, _QZSS_L1S_PRN_LAST = 183, 191
_QZSS_L1S_TO_CA = 10           # QZS-1: L1S 183 / C/A 193, QZS-3: 189 / 199 [mem: IS-QZSS-PNT]
_SBAS_PRN_FIRST, _SBAS_PRN_LAST = 120, 158

# A COSMOS name alone is not enough: Space-Track also lists Parus/Tsikada navigation
# satellites as COSMOS nnnn. GLONASS orbits: period 11 h 15 min 44 s (2.1314 rev/day),
# inclination 64.8 deg [mem: GLONASS ICD 5.1]; the windows below are generous.
_GLONASS_MEAN_MOTION_REV_DAY = (2.0, 2.3)
_GLONASS_INCLINATION_DEG = (60.0, 70.0)

_ID_TOKEN = re.compile(r"^([GRECJSI])0*(\d{1,3})([A-Z]?)$")
_SBAS_TOKEN = re.compile(r"^(1[2-5]\d)$")
_PAREN = re.compile(r"\(([^()]*)\)")
_PAREN_PRN = re.compile(r"\bPRN\s*[:#]?\s*([GRECJSI])?\s*0*(\d{1,3})\b")
_PAREN_ID = re.compile(r"^\s*([GRECJSI])\s*0*(\d{1,3})\s*$")
_ID_SHAPE = re.compile(r"^[GRECJSI]\d{2}[A-Z]?$")


@dataclass(frozen=True)
class Identity:
    """Who a TLE satellite is: its ID, system letter and PRN (or slot), and how it was found."""

    sat_id: str
    system: str                  # one RINEX letter, or "X"
    prn: int | None              # see the module docstring
    from_name: bool              # False: fallback ID (no PRN or slot was found)


def system_from_name(name: str, mean_motion_rev_day: float | None = None,
                     inclination_deg: float | None = None) -> str:
    """System letter guessed from the words of a satellite name ("X" when unknown)."""
    up = name.upper()
    if "NAVSTAR" in up or re.search(r"\bGPS\b", up):
        return "G"
    if "GLONASS" in up:
        return "R"
    if re.search(r"\b[CK]OSMOS\b", up):
        if mean_motion_rev_day is None or inclination_deg is None:
            return "R"
        lo_n, hi_n = _GLONASS_MEAN_MOTION_REV_DAY
        lo_i, hi_i = _GLONASS_INCLINATION_DEG
        if lo_n <= mean_motion_rev_day <= hi_n and lo_i <= inclination_deg <= hi_i:
            return "R"
        return "X"
    if "GALILEO" in up or "GIOVE" in up or re.search(r"\bGSAT0\d{3}\b", up):
        return "E"
    if "BEIDOU" in up or "COMPASS" in up:
        return "C"
    if re.search(r"\bQZS", up) or "MICHIBIKI" in up:
        return "J"
    if "IRNSS" in up or "NAVIC" in up:
        return "I"
    return "X"


def rinex_number(system: str, prn: int) -> tuple[int, int] | None:
    """(two-digit RINEX number, stored prn) for a PRN or slot, or None when out of range.

    QZSS accepts the C/A PRN (193-202), the L1S PRN (183-191, mapped to its satellite's
    C/A PRN by adding 10) or an already-reduced number 1-10; SBAS accepts PRN 120-158 or 20-58.
    """
    if system == "J":
        if _QZSS_CA_PRN_FIRST <= prn <= _QZSS_CA_PRN_LAST:
            return prn - 192, prn
        if _QZSS_L1S_PRN_FIRST <= prn <= _QZSS_L1S_PRN_LAST:
            return prn + _QZSS_L1S_TO_CA - 192, prn + _QZSS_L1S_TO_CA
        if 1 <= prn <= _QZSS_CA_PRN_LAST - 192:
            return prn, prn + 192
        return None
    if system == "S":
        if _SBAS_PRN_FIRST <= prn <= _SBAS_PRN_LAST:
            return prn - 100, prn
        if _SBAS_PRN_FIRST - 100 <= prn <= _SBAS_PRN_LAST - 100:
            return prn, prn + 100
        return None
    if system == "G" and not 1 <= prn <= _GPS_PRN_MAX:
        return None
    if system in RINEX_LETTERS and 1 <= prn <= 99:
        return prn, prn
    return None


def fallback_id(system: str, norad_id: int) -> str:
    """Stable ID for a satellite without a known PRN: 'R-32393', 'X-00005'."""
    return f"{system}-{norad_id:05d}"


def _from_number(system: str, number: int, suffix: str = "") -> Identity | None:
    r = rinex_number(system, number)
    if r is None:
        return None
    two, prn = r
    return Identity(f"{system}{two:02d}{suffix}", system, prn, True)


def identify_tle(name: str | None, norad_id: int, *, mean_motion_rev_day: float | None = None,
                 inclination_deg: float | None = None) -> Identity:
    """Identity of a TLE satellite from its name line (None or "" for two-line records).

    Recognised, in this order: a name that is an ID ('G32', 'R14S', 'J01', 'C02 # comment'),
    an SBAS PRN written alone ('120' -> S20), '(PRN 13)' / '(PRN E11)' / '(QZSS/PRN 183)',
    '(C19)'; otherwise the fallback ID from the catalogue number with the system from the
    name's words (COSMOS counts as GLONASS only on a GLONASS-like orbit, when one is given).
    """
    text = (name or "").split("#", 1)[0].strip().upper()
    system = system_from_name(text, mean_motion_rev_day, inclination_deg) if text else "X"
    if text:
        first = text.split()[0]
        m = _ID_TOKEN.match(first)
        if m and len(text.split()) == 1:
            ident = _from_number(m.group(1), int(m.group(2)), m.group(3))
            if ident is not None:
                return ident
        m = _SBAS_TOKEN.match(first)
        if m and len(text.split()) == 1:
            ident = _from_number("S", int(m.group(1)))
            if ident is not None:
                return ident
        for inner in _PAREN.findall(text):
            m = _PAREN_PRN.search(inner)
            if m:
                letter = m.group(1)
                number = int(m.group(2))
                sys_ = letter or system
                if sys_ == "X" and _SBAS_PRN_FIRST <= number <= _SBAS_PRN_LAST:
                    sys_ = "S"
                if sys_ == "X" and "QZS" in inner:
                    sys_ = "J"
                ident = _from_number(sys_, number) if sys_ != "X" else None
                if ident is not None:
                    return ident
                continue
            m = _PAREN_ID.match(inner)
            if m:
                ident = _from_number(m.group(1), int(m.group(2)))
                if ident is not None:
                    return ident
    return Identity(fallback_id(system, norad_id), system, None, False)


def almanac_identity(prn: int) -> Identity | None:
    """ID for a YUMA/SEM PRN: 1-63 GPS, 193-202 QZSS (J01-J10); None otherwise."""
    if 1 <= prn <= _GPS_PRN_MAX:
        return Identity(f"G{prn:02d}", "G", prn, True)
    if _QZSS_CA_PRN_FIRST <= prn <= _QZSS_CA_PRN_LAST:
        return Identity(f"J{prn - 192:02d}", "J", prn, True)
    return None


def parse_sat_id(text: str) -> Identity | None:
    """Identity of an ID written by a user ('R07', 'j01', 'R14S'); None if not ID-shaped."""
    s = text.strip().upper()
    if not _ID_SHAPE.match(s):
        return None
    system, number, suffix = s[0], int(s[1:3]), s[3:]
    ident = _from_number(system, number, suffix)
    return ident


def unique_ids(items: Iterable[tuple[OrbitEntry, int]], source: str,
               ) -> tuple[list[OrbitEntry], list[str]]:
    """Entries with IDs made unique inside one file: a repeat gets '#2', '#3'... and a warning.

    ``items`` pairs each entry with the file line where its record starts.
    """
    from dataclasses import replace

    out: list[OrbitEntry] = []
    warnings: list[str] = []
    first_line: dict[str, int] = {}
    seen: set[str] = set()
    for entry, line in items:
        sid = entry.info.sat_id
        if sid in seen:
            n = 2
            while f"{sid}#{n}" in seen:
                n += 1
            new_id = f"{sid}#{n}"
            warnings.append(f"{source}: satellite {sid} appears again at line {line} "
                            f"(first at line {first_line[sid]}); this copy is kept as {new_id}")
            entry = replace(entry, info=replace(entry.info, sat_id=new_id))
        else:
            first_line[sid] = line
        seen.add(entry.info.sat_id)
        out.append(entry)
    return out, warnings


def glonass_k_warning(entries: Iterable[OrbitEntry]) -> str | None:
    """One warning listing the GLONASS satellites whose frequency channel k is unknown."""
    missing = [e.info.sat_id for e in entries
               if e.info.system == "R" and e.info.glonass_k is None]
    if not missing:
        return None
    return (f"GLONASS frequency channel k unknown for {len(missing)} satellite(s): "
            f"{', '.join(missing)}. TLE files do not carry k; give it in a mapping file "
            f"(docs/mapping-file.md). Until then k is None and the L1 carrier of these "
            f"satellites is not known exactly.")

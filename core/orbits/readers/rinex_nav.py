"""Reader for RINEX 2 and 3 GPS navigation (broadcast ephemeris) files.

Layout [pub: RINEX 2.10 / 2.11 and RINEX 3.02-3.04 format descriptions, GPS navigation
message file tables]: a header closed by ``END OF HEADER``, then one record per satellite
and clock epoch: a line with the satellite, the clock epoch (toc, GPS time) and af0, af1,
af2, followed by seven "broadcast orbit" lines of four fields (19 characters each).
RINEX 2 starts the fields at column 22 (record line) and 3 (orbit lines); RINEX 3, and
the letter-prefixed RINEX 2.12 QZSS style (``J 1``), at 23 and 4.

Tolerated oddities seen in real files: ``D``/``d``/``e`` exponents, fields with no
exponent letter and a three-digit exponent (``0.499063314480-269``), ``G 5`` (blank-padded
PRN), leading-dot mantissas (``-.8209D-06``), short last orbit lines. GPS (and QZSS, which
shares the GPS message layout [pub: IS-QZSS-PNT]) records are kept; records of other
systems in RINEX 3 mixed files are skipped (counted in ``skipped``). RINEX 2 GLONASS
files ('G' type) and RINEX 4 are refused with a clear message.

The toe week is resolved from the clock epoch (the week that puts toe nearest toc),
so files with 10-bit or inconsistent week fields still place every record correctly.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from datetime import UTC, datetime
from pathlib import Path

import numpy as np

from ...ground.constants import GPS_EPOCH_UNIX_S, HALF_WEEK_S, SECONDS_PER_WEEK
from ...ground.errors import OrbitFormatError

_FIELD_WIDTH = 19
# A mantissa followed directly by a signed exponent with no letter (e.g. 0.4990-269).
_NO_LETTER_EXP = re.compile(r"^([+-]?\d*\.\d*)([+-]\d{1,3})$")


@dataclass(frozen=True)
class GpsEphemerisRecord:
    """One broadcast ephemeris record in SI units (seconds, metres, radians)."""

    sat_id: str                 # G05, J01
    system: str                 # "G" or "J"
    prn: int
    toc_gps_s: float            # clock epoch, continuous GPS seconds since 1980-01-06
    af0_s: float
    af1_s_s: float
    af2_s_s2: float
    iode: float
    crs_m: float
    delta_n_rad_s: float
    m0_rad: float
    cuc_rad: float
    eccentricity: float
    cus_rad: float
    sqrt_a_m05: float
    toe_sow_s: float
    cic_rad: float
    omega0_rad: float
    cis_rad: float
    i0_rad: float
    crc_m: float
    arg_perigee_rad: float
    omega_dot_rad_s: float
    idot_rad_s: float
    week_raw: int               # the record's week field as written
    toe_week: int               # full GPS week of toe, resolved from toc
    sv_accuracy_m: float
    health_raw: int
    tgd_s: float
    iodc: float
    transmit_sow_s: float
    fit_interval_h: float       # 0 or missing in the file -> 4 h (the ICD's default)
    line: int                   # 1-based line number of the record's first line

    @property
    def toe_gps_s(self) -> float:
        return self.toe_week * SECONDS_PER_WEEK + self.toe_sow_s

    @property
    def health(self) -> int:
        """Health with the QZSS L1C/A-only bit masked (as open receiver code does)."""
        return self.health_raw & ~1 if self.system == "J" else self.health_raw

    @property
    def healthy(self) -> bool:
        return self.health == 0


@dataclass
class RinexNavFile:
    path: str
    version: float
    records: list[GpsEphemerisRecord]
    skipped: dict[str, int] = field(default_factory=dict)   # other systems' record counts
    leap_seconds: int | None = None
    warnings: list[str] = field(default_factory=list)

    def sat_ids(self) -> list[str]:
        return sorted({r.sat_id for r in self.records})

    def healthy_records(self) -> list[GpsEphemerisRecord]:
        return [r for r in self.records if r.healthy]


def parse_rinex_float(text: str, *, file: str | None = None, line: int | None = None,
                      field_name: str | None = None) -> float:
    """A RINEX number: D/E exponents, or none; a blank field is 0.0."""
    s = text.strip()
    if not s:
        return 0.0
    s = s.replace("D", "E").replace("d", "E")
    try:
        return float(s)
    except ValueError:
        pass
    m = _NO_LETTER_EXP.match(s)
    if m:
        try:
            return float(f"{m.group(1)}E{m.group(2)}")
        except ValueError:
            pass
    raise OrbitFormatError(f"'{text.strip()}' is not a number", file=file, line=line,
                           field=field_name)


_ORBIT_FIELDS = (
    ("iode", "crs_m", "delta_n_rad_s", "m0_rad"),
    ("cuc_rad", "eccentricity", "cus_rad", "sqrt_a_m05"),
    ("toe_sow_s", "cic_rad", "omega0_rad", "cis_rad"),
    ("i0_rad", "crc_m", "arg_perigee_rad", "omega_dot_rad_s"),
    ("idot_rad_s", "codes_l2", "week_raw", "l2p_flag"),
    ("sv_accuracy_m", "health_raw", "tgd_s", "iodc"),
    ("transmit_sow_s", "fit_interval_h", "spare1", "spare2"),
)


def _year4(y: int) -> int:
    if y < 100:  # RINEX 2 two-digit years [pub: RINEX 2.11 sec. 6.5]: 80-99 -> 19xx
        return y + (1900 if y >= 80 else 2000)
    return y


def _epoch_gps_s(parts: list[str], file: str, line: int) -> float:
    try:
        y, mo, d, h, mi = (int(p) for p in parts[:5])
        sec = float(parts[5])
        whole = datetime(_year4(y), mo, d, h, mi, tzinfo=UTC)
    except (ValueError, IndexError):
        raise OrbitFormatError(f"bad clock epoch '{' '.join(parts)}'", file=file, line=line,
                               field="toc") from None
    # GPS time written as a calendar date: no leap seconds involved.
    return whole.timestamp() - GPS_EPOCH_UNIX_S + sec


def _fields(text: str, start: int, count: int) -> list[str]:
    return [text[start + k * _FIELD_WIDTH: start + (k + 1) * _FIELD_WIDTH] for k in range(count)]


def read_rinex_nav(path: str | Path, systems: tuple[str, ...] = ("G", "J")) -> RinexNavFile:
    """Read a RINEX 2.x / 3.x navigation file; keep the GPS-layout records of ``systems``."""
    p = Path(path)
    name = str(p)
    try:
        raw = p.read_bytes()
    except OSError as exc:
        raise OrbitFormatError(f"cannot read the file: {exc.strerror or exc}", file=name) from None
    lines = raw.decode("ascii", errors="replace").splitlines()
    if not lines:
        raise OrbitFormatError("the file is empty", file=name)
    head = lines[0]
    if "RINEX VERSION" not in head:
        raise OrbitFormatError("first line is not a RINEX 'RINEX VERSION / TYPE' header",
                               file=name, line=1)
    try:
        version = float(head[:9])
    except ValueError:
        raise OrbitFormatError(f"bad RINEX version '{head[:9].strip()}'", file=name, line=1,
                               field="version") from None
    ftype = head[20:21].upper()
    fsys = head[40:41].upper() or "G"
    if version >= 4.0:
        raise OrbitFormatError(f"RINEX {version:.2f} navigation files are not supported "
                               "(RINEX 2 and 3 are)", file=name, line=1)
    if ftype != "N":
        what = "GLONASS" if ftype == "G" else f"type '{ftype}'"
        raise OrbitFormatError(f"this is a {what} navigation file; only GPS/QZSS navigation "
                               "(type N) is read", file=name, line=1)
    leap = None
    body = None
    for i, text in enumerate(lines):
        label = text[60:].strip()
        if label.startswith("LEAP SECONDS"):
            try:
                leap = int(text[:6])
            except ValueError:
                leap = None
        if label.startswith("END OF HEADER"):
            body = i + 1
            break
    if body is None:
        raise OrbitFormatError("no END OF HEADER line", file=name)

    records: list[GpsEphemerisRecord] = []
    skipped: dict[str, int] = {}
    warnings: list[str] = []
    i = body
    n = len(lines)
    while i < n:
        text = lines[i]
        if not text.strip():
            i += 1
            continue
        lineno = i + 1
        letter = text[0] if text[0].isalpha() else ""
        if version >= 3.0:
            system = letter or "G"
            n_lines = 4 if system in ("R", "S") else 8
            if not letter:
                raise OrbitFormatError("RINEX 3 record line does not start with a system letter",
                                       file=name, line=lineno)
        else:
            system = letter or ("J" if fsys == "J" else "G")
            n_lines = 8
        if system not in systems or system not in ("G", "J"):
            skipped[system] = skipped.get(system, 0) + 1
            i += n_lines
            continue
        wide = version >= 3.0 or bool(letter)
        first_col, orbit_col = (23, 4) if wide else (22, 3)
        try:
            prn = int(text[1:3] if letter else text[0:2])
        except ValueError:
            raise OrbitFormatError(f"bad satellite number '{text[:3].strip()}'", file=name,
                                   line=lineno, field="PRN") from None
        parts = text[3 if wide else 2:first_col].split()
        toc = _epoch_gps_s(parts, name, lineno)
        vals: dict[str, float] = {}
        for key, fld in zip(("af0_s", "af1_s_s", "af2_s_s2"), _fields(text, first_col, 3)):
            vals[key] = parse_rinex_float(fld, file=name, line=lineno, field_name=key)
        if i + n_lines > n:
            raise OrbitFormatError(f"record of {system}{prn:02d} is cut short (needs "
                                   f"{n_lines} lines)", file=name, line=lineno)
        for k, names in enumerate(_ORBIT_FIELDS):
            orbit_line = lines[i + 1 + k]
            for key, fld in zip(names, _fields(orbit_line, orbit_col, 4)):
                vals[key] = parse_rinex_float(fld, file=name, line=lineno + 1 + k, field_name=key)
        if vals["sqrt_a_m05"] <= 0.0:
            raise OrbitFormatError(f"{system}{prn:02d}: sqrt(A) is {vals['sqrt_a_m05']}",
                                   file=name, line=lineno + 2, field="sqrtA")
        # Full week of toe: the one that puts toe within half a week of toc.
        toc_week = np.floor(toc / SECONDS_PER_WEEK)
        toe_week = int(toc_week)
        dt = toe_week * SECONDS_PER_WEEK + vals["toe_sow_s"] - toc
        if dt > HALF_WEEK_S:
            toe_week -= 1
        elif dt < -HALF_WEEK_S:
            toe_week += 1
        week_raw = int(round(vals["week_raw"]))
        if week_raw >= 1024 and week_raw != toe_week:
            warnings.append(f"{name} line {lineno + 5}: week field {week_raw} differs from the "
                            f"week {toe_week} implied by the clock epoch; the latter is used")
        fit = vals["fit_interval_h"]
        records.append(GpsEphemerisRecord(
            sat_id=f"{system}{prn:02d}", system=system, prn=prn, toc_gps_s=toc,
            af0_s=vals["af0_s"], af1_s_s=vals["af1_s_s"], af2_s_s2=vals["af2_s_s2"],
            iode=vals["iode"], crs_m=vals["crs_m"], delta_n_rad_s=vals["delta_n_rad_s"],
            m0_rad=vals["m0_rad"], cuc_rad=vals["cuc_rad"], eccentricity=vals["eccentricity"],
            cus_rad=vals["cus_rad"], sqrt_a_m05=vals["sqrt_a_m05"], toe_sow_s=vals["toe_sow_s"],
            cic_rad=vals["cic_rad"], omega0_rad=vals["omega0_rad"], cis_rad=vals["cis_rad"],
            i0_rad=vals["i0_rad"], crc_m=vals["crc_m"], arg_perigee_rad=vals["arg_perigee_rad"],
            omega_dot_rad_s=vals["omega_dot_rad_s"], idot_rad_s=vals["idot_rad_s"],
            week_raw=week_raw, toe_week=toe_week, sv_accuracy_m=vals["sv_accuracy_m"],
            health_raw=int(round(vals["health_raw"])), tgd_s=vals["tgd_s"], iodc=vals["iodc"],
            transmit_sow_s=vals["transmit_sow_s"],
            fit_interval_h=fit if fit > 0 else 4.0, line=lineno))
        i += n_lines
    if not records:
        raise OrbitFormatError("no GPS navigation records found", file=name)
    return RinexNavFile(path=name, version=version, records=records, skipped=skipped,
                        leap_seconds=leap, warnings=warnings)

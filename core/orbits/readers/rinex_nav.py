"""Reader for RINEX 2 and 3 navigation (broadcast ephemeris) files of every GNSS.

Layout [pub: RINEX 2.10 / 2.11 and RINEX 3.02-3.05 format descriptions, navigation
message file tables]: a header closed by ``END OF HEADER``, then one record per satellite
and epoch. Keplerian systems (GPS, Galileo, BeiDou, QZSS): a line with the satellite, the
clock epoch (toc) and af0, af1, af2, then seven "broadcast orbit" lines of four fields (19
characters each). GLONASS: the epoch line with -TauN, +GammaN and the message frame time,
then three lines of position (km), velocity (km/s), luni-solar acceleration (km/s^2) and
health / frequency number / age. RINEX 2 starts the fields at column 22 (record line) and
3 (orbit lines); RINEX 3, and the letter-prefixed RINEX 2.12 QZSS style (``J 1``), at 23
and 4. RINEX 3 records end where the next line starts with a system letter (so the extra
GLONASS status line of RINEX 3.05 is passed over); RINEX 2 records have fixed lengths
(8 lines in 'N' files, 4 in GLONASS 'G' files).

Time scales of the epochs [pub: RINEX 3.04 sec. 6.11]: GPS, QZSS and Galileo records are
in GPS time (GST = GPST), BeiDou in BDT (= GPST - 14 s), GLONASS in UTC. Every record
here carries continuous GPS seconds (``*_gps_s``), so records of all systems share one
axis; the seconds-of-week the Keplerian model needs stay in the system's own time.

Tolerated oddities seen in real files: ``D``/``d``/``e`` exponents, fields with no
exponent letter and a three-digit exponent (``0.499063314480-269``), ``G 5`` (blank-padded
PRN), leading-dot mantissas (``-.8209D-06``), short last orbit lines. SBAS and NavIC
records are skipped (counted in ``skipped``); RINEX 4 and SBAS-only ('H') files are
refused with a clear message. A record with an impossible orbit (sqrt(A) <= 0,
eccentricity outside 0..1, a position inside the Earth) is dropped with a warning.

The toe week is resolved from the clock epoch (the week that puts toe nearest toc),
so files with 10-bit or inconsistent week fields still place every record correctly.

Validity around the reference epoch (half the fit interval, "not expired") per system:

* GPS: the record's fit interval, 0 or < 4 h read as 4 h [pub: IS-GPS-200 sec. 20.3.3.4.3.1,
  fit interval flag 0 = 4 hours]: +-2 h.
* QZSS: 2 h [mem: IS-QZSS-PNT sec. 5.6.3, fit interval flag 0 = 2 hours]: +-1 h.
* Galileo: 4 h [mem: Galileo OS SIS ICD 2.0 sec. 5.1.9, ephemeris validity ~4 hours]: +-2 h.
* BeiDou: 2 h (the ICD states an hourly update, not a fit interval [mem: BDS-SIS-ICD-B1I
  3.0 sec. 5.2.4]; two update periods, a choice): +-1 h.
* GLONASS: 30 min, tb in its middle [mem: GLONASS ICD 5.1 sec. 4.4, tb every 30 min]: +-15 min.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from datetime import UTC, datetime
from pathlib import Path

import numpy as np

from ...ground.constants import (
    BDT_MINUS_GPST_S,
    GPS_EPOCH_UNIX_S,
    HALF_WEEK_S,
    SECONDS_PER_WEEK,
    WGS84_B_M,
)
from ...ground.errors import OrbitFormatError
from ...ground.timeutil import unix_to_gps_s
from ..plausibility import RecordScreen

_FIELD_WIDTH = 19
# A mantissa followed directly by a signed exponent with no letter (e.g. 0.4990-269).
_NO_LETTER_EXP = re.compile(r"^([+-]?\d*\.\d*)([+-]\d{1,3})$")

SYSTEM_NAMES = {"G": "GPS", "E": "Galileo", "C": "BeiDou", "J": "QZSS", "R": "GLONASS",
                "S": "SBAS", "I": "NavIC"}
KEPLER_SYSTEMS = ("G", "E", "C", "J")
ALL_SYSTEMS = ("G", "E", "C", "J", "R")
# BeiDou GEO satellites [mem: BDS-SIS-ICD-B1I 3.0 sec. 3.1 and the BDS constellation status:
# C01-C05 (BDS-2) and C59-C63 (BDS-3) are the GEO PRNs].
BEIDOU_GEO_PRNS = frozenset({1, 2, 3, 4, 5, 59, 60, 61, 62, 63})
# BDT week 0 began at GPS week 1356 (2006-01-01) [mem: BDS-SIS-ICD-B1I 3.0 sec. 3.1].
BDT_WEEK_OFFSET = 1356
# Fit intervals (hours) where the record gives none; see the module docstring for sources.
DEFAULT_FIT_H = {"G": 4.0, "J": 2.0, "E": 4.0, "C": 2.0, "R": 0.5}


@dataclass(frozen=True)
class GpsEphemerisRecord:
    """One Keplerian broadcast record (GPS, QZSS, Galileo, BeiDou) in SI units.

    The field names follow GPS; for Galileo ``iode`` is IODnav and ``sv_accuracy_m`` SISA,
    for BeiDou ``iode`` is AODE and ``iodc`` TGD2."""

    sat_id: str                 # G05, J01, E11, C19
    system: str                 # "G", "J", "E" or "C"
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
    toe_sow_s: float            # seconds of the system's own week (BDT for BeiDou)
    cic_rad: float
    omega0_rad: float
    cis_rad: float
    i0_rad: float
    crc_m: float
    arg_perigee_rad: float
    omega_dot_rad_s: float
    idot_rad_s: float
    week_raw: int               # the record's week field as written
    toe_week: int               # full week of toe in the system's calendar, resolved from toc
    sv_accuracy_m: float
    health_raw: int
    tgd_s: float
    iodc: float
    transmit_sow_s: float
    fit_interval_h: float       # validity interval centred on toe (see the module docstring)
    line: int                   # 1-based line number of the record's first line
    time_offset_s: float = 0.0  # GPS time minus the system's time (BeiDou: 14 s)

    @property
    def toe_gps_s(self) -> float:
        return self.toe_week * SECONDS_PER_WEEK + self.toe_sow_s + self.time_offset_s

    @property
    def health(self) -> int:
        """Health with the QZSS L1C/A-only bit masked (as open receiver code does)."""
        return self.health_raw & ~1 if self.system == "J" else self.health_raw

    @property
    def healthy(self) -> bool:
        """Health 0; a Galileo record without an accuracy prediction (SISA "NAPA", written
        as a negative value [mem: RINEX 3.04 sec. A8, Galileo SISA]) is not used either."""
        if self.system == "E" and self.sv_accuracy_m < 0.0:
            return False
        return self.health == 0

    @property
    def beidou_geo(self) -> bool:
        return self.system == "C" and self.prn in BEIDOU_GEO_PRNS

    @property
    def issue(self) -> int:
        """Issue of data as written (IODE, IODnav, AODE)."""
        return int(round(self.iode))


@dataclass(frozen=True)
class GlonassRecord:
    """One GLONASS broadcast record: an Earth-fixed (PZ-90) state at tb, SI units."""

    sat_id: str                 # R07
    prn: int
    toe_gps_s: float            # tb, continuous GPS seconds (the file gives UTC)
    minus_tau_n_s: float        # -TauN as written (clock bias)
    gamma_n: float              # relative frequency bias
    frame_time_s: float
    pos_m: tuple[float, float, float]
    vel_m_s: tuple[float, float, float]
    acc_m_s2: tuple[float, float, float]   # luni-solar acceleration, constant over the record
    health_raw: int
    freq_k: int                 # frequency channel number as written (-7..+13)
    age_days: float
    line: int
    system: str = "R"
    fit_interval_h: float = DEFAULT_FIT_H["R"]

    @property
    def healthy(self) -> bool:
        return self.health_raw == 0

    @property
    def issue(self) -> int:
        """tb as the index of the 15-minute interval of the day (the ICD's tb field)."""
        return int(round((self.toe_gps_s % 86400.0) / 900.0))


@dataclass
class RinexNavFile:
    """One RINEX navigation file: its GPS-type and GLONASS records, skipped systems, warnings."""

    path: str
    version: float
    records: list[GpsEphemerisRecord]
    skipped: dict[str, int] = field(default_factory=dict)   # other systems' record counts
    leap_seconds: int | None = None
    warnings: list[str] = field(default_factory=list)
    glonass: list[GlonassRecord] = field(default_factory=list)

    def sat_ids(self) -> list[str]:
        return sorted({r.sat_id for r in self.records} | {r.sat_id for r in self.glonass})

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
        v = float(s)
    except ValueError:
        m = _NO_LETTER_EXP.match(s)
        v = math.nan
        if m:
            try:
                v = float(f"{m.group(1)}E{m.group(2)}")
            except ValueError:
                pass
        if math.isnan(v):
            raise OrbitFormatError(f"'{text.strip()}' is not a number", file=file, line=line,
                                   field=field_name) from None
    if not math.isfinite(v):
        raise OrbitFormatError(f"'{text.strip()}' is not a finite number", file=file, line=line,
                               field=field_name)
    return v


_ORBIT_FIELDS = (
    ("iode", "crs_m", "delta_n_rad_s", "m0_rad"),
    ("cuc_rad", "eccentricity", "cus_rad", "sqrt_a_m05"),
    ("toe_sow_s", "cic_rad", "omega0_rad", "cis_rad"),
    ("i0_rad", "crc_m", "arg_perigee_rad", "omega_dot_rad_s"),
    ("idot_rad_s", "codes_l2", "week_raw", "l2p_flag"),
    ("sv_accuracy_m", "health_raw", "tgd_s", "iodc"),
    ("transmit_sow_s", "fit_interval_h", "spare1", "spare2"),
)
_GLONASS_FIELDS = (("x", "vx", "ax", "health"), ("y", "vy", "ay", "freq_k"),
                   ("z", "vz", "az", "age_days"))


def _year4(y: int) -> int:
    if y < 100:  # RINEX 2 two-digit years [pub: RINEX 2.11 sec. 6.5]: 80-99 -> 19xx
        return y + (1900 if y >= 80 else 2000)
    return y


def _calendar_s(parts: list[str], file: str, line: int) -> float:
    """The epoch as seconds since 1980-01-06 00:00 of its own calendar (no leap seconds)."""
    try:
        y, mo, d, h, mi = (int(p) for p in parts[:5])
        sec = float(parts[5])
        whole = datetime(_year4(y), mo, d, h, mi, tzinfo=UTC)
        if not 0.0 <= sec < 61.0:
            raise ValueError
    except (ValueError, IndexError, OverflowError):
        raise OrbitFormatError(f"bad epoch '{' '.join(parts)}'", file=file, line=line,
                               field="epoch") from None
    return whole.timestamp() - GPS_EPOCH_UNIX_S + sec


def _fields(text: str, start: int, count: int) -> list[str]:
    return [text[start + k * _FIELD_WIDTH: start + (k + 1) * _FIELD_WIDTH] for k in range(count)]


def _resolve_toe_week(toc_cal_s: float, toe_sow_s: float) -> int:
    """Full week (of toc's calendar) that puts toe within half a week of toc."""
    toe_week = int(np.floor(toc_cal_s / SECONDS_PER_WEEK))
    dt = toe_week * SECONDS_PER_WEEK + toe_sow_s - toc_cal_s
    if dt > HALF_WEEK_S:
        toe_week -= 1
    elif dt < -HALF_WEEK_S:
        toe_week += 1
    return toe_week


_KEPLER_NAMES = {"sqrt_a_m05": "sqrt(A)", "eccentricity": "e", "inclination_rad": "i0",
                 "node_rate_rad_s": "OMEGA DOT", "inclination_rate_rad_s": "IDOT",
                 "mean_motion_delta_rad_s": "Delta n", "angle_rad:OMEGA0": "OMEGA0",
                 "angle_rad:omega": "omega", "angle_rad:M0": "M0", "clock_bias_s": "af0",
                 "clock_drift_s_s": "af1"}
_KEPLER_LINE = {"sqrt_a_m05": 2, "eccentricity": 2, "inclination_rad": 4, "node_rate_rad_s": 4,
                "inclination_rate_rad_s": 5, "mean_motion_delta_rad_s": 1,
                "angle_rad:OMEGA0": 3, "angle_rad:omega": 4, "angle_rad:M0": 1,
                "clock_bias_s": 0, "clock_drift_s_s": 0}


def _kepler_record(system: str, prn: int, block: list[str], first_col: int, orbit_col: int,
                   toc_cal_s: float, name: str, lineno: int, warnings: list[str],
                   screen: RecordScreen) -> GpsEphemerisRecord | None:
    sid = f"{system}{prn:02d}"
    vals: dict[str, float] = {}
    for key, fld in zip(("af0_s", "af1_s_s", "af2_s_s2"), _fields(block[0], first_col, 3)):
        vals[key] = parse_rinex_float(fld, file=name, line=lineno, field_name=key)
    for k, names in enumerate(_ORBIT_FIELDS):
        orbit_line = block[1 + k]
        for key, fld in zip(names, _fields(orbit_line, orbit_col, 4)):
            vals[key] = parse_rinex_float(fld, file=name, line=lineno + 1 + k, field_name=key)
    if vals["sqrt_a_m05"] <= 0.0 or not 0.0 <= vals["eccentricity"] < 1.0 \
            or not 0.0 <= vals["toe_sow_s"] <= SECONDS_PER_WEEK:
        warnings.append(f"{name} line {lineno}: {sid} record has an impossible orbit "
                        f"(sqrt(A) {vals['sqrt_a_m05']:g}, e {vals['eccentricity']:g}, toe "
                        f"{vals['toe_sow_s']:g} s): dropped")
        return None
    values = {"sqrt_a_m05": vals["sqrt_a_m05"], "eccentricity": vals["eccentricity"],
              "inclination_rad": vals["i0_rad"], "node_rate_rad_s": vals["omega_dot_rad_s"],
              "inclination_rate_rad_s": vals["idot_rad_s"],
              "mean_motion_delta_rad_s": vals["delta_n_rad_s"],
              "angle_rad:OMEGA0": vals["omega0_rad"], "angle_rad:omega": vals["arg_perigee_rad"],
              "angle_rad:M0": vals["m0_rad"], "clock_bias_s": vals["af0_s"],
              "clock_drift_s_s": vals["af1_s_s"]}
    if not screen.keep(system, values, _KEPLER_NAMES, record=f"{sid} record", line=lineno,
                       lines={k: lineno + v for k, v in _KEPLER_LINE.items()},
                       kind="ephemeris"):
        return None
    offset = -BDT_MINUS_GPST_S if system == "C" else 0.0
    toe_week = _resolve_toe_week(toc_cal_s, vals["toe_sow_s"])
    week_raw = int(round(vals["week_raw"])) if abs(vals["week_raw"]) < 1e6 else -1
    expected = toe_week - BDT_WEEK_OFFSET if system == "C" else toe_week
    if week_raw >= (0 if system == "C" else 1024) and week_raw != expected:
        warnings.append(f"{name} line {lineno + 5}: {sid} week field {week_raw} differs from "
                        f"the week {expected} implied by the clock epoch; the latter is used")
    fit = vals["fit_interval_h"] if system == "G" else 0.0
    fit_h = max(fit, DEFAULT_FIT_H[system])
    health = vals["health_raw"]
    return GpsEphemerisRecord(
        sat_id=sid, system=system, prn=prn, toc_gps_s=toc_cal_s + offset,
        af0_s=vals["af0_s"], af1_s_s=vals["af1_s_s"], af2_s_s2=vals["af2_s_s2"],
        iode=vals["iode"], crs_m=vals["crs_m"], delta_n_rad_s=vals["delta_n_rad_s"],
        m0_rad=vals["m0_rad"], cuc_rad=vals["cuc_rad"], eccentricity=vals["eccentricity"],
        cus_rad=vals["cus_rad"], sqrt_a_m05=vals["sqrt_a_m05"], toe_sow_s=vals["toe_sow_s"],
        cic_rad=vals["cic_rad"], omega0_rad=vals["omega0_rad"], cis_rad=vals["cis_rad"],
        i0_rad=vals["i0_rad"], crc_m=vals["crc_m"], arg_perigee_rad=vals["arg_perigee_rad"],
        omega_dot_rad_s=vals["omega_dot_rad_s"], idot_rad_s=vals["idot_rad_s"],
        week_raw=week_raw, toe_week=toe_week, sv_accuracy_m=vals["sv_accuracy_m"],
        health_raw=int(health) if 0 <= health < 2**31 else 2**31 - 1, tgd_s=vals["tgd_s"],
        iodc=vals["iodc"], transmit_sow_s=vals["transmit_sow_s"], fit_interval_h=fit_h,
        line=lineno, time_offset_s=offset)


def _glonass_record(prn: int, block: list[str], first_col: int, orbit_col: int,
                    toc_cal_s: float, name: str, lineno: int, warnings: list[str],
                    screen: RecordScreen) -> GlonassRecord | None:
    sid = f"R{prn:02d}"
    head = [parse_rinex_float(f, file=name, line=lineno, field_name=k) for f, k in
            zip(_fields(block[0], first_col, 3), ("-TauN", "GammaN", "frame time"))]
    vals: dict[str, float] = {}
    for k, names in enumerate(_GLONASS_FIELDS):
        for key, fld in zip(names, _fields(block[1 + k], orbit_col, 4)):
            vals[key] = parse_rinex_float(fld, file=name, line=lineno + 1 + k, field_name=key)
    pos = tuple(1000.0 * vals[k] for k in ("x", "y", "z"))
    r = math.sqrt(sum(c * c for c in pos))
    k_ch = vals["freq_k"]
    if not WGS84_B_M < r < 1e8 or not -7 <= k_ch <= 13 or k_ch != round(k_ch):
        warnings.append(f"{name} line {lineno}: {sid} record has an impossible state "
                        f"(radius {r / 1000:.0f} km, channel {k_ch:g}): dropped")
        return None
    vel = [1000.0 * vals[k] for k in ("vx", "vy", "vz")]
    values = {"radius_m": r, "speed_m_s": math.sqrt(sum(v * v for v in vel)),
              "clock_bias_s": head[0], "clock_drift_s_s": head[1]}
    if not screen.keep("R", values, {"radius_m": "X, Y, Z", "speed_m_s": "VX, VY, VZ",
                                     "clock_bias_s": "-TauN", "clock_drift_s_s": "GammaN"},
                       record=f"{sid} record", line=lineno, kind="ephemeris"):
        return None
    gps_s = float(unix_to_gps_s(toc_cal_s + GPS_EPOCH_UNIX_S))     # the epoch is UTC
    health = vals["health"]
    return GlonassRecord(
        sat_id=sid, prn=prn, toe_gps_s=gps_s, minus_tau_n_s=head[0], gamma_n=head[1],
        frame_time_s=head[2], pos_m=pos,                                   # type: ignore[arg-type]
        vel_m_s=tuple(1000.0 * vals[k] for k in ("vx", "vy", "vz")),       # type: ignore[arg-type]
        acc_m_s2=tuple(1000.0 * vals[k] for k in ("ax", "ay", "az")),      # type: ignore[arg-type]
        health_raw=int(health) if 0 <= health < 2**31 else 2**31 - 1,
        freq_k=int(k_ch),
        age_days=vals["age_days"], line=lineno)


def parse_rinex_nav(text: str, source: str, systems: tuple[str, ...] = ALL_SYSTEMS,
                    *, strict: bool = True) -> RinexNavFile:
    """Parse RINEX 2.x / 3.x navigation text; keep the records of ``systems``.

    Every record passes the physical plausibility screen (:mod:`core.orbits.plausibility`):
    ``strict`` stops at the first implausible record, otherwise it is dropped with a
    warning."""
    name = source
    screen = RecordScreen(source, strict)
    lines = text.splitlines()
    if not lines or not text.strip():
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
    if not 2.0 <= version < 4.0:
        raise OrbitFormatError(f"RINEX {version:.2f} navigation files are not supported "
                               "(RINEX 2 and 3 are)", file=name, line=1)
    glonass_file = version < 3.0 and ftype == "G"
    if ftype not in ("N", "G"):
        what = "an SBAS" if ftype == "H" else f"a type '{ftype}'"
        raise OrbitFormatError(f"this is {what} file, not a GPS/GNSS or GLONASS navigation "
                               "file", file=name, line=1)
    leap = None
    body = None
    for i, line_text in enumerate(lines):
        label = line_text[60:].strip()
        if label.startswith("LEAP SECONDS"):
            try:
                leap = int(line_text[:6])
            except ValueError:
                leap = None
        if label.startswith("END OF HEADER"):
            body = i + 1
            break
    if body is None:
        raise OrbitFormatError("no END OF HEADER line", file=name)

    records: list[GpsEphemerisRecord] = []
    glonass: list[GlonassRecord] = []
    skipped: dict[str, int] = {}
    warnings: list[str] = []
    i = body
    n = len(lines)
    while i < n:
        line_text = lines[i]
        if not line_text.strip():
            i += 1
            continue
        lineno = i + 1
        letter = line_text[0] if line_text[0].isalpha() else ""
        if version >= 3.0:
            if not letter:
                raise OrbitFormatError("RINEX 3 record line does not start with a system letter",
                                       file=name, line=lineno)
            system = letter.upper()
            j = i + 1
            while j < n and not (lines[j][:1].isalpha()):
                j += 1
            n_lines = j - i
        else:
            system = "R" if glonass_file else (letter.upper() or ("J" if fsys == "J" else "G"))
            n_lines = 4 if glonass_file else 8
        needed = 4 if system in ("R", "S") else 8
        if system not in systems or system not in ALL_SYSTEMS:
            skipped[system] = skipped.get(system, 0) + 1
            i += max(n_lines, 1)
            continue
        if n_lines < needed or i + needed > n:
            raise OrbitFormatError(f"record of {system} at line {lineno} is cut short (needs "
                                   f"{needed} lines)", file=name, line=lineno)
        wide = version >= 3.0 or bool(letter)
        first_col, orbit_col = (23, 4) if wide else (22, 3)
        try:
            prn = int(line_text[1:3] if letter else line_text[0:2])
            if not 0 < prn < 100:
                raise ValueError
        except ValueError:
            raise OrbitFormatError(f"bad satellite number '{line_text[:3].strip()}'", file=name,
                                   line=lineno, field="PRN") from None
        parts = line_text[3 if wide else 2:first_col].split()
        toc_cal = _calendar_s(parts, name, lineno)
        block = lines[i:i + needed]
        if system == "R":
            g = _glonass_record(prn, block, first_col, orbit_col, toc_cal, name, lineno, warnings,
                                screen)
            if g is not None:
                glonass.append(g)
        else:
            r = _kepler_record(system, prn, block, first_col, orbit_col, toc_cal, name, lineno,
                               warnings, screen)
            if r is not None:
                records.append(r)
        i += max(n_lines, needed)
    warnings.extend(screen.warnings)
    if not records and not glonass:
        kept = ", ".join(SYSTEM_NAMES[s] for s in systems if s in SYSTEM_NAMES)
        raise OrbitFormatError(f"no navigation records of {kept} found", file=name)
    return RinexNavFile(path=name, version=version, records=records, skipped=skipped,
                        leap_seconds=leap, warnings=warnings, glonass=glonass)


def is_rinex_nav(text: str) -> bool:
    """True when the first line is a RINEX navigation header ('N' or GLONASS 'G' type)."""
    first = text.lstrip("\ufeff").split("\n", 1)[0]
    return "RINEX VERSION" in first and first[20:21].upper() in ("N", "G", "H")


def read_rinex_nav(path: str | Path, systems: tuple[str, ...] = ("G", "J")) -> RinexNavFile:
    """Read a RINEX 2.x / 3.x navigation file (``.gz`` and ``.Z`` accepted); keep the
    records of ``systems`` (default GPS and QZSS)."""
    from .compressed import expand

    p = Path(path)
    name = str(p)
    try:
        raw = p.read_bytes()
    except OSError as exc:
        raise OrbitFormatError(f"cannot read the file: {exc.strerror or exc}", file=name) from None
    text = expand(raw, name).decode("ascii", errors="replace")
    return parse_rinex_nav(text, name, systems)

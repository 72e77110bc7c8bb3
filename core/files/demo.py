"""Invented demo data: a fictional drive test with invented GPS, Galileo, BeiDou and GLONASS orbits.

Everything here is made up for demonstrations and tests: the site ("Hainvelde Proving
Ground" does not exist), the date (a morning in May 2027) and every satellite. The
constellations follow the published nominal layouts so the sky looks realistic:

- GPS: the 24-slot layout of the GPS SPS Performance Standard (2001), Table 3-1, epoch
  1993-07-01 00:00 UTC, carried forward to the demo almanac's time of applicability with a
  two-body mean motion and one nominal node rate. Small invented eccentricities, inclination
  offsets, semi-major-axis offsets and clock terms are added. Written as YUMA, SEM and TLE.
- Galileo: Walker 24/3/1, a = 29,600.318 km, i = 56 deg [pub: Galileo OS SDD]. TLE.
- BeiDou MEO: Walker 24/3/1, a = 27,906 km, i = 55 deg [mem]. TLE.
- GLONASS: 3 planes x 8, a = 25,508 km, i = 64.8 deg [mem], adjacent planes shifted by
  15 deg in argument of latitude [mem: GLONASS ICD 3.1]. TLE names carry no slot number;
  a mapping file gives slot and frequency channel k (antipodal satellites share k).

TLE mean motions are computed from the semi-major axis with the WGS-72 mu. SGP4 reads them
as Kozai mean elements, so an SGP4 orbit differs slightly (kilometres) from the nominal
two-body one; that is fine for invented data. bstar, ndot and nddot are zero.

Reproducible: a fixed seed and only :meth:`random.Random.random` (whose sequence Python
keeps stable for a given seed) drive the invented values, so regenerating gives
byte-identical files. ``python scripts/generate_demo.py`` rewrites ``sample_almanacs/``;
``acqplan demo DIR`` calls :func:`write_demo`.
"""

from __future__ import annotations

import math
import random
from collections.abc import Sequence
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path

from sgp4.propagation import gstime

from ..ground.constants import (
    DEG,
    EARTH_ROTATION_RAD_S,
    GPS_MU_M3_S2,
    GPS_PI,
    GPS_REFERENCE_INCLINATION_SC,
    SECONDS_PER_DAY,
    SECONDS_PER_WEEK,
    TWO_PI,
    UNIX_JD,
    WEEKS_PER_ROLLOVER,
    WGS72_MU_M3_S2,
)
from ..ground.errors import InputError
from ..ground.timeutil import from_unix_s, gps_week_tow_to_unix_s, parse_iso_utc, unix_to_gps_s
from .atomic import write_set_atomic

# ---------------------------------------------------------------------------------------
# The fictional campaign

DEMO_SEED = 20_270_518
SITE_NAME = "Hainvelde Proving Ground"      # fictional
SITE_LAT_DEG = 49.6183
SITE_LON_DEG = 10.1327
SITE_HEIGHT_M = 318.0                       # above the WGS-84 ellipsoid
SITE_TIMEZONE = "Europe/Berlin"
CAMPAIGN_START_UTC = "2027-05-18T04:00:00Z"  # 06:00 local (CEST, UTC+2)
CAMPAIGN_END_UTC = "2027-05-18T06:00:00Z"    # 08:00 local

# The demo GPS almanac: toa on the 4096 s grid, Monday 16:57:36 GPS time of the campaign week
# (the file a team would fetch the evening before a Tuesday morning drive).
GPS_TOA_S = 147_456.0
_CAMPAIGN_START_UNIX = parse_iso_utc(CAMPAIGN_START_UTC).timestamp()
GPS_WEEK_FULL = int(float(unix_to_gps_s(_CAMPAIGN_START_UNIX)) // SECONDS_PER_WEEK)
GPS_WEEK_10BIT = GPS_WEEK_FULL % WEEKS_PER_ROLLOVER
GPS_TOA_UNIX_S = gps_week_tow_to_unix_s(GPS_WEEK_FULL, GPS_TOA_S)

# TLE epochs of the other sets (UTC), all on the day before the campaign.
GALILEO_EPOCH_UTC = "2027-05-17T12:00:00Z"
BEIDOU_EPOCH_UTC = "2027-05-17T14:24:00Z"
GLONASS_EPOCH_UTC = "2027-05-17T19:12:00Z"

FILE_NAMES = {
    "gps_yuma": "demo_gps_yuma.txt",
    "gps_sem": "demo_gps_sem.txt",
    "gps_tle": "demo_gps.tle",
    "galileo_tle": "demo_galileo.tle",
    "beidou_tle": "demo_beidou.tle",
    "glonass_tle": "demo_glonass.tle",
    "glonass_mapping": "demo_glonass_mapping.txt",
    "scenario": "demo_scenario.toml",
    "drive_route": "demo_drive_route.csv",
    "drive_scenario": "demo_drive_scenario.toml",
    "readme": "README.md",
}

# ---------------------------------------------------------------------------------------
# Published nominal layouts

# GPS 24-slot constellation [pub: GPS SPS Performance Standard 2001, Table 3-1], epoch
# 1993-07-01 00:00 UTC: plane RAAN (deg) and arguments of latitude of slots 1-4 (deg).
GPS_SLOT_EPOCH_UTC = "1993-07-01T00:00:00Z"
GPS_PLANE_RAAN_DEG = {"A": 272.847, "B": 332.847, "C": 32.847, "D": 92.847, "E": 152.847, "F": 212.847}
GPS_SLOT_ARG_LAT_DEG = {
    "A": (268.126, 161.786, 11.676, 41.806),
    "B": (80.956, 173.336, 309.976, 204.376),
    "C": (111.876, 11.796, 339.666, 241.556),
    "D": (135.226, 265.446, 35.156, 167.356),
    "E": (197.046, 302.596, 66.066, 333.686),
    "F": (238.886, 345.226, 105.206, 135.346),
}
GPS_SEMI_MAJOR_AXIS_M = 26_559.7e3        # [pub: same table]
GPS_INCLINATION_DEG = 55.0                # [pub: same table]
# One node rate for every demo GPS satellite. About the J2 nodal regression at a = 26,559.7 km,
# i = 55 deg (-1.5 n J2 (Re/a)^2 cos i with J2 = 1.0826e-3 [mem]) [calc]; real almanacs
# carry -7.7e-9 to -8.2e-9 rad/s. Invented data only needs one consistent value.
GPS_NODE_RATE_RAD_S = -7.83e-9

GALILEO_SEMI_MAJOR_AXIS_M = 29_600.318e3  # [pub: Galileo OS SDD]
GALILEO_INCLINATION_DEG = 56.0
BEIDOU_SEMI_MAJOR_AXIS_M = 27_906.0e3     # [mem]
BEIDOU_INCLINATION_DEG = 55.0
GLONASS_SEMI_MAJOR_AXIS_M = 25_508.0e3    # [mem]
GLONASS_INCLINATION_DEG = 64.8

# Almanac quantisation steps [mem: IS-GPS-200 Table 20-VI]: the demo values are rounded to
# them so the YUMA and SEM files hold exactly what a broadcast almanac could hold.
_LSB_E = 2.0 ** -21
_LSB_DELTA_I_SC = 2.0 ** -19
_LSB_OMEGA_DOT_SC_S = 2.0 ** -38
_LSB_SQRT_A = 2.0 ** -11
_LSB_ANGLE_SC = 2.0 ** -23
_LSB_AF0_S = 2.0 ** -20
_LSB_AF1_S_S = 2.0 ** -38


# ---------------------------------------------------------------------------------------
# Data classes

@dataclass(frozen=True)
class DemoAlmanac:
    """One GPS almanac record in broadcast units (semicircles), as written to SEM."""

    prn: int
    svn: int
    plane: str
    slot: int
    health: int
    config: int
    ura_index: int
    eccentricity: float
    delta_i_sc: float           # inclination - 0.30 semicircles
    omega_dot_sc_s: float
    sqrt_a_m05: float
    omega0_sc: float
    arg_perigee_sc: float
    mean_anomaly_sc: float
    af0_s: float
    af1_s_s: float

    @property
    def inclination_rad(self) -> float:
        return (GPS_REFERENCE_INCLINATION_SC + self.delta_i_sc) * GPS_PI


@dataclass(frozen=True)
class DemoTle:
    """Mean elements of one invented satellite at its TLE epoch (TEME frame, as SGP4 reads them)."""

    sat_id: str                 # G07, E12, C23, R05
    name: str                   # TLE name line
    catalogue_number: int
    plane: str
    slot: int
    epoch_unix_s: float         # UTC POSIX seconds of the printed epoch
    inclination_deg: float
    raan_deg: float
    eccentricity: float
    arg_perigee_deg: float
    mean_anomaly_deg: float
    mean_motion_rev_day: float
    rev_number: int
    glonass_k: int | None = None


# ---------------------------------------------------------------------------------------
# Small helpers

class _Draw:
    """Deterministic invented values from random.Random(seed).random() only."""

    def __init__(self, seed: int):
        self._rng = random.Random(seed)

    def uniform(self, lo: float, hi: float) -> float:
        return lo + (hi - lo) * self._rng.random()

    def integer(self, lo: int, hi: int) -> int:
        """Whole number in lo..hi inclusive."""
        return lo + min(int(self._rng.random() * (hi - lo + 1)), hi - lo)

    def shuffled(self, items: Sequence) -> list:
        out = list(items)
        for i in range(len(out) - 1, 0, -1):
            j = min(int(self._rng.random() * (i + 1)), i)
            out[i], out[j] = out[j], out[i]
        return out


def _quantise(x: float, lsb: float) -> float:
    return round(x / lsb) * lsb


def _wrap_sc(x_sc: float) -> float:
    """Semicircles into [-1, 1)."""
    return (x_sc + 1.0) % 2.0 - 1.0


def _wrap_rad(x: float) -> float:
    """Radians into [-pi, pi)."""
    return (x + math.pi) % TWO_PI - math.pi


def gmst_rad(unix_s: float) -> float:
    """Greenwich mean sidereal angle (IAU-82, as SGP4's TEME uses), with UTC standing in for UT1.

    UT1 - UTC (< 0.9 s) is ignored on purpose: it would make the demo files depend on a
    changing Earth-orientation table, and for invented data it only turns the nodes by
    less than 7e-5 rad.
    """
    return float(gstime(unix_s / SECONDS_PER_DAY + UNIX_JD))


def tle_checksum(line: str) -> int:
    """TLE checksum of the first 68 columns: digits summed, '-' counts 1, modulo 10."""
    total = 0
    for ch in line[:68]:
        if ch.isdigit():
            total += int(ch)
        elif ch == "-":
            total += 1
    return total % 10


def _deg_field(angle_deg: float) -> str:
    """An angle as TLE writes it: 0 <= x < 360, 8 columns, 4 decimals."""
    x = round(angle_deg % 360.0, 4)
    if x >= 360.0:
        x -= 360.0
    return f"{x:8.4f}"


def _tle_epoch_field(unix_s: float) -> tuple[str, float]:
    """The TLE epoch text YYDDD.DDDDDDDD and the instant it exactly denotes."""
    d = from_unix_s(unix_s)
    year_start = datetime(d.year, 1, 1, tzinfo=UTC).timestamp()
    day = round((unix_s - year_start) / SECONDS_PER_DAY + 1.0, 8)
    return f"{d.year % 100:02d}{day:012.8f}", year_start + (day - 1.0) * SECONDS_PER_DAY


def tle_lines(t: DemoTle) -> tuple[str, str, str]:
    """The three lines (name, line 1, line 2) of one TLE, 69 columns with checksums."""
    epoch_text, _ = _tle_epoch_field(t.epoch_unix_s)
    ecc = round(t.eccentricity * 1e7)
    if not 0 <= ecc <= 9_999_999:
        raise ValueError(f"eccentricity {t.eccentricity} cannot be written in a TLE")
    l1 = (f"1 {t.catalogue_number:05d}U {'':8s} {epoch_text}  .00000000  00000-0 "
          f" 00000-0 0 {1:4d}")
    l2 = (f"2 {t.catalogue_number:05d} {_deg_field(t.inclination_deg)} {_deg_field(t.raan_deg)} "
          f"{ecc:07d} {_deg_field(t.arg_perigee_deg)} {_deg_field(t.mean_anomaly_deg)} "
          f"{t.mean_motion_rev_day:11.8f}{t.rev_number % 100_000:5d}")
    l1 += str(tle_checksum(l1))
    l2 += str(tle_checksum(l2))
    if len(l1) != 69 or len(l2) != 69:
        raise ValueError(f"TLE line length {len(l1)}/{len(l2)}, expected 69")
    return t.name, l1, l2


def _rev_per_day(a_m: float) -> float:
    return math.sqrt(WGS72_MU_M3_S2 / a_m ** 3) * SECONDS_PER_DAY / TWO_PI


# ---------------------------------------------------------------------------------------
# GPS

def gps_almanac() -> list[DemoAlmanac]:
    """The invented 24-satellite GPS almanac (PRN order), week GPS_WEEK_FULL, toa GPS_TOA_S."""
    draw = _Draw(DEMO_SEED + 1)
    slots = [(p, s) for p in GPS_PLANE_RAAN_DEG for s in range(1, 5)]
    prns = draw.shuffled(range(1, 25))
    dt_s = GPS_TOA_UNIX_S - parse_iso_utc(GPS_SLOT_EPOCH_UTC).timestamp()
    n_nominal = math.sqrt(GPS_MU_M3_S2 / GPS_SEMI_MAJOR_AXIS_M ** 3)
    gmst_toa = gmst_rad(GPS_TOA_UNIX_S)
    out = []
    for k, ((plane, slot), prn) in enumerate(zip(slots, prns)):
        raan_inertial = GPS_PLANE_RAAN_DEG[plane] * DEG + GPS_NODE_RATE_RAD_S * dt_s
        arg_lat = GPS_SLOT_ARG_LAT_DEG[plane][slot - 1] * DEG + n_nominal * dt_s
        ecc = draw.uniform(0.001, 0.01)
        argp = draw.uniform(-math.pi, math.pi)
        incl = (GPS_INCLINATION_DEG + draw.uniform(-0.3, 0.3)) * DEG
        a_m = GPS_SEMI_MAJOR_AXIS_M + draw.uniform(-500.0, 500.0)
        af0 = draw.uniform(-3e-4, 3e-4)
        af1 = draw.uniform(-1e-11, 1e-11)
        # The slot's argument of latitude is taken as the mean one: M = u - omega.
        mean_anom = arg_lat - argp
        # Longitude of the node at the start of the week, as IS-GPS-200 defines Omega0:
        # Omega(t) = Omega0 + (Omegadot - wE) tk - wE toa, equal to RAAN - GMST at toa.
        omega0 = raan_inertial - gmst_toa + EARTH_ROTATION_RAD_S * GPS_TOA_S
        out.append(DemoAlmanac(
            prn=prn, svn=201 + k, plane=plane, slot=slot, health=0, config=11, ura_index=0,
            eccentricity=_quantise(ecc, _LSB_E),
            delta_i_sc=_quantise(incl / GPS_PI - GPS_REFERENCE_INCLINATION_SC, _LSB_DELTA_I_SC),
            omega_dot_sc_s=_quantise(GPS_NODE_RATE_RAD_S / GPS_PI, _LSB_OMEGA_DOT_SC_S),
            sqrt_a_m05=_quantise(math.sqrt(a_m), _LSB_SQRT_A),
            omega0_sc=_quantise(_wrap_sc(omega0 / GPS_PI), _LSB_ANGLE_SC),
            arg_perigee_sc=_quantise(_wrap_sc(argp / GPS_PI), _LSB_ANGLE_SC),
            mean_anomaly_sc=_quantise(_wrap_sc(mean_anom / GPS_PI), _LSB_ANGLE_SC),
            af0_s=_quantise(af0, _LSB_AF0_S),
            af1_s_s=_quantise(af1, _LSB_AF1_S_S),
        ))
    return sorted(out, key=lambda r: r.prn)


def gps_tles(almanac: Sequence[DemoAlmanac] | None = None) -> list[DemoTle]:
    """The GPS almanac re-expressed as TLEs at the toa instant (catalogue 90001 + PRN - 1)."""
    alm = gps_almanac() if almanac is None else list(almanac)
    draw = _Draw(DEMO_SEED + 5)
    _, epoch = _tle_epoch_field(GPS_TOA_UNIX_S)
    tk = epoch - GPS_TOA_UNIX_S       # no leap second in between: GPS and UTC differences agree
    gmst_epoch = gmst_rad(epoch)
    out = []
    for r in alm:
        a_m = r.sqrt_a_m05 ** 2
        n = math.sqrt(GPS_MU_M3_S2 / a_m ** 3)
        omega_dot = r.omega_dot_sc_s * GPS_PI
        node_lon = r.omega0_sc * GPS_PI + (omega_dot - EARTH_ROTATION_RAD_S) * tk \
            - EARTH_ROTATION_RAD_S * GPS_TOA_S
        out.append(DemoTle(
            sat_id=f"G{r.prn:02d}", name=f"DEMO GPS {r.plane}{r.slot} (PRN {r.prn:02d})",
            catalogue_number=90_000 + r.prn, plane=r.plane, slot=r.slot, epoch_unix_s=epoch,
            inclination_deg=r.inclination_rad / DEG,
            raan_deg=(node_lon + gmst_epoch) / DEG,
            eccentricity=r.eccentricity,
            arg_perigee_deg=r.arg_perigee_sc * GPS_PI / DEG,
            mean_anomaly_deg=(r.mean_anomaly_sc * GPS_PI + n * tk) / DEG,
            mean_motion_rev_day=_rev_per_day(a_m),
            rev_number=draw.integer(1_000, 20_000),
        ))
    return out


# ---------------------------------------------------------------------------------------
# Walker-type constellations as TLE

def _walker(*, seed: int, epoch_utc: str, a_m: float, incl_deg: float, raan0_deg: float,
            arg_lat0_deg: float, slot_step_deg: float, ecc_range: tuple[float, float],
            ids: Sequence[str], names: Sequence[str], catalogue0: int,
            glonass_k: Sequence[int | None] | None = None) -> list[DemoTle]:
    """3 planes x 8 slots: planes 120 deg apart, slots slot_step_deg apart, 15 deg between planes."""
    draw = _Draw(seed)
    _, epoch = _tle_epoch_field(parse_iso_utc(epoch_utc).timestamp())
    out = []
    for p in range(3):
        for s in range(8):
            k = 8 * p + s
            ecc = draw.uniform(*ecc_range)
            argp = draw.uniform(0.0, 360.0)
            incl = incl_deg + draw.uniform(-0.1, 0.1)
            arg_lat = arg_lat0_deg + slot_step_deg * s + 15.0 * p
            out.append(DemoTle(
                sat_id=ids[k], name=names[k], catalogue_number=catalogue0 + k,
                plane="ABC"[p] if glonass_k is None else str(p + 1), slot=s + 1,
                epoch_unix_s=epoch, inclination_deg=incl, raan_deg=raan0_deg + 120.0 * p,
                eccentricity=ecc, arg_perigee_deg=argp, mean_anomaly_deg=arg_lat - argp,
                mean_motion_rev_day=_rev_per_day(a_m), rev_number=draw.integer(1_000, 20_000),
                glonass_k=None if glonass_k is None else glonass_k[k]))
    return out


def galileo_tles() -> list[DemoTle]:
    """Invented Galileo Walker 24/3/1; PRNs E01-E24 in shuffled order, catalogue 90201-90224."""
    prns = _Draw(DEMO_SEED + 2).shuffled(range(1, 25))
    slots = [f"{'ABC'[k // 8]}{k % 8 + 1}" for k in range(24)]
    return _walker(seed=DEMO_SEED + 12, epoch_utc=GALILEO_EPOCH_UTC, a_m=GALILEO_SEMI_MAJOR_AXIS_M,
                   incl_deg=GALILEO_INCLINATION_DEG, raan0_deg=17.3, arg_lat0_deg=8.4,
                   slot_step_deg=45.0, ecc_range=(0.0001, 0.0006),
                   ids=[f"E{p:02d}" for p in prns],
                   names=[f"DEMO GALILEO {s} (PRN E{p:02d})" for s, p in zip(slots, prns)],
                   catalogue0=90_201)


def beidou_tles() -> list[DemoTle]:
    """Invented BeiDou MEO Walker 24/3/1; PRNs C19-C42 shuffled, catalogue 90301-90324."""
    prns = _Draw(DEMO_SEED + 3).shuffled(range(19, 43))
    slots = [f"{'ABC'[k // 8]}{k % 8 + 1}" for k in range(24)]
    return _walker(seed=DEMO_SEED + 13, epoch_utc=BEIDOU_EPOCH_UTC, a_m=BEIDOU_SEMI_MAJOR_AXIS_M,
                   incl_deg=BEIDOU_INCLINATION_DEG, raan0_deg=84.6, arg_lat0_deg=31.0,
                   slot_step_deg=45.0, ecc_range=(0.0002, 0.0015),
                   ids=[f"C{p:02d}" for p in prns],
                   names=[f"DEMO BEIDOU {s} (C{p:02d})" for s, p in zip(slots, prns)],
                   catalogue0=90_301)


def glonass_tles() -> list[DemoTle]:
    """Invented GLONASS: slots R01-R24 (plane 1: 1-8, 2: 9-16, 3: 17-24), catalogue 90101-90124.

    Slot numbers run against the direction of motion within a plane [mem]; slots j and j+4
    of a plane are antipodal and share a channel number k from -7..+6 [mem: GLONASS ICD].
    """
    draw = _Draw(DEMO_SEED + 4)
    units = draw.shuffled(range(701, 725))
    pair_k = draw.shuffled(range(-7, 7))[:12]         # 12 antipodal pairs, 12 distinct k
    ks = [pair_k[4 * (k // 8) + (k % 8) % 4] for k in range(24)]
    return _walker(seed=DEMO_SEED + 14, epoch_utc=GLONASS_EPOCH_UTC, a_m=GLONASS_SEMI_MAJOR_AXIS_M,
                   incl_deg=GLONASS_INCLINATION_DEG, raan0_deg=251.2, arg_lat0_deg=140.0,
                   slot_step_deg=-45.0, ecc_range=(0.0003, 0.002),
                   ids=[f"R{k + 1:02d}" for k in range(24)],
                   names=[f"DEMO GLONASS UNIT {u}" for u in units],
                   catalogue0=90_101, glonass_k=ks)


# ---------------------------------------------------------------------------------------
# File texts

def _yuma_exp(x: float) -> str:
    """YUMA exponent form: sign column, 0.dddddddddd mantissa, signed 3-digit exponent."""
    sign = "-" if x < 0 else " "
    if x == 0:
        return f"{sign}0.0000000000E+000"
    s = f"{abs(x):.9E}"               # d.dddddddddE+xx: 10 significant digits
    digits = s[0] + s[2:11]
    exp = int(s[12:]) + 1
    return f"{sign}0.{digits}E{'-' if exp < 0 else '+'}{abs(exp):03d}"


def _yuma_fixed(x: float, decimals: int) -> str:
    text = f"{abs(x):.{decimals}f}"
    sign = "-" if x < 0 and text.strip("0.") else " "
    return sign + text


def yuma_text(almanac: Sequence[DemoAlmanac] | None = None) -> str:
    """The almanac in YUMA layout (labels and columns as in the public YUMA files)."""
    alm = gps_almanac() if almanac is None else almanac
    w = GPS_WEEK_10BIT
    lines: list[str] = []
    for r in alm:
        lines += [
            f"******** Week {w} almanac for PRN-{r.prn:02d} ********",
            "ID:".ljust(27) + f" {r.prn:02d}",
            "Health:".ljust(27) + f" {r.health:03d}",
            "Eccentricity:".ljust(27) + _yuma_exp(r.eccentricity),
            "Time of Applicability(s):".ljust(27) + f"{GPS_TOA_S:.4f}",
            "Orbital Inclination(rad):".ljust(27) + _yuma_fixed(r.inclination_rad, 10),
            "Rate of Right Ascen(r/s):".ljust(27) + _yuma_exp(r.omega_dot_sc_s * GPS_PI),
            "SQRT(A)  (m 1/2):".ljust(27) + _yuma_fixed(r.sqrt_a_m05, 6),
            "Right Ascen at Week(rad):".ljust(27) + _yuma_exp(r.omega0_sc * GPS_PI),
            "Argument of Perigee(rad):".ljust(27) + _yuma_fixed(r.arg_perigee_sc * GPS_PI, 9),
            "Mean Anom(rad):".ljust(27) + _yuma_exp(r.mean_anomaly_sc * GPS_PI),
            "Af0(s):".ljust(27) + _yuma_exp(r.af0_s),
            "Af1(s/s):".ljust(27) + _yuma_exp(r.af1_s_s),
            "week:".ljust(29) + f"{w}",
            "",
        ]
    return "\n".join(lines) + "\n"


def sem_text(almanac: Sequence[DemoAlmanac] | None = None) -> str:
    """The same almanac in SEM layout [pub: ICD-GPS-240 Table 30-III]; angles in semicircles."""
    alm = gps_almanac() if almanac is None else almanac

    def row(*xs: float) -> str:
        return " ".join(f"{x: .14E}" for x in xs)

    lines = [f"{len(alm)}  DEMO-INVENTED.ALM", f" {GPS_WEEK_10BIT} {int(GPS_TOA_S)}"]
    for r in alm:
        lines += [
            "",
            f"{r.prn}",
            f"{r.svn}",
            f"{r.ura_index}",
            row(r.eccentricity, r.delta_i_sc, r.omega_dot_sc_s),
            row(r.sqrt_a_m05, r.omega0_sc, r.arg_perigee_sc),
            row(r.mean_anomaly_sc, r.af0_s, r.af1_s_s),
            f"{r.health}",
            f"{r.config}",
        ]
    return "\n".join(lines) + "\n"


def tle_text(tles: Sequence[DemoTle]) -> str:
    """Three-line TLE text (name line, line 1, line 2 per satellite)."""
    return "".join("\n".join(tle_lines(t)) + "\n" for t in tles)


def glonass_mapping_text(tles: Sequence[DemoTle] | None = None) -> str:
    """Mapping file: '#' comments, then 'catalogue_number, sat_id, glonass_k' per line."""
    sats = glonass_tles() if tles is None else tles
    head = [
        "# GLONASS mapping for the acqplan demo TLE set (INVENTED satellites, not real ones).",
        "# TLE names carry no slot number; this file ties each catalogue number to a slot ID",
        "# and its frequency channel k (-7..+6; antipodal satellites share k).",
        "# catalogue_number, sat_id, glonass_k",
    ]
    body = [f"{t.catalogue_number}, {t.sat_id}, {t.glonass_k}" for t in sats]
    return "\n".join(head + body) + "\n"


def scenario_text() -> str:
    """The demo scenario (TOML, with comments)."""
    f = FILE_NAMES
    return f"""\
# acqplan demo scenario: INVENTED data (fictional site, date and satellites).
# Regenerate with: python scripts/generate_demo.py    Keys: docs/scenario-keys.md
#
# A morning drive test at the fictional {SITE_NAME}, Tuesday 18 May 2027,
# 06:00-08:00 local time (CEST, UTC+2). Safety: the driver only drives; a second person
# works the laptop. Follow traffic law and the site's rules.

name = "{SITE_NAME} drive test, 18 May 2027 (invented demo)"
format_version = 1

[orbits]
files = ["{f['gps_yuma']}", "{f['galileo_tle']}", "{f['beidou_tle']}", "{f['glonass_tle']}"]
mapping = "{f['glonass_mapping']}"

[site]
lat_deg = {SITE_LAT_DEG}
lon_deg = {SITE_LON_DEG}
height_m = {SITE_HEIGHT_M:g}                     # above the WGS-84 ellipsoid
horizontal_uncertainty_km = 30     # last known position: within 30 km
vertical_uncertainty_m = 200

[time]
start = "{CAMPAIGN_START_UTC}"
end = "{CAMPAIGN_END_UTC}"
step_s = 30
uncertainty_s = 2                  # coarse time from the laptop clock
timezone = "{SITE_TIMEZONE}"

[receiver]
signals = ["GPS-L1CA", "GAL-E1", "BDS-B1I", "GLO-L1OF"]
channels = 12
oscillator_offset_ppb = 0
oscillator_uncertainty_ppb = 500   # TCXO
max_horizontal_speed_m_s = 40
max_vertical_speed_m_s = 5
correlators_per_channel = 2
parallel_code_search = false

[search]
coherent_ms = 4                    # a whole Galileo E1 code period
noncoherent = 5
max_frequency_loss_db = 1.0
code_step_chips = 0.5
false_alarm_per_cell = 1e-4
false_alarm_penalty_s = 0.1
first_fix_satellites = 4
ephemeris_wait_s = 30
priority = "elevation"
monte_carlo_runs = 500
seed = 2027

# BeiDou B1I MEO signals carry a 20-chip secondary code of 1 ms chips: integrate 1 ms
# coherently and sum more blocks instead.
[search.per_signal.BDS-B1I]
coherent_ms = 1
noncoherent = 20

[signal]
cn0_zenith_dbhz = 45
cn0_at_mask_dbhz = 35
extra_loss_db = 2                  # car roof antenna, cable

[mask]
elevation_deg = 10
"""


# ---------------------------------------------------------------------------------------
# The invented drive: a loop around the proving ground (issue 8's demo)

# Loop centre 7 km south-east of the site; the road's distance from the centre swings
# with the heading angle theta (all invented): r = 8.6 km + 2.2 sin(3 theta) + 0.9 cos(5 theta).
DRIVE_CENTRE_OFFSET = (135.0, 7000.0)      # azimuth (deg) and distance (m) from the site
DRIVE_POINTS = 480
# Named places along the loop: theta (deg) -> name (all invented).
DRIVE_WAYPOINTS = {0.0: "Depot Hainvelde", 54.0: "Waldeck", 96.0: "Forsthaus Lindach",
                   150.0: "Altmarkt Kressing", 216.0: "Kressberg tunnel", 300.0: "Sennfeld crossing"}
DRIVE_DWELL_S = {"Altmarkt Kressing": 120.0}


def _drive_geometry():
    from geographiclib.geodesic import Geodesic

    g = Geodesic.WGS84
    c = g.Direct(SITE_LAT_DEG, SITE_LON_DEG, DRIVE_CENTRE_OFFSET[0], DRIVE_CENTRE_OFFSET[1])
    rows = []
    start = None
    for k in range(DRIVE_POINTS + 1):
        theta = 360.0 * k / DRIVE_POINTS
        th = math.radians(theta)
        r = 8600.0 + 2200.0 * math.sin(3 * th) + 900.0 * math.cos(5 * th)
        p = g.Direct(c["lat2"], c["lon2"], (theta + 315.0) % 360.0, r)
        h = SITE_HEIGHT_M + 40.0 * math.sin(2 * th) + 15.0 * math.cos(7 * th)
        name = DRIVE_WAYPOINTS.get(round(theta, 6), "")
        if k == DRIVE_POINTS:
            name = ""            # the loop closes on the depot's point
        rows.append((p["lat2"], p["lon2"], h, name))
        if start is None:
            start = p
    dist = [0.0]
    for a, b in zip(rows, rows[1:]):
        dist.append(dist[-1] + g.Inverse(a[0], a[1], b[0], b[1], Geodesic.DISTANCE)["s12"])
    return rows, dist


def drive_route_text() -> str:
    """The invented loop as a route CSV without times (timed from the planned speeds)."""
    rows, _ = _drive_geometry()
    lines = ["# acqplan demo route: INVENTED loop around the fictional Hainvelde Proving Ground.",
             "# No times: the scenario times it from planned speeds. Columns: docs/scenario-keys.md",
             "time_utc,lat_deg,lon_deg,height_m,name"]
    for lat, lon, h, name in rows:
        lines.append(f",{lat:.7f},{lon:.7f},{h:.1f},{name}")
    return "\n".join(lines) + "\n"


def _drive_km(theta_deg: float) -> float:
    _, dist = _drive_geometry()
    return round(dist[int(round(theta_deg / 360.0 * DRIVE_POINTS))] / 1000.0, 3)


def drive_scenario_text() -> str:
    """The demo drive scenario: the demo scenario's receiver on the invented loop."""
    f = FILE_NAMES
    base = scenario_text()
    head, body = base.split("[orbits]", 1)
    rows, dist = _drive_geometry()
    length_km = dist[-1] / 1000.0
    canyon = (_drive_km(141.0), _drive_km(159.0))
    tunnel = (_drive_km(216.0), _drive_km(216.0) + 1.4)
    return f"""\
# acqplan demo DRIVE scenario: INVENTED data (fictional site, route, date, satellites).
# Regenerate with: python scripts/generate_demo.py    Keys: docs/scenario-keys.md
#
# The demo receiver driven once round the invented {length_km:.1f} km loop around the
# {SITE_NAME}: a forest road, the street canyon of an invented market town, a tunnel.
# Safety: the driver only drives; a second person works the laptop. Follow traffic law,
# the site's rules and local rules on radio equipment.

name = "{SITE_NAME} loop drive, 18 May 2027 (invented demo)"
format_version = 1

[orbits]{body}
[route]
file = "{f['drive_route']}"
speed_kmh = 60                     # planned speed where no stretch sets one
slip_min = 3                       # up to 3 minutes early or late on the timetable
speed_uncertainty_kmh = 10
heading_uncertainty_deg = 15
event_horizon_min = 20             # each event planned over 20 minutes from its time
outage_drift_ppb_per_s = 0.2

[route.dwell_s]
"Altmarkt Kressing" = {DRIVE_DWELL_S['Altmarkt Kressing']:g}    # stop in the market square

[[route.stretch]]
kind = "trees"
from = "Waldeck"
to = "Forsthaus Lindach"
name = "Lindach forest road"
extra_loss_db = 8
speed_kmh = 50

[[route.stretch]]
kind = "canyon"
from = {canyon[0]}
to = {canyon[1]}
name = "Kressing old town"
building_height_m = 16
street_width_m = 12
speed_kmh = 30

[[route.stretch]]
kind = "outage"
from = {tunnel[0]:.3f}
to = {tunnel[1]:.3f}
name = "Kressberg tunnel"
speed_kmh = 70

[[event]]
kind = "cold"
at = "Depot Hainvelde"
name = "cold start at the depot"

[[event]]
kind = "warm"
at = 12.0
name = "warm start on the ring road"

[[event]]
kind = "hot"
at = "Altmarkt Kressing"
name = "hot start in the market square"

[[event]]
kind = "hot"
at = "Sennfeld crossing"
name = "hot start at the crossing"

[[event]]
kind = "warm"
at = "2027-05-18T05:30:00Z"
name = "warm start back at the depot"
"""


def readme_text() -> str:
    f = FILE_NAMES
    return f"""\
# Demo data (INVENTED)

Everything in this folder is **invented** for demonstrations and tests of acqplan. The
site, the date and every satellite are made up. Do not use these files for navigation
or for planning real work.

## The fictional scenario

A morning drive test at the **{SITE_NAME}** (a fictional test track at
{SITE_LAT_DEG} N, {SITE_LON_DEG} E, {SITE_HEIGHT_M:g} m above the WGS-84 ellipsoid, time zone
{SITE_TIMEZONE}) on Tuesday 18 May 2027, 06:00-08:00 local time
({CAMPAIGN_START_UTC} to {CAMPAIGN_END_UTC}). A receiver with 12 channels and a TCXO
(+-500 ppb) searches GPS L1 C/A, Galileo E1, BeiDou B1I and GLONASS L1OF at up to 40 m/s.
See `{f['scenario']}`.

Safety: in a drive test the driver only drives and a second person works the laptop.
Follow traffic law and the rules of the test site.

## Files

| file | contents |
|---|---|
| `{f['gps_yuma']}` | GPS almanac, YUMA layout: 24 satellites, week {GPS_WEEK_10BIT} (10-bit; full week {GPS_WEEK_FULL}), toa {GPS_TOA_S:.0f} s |
| `{f['gps_sem']}` | the same almanac in SEM layout (angles in semicircles) |
| `{f['gps_tle']}` | the same 24 GPS orbits as TLEs, epoch = the almanac's toa (catalogue 90001-90024) |
| `{f['galileo_tle']}` | Galileo, Walker 24/3/1, a = 29,600.318 km, i = 56 deg (90201-90224) |
| `{f['beidou_tle']}` | BeiDou MEO, Walker 24/3/1, a = 27,906 km, i = 55 deg (90301-90324) |
| `{f['glonass_tle']}` | GLONASS, 3 planes x 8, a = 25,508 km, i = 64.8 deg (90101-90124); names carry no slot |
| `{f['glonass_mapping']}` | catalogue number, slot ID and channel k of each GLONASS TLE |
| `{f['scenario']}` | the demo scenario |
| `{f['drive_route']}` | an invented loop around the proving ground (route CSV, no times, named waypoints) |
| `{f['drive_scenario']}` | the demo receiver driven round the loop: forest, street canyon, tunnel, five events and a re-acquisition after the tunnel |

## How the orbits were made

- GPS: the 24 slots of the GPS SPS Performance Standard (2001), Table 3-1 (epoch
  1993-07-01 00:00 UTC), carried to the toa with a two-body mean motion and one nominal node
  rate, plus small invented eccentricities (0.001-0.01), inclination offsets, semi-major-axis
  offsets and clock terms, rounded to the broadcast almanac resolution. PRNs are assigned to
  slots at random. All satellites are healthy.
- Galileo, BeiDou, GLONASS: nominal Walker-type layouts with invented plane nodes, phases,
  small eccentricities and arguments of perigee. GLONASS antipodal satellites share a
  channel number, as in the real system.
- TLE mean motions come from the semi-major axis with the WGS-72 mu; SGP4 treats them as
  Kozai mean elements, so SGP4 orbits differ from the nominal ones by kilometres. bstar = 0.
- Catalogue numbers 90001-90324 are invented, far above those of the real GNSS
  satellites, so the two are not confused.

## Regenerate

    python scripts/generate_demo.py            # rewrites this folder
    python scripts/generate_demo.py --check    # only compares

The generator (`core/files/demo.py`) is deterministic: a fixed seed gives byte-identical files,
and a test checks that the files here equal a fresh regeneration. `acqplan demo DIR`
writes the same files into DIR.
"""


def demo_files() -> dict[str, str]:
    """Every demo file: name -> text."""
    alm = gps_almanac()
    glo = glonass_tles()
    f = FILE_NAMES
    return {
        f["gps_yuma"]: yuma_text(alm),
        f["gps_sem"]: sem_text(alm),
        f["gps_tle"]: tle_text(gps_tles(alm)),
        f["galileo_tle"]: tle_text(galileo_tles()),
        f["beidou_tle"]: tle_text(beidou_tles()),
        f["glonass_tle"]: tle_text(glo),
        f["glonass_mapping"]: glonass_mapping_text(glo),
        f["scenario"]: scenario_text(),
        f["drive_route"]: drive_route_text(),
        f["drive_scenario"]: drive_scenario_text(),
        f["readme"]: readme_text(),
    }


def write_demo(directory: str | Path, *, force: bool = False) -> Path:
    """Write the demo scenario and its orbit files into ``directory``; return the scenario path.

    Files are written as UTF-8 with LF line ends (byte-identical on every platform), all
    or nothing (:func:`core.files.atomic.write_set_atomic`). A file already there with the
    same bytes is left alone; one that differs (the user edited the demo) is overwritten
    only with ``force``: otherwise an :class:`InputError` names the files and nothing is
    written.
    """
    out = Path(directory)
    if out.exists() and not out.is_dir():
        raise InputError("not a folder", file=str(out))
    wanted = {out / name: text.encode("utf-8") for name, text in demo_files().items()}
    changed = [p for p, data in wanted.items() if _differs(p, data)]
    if not force:
        edited = [p for p in changed if p.exists() or p.is_symlink()]
        if edited:
            names = ", ".join(p.name for p in edited)
            raise InputError(f"{names} differ from the demo (edited?); nothing was written. "
                             "Use --force to overwrite them, or choose another folder",
                             file=str(out))
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as err:
        raise InputError(f"cannot create the folder: {err.strerror or err}", file=str(out)) from None
    if changed:
        write_set_atomic([(p, wanted[p]) for p in changed], what="write the demo")
    return out / FILE_NAMES["scenario"]


def _differs(path: Path, data: bytes) -> bool:
    try:
        return path.read_bytes() != data
    except OSError:
        return True


__all__ = [
    "CAMPAIGN_END_UTC", "CAMPAIGN_START_UTC", "DEMO_SEED", "DemoAlmanac", "DemoTle",
    "FILE_NAMES", "GPS_TOA_S", "GPS_TOA_UNIX_S", "GPS_WEEK_10BIT", "GPS_WEEK_FULL",
    "SITE_HEIGHT_M", "SITE_LAT_DEG", "SITE_LON_DEG", "SITE_NAME", "SITE_TIMEZONE",
    "beidou_tles", "demo_files", "galileo_tles", "glonass_mapping_text", "glonass_tles",
    "gmst_rad", "gps_almanac", "gps_tles", "readme_text", "scenario_text", "sem_text",
    "tle_checksum", "tle_lines", "tle_text", "write_demo", "yuma_text",
]

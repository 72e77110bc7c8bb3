"""Physical and system constants used across acqplan.

Every number here names its source. [pub] = read in the named public document,
[mem] = recalled from the named standard, [calc] = derived from other values here.
"""

from __future__ import annotations

import math

# Speed of light in vacuum, m/s [pub: SI definition, also IS-GPS-200 Table 20-IV].
SPEED_OF_LIGHT_M_S = 299_792_458.0

# WGS-84 ellipsoid [pub: NIMA TR8350.2, Table 3.1].
WGS84_A_M = 6_378_137.0
WGS84_F = 1.0 / 298.257223563
WGS84_B_M = WGS84_A_M * (1.0 - WGS84_F)
WGS84_E2 = WGS84_F * (2.0 - WGS84_F)

# GPS ICD constants [pub: IS-GPS-200 Table 20-IV / IS-GPS-800 Table 3.5-2].
GPS_MU_M3_S2 = 3.986005e14
EARTH_ROTATION_RAD_S = 7.2921151467e-5
GPS_PI = 3.1415926535898          # the ICD's own value of pi, used for semicircles
GPS_REFERENCE_INCLINATION_SC = 0.30   # SEM delta-i reference, semicircles [pub: ICD-GPS-240]
QZSS_REFERENCE_INCLINATION_SC = 0.25  # QZSS almanac reference [pub: IS-QZSS-PNT]

# Second zonal harmonic of the Earth's gravity field, J2 = -sqrt(5) C20 with the normalized
# C20 = -484.16685e-6 [mem: NIMA TR8350.2 (WGS-84), Table 3.1; calc]. Used only for the
# plausible range of a nodal rate (core.orbits.plausibility).
EARTH_J2 = 1.08263e-3

# Earth gravitational parameter used for the two-body acceleration of TLE orbits
# (WGS-72, as SGP4 itself uses) [pub: AIAA 2006-6753, Table 1].
WGS72_MU_M3_S2 = 3.986008e14

# Time scales.
SECONDS_PER_DAY = 86_400.0
SECONDS_PER_WEEK = 604_800.0
HALF_WEEK_S = 302_400.0
WEEKS_PER_ROLLOVER = 1024

# Orbit data age. An almanac's time of applicability lies a few days after its upload (about
# 70 h for GPS [mem: IS-GPS-200 20.3.4.5]) and files are published ahead of it, so data may
# be used up to ALMANAC_LEAD_DAYS before its epoch [trade]; a 10-bit week is placed in the
# era that puts its epoch no later than the planned start plus this lead.
ALMANAC_LEAD_DAYS = 14.0
# Data older than this (or further ahead than the lead) is refused unless the user asks for
# it (--allow-old-data, orbits.allow_old_data): about four times the largest age the default
# orbit margin was fitted on (31.6 days, docs/orbit-margin.md); beyond it the margin is a
# guess [calc].
MAX_DATA_AGE_DAYS = 120.0
UNIX_JD = 2_440_587.5                # Julian date of 1970-01-01T00:00 UTC
GPS_EPOCH_UNIX_S = 315_964_800.0     # 1980-01-06T00:00:00 UTC as POSIX seconds

# GPS - UTC in whole seconds, in force from the given UTC instant (POSIX seconds)
# [pub: IERS Bulletin C leap-second list; GPS = TAI - 19 s].
GPS_UTC_LEAP_TABLE: tuple[tuple[float, int], ...] = (
    (315_964_800.0, 0),    # 1980-01-06
    (362_793_600.0, 1),    # 1981-07-01
    (394_329_600.0, 2),    # 1982-07-01
    (425_865_600.0, 3),    # 1983-07-01
    (489_024_000.0, 4),    # 1985-07-01
    (567_993_600.0, 5),    # 1988-01-01
    (631_152_000.0, 6),    # 1990-01-01
    (662_688_000.0, 7),    # 1991-01-01
    (709_948_800.0, 8),    # 1992-07-01
    (741_484_800.0, 9),    # 1993-07-01
    (773_020_800.0, 10),   # 1994-07-01
    (820_454_400.0, 11),   # 1996-01-01
    (867_715_200.0, 12),   # 1997-07-01
    (915_148_800.0, 13),   # 1999-01-01
    (1_136_073_600.0, 14),  # 2006-01-01
    (1_230_768_000.0, 15),  # 2009-01-01
    (1_341_100_800.0, 16),  # 2012-07-01
    (1_435_708_800.0, 17),  # 2015-07-01
    (1_483_228_800.0, 18),  # 2017-01-01
)

TWO_PI = 2.0 * math.pi
DEG = math.pi / 180.0

# Broadcast-ephemeris constants of the other systems.
# Galileo [mem: Galileo OS SIS ICD issue 2.0, sec. 5.1.1 / Table 57 (GTRF, mu, Earth rate)].
GALILEO_MU_M3_S2 = 3.986004418e14
GALILEO_EARTH_ROTATION_RAD_S = 7.2921151467e-5
# BeiDou, CGCS2000 [mem: BDS-SIS-ICD-B1I 3.0, sec. 3.2 and 5.2.4.12].
BEIDOU_MU_M3_S2 = 3.986004418e14
BEIDOU_EARTH_ROTATION_RAD_S = 7.2921150e-5
# BeiDou GEO satellites are propagated in a frame tilted by -5 deg about X
# [mem: BDS-SIS-ICD-B1I 3.0, Table 5-11 (GEO user algorithm)].
BEIDOU_GEO_TILT_RAD = -5.0 * math.pi / 180.0
# BDT = GPST - 14 s (BDT started 2006-01-01 00:00:00 UTC, when GPST - UTC was 14 s)
# [mem: BDS-SIS-ICD-B1I 3.0, sec. 3.1].
BDT_MINUS_GPST_S = -14.0
# QZSS uses the GPS values [pub: IS-QZSS-PNT, sec. 5.6 (same user algorithm as IS-GPS-200)].
# GLONASS, PZ-90.11 [mem: GLONASS ICD edition 5.1 (2008), Appendix A.3.1.2 and sec. 3.1.3].
GLONASS_MU_M3_S2 = 3.986004418e14
GLONASS_EARTH_RADIUS_M = 6_378_136.0
GLONASS_J2 = 1.08262575e-3
GLONASS_EARTH_ROTATION_RAD_S = 7.292115e-5

# --- Resource limits ----------------------------------------------------------------------
# Every command keeps its memory within about 1 GB whatever the window [calc: peak resident
# set measured with resource.getrusage on the demo, benchmarks/bench_predict.py and
# bench_plan.py]: predict works in blocks (57 bytes a satellite-sample of results); the
# plan holds about 580 bytes a satellite-step and its JSON about 700 more, so make_plan
# refuses above PLAN_MAX_SATELLITE_STEPS (96 satellites: 24 h at 12 s, 2 h at 1 s) and
# `acqplan plan` then plans block by block (core.plan.long_window: 7 days at 1 s, 414 MB); the
# doppler listing holds about 2.1 kB a listed sample until it is written (JSON, every
# elevation: 4.1 GB for 1.9 M samples), so it is refused above DOPPLER_MAX_SATELLITE_STEPS
# (24 satellites: 4.6 h at 1 s, a day at 5 s); passes works in blocks and keeps only the
# passes, so it is limited by window length and by computing time.
PLAN_MAX_SATELLITE_STEPS = 700_000
DOPPLER_MAX_SATELLITE_STEPS = 400_000
# Above it, a CSV or JSON listing is written as it is made (memory bounded; a week at 1 s for
# 96 satellites is 58 million satellite-steps, several GB of text).
DOPPLER_STREAM_MAX_SATELLITE_STEPS = 100_000_000
PASSES_MAX_WINDOW_DAYS = 366.0
PASSES_MAX_SATELLITE_STEPS = 100_000_000

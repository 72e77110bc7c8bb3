"""Physical plausibility of orbit records, per system, before they reach a plan.

A record that parses cleanly can still describe no real satellite: two values swapped
(a right ascension of 2 rad read as a rate of 2 rad/s), a sqrt(A) of 1e30, an
eccentricity of 0.9999999999. Such a record propagates into Doppler values of megahertz
or NaN that look like numbers. Every reader passes each record through
:func:`check_elements` before it builds an entry; :class:`RecordScreen` turns a finding
into the reader's policy (``strict``: stop with one line naming file, record and field;
otherwise drop the record with a warning).

API (for every reader, YUMA, SEM, TLE, RINEX navigation):

* ``check_elements(system, values, kind=...) -> list[Finding]``. ``system`` is the
  one-letter system (G R E C J I S; anything else is "unknown" and gets only the limits
  of any Earth orbit). ``values`` maps quantity names (below) to numbers in SI units;
  give the ones the record holds. ``kind`` is ``"almanac"`` (adds the GPS/QZSS almanac
  field ranges of IS-GPS-200), ``"ephemeris"`` (adds the broadcast-ephemeris field ranges)
  or ``"tle"``.
* ``RecordScreen(source, strict).keep(system, values, names, record=..., line=..., kind=...)``
  returns True for a plausible record; otherwise raises :class:`OrbitFormatError`
  (strict) or records a warning in ``screen.warnings`` and returns False.

Quantity names (SI; a reader converts its own units first):

====================== ==================================================================
``semi_major_axis_m``  a, m (``sqrt_a_m05`` is accepted and squared)
``eccentricity``       e
``inclination_rad``    full inclination
``node_rate_rad_s``    rate of right ascension (Omega dot)
``inclination_rate_rad_s``   IDOT (ephemeris)
``mean_motion_delta_rad_s``  delta n (ephemeris)
``mean_motion_rev_day``      TLE mean motion
``bstar_per_earth_radius``   TLE B* drag term
``angle_rad``          any orbit angle (Omega0, omega, M0), must be within two turns
``clock_bias_s``, ``clock_drift_s_s``   af0, af1 (or tau_n, gamma_n)
``radius_m``           geocentric distance of a state vector (GLONASS, SP3)
``speed_m_s``          Earth-fixed speed of a state vector
====================== ==================================================================

Limits carry their source: [pub] a published document, [mem] recalled from the named
interface document, [calc] derived here from those values and orbital mechanics.
:func:`shell_of` gives each system's orbit shell, which the result guard
(:mod:`core.sky.result_guard`) also uses.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field

from ..ground.constants import EARTH_J2, EARTH_ROTATION_RAD_S, GPS_MU_M3_S2, GPS_PI, WGS84_A_M
from ..ground.errors import OrbitFormatError

_KM = 1000.0
_SC = GPS_PI                       # one semicircle in rad [pub: IS-GPS-200 pi]


@dataclass(frozen=True)
class Shell:
    """Where the satellites of one system can orbit (one or more semi-major-axis bands)."""

    system: str
    name: str
    a_bands_m: tuple[tuple[float, float], ...]
    e_max: float
    inclination_deg: tuple[float, float]
    source: str

    @property
    def a_min_m(self) -> float:
        return min(lo for lo, _ in self.a_bands_m)

    @property
    def a_max_m(self) -> float:
        return max(hi for _, hi in self.a_bands_m)

    @property
    def radius_min_m(self) -> float:
        """Smallest geocentric distance an orbit of the shell reaches (perigee)."""
        return self.a_min_m * (1.0 - self.e_max)

    @property
    def radius_max_m(self) -> float:
        return self.a_max_m * (1.0 + self.e_max)

    def max_earth_fixed_speed_m_s(self, radius_m: float) -> float:
        """Largest Earth-fixed speed at ``radius_m`` of any orbit of the shell [calc]:
        vis-viva v^2 = mu (2/r - 1/a) is largest for the largest a; the Earth-fixed
        velocity adds at most omega_E r."""
        r = max(radius_m, self.radius_min_m)
        v2 = GPS_MU_M3_S2 * (2.0 / r - 1.0 / self.a_max_m)
        return math.sqrt(max(v2, 0.0)) + EARTH_ROTATION_RAD_S * radius_m


def _geo_band(half_width_m: float) -> tuple[float, float]:
    return (_GEO_A_M - half_width_m, _GEO_A_M + half_width_m)


# Geosynchronous radius: a = (mu / omega_E^2)^(1/3) = 42,164 km [calc].
_GEO_A_M = (GPS_MU_M3_S2 / EARTH_ROTATION_RAD_S ** 2) ** (1.0 / 3.0)
# GLONASS semi-major axis band from the almanac's draconic-period field: T = 43200 s +
# Delta T, |Delta T| <= 3.6e3 s [mem: GLONASS ICD edition 5.1, Table 4.3]; a from Kepler's
# third law, T = 39,600 s -> 25,110 km, 46,800 s -> 28,050 km [calc].
_GLO_A_M = tuple((GPS_MU_M3_S2 * (t / (2.0 * math.pi)) ** 2) ** (1.0 / 3.0)
                 for t in (43_200.0 - 3_600.0, 43_200.0 + 3_600.0))

SHELLS: dict[str, Shell] = {
    # a = 26,559.7 km nominal [pub: GPS SPS Performance Standard 2001, Table 3-1, via
    # domain-notes 8]; working satellites stay within 1,000 km of it, retired ones are raised
    # to disposal orbits up to 2,000 km above it (real 2012 TLE sets: up to 28,000 km) [calc].
    # e < 0.03125 and i = 0.30 +- 0.0625 semicircles: the almanac field ranges (16-bit e at
    # 2^-21, 16-bit signed delta-i at 2^-19 sc) [mem: IS-GPS-200 Table 20-VI; calc].
    "G": Shell("G", "GPS", ((25_500 * _KM, 28_600 * _KM),), 0.03125, (42.75, 65.25),
               "GPS: a 26,560 km nominal [pub: GPS SPS PS 2001]; e, i from the almanac field "
               "ranges [mem: IS-GPS-200 Table 20-VI]"),
    # GLONASS: a band from the almanac draconic period (above); e <= 0.03 and
    # i = 63 deg +- 0.067 semicircles [mem: GLONASS ICD edition 5.1, Table 4.3].
    "R": Shell("R", "GLONASS", (_GLO_A_M,), 0.03, (63.0 - 0.067 * 180.0, 63.0 + 0.067 * 180.0),
               "GLONASS: almanac period, e and i ranges [mem: GLONASS ICD ed. 5.1, Table 4.3]"),
    # Galileo: a = 29,600.318 km, i = 56 deg [pub: Galileo OS SDD via domain-notes 8]; the two
    # satellites left in eccentric orbits (E14, E18) have a = 27,977 km, e = 0.166 (real 2020
    # TLE set) [calc]: band 27,000-30,600 km, e < 0.2, i 45-65 deg.
    "E": Shell("E", "Galileo", ((27_000 * _KM, 30_600 * _KM),), 0.2, (45.0, 65.0),
               "Galileo: a 29,600 km, i 56 deg [pub: Galileo OS SDD]; eccentric E14/E18 included"),
    # BeiDou: MEO a = 27,906.1 km, IGSO/GEO a = 42,162.2 km [mem: BDS-SIS-ICD B1C, A_ref];
    # e < 0.0625: almanac field, 17 bits at 2^-21 [mem: BDS-SIS-ICD B1I 5.2.4.15; calc].
    "C": Shell("C", "BeiDou", ((26_900 * _KM, 28_900 * _KM), _geo_band(1_000 * _KM)), 0.0625,
               (0.0, 65.0), "BeiDou: MEO 27,906 km and IGSO/GEO 42,162 km [mem: BDS-SIS-ICD]"),
    # QZSS: geosynchronous (QZO and GEO) [mem: IS-QZSS-PNT A_ref 42,164.2 km]; QZO e = 0.075
    # nominal, real almanacs 0.0754 [calc: real 2019 file] -> e < 0.1; i 0-50 deg.
    "J": Shell("J", "QZSS", (_geo_band(1_000 * _KM),), 0.1, (0.0, 50.0),
               "QZSS: geosynchronous QZO/GEO [mem: IS-QZSS-PNT]"),
    # NavIC: GEO and IGSO (i about 29 deg) [mem: IRNSS SIS ICD for SPS 1.1].
    "I": Shell("I", "NavIC", (_geo_band(1_000 * _KM),), 0.05, (0.0, 40.0),
               "NavIC: geosynchronous GEO/IGSO [mem: IRNSS SIS ICD 1.1]"),
    # SBAS: geostationary; old GEOs drift to about 15 deg inclination (real 2012 set: 10.2)
    # [calc].
    "S": Shell("S", "SBAS", (_geo_band(1_000 * _KM),), 0.05, (0.0, 16.0),
               "SBAS: geostationary [calc]"),
}
# Any Earth orbit: a above the Earth's equatorial radius, inside the Moon's distance, bound
# (e < 1) [calc]. Used for satellites of unknown system (SGP4 checks the perigee itself).
ANY_EARTH_ORBIT = Shell("X", "Earth-orbiting", ((WGS84_A_M, 400_000 * _KM),), 0.999,
                        (0.0, 180.0), "any bound Earth orbit [calc]")


def shell_of(system: str) -> Shell:
    """The orbit shell of a system letter (unknown systems: any Earth orbit)."""
    return SHELLS.get(system, ANY_EARTH_ORBIT)


def _node_rate_limit_rad_s(shell: Shell) -> float:
    """Largest plausible |Omega dot| [calc]: three times the J2 nodal regression
    1.5 n J2 (Re / p)^2 |cos i| at the shell's smallest a and largest e (up to 0.2) with
    cos i = 1,
    plus 1e-8 rad/s for the lunisolar precession of geosynchronous orbit planes (period
    about 53 years, 3.8e-9 rad/s)."""
    a = shell.a_min_m
    n = math.sqrt(GPS_MU_M3_S2 / a ** 3)
    p = a * (1.0 - min(shell.e_max, 0.2) ** 2)
    return 3.0 * 1.5 * n * EARTH_J2 * (WGS84_A_M / p) ** 2 + 1e-8


def _rev_day(a_m: float) -> float:
    return math.sqrt(GPS_MU_M3_S2 / a_m ** 3) * 86_400.0 / (2.0 * math.pi)


@dataclass(frozen=True)
class Limit:
    """The plausible range of one orbit element, its unit and the source of the bounds."""

    low: float
    high: float
    unit: str
    source: str


@dataclass(frozen=True)
class Finding:
    """One value outside its plausible range."""

    quantity: str
    value: float
    limit: Limit
    system_name: str

    @property
    def what(self) -> str:
        q, _, label = self.quantity.partition(":")
        return label or _WHAT.get(q, q)

    def describe(self) -> str:
        lim = self.limit
        unit = f" {lim.unit}" if lim.unit else ""
        if not math.isfinite(self.value):
            return f"{self.what} {self.value} is not a finite number"
        return (f"{self.what} {self.value:.10g}{unit} is outside the plausible range "
                f"{lim.low:.6g} to {lim.high:.6g}{unit} for a {self.system_name} satellite")


_WHAT = {
    "semi_major_axis_m": "semi-major axis", "sqrt_a_m05": "sqrt(A)",
    "eccentricity": "eccentricity", "inclination_rad": "inclination",
    "node_rate_rad_s": "rate of right ascension", "inclination_rate_rad_s": "inclination rate",
    "mean_motion_delta_rad_s": "mean motion difference", "mean_motion_rev_day": "mean motion",
    "bstar_per_earth_radius": "B* drag term", "angle_rad": "angle",
    "clock_bias_s": "clock bias", "clock_drift_s_s": "clock drift",
    "radius_m": "distance from the Earth's centre", "speed_m_s": "Earth-fixed speed",
}


def limits_for(system: str, kind: str = "any") -> dict[str, Limit]:
    """Every limit that applies to a record of ``system`` and ``kind`` (see module doc)."""
    sh = shell_of(system)
    src = sh.source
    lim: dict[str, Limit] = {
        "semi_major_axis_m": Limit(sh.a_min_m, sh.a_max_m, "m", src),
        "eccentricity": Limit(0.0, sh.e_max, "", src),
        "inclination_rad": Limit(math.radians(sh.inclination_deg[0]),
                                 math.radians(sh.inclination_deg[1]), "rad", src),
        "node_rate_rad_s": Limit(-_node_rate_limit_rad_s(sh), _node_rate_limit_rad_s(sh), "rad/s",
                                 "J2 nodal regression of the shell x3 plus lunisolar [calc]"),
        # An angle beyond two turns comes from no real file [calc].
        "angle_rad": Limit(-4.0 * math.pi, 4.0 * math.pi, "rad", "two turns [calc]"),
        "mean_motion_rev_day": Limit(_rev_day(sh.a_max_m), _rev_day(sh.a_min_m), "rev/day",
                                     f"{src}; Kepler's third law [calc]"),
        "radius_m": Limit(sh.radius_min_m, sh.radius_max_m, "m", f"{src}; perigee/apogee [calc]"),
        # Any broadcast clock: |af0| below 0.0625 s (Galileo 31 bits x 2^-34, the widest)
        # [mem: Galileo OS SIS ICD Table 60; calc]; drift below 1e-8 s/s [calc: 100x GPS].
        "clock_bias_s": Limit(-0.0625, 0.0625, "s", "widest ICD clock field [mem: Galileo OS SIS ICD]"),
        "clock_drift_s_s": Limit(-1e-8, 1e-8, "s/s", "100x the GPS almanac range [calc]"),
    }
    if system in SHELLS:
        # Above 19,000 km altitude drag is negligible: real GNSS sets carry |B*| <= 1e-4
        # (the files in orbit-data); 100x that [calc].
        lim["bstar_per_earth_radius"] = Limit(-0.01, 0.01, "1/earth radii",
                                              "drag-free GNSS altitude, 100x real sets [calc]")
    else:
        # Low orbits: the SGP4 verification set reaches 0.135 [pub: SGP4-VER.TLE] [calc: x7].
        lim["bstar_per_earth_radius"] = Limit(-1.0, 1.0, "1/earth radii", "SGP4-VER.TLE x7 [calc]")
    if kind == "almanac" and system in ("G", "J"):
        # IS-GPS-200 Table 20-VI almanac fields, range = 2^(bits-1) x scale for signed
        # fields [mem: IS-GPS-200 Table 20-VI; calc]: Omega dot 16 bits x 2^-38 sc/s,
        # af0 11 bits x 2^-20 s, af1 11 bits x 2^-38 s/s, sqrt(A) 24 bits x 2^-11 (unsigned).
        icd = "IS-GPS-200 Table 20-VI almanac field range [mem; calc]"
        od = 2.0 ** 15 * 2.0 ** -38 * _SC
        lim["node_rate_rad_s"] = Limit(max(-od, lim["node_rate_rad_s"].low),
                                       min(od, lim["node_rate_rad_s"].high), "rad/s",
                                       lim["node_rate_rad_s"].source)
        lim["clock_bias_s"] = Limit(-2.0 ** 10 * 2.0 ** -20, 2.0 ** 10 * 2.0 ** -20, "s", icd)
        lim["clock_drift_s_s"] = Limit(-2.0 ** 10 * 2.0 ** -38, 2.0 ** 10 * 2.0 ** -38, "s/s", icd)
        lim["angle_rad"] = Limit(-_SC * (1 + 1e-9), _SC * (1 + 1e-9) * 2.0, "rad",
                                 "+-1 semicircle, 0..2 pi as some writers give [mem: IS-GPS-200]")
    if kind == "ephemeris":
        # IDOT 14 bits x 2^-43 sc/s, delta n 16 bits x 2^-43 sc/s [mem: IS-GPS-200 Table
        # 20-III; calc], doubled for the other systems' wider fields.
        lim["inclination_rate_rad_s"] = Limit(-2 * 2.0 ** 13 * 2.0 ** -43 * _SC,
                                              2 * 2.0 ** 13 * 2.0 ** -43 * _SC, "rad/s",
                                              "IS-GPS-200 Table 20-III IDOT range x2 [mem; calc]")
        lim["mean_motion_delta_rad_s"] = Limit(-2 * 2.0 ** 15 * 2.0 ** -43 * _SC,
                                               2 * 2.0 ** 15 * 2.0 ** -43 * _SC, "rad/s",
                                               "IS-GPS-200 Table 20-III delta n range x2 [mem; calc]")
        lim["eccentricity"] = Limit(0.0, max(sh.e_max, 0.03), "", src)
    return lim


def check_elements(system: str, values: Mapping[str, float], kind: str = "any",
                   speed_at_radius: bool = True) -> list[Finding]:
    """The values of one record that lie outside the plausible ranges of its system.

    Quantities not in ``values`` are not checked; unknown quantity names raise KeyError
    (a programming error, not a user's). A key may carry a label after a colon
    (``"angle_rad:mean anomaly"``) so that one record can give several values of one
    quantity; findings keep the whole key. ``speed_m_s`` is judged at ``radius_m`` when both
    are given (vis-viva), otherwise against the shell's fastest point."""
    lim = limits_for(system, kind)
    name = shell_of(system).name
    out: list[Finding] = []
    vals = dict(values)
    for key, v in vals.items():
        q = key.split(":", 1)[0]
        v = float(v)
        if q == "sqrt_a_m05":
            a_lim = lim["semi_major_axis_m"]
            limit = Limit(math.sqrt(a_lim.low), math.sqrt(a_lim.high), "m^1/2", a_lim.source)
        elif q == "speed_m_s":
            r = float(vals.get("radius_m", shell_of(system).radius_min_m))
            top = shell_of(system).max_earth_fixed_speed_m_s(r) * 1.01 if math.isfinite(r) \
                else 0.0
            limit = Limit(0.0, top, "m/s", "vis-viva at that radius plus Earth rotation [calc]")
        elif q in lim:
            limit = lim[q]
        elif q in _WHAT:
            continue                                   # not limited for this kind
        else:
            raise KeyError(q)
        if not (math.isfinite(v) and limit.low <= v <= limit.high):
            out.append(Finding(key, v, limit, name))
    return out


@dataclass
class RecordScreen:
    """Applies :func:`check_elements` to the records of one file with the reader's policy.

    ``strict=True``: the first implausible record raises :class:`OrbitFormatError` naming
    file, line, the user's field name and the record. ``strict=False`` (the command
    line's ``--skip-bad-records``, the scenario's ``orbits.skip_bad_records``): the record
    is dropped with one warning naming the same, and reading goes on."""

    source: str
    strict: bool = True
    warnings: list[str] = field(default_factory=list)
    dropped: list[str] = field(default_factory=list)

    def keep(self, system: str, values: Mapping[str, float], names: Mapping[str, str], *,
             record: str, line: int | None, lines: Mapping[str, int] | None = None,
             kind: str = "any") -> bool:
        """True if the record is plausible. ``names`` maps quantity keys to the file's own
        field names; ``line`` is the record's line, ``lines`` the line of each value."""
        findings = check_elements(system, values, kind)
        if not findings:
            return True
        f = findings[0]
        field_name = names.get(f.quantity, f.what)
        line = (lines or {}).get(f.quantity, line)
        message = f"{record}: {f.describe()}"
        if self.strict:
            raise OrbitFormatError(f"{message}; fix the record, or drop it with "
                                   "--skip-bad-records (scenario: orbits.skip_bad_records = "
                                   "true)", file=self.source, line=line, field=field_name)
        where = f"line {line}, " if line is not None else ""
        self.warnings.append(f"{self.source}: {where}field '{field_name}': {message}; "
                             "record dropped")
        self.dropped.append(record)
        return False

"""The common in-memory form of orbit data, whatever file it came from.

Every reader (YUMA, SEM, TLE, RINEX navigation) returns an :class:`OrbitSet`: one
:class:`OrbitEntry` per satellite, each with a :class:`SatelliteInfo` (identity, health,
source, epoch) and either an :class:`AlmanacRecord` (IS-GPS-200 almanac elements, SI
units, radians), an SGP4 ``Satrec`` built from a TLE, or the satellite's broadcast
ephemeris records (``broadcast``: RINEX navigation records in toe order, see
:mod:`core.orbits.broadcast`). Sets from several files merge with :meth:`OrbitSet.merge`.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Literal

from sgp4.api import Satrec

SourceKind = Literal["almanac", "tle", "broadcast"]


@dataclass(frozen=True)
class SatelliteInfo:
    """Who a satellite is and where its orbit came from."""

    sat_id: str                 # RINEX-style ID: G13, E11, C19, R07, J01, S33; or fallback
    system: str                 # one letter: G E C R J S I, or "X" when unknown
    name: str                   # name as written in the file (TLE) or "PRN-13" (almanac)
    source_kind: SourceKind
    source_file: str
    epoch_unix_s: float         # UTC POSIX s of toa (almanac), TLE epoch, median toe (broadcast)
    healthy: bool = True
    health_code: int = 0
    norad_id: int | None = None
    glonass_k: int | None = None  # GLONASS frequency channel number, -7..+6, if known
    prn: int | None = None


@dataclass(frozen=True)
class AlmanacRecord:
    """IS-GPS-200 almanac elements (Table 20-VI), converted to SI units and radians."""

    week_raw: int               # week as written (10-bit for YUMA/SEM)
    week_full: int              # resolved full GPS week
    toa_s: float                # time of applicability, seconds of week_full
    eccentricity: float
    inclination_rad: float      # full inclination i0
    omega_dot_rad_s: float      # rate of right ascension
    sqrt_a_m05: float           # sqrt of semi-major axis, m^0.5
    omega0_rad: float           # right ascension at week
    arg_perigee_rad: float
    mean_anomaly_rad: float
    af0_s: float
    af1_s_s: float


@dataclass
class OrbitEntry:
    """One satellite's orbit data: its description and one of almanac, TLE or broadcast records."""

    info: SatelliteInfo
    almanac: AlmanacRecord | None = None
    satrec: Satrec | None = None
    tle_lines: tuple[str, str] | None = None
    # Broadcast records (readers.rinex_nav GpsEphemerisRecord / GlonassRecord), toe order.
    broadcast: tuple | None = None

    @property
    def sat_id(self) -> str:
        return self.info.sat_id


@dataclass(frozen=True)
class OrbitFileInfo:
    """What was read from one file."""

    path: str
    format: str                 # "YUMA", "SEM", "TLE", "RINEX 3.04 NAV"
    n_satellites: int
    epoch_unix_s: float         # median epoch of the file's records (UTC POSIX s)
    week_raw: int | None = None
    week_full: int | None = None
    reference_unix_s: float | None = None
    age_s: float | None = None  # reference time - epoch (positive: data older than the plan)


@dataclass
class OrbitSet:
    """The satellites of one or more orbit files, with the files' descriptions and warnings."""

    entries: list[OrbitEntry] = field(default_factory=list)
    files: list[OrbitFileInfo] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)

    @property
    def ids(self) -> list[str]:
        return [e.info.sat_id for e in self.entries]

    def __len__(self) -> int:
        return len(self.entries)

    def merge(self, *others: OrbitSet) -> OrbitSet:
        """Concatenate sets. A later duplicate ID is kept with a suffix and a warning."""
        out = OrbitSet(list(self.entries), list(self.files), list(self.warnings))
        seen = {e.info.sat_id for e in out.entries}
        for other in others:
            out.files.extend(other.files)
            out.warnings.extend(other.warnings)
            for e in other.entries:
                sid = e.info.sat_id
                if sid in seen:
                    n = 2
                    while f"{sid}#{n}" in seen:
                        n += 1
                    new_id = f"{sid}#{n}"
                    out.warnings.append(
                        f"{e.info.source_file}: satellite {sid} also appears in an earlier "
                        f"file; this copy is kept as {new_id}")
                    e = replace(e, info=replace(e.info, sat_id=new_id))
                seen.add(e.info.sat_id)
                out.entries.append(e)
        return out

    def select(self, ids: list[str]) -> OrbitSet:
        wanted = set(ids)
        return OrbitSet([e for e in self.entries if e.info.sat_id in wanted],
                        list(self.files), list(self.warnings))

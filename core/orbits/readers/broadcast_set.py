"""A RINEX navigation file as an OrbitSet: one broadcast entry per satellite.

Records are screened first (:func:`core.orbits.ephemeris_model.screen_records`,
:func:`core.orbits.glonass_model.screen_glonass`: a record far from its satellite's
neighbouring records is dropped with a message, as the "healthy" G01 record of a real file
that holds G23's orbit); the reader has already passed each record through the physical
plausibility screen (:mod:`core.orbits.plausibility`). A satellite is healthy when at least one
of its records is; its entry keeps all its records (toe order) and
:mod:`core.orbits.broadcast` picks the one in force at each instant.
"""

from __future__ import annotations

from collections import Counter

import numpy as np

from ...ground.timeutil import gps_to_unix_s
from ..ephemeris_model import screen_records
from ..glonass_model import screen_glonass
from ..orbit_set import OrbitEntry, OrbitFileInfo, OrbitSet, SatelliteInfo
from .rinex_nav import SYSTEM_NAMES, RinexNavFile, parse_rinex_nav

_ORDER = {s: k for k, s in enumerate("GERCJ")}


def drop_shared_orbits(records: list) -> tuple[list, list[str]]:
    """Records of one satellite that repeat another satellite's orbit exactly.

    Two satellites cannot fly one orbit: a record whose reference time and orbital
    elements (semi-major axis, eccentricity, mean anomaly, node, inclination, perigee)
    equal those of another satellite's record is mislabelled. The satellite whose record
    comes first in the file keeps it; the later copy is dropped, with a warning naming
    both lines, rather than planned as a second satellite on the first one's orbit."""
    first: dict[tuple, object] = {}
    kept, msgs = [], []
    for r in sorted(records, key=lambda r: r.line):
        key = (r.system, r.toe_week, r.toe_sow_s, r.sqrt_a_m05, r.eccentricity, r.m0_rad,
               r.omega0_rad, r.i0_rad, r.arg_perigee_rad)
        owner = first.setdefault(key, r)
        if owner is not r and owner.sat_id != r.sat_id:
            msgs.append(f"line {r.line}: the {r.sat_id} record repeats the orbit of the {owner.sat_id} "
                        f"record at line {owner.line} exactly (same reference time and elements); "
                        f"two satellites cannot share one orbit, so it is dropped")
            continue
        kept.append(r)
    return kept, msgs


def nav_orbit_set(nav: RinexNavFile, reference_unix_s: float | None = None) -> OrbitSet:
    """The entries of a parsed navigation file; ``reference_unix_s`` sets the data age."""
    source = nav.path
    kept, screen_msgs = screen_records(nav.records)
    kept, dupe_msgs = drop_shared_orbits(kept)
    screen_msgs = [*screen_msgs, *dupe_msgs]
    glonass, glo_msgs = screen_glonass(nav.glonass)
    warnings = [*nav.warnings, *(f"{source}: {m}" for m in [*screen_msgs, *glo_msgs])]
    others = {k: v for k, v in nav.skipped.items() if v}
    if others:
        warnings.append(f"{source}: {', '.join(f'{v} {SYSTEM_NAMES.get(k, k)}' for k, v in others.items())} "
                        "record(s) skipped (systems not predicted from broadcast data)")
    by_sat: dict[str, list] = {}
    for r in [*kept, *glonass]:
        by_sat.setdefault(r.sat_id, []).append(r)
    entries: list[OrbitEntry] = []
    for sid in sorted(by_sat, key=lambda x: (_ORDER.get(x[0], 9), x)):
        recs = tuple(sorted(by_sat[sid], key=lambda r: (r.toe_gps_s, r.line)))
        healthy = any(r.healthy for r in recs)
        first = recs[0]
        k = None
        if first.system == "R":
            ks = Counter(r.freq_k for r in recs)
            k = ks.most_common(1)[0][0]
            if len(ks) > 1:
                warnings.append(f"{source}: {sid} records give frequency channels "
                                f"{sorted(ks)}; {k} (the most frequent) is used")
            if not -7 <= k <= 6:
                warnings.append(f"{source}: {sid} frequency channel {k} is outside -7..+6 "
                                "(the channels in use since 2005); taken as written")
        latest = [r for r in recs if r.healthy] or list(recs)
        toes = np.array([r.toe_gps_s for r in recs])
        info = SatelliteInfo(
            sat_id=sid, system=first.system,
            name=f"{SYSTEM_NAMES.get(first.system, first.system)} PRN {first.prn}",
            source_kind="broadcast", source_file=source,
            epoch_unix_s=float(gps_to_unix_s(float(np.median(toes)))), healthy=healthy,
            health_code=0 if healthy else int(latest[-1].health_raw if first.system == "R"
                                              else latest[-1].health),
            glonass_k=k, prn=first.prn)
        entries.append(OrbitEntry(info=info, broadcast=recs))
    all_toe = [r.toe_gps_s for e in entries for r in e.broadcast]
    epoch = float(gps_to_unix_s(float(np.median(all_toe)))) if all_toe else 0.0
    fmt = f"RINEX {nav.version:.2f} NAV"
    info_file = OrbitFileInfo(path=source, format=fmt, n_satellites=len(entries),
                              epoch_unix_s=epoch, reference_unix_s=reference_unix_s,
                              age_s=None if reference_unix_s is None else reference_unix_s - epoch)
    return OrbitSet(entries, [info_file], warnings)


def parse_broadcast(text: str, source: str, reference_unix_s: float | None = None, *,
                    strict: bool = True) -> OrbitSet:
    """Parse RINEX navigation text of any supported system into an OrbitSet (``strict``:
    an implausible record stops the reading; otherwise it is dropped with a warning)."""
    return nav_orbit_set(parse_rinex_nav(text, source, strict=strict), reference_unix_s)

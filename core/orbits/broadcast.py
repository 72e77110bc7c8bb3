"""Broadcast-ephemeris entries of an OrbitSet: record choice and Earth-fixed states.

An entry read from a RINEX navigation file holds all of its satellite's records
(``OrbitEntry.broadcast``, toe order). At every instant the record a receiver would use is
chosen: among the satellite's healthy records, the one with the nearest reference epoch
(toe, GLONASS tb) that has not expired, i.e. lies within half its fit interval of the
instant (intervals per system: :mod:`core.orbits.readers.rinex_nav`). A satellite with no
healthy record at all (flagged unhealthy: shown, not searched) uses its unhealthy records
the same way. Instants that no record covers are left out (NaN, ``valid`` False) and
reported.

Keplerian systems are propagated with :func:`core.orbits.ephemeris_model.ephemeris_ecef`,
GLONASS with :func:`core.orbits.glonass_model.glonass_ecef`.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from ..ground.timeutil import gps_to_unix_s, iso_z, unix_to_gps_s
from .ephemeris_model import EphemerisArrays, ephemeris_ecef
from .glonass_model import glonass_ecef
from .orbit_set import OrbitEntry, OrbitSet
from .readers.rinex_nav import GlonassRecord, GpsEphemerisRecord


def _pool(records: Sequence) -> list:
    healthy = [r for r in records if r.healthy]
    return healthy or list(records)


# Records looked at on each side of an instant (by toe): the nearest valid record is among
# them unless more than this many records with shorter fit intervals lie nearer.
_NEIGHBOURS = 4


def select_records(records: Sequence, gps_s: np.ndarray) -> np.ndarray:
    """Index into ``records`` of the record in force at each time (T,), -1 where none is.

    Memory is (2 x _NEIGHBOURS, T) whatever the number of records: each instant looks at
    the records nearest in toe on either side."""
    t = np.atleast_1d(np.asarray(gps_s, dtype=float))
    out = np.full(t.shape, -1, dtype=int)
    pool = _pool(records)
    if not pool:
        return out
    index = {id(r): k for k, r in enumerate(records)}
    order = sorted(range(len(pool)), key=lambda k: pool[k].toe_gps_s)
    toe = np.array([pool[k].toe_gps_s for k in order])
    half = np.array([pool[k].fit_interval_h for k in order]) * 1800.0
    ids = np.array([index[id(pool[k])] for k in order])
    at = np.searchsorted(toe, t)
    cand = np.clip(at[None, :] + np.arange(-_NEIGHBOURS, _NEIGHBOURS)[:, None], 0, toe.size - 1)
    age = np.abs(t[None, :] - toe[cand])                            # (2N, T)
    age = np.where(age <= half[cand], age, np.inf)
    best = np.argmin(age, axis=0)
    cols = np.arange(t.size)
    ok = np.isfinite(age[best, cols])
    out[ok] = ids[cand[best, cols][ok]]
    return out


def _nearest_toe(records: Sequence, gps_s: np.ndarray) -> np.ndarray:
    toe = np.sort(np.array([r.toe_gps_s for r in _pool(records)]))
    at = np.clip(np.searchsorted(toe, gps_s), 1, max(toe.size - 1, 1))
    lo, hi = toe[at - 1], toe[np.minimum(at, toe.size - 1)]
    return np.where(np.abs(gps_s - lo) <= np.abs(gps_s - hi), lo, hi)


def coverage_warning(entry: OrbitEntry, n_missing: int, first_unix_s: float, n_t: int) -> str:
    """The message for instants of a broadcast entry that no record covers."""
    toes = [r.toe_gps_s for r in _pool(entry.broadcast or ())]
    span = (f" (its records cover {iso_z(float(gps_to_unix_s(min(toes))), 0)} to "
            f"{iso_z(float(gps_to_unix_s(max(toes))), 0)} +- the fit interval)" if toes else "")
    return (f"{entry.info.sat_id}: no valid broadcast record for {n_missing} of {n_t} samples "
            f"from {iso_z(first_unix_s, 0)}{span}; those samples are left out: use an almanac "
            "or a newer navigation file for them")


def broadcast_ecef(entries: Sequence[OrbitEntry], unix_s: np.ndarray
                   ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Position (m), velocity (m/s), (S, T, 3), and the index of the record used (S, T;
    -1 where none is: NaN states) for broadcast entries at UTC POSIX times ``unix_s``."""
    u = np.atleast_1d(np.asarray(unix_s, dtype=float))
    gps = np.asarray(unix_to_gps_s(u), dtype=float)
    n_s, n_t = len(entries), u.size
    pos = np.full((n_s, n_t, 3), np.nan)
    vel = np.full((n_s, n_t, 3), np.nan)
    used = np.full((n_s, n_t), -1, dtype=int)
    kep_recs: list[GpsEphemerisRecord] = []
    kep_rows: list[np.ndarray] = []
    glo_rows: list[tuple[int, np.ndarray, np.ndarray]] = []
    for s, e in enumerate(entries):
        recs = e.broadcast or ()
        idx = select_records(recs, gps)
        used[s] = idx
        missing = idx < 0
        for k in np.unique(idx[~missing]):
            cols = np.nonzero(idx == k)[0]
            rec = recs[k]
            if isinstance(rec, GlonassRecord):
                glo_rows.append((s, cols, np.full(cols.size, k)))
            else:
                kep_recs.append(rec)
                kep_rows.append(np.stack((np.full(cols.size, s), cols)))
    if kep_recs:
        arrays = EphemerisArrays.from_records(kep_recs)
        lengths = [r.shape[1] for r in kep_rows]
        which = np.repeat(np.arange(len(kep_recs)), lengths)
        st = np.concatenate(kep_rows, axis=1)
        sub = EphemerisArrays(**{k: getattr(arrays, k)[which] for k in arrays.__dataclass_fields__})
        p, v = ephemeris_ecef(sub, gps[st[1]][:, None])
        pos[st[0], st[1]] = p[:, 0]
        vel[st[0], st[1]] = v[:, 0]
    if glo_rows:
        s_all = np.concatenate([np.full(c.size, s) for s, c, _ in glo_rows])
        c_all = np.concatenate([c for _, c, _ in glo_rows])
        recs_all = [entries[s].broadcast[k] for s, c, ks in glo_rows for k in ks]
        p0 = np.array([r.pos_m for r in recs_all])
        v0 = np.array([r.vel_m_s for r in recs_all])
        a0 = np.array([r.acc_m_s2 for r in recs_all])
        dt = gps[c_all] - np.array([r.toe_gps_s for r in recs_all])
        p, v = glonass_ecef(p0, v0, a0, dt)
        pos[s_all, c_all] = p
        vel[s_all, c_all] = v
    return pos, vel, used


def orbit_data_age_s(orbits: OrbitSet, unix_s: np.ndarray) -> np.ndarray:
    """Age of the orbit data at each instant, (S, T) seconds: time minus the data epoch
    (almanac TOA, TLE epoch); for broadcast entries, time minus the reference epoch of the
    record in force (or of the nearest record where none is)."""
    u = np.atleast_1d(np.asarray(unix_s, dtype=float))
    out = u[None, :] - np.array([e.info.epoch_unix_s for e in orbits.entries])[:, None]
    gps = np.asarray(unix_to_gps_s(u), dtype=float)
    for s, e in enumerate(orbits.entries):
        if e.broadcast:
            idx = select_records(e.broadcast, gps)
            toe = np.array([r.toe_gps_s for r in e.broadcast])
            ref = np.where(idx >= 0, toe[np.maximum(idx, 0)], _nearest_toe(e.broadcast, gps))
            out[s] = gps - ref
    return out


@dataclass(frozen=True)
class RecordUse:
    """One broadcast record and the span of the plan's times it was used for."""

    toe_unix_s: float
    issue: int                  # IODE / IODnav / AODE; GLONASS: tb index of the day
    line: int                   # first line of the record in its file
    healthy: bool
    first_unix_s: float
    last_unix_s: float

    def to_dict(self) -> dict:
        return {"toe": iso_z(self.toe_unix_s, 0), "iod": self.issue, "line": self.line,
                "from": iso_z(self.first_unix_s, 0), "to": iso_z(self.last_unix_s, 0)}


def records_in_use(entry: OrbitEntry, unix_s: np.ndarray) -> list[RecordUse]:
    """The broadcast records used for ``entry`` over the times, in time order ([] if the
    entry is not a broadcast entry)."""
    if not entry.broadcast:
        return []
    u = np.atleast_1d(np.asarray(unix_s, dtype=float))
    idx = np.asarray(select_records(entry.broadcast, np.asarray(unix_to_gps_s(u), dtype=float)))
    # Runs of equal record index (one array pass: a week at 1 s is 604,801 times).
    starts = np.concatenate(([0], np.flatnonzero(idx[1:] != idx[:-1]) + 1))
    ends = np.append(starts[1:], u.size) - 1
    out: list[RecordUse] = []
    for a, b in zip(starts.tolist(), ends.tolist()):
        if idx[a] >= 0:
            r = entry.broadcast[int(idx[a])]
            out.append(RecordUse(float(gps_to_unix_s(r.toe_gps_s)), int(r.issue), r.line,
                                 r.healthy, float(u[a]), float(u[b])))
    return out

"""Satellite geometry and Doppler at a site, vectorized over (satellite, time).

``predict`` propagates every satellite of an :class:`~core.orbits.OrbitSet` (almanac
entries with the IS-GPS-200 model, TLE entries with SGP4, broadcast entries with their
system's broadcast model, :mod:`core.orbits.broadcast`) at every instant of a time
grid and returns azimuth, elevation, range, range rate, Doppler and Doppler rate as
(n_satellites, n_times) arrays. ``passes`` finds rise, culmination and set above an
elevation mask, refined by bisection on the true model to a few milliseconds.

Sign conventions: Doppler = -range rate / wavelength, positive while the satellite
approaches [trade]. Geometric (instantaneous) range is used, as skyfield's
``(sat - site).at(t)`` does; the light-time effect on Doppler is below 0.05 Hz at L1.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from datetime import datetime

import numpy as np

from ..ground.constants import (
    EARTH_ROTATION_RAD_S,
    GPS_MU_M3_S2,
    SPEED_OF_LIGHT_M_S,
    WGS72_MU_M3_S2,
)
from ..ground.errors import ComputationError, InputError
from ..ground.geodesy import Site, SitePath
from ..ground.signals import DEFAULT_SIGNAL_FOR_SYSTEM, SIGNALS, get_signal
from ..ground.timeutil import TimeGrid, as_time_grid, iso_z, to_unix_s, unix_to_gps_s
from ..orbits.almanac_model import AlmanacArrays, almanac_ecef
from ..orbits.almanac_model import node_steps_s as almanac_node_steps_s
from ..orbits.broadcast import broadcast_ecef, coverage_warning
from ..orbits.node_interp import grouped_states_many, uniform_step_s
from ..orbits.orbit_set import OrbitSet
from ..orbits.sgp4_model import sgp4_ecef_planes_many, sgp4_error_text

SignalChoice = str | Sequence[str] | Mapping[str, str] | None


def resolve_signals(orbits: OrbitSet, signals: SignalChoice = None) -> list[str]:
    """The signal ID each satellite is predicted on.

    ``signals`` may be None (each system's default), one ID or a list of IDs (each
    applies to its own system; other systems keep their default), or a mapping
    system letter -> ID.
    """
    chosen: dict[str, str] = dict(DEFAULT_SIGNAL_FOR_SYSTEM)
    if isinstance(signals, str):
        signals = [signals]
    if isinstance(signals, Mapping):
        chosen.update({k: get_signal(v).signal_id for k, v in signals.items()})
    elif signals is not None:
        for sid in signals:
            sig = get_signal(sid)
            chosen[sig.system] = sig.signal_id
    out = []
    for e in orbits.entries:
        out.append(chosen.get(e.info.system, "GPS-L1CA"))  # SBAS and unknown: L1
    return out


@dataclass
class Prediction:
    """Geometry of every satellite at every time; arrays shaped (n_satellites, n_times).

    Only what later stages need is kept (7 floats and a flag per satellite-sample); range
    rate and range acceleration are Doppler and Doppler rate times the wavelength. The
    Earth-fixed states (S, T, 3) are kept only on request (``predict(keep_states=True)``).
    """

    ids: list[str]
    signal_ids: list[str]
    carrier_hz: np.ndarray            # (S,)
    times: TimeGrid
    site: Site
    azimuth_deg: np.ndarray
    elevation_deg: np.ndarray
    range_m: np.ndarray
    doppler_hz: np.ndarray
    doppler_rate_hz_s: np.ndarray
    elevation_rate_deg_s: np.ndarray
    sat_speed_m_s: np.ndarray         # |Earth-fixed satellite velocity|
    valid: np.ndarray                 # (S, T) False where propagation failed
    warnings: list[str] = field(default_factory=list)
    sat_pos_ecef_m: np.ndarray | None = None      # (S, T, 3), with keep_states only
    sat_vel_ecef_m_s: np.ndarray | None = None    # (S, T, 3), with keep_states only

    @property
    def n_satellites(self) -> int:
        return len(self.ids)

    def index(self, sat_id: str) -> int:
        return self.ids.index(sat_id)

    @property
    def wavelength_m(self) -> np.ndarray:
        return SPEED_OF_LIGHT_M_S / self.carrier_hz

    @property
    def range_rate_m_s(self) -> np.ndarray:
        return -self.doppler_hz * self.wavelength_m[:, None]

    @property
    def range_accel_m_s2(self) -> np.ndarray:
        return -self.doppler_rate_hz_s * self.wavelength_m[:, None]

    @property
    def los_ecef(self) -> np.ndarray:
        """(S, T, 3) unit vector site -> satellite, Earth-fixed (needs keep_states)."""
        if self.sat_pos_ecef_m is None:
            raise ValueError("line-of-sight vectors need predict(..., keep_states=True)")
        site = self.site.ecef_m
        d = self.sat_pos_ecef_m - (site.T if site.ndim == 2 else site)   # SitePath: (3, T)
        return d / np.linalg.norm(d, axis=-1, keepdims=True)


# Satellite-samples per block of the time grid: predict's working memory is a few hundred
# bytes times this, whatever the window (the results themselves are 57 bytes a sample).
BLOCK_SAMPLES = 1 << 16


def _almanac_planes(arrays: AlmanacArrays, u: np.ndarray):
    p, v = almanac_ecef(arrays, unix_to_gps_s(u))
    return (np.ascontiguousarray(p.transpose(2, 0, 1)), np.ascontiguousarray(v.transpose(2, 0, 1)),
            np.zeros(p.shape[:2], dtype=np.uint8))


def propagate_ecef(orbits: OrbitSet, unix_s: np.ndarray, *, failures: dict | None = None,
                   anchor_s: float | None = None
                   ) -> tuple[np.ndarray, np.ndarray, np.ndarray, list[str]]:
    """Earth-fixed position (m), velocity (m/s), each (S, T, 3), a validity mask (S, T)
    and warnings, for every entry of the set at every instant.

    The arrays are views of component-first (3, S, T) storage, so ``pos[..., 0]`` is one
    (S, T) plane with contiguous rows. ``failures`` (predict's blocks): a dict entry index ->
    [samples failed, first failed time, set of SGP4 codes] that collects the failures
    across calls; the warnings are then left to :func:`failure_warnings`. ``anchor_s``:
    a time on the interpolation node lattice (predict's blocks pass their grid's first
    sample, so that every block sees the same nodes).
    """
    u = np.asarray(unix_s, dtype=float)
    own = {} if failures is None else failures
    pos, vel, valid = propagate_ecef_many(orbits, [(u, anchor_s)], [own])[0]
    warnings = [] if failures is not None else failure_warnings(orbits, own, u.size)
    return pos, vel, valid, warnings


def propagate_ecef_many(orbits: OrbitSet, requests: Sequence[tuple[np.ndarray, float | None]],
                        failures: Sequence[dict]
                        ) -> list[tuple[np.ndarray, np.ndarray, np.ndarray]]:
    """:func:`propagate_ecef` of several (times, anchor) requests at once, the failures of
    each collected in its own dict: almanac and SGP4 orbits are evaluated in one call per
    model and node group over the nodes and samples of every request, and what depends
    on the orbits only (node spacings, stacked elements) is made once. Each request gets
    exactly what :func:`propagate_ecef` gives it alone (the models are evaluated time by
    time); broadcast records are evaluated per request."""
    grids = [np.asarray(u, dtype=float) for u, _ in requests]
    anchors = [a for _, a in requests]
    n_s = len(orbits.entries)
    alm_idx = [i for i, e in enumerate(orbits.entries) if e.almanac is not None]
    tle_idx = [i for i, e in enumerate(orbits.entries) if e.satrec is not None]
    bc_idx = [i for i, e in enumerate(orbits.entries) if e.broadcast is not None]
    one_model = len(tle_idx) == n_s or len(alm_idx) == n_s
    rest = sorted(set(range(n_s)) - set(alm_idx) - set(tle_idx) - set(bc_idx))
    out: list[list] = []
    for u in grids:
        if one_model:
            out.append([None, None])             # one model for all: its planes are the result
            continue
        pos = np.empty((3, n_s, u.size))
        vel = np.empty((3, n_s, u.size))
        pos[:, rest] = np.nan
        vel[:, rest] = np.nan
        out.append([pos, vel])
    if bc_idx:
        # Broadcast records: evaluated directly (the record changes within a pass, so no
        # node interpolation); instants no record covers stay NaN and are reported.
        entries = [orbits.entries[i] for i in bc_idx]
        for (pos, vel), u, own in zip(out, grids, failures):
            p, v, used = broadcast_ecef(entries, u)
            pos[:, bc_idx] = p.transpose(2, 0, 1)
            vel[:, bc_idx] = v.transpose(2, 0, 1)
            for row in np.nonzero((used < 0).any(axis=1))[0]:
                bad = used[row] < 0
                rec = own.setdefault(bc_idx[row], [0, float(u[np.argmax(bad)]), set()])
                rec[0] += int(bad.sum())
    if alm_idx:
        arrays = AlmanacArrays.from_records([orbits.entries[i].almanac for i in alm_idx])
        # Each satellite at the node spacing its bound allows, on grids of 4 or more
        # samples per node interval (direct below that: the model is cheap).
        steps = almanac_node_steps_s(arrays)
        got = grouped_states_many(lambda idx, t: _almanac_planes(arrays.subset(idx), t),
                                  [steps] * len(grids), grids, anchors, min_samples_per_node=4.0)
        for slot, (p, v, _) in zip(out, got):
            if slot[0] is None:
                slot[:] = [p, v]
            else:
                slot[0][:, alm_idx] = p
                slot[1][:, alm_idx] = v
    if tle_idx:
        got = sgp4_ecef_planes_many([orbits.entries[i].satrec for i in tle_idx], grids, anchors)
        for slot, u, own, (p, v, err) in zip(out, grids, failures, got):
            if slot[0] is None:
                slot[:] = [p, v]
            else:
                slot[0][:, tle_idx] = p
                slot[1][:, tle_idx] = v
            for row in np.nonzero(err.any(axis=1))[0]:
                bad = err[row] != 0
                rec = own.setdefault(tle_idx[row], [0, float(u[np.argmax(bad)]), set()])
                rec[0] += int(bad.sum())
                rec[2].update(int(c) for c in np.unique(err[row][bad]))
    return [(pos.transpose(1, 2, 0), vel.transpose(1, 2, 0), np.isfinite(pos[0])) for pos, vel in out]


def failure_warnings(orbits: OrbitSet, failures: dict, n_t: int) -> list[str]:
    """One warning per satellite whose propagation failed (see :func:`propagate_ecef`)."""
    out = []
    for i in sorted(failures):
        count, first, codes = failures[i]
        if orbits.entries[i].broadcast is not None:
            out.append(coverage_warning(orbits.entries[i], count, first, n_t))
            continue
        out.append(f"{orbits.entries[i].info.sat_id}: SGP4 failed on {count} of {n_t} samples "
                   f"from {iso_z(first)} ({'; '.join(sgp4_error_text(c) for c in sorted(codes))}); "
                   "those samples are left out")
    return out


def _mu_for(orbits: OrbitSet) -> np.ndarray:
    return np.array([GPS_MU_M3_S2 if e.almanac is not None or e.broadcast is not None
                     else WGS72_MU_M3_S2 for e in orbits.entries])


def _geometry(pos: np.ndarray, vel: np.ndarray, mu: np.ndarray, site: Site, wavelength: np.ndarray,
              out: dict[str, np.ndarray] | None = None) -> dict[str, np.ndarray]:
    """Line-of-sight quantities from Earth-fixed states (S, T, 3), component-wise, in the
    site's east/north/up frame; written into ``out`` (arrays (S, T)) when given."""
    o = out if out is not None else {name: np.empty(pos.shape[:-1]) for name in _KEPT}
    sx, sy, sz = site.ecef_m
    px, py, pz = pos[..., 0], pos[..., 1], pos[..., 2]
    vx, vy, vz = vel[..., 0], vel[..., 1], vel[..., 2]
    rot = site.enu_rotation
    dx, dy, dz = px - sx, py - sy, pz - sz
    e = rot[0, 0] * dx
    e += rot[0, 1] * dy
    n = rot[1, 0] * dx
    n += rot[1, 1] * dy
    n += rot[1, 2] * dz
    up = rot[2, 0] * dx
    up += rot[2, 1] * dy
    up += rot[2, 2] * dz
    h2 = e * e
    h2 += n * n
    horiz = np.sqrt(h2)
    h2 += up * up
    rng = np.sqrt(h2, out=o["range_m"])
    inv = 1.0 / rng
    az = np.arctan2(e, n, out=o["azimuth_deg"])
    np.degrees(az, out=az)
    np.add(az, 360.0, out=az, where=az < 0.0)
    az += 0.0                                   # -0.0 -> 0.0
    el = np.arctan2(up, horiz, out=o["elevation_deg"])
    np.degrees(el, out=el)
    # Range rate (line of sight . velocity).
    rr = dx * vx
    rr += dy * vy
    rr += dz * vz
    rr *= inv
    # Elevation rate: d(sin el)/dt / cos el = (up . v - sin el rr) / horizontal distance.
    up_v = rot[2, 0] * vx
    up_v += rot[2, 1] * vy
    up_v += rot[2, 2] * vz
    up_v -= up * inv * rr
    np.maximum(horiz, 1e-12 * rng, out=horiz)
    up_v /= horiz
    np.degrees(up_v, out=o["elevation_rate_deg_s"])
    # Earth-fixed acceleration of a two-body orbit: gravity less Coriolis and centrifugal
    # terms (J2 neglected: < 6e-5 m/s^2, i.e. < 3e-4 Hz/s at L1). With A = d.p (x, y)
    # and B = d.p: d.a = -k B + 2 w (dx vy - dy vx) + w^2 A.
    w = EARTH_ROTATION_RAD_S
    r2 = px * px
    r2 += py * py
    r2 += pz * pz
    k = np.sqrt(r2)
    k *= r2
    np.divide(mu[:, None], k, out=k)
    a_xy = dx * px
    a_xy += dy * py
    b = dz * pz
    b += a_xy
    b *= -k
    b += (w * w) * a_xy
    cross = dx * vy
    cross -= dy * vx
    cross *= 2.0 * w
    b += cross
    v2 = vx * vx
    v2 += vy * vy
    v2 += vz * vz
    np.sqrt(v2, out=o["sat_speed_m_s"])
    b += v2
    b -= rr * rr
    b *= inv
    inv_lam = (-1.0 / wavelength)[:, None]
    np.multiply(rr, inv_lam, out=o["doppler_hz"])
    np.multiply(b, inv_lam, out=o["doppler_rate_hz_s"])
    return o


_KEPT = ("azimuth_deg", "elevation_deg", "range_m", "doppler_hz", "doppler_rate_hz_s",
         "elevation_rate_deg_s", "sat_speed_m_s")


def blocks(n_satellites: int, unix_s: np.ndarray) -> list[tuple[int, int]]:
    """Index ranges [a, b) of the grid's blocks, about BLOCK_SAMPLES satellite-samples
    each (every block interpolates from the node lattice anchored at the grid's first
    sample; a grid's last sample off the step, as time_grid appends, is a block of its own)."""
    n_t = unix_s.size
    body = n_t - 1 if (n_t > 2 and uniform_step_s(unix_s) is None
                       and uniform_step_s(unix_s[:-1]) is not None) else n_t
    step = max(1, BLOCK_SAMPLES // max(n_satellites, 1))
    out = [(a, min(a + step, body)) for a in range(0, body, step)]
    if body < n_t:
        out.append((body, n_t))
    return out


def check_grid_size(n_satellites: int, span_s: float, step_s: float, limit: int, *,
                    what: str, step_option: str, field: str, memory: str = "about 1 GB") -> int:
    """Number of grid times of a window, or InputError when satellites x times exceeds
    ``limit`` (checked before any array is made; names the option the user typed and the
    step that would fit)."""
    if not (math.isfinite(step_s) and step_s > 0):
        raise InputError(f"{step_option} {step_s:g} must be a positive number of seconds",
                         field=field)
    n_t = math.floor(span_s / step_s + 1e-9) + 2 if span_s / step_s < 1e15 else math.inf
    total = n_satellites * n_t
    if total <= limit:
        return int(n_t)
    steps = max(limit // max(n_satellites, 1) - 1, 1)
    min_step = math.ceil(span_s / steps)
    max_hours = steps * step_s / 3600.0
    shown = f"{n_t - 1:,}" if math.isfinite(n_t) else f"{span_s / step_s:.3g}"
    raise InputError(
        f"{n_satellites} satellites x {shown} time steps is above the {what} limit of "
        f"{limit:,} satellite-steps ({memory} of memory): use {step_option} of at least "
        f"{min_step:g} s, or a window of at most {max_hours:.3g} h at {step_s:g} s",
        field=field)


@dataclass
class EarthFixedStates:
    """Earth-fixed states of every satellite of a set over one grid, as :func:`predict`
    propagates them for that grid (block by block, from its own node lattice), with the
    propagation failures (see :func:`propagate_ecef`)."""

    unix_s: np.ndarray
    pos_ecef_m: np.ndarray            # (S, T, 3)
    vel_ecef_m_s: np.ndarray          # (S, T, 3)
    valid: np.ndarray                 # (S, T)
    failures: dict


def earth_fixed_states(orbits: OrbitSet, grids: Sequence[TimeGrid | np.ndarray]) -> list[EarthFixedStates]:
    """The states :func:`predict` propagates for each grid, for all grids at once: the
    satellites' Earth-fixed states do not depend on the receiver, so receivers at several
    places or times (a drive's events) share one propagation
    (:func:`propagate_ecef_many`); ``predict(..., states=)`` then takes them."""
    us = [np.asarray(g.unix_s if isinstance(g, TimeGrid) else g, dtype=float) for g in grids]
    n_s = len(orbits.entries)
    requests, owner = [], []
    for k, u in enumerate(us):
        for a, b in blocks(n_s, u):
            requests.append((u[a:b], float(u[0])))
            owner.append((k, a, b))
    failures = [{} for _ in us]
    got = propagate_ecef_many(orbits, requests, [failures[k] for k, _, _ in owner])
    # Component-first storage, as propagate_ecef's (the geometry reads contiguous planes).
    out = [EarthFixedStates(u, np.empty((3, n_s, u.size)).transpose(1, 2, 0),
                            np.empty((3, n_s, u.size)).transpose(1, 2, 0),
                            np.empty((n_s, u.size), dtype=bool), f) for u, f in zip(us, failures)]
    for (k, a, b), (pos, vel, ok) in zip(owner, got):
        out[k].pos_ecef_m[:, a:b] = pos
        out[k].vel_ecef_m_s[:, a:b] = vel
        out[k].valid[:, a:b] = ok
    return out


def predict(orbits: OrbitSet, site: Site, times: TimeGrid | Sequence[datetime] | np.ndarray,
            signals: SignalChoice = None, *, keep_states: bool = False,
            failures: dict | None = None, states: EarthFixedStates | None = None,
            node_anchor_s: float | None = None) -> Prediction:
    """Azimuth, elevation, range, range rate, Doppler and Doppler rate of every satellite
    of ``orbits`` seen from ``site`` at ``times`` (TimeGrid, aware datetimes, or UTC POSIX s).

    The grid is processed in blocks of about BLOCK_SAMPLES satellite-samples written into
    preallocated result arrays, so working memory does not grow with the window.
    ``keep_states`` also keeps the Earth-fixed positions and velocities (S, T, 3).
    ``site`` may be a :class:`~core.ground.geodesy.SitePath` (a receiver that moves: one
    position per grid time).
    ``failures``: a caller that predicts a long window in pieces collects the propagation
    failures of every piece in one dict (see :func:`propagate_ecef`); the pieces then
    carry no failure warnings and the caller makes them once with :func:`failure_warnings`.
    ``states``: the satellites' states over this very grid from :func:`earth_fixed_states`
    (shared with other receivers), used instead of propagating.
    ``node_anchor_s``: a time on the node interpolation lattice (default the first of
    ``times``); a caller predicting a window in pieces passes its whole grid's first time,
    so that every piece interpolates from the nodes one call over the whole grid would use.
    """
    if not len(orbits.entries):
        raise ComputationError("the orbit data holds no satellites")
    grid = as_time_grid(times)
    if len(grid) == 0:
        raise InputError("no times to predict at", field="times")
    sig_ids = resolve_signals(orbits, signals)
    carrier = np.array([SIGNALS[s].carrier_for(e.info.glonass_k)
                        for s, e in zip(sig_ids, orbits.entries)])
    u = grid.unix_s
    n_s, n_t = len(orbits.entries), u.size
    out = {name: np.empty((n_s, n_t)) for name in _KEPT}
    valid = np.empty((n_s, n_t), dtype=bool)
    kept = (np.empty((n_s, n_t, 3)), np.empty((n_s, n_t, 3))) if keep_states else None
    mu = _mu_for(orbits)
    lam = SPEED_OF_LIGHT_M_S / carrier
    own = failures is None
    failures = {} if failures is None else failures
    if states is not None:
        if states.pos_ecef_m.shape[0] != n_s or not np.array_equal(states.unix_s, u):
            raise ValueError("the shared states were made for other satellites or times")
        for i, rec in states.failures.items():
            mine = failures.setdefault(i, [0, rec[1], set()])
            mine[0] += rec[0]
            mine[2].update(rec[2])
    anchor = float(u[0]) if node_anchor_s is None else float(node_anchor_s)
    for a, b in blocks(n_s, u):
        if states is None:
            pos, vel, ok, _ = propagate_ecef(orbits, u[a:b], failures=failures, anchor_s=anchor)
        else:
            pos, vel, ok = states.pos_ecef_m[:, a:b], states.vel_ecef_m_s[:, a:b], states.valid[:, a:b]
        here = site.take(slice(a, b)) if isinstance(site, SitePath) else site   # a moving receiver
        _geometry(pos, vel, mu, here, lam, out={name: v[:, a:b] for name, v in out.items()})
        valid[:, a:b] = ok
        if kept is not None:
            kept[0][:, a:b] = pos
            kept[1][:, a:b] = vel
    warnings = failure_warnings(orbits, failures, n_t) if own else []
    return Prediction(ids=orbits.ids, signal_ids=sig_ids, carrier_hz=carrier, times=grid,
                      site=site, valid=valid, warnings=list(orbits.warnings) + warnings,
                      sat_pos_ecef_m=None if kept is None else kept[0],
                      sat_vel_ecef_m_s=None if kept is None else kept[1], **out)


@dataclass(frozen=True)
class Pass:
    """One pass above the mask. ``rise_unix_s`` equals the window start when the satellite
    was already up (``rises_in_window`` False); likewise for the set."""

    sat_id: str
    rise_unix_s: float
    culmination_unix_s: float
    set_unix_s: float
    max_elevation_deg: float
    rise_azimuth_deg: float
    set_azimuth_deg: float
    rises_in_window: bool
    sets_in_window: bool

    def to_dict(self) -> dict:
        return {"id": self.sat_id, "rise": iso_z(self.rise_unix_s, 1),
                "culmination": iso_z(self.culmination_unix_s, 1), "set": iso_z(self.set_unix_s, 1),
                "max_elevation_deg": round(self.max_elevation_deg, 3),
                "rise_azimuth_deg": round(self.rise_azimuth_deg, 2),
                "set_azimuth_deg": round(self.set_azimuth_deg, 2),
                "rises_in_window": self.rises_in_window, "sets_in_window": self.sets_in_window}


def _hermite_value(x, h, f0, f1, d0, d1):
    x2, x3 = x * x, x * x * x
    return ((2 * x3 - 3 * x2 + 1) * f0 + (x3 - 2 * x2 + x) * h * d0 + (-2 * x3 + 3 * x2) * f1
            + (x3 - x2) * h * d1)


def _hermite_slope(x, h, f0, f1, d0, d1):
    x2 = x * x
    return (6 * x2 - 6 * x) * (f0 - f1) / h + (3 * x2 - 4 * x + 1) * d0 + (3 * x2 - 2 * x) * d1


def _hermite_roots(t0, t1, f0, f1, d0, d1, level=0.0, derivative=False, iterations=40):
    """Root in [t0, t1] of the cubic Hermite interpolant of f (values f0, f1 and slopes
    d0, d1 per second at the ends) minus ``level``, or of its derivative; returns the
    root times and the interpolant's value there. Vectorized bisection on the cubic
    (the grid test that selected the interval guarantees the sign change).
    ``derivative`` may be an array, one flag per root (both kinds in one bisection, each
    root exactly as alone)."""
    h = t1 - t0
    deriv = np.asarray(derivative, dtype=bool)
    if deriv.ndim and deriv.size and (deriv.all() or not deriv.any()):
        deriv = np.asarray(bool(deriv[0]))

    def g(x):
        if deriv.ndim == 0:
            if deriv:
                return _hermite_slope(x, h, f0, f1, d0, d1)
            return _hermite_value(x, h, f0, f1, d0, d1) - level
        return np.where(deriv, _hermite_slope(x, h, f0, f1, d0, d1), _hermite_value(x, h, f0, f1, d0, d1) - level)

    lo, hi = np.zeros_like(t0), np.ones_like(t0)
    s_lo = np.sign(g(lo))
    for _ in range(iterations):
        mid = 0.5 * (lo + hi)
        same = np.sign(g(mid)) == s_lo
        lo = np.where(same, mid, lo)
        hi = np.where(same, hi, mid)
    x = 0.5 * (lo + hi)
    return t0 + x * h, _hermite_value(x, h, f0, f1, d0, d1)


# Grid times per chunk of passes() when it predicts for itself (about 2**20
# satellite-samples): memory stays bounded however long the window.
PASSES_CHUNK_SAMPLES = 1 << 20


def _chunk_events(pred: Prediction, mask_deg: float):
    """Crossings of the mask and culminations on one prediction's grid (see passes):
    (sat, time, rising, azimuth) per crossing and (sat, time, elevation) per culmination."""
    return _chunk_events_many([pred], mask_deg)[0]


def _chunk_events_many(preds: Sequence[Prediction], mask_deg: float):
    """:func:`_chunk_events` of several predictions, their roots found in one bisection
    (each root exactly as alone)."""
    found, args = [], []
    for pred in preds:
        u = pred.times.unix_s
        el = np.where(pred.valid, pred.elevation_deg, -90.0)
        above = el >= mask_deg
        r_ok = np.where(pred.valid, pred.elevation_rate_deg_s, 0.0)
        # Mask crossings between grid points (both ends propagated), and culminations:
        # elevation rate changes from + to -.
        both = pred.valid[:, 1:] & pred.valid[:, :-1]
        s_idx, t_idx = np.nonzero((above[:, 1:] != above[:, :-1]) & both)
        cs, ct = np.nonzero((r_ok[:, :-1] > 0) & (r_ok[:, 1:] <= 0) & both)
        rs, rt = np.concatenate((s_idx, cs)), np.concatenate((t_idx, ct))
        args.append((u[rt], u[rt + 1], el[rs, rt], el[rs, rt + 1], r_ok[rs, rt], r_ok[rs, rt + 1],
                     np.arange(rs.size) >= s_idx.size))
        found.append((pred, u, el, above, s_idx, t_idx, cs))
    *ends, deriv = (np.concatenate(x) for x in zip(*args))
    roots, root_el = _hermite_roots(*ends, level=mask_deg, derivative=deriv)
    out = []
    at = 0
    for pred, u, el, above, s_idx, t_idx, cs in found:
        n_c, n_r = s_idx.size, s_idx.size + cs.size
        cross, cross_el = roots[at:at + n_c], root_el[at:at + n_c]
        culm, culm_el = roots[at + n_c:at + n_r], root_el[at + n_c:at + n_r]
        at += n_r
        rising = ~above[s_idx, t_idx]
        # Azimuth at the crossing: linear between the grid points, the short way round.
        f0, f1 = pred.azimuth_deg[s_idx, t_idx], pred.azimuth_deg[s_idx, t_idx + 1]
        x = (cross - u[t_idx]) / (u[t_idx + 1] - u[t_idx])
        f1 = f0 + ((f1 - f0 + 180.0) % 360.0 - 180.0)
        cross_az = (f0 + x * (f1 - f0)) % 360.0
        out.append(((s_idx, cross, rising, cross_az, cross_el), (cs, culm, culm_el), (el, above)))
    return out


def _first_max(values: list[float]) -> int:
    """Index of the first largest value, NaN ignored (np.nanargmax on a short list)."""
    best = -1
    for i, v in enumerate(values):
        if v == v and (best < 0 or v > values[best]):
            best = i
    if best < 0:
        raise ValueError("All-NaN slice encountered")
    return best


def passes(orbits: OrbitSet, site: Site, start: datetime | float, end: datetime | float,
           mask_deg: float = 10.0, step_s: float = 60.0,
           prediction: Prediction | None = None) -> list[Pass]:
    """Passes above ``mask_deg`` between start and end, sorted by rise time.

    Crossings and culminations are found on a ``step_s`` grid and refined on the cubic
    Hermite interpolant of the elevation and its analytic rate between grid points
    (elevation is smooth over minutes: the refined times agree with the true model to
    far better than 1 s at 60 s steps, see tests/test_geometry.py). A pass shorter than
    the step can be missed; at GNSS altitudes passes last hours. Without ``prediction``
    the grid is predicted in chunks of about PASSES_CHUNK_SAMPLES satellite-samples
    (sharing their end samples), so memory does not grow with the window.
    """
    a = start if isinstance(start, float | int) else to_unix_s(start)
    b = end if isinstance(end, float | int) else to_unix_s(end)
    if b <= a:
        raise InputError("end must be after start", field="end")
    if not (math.isfinite(step_s) and step_s > 0):
        raise InputError(f"step {step_s} s must be a positive number", field="step_s")
    if prediction is not None:
        ids, n_s = prediction.ids, prediction.n_satellites
        chunks = iter([prediction])
    else:
        n = max(2, int(np.ceil((b - a) / step_s)) + 1)
        ids, n_s = orbits.ids, len(orbits.entries)
        per = max(2, PASSES_CHUNK_SAMPLES // max(n_s, 1))
        h = (b - a) / (n - 1)

        def _chunks():
            for i0 in range(0, n - 1, per - 1):
                i1 = min(i0 + per - 1, n - 1)
                idx = np.arange(i0, i1 + 1)
                u = np.where(idx == n - 1, b, a + idx * h)
                yield predict(orbits, site, u)
        chunks = _chunks()

    finder = PassFinder(ids, mask_deg)
    for pred in chunks:
        finder.add(pred)
    return finder.passes()


def passes_of_predictions(predictions: Sequence[Prediction], mask_deg: float = 10.0) -> list[list[Pass]]:
    """``passes(..., prediction=p)`` of every prediction (each over its own grid), for all
    at once: the crossings and culminations of all are refined in one bisection, each
    exactly as alone (several receivers, such as a drive's events)."""
    out = []
    for pred, events in zip(predictions, _chunk_events_many(predictions, mask_deg)):
        finder = PassFinder(pred.ids, mask_deg)
        finder.add(pred, events)
        out.append(finder.passes())
    return out


class PassFinder:
    """The passes of :func:`passes` from a window's predictions given piece by piece, in
    time order, each piece starting at the last time of the one before (so that every grid
    interval is looked at once): ``add(piece)`` for each, then ``passes()``. The result
    equals ``passes(..., prediction=whole)`` for the same samples."""

    def __init__(self, ids: Sequence[str], mask_deg: float) -> None:
        self.ids, self.n_s, self.mask_deg = list(ids), len(ids), mask_deg
        self.crossings: list = []
        self.culminations: list = []
        self.u_first = self.u_last = None

    def add(self, pred: Prediction, _events=None) -> tuple[np.ndarray, np.ndarray]:
        """Take the next piece; returns its mask crossings (satellite index, time)."""
        cross_, culm_, (el, above) = _chunk_events(pred, self.mask_deg) if _events is None else _events
        self.crossings.append(cross_)
        self.culminations.append(culm_)
        if self.u_first is None:
            self.u_first = pred.times.unix_s[0]
            self.above0 = above[:, 0].copy()
            self.el0, self.az0 = el[:, 0].copy(), pred.azimuth_deg[:, 0].copy()
        self.u_last = pred.times.unix_s[-1]
        self.el1, self.az1 = el[:, -1].copy(), pred.azimuth_deg[:, -1].copy()
        return cross_[0], cross_[1]

    def passes(self) -> list[Pass]:
        ids, n_s = self.ids, self.n_s
        u_first, u_last = self.u_first, self.u_last
        above0, el0, az0, el1, az1 = self.above0, self.el0, self.az0, self.el1, self.az1
        s_idx, cross, rising, cross_az, cross_el = (np.concatenate(x) for x in zip(*self.crossings))
        cs, culm, culm_el = (np.concatenate(x) for x in zip(*self.culminations))

        out: list[Pass] = []
        order = np.argsort(s_idx, kind="stable")
        starts = np.searchsorted(s_idx[order], np.arange(n_s + 1))
        c_order = np.argsort(cs, kind="stable")
        c_starts = np.searchsorted(cs[c_order], np.arange(n_s + 1))
        above0 = np.asarray(above0, dtype=bool)
        for s in range(n_s):
            mine = order[starts[s]:starts[s + 1]]
            if mine.size == 0 and not above0[s]:
                continue                 # never above the mask in the window: no pass
            c_mine = c_order[c_starts[s]:c_starts[s + 1]]
            culm_s, culm_el_s = culm[c_mine].tolist(), culm_el[c_mine].tolist()
            events = sorted((float(cross[i]), bool(rising[i]), float(cross_az[i]), float(cross_el[i]))
                            for i in mine)
            intervals = []
            cur = (float(u_first), float(el0[s]), float(az0[s])) if above0[s] else None
            for t, is_rise, az, e in events:
                if is_rise:
                    cur = (t, e, az)
                elif cur is not None:
                    intervals.append((cur, (t, e, az)))
                    cur = None
            if cur is not None:
                intervals.append((cur, (float(u_last), float(el1[s]), float(az1[s]))))
            for (r0, r_el, r_az), (s0, s_el, s_az) in intervals:
                inside = [i for i, c in enumerate(culm_s) if r0 <= c <= s0]
                cand_t = [culm_s[i] for i in inside] + [r0, s0]
                cand_el = [culm_el_s[i] for i in inside] + [r_el, s_el]
                k = _first_max(cand_el)
                out.append(Pass(ids[s], float(r0), float(cand_t[k]), float(s0),
                                float(cand_el[k]), float(r_az), float(s_az),
                                rises_in_window=bool(r0 > u_first), sets_in_window=bool(s0 < u_last)))
        out.sort(key=lambda p: (p.rise_unix_s, p.sat_id))
        return out

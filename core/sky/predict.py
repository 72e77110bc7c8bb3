"""Satellite geometry and Doppler at a site, vectorized over (satellite, time).

``predict`` propagates every satellite of an :class:`~core.orbits.OrbitSet` (almanac
entries with the IS-GPS-200 model, TLE entries with SGP4) at every instant of a time
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
from ..ground.geodesy import Site
from ..ground.signals import DEFAULT_SIGNAL_FOR_SYSTEM, SIGNALS, get_signal
from ..ground.timeutil import TimeGrid, as_time_grid, iso_z, to_unix_s, unix_to_gps_s
from ..orbits.almanac_model import AlmanacArrays, almanac_ecef
from ..orbits.orbit_set import OrbitSet
from ..orbits.sgp4_model import sgp4_ecef, sgp4_error_text

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
    """Geometry of every satellite at every time; arrays shaped (n_satellites, n_times)."""

    ids: list[str]
    signal_ids: list[str]
    carrier_hz: np.ndarray            # (S,)
    times: TimeGrid
    site: Site
    azimuth_deg: np.ndarray
    elevation_deg: np.ndarray
    range_m: np.ndarray
    range_rate_m_s: np.ndarray
    range_accel_m_s2: np.ndarray
    doppler_hz: np.ndarray
    doppler_rate_hz_s: np.ndarray
    elevation_rate_deg_s: np.ndarray
    los_ecef: np.ndarray              # (S, T, 3) unit vector site -> satellite, Earth-fixed
    sat_pos_ecef_m: np.ndarray        # (S, T, 3)
    sat_vel_ecef_m_s: np.ndarray      # (S, T, 3)
    valid: np.ndarray                 # (S, T) False where propagation failed
    warnings: list[str] = field(default_factory=list)

    @property
    def n_satellites(self) -> int:
        return len(self.ids)

    def index(self, sat_id: str) -> int:
        return self.ids.index(sat_id)

    @property
    def wavelength_m(self) -> np.ndarray:
        return SPEED_OF_LIGHT_M_S / self.carrier_hz


def propagate_ecef(orbits: OrbitSet, unix_s: np.ndarray
                   ) -> tuple[np.ndarray, np.ndarray, np.ndarray, list[str]]:
    """Earth-fixed position (m), velocity (m/s), each (S, T, 3), a validity mask (S, T)
    and warnings, for every entry of the set at every instant."""
    u = np.asarray(unix_s, dtype=float)
    n_s, n_t = len(orbits.entries), u.size
    pos = np.full((n_s, n_t, 3), np.nan)
    vel = np.full((n_s, n_t, 3), np.nan)
    warnings: list[str] = []
    alm_idx = [i for i, e in enumerate(orbits.entries) if e.almanac is not None]
    tle_idx = [i for i, e in enumerate(orbits.entries) if e.satrec is not None]
    if alm_idx:
        arrays = AlmanacArrays.from_records([orbits.entries[i].almanac for i in alm_idx])
        p, v = almanac_ecef(arrays, unix_to_gps_s(u))
        pos[alm_idx] = p
        vel[alm_idx] = v
    if tle_idx:
        p, v, err = sgp4_ecef([orbits.entries[i].satrec for i in tle_idx], u)
        pos[tle_idx] = p
        vel[tle_idx] = v
        for row in np.nonzero(err.any(axis=1))[0]:
            e = orbits.entries[tle_idx[row]]
            codes = np.unique(err[row][err[row] != 0])
            first = u[np.argmax(err[row] != 0)]
            warnings.append(
                f"{e.info.sat_id}: SGP4 failed on {int((err[row] != 0).sum())} of {n_t} samples "
                f"from {iso_z(first)} ({'; '.join(sgp4_error_text(c) for c in codes)}); "
                "those samples are left out")
    valid = np.isfinite(pos[..., 0])
    return pos, vel, valid, warnings


def _mu_for(orbits: OrbitSet) -> np.ndarray:
    return np.array([GPS_MU_M3_S2 if e.almanac is not None else WGS72_MU_M3_S2
                     for e in orbits.entries])


def _geometry(pos: np.ndarray, vel: np.ndarray, mu: np.ndarray, site: Site, wavelength: np.ndarray):
    """Line-of-sight quantities from Earth-fixed states (S, T, 3), component-wise."""
    sx, sy, sz = site.ecef_m
    px, py, pz = pos[..., 0], pos[..., 1], pos[..., 2]
    vx, vy, vz = vel[..., 0], vel[..., 1], vel[..., 2]
    dx, dy, dz = px - sx, py - sy, pz - sz
    rng = np.sqrt(dx * dx + dy * dy + dz * dz)
    inv = 1.0 / rng
    lx, ly, lz = dx * inv, dy * inv, dz * inv
    rr = lx * vx + ly * vy + lz * vz
    # Earth-fixed acceleration of a two-body orbit: gravity less Coriolis and centrifugal
    # terms (J2 neglected: < 6e-5 m/s^2, i.e. < 3e-4 Hz/s at L1).
    r2 = px * px + py * py + pz * pz
    k = mu[:, None] / (r2 * np.sqrt(r2))
    w = EARTH_ROTATION_RAD_S
    ax = -k * px + 2.0 * w * vy + w * w * px
    ay = -k * py - 2.0 * w * vx + w * w * py
    az_ = -k * pz
    v2 = vx * vx + vy * vy + vz * vz
    racc = (v2 + dx * ax + dy * ay + dz * az_ - rr * rr) * inv
    rot = site.enu_rotation
    e = rot[0, 0] * lx + rot[0, 1] * ly
    n = rot[1, 0] * lx + rot[1, 1] * ly + rot[1, 2] * lz
    sin_el = rot[2, 0] * lx + rot[2, 1] * ly + rot[2, 2] * lz
    horiz = np.sqrt(e * e + n * n)
    azimuth = np.degrees(np.arctan2(e, n)) % 360.0
    el = np.degrees(np.arctan2(sin_el, horiz))
    up_v = rot[2, 0] * vx + rot[2, 1] * vy + rot[2, 2] * vz
    d_sin_el = (up_v - sin_el * rr) * inv
    el_rate = np.degrees(d_sin_el / np.maximum(horiz, 1e-12))
    lam = wavelength[:, None]
    los = np.stack((lx, ly, lz), axis=-1)
    return dict(azimuth_deg=azimuth, elevation_deg=el, range_m=rng, range_rate_m_s=rr,
                range_accel_m_s2=racc, doppler_hz=-rr / lam, doppler_rate_hz_s=-racc / lam,
                elevation_rate_deg_s=el_rate, los_ecef=los)


def predict(orbits: OrbitSet, site: Site, times: TimeGrid | Sequence[datetime] | np.ndarray,
            signals: SignalChoice = None) -> Prediction:
    """Azimuth, elevation, range, range rate, Doppler and Doppler rate of every satellite
    of ``orbits`` seen from ``site`` at ``times`` (TimeGrid, aware datetimes, or UTC POSIX s)."""
    if not len(orbits.entries):
        raise ComputationError("the orbit data holds no satellites")
    grid = as_time_grid(times)
    if len(grid) == 0:
        raise InputError("no times to predict at", field="times")
    sig_ids = resolve_signals(orbits, signals)
    carrier = np.array([SIGNALS[s].carrier_for(e.info.glonass_k)
                        for s, e in zip(sig_ids, orbits.entries)])
    pos, vel, valid, warnings = propagate_ecef(orbits, grid.unix_s)
    g = _geometry(pos, vel, _mu_for(orbits), site, SPEED_OF_LIGHT_M_S / carrier)
    return Prediction(ids=orbits.ids, signal_ids=sig_ids, carrier_hz=carrier, times=grid,
                      site=site, sat_pos_ecef_m=pos, sat_vel_ecef_m_s=vel, valid=valid,
                      warnings=list(orbits.warnings) + warnings, **g)


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
    (the grid test that selected the interval guarantees the sign change)."""
    h = t1 - t0

    def g(x):
        if derivative:
            return _hermite_slope(x, h, f0, f1, d0, d1)
        return _hermite_value(x, h, f0, f1, d0, d1) - level

    lo, hi = np.zeros_like(t0), np.ones_like(t0)
    s_lo = np.sign(g(lo))
    for _ in range(iterations):
        mid = 0.5 * (lo + hi)
        same = np.sign(g(mid)) == s_lo
        lo = np.where(same, mid, lo)
        hi = np.where(same, hi, mid)
    x = 0.5 * (lo + hi)
    return t0 + x * h, _hermite_value(x, h, f0, f1, d0, d1)


def passes(orbits: OrbitSet, site: Site, start: datetime | float, end: datetime | float,
           mask_deg: float = 10.0, step_s: float = 60.0,
           prediction: Prediction | None = None) -> list[Pass]:
    """Passes above ``mask_deg`` between start and end, sorted by rise time.

    Crossings and culminations are found on a ``step_s`` grid and refined on the cubic
    Hermite interpolant of the elevation and its analytic rate between grid points
    (elevation is smooth over minutes: the refined times agree with the true model to
    far better than 1 s at 60 s steps, see tests/test_geometry.py). A pass shorter than
    the step can be missed; at GNSS altitudes passes last hours.
    """
    a = start if isinstance(start, float | int) else to_unix_s(start)
    b = end if isinstance(end, float | int) else to_unix_s(end)
    if b <= a:
        raise InputError("end must be after start", field="end")
    if not (math.isfinite(step_s) and step_s > 0):
        raise InputError(f"step {step_s} s must be a positive number", field="step_s")
    if prediction is None:
        n = max(2, int(np.ceil((b - a) / step_s)) + 1)
        prediction = predict(orbits, site, np.linspace(a, b, n))
    u = prediction.times.unix_s
    el = np.where(prediction.valid, prediction.elevation_deg, -90.0)
    rate = prediction.elevation_rate_deg_s
    above = el >= mask_deg

    r_ok = np.where(prediction.valid, rate, 0.0)
    # Mask crossings between grid points (both ends propagated).
    both = prediction.valid[:, 1:] & prediction.valid[:, :-1]
    s_idx, t_idx = np.nonzero((above[:, 1:] != above[:, :-1]) & both)
    cross, _ = _hermite_roots(u[t_idx], u[t_idx + 1], el[s_idx, t_idx], el[s_idx, t_idx + 1],
                              r_ok[s_idx, t_idx], r_ok[s_idx, t_idx + 1], level=mask_deg)
    rising = ~above[s_idx, t_idx]
    # Culminations: elevation rate changes from + to -.
    cs, ct = np.nonzero((r_ok[:, :-1] > 0) & (r_ok[:, 1:] <= 0) & both)
    culm, culm_el = _hermite_roots(u[ct], u[ct + 1], el[cs, ct], el[cs, ct + 1], r_ok[cs, ct],
                                   r_ok[cs, ct + 1], derivative=True)

    out: list[Pass] = []
    for s in range(prediction.n_satellites):
        events = sorted([(t, "rise" if r else "set") for t, r, ss in zip(cross, rising, s_idx) if ss == s])
        intervals = []
        cur = u[0] if above[s, 0] else None
        for t, kind in events:
            if kind == "rise":
                cur = t
            elif cur is not None:
                intervals.append((cur, t))
                cur = None
        if cur is not None:
            intervals.append((cur, u[-1]))
        for r0, s0 in intervals:
            inside = (cs == s) & (culm >= r0) & (culm <= s0)
            cand_t = list(culm[inside]) + [r0, s0]
            cand_el = list(culm_el[inside]) + [_el_at(u, el[s], r_ok[s], r0),
                                               _el_at(u, el[s], r_ok[s], s0)]
            k = int(np.nanargmax(cand_el))
            az_pair = [_el_at(u, prediction.azimuth_deg[s], None, t, angle=True) for t in (r0, s0)]
            out.append(Pass(prediction.ids[s], float(r0), float(cand_t[k]), float(s0),
                            float(cand_el[k]), float(az_pair[0]), float(az_pair[1]),
                            rises_in_window=bool(r0 > u[0]), sets_in_window=bool(s0 < u[-1])))
    out.sort(key=lambda p: (p.rise_unix_s, p.sat_id))
    return out


def _el_at(u, values, rates, t, angle=False):
    """Value of a grid series at time t: Hermite with rates, else linear (angles unwrapped)."""
    j = int(np.clip(np.searchsorted(u, t) - 1, 0, u.size - 2))
    h = u[j + 1] - u[j]
    x = (t - u[j]) / h
    f0, f1 = float(values[j]), float(values[j + 1])
    if angle:
        f1 = f0 + ((f1 - f0 + 180.0) % 360.0 - 180.0)
        return (f0 + x * (f1 - f0)) % 360.0
    if rates is None:
        return f0 + x * (f1 - f0)
    d0, d1 = float(rates[j]), float(rates[j + 1])
    return ((2 * x**3 - 3 * x**2 + 1) * f0 + (x**3 - 2 * x**2 + x) * h * d0
            + (-2 * x**3 + 3 * x**2) * f1 + (x**3 - x**2) * h * d1)

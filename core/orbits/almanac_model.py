"""IS-GPS-200 almanac orbit model, vectorized over (satellite, time).

Algorithm [pub: IS-GPS-200 Table 20-IV, with the almanac simplifications of
20.3.3.5.2.1: toa replaces toe, dn = 0, no harmonic corrections, IDOT = 0].
Velocity is the analytic time derivative of the same expressions (as in
Thompson et al., "Computing GPS satellite velocity and acceleration from the
broadcast navigation message", NAVIGATION 66(4), 2019). Output is Earth-fixed
(WGS-84 / ITRF-aligned) position and velocity in metres and metres per second.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from ..ground.constants import EARTH_ROTATION_RAD_S, GPS_MU_M3_S2, HALF_WEEK_S, SECONDS_PER_WEEK
from .node_interp import NODE_STEPS_S, kink_constants, smooth_error_bounds, widest_step_s
from .orbit_set import AlmanacRecord

# Above this eccentricity almanac orbits are evaluated at every sample (as for SGP4).
MAX_INTERPOLATED_ECCENTRICITY = 0.3
# Rounding noise allowed for the model (fully converged Kepler solution: about 1e-15 a).
ALMANAC_NOISE_PER_A = 1e-11


@dataclass(frozen=True)
class AlmanacArrays:
    """Almanac elements stacked per satellite, shape (S,) each."""

    toa_gps_s: np.ndarray       # continuous GPS seconds of the reference epoch
    sqrt_a: np.ndarray
    e: np.ndarray
    i0: np.ndarray
    omega0: np.ndarray
    omega_dot: np.ndarray
    w: np.ndarray
    m0: np.ndarray

    @classmethod
    def from_records(cls, records: Sequence[AlmanacRecord]) -> AlmanacArrays:
        def col(name):
            return np.array([getattr(r, name) for r in records], dtype=float)
        toa = np.array([r.week_full * SECONDS_PER_WEEK + r.toa_s for r in records], dtype=float)
        return cls(toa, col("sqrt_a_m05"), col("eccentricity"), col("inclination_rad"),
                   col("omega0_rad"), col("omega_dot_rad_s"), col("arg_perigee_rad"),
                   col("mean_anomaly_rad"))

    def subset(self, idx) -> AlmanacArrays:
        """The rows ``idx`` (a list of indices)."""
        return AlmanacArrays(*(getattr(self, f)[idx] for f in self.__dataclass_fields__))


def solve_kepler(mean_anomaly, e, iterations: int = 8):
    """Eccentric anomaly from M = E - e sin E by Newton's method (e < 0.1 for GNSS)."""
    ecc = np.asarray(e)
    big_e = np.array(mean_anomaly, dtype=float, copy=True)
    for _ in range(iterations):
        big_e -= (big_e - ecc * np.sin(big_e) - mean_anomaly) / (1.0 - ecc * np.cos(big_e))
    return big_e


def almanac_ecef(alm: AlmanacArrays, gps_s: np.ndarray, *, wrap_week: bool = False
                 ) -> tuple[np.ndarray, np.ndarray]:
    """Earth-fixed position (m) and velocity (m/s), each shaped (S, T, 3).

    ``gps_s`` is continuous GPS time (s since 1980-01-06). With ``wrap_week`` the time
    from the reference epoch is wrapped into +-302400 s as the ICD does for a receiver
    that knows only the time of week; acqplan resolves full weeks, so it does not wrap.
    """
    t = np.asarray(gps_s, dtype=float)[None, :]
    toa = alm.toa_gps_s[:, None]
    tk = t - toa
    if wrap_week:
        tk = (tk + HALF_WEEK_S) % SECONDS_PER_WEEK - HALF_WEEK_S
    a = (alm.sqrt_a ** 2)[:, None]
    e = alm.e[:, None]
    n = np.sqrt(GPS_MU_M3_S2 / a ** 3)
    mk = alm.m0[:, None] + n * tk
    ek = solve_kepler(mk, e)
    sin_e, cos_e = np.sin(ek), np.cos(ek)
    one_m_ecos = 1.0 - e * cos_e
    root = np.sqrt(1.0 - e * e)
    nu = np.arctan2(root * sin_e, cos_e - e)
    u = nu + alm.w[:, None]
    r = a * one_m_ecos
    inc = np.broadcast_to(alm.i0[:, None], u.shape)
    omega_dot_rel = (alm.omega_dot - EARTH_ROTATION_RAD_S)[:, None]
    om = alm.omega0[:, None] + omega_dot_rel * tk - EARTH_ROTATION_RAD_S * toa_sow(toa)

    ek_dot = n / one_m_ecos
    nu_dot = ek_dot * root / one_m_ecos
    r_dot = a * e * sin_e * ek_dot

    cu, su = np.cos(u), np.sin(u)
    xp, yp = r * cu, r * su
    xp_dot = r_dot * cu - r * su * nu_dot
    yp_dot = r_dot * su + r * cu * nu_dot

    co, so = np.cos(om), np.sin(om)
    ci, si = np.cos(inc), np.sin(inc)
    x = xp * co - yp * ci * so
    y = xp * so + yp * ci * co
    z = yp * si
    vx = xp_dot * co - yp_dot * ci * so - y * omega_dot_rel
    vy = xp_dot * so + yp_dot * ci * co + x * omega_dot_rel
    vz = yp_dot * si
    return np.stack((x, y, z), axis=-1), np.stack((vx, vy, vz), axis=-1)


def toa_sow(toa_gps_s: np.ndarray) -> np.ndarray:
    """Seconds of week of a continuous GPS time (the ICD's toe term uses time of week)."""
    return np.mod(toa_gps_s, SECONDS_PER_WEEK)


def interpolation_bounds(alm: AlmanacArrays, h_s: float) -> tuple[np.ndarray, np.ndarray]:
    """Bounds (position m, velocity m/s per component), per satellite, of interpolating
    the model from nodes h apart (core.orbits.node_interp: a Kepler orbit seen from a frame
    turning at the Earth rate less the node rate; the factor for perturbations is kept
    although the almanac model has none); inf above MAX_INTERPOLATED_ECCENTRICITY."""
    with np.errstate(all="ignore"):               # corrupt records: NaN or inf, not used
        a = alm.sqrt_a ** 2
        n = np.sqrt(GPS_MU_M3_S2 / a ** 3)
        frame = (EARTH_ROTATION_RAD_S + np.abs(alm.omega_dot)) * 1.001
        e = np.clip(alm.e, 0.0, MAX_INTERPOLATED_ECCENTRICITY)
        pos, vel = smooth_error_bounds(a, e, n, h_s, frame)
        noise = (1.0 + kink_constants()[2]) * ALMANAC_NOISE_PER_A * a * (1.0 + e)
        rate = n * (1.0 + e) / (1.0 - e) + frame
        far = ~(alm.e <= MAX_INTERPOLATED_ECCENTRICITY)
        return (np.where(far, np.inf, pos + noise), np.where(far, np.inf, vel + noise * rate))


def node_steps_s(alm: AlmanacArrays) -> list[float]:
    """Per satellite, the widest node spacing whose bounds meet the tolerances (0.0: at
    every sample)."""
    bounds = {h: interpolation_bounds(alm, h) for h in NODE_STEPS_S}
    return [widest_step_s(lambda h, k=k: (float(bounds[h][0][k]), float(bounds[h][1][k])))
            for k in range(alm.e.size)]

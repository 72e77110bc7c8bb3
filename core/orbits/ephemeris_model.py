"""IS-GPS-200 broadcast ephemeris: Earth-fixed position and velocity, vectorized.

Algorithm [pub: IS-GPS-200 Table 20-IV, "Elements of Coordinate Systems"]: A = sqrtA^2,
n = sqrt(mu/A^3) + dn, tk = t - toe, Mk = M0 + n tk, Kepler's equation for Ek, true anomaly
nu, argument of latitude Phi = nu + omega with the second-harmonic corrections
du = cus sin 2Phi + cuc cos 2Phi, dr = crs sin 2Phi + crc cos 2Phi, di = cis sin 2Phi +
cic cos 2Phi; r = A(1 - e cos Ek) + dr, i = i0 + IDOT tk + di,
Omega = Omega0 + (Omegadot - OmegaE) tk - OmegaE toe. Velocity is the analytic time
derivative of the same expressions (as tabulated by Thompson et al., "Computing GPS
satellite velocity and acceleration from the broadcast navigation message", NAVIGATION
66(4), 2019), Earth-fixed. Clock: af0 + af1 dt + af2 dt^2 (group delay and the periodic
relativistic term are not applied: the SP3 clocks this is compared with exclude them too).

Also here: choosing the record in force at each instant (nearest toe, healthy, within the
fit interval) and a consistency screen for records that carry another satellite's orbit
(seen in real files: a "healthy" G01 record holding G23's elements).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from ..ground.constants import EARTH_ROTATION_RAD_S, GPS_MU_M3_S2, SECONDS_PER_WEEK
from .almanac_model import solve_kepler
from .readers.rinex_nav import GpsEphemerisRecord


@dataclass(frozen=True)
class EphemerisArrays:
    """Broadcast elements stacked per record, shape (R,) each."""

    toe_gps_s: np.ndarray
    toc_gps_s: np.ndarray
    sqrt_a: np.ndarray
    e: np.ndarray
    i0: np.ndarray
    idot: np.ndarray
    omega0: np.ndarray
    omega_dot: np.ndarray
    w: np.ndarray
    m0: np.ndarray
    dn: np.ndarray
    cuc: np.ndarray
    cus: np.ndarray
    crc: np.ndarray
    crs: np.ndarray
    cic: np.ndarray
    cis: np.ndarray
    af0: np.ndarray
    af1: np.ndarray
    af2: np.ndarray

    @classmethod
    def from_records(cls, records: Sequence[GpsEphemerisRecord]) -> EphemerisArrays:
        def col(name: str) -> np.ndarray:
            return np.array([getattr(r, name) for r in records], dtype=float)
        return cls(
            toe_gps_s=np.array([r.toe_gps_s for r in records], dtype=float),
            toc_gps_s=col("toc_gps_s"), sqrt_a=col("sqrt_a_m05"), e=col("eccentricity"),
            i0=col("i0_rad"), idot=col("idot_rad_s"), omega0=col("omega0_rad"),
            omega_dot=col("omega_dot_rad_s"), w=col("arg_perigee_rad"), m0=col("m0_rad"),
            dn=col("delta_n_rad_s"), cuc=col("cuc_rad"), cus=col("cus_rad"), crc=col("crc_m"),
            crs=col("crs_m"), cic=col("cic_rad"), cis=col("cis_rad"), af0=col("af0_s"),
            af1=col("af1_s_s"), af2=col("af2_s_s2"))


def ephemeris_ecef(eph: EphemerisArrays, gps_s: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Earth-fixed position (m) and velocity (m/s) of every record at every time, (R, T, 3).

    ``gps_s`` is continuous GPS time; tk = t - toe is not wrapped (weeks are resolved).
    ``gps_s`` may also be (R, T) to give each record its own times.
    """
    t = np.asarray(gps_s, dtype=float)
    if t.ndim <= 1:
        t = np.atleast_1d(t)[None, :]

    def c(x: np.ndarray) -> np.ndarray:
        return x[:, None]

    tk = t - c(eph.toe_gps_s)
    a = c(eph.sqrt_a) ** 2
    e = c(eph.e)
    n0 = np.sqrt(GPS_MU_M3_S2 / a ** 3)
    n = n0 + c(eph.dn)
    mk = c(eph.m0) + n * tk
    ek = solve_kepler(mk, e)
    sin_e, cos_e = np.sin(ek), np.cos(ek)
    one_m_ecos = 1.0 - e * cos_e
    root = np.sqrt(1.0 - e * e)
    nu = np.arctan2(root * sin_e, cos_e - e)
    phi = nu + c(eph.w)
    s2, c2 = np.sin(2.0 * phi), np.cos(2.0 * phi)
    du = c(eph.cus) * s2 + c(eph.cuc) * c2
    dr = c(eph.crs) * s2 + c(eph.crc) * c2
    di = c(eph.cis) * s2 + c(eph.cic) * c2
    u = phi + du
    r = a * one_m_ecos + dr
    inc = c(eph.i0) + c(eph.idot) * tk + di
    omega_rel = c(eph.omega_dot) - EARTH_ROTATION_RAD_S
    toe_sow = np.mod(eph.toe_gps_s, SECONDS_PER_WEEK)[:, None]
    om = c(eph.omega0) + omega_rel * tk - EARTH_ROTATION_RAD_S * toe_sow

    ek_dot = n / one_m_ecos
    nu_dot = ek_dot * root / one_m_ecos
    phi_dot = nu_dot
    two_phi_dot = 2.0 * phi_dot
    u_dot = phi_dot + two_phi_dot * (c(eph.cus) * c2 - c(eph.cuc) * s2)
    r_dot = a * e * sin_e * ek_dot + two_phi_dot * (c(eph.crs) * c2 - c(eph.crc) * s2)
    i_dot = c(eph.idot) + two_phi_dot * (c(eph.cis) * c2 - c(eph.cic) * s2)

    cu, su = np.cos(u), np.sin(u)
    xp, yp = r * cu, r * su
    xp_dot = r_dot * cu - r * su * u_dot
    yp_dot = r_dot * su + r * cu * u_dot
    co, so = np.cos(om), np.sin(om)
    ci, si = np.cos(inc), np.sin(inc)
    x = xp * co - yp * ci * so
    y = xp * so + yp * ci * co
    z = yp * si
    vx = xp_dot * co - yp_dot * ci * so + yp * si * i_dot * so - y * omega_rel
    vy = xp_dot * so + yp_dot * ci * co - yp * si * i_dot * co + x * omega_rel
    vz = yp_dot * si + yp * ci * i_dot
    return np.stack((x, y, z), axis=-1), np.stack((vx, vy, vz), axis=-1)


def ephemeris_clock_s(eph: EphemerisArrays, gps_s: np.ndarray) -> np.ndarray:
    """Satellite clock offset af0 + af1 dt + af2 dt^2 (s), (R, T); dt = t - toc."""
    t = np.atleast_1d(np.asarray(gps_s, dtype=float))[None, :]
    dt = t - eph.toc_gps_s[:, None]
    return eph.af0[:, None] + eph.af1[:, None] * dt + eph.af2[:, None] * dt * dt


def screen_records(records: Sequence[GpsEphemerisRecord], tolerance_m: float = 5_000.0
                   ) -> tuple[list[GpsEphemerisRecord], list[str]]:
    """Drop records whose orbit contradicts the satellite's other records.

    A record is dropped when, at its own toe, it is more than ``tolerance_m`` from the
    median of the satellite's other records (health ignored) within 6 h, given at least
    two of them; the message names the satellite whose orbit it matches, if any.
    """
    recs = list(records)
    if not recs:
        return [], []
    arrays = EphemerisArrays.from_records(recs)
    toe = arrays.toe_gps_s
    # Each record evaluated at every record's toe: (R, R, 3).
    pos, _ = ephemeris_ecef(arrays, np.broadcast_to(toe[None, :], (len(recs), len(recs))))
    ids = np.array([r.sat_id for r in recs])
    keep: list[GpsEphemerisRecord] = []
    messages: list[str] = []
    for j, rec in enumerate(recs):
        others = np.nonzero((ids == rec.sat_id) & (np.abs(toe - toe[j]) <= 6 * 3600.0)
                            & (np.arange(len(recs)) != j))[0]
        if others.size >= 2:
            ref = np.median(pos[others, j], axis=0)
            off = float(np.linalg.norm(pos[j, j] - ref))
            if off > tolerance_m:
                d_all = np.linalg.norm(pos[:, j] - pos[j, j], axis=1)
                d_all[ids == rec.sat_id] = np.inf
                k = int(np.argmin(d_all))
                like = (f"; it matches {ids[k]} to {d_all[k]:.0f} m"
                        if d_all[k] < tolerance_m else "")
                messages.append(f"{rec.sat_id} record at line {rec.line} (toe week {rec.toe_week} "
                                f"{rec.toe_sow_s:.0f} s) is {off / 1000:.0f} km from the "
                                f"satellite's neighbouring records{like}: dropped")
                continue
        keep.append(rec)
    return keep, messages


@dataclass
class BroadcastStates:
    """Positions (m), velocities (m/s), clocks (s) from the record in force, (S, T[, 3])."""

    sat_ids: list[str]
    gps_s: np.ndarray
    pos_m: np.ndarray
    vel_m_s: np.ndarray
    clock_s: np.ndarray
    valid: np.ndarray


def broadcast_states(records: Sequence[GpsEphemerisRecord], gps_s: np.ndarray,
                     sat_ids: Sequence[str] | None = None, *, healthy_only: bool = True,
                     ) -> BroadcastStates:
    """For each satellite and time, propagate the record with the nearest toe that lies
    within half its fit interval (default 4 h -> +-2 h). Missing: NaN, ``valid`` False."""
    t = np.atleast_1d(np.asarray(gps_s, dtype=float))
    recs = [r for r in records if r.healthy or not healthy_only]
    ids = sorted({r.sat_id for r in recs}) if sat_ids is None else list(sat_ids)
    n_s, n_t = len(ids), t.size
    pos = np.full((n_s, n_t, 3), np.nan)
    vel = np.full((n_s, n_t, 3), np.nan)
    clk = np.full((n_s, n_t), np.nan)
    if recs and n_s:
        arrays = EphemerisArrays.from_records(recs)
        rec_ids = np.array([r.sat_id for r in recs])
        half_fit = np.array([r.fit_interval_h for r in recs]) * 1800.0
        # |t - toe| for every (satellite, record, time); records of other satellites: inf.
        own = rec_ids[None, :] == np.array(ids)[:, None]                      # (S, R)
        age = np.abs(t[None, None, :] - arrays.toe_gps_s[None, :, None])     # (1, R, T)
        age = np.where(own[:, :, None], age, np.inf)                          # (S, R, T)
        best = np.argmin(age, axis=1)                                         # (S, T)
        best_age = np.take_along_axis(age, best[:, None, :], axis=1)[:, 0]
        ok = best_age <= half_fit[best]
        sel = best[ok]
        sub = EphemerisArrays(**{k: getattr(arrays, k)[sel]
                                 for k in arrays.__dataclass_fields__})
        t_ok = np.broadcast_to(t[None, :], (n_s, n_t))[ok]
        p, v = ephemeris_ecef(sub, t_ok[:, None])
        pos[ok] = p[:, 0]
        vel[ok] = v[:, 0]
        dt = t_ok - sub.toc_gps_s
        clk[ok] = sub.af0 + sub.af1 * dt + sub.af2 * dt * dt
    return BroadcastStates(ids, t, pos, vel, clk, np.isfinite(pos[..., 0]))

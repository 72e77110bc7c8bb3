"""IS-GPS-200 broadcast ephemeris: Earth-fixed position and velocity, vectorized.

Algorithm [pub: IS-GPS-200 Table 20-IV, "Elements of Coordinate Systems"]: A = sqrtA^2,
n = sqrt(mu/A^3) + dn, tk = t - toe, Mk = M0 + n tk, Kepler's equation for Ek, true anomaly
nu, argument of latitude Phi = nu + omega with the second-harmonic corrections
du = cus sin 2Phi + cuc cos 2Phi, dr = crs sin 2Phi + crc cos 2Phi, di = cis sin 2Phi +
cic cos 2Phi; r = A(1 - e cos Ek) + dr, i = i0 + IDOT tk + di,
Omega = Omega0 + (Omegadot - OmegaE) tk - OmegaE toe. Velocity is the analytic time
derivative of the same expressions (as tabulated by Thompson et al., "Computing GPS
satellite velocity and acceleration from the broadcast navigation message", NAVIGATION
66(4), 2019), Earth-fixed. Galileo, BeiDou and QZSS use the same algorithm with their own constants
[pub: IS-QZSS-PNT; mem: Galileo OS SIS ICD 2.0 Table 60; BDS-SIS-ICD-B1I 3.0 Table 5-11];
BeiDou GEO satellites keep the node inertial and are turned into the Earth-fixed frame by
Rz(omega_e tk) Rx(-5 deg) (ICD). Clock: af0 + af1 dt + af2 dt^2 (group delay and the periodic
relativistic term are not applied: the SP3 clocks this is compared with exclude them too).

Also here: choosing the record in force at each instant (nearest toe, healthy, within the
fit interval) and a consistency screen for records that carry another satellite's orbit
(seen in real files: a "healthy" G01 record holding G23's elements).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from ..ground.constants import (
    BEIDOU_EARTH_ROTATION_RAD_S,
    BEIDOU_GEO_TILT_RAD,
    BEIDOU_MU_M3_S2,
    EARTH_ROTATION_RAD_S,
    GALILEO_EARTH_ROTATION_RAD_S,
    GALILEO_MU_M3_S2,
    GPS_MU_M3_S2,
)
from .almanac_model import solve_kepler

if TYPE_CHECKING:       # records come from readers.rinex_nav, which imports nothing from here
    from .readers.rinex_nav import GpsEphemerisRecord

# Each system's constants for its own user algorithm (core.ground.constants has the sources;
# QZSS uses the GPS values).
_MU = {"G": GPS_MU_M3_S2, "J": GPS_MU_M3_S2, "E": GALILEO_MU_M3_S2, "C": BEIDOU_MU_M3_S2}
_OMEGA_E = {"G": EARTH_ROTATION_RAD_S, "J": EARTH_ROTATION_RAD_S,
            "E": GALILEO_EARTH_ROTATION_RAD_S, "C": BEIDOU_EARTH_ROTATION_RAD_S}


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
    toe_sow: np.ndarray         # toe in seconds of the system's own week
    mu: np.ndarray              # the system's gravitational constant, m^3/s^2
    omega_e: np.ndarray         # the system's Earth rotation rate, rad/s
    geo: np.ndarray             # bool: BeiDou GEO (tilted-frame algorithm)

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
            af1=col("af1_s_s"), af2=col("af2_s_s2"), toe_sow=col("toe_sow_s"),
            mu=np.array([_MU[r.system] for r in records], dtype=float),
            omega_e=np.array([_OMEGA_E[r.system] for r in records], dtype=float),
            geo=np.array([r.beidou_geo for r in records], dtype=bool))


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
    n0 = np.sqrt(c(eph.mu) / a ** 3)
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
    w_e = c(eph.omega_e)
    geo = c(eph.geo)
    # BeiDou GEO: the node is kept in the inertial-like frame (no -omega_e tk here), the
    # Earth's rotation and the 5 deg tilt are applied after (BDS ICD GEO algorithm).
    omega_rel = c(eph.omega_dot) - np.where(geo, 0.0, w_e)
    om = c(eph.omega0) + omega_rel * tk - w_e * c(eph.toe_sow)

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
    pos = np.stack((x, y, z), axis=-1)
    vel = np.stack((vx, vy, vz), axis=-1)
    if eph.geo.any():
        pos, vel = _beidou_geo_rotation(pos, vel, np.broadcast_to(tk, x.shape),
                                        np.broadcast_to(w_e, x.shape),
                                        np.broadcast_to(geo, x.shape))
    return pos, vel


def _beidou_geo_rotation(pos: np.ndarray, vel: np.ndarray, tk: np.ndarray, w_e: np.ndarray,
                         geo: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """BeiDou GEO: P = Rz(w_e tk) Rx(-5 deg) P_GK, and its time derivative
    [mem: BDS-SIS-ICD-B1I 3.0, Table 5-11], applied where ``geo`` is True."""
    ct, st = np.cos(BEIDOU_GEO_TILT_RAD), np.sin(BEIDOU_GEO_TILT_RAD)
    # Rx(phi) = [[1, 0, 0], [0, cos, sin], [0, -sin, cos]]
    def rx(v: np.ndarray) -> np.ndarray:
        return np.stack((v[..., 0], ct * v[..., 1] + st * v[..., 2],
                         -st * v[..., 1] + ct * v[..., 2]), axis=-1)
    pt, vt = rx(pos), rx(vel)
    ang = w_e * tk
    ca, sa = np.cos(ang), np.sin(ang)
    # Rz(a) = [[cos, sin, 0], [-sin, cos, 0], [0, 0, 1]]; dRz/da = [[-sin, cos, 0], [-cos, -sin, 0], 0]
    px = ca * pt[..., 0] + sa * pt[..., 1]
    py = -sa * pt[..., 0] + ca * pt[..., 1]
    vx = ca * vt[..., 0] + sa * vt[..., 1] + w_e * (-sa * pt[..., 0] + ca * pt[..., 1])
    vy = -sa * vt[..., 0] + ca * vt[..., 1] + w_e * (-ca * pt[..., 0] - sa * pt[..., 1])
    p_geo = np.stack((px, py, pt[..., 2]), axis=-1)
    v_geo = np.stack((vx, vy, vt[..., 2]), axis=-1)
    g = geo[..., None]
    return np.where(g, p_geo, pos), np.where(g, v_geo, vel)


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
    two of them; the message names the satellite whose orbit it matches, if any. The work
    is per satellite (records x records of one satellite), so long mixed files stay cheap.
    """
    recs = list(records)
    if not recs:
        return [], []
    ids = np.array([r.sat_id for r in recs])
    toe_all = np.array([r.toe_gps_s for r in recs])
    dropped: set[int] = set()
    messages: list[str] = []
    for sid in dict.fromkeys(ids):
        rows = np.nonzero(ids == sid)[0]
        if rows.size < 3:
            continue
        sub = [recs[k] for k in rows]
        arrays = EphemerisArrays.from_records(sub)
        toe = toe_all[rows]
        # Each record of the satellite at every one of its records' toe: (R, R, 3).
        pos, _ = ephemeris_ecef(arrays, np.broadcast_to(toe[None, :], (rows.size, rows.size)))
        for j in range(rows.size):
            others = np.nonzero((np.abs(toe - toe[j]) <= 6 * 3600.0)
                                & (np.arange(rows.size) != j))[0]
            if others.size < 2:
                continue
            ref = np.median(pos[others, j], axis=0)
            off = float(np.linalg.norm(pos[j, j] - ref))
            if off <= tolerance_m:
                continue
            rec = sub[j]
            dropped.add(int(rows[j]))
            messages.append(f"{rec.sat_id} record at line {rec.line} (toe week {rec.toe_week} "
                            f"{rec.toe_sow_s:.0f} s) is {off / 1000:.0f} km from the "
                            f"satellite's neighbouring records{_look_alike(recs, ids, j_rec=rec, at=toe[j], own=pos[j, j], tolerance_m=tolerance_m)}: dropped")
    keep = [r for k, r in enumerate(recs) if k not in dropped]
    return keep, messages


def _look_alike(recs: list[GpsEphemerisRecord], ids: np.ndarray, *, j_rec: GpsEphemerisRecord,
                at: float, own: np.ndarray, tolerance_m: float) -> str:
    """'; it matches G23 to 0 m' when another satellite's nearest record agrees."""
    best, best_d = "", np.inf
    for sid in dict.fromkeys(ids):
        if sid == j_rec.sat_id:
            continue
        cand = [r for r in recs if r.sat_id == sid]
        r = min(cand, key=lambda x: abs(x.toe_gps_s - at))
        if abs(r.toe_gps_s - at) > 4 * 3600.0:
            continue
        p, _ = ephemeris_ecef(EphemerisArrays.from_records([r]), np.array([at]))
        d = float(np.linalg.norm(p[0, 0] - own))
        if d < best_d:
            best, best_d = sid, d
    return f"; it matches {best} to {best_d:.0f} m" if best_d < tolerance_m else ""


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

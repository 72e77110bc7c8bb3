"""SGP4 propagation of TLE orbits, vectorized, with the TEME -> Earth-fixed rotation.

SGP4 is run through ``sgp4.api.SatrecArray`` on UTC-based Julian dates split into
whole + fraction [pub: AIAA 2006-6753, Vallado et al., "Revisiting Spacetrack Report
#3", sec. on time: SGP4 epochs are UTC]. TEME is rotated to the pseudo-Earth-fixed frame
by Greenwich mean sidereal time (IAU 1982) evaluated at UT1 [pub: AIAA 2006-6753
Appendix C]; UT1 - UTC comes from skyfield's bundled table (offline). Polar motion
(< 0.5 arcsec, below 20 m at GNSS range and a negligible Doppler effect) is not applied,
as skyfield does by default.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from sgp4.api import SGP4_ERRORS, Satrec, SatrecArray

from ..ground.timeutil import jd_split_utc, ut1_split


def gmst82_rad(jd_ut1_whole: np.ndarray, jd_ut1_frac: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """GMST (IAU 1982) in radians and its rate in rad/s [pub: AIAA 2006-6753 eq. C-5;
    the same expression as skyfield's ``theta_GMST1982``]."""
    t = (jd_ut1_whole - 2451545.0 + jd_ut1_frac) / 36525.0
    g = 67310.54841 + (8640184.812866 + (0.093104 + (-6.2e-6) * t) * t) * t
    dg = 8640184.812866 + (0.093104 * 2.0 + (-6.2e-6 * 3.0) * t) * t
    theta = ((jd_ut1_whole % 1.0) + jd_ut1_frac + (g / 86400.0 % 1.0)) % 1.0 * 2.0 * np.pi
    theta_dot = (1.0 + dg / (86400.0 * 36525.0)) * 2.0 * np.pi / 86400.0
    return theta, theta_dot


def teme_to_ecef(r_teme_km: np.ndarray, v_teme_km_s: np.ndarray, theta: np.ndarray,
                 theta_dot: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Rotate (S, T, 3) TEME vectors (km, km/s) to Earth-fixed metres and metres per second.

    r_ecef = R3(theta) r_teme;  v_ecef = R3(theta) v_teme - omega x r_ecef.
    """
    c = np.cos(theta)[None, :]
    s = np.sin(theta)[None, :]
    x, y, z = r_teme_km[..., 0], r_teme_km[..., 1], r_teme_km[..., 2]
    vx, vy, vz = v_teme_km_s[..., 0], v_teme_km_s[..., 1], v_teme_km_s[..., 2]
    xe = c * x + s * y
    ye = -s * x + c * y
    w = theta_dot[None, :] if np.ndim(theta_dot) else theta_dot
    vxe = c * vx + s * vy + w * ye
    vye = -s * vx + c * vy - w * xe
    r = np.stack((xe, ye, z), axis=-1)
    v = np.stack((vxe, vye, vz), axis=-1)
    r *= 1000.0
    v *= 1000.0
    return r, v


# Satellites slower than this (rev/day) are propagated at nodes NODE_STEP_S apart and
# interpolated (4-node Lagrange on Earth-fixed position and velocity) onto denser grids.
# For GNSS orbits (2 rev/day) this changes Doppler by < 1e-4 Hz and position by < 1 mm
# against propagating every sample [checked in tests/test_geometry.py]; LEO orbits are
# always propagated at every sample.
HERMITE_MAX_REV_PER_DAY = 4.0
NODE_STEP_S = 60.0


def _lagrange4(nodes_u: np.ndarray, *values: np.ndarray):
    """Cubic (4-node) Lagrange interpolation of (S, N, 3) node arrays onto times (T,).

    SGP4's velocity is not exactly the time derivative of its position (its partials
    drop small terms: about 0.1 m/s for 12 h orbits), so position and velocity are each
    interpolated from SGP4's own node values, which keeps both equal to what SGP4 gives
    at every sample to about 1 cm and 1e-5 m/s at 60 s node spacing. The interpolation
    is one sparse (T x N) matrix with four weights a row, applied to all satellites at once.
    """
    from scipy.sparse import csr_matrix

    h = nodes_u[1] - nodes_u[0]
    n = nodes_u.size

    def at(unix_s: np.ndarray) -> list[np.ndarray]:
        t = unix_s.size
        i = np.clip(((unix_s - nodes_u[0]) // h).astype(np.int64) - 1, 0, n - 4)
        x = (unix_s - nodes_u[i]) / h                      # in [1, 2) inside
        w = np.stack([-(x - 1) * (x - 2) * (x - 3) / 6.0, x * (x - 2) * (x - 3) / 2.0,
                      -x * (x - 1) * (x - 3) / 2.0, x * (x - 1) * (x - 2) / 6.0], axis=1)
        cols = i[:, None] + np.arange(4)[None, :]
        mat = csr_matrix((w.ravel(), cols.ravel(), np.arange(0, 4 * t + 1, 4)), shape=(t, n))
        out = []
        for f in values:
            s_, _, k = f.shape
            flat = np.ascontiguousarray(f.transpose(1, 0, 2)).reshape(n, s_ * k)
            res = mat @ flat                                   # (T, S*3)
            out.append(np.ascontiguousarray(res.reshape(t, s_, k).transpose(1, 0, 2)))
        return out

    return at


def sgp4_ecef(satrecs: Sequence[Satrec], unix_s: np.ndarray, *, interpolate: bool = True
              ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Earth-fixed position (m) and velocity (m/s), (S, T, 3) each, and error codes (S, T).

    Samples with a nonzero SGP4 error code are NaN. With ``interpolate`` (default), slow
    orbits on grids denser than NODE_STEP_S are propagated at the nodes only and
    interpolated (see HERMITE_MAX_REV_PER_DAY).
    """
    u = np.asarray(unix_s, dtype=float)
    sats = list(satrecs)
    n_s, n_t = len(sats), u.size
    slow = np.array([s.no_kozai * 1440.0 / (2 * np.pi) < HERMITE_MAX_REV_PER_DAY for s in sats])
    span = u.max() - u.min() if n_t else 0.0
    dense = n_t > 8 and span / max(n_t - 1, 1) < 0.75 * NODE_STEP_S
    if not (interpolate and dense and slow.any()):
        return _sgp4_direct(sats, u)
    r_out = np.empty((n_s, n_t, 3))
    v_out = np.empty((n_s, n_t, 3))
    e_out = np.zeros((n_s, n_t), dtype=np.uint8)
    fast = np.nonzero(~slow)[0]
    if fast.size:
        r, v, e = _sgp4_direct([sats[k] for k in fast], u)
        r_out[fast], v_out[fast], e_out[fast] = r, v, e
    idx = np.nonzero(slow)[0]
    n0 = (np.floor(u.min() / NODE_STEP_S) - 1) * NODE_STEP_S
    nodes = n0 + NODE_STEP_S * np.arange(int(np.ceil((u.max() - n0) / NODE_STEP_S)) + 3)
    r, v, e = _sgp4_direct([sats[k] for k in idx], nodes)
    ri, vi = _lagrange4(nodes, r, v)(u)
    j = np.clip(((u - nodes[0]) // NODE_STEP_S).astype(np.int64) - 1, 0, nodes.size - 4)
    err = np.maximum.reduce([e[:, j], e[:, j + 1], e[:, j + 2], e[:, j + 3]])
    r_out[idx], v_out[idx], e_out[idx] = ri, vi, err
    return r_out, v_out, e_out


def _sgp4_direct(satrecs: Sequence[Satrec], unix_s: np.ndarray
                 ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    u = np.asarray(unix_s, dtype=float)
    jd, fr = jd_split_utc(u)
    err, r, v = SatrecArray(list(satrecs)).sgp4(jd, fr)
    jw, jf = ut1_split(u)
    theta, theta_dot = gmst82_rad(jw, jf)
    r_e, v_e = teme_to_ecef(r, v, theta, theta_dot)
    bad = err != 0
    if bad.any():
        r_e[bad] = np.nan
        v_e[bad] = np.nan
    return r_e, v_e, err


def sgp4_error_text(code: int) -> str:
    return SGP4_ERRORS.get(int(code), f"SGP4 error {code}")

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
from .node_interp import NODE_STEP_S as NODE_STEP_S  # re-exported: the node spacing
from .node_interp import interpolated_states, is_dense


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
    """Rotate TEME vectors (km, km/s), (S, T, 3) as SGP4 gives them, to Earth-fixed metres
    and metres per second, component-first (3, S, T).

    r_ecef = R3(theta) r_teme;  v_ecef = R3(theta) v_teme - omega x r_ecef.
    """
    c = np.cos(theta)[None, :]
    s = np.sin(theta)[None, :]
    x, y, z = r_teme_km[..., 0], r_teme_km[..., 1], r_teme_km[..., 2]
    vx, vy, vz = v_teme_km_s[..., 0], v_teme_km_s[..., 1], v_teme_km_s[..., 2]
    n_s, n_t = x.shape
    r = np.empty((3, n_s, n_t))
    v = np.empty((3, n_s, n_t))
    np.multiply(c, x, out=r[0])
    r[0] += s * y
    np.multiply(c, y, out=r[1])
    r[1] -= s * x
    r[2] = z
    w = theta_dot[None, :] if np.ndim(theta_dot) else theta_dot
    np.multiply(c, vx, out=v[0])
    v[0] += s * vy
    v[0] += w * r[1]
    np.multiply(c, vy, out=v[1])
    v[1] -= s * vx
    v[1] -= w * r[0]
    v[2] = vz
    r *= 1000.0
    v *= 1000.0
    return r, v


# Satellites slower than this (rev/day) are propagated at nodes at most NODE_STEP_S apart
# and interpolated (4-node Lagrange on Earth-fixed position and velocity, see
# core.orbits.node_interp) onto denser grids. For GNSS orbits (2 rev/day) this changes
# Doppler by < 1e-4 Hz and position by < 1 mm against propagating every sample [checked in
# tests/test_geometry.py]; LEO orbits are always propagated at every sample.
HERMITE_MAX_REV_PER_DAY = 4.0


def sgp4_ecef_planes(satrecs: Sequence[Satrec], unix_s: np.ndarray, *, interpolate: bool = True
                     ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Earth-fixed position (m) and velocity (m/s), component-first (3, S, T) each, and
    error codes (S, T).

    Samples with a nonzero SGP4 error code are NaN. With ``interpolate`` (default), slow
    orbits on grids denser than NODE_STEP_S are propagated at the nodes only and
    interpolated (see HERMITE_MAX_REV_PER_DAY).
    """
    u = np.asarray(unix_s, dtype=float)
    sats = list(satrecs)
    n_s, n_t = len(sats), u.size
    slow = np.array([s.no_kozai * 1440.0 / (2 * np.pi) < HERMITE_MAX_REV_PER_DAY for s in sats],
                    dtype=bool)
    if not (interpolate and is_dense(u) and slow.any()):
        return _sgp4_direct(sats, u)
    if slow.all():
        return interpolated_states(lambda t: _sgp4_direct(sats, t), u)
    r_out = np.empty((3, n_s, n_t))
    v_out = np.empty((3, n_s, n_t))
    e_out = np.zeros((n_s, n_t), dtype=np.uint8)
    fast = np.nonzero(~slow)[0]
    r, v, e = _sgp4_direct([sats[k] for k in fast], u)
    r_out[:, fast], v_out[:, fast], e_out[fast] = r, v, e
    idx = np.nonzero(slow)[0]
    r, v, e = interpolated_states(lambda t: _sgp4_direct([sats[k] for k in idx], t), u)
    r_out[:, idx], v_out[:, idx], e_out[idx] = r, v, e
    return r_out, v_out, e_out


def sgp4_ecef(satrecs: Sequence[Satrec], unix_s: np.ndarray, *, interpolate: bool = True
              ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """As :func:`sgp4_ecef_planes`, with position and velocity shaped (S, T, 3) (views)."""
    r, v, e = sgp4_ecef_planes(satrecs, unix_s, interpolate=interpolate)
    return r.transpose(1, 2, 0), v.transpose(1, 2, 0), e


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
        r_e[:, bad] = np.nan
        v_e[:, bad] = np.nan
    return r_e, v_e, err


def sgp4_error_text(code: int) -> str:
    return SGP4_ERRORS.get(int(code), f"SGP4 error {code}")

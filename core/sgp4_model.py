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

from .timeutil import jd_split_utc, ut1_split


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


def sgp4_ecef(satrecs: Sequence[Satrec], unix_s: np.ndarray
              ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Earth-fixed position (m) and velocity (m/s), (S, T, 3) each, and error codes (S, T).

    Samples with a nonzero SGP4 error code are NaN.
    """
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

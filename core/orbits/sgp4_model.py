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

import math
from collections.abc import Sequence
from functools import lru_cache

import numpy as np
from sgp4.api import SGP4_ERRORS, Satrec, SatrecArray

from ..ground.constants import EARTH_ROTATION_RAD_S
from ..ground.timeutil import jd_split_utc, ut1_split
from .node_interp import NODE_STEP_S as NODE_STEP_S  # re-exported: the node spacing
from .node_interp import (
    grouped_states_many,
    kink_constants,
    smooth_error_bounds,
    widest_step_s,
)


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


# Satellites slower than this (rev/day) may be propagated at nodes and interpolated onto
# denser grids (core.orbits.node_interp); faster ones (near-Earth SGP4 with its drag terms)
# are always propagated at every sample.
HERMITE_MAX_REV_PER_DAY = 4.0
# Above this eccentricity an orbit is propagated at every sample (perigee passes need
# nodes closer than the spacings offered; the bound's series is meant for e <= 0.5).
MAX_INTERPOLATED_ECCENTRICITY = 0.3
# SGP4's deep-space branch switches between two formulations of the lunar-solar periodics
# (the Lyddane modification) where the inclination crosses 0.2 rad [pub: AIAA 2006-6753,
# sec. on dpper]: the position jumps there (about 1.7 km for the verification case 14128).
# Orbits within this distance of 0.2 rad are propagated at every sample.
LYDDANE_SWITCH_RAD = 0.2
LYDDANE_MARGIN_RAD = 0.02
# The 24-hour resonance integrator of SGP4 takes steps of 720 min from the epoch [pub:
# AIAA 2006-6753, dspace]; between steps the mean longitude is a quadratic in time, so
# at every step its rate jumps by xnddt * 720^2 / 2 and its second derivative by about
# xnddt * 720, with |xnddt| <= (|del1| + 2 |del2| + 3 |del3|) |xldot|. The rate xldot
# drifts by at most that coefficient sum per minute; the bound holds RESONANCE_HORIZON_S
# from the epoch (beyond the 120-day data age limit plus the lead allowed), and resonant
# orbits are propagated at every sample farther out.
RESONANCE_STEP_MIN = 720.0
RESONANCE_HORIZON_S = 150 * 86400.0
# SGP4's own rounding noise: its Kepler iteration stops below 1e-12 rad [pub: AIAA
# 2006-6753, sgp4 Kepler loop], i.e. about 1e-12 a along the track; allowed: 1e-11 a.
SGP4_NOISE_PER_A = 1e-11
# The frame rotation the bound sees: GMST rate (IAU 1982) plus a margin for the nodal
# and apsidal drifts (about 1e-4 of it for GNSS orbits).
_FRAME_RATE_RAD_S = EARTH_ROTATION_RAD_S * 1.001


def resonance_kinks(satrec: Satrec) -> tuple[float, float]:
    """(J1 m/s, J2 m/s^2): bounds of the jumps of SGP4's position slope and second
    derivative at the 720-min steps of its resonance integrator (0, 0 without one).

    The resonance coefficients come from python-sgp4's own initialisation (its pure
    Python ``sgp4init``, the same code the compiled one mirrors; WGS-72 constants, as the
    TLE reader uses)."""
    return _resonance_kinks(*_elements(satrec))


def _elements(s: Satrec) -> tuple:
    return (s.operationmode, int(s.satnum), float(s.jdsatepoch + s.jdsatepochF - 2433281.5),
            float(s.bstar), float(s.ndot), float(s.nddot), float(s.ecco), float(s.argpo),
            float(s.inclo), float(s.mo), float(s.no_kozai), float(s.nodeo))


@lru_cache(maxsize=4096)
def _resonance_kinks(*elements) -> tuple[float, float]:
    from sgp4.api import WGS72
    from sgp4.model import Satrec as PythonSatrec

    p = PythonSatrec()
    p.sgp4init(WGS72, *elements)
    if not getattr(p, "irez", 0):
        return 0.0, 0.0
    if p.irez != 1:
        return math.inf, math.inf            # 12-hour resonance: eccentric, never interpolated
    coef = abs(p.del1) + 2.0 * abs(p.del2) + 3.0 * abs(p.del3)           # rad/min^2
    xldot = abs(p.no_unkozai + p.xfact) + coef * RESONANCE_HORIZON_S / 60.0   # rad/min
    xnddt = coef * xldot                                                  # rad/min^3
    a_m = p.a * p.radiusearthkm * 1000.0 * (1.0 + p.ecco)
    j1 = a_m * xnddt * RESONANCE_STEP_MIN ** 2 / 2.0 / 60.0
    j2 = a_m * xnddt * RESONANCE_STEP_MIN / 3600.0
    return j1, j2


def interpolation_bounds(satrec: Satrec, h_s: float) -> tuple[float, float]:
    """Bounds (position m, velocity m/s per component) of interpolating this SGP4 orbit
    from nodes h apart against SGP4 at every sample (core.orbits.node_interp, with the
    resonance kinks and SGP4's noise added); inf where the orbit is not interpolated."""
    rev_day = satrec.no_kozai * 1440.0 / (2 * math.pi)
    deep = rev_day < 1440.0 / 225.0                  # SGP4's deep-space branch
    if (rev_day >= HERMITE_MAX_REV_PER_DAY or satrec.ecco > MAX_INTERPOLATED_ECCENTRICITY
            or (deep and abs(satrec.inclo - LYDDANE_SWITCH_RAD) < LYDDANE_MARGIN_RAD)):
        return math.inf, math.inf
    n = satrec.no_kozai / 60.0
    a = satrec.a * satrec.radiusearthkm * 1000.0
    r_b, v_b = smooth_error_bounds(a, satrec.ecco, n, h_s, _FRAME_RATE_RAD_S)
    k1, k2, lebesgue = kink_constants()
    j1, j2 = resonance_kinks(satrec)
    noise = (1.0 + lebesgue) * SGP4_NOISE_PER_A * a * (1.0 + satrec.ecco)
    speed_rate = n * (1.0 + satrec.ecco) / (1.0 - satrec.ecco) + _FRAME_RATE_RAD_S
    pos = float(r_b) + k1 * j1 * h_s + k2 * j2 * h_s ** 2 + noise
    # The velocity is computed from the same elements: its slope jumps by at most the
    # position's slope jump times the angular rate (d v / d angle = speed).
    vel = float(v_b) + speed_rate * (k1 * j1 * h_s + k2 * j2 * h_s ** 2) + noise * speed_rate
    return pos, vel


def node_step_s(satrec: Satrec) -> float:
    """The widest spacing of NODE_STEPS_S whose bound meets both tolerances, or 0.0 when
    the orbit is to be propagated at every sample (cached per set of elements)."""
    key = _elements(satrec)
    h = _NODE_STEP_CACHE.get(key)
    if h is None:
        if len(_NODE_STEP_CACHE) >= 4096:
            _NODE_STEP_CACHE.clear()
        h = _NODE_STEP_CACHE[key] = widest_step_s(lambda h: interpolation_bounds(satrec, h))
    return h


_NODE_STEP_CACHE: dict[tuple, float] = {}
_LAST_SET: list = [(), ()]          # the last satellite list (held) and its node spacings


def _steps_of(sats: list[Satrec]) -> tuple[tuple[float, ...], dict[int, float]]:
    """node_step_s of each satellite, and the epochs (UTC POSIX s) of the interpolated
    ones with a resonance integrator by index; predict's blocks ask for the same list
    again and again, so the last list's answer is kept (the list itself is held, so
    identities cannot be reused while it is)."""
    held, answer = _LAST_SET
    if len(held) == len(sats) and all(a is b for a, b in zip(held, sats)):
        return answer
    steps = tuple(node_step_s(s) for s in sats)
    resonant = {k: (s.jdsatepoch + s.jdsatepochF - 2440587.5) * 86400.0
                for k, s in enumerate(sats) if steps[k] and resonance_kinks(s)[0]}
    _LAST_SET[:] = [tuple(sats), (steps, resonant)]
    return steps, resonant


def sgp4_ecef_planes(satrecs: Sequence[Satrec], unix_s: np.ndarray, *, interpolate: bool = True,
                     anchor_s: float | None = None
                     ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Earth-fixed position (m) and velocity (m/s), component-first (3, S, T) each, and
    error codes (S, T).

    Samples with a nonzero SGP4 error code are NaN. With ``interpolate`` (default), each
    orbit whose error bound allows it (:func:`node_step_s`) is propagated at nodes only on
    grids at least two samples per node interval dense, and interpolated within the stated
    tolerances; ``anchor_s`` is a time on the node lattice (predict's blocks pass the
    grid's first sample; default the first of ``unix_s``).
    """
    return sgp4_ecef_planes_many(satrecs, [unix_s], [anchor_s], interpolate=interpolate)[0]


def sgp4_ecef_planes_many(satrecs: Sequence[Satrec], grids: Sequence[np.ndarray],
                          anchors_s: Sequence[float | None], *, interpolate: bool = True
                          ) -> list[tuple[np.ndarray, np.ndarray, np.ndarray]]:
    """:func:`sgp4_ecef_planes` of several grids at once (each with its anchor): SGP4 runs
    once over the nodes and samples of all (core.orbits.node_interp.grouped_states_many),
    each grid getting exactly what it gets alone."""
    sats = list(satrecs)
    grids = [np.asarray(u, dtype=float) for u in grids]
    all_steps = []
    for u in grids:
        if not (interpolate and u.size >= 2):
            all_steps.append([0.0] * len(sats))
            continue
        steps, resonant_epochs = _steps_of(sats)
        if resonant_epochs:
            steps = list(steps)
            span = float(u.min()), float(u.max())
            for k, epoch in resonant_epochs.items():
                if max(abs(span[0] - epoch), abs(span[1] - epoch)) > RESONANCE_HORIZON_S:
                    steps[k] = 0.0
        all_steps.append(list(steps))

    def direct(idx, t):
        return _sgp4_direct(sats if len(idx) == len(sats) else [sats[k] for k in idx], t)
    return grouped_states_many(direct, all_steps, grids, list(anchors_s))


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

"""A plausibility guard on propagated geometry: no impossible number reaches a plan.

The readers check each record's elements (:mod:`core.orbits.plausibility`); this guard
checks what propagation made of them, independently of how it was computed. For each
satellite, over its valid samples:

* it has a finite position at some time, and every position, velocity, range rate,
  Doppler, Doppler rate and elevation value is finite;
* its distance from the Earth's centre (when the prediction kept the states; otherwise
  its range from the site, widened by the site's distance from the centre) lies inside
  the shell of its system (perigee of the lowest to apogee of the highest orbit allowed,
  1 % slack);
* the range rate seen by a receiver at rest (and so the Doppler) is at most what an orbit
  of the shell allows, and so is its Earth-fixed speed (vis-viva for the largest
  semi-major axis plus omega_E r, 1 % slack; see ``_range_rate_bound_m_s``) [calc]; a
  moving receiver adds its largest speed. For GPS the Doppler bound is about 11 kHz at L1: loose against the 4.9 kHz of a
  circular orbit (domain-notes 4), but a value of megahertz (two almanac values swapped)
  is far outside it.

A satellite failing any of them is removed from the orbit set and the prediction with one
warning naming it, the value and the bound; it is never printed as a number.
"""

from __future__ import annotations

from dataclasses import fields, replace

import numpy as np

from ..ground.constants import EARTH_ROTATION_RAD_S, GPS_MU_M3_S2, WGS84_A_M
from ..ground.errors import InputError
from ..ground.geodesy import Site
from ..orbits.orbit_set import OrbitSet
from ..orbits.plausibility import shell_of
from .predict import Prediction

_SLACK = 1.01
_SITE_HEIGHT_MAX_M = 100_000.0      # the highest receiver any command accepts, with room
# A moving receiver adds its own speed to the range rate: the scenario allows 1000 m/s
# horizontal and 500 m/s vertical (core.plan.spec), 1118 m/s together [calc].
_RECEIVER_SPEED_MAX_M_S = 1200.0


def _speed_bound_m_s(shell, r: np.ndarray) -> np.ndarray:
    """Largest Earth-fixed speed at distance r of any orbit of the shell [calc: vis-viva
    with the largest a, plus omega_E r]."""
    rr = np.maximum(r, shell.radius_min_m)
    v2 = GPS_MU_M3_S2 * (2.0 / rr - 1.0 / shell.a_max_m)
    return np.sqrt(np.maximum(v2, 0.0)) + EARTH_ROTATION_RAD_S * r


def _range_rate_bound_m_s(shell, r: np.ndarray, v_max: np.ndarray) -> np.ndarray:
    """Largest |range rate| seen from a receiver at rest at most 100 km above the
    ellipsoid [calc]: with p the satellite, s the site (|s| <= S), rho >= r - S,
    rr = v.(p - s)/rho and |v.p| = |v_radial| r, so |rr| <= (v_radial,max r + v_max S) /
    (r - S); v_radial <= e sqrt(mu / p) (Kepler orbit, p = a(1 - e^2)) plus omega_E r
    is not radial."""
    site_max = WGS84_A_M + _SITE_HEIGHT_MAX_M
    p = shell.a_min_m * (1.0 - shell.e_max ** 2)
    vr_max = shell.e_max * np.sqrt(GPS_MU_M3_S2 / p) * _SLACK
    return (vr_max * r + v_max * site_max) / np.maximum(r - site_max, 1.0)


def _reason(pred: Prediction, s: int, system: str) -> str | None:
    ok = pred.valid[s]
    if not ok.any():
        return "propagation gives no finite position at any time of the window"
    rng = pred.range_m[s][ok]
    dop = pred.doppler_hz[s][ok]
    speed = pred.sat_speed_m_s[s][ok]
    if not all(np.isfinite(x).all() for x in (rng, dop, speed, pred.doppler_rate_hz_s[s][ok],
                                              pred.elevation_deg[s][ok])):
        return "propagation gives values that are not finite numbers"
    shell = shell_of(system)
    site_max = WGS84_A_M + _SITE_HEIGHT_MAX_M
    if pred.sat_pos_ecef_m is not None:                  # states kept: judge the radius itself
        r = np.linalg.norm(pred.sat_pos_ecef_m[s][ok], axis=-1)
        lo, hi, what = shell.radius_min_m / _SLACK, shell.radius_max_m * _SLACK, \
            "distance from the Earth's centre"
    else:                                                # the range from the site bounds it
        r = rng
        lo = max(shell.radius_min_m / _SLACK - site_max, 0.0)
        hi = shell.radius_max_m * _SLACK + site_max
        what = "range"
    k = int(np.argmax((r < lo) | (r > hi)))
    if r[k] < lo or r[k] > hi:
        return (f"its {what} reaches {r[k] / 1e3:.6g} km, outside the {lo / 1e3:.0f}-"
                f"{hi / 1e3:.0f} km any {shell.name} orbit allows")
    r_min = np.array([shell.radius_min_m])
    v_max = float(_speed_bound_m_s(shell, r_min)[0]) * _SLACK
    rr_max = float(_range_rate_bound_m_s(shell, r_min, np.array([v_max]))[0])
    if not isinstance(pred.site, Site):                  # a moving receiver: add its speed
        rr_max += _RECEIVER_SPEED_MAX_M_S
    lam = float(pred.wavelength_m[s])
    worst = int(np.argmax(np.abs(dop)))
    if abs(dop[worst]) * lam > rr_max:
        return (f"its Doppler reaches {dop[worst]:.6g} Hz, beyond the +-{rr_max / lam:.0f} Hz "
                f"any {shell.name} orbit allows")
    k = int(np.argmax(speed))
    if speed[k] > v_max:
        return (f"its Earth-fixed speed reaches {speed[k]:.6g} m/s, beyond the {v_max:.0f} m/s "
                f"any {shell.name} orbit allows")
    return None


def implausible_satellites(orbits: OrbitSet, pred: Prediction) -> dict[int, str]:
    """Index -> reason for every satellite of ``pred`` whose geometry is impossible."""
    out = {}
    for s, e in enumerate(orbits.entries):
        why = _reason(pred, s, e.info.system)
        if why is not None:
            out[s] = why
    return out


def subset_prediction(pred: Prediction, keep: np.ndarray) -> Prediction:
    """The prediction of the satellites at indices ``keep`` (arrays sliced on axis 0)."""
    n_s = pred.n_satellites
    changes = {}
    for f in fields(pred):
        v = getattr(pred, f.name)
        if f.name in ("ids", "signal_ids"):
            changes[f.name] = [v[i] for i in keep]
        elif isinstance(v, np.ndarray) and v.ndim >= 1 and v.shape[0] == n_s:
            changes[f.name] = v[keep]
    return replace(pred, **changes)


def guard_prediction(orbits: OrbitSet, pred: Prediction
                     ) -> tuple[OrbitSet, Prediction, list[str]]:
    """Drop satellites with impossible geometry; return the kept set, its prediction and
    one warning per dropped satellite. If none is left, InputError naming the file."""
    bad = implausible_satellites(orbits, pred)
    if not bad:
        return orbits, pred, []
    warnings = [f"{orbits.entries[s].info.sat_id} ({orbits.entries[s].info.source_file}): {why}; "
                "satellite dropped (check its orbit record)" for s, why in bad.items()]
    keep = np.array([s for s in range(len(orbits.entries)) if s not in bad], dtype=int)
    if keep.size == 0:
        first = next(iter(bad))
        raise InputError(f"no satellite with a possible orbit is left: {orbits.entries[first].info.sat_id}"
                         f" {bad[first]}", file=orbits.entries[first].info.source_file)
    kept = OrbitSet([orbits.entries[i] for i in keep], list(orbits.files),
                    list(orbits.warnings) + warnings)
    new_pred = subset_prediction(pred, keep)
    new_pred = replace(new_pred, warnings=list(pred.warnings) + warnings)
    return kept, new_pred, warnings

"""How wrong almanac, TLE and broadcast orbits are, as Doppler and range margins that grow with age.

The planner widens every Doppler window by ``orbit_margin_hz`` and every code-phase window
by ``orbit_range_margin_m`` for the error of the orbit data itself. Both are straight
lines in the data age (|planned time - data epoch|, days)::

    margin_hz(age) = (base_hz_l1 + rate_hz_l1_per_day * |age_days|) * carrier_hz / f_L1
    range_m(age)   =  base_range_m + rate_range_m_per_day * |age_days|

The numbers in :data:`DEFAULT_MARGINS` were produced by ``scripts/derive_orbit_margin.py``
from real public orbit files (almanac and TLE sets against precise SP3 and broadcast
orbits, and almanacs against each other at a TOA; ``../shared/orbit-data``) and are
written here as constants;
``docs/orbit-margin.md`` records the tables, the fit and the caveats. The Doppler error
scales with the carrier because it is a range-rate error divided by the wavelength.

Also here: :func:`line_of_sight`, the range, Doppler and elevation of truth states at a
site, with which the script compares the planner's own predictions.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from ..ground.constants import SECONDS_PER_DAY, SPEED_OF_LIGHT_M_S
from ..ground.errors import InputError
from ..ground.geodesy import Site
from ..ground.signals import SIGNALS

L1_HZ = SIGNALS["GPS-L1CA"].carrier_hz


@dataclass(frozen=True)
class OrbitMarginModel:
    """Orbit-data margin of one source kind: a base plus a growth per day of data age.

    ``fitted_max_age_days``: the largest |age| in the data the line was fitted on. Beyond
    it the line is an extrapolation, and the measured growth is faster than linear (see
    docs/orbit-margin.md): callers should warn.
    """

    base_hz_l1: float
    rate_hz_l1_per_day: float
    base_range_m: float
    rate_range_m_per_day: float
    fitted_max_age_days: float = math.inf

    def margin_hz(self, age_s: ArrayLike, carrier_hz: ArrayLike = L1_HZ) -> np.ndarray:
        age_d = np.abs(np.asarray(age_s, dtype=float)) / SECONDS_PER_DAY
        scale = np.asarray(carrier_hz, dtype=float) / L1_HZ
        return (self.base_hz_l1 + self.rate_hz_l1_per_day * age_d) * scale

    def range_margin_m(self, age_s: ArrayLike) -> np.ndarray:
        age_d = np.abs(np.asarray(age_s, dtype=float)) / SECONDS_PER_DAY
        return self.base_range_m + self.rate_range_m_per_day * age_d


# Written from the output of scripts/derive_orbit_margin.py (fitted values rounded UP),
# real public files in ../shared/orbit-data (docs/orbit-margin.md has the tables):
#   almanac: gpstk_gps_almanac_week819 (YUMA) vs orekit_gbm18432.sp3.Z (GFZ precise orbit),
#            |age| 0.7-1.7 d, 31 satellites; orekit_yuma_week862 vs the broadcast G14 of
#            gpstk_test_input_rinex_nav_TestInput1.16n, 3.3 d; weeks 862 and 866 against
#            each other at the other's TOA (31 d, 26 satellites, proxy truth whose own
#            error bound, 0.92 Hz / 1386 m, was added before fitting).
#            Fit: 0.199 Hz + 0.995 Hz/d, 542 m + 1186 m/d (x1.25 safety included).
#   tle:     rtklib_TLE_GNSS_20121101 and rtklib_tle_nav_2012-10-31 vs rtklib_brdc3050.12n
#            (0-2.7 d); satkml_gps-ops_2014-10-29 vs gpstk_test_input_rinex3_76193040.14n
#            (2.8-4.3 d); orekit_3gps_2016-03-24 vs YUMA week 866 at its TOA (7.8-9.5 d, proxy).
#            Fit: 8.11 Hz + 1.25 Hz/d, 8149 m + 1250 m/d; the growth rates are the floors
#            (1 Hz/d, 1 km/d, x1.25) because the data shows no growth up to 9.5 days.
#   broadcast: rtklib_brdc1820.10n vs rtklib_igs15904.sp3 (2010-07-01), gnsslibpy_brdc1180.21n
#            vs the CODE MGEX SP3 (2021-04-28 18-24 h), BRDM00DLR vs CODE rapid (2023-03-14
#            00:05; GPS, GLONASS, Galileo); |age| = |t - toe of the record in force| up to
#            1.7 h. Fit: 0.0029 Hz, 3.27 m, no growth within the fit interval (x1.25).
# Errors at 12 sites (latitudes -78..+78 deg), satellites above 5 deg elevation.
DEFAULT_MARGINS: dict[str, OrbitMarginModel] = {
    "almanac": OrbitMarginModel(base_hz_l1=0.2, rate_hz_l1_per_day=1.0,
                                base_range_m=550.0, rate_range_m_per_day=1190.0,
                                fitted_max_age_days=31.6),
    "tle": OrbitMarginModel(base_hz_l1=8.2, rate_hz_l1_per_day=1.25,
                            base_range_m=8200.0, rate_range_m_per_day=1250.0,
                            fitted_max_age_days=9.5),
    "broadcast": OrbitMarginModel(base_hz_l1=0.003, rate_hz_l1_per_day=0.0,
                                  base_range_m=3.3, rate_range_m_per_day=0.0,
                                  fitted_max_age_days=2.0 / 24.0),
}

# Satellite clock of a broadcast record (af0 + af1 dt + af2 dt^2) against the SP3 clocks of
# the broadcast pairs (scripts/derive_orbit_margin.py): max 4.44 m; x1.25, rounded up.
BROADCAST_CLOCK_MARGIN_M = 6.0


def _model(source_kind: str) -> OrbitMarginModel:
    try:
        return DEFAULT_MARGINS[source_kind]
    except KeyError:
        raise InputError(f"unknown orbit source kind '{source_kind}'; known: "
                         f"{', '.join(DEFAULT_MARGINS)}", field="source_kind") from None


def orbit_margin_hz(source_kind: str, age_s: ArrayLike, carrier_hz: ArrayLike = L1_HZ
                    ) -> np.ndarray:
    """Doppler margin (Hz, +-) for orbit data of ``source_kind`` ('almanac', 'tle',
    'broadcast')
    whose epoch is ``age_s`` from the planned time (sign ignored), at ``carrier_hz``.
    Broadcasts over age and carrier arrays."""
    return _model(source_kind).margin_hz(age_s, carrier_hz)


def orbit_range_margin_m(source_kind: str, age_s: ArrayLike) -> np.ndarray:
    """Line-of-sight range margin (m, +-) for orbit data of ``source_kind`` and age.

    Geometric range only: the satellite clock is not in it (an almanac's af0/af1 were
    measured 190 m off at most here; a TLE carries no clock at all, see the doc)."""
    return _model(source_kind).range_margin_m(age_s)


def margin_extrapolated(source_kind: str, age_s: ArrayLike) -> np.ndarray:
    """True where |age| exceeds the ages the margin line was fitted on (warn the user)."""
    limit = _model(source_kind).fitted_max_age_days * SECONDS_PER_DAY
    return np.abs(np.asarray(age_s, dtype=float)) > limit


def line_of_sight(pos_m: np.ndarray, vel_m_s: np.ndarray, site: Site, carrier_hz: float = L1_HZ
                  ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Geometric range (m), Doppler (Hz at ``carrier_hz``) and elevation (deg) of Earth-fixed
    states (S, T, 3) seen from ``site``: range = |sat - site| (as :mod:`core.sky.predict`),
    Doppler = -(range rate)/wavelength [trade], elevation above the ellipsoid normal."""
    rho = np.asarray(pos_m, dtype=float) - site.ecef_m
    rng = np.linalg.norm(rho, axis=-1)
    los = rho / rng[..., None]
    rr = np.einsum("stk,stk->st", los, np.asarray(vel_m_s, dtype=float))
    el = np.degrees(np.arcsin(np.clip(los @ site.enu_rotation[2], -1.0, 1.0)))
    return rng, -rr * carrier_hz / SPEED_OF_LIGHT_M_S, el

"""WGS-84 geodesy: geodetic <-> Earth-fixed, local east-north-up, azimuth/elevation.

Formulas: geodetic to ECEF and the ENU rotation [pub: NIMA TR8350.2, eqs. 4-14/4-15];
ECEF to geodetic by Bowring's iteration (converges to < 1 mm in 3 steps at GNSS heights).
All functions broadcast over numpy arrays; vectors are in the LAST axis (..., 3).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .constants import WGS84_A_M, WGS84_B_M, WGS84_E2
from .errors import InputError

# The ranges a receiver site may take: ONE set, used by the scenario keys site.lat_deg,
# site.lon_deg, site.height_m (core.plan.spec.KEY_RULES) and by the command line's --site.
# Height -500..20000 m above the ellipsoid covers the lowest land (Dead Sea shore, about
# -410 m ellipsoidal [calc: -430 m orthometric + geoid about +20 m, EGM96]) up to balloons
# and high aircraft; longitude is east positive in -180..180.
SITE_LAT_RANGE_DEG = (-90.0, 90.0)
SITE_LON_RANGE_DEG = (-180.0, 180.0)
SITE_HEIGHT_RANGE_M = (-500.0, 20_000.0)


@dataclass(frozen=True)
class Site:
    """A receiver site on the WGS-84 ellipsoid (height above the ellipsoid).

    A value outside the site ranges above raises :class:`InputError` naming the scenario
    key (``site.lat_deg``...), with its unit and range.
    """

    lat_deg: float
    lon_deg: float
    height_m: float = 0.0

    def __post_init__(self) -> None:
        for key, what, value, (lo, hi), unit in (
                ("lat_deg", "latitude", self.lat_deg, SITE_LAT_RANGE_DEG, "deg"),
                ("lon_deg", "longitude", self.lon_deg, SITE_LON_RANGE_DEG, "deg"),
                ("height_m", "height", self.height_m, SITE_HEIGHT_RANGE_M, "m")):
            try:
                ok = bool(np.isfinite(value)) and lo <= value <= hi
            except TypeError:
                ok = False
            if not ok:
                raise InputError(f"{what} {value} {unit} is outside {lo:g}..{hi:g} {unit}",
                                 field=f"site.{key}")

    @property
    def ecef_m(self) -> np.ndarray:
        return geodetic_to_ecef(self.lat_deg, self.lon_deg, self.height_m)

    @property
    def enu_rotation(self) -> np.ndarray:
        return enu_rotation(self.lat_deg, self.lon_deg)


@dataclass(frozen=True, eq=False)
class SitePath:
    """A receiver that moves: one position per time of a grid (arrays (T,)).

    It stands in for a :class:`Site` in ``core.sky.predict``: ``ecef_m`` is (3, T) and
    ``enu_rotation`` (3, 3, T), so that the component-wise line-of-sight geometry
    broadcasts over the time axis (sample k seen from position k)."""

    lat_deg: np.ndarray
    lon_deg: np.ndarray
    height_m: np.ndarray

    def __post_init__(self) -> None:
        lat, lon, h = (np.atleast_1d(np.asarray(x, dtype=float))
                       for x in (self.lat_deg, self.lon_deg, self.height_m))
        if not (lat.shape == lon.shape == h.shape) or lat.ndim != 1:
            raise InputError("latitude, longitude and height need one value per time", field="route")
        bad = ~(np.isfinite(lat) & (np.abs(lat) <= 90.0) & np.isfinite(lon) & np.isfinite(h))
        if bad.any():
            raise InputError(f"position {int(np.argmax(bad))} of the route is not a valid place",
                             field="route")
        object.__setattr__(self, "lat_deg", lat)
        object.__setattr__(self, "lon_deg", lon)
        object.__setattr__(self, "height_m", h)

    def __len__(self) -> int:
        return int(self.lat_deg.size)

    @property
    def ecef_m(self) -> np.ndarray:
        return geodetic_to_ecef(self.lat_deg, self.lon_deg, self.height_m).T

    @property
    def enu_rotation(self) -> np.ndarray:
        lat, lon = np.radians(self.lat_deg), np.radians(self.lon_deg)
        sl, cl, so, co = np.sin(lat), np.cos(lat), np.sin(lon), np.cos(lon)
        z = np.zeros_like(lat)
        return np.array([[-so, co, z], [-sl * co, -sl * so, cl], [cl * co, cl * so, sl]])

    def at(self, k: int) -> Site:
        """The position of sample k as a :class:`Site`."""
        return Site(float(self.lat_deg[k]), float(self.lon_deg[k]), float(self.height_m[k]))

    def take(self, index) -> SitePath:
        """The positions of some samples (a slice or an index array)."""
        return SitePath(self.lat_deg[index], self.lon_deg[index], self.height_m[index])


def geodetic_to_ecef(lat_deg, lon_deg, height_m) -> np.ndarray:
    """Earth-fixed x, y, z in metres, shape (..., 3)."""
    lat = np.radians(lat_deg)
    lon = np.radians(lon_deg)
    sl, cl = np.sin(lat), np.cos(lat)
    n = WGS84_A_M / np.sqrt(1.0 - WGS84_E2 * sl * sl)
    h = np.asarray(height_m, dtype=float)
    x = (n + h) * cl * np.cos(lon)
    y = (n + h) * cl * np.sin(lon)
    z = (n * (1.0 - WGS84_E2) + h) * sl
    return np.stack(np.broadcast_arrays(x, y, z), axis=-1)


def ecef_to_geodetic(xyz_m) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Geodetic latitude, longitude (deg) and ellipsoidal height (m) from (..., 3) ECEF."""
    xyz = np.asarray(xyz_m, dtype=float)
    x, y, z = xyz[..., 0], xyz[..., 1], xyz[..., 2]
    p = np.hypot(x, y)
    ep2 = (WGS84_A_M**2 - WGS84_B_M**2) / WGS84_B_M**2
    lon = np.arctan2(y, x)
    beta = np.arctan2(z * WGS84_A_M, p * WGS84_B_M)
    for _ in range(4):
        lat = np.arctan2(z + ep2 * WGS84_B_M * np.sin(beta) ** 3,
                         p - WGS84_E2 * WGS84_A_M * np.cos(beta) ** 3)
        beta = np.arctan2(WGS84_B_M * np.sin(lat), WGS84_A_M * np.cos(lat))
    sl = np.sin(lat)
    n = WGS84_A_M / np.sqrt(1.0 - WGS84_E2 * sl * sl)
    # Height formula stable at all latitudes, poles included.
    h = p * np.cos(lat) + z * sl - WGS84_A_M**2 / n
    return np.degrees(lat), np.degrees(lon), h


def enu_rotation(lat_deg: float, lon_deg: float) -> np.ndarray:
    """3x3 matrix whose rows are the local east, north and up unit vectors in ECEF."""
    lat, lon = np.radians(lat_deg), np.radians(lon_deg)
    sl, cl, so, co = np.sin(lat), np.cos(lat), np.sin(lon), np.cos(lon)
    return np.array([[-so, co, 0.0],
                     [-sl * co, -sl * so, cl],
                     [cl * co, cl * so, sl]])


def ecef_to_enu(xyz_m, site: Site) -> np.ndarray:
    """Local east, north, up (m) of ECEF points relative to the site, shape (..., 3)."""
    d = np.asarray(xyz_m, dtype=float) - site.ecef_m
    return d @ site.enu_rotation.T


def enu_to_ecef(enu_m, site: Site) -> np.ndarray:
    return np.asarray(enu_m, dtype=float) @ site.enu_rotation + site.ecef_m


def enu_to_az_el_range(enu_m) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Azimuth (deg, 0..360 from north through east), elevation (deg) and slant range (m)."""
    enu = np.asarray(enu_m, dtype=float)
    e, n, u = enu[..., 0], enu[..., 1], enu[..., 2]
    horiz = np.hypot(e, n)
    az = np.degrees(np.arctan2(e, n)) % 360.0
    el = np.degrees(np.arctan2(u, horiz))
    return az, el, np.sqrt(horiz * horiz + u * u)

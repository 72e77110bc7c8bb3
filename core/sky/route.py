"""Drive routes: read a route file, time it, and say where the vehicle is at any time.

Input (``read_route_file``):

* GPX 1.0/1.1 through gpxpy: track points (all tracks and segments in file order; empty
  segments are skipped with a note), else route points; named waypoints (``<wpt>``) are
  kept and placed on the route at their nearest point;
* CSV with a header ``time_utc, lat_deg, lon_deg, height_m`` and an optional ``name``
  column (a named row is a waypoint on the route), ``#`` comment lines; ``time_utc`` may be
  empty on every row (an untimed route).

Timing (``time_route``): a file whose every point holds a time is driven as recorded,
optionally shifted so that it starts at a given instant. Times that cannot be driven
(missing on some points, all equal, before 1980, going backwards) are never guessed: the
route is timed from a planned speed (one value, or per stretch between distances) with
dwell times at named waypoints, and the reason is kept as a note; without a planned speed
they are refused with one message naming the file and the point.

Along the route (``Route.state_at``): position, speed, heading and distance at any times,
on the WGS-84 ellipsoid: the legs between points are geodesics (geographiclib's algorithm,
solved for all legs or positions at once by ``geodesic_inverse`` / ``geodesic_direct``,
equal to geographiclib's own calls to 1e-8 m), a point between two route points lies on
their geodesic at the distance driven (never a chord through the Earth). Heights are interpolated linearly in distance.

Schedule slip (``Route.slip_range_m``): being up to ``slip_s`` early or late means being
anywhere between the positions the timetable gives at t - slip and t + slip.
"""

from __future__ import annotations

import csv
import io
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from geographiclib.geodesic import Geodesic

from ..ground.constants import GPS_EPOCH_UNIX_S
from ..ground.errors import InputError
from ..ground.timeutil import iso_z, parse_iso_utc, to_unix_s

GEOD = Geodesic.WGS84
CSV_COLUMNS = ("time_utc", "lat_deg", "lon_deg", "height_m")


@dataclass(frozen=True)
class Waypoint:
    """A named place on the route: its own coordinates and where it falls on the route."""

    name: str
    lat_deg: float
    lon_deg: float
    index: int                 # nearest route point
    distance_m: float          # distance along the route of that point
    offset_m: float            # geodesic distance from the waypoint to that point

    def to_dict(self) -> dict:
        return {"name": self.name, "lat_deg": round(self.lat_deg, 7), "lon_deg": round(self.lon_deg, 7),
                "distance_m": round(self.distance_m, 1), "offset_m": round(self.offset_m, 1)}


@dataclass
class RouteFile:
    """What a route file holds, before timing. Arrays have one entry per route point;
    ``time_unix_s`` is NaN where a point holds no time. ``segments`` are (first, last + 1)
    index pairs into the arrays (GPX track segments; one for a GPX route or a CSV file)."""

    path: str
    kind: str                        # "gpx-track", "gpx-route" or "csv"
    lat_deg: np.ndarray
    lon_deg: np.ndarray
    height_m: np.ndarray
    time_unix_s: np.ndarray
    segments: list[tuple[int, int]]
    waypoints: list[Waypoint]
    elements: list[str]              # per point, where it is in the file ("trk 1 seg 2 pt 5", "line 7")
    problems: list[str] = field(default_factory=list)

    @property
    def n_points(self) -> int:
        return int(self.lat_deg.size)

    def legs(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """:func:`leg_geodesics` of the points, computed once."""
        cached = self.__dict__.get("_legs")
        if cached is None:
            cached = leg_geodesics(self.lat_deg, self.lon_deg)
            self.__dict__["_legs"] = cached
        return cached

    def time_problem(self) -> str | None:
        """Why the recorded times cannot be driven, or None when they can."""
        t = self.time_unix_s
        if t.size == 0:
            return None
        have = np.isfinite(t)
        if not have.any():
            return "the file holds no times"
        if not have.all():
            k = int(np.argmin(have))
            return f"times on only {int(have.sum())} of {t.size} points (first missing at {self.elements[k]})"
        if t[0] < GPS_EPOCH_UNIX_S or t.min() < GPS_EPOCH_UNIX_S:
            k = int(np.argmin(t))
            return f"times before 1980 ({iso_z(float(t[k]))} at {self.elements[k]})"
        if t.size > 1 and np.all(t == t[0]):
            return f"all {t.size} times are equal ({iso_z(float(t[0]))})"
        back = np.nonzero(np.diff(t) < 0)[0]
        if back.size:
            k = int(back[0]) + 1
            return (f"times go backwards at {self.elements[k]} ({iso_z(float(t[k]))} after "
                    f"{iso_z(float(t[k - 1]))})")
        return None


def _check_coordinates(lat: float, lon: float, file: str, line: int | None, where: str) -> None:
    if not (math.isfinite(lat) and -90.0 <= lat <= 90.0):
        raise InputError(f"latitude {lat} deg is outside -90..90 deg", file=file, line=line,
                         field=f"{where} lat")
    if not (math.isfinite(lon) and -180.0 <= lon <= 360.0):
        raise InputError(f"longitude {lon} deg is outside -180..180 deg", file=file, line=line,
                         field=f"{where} lon")


def _read_gpx(path: str, text: str) -> RouteFile:
    import gpxpy
    import gpxpy.gpx

    try:
        gpx = gpxpy.parse(text)
    except gpxpy.gpx.GPXXMLSyntaxException as exc:
        line = None
        msg = str(exc)
        if "line " in msg:
            try:
                line = int(msg.rsplit("line ", 1)[1].split(",")[0])
            except ValueError:
                line = None
        raise InputError(f"not a readable GPX file ({msg.split(':', 1)[-1].strip()})", file=path,
                         line=line) from None
    except gpxpy.gpx.GPXException as exc:
        raise InputError(f"not a usable GPX file ({exc})", file=path) from None
    lat, lon, h, t, elements = [], [], [], [], []
    segments: list[tuple[int, int]] = []
    problems: list[str] = []

    def add(p, where):
        _check_coordinates(p.latitude, p.longitude, path, None, where)
        lat.append(p.latitude)
        lon.append(p.longitude)
        h.append(p.elevation if p.elevation is not None else math.nan)
        t.append(p.time.timestamp() if p.time is not None else math.nan)
        elements.append(where)

    for i, trk in enumerate(gpx.tracks, 1):
        for j, seg in enumerate(trk.segments, 1):
            if not seg.points:
                problems.append(f"track {i} segment {j} holds no points; skipped")
                continue
            first = len(lat)
            for k, p in enumerate(seg.points, 1):
                add(p, f"trk {i} seg {j} pt {k}")
            segments.append((first, len(lat)))
    kind = "gpx-track"
    if not lat:
        for i, rte in enumerate(gpx.routes, 1):
            if not rte.points:
                problems.append(f"route {i} holds no points; skipped")
                continue
            first = len(lat)
            for k, p in enumerate(rte.points, 1):
                add(p, f"rte {i} pt {k}")
            segments.append((first, len(lat)))
        kind = "gpx-route"
    if not lat:
        problems.append("the file holds no track or route points")
    rf = RouteFile(path, kind, np.array(lat, float), np.array(lon, float), np.array(h, float),
                   np.array(t, float), segments, [], elements, problems)
    named = []
    for k, w in enumerate(gpx.waypoints, 1):
        _check_coordinates(w.latitude, w.longitude, path, None, f"wpt {k}")
        if w.name:
            named.append((w.name.strip(), w.latitude, w.longitude))
        else:
            problems.append(f"waypoint {k} has no name; ignored")
    _fill_heights(rf)
    rf.waypoints = place_waypoints(rf, named)
    return rf


def csv_records(text: str, file: str, required: tuple[str, ...], what: str
                ) -> list[tuple[int, dict[str, str]]]:
    """The rows of a CSV text as (line number, {column: cell}): a header naming the
    ``required`` columns (any order, any case, more allowed), ``#`` comment lines and
    blank lines skipped, short rows padded with empty cells."""
    rows = []
    header = None
    for n, raw in enumerate(io.StringIO(text), 1):
        s = raw.strip()
        if not s or s.startswith("#"):
            continue
        cells = [c.strip() for c in next(csv.reader([s]))]
        if header is None:
            header = [c.lower() for c in cells]
            missing = [c for c in required if c not in header]
            if missing:
                raise InputError(f"the header must name {', '.join(required)} (missing "
                                 f"{', '.join(missing)})", file=file, line=n, field="header")
            continue
        cells += [""] * (len(header) - len(cells))
        rows.append((n, dict(zip(header, cells))))
    if header is None:
        raise InputError(f"empty {what} (no header)", file=file)
    return rows


def _read_csv(path: str, text: str) -> RouteFile:
    rows = csv_records(text, path, CSV_COLUMNS, "route file")
    lat, lon, h, t, elements, names = [], [], [], [], [], []
    for n, row in rows:
        vals = {}
        for col in ("lat_deg", "lon_deg", "height_m"):
            text_v = row[col]
            if col == "height_m" and text_v == "":
                vals[col] = math.nan
                continue
            try:
                vals[col] = float(text_v)
            except ValueError:
                raise InputError(f"'{text_v}' is not a number", file=path, line=n, field=col) from None
        _check_coordinates(vals["lat_deg"], vals["lon_deg"], path, n, "row")
        if row["time_utc"]:
            try:
                t.append(to_unix_s(parse_iso_utc(row["time_utc"], field="time_utc")))
            except InputError as exc:
                raise InputError(exc.message, file=path, line=n, field="time_utc") from None
        else:
            t.append(math.nan)
        lat.append(vals["lat_deg"])
        lon.append(vals["lon_deg"])
        h.append(vals["height_m"])
        elements.append(f"line {n}")
        nm = row.get("name", "")
        if nm:
            names.append((nm, vals["lat_deg"], vals["lon_deg"]))
    problems = [] if lat else ["the file holds no route points"]
    rf = RouteFile(path, "csv", np.array(lat, float), np.array(lon, float), np.array(h, float),
                   np.array(t, float), [(0, len(lat))] if lat else [], [], elements, problems)
    _fill_heights(rf)
    rf.waypoints = place_waypoints(rf, names)
    return rf


def _fill_heights(rf: RouteFile) -> None:
    h = rf.height_m
    bad = ~np.isfinite(h)
    if not bad.any() or h.size == 0:
        return
    if bad.all():
        rf.height_m = np.zeros_like(h)
        rf.problems.append("no heights in the file; 0 m above the ellipsoid assumed")
        return
    idx = np.arange(h.size)
    rf.height_m = np.interp(idx, idx[~bad], h[~bad])
    rf.problems.append(f"{int(bad.sum())} points without a height; interpolated from their neighbours")


def read_route_file(path: str | Path) -> RouteFile:
    """Read a GPX or CSV route file (chosen by content: XML is GPX, otherwise CSV)."""
    p = Path(path)
    try:
        raw = p.read_bytes()
    except OSError as exc:
        raise InputError(f"cannot read the route file ({exc.strerror})", file=str(p)) from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise InputError(f"not a text file (byte {exc.start} is not UTF-8)", file=str(p)) from None
    head = text.lstrip()[:200].lower()
    if head.startswith("<?xml") or head.startswith("<gpx"):
        return _read_gpx(str(p), text)
    if head.startswith("<"):
        raise InputError("an XML file that is not GPX", file=str(p))
    return _read_csv(str(p), text)


# --- geodesics along the polyline --------------------------------------------------------

def _sincosd(x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Sine and cosine of degrees, reduced by whole quadrants first (geographiclib's
    Math.sincosd, elementwise)."""
    r = np.fmod(x, 360.0)
    q = np.where(np.isnan(r), 0.0, np.rint(r / 90.0))
    r = np.radians(r - 90.0 * q)
    s, c = np.sin(r), np.cos(r)
    q = np.mod(q, 4.0)
    q1, q2, q3 = q == 1, q == 2, q == 3
    s, c = (np.where(q1, c, np.where(q2, -s, np.where(q3, -c, s))),
            np.where(q1, -s, np.where(q2, -c, np.where(q3, s, c))))
    c = c + 0.0
    return np.where(s == 0, np.copysign(s, x), s), c


def _ang_round(x: np.ndarray) -> np.ndarray:
    """geographiclib's Math.AngRound: tiny angles underflow to zero, elementwise."""
    z = 1.0 / 16.0
    y = np.abs(x)
    return np.copysign(np.where(y < z, z - (z - y), y), x)


def _atan2d(y: np.ndarray, x: np.ndarray) -> np.ndarray:
    """geographiclib's Math.atan2d (degrees, exact at the quadrant limits), elementwise."""
    swap = np.abs(y) > np.abs(x)
    x, y = np.where(swap, y, x), np.where(swap, x, y)
    neg = x < 0
    q = np.where(swap, 2, 0) + neg
    ang = np.degrees(np.arctan2(y, np.where(neg, -x, x)))
    return np.where(q == 1, np.copysign(180.0, y) - ang,
                    np.where(q == 2, 90.0 - ang, np.where(q == 3, -90.0 + ang, ang)))


# The series C1 and C1' of the geodesic's distance in eps, order 6, as polynomials in
# eps^2 with their divisors: geographiclib's Geodesic._C1f and _C1pf tables [pub: Karney
# 2013, "Algorithms for geodesics", J. Geodesy 87, eqs. 18 and 21]. Evaluated here on
# arrays (geographiclib's own functions update eps in place when given an array).
_C1_COEFF = (-1, 6, -16, 32, -9, 64, -128, 2048, 9, -16, 768, 3, -5, 512, -7, 1280, -7, 2048)
_C1P_COEFF = (205, -432, 768, 1536, 4005, -4736, 3840, 12288, -225, 116, 384, -7173, 2695, 7680,
              3467, 7680, 38081, 61440)
_SERIES_ORDER = 6


def _series(eps: np.ndarray, coeff: tuple) -> list:
    """c[1..6] of geographiclib's _C1f/_C1pf: eps^l P_l(eps^2) / divisor, c[0] unused."""
    from geographiclib.geomath import Math

    eps2 = eps * eps
    c: list = [0.0] * (_SERIES_ORDER + 1)
    d = eps
    o = 0
    for order in range(1, _SERIES_ORDER + 1):
        m = (_SERIES_ORDER - order) // 2
        c[order] = d * Math.polyval(m, coeff, o, eps2) / coeff[o + m + 1]
        o += m + 2
        d = d * eps
    return c


def geodesic_direct(lat1_deg, lon1_deg, azi1_deg, s12_m) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """WGS-84 geodesic from (lat1, lon1) with azimuth azi1 over s12 metres, on arrays:
    latitude, longitude (unrolled: lon1 + the longitude travelled) and azimuth at the end
    (deg). The steps of geographiclib's ``Geodesic.Direct`` (a ``GeodesicLine`` and its
    ``Position``, series of order 6 in eps, no Newton step since |f| < 0.01), elementwise
    in numpy, with geographiclib's own A1, A3, C3 and Clenshaw-sum functions (plain
    arithmetic, called on arrays) and its C1, C1' tables; agrees with it to rounding (tests/test_route.py checks
    the positions against geographiclib's Inverse)."""
    g = GEOD
    lat1 = np.asarray(lat1_deg, dtype=float)
    lat1 = np.where(np.abs(lat1) > 90.0, np.nan, lat1)
    lon1 = np.asarray(lon1_deg, dtype=float)
    s12 = np.asarray(s12_m, dtype=float)
    salp1, calp1 = _sincosd(_ang_round(np.asarray(azi1_deg, dtype=float)))
    sbet1, cbet1 = _sincosd(_ang_round(lat1))
    sbet1 = sbet1 * g._f1
    r = np.hypot(sbet1, cbet1)
    sbet1, cbet1 = sbet1 / r, np.maximum(Geodesic.tiny_, cbet1 / r)
    salp0 = salp1 * cbet1
    calp0 = np.hypot(calp1, salp1 * sbet1)
    ssig1, somg1 = sbet1, salp0 * sbet1
    csig1 = comg1 = np.where((sbet1 != 0) | (calp1 != 0), cbet1 * calp1, 1.0)
    r = np.hypot(ssig1, csig1)
    ssig1, csig1 = ssig1 / r, csig1 / r
    k2 = calp0 * calp0 * g._ep2
    eps = k2 / (2 * (1 + np.sqrt(1 + k2)) + k2)
    a1m1 = Geodesic._A1m1f(eps)
    c1a = _series(eps, _C1_COEFF)
    b11 = Geodesic._SinCosSeries(True, ssig1, csig1, c1a)
    s, c = np.sin(b11), np.cos(b11)
    stau1, ctau1 = ssig1 * c + csig1 * s, csig1 * c - ssig1 * s
    c1pa = _series(eps, _C1P_COEFF)
    c3a = [0.0] * Geodesic.nC3_
    g._C3f(eps, c3a)
    a3c = -g.f * salp0 * g._A3f(eps)
    b31 = Geodesic._SinCosSeries(True, ssig1, csig1, c3a)
    # The position at distance s12.
    tau12 = s12 / (g._b * (1 + a1m1))
    s, c = np.sin(tau12), np.cos(tau12)
    b12 = -Geodesic._SinCosSeries(True, stau1 * c + ctau1 * s, ctau1 * c - stau1 * s, c1pa)
    sig12 = tau12 - (b12 - b11)
    ssig12, csig12 = np.sin(sig12), np.cos(sig12)
    ssig2 = ssig1 * csig12 + csig1 * ssig12
    csig2 = csig1 * csig12 - ssig1 * ssig12
    sbet2 = calp0 * ssig2
    cbet2 = np.hypot(salp0, calp0 * csig2)
    degenerate = cbet2 == 0
    cbet2 = np.where(degenerate, Geodesic.tiny_, cbet2)
    csig2 = np.where(degenerate, Geodesic.tiny_, csig2)
    somg2, comg2 = salp0 * ssig2, csig2
    e = np.copysign(1.0, salp0)
    omg12 = e * (sig12 - (np.arctan2(ssig2, csig2) - np.arctan2(ssig1, csig1))
                 + (np.arctan2(e * somg2, comg2) - np.arctan2(e * somg1, comg1)))
    lam12 = omg12 + a3c * (sig12 + (Geodesic._SinCosSeries(True, ssig2, csig2, c3a) - b31))
    return _atan2d(sbet2, g._f1 * cbet2), lon1 + np.degrees(lam12), _atan2d(salp0, calp0 * csig2)


def leg_geodesics(lat_deg: np.ndarray, lon_deg: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Length (m), start azimuth and end azimuth (deg) of the geodesic from each point to
    the next: :func:`geodesic_inverse` of every leg at once."""
    n = lat_deg.size
    if n < 2:
        z = np.zeros(0)
        return z, z.copy(), z.copy()
    return geodesic_inverse(lat_deg[:-1], lon_deg[:-1], lat_deg[1:], lon_deg[1:])


# Legs the array solution takes (longer ones, legs shorter than 5 m and legs reaching
# beyond 89 deg of latitude go to geographiclib's Inverse one by one), its iterations and
# the endpoint miss it must reach (the direct solution's own rounding is about 1e-9 m).
_NEWTON_MAX_M = 200_000.0
_NEWTON_MIN_M = 5.0
_NEWTON_MAX_LAT_DEG = 89.0
_NEWTON_ITERATIONS = 6
_NEWTON_MISS_M = 1e-8


def geodesic_inverse(lat1_deg, lon1_deg, lat2_deg, lon2_deg) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Length (m), azimuth at the start and at the end (deg) of the WGS-84 geodesic between
    each pair of points, on arrays.

    Short lines (the legs of a route) are solved together: Newton's method on
    :func:`geodesic_direct` for the start azimuth and the length, from the local flat
    solution; a change ds of the length moves the end along its azimuth, a change da of
    the azimuth moves it sideways by the reduced length m12 da, taken as s12 (m12 = s12
    (1 - O(s12^2 / R^2)) [calc], so each step gains about 10 digits on a 100 m leg and 3 on
    200 km). A line whose end is not within 1e-8 m after the iterations, and every line
    outside the ranges above, is solved by geographiclib's Inverse. Both agree with
    geographiclib's Inverse to 1e-8 m in length (tests/test_route.py)."""
    la1, lo1, la2, lo2 = (np.atleast_1d(np.asarray(x, dtype=float)) for x in (lat1_deg, lon1_deg, lat2_deg, lon2_deg))
    la1, lo1, la2, lo2 = np.broadcast_arrays(la1, lo1, la2, lo2)
    n = la1.size
    s12, azi1, azi2 = np.full(n, np.nan), np.full(n, np.nan), np.full(n, np.nan)
    e2 = GEOD._e2
    a = GEOD.a

    def radii(lat):                      # metres per radian north and east (times cos lat)
        sl = np.sin(np.radians(lat))
        w = np.sqrt(1.0 - e2 * sl * sl)
        return a * (1.0 - e2) / w**3, a / w * np.cos(np.radians(lat))

    def wrap(dlon):
        return (dlon + 180.0) % 360.0 - 180.0

    m_n, m_e = radii(0.5 * (la1 + la2))
    dn = np.radians(la2 - la1) * m_n
    de = np.radians(wrap(lo2 - lo1)) * m_e
    s = np.hypot(de, dn)
    az = np.degrees(np.arctan2(de, dn))
    fast = ((s >= _NEWTON_MIN_M) & (s <= _NEWTON_MAX_M) & (np.abs(la1) <= _NEWTON_MAX_LAT_DEG)
            & (np.abs(la2) <= _NEWTON_MAX_LAT_DEG))
    idx = np.nonzero(fast)[0]
    if idx.size:
        la1f, lo1f, la2f, lo2f = la1[idx], lo1[idx], la2[idx], lo2[idx]
        sf, azf = s[idx], az[idx]
        r_n, r_e = radii(la2f)
        for step in range(_NEWTON_ITERATIONS + 1):
            lat_e, lon_e, az_e = geodesic_direct(la1f, lo1f, azf, sf)
            en = np.radians(la2f - lat_e) * r_n
            ee = np.radians(wrap(lo2f - lon_e)) * r_e
            miss = np.hypot(en, ee)
            if step == _NEWTON_ITERATIONS or np.all(miss <= _NEWTON_MISS_M):
                break
            sa, ca = np.sin(np.radians(az_e)), np.cos(np.radians(az_e))
            sf = sf + (ee * sa + en * ca)
            azf = azf + np.degrees((ee * ca - en * sa) / sf)
        good = miss <= _NEWTON_MISS_M
        # The length and azimuths of the last direct solution (the one that met the ends).
        s12[idx[good]] = sf[good]
        azi1[idx[good]] = (azf[good] + 180.0) % 360.0 - 180.0
        azi2[idx[good]] = az_e[good]
        fast[idx[~good]] = False
    for k in np.nonzero(~fast)[0]:
        g = GEOD.Inverse(la1[k], lo1[k], la2[k], lo2[k], Geodesic.DISTANCE | Geodesic.AZIMUTH)
        s12[k], azi1[k], azi2[k] = g["s12"], g["azi1"], g["azi2"]
    return s12, azi1, azi2


def place_waypoints(rf: RouteFile, named: list[tuple[str, float, float]]) -> list[Waypoint]:
    """Each named waypoint on its nearest route point (geodesic distance)."""
    if not named or rf.n_points == 0:
        return []
    s12 = rf.legs()[0]
    dist = np.concatenate(([0.0], np.cumsum(s12)))
    # Coarse nearest by a local flat metric, then the geodesic distance to the few best
    # (all waypoints' candidates in one call).
    best, at = [], []
    for _name, la, lo in named:
        d2 = (rf.lat_deg - la) ** 2 + ((rf.lon_deg - lo) * math.cos(math.radians(la))) ** 2
        best.append(np.argsort(d2)[:5])
        at.append(np.tile([float(la), float(lo)], (best[-1].size, 1)))
    cand = np.concatenate(best)
    here = np.concatenate(at)
    offs_all = geodesic_inverse(here[:, 0], here[:, 1], rf.lat_deg[cand], rf.lon_deg[cand])[0]
    out = []
    first = 0
    for (name, la, lo), b in zip(named, best):
        offs = offs_all[first:first + b.size]
        first += b.size
        off, k = min((round(float(o), 3), int(j)) for o, j in zip(offs, b))   # ties: the first point
        out.append(Waypoint(name, float(la), float(lo), k, float(dist[k]), float(off)))
    out.sort(key=lambda w: w.distance_m)
    return out


# --- a timed route -------------------------------------------------------------------------

@dataclass(frozen=True)
class SpeedStretch:
    """A planned speed between two distances along the route (m)."""

    from_m: float
    to_m: float
    speed_m_s: float


@dataclass
class RouteStates:
    """The vehicle at each of T times (arrays (T,))."""

    unix_s: np.ndarray
    lat_deg: np.ndarray
    lon_deg: np.ndarray
    height_m: np.ndarray
    speed_m_s: np.ndarray          # horizontal speed along the route
    heading_deg: np.ndarray        # direction of travel, clockwise from north (geodesic azimuth)
    vertical_m_s: np.ndarray       # rate of climb
    distance_m: np.ndarray         # along the route from its first point

    def velocity_enu_m_s(self) -> np.ndarray:
        """(T, 3) east, north, up velocity."""
        hd = np.radians(self.heading_deg)
        return np.stack((self.speed_m_s * np.sin(hd), self.speed_m_s * np.cos(hd), self.vertical_m_s), axis=-1)


@dataclass
class Route:
    """A timed route: points, their cumulative distance and the time the vehicle is at
    each. A point may appear twice in a row (a dwell: equal position, later time)."""

    path: str
    lat_deg: np.ndarray
    lon_deg: np.ndarray
    height_m: np.ndarray
    time_unix_s: np.ndarray        # non-decreasing
    distance_m: np.ndarray         # non-decreasing, 0 at the first point
    leg_azimuth_deg: np.ndarray    # (N - 1,) start azimuth of each leg
    waypoints: list[Waypoint]
    timing: str                    # "recorded", "recorded, shifted by ... s", "planned speed"
    notes: list[str] = field(default_factory=list)
    leg_end_azimuth_deg: np.ndarray | None = None   # (N - 1,) azimuth at each leg's end

    @property
    def length_m(self) -> float:
        return float(self.distance_m[-1])

    @property
    def start_unix_s(self) -> float:
        return float(self.time_unix_s[0])

    @property
    def end_unix_s(self) -> float:
        return float(self.time_unix_s[-1])

    @property
    def duration_s(self) -> float:
        return self.end_unix_s - self.start_unix_s

    def waypoint(self, name: str) -> Waypoint:
        for w in self.waypoints:
            if w.name == name:
                return w
        known = ", ".join(w.name for w in self.waypoints) or "none"
        raise KeyError(f"no waypoint named '{name}' on the route (known: {known})")

    def distance_at(self, unix_s) -> np.ndarray:
        """Distance along the route at the given times (clamped to the route's ends)."""
        t = np.asarray(unix_s, dtype=float)
        return np.interp(t, self.time_unix_s, self.distance_m)

    def time_at_distance(self, distance_m: float) -> float:
        """First instant the vehicle is at ``distance_m`` (m along the route)."""
        d = self.distance_m
        k = int(np.clip(np.searchsorted(d, distance_m, side="left"), 0, d.size - 1))
        if k == 0:
            return float(self.time_unix_s[0])
        d0, d1 = d[k - 1], d[k]
        t0, t1 = self.time_unix_s[k - 1], self.time_unix_s[k]
        return float(t1 if d1 == d0 else t0 + (distance_m - d0) / (d1 - d0) * (t1 - t0))

    def positions_at_distance(self, distance_m) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Latitude, longitude, height and heading (deg) at distances along the route, on
        each leg's geodesic."""
        dq = np.clip(np.atleast_1d(np.asarray(distance_m, dtype=float)), 0.0, self.length_m)
        d = self.distance_m
        n = d.size
        if n == 1:
            z = np.zeros_like(dq)
            return z + self.lat_deg[0], z + self.lon_deg[0], z + self.height_m[0], z
        k = np.clip(np.searchsorted(d, dq, side="right") - 1, 0, n - 2)
        leg_len = np.diff(d)
        on = leg_len[k] > 0
        lat = self.lat_deg[k].astype(float)
        lon = self.lon_deg[k].astype(float)
        hd = np.zeros_like(dq)
        if on.any():
            kk = k[on]
            lat[on], lon[on], hd[on] = geodesic_direct(self.lat_deg[kk], self.lon_deg[kk],
                                                       self.leg_azimuth_deg[kk], dq[on] - d[kk])
        # On a zero-length leg (a dwell, or the very end after one) the heading is the one
        # at the end of the last leg that moves before it (the first moving leg's start
        # azimuth before any; 0 for a route that never moves).
        moving = np.nonzero(leg_len > 0)[0]
        if (~on).any() and moving.size:
            kk = k[~on]
            prev = np.searchsorted(moving, kk, side="left") - 1
            back = np.zeros(kk.size)
            have = prev >= 0
            if have.any():
                b = moving[prev[have]]
                back[have] = geodesic_direct(self.lat_deg[b], self.lon_deg[b], self.leg_azimuth_deg[b],
                                             leg_len[b])[2]
            back[~have] = self.leg_azimuth_deg[int(moving[0])]
            hd[~on] = back
        lon = (lon + 180.0) % 360.0 - 180.0
        frac = np.where(leg_len[k] > 0, (dq - d[k]) / np.where(leg_len[k] > 0, leg_len[k], 1.0), 1.0)
        h = self.height_m[k] + frac * (self.height_m[k + 1] - self.height_m[k])
        return lat, lon, h, hd % 360.0

    def state_at(self, unix_s) -> RouteStates:
        """Position, speed, heading and distance at the given times; before the start the
        vehicle waits at the first point, after the end at the last (speed 0)."""
        t = np.atleast_1d(np.asarray(unix_s, dtype=float))
        dist = self.distance_at(t)
        lat, lon, h, hd = self.positions_at_distance(dist)
        tt, dd, hh = self.time_unix_s, self.distance_m, self.height_m
        if tt.size == 1:
            zero = np.zeros_like(t)
            return RouteStates(t, lat, lon, h, zero, hd, zero, dist)
        k = np.clip(np.searchsorted(tt, t, side="right") - 1, 0, tt.size - 2)
        dt = tt[k + 1] - tt[k]
        inside = (t >= tt[0]) & (t < tt[-1]) & (dt > 0)
        with np.errstate(divide="ignore", invalid="ignore"):
            speed = np.where(inside, (dd[k + 1] - dd[k]) / dt, 0.0)
            climb = np.where(inside, (hh[k + 1] - hh[k]) / dt, 0.0)
        return RouteStates(t, lat, lon, h, speed, hd, climb, dist)

    def slip_range_m(self, unix_s, slip_s: float) -> tuple[np.ndarray, np.ndarray]:
        """Distances along the route the vehicle may be at when up to ``slip_s`` early or
        late: [d(t - slip), d(t + slip)]."""
        t = np.asarray(unix_s, dtype=float)
        return self.distance_at(t - slip_s), self.distance_at(t + slip_s)

    def summary(self) -> dict:
        return {"length_m": round(self.length_m, 1), "duration_s": round(self.duration_s, 1),
                "start": iso_z(self.start_unix_s), "end": iso_z(self.end_unix_s),
                "timing": self.timing, "waypoints": [w.to_dict() for w in self.waypoints]}


def time_route(rf: RouteFile, *, start_unix_s: float | None = None, shift_to_start: bool = False,
               speed_m_s: float | None = None, stretch_speeds: list[SpeedStretch] = (),
               dwell_s: dict[str, float] | None = None, field_prefix: str = "route") -> Route:
    """Time a route file: as recorded (shifted to ``start_unix_s`` when ``shift_to_start``),
    or, when ``speed_m_s`` is given or the times cannot be driven, from the planned speed
    (``stretch_speeds`` override it between distances) starting at ``start_unix_s``, with
    ``dwell_s`` seconds at the named waypoints."""
    if rf.n_points == 0:
        raise InputError("the route file holds no track or route points", file=rf.path)
    s12, azi, azi_end = rf.legs()
    dist = np.concatenate(([0.0], np.cumsum(s12)))
    notes = list(rf.problems)
    problem = rf.time_problem()
    dwell_s = dict(dwell_s or {})
    use_speed = speed_m_s is not None or bool(stretch_speeds) or problem is not None
    if not use_speed:
        t = rf.time_unix_s.copy()
        timing = "recorded"
        if shift_to_start and start_unix_s is not None:
            shift = start_unix_s - t[0]
            t = t + shift
            timing = f"recorded, shifted by {shift:+.0f} s to start at {iso_z(start_unix_s)}"
        return Route(rf.path, rf.lat_deg.copy(), rf.lon_deg.copy(), rf.height_m.copy(), t, dist,
                     azi, list(rf.waypoints), timing, notes, azi_end)
    if speed_m_s is None and not stretch_speeds:
        raise InputError(f"the recorded times cannot be driven: {problem}; give a planned speed "
                         f"({field_prefix}.speed_kmh) to time the route", file=rf.path)
    if problem is not None and rf.time_unix_s.size and np.isfinite(rf.time_unix_s).any():
        notes.append(f"recorded times not used ({problem}); timed from the planned speed")
    if speed_m_s is not None and not (math.isfinite(speed_m_s) and speed_m_s > 0):
        raise InputError(f"planned speed {speed_m_s * 3.6:g} km/h must be above 0",
                         field=f"{field_prefix}.speed_kmh")
    if start_unix_s is None:
        raise InputError("a route timed from a planned speed needs a start time", field="time.start")
    # Speed of each leg: the stretch covering the leg's middle, else the overall speed.
    mid = 0.5 * (dist[:-1] + dist[1:])
    v = np.full(mid.shape, speed_m_s if speed_m_s is not None else math.nan)
    for st in stretch_speeds:
        inside = (mid >= st.from_m) & (mid < st.to_m)
        v[inside] = st.speed_m_s
    if np.isnan(v).any():
        k = int(np.argmax(np.isnan(v)))
        raise InputError(f"no planned speed at {dist[k] / 1000:.3f} km along the route (give "
                         f"{field_prefix}.speed_kmh for the parts no stretch covers)",
                         field=f"{field_prefix}.speed_kmh")
    dt_leg = np.where(s12 > 0, s12 / v, 0.0)
    # Dwell: duplicate the waypoint's point with a later time.
    dwell_at = np.zeros(rf.n_points)
    names = {w.name: w for w in rf.waypoints}
    for name, secs in dwell_s.items():
        if name not in names:
            known = ", ".join(names) or "none"
            raise InputError(f"no waypoint named '{name}' on the route (known: {known})",
                             field=f"{field_prefix}.dwell_s.{name}")
        if not (math.isfinite(secs) and secs >= 0):
            raise InputError(f"dwell {secs} s must be 0 or more", field=f"{field_prefix}.dwell_s.{name}")
        dwell_at[names[name].index] += secs
    idx, times = [], []
    t = start_unix_s
    for k in range(rf.n_points):
        idx.append(k)
        times.append(t)
        if dwell_at[k] > 0:
            t += dwell_at[k]
            idx.append(k)
            times.append(t)
        if k < rf.n_points - 1:
            t += dt_leg[k]
    idx_a = np.array(idx)
    d_out = dist[idx_a]
    az_full = np.concatenate((azi, [azi[-1] if azi.size else 0.0]))
    az_out = az_full[idx_a[:-1]]
    az_end = np.concatenate((azi_end, [azi_end[-1] if azi_end.size else 0.0]))[idx_a[:-1]]
    az_end = np.where(np.diff(d_out) > 0, az_end, az_out)      # a dwell leg keeps its start azimuth
    wps = [Waypoint(w.name, w.lat_deg, w.lon_deg, int(np.searchsorted(idx_a, w.index)), w.distance_m, w.offset_m)
           for w in rf.waypoints]
    timing = "planned speed" + (" per stretch" if stretch_speeds else "")
    return Route(rf.path, rf.lat_deg[idx_a], rf.lon_deg[idx_a], rf.height_m[idx_a], np.array(times),
                 d_out, az_out, wps, timing, notes, az_end)


def route_file_summary(rf: RouteFile, speed_m_s: float | None = None) -> dict:
    """What ``acqplan route`` prints: length, duration (recorded or at the planned speed),
    points, segments (each with its points, length and times) and problems."""
    s12 = rf.legs()[0]
    problems = list(rf.problems)
    segments = []
    for a, b in rf.segments:
        seg_len = float(np.sum(s12[a:b - 1])) if b - a > 1 else 0.0
        t = rf.time_unix_s[a:b]
        have = np.isfinite(t)
        segments.append({"first_point": a + 1, "points": b - a, "length_m": round(seg_len, 1),
                         "start": iso_z(float(t[have][0])) if have.any() else None,
                         "end": iso_z(float(t[have][-1])) if have.any() else None})
    length = float(s12.sum())
    problem = rf.time_problem()
    duration = None
    if speed_m_s is not None:
        duration = length / speed_m_s
    elif problem is None and rf.n_points:
        duration = float(rf.time_unix_s[-1] - rf.time_unix_s[0])
    if problem is not None and rf.n_points and speed_m_s is None:
        problems.append(f"recorded times unusable: {problem}" if np.isfinite(rf.time_unix_s).any()
                        else "no times in the file: give a planned speed to time it")
    return {"file": rf.path, "kind": rf.kind, "length_m": round(length, 1),
            "duration_s": None if duration is None else round(duration, 1), "points": rf.n_points,
            "segments": segments, "waypoints": [w.to_dict() for w in rf.waypoints],
            "problems": problems}

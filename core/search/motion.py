"""The receiver's motion along a known route, as the Doppler windows need it.

On a route the direction of travel is known, so the receiver-motion term of a window is
the projection of the route velocity on the line of sight, not a bound from a maximum
speed in any direction. What the planner does not know about the motion:

* **schedule slip** ``slip_s``: the vehicle may be up to that many seconds early or late
  on its timetable, so at time t it is anywhere between the route positions of t - slip
  and t + slip, driving as planned there (the route legs active in that time range);
* **speed** ``speed_m_s``: the true speed on a moving leg is the planned speed +- this
  (never below 0); a dwell (stop at a waypoint) is a stop, before the first and after the
  last point the vehicle waits;
* **heading** ``heading_deg``: the true direction of travel is the leg's geodesic
  azimuth (between its value at the leg's start and end) +- this (lane changes, curves
  between recorded points, a recording's noise);
* **climb** ``vertical_m_s``: the rate of climb is the leg's (height change over time)
  +- this;
* **along the route** ``along_m``: a distance slip on top of the schedule slip, the
  vehicle up to that many metres behind or ahead of where the slip range ends (after an
  outage: the speed uncertainty times the outage's length, core.plan.events); the legs
  of the widened range are candidates with their own speed, heading and climb ranges.

Defaults (documented in docs/scenario-keys.md): slip 0, speed +-3 m/s (about 11 km/h,
traffic on a planned speed) [trade], heading +-15 deg [trade], climb +-1 m/s [trade].

``RouteMotion`` holds, per grid time, the candidate positions (route vertices inside the
slip range and its two ends; the extremes of a linear function over the polyline are at
those points) and the candidate legs, so that ``core.search.windows`` can take exact
extremes over them.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from ..ground.geodesy import SitePath, geodetic_to_ecef

if TYPE_CHECKING:  # a single-site plan loads neither the route module nor geographiclib
    from ..sky.route import Route, RouteStates

# Defaults of what the plan does not know about the drive [trade: typical drive-test
# traffic and recording noise; documented in docs/scenario-keys.md].
DEFAULT_SPEED_UNCERTAINTY_M_S = 3.0
DEFAULT_HEADING_UNCERTAINTY_DEG = 15.0
DEFAULT_VERTICAL_UNCERTAINTY_M_S = 1.0


@dataclass(frozen=True)
class MotionUncertainty:
    """What the plan does not know about the drive (see the module docstring)."""

    slip_s: float = 0.0
    speed_m_s: float = DEFAULT_SPEED_UNCERTAINTY_M_S
    heading_deg: float = DEFAULT_HEADING_UNCERTAINTY_DEG
    vertical_m_s: float = DEFAULT_VERTICAL_UNCERTAINTY_M_S
    along_m: float = 0.0


@dataclass
class RouteMotion:
    """The drive over a time grid (T times).

    ``nominal``: the vehicle where the timetable puts it; ``path``: the same positions as
    a :class:`~core.ground.geodesy.SitePath` for the prediction; ``slip_from_m`` /
    ``slip_to_m``: the distance range the slip allows. ``leg_*`` (T, L) describe the candidate
    legs (``leg_ok`` marks the real ones): Earth-fixed displacement from the nominal
    position of the start and end of the part of each leg inside the slip range
    (T, L, 3), speed range, heading range (deg, unwrapped so that lo <= hi) and climb
    range. Two extra legs stand for waiting before the route's start or after its end."""

    unc: MotionUncertainty
    nominal: RouteStates
    path: SitePath
    slip_from_m: np.ndarray
    slip_to_m: np.ndarray
    leg_start_disp_ecef_m: np.ndarray
    leg_end_disp_ecef_m: np.ndarray
    max_disp_m: np.ndarray          # (T,) largest candidate displacement
    max_leg_m: np.ndarray           # (T,) longest candidate leg (for the chord bound)
    leg_speed_lo_m_s: np.ndarray
    leg_speed_hi_m_s: np.ndarray
    leg_heading_lo_deg: np.ndarray
    leg_heading_hi_deg: np.ndarray
    leg_climb_lo_m_s: np.ndarray
    leg_climb_hi_m_s: np.ndarray
    leg_ok: np.ndarray

    @property
    def max_horizontal_speed_m_s(self) -> np.ndarray:
        """(T,) fastest admissible horizontal speed over the candidate legs."""
        return np.max(np.where(self.leg_ok, self.leg_speed_hi_m_s, 0.0), axis=1)


def _leg_end_azimuths(route: Route) -> np.ndarray:
    if route.leg_end_azimuth_deg is not None:
        return np.asarray(route.leg_end_azimuth_deg, dtype=float)
    from geographiclib.geodesic import Geodesic

    n = route.lat_deg.size
    out = np.array(route.leg_azimuth_deg, dtype=float)
    for j in range(n - 1):
        if route.distance_m[j + 1] > route.distance_m[j]:
            g = Geodesic.WGS84.Inverse(route.lat_deg[j], route.lon_deg[j], route.lat_deg[j + 1],
                                       route.lon_deg[j + 1], Geodesic.AZIMUTH)
            out[j] = g["azi2"]
    return out


def _pad_ranges(first: np.ndarray, last: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Index matrix (T, K) covering first..last (inclusive) per row, and its validity."""
    count = np.maximum(last - first + 1, 0)
    k = max(int(count.max(initial=0)), 1)
    idx = first[:, None] + np.arange(k)[None, :]
    ok = np.arange(k)[None, :] < count[:, None]
    return np.where(ok, idx, np.maximum(first, 0)[:, None]), ok


def _times_at_distances(rt: np.ndarray, rd: np.ndarray, d_m: np.ndarray, last: bool) -> np.ndarray:
    """The first (or, with ``last``, the latest) time the timetable is at each distance
    (a dwell keeps the vehicle at one distance for a while)."""
    n = rd.size
    if n < 2:
        return np.full(d_m.shape, rt[0])
    k = np.searchsorted(rd, d_m, side="right" if last else "left")
    if last:
        j = np.clip(k - 1, 0, n - 2)          # the leg from the last vertex not beyond d
        at_vertex = rd[np.clip(k - 1, 0, n - 1)] == d_m
        vert_t = rt[np.clip(k - 1, 0, n - 1)]
    else:
        j = np.clip(k - 1, 0, n - 2)          # the leg up to the first vertex not before d
        at_vertex = rd[np.clip(k, 0, n - 1)] == d_m
        vert_t = rt[np.clip(k, 0, n - 1)]
    seg = rd[j + 1] - rd[j]
    frac = np.clip((d_m - rd[j]) / np.where(seg > 0, seg, 1.0), 0.0, 1.0)
    inside = rt[j] + frac * (rt[j + 1] - rt[j])
    return np.where(at_vertex, vert_t, np.where(d_m <= rd[0], rt[0], np.where(d_m >= rd[-1], rt[-1], inside)))


def route_motion(route: Route, unix_s: np.ndarray, unc: MotionUncertainty = MotionUncertainty()
                 ) -> RouteMotion:
    """The drive over the times ``unix_s`` with the uncertainties ``unc``."""
    t = np.asarray(unix_s, dtype=float)
    nominal = route.state_at(t)
    path = SitePath(nominal.lat_deg, nominal.lon_deg, nominal.height_m)
    slip = float(unc.slip_s)
    lo_t, hi_t = t - slip, t + slip
    d_lo, d_hi = route.slip_range_m(t, slip)
    rt, rd = route.time_unix_s, route.distance_m
    n = rt.size
    along = float(unc.along_m)
    wait_lo = lo_t < rt[0]
    wait_hi = hi_t > rt[-1]
    if along > 0.0:
        # The distance slip widens the range; the legs driven over the widened range are
        # those of the times the timetable is there. Behind the start (ahead of the end)
        # the vehicle waits there, stopped.
        wait_lo = wait_lo | (d_lo - along < 0.0)
        wait_hi = wait_hi | (d_hi + along > route.length_m)
        d_lo = np.maximum(d_lo - along, 0.0)
        d_hi = np.minimum(d_hi + along, route.length_m)
        lo_t = np.minimum(lo_t, _times_at_distances(rt, rd, d_lo, last=False))
        hi_t = np.maximum(hi_t, _times_at_distances(rt, rd, d_hi, last=True))
    centre = path.ecef_m.T                                                   # (T, 3)
    # The two ends of the slip range.
    e_lat, e_lon, e_h, _ = route.positions_at_distance(np.concatenate((d_lo, d_hi)))
    ends = geodetic_to_ecef(e_lat, e_lon, e_h).reshape(2, t.size, 3) - centre[None]
    verts = geodetic_to_ecef(route.lat_deg, route.lon_deg, route.height_m)   # (N, 3)

    # Candidate legs: every leg active at some time in [t - slip, t + slip], with the part
    # of it inside the slip range (from its start vertex, or the slip range's start, to its
    # end vertex, or the slip range's end).
    if n >= 2:
        dt = np.diff(rt)
        seg_len = np.diff(rd)
        speed = np.where(dt > 0, seg_len / np.where(dt > 0, dt, 1.0), 0.0)
        climb = np.where(dt > 0, np.diff(route.height_m) / np.where(dt > 0, dt, 1.0), 0.0)
        az0 = np.asarray(route.leg_azimuth_deg, dtype=float)
        az1 = az0 + ((_leg_end_azimuths(route) - az0 + 180.0) % 360.0 - 180.0)
        l_first = np.clip(np.searchsorted(rt, lo_t, side="right") - 1, 0, n - 2)
        l_last = np.clip(np.searchsorted(rt, hi_t, side="left") - 1, 0, n - 2)
        l_last = np.maximum(l_last, l_first)
        lidx, lok = _pad_ranges(l_first, l_last)
        lidx = np.clip(lidx, 0, n - 2)
        moving = seg_len[lidx] > 0
        s = speed[lidx]
        s_lo = np.where(moving, np.maximum(s - unc.speed_m_s, 0.0), 0.0)
        s_hi = np.where(moving, s + unc.speed_m_s, 0.0)
        h_lo = np.minimum(az0[lidx], az1[lidx]) - unc.heading_deg
        h_hi = np.maximum(az0[lidx], az1[lidx]) + unc.heading_deg
        c = climb[lidx]
        start_in = rt[lidx] >= lo_t[:, None]
        end_in = rt[lidx + 1] <= hi_t[:, None]
        leg_a = np.where(start_in[..., None], verts[lidx] - centre[:, None], ends[0][:, None])
        leg_b = np.where(end_in[..., None], verts[lidx + 1] - centre[:, None], ends[1][:, None])
        max_leg = np.max(np.where(lok, seg_len[lidx], 0.0), axis=1)
        lok = lok & True
    else:
        lok = np.zeros((t.size, 1), bool)
        s_lo = s_hi = h_lo = h_hi = c = np.zeros((t.size, 1))
        leg_a = leg_b = np.zeros((t.size, 1, 3))
        max_leg = np.zeros(t.size)
    # Waiting before the start or after the end of the route: stopped candidates there.
    zero = np.zeros((t.size, 2))
    waits = np.stack((wait_lo | (n < 2), wait_hi | (n < 2)), axis=1)
    w_pos = np.stack((ends[0], ends[1]), axis=1)                              # (T, 2, 3)
    s_lo, s_hi, h_lo, h_hi, c = (np.concatenate((x, zero), axis=1) for x in (s_lo, s_hi, h_lo, h_hi, c))
    leg_a = np.concatenate((leg_a, w_pos), axis=1)
    leg_b = np.concatenate((leg_b, w_pos), axis=1)
    lok = np.concatenate((lok, waits), axis=1)
    leg_a = np.where(lok[..., None], leg_a, 0.0)
    leg_b = np.where(lok[..., None], leg_b, 0.0)
    max_disp = np.maximum(np.max(np.linalg.norm(leg_a, axis=-1), axis=1),
                          np.max(np.linalg.norm(leg_b, axis=-1), axis=1))
    return RouteMotion(unc, nominal, path, d_lo, d_hi, leg_a, leg_b, max_disp, max_leg,
                       s_lo, s_hi, h_lo, h_hi, c - unc.vertical_m_s, c + unc.vertical_m_s, lok)


def _cos_range(cos_u: np.ndarray, abs_sin_u: np.ndarray, cos_half: np.ndarray, sin_half: np.ndarray
               ) -> tuple[np.ndarray, np.ndarray]:
    """Least and greatest cos(az - h) over headings h in [mid - w, mid + w] (0 <= w <= 180
    deg), from the cosine and |sine| of u = az - mid and the cosine and sine of w: with x
    the angle from mid to az (0..180, cos x = cos u, sin x = |sin u|), the angle to az runs
    over [x - w, x + w], where cos falls monotonically on 0..180, so the greatest is 1 when
    x <= w (cos x >= cos w), else cos(x - w), and the least -1 when x + w >= 180
    (cos x <= -cos w), else cos(x + w) [calc: angle-sum formulas]."""
    a = cos_u * cos_half
    b = abs_sin_u * sin_half
    cmax = np.where(cos_u >= cos_half, 1.0, a + b)
    cmin = np.where(cos_u <= -cos_half, -1.0, a - b)
    return cmin, cmax


def motion_terms_hz(motion: RouteMotion, azimuth_deg: np.ndarray, elevation_deg: np.ndarray,
                    gradient_ecef_hz_m: np.ndarray, wavelength_m: np.ndarray,
                    elevation_spread_rad: np.ndarray | float = 0.0, block_elements: int = 16_384):
    """Per (S, T), over the candidate legs:

    * ``slip``: least and greatest g . (p - p_nominal) (Hz) over the positions on the legs
      (a linear function along a leg has its extremes at the leg part's ends);
    * ``velocity``: least and greatest (v . line of sight) / lambda (Hz), where v . los =
      s cos(el) cos(az - heading) + climb sin(el), exact over each leg's speed, heading and
      climb ranges (linear in speed and climb; cos over an interval has its extremes at
      the ends or at 0/180 deg); the climb's share is taken over elevations within
      ``elevation_spread_rad`` of the nominal (sin is monotonic there), the horizontal
      share at the nominal line of sight (the caller bounds its turn);
    * ``joint``: least and greatest of their sum on the same leg (position and motion on
      one leg go together), never wider than the two separate ranges added.

    Returns (slip_lo, slip_hi, vel_lo, vel_hi, joint_lo, joint_hi).

    The work is (T, S, L) arrays in blocks of about ``block_elements`` (small temporaries
    stay in the processor's cache and are reused by the allocator: blocks of millions were
    3x slower); a time's unused leg slots repeat one of its real legs,
    which leaves every extreme unchanged and needs no masks."""
    n_s, n_t = azimuth_deg.shape
    ok = motion.leg_ok
    n_l = ok.shape[1]
    pick = np.where(ok, np.arange(n_l)[None, :], np.argmax(ok, axis=1)[:, None])
    rows = np.arange(n_t)[:, None]

    def legs(x):                     # (T, L) -> (T, 1, L), unused slots filled
        return x[rows, pick][:, None, :]

    h_lo, h_hi = legs(motion.leg_heading_lo_deg), legs(motion.leg_heading_hi_deg)
    mid = np.radians(0.5 * (h_lo + h_hi))
    half = np.radians(np.clip(0.5 * (h_hi - h_lo), 0.0, 180.0))
    cos_mid, sin_mid, cos_half, sin_half = np.cos(mid), np.sin(mid), np.cos(half), np.sin(half)
    s_lo, s_hi = legs(motion.leg_speed_lo_m_s), legs(motion.leg_speed_hi_m_s)
    c_lo, c_hi = legs(motion.leg_climb_lo_m_s), legs(motion.leg_climb_hi_m_s)
    disp_a = motion.leg_start_disp_ecef_m[rows, pick].transpose(0, 2, 1)     # (T, 3, L)
    disp_b = motion.leg_end_disp_ecef_m[rows, pick].transpose(0, 2, 1)
    # Per (T, S, 1).
    az = np.radians(azimuth_deg).T[:, :, None]
    el = np.radians(elevation_deg).T[:, :, None]
    cos_az, sin_az, ce = np.cos(az), np.sin(az), np.cos(el)
    spread = np.broadcast_to(np.asarray(elevation_spread_rad, dtype=float), azimuth_deg.shape).T[:, :, None]
    se1 = np.sin(np.clip(el - spread, -np.pi / 2, np.pi / 2))
    se2 = np.sin(np.clip(el + spread, -np.pi / 2, np.pi / 2))
    lam = np.broadcast_to(np.asarray(wavelength_m, dtype=float).reshape(-1), (n_s,))[None, :, None]
    grad = gradient_ecef_hz_m.transpose(1, 0, 2)                                # (T, S, 3)
    out = [np.empty((n_t, n_s)) for _ in range(6)]
    step = max(1, block_elements // max(n_s * n_l, 1))
    for a in range(0, n_t, step):
        b = min(a + step, n_t)
        cu = cos_az[a:b] * cos_mid[a:b] + sin_az[a:b] * sin_mid[a:b]            # cos(az - mid)
        su = np.abs(sin_az[a:b] * cos_mid[a:b] - cos_az[a:b] * sin_mid[a:b])    # |sin(az - mid)|
        cmin, cmax = _cos_range(cu, su, cos_half[a:b], sin_half[a:b])
        ups = (se1[a:b] * c_lo[a:b], se1[a:b] * c_hi[a:b], se2[a:b] * c_lo[a:b], se2[a:b] * c_hi[a:b])
        up_lo = np.minimum(np.minimum(ups[0], ups[1]), np.minimum(ups[2], ups[3]))
        up_hi = np.maximum(np.maximum(ups[0], ups[1]), np.maximum(ups[2], ups[3]))
        v_hi = (ce[a:b] * np.maximum(s_lo[a:b] * cmax, s_hi[a:b] * cmax) + up_hi) / lam
        v_lo = (ce[a:b] * np.minimum(s_lo[a:b] * cmin, s_hi[a:b] * cmin) + up_lo) / lam
        pa = np.matmul(grad[a:b], disp_a[a:b])                                   # (t, S, L)
        pb = np.matmul(grad[a:b], disp_b[a:b])
        p_lo, p_hi = np.minimum(pa, pb), np.maximum(pa, pb)
        out[0][a:b] = p_lo.min(axis=2)
        out[1][a:b] = p_hi.max(axis=2)
        out[2][a:b] = v_lo.min(axis=2)
        out[3][a:b] = v_hi.max(axis=2)
        out[4][a:b] = (p_lo + v_lo).min(axis=2)
        out[5][a:b] = (p_hi + v_hi).max(axis=2)
    none = ~ok.any(axis=1)[:, None]            # a time without any leg: empty extremes
    return tuple(np.where(none, np.inf if i % 2 == 0 else -np.inf, x).T for i, x in enumerate(out))

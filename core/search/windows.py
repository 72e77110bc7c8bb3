"""Doppler search windows: the apparent carrier offsets a receiver must search.

For every satellite and grid time the window [low, high] contains the apparent Doppler
for every combination inside the stated uncertainties:

* position anywhere within ``horizontal_uncertainty_m`` (a disc on the ellipsoid) and
  ``vertical_uncertainty_m`` of the nominal site;
* true time anywhere within +-``time_uncertainty_s`` of the receiver's time;
* receiver velocity up to ``max_horizontal_speed_m_s`` horizontally and
  ``max_vertical_speed_m_s`` vertically;
* oscillator fractional offset anywhere in offset +- uncertainty (ppb). A reference
  running fast by e measures every carrier low: apparent = (f_c + D)/(1 + e) - f_c,
  i.e. about -e f_c [trade];
* an orbit-data margin (from the data's source and age, see core.orbit_margin).

Each term is computed from the geometry, not padded:

* position: Doppler gradient with respect to the receiver position is
  v_perp / (range * wavelength) [calc: d(rho_hat . v)/dp = -v_perp/rho]. Over a
  cylinder of radius R and half-height V the linear term's extreme is exactly
  R |g_horizontal| + V |g_up|; second-order terms are bounded by
  (3 |v| / rho^2)(R^2 + V^2) / (2 lambda) plus the ellipsoid's drop R^2 / (2 a) times
  |g_up|;
* time: D(t + tau) = D + D' tau + D'' tau^2 / 2 over |tau| <= dt, with D'' from the
  grid (exact range of the quadratic);
* velocity: the line of sight has horizontal share cos(el) and vertical share sin(el),
  so the extreme is exactly (vh cos el + vv sin el) / lambda;
* oscillator: exact extremes of (f_c + D)/(1 + e) - f_c.

The terms add (each is a worst case over an independent quantity); cross terms are of
second order in small quantities (below 1e-3 Hz for field-test uncertainties).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..ground.constants import WGS84_A_M
from ..sky.predict import Prediction
from .motion import RouteMotion, motion_terms_hz

TERM_NAMES = ("position", "time", "velocity", "oscillator", "orbit")


@dataclass(frozen=True)
class Uncertainty:
    """What the receiver does not know, in SI units."""

    horizontal_m: float = 0.0
    vertical_m: float = 0.0
    time_s: float = 0.0
    max_horizontal_speed_m_s: float = 0.0
    max_vertical_speed_m_s: float = 0.0
    oscillator_offset_ppb: float = 0.0
    oscillator_uncertainty_ppb: float = 0.0


@dataclass
class DopplerWindows:
    """Windows shaped (S, T). ``terms_low_hz``/``terms_high_hz`` hold each term's signed
    extent below/above the nominal (low <= 0 <= high); ``share_hz`` each term's half-width."""

    nominal_hz: np.ndarray
    low_hz: np.ndarray
    high_hz: np.ndarray
    terms_low_hz: dict[str, np.ndarray] = field(default_factory=dict)
    terms_high_hz: dict[str, np.ndarray] = field(default_factory=dict)

    @property
    def width_hz(self) -> np.ndarray:
        return self.high_hz - self.low_hz

    @property
    def share_hz(self) -> dict[str, np.ndarray]:
        return {k: np.maximum(-self.terms_low_hz[k], self.terms_high_hz[k]) for k in self.terms_low_hz}

    def non_oscillator_extent_hz(self) -> tuple[np.ndarray, np.ndarray]:
        lo = sum(v for k, v in self.terms_low_hz.items() if k != "oscillator")
        hi = sum(v for k, v in self.terms_high_hz.items() if k != "oscillator")
        return lo, hi


def apparent_doppler_hz(doppler_hz, carrier_hz, oscillator_ppb):
    """Doppler seen by a receiver whose reference runs fast by ``oscillator_ppb``."""
    e = np.asarray(oscillator_ppb, dtype=float) * 1e-9
    f_c = np.asarray(carrier_hz, dtype=float)
    return (f_c + doppler_hz) / (1.0 + e) - f_c


def doppler_second_derivative(pred: Prediction) -> np.ndarray:
    """D'' (Hz/s^2) along the grid from the analytic Doppler rate (central differences)."""
    rate = pred.doppler_rate_hz_s
    t = pred.times.unix_s
    if t.size >= 3:
        return np.gradient(rate, t, axis=1)
    # One or two samples: bound |D''| by 2e-3 Hz/s^2, well above what GNSS orbits give
    # at a static site on L-band (about 1e-4 Hz/s^2 near the horizon) [calc].
    return np.full_like(rate, 2e-3)


def position_gradient_hz_per_m(pred: Prediction) -> tuple[np.ndarray, np.ndarray]:
    """|horizontal| and |vertical| Doppler gradient (Hz/m) w.r.t. the receiver position.

    The gradient is v_perp / (range lambda), v_perp = v - (rho_hat . v) rho_hat. Its up
    component is d(sin el)/dt range = cos(el) el_rate range [calc], and its horizontal
    part the rest of |v_perp|^2 = |v|^2 - range_rate^2, so no vectors need to be kept.
    """
    lam = pred.wavelength_m[:, None]
    rr = pred.doppler_hz * lam                                   # -range rate
    up = np.radians(pred.elevation_rate_deg_s) * np.cos(np.radians(pred.elevation_deg)) * pred.range_m
    speed = pred.sat_speed_m_s
    horiz = np.sqrt(np.maximum(speed * speed - rr * rr - up * up, 0.0))
    scale = 1.0 / (pred.range_m * lam)
    return horiz * scale, np.abs(up) * scale


def position_gradient_ecef(pred: Prediction) -> np.ndarray:
    """Doppler gradient (Hz/m) w.r.t. the receiver position, Earth-fixed, (S, T, 3):
    v_perp / (range lambda) (needs a prediction with ``keep_states``)."""
    los = pred.los_ecef
    v = pred.sat_vel_ecef_m_s
    rr = np.sum(los * v, axis=-1)
    v_perp = v - rr[..., None] * los
    return v_perp / (pred.range_m * pred.wavelength_m[:, None])[..., None]


# Above this time uncertainty the time term is evaluated on shifted predictions instead
# of the third-order expansion (whose remainder would grow as dt^4).
TAYLOR_LIMIT_S = 30.0


@dataclass
class ShiftSummary:
    """What the windows need from the grid shifted by every offset within +-time_s (see
    :func:`shift_summary`): extremes of D(t + tau) - D(t), the largest |D''|, the largest
    position gradients, and the spacing of the samples they were taken from."""

    diff_min_hz: np.ndarray
    diff_max_hz: np.ndarray
    d2_max_hz_s2: np.ndarray
    spacing_s: float
    gh_max: np.ndarray
    gu_max: np.ndarray


def _time_term(pred: Prediction, dt: float, shifted: ShiftSummary | None):
    """Signed extents (low <= 0 <= high) of D(t + tau) - D(t) over |tau| <= dt."""
    d1 = pred.doppler_rate_hz_s
    zeros = np.zeros_like(d1)
    if dt == 0:
        return zeros, zeros
    if shifted is not None:
        # Between two samples h apart a function exceeds its chord by at most |D''| h^2 / 8.
        between = 1.5 * shifted.d2_max_hz_s2 * shifted.spacing_s**2 / 8.0 + 1e-4
        return (np.minimum(shifted.diff_min_hz, 0.0) - between,
                np.maximum(shifted.diff_max_hz, 0.0) + between)
    t = pred.times.unix_s
    d2 = doppler_second_derivative(pred)
    if t.size >= 5:
        d3 = np.gradient(d2, t, axis=1)
        d4 = np.gradient(d3, t, axis=1)
    else:
        # Bounds for GNSS orbits at L-band [calc: each derivative gains a factor of at most
        # the orbital rate, about 1.5e-4 rad/s, over D'' < 2e-3 Hz/s^2; factor 10 margin].
        d3 = np.full_like(d1, 3e-6)
        d4 = np.full_like(d1, 5e-9)
    # A cubic's extremes on [-dt, dt] lie at the ends or at its critical points.
    ends = [d1 * tau + d2 * tau**2 / 2 + d3 * tau**3 / 6 for tau in (-dt, dt)]
    a, b, c = d3 / 2.0, d2, d1
    with np.errstate(divide="ignore", invalid="ignore"):
        disc = np.sqrt(np.maximum(b * b - 4 * a * c, 0.0))
        roots = [np.where(a != 0, (-b + disc) / (2 * a), np.where(b != 0, -c / b, 0.0)),
                 np.where(a != 0, (-b - disc) / (2 * a), 0.0)]
    extra = [np.where(np.abs(r) <= dt, d1 * r + d2 * r**2 / 2 + d3 * (r * r * r) / 6, 0.0)   # r*r*r: pow is 200x slower
             for r in roots]
    allv = np.stack(ends + extra)
    remainder = 2.0 * np.abs(d4) * dt**4 / 24.0 + 1e-4
    return np.minimum(allv.min(axis=0), 0.0) - remainder, np.maximum(allv.max(axis=0), 0.0) + remainder


def _velocity_term(pred: Prediction, unc: Uncertainty, el_spread_rad: np.ndarray) -> np.ndarray:
    """Extreme of (vh cos el' + vv sin el') / lambda over |el' - el| <= spread.

    The spread covers the elevation seen from any admissible true position and time:
    the local vertical tilts by R / a over the disc, the line of sight turns by
    (R + V) / range, and the satellite moves by |el rate| dt.
    """
    vh, vv = unc.max_horizontal_speed_m_s, unc.max_vertical_speed_m_s
    el = np.radians(pred.elevation_deg)
    lo = np.clip(el - el_spread_rad, -np.pi / 2, np.pi / 2)
    hi = np.clip(el + el_spread_rad, -np.pi / 2, np.pi / 2)

    def f(x):
        return vh * np.abs(np.cos(x)) + vv * np.abs(np.sin(x))

    best = np.maximum(f(lo), f(hi))
    star = float(np.arctan2(vv, vh)) if (vh or vv) else 0.0
    for cand in (star, -star):
        best = np.where((lo <= cand) & (cand <= hi), np.maximum(best, f(cand)), best)
    return best / pred.wavelength_m[:, None]


def doppler_windows(pred: Prediction, unc: Uncertainty, orbit_margin_hz: np.ndarray | float = 0.0,
                    shifted: ShiftSummary | None = None, motion: RouteMotion | None = None) -> DopplerWindows:
    """Nominal apparent Doppler and the window that holds every admissible truth.

    ``shifted``: the :func:`shift_summary` of the same grid; required when
    ``unc.time_s`` exceeds ``TAYLOR_LIMIT_S``. ``motion``: the drive along a route
    (core.search.motion) over the same grid, predicted from its nominal positions; then the
    nominal holds the route velocity's Doppler, the velocity term is the route term and
    the position term also holds every position the schedule slip allows (``unc``'s speed
    bounds are not used).
    """
    if unc.time_s > TAYLOR_LIMIT_S and shifted is None:
        raise ValueError("time uncertainty above TAYLOR_LIMIT_S needs shifted predictions")
    if motion is not None:
        return _route_windows(pred, unc, orbit_margin_hz, shifted, motion)
    f_c = pred.carrier_hz[:, None]
    lam = pred.wavelength_m[:, None]
    d = pred.doppler_hz
    nominal = apparent_doppler_hz(d, f_c, unc.oscillator_offset_ppb)
    t = pred.times.unix_s
    dt = unc.time_s
    r_h, r_v = unc.horizontal_m, unc.vertical_m

    # Position: linear term with the gradient's largest value over the time interval.
    gh, gu = position_gradient_hz_per_m(pred)
    if shifted is not None:
        gh = np.maximum(gh, shifted.gh_max)
        gu = np.maximum(gu, shifted.gu_max)
    elif dt > 0 and t.size >= 2:
        gh = gh + np.abs(np.gradient(gh, t, axis=1)) * dt * 1.5
        gu = gu + np.abs(np.gradient(gu, t, axis=1)) * dt * 1.5
    speed = pred.sat_speed_m_s
    second = 1.5 * speed / pred.range_m**2 * (r_h**2 + r_v**2) / lam + gu * r_h**2 / (2 * WGS84_A_M)
    pos = gh * r_h + gu * r_v + second

    t_low, t_high = _time_term(pred, dt, shifted)

    spread = (r_h / WGS84_A_M + (r_h + r_v) / pred.range_m
              + np.radians(np.abs(pred.elevation_rate_deg_s)) * dt * 1.05)
    vel = _velocity_term(pred, unc, spread)

    # Oscillator (exact; the apparent Doppler falls as the offset rises). Its cross term
    # with the other terms is e * (their extent): below 1e-3 Hz for e < 1e-5 and 100 Hz.
    e0, de = unc.oscillator_offset_ppb, unc.oscillator_uncertainty_ppb
    o_low = apparent_doppler_hz(d, f_c, e0 + de) - nominal
    o_high = apparent_doppler_hz(d, f_c, e0 - de) - nominal
    cross = (abs(e0) + de) * 1e-9 * (pos + vel + np.maximum(-t_low, t_high))
    o_low = o_low - cross
    o_high = o_high + cross

    orbit = np.broadcast_to(np.asarray(orbit_margin_hz, dtype=float), d.shape)

    lows = {"position": -pos, "time": t_low, "velocity": -vel, "oscillator": o_low, "orbit": -orbit}
    highs = {"position": pos, "time": t_high, "velocity": vel, "oscillator": o_high, "orbit": orbit + 0.0}
    low = nominal + sum(lows.values())
    high = nominal + sum(highs.values())
    return DopplerWindows(nominal, low, high, lows, highs)


def _oscillator_terms(d, f_c, unc: Uncertainty, others_hz):
    """Signed oscillator extents, exact, with the cross term e x (the other terms' extent)."""
    nominal = apparent_doppler_hz(d, f_c, unc.oscillator_offset_ppb)
    e0, de = unc.oscillator_offset_ppb, unc.oscillator_uncertainty_ppb
    cross = (abs(e0) + de) * 1e-9 * others_hz
    return (apparent_doppler_hz(d, f_c, e0 + de) - nominal - cross,
            apparent_doppler_hz(d, f_c, e0 - de) - nominal + cross)


# Satellites that stay below this elevation over a whole grid are never searched; their
# route windows take the any-direction motion bound instead of the exact route terms.
BELOW_HORIZON_DEG = -10.0


def _route_windows(pred: Prediction, unc: Uncertainty, orbit_margin_hz, shifted: ShiftSummary | None,
                   motion: RouteMotion) -> DopplerWindows:
    """The windows on a route (see :func:`doppler_windows` and core.search.motion).

    Position: the disc and band of ``unc`` as for a site, plus the exact extremes of the
    linear term g . (p - p_nominal) over the positions the slip allows (the route's
    vertices in the slip range and its ends), the growth of g over the time uncertainty
    times the largest displacement, second-order terms over (slip extent + disc radius),
    and a leg's bulge off its chord (L^2 / 8a) times |g|.
    Velocity: exact extremes of (route velocity . line of sight) / lambda over the
    candidate legs' speed, heading and climb ranges, less the nominal leg's value, plus
    |v|max x the line of sight's turn over the admissible positions and times.
    """
    f_c = pred.carrier_hz[:, None]
    lam = pred.wavelength_m[:, None]
    st = motion.nominal
    el = np.radians(pred.elevation_deg)
    p_nom = (st.speed_m_s[None, :] * np.cos(el) * np.cos(np.radians(pred.azimuth_deg - st.heading_deg[None, :]))
             + st.vertical_m_s[None, :] * np.sin(el))
    d = pred.doppler_hz + p_nom / lam          # receiver motion adds +(los . v_rx) / lambda
    nominal = apparent_doppler_hz(d, f_c, unc.oscillator_offset_ppb)
    t = pred.times.unix_s
    dt = unc.time_s
    r_h, r_v = unc.horizontal_m, unc.vertical_m
    gh, gu = position_gradient_hz_per_m(pred)
    g_abs = np.hypot(gh, gu)
    # The gradient's largest value over the time interval, as for a site.
    if shifted is not None:
        gh_t, gu_t = np.maximum(gh, shifted.gh_max), np.maximum(gu, shifted.gu_max)
    elif dt > 0 and t.size >= 2:
        gh_t = gh + np.abs(np.gradient(gh, t, axis=1)) * dt * 1.5
        gu_t = gu + np.abs(np.gradient(gu, t, axis=1)) * dt * 1.5
    else:
        gh_t, gu_t = gh, gu
    growth = (gh_t - gh) + (gu_t - gu)
    reach = motion.max_disp_m[None, :]
    # Elevation seen from any admissible position and time, as for a site (_velocity_term).
    spread = ((reach + r_h) / WGS84_A_M + (reach + r_h + r_v) / pred.range_m
              + np.radians(np.abs(pred.elevation_rate_deg_s)) * dt * 1.05)
    # Exact route terms for satellites that come near the horizon in the grid; the others
    # (never searched) get the any-direction bound, which costs nothing.
    rows = np.nonzero(np.any(pred.elevation_deg > BELOW_HORIZON_DEG, axis=1))[0]
    grad = position_gradient_ecef(pred)
    reach_hz = np.linalg.norm(grad, axis=-1) * reach
    v_any = (motion.max_horizontal_speed_m_s[None, :] + np.max(
        np.where(motion.leg_ok, np.maximum(np.abs(motion.leg_climb_lo_m_s), np.abs(motion.leg_climb_hi_m_s)), 0.0),
        axis=1)[None, :]) / lam
    s_lo, s_hi = -reach_hz, reach_hz + 0.0
    v_lo = np.broadcast_to(-v_any, d.shape).copy()
    v_hi = np.broadcast_to(v_any, d.shape).copy()
    j_lo, j_hi = s_lo + v_lo, s_hi + v_hi
    if rows.size:
        part = motion_terms_hz(motion, pred.azimuth_deg[rows], pred.elevation_deg[rows], grad[rows],
                               pred.wavelength_m[rows], np.broadcast_to(spread, d.shape)[rows])
        for full, sub in zip((s_lo, s_hi, v_lo, v_hi, j_lo, j_hi), part):
            full[rows] = sub
    speed = pred.sat_speed_m_s
    second = (1.5 * speed / pred.range_m**2 * ((reach + r_h) ** 2 + r_v**2) / lam
              + gu_t * (reach + r_h) ** 2 / (2 * WGS84_A_M)
              + g_abs * motion.max_leg_m[None, :] ** 2 / (8 * WGS84_A_M))
    disc = gh_t * r_h + gu_t * r_v + growth * reach + second

    t_low, t_high = _time_term(pred, dt, shifted)

    turn = ((reach + r_h) / WGS84_A_M + (reach + r_h + r_v) / pred.range_m
            + g_abs * lam * dt * 1.05)         # |v_perp| / range is the line of sight's turn rate
    turn_hz = motion.max_horizontal_speed_m_s[None, :] * turn / lam
    # Position and motion on the same leg go together: the joint extreme (relative to the
    # nominal) is booked on the position term first (up to the slip's own reach), the
    # rest on the velocity term.
    nom_hz = p_nom / lam
    joint_lo = np.minimum(j_lo - nom_hz, 0.0)
    joint_hi = np.maximum(j_hi - nom_hz, 0.0)
    slip_lo = np.maximum(np.minimum(s_lo, 0.0), joint_lo)
    slip_hi = np.minimum(np.maximum(s_hi, 0.0), joint_hi)
    p_low, p_high = slip_lo - disc, slip_hi + disc
    vel_low = (joint_lo - slip_lo) - turn_hz
    vel_high = (joint_hi - slip_hi) + turn_hz

    others = (np.maximum(-p_low, p_high) + np.maximum(-vel_low, vel_high) + np.maximum(-t_low, t_high))
    o_low, o_high = _oscillator_terms(d, f_c, unc, others)
    orbit = np.broadcast_to(np.asarray(orbit_margin_hz, dtype=float), d.shape)
    lows = {"position": p_low, "time": t_low, "velocity": vel_low, "oscillator": o_low, "orbit": -orbit}
    highs = {"position": p_high, "time": t_high, "velocity": vel_high, "oscillator": o_high,
             "orbit": orbit + 0.0}
    return DopplerWindows(nominal, nominal + sum(lows.values()), nominal + sum(highs.values()), lows, highs)


def full_range_windows(pred: Prediction, unc: Uncertainty, max_doppler_hz: np.ndarray,
                       max_receiver_speed_m_s: float = 0.0) -> DopplerWindows:
    """Windows of a receiver that knows neither where nor when it is (a cold start): every
    satellite's whole Doppler range +-``max_doppler_hz`` (S,) (see
    :func:`max_doppler_anywhere_hz`), the receiver's own speed in any direction, and the
    oscillator exactly as for any window. Booked as "position" (satellite Doppler range),
    "velocity" (receiver speed) and "oscillator"."""
    f_c = pred.carrier_hz[:, None]
    lam = pred.wavelength_m[:, None]
    shape = pred.doppler_hz.shape
    d_max = np.broadcast_to(np.asarray(max_doppler_hz, dtype=float)[:, None], shape)
    vel = np.broadcast_to(max_receiver_speed_m_s / lam, shape)
    zero = np.zeros(shape)
    nominal = apparent_doppler_hz(zero, f_c, unc.oscillator_offset_ppb)
    e0, de = unc.oscillator_offset_ppb, unc.oscillator_uncertainty_ppb
    top = d_max + vel
    o_low = apparent_doppler_hz(-top, f_c, e0 + de) - (nominal - top)
    o_high = apparent_doppler_hz(top, f_c, e0 - de) - (nominal + top)
    lows = {"position": -d_max, "time": zero, "velocity": -vel, "oscillator": np.minimum(o_low, 0.0),
            "orbit": zero}
    highs = {"position": d_max + 0.0, "time": zero, "velocity": vel + 0.0, "oscillator": np.maximum(o_high, 0.0),
             "orbit": zero}
    return DopplerWindows(nominal, nominal + sum(lows.values()), nominal + sum(highs.values()), lows, highs)


def max_doppler_anywhere_hz(pred: Prediction) -> np.ndarray:
    """(S,) the largest |Doppler| a satellite can show to a receiver standing anywhere on
    the Earth during the grid: |v_horizontal| R / r + |v_radial| over the wavelength
    [calc: the line of sight from the surface is at most asin(R / r) off the nadir; its
    component along the orbital velocity is at most sin of that], R the Earth's equatorial
    radius. Needs the states (predict(keep_states=True))."""
    pos, vel = pred.sat_pos_ecef_m, pred.sat_vel_ecef_m_s
    if pos is None:
        raise ValueError("the cold-start range needs predict(..., keep_states=True)")
    r = np.linalg.norm(pos, axis=-1)
    v_r = np.sum(pos * vel, axis=-1) / r
    v_h = np.sqrt(np.maximum(np.sum(vel * vel, axis=-1) - v_r * v_r, 0.0))
    d = (v_h * WGS84_A_M / r + np.abs(v_r)) / pred.wavelength_m[:, None]
    return np.nanmax(np.where(pred.valid, d, np.nan), axis=1)


def oscillator_fraction_after(w: DopplerWindows, carrier_hz: np.ndarray, sats, ks,
                               bin_half_width_hz) -> float:
    """Fractional oscillator uncertainty once one of the satellites ``sats`` (acquired at
    grid indices ``ks``) is acquired, the worst of them.

    The acquisition fixes that satellite's apparent Doppler to within half a bin; its
    predicted true Doppler is uncertain by its own non-oscillator terms U1. The oscillator
    is then known to within (half bin + U1) / f_c1.
    """
    sats, ks = np.asarray(sats, dtype=int), np.asarray(ks, dtype=int)
    # the non-oscillator extents (DopplerWindows.non_oscillator_extent_hz) at those samples only
    shape = np.shape(w.nominal_hz)
    lo1 = sum(np.broadcast_to(v, shape)[sats, ks] for k, v in w.terms_low_hz.items()
              if k != "oscillator")
    hi1 = sum(np.broadcast_to(v, shape)[sats, ks] for k, v in w.terms_high_hz.items()
              if k != "oscillator")
    u1 = np.maximum(-lo1, hi1)
    half = np.broadcast_to(np.asarray(bin_half_width_hz, dtype=float), u1.shape)
    return float(np.max((half + u1) / np.asarray(carrier_hz, dtype=float)[sats]))


def terms_before_oscillator(w: DopplerWindows) -> tuple[np.ndarray | float, np.ndarray | float]:
    """The sums (low, high) of the terms that come before the oscillator term, in the
    windows' order: what :func:`windows_after_first_acquisition` adds the new oscillator
    term to. They do not depend on the oscillator fraction, so a caller that narrows the
    same windows for several fractions can compute them once."""
    def before(terms: dict) -> np.ndarray | float:
        names = list(terms)
        return sum(terms[k] for k in names[:names.index("oscillator")])
    return before(w.terms_low_hz), before(w.terms_high_hz)


def windows_after_first_acquisition(w: DopplerWindows, carrier_hz: np.ndarray,
                                    oscillator_fraction: float,
                                    before: tuple | None = None) -> DopplerWindows:
    """Windows once the oscillator is measured to within ``oscillator_fraction``
    (see :func:`oscillator_fraction_after`): the oscillator term of every satellite j
    becomes f_cj x fraction, but never wider than before the acquisition. The window is
    centred on the nominal (the receiver's corrected oscillator estimate is unknown at
    planning time, only its accuracy is). ``before``: :func:`terms_before_oscillator`
    of ``w``, when the caller has it (the same sums, in the same order)."""
    osc = np.asarray(carrier_hz, dtype=float)[:, None] * oscillator_fraction   # (S, 1)
    lows = dict(w.terms_low_hz)
    highs = dict(w.terms_high_hz)
    lows["oscillator"] = np.maximum(-osc, w.terms_low_hz["oscillator"])
    highs["oscillator"] = np.minimum(osc, w.terms_high_hz["oscillator"])
    low_before, high_before = terms_before_oscillator(w) if before is None else before
    after = list(lows)[list(lows).index("oscillator") + 1:]
    # Summed in the windows' order, as nominal + sum(lows.values()) would (in place on
    # the one new array per edge; addition commutes exactly).
    shape = np.broadcast_shapes(np.shape(w.nominal_hz), *(np.shape(v) for v in lows.values()),
                                *(np.shape(v) for v in highs.values()))
    low = low_before + lows["oscillator"]
    high = high_before + highs["oscillator"]
    if np.shape(low) != shape:
        low = np.array(np.broadcast_to(low, shape), dtype=float)
    if np.shape(high) != shape:
        high = np.array(np.broadcast_to(high, shape), dtype=float)
    for k in after:
        low += lows[k]
        high += highs[k]
    low += w.nominal_hz
    high += w.nominal_hz
    return DopplerWindows(w.nominal_hz, low, high, lows, highs)


def _sliding(x: np.ndarray, half: int, fn) -> np.ndarray:
    """Running extreme of (S, N) rows over windows i - half .. i + half (edges clipped)."""
    from scipy.ndimage import maximum_filter1d, minimum_filter1d

    f = maximum_filter1d if fn is np.maximum else minimum_filter1d
    return f(x, size=2 * half + 1, axis=1, mode="nearest")


def _shift_reduce(orbits, site, base: np.ndarray, dense_u: np.ndarray, r: int, half: int,
                  dt: float, spacing: float, signals, out: dict[str, np.ndarray], a: int) -> None:
    """One block of :func:`shift_summary`: base times ``base`` (the dense lattice's points
    half, half + r, ...) reduced over the dense series and the two ends +-dt."""
    from ..sky.predict import predict

    p = predict(orbits, site, dense_u, signals)
    d = p.doppler_hz
    d2 = np.abs(np.gradient(p.doppler_rate_hz_s, dense_u, axis=1)) if dense_u.size >= 3 \
        else np.full_like(d, 2e-3)
    gh, gu = position_gradient_hz_per_m(p)
    at = half + r * np.arange(base.size)
    ref = d[:, at]
    dmin = _sliding(d, half, np.minimum)[:, at] - ref
    dmax = _sliding(d, half, np.maximum)[:, at] - ref
    d2m = _sliding(d2, half, np.maximum)[:, at]
    ghm = _sliding(gh, half, np.maximum)[:, at]
    gum = _sliding(gu, half, np.maximum)[:, at]
    if half * spacing < dt - 1e-9:
        # The ends +-dt lie off the lattice: evaluate them on their own.
        for tau in (-dt, dt):
            e = predict(orbits, site, base + tau, signals)
            diff = e.doppler_hz - ref
            dmin, dmax = np.minimum(dmin, diff), np.maximum(dmax, diff)
            g1, g2 = position_gradient_hz_per_m(e)
            ghm, gum = np.maximum(ghm, g1), np.maximum(gum, g2)
    b = a + base.size
    out["dmin"][:, a:b], out["dmax"][:, a:b], out["d2"][:, a:b] = dmin, dmax, d2m
    out["gh"][:, a:b], out["gu"][:, a:b] = ghm, gum


# Base-grid times per block of shift_summary (its dense series is r times denser).
SHIFT_BLOCK_TIMES = 512


def shift_summary(orbits, site, times, time_uncertainty_s: float, signals=None
                  ) -> ShiftSummary | None:
    """What the windows need from the grid shifted by every offset within +-time
    uncertainty, when it is too large for the expansion (None otherwise).

    One denser series instead of one prediction per shift: the Doppler, |D''| and the
    position gradients are predicted on a lattice ``h`` apart (h = step / r <= 15 s, so
    every base time is a lattice point) reaching ``time_uncertainty_s`` beyond the window,
    and reduced with running extremes over +-dt around each base time; when dt is not a
    multiple of h the two ends t +- dt are predicted as well. The grid is processed in
    blocks (memory does not grow with the window). Base times off the lattice (an end
    appended to the grid) are reduced on their own shifted samples.
    """
    if time_uncertainty_s <= TAYLOR_LIMIT_S:
        return None
    from ..ground.geodesy import SitePath
    from ..orbits.node_interp import uniform_step_s

    if isinstance(site, SitePath):
        # A moving receiver is at its own place at each base time: one sample of the
        # dense series would serve several places, so each shift is predicted on its own.
        return _shift_summary_per_shift(orbits, site, times, time_uncertainty_s, signals)

    dt = float(time_uncertainty_s)
    u = np.asarray(times.unix_s if hasattr(times, "unix_s") else times, dtype=float)
    n_t = u.size
    n_s = len(orbits.entries)
    out = {k: np.empty((n_s, n_t)) for k in ("dmin", "dmax", "d2", "gh", "gu")}
    body = n_t
    if n_t >= 2 and uniform_step_s(u) is None:
        body = n_t - 1 if (n_t > 2 and uniform_step_s(u[:-1]) is not None) else 0
    step = uniform_step_s(u[:body]) if body >= 2 else None
    if step is None:
        body = 0
    max_spacing = 15.0
    if body:
        r = int(np.ceil(step / max_spacing - 1e-9))
        h = step / r
    else:
        h = 2.0 * dt / np.ceil(2.0 * dt / max_spacing)
    half = int(np.floor(dt / h + 1e-9))
    for a in range(0, body, SHIFT_BLOCK_TIMES):
        b = min(a + SHIFT_BLOCK_TIMES, body)
        base = u[a:b]
        dense = u[0] + h * (np.arange((a * r) - half, (b - 1) * r + half + 1))
        _shift_reduce(orbits, site, base, dense, r, half, dt, h, signals, out, a)
    for k in range(body, n_t):
        # An isolated time: its own symmetric lattice (spacing h) around it.
        dense = u[k] + h * np.arange(-half, half + 1)
        _shift_reduce(orbits, site, u[k:k + 1], dense, 1, half, dt, h, signals, out, k)
    return ShiftSummary(out["dmin"], out["dmax"], out["d2"], h, out["gh"], out["gu"])


def _shift_summary_per_shift(orbits, site, times, time_uncertainty_s: float, signals=None
                             ) -> ShiftSummary:
    """:func:`shift_summary` by one prediction per shift (offsets at most 15 s apart): for a
    receiver whose position goes with the base time (a route)."""
    from ..sky.predict import predict

    base = times.unix_s
    ref = predict(orbits, site, base, signals)
    n = int(np.ceil(2.0 * time_uncertainty_s / 15.0)) + 1
    taus = np.linspace(-time_uncertainty_s, time_uncertainty_s, max(n, 3))
    dmin = dmax = np.zeros_like(ref.doppler_hz)
    d2 = np.abs(doppler_second_derivative(ref))
    gh, gu = position_gradient_hz_per_m(ref)
    for tau in taus:
        if tau == 0.0:
            continue
        p = predict(orbits, site, base + tau, signals)
        diff = p.doppler_hz - ref.doppler_hz
        dmin, dmax = np.minimum(dmin, diff), np.maximum(dmax, diff)
        d2 = np.maximum(d2, np.abs(doppler_second_derivative(p)))
        g1, g2 = position_gradient_hz_per_m(p)
        gh, gu = np.maximum(gh, g1), np.maximum(gu, g2)
    spacing = float(np.max(np.diff(np.sort(np.append(taus, 0.0)))))
    return ShiftSummary(dmin, dmax, d2, spacing, gh, gu)

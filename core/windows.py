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

from .constants import WGS84_A_M
from .predict import Prediction

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
    """|horizontal| and |vertical| Doppler gradient (Hz/m) w.r.t. the receiver position."""
    los = pred.los_ecef
    v = pred.sat_vel_ecef_m_s
    rr = pred.range_rate_m_s
    v_perp = v - rr[..., None] * los
    g = v_perp / (pred.range_m * pred.wavelength_m[:, None])[..., None]
    enu = g @ pred.site.enu_rotation.T
    return np.hypot(enu[..., 0], enu[..., 1]), np.abs(enu[..., 2])


# Above this time uncertainty the time term is evaluated on shifted predictions instead
# of the third-order expansion (whose remainder would grow as dt^4).
TAYLOR_LIMIT_S = 30.0


def time_shifts_s(time_uncertainty_s: float, max_spacing_s: float = 15.0) -> np.ndarray:
    """Offsets (s) at which to evaluate shifted predictions for a large time uncertainty."""
    n = int(np.ceil(2.0 * time_uncertainty_s / max_spacing_s)) + 1
    return np.linspace(-time_uncertainty_s, time_uncertainty_s, max(n, 3))


def _time_term(pred: Prediction, dt: float, shifted: list[Prediction] | None):
    """Signed extents (low <= 0 <= high) of D(t + tau) - D(t) over |tau| <= dt."""
    d1 = pred.doppler_rate_hz_s
    zeros = np.zeros_like(d1)
    if dt == 0:
        return zeros, zeros
    if shifted:
        diffs = np.stack([p.doppler_hz - pred.doppler_hz for p in shifted] + [zeros])
        taus = np.sort(np.array([p.times.unix_s[0] - pred.times.unix_s[0] for p in shifted] + [0.0]))
        spacing = float(np.max(np.diff(taus))) if taus.size > 1 else dt
        # Between two samples h apart a function exceeds its chord by at most |D''| h^2 / 8.
        d2max = np.max(np.abs(np.stack([doppler_second_derivative(p) for p in shifted])), axis=0)
        between = 1.5 * d2max * spacing**2 / 8.0 + 1e-4
        return diffs.min(axis=0) - between, diffs.max(axis=0) + between
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
    extra = [np.where(np.abs(r) <= dt, d1 * r + d2 * r**2 / 2 + d3 * r**3 / 6, 0.0) for r in roots]
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
                    shifted: list[Prediction] | None = None) -> DopplerWindows:
    """Nominal apparent Doppler and the window that holds every admissible truth.

    ``shifted``: predictions of the same grid moved by offsets covering +-time_s (see
    :func:`time_shifts_s`); required when ``unc.time_s`` exceeds ``TAYLOR_LIMIT_S``.
    """
    if unc.time_s > TAYLOR_LIMIT_S and not shifted:
        raise ValueError("time uncertainty above TAYLOR_LIMIT_S needs shifted predictions")
    f_c = pred.carrier_hz[:, None]
    lam = pred.wavelength_m[:, None]
    d = pred.doppler_hz
    nominal = apparent_doppler_hz(d, f_c, unc.oscillator_offset_ppb)
    t = pred.times.unix_s
    dt = unc.time_s
    r_h, r_v = unc.horizontal_m, unc.vertical_m

    # Position: linear term with the gradient's largest value over the time interval.
    gh, gu = position_gradient_hz_per_m(pred)
    if shifted:
        gs = [position_gradient_hz_per_m(p) for p in shifted]
        gh = np.max(np.stack([gh] + [g[0] for g in gs]), axis=0)
        gu = np.max(np.stack([gu] + [g[1] for g in gs]), axis=0)
    elif dt > 0 and t.size >= 2:
        gh = gh + np.abs(np.gradient(gh, t, axis=1)) * dt * 1.5
        gu = gu + np.abs(np.gradient(gu, t, axis=1)) * dt * 1.5
    speed = np.linalg.norm(pred.sat_vel_ecef_m_s, axis=-1)
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


def windows_after_first_acquisition(w: DopplerWindows, carrier_hz: np.ndarray, first_sat: int,
                                    first_time_index: int, bin_half_width_hz: float
                                    ) -> DopplerWindows:
    """Windows once one satellite is acquired and the oscillator is therefore measured.

    The acquisition fixes that satellite's apparent Doppler to within half a bin; its
    predicted true Doppler is uncertain by its own non-oscillator terms U1. The
    oscillator is then known to within (half bin + U1) / f_c1 (fraction), which replaces
    the oscillator term of every satellite j by f_cj (half bin + U1) / f_c1. The window
    is centred on the nominal (the receiver's corrected oscillator estimate is unknown at
    planning time, only its accuracy is).
    """
    lo1, hi1 = w.non_oscillator_extent_hz()
    u1 = max(-lo1[first_sat, first_time_index], hi1[first_sat, first_time_index])
    frac = (bin_half_width_hz + u1) / float(carrier_hz[first_sat])
    osc = np.asarray(carrier_hz, dtype=float)[:, None] * frac * np.ones_like(w.nominal_hz)
    lows = dict(w.terms_low_hz)
    highs = dict(w.terms_high_hz)
    lows["oscillator"] = -osc
    highs["oscillator"] = osc
    low = w.nominal_hz + sum(lows.values())
    high = w.nominal_hz + sum(highs.values())
    return DopplerWindows(w.nominal_hz, low, high, lows, highs)


def shifted_predictions(orbits, site, times, time_uncertainty_s: float, signals=None
                        ) -> list[Prediction] | None:
    """Predictions on the grid moved by :func:`time_shifts_s`, when the time uncertainty
    is too large for the expansion; None otherwise."""
    from .predict import predict

    if time_uncertainty_s <= TAYLOR_LIMIT_S:
        return None
    base = times.unix_s
    return [predict(orbits, site, base + tau, signals) for tau in time_shifts_s(time_uncertainty_s)
            if tau != 0.0]

"""Frequency bins of a coherent correlator: loss versus carrier offset, bin design, tiling.

Model [trade; standard result]: integrating the correlator output coherently over ``Tc``
seconds with a residual carrier offset ``df`` scales the correlation amplitude by
``|sinc(df * Tc)|`` with the normalized sinc ``sin(pi x) / (pi x)`` (``numpy.sinc``).
Every loss here is a POSITIVE number of dB: ``loss_db = -20 log10 |sinc(df Tc)|``
(0.91 dB at 250 Hz and 1 ms). The loss depends on ``df`` only through ``u = df * Tc``,
so every offset found here scales exactly as ``1 / Tc``.

Coherent intervals and data symbols: a sign change of the data bit (or secondary-code
chip) inside the coherent interval cancels part of the correlation;
:func:`check_coherent_time` reports the expected loss (derivation in its docstring).

All functions broadcast over numpy arrays, e.g. windows shaped ``(n_sat, n_time)``.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field

import numpy as np
from numpy.typing import ArrayLike

from ..ground.errors import InputError
from ..ground.signals import Signal
from .tails import sine_integral

# Relative tolerance used when a ratio "is" a whole number (window / bin width,
# coherent time / code period): float round-off must not add a bin or fail a check.
WHOLE_NUMBER_RTOL = 1e-9

# Bisection steps on u = df * Tc in (0, 1): 2**-64 is below double precision.
_BISECTION_STEPS = 64

# Loss levels whose offsets loss_curve() marks, dB.
LOSS_CURVE_MARKS_DB = (1.0, 2.0, 3.0)

# Default half-span of loss_curve(), in units of 1 / Tc: past the 3.92 dB straddle point
# (0.5 / Tc) and short of the first null (1 / Tc, infinite loss).
LOSS_CURVE_DEFAULT_SPAN = 0.75


def _out(x: np.ndarray) -> np.ndarray | float:
    """A 0-d result as a Python float, anything else as an array."""
    x = np.asarray(x)
    return float(x) if x.ndim == 0 else x


def _float_array(value: ArrayLike, name: str, *, positive: bool = False,
                 nonnegative: bool = False, allow_nan: bool = False) -> np.ndarray:
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise InputError(f"{name} must be a number or an array of numbers, got {value!r}",
                         field=name) from None
    if arr.size > 64:     # two reductions of a large array when it is finite throughout
        mn, mx = float(np.min(arr)), float(np.max(arr))
        if math.isfinite(mn) and math.isfinite(mx) and not (positive and mn <= 0) \
                and not (nonnegative and mn < 0):
            return arr
    if allow_nan:
        if np.any(np.isinf(arr)):
            raise InputError(f"{name} must be finite", field=name)
    elif not np.all(np.isfinite(arr)):
        raise InputError(f"{name} must be finite", field=name)
    # What is left is finite or NaN, and NaN compares False: no need to filter it out.
    if positive and np.any(arr <= 0):
        raise InputError(f"{name} must be > 0, got {arr[arr <= 0].flat[0]:g}", field=name)
    if nonnegative and np.any(arr < 0):
        raise InputError(f"{name} must be >= 0, got {arr[arr < 0].flat[0]:g}", field=name)
    return arr


# --------------------------------------------------------------------------- loss curve

def frequency_loss_db(offset_hz: ArrayLike, coherent_s: ArrayLike) -> np.ndarray | float:
    """Coherent-integration loss (positive dB) of a carrier offset, ``-20 log10|sinc(df Tc)|``.

    Broadcasts ``offset_hz`` against ``coherent_s``. At a null of the sinc (``df Tc`` a
    non-zero integer) the loss is huge (~300 dB from round-off) or ``inf``.
    """
    df = _float_array(offset_hz, "offset_hz", allow_nan=True)
    tc = _float_array(coherent_s, "coherent_s", positive=True)
    amp = np.abs(np.sinc(df * tc))
    with np.errstate(divide="ignore"):
        return _out(-20.0 * np.log10(amp))


def _u_for_loss(loss_db: np.ndarray) -> np.ndarray:
    """Solve -20 log10 sinc(u) = loss_db for u in (0, 1) by vectorized bisection.

    sinc is strictly decreasing from 1 to 0 on [0, 1], so the loss rises strictly from
    0 to infinity there: for every finite positive loss there is exactly one root, and
    bisection on the bracket [0, 1] cannot miss it.
    """
    target_amp = 10.0 ** (-loss_db / 20.0)
    lo = np.zeros_like(target_amp)
    hi = np.ones_like(target_amp)
    for _ in range(_BISECTION_STEPS):
        mid = 0.5 * (lo + hi)
        above = np.sinc(mid) > target_amp        # loss at mid still below the target
        lo = np.where(above, mid, lo)
        hi = np.where(above, hi, mid)
    return 0.5 * (lo + hi)


def half_width_for_loss_hz(coherent_s: ArrayLike, max_loss_db: ArrayLike) -> np.ndarray | float:
    """Carrier offset (Hz, > 0) at which the coherent loss reaches ``max_loss_db``.

    Exact root of ``-20 log10 sinc(df Tc) = max_loss_db`` on the main lobe
    (``0 < df < 1/Tc``), found on ``u = df Tc`` and divided by ``Tc``, so it scales
    exactly as ``1 / Tc``. Any finite positive loss has one root on the main lobe (the
    loss grows without bound towards the first null). Examples [calc, numpy.sinc]:
    1 dB -> 261.5 Hz at 1 ms; 3.92 dB (20 log10(pi/2)) -> exactly 1 / (2 Tc).
    """
    tc = _float_array(coherent_s, "coherent_s", positive=True)
    loss = _float_array(max_loss_db, "max_loss_db", positive=True)
    tc, loss = np.broadcast_arrays(tc, loss)
    return _out(_u_for_loss(loss) / tc)


def _mean_power_over_half_width(u_half: np.ndarray) -> np.ndarray:
    """Mean of sinc^2(u) for u uniform in [-a, a] (a > 0), closed form.

    With t = pi u: integral_0^a sinc^2 du = (1/pi) [Si(2 pi a) - sin^2(pi a) / (pi a)]
    (integration by parts of sin^2 t / t^2), divided by a.
    """
    a = np.asarray(u_half, dtype=float)
    si = sine_integral(2.0 * np.pi * a)
    return (si - np.sin(np.pi * a) ** 2 / (np.pi * a)) / (np.pi * a)


def average_frequency_loss_db(half_width_hz: ArrayLike, coherent_s: ArrayLike) -> np.ndarray | float:
    """Loss of the MEAN POWER over an offset uniform in ``[-half_width, +half_width]``.

    ``-10 log10( mean(sinc^2(df Tc)) )``, positive dB, from the closed form of the
    sinc^2 integral (sine integral). This is the expected loss of SNR for a signal whose
    Doppler falls anywhere in the bin with equal probability.
    """
    hw = _float_array(half_width_hz, "half_width_hz", positive=True)
    tc = _float_array(coherent_s, "coherent_s", positive=True)
    return _out(-10.0 * np.log10(_mean_power_over_half_width(hw * tc)))


@dataclass(frozen=True)
class BinDesign:
    """Frequency-bin design for one coherent time and one allowed worst-case loss.

    ``worst_loss_db`` is the loss at the bin edge (half a bin from the centre);
    ``average_loss_db`` is the loss of the mean POWER, ``-10 log10 mean(sinc^2)``, over
    an offset uniform within the bin; ``average_amplitude_loss_db`` is
    ``-20 log10 mean(|sinc|)`` over the same offsets, for comparison. All positive dB.
    """

    coherent_ms: float
    max_loss_db: float
    bin_width_hz: float
    half_width_hz: float
    worst_loss_db: float
    average_loss_db: float
    average_amplitude_loss_db: float

    def to_dict(self) -> dict[str, float]:
        return asdict(self)


def _mean_amplitude_over_half_width(u_half: float, n: int = 64) -> float:
    """Mean of sinc(u) on [0, a], a < 1 (sinc > 0 there): Gauss-Legendre, n nodes."""
    x, w = np.polynomial.legendre.leggauss(n)
    u = 0.5 * u_half * (x + 1.0)
    return float(0.5 * np.sum(w * np.sinc(u)))


def design_bins(coherent_s: float, max_loss_db: float) -> BinDesign:
    """Widest frequency bin whose worst offset (half a bin) loses at most ``max_loss_db``.

    ``bin_width = 2 * half_width_for_loss_hz(coherent_s, max_loss_db)``. Example
    [calc, numpy.sinc]: 1 ms, 1 dB -> 523.0 Hz bins. A bin of exactly ``1 / Tc`` has a
    worst-case straddle loss of ``20 log10(pi / 2) = 3.92 dB`` [pub: Richards,
    Fundamentals of Radar Signal Processing, eq. 5.84].
    """
    tc = float(_float_array(coherent_s, "coherent_s", positive=True))
    loss = float(_float_array(max_loss_db, "max_loss_db", positive=True))
    hw = float(half_width_for_loss_hz(tc, loss))
    u = hw * tc
    return BinDesign(
        coherent_ms=tc * 1e3,
        max_loss_db=loss,
        bin_width_hz=2.0 * hw,
        half_width_hz=hw,
        worst_loss_db=float(frequency_loss_db(hw, tc)),
        average_loss_db=float(-10.0 * np.log10(_mean_power_over_half_width(u))),
        average_amplitude_loss_db=-20.0 * math.log10(_mean_amplitude_over_half_width(u)),
    )


# --------------------------------------------------------------------------- tiling

def _check_window(low: np.ndarray, high: np.ndarray) -> None:
    # Edges are finite or NaN (checked before); a NaN edge compares False.
    if np.any(high < low):
        raise InputError("the window's high_hz is below its low_hz", field="high_hz")


def bin_count(low_hz: ArrayLike, high_hz: ArrayLike, bin_width_hz: ArrayLike) -> np.ndarray | int:
    """Number of bins of ``bin_width_hz`` that tile ``[low_hz, high_hz]``: ``max(1, ceil(span/width))``.

    Broadcasts (e.g. Doppler windows shaped ``(n_sat, n_time)``). A ratio within
    ``WHOLE_NUMBER_RTOL`` of a whole number counts as that number (8000 Hz / 500 Hz is
    16 bins, not 17 from round-off). A window with a NaN edge (satellite not visible)
    has 0 bins.
    """
    low = _float_array(low_hz, "low_hz", allow_nan=True)
    high = _float_array(high_hz, "high_hz", allow_nan=True)
    width = _float_array(bin_width_hz, "bin_width_hz", positive=True)
    low, high, width = np.broadcast_arrays(low, high, width)
    _check_window(low, high)
    # The ratio is NaN exactly where an edge is NaN (the edges hold no infinity and the
    # width is finite and > 0); worked in place on one array.
    ratio = np.asarray(high - low, dtype=float)
    ratio /= width
    ratio *= 1.0 - WHOLE_NUMBER_RTOL
    np.ceil(ratio, out=ratio)
    np.maximum(ratio, 1.0, out=ratio)
    if ratio.size and math.isnan(float(np.min(ratio))):      # NaN min: some edge is NaN
        np.copyto(ratio, 0.0, where=np.isnan(ratio))
    n = ratio.astype(np.int64)
    return int(n) if n.ndim == 0 else n


def bin_centres(low_hz: float, high_hz: float, bin_width_hz: float) -> np.ndarray:
    """Centres (Hz, ascending) of the bins tiling one window, symmetric about its centre.

    ``n = bin_count(...)`` bins, centres ``mid + (k - (n - 1) / 2) * width``; the first
    bin's lower edge is at or below ``low_hz`` and the last bin's upper edge at or above
    ``high_hz`` (the excess ``n * width - span`` is split equally at both ends).
    """
    try:    # plain numbers: checked and counted as bin_count does, without arrays
        low, high, width = float(low_hz), float(high_hz), float(bin_width_hz)
        plain = math.isfinite(low) and math.isfinite(high) and math.isfinite(width) \
            and width > 0 and high >= low
    except (TypeError, ValueError):
        plain = False
    if plain:
        n = max(math.ceil((high - low) / width * (1.0 - WHOLE_NUMBER_RTOL)), 1)
    else:
        low = float(_float_array(low_hz, "low_hz"))
        high = float(_float_array(high_hz, "high_hz"))
        width = float(_float_array(bin_width_hz, "bin_width_hz", positive=True))
        n = int(bin_count(low, high, width))
    if n > MAX_LISTED_BINS:
        raise InputError(f"{n} bins of {width:g} Hz: more than the {MAX_LISTED_BINS} that are "
                         "listed one by one; narrow the span", field="span_hz")
    mid = 0.5 * (low + high)
    return mid + (np.arange(n) - 0.5 * (n - 1)) * width


# Longest list of bin centres produced for one window (a +-50 kHz span at 1 Hz bins).
MAX_LISTED_BINS = 100_000


@dataclass(frozen=True)
class BinTiling:
    """The bins that tile one frequency window, centred on it."""

    low_hz: float
    high_hz: float
    bin_width_hz: float
    centres_hz: np.ndarray = field(repr=False)

    @property
    def n_bins(self) -> int:
        return int(self.centres_hz.size)

    @property
    def lower_edge_hz(self) -> float:
        return float(self.centres_hz[0] - 0.5 * self.bin_width_hz)

    @property
    def upper_edge_hz(self) -> float:
        return float(self.centres_hz[-1] + 0.5 * self.bin_width_hz)

    def to_dict(self) -> dict[str, object]:
        return {"low_hz": self.low_hz, "high_hz": self.high_hz,
                "bin_width_hz": self.bin_width_hz, "n_bins": self.n_bins,
                "lower_edge_hz": self.lower_edge_hz, "upper_edge_hz": self.upper_edge_hz,
                "centres_hz": self.centres_hz.tolist()}


def tile_bins(low_hz: float, high_hz: float, bin_width_hz: float) -> BinTiling:
    """Bins of ``bin_width_hz`` covering ``[low_hz, high_hz]`` without a gap (see bin_centres)."""
    centres = bin_centres(low_hz, high_hz, bin_width_hz)
    return BinTiling(float(low_hz), float(high_hz), float(bin_width_hz), centres)


def loss_curve(coherent_s: float, max_offset_hz: float | None = None,
               n: int = 401) -> dict[str, object]:
    """Loss versus carrier offset for plotting, with the exact 1, 2 and 3 dB points.

    Returns ``{"coherent_s", "offset_hz" (n values from -max to +max), "loss_db",
    "marks": {1.0: offset_hz, 2.0: ..., 3.0: ...}}``. The default span is
    ``0.75 / Tc`` (beyond the 3.92 dB straddle point at ``0.5 / Tc``); a span reaching
    a sinc null gives a huge loss (or ``inf``) there.
    """
    tc = float(_float_array(coherent_s, "coherent_s", positive=True))
    if max_offset_hz is None:
        span = LOSS_CURVE_DEFAULT_SPAN / tc
    else:
        span = float(_float_array(max_offset_hz, "max_offset_hz", positive=True))
    if isinstance(n, bool) or not isinstance(n, int | np.integer) or n < 2:
        raise InputError(f"n must be an integer >= 2, got {n!r}", field="n")
    offsets = np.linspace(-span, span, int(n))
    marks = {level: float(half_width_for_loss_hz(tc, level)) for level in LOSS_CURVE_MARKS_DB}
    return {"coherent_s": tc, "offset_hz": offsets,
            "loss_db": np.asarray(frequency_loss_db(offsets, tc)), "marks": marks}


# --------------------------------------------------------------------------- coherent time

@dataclass(frozen=True)
class CoherentCheck:
    """Verdict on a coherent integration time for one signal.

    ``errors`` make the time unusable (the caller raises); ``warnings`` do not.
    ``transition_loss_db`` is the expected symbol-transition loss (positive dB, mean
    power; see :func:`symbol_transition_loss_db`).
    """

    ok: bool
    errors: list[str]
    warnings: list[str]
    transition_loss_db: float

    def to_dict(self) -> dict[str, object]:
        return asdict(self)


def symbol_transition_loss_db(coherent_s: ArrayLike, symbol_period_s: ArrayLike,
                              symbol_timing_known: bool = False) -> np.ndarray | float:
    """Expected loss (positive dB) of the MEAN POWER from ±1 symbol changes in the interval.

    Model: independent, equiprobable ±1 symbols of length ``Ts`` (a sign change at each
    boundary with probability 1/2). The coherent sum over ``T`` is
    ``A = (1/T) sum_i d_i L_i`` with ``L_i`` the lengths of the symbol pieces inside the
    interval, so ``E[A^2] = sum_i L_i^2 / T^2`` (cross terms average to zero).

    * Symbol timing unknown (acquisition; interval start uniform relative to the symbol
      edges): ``E[A^2] = (1/T^2) integral integral P(s, t in the same symbol) ds dt`` with
      ``P = max(0, 1 - |s - t| / Ts)``. With ``r = T / Ts`` this gives
      ``1 - r/3`` for ``r <= 1`` and ``1/r - 1/(3 r^2)`` for ``r >= 1``
      (2/3, i.e. 1.76 dB, at ``T = Ts``; 0.07 dB for 1 ms of GPS L1 C/A).
    * Symbol timing known (e.g. fine time assistance; interval started on a symbol edge):
      0 dB for ``T <= Ts``; otherwise ``(m + f^2) / r^2`` with ``m = floor(r)``,
      ``f = r - m``.

    The loss of the mean amplitude would differ; mean power is what the detector's
    expected SNR sees.
    """
    t = _float_array(coherent_s, "coherent_s", positive=True)
    ts = _float_array(symbol_period_s, "symbol_period_s", positive=True)
    r = t / ts
    if symbol_timing_known:
        m = np.floor(r * (1.0 + WHOLE_NUMBER_RTOL))
        f = np.clip(r - m, 0.0, None)
        power = np.where(r <= 1.0 + WHOLE_NUMBER_RTOL, 1.0, (m + f * f) / (r * r))
    else:
        power = np.where(r <= 1.0, 1.0 - r / 3.0, 1.0 / r - 1.0 / (3.0 * r * r))
    return _out(-10.0 * np.log10(power))


def aligned_transition_loss_db(coherent_s: float, symbol_period_s: float,
                               code_period_s: float) -> float:
    """Expected power loss (dB) from symbol sign changes when the coherent interval is
    aligned to the received code epochs, as in a serial (correlator) search at the signal
    cell, where the local code epoch coincides with the received one.

    Data-bit and secondary-code edges fall on code epochs, so the interval of n code
    periods starts at one of the L = symbol / code period epochs within a symbol, each
    equally likely. With independent +-1 symbols, segments of lengths l_i give an
    expected power fraction sum(l_i^2) / n^2 [calc]. A symbol of one code period (BeiDou
    B1I's NH20 chips, Galileo E1-C's secondary-code chips) puts every edge on the
    interval's ends: 0 dB whatever Tc.
    """
    n = int(round(coherent_s / code_period_s))
    big_l = max(int(round(symbol_period_s / code_period_s)), 1)
    if n < 1:
        raise InputError(f"coherent time {coherent_s} s is below one code period", field="coherent_s")
    fractions = []
    for start in range(big_l):
        lengths, run = [], 0
        for j in range(n):
            if j > 0 and (start + j) % big_l == 0:
                lengths.append(run)
                run = 0
            run += 1
        lengths.append(run)
        fractions.append(sum(x * x for x in lengths) / (n * n))
    return float(-10.0 * math.log10(sum(fractions) / len(fractions)))


def max_coherent_without_transition_s(signal: Signal) -> float:
    """Longest whole number of code periods not longer than one data symbol / secondary chip."""
    n = math.floor(signal.symbol_period_s / signal.code_period_s * (1.0 + WHOLE_NUMBER_RTOL))
    return max(n, 1) * signal.code_period_s


def check_coherent_time(signal: Signal, coherent_s: float,
                        symbol_timing_known: bool = False) -> CoherentCheck:
    """Check a coherent integration time against the signal's code and symbol periods.

    Errors: not a positive number; shorter than one code period; not a whole number of
    code periods (4 ms steps for Galileo E1, 10 ms for BeiDou B1C). Warning: longer than
    the data-symbol / secondary-code period ``signal.symbol_period_s`` (sign changes
    possible inside the interval). ``transition_loss_db`` is always the expected loss of
    :func:`symbol_transition_loss_db` (also non-zero below the symbol period when the
    symbol timing is unknown: an edge can fall inside any interval).
    """
    errors: list[str] = []
    warnings: list[str] = []
    try:
        tc = float(coherent_s)
    except (TypeError, ValueError):
        tc = float("nan")
    if not math.isfinite(tc) or tc <= 0:
        errors.append(f"coherent time must be a positive number of seconds, got {coherent_s!r}")
        return CoherentCheck(False, errors, warnings, float("nan"))
    period = signal.code_period_s
    ms = tc * 1e3
    ratio = tc / period
    if ratio < 1.0 - WHOLE_NUMBER_RTOL:
        errors.append(f"coherent time {ms:g} ms is shorter than the {signal.signal_id} code "
                      f"period {period * 1e3:g} ms")
    elif abs(ratio - round(ratio)) > WHOLE_NUMBER_RTOL * ratio:
        errors.append(f"coherent time {ms:g} ms is not a whole number of {signal.signal_id} "
                      f"code periods ({period * 1e3:g} ms)")
    loss = float(symbol_transition_loss_db(tc, signal.symbol_period_s, symbol_timing_known))
    limit = max_coherent_without_transition_s(signal)
    if tc > limit * (1.0 + WHOLE_NUMBER_RTOL):
        warnings.append(
            f"coherent time {ms:g} ms exceeds the {signal.signal_id} symbol period "
            f"{signal.symbol_period_s * 1e3:g} ms ({signal.symbol_note}); expected "
            f"symbol-transition loss {loss:.2f} dB unless the symbols are wiped off")
    return CoherentCheck(not errors, errors, warnings, loss)

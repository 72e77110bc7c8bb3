"""Square-law non-coherent detection and the mean time of a serial search.

Detector model [pub: Richards, Fundamentals of Radar Signal Processing, sec. 6.3;
Kaplan & Hegarty, Understanding GPS, 2nd ed., eqs. 5.52-5.53]: each coherent interval
of ``Tc`` seconds gives a complex correlator output ``z = sqrt(snr) e^{j phi} + n`` with
complex Gaussian noise of ``E|n|^2 = 1``; the statistic is ``S = sum_{k=1..N} |z_k|^2``.

* H0 (no signal in the cell): ``2 S ~ chi2(2N)``.
* H1 (signal in the cell): ``2 S ~ ncx2(2N, nc = 2 N snr)``.
* ``snr`` (linear, per coherent interval) ``= 10^(cn0_dbhz/10) * Tc * 10^(-losses_db/10)``,
  so at ``Tc = 1 ms`` ``C/N0 [dB-Hz] = SNR [dB] + 30``.

Thresholds here are on ``S`` itself (in units of the noise power), not on ``2 S``.
Losses are positive dB. All functions broadcast over numpy arrays, e.g. C/N0 shaped
``(n_sat, n_time)``.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

import numpy as np
from numpy.typing import ArrayLike

from ..ground.errors import InputError
from . import tails

# Bracket (dB) and steps of the vectorized bisection for the required SNR. The bracket
# covers N up to ~1e5 (about -25 dB) and Pfa down to 1e-15 at Pd 0.9999 (about 22 dB).
_SNR_BRACKET_DB = (-60.0, 60.0)
_SNR_BISECTION_STEPS = 60


def _out(x: np.ndarray) -> np.ndarray | float:
    x = np.asarray(x)
    return float(x) if x.ndim == 0 else x


def _float_array(value: ArrayLike, name: str, *, lo: float | None = None,
                 hi: float | None = None, lo_open: bool = False,
                 hi_open: bool = False) -> np.ndarray:
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise InputError(f"{name} must be a number or an array of numbers, got {value!r}",
                         field=name) from None
    if arr.size > 64 and _within(float(np.min(arr)), float(np.max(arr)), lo, hi, lo_open, hi_open):
        return arr            # two reductions of a large array instead of the checks below
    if not np.all(np.isfinite(arr)):
        raise InputError(f"{name} must be finite", field=name)
    if lo is not None:
        bad = arr <= lo if lo_open else arr < lo
        if np.any(bad):
            op = ">" if lo_open else ">="
            raise InputError(f"{name} must be {op} {lo:g}, got {arr[bad].flat[0]:g}", field=name)
    if hi is not None:
        bad = arr >= hi if hi_open else arr > hi
        if np.any(bad):
            op = "<" if hi_open else "<="
            raise InputError(f"{name} must be {op} {hi:g}, got {arr[bad].flat[0]:g}", field=name)
    return arr


def _within(mn: float, mx: float, lo: float | None, hi: float | None, lo_open: bool,
            hi_open: bool) -> bool:
    """Every value between the smallest ``mn`` and the largest ``mx`` is finite and in
    range (a NaN anywhere makes both NaN, and NaN fails every comparison)."""
    if not (math.isfinite(mn) and math.isfinite(mx)):
        return False
    if lo is not None and not (mn > lo if lo_open else mn >= lo):
        return False
    return hi is None or (mx < hi if hi_open else mx <= hi)


def _probability(value: ArrayLike, name: str, *, zero_ok: bool = False,
                 one_ok: bool = False) -> np.ndarray:
    return _float_array(value, name, lo=0.0, hi=1.0, lo_open=not zero_ok, hi_open=not one_ok)


def _count(value: ArrayLike, name: str) -> np.ndarray:
    arr = _float_array(value, name, lo=1.0)
    if isinstance(value, np.ndarray) and value.dtype.kind in "iu":
        return arr                                   # whole numbers already
    if np.any(arr != np.round(arr)):
        raise InputError(f"{name} must be a whole number >= 1", field=name)
    return arr


# --------------------------------------------------------------------------- detector

def coherent_snr_linear(cn0_dbhz: ArrayLike, coherent_s: ArrayLike,
                        losses_db: ArrayLike = 0.0) -> np.ndarray | float:
    """Per-interval SNR (linear): ``10^(cn0/10) * Tc * 10^(-losses_db/10)``."""
    cn0 = _float_array(cn0_dbhz, "cn0_dbhz")
    tc = _float_array(coherent_s, "coherent_s", lo=0.0, lo_open=True)
    loss = _float_array(losses_db, "losses_db", lo=0.0)
    return _out(10.0 ** (cn0 / 10.0) * tc * 10.0 ** (-loss / 10.0))


def threshold_for_pfa(pfa: ArrayLike, n_noncoherent: ArrayLike) -> np.ndarray | float:
    """Threshold on ``S`` (noise-power units) giving false-alarm probability ``pfa`` per cell.

    ``chi2.isf(pfa, 2N) / 2``; for ``N = 1`` this is ``-ln(pfa)``.
    """
    p = _probability(pfa, "pfa")
    n = _count(n_noncoherent, "n_noncoherent")
    return _out(tails.upper_gamma_inv(n, p))


def false_alarm_probability(threshold: ArrayLike, n_noncoherent: ArrayLike) -> np.ndarray | float:
    """``P(S > threshold | noise only) = chi2.sf(2 threshold, 2N)``."""
    t = _float_array(threshold, "threshold", lo=0.0)
    n = _count(n_noncoherent, "n_noncoherent")
    return _out(tails.upper_gamma(n, t))


def _pd(snr: np.ndarray, n: np.ndarray, threshold: np.ndarray) -> np.ndarray:
    # ncx2.sf(2 threshold, 2N, 2 N snr) in numpy (core.search.tails; scipy.special, whose
    # import costs a plan's start-up about 0.25 s, is the reference of its tests).
    return tails.noncentral_tail(n, threshold, n * snr)


def detection_probability(snr_linear: ArrayLike, n_noncoherent: ArrayLike,
                          threshold: ArrayLike) -> np.ndarray | float:
    """``P(S > threshold | signal) = ncx2.sf(2 threshold, 2N, 2 N snr)`` (Marcum Q form)."""
    snr = _float_array(snr_linear, "snr_linear", lo=0.0)
    n = _count(n_noncoherent, "n_noncoherent")
    t = _float_array(threshold, "threshold", lo=0.0)
    return _out(_pd(snr, n, t))


def detection_probability_at_cn0(cn0_dbhz: ArrayLike, coherent_s: ArrayLike,
                                 n_noncoherent: ArrayLike, pfa: ArrayLike,
                                 losses_db: ArrayLike = 0.0) -> np.ndarray | float:
    """Pd per cell for a C/N0 (dB-Hz), coherent time, N, per-cell Pfa and losses (dB)."""
    snr = np.asarray(coherent_snr_linear(cn0_dbhz, coherent_s, losses_db))
    thr = np.asarray(threshold_for_pfa(pfa, n_noncoherent))
    n = _count(n_noncoherent, "n_noncoherent")
    return _out(_pd(snr, n, thr))


def required_snr_db(pfa: ArrayLike, pd: ArrayLike, n_noncoherent: ArrayLike) -> np.ndarray | float:
    """Single-interval SNR (dB) at which the detector reaches ``pd`` with per-cell ``pfa``.

    Vectorized bisection in dB on the strictly increasing ``Pd(snr)``; accurate to
    ~1e-12 dB. Requires ``0 < pfa < pd < 1``. Checks [pub: Richards, Fig. 6.11]:
    Pfa 1e-8, Pd 0.9: 14.2 dB (N = 1), 6.1 dB (N = 10).
    """
    p_fa = _probability(pfa, "pfa")
    p_d = _probability(pd, "pd")
    n = _count(n_noncoherent, "n_noncoherent")
    p_fa, p_d, n = np.broadcast_arrays(p_fa, p_d, n)
    if np.any(p_d <= p_fa):
        raise InputError("pd must be greater than pfa (with no signal Pd equals Pfa)", field="pd")
    thr = tails.upper_gamma_inv(n, p_fa)   # chi2.isf(pfa, 2N) / 2
    lo = np.full(p_d.shape, _SNR_BRACKET_DB[0])
    hi = np.full(p_d.shape, _SNR_BRACKET_DB[1])
    top = _pd(10.0 ** (hi / 10.0), n, thr)
    if np.any(top < p_d):
        raise InputError("pd is out of reach within 60 dB of SNR", field="pd")
    if p_d.size == 1:
        # one value: Brent's method on the same bracket (a dozen or so evaluations
        # instead of 60), to the same accuracy
        n1, t1, target = n.ravel()[:1], thr.ravel()[:1], float(p_d.ravel()[0])

        def short_of(x: float) -> float:
            return float(_pd(np.array([10.0 ** (x / 10.0)]), n1, t1)[0]) - target

        a = _SNR_BRACKET_DB[0]
        root = _brent_root(short_of, a, _SNR_BRACKET_DB[1], short_of(a),
                           float(np.ravel(top)[0]) - target, 1e-12)
        return _out(np.full(p_d.shape, root))
    for _ in range(_SNR_BISECTION_STEPS):
        mid = 0.5 * (lo + hi)
        short = _pd(10.0 ** (mid / 10.0), n, thr) < p_d
        lo = np.where(short, mid, lo)
        hi = np.where(short, hi, mid)
    return _out(0.5 * (lo + hi))


def sensitivity_dbhz(pfa: ArrayLike, pd: ArrayLike, n_noncoherent: ArrayLike,
                     coherent_s: ArrayLike, losses_db: ArrayLike = 0.0) -> np.ndarray | float:
    """C/N0 (dB-Hz) needed for ``pd`` at per-cell ``pfa``: ``SNR_req + losses - 10 log10 Tc``."""
    tc = _float_array(coherent_s, "coherent_s", lo=0.0, lo_open=True)
    loss = _float_array(losses_db, "losses_db", lo=0.0)
    return _out(np.asarray(required_snr_db(pfa, pd, n_noncoherent)) + loss
                - 10.0 * np.log10(tc))


# --------------------------------------------------------------------------- offsets within a cell

# Gauss-Legendre nodes per axis for the mean over a signal's offset within its cell. The
# power gains sinc^2(f Tc) and R(x)^2 are smooth on the half-bin and the half-step (no
# breakpoint of R inside the main peak for an allowed step), and so is Pd of the gain:
# 12 nodes give the mean to < 1e-7 (test_detection: against 400 nodes).
OFFSET_NODES = 12


@dataclass(frozen=True)
class CellOffsets:
    """Where a real signal falls inside its search cell, as quadrature nodes.

    The carrier offset is uniform within the bin (``+-bin_width/2``) and the code offset
    uniform within the step (``+-step/2``), independent; by symmetry only ``[0, half]``
    is sampled. ``loss_db`` (K,) is the power loss at each node pair (positive dB:
    ``-20 log10 |sinc(f Tc)| - 20 log10 |R(x)|``), ``weight`` (K,) sums to 1.
    """

    coherent_s: float
    bin_width_hz: float
    step_chips: float
    shape: str
    loss_db: np.ndarray
    weight: np.ndarray

    @property
    def key(self) -> tuple:
        return (self.coherent_s, self.bin_width_hz, self.step_chips, self.shape)

    @property
    def mean_power_loss_db(self) -> float:
        """Loss of the mean power (the "average" losses of core.search.bins/codephase)."""
        return float(-10.0 * np.log10(np.sum(self.weight * 10.0 ** (-self.loss_db / 10.0))))


def cell_offsets(coherent_s: float, bin_width_hz: float, step_chips: float,
                 shape: str = "BPSK", nodes: int = OFFSET_NODES) -> CellOffsets:
    """Quadrature of a uniform offset within one frequency bin and one code step.

    ``bin_width_hz = 0`` (or ``step_chips = 0``) means no offset on that axis.
    """
    from .bins import frequency_loss_db
    from .codephase import correlation_amplitude

    tc = float(_float_array(coherent_s, "coherent_s", lo=0.0, lo_open=True))
    bw = float(_float_array(bin_width_hz, "bin_width_hz", lo=0.0))
    step = float(_float_array(step_chips, "step_chips", lo=0.0))
    x, w = np.polynomial.legendre.leggauss(int(nodes))
    u, wu = 0.5 * (x + 1.0), 0.5 * w                   # on [0, 1], weights sum to 1
    loss_f = np.asarray(frequency_loss_db(u * 0.5 * bw, tc), dtype=float)
    amp = np.abs(np.asarray(correlation_amplitude(u * 0.5 * step, shape), dtype=float))
    with np.errstate(divide="ignore"):
        loss_c = -20.0 * np.log10(amp)
    loss = (loss_f[:, None] + loss_c[None, :]).ravel()
    weight = (wu[:, None] * wu[None, :]).ravel()
    return CellOffsets(tc, bw, step, str(shape).strip().upper(), loss, weight)


def expected_detection_probability(snr_linear: ArrayLike, n_noncoherent: ArrayLike,
                                   threshold: ArrayLike, offsets: CellOffsets) -> np.ndarray | float:
    """Pd averaged over the signal's offset within its cell.

    ``snr_linear`` is the per-interval SNR at the cell centre (no frequency or code-step
    loss); the result is ``sum_k w_k Pd(snr 10^(-loss_k/10))``. Never above the Pd at the
    mean SNR once Pd is past its inflection (Jensen): e.g. 4 ms, N = 5, Pfa 1e-4, 1 dB
    bins, 1/2-chip BPSK steps, 31.5 dB-Hz: 0.835 against 0.871 at the mean loss.
    """
    snr = _float_array(snr_linear, "snr_linear", lo=0.0)
    n = _count(n_noncoherent, "n_noncoherent")
    t = _float_array(threshold, "threshold", lo=0.0)
    gain = 10.0 ** (-offsets.loss_db / 10.0)
    pd = _pd(snr[..., None] * gain, n[..., None], t[..., None])
    return _out(pd @ offsets.weight)


def expected_detection_probability_at_cn0(cn0_dbhz: ArrayLike, coherent_s: float,
                                          n_noncoherent: ArrayLike, pfa: ArrayLike,
                                          offsets: CellOffsets,
                                          losses_db: ArrayLike = 0.0) -> np.ndarray | float:
    """Expected Pd for a C/N0 (dB-Hz); ``losses_db`` are the losses besides the offsets."""
    snr = np.asarray(coherent_snr_linear(cn0_dbhz, coherent_s, losses_db))
    thr = np.asarray(threshold_for_pfa(pfa, n_noncoherent))
    return expected_detection_probability(snr, n_noncoherent, thr, offsets)


def expected_sensitivity_dbhz(pfa: float, pd: float, n_noncoherent: int, offsets: CellOffsets,
                              losses_db: float = 0.0) -> float:
    """C/N0 (dB-Hz) at which the EXPECTED Pd over the cell offsets reaches ``pd``.

    The root lies between the sensitivity with no offset loss and that with the worst
    offset loss; the (increasing) expected Pd is solved there by Brent's method to
    1e-10 dB (about a dozen evaluations of the offsets' nodes). Should the bracket not
    hold a sign change (it always does for Pd increasing in C/N0), the bracket is
    scanned instead: 33 points a round, six rounds, below 1e-8 dB.
    """
    tc = offsets.coherent_s
    base = float(sensitivity_dbhz(pfa, pd, n_noncoherent, tc, losses_db))
    lo, hi = base, base + float(np.max(offsets.loss_db)) + 1e-9
    thr = float(threshold_for_pfa(pfa, n_noncoherent))

    def expected(cn0: np.ndarray) -> np.ndarray:
        snr = np.asarray(coherent_snr_linear(cn0, tc, losses_db))
        return np.asarray(expected_detection_probability(snr, np.full(cn0.shape, n_noncoherent),
                                                         np.full(cn0.shape, thr), offsets))

    f_lo, f_hi = (float(v) - pd for v in expected(np.array([lo, hi])))
    if f_lo <= 0.0 <= f_hi:
        return _brent_root(lambda c: float(expected(np.array([c]))[0]) - pd, lo, hi, f_lo, f_hi,
                           SENSITIVITY_TOLERANCE_DB)
    for _ in range(6):
        cn0 = np.linspace(lo, hi, 33)
        p = expected(cn0)
        k = int(np.clip(np.searchsorted(p, pd), 1, cn0.size - 1))
        lo, hi = float(cn0[k - 1]), float(cn0[k])
    return 0.5 * (lo + hi)


# Accuracy (dB) of expected_sensitivity_dbhz.
SENSITIVITY_TOLERANCE_DB = 1e-10


def _brent_root(f, a: float, b: float, fa: float, fb: float, xtol: float,
                max_steps: int = 200) -> float:
    """Root of ``f`` in [a, b] (fa, fb of opposite signs or zero) by Brent's method:
    inverse quadratic interpolation or secant steps, bisection whenever they would not
    shrink the bracket fast enough [pub: Brent, Algorithms for Minimization without
    Derivatives, 1973, ch. 4]. Within ``xtol`` of the root."""
    if fa == 0.0:
        return a
    if fb == 0.0:
        return b
    c, fc = b, fb
    d = e = b - a
    for _ in range(max_steps):
        if (fb > 0.0) == (fc > 0.0):
            c, fc = a, fa
            d = e = b - a
        if abs(fc) < abs(fb):
            a, b, c = b, c, b
            fa, fb, fc = fb, fc, fb
        tol = 2.0 * 2.2e-16 * abs(b) + 0.5 * xtol
        m = 0.5 * (c - b)
        if abs(m) <= tol or fb == 0.0:
            return b
        if abs(e) >= tol and abs(fa) > abs(fb):
            s = fb / fa
            if a == c:                                     # secant
                p, q = 2.0 * m * s, 1.0 - s
            else:                                          # inverse quadratic
                q, r = fa / fc, fb / fc
                p = s * (2.0 * m * q * (q - r) - (b - a) * (r - 1.0))
                q = (q - 1.0) * (r - 1.0) * (s - 1.0)
            if p > 0.0:
                q = -q
            p = abs(p)
            if 2.0 * p < min(3.0 * m * q - abs(tol * q), abs(e * q)):
                e, d = d, p / q
            else:
                d = e = m
        else:
            d = e = m
        a, fa = b, fb
        b += d if abs(d) > tol else math.copysign(tol, m)
        fb = f(b)
    return b


# --------------------------------------------------------------------------- elevation model

def cn0_at_elevation_dbhz(elevation_deg: ArrayLike, cn0_zenith_dbhz: float,
                          cn0_at_mask_dbhz: float, mask_deg: float,
                          below_mask_nan: bool = False) -> np.ndarray | float:
    """C/N0 (dB-Hz) at an elevation: linear in ``sin(elevation)`` from the mask to zenith.

    ``cn0 = cn0_mask + (cn0_zenith - cn0_mask) (sin el - sin mask) / (1 - sin mask)``,
    clipped to ``[mask, 90]`` deg (below the mask: the mask value, or NaN with
    ``below_mask_nan``). Why ``sin``: measured C/N0 of a hemispherical antenna changes
    little near zenith and falls fastest towards the horizon (antenna gain roll-off,
    longer slant path through the atmosphere, ~2 dB longer free-space path); a straight
    line in ``sin(el)`` has that shape (slope ``cos el``, zero at zenith) with only the two
    user-supplied end points. It is a planning shape [trade], not a link budget.
    """
    el = np.asarray(_float_array(elevation_deg, "elevation_deg", lo=-90.0, hi=90.0))
    z = float(_float_array(cn0_zenith_dbhz, "cn0_zenith_dbhz"))
    m = float(_float_array(cn0_at_mask_dbhz, "cn0_at_mask_dbhz"))
    mask = float(_float_array(mask_deg, "mask_deg", lo=-90.0, hi=90.0, hi_open=True))
    s_mask = math.sin(math.radians(mask))
    s = np.sin(np.radians(np.clip(el, mask, 90.0)))
    cn0 = m + (z - m) * (s - s_mask) / (1.0 - s_mask)
    if below_mask_nan:
        cn0 = np.where(el < mask, np.nan, cn0)
    return _out(cn0)


# --------------------------------------------------------------------------- serial search

def mean_search_time_s(q_cells: ArrayLike, dwell_s: ArrayLike, pd: ArrayLike, pfa: ArrayLike,
                       penalty_s: ArrayLike) -> np.ndarray | float:
    """Mean time (s) of a cyclic serial search over ``q`` positions, signal in one of them.

    ``T = [2 + (2 - Pd)(q - 1)(1 + K Pfa)] / (2 Pd) * td`` with ``K = penalty_s / dwell_s``
    [mem: Polydoros & Weber 1984; Holmes, Coherent Spread Spectrum Systems]. Model: the
    signal position is uniform among the ``q``; each position costs one dwell ``td``; a
    false alarm at a signal-free position costs ``penalty_s`` more and the search goes on;
    at the signal position the signal is found with probability ``Pd``, else the search
    wraps around. Limits: ``q = 1`` -> ``td / Pd``; ``Pd = 1, Pfa = 0`` -> ``(q + 1) td / 2``.
    """
    q = _count(q_cells, "q_cells")
    td = _float_array(dwell_s, "dwell_s", lo=0.0, lo_open=True)
    p_d = _probability(pd, "pd", one_ok=True)
    p_fa = _probability(pfa, "pfa", zero_ok=True, one_ok=True)
    pen = _float_array(penalty_s, "penalty_s", lo=0.0)
    k = pen / td
    return _out((2.0 + (2.0 - p_d) * (q - 1.0) * (1.0 + k * p_fa)) / (2.0 * p_d) * td)


@dataclass(frozen=True)
class SearchPositions:
    """How many serial positions a channel steps through, and what each one tests.

    ``positions`` (q) dwells cover ``total_cells = code_cells * freq_bins`` cells,
    ``cells_per_position`` (m) at a time; ``pfa_position = 1 - (1 - pfa_cell)^m`` is the
    chance that at least one of the m signal-free cells crosses the threshold (None when
    no ``pfa_cell`` was given). Fields are arrays when the inputs were.
    """

    positions: np.ndarray | int
    cells_per_position: np.ndarray | int
    total_cells: np.ndarray | int
    pfa_position: np.ndarray | float | None

    def to_dict(self) -> dict[str, object]:
        return {k: (v.tolist() if isinstance(v, np.ndarray) else v)
                for k, v in asdict(self).items()}


def _int_out(x: np.ndarray) -> np.ndarray | int:
    x = np.asarray(x)
    x = x.astype(np.int64, copy=x.dtype != np.int64)   # int64 arrays here are new ones
    return int(x) if x.ndim == 0 else x


def _spread(x: np.ndarray, shape: tuple) -> np.ndarray:
    """``x`` (a new array) to ``shape``: itself when it has it, else a broadcast copy."""
    return x if np.shape(x) == shape else np.array(np.broadcast_to(x, shape))


def _whole_ints(value: ArrayLike, name: str) -> np.ndarray | None:
    """An integer count (Python int or integer array) as int64, checked >= 1; None for
    anything else (floats go through :func:`_count`)."""
    if isinstance(value, bool | np.bool_):
        return None
    if isinstance(value, int | np.integer):
        try:
            arr = np.asarray(value, dtype=np.int64)
        except OverflowError:
            return None
    elif isinstance(value, np.ndarray) and value.dtype.kind in "iu":
        arr = value.astype(np.int64, copy=False)
    else:
        return None
    if arr.size and np.min(arr) < 1:
        raise InputError(f"{name} must be >= 1, got {arr[arr < 1].flat[0]:g}", field=name)
    return arr


def search_positions(code_cells: ArrayLike, freq_bins: ArrayLike,
                     correlators_per_channel: ArrayLike = 1,
                     parallel_code_search: bool = False,
                     pfa_cell: ArrayLike | None = None) -> SearchPositions:
    """Serial positions ``q`` and cells tested per dwell ``m`` for one channel.

    * Correlator bank (``parallel_code_search=False``): the channel's
      ``correlators_per_channel`` correlators test that many adjacent code cells of one
      frequency bin per dwell: ``m = min(correlators, code_cells)``,
      ``q = ceil(code_cells / m) * freq_bins``.
    * Parallel code search (e.g. FFT correlation over a whole code period): every code
      cell of one bin is tested per dwell: ``m = code_cells``, ``q = freq_bins``. Only the
      cells inside the code window count towards false alarms (the receiver can ignore
      the rest of the period).

    Testing m cells per dwell divides the number of dwells by m but multiplies the
    false-alarm chance of a dwell: ``pfa_position = 1 - (1 - pfa_cell)^m`` (about
    ``m pfa_cell`` when small), which then enters :func:`mean_search_time_s` as ``Pfa``
    with ``q`` positions. When ``m`` does not divide ``code_cells`` the last dwell tests
    fewer cells; using ``m`` for every dwell slightly overstates false alarms
    (conservative). The detection probability of the signal position is taken as the
    per-cell Pd (a noise cell beside the signal that crosses first is ignored).
    """
    whole = [_whole_ints(v, name) for v, name in ((code_cells, "code_cells"), (freq_bins, "freq_bins"),
                                                  (correlators_per_channel, "correlators_per_channel"))]
    if all(w is not None for w in whole):
        # Integer counts (the plan's cells and bins): the same numbers in integer
        # arithmetic, no float copies (ceil(c / m) of whole numbers is -(-c // m)).
        c0, b0, k0 = whole
        p = None if pfa_cell is None else _probability(pfa_cell, "pfa_cell", zero_ok=True)
        if not parallel_code_search and k0.ndim == 0 and (p is None or p.ndim == 0) \
                and (c0.size == 0 or int(k0) <= int(np.min(c0))):
            # m is the correlator count everywhere: one number to divide by and one Pfa
            shape = np.broadcast_shapes(c0.shape, b0.shape)
            k = int(k0)
            pfa_pos = None if p is None else \
                _out(np.full(shape, float(-np.expm1(float(k) * np.log1p(-p)))))
            return SearchPositions(_int_out(_spread(-(-c0 // k) * b0, shape)),
                                   _int_out(np.full(shape, k, dtype=np.int64)),
                                   _int_out(_spread(c0 * b0, shape)), pfa_pos)
        cells, bins, corr = np.broadcast_arrays(*whole)
        m = np.array(cells) if parallel_code_search else np.minimum(corr, cells)
        q = np.array(bins) if parallel_code_search else -(-cells // m) * bins
        pfa_pos = None if p is None else _out(_at_least_one(m, p))
        return SearchPositions(_int_out(q), _int_out(m), _int_out(cells * bins), pfa_pos)
    cells = _count(code_cells, "code_cells")
    bins = _count(freq_bins, "freq_bins")
    corr = _count(correlators_per_channel, "correlators_per_channel")
    cells, bins, corr = np.broadcast_arrays(cells, bins, corr)
    if parallel_code_search:
        m = cells
        q = bins
    else:
        m = np.minimum(corr, cells)
        q = np.ceil(cells / m) * bins
    pfa_pos = None
    if pfa_cell is not None:
        p = _probability(pfa_cell, "pfa_cell", zero_ok=True)
        pfa_pos = _out(_at_least_one(m, p))
    return SearchPositions(_int_out(q), _int_out(m), _int_out(cells * bins), pfa_pos)


def _at_least_one(m: np.ndarray, p: np.ndarray) -> np.ndarray:
    """``1 - (1 - p)^m`` as ``-expm1(m log1p(-p))`` (no cancellation for tiny p). With one
    p and a large array of whole m over a short range (cells per dwell take a few
    values), evaluated once per value and looked up: the same numbers."""
    if p.ndim == 0 and m.size > 4096:
        lo, hi = float(np.min(m)), float(np.max(m))
        if hi - lo < 65536:
            values = -np.expm1(np.arange(lo, hi + 1.0) * np.log1p(-p))
            idx = m.astype(np.intp)
            idx -= int(lo)
            return values[idx]
    return -np.expm1(m * np.log1p(-p))


@dataclass(frozen=True)
class SearchCost:
    """Expected serial search of one satellite by one channel (see :func:`search_cost`)."""

    positions: np.ndarray | int
    cells_per_position: np.ndarray | int
    dwell_s: np.ndarray | float
    pfa_position: np.ndarray | float
    pd: np.ndarray | float
    expected_search_s: np.ndarray | float

    def to_dict(self) -> dict[str, object]:
        return {k: (v.tolist() if isinstance(v, np.ndarray) else v)
                for k, v in asdict(self).items()}


def search_cost(freq_bins: ArrayLike, code_cells: ArrayLike, correlators_per_channel: ArrayLike,
                parallel_code_search: bool, coherent_s: ArrayLike, noncoherent: ArrayLike,
                pfa_cell: ArrayLike, pd: ArrayLike, penalty_s: ArrayLike) -> SearchCost:
    """Positions, dwell (``coherent_s * noncoherent``), per-dwell Pfa and mean search time.

    Combines :func:`search_positions` with :func:`mean_search_time_s`; ``pd`` is the
    per-cell detection probability (array over satellites/times allowed).
    """
    pos = search_positions(code_cells, freq_bins, correlators_per_channel,
                           parallel_code_search, pfa_cell)
    tc = _float_array(coherent_s, "coherent_s", lo=0.0, lo_open=True)
    nn = _count(noncoherent, "noncoherent")
    td = tc * nn
    t = mean_search_time_s(pos.positions, td, pd, pos.pfa_position, penalty_s)
    return SearchCost(pos.positions, pos.cells_per_position, _out(td), pos.pfa_position,
                      _out(np.asarray(pd, dtype=float)), t)


def serial_search_quantile_s(q_cells: ArrayLike, dwell_s: ArrayLike, pd: ArrayLike,
                             pfa: ArrayLike, penalty_s: ArrayLike,
                             quantile: float = 0.95) -> np.ndarray | float:
    """Time (s) by which the serial search of :func:`mean_search_time_s` has found the
    signal with probability ``quantile`` (a give-up time: past it, the signal is most
    likely not where the window says, or not there at all).

    Same model as :func:`simulate_serial_search`: signal position ``j`` uniform in
    ``0..q-1``, ``V`` visits geometric in ``Pd``, so the search passes
    ``j + (V - 1)(q - 1)`` signal-free positions plus ``V`` signal visits; each signal-free
    position costs ``dwell (1 + K Pfa)`` on average (``K = penalty / dwell``), which turns
    the false alarms into their mean cost. With ``P(V <= v) = 1 - (1 - Pd)^v`` the
    quantile falls in visit ``v = floor(log(1 - p) / log(1 - Pd)) + 1`` at the fraction
    ``f = (p - P(V <= v - 1)) / P(V = v)`` of that pass, ``j = ceil(f q) - 1``. Limits:
    ``Pd = 1, Pfa = 0`` -> ``ceil(p q)`` dwells. Exact for ``Pfa = 0``.
    """
    q = _count(q_cells, "q_cells").astype(float)
    td = _float_array(dwell_s, "dwell_s", lo=0.0, lo_open=True)
    p_d = _probability(pd, "pd", one_ok=True)
    p_fa = _probability(pfa, "pfa", zero_ok=True, one_ok=True)
    pen = _float_array(penalty_s, "penalty_s", lo=0.0)
    p = float(quantile)
    if not 0.0 < p < 1.0:
        raise InputError(f"quantile {quantile!r} must be between 0 and 1", field="quantile")
    q, td, p_d, p_fa, pen = np.broadcast_arrays(q, td, p_d, p_fa, pen)
    miss = 1.0 - p_d
    with np.errstate(divide="ignore", invalid="ignore"):
        v = np.where(miss > 0.0, np.floor(np.log1p(-p) / np.log(np.where(miss > 0.0, miss, 0.5))) + 1.0, 1.0)
    v = np.maximum(v, 1.0)
    before = 1.0 - miss ** (v - 1.0)                 # P(V <= v - 1)
    this = p_d * miss ** (v - 1.0)                   # P(V = v)
    frac = np.clip((p - before) / this, 0.0, 1.0)
    j = np.maximum(np.ceil(frac * q - 1e-9) - 1.0, 0.0)
    empty = j + (v - 1.0) * (q - 1.0)
    return _out(empty * td * (1.0 + (pen / td) * p_fa) + v * td)


def simulate_serial_search(q: ArrayLike, pd: ArrayLike, pfa: ArrayLike, dwell_s: ArrayLike,
                           penalty_s: ArrayLike, n_runs: int,
                           rng: np.random.Generator | int | None = None) -> np.ndarray:
    """Monte Carlo search times (s) of the serial search of :func:`mean_search_time_s`.

    Per run: the signal position ``j`` is uniform in ``0..q-1``; the search starts at
    position 0 and steps cyclically. Each visit of the signal position detects with
    probability ``pd``; the number of visits ``V`` is therefore geometric. The search
    passes ``j + (V - 1)(q - 1)`` signal-free positions, each a Bernoulli(``pfa``) false
    alarm costing ``penalty_s``: their count is binomial. Time =
    ``(j + (V - 1)(q - 1) + V) dwell_s + n_false_alarms * penalty_s``. Drawing ``V`` and
    the false-alarm count directly is exactly the cell-by-cell process, with no loop.
    Every parameter may be a scalar or an array of ``n_runs`` values (one per run).
    """
    if isinstance(n_runs, bool) or not isinstance(n_runs, int | np.integer) or n_runs < 1:
        raise InputError(f"n_runs must be an integer >= 1, got {n_runs!r}", field="n_runs")
    gen = rng if isinstance(rng, np.random.Generator) else np.random.default_rng(rng)
    shape = (int(n_runs),)
    try:
        qq = np.broadcast_to(_count(q, "q"), shape).astype(np.int64)
        p_d = np.broadcast_to(_probability(pd, "pd", one_ok=True), shape)
        p_fa = np.broadcast_to(_probability(pfa, "pfa", zero_ok=True, one_ok=True), shape)
        td = np.broadcast_to(_float_array(dwell_s, "dwell_s", lo=0.0, lo_open=True), shape)
        pen = np.broadcast_to(_float_array(penalty_s, "penalty_s", lo=0.0), shape)
    except ValueError as exc:
        if isinstance(exc, InputError):
            raise
        raise InputError(f"per-run parameters must be scalars or arrays of n_runs = {n_runs} "
                         f"values ({exc})", field="n_runs") from None
    j = gen.integers(0, qq)                      # signal position, uniform in 0..q-1
    visits = gen.geometric(p_d)                  # visits of the signal position, >= 1
    empty = j + (visits - 1) * (qq - 1)          # signal-free positions passed
    false_alarms = gen.binomial(empty, p_fa)
    return (empty + visits) * td + false_alarms * pen

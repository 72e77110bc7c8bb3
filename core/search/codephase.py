"""Code-phase search: step loss of the correlation peak, code windows and cells.

Correlation shapes (ideal, infinite bandwidth, normalized to 1 at zero offset):

* ``"BPSK"`` triangle: ``R(x) = 1 - |x|`` for ``|x| <= 1`` chip, 0 beyond [calc; standard
  result for a long random ±1 code].
* ``"BOC11"`` (sine-phased BOC(1,1)): ``R = 1 - 3|x|`` for ``|x| <= 1/2``,
  ``|x| - 1`` for ``1/2 <= |x| <= 1``, 0 beyond; the main peak crosses zero at 1/3 chip
  [mem: Betz, Engineering Satellite-Based Navigation and Timing, ch. on BOC
  autocorrelation]. Used here for Galileo E1 OS and BeiDou B1C as a BOC(1,1) replica
  sees them; their CBOC/QMBOC pilot components make the true peak a little narrower.

Losses are positive dB. Code windows are in chips; ranges in metres.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass

import numpy as np
from numpy.typing import ArrayLike

from ..ground.constants import SPEED_OF_LIGHT_M_S
from ..ground.errors import InputError
from ..ground.signals import Signal

# Breakpoints (|offset| in chips, R) of the piecewise-linear correlation shapes above.
CORRELATION_SHAPES: dict[str, tuple[tuple[float, ...], tuple[float, ...]]] = {
    "BPSK": ((0.0, 1.0), (1.0, 0.0)),
    "BOC11": ((0.0, 0.5, 1.0), (1.0, -0.5, 0.0)),
}

# Half-width (chips) of each shape's main peak: first zero of R.
MAIN_PEAK_HALF_WIDTH_CHIPS = {"BPSK": 1.0, "BOC11": 1.0 / 3.0}

# Signals acquired here with a BOC(1,1) replica [mem: E1 OS is CBOC(6,1,1/11) per the
# Galileo OS SIS ICD; B1C data is BOC(1,1), pilot QMBOC(6,1,4/33) per the BeiDou B1C ICD]
# (signal ids of core.signals). Every other catalogue signal is BPSK.
BOC11_SIGNALS = frozenset({"GAL-E1", "BDS-B1C"})

# Ratio within this relative tolerance of a whole number counts as that number.
WHOLE_NUMBER_RTOL = 1e-9


def _float_array(value: ArrayLike, name: str, *, nonnegative: bool = False,
                 positive: bool = False, allow_nan: bool = False,
                 allow_inf: bool = False) -> np.ndarray:
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise InputError(f"{name} must be a number or an array of numbers, got {value!r}",
                         field=name) from None
    bad = np.zeros(arr.shape, dtype=bool)
    if not allow_nan:
        bad |= np.isnan(arr)
    if not allow_inf:
        bad |= np.isinf(arr)
    if np.any(bad):
        raise InputError(f"{name} must be finite", field=name)
    finite = arr[~np.isnan(arr)]
    if positive and np.any(finite <= 0):
        raise InputError(f"{name} must be > 0", field=name)
    if nonnegative and np.any(finite < 0):
        raise InputError(f"{name} must be >= 0", field=name)
    return arr


def _out(x: np.ndarray) -> np.ndarray | float:
    x = np.asarray(x)
    return float(x) if x.ndim == 0 else x


def correlation_shape_for(signal: Signal) -> str:
    """``"BOC11"`` for Galileo E1 OS and BeiDou B1C, ``"BPSK"`` for the other signals."""
    return "BOC11" if signal.signal_id in BOC11_SIGNALS else "BPSK"


def _shape(shape: str) -> tuple[np.ndarray, np.ndarray]:
    key = str(shape).strip().upper()
    if key not in CORRELATION_SHAPES:
        raise InputError(f"unknown correlation shape '{shape}'; known: "
                         f"{', '.join(CORRELATION_SHAPES)}", field="shape")
    xs, rs = CORRELATION_SHAPES[key]
    return np.asarray(xs), np.asarray(rs)


def correlation_amplitude(offset_chips: ArrayLike, shape: str = "BPSK") -> np.ndarray | float:
    """Normalized correlation ``R(offset)`` of the named ideal shape (may be negative)."""
    xs, rs = _shape(shape)
    x = np.abs(_float_array(offset_chips, "offset_chips", allow_nan=True))
    return _out(np.interp(x, xs, rs, right=0.0))


@dataclass(frozen=True)
class CodeStepLoss:
    """Loss of stepping the code phase by ``step_chips`` (offset uniform in ±step/2).

    ``worst_*``: at the largest offset, half a step. ``average_amplitude``: mean of
    ``|R|``; ``average_amplitude_loss_db = -20 log10(average_amplitude)``.
    ``average_loss_db``: loss of the mean POWER, ``-10 log10 mean(R^2)`` (the expected
    SNR loss, same convention as ``core.search.bins``). All losses positive dB.
    """

    step_chips: float
    shape: str
    worst_amplitude: float
    worst_loss_db: float
    average_amplitude: float
    average_amplitude_loss_db: float
    average_loss_db: float

    def to_dict(self) -> dict[str, object]:
        return asdict(self)


def code_step_loss(step_chips: float, shape: str = "BPSK") -> CodeStepLoss:
    """Worst and average loss of a code-phase step for a piecewise-linear correlation.

    Exact integrals over each linear piece of ``R`` on ``[0, step/2]`` (split at its
    breakpoints). The step must keep half a step inside the main peak
    (``step < 2`` chips for BPSK, ``< 2/3`` chip for BOC(1,1)).
    Check [calc]: BPSK, 1/2 chip -> worst 0.75 (2.50 dB), average amplitude 0.875.
    """
    xs, rs = _shape(shape)
    key = str(shape).strip().upper()
    step = float(_float_array(step_chips, "step_chips", positive=True))
    half = 0.5 * step
    peak = MAIN_PEAK_HALF_WIDTH_CHIPS[key]
    if half >= peak:
        raise InputError(f"a code step of {step:g} chips puts half a step beyond the "
                         f"{key} main peak (step must be < {2 * peak:g} chips)",
                         field="step_chips")
    knots = np.concatenate(([0.0], xs[(xs > 0) & (xs < half)], [half]))
    r = np.interp(knots, xs, rs)
    r0, r1, length = r[:-1], r[1:], np.diff(knots)
    # R stays positive on the main peak, so |R| = R on every piece.
    mean_amp = float(np.sum(0.5 * (r0 + r1) * length) / half)
    mean_pow = float(np.sum((r0 * r0 + r0 * r1 + r1 * r1) / 3.0 * length) / half)
    worst = float(np.interp(half, xs, rs))
    return CodeStepLoss(step, key, worst, -20.0 * math.log10(worst), mean_amp,
                        -20.0 * math.log10(mean_amp), -10.0 * math.log10(mean_pow))


def triangle_step_loss(step_chips: float) -> tuple[float, float]:
    """``(worst_loss_db, average_loss_db)`` of the BPSK triangle (average = mean POWER).

    Amplitudes and the amplitude-average loss are in :func:`code_step_loss`.
    """
    loss = code_step_loss(step_chips, "BPSK")
    return loss.worst_loss_db, loss.average_loss_db


# --------------------------------------------------------------------------- windows

def code_window_chips(signal: Signal,
                      range_uncertainty_m: ArrayLike | None = None) -> np.ndarray | float:
    """Code-phase window (chips) to search: ``2 * range_uncertainty_m`` (±) in chips.

    ``None`` means no prior knowledge: the whole code period. The window never exceeds
    the code length (the code is periodic), so an infinite uncertainty (no fine time,
    see :func:`range_uncertainty_m`) gives the whole code. Broadcasts; NaN stays NaN.
    """
    length = float(signal.code_length_chips)
    if range_uncertainty_m is None:
        return length
    u = _float_array(range_uncertainty_m, "range_uncertainty_m", nonnegative=True,
                     allow_nan=True, allow_inf=True)
    return _out(np.minimum(2.0 * u / signal.chip_length_m, length))


def code_cells(window_chips: ArrayLike, step_chips: ArrayLike) -> np.ndarray | int:
    """Code cells to test: ``max(1, ceil(window / step))``; NaN window -> 0 cells.

    A ratio within ``WHOLE_NUMBER_RTOL`` of a whole number counts as that number
    (1023 chips / 0.5 chip = 2046 cells).
    """
    w = _float_array(window_chips, "window_chips", nonnegative=True, allow_nan=True)
    s = _float_array(step_chips, "step_chips", positive=True)
    w, s = np.broadcast_arrays(w, s)
    valid = np.isfinite(w)
    ratio = np.where(valid, w / s, 0.0)
    n = np.ceil(ratio * (1.0 - WHOLE_NUMBER_RTOL))
    n = np.where(valid, np.maximum(n, 1.0), 0.0).astype(np.int64)
    return int(n) if n.ndim == 0 else n


@dataclass(frozen=True)
class RangeUncertainty:
    """Worst-case pseudorange (code-phase) uncertainty, metres, by cause (see the function).

    ``clock_m`` is COMMON to all satellites: once one satellite is acquired it is known
    and the other satellites' windows shrink to ``position_m + satellite_motion_m``.
    """

    position_m: np.ndarray | float
    clock_m: np.ndarray | float
    satellite_motion_m: np.ndarray | float
    total_m: np.ndarray | float

    def to_dict(self) -> dict[str, object]:
        return {k: (v.tolist() if isinstance(v, np.ndarray) else v)
                for k, v in asdict(self).items()}


def range_uncertainty_budget(horizontal_uncertainty_m: ArrayLike,
                             vertical_uncertainty_m: ArrayLike, elevation_deg: ArrayLike,
                             time_uncertainty_s: ArrayLike, range_rate_m_s: ArrayLike,
                             fine_time_uncertainty_s: ArrayLike | None) -> RangeUncertainty:
    """Honest worst-case bound of the pseudorange uncertainty, split by cause.

    * Position: a horizontal error of at most ``h`` (any azimuth) and a vertical error of
      at most ``v`` project on the line of sight at elevation ``el`` by at most
      ``h |cos el| + v |sin el|`` (the two maxima can coincide, so they add).
    * Receiver time at the samples (fine time), known to ``fine_time_uncertainty_s``:
      shifts every code phase by up to ``c * dt_fine``, the same for every satellite.
      ``None`` (no fine time) gives ``inf``: search the whole code.
    * Time used to predict the satellite's range (coarse time), known to
      ``time_uncertainty_s``: the satellite moves the range by up to
      ``|range_rate| * dt``. Pass the same value as the fine-time error when one clock
      serves both.

    All inputs broadcast (e.g. elevation and range rate shaped ``(n_sat, n_time)``).
    """
    h = _float_array(horizontal_uncertainty_m, "horizontal_uncertainty_m", nonnegative=True)
    v = _float_array(vertical_uncertainty_m, "vertical_uncertainty_m", nonnegative=True)
    el = np.radians(_float_array(elevation_deg, "elevation_deg", allow_nan=True))
    dt = _float_array(time_uncertainty_s, "time_uncertainty_s", nonnegative=True)
    rr = _float_array(range_rate_m_s, "range_rate_m_s", allow_nan=True)
    if fine_time_uncertainty_s is None:
        clock = np.asarray(np.inf)
    else:
        clock = SPEED_OF_LIGHT_M_S * _float_array(fine_time_uncertainty_s,
                                                  "fine_time_uncertainty_s", nonnegative=True)
    position = h * np.abs(np.cos(el)) + v * np.abs(np.sin(el))
    motion = np.abs(rr) * dt
    total = position + clock + motion
    return RangeUncertainty(_out(position), _out(clock), _out(motion), _out(total))


def range_uncertainty_m(horizontal_uncertainty_m: ArrayLike, vertical_uncertainty_m: ArrayLike,
                        elevation_deg: ArrayLike, time_uncertainty_s: ArrayLike,
                        range_rate_m_s: ArrayLike,
                        fine_time_uncertainty_s: ArrayLike | None) -> np.ndarray | float:
    """Total of :func:`range_uncertainty_budget` (metres, ± about the predicted range)."""
    return range_uncertainty_budget(horizontal_uncertainty_m, vertical_uncertainty_m,
                                    elevation_deg, time_uncertainty_s, range_rate_m_s,
                                    fine_time_uncertainty_s).total_m

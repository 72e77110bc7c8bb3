"""Two numpy reductions without numpy.ma: ``np.median`` and ``np.unique`` import
``numpy.ma`` on their first call (to test for masked arrays), which costs a plan's
start-up about 15-25 ms of CPU (its module, and the signature parsing it does). The
plan's few calls of them use these instead; same values (tests/test_arrays.py checks them
against numpy, tests/test_tails.py that a plan does not import numpy.ma)."""

from __future__ import annotations

import math

import numpy as np


def median_value(values) -> float:
    """``float(np.median(values))`` of a flat set of numbers: the middle value, or the
    mean of the two middle values; NaN if any value is NaN or there is none."""
    v = np.sort(np.asarray(values, dtype=float).ravel())
    n = v.size
    if n == 0 or math.isnan(v[-1]):
        return math.nan
    return float(v[n // 2]) if n % 2 else float((v[n // 2 - 1] + v[n // 2]) / 2.0)


def unique_values(values) -> np.ndarray:
    """``np.unique(values)`` of a flat set of numbers that holds no NaN: sorted, each once."""
    v = np.sort(np.asarray(values).ravel())
    if v.size == 0:
        return v
    keep = np.empty(v.size, dtype=bool)
    keep[0] = True
    np.not_equal(v[1:], v[:-1], out=keep[1:])
    return v[keep]

"""core.ground.arrays against numpy's own np.median and np.unique (reference library)."""

from __future__ import annotations

import math

import numpy as np

from core.ground.arrays import median_value, unique_values


def test_median_value_equals_numpy_median():
    rng = np.random.default_rng(5)
    for size in list(range(1, 12)) + [99, 100, 1001]:
        for values in (rng.normal(1.7e9, 3e5, size), rng.integers(0, 4, size).astype(float),
                       np.round(rng.uniform(-1, 1, size), 2)):
            assert median_value(values) == float(np.median(values))
            assert median_value(list(values)) == float(np.median(values))
    assert math.isnan(median_value([1.0, np.nan, 2.0]))
    assert math.isnan(median_value([]))


def test_unique_values_equals_numpy_unique():
    rng = np.random.default_rng(6)
    for size in (0, 1, 2, 7, 500):
        for values in (rng.integers(0, 9, size).astype(float), rng.normal(0, 1, size),
                       np.repeat(rng.normal(0, 1, size // 2 + 1), 3)):
            ours, ref = unique_values(values), np.unique(values)
            assert ours.dtype == ref.dtype
            np.testing.assert_array_equal(ours, ref)

"""Tests of core.search.bins: coherent frequency loss, bin design, tiling, coherent-time checks."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import integrate, optimize

from core.ground.errors import InputError
from core.ground.signals import SIGNALS
from core.search import bins

L1_HZ = 1575.42e6  # [pub: IS-GPS-200] GPS L1 carrier


def _loss_math(df_hz: float, tc_s: float) -> float:
    """Independent evaluation of -20 log10 |sin(pi x)/(pi x)| with the math module."""
    x = df_hz * tc_s
    amp = 1.0 if x == 0 else abs(math.sin(math.pi * x) / (math.pi * x))
    return -20.0 * math.log10(amp)


# --------------------------------------------------------------------------- loss

def test_loss_matches_direct_sinc_evaluation():
    # [trade; standard result] amplitude |sinc(df Tc)|, normalized sinc as numpy.sinc.
    offsets = np.array([0.0, 10.0, 125.0, 250.0, 400.0, 700.0, -250.0])
    for tc in (1e-3, 4e-3, 20e-3):
        got = bins.frequency_loss_db(offsets, tc)
        ref_numpy = -20.0 * np.log10(np.abs(np.sinc(offsets * tc)))
        ref_math = [_loss_math(f, tc) for f in offsets]
        np.testing.assert_allclose(got, ref_numpy, rtol=1e-12, atol=1e-12)
        np.testing.assert_allclose(got, ref_math, rtol=1e-9, atol=1e-12)


def test_loss_250hz_at_1ms():
    # [calc, numpy.sinc] domain-notes 5: 1 ms, 250 Hz -> amplitude 0.9003, 0.91 dB.
    loss = bins.frequency_loss_db(250.0, 1e-3)
    assert isinstance(loss, float)
    assert 10 ** (-loss / 20) == pytest.approx(0.9003, abs=5e-5)
    assert loss == pytest.approx(0.91, abs=0.005)


def test_loss_broadcasts_over_sat_time():
    df = np.linspace(-600, 600, 12).reshape(3, 4)
    tc = np.array([1e-3, 2e-3, 4e-3, 10e-3])
    got = bins.frequency_loss_db(df, tc)
    assert got.shape == (3, 4)
    assert got[1, 2] == pytest.approx(_loss_math(df[1, 2], tc[2]), rel=1e-9)


def test_straddle_loss_at_half_a_one_over_tc_bin():
    # [pub: Richards, Fundamentals of Radar Signal Processing, eq. 5.84]: worst straddle
    # for a bin of 1/Tc, i.e. at an offset of 1/(2 Tc): amplitude 2/pi, 3.92 dB.
    for tc in (1e-3, 7e-3, 0.1):
        loss = bins.frequency_loss_db(0.5 / tc, tc)
        assert loss == pytest.approx(20 * math.log10(math.pi / 2), abs=1e-9)
        assert loss == pytest.approx(3.92, abs=0.005)
        hw = bins.half_width_for_loss_hz(tc, 20 * math.log10(math.pi / 2))
        assert hw == pytest.approx(0.5 / tc, rel=1e-12)


def test_loss_huge_at_null():
    # sin(pi) is 1.2e-16 in floating point, so the null is ~320 dB rather than inf.
    assert bins.frequency_loss_db(1000.0, 1e-3) > 300.0
    assert bins.frequency_loss_db(-2000.0, 1e-3) > 300.0


# --------------------------------------------------------------------------- half-width

@pytest.mark.parametrize("tc_s, loss_db, expected_hz, tol_hz", [
    # [calc] domain-notes 5, exact half-widths from numpy.sinc
    (1e-3, 1.0, 261.5, 0.05),
    (11e-3, 1.0, 23.77, 0.005),
    (20e-3, 1.0, 13.08, 0.005),
    (1e-3, 2.0, 365.5, 0.05),
    (1e-3, 3.0, 442.2, 0.05),
])
def test_half_width_reference_values(tc_s, loss_db, expected_hz, tol_hz):
    assert bins.half_width_for_loss_hz(tc_s, loss_db) == pytest.approx(expected_hz, abs=tol_hz)


def test_half_width_11ms_in_ppb_of_l1():
    # [calc] domain-notes 5: 23.77 Hz at 11 ms is 15.09 ppb of 1575.42 MHz.
    hw = bins.half_width_for_loss_hz(11e-3, 1.0)
    assert hw / L1_HZ * 1e9 == pytest.approx(15.09, abs=0.005)


def test_half_width_agrees_with_scipy_brentq():
    # Reference library: scipy.optimize.brentq on the loss itself, main lobe (0, 1/Tc).
    tcs = np.array([1e-3, 3e-3, 11e-3, 20e-3, 0.1])
    losses = np.array([0.05, 0.5, 1.0, 3.0, 10.0])
    got = bins.half_width_for_loss_hz(tcs[:, None], losses[None, :])
    assert got.shape == (5, 5)
    for i, tc in enumerate(tcs):
        for j, loss in enumerate(losses):
            ref = optimize.brentq(lambda f, tc=tc, loss=loss: _loss_math(f, tc) - loss,
                                  1e-9, (1 - 1e-12) / tc, xtol=1e-12, rtol=1e-14)
            assert got[i, j] == pytest.approx(ref, rel=1e-9)


@pytest.mark.parametrize("loss_db", [1e-6, 0.01, 1.0, 3.92, 20.0, 60.0])
def test_half_width_round_trip(loss_db):
    hw = bins.half_width_for_loss_hz(2e-3, loss_db)
    assert 0 < hw < 500.0   # main lobe of 2 ms: null at 500 Hz
    assert _loss_math(hw, 2e-3) == pytest.approx(loss_db, rel=1e-9)


@settings(max_examples=60, deadline=None)
@given(tc=st.floats(1e-4, 1.0), k=st.floats(0.05, 20.0), loss=st.floats(0.01, 20.0))
def test_half_width_scales_exactly_as_one_over_tc(tc, k, loss):
    # domain-notes 5: half-width scales as 1/Tc (the loss depends on df*Tc only).
    a = bins.half_width_for_loss_hz(tc, loss)
    b = bins.half_width_for_loss_hz(k * tc, loss)
    assert a * tc == pytest.approx(b * k * tc, rel=1e-12)


@pytest.mark.parametrize("kwargs, field", [
    ({"coherent_s": 0.0, "max_loss_db": 1.0}, "coherent_s"),
    ({"coherent_s": -1e-3, "max_loss_db": 1.0}, "coherent_s"),
    ({"coherent_s": float("nan"), "max_loss_db": 1.0}, "coherent_s"),
    ({"coherent_s": 1e-3, "max_loss_db": 0.0}, "max_loss_db"),
    ({"coherent_s": 1e-3, "max_loss_db": -1.0}, "max_loss_db"),
    ({"coherent_s": 1e-3, "max_loss_db": float("inf")}, "max_loss_db"),
    ({"coherent_s": "abc", "max_loss_db": 1.0}, "coherent_s"),
])
def test_half_width_rejects_bad_input(kwargs, field):
    with pytest.raises(InputError) as err:
        bins.half_width_for_loss_hz(**kwargs)
    assert err.value.field == field
    with pytest.raises(InputError):
        bins.design_bins(**kwargs)


# --------------------------------------------------------------------------- design

def test_design_bins_1ms_1db():
    d = bins.design_bins(1e-3, 1.0)
    # [calc] domain-notes 5: half-width 261.5 Hz -> 523 Hz bins.
    assert d.coherent_ms == pytest.approx(1.0)
    assert d.half_width_hz == pytest.approx(261.5, abs=0.05)
    assert d.bin_width_hz == pytest.approx(2 * d.half_width_hz, rel=1e-15)
    assert d.worst_loss_db == pytest.approx(1.0, abs=1e-9)
    # Mean power and mean amplitude over a uniform offset, by scipy.integrate.quad.
    a = d.half_width_hz
    mean_pow = integrate.quad(lambda f: np.sinc(f * 1e-3) ** 2, 0, a, epsabs=1e-14)[0] / a
    mean_amp = integrate.quad(lambda f: np.sinc(f * 1e-3), 0, a, epsabs=1e-14)[0] / a
    assert d.average_loss_db == pytest.approx(-10 * math.log10(mean_pow), abs=1e-9)
    assert d.average_amplitude_loss_db == pytest.approx(-20 * math.log10(mean_amp), abs=1e-9)
    assert 0 < d.average_loss_db < d.worst_loss_db
    assert set(d.to_dict()) == {"coherent_ms", "max_loss_db", "bin_width_hz", "half_width_hz",
                                "worst_loss_db", "average_loss_db", "average_amplitude_loss_db"}


def test_design_bins_one_over_tc_bin_is_3_92_db():
    # [pub: Richards eq. 5.84]: 1/Tc bins lose 3.92 dB at the edge.
    d = bins.design_bins(4e-3, 20 * math.log10(math.pi / 2))
    assert d.bin_width_hz == pytest.approx(250.0, rel=1e-12)


def test_average_frequency_loss_vs_quad_vectorized():
    hw = np.array([[50.0, 200.0], [300.0, 450.0]])
    got = bins.average_frequency_loss_db(hw, 1e-3)
    for idx in np.ndindex(hw.shape):
        a = hw[idx]
        ref = integrate.quad(lambda f: np.sinc(f * 1e-3) ** 2, 0, a, epsabs=1e-14)[0] / a
        assert got[idx] == pytest.approx(-10 * math.log10(ref), abs=1e-9)


# --------------------------------------------------------------------------- tiling

def test_tile_classic_8khz_window_with_500hz_bins():
    # [trade] +-4 kHz of Doppler with 500 Hz bins: 16 bins, centres +-250 ... +-3750 Hz.
    t = bins.tile_bins(-4000.0, 4000.0, 500.0)
    assert t.n_bins == 16
    np.testing.assert_allclose(t.centres_hz, np.arange(-3750.0, 3751.0, 500.0))
    assert t.lower_edge_hz == pytest.approx(-4000.0)
    assert t.upper_edge_hz == pytest.approx(4000.0)
    assert t.to_dict()["n_bins"] == 16


def test_tile_round_off_does_not_add_a_bin():
    # 0.3 / 0.1 = 2.9999999999999996 and 0.7 / 0.1 = 6.999999999999999 in floating point.
    assert bins.bin_count(0.0, 0.3, 0.1) == 3
    assert bins.bin_count(0.0, 0.7, 0.1) == 7
    assert bins.bin_count(100.0, 100.0 + 3 * 0.1, 0.1) == 3


def test_tile_degenerate_window_has_one_bin():
    t = bins.tile_bins(1234.0, 1234.0, 500.0)
    assert t.n_bins == 1
    assert t.centres_hz[0] == pytest.approx(1234.0)


@settings(max_examples=200, deadline=None)
@given(low=st.floats(-2e4, 2e4), span=st.floats(0.0, 3e4), width=st.floats(0.5, 5000.0))
def test_tiling_covers_window_without_gaps(low, span, width):
    high = low + span
    t = bins.tile_bins(low, high, width)
    c = t.centres_hz
    tol = 1e-9 * max(1.0, abs(low), abs(high))
    assert t.n_bins >= 1
    # covers the window (up to the whole-number tolerance of the count)
    assert t.lower_edge_hz <= low + tol + 1e-9 * span
    assert t.upper_edge_hz >= high - tol - 1e-9 * span
    # adjacent bins touch: centres exactly one width apart -> no gap, no overlap
    if t.n_bins > 1:
        np.testing.assert_allclose(np.diff(c), width, rtol=1e-9)
        # as few bins as possible: n - 1 bins could not cover the span
        assert (t.n_bins - 1) * width < span * (1 + 1e-9)
    # centred on the window
    assert 0.5 * (c[0] + c[-1]) == pytest.approx(0.5 * (low + high), abs=tol + 1e-9 * width)


def test_bin_count_vectorized_matches_tiling_and_handles_nan():
    rng = np.random.default_rng(7)
    low = rng.uniform(-5000, 0, size=(4, 6))
    high = low + rng.uniform(0, 9000, size=(4, 6))
    low[2, 3] = np.nan
    n = bins.bin_count(low, high, 350.0)
    assert n.shape == (4, 6) and n.dtype.kind == "i"
    assert n[2, 3] == 0
    for idx in np.ndindex(low.shape):
        if idx != (2, 3):
            assert n[idx] == bins.bin_centres(low[idx], high[idx], 350.0).size


def test_tiling_rejects_bad_windows():
    with pytest.raises(InputError) as err:
        bins.tile_bins(100.0, -100.0, 500.0)
    assert err.value.field == "high_hz"
    with pytest.raises(InputError) as err:
        bins.bin_count([0.0, 1.0], [10.0, 20.0], 0.0)
    assert err.value.field == "bin_width_hz"


# --------------------------------------------------------------------------- curve

def test_loss_curve_marks_and_samples():
    c = bins.loss_curve(1e-3)
    assert c["offset_hz"].size == 401
    assert c["offset_hz"][0] == pytest.approx(-750.0) and c["offset_hz"][-1] == pytest.approx(750.0)
    assert c["offset_hz"][200] == pytest.approx(0.0, abs=1e-9) and c["loss_db"][200] == 0.0
    # [calc] domain-notes 5: 1, 2, 3 dB points at 1 ms
    assert c["marks"][1.0] == pytest.approx(261.5, abs=0.05)
    assert c["marks"][2.0] == pytest.approx(365.5, abs=0.05)
    assert c["marks"][3.0] == pytest.approx(442.2, abs=0.05)
    for level, f in c["marks"].items():
        assert _loss_math(f, 1e-3) == pytest.approx(level, abs=1e-9)
    np.testing.assert_allclose(c["loss_db"], c["loss_db"][::-1], atol=1e-12)
    c2 = bins.loss_curve(20e-3, max_offset_hz=30.0, n=11)
    assert c2["offset_hz"].size == 11 and c2["offset_hz"][-1] == pytest.approx(30.0)
    with pytest.raises(InputError):
        bins.loss_curve(1e-3, n=1)


# --------------------------------------------------------------------------- coherent time

def test_coherent_time_code_period_rules():
    e1, b1c, l1 = SIGNALS["GAL-E1"], SIGNALS["BDS-B1C"], SIGNALS["GPS-L1CA"]
    # [pub: Galileo OS SIS ICD] E1 code period 4 ms; [pub: BeiDou B1C ICD] 10 ms.
    assert not bins.check_coherent_time(e1, 1e-3).ok
    assert "shorter" in bins.check_coherent_time(e1, 1e-3).errors[0]
    assert "whole number" in bins.check_coherent_time(e1, 6e-3).errors[0]
    assert bins.check_coherent_time(e1, 4e-3).ok
    assert bins.check_coherent_time(e1, 4e-3).warnings == []
    assert not bins.check_coherent_time(b1c, 15e-3).ok
    assert bins.check_coherent_time(b1c, 10e-3).ok
    assert bins.check_coherent_time(l1, 0.001).ok
    assert bins.check_coherent_time(l1, 3 * 0.001).ok   # 3 x 1 ms despite round-off
    assert not bins.check_coherent_time(l1, 0.0).ok
    assert not bins.check_coherent_time(l1, float("nan")).ok


def test_coherent_time_symbol_warnings():
    l1, e1 = SIGNALS["GPS-L1CA"], SIGNALS["GAL-E1"]
    # [pub: IS-GPS-200] 20 ms data bits: up to 20 ms no warning, beyond a warning with the loss.
    assert bins.check_coherent_time(l1, 20e-3).warnings == []
    chk = bins.check_coherent_time(l1, 40e-3)
    assert chk.ok and len(chk.warnings) == 1 and "symbol" in chk.warnings[0]
    assert f"{chk.transition_loss_db:.2f} dB" in chk.warnings[0]
    # E1: 4 ms symbols / secondary chips: 8 ms is valid but warned.
    chk = bins.check_coherent_time(e1, 8e-3)
    assert chk.ok and chk.warnings
    assert bins.max_coherent_without_transition_s(l1) == pytest.approx(20e-3)
    assert bins.max_coherent_without_transition_s(SIGNALS["GPS-L5"]) == pytest.approx(1e-3)
    assert bins.max_coherent_without_transition_s(e1) == pytest.approx(4e-3)
    assert bins.max_coherent_without_transition_s(SIGNALS["BDS-B1C"]) == pytest.approx(10e-3)
    assert bins.max_coherent_without_transition_s(SIGNALS["GLO-L1OF"]) == pytest.approx(10e-3)


def _transition_mc(r: float, timing_known: bool, n: int, rng) -> tuple[float, float]:
    """Direct simulation: ±1 symbols of unit length, interval [u, u + r], A = mean of d."""
    u = np.zeros(n) if timing_known else rng.uniform(0.0, 1.0, n)
    k = np.arange(int(math.ceil(r)) + 2)[None, :]          # symbol k covers [k, k+1)
    overlap = np.clip(np.minimum(k + 1, (u + r)[:, None]) - np.maximum(k, u[:, None]), 0, None)
    d = rng.choice([-1.0, 1.0], size=overlap.shape)
    power = (np.sum(d * overlap, axis=1) / r) ** 2
    return float(power.mean()), float(power.std() / math.sqrt(n))


@pytest.mark.parametrize("r", [0.05, 0.5, 1.0, 2.5, 4.0])
@pytest.mark.parametrize("timing_known", [False, True])
def test_transition_loss_against_direct_simulation(r, timing_known):
    rng = np.random.default_rng(int(r * 100) + timing_known)
    mean, sem = _transition_mc(r, timing_known, 100_000, rng)
    loss = bins.symbol_transition_loss_db(r * 20e-3, 20e-3, timing_known)
    model = 10 ** (-loss / 10)
    assert abs(model - mean) < 5 * sem + 1e-12


def test_transition_loss_closed_values():
    # Derived in the docstring; evaluated by hand: T = Ts, unknown timing -> 2/3 (1.76 dB);
    # known timing T = 2 Ts -> 1/2 (3.01 dB); T <= Ts known timing -> 0 dB.
    assert bins.symbol_transition_loss_db(20e-3, 20e-3) == pytest.approx(10 * math.log10(1.5))
    assert bins.symbol_transition_loss_db(40e-3, 20e-3, True) == pytest.approx(10 * math.log10(2))
    assert bins.symbol_transition_loss_db(10e-3, 20e-3, True) == 0.0
    got = bins.symbol_transition_loss_db(np.array([[1e-3, 2e-3], [20e-3, 60e-3]]), 20e-3)
    assert got.shape == (2, 2) and np.all(np.diff(got.ravel()) > 0)


def test_aligned_transition_loss_against_a_symbol_monte_carlo():
    """Code-epoch-aligned coherent sums of +-1 symbols, simulated with numpy [calc]."""
    from core.search.bins import aligned_transition_loss_db

    rng = np.random.default_rng(5)
    for n, big_l in [(4, 20), (1, 1), (4, 4), (10, 10), (8, 4), (20, 20), (3, 2)]:
        runs = 200_000
        start = rng.integers(0, big_l, runs)
        # symbol index of each code period j of the interval
        idx = (start[:, None] + np.arange(n)[None, :]) // big_l
        signs = rng.choice([-1.0, 1.0], size=(runs, idx.max() + 1))
        amp = np.take_along_axis(signs, idx, axis=1).sum(axis=1) / n
        sim_db = -10 * np.log10(np.mean(amp**2))
        assert aligned_transition_loss_db(n * 1e-3, big_l * 1e-3, 1e-3) == pytest.approx(sim_db, abs=0.03)
    # A symbol of one code period: every edge on the interval's ends, no loss [calc].
    assert aligned_transition_loss_db(0.004, 0.004, 0.004) == 0.0
    assert aligned_transition_loss_db(0.001, 0.001, 0.001) == 0.0

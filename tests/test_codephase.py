"""Tests of core.codephase: code-step loss, code windows and cells, range uncertainty."""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np
import pytest
from scipy import integrate

from core.ground.constants import SPEED_OF_LIGHT_M_S
from core.ground.errors import InputError
from core.ground.signals import SIGNALS
from core.search import codephase as cp

OVERSAMPLE = 48          # samples per chip of the synthetic codes below


@lru_cache(maxsize=2)
def _synthetic_correlation(boc: bool, n_chips: int = 8191, seed: int = 3) -> np.ndarray:
    """Normalized circular autocorrelation of a random ±1 code (numpy FFT), per sample lag.

    BOC(1,1): each chip is multiplied by one period of a square subcarrier (+1 then -1).
    """
    rng = np.random.default_rng(seed)
    chips = rng.choice([-1.0, 1.0], n_chips)
    wave = np.repeat(chips, OVERSAMPLE)
    if boc:
        sub = np.where(np.arange(OVERSAMPLE) < OVERSAMPLE // 2, 1.0, -1.0)
        wave = wave * np.tile(sub, n_chips)
    spec = np.fft.fft(wave)
    return np.real(np.fft.ifft(spec * np.conj(spec))) / wave.size


@pytest.mark.parametrize("shape, boc", [("BPSK", False), ("BOC11", True)])
def test_correlation_shapes_match_synthetic_codes(shape, boc):
    acf = _synthetic_correlation(boc)
    lags = np.arange(0, 2 * OVERSAMPLE) / OVERSAMPLE        # 0 .. 2 chips
    model = cp.correlation_amplitude(lags, shape)
    # random-code side lobes ~ 1/sqrt(8191) = 0.011
    np.testing.assert_allclose(acf[: lags.size], model, atol=0.05)


def test_triangle_half_chip_step():
    # [calc] domain-notes 5: 1/2-chip step -> worst offset 1/4 chip: amplitude 0.75,
    # 2.50 dB; average amplitude over a uniform offset 0.875.
    loss = cp.code_step_loss(0.5)
    assert loss.worst_amplitude == pytest.approx(0.75, abs=1e-12)
    assert loss.worst_loss_db == pytest.approx(2.50, abs=0.005)
    assert loss.average_amplitude == pytest.approx(0.875, abs=1e-12)
    assert loss.average_amplitude_loss_db == pytest.approx(-20 * math.log10(0.875), abs=1e-12)
    # mean power over [0, 1/4] by scipy.integrate.quad
    mean_pow = integrate.quad(lambda x: (1 - x) ** 2, 0, 0.25)[0] / 0.25
    assert loss.average_loss_db == pytest.approx(-10 * math.log10(mean_pow), abs=1e-12)
    worst, avg = cp.triangle_step_loss(0.5)
    assert (worst, avg) == (loss.worst_loss_db, loss.average_loss_db)


@pytest.mark.parametrize("step", [0.1, 0.25, 0.5, 1.0, 1.5])
def test_triangle_step_loss_against_quad(step):
    a = step / 2
    loss = cp.code_step_loss(step)
    assert loss.worst_amplitude == pytest.approx(1 - a)
    assert loss.average_amplitude == pytest.approx(integrate.quad(lambda x: 1 - x, 0, a)[0] / a)
    assert loss.average_loss_db < loss.worst_loss_db


@pytest.mark.parametrize("step", [0.1, 0.25, 0.5])
def test_boc_step_loss_against_synthetic_correlation(step):
    # Mean over offsets uniform in [0, step/2] of the synthetic BOC(1,1) correlation.
    acf = _synthetic_correlation(True)
    n = int(round(step / 2 * OVERSAMPLE))
    r = acf[: n + 1]
    w = np.ones(n + 1)
    w[[0, -1]] = 0.5                                     # trapezoid over the samples
    loss = cp.code_step_loss(step, "boc11")
    assert loss.shape == "BOC11"
    assert loss.worst_amplitude == pytest.approx(r[-1], abs=0.03)
    assert loss.average_amplitude == pytest.approx(np.sum(w * r) / n, abs=0.03)
    mean_pow = np.sum(w * r * r) / n
    assert loss.average_loss_db == pytest.approx(-10 * math.log10(mean_pow), abs=0.15)


def test_step_beyond_main_peak_rejected():
    with pytest.raises(InputError) as err:
        cp.code_step_loss(2.0)
    assert err.value.field == "step_chips"
    with pytest.raises(InputError):
        cp.code_step_loss(0.7, "BOC11")       # half step beyond the 1/3-chip zero
    with pytest.raises(InputError) as err:
        cp.code_step_loss(0.5, "QPSK")
    assert err.value.field == "shape"


def test_shape_per_signal():
    assert cp.correlation_shape_for(SIGNALS["GAL-E1"]) == "BOC11"
    assert cp.correlation_shape_for(SIGNALS["BDS-B1C"]) == "BOC11"
    assert cp.correlation_shape_for(SIGNALS["GPS-L1CA"]) == "BPSK"


# --------------------------------------------------------------------------- windows

def test_code_window_whole_code_and_caps():
    # [pub: signal ICDs, domain-notes 3] code lengths
    assert cp.code_window_chips(SIGNALS["GPS-L1CA"]) == 1023
    assert cp.code_window_chips(SIGNALS["GAL-E1"]) == 4092
    assert cp.code_window_chips(SIGNALS["BDS-B1C"]) == 10230
    l1 = SIGNALS["GPS-L1CA"]
    chip_m = SPEED_OF_LIGHT_M_S / 1.023e6            # 293.05 m
    assert cp.code_window_chips(l1, 1000.0) == pytest.approx(2000.0 / chip_m)
    assert cp.code_window_chips(l1, 1e6) == 1023     # capped at the code length
    got = cp.code_window_chips(l1, np.array([[0.0, 150e3], [np.nan, 3e3]]))
    assert got.shape == (2, 2)
    assert got[0, 0] == 0.0 and got[0, 1] == 1023 and np.isnan(got[1, 0])
    with pytest.raises(InputError) as err:
        cp.code_window_chips(l1, -5.0)
    assert err.value.field == "range_uncertainty_m"


def test_code_cells():
    assert cp.code_cells(1023, 0.5) == 2046            # whole C/A code at half-chip steps
    assert cp.code_cells(1023, 1 / 3) == 3069          # round-off does not add a cell
    assert cp.code_cells(6.82, 0.5) == 14
    assert cp.code_cells(0.0, 0.5) == 1                # always at least one cell
    got = cp.code_cells(np.array([[1.0, 1.01], [np.nan, 4092.0]]), 0.5)
    np.testing.assert_array_equal(got, [[2, 3], [0, 8184]])
    with pytest.raises(InputError):
        cp.code_cells(10.0, 0.0)


# --------------------------------------------------------------------------- range

def test_range_uncertainty_projection_is_a_tight_worst_case():
    h, v = 3000.0, 500.0
    phi = np.linspace(0, 2 * np.pi, 3601)
    for el_deg in (0.0, 10.0, 45.0, 80.0, 90.0):
        el = math.radians(el_deg)
        # brute force: every horizontal error of length h and vertical +-v on the LOS
        los = np.array([math.cos(el), 0.0, math.sin(el)])    # azimuth irrelevant by symmetry
        errs = [np.stack([h * np.cos(phi), h * np.sin(phi), np.full_like(phi, s * v)])
                for s in (-1, 1)]
        brute = max(np.max(np.abs(los @ e)) for e in errs)
        b = cp.range_uncertainty_budget(h, v, el_deg, 0.0, 0.0, 0.0)
        assert b.position_m == pytest.approx(brute, rel=1e-5)
        assert b.clock_m == 0.0 and b.satellite_motion_m == 0.0


def test_range_uncertainty_terms():
    b = cp.range_uncertainty_budget(0.0, 0.0, 30.0, 2.0, -800.0, 1e-6)
    # c * 1 us = 299.79 m [pub: SI definition of c]; 800 m/s over 2 s = 1600 m
    assert b.clock_m == pytest.approx(299.792458)
    assert b.satellite_motion_m == pytest.approx(1600.0)
    assert b.total_m == pytest.approx(1899.792458)
    el = np.array([[5.0, 45.0], [60.0, 85.0]])
    rr = np.array([[600.0, -100.0], [0.0, 300.0]])
    tot = cp.range_uncertainty_m(1000.0, 100.0, el, 1.0, rr, 2e-6)
    assert tot.shape == (2, 2)
    e = math.radians(45.0)
    assert tot[0, 1] == pytest.approx(1000 * math.cos(e) + 100 * math.sin(e)
                                      + 2e-6 * SPEED_OF_LIGHT_M_S + 100.0)
    assert math.isinf(cp.range_uncertainty_m(10.0, 10.0, 45.0, 1.0, 0.0, None))
    assert cp.code_window_chips(SIGNALS["GPS-L1CA"], math.inf) == 1023
    assert cp.range_uncertainty_budget(1.0, 1.0, 20.0, 0.0, 0.0, 0.0).to_dict()["clock_m"] == 0.0
    with pytest.raises(InputError) as err:
        cp.range_uncertainty_m(-1.0, 0.0, 45.0, 0.0, 0.0, 0.0)
    assert err.value.field == "horizontal_uncertainty_m"

"""Tests of core.detection: square-law detector statistics and serial-search time."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from core.ground.errors import InputError
from core.search import detection as det


def _binomial_ok(hits: int, trials: int, p: float, conf: float = 1 - 1e-5) -> bool:
    """Is a hit count inside the two-sided binomial interval of probability p?"""
    lo, hi = stats.binom.interval(conf, trials, p)
    return lo <= hits <= hi


def _square_law_mc(snr: float, n_nc: int, trials: int, rng) -> np.ndarray:
    """Numpy-only square-law detector: z = sqrt(snr) e^{j phi} + n, E|n|^2 = 1, S = sum |z|^2."""
    noise = (rng.standard_normal((trials, n_nc)) + 1j * rng.standard_normal((trials, n_nc)))
    noise *= math.sqrt(0.5)
    phase = rng.uniform(0, 2 * np.pi, (trials, 1))     # carrier phase unknown, fixed per cell
    z = math.sqrt(snr) * np.exp(1j * phase) + noise
    return np.sum(np.abs(z) ** 2, axis=1)


# --------------------------------------------------------------------------- thresholds

def test_threshold_n1_is_minus_log_pfa():
    # N = 1: |n|^2 with E|n|^2 = 1 is exponential(1): P(S > t) = exp(-t) [standard result].
    for pfa in (1e-2, 1e-3, 1e-8):
        assert det.threshold_for_pfa(pfa, 1) == pytest.approx(-math.log(pfa), rel=1e-12)


def test_threshold_and_false_alarm_invert_each_other():
    pfa = np.array([[1e-2, 1e-4], [1e-6, 1e-9]])
    n = np.array([1, 20])
    thr = det.threshold_for_pfa(pfa, n)
    assert thr.shape == (2, 2)
    np.testing.assert_allclose(det.false_alarm_probability(thr, n), pfa, rtol=1e-9)


@pytest.mark.parametrize("n_nc", [1, 10])
def test_threshold_against_numpy_monte_carlo(n_nc):
    rng = np.random.default_rng(100 + n_nc)
    pfa, trials = 0.01, 200_000
    s = _square_law_mc(0.0, n_nc, trials, rng)
    hits = int(np.count_nonzero(s > det.threshold_for_pfa(pfa, n_nc)))
    assert _binomial_ok(hits, trials, pfa), hits


@pytest.mark.parametrize("n_nc, snr_db", [(1, 8.0), (10, 0.0), (10, 2.0)])
def test_detection_probability_against_numpy_monte_carlo(n_nc, snr_db):
    rng = np.random.default_rng(200 + n_nc + int(snr_db))
    trials = 60_000
    snr = 10 ** (snr_db / 10)
    thr = det.threshold_for_pfa(1e-3, n_nc)
    pd = det.detection_probability(snr, n_nc, thr)
    assert 0.2 < pd < 0.99          # informative region
    hits = int(np.count_nonzero(_square_law_mc(snr, n_nc, trials, rng) > thr))
    assert _binomial_ok(hits, trials, pd), (hits / trials, pd)


def test_detection_probability_without_signal_is_pfa():
    thr = det.threshold_for_pfa(1e-4, 5)
    assert det.detection_probability(0.0, 5, thr) == pytest.approx(1e-4, rel=1e-9)


# --------------------------------------------------------------------------- required SNR

@pytest.mark.parametrize("n_nc, expected_db", [(1, 14.2), (10, 6.1)])
def test_required_snr_richards_figure(n_nc, expected_db):
    # [pub: Richards, Fundamentals of Radar Signal Processing, Fig. 6.11]: square-law,
    # steady target, Pfa 1e-8, Pd 0.9; read off a figure, so 0.15 dB tolerance.
    assert det.required_snr_db(1e-8, 0.9, n_nc) == pytest.approx(expected_db, abs=0.15)


@pytest.mark.parametrize("n_nc, expected_db", [(1, 10.76), (10, 3.36)])
def test_required_snr_scipy_values(n_nc, expected_db):
    # [calc with scipy] domain-notes 6: Pfa 1e-3, Pd 0.9.
    assert det.required_snr_db(1e-3, 0.9, n_nc) == pytest.approx(expected_db, abs=0.005)


def test_required_snr_round_trip_and_vectorized():
    pfa = np.array([1e-3, 1e-6, 1e-10])[:, None]
    pd = np.array([0.5, 0.9, 0.99])[None, :]
    snr_db = det.required_snr_db(pfa, pd, 4)
    assert snr_db.shape == (3, 3)
    got = det.detection_probability(10 ** (snr_db / 10), 4, det.threshold_for_pfa(pfa, 4))
    np.testing.assert_allclose(got, np.broadcast_to(pd, (3, 3)), rtol=1e-9)
    # more pulses -> less per-pulse SNR needed
    assert det.required_snr_db(1e-6, 0.9, 100) < det.required_snr_db(1e-6, 0.9, 10)


def test_sensitivity_is_snr_plus_30_at_1ms():
    # domain-notes 6: at Tc = 1 ms, C/N0 [dB-Hz] = SNR [dB] + 30; losses add.
    snr = det.required_snr_db(1e-3, 0.9, 1)
    assert det.sensitivity_dbhz(1e-3, 0.9, 1, 1e-3) == pytest.approx(snr + 30.0, abs=1e-9)
    assert det.sensitivity_dbhz(1e-3, 0.9, 1, 1e-3, 2.5) == pytest.approx(snr + 32.5, abs=1e-9)
    assert det.sensitivity_dbhz(1e-3, 0.9, 1, 10e-3) == pytest.approx(snr + 20.0, abs=1e-9)


def test_coherent_snr_and_pd_at_cn0():
    # [pub: Kaplan & Hegarty eqs. 5.52-5.53] SNR = C/N0 Tc: 40 dB-Hz, 1 ms -> 10 dB.
    assert det.coherent_snr_linear(40.0, 1e-3) == pytest.approx(10.0)
    assert det.coherent_snr_linear(40.0, 1e-3, 3.0) == pytest.approx(10 * 10 ** -0.3)
    cn0 = np.array([[30.0, 35.0, 40.0], [38.0, 42.0, 45.0]])
    pd = det.detection_probability_at_cn0(cn0, 1e-3, 1, 1e-3)
    assert pd.shape == (2, 3) and np.all(np.diff(pd[0]) > 0)
    need = det.sensitivity_dbhz(1e-3, 0.9, 1, 1e-3)
    assert det.detection_probability_at_cn0(need, 1e-3, 1, 1e-3) == pytest.approx(0.9, rel=1e-9)


@pytest.mark.parametrize("call, field", [
    (lambda: det.required_snr_db(0.1, 0.05, 1), "pd"),
    (lambda: det.required_snr_db(0.0, 0.9, 1), "pfa"),
    (lambda: det.required_snr_db(1e-3, 1.0, 1), "pd"),
    (lambda: det.threshold_for_pfa(1e-3, 2.5), "n_noncoherent"),
    (lambda: det.threshold_for_pfa(1e-3, 0), "n_noncoherent"),
    (lambda: det.sensitivity_dbhz(1e-3, 0.9, 1, 0.0), "coherent_s"),
    (lambda: det.detection_probability(-1.0, 1, 3.0), "snr_linear"),
])
def test_detection_rejects_bad_input(call, field):
    with pytest.raises(InputError) as err:
        call()
    assert err.value.field == field


# --------------------------------------------------------------------------- elevation

def test_cn0_elevation_model():
    z, m = 48.0, 38.0
    assert det.cn0_at_elevation_dbhz(90.0, z, m, 10.0) == pytest.approx(z)
    assert det.cn0_at_elevation_dbhz(10.0, z, m, 10.0) == pytest.approx(m)
    # documented model: linear in sin(el); with a 0 deg mask, sin 30 deg = 1/2 -> midpoint
    assert det.cn0_at_elevation_dbhz(30.0, z, m, 0.0) == pytest.approx(0.5 * (z + m))
    el = np.array([[-5.0, 5.0, 15.0], [40.0, 70.0, 90.0]])
    got = det.cn0_at_elevation_dbhz(el, z, m, 10.0)
    assert got.shape == (2, 3)
    assert got[0, 0] == pytest.approx(m) and got[0, 1] == pytest.approx(m)   # clipped
    assert np.all(np.diff(got.ravel()[1:]) >= 0)
    nan = det.cn0_at_elevation_dbhz(el, z, m, 10.0, below_mask_nan=True)
    assert np.isnan(nan[0, 0]) and np.isnan(nan[0, 1]) and not np.isnan(nan[0, 2])
    with pytest.raises(InputError):
        det.cn0_at_elevation_dbhz(30.0, z, m, 90.0)


# --------------------------------------------------------------------------- serial search

def _formula(q, td, pd, pfa, pen):
    """The published form, restated [mem: Polydoros & Weber 1984; Holmes]."""
    k = pen / td
    return (2 + (2 - pd) * (q - 1) * (1 + k * pfa)) / (2 * pd) * td


def test_mean_search_time_limits():
    # q = 1: one position, found after a geometric number of dwells: td / Pd.
    assert det.mean_search_time_s(1, 2e-3, 0.8, 0.1, 1.0) == pytest.approx(2e-3 / 0.8)
    # Pd = 1, Pfa = 0: (q + 1) td / 2 (domain-notes 6)
    for q in (2, 17, 2046):
        assert det.mean_search_time_s(q, 1e-3, 1.0, 0.0, 5.0) == pytest.approx((q + 1) * 1e-3 / 2)


def test_mean_search_time_vectorized():
    q = np.array([[10, 100], [1000, 5000]])
    pd = np.array([0.5, 0.9])
    got = det.mean_search_time_s(q, 1e-3, pd, 1e-3, 0.5)
    assert got.shape == (2, 2)
    assert got[1, 0] == pytest.approx(_formula(1000, 1e-3, 0.5, 1e-3, 0.5))


def _loop_search(q, pd, pfa, td, pen, rng) -> float:
    """Literal cell-by-cell serial search (one run), for checking the vectorized simulator."""
    signal = int(rng.integers(q))
    t, cell = 0.0, 0
    while True:
        t += td
        if cell == signal:
            if rng.random() < pd:
                return t
        elif rng.random() < pfa:
            t += pen
        cell = (cell + 1) % q


def test_simulation_matches_formula():
    rng = np.random.default_rng(11)
    for q, pd, pfa, td, pen in [(50, 0.7, 0.05, 1e-3, 0.1), (400, 0.95, 1e-3, 4e-3, 1.0),
                                (1, 0.6, 0.5, 1e-3, 1.0)]:
        t = det.simulate_serial_search(q, pd, pfa, td, pen, 200_000, rng)
        sem = t.std() / math.sqrt(t.size)
        assert abs(t.mean() - _formula(q, td, pd, pfa, pen)) < 5 * sem, (q, pd)


def test_simulation_limit_pd1_pfa0():
    rng = np.random.default_rng(12)
    t = det.simulate_serial_search(20, 1.0, 0.0, 1e-3, 9.9, 50_000, rng)
    # signal position uniform in 0..19, found on the first pass: times 1..20 dwells
    np.testing.assert_allclose(np.unique(np.round(t / 1e-3)), np.arange(1, 21))
    assert abs(t.mean() - 21 * 1e-3 / 2) < 5 * t.std() / math.sqrt(t.size)


def test_simulation_matches_literal_cell_by_cell_search():
    q, pd, pfa, td, pen = 12, 0.6, 0.1, 1e-3, 5e-3
    rng = np.random.default_rng(13)
    loop = np.array([_loop_search(q, pd, pfa, td, pen, rng) for _ in range(4000)])
    vec = det.simulate_serial_search(q, pd, pfa, td, pen, 40_000, rng)
    # same distribution: two-sample Kolmogorov-Smirnov, and the means against the formula
    assert stats.ks_2samp(loop, vec).pvalue > 1e-4
    mean = _formula(q, td, pd, pfa, pen)
    assert abs(loop.mean() - mean) < 5 * loop.std() / math.sqrt(loop.size)


def test_simulation_accepts_per_run_parameters():
    rng = np.random.default_rng(14)
    n = 100_000
    pd = np.where(np.arange(n) % 2 == 0, 0.5, 0.9)
    q = np.where(np.arange(n) % 2 == 0, 30, 300)
    t = det.simulate_serial_search(q, pd, 0.01, 1e-3, 0.2, n, rng)
    for sel, qq, p in ((slice(0, None, 2), 30, 0.5), (slice(1, None, 2), 300, 0.9)):
        ts = t[sel]
        assert abs(ts.mean() - _formula(qq, 1e-3, p, 0.01, 0.2)) < 5 * ts.std() / math.sqrt(ts.size)
    with pytest.raises(InputError):
        det.simulate_serial_search(np.array([10, 20, 30]), 0.9, 0.0, 1e-3, 0.0, 4, rng)
    with pytest.raises(InputError):
        det.simulate_serial_search(10, 0.0, 0.0, 1e-3, 0.0, 4, rng)


# --------------------------------------------------------------------------- positions

def test_search_positions():
    p = det.search_positions(2046, 20, 1, False, 1e-4)
    assert (p.positions, p.cells_per_position, p.total_cells) == (40920, 1, 40920)
    assert p.pfa_position == pytest.approx(1e-4)
    p = det.search_positions(2046, 20, 10, False, 1e-4)
    assert p.positions == 205 * 20 and p.cells_per_position == 10   # ceil(204.6) = 205
    assert p.pfa_position == pytest.approx(1 - (1 - 1e-4) ** 10, rel=1e-12)
    p = det.search_positions(2046, 20, 1, True, 1e-6)
    assert p.positions == 20 and p.cells_per_position == 2046
    assert p.pfa_position == pytest.approx(1 - (1 - 1e-6) ** 2046, rel=1e-9)
    # more correlators than cells: one dwell per bin
    assert det.search_positions(8, 5, 16).positions == 5
    assert det.search_positions(8, 5, 16).pfa_position is None
    # tiny per-cell Pfa keeps its precision
    assert det.search_positions(1, 1, 1, False, 1e-15).pfa_position == pytest.approx(1e-15)
    v = det.search_positions(np.array([[14, 2046], [100, 7]]), 11, 4, False, 1e-3)
    np.testing.assert_array_equal(v.positions, np.array([[4, 512], [25, 2]]) * 11)


@pytest.mark.parametrize("parallel, fewest_cells", [(False, 1), (True, 1), (False, 16)])
def test_search_positions_of_large_count_grids_follow_the_formula(parallel, fewest_cells):
    """(S, T) grids as the plan passes them (integer cells and bins, > 4096 samples: the
    integer path, the looked-up Pfa per position, and with at least 16 cells everywhere
    one m for all), against the docstring's formulas evaluated element by element in
    plain Python [calc]; float counts give the same."""
    rng = np.random.default_rng(5)
    cells = rng.integers(fewest_cells, 3000, size=(40, 150))
    bins = rng.integers(1, 60, size=(40, 150))
    p = det.search_positions(cells, bins, 16, parallel, 3e-5)
    for c, b, q, m, pfa in zip(cells.ravel()[::97], bins.ravel()[::97], p.positions.ravel()[::97],
                               p.cells_per_position.ravel()[::97], p.pfa_position.ravel()[::97]):
        m_ref = int(c) if parallel else min(16, int(c))
        q_ref = int(b) if parallel else math.ceil(int(c) / m_ref) * int(b)
        assert (int(m), int(q)) == (m_ref, q_ref)
        assert pfa == pytest.approx(1.0 - (1.0 - 3e-5) ** m_ref, rel=1e-12)
    np.testing.assert_array_equal(p.total_cells, cells * bins)
    f = det.search_positions(cells.astype(float), bins.astype(float), 16.0, parallel, 3e-5)
    np.testing.assert_array_equal(f.positions, p.positions)
    np.testing.assert_array_equal(f.cells_per_position, p.cells_per_position)
    np.testing.assert_allclose(f.pfa_position, p.pfa_position, rtol=1e-15, atol=0)
    assert p.positions.dtype == np.int64 and not np.shares_memory(p.cells_per_position, cells)
    with pytest.raises(InputError, match="code_cells"):
        det.search_positions(np.where(cells > 2000, 0, cells), bins, 16, parallel, 3e-5)


def test_search_cost_combines_positions_and_time():
    c = det.search_cost(freq_bins=20, code_cells=2046, correlators_per_channel=1,
                        parallel_code_search=True, coherent_s=1e-3, noncoherent=5,
                        pfa_cell=1e-6, pd=0.9, penalty_s=0.5)
    pfa_pos = 1 - (1 - 1e-6) ** 2046
    assert c.positions == 20 and c.dwell_s == pytest.approx(5e-3)
    assert c.pfa_position == pytest.approx(pfa_pos, rel=1e-9)
    assert c.expected_search_s == pytest.approx(_formula(20, 5e-3, 0.9, pfa_pos, 0.5), rel=1e-12)
    pd = np.array([[0.5, 0.9], [0.99, 0.7]])
    c = det.search_cost(20, 2046, 4, False, 1e-3, 1, 1e-4, pd, 0.1)
    assert c.expected_search_s.shape == (2, 2)
    assert c.to_dict()["positions"] == 512 * 20


# --------------------------------------------------------------------------- offsets in a cell

def _offset_mc(snr0: float, n_nc: int, tc: float, bin_width_hz: float, step_chips: float,
               boc: bool, trials: int, rng) -> np.ndarray:
    """Numpy-only square-law detector with the signal at a uniform offset in its cell:
    carrier offset uniform in +-bin/2 (amplitude sinc(f Tc)), code offset uniform in
    +-step/2 (amplitude R(x), triangle 1 - |x| or BOC(1,1) 1 - 3|x| on the main peak)."""
    f = rng.uniform(-0.5, 0.5, (trials, 1)) * bin_width_hz
    x = np.abs(rng.uniform(-0.5, 0.5, (trials, 1)) * step_chips)
    amp = np.sqrt(snr0) * np.abs(np.sinc(f * tc)) * ((1 - 3 * x) if boc else (1 - x))
    noise = (rng.standard_normal((trials, n_nc)) + 1j * rng.standard_normal((trials, n_nc)))
    noise *= math.sqrt(0.5)
    z = amp * np.exp(1j * rng.uniform(0, 2 * np.pi, (trials, 1))) + noise
    return np.sum(np.abs(z) ** 2, axis=1)


@pytest.mark.parametrize("tc, n_nc, cn0, bin_loss_db, step, boc", [
    (0.004, 5, 31.5, 1.0, 0.5, False),     # the case of the issue: 0.835, not 0.871
    (0.001, 10, 36.0, 2.0, 0.5, False),
    (0.004, 3, 35.0, 1.0, 0.25, True),
])
def test_expected_pd_matches_a_monte_carlo_of_offsets_in_the_cell(tc, n_nc, cn0, bin_loss_db,
                                                                  step, boc):
    from core.search.bins import design_bins

    rng = np.random.default_rng(2027)
    pfa = 1e-4
    bw = design_bins(tc, bin_loss_db).bin_width_hz
    off = det.cell_offsets(tc, bw, step, "BOC11" if boc else "BPSK")
    expected = det.expected_detection_probability_at_cn0(cn0, tc, n_nc, pfa, off)
    trials = 400_000
    s = _offset_mc(10 ** (cn0 / 10) * tc, n_nc, tc, bw, step, boc, trials, rng)
    hits = int(np.sum(s > det.threshold_for_pfa(pfa, n_nc)))
    assert _binomial_ok(hits, trials, expected), (hits / trials, expected)
    # Pd at the mean loss (the old model) is outside the Monte Carlo interval.
    at_mean = det.detection_probability_at_cn0(cn0, tc, n_nc, pfa, off.mean_power_loss_db)
    assert not _binomial_ok(hits, trials, at_mean)
    assert at_mean > expected


def test_expected_pd_of_the_issue_case():
    # [calc: Monte Carlo above and the 100 x 100 midpoint mean in test_plan] 4 ms, N = 5,
    # Pfa 1e-4, 1 dB bins (130.75 Hz), 1/2-chip BPSK steps, 31.5 dB-Hz.
    from core.search.bins import design_bins

    off = det.cell_offsets(0.004, design_bins(0.004, 1.0).bin_width_hz, 0.5)
    assert det.expected_detection_probability_at_cn0(31.5, 0.004, 5, 1e-4, off) == pytest.approx(0.8352, abs=5e-4)
    assert det.detection_probability_at_cn0(31.5, 0.004, 5, 1e-4, off.mean_power_loss_db) == pytest.approx(0.8709, abs=5e-4)


def test_offset_quadrature_converges_and_keeps_the_mean_power():
    from core.search.bins import design_bins
    from core.search.codephase import code_step_loss

    d = design_bins(0.002, 1.5)
    for shape, step in (("BPSK", 0.5), ("BPSK", 1.0), ("BOC11", 0.3)):
        fine = det.cell_offsets(0.002, d.bin_width_hz, step, shape, nodes=400)
        used = det.cell_offsets(0.002, d.bin_width_hz, step, shape)
        for cn0 in (30.0, 34.0, 40.0):
            a = det.expected_detection_probability_at_cn0(cn0, 0.002, 4, 1e-3, used)
            b = det.expected_detection_probability_at_cn0(cn0, 0.002, 4, 1e-3, fine)
            assert abs(a - b) < 1e-7
        # the mean power over the nodes is the exact average losses of bins and codephase
        # (the losses add in dB: the two offsets are independent) [calc]
        exact = d.average_loss_db + code_step_loss(step, shape).average_loss_db
        assert used.mean_power_loss_db == pytest.approx(exact, abs=1e-9)


@pytest.mark.parametrize("tc, bin_hz, step, shape, n_nc, pfa, pd, loss", [
    (0.001, 1000.0, 0.5, "BPSK", 20, 1e-5, 0.9, 0.0),
    (0.004, 125.0, 0.25, "BOC11", 3, 1.01e-4, 0.95, 1.0),
    (0.012, 80.0, 0.5, "BPSK", 3, 1e-3, 0.5, 0.3),
])
def test_expected_sensitivity_root_for_other_designs(tc, bin_hz, step, shape, n_nc, pfa, pd, loss):
    """The root solved to 1e-10 dB: the expected Pd there is the asked one, and a step
    of 1e-8 dB either side falls short of it / passes it (Pd rises with C/N0)."""
    off = det.cell_offsets(tc, bin_hz, step, shape)
    sens = det.expected_sensitivity_dbhz(pfa, pd, n_nc, off, losses_db=loss)
    at = det.expected_detection_probability_at_cn0
    assert at(sens, tc, n_nc, pfa, off, loss) == pytest.approx(pd, abs=1e-9)
    assert at(sens - 1e-8, tc, n_nc, pfa, off, loss) < pd < at(sens + 1e-8, tc, n_nc, pfa, off, loss)


def test_expected_sensitivity_reaches_pd_09():
    from core.search.bins import design_bins

    off = det.cell_offsets(0.004, design_bins(0.004, 1.0).bin_width_hz, 0.5)
    sens = det.expected_sensitivity_dbhz(1e-4, 0.9, 5, off, losses_db=0.7)
    assert det.expected_detection_probability_at_cn0(sens, 0.004, 5, 1e-4, off, 0.7) == pytest.approx(0.9, abs=1e-9)
    # above the sensitivity at the mean loss, by the Jensen gap
    assert sens > det.sensitivity_dbhz(1e-4, 0.9, 5, 0.004, 0.7 + off.mean_power_loss_db)

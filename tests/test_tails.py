"""core.search.tails (chi-square tails and Si in numpy) against scipy.special, the
reference library, on dense grids over the range the plan uses (N = 1..1000 non-coherent
sums, Pfa 1e-12..0.1, SNR within the +-60 dB bisection bracket, accepted loss 0.1..3 dB)
and beyond it; a few points against mpmath at 40 digits where the two differ most."""

from __future__ import annotations

import math
import subprocess
import sys

import numpy as np
import pytest
from scipy import special
from scipy.stats import ncx2

from core.search import tails

N_GRID = np.concatenate([np.arange(1, 41), np.unique(np.round(np.geomspace(40, 1000, 25)))])
PFA_GRID = np.geomspace(1e-15, 0.9, 120)


def _rel(a, b, floor=1e-300):
    a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
    keep = b >= floor
    return float(np.max(np.abs(a - b)[keep] / b[keep], initial=0.0))


# --------------------------------------------------------------------------- central

def test_upper_gamma_and_complement_match_scipy_on_a_dense_grid():
    n, t = np.meshgrid(N_GRID, np.geomspace(1e-3, 3000.0, 600), indexing="ij")
    q, p = tails.poisson_tails(n, t)
    # scipy's own error reaches 6e-13 here (mpmath, test below): 2e-12 on every value
    assert _rel(q, special.gammaincc(n, t)) < 2e-12
    assert _rel(p, special.gammainc(n, t)) < 2e-12
    assert _rel(q, special.gammaincc(n, t), floor=1e-20) < 1e-12
    np.testing.assert_allclose(q + p, 1.0, rtol=0, atol=4e-16)
    np.testing.assert_array_equal(tails.upper_gamma(n, t), q)


def test_one_value_path_equals_the_array_path():
    for n in (1, 2, 5, 37, 1000):
        for t in (0.0, 1e-3, 0.7, 5.0, 40.0, 1100.0, 2900.0):
            q1, p1 = (float(v) for v in tails.poisson_tails(n, t))
            qa, pa = tails.poisson_tails(np.array([n, n]), np.array([t, t]))
            assert q1 == pytest.approx(qa[0], rel=1e-13, abs=1e-300)
            assert p1 == pytest.approx(pa[0], rel=1e-13, abs=1e-300)


def test_upper_gamma_against_mpmath_where_it_differs_most_from_scipy():
    mpmath = pytest.importorskip("mpmath")
    mpmath.mp.dps = 40
    for n, t in ((229, 327.148), (342, 512.13), (447, 640.77), (5, 40.0), (1000, 1200.0),
                 (1000, 880.0), (1, 30.0), (20, 3.0)):
        exact = float(mpmath.gammainc(n, t, mpmath.inf, regularized=True))
        assert float(tails.upper_gamma(n, t)) == pytest.approx(exact, rel=2e-13)


def test_threshold_matches_scipy_gammainccinv():
    n, p = np.meshgrid(N_GRID, PFA_GRID, indexing="ij")
    ref = special.gammainccinv(n, p)
    assert _rel(tails.upper_gamma_inv(n, p), ref) < 1e-14              # arrays
    for k in range(0, n.size, 37):                                       # one value at a time
        nn, pp = n.flat[k], p.flat[k]
        assert float(tails.upper_gamma_inv(nn, pp)) == pytest.approx(ref.flat[k], rel=1e-14)
    # and it is the inverse: Q(n, t) = p
    assert _rel(special.gammaincc(n, tails.upper_gamma_inv(n, p)), p) < 1e-12


def test_threshold_of_equal_elements_and_of_an_exact_root():
    # An array whose elements are all alike took the path where one Newton step lands on
    # the root exactly (g == 0) for every element at once; each element must still equal
    # scipy's gammainccinv [reference library], as must a lone element that lands exactly.
    for n in (1, 2, 5, 37, 1000):
        for p in (1e-12, 1e-8, 1e-3, 0.3, 0.9):
            got = tails.upper_gamma_inv(np.full(3, float(n)), np.full(3, p))
            assert _rel(got, np.full(3, special.gammainccinv(n, p))) < 1e-14, (n, p)
    got = tails.upper_gamma_inv(np.array([1.0, 2.0, 1.0]), np.full(3, 1e-8))
    assert _rel(got, special.gammainccinv([1, 2, 1], 1e-8)) < 1e-14


def test_threshold_n1_and_shapes():
    # N = 1: Q(1, t) = exp(-t) [standard result]
    for p in (0.5, 1e-3, 1e-12):
        assert float(tails.upper_gamma_inv(1, p)) == pytest.approx(-math.log(p), rel=1e-15)
    assert tails.upper_gamma_inv(np.array([[1, 5]]), np.array([[1e-3], [1e-6]])).shape == (2, 2)


# --------------------------------------------------------------------------- non-central

@pytest.mark.parametrize("n", [1, 2, 3, 5, 7, 10, 20, 50, 100, 200, 500, 1000])
def test_noncentral_tail_matches_scipy_ncx2(n):
    snr = 10.0 ** (np.arange(-60.0, 60.0 + 1e-9, 0.03) / 10.0)
    for pfa in (1e-15, 1e-12, 1e-8, 1e-4, 1e-2, 0.1, 0.5, 0.9):
        t = special.gammainccinv(n, pfa)
        ref = ncx2.sf(2.0 * t, 2.0 * n, 2.0 * n * snr)
        ours = tails.noncentral_tail(n, t, n * snr)
        assert _rel(ours, ref) < 5e-13, pfa
        assert float(np.max(np.abs(ours - ref))) < 2e-13, pfa
        assert float(tails.noncentral_tail(n, t, 0.0)) == pytest.approx(pfa, rel=1e-13)


def test_noncentral_tail_one_value_and_mixed_pairs():
    rng = np.random.default_rng(11)
    n = rng.choice([1, 4, 5, 20, 300], 400).astype(float)
    t = special.gammainccinv(n, 10.0 ** rng.uniform(-12, -1, n.size))
    mu = n * 10.0 ** rng.uniform(-3, 2, n.size)
    ref = ncx2.sf(2.0 * t, 2.0 * n, 2.0 * mu)
    assert _rel(tails.noncentral_tail(n, t, mu), ref) < 5e-13            # distinct (n, t)
    for k in range(0, n.size, 9):                                         # one value
        assert float(tails.noncentral_tail(n[k], t[k], mu[k])) == pytest.approx(ref[k], rel=5e-13)
    shaped = tails.noncentral_tail(5, 14.0, np.ones((3, 4)))
    assert shaped.shape == (3, 4) and np.all(shaped == shaped.flat[0])


# --------------------------------------------------------------------------- sine integral

def test_sine_integral_matches_scipy_sici():
    x = np.concatenate([np.linspace(-60.0, 60.0, 24001), np.geomspace(1e-8, 1.0, 200)])
    ref = special.sici(x)[0]
    ulp = np.abs(tails.sine_integral(x) - ref) / np.spacing(np.abs(ref))
    near = np.abs(x) <= 12.0
    assert float(np.max(ulp[near])) <= 3.0        # scipy's own error there (mpmath below)
    assert float(np.max(ulp[~near])) <= 8.0
    # the plan's range: half-bin offsets u = 2 pi a for accepted losses 0.1..3 dB
    from core.search.bins import _u_for_loss

    u = 2.0 * np.pi * np.asarray(_u_for_loss(np.linspace(0.1, 3.0, 300)))
    np.testing.assert_allclose(tails.sine_integral(u), special.sici(u)[0], rtol=7e-16, atol=0)
    assert float(tails.sine_integral(0.0)) == 0.0


def test_sine_integral_series_is_exactly_rounded():
    mpmath = pytest.importorskip("mpmath")
    mpmath.mp.dps = 40
    x = np.linspace(1e-3, 12.0, 700)
    exact = np.array([float(mpmath.si(mpmath.mpf(float(v)))) for v in x])
    np.testing.assert_array_equal(tails.sine_integral(x), exact)
    one_by_one = np.array([float(tails.sine_integral(v)) for v in x[::10]])
    np.testing.assert_array_equal(one_by_one, exact[::10])


# --------------------------------------------------------------------------- start-up

def test_plan_command_imports_neither_scipy_nor_skyfield_api():
    """The plan's start-up: scipy.special (array-API layer, numpy.f2py), skyfield.api
    (download machinery), importlib.metadata, numpy.ma and, for a single site, the drive's
    modules are not loaded by `acqplan plan`."""
    from conftest import REPO

    code = ("import sys; from planner_gui.cli import main\n"
            "rc = main(['plan', 'sample_almanacs/demo_scenario.toml', '-o', __import__('os').devnull])\n"
            "bad = sorted(m for m in sys.modules if m.split('.')[0] == 'scipy' "
            "or m in ('skyfield.api', 'skyfield.iokit', 'importlib.metadata', 'numpy.f2py', "
            "'numpy.ma', 'core.plan.drive', 'core.sky.route', 'geographiclib'))\n"
            "print(rc, bad)")
    out = subprocess.run([sys.executable, "-c", code], cwd=REPO, capture_output=True, text=True,
                         check=True).stdout.strip().splitlines()[-1]
    assert out == "0 []"

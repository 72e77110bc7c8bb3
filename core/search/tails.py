"""Chi-square tails of the square-law detector and the sine integral, in numpy.

The detector statistic has an even number of degrees of freedom (``2 N``, one complex
sample per coherent block), so every tail the plan needs is a sum of Poisson terms
[standard results; Abramowitz & Stegun 6.5.13, 26.4.21 and 26.4.25]:

* central: ``chi2.sf(2 t, 2 N) = P(Poisson(t) <= N - 1) = Q(N, t)`` (regularized upper
  incomplete gamma of integer order), and its complement ``P(N, t) = P(Poisson(t) >= N)``;
* non-central: ``ncx2.sf(2 t, 2 N, 2 mu) = sum_j Poisson(j; mu) Q(N + j, t)``;
* threshold: ``t`` with ``Q(N, t) = p`` (``chi2.isf(p, 2 N) / 2``), by safeguarded Newton.

They replace ``scipy.special`` in the plan, whose import costs a plan's start-up about
0.25 s (it pulls in scipy's array-API layer and, through it, ``numpy.f2py``); scipy stays
the reference of the tests. A Poisson term ``e^-t t^k / k!`` is evaluated in the saddle
point form ``exp(-bd0(k, t) - stirlerr(k)) / sqrt(2 pi k)`` [pub: C. Loader, "Fast and
accurate computation of binomial probabilities", 2000], so no large logarithms cancel; sums
of terms run from the largest term outwards (all terms positive) and each tail is
computed directly on the side where it is the smaller, its complement by subtraction.

Accuracy against scipy.special (``gammaincc``, ``gammainc``, ``gammainccinv``, the Boost
``ncx2`` survival function; tests/test_tails.py on dense grids over N = 1..1000,
Pfa 1e-15..0.9 and SNR -60..+60 dB, the range the plan uses and more), relative, on every
value >= 1e-300: central tails within 2e-12 (scipy's own error reaches 6e-13 there; these
are within 2e-13 of mpmath at those points), the non-central tail within 5e-13 (and 2e-13
absolute), the threshold within 1e-14. ``sine_integral`` is a double-double
power series for ``|x| <= 12`` (rounded once, so within half a unit in the last place of
the exact value) and the continued fraction of ``E1(i x)`` beyond.
"""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np

_LOG_2PI = math.log(2.0 * math.pi)

# stirlerr(k) = log k! - [(k + 1/2) log k - k + log(2 pi) / 2]: exact from lgamma below 10
# (small values, no cancellation worth the name), the Stirling series from 10 on, whose
# remainder after eight terms is below 2e-18 there [A&S 6.1.40].
_STIRLERR_SMALL = np.array([0.0] + [math.lgamma(k + 1.0) - (k + 0.5) * math.log(k) + k - 0.5 * _LOG_2PI
                                    for k in range(1, 10)])
_STIRLING = (1 / 12, -1 / 360, 1 / 1260, -1 / 1680, 1 / 1188, -691 / 360360, 1 / 156,
             -3617 / 122400)


def _stirlerr(k: np.ndarray) -> np.ndarray:
    k = np.asarray(k, dtype=float)
    big = k >= 10.0
    kk = np.where(big, k, 10.0)
    z = 1.0 / (kk * kk)
    s = 0.0
    for c in reversed(_STIRLING):
        s = s * z + c
    series = s / kk
    small = _STIRLERR_SMALL[np.clip(k, 0, 9).astype(np.int64)]
    return np.where(big, series, small)


def _bd0(k: np.ndarray, t: np.ndarray) -> np.ndarray:
    """``k log(k / t) + t - k`` (>= 0) for ``k > 0, t > 0``, without cancellation near
    ``k = t``: there ``v = (k - t) / (k + t)`` and ``bd0 = (k - t) v + 2 k sum v^(2j+1) /
    (2j + 1)``, ``|v| < 0.05`` (ten terms reach 1e-26)."""
    k, t = np.broadcast_arrays(np.asarray(k, dtype=float), np.asarray(t, dtype=float))
    d = k - t
    near = np.abs(d) < 0.1 * (k + t)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        far = k * np.log(k / t) + t - k
        v = d / (k + t)
        s = d * v
        ej = 2.0 * k * v
        v2 = v * v
        for j in range(1, 11):
            ej = ej * v2
            s = s + ej / (2 * j + 1)
    return np.where(near, s, far)


def _log_poisson_term(k: np.ndarray, t: np.ndarray) -> np.ndarray:
    """``log(e^-t t^k / k!)`` for whole ``k >= 0`` and ``t >= 0`` (``-inf`` where the term
    is 0: ``t = 0 < k``)."""
    k, t = np.broadcast_arrays(np.asarray(k, dtype=float), np.asarray(t, dtype=float))
    kk = np.where(k > 0, k, 1.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        inner = -_bd0(kk, np.where(t > 0, t, 1.0)) - _stirlerr(kk) - 0.5 * (_LOG_2PI + np.log(kk))
    out = np.where(k > 0, np.where(t > 0, inner, -np.inf), -t)
    return out


def _terms_needed_down(t: np.ndarray) -> int:
    # Walking down from k = n - 1 <= t, the ratio of term k-m to term k is at most
    # exp(-m (m + 1) / (2 t)): below 1e-18 (e^-41.5) once m >= 9.2 sqrt(t).
    return int(math.ceil(9.2 * math.sqrt(float(np.max(t, initial=0.0)))) + 2)


def _terms_needed_up(n: np.ndarray) -> int:
    # Walking up from k = n >= t, the ratio of term n+m to term n is at most
    # exp(-m^2 / (2 (n + m))): below 1e-18 once m^2 - 83 m - 83 n >= 0.
    nmax = float(np.max(n, initial=1.0))
    return int(math.ceil((83.0 + math.sqrt(83.0 * 83.0 + 332.0 * nmax)) / 2.0) + 2)


def _log_poisson_term_1(k: float, t: float) -> float:
    """:func:`_log_poisson_term` for one ``(k, t)``, with the math module."""
    if k <= 0:
        return -t
    if t <= 0:
        return -math.inf
    d = k - t
    if abs(d) < 0.1 * (k + t):
        v = d / (k + t)
        b = d * v
        ej = 2.0 * k * v
        v2 = v * v
        for j in range(1, 11):
            ej *= v2
            b += ej / (2 * j + 1)
    else:
        b = k * math.log(k / t) + t - k
    if k >= 10:
        z = 1.0 / (k * k)
        st = 0.0
        for c in reversed(_STIRLING):
            st = st * z + c
        st /= k
    else:
        st = float(_STIRLERR_SMALL[int(k)])
    return -b - st - 0.5 * (_LOG_2PI + math.log(k))


def _poisson_tails_1(n: float, t: float) -> tuple[float, float]:
    """:func:`poisson_tails` for one ``(n, t)``: the same sums, term by term."""
    if t >= n:
        k = n - 1.0
        lead = math.exp(_log_poisson_term_1(k, t))
        s = r = 1.0
        while k > 0:
            r *= k / t
            s += r
            k -= 1.0
            if r <= 1e-18 * s:
                break
        q = lead * s
        return q, 1.0 - q
    k = n
    lead = math.exp(_log_poisson_term_1(k, t))
    s = r = 1.0
    while True:
        k += 1.0
        r *= t / k
        s += r
        if r <= 1e-18 * s:
            break
    p = lead * s
    return 1.0 - p, p


def poisson_tails(n, t) -> tuple[np.ndarray, np.ndarray]:
    """``(Q, P)`` with ``Q = P(Poisson(t) <= n - 1) = chi2.sf(2 t, 2 n)`` and
    ``P = 1 - Q``, for whole ``n >= 1`` and ``t >= 0`` (arrays broadcast).

    Where ``t >= n`` the lower Poisson tail ``Q`` is summed downwards from ``k = n - 1``,
    else the upper tail ``P`` upwards from ``k = n``; the other one is its complement
    (then at least about 0.5, so both keep their relative accuracy)."""
    n, t = np.broadcast_arrays(np.asarray(n, dtype=float), np.asarray(t, dtype=float))
    shape = n.shape
    if n.size == 1:
        q1, p1 = _poisson_tails_1(float(n.flat[0]), float(t.flat[0]))
        return np.full(shape, q1), np.full(shape, p1)
    n, t = n.ravel(), t.ravel()
    lower = t >= n                       # Q is the small side: sum k = n-1, n-2, ..., 0
    q = np.zeros(n.shape)
    p = np.zeros(n.shape)
    if np.any(lower):
        nl, tl = n[lower], t[lower]
        m = min(int(np.max(nl)), _terms_needed_down(tl))
        steps = np.arange(1, m)         # term k-1 = term k * k / t, k = n-s for step s
        kk = np.maximum(nl[:, None] - steps[None, :], 0.0)
        ratios = kk / tl[:, None]
        s = 1.0 + np.sum(np.cumprod(ratios, axis=1), axis=1)
        ql = np.exp(_log_poisson_term(nl - 1.0, tl)) * s
        q[lower] = ql
        p[lower] = 1.0 - ql
    upper = ~lower                       # P is the small side: sum k = n, n+1, ...
    if np.any(upper):
        nu, tu = n[upper], t[upper]
        m = _terms_needed_up(nu)
        steps = np.arange(1, m)         # term k+1 = term k * t / (k + 1)
        ratios = tu[:, None] / (nu[:, None] + steps[None, :])
        s = 1.0 + np.sum(np.cumprod(ratios, axis=1), axis=1)
        pu = np.exp(_log_poisson_term(nu, tu)) * s
        p[upper] = pu
        q[upper] = 1.0 - pu
    return q.reshape(shape), p.reshape(shape)


def upper_gamma(n, t) -> np.ndarray:
    """``Q(n, t) = chi2.sf(2 t, 2 n)``: the false-alarm probability of threshold ``t`` with
    ``n`` non-coherent sums (whole ``n >= 1``, ``t >= 0``)."""
    return poisson_tails(n, t)[0]


def upper_gamma_inv(n, p) -> np.ndarray:
    """``t`` with ``Q(n, t) = p`` (``scipy.special.gammainccinv`` for whole ``n >= 1``,
    ``0 < p < 1``): Newton on ``log Q`` (or on ``log P`` where ``p > 1/2``), kept inside a
    bracket that bisection shrinks whenever a step would leave it."""
    n, p = np.broadcast_arrays(np.asarray(n, dtype=float), np.asarray(p, dtype=float))
    shape = n.shape
    if n.size == 1:
        return np.full(shape, _upper_gamma_inv_1(float(n.flat[0]), float(p.flat[0])))
    n, p = n.ravel(), p.ravel()
    small = p <= 0.5
    target = np.where(small, np.log(p), np.log1p(-p))
    lo = np.zeros(n.shape)
    hi = n + 2.0 * (-np.log(p)) + 2.0 * np.sqrt(n * -np.log(p)) + 5.0   # Q(n, hi) <= p ...
    for _ in range(60):                                                   # ... made sure of
        qh = upper_gamma(n, hi)
        grow = qh > p
        if not np.any(grow):
            break
        hi = np.where(grow, 2.0 * hi, hi)
    t = np.minimum(np.maximum(n - 1.0 / 3.0, 0.5), 0.5 * hi)    # near the median to start
    for _ in range(100):
        q, pc = poisson_tails(n, t)
        with np.errstate(divide="ignore", invalid="ignore"):
            g = np.where(small, np.log(q), np.log(pc)) - target   # decreasing / increasing in t
            dens = np.exp(_log_poisson_term(n - 1.0, t))           # -dQ/dt = dP/dt
            step = np.where(small, g * q / dens, -g * pc / dens)
        # g > 0 on the small side means Q(t) > p: the root is above t
        above = np.where(small, g > 0, g < 0)
        lo = np.where(above, t, lo)
        hi = np.where(above, hi, t)
        new = t + step
        bad = ~np.isfinite(new) | (new <= lo) | (new >= hi)
        new = np.where(bad, 0.5 * (lo + hi), new)
        exact = g == 0                   # t is the root itself: keep it (a bisection would leave it)
        new = np.where(exact, t, new)
        done = exact | (np.abs(new - t) <= 4e-16 * np.abs(new))
        t = new
        if np.all(done):
            break
    return t.reshape(shape)


def _upper_gamma_inv_1(n: float, p: float) -> float:
    """:func:`upper_gamma_inv` for one ``(n, p)``, the same iteration with floats."""
    small = p <= 0.5
    target = math.log(p) if small else math.log1p(-p)
    lo, hi = 0.0, n + 2.0 * (-math.log(p)) + 2.0 * math.sqrt(n * -math.log(p)) + 5.0
    for _ in range(60):
        if _poisson_tails_1(n, hi)[0] <= p:
            break
        hi *= 2.0
    t = min(max(n - 1.0 / 3.0, 0.5), 0.5 * hi)
    for _ in range(100):
        q, pc = _poisson_tails_1(n, t)
        side = q if small else pc
        if side <= 0.0:
            g = -math.inf
        else:
            g = math.log(side) - target
        if g == 0.0:
            return t
        dens = math.exp(_log_poisson_term_1(n - 1.0, t))
        above = g > 0 if small else g < 0
        if above:
            lo = t
        else:
            hi = t
        step = (g * q / dens if small else -g * pc / dens) if dens > 0 and math.isfinite(g) else math.nan
        new = t + step
        if not math.isfinite(new) or new <= lo or new >= hi:
            new = 0.5 * (lo + hi)
        if abs(new - t) <= 4e-16 * abs(new):
            return new
        t = new
    return t


@lru_cache(maxsize=64)
def _mixture_tables(n: float, t: float) -> tuple[np.ndarray, np.ndarray, int, int]:
    """For the non-central tail at one ``(n, t)``: ``Q(n + j, t)`` and ``P(n + j, t)`` for
    ``j = 0..L``, where ``P(n + L, t)`` is negligible (below 1e-18 of the largest term),
    and the last ``j`` at which ``P(n + j, t)`` is still above 1e-20."""
    q0 = float(upper_gamma(n, t))
    top = max(0.0, t - n) + 9.2 * math.sqrt(t + 1.0) + _terms_needed_up(np.array(max(n, t)))
    L = int(math.ceil(top))
    k = n + np.arange(L + 1, dtype=float)                # terms k = n .. n + L
    term = np.exp(_log_poisson_term(k, t))
    q = q0 + np.concatenate(([0.0], np.cumsum(term[:-1])))          # Q(n + j, t)
    p = np.cumsum(term[::-1])[::-1]                                   # P(n + j, t)
    last = int(np.max(np.flatnonzero(p >= 1e-20), initial=0))
    for a in (q, p):
        a.flags.writeable = False
    return q, p, L, last


_LOG_FACTORIAL = [0.0]


def _log_factorial(upto: int) -> np.ndarray:
    """``log j!`` for ``j = 0..upto`` (math.lgamma, kept and grown as needed)."""
    if len(_LOG_FACTORIAL) <= upto:
        _LOG_FACTORIAL.extend(math.lgamma(j + 1.0) for j in range(len(_LOG_FACTORIAL), upto + 1))
    return np.asarray(_LOG_FACTORIAL[:upto + 1])


_CHUNK = 512


def _mixture_sum(mu: np.ndarray, half: np.ndarray, table: np.ndarray, beyond: float,
                 top: int | None) -> np.ndarray:
    """``sum_j Poisson(j; mu) table[j]`` over ``|j - mu| <= half`` (``table[j] = beyond``
    past its end; ``j <= top`` when given), in sorted chunks of one matrix product each."""
    out = np.empty(mu.shape)
    order = np.argsort(mu, kind="stable")
    n_tab = table.size
    for c in range(0, mu.size, _CHUNK):
        rows = order[c:c + _CHUNK]
        m = mu[rows]
        lo = max(0, int(math.floor(m[0] - half[rows[0]])))
        hi = int(math.ceil(m[-1] + half[rows[-1]]))
        if top is not None:
            hi = min(hi, top)
        if hi < lo:
            out[rows] = 0.0
            continue
        # Poisson(j; mu) = exp(j log mu - mu - log j!): the three terms are at most a few
        # thousand, so the weights keep a relative accuracy of about 1e-13.
        w = np.multiply.outer(np.log(m), np.arange(lo, hi + 1, dtype=float))
        w -= m[:, None]
        w -= _log_factorial(hi)[None, lo:]
        np.exp(w, out=w)
        if hi < n_tab:
            tj = table[lo:hi + 1]
        else:
            tj = np.concatenate((table[lo:], np.full(hi + 1 - max(lo, n_tab), beyond)))
        out[rows] = w @ tj
    return out


def _noncentral_1(n: float, t: float, mu: float) -> float:
    """:func:`_noncentral_one` for one value, term by term with the math module."""
    q, p, L, last = _mixture_tables(n, t)
    if mu <= 0.0:
        return float(q[0])
    half = 10.0 * math.sqrt(mu) + 20.0
    low = mu + n <= t
    if not low and mu - half > last:
        return 1.0
    lo = max(0, int(math.floor(mu - half)))
    hi = int(math.ceil(mu + half))
    if not low:
        hi = min(hi, last)
    _log_factorial(hi)
    lf = _LOG_FACTORIAL
    tab = _table_list(n, t, low)
    lm = math.log(mu)
    s = 0.0
    for j in range(lo, hi + 1):
        s += math.exp(j * lm - mu - lf[j]) * (tab[j] if j <= L else 1.0)
    return min(max(s if low else 1.0 - s, 0.0), 1.0)


@lru_cache(maxsize=64)
def _table_list(n: float, t: float, low: bool) -> list[float]:
    q, p, _, _ = _mixture_tables(n, t)
    return (q if low else p).tolist()


def _noncentral_one(n: float, t: float, mu: np.ndarray) -> np.ndarray:
    q, p, L, last = _mixture_tables(n, t)
    out = np.empty(mu.shape)
    zero = mu <= 0.0
    out[zero] = q[0]
    half = 10.0 * np.sqrt(mu) + 20.0
    # Poisson(j; mu) is below 1e-20 of its mode once |j - mu| > half. Where the mean of
    # the statistic (2 n + 2 mu) is below the threshold (2 t), Pd is at most about 1/2:
    # the mixture of Q itself; above it, 1 - the mixture of P, which is below 1e-20 past
    # j = last (so where every weight up to there is negligible, Pd rounds to 1).
    low = ~zero & (mu + n <= t)
    high = ~zero & ~low
    sure = high & (mu - half > last)
    out[sure] = 1.0
    high &= ~sure
    if np.any(low):
        out[low] = _mixture_sum(mu[low], half[low], q, 1.0, None)
    if np.any(high):
        out[high] = 1.0 - _mixture_sum(mu[high], half[high], p, 0.0, last)
    return np.clip(out, 0.0, 1.0)


def noncentral_tail(n, t, mu) -> np.ndarray:
    """``ncx2.sf(2 t, 2 n, 2 mu)``: the detection probability of threshold ``t`` with ``n``
    non-coherent sums and non-centrality ``mu = n * snr`` (whole ``n >= 1``, ``t >= 0``,
    ``mu >= 0``; arrays broadcast).

    The Poisson mixture of central tails, ``sum_j Poisson(j; mu) Q(n + j, t)``, over the
    weights within ``10 sqrt(mu) + 20`` of ``mu`` (the rest is below 1e-20 of the largest);
    where the statistic's mean is above the threshold it is
    ``1 - sum_j Poisson(j; mu) P(n + j, t)``.
    ``Q(n + j, t)`` and ``P(n + j, t)`` are one table per distinct ``(n, t)`` (cached);
    the values of ``mu`` go in sorted chunks, each one matrix product over its own ``j``."""
    n, t, mu = np.broadcast_arrays(np.asarray(n, dtype=float), np.asarray(t, dtype=float),
                                   np.asarray(mu, dtype=float))
    shape = n.shape
    n, t, mu = n.ravel(), t.ravel(), mu.ravel()
    out = np.empty(n.shape)
    if n.size == 0:
        return out.reshape(shape)
    if n.size == 1:
        out[0] = _noncentral_1(float(n[0]), float(t[0]), float(mu[0]))
    elif np.all(n == n[0]) and np.all(t == t[0]):
        out[:] = _noncentral_one(float(n[0]), float(t[0]), mu)
    else:
        pairs, inverse = np.unique(np.stack([n, t], axis=1), axis=0, return_inverse=True)
        inverse = inverse.ravel()
        for i, (nn, tt) in enumerate(pairs):
            rows = inverse == i
            out[rows] = _noncentral_one(float(nn), float(tt), mu[rows])
    return out.reshape(shape)


# --------------------------------------------------------------------------- sine integral

def _two_sum(a, b):
    s = a + b
    bb = s - a
    return s, (a - (s - bb)) + (b - bb)


_SPLIT = 134217729.0   # 2^27 + 1 (Dekker)


def _two_prod(a, b):
    p = a * b
    ca = _SPLIT * a
    ah = ca - (ca - a)
    al = a - ah
    cb = _SPLIT * b
    bh = cb - (cb - b)
    bl = b - bh
    return p, ((ah * bh - p) + ah * bl + al * bh) + al * bl


def _dd_mul(ah, al, bh, bl):
    p, e = _two_prod(ah, bh)
    e = e + (ah * bl + al * bh)
    return _two_sum(p, e)


def _dd_add(ah, al, bh, bl):
    s, e = _two_sum(ah, bh)
    e = e + (al + bl)
    return _two_sum(s, e)


# Si(x) = x * sum_k c_k (x^2)^k, c_k = (-1)^k / ((2k + 1) (2k + 1)!), as double-double
# coefficients (exact rationals split in two doubles). Up to |x| = 12, 36 terms leave a
# remainder below 1e-27 and the largest term (about 1.7e3) costs 11 of the 106 bits.
_SI_SERIES_MAX = 12.0
_SI_TERMS = 36


def _dd_reciprocal(d: int) -> tuple[float, float]:
    """``1 / d`` for a whole ``d`` as a double-double: ``hi = a / b`` correctly rounded,
    then the exact remainder ``1/d - a/b = (b - a d) / (b d)`` rounded (integer ratios)."""
    hi = 1 / d
    a, b = hi.as_integer_ratio()
    return hi, (b - a * d) / (b * d)


_SI_COEF = []
for _k in range(_SI_TERMS):
    _hi, _lo = _dd_reciprocal((2 * _k + 1) * math.factorial(2 * _k + 1))
    _SI_COEF.append((_hi, _lo) if _k % 2 == 0 else (-_hi, -_lo))
del _k, _hi, _lo


def _si_series(x):
    """The series in double-double, rounded once (x a float or an array)."""
    zh, zl = _two_prod(x, x)
    sh, sl = _SI_COEF[-1]
    for ch, cl in reversed(_SI_COEF[:-1]):
        sh, sl = _dd_mul(sh, sl, zh, zl)
        sh, sl = _dd_add(sh, sl, ch, cl)
    rh, rl = _dd_mul(sh, sl, x, 0.0)
    return rh + rl


def _si_continued_fraction(x: np.ndarray) -> np.ndarray:
    # E1(z) = e^-z / (z + 1 - 1^2 / (z + 3 - 2^2 / (z + 5 - ...))) [A&S 5.1.22], z = i x,
    # modified Lentz; Si(x) = pi/2 + Im E1(i x) for x > 0 [A&S 5.2.21-23].
    z = 1j * x
    tiny = 1e-300
    b = z + 1.0
    f = np.where(b == 0, tiny, b)
    c = f
    d = np.zeros(x.shape, dtype=complex)
    for i in range(1, 400):
        a = -float(i * i)
        b = b + 2.0
        d = b + a * d
        d = np.where(d == 0, tiny, d)
        c = b + a / c
        c = np.where(c == 0, tiny, c)
        d = 1.0 / d
        delta = c * d
        f = f * delta
        if np.all(np.abs(delta - 1.0) < 1e-16):
            break
    e1 = np.exp(-z) / f
    return 0.5 * np.pi + e1.imag


def sine_integral(x) -> np.ndarray:
    """``Si(x) = integral_0^x sin(s) / s ds`` (odd in ``x``; the first value of
    ``scipy.special.sici``)."""
    x = np.asarray(x, dtype=float)
    a = np.abs(x)
    out = np.empty(a.shape)
    near = a <= _SI_SERIES_MAX
    if np.any(near):
        if np.count_nonzero(near) <= 8:     # a few values: Python floats are quicker
            out[near] = [_si_series(float(v)) for v in a[near]]
        else:
            out[near] = _si_series(a[near])
    if np.any(~near):
        out[~near] = _si_continued_fraction(a[~near])
    return np.where(x < 0, -out, out)

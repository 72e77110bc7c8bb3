"""Orbit states at node times, interpolated onto a dense time grid, with the error bound
that chooses the node spacing.

Smooth orbits (GNSS, 12-24 h periods) need not be propagated at every sample of a dense
grid: they are propagated at nodes ``h`` apart and interpolated with an N-node Lagrange
polynomial (N = NODES, even), each sample from the N nodes around its own node interval.
Position and velocity are each interpolated from the model's own node values (SGP4's
velocity is not exactly the time derivative of its position).

Error bound (per Cartesian component, Earth-fixed) [calc, derived below and checked
against direct propagation of every real TLE and almanac set in tests/test_node_interp.py]:

    |error| <= C_N h^N max|f^(N)|            Lagrange remainder, central interval,
                                             C_N = prod_k (k + 1/2)^2 / N!  (k < N/2)
    max|r^(N)| <= a [ 3e/2 w^N + sum_k beta_k (k n + w)^N ]        (Kepler orbit, a, e, n,
                                             seen from a frame turning at w: Earth-fixed)
    beta_k = [(k e/2)^(k-1)/(k-1)! + (k e/2)^(k+1)/(k+1)!] / k

The second line: the orbit-plane position a z(M), z = cos E - e + i sqrt(1-e^2) sin E,
has the Fourier coefficients c_0 = -3e/2 and |c_k| + |c_-k| = max(|A_k|, sqrt(1-e^2)|B_k|)
with A_k, B_k = (J_(k-1)(ke) -+ J_(k+1)(ke))/k [pub: the Bessel series of cos E and sin E,
e.g. Brouwer & Clemence, Methods of Celestial Mechanics, ch. II]; |J_m(x)| <= (x/2)^m/m!
[pub: Abramowitz & Stegun 9.1.62]; a rotation at rate w turns frequency k n into at most
k n + w (Leibniz rule with |d^j R/dt^j| <= w^j). Velocity takes the same bound with
order N + 1. The perturbations of SGP4 (J2 short-period terms, about 1e-4 a at twice the
orbital frequency at GNSS heights; lunar-solar terms with periods of days and more) add a
few per cent at most; the bound is doubled for them (PERTURBATION_FACTOR).

Other terms, for the models that need them: a slope jump J of the interpolated function
(SGP4's resonance integrator, core.orbits.sgp4_model) adds at most K1_N J h, a jump J2 of
its second derivative K2_N J2 h^2 (K1_N, K2_N: the largest error of interpolating a ramp
and a half parabola, a kink anywhere in the stencil, computed here); the model's own
rounding noise d adds at most (1 + Lambda_N) d (Lambda_N: the Lebesgue constant of the
central interval).

States are held component-first, (3, S, T) (x, y, z planes of satellite x time), so that
the geometry reads each component as one contiguous (S, T) plane.

On a uniform grid whose step divides the node spacing (m samples per node interval) the
nodes lie on one lattice anchored at the grid's first sample (``anchor_s``; blocks of
the same grid share it, so a grid processed in blocks gives what one block gives) and
the Lagrange weights repeat with period m: the interpolation is one small matrix product,
(.., intervals, N neighbours) @ (N, m), with no per-sample gather. Other grids gather the
N neighbours per sample, from nodes on multiples of the spacing.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from functools import cache, lru_cache

import numpy as np

# Nodes per interpolating polynomial (even: the sample's own interval in the middle).
NODES = 8
# The node spacing of orbits that set none (and the grid density test's reference).
NODE_STEP_S = 60.0
# Node spacings offered to an orbit, widest first; each orbit takes the widest whose bound
# meets the tolerances below (core.orbits.sgp4_model, core.sky.predict).
NODE_STEPS_S = (600.0, 300.0, 150.0, 60.0)
# Stated interpolation tolerances per Cartesian component: 2 cm is negligible against the
# planner's smallest position margins (metres for broadcast orbits, km for almanacs and
# TLEs); 1e-5 m/s is 5e-5 Hz of Doppler at L1 (lambda 0.19 m), 200x below the 0.01 Hz the
# Doppler agreement asks for.
POSITION_TOLERANCE_M = 0.02
VELOCITY_TOLERANCE_M_S = 1e-5
# Safety factor on the Kepler bound for the perturbations of the real models (see above).
PERTURBATION_FACTOR = 2.0

# propagate(unix_s (N,)) -> position (3, S, N) m, velocity (3, S, N) m/s, error codes (S, N)
PlanarPropagator = Callable[[np.ndarray], tuple[np.ndarray, np.ndarray, np.ndarray]]


def _weights(x: np.ndarray, n: int = NODES) -> np.ndarray:
    """Lagrange weights of nodes 0..n-1 at abscissa x (node units), shape (n, len(x))."""
    x = np.asarray(x, dtype=float)
    out = np.ones((n, x.size))
    for j in range(n):
        for i in range(n):
            if i != j:
                out[j] *= (x - i) / (j - i)
    return out


def remainder_constant(n: int = NODES) -> float:
    """C_N: max over the central interval of |prod_j (x - j)| / N! (at its midpoint)."""
    return math.prod((k + 0.5) ** 2 for k in range(n // 2)) / math.factorial(n)


@cache
def kink_constants(n: int = NODES) -> tuple[float, float, float]:
    """(K1, K2, Lambda): the largest interpolation error (node units) of a unit ramp
    max(x - s, 0) and of a half parabola max(x - s, 0)^2 / 2 over every kink position s in
    the stencil and every x of the central interval, and the Lebesgue constant there
    (largest sum of |weights|). Computed on a fine grid, with 2 % added for its spacing."""
    x = np.linspace(n / 2 - 1, n / 2, 201)
    w = _weights(x, n)                                            # (n, X)
    nodes = np.arange(n, dtype=float)
    s = np.linspace(0.0, n - 1.0, 1201)[:, None]                  # (S, 1)
    out = []
    for power, scale in ((1, 1.0), (2, 0.5)):
        f_nodes = scale * np.maximum(nodes[None, :] - s, 0.0) ** power      # (S, n)
        f_x = scale * np.maximum(x[None, :] - s, 0.0) ** power              # (S, X)
        out.append(float(np.max(np.abs(f_nodes @ w - f_x))) * 1.02)
    lebesgue = float(np.max(np.sum(np.abs(w), axis=0))) * 1.02
    return out[0], out[1], lebesgue


def kepler_derivative_bound(a_m, e, n_rad_s, order: int, w_rad_s: float, terms: int = 400):
    """Upper bound of |d^order r / dt^order| per component for Kepler orbits (a, e, mean
    motion n) seen from a frame turning at w (see the module docstring); arrays broadcast.
    Meant for e <= 0.5 (the series converges for e below about 0.73)."""
    a = np.asarray(a_m, dtype=float)[..., None]
    ecc = np.maximum(np.asarray(e, dtype=float), 1e-300)[..., None]
    n = np.asarray(n_rad_s, dtype=float)[..., None]
    w = np.asarray(w_rad_s, dtype=float)
    k = np.arange(1, terms + 1, dtype=float)
    log_fact = np.concatenate([[0.0], np.cumsum(np.log(np.arange(1, terms + 2)))])  # log m!
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):   # corrupt input: inf/nan
        x = np.log(k * ecc / 2.0)
        lo = (k - 1) * x - log_fact[(k - 1).astype(int)]
        hi = (k + 1) * x - log_fact[(k + 1).astype(int)]
        freq = np.log(k * n + w[..., None]) * order
        series = np.sum((np.exp(lo + freq) + np.exp(hi + freq)) / k, axis=-1)
        return a[..., 0] * (1.5 * ecc[..., 0] * w ** order + series)


def smooth_error_bounds(a_m, e, n_rad_s, h_s, w_rad_s: float, n_nodes: int = NODES
                        ) -> tuple[np.ndarray, np.ndarray]:
    """Bounds (position m, velocity m/s per component) of interpolating a Kepler orbit
    from nodes h apart, with PERTURBATION_FACTOR applied."""
    c = remainder_constant(n_nodes) * np.asarray(h_s, dtype=float) ** n_nodes * PERTURBATION_FACTOR
    return (c * kepler_derivative_bound(a_m, e, n_rad_s, n_nodes, w_rad_s),
            c * kepler_derivative_bound(a_m, e, n_rad_s, n_nodes + 1, w_rad_s))


def uniform_step_s(unix_s: np.ndarray) -> float | None:
    """The step of a uniform grid (to 1e-6 s), or None."""
    u = np.asarray(unix_s, dtype=float)
    if u.size < 2:
        return None
    d = np.diff(u)
    step = float(d[0])
    if step > 0 and float(np.max(np.abs(d - step))) <= 1e-6:
        return step
    return None


def samples_per_node(unix_s: np.ndarray, node_step_s: float = NODE_STEP_S) -> int:
    """m for the matrix path (uniform grid, m >= 2 samples per node interval), else 0."""
    step = uniform_step_s(unix_s)
    if step is None:
        return 0
    m = int(np.floor(node_step_s / step + 1e-9))
    return m if m >= 2 else 0


@lru_cache(maxsize=64)
def _periodic_weights(m: int) -> np.ndarray:
    """Weights of the m samples of a node interval (read-only, shared)."""
    w = _weights(NODES / 2 - 1 + np.arange(m) / m)
    w.setflags(write=False)
    return w


def _interp_periodic(node_vals: np.ndarray, m: int, first: int, n_t: int) -> np.ndarray:
    """node_vals (..., Q + N - 1): the nodes of Q intervals and their neighbours; samples
    m per interval, from the ``first`` sample of the first interval, n_t of them. Only the
    samples asked for are computed (a block may start or end inside an interval)."""
    q = node_vals.shape[-1] - (NODES - 1)
    w = _periodic_weights(m)                                      # (N, m)
    lead = node_vals.shape[:-1]
    rows = int(np.prod(lead))
    neigh = np.stack([node_vals[..., j:j + q] for j in range(NODES)], axis=-1)
    neigh = neigh.reshape(rows, q, NODES)                         # (rows, Q, N)
    out = np.empty((rows, n_t))
    end = first + n_t                                             # in samples of interval 0
    head = min(m, end)
    # Stacked small products, (rows, intervals, N) @ (N, columns): one large product would
    # go to the threaded BLAS, whose spinning threads then slow the geometry that follows
    # on a 2-core machine (measured: predict 3x slower at 1 s steps).
    c = np.ascontiguousarray
    out[:, :head - first] = (neigh[:, :1] @ c(w[:, first:head]))[:, 0]
    done = head - first
    if q > 2:
        body = neigh[:, 1:q - 1] @ w                              # (rows, Q - 2, m)
        out[:, done:done + (q - 2) * m] = body.reshape(rows, (q - 2) * m)
        done += (q - 2) * m
    if q > 1:
        out[:, done:] = (neigh[:, q - 1:] @ c(w[:, :n_t - done]))[:, 0]
    return out.reshape(*lead, n_t)


def _general_index(nodes_u: np.ndarray, unix_s: np.ndarray, h: float) -> tuple[np.ndarray, np.ndarray]:
    """First stencil node and abscissa (node units, in [N/2 - 1, N/2)) of every sample."""
    i = np.clip(np.floor((unix_s - nodes_u[0]) / h).astype(np.int64) - (NODES // 2 - 1),
                0, nodes_u.size - NODES)
    return i, (unix_s - nodes_u[i]) / h


def _interp_general(node_vals: np.ndarray, i: np.ndarray, x: np.ndarray) -> np.ndarray:
    w = _weights(x)
    out = node_vals[..., i] * w[0]
    for j in range(1, NODES):
        out += node_vals[..., i + j] * w[j]
    return out


def _node_request(u: np.ndarray, node_step_s: float, anchor_s: float | None):
    """The node times a grid needs and the function that interpolates the grid from the
    propagated nodes: ``finish(r, v, e) -> (ri, vi, err)`` (see :func:`interpolated_states`)."""
    n_t = u.size
    m = samples_per_node(u, node_step_s)
    half = NODES // 2 - 1
    if m:
        step = float(u[1] - u[0])
        anchor = float(u[0]) if anchor_s is None else float(anchor_s)
        k0f = (u[0] - anchor) / step
        k0 = int(round(k0f))
        if abs(k0f - k0) * step <= 1e-6:
            h = m * step
            j0, j1 = k0 // m, (k0 + n_t - 1) // m
            nodes = anchor + h * np.arange(j0 - half, j1 + NODES - half)
            first = k0 - j0 * m

            def periodic(r, v, e):
                j = (first + np.arange(n_t)) // m
                return _finish(_interp_periodic(r, m, first, n_t), _interp_periodic(v, m, first, n_t), e, j)
            return nodes, periodic
    h = float(node_step_s)
    n0 = (np.floor(u.min() / h) - half) * h
    nodes = n0 + h * np.arange(int(np.floor((u.max() - n0) / h)) + NODES - half)

    def general(r, v, e):
        j, x = _general_index(nodes, u, h)
        return _finish(_interp_general(r, j, x), _interp_general(v, j, x), e, j)
    return nodes, general


def _finish(ri: np.ndarray, vi: np.ndarray, e, j: np.ndarray):
    e = np.asarray(e)
    n_t = j.size
    if not e.any():                                       # the usual case: no node failed
        return ri, vi, np.zeros((e.shape[0], n_t), dtype=e.dtype)
    n_first = e.shape[1] - (NODES - 1)                    # stencils, by their first node
    err_stencil = np.maximum.reduce([e[:, q:q + n_first] for q in range(NODES)])
    err = err_stencil[:, j]
    bad = err != 0
    ri[:, bad] = np.nan
    vi[:, bad] = np.nan
    return ri, vi, err


def interpolated_states(propagate: PlanarPropagator, unix_s: np.ndarray,
                        node_step_s: float = NODE_STEP_S, anchor_s: float | None = None
                        ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """States (3, S, T) at ``unix_s`` from ``propagate`` called at nodes only, and error
    codes (S, T): a sample takes the largest code of its N nodes.

    ``anchor_s``: a time on the node lattice of a uniform grid (default its first sample);
    the blocks of one grid pass the grid's first sample, so they share one lattice.
    """
    nodes, finish = _node_request(np.asarray(unix_s, dtype=float), node_step_s, anchor_s)
    return finish(*propagate(nodes))


def grouped_states(propagate: Callable[[list[int], np.ndarray], tuple[np.ndarray, np.ndarray, np.ndarray]],
                   steps_s: list[float], unix_s: np.ndarray, anchor_s: float | None = None,
                   min_samples_per_node: float = 2.0
                   ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """States (3, S, T) and error codes (S, T) of S satellites, each interpolated from
    nodes ``steps_s[i]`` apart where the grid is dense enough for it, else propagated at
    every sample; ``propagate(indices, unix_s)`` gives the planes of a subset."""
    return grouped_states_many(propagate, [steps_s], [unix_s], [anchor_s], min_samples_per_node)[0]


def grouped_states_many(propagate: Callable[[list[int], np.ndarray], tuple[np.ndarray, np.ndarray, np.ndarray]],
                        steps_s: list[list[float]], grids: list[np.ndarray], anchors_s: list[float | None],
                        min_samples_per_node: float = 2.0
                        ) -> list[tuple[np.ndarray, np.ndarray, np.ndarray]]:
    """:func:`grouped_states` of several grids (each with its satellites' node spacings and
    its anchor) at once: the node times (or samples) every grid needs from one subset of
    satellites are propagated in one call, then each grid is interpolated from its own
    nodes. The models are evaluated time by time, so each grid gets exactly what
    :func:`grouped_states` gives it alone; the calls' fixed costs are paid once."""
    plans = []                 # per grid: (satellites, times, [(indices, finish or None)])
    batches: dict[tuple[int, ...], list[np.ndarray]] = {}
    for steps, grid, anchor in zip(steps_s, grids, anchors_s):
        u = np.asarray(grid, dtype=float)
        groups: dict[float, list[int]] = {}
        dense: dict[float, bool] = {0.0: False}
        for k, h in enumerate(steps):
            h = float(h)
            if h not in dense:
                dense[h] = is_dense(u, h, min_samples_per_node=min_samples_per_node)
            groups.setdefault(h if dense[h] else 0.0, []).append(k)
        parts = []
        for h, idx in groups.items():
            times, finish = (u, None) if not h else _node_request(u, h, anchor)
            batches.setdefault(tuple(idx), []).append(times)
            parts.append((idx, finish))
        plans.append((len(steps), u.size, parts))
    results: dict[tuple[int, ...], list] = {}
    for idx, times in batches.items():
        if len(times) == 1:
            results[idx] = [propagate(list(idx), times[0])]
            continue
        r, v, e = propagate(list(idx), np.concatenate(times))
        cuts = np.cumsum([t.size for t in times])[:-1]
        results[idx] = list(zip(np.split(r, cuts, axis=-1), np.split(v, cuts, axis=-1), np.split(e, cuts, axis=-1)))
    taken = {idx: 0 for idx in results}
    out = []
    for n_s, n_t, parts in plans:
        done = []
        for idx, finish in parts:
            key = tuple(idx)
            got = results[key][taken[key]]
            taken[key] += 1
            done.append((idx, got if finish is None else finish(*got)))
        if len(done) == 1:
            out.append(done[0][1])
            continue
        r_out = np.empty((3, n_s, n_t))
        v_out = np.empty((3, n_s, n_t))
        e_out = np.zeros((n_s, n_t), dtype=np.uint8)
        for idx, (r, v, e) in done:
            r_out[:, idx], v_out[:, idx], e_out[idx] = r, v, e
        out.append((r_out, v_out, e_out))
    return out


def widest_step_s(pos_bound_m: Callable[[float], tuple[float, float]]) -> float:
    """The widest spacing of NODE_STEPS_S whose bounds (position m, velocity m/s per
    component, from ``pos_bound_m(h)``) meet the tolerances, or 0.0 (no interpolation)."""
    for h in NODE_STEPS_S:
        pos, vel = pos_bound_m(h)
        if pos <= POSITION_TOLERANCE_M and vel <= VELOCITY_TOLERANCE_M_S:   # False for NaN
            return h
    return 0.0


def is_dense(unix_s: np.ndarray, node_step_s: float = NODE_STEP_S,
             min_samples_per_node: float = 4.0 / 3.0) -> bool:
    """Whether a grid is dense enough for node interpolation to pay."""
    u = np.asarray(unix_s, dtype=float)
    n_t = u.size
    if n_t < 2:
        return False
    span = float(u.max() - u.min())
    return span / max(n_t - 1, 1) < node_step_s / min_samples_per_node

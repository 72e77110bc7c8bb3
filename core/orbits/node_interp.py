"""Orbit states at node times, interpolated onto a dense time grid.

Smooth orbits (GNSS, 12-24 h periods) need not be propagated at every sample of a dense
grid: propagating at nodes at most NODE_STEP_S apart and interpolating with a cubic
(4-node) Lagrange polynomial gives the propagated states to about 1 cm and 1e-5 m/s
[checked against direct propagation in tests/test_geometry.py]. Position and velocity are
each interpolated from the model's own node values (SGP4's velocity is not exactly the
time derivative of its position).

States are held component-first, (3, S, T) (x, y, z planes of satellite x time), so that
the geometry reads each component as one contiguous (S, T) plane.

On a uniform grid whose step divides the node spacing (m samples per node interval, the
nodes aligned with the first sample) the Lagrange weights repeat with period m: the
interpolation is one small matrix product, (.., intervals, 4 neighbours) @ (4, m), with
no per-sample gather. Other grids gather the 4 neighbours per sample.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

NODE_STEP_S = 60.0

# propagate(unix_s (N,)) -> position (3, S, N) m, velocity (3, S, N) m/s, error codes (S, N)
PlanarPropagator = Callable[[np.ndarray], tuple[np.ndarray, np.ndarray, np.ndarray]]


def _weights(x: np.ndarray) -> np.ndarray:
    """Cubic Lagrange weights of nodes 0..3 at abscissa x (node units), shape (4, len(x))."""
    return np.stack([-(x - 1) * (x - 2) * (x - 3) / 6.0, x * (x - 2) * (x - 3) / 2.0,
                     -x * (x - 1) * (x - 3) / 2.0, x * (x - 1) * (x - 2) / 6.0])


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


def _interp_periodic(node_vals: np.ndarray, m: int, n_t: int) -> np.ndarray:
    """node_vals (..., Q + 3) at nodes t0 - h + h j; samples t0 + k h / m, k < n_t."""
    q = node_vals.shape[-1] - 3
    w = _weights(1.0 + np.arange(m) / m)                        # (4, m)
    neigh = np.stack([node_vals[..., j:j + q] for j in range(4)], axis=-1)   # (..., Q, 4)
    out = neigh @ w                                               # (..., Q, m)
    return out.reshape(*node_vals.shape[:-1], q * m)[..., :n_t]


def _interp_general(nodes_u: np.ndarray, node_vals: np.ndarray, unix_s: np.ndarray) -> np.ndarray:
    h = nodes_u[1] - nodes_u[0]
    n = nodes_u.size
    i = np.clip(((unix_s - nodes_u[0]) // h).astype(np.int64) - 1, 0, n - 4)
    x = (unix_s - nodes_u[i]) / h                                 # in [1, 2) inside
    w = _weights(x)
    out = node_vals[..., i] * w[0]
    for j in range(1, 4):
        out += node_vals[..., i + j] * w[j]
    return out


def interpolated_states(propagate: PlanarPropagator, unix_s: np.ndarray,
                        node_step_s: float = NODE_STEP_S
                        ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """States (3, S, T) at ``unix_s`` from ``propagate`` called at nodes only, and error
    codes (S, T): a sample takes the largest code of its 4 nodes."""
    u = np.asarray(unix_s, dtype=float)
    n_t = u.size
    m = samples_per_node(u, node_step_s)
    if m:
        step = float(u[1] - u[0])
        h = m * step
        q = int(np.ceil(n_t / m))
        nodes = u[0] + h * (np.arange(q + 3) - 1.0)
        r, v, e = propagate(nodes)
        ri = _interp_periodic(r, m, n_t)
        vi = _interp_periodic(v, m, n_t)
        j = np.arange(n_t) // m
    else:
        n0 = (np.floor(u.min() / node_step_s) - 1) * node_step_s
        nodes = n0 + node_step_s * np.arange(int(np.ceil((u.max() - n0) / node_step_s)) + 3)
        r, v, e = propagate(nodes)
        ri = _interp_general(nodes, r, u)
        vi = _interp_general(nodes, v, u)
        j = np.clip(((u - nodes[0]) // node_step_s).astype(np.int64) - 1, 0, nodes.size - 4)
    err = np.maximum.reduce([e[:, j], e[:, j + 1], e[:, j + 2], e[:, j + 3]])
    bad = err != 0
    if bad.any():
        ri[:, bad] = np.nan
        vi[:, bad] = np.nan
    return ri, vi, err


def is_dense(unix_s: np.ndarray, node_step_s: float = NODE_STEP_S,
             min_samples_per_node: float = 4.0 / 3.0) -> bool:
    """Whether a grid is dense enough for node interpolation to pay."""
    u = np.asarray(unix_s, dtype=float)
    n_t = u.size
    if n_t < 2:
        return False
    span = float(u.max() - u.min())
    return span / max(n_t - 1, 1) < node_step_s / min_samples_per_node

"""GLONASS broadcast ephemeris: the state at tb integrated to the wanted time, vectorized.

Equations of motion in the Earth-fixed PZ-90 frame [mem: GLONASS ICD edition 5.1 (2008),
Appendix A.3.1.2]: central attraction, the second zonal harmonic J2, the centrifugal and
Coriolis terms of the rotating frame, and the broadcast luni-solar acceleration held
constant over the record::

    dv/dt = -mu r / |r|^3 - 3/2 J2 mu ae^2 / |r|^5 * (x (1 - 5 z^2/r^2), y (1 - 5 z^2/r^2),
            z (3 - 5 z^2/r^2)) + w^2 (x, y, 0) + 2 w (vy, -vx, 0) + a_ls

integrated with the classical 4th-order Runge-Kutta scheme, every sample with its own
step (|t - tb| split into the same number of steps of at most ``MAX_STEP_S``).
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from ..ground.constants import (
    GLONASS_EARTH_RADIUS_M,
    GLONASS_EARTH_ROTATION_RAD_S,
    GLONASS_J2,
    GLONASS_MU_M3_S2,
)

# The ICD suggests steps of a few tens of seconds; 60 s keeps the RK4 error below 1 mm over
# 15 minutes (tests/test_broadcast.py halves the step to check it).
MAX_STEP_S = 60.0


def _derivative(state: np.ndarray, acc: np.ndarray) -> np.ndarray:
    """d/dt of (x, y, z, vx, vy, vz), (N, 6)."""
    x, y, z = state[:, 0], state[:, 1], state[:, 2]
    vx, vy = state[:, 3], state[:, 4]
    r2 = x * x + y * y + z * z
    r = np.sqrt(r2)
    r3 = r2 * r
    a = 1.5 * GLONASS_J2 * GLONASS_MU_M3_S2 * GLONASS_EARTH_RADIUS_M ** 2 / (r2 * r3)
    b = 5.0 * z * z / r2
    c = -GLONASS_MU_M3_S2 / r3 - a * (1.0 - b)
    w = GLONASS_EARTH_ROTATION_RAD_S
    out = np.empty_like(state)
    out[:, :3] = state[:, 3:]
    out[:, 3] = (c + w * w) * x + 2.0 * w * vy + acc[:, 0]
    out[:, 4] = (c + w * w) * y - 2.0 * w * vx + acc[:, 1]
    out[:, 5] = (c - 2.0 * a) * z + acc[:, 2]
    return out


def glonass_ecef(pos0_m: np.ndarray, vel0_m_s: np.ndarray, acc_m_s2: np.ndarray,
                 dt_s: np.ndarray, max_step_s: float = MAX_STEP_S
                 ) -> tuple[np.ndarray, np.ndarray]:
    """Position (m) and velocity (m/s), (N, 3), of N records' states (N, 3) after ``dt_s``
    (N,) seconds (negative: backwards)."""
    dt = np.asarray(dt_s, dtype=float)
    state = np.concatenate((np.asarray(pos0_m, float), np.asarray(vel0_m_s, float)), axis=1)
    acc = np.asarray(acc_m_s2, dtype=float)
    if dt.size == 0:
        return state[:, :3].copy(), state[:, 3:].copy()
    n_steps = max(1, math.ceil(float(np.max(np.abs(dt))) / max_step_s))
    h = (dt / n_steps)[:, None]
    for _ in range(n_steps):
        k1 = _derivative(state, acc)
        k2 = _derivative(state + 0.5 * h * k1, acc)
        k3 = _derivative(state + 0.5 * h * k2, acc)
        k4 = _derivative(state + h * k3, acc)
        state = state + h / 6.0 * (k1 + 2.0 * k2 + 2.0 * k3 + k4)
    return state[:, :3], state[:, 3:]


def screen_glonass(records: Sequence, tolerance_m: float = 5_000.0,
                   window_s: float = 3_600.0) -> tuple[list, list[str]]:
    """Drop GLONASS records whose state contradicts the satellite's other records.

    As :func:`core.orbits.ephemeris_model.screen_records`: at a record's tb, the median of
    the satellite's other records within ``window_s`` (integrated to that tb; health
    ignored), given at least two of them, must lie within ``tolerance_m`` of the record's
    own position; otherwise it is dropped with a message."""
    recs = list(records)
    if not recs:
        return [], []
    sat = np.array([r.sat_id for r in recs])
    tb = np.array([r.toe_gps_s for r in recs])
    # All (record j, neighbour i) pairs of one satellite within the window, integrated at once.
    jj, ii = np.nonzero((sat[:, None] == sat[None, :]) & (np.abs(tb[:, None] - tb[None, :])
                                                           <= window_s))
    keep_pair = jj != ii
    jj, ii = jj[keep_pair], ii[keep_pair]
    p0 = np.array([recs[i].pos_m for i in ii]).reshape(-1, 3)
    v0 = np.array([recs[i].vel_m_s for i in ii]).reshape(-1, 3)
    a0 = np.array([recs[i].acc_m_s2 for i in ii]).reshape(-1, 3)
    p, _ = glonass_ecef(p0, v0, a0, tb[jj] - tb[ii])
    own = np.array([r.pos_m for r in recs])
    dropped: set[int] = set()
    messages: list[str] = []
    for j in np.unique(jj):
        m = jj == j
        if m.sum() < 2:
            continue
        off = float(np.linalg.norm(np.median(p[m], axis=0) - own[j]))
        if off > tolerance_m:
            dropped.add(int(j))
            r = recs[j]
            messages.append(f"{r.sat_id} record at line {r.line} is {off / 1000:.0f} km from "
                            "the satellite's neighbouring records: dropped")
    return [r for k, r in enumerate(recs) if k not in dropped], messages

"""What the record says per satellite and epoch: measured Doppler, C/N0, first appearance.

* Doppler: the record's D field where the satellite has one; otherwise the carrier-phase
  rate between consecutive epochs, ``D = -(L(k) - L(k-1)) / (t(k) - t(k-1))`` in cycles
  per second = Hz on that carrier [pub: RINEX 2.11 / 3.03: phase in cycles, Doppler
  positive for approaching satellites], standing for the mean Doppler over the interval.
  The rate is broken (NaN) where the later epoch has loss of lock (LLI bit 0), after a
  power failure (epoch flag 1), across a gap longer than 2.5 record intervals, and at a
  jump: where the phase rate departs from the pseudorange rate, after removing the part
  common to all satellites at that epoch (receiver clock steps), by more than
  :data:`JUMP_HZ`.
* C/N0: the S field of the same signal (dB-Hz; RINEX 2 files whose S values do not look
  like dB-Hz are not used, with a warning).
* first appearance: the first epoch with any observation of the satellite on that band.

Arrays are (S, E) over the record's satellites and epochs. Column k of a phase-rate
Doppler is the interval (k-1, k].
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field

import numpy as np

from ..ground.constants import SPEED_OF_LIGHT_M_S
from ..ground.signals import SIGNALS
from .record import Record


def nan_median(a: np.ndarray, axis: int) -> np.ndarray:
    """Median ignoring NaN; NaN (no warning) where a slice holds no value."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        return np.nanmedian(a, axis=axis)

# Largest phase-rate minus pseudorange-rate difference (after the epoch's common part)
# kept as continuous tracking. Pseudorange noise of 0.3-3 m over 30 s gives 0.01-0.2 Hz
# [trade: code noise of geodetic and handheld receivers]; 5 Hz over 30 s is a 150-cycle
# phase jump. Smaller slips stay in the data and show as residuals against the plan.
JUMP_HZ = 5.0

# Longest gap (in record intervals) across which the phase is taken as continuous.
MAX_GAP_INTERVALS = 2.5

# RINEX band digits and code attributes per planned signal, best first
# [pub: RINEX 3.03 Table 4-8; RINEX 2.11 codes L1/L2/L5 without attribute].
SIGNAL_BANDS: dict[str, tuple[tuple[str, ...], tuple[str, ...]]] = {
    "GPS-L1CA": (("1",), ("C", "")),
    "GPS-L5": (("5",), ("Q", "X", "I", "")),
    "GAL-E1": (("1",), ("C", "X", "B", "")),
    "GAL-E5A": (("5",), ("Q", "X", "I", "")),
    "BDS-B1I": (("2", "1"), ("I", "X", "Q", "")),
    "BDS-B1C": (("1",), ("P", "X", "D")),
    "GLO-L1OF": (("1",), ("C", "")),
    "QZS-L1CA": (("1",), ("C", "")),
}


@dataclass
class Measurements:
    """Per satellite of the record: measured Doppler, C/N0 and first appearance."""

    sat_ids: list[str]
    epochs_unix_s: np.ndarray          # (E,)
    doppler_hz: np.ndarray             # (S, E) NaN where none
    from_phase: np.ndarray             # (S,) True: phase rate, False: D field
    cn0_dbhz: np.ndarray               # (S, E)
    observed: np.ndarray               # (S, E) any observation on the band
    first_seen_unix_s: np.ndarray      # (S,) NaN when never
    codes: dict[str, tuple[str, str, str]]   # sat -> (Doppler code or 'L..' rate, C/N0 code, signal)
    breaks: np.ndarray                 # (S,) phase breaks (LLI, power failure, gap, jump)
    jumps: np.ndarray                  # (S,) of which jumps found against the pseudorange
    warnings: list[str] = field(default_factory=list)

    def index(self, sat_id: str) -> int:
        return self.sat_ids.index(sat_id)

    def sample_times_unix_s(self) -> np.ndarray:
        """(S, E) time each Doppler value stands for: the epoch (D field) or the middle
        of the interval before it (phase rate)."""
        t = self.epochs_unix_s
        mid = np.concatenate(([t[0]], 0.5 * (t[1:] + t[:-1])))
        return np.where(self.from_phase[:, None], mid[None, :], t[None, :])


def band_carrier_hz(signal_id: str, glonass_k: int | None = None) -> float:
    sig = SIGNALS[signal_id]
    return sig.carrier_for(glonass_k)


def pick_code(record: Record, system: str, kind: str, signal_id: str) -> str | None:
    """The record's code of one kind ('L', 'D', 'S', 'C') for a planned signal."""
    if kind in record.obs:               # NMEA: 'S' is the GSV C/N0 of any signal
        return kind
    bands, attrs = SIGNAL_BANDS[signal_id]
    listed = record.codes_for(system)
    for band in bands:
        for attr in attrs:
            code = f"{kind}{band}{attr}"
            if code in listed and code in record.obs:
                return code
        for code in listed:              # any other attribute on that band
            if code[:2] == f"{kind}{band}" and code in record.obs:
                return code
    if kind == "C":                      # RINEX 2: P1 when there is no C1
        for band in bands:
            if f"P{band}" in listed and f"P{band}" in record.obs:
                return f"P{band}"
    return None


def measure(record: Record, signal_for_system: dict[str, str],
            glonass_k: dict[str, int] | None = None) -> Measurements:
    """Measured Doppler, C/N0 and first appearance of every satellite whose system has a
    planned signal (``{"G": "GPS-L1CA", ...}``). ``glonass_k``: frequency channels known
    from elsewhere (the plan's orbits); the record's own header table comes first."""
    k_of = {**(glonass_k or {}), **record.glonass_k}
    t = record.epochs_unix_s
    n_e = t.size
    rows = [s for s, sid in enumerate(record.sat_ids) if sid[0] in signal_for_system]
    ids = [record.sat_ids[s] for s in rows]
    n_s = len(rows)
    dop = np.full((n_s, n_e), np.nan)
    cn0 = np.full((n_s, n_e), np.nan)
    observed = np.zeros((n_s, n_e), dtype=bool)
    from_phase = np.zeros(n_s, dtype=bool)
    breaks = np.zeros(n_s, dtype=int)
    jumps = np.zeros(n_s, dtype=int)
    codes: dict[str, tuple[str, str, str]] = {}
    notes: list[str] = []
    dt = np.diff(t)
    interval = record.interval_s or (float(np.median(dt)) if dt.size else 1.0)
    gap_ok = dt <= MAX_GAP_INTERVALS * interval
    power = record.power_failure if record.power_failure is not None else np.zeros(n_e, bool)
    code_rate_parts = []                 # (row, Dphi - Drho) for the jump test
    for system, signal_id in signal_for_system.items():
        sys_rows = [i for i, sid in enumerate(ids) if sid[0] == system]
        if not sys_rows:
            continue
        rec_rows = np.array([rows[i] for i in sys_rows])
        out = np.array(sys_rows)
        c_d = pick_code(record, system, "D", signal_id)
        c_l = pick_code(record, system, "L", signal_id)
        c_s = pick_code(record, system, "S", signal_id)
        c_c = pick_code(record, system, "C", signal_id)
        for c in (c_d, c_l, c_s, c_c):
            if c is not None:
                observed[out] |= np.isfinite(record.obs[c][rec_rows])
        if c_s is not None:
            s_val = record.obs[c_s][rec_rows]
            if record.format.startswith("RINEX 2") and np.isfinite(s_val).any() and \
                    not 15.0 <= float(np.nanmedian(s_val)) <= 70.0:
                notes.append(f"{system}: {c_s} values (median {np.nanmedian(s_val):.1f}) do not "
                                "look like C/N0 in dB-Hz: not used")
            else:
                cn0[out] = np.where((s_val > 0) & (s_val < 100), s_val, np.nan)
        d_val = record.obs[c_d][rec_rows] if c_d is not None else np.full((len(out), n_e), np.nan)
        has_d = np.isfinite(d_val).any(axis=1)
        dop[out[has_d]] = d_val[has_d]
        if c_l is None or has_d.all():
            for i in out:
                codes[ids[i]] = (c_d or "", c_s or "", signal_id)
            continue
        need = ~has_d
        r_rows, o_rows = rec_rows[need], out[need]
        phase = record.obs[c_l][r_rows]
        rate = np.full(phase.shape, np.nan)
        if n_e > 1:
            rate[:, 1:] = -(phase[:, 1:] - phase[:, :-1]) / dt[None, :]
            lli = record.lli.get(c_l)
            broken = np.zeros(phase.shape, dtype=bool)
            if lli is not None:
                flags = lli[r_rows]
                broken |= (flags >= 0) & (flags & 1 == 1)
            broken[:, 1:] |= ~gap_ok[None, :]
            broken |= power[None, :]
            valid_before = np.isfinite(rate)
            rate[broken] = np.nan
            breaks[o_rows] += (valid_before & broken).sum(axis=1)
            if c_c is not None:
                ks = [k_of.get(ids[i]) for i in o_rows]
                lam = np.array([SPEED_OF_LIGHT_M_S / band_carrier_hz(signal_id, k) for k in ks])
                rng = record.obs[c_c][r_rows]
                code_rate = np.full(phase.shape, np.nan)
                code_rate[:, 1:] = -(rng[:, 1:] - rng[:, :-1]) / (lam[:, None] * dt[None, :])
                # GLONASS with an unknown channel: the k = 0 wavelength is off by up to
                # 7 x 0.5625 / 1602 = 0.25 % of the Doppler [calc: GLONASS ICD 5.1 carriers]
                slack = np.array([0.0025 if (system == "R" and k is None) else 0.0 for k in ks])
                code_rate_parts.append((o_rows, rate - code_rate, slack[:, None] * np.abs(rate)))
        dop[o_rows] = rate
        from_phase[o_rows] = True
        for i, dop_code in zip(out, np.where(has_d, c_d or "", f"{c_l} rate")):
            codes[ids[i]] = (str(dop_code), c_s or "", signal_id)
    if code_rate_parts:
        q = np.full((n_s, n_e), np.nan)
        allowed = np.full((n_s, n_e), JUMP_HZ)
        for o_rows, diff, slack in code_rate_parts:
            q[o_rows] = diff
            allowed[o_rows] += np.nan_to_num(slack)
        common = np.nan_to_num(nan_median(q, axis=0))
        jump = np.abs(q - common[None, :]) > allowed
        jumps += jump.sum(axis=1)
        breaks += jump.sum(axis=1)
        dop[jump] = np.nan
    first = np.full(n_s, np.nan)
    seen = observed.any(axis=1)
    first[seen] = t[np.argmax(observed[seen], axis=1)]
    return Measurements(ids, t, dop, from_phase, cn0, observed, first, codes, breaks, jumps,
                        notes)

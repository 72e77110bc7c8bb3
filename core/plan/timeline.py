"""Channel timeline of a cold-start search and the time to first fix (TTFF).

The receiver has ``n_channels`` search/track channels. Over a test window it works through
the satellites above the elevation mask; this module simulates that, event by event, in
continuous time. It takes arrays only (no orbits): the visibility grid, a priority and the
search-cost figures per (satellite, time).

The process
-----------
* At the window start every channel is free. Whenever channels are free (window start, a
  channel finishing, a satellite rising) the free channels, lowest number first, each take
  the waiting satellite of highest priority at that instant (ties: the order of
  ``sat_ids``). A satellite is *waiting* while it is above the mask and on no channel.
* A search costs the "first" figures while no satellite has yet been acquired at the
  instant the search starts, and the "after" figures from then on (the first acquisition
  calibrates the receiver oscillator, which shrinks the frequency window). The cost of a
  search is fixed when it starts: a search already running when another channel acquires
  keeps its cost.
* A search that would end at or after its satellite's set time is abandoned at the set time
  (kind ``'search'``, not acquired) and the channel is free again. Otherwise the satellite
  is acquired at the end of the search and tracked until it sets or the window ends; then
  the channel is free. A satellite that rises again later in the window joins the queue
  again and is searched afresh.
* Nothing starts at or after the window end; segments running then are cut there.

Per-(satellite, time) quantities at an instant ``t`` are the grid value at the last grid
time at or before ``t``; where that value is not finite (typically below the mask, just
before a refined rise time) the next grid value is used. A satellite whose search figures
are still not finite is not searched at that instant and stays waiting (one warning).
Priority that is not finite ranks lowest.

Rise and set times
------------------
From the grid: a pass starts at the first grid time where ``visible`` is True and ends
(``set``) at the first later grid time where it is False; a satellite still up at the last
grid time does not set within the window. Refined pass times ``set_unix_s[sat_id] =
[(rise, set), ...]`` replace the grid passes of the satellites they name.

First fix
---------
A tracked satellite becomes *usable* ``ephemeris_wait_s`` after its acquisition and stays
usable until its track ends by setting: usable over ``[acq + wait, set)``. The first fix is
the earliest instant, not after the window end, at which at least ``first_fix_satellites``
satellites are usable at the same time. That instant is always one of the ``acq + wait``
values: it is the k-th smallest ``acq + wait`` among the satellites still tracked then
(a satellite that set before that moment does not count). ``ttff_s`` is the first-fix time
minus the window start.

Monte Carlo
-----------
:func:`monte_carlo_ttff` repeats the same process with each search's duration drawn from
the exact distribution of a serial search (see :func:`serial_search_time_samples`), once
per run, from ``numpy.random.default_rng(seed)``. The "expected" timeline
(:func:`expected_timeline`) uses mean search times; its TTFF is one path through the
process with mean durations, not the mean TTFF.
"""

from __future__ import annotations

import bisect
import heapq
import math
import weakref
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..ground.arrays import unique_values
from ..ground.errors import Cancelled, InputError
from ..ground.timeutil import iso_z

SEARCH = "search"
TRACK = "track"

# Why a segment ended.
END_ACQUIRED = "acquired"        # search found the satellite
END_SET = "set"                  # the satellite went below the mask
END_WINDOW = "window_end"        # the test window ended

_RISE_EVENT = 0
_FREE_EVENT = 1


# --------------------------------------------------------------------------- inputs


def _as_grid_array(value: Any, shape: tuple[int, int], name: str, *, dtype=float,
                   allow_scalar: bool = False) -> np.ndarray | float:
    """``value`` as a read-only (S, T) array, or a float if scalars are allowed. A copy,
    unless ``value`` already is a read-only array of that dtype whose memory nothing can
    write to (:func:`_read_only`): then it is kept as it is."""
    if isinstance(value, np.ndarray) and value.dtype == np.dtype(dtype) and _read_only(value):
        arr = value
    else:
        arr = np.array(value, dtype=dtype)
    if arr.ndim == 0:
        if allow_scalar:
            return float(arr)
        raise InputError(f"must be an array of shape {shape}, got a scalar", field=name)
    if arr.shape != shape:
        raise InputError(f"has shape {arr.shape}, expected (satellites, times) = {shape}",
                         field=name)
    arr.setflags(write=False)
    return arr


def _read_only(arr: np.ndarray) -> bool:
    """True when neither ``arr`` nor any array it views is writeable and the chain ends
    in an array that owns its memory (so no other name can change the values)."""
    a: Any = arr
    while isinstance(a, np.ndarray):
        if a.flags.writeable:
            return False
        if a.base is None:
            return True
        a = a.base
    return False


def _check_range(value: np.ndarray | float, name: str, lo: float, hi: float,
                 lo_open: bool = False) -> None:
    arr = np.asarray(value, dtype=float)
    # Two reductions of the grid when every value is in range (a NaN makes them NaN,
    # which compares False; an infinite value out of range is looked at below, where
    # non-finite values are skipped).
    if arr.size:
        mn, mx = float(np.min(arr)), float(np.max(arr))
        if (mn > lo if lo_open else mn >= lo) and mx <= hi:
            return
    fin = arr[np.isfinite(arr)]
    if fin.size == 0:
        return
    bad_lo = fin <= lo if lo_open else fin < lo
    bad = bad_lo | (fin > hi)
    if np.any(bad):
        first = float(fin[bad][0])
        lo_txt = f"> {lo:g}" if lo_open else f">= {lo:g}"
        raise InputError(f"value {first:g} is out of range (must be {lo_txt} and <= {hi:g})",
                         field=name)


def _check_positions(value: np.ndarray | None, name: str) -> None:
    if value is None:
        return
    if value.dtype.kind in "iu":
        if value.size == 0 or np.min(value) >= 1:
            return
        raise InputError("search positions must be whole numbers >= 1", field=name)
    if value.size == 0 or (np.min(value) >= 1 and np.all(np.floor(value) == value)):
        return                                             # NaN fails: checked below
    fin = value[np.isfinite(value)]
    if fin.size and (np.any(fin < 1) or np.any(fin != np.round(fin))):
        raise InputError("search positions must be whole numbers >= 1", field=name)


def _normalise_passes(passes: Sequence[tuple[float, float]], sat_id: str, t0: float,
                      t_end: float) -> list[tuple[float, float]]:
    """Clip refined (rise, set) pairs to the window, merge touching ones; set>t_end -> inf."""
    clean: list[tuple[float, float]] = []
    for item in passes:
        try:
            rise, set_ = (float(item[0]), float(item[1]))
        except (TypeError, ValueError, IndexError):
            raise InputError(f"pass {item!r} of {sat_id} is not a (rise, set) pair of "
                             "POSIX seconds", field="set_unix_s") from None
        if math.isnan(rise) or math.isnan(set_) or set_ < rise:
            raise InputError(f"pass ({rise}, {set_}) of {sat_id} is not a rise before a set",
                             field="set_unix_s")
        rise = max(rise, t0)
        if set_ <= rise or rise >= t_end:
            continue
        clean.append((rise, set_ if set_ <= t_end else math.inf))
    clean.sort()
    merged: list[tuple[float, float]] = []
    for rise, set_ in clean:
        if merged and rise <= merged[-1][1]:
            merged[-1] = (merged[-1][0], max(merged[-1][1], set_))
        else:
            merged.append((rise, set_))
    return merged


@dataclass(frozen=True, eq=False)
class TimelineInputs:
    """Everything the channel simulation needs, as arrays over (satellite, grid time).

    Shapes: ``times_unix_s`` (T,), strictly increasing UTC POSIX seconds (the window runs
    from its first to its last value); per-satellite arrays (S, T) in the order of
    ``sat_ids``. ``expected_search_*_s`` are mean search times (s); non-finite values mean
    "cannot be searched at that time". The Monte Carlo figures (``q_*`` serial search
    positions, ``pd_*`` detection probability at the signal position, ``pfa_position``
    false-alarm probability per other position, ``dwell_s`` per position, ``penalty_s`` per
    false alarm) are needed only by the Monte Carlo functions. ``set_unix_s`` optionally
    gives refined passes ``{sat_id: [(rise_unix_s, set_unix_s), ...]}`` that replace the
    grid passes of the satellites named.
    """

    times_unix_s: np.ndarray
    sat_ids: tuple[str, ...]
    visible: np.ndarray
    priority: np.ndarray
    expected_search_first_s: np.ndarray
    expected_search_after_s: np.ndarray
    n_channels: int
    first_fix_satellites: int
    ephemeris_wait_s: float
    q_first: np.ndarray | None = None
    q_after: np.ndarray | None = None
    pd_first: np.ndarray | None = None
    pd_after: np.ndarray | None = None
    pfa_position: np.ndarray | float | None = None
    pfa_position_after: np.ndarray | float | None = None   # default: pfa_position
    dwell_s: np.ndarray | float | None = None
    penalty_s: float = 0.0
    set_unix_s: Mapping[str, Sequence[tuple[float, float]]] | None = None
    _passes: tuple[tuple[tuple[float, float], ...], ...] = field(
        init=False, repr=False, default=())

    def __post_init__(self) -> None:
        put = object.__setattr__
        times = np.array(self.times_unix_s, dtype=float)
        if times.ndim != 1 or times.size < 2:
            raise InputError("needs a 1-D grid of at least 2 times", field="times_unix_s")
        if not np.all(np.isfinite(times)) or np.any(np.diff(times) <= 0):
            raise InputError("times must be finite and strictly increasing",
                             field="times_unix_s")
        times.setflags(write=False)
        put(self, "times_unix_s", times)

        ids = tuple(str(s) for s in self.sat_ids)
        if len(set(ids)) != len(ids):
            raise InputError("satellite IDs must be unique", field="sat_ids")
        put(self, "sat_ids", ids)
        shape = (len(ids), times.size)

        vis = np.asarray(self.visible)
        if vis.dtype != bool:
            raise InputError(f"must be a boolean array, got {vis.dtype}", field="visible")
        put(self, "visible", _as_grid_array(vis, shape, "visible", dtype=bool))
        put(self, "priority", _as_grid_array(self.priority, shape, "priority"))
        for name in ("expected_search_first_s", "expected_search_after_s"):
            arr = _as_grid_array(getattr(self, name), shape, name)
            _check_range(arr, name, 0.0, math.inf)
            put(self, name, arr)
        for name in ("q_first", "q_after", "pd_first", "pd_after"):
            value = getattr(self, name)
            if value is not None:
                # whole positions given as integers stay integers (no float copy)
                whole = name[0] == "q" and isinstance(value, np.ndarray) and value.dtype.kind in "iu"
                put(self, name, _as_grid_array(value, shape, name,
                                               dtype=np.int64 if whole else float))
        # (an "after" figure that is the very array of the "first" one is checked once)
        _check_positions(self.q_first, "q_first")
        if self.q_after is not self.q_first:
            _check_positions(self.q_after, "q_after")
        for name in ("pd_first", "pd_after"):
            if getattr(self, name) is not None and not (name == "pd_after"
                                                        and self.pd_after is self.pd_first):
                _check_range(getattr(self, name), name, 0.0, 1.0)
        if self.pfa_position is not None:
            pfa = _as_grid_array(self.pfa_position, shape, "pfa_position", allow_scalar=True)
            _check_range(pfa, "pfa_position", 0.0, 1.0)
            put(self, "pfa_position", pfa)
        after_pfa = self.pfa_position_after
        if after_pfa is not None and not (isinstance(after_pfa, np.ndarray)
                                          and after_pfa is self.pfa_position):
            pfa = _as_grid_array(self.pfa_position_after, shape, "pfa_position_after",
                                 allow_scalar=True)
            _check_range(pfa, "pfa_position_after", 0.0, 1.0)
            put(self, "pfa_position_after", pfa)
        if self.dwell_s is not None:
            dwell = _as_grid_array(self.dwell_s, shape, "dwell_s", allow_scalar=True)
            _check_range(dwell, "dwell_s", 0.0, math.inf, lo_open=True)
            put(self, "dwell_s", dwell)
        penalty = float(self.penalty_s)
        if not (math.isfinite(penalty) and penalty >= 0):
            raise InputError(f"penalty {penalty} s must be finite and >= 0", field="penalty_s")
        put(self, "penalty_s", penalty)

        if int(self.n_channels) != self.n_channels or self.n_channels < 1:
            raise InputError(f"{self.n_channels} channels: need a whole number >= 1",
                             field="n_channels")
        put(self, "n_channels", int(self.n_channels))
        if int(self.first_fix_satellites) != self.first_fix_satellites or \
                self.first_fix_satellites < 1:
            raise InputError(f"{self.first_fix_satellites}: need a whole number >= 1",
                             field="first_fix_satellites")
        put(self, "first_fix_satellites", int(self.first_fix_satellites))
        wait = float(self.ephemeris_wait_s)
        if not (math.isfinite(wait) and wait >= 0):
            raise InputError(f"{wait} s must be finite and >= 0", field="ephemeris_wait_s")
        put(self, "ephemeris_wait_s", wait)

        put(self, "_passes", self._build_passes())

    def with_after_figures(self, expected_search_after_s: np.ndarray,
                           q_after: np.ndarray | None = None,
                           pfa_position_after: np.ndarray | float | None = None,
                           pd_after: np.ndarray | None = None) -> TimelineInputs:
        """The same inputs with other figures for the searches after the first
        acquisition (each checked as the constructor checks it; None keeps the current
        one). The rest, checked already, and the passes are taken as they are, and so is
        the search order (it depends on the priority only)."""
        new = object.__new__(TimelineInputs)
        new.__dict__.update({k: v for k, v in self.__dict__.items() if k != "_derived"})
        put = object.__setattr__
        shape = self.visible.shape
        arr = _as_grid_array(expected_search_after_s, shape, "expected_search_after_s")
        _check_range(arr, "expected_search_after_s", 0.0, math.inf)
        put(new, "expected_search_after_s", arr)
        if q_after is not None:
            whole = isinstance(q_after, np.ndarray) and q_after.dtype.kind in "iu"
            q = _as_grid_array(q_after, shape, "q_after", dtype=np.int64 if whole else float)
            _check_positions(q, "q_after")
            put(new, "q_after", q)
        if pd_after is not None:
            pd = _as_grid_array(pd_after, shape, "pd_after")
            _check_range(pd, "pd_after", 0.0, 1.0)
            put(new, "pd_after", pd)
        if pfa_position_after is not None:
            pfa = _as_grid_array(pfa_position_after, shape, "pfa_position_after",
                                 allow_scalar=True)
            _check_range(pfa, "pfa_position_after", 0.0, 1.0)
            put(new, "pfa_position_after", pfa)
        derived = self.__dict__.get("_derived", {})
        new.__dict__["_derived"] = {k: derived[k] for k in ("times_list", "rank_orders")
                                    if k in derived}
        return new

    def _build_passes(self) -> tuple[tuple[tuple[float, float], ...], ...]:
        """(rise, set) per satellite; set = inf when still up at the window end."""
        times = self.times_unix_s
        t0, t_end = float(times[0]), float(times[-1])
        n_sat, n_t = self.visible.shape
        grid: list[list[tuple[float, float]]] = [[] for _ in range(n_sat)]
        refined = self.set_unix_s or {}
        index = {sid: i for i, sid in enumerate(self.sat_ids)}
        for sid in refined:
            if sid not in index:
                raise InputError(f"refined passes given for unknown satellite {sid}",
                                 field="set_unix_s")
        # Grid passes of the satellites the refined passes do not name.
        rows = np.array([i for i, sid in enumerate(self.sat_ids) if sid not in refined],
                        dtype=np.int64)
        if rows.size:
            padded = np.zeros((rows.size, n_t + 2), dtype=np.int8)
            padded[:, 1:-1] = self.visible[rows]
            step = np.diff(padded, axis=1)                 # (rows, T+1)
            rise_r, rise_k = np.nonzero(step == 1)         # first True sample index
            _, set_k = np.nonzero(step == -1)              # first False sample index (T = none)
            # np.nonzero scans row-major, so the k-th rise and the k-th set are one pass.
            rise_t = times[rise_k]
            set_t = np.where(set_k < n_t, times[np.minimum(set_k, n_t - 1)], math.inf)
            for r_i, r, st in zip(rise_r.tolist(), rise_t.tolist(), set_t.tolist()):
                if r < t_end:
                    grid[int(rows[r_i])].append((r, st))
        for sid, passes in refined.items():
            grid[index[sid]] = _normalise_passes(passes, sid, t0, t_end)
        return tuple(tuple(p) for p in grid)

    @property
    def passes_unix_s(self) -> dict[str, list[tuple[float, float]]]:
        """Passes used by the simulation: ``{sat_id: [(rise, set), ...]}``, set = inf if the
        satellite is still up at the window end."""
        return {sid: list(p) for sid, p in zip(self.sat_ids, self._passes)}

    @property
    def start_unix_s(self) -> float:
        return float(self.times_unix_s[0])

    @property
    def end_unix_s(self) -> float:
        return float(self.times_unix_s[-1])


# --------------------------------------------------------------------------- outputs


@dataclass(frozen=True)
class TimelineSegment:
    """One stretch of one channel's work on one satellite.

    ``acquired`` is True for a search that found its satellite and for every track.
    ``end_reason`` is 'acquired', 'set' or 'window_end'; ``search_state`` is 'first' or
    'after' for searches (which cost applied) and '' for tracks.
    """

    channel: int            # 1-based
    sat_id: str
    kind: str               # 'search' | 'track'
    start_unix_s: float
    end_unix_s: float
    acquired: bool
    end_reason: str = ""
    search_state: str = ""

    @property
    def duration_s(self) -> float:
        return self.end_unix_s - self.start_unix_s

    def to_dict(self) -> dict[str, Any]:
        return {
            "channel": self.channel,
            "sat_id": self.sat_id,
            "kind": self.kind,
            "start": iso_z(self.start_unix_s),
            "end": iso_z(self.end_unix_s),
            "duration_s": self.duration_s,
            "acquired": self.acquired,
            "end_reason": self.end_reason,
            "search_state": self.search_state,
        }


@dataclass(frozen=True)
class Timeline:
    """Result of one simulated window.

    ``acquisition_unix_s`` holds each satellite's first acquisition in the window.
    """

    segments: list[TimelineSegment]
    acquisition_unix_s: dict[str, float]
    first_fix_unix_s: float | None
    ttff_s: float | None
    warnings: list[str]
    window_start_unix_s: float = math.nan
    window_end_unix_s: float = math.nan
    n_channels: int = 0

    def channel_segments(self, channel: int) -> list[TimelineSegment]:
        return [seg for seg in self.segments if seg.channel == channel]

    def to_dict(self) -> dict[str, Any]:
        return {
            "window_start": iso_z(self.window_start_unix_s),
            "window_end": iso_z(self.window_end_unix_s),
            "n_channels": self.n_channels,
            "segments": [seg.to_dict() for seg in self.segments],
            "acquisition": {sid: iso_z(t) for sid, t in self.acquisition_unix_s.items()},
            "first_fix": None if self.first_fix_unix_s is None else iso_z(self.first_fix_unix_s),
            "ttff_s": self.ttff_s,
            "warnings": list(self.warnings),
        }


@dataclass(frozen=True)
class TtffStats:
    """TTFF over Monte Carlo runs.

    ``samples_s`` holds one TTFF per run in run order, ``inf`` for a run with no fix in the
    window. ``median_s``, ``p95_s`` and ``mean_s`` are taken over ALL runs with those
    ``inf`` values included (a run that does not fix in the window has a TTFF beyond it):
    the median is ``inf`` when half the runs or more fail, the 95th percentile when more
    than 5 % fail, the mean when any fails. Quantiles are empirical (the ceil(p n)-th
    smallest sample, no interpolation). ``mean_fixed_s`` is the mean over the runs that did
    fix (None if none did).
    """

    median_s: float
    p95_s: float
    mean_s: float
    n_runs: int
    n_no_fix: int
    samples_s: np.ndarray
    mean_fixed_s: float | None = None
    warnings: tuple[str, ...] = ()

    @property
    def fix_fraction(self) -> float:
        return (self.n_runs - self.n_no_fix) / self.n_runs

    def to_dict(self) -> dict[str, Any]:
        """Plain numbers; statistics that are infinite (beyond the window) become None."""
        def fin(x: float | None) -> float | None:
            return None if x is None or not math.isfinite(x) else float(x)

        return {
            "median_s": fin(self.median_s),
            "p95_s": fin(self.p95_s),
            "mean_s": fin(self.mean_s),
            "mean_fixed_s": fin(self.mean_fixed_s),
            "n_runs": self.n_runs,
            "n_no_fix": self.n_no_fix,
            "warnings": list(self.warnings),
        }


# --------------------------------------------------------------------------- first fix


def first_fix_time_unix_s(acquisition_unix_s: Sequence[float] | np.ndarray,
                          track_end_unix_s: Sequence[float] | np.ndarray,
                          ephemeris_wait_s: float, first_fix_satellites: int,
                          window_end_unix_s: float = math.inf) -> float | None:
    """Earliest instant with ``first_fix_satellites`` satellites usable at once, or None.

    Track i makes its satellite usable over ``[acquisition_i + wait, track_end_i)``; give
    ``inf`` as the end of a track that lasts to (past) the window end. The instant must not
    be after ``window_end_unix_s``.
    """
    a = np.asarray(acquisition_unix_s, dtype=float)
    e = np.asarray(track_end_unix_s, dtype=float)
    if a.shape != e.shape or a.ndim != 1:
        raise InputError("acquisition and track-end times must be 1-D arrays of one length")
    if a.size < first_fix_satellites:
        return None
    ready = a + ephemeris_wait_s
    # usable_count[i] = number of tracks usable at instant ready[i]
    usable = (ready[None, :] <= ready[:, None]) & (ready[:, None] < e[None, :])
    count = usable.sum(axis=1)
    ok = (count >= first_fix_satellites) & (ready <= window_end_unix_s)
    if not np.any(ok):
        return None
    return float(ready[ok].min())


# --------------------------------------------------------------------------- serial search


def serial_search_time_samples(q: Any, pd: Any, pfa: Any, dwell_s: Any, penalty_s: Any,
                               rng: np.random.Generator,
                               size: int | tuple[int, ...] | None = None) -> np.ndarray:
    """Draw serial-search times (s) from their exact distribution.

    Model: ``q`` search positions (cells) visited cyclically from position 0, the signal
    at position J uniform on 0..q-1. Each visit costs ``dwell_s``. At the signal position
    the signal is detected with probability ``pd``, otherwise the search goes round again;
    at every other position a false alarm happens with probability ``pfa`` and costs
    ``penalty_s`` more (the search then goes on). The search ends at the detecting dwell.

    Exact distribution: signal visits up to detection M ~ Geometric(pd) on {1, 2, ...};
    other positions visited N = J + (M - 1)(q - 1) (J before the first signal visit, q - 1
    per further round); false alarms F | N ~ Binomial(N, pfa). Time = dwell (M + N) +
    penalty F. Its mean is the Polydoros-Weber mean serial-search time
    [2 + (2 - pd)(q - 1)(1 + K pfa)] / (2 pd) * dwell with K = penalty / dwell.
    ``pd == 0`` gives ``inf`` (never detected). Parameters broadcast against each other
    and ``size``.
    """
    q_a, pd_a, pfa_a, dwell_a, pen_a = (np.asarray(x, dtype=float)
                                        for x in (q, pd, pfa, dwell_s, penalty_s))
    if size is None:
        shape = np.broadcast_shapes(q_a.shape, pd_a.shape, pfa_a.shape, dwell_a.shape,
                                    pen_a.shape)
    else:
        shape = (size,) if isinstance(size, int | np.integer) else tuple(size)
    try:
        q_a, pd_a, pfa_a, dwell_a, pen_a = (np.broadcast_to(x, shape)
                                            for x in (q_a, pd_a, pfa_a, dwell_a, pen_a))
    except ValueError:
        raise InputError(f"search parameters do not broadcast to shape {shape}") from None
    if not (np.all(np.isfinite(q_a)) and np.all(q_a >= 1) and np.all(q_a == np.round(q_a))):
        raise InputError("search positions must be whole numbers >= 1", field="q")
    for arr, name in ((pd_a, "pd"), (pfa_a, "pfa")):
        if not np.all((arr >= 0) & (arr <= 1)):
            raise InputError("probabilities must lie in [0, 1]", field=name)
    if not np.all(np.isfinite(dwell_a) & (dwell_a > 0)):
        raise InputError("dwell must be finite and > 0", field="dwell_s")
    if not np.all(np.isfinite(pen_a) & (pen_a >= 0)):
        raise InputError("false-alarm penalty must be finite and >= 0", field="penalty_s")

    q_i = q_a.astype(np.int64)
    detects = pd_a > 0
    m = rng.geometric(np.where(detects, pd_a, 1.0), size=shape)           # signal visits
    j = rng.integers(0, q_i, size=shape)                                  # signal position
    n = j + (m - 1) * (q_i - 1)                                           # other visits
    f = rng.binomial(n, pfa_a, size=shape)                                # false alarms
    t = dwell_a * (m + n) + pen_a * f
    return np.where(detects, t, np.inf)


def _draw_search_time_s(q: int, pd: float, pfa: float, dwell_s: float, penalty_s: float,
                        rng: np.random.Generator) -> float:
    """One draw of :func:`serial_search_time_samples` (same distribution, scalar fast path)."""
    if pd <= 0.0:
        return math.inf
    m = int(rng.geometric(pd))
    n = int(rng.integers(q)) + (m - 1) * (q - 1)
    f = int(rng.binomial(n, pfa)) if (pfa > 0.0 and n > 0) else 0
    return dwell_s * (m + n) + penalty_s * f


# --------------------------------------------------------------------------- simulation


# duration(sat_index, grid_index, after) -> seconds, or None when it cannot be searched now
DurationFn = Callable[[int, int, bool], float | None]


@dataclass
class _Run:
    """One simulated run of the timeline: segments, tracks, acquisitions and first fix."""

    segments: list[TimelineSegment]
    tracks: list[tuple[int, float, float]]      # (sat, acquisition, usable-until)
    acquisition: dict[int, float]
    first_fix_unix_s: float | None
    unsearchable: dict[int, float]              # sat -> first instant it could not be searched


def _lookup(arr: np.ndarray | float, s: int, k: int, n_t: int) -> float:
    """Grid value at index k (at or before t), or the next one when that is not finite."""
    if not isinstance(arr, np.ndarray):
        return float(arr)
    v = float(arr[s, k])
    if not math.isfinite(v) and k + 1 < n_t:
        v = float(arr[s, k + 1])
    return v


def _cached(inp: TimelineInputs, name: str, make: Callable[[], Any]) -> Any:
    """A value derived from the (frozen) inputs, computed once and kept on them."""
    cache = inp.__dict__.setdefault("_derived", {})
    if name not in cache:
        cache[name] = make()
    return cache[name]


def _rank_order(inp: TimelineInputs, k: int) -> list[int]:
    """All satellites in search order at grid index k: highest priority first, ties by
    index, non-finite priorities last (the priority looked up as :func:`_lookup` does).
    The same for every run: one stable argsort of column k, cached on the inputs (a
    timeline asks for a few hundred of the grid's columns at most)."""
    orders = _cached(inp, "rank_orders", dict)
    order = orders.get(k)
    if order is None:
        pr = inp.priority[:, k]
        bad = ~np.isfinite(pr)
        if bad.any() and k + 1 < inp.priority.shape[1]:
            pr = np.where(bad, inp.priority[:, k + 1], pr)
        key = np.where(np.isfinite(pr), -pr, np.inf)
        order = orders[k] = np.argsort(key, kind="stable").tolist()
    return order


def _simulate(inp: TimelineInputs, duration: DurationFn, record: bool,
              stop_at_fix: bool) -> _Run:
    times_list = _cached(inp, "times_list", inp.times_unix_s.tolist)
    t_end = times_list[-1]
    passes = inp._passes
    wait = inp.ephemeris_wait_s
    k_fix = inp.first_fix_satellites

    heap: list[tuple[float, int, int, int, int]] = []
    seq = 0
    for s, plist in enumerate(passes):
        for p, (rise, _set) in enumerate(plist):
            heap.append((rise, _RISE_EVENT, seq, s, p))
            seq += 1
    heapq.heapify(heap)

    free: list[int] = list(range(inp.n_channels))   # 0-based, kept sorted
    waiting: dict[int, int] = {}                    # sat -> pass index
    first_acq = math.inf
    segments: list[TimelineSegment] = []
    tracks: list[tuple[int, float, float]] = []
    acquisition: dict[int, float] = {}
    unsearchable: dict[int, float] = {}
    fix: float | None = None

    def push_free(when: float, channel: int) -> None:
        nonlocal seq
        if when < t_end:
            heapq.heappush(heap, (when, _FREE_EVENT, seq, channel, 0))
            seq += 1

    while heap and heap[0][0] < t_end:
        t = heap[0][0]
        while heap and heap[0][0] == t:
            _, kind, _, a, b = heapq.heappop(heap)
            if kind == _RISE_EVENT:
                waiting[a] = b
            else:
                bisect.insort(free, a)
        # satellites that have set while waiting leave the queue
        for s in [s for s, p in waiting.items() if passes[s][p][1] <= t]:
            del waiting[s]
        if not free or not waiting:
            continue
        k = bisect.bisect_right(times_list, t) - 1
        after = first_acq <= t
        for s in _rank_order(inp, k):          # waiting satellites in rank order
            if not free:
                break
            if s not in waiting:
                continue
            d = duration(s, k, after)
            if d is None:
                unsearchable.setdefault(s, t)
                continue
            channel = free.pop(0)
            set_t = passes[s][waiting.pop(s)][1]
            end = t + d
            state = "after" if after else "first"
            sid = inp.sat_ids[s]
            if end < set_t and end <= t_end:
                first_acq = min(first_acq, end)
                acquisition.setdefault(s, end)
                tracks.append((s, end, set_t))
                track_end = min(set_t, t_end)
                if record:
                    segments.append(TimelineSegment(channel + 1, sid, SEARCH, t, end, True,
                                                    END_ACQUIRED, state))
                    if track_end > end:
                        reason = END_SET if set_t <= t_end else END_WINDOW
                        segments.append(TimelineSegment(channel + 1, sid, TRACK, end,
                                                        track_end, True, reason))
                push_free(track_end, channel)
            else:
                stop = set_t if set_t <= t_end else t_end
                if record:
                    reason = END_SET if set_t <= t_end else END_WINDOW
                    segments.append(TimelineSegment(channel + 1, sid, SEARCH, t, stop, False,
                                                    reason, state))
                push_free(stop, channel)
        if stop_at_fix and len(tracks) >= k_fix:
            fix = _fix_of(tracks, wait, k_fix, t_end)
            # every later acquisition is at or after t, so it cannot bring an earlier fix
            if fix is not None and fix <= t + wait:
                return _Run(segments, tracks, acquisition, fix, unsearchable)

    fix = _fix_of(tracks, wait, k_fix, t_end)
    return _Run(segments, tracks, acquisition, fix, unsearchable)


def _fix_of(tracks: list[tuple[int, float, float]], wait: float, k_fix: int,
            t_end: float) -> float | None:
    if len(tracks) < k_fix:
        return None
    acq = [a for _, a, _ in tracks]
    usable_until = [e for _, _, e in tracks]
    return first_fix_time_unix_s(acq, usable_until, wait, k_fix, t_end)


def _input_warnings(inp: TimelineInputs) -> list[str]:
    notes = []
    if not any(inp._passes):
        notes.append("no satellite is above the elevation mask during the window")
    if inp.n_channels < inp.first_fix_satellites:
        notes.append(f"{inp.n_channels} channels cannot track the {inp.first_fix_satellites} "
                     "satellites a first fix needs at once: no fix is possible")
    n_up = sum(1 for p in inp._passes if p)
    if 0 < n_up < inp.first_fix_satellites:
        notes.append(f"only {n_up} satellites rise above the mask in the window; a first fix "
                     f"needs {inp.first_fix_satellites}")
    return notes


def _unsearchable_warnings(inp: TimelineInputs, unsearchable: Mapping[int, float]) -> list[str]:
    return [f"{inp.sat_ids[s]}: search figures are not finite at {iso_z(t)}; "
            "it was left waiting" for s, t in sorted(unsearchable.items())]


def _to_timeline(inp: TimelineInputs, run: _Run) -> Timeline:
    t0 = inp.start_unix_s
    notes = _input_warnings(inp) + _unsearchable_warnings(inp, run.unsearchable)
    if run.first_fix_unix_s is None and not notes:
        notes.append(f"no first fix within the window: fewer than {inp.first_fix_satellites} "
                     f"satellites were usable at once ({inp.ephemeris_wait_s:g} s after "
                     "acquisition)")
    segments = sorted(run.segments, key=lambda g: (g.start_unix_s, g.channel, g.kind == TRACK))
    return Timeline(
        segments=segments,
        acquisition_unix_s={inp.sat_ids[s]: t for s, t in sorted(run.acquisition.items(),
                                                                 key=lambda x: x[1])},
        first_fix_unix_s=run.first_fix_unix_s,
        ttff_s=None if run.first_fix_unix_s is None else run.first_fix_unix_s - t0,
        warnings=notes,
        window_start_unix_s=t0,
        window_end_unix_s=inp.end_unix_s,
        n_channels=inp.n_channels,
    )


def _expected_duration(inp: TimelineInputs) -> DurationFn:
    first, later = inp.expected_search_first_s, inp.expected_search_after_s
    n_t = inp.times_unix_s.size

    def duration(s: int, k: int, after: bool) -> float | None:
        d = _lookup(later if after else first, s, k, n_t)
        return d if math.isfinite(d) else None

    return duration


def _drawn_duration(inp: TimelineInputs, rng: np.random.Generator) -> DurationFn:
    missing = [name for name in ("q_first", "q_after", "pd_first", "pd_after",
                                 "pfa_position", "dwell_s") if getattr(inp, name) is None]
    if missing:
        raise InputError(f"the Monte Carlo needs {', '.join(missing)}", field=missing[0])
    n_t = inp.times_unix_s.size
    penalty = inp.penalty_s
    # The search figures at (satellite, grid index, state) are the same in every run.
    figures: dict[tuple[int, int, bool], tuple[int, float, float, float] | None] = \
        _cached(inp, "search_figures", dict)

    def duration(s: int, k: int, after: bool) -> float | None:
        key = (s, k, after)
        fig = figures.get(key, False)
        if fig is False:
            q = _lookup(inp.q_after if after else inp.q_first, s, k, n_t)
            pd = _lookup(inp.pd_after if after else inp.pd_first, s, k, n_t)
            pfa_arr = inp.pfa_position_after if (after and inp.pfa_position_after is not None) \
                else inp.pfa_position
            pfa = _lookup(pfa_arr, s, k, n_t)
            dwell = _lookup(inp.dwell_s, s, k, n_t)
            ok = (math.isfinite(q) and math.isfinite(pd) and math.isfinite(pfa)
                  and math.isfinite(dwell))
            fig = figures[key] = (int(q), pd, pfa, dwell) if ok else None
        if fig is None:
            return None
        return _draw_search_time_s(fig[0], fig[1], fig[2], fig[3], penalty, rng)

    return duration


def expected_timeline(inputs: TimelineInputs) -> Timeline:
    """The channel timeline with every search lasting its expected (mean) time."""
    return _to_timeline(inputs, _simulate(inputs, _expected_duration(inputs), record=True,
                                          stop_at_fix=False))


def sample_timeline(inputs: TimelineInputs, seed: int | np.random.Generator) -> Timeline:
    """One Monte Carlo realization of the timeline (search times drawn, see module doc)."""
    rng = np.random.default_rng(seed)
    return _to_timeline(inputs, _simulate(inputs, _drawn_duration(inputs, rng), record=True,
                                          stop_at_fix=False))


def _empirical_quantile(sorted_samples: np.ndarray, p: float) -> float:
    n = sorted_samples.size
    idx = min(max(math.ceil(p * n) - 1, 0), n - 1)
    return float(sorted_samples[idx])


def _stats(inputs: TimelineInputs, samples: np.ndarray, unsearchable: Mapping[int, float]
           ) -> TtffStats:
    samples.setflags(write=False)
    ordered = np.sort(samples)
    fixed = samples[np.isfinite(samples)]
    n_runs = samples.size
    n_no_fix = n_runs - fixed.size
    notes = tuple(_input_warnings(inputs) + _unsearchable_warnings(inputs, unsearchable))
    return TtffStats(
        median_s=_empirical_quantile(ordered, 0.5),
        p95_s=_empirical_quantile(ordered, 0.95),
        mean_s=float(samples.mean()) if n_no_fix == 0 else math.inf,
        n_runs=n_runs,
        n_no_fix=int(n_no_fix),
        samples_s=samples,
        mean_fixed_s=float(fixed.mean()) if fixed.size else None,
        warnings=notes,
    )


def _check_runs(n_runs) -> int:
    if int(n_runs) != n_runs or n_runs < 1:
        raise InputError(f"{n_runs} runs: need a whole number >= 1", field="n_runs")
    return int(n_runs)


# Runs advanced together (one batch between two polls of the cancel callback).
MC_BATCH_RUNS = 256


def monte_carlo_ttff(inputs: TimelineInputs, n_runs: int, seed: int,
                     cancel: Callable[[], bool] | None = None) -> TtffStats:
    """TTFF statistics over ``n_runs`` runs with drawn search times (seeded, reproducible).

    The process of the module docstring, with every run of a batch advanced together in
    numpy (see :class:`_Batch`): each step takes every active run to its next event
    (a rise or a channel coming free), hands the free channels to the waiting satellites
    in priority order and draws the durations of all searches started, for all runs at
    once. :func:`monte_carlo_ttff_reference` is the same process run by the event-by-event
    simulator; the two agree in distribution (tests/test_timeline.py).

    ``cancel`` is polled between batches of MC_BATCH_RUNS runs; when it returns True,
    :class:`core.errors.Cancelled` is raised."""
    n_runs = _check_runs(n_runs)
    _drawn_duration(inputs, np.random.default_rng(0))      # checks the figures are given
    rng = np.random.default_rng(seed)
    tables = _cached(inputs, "mc_tables", lambda: _McTables(inputs))
    samples = np.full(n_runs, math.inf)
    unsearchable: dict[int, float] = {}
    for a in range(0, n_runs, MC_BATCH_RUNS):
        if cancel is not None and cancel():
            raise Cancelled(f"Monte Carlo stopped after {a} of {n_runs} runs")
        b = min(a + MC_BATCH_RUNS, n_runs)
        fix = _Batch(tables, b - a, rng, unsearchable).run()
        samples[a:b] = fix - inputs.start_unix_s
    return _stats(inputs, samples, unsearchable)


def _all_finite(x: np.ndarray) -> bool:
    if x.dtype.kind in "iub":
        return True
    return x.size == 0 or (math.isfinite(float(np.min(x))) and math.isfinite(float(np.max(x))))


def _rank_grid(priority: np.ndarray, shape: tuple[int, int]) -> np.ndarray:
    """(S, T) rank position of each satellite at each grid index: the order of
    :func:`_rank_order` for every column at once (stable sort of each column, sorted as
    rows of the transposed grid, where they are contiguous)."""
    n_s = shape[0]
    pr = _with_next(priority, shape, copy=False)
    key = np.ascontiguousarray(np.where(np.isfinite(pr), -pr, np.inf).T)   # (T, S) rows
    order = np.argsort(key, axis=1, kind="stable")             # (T, S): satellites by rank
    rank_t = np.empty_like(order)
    np.put_along_axis(rank_t, order, np.broadcast_to(np.arange(n_s), order.shape), axis=1)
    return np.ascontiguousarray(rank_t.T)


# Rank grids of read-only priority arrays (whose values cannot change), the last two:
# the inputs of successive re-plans over one geometry share their priority array.
_RANK_GRIDS: list[tuple[weakref.ref, np.ndarray]] = []


def _rank_grid_of(priority: np.ndarray, shape: tuple[int, int]) -> np.ndarray:
    """:func:`_rank_grid`, kept for a read-only priority array while it lives."""
    if not (isinstance(priority, np.ndarray) and _read_only(priority)):
        return _rank_grid(priority, shape)
    for ref, rank in list(_RANK_GRIDS):
        if ref() is priority and rank.shape == shape:
            return rank
    rank = _rank_grid(priority, shape)
    rank.setflags(write=False)
    _RANK_GRIDS[:] = [(weakref.ref(priority), rank)] + [e for e in _RANK_GRIDS if e[0]() is not None][:1]
    return rank


def _with_next(arr: np.ndarray | float, shape: tuple[int, int], copy: bool = True) -> np.ndarray:
    """The (S, T) grid values the simulation looks up: the value at k, or at k + 1 where
    that is not finite (see :func:`_lookup`). With ``copy=False``, when nothing is to be
    replaced, the values themselves (read only: a broadcast or the caller's array)."""
    a = np.broadcast_to(np.asarray(arr, dtype=float) if copy else np.asarray(arr), shape)
    if not copy and _all_finite(a[:, :-1]):
        return a
    a = np.broadcast_to(np.asarray(a, dtype=float), shape)
    out = a.copy()
    bad = ~np.isfinite(out[:, :-1])
    out[:, :-1][bad] = a[:, 1:][bad]
    return out


class _McTables:
    """What every Monte Carlo run shares: passes as flat arrays, the search figures per
    (satellite, grid index) in both states, and the priority ranks."""

    def __init__(self, inp: TimelineInputs) -> None:
        n_s, n_t = len(inp.sat_ids), inp.times_unix_s.size
        shape = (n_s, n_t)
        self.inp = inp
        self.times = inp.times_unix_s
        self.t_end = float(self.times[-1])
        sat, rise, set_ = [], [], []
        for s, plist in enumerate(inp._passes):
            for r, st in plist:
                sat.append(s)
                rise.append(r)
                set_.append(st)
        self.pass_sat = np.array(sat, dtype=np.int64)
        self.rise = np.array(rise, dtype=float)
        self.set = np.array(set_, dtype=float)
        self.busy_until = np.minimum(self.set, self.t_end)
        self.rise_times = unique_values(self.rise[self.rise < self.t_end])
        pfa_after = inp.pfa_position_after if inp.pfa_position_after is not None else inp.pfa_position
        figs: dict[str, tuple] = {}
        made: dict[tuple, tuple] = {}        # a figure shared by both states is made once
        for state, (q, pd, pfa) in (("first", (inp.q_first, inp.pd_first, inp.pfa_position)),
                                    ("after", (inp.q_after, inp.pd_after, pfa_after))):
            key = (id(q), id(pd), id(pfa))
            if key in made:
                figs[state] = made[key]
                continue
            f = [_with_next(x, shape, copy=False) for x in (q, pd, pfa, inp.dwell_s)]
            if all(_all_finite(x) for x in f):         # the plan's figures: nothing to mask
                ok = np.ones(shape, dtype=bool)
                figs[state] = (f[0], f[1], f[2], f[3], ok)
            else:
                ok = np.logical_and.reduce([np.isfinite(x) for x in f])
                figs[state] = (np.where(ok, f[0], 1.0), np.where(ok, f[1], 0.0),
                               np.where(ok, f[2], 0.0), np.where(ok, f[3], 1.0), ok)
            made[key] = figs[state]
        self.figs = figs
        self.rank = _rank_grid_of(inp.priority, shape)   # rank position of s at k


class _Batch:
    """``n`` runs of the channel process advanced together (see monte_carlo_ttff)."""

    def __init__(self, tb: _McTables, n: int, rng: np.random.Generator,
                 unsearchable: dict[int, float]) -> None:
        self.tb, self.n, self.rng, self.unsearchable = tb, n, rng, unsearchable
        n_p, n_c = tb.pass_sat.size, tb.inp.n_channels
        self.busy = np.full((n, n_c), -np.inf)          # channel busy until
        self.searched = np.zeros((n, n_p), dtype=bool)
        self.acq = np.full((n, n_p), np.inf)            # acquisition time per pass
        self.first_acq = np.full(n, np.inf)
        self.fix = np.full(n, np.inf)

    def run(self) -> np.ndarray:
        tb = self.tb
        if not tb.rise_times.size:
            return self.fix
        t = np.full(self.n, tb.rise_times[0])
        runs = np.arange(self.n)
        k_fix = tb.inp.first_fix_satellites
        can_fix = tb.inp.n_channels >= k_fix
        while runs.size:
            self._assign(runs, t)
            if can_fix:
                n_acq = np.isfinite(self.acq[runs]).sum(axis=1)
                check = n_acq >= k_fix
                if check.any():
                    sel = runs[check]
                    fix = _batch_first_fix(self.acq[sel], tb.set, tb.inp.ephemeris_wait_s,
                                           k_fix, tb.t_end)
                    done = fix <= t[check] + tb.inp.ephemeris_wait_s
                    self.fix[sel[done]] = fix[done]
                    keep = np.ones(runs.size, dtype=bool)
                    keep[np.nonzero(check)[0][done]] = False
                    runs, t = runs[keep], t[keep]
            if not runs.size:
                break
            # Next event of each run: a rise after t or a channel coming free after t.
            j = np.searchsorted(tb.rise_times, t, side="right")
            nxt = np.where(j < tb.rise_times.size, tb.rise_times[np.minimum(j, tb.rise_times.size - 1)],
                           np.inf)
            busy = self.busy[runs]
            pending = np.where(busy > t[:, None], busy, np.inf).min(axis=1)
            t_new = np.minimum(nxt, pending)
            going = t_new < tb.t_end
            ended = runs[~going]
            if ended.size and can_fix:
                self.fix[ended] = _batch_first_fix(self.acq[ended], tb.set, tb.inp.ephemeris_wait_s,
                                                   k_fix, tb.t_end)
            runs, t = runs[going], t_new[going]
        return self.fix

    def _assign(self, runs: np.ndarray, t: np.ndarray) -> None:
        """At each run's instant t: free channels take waiting satellites by rank."""
        tb = self.tb
        k = np.searchsorted(tb.times, t, side="right") - 1
        free = self.busy[runs] <= t[:, None]                               # (R, C)
        n_free = free.sum(axis=1)
        if not n_free.any():
            return
        tc = t[:, None]
        waiting = (tb.rise[None, :] <= tc) & (tc < tb.set[None, :]) & ~self.searched[runs]
        if not waiting.any():
            return
        after = self.first_acq[runs] <= t
        s_of = tb.pass_sat
        ok_first = tb.figs["first"][4][s_of[None, :], k[:, None]]
        ok_after = tb.figs["after"][4][s_of[None, :], k[:, None]]
        searchable = np.where(after[:, None], ok_after, ok_first)
        rank = tb.rank[s_of[None, :], k[:, None]].astype(float)            # (R, P)
        eligible = waiting & searchable
        key = np.where(eligible, rank, np.inf)
        order = np.argsort(key, axis=1, kind="stable")
        n_assign = np.minimum(n_free, eligible.sum(axis=1))
        blocked = waiting & ~searchable
        if blocked.any():
            self._note_unsearchable(runs, t, waiting, eligible, blocked, rank, n_free)
        if not n_assign.any():
            return
        chan_order = np.argsort(~free, axis=1, kind="stable")              # free ones first
        r_i, slot = np.nonzero(np.arange(order.shape[1])[None, :] < n_assign[:, None])
        p = order[r_i, slot]
        c = chan_order[r_i, slot]
        run = runs[r_i]
        kk = k[r_i]
        s = s_of[p]
        aft = after[r_i]
        q, pd, pfa, dwell = (np.where(aft, fa[s, kk], ff[s, kk])
                             for fa, ff in zip(tb.figs["after"][:4], tb.figs["first"][:4]))
        d = _draw_durations(q, pd, pfa, dwell, tb.inp.penalty_s, self.rng)
        end = t[r_i] + d
        got = (end < tb.set[p]) & (end <= tb.t_end)
        self.searched[run, p] = True
        self.acq[run[got], p[got]] = end[got]
        np.minimum.at(self.first_acq, run[got], end[got])
        self.busy[run, c] = tb.busy_until[p]

    def _note_unsearchable(self, runs, t, waiting, eligible, blocked, rank, n_free) -> None:
        """A waiting satellite whose figures are not finite is noted when the scalar loop
        would reach it: fewer eligible satellites rank above it than channels are free."""
        key = np.where(waiting, rank, np.inf)
        order = np.argsort(key, axis=1, kind="stable")
        elig_sorted = np.take_along_axis(eligible, order, axis=1)
        before = np.cumsum(elig_sorted, axis=1) - elig_sorted
        reached_sorted = before < n_free[:, None]
        reached = np.empty_like(reached_sorted)
        np.put_along_axis(reached, order, reached_sorted, axis=1)
        r_i, p = np.nonzero(blocked & reached)
        for s, when in zip(self.tb.pass_sat[p].tolist(), t[r_i].tolist()):
            if s not in self.unsearchable or when < self.unsearchable[s]:
                self.unsearchable[s] = when


def _draw_durations(q, pd, pfa, dwell, penalty, rng: np.random.Generator) -> np.ndarray:
    """Serial-search times, one per element (see :func:`serial_search_time_samples`)."""
    q_i = q.astype(np.int64)
    detects = pd > 0
    m = rng.geometric(np.where(detects, pd, 1.0))
    j = rng.integers(0, q_i)
    n = j + (m - 1) * (q_i - 1)
    f = rng.binomial(n, pfa)
    return np.where(detects, dwell * (m + n) + penalty * f, np.inf)


def _batch_first_fix(acq: np.ndarray, set_t: np.ndarray, wait: float, k_fix: int,
                     t_end: float) -> np.ndarray:
    """:func:`first_fix_time_unix_s` for every row of (R, P) acquisition times (inf: pass
    not acquired), tracks usable over [acq + wait, set)."""
    n_r = acq.shape[0]
    if n_r == 0:
        return np.empty(0)
    m = int(np.isfinite(acq).sum(axis=1).max())
    if m < k_fix:
        return np.full(n_r, np.inf)
    order = np.argsort(acq, axis=1)[:, :m]
    ready = np.take_along_axis(acq, order, axis=1) + wait               # (R, M)
    until = set_t[order]
    usable = (ready[:, None, :] <= ready[:, :, None]) & (ready[:, :, None] < until[:, None, :])
    count = usable.sum(axis=2)
    ok = (count >= k_fix) & (ready <= t_end) & np.isfinite(ready)
    return np.where(ok, ready, np.inf).min(axis=1)


def monte_carlo_ttff_reference(inputs: TimelineInputs, n_runs: int, seed: int,
                     cancel: Callable[[], bool] | None = None) -> TtffStats:
    """The event-by-event simulator run once per run (pure Python): the reference the
    vectorized :func:`monte_carlo_ttff` is tested against (same process, same
    distributions; the random streams differ)."""
    if int(n_runs) != n_runs or n_runs < 1:
        raise InputError(f"{n_runs} runs: need a whole number >= 1", field="n_runs")
    n_runs = int(n_runs)
    rng = np.random.default_rng(seed)
    duration = _drawn_duration(inputs, rng)
    t0 = inputs.start_unix_s
    samples = np.full(n_runs, math.inf)
    unsearchable: dict[int, float] = {}
    for i in range(n_runs):
        if cancel is not None and i % 64 == 0 and cancel():
            raise Cancelled(f"Monte Carlo stopped after {i} of {n_runs} runs")
        run = _simulate(inputs, duration, record=False, stop_at_fix=True)
        if run.first_fix_unix_s is not None:
            samples[i] = run.first_fix_unix_s - t0
        for s, t in run.unsearchable.items():
            unsearchable.setdefault(s, t)
    return _stats(inputs, samples, unsearchable)

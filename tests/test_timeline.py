"""Tests of core.plan.timeline: channel timeline, first-fix rule, serial-search draws, TTFF Monte Carlo.

Scenarios are invented (fictional date, satellites named A, B, ...). Expected timelines are
worked out by hand in the comments; the serial-search mean is checked against the
Polydoros-Weber formula written out here, and the draws against a cell-by-cell simulation
written here.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.stats import chi2_contingency, ks_2samp

from core.ground.errors import InputError
from core.ground.timeutil import parse_iso_utc, to_unix_s
from core.plan.timeline import (
    SEARCH,
    TRACK,
    TimelineInputs,
    expected_timeline,
    first_fix_time_unix_s,
    monte_carlo_ttff,
    monte_carlo_ttff_reference,
    sample_timeline,
    serial_search_time_samples,
)

T0 = to_unix_s(parse_iso_utc("2031-05-17T06:00:00Z"))   # invented window start
STEP_S = 30.0


def grid(n: int) -> np.ndarray:
    return T0 + np.arange(n) * STEP_S


def per_sat(values, n_t: int) -> np.ndarray:
    """(S, T) array holding one constant value per satellite."""
    return np.asarray(values, dtype=float)[:, None] * np.ones((1, n_t))


def pw_mean_s(q, pd, pfa, dwell_s, penalty_s):
    """Mean serial-search time [mem: Polydoros & Weber 1984; Holmes, Coherent Spread
    Spectrum Systems]: T = [2 + (2 - Pd)(q - 1)(1 + K Pfa)] / (2 Pd) td, K = penalty/td."""
    k = penalty_s / dwell_s
    return (2 + (2 - pd) * (q - 1) * (1 + k * pfa)) / (2 * pd) * dwell_s


def rel(seg) -> tuple:
    """A segment with times relative to the window start, for exact comparison."""
    return (seg.channel, seg.sat_id, seg.kind, seg.start_unix_s - T0, seg.end_unix_s - T0,
            seg.acquired, seg.end_reason, seg.search_state)


# --------------------------------------------------------------------------- hand cases


def test_hand_scenario_two_channels_three_satellites():
    # Window 0..1200 s (41 samples, 30 s). Search times (s), first / after:
    #   A: up all window, priority 50, 100 / 40
    #   B: up at samples 0..5, first False at sample 6 -> sets at 180 s; priority 70, 200 / 60
    #   C: rises at sample 2 (60 s), up to the end; priority 30, 120 / 45
    # By hand:
    #   t=0    ch1 free, ch2 free; waiting B(70), A(50). ch1 <- B, ch2 <- A, both 'first'.
    #          B would end at 200 >= set 180 -> abandoned at 180 (set).
    #          A ends at 100 < set (never) -> acquired at 100, tracked to 1200 (window end).
    #   t=60   C rises; no channel free.
    #   t=100  A acquired. B's search keeps its 'first' cost (cost fixed at its start; had it
    #          switched to the 60 s 'after' cost B would have been acquired before 180).
    #   t=180  ch1 free; waiting C; an acquisition (100) precedes -> 'after' cost 45 s
    #          -> acquired at 225, tracked to 1200.
    # First fix, 2 satellites, wait 30 s: A usable from 130, C from 255 -> fix at 255 s.
    n = 41
    vis = np.ones((3, n), dtype=bool)
    vis[1, 6:] = False
    vis[2, :2] = False
    inp = TimelineInputs(
        times_unix_s=grid(n), sat_ids=["A", "B", "C"], visible=vis,
        priority=per_sat([50, 70, 30], n),
        expected_search_first_s=per_sat([100, 200, 120], n),
        expected_search_after_s=per_sat([40, 60, 45], n),
        n_channels=2, first_fix_satellites=2, ephemeris_wait_s=30.0)
    tl = expected_timeline(inp)
    assert [rel(s) for s in tl.segments] == [
        (1, "B", SEARCH, 0.0, 180.0, False, "set", "first"),
        (2, "A", SEARCH, 0.0, 100.0, True, "acquired", "first"),
        (2, "A", TRACK, 100.0, 1200.0, True, "window_end", ""),
        (1, "C", SEARCH, 180.0, 225.0, True, "acquired", "after"),
        (1, "C", TRACK, 225.0, 1200.0, True, "window_end", ""),
    ]
    assert {k: v - T0 for k, v in tl.acquisition_unix_s.items()} == {"A": 100.0, "C": 225.0}
    assert tl.first_fix_unix_s == T0 + 255.0
    assert tl.ttff_s == 255.0
    assert tl.warnings == []


def test_search_started_before_first_acquisition_uses_first_cost():
    # 2 channels, window 0..600 s. One satellite for a fix, no wait.
    #   A: priority 90, up all window, first 100 / after 10
    #   B: priority 80, up at samples 0..1 -> sets at 60 s; first 60 (ends exactly at set)
    #   C: priority 70, up all window, first 150 / after 5
    # By hand:
    #   t=0   ch1 <- A ('first', acquired at 100); ch2 <- B ('first', would end at 60 = set
    #         time: a search ending at or after the set is abandoned) -> abandoned at 60.
    #   t=60  ch2 <- C: A's acquisition (100) is still ahead -> 'first' cost 150 -> 210.
    #   First fix (1 satellite) at A's acquisition, 100 s.
    n = 21
    vis = np.ones((3, n), dtype=bool)
    vis[1, 2:] = False
    inp = TimelineInputs(
        times_unix_s=grid(n), sat_ids=["A", "B", "C"], visible=vis,
        priority=per_sat([90, 80, 70], n),
        expected_search_first_s=per_sat([100, 60, 150], n),
        expected_search_after_s=per_sat([10, 10, 5], n),
        n_channels=2, first_fix_satellites=1, ephemeris_wait_s=0.0)
    tl = expected_timeline(inp)
    assert [rel(s) for s in tl.segments] == [
        (1, "A", SEARCH, 0.0, 100.0, True, "acquired", "first"),
        (2, "B", SEARCH, 0.0, 60.0, False, "set", "first"),
        (2, "C", SEARCH, 60.0, 210.0, True, "acquired", "first"),
        (1, "A", TRACK, 100.0, 600.0, True, "window_end", ""),
        (2, "C", TRACK, 210.0, 600.0, True, "window_end", ""),
    ]
    assert tl.ttff_s == 100.0


def test_first_fix_rule_hand_case_helper():
    # Tracks (acquisition, end): s0 (0, 50), s1 (10, inf), s2 (20, 200), s3 (100, inf); wait 30.
    # Usable: s0 [30, 50), s1 [40, inf), s2 [50, 200), s3 [130, inf).
    # k = 3: at 50 s0 has set -> 2 usable; at 130 s1, s2, s3 -> fix at 130.
    #        (the 3rd smallest acq + wait, 50, would wrongly count the lost s0)
    # k = 2: at 40 s0 and s1 -> fix at 40.   k = 4: never 4 at once -> None.
    acq = [0.0, 10.0, 20.0, 100.0]
    end = [50.0, math.inf, 200.0, math.inf]
    assert first_fix_time_unix_s(acq, end, 30.0, 3) == 130.0
    assert first_fix_time_unix_s(acq, end, 30.0, 2) == 40.0
    assert first_fix_time_unix_s(acq, end, 30.0, 4) is None
    # a fix after the window end does not count
    assert first_fix_time_unix_s(acq, end, 30.0, 3, window_end_unix_s=129.0) is None


def test_first_fix_rule_hand_case_timeline():
    # 4 channels, all four satellites up at 0, searched in parallel with 'first' costs
    # A 10, B 20, C 30, D 100 s. B is up at samples 0..2, sets at 90 s. k = 3, wait 60 s.
    # Usable: A [70, inf), B [80, 90), C [90, inf), D [160, inf).
    # At 90 B is gone (A, C); at 160 A, C, D -> first fix 160 s (not 90).
    n = 21
    vis = np.ones((4, n), dtype=bool)
    vis[1, 3:] = False
    inp = TimelineInputs(
        times_unix_s=grid(n), sat_ids=["A", "B", "C", "D"], visible=vis,
        priority=per_sat([40, 30, 20, 10], n),
        expected_search_first_s=per_sat([10, 20, 30, 100], n),
        expected_search_after_s=per_sat([5, 5, 5, 5], n),
        n_channels=4, first_fix_satellites=3, ephemeris_wait_s=60.0)
    tl = expected_timeline(inp)
    assert {k: v - T0 for k, v in tl.acquisition_unix_s.items()} == {
        "A": 10.0, "B": 20.0, "C": 30.0, "D": 100.0}
    track_b = [s for s in tl.segments if s.sat_id == "B" and s.kind == TRACK]
    assert [rel(s)[3:7] for s in track_b] == [(20.0, 90.0, True, "set")]
    assert tl.ttff_s == 160.0


def test_setting_satellite_abandons_search_and_frees_channel():
    # One channel. A (priority 80) is up at samples 0..5 and sets at 180 s; its search takes
    # 300 s -> abandoned at 180, no acquisition. Then B (priority 20, up all window, 'first'
    # cost 50 s because nothing has been acquired) -> acquired at 230. One satellite needed,
    # no wait -> fix at 230.
    n = 21
    vis = np.ones((2, n), dtype=bool)
    vis[0, 6:] = False
    inp = TimelineInputs(
        times_unix_s=grid(n), sat_ids=["A", "B"], visible=vis, priority=per_sat([80, 20], n),
        expected_search_first_s=per_sat([300, 50], n),
        expected_search_after_s=per_sat([10, 10], n),
        n_channels=1, first_fix_satellites=1, ephemeris_wait_s=0.0)
    tl = expected_timeline(inp)
    assert [rel(s) for s in tl.segments] == [
        (1, "A", SEARCH, 0.0, 180.0, False, "set", "first"),
        (1, "B", SEARCH, 180.0, 230.0, True, "acquired", "first"),
        (1, "B", TRACK, 230.0, 600.0, True, "window_end", ""),
    ]
    assert "A" not in tl.acquisition_unix_s
    assert tl.ttff_s == 230.0


def test_satellite_that_never_gets_acquired_gives_no_fix():
    n = 11
    vis = np.ones((1, n), dtype=bool)
    vis[0, 4:] = False                                   # sets at 120 s
    inp = TimelineInputs(
        times_unix_s=grid(n), sat_ids=["A"], visible=vis, priority=per_sat([10], n),
        expected_search_first_s=per_sat([500], n), expected_search_after_s=per_sat([500], n),
        n_channels=1, first_fix_satellites=1, ephemeris_wait_s=0.0)
    tl = expected_timeline(inp)
    assert [rel(s) for s in tl.segments] == [(1, "A", SEARCH, 0.0, 120.0, False, "set", "first")]
    assert tl.first_fix_unix_s is None and tl.ttff_s is None
    assert any("no first fix" in w for w in tl.warnings)


def test_refined_pass_times_override_grid_and_lookup_rule():
    # The grid says A is up all window, the refined pass says rise 45.5 s, set 400.25 s.
    # Search-time values: NaN at samples 0 and 1 (below the mask), 100 + k at sample k.
    # Lookup rule: sample at or before 45.5 s is 1 (30 s) -> NaN -> next sample 2 -> 102 s.
    # Acquired at 45.5 + 102 = 147.5, tracked to the refined set 400.25.
    n = 21
    first = (100.0 + np.arange(n))[None, :].copy()
    first[0, :2] = np.nan
    inp = TimelineInputs(
        times_unix_s=grid(n), sat_ids=["A"], visible=np.ones((1, n), dtype=bool),
        priority=per_sat([10], n), expected_search_first_s=first,
        expected_search_after_s=first, n_channels=1, first_fix_satellites=1,
        ephemeris_wait_s=0.0, set_unix_s={"A": [(T0 + 45.5, T0 + 400.25)]})
    tl = expected_timeline(inp)
    assert [rel(s) for s in tl.segments] == [
        (1, "A", SEARCH, 45.5, 147.5, True, "acquired", "first"),
        (1, "A", TRACK, 147.5, 400.25, True, "set", ""),
    ]
    assert tl.to_dict()["segments"][0]["start"] == "2031-05-17T06:00:45.5Z"


def test_rising_again_is_searched_again_with_after_cost():
    # A: up samples 0..3 (sets 120 s), down, up again from sample 10 (300 s) to the end.
    # first 20 s, after 7 s. 1 channel: acquired 20, tracked to 120; rises at 300, searched
    # with 'after' cost -> acquired 307, tracked to window end 600.
    n = 21
    vis = np.ones((1, n), dtype=bool)
    vis[0, 4:10] = False
    inp = TimelineInputs(
        times_unix_s=grid(n), sat_ids=["A"], visible=vis, priority=per_sat([1], n),
        expected_search_first_s=per_sat([20], n), expected_search_after_s=per_sat([7], n),
        n_channels=1, first_fix_satellites=1, ephemeris_wait_s=0.0)
    tl = expected_timeline(inp)
    assert [rel(s) for s in tl.segments] == [
        (1, "A", SEARCH, 0.0, 20.0, True, "acquired", "first"),
        (1, "A", TRACK, 20.0, 120.0, True, "set", ""),
        (1, "A", SEARCH, 300.0, 307.0, True, "acquired", "after"),
        (1, "A", TRACK, 307.0, 600.0, True, "window_end", ""),
    ]
    assert tl.acquisition_unix_s == {"A": T0 + 20.0}     # first acquisition in the window


def test_enough_channels_searches_every_visible_satellite_at_start_in_priority_order():
    rng = np.random.default_rng(7)
    n, n_sat = 31, 6
    vis = np.ones((n_sat, n), dtype=bool)
    vis[4, :5] = False                                   # F... rises later: not at t0
    prio = rng.uniform(5, 85, size=(n_sat, n))
    inp = TimelineInputs(
        times_unix_s=grid(n), sat_ids=list("ABCDEF"), visible=vis, priority=prio,
        expected_search_first_s=per_sat([60] * n_sat, n),
        expected_search_after_s=per_sat([10] * n_sat, n),
        n_channels=8, first_fix_satellites=4, ephemeris_wait_s=30.0)
    tl = expected_timeline(inp)
    at_start = [s for s in tl.segments if s.start_unix_s == T0]
    up = [i for i in range(n_sat) if vis[i, 0]]
    by_priority = sorted(up, key=lambda i: -prio[i, 0])
    assert [(s.channel, s.sat_id, s.kind) for s in at_start] == [
        (c + 1, "ABCDEF"[i], SEARCH) for c, i in enumerate(by_priority)]


# --------------------------------------------------------------------------- invariants


def random_inputs(seed: int) -> TimelineInputs:
    """Random sky: each satellite has 1-2 passes on the grid, random costs and priorities."""
    rng = np.random.default_rng(seed)
    n_t = 121
    n_sat = int(rng.integers(3, 14))
    vis = np.zeros((n_sat, n_t), dtype=bool)
    for s in range(n_sat):
        for _ in range(int(rng.integers(1, 3))):
            a = int(rng.integers(-20, n_t))
            vis[s, max(a, 0):max(a + int(rng.integers(2, 80)), 0)] = True
    shape = (n_sat, n_t)
    first = rng.uniform(5, 400, shape)
    return TimelineInputs(
        times_unix_s=grid(n_t), sat_ids=[f"S{i:02d}" for i in range(n_sat)], visible=vis,
        priority=rng.uniform(0, 90, shape), expected_search_first_s=first,
        expected_search_after_s=first / rng.uniform(1, 8, shape),
        n_channels=int(rng.integers(1, 9)), first_fix_satellites=int(rng.integers(1, 5)),
        ephemeris_wait_s=float(rng.uniform(0, 60)),
        q_first=rng.integers(1, 4000, shape), q_after=rng.integers(1, 500, shape),
        pd_first=rng.uniform(0.3, 1, shape), pd_after=rng.uniform(0.3, 1, shape),
        pfa_position=1e-3, dwell_s=rng.uniform(0.01, 0.2), penalty_s=1.0)


def check_invariants(inp: TimelineInputs, tl) -> None:
    times = inp.times_unix_s
    segs = tl.segments
    eps = 1e-9
    for seg in segs:
        assert 1 <= seg.channel <= inp.n_channels
        assert inp.start_unix_s <= seg.start_unix_s <= seg.end_unix_s <= inp.end_unix_s
    # a channel is never double-booked
    for c in range(1, inp.n_channels + 1):
        mine = sorted((s.start_unix_s, s.end_unix_s) for s in segs if s.channel == c)
        for (_, e1), (s2, _) in zip(mine, mine[1:]):
            assert s2 >= e1 - eps
    # a satellite is never on two channels at once
    for sid in inp.sat_ids:
        mine = sorted((s.start_unix_s, s.end_unix_s, s.channel) for s in segs if s.sat_id == sid)
        for (_, e1, _), (s2, _, _) in zip(mine, mine[1:]):
            assert s2 >= e1 - eps
    # every search lies in a visible stretch of the grid: visible at the sample at or before
    # its start and at every grid sample before its end (the set time is the first
    # not-visible sample, so the end may sit on it)
    for seg in segs:
        s = inp.sat_ids.index(seg.sat_id)
        k0 = np.searchsorted(times, seg.start_unix_s, side="right") - 1
        inside = (times >= seg.start_unix_s) & (times < seg.end_unix_s)
        assert inp.visible[s, k0], (seg, "starts below the mask")
        assert np.all(inp.visible[s, inside]), (seg, "runs below the mask")
    # a track follows its acquiring search on the same channel
    for seg in segs:
        if seg.kind == TRACK:
            assert any(p.kind == SEARCH and p.acquired and p.channel == seg.channel
                       and p.sat_id == seg.sat_id and p.end_unix_s == seg.start_unix_s
                       for p in segs)
    # the first fix is not before first_fix_satellites acquisitions + wait
    if tl.first_fix_unix_s is not None:
        acq = sorted(s.end_unix_s for s in segs if s.kind == SEARCH and s.acquired)
        k = inp.first_fix_satellites
        assert tl.first_fix_unix_s >= acq[k - 1] + inp.ephemeris_wait_s - eps


@pytest.mark.parametrize("seed", range(40))
def test_invariants_expected_and_sampled(seed):
    inp = random_inputs(seed)
    check_invariants(inp, expected_timeline(inp))
    check_invariants(inp, sample_timeline(inp, seed))


def test_free_channel_never_idles_while_a_satellite_waits():
    # Work-conserving: at every segment end before the window end, if the channel is then
    # idle, no satellite is up and off-channel at that instant (all searchable here).
    for seed in range(15):
        inp = random_inputs(100 + seed)
        tl = expected_timeline(inp)
        passes = inp.passes_unix_s
        for seg in tl.segments:
            t = seg.end_unix_s
            if t >= inp.end_unix_s or any(s.channel == seg.channel and s.start_unix_s == t
                                          for s in tl.segments):
                continue
            busy = {s.sat_id for s in tl.segments if s.start_unix_s <= t < s.end_unix_s}
            for sid, plist in passes.items():
                up = any(r <= t < st for r, st in plist)
                assert not up or sid in busy, (seed, seg, sid)


# --------------------------------------------------------------------------- serial search


@pytest.mark.parametrize("q, pd, pfa, dwell, penalty", [
    (1, 1.0, 0.0, 0.001, 0.0),
    (100, 1.0, 0.0, 0.001, 0.0),
    (200, 0.7, 0.02, 0.002, 0.05),
    (5000, 0.9, 1e-3, 0.001, 0.2),
    (40, 0.3, 0.1, 0.01, 0.03),
])
def test_sample_mean_matches_polydoros_weber(q, pd, pfa, dwell, penalty):
    x = serial_search_time_samples(q, pd, pfa, dwell, penalty, np.random.default_rng(11),
                                   size=200_000)
    expected = pw_mean_s(q, pd, pfa, dwell, penalty)
    se = x.std() / math.sqrt(x.size) if x.std() > 0 else 1e-12
    assert abs(x.mean() - expected) < 4 * se + 1e-12 * expected


def test_samples_with_sure_detection_are_uniform_on_positions():
    # pd = 1, pfa = 0: time = (J + 1) dwell, J uniform on 0..q-1; mean (q + 1) td / 2
    # [domain notes section 6, from the Polydoros-Weber formula].
    q, dwell = 8, 0.5
    x = serial_search_time_samples(q, 1.0, 0.0, dwell, 0.0, np.random.default_rng(3), 80_000)
    values, counts = np.unique(x, return_counts=True)
    assert np.allclose(values, dwell * np.arange(1, q + 1))
    assert np.all(np.abs(counts / x.size - 1 / q) < 0.01)


def test_zero_detection_probability_never_ends():
    x = serial_search_time_samples(10, np.array([0.0, 1.0]), 0.0, 1.0, 0.0,
                                   np.random.default_rng(0))
    assert math.isinf(x[0]) and math.isfinite(x[1])


def test_samples_broadcast_per_element_parameters():
    rng = np.random.default_rng(5)
    q = np.array([[1], [50]])
    pd = np.array([1.0, 0.5, 0.9])
    x = serial_search_time_samples(q, pd, 0.01, 1e-3, 1e-2, rng)
    assert x.shape == (2, 3)
    assert x[0, 0] == 1e-3                              # q = 1, pd = 1: one dwell exactly


def brute_force_search_s(q, pd, pfa, dwell, penalty, n, rng):
    """Cell by cell: start at position 0, step cyclically, signal at uniform J."""
    j = rng.integers(0, q, n)
    pos = np.zeros(n, dtype=np.int64)
    t = np.zeros(n)
    active = np.arange(n)
    while active.size:
        t[active] += dwell
        at_signal = pos[active] == j[active]
        u = rng.random(active.size)
        detected = at_signal & (u < pd)
        false_alarm = ~at_signal & (u < pfa)
        t[active[false_alarm]] += penalty
        pos[active] = (pos[active] + 1) % q
        active = active[~detected]
    return t


def same_distribution_p(a_s: np.ndarray, b_s: np.ndarray, unit_s: float) -> float:
    """Chi-square homogeneity p-value over about 20 quantile bins of the pooled samples.

    Times sit on a lattice of ``unit_s``; they are counted in whole units (rounded, so that
    float sums such as 16 x 0.004 land in one bin) and binned between half units.
    """
    a, b = np.rint(a_s / unit_s), np.rint(b_s / unit_s)
    edges = np.unique(np.quantile(np.concatenate([a, b]), np.linspace(0, 1, 21))) - 0.5
    edges = np.append(edges, edges[-1] + 1.0)
    ca, _ = np.histogram(a, edges)
    cb, _ = np.histogram(b, edges)
    keep = (ca + cb) > 0
    return float(chi2_contingency(np.vstack([ca[keep], cb[keep]]))[1])


@pytest.mark.parametrize("q, pd, pfa, penalty_dwells", [
    (15, 0.6, 0.05, 3),
    (40, 0.9, 0.2, 10),
    (1, 0.4, 0.5, 5),
])
def test_samples_match_cell_by_cell_simulation(q, pd, pfa, penalty_dwells):
    dwell = 0.004
    n = 30_000
    fast = serial_search_time_samples(q, pd, pfa, dwell, penalty_dwells * dwell,
                                      np.random.default_rng(21), n)
    slow = brute_force_search_s(q, pd, pfa, dwell, penalty_dwells * dwell, n,
                                np.random.default_rng(22))
    assert same_distribution_p(fast, slow, dwell) > 1e-3
    # the comparison has power: a shift of one dwell is rejected
    assert same_distribution_p(fast + dwell, slow, dwell) < 1e-3


# --------------------------------------------------------------------------- Monte Carlo


def test_monte_carlo_is_reproducible_with_its_seed():
    inp = random_inputs(3)
    a = monte_carlo_ttff(inp, 200, seed=42)
    b = monte_carlo_ttff(inp, 200, seed=42)
    c = monte_carlo_ttff(inp, 200, seed=43)
    np.testing.assert_array_equal(a.samples_s, b.samples_s)
    assert (a.median_s, a.p95_s, a.n_no_fix) == (b.median_s, b.p95_s, b.n_no_fix)
    assert not np.array_equal(a.samples_s, c.samples_s)
    assert [rel(s) for s in sample_timeline(inp, 9).segments] == \
        [rel(s) for s in sample_timeline(inp, 9).segments]


def deterministic_mc_inputs(seed: int, dwell_s: float) -> TimelineInputs:
    """random_inputs with q = 1, pd = 1, pfa = 0: every search lasts exactly one dwell,
    and the expected search times equal that dwell."""
    base = random_inputs(seed)
    shape = base.visible.shape
    one = np.ones(shape)
    dwell = np.random.default_rng(seed).uniform(5, 200, shape)  # seconds per "search"
    return TimelineInputs(
        times_unix_s=base.times_unix_s, sat_ids=base.sat_ids, visible=base.visible,
        priority=base.priority, expected_search_first_s=dwell * dwell_s,
        expected_search_after_s=dwell * dwell_s, n_channels=base.n_channels,
        first_fix_satellites=base.first_fix_satellites,
        ephemeris_wait_s=base.ephemeris_wait_s, q_first=one, q_after=one, pd_first=one,
        pd_after=one, pfa_position=0.0, dwell_s=dwell * dwell_s, penalty_s=5.0)


@pytest.mark.parametrize("seed", range(10))
def test_monte_carlo_with_deterministic_searches_equals_expected_timeline(seed):
    inp = deterministic_mc_inputs(seed, 1.0)
    tl = expected_timeline(inp)
    stats = monte_carlo_ttff(inp, 20, seed=seed)
    assert [rel(s) for s in sample_timeline(inp, seed).segments] == [rel(s) for s in tl.segments]
    if tl.ttff_s is None:
        assert stats.n_no_fix == 20 and math.isinf(stats.median_s)
    else:
        assert stats.n_no_fix == 0
        assert np.allclose(stats.samples_s, tl.ttff_s, rtol=0, atol=1e-6)
        assert stats.median_s == pytest.approx(tl.ttff_s, abs=1e-6)


def test_monte_carlo_single_search_mean_matches_polydoros_weber():
    # One channel, one satellite up all window, one satellite for a fix, no wait:
    # TTFF = the search time, whose mean is the Polydoros-Weber mean.
    n = 41
    q, pd, pfa, dwell, penalty = 3000, 0.8, 0.01, 0.005, 0.1
    inp = TimelineInputs(
        times_unix_s=grid(n), sat_ids=["A"], visible=np.ones((1, n), dtype=bool),
        priority=per_sat([45], n), expected_search_first_s=per_sat([1.0], n),
        expected_search_after_s=per_sat([1.0], n), n_channels=1, first_fix_satellites=1,
        ephemeris_wait_s=0.0, q_first=per_sat([q], n), q_after=per_sat([1], n),
        pd_first=per_sat([pd], n), pd_after=per_sat([1.0], n), pfa_position=pfa,
        dwell_s=dwell, penalty_s=penalty)
    stats = monte_carlo_ttff(inp, 5000, seed=8)
    assert stats.n_no_fix == 0
    se = stats.samples_s.std() / math.sqrt(stats.n_runs)
    assert abs(stats.mean_s - pw_mean_s(q, pd, pfa, dwell, penalty)) < 4 * se
    assert stats.mean_fixed_s == stats.mean_s


def test_monte_carlo_counts_runs_without_fix():
    # One satellite up for 30 s only (samples 0 up, 1.. down), q = 1, dwell 10 s, pd = 0.5:
    # the search needs M ~ Geometric(0.5) dwells and must end before 30 s: M <= 2.
    # P(no fix) = (1 - 0.5)^2 = 0.25 [calc]. So p95 and mean are infinite (beyond the
    # window), the median is a real sample (10 or 20 s).
    n = 5
    vis = np.zeros((1, n), dtype=bool)
    vis[0, 0] = True
    inp = TimelineInputs(
        times_unix_s=grid(n), sat_ids=["A"], visible=vis, priority=per_sat([30], n),
        expected_search_first_s=per_sat([20.0], n), expected_search_after_s=per_sat([20.0], n),
        n_channels=1, first_fix_satellites=1, ephemeris_wait_s=0.0,
        q_first=per_sat([1], n), q_after=per_sat([1], n), pd_first=per_sat([0.5], n),
        pd_after=per_sat([0.5], n), pfa_position=0.0, dwell_s=10.0, penalty_s=0.0)
    stats = monte_carlo_ttff(inp, 4000, seed=1)
    assert abs(stats.n_no_fix / stats.n_runs - 0.25) < 4 * math.sqrt(0.25 * 0.75 / 4000)
    assert stats.median_s in (10.0, 20.0)
    assert math.isinf(stats.p95_s) and math.isinf(stats.mean_s)
    fixed = stats.samples_s[np.isfinite(stats.samples_s)]
    assert set(np.unique(fixed)) == {10.0, 20.0}
    assert stats.mean_fixed_s == pytest.approx(fixed.mean())
    assert stats.to_dict()["p95_s"] is None


# --------------------------------------------------------------------------- inputs, output


def test_bad_inputs_raise_input_error_naming_the_field():
    n = 5
    ok = dict(times_unix_s=grid(n), sat_ids=["A"], visible=np.ones((1, n), dtype=bool),
              priority=per_sat([1], n), expected_search_first_s=per_sat([1], n),
              expected_search_after_s=per_sat([1], n), n_channels=1, first_fix_satellites=1,
              ephemeris_wait_s=0.0)
    for change, name in [
        ({"priority": np.ones((2, n))}, "priority"),
        ({"visible": np.ones((1, n))}, "visible"),
        ({"times_unix_s": grid(n)[::-1]}, "times_unix_s"),
        ({"expected_search_first_s": per_sat([-1], n)}, "expected_search_first_s"),
        ({"n_channels": 0}, "n_channels"),
        ({"sat_ids": ["A", "A"], "visible": np.ones((2, n), bool)}, "sat_ids"),
        ({"q_first": per_sat([0.5], n)}, "q_first"),
        ({"pd_after": per_sat([1.5], n)}, "pd_after"),
        ({"set_unix_s": {"Z": [(T0, T0 + 10)]}}, "set_unix_s"),
    ]:
        with pytest.raises(InputError) as err:
            TimelineInputs(**{**ok, **change})
        assert err.value.field == name
    with pytest.raises(InputError):                      # Monte Carlo figures missing
        monte_carlo_ttff(TimelineInputs(**ok), 10, seed=0)


def _fields(inp: TimelineInputs) -> dict:
    import dataclasses

    return {f.name: getattr(inp, f.name) for f in dataclasses.fields(inp) if f.init}


@pytest.mark.parametrize("seed", range(6))
def test_with_after_figures_equals_the_inputs_built_anew(seed):
    """The same inputs with other after-acquisition figures give what the constructor
    gives for them: the same timeline and, for one seed, the same Monte Carlo draws."""
    inp = random_inputs(seed)
    expected_timeline(inp)                       # fills the search-order cache it shares
    rng = np.random.default_rng(100 + seed)
    shape = inp.visible.shape
    after = rng.uniform(2, 60, shape)
    q_after = rng.integers(1, 300, shape)
    mine = inp.with_after_figures(after, q_after, 2e-3)
    anew = TimelineInputs(**{**_fields(inp), "expected_search_after_s": after,
                             "q_after": q_after, "pfa_position_after": 2e-3})
    assert [rel(g) for g in expected_timeline(mine).segments] == \
        [rel(g) for g in expected_timeline(anew).segments]
    np.testing.assert_array_equal(monte_carlo_ttff(mine, 300, seed).samples_s,
                                  monte_carlo_ttff(anew, 300, seed).samples_s)
    # the original is left as it was
    assert [rel(g) for g in expected_timeline(inp).segments] == \
        [rel(g) for g in expected_timeline(TimelineInputs(**_fields(inp))).segments]


def test_with_after_figures_checks_them():
    inp = random_inputs(1)
    shape = inp.visible.shape
    for args, name in [((np.full(shape, -1.0),), "expected_search_after_s"),
                       ((np.ones(shape), np.zeros(shape, dtype=np.int64)), "q_after"),
                       ((np.ones(shape), None, 1.5), "pfa_position_after"),
                       ((np.ones(shape), None, None, np.full(shape, 2.0)), "pd_after"),
                       ((np.ones((1, 3)),), "expected_search_after_s")]:
        with pytest.raises(InputError) as err:
            inp.with_after_figures(*args)
        assert err.value.field == name


def test_inputs_copy_writeable_arrays_and_keep_read_only_ones():
    """A caller's writeable array is copied (changing it later changes nothing); a
    read-only array that owns its memory is kept as it is; integer positions stay integers."""
    inp = random_inputs(2)
    f = _fields(inp)
    first = np.array(f["expected_search_first_s"])           # writeable
    frozen = np.array(f["expected_search_after_s"])
    frozen.setflags(write=False)
    q = np.array(f["q_first"], dtype=np.int64)
    made = TimelineInputs(**{**f, "expected_search_first_s": first,
                             "expected_search_after_s": frozen, "q_first": q})
    before = [rel(g) for g in expected_timeline(made).segments]
    first *= 50.0
    assert made.expected_search_first_s is not first
    assert made.expected_search_after_s is frozen
    assert made.q_first.dtype == np.int64
    again = TimelineInputs(**{**f, "expected_search_after_s": frozen, "q_first": q})
    assert [rel(g) for g in expected_timeline(again).segments] == before
    # a read-only view of a writeable array is copied: its base can still change
    base = np.array(f["expected_search_after_s"])
    view = base[:, :]
    view.setflags(write=False)
    viewed = TimelineInputs(**{**f, "expected_search_after_s": view})
    assert not np.shares_memory(viewed.expected_search_after_s, base)


def test_monte_carlo_ranks_follow_each_read_only_priority():
    """The Monte Carlo keeps the ranks of a read-only priority array between calls: the
    draws must equal those with a writeable copy (ranks computed afresh), for the same
    array again and for another read-only array of the same shape."""
    base = random_inputs(3)
    f = _fields(base)
    rng = np.random.default_rng(9)
    for _ in range(3):
        prio = rng.uniform(0, 90, base.visible.shape)
        frozen = prio.copy()
        frozen.setflags(write=False)
        shared = TimelineInputs(**{**f, "priority": frozen})
        fresh = TimelineInputs(**{**f, "priority": prio.copy()})
        for seed in (1, 2):
            np.testing.assert_array_equal(monte_carlo_ttff(shared, 200, seed).samples_s,
                                          monte_carlo_ttff(fresh, 200, seed).samples_s)
        again = TimelineInputs(**{**f, "priority": frozen})
        np.testing.assert_array_equal(monte_carlo_ttff(again, 200, 4).samples_s,
                                      monte_carlo_ttff(fresh, 200, 4).samples_s)


def test_to_dict_uses_iso_times():
    n = 5
    inp = TimelineInputs(
        times_unix_s=grid(n), sat_ids=["A"], visible=np.ones((1, n), dtype=bool),
        priority=per_sat([1], n), expected_search_first_s=per_sat([12], n),
        expected_search_after_s=per_sat([12], n), n_channels=1, first_fix_satellites=1,
        ephemeris_wait_s=18.0)
    d = expected_timeline(inp).to_dict()
    assert d["window_start"] == "2031-05-17T06:00:00Z"
    assert d["acquisition"] == {"A": "2031-05-17T06:00:12Z"}
    assert d["first_fix"] == "2031-05-17T06:00:30Z" and d["ttff_s"] == 30.0
    assert d["segments"][1]["kind"] == "track" and d["segments"][1]["end"] == "2031-05-17T06:02:00Z"


# --------------------------------------------------------------------------- vectorized Monte Carlo


def _same_ttff_distribution(inp: TimelineInputs, n_runs: int, seed: int) -> None:
    """The vectorized Monte Carlo against the event-by-event reference simulator, same
    seed count: the share of runs without a fix agrees (binomial, 4 sigma) and the TTFF of
    the runs that fix passes a two-sample Kolmogorov-Smirnov test at p > 1e-3
    [pub: scipy.stats.ks_2samp]."""
    fast = monte_carlo_ttff(inp, n_runs, seed=seed)
    ref = monte_carlo_ttff_reference(inp, n_runs, seed=seed + 1000)
    share = (fast.n_no_fix + ref.n_no_fix) / (2 * n_runs)
    sigma = math.sqrt(max(share * (1 - share), 1e-4) * 2 / n_runs)
    assert abs(fast.n_no_fix - ref.n_no_fix) / n_runs <= 4 * sigma + 1e-9
    a = fast.samples_s[np.isfinite(fast.samples_s)]
    b = ref.samples_s[np.isfinite(ref.samples_s)]
    if min(a.size, b.size) >= 20:
        assert ks_2samp(a, b).pvalue > 1e-3, (a.mean(), b.mean())
    assert fast.warnings == ref.warnings


@pytest.mark.parametrize("seed", range(12))
def test_vectorized_monte_carlo_matches_the_reference_simulator(seed):
    _same_ttff_distribution(random_inputs(seed), 600, seed)


def test_vectorized_monte_carlo_matches_the_reference_on_the_demo():
    from pathlib import Path

    from core.files.scenario import load_scenario
    from core.plan.pipeline import make_plan

    demo = Path(__file__).resolve().parents[1] / "sample_almanacs" / "demo_scenario.toml"
    plan = make_plan(load_scenario(demo), monte_carlo=False)
    _same_ttff_distribution(plan.timeline_inputs, 1500, 2027)


def test_ks_comparison_has_power():
    """A TTFF shifted by a tenth of its spread is told apart (the test above can fail)."""
    inp = random_inputs(4)
    fast = monte_carlo_ttff(inp, 600, seed=1)
    ref = monte_carlo_ttff_reference(inp, 600, seed=2)
    a = fast.samples_s[np.isfinite(fast.samples_s)]
    b = ref.samples_s[np.isfinite(ref.samples_s)]
    assert ks_2samp(a + 0.3 * b.std(), b).pvalue < 1e-3


def test_vectorized_monte_carlo_does_not_depend_on_the_batch(monkeypatch):
    """Runs are advanced in batches; the statistics of a seed stay a property of the seed
    and batch size alone (reproducible), and a batch of one run equals the whole process."""
    import core.plan.timeline as timeline_mod

    inp = random_inputs(6)
    a = monte_carlo_ttff(inp, 300, seed=5)
    b = monte_carlo_ttff(inp, 300, seed=5)
    np.testing.assert_array_equal(a.samples_s, b.samples_s)
    monkeypatch.setattr(timeline_mod, "MC_BATCH_RUNS", 1)
    c = monte_carlo_ttff(inp, 300, seed=5)
    assert c.n_runs == 300 and ks_2samp(a.samples_s[np.isfinite(a.samples_s)],
                                        c.samples_s[np.isfinite(c.samples_s)]).pvalue > 1e-3

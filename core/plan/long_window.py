"""A plan over a long window (a week at 1 s) with memory that does not grow with the steps.

:func:`core.plan.pipeline.make_plan` keeps every stage's (S, T) arrays over the whole
window (several hundred bytes a satellite-step), so it is limited to
PLAN_MAX_SATELLITE_STEPS. :func:`make_long_plan` gives the same plan for any length:

1. The scenario's grid is cut into blocks of about LONG_PLAN_BLOCK_SAMPLES satellite-samples,
   each a whole number of :func:`core.sky.predict.predict`'s own blocks and predicted on
   the whole grid's node lattice (``node_anchor_s``), so that every sample is predicted
   exactly as by one call over the whole grid. Each block is joined
   with the last three samples of the block before and the first three of the block after
   (the windows' time derivatives are central differences three deep), so its windows
   equal the whole grid's.
2. Per block: the plausibility guard (core.sky.result_guard), the mask crossings and
   culminations (:class:`core.sky.predict.PassFinder`), the Doppler windows (stages 1-2 of
   the pipeline) and what the output needs of the rest: per satellite the samples in view,
   the highest elevation in view and the largest share of each window term in view.
3. Kept from the block: the prediction and the windows at the only grid times the channel
   timeline can read. Its events are the window start, the rises and the sets (refined
   crossing times), and at an event t it reads the values at the last grid time at or before
   t and, where those are not finite, at the next one (core.plan.timeline; the search
   summaries and the table rows read the same two). So the two grid times around every
   crossing are kept, plus the first and last of the window: a few thousand a week.
4. ``make_plan`` runs on that reduced grid. Every later stage works sample by sample (the
   detection table sits on a fixed C/N0 lattice), so the timeline, the Monte Carlo and the
   per-satellite searches are those of the whole grid; the reduced grid's (S, K) arrays
   are not the window's and are not shown. A satellite the guard drops in any block is
   dropped from the kept columns at the end (every stage is per satellite row).

Memory: the working set of one block (a few hundred MB at LONG_PLAN_BLOCK_SAMPLES) plus
the kept columns, which grow with the passes in the window (not with the steps): about
2 x 3 passes a day per satellite. The per-step window listing (the plan JSON's "windows")
is not made; :mod:`planner_gui.cli.plan` leaves it out on request (``--no-windows``).
"""

from __future__ import annotations

import time as _time
from dataclasses import dataclass, replace

import numpy as np

from ..ground.errors import ComputationError, InputError
from ..ground.timeutil import TimeGrid, time_grid
from ..orbits.orbit_margin import margin_extrapolated
from ..orbits.orbit_set import OrbitSet
from ..search.windows import DopplerWindows, shift_summary
from ..sky.predict import PassFinder, Prediction, failure_warnings, predict
from ..sky.predict import blocks as predict_blocks
from .pipeline import (
    CancelFn,
    Plan,
    PreparedGeometry,
    ProgressFn,
    _check_cancel,
    _dedupe,
    _report,
    acquisition_uncertainty,
    first_windows,
    geometry_key,
    give_first_windows,
    load_satellites,
    make_plan,
    old_data_warnings,
    orbit_margins,
    plan_rows,
    plan_to_json,
)
from .spec import Scenario

# Satellite-samples per block: each block's stages hold a few dozen (S, n) arrays.
LONG_PLAN_BLOCK_SAMPLES = 200_000
# Neighbour samples joined on either side of a block (np.gradient, three deep: D'', D''', D'''').
_HALO = 3

_PRED_ARRAYS = ("azimuth_deg", "elevation_deg", "range_m", "doppler_hz", "doppler_rate_hz_s",
                "elevation_rate_deg_s", "sat_speed_m_s", "valid")


@dataclass
class LongPlan:
    """A plan made block by block (:func:`make_long_plan`).

    ``plan`` is the pipeline's plan on the reduced grid (``kept_times``): its satellites,
    timeline, Monte Carlo, bins design, sensitivity and warnings are the window's; its (S, K)
    arrays are not and must not be read as the window's. The per-satellite figures of the
    whole window are ``in_view_steps``, ``max_elevation_deg`` (NaN when never in view) and
    ``window_terms_max_hz`` (largest share of each window term in view).
    """

    plan: Plan
    n_times: int
    in_view_steps: np.ndarray
    max_elevation_deg: np.ndarray
    window_terms_max_hz: dict[str, np.ndarray]
    n_blocks: int

    @property
    def kept_times(self) -> int:
        return len(self.plan.times)

    def summary_text(self) -> str:
        return self.plan.summary_text()


def _cols(pred: Prediction, idx) -> Prediction:
    """The prediction at grid columns ``idx`` (slice or index array)."""
    changes = {n: getattr(pred, n)[:, idx] for n in _PRED_ARRAYS}
    return replace(pred, times=TimeGrid(pred.times.unix_s[idx]), warnings=[], **changes)


def _join(preds: list[Prediction]) -> Prediction:
    if len(preds) == 1:
        return preds[0]
    changes = {n: np.concatenate([getattr(p, n) for p in preds], axis=1) for n in _PRED_ARRAYS}
    u = np.concatenate([p.times.unix_s for p in preds])
    return replace(preds[0], times=TimeGrid(u), warnings=[], **changes)


def _rows(pred: Prediction, keep: np.ndarray) -> Prediction:
    changes = {n: getattr(pred, n)[keep] for n in _PRED_ARRAYS}
    return replace(pred, ids=[pred.ids[i] for i in keep],
                   signal_ids=[pred.signal_ids[i] for i in keep],
                   carrier_hz=pred.carrier_hz[keep], **changes)


def _windows_part(w: DopplerWindows, idx, rows=slice(None)) -> DopplerWindows:
    """Windows at columns ``idx`` (and ``rows``) as full (S, K) arrays; arrays shared
    between fields stay shared."""
    shape = np.asarray(w.nominal_hz).shape
    memo: dict[int, np.ndarray] = {}

    def cut(a):
        if id(a) not in memo:
            memo[id(a)] = np.broadcast_to(np.asarray(a, dtype=float), shape)[rows][:, idx]
        return memo[id(a)]

    return DopplerWindows(cut(w.nominal_hz), cut(w.low_hz), cut(w.high_hz),
                          {k: cut(v) for k, v in w.terms_low_hz.items()},
                          {k: cut(v) for k, v in w.terms_high_hz.items()})


def _join_windows(parts: list[DopplerWindows]) -> DopplerWindows:
    def cat(xs):
        return np.concatenate(xs, axis=1)

    first = parts[0]
    return DopplerWindows(cat([p.nominal_hz for p in parts]), cat([p.low_hz for p in parts]),
                          cat([p.high_hz for p in parts]),
                          {k: cat([p.terms_low_hz[k] for p in parts]) for k in first.terms_low_hz},
                          {k: cat([p.terms_high_hz[k] for p in parts]) for k in first.terms_high_hz})


def _outer_blocks(n_s: int, u: np.ndarray, block_samples: int) -> list[tuple[int, int]]:
    """Whole runs of predict's own blocks, about ``block_samples`` satellite-samples each."""
    out: list[tuple[int, int]] = []
    target = max(1, block_samples // max(n_s, 1))
    a0 = None
    for a, b in predict_blocks(n_s, u):
        if a0 is None:
            a0 = a
        if b - a0 >= target:
            out.append((a0, b))
            a0 = None
    if a0 is not None:
        out.append((a0, u.size))
    return out


def make_long_plan(sc: Scenario, progress: ProgressFn | None = None,
                   cancel: CancelFn | None = None, monte_carlo: bool = True,
                   block_samples: int = LONG_PLAN_BLOCK_SAMPLES) -> LongPlan:
    """The plan of ``sc`` computed block by block (see the module doc); equal to
    ``make_plan(sc)`` (tests/test_long_window.py) with memory bounded by the block size
    and the number of passes."""
    from ..sky.result_guard import implausible_satellites

    t_start = _time.perf_counter()
    orbits, by_system, warnings = load_satellites(sc, progress)
    from ..ground.geodesy import Site

    site = Site(sc.site.lat_deg, sc.site.lon_deg, sc.site.height_m)
    grid = time_grid(sc.time.start, sc.time.end, sc.time.step_s)
    u = grid.unix_s
    n_t = u.size
    if n_t < 2:
        raise InputError("the test window must hold at least two time steps", field="time.step_s")
    n_s = len(orbits)
    mask = sc.mask.elevation_deg
    unc = acquisition_uncertainty(sc)
    healthy = np.array([e.info.healthy for e in orbits.entries])
    outer = _outer_blocks(n_s, u, block_samples)
    failures: dict = {}
    cache: dict[int, Prediction] = {}

    def pred_of(j: int) -> Prediction:
        if j not in cache:
            a, b = outer[j]
            cache[j] = predict(orbits, site, u[a:b], signals=by_system, failures=failures,
                               node_anchor_s=float(u[0]))
        return cache[j]

    finder = PassFinder(orbits.ids, mask)
    reasons: dict[int, str] = {}
    no_position: dict[int, str] = {}
    ever_valid = np.zeros(n_s, dtype=bool)
    in_view = np.zeros(n_s, dtype=np.int64)
    max_el = np.full(n_s, -np.inf)
    terms_max: dict[str, np.ndarray] = {}
    old: set[str] = set()
    marks: set[int] = {0, n_t - 1}
    kept_pred: list[Prediction] = []
    kept_w: list[DopplerWindows] = []
    kept_cols: list[np.ndarray] = []
    ids = orbits.ids
    for j, (a, b) in enumerate(outer):
        _check_cancel(cancel)
        _report(progress, 0.1 + 0.45 * j / len(outer),
                f"propagating and reducing block {j + 1} of {len(outer)}")
        body = pred_of(j)
        left = min(_HALO, a)
        right = min(_HALO, n_t - b)
        parts = ([_cols(pred_of(j - 1), slice(-left, None))] if left else []) + [body] + \
            ([_cols(pred_of(j + 1), slice(0, right))] if right else [])
        ext = _join(parts)
        for k in [k for k in cache if k < j]:
            del cache[k]
        e0 = a - left                                      # global column of ext[:, 0]
        # The guard, on this block's samples ("no finite position" counts only when no
        # block has one).
        for s, why in implausible_satellites(orbits, body).items():
            if body.valid[s].any():
                reasons.setdefault(s, why)
            else:
                no_position.setdefault(s, why)
        ever_valid |= body.valid.any(axis=1)
        # Crossings over [a, b] (this block and the next one's first sample).
        piece = _cols(ext, slice(left, left + (b - a) + (1 if right else 0)))
        s_idx, cross = finder.add(piece)
        k_cross = np.searchsorted(u, cross, side="right") - 1
        marks.update(k_cross.tolist())
        marks.update((k_cross + 1).tolist())
        el_ok = np.where(ext.valid, ext.elevation_deg, -90.0)
        vis_ext = ext.valid & (el_ok >= mask) & healthy[:, None]
        # Visibility changes no crossing explains (propagation starting or stopping in view).
        pv = piece.valid
        pvis = vis_ext[:, left:left + pv.shape[1]]
        _, jj = np.nonzero((pvis[:, 1:] != pvis[:, :-1]) & ~(pv[:, 1:] & pv[:, :-1]))
        marks.update((a + jj + 1).tolist())
        marks.update((a + jj + 2).tolist())
        # Reductions of the whole window.
        vb = vis_ext[:, left:left + (b - a)]
        in_view += vb.sum(axis=1)
        eb = body.elevation_deg
        max_el = np.maximum(max_el, np.where(vb, eb, -np.inf).max(axis=1))
        gb = PreparedGeometry((), orbits, site, ext.times, ext, None, [], ext.signal_ids, vis_ext,
                              [], 0.0)
        if sc.time.uncertainty_s > 0:
            gb.shifted = shift_summary(orbits, site, ext.times, sc.time.uncertainty_s, by_system)
        margins = orbit_margins(sc.search, gb)
        body_cols = slice(left, left + (b - a))
        for s, (kind, age) in enumerate(zip(margins.kinds, margins.age_s)):
            if bool(np.any(margin_extrapolated(kind, age[body_cols]))):
                old.add(ids[s])
        w_raw, w_first = first_windows(gb, unc, margins)
        for name, v in w_first.share_hz.items():
            m = np.where(vb, np.asarray(v)[:, body_cols], -np.inf).max(axis=1)
            terms_max[name] = np.maximum(terms_max.get(name, np.full(n_s, -np.inf)), m)
        here = np.array(sorted(k for k in marks if a <= k < b), dtype=np.int64)
        marks = {k for k in marks if k >= b}
        if here.size:
            kept_cols.append(here)
            kept_pred.append(_cols(ext, here - e0))
            kept_w.append(_windows_part(w_raw, here - e0))
        del ext, gb, margins, w_raw, w_first, parts
    cache.clear()

    # The guard over the whole window: a satellite with no finite position anywhere, or
    # one failing a check in any block, is dropped.
    bad = dict(reasons)
    bad.update({s: why for s, why in no_position.items() if not ever_valid[s]})
    bad = dict(sorted(bad.items()))
    keep = np.array([s for s in range(n_s) if s not in bad], dtype=int)
    if keep.size == 0:
        first = next(iter(bad))
        raise InputError(f"no satellite with a possible orbit is left: {orbits.entries[first].info.sat_id}"
                         f" {bad[first]}", file=orbits.entries[first].info.source_file)
    guard_warnings = [f"{orbits.entries[s].info.sat_id} ({orbits.entries[s].info.source_file}): "
                      f"{why}; satellite dropped (check its orbit record)" for s, why in bad.items()]
    pred_warnings = list(orbits.warnings) + failure_warnings(orbits, failures, n_t) + guard_warnings
    kept_orbits = OrbitSet([orbits.entries[i] for i in keep], list(orbits.files),
                           list(orbits.warnings) + guard_warnings)
    cols = np.concatenate(kept_cols)
    red_pred = _rows(_join(kept_pred), keep)
    red_pred = replace(red_pred, times=TimeGrid(u[cols]), warnings=pred_warnings)
    w_red = _windows_part(_join_windows(kept_w), slice(None), keep)
    del kept_pred, kept_w
    passes_found = [p for p in finder.passes() if p.sat_id in set(kept_orbits.ids)]
    healthy_k = healthy[keep]
    unhealthy = [e.info.sat_id for e in kept_orbits.entries if not e.info.healthy]
    if unhealthy:
        warnings.append(f"unhealthy, kept but not searched: {', '.join(unhealthy)}")
    if not (in_view[keep] > 0).any():
        raise ComputationError(
            f"no healthy satellite rises above the {mask:g} deg elevation mask during the test "
            "window (check the site, the window and the orbit files' dates)")
    visible = red_pred.valid & (red_pred.elevation_deg >= mask) & healthy_k[:, None]
    g = PreparedGeometry(geometry_key(sc), kept_orbits, site, red_pred.times, red_pred, None,
                         passes_found, red_pred.signal_ids, visible, warnings + red_pred.warnings,
                         _time.perf_counter() - t_start)
    margins_red = orbit_margins(sc.search, g)
    give_first_windows(g, unc, margins_red, w_red)
    if first_windows(g, unc, margins_red)[0] is not w_red:
        raise ComputationError("internal: the plan would not use the windows of the blocks")
    plan = make_plan(sc, prepared=g, progress=progress, cancel=cancel, monte_carlo=monte_carlo)
    # The old-data warning of the whole window, not of the kept times.
    full_old = old_data_warnings(sc.search, sorted(old & set(kept_orbits.ids)))
    red_old = margins_red.warnings
    plan_warnings = [w for w in plan.warnings if w not in red_old]
    at = len(_dedupe(list(g.warnings)))
    plan.warnings = _dedupe(plan_warnings[:at] + full_old + plan_warnings[at:])
    from ..orbits.broadcast import records_in_use

    for sp, e in zip(plan.satellites, kept_orbits.entries):
        sp.broadcast_records = records_in_use(e, u)
    plan.compute_s = _time.perf_counter() - t_start
    plan.propagate_s = g.propagate_s
    return LongPlan(plan, n_t, in_view[keep], np.where(np.isfinite(max_el[keep]), max_el[keep], np.nan),
                    {k: v[keep] for k, v in terms_max.items()}, len(outer))


def long_plan_rows(lp: LongPlan) -> list[dict]:
    """:func:`core.plan.pipeline.plan_rows` of the whole window."""
    rows = plan_rows(lp.plan)
    index = {sp.sat_id: s for s, sp in enumerate(lp.plan.satellites)}
    for r in rows:
        s = index[r["id"]]
        r["in_view"] = round(float(lp.in_view_steps[s] / lp.n_times), 3)
        r["max_el_deg"] = round(float(lp.max_elevation_deg[s]), 1)
    return rows


def long_plan_to_json(lp: LongPlan) -> dict:
    """:func:`core.plan.pipeline.plan_to_json` of the whole window without the per-step
    window lists (``"windows": null`` for every satellite)."""
    out = plan_to_json(lp.plan)
    for s, sat in enumerate(out["satellites"]):
        sat["windows"] = None
        seen = lp.in_view_steps[s] > 0
        sat["window_terms_max_hz"] = {name: round(float(v[s]), 3) if seen else None
                                      for name, v in lp.window_terms_max_hz.items()}
    return out

"""A sweep: the same scenario planned for many departure times and search settings.

The product of a list of departure times and, for each varied scenario key, a list of
values. For every (departure, setting) pair the full plan is made by the pipeline
(:func:`core.plan.pipeline.make_plan`); what the sweep keeps of it is one
:class:`SweepRow`: the Monte Carlo time to first fix (median and 95th percentile, of the
worst test event when the scenario has them), the sensitivity, the largest first search
and its bins.

How the work is shared out:

- A *unit* is one departure with some (usually all) settings. The geometry of the
  departure (:func:`~core.plan.pipeline.prepare_geometry`: orbits, propagation, passes) is
  computed once per unit and reused by every setting of it through
  ``make_plan(..., prepared=...)``; only search and receiver keys may be varied, so the
  geometry never depends on the setting. A drive's geometry (route, surroundings, every
  event's propagation and passes) is likewise made once per departure
  (:func:`core.plan.events.drive_geometry`) and planned per setting
  (:func:`core.plan.events.plan_drive_search`).
- Units run in this process (``workers=1``), in a local process pool
  (``concurrent.futures``, default: every core) or on a Dask distributed cluster (a
  ``Client`` or scheduler address). On a cluster the orbit files are read once here and
  shipped once to every worker (a worker plugin writes them into the worker's own folder);
  the units then name only the shipped copies.
- Every plan uses the scenario's own Monte Carlo seed, so a row depends only on its
  departure and setting, never on where or in which order it ran: the local pool and the
  cluster give equal rows, and settings are compared on common random numbers.
- A cancel callback (or Ctrl+C in the caller) stops every unit at the pipeline's next
  cancel check; nothing is returned then (:class:`~core.ground.errors.Cancelled`).

Ranking: settings are ordered by their worst 95th-percentile TTFF over the departures
(a run without a fix counts as beyond the window), then by the smallest share of runs
with a fix (higher first: it separates settings whose worst case has no 95th percentile),
then by the mean of the 95th percentiles, then by the worst median.
"""

from __future__ import annotations

import itertools
import math
import os
import signal
import threading
from collections.abc import Callable, Iterable, Mapping, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, field, replace
from datetime import datetime, timedelta
from typing import Any

import numpy as np

from ..ground.errors import Cancelled, ComputationError, InputError, ScenarioError
from ..ground.timeutil import iso_z, parse_iso_utc
from .spec import KEY_RULES, RULES_BY_DOTTED, KeyRule, Scenario

# Sections whose keys may be varied: they change the search, never the geometry
# (receiver.signals does, and is left out; site, time and mask are the departure's).
SWEEP_SECTIONS = ("search", "receiver", "signal")
_NOT_VARIED = {"receiver.signals"}
SWEEP_KEYS: tuple[str, ...] = tuple(r.dotted for r in KEY_RULES
                                    if r.section in SWEEP_SECTIONS and r.dotted not in _NOT_VARIED)
MAX_DEPARTURES = 10_000
MAX_COMBINATIONS = 200_000
MAX_DEPARTURE_STEP_S = 7 * 86_400.0

ProgressFn = Callable[[int, int], None]      # (combinations done, total)
CancelFn = Callable[[], bool]


# --- what to sweep ---------------------------------------------------------------------

@dataclass(frozen=True)
class SweepSpec:
    """Departures x settings. ``settings[i]`` holds one value per key in ``keys``."""

    departures_unix_s: tuple[float, ...]
    keys: tuple[str, ...]                     # dotted scenario keys, e.g. "search.coherent_ms"
    settings: tuple[tuple[Any, ...], ...]     # () keys -> one empty setting: the scenario's own
    window_s: float                           # length of every departure's planning window

    @property
    def n_combinations(self) -> int:
        return len(self.departures_unix_s) * len(self.settings)

    def setting_dict(self, i: int) -> dict[str, Any]:
        return dict(zip(self.keys, self.settings[i]))

    def setting_text(self, i: int) -> str:
        """``coherent_ms=4 noncoherent=5`` (bare key names where they are unambiguous)."""
        if not self.keys:
            return "as in the scenario"
        return " ".join(f"{short_key(k)}={_show(v)}" for k, v in zip(self.keys, self.settings[i]))


def short_key(dotted: str) -> str:
    """The bare key name when no other varied section has a key of that name."""
    section, key = dotted.split(".", 1)
    same = [k for k in SWEEP_KEYS if k.split(".", 1)[1] == key]
    return key if len(same) == 1 else dotted


def resolve_key(name: str, option: str = "--vary") -> KeyRule:
    """The rule of a varied key given as ``coherent_ms`` or ``search.coherent_ms``."""
    text = name.strip()
    if text in RULES_BY_DOTTED and text in SWEEP_KEYS:
        return RULES_BY_DOTTED[text]
    matches = [k for k in SWEEP_KEYS if k.split(".", 1)[1] == text]
    if len(matches) == 1:
        return RULES_BY_DOTTED[matches[0]]
    if len(matches) > 1:
        raise InputError(f"'{text}' is a key of several sections; write one of "
                         f"{', '.join(matches)}", field=option)
    if text in RULES_BY_DOTTED or any(r.key == text for r in KEY_RULES):
        raise InputError(f"'{text}' cannot be varied in a sweep (it changes the geometry or "
                         f"is the departure's); keys of [{'], ['.join(SWEEP_SECTIONS)}] can, "
                         f"except receiver.signals", field=option)
    raise InputError(f"'{text}' is not a scenario key that a sweep can vary; use one of "
                     f"{', '.join(short_key(k) for k in SWEEP_KEYS)}", field=option)


def parse_value(rule: KeyRule, text: str, option: str = "--vary") -> Any:
    """A value typed as text (command line, dialog) in the type its key needs; the range
    is checked later by the scenario rules, which name the key, unit and range."""
    t = text.strip()
    where = f"{option} {short_key(rule.dotted)}"
    if rule.kind == "number":
        try:
            v = float(t)
        except ValueError:
            raise InputError(f"'{t}' is not a number ({_range_of(rule)})", field=where) from None
        if not math.isfinite(v):
            raise InputError(f"'{t}' is not a finite number ({_range_of(rule)})", field=where)
        return int(v) if v.is_integer() and abs(v) < 2**53 else v
    if rule.kind == "integer":
        try:
            return int(t)
        except ValueError:
            raise InputError(f"'{t}' is not a whole number ({_range_of(rule)})", field=where) from None
    if rule.kind == "bool":
        low = t.lower()
        if low in ("true", "yes", "1"):
            return True
        if low in ("false", "no", "0"):
            return False
        raise InputError(f"'{t}' must be true or false", field=where)
    if rule.kind == "choice":
        if t not in rule.choices:
            raise InputError(f"'{t}' must be one of {', '.join(rule.choices)}", field=where)
        return t
    raise InputError(f"values of this kind ({rule.kind}) cannot be varied", field=where)


def departure_times(start: str, end: str, step_s: float, option: str = "--departures") -> tuple[float, ...]:
    """Departure instants from ``start`` to ``end`` inclusive every ``step_s`` (UTC)."""
    t0 = parse_iso_utc(start, field=f"{option} START").timestamp()
    t1 = parse_iso_utc(end, field=f"{option} END").timestamp()
    if not (math.isfinite(step_s) and 1.0 <= step_s <= MAX_DEPARTURE_STEP_S):
        raise InputError(f"step {step_s:g} s is outside 1 to {MAX_DEPARTURE_STEP_S:g} s",
                         field=f"{option} STEP_S")
    if t1 < t0:
        raise InputError(f"END {end} is before START {start}", field=f"{option} END")
    n = int(math.floor((t1 - t0) / step_s + 1e-9)) + 1
    if n > MAX_DEPARTURES:
        raise InputError(f"{n} departures; at most {MAX_DEPARTURES} (use a larger STEP_S)",
                         field=option)
    return tuple(t0 + i * step_s for i in range(n))


def sweep_spec(scenario: Scenario, vary: Mapping[str, Sequence[Any]] | Iterable[tuple[str, Sequence[Any]]] = (),
               departures_unix_s: Sequence[float] | None = None, *,
               option: str = "--vary") -> SweepSpec:
    """Check a sweep against the scenario rules and build its :class:`SweepSpec`.

    ``vary`` maps key names (bare or dotted) to lists of values (numbers, or text parsed
    as :func:`parse_value` does). Every value and every combination is validated by
    :meth:`Scenario.with_changes`; a bad one raises :class:`InputError` naming the option,
    the key, its unit and its allowed range. Without departures the scenario's own start
    is the only one."""
    items = list(vary.items()) if isinstance(vary, Mapping) else list(vary)
    keys: list[str] = []
    values: list[list[Any]] = []
    for name, vals in items:
        rule = resolve_key(name, option)
        where = f"{option} {short_key(rule.dotted)}"
        if rule.dotted in keys:
            raise InputError("the key is varied twice; give all its values in one list", field=where)
        vals = list(vals)
        if not vals:
            raise InputError("no value given", field=where)
        typed = [parse_value(rule, v, option) if isinstance(v, str) else v for v in vals]
        if len(set(map(repr, typed))) != len(typed):
            raise InputError("a value is listed twice", field=where)
        for v in typed:
            _checked(scenario, {rule.dotted: v}, option)
        keys.append(rule.dotted)
        values.append(typed)
    settings = tuple(itertools.product(*values)) if keys else ((),)
    deps = tuple(float(t) for t in (departures_unix_s if departures_unix_s is not None
                                    else (scenario.time.start_unix_s,)))
    if not deps:
        raise InputError("no departure time", field="--departures")
    total = len(deps) * len(settings)
    if total > MAX_COMBINATIONS:
        raise InputError(f"{len(deps)} departures x {len(settings)} settings = {total} plans; "
                         f"at most {MAX_COMBINATIONS}", field=option)
    for s in settings:      # cross-key rules (C/N0 at mask <= zenith) and the signal checks
        _integration_checked(_checked(scenario, dict(zip(keys, s)), option), keys, option)
    spec = SweepSpec(deps, tuple(keys), settings, scenario.time.duration_s)
    for t in (deps[0], deps[-1]):
        departure_scenario(scenario, spec, t)
    return spec


def _checked(scenario: Scenario, values: Mapping[str, Any], option: str) -> Scenario:
    try:
        return scenario.with_changes(**_as_sections(values))
    except ScenarioError as err:
        problems = getattr(err, "problems", None) or [err]
        p = problems[0]
        key = short_key(p.field) if p.field in SWEEP_KEYS else (p.field or "")
        raise InputError(p.message, field=f"{option} {key}".strip()) from None


def _integration_checked(sc: Scenario, keys: Sequence[str], option: str) -> None:
    """The pipeline's integration stage for the planned signals (the first of each system,
    as the plan takes them): a coherent time the signal does not allow is refused here,
    before any plan runs."""
    from ..ground.signals import SIGNALS
    from .pipeline import integration

    first: dict[str, str] = {}
    for sid in sc.receiver.signals:
        first.setdefault(SIGNALS[sid].system, sid)
    try:
        integration(sc, list(first.values()))
    except InputError as err:
        varied = [k for k in keys if k.split(".", 1)[1] in (err.field or "")]
        key = short_key(varied[0]) if varied else (err.field or "")
        raise InputError(err.message, field=f"{option} {key}".strip()) from None


def _as_sections(values: Mapping[str, Any]) -> dict[str, dict[str, Any]]:
    out: dict[str, dict[str, Any]] = {}
    for dotted, v in values.items():
        section, key = dotted.split(".", 1)
        out.setdefault(section, {})[key] = v
    return out


def departure_scenario(scenario: Scenario, spec: SweepSpec, departure_unix_s: float) -> Scenario:
    """The scenario with its planning window moved to start at the departure (same length).

    A drive moves with it: test events given as a time are moved by the same offset
    (events at a waypoint or a distance follow the route's own timing)."""
    start = iso_z(departure_unix_s)
    end = iso_z(departure_unix_s + spec.window_s)
    offset = departure_unix_s - scenario.time.start_unix_s
    events = getattr(scenario, "events", ())
    if events and offset:
        moved = tuple(replace(ev, at=ev.at + timedelta(seconds=offset)) if isinstance(ev.at, datetime)
                      else ev for ev in events)
        scenario = replace(scenario, events=moved)
    try:
        return scenario.with_changes(time={"start": start, "end": end})
    except ScenarioError as err:
        raise InputError(f"departure {start}: {err}", field="--departures") from None


def setting_scenario(scenario: Scenario, spec: SweepSpec, setting: int) -> Scenario:
    """The scenario with one setting of the sweep applied (the window unchanged)."""
    if not spec.keys:
        return scenario
    return scenario.with_changes(**_as_sections(spec.setting_dict(setting)))


def sweep_cell_scenario(scenario: Scenario, spec: SweepSpec, setting: int, departure_unix_s: float) -> Scenario:
    """The scenario a sweep cell stands for: its setting and its departure applied."""
    return setting_scenario(departure_scenario(scenario, spec, departure_unix_s), spec, setting)


# --- results -------------------------------------------------------------------------------

@dataclass(frozen=True)
class SweepRow:
    """What one (departure, setting) plan gives. Times in s from the departure; ``inf``
    = no fix in the window (for the 95th percentile: more than 5 % of the runs)."""

    departure_unix_s: float
    setting: int                      # index into SweepSpec.settings
    ttff_median_s: float
    ttff_p95_s: float
    ttff_expected_s: float            # the expected-time timeline's TTFF
    fix_fraction: float               # Monte Carlo runs that fixed in the window
    worst_event: str                  # the event the TTFF figures belong to
    sensitivity_dbhz: float           # the weakest signal's C/N0 for Pd = 0.9
    largest_search_s: float           # longest expected first search of one satellite
    largest_search_id: str
    largest_search_bins: int          # frequency bins of that search
    max_bins: int                     # most frequency bins of any first search
    n_searched: int                   # satellites given a first search
    warnings: tuple[str, ...] = ()
    sensitivity_by_signal_dbhz: tuple[tuple[str, float], ...] = ()


@dataclass(frozen=True)
class SettingRank:
    setting: int
    worst_p95_s: float
    mean_p95_s: float
    worst_median_s: float
    best_departure_unix_s: float      # lowest p95, then most runs with a fix (earliest on ties)
    worst_departure_unix_s: float     # highest p95, then fewest runs with a fix (earliest on ties)
    sensitivity_dbhz: float           # the weakest signal's, worst over the departures
    largest_search_s: float           # over the departures
    max_bins: int                     # over the departures
    worst_fix_fraction: float = 1.0   # the smallest share of runs with a fix


@dataclass
class SweepResult:
    spec: SweepSpec
    rows: list[SweepRow]              # in (departure, setting) order
    ranking: list[SettingRank]        # best first
    warnings: list[str] = field(default_factory=list)
    compute_s: float = 0.0
    workers: int = 1
    where: str = "local"              # "local", "pool" or the Dask scheduler address

    @property
    def best(self) -> SettingRank:
        return self.ranking[0]

    def row(self, departure: int, setting: int) -> SweepRow:
        return self.rows[departure * len(self.spec.settings) + setting]

    def p95_grid_s(self) -> np.ndarray:
        """(settings, departures) TTFF p95 (inf where more than 5 % of the runs fail)."""
        nd, ns = len(self.spec.departures_unix_s), len(self.spec.settings)
        return np.array([r.ttff_p95_s for r in self.rows], dtype=float).reshape(nd, ns).T


def rank_settings(spec: SweepSpec, rows: Sequence[SweepRow]) -> list[SettingRank]:
    ns = len(spec.settings)
    out = []
    for s in range(ns):
        mine = [r for r in rows if r.setting == s]
        p95 = np.array([r.ttff_p95_s for r in mine])
        med = np.array([r.ttff_median_s for r in mine])
        finite = p95[np.isfinite(p95)]
        mean = float(finite.mean()) if finite.size == p95.size else math.inf
        order = sorted(mine, key=lambda r: (r.ttff_p95_s, -r.fix_fraction, r.ttff_median_s,
                                            r.departure_unix_s))
        worst = max(mine, key=lambda r: (r.ttff_p95_s, -r.fix_fraction, r.ttff_median_s,
                                         -r.departure_unix_s))
        out.append(SettingRank(s, float(p95.max()), mean, float(med.max()),
                               order[0].departure_unix_s, worst.departure_unix_s,
                               _nanmax([r.sensitivity_dbhz for r in mine]),
                               _nanmax([r.largest_search_s for r in mine]),
                               max(r.max_bins for r in mine),
                               min(r.fix_fraction for r in mine)))
    return sorted(out, key=lambda r: (r.worst_p95_s, -r.worst_fix_fraction, r.mean_p95_s,
                                      r.worst_median_s, r.setting))


def _nanmax(values: Sequence[float]) -> float:
    v = np.array(values, dtype=float)
    v = v[~np.isnan(v)]                 # departures without a plan
    return float(v.max()) if v.size else math.nan


def best_scenario(scenario: Scenario, result: SweepResult) -> Scenario:
    """The scenario with the best setting and that setting's best departure applied."""
    b = result.best
    return sweep_cell_scenario(scenario, result.spec, b.setting, b.best_departure_unix_s)


# --- as rows and JSON -----------------------------------------------------------------------

SWEEP_ROW_COLUMNS = ["departure", "setting", "rank", "ttff_median_s", "ttff_p95_s", "ttff_expected_s",
               "fix_fraction", "worst_event", "sensitivity_dbhz", "largest_search_s",
               "largest_search_id", "largest_search_bins", "max_bins", "satellites_searched"]
SWEEP_RANK_COLUMNS = ["rank", "setting", "worst_p95_s", "worst_fix_fraction", "mean_p95_s",
                      "worst_median_s", "best_departure", "worst_departure", "sensitivity_dbhz",
                      "largest_search_s", "max_bins"]


def _fin(x: float, nd: int = 3) -> float | None:
    return round(float(x), nd) if math.isfinite(x) else None


def sweep_rows(result: SweepResult) -> list[dict]:
    """One dict per (departure, setting), with the varied keys as columns; figures that
    do not exist (no fix in the window, no plan) are None."""
    spec = result.spec
    rank_of = {r.setting: i + 1 for i, r in enumerate(result.ranking)}
    out = []
    for r in result.rows:
        d: dict[str, Any] = {"departure": iso_z(r.departure_unix_s), "setting": r.setting,
                             "rank": rank_of[r.setting]}
        d.update({short_key(k): v for k, v in spec.setting_dict(r.setting).items()})
        d.update({"ttff_median_s": _fin(r.ttff_median_s, 2), "ttff_p95_s": _fin(r.ttff_p95_s, 2),
                  "ttff_expected_s": _fin(r.ttff_expected_s, 2),
                  "fix_fraction": round(r.fix_fraction, 4), "worst_event": r.worst_event,
                  "sensitivity_dbhz": _fin(r.sensitivity_dbhz, 2),
                  "largest_search_s": _fin(r.largest_search_s, 2),
                  "largest_search_id": r.largest_search_id,
                  "largest_search_bins": r.largest_search_bins, "max_bins": r.max_bins,
                  "satellites_searched": r.n_searched,
                  "sensitivity_by_signal_dbhz": {k: round(v, 3) for k, v in r.sensitivity_by_signal_dbhz}})
        out.append(d)
    return out


def ranking_rows(result: SweepResult) -> list[dict]:
    """The settings, best first."""
    out = []
    for i, r in enumerate(result.ranking):
        d: dict[str, Any] = {"rank": i + 1, "setting": result.spec.setting_text(r.setting)}
        d.update({short_key(k): v for k, v in result.spec.setting_dict(r.setting).items()})
        d.update({"worst_p95_s": _fin(r.worst_p95_s, 2),
                  "worst_fix_fraction": round(r.worst_fix_fraction, 4),
                  "mean_p95_s": _fin(r.mean_p95_s, 2),
                  "worst_median_s": _fin(r.worst_median_s, 2),
                  "best_departure": iso_z(r.best_departure_unix_s),
                  "worst_departure": iso_z(r.worst_departure_unix_s),
                  "sensitivity_dbhz": _fin(r.sensitivity_dbhz, 2),
                  "largest_search_s": _fin(r.largest_search_s, 2), "max_bins": r.max_bins})
        out.append(d)
    return out


def sweep_to_json(result: SweepResult, scenario_name: str = "") -> dict:
    spec = result.spec
    return {"scenario": scenario_name,
            "departures": [iso_z(t) for t in spec.departures_unix_s],
            "window_s": spec.window_s,
            "keys": [short_key(k) for k in spec.keys],
            "settings": [{short_key(k): v for k, v in spec.setting_dict(i).items()}
                         for i in range(len(spec.settings))],
            "ranking": ranking_rows(result),
            "rows": sweep_rows(result),
            "warnings": list(result.warnings),
            "workers": result.workers, "where": result.where,
            "compute_s": round(result.compute_s, 3)}


# --- one unit of work ----------------------------------------------------------------------

@dataclass(frozen=True)
class _Unit:
    scenario: Scenario
    spec: SweepSpec
    departure: int
    settings: tuple[int, ...]
    shipped: str | None = None        # name of the worker plugin holding the orbit files


@dataclass(frozen=True)
class EventOutcome:
    """The TTFF figures of one acquisition event of a plan."""

    event_id: str
    median_s: float
    p95_s: float
    expected_s: float
    fix_fraction: float


def is_drive(scenario: Scenario) -> bool:
    """A scenario with a route or test events: every event gets its own plan."""
    return getattr(scenario, "route", None) is not None or bool(getattr(scenario, "events", ()))


def event_outcomes(plan) -> list[EventOutcome]:
    """The TTFF figures of every acquisition event: of a single-site plan (one event, the
    start of its window) or of a drive plan (core.plan.events.DrivePlan, one per event)."""
    events = getattr(plan, "events", None)
    if events is not None:                              # a DrivePlan
        return [_outcome(e.event.id, e.plan) for e in events]
    return [_outcome("start", plan)]


def _outcome(event_id: str, plan) -> EventOutcome:
    ttff = plan.ttff
    expected = plan.timeline.ttff_s
    return EventOutcome(event_id, ttff.median_s, ttff.p95_s,
                        math.inf if expected is None else float(expected), ttff.fix_fraction)


def _row(plan, departure_unix_s: float, setting: int) -> SweepRow:
    """The row of a plan; for a drive, its worst event (longest p95, a no-fix counting
    longest; then the fewest runs with a fix) and that event's plan."""
    events = event_outcomes(plan)
    worst = max(events, key=lambda e: (e.p95_s, -e.fix_fraction, e.median_s, e.expected_s))
    drive_events = getattr(plan, "events", None)
    warnings = list(getattr(plan, "warnings", []))
    if drive_events is not None:
        plan = next(e.plan for e in drive_events if e.event.id == worst.event_id)
        warnings += [f"{worst.event_id}: {w}" for w in plan.warnings]
    else:
        warnings = list(plan.warnings)
    searches = [(sp.search.expected_search_s, sp.sat_id, sp.search.bins)
                for sp in plan.satellites if sp.search is not None]
    if searches:
        big = max(searches, key=lambda x: (x[0], x[2]))
        max_bins = max(x[2] for x in searches)
    else:
        big, max_bins = (0.0, "", 0), 0
    return SweepRow(departure_unix_s, setting, float(worst.median_s), float(worst.p95_s),
                    float(worst.expected_s), float(worst.fix_fraction), worst.event_id,
                    float(max(plan.sensitivity_dbhz.values())), float(big[0]), big[1],
                    int(big[2]), int(max_bins), len(searches), tuple(dict.fromkeys(warnings)),
                    tuple(sorted((k, float(v)) for k, v in plan.sensitivity_dbhz.items())))


def _no_plan_row(departure_unix_s: float, setting: int, why: str) -> SweepRow:
    return SweepRow(departure_unix_s, setting, math.inf, math.inf, math.inf, 0.0, "start",
                    math.nan, math.nan, "", 0, 0, 0, (why,))


def run_unit(unit: _Unit, cancel: CancelFn | None = None, share_geometry: bool = True) -> list[SweepRow]:
    """Plan one departure for some settings, the geometry computed once (with
    ``share_geometry=False`` a drive's geometry is made again for every setting, as a
    plain ``plan_drive`` of each would: the benchmark's baseline)."""
    from .pipeline import make_plan, prepare_geometry

    cancel = cancel or _worker_cancel
    base = unit.scenario
    if unit.shipped is not None:
        from .sweep_cluster import use_shipped_files

        base = use_shipped_files(base, unit.shipped)
    t = unit.spec.departures_unix_s[unit.departure]
    sc_dep = departure_scenario(base, unit.spec, t)
    if is_drive(sc_dep):
        return _run_drive_unit(sc_dep, unit, t, cancel, share_geometry)
    try:
        geometry = prepare_geometry(sc_dep, cancel=cancel)
    except ComputationError as err:      # e.g. nothing above the mask: no fix from here
        return [_no_plan_row(t, s, f"departure {iso_z(t)}: {err}") for s in unit.settings]
    rows = []
    for s in unit.settings:
        plan = make_plan(setting_scenario(sc_dep, unit.spec, s), prepared=geometry, cancel=cancel)
        rows.append(_row(plan, t, s))
    return rows


def _run_drive_unit(sc_dep: Scenario, unit: _Unit, t: float, cancel: CancelFn,
                    share_geometry: bool = True) -> list[SweepRow]:
    """A drive: every event planned by core.plan.events, the worst kept.

    The drive's geometry (route timing, positions, surroundings, every event's
    propagation and passes: core.plan.events.drive_geometry) is made once per departure
    and planned for every setting by plan_drive_search; settings that change it (only
    the receiver's vertical speed, for events without a route) get their own. The rows
    equal those of a plain plan_drive per setting (tests/test_sweep.py)."""
    from .events import drive_geometry, drive_geometry_key, plan_drive, plan_drive_search

    made: dict[tuple, Any] = {}
    rows = []
    for s in unit.settings:
        sc_s = setting_scenario(sc_dep, unit.spec, s)
        try:
            if share_geometry:
                key = drive_geometry_key(sc_s)
                if key not in made:
                    try:
                        made[key] = drive_geometry(sc_s, cancel=cancel)
                    except ComputationError as err:
                        made[key] = err
                if isinstance(made[key], ComputationError):
                    raise made[key]
                drive = plan_drive_search(sc_s, made[key], cancel=cancel)
            else:
                drive = plan_drive(sc_s, cancel=cancel)
        except ComputationError as err:
            rows.append(_no_plan_row(t, s, f"departure {iso_z(t)}: {err}"))
            continue
        if not drive.events:
            rows.append(_no_plan_row(t, s, f"departure {iso_z(t)}: the drive has no event"))
            continue
        rows.append(_row(drive, t, s))
    return rows


def units(scenario: Scenario, spec: SweepSpec, workers: int, shipped: str | None = None) -> list[_Unit]:
    """One unit per departure; with fewer departures than 4 tasks per worker (and more
    than one worker) the settings are split too (each piece then recomputes its
    departure's geometry: worth it only to keep every worker busy)."""
    nd, ns = len(spec.departures_unix_s), len(spec.settings)
    pieces = 1 if nd >= 4 * workers or workers <= 1 else min(ns, math.ceil(4 * workers / nd))
    size = math.ceil(ns / pieces)
    return [_Unit(scenario, spec, d, tuple(range(a, min(a + size, ns))), shipped)
            for d in range(nd) for a in range(0, ns, size)]


# --- running: here, on a process pool, on Dask ---------------------------------------------

def run_sweep(scenario: Scenario, spec: SweepSpec, *, workers: int | None = None,
              client: Any = None, scheduler: str | None = None,
              progress: ProgressFn | None = None, cancel: CancelFn | None = None) -> SweepResult:
    """Run every (departure, setting) plan and rank the settings.

    ``workers=1`` runs here; ``workers=None`` (default) or N > 1 runs on a local process
    pool of N (default: every core); ``client`` (a ``dask.distributed.Client``) or
    ``scheduler`` (its address) runs on that cluster. ``progress(done, total)`` is called
    here as plans complete; when ``cancel()`` returns True, or on KeyboardInterrupt, every
    worker is stopped and :class:`Cancelled` (or the KeyboardInterrupt) is raised."""
    import time as _time

    t0 = _time.perf_counter()
    if client is not None or scheduler is not None:
        import importlib.util

        if importlib.util.find_spec("distributed") is None:
            raise InputError("a cluster sweep needs Dask distributed: pip install 'acqplan[cluster]'",
                             field="--scheduler")
        from .sweep_cluster import run_on_dask

        rows, n, where = run_on_dask(scenario, spec, client, scheduler, progress, cancel)
    else:
        n = max(1, int(workers or os.cpu_count() or 1))
        if n == 1:
            rows, where = _run_here(scenario, spec, progress, cancel), "local"
        else:
            rows, where = _run_pool(scenario, spec, n, progress, cancel), "pool"
    rows.sort(key=lambda r: (r.departure_unix_s, r.setting))
    warnings = list(dict.fromkeys(w for r in rows for w in r.warnings))
    return SweepResult(spec, rows, rank_settings(spec, rows), warnings,
                       _time.perf_counter() - t0, n, where)


def tick(progress: ProgressFn | None, done: int, total: int) -> None:
    if progress is not None:
        progress(done, total)


def _run_here(scenario, spec, progress, cancel) -> list[SweepRow]:
    rows: list[SweepRow] = []
    total = spec.n_combinations
    for unit in units(scenario, spec, 1):
        if cancel is not None and cancel():
            raise Cancelled("sweep cancelled")
        rows += run_unit(unit, cancel)
        tick(progress, len(rows), total)
    return rows


# A worker process's cancel flag (set by the parent) and its SIGINT handling.
_CANCEL_EVENT: Any = None


def _worker_init(event) -> None:
    global _CANCEL_EVENT
    _CANCEL_EVENT = event
    signal.signal(signal.SIGINT, signal.SIG_IGN)   # the parent handles Ctrl+C and stops us


def _worker_cancel() -> bool:
    return _CANCEL_EVENT is not None and _CANCEL_EVENT.is_set()


def _pool_context():
    import multiprocessing as mp

    # forkserver: workers are forked from a clean server process, never from a parent
    # that runs threads (a window, a progress bar); spawn where fork is not available.
    if "forkserver" in mp.get_all_start_methods():
        ctx = mp.get_context("forkserver")
        # loaded once in the server, inherited by every worker it forks
        ctx.set_forkserver_preload(["core.plan.sweep", "core.plan.pipeline", "core.orbits.readers"])
        return ctx
    return mp.get_context("spawn")


_THREAD_VARIABLES = ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS")


@contextmanager
def _one_thread_per_worker():
    """Worker processes start with one BLAS/OpenMP thread each (N workers on N cores, not
    N x N threads). The variables are set only while the workers (and the process server
    they are forked from) start, then restored; a value the user set is kept."""
    saved = {k: os.environ.get(k) for k in _THREAD_VARIABLES}
    for k in _THREAD_VARIABLES:
        os.environ.setdefault(k, "1")
    try:
        yield
    finally:
        for k, v in saved.items():
            if v is None:
                os.environ.pop(k, None)
            else:
                os.environ[k] = v


@contextmanager
def _sigint_as_flag():
    """Ctrl+C while workers start or run becomes a flag polled by the caller, so that no
    process is ever left half-started; outside the main thread nothing changes."""
    hit = []
    if threading.current_thread() is not threading.main_thread():
        yield lambda: False
        return
    previous = signal.signal(signal.SIGINT, lambda *_: hit.append(True))
    try:
        yield lambda: bool(hit)
    finally:
        signal.signal(signal.SIGINT, previous)


def _run_pool(scenario, spec, n, progress, cancel) -> list[SweepRow]:
    from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
    from concurrent.futures.process import BrokenProcessPool

    ctx = _pool_context()
    stop = ctx.Event()
    rows: list[SweepRow] = []
    total = spec.n_combinations
    with _sigint_as_flag() as interrupted:
        pool = ProcessPoolExecutor(max_workers=n, mp_context=ctx, initializer=_worker_init,
                                   initargs=(stop,))
        finished = False
        try:
            with _one_thread_per_worker():
                pending = {pool.submit(run_unit, u) for u in units(scenario, spec, n)}
            while pending:
                if interrupted():
                    raise KeyboardInterrupt
                if cancel is not None and cancel():
                    raise Cancelled("sweep cancelled")
                done, pending = wait(pending, timeout=0.1, return_when=FIRST_COMPLETED)
                for f in done:
                    try:
                        rows += f.result()
                    except BrokenProcessPool:
                        raise ComputationError(
                            "a sweep worker process ended abruptly (out of memory, or killed?); "
                            "try fewer --workers") from None
                if done:
                    tick(progress, len(rows), total)
            finished = True
        finally:
            if not finished:                   # cancelled, interrupted or failed: stop them
                stop.set()
                pool.shutdown(wait=True, cancel_futures=True)
            else:
                pool.shutdown(wait=True)
    return rows


def _range_of(rule: KeyRule) -> str:
    unit = f" {rule.unit}" if rule.unit else ""
    if rule.lo is None or rule.hi is None:
        return f"unit{unit}" if unit else "any value"
    return f"allowed {rule.lo:g} to {rule.hi:g}{unit}"


def _show(v: Any) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, float):
        return f"{v:g}"
    return str(v)


__all__ = ["MAX_COMBINATIONS", "MAX_DEPARTURES", "SWEEP_KEYS", "SWEEP_RANK_COLUMNS",
           "SWEEP_ROW_COLUMNS", "EventOutcome", "SettingRank", "SweepResult", "SweepRow",
           "SweepSpec", "best_scenario", "departure_scenario", "departure_times",
           "event_outcomes", "is_drive", "parse_value", "rank_settings", "ranking_rows", "resolve_key",
           "run_sweep", "run_unit", "setting_scenario", "short_key", "sweep_cell_scenario",
           "sweep_rows", "sweep_spec", "sweep_to_json"]

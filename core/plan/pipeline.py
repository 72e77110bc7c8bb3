"""The search plan: from a scenario to windows, bins, code windows, detection, channels.

``make_plan(scenario)`` runs the whole chain; ``prepare_geometry(scenario)`` does the
expensive part (orbit loading and propagation over the test window) once, so that a
change of search parameters only (coherent time, accepted loss, Pfa, ...) re-plans with
``make_plan(scenario, prepared=...)`` without propagating again.

The chain is a sequence of named stages over arrays (S, T) (satellite x grid time), each
a function of its inputs that another kind of acquisition can call with its own:

0. :func:`prepare_geometry`: orbits, geometry (core.sky.predict), shifted predictions
   for a large time uncertainty, passes and visibility;
1. :func:`orbit_margins`: orbit-data margins from the data's kind and age;
2. :func:`first_windows`: Doppler windows before any acquisition (core.search.windows);
3. :func:`integration`: coherent/non-coherent integration, bins (core.search.bins) and
   code-step and transition losses per signal;
4. :func:`code_windows`: code-phase window and cells (core.search.codephase);
5. :func:`detection_figures`: C/N0 from the elevation model less the losses, Pd of the
   square-law detector (core.search.detection);
6. :func:`search_costs`: bins per window and the serial-search figures;
7. :func:`after_first_acquisition`: the narrowed windows once the oscillator is known;
8. the channel timeline (core.plan.timeline) with "first" costs until the first
   acquisition and "after" costs from then on, and the seeded Monte Carlo for TTFF;
9. :func:`satellite_summaries`: per satellite, its passes and first search.
"""

from __future__ import annotations

import math
import time as _time
from collections.abc import Callable
from dataclasses import dataclass, field
from functools import lru_cache
from typing import Any

import numpy as np

from ..ground.constants import PLAN_MAX_SATELLITE_STEPS
from ..ground.display import iso_utc
from ..ground.errors import Cancelled, ComputationError, InputError
from ..ground.filecheck import file_problem
from ..ground.geodesy import Site
from ..ground.signals import SIGNALS
from ..ground.timeutil import TimeGrid, iso_z, time_grid
from ..orbits.broadcast import RecordUse, orbit_data_age_s, records_in_use
from ..orbits.orbit_margin import (
    BROADCAST_CLOCK_MARGIN_M,
    L1_HZ,
    margin_extrapolated,
    orbit_margin_hz,
    orbit_range_margin_m,
)
from ..orbits.orbit_set import OrbitFileInfo, OrbitSet
from ..search import bins as binlib
from ..search import codephase, detection
from ..search.motion import RouteMotion
from ..search.windows import (
    DopplerWindows,
    ShiftSummary,
    Uncertainty,
    doppler_windows,
    full_range_windows,
    oscillator_fraction_after,
    shift_summary,
    terms_before_oscillator,
    windows_after_first_acquisition,
)
from ..sky.predict import Pass, Prediction, check_grid_size, passes, predict
from . import timeline as tl
from .spec import Scenario, SearchSpec

ProgressFn = Callable[[float, str], None]
CancelFn = Callable[[], bool]


PlanCancelled = Cancelled   # raised inside make_plan when the cancel callback returns True


# --- geometry, computed once per orbit/site/time/signal/mask set ---------------------

def geometry_key(sc: Scenario, files: tuple | None = None) -> tuple:
    """Everything the propagation depends on; equal keys allow reuse. ``files``: the
    first three items (orbit files, mapping, their times) of a key just made for a
    scenario with the same orbit files and base directory (a drive's events), so that
    the files are not looked up again."""
    if files is None:
        paths = sc.resolved_orbit_files()
        mapping = sc.resolved_mapping()
        mtimes = []
        for p in paths + ([mapping] if mapping else []):
            try:
                mtimes.append(p.stat().st_mtime_ns)
            except OSError:
                mtimes.append(None)
        files = (tuple(str(p) for p in paths), str(mapping), tuple(mtimes))
    return (*files, sc.site.lat_deg, sc.site.lon_deg,
            sc.site.height_m, sc.time.start_unix_s, sc.time.end_unix_s, sc.time.step_s,
            sc.time.uncertainty_s, tuple(sc.receiver.signals), sc.mask.elevation_deg)


@dataclass
class PreparedGeometry:
    """What a plan computes before any search setting: orbits, grid, prediction, passes
    and the derived values a re-plan reuses."""

    key: tuple
    orbits: OrbitSet
    site: Site
    grid: TimeGrid
    prediction: Prediction
    shifted: ShiftSummary | None
    passes: list[Pass]
    signal_ids: list[str]
    visible: np.ndarray            # (S, T): above the mask, propagated, healthy
    warnings: list[str]
    propagate_s: float
    window_cache: dict = field(default_factory=dict)
    # Values derived from the geometry and a few settings (see _reuse), one per name.
    derived: dict = field(default_factory=dict)
    # A drive along a route (core.plan.events): the receiver's motion over the grid for
    # the windows, and the surroundings' attenuation (dB) per (S, T) for the C/N0.
    motion: RouteMotion | None = None
    extra_loss_db: np.ndarray | float = 0.0
    # A start that knows nothing (cold): the whole Doppler range per satellite (S,), Hz,
    # and the fastest receiver speed (m/s), instead of windows from the uncertainties.
    full_range_hz: np.ndarray | None = None
    full_range_speed_m_s: float = 0.0


def _select_satellites(orbits: OrbitSet, signals: tuple[str, ...]) -> tuple[OrbitSet, dict[str, str], list[str]]:
    by_system: dict[str, str] = {}
    warnings: list[str] = []
    for sid in signals:
        sig = SIGNALS[sid]
        if sig.system in by_system:
            warnings.append(f"{sid} ignored: {by_system[sig.system]} is already the acquisition "
                            f"signal of that system (one signal per system is planned)")
            continue
        by_system[sig.system] = sid
    keep = [e.info.sat_id for e in orbits.entries if e.info.system in by_system]
    if not keep:
        systems = sorted({e.info.system for e in orbits.entries})
        raise ComputationError(
            f"no satellite in the orbit files belongs to the chosen signals "
            f"({', '.join(signals)}); the files hold systems {', '.join(systems) or 'none'}")
    return orbits.select(keep), by_system, warnings


def load_satellites(sc: Scenario, progress: ProgressFn | None = None
                    ) -> tuple[OrbitSet, dict[str, str], list[str]]:
    """Stage 0a: the scenario's orbit files read (bad or implausible records stop the plan
    unless orbits.skip_bad_records; data too old is refused unless orbits.allow_old_data),
    and the satellites of the chosen signals (the acquisition signal per system) with the
    warnings of that choice and of the data's age."""
    from ..orbits.data_age import check_data_age
    from ..orbits.readers import load_orbit_files

    missing = sc.missing_orbit_files()
    if missing:
        why = file_problem(missing[0]) or "not found"
        hint = " (moved or deleted?)" if why == "not found" else ""
        raise InputError(f"orbit file {why}{hint}", file=str(missing[0]))
    if not sc.orbits.files:
        raise InputError("the scenario names no orbit file", field="orbits.files")
    _report(progress, 0.02, "reading orbit files")
    orbits = load_orbit_files(sc.resolved_orbit_files(), reference_time=sc.time.start_unix_s,
                              mapping=sc.resolved_mapping(),
                              strict=not sc.orbits.skip_bad_records)
    age_warnings = check_data_age(orbits, sc.time.start_unix_s, allow_old=sc.orbits.allow_old_data)
    orbits, by_system, warnings = _select_satellites(orbits, tuple(sc.receiver.signals))
    return orbits, by_system, age_warnings + warnings


def prepare_geometry(sc: Scenario, progress: ProgressFn | None = None,
                     cancel: CancelFn | None = None) -> PreparedGeometry:
    from ..sky.result_guard import guard_prediction

    t0 = _time.perf_counter()
    orbits, by_system, warnings = load_satellites(sc, progress)
    site = Site(sc.site.lat_deg, sc.site.lon_deg, sc.site.height_m)
    grid = time_grid(sc.time.start, sc.time.end, sc.time.step_s)
    if len(grid) < 2:
        raise InputError("the test window must hold at least two time steps", field="time.step_s")
    check_plan_size(len(orbits), sc.time.start_unix_s, sc.time.end_unix_s, sc.time.step_s)
    _check_cancel(cancel)
    _report(progress, 0.1, f"propagating {len(orbits)} satellites over {len(grid)} times")
    pred = predict(orbits, site, grid, signals=by_system)
    orbits, pred, _ = guard_prediction(orbits, pred)      # impossible geometry: dropped, warned
    _check_cancel(cancel)
    shifted = None
    if sc.time.uncertainty_s > 0:
        _report(progress, 0.35, "propagating shifted grids for the time uncertainty")
        shifted = shift_summary(orbits, site, grid, sc.time.uncertainty_s, by_system)
    _check_cancel(cancel)
    _report(progress, 0.45, "finding passes")
    mask = sc.mask.elevation_deg
    healthy = np.array([e.info.healthy for e in orbits.entries])
    visible = pred.valid & (pred.elevation_deg >= mask) & healthy[:, None]
    found = passes(orbits, site, grid.start_unix_s, grid.end_unix_s, mask_deg=mask,
                   prediction=pred)
    unhealthy = [e.info.sat_id for e in orbits.entries if not e.info.healthy]
    if unhealthy:
        warnings.append(f"unhealthy, kept but not searched: {', '.join(unhealthy)}")
    if not visible.any():
        raise ComputationError(
            f"no healthy satellite rises above the {mask:g} deg elevation mask during the test "
            "window (check the site, the window and the orbit files' dates)")
    return PreparedGeometry(geometry_key(sc), orbits, site, grid, pred, shifted, found,
                            pred.signal_ids, visible, warnings + pred.warnings,
                            _time.perf_counter() - t0)


class PlanTooLarge(InputError):
    """A plan above PLAN_MAX_SATELLITE_STEPS for :func:`make_plan`, which keeps its (S, T)
    arrays; core.plan.long_window makes it block by block."""


def check_plan_size(n_satellites: int, start_unix_s: float, end_unix_s: float, step_s: float) -> None:
    """Refuse, before any array is made, a plan above PLAN_MAX_SATELLITE_STEPS (its memory
    grows with satellites x time steps; the limit keeps it within about 1 GB);
    :class:`PlanTooLarge`."""
    try:
        check_grid_size(n_satellites, end_unix_s - start_unix_s, step_s, PLAN_MAX_SATELLITE_STEPS,
                        what="plan's", step_option="a [time] step_s", field="time.step_s")
    except InputError as err:
        raise PlanTooLarge(err.message, file=err.file, line=err.line, field=err.field) from None


def _reuse(g: PreparedGeometry, name: str, key: tuple, make: Callable[[], Any],
           same: tuple = ()) -> Any:
    """A value that depends on the geometry, on the settings in ``key`` (compared by
    value) and on the objects in ``same`` (compared by identity) only, kept on the
    prepared geometry (one per name, the last key asked for): a re-plan that changes
    other settings takes it as it is. Arrays kept this way are made read-only, since
    several plans share them."""
    # The geometry's parts, compared by identity: a copy of the geometry given another
    # prediction or visibility (tests do that) must not take the values of the original.
    parts = (g.prediction, g.visible, g.orbits, g.grid, g.passes, g.shifted, g.motion,
             g.extra_loss_db, g.full_range_hz) + tuple(same)
    entry = g.derived.get(name)
    if entry is not None and entry[0] == key and all(a is b for a, b in zip(entry[1], parts)):
        return entry[2]
    value = make()
    g.derived[name] = (key, parts, value)
    return value


def _frozen(arr: Any, dtype: Any = None) -> np.ndarray:
    """An array this module has just made (or its conversion to ``dtype``), made
    read-only in place: the timeline inputs and later plans then share it uncopied."""
    a = np.asarray(arr, dtype=dtype)
    a.setflags(write=False)
    return a


def _report(progress: ProgressFn | None, fraction: float, text: str) -> None:
    if progress is not None:
        progress(fraction, text)


def _check_cancel(cancel: CancelFn | None) -> None:
    if cancel is not None and cancel():
        raise PlanCancelled()


# --- results ----------------------------------------------------------------------------

@dataclass
class SearchSummary:
    """The search that the channel timeline assigns to one satellite (its first search)."""

    start_unix_s: float
    state: str                       # "first" (oscillator unknown) or "after"
    low_hz: float
    high_hz: float
    bin_width_hz: float
    bins: int
    bin_centres_hz: np.ndarray
    code_window_chips: float
    code_cells: int
    cn0_dbhz: float
    pd: float
    dwell_s: float
    expected_search_s: float
    channel: int
    acquired_unix_s: float | None

    def to_dict(self) -> dict:
        return {"start": iso_utc(self.start_unix_s), "state": self.state,
                "low_hz": round(self.low_hz, 2), "high_hz": round(self.high_hz, 2),
                "bin_width_hz": round(self.bin_width_hz, 3), "bins": int(self.bins),
                "first_bin_hz": round(float(self.bin_centres_hz[0]), 2),
                "last_bin_hz": round(float(self.bin_centres_hz[-1]), 2),
                "code_window_chips": round(self.code_window_chips, 2),
                "code_cells": int(self.code_cells), "cn0_dbhz": round(self.cn0_dbhz, 2),
                "pd": round(self.pd, 4), "dwell_s": round(self.dwell_s, 6),
                "expected_search_s": round(self.expected_search_s, 3), "channel": self.channel,
                "acquired": iso_utc(self.acquired_unix_s)}


@dataclass
class SatellitePlan:
    """One satellite in the plan: identity, data age, health, passes and its searches."""

    sat_id: str
    signal_id: str
    system: str
    carrier_hz: float
    glonass_k: int | None
    source_kind: str
    data_age_s: float
    healthy: bool
    passes: list[Pass]
    search: SearchSummary | None
    # Broadcast entries: the navigation records used over the window (core.orbits.broadcast).
    broadcast_records: list[RecordUse] = field(default_factory=list)


@dataclass
class Plan:
    """A complete search plan. Arrays are (S, T) over ``satellites`` x ``times``."""

    scenario: Scenario
    times: TimeGrid
    satellites: list[SatellitePlan]
    prediction: Prediction
    visible: np.ndarray
    windows_first: DopplerWindows
    windows_after: DopplerWindows
    bin_design: dict[str, binlib.BinDesign]          # per signal
    bins_first: np.ndarray
    bins_after: np.ndarray
    code_window_first_chips: np.ndarray
    code_window_after_chips: np.ndarray
    code_cells_first: np.ndarray
    code_cells_after: np.ndarray
    cn0_dbhz: np.ndarray
    pd_first: np.ndarray
    pd_after: np.ndarray
    expected_search_first_s: np.ndarray
    expected_search_after_s: np.ndarray
    sensitivity_dbhz: dict[str, float]               # C/N0 for Pd = 0.9, per signal
    code_step_loss: dict[str, codephase.CodeStepLoss]  # per signal
    timeline: tl.Timeline
    ttff: tl.TtffStats | None                        # None until add_monte_carlo
    first_acquired: str | None
    orbit_files: list[OrbitFileInfo]
    warnings: list[str]
    compute_s: float = 0.0
    propagate_s: float = 0.0
    reused_geometry: bool = False
    first_fix_unix_s: float | None = field(default=None)

    @property
    def ids(self) -> list[str]:
        return [s.sat_id for s in self.satellites]

    @property
    def ttff_s(self) -> float | None:
        return self.timeline.ttff_s

    def index_at(self, unix_s: float) -> int:
        """Grid index nearest an instant."""
        u = self.times.unix_s
        k = int(np.clip(np.searchsorted(u, unix_s), 0, u.size - 1))
        if k > 0 and abs(u[k - 1] - unix_s) <= abs(u[k] - unix_s):
            k -= 1
        return k

    def search_grid_at(self, k: int) -> list[dict]:
        """For grid index k: per visible satellite, its current window and bin centres.

        Satellites acquired by then use the narrowed ("after") window.
        """
        t = self.times.unix_s[k]
        out = []
        acq0 = min(self.timeline.acquisition_unix_s.values(), default=math.inf)
        for s, sp in enumerate(self.satellites):
            if not self.visible[s, k]:
                continue
            after = t >= acq0
            w = self.windows_after if after else self.windows_first
            lo, hi = float(w.low_hz[s, k]), float(w.high_hz[s, k])
            width = self.bin_design[sp.signal_id].bin_width_hz
            out.append({"id": sp.sat_id, "signal": sp.signal_id, "state": "after" if after else "first",
                        "nominal_hz": float(w.nominal_hz[s, k]), "low_hz": lo, "high_hz": hi,
                        "bin_width_hz": width, "bin_centres_hz": binlib.bin_centres(lo, hi, width),
                        "elevation_deg": float(self.prediction.elevation_deg[s, k])})
        return out

    def summary_text(self) -> str:
        n_vis = int(self.visible.any(axis=1).sum())
        ff = "none in the window" if self.timeline.first_fix_unix_s is None else iso_utc(self.timeline.first_fix_unix_s)
        mc = ("Monte Carlo not run" if self.ttff is None else
              f"median {_fmt_s(self.ttff.median_s)}, 95th percentile {_fmt_s(self.ttff.p95_s)} "
              f"({self.ttff.n_runs} Monte Carlo runs)")
        lines = [f"plan '{self.scenario.name}': {n_vis} satellites in view, "
                 f"{len(self.timeline.segments)} timeline segments",
                 f"first fix {ff}; TTFF {_fmt_s(self.timeline.ttff_s)} expected, {mc}",
                 f"{len(self.warnings)} warning(s); computed in {self.compute_s:.2f} s"]
        return "\n".join(lines)


def _fmt_s(v: float | None) -> str:
    if v is None or not math.isfinite(v):
        return "n/a"
    return f"{v:.1f} s"


# --- the chain --------------------------------------------------------------------------

def acquisition_uncertainty(sc: Scenario) -> Uncertainty:
    """What the receiver does not know at the start of the window, from the scenario."""
    return Uncertainty(horizontal_m=sc.site.horizontal_uncertainty_km * 1000.0,
                       vertical_m=sc.site.vertical_uncertainty_m,
                       time_s=sc.time.uncertainty_s,
                       max_horizontal_speed_m_s=sc.receiver.max_horizontal_speed_m_s,
                       max_vertical_speed_m_s=sc.receiver.max_vertical_speed_m_s,
                       oscillator_offset_ppb=sc.receiver.oscillator_offset_ppb,
                       oscillator_uncertainty_ppb=sc.receiver.oscillator_uncertainty_ppb)


_uncertainty = acquisition_uncertainty     # the name the tests and the window know


def _data_age_s(orbits: OrbitSet, at_unix_s: float) -> np.ndarray:
    return orbit_data_age_s(orbits, np.array([at_unix_s]))[:, 0]


# --- the stages of a plan -----------------------------------------------------------------
#
# make_plan runs them in order; an acquisition planned elsewhere (another start, another
# geometry) calls the same stages with its own inputs.

@dataclass(frozen=True)
class OrbitMargins:
    """Orbit-data margins per (S, T), from the kind and age of each satellite's data."""

    doppler_hz: np.ndarray
    range_m: np.ndarray
    age_s: np.ndarray
    kinds: tuple[str, ...]
    warnings: list[str]


def orbit_margins(search: SearchSpec, g: PreparedGeometry) -> OrbitMargins:
    """Stage 1: the Doppler and range margins for orbit-data error at each grid time
    (kept on the geometry for re-plans with the same ``orbit_margin_hz``)."""
    return _reuse(g, "orbit_margins", (search.orbit_margin_hz,),
                  lambda: _orbit_margins(search, g))


def _orbit_margins(search: SearchSpec, g: PreparedGeometry) -> OrbitMargins:
    pred, orbits, grid = g.prediction, g.orbits, g.grid
    n_s, n_t = pred.elevation_deg.shape
    age = orbit_data_age_s(orbits, grid.unix_s)                      # (S, T) seconds
    kinds = tuple(e.info.source_kind for e in orbits.entries)
    # Per source kind, all its satellites at once (the same arithmetic per element).
    margin_t = np.empty((n_s, n_t))
    range_margin = np.empty((n_s, n_t))
    extrapolated = np.zeros(n_s, dtype=bool)
    kind_arr = np.array(kinds, dtype=object)
    for k in sorted(set(kinds)):
        rows = np.nonzero(kind_arr == k)[0]
        margin_t[rows] = orbit_margin_hz(k, age[rows], pred.carrier_hz[rows, None])
        range_margin[rows] = orbit_range_margin_m(k, age[rows])
        extrapolated[rows] = np.any(margin_extrapolated(k, age[rows]), axis=1)
    if search.orbit_margin_hz is not None:
        margin_t = (np.full(n_s, float(search.orbit_margin_hz)) * pred.carrier_hz / L1_HZ)[:, None] \
            * np.ones((1, n_t))
    old = sorted({e.info.sat_id for e, x in zip(orbits.entries, extrapolated) if x})
    return OrbitMargins(_frozen(margin_t), _frozen(range_margin), _frozen(age), kinds,
                        old_data_warnings(search, old))


def old_data_warnings(search: SearchSpec, old: list[str]) -> list[str]:
    """The warning for the satellites ``old`` (sorted IDs) whose data age lies beyond the
    ages the default margin was derived for (none when the scenario sets the margin)."""
    if not old or search.orbit_margin_hz is not None:
        return []
    return [f"orbit data further from the planned time than the ages the default margin was "
            f"derived for (docs/orbit-margin.md) for {len(old)} satellite(s) ({', '.join(old[:6])}"
            f"{', ...' if len(old) > 6 else ''}): windows may be too narrow; use fresher "
            "data or set [search] orbit_margin_hz"]


def unknown_glonass_k(g: PreparedGeometry) -> np.ndarray:
    """(S,) True for GLONASS satellites whose frequency channel is not known."""
    return np.array([e.info.system == "R" and e.info.glonass_k is None for e in g.orbits.entries])


def uncertainty_warnings(sc: Scenario, g: PreparedGeometry) -> list[str]:
    warnings = []
    if sc.site.horizontal_uncertainty_km > LOCAL_DISC_LIMIT_KM:
        warnings.append(
            f"horizontal uncertainty {sc.site.horizontal_uncertainty_km:g} km: the window's position "
            f"term is a local expansion (the tests check it against brute force up to 100 km); beyond "
            f"{LOCAL_DISC_LIMIT_KM:g} km plan a full-range (unassisted) search instead")
    unknown_k = unknown_glonass_k(g)
    if unknown_k.any():
        warnings.append(
            f"GLONASS channel k unknown for {int(unknown_k.sum())} satellite(s): windows are "
            "planned on the k = 0 carrier and widened to hold every channel -7..+6 (and the "
            "receiver must also find the channel); give k in a mapping file ([orbits] mapping)")
    return warnings


def first_windows(g: PreparedGeometry, unc: Uncertainty, margins: OrbitMargins
                  ) -> tuple[DopplerWindows, DopplerWindows]:
    """Stage 2: Doppler windows before any acquisition, as computed (``raw``) and widened
    for unknown GLONASS channels. They depend on the uncertainties and the margin only,
    so they are cached on the prepared geometry."""
    entry = g.window_cache.get("windows")
    cached = None
    if entry is not None and entry[0] == unc and (
            entry[1] is margins.doppler_hz or np.array_equal(entry[1], margins.doppler_hz)):
        cached = entry[2]
    if cached is None:
        if g.full_range_hz is not None:
            w_raw = full_range_windows(g.prediction, unc, g.full_range_hz, g.full_range_speed_m_s)
        else:
            w_raw = doppler_windows(g.prediction, unc, margins.doppler_hz, shifted=g.shifted,
                                    motion=g.motion)
        cached = (w_raw, _widen_for_unknown_k(w_raw, unknown_glonass_k(g)))
        g.window_cache.clear()
        g.window_cache["windows"] = (unc, margins.doppler_hz, cached)
    return cached


def give_first_windows(g: PreparedGeometry, unc: Uncertainty, margins: OrbitMargins,
                       w_raw: DopplerWindows) -> None:
    """Make :func:`first_windows` return ``w_raw`` (and its widening) for ``unc`` and
    ``margins``: windows computed elsewhere, e.g. block by block over a long window
    (core.plan.long_window), where the reduced grid cannot give their time derivatives."""
    g.window_cache.clear()
    g.window_cache["windows"] = (unc, margins.doppler_hz,
                                 (w_raw, _widen_for_unknown_k(w_raw, unknown_glonass_k(g))))


@dataclass(frozen=True)
class Integration:
    """Coherent and non-coherent integration per satellite row, with the losses that follow
    from it: bin design and code-step loss per signal, per-row arrays (S,) or (S, 1)."""

    design: dict[str, binlib.BinDesign]
    code_loss: dict[str, codephase.CodeStepLoss]
    coherent_s: np.ndarray          # (S,)
    noncoherent: np.ndarray         # (S,) int
    transition_db: np.ndarray       # (S,)
    code_loss_db: np.ndarray        # (S,)
    bin_width_hz: np.ndarray        # (S, 1)
    average_frequency_loss_db: np.ndarray   # (S, 1)
    warnings: list[str]
    # Per signal: the signal's offset within its cell (uniform in the bin and the code
    # step) as quadrature nodes; Pd is the mean over them (detection_figures).
    offsets: dict[str, detection.CellOffsets] = field(default_factory=dict)

    @property
    def dwell_s(self) -> np.ndarray:
        return self.coherent_s * self.noncoherent


def integration(sc: Scenario, signal_ids: list[str]) -> Integration:
    """Stage 3: coherent integration per signal, checked against the signal; bins; the
    code-step loss (BOC(1,1) for Galileo E1 and BeiDou B1C, BPSK for the rest) and the
    expected loss from data-bit / secondary-code sign changes."""
    n_s = len(signal_ids)
    step = sc.search.code_step_chips
    design: dict[str, binlib.BinDesign] = {}
    code_loss: dict[str, codephase.CodeStepLoss] = {}
    tc_s = np.zeros(n_s)
    n_nc = np.zeros(n_s, dtype=int)
    transition_db = np.zeros(n_s)
    code_loss_db = np.zeros(n_s)
    warnings: list[str] = []
    for sid in sorted(set(signal_ids)):
        sig = SIGNALS[sid]
        coh_ms, nc = sc.search.integration_for(sid)
        chk = binlib.check_coherent_time(sig, coh_ms / 1000.0)
        if not chk.ok:
            raise InputError("; ".join(chk.errors), field="search.coherent_ms")
        warnings.extend(f"{sid}: {w}" for w in chk.warnings)
        design[sid] = _design_bins(coh_ms / 1000.0, sc.search.max_frequency_loss_db)
        try:
            code_loss[sid] = codephase.code_step_loss(step, codephase.correlation_shape_for(sig))
        except InputError as err:   # name the scenario key, not the core's parameter
            raise InputError(f"{sid}: {err.message}", field="search.code_step_chips") from None
        rows = [i for i, x in enumerate(signal_ids) if x == sid]
        tc_s[rows] = coh_ms / 1000.0
        n_nc[rows] = nc
        # A serial search dwells on the received code epochs at the signal cell (aligned
        # model); a parallel (FFT) code search starts anywhere (core.search.bins).
        if sc.receiver.parallel_code_search:
            transition_db[rows] = chk.transition_loss_db
        else:
            transition_db[rows] = binlib.aligned_transition_loss_db(
                coh_ms / 1000.0, sig.symbol_period_s, sig.code_period_s)
        code_loss_db[rows] = code_loss[sid].average_loss_db
    width = np.array([design[x].bin_width_hz for x in signal_ids])[:, None]
    avg_freq_loss = np.array([design[x].average_loss_db for x in signal_ids])[:, None]
    offsets = {sid: _cell_offsets(design[sid].coherent_ms / 1000.0, design[sid].bin_width_hz,
                                  step, code_loss[sid].shape) for sid in design}
    return Integration(design, code_loss, tc_s, n_nc, transition_db, code_loss_db, width,
                       avg_freq_loss, warnings, offsets)


@dataclass(frozen=True)
class CodeWindows:
    """Code-phase windows (chips) before any acquisition, the non-clock part of the range
    uncertainty (m) that stays after it, and the cells the first window needs."""

    first_chips: np.ndarray
    after_base_m: np.ndarray
    cells_first: np.ndarray
    code_length_chips: np.ndarray    # (S, 1)
    chip_length_m: np.ndarray        # (S, 1)
    fine_time: bool
    warnings: list[str]


def code_windows(sc: Scenario, g: PreparedGeometry, unc: Uncertainty,
                 margins: OrbitMargins) -> CodeWindows:
    """Stage 4: the code window: the whole code, or with fine time the range uncertainty
    (position, satellite motion over the fine-time error, orbit margin, satellite clock).
    Kept on the geometry for re-plans with the same fine time, code step and position
    uncertainty."""
    key = (sc.search.fine_time_uncertainty_us, sc.search.code_step_chips, unc.horizontal_m,
           unc.vertical_m)
    return _reuse(g, "code_windows", key, lambda: _code_windows(sc, g, unc, margins),
                  same=(margins,))


def _code_windows(sc: Scenario, g: PreparedGeometry, unc: Uncertainty,
                  margins: OrbitMargins) -> CodeWindows:
    pred = g.prediction
    n_s, n_t = pred.elevation_deg.shape
    signals = [SIGNALS[s] for s in g.signal_ids]
    code_len = np.array([float(x.code_length_chips) for x in signals])[:, None]
    chip_m = np.array([x.chip_length_m for x in signals])[:, None]
    fine = sc.search.fine_time_uncertainty_us
    range_margin = margins.range_m
    warnings: list[str] = []
    if fine is not None:
        # Satellite clock: a TLE carries none (broadcast offsets reach 0.57 ms, 171 km,
        # in the TLE pairs of docs/orbit-margin.md), so fine time cannot narrow the code
        # window of a TLE satellite; almanac clock terms were off by 190 m at 1 day and
        # 1161 m at 27.8 days there: margin 200 m + 40 m per day of age.
        # A broadcast record's clock: BROADCAST_CLOCK_MARGIN_M (measured 4.4 m at most).
        kinds = np.array(margins.kinds)[:, None]
        is_alm = kinds == "almanac"
        clock_m = np.where(is_alm, 200.0 + 40.0 * np.abs(margins.age_s) / 86400.0,
                           np.where(kinds == "broadcast", BROADCAST_CLOCK_MARGIN_M, np.inf))
        range_margin = range_margin + clock_m
        if (kinds == "tle").any():
            warnings.append("fine time does not narrow the code window of TLE satellites "
                            "(a TLE holds no satellite clock): they search the whole code")
    if fine is None:
        cw_first = np.broadcast_to(code_len, (n_s, n_t)).copy()
        cw_after_base = cw_first.copy()
    else:
        el_ok = np.where(pred.valid, pred.elevation_deg, -90.0)
        budget = codephase.range_uncertainty_budget(
            unc.horizontal_m, unc.vertical_m, el_ok, fine * 1e-6,
            np.where(pred.valid, pred.range_rate_m_s, 0.0), fine * 1e-6)
        non_clock = np.asarray(budget.position_m) + np.asarray(budget.satellite_motion_m) + range_margin
        cw_first = np.minimum(2.0 * (non_clock + np.asarray(budget.clock_m)) / chip_m, code_len)
        cw_after_base = non_clock
    cells_first = np.maximum(codephase.code_cells(cw_first, sc.search.code_step_chips), 1)
    return CodeWindows(_frozen(cw_first), _frozen(cw_after_base), _frozen(cells_first),
                       _frozen(code_len), _frozen(chip_m), fine is not None, warnings)


@dataclass(frozen=True)
class DetectionFigures:
    """C/N0 per (S, T) from the elevation model, the losses, Pd per (S, T) and the
    sensitivity (C/N0 for Pd = 0.9) per signal."""

    cn0_dbhz: np.ndarray
    losses_db: np.ndarray
    pd: np.ndarray
    sensitivity_dbhz: dict[str, float]


def detection_figures(sc: Scenario, g: PreparedGeometry, integ: Integration,
                      extra_loss_db: np.ndarray | float = 0.0) -> DetectionFigures:
    """Stage 5: C/N0 less the extra, average frequency, code-step and transition losses,
    and Pd of the square-law detector. ``extra_loss_db`` adds attenuation per (S, T)
    (surroundings) on top of the scenario's ``[signal] extra_loss_db``. Failed
    propagation samples count as below the mask: never searched."""
    pred = g.prediction
    sig = sc.signal

    def elevation_cn0():
        el_ok = np.where(pred.valid, pred.elevation_deg, -90.0)
        return _frozen(detection.cn0_at_elevation_dbhz(el_ok, sig.cn0_zenith_dbhz,
                                                       sig.cn0_at_mask_dbhz, sc.mask.elevation_deg))

    cn0 = _reuse(g, "elevation_cn0", (sig.cn0_zenith_dbhz, sig.cn0_at_mask_dbhz,
                                      sc.mask.elevation_deg), elevation_cn0)
    losses_db = (sc.signal.extra_loss_db + integ.average_frequency_loss_db
                 + (integ.code_loss_db + integ.transition_db)[:, None])
    # Pd is the mean over the signal's offset within its cell (frequency uniform in the
    # bin, code uniform in the step), not Pd at the mean loss, which overstates it by up
    # to 0.04: the offset losses enter through integ.offsets, the rest as a C/N0 shift.
    other_db = sc.signal.extra_loss_db + integ.transition_db[:, None] + extra_loss_db
    cn0_centre = cn0 - other_db
    pfa = sc.search.false_alarm_per_cell
    row_offsets = [integ.offsets[sid] for sid in g.signal_ids]
    pd = _pd_by_table(np.asarray(cn0_centre, dtype=float), integ.coherent_s, integ.noncoherent,
                      pfa, row_offsets)
    sens = {}
    for sid in integ.design:
        row = g.signal_ids.index(sid)
        coh_ms, nc = sc.search.integration_for(sid)
        sens[sid] = _sensitivity_dbhz(float(pfa), int(nc), integ.offsets[sid],
                                      float(sc.signal.extra_loss_db + integ.transition_db[row]))
    return DetectionFigures(cn0, losses_db, _frozen(pd), sens)


def search_costs(sc: Scenario, integ: Integration, det: DetectionFigures,
                 windows: DopplerWindows, cells: np.ndarray):
    """Stage 6: bins over each window and the serial-search figures (positions, Pfa per
    position, mean search time) per (S, T)."""
    nb = np.asarray(binlib.bin_count(windows.low_hz, windows.high_hz, integ.bin_width_hz))
    if nb.size and np.min(nb) < 1:         # a window with a NaN edge: one bin all the same
        nb = np.maximum(nb, 1)
    pfa = sc.search.false_alarm_per_cell
    cost = detection.search_cost(nb, cells, sc.receiver.correlators_per_channel,
                                 sc.receiver.parallel_code_search, integ.coherent_s[:, None],
                                 integ.noncoherent[:, None], pfa, det.pd,
                                 sc.search.false_alarm_penalty_s)
    return nb, cost


def refined_passes(g: PreparedGeometry) -> dict[str, list[tuple[float, float]]]:
    """Refined (rise, set) pairs per healthy satellite; unhealthy ones get none."""
    refined: dict[str, list[tuple[float, float]]] = {}
    for ps in g.passes:
        refined.setdefault(ps.sat_id, []).append((ps.rise_unix_s, ps.set_unix_s))
    healthy_ids = {e.info.sat_id for e in g.orbits.entries if e.info.healthy}
    refined = {k: v for k, v in refined.items() if k in healthy_ids}
    for sid in g.prediction.ids:
        if sid not in healthy_ids:
            refined[sid] = []
    return refined


def timeline_inputs(sc: Scenario, g: PreparedGeometry, integ: Integration,
                    det: DetectionFigures, cost_first, cost_after,
                    refined: dict[str, list[tuple[float, float]]]) -> tl.TimelineInputs:
    """What the channel simulation needs, with the "first" costs until the first
    acquisition and the "after" costs from then on."""
    pred = g.prediction
    n_s, n_t = pred.elevation_deg.shape
    # Read-only arrays, shared by the two timeline inputs of a plan (and the geometry's
    # visibility and priority by every re-plan), so that TimelineInputs copies none.
    visible = _reuse(g, "visible", (), lambda: _frozen(g.visible.copy()))
    priority = _reuse(g, "priority", (sc.search.priority,), lambda: _frozen(
        np.where(g.visible, _priority(sc.search.priority, pred), -1000.0)))
    first = _timeline_costs(g, cost_first)
    after = _timeline_costs(g, cost_after)
    dwell = _frozen(np.array(integ.dwell_s, dtype=float)[:, None])
    return tl.TimelineInputs(
        times_unix_s=g.grid.unix_s, sat_ids=tuple(pred.ids), visible=visible,
        priority=priority,
        expected_search_first_s=first[0], expected_search_after_s=after[0],
        n_channels=sc.receiver.channels, first_fix_satellites=sc.search.first_fix_satellites,
        ephemeris_wait_s=sc.search.ephemeris_wait_s,
        q_first=first[1], q_after=after[1],
        pd_first=det.pd, pd_after=det.pd,
        pfa_position=first[2], pfa_position_after=after[2],
        dwell_s=np.broadcast_to(dwell, (n_s, n_t)),
        penalty_s=sc.search.false_alarm_penalty_s, set_unix_s=refined)


def _timeline_costs(g: PreparedGeometry, cost) -> tuple[np.ndarray, ...]:
    """The timeline's read-only view of a search cost: the expected search time where
    visible (inf elsewhere), the positions (whole numbers, as they are) and the Pfa per
    position; made once per cost object (a plan's first timeline and its final one share
    the first costs). The last two cost objects are kept."""
    kept = g.derived.setdefault("timeline_costs", [])
    for c, parts, value in kept:
        if c is cost and parts is g.visible:
            return value
    value = (_frozen(np.where(g.visible, cost.expected_search_s, np.inf)),
             _frozen(cost.positions), _frozen(cost.pfa_position, dtype=float))
    kept.insert(0, (cost, g.visible, value))
    del kept[2:]
    return value


@dataclass(frozen=True)
class AfterAcquisition:
    """The narrowed search once the first satellite is acquired (oscillator measured)."""

    first_acquired: str | None
    windows: DopplerWindows
    code_window_chips: np.ndarray


def after_first_acquisition(sc: Scenario, g: PreparedGeometry, integ: Integration,
                            cw: CodeWindows, w_raw: DopplerWindows, w_first: DopplerWindows,
                            first_inputs: tl.TimelineInputs) -> AfterAcquisition:
    """Stage 7: windows after the first acquisition.

    A first timeline pass finds the searches that run before any acquisition (they use
    "first" costs, so the after-costs cannot change them). Any of them may be the first
    acquired in a real run (or a Monte Carlo run), so the after-windows take the worst of
    them: the largest (half bin + own non-oscillator uncertainty) / carrier at its search
    start."""
    pred, grid = g.prediction, g.grid
    first_tl = tl.expected_timeline(first_inputs)
    first_id = min(first_tl.acquisition_unix_s, key=first_tl.acquisition_unix_s.get, default=None)
    candidates = [(pred.ids.index(seg.sat_id), _grid_index_at(grid, g.visible, pred.ids.index(seg.sat_id),
                                                              seg.start_unix_s))
                  for seg in first_tl.segments if seg.kind == "search" and seg.search_state == "first"]
    if first_id is None or not candidates:
        return AfterAcquisition(first_id, w_first, cw.first_chips)
    half = integ.bin_width_hz / 2.0
    c_s = [c[0] for c in candidates]
    c_k = [c[1] for c in candidates]
    frac = oscillator_fraction_after(w_first, pred.carrier_hz, c_s, c_k, half[c_s, 0])
    before = _reuse(g, "terms_before_oscillator", (), lambda: terms_before_oscillator(w_raw),
                    same=(w_raw,))
    w_after = _widen_for_unknown_k(windows_after_first_acquisition(w_raw, pred.carrier_hz, frac,
                                                                   before),
                                   unknown_glonass_k(g))
    if not cw.fine_time:
        cw_after = cw.first_chips
    else:
        step = sc.search.code_step_chips
        own = max(cw.after_base_m[s1, k1] + 0.5 * step * cw.chip_length_m[s1, 0]
                  for s1, k1 in candidates)
        cw_after = np.minimum(np.minimum(2.0 * (cw.after_base_m + own) / cw.chip_length_m,
                                         cw.code_length_chips), cw.first_chips)
    return AfterAcquisition(first_id, w_after, cw_after)


def satellite_summaries(g: PreparedGeometry, integ: Integration, det: DetectionFigures,
                        timeline: tl.Timeline, w_first: DopplerWindows, w_after: DopplerWindows,
                        cw_first: np.ndarray, cw_after: np.ndarray, cells_first: np.ndarray,
                        cells_after: np.ndarray, cost_first, cost_after) -> list[SatellitePlan]:
    """Stage 8: per satellite, its passes and the first search the timeline gives it."""
    pred, orbits, grid = g.prediction, g.orbits, g.grid
    first_search: dict[str, tl.TimelineSegment] = {}
    for seg in timeline.segments:
        if seg.kind == "search" and seg.sat_id not in first_search:
            first_search[seg.sat_id] = seg
    width = integ.bin_width_hz
    sats: list[SatellitePlan] = []

    def static():       # what no search setting changes: ages, passes, records
        by_sat: dict[str, list[Pass]] = {}
        for p in g.passes:
            by_sat.setdefault(p.sat_id, []).append(p)
        return (_data_age_s(orbits, grid.start_unix_s), by_sat,
                [records_in_use(e, grid.unix_s) for e in orbits.entries])

    ages, passes_of, records = _reuse(g, "satellite_static", (), static)
    for s, e in enumerate(orbits.entries):
        sid = e.info.sat_id
        seg = first_search.get(sid)
        summary = None
        if seg is not None:
            k = _grid_index_at(grid, g.visible, s, seg.start_unix_s)
            after = seg.search_state == "after"
            w = w_after if after else w_first
            lo, hi = float(w.low_hz[s, k]), float(w.high_hz[s, k])
            centres = binlib.bin_centres(lo, hi, float(width[s, 0]))
            cost = cost_after if after else cost_first
            summary = SearchSummary(
                start_unix_s=seg.start_unix_s, state=seg.search_state or "first", low_hz=lo, high_hz=hi,
                bin_width_hz=float(width[s, 0]), bins=int(centres.size), bin_centres_hz=centres,
                code_window_chips=float((cw_after if after else cw_first)[s, k]),
                code_cells=int((cells_after if after else cells_first)[s, k]),
                cn0_dbhz=float(det.cn0_dbhz[s, k]), pd=float(det.pd[s, k]),
                dwell_s=float(integ.dwell_s[s]),
                expected_search_s=float(np.asarray(cost.expected_search_s)[s, k]),
                channel=seg.channel, acquired_unix_s=timeline.acquisition_unix_s.get(sid))
        sats.append(SatellitePlan(sid, g.signal_ids[s], e.info.system, float(pred.carrier_hz[s]),
                                  e.info.glonass_k, e.info.source_kind, float(ages[s]), e.info.healthy,
                                  list(passes_of.get(sid, ())), summary, list(records[s])))
    return sats


def make_plan(sc: Scenario, prepared: PreparedGeometry | None = None,
              progress: ProgressFn | None = None, cancel: CancelFn | None = None,
              monte_carlo: bool = True) -> Plan:
    """The full plan. Pass ``prepared`` (from an earlier plan or prepare_geometry) to skip
    propagation when only search parameters changed; it is rebuilt if it does not fit.

    With ``monte_carlo=False`` the TTFF statistics are left out (``plan.ttff`` is None)
    so that an interactive re-plan returns fast; :func:`add_monte_carlo` fills them in."""
    t_start = _time.perf_counter()
    reused = prepared is not None and prepared.key == geometry_key(sc)
    if not reused:
        prepared = prepare_geometry(sc, progress, cancel)
    assert prepared is not None
    g = prepared
    warnings = list(g.warnings)

    _report(progress, 0.6, "computing Doppler windows")
    margins = orbit_margins(sc.search, g)
    unc = acquisition_uncertainty(sc)
    warnings += margins.warnings + uncertainty_warnings(sc, g)
    w_raw, w_first = first_windows(g, unc, margins)
    integ = integration(sc, g.signal_ids)
    warnings += integ.warnings
    cw = code_windows(sc, g, unc, margins)
    warnings += cw.warnings
    det = detection_figures(sc, g, integ, g.extra_loss_db)

    _report(progress, 0.7, "search costs")
    bins_first, cost_first = search_costs(sc, integ, det, w_first, cw.cells_first)
    refined = refined_passes(g)

    _check_cancel(cancel)
    _report(progress, 0.75, "channel timeline")
    first_inputs = timeline_inputs(sc, g, integ, det, cost_first, cost_first, refined)
    after = after_first_acquisition(sc, g, integ, cw, w_raw, w_first, first_inputs)
    cells_after = cw.cells_first if after.code_window_chips is cw.first_chips else \
        np.maximum(codephase.code_cells(after.code_window_chips, sc.search.code_step_chips), 1)
    bins_after, cost_after = search_costs(sc, integ, det, after.windows, cells_after)
    # = timeline_inputs(sc, g, integ, det, cost_first, cost_after, refined), without
    # checking again what the first inputs hold already
    inputs = first_inputs.with_after_figures(*_timeline_costs(g, cost_after))
    timeline = tl.expected_timeline(inputs)
    warnings.extend(timeline.warnings)
    _check_cancel(cancel)
    ttff = None
    if monte_carlo:
        _report(progress, 0.85, "Monte Carlo of the time to first fix")
        ttff = tl.monte_carlo_ttff(inputs, sc.search.monte_carlo_runs, sc.search.seed, cancel)
        warnings.extend(ttff.warnings)

    sats = satellite_summaries(g, integ, det, timeline, w_first, after.windows, cw.first_chips,
                               after.code_window_chips, cw.cells_first, cells_after,
                               cost_first, cost_after)
    _report(progress, 1.0, "done")
    plan = Plan(scenario=sc, times=g.grid, satellites=sats, prediction=g.prediction,
                visible=g.visible, windows_first=w_first, windows_after=after.windows,
                bin_design=integ.design, bins_first=bins_first, bins_after=bins_after,
                code_window_first_chips=cw.first_chips,
                code_window_after_chips=after.code_window_chips,
                code_cells_first=np.asarray(cw.cells_first), code_cells_after=np.asarray(cells_after),
                cn0_dbhz=det.cn0_dbhz, pd_first=det.pd, pd_after=det.pd,
                expected_search_first_s=np.asarray(cost_first.expected_search_s),
                expected_search_after_s=np.asarray(cost_after.expected_search_s),
                sensitivity_dbhz=det.sensitivity_dbhz, code_step_loss=integ.code_loss,
                timeline=timeline, ttff=ttff, first_acquired=after.first_acquired,
                orbit_files=list(g.orbits.files), warnings=_dedupe(warnings),
                propagate_s=g.propagate_s, reused_geometry=reused,
                first_fix_unix_s=timeline.first_fix_unix_s)
    plan.compute_s = _time.perf_counter() - t_start
    plan.prepared = g  # type: ignore[attr-defined]
    plan.timeline_inputs = inputs  # type: ignore[attr-defined]
    return plan


def add_monte_carlo(plan: Plan, scenario: Scenario | None = None,
                    cancel: CancelFn | None = None) -> Plan:
    """A copy of ``plan`` with the seeded Monte Carlo TTFF statistics of ``scenario``
    (default: the plan's own) computed on the plan's timeline inputs; the plan itself is
    not changed (another thread may be showing it)."""
    from dataclasses import replace as _replace

    sc = scenario or plan.scenario
    t0 = _time.perf_counter()
    inputs = plan.timeline_inputs  # type: ignore[attr-defined]
    ttff = tl.monte_carlo_ttff(inputs, sc.search.monte_carlo_runs, sc.search.seed, cancel)
    out = _replace(plan, scenario=sc, ttff=ttff,
                   warnings=_dedupe(plan.warnings + list(ttff.warnings)),
                   compute_s=plan.compute_s + _time.perf_counter() - t0)
    out.prepared = plan.prepared  # type: ignore[attr-defined]
    out.timeline_inputs = inputs  # type: ignore[attr-defined]
    return out


@lru_cache(maxsize=64)
def _design_bins(coherent_s: float, max_loss_db: float) -> binlib.BinDesign:
    """The bin design (a pure function of its two numbers; cached: every event of a drive
    and every re-plan asks for the same few)."""
    return binlib.design_bins(coherent_s, max_loss_db)


@lru_cache(maxsize=64)
def _cell_offsets(coherent_s: float, bin_width_hz: float, step_chips: float,
                  shape: str) -> detection.CellOffsets:
    """core.search.detection.cell_offsets, cached (a pure function of its four numbers;
    every re-plan asks for the same few). The arrays are made read-only: plans share them."""
    off = detection.cell_offsets(coherent_s, bin_width_hz, step_chips, shape)
    off.loss_db.setflags(write=False)
    off.weight.setflags(write=False)
    return off


@lru_cache(maxsize=256)
def _sensitivity_cached(pfa: float, n: int, offsets_key: tuple, losses_db: float) -> float:
    offsets = _cell_offsets(*offsets_key)
    return detection.expected_sensitivity_dbhz(pfa, 0.9, n, offsets, losses_db)


def _sensitivity_dbhz(pfa: float, n: int, offsets: detection.CellOffsets, losses_db: float) -> float:
    """C/N0 at which the expected Pd over the cell offsets is 0.9 (the same Pd as the
    plan's, core.search.detection.expected_sensitivity_dbhz; cached per design)."""
    return _sensitivity_cached(pfa, n, offsets.key, losses_db)


# Step (dB) of the C/N0 grid on which Pd is tabulated (see _pd_by_table).
PD_TABLE_STEP_DB = 0.01


@lru_cache(maxsize=64)
def _expected_pd_table(coherent_s: float, n: int, pfa: float, offsets_key: tuple,
                       first: int, top: int, end: int) -> np.ndarray:
    """The expected Pd over the cell offsets at the C/N0 nodes ``h k`` for k = top ..
    end - 1 (h = PD_TABLE_STEP_DB), from the detector's Pd at the nodes first .. end - 1
    (see :func:`_pd_by_table`); read-only. A pure function of its arguments, cached: a
    re-plan that returns to a setting, every event of a drive and every departure of a
    sweep with the same C/N0 span ask for the same."""
    off = _cell_offsets(*offsets_key)
    h = PD_TABLE_STEP_DB
    grid = h * np.arange(first, end)
    thr = detection.threshold_for_pfa(pfa, n)
    base = np.asarray(detection.detection_probability(
        detection.coherent_snr_linear(grid, coherent_s), n, thr))
    j0 = top - first                                  # top nodes = grid[j0:]
    n_top = end - top
    # Pd at node - loss_k, linear between the grid's nodes, summed with the weights:
    # h k - loss_k lies a fixed (fractional) number of steps below node k, so the sum
    # over the offset nodes is one short correlation of the detector's table with a
    # kernel of (step, weight) taps (equal to interpolating each shift, to rounding).
    shift = off.loss_db / h
    below = np.floor(shift).astype(np.int64)          # whole steps below, and the rest
    frac = shift - below
    lags = np.concatenate([below, below + 1])         # base index j0 + j - lag
    taps = np.concatenate([off.weight * (1.0 - frac), off.weight * frac])
    kernel = np.zeros(int(lags.max()) + 1)
    np.add.at(kernel, lags, taps)
    start = j0 - kernel.size + 1                      # first base index the kernel reaches
    # (the grid reaches down by the worst loss; should rounding leave it a node short,
    # Pd below the grid is its first value, as np.interp would take it)
    seg = base[start:] if start >= 0 else np.concatenate([np.full(-start, base[0]), base])
    table = np.convolve(seg, kernel, mode="valid")[:n_top]
    table.setflags(write=False)
    return table


def _pd_by_table(cn0_centre_dbhz: np.ndarray, coherent_s: np.ndarray, n_nc: np.ndarray,
                 pfa: float, offsets: list[detection.CellOffsets]) -> np.ndarray:
    """Expected detection probability over the cell offsets (core.search.detection) per (S, T).

    ``cn0_centre_dbhz`` is C/N0 at the cell centre (every loss but the offsets'). Per
    (coherent time, N, cell) group, the detector's Pd is evaluated once on a 0.01 dB grid
    of C/N0 that reaches down by the worst offset loss; the expected Pd on the same grid is
    the weighted sum of that table shifted by each node's loss, and the samples are
    interpolated linearly in it (Pd is smooth in C/N0: each of the two interpolations errs
    by less than 1.3e-6 [calc: |Pd''| < 0.1 per dB^2 times h^2/8]; test_plan checks the
    result against a direct evaluation to 2e-5). The elevation model holds C/N0 at its
    mask value below the mask, so every sample has a finite value. This keeps a re-plan
    fast on long windows, where the direct non-central chi-square would dominate: the
    tables are cached per (setting, node range) and the samples are looked up on the
    lattice by index."""
    pd = np.empty_like(cn0_centre_dbhz, dtype=float)
    groups: dict[tuple, list[int]] = {}
    for i, (t, n, off) in enumerate(zip(coherent_s, n_nc, offsets)):
        groups.setdefault((float(t), int(n), off.key), []).append(i)
    for (tc, n, okey), row_list in groups.items():
        whole = len(row_list) == cn0_centre_dbhz.shape[0]
        rows = slice(None) if whole else np.array(row_list)
        sub = cn0_centre_dbhz if whole else cn0_centre_dbhz[rows]
        lo, hi = float(np.min(sub)), float(np.max(sub))
        reach = float(np.max(_cell_offsets(*okey).loss_db))
        h = PD_TABLE_STEP_DB
        # Nodes on the fixed lattice h * integer (not from lo): any part of the window
        # (a block of a long plan, core.plan.long_window) gets the same values. The
        # detector's table reaches down by the worst offset loss; the expected one
        # starts at the first node at or above lo - h.
        first, end = math.floor((lo - reach) / h) - 2, math.ceil(hi / h) + 3
        top = math.ceil((lo - h) / h)
        top -= 1 if h * (top - 1) >= lo - h else 0
        top += 1 if h * top < lo - h else 0
        table = _expected_pd_table(tc, n, float(pfa), okey, first, top, end)
        # Linear interpolation between the nodes h (top + i) (as np.interp there).
        u = sub - h * top
        u /= h
        k = u.astype(np.intp)                           # u >= 0: the node at or below
        np.clip(k, 0, table.size - 2, out=k)
        u -= k
        step = np.diff(table)
        val = step[k]
        val *= u
        val += table[k]
        pd[rows] = val
    return pd


def _grid_index_at(grid: TimeGrid, visible: np.ndarray, s: int, unix_s: float) -> int:
    """The grid sample whose values a search starting at ``unix_s`` uses: the one at or
    before it, or the next one when the satellite is not yet above the mask there (the
    rule of core.plan.timeline for a search that starts at a rise)."""
    u = grid.unix_s
    k = min(max(int(np.searchsorted(u, unix_s, side="right")) - 1, 0), u.size - 1)
    if not visible[s, k] and k + 1 < u.size:
        k += 1
    return k


# Largest horizontal uncertainty for which the position term (a local expansion about the
# nominal site) is used without a warning; tests/test_windows_bruteforce.py checks it
# against brute force up to 100 km (a one-off check of 30-3000 km also held).
LOCAL_DISC_LIMIT_KM = 1000.0

# GLONASS FDMA channels k = -7..+6 [pub: GLONASS ICD 5.1].
_GLONASS_K_RANGE = (-7, 6)


def _widen_for_unknown_k(w: DopplerWindows, rows: np.ndarray) -> DopplerWindows:
    """Windows of GLONASS satellites whose channel k is unknown, made to hold the apparent
    Doppler on every carrier f0 + k step: every term scales with the carrier, so the
    window [lo, hi] planned on f0 becomes [lo, hi] x (f0 + k step) / f0 for the worst k
    [calc]. The extra extent is booked on the orbit-data term."""
    if not np.any(rows):
        return w
    sig = SIGNALS["GLO-L1OF"]
    ratios = [(sig.carrier_hz + k * sig.fdma_step_hz) / sig.carrier_hz for k in _GLONASS_K_RANGE]
    lo, hi = w.low_hz, w.high_hz
    ext_lo = np.minimum(lo * ratios[0], lo * ratios[1]) - lo
    ext_hi = np.maximum(hi * ratios[0], hi * ratios[1]) - hi
    mask = np.asarray(rows)[:, None]
    lows, highs = dict(w.terms_low_hz), dict(w.terms_high_hz)
    lows["orbit"] = lows["orbit"] + np.where(mask, np.minimum(ext_lo, 0.0), 0.0)
    highs["orbit"] = highs["orbit"] + np.where(mask, np.maximum(ext_hi, 0.0), 0.0)
    return DopplerWindows(w.nominal_hz, w.nominal_hz + sum(lows.values()),
                          w.nominal_hz + sum(highs.values()), lows, highs)


def _priority(kind: str, pred: Prediction) -> np.ndarray:
    """Search order: 'elevation' = highest first; 'rising' = rising satellites first
    (highest first among them), then setting ones - a rising satellite stays longer in
    view, so its acquisition pays off for longer."""
    el = pred.elevation_deg
    if kind == "rising":
        return el + np.where(pred.elevation_rate_deg_s > 0, 180.0, 0.0)
    return el


def _dedupe(items: list[str]) -> list[str]:
    seen: set[str] = set()
    return [x for x in items if not (x in seen or seen.add(x))]


# --- serialisation ----------------------------------------------------------------------

def _round(v, nd):
    return None if v is None or not math.isfinite(v) else round(float(v), nd)


def plan_to_json(plan: Plan) -> dict:
    """The ``acqplan plan`` JSON schema."""
    iso = plan.times.iso()
    sats = []
    for s, sp in enumerate(plan.satellites):
        vis = np.nonzero(plan.visible[s])[0]
        wf, wa = plan.windows_first, plan.windows_after
        windows = [{"time": iso[k], "nominal_hz": round(float(wf.nominal_hz[s, k]), 2),
                    "low_hz": round(float(wf.low_hz[s, k]), 2), "high_hz": round(float(wf.high_hz[s, k]), 2),
                    "after_low_hz": round(float(wa.low_hz[s, k]), 2),
                    "after_high_hz": round(float(wa.high_hz[s, k]), 2),
                    "elevation_deg": round(float(plan.prediction.elevation_deg[s, k]), 3),
                    "bins": int(plan.bins_first[s, k]), "bins_after": int(plan.bins_after[s, k])}
                   for k in vis]
        shares = {name: round(float(np.max(v[s, vis])), 3) if vis.size else None
                  for name, v in wf.share_hz.items()}
        sats.append({"id": sp.sat_id, "signal": sp.signal_id, "carrier_hz": sp.carrier_hz,
                     "glonass_k": sp.glonass_k, "source": sp.source_kind,
                     "data_age_days": round(sp.data_age_s / 86400.0, 3), "healthy": sp.healthy,
                     "passes": [p.to_dict() for p in sp.passes],
                     "window_terms_max_hz": shares,
                     "windows": windows,
                     "search": None if sp.search is None else sp.search.to_dict(),
                     "broadcast_records": ([r.to_dict() for r in sp.broadcast_records]
                                           if sp.source_kind == "broadcast" else None)})
    return {
        "scenario": plan.scenario.name,
        # sections the scenario file left out, so that all their values are defaults
        "defaults_used": list(plan.scenario.defaults_used),
        "start": iso[0], "end": iso[-1], "step_s": plan.scenario.time.step_s,
        "bin_design": {k: v.to_dict() for k, v in plan.bin_design.items()},
        "sensitivity_dbhz_pd90": {k: round(v, 2) for k, v in plan.sensitivity_dbhz.items()},
        "code_step_loss": {k: v.to_dict() for k, v in plan.code_step_loss.items()},
        "satellites": sats,
        "timeline": [{"channel": seg.channel, "id": seg.sat_id, "kind": seg.kind,
                      "start": iso_utc(seg.start_unix_s), "end": iso_utc(seg.end_unix_s),
                      "acquired": seg.acquired} for seg in plan.timeline.segments],
        "acquisitions": {k: iso_utc(v) for k, v in plan.timeline.acquisition_unix_s.items()},
        "first_acquired": plan.first_acquired,
        "first_fix_time": iso_utc(plan.timeline.first_fix_unix_s),
        "ttff_s": _round(plan.timeline.ttff_s, 2),
        "ttff_median_s": None if plan.ttff is None else _round(plan.ttff.median_s, 2),
        "ttff_p95_s": None if plan.ttff is None else _round(plan.ttff.p95_s, 2),
        "ttff_runs": None if plan.ttff is None else plan.ttff.n_runs,
        "ttff_runs_without_fix": None if plan.ttff is None else plan.ttff.n_no_fix,
        "orbit_files": [{"path": f.path, "format": f.format, "satellites": f.n_satellites,
                         "epoch": iso_z(f.epoch_unix_s, 0),
                         "age_days": None if f.age_s is None else round(f.age_s / 86400.0, 2)}
                        for f in plan.orbit_files],
        "warnings": plan.warnings,
    }


SUMMARY_COLUMNS = ["id", "signal", "in_view", "max_el_deg", "search_start", "state", "low_hz",
                   "high_hz", "bin_width_hz", "bins", "code_window_chips", "code_cells",
                   "cn0_dbhz", "pd", "expected_search_s", "channel", "acquired",
                   "after_low_hz", "after_high_hz", "after_bins"]


def timeline_rows(plan: Plan) -> list[dict]:
    """One row per timeline segment, channel by channel."""
    segs = sorted(plan.timeline.segments, key=lambda g: (g.channel, g.start_unix_s))
    return [{"channel": g.channel, "id": g.sat_id, "kind": g.kind,
             "start": iso_utc(g.start_unix_s), "end": iso_utc(g.end_unix_s),
             "duration_s": round(g.end_unix_s - g.start_unix_s, 1),
             "result": "window end" if g.end_unix_s >= plan.times.end_unix_s - 1e-6 else g.end_reason}
            for g in segs]


def plan_rows(plan: Plan) -> list[dict]:
    """One row per satellite in view: the search summary (table and CSV output)."""
    rows = []
    order = sorted(range(len(plan.satellites)), key=lambda s: (
        plan.satellites[s].search.start_unix_s if plan.satellites[s].search else math.inf,
        plan.satellites[s].sat_id))
    for s in order:
        sp = plan.satellites[s]
        if not plan.visible[s].any():
            continue
        row = {"id": sp.sat_id, "signal": sp.signal_id,
               "in_view": round(float(plan.visible[s].mean()), 3),
               "max_el_deg": round(float(np.max(plan.prediction.elevation_deg[s][plan.visible[s]])), 1)}
        if sp.search:
            d = sp.search.to_dict()
            k = plan.index_at(sp.search.start_unix_s)
            row.update({"search_start": d["start"], "state": d["state"], "low_hz": d["low_hz"],
                        "high_hz": d["high_hz"], "bin_width_hz": d["bin_width_hz"], "bins": d["bins"],
                        "code_window_chips": d["code_window_chips"], "code_cells": d["code_cells"],
                        "cn0_dbhz": d["cn0_dbhz"], "pd": d["pd"], "expected_search_s": d["expected_search_s"],
                        "channel": d["channel"], "acquired": d["acquired"] or "",
                        "after_low_hz": round(float(plan.windows_after.low_hz[s, k]), 2),
                        "after_high_hz": round(float(plan.windows_after.high_hz[s, k]), 2),
                        "after_bins": int(plan.bins_after[s, k])})
        rows.append(row)
    return rows

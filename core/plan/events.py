"""Test events along a drive, each planned as its own acquisition on the plan's stages.

A scenario with a ``[route]`` and/or ``[[event]]`` entries is a drive: the vehicle follows
the route (core.sky.route) through its surroundings (core.sky.surroundings), and the
receiver acquires at every event. :func:`plan_drive` gives each event a full plan by
calling :func:`core.plan.pipeline.make_plan` with the event's own prepared geometry
(predicted along the route from the event's time on, visibility and attenuation through
the surroundings, the route's motion for the windows) and the event's own scenario
values (uncertainties, fine time, ephemeris wait, start): the same stages as a
single-site plan, nothing copied.

What each kind knows (defaults; every value can be set per event; docs/scenario-keys.md):

============  ===============  ==================  =================  =============  ========
kind          time             position            oscillator         ephemeris      Doppler
============  ===============  ==================  =================  =============  ========
cold          nothing          nothing             [receiver] +-      [search] wait  whole range
warm          [time] +-        [site] +- km        [receiver] +-      [search] wait  windows
hot           0.02 s           0.05 km             20 ppb             valid (0 s)    windows
reacquire     grows (below)    along the route     grows (below)      valid (0 s)    windows
============  ===============  ==================  =================  =============  ========

A re-acquisition follows an outage of length L (s) over which the vehicle drove D (m),
starting from the hot-start knowledge (time dt0, position r0, oscillator e0):

* oscillator: e(L) = e0 + drift L, drift = ``[route] outage_drift_ppb_per_s`` (default
  0.2 ppb/s [trade: a vehicle TCXO's short-term drift under cabin temperature change]);
* clock: dt(L) = dt0 + e0 L + drift L^2 / 2 (the integral of the frequency error) [calc];
  below 0.1 s it is given to the code search as fine time;
* position: on a route the vehicle stays on the road, so the position after the outage
  is a range along the route: the distance driven through the outage is known to within
  the speed uncertainty dv times L (the true speed is the planned one +- dv), an
  along-track slip of +- dv L on top of the schedule slip
  (core.search.motion.MotionUncertainty.along_m) [calc], and the hot start's disc r0 of
  the fix before the outage stays. (Before, the whole disc r0 + D + dv L was searched, D
  the distance driven; there is no outage without a route, so no disc growth is left.)

Cold start: the receiver knows no almanac, position or time, so every satellite's whole
Doppler range (core.search.windows.max_doppler_anywhere_hz) and the whole code are
searched. It is planned over the satellites that are in fact up there, in the plan's
search order: an optimistic plan, since a real cold receiver does not know the sky and
also spends time on satellites below its horizon, which is not counted.
"""

from __future__ import annotations

import math
import time as _time
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from datetime import UTC, datetime

import numpy as np

from ..ground.errors import Cancelled, ComputationError, InputError
from ..ground.geodesy import Site
from ..ground.timeutil import iso_z, time_grid
from ..search.motion import MotionUncertainty, RouteMotion, route_motion
from ..search.windows import max_doppler_anywhere_hz, shift_summary
from ..sky.predict import earth_fixed_states, passes_of_predictions, predict
from ..sky.result_guard import guard_prediction
from ..sky.route import Route, RouteStates, SpeedStretch, read_route_file, time_route
from ..sky.surroundings import (
    HorizonProfile,
    Stretch,
    check_stretches,
    read_horizon_csv,
    surroundings_at,
)
from .drive import TREES_DEFAULT_LOSS_DB, RouteSpec
from .pipeline import Plan, PreparedGeometry, geometry_key, load_satellites, make_plan, plan_to_json
from .spec import Scenario

# What a hot start knows [trade: a receiver restarted shortly after a fix, with its
# real-time clock, last position and tracked oscillator]; re-acquisitions grow from it.
HOT_TIME_UNCERTAINTY_S = 0.02
HOT_HORIZONTAL_UNCERTAINTY_KM = 0.05
HOT_VERTICAL_UNCERTAINTY_M = 20.0
HOT_OSCILLATOR_UNCERTAINTY_PPB = 20.0
# Largest clock uncertainty handed to the code search as fine time (the [search] key's range).
FINE_TIME_LIMIT_S = 0.1

ProgressFn = Callable[[float, str], None]


# --- the drive: route, surroundings, motion --------------------------------------------

@dataclass
class Drive:
    """The route as timed, its stretches in distances, the site-wide horizon and what the
    plan does not know about the motion."""

    route: Route
    stretches: list[Stretch]
    horizon: HorizonProfile | None
    motion: MotionUncertainty
    spec: RouteSpec


def _resolve(sc: Scenario, name: str):
    from pathlib import Path

    p = Path(name).expanduser()
    return p if p.is_absolute() else (Path(sc.base_dir) / p).resolve()


def _scenario_file(sc: Scenario) -> str | None:
    return None if sc.path is None else str(sc.path)


def _scenario_error(sc: Scenario, message: str, field_name: str) -> InputError:
    """A problem of scenario key ``field_name`` found once the route is read: named with
    the scenario file and the key's line there (``event[3].at``: that element's key)."""
    return InputError(message, file=_scenario_file(sc), line=sc.line_of(field_name), field=field_name)


def _distance_of(place, waypoints: dict, field_name: str, sc: Scenario) -> float:
    if isinstance(place, str):
        if place not in waypoints:
            known = ", ".join(waypoints) or "none"
            raise _scenario_error(sc, f"no waypoint named '{place}' on the route (known: {known})", field_name)
        return float(waypoints[place])
    return float(place) * 1000.0


def load_drive(sc: Scenario) -> Drive:
    """Read the route file and profiles, resolve waypoints to distances and time the
    route; every problem is an InputError naming the scenario key."""
    rs: RouteSpec = sc.route
    rf = read_route_file(_resolve(sc, rs.file))
    length = float(rf.legs()[0].sum())
    wp = {w.name: w.distance_m for w in rf.waypoints}
    stretches: list[Stretch] = []
    speeds: list[SpeedStretch] = []
    for i, st in enumerate(rs.stretches, 1):
        a = _distance_of(st.from_, wp, f"route.stretch[{i}].from", sc)
        b = _distance_of(st.to, wp, f"route.stretch[{i}].to", sc)
        loss = st.extra_loss_db if st.extra_loss_db is not None else (
            TREES_DEFAULT_LOSS_DB if st.kind == "trees" else 0.0)
        horizon = None if st.horizon_file is None else read_horizon_csv(_resolve(sc, st.horizon_file))
        stretches.append(Stretch(st.kind, a, b, st.name, loss, st.building_height_m or 0.0,
                                 st.street_width_m or 0.0, horizon))
        if st.speed_kmh is not None:
            speeds.append(SpeedStretch(a, b, st.speed_kmh / 3.6))
    try:
        check_stretches(stretches, length, "route.stretch")
        route = time_route(rf, start_unix_s=sc.time.start_unix_s, shift_to_start=rs.shift_to_start,
                           speed_m_s=None if rs.speed_kmh is None else rs.speed_kmh / 3.6,
                           stretch_speeds=speeds, dwell_s=dict(rs.dwell_s))
    except InputError as exc:
        if exc.file is not None or not exc.field:        # the route file's own problem
            raise
        raise _scenario_error(sc, exc.message, exc.field) from None
    horizon = None if rs.horizon_file is None else read_horizon_csv(_resolve(sc, rs.horizon_file))
    mu = MotionUncertainty(rs.slip_min * 60.0, rs.speed_uncertainty_kmh / 3.6, rs.heading_uncertainty_deg,
                           rs.climb_uncertainty_m_s)
    return Drive(route, stretches, horizon, mu, rs)


# --- events --------------------------------------------------------------------------

@dataclass(frozen=True)
class EventKnowledge:
    """What the receiver knows at an event."""

    time_uncertainty_s: float | None          # None: nothing (cold)
    horizontal_uncertainty_km: float | None   # None: nothing (cold)
    vertical_uncertainty_m: float
    oscillator_uncertainty_ppb: float
    ephemeris_wait_s: float
    fine_time_us: float | None                # handed to the code search
    along_route_m: float = 0.0                # +- distance along the route (after an outage)


@dataclass(frozen=True)
class DriveEvent:
    """An event to plan: from the scenario or made at the end of an outage."""

    id: str
    kind: str
    name: str
    unix_s: float
    origin: str                               # "scenario" or "outage"
    knowledge: EventKnowledge
    outage_s: float | None = None             # reacquire: length of the outage
    outage_driven_m: float | None = None


def kind_knowledge(sc: Scenario, kind: str, outage_s: float = 0.0, drift_ppb_s: float = 0.2,
                   speed_uncertainty_m_s: float = 0.0) -> EventKnowledge:
    """The defaults of each kind (module docstring)."""
    if kind == "cold":
        return EventKnowledge(None, None, sc.site.vertical_uncertainty_m, sc.receiver.oscillator_uncertainty_ppb,
                              sc.search.ephemeris_wait_s, None)
    if kind == "warm":
        return EventKnowledge(sc.time.uncertainty_s, sc.site.horizontal_uncertainty_km,
                              sc.site.vertical_uncertainty_m, sc.receiver.oscillator_uncertainty_ppb,
                              sc.search.ephemeris_wait_s, sc.search.fine_time_uncertainty_us)
    if kind == "hot":
        return EventKnowledge(HOT_TIME_UNCERTAINTY_S, HOT_HORIZONTAL_UNCERTAINTY_KM, HOT_VERTICAL_UNCERTAINTY_M,
                              HOT_OSCILLATOR_UNCERTAINTY_PPB, 0.0, _fine(HOT_TIME_UNCERTAINTY_S))
    if kind == "reacquire":
        e0 = HOT_OSCILLATOR_UNCERTAINTY_PPB
        osc = e0 + drift_ppb_s * outage_s
        dt = HOT_TIME_UNCERTAINTY_S if outage_s <= 0 else (
            reacquire_time_uncertainty_s(outage_s, drift_ppb_s))
        return EventKnowledge(dt, HOT_HORIZONTAL_UNCERTAINTY_KM, HOT_VERTICAL_UNCERTAINTY_M, osc, 0.0, _fine(dt),
                              along_route_m=speed_uncertainty_m_s * max(outage_s, 0.0))
    raise ValueError(kind)


def reacquire_time_uncertainty_s(outage_s: float, drift_ppb_s: float,
                                 start_s: float = 1e-6) -> float:
    """Clock uncertainty after an outage: the clock was known to ``start_s`` while
    tracking (a fix gives time to well under a microsecond [trade]), then runs off by the
    integral of the frequency error e0 + drift t: e0 L + drift L^2 / 2 [calc]."""
    e0 = HOT_OSCILLATOR_UNCERTAINTY_PPB * 1e-9
    return start_s + e0 * outage_s + 0.5 * drift_ppb_s * 1e-9 * outage_s**2


def _fine(dt_s: float) -> float | None:
    return dt_s * 1e6 if dt_s <= FINE_TIME_LIMIT_S else None


def _override(base: EventKnowledge, ev) -> EventKnowledge:
    k = base
    if ev.time_uncertainty_s is not None:
        k = replace(k, time_uncertainty_s=ev.time_uncertainty_s, fine_time_us=_fine(ev.time_uncertainty_s)
                    if ev.kind in ("hot", "reacquire") else k.fine_time_us)
    if ev.horizontal_uncertainty_km is not None:
        k = replace(k, horizontal_uncertainty_km=ev.horizontal_uncertainty_km)
    if ev.oscillator_uncertainty_ppb is not None:
        k = replace(k, oscillator_uncertainty_ppb=ev.oscillator_uncertainty_ppb)
    if ev.ephemeris_wait_s is not None:
        k = replace(k, ephemeris_wait_s=ev.ephemeris_wait_s)
    return k


def drive_events(sc: Scenario, drive: Drive | None) -> list[DriveEvent]:
    """The scenario's events (times resolved) and, with ``auto_reacquire``, one
    re-acquisition at the end of every outage stretch; sorted by time."""
    out: list[DriveEvent] = []
    wp = {} if drive is None else {w.name: w for w in drive.route.waypoints}
    drift = 0.2 if drive is None else drive.spec.outage_drift_ppb_per_s
    dv = 0.0 if drive is None else drive.motion.speed_m_s
    for i, ev in enumerate(sc.events, 1):
        fld = f"event[{i}].at"
        if isinstance(ev.at, datetime):
            t = ev.at.timestamp()
        elif drive is None:
            raise _scenario_error(sc, "a waypoint or a distance needs a [route]", fld)
        elif isinstance(ev.at, str):
            if ev.at not in wp:
                known = ", ".join(wp) or "none"
                raise _scenario_error(sc, f"no waypoint named '{ev.at}' on the route (known: {known})", fld)
            t = drive.route.time_at_distance(wp[ev.at].distance_m)
        else:
            d = float(ev.at) * 1000.0
            if d > drive.route.length_m + 1e-6:
                raise _scenario_error(sc, f"{ev.at:g} km is past the route's end "
                                          f"({drive.route.length_m / 1000:.3f} km)", fld)
            t = drive.route.time_at_distance(d)
        if not (sc.time.start_unix_s <= t < sc.time.end_unix_s):
            raise _scenario_error(sc, f"the event falls at {iso_z(t)}, outside the window "
                                      f"{iso_z(sc.time.start_unix_s)} to {iso_z(sc.time.end_unix_s)}", fld)
        outage_s = driven = None
        base = kind_knowledge(sc, ev.kind, drift_ppb_s=drift)
        if ev.kind == "reacquire" and drive is not None:
            # A scenario re-acquisition: after the outage that ends last before it, if any.
            prev = [s for s in drive.stretches if s.kind == "outage"
                    and drive.route.time_at_distance(s.to_m) <= t + 1e-6]
            if prev:
                s = max(prev, key=lambda x: x.to_m)
                outage_s = drive.route.time_at_distance(s.to_m) - drive.route.time_at_distance(s.from_m)
                driven = s.to_m - s.from_m
                base = kind_knowledge(sc, "reacquire", outage_s, drift, dv)
        out.append(DriveEvent(f"E{i}", ev.kind, ev.name or f"{ev.kind} start" if ev.kind != "reacquire"
                              else ev.name or "re-acquisition", t, "scenario", _override(base, ev),
                              outage_s, driven))
    if drive is not None and drive.spec.auto_reacquire:
        n = 0
        for s in sorted((s for s in drive.stretches if s.kind == "outage"), key=lambda x: x.from_m):
            t0 = drive.route.time_at_distance(s.from_m)
            t1 = drive.route.time_at_distance(s.to_m)
            if not (sc.time.start_unix_s <= t1 < sc.time.end_unix_s):
                continue
            n += 1
            know = kind_knowledge(sc, "reacquire", t1 - t0, drift, dv)
            label = s.name or "outage"
            out.append(DriveEvent(f"R{n}", "reacquire", f"after {label}", t1, "outage", know, t1 - t0,
                                  s.to_m - s.from_m))
    out.sort(key=lambda e: (e.unix_s, e.id))
    return out


# --- results -------------------------------------------------------------------------

@dataclass
class EventPlan:
    """One event's full plan and where/when it happens. ``plan`` is a complete
    :class:`~core.plan.pipeline.Plan` over the event's own grid (from the event on):
    windows, bins, code windows, Pd, timeline, first fix, Monte Carlo TTFF."""

    event: DriveEvent
    lat_deg: float
    lon_deg: float
    height_m: float
    distance_m: float
    speed_m_s: float
    heading_deg: float
    stretch: str
    plan: Plan
    visible_ids: list[str]                 # searchable at the event (mask and surroundings)
    blocked_ids: list[str]                 # above the mask but behind the surroundings
    warnings: list[str] = field(default_factory=list)

    @property
    def first_fix_unix_s(self) -> float | None:
        return self.plan.timeline.first_fix_unix_s

    @property
    def ttff_median_s(self) -> float | None:
        return None if self.plan.ttff is None else self.plan.ttff.median_s

    @property
    def ttff_p95_s(self) -> float | None:
        return None if self.plan.ttff is None else self.plan.ttff.p95_s

    def to_dict(self) -> dict:
        pj = plan_to_json(self.plan)
        ev = self.event
        k = ev.knowledge
        return {"id": ev.id, "kind": ev.kind, "name": ev.name, "origin": ev.origin, "time": iso_z(ev.unix_s, 0),
                "lat_deg": round(self.lat_deg, 7), "lon_deg": round(self.lon_deg, 7),
                "height_m": round(self.height_m, 1), "distance_m": round(self.distance_m, 1),
                "stretch": self.stretch, "speed_m_s": round(self.speed_m_s, 2),
                "heading_deg": round(self.heading_deg, 1),
                "outage_s": None if ev.outage_s is None else round(ev.outage_s, 1),
                "knows": {"time_uncertainty_s": k.time_uncertainty_s,
                          "horizontal_uncertainty_km": k.horizontal_uncertainty_km,
                          "along_route_m": round(k.along_route_m, 1),
                          "oscillator_uncertainty_ppb": round(k.oscillator_uncertainty_ppb, 3),
                          "ephemeris_wait_s": k.ephemeris_wait_s, "fine_time_us": k.fine_time_us},
                "visible": self.visible_ids, "blocked": self.blocked_ids,
                "satellites": pj["satellites"], "timeline": pj["timeline"],
                "first_fix_time": pj["first_fix_time"], "ttff_s": pj["ttff_s"],
                "ttff_median_s": pj["ttff_median_s"], "ttff_p95_s": pj["ttff_p95_s"],
                "warnings": self.warnings + [w for w in self.plan.warnings if w not in self.warnings]}


@dataclass
class RouteSamples:
    """The vehicle at every plan step of the scenario's window (for the route view)."""

    states: RouteStates
    stretch: list[str]
    outage: np.ndarray

    def to_list(self) -> list[dict]:
        s = self.states
        return [{"time": iso_z(float(s.unix_s[k]), 0), "lat_deg": round(float(s.lat_deg[k]), 7),
                 "lon_deg": round(float(s.lon_deg[k]), 7), "height_m": round(float(s.height_m[k]), 1),
                 "speed_m_s": round(float(s.speed_m_s[k]), 2), "heading_deg": round(float(s.heading_deg[k]), 1),
                 "distance_m": round(float(s.distance_m[k]), 1), "stretch": self.stretch[k]}
                for k in range(s.unix_s.size)]


@dataclass
class DrivePlan:
    """Every event's plan along the drive, the route at every plan step and the summary."""

    drive: Drive | None
    samples: RouteSamples | None
    events: list[EventPlan]
    warnings: list[str]
    compute_s: float = 0.0

    @property
    def worst(self) -> EventPlan | None:
        """The event with the longest 95th-percentile time to fix (no fix counts longest)."""
        if not self.events:
            return None

        def key(e: EventPlan):
            p95 = e.ttff_p95_s
            return math.inf if p95 is None or not math.isfinite(p95) else p95
        return max(self.events, key=key)

    def summary_rows(self) -> list[dict]:
        """Per event: kind, time, place, time to fix (median/p95); the worst marked."""
        worst = self.worst
        rows = []
        for e in self.events:
            rows.append({"id": e.event.id, "kind": e.event.kind, "name": e.event.name,
                         "time": iso_z(e.event.unix_s, 0), "distance_km": round(e.distance_m / 1000.0, 3),
                         "lat_deg": round(e.lat_deg, 5), "lon_deg": round(e.lon_deg, 5), "stretch": e.stretch,
                         "visible": len(e.visible_ids), "blocked": len(e.blocked_ids),
                         "ttff_median_s": _r(e.ttff_median_s), "ttff_p95_s": _r(e.ttff_p95_s),
                         "first_fix": None if e.first_fix_unix_s is None else iso_z(e.first_fix_unix_s, 0),
                         "worst": e is worst})
        return rows

    def route_json(self) -> dict | None:
        if self.drive is None or self.samples is None:
            return None
        r = self.drive.route
        return {"file": r.path, "length_m": round(r.length_m, 1), "duration_s": round(r.duration_s, 1),
                "timing": r.timing, "start": iso_z(r.start_unix_s, 0), "end": iso_z(r.end_unix_s, 0),
                "waypoints": [w.to_dict() for w in r.waypoints],
                "stretches": [s.to_dict() for s in self.drive.stretches],
                "samples": self.samples.to_list(), "notes": list(r.notes)}

    def to_json(self) -> dict:
        w = self.worst
        return {"route": self.route_json(), "events": [e.to_dict() for e in self.events],
                "drive_summary": {"events": self.summary_rows(), "worst_event": None if w is None else w.event.id},
                "drive_warnings": self.warnings}


def _r(v):
    return None if v is None or not math.isfinite(v) else round(float(v), 2)


# --- planning --------------------------------------------------------------------------

def _event_scenario(sc: Scenario, ev: DriveEvent, t0: float, t1: float, site: Site) -> Scenario:
    k = ev.knowledge
    time = replace(sc.time, start=datetime.fromtimestamp(t0, UTC), end=datetime.fromtimestamp(t1, UTC),
                   uncertainty_s=0.0 if k.time_uncertainty_s is None else k.time_uncertainty_s)
    s = replace(sc.site, lat_deg=site.lat_deg, lon_deg=site.lon_deg, height_m=site.height_m,
                horizontal_uncertainty_km=0.0 if k.horizontal_uncertainty_km is None else k.horizontal_uncertainty_km,
                vertical_uncertainty_m=k.vertical_uncertainty_m)
    rx = replace(sc.receiver, oscillator_uncertainty_ppb=k.oscillator_uncertainty_ppb)
    search = replace(sc.search, ephemeris_wait_s=k.ephemeris_wait_s, fine_time_uncertainty_us=k.fine_time_us)
    return replace(sc, name=f"{sc.name}: {ev.id} {ev.name}", time=time, site=s, receiver=rx, search=search,
                   route=None, events=())


def _static_route(sc: Scenario) -> Route:
    """A receiver standing at the scenario's site (events without a route)."""
    from ..sky.route import RouteFile

    rf = RouteFile("site", "csv", np.array([sc.site.lat_deg]), np.array([sc.site.lon_deg]),
                   np.array([sc.site.height_m]), np.array([sc.time.start_unix_s]), [(0, 1)], [], ["site"])
    return time_route(rf)


@dataclass
class EventGeometry:
    """One event's geometry: its grid, the drive's motion over it, the prediction through
    the surroundings with its passes (``prepared``, the pipeline's PreparedGeometry) and
    the event it was made for (whose time, kind, clock uncertainty and range along the
    route it depends on)."""

    event: DriveEvent
    grid_end_unix_s: float
    start_site: Site
    motion: RouteMotion
    prepared: PreparedGeometry
    stretch: str
    above: np.ndarray                      # (S, T) above the mask, propagated, healthy
    blocked: np.ndarray                    # (S, T) behind the surroundings
    warnings: list[str]


@dataclass
class DriveGeometry:
    """Everything of a drive that no search setting changes: the route as timed, every
    event's geometry, the route at every plan step and the drive's warnings. Made once
    by :func:`drive_geometry`, planned by :func:`plan_drive_search` for any scenario with
    the same :func:`drive_geometry_key` (core.plan.sweep shares it across the settings
    of a departure)."""

    key: tuple
    drive: Drive | None
    events: list[EventGeometry]
    samples: RouteSamples | None
    warnings: list[str]
    compute_s: float = 0.0


def drive_geometry_key(sc: Scenario) -> tuple:
    """What the drive's geometry depends on: the propagation's inputs (orbit files,
    site, window, step, time uncertainty, signals, mask), the orbit-file options, the
    route and its keys, the events and, for events without a route, the receiver's
    vertical speed. Search, signal and the other receiver keys are not in it."""
    return (geometry_key(sc), repr(sc.orbits), str(sc.base_dir), repr(sc.route), repr(sc.events),
            None if sc.route is not None else sc.receiver.max_vertical_speed_m_s)


def _geometry_of_event(ev: DriveEvent) -> tuple:
    """What of an event its geometry depends on."""
    k = ev.knowledge
    return (ev.id, ev.kind, ev.unix_s, k.time_uncertainty_s, k.along_route_m)


def _part(progress: ProgressFn | None, a: float, b: float) -> ProgressFn | None:
    return None if progress is None else (lambda f, text: progress(a + (b - a) * f, text))


def drive_geometry(sc: Scenario, progress: ProgressFn | None = None,
                   cancel: Callable[[], bool] | None = None) -> DriveGeometry:
    """The geometry stage of :func:`plan_drive`: route, orbits, and per event its grid,
    motion, prediction, surroundings and passes."""
    t_start = _time.perf_counter()
    drive = load_drive(sc) if sc.route is not None else None
    events = drive_events(sc, drive)
    warnings: list[str] = []
    route = drive.route if drive is not None else _static_route(sc)
    stretches = drive.stretches if drive is not None else []
    horizon = drive.horizon if drive is not None else None
    mu = drive.motion if drive is not None else MotionUncertainty(0.0, 0.0, 0.0, sc.receiver.max_vertical_speed_m_s)
    if drive is not None and (route.end_unix_s <= sc.time.start_unix_s or route.start_unix_s >= sc.time.end_unix_s):
        warnings.append(f"the route's times ({iso_z(route.start_unix_s, 0)} to {iso_z(route.end_unix_s, 0)}) "
                        "do not overlap the window: the vehicle waits at an end of the route; set "
                        "route.shift_to_start = true or a planned speed (route.speed_kmh)")
    if not events:
        warnings.append("the drive has no events: add [[event]] entries or an outage stretch")
    orbits, by_system, sel_warn = load_satellites(sc)
    warnings += sel_warn
    horizon_s = (drive.spec.event_horizon_min if drive is not None else 15.0) * 60.0
    step = sc.time.step_s
    grids, grid_warn = [], []
    for ev in events:
        t0 = ev.unix_s
        t1 = min(t0 + horizon_s, sc.time.end_unix_s)
        ev_warn: list[str] = []
        if t1 - t0 < 2 * step:
            t1 = t0 + 2 * step
            ev_warn.append(f"{ev.id} is less than two plan steps before the window's end; planned "
                           f"over {2 * step:g} s")
        grids.append(time_grid(datetime.fromtimestamp(t0, UTC), datetime.fromtimestamp(t1, UTC), step))
        grid_warn.append((t1, ev_warn))
    # The satellites' Earth-fixed states do not depend on the receiver: the coarse look
    # below and all events share one propagation (core.sky.predict.earth_fixed_states:
    # each grid gets exactly what its own prediction would propagate).
    tp = _time.perf_counter()
    coarse = time_grid(sc.time.start, sc.time.end, max(sc.time.step_s, 600.0))
    shared = earth_fixed_states(orbits, [coarse] + grids)
    # Satellites whose geometry no orbit of their system allows are dropped once, from a
    # coarse look over the whole window (core.sky.result_guard).
    kept, _, guard_warn = guard_prediction(
        orbits, predict(orbits, Site(sc.site.lat_deg, sc.site.lon_deg, sc.site.height_m), coarse,
                        signals=by_system, states=shared[0]))
    warnings += guard_warn
    shared = shared[1:] if kept is orbits else earth_fixed_states(kept, grids)
    orbits = kept
    shared_s = (_time.perf_counter() - tp) / max(len(events), 1)
    healthy = np.array([e.info.healthy for e in orbits.entries])
    files_key = geometry_key(sc)[:3]          # the events' scenarios read the same orbit files
    made, seen_all = [], []
    for n, (ev, grid, states) in enumerate(zip(events, grids, shared)):
        if cancel is not None and cancel():
            raise Cancelled()
        if progress is not None:
            progress(n / max(len(events), 1), f"geometry of {ev.id} ({ev.kind})")
        tp = _time.perf_counter()
        motion = route_motion(route, grid.unix_s, replace(mu, along_m=ev.knowledge.along_route_m))
        pred = predict(orbits, motion.path, grid, signals=by_system, keep_states=True, states=states)
        shared[n] = None                  # the prediction keeps its own copy of the states
        k = ev.knowledge
        cold = ev.kind == "cold"
        dt = 0.0 if k.time_uncertainty_s is None else k.time_uncertainty_s
        shifted = None if cold else shift_summary(orbits, motion.path, grid, dt, by_system)
        sur = surroundings_at(motion.nominal.distance_m, motion.nominal.heading_deg, pred.azimuth_deg,
                              pred.elevation_deg, stretches, horizon)
        # Passes through the surroundings: a satellite behind a building or in a tunnel is
        # "down" there (the channel timeline takes rise and set from these); found for all
        # events at once below.
        seen_all.append(replace(pred, elevation_deg=np.where(sur.blocked, -90.0, pred.elevation_deg)))
        made.append((motion, pred, shifted, sur, _time.perf_counter() - tp))
    tp = _time.perf_counter()
    found_all = passes_of_predictions(seen_all, sc.mask.elevation_deg)
    shared_s += (_time.perf_counter() - tp) / max(len(events), 1)
    out: list[EventGeometry] = []
    for ev, grid, (t1, ev_warn), (motion, pred, shifted, sur, spent_s), found in zip(
            events, grids, grid_warn, made, found_all):
        tp = _time.perf_counter()
        t0 = ev.unix_s
        cold = ev.kind == "cold"
        above = pred.valid & (pred.elevation_deg >= sc.mask.elevation_deg) & healthy[:, None]
        visible = above & ~sur.blocked
        start_site = motion.path.at(0)
        grid_end = float(grid.unix_s[-1])
        sc_ev = _event_scenario(sc, ev, t0, grid_end, start_site)
        g = PreparedGeometry(geometry_key(sc_ev, files=files_key), orbits, start_site, grid, pred, shifted,
                             found, pred.signal_ids, visible, list(pred.warnings),
                             shared_s + spent_s + _time.perf_counter() - tp,
                             motion=motion, extra_loss_db=sur.extra_loss_db)
        if cold:
            # A cold receiver knows no satellite's orbit: each searches its system's widest range.
            own = max_doppler_anywhere_hz(pred)
            systems = np.array([e.info.system for e in orbits.entries])
            g.full_range_hz = np.array([np.nanmax(own[systems == x]) for x in systems])
            g.full_range_speed_m_s = float(np.max(motion.max_horizontal_speed_m_s)) + mu.vertical_m_s
        if not visible.any():
            ev_warn.append(f"{ev.id}: no satellite can be received from {iso_z(t0, 0)} for "
                           f"{(t1 - t0) / 60:.0f} min (outage or surroundings)")
        out.append(EventGeometry(ev, grid_end, start_site, motion, g, sur.stretch_names[0], above,
                                 sur.blocked, ev_warn))
    samples = None
    if drive is not None:
        u = sc.time.grid().unix_s
        states = route.state_at(u)
        idx = np.full(u.size, -1)
        for i, s in enumerate(stretches):
            idx[(states.distance_m >= s.from_m) & (states.distance_m < s.to_m)] = i
        names = ["open" if i < 0 else (stretches[i].name or stretches[i].kind) for i in idx]
        outage = np.array([i >= 0 and stretches[i].kind == "outage" for i in idx])
        samples = RouteSamples(states, names, outage)
    return DriveGeometry(drive_geometry_key(sc), drive, out, samples, warnings, _time.perf_counter() - t_start)


def plan_drive_search(sc: Scenario, geometry: DriveGeometry, progress: ProgressFn | None = None,
                      cancel: Callable[[], bool] | None = None, monte_carlo: bool = True) -> DrivePlan:
    """The search stage of :func:`plan_drive`: every event planned through ``make_plan``
    on its geometry with what the event knows under ``sc``'s settings. ``geometry`` must
    come from :func:`drive_geometry` of a scenario with the same
    :func:`drive_geometry_key` (ValueError otherwise)."""
    t_start = _time.perf_counter()
    if geometry.key != drive_geometry_key(sc):
        raise ValueError("the drive geometry was made for a scenario with other route, events, "
                         "orbits, site, window, signals or mask")
    drive = geometry.drive
    events = drive_events(sc, drive)
    if [_geometry_of_event(e) for e in events] != [_geometry_of_event(eg.event) for eg in geometry.events]:
        raise ValueError("the drive geometry was made for other events")
    out: list[EventPlan] = []
    for n, (ev, eg) in enumerate(zip(events, geometry.events)):
        if cancel is not None and cancel():
            raise Cancelled()
        if progress is not None:
            progress(n / max(len(events), 1), f"planning {ev.id} ({ev.kind})")
        t0 = ev.unix_s
        g = eg.prepared
        sc_ev = _event_scenario(sc, ev, t0, eg.grid_end_unix_s, eg.start_site)
        try:
            if drive is not None:
                sc_ev = replace(sc_ev, search=replace(sc_ev.search,
                                                      monte_carlo_runs=drive.spec.event_monte_carlo_runs))
            plan = make_plan(sc_ev, prepared=g, monte_carlo=monte_carlo)
        except ComputationError as exc:
            raise ComputationError(f"{ev.id} ({ev.kind} at {iso_z(t0, 0)}): {exc}") from None
        if not plan.reused_geometry:      # make_plan found the key different and propagated anew
            raise ValueError(f"the geometry of {ev.id} was made for another event scenario")
        st0 = eg.motion.nominal
        ids = g.prediction.ids
        visible = g.visible
        out.append(EventPlan(ev, float(st0.lat_deg[0]), float(st0.lon_deg[0]), float(st0.height_m[0]),
                             float(st0.distance_m[0]), float(st0.speed_m_s[0]), float(st0.heading_deg[0]),
                             eg.stretch, plan,
                             [ids[s] for s in np.nonzero(visible[:, 0])[0]],
                             [ids[s] for s in np.nonzero(eg.above[:, 0] & eg.blocked[:, 0])[0]],
                             list(eg.warnings)))
    if progress is not None:
        progress(1.0, "done")
    return DrivePlan(drive, geometry.samples, out, list(geometry.warnings), _time.perf_counter() - t_start)


def plan_drive(sc: Scenario, progress: ProgressFn | None = None, cancel: Callable[[], bool] | None = None,
               monte_carlo: bool = True) -> DrivePlan:
    """Plan every event of a drive scenario (see the module docstring): the geometry
    stage (:func:`drive_geometry`) then the search stage (:func:`plan_drive_search`)."""
    t_start = _time.perf_counter()
    geometry = drive_geometry(sc, _part(progress, 0.0, 0.5), cancel)
    plan = plan_drive_search(sc, geometry, _part(progress, 0.5, 1.0), cancel, monte_carlo)
    plan.compute_s = _time.perf_counter() - t_start
    return plan


def single_site_equivalent(route: Route, t0: float, t1: float, speed_uncertainty_m_s: float,
                           climb_uncertainty_m_s: float = 0.0) -> tuple[Site, float, float, float]:
    """The single site that covers the drive between t0 and t1: the mid-point of the
    positions driven, the largest distance from it to any of them (m), the fastest speed
    in any direction and the fastest climb (m/s): what a plan without a route would need."""
    u = np.linspace(t0, t1, 201)
    st = route.state_at(np.concatenate((u, route.time_unix_s[(route.time_unix_s > t0) & (route.time_unix_s < t1)])))
    from geographiclib.geodesic import Geodesic

    lat_c, lon_c = float(np.mean(st.lat_deg)), float(np.mean(st.lon_deg))
    r = max(Geodesic.WGS84.Inverse(lat_c, lon_c, a, b, Geodesic.DISTANCE)["s12"]
            for a, b in zip(st.lat_deg, st.lon_deg))
    return (Site(lat_c, lon_c, float(np.mean(st.height_m))), float(r),
            float(np.max(st.speed_m_s)) + speed_uncertainty_m_s,
            float(np.max(np.abs(st.vertical_m_s))) + climb_uncertainty_m_s)


__all__ = ["Drive", "DriveEvent", "DriveGeometry", "DrivePlan", "EventGeometry", "EventKnowledge", "EventPlan",
           "RouteSamples", "drive_geometry", "drive_geometry_key", "kind_knowledge", "load_drive", "plan_drive",
           "plan_drive_search", "reacquire_time_uncertainty_s", "single_site_equivalent"]

"""The drive's scenario keys: ``[route]``, ``[[route.stretch]]`` and ``[[event]]``.

A helper of core.plan.spec (which calls :func:`check_drive` while validating a scenario
and keeps the result in ``Scenario.route`` / ``Scenario.events``). Only keys, types and
ranges are checked here; what needs the route file (waypoint names, distances past the
route's end, overlapping stretches, events outside the window) is checked when the drive
is planned (core.plan.events), with the same field names and the key's line in the file
(``Scenario.line_of``; the n-th ``[[event]]`` is ``event[n]``).

Every key, its unit, range and default is listed in docs/scenario-keys.md.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

EVENT_KINDS = ("cold", "warm", "hot", "reacquire")
STRETCH_KINDS = ("open", "trees", "canyon", "outage")

# Foliage over a road: a default attenuation for a "trees" stretch without its own value
# [trade: deciduous canopy in leaf, roughly 5-12 dB at L1; 8 dB taken].
TREES_DEFAULT_LOSS_DB = 8.0


@dataclass(frozen=True)
class StretchSpec:
    """One ``[[route.stretch]]``: ``from_``/``to`` are km along the route (float) or a
    waypoint name (str)."""

    kind: str
    from_: float | str
    to: float | str
    name: str = ""
    extra_loss_db: float | None = None
    building_height_m: float | None = None
    street_width_m: float | None = None
    speed_kmh: float | None = None
    horizon_file: str | None = None


@dataclass(frozen=True)
class RouteSpec:
    """``[route]``: the route file, its timing and what the plan does not know about the drive."""

    file: str
    speed_kmh: float | None = None
    shift_to_start: bool = False
    slip_min: float = 0.0
    speed_uncertainty_kmh: float = 10.8
    heading_uncertainty_deg: float = 15.0
    climb_uncertainty_m_s: float = 1.0
    horizon_file: str | None = None
    event_horizon_min: float = 15.0
    outage_drift_ppb_per_s: float = 0.2
    auto_reacquire: bool = True
    event_monte_carlo_runs: int = 200
    dwell_s: tuple[tuple[str, float], ...] = ()
    stretches: tuple[StretchSpec, ...] = ()


@dataclass(frozen=True)
class EventSpec:
    """One ``[[event]]``: ``at`` is a time (aware datetime), a waypoint name (str) or km
    along the route (float). Unset uncertainties take the kind's defaults (core.plan.events)."""

    kind: str
    at: Any
    name: str = ""
    time_uncertainty_s: float | None = None
    horizontal_uncertainty_km: float | None = None
    oscillator_uncertainty_ppb: float | None = None
    ephemeris_wait_s: float | None = None


def _rules():
    from .spec import _r

    route = (
        _r("route", "file", "path", doc="GPX 1.0/1.1 or CSV (time_utc, lat_deg, lon_deg, height_m[, name])"),
        _r("route", "speed_kmh", "number", None, 1.0, 300.0, "km/h",
           doc="planned speed; absent = the file's times (refused if unusable)"),
        _r("route", "shift_to_start", "bool", False, doc="recorded times shifted to start at [time] start"),
        _r("route", "slip_min", "number", 0.0, 0.0, 120.0, "min", doc="+- minutes early or late on the timetable"),
        _r("route", "speed_uncertainty_kmh", "number", 10.8, 0.0, 200.0, "km/h",
           doc="true speed = planned speed +- this"),
        _r("route", "heading_uncertainty_deg", "number", 15.0, 0.0, 180.0, "deg",
           doc="true heading = route heading +- this"),
        _r("route", "climb_uncertainty_m_s", "number", 1.0, 0.0, 50.0, "m/s",
           doc="true climb rate = route climb rate +- this"),
        _r("route", "horizon_file", "path", None, doc="horizon profile CSV for the whole drive"),
        _r("route", "event_horizon_min", "number", 15.0, 1.0, 240.0, "min",
           doc="each event is planned from its time over this long (or to the window's end)"),
        _r("route", "outage_drift_ppb_per_s", "number", 0.2, 0.0, 100.0, "ppb/s",
           doc="oscillator drift bound during an outage"),
        _r("route", "auto_reacquire", "bool", True, doc="a re-acquisition event at the end of every outage"),
        _r("route", "event_monte_carlo_runs", "integer", 200, 10, 100_000,
           doc="simulated acquisitions per event (the TTFF median and 95th percentile)"),
    )
    stretch = (
        _r("route.stretch", "kind", "choice", choices=STRETCH_KINDS, doc="open, trees, canyon or outage"),
        _r("route.stretch", "name", "text", "", doc="shown in the route view and on the sheets"),
        _r("route.stretch", "extra_loss_db", "number", None, 0.0, 60.0, "dB",
           doc=f"attenuation on this stretch (trees default {TREES_DEFAULT_LOSS_DB:g} dB)"),
        _r("route.stretch", "building_height_m", "number", None, 0.5, 500.0, "m", doc="canyon: building height"),
        _r("route.stretch", "street_width_m", "number", None, 2.0, 500.0, "m", doc="canyon: wall-to-wall width"),
        _r("route.stretch", "speed_kmh", "number", None, 1.0, 300.0, "km/h", doc="planned speed on this stretch"),
        _r("route.stretch", "horizon_file", "path", None, doc="horizon profile CSV on this stretch"),
    )
    event = (
        _r("event", "kind", "choice", choices=EVENT_KINDS, doc="cold, warm, hot or reacquire"),
        _r("event", "name", "text", "", doc="label of the event"),
        _r("event", "time_uncertainty_s", "number", None, 0.0, 86_400.0, "s", doc="override of the kind's default"),
        _r("event", "horizontal_uncertainty_km", "number", None, 0.0, 1000.0, "km",
           doc="override of the kind's default"),
        _r("event", "oscillator_uncertainty_ppb", "number", None, 0.0, 50_000.0, "ppb",
           doc="override of the kind's default"),
        _r("event", "ephemeris_wait_s", "number", None, 0.0, 3600.0, "s", doc="override of the kind's default"),
    )
    return route, stretch, event


def drive_rules():
    """All KeyRules of the drive sections (for docs/scenario-keys.md and the window)."""
    a, b, c = _rules()
    return a + b + c


def _place(chk, dotted: str, v: Any, *, allow_time: bool) -> Any:
    """A km distance (number >= 0), a waypoint name (text) or, for events, a time."""
    from datetime import datetime

    from .spec import _BAD, _r, _show

    if isinstance(v, bool):
        chk.add(dotted, f"{_show(v)} is not a place; give km along the route or a waypoint name")
        return _BAD
    if isinstance(v, int | float):
        x = float(v)
        if not (x >= 0.0 and x < 1e5):
            chk.add(dotted, f"{_show(v)} km is outside the allowed range 0 to 100000 km")
            return _BAD
        return x
    if isinstance(v, datetime) and allow_time:
        return chk.check(_r("event", "at", "time"), dotted, v)
    if isinstance(v, str):
        s = v.strip()
        if allow_time and len(s) >= 10 and s[:4].isdigit() and s[4] == "-":
            return chk.check(_r("event", "at", "time"), dotted, s)
        if not s:
            chk.add(dotted, "is empty; give km along the route or a waypoint name")
            return _BAD
        return s
    chk.add(dotted, f"{_show(v)} is not a place; give km along the route, a waypoint name"
                    + (" or an ISO 8601 UTC time" if allow_time else ""))
    return _BAD


def _table(chk, dotted: str, table: Any, rules, extra: tuple[str, ...], where: str) -> dict | None:
    from .spec import _BAD, _show, _type_name

    if not isinstance(table, Mapping):
        chk.add(dotted, f"{_show(table)} is {_type_name(table)}; a table of keys is needed")
        return None
    out: dict[str, Any] = {}
    ok = True
    for rule in rules:
        key_dotted = f"{dotted}.{rule.key}"
        if rule.key not in table:
            if rule.required:
                chk.add(key_dotted, f"is missing; this key is required in {where}")
                ok = False
            else:
                out[rule.key] = rule.default
            continue
        val = chk.check(rule, key_dotted, table[rule.key])
        ok &= val is not _BAD
        out[rule.key] = val
    known = tuple(r.key for r in rules) + extra
    for key in table:
        if key not in known:
            chk.unknown(f"{dotted}.{key}", key, known, "key", where)
            ok = False
    return out if ok else None


def check_drive(chk, route: Any, events: Any) -> tuple[RouteSpec | None, tuple[EventSpec, ...]]:
    """Validate the drive sections (``route``: the [route] table or None; ``events``: the
    [[event]] list or None), adding problems to the scenario checker ``chk``."""
    from .spec import _BAD, _show, _type_name

    r_rules, s_rules, e_rules = _rules()
    route_spec = None
    if route is not None:
        got = _table(chk, "route", route, r_rules, ("stretch", "dwell_s"), "[route]")
        stretches: list[StretchSpec] = []
        raw = route.get("stretch", []) if isinstance(route, Mapping) else []
        if not isinstance(raw, list):
            chk.add("route.stretch", f"{_show(raw)} is {_type_name(raw)}; write each stretch as [[route.stretch]]")
            raw = []
        for i, st in enumerate(raw, 1):
            dotted = f"route.stretch[{i}]"
            vals = _table(chk, dotted, st, s_rules, ("from", "to"), f"[[route.stretch]] {i}")
            ends = {}
            for end in ("from", "to"):
                if isinstance(st, Mapping) and end not in st:
                    chk.add(f"{dotted}.{end}", "is missing; give km along the route or a waypoint name")
                    ends[end] = _BAD
                elif isinstance(st, Mapping):
                    ends[end] = _place(chk, f"{dotted}.{end}", st[end], allow_time=False)
            if vals is None or _BAD in ends.values() or len(ends) < 2:
                continue
            if vals["kind"] == "canyon":
                for key in ("building_height_m", "street_width_m"):
                    if vals[key] is None:
                        chk.add(f"{dotted}.{key}", "is missing; a canyon stretch needs building_height_m "
                                                   "and street_width_m")
            stretches.append(StretchSpec(vals["kind"], ends["from"], ends["to"], vals["name"],
                                         vals["extra_loss_db"], vals["building_height_m"],
                                         vals["street_width_m"], vals["speed_kmh"], vals["horizon_file"]))
        dwell: list[tuple[str, float]] = []
        raw_dwell = route.get("dwell_s", {}) if isinstance(route, Mapping) else {}
        if not isinstance(raw_dwell, Mapping):
            chk.add("route.dwell_s", f"{_show(raw_dwell)} is {_type_name(raw_dwell)}; a table "
                                     "waypoint name = seconds is needed")
        else:
            for name, secs in raw_dwell.items():
                if isinstance(secs, bool) or not isinstance(secs, int | float) or not 0 <= float(secs) <= 86_400:
                    chk.add(f"route.dwell_s.{name}", f"{_show(secs)} is not a dwell time; allowed 0 to 86400 s")
                    continue
                dwell.append((str(name), float(secs)))
        if got is not None:
            route_spec = RouteSpec(dwell_s=tuple(dwell), stretches=tuple(stretches), **got)
    out_events: list[EventSpec] = []
    if events is not None:
        if not isinstance(events, list):
            chk.add("event", f"{_show(events)} is {_type_name(events)}; write each event as [[event]]")
            events = []
        for i, ev in enumerate(events, 1):
            dotted = f"event[{i}]"
            vals = _table(chk, dotted, ev, e_rules, ("at",), f"[[event]] {i}")
            if isinstance(ev, Mapping) and "at" not in ev:
                chk.add(f"{dotted}.at", "is missing; give a time, a waypoint name or km along the route")
                continue
            at = _place(chk, f"{dotted}.at", ev["at"], allow_time=True) if isinstance(ev, Mapping) else _BAD
            if vals is None or at is _BAD:
                continue
            out_events.append(EventSpec(at=at, **vals))
        if out_events and route_spec is None and route is None:
            for i, ev in enumerate(out_events, 1):
                if not hasattr(ev.at, "timestamp"):
                    chk.add(f"event[{i}].at", "a waypoint or a distance needs a [route]")
    return route_spec, tuple(out_events)


def drive_to_dict(route: RouteSpec | None, events: tuple[EventSpec, ...]) -> dict[str, Any]:
    """The drive sections in file layout (for Scenario.to_dict)."""
    from .spec import _to_file_value

    out: dict[str, Any] = {}
    if route is not None:
        t: dict[str, Any] = {}
        for key in ("file", "speed_kmh", "shift_to_start", "slip_min", "speed_uncertainty_kmh",
                    "heading_uncertainty_deg", "climb_uncertainty_m_s", "horizon_file",
                    "event_horizon_min", "outage_drift_ppb_per_s", "auto_reacquire",
                    "event_monte_carlo_runs"):
            v = _to_file_value(getattr(route, key))
            if v is not None:
                t[key] = v
        if route.dwell_s:
            t["dwell_s"] = {k: _to_file_value(v) for k, v in route.dwell_s}
        if route.stretches:
            rows = []
            for st in route.stretches:
                row = {"kind": st.kind, "from": _to_file_value(st.from_), "to": _to_file_value(st.to)}
                for key in ("name", "extra_loss_db", "building_height_m", "street_width_m", "speed_kmh",
                            "horizon_file"):
                    v = _to_file_value(getattr(st, key))
                    if v not in (None, ""):
                        row[key] = v
                rows.append(row)
            t["stretch"] = rows
        out["route"] = t
    if events:
        rows = []
        for ev in events:
            row = {"kind": ev.kind, "at": _to_file_value(ev.at)}
            for key in ("name", "time_uncertainty_s", "horizontal_uncertainty_km",
                        "oscillator_uncertainty_ppb", "ephemeris_wait_s"):
                v = _to_file_value(getattr(ev, key))
                if v not in (None, ""):
                    row[key] = v
            rows.append(row)
        out["event"] = rows
    return out

"""The public calls of acqplan's core, in one place.

The command line and the window import from here::

    from core.api import load_scenario, make_plan, plan_to_json

Names are resolved on first use (PEP 562), so importing this module costs nothing and a
command pays only for the stages it runs (``acqplan bins`` never loads the propagators).
The table below is the whole public surface; everything else in ``core`` is internal to
its stage and may change.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

# public name -> module that defines it, grouped by stage of the data flow
_PUBLIC: dict[str, str] = {
    # ground: errors, time, geodesy, signals
    "AcqplanError": "core.ground.errors",
    "InputError": "core.ground.errors",
    "ComputationError": "core.ground.errors",
    "Cancelled": "core.ground.errors",
    "TimeGrid": "core.ground.timeutil",
    "time_grid": "core.ground.timeutil",
    "parse_iso_utc": "core.ground.timeutil",
    "iso_z": "core.ground.timeutil",
    "to_unix_s": "core.ground.timeutil",
    "clock_text": "core.ground.display",
    "utc_stamp": "core.ground.display",
    "iso_utc": "core.ground.display",
    "hz_text": "core.ground.display",
    "hz_range_text": "core.ground.display",
    "duration_text": "core.ground.display",
    "state_word": "core.ground.display",
    "STATE_MEANING": "core.ground.display",
    "gps_week_tow": "core.ground.display",
    "gps_text": "core.ground.display",
    "whole_second": "core.ground.display",
    "zone_names": "core.ground.display",
    "Site": "core.ground.geodesy",
    "SIGNALS": "core.ground.signals",
    "get_signal": "core.ground.signals",
    # orbits: files in, satellite states out
    "OrbitSet": "core.orbits.orbit_set",
    "load_orbits": "core.orbits.readers",
    "load_orbit_files": "core.orbits.readers",
    "load_mapping": "core.orbits.readers",
    "RecordUse": "core.orbits.broadcast",
    "records_in_use": "core.orbits.broadcast",
    "orbit_data_age_s": "core.orbits.broadcast",
    "check_data_age": "core.orbits.data_age",
    "check_elements": "core.orbits.plausibility",
    "guard_prediction": "core.sky.result_guard",
    "implausible_satellites": "core.sky.result_guard",
    "failure_warnings": "core.sky.predict",
    # sky: what the receiver sees
    "Prediction": "core.sky.predict",
    "Pass": "core.sky.predict",
    "predict": "core.sky.predict",
    "passes": "core.sky.predict",
    "check_grid_size": "core.sky.predict",
    "DOPPLER_MAX_SATELLITE_STEPS": "core.ground.constants",
    "DOPPLER_STREAM_MAX_SATELLITE_STEPS": "core.ground.constants",
    "PASSES_MAX_SATELLITE_STEPS": "core.ground.constants",
    "PASSES_MAX_WINDOW_DAYS": "core.ground.constants",
    "PLAN_MAX_SATELLITE_STEPS": "core.ground.constants",
    "Route": "core.sky.route",
    "RouteFile": "core.sky.route",
    "read_route_file": "core.sky.route",
    "time_route": "core.sky.route",
    "route_file_summary": "core.sky.route",
    # search: one acquisition's search space
    "Uncertainty": "core.search.windows",
    "doppler_windows": "core.search.windows",
    "MotionUncertainty": "core.search.motion",
    "RouteMotion": "core.search.motion",
    "route_motion": "core.search.motion",
    "design_bins": "core.search.bins",
    "bin_centres": "core.search.bins",
    "bin_count": "core.search.bins",
    "loss_curve": "core.search.bins",
    "cn0_at_elevation_dbhz": "core.search.detection",
    # plan: acquisitions over time
    "Scenario": "core.plan.spec",
    "ScenarioValidationError": "core.plan.spec",
    "KEY_RULES": "core.plan.spec",
    "Plan": "core.plan.pipeline",
    "PreparedGeometry": "core.plan.pipeline",
    "prepare_geometry": "core.plan.pipeline",
    "make_plan": "core.plan.pipeline",
    "add_monte_carlo": "core.plan.pipeline",
    "plan_to_json": "core.plan.pipeline",
    "PlanTooLarge": "core.plan.pipeline",
    "LongPlan": "core.plan.long_window",
    "make_long_plan": "core.plan.long_window",
    "long_plan_rows": "core.plan.long_window",
    "long_plan_to_json": "core.plan.long_window",
    "plan_drive": "core.plan.events",
    "load_drive": "core.plan.events",
    "DrivePlan": "core.plan.events",
    "EventPlan": "core.plan.events",
    "plan_rows": "core.plan.pipeline",
    "timeline_rows": "core.plan.pipeline",
    "SUMMARY_COLUMNS": "core.plan.pipeline",
    "SweepSpec": "core.plan.sweep",
    "SweepResult": "core.plan.sweep",
    "SweepRow": "core.plan.sweep",
    "SWEEP_KEYS": "core.plan.sweep",
    "SWEEP_ROW_COLUMNS": "core.plan.sweep",
    "SWEEP_RANK_COLUMNS": "core.plan.sweep",
    "sweep_spec": "core.plan.sweep",
    "departure_times": "core.plan.sweep",
    "run_sweep": "core.plan.sweep",
    "sweep_cell_scenario": "core.plan.sweep",
    "best_scenario": "core.plan.sweep",
    "sweep_rows": "core.plan.sweep",
    "ranking_rows": "core.plan.sweep",
    "sweep_to_json": "core.plan.sweep",
    "short_key": "core.plan.sweep",
    # records: what the receiver recorded, held against the plan
    "Record": "core.records.record",
    "RecordFormatError": "core.ground.errors",
    "load_record": "core.records.record",
    "parse_record": "core.records.record",
    "record_bands": "core.records.record",
    "measure": "core.records.measure",
    "Measurements": "core.records.measure",
    "Comparison": "core.records.compare",
    "compare_record": "core.records.compare",
    "record_scenario": "core.records.compare",
    # files: text in and out
    "load_scenario": "core.files.scenario",
    "load_scenario_for_editing": "core.files.scenario",
    "save_scenario": "core.files.scenario",
    "scenario_to_toml": "core.files.scenario",
    "export_all": "core.files.plan_export",
    "content_hash": "core.files.plan_export",
    "write_text_atomic": "core.files.atomic",
    "open_text_atomic": "core.files.atomic",
    "write_bytes_atomic": "core.files.atomic",
    "write_demo": "core.files.demo",
    "file_problem": "core.ground.filecheck",
}

__all__ = sorted(_PUBLIC)


def __getattr__(name: str) -> Any:
    try:
        module = _PUBLIC[name]
    except KeyError:
        raise AttributeError(f"module 'core.api' has no attribute '{name}'") from None
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value          # resolved once
    return value


def __dir__() -> list[str]:
    return __all__


if TYPE_CHECKING:  # the same names, for type checkers and editors
    from core.files.atomic import open_text_atomic, write_bytes_atomic, write_text_atomic  # noqa: F401
    from core.files.demo import write_demo  # noqa: F401
    from core.files.plan_export import content_hash, export_all  # noqa: F401
    from core.files.scenario import (  # noqa: F401
        load_scenario,
        load_scenario_for_editing,
        save_scenario,
        scenario_to_toml,
    )
    from core.ground.constants import (  # noqa: F401
        DOPPLER_MAX_SATELLITE_STEPS,
        DOPPLER_STREAM_MAX_SATELLITE_STEPS,
        PASSES_MAX_SATELLITE_STEPS,
        PASSES_MAX_WINDOW_DAYS,
        PLAN_MAX_SATELLITE_STEPS,
    )
    from core.ground.display import (  # noqa: F401
        STATE_MEANING,
        clock_text,
        duration_text,
        gps_text,
        gps_week_tow,
        hz_range_text,
        hz_text,
        iso_utc,
        state_word,
        utc_stamp,
        whole_second,
        zone_names,
    )
    from core.ground.errors import (  # noqa: F401
        AcqplanError,
        Cancelled,
        ComputationError,
        InputError,
        RecordFormatError,
    )
    from core.ground.filecheck import file_problem  # noqa: F401
    from core.ground.geodesy import Site  # noqa: F401
    from core.ground.signals import SIGNALS, get_signal  # noqa: F401
    from core.ground.timeutil import TimeGrid, iso_z, parse_iso_utc, time_grid, to_unix_s  # noqa: F401
    from core.orbits.broadcast import RecordUse, orbit_data_age_s, records_in_use  # noqa: F401
    from core.orbits.data_age import check_data_age  # noqa: F401
    from core.orbits.orbit_set import OrbitSet  # noqa: F401
    from core.orbits.plausibility import check_elements  # noqa: F401
    from core.orbits.readers import load_mapping, load_orbit_files, load_orbits  # noqa: F401
    from core.plan.events import DrivePlan, EventPlan, load_drive, plan_drive  # noqa: F401
    from core.plan.long_window import LongPlan, long_plan_rows, long_plan_to_json, make_long_plan  # noqa: F401
    from core.plan.pipeline import (  # noqa: F401
        SUMMARY_COLUMNS,
        Plan,
        PlanTooLarge,
        PreparedGeometry,
        add_monte_carlo,
        make_plan,
        plan_rows,
        plan_to_json,
        prepare_geometry,
        timeline_rows,
    )
    from core.plan.spec import KEY_RULES, Scenario, ScenarioValidationError  # noqa: F401
    from core.plan.sweep import (  # noqa: F401
        SWEEP_KEYS,
        SWEEP_RANK_COLUMNS,
        SWEEP_ROW_COLUMNS,
        SweepResult,
        SweepRow,
        SweepSpec,
        best_scenario,
        departure_times,
        ranking_rows,
        run_sweep,
        short_key,
        sweep_cell_scenario,
        sweep_rows,
        sweep_spec,
        sweep_to_json,
    )
    from core.records.compare import Comparison, compare_record, record_scenario  # noqa: F401
    from core.records.measure import Measurements, measure  # noqa: F401
    from core.records.record import Record, load_record, parse_record, record_bands  # noqa: F401
    from core.search.bins import bin_centres, bin_count, design_bins, loss_curve  # noqa: F401
    from core.search.detection import cn0_at_elevation_dbhz  # noqa: F401
    from core.search.motion import MotionUncertainty, RouteMotion, route_motion  # noqa: F401
    from core.search.windows import Uncertainty, doppler_windows  # noqa: F401
    from core.sky.predict import (  # noqa: F401
        Pass,
        Prediction,
        check_grid_size,
        failure_warnings,
        passes,
        predict,
    )
    from core.sky.result_guard import guard_prediction, implausible_satellites  # noqa: F401
    from core.sky.route import Route, RouteFile, read_route_file, route_file_summary, time_route  # noqa: F401

"""One background thread that turns frozen scenario requests into plans.

The GUI thread freezes its inputs into a :class:`PlanRequest` (a validated, immutable
Scenario and the previous plan's prepared geometry) and calls :meth:`PlanWorker.submit`.
The worker computes the newest request only: a request that arrives while another is
running cancels the running one at make_plan's next checkpoint (``cancel()`` callback),
and results carry the request's serial number so the window drops anything stale.

Two stages when only search parameters changed (the geometry is reused): first the plan
with a single Monte Carlo run (every view except the TTFF percentiles is final), then
the same plan with the scenario's ``monte_carlo_runs`` added by
``core.plan.pipeline.add_monte_carlo`` (the rest of the plan is not computed again). The Monte
Carlo alone takes longer than the 100 ms a search-parameter change may take to show.

:func:`compute` is the same work without Qt, used by the thread, tests and benchmarks.
"""

from __future__ import annotations

import threading
import time
import traceback
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field, replace

from PySide6.QtCore import QThread, Signal

from core.api import Scenario, loss_curve, plan_drive
from core.plan.pipeline import (
    Plan,
    PlanCancelled,
    PreparedGeometry,
    add_monte_carlo,
    geometry_key,
    make_plan,
)

# Monte Carlo runs of the quick first stage (the smallest the scenario rules allow).
QUICK_MONTE_CARLO_RUNS = 1
# Longest wait for the GUI to show the quick stage before the final stage starts.
ACK_WAIT_S = 0.5


@dataclass(frozen=True)
class PlanRequest:
    serial: int
    scenario: Scenario
    prepared: PreparedGeometry | None = None
    two_stage: bool = True


@dataclass
class PlanResult:
    """A plan ready to show. ``final`` is False for the quick stage (TTFF percentiles from
    one Monte Carlo run only; a final result follows unless a newer request came)."""

    serial: int
    scenario: Scenario                      # as requested (the quick stage differs in runs)
    plan: Plan
    final: bool
    loss_curves: dict[str, dict] = field(default_factory=dict)   # signal id -> loss_curve()
    elapsed_s: float = 0.0
    drive: object = None                    # core.plan.events.DrivePlan (final stage), or None


@dataclass
class PlanFailure:
    serial: int
    scenario: Scenario
    error: BaseException
    internal: bool                          # not one of the project's own errors
    details: str = ""


def _loss_curves(plan: Plan) -> dict[str, dict]:
    out = {}
    for sid, design in plan.bin_design.items():
        tc_s = design.coherent_ms / 1000.0
        span = max(0.75 / tc_s, 1.5 * design.half_width_hz)
        out[sid] = loss_curve(tc_s, max_offset_hz=span, n=401)
    return out


def compute(request: PlanRequest, progress: Callable[[float, str], None] | None = None,
            cancel: Callable[[], bool] | None = None,
            between: Callable[[], None] | None = None) -> Iterator[PlanResult]:
    """Yield the quick result (when the geometry is reused) and then the final one.

    ``between()`` runs after the quick result was taken, before the final stage starts.
    """
    t0 = time.perf_counter()
    sc = request.scenario
    prepared = request.prepared
    reusable = prepared is not None and prepared.key == geometry_key(sc)
    if (request.two_stage and reusable
            and sc.search.monte_carlo_runs > QUICK_MONTE_CARLO_RUNS):
        quick_sc = replace(sc, search=replace(sc.search, monte_carlo_runs=QUICK_MONTE_CARLO_RUNS))
        plan = make_plan(quick_sc, prepared=prepared, progress=progress, cancel=cancel)
        yield PlanResult(request.serial, sc, plan, False, _loss_curves(plan),
                         time.perf_counter() - t0)
        if between is not None:
            between()
        if cancel is not None and cancel():
            raise PlanCancelled()
        if progress is not None:
            progress(0.85, "Monte Carlo of the time to first fix")
        full = add_monte_carlo(plan, sc, cancel=cancel)
        drive = _drive(sc, progress, cancel)
        yield PlanResult(request.serial, sc, full, True, _loss_curves(full),
                         time.perf_counter() - t0, drive)
        return
    plan = make_plan(sc, prepared=prepared if reusable else None, progress=progress,
                     cancel=cancel)
    drive = _drive(sc, progress, cancel)
    yield PlanResult(request.serial, sc, plan, True, _loss_curves(plan),
                     time.perf_counter() - t0, drive)


def _drive(sc: Scenario, progress, cancel):
    """Every test event's own plan when the scenario has a route or events, else None."""
    if sc.route is None and not sc.events:
        return None
    if progress is not None:
        progress(0.9, "planning the test events along the route")
    return plan_drive(sc, cancel=cancel)


class PlanWorker(QThread):
    """The planner's single compute thread (see the module docstring)."""

    progressed = Signal(int, float, str)     # serial, fraction 0..1, text
    planned = Signal(object)                 # PlanResult
    failed = Signal(object)                  # PlanFailure
    cancelled = Signal(int)                  # serial

    def __init__(self, parent=None):
        super().__init__(parent)
        self.setObjectName("acqplan-plan-worker")
        # A Python condition, not QMutexLocker: PySide6 6.12's QMutexLocker context
        # manager loses a reference to None on every exit (interpreter abort after ~1e4).
        self._lock = threading.Condition()
        self._pending: PlanRequest | None = None
        self._serial = 0
        self._running_serial = -1
        self._cancel_serial = -1
        self._quit = False
        self._shown = threading.Event()
        self._shown_serial = -1

    # -- GUI thread ------------------------------------------------------------------
    @property
    def latest_serial(self) -> int:
        return self._serial

    def submit(self, scenario: Scenario, prepared: PreparedGeometry | None = None,
               two_stage: bool = True) -> int:
        """Queue a plan of ``scenario``; returns its serial. Replaces any queued request."""
        with self._lock:
            self._serial += 1
            self._pending = PlanRequest(self._serial, scenario, prepared, two_stage)
            serial = self._serial
            if not self.isRunning():
                self.start(QThread.Priority.LowPriority)
            else:
                self._lock.notify()
        return serial

    def acknowledge(self, serial: int) -> None:
        """The GUI has applied (and drawn) the quick result of ``serial``."""
        with self._lock:
            self._shown_serial = serial
        self._shown.set()

    def cancel(self) -> None:
        """Cancel the running and the queued request (each reports ``cancelled``)."""
        with self._lock:
            dropped = self._pending
            self._pending = None
            self._cancel_serial = self._running_serial
        if dropped is not None:
            self.cancelled.emit(dropped.serial)

    def shutdown(self, timeout_ms: int = 30000) -> None:
        with self._lock:
            self._quit = True
            self._pending = None
            self._cancel_serial = self._running_serial
            self._lock.notify()
        self.wait(timeout_ms)

    # -- worker thread --------------------------------------------------------------
    def _should_stop(self, serial: int) -> bool:
        with self._lock:
            return (self._quit or self._cancel_serial == serial
                    or (self._pending is not None and self._pending.serial > serial))

    def run(self) -> None:  # noqa: D401 - QThread entry point
        while True:
            with self._lock:
                while self._pending is None and not self._quit:
                    self._lock.wait()
                if self._quit:
                    return
                request = self._pending
                self._pending = None
                self._running_serial = request.serial
            self._run_one(request)
            with self._lock:
                self._running_serial = -1

    def _run_one(self, request: PlanRequest) -> None:
        serial = request.serial

        def progress(fraction: float, text: str) -> None:
            self.progressed.emit(serial, float(fraction), str(text))

        def cancel() -> bool:
            return self._should_stop(serial)

        def between() -> None:
            # Let the GUI thread apply and paint the quick result before the Monte Carlo
            # competes with it for the interpreter lock (at most ACK_WAIT_S).
            deadline = time.perf_counter() + ACK_WAIT_S
            while time.perf_counter() < deadline and not self._should_stop(serial):
                with self._lock:
                    if self._shown_serial >= serial:
                        return
                self._shown.wait(0.01)
                self._shown.clear()

        from core.api import AcqplanError

        try:
            for result in compute(request, progress, cancel, between):
                if self._should_stop(serial):
                    raise PlanCancelled()
                self.planned.emit(result)
        except PlanCancelled:
            self.cancelled.emit(serial)
        except (AcqplanError, OSError) as err:
            self.failed.emit(PlanFailure(serial, request.scenario, err, False))
        except Exception as err:  # an internal fault: reported, the thread lives on
            self.failed.emit(PlanFailure(serial, request.scenario, err, True,
                                         traceback.format_exc()))

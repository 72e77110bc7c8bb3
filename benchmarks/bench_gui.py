"""Planner window speed, offscreen (a script, not a test): ``python benchmarks/bench_gui.py``.

Prints
* window start to the first complete plan of the demo on screen (imports, window,
  propagation, plan, every view drawn, one paint of the window);
* a coherent-time change (spin box value -> worker -> every view updated), median and
  worst of several changes: to the quick plan (all views final except the TTFF
  percentiles), to the final plan (Monte Carlo TTFF), and with one repaint;
* cursor steps (GUI-thread time per step, all views);
* the longest stall of the event loop during the changes (a 5 ms timer's largest gap).

Targets (DEVELOPERS.md): first plan under 3 s; under 100 ms per search-parameter change.
"""

from __future__ import annotations

import os
import statistics
import sys
import tempfile
import time
from pathlib import Path

T_START = time.perf_counter()
os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
REPO = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(REPO))

from PySide6.QtCore import QElapsedTimer, QEventLoop, QTimer  # noqa: E402
from PySide6.QtWidgets import QApplication  # noqa: E402


def main() -> int:
    settings_dir = tempfile.TemporaryDirectory(prefix="acqplan-bench-settings-")
    from planner_gui import settings

    settings.use_settings_folder(settings_dir.name)
    app = QApplication.instance() or QApplication([sys.argv[0]])
    from planner_gui.main_window import PlannerWindow

    t_imports = time.perf_counter() - T_START
    window = PlannerWindow(interactive=False, restore_layout=False)
    window.resize(1366, 768)
    window.show()

    def wait_plan(final: bool = True, timeout_s: float = 60.0) -> float:
        """Spin until a plan (final or any) is applied; returns perf_counter at that moment."""
        loop = QEventLoop()
        got: dict[str, float] = {}

        def shown(result):
            if result.final or not final:
                got["t"] = time.perf_counter()
                loop.quit()

        window.planShown.connect(shown)
        QTimer.singleShot(int(timeout_s * 1000), loop.quit)
        loop.exec()
        window.planShown.disconnect(shown)
        if "t" not in got:
            raise SystemExit("no plan within the timeout: " + window.message_bar.text.text())
        return got["t"]

    window.open_demo()
    t_plan = wait_plan(final=True)
    app.processEvents()
    window.grab()                                    # one complete paint
    t_first = time.perf_counter()
    plan = window.model.plan
    print(f"demo: {len(plan.ids)} satellites x {len(plan.times)} times, "
          f"{int(plan.visible.any(axis=1).sum())} in view")
    print(f"start to first complete plan on screen: {t_first - T_START:.2f} s "
          f"(imports {t_imports:.2f} s, plan applied at {t_plan - T_START:.2f} s)")

    # Event-loop stall probe.
    gaps: list[float] = []
    clock = QElapsedTimer()
    clock.start()
    last = [clock.elapsed()]

    def tick():
        now = clock.elapsed()
        gaps.append(now - last[0])
        last[0] = now

    probe = QTimer()
    probe.setInterval(5)
    probe.timeout.connect(tick)
    probe.start()

    spin = window.panel.editors["search.coherent_ms"].spin
    quick, final, painted = [], [], []
    quick_compute, quick_apply = [], []
    values = [8, 4, 12, 4, 8, 16, 4, 8, 12, 4]
    for v in values:
        app.processEvents()
        last[0] = clock.elapsed()
        got: dict[str, float] = {}

        def shown(result, got=got):
            key = "final" if result.final else "quick"
            got.setdefault(key, time.perf_counter())
            got.setdefault(key + "_compute", result.elapsed_s)
            got.setdefault(key + "_apply", window.apply_s)
            if result.final:
                got.setdefault("quick", got["final"])

        window.planShown.connect(shown)
        t0 = time.perf_counter()
        spin.setValue(v)                              # valueChanged -> validate -> worker
        loop = QEventLoop()
        while "final" not in got and time.perf_counter() - t0 < 30:
            loop.processEvents(QEventLoop.ProcessEventsFlag.AllEvents, 5)
        window.planShown.disconnect(shown)
        quick.append(got["quick"] - t0)
        quick_compute.append(got.get("quick_compute", got["final_compute"]))
        quick_apply.append(got.get("quick_apply", got["final_apply"]))
        final.append(got["final"] - t0)
    probe.stop()
    stall = max(gaps)
    # Again, now with an explicit full repaint as soon as the quick plan is applied.
    for v in values[:6]:
        app.processEvents()
        done: dict[str, float] = {}

        def shown2(result, done=done):
            if "t" not in done:
                window.grab()
                done["t"] = time.perf_counter()

        window.planShown.connect(shown2)
        t0 = time.perf_counter()
        spin.setValue(v + 4)
        loop = QEventLoop()
        while window._computing and time.perf_counter() - t0 < 30:
            loop.processEvents(QEventLoop.ProcessEventsFlag.AllEvents, 5)
        window.planShown.disconnect(shown2)
        painted.append(done["t"] - t0)

    def fmt(xs):
        return f"median {1000 * statistics.median(xs):.0f} ms, worst {1000 * max(xs):.0f} ms"

    print(f"coherent-time change -> all views updated (quick plan, TTFF percentiles pending): {fmt(quick)}")
    print(f"    of which the worker's make_plan (1 Monte Carlo run): {fmt(quick_compute)}; "
          f"applying it to every view on the GUI thread: {fmt(quick_apply)}")
    print(f"  ... and the whole window repainted (one grab): {fmt(painted)}")
    print(f"  ... to the final plan (Monte Carlo TTFF, "
          f"{window.model.plan.scenario.search.monte_carlo_runs} runs): {fmt(final)}")
    print(f"longest event-loop stall during the changes: {stall:.0f} ms "
          f"(5 ms timer, {len(gaps)} ticks)")

    # Cursor steps: GUI-thread time per step (every view follows synchronously).
    steps = []
    n = len(window.model.plan.times)
    for k in range(0, n, max(1, n // 40)):
        t0 = time.perf_counter()
        window.cursor_bar.slider.setValue(k)
        steps.append(time.perf_counter() - t0)
    print(f"cursor step, all views: {fmt(steps)}")
    # Selection change.
    sel = []
    for sid in window.model.plan.ids[:20]:
        t0 = time.perf_counter()
        window.model.select(sid)
        sel.append(time.perf_counter() - t0)
    print(f"selection change, all views: {fmt(sel)}")
    window.close()
    window.worker.shutdown()
    settings_dir.cleanup()
    return 0


if __name__ == "__main__":
    raise SystemExit(main())

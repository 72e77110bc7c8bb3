"""``acqplan gui``: start the planner window, or render it to PNG files and exit.

``run_gui(args)`` takes the parsed ``gui`` sub-command (``scenario``, ``demo``,
``screenshot``, ``size``). With ``--screenshot DIR`` the Qt platform defaults to
``offscreen`` (when QT_QPA_PLATFORM is not set), settings go to a temporary folder, the
window waits for its first complete plan (or the failure message), writes
``window.png`` and one PNG per view into DIR and exits.
"""

from __future__ import annotations

import os
import sys
import tempfile
import time
from pathlib import Path
from typing import Any

EXIT_OK, EXIT_FAILURE, EXIT_BAD_INPUT = 0, 1, 2
FIRST_PLAN_TIMEOUT_S = 120.0


def parse_size(text: str) -> tuple[int, int]:
    try:
        w, h = (int(v) for v in text.lower().split("x"))
    except ValueError:
        raise ValueError(f"--size '{text}' must be WIDTHxHEIGHT, e.g. 1366x768") from None
    if not (320 <= w <= 8192 and 240 <= h <= 8192):
        raise ValueError(f"--size '{text}': width 320..8192 and height 240..8192 pixels")
    return w, h


def _application(argv: list[str]):
    from PySide6.QtWidgets import QApplication

    app = QApplication.instance()
    if app is None:
        app = QApplication(argv)
    app.setApplicationName("acqplan-planner")
    app.setOrganizationName("acqplan-project")
    app.setApplicationDisplayName("acqplan planner")
    return app


def install_excepthook(window: Any, show_dialog: bool = True):
    """Report uncaught exceptions in the window (Messages panel + message bar) and keep
    the event loop running; returns the previous ``sys.excepthook``.

    Faults from any thread (``sys.excepthook`` and ``threading.excepthook``) are relayed
    to the GUI thread by a queued signal, so widgets are only touched there; at most one
    fault dialog is open at a time (later faults only go to the Messages panel).
    """
    import threading

    from PySide6.QtCore import QObject, Qt, Signal

    class _Relay(QObject):
        fault = Signal(object, object, object)

    previous = sys.excepthook
    relay = _Relay(window)          # lives on the GUI thread with the window
    state: dict[str, Any] = {"box": None}

    def on_fault(exc_type, exc, tb):
        try:
            window.report_fault(exc_type, exc, tb)
            box = state["box"]
            if show_dialog and window.interactive and not (box is not None and box.isVisible()):
                from PySide6.QtWidgets import QMessageBox

                box = QMessageBox(QMessageBox.Icon.Warning, "acqplan: internal fault",
                                  f"Something went wrong inside acqplan:\n{exc_type.__name__}: {exc}\n\n"
                                  "The window keeps running; details are in the Messages panel.",
                                  parent=window)
                box.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose)
                box.setModal(False)
                box.open()
                state["box"] = box
                box.destroyed.connect(lambda *_: state.update(box=None))
        except Exception:  # never let the hook itself fail
            previous(exc_type, exc, tb)

    relay.fault.connect(on_fault)   # direct on the GUI thread, queued from others

    def hook(exc_type, exc, tb):
        if issubclass(exc_type, KeyboardInterrupt):
            previous(exc_type, exc, tb)
            return
        relay.fault.emit(exc_type, exc, tb)

    def thread_hook(args):
        if args.exc_type is SystemExit:
            return
        relay.fault.emit(args.exc_type, args.exc_value, args.exc_traceback)

    sys.excepthook = hook
    threading.excepthook = thread_hook
    window._fault_relay = relay     # keep it alive with the window
    return previous


def wait_for_first_plan(window: Any, timeout_s: float = FIRST_PLAN_TIMEOUT_S) -> bool:
    """Spin the event loop until a final plan or a problem is on screen; True for a plan."""
    from PySide6.QtCore import QEventLoop, QTimer

    state = {"plan": False, "done": False}
    loop = QEventLoop()

    def planned(result):
        if result.final:
            state["plan"] = state["done"] = True
            loop.quit()

    def failed(_text):
        if not window._computing:
            state["done"] = True
            loop.quit()

    window.planShown.connect(planned)
    window.problemShown.connect(failed)
    if window.model.plan is not None and window.model.ttff_final and not window._computing:
        return True
    if not window._computing and window.message_bar.isVisibleTo(window):
        return False
    timer = QTimer()
    timer.setSingleShot(True)
    timer.timeout.connect(loop.quit)
    timer.start(int(timeout_s * 1000))
    loop.exec()
    timer.stop()
    window.planShown.disconnect(planned)
    window.problemShown.disconnect(failed)
    return state["plan"]


def no_screen_reason(environ: Any = None, platform: str | None = None) -> str | None:
    """Why a window cannot be shown here, or None: on Linux, Qt's X11 (xcb) and Wayland
    platforms need a display server, and without one Qt aborts the process. Only the
    plain cases are caught (no DISPLAY, no WAYLAND_DISPLAY); other platforms (offscreen,
    vnc, eglfs...) and other systems are left to Qt."""
    env = os.environ if environ is None else environ
    if not (platform or sys.platform).startswith("linux"):
        return None
    qpa = env.get("QT_QPA_PLATFORM", "").split(":")[0].split(";")[0].strip().lower()
    if qpa.startswith("wayland"):
        return None if env.get("WAYLAND_DISPLAY") else "WAYLAND_DISPLAY is not set"
    if qpa not in ("", "xcb"):
        return None
    if qpa == "" and env.get("WAYLAND_DISPLAY"):
        return None
    return None if env.get("DISPLAY") else "DISPLAY is not set"


NO_SCREEN_HINT = ("to render the window without a screen use acqplan gui [SCENARIO.toml | --demo] "
                  "--screenshot DIR, or run with QT_QPA_PLATFORM=offscreen")


def run_gui(args: Any) -> int:
    """Entry point of ``acqplan gui``."""
    screenshot_dir = getattr(args, "screenshot", None)
    if screenshot_dir and not os.environ.get("QT_QPA_PLATFORM"):
        os.environ["QT_QPA_PLATFORM"] = "offscreen"
    reason = no_screen_reason()
    if reason is not None:
        print(f"acqplan gui: no screen to show the window on ({reason}); {NO_SCREEN_HINT}",
              file=sys.stderr)
        return EXIT_BAD_INPUT
    try:
        size = parse_size(getattr(args, "size", None) or "1600x1000")
    except ValueError as err:
        print(f"acqplan gui: {err}", file=sys.stderr)
        return EXIT_BAD_INPUT

    from . import settings as settings_mod

    temp_settings = None
    if screenshot_dir:
        temp_settings = tempfile.TemporaryDirectory(prefix="acqplan-settings-")
        settings_mod.use_settings_folder(temp_settings.name)
    app = _application([sys.argv[0]])
    # The worker's event-driven timeline and Monte Carlo are pure Python: a shorter
    # switch interval (default 5 ms) lets the GUI thread take the interpreter sooner.
    sys.setswitchinterval(0.001)

    from .main_window import PlannerWindow

    window = PlannerWindow(interactive=not screenshot_dir, restore_layout=not screenshot_dir)
    previous_hook = install_excepthook(window, show_dialog=not screenshot_dir)
    try:
        opened = True
        t0 = time.perf_counter()
        if getattr(args, "scenario", None):
            opened = window.open_scenario(args.scenario)
        elif getattr(args, "demo", False):
            opened = window.open_demo()
        if screenshot_dir and not opened:
            # A scenario that cannot be planned gives no pictures: the reason, exit 2.
            problem = window.message_bar.text.text() or "the scenario could not be opened"
            print(f"acqplan gui: {' '.join(problem.split())}; no screenshots written",
                  file=sys.stderr)
            window.close()
            return EXIT_BAD_INPUT
        if screenshot_dir:
            window.resize(*size)
            window.show()
            ok = opened and wait_for_first_plan(window)
            app.processEvents()
            from .screenshots import write_screenshots

            written = write_screenshots(window, Path(screenshot_dir), size)
            for p in written:
                print(p)
            if not ok:
                problem = window.message_bar.text.text() or "no plan was computed"
                print(f"acqplan gui: {problem}", file=sys.stderr)
            print(f"first plan on screen after {time.perf_counter() - t0:.2f} s", file=sys.stderr)
            window.close()
            return EXIT_OK if ok else EXIT_BAD_INPUT
        window.show()
        return int(app.exec())
    finally:
        sys.excepthook = previous_hook
        window.worker.shutdown()
        if temp_settings is not None:
            temp_settings.cleanup()

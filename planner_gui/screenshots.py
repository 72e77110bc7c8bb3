"""Render the planner window and each of its views to PNG files (headless or not).

Every file is written atomically (rendered to bytes, then write-then-rename through
core.files.atomic). Views inside the tab stack are brought to the front one by one so each is
rendered at the size it has in the window.
"""

from __future__ import annotations

from pathlib import Path

from PySide6.QtCore import QBuffer, QByteArray, QIODevice
from PySide6.QtGui import QPixmap
from PySide6.QtWidgets import QApplication, QWidget

from core.api import write_bytes_atomic

WINDOW_FILE = "window.png"


def png_bytes(pixmap: QPixmap) -> bytes:
    data = QByteArray()
    buf = QBuffer(data)
    buf.open(QIODevice.OpenModeFlag.WriteOnly)
    if not pixmap.save(buf, "PNG"):
        raise OSError("PNG encoding failed")
    buf.close()
    return bytes(data.data())


def _settle(rounds: int = 3) -> None:
    app = QApplication.instance()
    for _ in range(rounds):
        app.processEvents()


def grab(widget: QWidget) -> QPixmap:
    _settle()
    return widget.grab()


def prepare_for_screenshot(window) -> None:
    """A telling state for pictures: the first-acquired satellite selected and the cursor
    at the first fix (narrowed windows), unless the user chose already."""
    plan = window.model.plan
    if plan is None:
        return
    if window.model.selected is None and plan.first_acquired:
        window.model.select(plan.first_acquired)
    t = plan.timeline.first_fix_unix_s
    if window.model.cursor == 0 and t is not None:
        window.model.set_cursor(plan.index_at(t))


def write_screenshots(window, directory: Path, size: tuple[int, int] | None = None,
                      prepare: bool = True) -> list[Path]:
    """window.png plus <view>.png for every view; returns the paths written."""
    directory = Path(directory)
    directory.mkdir(parents=True, exist_ok=True)
    if size is not None:
        window.resize(*size)
    if not window.isVisible():
        window.show()
    if prepare:
        prepare_for_screenshot(window)
    _settle()
    written: list[Path] = []
    target = directory / WINDOW_FILE
    write_bytes_atomic(target, png_bytes(grab(window)))
    written.append(target)
    stacks = [window.tabs, window.lower_tabs, window.side_tabs]
    current = [t.currentIndex() for t in stacks]
    for name, widget in window.view_widgets().items():
        for tabs in stacks:
            index = tabs.indexOf(widget)
            if index >= 0:
                tabs.setCurrentIndex(index)
        if not widget.isVisible():
            continue
        target = directory / f"{name}.png"
        if name == "scenario" and widget.widget() is not None:
            widget = widget.widget()            # the whole form, not the scrolled part
        write_bytes_atomic(target, png_bytes(grab(widget)))
        written.append(target)
    for tabs, index in zip(stacks, current):
        tabs.setCurrentIndex(index)
    _settle(1)
    return written

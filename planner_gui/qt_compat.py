"""A safety net for one faulty Qt binding.

PySide6 6.12.0 under CPython 3.11 returns None from every void Qt method without taking a
reference: each call loses one reference to None (and some to True/False), and after a
few thousand calls the interpreter aborts ("none_dealloc: deallocating None").
``pyproject.toml`` holds PySide6 below 6.12, which is the fix; this guard only acts when
a probe shows the leak anyway (e.g. someone installed 6.12.0 by hand).
"""

from __future__ import annotations

import sys

from PySide6.QtCore import QObject

_GUARDED = False
_GUARD_REFS = 1 << 40


def guard_singleton_refcounts() -> bool:
    """Keep None, True and False alive under a binding that leaks references to them.

    On CPython < 3.12, when a probe shows the leak, this adds 2**40 references to the
    three singletons (what CPython 3.12 does by making them immortal). Returns True when
    the guard was applied.
    """
    global _GUARDED
    if _GUARDED:
        return True
    if sys.implementation.name != "cpython" or sys.version_info >= (3, 12):
        return False
    probe = QObject()
    before = sys.getrefcount(None)
    for _ in range(64):
        probe.setObjectName("probe")           # a void method
    lost = before - sys.getrefcount(None)
    del probe
    if lost < 32:
        return False
    import ctypes

    for obj in (None, True, False):
        ctypes.c_ssize_t.from_address(id(obj)).value += _GUARD_REFS
    _GUARDED = True
    return True

"""acqplan's application layer: the command line, the planner window and the sheets."""

from __future__ import annotations


def version() -> str:
    """The installed distribution's version (the pyproject value when run from a checkout)."""
    try:
        from importlib.metadata import version as _dist_version

        return _dist_version("acqplan")
    except Exception:  # not installed: running from a source checkout
        return "0.1.0"

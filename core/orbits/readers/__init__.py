"""Orbit-file readers: YUMA and SEM almanacs and TLE sets, into core.orbits.OrbitSet.

``load_orbits(path, reference_time=None, mapping=None)`` picks the reader from the file's
content; ``load_orbit_files(paths, ...)`` reads and merges several files.
"""

from __future__ import annotations

from .detect import detect_format, load_orbit_files, load_orbits, parse_orbits
from .identity import Identity, identify_tle
from .mapping import load_mapping, parse_mapping
from .sem import parse_sem
from .tle import parse_tle
from .yuma import parse_yuma

__all__ = [
    "Identity",
    "detect_format",
    "identify_tle",
    "load_mapping",
    "load_orbit_files",
    "load_orbits",
    "parse_mapping",
    "parse_orbits",
    "parse_sem",
    "parse_tle",
    "parse_yuma",
]

"""Open orbit files of any supported kind: the reader is chosen from the content.

Recognition, in this order (file names and extensions are not used):

* YUMA: a line ``**** Week N almanac for PRN-XX ****``;
* TLE: a line starting ``1 `` of at least 69 columns followed by a line starting ``2 ``;
* SEM: first line ``<count> <title>``, second line ``<week> <toa>``, then a PRN;
* RINEX navigation (2.x, 3.x; GPS, Galileo, BeiDou, QZSS, GLONASS): a first line
  ``RINEX VERSION / TYPE`` of type N (or G, RINEX 2 GLONASS).

Compressed files (gzip ``.gz``, Unix compress ``.Z``) are expanded first, recognised from
their first bytes (:mod:`.compressed`).

Reference time (the planned start; a timezone-aware datetime or UTC POSIX seconds) places
the 10-bit almanac weeks in their 1024-week era (:func:`core.timeutil.resolve_week`) and
sets ``OrbitFileInfo.age_s``. Without it, almanac weeks are taken as written (no rollover
added) and a warning says so and lists the other possible eras; the computer clock is
never used.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from datetime import datetime
from pathlib import Path

from ...ground.bounded_read import MB, ORBIT_FILE_LIMIT_BYTES, read_bytes_bounded
from ...ground.errors import InputError, OrbitFormatError
from ..orbit_set import OrbitSet
from .broadcast_set import parse_broadcast
from .compressed import expand
from .identity import glonass_k_warning
from .mapping import as_mapping
from .rinex_nav import is_rinex_nav
from .sem import is_sem, parse_sem
from .tle import is_tle, parse_tle, with_reference
from .yuma import is_yuma, parse_yuma, reference_to_unix_s

MappingArg = str | Path | Mapping[int, tuple[str, int | None]] | None



def detect_format(text: str) -> str | None:
    """'YUMA', 'TLE', 'SEM' or 'RINEX-NAV' from the text, or None when it is none of them."""
    if is_rinex_nav(text):
        return "RINEX-NAV"
    if is_yuma(text):
        return "YUMA"
    if is_tle(text):
        return "TLE"
    if is_sem(text):
        return "SEM"
    return None


def read_text(path: str | Path) -> str:
    """The file's text; every problem reading it is an OrbitFormatError naming the file."""
    src = str(path)
    # Size and time bounded: /dev/zero, a 50 MB file or a pipe without writer give one
    # line within seconds (core.ground.bounded_read).
    data = read_bytes_bounded(path, limit_bytes=ORBIT_FILE_LIMIT_BYTES, what="orbit file",
                              error_type=OrbitFormatError)
    if not data.strip():
        raise OrbitFormatError("the file is empty", file=src)
    data = expand(data, src)
    if len(data) > ORBIT_FILE_LIMIT_BYTES:
        raise OrbitFormatError(f"the file expands to {len(data) / MB:.1f} MB, larger than any "
                               f"orbit file (limit {ORBIT_FILE_LIMIT_BYTES / MB:.1f} MB)", file=src)
    if b"\x00" in data:
        raise OrbitFormatError("binary data, not a text orbit file", file=src)
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError:
        # Names are the only free text; keep going with a one-byte-per-character decoding.
        return data.decode("latin-1")


def parse_orbits(text: str, source: str, reference_time: datetime | float | None = None,
                 mapping: MappingArg = None, *, strict: bool = True,
                 k_warning: bool = True) -> OrbitSet:
    """Parse orbit text of any supported format (see :func:`load_orbits`)."""
    reference_unix_s = reference_to_unix_s(reference_time)
    fmt = detect_format(text)
    if fmt == "YUMA":
        return parse_yuma(text, source, reference_unix_s, strict=strict)
    if fmt == "SEM":
        return parse_sem(text, source, reference_unix_s, strict=strict)
    if fmt == "RINEX-NAV":
        return parse_broadcast(text, source, reference_unix_s, strict=strict)
    if fmt == "TLE":
        return with_reference(parse_tle(text, source, mapping, strict=strict,
                                        k_warning=k_warning), reference_unix_s)
    if not text.strip():
        raise OrbitFormatError("the file is empty", file=source)
    raise OrbitFormatError("not a YUMA, SEM, TLE or RINEX navigation orbit file (no YUMA "
                           "record header, no TLE line pair, no SEM header, no RINEX header)",
                           file=source, line=1, field="format")


def load_orbits(path: str | Path, reference_time: datetime | float | None = None,
                mapping: MappingArg = None, *, strict: bool = True) -> OrbitSet:
    """Read one YUMA, SEM, TLE or RINEX navigation file (plain, .gz or .Z) into an OrbitSet.

    ``reference_time``: the planned start (aware datetime or UTC POSIX seconds), used to
    resolve 10-bit almanac weeks and to compute the data age. ``mapping``: a mapping file
    path or a dict {catalogue number: (sat_id, glonass_k)}, applied to TLE records.
    ``strict``: TLE records with a bad checksum or field, and records of any format whose
    values are physically implausible (:mod:`core.orbits.plausibility`), raise (True) or
    are skipped with a warning (False). Errors are :class:`OrbitFormatError` (file problems) or
    :class:`InputError` (a bad argument).
    """
    table = as_mapping(mapping)
    out = parse_orbits(read_text(path), str(path), reference_time, table, strict=strict)
    out.warnings.extend(_empty_mapping_warning(mapping, table))
    return out


def _empty_mapping_warning(mapping: MappingArg, table) -> list[str]:
    """A mapping FILE that maps nothing (empty, or only comments and a header) is usable
    but almost certainly not what was meant: say so."""
    if isinstance(mapping, str | Path) and table is not None and not table:
        return [f"{mapping}: the mapping file holds no entries (empty, or only comments); "
                "no catalogue number is mapped and GLONASS channels k stay unknown"]
    return []


def load_orbit_files(paths: Iterable[str | Path],
                     reference_time: datetime | float | None = None,
                     mapping: MappingArg = None, *, strict: bool = True) -> OrbitSet:
    """Read several orbit files and merge them (OrbitSet.merge: a repeated ID gets '#2')."""
    path_list = list(paths)
    if not path_list:
        raise InputError("no orbit files given", field="paths")
    table = as_mapping(mapping)
    reference_unix_s = reference_to_unix_s(reference_time)
    sets = [parse_orbits(read_text(p), str(p), reference_unix_s, table, strict=strict,
                         k_warning=False) for p in path_list]
    merged = OrbitSet().merge(*sets)
    merged.warnings.extend(_empty_mapping_warning(mapping, table))
    kw = glonass_k_warning(merged.entries)
    if kw:
        merged.warnings.append(kw)
    return merged

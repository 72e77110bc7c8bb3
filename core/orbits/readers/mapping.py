"""The satellite mapping file: catalogue number -> satellite ID (and GLONASS channel k).

acqplan's own plain-text format (documented for users in docs/mapping-file.md):

* UTF-8 text; ``#`` starts a comment (whole line or the rest of a line); blank lines ignored.
* One satellite per line: ``catalogue_number, sat_id[, glonass_k]``, separated by commas
  or by whitespace, e.g. ``32393, R07, 5`` or ``32393 R07 5``.
* An optional first line ``norad,id,k`` (any of the words norad / catalogue / catalog /
  satno / catalogue_number, then id / sat_id, then k / glonass_k) is a header and skipped.
* ``sat_id`` is a RINEX-style ID: a letter of ``GRECJSI`` and two digits, optionally one
  more letter (``G13``, ``R07``, ``R14S``, ``J01``, ``S20``).
* ``glonass_k`` is the GLONASS frequency channel, an integer -7..+6, only for ``R`` IDs.
* A catalogue number may appear once; two numbers may map to the same ID (a replaced
  satellite): both are kept, the later one with a ``#2`` suffix and a warning.

The TLE reader applies the mapping by catalogue number; it overrides the ID derived from
the name. Almanacs (YUMA/SEM) carry no catalogue numbers and are not affected.
"""

from __future__ import annotations

import re
from collections.abc import Mapping as MappingABC
from pathlib import Path

from ...ground.bounded_read import TEXT_FILE_LIMIT_BYTES, read_bytes_bounded
from ...ground.errors import OrbitFormatError
from .identity import parse_sat_id

SatMapping = dict[int, tuple[str, int | None]]

# GLONASS FDMA channel numbers in use [mem: GLONASS ICD 5.1: k = -7..+6].
GLONASS_K_MIN, GLONASS_K_MAX = -7, 6
# Catalogue numbers: 5 digits, or Alpha-5 up to Z9999 = 339999 [mem: Space-Track Alpha-5 notes].
CATALOGUE_MAX = 339_999

_HEADER_WORDS = ({"norad", "catalogue", "catalog", "satno", "catalogue_number", "catalog_number",
                  "norad_id"},
                 {"id", "sat_id", "satid", "sat"},
                 {"k", "glonass_k", "channel"})
_INT = re.compile(r"^[+-]?\d{1,7}$")


def _fields(text: str) -> list[str]:
    if "," in text:
        return [f.strip() for f in text.split(",")]
    return text.split()


def parse_mapping(text: str, source: str = "<mapping>") -> SatMapping:
    """Parse mapping-file text (see the module docstring). Errors name file, line and field."""
    out: SatMapping = {}
    line_of: dict[int, int] = {}
    seen_data = False
    for line_no, raw in enumerate(text.split("\n"), start=1):
        body = raw.split("#", 1)[0].strip().lstrip("\ufeff")
        if not body:
            continue
        fields = _fields(body)
        if not seen_data and fields and fields[0].lower() in _HEADER_WORDS[0]:
            if len(fields) in (2, 3) and all(f.lower() in words
                                             for f, words in zip(fields, _HEADER_WORDS)):
                seen_data = True
                continue
            raise OrbitFormatError(f"header '{body}' should read 'norad,id' or 'norad,id,k'",
                                   file=source, line=line_no, field="header")
        seen_data = True
        if len(fields) not in (2, 3):
            raise OrbitFormatError(
                f"expected 'catalogue_number, sat_id[, glonass_k]', found {len(fields)} field(s)",
                file=source, line=line_no, field="line")
        cat_text, id_text = fields[0], fields[1]
        if not cat_text.isdigit() or len(cat_text) > 6 or not 1 <= int(cat_text) <= CATALOGUE_MAX:
            raise OrbitFormatError(
                f"catalogue number '{cat_text}' is not a whole number 1..{CATALOGUE_MAX}",
                file=source, line=line_no, field="catalogue_number")
        cat = int(cat_text)
        ident = parse_sat_id(id_text)
        if ident is None:
            raise OrbitFormatError(
                f"'{id_text}' is not a satellite ID such as G13, R07, E11, C19, J01, S20",
                file=source, line=line_no, field="sat_id")
        k: int | None = None
        if len(fields) == 3 and fields[2] != "":
            k_text = fields[2]
            if not _INT.match(k_text) or not GLONASS_K_MIN <= int(k_text) <= GLONASS_K_MAX:
                raise OrbitFormatError(
                    f"GLONASS channel '{k_text}' is not a whole number "
                    f"{GLONASS_K_MIN}..{GLONASS_K_MAX}",
                    file=source, line=line_no, field="glonass_k")
            if ident.system != "R":
                raise OrbitFormatError(
                    f"a GLONASS channel is given for {ident.sat_id}, which is not GLONASS",
                    file=source, line=line_no, field="glonass_k")
            k = int(k_text)
        if cat in out:
            raise OrbitFormatError(
                f"catalogue number {cat} is already mapped at line {line_of[cat]}",
                file=source, line=line_no, field="catalogue_number")
        out[cat] = (ident.sat_id, k)
        line_of[cat] = line_no
    return out


def load_mapping(path: str | Path) -> SatMapping:
    """Read a mapping file: {catalogue number: (sat_id, glonass_k or None)}."""
    p = Path(path)
    data = read_bytes_bounded(path, limit_bytes=TEXT_FILE_LIMIT_BYTES, what="mapping file",
                              error_type=OrbitFormatError)
    if b"\x00" in data:
        raise OrbitFormatError("binary data, not a text mapping file", file=str(p))
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise OrbitFormatError(f"not UTF-8 text (byte {exc.start})", file=str(p)) from None
    return parse_mapping(text, str(p))


def as_mapping(mapping: str | Path | MappingABC[int, tuple[str, int | None]] | None,
               ) -> SatMapping | None:
    """A mapping given as a file path or as a ready dict (checked); None stays None."""
    if mapping is None:
        return None
    if isinstance(mapping, str | Path):
        return load_mapping(mapping)
    out: SatMapping = {}
    for cat, value in mapping.items():
        try:
            sat_id, k = value
        except (TypeError, ValueError):
            raise OrbitFormatError(f"mapping value for {cat!r} must be (sat_id, k)",
                                   field="mapping") from None
        ident = parse_sat_id(str(sat_id))
        if not isinstance(cat, int) or isinstance(cat, bool) or ident is None:
            raise OrbitFormatError(f"mapping entry {cat!r}: {value!r} is not "
                                   "catalogue_number: (sat_id, k)", field="mapping")
        if k is not None and (not isinstance(k, int) or ident.system != "R"
                              or not GLONASS_K_MIN <= k <= GLONASS_K_MAX):
            raise OrbitFormatError(f"mapping entry {cat}: channel {k!r} is not a GLONASS k "
                                   f"{GLONASS_K_MIN}..{GLONASS_K_MAX} for an R satellite",
                                   field="glonass_k")
        out[cat] = (ident.sat_id, k)
    return out

"""Robustness: whatever the input, readers return an OrbitSet or raise the project's errors.

Inputs: random bytes, random text built from orbit-file characters, real files truncated
at random offsets, real files with random lines deleted or a digit changed. Nothing but
OrbitSet, OrbitFormatError or InputError may come out [project rule: errors are the
project's own exceptions, core/errors.py]. The real-file cases skip without orbit-data.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from conftest import HAVE_ORBIT_DATA, ORBIT_DATA
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from core.ground.errors import InputError
from core.orbits.orbit_set import OrbitSet
from core.orbits.readers import (
    load_orbits,
    parse_mapping,
    parse_orbits,
    parse_sem,
    parse_tle,
    parse_yuma,
)

FUZZ = settings(max_examples=200, deadline=None,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
REFERENCE_UNIX_S = 1.5e9        # 2017-07-14, any fixed value will do


def _real_texts() -> list[tuple[str, str]]:
    if not HAVE_ORBIT_DATA:
        return []
    out = []
    for folder in ("yuma", "sem", "tle"):
        for p in sorted((ORBIT_DATA / folder).iterdir()):
            out.append((p.name, p.read_bytes().decode("latin-1")))
    return out


REAL = _real_texts()
needs_real = pytest.mark.skipif(not REAL, reason=f"real orbit files not found at {ORBIT_DATA}")


def _check_result(result: object) -> None:
    assert isinstance(result, OrbitSet)
    assert len(result) > 0
    assert result.files and result.files[0].n_satellites == len(result)


def _all_readers(text: str, source: str = "fuzz") -> None:
    """Every reader and the dispatcher on the same text: OrbitSet or InputError only."""
    calls = (
        lambda: parse_orbits(text, source, REFERENCE_UNIX_S),
        lambda: parse_orbits(text, source, None, strict=False),
        lambda: parse_yuma(text, source, REFERENCE_UNIX_S),
        lambda: parse_sem(text, source, None),
        lambda: parse_tle(text, source),
        lambda: parse_tle(text, source, strict=False),
    )
    for call in calls:
        try:
            result = call()
        except InputError as exc:           # OrbitFormatError is a subclass
            assert str(exc)                 # one readable message
            continue
        _check_result(result)
    try:
        mapping = parse_mapping(text, source)
    except InputError:
        return
    assert isinstance(mapping, dict)


ORBIT_CHARS = st.sampled_from(list("0123456789     .-+E*:\n\r#()") +
                              ["Week ", "almanac for PRN-", "ID:", "1 ", "2 ", "\n1 ", "\n2 ",
                               "Health:", "E-002", "PRN 13", "GPS", "COSMOS", "R07", "120"])


@FUZZ
@given(st.binary(max_size=2000))
def test_random_bytes_through_load_orbits(tmp_path_factory, data):
    path = Path(tmp_path_factory.getbasetemp()) / "fuzz.bin"
    path.write_bytes(data)
    try:
        result = load_orbits(path, reference_time=REFERENCE_UNIX_S)
    except InputError:
        return
    _check_result(result)


@FUZZ
@given(st.lists(ORBIT_CHARS, max_size=300).map("".join))
def test_random_orbit_like_text(text):
    _all_readers(text)


@needs_real
@FUZZ
@given(st.sampled_from(REAL or [("", "")]), st.floats(0.0, 1.0))
def test_truncated_real_files(named, fraction):
    name, text = named
    _all_readers(text[: int(len(text) * fraction)], name)


@needs_real
@FUZZ
@given(st.sampled_from(REAL or [("", "")]), st.data())
def test_real_files_with_lines_deleted(named, data):
    name, text = named
    lines = text.split("\n")
    n_delete = data.draw(st.integers(1, min(5, len(lines))))
    for _ in range(n_delete):
        del lines[data.draw(st.integers(0, len(lines) - 1))]
    _all_readers("\n".join(lines), name)


@needs_real
@FUZZ
@given(st.sampled_from(REAL or [("", "")]), st.data())
def test_real_files_with_a_character_changed(named, data):
    name, text = named
    if not text:
        return
    i = data.draw(st.integers(0, len(text) - 1))
    c = data.draw(st.sampled_from(list("0123456789 -.+Ex:\n")))
    _all_readers(text[:i] + c + text[i + 1:], name)

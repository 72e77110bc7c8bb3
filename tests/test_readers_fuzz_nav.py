"""Robustness of the RINEX navigation reader and the compressed-file expander.

As tests/test_readers_fuzz.py for the almanac and TLE readers: random bytes, RINEX-like
random text, real navigation files truncated, with lines deleted or a character changed,
and damaged gzip / compress streams. Nothing but an OrbitSet (which must then propagate
without error) or the project's own InputError / OrbitFormatError may come out [project
rule: errors are the project's own exceptions, core/ground/errors.py].
"""

from __future__ import annotations

import gzip
import warnings

import numpy as np
import pytest
from conftest import HAVE_ORBIT_DATA, ORBIT_DATA
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from core.ground.errors import InputError
from core.orbits.orbit_set import OrbitSet
from core.orbits.readers import parse_orbits
from core.orbits.readers.compressed import expand
from core.orbits.readers.rinex_nav import ALL_SYSTEMS, parse_rinex_nav
from core.sky.predict import propagate_ecef

FUZZ = settings(max_examples=150, deadline=None,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
# Small real files whole, the first 240 lines of the long ones (still the files' own text).
_FILES = (("gnsslibpy_BRDM00DLR_S_20230730000_01D_MN.rnx", None),
          ("gpstk_test_input_rinex3_76193040.14n", None),
          ("gpstk_test_input_rinex_nav_TestInput1.16n", None),
          ("rtklib_brdc3050.12q", 240), ("rtklib_brdc3050.12g", 240),
          ("gnsslibpy_brdc1180.21n", 240), ("rtklib_brdc3050.12n", 240))


def _real() -> list[tuple[str, str]]:
    if not HAVE_ORBIT_DATA:
        return []
    out = []
    for name, n_lines in _FILES:
        text = (ORBIT_DATA / "rinex-nav" / name).read_bytes().decode("latin-1")
        if n_lines:
            text = "\n".join(text.split("\n")[:n_lines])
        out.append((name, text))
    return out


REAL = _real()
needs_real = pytest.mark.skipif(not REAL, reason=f"real orbit files not found at {ORBIT_DATA}")


def _check(text: str, source: str = "fuzz") -> None:
    for call in (lambda: parse_orbits(text, source, 1.6e9),
                 lambda: parse_rinex_nav(text, source, ALL_SYSTEMS)):
        try:
            result = call()
        except InputError as exc:           # OrbitFormatError is a subclass
            assert str(exc)
            continue
        if isinstance(result, OrbitSet):
            assert len(result) > 0 and result.files[0].n_satellites == len(result)
            toes = [r.toe_gps_s for e in result.entries for r in e.broadcast]
            t = np.array([min(toes), float(np.median(toes)), max(toes)]) - 18.0 + 315_964_800.0
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", RuntimeWarning)   # absurd but finite numbers
                pos, vel, valid, _ = propagate_ecef(result, t)
            assert pos.shape == (len(result), 3, 3) and valid.shape == (len(result), 3)


RINEX_CHARS = st.sampled_from(
    list("0123456789     .-+ED\n") +
    ["     3.04           NAVIGATION DATA     M                   RINEX VERSION / TYPE\n",
     "     2.10           N: GPS NAV DATA                         RINEX VERSION / TYPE\n",
     "     2.10           G: GLONASS NAV DATA                     RINEX VERSION / TYPE\n",
     "                                                            END OF HEADER\n",
     "G01 2023 03 14 00 00 00", "R01 2021 04 28 00 15 00", "C01 ", "E11 ", "J 1 12 10 31",
     " 1 21  4 28  0  0  0.0", " 5.153655818939e+03", "-2.637111594763D+00",
     "    ", "0.499063314480-269", "1.728000000000e+05"])


@FUZZ
@given(st.lists(RINEX_CHARS, max_size=200).map("".join))
def test_random_rinex_like_text(text):
    _check(text)


@needs_real
@FUZZ
@given(st.sampled_from(REAL or [("", "")]), st.floats(0.0, 1.0))
def test_truncated_real_nav_files(named, fraction):
    name, text = named
    _check(text[: int(len(text) * fraction)], name)


@needs_real
@FUZZ
@given(st.sampled_from(REAL or [("", "")]), st.data())
def test_real_nav_files_with_lines_deleted(named, data):
    name, text = named
    lines = text.split("\n")
    for _ in range(data.draw(st.integers(1, min(5, len(lines))))):
        del lines[data.draw(st.integers(0, len(lines) - 1))]
    _check("\n".join(lines), name)


@needs_real
@FUZZ
@given(st.sampled_from(REAL or [("", "")]), st.data())
def test_real_nav_files_with_a_character_changed(named, data):
    name, text = named
    i = data.draw(st.integers(0, len(text) - 1))
    c = data.draw(st.sampled_from(list("0123456789 -.+EDx:\nGRCEJ")))
    _check(text[:i] + c + text[i + 1:], name)


@FUZZ
@given(st.binary(max_size=600), st.sampled_from([b"\x1f\x8b", b"\x1f\x9d", b""]))
def test_random_compressed_streams(data, magic):
    try:
        out = expand(magic + data, "fuzz.Z")
    except InputError as exc:
        assert str(exc)
        return
    assert isinstance(out, bytes)


@needs_real
@FUZZ
@given(st.floats(0.0, 1.0), st.booleans())
def test_truncated_real_compressed_files(fraction, use_z):
    if use_z:
        raw = (ORBIT_DATA / "sp3" / "orekit_gbm18432.sp3.Z").read_bytes()[:60_000]
    else:
        raw = gzip.compress(REAL[0][1].encode("latin-1"))
    try:
        out = expand(raw[: int(len(raw) * fraction)], "cut")
    except InputError as exc:
        assert str(exc)
        return
    assert isinstance(out, bytes)

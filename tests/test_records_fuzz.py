"""Robustness of the record readers: whatever the bytes, a Record or the project's errors.

Inputs: random bytes, random text built from RINEX/NMEA characters behind a real header,
the real records truncated at random offsets, with random lines deleted or one character
changed, and compressed content cut short. Nothing but a Record or an InputError
(RecordFormatError) may come out [project rule: errors are the project's own exceptions,
core/ground/errors.py]. The real-file cases skip without ../shared/field-data.
"""

from __future__ import annotations

import gzip
from pathlib import Path

import numpy as np
import pytest
from conftest import REPO
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from core.ground.errors import InputError
from core.records.measure import measure
from core.records.record import Record, expand, parse_record

FUZZ = settings(max_examples=150, deadline=None,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
FIELD = Path(REPO.parent / "shared" / "field-data")


def _real() -> list[tuple[str, bytes]]:
    out = []
    for sub in ("rinex-obs", "nmea"):
        folder = FIELD / sub
        if folder.is_dir():
            for p in sorted(folder.iterdir()):
                data = p.read_bytes()
                # keep the fuzz fast: the first 40 kB of the long station files
                out.append((p.name, data[:40_000]))
    return out


REAL = _real()
needs_real = pytest.mark.skipif(not REAL, reason=f"real field data not found at {FIELD}")
SIGNALS = {"G": "GPS-L1CA", "E": "GAL-E1", "R": "GLO-L1OF", "C": "BDS-B1I", "J": "QZS-L1CA"}


def _check(data: bytes) -> None:
    try:
        rec = parse_record(expand(data, "fuzz"), "fuzz")
    except InputError:
        return
    assert isinstance(rec, Record)
    assert rec.epochs_unix_s.size > 0 and np.all(np.diff(rec.epochs_unix_s) > 0)
    for v in rec.obs.values():
        assert v.shape == (len(rec.sat_ids), rec.n_epochs)
    m = measure(rec, SIGNALS)                 # the derived figures must not raise either
    assert m.doppler_hz.shape[1] == rec.n_epochs


@FUZZ
@given(st.binary(max_size=3000))
def test_random_bytes(data):
    _check(data)


HEADER_V2 = (b"     2.11           OBSERVATION DATA    M (MIXED)           RINEX VERSION / TYPE\n"
             b"     3    L1    C1    S1                                    # / TYPES OF OBSERV\n"
             b"                                                            END OF HEADER\n")
HEADER_V3 = (b"     3.03           OBSERVATION DATA    M                   RINEX VERSION / TYPE\n"
             b"G    3 C1C L1C D1C                                          SYS / # / OBS TYPES\n"
             b"                                                            END OF HEADER\n")


@FUZZ
@given(st.sampled_from([HEADER_V2, HEADER_V3, b"$GPRMC,"]),
       st.text(alphabet=" 0123456789.-+GREC>\n*$,ABDLS", max_size=2000))
def test_random_text_behind_a_header(header, body):
    _check(header + body.encode())


@needs_real
@FUZZ
@given(st.sampled_from(REAL), st.floats(0.0, 1.0))
def test_truncated_real_records(item, frac):
    _, data = item
    _check(data[: int(len(data) * frac)])


@needs_real
@FUZZ
@given(st.sampled_from(REAL), st.lists(st.integers(0, 10_000), min_size=1, max_size=5),
       st.integers(0, 10_000), st.sampled_from(b"0-9 .GXx>*"))
def test_damaged_real_records(item, drop, at, char):
    _, data = item
    lines = data.split(b"\n")
    for k in sorted({d % len(lines) for d in drop}, reverse=True):
        del lines[k]
    text = bytearray(b"\n".join(lines))
    if text:
        text[at % len(text)] = char
    _check(bytes(text))


def _packed() -> list[bytes]:
    """gzip of each real file, and Hatanaka (plain and gzip) of the handheld RINEX 3 file."""
    out = [gzip.compress(data) for _, data in REAL]
    p = FIELD / "rinex-obs" / "gnsslibpy_pixel6.23o"
    if p.is_file():
        import hatanaka

        out += [hatanaka.compress(p.read_bytes(), compression=c) for c in ("none", "gz")]
    return out


PACKED = _packed()


@needs_real
@FUZZ
@given(st.sampled_from(PACKED or [b""]), st.floats(0.0, 1.0), st.integers(0, 10_000))
def test_truncated_or_damaged_compressed(packed, frac, at):
    _check(packed[: int(len(packed) * frac)])
    damaged = bytearray(packed)
    damaged[at % len(damaged)] ^= 0x55
    _check(bytes(damaged))

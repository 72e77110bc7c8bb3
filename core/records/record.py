"""The receiver's record in memory, whatever file it came from, and opening record files.

A :class:`Record` holds observations as (n_satellites, n_epochs) arrays keyed by the
observation code the file uses (RINEX 2: ``L1``, ``D1``, ``S1``; RINEX 3: ``L1C``, ``D1C``,
``S1C``; NMEA: ``S`` for the GSV signal-to-noise value, ``EL``/``AZ`` for the elevation and
azimuth the receiver reported). Missing values are NaN. Phase codes carry their
loss-of-lock indicators in ``lli`` (-1 where blank). Epochs are UTC POSIX seconds.

:func:`load_record` opens a file, expands ``.gz``/``.Z``/``.zip``/``.bz2`` and
Hatanaka-compressed (Compact RINEX) content with the ``hatanaka`` package, and picks the
reader from the content (RINEX observation header, or NMEA ``$`` sentences).
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..ground.errors import RecordFormatError


@dataclass
class Record:
    """What a receiver recorded. Arrays are (S, E) over ``sat_ids`` x ``epochs_unix_s``."""

    source: str
    format: str                          # "RINEX 2.11", "RINEX 3.03", "NMEA 0183"
    epochs_unix_s: np.ndarray            # (E,) UTC POSIX seconds, increasing
    sat_ids: list[str]                   # RINEX-style IDs: G05, R12, E27, C19, J02, S33
    obs: dict[str, np.ndarray]           # code -> (S, E) float64, NaN where missing
    lli: dict[str, np.ndarray] = field(default_factory=dict)   # phase code -> (S, E) int8
    power_failure: np.ndarray | None = None   # (E,) bool: epoch flag 1 (tracking broken before it)
    position_ecef_m: np.ndarray | None = None  # header or mean fix position; None if unknown
    interval_s: float | None = None
    time_system: str = "GPS"
    glonass_k: dict[str, int] = field(default_factory=dict)
    types_by_system: dict[str, tuple[str, ...]] = field(default_factory=dict)
    receiver: str = ""
    warnings: list[str] = field(default_factory=list)

    @property
    def n_epochs(self) -> int:
        return int(self.epochs_unix_s.size)

    @property
    def systems(self) -> list[str]:
        return sorted({s[0] for s in self.sat_ids})

    def codes_for(self, system: str) -> tuple[str, ...]:
        """Observation codes the file lists for one system (RINEX 2: the common list)."""
        return self.types_by_system.get(system, self.types_by_system.get("*", ()))

    def values(self, code: str, rows: np.ndarray | None = None) -> np.ndarray:
        """(S, E) values of one code (all NaN when the file has none)."""
        v = self.obs.get(code)
        if v is None:
            v = np.full((len(self.sat_ids), self.n_epochs), np.nan)
        return v if rows is None else v[rows]


_MAGIC = ((b"\x1f\x8b", "gzip"), (b"\x1f\x9d", "compress (.Z)"), (b"PK\x03\x04", "zip"),
          (b"BZh", "bzip2"))


def read_record_bytes(path: str | Path) -> bytes:
    """The file's bytes, expanded when compressed (gzip, .Z, zip, bzip2, Hatanaka)."""
    p = Path(path)
    src = str(p)
    try:
        data = p.read_bytes()
    except FileNotFoundError:
        raise RecordFormatError("file not found", file=src) from None
    except IsADirectoryError:
        raise RecordFormatError("is a folder, not a receiver record", file=src) from None
    except OSError as exc:
        raise RecordFormatError(f"cannot read the file ({exc.strerror or exc})", file=src) from None
    return expand(data, src)


def expand(data: bytes, source: str) -> bytes:
    """Plain RINEX/NMEA bytes from possibly compressed ones."""
    kind = next((k for m, k in _MAGIC if data.startswith(m)), None)
    crinex = data[:80].find(b"CRINEX") >= 0 or data[:80].find(b"COMPACT RINEX") >= 0
    if kind is None and not crinex:
        return data
    import hatanaka

    try:
        out = hatanaka.decompress(data)
    except Exception as exc:  # the package raises several types; all mean a bad file
        what = kind or "Hatanaka (Compact RINEX)"
        raise RecordFormatError(f"cannot expand the {what} compressed content "
                                f"({type(exc).__name__}: {str(exc)[:80]})", file=source) from None
    if not isinstance(out, bytes | bytearray):
        raise RecordFormatError("compressed content did not expand to text", file=source)
    if out[:80].find(b"CRINEX") >= 0 or out[:80].find(b"COMPACT RINEX") >= 0:
        raise RecordFormatError("the Hatanaka (Compact RINEX) content could not be expanded",
                                file=source)
    return bytes(out)


def parse_record(data: bytes, source: str, bands: Iterable[str] | None = None) -> Record:
    """A record from (expanded) bytes: RINEX observation file or NMEA 0183 sentences.
    ``bands``: RINEX band digits to keep (e.g. ``{"1"}``; default all)."""
    from .nmea import looks_like_nmea, parse_nmea
    from .rinex_obs import looks_like_rinex_obs, parse_rinex_obs

    if not data.strip():
        raise RecordFormatError("the file is empty", file=source)
    if looks_like_rinex_obs(data):
        return parse_rinex_obs(data, source, bands=bands)
    if looks_like_nmea(data):
        return parse_nmea(data, source)
    raise RecordFormatError("not a RINEX observation file (no 'RINEX VERSION / TYPE' line "
                            "with type O) and no NMEA 0183 sentences ($..GGA, $..RMC, ...)",
                            file=source, line=1)


def load_record(path: str | Path, bands: Iterable[str] | None = None) -> Record:
    """Read a receiver record: RINEX 2.10/2.11/3.0x observation file (plain, gzip, .Z,
    Hatanaka) or an NMEA 0183 log. ``bands`` limits the RINEX codes kept (band digits,
    see :func:`record_bands`). Errors are :class:`RecordFormatError`."""
    return parse_record(read_record_bytes(path), str(path), bands)


def record_bands(signal_ids: Iterable[str]) -> set[str]:
    """RINEX band digits that hold the given planned signals (GPS-L1CA -> {'1'})."""
    from .measure import SIGNAL_BANDS

    return {b for sid in signal_ids for b in SIGNAL_BANDS[sid][0]}

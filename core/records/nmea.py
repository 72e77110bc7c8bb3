"""Reader for NMEA 0183 logs: GGA, RMC, GSV and GSA sentences, parsed with ``pynmea2``.

Every sentence's checksum is verified (``pynmea2.parse(check=True)``): a sentence with
a wrong or missing checksum is counted, reported in the record's warnings with its line
numbers, and ignored. Other sentence types are skipped silently.

What the record gets:

* epochs: the distinct UTC times of GGA and RMC sentences, on the date of the latest RMC
  (the first RMC's date for sentences before it; a time of day falling back by more than
  12 h without a new RMC moves to the next day). A log without any RMC date cannot be
  placed in time and is refused.
* per satellite and epoch: ``S`` (C/N0 in dB-Hz, the GSV "SNR" field [pub: NMEA 0183
  4.10, GSV: "SNR (C/No) 00-99 dB-Hz"]), ``EL``/``AZ`` (degrees, as the receiver saw them)
  and ``USED`` (1 where GSA lists the satellite in the fix). GSV and GSA sentences belong
  to the epoch of the GGA/RMC before them.
* position: the median of the GGA fixes with a fix (quality > 0), latitude/longitude and
  height above the ellipsoid = altitude (MSL) + geoid separation.

Satellite numbers by talker [pub: NMEA 0183 4.10 satellite ID tables]: GP 1-32 GPS,
33-64 SBAS (PRN = n + 87), 65-96 GLONASS (slot n - 64); GL 65-96 GLONASS; GA 1-36
Galileo; GB/BD 1-63 BeiDou (201-263: n - 200); GQ 1-10 QZSS (193-202: n - 192);
GN by the same ranges as GP.
"""

from __future__ import annotations

import math
from datetime import UTC, date, datetime, time

import numpy as np

from ..ground.errors import RecordFormatError
from ..ground.geodesy import geodetic_to_ecef
from .record import Record

_WANTED = ("GGA", "RMC", "GSV", "GSA")


def looks_like_nmea(data: bytes) -> bool:
    head = data[:4096].decode("latin-1")
    return any(line.lstrip().startswith(("$", "!")) and len(line.strip()) > 6 and "," in line
               for line in head.splitlines()[:50])


def _sat_id(talker: str, n: int) -> str | None:
    if talker in ("GP", "GN", "GL") and 65 <= n <= 96:
        return f"R{n - 64:02d}"
    if talker in ("GP", "GN"):
        if 1 <= n <= 32:
            return f"G{n:02d}"
        if 33 <= n <= 64:
            return f"S{n + 87:02d}"
        if 193 <= n <= 202:
            return f"J{n - 192:02d}"
        return None
    if talker == "GA" and 1 <= n <= 36:
        return f"E{n:02d}"
    if talker in ("GB", "BD"):
        if 1 <= n <= 63:
            return f"C{n:02d}"
        if 201 <= n <= 263:
            return f"C{n - 200:02d}"
    if talker == "GQ":
        if 1 <= n <= 10:
            return f"J{n:02d}"
        if 193 <= n <= 202:
            return f"J{n - 192:02d}"
    return None


def _int(text) -> int | None:
    try:
        return int(str(text).strip())
    except (TypeError, ValueError):
        return None


def _float(text) -> float | None:
    try:
        v = float(str(text).strip())
    except (TypeError, ValueError):
        return None
    return v if math.isfinite(v) else None


def parse_nmea(data: bytes, source: str) -> Record:
    """Parse an NMEA 0183 log's bytes (see the module text)."""
    import pynmea2

    lines = data.decode("latin-1").splitlines()
    bad_sum: list[int] = []
    bad_parse: list[int] = []
    times: list[tuple[int, time]] = []      # (line, time of day) of each GGA/RMC
    dates: list[tuple[int, date]] = []
    events: list[tuple[int, str, object]] = []   # (line, kind, message)
    for i, raw in enumerate(lines, start=1):
        line = raw.strip()
        start = line.find("$")
        if start < 0:
            continue
        line = line[start:]
        kind = line[3:6] if len(line) > 6 else ""
        if kind not in _WANTED:
            continue
        try:
            msg = pynmea2.parse(line, check=True)
        except pynmea2.ChecksumError:
            bad_sum.append(i)
            continue
        except (pynmea2.ParseError, ValueError, TypeError, AttributeError, IndexError):
            bad_parse.append(i)
            continue
        events.append((i, kind, msg))
    warnings = []
    if bad_sum:
        warnings.append(f"{len(bad_sum)} sentence(s) with a wrong or missing checksum ignored "
                        f"(line {_lines_text(bad_sum)})")
    if bad_parse:
        warnings.append(f"{len(bad_parse)} sentence(s) that could not be read ignored "
                        f"(line {_lines_text(bad_parse)})")
    for i, kind, msg in events:
        if kind in ("GGA", "RMC"):
            tod = getattr(msg, "timestamp", None)
            if isinstance(tod, time):
                times.append((i, tod))
        if kind == "RMC" and isinstance(getattr(msg, "datestamp", None), date):
            dates.append((i, msg.datestamp))
    also = f" ({'; '.join(warnings)})" if warnings else ""
    if not events:
        raise RecordFormatError(f"no GGA, RMC, GSV or GSA sentence with a valid checksum{also}",
                                file=source, field="NMEA")
    if not dates:
        raise RecordFormatError("no RMC sentence with a date: the log cannot be placed in "
                                f"time{also}", file=source, field="RMC")
    # time of each timed sentence -> UTC POSIX seconds
    unix_at_line: dict[int, float] = {}
    di = 0
    day = dates[0][1]
    last_tod_s = None
    for i, tod in times:
        while di < len(dates) and dates[di][0] <= i:
            day = dates[di][1]
            di += 1
            last_tod_s = None
        tod_s = tod.hour * 3600 + tod.minute * 60 + tod.second + tod.microsecond * 1e-6
        if last_tod_s is not None and tod_s < last_tod_s - 43_200.0:
            day = date.fromordinal(day.toordinal() + 1)
        last_tod_s = tod_s
        unix_at_line[i] = datetime.combine(day, time(0, tzinfo=UTC)).timestamp() + tod_s
    if not unix_at_line:
        raise RecordFormatError("no GGA or RMC sentence with a time", file=source, field="GGA")
    epochs = np.unique(np.fromiter(unix_at_line.values(), dtype=float))
    # satellites and their values per epoch
    current = None
    first_time = unix_at_line[min(unix_at_line)]
    cells: dict[str, dict[str, dict[float, float]]] = {}
    fixes = []
    for i, kind, msg in events:
        if i in unix_at_line:
            current = unix_at_line[i]
        t = first_time if current is None else current
        talker = getattr(msg, "talker", "GP")
        if kind == "GSV":
            for k in range(1, 5):
                n = _int(getattr(msg, f"sv_prn_num_{k}", None))
                sid = None if n is None else _sat_id(talker, n)
                if sid is None:
                    continue
                for code, attr, lo, hi in (("S", "snr", 0, 99), ("EL", "elevation_deg", -90, 90),
                                           ("AZ", "azimuth", 0, 360)):
                    v = _float(getattr(msg, f"{attr}_{k}", None))
                    if v is not None and lo <= v <= hi and not (code == "S" and v == 0):
                        cells.setdefault(code, {}).setdefault(sid, {})[t] = v
                cells.setdefault("SEEN", {}).setdefault(sid, {})[t] = 1.0
        elif kind == "GSA":
            for k in range(1, 13):
                n = _int(getattr(msg, f"sv_id{k:02d}", None))
                sid = None if n is None else _sat_id(talker, n)
                if sid is not None:
                    cells.setdefault("USED", {}).setdefault(sid, {})[t] = 1.0
        elif kind == "GGA":
            q = _int(getattr(msg, "gps_qual", None)) or 0
            lat, lon = getattr(msg, "latitude", None), getattr(msg, "longitude", None)
            alt, sep = _float(getattr(msg, "altitude", None)), _float(getattr(msg, "geo_sep", None))
            if q > 0 and isinstance(lat, float) and isinstance(lon, float) and alt is not None \
                    and -90 <= lat <= 90 and -180 <= lon <= 180:
                fixes.append((lat, lon, alt + (sep or 0.0)))
    sat_ids = sorted({sid for per in cells.values() for sid in per})
    index = {t: k for k, t in enumerate(epochs)}
    obs: dict[str, np.ndarray] = {}
    for code, per in cells.items():
        arr = np.full((len(sat_ids), epochs.size), np.nan)
        for s, sid in enumerate(sat_ids):
            for t, v in per.get(sid, {}).items():
                arr[s, index[t]] = v
        obs[code] = arr
    position = None
    if fixes:
        lat, lon, h = np.median(np.array(fixes), axis=0)
        position = np.asarray(geodetic_to_ecef(lat, lon, h), dtype=float)
    else:
        warnings.append("no GGA position fix: the record holds no site")
    interval = float(np.median(np.diff(epochs))) if epochs.size > 1 else None
    return Record(source=source, format="NMEA 0183", epochs_unix_s=epochs, sat_ids=sat_ids,
                  obs=obs, power_failure=np.zeros(epochs.size, dtype=bool),
                  position_ecef_m=position, interval_s=interval, time_system="UTC",
                  types_by_system={"*": tuple(sorted(obs))}, warnings=warnings)


def _lines_text(lines: list[int]) -> str:
    shown = ", ".join(str(x) for x in lines[:8])
    return shown + (", ..." if len(lines) > 8 else "")

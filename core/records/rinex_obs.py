"""Reader for RINEX 2.10/2.11 and 3.0x observation files (mixed systems).

Layout [pub: RINEX 2.11 (IGS/RTCM-SC104, 2012) and RINEX 3.03/3.04 format descriptions,
observation file tables]: a header closed by ``END OF HEADER``; then epochs.

* RINEX 2: an epoch line ``yy mm dd hh mm ss.sssssss  f nnn`` + up to 12 satellites
  (``G15R07E30``, a blank system letter meaning GPS), continued on following lines for
  more satellites; then per satellite ceil(types / 5) lines of 16-column fields
  (F14.3 value, loss-of-lock digit, signal-strength digit), blank fields and blank
  lines where values are missing.
* RINEX 3: ``> yyyy mm dd hh mm ss.sssssss  f nnn``; then one line per satellite:
  the 3-character ID and its system's fields (``SYS / # / OBS TYPES``).
* Epoch flags: 0 ok, 1 power failure between the previous and this epoch (kept, marked:
  phase continuity is broken), 2-5 event records (the count gives the number of header
  lines that follow; skipped), 6 cycle-slip records (skipped).

The walk over epochs is a Python loop (one step per epoch); every field is then taken
out of the file's bytes with one numpy gather per observation code and converted in one
call, so reading costs little more than the file's size. A value of exactly 0 is
"missing" (RINEX 2.11 section 5.1: missing observations as 0.0 or blank).
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable, Iterable
from datetime import UTC, datetime

import numpy as np

from ..ground.constants import BDT_MINUS_GPST_S, GPS_EPOCH_UNIX_S
from ..ground.errors import RecordFormatError
from ..ground.timeutil import gps_to_unix_s
from .record import Record

KeepFn = Callable[[str, str], bool]      # (system letter, code) -> keep?

_FIELD = 16
_GLO_SLOT = re.compile(r"R([ \d]\d) ?([ +-]?\d{1,2})(?=\s|$)")
_EPOCH2 = re.compile(r"^ [ \d]\d [ \d]\d [ \d]\d [ \d]\d [ \d]\d[ \d\.]{11}  \d[ \d]{3}")
_EPOCH3 = re.compile(r"^> \d{4} [ \d]\d [ \d]\d [ \d]\d [ \d]\d[ \d\.]{11}  \d[ \d]{3}")


def looks_like_rinex_obs(data: bytes) -> bool:
    head = data[:200].decode("latin-1")
    first = head.split("\n", 1)[0]
    return "RINEX VERSION / TYPE" in first and len(first) > 20 and first[20] == "O"


def _label(line: str) -> str:
    return line[60:].strip()


def _bands_keep(bands: Iterable[str] | None) -> KeepFn | None:
    if bands is None:
        return None
    wanted = set(bands)
    return lambda system, code: len(code) >= 2 and code[1] in wanted


def parse_rinex_obs(data: bytes, source: str, keep: KeepFn | None = None,
                    bands: Iterable[str] | None = None) -> Record:
    """Parse a RINEX 2.10/2.11/3.0x observation file's bytes.

    ``keep(system, code)`` (or ``bands``, e.g. ``{"1"}`` for the L1/E1/G1 codes) limits
    the observation codes stored; by default all are kept.
    """
    keep = keep or _bands_keep(bands) or (lambda system, code: True)
    text = data.decode("latin-1")
    lines = text.split("\n")
    hdr = _read_header(lines, source)
    walk = _walk_v2 if hdr["version"] < 3 else _walk_v3
    epochs, flags, rec_line, rec_sat, rec_epoch = walk(lines, hdr, source)
    if not epochs:
        raise RecordFormatError("no observation epoch after the header", file=source,
                                line=hdr["end"] + 2)
    buf = np.frombuffer(data, dtype=np.uint8)
    nl = np.flatnonzero(buf == 10)
    starts = np.concatenate(([0], nl + 1))
    ends = np.concatenate((nl, [buf.size]))
    ends = ends - ((ends > starts) & (buf[np.clip(ends - 1, 0, None)] == 13))
    # satellites, in order of first appearance sorted by ID
    sat_ids = sorted(set(rec_sat))
    sat_index = {s: i for i, s in enumerate(sat_ids)}
    n_s, n_e = len(sat_ids), len(epochs)
    r_sat = np.fromiter((sat_index[s] for s in rec_sat), dtype=np.int64, count=len(rec_sat))
    r_epoch = np.asarray(rec_epoch, dtype=np.int64)
    r_line = np.asarray(rec_line, dtype=np.int64)
    dup = _duplicates(r_sat, r_epoch)
    if dup is not None:
        raise RecordFormatError(f"satellite {sat_ids[r_sat[dup]]} appears twice in one epoch",
                                file=source, line=int(r_line[dup]) + 1)
    rec_sys = np.array([s[0] for s in sat_ids])[r_sat] if len(rec_sat) else np.array([], dtype="<U1")
    obs: dict[str, np.ndarray] = {}
    lli: dict[str, np.ndarray] = {}
    types = hdr["types"]
    for system, codes in types.items():
        rows = np.ones(r_sat.size, dtype=bool) if system == "*" else rec_sys == system
        if not rows.any():
            continue
        for j, code in enumerate(codes):
            present = sorted({sid[0] for sid in sat_ids}) if system == "*" else [system]
            if not any(keep(s, code) for s in present):
                continue
            if hdr["version"] < 3:
                line_off, col = divmod(j, 5)
                col *= _FIELD
            else:
                line_off, col = 0, 3 + _FIELD * j
            sel = np.flatnonzero(rows)
            chars = _gather(buf, starts, ends, r_line[sel] + line_off, col)
            values = _to_float(chars[:, :14], r_line[sel] + line_off, code, source)
            out = obs.setdefault(code, np.full((n_s, n_e), np.nan))
            out[r_sat[sel], r_epoch[sel]] = values
            if code[0] == "L":
                flag = chars[:, 14].astype(np.int16) - 48
                flag = np.where((flag >= 0) & (flag <= 9), flag, -1).astype(np.int8)
                arr = lli.setdefault(code, np.full((n_s, n_e), -1, dtype=np.int8))
                arr[r_sat[sel], r_epoch[sel]] = flag
    t_unix = _to_unix(np.asarray(epochs), hdr["time_system"])
    order_ok = np.all(np.diff(t_unix) > 0)
    warnings = list(hdr["warnings"])
    if not order_ok:
        bad = int(np.argmax(np.diff(t_unix) <= 0)) + 1
        raise RecordFormatError("epochs are not in increasing time order (or repeated)",
                                file=source, line=int(hdr["epoch_lines"][bad]) + 1)
    interval = hdr["interval"]
    if interval is None and n_e > 1:
        interval = float(np.median(np.diff(t_unix)))
    return Record(source=source, format=f"RINEX {hdr['version']:.2f}", epochs_unix_s=t_unix,
                  sat_ids=sat_ids, obs=obs, lli=lli, power_failure=np.asarray(flags) == 1,
                  position_ecef_m=hdr["position"], interval_s=interval,
                  time_system=hdr["time_system"], glonass_k=hdr["glonass_k"],
                  types_by_system={k: tuple(v) for k, v in types.items()},
                  receiver=hdr["receiver"], warnings=warnings)


# --- header -----------------------------------------------------------------------------

def _num(text: str, kind: type, source: str, line: int, field: str):
    try:
        return kind(text.strip())
    except ValueError:
        raise RecordFormatError(f"'{text.strip()}' is not a number", file=source, line=line + 1,
                                field=field) from None


def _read_header(lines: list[str], source: str) -> dict:
    first = lines[0]
    version = _num(first[:9], float, source, 0, "RINEX VERSION / TYPE")
    if not 2.0 <= version < 4.0:
        raise RecordFormatError(f"RINEX version {version:g} is not read (2.10, 2.11 and 3.0x "
                                "observation files are)", file=source, line=1,
                                field="RINEX VERSION / TYPE")
    file_system = (first[40:41].strip() or "G") if len(first) > 40 else "G"
    hdr: dict = {"version": version, "types": {}, "position": None, "interval": None,
                 "time_system": None, "glonass_k": {}, "receiver": "", "warnings": []}
    pending_v2: list[str] = []
    n_v2 = 0
    v3_sys, v3_n = "", 0
    end = None
    for i, line in enumerate(lines[1:], start=1):
        label = _label(line)
        if label == "END OF HEADER":
            end = i
            break
        if label == "# / TYPES OF OBSERV":
            if line[:6].strip():
                n_v2 = _num(line[:6], int, source, i, label)
            pending_v2 += [line[6 + 6 * k:12 + 6 * k].strip() for k in range(9)]
        elif label == "SYS / # / OBS TYPES":
            if line[0:1].strip():
                v3_sys = line[0]
                v3_n = _num(line[3:6], int, source, i, label)
                hdr["types"][v3_sys] = []
            elif not v3_sys:
                raise RecordFormatError("continuation line before any system", file=source,
                                        line=i + 1, field=label)
            codes = [line[7 + 4 * k:10 + 4 * k].strip() for k in range(13)]
            hdr["types"][v3_sys] += [c for c in codes if c][:v3_n - len(hdr["types"][v3_sys])]
        elif label == "APPROX POSITION XYZ":
            xyz = np.array([_num(line[14 * k:14 * k + 14], float, source, i, label) for k in range(3)])
            hdr["position"] = xyz if np.linalg.norm(xyz) > 6.0e6 else None
        elif label == "INTERVAL":
            v = _num(line[:10], float, source, i, label)
            hdr["interval"] = v if v > 0 else None
        elif label == "TIME OF FIRST OBS":
            hdr["time_system"] = line[48:51].strip() or None
        elif label == "REC # / TYPE / VERS":
            hdr["receiver"] = line[20:40].strip()
        elif label == "GLONASS SLOT / FRQ #":
            # "R01  1 R02 -4 ..." (writers differ in the count's width: found by pattern)
            for slot, k in _GLO_SLOT.findall(line[:60]):
                if -7 <= int(k) <= 6:
                    hdr["glonass_k"][f"R{int(slot):02d}"] = int(k)
                else:
                    hdr["warnings"].append(f"GLONASS R{slot}: frequency number {k} outside "
                                           "-7..+6 ignored")
    if end is None:
        raise RecordFormatError("no 'END OF HEADER' line", file=source, field="header")
    if hdr["position"] is None:
        hdr["warnings"].append("no usable APPROX POSITION XYZ (missing, zero or not on the "
                               "Earth): the record holds no site")
    if version < 3:
        codes = [c for c in pending_v2 if c][:n_v2]
        if n_v2 <= 0 or len(codes) != n_v2:
            raise RecordFormatError(f"'# / TYPES OF OBSERV' announces {n_v2} types and lists "
                                    f"{len(codes)}", file=source, field="# / TYPES OF OBSERV")
        hdr["types"] = {"*": codes}
        hdr["system"] = file_system if file_system != "M" else "G"
    else:
        if not hdr["types"]:
            raise RecordFormatError("no 'SYS / # / OBS TYPES' line", file=source,
                                    field="SYS / # / OBS TYPES")
    if hdr["time_system"] is None:
        hdr["time_system"] = {"R": "GLO", "E": "GAL", "C": "BDT", "J": "QZS"}.get(file_system, "GPS")
    if hdr["time_system"] not in ("GPS", "GAL", "QZS", "BDT", "GLO", "UTC", "IRN"):
        raise RecordFormatError(f"unknown time system '{hdr['time_system']}'", file=source,
                                field="TIME OF FIRST OBS")
    hdr["end"] = end
    return hdr


# --- epochs -----------------------------------------------------------------------------

def _epoch_time(line: str, v3: bool, source: str, i: int) -> tuple:
    try:
        if v3:
            y, mo, d, h, mi = (int(line[2:6]), int(line[7:9]), int(line[10:12]),
                               int(line[13:15]), int(line[16:18]))
            sec = float(line[18:29])
        else:
            yy = int(line[1:3])
            y = yy + (2000 if yy < 80 else 1900)
            mo, d, h, mi = int(line[4:6]), int(line[7:9]), int(line[10:12]), int(line[13:15])
            sec = float(line[15:26])
        if not (0.0 <= sec < 61.0 and 0 <= mi < 60):
            raise ValueError
        base = datetime(y, mo, d, h, tzinfo=UTC).timestamp()
    except ValueError:
        raise RecordFormatError("bad date or time in the epoch line", file=source, line=i + 1,
                                field="epoch") from None
    return base + 60.0 * mi + sec


def _walk_v2(lines: list[str], hdr: dict, source: str):
    n_types = len(hdr["types"]["*"])
    per_sat = math.ceil(n_types / 5)
    default_sys = hdr.get("system", "G")
    ids: dict[str, str] = {}
    epochs, flags, rec_line, rec_sat, rec_epoch, epoch_lines = [], [], [], [], [], []
    i, n = hdr["end"] + 1, len(lines)
    while i < n:
        line = lines[i]
        if not line.strip():
            i += 1
            continue
        if len(line) < 29 or not line[28].isdigit():
            raise RecordFormatError("expected an epoch line (yy mm dd hh mm ss flag count)",
                                    file=source, line=i + 1, field="epoch")
        flag = int(line[28])
        count = _num(line[29:32], int, source, i, "number of satellites") if line[29:32].strip() else 0
        if 2 <= flag <= 5:
            _check_event(lines, i, count, source)
            i += 1 + count
            continue
        if not _EPOCH2.match(line):
            raise RecordFormatError("expected an epoch line (yy mm dd hh mm ss flag count)",
                                    file=source, line=i + 1, field="epoch")
        sats = []
        for k in range(count):
            j = i + k // 12
            if j >= n:
                raise RecordFormatError("file ends inside an epoch's satellite list",
                                        file=source, line=j)
            raw = lines[j][32 + 3 * (k % 12):35 + 3 * (k % 12)]
            sid = ids.get(raw)
            if sid is None:
                sid = ids[raw] = _sat_id(raw, default_sys, source, j)
            sats.append(sid)
        first_rec = i + max(1, math.ceil(count / 12))
        if flag == 6:
            i = first_rec + count * per_sat
            continue
        if first_rec + count * per_sat > n:
            raise RecordFormatError("file ends inside an epoch's observations", file=source,
                                    line=n)
        t = _epoch_time(line, False, source, i)
        e = len(epochs)
        epochs.append(t)
        flags.append(flag)
        epoch_lines.append(i)
        rec_line.extend(range(first_rec, first_rec + count * per_sat, per_sat))
        rec_sat.extend(sats)
        rec_epoch.extend([e] * count)
        i = first_rec + count * per_sat
    hdr["epoch_lines"] = epoch_lines
    return epochs, flags, rec_line, rec_sat, rec_epoch


def _walk_v3(lines: list[str], hdr: dict, source: str):
    epochs, flags, rec_line, rec_sat, rec_epoch, epoch_lines = [], [], [], [], [], []
    i, n = hdr["end"] + 1, len(lines)
    known = set(hdr["types"])
    ids: dict[str, str] = {}
    while i < n:
        line = lines[i]
        if not line.strip():
            i += 1
            continue
        if not line.startswith(">") or len(line) < 35 or not line[31].isdigit():
            raise RecordFormatError("expected an epoch line starting with '>'", file=source,
                                    line=i + 1, field="epoch")
        flag = int(line[31])
        count = _num(line[32:35], int, source, i, "number of satellites") if line[32:35].strip() else 0
        if 2 <= flag <= 5:
            _check_event(lines, i, count, source)
            i += 1 + count
            continue
        if flag == 6:
            i += 1 + count
            continue
        if not _EPOCH3.match(line):
            raise RecordFormatError("bad epoch line", file=source, line=i + 1, field="epoch")
        if i + count >= n:
            raise RecordFormatError("file ends inside an epoch's observations", file=source, line=n)
        t = _epoch_time(line, True, source, i)
        e = len(epochs)
        epochs.append(t)
        flags.append(flag)
        epoch_lines.append(i)
        for k in range(1, count + 1):
            raw = lines[i + k][:3]
            sid = ids.get(raw)
            if sid is None:
                sid = ids[raw] = _sat_id(raw, "G", source, i + k)
            if sid[0] not in known:
                raise RecordFormatError(f"satellite {sid} of a system the header lists no "
                                        "observation types for", file=source, line=i + k + 1)
            rec_line.append(i + k)
            rec_sat.append(sid)
            rec_epoch.append(e)
        i += 1 + count
    hdr["epoch_lines"] = epoch_lines
    return epochs, flags, rec_line, rec_sat, rec_epoch


def _check_event(lines: list[str], i: int, count: int, source: str) -> None:
    """Event records (flags 2-5) are header lines; a change of observation types inside
    the file is refused (the arrays hold one list)."""
    for j in range(i + 1, min(i + 1 + count, len(lines))):
        if _label(lines[j]) in ("# / TYPES OF OBSERV", "SYS / # / OBS TYPES"):
            raise RecordFormatError("the observation types change inside the file (not "
                                    "supported: split the file there)", file=source, line=j + 1)


_SYSTEMS = set("GRECJSI")


def _sat_id(text: str, default_sys: str, source: str, line: int) -> str:
    s = text[:1].strip() or default_sys
    num = text[1:3].strip()
    if s not in _SYSTEMS or not num.isdigit():
        raise RecordFormatError(f"'{text}' is not a satellite (system letter and number)",
                                file=source, line=line + 1, field="satellite")
    return f"{s}{int(num):02d}"


def _duplicates(r_sat: np.ndarray, r_epoch: np.ndarray) -> int | None:
    if r_sat.size < 2:
        return None
    key = r_epoch * (int(r_sat.max()) + 1) + r_sat
    uniq, counts = np.unique(key, return_counts=True)
    if np.all(counts == 1):
        return None
    return int(np.flatnonzero(np.isin(key, uniq[counts > 1]))[1])


# --- fields -----------------------------------------------------------------------------

def _gather(buf: np.ndarray, starts: np.ndarray, ends: np.ndarray, lines: np.ndarray,
            col: int) -> np.ndarray:
    """(N, 16) bytes of the field at ``col`` of each line; spaces past the line's end."""
    ok_line = lines < starts.size
    ln = np.where(ok_line, lines, 0)
    pos = starts[ln][:, None] + col + np.arange(_FIELD)[None, :]
    inside = (pos < ends[ln][:, None]) & ok_line[:, None]
    out = np.full(pos.shape, 32, dtype=np.uint8)
    out[inside] = buf[pos[inside]]
    return out


def _to_float(chars: np.ndarray, lines: np.ndarray, code: str, source: str) -> np.ndarray:
    """Values of (N, 14) field bytes; blank or 0 -> NaN; anything else that is not a
    number is an error naming the line."""
    blank = np.all(chars == 32, axis=1)
    work = chars.copy()
    work[blank] = np.frombuffer(b"           nan", dtype=np.uint8)
    strings = np.ascontiguousarray(work).view("S14").ravel()
    try:
        values = strings.astype(np.float64)
    except ValueError:
        values = np.empty(strings.size)
        for k, s in enumerate(strings):
            try:
                values[k] = float(s)
            except ValueError:
                raise RecordFormatError(f"'{s.decode('latin-1').strip()}' is not a number",
                                        file=source, line=int(lines[k]) + 1, field=code) from None
    values[~np.isfinite(values) | (values == 0.0)] = np.nan
    return values


def _to_unix(epochs: np.ndarray, time_system: str) -> np.ndarray:
    """UTC POSIX seconds of epoch tags written in the file's time system."""
    if time_system in ("GLO", "UTC"):
        return epochs     # GLONASS time tags are UTC [mem: RINEX 2.11 and 3.03 text on time systems]
    gps_s = epochs - GPS_EPOCH_UNIX_S        # calendar read as if UTC -> continuous GPS seconds
    if time_system == "BDT":
        gps_s = gps_s - BDT_MINUS_GPST_S
    return np.asarray(gps_to_unix_s(gps_s), dtype=float)

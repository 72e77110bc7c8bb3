"""Reader for SP3-a/b/c precise orbit files, with Lagrange interpolation.

Layout [pub: "The Extended Standard Product 3 Orbit Format (SP3-c)", Hilla 2002]: line 1
``#cP`` (version, P = positions only / V = with velocities) with the start epoch, the
number of epochs, coordinate system, orbit type and agency; line 2 ``##`` GPS week and
interval; ``+`` lines the satellite list; ``%c`` the time system (columns 10-12: GPS, GLO,
GAL, TAI, UTC; SP3-a/b always GPS); then for every epoch a ``*`` line followed by ``P``
(position km, clock microseconds) and optional ``V`` (velocity dm/s, clock rate 1e-4
us/s) lines. ``0.000000`` coordinates and ``999999.999999`` clocks mark missing values.

Output is in metres, metres per second and seconds on a continuous GPS time axis
(``gps_s``, seconds since 1980-01-06 00:00 GPS). Compressed files are accepted: ``.Z``
(Unix ``compress``) and ``.gz``, recognised from their first bytes
(:mod:`core.orbits.readers.compressed`).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import UTC, datetime
from pathlib import Path

import numpy as np

from ...ground.constants import GPS_EPOCH_UNIX_S
from ...ground.errors import OrbitFormatError
from ...ground.timeutil import unix_to_gps_s
from .compressed import expand

_BAD_CLOCK_US = 999_999.0


@dataclass
class Sp3Orbits:
    """Precise orbits on the file's epochs: pos (S, T, 3) m, clock (S, T) s, NaN = missing."""

    path: str
    version: str
    sat_ids: list[str]
    gps_s: np.ndarray               # (T,) continuous GPS seconds
    pos_m: np.ndarray               # (S, T, 3) Earth-fixed (the file's frame, e.g. IGS05/IGb08)
    clock_s: np.ndarray             # (S, T)
    vel_m_s: np.ndarray | None      # (S, T, 3) when the file carries V records
    time_system: str
    coordinate_system: str
    agency: str
    interval_s: float
    warnings: list[str] = field(default_factory=list)

    def index(self, sat_id: str) -> int:
        return self.sat_ids.index(sat_id)

    def select(self, sat_ids: list[str]) -> Sp3Orbits:
        idx = [self.index(s) for s in sat_ids]
        return Sp3Orbits(self.path, self.version, list(sat_ids), self.gps_s, self.pos_m[idx],
                         self.clock_s[idx], None if self.vel_m_s is None else self.vel_m_s[idx],
                         self.time_system, self.coordinate_system, self.agency, self.interval_s,
                         list(self.warnings))


def _read_text(p: Path) -> str:
    name = str(p)
    try:
        raw = p.read_bytes()
    except OSError as exc:
        raise OrbitFormatError(f"cannot read the file: {exc.strerror or exc}", file=name) from None
    return expand(raw, name).decode("ascii", errors="replace")


def _epoch_gps_s(text: str, time_system: str, name: str, lineno: int) -> float:
    parts = text[1:].split()
    try:
        y, mo, d, h, mi = (int(v) for v in parts[:5])
        sec = float(parts[5])
        calendar_s = datetime(y, mo, d, h, mi, tzinfo=UTC).timestamp() + sec
    except (ValueError, IndexError):
        raise OrbitFormatError(f"bad epoch line '{text.strip()}'", file=name, line=lineno) from None
    if time_system == "UTC":
        return float(unix_to_gps_s(calendar_s))
    offset = -19.0 if time_system == "TAI" else 0.0   # GPS = TAI - 19 s [pub: IERS]
    return calendar_s - GPS_EPOCH_UNIX_S + offset


def read_sp3(path: str | Path) -> Sp3Orbits:
    """Read an SP3 file (plain, .Z or .gz). GLONASS-time files are refused (they need the
    UTC(SU) offset, which acqplan does not carry)."""
    p = Path(path)
    name = str(p)
    lines = _read_text(p).splitlines()
    if not lines or not lines[0].startswith("#"):
        raise OrbitFormatError("not an SP3 file (the first line must start with '#')",
                               file=name, line=1)
    version = lines[0][1:2]
    if version not in ("a", "b", "c", "d"):
        raise OrbitFormatError(f"unknown SP3 version '{version}'", file=name, line=1)
    coord = lines[0][46:51].strip()
    agency = lines[0][56:60].strip()
    interval = np.nan
    if len(lines) > 1 and lines[1].startswith("##"):
        try:
            interval = float(lines[1][24:38])
        except ValueError:
            interval = np.nan
    time_system = "GPS"
    declared: list[str] = []
    first_epoch = None
    seen_tc = False
    for k, text in enumerate(lines):
        if text.startswith("+ "):
            body = text[9:60]
            declared += [body[j:j + 3].replace(" ", "0") for j in range(0, len(body), 3)
                         if body[j:j + 3].strip() not in ("", "0", "00")]
        elif text.startswith("%c") and version in ("c", "d") and not seen_tc:
            seen_tc = True
            if text[9:12].strip() not in ("", "ccc"):
                time_system = text[9:12].strip()
        elif text.startswith("*"):
            first_epoch = k
            break
    if first_epoch is None:
        raise OrbitFormatError("no epoch ('*') lines", file=name)
    if time_system == "GLO":
        raise OrbitFormatError("SP3 files in GLONASS time are not supported", file=name,
                               line=first_epoch + 1)
    if time_system not in ("GPS", "GAL", "TAI", "UTC", "BDT", "QZS", "IRN"):
        raise OrbitFormatError(f"unknown SP3 time system '{time_system}'", file=name)
    if time_system == "BDT":
        # BDT = GPS - 14 s [pub: BeiDou ICD 3.1]
        bdt_offset = 14.0
    else:
        bdt_offset = 0.0

    # Satellite IDs: SP3-a files write blanks for 'G'.
    def norm(sid: str) -> str:
        sid = sid.replace(" ", "0")
        return ("G" + sid[1:]) if sid[0] == "0" else sid

    sat_ids = [norm(s) for s in declared]
    seen: dict[str, int] = {s: i for i, s in enumerate(sat_ids)}
    epochs: list[float] = []
    pos_rows: list[tuple[int, int, float, float, float, float]] = []
    vel_rows: list[tuple[int, int, float, float, float]] = []
    warnings: list[str] = []
    for k in range(first_epoch, len(lines)):
        text = lines[k]
        tag = text[:1]
        if tag == "*":
            epochs.append(_epoch_gps_s(text, time_system, name, k + 1) + bdt_offset)
        elif tag in ("P", "V"):
            sid = norm(text[1:4])
            if sid not in seen:
                seen[sid] = len(sat_ids)
                sat_ids.append(sid)
                warnings.append(f"{name}: {sid} is not in the header satellite list")
            try:
                x, y, z = float(text[4:18]), float(text[18:32]), float(text[32:46])
                c = float(text[46:60]) if text[46:60].strip() else _BAD_CLOCK_US
            except ValueError:
                raise OrbitFormatError(f"bad {tag} record '{text.strip()}'", file=name,
                                       line=k + 1) from None
            if tag == "P":
                pos_rows.append((seen[sid], len(epochs) - 1, x, y, z, c))
            else:
                vel_rows.append((seen[sid], len(epochs) - 1, x, y, z))
        elif text.startswith("EOF"):
            break
    n_s, n_t = len(sat_ids), len(epochs)
    pos = np.full((n_s, n_t, 3), np.nan)
    clk = np.full((n_s, n_t), np.nan)
    if pos_rows:
        arr = np.array(pos_rows)
        si, ti = arr[:, 0].astype(int), arr[:, 1].astype(int)
        xyz = arr[:, 2:5] * 1000.0
        ok = np.any(arr[:, 2:5] != 0.0, axis=1)
        pos[si[ok], ti[ok]] = xyz[ok]
        c = arr[:, 5]
        good_c = np.abs(c) < _BAD_CLOCK_US * 0.999
        clk[si[good_c], ti[good_c]] = c[good_c] * 1e-6
    vel = None
    if vel_rows:
        vel = np.full((n_s, n_t, 3), np.nan)
        arr = np.array(vel_rows)
        si, ti = arr[:, 0].astype(int), arr[:, 1].astype(int)
        ok = np.any(arr[:, 2:5] != 0.0, axis=1)
        vel[si[ok], ti[ok]] = arr[ok, 2:5] * 0.1     # dm/s -> m/s
    gps = np.array(epochs, dtype=float)
    if not np.isfinite(interval) and n_t > 1:
        interval = float(np.median(np.diff(gps)))
    return Sp3Orbits(name, version, sat_ids, gps, pos, clk, vel, time_system, coord, agency,
                     float(interval), warnings)


def lagrange_weights(nodes: np.ndarray, t: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Lagrange basis values and their time derivatives at t for each row of nodes.

    ``nodes`` (T, n) and ``t`` (T,) -> weights (T, n) and d(weights)/dt (T, n). The
    derivative uses the node-safe form l_j' = sum_k 1/(t_j - t_k) prod_{m != j,k} (t - t_m)/(t_j - t_m).
    """
    n = nodes.shape[1]
    diff_t = t[:, None] - nodes                                   # (T, n)
    den = nodes[:, :, None] - nodes[:, None, :]                   # (T, n, n): t_j - t_m
    eye = np.eye(n, dtype=bool)
    den_safe = np.where(eye, 1.0, den)
    ratio = np.where(eye[None], 1.0, diff_t[:, None, :] / den_safe)   # (T, j, m)
    w = np.prod(ratio, axis=2)
    dw = np.zeros_like(w)
    for k in range(n):
        r = ratio.copy()
        r[:, :, k] = 1.0
        term = np.prod(r, axis=2) / den_safe[:, :, k]
        term[:, k] = 0.0
        dw += term
    return w, dw


def interpolate_sp3(orbits: Sp3Orbits, gps_s: np.ndarray, n_nodes: int = 10
                    ) -> tuple[np.ndarray, np.ndarray]:
    """Position (m) and velocity (m/s), each (S, T, 3), by Lagrange interpolation over
    ``n_nodes`` epochs centred on each time (order n_nodes - 1; 10 nodes is the usual choice
    for 15-min IGS orbits [trade]). Velocity is the derivative of the same polynomial.
    Times outside the file's span, or whose window holds a missing value, give NaN."""
    t = np.atleast_1d(np.asarray(gps_s, dtype=float))
    ep = orbits.gps_s
    n_t = ep.size
    if n_t < n_nodes:
        raise OrbitFormatError(f"{n_t} epochs are too few for {n_nodes}-point interpolation",
                               file=orbits.path)
    right = np.searchsorted(ep, t)
    start = np.clip(right - n_nodes // 2, 0, n_t - n_nodes)
    idx = start[:, None] + np.arange(n_nodes)[None, :]              # (T, n)
    scale = orbits.interval_s if orbits.interval_s > 0 else 1.0
    t0 = ep[idx[:, 0]]
    w, dw = lagrange_weights((ep[idx] - t0[:, None]) / scale, (t - t0) / scale)
    win = orbits.pos_m[:, idx, :]                                   # (S, T, n, 3)
    pos = np.einsum("tn,stnk->stk", w, win)
    vel = np.einsum("tn,stnk->stk", dw, win) / scale
    outside = (t < ep[0]) | (t > ep[-1])
    pos[:, outside] = np.nan
    vel[:, outside] = np.nan
    return pos, vel


def interpolate_clock(orbits: Sp3Orbits, gps_s: np.ndarray) -> np.ndarray:
    """Satellite clock offset (s), (S, T), linear between epochs (clocks are not smooth
    enough for high-order interpolation)."""
    t = np.atleast_1d(np.asarray(gps_s, dtype=float))
    out = np.full((len(orbits.sat_ids), t.size), np.nan)
    for s in range(len(orbits.sat_ids)):
        ok = np.isfinite(orbits.clock_s[s])
        if ok.sum() >= 2:
            out[s] = np.interp(t, orbits.gps_s[ok], orbits.clock_s[s, ok], left=np.nan,
                               right=np.nan)
    return out

"""Data exports of a plan (JSON, CSV), the per-search list and the content hash.

Pure computation and file output, no Qt. Every file is written atomically
(:mod:`core.files.atomic`: temporary file in the target folder, then rename), so a failed
export never leaves a half-written file; failures raise :class:`~core.errors.InputError`.

Files
-----
``export_plan_json``
    The plan as the ``acqplan plan`` JSON schema (:func:`core.plan.plan_to_json`).
``export_windows_csv``
    One row per satellite and grid step where the satellite is in view (satellite-major,
    like the JSON): the first-search window, the narrowed window after the first
    acquisition, bins, code window, C/N0, Pd and expected search times. Numbers are rounded
    as in the JSON (Hz to 0.01, degrees to 0.001, seconds to 0.001).
``export_search_csv``
    One row per satellite in view: passes and the search the channel timeline gives it
    (values of :meth:`core.plan.SearchSummary.to_dict`); search columns are empty for a
    satellite that no channel searches in the window.

Content hash
------------
:func:`content_hash` identifies the inputs a sheet was made from: the SHA-256 of the
scenario file's bytes followed by the bytes of each orbit file in scenario order and then
the mapping file, if any. The printed short form is the first 10 hex digits, the same as::

    cat SCENARIO.toml ORBIT_1 ORBIT_2 ... [MAPPING] | sha256sum | cut -c1-10

When the plan's scenario differs from the file on disk (edited and not saved, or never
saved), the scenario part is the text :func:`core.plan.spec.scenario_to_toml` would save,
and the hash is marked as not from a saved file.
"""

from __future__ import annotations

import csv
import hashlib
import io
import json
import math
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np

from ..ground.display import iso_utc
from ..ground.errors import InputError
from ..plan.pipeline import Plan, plan_to_json
from ..plan.spec import Scenario
from ..search import bins as binlib
from ..search import detection
from .atomic import write_text_atomic, write_texts_atomic
from .scenario import load_scenario, scenario_to_toml

HASH_DIGITS = 10

WINDOWS_COLUMNS = [
    "time", "id", "signal", "elevation_deg", "azimuth_deg", "nominal_hz", "low_hz", "high_hz",
    "after_low_hz", "after_high_hz", "bin_width_hz", "bins", "bins_after", "code_window_chips",
    "code_window_after_chips", "cn0_dbhz", "pd", "expected_search_s", "expected_search_after_s",
]

SEARCH_COLUMNS = [
    "id", "signal", "system", "carrier_hz", "glonass_k", "source", "data_age_days", "passes",
    "in_view_from", "in_view_to", "max_elevation_deg", "search_start", "state", "low_hz",
    "high_hz", "bin_width_hz", "bins", "first_bin_hz", "last_bin_hz", "code_window_chips",
    "code_cells", "cn0_dbhz", "pd", "dwell_s", "expected_search_s", "channel", "acquired",
]

_INT_COLUMNS = {"bins", "bins_after", "glonass_k", "passes", "code_cells", "channel"}
_TEXT_COLUMNS = {"time", "id", "signal", "system", "source", "in_view_from", "in_view_to",
                 "search_start", "state", "acquired"}


# --------------------------------------------------------------------------- searches

@dataclass(frozen=True)
class SearchEntry:
    """One search segment of the channel timeline with the numbers a receiver needs.

    For a satellite's first search the values are those of its
    :class:`~core.plan.SearchSummary`; later searches of the same satellite (it set and
    rose again, or a search was abandoned) are taken from the plan's arrays at the grid
    step at or before the search start, the same way ``make_plan`` builds the summary.
    """

    channel: int
    sat_id: str
    signal_id: str
    system: str
    glonass_k: int | None
    state: str                       # "first" or "after"
    start_unix_s: float
    end_unix_s: float
    acquired: bool
    end_reason: str                  # "acquired", "set", "window_end"
    low_hz: float
    high_hz: float
    nominal_hz: float
    bin_width_hz: float
    bin_centres_hz: np.ndarray = field(repr=False)
    code_window_chips: float = math.nan
    code_cells: int = 0
    cn0_dbhz: float = math.nan
    pd: float = math.nan
    expected_search_s: float = math.nan
    elevation_deg: float = math.nan
    azimuth_deg: float = math.nan
    track_end_unix_s: float | None = None
    track_end_reason: str = ""
    # what the receiver is set to, and what to do if the search fails
    coherent_ms: float = math.nan
    noncoherent: int = 0
    threshold_db: float = math.nan   # detection threshold above the mean noise of the sum
    give_up_s: float = math.nan      # after the start: the search has found the signal
                                     # with GIVE_UP_QUANTILE probability by then
    spare: str | None = None         # satellite to re-task the channel to after give-up

    @property
    def bins(self) -> int:
        return int(self.bin_centres_hz.size)


GIVE_UP_QUANTILE = 0.95        # a search that has not succeeded by its 95th percentile gives up
SPARE_MIN_VIEW_S = 600.0       # a spare stays above the mask this long after the give-up


def _receiver_settings(plan: Plan, signal_id: str, bins: int, code_cells: int, pd: float
                       ) -> tuple[float, int, float, float]:
    """(coherent_ms, noncoherent, threshold dB above mean noise, give-up s after start)."""
    sc = plan.scenario
    coh_ms, n_nc = sc.search.integration_for(signal_id)
    pfa = sc.search.false_alarm_per_cell
    thr = float(detection.threshold_for_pfa(pfa, n_nc))
    thr_db = 10.0 * math.log10(thr / n_nc)          # the sum of n_nc noise powers has mean n_nc
    if not (math.isfinite(pd) and pd > 0.0) or bins < 1 or code_cells < 1:
        return coh_ms, n_nc, thr_db, math.nan
    pos = detection.search_positions(code_cells, bins, sc.receiver.correlators_per_channel,
                                     sc.receiver.parallel_code_search, pfa)
    give_up = float(detection.serial_search_quantile_s(
        pos.positions, coh_ms / 1000.0 * n_nc, min(pd, 1.0), pos.pfa_position,
        sc.search.false_alarm_penalty_s, GIVE_UP_QUANTILE))
    return coh_ms, n_nc, thr_db, give_up


def _assign_spares(plan: Plan, entries: list[SearchEntry]) -> None:
    """Name a spare per search: at the give-up time the highest satellite above the mask
    that no channel is working on, stays up SPARE_MIN_VIEW_S longer and is not already
    the spare of another search then."""
    t = plan.times.unix_s
    segs = plan.timeline.segments
    reserved: list[tuple[str, float]] = []
    for i, e in enumerate(entries):
        if not math.isfinite(e.give_up_s):
            continue
        t_give = e.start_unix_s + e.give_up_s
        if t_give >= t[-1]:
            continue
        k = plan.index_at(t_give)
        k_end = plan.index_at(min(t_give + SPARE_MIN_VIEW_S, float(t[-1])))
        busy = {g.sat_id for g in segs if g.start_unix_s <= t_give < g.end_unix_s}
        taken = {sid for sid, tr in reserved if abs(tr - t_give) < SPARE_MIN_VIEW_S}
        best, best_el = None, -math.inf
        for s, sid in enumerate(plan.ids):
            if sid == e.sat_id or sid in busy or sid in taken:
                continue
            if not plan.visible[s, k:k_end + 1].all():
                continue
            el = float(plan.prediction.elevation_deg[s, k])
            if el > best_el:
                best, best_el = sid, el
        if best is not None:
            entries[i] = replace(e, spare=best)
            reserved.append((best, t_give))


def search_entries(plan: Plan) -> list[SearchEntry]:
    """Every search segment of the plan's expected timeline, in time order (then channel)."""
    times = plan.times.unix_s
    n_t = times.size
    index = {sid: s for s, sid in enumerate(plan.ids)}
    segs = plan.timeline.segments
    first_seen: set[str] = set()
    out: list[SearchEntry] = []
    ordered = sorted(segs, key=lambda g: (g.start_unix_s, g.channel))
    for seg in ordered:
        if seg.kind != "search":
            continue
        s = index[seg.sat_id]
        sp = plan.satellites[s]
        k = int(np.clip(np.searchsorted(times, seg.start_unix_s, side="right") - 1, 0, n_t - 1))
        after = seg.search_state == "after"
        w = plan.windows_after if after else plan.windows_first
        summary = sp.search if seg.sat_id not in first_seen else None
        first_seen.add(seg.sat_id)
        if summary is not None and math.isclose(summary.start_unix_s, seg.start_unix_s):
            lo, hi, width = summary.low_hz, summary.high_hz, summary.bin_width_hz
            centres = summary.bin_centres_hz
            cw, cells = summary.code_window_chips, summary.code_cells
            cn0, pd, exp = summary.cn0_dbhz, summary.pd, summary.expected_search_s
        else:
            lo, hi = float(w.low_hz[s, k]), float(w.high_hz[s, k])
            width = plan.bin_design[sp.signal_id].bin_width_hz
            centres = binlib.bin_centres(lo, hi, width)
            cw = float((plan.code_window_after_chips if after else plan.code_window_first_chips)[s, k])
            cells = int((plan.code_cells_after if after else plan.code_cells_first)[s, k])
            cn0 = float(plan.cn0_dbhz[s, k])
            pd = float((plan.pd_after if after else plan.pd_first)[s, k])
            exp = float((plan.expected_search_after_s if after else plan.expected_search_first_s)[s, k])
        track = next((g for g in segs if g.kind == "track" and g.channel == seg.channel
                      and g.sat_id == seg.sat_id and abs(g.start_unix_s - seg.end_unix_s) < 1e-6),
                     None)
        coh_ms, n_nc, thr_db, give_up = _receiver_settings(plan, sp.signal_id, int(centres.size),
                                                           int(cells), float(pd))
        out.append(SearchEntry(
            coherent_ms=coh_ms, noncoherent=n_nc, threshold_db=thr_db, give_up_s=give_up,
            channel=seg.channel, sat_id=seg.sat_id, signal_id=sp.signal_id, system=sp.system,
            glonass_k=sp.glonass_k, state=seg.search_state or "first",
            start_unix_s=seg.start_unix_s, end_unix_s=seg.end_unix_s, acquired=seg.acquired,
            end_reason=seg.end_reason, low_hz=lo, high_hz=hi,
            nominal_hz=float(w.nominal_hz[s, k]), bin_width_hz=width, bin_centres_hz=centres,
            code_window_chips=cw, code_cells=cells, cn0_dbhz=cn0, pd=pd, expected_search_s=exp,
            elevation_deg=float(plan.prediction.elevation_deg[s, k]),
            azimuth_deg=float(plan.prediction.azimuth_deg[s, k]),
            track_end_unix_s=None if track is None else track.end_unix_s,
            track_end_reason="" if track is None else track.end_reason))
    _assign_spares(plan, out)
    return out


def in_view_satellites(plan: Plan) -> list[int]:
    """Indices (into plan.satellites) of the satellites in view at some grid step."""
    return [s for s in range(len(plan.satellites)) if bool(plan.visible[s].any())]


def view_intervals(plan: Plan, s: int) -> list[tuple[float, float]]:
    """In-view intervals of satellite ``s``: its passes (rise, set), or grid runs without passes."""
    sp = plan.satellites[s]
    if sp.passes:
        return [(p.rise_unix_s, p.set_unix_s) for p in sp.passes]
    vis = plan.visible[s]
    t = plan.times.unix_s
    out = []
    k = 0
    while k < vis.size:
        if vis[k]:
            j = k
            while j + 1 < vis.size and vis[j + 1]:
                j += 1
            out.append((float(t[k]), float(t[j])))
            k = j + 1
        else:
            k += 1
    return out


def max_elevation_deg(plan: Plan, s: int) -> float:
    """Highest elevation in the window: the passes' culminations, else the grid maximum."""
    sp = plan.satellites[s]
    if sp.passes:
        return max(p.max_elevation_deg for p in sp.passes)
    el = plan.prediction.elevation_deg[s][plan.visible[s]]
    return float(np.max(el)) if el.size else math.nan


# --------------------------------------------------------------------------- hash

@dataclass(frozen=True)
class ContentHash:
    hex_digest: str                  # full SHA-256
    from_saved_file: bool            # False: scenario text regenerated (unsaved changes)
    files: tuple[str, ...]           # the files hashed, in order

    @property
    def short(self) -> str:
        return self.hex_digest[:HASH_DIGITS]


def _scenario_bytes(sc: Scenario) -> tuple[bytes, bool]:
    if sc.path is not None:
        p = Path(sc.path)
        try:
            raw = p.read_bytes()
            if load_scenario(p, check_files=False) == sc:
                return raw, True
        except (OSError, InputError):
            pass
    return scenario_to_toml(sc).encode("utf-8"), False


def content_hash(scenario: Scenario) -> ContentHash:
    """SHA-256 over the scenario file and its orbit (and mapping) files; see the module doc."""
    h = hashlib.sha256()
    data, saved = _scenario_bytes(scenario)
    h.update(data)
    files = [str(scenario.path) if saved else "(scenario as planned)"]
    paths = list(scenario.resolved_orbit_files())
    m = scenario.resolved_mapping()
    if m is not None:
        paths.append(m)
    for p in paths:
        try:
            with open(p, "rb") as fh:
                for chunk in iter(lambda: fh.read(1 << 20), b""):
                    h.update(chunk)
        except OSError as err:
            raise InputError(f"cannot read for the content hash ({err.strerror})", file=str(p)) from None
        files.append(str(p))
    return ContentHash(h.hexdigest(), saved, tuple(files))


# --------------------------------------------------------------------------- rows

def _r(v: float | None, nd: int) -> float | None:
    if v is None:
        return None
    v = float(v)
    return round(v, nd) if math.isfinite(v) else None


def windows_rows(plan: Plan) -> list[dict]:
    """Rows of the windows CSV (see the module doc)."""
    iso = plan.times.iso()
    wf, wa = plan.windows_first, plan.windows_after
    rows = []
    for s, sp in enumerate(plan.satellites):
        width = plan.bin_design[sp.signal_id].bin_width_hz if sp.signal_id in plan.bin_design else math.nan
        for k in np.nonzero(plan.visible[s])[0]:
            rows.append({
                "time": iso[k], "id": sp.sat_id, "signal": sp.signal_id,
                "elevation_deg": _r(plan.prediction.elevation_deg[s, k], 3),
                "azimuth_deg": _r(plan.prediction.azimuth_deg[s, k], 3),
                "nominal_hz": _r(wf.nominal_hz[s, k], 2),
                "low_hz": _r(wf.low_hz[s, k], 2), "high_hz": _r(wf.high_hz[s, k], 2),
                "after_low_hz": _r(wa.low_hz[s, k], 2), "after_high_hz": _r(wa.high_hz[s, k], 2),
                "bin_width_hz": _r(width, 3),
                "bins": int(plan.bins_first[s, k]), "bins_after": int(plan.bins_after[s, k]),
                "code_window_chips": _r(plan.code_window_first_chips[s, k], 2),
                "code_window_after_chips": _r(plan.code_window_after_chips[s, k], 2),
                "cn0_dbhz": _r(plan.cn0_dbhz[s, k], 2), "pd": _r(plan.pd_first[s, k], 4),
                "expected_search_s": _r(plan.expected_search_first_s[s, k], 3),
                "expected_search_after_s": _r(plan.expected_search_after_s[s, k], 3),
            })
    return rows


def search_rows(plan: Plan) -> list[dict]:
    """Rows of the search CSV: one per satellite in view (see the module doc)."""
    rows = []
    for s in in_view_satellites(plan):
        sp = plan.satellites[s]
        iv = view_intervals(plan, s)
        row: dict = {c: None for c in SEARCH_COLUMNS}
        row.update({"id": sp.sat_id, "signal": sp.signal_id, "system": sp.system,
                    "carrier_hz": sp.carrier_hz, "glonass_k": sp.glonass_k, "source": sp.source_kind,
                    "data_age_days": round(sp.data_age_s / 86400.0, 3), "passes": len(iv),
                    "in_view_from": iso_utc(iv[0][0]) if iv else None,
                    "in_view_to": iso_utc(iv[-1][1]) if iv else None,
                    "max_elevation_deg": _r(max_elevation_deg(plan, s), 3)})
        if sp.search is not None:
            d = sp.search.to_dict()
            row.update({"search_start": d["start"], "state": d["state"], "low_hz": d["low_hz"],
                        "high_hz": d["high_hz"], "bin_width_hz": d["bin_width_hz"], "bins": d["bins"],
                        "first_bin_hz": d["first_bin_hz"], "last_bin_hz": d["last_bin_hz"],
                        "code_window_chips": d["code_window_chips"], "code_cells": d["code_cells"],
                        "cn0_dbhz": d["cn0_dbhz"], "pd": d["pd"], "dwell_s": d["dwell_s"],
                        "expected_search_s": d["expected_search_s"], "channel": d["channel"],
                        "acquired": d["acquired"]})
        rows.append(row)
    return rows


# --------------------------------------------------------------------------- writers

def _csv_text(rows: list[dict], columns: list[str]) -> str:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(columns)
    for row in rows:
        w.writerow(["" if row.get(c) is None else _cell(row[c]) for c in columns])
    return buf.getvalue()


def _cell(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, float):
        return repr(v)
    return str(v)


def _plan_json_text(plan: Plan, path: str | Path) -> str:
    try:
        text = json.dumps(plan_to_json(plan), indent=1, allow_nan=False)
    except ValueError as err:       # a NaN or infinity slipped into the schema
        raise InputError(f"the plan holds a value JSON cannot store ({err})", file=str(path)) from None
    return text + "\n"


def export_plan_json(plan: Plan, path: str | Path) -> Path:
    """The plan as the ``acqplan plan`` JSON (indent 1), written atomically."""
    return write_text_atomic(path, _plan_json_text(plan, path))


def export_windows_csv(plan: Plan, path: str | Path) -> Path:
    """Windows per satellite per step as CSV (columns ``WINDOWS_COLUMNS``), atomically."""
    return write_text_atomic(path, _csv_text(windows_rows(plan), WINDOWS_COLUMNS))


def export_search_csv(plan: Plan, path: str | Path) -> Path:
    """Search summary per satellite in view as CSV (columns ``SEARCH_COLUMNS``), atomically."""
    return write_text_atomic(path, _csv_text(search_rows(plan), SEARCH_COLUMNS))


def export_all(plan: Plan, folder: str | Path, stem: str) -> list[Path]:
    """Write ``STEM.json``, ``STEM_windows.csv`` and ``STEM_search.csv`` into ``folder``.

    All or nothing (:func:`core.files.atomic.write_texts_atomic`): the three texts are made
    and staged beside their targets first, and renamed into place only when all three are
    complete, so a full disk leaves the folder as it was. The folder is checked first.
    """
    out = Path(folder)
    if not out.is_dir():
        raise InputError("not an existing folder", file=str(out))
    if not stem or any(c in stem for c in "/\\") or stem in (".", ".."):
        raise InputError(f"'{stem}' is not a usable file name stem", field="--stem")
    json_path = out / f"{stem}.json"
    return write_texts_atomic([
        (json_path, _plan_json_text(plan, json_path)),
        (out / f"{stem}_windows.csv", _csv_text(windows_rows(plan), WINDOWS_COLUMNS)),
        (out / f"{stem}_search.csv", _csv_text(search_rows(plan), SEARCH_COLUMNS))])


# --------------------------------------------------------------------------- readers

def _convert(column: str) -> Callable[[str], object]:
    if column in _TEXT_COLUMNS:
        return str
    if column in _INT_COLUMNS:
        return int
    return float


def _read_csv(path: str | Path, columns: list[str]) -> list[dict]:
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except OSError as err:
        raise InputError(f"cannot read ({err.strerror})", file=str(p)) from None
    except UnicodeDecodeError:
        raise InputError("not UTF-8 text", file=str(p)) from None
    reader = csv.reader(io.StringIO(text))
    try:
        header = next(reader)
    except StopIteration:
        raise InputError("empty file (no header line)", file=str(p), line=1) from None
    missing = [c for c in columns if c not in header]
    if missing:
        raise InputError(f"missing column(s): {', '.join(missing)}", file=str(p), line=1)
    pos = {c: header.index(c) for c in columns}
    rows = []
    for line_no, rec in enumerate(reader, start=2):
        if not rec:
            continue
        if len(rec) != len(header):
            raise InputError(f"{len(rec)} fields, the header has {len(header)}", file=str(p),
                             line=line_no)
        row = {}
        for c in columns:
            raw = rec[pos[c]]
            if raw == "":
                row[c] = None
                continue
            try:
                row[c] = _convert(c)(raw)
            except ValueError:
                raise InputError(f"'{raw}' is not a valid value", file=str(p), line=line_no,
                                 field=c) from None
        rows.append(row)
    return rows


def read_windows_csv(path: str | Path) -> list[dict]:
    """Rows of a windows CSV, typed (numbers as float/int, empty cells as None)."""
    return _read_csv(path, WINDOWS_COLUMNS)


def read_search_csv(path: str | Path) -> list[dict]:
    """Rows of a search CSV, typed (numbers as float/int, empty cells as None)."""
    return _read_csv(path, SEARCH_COLUMNS)


__all__ = [
    "HASH_DIGITS", "SEARCH_COLUMNS", "WINDOWS_COLUMNS", "ContentHash", "SearchEntry",
    "content_hash", "export_all", "export_plan_json", "export_search_csv", "export_windows_csv",
    "in_view_satellites", "max_elevation_deg", "read_search_csv", "read_windows_csv",
    "search_entries", "search_rows", "view_intervals", "windows_rows",
]

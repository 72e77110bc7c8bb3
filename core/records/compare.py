"""The plan held against the receiver's record.

:func:`compare_record` takes a :class:`~core.plan.pipeline.Plan` (made by ``make_plan``
for the record's site and time) and a :class:`~core.records.record.Record`, predicts the
plan's satellites at the record's own epochs (``core.sky.predict``, the plan's orbits,
site and signals) and reports:

* the receiver's common frequency offset per epoch: the median over satellites of
  measured minus predicted Doppler, as a fraction of each satellite's carrier (so that
  several signals mix), given in ppb and in Hz at 1575.42 MHz. The receiver oscillator
  offset it implies has the opposite sign (apparent Doppler = true Doppler - offset x
  carrier, the convention of ``[receiver] oscillator_offset_ppb``, core.search.windows),
  and is held against the planned offset +- uncertainty;
* per satellite: the residual (measured - predicted - common offset x carrier), its
  median, 95th percentile and largest absolute value; whether each measured Doppler lay
  inside the window the plan searched at that time (before the plan's first acquisition
  the first window, after it the narrowed one, as ``Plan.search_grid_at``);
* measured C/N0 against the plan's elevation model, with a least-squares fit of its two
  end points (zenith and mask C/N0, the model is linear in them) to put back into
  ``[signal]``;
* first appearance in the record against the planned acquisition time.

A phase-rate Doppler is the mean over an interval, so its prediction is the mean too:
``-(range(t2) - range(t1)) / (wavelength (t2 - t1))`` [calc], exact whatever the
Doppler's curvature. Epochs are predicted in blocks of :data:`BLOCK_EPOCHS`, so memory
follows the record, not the block.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..ground.display import iso_utc
from ..ground.errors import ComputationError, InputError
from ..ground.geodesy import Site, ecef_to_geodetic
from ..ground.signals import SIGNALS
from ..ground.timeutil import iso_z
from ..plan.pipeline import Plan
from ..search.detection import cn0_at_elevation_dbhz
from ..sky.predict import predict
from .measure import Measurements, measure, nan_median
from .record import Record

BLOCK_EPOCHS = 2000
REFERENCE_HZ = SIGNALS["GPS-L1CA"].carrier_hz      # Hz figures of the common offset
MIN_SATS_FOR_OFFSET = 3       # fewer satellites at an epoch: no common offset there
# Extra distance allowed between the record's position and the plan's site on top of
# the plan's horizontal uncertainty (header positions are approximate) [trade].
PLACE_SLACK_M = 1_000.0


@dataclass(frozen=True)
class CommonOffset:
    time_unix_s: float
    hz: float                   # measured - predicted at 1575.42 MHz
    ppb: float                  # the same as a fraction of the carrier, 1e-9
    satellites: int

    def to_dict(self) -> dict:
        return {"time": iso_utc(self.time_unix_s), "hz": round(self.hz, 4),
                "ppb": round(self.ppb, 3), "satellites": self.satellites}


@dataclass(frozen=True)
class Cn0Fit:
    zenith_dbhz: float          # to put back as [signal] cn0_zenith_dbhz
    mask_dbhz: float            # to put back as [signal] cn0_at_mask_dbhz
    rms_db: float
    samples: int

    def to_dict(self) -> dict:
        return {"zenith_dbhz": round(self.zenith_dbhz, 2), "mask_dbhz": round(self.mask_dbhz, 2),
                "rms_db": round(self.rms_db, 2), "samples": self.samples}


@dataclass
class SatelliteComparison:
    sat_id: str
    signal_id: str
    doppler_source: str          # 'D1C', 'L1 rate', or '' (none)
    epochs: int                  # record epochs with an observation, above the plan's mask
    doppler_samples: int         # of them with a measured Doppler and a window
    residual_hz_median: float | None
    residual_hz_p95: float | None
    residual_hz_max: float | None
    inside_window_fraction: float | None
    outside_samples: int
    measured_low_hz: float | None
    measured_high_hz: float | None
    window_low_hz: float | None  # lowest / highest window edge over the compared samples
    window_high_hz: float | None
    cn0_dbhz_median: float | None
    cn0_model_dbhz_median: float | None
    first_seen_unix_s: float | None
    planned_acquisition_unix_s: float | None
    phase_breaks: int

    def to_dict(self) -> dict:
        return {"id": self.sat_id, "epochs": self.epochs,
                "residual_hz_median": _r(self.residual_hz_median, 4),
                "residual_hz_p95": _r(self.residual_hz_p95, 4),
                "residual_hz_max": _r(self.residual_hz_max, 4),
                "inside_window_fraction": _r(self.inside_window_fraction, 4),
                "cn0_dbhz_median": _r(self.cn0_dbhz_median, 2),
                "first_seen": iso_utc(self.first_seen_unix_s),
                "planned_acquisition": iso_utc(self.planned_acquisition_unix_s),
                "signal": self.signal_id, "doppler_source": self.doppler_source,
                "doppler_samples": self.doppler_samples, "outside_samples": self.outside_samples,
                "measured_low_hz": _r(self.measured_low_hz, 2),
                "measured_high_hz": _r(self.measured_high_hz, 2),
                "window_low_hz": _r(self.window_low_hz, 2),
                "window_high_hz": _r(self.window_high_hz, 2),
                "cn0_model_dbhz_median": _r(self.cn0_model_dbhz_median, 2),
                "phase_breaks": self.phase_breaks}


@dataclass
class ComparisonArrays:
    """Per compared satellite (rows of ``ids``) and record epoch in the plan's window, for
    views: times each Doppler stands for, measured and predicted Doppler, the window
    searched then, elevation and C/N0. NaN where there is nothing."""

    ids: list[str]
    epochs_unix_s: np.ndarray      # (E,)
    sample_unix_s: np.ndarray      # (S, E)
    measured_hz: np.ndarray
    predicted_hz: np.ndarray
    residual_hz: np.ndarray
    window_low_hz: np.ndarray
    window_high_hz: np.ndarray
    elevation_deg: np.ndarray
    cn0_dbhz: np.ndarray


@dataclass
class Comparison:
    record_source: str
    record_format: str
    plan_name: str
    common_offset: list[CommonOffset]
    common_offset_ppb_median: float | None
    oscillator_offset_ppb: float | None          # implied, in the sign of the scenario key
    planned_offset_ppb: float
    planned_uncertainty_ppb: float
    offset_inside_fraction: float | None         # epochs whose offset lies in the planned range
    satellites: list[SatelliteComparison]
    cn0_fit: Cn0Fit | None
    verdict: str
    held: bool
    arrays: ComparisonArrays
    warnings: list[str] = field(default_factory=list)

    def outside(self) -> list[SatelliteComparison]:
        """Satellites with at least one measured Doppler outside their window."""
        return [s for s in self.satellites if s.outside_samples > 0]

    def to_json(self) -> dict:
        return {"record": self.record_source, "record_format": self.record_format,
                "plan": self.plan_name,
                "common_offset": [c.to_dict() for c in self.common_offset],
                "common_offset_ppb_median": _r(self.common_offset_ppb_median, 3),
                "oscillator_offset_ppb": _r(self.oscillator_offset_ppb, 3),
                "planned_oscillator_offset_ppb": self.planned_offset_ppb,
                "planned_oscillator_uncertainty_ppb": self.planned_uncertainty_ppb,
                "offset_inside_fraction": _r(self.offset_inside_fraction, 4),
                "satellites": [s.to_dict() for s in self.satellites],
                "cn0_fit": None if self.cn0_fit is None else self.cn0_fit.to_dict(),
                "verdict": self.verdict, "warnings": self.warnings}


def _r(v: float | None, nd: int) -> float | None:
    return None if v is None or not math.isfinite(v) else round(float(v), nd)


# --- overlap ------------------------------------------------------------------------------

def check_overlap(plan: Plan, record: Record) -> tuple[np.ndarray, list[str]]:
    """Epochs of the record inside the plan's window; an error when there are none or the
    record was made too far from the plan's site."""
    sc = plan.scenario
    t = record.epochs_unix_s
    start, end = plan.times.start_unix_s, plan.times.end_unix_s
    inside = (t >= start - 1e-3) & (t <= end + 1e-3)
    if not inside.any():
        raise InputError(f"the record ({iso_z(t[0], 0)} to {iso_z(t[-1], 0)}) does not overlap "
                         f"the plan's window ({iso_z(start, 0)} to {iso_z(end, 0)}); "
                         "[time] start/end must cover the record", file=record.source,
                         field="time")
    notes = []
    if not inside.all():
        notes.append(f"{int((~inside).sum())} of {t.size} record epochs lie outside the plan's "
                     "window and are not compared")
    if record.position_ecef_m is None:
        notes.append("the record holds no position: its place is not checked against [site]")
    else:
        site = Site(sc.site.lat_deg, sc.site.lon_deg, sc.site.height_m)
        dist = float(np.linalg.norm(record.position_ecef_m - site.ecef_m))
        limit = sc.site.horizontal_uncertainty_km * 1000.0 + sc.site.vertical_uncertainty_m \
            + PLACE_SLACK_M
        if dist > limit:
            lat, lon, h = (float(v) for v in ecef_to_geodetic(record.position_ecef_m))
            raise InputError(f"the record was made at {lat:.4f}, {lon:.4f}, {h:.0f} m, "
                             f"{dist / 1000.0:.1f} km from the plan's site: beyond [site] "
                             f"horizontal_uncertainty_km = {sc.site.horizontal_uncertainty_km:g} km "
                             f"(+ vertical {sc.site.vertical_uncertainty_m:g} m + 1 km)",
                             file=record.source, field="site")
    return inside, notes


# --- the comparison ----------------------------------------------------------------------

def compare_record(plan: Plan, record: Record) -> Comparison:
    """Compare a record with the plan made for its site and time (see the module text)."""
    sc = plan.scenario
    inside, notes = check_overlap(plan, record)
    by_system = {sp.system: sp.signal_id for sp in plan.satellites}
    plan_k = {sp.sat_id: sp.glonass_k for sp in plan.satellites if sp.glonass_k is not None}
    sub = _restrict(record, inside)
    unplanned = sorted({sid for sid in record.sat_ids if sid[0] not in by_system})
    if unplanned:
        notes.append(f"{len(unplanned)} satellite(s) of systems the plan does not search "
                     f"({', '.join(sorted({s[0] for s in unplanned}))}) are not compared")
    meas = measure(sub, by_system, plan_k)
    notes += meas.warnings
    plan_ids = {sp.sat_id: s for s, sp in enumerate(plan.satellites)}
    common = [sid for sid in meas.sat_ids if sid in plan_ids and plan.satellites[plan_ids[sid]].healthy]
    missing = sorted(set(meas.sat_ids) - set(plan_ids))
    if missing:
        notes.append(f"{len(missing)} satellite(s) of the record have no orbit in the plan and "
                     f"are not compared: {_list(missing)}")
    unhealthy = sorted(sid for sid in meas.sat_ids if sid in plan_ids
                       and not plan.satellites[plan_ids[sid]].healthy)
    if unhealthy:
        notes.append(f"unhealthy in the orbit data, not compared: {_list(unhealthy)}")
    if not common:
        raise InputError("no satellite of the record is in the plan (check the record's systems "
                         "against [receiver] signals and the orbit files)", file=record.source,
                         field="satellites")
    p_rows = [plan_ids[sid] for sid in common]
    m_rows = np.array([meas.index(sid) for sid in common])
    arr = _predict_and_windows(plan, meas, p_rows, m_rows, record, notes)
    carrier = _carriers(plan, p_rows, record)
    offsets, shift_ppb = _common_offset(arr, plan, carrier, meas.sample_times_unix_s()[m_rows])
    arr.residual_hz = arr.measured_hz - arr.predicted_hz - shift_ppb[None, :] * 1e-9 * carrier[:, None]
    _windows(plan, p_rows, arr, shift_ppb)
    fit = _fit_cn0(arr, sc)
    acq = plan.timeline.acquisition_unix_s
    mask = sc.mask.elevation_deg
    sats = [_satellite(i, sid, arr, meas, int(m_rows[i]), plan, p_rows[i], acq.get(sid), mask)
            for i, sid in enumerate(common)]
    low = [s.sat_id for s in sats if s.epochs == 0]
    if low:
        notes.append(f"recorded only below the plan's {mask:g} deg mask, not compared: {_list(low)}")
    sats = [s for s in sats if s.epochs > 0]
    finite = np.array([o.ppb for o in offsets])
    median_ppb = float(np.median(finite)) if finite.size else None
    osc = None if median_ppb is None else -median_ppb
    lo = sc.receiver.oscillator_offset_ppb - sc.receiver.oscillator_uncertainty_ppb
    hi = sc.receiver.oscillator_offset_ppb + sc.receiver.oscillator_uncertainty_ppb
    inside_frac = None if not finite.size else float(np.mean((-finite >= lo) & (-finite <= hi)))
    held, verdict = _verdict(sats, osc, inside_frac, sc, fit, record)
    return Comparison(record.source, record.format, sc.name, offsets, median_ppb, osc,
                      sc.receiver.oscillator_offset_ppb, sc.receiver.oscillator_uncertainty_ppb,
                      inside_frac, sats, fit, verdict, held, arr, notes)


def _restrict(record: Record, keep: np.ndarray) -> Record:
    """The record limited to some epochs (views, no copy when all are kept)."""
    if keep.all():
        return record
    from dataclasses import replace

    return replace(record, epochs_unix_s=record.epochs_unix_s[keep],
                   obs={k: v[:, keep] for k, v in record.obs.items()},
                   lli={k: v[:, keep] for k, v in record.lli.items()},
                   power_failure=None if record.power_failure is None else record.power_failure[keep])


def _list(ids: list[str], n: int = 8) -> str:
    return ", ".join(ids[:n]) + (", ..." if len(ids) > n else "")


def _carriers(plan: Plan, p_rows: list[int], record: Record) -> np.ndarray:
    """Carrier of each compared satellite; GLONASS channels the plan lacks come from the
    record's header table (NaN when neither knows it)."""
    out = []
    for s in p_rows:
        sp = plan.satellites[s]
        if sp.system == "R" and sp.glonass_k is None:
            k = record.glonass_k.get(sp.sat_id)
            out.append(np.nan if k is None else SIGNALS[sp.signal_id].carrier_for(k))
        else:
            out.append(sp.carrier_hz)
    return np.array(out)


def _predict_and_windows(plan: Plan, meas: Measurements, p_rows: list[int], m_rows: np.ndarray,
                         record: Record, notes: list[str]) -> ComparisonArrays:
    orbits = plan.prepared.orbits  # type: ignore[attr-defined]
    ids = [plan.satellites[s].sat_id for s in p_rows]
    sub_orbits = orbits.select(ids)
    order = [sub_orbits.ids.index(sid) for sid in ids]
    by_system = {plan.satellites[s].system: plan.satellites[s].signal_id for s in p_rows}
    site = plan.prediction.site
    t = meas.epochs_unix_s
    n_s, n_e = len(ids), t.size
    pred_d = np.full((n_s, n_e), np.nan)
    rng = np.full((n_s, n_e), np.nan)
    el = np.full((n_s, n_e), np.nan)
    lam = None
    for a in range(0, n_e, BLOCK_EPOCHS):
        b = min(n_e, a + BLOCK_EPOCHS)
        pr = predict(sub_orbits, site, t[a:b], signals=by_system)
        ok = pr.valid[order]
        pred_d[:, a:b] = np.where(ok, pr.doppler_hz[order], np.nan)
        rng[:, a:b] = np.where(ok, pr.range_m[order], np.nan)
        el[:, a:b] = np.where(ok, pr.elevation_deg[order], np.nan)
        lam = pr.wavelength_m[order]
    carrier = _carriers(plan, p_rows, record)
    unknown_k = [sid for sid, c in zip(ids, carrier) if not np.isfinite(c)]
    if unknown_k:
        notes.append(f"GLONASS channel unknown for {_list(unknown_k)}: their Doppler is checked "
                     "against the window only (no residual, not in the common offset)")
    # GLONASS channel from the record where the plan has none: scale the k = 0 prediction
    plan_carrier = np.array([plan.satellites[s].carrier_hz for s in p_rows])
    scale = np.where(np.isfinite(carrier), carrier / plan_carrier, np.nan)
    measured = meas.doppler_hz[m_rows]
    from_phase = meas.from_phase[m_rows]
    dt = np.diff(t)
    mean_d = np.full((n_s, n_e), np.nan)
    if n_e > 1:
        mean_d[:, 1:] = -(rng[:, 1:] - rng[:, :-1]) / (lam[:, None] * dt[None, :])
    predicted = np.where(from_phase[:, None], mean_d, pred_d) * scale[:, None]
    sample_t = meas.sample_times_unix_s()[m_rows]
    nan = np.full((n_s, n_e), np.nan)
    return ComparisonArrays(ids, t, sample_t, measured, predicted, nan.copy(), nan.copy(),
                            nan.copy(), el, meas.cn0_dbhz[m_rows])


def _windows(plan: Plan, p_rows: list[int], arr: ComparisonArrays, shift_ppb: np.ndarray) -> None:
    """The window the plan searched at each sample time: before the plan's first
    acquisition the first window; after it the narrowed window, centred on the
    oscillator as the receiver measured it (the common offset) - the narrowing assumes
    the receiver has measured its oscillator on the first satellite, so its centre moves
    with the real oscillator, not the planned one. At epochs where the real oscillator
    lies outside the planned offset +- uncertainty the first search could not have found
    a satellite, no narrowing happens, and the first window is the one held."""
    grid = plan.times.unix_s
    acq0 = min(plan.timeline.acquisition_unix_s.values(), default=math.inf)
    rx = plan.scenario.receiver
    e0_ppb, de_ppb = rx.oscillator_offset_ppb, rx.oscillator_uncertainty_ppb
    finite = shift_ppb[np.isfinite(shift_ppb)]
    shift = np.where(np.isfinite(shift_ppb), shift_ppb, np.median(finite) if finite.size else -e0_ppb)
    in_plan = np.abs(-shift - e0_ppb) <= de_ppb          # the oscillator the plan allowed for
    for i, s in enumerate(p_rows):
        t = arr.sample_unix_s[i]
        carrier = plan.satellites[s].carrier_hz
        narrowed = (t >= acq0) & in_plan
        for w, sel, moved in ((plan.windows_first, ~narrowed, False), (plan.windows_after, narrowed, True)):
            if sel.any():
                centre = (shift[sel] + e0_ppb) * 1e-9 * carrier if moved else 0.0
                arr.window_low_hz[i, sel] = np.interp(t[sel], grid, w.low_hz[s]) + centre
                arr.window_high_hz[i, sel] = np.interp(t[sel], grid, w.high_hz[s]) + centre


def _common_offset(arr: ComparisonArrays, plan: Plan, carrier: np.ndarray,
                   sample_t: np.ndarray) -> tuple[list[CommonOffset], np.ndarray]:
    """Per epoch: median over satellites above the mask of (measured - predicted) /
    carrier, in ppb; the Hz figure at 1575.42 MHz."""
    mask = plan.scenario.mask.elevation_deg
    frac = (arr.measured_hz - arr.predicted_hz) / carrier[:, None] * 1e9
    frac = np.where(arr.elevation_deg >= mask, frac, np.nan)
    counts = np.isfinite(frac).sum(axis=0)
    shift = nan_median(frac, axis=0)
    shift = np.where(counts >= MIN_SATS_FOR_OFFSET, shift, np.nan)
    out = []
    for k in np.flatnonzero(np.isfinite(shift)):
        t_k = float(np.nanmedian(np.where(np.isfinite(frac[:, k]), sample_t[:, k], np.nan)))
        out.append(CommonOffset(t_k, float(shift[k]) * 1e-9 * REFERENCE_HZ, float(shift[k]),
                                int(counts[k])))
    return out, shift


def _fit_cn0(arr: ComparisonArrays, sc) -> Cn0Fit | None:
    """Least-squares zenith and mask C/N0 of the plan's model (linear in both end points
    for a given elevation, core.search.detection.cn0_at_elevation_dbhz), put back with
    the scenario's extra loss added (the plan subtracts it from the model)."""
    mask = sc.mask.elevation_deg
    el, cn0 = arr.elevation_deg, arr.cn0_dbhz
    use = np.isfinite(el) & np.isfinite(cn0) & (el >= mask)
    if use.sum() < 10:
        return None
    s_mask = math.sin(math.radians(mask))
    x = (np.sin(np.radians(el[use])) - s_mask) / (1.0 - s_mask)
    y = cn0[use]
    if np.ptp(x) < 0.2:
        return None
    design = np.stack([1.0 - x, x], axis=1)
    (m, z), *_ = np.linalg.lstsq(design, y, rcond=None)
    rms = float(np.sqrt(np.mean((design @ np.array([m, z]) - y) ** 2)))
    extra = sc.signal.extra_loss_db
    return Cn0Fit(float(z) + extra, float(m) + extra, rms, int(use.sum()))


def _satellite(i: int, sid: str, arr: ComparisonArrays, meas: Measurements, m: int, plan: Plan,
               p: int, planned_acq: float | None, mask: float) -> SatelliteComparison:
    sc = plan.scenario
    above = np.isfinite(arr.elevation_deg[i]) & (arr.elevation_deg[i] >= mask)
    obs = meas.observed[m] & above
    d = arr.measured_hz[i]
    use = above & np.isfinite(d) & np.isfinite(arr.window_low_hz[i])
    res = np.abs(arr.residual_hz[i][use & np.isfinite(arr.residual_hz[i])])
    ins = (d[use] >= arr.window_low_hz[i][use]) & (d[use] <= arr.window_high_hz[i][use])
    cn0 = arr.cn0_dbhz[i][above & np.isfinite(arr.cn0_dbhz[i])]
    model = None
    if cn0.size:
        el_c = arr.elevation_deg[i][above & np.isfinite(arr.cn0_dbhz[i])]
        model = float(np.median(cn0_at_elevation_dbhz(el_c, sc.signal.cn0_zenith_dbhz,
                                                      sc.signal.cn0_at_mask_dbhz, mask)))
    first = meas.epochs_unix_s[np.argmax(obs)] if obs.any() else None
    code = meas.codes.get(sid, ("", "", plan.satellites[p].signal_id))
    return SatelliteComparison(
        sat_id=sid, signal_id=plan.satellites[p].signal_id, doppler_source=code[0],
        epochs=int(obs.sum()), doppler_samples=int(use.sum()),
        residual_hz_median=float(np.median(res)) if res.size else None,
        residual_hz_p95=float(np.percentile(res, 95)) if res.size else None,
        residual_hz_max=float(np.max(res)) if res.size else None,
        inside_window_fraction=float(np.mean(ins)) if ins.size else None,
        outside_samples=int((~ins).sum()),
        measured_low_hz=float(np.min(d[use])) if use.any() else None,
        measured_high_hz=float(np.max(d[use])) if use.any() else None,
        window_low_hz=float(np.min(arr.window_low_hz[i][use])) if use.any() else None,
        window_high_hz=float(np.max(arr.window_high_hz[i][use])) if use.any() else None,
        cn0_dbhz_median=float(np.median(cn0)) if cn0.size else None,
        cn0_model_dbhz_median=model,
        first_seen_unix_s=None if first is None else float(first),
        planned_acquisition_unix_s=planned_acq, phase_breaks=int(meas.breaks[m]))


def _verdict(sats: list[SatelliteComparison], osc: float | None, inside_frac: float | None,
             sc, fit: Cn0Fit | None, record: Record) -> tuple[bool, str]:
    parts = []
    checked = [s for s in sats if s.doppler_samples > 0]
    outside = [s for s in checked if s.outside_samples > 0]
    held = True
    if not checked:
        parts.append("no measured Doppler in the record: windows not checked")
    elif outside:
        held = False
        parts.append(f"{len(outside)} of {len(checked)} satellites left their window ("
                     + ", ".join(f"{s.sat_id} {s.outside_samples}/{s.doppler_samples}"
                                 for s in outside[:6]) + (", ..." if len(outside) > 6 else "") + ")")
    else:
        parts.append(f"all {len(checked)} satellites' measured Doppler inside the planned windows")
    if osc is not None:
        o0, du = sc.receiver.oscillator_offset_ppb, sc.receiver.oscillator_uncertainty_ppb
        ok = inside_frac == 1.0
        held = held and ok
        parts.append(f"oscillator {osc:+.1f} ppb (median), {'inside' if ok else 'OUTSIDE'} the "
                     f"planned {o0:g} +- {du:g} ppb"
                     + ("" if ok else f" at {100 * (1 - (inside_frac or 0)):.0f} % of epochs"))
    if fit is not None:
        parts.append(f"C/N0 fit {fit.zenith_dbhz:.1f} dB-Hz at zenith, {fit.mask_dbhz:.1f} at the "
                     f"mask (planned {sc.signal.cn0_zenith_dbhz:g} / {sc.signal.cn0_at_mask_dbhz:g})")
    head = "plan held" if held and checked else ("plan not checked" if not checked else "plan missed")
    return held and bool(checked), f"{head}: " + "; ".join(parts)


def record_scenario(record: Record, orbit_files: list[str], *, name: str | None = None,
                    step_s: float = 30.0):
    """A scenario for a record given without one: the record's header position and its
    first/last epoch, the orbit files given, one default signal per system found in both
    the record and the orbit files, other keys at their defaults."""
    from ..orbits.readers import load_orbit_files
    from ..plan.spec import Scenario

    if record.position_ecef_m is None:
        raise InputError("the record holds no position (header position zero or no fix): "
                         "give a scenario file with [site]", file=record.source, field="site")
    lat, lon, h = (float(v) for v in ecef_to_geodetic(record.position_ecef_m))
    t0, t1 = float(record.epochs_unix_s[0]), float(record.epochs_unix_s[-1])
    step = float(min(3600.0, max(step_s, record.interval_s or step_s)))
    start = math.floor(t0 / step) * step
    end = max(math.ceil(t1 / step) * step, start + 2 * step)
    orbits = load_orbit_files(orbit_files, reference_time=start)
    if not record.sat_ids:
        raise InputError("the record holds no satellite observation (an NMEA log needs GSV "
                         "sentences)", file=record.source, field="satellites")
    systems = {e.info.system for e in orbits.entries} & set(record.systems)
    from ..ground.signals import DEFAULT_SIGNAL_FOR_SYSTEM

    signals = [DEFAULT_SIGNAL_FOR_SYSTEM[s] for s in sorted(systems) if s in DEFAULT_SIGNAL_FOR_SYSTEM]
    if not signals:
        raise ComputationError(
            f"the orbit files hold systems {', '.join(sorted({e.info.system for e in orbits.entries}))} "
            f"and the record {', '.join(record.systems)}: nothing in common to compare")
    return Scenario.from_dict({
        "name": name or f"record {Path(record.source).name}",
        "orbits": {"files": [str(p) for p in orbit_files]},
        "site": {"lat_deg": lat, "lon_deg": lon, "height_m": h,
                 "horizontal_uncertainty_km": 1.0, "vertical_uncertainty_m": 100.0},
        "time": {"start": iso_z(start, 0), "end": iso_z(end, 0), "step_s": step},
        "receiver": {"signals": signals},
        # coherent time: at least one code period of each signal (Galileo E1: 4 ms)
        "search": {"per_signal": {sid: {"coherent_ms": SIGNALS[sid].code_period_s * 1000.0}
                                  for sid in signals if SIGNALS[sid].code_period_s > 1e-3}},
    })

"""The plan held against a record: synthetic records with known answers.

The records are written here in RINEX 3.03 (D1C/D2I fields, GLONASS channel table) and
RINEX 2.11 (phase only, wrapped lines, more than 12 satellites) from the invented demo
plan's own geometry, with a receiver oscillator offset, a C/N0 law and faults put in by
the test. What must come back is what was put in [calc]: the offset, zero residuals, the
C/N0 end points, the windows held or missed as the put-in offset lies inside or outside
the planned uncertainty, and the first appearances.
"""

from __future__ import annotations

import json
from datetime import UTC, datetime

import numpy as np
import pytest

from core.api import load_scenario, make_plan, predict
from core.files.demo import write_demo
from core.ground.errors import InputError
from core.ground.geodesy import geodetic_to_ecef
from core.ground.timeutil import unix_to_gps_s
from core.records.compare import compare_record
from core.records.record import load_record
from core.search.detection import cn0_at_elevation_dbhz

CODES = {"G": ("1C", "GPS-L1CA"), "E": ("1C", "GAL-E1"), "C": ("2I", "BDS-B1I"),
         "R": ("1C", "GLO-L1OF")}


@pytest.fixture(scope="module")
def demo_plan(tmp_path_factory):
    path = write_demo(tmp_path_factory.mktemp("demo"))
    sc = load_scenario(path)
    return make_plan(sc, monte_carlo=False)


def _gps_calendar(unix_s: float) -> datetime:
    """Epoch tag in GPS time (RINEX 'GPS' time system) for a UTC instant."""
    gps_s = float(unix_to_gps_s(unix_s))
    return datetime.fromtimestamp(gps_s + 315_964_800.0, UTC)


def _geometry(plan, times: np.ndarray):
    orbits = plan.prepared.orbits
    by_system = {sp.system: sp.signal_id for sp in plan.satellites}
    return predict(orbits, plan.prediction.site, times, signals=by_system)


def _record_values(plan, times, osc_ppb, zenith, mask_cn0, rng=None):
    pr = _geometry(plan, times)
    mask = plan.scenario.mask.elevation_deg
    el = pr.elevation_deg
    vis = pr.valid & (el >= mask - 3.0)            # a receiver tracking a little below the mask
    e = osc_ppb * 1e-9
    apparent = (pr.carrier_hz[:, None] + pr.doppler_hz) / (1 + e) - pr.carrier_hz[:, None]
    cn0 = np.asarray(cn0_at_elevation_dbhz(np.where(pr.valid, el, -90), zenith, mask_cn0, mask))
    if rng is not None:
        cn0 = cn0 + rng.normal(0, 0.5, cn0.shape)
    return pr, vis, apparent, cn0


def write_rinex3(path, plan, times, osc_ppb=0.0, zenith=47.0, mask_cn0=33.0, start_late=None,
                 position=None, seed=1):
    """A RINEX 3.03 file with D and S fields for every satellite in view."""
    rng = np.random.default_rng(seed)
    pr, vis, apparent, cn0 = _record_values(plan, times, osc_ppb, zenith, mask_cn0, rng)
    start_late = start_late or {}
    ks = {sp.sat_id: sp.glonass_k for sp in plan.satellites if sp.system == "R" and sp.glonass_k is not None}
    pos = position if position is not None else plan.prediction.site.ecef_m
    head = ["     3.03           OBSERVATION DATA    M                   RINEX VERSION / TYPE",
            f"{pos[0]:14.4f}{pos[1]:14.4f}{pos[2]:14.4f}                  APPROX POSITION XYZ"]
    for sys_, (band, _) in CODES.items():
        head.append(f"{sys_}    2 D{band} S{band}".ljust(60) + "SYS / # / OBS TYPES")
    items = sorted(ks.items())
    head.append(f"{len(items):3d} " + "".join(f"{s} {k:2d} " for s, k in items[:8]).ljust(56)
                + "GLONASS SLOT / FRQ #")
    head.append("".ljust(60) + "END OF HEADER")
    body = []
    for k, t in enumerate(times):
        rows = [s for s in range(len(pr.ids)) if vis[s, k] and t >= start_late.get(pr.ids[s], -1e18)]
        d = _gps_calendar(t)
        sec = d.second + d.microsecond / 1e6
        body.append(f"> {d.year:4d} {d.month:02d} {d.day:02d} {d.hour:02d} {d.minute:02d}"
                    f"{sec:11.7f}  0{len(rows):3d}")
        for s in rows:
            body.append(f"{pr.ids[s]}{apparent[s, k]:14.3f}  {cn0[s, k]:14.3f}  ")
    path.write_text("\n".join(head + body) + "\n")
    return pr


def write_rinex2_phase(path, plan, times, osc_ppb=0.0, slip_at=None, jump_at=None):
    """A RINEX 2.11 file with L1, C1 and S1 in a wrapped 6-type layout (two lines per
    satellite): phase = range / lambda + e f t, so that -dL/dt is the apparent Doppler."""
    pr, vis, apparent, cn0 = _record_values(plan, times, osc_ppb, 46.0, 34.0)
    lam = pr.wavelength_m[:, None]
    e = osc_ppb * 1e-9
    phase = pr.range_m / lam + e * pr.carrier_hz[:, None] * (times - times[0])[None, :] + 1e5
    code = pr.range_m + 20.0
    if jump_at is not None:                        # sat, epoch: +1000 cycles, no flag
        phase[jump_at[0], jump_at[1]:] += 1000.0
    pos = plan.prediction.site.ecef_m
    head = ["     2.11           OBSERVATION DATA    M (MIXED)           RINEX VERSION / TYPE",
            f"{pos[0]:14.4f}{pos[1]:14.4f}{pos[2]:14.4f}                  APPROX POSITION XYZ",
            "     6    L1    C1    S1    L2    P2    S2                  # / TYPES OF OBSERV",
            "    30.000                                                  INTERVAL",
            "".ljust(60) + "END OF HEADER"]
    body = []
    gps = [s for s in range(len(pr.ids)) if pr.ids[s][0] in "GE"]
    for k, t in enumerate(times):
        rows = [s for s in gps if vis[s, k]]
        d = _gps_calendar(t)
        sec = d.second + d.microsecond / 1e6
        ids = "".join(pr.ids[s] for s in rows)
        lines = [f" {d.year % 100:02d} {d.month:2d} {d.day:2d} {d.hour:2d} {d.minute:2d}{sec:11.7f}"
                 f"  0{len(rows):3d}{ids[:36]}"]
        for c in range(36, len(ids), 36):
            lines.append(" " * 32 + ids[c:c + 36])
        body += lines
        for s in rows:
            lli = "1" if slip_at == (s, k) else " "
            body.append(f"{phase[s, k]:14.3f}{lli}7{code[s, k]:14.3f}  {cn0[s, k]:14.3f}  "
                        f"{'':16s}{'':16s}")
            body.append("")                        # L2 P2 S2 blank: the wrapped second line
    path.write_text("\n".join(head + body) + "\n")
    return pr


def _times(plan, first_s=600.0, n=61, step=30.0):
    return plan.times.start_unix_s + first_s + step * np.arange(n)


def test_rinex3_doppler_offset_inside_plan_holds(demo_plan, tmp_path):
    times = _times(demo_plan)
    late = {"G05": float(times[10]), "E11": float(times[20])}
    write_rinex3(tmp_path / "r.obs", demo_plan, times, osc_ppb=+300.0, start_late=late)
    res = compare_record(demo_plan, load_record(tmp_path / "r.obs"))
    # the oscillator put in: +300 ppb (apparent Doppler = (f + D)/(1 + e) - f)
    assert res.oscillator_offset_ppb == pytest.approx(300.0, abs=0.01)
    assert all(o.ppb == pytest.approx(-300.0, abs=0.01) for o in res.common_offset)
    assert all(o.hz == pytest.approx(-300e-9 * 1575.42e6, abs=0.02) for o in res.common_offset)
    compared = [s for s in res.satellites if s.doppler_samples]
    systems = {s.sat_id[0] for s in compared}
    assert systems == {"G", "E", "C", "R"}         # D1C, D2I (BeiDou B1I) and GLONASS with k
    for s in compared:
        # written with 3 decimals: residuals below 1 mHz + the e^2 term
        assert s.residual_hz_max < 0.005, s.sat_id
        assert s.inside_window_fraction == 1.0, s.sat_id
    assert res.verdict.startswith("plan held") and res.held
    by_id = {s.sat_id: s for s in res.satellites}
    for sid, t in late.items():
        if sid in by_id:
            assert by_id[sid].first_seen_unix_s == pytest.approx(t, abs=1e-3)
    # C/N0 law put in: 47 / 33 dB-Hz with 0.5 dB noise; the plan subtracts the scenario's
    # extra loss (2 dB) from its model, so the values to put back are 2 dB higher
    fit = res.cn0_fit
    assert fit is not None
    assert fit.zenith_dbhz == pytest.approx(47.0 + 2.0, abs=0.3)
    assert fit.mask_dbhz == pytest.approx(33.0 + 2.0, abs=0.3)
    assert fit.rms_db == pytest.approx(0.5, abs=0.1)
    js = res.to_json()
    for key in ("common_offset", "common_offset_ppb_median", "satellites", "cn0_fit", "verdict"):
        assert key in js
    assert set(js["satellites"][0]) >= {"id", "epochs", "residual_hz_median", "residual_hz_p95",
                                        "residual_hz_max", "inside_window_fraction",
                                        "cn0_dbhz_median", "first_seen", "planned_acquisition"}
    assert set(js["common_offset"][0]) >= {"time", "hz", "ppb"}
    json.dumps(js)


def test_offset_beyond_the_planned_uncertainty_misses(demo_plan, tmp_path):
    # from the plan's start: before the plan's first acquisition, the first windows apply
    times = _times(demo_plan, first_s=0.0, n=11, step=5.0)
    assert times[-1] < min(demo_plan.timeline.acquisition_unix_s.values())
    write_rinex3(tmp_path / "r.obs", demo_plan, times, osc_ppb=-2000.0)
    res = compare_record(demo_plan, load_record(tmp_path / "r.obs"))
    assert res.oscillator_offset_ppb == pytest.approx(-2000.0, abs=0.05)
    assert res.offset_inside_fraction == 0.0
    assert not res.held and res.verdict.startswith("plan missed")
    # 2000 ppb at L1 is 3.2 kHz: far beyond a window planned with +-500 ppb
    assert res.outside() and "OUTSIDE" in res.verdict
    assert all(s.inside_window_fraction == 0.0 for s in res.satellites if s.doppler_samples)
    # the residual after the common offset stays small all the same
    assert max(s.residual_hz_max for s in res.satellites if s.doppler_samples) < 0.05


def test_rinex2_phase_rate_wrapped_lines_slips_and_jumps(demo_plan, tmp_path):
    times = _times(demo_plan, n=41)
    pr = _geometry(demo_plan, times)
    vis = pr.valid & (pr.elevation_deg >= demo_plan.scenario.mask.elevation_deg)
    rows = [s for s in range(len(pr.ids)) if pr.ids[s][0] in "GE" and vis[s].all()]
    assert len(rows) > 12                           # epoch lines continue
    slip = (rows[0], 15)
    jump = (rows[1], 25)
    write_rinex2_phase(tmp_path / "p.obs", demo_plan, times, osc_ppb=120.0, slip_at=slip,
                       jump_at=jump)
    rec = load_record(tmp_path / "p.obs")
    res = compare_record(demo_plan, rec)
    assert res.oscillator_offset_ppb == pytest.approx(120.0, abs=0.01)
    by_id = {s.sat_id: s for s in res.satellites}
    slipped, jumped = by_id[pr.ids[slip[0]]], by_id[pr.ids[jump[0]]]
    assert slipped.phase_breaks == 1 and jumped.phase_breaks == 1
    # the 1000-cycle jump (33 Hz over 30 s) was found against the code rate, not kept
    assert jumped.residual_hz_max < 0.005
    for s in res.satellites:
        if s.doppler_samples:
            assert s.residual_hz_max < 0.005 and s.inside_window_fraction == 1.0
            assert s.doppler_source == "L1 rate"
    assert res.held


def test_after_first_acquisition_the_narrowed_window_follows_the_measured_oscillator(
        demo_plan, tmp_path):
    """Once acquired, the receiver knows its oscillator: the narrowed window is centred on
    the measured offset, so an offset near the edge of the planned +-500 ppb (700 Hz at
    L1, far more than the narrowed half-width) stays inside it [calc]. Beyond the planned
    range the first search could not succeed: the first window is held, and missed."""
    # a static receiver that knows its place within 1 km: narrow windows once acquired
    plan = make_plan(demo_plan.scenario.with_changes(
        site={"horizontal_uncertainty_km": 1.0, "vertical_uncertainty_m": 50.0},
        receiver={"max_horizontal_speed_m_s": 0.0, "max_vertical_speed_m_s": 0.0}),
        monte_carlo=False)
    acq0 = min(plan.timeline.acquisition_unix_s.values())
    times = acq0 + 60.0 + 30.0 * np.arange(11)
    k = plan.index_at(float(times[5]))
    half = 0.5 * (plan.windows_after.high_hz[:, k] - plan.windows_after.low_hz[:, k])
    assert np.nanmax(half[plan.visible[:, k]]) < 0.5 * 450e-9 * 1575.42e6
    write_rinex3(tmp_path / "r.obs", plan, times, osc_ppb=450.0)
    res = compare_record(plan, load_record(tmp_path / "r.obs"))
    assert all(s.inside_window_fraction == 1.0 for s in res.satellites if s.doppler_samples)
    assert res.held
    write_rinex3(tmp_path / "r2.obs", plan, times, osc_ppb=-2000.0)
    res = compare_record(plan, load_record(tmp_path / "r2.obs"))
    assert all(s.inside_window_fraction == 0.0 for s in res.satellites if s.doppler_samples)
    assert not res.held


def test_record_outside_the_plan_is_an_input_error(demo_plan, tmp_path):
    times = _times(demo_plan, n=5)
    write_rinex3(tmp_path / "r.obs", demo_plan, times)
    rec = load_record(tmp_path / "r.obs")
    late = rec.__class__(**{**rec.__dict__, "epochs_unix_s": rec.epochs_unix_s + 86_400.0})
    with pytest.raises(InputError) as err:
        compare_record(demo_plan, late)
    assert err.value.field == "time" and "does not overlap" in str(err.value)
    site = demo_plan.prediction.site
    far = np.asarray(geodetic_to_ecef(site.lat_deg + 3.0, site.lon_deg, site.height_m))
    write_rinex3(tmp_path / "far.obs", demo_plan, times, position=far)
    with pytest.raises(InputError) as err:
        compare_record(demo_plan, load_record(tmp_path / "far.obs"))
    assert err.value.field == "site" and "horizontal_uncertainty_km" in str(err.value)


# --- command line ---------------------------------------------------------------------------

def _cli(capsys, *argv):
    from planner_gui.cli import main

    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture(scope="module")
def demo_files(tmp_path_factory, demo_plan):
    d = tmp_path_factory.mktemp("cli")
    scenario = write_demo(d)
    times = _times(demo_plan, n=21)
    write_rinex3(d / "rec.23o", demo_plan, times, osc_ppb=150.0)
    return scenario, d / "rec.23o"


def test_cli_compare_table_csv_json(capsys, demo_files):
    scenario, rec = demo_files
    code, out, err = _cli(capsys, "compare", str(scenario), str(rec))
    assert code == 0, err
    assert out.strip().splitlines()[-1].startswith("plan held: all ")
    assert "cn0_zenith_dbhz = " in out
    code, out, _ = _cli(capsys, "compare", str(scenario), str(rec), "--format", "csv")
    assert code == 0 and out.splitlines()[0].startswith("id,signal,doppler_source,epochs")
    code, out, _ = _cli(capsys, "compare", str(scenario), "--record", str(rec), "--format", "json")
    js = json.loads(out)
    assert code == 0 and js["verdict"].startswith("plan held")
    assert js["common_offset_ppb_median"] == pytest.approx(-150.0, abs=0.01)
    assert js["cn0_fit"]["zenith_dbhz"] == pytest.approx(49.0, abs=0.5)


def test_cli_compare_without_scenario(capsys, demo_files, tmp_path):
    """--record/--orbits: the plan comes from the record's header position and epochs."""
    scenario, rec = demo_files
    orbit_dir = scenario.parent
    orbits = [str(orbit_dir / "demo_gps_yuma.txt"), str(orbit_dir / "demo_galileo.tle")]
    code, out, err = _cli(capsys, "compare", "--record", str(rec), "--orbits", orbits[0],
                          "--orbits", orbits[1], "--format", "json")
    assert code == 0, err
    js = json.loads(out)
    assert {s["id"][0] for s in js["satellites"]} == {"G", "E"}
    assert js["common_offset_ppb_median"] == pytest.approx(-150.0, abs=0.05)


@pytest.mark.parametrize("argv, text", [
    (["compare"], "no record given"),
    (["compare", "--record", "REC"], "--orbits"),
    (["compare", "a.toml"], "give the record"),
])
def test_cli_compare_argument_errors(capsys, argv, text):
    code, _, err = _cli(capsys, *argv)
    assert code == 2 and text in err and len(err.strip().splitlines()) == 1


def test_cli_compare_record_outside_the_plan_exits_2(capsys, demo_files, demo_plan, tmp_path):
    scenario, _ = demo_files
    times = _times(demo_plan, n=5) + 3 * 86_400.0
    write_rinex3(tmp_path / "late.23o", demo_plan, times)
    code, _, err = _cli(capsys, "compare", str(scenario), str(tmp_path / "late.23o"))
    assert code == 2 and "does not overlap" in err and len(err.strip().splitlines()) == 1


def test_cli_compare_help_and_no_qt():
    import subprocess
    import sys

    from conftest import REPO

    code = ("import sys; from planner_gui.cli import main\nrc = None\n"
            "try:\n    rc = main(['compare', '--help'])\nexcept SystemExit as e:\n    rc = e.code\n"
            "print('QT', any(m.startswith('PySide6') for m in sys.modules), rc or 0)")
    out = subprocess.run([sys.executable, "-c", code], cwd=REPO, capture_output=True, text=True,
                         timeout=60)
    assert "usage:" in out.stdout and out.stdout.strip().endswith("QT False 0")

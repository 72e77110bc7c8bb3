"""Test events along a drive: the demo loop, outage re-acquisitions, scenario keys."""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest

from core.files.demo import write_demo
from core.files.scenario import load_scenario
from core.ground.errors import InputError
from core.ground.geodesy import Site
from core.plan.events import (
    HOT_OSCILLATOR_UNCERTAINTY_PPB,
    drive_geometry,
    plan_drive,
    reacquire_time_uncertainty_s,
    single_site_equivalent,
)
from core.plan.pipeline import load_satellites, make_plan, plan_to_json
from core.search.windows import Uncertainty, doppler_windows
from core.sky.predict import earth_fixed_states, passes, predict


@pytest.fixture(scope="module")
def demo_dir(tmp_path_factory):
    d = tmp_path_factory.mktemp("demo")
    write_demo(d)
    return d


@pytest.fixture(scope="module")
def drive(demo_dir):
    sc = load_scenario(demo_dir / "demo_drive_scenario.toml")
    return sc, plan_drive(sc)


def test_demo_loop_and_events(drive):
    sc, dp = drive
    r = dp.drive.route
    assert 40_000 <= r.length_m <= 80_000            # issue 8: a loop of 40-80 km
    kinds = [s.kind for s in dp.drive.stretches]
    assert {"trees", "canyon", "outage"} <= set(kinds)
    assert len(dp.events) >= 4
    assert [e.event.kind for e in dp.events].count("reacquire") == 1     # made by the tunnel
    assert dp.events == sorted(dp.events, key=lambda e: e.event.unix_s)
    for e in dp.events:
        assert e.plan.times.start_unix_s == pytest.approx(e.event.unix_s)
        assert e.ttff_p95_s is not None and e.ttff_p95_s >= e.ttff_median_s
        assert e.first_fix_unix_s is not None and e.first_fix_unix_s > e.event.unix_s
    # [trade] a cold start takes longest; hot and re-acquisition are quick.
    assert dp.worst.event.kind == "cold"
    hot = [e for e in dp.events if e.event.kind in ("hot", "reacquire")]
    warm = [e for e in dp.events if e.event.kind == "warm"]
    assert max(e.ttff_median_s for e in hot) < min(e.ttff_median_s for e in warm)


PREDICTED = ("azimuth_deg", "elevation_deg", "range_m", "doppler_hz", "doppler_rate_hz_s",
             "elevation_rate_deg_s", "sat_speed_m_s", "valid", "sat_pos_ecef_m", "sat_vel_ecef_m_s")


def test_shared_propagation_is_each_events_own_prediction(demo_dir):
    # The drive propagates the satellites once for all its events; each event's prediction
    # must be bit for bit what predict gives for that event alone (its own grid, its own
    # node lattice, the vehicle's path), warnings included.
    sc = load_scenario(demo_dir / "demo_drive_scenario.toml")
    geo = drive_geometry(sc)
    _, by_system, _ = load_satellites(sc)
    assert len(geo.events) >= 5
    offsets = {round((eg.prepared.grid.unix_s[0] - sc.time.start_unix_s) % sc.time.step_s, 3)
               for eg in geo.events}
    assert len(offsets) >= 3          # events off the plan's lattice and off each other's
    for eg in geo.events:
        g = eg.prepared
        own = predict(g.orbits, eg.motion.path, g.grid, signals=by_system, keep_states=True)
        for name in PREDICTED:
            assert np.array_equal(getattr(g.prediction, name), getattr(own, name), equal_nan=True), \
                (eg.event.id, name)
        assert g.prediction.warnings == own.warnings
        # The passes, refined for all events in one bisection, are each event's own.
        seen = replace(own, elevation_deg=np.where(eg.blocked, -90.0, own.elevation_deg))
        alone = passes(g.orbits, eg.start_site, g.grid.start_unix_s, g.grid.end_unix_s,
                       mask_deg=sc.mask.elevation_deg, prediction=seen)
        assert alone and g.passes == alone, eg.event.id


def test_shared_propagation_when_the_guard_drops_a_satellite(demo_dir, monkeypatch):
    # A record corrupted after reading (the readers refuse it; the guard is the second
    # line, tests/test_result_guard.py): the coarse look drops it, and the events are
    # predicted, exactly as alone, over the satellites kept.
    import core.plan.events as events_mod

    real = events_mod.load_satellites

    def corrupted(sc):
        orbits, by_system, warnings = real(sc)
        k = next(i for i, e in enumerate(orbits.entries) if e.almanac is not None)
        e = orbits.entries[k]
        orbits.entries[k] = replace(e, almanac=replace(e.almanac, omega_dot_rad_s=1.570796327))
        return orbits, by_system, warnings

    monkeypatch.setattr(events_mod, "load_satellites", corrupted)
    sc = load_scenario(demo_dir / "demo_drive_scenario.toml")
    geo = drive_geometry(sc)
    dropped = [w for w in geo.warnings if "satellite dropped" in w]
    assert len(dropped) == 1
    gone = dropped[0].split(" ")[0]
    _, by_system, _ = real(sc)
    for eg in geo.events:
        g = eg.prepared
        assert gone not in g.orbits.ids
        own = predict(g.orbits, eg.motion.path, g.grid, signals=by_system, keep_states=True)
        for name in PREDICTED:
            assert np.array_equal(getattr(g.prediction, name), getattr(own, name), equal_nan=True), \
                (eg.event.id, name)


def test_shared_states_on_mixed_grids(demo_dir):
    # Several grids at once (on and off the node lattice, non-uniform, one of several
    # blocks): each gets exactly what predict propagates for it alone.
    sc = load_scenario(demo_dir / "demo_drive_scenario.toml")
    orbits, by_system, _ = load_satellites(sc)
    s0 = sc.time.start_unix_s
    grids = [s0 + 30.0 * np.arange(41), s0 + 748.27 + 30.0 * np.arange(41), s0 + 17.0 + 10.0 * np.arange(200),
             s0 + np.array([0.0, 17.0, 200.0, 201.0, 5000.0]), s0 + np.arange(0.0, 7201.0, 2.0), np.array([s0 + 9.5])]
    site = Site(sc.site.lat_deg, sc.site.lon_deg, sc.site.height_m)
    shared = earth_fixed_states(orbits, grids)
    for u, states in zip(grids, shared):
        own = predict(orbits, site, u, signals=by_system, keep_states=True)
        via = predict(orbits, site, u, signals=by_system, keep_states=True, states=states)
        for name in PREDICTED:
            assert np.array_equal(getattr(via, name), getattr(own, name), equal_nan=True), (u.size, name)
        assert via.warnings == own.warnings
    with pytest.raises(ValueError):
        predict(orbits, site, grids[1], signals=by_system, states=shared[0])


def test_canyon_blocks_satellites_across_the_street(drive):
    sc, dp = drive
    ev = next(e for e in dp.events if e.stretch == "Kressing old town")
    assert ev.blocked_ids and ev.visible_ids
    pred = ev.plan.prediction
    st = dp.drive.stretches[[s.name for s in dp.drive.stretches].index("Kressing old town")]
    h = st.building_height_m - 1.5
    for sid in ev.blocked_ids:
        s = pred.index(sid)
        rel = math.radians(pred.azimuth_deg[s, 0] - ev.heading_deg)
        # [calc] behind the wall: elevation below atan(h |sin b| / (w/2))
        assert pred.elevation_deg[s, 0] < math.degrees(math.atan2(h * abs(math.sin(rel)), st.street_width_m / 2))
        assert not ev.plan.visible[s, 0]


def test_cold_start_searches_the_whole_doppler_range(drive):
    sc, dp = drive
    ev = next(e for e in dp.events if e.event.kind == "cold")
    w = ev.plan.windows_first
    gps = [i for i, s in enumerate(ev.plan.satellites) if s.system == "G" and ev.plan.visible[i, 0]]
    half = w.share_hz["position"][gps, 0]
    # [mem: Kaplan & Hegarty, Understanding GPS, 2nd ed., sec. 9: the Doppler of a GPS
    # satellite seen from the ground stays within about +-5 kHz at L1]
    assert np.all((4000.0 < half) & (half < 5200.0))
    true_d = ev.plan.prediction.doppler_hz[gps, 0]
    assert np.all(np.abs(true_d) < half)


def test_outage_growth_and_window_order(demo_dir, tmp_path):
    # A 60 s outage: the re-acquisition window lies between the hot and the warm one, and
    # its oscillator term is the documented e0 + drift L.
    text = (demo_dir / "demo_drive_scenario.toml").read_text()
    text = text.replace("speed_kmh = 70", "speed_kmh = 84")       # 1.4 km at 84 km/h = 60 s [calc]
    (demo_dir / "t60.toml").write_text(text)
    sc = load_scenario(demo_dir / "t60.toml")
    dp0 = plan_drive(sc, monte_carlo=False)
    r = next(e for e in dp0.events if e.event.kind == "reacquire")
    assert r.event.outage_s == pytest.approx(60.0, abs=0.01)
    at = r.event.unix_s
    lines = text.split("[[event]]")[0]
    lines += "".join(f'[[event]]\nkind = "{k}"\nat = "{_iso(at)}"\n' for k in ("hot", "warm"))
    (demo_dir / "t60b.toml").write_text(lines)
    dp = plan_drive(load_scenario(demo_dir / "t60b.toml"), monte_carlo=False)
    by = {e.event.kind: e for e in dp.events}
    rq, hot, warm = by["reacquire"], by["hot"], by["warm"]
    wid = {k: e.plan.windows_first.width_hz[:, 0] for k, e in by.items()}
    vis = rq.plan.visible[:, 0] & hot.plan.visible[:, 0] & warm.plan.visible[:, 0]
    assert np.all(wid["reacquire"][vis] > wid["hot"][vis])
    assert np.all(wid["reacquire"][vis] < wid["warm"][vis])
    # Oscillator: e(L) = 20 ppb + 0.2 ppb/s x 60 s = 32 ppb; its half-width is
    # f_c e / (1 - e^2) at zero Doppler offset, about f_c e [calc]
    assert rq.event.knowledge.oscillator_uncertainty_ppb == pytest.approx(HOT_OSCILLATOR_UNCERTAINTY_PPB + 12.0)
    f_c = rq.plan.prediction.carrier_hz
    osc = rq.plan.windows_first.share_hz["oscillator"][:, 0]
    assert np.allclose(osc[vis], f_c[vis] * 32e-9, rtol=2e-3)
    # Clock: 1 us + 20 ppb x 60 s + 0.2 ppb/s x 60^2 / 2 = 2.56 us [calc]
    assert reacquire_time_uncertainty_s(60.0, 0.2) == pytest.approx(2.56e-6, rel=1e-9)
    assert rq.event.knowledge.fine_time_us == pytest.approx(2.56, rel=1e-6)
    # Position: the hot start's 0.05 km disc, and along the route +- 10 km/h x 60 s =
    # +- 166.7 m [calc: the speed uncertainty over the outage]
    assert rq.event.knowledge.horizontal_uncertainty_km == pytest.approx(0.05)
    assert rq.event.knowledge.along_route_m == pytest.approx(10 / 3.6 * 60, rel=1e-9)
    assert hot.event.knowledge.along_route_m == 0.0 and warm.event.knowledge.along_route_m == 0.0


def test_reacquisition_range_along_the_route_against_the_disc(drive):
    # After the demo's tunnel (1.4 km at 70 km/h, 72 s): the range of +- speed uncertainty
    # x outage along the road [calc] against the disc of radius 0.05 km + driven + that
    # slip searched before (same geometry, margins and every other term). The position
    # share shrinks everywhere; the whole window at the event too, though less: the range
    # along the road also brings the road's own motion there (the tunnel's 70 km/h legs),
    # which the disc took from the nominal legs only, and the +-3 min schedule slip stays.
    from dataclasses import replace

    from core.plan.pipeline import acquisition_uncertainty, first_windows, orbit_margins
    from core.search.motion import route_motion

    sc, dp = drive
    r = next(e for e in dp.events if e.event.kind == "reacquire" and e.event.origin == "outage")
    k = r.event.knowledge
    L, driven = r.event.outage_s, r.event.outage_driven_m
    dv = 10 / 3.6                                       # the demo's speed_uncertainty_kmh
    assert L == pytest.approx(1400.0 / (70 / 3.6), rel=1e-6) and driven == pytest.approx(1400.0, abs=0.01)
    assert k.along_route_m == pytest.approx(dv * L, rel=1e-9) and k.horizontal_uncertainty_km == 0.05
    g = r.plan.prepared
    margins = orbit_margins(r.plan.scenario.search, g)
    unc = acquisition_uncertainty(r.plan.scenario)
    w_along = first_windows(g, unc, margins)[1]
    assert np.allclose(w_along.width_hz, r.plan.windows_first.width_hz)
    mu = replace(dp.drive.motion, along_m=0.0)
    g_disc = replace(g, motion=route_motion(dp.drive.route, g.grid.unix_s, mu), window_cache={})
    unc_disc = replace(unc, horizontal_m=50.0 + driven + dv * L)
    w_disc = first_windows(g_disc, unc_disc, margins)[1]
    vis = r.plan.visible
    pos = w_along.share_hz["position"][vis] / w_disc.share_hz["position"][vis]
    assert np.all(pos < 1.0)
    at_event = w_along.width_hz[vis[:, 0], 0] / w_disc.width_hz[vis[:, 0], 0]
    assert np.all(at_event < 1.0)
    ratio = w_along.width_hz[vis] / w_disc.width_hz[vis]
    print(f"re-acquisition window along the route / disc on {r.event.id} (median over satellites): "
          f"{np.median(at_event):.3f} at the event ({at_event.min():.3f}-{at_event.max():.3f}), "
          f"{np.median(ratio):.3f} over its plan (max {ratio.max():.3f}); position share "
          f"{np.median(pos):.3f} (max {pos.max():.3f})")


def _iso(u):
    from core.ground.timeutil import iso_z

    return iso_z(u, 0)


def test_route_window_narrower_than_the_single_site_cover(drive):
    # The single site covering the same drive (its centre, the farthest point as the
    # horizontal uncertainty, the fastest speed in any direction) needs wider windows.
    sc, dp = drive
    ev = next(e for e in dp.events if e.event.kind == "warm")
    g = ev.plan.prepared
    t0, t1 = ev.plan.times.start_unix_s, ev.plan.times.end_unix_s
    site, radius_m, vmax, climb = single_site_equivalent(dp.drive.route, t0 - 180.0, t1 + 180.0, 10 / 3.6, 1.0)
    pred = predict(g.orbits, site, ev.plan.times)
    k = ev.event.knowledge
    unc = Uncertainty(k.horizontal_uncertainty_km * 1000 + radius_m, k.vertical_uncertainty_m, k.time_uncertainty_s,
                      vmax, climb, 0.0, k.oscillator_uncertainty_ppb)
    w_site = doppler_windows(pred, unc)
    vis = ev.plan.visible
    ratio = (ev.plan.windows_first.width_hz[vis] / w_site.width_hz[vis])
    assert np.all(ratio < 1.0)
    print(f"route / single-site window width on {ev.event.id}: median {np.median(ratio):.3f}")


def test_event_json_layout(drive):
    sc, dp = drive
    js = dp.to_json()
    # [pub: issue 8 section 4: the keys of route, samples and events]
    assert {"length_m", "duration_s", "stretches", "samples"} <= set(js["route"])
    assert set(js["route"]["samples"][0]) == {"time", "lat_deg", "lon_deg", "height_m", "speed_m_s",
                                              "heading_deg", "distance_m", "stretch"}
    assert len(js["route"]["samples"]) == len(sc.time.grid())
    ev = js["events"][0]
    assert {"id", "kind", "time", "lat_deg", "lon_deg", "satellites", "timeline", "first_fix_time",
            "ttff_median_s", "ttff_p95_s", "warnings"} <= set(ev)
    today = plan_to_json(make_plan(load_scenario(sc.path.parent / "demo_scenario.toml")))
    assert set(ev["satellites"][0]) == set(today["satellites"][0])
    assert set(ev["timeline"][0]) == set(today["timeline"][0])
    assert js["drive_summary"]["worst_event"] == dp.worst.event.id


def _write(demo_dir, name, text):
    p = demo_dir / name
    p.write_text(text)
    return p


@pytest.mark.parametrize("old, new, field", [
    ('from = "Waldeck"', 'from = "Waldek"', "route.stretch[1].from"),
    ('at = "Altmarkt Kressing"', 'at = "Altmarkt"', "event[3].at"),
    ('at = 12.0', 'at = 99.0', "event[2].at"),
    ('at = "2027-05-18T05:30:00Z"', 'at = "2027-05-18T07:30:00Z"', "event[5].at"),
    ('to = "Forsthaus Lindach"', 'to = 28.0', "route.stretch[2].from"),
])
def test_bad_drive_input_names_the_field(demo_dir, old, new, field):
    text = (demo_dir / "demo_drive_scenario.toml").read_text()
    assert old in text
    p = _write(demo_dir, "bad.toml", text.replace(old, new, 1))
    sc = load_scenario(p)
    with pytest.raises(InputError) as exc:
        plan_drive(sc, monte_carlo=False)
    assert exc.value.field == field and "\n" not in str(exc.value)
    assert str(p) in str(exc.value)


def test_stretch_past_the_end(demo_dir):
    text = (demo_dir / "demo_drive_scenario.toml").read_text()
    p = _write(demo_dir, "bad2.toml", text.replace('to = "Forsthaus Lindach"', "to = 90.0", 1))
    with pytest.raises(InputError, match="past the route's end") as exc:
        plan_drive(load_scenario(p), monte_carlo=False)
    assert exc.value.field == "route.stretch[1].to"


def test_drive_keys_round_trip_and_are_checked(demo_dir):
    from core.plan.spec import Scenario, ScenarioValidationError

    sc = load_scenario(demo_dir / "demo_drive_scenario.toml")
    again = Scenario.from_dict(sc.to_dict(), base_dir=sc.base_dir)
    assert again == sc and again.route.stretches[1].kind == "canyon" and len(again.events) == 5
    d = sc.to_dict()
    d["route"]["slip_min"] = 500
    d["event"][0]["kind"] = "lukewarm"
    with pytest.raises(ScenarioValidationError) as exc:
        Scenario.from_dict(d, base_dir=sc.base_dir)
    fields = {p.field for p in exc.value.problems}
    assert fields == {"route.slip_min", "event[1].kind"}
    plain = load_scenario(demo_dir / "demo_scenario.toml")
    assert plain.route is None and plain.events == ()
    assert "route" not in plain.to_dict() and "event" not in plain.to_dict()


def test_saved_elsewhere_the_drive_still_finds_its_route(demo_dir, tmp_path):
    from core.files.scenario import save_scenario

    sc = load_scenario(demo_dir / "demo_drive_scenario.toml")
    other = tmp_path / "elsewhere" / "drive.toml"
    other.parent.mkdir()
    saved = save_scenario(sc, other)
    again = load_scenario(other)
    assert again.route.file != sc.route.file
    assert (again.base_dir / again.route.file).resolve() == (demo_dir / "demo_drive_route.csv").resolve()
    assert again.events == sc.events and saved.route == again.route

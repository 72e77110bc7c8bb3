"""Surroundings: horizon profiles, street canyons, trees and outages along a route."""

from __future__ import annotations

import math

import numpy as np
import pytest

from core.ground.errors import InputError
from core.sky.surroundings import (
    ANTENNA_HEIGHT_M,
    Stretch,
    canyon_mask_deg,
    check_stretches,
    horizon_profile,
    read_horizon_csv,
    surroundings_at,
)


def _ray_to_wall_mask_deg(az_deg, heading_deg, h_m, w_m):
    """Hand geometry, by vectors [calc]: the street centre line runs along the unit vector
    u (heading) in the east/north plane; the walls are the lines at +-w/2 along the normal
    n. A horizontal ray r (azimuth az) meets the wall it points to after t = (w/2)/|r . n|;
    the wall top there is h above the antenna: mask = atan(h / t). Along the street
    (r . n = 0) the ray never meets a wall: mask 0."""
    u = np.array([math.sin(math.radians(heading_deg)), math.cos(math.radians(heading_deg))])
    n = np.array([u[1], -u[0]])
    r = np.array([math.sin(math.radians(az_deg)), math.cos(math.radians(az_deg))])
    across = abs(float(r @ n))
    if across < 1e-12:
        return 0.0
    t = (w_m / 2.0) / across
    return math.degrees(math.atan(h_m / t))


@pytest.mark.parametrize("heading", [0.0, 37.0, 90.0, 181.5, 300.0])
def test_canyon_mask_against_hand_geometry(heading):
    H, W = 21.5, 16.0
    h = H - ANTENNA_HEIGHT_M
    # Across the street: atan(h / (w/2)) [calc]; along it: 0.
    for side in (90.0, -90.0):
        assert canyon_mask_deg(heading + side, heading, H, W) == pytest.approx(
            math.degrees(math.atan(h / (W / 2))), abs=1e-9)
    for along in (0.0, 180.0):
        assert canyon_mask_deg(heading + along, heading, H, W) == pytest.approx(0.0, abs=1e-9)
    for rel in (10.0, 30.0, 45.0, 60.0, 135.0, 250.0):
        assert canyon_mask_deg(heading + rel, heading, H, W) == pytest.approx(
            _ray_to_wall_mask_deg(heading + rel, heading, h, W), abs=1e-9)
    # Low along the street: within 15 deg of it the mask stays below half the across value.
    assert canyon_mask_deg(heading + 15.0, heading, H, W) < 0.5 * canyon_mask_deg(heading + 90.0, heading, H, W)


def test_horizon_profile_interpolates_and_wraps(tmp_path):
    p = tmp_path / "h.csv"
    p.write_text("# a hill to the north\nazimuth_deg,elevation_deg\n350,20\n10,10\n90,5\n270,0\n")
    prof = read_horizon_csv(p)
    # [calc] linear between 350 (20 deg) and 10 (10 deg) across north
    assert prof.mask_deg(0.0) == pytest.approx(15.0)
    assert prof.mask_deg(360.0) == pytest.approx(15.0)
    assert prof.mask_deg(355.0) == pytest.approx(17.5)
    assert prof.mask_deg(50.0) == pytest.approx(7.5)
    assert prof.mask_deg(-10.0) == pytest.approx(20.0)
    assert prof.mask_deg(180.0) == pytest.approx(2.5)


@pytest.mark.parametrize("text, line, field", [
    ("az,el\n", 1, "header"),
    ("azimuth_deg,elevation_deg\n10,x\n", 2, "elevation_deg"),
    ("azimuth_deg,elevation_deg\n10,95\n", 2, "elevation_deg"),
])
def test_horizon_bad_input(tmp_path, text, line, field):
    p = tmp_path / "h.csv"
    p.write_text(text)
    with pytest.raises(InputError) as exc:
        read_horizon_csv(p)
    assert exc.value.line == line and exc.value.field == field and exc.value.file == str(p)


def test_stretch_checks():
    ok = [Stretch("trees", 0.0, 1000.0, extra_loss_db=6.0), Stretch("outage", 2000.0, 2500.0)]
    check_stretches(ok, 3000.0)
    with pytest.raises(InputError, match="past the route's end"):
        check_stretches([Stretch("open", 0.0, 4000.0)], 3000.0)
    with pytest.raises(InputError, match="overlaps stretch 1") as exc:
        check_stretches([Stretch("trees", 0.0, 1000.0), Stretch("outage", 900.0, 1200.0)], 3000.0)
    assert exc.value.field == "stretches[2].from"
    with pytest.raises(InputError, match="canyon needs"):
        check_stretches([Stretch("canyon", 0.0, 100.0)], 3000.0)


def test_surroundings_along_a_drive():
    # Four times: open, trees, canyon (heading east), outage.
    d = np.array([500.0, 1500.0, 2500.0, 3500.0])
    heading = np.array([90.0, 90.0, 90.0, 90.0])
    az = np.array([[0.0] * 4, [90.0] * 4])           # one satellite north, one east
    el = np.array([[40.0] * 4, [20.0] * 4])
    st = [Stretch("trees", 1000.0, 2000.0, name="forest", extra_loss_db=8.0),
          Stretch("canyon", 2000.0, 3000.0, building_height_m=31.5, street_width_m=20.0),
          Stretch("outage", 3000.0, 4000.0, name="tunnel")]
    s = surroundings_at(d, heading, az, el, st, site_horizon=horizon_profile([0, 180], [5, 5]))
    assert s.stretch_names == ["open", "forest", "canyon", "tunnel"]
    assert list(s.outage) == [False, False, False, True]
    assert s.extra_loss_db[:, 1].tolist() == [8.0, 8.0] and s.extra_loss_db[:, 0].tolist() == [0.0, 0.0]
    # In the canyon the north satellite is across the street: mask atan(30/10) = 71.6 deg
    # [calc] blocks it at 40 deg; the east one looks along the street and stays.
    assert s.mask_deg[0, 2] == pytest.approx(math.degrees(math.atan(30.0 / 10.0)))
    assert s.blocked[:, 2].tolist() == [True, False]
    assert s.blocked[:, 3].tolist() == [True, True]
    assert not s.blocked[:, :2].any()

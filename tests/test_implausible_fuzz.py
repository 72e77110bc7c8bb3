"""Fuzzing for implausible-but-parseable records, not only for crashes.

Hypothesis builds records that every reader parses (numbers where numbers belong, valid
checksums) but with values drawn over many decades, or with two fields swapped. Whatever
comes in, what reaches a prediction after the reader checks and the result guard is a
GPS geometry: finite, Doppler within the bound a GPS orbit allows a receiver at rest, and
range inside the GPS shell [calc bounds below]. A record outside is dropped or refused,
never turned into a number.
"""

from __future__ import annotations

import math

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from test_plausibility import _FIELDS, _L1, _L2, _with_checksum, yuma

from core.ground.errors import InputError
from core.ground.geodesy import Site
from core.ground.timeutil import time_grid
from core.orbits.readers import parse_tle, parse_yuma
from core.sky.predict import predict
from core.sky.result_guard import guard_prediction

FUZZ = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
START_UNIX_S = 1_618_444_800.0                      # 2021-04-15, the invented almanac's week
GRID = time_grid(*(__import__("datetime").datetime.fromtimestamp(t, __import__("datetime").UTC)
                   for t in (START_UNIX_S, START_UNIX_S + 6 * 3600.0)), 1800.0)
SITES = [Site(47.0, 8.0, 400.0), Site(-33.9, -70.6, 520.0), Site(0.0, 100.0, 0.0)]
# A GPS satellite seen from the ground: Doppler at L1 below 4.9 kHz for a circular orbit
# (domain-notes 4), plus the radial speed e v <= 0.03125 x 3.95 km/s = 123 m/s (0.65 kHz)
# of an eccentric one; 8 kHz leaves room for the 25,500-28,600 km band [calc]. Range:
# perigee minus the Earth's radius to apogee plus it, 18,300-36,000 km [calc].
GPS_DOPPLER_MAX_HZ = 8_000.0
GPS_RANGE_M = (18.3e6, 36.0e6)

# Values over many decades, both signs, always a parseable number.
WILD = st.one_of(
    st.floats(-1e300, 1e300, allow_nan=False, allow_infinity=False),
    st.floats(-10.0, 10.0, allow_nan=False),
    st.sampled_from([0.0, 1.0, -1.0, 0.9999999999, 1e30, 1e-30, 5153.6, 3.14159, 26_560e3]),
)
YUMA_FIELDS = [k for k in _FIELDS if not k.startswith("Time of")]


def _assert_only_gps_geometry(orbits) -> None:
    for site in SITES:
        pred = predict(orbits, site, GRID)
        try:
            kept, kp, _ = guard_prediction(orbits, pred)
        except InputError:
            return                                        # nothing plausible left: refused
        ok = kp.valid
        assert np.isfinite(kp.doppler_hz[ok]).all() and np.isfinite(kp.range_m[ok]).all()
        above = ok & (kp.elevation_deg > 0.0)
        if above.any():
            assert np.abs(kp.doppler_hz[above]).max() < GPS_DOPPLER_MAX_HZ
        assert (kp.range_m[ok] > GPS_RANGE_M[0]).all() and (kp.range_m[ok] < GPS_RANGE_M[1]).all()


def _read_yuma(text: str):
    try:
        return parse_yuma(text, "fuzz.alm", START_UNIX_S, strict=False)
    except InputError:
        return None


@FUZZ
@given(st.dictionaries(st.sampled_from(YUMA_FIELDS), WILD, min_size=1, max_size=4))
def test_wild_almanac_values_never_reach_a_prediction(changes):
    text = yuma(3) + yuma(7, **{k.split("(")[0].strip(): f"{v:.10E}" for k, v in changes.items()})
    orbits = _read_yuma(text)
    if orbits is None:
        return
    assert "G03" in orbits.ids
    _assert_only_gps_geometry(orbits)


@FUZZ
@given(st.permutations(YUMA_FIELDS))
def test_almanac_fields_swapped(order):
    values = [_FIELDS[k] for k in YUMA_FIELDS]
    swapped = dict(zip(order, values))
    text = yuma(3) + yuma(7, **{k.split("(")[0].strip(): v for k, v in swapped.items()})
    orbits = _read_yuma(text)
    if orbits is None:
        return
    _assert_only_gps_geometry(orbits)


@FUZZ
@given(mean_motion=st.floats(0.05, 17.0), ecc=st.integers(0, 9_999_999),
       inc=st.floats(0.0, 180.0), bstar_mant=st.integers(0, 99999), bstar_exp=st.integers(0, 9))
def test_wild_tle_elements_never_reach_a_prediction(mean_motion, ecc, inc, bstar_mant, bstar_exp):
    # Columns [pub: CelesTrak TLE format]: inclination 9-16, eccentricity 27-33 (implied
    # decimal point), mean motion 53-63; B* 54-61 on line 1 (implied decimal and exponent).
    l2 = _L2[:8] + f"{inc:8.4f}" + _L2[16:26] + f"{ecc:07d}" + _L2[33:52] + f"{mean_motion:11.8f}" + _L2[63:]
    l1 = _L1[:53] + f" {bstar_mant:05d}-{bstar_exp}" + _L1[61:]
    text = f"GPS BIIR-2  (PRN 13)\n{_with_checksum(l1)}\n{_with_checksum(l2)}\n"
    try:
        orbits = parse_tle(text, "fuzz.tle", strict=False)
    except InputError:
        return
    assert orbits.ids == ["G13"]
    assert 1.79 < mean_motion < 2.14 and ecc / 1e7 <= 0.03125 and 42.7 <= inc <= 65.3, \
        (mean_motion, ecc, inc)
    _assert_only_gps_geometry(orbits)
    assert math.isfinite(orbits.entries[0].satrec.bstar)

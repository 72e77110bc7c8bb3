"""Real station records held against plans made from the same day's broadcast orbits.

Files from ../shared/field-data and ../shared/orbit-data, read in place (skipped without
them). The measured Doppler of a geodetic station is the carrier-phase rate, whose noise
over 30 s is a few mHz; what is left after the receiver's common offset is the error of
the prediction itself.

Limits, and why [calc unless named]:

* residual after the common offset, per GPS satellite: median < 0.1 Hz, 95th percentile
  < 0.15 Hz, largest < 0.5 Hz; pooled over all satellites median < 0.03 Hz. The
  prediction leaves out light time (< 0.05 Hz at L1, DEVELOPERS.md) and the satellite
  clock drift (af1 x f: |af1| < 5e-11 gives < 0.08 Hz [mem: IS-GPS-200 af1 range, real
  clocks far below]); broadcast orbit velocity error of mm/s adds ~0.01 Hz. A throwaway
  script with precise orbits measured median 0.007 Hz, 95th percentile 0.05 Hz, max
  0.32 Hz on SLAC (issue 9); the limits add the two neglected terms to those figures.
* common offset of the steered SLAC clock (a TRIMBLE NETR9, whose epochs carry no clock
  steps): within +-0.2 Hz at every epoch (the throwaway's +-0.1 Hz, plus the same two
  neglected terms, part of which is common to all satellites).
* station 0759 (2005, TRIMBLE 5700): its epoch tags step by 1 ms every 23-24 epochs of
  30 s (read off the file: .0010 at 00:09, ... .0050 at 00:57), a receiver clock running
  fast by 1 ms / (23.5 +- 0.5) x 30 s = 1389-1449 ppb. The oscillator offset found from
  the Doppler must lie there, and a plan with the default +-500 ppb must be found wrong.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from conftest import REPO

from core.api import compare_record, load_record, make_plan, record_scenario

SHARED = Path(REPO.parent / "shared")
FIELD, ORBITS = SHARED / "field-data", SHARED / "orbit-data"
SLAC = FIELD / "rinex-obs" / "gnsslibpy_slac1180.21o"
SLAC_NAV = ORBITS / "rinex-nav" / "gnsslibpy_brdc1180.21n"
ST0759 = FIELD / "rinex-obs" / "rtklib_07590920.05o"
ST0759_NAV = ORBITS / "rinex-nav" / "rtklib_07590920.05n"
needs = pytest.mark.skipif(not (SLAC.is_file() and SLAC_NAV.is_file() and ST0759.is_file()),
                           reason=f"real field/orbit data not found under {SHARED}")


def _pooled(res) -> np.ndarray:
    r = res.arrays.residual_hz
    return np.abs(r[np.isfinite(r)])


@pytest.fixture(scope="module")
def slac():
    rec = load_record(SLAC)
    plan = make_plan(record_scenario(rec, [str(SLAC_NAV)]), monte_carlo=False)
    return rec, plan, compare_record(plan, rec)


@needs
def test_slac_phase_rate_doppler_matches_the_broadcast_prediction(slac):
    rec, plan, res = slac
    gps = [s for s in res.satellites if s.sat_id[0] == "G" and s.doppler_samples > 0]
    assert len(gps) >= 12
    for s in gps:
        assert s.doppler_source == "L1 rate"
        assert s.residual_hz_median < 0.1, s.sat_id
        assert s.residual_hz_p95 < 0.15, s.sat_id
        assert s.residual_hz_max < 0.5, s.sat_id
        assert s.inside_window_fraction == 1.0
    pooled = _pooled(res)
    assert pooled.size > 2000
    assert np.median(pooled) < 0.03
    hz = np.array([c.hz for c in res.common_offset])
    assert hz.size >= 235 and np.all(np.abs(hz) < 0.2)
    assert res.held and res.verdict.startswith("plan held")
    # Galileo and GLONASS are in the record but not in the GPS-only navigation file
    assert any("not compared" in w for w in res.warnings)


@needs
def test_slac_cn0_from_the_s1_field(slac):
    """S1 is C/N0 in dB-Hz (header comment); a choke-ring station antenna sees 30-55 dB-Hz
    [trade], higher towards zenith: the fitted zenith value is above the mask value."""
    _, _, res = slac
    meds = [s.cn0_dbhz_median for s in res.satellites if s.cn0_dbhz_median is not None]
    assert meds and all(25.0 < m < 56.0 for m in meds)
    fit = res.cn0_fit
    assert fit is not None and fit.samples > 2000
    assert 45.0 < fit.zenith_dbhz < 58.0 and 28.0 < fit.mask_dbhz < 40.0
    assert fit.zenith_dbhz > fit.mask_dbhz + 8.0


@needs
def test_station_0759_oscillator_from_doppler_matches_its_clock_steps():
    rec = load_record(ST0759)
    sc = record_scenario(rec, [str(ST0759_NAV)])
    res = compare_record(make_plan(sc, monte_carlo=False), rec)
    assert 1389.0 <= res.oscillator_offset_ppb <= 1449.0
    assert not res.held and "OUTSIDE the planned 0 +- 500 ppb" in res.verdict
    for s in res.satellites:
        if s.doppler_samples:
            assert s.residual_hz_p95 < 0.15 and s.residual_hz_max < 0.5, s.sat_id
    # planned with the right uncertainty, the same record holds
    wide = sc.with_changes(receiver={"oscillator_uncertainty_ppb": 2000.0})
    res2 = compare_record(make_plan(wide, monte_carlo=False), rec)
    assert res2.held, res2.verdict

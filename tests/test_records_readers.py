"""Receiver-record readers: RINEX 2.10/2.11/3.03 observation files and NMEA 0183 logs.

Real files are read in place from ../shared/field-data (skipped without it). Expected
values are read off the files by eye or by a deliberately plain line-by-line reader in
this test (an independent implementation of the same format text) [pub: RINEX 2.11 and
3.03 format descriptions]; NMEA positions are converted with pymap3d, checksums recomputed
here [pub: NMEA 0183: XOR of the characters between '$' and '*'].
"""

from __future__ import annotations

import gzip
import math
from pathlib import Path

import numpy as np
import pytest
from conftest import REPO

from core.ground.errors import InputError, RecordFormatError
from core.records.measure import measure, nan_median
from core.records.record import load_record, parse_record

FIELD = Path(REPO.parent / "shared" / "field-data")
HAVE_FIELD = (FIELD / "README.md").is_file()
needs_field = pytest.mark.skipif(not HAVE_FIELD, reason=f"real field data not found at {FIELD}")
SLAC = FIELD / "rinex-obs" / "gnsslibpy_slac1180.21o"
STATION_0759 = FIELD / "rinex-obs" / "rtklib_07590920.05o"
PIXEL6 = FIELD / "rinex-obs" / "gnsslibpy_pixel6.23o"
NMEA_OK = FIELD / "nmea" / "gnsslibpy_nmea_w_correct_checksum.nmea"
NMEA_BAD = FIELD / "nmea" / "gnsslibpy_nmea_w_wrong_checksum.nmea"


def _plain_v2_epoch(path: Path, n_epoch: int) -> dict[str, dict[str, tuple[float | None, int | None]]]:
    """The n-th epoch of a RINEX 2 file read the slow, obvious way: {sat: {code: (value, lli)}}."""
    lines = path.read_text(encoding="latin-1").split("\n")
    types: list[str] = []
    i = 0
    while "END OF HEADER" not in lines[i]:
        if "# / TYPES OF OBSERV" in lines[i]:
            types += lines[i][6:60].split()
        i += 1
    i += 1
    per_sat = math.ceil(len(types) / 5)
    epoch = -1
    while True:
        head = lines[i]
        flag, count = int(head[28]), int(head[29:32])
        if 2 <= flag <= 5:
            i += 1 + count
            continue
        sats = []
        n_head = math.ceil(count / 12)
        for j in range(n_head):
            chunk = lines[i + j][32:68]
            sats += [chunk[k:k + 3] for k in range(0, len(chunk.rstrip()), 3)]
        i += n_head
        epoch += 1
        if epoch == n_epoch:
            out = {}
            for s, sat in enumerate(sats):
                text = "".join(lines[i + s * per_sat + k].ljust(80) for k in range(per_sat))
                vals = {}
                for j, code in enumerate(types):
                    line_part = text[(j // 5) * 80 + (j % 5) * 16:(j // 5) * 80 + (j % 5) * 16 + 16]
                    v = line_part[:14].strip()
                    lli = line_part[14:15].strip()
                    vals[code] = (float(v) if v and float(v) != 0 else None,
                                  int(lli) if lli else None)
                out[sat.replace(" ", "0")] = vals
            return out
        i += count * per_sat


@needs_field
def test_slac_rinex211_wrapped_layout_matches_a_plain_reader():
    rec = load_record(SLAC)
    assert rec.format == "RINEX 2.11"
    assert rec.n_epochs == 241                     # 19:00-21:00 at 30 s [pub: file header]
    assert rec.interval_s == 30.0
    np.testing.assert_allclose(rec.position_ecef_m, [-2703115.266, -4291768.344, 3854247.955])
    assert len(rec.codes_for("G")) == 20
    for n_epoch in (0, 120, 240):
        plain = _plain_v2_epoch(SLAC, n_epoch)
        assert len(plain) > 12                      # more than 12: continuation lines
        for sat, vals in plain.items():
            s = rec.sat_ids.index(sat)
            for code, (v, lli) in vals.items():
                got = rec.obs[code][s, n_epoch]
                if v is None:
                    assert np.isnan(got), (sat, code)
                else:
                    assert got == pytest.approx(v, abs=1e-9), (sat, code)
                if code[0] == "L":
                    assert rec.lli[code][s, n_epoch] == (-1 if lli is None else lli)
    # read off the file by eye: G19 (second satellite of the first epoch)
    g19 = rec.sat_ids.index("G19")
    assert rec.obs["L2"][g19, 0] == pytest.approx(82256563.654)
    assert rec.lli["L2"][g19, 0] == 4               # "82256563.65447": LLI 4 (A/S), SSI 7
    assert rec.obs["S1"][g19, 0] == pytest.approx(52.1)
    # epoch tags are GPS time; GPS - UTC = 18 s in 2021 [pub: IERS Bulletin C]
    assert rec.epochs_unix_s[0] == pytest.approx(1619636400.0 - 18.0)


@needs_field
def test_slac_band_filter_keeps_only_l1_codes_and_same_values():
    full = load_record(SLAC)
    from core.records.rinex_obs import parse_rinex_obs

    l1 = parse_rinex_obs(SLAC.read_bytes(), str(SLAC), bands={"1"})
    assert sorted(l1.obs) == ["C1", "L1", "P1", "S1"]
    np.testing.assert_array_equal(np.nan_to_num(l1.obs["L1"], nan=-1), np.nan_to_num(full.obs["L1"], nan=-1))


@needs_field
def test_station_0759_rinex210_phase_rate_agrees_with_code_rate():
    """RINEX 2.10 with an event record (flag 4) inside; no D field: Doppler from the L1
    phase rate. Phase and pseudorange measure the same range rate, so the phase-rate
    Doppler and the C1 code-rate Doppler must agree within code noise (0.3-3 m over 30 s:
    < 1 Hz median) [calc: D = -dL/dt = -dC/dt / lambda]."""
    rec = load_record(STATION_0759)
    assert rec.format == "RINEX 2.10" and rec.codes_for("G") == ("L1", "C1", "L2", "P2")
    assert rec.n_epochs == 120                      # 00:00-00:59:30 at 30 s
    m = measure(rec, {"G": "GPS-L1CA"})
    assert m.from_phase.all()
    lam = 299_792_458.0 / 1575.42e6
    code_rate = np.full(rec.obs["C1"].shape, np.nan)
    code_rate[:, 1:] = -np.diff(rec.obs["C1"], axis=1) / (lam * np.diff(rec.epochs_unix_s))
    rows = [rec.sat_ids.index(s) for s in m.sat_ids]
    diff = m.doppler_hz - code_rate[rows]
    diff = diff - nan_median(diff, axis=0)         # receiver clock steps move the code only
    assert np.isfinite(diff).sum() > 800
    assert np.nanmedian(np.abs(diff)) < 1.0
    assert np.nanmax(np.abs(m.doppler_hz)) < 6000.0    # GPS Doppler at a static site [trade]


@needs_field
def test_pixel6_rinex303_doppler_read_directly_several_signals():
    rec = load_record(PIXEL6)
    assert rec.format == "RINEX 3.03" and rec.n_epochs == 48
    assert rec.codes_for("G") == ("C1C", "L1C", "D1C", "S1C", "C5Q", "L5Q", "D5Q", "S5Q")
    assert rec.codes_for("R") == ("C1C", "L1C", "D1C", "S1C")
    assert rec.glonass_k == {"R01": 1, "R02": -4, "R03": 5, "R12": -1, "R13": -2, "R21": 4}
    assert rec.position_ecef_m is None and rec.warnings
    g04 = rec.sat_ids.index("G04")
    # first epoch, read off the file: G04 D1C -3537.656, S1C 29.972; G08 D5Q 158.141
    assert rec.obs["D1C"][g04, 0] == pytest.approx(-3537.656)
    assert rec.obs["S1C"][g04, 0] == pytest.approx(29.972)
    assert rec.obs["D5Q"][rec.sat_ids.index("G08"), 0] == pytest.approx(158.141)
    assert np.isnan(rec.obs["D5Q"][g04, 0])         # G04 has no L5 there (blank fields)
    # 2023-11-07 23:43:15.0002755 GPS = 23:42:57.0002755 UTC [pub: IERS Bulletin C, 18 s]
    assert rec.epochs_unix_s[0] == pytest.approx(1699400595.0002755 - 18.0, abs=1e-6)
    m = measure(rec, {"G": "GPS-L1CA", "E": "GAL-E1", "R": "GLO-L1OF"})
    assert not m.from_phase.any()
    assert m.codes["G04"] == ("D1C", "S1C", "GPS-L1CA")
    # D1C is positive for approaching satellites: the phase L1C falls as D1C > 0
    # [pub: RINEX 3.03 5.9]; check the sign where the phase is continuous
    rate = -np.diff(rec.obs["L1C"], axis=1) / np.diff(rec.epochs_unix_s)
    mid = 0.5 * (rec.obs["D1C"][:, 1:] + rec.obs["D1C"][:, :-1])
    ok = np.isfinite(rate) & np.isfinite(mid)
    assert ok.sum() > 500
    assert (np.abs(rate[ok] - mid[ok]) < 5.0).mean() > 0.9       # measured: 0.986
    assert (np.abs(rate[ok] + mid[ok]) < 5.0).mean() < 0.05      # the other sign does not fit


@needs_field
def test_nmea_correct_checksums_position_and_times():
    import pymap3d

    rec = load_record(NMEA_OK)
    assert rec.format == "NMEA 0183" and not rec.warnings
    assert rec.n_epochs == 2
    # 2020-05-14 22:01:34.00 and .10 UTC [pub: the RMC/GGA fields]
    np.testing.assert_allclose(rec.epochs_unix_s, [1589493694.0, 1589493694.1], atol=1e-5)
    lat = 37 + 25.4168121 / 60
    lon = -(122 + 5.6498009 / 60)
    h = 2.70 - 32.64                                # MSL altitude + geoid separation
    ref = np.array(pymap3d.geodetic2ecef(lat, lon, h))
    assert np.linalg.norm(rec.position_ecef_m - ref) < 0.05   # two fixes 2 mm apart


def _nmea_sum(body: str) -> str:
    x = 0
    for ch in body:
        x ^= ord(ch)
    return f"{x:02X}"


@needs_field
def test_nmea_wrong_checksum_reported_and_ignored(tmp_path):
    bad_lines = NMEA_BAD.read_text().splitlines()
    # the file's RMC checksums are indeed wrong, its GGA ones right [pub: NMEA checksum]
    for line in bad_lines:
        body, given = line[1:].split("*")
        assert (_nmea_sum(body) == given) == line.startswith("$GPGGA")
    with pytest.raises(RecordFormatError) as err:
        load_record(NMEA_BAD)                       # no RMC left: no date
    assert "checksum" in str(err.value) and "line 2, 4" in str(err.value)
    mixed = tmp_path / "mixed.nmea"
    mixed.write_text("\n".join(NMEA_OK.read_text().splitlines() + bad_lines) + "\n")
    rec = load_record(mixed)
    assert rec.n_epochs == 2
    assert any("2 sentence(s) with a wrong or missing checksum ignored (line 6, 8)" in w
               for w in rec.warnings)


def test_nmea_gsv_gsa_snr_and_talkers(tmp_path):
    def s(body: str) -> str:
        return f"${body}*{_nmea_sum(body)}"

    lines = [s("GPRMC,120000.00,A,4737.098,N,00830.000,E,0.0,0.0,010624,,,A"),
             s("GPGGA,120000.00,4737.098,N,00830.000,E,1,08,1.0,400.0,M,48.0,M,,"),
             s("GPGSV,2,1,05,05,45,120,42,12,10,300,31,33,30,200,40,70,60,010,44"),
             s("GPGSV,2,2,05,193,70,180,39"),
             s("GLGSV,1,1,01,81,20,90,35"),
             s("GPGSA,A,3,05,12,,,,,,,,,,,2.0,1.0,1.7"),
             s("GPRMC,120001.00,A,4737.098,N,00830.000,E,0.0,0.0,010624,,,A"),
             s("GPGSV,1,1,01,05,45,120,43"),
             "$GPGSV,1,1,01,12,10,300,30*00"]       # wrong checksum: ignored
    path = tmp_path / "log.nmea"
    path.write_text("\n".join(lines) + "\n")
    rec = load_record(path)
    assert rec.sat_ids == ["G05", "G12", "J01", "R06", "R17", "S120"]
    g05 = rec.sat_ids.index("G05")
    np.testing.assert_allclose(rec.obs["S"][g05], [42, 43])
    assert rec.obs["EL"][rec.sat_ids.index("R17"), 0] == 20
    assert rec.obs["USED"][rec.sat_ids.index("G12"), 0] == 1
    assert np.isnan(rec.obs["S"][rec.sat_ids.index("G12"), 1])
    assert any("line 9" in w for w in rec.warnings)
    m = measure(rec, {"G": "GPS-L1CA", "R": "GLO-L1OF"})
    assert np.isnan(m.doppler_hz).all()             # NMEA carries no Doppler
    assert m.first_seen_unix_s[m.index("G05")] == rec.epochs_unix_s[0]


@needs_field
def test_compressed_records_read_the_same(tmp_path):
    import hatanaka

    plain = PIXEL6.read_bytes()
    ref = parse_record(plain, "ref")
    for name, data in (("a.23o.gz", gzip.compress(plain)),
                       ("a.23d", hatanaka.compress(plain, compression="none")),
                       ("a.23d.gz", hatanaka.compress(plain, compression="gz")),
                       ("a.23d.Z", hatanaka.compress(plain, compression="Z"))):
        p = tmp_path / name
        p.write_bytes(data)
        rec = load_record(p)
        for code, v in ref.obs.items():
            np.testing.assert_array_equal(np.nan_to_num(rec.obs[code], nan=-9),
                                          np.nan_to_num(v, nan=-9), err_msg=name)


def test_broken_compressed_file_is_a_record_error(tmp_path):
    p = tmp_path / "x.gz"
    p.write_bytes(b"\x1f\x8b\x08\x00garbage")
    with pytest.raises(RecordFormatError) as err:
        load_record(p)
    assert "gzip" in str(err.value) and str(p) in str(err.value)


@pytest.mark.parametrize("text, where", [
    ("     2.11           OBSERVATION DATA    G (GPS)             RINEX VERSION / TYPE\n"
     "     1    L1                                                # / TYPES OF OBSERV\n"
     "                                                            END OF HEADER\n"
     " 21  4 28 19  0  0.0000000  0  1G15\n"
     "  12345.678x 1\n", "line 5"),
    ("     2.11           OBSERVATION DATA    G (GPS)             RINEX VERSION / TYPE\n"
     "     2    L1                                                # / TYPES OF OBSERV\n"
     "                                                            END OF HEADER\n", "TYPES"),
    ("     3.03           OBSERVATION DATA    M                   RINEX VERSION / TYPE\n"
     "G    1 L1C                                                  SYS / # / OBS TYPES\n"
     "                                                            END OF HEADER\n"
     "> 2023 11 07 23 43 15.0000000  0  1\n"
     "E07  1234.5\n", "E07"),
    ("     4.00           OBSERVATION DATA    M                   RINEX VERSION / TYPE\n", "version"),
])
def test_malformed_rinex_names_the_place(text, where):
    with pytest.raises(InputError) as err:
        parse_record(text.encode(), "f.obs")
    assert where in str(err.value) and "f.obs" in str(err.value)

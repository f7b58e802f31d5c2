"""IGRA v2 station files against the IGRA v2 data format description (Durre et al. 2016, NOAA NCEI):
fixed columns, units (Pa, tenths of degC, tenths of m/s), -9999 missing and -8888 removed by QC. The column
positions are from memory of that description (the document itself was not at hand)."""

import sys
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

sys.path.insert(0, str(Path(__file__).parent))

from icing.errors import SoundingFormatError  # noqa: E402
from icing.io import igra, reader_for  # noqa: E402

# Typed by hand, column by column (format description: LVLTYP1 1, LVLTYP2 2, ETIME 4-8, PRESS 10-15,
# PFLAG 16, GPH 17-21, ZFLAG 22, TEMP 23-27, TFLAG 28, RH 29-33, DPDP 35-39, WDIR 41-45, WSPD 47-51).
# Flags touch the numbers, so splitting on spaces would misread them.
SOUNDING_1 = [
    "#ZZM00000101 2026 01 15 00 2315    6 ncdc6310 ncdc6310  520000  -340000",
    "21 -9999 101200B   15A   40B-9999    15   240    62",
    "10    30 100000A   80B   36A  905    14   240    67",
    "10   512  85000A 1456B  -23A-9999 -8888   250   103",
    "20   700  78000 -9999   -61 -9999    20 -8888 -8888",
    "30   800  -9999  2500 -9999 -9999 -9999   255   120",
    "10  1201  70000A 3010B  -95A-9999    41   260   155",
]
SOUNDING_2 = [
    "#ZZM00000101 2026 01 15 12 1105    3 ncdc6310 ncdc6310  520000  -340000",
    "21 -9999 100500B   15A   52B-9999    12   250    41",
    "10    40 100000A   56B   49A-9999    13   250    46",
    "10   530  85000A 1433B  -15A-9999    22   260    88",
]


def _write(tmp_path, lines, name="ZZM00000101-data.txt"):
    assert all(len(ln) in (51, 71) for ln in lines)
    path = tmp_path / name
    path.write_text("\n".join(lines) + "\n")
    return path


def _at(ds, p, name):
    idx = np.flatnonzero(np.isclose(ds["pressure"].values, p))
    assert idx.size == 1
    return float(ds[name].values[idx[0]])


def test_fixed_columns_and_units(tmp_path):
    """IGRA v2 format description: PRESS in Pa, TEMP and DPDP in tenths of degC, WSPD in tenths of m/s,
    LAT/LON in 1e-4 deg; the surface record (LVLTYP2 = 1) gives the elevation."""
    path = _write(tmp_path, SOUNDING_1 + SOUNDING_2)
    assert reader_for(path).FORMAT == "igra"
    profiles = igra.read(path)
    assert len(profiles) == 2
    ds = profiles[0]
    assert ds.attrs["station"] == "ZZM00000101"
    assert ds.attrs["time"] == "2026-01-15T00:00:00Z"
    assert ds.attrs["latitude"] == 52.0 and ds.attrs["longitude"] == -34.0
    assert ds.attrs["elevation"] == 15.0
    assert_allclose(ds["pressure"].values[0], 1012.0)
    assert_allclose(_at(ds, 1012, "temperature"), 4.0)
    assert_allclose(_at(ds, 1012, "dewpoint"), 4.0 - 1.5)
    assert_allclose(_at(ds, 1012, "wind_speed"), 6.2)
    assert_allclose(_at(ds, 1000, "relative_humidity"), 90.5)
    assert_allclose(_at(ds, 850, "height"), 1456.0)
    assert_allclose(_at(ds, 850, "wind_speed"), 10.3)
    assert_allclose(_at(ds, 700, "temperature"), -9.5)
    assert_allclose(_at(ds, 700, "wind_speed"), 15.5)
    assert profiles[1].attrs["time"] == "2026-01-15T12:00:00Z"


def test_missing_and_removed_kept_apart(tmp_path):
    """-8888 (removed by QC) is listed value by value; -9999 (missing) is counted per variable; both apart."""
    ds = igra.read(_write(tmp_path, SOUNDING_1))[0]
    q = ds.attrs["quality"]
    removed = [e for e in q if e.get("code") == -8888]
    assert {(e["variable"], e["line"]) for e in removed} == {("dewpoint", 4), ("wind_direction", 5),
                                                             ("wind_speed", 5)}
    missing = {e["variable"]: e for e in q if e.get("code") == -9999}
    assert missing["height"]["lines"] == [5]
    assert missing["relative_humidity"]["count"] == 4
    assert np.isnan(_at(ds, 850, "dewpoint"))
    assert np.isnan(_at(ds, 780, "wind_speed"))
    assert_allclose(_at(ds, 780, "temperature"), -6.1)


def test_non_pressure_level_is_recorded(tmp_path):
    """LVLTYP1 = 3 is a non-pressure level (format description): not a profile level, but recorded."""
    ds = igra.read(_write(tmp_path, SOUNDING_1))[0]
    assert ds.sizes["level"] == 5
    assert any("LVLTYP1 = 3" in e["reason"] and e["line"] == 6 for e in ds.attrs["quality"])


def test_time_range(tmp_path):
    path = _write(tmp_path, SOUNDING_1 + SOUNDING_2)
    (ds,) = igra.read(path, start="2026-01-15T06:00", end="2026-01-16")
    assert ds.attrs["time"] == "2026-01-15T12:00:00Z"
    with pytest.raises(SoundingFormatError, match="time range"):
        igra.read(path, start="2027-01-01")


def test_bad_record_is_skipped_with_line_and_column(tmp_path):
    bad = list(SOUNDING_1)
    bad[3] = bad[3][:22] + "  x23" + bad[3][27:]
    ds = igra.read(_write(tmp_path, bad))[0]
    entry = next(e for e in ds.attrs["quality"] if "not an integer" in e["reason"])
    assert entry["line"] == 4 and entry["column"] == 23
    assert 850.0 not in ds["pressure"].values


def test_not_igra_is_an_error(tmp_path):
    path = tmp_path / "x.txt"
    path.write_text("hello\n")
    with pytest.raises(SoundingFormatError, match="header"):
        igra.read(path)
    path.write_text("#ZZM00000101 2026 01 1x 00 2315    6 ncdc6310 ncdc6310  520000 -340000\n")
    with pytest.raises(SoundingFormatError, match="line 1"):
        igra.read(path)


DEMO = Path(__file__).parents[1] / "sample_soundings"
FORMATS = DEMO / "formats"


@pytest.mark.skipif(not (FORMATS / "scenario_igra.txt").exists(), reason="demo IGRA file not generated")
def test_demo_igra_matches_demo_csv():
    """sample_soundings/scenario_igra.txt decodes to the CSV versions within IGRA's precision (format
    description: whole Pa and metres, tenths of degC and K, tenths of m/s, whole degrees), faults and all."""
    from icing.io import table

    csv_profiles = {}
    for path in sorted(DEMO.glob("S*_*_*.csv")):
        for ds in table.read(path):
            csv_profiles[(ds.attrs["station"], ds.attrs["time"])] = ds
    decoded = igra.read(FORMATS / "scenario_igra.txt")
    assert len(decoded) == len(csv_profiles) == 10
    for ds in decoded:
        ref = csv_profiles[(ds.attrs["station"][-5:], ds.attrs["time"])]
        assert_allclose([ds.attrs["latitude"], ds.attrs["longitude"]], [ref.attrs["latitude"],
                                                                        ref.attrs["longitude"]])
        for name, tol in (("pressure", 1e-9), ("height", 1e-9), ("temperature", 1e-9), ("dewpoint", 0.05 + 1e-9),
                          ("wind_direction", 0.5), ("wind_speed", 0.05 + 1e-9)):
            a, b = ds[name].values, ref[name].values
            assert np.array_equal(np.isnan(a), np.isnan(b)), name
            assert np.nanmax(np.abs(a - b)) <= tol, name


# --- derived-parameter files (issue 15) ----------------------------------------------------------------------

import encoders  # noqa: E402

DERIVED_PROFILE = {"pressure": [1012, 1000, 850, 700, 500], "height": [15, 80, 1456, np.nan, 5600],
                   "calc_height": [15, 81, 1457, 3010, 5602], "temperature": [4.0, 3.6, -2.3, -9.5, -25.0],
                   "relative_humidity": [90, 88, 95, 60, 30], "u": [3.0, 4.0, 5.0, 10.0, 20.0],
                   "v": [0.0, -2.0, 1.0, 3.0, 5.0]}


def test_derived_parameter_file_is_read(tmp_path):
    """IGRA v2 derived-parameter layout (format description; positions from memory, cross-checked with an
    independent reader's column table): PRESS Pa, REPGPH/CALCGPH m, TEMP tenths of K, REPRH tenths of %,
    UWND/VWND tenths of m/s. The header has no position. Wind direction from components (meteorological
    convention: u = 3, v = 0 blows from 270 degrees)."""
    path = tmp_path / "ZZM00000101-drvd.txt"
    path.write_text(encoders.encode_igra_derived([("2026-01-15T12:00", DERIVED_PROFILE)]))
    assert reader_for(path).FORMAT == "igra"
    (ds,) = igra.read(path)
    assert ds.attrs["time"] == "2026-01-15T12:00:00Z" and ds.attrs["station"] == "ZZM00000101"
    assert np.isnan(ds.attrs["latitude"]) and np.isnan(ds.attrs["longitude"])
    assert_allclose(ds["pressure"].values, DERIVED_PROFILE["pressure"])
    # reported height where given, IGRA's calculated one (noted) where not
    assert_allclose(ds["height"].values, [15, 80, 1456, 3010, 5600])
    assert any("CALCGPH" in e["reason"] for e in ds.attrs["quality"])
    # tenths of K: 0.05 K rounding, and 273.15 K = 0 degC (SI definition)
    assert_allclose(ds["temperature"].values, DERIVED_PROFILE["temperature"], atol=0.05 + 1e-9)
    assert_allclose(ds["relative_humidity"].values, DERIVED_PROFILE["relative_humidity"], atol=0.05)
    u, v = np.array(DERIVED_PROFILE["u"]), np.array(DERIVED_PROFILE["v"])
    assert_allclose(ds["wind_speed"].values, np.hypot(u, v), atol=1e-9)
    assert_allclose(ds["wind_direction"].values[0], 270.0)


def test_derived_file_with_celsius_temperatures_is_refused_with_the_reason(tmp_path):
    """TEMP in tenths of degC where the layout has tenths of K: the reason names the unit, not a header field."""
    lines = encoders.encode_igra_derived([("2026-01-15T12:00", DERIVED_PROFILE)]).splitlines()
    fixed = [lines[0]] + [ln[:24] + f"{int(round(t * 10)):7d}" + ln[31:]
                          for ln, t in zip(lines[1:], DERIVED_PROFILE["temperature"], strict=True)]
    path = tmp_path / "drvd.txt"
    path.write_text("\n".join(fixed) + "\n")
    with pytest.raises(SoundingFormatError, match="look like degC") as e:
        igra.read(path)
    assert "header field" not in str(e.value) and "drvd.txt" in str(e.value)


def test_bom_and_crlf(tmp_path):
    """An IGRA file saved with a UTF-8 byte-order mark and CRLF line ends reads as the plain file."""
    path = _write(tmp_path, SOUNDING_1 + SOUNDING_2)
    plain = igra.read(path)
    path.write_bytes(b"\xef\xbb\xbf" + path.read_bytes().replace(b"\n", b"\r\n"))
    assert reader_for(path).FORMAT == "igra"
    again = igra.read(path)
    for a, b in zip(plain, again, strict=True):
        np.testing.assert_array_equal(a["temperature"].values, b["temperature"].values)
        assert a.attrs["quality"] == b.attrs["quality"]


def test_trailing_control_characters(tmp_path):
    """A DOS end-of-file mark and a form feed after a record are no content: same profiles, with a note."""
    path = _write(tmp_path, SOUNDING_1 + SOUNDING_2)
    plain = igra.read(path)
    lines = SOUNDING_1 + SOUNDING_2
    lines[3] += "\x0c"
    path.write_text("\n".join(lines) + "\n\x1a")
    again = igra.read(path)
    for a, b in zip(plain, again, strict=True):
        np.testing.assert_array_equal(a["pressure"].values, b["pressure"].values)
        np.testing.assert_array_equal(a["temperature"].values, b["temperature"].values)
    assert any("control characters" in e["reason"] for e in again[0].attrs["quality"])

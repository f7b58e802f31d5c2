"""BUFR radiosonde reader: files written by eccodes itself (TEMP sequence 3 09 052) from a profile, read back.

The check is the round trip through the reference BUFR library (ECMWF eccodes): values, units (Pa, K, m/s),
station, launch time, the vertical-sounding significance flags (flag table 0 08 042), several subsets per
message and several messages per file.
"""

import numpy as np
import pyproj  # noqa: F401  (PROJ must be loaded before the eccodes wheel's libraries, see icing.io.bufr)
import pytest
from numpy.testing import assert_allclose

ec = pytest.importorskip("eccodes")

from icing.errors import SoundingFormatError  # noqa: E402
from icing.io import bufr, reader_for  # noqa: E402

SFC, STD, TROP, MAXW, SIGT = (bufr.SIGNIFICANCE_BITS[k] for k in ("surface", "standard_level", "tropopause",
                                                                 "maximum_wind", "significant_temperature"))


def _sounding(station, hour, shift=0.0):
    return {"block": 0, "station": station, "time": (2026, 1, 15, hour, 5), "lat": 52.0, "lon": -34.0,
            "elev": 15.0,
            "pressure": np.array([1012.0, 1000.0, 950.0, 850.0, 700.0, 250.0]) * 100.0,
            "height": np.array([15.0, 80.0, np.nan, 1456.0, 3010.0, 10400.0]),
            "temperature": np.array([4.0, 3.6, 1.0, -2.3, -9.5, -52.0]) + T0 + shift,
            "dewpoint": np.array([2.5, 2.2, 0.0, np.nan, -12.0, -60.0]) + T0 + shift,
            "wind_direction": np.array([240.0, 240.0, 245.0, 250.0, 260.0, 270.0]),
            "wind_speed": np.array([6.2, 6.7, 8.0, 10.3, 15.5, 52.0]),
            "significance": np.array([SFC, STD, SIGT, STD, STD, STD | MAXW])}


T0 = 273.15


def _missing(v):
    v = np.asarray(v, dtype=float)
    return np.where(np.isfinite(v), v, ec.CODES_MISSING_DOUBLE)


def write_bufr(path, messages):
    """Write messages (lists of soundings, one subset each, uncompressed) with the TEMP sequence 309052."""
    with open(path, "wb") as fh:
        for subsets in messages:
            h = ec.codes_bufr_new_from_samples("BUFR4")
            for key, value in (("edition", 4), ("masterTableNumber", 0), ("bufrHeaderCentre", 255),
                               ("dataCategory", 2), ("internationalDataSubCategory", 4),
                               ("masterTablesVersionNumber", 28), ("localTablesVersionNumber", 0),
                               ("typicalYear", 2026), ("typicalMonth", 1), ("typicalDay", 15),
                               ("typicalHour", 0), ("typicalMinute", 0), ("numberOfSubsets", len(subsets)),
                               ("observedData", 1), ("compressedData", 0)):
                ec.codes_set(h, key, value)
            ec.codes_set_array(h, "inputExtendedDelayedDescriptorReplicationFactor",
                               [s["pressure"].size for s in subsets])
            ec.codes_set_array(h, "inputDelayedDescriptorReplicationFactor", [0] * len(subsets))
            ec.codes_set_array(h, "unexpandedDescriptors", [309052])
            for key, f in (("blockNumber", lambda s: s["block"]), ("stationNumber", lambda s: s["station"]),
                           ("year", lambda s: s["time"][0]), ("month", lambda s: s["time"][1]),
                           ("day", lambda s: s["time"][2]), ("hour", lambda s: s["time"][3]),
                           ("minute", lambda s: s["time"][4]), ("second", lambda s: 0)):
                ec.codes_set_array(h, key, [int(f(s)) for s in subsets])
            for key, name in (("latitude", "lat"), ("longitude", "lon"),
                              ("heightOfStationGroundAboveMeanSeaLevel", "elev")):
                ec.codes_set_array(h, key, [float(s[name]) for s in subsets])
            for key, name in (("pressure", "pressure"), ("nonCoordinateGeopotentialHeight", "height"),
                              ("airTemperature", "temperature"), ("dewpointTemperature", "dewpoint"),
                              ("windDirection", "wind_direction"), ("windSpeed", "wind_speed")):
                ec.codes_set_array(h, key, np.concatenate([_missing(s[name]) for s in subsets]))
            ec.codes_set_array(h, "extendedVerticalSoundingSignificance",
                               np.concatenate([s["significance"] for s in subsets]).astype(int))
            ec.codes_set(h, "pack", 1)
            ec.codes_write(h, fh)
            ec.codes_release(h)


def test_one_subset_round_trip(tmp_path):
    path = tmp_path / "one.bufr"
    src = _sounding(101, 0)
    write_bufr(path, [[src]])
    assert reader_for(path).FORMAT == "bufr"
    (ds,) = bufr.read(path)
    assert ds.attrs["station"] == "00101"
    assert ds.attrs["time"] == "2026-01-15T00:05:00Z"
    assert_allclose([ds.attrs["latitude"], ds.attrs["longitude"], ds.attrs["elevation"]], [52.0, -34.0, 15.0])
    assert_allclose(ds["pressure"].values, src["pressure"] / 100.0)
    # Table B scales of the TEMP sequence: temperatures to 0.01 K, wind speed 0.1 m/s, height 1 m.
    assert_allclose(ds["temperature"].values, src["temperature"] - T0, atol=0.006)
    assert np.isnan(ds["dewpoint"].values[3])
    assert_allclose(ds["dewpoint"].values[[0, 1, 2, 4, 5]], src["dewpoint"][[0, 1, 2, 4, 5]] - T0, atol=0.006)
    assert_allclose(ds["wind_speed"].values, src["wind_speed"], atol=0.051)
    assert_allclose(ds["wind_direction"].values, src["wind_direction"])
    assert_allclose(ds["height"].values[[0, 1, 3, 4, 5]], src["height"][[0, 1, 3, 4, 5]])
    assert 80.0 < ds["height"].values[2] < 1456.0  # not in the message: filled hypsometrically
    assert list(ds["vertical_significance"].values) == list(src["significance"])
    assert ds["vertical_significance"].values[-1] & MAXW


def test_several_subsets_and_messages(tmp_path):
    path = tmp_path / "many.bufr"
    write_bufr(path, [[_sounding(101, 0), _sounding(102, 0, shift=1.0)], [_sounding(103, 12, shift=-2.0)]])
    profiles = bufr.read(path)
    assert [p.attrs["station"] for p in profiles] == ["00101", "00102", "00103"]
    assert [p.attrs["bufr_message"] for p in profiles] == [1, 1, 2]
    assert_allclose(profiles[1]["temperature"].values[0], 5.0, atol=0.006)
    assert_allclose(profiles[2]["temperature"].values[0], 2.0, atol=0.006)
    assert profiles[2].attrs["time"] == "2026-01-15T12:05:00Z"


def test_not_bufr_is_an_error(tmp_path):
    path = tmp_path / "bad.bufr"
    path.write_bytes(b"BUFR" + b"\x00" * 40)
    with pytest.raises(SoundingFormatError, match="bad.bufr"):
        bufr.read(path)


def _from_profile(ds, station):
    """A sounding dict (as write_bufr takes) from a canonical profile Dataset."""
    sig = np.where(np.arange(ds.sizes["level"]) == 0, SFC, 0) | np.where(
        np.isin(ds["pressure"].values, [1000, 925, 850, 700, 500, 400, 300, 250, 200]), STD, 0)
    return {"block": 0, "station": station, "time": (2026, 1, 15, 12, 0), "lat": ds.attrs["latitude"],
            "lon": ds.attrs["longitude"], "elev": ds.attrs["elevation"],
            "pressure": ds["pressure"].values * 100.0, "height": ds["height"].values,
            "temperature": ds["temperature"].values + T0, "dewpoint": ds["dewpoint"].values + T0,
            "wind_direction": ds["wind_direction"].values, "wind_speed": ds["wind_speed"].values,
            "significance": sig}


def test_profile_written_by_eccodes_reads_back(tmp_path):
    """A canonical profile written with eccodes and read back is the same profile within the BUFR Table B
    precision of the TEMP sequence (0.01 K, 0.1 m/s, 1 deg, 1 gpm, 10 Pa)."""
    from icing.profile import build_profile

    p = np.array([1005.0, 1000.0, 925.0, 850.0, 800.0, 700.0, 500.0, 400.0, 300.0])
    t = np.array([6.0, 5.6, 1.2, -3.0, -4.1, -10.5, -24.0, -33.5, -47.0])
    ds = build_profile(p, t, dewpoint=t - np.array([1.0, 1.2, 0.5, 0.3, 0.2, 2.0, 12.0, 20.0, 25.0]),
                       wind_direction=np.linspace(200, 280, p.size), wind_speed=np.linspace(4, 40, p.size),
                       station="00104", latitude=54.8, longitude=-25.5, elevation=120.0)
    path = tmp_path / "profile.bufr"
    write_bufr(path, [[_from_profile(ds, 104)]])
    (back,) = bufr.read(path)
    assert back.attrs["station"] == "00104" and back.attrs["elevation"] == 120.0
    for name, tol in (("pressure", 0.1), ("temperature", 0.006), ("dewpoint", 0.006), ("wind_speed", 0.051),
                      ("wind_direction", 0.5), ("height", 0.5)):
        assert_allclose(back[name].values, ds[name].values, atol=tol, err_msg=name)

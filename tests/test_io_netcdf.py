"""netCDF: round trip of our own files and CF discrete-sampling-geometry profiles from elsewhere."""

from pathlib import Path

import numpy as np
import xarray as xr
from numpy.testing import assert_allclose

import icing
from icing.io import netcdf

SAMPLES = Path(__file__).parents[1] / "sample_soundings"


def test_round_trip(tmp_path):
    ds = icing.read_sounding(SAMPLES / "S5_00105_2026011500.csv")
    netcdf.write(ds, tmp_path / "x.nc")
    back = icing.read_sounding(tmp_path / "x.nc")
    for name in ("pressure", "height", "temperature", "dewpoint", "wind_speed"):
        assert_allclose(back[name].values, ds[name].values, equal_nan=True)
    assert back.attrs["station"] == ds.attrs["station"] and back.attrs["time"] == ds.attrs["time"]
    assert back.attrs["quality"] == ds.attrs["quality"]


def test_cf_dsg_profile_in_other_units_and_order(tmp_path):
    """A CF-1.8 featureType=profile file (variables by standard_name), top-down, in Pa and K."""
    p = np.array([500.0, 700.0, 850.0, 1000.0]) * 100
    t = np.array([-25.0, -8.0, 2.0, 10.0]) + 273.15
    rh = np.array([0.3, 0.7, 0.9, 0.85])
    ds = xr.Dataset(
        {"pres": ("z", p, {"standard_name": "air_pressure", "units": "Pa"}),
         "ta": ("z", t, {"standard_name": "air_temperature", "units": "K"}),
         "hur": ("z", rh, {"standard_name": "relative_humidity", "units": "1"}),
         "zg": ("z", [5550.0, 2950.0, 1450.0, 100.0], {"standard_name": "geopotential_height", "units": "m"}),
         "lat": ((), 51.0, {"standard_name": "latitude", "units": "degrees_north"}),
         "lon": ((), -33.0, {"standard_name": "longitude", "units": "degrees_east"}),
         "time": ((), np.datetime64("2026-01-15T06:00"), {"standard_name": "time"})},
        attrs={"featureType": "profile", "Conventions": "CF-1.8"})
    ds.to_netcdf(tmp_path / "cf.nc", engine="h5netcdf")
    prof = icing.read_sounding(tmp_path / "cf.nc")
    assert_allclose(prof["pressure"].values, [1000, 850, 700, 500])
    assert_allclose(prof["temperature"].values, [10.0, 2.0, -8.0, -25.0], atol=1e-9)
    assert_allclose(prof["relative_humidity"].values, [85, 90, 70, 30], atol=1e-9)
    assert prof.attrs["latitude"] == 51.0 and prof.attrs["time"] == "2026-01-15T06:00:00Z"


# --- files this library writes: exact round trip, CF conventions, broken files (issue 16) -------------------

import json  # noqa: E402

import h5py  # noqa: E402
import pytest  # noqa: E402

from icing.errors import SoundingFormatError  # noqa: E402


def _assert_same(back, ds):
    for name in list(netcdf.VARIABLES) + ["qc_flag"]:
        if name in ds:
            np.testing.assert_array_equal(back[name].values, ds[name].values, err_msg=name)
    for key in ("station", "latitude", "longitude", "elevation", "time", "quality"):
        assert back.attrs[key] == ds.attrs[key] or (key in ("latitude", "longitude", "elevation")
                                                    and np.isnan(back.attrs[key]) and np.isnan(ds.attrs[key])), key


@pytest.mark.parametrize("sample", ["S5_00105_2026011500.csv", "S3_00103_2026011512.csv"])
def test_round_trip_is_exact(tmp_path, sample):
    """Values, QC flags (height filled, dewpoint derived), station, position, time and quality record come
    back bit for bit."""
    ds = icing.read_sounding(SAMPLES / sample)
    netcdf.write(ds, tmp_path / "x.nc")
    _assert_same(icing.read_sounding(tmp_path / "x.nc"), ds)


def test_round_trip_without_time_or_position(tmp_path):
    ds = netcdf.build_profile([1000, 850, 700], [10.0, 2.0, -8.0], relative_humidity=[90, 80, 50], station="X")
    netcdf.write(ds, tmp_path / "x.nc")
    back = icing.read_sounding(tmp_path / "x.nc")
    _assert_same(back, ds)
    assert back.attrs["time"] == ""


def test_stacked_profiles_round_trip(tmp_path):
    many = icing.read_soundings([SAMPLES / "S5_00105_2026011500.csv", SAMPLES / "S1_00101_2026011512.csv"])
    netcdf.write(many, tmp_path / "m.nc")
    back = icing.read_soundings([tmp_path / "m.nc"])
    for name in ("pressure", "temperature", "height", "qc_flag"):
        np.testing.assert_array_equal(back[name].values, many[name].values, err_msg=name)
    assert list(back["station"].values) == list(many["station"].values)
    np.testing.assert_array_equal(back["time"].values, many["time"].values)
    assert back.attrs["quality"] == many.attrs["quality"]


@pytest.mark.filterwarnings("ignore::DeprecationWarning")  # the checker's own deprecated IOOS SOS plug-ins
def test_written_files_pass_the_cf_checker(tmp_path):
    """The IOOS compliance-checker's CF-1.8 suite (PyPI compliance-checker) finds nothing at any priority:
    standard names from the CF table only where one exists, flag_masks/flag_meanings without units, DSG
    profile structure."""
    runner = pytest.importorskip("compliance_checker.runner")
    runner.CheckSuite().load_all_available_checkers()
    one = icing.read_sounding(SAMPLES / "S5_00105_2026011500.csv")
    netcdf.write(one, tmp_path / "one.nc")
    netcdf.write(icing.read_soundings([SAMPLES / "S1_00101_2026011500.csv", SAMPLES / "S2_00102_2026011512.csv"]),
                 tmp_path / "two.nc")
    for name in ("one.nc", "two.nc"):
        out = tmp_path / f"{name}.json"
        ok, _ = runner.ComplianceChecker.run_checker(str(tmp_path / name), ["cf:1.8"], 0, "strict",
                                                     output_filename=str(out), output_format="json")
        report = json.loads(out.read_text())["cf:1.8"]
        assert ok and report["high_count"] == report["medium_count"] == report["low_count"] == 0, report
    with h5py.File(tmp_path / "one.nc") as f:
        assert "units" not in f["qc_flag"].attrs and "standard_name" not in f["qc_flag"].attrs
        assert "flag_masks" in f["qc_flag"].attrs and "flag_meanings" in f["qc_flag"].attrs


def _own_file(tmp_path, edit):
    ds = icing.read_sounding(SAMPLES / "S1_00101_2026011500.csv")
    netcdf.write(ds, tmp_path / "x.nc")
    with h5py.File(tmp_path / "x.nc", "r+") as f:
        edit(f)
    return tmp_path / "x.nc"


@pytest.mark.parametrize("edit, pattern", [
    (lambda f: f.attrs.__setitem__("quality_json", "[{broken"), "quality_json is not valid JSON"),
    (lambda f: f.attrs.__setitem__("quality_json", "[1, 2]"), "quality_json is not a list of entries"),
    (lambda f: f.__delitem__("temperature"), "no temperature variable"),
    (lambda f: f["time"].attrs.__setitem__("units", "fortnights since the flood"), "time"),
])
def test_broken_own_file_is_a_typed_error_naming_it(tmp_path, edit, pattern):
    with pytest.raises(SoundingFormatError, match=pattern) as e:
        icing.read_sounding(_own_file(tmp_path, edit))
    assert e.value.file.endswith("x.nc")


def test_bad_time_attribute_of_an_older_file(tmp_path):
    """Files written before time became a variable carry it as a global attribute: a bad one is typed."""
    def edit(f):
        del f["time"]
        for name in f:
            if "coordinates" in f[name].attrs:
                f[name].attrs["coordinates"] = "latitude longitude pressure"
        f.attrs["time"] = "2026-13-45T99:00Z"
    with pytest.raises(SoundingFormatError, match="not a date") as e:
        icing.read_sounding(_own_file(tmp_path, edit))
    assert e.value.file.endswith("x.nc")

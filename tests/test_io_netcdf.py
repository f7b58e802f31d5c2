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

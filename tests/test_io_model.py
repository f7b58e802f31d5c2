"""Reading model fields on pressure levels (icing.io.model): names, units and axis conventions.

References: MetPy (dewpoint from relative and from specific humidity, wind speed and direction), the WMO
geopotential metre (geopotential / standard gravity 9.80665 m s-2, the 3rd CGPM 1901 value), and the same
fields written in another convention.
"""

from __future__ import annotations

import metpy.calc as mpcalc
import numpy as np
import pandas as pd
import pytest
import xarray as xr
from metpy.units import units

from icing.errors import SoundingFormatError
from icing.io.model import normalise_model, read_model
from icing.physics import thermo

LEV = np.array([1000.0, 925.0, 850.0, 700.0, 500.0, 300.0])
LAT = np.array([50.0, 50.5, 51.0])
LON = np.array([-20.0, -19.5, -19.0, -18.5])
TIMES = pd.date_range("2026-01-15", periods=2, freq="6h").values


def _cf(seed=0):
    """CF fields (time, plev, latitude, longitude), pressure in Pa, temperature in K, RH in percent."""
    rng = np.random.default_rng(seed)
    shape = (TIMES.size, LEV.size, LAT.size, LON.size)
    t = 288.0 - 0.0065 * np.array([100, 750, 1450, 3000, 5550, 9150])[None, :, None, None] + rng.normal(0, 1, shape)
    dims = ("time", "plev", "latitude", "longitude")
    return xr.Dataset(
        {"ta": (dims, t, {"units": "K", "standard_name": "air_temperature"}),
         "hur": (dims, rng.uniform(30, 100, shape), {"units": "%", "standard_name": "relative_humidity"}),
         "zg": (dims, np.broadcast_to(np.array([100, 750, 1450, 3000, 5550, 9150.0])[None, :, None, None],
                                      shape).copy(), {"units": "m", "standard_name": "geopotential_height"}),
         "ua": (dims, rng.normal(10, 5, shape), {"units": "m s-1", "standard_name": "eastward_wind"}),
         "va": (dims, rng.normal(0, 5, shape), {"units": "m s-1", "standard_name": "northward_wind"})},
        coords={"time": TIMES, "plev": ("plev", LEV * 100, {"units": "Pa", "standard_name": "air_pressure"}),
                "latitude": ("latitude", LAT, {"units": "degrees_north"}),
                "longitude": ("longitude", LON, {"units": "degrees_east"})})


def test_canonical_layout_and_metpy_dewpoint():
    """Dims (time, latitude, longitude, level), pressure decreasing, degC; dewpoint from RH as MetPy's
    dewpoint_from_relative_humidity; wind speed and direction as MetPy's wind_speed / wind_direction."""
    src = _cf()
    m = normalise_model(src, source="x.nc")
    assert m["temperature"].dims == ("time", "latitude", "longitude", "level")
    assert m["pressure"].attrs["units"] == "hPa" and np.all(np.diff(m["pressure"].values) < 0)
    t = src["ta"].transpose("time", "latitude", "longitude", "plev").values
    rh = src["hur"].transpose("time", "latitude", "longitude", "plev").values
    np.testing.assert_allclose(m["temperature"].values, t - 273.15, atol=1e-9)
    ref = mpcalc.dewpoint_from_relative_humidity(t * units.K, rh * units.percent).m_as("degC")
    np.testing.assert_allclose(m["dewpoint"].values, ref, atol=0.05)  # MetPy: Bolton; ours: Murphy and Koop
    u = src["ua"].transpose("time", "latitude", "longitude", "plev").values * units("m/s")
    v = src["va"].transpose("time", "latitude", "longitude", "plev").values * units("m/s")
    np.testing.assert_allclose(m["wind_speed"].values, mpcalc.wind_speed(u, v).m_as("m/s"), rtol=1e-12)
    np.testing.assert_allclose(m["wind_direction"].values, mpcalc.wind_direction(u, v).m_as("degree"), atol=1e-9)


def test_relative_humidity_fraction_and_geopotential():
    """RH as a fraction (unit 1) reads as percent; geopotential (m2 s-2) / 9.80665 is geopotential height."""
    src = _cf()
    alt = src.copy()
    alt["hur"] = alt["hur"] / 100.0
    alt["hur"].attrs = {"units": "1", "standard_name": "relative_humidity"}
    alt["z"] = alt["zg"] * 9.80665
    alt["z"].attrs = {"units": "m2 s-2", "standard_name": "geopotential"}
    alt = alt.drop_vars("zg")
    a, b = normalise_model(src), normalise_model(alt)
    for name in ("relative_humidity", "dewpoint", "height"):
        np.testing.assert_allclose(b[name].values, a[name].values, rtol=1e-12, err_msg=name)
    assert any("geopotential divided" in e["reason"] for e in b.attrs["quality"])


def test_specific_humidity_dewpoint_against_metpy():
    """Dewpoint from specific humidity as MetPy's dewpoint_from_specific_humidity (sub-saturated values)."""
    src = _cf().drop_vars("hur")
    q = np.ones(src["ta"].shape) * np.array([6e-3, 4e-3, 3e-3, 1.5e-3, 5e-4, 5e-5])[None, :, None, None]
    src["q"] = (src["ta"].dims, q, {"units": "kg kg-1", "standard_name": "specific_humidity"})
    m = normalise_model(src)
    p = (LEV * units.hPa)[None, None, None, :]
    qq = q.transpose(0, 2, 3, 1) * units("kg/kg")
    e_ref = mpcalc.vapor_pressure(p, mpcalc.mixing_ratio_from_specific_humidity(qq)).m_as("Pa")
    e_ours = thermo.saturation_vapor_pressure_water(m["dewpoint"].values + thermo.T0)
    np.testing.assert_allclose(e_ours, e_ref, rtol=1e-6)  # the vapour pressure the dewpoint stands for
    ref = mpcalc.dewpoint_from_specific_humidity(p, qq).m_as("degC")
    # MetPy inverts Bolton (1980), we Murphy and Koop (2005): they part by up to ~0.1 K near -58 degC.
    np.testing.assert_allclose(m["dewpoint"].values, ref, atol=0.15)


def test_latitude_order_and_longitude_convention_are_normalised():
    """North-to-south latitudes and 0..360 longitudes give the same Dataset as the canonical layout."""
    src = _cf()
    flipped = src.isel(latitude=slice(None, None, -1)).assign_coords(longitude=src["longitude"].values % 360.0)
    a, b = normalise_model(src), normalise_model(flipped)
    for name in a.data_vars:
        np.testing.assert_array_equal(b[name].values, a[name].values)
    np.testing.assert_array_equal(b["longitude"].values, LON)
    reasons = " ".join(e["reason"] for e in b.attrs["quality"])
    assert "latitudes reversed" in reasons and "longitudes from" in reasons


def test_antimeridian_grid_stays_contiguous():
    """A domain across the antimeridian keeps one increasing range (0..360); one across Greenwich -180..180."""
    src = _cf().assign_coords(longitude=np.array([179.0, 179.5, -180.0, -179.5]))
    m = normalise_model(src)
    np.testing.assert_array_equal(m["longitude"].values, [179.0, 179.5, 180.0, 180.5])
    src = _cf().assign_coords(longitude=np.array([359.0, 359.5, 0.0, 0.5]))
    np.testing.assert_array_equal(normalise_model(src)["longitude"].values, [-1.0, -0.5, 0.0, 0.5])


def test_grib_names_fold_forecast_steps_into_valid_time():
    """cfgrib's names (t, r, gh, isobaricInhPa in hPa ascending, time x step) normalise like the CF file."""
    src = _cf()
    grib = xr.Dataset(
        {k: (("step", "isobaricInhPa", "latitude", "longitude"), src[v].values[:, ::-1],
             {"units": u, "GRIB_shortName": k})
         for k, v, u in (("t", "ta", "K"), ("r", "hur", "%"), ("gh", "zg", "gpm"))},
        coords={"time": TIMES[0], "step": TIMES - TIMES[0],
                "isobaricInhPa": ("isobaricInhPa", LEV[::-1], {"units": "hPa"}),
                "latitude": LAT, "longitude": LON})
    a = normalise_model(src.drop_vars(["ua", "va"]))
    b = normalise_model(grib, source="x.grib2")
    np.testing.assert_array_equal(b["time"].values.astype("datetime64[s]"), TIMES.astype("datetime64[s]"))
    for name in ("temperature", "dewpoint", "height"):
        np.testing.assert_allclose(b[name].values, a[name].values, rtol=1e-12, err_msg=name)


def test_surface_pressure_masks_levels_below_ground_and_range_checks():
    """Levels below the surface pressure and temperatures outside -100..60 degC become missing, recorded."""
    src = _cf()
    src["ps"] = (("time", "latitude", "longitude"), np.full((2, 3, 4), 90000.0),
                 {"units": "Pa", "standard_name": "surface_air_pressure"})
    src["ta"][0, 3, 0, 0] = 400.0
    m = normalise_model(src)
    assert np.isnan(m["temperature"].values[..., :2]).all()  # 1000 and 925 hPa under a 900 hPa surface
    assert np.isfinite(m["temperature"].values[..., 2]).all()
    assert np.isnan(m["temperature"].values[0, 0, 0, 3])
    removed = [e for e in m.attrs["quality"] if e.get("variable") == "temperature"]
    assert removed and removed[0]["count"] == 1


def test_read_model_file_lazily(tmp_path):
    """A netCDF file read with chunks stays lazy (dask) and equals the eager read."""
    pytest.importorskip("dask")
    path = tmp_path / "m.nc"
    _cf().to_netcdf(path, engine="h5netcdf")
    lazy = read_model(path, chunks={})
    assert lazy["temperature"].chunks is not None
    eager = read_model(path)
    for name in eager.data_vars:
        np.testing.assert_allclose(lazy[name].values, eager[name].values, rtol=0, atol=0, err_msg=name)


def test_errors_name_the_file_and_reason(tmp_path):
    """Missing units, missing humidity, a missing file and GRIB without cfgrib raise SoundingFormatError."""
    src = _cf()
    src["ta"].attrs.pop("units")
    with pytest.raises(SoundingFormatError, match="'ta' has no units"):
        normalise_model(src, source="bad.nc")
    with pytest.raises(SoundingFormatError, match="no humidity"):
        normalise_model(_cf().drop_vars("hur"), source="bad.nc")
    with pytest.raises(SoundingFormatError, match="no such model file"):
        read_model(tmp_path / "absent.nc")
    try:
        import cfgrib  # noqa: F401
    except ImportError:
        fake = tmp_path / "x.grib2"
        fake.write_bytes(b"GRIB" + b"\x00" * 100)
        with pytest.raises(SoundingFormatError, match="cfgrib"):
            read_model(fake)


def test_temperature_without_levels_or_one_level_is_refused():
    """A model field that is not a profile: temperature lacking the level dimension, or a single level."""
    src = _cf()
    flat = src.assign(ta=src["ta"].isel(plev=0, drop=True))
    with pytest.raises(SoundingFormatError, match="no pressure-level dimension") as e:
        normalise_model(flat, source="flat.nc")
    assert e.value.file == "flat.nc"
    with pytest.raises(SoundingFormatError, match="only 1 pressure level") as e:
        normalise_model(src.isel(plev=[2]), source="one.nc")
    assert e.value.file == "one.nc"


def test_pressure_levels_in_the_wrong_unit_are_named():
    src = _cf()
    src["plev"].attrs["units"] = "hPa"  # values are Pa
    with pytest.raises(SoundingFormatError, match="Pa labelled hPa"):
        normalise_model(src, source="x.nc")


def test_kelvin_labelled_celsius_is_named():
    """Air temperatures above 150 labelled degC are kelvin (no air is warmer than ~60 degC)."""
    src = _cf()
    src["ta"].attrs["units"] = "degC"
    with pytest.raises(SoundingFormatError, match="look like kelvin") as e:
        normalise_model(src, source="k.nc")
    assert e.value.file == "k.nc"

"""Write the demo scenario's model grid (invented fields) as CF netCDF: ``model/demo_model.nc``.

It sits in its own folder so that reading ``sample_soundings/`` as a directory of soundings does not meet a
gridded file (the sounding reader would refuse it); read it with :func:`icing.io.model.read_model` or
:class:`icing.flight.gridsource.GridSource`.

Our own invented model run over the same invented region as the demo soundings (the Varrow Isles, see
``make_scenario.py``): a 0.5 degree grid over 51-57 N, 36-21 W, valid 2026-01-15 00, 06 and 12 UTC, on 23
pressure levels 1000-200 hPa. Each column blends the scenario's station profiles (temperature and dewpoint
depression nodes) by inverse distance squared, with a gentle wave on top; 06 UTC is the mean of 00 and 12 UTC.
Heights come from the hypsometric equation above an invented sea-level pressure field. Demo data only, never
check values for tests.

The file deliberately uses a layout our reader must normalise: dims (time, plev, latitude, longitude), pressure
levels in Pa, latitudes from north to south, longitudes in 0..360, temperature in K, relative humidity in
percent, float32 (about 0.3 MB). Run ``python sample_soundings/make_model.py`` to rewrite it.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import xarray as xr

from icing.physics import thermo

HERE = Path(__file__).parent
LEVELS = np.array([1000, 975, 950, 925, 900, 875, 850, 825, 800, 775, 750, 725, 700, 650, 600, 550, 500, 450,
                   400, 350, 300, 250, 200], dtype=float)
LAT = np.arange(57.0, 50.99, -0.5)  # north to south, as many models write it
LON = np.arange(324.0, 339.01, 0.5)  # 36 W .. 21 W in the 0..360 convention
HOURS = ("00", "06", "12")


def _scenario():
    import importlib.util

    spec = importlib.util.spec_from_file_location("make_scenario", HERE / "make_scenario.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def _station_columns(sc, hour):
    """Temperature and dewpoint depression (degC) of every station on LEVELS, from the scenario's nodes."""
    t, dd = [], []
    for station in sc.STATIONS:
        nodes = np.array(sc.CASES[(station, hour)][1], dtype=float)
        x = -np.log(LEVELS)
        t.append(np.interp(x, -np.log(nodes[:, 0]), nodes[:, 1]))
        dd.append(np.interp(x, -np.log(nodes[:, 0]), nodes[:, 2]))
    return np.array(t), np.array(dd)


def main(path=HERE / "model" / "demo_model.nc"):
    sc = _scenario()
    st_lat = np.array([v[1] for v in sc.STATIONS.values()])
    st_lon = np.array([v[2] for v in sc.STATIONS.values()])
    st_ps = np.array([v[4] for v in sc.STATIONS.values()])
    lat2, lon2 = np.meshgrid(LAT, LON - 360.0, indexing="ij")
    d2 = ((lat2[..., None] - st_lat) ** 2 + ((lon2[..., None] - st_lon) * np.cos(np.radians(54.0))) ** 2)
    w = 1.0 / np.maximum(d2, 0.05) ** 2
    w /= w.sum(axis=-1, keepdims=True)  # (lat, lon, station)
    wave = 0.8 * np.sin(np.radians(40.0 * (lon2 + 36.0))) * np.cos(np.radians(60.0 * (lat2 - 51.0)))
    fields = {}
    for hour in ("00", "12"):
        t_st, dd_st = _station_columns(sc, hour)
        t = np.einsum("yxs,sl->yxl", w, t_st) + wave[..., None]
        dd = np.maximum(np.einsum("yxs,sl->yxl", w, dd_st), 0.0)
        fields[hour] = (t, dd)
    fields["06"] = tuple(0.5 * (a + b) for a, b in zip(fields["00"], fields["12"], strict=True))
    pmsl = np.einsum("yxs,s->yx", w, st_ps)  # invented sea-level pressure, hPa
    temp, rh, gh, u, v = [], [], [], [], []
    for hour in HOURS:
        t, dd = fields[hour]
        tk = t + thermo.T0
        tdk = tk - dd
        z = thermo.hypsometric_heights(np.broadcast_to(LEVELS * 100.0, tk.shape), tk, tdk,
                                       anchor_height=8.0 * (pmsl - 1000.0))
        temp.append(tk)
        rh.append(100.0 * thermo.relative_humidity_water(tk, tdk))
        gh.append(z)
        frac = 1.0 - LEVELS / 1010.0  # the soundings' south-westerlies strengthening with height
        spd = 6.0 + 30.0 * frac ** 0.8
        dirn = np.radians(240.0 + 30.0 * frac)
        u.append(np.broadcast_to(-spd * np.sin(dirn), tk.shape))
        v.append(np.broadcast_to(-spd * np.cos(dirn), tk.shape))
    dims = ("time", "plev", "latitude", "longitude")

    def var(a, units, std, long):
        arr = np.moveaxis(np.array(a), -1, 1).astype(np.float32)  # (time, lat, lon, lev) -> (time, lev, lat, lon)
        return dims, arr, {"units": units, "standard_name": std, "long_name": long}

    ds = xr.Dataset(
        {"ta": var(temp, "K", "air_temperature", "air temperature"),
         "hur": var(rh, "%", "relative_humidity", "relative humidity over water"),
         "zg": var(gh, "m", "geopotential_height", "geopotential height"),
         "ua": var(u, "m s-1", "eastward_wind", "eastward wind"),
         "va": var(v, "m s-1", "northward_wind", "northward wind")},
        coords={"time": ("time", np.array([f"2026-01-15T{h}:00" for h in HOURS], dtype="datetime64[ns]"),
                         {"standard_name": "time"}),
                "plev": ("plev", LEVELS * 100.0, {"units": "Pa", "standard_name": "air_pressure",
                                                  "positive": "down"}),
                "latitude": ("latitude", LAT, {"units": "degrees_north", "standard_name": "latitude"}),
                "longitude": ("longitude", LON, {"units": "degrees_east", "standard_name": "longitude"})},
        attrs={"title": "Varrow Isles demo model run (invented fields; demo data, not a forecast)",
               "name": "demo-model", "Conventions": "CF-1.8", "scenario": "Varrow Isles, 2026-01-15",
               "icing_model": 1})
    enc = {k: {"compression": "gzip", "compression_opts": 4} for k in ds.data_vars}
    Path(path).parent.mkdir(parents=True, exist_ok=True)
    ds.to_netcdf(path, engine="h5netcdf", encoding=enc)
    return path


if __name__ == "__main__":
    print(main())

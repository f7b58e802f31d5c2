"""Model fields on pressure levels (netCDF with CF names, or GRIB2 through cfgrib) as a gridded profile Dataset.

:func:`read_model` opens a file (lazily when ``chunks`` is given) and :func:`normalise_model` turns any such
Dataset into the profile model of :mod:`icing.profile` with leading dimensions: dims ``(time, latitude,
longitude, level)``, ``level`` last with pressure decreasing (surface first), latitude increasing, longitude
in -180..180 (or 0..360 when the domain is contiguous only that way, as across the antimeridian), and the
variables ``pressure`` (hPa, per level), ``temperature`` (degC), ``dewpoint`` (degC), ``height`` (m,
geopotential), where given ``relative_humidity`` (percent), ``cloud_liquid`` (g/m3), ``wind_speed`` (m/s) and
``wind_direction`` (deg). What is recognised:

============================  ==========================================================  ================
quantity                      CF standard_name                                            GRIB short name
============================  ==========================================================  ================
temperature                   air_temperature                                             t
relative humidity (% or 1)    relative_humidity                                           r
specific humidity             specific_humidity                                           q
dewpoint                      dew_point_temperature                                       dpt
geopotential height           geopotential_height                                         gh
geopotential (m2/s2)          geopotential                                                z
cloud liquid (kg/kg)          mass_fraction_of_cloud_liquid_water_in_air                  clwc, clwmr
cloud liquid (kg/m3)          mass_concentration_of_cloud_liquid_water_in_air             --
wind components               eastward_wind, northward_wind                               u, v
surface pressure              surface_air_pressure                                        sp
============================  ==========================================================  ================

Units come from each variable's ``units`` attribute (never guessed): relative humidity in percent or as a
fraction (unit ``1``), geopotential divided by standard gravity (WMO definition of the geopotential metre),
pressure levels in Pa or hPa. Every change is listed in the ``quality`` attribute: reordered axes, converted
units, derived quantities, the range checks of :mod:`icing.profile` (temperature outside -100..60 degC and
relative humidity above 105 % set missing, 100-105 % set to 100 %) and levels below the ground (pressure above
the surface pressure, where a surface pressure is given) set missing. Missing stays NaN: it is never "no cloud".

GRIB2 (through cfgrib, tested with cfgrib 0.9.15 and ecCodes 2.50 on files written by ecCodes): only messages
with ``typeOfLevel=isobaricInhPa`` are read; cfgrib writes no ``*.idx`` index file; a corrupted message, or a
field whose levels or times do not fit the others (which cfgrib by default only logs and leaves out), is an
error. Reference time x forecast step become one dimension of valid times (a valid time given twice, as by two
overlapping runs, is an error); a file with one pressure level is an error (a profile needs two). Latitudes and
longitudes of a regular_ll grid are rebuilt from the GRIB grid definition and scanning mode, because cfgrib
labels grids scanned east to west, or written across Greenwich as 358..1 degrees east, in another order than
their values.
"""

from __future__ import annotations

import importlib
import re
from pathlib import Path

import numpy as np
import xarray as xr

from icing.errors import IcingError, ProfileQualityError, SoundingFormatError
from icing.physics import thermo
from icing.profile import P_RANGE, RH_MAX, T_RANGE, VARIABLES, Z_RANGE, check_temperature_unit
from icing.units import ureg

__all__ = ["read_model", "normalise_model", "sniff_grib", "FORMAT_NETCDF", "FORMAT_GRIB"]

FORMAT_NETCDF = "model-netcdf"
FORMAT_GRIB = "model-grib2"

# quantity: (CF standard names, GRIB short names or common variable names)
_FIELDS = {
    "temperature": (("air_temperature",), ("t", "ta", "tmp", "temperature")),
    "relative_humidity": (("relative_humidity",), ("r", "rh", "hur", "relative_humidity")),
    "specific_humidity": (("specific_humidity",), ("q", "hus", "spfh", "specific_humidity")),
    "dewpoint": (("dew_point_temperature",), ("dpt", "td", "dewpoint")),
    "geopotential_height": (("geopotential_height",), ("gh", "zg", "hgt", "height")),
    "geopotential": (("geopotential",), ("z",)),
    "cloud_liquid_fraction": (("mass_fraction_of_cloud_liquid_water_in_air", "cloud_liquid_water_mixing_ratio"),
                              ("clwc", "clwmr", "clw")),
    "cloud_liquid_concentration": (("mass_concentration_of_cloud_liquid_water_in_air",), ("cloud_liquid",)),
    "eastward_wind": (("eastward_wind",), ("u", "ua", "ugrd")),
    "northward_wind": (("northward_wind",), ("v", "va", "vgrd")),
    "surface_pressure": (("surface_air_pressure",), ("sp", "ps", "pres_sfc")),
}
_VERTICAL_NAMES = ("isobaricInhPa", "pressure_level", "plev", "level", "lev", "pressure", "isobaric", "pres")
_LAT_NAMES = ("latitude", "lat")
_LON_NAMES = ("longitude", "lon")
_TIME_NAMES = ("time", "valid_time", "t")


def sniff_grib(head: bytes) -> bool:
    """Does the start of a file look like GRIB (edition 1 or 2)?"""
    return head[:4] == b"GRIB"


def read_model(path, *, chunks=None, engine=None) -> xr.Dataset:
    """Read model fields on pressure levels from a netCDF or GRIB2 file into the gridded profile Dataset.

    Parameters
    ----------
    path : str or path-like
        netCDF (CF standard names and units) or GRIB2 (needs the optional ``cfgrib`` package, the ``grib``
        extra; only the isobaric levels are read).
    chunks : dict, "auto" or None
        Passed to :func:`xarray.open_dataset`; given, every variable is a lazy dask array (the ``level``
        dimension is always kept in one chunk). None reads eagerly.
    engine : str, optional
        The xarray backend; by default ``cfgrib`` for GRIB and ``h5netcdf`` (else any installed) for netCDF.

    Raises
    ------
    SoundingFormatError
        The file is missing, not readable (for GRIB: a corrupted message, fields that do not share one grid of
        levels, times and points, no isobaric levels, a grid other than regular_ll), or lacks temperature,
        humidity, pressure levels or a valid time, or gives a valid time twice.
    """
    path = Path(path)
    if not path.exists():
        raise SoundingFormatError("no such model file", file=path)
    with open(path, "rb") as fh:
        head = fh.read(16)
    is_grib = sniff_grib(head) or engine == "cfgrib"
    if is_grib:
        try:
            # eccodes (under cfgrib) crashes the interpreter if it is loaded before pyproj: load pyproj first.
            importlib.import_module("pyproj")
            importlib.import_module("cfgrib")
        except ImportError:
            raise SoundingFormatError("reading GRIB2 needs the optional cfgrib package (pip install "
                                      "'icing[grib]')", file=path) from None
        ds = _open_grib(path, chunks)
        fmt = FORMAT_GRIB
    else:
        ds = None
        errors = []
        for eng in ([engine] if engine else ["h5netcdf", None]):
            try:
                ds = xr.open_dataset(path, engine=eng, chunks=chunks)
                break
            except Exception as exc:  # each backend raises its own types
                errors.append(str(exc))
        if ds is None:
            raise SoundingFormatError(f"cannot open as netCDF: {errors[0]}", file=path)
        fmt = FORMAT_NETCDF
    try:
        out = normalise_model(ds, source=str(path), format=fmt)
        if chunks is None:
            out = out.load()  # read eagerly, as documented; the file is closed below
    except (IcingError, MemoryError, KeyboardInterrupt):
        ds.close()
        raise
    except Exception as exc:  # a layout the checks above did not foresee: still one typed line naming the file
        ds.close()
        raise SoundingFormatError(f"cannot read the model fields: {type(exc).__name__}: {str(exc)[:200]}",
                                  file=path) from exc
    if chunks is None:
        ds.close()
    return out


def _open_grib(path, chunks):
    """The isobaric-level fields of a GRIB file through cfgrib, strictly.

    ``indexpath=""``: cfgrib writes no ``*.idx`` index file next to the user's file. ``errors="raise"``: by
    default cfgrib only logs a corrupted message, or a field whose levels or times do not fit the others, and
    leaves it out of the Dataset; here that is an error (nothing is dropped silently).
    """
    try:
        ds = xr.open_dataset(path, engine="cfgrib", chunks=chunks, decode_timedelta=True,
                             backend_kwargs={"filter_by_keys": {"typeOfLevel": "isobaricInhPa"},
                                             "indexpath": "", "errors": "raise"})
    except Exception as exc:  # eccodes and cfgrib raise their own types
        reason = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        if type(exc).__name__ == "DatasetBuildError":
            reason = ("the fields on isobaric levels do not form one grid of levels x times x points (read "
                      f"by cfgrib: {reason}); split the file by variable or forecast step first")
        raise SoundingFormatError(f"cannot read as GRIB2: {reason}", file=path) from None
    if not ds.data_vars:
        ds.close()
        raise SoundingFormatError("no GRIB fields on isobaric levels (typeOfLevel isobaricInhPa); only model "
                                  "fields on pressure levels are read", file=path)
    return ds


# --- helpers -------------------------------------------------------------------------------------------

def _unit(text, name, source):
    """The pint unit of a CF/UDUNITS unit string ('m s-1', 'm**2 s**-2', '%', 'K', 'gpm', '(0 - 1)')."""
    s = str(text).strip()
    if s in ("%", "percent"):
        return ureg.Unit("percent")
    if s in ("", "1", "(0 - 1)", "0-1", "fraction", "dimensionless", "kg kg**-1", "kg kg-1", "kg/kg"):
        return ureg.Unit("dimensionless")
    if s.lower() in ("gpm", "gpdam"):
        return ureg.Unit("m" if s.lower() == "gpm" else "dam")
    s = re.sub(r"([A-Za-z]+)\^?(-?\d+)", r"\1**\2", s.replace("**", "^"))
    s = re.sub(r"\s+", "*", s.strip())
    try:
        return ureg.Unit(s)
    except Exception:
        raise SoundingFormatError(f"variable {name!r}: unknown unit {text!r}", file=source) from None


def _convert(da, to, name, source):
    """Lazy-safe linear conversion of ``da`` from its ``units`` attribute to ``to``."""
    if "units" not in da.attrs:
        raise SoundingFormatError(f"variable {name!r} has no units attribute (units are never guessed)",
                                  file=source)
    src = _unit(da.attrs["units"], name, source)
    try:
        a = ureg.Quantity(0.0, src).to(to).magnitude
        b = ureg.Quantity(1.0, src).to(to).magnitude - a
    except Exception:
        raise SoundingFormatError(f"variable {name!r}: unit {da.attrs['units']!r} does not convert to {to}",
                                  file=source) from None
    out = da if (a, b) == (0.0, 1.0) else da * b + a
    return out.assign_attrs({})


def _find(ds, quantity):
    stds, names = _FIELDS[quantity]
    for vname, var in ds.data_vars.items():
        if var.attrs.get("standard_name") in stds:
            return vname
    for vname, var in ds.data_vars.items():
        if var.attrs.get("GRIB_shortName") in names or vname in names:
            return vname
    return None


def _coord_name(ds, std, names, units=()):
    for name, var in ds.coords.items():
        if var.attrs.get("standard_name") == std:
            return name
    for name in names:
        if name in ds.coords or name in ds.dims:
            return name
    for name, var in ds.coords.items():
        if str(var.attrs.get("units", "")) in units:
            return name
    return None


def _vertical(ds, source):
    for name, var in ds.coords.items():
        if var.ndim == 1 and (var.attrs.get("standard_name") == "air_pressure" or name in _VERTICAL_NAMES):
            return name
    raise SoundingFormatError("no pressure-level coordinate (standard_name air_pressure, or isobaricInhPa, "
                              "pressure_level, plev, level); only fields on pressure levels are read", file=source)


def _valid_time(ds, quality, source=None):
    """One ``time`` dimension of valid times, increasing and unique.

    cfgrib gives a reference ``time`` and a forecast ``step`` (each a dimension when the file holds several,
    else a scalar) and their sum ``valid_time``; several of both are folded into one dimension. A valid time
    that occurs twice (two runs for the same hour) is an error, as in :func:`icing.grid.diagnosis.open_fields`.
    """
    if "step" in ds.dims or ("valid_time" in ds.coords and "valid_time" not in ds.dims):
        if "valid_time" not in ds.coords:
            ds = ds.assign_coords(valid_time=ds["time"] + ds["step"])
        stack = [d for d in ("time", "step") if d in ds.dims]
        if len(stack) == 2:
            ds = ds.stack(_vt=stack)
        elif stack:
            ds = ds.rename({stack[0]: "_vt"})
        else:
            ds = ds.expand_dims("_vt")
        vt = np.atleast_1d(ds["valid_time"].values)
        ds = ds.drop_vars([n for n in ("_vt", "time", "step", "valid_time") if n in ds.coords])
        ds = ds.assign_coords(_vt=vt).rename({"_vt": "time"})
        quality.append({"level": None, "action": "changed", "reason": "valid time = reference time + forecast step"})
    elif "valid_time" in ds.dims and "time" not in ds.dims:
        ds = ds.drop_vars(["time"], errors="ignore").rename({"valid_time": "time"})
    elif "time" not in ds.dims:
        tname = next((n for n in _TIME_NAMES if n in ds.coords and ds[n].ndim == 0), None)
        if tname is None:
            return ds
        t = ds[tname].values
        ds = ds.drop_vars([n for n in _TIME_NAMES if n in ds.coords and ds[n].ndim == 0]).expand_dims(time=[t])
    if "time" in ds.dims:
        times = ds["time"].values
        if np.unique(times).size != times.size:
            _, first, counts = np.unique(times, return_index=True, return_counts=True)
            raise SoundingFormatError(f"valid time {times[first[counts > 1][0]]} occurs more than once (several "
                                      "forecast runs?); keep one run per valid time", file=source)
        if times.size > 1 and np.any(np.diff(times) < np.timedelta64(0, "ns")):
            ds = ds.sortby("time")
            quality.append({"level": None, "action": "reordered", "reason": "times sorted to increasing"})
        ds["time"].attrs = {"standard_name": "time", "long_name": "valid time"}
    return ds


def _grib_geography(ds, quality, source):
    """Latitudes and longitudes of a cfgrib regular_ll Dataset rebuilt from the GRIB grid definition.

    cfgrib labels the grid with ecCodes' sorted ``distinctLongitudes`` / ``distinctLatitudes`` but reshapes the
    values in scanning order, so a grid scanned east to west (``iScansNegatively=1``) or one written from 358 to
    1 degrees east gets longitudes that do not belong to its columns (ecmwf/cfgrib issues 236 and 402; seen with
    cfgrib 0.9.15 and ecCodes 2.50). The first and last grid point, the point counts and the scanning flags
    (GRIB2 code table 3.4) give the true coordinate of each row and column.
    """
    grids = {}
    for vname, var in ds.data_vars.items():
        if var.attrs.get("GRIB_gridType") is None:
            continue
        if var.attrs["GRIB_gridType"] != "regular_ll":
            raise SoundingFormatError(f"GRIB field {vname!r} is on a {var.attrs['GRIB_gridType']} grid; only "
                                      "regular latitude-longitude grids (regular_ll) are read", file=source)
        keys = ("Nx", "Ny", "latitudeOfFirstGridPointInDegrees", "latitudeOfLastGridPointInDegrees",
                "longitudeOfFirstGridPointInDegrees", "longitudeOfLastGridPointInDegrees", "iScansNegatively",
                "jScansPositively", "jPointsAreConsecutive")
        try:
            grids[vname] = tuple(float(var.attrs[f"GRIB_{k}"]) for k in keys)
        except (KeyError, TypeError, ValueError):
            raise SoundingFormatError(f"GRIB field {vname!r} lacks its grid definition keys", file=source) from None
    if not grids:
        return ds
    if len(set(grids.values())) > 1:
        raise SoundingFormatError(f"the GRIB fields {', '.join(grids)} are on different grids", file=source)
    nx, ny, lat0, lat1, lon0, lon1, i_neg, j_pos, j_consecutive = next(iter(grids.values()))
    nx, ny = int(nx), int(ny)
    if j_consecutive:
        raise SoundingFormatError("GRIB grid scanned column by column (jPointsAreConsecutive=1) is not read",
                                  file=source)
    if ds.sizes.get("latitude") != ny or ds.sizes.get("longitude") != nx:
        # a subset of a cfgrib Dataset: the grid definition describes the whole grid, not these points
        quality.append({"level": None, "action": "note", "reason": f"GRIB grid definition ({nx} x {ny} "
                        "points) is not the grid given (a subset?): latitudes/longitudes taken as given, not "
                        "checked against the scanning mode"})
        return ds
    # Longitudes run from the first point in the scanning direction; the span is taken modulo 360.
    span = ((lon0 - lon1) if i_neg else (lon1 - lon0)) % 360.0
    lon = lon0 + (-1.0 if i_neg else 1.0) * (span / (nx - 1) if nx > 1 else 0.0) * np.arange(nx)
    lat = lat0 + ((lat1 - lat0) / (ny - 1) if ny > 1 else 0.0) * np.arange(ny)
    if (j_pos and lat1 < lat0) or (not j_pos and lat1 > lat0):
        raise SoundingFormatError("GRIB grid: latitudes of the first and last point contradict the scanning "
                                  "flag jScansPositively", file=source)
    lon, lat = np.round(lon % 360.0, 6), np.round(lat, 6)
    old_lon = ds["longitude"].values.astype(float) % 360.0
    old_lat = ds["latitude"].values.astype(float)
    same_lon = np.allclose(np.minimum(np.abs(old_lon - lon), 360.0 - np.abs(old_lon - lon)), 0.0, atol=1e-5)
    if not same_lon or not np.allclose(old_lat, lat, atol=1e-5):
        quality.append({"level": None, "action": "changed", "reason": "GRIB latitudes/longitudes rebuilt from "
                        "the grid definition and scanning mode (cfgrib's coordinates were in another order)"})
    attrs = {"units": "degrees_east", "standard_name": "longitude"}
    return ds.assign_coords(longitude=("longitude", lon, attrs),
                            latitude=("latitude", lat, {"units": "degrees_north", "standard_name": "latitude"}))


def _normalise_longitude(lon):
    """New longitudes in -180..180 if that keeps the grid contiguous, else in 0..360; and the sort order."""
    lon = np.asarray(lon, dtype=float)
    step = np.min(np.abs(np.diff(np.sort(lon)))) if lon.size > 1 else 1.0
    global_grid = lon.size > 1 and lon.size * step >= 360.0 - 1e-6
    for wrapped in (((lon + 180.0) % 360.0) - 180.0, lon % 360.0):
        order = np.argsort(wrapped, kind="stable")
        gaps = np.diff(wrapped[order])
        if global_grid or gaps.size == 0 or gaps.max() <= 1.5 * step + 1e-9:
            return wrapped, order
    raise SoundingFormatError("longitudes do not form one contiguous range in either -180..180 or 0..360")


def normalise_model(ds: xr.Dataset, *, source="", format=FORMAT_NETCDF) -> xr.Dataset:
    """Turn a Dataset of model fields on pressure levels into the gridded profile Dataset (see module notes).

    Works lazily on dask-backed input (nothing is computed). ``source`` names the file in errors and in the
    ``source`` attribute.
    """
    quality = []
    src = source or None
    ds = _valid_time(ds, quality, src)
    ds = _grib_geography(ds, quality, src)
    for name in ("isobaricInhPa", "pressure_level", "plev"):
        if name in ds.coords and ds[name].ndim == 0:  # one level (cfgrib: a scalar coordinate)
            ds = ds.expand_dims(name)
    zname = _vertical(ds, src)
    latn = _coord_name(ds, "latitude", _LAT_NAMES, ("degrees_north", "degree_north"))
    lonn = _coord_name(ds, "longitude", _LON_NAMES, ("degrees_east", "degree_east"))
    if latn is None or lonn is None:
        raise SoundingFormatError("no latitude/longitude coordinates (a regular latitude-longitude grid is "
                                  "needed)", file=src)
    if "time" not in ds.dims:
        raise SoundingFormatError("no valid time (a time coordinate) in the model file", file=src)
    ds = ds.rename({n: c for n, c in ((latn, "latitude"), (lonn, "longitude"), (zname, "_plev")) if n != c})
    for c in ("latitude", "longitude"):
        if ds[c].ndim != 1:
            raise SoundingFormatError(f"{c} is {ds[c].ndim}-D; only regular latitude-longitude grids are read",
                                      file=src)
    names = {q: _find(ds, q) for q in _FIELDS}
    if names["temperature"] is None:
        raise SoundingFormatError("no temperature (standard_name air_temperature, GRIB short name t)", file=src)
    if not any(names[q] for q in ("relative_humidity", "specific_humidity", "dewpoint")):
        raise SoundingFormatError("no humidity (relative_humidity r, specific_humidity q or "
                                  "dew_point_temperature)", file=src)
    if "_plev" not in ds[names["temperature"]].dims:
        raise SoundingFormatError(f"temperature {names['temperature']!r} has dims {ds[names['temperature']].dims}: "
                                  f"no pressure-level dimension {zname!r}, so it is not a profile", file=src)
    if ds.sizes["_plev"] < 2:
        raise SoundingFormatError(f"only {ds.sizes['_plev']} pressure level ({zname}): a profile needs at least two "
                                  "levels", file=src)
    for c, lim in (("latitude", 90.0), ("longitude", 360.0)):
        vals = np.asarray(ds[c].values, dtype=float)
        if not np.all(np.isfinite(vals)) or np.any(np.abs(vals) > lim):
            raise SoundingFormatError(f"{c} values outside -{lim:g}..{lim:g} or not finite", file=src)
    dims = ("time", "latitude", "longitude", "_plev")
    for q, vname in names.items():
        if vname is None:
            continue
        var = ds[vname]
        want = dims if q != "surface_pressure" else dims[:3]
        extra = [d for d in var.dims if d not in want]
        for d in extra:
            if var.sizes[d] != 1:
                raise SoundingFormatError(f"variable {vname!r} has an extra dimension {d!r} of size "
                                          f"{var.sizes[d]}; select one member first (an ensemble: "
                                          "icing.flight.spread.ModelEnsemble, or 'icing screen --model FILE "
                                          "--spread')", file=src)
        var = var.squeeze(extra, drop=True) if extra else var
        ds[vname] = var.transpose(*[d for d in want if d in var.dims])
    # Axis order: latitude increasing, longitude contiguous, pressure decreasing.
    lat = ds["latitude"].values.astype(float)
    if lat.size > 1 and lat[0] > lat[-1]:
        ds = ds.isel(latitude=slice(None, None, -1))
        quality.append({"level": None, "action": "reordered", "reason": "latitudes reversed to increasing"})
    lat = ds["latitude"].values.astype(float)
    if lat.size > 1 and np.any(np.diff(lat) <= 0):
        raise SoundingFormatError("latitudes are not monotonic", file=src)
    lon_old = ds["longitude"].values.astype(float)
    try:
        lon_new, order = _normalise_longitude(lon_old)
    except SoundingFormatError as exc:
        raise SoundingFormatError(exc.reason, file=src) from None
    if not (np.array_equal(lon_new, lon_old) and np.array_equal(order, np.arange(lon_old.size))):
        ds = ds.assign_coords(longitude=lon_new).isel(longitude=order)
        quality.append({"level": None, "action": "changed", "reason": f"longitudes from "
                        f"{lon_old.min():g}..{lon_old.max():g} to {lon_new.min():g}..{lon_new.max():g} "
                        "(increasing)"})
    plev_var = ds["_plev"]
    plev_units = plev_var.attrs.get("units") or ("hPa" if zname == "isobaricInhPa" else None)
    if plev_units is None:
        raise SoundingFormatError(f"pressure coordinate {zname!r} has no units attribute", file=src)
    p_hpa = _convert(plev_var.assign_attrs(units=plev_units), "hPa", zname, src).values.astype(float)
    with np.errstate(invalid="ignore"):
        bad = ~((p_hpa >= P_RANGE[0]) & (p_hpa <= P_RANGE[1]))
    if bad.any():
        hint = " (hPa labelled Pa?)" if np.nanmax(np.abs(p_hpa)) < 12.0 else \
            " (Pa labelled hPa?)" if np.nanmin(p_hpa) > P_RANGE[1] else ""
        raise SoundingFormatError(f"pressure levels {', '.join(f'{v:g}' for v in p_hpa[bad][:5])} hPa outside "
                                  f"{P_RANGE[0]:g}..{P_RANGE[1]:g} hPa{hint}", file=src)
    if np.unique(p_hpa).size != p_hpa.size:
        raise SoundingFormatError("a pressure level occurs twice", file=src)
    order = np.argsort(-p_hpa, kind="stable")
    if not np.array_equal(order, np.arange(p_hpa.size)):
        ds = ds.isel(_plev=order)
        p_hpa = p_hpa[order]
        quality.append({"level": None, "action": "reordered", "reason": "levels sorted by decreasing pressure"})
    ds = ds.drop_vars("_plev").rename({"_plev": "level"}).assign_coords(level=np.arange(p_hpa.size))
    if ds.chunks:
        ds = ds.chunk({"level": -1})
    out = _fields(ds, names, p_hpa, quality, src)
    out.attrs = {"source": str(source), "format": format, "quality": quality, "featureType": "grid",
                 "Conventions": "CF-1.8", "icing_model": 1}
    for k in ("title", "institution", "name", "scenario", "model"):
        if k in ds.attrs:
            out.attrs[k] = ds.attrs[k]
    return out


def _fields(ds, names, p_hpa, quality, src):
    """Canonical variables in canonical units (lazy arithmetic only)."""
    coords = {c: ds[c] for c in ("time", "latitude", "longitude", "level")}
    pressure = xr.DataArray(p_hpa, dims="level")
    p_pa = pressure * 100.0
    note = quality.append

    def get(q, unit):
        vname = names[q]
        da = ds[vname]
        conv = _convert(da, unit, vname, src)
        if _unit(da.attrs["units"], vname, src) != ureg.Unit(unit):
            note({"level": None, "action": "changed", "reason": f"{vname}: {da.attrs['units']} converted to {unit}"})
        return conv

    _check_temperature_label(ds[names["temperature"]], src)
    t = get("temperature", "degC")
    bad_t = (t < T_RANGE[0]) | (t > T_RANGE[1])
    t = t.where(~bad_t)
    note({"level": None, "action": "removed", "reason": f"temperatures outside {T_RANGE[0]:.0f}..{T_RANGE[1]:.0f} "
          "degC are set missing", "variable": "temperature", **_count(bad_t)})
    tk = t + thermo.T0
    rh = None
    if names["relative_humidity"]:
        vname = names["relative_humidity"]
        u = _unit(ds[vname].attrs.get("units", ""), vname, src) if "units" in ds[vname].attrs else None
        if u is None:
            raise SoundingFormatError(f"variable {vname!r} has no units attribute (percent or 1?)", file=src)
        if u == ureg.Unit("dimensionless"):
            rh = ds[vname] * 100.0
            note({"level": None, "action": "changed", "reason": f"{vname}: relative humidity as a fraction "
                  "converted to percent"})
        else:
            rh = _convert(ds[vname], "percent", vname, src)
        too_high = (rh > RH_MAX) | (rh < -5.0)  # a few percent below zero is numerical noise of a model
        capped = (rh > 100.0) & ~too_high
        rh = rh.where(~too_high).clip(min=0.0, max=100.0)
        note({"level": None, "action": "removed", "reason": f"relative humidity above {RH_MAX:.0f} % or below -5 % set "
              "missing (-5..0 % set to 0)",
              "variable": "relative_humidity", **_count(too_high)})
        note({"level": None, "action": "changed", "reason": "relative humidity 100-105 % set to 100 %",
              "variable": "relative_humidity", **_count(capped)})
    if names["dewpoint"]:
        td = get("dewpoint", "degC")
        td = xr.where(td > t, t, td.where(td <= t + 1.0))
        note({"level": None, "action": "changed", "reason": "dewpoints above temperature by up to 1 degC set equal, "
              "by more set missing", "variable": "dewpoint"})
    elif rh is not None:
        td = _elementwise(lambda tk_, rh_: thermo.dewpoint_from_relative_humidity(
            tk_, np.maximum(rh_, 0.1) / 100.0) - thermo.T0, tk, rh)
        note({"level": None, "action": "filled", "reason": "dewpoint derived from relative humidity (Murphy and "
              "Koop 2005)", "variable": "dewpoint"})
    else:
        q = get("specific_humidity", "kg/kg")
        # vapour pressure from specific humidity: e = q p / (eps + (1 - eps) q)
        e = q.clip(min=1e-8) * p_pa / (thermo.EPSILON + (1.0 - thermo.EPSILON) * q.clip(min=1e-8))
        td = _elementwise(lambda e_, tk_: np.minimum(thermo.dewpoint_from_vapor_pressure(e_), tk_) - thermo.T0,
                          e, tk)
        note({"level": None, "action": "filled", "reason": "dewpoint derived from specific humidity",
              "variable": "dewpoint"})
    td = td.where(t.notnull())
    if rh is None:
        rh = _elementwise(lambda tk_, td_: 100.0 * thermo.relative_humidity_water(tk_, td_ + thermo.T0), tk, td)
    if names["geopotential_height"]:
        z = get("geopotential_height", "m")
    elif names["geopotential"]:
        vname = names["geopotential"]
        z = _convert(ds[vname], "m^2/s^2", vname, src) / thermo.G0
        note({"level": None, "action": "changed", "reason": f"{vname}: geopotential divided by standard gravity "
              "(9.80665 m/s2) to geopotential height", "variable": "height"})
    else:
        z = xr.apply_ufunc(_hypsometric, p_pa, tk, td + thermo.T0, input_core_dims=[["level"]] * 3,
                           output_core_dims=[["level"]], dask="parallelized", output_dtypes=[float])
        note({"level": None, "action": "filled", "reason": "no geopotential: heights by the hypsometric equation "
              "anchored at the standard-atmosphere height of the lowest level", "variable": "height"})
    bad_z = ~((z >= Z_RANGE[0]) & (z <= Z_RANGE[1])) & z.notnull()
    z = z.where(~bad_z)
    note({"level": None, "action": "removed", "reason": f"heights outside {Z_RANGE[0]:.0f}..{Z_RANGE[1]:.0f} m (or "
          "infinite) set missing", "variable": "height", **_count(bad_z)})
    data = {"pressure": pressure, "temperature": t, "dewpoint": td, "relative_humidity": rh, "height": z}
    if names["cloud_liquid_concentration"]:
        data["cloud_liquid"] = get("cloud_liquid_concentration", "g/m^3")
    elif names["cloud_liquid_fraction"]:
        ql = get("cloud_liquid_fraction", "kg/kg")
        data["cloud_liquid"] = ql * p_pa / (thermo.RD * tk) * 1000.0
        note({"level": None, "action": "changed", "reason": "cloud liquid mass fraction times dry-air density "
              "p/(Rd T) to g/m3 (virtual-temperature effect, under 1 %, neglected)", "variable": "cloud_liquid"})
    if names["eastward_wind"] and names["northward_wind"]:
        u = get("eastward_wind", "m/s")
        v = get("northward_wind", "m/s")
        data["wind_speed"] = np.hypot(u, v)
        data["wind_direction"] = (np.degrees(np.arctan2(-u, -v)) % 360.0)
        bad_w = ~(data["wind_speed"] <= 150.0) & data["wind_speed"].notnull()
        for k in ("wind_speed", "wind_direction"):
            data[k] = data[k].where(~bad_w)
        note({"level": None, "action": "removed", "reason": "wind speeds above 150 m/s (or infinite) set missing",
              "variable": "wind_speed", **_count(bad_w)})
    if names["surface_pressure"]:
        ps = get("surface_pressure", "hPa")
        below = pressure > ps
        for k in list(data):
            if k != "pressure":
                data[k] = data[k].where(~below)
        note({"level": None, "action": "removed", "reason": "levels below the ground (pressure above the surface "
              "pressure) set missing", **_count(below)})
    out = xr.Dataset(coords=coords)
    for k, da in data.items():
        unit, std, long = VARIABLES[k]
        attrs = {"units": unit, "long_name": long}
        if std:
            attrs["standard_name"] = std
        if k != "pressure":
            da = da.transpose("time", "latitude", "longitude", "level")
        out[k] = da.assign_attrs(attrs)
    out["latitude"].attrs.update(units="degrees_north", standard_name="latitude")
    out["longitude"].attrs.update(units="degrees_east", standard_name="longitude")
    return out


def _check_temperature_label(da, src):
    """Kelvin labelled degC (or degC labelled K) on a small sample (one time, one latitude row): typed error."""
    if "units" not in da.attrs:
        return  # the conversion names the missing unit
    sample = da.isel({d: 0 for d in ("time", "latitude") if d in da.dims})
    try:
        check_temperature_unit(np.asarray(sample.values, dtype=float), str(_unit(da.attrs["units"],
                                                                                 da.name, src)),
                               name=f"temperature {da.name!r}")
    except ProfileQualityError as exc:
        raise SoundingFormatError(exc.reason, file=src) from None


def _count(mask):
    """How many values a rule changed; only counted when the data are in memory (lazy data: not computed)."""
    if mask.chunks is None:
        return {"count": int(mask.sum())}
    return {}


def _elementwise(func, *args):
    return xr.apply_ufunc(func, *args, dask="parallelized", output_dtypes=[float])


def _hypsometric(p, tk, tdk):
    lowest = np.take(p, [0], axis=-1)[..., 0]
    anchor = thermo.standard_atmosphere_height(np.broadcast_to(lowest, tk.shape[:-1]))
    return thermo.hypsometric_heights(np.broadcast_to(p, tk.shape), tk, tdk, anchor_height=anchor)

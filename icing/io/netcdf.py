"""netCDF soundings: profiles written by this library, and CF discrete-sampling-geometry profiles.

Files from elsewhere are read by CF ``standard_name`` (``air_pressure``, ``air_temperature``,
``dew_point_temperature`` or ``relative_humidity``, ``geopotential_height``, ``wind_speed``,
``wind_from_direction``), in whatever units and level order they come; latitude, longitude and time are
scalars or length-one coordinates (``featureType = "profile"``). A file holding several profiles along a
profile dimension (a CF ``profile`` instance dimension, or one written by :func:`write`) gives one profile each.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import xarray as xr

from icing.errors import ProfileQualityError, SoundingFormatError
from icing.profile import VARIABLES, build_profile
from icing.units import Quantity, parse_unit

FORMAT = "netcdf"
_MAGIC = (b"CDF\x01", b"CDF\x02", b"\x89HDF\r\n\x1a\n")
_BY_STANDARD_NAME = {std: name for name, (_, std, _) in VARIABLES.items() if std}
_BY_STANDARD_NAME["geopotential_height"] = "height"
_BY_STANDARD_NAME["mass_concentration_of_cloud_liquid_water_in_air"] = "cloud_liquid"


def sniff(head: bytes, path) -> bool:
    return head.startswith(_MAGIC)


def write(profile, path):
    """Write a profile (or stacked profiles) to netCDF4 with h5netcdf; ``read`` gives them back exactly.

    The file follows the CF conventions (1.8) for discrete sampling geometries, featureType ``profile``:
    station (``cf_role = "profile_id"``), latitude, longitude, time and station elevation are variables
    (scalars, or along ``profile``), pressure is the vertical coordinate (``axis = "Z"``, ``positive =
    "down"``), every data variable names them in ``coordinates``; ``standard_name`` only where the CF table has
    one; ``qc_flag`` carries ``flag_masks`` and ``flag_meanings`` and no units. The quality record is the JSON
    global attribute ``quality_json``.
    """
    ds = profile.copy()
    attrs = dict(ds.attrs)
    quality = attrs.pop("quality", [])
    stacked = "profile" in ds.dims
    if not stacked:
        meta = {k: attrs.pop(k, None) for k in ("station", "latitude", "longitude", "elevation", "time")}
        ds["station"] = ((), str(meta["station"] or ""))
        for k in ("latitude", "longitude", "elevation"):
            ds[k] = ((), _attr_float(meta[k]))
        t = meta["time"]
        ds["time"] = ((), np.datetime64(str(t).rstrip("Z"), "s") if t else np.datetime64("NaT", "s"))
    for k in ("station", "source", "format"):
        if k in ds and ds[k].dtype == object:
            ds[k] = ds[k].astype(str)
    ds["station"].attrs = {"cf_role": "profile_id", "long_name": "station identifier"}
    ds["latitude"].attrs = {"units": "degrees_north", "standard_name": "latitude", "long_name": "station latitude"}
    ds["longitude"].attrs = {"units": "degrees_east", "standard_name": "longitude",
                             "long_name": "station longitude"}
    ds["elevation"].attrs = {"units": "m", "standard_name": "surface_altitude",
                             "long_name": "station elevation above mean sea level"}
    ds["time"].attrs = {"standard_name": "time", "long_name": "valid time (UTC)"}
    ds["time"].encoding.update(units="seconds since 1970-01-01T00:00:00", calendar="proleptic_gregorian",
                               dtype="float64")  # CF 1.8 section 2.2 has no 64-bit integers
    ds["pressure"].attrs.update(axis="Z", positive="down")
    coords = "time latitude longitude pressure"
    for name in list(ds.data_vars):
        if name in VARIABLES and name != "pressure" or name == "qc_flag":
            ds[name].attrs["coordinates"] = coords
    ds = ds.drop_vars([c for c in ("level", "profile") if c in ds.coords])
    for k, v in list(attrs.items()):
        if isinstance(v, float) and np.isnan(v):
            attrs[k] = "NaN"
        elif not isinstance(v, str | int | float | np.integer | np.floating):
            attrs[k] = json.dumps(v, default=str)
    attrs.update(quality_json=json.dumps(quality, default=_json_default), featureType="profile",
                 Conventions="CF-1.8", icing_profile=1)
    attrs.setdefault("title", "upper-air profile" + ("s" if stacked else "") + " (icing canonical profile)")
    attrs.setdefault("history", "written by the icing library (icing.io.netcdf.write)")
    ds.attrs = attrs
    ds.to_netcdf(path, engine="h5netcdf")


def _json_default(v):
    if isinstance(v, np.integer):
        return int(v)
    if isinstance(v, np.floating):
        return float(v)
    return str(v)


def _open(path):
    errors = []
    for engine in ("h5netcdf", None):
        try:
            return xr.open_dataset(path, engine=engine, decode_times=True)
        except Exception as exc:  # each backend raises its own types
            errors.append(exc)
    try:
        with xr.open_dataset(path, decode_times=False):
            pass
    except Exception:
        raise SoundingFormatError(f"cannot open as netCDF: {str(errors[0])[:200]}", file=path) from None
    raise SoundingFormatError(f"a time variable cannot be decoded: {str(errors[-1])[:200]}", file=path)


def read(path, units=None, **options):
    """Read every profile in a netCDF file.

    ``units``: a mapping variable -> unit for variables of a CF file that have no ``units`` attribute.

    Raises
    ------
    SoundingFormatError
        Not netCDF, an undecodable time, a broken quality record, no temperature or pressure variable, a
        variable without units; :class:`ProfileQualityError` for values that fail the profile checks.
    """
    if options:
        raise SoundingFormatError(f"unknown netCDF reader option(s): {', '.join(options)}", file=path)
    ds = _open(path)
    try:
        ds.load()
    except Exception as exc:
        raise SoundingFormatError(f"cannot read the data: {str(exc)[:200]}", file=path) from None
    finally:
        ds.close()
    if ds.attrs.get("icing_profile"):
        return _read_own(ds, path)
    return _read_cf(ds, path, units or {})


def _attr_float(v):
    try:
        return float(v)
    except (TypeError, ValueError, OverflowError):
        return np.nan


def _quality_record(ds, path):
    text = ds.attrs.get("quality_json", "[]")
    try:
        quality = json.loads(str(text))
    except (ValueError, RecursionError) as exc:
        raise SoundingFormatError(f"global attribute quality_json is not valid JSON: {exc}", file=path) from None
    if not isinstance(quality, list) or not all(isinstance(e, dict) for e in quality):
        raise SoundingFormatError("global attribute quality_json is not a list of entries (JSON objects)",
                                  file=path)
    return quality


def _time_text(t, path):
    """ISO text of a time value read from a file (datetime64, text, None); SoundingFormatError if not a time."""
    if t is None:
        return None
    if isinstance(t, np.ndarray):
        t = t.item() if t.size == 1 else None
    if isinstance(t, bytes):
        t = t.decode("utf-8", errors="replace")
    if isinstance(t, np.datetime64):
        return None if np.isnat(t) else str(t)
    if isinstance(t, int | np.integer):  # numpy datetime64 .item() at ns gives int
        return str(np.datetime64(int(t), "ns"))
    if isinstance(t, float | np.floating) and np.isnan(t):
        return None
    text = str(t).strip()
    if not text or text in ("NaT", "NaN"):
        return None
    try:
        ts = pd.Timestamp(text)
    except (ValueError, TypeError, OverflowError) as exc:
        raise SoundingFormatError(f"time {text[:40]!r} is not a date and time ({exc})", file=path) from None
    return None if ts is pd.NaT else text


def _read_own(ds, path):
    quality = _quality_record(ds, path)
    for need in ("pressure", "temperature"):
        if need not in ds.variables:
            raise SoundingFormatError(f"no {need} variable in a profile file written by this library", file=path)
    if "profile" in ds.dims:
        singles = [ds.isel(profile=i) for i in range(ds.sizes["profile"])]
    else:
        singles = [ds]
    out = []
    for i, one in enumerate(singles):
        kw = {}
        for name in VARIABLES:
            if name in one.variables:
                if one[name].ndim != 1:
                    raise SoundingFormatError(f"variable {name!r} has dims {one[name].dims}; one level "
                                              "dimension is needed", file=path)
                try:
                    kw[name] = np.asarray(one[name].values, dtype=float)
                except (TypeError, ValueError) as exc:
                    raise SoundingFormatError(f"variable {name!r} is not numeric: {exc}", file=path) from None
        meta = {}
        for k in ("station", "source", "format", "latitude", "longitude", "elevation", "time"):
            if k in one.variables and k not in one.dims:
                meta[k] = one[k].values.item() if one[k].ndim == 0 else one[k].values
            elif k in one.attrs:
                meta[k] = one.attrs[k]
        t = _time_text(meta.get("time"), path)
        q = [e for e in quality if e.get("profile", i) == i] if "profile" in ds.dims else quality
        q = [{k: v for k, v in e.items() if k != "profile"} for e in q]
        ok = np.isfinite(kw["pressure"])
        kw = {k: v[ok] for k, v in kw.items()}
        station = meta.get("station", "")
        station = station.decode("utf-8", errors="replace") if isinstance(station, bytes) else str(station)
        try:
            prof = build_profile(kw.pop("pressure"), kw.pop("temperature"), **kw, station=station,
                                 latitude=_attr_float(meta.get("latitude")),
                                 longitude=_attr_float(meta.get("longitude")),
                                 elevation=_attr_float(meta.get("elevation")), time=t,
                                 source=str(path), format=FORMAT, quality=q)
        except ProfileQualityError as exc:
            raise ProfileQualityError(exc.reason, file=path) from None
        # A file this library wrote passes the checks unchanged: keep its QC flags (the filled-height and
        # derived-dewpoint bits cannot be seen again once the values are filled in).
        if "qc_flag" in one.variables and prof.attrs["quality"] == q and one["qc_flag"].ndim == 1:
            flags = np.asarray(one["qc_flag"].values)[ok]
            if flags.size == prof.sizes["level"] and np.all(np.isfinite(flags)):
                prof["qc_flag"].values[:] = flags.astype(np.int32)
        prof.attrs["original_format"] = str(meta.get("format", ""))
        for k, v in one.attrs.items():
            if k in ("name", "scenario"):
                prof.attrs[k] = v
        out.append(prof)
    return out


def _quantity(var, name, path, units=None):
    unit = var.attrs.get("units")
    if unit is None:
        unit = (units or {}).get(name, (units or {}).get(str(var.name)))
    if unit is None:
        raise SoundingFormatError(f"variable {var.name!r} ({name}) has no units attribute (give it with "
                                  f"units={{'{name}': '...'}})", file=path)
    try:
        u = parse_unit(str(unit))
    except Exception as exc:
        raise SoundingFormatError(f"variable {var.name!r}: {exc}", file=path) from None
    if u == parse_unit("1") and name == "relative_humidity":
        return Quantity(np.asarray(var.values, dtype=float) * 100.0, "percent")
    return Quantity(np.asarray(var.values, dtype=float), u)


def _read_cf(ds, path, units):
    found = {}
    for vname, var in ds.variables.items():
        std = var.attrs.get("standard_name")
        if std in _BY_STANDARD_NAME and _BY_STANDARD_NAME[std] not in found:
            found[_BY_STANDARD_NAME[std]] = vname
    for need in ("pressure", "temperature"):
        if need not in found:
            raise SoundingFormatError(f"no variable with standard_name "
                                      f"{'air_pressure' if need == 'pressure' else 'air_temperature'}", file=path)
    tdims = {str(d).lower() for d in ds[found["temperature"]].dims}
    if ds.attrs.get("icing_model") or ({"lat", "latitude", "y"} & tdims and {"lon", "longitude", "x"} & tdims):
        raise SoundingFormatError("gridded model fields, not a sounding: read them with icing.io.model.read_model "
                                  "or screen with icing.flight.gridsource.GridSource (icing screen --model)", file=path)
    zdim = ds[found["temperature"]].dims[-1] if ds[found["temperature"]].ndim else None
    if zdim is None:
        raise SoundingFormatError("air_temperature has no vertical dimension", file=path)
    inst = [d for d in ds[found["temperature"]].dims if d != zdim]
    if len(inst) > 1:
        raise SoundingFormatError(f"air_temperature has dims {ds[found['temperature']].dims}; a profile file "
                                  "has one vertical dimension and at most one profile dimension", file=path)
    n = ds.sizes[inst[0]] if inst else 1
    coord_std = {"latitude": "latitude", "longitude": "longitude", "time": "time"}
    coords = {}
    for vname, var in ds.variables.items():
        std = var.attrs.get("standard_name") or (vname if vname in coord_std else None)
        if std in coord_std and std not in coords:
            coords[std] = var
    out = []
    for i in range(n):
        def pick(var, i=i):
            return var.isel({inst[0]: i}) if inst and inst[0] in var.dims else var

        kw = {}
        for name, vname in found.items():
            var = pick(ds[vname])
            if var.ndim == 0:  # a scalar pressure or height (e.g. surface) is not a profile variable
                continue
            kw[name] = _quantity(var, name, path, units)
        meta = {}
        for k, var in coords.items():
            v = pick(var)
            vals = np.atleast_1d(v.values)
            meta[k] = vals[0] if vals.size else None
        t = meta.get("time")
        t = _time_text(t, path) if isinstance(t, np.datetime64 | str | bytes) else None
        if "pressure" not in kw or "temperature" not in kw:
            raise SoundingFormatError("air_pressure and air_temperature must both vary along the vertical "
                                      "dimension", file=path)
        station = ""
        for cand in ("station_id", "station", "platform_id", "wmo_id"):
            if cand in ds.variables:
                sv = np.atleast_1d(pick(ds[cand]).values)
                station = str(sv[0].decode() if isinstance(sv[0], bytes) else sv[0])
                break
            if cand in ds.attrs:
                station = str(ds.attrs[cand])
                break
        try:
            prof = build_profile(kw.pop("pressure"), kw.pop("temperature"), **kw, station=station,
                                 latitude=_attr_float(meta.get("latitude")),
                                 longitude=_attr_float(meta.get("longitude")),
                                 elevation=_attr_float(ds.attrs.get("elevation", np.nan)), time=t,
                                 source=str(path), format="netcdf-cf")
        except ProfileQualityError as exc:
            raise ProfileQualityError(exc.reason, file=path) from None
        out.append(prof)
    return out

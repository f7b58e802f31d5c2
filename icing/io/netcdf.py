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
    """Write a profile (or stacked profiles) to netCDF4 with h5netcdf; ``read`` gives them back."""
    ds = profile.copy()
    ds.attrs = dict(ds.attrs)
    ds.attrs["quality_json"] = json.dumps(ds.attrs.pop("quality", []))
    ds.attrs["featureType"] = "profile"
    ds.attrs["Conventions"] = "CF-1.8"
    ds.attrs["icing_profile"] = 1
    for k in ("station", "source", "format"):
        if k in ds and ds[k].dtype == object:
            ds[k] = ds[k].astype(str)
    for k, v in list(ds.attrs.items()):
        if isinstance(v, float) and np.isnan(v):
            ds.attrs[k] = "NaN"
    ds.to_netcdf(path, engine="h5netcdf")


def _open(path):
    try:
        return xr.open_dataset(path, engine="h5netcdf", decode_times=True)
    except Exception as exc:
        try:
            return xr.open_dataset(path, decode_times=True)
        except Exception:
            raise SoundingFormatError(f"cannot open as netCDF: {exc}", file=path) from None


def read(path, **options):
    """Read every profile in a netCDF file."""
    with _open(path) as ds:
        ds.load()
    if ds.attrs.get("icing_profile"):
        return _read_own(ds, path)
    return _read_cf(ds, path)


def _attr_float(v):
    try:
        return float(v)
    except (TypeError, ValueError):
        return np.nan


def _read_own(ds, path):
    quality = json.loads(ds.attrs.get("quality_json", "[]"))
    if "profile" in ds.dims:
        singles = [ds.isel(profile=i) for i in range(ds.sizes["profile"])]
    else:
        singles = [ds]
    out = []
    for i, one in enumerate(singles):
        kw = {}
        for name in VARIABLES:
            if name in one:
                kw[name] = one[name].values
        meta = {}
        for k in ("station", "source", "format", "latitude", "longitude", "elevation", "time"):
            if k in one.variables and k not in one.dims:
                meta[k] = one[k].values.item() if one[k].ndim == 0 else one[k].values
            elif k in one.attrs:
                meta[k] = one.attrs[k]
        t = meta.get("time")
        if isinstance(t, np.datetime64):
            t = None if np.isnat(t) else str(t)
        if isinstance(t, int | np.integer):  # numpy datetime64 .item() at ns gives int
            t = str(np.datetime64(t, "ns"))
        q = [e for e in quality if e.get("profile", i) == i] if "profile" in ds.dims else quality
        q = [{k: v for k, v in e.items() if k != "profile"} for e in q]
        ok = np.isfinite(kw["pressure"])
        kw = {k: v[ok] for k, v in kw.items()}
        try:
            prof = build_profile(kw.pop("pressure"), kw.pop("temperature"), **kw,
                                 station=meta.get("station", ""), latitude=_attr_float(meta.get("latitude")),
                                 longitude=_attr_float(meta.get("longitude")),
                                 elevation=_attr_float(meta.get("elevation")), time=t or None,
                                 source=str(path), format=FORMAT, quality=q)
        except ProfileQualityError as exc:
            raise ProfileQualityError(exc.reason, file=path) from None
        prof.attrs["original_format"] = str(meta.get("format", ""))
        for k, v in one.attrs.items():
            if k in ("name", "scenario"):
                prof.attrs[k] = v
        out.append(prof)
    return out


def _quantity(var, name, path):
    unit = var.attrs.get("units")
    if unit is None:
        raise SoundingFormatError(f"variable {var.name!r} ({name}) has no units attribute", file=path)
    try:
        u = parse_unit(str(unit))
    except Exception as exc:
        raise SoundingFormatError(f"variable {var.name!r}: {exc}", file=path) from None
    if u == parse_unit("1") and name == "relative_humidity":
        return Quantity(np.asarray(var.values, dtype=float) * 100.0, "percent")
    return Quantity(np.asarray(var.values, dtype=float), u)


def _read_cf(ds, path):
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
            kw[name] = _quantity(var, name, path)
        meta = {}
        for k, var in coords.items():
            v = pick(var)
            vals = np.atleast_1d(v.values)
            meta[k] = vals[0] if vals.size else None
        t = meta.get("time")
        if t is not None and isinstance(t, np.datetime64):
            t = None if np.isnat(t) else str(t)
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

"""The canonical profile: one function builds it, one set of checks guards it.

A profile is an :class:`xarray.Dataset` with dimension ``level`` (surface first, pressure decreasing) and the
variables ``pressure`` (hPa), ``height`` (m MSL, geopotential), ``temperature`` (degC), ``dewpoint`` (degC),
``relative_humidity`` (percent, over water) and, where given, ``wind_speed`` (m/s), ``wind_direction`` (deg)
and ``cloud_liquid`` (g/m3). ``qc_flag`` holds a bit mask per level (see :data:`QC_FLAGS`). The attribute
``quality`` lists every level or value the checks dropped, changed, merged or filled, with the reason, so that
nothing is lost silently. Every reader ends in :func:`build_profile`.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import xarray as xr

from icing.errors import ProfileQualityError
from icing.physics import thermo
from icing.units import ureg

__all__ = ["build_profile", "stack_profiles", "check_temperature_unit", "VARIABLES", "QC_FLAGS", "format_quality"]

# name: (canonical unit, CF standard_name or None, long name)
VARIABLES = {
    "pressure": ("hPa", "air_pressure", "pressure"),
    "height": ("m", "geopotential_height", "geopotential height above mean sea level"),
    "temperature": ("degC", "air_temperature", "air temperature"),
    "dewpoint": ("degC", "dew_point_temperature", "dewpoint temperature (over water)"),
    "relative_humidity": ("percent", "relative_humidity", "relative humidity over water"),
    "wind_speed": ("m/s", "wind_speed", "wind speed"),
    "wind_direction": ("degree", "wind_from_direction", "direction the wind blows from"),
    "cloud_liquid": ("g/m^3", None, "cloud liquid water content given by the source"),
}
QC_FLAGS = {"height_filled": 1, "dewpoint_derived": 2, "value_changed": 4, "value_removed": 8, "merged": 16}
T_RANGE = (-100.0, 60.0)  # degC, plausible tropospheric and lower-stratospheric air
RH_MAX = 105.0  # percent: above this a humidity value is taken as an error rather than supersaturation
DEWPOINT_CLIP = 1.0  # degC: dewpoint above temperature by at most this is rounding, clipped to T
TD_MIN = -150.0  # degC: a dewpoint below this is a coding error (radiosondes report depressions up to ~50 K)


def check_temperature_unit(values, unit: str, name="temperature", file=None, line=None, column=None):
    """Raise :class:`ProfileQualityError` if values labelled degC or degF look like kelvin.

    Air temperatures in kelvin are all above about 170; in degC they are all below 60. A column whose
    finite values are all above 150 under a degC (or degF with all above 330) label is kelvin mislabelled.
    """
    v = np.asarray(values, dtype=float)
    v = v[np.isfinite(v)]
    if v.size == 0:
        return
    u = str(unit)
    if (u in ("degC", "degree_Celsius") and v.min() > 150.0) or (u in ("degF", "degree_Fahrenheit")
                                                                   and v.min() > 330.0):
        raise ProfileQualityError(
            f"{name} values {v.min():.1f}..{v.max():.1f} look like kelvin but are labelled {u}; "
            "label the column K (for example temperature_K)", file=file, line=line, column=column)


def _as_array(value, unit, name, n=None):
    """Canonical-unit float array from a Quantity or a plain array already in ``unit``."""
    if value is None:
        return None
    if isinstance(value, ureg.Quantity):
        try:
            mag = value.to(unit).magnitude
        except Exception as exc:
            raise ProfileQualityError(f"{name}: cannot convert {value.units:~} to {unit}") from exc
    else:
        mag = value
    arr = np.atleast_1d(np.asarray(mag, dtype=float))
    if n is not None and arr.shape != (n,):
        raise ProfileQualityError(f"{name}: {arr.shape[0]} values for {n} levels")
    return arr


def _format_time(time):
    if time is None or (isinstance(time, float) and np.isnan(time)):
        return ""
    ts = pd.Timestamp(time)
    if ts.tzinfo is not None:
        ts = ts.tz_convert("UTC").tz_localize(None)
    return ts.strftime("%Y-%m-%dT%H:%M:%SZ")


def build_profile(pressure, temperature, *, height=None, dewpoint=None, relative_humidity=None,
                  wind_speed=None, wind_direction=None, cloud_liquid=None, station="", latitude=np.nan,
                  longitude=np.nan, elevation=np.nan, time=None, source="", format="", lines=None,
                  quality=None, min_levels=2) -> xr.Dataset:
    """Build the canonical profile Dataset from arrays or Quantities, checking every level.

    Parameters
    ----------
    pressure, temperature : Quantity or array_like
        Required; plain arrays are taken in hPa and degC.
    height, dewpoint, relative_humidity, wind_speed, wind_direction, cloud_liquid : optional
        Plain arrays are taken in m, degC, percent, m/s, degree and g/m3. Missing values are NaN. A missing
        dewpoint is derived from relative humidity and the reverse; missing heights are filled by the
        hypsometric equation from the profile itself.
    station, latitude, longitude, elevation, time, source, format :
        Metadata: station identifier, position (deg), station elevation (m), valid time (UTC), source file
        and format name.
    lines : sequence of int, optional
        The source line of each input level, so the quality record can point at it.
    quality : list of dict, optional
        Entries a reader already made (groups it skipped); the checks append to it.

    Raises
    ------
    ProfileQualityError
        Fewer than ``min_levels`` usable levels, or a temperature column that looks like kelvin.
    """
    p = _as_array(pressure, "hPa", "pressure")
    n = p.shape[0]
    data = {"pressure": p}
    given = {"temperature": temperature, "height": height, "dewpoint": dewpoint,
             "relative_humidity": relative_humidity, "wind_speed": wind_speed, "wind_direction": wind_direction,
             "cloud_liquid": cloud_liquid}
    for name, value in given.items():
        arr = _as_array(value, VARIABLES[name][0], name, n)
        data[name] = np.full(n, np.nan) if arr is None else arr.copy()
    if not isinstance(temperature, ureg.Quantity):
        check_temperature_unit(data["temperature"], "degC", file=source or None)
    present = {name for name, value in given.items() if value is not None}
    src_lines = np.full(n, -1) if lines is None else np.asarray(lines, dtype=int)
    flags = np.zeros(n, dtype=np.int32)
    log = list(quality or [])

    def record(i, action, reason, variable=None):
        entry = {"level": int(i), "pressure_hpa": None if not np.isfinite(data["pressure"][i])
                 else round(float(data["pressure"][i]), 2), "action": action, "reason": reason}
        if variable:
            entry["variable"] = variable
        if src_lines[i] >= 0:
            entry["line"] = int(src_lines[i])
        log.append(entry)

    # Range checks, vectorised; only the levels that fail are visited, to record them.
    pres = data["pressure"]
    keep = np.isfinite(pres) & (pres > 0.0)
    for i in np.flatnonzero(~keep):
        record(i, "dropped", "pressure missing or not positive")

    def remove(name, bad, why):
        for i in np.flatnonzero(bad & keep):
            record(i, "removed", why(data[name][i]), name)
        data[name][bad] = np.nan
        flags[bad] |= QC_FLAGS["value_removed"]

    with np.errstate(invalid="ignore"):
        t = data["temperature"]
        remove("temperature", np.isfinite(t) & ((t < T_RANGE[0]) | (t > T_RANGE[1])),
               lambda v: f"temperature {v:.1f} degC outside {T_RANGE[0]:.0f}..{T_RANGE[1]:.0f}")
        td = data["dewpoint"]
        remove("dewpoint", np.isfinite(td) & ((td < TD_MIN) | (td > T_RANGE[1])),
               lambda v: f"dewpoint {v:.1f} degC outside {TD_MIN:.0f}..{T_RANGE[1]:.0f}")
        rh = data["relative_humidity"]
        remove("relative_humidity", np.isfinite(rh) & ((rh < 0.0) | (rh > RH_MAX)),
               lambda v: f"relative humidity {v:.1f} % outside 0..{RH_MAX:.0f}")
        high = (rh > 100.0) & keep
        for i in np.flatnonzero(high):
            record(i, "changed", f"relative humidity {rh[i]:.1f} % set to 100", "relative_humidity")
        rh[high] = 100.0
        flags[high] |= QC_FLAGS["value_changed"]
        t, td = data["temperature"], data["dewpoint"]
        excess = td - t
        clip = (excess > 0) & (excess <= DEWPOINT_CLIP) & keep
        for i in np.flatnonzero(clip):
            record(i, "changed", f"dewpoint {td[i]:.1f} above temperature {t[i]:.1f} degC, set equal", "dewpoint")
        td[clip] = t[clip]
        flags[clip] |= QC_FLAGS["value_changed"]
        far = excess > DEWPOINT_CLIP
        for i in np.flatnonzero(far & keep):
            record(i, "removed", f"dewpoint {td[i]:.1f} above temperature {t[i]:.1f} degC", "dewpoint")
        td[far] = np.nan
        flags[far] |= QC_FLAGS["value_removed"]
        for name, (lo, hi) in {"wind_speed": (0.0, 150.0), "wind_direction": (0.0, 360.0),
                               "cloud_liquid": (0.0, 10.0)}.items():
            v = data[name]
            remove(name, np.isfinite(v) & ((v < lo) | (v > hi)), lambda x, name=name, lo=lo, hi=hi:
                   f"{name} {x:g} outside {lo:g}..{hi:g}")
    empty = keep & ~np.any([np.isfinite(data[k]) for k in given], axis=0)
    for i in np.flatnonzero(empty):
        record(i, "dropped", "no usable value at this level")
    keep &= ~empty

    idx = np.flatnonzero(keep)
    idx = idx[np.argsort(-data["pressure"][idx], kind="stable")]
    if not np.array_equal(idx, np.flatnonzero(keep)):
        log.append({"level": None, "action": "reordered", "reason": "levels sorted by decreasing pressure"})
    # Levels that share a pressure become one. Values that agree are kept; values that conflict cannot be
    # resolved without inventing one (a mean is not in the report) or depending on the input order, so the
    # value is removed and the conflict recorded: the level then reads as unknown for that variable.
    ps = data["pressure"][idx]
    first = np.concatenate([[True], np.abs(np.diff(ps)) >= 1e-6]) if idx.size else np.zeros(0, bool)
    starts = np.flatnonzero(first)
    cols = {k: data[k][idx[starts]].copy() for k in data}
    out_flags = flags[idx[starts]].copy()
    out_lines = src_lines[idx[starts]].copy()
    sizes = np.diff(np.concatenate([starts, [idx.size]]))
    for gi in np.flatnonzero(sizes > 1):  # only duplicated pressures are visited
        g = idx[starts[gi]:starts[gi] + sizes[gi]]
        for k in data:
            vals = data[k][g]
            fin = vals[np.isfinite(vals)]
            if k == "pressure" or fin.size == 0:
                continue
            if np.ptp(fin) > 1e-6:
                record(g[0], "removed", f"duplicate level: conflicting {k} values "
                       f"{', '.join(f'{v:g}' for v in np.sort(fin))}; none kept", k)
                cols[k][gi] = np.nan
                out_flags[gi] |= QC_FLAGS["value_removed"]
            else:
                cols[k][gi] = fin[0]
        for j in g[1:]:
            record(j, "merged", f"duplicate of the level at {data['pressure'][g[0]]:g} hPa")
        out_flags[gi] |= QC_FLAGS["merged"] | int(np.bitwise_or.reduce(flags[g]))
    d = {k: np.asarray(v, dtype=float) for k, v in cols.items()}
    fl = np.asarray(out_flags, dtype=np.int32)
    ln = np.asarray(out_lines)

    def rec2(j, action, reason, variable=None):
        entry = {"level": None, "pressure_hpa": round(float(d["pressure"][j]), 2), "action": action,
                 "reason": reason}
        if variable:
            entry["variable"] = variable
        if ln[j] >= 0:
            entry["line"] = int(ln[j])
        log.append(entry)

    if np.count_nonzero(np.isfinite(d["temperature"])) < min_levels:
        raise ProfileQualityError(f"only {np.count_nonzero(np.isfinite(d['temperature']))} levels with a usable "
                                  f"temperature; at least {min_levels} are needed", file=source or None)
    tk = d["temperature"] + thermo.T0
    # Humidity: derive whichever of dewpoint and relative humidity is missing from the other.
    need_td = ~np.isfinite(d["dewpoint"]) & np.isfinite(d["relative_humidity"]) & np.isfinite(tk)
    if need_td.any():
        rh = np.maximum(d["relative_humidity"][need_td], 0.1) / 100.0
        d["dewpoint"][need_td] = thermo.dewpoint_from_relative_humidity(tk[need_td], rh) - thermo.T0
        fl[need_td] |= QC_FLAGS["dewpoint_derived"]
    need_rh = ~np.isfinite(d["relative_humidity"]) & np.isfinite(d["dewpoint"]) & np.isfinite(tk)
    if need_rh.any():
        # RH from a reported dewpoint is how radiosonde reports give humidity: not a quality flag.
        d["relative_humidity"][need_rh] = 100.0 * thermo.relative_humidity_water(
            tk[need_rh], d["dewpoint"][need_rh] + thermo.T0)
    _check_and_fill_heights(d, fl, rec2, elevation)
    return _to_dataset(d, fl, present, station=station, latitude=latitude, longitude=longitude,
                       elevation=elevation, time=time, source=source, format=format, quality=log)


def _check_and_fill_heights(d, fl, record, elevation):
    """Remove heights that do not increase upward, then fill missing heights hypsometrically."""
    z = d["height"]
    p_pa = d["pressure"] * 100.0
    # The highest finite height below each level (a removed height never exceeds it, so this equals the
    # highest height kept below).
    below = np.concatenate([[-np.inf], np.maximum.accumulate(np.where(np.isfinite(z), z, -np.inf))[:-1]])
    bad = np.isfinite(z) & (z <= below)
    for j in np.flatnonzero(bad):
        record(j, "removed", f"height {z[j]:.0f} m does not increase above the level below ({below[j]:.0f} m)",
               "height")
    z[bad] = np.nan
    fl[bad] |= QC_FLAGS["value_removed"]
    missing = ~np.isfinite(z)
    if not missing.any():
        return
    rel = thermo.hypsometric_heights(p_pa, d["temperature"] + thermo.T0, d["dewpoint"] + thermo.T0)
    known = np.flatnonzero(~missing)
    if known.size:
        # Offset between reported and hypsometric heights, interpolated in ln p between known levels.
        offset = np.interp(-np.log(p_pa[missing]), -np.log(p_pa[known]), z[known] - rel[known])
        z[missing] = rel[missing] + offset
        how = "hypsometric equation from the nearest reported heights"
    elif np.isfinite(elevation):
        z[:] = rel + float(elevation)
        how = "hypsometric equation from the station elevation at the first level"
    else:
        z[:] = rel + thermo.standard_atmosphere_height(p_pa[0])
        how = "hypsometric equation anchored at the standard-atmosphere height of the first level"
    fl[missing] |= QC_FLAGS["height_filled"]
    for j in np.flatnonzero(missing):
        record(j, "filled", f"height {z[j]:.0f} m computed by the {how}", "height")


def _to_dataset(d, flags, present, *, station, latitude, longitude, elevation, time, source, format, quality):
    coords = {"level": np.arange(d["pressure"].size)}
    data_vars = {}
    for name, (unit, std, long) in VARIABLES.items():
        if name not in ("pressure", "temperature", "height", "dewpoint", "relative_humidity") and \
                name not in present:
            continue
        attrs = {"units": unit, "long_name": long}
        if std:
            attrs["standard_name"] = std
        data_vars[name] = ("level", d[name], attrs)
    data_vars["qc_flag"] = ("level", flags, {"long_name": "quality-control flags",
                                            "flag_masks": np.array(list(QC_FLAGS.values()), dtype=np.int32),
                                            "flag_meanings": " ".join(QC_FLAGS)})
    attrs = {"station": str(station), "latitude": float(latitude), "longitude": float(longitude),
             "elevation": float(elevation), "time": _format_time(time), "source": str(source),
             "format": str(format), "quality": quality}
    return xr.Dataset(data_vars, coords=coords, attrs=attrs)


def format_quality(ds) -> list[str]:
    """One readable line per quality entry of a profile (for printing)."""
    out = []
    for e in ds.attrs.get("quality", []):
        where = []
        if e.get("line") is not None:
            where.append(f"line {e['line']}")
        if e.get("pressure_hpa") is not None:
            where.append(f"{e['pressure_hpa']:g} hPa")
        out.append(f"{e.get('action', '?')}: {'; '.join(where) + ': ' if where else ''}{e.get('reason', '')}")
    return out


def stack_profiles(profiles) -> xr.Dataset:
    """Stack profiles into one Dataset with a leading ``profile`` dimension (levels padded with NaN).

    Per-profile metadata (station, latitude, longitude, elevation, time, source, format) become variables
    along ``profile``; ``quality`` stays a list of entries, each tagged with its profile index.
    """
    profiles = list(profiles)
    if not profiles:
        raise ProfileQualityError("no profiles to stack")
    nlev = max(p.sizes["level"] for p in profiles)
    names = [n for n in list(VARIABLES) + ["qc_flag"] if any(n in p for p in profiles)]
    arrays = {}
    for n in names:
        fill = 0 if n == "qc_flag" else np.nan
        arr = np.full((len(profiles), nlev), fill, dtype=np.int32 if n == "qc_flag" else float)
        for i, p in enumerate(profiles):
            if n in p:
                arr[i, : p.sizes["level"]] = p[n].values
        attrs = next(p[n].attrs for p in profiles if n in p)
        arrays[n] = (("profile", "level"), arr, dict(attrs))
    meta = {k: [p.attrs.get(k, "") for p in profiles] for k in ("station", "source", "format")}
    for k in ("latitude", "longitude", "elevation"):
        arrays[k] = ("profile", np.array([float(p.attrs.get(k, np.nan)) for p in profiles]),
                     {"units": "degree_north" if k == "latitude" else "degree_east" if k == "longitude" else "m"})
    times = [p.attrs.get("time") or None for p in profiles]
    arrays["time"] = ("profile", np.array([np.datetime64(t.rstrip("Z"), "s") if t else np.datetime64("NaT", "s")
                                           for t in times]))
    for k, v in meta.items():
        arrays[k] = ("profile", np.array(v, dtype=object))
    quality = []
    for i, p in enumerate(profiles):
        quality += [dict(e, profile=i) for e in p.attrs.get("quality", [])]
    ds = xr.Dataset(arrays, coords={"profile": np.arange(len(profiles)), "level": np.arange(nlev)})
    ds.attrs["quality"] = quality
    return ds

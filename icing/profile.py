"""The canonical profile: one function builds it, one set of checks guards it.

A profile is an :class:`xarray.Dataset` with dimension ``level`` (surface first, pressure decreasing) and the
variables ``pressure`` (hPa), ``height`` (m MSL, geopotential), ``temperature`` (degC), ``dewpoint`` (degC),
``relative_humidity`` (percent, over water) and, where given, ``wind_speed`` (m/s), ``wind_direction`` (deg)
and ``cloud_liquid`` (g/m3). ``qc_flag`` holds a bit mask per level (see :data:`QC_FLAGS`). The attribute
``quality`` lists every level or value the checks dropped, changed, merged or filled, with the reason, so that
nothing is lost silently. Every reader ends in :func:`build_profile`.
"""

from __future__ import annotations

import bisect
from array import array

import numpy as np
import pandas as pd
import xarray as xr

from icing.errors import ProfileQualityError
from icing.physics import thermo
from icing.units import ureg

__all__ = ["build_profile", "stack_profiles", "check_temperature_unit", "check_pressure_unit", "VARIABLES", "QC_FLAGS",
           "format_quality", "P_RANGE", "T_RANGE", "Z_RANGE"]

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
P_RANGE = (1.0, 1100.0)  # hPa: the highest sea-level pressure on record is near 1084 hPa; 1 hPa is ~48 km
Z_RANGE = (-500.0, 50000.0)  # m: the lowest dry land is ~430 m below sea level; balloons burst below 50 km
ELEVATION_RANGE = (-500.0, 9000.0)  # m: station elevations (the highest ground is ~8850 m)
GROUND_MARGIN_HPA = 90.0  # hPa: without heights, a level this far above the standard ground pressure is under it
GROUND_TOLERANCE = 10.0  # m: a level this far below the station elevation is still the ground (rounding)
_BLOCK = 1 << 18  # levels per block where whole-profile temporaries would be large
MAX_ENTRIES = 1000  # filled heights beyond this many are one quality entry with a count
HEIGHT_OUTLIER = 1500.0  # m: a reported height this far from the hypsometric thickness is a coding error
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
    if u in ("K", "kelvin") and v.max() < 100.0:
        # No air on Earth is colder than ~170 K: values under 100 labelled K are Celsius (or Fahrenheit).
        raise ProfileQualityError(
            f"{name} values {v.min():.1f}..{v.max():.1f} look like degC but are labelled K; "
            "label the column degC (for example temperature_degC)", file=file, line=line, column=column)


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
    try:
        with np.errstate(over="ignore", invalid="ignore"):
            arr = np.atleast_1d(np.asarray(mag, dtype=float))
    except (TypeError, ValueError, OverflowError) as exc:
        raise ProfileQualityError(f"{name}: values are not numbers ({exc})") from None
    if arr.ndim != 1 or (n is not None and arr.shape != (n,)):
        raise ProfileQualityError(f"{name}: {arr.size} values for {n if n is not None else 'a 1-D list of'} levels")
    return arr


def _capped(indices, log, action, what, lines=None, variable=None):
    """The first MAX_ENTRIES indices (recorded one by one by the caller); the rest become one summary entry,
    so a file of millions of faulty rows keeps a quality record of bounded size."""
    indices = np.asarray(indices)
    if indices.size > MAX_ENTRIES:
        rest = indices[MAX_ENTRIES:]
        entry = {"level": None, "action": action, "count": int(rest.size),
                 "reason": f"{what} at {rest.size} more level(s) (one entry for them all)"}
        if variable:
            entry["variable"] = variable
        if lines is not None:
            ln = np.asarray(lines)[rest]
            if ln.size and ln.min() >= 0:
                entry["lines"] = [int(ln.min()), int(ln.max())]
        log.append(entry)
    return indices[:MAX_ENTRIES]


def _check_position(latitude, longitude, elevation, log, source):
    """Station position within the globe (longitude 180..360 brought to -180..180, with a note)."""
    out = []
    for name, value, lo, hi in (("latitude", latitude, -90.0, 90.0), ("longitude", longitude, -180.0, 360.0),
                                ("elevation", elevation, *ELEVATION_RANGE)):
        try:
            v = float(value)
        except (TypeError, ValueError, OverflowError):
            raise ProfileQualityError(f"station {name} {value!r} is not a number", file=source) from None
        if np.isnan(v):
            out.append(v)
            continue
        if not (np.isfinite(v) and lo <= v <= hi):
            unit = "m" if name == "elevation" else "degrees"
            raise ProfileQualityError(f"station {name} {v:g} outside {lo:g}..{hi:g} {unit}", file=source)
        if name == "longitude" and v > 180.0:
            log.append({"level": None, "action": "changed", "variable": "longitude",
                        "reason": f"station longitude {v:g} (0..360) given as {v - 360.0:g} (-180..180)"})
            v -= 360.0
        out.append(v)
    return out


def _format_time(time):
    if time is None or (isinstance(time, float) and np.isnan(time)) or (isinstance(time, str) and not time.strip()):
        return ""
    try:
        ts = pd.Timestamp(time)
    except (TypeError, ValueError, OverflowError) as exc:
        raise ProfileQualityError(f"time {str(time)[:40]!r} is not a date and time ({exc})") from None
    if ts is pd.NaT:
        return ""
    if ts.tzinfo is not None:
        ts = ts.tz_convert("UTC").tz_localize(None)
    return ts.strftime("%Y-%m-%dT%H:%M:%SZ")


def build_profile(pressure, temperature, *, height=None, dewpoint=None, relative_humidity=None,
                  wind_speed=None, wind_direction=None, cloud_liquid=None, station="", latitude=np.nan,
                  longitude=np.nan, elevation=np.nan, time=None, source="", format="", lines=None,
                  quality=None, min_levels=2, copy=True) -> xr.Dataset:
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
    copy : bool
        False lets the checks change plain float arrays in place instead of copying them (a reader passes its
        own arrays of a large table so; the caller must not use them afterwards).

    Checks (each level or value dropped, removed, changed or filled is in the quality record, with the source
    line): pressure finite and within 1..1,100 hPa (else the level is dropped), temperature within -100..60
    degC, heights within -500..50,000 m, infinite values removed; heights that do not increase upward, or that
    disagree with the hypsometric thickness of the profile by more than 1,500 m, removed; levels below the
    ground (a height under the station elevation, or a pressure above the pressure at the station elevation)
    dropped; filled heights re-checked to increase upward.

    Raises
    ------
    ProfileQualityError
        Fewer than ``min_levels`` usable levels; a column whose values fit another unit than its label
        (kelvin labelled degC, degC labelled K, Pa labelled hPa, hPa labelled Pa, feet labelled metres...);
        a station latitude, longitude or elevation off the globe; a time that is not a date.
    """
    try:
        return _build(pressure, temperature, height=height, dewpoint=dewpoint, relative_humidity=relative_humidity,
                      wind_speed=wind_speed, wind_direction=wind_direction, cloud_liquid=cloud_liquid,
                      station=station, latitude=latitude, longitude=longitude, elevation=elevation, time=time,
                      source=source, format=format, lines=lines, quality=quality, min_levels=min_levels,
                      copy=copy)
    except ProfileQualityError as exc:
        if exc.file is None and source:
            raise ProfileQualityError(exc.reason, file=source, line=exc.line, column=exc.column) from None
        raise


def _build(pressure, temperature, *, height, dewpoint, relative_humidity, wind_speed, wind_direction, cloud_liquid,
           station, latitude, longitude, elevation, time, source, format, lines, quality, min_levels, copy):
    log = list(quality or [])
    latitude, longitude, elevation = _check_position(latitude, longitude, elevation, log, source or None)
    time_text = _format_time(time)
    p = _as_array(pressure, "hPa", "pressure")
    n = p.shape[0]
    data = {"pressure": p if (not copy and p is pressure) else p.copy()}
    given = {"temperature": temperature, "height": height, "dewpoint": dewpoint,
             "relative_humidity": relative_humidity, "wind_speed": wind_speed, "wind_direction": wind_direction,
             "cloud_liquid": cloud_liquid}
    for name, value in given.items():
        if isinstance(value, ureg.Quantity) and name in ("temperature", "dewpoint"):
            check_temperature_unit(_as_array(value.magnitude, None, name), str(value.units), name=name)
        arr = _as_array(value, VARIABLES[name][0], name, n)
        own = arr is not None and not copy and arr is value and arr.dtype == float and arr.flags.writeable
        data[name] = np.full(n, np.nan) if arr is None else arr if own else arr.copy()
    if not isinstance(temperature, ureg.Quantity):
        check_temperature_unit(data["temperature"], "degC")
    if dewpoint is not None and not isinstance(dewpoint, ureg.Quantity):
        check_temperature_unit(data["dewpoint"], "degC", name="dewpoint")
    check_pressure_unit(p, f"{pressure.units:~}" if isinstance(pressure, ureg.Quantity) else "hPa")
    rh_fin = data["relative_humidity"][np.isfinite(data["relative_humidity"])]
    if rh_fin.size >= 2 and np.median(rh_fin) > 2.0 * RH_MAX:
        raise ProfileQualityError(f"relative humidity values {rh_fin.min():g}..{rh_fin.max():g} % are mostly above "
                                  "200 %: they look like percent labelled as a fraction (unit 1)")
    if rh_fin.size >= 3 and 0.0 < rh_fin.max() <= 1.0:
        raise ProfileQualityError(f"relative humidity values {rh_fin.min():g}..{rh_fin.max():g} % look like a "
                                  "fraction (0-1) labelled percent; label the column with unit 1 (fraction)")
    present = {name for name, value in given.items() if value is not None}
    src_lines = np.full(n, -1) if lines is None else np.asarray(lines, dtype=int)
    if src_lines.shape != (n,):
        raise ProfileQualityError(f"lines: {src_lines.size} line numbers for {n} levels")
    flags = np.zeros(n, dtype=np.int32)

    def record(i, action, reason, variable=None):
        entry = {"level": int(i), "pressure_hpa": None if not np.isfinite(data["pressure"][i])
                 else round(float(data["pressure"][i]), 2), "action": action, "reason": reason}
        if variable:
            entry["variable"] = variable
        if src_lines[i] >= 0:
            entry["line"] = int(src_lines[i])
        log.append(entry)

    # Range checks, vectorised; only the levels that fail are visited, to record them. A NaN is missing;
    # anything else outside the range (infinities included) is removed and recorded.
    pres = data["pressure"]
    with np.errstate(invalid="ignore"):
        keep = (pres >= P_RANGE[0]) & (pres <= P_RANGE[1])
    for i in _capped(np.flatnonzero(~keep), log, "dropped", "pressure missing or out of range", src_lines):
        record(i, "dropped", "pressure missing" if np.isnan(pres[i]) else
               f"pressure {pres[i]:g} hPa outside {P_RANGE[0]:g}..{P_RANGE[1]:g} hPa")

    def remove(name, bad, why):
        for i in _capped(np.flatnonzero(bad & keep), log, "removed", f"{name} out of range", src_lines, name):
            record(i, "removed", why(data[name][i]), name)
        data[name][bad] = np.nan
        flags[bad] |= QC_FLAGS["value_removed"]

    def outside(v, lo, hi):
        return ~np.isnan(v) & ~((v >= lo) & (v <= hi))

    with np.errstate(invalid="ignore"):
        t = data["temperature"]
        remove("temperature", outside(t, *T_RANGE),
               lambda v: f"temperature {v:.1f} degC outside {T_RANGE[0]:.0f}..{T_RANGE[1]:.0f}")
        td = data["dewpoint"]
        remove("dewpoint", outside(td, TD_MIN, T_RANGE[1]),
               lambda v: f"dewpoint {v:.1f} degC outside {TD_MIN:.0f}..{T_RANGE[1]:.0f}")
        z = data["height"]
        remove("height", outside(z, *Z_RANGE),
               lambda v: f"height {v:.0f} m outside {Z_RANGE[0]:.0f}..{Z_RANGE[1]:.0f} m")
        rh = data["relative_humidity"]
        remove("relative_humidity", outside(rh, 0.0, RH_MAX),
               lambda v: f"relative humidity {v:.1f} % outside 0..{RH_MAX:.0f}")
        high = (rh > 100.0) & keep
        for i in _capped(np.flatnonzero(high), log, "changed", "relative humidity set to 100", src_lines):
            record(i, "changed", f"relative humidity {rh[i]:.1f} % set to 100", "relative_humidity")
        rh[high] = 100.0
        flags[high] |= QC_FLAGS["value_changed"]
        t, td = data["temperature"], data["dewpoint"]
        excess = td - t
        clip = (excess > 0) & (excess <= DEWPOINT_CLIP) & keep
        for i in _capped(np.flatnonzero(clip), log, "changed", "dewpoint above temperature set equal", src_lines):
            record(i, "changed", f"dewpoint {td[i]:.1f} above temperature {t[i]:.1f} degC, set equal", "dewpoint")
        td[clip] = t[clip]
        flags[clip] |= QC_FLAGS["value_changed"]
        far = excess > DEWPOINT_CLIP
        for i in _capped(np.flatnonzero(far & keep), log, "removed", "dewpoint above temperature", src_lines):
            record(i, "removed", f"dewpoint {td[i]:.1f} above temperature {t[i]:.1f} degC", "dewpoint")
        td[far] = np.nan
        flags[far] |= QC_FLAGS["value_removed"]
        del excess, clip, far
        for name, (lo, hi) in {"wind_speed": (0.0, 150.0), "wind_direction": (0.0, 360.0),
                               "cloud_liquid": (0.0, 10.0)}.items():
            v = data[name]
            remove(name, outside(v, lo, hi), lambda x, name=name, lo=lo, hi=hi:
                   f"{name} {x:g} outside {lo:g}..{hi:g}")
    usable = np.zeros(n, dtype=bool)
    for k in given:
        usable |= np.isfinite(data[k])
    empty = keep & ~usable
    del usable
    for i in _capped(np.flatnonzero(empty), log, "dropped", "no usable value", src_lines):
        record(i, "dropped", "no usable value at this level")
    keep &= ~empty

    if keep.all() and np.all(np.diff(data["pressure"]) <= -1e-6):
        # A clean table, already surface first with no repeated pressure: nothing to sort, merge or copy.
        prof = _Levels(data, flags, src_lines, log)
    else:
        prof = _merge_levels(data, keep, flags, src_lines, log, record)
    data = None  # the levels live on in prof (the record closure is done with them)
    _remove_non_increasing_heights(prof)
    _drop_below_ground(prof, elevation)
    d = prof.d
    if np.count_nonzero(np.isfinite(d["temperature"])) < min_levels:
        raise ProfileQualityError(f"only {np.count_nonzero(np.isfinite(d['temperature']))} levels with a usable "
                                  f"temperature; at least {min_levels} are needed")
    # Humidity: derive whichever of dewpoint and relative humidity is missing from the other (in blocks of
    # levels, so the temporaries of a long table stay small).
    for a in range(0, d["pressure"].size, _BLOCK):
        s = slice(a, a + _BLOCK)
        tk = d["temperature"][s] + thermo.T0
        td, rh, fl = d["dewpoint"][s], d["relative_humidity"][s], prof.flags[s]
        need_td = ~np.isfinite(td) & np.isfinite(rh) & np.isfinite(tk)
        if need_td.any():
            td[need_td] = thermo.dewpoint_from_relative_humidity(
                tk[need_td], np.maximum(rh[need_td], 0.1) / 100.0) - thermo.T0
            fl[need_td] |= QC_FLAGS["dewpoint_derived"]
        need_rh = ~np.isfinite(rh) & np.isfinite(td) & np.isfinite(tk)
        if need_rh.any():
            # RH from a reported dewpoint is how radiosonde reports give humidity: not a quality flag.
            rh[need_rh] = 100.0 * thermo.relative_humidity_water(tk[need_rh], td[need_rh] + thermo.T0)
    _check_and_fill_heights(prof, elevation)
    return _to_dataset(prof.d, prof.flags, present, station=station, latitude=latitude, longitude=longitude,
                       elevation=elevation, time=time_text, source=source, format=format, quality=log)


def _merge_levels(data, keep, flags, src_lines, log, record):
    """The kept levels sorted surface first, with levels that share a pressure merged into one.

    Values that agree are kept; values that conflict cannot be resolved without inventing one (a mean is not
    in the report) or depending on the input order, so the value is removed and the conflict recorded: the
    level then reads as unknown for that variable. The arrays of ``data`` are compacted in place.
    """
    idx = np.flatnonzero(keep)
    order = np.argsort(-data["pressure"][idx], kind="stable")
    if np.any(np.diff(order) < 0):
        log.append({"level": None, "action": "reordered", "reason": "levels sorted by decreasing pressure"})
    idx = idx[order]
    del order
    ps = data["pressure"][idx]
    first = np.concatenate([[True], np.abs(np.diff(ps)) >= 1e-6]) if idx.size else np.zeros(0, bool)
    starts = np.flatnonzero(first)
    del ps, first
    sel = idx[starts]
    out_flags = flags[sel].copy()
    out_lines = src_lines[sel].copy()
    sizes = np.diff(np.concatenate([starts, [idx.size]]))
    fixes = []  # (merged level, variable, value): worked out before the arrays are compacted
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
                fixes.append((gi, k, np.nan))
                out_flags[gi] |= QC_FLAGS["value_removed"]
            else:
                fixes.append((gi, k, fin[0]))
        for j in _capped(g[1:], log, "merged", "duplicate level merged", src_lines):
            record(j, "merged", f"duplicate of the level at {data['pressure'][g[0]]:g} hPa")
        out_flags[gi] |= QC_FLAGS["merged"] | int(np.bitwise_or.reduce(flags[g]))
    del idx, starts, sizes
    # The arrays are ours (copies, or given with copy=False): compact them in place, one temporary at a time,
    # so a long table is not held twice.
    cols = {}
    for k, arr in data.items():
        arr[: sel.size] = arr[sel]
        cols[k] = arr[: sel.size]
    for gi, k, v in fixes:
        cols[k][gi] = v
    return _Levels(cols, out_flags, out_lines, log)


def check_pressure_unit(p, label="hPa", file=None, line=None, column=None):
    """Raise :class:`ProfileQualityError` if pressures (converted to hPa from ``label``) fit another unit.

    All finite values above 1,100 hPa are Pa labelled hPa; a highest pressure under 120 hPa (no sounding
    starts that high) is hPa labelled Pa (values 100 times too small) or kPa labelled hPa.
    """
    p = np.asarray(p, dtype=float)
    fin = p[np.isfinite(p) & (p > 0)]
    if fin.size < 2:
        return
    if fin.min() > P_RANGE[1] and fin.max() <= 1.2e5:
        raise ProfileQualityError(f"pressure values {fin.min():g}..{fin.max():g} hPa are all above "
                                  f"{P_RANGE[1]:g} hPa: they look like Pa but are labelled {label}", file=file,
                                  line=line, column=column)
    if fin.max() < 120.0:
        if fin.max() > 11.0:
            likely = f"kPa labelled {label}" if label != "kPa" else "values 10 times too small"
        elif label == "Pa":
            likely = "hPa labelled Pa"
        else:
            likely = f"values 100 times too small for {label}"
        raise ProfileQualityError(f"the highest pressure is {fin.max():g} hPa: a sounding surface that high is not "
                                  f"plausible; the values look like {likely} (column labelled {label})", file=file,
                                  line=line, column=column)


class _Levels:
    """The merged levels of a profile being built: values, QC flags, source lines and the quality record."""

    def __init__(self, d, flags, lines, log):
        self.d, self.flags, self.lines, self.log = d, flags, lines, log

    def record(self, j, action, reason, variable=None):
        entry = {"level": None, "pressure_hpa": round(float(self.d["pressure"][j]), 2), "action": action,
                 "reason": reason}
        if variable:
            entry["variable"] = variable
        if self.lines[j] >= 0:
            entry["line"] = int(self.lines[j])
        self.log.append(entry)

    def remove_height(self, bad, why):
        z = self.d["height"]
        for j in _capped(np.flatnonzero(bad), self.log, "removed", "height", self.lines, "height"):
            self.record(j, "removed", why(j), "height")
        z[bad] = np.nan
        self.flags[bad] |= QC_FLAGS["value_removed"]

    def drop(self, bad, why):
        for j in _capped(np.flatnonzero(bad), self.log, "dropped", "level", self.lines):
            self.record(j, "dropped", why(j))
        keep = np.flatnonzero(~bad)
        for k, v in list(self.d.items()):  # in place, one temporary at a time (the arrays are ours)
            v[: keep.size] = v[keep]
            self.d[k] = v[: keep.size]
        self.flags, self.lines = self.flags[keep], self.lines[keep]


def _longest_increasing(z, block=1 << 16):
    """Mask of a longest strictly increasing subsequence of the finite values of ``z`` (patience sorting,
    O(n log n), typed arrays: about 25 bytes a level).

    Built from the top down (longest decreasing run read from the top), so that among equally long sequences
    the one keeping the lower levels wins: the surface height is the station's, the best known.
    """
    tails, tail_idx = array("d"), array("q")  # tails hold -z, increasing
    prev = np.full(z.size, -1, dtype=np.int64)
    for b in range(z.size, 0, -block):
        a = max(0, b - block)
        for k, x in zip(range(b - 1, a - 1, -1), z[a:b][::-1].tolist(), strict=True):
            if x != x:  # NaN: no height here
                continue
            pos = bisect.bisect_left(tails, -x)
            if pos == len(tails):
                tails.append(-x)
                tail_idx.append(k)
            else:
                tails[pos] = -x
                tail_idx[pos] = k
            if pos > 0:
                prev[k] = tail_idx[pos - 1]
    del tails
    keep = np.zeros(z.size, dtype=bool)
    k = tail_idx[-1] if len(tail_idx) else -1
    while k >= 0:
        keep[k] = True
        k = int(prev[k])
    return keep


def _remove_non_increasing_heights(prof):
    """Remove reported heights that do not increase upward, keeping the longest increasing sequence (so one
    corrupted height, even at the surface, removes only itself)."""
    z = prof.d["height"]
    fin = np.isfinite(z)
    if np.all(np.diff(z[fin]) > 0):
        return
    bad = fin & ~_longest_increasing(z)
    prof.remove_height(bad, lambda j: f"height {z[j]:.0f} m does not increase upward with the levels around it")


def _drop_below_ground(prof, elevation):
    """Drop levels below the station: a reported height under the elevation, or (height unknown) a pressure
    above the pressure at the station elevation (the surface level's, or extrapolated hypsometrically from the
    lowest level above the ground)."""
    if not np.isfinite(elevation):
        return
    d = prof.d
    z, p = d["height"], d["pressure"]
    floor = float(elevation) - GROUND_TOLERANCE
    bad = np.isfinite(z) & (z < floor)
    above = np.flatnonzero(np.isfinite(z) & ~bad)
    p_ground = np.nan
    if above.size:
        j = above[0]
        tk = d["temperature"][j] + thermo.T0 if np.isfinite(d["temperature"][j]) else 288.15
        p_ground = p[j] * np.exp(thermo.G0 * max(z[j] - float(elevation), 0.0) / (thermo.RD * tk))
        # a pressure more than ~15 m of air above the ground pressure is below the ground
        bad |= ~np.isfinite(z) & (p > p_ground * 1.002)
        how = "the pressure at the station elevation"
    else:
        # No reported height to go by: the standard-atmosphere pressure of the elevation, with a margin wider
        # than the weather moves surface pressure (sea-level records stay within 870..1084 hPa).
        p_ground = float(thermo.standard_atmosphere_pressure(float(elevation))) / 100.0 + GROUND_MARGIN_HPA
        bad |= p > p_ground
        how = (f"the standard-atmosphere pressure at the station elevation plus {GROUND_MARGIN_HPA:.0f} hPa "
               "(no level reports a height)")
    if not bad.any():
        return

    def why(j):
        if np.isfinite(z[j]):
            return f"below the ground: height {z[j]:.0f} m under the station elevation {elevation:.0f} m"
        return (f"below the ground: pressure {p[j]:g} hPa above {p_ground:.1f} hPa, {how} {elevation:.0f} m")

    prof.drop(bad, why)


def _hypsometric(p_pa, t, td, block=1 << 18):
    """Heights (m) relative to the first level by :func:`icing.physics.thermo.hypsometric_heights`, in blocks
    of levels (temporaries of one block, not of a whole long table); gaps in temperature and dewpoint are
    filled in ln p over the whole profile first, as that function does."""
    def filled(v):
        ok = np.isfinite(v)
        if ok.all() or not ok.any():
            return v + thermo.T0
        x = -np.log(p_pa)
        return np.interp(x, x[ok], v[ok]) + thermo.T0

    tk, tdk = filled(t), filled(td)
    if p_pa.size <= block:
        return thermo.hypsometric_heights(p_pa, tk, tdk)
    out = np.empty(p_pa.size)
    base = 0.0
    for a in range(0, p_pa.size, block):
        b = min(a + block + 1, p_pa.size)  # one level of overlap carries the height on
        part = thermo.hypsometric_heights(p_pa[a:b], tk[a:b], tdk[a:b])
        out[a:b] = part + base
        base = out[b - 1]
    return out


_UNIT_SLIPS = {3.28084: "feet labelled m", 0.3048: "metres labelled ft", 1000.0: "metres labelled km",
               0.001: "km labelled m", 10.0: "metres labelled dam", 0.1: "dam labelled m"}


def _check_and_fill_heights(prof, elevation):
    """Check reported heights against the hypsometric thickness, fill missing ones, re-check the result."""
    d, fl = prof.d, prof.flags
    z = d["height"]
    p_pa = d["pressure"] * 100.0
    rel = _hypsometric(p_pa, d["temperature"], d["dewpoint"])
    known = np.flatnonzero(np.isfinite(z))
    if known.size >= 3 and rel[known[-1]] - rel[known[0]] > 500.0:
        # Unit slip: the reported thickness is a fixed multiple of the hypsometric one (median of the layers).
        dz, dr = np.diff(z[known]), np.diff(rel[known])
        ratio = float(np.median(dz[dr > 0] / dr[dr > 0])) if np.any(dr > 0) else 1.0
        for factor, what in _UNIT_SLIPS.items():
            if abs(np.log(ratio / factor)) < np.log(1.15):
                raise ProfileQualityError(f"reported heights rise {ratio:.3g} times the hypsometric thickness of "
                                          f"the profile: they look like {what}")
    for _ in range(5):  # the median moves little once the worst are out: a few rounds settle it
        off = z - rel
        fin = np.isfinite(off)
        if np.count_nonzero(fin) < 3:
            break
        med = float(np.median(off[fin]))
        with np.errstate(invalid="ignore"):
            bad = np.abs(off - med) > HEIGHT_OUTLIER
        del off, fin
        if not bad.any():
            break
        prof.remove_height(bad, lambda j, med=med: (
            f"height {z[j]:.0f} m disagrees with the hypsometric thickness from the other reported heights by "
            f"{abs(z[j] - rel[j] - med):.0f} m"))
    missing = ~np.isfinite(z)
    if missing.any():
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
        filled = np.flatnonzero(missing)
        if filled.size <= MAX_ENTRIES:
            for j in filled:
                prof.record(j, "filled", f"height {z[j]:.0f} m computed by the {how}", "height")
        else:  # a very long table: one entry (the qc_flag bit marks each level)
            ln = prof.lines[filled]
            prof.log.append({"level": None, "action": "filled", "variable": "height", "count": int(filled.size),
                             "lines": [int(ln.min()), int(ln.max())] if ln.min() >= 0 else None,
                             "reason": f"{filled.size} heights computed by the {how} (qc_flag height_filled)"})
    # Re-check: heights must rise upward and stay in range after filling (an undetected corrupted height
    # would bend the interpolated offsets).
    if z.size > 1 and not np.all(np.diff(z) > 0):
        raise ProfileQualityError("heights do not increase upward after filling the missing ones: the reported "
                                  "heights contradict the hypsometric thickness of the profile")
    with np.errstate(invalid="ignore"):
        out = ~((z >= Z_RANGE[0]) & (z <= Z_RANGE[1]))
    if out.any():
        prof.drop(out, lambda j: f"height {z[j]:.0f} m (filled) outside {Z_RANGE[0]:.0f}..{Z_RANGE[1]:.0f} m")


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
    along ``profile``; other numeric per-level variables are kept (as floats, NaN where a profile lacks them);
    ``quality`` stays a list of entries, each tagged with its profile index.
    """
    profiles = list(profiles)
    if not profiles:
        raise ProfileQualityError("no profiles to stack")
    nlev = max(p.sizes["level"] for p in profiles)
    names = [n for n in list(VARIABLES) + ["qc_flag"] if any(n in p for p in profiles)]
    # other per-level variables a reader kept (a BUFR ascent's record time and drift, say) come along too
    names += sorted({n for p in profiles for n, v in p.data_vars.items()
                     if v.dims == ("level",) and n not in names and np.issubdtype(v.dtype, np.number)})
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

"""Icing diagnostics over whole model grids, lazily and in chunks, on dask's own schedulers.

:func:`diagnose_grid` runs the level diagnostics of :func:`icing.physics.diagnose.diagnose_arrays` and, for a named
aircraft, the accretion-rate potential of :func:`icing.physics.accretion.accretion_core` on every column of a gridded
profile Dataset (:func:`icing.io.model.read_model`) through one :func:`dask.array.blockwise` task a chunk:
chunks across time and space, every level of a column in one chunk, nothing computed until the result is
written (:func:`write_grid`, netCDF or zarr) or loaded. It adds the 2-D summaries of each
column: the freezing level(s), the base and top of the supercooled levels and the largest potential intensity.

Scale-out uses dask itself, nothing home-made (:func:`scheduler`): the threaded scheduler by default, a
:class:`dask.distributed.LocalCluster` of N worker processes, or a running cluster by its address. dask is
imported inside the functions (the optional ``scale`` extra); eager numpy-backed grids need no dask.

The accretion potential is the ice growth rate the aircraft's reference body *would* see flying level through
each grid box at its cruise true airspeed: a screening field, not a forecast. ADVISORY ONLY (see
:data:`icing.CAUTION`).
"""

from __future__ import annotations

import contextlib
import functools
import json
import sys

import numpy as np
import xarray as xr

from icing import CAUTION
from icing.errors import ConfigError, IcingError
from icing.physics import accretion, thermo
from icing.physics.diagnose import DEFAULT_COLD_LIMIT_C, FIELD_ATTRS, LEVEL_OUTPUTS, PROFILE_OUTPUTS, diagnose_arrays
from icing.physics.jit import jitable
from icing.units import KT, linear_conversion

__all__ = ["diagnose_grid", "grid_core", "column_summaries", "chunk_model", "scheduler", "write_grid",
           "grid_main", "N_FREEZING_LEVELS", "DEFAULT_CHUNK_POINTS", "SUMMARY_OUTPUTS"]

N_FREEZING_LEVELS = 3  # freezing levels kept per column, lowest first
DEFAULT_CHUNK_POINTS = 400_000  # level-points per chunk: ~3 MB per float64 field, a few hundred MB of temporaries
WRITE_BATCH_CHUNKS = 256  # chunks per dask graph in write_grid (a graph costs ~4 kB of scheduler state per task)
ACCRETION_OUTPUTS = ("potential_rate", "potential_intensity", "ice_type")
SUMMARY_OUTPUTS = ("freezing_level_m", "freezing_levels", "supercooled_base_m", "supercooled_top_m",
                   "max_potential_intensity", "max_potential_rate")
_DTYPES = {"in_cloud": bool, "supercooled": bool, "warm_layer_aloft": bool, "valid": bool, "large_drop": np.int8,
           "cloud_kind": np.int8, "precipitation_type": np.int8, "freezing_level_count": np.int32,
           "potential_intensity": np.int8, "ice_type": np.int8, "max_potential_intensity": np.int8,
           "large_drop_potential": np.int8, "large_drop_reason": np.int8}
_ATTRS = {
    "potential_rate": {"units": "mm/h", "long_name": "ice thickness growth rate on the aircraft's reference "
                       "body at cruise true airspeed (accretion potential; NaN unknown)"},
    "potential_intensity": {"long_name": "intensity of the accretion potential", "flag_values":
                            np.array([-1, 0, 1, 2, 3, 4], np.int8),
                            "flag_meanings": "unknown none trace light moderate severe"},
    "ice_type": {"long_name": "ice type of the accretion potential", "flag_values": np.array([-1, 0, 1, 2, 3],
                 np.int8), "flag_meanings": "unknown none rime mixed glaze"},
    "freezing_level_m": {"units": "m", "long_name": "lowest freezing level (0 degC) above mean sea level; the "
                         "lowest level's height where that level is already at or below 0 degC"},
    "freezing_levels": {"units": "m", "long_name": "heights of the 0 degC crossings, lowest first (NaN: none)"},
    "supercooled_base_m": {"units": "m", "long_name": "height of the lowest level with supercooled liquid possible"},
    "supercooled_top_m": {"units": "m", "long_name": "height of the highest level with supercooled liquid possible"},
    "max_potential_intensity": {"long_name": "largest intensity of the accretion potential in the column (-1 "
                                "unknown: no valid level, or missing levels aloft and nothing found)",
                                "flag_values": np.array([-1, 0, 1, 2, 3, 4], np.int8),
                                "flag_meanings": "unknown none trace light moderate severe"},
    "max_potential_rate": {"units": "mm/h", "long_name": "largest accretion potential in the column"},
}


# --- the numpy core: one chunk of columns -----------------------------------------------------------------

@jitable
def column_summary(t, z, supercooled, levels):
    """Summaries of one column (levels with pressure decreasing): the 0 degC crossings into ``levels`` (heights
    in m, lowest first, linear in height between the neighbouring levels with a temperature; NaN beyond the
    crossings found), and returns (lowest freezing level: the lowest level's height where it is already at or
    below 0 degC, else the first crossing; height of the lowest and of the highest supercooled level, NaN if
    none). ``t`` in K (a measured temperature counts without humidity), ``z`` in m."""
    for c in range(levels.size):
        levels[c] = np.nan
    found = 0
    have_prev = False
    t_prev = 0.0
    z_prev = 0.0
    t_low = np.nan
    z_low = np.nan
    base = np.inf
    top = -np.inf
    for k in range(t.size):
        if supercooled[k] and np.isfinite(z[k]):
            base = min(base, z[k])
            top = max(top, z[k])
        if not (np.isfinite(t[k]) and np.isfinite(z[k])):
            continue
        tc = t[k] - thermo.T0
        if not have_prev:
            t_low, z_low = tc, z[k]
        elif (t_prev > 0) != (tc > 0):
            if found < levels.size:
                levels[found] = z_prev + t_prev / (t_prev - tc) * (z[k] - z_prev)
            found += 1
        have_prev = True
        t_prev, z_prev = tc, z[k]
    lowest = z_low if t_low <= 0.0 else levels[0]
    if base > top:
        return lowest, np.nan, np.nan
    return lowest, base, top


def _summary_rows(t, z, supercooled, levels, lowest, base, top):
    for i in range(t.shape[0]):
        lowest[i], base[i], top[i] = column_summary(t[i], z[i], supercooled[i], levels[i])


@functools.lru_cache(maxsize=1)
def _compiled_summaries():
    from icing.physics.jit import jit

    return jit(_summary_rows)


def _rows(a, shape, dtype=float):
    """``a`` broadcast to ``shape`` as rows (-1, level), a view where the layout allows, else a copy."""
    return np.broadcast_to(np.asarray(a, dtype=dtype), shape).reshape(-1, shape[-1])


def column_summaries(temperature, height, supercooled, valid):
    """2-D summaries of columns (..., level), pressure decreasing along the level axis (plain SI).

    Temperature in K, height in m; ``valid`` is unused for the freezing levels (a measured temperature counts
    without humidity) and kept for the signature. Returns ``freezing_level_m`` (lowest 0 degC crossing, linear
    in height between the levels with a temperature that bracket it; the lowest such level's height where it
    is already at or below 273.15 K), ``freezing_levels`` (..., N_FREEZING_LEVELS: every crossing, up or
    down, lowest first, NaN beyond), ``supercooled_base_m`` and ``supercooled_top_m`` (heights of the lowest
    and highest supercooled levels, NaN if none): :func:`column_summary` on every column.
    """
    t = np.asarray(temperature, dtype=float)
    shape = np.broadcast_shapes(t.shape, np.shape(height), np.shape(supercooled))
    t_rows = _rows(t, shape)
    npro = t_rows.shape[0]
    levels = np.empty((npro, N_FREEZING_LEVELS))
    lowest, base, top = np.empty(npro), np.empty(npro), np.empty(npro)
    _compiled_summaries()(t_rows, _rows(height, shape), _rows(supercooled, shape, bool), levels, lowest, base, top)
    lead = shape[:-1]
    return {"freezing_level_m": lowest.reshape(lead), "freezing_levels": levels.reshape(lead + (N_FREEZING_LEVELS,)),
            "supercooled_base_m": base.reshape(lead), "supercooled_top_m": top.reshape(lead)}


def _icing_levels(supercooled, valid, lwc, idx):
    """Flat indices of the levels with supercooled liquid (valid, LWC above 0) into ``idx``; returns how many."""
    m = 0
    for k in range(supercooled.size):
        if supercooled[k] and valid[k] and lwc[k] > 0:
            idx[m] = k
            m += 1
    return m


@jitable
def column_potential(rate, valid, code):
    """Intensity codes of the accretion potential per level into ``code``
    (:func:`icing.physics.accretion.intensity_code_of`; ``rate`` in m/s, NaN where unknown), and per column the
    worst code and the largest known rate (mm/h). The worst code is -1 (unknown) where no level is valid, or
    where a level above the first valid one is unknown and nothing known reaches trace: unknown is never
    read as none."""
    worst = -1
    any_valid = False
    unknown_aloft = False
    largest = np.nan
    for k in range(rate.size):
        c = accretion.intensity_code_of(rate[k])
        code[k] = c
        worst = max(worst, c)
        if valid[k]:
            any_valid = True
            if rate[k] == rate[k] and not (largest >= rate[k]):
                largest = rate[k]
        elif any_valid:
            unknown_aloft = True
    if (not any_valid) or (unknown_aloft and worst <= 0):
        worst = -1
    return worst, largest * 1000.0 * 3600.0


def _potential_rows(valid, idx, rate_at, ice_at, t, large, rate, ice, code, worst, max_rate, changeable):
    """The accretion potential of every level from the rates (m/s) and ice types of the icing levels ``idx``
    (flat indices; 0 and none at the other valid levels, NaN and -1 where not valid): codes and per-column
    worst and largest rate (:func:`column_potential`), the rate then in mm/h. Returns how many flat indices
    went into ``changeable``: the levels whose word the envelopes may change (ice grows, or supercooled large
    drops below 0 degC), for :func:`icing.physics.envelopes.intensity_for_conditions`."""
    npro, n = valid.shape
    for i in range(npro):
        for k in range(n):
            rate[i, k] = 0.0 if valid[i, k] else np.nan
            ice[i, k] = 0 if valid[i, k] else -1
    for j in range(idx.size):
        i, k = idx[j] // n, idx[j] % n
        rate[i, k] = rate_at[j]
        ice[i, k] = ice_at[j]
    m = 0
    for i in range(npro):
        worst[i], max_rate[i] = column_potential(rate[i], valid[i], code[i])
        for k in range(n):
            rate[i, k] *= 1000.0  # m/s to mm/h, as (rate * 1000) * 3600
            rate[i, k] *= 3600.0
            if code[i, k] >= 1 or (code[i, k] >= 0 and large[i, k] > 0 and t[i, k] <= thermo.T0):
                changeable[m] = i * n + k
                m += 1
    return m


@functools.lru_cache(maxsize=1)
def _compiled_potential():
    from icing.physics.jit import jit

    return jit(_potential_rows), jit(_icing_levels)


def grid_core(pressure, temperature, dewpoint, height, cloud_liquid=None, *, airspeed=None, body_diameter=None,
              icing_certified=False, cold_limit=233.15, airmass="supercooled", **thresholds):
    """The whole chain on a block of columns, plain SI numpy in and out (shape (..., level)).

    Parameters
    ----------
    pressure, temperature, dewpoint, height, cloud_liquid :
        Pa, K, K, m, kg/m3 as :func:`icing.physics.diagnose.diagnose_arrays` (pressure may be 1-D per level).
    airspeed, body_diameter : float, optional
        True airspeed (m/s) and reference-body diameter (m) for the accretion potential; without them only
        the diagnostics and the freezing-level/supercooled summaries are computed.
    icing_certified : bool
        Whether the aircraft is certified for icing: its words are held to the Appendix C envelopes as on a
        route (:func:`icing.physics.envelopes.intensity_for_conditions`).

    Returns
    -------
    dict of ndarray
        The outputs of :func:`diagnose_arrays`, the summaries of :func:`column_summaries` and, with an
        aircraft, ``potential_rate`` (mm/h of ice thickness on the leading edge, Makkonen 2000; 0 where no
        supercooled liquid, NaN where the level is not valid), ``potential_intensity`` and ``ice_type`` (int8
        codes of :func:`icing.physics.accretion.intensity_code` and
        :func:`icing.physics.accretion.ice_type_code`; -1 unknown),
        ``max_potential_intensity`` and ``max_potential_rate`` per column.
    """
    shape = np.broadcast_shapes(*(np.shape(a) for a in (pressure, temperature, dewpoint, height)))
    d = diagnose_arrays(pressure, temperature, dewpoint, height, cloud_liquid, cold_limit=cold_limit,
                        airmass=airmass, **thresholds)
    d.update(column_summaries(temperature, height, d["supercooled"], d["valid"]))
    if airspeed is None:
        return d
    from icing.physics.accretion import accretion_core
    from icing.physics.envelopes import intensity_for_conditions

    n = shape[-1]
    rows = [_rows(d[k], shape, dt) for k, dt in (("valid", bool), ("supercooled", bool), ("lwc", float),
                                                 ("mvd", float), ("large_drop", np.int8))]
    valid, supercooled, lwc, mvd, large = rows
    t = _rows(temperature, shape)
    potential, icing_levels = _compiled_potential()
    idx = np.empty(valid.size, np.int64)
    idx = idx[:icing_levels(supercooled.reshape(-1), valid.reshape(-1), lwc.reshape(-1), idx)]
    # only the supercooled levels (a small share of a grid) go through the heat balance
    p = _rows(pressure, shape)[idx // n, idx % n]  # (a shared pressure row is not copied out to every column)
    core = accretion_core(lwc.reshape(-1)[idx] / 1000.0, mvd.reshape(-1)[idx] * 1e-6, float(airspeed),
                          t.reshape(-1)[idx], p, float(body_diameter))
    rate = np.empty(valid.shape)
    ice = np.empty(valid.shape, np.int8)
    code = np.empty(valid.shape, np.int8)
    worst = np.empty(valid.shape[0], np.int8)
    max_rate = np.empty(valid.shape[0])
    changeable = np.empty(valid.size, np.int64)
    changeable = changeable[:potential(valid, idx, core["thickness_rate"], core["ice_type"], t, large, rate, ice,
                                       code, worst, max_rate, changeable)]
    if changeable.size:  # the rate's words held to what they mean for this aircraft (as on a route)
        flat = code.reshape(-1)
        flat[changeable] = intensity_for_conditions(
            flat[changeable], lwc.reshape(-1)[changeable], mvd.reshape(-1)[changeable],
            t.reshape(-1)[changeable] - thermo.T0, large.reshape(-1)[changeable], icing_certified)
        cols = np.unique(changeable // n)  # (words 0/unknown of a column are never changed)
        worst[cols] = np.where(worst[cols] < 0, worst[cols], code[cols].max(axis=-1))
    lead = shape[:-1]
    d.update({"potential_rate": rate.reshape(shape), "potential_intensity": code.reshape(shape),
              "ice_type": ice.reshape(shape), "max_potential_intensity": worst.reshape(lead),
              "max_potential_rate": max_rate.reshape(lead)})
    return d


# --- xarray / dask layer ------------------------------------------------------------------------------

def _aircraft(aircraft, airspeed_kt=None):
    if aircraft is None:
        return None, None, None
    from icing.flight.aircraft import get_aircraft

    ac = get_aircraft(aircraft) if not hasattr(aircraft, "body_diameter_m") else aircraft
    tas = float(airspeed_kt if airspeed_kt is not None else ac.tas_cruise_kt) * KT
    return ac, tas, float(ac.body_diameter_m)


def _scaled(a, scale, offset):
    """``a * scale + offset`` in a new float array (one allocation, one pass for a pure offset such as degC to K:
    the block itself is never written)."""
    if scale == 1.0:
        return np.add(a, offset, dtype=float)
    out = np.multiply(a, scale, dtype=float)
    out += offset
    return out


def _first_block(x):
    """The one block of a dimension in one chunk (:func:`dask.array.blockwise` passes a dimension that no
    output keeps as a list of its blocks)."""
    while isinstance(x, list):
        x = x[0]
    return x


def _map_chunks(func, inputs, lead, outputs):
    """``func`` on every chunk of the columns of ``inputs`` (DataArrays whose last dimension is ``level``, the
    others among ``lead``): one task a chunk through :func:`dask.array.blockwise`, each input block passed as
    it is (``xarray.apply_ufunc`` copies every block of an input whose core dimension no output keeps, which
    cost a tenth of the grid chain). ``func`` gets numpy blocks (dims: those of ``lead`` it has, then level)
    and returns one array per output; ``outputs`` are (extra dims, their sizes, dtype) after ``lead``. Without
    dask-backed inputs ``func`` runs once, now, on the whole arrays. Returns one DataArray an output."""
    inputs = [a.transpose(*[d for d in lead if d in a.dims], "level") for a in inputs]
    if not any(getattr(a.data, "chunks", None) is not None for a in inputs):
        results = func(*(a.values for a in inputs))
        return [xr.DataArray(r, dims=tuple(lead) + tuple(dims)) for r, (dims, _, _) in zip(results, outputs,
                                                                                           strict=True)]
    import operator

    import dask.array as da

    index = {d: f"d{k}" for k, d in enumerate(lead)}
    args = []
    for a in inputs:
        data = a.data if getattr(a.data, "chunks", None) is not None else da.asarray(a.data)
        if len(data.chunks[-1]) > 1:  # every level of a column in one chunk
            data = data.rechunk({data.ndim - 1: -1})
        args += [data, tuple(index[d] for d in a.dims[:-1]) + ("level",)]
    out_index = tuple(index[d] for d in lead)
    blocks = da.blockwise(lambda *b: func(*(_first_block(x) for x in b)), out_index, *args, concatenate=False,
                          dtype=object, meta=np.empty((0,) * len(lead), dtype=object))
    arrays = []
    for i, (dims, sizes, dtype) in enumerate(outputs):
        extra = tuple((sizes[d],) for d in dims)
        arr = blocks.map_blocks(operator.getitem, i, dtype=dtype, chunks=blocks.chunks + extra,
                                new_axis=list(range(len(lead), len(lead) + len(dims))) or None,
                                meta=np.empty((0,) * (len(lead) + len(dims)), dtype=dtype))
        arrays.append(xr.DataArray(arr, dims=tuple(lead) + tuple(dims)))
    return arrays


def diagnose_grid(model: xr.Dataset, aircraft=None, *, cold_limit=DEFAULT_COLD_LIMIT_C, airmass="supercooled",
                  airspeed_kt=None, outputs=None, **thresholds) -> xr.Dataset:
    """Diagnostics, summaries and (with an aircraft) the accretion potential of a whole gridded profile Dataset.

    Parameters
    ----------
    model : xarray.Dataset
        A gridded profile Dataset (:func:`icing.io.model.read_model`): ``level`` the last dimension, any
        leading ones. Dask-backed (see :func:`chunk_model`) it stays lazy; numpy-backed it is computed now.
    aircraft : preset name, TOML path or Aircraft, optional
        For the accretion potential at its cruise true airspeed (or ``airspeed_kt``) on its reference body.
    cold_limit : float
        Coldest supercooled liquid, degC (default -40).
    airmass, thresholds :
        As :func:`icing.physics.diagnose.diagnose`.
    outputs : iterable of str, optional
        Only these of the computed fields (for example the column summaries): the chain still runs whole,
        but a chunk's level fields are dropped as soon as it is done instead of being held until every output
        is taken. Default: all.

    Returns
    -------
    xarray.Dataset
        Inputs ``pressure``, ``height``, ``temperature`` (and winds), the level fields of
        :data:`icing.physics.diagnose.LEVEL_OUTPUTS` (plus ``potential_rate``, ``potential_intensity``, ``ice_type``
        with an aircraft) and the per-column fields ``precipitation_type``, ``freezing_level_count``,
        ``freezing_level_m``, ``freezing_levels`` (dim ``crossing``), ``supercooled_base_m``,
        ``supercooled_top_m`` (and ``max_potential_intensity``, ``max_potential_rate``). Attributes carry the
        settings, the model's ``quality`` record and the caution.
    """
    from icing.physics.cloud import CLOUD_DEFAULTS

    for name in ("pressure", "temperature", "dewpoint", "height"):
        if name not in model:
            raise ConfigError(f"model grid has no {name!r} variable")
    if model["temperature"].dims[-1] != "level":
        raise ConfigError("the model grid's last dimension must be 'level'")
    unknown = set(thresholds) - set(CLOUD_DEFAULTS)
    if unknown:
        raise ConfigError(f"unknown diagnostic parameter(s) {sorted(unknown)}; known: {sorted(CLOUD_DEFAULTS)}")
    ck = float(cold_limit) + thermo.T0
    ac, tas, diam = _aircraft(aircraft, airspeed_kt)
    wanted_units = [("pressure", "Pa"), ("temperature", "K"), ("dewpoint", "K"), ("height", "m")]
    has_cl = "cloud_liquid" in model
    if has_cl:
        wanted_units.append(("cloud_liquid", "kg/m^3"))
    # The inputs go to the chunks as stored; each chunk converts its own block to SI (a scale and an offset)
    # inside the one task, rather than through lazy arithmetic that adds two tasks a chunk and an input.
    inputs = [model[name] for name, _ in wanted_units]
    conversions = [linear_conversion(model[name], unit) for name, unit in wanted_units]
    level_names = list(LEVEL_OUTPUTS) + (list(ACCRETION_OUTPUTS) if ac is not None else [])
    column_names = list(PROFILE_OUTPUTS) + list(SUMMARY_OUTPUTS[:4]) + (list(SUMMARY_OUTPUTS[4:]) if ac else [])
    names = level_names + column_names
    if outputs is not None:
        wanted = list(dict.fromkeys(outputs))
        unknown = [n for n in wanted if n not in names]
        if unknown or not wanted:
            raise ConfigError(f"unknown grid output(s) {unknown or '(none given)'}; known: {names}")
        names = [n for n in names if n in wanted]

    def core(*arrs):
        arrs = [a if (scale, offset) == (1.0, 0.0) else _scaled(a, scale, offset)
                for a, (scale, offset) in zip(arrs, conversions, strict=True)]
        out = grid_core(*arrs[:4], arrs[4] if has_cl else None, airspeed=tas, body_diameter=diam,
                        icing_certified=bool(getattr(ac, "icing_certified", False)), cold_limit=ck, airmass=airmass,
                        **thresholds)
        out["freezing_level_count"] = out["freezing_level_count"].astype(np.int32)  # (CF: 32-bit integers)
        return tuple(out[k] for k in names)

    core_dims = [["level"] if n in level_names else ["crossing"] if n == "freezing_levels" else []
                 for n in names]
    lead = [d for d in model["temperature"].dims if d != "level"]
    sizes = {"level": model.sizes["level"], "crossing": N_FREEZING_LEVELS}
    results = _map_chunks(core, inputs, lead, [(dims, sizes, _DTYPES.get(n, float))
                                                for n, dims in zip(names, core_dims, strict=True)])
    keep = [v for v in ("pressure", "height", "temperature", "dewpoint", "wind_speed", "wind_direction",
                        "cloud_liquid") if v in model]
    ds = model[keep].copy()
    for name, da in zip(names, results, strict=True):
        ds[name] = da.assign_attrs(_ATTRS.get(name) or FIELD_ATTRS.get(name, {}))
    if "freezing_levels" in names:
        ds = ds.assign_coords(crossing=np.arange(1, N_FREEZING_LEVELS + 1, dtype=np.int32))
    if "level" in ds.coords and np.issubdtype(ds["level"].dtype, np.integer):
        ds = ds.assign_coords(level=ds["level"].astype(np.int32))  # (CF: 32-bit integers)
    for name, attrs in _COORD_ATTRS.items():
        if name in ds.coords:
            ds[name].attrs.update({k: v for k, v in attrs.items() if k not in ds[name].attrs})
    ds.attrs = {k: v for k, v in model.attrs.items() if k not in ("featureType", "icing_model")}
    ds.attrs.update({"cold_limit": float(cold_limit), "cold_limit_units": "degC", "airmass": str(airmass),
                     "lwc_source": "model cloud liquid" if has_cl else "adiabatic", "caution": CAUTION,
                     "quality": list(model.attrs.get("quality", []))})
    if ac is not None:
        ds.attrs.update({"aircraft": str(getattr(ac, "name", aircraft)), "airspeed_kt": tas / KT,
                         "body_diameter_m": diam})
    return ds


def _even_tiles(n, size):
    """Chunk sizes splitting ``n`` into the number of tiles that brings them nearest ``size`` (so each is between
    two-thirds and one and a half times it), their sizes within one of each other: 121 in tiles of about 100 is
    one tile of 121, not 100 + 21, whose sliver finishes late and costs a task of its own."""
    count = max(round(n / max(size, 1)), 1)
    return tuple(n // count + (1 if i < n % count else 0) for i in range(count))


def chunk_model(model: xr.Dataset, points=DEFAULT_CHUNK_POINTS) -> xr.Dataset:
    """Rechunk a gridded Dataset for :func:`diagnose_grid`: one time per chunk, all levels of a column in one
    chunk, square-ish latitude/longitude tiles of about ``points`` level-points (at most about twice that), of
    even sizes so that the threads finish together (on the benchmark grid, 121 x 161 columns, tiles of 121 x 81
    instead of 100 x 100 and its remainders ran a quarter faster threaded)."""
    nlev = model.sizes["level"]
    cols = max(int(points // nlev), 1)
    side = max(int(np.sqrt(cols)), 1)
    chunks = {"level": -1}
    for d in model["temperature"].dims:
        if d == "level":
            continue
        chunks[d] = 1 if d not in ("latitude", "longitude") else side
    if "latitude" in chunks and "longitude" in chunks:
        nlat = model.sizes["latitude"]
        if nlat < side:  # a narrow grid: give the longitude tiles the columns the latitude cannot use
            chunks["longitude"] = max(cols // nlat, 1)
    for d in ("latitude", "longitude"):
        if d in chunks:
            chunks[d] = _even_tiles(model.sizes[d], chunks[d])
    return model.chunk({k: v for k, v in chunks.items() if k in model.dims})


@contextlib.contextmanager
def scheduler(workers=None, address=None, *, threads_per_worker=1, processes=True, quiet=True):
    """Where dask runs: the threaded scheduler (default), a LocalCluster of ``workers`` processes, or a running
    cluster at ``address``. Yields the :class:`distributed.Client` or None (threads)."""
    if address and workers:
        raise IcingError("give either a scheduler address or a number of workers, not both")
    if not address and not workers:
        if not _have_dask():  # nothing lazy to schedule: eager numpy-backed grids compute at once
            yield None
            return
        import dask

        with dask.config.set(scheduler="threads"):
            yield None
        return
    try:
        from distributed import Client, LocalCluster
    except ImportError:
        raise IcingError("--workers/--scheduler need dask.distributed (pip install 'icing[scale]')") from None
    if address:
        with Client(address) as client:
            yield client
        return
    import logging

    import dask

    kwargs = {"silence_logs": logging.ERROR} if quiet else {}
    # distributed starts its worker processes with MALLOC_TRIM_THRESHOLD_=65536, which turns off glibc's
    # adaptive mmap threshold: every large numpy temporary is then mapped and faulted in afresh, and the chain
    # runs 3-4 times slower. Leave glibc's defaults (dask's own setting; None unsets it).
    with dask.config.set({"distributed.nanny.pre-spawn-environ.MALLOC_TRIM_THRESHOLD_": None}), \
            LocalCluster(n_workers=int(workers), threads_per_worker=threads_per_worker, processes=processes,
                         dashboard_address=None, **kwargs) as cluster, Client(cluster) as client:
        yield client


def _encodable(ds):
    """The Dataset as the CF conventions want it written: coordinates without fill values, times in hours,
    the history attribute."""
    import datetime as _dt

    out = ds.copy()
    out.attrs = dict(ds.attrs)
    out.attrs["quality_json"] = json.dumps(out.attrs.pop("quality", []))
    for k, v in list(out.attrs.items()):
        if v is None or isinstance(v, dict | list):
            out.attrs[k] = json.dumps(v)
    out.attrs.setdefault("Conventions", "CF-1.8")
    out.attrs["history"] = (f"{_dt.datetime.now(_dt.UTC):%Y-%m-%dT%H:%M:%SZ} written by icing grid "
                            "(advisory only)")
    for name in out.coords:
        out[name].encoding["_FillValue"] = None
        if np.issubdtype(out[name].dtype, np.datetime64):
            out[name].encoding.update({"dtype": "float64", "units": "hours since 1970-01-01 00:00:00"})
    return out


_COORD_ATTRS = {  # CF attributes of the grid's coordinates
    "level": {"long_name": "index of the pressure level, surface first"},
    "time": {"standard_name": "time", "long_name": "valid time"},
    "latitude": {"standard_name": "latitude", "long_name": "latitude", "units": "degrees_north"},
    "longitude": {"standard_name": "longitude", "long_name": "longitude", "units": "degrees_east"},
    "crossing": {"long_name": "number of the 0 degC crossing, lowest first"},
}


class _Targets:
    """The ``writer`` xarray's :meth:`xarray.Dataset.dump_to_store` hands each variable to (in place of its
    ArrayWriter): numpy-backed data is written at once, dask-backed sources are kept for batch-wise storing."""

    def __init__(self):
        self.items = []

    def add(self, source, target, region=None):
        if hasattr(source, "dask"):
            self.items.append((source, target, region))
        elif region:
            target[region] = source
        else:
            target[...] = source


def _batches(arrays, batch_chunks):
    """Slices of axis 0 made of whole chunks of the array with the most chunks, about ``batch_chunks`` each."""
    lead = max(arrays, key=lambda a: a.npartitions)
    rows = max(batch_chunks // max(lead.npartitions // lead.numblocks[0], 1), 1)
    bounds = np.concatenate([[0], np.cumsum(lead.chunks[0])]).astype(int).tolist()
    return [slice(bounds[i], bounds[min(i + rows, len(bounds) - 1)]) for i in range(0, len(bounds) - 1, rows)]


def _run(collections, client, progress, done, total):
    import dask

    if client is not None:
        client.gather(client.compute(list(collections)))
    else:
        dask.compute(*collections)
    if progress:
        print(f"\rwriting: {done}/{total} batches", end="" if done < total else "\n", file=sys.stderr, flush=True)


def write_grid(ds: xr.Dataset, path, *, client=None, progress=True, variables=None,
               batch_chunks=WRITE_BATCH_CHUNKS):
    """Write a (lazy) diagnosed grid to netCDF (``.nc``, h5netcdf) or zarr (``.zarr``, needs zarr), computing
    chunk by chunk on the current scheduler (or ``client``), with a count of the batches on stderr.

    ``variables`` limits what is written (for example only the 2-D summaries). A dask-backed grid is written
    in batches of about ``batch_chunks`` chunks along its leading dimension, one dask graph per batch: the
    scheduler's bookkeeping (a few kB per task, about 20 tasks per chunk) then stays bounded instead of growing
    with the size of the grid."""
    from pathlib import Path

    path = Path(path)
    if variables is not None:
        ds = ds[list(variables)]
    ds = _encodable(ds)
    is_zarr = path.suffix == ".zarr"
    if is_zarr:
        try:
            import zarr  # noqa: F401
        except ImportError:
            raise IcingError("writing zarr needs the zarr package; write .nc instead") from None
    if not ds.chunks:
        if is_zarr:
            ds.to_zarr(path, mode="w")
        else:
            ds.to_netcdf(path, engine="h5netcdf")
        return path
    import dask.array as da

    if is_zarr:
        whole = ds.to_zarr(path, mode="w", compute=False)  # writes the metadata and the numpy-backed variables
        chunked = [v for v in ds.data_vars if ds[v].chunks]
        if not chunked:  # only coordinates are dask-backed
            _run([whole], client, False, 0, 0)
            return path
        lead = ds[max(chunked, key=lambda v: ds[v].data.npartitions)].dims[0]
        rest = [v for v in chunked if lead not in ds[v].dims]
        if rest:
            _run([ds[rest].to_zarr(path, mode="r+", compute=False)], client, False, 0, 0)
        along = ds[[v for v in chunked if lead in ds[v].dims]]
        along = along.drop_vars([c for c in along.coords if lead not in along[c].dims])
        parts = _batches([along[v].data for v in along.data_vars], batch_chunks)
        for k, sl in enumerate(parts, 1):
            part = along.isel({lead: sl}).to_zarr(path, region={lead: sl}, mode="r+", compute=False)
            _run([part], client, progress, k, len(parts))
        return path
    store = xr.backends.H5NetCDFStore.open(path, mode="w")
    try:
        targets = _Targets()
        ds.dump_to_store(store, writer=targets)  # creates every variable, writes the numpy-backed ones
        lead = max((s for s, _, _ in targets.items), key=lambda s: s.npartitions)
        along = [(s, t) for s, t, _ in targets.items if s.chunks[0] == lead.chunks[0]]
        rest = [(s, t) for s, t, _ in targets.items if s.chunks[0] != lead.chunks[0]]
        if rest:  # dask-backed variables not chunked like the leading axis (e.g. pressure per level): whole
            stored = da.store([s for s, _ in rest], [t for _, t in rest], lock=False, compute=False)
            _run(stored if isinstance(stored, tuple) else [stored], client, False, 0, 0)
        parts = _batches([lead], batch_chunks)
        for k, sl in enumerate(parts, 1):  # the targets take xarray's file lock themselves (lock=False here)
            stored = da.store([s[sl] for s, _ in along], [t for _, t in along], lock=False, compute=False,
                              regions=[(sl,) + (slice(None),) * (s.ndim - 1) for s, _ in along])
            _run(stored if isinstance(stored, tuple) else [stored], client, progress, k, len(parts))
    finally:
        store.close()
    return path


# --- command line -------------------------------------------------------------------------------------

def open_fields(paths, chunk_points=DEFAULT_CHUNK_POINTS) -> xr.Dataset:
    """Read one or more model files lazily and join them along time (sorted; duplicate times raise).

    Without dask (the optional ``scale`` extra) the files are read whole into memory instead, with a note on
    stderr: fine for small grids such as the demo's."""
    from icing.io.model import read_model

    lazy = _have_dask()
    if not lazy:
        print("icing grid: dask is not installed, so the grid is read whole into memory and diagnosed at once "
              "(pip install 'icing[scale]' for chunked, parallel processing of large grids)", file=sys.stderr)
    parts = [read_model(p, chunks={} if lazy else None) for p in paths]
    if len(parts) == 1:
        ds = parts[0]
    else:
        ds = xr.concat(parts, dim="time", data_vars="minimal", coords="minimal", compat="override",
                       combine_attrs="drop_conflicts").sortby("time")
        times = ds["time"].values
        if np.unique(times).size != times.size:
            raise IcingError("the model files repeat a valid time")
        ds.attrs["quality"] = [e for p in parts for e in p.attrs.get("quality", [])]
        ds.attrs["source"] = ";".join(str(p) for p in paths)
    return chunk_model(ds, chunk_points) if lazy else ds


def _have_dask():
    try:
        import dask.array  # noqa: F401
    except ImportError:
        return False
    return True


def grid_main(args) -> int:
    """Run ``icing grid``: read, diagnose lazily, write, and print a short summary (stderr: progress)."""
    if args.workers is not None and args.workers < 1:
        raise IcingError("--workers must be at least 1")
    model = open_fields(args.fields, args.chunk_points)
    summary = list(PROFILE_OUTPUTS) + list(SUMMARY_OUTPUTS)
    ds = diagnose_grid(model, args.aircraft, cold_limit=args.cold_limit, airmass=args.airmass,
                       airspeed_kt=args.airspeed,
                       outputs=summary if args.summary_only else None)
    names = None
    if args.summary_only:
        names = [n for n in ds.data_vars if "level" not in ds[n].dims]
    npts = int(np.prod([model.sizes[d] for d in model["temperature"].dims]))
    print(CAUTION, file=sys.stderr)
    where = (f"a LocalCluster of {args.workers} workers" if args.workers else
             f"the cluster at {args.scheduler}" if args.scheduler else "the threaded scheduler")
    chunks = getattr(ds["temperature"].data, "npartitions", 1)
    if not _have_dask():
        where = "numpy in this process"
    print(f"icing grid: {npts:,} level-points in {chunks} chunk{'s' if chunks != 1 else ''} on {where}",
          file=sys.stderr)
    if not args.workers and not args.scheduler:
        from icing.physics.diagnose import compile_kernels

        print("icing grid: loading the compiled diagnosis kernel (its first use on a machine compiles it once)",
              file=sys.stderr)
        compile_kernels()
    with scheduler(args.workers, args.scheduler) as client:
        out = write_grid(ds, args.out, client=client, progress=not args.quiet, variables=names)
    with xr.open_dataset(out, engine="h5netcdf") if out.suffix != ".zarr" else xr.open_zarr(out) as res:
        worst = int(res["max_potential_intensity"].max()) if "max_potential_intensity" in res else None
        unknown = int((res["max_potential_intensity"] < 0).sum()) if "max_potential_intensity" in res else 0
    labels = ["unknown", "none", "trace", "light", "moderate", "severe"]
    print(f"wrote {out}: aircraft {ds.attrs.get('aircraft')}, largest potential intensity "
          f"{labels[worst + 1] if worst is not None else 'n/a'}; {unknown} columns unknown")
    return 0


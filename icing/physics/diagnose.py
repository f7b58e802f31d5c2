"""Level-wise icing diagnostics of any number of profiles at once: one chain, compiled per column.

:func:`diagnose_column` chains the physics of one column: humidity (:mod:`icing.physics.thermo`), cloud
(:mod:`icing.physics.cloud`), the parcel and its adiabatic liquid water (:mod:`icing.physics.adiabat`), liquid
fraction and droplet size (:mod:`icing.physics.microphysics`), precipitation and large drops
(:mod:`icing.physics.precipitation`). numba compiles it, with every function it calls, into one pass per
column (:mod:`icing.physics.jit`); the same functions run uncompiled from Python. :func:`diagnose_arrays` runs
it on plain SI arrays with a trailing level axis (blocks of profiles in parallel threads);
:func:`diagnose` wraps that for canonical profile Datasets (``xr.apply_ufunc`` with ``level`` as the core
dimension, so dask-backed inputs stay lazy).
"""

from __future__ import annotations

import functools
import os
import threading
from concurrent.futures import ThreadPoolExecutor

import numpy as np
import xarray as xr

from icing import CAUTION
from icing.errors import ConfigError
from icing.physics import adiabat, cloud, microphysics, precipitation, thermo
from icing.physics.jit import jitable
from icing.units import dataarray_to_unit, ureg

__all__ = ["diagnose_arrays", "diagnose", "diagnose_column", "compile_kernels", "DEFAULT_COLD_LIMIT_C",
           "LEVEL_OUTPUTS", "FIELD_ATTRS",
           "PROFILE_OUTPUTS", "THREADS_ENV", "MODEL_CLOUD_MIN"]

DEFAULT_COLD_LIMIT_C = -40.0
LEVEL_OUTPUTS = ("rh_water", "rh_ice", "in_cloud", "supercooled", "liquid_fraction", "lwc", "mvd", "large_drop",
                 "warm_layer_aloft", "cloud_kind", "valid", "large_drop_potential", "large_drop_reason")
PROFILE_OUTPUTS = ("precipitation_type", "freezing_level_count")
_BLOCK = 2048  # profiles per block
_WORKERS = min(4, os.cpu_count() or 1)  # block threads of a call from the main thread (see _thread_count)
THREADS_ENV = "ICING_DIAGNOSE_THREADS"
MODEL_CLOUD_MIN = 1e-5  # kg/m3 (0.01 g/m3): model cloud liquid above this is cloud (common practice)


def _fill_gaps(p, v):
    """Fill interior NaNs of v (P, n) linearly in ln p from the nearest finite levels; ends stay NaN."""
    if np.isfinite(v).all():  # the common case of model grids: one pass, no temporaries kept
        return v
    bad = ~np.isfinite(v) & np.isfinite(p)
    rows = np.flatnonzero(bad.any(axis=-1))
    if rows.size == 0:
        return v
    out = v.copy()
    x = -np.log(p[rows])
    xp = np.where(np.isfinite(v[rows]), x, np.nan)
    out[rows] = np.where(np.isfinite(v[rows]), v[rows], thermo.interp_last_axis(x, xp, v[rows]))
    return out


def _thread_count(threads):
    """Block threads for one call: ``threads`` if given, else the ``ICING_DIAGNOSE_THREADS`` environment
    variable, else 1 when called from a thread other than the main one (a dask or distributed worker thread,
    whose pool already fills the cores: more threads would only oversubscribe them), else ``_WORKERS``."""
    if threads is None:
        env = os.environ.get(THREADS_ENV, "").strip()
        if env:
            try:
                threads = int(env)
            except ValueError:
                raise ConfigError(f"environment variable {THREADS_ENV}={env!r} is not a whole number of threads") \
                    from None
        elif threading.current_thread() is not threading.main_thread():
            return 1
        else:
            return _WORKERS
    threads = int(threads)
    if threads < 1:
        raise ConfigError(f"threads must be at least 1, not {threads}")
    return threads


def _check_params(params):
    unknown = set(params) - set(cloud.CLOUD_DEFAULTS)
    if unknown:
        raise ConfigError(f"unknown diagnostic parameter(s) {sorted(unknown)}; known: {sorted(cloud.CLOUD_DEFAULTS)}")
    prm = {**cloud.CLOUD_DEFAULTS, **params}
    for name in ("min_rh", "max_rh", "inter_rh"):  # one value per height of cloud.ZHANG_HEIGHTS_M
        values = np.asarray(prm[name], dtype=float) if np.ndim(prm[name]) == 1 else None
        if values is None or values.size != len(cloud.ZHANG_HEIGHTS_M) or not np.isfinite(values).all():
            raise ConfigError(f"{name} must be {len(cloud.ZHANG_HEIGHTS_M)} finite RH values (percent), one per "
                              f"height {cloud.ZHANG_HEIGHTS_M} m; got {prm[name]!r}")
    return prm



# The scalar settings of diagnose_column, in the order of its ``settings`` array (cloud.CLOUD_SETTINGS first).
COLUMN_SETTINGS = cloud.CLOUD_SETTINGS + ("convective_excess_k", "stratiform_factor", "convective_factor",
                                          "drizzle_top_temperature", "warm_rain_mean_volume_radius_m",
                                          "melting_area_aloft", "liquid_rh", "drizzle_cold_top_temperature")


@jitable
def diagnose_column(p, lnp, t, td, z, cl, has_cl, cold_limit, settings, heights, min_rh_table, max_rh_table,
                    inter_rh_table, adiabats, saturation, n_drop, mvd_ratio, out_f, out_b, out_i, scratch_f,
                    scratch_b, scratch_i):
    """The icing diagnostics of one column (levels with pressure decreasing; gaps in t, td, z filled).

    Parameters
    ----------
    p, lnp, t, td, z, cl : ndarray (n,)
        Pressure (Pa) and its log, temperature and dewpoint (K), height (m), model cloud liquid (kg/m3, used
        where ``has_cl`` and finite).
    cold_limit : float
        Coldest temperature of supercooled liquid (K).
    settings : ndarray
        The values of :data:`COLUMN_SETTINGS` (``liquid_rh`` NaN for the cloud threshold itself; the
        sub-adiabatic factors NaN for the depth profile of :func:`icing.physics.microphysics.adiabatic_fraction`).
    heights, min_rh_table, max_rh_table, inter_rh_table : ndarray (4,)
        The cloud thresholds (:mod:`icing.physics.cloud`).
    adiabats : tuple
        :func:`icing.physics.adiabat.moist_adiabat_tables`.
    saturation : tuple
        :func:`icing.physics.thermo.saturation_tables`.
    n_drop, mvd_ratio : float
        Droplet number (per m3) and the ratio of median to mean volume diameter of the spectrum.
    out_f : ndarray (5, n)
        Output rows: RH over water, RH over ice (percent), liquid fraction, LWC (g/m3), MVD (um).
    out_b : ndarray of bool (3, n)
        Output rows: in cloud, supercooled, warm layer aloft.
    out_i : ndarray of int8 (4, n)
        Output rows: large drops (0 none, 1 drizzle, 2 rain), cloud kind (0 none, 1 stratiform, 2 convective),
        large-drop potential (:data:`icing.physics.precipitation.LARGE_DROP_POTENTIAL`) and reason
        (:data:`icing.physics.precipitation.LARGE_DROP_REASONS`).
    scratch_f, scratch_b, scratch_i : ndarray (14, n), (6, n), (8, n)
        Work space (float, bool, int64).

    Returns
    -------
    (int, int)
        Precipitation type code (:data:`icing.physics.precipitation.PRECIPITATION_TYPES`) and the number of
        0 degC crossings.

    Notes
    -----
    Cloud where RH (over ice below 0 degC) meets the height-dependent thresholds of Zhang et al. (2010);
    supercooled where in cloud, between ``cold_limit`` and 0 degC, with RH over water at least the cloud
    threshold (liquid possible) or model cloud liquid; cloud kind convective where the parcel from the layer
    base gets warmer than the air by more than ``convective_excess_k``; LWC = adiabatic LWC from each layer base
    x the fraction of it left at that height above the base (Karstens et al. 1994) x liquid fraction (Hu et
    al. 2010) at supercooled and warm cloud levels, or the model's cloud liquid; MVD from LWC and the droplet
    number; precipitation type by Bourgouin (2000); large drops: freezing rain where melted precipitation
    falls into sub-freezing air, freezing drizzle under warm-topped supercooled cloud.
    """
    n = t.size
    conv_excess, f_strat, f_conv = settings[7], settings[8], settings[9]
    dz_top_t, rv_coalescence, melt_aloft, liquid_rh = settings[10], settings[11], settings[12], settings[13]
    dz_cold_top_t = settings[14]
    rh_w, rh_i, lf_out, lwc_out, mvd_out = out_f[0], out_f[1], out_f[2], out_f[3], out_f[4]
    in_cloud, supercooled, warm_aloft = out_b[0], out_b[1], out_b[2]
    large, kind, potential, reason = out_i[0], out_i[1], out_i[2], out_i[3]
    lnt, rh_c, z_agl, min_rh, zb, parcel, lwc_ad, area = (scratch_f[0], scratch_f[1], scratch_f[2], scratch_f[3],
                                                          scratch_f[4], scratch_f[5], scratch_f[6], scratch_f[7])
    layer_area, above_base, layer_limit, layer_sure = scratch_f[8], scratch_f[9], scratch_f[10], scratch_f[11]
    grow, grow_upper = scratch_f[12], scratch_f[13]
    model, rain_melted = scratch_b[2], scratch_b[5]
    starts, ends = scratch_i[2], scratch_i[3]
    layer_start, layer_of = scratch_i[4], scratch_i[5]
    drizzle_src, rain_grade = scratch_i[6], scratch_i[7]
    # humidity (Murphy and Koop 2005) and the height above the lowest level
    z0 = np.nan
    for k in range(n):
        if np.isfinite(z[k]):
            z0 = z[k]
            break
    if not np.isfinite(z0):
        z0 = z[0]
    humidity_complete = True
    thermo.relative_humidity_column(t, td, saturation, rh_w, rh_i, True)  # (dewpoint at most the temperature)
    j = 0  # interval of the threshold table, walked up the column
    for k in range(n):
        tk = t[k]
        rw = rh_w[k] * 100.0
        ri = rh_i[k] * 100.0
        rh_w[k] = rw
        rh_i[k] = ri
        rh_c[k] = ri if tk < thermo.T0 else rw
        z_agl[k] = z[k] - z0
        min_rh[k], j = cloud.interp_from(z_agl[k], heights, min_rh_table, j)
        if np.isfinite(tk) and not np.isfinite(rw):
            humidity_complete = False
    cloud.cloud_in_column(z_agl, rh_c, min_rh, heights, max_rh_table, inter_rh_table, settings, in_cloud, zb,
                          scratch_b, scratch_i)
    # model cloud liquid, and cloud only where a temperature is known
    for k in range(n):
        model[k] = has_cl and np.isfinite(cl[k])
        if model[k] and cl[k] >= MODEL_CLOUD_MIN:
            in_cloud[k] = True
        in_cloud[k] = in_cloud[k] and np.isfinite(t[k])
        kind[k] = 0
    # the parcel of each cloud layer from its base; cloud kind from its excess over the air
    nr = cloud.runs(in_cloud, starts, ends)
    for k in range(n):
        parcel[k] = np.nan
        lwc_ad[k] = 0.0
    for r in range(nr):
        excess = adiabat.parcel_in_layer(p, lnp, t, starts[r], ends[r], adiabats, parcel, lwc_ad)
        base = cloud.run_bounds(z_agl, zb, starts[r], ends[r])[0]
        for k in range(starts[r], ends[r] + 1):
            kind[k] = 2 if excess > conv_excess else 1
            above_base[k] = max(z_agl[k] - base, 0.0)
    # supercooled levels, liquid fraction, LWC, the stratiform cap, MVD
    for k in range(n):
        tk = t[k]
        threshold = min_rh[k] if liquid_rh != liquid_rh else liquid_rh
        liquid_ok = cl[k] >= MODEL_CLOUD_MIN if model[k] else rh_w[k] >= threshold
        sc = in_cloud[k] and tk <= thermo.T0 and tk >= cold_limit and liquid_ok
        supercooled[k] = sc
        if tk > thermo.T0:  # (outside the fit's range the fraction is 1 or 0: no exponential spent there)
            lf = 1.0
        elif tk < cold_limit:
            lf = 0.0
        else:
            lf = microphysics.liquid_fraction(tk, cold_limit)
        lf_out[k] = lf
        lwc = 0.0
        if sc or (in_cloud[k] and tk > thermo.T0):
            if f_strat == f_strat:  # constant factors given
                factor = microphysics.cloud_kind_factor(kind[k], f_strat, f_conv)
            else:
                factor = microphysics.adiabatic_fraction(above_base[k])
            lwc = factor * lwc_ad[k] * lf * 1000.0
        if model[k]:
            lwc = cl[k] * 1000.0 if in_cloud[k] else 0.0
        if not np.isfinite(tk):
            lwc = np.nan
        lwc_out[k] = lwc
        mvd_out[k] = microphysics.mean_volume_diameter(lwc / 1000.0, n_drop) * mvd_ratio * 1e6 if lwc > 0 else np.nan
    # precipitation: its source (the highest layer whose snow does not sublimate on the way down), the type at
    # the ground, large drops with their grade and reason
    for k in range(n):  # the liquid water (kg/m3) for the droplet size of warm rain: estimated, and the most
        grow[k] = lwc_out[k] / 1000.0 if np.isfinite(lwc_out[k]) else 0.0
        grow_upper[k] = 2.0 * grow[k] if model[k] else lwc_ad[k] * lf_out[k]
    below = n
    while True:
        src, src_phase, any_drizzle, src_grade = precipitation.precipitation_source(
            z_agl, zb, t, grow, grow_upper, starts, ends, nr, settings[2], dz_top_t, dz_cold_top_t, rv_coalescence,
            n_drop, below, drizzle_src)
        if src < 0 or src_phase != precipitation.SNOW:
            break
        if precipitation.snow_sublimation_level(z, p, t, rh_i, in_cloud, starts[src]) < 0:
            break
        below = starts[src]  # gone before it reaches warm air or the ground: a lower layer may still precipitate
    src_level = ends[src] if src >= 0 else -1
    ptype = precipitation.precipitation_type_in_column(lnp, lnt, t, src_level, src_phase, src_grade,
                                                       humidity_complete, melt_aloft, rain_grade, rain_melted, area,
                                                       layer_start, layer_of, layer_area, layer_limit, layer_sure)
    if any_drizzle:
        precipitation.drizzle_below_in_column(t, drizzle_src, in_cloud, drizzle_src)
    for k in range(n):
        if rain_grade[k] > 0:
            large[k], potential[k], reason[k] = 2, rain_grade[k], 2 if rain_melted[k] else 3
        elif any_drizzle and drizzle_src[k] > 0:
            large[k], potential[k], reason[k] = 1, drizzle_src[k], 1
        else:
            large[k], potential[k], reason[k] = 0, 0, 0
    crossings = precipitation.warm_layer_aloft_in_column(t, warm_aloft)
    return ptype, crossings


def _diagnose_rows(p, t, td, z, cl, has_cl, cold_limit, settings, heights, min_rh, max_rh, inter_rh, adiabats,
                   saturation, n_drop, mvd_ratio, out_f, out_b, out_i, ptype, crossings):
    """:func:`diagnose_column` for every row of (P, n) arrays (``p`` may be one shared row, ``cl`` one row
    when unused); outputs (5, P, n), (3, P, n), (4, P, n), (P,), (P,)."""
    npro, n = t.shape
    scratch_f = np.empty((14, n))
    scratch_b = np.empty((6, n), np.bool_)
    scratch_i = np.empty((8, n), np.int64)
    lnp = np.empty(n)
    shared = p.shape[0] == 1
    if shared:
        for k in range(n):
            lnp[k] = np.log(p[0, k])
    for i in range(npro):
        ip = 0 if shared else i
        if not shared:
            for k in range(n):
                lnp[k] = np.log(p[i, k])
        ptype[i], crossings[i] = diagnose_column(
            p[ip], lnp, t[i], td[i], z[i], cl[i if has_cl else 0], has_cl, cold_limit, settings, heights, min_rh,
            max_rh, inter_rh, adiabats, saturation, n_drop, mvd_ratio, out_f[:, i], out_b[:, i], out_i[:, i],
            scratch_f, scratch_b, scratch_i)


@functools.lru_cache(maxsize=1)
def _compiled_rows():
    """The kernel, with one signature: read-only C-contiguous inputs (numpy's broadcast views and dask's
    chunks are read-only; :func:`_read_only` makes every input so), outputs of any layout (the rows of one
    block of the outputs). Contiguous inputs are indexed without their strides: the kernel ran 12 % slower
    with inputs of any layout."""
    from numba import types

    from icing.physics.jit import jit

    f8, b1, i1 = types.float64, types.boolean, types.int8
    ro1, ro2 = types.Array(f8, 1, "C", readonly=True), types.Array(f8, 2, "C", readonly=True)
    signature = types.void(ro2, ro2, ro2, ro2, ro2, b1, f8, ro1, ro1, ro1, ro1, ro1, types.UniTuple(ro1, 5),
                           types.UniTuple(ro1, 2), f8, f8,
                           types.Array(f8, 3, "A"), types.Array(b1, 3, "A"), types.Array(i1, 3, "A"),
                           types.Array(i1, 1, "A"), types.Array(types.int64, 1, "A"))
    return jit(_diagnose_rows, signature)


def _read_only(a):
    """A read-only C-contiguous float view of ``a`` (a copy only where it is not contiguous): the kernel's one
    signature takes read-only contiguous inputs."""
    v = np.ascontiguousarray(a, dtype=float).view()
    v.flags.writeable = False
    return v


def compile_kernels():
    """Compile (or load from numba's cache) the diagnosis kernel now, on a tiny input: its first use on a
    machine compiles it once (some seconds); later processes load it from the cache."""
    diagnose_arrays(np.array([90000.0, 80000.0]), np.array([270.0, 265.0]), np.array([269.0, 264.0]),
                    np.array([1000.0, 2000.0]), threads=1)


def diagnose_arrays(pressure, temperature, dewpoint, height, cloud_liquid=None, *, cold_limit=233.15,
                    airmass=microphysics.DEFAULT_AIRMASS, threads=None, **thresholds):
    """Icing diagnostics level by level for profiles of shape (..., level), plain SI in and out.

    Parameters
    ----------
    pressure, temperature, dewpoint, height : array_like (..., level)
        Pa, K, K (over water), m above mean sea level; NaN where missing (padded levels are NaN). Any level
        order: levels are sorted by decreasing pressure inside and the results put back in the input order.
    cloud_liquid : array_like (..., level), optional
        Cloud liquid water content from a model (kg/m3). Where finite it replaces the adiabatic estimate.
    cold_limit : float
        Coldest temperature (K) at which supercooled liquid is considered, default 233.15 K (-40 degC); a limit
        colder than the 224.8 K homogeneous-nucleation limit of pure water raises :class:`ConfigError`.
    airmass : {"supercooled", "continental", "marine"} or float
        Droplet number concentration for the droplet size (a number is per cm3).
    threads : int, optional
        Threads working on blocks of profiles at once (the compiled kernel releases the GIL). By default the
        environment variable ``ICING_DIAGNOSE_THREADS`` if set, else 1 when called from a thread other than
        the main one (a dask or distributed worker, whose own pool already fills the cores), else up to 4
        (the CPU count). The results do not depend on it.
    **thresholds
        Any of :data:`icing.physics.cloud.CLOUD_DEFAULTS`.

    Returns
    -------
    dict of ndarray
        Per level (shape of the input): ``rh_water``, ``rh_ice`` (percent), ``in_cloud``, ``supercooled``
        (bool), ``liquid_fraction`` (0-1), ``lwc`` (g/m3), ``mvd`` (um, NaN where no liquid), ``large_drop``
        (int8: 0 none, 1 drizzle, 2 rain), ``warm_layer_aloft`` (bool), ``cloud_kind`` (int8: 0 none,
        1 stratiform, 2 convective) and ``valid`` (bool: temperature and humidity were measured there; the
        other fields at invalid levels are interpolated from neighbours, or NaN/False beyond the data, and must
        never be read as cloud-free). Per profile (leading shape): ``precipitation_type`` (int8, codes of
        :data:`icing.physics.precipitation.PRECIPITATION_TYPES`) and ``freezing_level_count`` (int).

    Notes
    -----
    :func:`diagnose_column` on every profile (see there for the physics and its sources).
    """
    prm = _check_params(thresholds)
    workers = _thread_count(threads)
    cold_limit = microphysics.check_cold_limit(cold_limit)
    n_drop = microphysics.droplet_number_concentration(airmass)
    arrays = [np.asarray(a, dtype=float) for a in (pressure, temperature, dewpoint, height)]
    has_model = cloud_liquid is not None
    if has_model:
        arrays.append(np.asarray(cloud_liquid, dtype=float))
    shape = np.broadcast_shapes(*(a.shape for a in arrays))
    lead, n = shape[:-1], shape[-1]
    flat = [np.broadcast_to(a, shape).reshape(-1, n) for a in arrays]
    # Sort every profile by decreasing pressure (NaN pressures last), undone at the end.
    p_rows = flat[0][:1] if flat[0].shape[0] > 1 and flat[0].strides[0] == 0 else flat[0]  # 1-D pressure: one row
    key = np.where(np.isfinite(p_rows), -p_rows, np.inf)
    # A stable sort leaves keys already in order where they are, so no sort is needed then.
    sorted_already = bool(np.all(key[:, 1:] >= key[:, :-1]))
    if not sorted_already:
        order = np.argsort(np.broadcast_to(key, flat[0].shape), axis=-1, kind="stable")
        flat = [np.take_along_axis(a, order, axis=-1) for a in flat]
    p, t_raw, td_raw, z_raw = flat[:4]
    cl = flat[4] if has_model else np.full((1, n), np.nan)
    p = p[:1] if p.shape[0] > 1 and p.strides[0] == 0 else p  # one shared pressure row (a model grid)
    valid = np.isfinite(flat[0]) & np.isfinite(t_raw) & np.isfinite(td_raw)
    t, td, z = _fill_gaps(flat[0], t_raw), _fill_gaps(flat[0], td_raw), _fill_gaps(flat[0], z_raw)
    npro = t.shape[0]
    settings = np.array([prm[k] for k in cloud.CLOUD_SETTINGS] + [
        prm["convective_excess_k"],
        *((np.nan, np.nan) if prm["stratiform_factor"] is None and prm["convective_factor"] is None else
          microphysics.subadiabatic_factors(prm["stratiform_factor"], prm["convective_factor"])),
        prm["drizzle_top_temperature"],
        # the coalescence threshold as a mean volume radius: r_v = r_e k^(1/3) (Martin et al. 1994)
        prm["warm_rain_effective_radius_m"] * microphysics.spectral_shape_k(airmass) ** (1.0 / 3.0),
        prm["melting_area_aloft"], np.nan if prm["liquid_rh"] is None else prm["liquid_rh"],
        prm["drizzle_cold_top_temperature"]], dtype=float)
    tables = (np.asarray(cloud.ZHANG_HEIGHTS_M, dtype=float), np.asarray(prm["min_rh"], dtype=float),
              np.asarray(prm["max_rh"], dtype=float), np.asarray(prm["inter_rh"], dtype=float))
    out_f = np.empty((5, npro, n))
    out_b = np.empty((3, npro, n), bool)
    out_i = np.empty((4, npro, n), np.int8)
    ptype = np.empty(npro, np.int8)
    crossings = np.empty(npro, np.int64)
    kernel = _compiled_rows()

    ro = _read_only
    shared = (ro(settings), *(ro(a) for a in tables), tuple(ro(a) for a in adiabat.moist_adiabat_tables()),
              thermo.saturation_tables())
    mvd_ratio = microphysics.mvd_to_mean_volume_ratio(airmass)

    def block(i):  # writes into its rows of the outputs; blocks of profiles stay in cache
        sl = slice(i, i + _BLOCK)
        kernel(ro(p if p.shape[0] == 1 else p[sl]), ro(t[sl]), ro(td[sl]), ro(z[sl]),
               ro(cl if not has_model else cl[sl]), has_model, float(cold_limit), *shared, float(n_drop), mvd_ratio,
               out_f[:, sl], out_b[:, sl], out_i[:, sl], ptype[sl], crossings[sl])

    starts = range(0, max(npro, 1), _BLOCK)
    if workers > 1 and len(starts) > 1:
        with ThreadPoolExecutor(min(workers, len(starts))) as pool:
            list(pool.map(block, starts))
    else:
        for i in starts:
            block(i)
    levels = {"rh_water": out_f[0], "rh_ice": out_f[1], "in_cloud": out_b[0], "supercooled": out_b[1],
              "liquid_fraction": out_f[2], "lwc": out_f[3], "mvd": out_f[4], "large_drop": out_i[0],
              "warm_layer_aloft": out_b[2], "cloud_kind": out_i[1], "valid": valid,
              "large_drop_potential": out_i[2], "large_drop_reason": out_i[3]}
    result = {}
    for name in LEVEL_OUTPUTS:
        arr = levels[name]
        if not sorted_already:
            back = np.empty_like(arr)
            np.put_along_axis(back, order, arr, axis=-1)
            arr = back
        result[name] = arr.reshape(lead + (n,))
    result["precipitation_type"] = ptype.reshape(lead)
    result["freezing_level_count"] = crossings.reshape(lead)
    return result


# --- xarray wrapper ---------------------------------------------------------------------------------

FIELD_ATTRS = {
    "rh_water": {"units": "percent", "long_name": "relative humidity over liquid water"},
    "rh_ice": {"units": "percent", "long_name": "relative humidity over ice (a formal value above 0 degC)"},
    "in_cloud": {"long_name": "in cloud (RH thresholds of Zhang et al. 2010)"},
    "supercooled": {"long_name": "in cloud with supercooled liquid possible (between the cold limit and 0 degC)"},
    "liquid_fraction": {"units": "1", "long_name": "liquid fraction of cloud condensate (Hu et al. 2010)"},
    "lwc": {"units": "g/m^3", "long_name": "liquid water content"},
    "mvd": {"units": "micrometer", "long_name": "median volume diameter of cloud droplets"},
    "large_drop": {"long_name": "supercooled large drops possible, by kind",
                   "flag_values": np.array([0, 1, 2], np.int8),
                   "flag_meanings": "none drizzle rain"},
    "warm_layer_aloft": {"long_name": "in a layer above 0 degC that lies above sub-freezing air"},
    "cloud_kind": {"long_name": "cloud kind from the lapse rate against the moist adiabat",
                   "flag_values": np.array([0, 1, 2], np.int8), "flag_meanings": "none stratiform convective"},
    "valid": {"long_name": "temperature and humidity measured at this level (else interpolated or unknown)"},
    "large_drop_potential": {"long_name": "supercooled large-drop potential, graded",
                             "flag_values": np.array([0, 1, 2], np.int8), "flag_meanings": "none possible likely"},
    "large_drop_reason": {"long_name": "why supercooled large drops are possible",
                          "flag_values": np.array([0, 1, 2, 3], np.int8),
                          "flag_meanings": "none warm_rain_process melted_aloft_refreezing rain_from_warm_cloud"},
    "precipitation_type": {"long_name": "precipitation type at the lowest level if precipitation falls "
                                        "(Bourgouin 2000 energy areas)",
                           "flag_values": np.array(sorted(precipitation.PRECIPITATION_TYPES), np.int8),
                           "flag_meanings": " ".join(precipitation.PRECIPITATION_TYPES[k]
                                                     for k in sorted(precipitation.PRECIPITATION_TYPES))},
    "freezing_level_count": {"units": "1", "long_name": "number of 0 degC crossings"},
}
_DTYPES = {"in_cloud": bool, "supercooled": bool, "warm_layer_aloft": bool, "valid": bool,
           "large_drop": np.int8, "cloud_kind": np.int8, "precipitation_type": np.int8,
           "large_drop_potential": np.int8, "large_drop_reason": np.int8,
           "freezing_level_count": np.int64}


def _cold_limit_kelvin(cold_limit):
    if isinstance(cold_limit, ureg.Quantity):
        return float(cold_limit.to("K").magnitude)
    return float(cold_limit) + thermo.T0


def diagnose(profiles, *, cold_limit=DEFAULT_COLD_LIMIT_C, airmass=microphysics.DEFAULT_AIRMASS,
             **thresholds) -> xr.Dataset:
    """Icing diagnostics of canonical profile Dataset(s), keeping their dimensions and coordinates.

    Parameters
    ----------
    profiles : xarray.Dataset
        Canonical profile(s) (:mod:`icing.profile`): dimension ``level`` last or anywhere, any leading
        dimensions; ``pressure``, ``temperature``, ``dewpoint``, ``height`` with pint-readable ``units``, and
        optionally ``cloud_liquid``. Dask-backed variables stay lazy.
    cold_limit : pint.Quantity or float
        Coldest temperature for supercooled liquid; a float is in degC (default -40 degC).
    airmass : {"supercooled", "continental", "marine"} or float
        Droplet number for the droplet size (a number is per cm3).
    **thresholds
        Any of :data:`icing.physics.cloud.CLOUD_DEFAULTS`.

    Returns
    -------
    xarray.Dataset
        The input ``pressure``, ``height``, ``temperature``, ``dewpoint`` (and ``qc_flag``, and per-profile
        variables such as ``latitude``, ``longitude``, ``time``, ``station`` of stacked profiles) plus the fields of
        :func:`diagnose_arrays`, each with ``units``/``long_name`` attributes; attributes ``cold_limit``
        (degC), ``airmass``, ``lwc_source`` ("adiabatic" or "model cloud liquid"), ``caution`` and the input's
        ``quality`` record.
    """
    ck = _cold_limit_kelvin(cold_limit)
    microphysics.check_cold_limit(ck)
    _check_params(thresholds)
    for name in ("pressure", "temperature", "dewpoint", "height"):
        if name not in profiles:
            raise ConfigError(f"profile has no {name!r} variable")
    inputs = [dataarray_to_unit(profiles["pressure"], "Pa"), dataarray_to_unit(profiles["temperature"], "K"),
              dataarray_to_unit(profiles["dewpoint"], "K"), dataarray_to_unit(profiles["height"], "m")]
    has_model = "cloud_liquid" in profiles and bool(np.isfinite(profiles["cloud_liquid"]).any())
    if has_model:
        inputs.append(dataarray_to_unit(profiles["cloud_liquid"], "kg/m^3"))
    names = LEVEL_OUTPUTS + PROFILE_OUTPUTS

    def core(*arrs):
        cl = arrs[4] if len(arrs) > 4 else None
        out = diagnose_arrays(*arrs[:4], cl, cold_limit=ck, airmass=airmass, **thresholds)
        return tuple(out[k] for k in names)

    results = xr.apply_ufunc(
        core, *inputs, input_core_dims=[["level"]] * len(inputs),
        output_core_dims=[["level"]] * len(LEVEL_OUTPUTS) + [[]] * len(PROFILE_OUTPUTS),
        dask="parallelized" if any(getattr(a.data, "chunks", None) is not None for a in inputs) else "forbidden",
        output_dtypes=[_DTYPES.get(k, float) for k in names],
        dask_gufunc_kwargs={"allow_rechunk": False}, keep_attrs=False)
    keep = [v for v in ("pressure", "height", "temperature", "dewpoint", "relative_humidity", "cloud_liquid",
                        "qc_flag") if v in profiles]
    keep += [v for v in profiles.data_vars if "level" not in profiles[v].dims]  # per-profile metadata
    ds = profiles[keep].copy()
    for name, da in zip(names, results, strict=True):
        dims = [d for d in profiles["temperature"].dims if d != "level"]
        da = da.transpose(*(dims + (["level"] if name in LEVEL_OUTPUTS else [])))
        ds[name] = da.assign_attrs(FIELD_ATTRS[name])
    ds.attrs = {k: v for k, v in profiles.attrs.items()}
    ds.attrs.update({
        "cold_limit": ck - thermo.T0, "cold_limit_units": "degC",
        "airmass": str(airmass),
        "lwc_source": "model cloud liquid" if has_model else "adiabatic",
        "lwc_method": ("cloud liquid water from the source model where given" if has_model else
                       "adiabatic LWC from each cloud base along the moist adiabat x the fraction left at that "
                       "height above the base (Karstens et al. 1994) x liquid fraction (Hu et al. 2010); from a "
                       "sounding alone uncertain by a factor of two either way"),
        "caution": CAUTION,
        "quality": list(profiles.attrs.get("quality", [])),
    })
    return ds

"""Level-wise icing diagnostics of any number of profiles at once.

:func:`diagnose_arrays` is the numpy core on plain SI arrays with a trailing level axis; :func:`diagnose`
wraps it for canonical profile Datasets (``xr.apply_ufunc`` with ``level`` as the core dimension, so dask-
backed inputs stay lazy). The physics lives in :mod:`icing.physics.layers`, :mod:`icing.physics.adiabat` and
:mod:`icing.physics.microphysics`; this module only chains it.
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
from icing.physics import adiabat, envelopes, layers, microphysics, thermo
from icing.units import dataarray_to_unit, ureg

__all__ = ["diagnose_arrays", "diagnose", "DEFAULT_COLD_LIMIT_C", "LEVEL_OUTPUTS", "PROFILE_OUTPUTS",
           "THREADS_ENV", "ENGINE_ENV", "FUSED_MIN_POINTS"]

DEFAULT_COLD_LIMIT_C = -40.0
LEVEL_OUTPUTS = ("rh_water", "rh_ice", "in_cloud", "supercooled", "liquid_fraction", "lwc", "mvd", "large_drop",
                 "warm_layer_aloft", "cloud_kind", "valid")
PROFILE_OUTPUTS = ("precipitation_type", "freezing_level_count")
_BLOCK = 2048  # profiles per block
_WORKERS = min(4, os.cpu_count() or 1)  # block threads of a call from the main thread (see _thread_count)
THREADS_ENV = "ICING_DIAGNOSE_THREADS"
ENGINE_ENV = "ICING_ENGINE"
FUSED_MIN_POINTS = 20_000  # level-points: below this the numba kernels' first load costs more than they save
_MODEL_CLOUD_MIN = 1e-5  # kg/m3 (0.01 g/m3): model cloud liquid above this is cloud (common practice)


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


def _cap_stratiform(lwc, kind, t, model, airmass, n_drop):
    """Hold supercooled stratiform LWC (g/m3) to the 14 CFR Part 25 Appendix C continuous maximum.

    Adiabatic ascent from the base of a deep layer cloud gives 1-2 g/m3 or more near its top, while the
    measured extremes of layer-cloud icing on which the continuous-maximum envelope rests (NACA TN-1855 and
    the studies behind Appendix C) stay below about 0.8 g/m3; deep layer cloud loses water to entrainment,
    precipitation and ice. The cap is our design rule, not a published parameterisation. The envelope falls
    with MVD and the MVD grows with LWC, so the cap is the self-consistent value L* = envelope(MVD(L*), T)
    (temperature held to 0..-30 degC, MVD to 15..40 um), which depends only on the temperature and the
    droplet concentration: the capped LWC still grows with the adiabatic LWC. It is tabulated once per
    droplet concentration every 0.005 K by bisection (:func:`_cap_table`) and interpolated (within 1e-5 g/m3
    of the bisection at the level's own temperature). Convective cloud is not capped.
    """
    strat = (kind == 1) & ~model & (lwc > 0) & (t < thermo.T0)
    if not strat.any():
        return lwc
    table_t, table_cap = _cap_table(airmass if isinstance(airmass, str) else float(airmass), float(n_drop))
    cap = np.interp(np.clip(t[strat] - thermo.T0, -30.0, 0.0), table_t, table_cap)
    out = lwc.copy()
    out[strat] = np.minimum(lwc[strat], cap)
    return out


def _cap_by_bisection(tc, airmass, n_drop):
    """The self-consistent cap L* (g/m3) at temperatures ``tc`` (degC, -30..0) by 30 halvings of 0..1 g/m3."""
    lo = np.zeros(tc.shape)
    hi = np.full(tc.shape, 1.0)  # above every envelope value (0.8 g/m3 at most)
    for _ in range(30):  # bisection on envelope(MVD(L)) - L, which falls with L
        mid = 0.5 * (lo + hi)
        mvd = microphysics.median_volume_diameter(mid / 1000.0, airmass, number_concentration=n_drop) * 1e6
        above = envelopes.continuous_max_lwc_si(np.clip(mvd, 15.0, 40.0), tc) > mid
        lo, hi = np.where(above, mid, lo), np.where(above, hi, mid)
    return 0.5 * (lo + hi)


@functools.lru_cache(maxsize=16)
def _cap_table(airmass, n_drop):
    """(temperature degC, cap g/m3) every 0.005 K from -30 to 0 degC for one droplet concentration."""
    tc = np.linspace(-30.0, 0.0, 6001)
    return tc, _cap_by_bisection(tc, airmass, n_drop)


def _cap_stratiform_reference(lwc, kind, t, model, airmass, n_drop):
    """The cap of :func:`_cap_stratiform` by the bisection at every supercooled stratiform level's own
    temperature; kept to test the tabulated version against."""
    strat = (kind == 1) & ~model & (lwc > 0) & (t < thermo.T0)
    if not strat.any():
        return lwc
    out = lwc.copy()
    out[strat] = np.minimum(lwc[strat], _cap_by_bisection(np.clip(t[strat] - thermo.T0, -30.0, 0.0), airmass,
                                                          n_drop))
    return out


def _relative_humidities(t, lnt, td):
    """RH over water and over ice (percent) from temperature (K, with its log ``lnt``) and dewpoint (K).

    The same as 100 x :func:`icing.physics.thermo.relative_humidity_water` and
    :func:`icing.physics.thermo.relative_humidity_ice`
    (Murphy and Koop 2005, eqs. 10 and 7: e_w(Td) / e_w(T) and e_w(Td) / e_i(T)), to rounding, with each
    logarithm taken once and the ratios formed in logs (two exponentials instead of three).
    """
    rows = max(1, 8192 // max(t.shape[-1], 1))  # slices of about 8192 levels stay in cache: 1.5x faster
    if t.ndim == 2 and t.shape[0] > 2 * rows:
        rh_w, rh_i = np.empty(t.shape), np.empty(t.shape)
        for i in range(0, t.shape[0], rows):
            sl = slice(i, i + rows)
            rh_w[sl], rh_i[sl] = _relative_humidities(t[sl], lnt[sl], td[sl])
        return rh_w, rh_i
    ln_e = _ln_esw(td, np.log(td))
    ln_ew = _ln_esw(t, lnt)
    ln_ei = 3.53068 * lnt
    ln_ei += 9.550426
    ln_ei -= 5723.265 / t
    ln_ei -= 0.00728332 * t
    rh_w = np.subtract(ln_e, ln_ew, out=ln_ew)
    np.exp(rh_w, out=rh_w)
    rh_w *= 100.0
    rh_i = np.subtract(ln_e, ln_ei, out=ln_ei)
    np.exp(rh_i, out=rh_i)
    rh_i *= 100.0
    return rh_w, rh_i


def _ln_esw(t, lnt):
    """ln e_w (Pa) of Murphy and Koop (2005), eq. (10), as :func:`icing.physics.thermo.saturation_vapor_pressure_water`,
    in place where it can; tanh(u) taken as 1 - 2 / (exp(2u) + 1), one exponential (numpy's tanh is about
    three times slower)."""
    inv = 1.0 / t
    th = np.multiply(t - 218.8, 0.083)
    np.exp(th, out=th)
    th += 1.0
    np.divide(-2.0, th, out=th)
    th += 1.0
    poly = -9.44523 * lnt
    poly += 53.878
    poly -= 1331.22 * inv
    poly += 0.014025 * t
    th *= poly
    out = -4.210 * lnt
    out += 54.842763
    out -= 6763.22 * inv
    out += 0.000367 * t
    out += th
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
    unknown = set(params) - set(layers.CLOUD_DEFAULTS)
    if unknown:
        raise ConfigError(f"unknown diagnostic parameter(s) {sorted(unknown)}; known: {sorted(layers.CLOUD_DEFAULTS)}")
    prm = {**layers.CLOUD_DEFAULTS, **params}
    for name in ("min_rh", "max_rh", "inter_rh"):  # one value per height of layers.ZHANG_HEIGHTS_M
        values = np.asarray(prm[name], dtype=float) if np.ndim(prm[name]) == 1 else None
        if values is None or values.size != len(layers.ZHANG_HEIGHTS_M) or not np.isfinite(values).all():
            raise ConfigError(f"{name} must be {len(layers.ZHANG_HEIGHTS_M)} finite RH values (percent), one per "
                              f"height {layers.ZHANG_HEIGHTS_M} m; got {prm[name]!r}")
    return prm


def diagnose_arrays(pressure, temperature, dewpoint, height, cloud_liquid=None, *, cold_limit=233.15,
                    airmass="continental", threads=None, engine=None, **thresholds):
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
    airmass : {"continental", "marine"} or float
        Droplet number concentration for the droplet size (a number is per cm3).
    threads : int, optional
        Threads working on blocks of profiles at once (numpy releases the GIL in its loops). By default the
        environment variable ``ICING_DIAGNOSE_THREADS`` if set, else 1 when called from a thread other than
        the main one (a dask or distributed worker, whose own pool already fills the cores), else up to 4
        (the CPU count). The results do not depend on it.
    engine : {"auto", "numpy", "numba"}, optional
        ``"numpy"``: the whole-array numpy chain; ``"numba"``: the same chain fused into one compiled pass per
        column (:mod:`icing.physics.fused`, needs numba); ``"auto"`` (default, or the ``ICING_ENGINE`` environment
        variable): numba for inputs of at least ``FUSED_MIN_POINTS`` level-points when it is installed. Both
        give the same results (flags equal, numbers to rounding; ``tests/test_fused.py``).
    **thresholds
        Any of :data:`icing.physics.layers.CLOUD_DEFAULTS`.

    Returns
    -------
    dict of ndarray
        Per level (shape of the input): ``rh_water``, ``rh_ice`` (percent), ``in_cloud``, ``supercooled``
        (bool), ``liquid_fraction`` (0-1), ``lwc`` (g/m3), ``mvd`` (um, NaN where no liquid), ``large_drop``
        (int8: 0 none, 1 drizzle, 2 rain), ``warm_layer_aloft`` (bool), ``cloud_kind`` (int8: 0 none,
        1 stratiform, 2 convective) and ``valid`` (bool: temperature and humidity were measured there; the
        other fields at invalid levels are interpolated from neighbours, or NaN/False beyond the data, and must
        never be read as cloud-free). Per profile (leading shape): ``precipitation_type`` (int8, codes of
        :data:`icing.physics.layers.PRECIPITATION_TYPES`) and ``freezing_level_count`` (int).

    Notes
    -----
    The chain: RH over water and ice (Murphy and Koop 2005); cloud levels by Zhang et al. (2010); supercooled
    = in cloud, between ``cold_limit`` and 0 degC, with RH over water at least the cloud threshold (liquid
    possible); cloud kind convective where the moist adiabat from the layer base gets warmer than the
    environment anywhere in the layer (environmental lapse rate steeper than moist adiabatic); LWC =
    adiabatic LWC from each layer base x sub-adiabatic factor by kind x liquid fraction (Hu et al. 2010) at
    supercooled and warm cloud levels;
    MVD from LWC and the airmass's droplet number; precipitation type by Bourgouin (2000); large drops:
    freezing rain where melted precipitation falls into sub-freezing air, freezing drizzle under warm-topped
    supercooled cloud.
    """
    return _chain(pressure, temperature, dewpoint, height, cloud_liquid, cold_limit=cold_limit, airmass=airmass,
                  threads=threads, engine=engine, summaries=False, thresholds=thresholds)[0]


def _engine(engine, npoints):
    """Whether the fused numba engine runs: ``engine`` (or ``ICING_ENGINE``) and the input size decide."""
    from icing.physics import fused

    if engine is None:
        engine = os.environ.get(ENGINE_ENV, "").strip().lower() or "auto"
    if engine not in fused.ENGINES:
        raise ConfigError(f"engine {engine!r} is not one of {', '.join(fused.ENGINES)}")
    if engine == "numpy":
        return False
    if engine == "numba":
        if not fused.available():
            raise ConfigError("engine 'numba' needs the numba package (pip install numba, or 'icing[scale]')")
        return True
    return npoints >= FUSED_MIN_POINTS and fused.available()


_SUMMARY_KEYS = ("freezing_level_m", "freezing_levels", "supercooled_base_m", "supercooled_top_m")


def _chain(pressure, temperature, dewpoint, height, cloud_liquid, *, cold_limit, airmass, threads, engine,
           summaries, thresholds):
    """:func:`diagnose_arrays`; with ``summaries`` and the fused engine on pressure-sorted input, the column
    summaries of :func:`icing.grid.column_summaries` too (computed in the same pass). Returns (results,
    whether the fused engine ran)."""
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
    cl = flat[4] if has_model else None
    use_fused = _engine(engine, p.shape[0] * n)
    t = _fill_gaps(p, t_raw)
    td = _fill_gaps(p, td_raw)
    z = _fill_gaps(p, z_raw)
    if not use_fused:  # (the fused kernel does these two in its own pass)
        valid = np.isfinite(p) & np.isfinite(t_raw) & np.isfinite(td_raw)
        td = np.minimum(td, t)
    with_summaries = bool(summaries and use_fused and sorted_already)
    # Blocks of profiles small enough to stay in cache (a loop over blocks, never over profiles); numpy and the
    # compiled kernel release the GIL, so blocks run in parallel threads.
    starts = range(0, max(p.shape[0], 1), _BLOCK)
    if use_fused:
        from icing.physics import fused

        cap = _cap_table(airmass if isinstance(airmass, str) else float(airmass), float(n_drop)) \
            if prm["stratiform_cap"] else None
        out = fused.empty_outputs(p.shape[0], n, with_summaries)

        def fused_block(i):  # writes into its rows of ``out``
            sl = slice(i, i + _BLOCK)
            fused.diagnose_block(p[sl], t[sl], td[sl], z[sl], None if cl is None else cl[sl], td_raw[sl],
                                 t_raw[sl], z_raw[sl], cold_limit, n_drop, airmass, prm, cap,
                                 summaries=with_summaries, out={k: v[sl] for k, v in out.items()})

        if workers > 1 and len(starts) > 1:
            with ThreadPoolExecutor(min(workers, len(starts))) as pool:
                list(pool.map(fused_block, starts))
        else:
            for i in starts:
                fused_block(i)
    else:
        def block(i):
            sl = slice(i, i + _BLOCK)
            return _diagnose_sorted(p[sl], t[sl], td[sl], z[sl], None if cl is None else cl[sl], valid[sl],
                                    cold_limit, n_drop, airmass, prm)

        if len(starts) == 1:
            out = block(0)
        else:
            first = block(0)
            out = {k: np.empty((p.shape[0],) + v.shape[1:], v.dtype) for k, v in first.items()}

            def store(i, part):
                for k, v in part.items():
                    out[k][i:i + _BLOCK] = v

            store(0, first)
            if workers > 1:
                with ThreadPoolExecutor(workers) as pool:
                    for i, part in zip(starts[1:], pool.map(block, starts[1:]), strict=True):
                        store(i, part)
            else:
                for i in starts[1:]:
                    store(i, block(i))
    result = {}
    for name, arr in out.items():
        if name in _SUMMARY_KEYS:
            result[name] = arr.reshape(lead + arr.shape[1:])
        elif arr.ndim == 2:
            if not sorted_already:
                back = np.empty_like(arr)
                np.put_along_axis(back, order, arr, axis=-1)
                arr = back
            result[name] = arr.reshape(lead + (n,))
        else:
            result[name] = arr.reshape(lead)
    return result, use_fused


def _diagnose_sorted(p, t, td, z, cl, valid, cold_limit, n_drop, airmass, prm):
    npro, n = p.shape
    have_t = np.isfinite(t)
    with np.errstate(invalid="ignore", divide="ignore"):
        lnt = np.log(t)
        # One ln p for the block; pressure broadcast along the profiles (a model grid) needs only one row.
        lnp = np.broadcast_to(np.log(p[:1]), p.shape) if p.shape[0] > 1 and p.strides[0] == 0 else np.log(p)
        rh_w, rh_i = _relative_humidities(t, lnt, td)
    rh_cloud = np.where(t < thermo.T0, rh_i, rh_w)
    z0 = np.take_along_axis(z, np.argmax(np.isfinite(z), axis=-1)[:, None], axis=-1)
    z_agl = z - z0
    min_rh = layers.zhang_thresholds(z_agl, prm["min_rh"])
    in_cloud, zb = layers.cloud_mask(z_agl, rh_cloud, min_rh_values=min_rh, **{k: prm[k] for k in (
        "min_rh", "max_rh", "inter_rh", "min_moist_base_m", "min_moist_thickness_m", "min_cloud_base_m",
        "merge_gap_m", "min_thickness_low_m", "min_thickness_high_m", "low_cloud_limit_m")})
    model = np.zeros_like(in_cloud) if cl is None else np.isfinite(cl)
    if cl is not None:
        in_cloud |= model & (cl >= _MODEL_CLOUD_MIN)
    in_cloud &= have_t
    lwc_ad, tp = adiabat.adiabatic_lwc_from_bases(p, np.where(have_t, t, 273.15), in_cloud, log_pressure=lnp)
    # Cloud kind per layer: convective where the parcel rising from the layer base along the moist adiabat
    # gets warmer than the environment somewhere in the layer (lapse rate steeper than moist adiabatic).
    s, e, rid = layers._runs(in_cloud)
    excess = layers._reduce_runs(np.fmax, tp - t, s, e, -np.inf)
    conv = layers._spread(excess > prm["convective_excess_k"], rid, False)
    kind = in_cloud.astype(np.int8)  # 0 none, 1 stratiform, 2 convective (int8 sums: numpy's int64 where is slow)
    kind += in_cloud & conv
    liquid_rh = min_rh if prm["liquid_rh"] is None else prm["liquid_rh"]
    with np.errstate(invalid="ignore"):
        liquid_ok = np.where(model, (cl if cl is not None else 0.0) >= _MODEL_CLOUD_MIN, rh_w >= liquid_rh)
        cold_enough = (t <= thermo.T0) & (t >= cold_limit)
    supercooled = in_cloud & cold_enough & liquid_ok
    warm_cloud = in_cloud & (t > thermo.T0)
    lf = microphysics.liquid_fraction(t, cold_limit)
    factor = microphysics.subadiabatic_factor(kind, prm["stratiform_factor"], prm["convective_factor"])
    lwc = np.where(supercooled | warm_cloud, factor * lwc_ad * lf, 0.0) * 1000.0
    if prm["stratiform_cap"]:
        lwc = _cap_stratiform(lwc, kind, t, model, airmass, n_drop)
    if cl is not None:
        lwc = np.where(model, np.where(in_cloud, cl * 1000.0, 0.0), lwc)
    lwc = np.where(have_t, lwc, np.nan)
    mvd = np.full(lwc.shape, np.nan)
    wet = lwc > 0
    mvd[wet] = microphysics.median_volume_diameter(lwc[wet] / 1000.0, airmass, number_concentration=n_drop) * 1e6
    # Per cloud layer: thickness and the temperature at the interpolated top, for the drizzle rule and the
    # precipitation source (the highest cloud top that can precipitate).
    src_level = np.full(npro, -1)
    src_phase = np.zeros(npro, dtype=np.int64)
    if s.size:
        base, top = layers._run_bounds(z_agl, zb, s, e, n)
        thick = top - np.maximum(base, prm["min_cloud_base_m"])
        e1 = np.where(e % n < n - 1, e + 1, e)
        zf, tf = z_agl.ravel(), t.ravel()
        with np.errstate(invalid="ignore", divide="ignore"):
            w = np.where(e1 > e, (top - zf[e]) / (zf[e1] - zf[e]), 0.0)
            t_top = np.where(np.isfinite(w) & np.isfinite(tf[e1]), tf[e] + w * (tf[e1] - tf[e]), tf[e])
            cold_top = t_top < prm["drizzle_top_temperature"]
            deep = thick >= prm["drizzle_min_thickness_m"]
            drizzle_run = ~cold_top & (t_top <= thermo.T0) & deep
        can = np.flatnonzero(cold_top | deep)
        if can.size:
            rows, cols = np.divmod(e[can], n)
            np.maximum.at(src_level, rows, cols)  # the highest qualifying top of each profile
            top_run = np.full(npro, -1)
            np.maximum.at(top_run, rows, can)
            has = top_run >= 0
            ph = np.where(cold_top, layers._SN, np.where(t_top <= thermo.T0, layers._DZ, layers._RA))
            src_phase[has] = ph[top_run[has]]
        drizzle_src = layers._spread(drizzle_run, rid, False)
    else:
        drizzle_src = np.zeros(p.shape, bool)
    drizzle = layers.drizzle_below(t, drizzle_src & in_cloud)
    humidity_complete = ~np.any(have_t & ~np.isfinite(rh_w), axis=-1)
    ptype, rain = layers.precipitation_type(p, t, src_level, src_phase, humidity_complete,
                                            prm["melting_area_aloft"], log_pressure=lnp, log_temperature=lnt)
    large = drizzle.astype(np.int8)
    large[rain] = 2
    fl_count = np.count_nonzero(layers.freezing_crossings(t), axis=-1)
    return {
        "rh_water": rh_w, "rh_ice": rh_i, "in_cloud": in_cloud, "supercooled": supercooled,
        "liquid_fraction": lf, "lwc": lwc, "mvd": mvd, "large_drop": large,
        "warm_layer_aloft": layers.warm_layer_aloft(t), "cloud_kind": kind, "valid": valid,
        "precipitation_type": ptype, "freezing_level_count": fl_count.astype(np.int64),
    }


# --- xarray wrapper ---------------------------------------------------------------------------------

_ATTRS = {
    "rh_water": {"units": "percent", "long_name": "relative humidity over liquid water"},
    "rh_ice": {"units": "percent", "long_name": "relative humidity over ice (a formal value above 0 degC)"},
    "in_cloud": {"long_name": "in cloud (RH thresholds of Zhang et al. 2010)"},
    "supercooled": {"long_name": "in cloud with supercooled liquid possible (between the cold limit and 0 degC)"},
    "liquid_fraction": {"units": "1", "long_name": "liquid fraction of cloud condensate (Hu et al. 2010)"},
    "lwc": {"units": "g/m^3", "long_name": "liquid water content"},
    "mvd": {"units": "micrometer", "long_name": "median volume diameter of cloud droplets"},
    "large_drop": {"long_name": "supercooled large-drop potential", "flag_values": np.array([0, 1, 2], np.int8),
                   "flag_meanings": "none drizzle rain"},
    "warm_layer_aloft": {"long_name": "in a layer above 0 degC that lies above sub-freezing air"},
    "cloud_kind": {"long_name": "cloud kind from the lapse rate against the moist adiabat",
                   "flag_values": np.array([0, 1, 2], np.int8), "flag_meanings": "none stratiform convective"},
    "valid": {"long_name": "temperature and humidity measured at this level (else interpolated or unknown)"},
    "precipitation_type": {"long_name": "precipitation type at the lowest level if precipitation falls "
                                        "(Bourgouin 2000 energy areas)",
                           "flag_values": np.array(sorted(layers.PRECIPITATION_TYPES), np.int8),
                           "flag_meanings": " ".join(layers.PRECIPITATION_TYPES[k]
                                                     for k in sorted(layers.PRECIPITATION_TYPES))},
    "freezing_level_count": {"units": "1", "long_name": "number of 0 degC crossings"},
}
_DTYPES = {"in_cloud": bool, "supercooled": bool, "warm_layer_aloft": bool, "valid": bool,
           "large_drop": np.int8, "cloud_kind": np.int8, "precipitation_type": np.int8,
           "freezing_level_count": np.int64}


def _cold_limit_kelvin(cold_limit):
    if isinstance(cold_limit, ureg.Quantity):
        return float(cold_limit.to("K").magnitude)
    return float(cold_limit) + thermo.T0


def diagnose(profiles, *, cold_limit=DEFAULT_COLD_LIMIT_C, airmass="continental", **thresholds) -> xr.Dataset:
    """Icing diagnostics of canonical profile Dataset(s), keeping their dimensions and coordinates.

    Parameters
    ----------
    profiles : xarray.Dataset
        Canonical profile(s) (:mod:`icing.profile`): dimension ``level`` last or anywhere, any leading
        dimensions; ``pressure``, ``temperature``, ``dewpoint``, ``height`` with pint-readable ``units``, and
        optionally ``cloud_liquid``. Dask-backed variables stay lazy.
    cold_limit : pint.Quantity or float
        Coldest temperature for supercooled liquid; a float is in degC (default -40 degC).
    airmass : {"continental", "marine"} or float
        Droplet number for the droplet size (a number is per cm3).
    **thresholds
        Any of :data:`icing.physics.layers.CLOUD_DEFAULTS`.

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
        dask="parallelized", output_dtypes=[_DTYPES.get(k, float) for k in names],
        dask_gufunc_kwargs={"allow_rechunk": False}, keep_attrs=False)
    keep = [v for v in ("pressure", "height", "temperature", "dewpoint", "relative_humidity", "cloud_liquid",
                        "qc_flag") if v in profiles]
    keep += [v for v in profiles.data_vars if "level" not in profiles[v].dims]  # per-profile metadata
    ds = profiles[keep].copy()
    for name, da in zip(names, results, strict=True):
        dims = [d for d in profiles["temperature"].dims if d != "level"]
        da = da.transpose(*(dims + (["level"] if name in LEVEL_OUTPUTS else [])))
        ds[name] = da.assign_attrs(_ATTRS[name])
    ds.attrs = {k: v for k, v in profiles.attrs.items()}
    ds.attrs.update({
        "cold_limit": ck - thermo.T0, "cold_limit_units": "degC",
        "airmass": str(airmass),
        "lwc_source": "model cloud liquid" if has_model else "adiabatic",
        "lwc_method": ("cloud liquid water from the source model where given" if has_model else
                       "adiabatic LWC from each cloud base along the moist adiabat x sub-adiabatic factor "
                       "(stratiform 0.8, convective 0.4) x liquid fraction (Hu et al. 2010)"
                       + ("; supercooled stratiform LWC held to the Part 25 Appendix C continuous maximum"
                          if thresholds.get("stratiform_cap", True) else "")),
        "caution": CAUTION,
        "quality": list(profiles.attrs.get("quality", [])),
    })
    return ds

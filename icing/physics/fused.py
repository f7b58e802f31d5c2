"""The diagnosis chain fused into one compiled pass over each column (optional: needs numba).

:func:`icing.physics.diagnose.diagnose_arrays` chains the physics as whole-array numpy operations: clear, but a few
hundred passes over memory and a temporary array for each. This module does the same arithmetic column by
column in one compiled loop (numba; the kernels are in :mod:`icing.physics._fused_kernels`), reading the inputs once
and writing each output once, and is used for large inputs when numba is installed (``engine="auto"``;
``engine="numpy"`` forces the array version). It is not a second model: every step of the kernels mirrors a
numpy function named beside it, with the same formulas,
constants and tables, and ``tests/test_fused.py`` checks that both engines give the same results (flags equal,
numbers to rounding). The physics and its sources are documented where it lives: :mod:`icing.physics.layers`,
:mod:`icing.physics.adiabat`, :mod:`icing.physics.microphysics`, :mod:`icing.physics.diagnose`,
:func:`icing.grid.column_summaries`
and :func:`icing.physics.accretion.intensity_code`.

Only pressure-sorted columns come here (pressure decreasing along the level axis, gaps already filled by
:func:`icing.physics.diagnose._fill_gaps`): :func:`icing.physics.diagnose.diagnose_arrays` sorts them first and puts the
results back in the input order. The accretion heat balance of the supercooled levels stays in numpy
(:func:`icing.physics.accretion.accretion_core`, on those levels only).
"""

from __future__ import annotations

import functools

import numpy as np

from icing.physics import adiabat, layers, microphysics
from icing.physics.accretion import _IN_PER_H, INTENSITY_THRESHOLDS_IN_PER_H

__all__ = ["available", "diagnose_block", "empty_outputs", "potential_summary", "ENGINES"]

ENGINES = ("auto", "numpy", "numba")


@functools.lru_cache(maxsize=1)
def available() -> bool:
    """Whether numba can be imported (the fused engine is then used for large inputs)."""
    try:
        import numba  # noqa: F401
    except ImportError:
        return False
    return True


@functools.lru_cache(maxsize=1)
def _kernels():
    """The compiled kernels (numba compiles them once and caches them on disk; numba is imported only here)."""
    from icing.physics import _fused_kernels

    return _fused_kernels.block, _fused_kernels.potential


@functools.lru_cache(maxsize=1)
def _tables():
    tab, inv = adiabat._tables()
    ax = lambda a: np.array([a[0], a[1] - a[0], a.size], dtype=float)  # noqa: E731
    return (np.ascontiguousarray(tab).ravel(), ax(adiabat._TW), np.ascontiguousarray(inv).ravel(), ax(adiabat._TT),
            ax(adiabat._LNP))


def _factor(value, default):
    return float(default if value is None else value)


def empty_outputs(npro, n, summaries=False):
    """Output arrays of :func:`diagnose_block` for ``npro`` columns of ``n`` levels (the level fields of
    :data:`icing.physics.diagnose.LEVEL_OUTPUTS` but ``valid``, the per-column ones and, with ``summaries``, those of
    :func:`icing.grid.column_summaries`)."""
    out = {"rh_water": np.empty((npro, n)), "rh_ice": np.empty((npro, n)), "in_cloud": np.empty((npro, n), bool),
           "supercooled": np.empty((npro, n), bool), "liquid_fraction": np.empty((npro, n)),
           "lwc": np.empty((npro, n)), "mvd": np.empty((npro, n)), "large_drop": np.empty((npro, n), np.int8),
           "warm_layer_aloft": np.empty((npro, n), bool), "cloud_kind": np.empty((npro, n), np.int8),
           "precipitation_type": np.empty(npro, np.int8), "freezing_level_count": np.empty(npro, np.int64),
           "valid": np.empty((npro, n), bool)}
    if summaries:
        from icing.grid import N_FREEZING_LEVELS

        out.update({"freezing_level_m": np.empty(npro), "freezing_levels": np.empty((npro, N_FREEZING_LEVELS)),
                    "supercooled_base_m": np.empty(npro), "supercooled_top_m": np.empty(npro)})
    return out


def diagnose_block(p, t, td, z, cl, td_raw, t_raw, z_raw, cold_limit, n_drop, airmass, prm, cap_table,
                   summaries=False, out=None):
    """:func:`icing.physics.diagnose._diagnose_sorted` (and, with ``summaries``, the column summaries of
    :func:`icing.grid.column_summaries` on ``t_raw``/``z_raw``) for a block of pressure-sorted columns (P, n).

    ``t``, ``td``, ``z`` have their gaps filled (:func:`icing.physics.diagnose._fill_gaps`; the dewpoint is held to the
    temperature here), ``t_raw``, ``td_raw``, ``z_raw`` are as measured (for ``valid`` and the summaries).
    ``p`` may be one shared row (1, n) or (P, n); ``cl`` None or (P, n); ``cap_table`` the (temperature,
    cap) table of :func:`icing.physics.diagnose._cap_table` (used when ``prm["stratiform_cap"]``); ``out`` arrays
    from :func:`empty_outputs` (or rows of them) to write into. Returns the outputs, with ``valid``."""
    block, _ = _kernels()
    npro, n = t.shape
    f64 = lambda a: np.asarray(a, dtype=float)  # noqa: E731
    p = f64(p[:1] if p.shape[0] > 1 and p.strides[0] == 0 else p)
    has_cl = cl is not None
    cl = f64(cl) if has_cl else np.full((1, n), np.nan)
    scalars = np.array([prm["min_moist_base_m"], prm["min_moist_thickness_m"], prm["min_cloud_base_m"],
                        prm["merge_gap_m"], prm["min_thickness_low_m"], prm["min_thickness_high_m"],
                        prm["low_cloud_limit_m"], prm["convective_excess_k"],
                        _factor(prm["stratiform_factor"], microphysics.SUBADIABATIC_FACTOR["stratiform"]),
                        _factor(prm["convective_factor"], microphysics.SUBADIABATIC_FACTOR["convective"]),
                        prm["drizzle_top_temperature"], prm["drizzle_min_thickness_m"], prm["melting_area_aloft"]],
                       dtype=float)
    liquid_rh = np.nan if prm["liquid_rh"] is None else float(prm["liquid_rh"])
    tab, tab_ax, inv, inv_ax, lnp_ax = _tables()
    cap_t, cap_v = (f64(cap_table[0]), f64(cap_table[1])) if cap_table is not None else (np.zeros(2), np.zeros(2))
    mvd_denom = np.pi * microphysics.RHO_WATER * float(n_drop)
    mvd_ratio = microphysics.mvd_to_mean_volume_ratio(airmass)
    heights = np.asarray(layers.ZHANG_HEIGHTS_M, dtype=float)
    if out is None:
        out = empty_outputs(npro, n, summaries)
    if summaries:
        lowest, levels, base, top = (out[k] for k in ("freezing_level_m", "freezing_levels", "supercooled_base_m",
                                                      "supercooled_top_m"))
    else:
        lowest, levels, base, top = np.empty(npro), np.empty((npro, 1)), np.empty(npro), np.empty(npro)
    block(p, f64(t), f64(td), f64(z), cl, has_cl, f64(td_raw), f64(t_raw), f64(z_raw),
          float(cold_limit), heights, np.asarray(prm["min_rh"], dtype=float), np.asarray(prm["max_rh"], dtype=float),
          np.asarray(prm["inter_rh"], dtype=float), scalars, liquid_rh, tab, tab_ax, inv, inv_ax, lnp_ax, cap_t,
          cap_v, bool(prm["stratiform_cap"] and cap_table is not None), mvd_denom, mvd_ratio, bool(summaries),
          out["rh_water"], out["rh_ice"], out["in_cloud"], out["supercooled"], out["liquid_fraction"], out["lwc"],
          out["mvd"], out["large_drop"], out["warm_layer_aloft"], out["cloud_kind"], out["precipitation_type"],
          out["freezing_level_count"], lowest, levels, base, top, out["valid"])
    return out


def potential_summary(rate, valid):
    """Intensity codes of the accretion potential per level, and per column the largest code and rate, as
    :func:`icing.grid.grid_core` computes them with numpy (rate in m/s, (P, n); valid bool (P, n)).

    Returns ``code`` (int8, (P, n)), ``worst`` (int8, (P,)) and ``max_rate`` (mm/h, (P,))."""
    _, potential = _kernels()
    npro, n = rate.shape
    code = np.empty((npro, n), np.int8)
    worst = np.empty(npro, np.int8)
    max_rate = np.empty(npro)
    t1, t2, t3 = INTENSITY_THRESHOLDS_IN_PER_H
    potential(np.asarray(rate, dtype=float), np.asarray(valid, dtype=bool), float(t1),
              float(t2), float(t3), float(_IN_PER_H), code, worst, max_rate)
    return code, worst, max_rate

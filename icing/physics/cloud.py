"""Cloud levels of a column from relative humidity (Zhang et al. 2010, after Wang and Rossow 1995).

:func:`cloud_in_column` is the method, written once for one column in the subset of Python that numba
compiles (the diagnosis kernel of :mod:`icing.physics.diagnose` runs it compiled); :func:`cloud_mask` applies
it to a batch of profiles.
"""

from __future__ import annotations

import functools

import numpy as np

from icing.physics.jit import jitable

__all__ = [
    "ZHANG_HEIGHTS_M", "ZHANG_MIN_RH", "ZHANG_MAX_RH", "ZHANG_INTER_RH", "CLOUD_DEFAULTS", "CLOUD_SETTINGS",
    "zhang_thresholds", "interp", "interp_from", "runs", "run_bounds", "cloud_in_column", "cloud_mask",
]

# Zhang, Chen, Li, Fan, Peng, Yu and Cribb (2010), J. Geophys. Res. 115, D00K30, Table 1, after Wang and
# Rossow (1995, J. Appl. Meteor. 34, 2243-2258): RH thresholds (percent, over ice below 0 degC) at these
# heights, linear in between and constant above 12 km. The inter-layer values have a step near 2 km in the
# paper; we join them linearly (84, 82 below and 78 above it, from memory).
ZHANG_HEIGHTS_M = (0.0, 2000.0, 6000.0, 12000.0)
ZHANG_MIN_RH = (92.0, 90.0, 88.0, 75.0)
ZHANG_MAX_RH = (95.0, 93.0, 90.0, 80.0)
ZHANG_INTER_RH = (84.0, 82.0, 78.0, 70.0)

# The other rules of Zhang et al. (2010), section 3, as published, and our own choices (marked).
CLOUD_DEFAULTS = {
    "min_rh": ZHANG_MIN_RH, "max_rh": ZHANG_MAX_RH, "inter_rh": ZHANG_INTER_RH,
    "min_moist_base_m": 120.0,       # moist layers based below 120 m and thinner than 400 m are dropped
    "min_moist_thickness_m": 400.0,
    "min_cloud_base_m": 280.0,       # cloud bases are raised to 280 m above ground; tops below are dropped
    "merge_gap_m": 300.0,            # layers closer than 300 m are one layer
    "min_thickness_low_m": 30.5,     # thinnest cloud kept: 30.5 m below 2 km, 61 m above
    "min_thickness_high_m": 61.0,
    "low_cloud_limit_m": 2000.0,
    "liquid_rh": None,               # RH over water for liquid to be possible; None: the min_rh threshold
    "convective_excess_k": 0.5,      # our own choice: parcel from the base warmer than the air by this = convective
    "stratiform_factor": None,       # constant LWC/LWC_ad by cloud kind instead of the depth profile of
    "convective_factor": None,       # icing.physics.microphysics.adiabatic_fraction (None: the profile)
    "drizzle_top_temperature": 263.15,  # K, warm-topped cloud: Huffman and Norman (1988), Rauber et al. (2000)
    "drizzle_cold_top_temperature": 258.15,  # K, drizzle at most possible down to -15 degC (see precipitation_source)
    # Effective radius of cloud droplets above which collision-coalescence starts warm rain: about 14 um, Freud
    # and Rosenfeld (2012), J. Geophys. Res. 117, D02207, from aircraft profiles; Rosenfeld and Gutman (1994),
    # Atmos. Res. 34, 259-283, used 14 um with satellite retrievals (values from memory). Drizzle needs drops
    # of about 40 um diameter to start coalescing (Rasmussen et al. 2002, J. Atmos. Sci. 59, 837-860).
    "warm_rain_effective_radius_m": 14e-6,
    "melting_area_aloft": 2.0,          # J/kg, Bourgouin (2000)
}
# The scalar settings of cloud_in_column, in the order of its ``settings`` array.
CLOUD_SETTINGS = ("min_moist_base_m", "min_moist_thickness_m", "min_cloud_base_m", "merge_gap_m",
                  "min_thickness_low_m", "min_thickness_high_m", "low_cloud_limit_m")


def zhang_thresholds(height_agl, values=ZHANG_MIN_RH):
    """RH threshold (percent) at heights above ground (m): linear in the Zhang et al. (2010) table,
    constant beyond its ends."""
    return np.interp(np.asarray(height_agl, dtype=float), ZHANG_HEIGHTS_M, np.asarray(values, dtype=float))


@jitable
def interp(x, xp, fp):
    """:func:`numpy.interp` at one point (constant beyond the ends, NaN for NaN; ``xp`` strictly increasing),
    for the column kernels: :func:`interp_from` searched from the first interval."""
    return interp_from(x, xp, fp, 0)[0]


@jitable
def interp_from(x, xp, fp, j):
    """:func:`interp` with its search started at interval ``j`` (any valid one): returns the value and the
    interval it lies in, the start for the next point. Up a column the heights rise, so the threshold tables
    are walked level by level instead of searched afresh (numpy's arithmetic, the same results)."""
    m = xp.size
    if x != x:
        return x, j
    if x < xp[0]:
        return fp[0], 0
    if x >= xp[m - 1]:
        return fp[m - 1], m - 2
    while x >= xp[j + 1]:  # xp[j] <= x < xp[j + 1]
        j += 1
    while x < xp[j]:
        j -= 1
    if xp[j] == x:
        return fp[j], j
    return (fp[j + 1] - fp[j]) / (xp[j + 1] - xp[j]) * (x - xp[j]) + fp[j], j


@jitable
def runs(mask, starts, ends):
    """Runs of True in a column's ``mask``: their first and last levels written into ``starts`` and
    ``ends``; returns how many."""
    n = mask.size
    nr = 0
    k = 0
    while k < n:
        if mask[k]:
            starts[nr] = k
            while k + 1 < n and mask[k + 1]:
                k += 1
            ends[nr] = k
            nr += 1
        k += 1
    return nr


@jitable
def run_bounds(z, zb, start, end):
    """Lower and upper boundary heights of the run of levels ``start``..``end``: the crossing heights
    ``zb`` (``zb[k]`` inside the interval k..k+1) or, at the column's ends or where unknown, the end level's
    own height ``z``."""
    n = z.size
    lo = zb[start - 1] if start > 0 else np.nan
    hi = zb[end] if end < n - 1 else np.nan
    if not np.isfinite(lo):
        lo = z[start]
    if not np.isfinite(hi):
        hi = z[end]
    return lo, hi


@jitable
def cloud_in_column(z, rh, min_rh, heights, max_rh, inter_rh, settings, cloud, zb, scratch_b, scratch_i):
    """Cloud levels of one column by the method of Zhang et al. (2010), after Wang and Rossow (1995).

    Parameters
    ----------
    z : ndarray (n,)
        Height above the lowest level (m), increasing.
    rh : ndarray (n,)
        Relative humidity (percent), over ice below 0 degC and over water above; NaN where unknown.
    min_rh : ndarray (n,)
        The min-RH threshold at each level (:func:`zhang_thresholds`).
    heights, max_rh, inter_rh : ndarray (4,)
        The threshold table (:data:`ZHANG_HEIGHTS_M` and the max-RH and inter-layer RH at those heights).
    settings : ndarray (7,)
        The values of :data:`CLOUD_SETTINGS` in that order (m).
    cloud : ndarray of bool (n,)
        Output: cloud levels.
    zb : ndarray (n,)
        Output: height above ground where RH crosses the min-RH threshold inside each interval k..k+1 (the
        midpoint where it does not cross; NaN where either end is unknown; the last entry is unused).
    scratch_b, scratch_i : ndarray (2, n) of bool and of int64
        Work space.

    Notes
    -----
    The steps of Zhang et al. (2010, section 3): (1) a moist layer runs from where RH first reaches min-RH to
    where it falls below it; (2) moist layers based below 120 m and thinner than 400 m are dropped; (3) a moist
    layer is cloud if its largest RH exceeds max-RH at its base; (4) cloud below 280 m is removed; (5) two
    layers are one if the gap between them is under 300 m or its smallest RH exceeds the largest inter-RH in
    it; (6) clouds thinner than 30.5 m (base below 2 km) or 61 m are dropped. Boundaries are interpolated
    between levels so that a coarse profile gets a thickness.
    """
    min_moist_base, min_moist_thick, min_cloud_base, merge_gap, thin_low, thin_high, low_limit = (
        settings[0], settings[1], settings[2], settings[3], settings[4], settings[5], settings[6])
    n = z.size
    moist, gap = scratch_b[0], scratch_b[1]
    starts, ends = scratch_i[0], scratch_i[1]
    f_prev = 0.0
    for k in range(n):
        fk = rh[k] - min_rh[k]
        moist[k] = fk >= 0.0
        cloud[k] = False
        if k > 0:  # where the criterion crosses zero inside the interval k-1..k
            frac = f_prev / (f_prev - fk) if (f_prev >= 0) != (fk >= 0) else 0.5
            if frac < 0.0:  # (written out: NaN stays NaN)
                frac = 0.0
            elif frac > 1.0:
                frac = 1.0
            zb[k - 1] = z[k - 1] + frac * (z[k] - z[k - 1])
        f_prev = fk
    zb[n - 1] = np.nan
    # (1)-(4) moist layers that are cloud
    nr = runs(moist, starts, ends)
    for r in range(nr):
        s, e = starts[r], ends[r]
        base, top = run_bounds(z, zb, s, e)
        largest = -np.inf
        for k in range(s, e + 1):
            if rh[k] > largest:
                largest = rh[k]
        keep = not ((base < min_moist_base) and (top - base < min_moist_thick))
        if keep and largest > interp(base, heights, max_rh):
            for k in range(s, e + 1):
                cloud[k] = z[k] >= min_cloud_base
    # (5) merge layers across a thin or still-moist gap
    first = -1
    last = -1
    for k in range(n):
        if cloud[k]:
            if first < 0:
                first = k
            last = k
    for k in range(n):
        gap[k] = (not cloud[k]) and first >= 0 and first <= k and k <= last
    ng = runs(gap, starts, ends)
    for r in range(ng):
        s, e = starts[r], ends[r]
        lo, hi = run_bounds(z, zb, s, e)
        smallest = np.inf
        inter = -np.inf
        for k in range(s, e + 1):
            if rh[k] < smallest:
                smallest = rh[k]
            v = interp(z[k], heights, inter_rh)
            if v > inter:
                inter = v
        if (hi - lo < merge_gap) or (smallest > inter):
            for k in range(s, e + 1):
                cloud[k] = True
    # (6) drop thin clouds
    nr = runs(cloud, starts, ends)
    for r in range(nr):
        s, e = starts[r], ends[r]
        base, top = run_bounds(z, zb, s, e)
        if base < min_cloud_base:  # (a NaN base stays NaN)
            base = min_cloud_base
        thin = thin_low if base < low_limit else thin_high
        if not (top - base >= thin):
            for k in range(s, e + 1):
                cloud[k] = False


def _cloud_rows(z, rh, min_rh, heights, max_rh, inter_rh, settings, cloud, zb):
    n = z.shape[1]
    scratch_b = np.empty((2, n), np.bool_)
    scratch_i = np.empty((2, n), np.int64)
    for i in range(z.shape[0]):
        cloud_in_column(z[i], rh[i], min_rh[i], heights, max_rh, inter_rh, settings, cloud[i], zb[i], scratch_b,
                        scratch_i)


@functools.lru_cache(maxsize=1)
def _compiled_rows():
    from icing.physics.jit import jit

    return jit(_cloud_rows)


def cloud_mask(height_agl, rh_cloud, **params):
    """Cloud levels of profiles (P, n) by :func:`cloud_in_column` (Zhang et al. 2010).

    Parameters
    ----------
    height_agl : ndarray (P, n)
        Height above the lowest level (m), increasing along the level axis.
    rh_cloud : ndarray (P, n)
        Relative humidity (percent), over ice below 0 degC and over water above; NaN where unknown.
    **params
        Any of :data:`CLOUD_DEFAULTS` (thresholds as published by default).

    Returns
    -------
    in_cloud : ndarray of bool (P, n)
    boundary : ndarray (P, n-1)
        Height above ground where RH crosses the minimum threshold inside each level interval.
    """
    p = {**CLOUD_DEFAULTS, **params}
    z = np.ascontiguousarray(np.atleast_2d(np.asarray(height_agl, dtype=float)))
    rh = np.ascontiguousarray(np.broadcast_to(np.asarray(rh_cloud, dtype=float), z.shape))
    cloud = np.zeros(z.shape, bool)
    zb = np.empty(z.shape)
    _compiled_rows()(z, rh, zhang_thresholds(z, p["min_rh"]), np.asarray(ZHANG_HEIGHTS_M, dtype=float),
                     np.asarray(p["max_rh"], dtype=float), np.asarray(p["inter_rh"], dtype=float),
                     np.array([p[k] for k in CLOUD_SETTINGS], dtype=float), cloud, zb)
    return cloud, zb[:, :-1]

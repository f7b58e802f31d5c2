"""Layers of a profile: cloud layers from relative humidity, freezing levels, warm layers aloft, the
precipitation type under them, and the supercooled-liquid layer table.

The array functions work on plain SI arrays of shape (profile, level) (see :func:`icing.physics.diagnose.
diagnose_arrays` for any leading shape) with pressure decreasing along the level axis. The table functions
(:func:`supercooled_layers`, :func:`cloud_layers`, :func:`freezing_levels`) take one canonical profile
Dataset and return a :class:`pandas.DataFrame`.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from icing.physics import thermo
from icing.units import FT

__all__ = [
    "ZHANG_HEIGHTS_M", "ZHANG_MIN_RH", "ZHANG_MAX_RH", "ZHANG_INTER_RH", "CLOUD_DEFAULTS",
    "PRECIPITATION_TYPES", "zhang_thresholds", "cloud_mask", "freezing_crossings", "warm_layer_aloft",
    "energy_area_by_level", "precipitation_type", "drizzle_levels", "drizzle_below",
    "supercooled_layers", "cloud_layers", "freezing_levels",
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
    "stratiform_factor": None,       # sub-adiabatic factors (see icing.physics.microphysics.SUBADIABATIC_FACTOR)
    "convective_factor": None,
    "stratiform_cap": True,          # stratiform LWC at most the Part 25 Appendix C continuous maximum (see diagnose)
    "drizzle_top_temperature": 263.15,  # K, warm-topped cloud: Huffman and Norman (1988), Rauber et al. (2000)
    "drizzle_min_thickness_m": 300.0,   # common practice, our own choice: depth for coalescence to work
    "melting_area_aloft": 2.0,          # J/kg, Bourgouin (2000)
}

# Precipitation type codes (int8), per profile, after Bourgouin (2000) with our extensions (see
# :func:`precipitation_type`).
PRECIPITATION_TYPES = {
    -1: "unknown", 0: "none", 1: "snow", 2: "rain", 3: "freezing_rain", 4: "ice_pellets",
    5: "freezing_rain_and_ice_pellets", 6: "rain_and_snow", 7: "rain_and_ice_pellets",
    8: "freezing_drizzle", 9: "drizzle",
}
_NONE, _SN, _RA, _FZRA, _PL, _FZRAPL, _RASN, _RAPL, _FZDZ, _DZ, _MELTED = 0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10
KAPPA = thermo.RD / thermo.CP_D
_HAS_ICE = np.isin(np.arange(11), (_SN, _PL, _FZRAPL))
_LIQUID = np.isin(np.arange(11), (_RA, _FZRA))
_DRIZZLE = np.isin(np.arange(11), (_DZ, _FZDZ))


def zhang_thresholds(height_agl, values=ZHANG_MIN_RH):
    """RH threshold (percent) at heights above ground (m): linear in the Zhang et al. (2010) table,
    constant beyond its ends."""
    return np.interp(np.asarray(height_agl, dtype=float), ZHANG_HEIGHTS_M, np.asarray(values, dtype=float))


# --- runs of True along the last axis of a (profile, level) mask --------------------------------------

def _runs(mask):
    """Start and end flat indices of every run of True in a 2-D mask, and each element's run id (-1 off)."""
    prev = np.zeros_like(mask)
    prev[:, 1:] = mask[:, :-1]
    nxt = np.zeros_like(mask)
    nxt[:, :-1] = mask[:, 1:]
    start = mask & ~prev
    starts = np.flatnonzero(start)
    ends = np.flatnonzero(mask & ~nxt)
    rid = _count(start).reshape(mask.shape)
    rid *= mask
    rid -= 1
    return starts, ends, rid


def _count(flags):
    """Running count of True in a boolean array, flattened (numpy sums bytes into int32 far faster than
    booleans into int64; int64 only for arrays too large for int32)."""
    flat = np.ascontiguousarray(flags).ravel().view(np.uint8)
    return np.cumsum(flat, dtype=np.int32 if flat.size < 2**31 - 1 else np.int64)


def _reduce(ufunc, values, mask, starts, fill):
    """Reduce ``values`` over each run (``starts`` from :func:`_runs`); elements off the mask count as fill."""
    if starts.size == 0:
        return np.zeros(0)
    return ufunc.reduceat(np.where(mask, values, fill).ravel(), starts)


def _reduce_runs(ufunc, values, starts, ends, fill):
    """:func:`_reduce` over the runs of a mask given by their ``starts`` and ``ends`` (from :func:`_runs`),
    without building the filled array: the reduction covers each run alone, and the fill is folded in where
    :func:`_reduce`'s window (up to the next start) reaches past the run, so that the results are the same."""
    if starts.size == 0:
        return np.zeros(0)
    flat = np.ascontiguousarray(values).ravel()
    idx = np.empty(2 * starts.size, dtype=np.intp)
    idx[0::2] = starts
    idx[1::2] = ends + 1
    last_at_end = idx[-1] >= flat.size
    out = ufunc.reduceat(flat, idx[:-1] if last_at_end else idx)[0::2]
    window_end = np.append(starts[1:], flat.size)
    return np.where(window_end > ends + 1, ufunc(out, fill), out)


def _spread(run_values, rid, default):
    """Per-level array of each level's run value (``default`` off the runs, where ``rid`` is -1)."""
    ext = np.append(np.asarray(run_values), np.asarray(default, dtype=np.result_type(run_values, default)))
    return ext[rid]


def _boundaries(z, f):
    """Height (m) where f changes sign inside each interval (k, k+1), (P, n-1); midpoint if it does not;
    NaN where either end is missing."""
    f0, f1 = f[:, :-1], f[:, 1:]
    z0, z1 = z[:, :-1], z[:, 1:]
    with np.errstate(invalid="ignore", divide="ignore"):
        frac = np.where((f0 >= 0) != (f1 >= 0), f0 / (f0 - f1), 0.5)
    frac = np.clip(frac, 0.0, 1.0)
    return z0 + frac * (z1 - z0)


def _run_bounds(z, zb, starts, ends, n):
    """Lower and upper boundary heights of runs: the interval crossing, or the end level's own height."""
    zf, zbf = z.ravel(), zb.ravel()
    row_s, col_s = np.divmod(starts, n)
    row_e, col_e = np.divmod(ends, n)
    lo = np.where(col_s > 0, zbf[np.maximum(row_s * (n - 1) + col_s - 1, 0)], np.nan)
    hi = np.where(col_e < n - 1, zbf[np.minimum(row_e * (n - 1) + col_e, zbf.size - 1)], np.nan)
    lo = np.where(np.isfinite(lo), lo, zf[starts])
    hi = np.where(np.isfinite(hi), hi, zf[ends])
    return lo, hi


def cloud_mask(height_agl, rh_cloud, **params):
    """Cloud levels from relative humidity by the method of Zhang et al. (2010), after Wang and Rossow (1995).

    Parameters
    ----------
    height_agl : ndarray (P, n)
        Height above the lowest level (m), increasing along the level axis.
    rh_cloud : ndarray (P, n)
        Relative humidity (percent), over ice below 0 degC and over water above; NaN where unknown.
    **params
        Any of :data:`CLOUD_DEFAULTS` (thresholds as published by default), and ``min_rh_values``: the min-RH
        threshold already evaluated at every level (percent, (P, n)), to save recomputing it.

    Returns
    -------
    in_cloud : ndarray of bool (P, n)
    boundary : ndarray (P, n-1)
        Height above ground where RH crosses the minimum threshold inside each level interval.

    Notes
    -----
    The steps of Zhang et al. (2010, section 3): (1) a moist layer runs from where RH first reaches min-RH to
    where it falls below it; (2) moist layers based below 120 m and thinner than 400 m are dropped; (3) a moist
    layer is cloud if its largest RH exceeds max-RH at its base; (4) cloud below 280 m is removed; (5) two
    layers are one if the gap between them is under 300 m or its smallest RH exceeds the largest inter-RH in
    it; (6) clouds thinner than 30.5 m (base below 2 km) or 61 m are dropped. Boundaries are interpolated
    between levels so that a coarse profile gets a thickness.
    """
    p = {**CLOUD_DEFAULTS, **params}
    z = np.asarray(height_agl, dtype=float)
    rh = np.asarray(rh_cloud, dtype=float)
    n = z.shape[-1]
    min_thr = p.get("min_rh_values")
    f = rh - (zhang_thresholds(z, p["min_rh"]) if min_thr is None else min_thr)
    moist = f >= 0.0
    zb = _boundaries(z, f)
    s, e, rid = _runs(moist)
    base, top = _run_bounds(z, zb, s, e, n)
    max_rh = _reduce_runs(np.fmax, rh, s, e, -np.inf)
    keep = ~((base < p["min_moist_base_m"]) & (top - base < p["min_moist_thickness_m"]))
    keep &= max_rh > zhang_thresholds(base, p["max_rh"])
    cloud = moist & _spread(keep, rid, False) & (z >= p["min_cloud_base_m"])
    # Merge layers separated by a thin or still-moist gap.
    below = np.logical_or.accumulate(cloud, axis=-1)
    above = np.logical_or.accumulate(cloud[:, ::-1], axis=-1)[:, ::-1]
    gap = ~cloud & below & above
    gs, ge, grid = _runs(gap)
    if gs.size:
        glo, ghi = _run_bounds(z, zb, gs, ge, n)
        min_gap_rh = _reduce_runs(np.fmin, rh, gs, ge, np.inf)
        inter = np.full(z.shape, -np.inf)
        inter[gap] = zhang_thresholds(z[gap], p["inter_rh"])  # only the gap levels count
        max_inter = _reduce_runs(np.fmax, inter, gs, ge, -np.inf)
        merge = (ghi - glo < p["merge_gap_m"]) | (min_gap_rh > max_inter)
        cloud |= gap & _spread(merge, grid, False)
    # Drop thin clouds.
    s, e, rid = _runs(cloud)
    if s.size:
        base, top = _run_bounds(z, zb, s, e, n)
        base = np.maximum(base, p["min_cloud_base_m"])
        thin = np.where(base < p["low_cloud_limit_m"], p["min_thickness_low_m"], p["min_thickness_high_m"])
        cloud &= _spread(top - base >= thin, rid, False)
    return cloud, zb


def freezing_crossings(temperature):
    """Where temperature (K) crosses 0 degC between consecutive levels: bool (P, n-1), True in the interval."""
    t = np.asarray(temperature, dtype=float)
    ok = np.isfinite(t[:, :-1]) & np.isfinite(t[:, 1:])
    return ok & ((t[:, :-1] > thermo.T0) != (t[:, 1:] > thermo.T0))


def warm_layer_aloft(temperature):
    """Levels warmer than 0 degC that lie above a sub-freezing level of the same profile (bool)."""
    t = np.asarray(temperature, dtype=float)
    cold = np.isfinite(t) & (t <= thermo.T0)
    cold_below = np.zeros_like(cold)
    cold_below[:, 1:] = np.logical_or.accumulate(cold, axis=-1)[:, :-1]
    return (t > thermo.T0) & cold_below


def energy_area_by_level(pressure, temperature):
    """Bourgouin (2000) energy area (J/kg) attributed to each level, always positive.

    .. math:: A = c_p \\int |T - T_0| \\, d \\ln\\theta \\approx c_p \\, |\\bar T - T_0| \\, |\\ln(\\theta_{top}
              / \\theta_{base})|

    the area between the temperature curve and the 0 degC isotherm on a tephigram (Bourgouin 2000, Wea.
    Forecasting 15, 583-592, eq. 1). Each level interval is split where it crosses 0 degC (T linear in ln p)
    and each part is given to the level on its side, so that summing over a warm or cold run of levels gives
    that layer's area.
    """
    p = np.asarray(pressure, dtype=float)
    t = np.asarray(temperature, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        return _energy_area(np.log(p), np.log(t), t)


def _energy_area(x, lnt, t):
    """:func:`energy_area_by_level` from ln p, ln T and T (P, n); the split at 0 degC is worked out only in
    the intervals that cross it."""
    out = np.zeros(t.shape)
    with np.errstate(invalid="ignore", divide="ignore"):
        lnth = lnt - KAPPA * x
        d0, d1 = t[:, :-1] - thermo.T0, t[:, 1:] - thermo.T0
        cross = np.flatnonzero((d0 > 0) != (d1 > 0))
        lower = np.add(d0, d1)  # the whole interval on one side of 0 degC (in place: no temporaries)
        lower *= 0.5
        lower *= lnth[:, 1:] - lnth[:, :-1]
        np.abs(lower, out=lower)
        lower *= thermo.CP_D
        if cross.size:
            rows, cols = np.divmod(cross, lower.shape[1])
            c0, c1 = d0[rows, cols], d1[rows, cols]
            x0, x1 = x[rows, cols], x[rows, cols + 1]
            xc = x0 + c0 / (c0 - c1) * (x1 - x0)
            lnth_c = np.log(thermo.T0) - KAPPA * xc
            lower[rows, cols] = thermo.CP_D * np.abs(0.5 * c0 * (lnth_c - lnth[rows, cols]))
            upper = thermo.CP_D * np.abs(0.5 * c1 * (lnth[rows, cols + 1] - lnth_c))
    lower[~np.isfinite(lower)] = 0.0
    out[:, :-1] = lower
    if cross.size:
        out[rows, cols + 1] += np.where(np.isfinite(upper), upper, 0.0)
    return out


def precipitation_type(pressure, temperature, source_level, source_phase, humidity_complete,
                       melting_area_aloft=2.0, *, log_pressure=None, log_temperature=None):
    """Precipitation type at the lowest level by the Bourgouin (2000) energy-area method, top down.

    Parameters
    ----------
    pressure, temperature : ndarray (P, n)
        Pa and K, gaps already filled; NaN only beyond the data.
    source_level : ndarray of int (P,)
        Level of the top of the highest cloud able to precipitate, -1 if none.
    source_phase : ndarray of int (P,)
        Phase it starts as: 1 snow (cold-topped cloud), 9 drizzle (warm-topped supercooled cloud), 2 rain
        (cloud above 0 degC).
    humidity_complete : ndarray of bool (P,)
        Whether humidity was known at every level with a temperature; without it "none" becomes "unknown".
    log_pressure, log_temperature : ndarray (P, n), optional
        ``ln(pressure)`` and ``ln(temperature)`` if the caller has them already (saves recomputing them).

    Returns
    -------
    ptype : ndarray of int8 (P,)
        Codes of :data:`PRECIPITATION_TYPES`.
    liquid_into_cold : ndarray of bool (P, n)
        Levels of sub-freezing layers that melted or liquid precipitation falls into (freezing-rain levels).

    Notes
    -----
    Bourgouin (2000): a warm layer aloft of area PA over a cold layer of area NA gives ice pellets if
    NA > 66 + 0.66 PA, freezing rain if NA < 46 + 0.66 PA, a mix in between, and snow if PA < 2 J/kg; a warm
    surface layer of area PA under snow gives snow below 5.6 J/kg, rain above 13.2 J/kg, a mix in between.
    Our extensions, for columns with more layers: liquid stays liquid through further layers (supercooled in
    cold ones); ice pellets and mixtures meet a warm surface layer like snow; melted precipitation re-entering
    a warm layer aloft counts only that layer's area.
    """
    p = np.asarray(pressure, dtype=float)
    t = np.asarray(temperature, dtype=float)
    npro, n = t.shape
    fin = np.isfinite(t)
    warm = fin & (t > thermo.T0)
    area_lev = np.zeros(t.shape)
    # Areas decide nothing in columns that are all warm or all cold, nor where nothing precipitates.
    mixed = np.flatnonzero(warm.any(axis=-1) & (fin & ~warm).any(axis=-1) & (np.asarray(source_level) >= 0))
    if mixed.size:
        with np.errstate(invalid="ignore", divide="ignore"):
            x = np.log(p[mixed]) if log_pressure is None else np.asarray(log_pressure)[mixed]
            lnt = np.log(t[mixed]) if log_temperature is None else np.asarray(log_temperature)[mixed]
        area_lev[mixed] = _energy_area(x, lnt, t[mixed])
    # Warm and cold layers: runs of same sign over the finite levels, numbered in flat order.
    prev_fin = np.zeros_like(fin)
    prev_fin[:, 1:] = fin[:, :-1]
    prev_warm = np.zeros_like(warm)
    prev_warm[:, 1:] = warm[:, :-1]
    start = fin & (~prev_fin | (warm != prev_warm))
    starts = np.flatnonzero(start)
    is_warm = warm.ravel()[starts]
    area = _reduce(np.add, area_lev, fin, starts, 0.0)
    lid = _count(start).reshape(t.shape)  # layer index of every level, -1 beyond the data
    lid *= fin
    lid -= 1
    row = starts // n
    count = np.bincount(row, minlength=npro)
    first = np.concatenate([[0], np.cumsum(count)[:-1]])
    ord_bottom = np.arange(starts.size) - first[row]
    ord_top = count[row] - 1 - ord_bottom
    nl = int(count.max()) if count.size else 0
    a2 = np.zeros((npro, nl))
    w2 = np.zeros((npro, nl), bool)
    s2 = np.zeros((npro, nl), bool)
    a2[row, ord_top] = area
    w2[row, ord_top] = is_warm
    s2[row, ord_top] = ord_bottom == 0
    src = np.asarray(source_level)
    src_ord = np.full(npro, -1)
    has_src = src >= 0
    src_lid = lid[np.arange(npro), np.maximum(src, 0)]
    src_ord[has_src & (src_lid >= 0)] = ord_top[src_lid[has_src & (src_lid >= 0)]]
    phase = np.zeros(npro, dtype=np.int64)
    pa = np.zeros(npro)
    rain2 = np.zeros((npro, nl), bool)
    for lay in range(nl):
        exists = lay < count
        phase = np.where(exists & (src_ord == lay) & (phase == _NONE), np.asarray(source_phase), phase)
        a, w, s = a2[:, lay], w2[:, lay] & exists, s2[:, lay] & exists
        c = ~w2[:, lay] & exists
        has_ice = _HAS_ICE[phase]
        liquid = _LIQUID[phase]
        drizzle = _DRIZZLE[phase]
        # Warm layer aloft.
        aloft = w & ~s
        melt = aloft & has_ice & (a >= melting_area_aloft)
        pa = np.where(melt, a, pa)
        phase = np.where(melt, _MELTED, phase)
        phase = np.where(aloft & liquid, _RA, np.where(aloft & drizzle, _DZ, phase))
        # Cold layer (aloft or at the surface).
        melted = c & (phase == _MELTED)
        rain2[:, lay] = melted | (c & (liquid | (phase == _FZRAPL)))
        ptype = np.where(a > 66.0 + 0.66 * pa, _PL, np.where(a < 46.0 + 0.66 * pa, _FZRA, _FZRAPL))
        phase = np.where(melted, ptype, phase)
        phase = np.where(c & liquid, _FZRA, np.where(c & drizzle, _FZDZ, phase))
        # Warm surface layer.
        ws_ice = w & s & has_ice
        mixed = np.where(phase == _SN, _RASN, _RAPL)
        surf = np.where(a < 5.6, phase, np.where(a > 13.2, _RA, mixed))
        surf = np.where(phase == _FZRAPL, np.where(a > 13.2, _RA, _RAPL), surf)
        phase = np.where(ws_ice, surf, phase)
        phase = np.where(w & s & liquid, _RA, np.where(w & s & drizzle, _DZ, phase))
    ptype = phase.astype(np.int8)
    ptype[(ptype == _NONE) & ~np.asarray(humidity_complete)] = -1
    ptype[count == 0] = -1
    liquid_into_cold = np.zeros((npro, n), bool)
    if nl:
        lev_ord = ord_top[np.maximum(lid, 0)]  # any layer where lid is -1: masked out just below
        liquid_into_cold = (lid >= 0) & ~warm & rain2[np.arange(npro)[:, None], lev_ord]
    return ptype, liquid_into_cold


def drizzle_levels(temperature, in_cloud, cloud_top_temperature, cloud_thickness, top_temperature_limit=263.15,
                   min_thickness=300.0):
    """Levels with freezing-drizzle potential from warm-topped supercooled cloud (bool, (P, n)).

    A cloud layer whose top is between ``top_temperature_limit`` (default -10 degC) and 0 degC and which is
    at least ``min_thickness`` deep can grow drizzle by collision and coalescence without ice (the
    "supercooled warm-rain process", Huffman and Norman 1988, Mon. Wea. Rev. 116, 2172-2182; Rauber et al.
    2000, J. Appl. Meteor. 39, 1185-1195, found most freezing drizzle came from such clouds; the -10 degC
    value from memory, the thickness is common practice, our own choice). The sub-freezing levels of the
    layer and the sub-freezing air below it down to the first warm level carry the potential.
    """
    t = np.asarray(temperature, dtype=float)
    cold = np.isfinite(t) & (t <= thermo.T0)
    top_t = np.asarray(cloud_top_temperature)
    src = in_cloud & cold & (top_t >= top_temperature_limit) & (top_t <= thermo.T0) & \
        (np.asarray(cloud_thickness) >= min_thickness)
    return drizzle_below(t, src)


def drizzle_below(temperature, source):
    """Spread drizzle potential from ``source`` levels (bool, (P, n)) down through contiguous sub-freezing
    levels: the sub-freezing source levels themselves and the sub-freezing air below them."""
    t = np.asarray(temperature, dtype=float)
    cold = np.isfinite(t) & (t <= thermo.T0)
    src = np.asarray(source, dtype=bool) & cold
    out = np.zeros_like(src)
    carry = np.zeros(t.shape[0], bool)
    for k in range(t.shape[1] - 1, -1, -1):
        carry = (carry & cold[:, k]) | src[:, k]
        out[:, k] = carry
    return out


# --- tables for one profile ----------------------------------------------------------------------------

_FLAG_WORDS = {"height_filled": "height filled", "dewpoint_derived": "dewpoint derived from RH",
               "value_changed": "value changed by checks", "value_removed": "value removed by checks",
               "merged": "duplicate levels merged", "humidity_derived": "RH derived from dewpoint"}


def _single(profile, **params):
    from icing.physics.diagnose import diagnose

    extra = [d for d in profile.dims if d != "level" and profile.sizes[d] > 1]
    if extra:
        from icing.errors import ProfileQualityError

        raise ProfileQualityError(f"a layer table is for one profile; this one has dimensions {extra}; select "
                                  "one profile first (for example ds.isel(profile=0))")
    profile = profile.squeeze(drop=True) if extra == [] and len(profile.dims) > 1 else profile
    return diagnose(profile, **params)


def _quality_text(ds, lo, hi):
    """Words for the filled, changed or unusable levels among levels lo..hi (inclusive)."""
    from icing.profile import QC_FLAGS

    notes = []
    if "qc_flag" in ds:
        fl = ds["qc_flag"].values[lo:hi + 1].astype(int)
        for name, bit in QC_FLAGS.items():
            if name in ("humidity_derived", "dewpoint_derived"):
                continue  # the routine conversion between dewpoint and RH, not a repair
            k = int(np.count_nonzero(fl & bit))
            if k:
                notes.append(f"{_FLAG_WORDS.get(name, name)} at {k} level{'s' if k > 1 else ''}")
    bad = int(np.count_nonzero(~ds["valid"].values[lo:hi + 1]))
    if bad:
        notes.append(f"{bad} level{'s' if bad > 1 else ''} without temperature or humidity (interpolated)")
    return "; ".join(notes)


def _edges(z, lo, hi, crit):
    """Boundary heights of the run lo..hi: where a criterion flips between the run and its neighbours."""
    def between(a, b):
        for f in crit:
            fa, fb = f[a], f[b]
            if np.isfinite(fa) and np.isfinite(fb) and (fa >= 0) != (fb >= 0):
                return z[a] + fa / (fa - fb) * (z[b] - z[a])
        return 0.5 * (z[a] + z[b]) if np.isfinite(z[b]) else z[a]

    base = between(lo, lo - 1) if lo > 0 else z[lo]
    top = between(hi, hi + 1) if hi + 1 < z.size else z[hi]
    return base, top


def _layer_rows(ds, mask, crit):
    z = ds["height"].values.astype(float)
    p = ds["pressure"].values.astype(float)
    t = ds["temperature"].values.astype(float)
    ok = np.isfinite(z) & np.isfinite(p)
    rows = []
    s, e, _ = _runs(mask[None, :])
    for lo, hi in zip(s, e, strict=True):
        base, top = _edges(z, int(lo), int(hi), crit)
        zz, pp, tt = z[ok], np.log(p[ok]), t[ok]
        tok = np.isfinite(tt)
        rows.append({"lo": int(lo), "hi": int(hi), "base_height_m": float(base), "top_height_m": float(top),
                     "base_height_ft": float(base) / FT, "top_height_ft": float(top) / FT,
                     "base_pressure_hpa": float(np.exp(np.interp(base, zz, pp))),
                     "top_pressure_hpa": float(np.exp(np.interp(top, zz, pp))),
                     "base_temperature_c": float(np.interp(base, zz[tok], tt[tok])),
                     "top_temperature_c": float(np.interp(top, zz[tok], tt[tok])),
                     "thickness_m": float(top - base)})
    return rows


def _criteria(ds, params):
    """Height, temperature and the signed criteria whose sign flips mark layer edges."""
    z = ds["height"].values.astype(float)
    z_agl = z - z[np.isfinite(z)][0]
    t = ds["temperature"].values.astype(float)
    rh_cloud = np.where(t < 0.0, ds["rh_ice"].values, ds["rh_water"].values)
    min_rh = zhang_thresholds(z_agl, params.get("min_rh", ZHANG_MIN_RH))
    liquid_rh = params.get("liquid_rh")
    liq = min_rh if liquid_rh is None else float(liquid_rh)
    cold_c = float(ds.attrs["cold_limit"])
    return z, t, rh_cloud - min_rh, -t, t - cold_c, ds["rh_water"].values - liq


_KIND = {0: "", 1: "stratiform", 2: "convective"}
_DROP = {0: "none", 1: "drizzle", 2: "rain"}
SUPERCOOLED_COLUMNS = ["base_height_m", "top_height_m", "base_height_ft", "top_height_ft", "base_pressure_hpa",
                       "top_pressure_hpa", "base_temperature_c", "top_temperature_c", "thickness_m",
                       "max_lwc_g_m3", "mvd_um", "cloud_top_temperature_c", "kind", "large_drop", "quality"]


def supercooled_layers(profile, **params) -> pd.DataFrame:
    """Supercooled-liquid layers of one profile, one row a layer (heights in m and ft).

    Parameters are those of :func:`icing.physics.diagnose.diagnose`. Columns: ``base_height_m``, ``top_height_m``,
    ``base_height_ft``, ``top_height_ft``, ``base_pressure_hpa``, ``top_pressure_hpa``,
    ``base_temperature_c``, ``top_temperature_c``, ``thickness_m``, ``max_lwc_g_m3``, ``mvd_um`` (at the level
    of largest LWC), ``cloud_top_temperature_c`` (of the cloud layer holding it), ``kind`` (stratiform or
    convective), ``large_drop`` (none, drizzle or rain) and ``quality`` (filled, changed or unusable levels in
    the layer; empty if none). Layer edges are interpolated where temperature crosses 0 degC or the cold limit
    or RH crosses the cloud threshold.
    """
    ds = _single(profile, **params)
    z, t, f_cloud, f_warm, f_cold, f_liq = _criteria(ds, params)
    sc = ds["supercooled"].values.astype(bool)
    rows = _layer_rows(ds, sc, (f_warm, f_cold, f_cloud, f_liq))
    cl = ds["in_cloud"].values.astype(bool)
    cs, ce, crid = _runs(cl[None, :])
    out = []
    lwc, mvd = ds["lwc"].values, ds["mvd"].values
    for r in rows:
        lo, hi = r.pop("lo"), r.pop("hi")
        seg = lwc[lo:hi + 1]
        k = lo + int(np.nanargmax(seg)) if np.any(np.isfinite(seg)) else lo
        cid = crid[0, lo]
        top_level = int(ce[cid]) if cid >= 0 else hi
        cloud_top = _edges(z, int(cs[cid]) if cid >= 0 else lo, top_level, (f_cloud,))[1]
        ok = np.isfinite(z) & np.isfinite(t)
        r.update({"max_lwc_g_m3": float(np.nanmax(seg)) if np.any(np.isfinite(seg)) else np.nan,
                  "mvd_um": float(mvd[k]), "cloud_top_temperature_c": float(np.interp(cloud_top, z[ok], t[ok])),
                  "kind": _KIND[int(ds["cloud_kind"].values[lo:hi + 1].max())],
                  "large_drop": _DROP[int(ds["large_drop"].values[lo:hi + 1].max())],
                  "quality": _quality_text(ds, max(lo - 1, 0), min(hi + 1, z.size - 1))})
        out.append(r)
    return pd.DataFrame(out, columns=SUPERCOOLED_COLUMNS)


CLOUD_COLUMNS = ["base_height_m", "top_height_m", "base_height_ft", "top_height_ft", "base_pressure_hpa",
                 "top_pressure_hpa", "base_temperature_c", "top_temperature_c", "thickness_m", "max_lwc_g_m3",
                 "supercooled_levels", "kind", "quality"]


def cloud_layers(profile, **params) -> pd.DataFrame:
    """Cloud layers of one profile by the Zhang et al. (2010) RH thresholds, one row a layer.

    Columns as :func:`supercooled_layers` for the geometry, plus ``max_lwc_g_m3``, ``supercooled_levels``
    (count), ``kind`` and ``quality``.
    """
    ds = _single(profile, **params)
    z, t, f_cloud, _, _, _ = _criteria(ds, params)
    cl = ds["in_cloud"].values.astype(bool)
    rows = _layer_rows(ds, cl, (f_cloud,))
    out = []
    for r in rows:
        lo, hi = r.pop("lo"), r.pop("hi")
        seg = ds["lwc"].values[lo:hi + 1]
        r.update({"max_lwc_g_m3": float(np.nanmax(seg)) if np.any(np.isfinite(seg)) else np.nan,
                  "supercooled_levels": int(ds["supercooled"].values[lo:hi + 1].sum()),
                  "kind": _KIND[int(ds["cloud_kind"].values[lo:hi + 1].max())],
                  "quality": _quality_text(ds, max(lo - 1, 0), min(hi + 1, z.size - 1))})
        out.append(r)
    return pd.DataFrame(out, columns=CLOUD_COLUMNS)


def freezing_levels(profile, **params) -> pd.DataFrame:
    """Every 0 degC crossing of one profile, lowest first.

    Columns: ``height_m``, ``height_ft``, ``pressure_hpa`` and ``direction``: ``"cooling upward"`` where the
    air above is sub-freezing (a freezing level in the usual sense) or ``"warming upward"`` (the base of a
    warm layer aloft). Levels without temperature are bridged by interpolation in ln p and the ``quality``
    column says so.
    """
    ds = _single(profile, **params)
    z = ds["height"].values.astype(float)
    p = ds["pressure"].values.astype(float)
    t = ds["temperature"].values.astype(float)
    ok = np.isfinite(t) & np.isfinite(z) & np.isfinite(p)
    idx = np.flatnonzero(ok)
    rows = []
    for a, b in zip(idx[:-1], idx[1:], strict=True):
        if (t[a] > 0.0) == (t[b] > 0.0):
            continue
        frac = (0.0 - t[a]) / (t[b] - t[a])
        h = z[a] + frac * (z[b] - z[a])
        rows.append({"height_m": float(h), "height_ft": float(h) / FT,
                     "pressure_hpa": float(np.exp(np.log(p[a]) + frac * (np.log(p[b]) - np.log(p[a])))),
                     "direction": "cooling upward" if t[a] > 0.0 else "warming upward",
                     "quality": "" if b == a + 1 else f"{b - a - 1} level(s) without temperature bridged"})
    return pd.DataFrame(rows, columns=["height_m", "height_ft", "pressure_hpa", "direction", "quality"])

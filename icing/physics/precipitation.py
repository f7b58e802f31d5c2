"""Precipitation under the cloud layers of a column: its source, warm layers aloft, the precipitation type at
the ground by energy areas (Bourgouin 2000), and the levels with large supercooled drops.

Each function works on one column (pressure decreasing along the levels) in the subset of Python that numba
compiles; the diagnosis kernel of :mod:`icing.physics.diagnose` runs them compiled, and
:func:`energy_area_by_level` and :func:`precipitation_type` apply them to batches of profiles.
"""

from __future__ import annotations

import functools

import numpy as np

from icing.physics import thermo
from icing.physics.cloud import run_bounds
from icing.physics.jit import jitable

__all__ = [
    "PRECIPITATION_TYPES", "energy_areas_in_column", "precipitation_source", "precipitation_type_in_column",
    "drizzle_below_in_column", "warm_layer_aloft_in_column", "energy_area_by_level", "precipitation_type",
]

# Precipitation type codes (int8), per profile, after Bourgouin (2000) with our extensions (see
# :func:`precipitation_type_in_column`).
PRECIPITATION_TYPES = {
    -1: "unknown", 0: "none", 1: "snow", 2: "rain", 3: "freezing_rain", 4: "ice_pellets",
    5: "freezing_rain_and_ice_pellets", 6: "rain_and_snow", 7: "rain_and_ice_pellets",
    8: "freezing_drizzle", 9: "drizzle",
}
# Phases of falling precipitation: the codes above, and 10 for melted snow (before it meets cold air).
NONE, SNOW, RAIN, FREEZING_RAIN, PELLETS, FREEZING_RAIN_PELLETS, RAIN_SNOW, RAIN_PELLETS = 0, 1, 2, 3, 4, 5, 6, 7
FREEZING_DRIZZLE, DRIZZLE, MELTED = 8, 9, 10
LN_T0 = float(np.log(thermo.T0))


@jitable
def energy_areas_in_column(lnp, lnt, t, area):
    """Bourgouin (2000) energy area (J/kg) attributed to each level of a column, always positive, into ``area``.

    .. math:: A = c_p \\int |T - T_0| \\, d \\ln\\theta \\approx c_p \\, |\\bar T - T_0| \\, |\\ln(\\theta_{top}
              / \\theta_{base})|

    the area between the temperature curve and the 0 degC isotherm on a tephigram (Bourgouin 2000, Wea.
    Forecasting 15, 583-592, eq. 1). Each level interval is split where it crosses 0 degC (T linear in ln p)
    and each part is given to the level on its side, so that summing over a warm or cold run of levels gives
    that layer's area. ``lnp``, ``lnt``: ln p and ln T; intervals with an unknown end count zero.
    """
    n = t.size
    for k in range(n):
        area[k] = 0.0
    for k in range(n - 1):
        lnth0 = lnt[k] - thermo.KAPPA * lnp[k]  # ln theta, up to a constant
        lnth1 = lnt[k + 1] - thermo.KAPPA * lnp[k + 1]
        d0 = t[k] - thermo.T0
        d1 = t[k + 1] - thermo.T0
        if (d0 > 0) != (d1 > 0):
            xc = lnp[k] + d0 / (d0 - d1) * (lnp[k + 1] - lnp[k])
            lnth_c = LN_T0 - thermo.KAPPA * xc
            low = thermo.CP_D * abs(0.5 * d0 * (lnth_c - lnth0))
            up = thermo.CP_D * abs(0.5 * d1 * (lnth1 - lnth_c))
        else:
            low = abs((d0 + d1) * 0.5 * (lnth1 - lnth0)) * thermo.CP_D
            up = 0.0
        if np.isfinite(low):
            area[k] += low
        if np.isfinite(up):
            area[k + 1] += up


@jitable
def precipitation_source(z, zb, t, starts, ends, nr, min_cloud_base, drizzle_top_temperature, drizzle_min_thickness,
                         drizzle_source):
    """The highest cloud layer of a column able to precipitate, and the layers that can grow freezing drizzle.

    ``starts``/``ends`` hold the ``nr`` cloud layers (runs of levels, bottom up), ``z`` the height above
    ground and ``zb`` the cloud-boundary heights between levels (:func:`icing.physics.cloud.cloud_in_column`).
    A layer precipitates if its top is colder than ``drizzle_top_temperature`` (snow: ice forms at such
    temperatures) or it is at least ``drizzle_min_thickness`` deep (drizzle if its top is at or below 0 degC,
    rain above). A layer with its top between ``drizzle_top_temperature`` (default -10 degC) and 0 degC and at
    least that deep can grow drizzle by collision and coalescence without ice, the "supercooled warm-rain
    process" (Huffman and Norman 1988, Mon. Wea. Rev. 116, 2172-2182; Rauber et al. 2000, J. Appl. Meteor.
    39, 1185-1195, found most freezing drizzle came from such clouds; the -10 degC from memory, the depth
    common practice, our own choice): its levels are marked in ``drizzle_source``.

    Returns (level of the top of the highest precipitating layer or -1, its phase code, whether any layer
    grows drizzle).
    """
    n = t.size
    for k in range(n):
        drizzle_source[k] = False
    level = -1
    phase = NONE
    any_drizzle = False
    for r in range(nr):
        s, e = starts[r], ends[r]
        base, top = run_bounds(z, zb, s, e)
        thick = top - (base if base >= min_cloud_base or base != base else min_cloud_base)
        e1 = e + 1 if e < n - 1 else e
        w = (top - z[e]) / (z[e1] - z[e]) if e1 > e else 0.0
        t_top = t[e] + w * (t[e1] - t[e]) if (np.isfinite(w) and np.isfinite(t[e1])) else t[e]
        cold_top = t_top < drizzle_top_temperature
        deep = thick >= drizzle_min_thickness
        if (not cold_top) and (t_top <= thermo.T0) and deep:
            any_drizzle = True
            for k in range(s, e + 1):
                drizzle_source[k] = True
        if cold_top or deep:
            level = e
            phase = SNOW if cold_top else (DRIZZLE if t_top <= thermo.T0 else RAIN)
    return level, phase, any_drizzle


@jitable
def precipitation_type_in_column(lnp, lnt, t, source_level, source_phase, humidity_complete, melting_area_aloft,
                                 liquid_into_cold, area, layer_start, layer_of, layer_area, layer_limit):
    """Precipitation type at the lowest level of a column by the Bourgouin (2000) energy-area method, top down.

    Parameters
    ----------
    lnp, lnt, t : ndarray (n,)
        ln p, ln T and T (K), pressure decreasing, gaps filled; NaN only beyond the data.
    source_level, source_phase : int
        Level of the top of the highest cloud able to precipitate (-1 if none) and the phase it starts as
        (:func:`precipitation_source`).
    humidity_complete : bool
        Whether humidity was known at every level with a temperature; without it "none" becomes "unknown".
    melting_area_aloft : float
        Area (J/kg) of a warm layer aloft that melts snow (2 J/kg, Bourgouin 2000).
    liquid_into_cold : ndarray of bool (n,)
        Output: levels of sub-freezing layers through which drops still fall liquid (supercooled rain): all of
        such a layer under liquid precipitation; under melted snow, the layer from its top down to where its
        area counted from the top reaches 66 + 0.66 PA, Bourgouin's threshold beyond which every drop has
        refrozen to an ice pellet (our reading of his areas as a depth; the ground level stays liquid only
        where his outcome is freezing rain or the mix).
    area, layer_start, layer_of, layer_area, layer_limit : ndarray (n,)
        Work space (float, int, int, float, float).

    Returns
    -------
    int
        Code of :data:`PRECIPITATION_TYPES`.

    Notes
    -----
    Bourgouin (2000): a warm layer aloft of area PA over a cold layer of area NA gives ice pellets if
    NA > 66 + 0.66 PA, freezing rain if NA < 46 + 0.66 PA, a mix in between, and snow if PA < 2 J/kg; a warm
    surface layer of area PA under snow gives snow below 5.6 J/kg, rain above 13.2 J/kg, a mix in between.
    Our extensions, for columns with more layers: liquid stays liquid through further layers (supercooled in
    cold ones); ice pellets and mixtures meet a warm surface layer like snow; melted precipitation re-entering
    a warm layer aloft counts only that layer's area.
    """
    n = t.size
    any_t = False
    any_warm = False
    any_cold = False
    for k in range(n):
        liquid_into_cold[k] = False
        if np.isfinite(t[k]):
            any_t = True
            if t[k] > thermo.T0:
                any_warm = True
            else:
                any_cold = True
    if not any_t:
        return -1
    if source_level < 0:  # nothing falls: the layers decide nothing
        return NONE if humidity_complete else -1
    if any_warm and any_cold:
        energy_areas_in_column(lnp, lnt, t, area)
    else:
        for k in range(n):
            area[k] = 0.0
    # Warm and cold layers (runs of finite levels on one side of 0 degC), bottom up.
    nl = 0
    for k in range(n):
        fin = np.isfinite(t[k])
        if fin and (k == 0 or (not np.isfinite(t[k - 1])) or (t[k] > thermo.T0) != (t[k - 1] > thermo.T0)):
            layer_start[nl] = k
            layer_area[nl] = 0.0
            nl += 1
        layer_of[k] = nl - 1 if fin else -1
    for k in range(n):
        if layer_of[k] >= 0:
            layer_area[layer_of[k]] += area[k]
    source_rank = nl - 1 - layer_of[source_level] if layer_of[source_level] >= 0 else -1
    phase = NONE
    pa = 0.0
    for j in range(nl):
        layer_limit[j] = 0.0  # area (J/kg) from a cold layer's top within which drops are still liquid
    for rank in range(nl):  # top down
        j = nl - 1 - rank
        a = layer_area[j]
        warm = t[layer_start[j]] > thermo.T0
        surface = j == 0
        if source_rank == rank and phase == NONE:
            phase = source_phase
        has_ice = phase == SNOW or phase == PELLETS or phase == FREEZING_RAIN_PELLETS
        liquid = phase == RAIN or phase == FREEZING_RAIN
        drizzle = phase == DRIZZLE or phase == FREEZING_DRIZZLE
        if warm and not surface:
            if has_ice and a >= melting_area_aloft:
                pa = a
                phase = MELTED
            if liquid:
                phase = RAIN
            elif drizzle:
                phase = DRIZZLE
        if not warm:
            if phase == MELTED:  # drops refreeze on their way down: liquid until the area reaches 66 + 0.66 PA
                layer_limit[j] = 66.0 + 0.66 * pa
                phase = PELLETS if a > 66.0 + 0.66 * pa else (FREEZING_RAIN if a < 46.0 + 0.66 * pa
                                                               else FREEZING_RAIN_PELLETS)
            elif liquid or phase == FREEZING_RAIN_PELLETS:  # liquid stays liquid (supercooled) through the layer
                layer_limit[j] = np.inf
            if liquid:
                phase = FREEZING_RAIN
            elif drizzle:
                phase = FREEZING_DRIZZLE
        if warm and surface:
            if has_ice:
                mixed = RAIN_SNOW if phase == SNOW else RAIN_PELLETS
                ground = phase if a < 5.6 else (RAIN if a > 13.2 else mixed)
                if phase == FREEZING_RAIN_PELLETS:
                    ground = RAIN if a > 13.2 else RAIN_PELLETS
                phase = ground
            if liquid:
                phase = RAIN
            elif drizzle:
                phase = DRIZZLE
    current = -2
    counted = 0.0
    for k in range(n - 1, -1, -1):  # top down: the area of each cold layer counted from its top
        j = layer_of[k]
        if j != current:
            current = j
            counted = 0.0
        if j >= 0 and t[k] <= thermo.T0:
            counted += area[k]  # (a level carries the area of the interval above it)
            liquid_into_cold[k] = counted < layer_limit[j]
    if phase == NONE and not humidity_complete:
        return -1
    return phase


@jitable
def drizzle_below_in_column(t, source, cloud, out):
    """Freezing-drizzle potential (bool, into ``out``): from the sub-freezing cloud levels of drizzle-growing
    layers (``source``, :func:`precipitation_source`) down through the contiguous sub-freezing air below them."""
    carry = False
    for k in range(t.size - 1, -1, -1):
        cold = np.isfinite(t[k]) and t[k] <= thermo.T0
        carry = (carry and cold) or (source[k] and cloud[k] and cold)
        out[k] = carry


@jitable
def warm_layer_aloft_in_column(t, out):
    """Levels warmer than 0 degC that lie above a sub-freezing level of the column (bool, into ``out``);
    returns the number of 0 degC crossings between levels with known temperatures."""
    cold_seen = False
    crossings = 0
    n = t.size
    for k in range(n):
        out[k] = t[k] > thermo.T0 and cold_seen
        if np.isfinite(t[k]) and t[k] <= thermo.T0:
            cold_seen = True
        if k < n - 1 and np.isfinite(t[k]) and np.isfinite(t[k + 1]) and (t[k] > thermo.T0) != (t[k + 1] > thermo.T0):
            crossings += 1
    return crossings


# --- batches of profiles (P, n) -----------------------------------------------------------------------

def _area_rows(lnp, lnt, t, area):
    for i in range(t.shape[0]):
        energy_areas_in_column(lnp[i], lnt[i], t[i], area[i])


def _type_rows(lnp, lnt, t, level, phase, complete, melting, ptype, rain):
    n = t.shape[1]
    area, layer_area = np.empty(n), np.empty(n)
    layer_start, layer_of = np.empty(n, np.int64), np.empty(n, np.int64)
    layer_limit = np.empty(n)
    for i in range(t.shape[0]):
        ptype[i] = precipitation_type_in_column(lnp[i], lnt[i], t[i], level[i], phase[i], complete[i], melting,
                                                rain[i], area, layer_start, layer_of, layer_area, layer_limit)


@functools.lru_cache(maxsize=1)
def _compiled():
    from icing.physics.jit import jit

    return jit(_area_rows), jit(_type_rows)


def _logs(pressure, temperature):
    p = np.ascontiguousarray(np.atleast_2d(np.asarray(pressure, dtype=float)))
    t = np.ascontiguousarray(np.broadcast_to(np.asarray(temperature, dtype=float), p.shape))
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.log(p), np.log(t), t


def energy_area_by_level(pressure, temperature):
    """:func:`energy_areas_in_column` (J/kg per level) for profiles (P, n) of pressure (Pa) and temperature (K)."""
    lnp, lnt, t = _logs(pressure, temperature)
    area = np.empty(t.shape)
    _compiled()[0](lnp, lnt, t, area)
    return area


def precipitation_type(pressure, temperature, source_level, source_phase, humidity_complete, melting_area_aloft=2.0):
    """:func:`precipitation_type_in_column` for profiles (P, n) of pressure (Pa) and temperature (K), with the
    source level, source phase and humidity completeness of each profile (P,).

    Returns the type codes (int8, (P,)) and the levels into which melted or liquid precipitation falls
    (bool, (P, n))."""
    lnp, lnt, t = _logs(pressure, temperature)
    npro = t.shape[0]
    ptype = np.empty(npro, np.int8)
    rain = np.zeros(t.shape, bool)
    _compiled()[1](lnp, lnt, t, np.broadcast_to(np.asarray(source_level, dtype=np.int64), npro).copy(),
                   np.broadcast_to(np.asarray(source_phase, dtype=np.int64), npro).copy(),
                   np.broadcast_to(np.asarray(humidity_complete, dtype=bool), npro).copy(),
                   float(melting_area_aloft), ptype, rain)
    return ptype, rain

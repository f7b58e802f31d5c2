"""Precipitation under the cloud layers of a column: its source, warm layers aloft, the precipitation type at
the ground by energy areas (Bourgouin 2000), and the levels with large supercooled drops.

Each function works on one column (pressure decreasing along the levels) in the subset of Python that numba
compiles; the diagnosis kernel of :mod:`icing.physics.diagnose` runs them compiled, and
:func:`energy_area_by_level` and :func:`precipitation_type` apply them to batches of profiles.
"""

from __future__ import annotations

import functools

import numpy as np

from icing.physics import microphysics, thermo
from icing.physics.cloud import run_bounds
from icing.physics.jit import jitable

__all__ = [
    "PRECIPITATION_TYPES", "LARGE_DROP_POTENTIAL", "LARGE_DROP_REASONS", "SNOWFLAKE_MASS", "SNOWFLAKE_SPEED",
    "SNOWFLAKE_DIAMETER_M", "energy_areas_in_column", "warm_rain_grade", "precipitation_source",
    "snow_sublimation_level",
    "precipitation_type_in_column", "drizzle_below_in_column", "warm_layer_aloft_in_column",
    "energy_area_by_level", "precipitation_type", "snow_survival_distance",
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

# Graded potential of supercooled large drops at a level (int8), and why they are there (int8).
LARGE_DROP_POTENTIAL = {0: "none", 1: "possible", 2: "likely"}
LARGE_DROP_REASONS = {
    0: "none",
    1: "warm-rain process in a supercooled cloud with a warm top",
    2: "snow melted in a warm layer aloft, supercooled below it",
    3: "rain from cloud above 0 degC falling into sub-freezing air",
}


# A representative large snowflake for sublimation below a cloud: an aggregate of unrimed dendrites, mass
# m = 0.073 D^1.4 mg and fall speed v = 0.8 D^0.16 m/s with D its maximum dimension in mm (Locatelli and Hobbs
# 1974, J. Geophys. Res. 79, 2185-2197, from memory), 5 mm across at the cloud base (a large flake: smaller
# ones vanish sooner, so "gone" holds for the rest of the snow too). Capacitance D/pi (a thin disc, Pruppacher and
# Klett 1997, ch. 13) and the ventilation of Hall and Pruppacher (1976, J. Atmos. Sci. 33, 1995-2006):
# f = 0.86 + 0.28 Sc^(1/3) Re^(1/2) (from memory).
SNOWFLAKE_MASS = (0.073e-6 / 1e-3**1.4, 1.4)  # m = a D^b: a in kg/m^1.4, D in m
SNOWFLAKE_SPEED = (0.8 / 1e-3**0.16, 0.16)  # v = c D^d: c in (m/s)/m^0.16
SNOWFLAKE_DIAMETER_M = 5e-3
_SUBLIMATION_STEP_M = 400.0  # longest fall step (m) of the sublimation integral


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
def warm_rain_grade(lwc, lwc_upper, number_concentration, mean_volume_radius_threshold):
    """Grade (0 no, 1 possible, 2 likely) of warm rain by collision-coalescence in a cloud layer: likely where the
    mean volume radius of its droplets at the layer's largest estimated liquid water content ``lwc`` (kg/m3),
    with ``number_concentration`` droplets per m3, reaches the threshold for coalescence; possible where it does
    only at ``lwc_upper``, the most the layer can hold (the adiabatic value, or twice a model's cloud water: an
    LWC is uncertain by a factor of two).

    The radius is :func:`icing.physics.microphysics.mean_volume_diameter` / 2, compared as the LWC at which it
    reaches the threshold (:func:`icing.physics.microphysics.liquid_water_at_mean_volume_diameter`: the cube
    roots this saves, two for every cloud layer of a column, were a tenth of the diagnosis kernel). The
    threshold is the effective radius ``warm_rain_effective_radius_m`` of :data:`icing.physics.cloud.CLOUD_DEFAULTS`
    as a mean volume radius (the caller converts it with the spectrum shape of Martin et al. 1994). Depth and
    droplet number enter through the water at the top of the cloud and the number: a deep cloud with few
    droplets grows large ones (Rasmussen et al. 2002), a thin or polluted one does not.
    """
    needed = microphysics.liquid_water_at_mean_volume_diameter(2.0 * mean_volume_radius_threshold,
                                                               number_concentration)
    if lwc >= needed:
        return 2
    if lwc_upper >= needed:
        return 1
    return 0


@jitable
def precipitation_source(z, zb, t, lwc, lwc_upper, starts, ends, nr, min_cloud_base, drizzle_top_temperature,
                         drizzle_cold_top_temperature, mean_volume_radius_threshold, number_concentration,
                         below_level, drizzle_grade):
    """The highest cloud layer of a column able to precipitate, and the layers that can grow freezing drizzle.

    ``starts``/``ends`` hold the ``nr`` cloud layers (runs of levels, bottom up), ``z`` the height above
    ground and ``zb`` the cloud-boundary heights between levels (:func:`icing.physics.cloud.cloud_in_column`);
    ``lwc`` (kg/m3) the estimated liquid water content of each level and ``lwc_upper`` the most it can be (the
    adiabatic liquid of the layer's parcel; twice a model's cloud water). Droplets may grow about as in an
    adiabatic parcel even where mixing thins the cloud's water (mixing can remove droplets rather than shrink
    them), so the size that starts coalescence is reached somewhere between the two: Freud and Rosenfeld (2012)
    found the depth at which the effective radius reaches 14 um grows with the droplet number at the base.

    * A layer whose top is colder than ``drizzle_top_temperature`` (default -10 degC) makes ice there and snows.
    * A layer whose top is warmer than 0 degC rains by collision-coalescence where :func:`warm_rain_grade`
      (its largest LWC, the droplet number) allows.
    * A layer whose top is between ``drizzle_top_temperature`` and 0 degC grows drizzle without ice, the
      "supercooled warm-rain process" (Huffman and Norman 1988, Mon. Wea. Rev. 116, 2172-2182; Rauber et al.
      2000, J. Appl. Meteor. 39, 1185-1195: most freezing drizzle came from cloud tops warmer than about
      -10 degC; values from memory), with the grade of :func:`warm_rain_grade`. With its top between
      ``drizzle_cold_top_temperature`` (default -12 degC) and ``drizzle_top_temperature`` drizzle is at most
      possible: ice may form at the top, but Cober, Isaac and Strapp (1996, J. Appl. Meteor. 35, 2250-2260)
      documented drizzle grown by coalescence under a -12 degC top (1,100 m deep, 21 droplets per cm3), with
      ice crystals too few (0.08 per litre) to glaciate the cloud; the default -15 degC leaves a margin of 3 K
      beyond that case (our own choice).

    The grade of each layer's drizzle goes into ``drizzle_grade`` at its levels (0 elsewhere). Only layers
    whose top is below level ``below_level`` may be the source (the snow of a higher one sublimated on its
    way down, :func:`snow_sublimation_level`).

    Returns (index of the source layer or -1, its phase code, whether any layer grows drizzle, the source's grade:
    2 for snow, the warm-rain grade for rain and drizzle).
    """
    n = t.size
    for k in range(n):
        drizzle_grade[k] = 0
    source = -1
    phase = NONE
    grade = 0
    any_drizzle = False
    for r in range(nr):
        s, e = starts[r], ends[r]
        base, top = run_bounds(z, zb, s, e)
        e1 = e + 1 if e < n - 1 else e
        w = (top - z[e]) / (z[e1] - z[e]) if e1 > e else 0.0
        t_top = t[e] + w * (t[e1] - t[e]) if (np.isfinite(w) and np.isfinite(t[e1])) else t[e]
        lwc_max = 0.0
        upper_max = 0.0
        for k in range(s, e + 1):
            if lwc[k] > lwc_max:
                lwc_max = lwc[k]
            if lwc_upper[k] > upper_max:
                upper_max = lwc_upper[k]
        wr = warm_rain_grade(lwc_max, upper_max, number_concentration, mean_volume_radius_threshold)
        layer_phase = NONE
        layer_grade = 0
        if t_top > thermo.T0:
            if wr > 0:
                layer_phase, layer_grade = RAIN, wr
        else:
            dz = 0
            if t_top >= drizzle_top_temperature:
                dz = wr
            elif t_top >= drizzle_cold_top_temperature:
                dz = min(wr, 1)
            if dz > 0:
                any_drizzle = True
                for k in range(s, e + 1):
                    drizzle_grade[k] = dz
            if t_top < drizzle_top_temperature:
                layer_phase, layer_grade = SNOW, 2
            elif dz > 0:
                layer_phase, layer_grade = DRIZZLE, dz
        if layer_phase != NONE and e < below_level:
            source, phase, grade = r, layer_phase, layer_grade
    return source, phase, any_drizzle, grade


@jitable
def _flake_size_rate(size, coef, nu, sc3):
    """dD/dz (1/1, negative) of the representative snowflake of size D (m) falling through air whose loss
    coefficient is ``coef`` = 4 (1 - S_i) / (F_k + F_d) (kg/(m s)), kinematic viscosity ``nu`` and Schmidt
    number^(1/3) ``sc3``: 4 D f (1 - S_i) / (F_k + F_d) / v, over dm/dD = a b D^(b-1)."""
    a, b = SNOWFLAKE_MASS
    c, d = SNOWFLAKE_SPEED
    # With v = c D^d the ventilation term sqrt(v D / nu) is sqrt(c / nu) D^((1 + d) / 2) and D / (v D^(b-1)) is
    # D^(2 - b - d) / c: two powers of one logarithm.
    ln_d = np.log(size)
    vent = 0.86 + 0.28 * sc3 * np.sqrt(c / nu) * np.exp(0.5 * (1.0 + d) * ln_d)
    return -coef * vent * np.exp((2.0 - b - d) * ln_d) / (a * b * c)


@jitable
def snow_sublimation_level(z, p, t, rh_ice, in_cloud, start):
    """The level at which snow falling from the base of a cloud layer (its lowest level ``start``) has
    sublimated away, or -1 if it reaches air above 0 degC (where it melts) or the lowest level.

    The mass of the representative snowflake (:data:`SNOWFLAKE_MASS`, :data:`SNOWFLAKE_SPEED`,
    :data:`SNOWFLAKE_DIAMETER_M`) is followed down through the air below the layer: inside
    other cloud (saturated) it keeps its mass; in air below ice saturation it loses mass at the rate of
    diffusional growth with the sign reversed,

    .. math:: \\frac{dm}{dt} = \\frac{4 \\pi C f (S_i - 1)}{F_k + F_d}, \\quad
              F_k = \\left(\\frac{L_s}{R_v T} - 1\\right) \\frac{L_s}{K T}, \\quad
              F_d = \\frac{R_v T}{D_v e_i(T)}

    (Rogers and Yau 1989, A Short Course in Cloud Physics, eqs. 7.17-7.18 and 9.4), with the air's thermal
    conductivity K and vapour diffusivity D_v of :mod:`icing.physics.thermo`, the ice saturation ratio
    S_i = RH over ice / 100 and T, p of the interval (the mean of its two levels), and the flake's fall speed.
    Its size is integrated over height, dD/dz = (dm/dt) / (v dm/dD), by the midpoint rule in steps of at most
    400 m (one or two a level interval of a sounding).
    """
    size = SNOWFLAKE_DIAMETER_M
    l_s = thermo.L_SUBLIMATION
    for k in range(start - 1, -1, -1):
        if not (np.isfinite(t[k]) and np.isfinite(z[k]) and np.isfinite(z[k + 1])):
            return -1  # beyond the data: assume it reaches down (unknown is never read as "no precipitation")
        if t[k] > thermo.T0:
            return -1
        s_i = 0.5 * (rh_ice[k] + rh_ice[k + 1]) / 100.0
        if (in_cloud[k] and in_cloud[k + 1]) or not (s_i < 1.0):
            continue
        tt = 0.5 * (t[k] + t[k + 1])
        pp = 0.5 * (p[k] + p[k + 1])
        dv = thermo.vapor_diffusivity(tt, pp)
        f_k = (l_s / (thermo.RV * tt) - 1.0) * l_s / (thermo.air_thermal_conductivity(tt) * tt)
        f_d = thermo.RV * tt / (dv * np.exp(thermo.ln_saturation_vapor_pressure_ice(tt, np.log(tt))))
        coef = 4.0 * (1.0 - s_i) / (f_k + f_d)
        nu = thermo.air_viscosity(tt) * thermo.RD * tt / pp  # kinematic viscosity, m2/s
        sc3 = (nu / dv) ** (1.0 / 3.0)
        depth = z[k + 1] - z[k]
        steps = max(int(np.ceil(depth / _SUBLIMATION_STEP_M)), 1)
        h = depth / steps
        for _ in range(steps):
            mid = size + 0.5 * h * _flake_size_rate(size, coef, nu, sc3)
            if not mid > 0.0:
                return k
            size = size + h * _flake_size_rate(mid, coef, nu, sc3)
            if not size > 0.0:
                return k
    return -1


@jitable
def precipitation_type_in_column(lnp, lnt, t, source_level, source_phase, source_grade, humidity_complete,
                                 melting_area_aloft, rain_grade, rain_melted, area, layer_start, layer_of, layer_area,
                                 layer_limit, layer_sure):
    """Precipitation type at the lowest level of a column by the Bourgouin (2000) energy-area method, top down.

    Parameters
    ----------
    lnp, lnt, t : ndarray (n,)
        ln p, work space for ln T (filled here where the energy areas are needed) and T (K), pressure
        decreasing, gaps filled; NaN only beyond the data.
    source_level, source_phase, source_grade : int
        Level of the top of the highest cloud able to precipitate (-1 if none), the phase it starts as and its
        grade (:func:`precipitation_source`).
    humidity_complete : bool
        Whether humidity was known at every level with a temperature; without it "none" becomes "unknown".
    melting_area_aloft : float
        Area (J/kg) of a warm layer aloft that melts snow (2 J/kg, Bourgouin 2000).
    rain_grade : ndarray of int (n,)
        Output: levels of sub-freezing layers through which drops still fall liquid (supercooled rain), graded.
        Under liquid precipitation all of such a layer, with the source's grade. Under melted snow, the layer
        from its top down to where its area counted from the top reaches 46 + 0.66 PA is likely (2): up to there
        Bourgouin's outcome is freezing rain; from there to 66 + 0.66 PA, his mix of freezing rain and ice
        pellets, possible (1); beyond, every drop has refrozen to an ice pellet (0). (Our reading of his areas as
        a depth: the ground level gets his outcome.)
    rain_melted : ndarray of bool (n,)
        Output: where ``rain_grade`` > 0, whether the drops are melted snow (else rain from a warm cloud).
    area, layer_start, layer_of, layer_area, layer_limit, layer_sure : ndarray (n,)
        Work space (float, int, int, float, float, float).

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
        rain_grade[k] = 0
        rain_melted[k] = False
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
        for k in range(n):
            lnt[k] = np.log(t[k])
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
    melted = False  # the liquid falling is melted snow
    for j in range(nl):
        layer_limit[j] = 0.0  # area (J/kg) from a cold layer's top within which drops may still be liquid
        layer_sure[j] = 0.0  # ... within which they all are
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
                melted = True
            if liquid:
                phase = RAIN
            elif drizzle:
                phase = DRIZZLE
        if not warm:
            if phase == MELTED:  # drops refreeze on their way down: liquid until the area reaches 66 + 0.66 PA
                layer_limit[j] = 66.0 + 0.66 * pa
                layer_sure[j] = 46.0 + 0.66 * pa
                phase = PELLETS if a > 66.0 + 0.66 * pa else (FREEZING_RAIN if a < 46.0 + 0.66 * pa
                                                               else FREEZING_RAIN_PELLETS)
            elif liquid:  # liquid stays liquid (supercooled) through the layer
                layer_limit[j] = np.inf
                layer_sure[j] = np.inf if (melted or source_grade >= 2) else 0.0
            elif phase == FREEZING_RAIN_PELLETS:  # the liquid part of the mix stays liquid
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
            rain_grade[k] = 2 if counted < layer_sure[j] else (1 if counted < layer_limit[j] else 0)
            rain_melted[k] = melted and rain_grade[k] > 0
    if phase == NONE and not humidity_complete:
        return -1
    return phase


@jitable
def drizzle_below_in_column(t, source_grade, cloud, out):
    """Freezing-drizzle potential (0 none, 1 possible, 2 likely; into ``out``): from the sub-freezing cloud levels
    of drizzle-growing layers (their grade in ``source_grade``, :func:`precipitation_source`) down through the
    contiguous sub-freezing air below them."""
    carry = 0
    for k in range(t.size - 1, -1, -1):
        cold = np.isfinite(t[k]) and t[k] <= thermo.T0
        if not cold:
            carry = 0
        elif source_grade[k] > carry and cloud[k]:
            carry = source_grade[k]
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


def _type_rows(lnp, lnt, t, level, phase, grade, complete, melting, ptype, rain, melted):
    n = t.shape[1]
    area, layer_area = np.empty(n), np.empty(n)
    layer_start, layer_of = np.empty(n, np.int64), np.empty(n, np.int64)
    layer_limit, layer_sure = np.empty(n), np.empty(n)
    for i in range(t.shape[0]):
        ptype[i] = precipitation_type_in_column(lnp[i], lnt[i], t[i], level[i], phase[i], grade[i], complete[i],
                                                melting, rain[i], melted[i], area, layer_start, layer_of, layer_area,
                                                layer_limit, layer_sure)


def _sublimation_rows(z, p, t, rh_ice, cloud, start, out):
    for i in range(t.shape[0]):
        out[i] = snow_sublimation_level(z[i], p[i], t[i], rh_ice[i], cloud[i], start[i])


@functools.lru_cache(maxsize=1)
def _compiled():
    from icing.physics.jit import jit

    return jit(_area_rows), jit(_type_rows), jit(_sublimation_rows)


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


def precipitation_type(pressure, temperature, source_level, source_phase, humidity_complete, melting_area_aloft=2.0,
                       source_grade=2):
    """:func:`precipitation_type_in_column` for profiles (P, n) of pressure (Pa) and temperature (K), with the
    source level, source phase, humidity completeness (and source grade) of each profile (P,).

    Returns the type codes (int8, (P,)), the levels into which melted or liquid precipitation falls
    (bool, (P, n)) and the grade there (int8, (P, n): 1 possible, 2 likely)."""
    lnp, lnt, t = _logs(pressure, temperature)
    npro = t.shape[0]
    ptype = np.empty(npro, np.int8)
    grade = np.zeros(t.shape, np.int64)
    melted = np.zeros(t.shape, bool)

    def per_profile(v, dtype):
        return np.broadcast_to(np.asarray(v, dtype=dtype), npro).copy()

    _compiled()[1](lnp, lnt, t, per_profile(source_level, np.int64), per_profile(source_phase, np.int64),
                   per_profile(source_grade, np.int64), per_profile(humidity_complete, bool),
                   float(melting_area_aloft), ptype, grade, melted)
    return ptype, grade > 0, grade.astype(np.int8)


def snow_survival_distance(temperature, pressure, rh_ice, depth_m=20000.0):
    """How far (m) the representative snowflake of :func:`snow_sublimation_level` falls through uniform air
    (temperature K, pressure Pa, RH over ice percent; floats) before it has sublimated away; ``inf`` if it
    outlasts ``depth_m``."""
    step = 50.0
    n = int(depth_m / step) + 1
    z = np.arange(n) * step  # levels upwards; the flake leaves the top one (a cloud base) and falls
    col = np.full((1, n), float(temperature))
    level = np.empty(1, np.int64)
    _compiled()[2](z[None, :], np.full((1, n), float(pressure)), col, np.full((1, n), float(rh_ice)),
                   np.zeros((1, n), bool), np.array([n - 1], np.int64), level)
    return float(z[n - 1] - z[level[0]]) if level[0] >= 0 else np.inf

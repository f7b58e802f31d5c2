"""Vectorised thermodynamics on plain SI arrays (K, Pa, m, kg/kg).

Every function broadcasts over any leading dimensions; profile functions take the vertical ``level`` axis
last. MetPy is the reference these are checked against in ``tests/test_thermo.py``; it is not called here so
that the hot paths stay plain numpy.
"""

from __future__ import annotations

import functools

import numpy as np

from icing.physics.jit import jitable

__all__ = [
    "RD", "RV", "EPSILON", "G0", "CP_D", "T0", "KAPPA", "L_FUSION", "L_VAPOUR", "L_SUBLIMATION",
    "ln_saturation_vapor_pressure_water", "ln_saturation_vapor_pressure_ice",
    "SATURATION_TABLE_RANGE_K", "SATURATION_TABLE_STEP_K", "saturation_tables", "table_position", "table_value",
    "relative_humidity_column",
    "saturation_vapor_pressure_water", "saturation_vapor_pressure_ice", "dewpoint_from_vapor_pressure",
    "air_viscosity", "air_thermal_conductivity", "vapor_diffusivity",
    "relative_humidity_water", "relative_humidity_ice", "dewpoint_from_relative_humidity",
    "saturation_mixing_ratio", "mixing_ratio_from_dewpoint", "virtual_temperature",
    "hypsometric_heights", "interp_last_axis", "height_at_pressure", "pressure_at_height",
    "standard_atmosphere_pressure", "standard_atmosphere_height", "standard_atmosphere_temperature",
    "pressure_altitude_ft", "pressure_from_pressure_altitude_ft", "flight_level_to_pressure",
    "GAMMA", "speed_of_sound", "true_airspeed_from_calibrated",
]

RD = 287.04749097718457  # J/(kg K), dry air (as MetPy)
RV = 461.52311572606084  # J/(kg K), water vapour (as MetPy)
EPSILON = RD / RV
G0 = 9.80665  # m/s2, standard gravity (exact, used for geopotential metres)
CP_D = 1004.6662184201462  # J/(kg K), dry air at constant pressure (as MetPy)
T0 = 273.15  # K
KAPPA = RD / CP_D  # Poisson's constant of dry air
L_FUSION = 3.337e5  # J/kg, latent heat of fusion at 0 deg C
L_VAPOUR = 2.501e6  # J/kg, latent heat of vaporisation at 0 deg C
L_SUBLIMATION = L_FUSION + L_VAPOUR  # J/kg, at 0 deg C


@jitable
def ln_saturation_vapor_pressure_water(temperature, log_temperature):
    """Natural logarithm of the saturation vapour pressure over plane liquid water (ln Pa).

    Murphy and Koop (2005), Q. J. R. Meteorol. Soc. 131, 1539-1565, eq. (10); valid 123-332 K, so it holds
    for supercooled water down to the homogeneous-freezing range.

    .. math:: \\ln e_w = 54.842763 - 6763.22/T - 4.210 \\ln T + 0.000367 T
              + \\tanh(0.0415 (T - 218.8)) (53.878 - 1331.22/T - 9.44523 \\ln T + 0.014025 T)

    ``log_temperature`` is ln T (callers often have it already). tanh(u) is taken as 1 - 2 / (exp(2u) + 1):
    one exponential, equal to rounding. Pure arithmetic: works on floats and numpy arrays and compiles with
    numba for the column kernels (the one definition of e_w in the package).
    """
    t, lt = temperature, log_temperature
    th = 1.0 - 2.0 / (np.exp(0.083 * (t - 218.8)) + 1.0)
    return (54.842763 - 6763.22 / t - 4.210 * lt + 0.000367 * t
            + th * (53.878 - 1331.22 / t - 9.44523 * lt + 0.014025 * t))


@jitable
def ln_saturation_vapor_pressure_ice(temperature, log_temperature):
    """Natural logarithm of the saturation vapour pressure over plane ice (ln Pa).

    Murphy and Koop (2005), eq. (7); valid above 110 K.

    .. math:: \\ln e_i = 9.550426 - 5723.265/T + 3.53068 \\ln T - 0.00728332 T
    """
    t = temperature
    return 9.550426 - 5723.265 / t + 3.53068 * log_temperature - 0.00728332 * t


@jitable
def air_viscosity(temperature):
    """Dynamic viscosity of air (Pa s) at a temperature (K).

    Sutherland's law in the form of the U.S. Standard Atmosphere 1976, eq. (51):
    :math:`\\mu = \\beta T^{3/2} / (T + S)`, beta = 1.458e-6 kg/(m s K^0.5), S = 110.4 K; valid for the lower
    atmosphere (about 150-500 K). Floats, arrays and the compiled kernels alike.
    """
    return 1.458e-6 * temperature * np.sqrt(temperature) / (temperature + 110.4)  # (T^1.5: a root, not a power)


_MINUS_12_LN10 = -12.0 * np.log(10.0)  # 10^(-12/T) as exp(-12 ln 10 / T): general powers are slow compiled


@jitable
def air_thermal_conductivity(temperature):
    """Thermal conductivity of air (W/(m K)) at a temperature (K).

    U.S. Standard Atmosphere 1976, eq. (53): :math:`k = 2.64638\\times10^{-3} T^{3/2} / (T + 245.4 \\cdot
    10^{-12/T})`, valid for the lower atmosphere.
    """
    return (2.64638e-3 * temperature * np.sqrt(temperature)
            / (temperature + 245.4 * np.exp(_MINUS_12_LN10 / temperature)))


@jitable
def vapor_diffusivity(temperature, pressure):
    """Diffusivity of water vapour in air (m2/s) at a temperature (K) and pressure (Pa).

    .. math:: D_v = 2.11\\times10^{-5} (T / T_0)^{1.94} (p_0 / p), \\quad p_0 = 101325 \\text{ Pa}

    Pruppacher and Klett (1997), Microphysics of Clouds and Precipitation, eq. (13-3), for -40 to 40 degC
    (from memory).
    """
    return 2.11e-5 * np.exp(1.94 * np.log(temperature / T0)) * (101325.0 / pressure)


def saturation_vapor_pressure_water(temperature):
    """Saturation vapour pressure over plane liquid water, Pa (Murphy and Koop 2005, eq. 10; see
    :func:`ln_saturation_vapor_pressure_water`)."""
    t = np.asarray(temperature, dtype=float)
    return np.exp(ln_saturation_vapor_pressure_water(t, np.log(t)))


def _dln_esw_dt(t):
    """Derivative of ln e_w (Murphy and Koop 2005, eq. 10) with respect to T, 1/K."""
    lt = np.log(t)
    th = np.tanh(0.0415 * (t - 218.8))
    return (
        6763.22 / t**2 - 4.210 / t + 0.000367
        + 0.0415 * (1.0 - th**2) * (53.878 - 1331.22 / t - 9.44523 * lt + 0.014025 * t)
        + th * (1331.22 / t**2 - 9.44523 / t + 0.014025)
    )


def saturation_vapor_pressure_ice(temperature):
    """Saturation vapour pressure over plane ice, Pa (Murphy and Koop 2005, eq. 7; see
    :func:`ln_saturation_vapor_pressure_ice`)."""
    t = np.asarray(temperature, dtype=float)
    return np.exp(ln_saturation_vapor_pressure_ice(t, np.log(t)))


def dewpoint_from_vapor_pressure(vapor_pressure):
    """Dewpoint (K) at which liquid water saturates at the given vapour pressure (Pa).

    Inverts Murphy and Koop (2005) eq. (10): a first guess by the inverse of Bolton (1980, Mon. Wea. Rev.
    108, eq. 10), then three Newton steps (converged to better than 1e-6 K over 180-330 K).
    """
    e = np.asarray(vapor_pressure, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        x = np.log(e / 611.2)
        t = 243.5 * x / (17.67 - x) + T0
        for _ in range(3):
            t = t - (np.log(saturation_vapor_pressure_water(t)) - np.log(e)) / _dln_esw_dt(t)
    return t


# --- relative humidity, from tables of the saturation vapour pressures ---------------------------------
#
# Relative humidity is the hottest arithmetic of a grid: three saturation pressures a level, six exponentials
# and logarithms by the formulas above. Tabulating such a function once and interpolating it is common practice
# in numerical weather prediction models (no single source). Here the tables hold e_w and e_i of the formulas
# above every 0.1 K over 160-330 K; a cubic Lagrange polynomial through the four nearest nodes reproduces them
# to better than 1e-8 relative (the error bound of cubic interpolation, 3 h^4 max|f''''| / 128 with f''''/f
# about (L / R_v T^2)^4, is 8e-9 at 160 K and falls fast with warmth; tests/test_thermo.py checks it), some
# 10,000 times smaller than the formulas' own uncertainty (Murphy and Koop 2005 give 0.05 % for e_w above
# 200 K). Outside the tables, and for NaN, the formulas themselves are used.
SATURATION_TABLE_RANGE_K = (160.0, 330.0)
SATURATION_TABLE_STEP_K = 0.1
_TABLE_LO = SATURATION_TABLE_RANGE_K[0]
_TABLE_INV_STEP = 1.0 / SATURATION_TABLE_STEP_K
_TABLE_INTERVALS = round((SATURATION_TABLE_RANGE_K[1] - SATURATION_TABLE_RANGE_K[0]) / SATURATION_TABLE_STEP_K)


@functools.lru_cache(maxsize=1)
def saturation_tables():
    """Tables (e_w, e_i) in Pa, read-only, at ``SATURATION_TABLE_RANGE_K[0] + (k - 1) * SATURATION_TABLE_STEP_K``
    for k = 0 .. intervals + 2 (one node beyond each end for the cubic), from
    :func:`saturation_vapor_pressure_water` and :func:`saturation_vapor_pressure_ice`."""
    t = _TABLE_LO + SATURATION_TABLE_STEP_K * np.arange(-1, _TABLE_INTERVALS + 2)
    tables = (saturation_vapor_pressure_water(t), saturation_vapor_pressure_ice(t))
    for a in tables:
        a.flags.writeable = False
    return tables


@jitable
def table_position(temperature):
    """Where a temperature (K) falls in :func:`saturation_tables`: the index of the first of the four nodes
    around it and the weights of the cubic Lagrange polynomial through them; index -1 outside the tables or
    for NaN."""
    u = (temperature - _TABLE_LO) * _TABLE_INV_STEP
    if not (u >= 0.0 and u < _TABLE_INTERVALS):
        return -1, 0.0, 0.0, 0.0, 0.0
    i = int(u)
    f = u - i  # the nodes i-1, i, i+1, i+2 are table entries i .. i+3, at f = -1, 0, 1, 2
    up = (f + 1.0) * f
    down = (f - 1.0) * (f - 2.0)
    return i, -f * down * (1.0 / 6.0), (f + 1.0) * down * 0.5, -up * (f - 2.0) * 0.5, up * (f - 1.0) * (1.0 / 6.0)


@jitable
def table_value(table, i, w0, w1, w2, w3):
    """The tabulated function at a position of :func:`table_position`."""
    return w0 * table[i] + w1 * table[i + 1] + w2 * table[i + 2] + w3 * table[i + 3]


@jitable
def relative_humidity_column(temperature, dewpoint, tables, rh_water, rh_ice, cap_dewpoint):
    """Relative humidity over liquid water and over ice (fractions) at each level of 1-D arrays of temperature
    and dewpoint (K), into ``rh_water`` and ``rh_ice``: e_w(Td) / e_w(T) and e_w(Td) / e_i(T), from the
    ``tables`` of :func:`saturation_tables` (the formulas outside them). The dewpoint is over water (WMO
    convention); above 0 degC the ice value has no physical meaning and is the ratio to e_i all the same.
    With ``cap_dewpoint`` a dewpoint above the temperature counts as the temperature (saturation). The one
    definition of relative humidity in the package; a loop over a column (a call a level would cost a third
    more in the kernels)."""
    ew, ei = tables
    for k in range(temperature.size):
        t = temperature[k]
        td = dewpoint[k]
        if cap_dewpoint and td > t:
            td = t
        i, a0, a1, a2, a3 = table_position(t)
        j, b0, b1, b2, b3 = table_position(td)
        if j >= 0:
            e = table_value(ew, j, b0, b1, b2, b3)
        else:
            e = np.exp(ln_saturation_vapor_pressure_water(td, np.log(td)))
        if i >= 0:  # (a ratio, so that saturation, Td = T, is exactly 1 over water)
            rh_water[k] = e / table_value(ew, i, a0, a1, a2, a3)
            rh_ice[k] = e / table_value(ei, i, a0, a1, a2, a3)
        else:
            lt = np.log(t)
            rh_water[k] = e / np.exp(ln_saturation_vapor_pressure_water(t, lt))
            rh_ice[k] = e / np.exp(ln_saturation_vapor_pressure_ice(t, lt))


def _humidity_rows(t, td, tables, rh_w, rh_i):
    relative_humidity_column(t, td, tables, rh_w, rh_i, False)


@functools.lru_cache(maxsize=1)
def _compiled_humidity():
    from icing.physics.jit import jit

    return jit(_humidity_rows)


def _relative_humidity(temperature, dewpoint):
    t, td = np.broadcast_arrays(np.asarray(temperature, dtype=float), np.asarray(dewpoint, dtype=float))
    rh_w, rh_i = np.empty(t.shape), np.empty(t.shape)
    _compiled_humidity()(np.ascontiguousarray(t).reshape(-1), np.ascontiguousarray(td).reshape(-1),
                         saturation_tables(), rh_w.reshape(-1), rh_i.reshape(-1))
    return rh_w, rh_i


def relative_humidity_water(temperature, dewpoint):
    """Relative humidity with respect to liquid water (fraction, 0-1) from temperature and dewpoint (K), by
    :func:`relative_humidity_column` (arrays broadcast)."""
    return _relative_humidity(temperature, dewpoint)[0]


def relative_humidity_ice(temperature, dewpoint):
    """Relative humidity with respect to ice (fraction) from temperature and dewpoint (K), by
    :func:`relative_humidities`.

    The dewpoint is over water (WMO convention), so the vapour pressure is e_w(Td); the ratio is to e_i(T).
    Above 0 deg C the ice value has no physical meaning and equals the ratio to e_i all the same.
    """
    return _relative_humidity(temperature, dewpoint)[1]


def dewpoint_from_relative_humidity(temperature, relative_humidity):
    """Dewpoint (K) from temperature (K) and relative humidity over water (fraction)."""
    return dewpoint_from_vapor_pressure(relative_humidity * saturation_vapor_pressure_water(temperature))


def saturation_mixing_ratio(pressure, temperature, over_ice=False):
    """Saturation mixing ratio (kg/kg) at pressure (Pa) and temperature (K), over water or over ice.

    .. math:: w_s = \\varepsilon e_s / (p - e_s)
    """
    es = saturation_vapor_pressure_ice(temperature) if over_ice else saturation_vapor_pressure_water(temperature)
    return EPSILON * es / np.maximum(np.asarray(pressure, dtype=float) - es, 1e-3)


def mixing_ratio_from_dewpoint(pressure, dewpoint):
    """Water-vapour mixing ratio (kg/kg) from pressure (Pa) and dewpoint (K)."""
    return saturation_mixing_ratio(pressure, dewpoint)


def virtual_temperature(temperature, mixing_ratio):
    """Virtual temperature (K): T (w + eps) / (eps (1 + w)) (Wallace and Hobbs 2006, eq. 3.59)."""
    w = np.asarray(mixing_ratio, dtype=float)
    return np.asarray(temperature, dtype=float) * (w + EPSILON) / (EPSILON * (1.0 + w))


def hypsometric_heights(pressure, temperature, dewpoint=None, anchor_height=None, anchor_index=0):
    """Geopotential heights (m) of a profile by the hypsometric equation.

    .. math:: z_2 - z_1 = \\frac{R_d \\bar T_v}{g_0} \\ln \\frac{p_1}{p_2}

    with the layer-mean virtual temperature taken as the mean of the two levels (exact for a temperature
    linear in ln p). Pressure (Pa) and temperature (K) have the level axis last; missing temperatures or
    dewpoints (NaN) are interpolated in ln p from their neighbours. The result is relative to the level
    ``anchor_index`` unless ``anchor_height`` (m, per profile) is given.
    """
    p = np.asarray(pressure, dtype=float)
    t = _fill_in_logp(p, np.asarray(temperature, dtype=float))
    if dewpoint is not None:
        td = _fill_in_logp(p, np.asarray(dewpoint, dtype=float))
        w = np.where(np.isfinite(td), mixing_ratio_from_dewpoint(p, td), 0.0)
        tv = virtual_temperature(t, w)
    else:
        tv = t
    lp = np.log(p)
    dz = RD / G0 * 0.5 * (tv[..., 1:] + tv[..., :-1]) * (lp[..., :-1] - lp[..., 1:])
    z = np.concatenate([np.zeros(p.shape[:-1] + (1,)), np.cumsum(dz, axis=-1)], axis=-1)
    z = z - np.take(z, [anchor_index], axis=-1)
    if anchor_height is not None:
        z = z + np.asarray(anchor_height, dtype=float)[..., None]
    return z


def _fill_in_logp(p, values):
    """Fill NaN values along the last axis by linear interpolation in ln p (constant beyond the ends)."""
    if np.all(np.isfinite(values)):
        return values
    out = np.array(values, dtype=float, copy=True)
    flat_p = np.log(p).reshape(-1, p.shape[-1])
    flat_v = out.reshape(-1, out.shape[-1])
    for row in range(flat_v.shape[0]):  # only rows with gaps reach here, and profiles have few
        ok = np.isfinite(flat_v[row]) & np.isfinite(flat_p[row])
        if ok.sum() == 0 or ok.all():
            continue
        x = -flat_p[row]
        flat_v[row, ~ok] = np.interp(x[~ok], x[ok], flat_v[row, ok])
    return out


def interp_last_axis(x, xp, fp):
    """Linear interpolation along the last axis with leading dimensions broadcast.

    ``xp`` (..., n) must increase along the last axis; NaN entries of ``xp`` or ``fp`` are ignored. Points
    outside the finite range of ``xp`` give NaN (never an extrapolated value). ``x`` is (..., m).
    """
    x = np.asarray(x, dtype=float)
    xp = np.asarray(xp, dtype=float)
    fp = np.asarray(fp, dtype=float)
    ok = np.isfinite(xp) & np.isfinite(fp)
    big = np.where(ok, xp, np.inf)
    # Sort so the finite points come first in increasing order; NaN slots go to the end.
    order = np.argsort(big, axis=-1, kind="stable")
    xs = np.take_along_axis(big, order, axis=-1)
    fs = np.take_along_axis(np.where(ok, fp, np.nan), order, axis=-1)
    n_ok = ok.sum(axis=-1)
    shape = np.broadcast_shapes(x.shape[:-1], xs.shape[:-1])
    x = np.broadcast_to(x, shape + x.shape[-1:])
    xs = np.broadcast_to(xs, shape + xs.shape[-1:])
    fs = np.broadcast_to(fs, shape + fs.shape[-1:])
    n_ok = np.broadcast_to(n_ok, shape)
    idx = (xs[..., None, :] <= x[..., :, None]).sum(axis=-1)  # (..., m): points at or below x
    hi = np.clip(idx, 1, np.maximum(n_ok[..., None] - 1, 1))
    lo = hi - 1
    x0 = np.take_along_axis(xs, lo, axis=-1)
    x1 = np.take_along_axis(xs, hi, axis=-1)
    f0 = np.take_along_axis(fs, lo, axis=-1)
    f1 = np.take_along_axis(fs, hi, axis=-1)
    with np.errstate(invalid="ignore", divide="ignore"):
        w = np.where(x1 > x0, (x - x0) / (x1 - x0), 0.0)
        out = f0 + w * (f1 - f0)
    first = xs[..., :1]
    last = np.take_along_axis(xs, np.maximum(n_ok[..., None] - 1, 0), axis=-1)
    inside = (x >= first) & (x <= last) & (n_ok[..., None] >= 1)
    single = (n_ok[..., None] == 1) & (x == first)
    out = np.where(single, fs[..., :1], out)
    return np.where(inside, out, np.nan)


def height_at_pressure(pressure, profile_pressure, profile_height):
    """Height (m) at the given pressures (Pa), linear in ln p within each profile; NaN outside it."""
    return interp_last_axis(-np.log(pressure), -np.log(profile_pressure), profile_height)


def pressure_at_height(height, profile_pressure, profile_height):
    """Pressure (Pa) at the given heights (m), ln p linear in height within each profile; NaN outside it."""
    return np.exp(interp_last_axis(height, profile_height, np.log(profile_pressure)))


# US Standard Atmosphere 1976 (identical to the ICAO standard atmosphere below 32 km): geopotential
# base heights (m), lapse rates (K/m), and base temperatures and pressures derived from them.
_R_STD = 8314.32 / 28.9644  # J/(kg K), the 1976 standard's R*/M0
_HB = np.array([0.0, 11000.0, 20000.0, 32000.0, 47000.0, 51000.0, 71000.0, 84852.0])
_LB = np.array([-0.0065, 0.0, 0.001, 0.0028, 0.0, -0.0028, -0.002])
_TB = np.concatenate([[288.15], 288.15 + np.cumsum(_LB * np.diff(_HB))])[:-1]


def _pb():
    pb = [101325.0]
    for i in range(len(_LB) - 1):
        dh = _HB[i + 1] - _HB[i]
        if _LB[i] == 0.0:
            pb.append(pb[-1] * np.exp(-G0 * dh / (_R_STD * _TB[i])))
        else:
            pb.append(pb[-1] * (_TB[i] / (_TB[i] + _LB[i] * dh)) ** (G0 / (_R_STD * _LB[i])))
    return np.array(pb)


_PB = _pb()


def standard_atmosphere_temperature(height):
    """Temperature (K) of the US Standard Atmosphere 1976 at geopotential height (m), 0-84.8 km."""
    h = np.asarray(height, dtype=float)
    i = np.clip(np.searchsorted(_HB, h, side="right") - 1, 0, len(_LB) - 1)
    return _TB[i] + _LB[i] * (h - _HB[i])


def standard_atmosphere_pressure(height):
    """Pressure (Pa) of the US Standard Atmosphere 1976 at geopotential height (m); below 0 m the first
    layer is extended (as altimetry does)."""
    h = np.asarray(height, dtype=float)
    i = np.clip(np.searchsorted(_HB, h, side="right") - 1, 0, len(_LB) - 1)
    tb, lb, pb, hb = _TB[i], _LB[i], _PB[i], _HB[i]
    with np.errstate(divide="ignore", invalid="ignore"):
        grad = pb * (tb / (tb + lb * (h - hb))) ** (G0 / (_R_STD * np.where(lb == 0, 1.0, lb)))
        iso = pb * np.exp(-G0 * (h - hb) / (_R_STD * tb))
    return np.where(lb == 0.0, iso, grad)


def standard_atmosphere_height(pressure):
    """Geopotential height (m) of the US Standard Atmosphere 1976 at pressure (Pa): the inverse of
    :func:`standard_atmosphere_pressure`."""
    p = np.asarray(pressure, dtype=float)
    i = np.clip(len(_PB) - 1 - np.searchsorted(_PB[::-1], p, side="left"), 0, len(_LB) - 1)
    tb, lb, pb, hb = _TB[i], _LB[i], _PB[i], _HB[i]
    with np.errstate(divide="ignore", invalid="ignore"):
        lbs = np.where(lb == 0, 1.0, lb)
        grad = hb + tb / lbs * ((p / pb) ** (-_R_STD * lbs / G0) - 1.0)
        iso = hb - _R_STD * tb / G0 * np.log(p / pb)
    return np.where(lb == 0.0, iso, grad)


def pressure_altitude_ft(pressure):
    """Pressure altitude (ft) of a pressure (Pa): its height in the standard atmosphere."""
    return standard_atmosphere_height(pressure) / 0.3048


def pressure_from_pressure_altitude_ft(altitude_ft):
    """Pressure (Pa) at a pressure altitude (ft)."""
    return standard_atmosphere_pressure(np.asarray(altitude_ft, dtype=float) * 0.3048)


def flight_level_to_pressure(flight_level):
    """Pressure (Pa) of a flight level (hundreds of feet of pressure altitude): FL180 -> about 506 hPa."""
    return pressure_from_pressure_altitude_ft(np.asarray(flight_level, dtype=float) * 100.0)


GAMMA = 1.4  # ratio of specific heats of dry air (as the standard atmosphere takes it)


def speed_of_sound(temperature):
    """Speed of sound in dry air (m/s) at a temperature (K): sqrt(gamma R T) (295.07 m/s at 216.65 K in the
    US Standard Atmosphere 1976)."""
    return np.sqrt(GAMMA * _R_STD * np.asarray(temperature, dtype=float))


def true_airspeed_from_calibrated(calibrated_airspeed, pressure, temperature):
    """True airspeed (m/s) from calibrated airspeed (m/s) at a static pressure (Pa) and temperature (K).

    Subsonic isentropic flow, the relations behind every airspeed indicator (calibrated to the standard
    atmosphere at sea level, p0 = 101325 Pa, a0 = 340.29 m/s):

    .. math:: q_c = p_0 [(1 + \\tfrac{\\gamma - 1}{2} (V_c/a_0)^2)^{\\gamma/(\\gamma-1)} - 1], \\quad
              M = \\sqrt{\\tfrac{2}{\\gamma - 1} [(q_c/p + 1)^{(\\gamma-1)/\\gamma} - 1]}, \\quad V = M a(T)

    Equal to the calibrated airspeed at sea level in the standard atmosphere; 250 kt calibrated is about
    288 kt true at 10,000 ft.
    """
    vc = np.asarray(calibrated_airspeed, dtype=float)
    a0 = speed_of_sound(288.15)
    g = GAMMA
    qc = 101325.0 * ((1.0 + 0.5 * (g - 1.0) * (vc / a0) ** 2) ** (g / (g - 1.0)) - 1.0)
    mach = np.sqrt(2.0 / (g - 1.0) * ((qc / np.asarray(pressure, dtype=float) + 1.0) ** ((g - 1.0) / g) - 1.0))
    return mach * speed_of_sound(temperature)

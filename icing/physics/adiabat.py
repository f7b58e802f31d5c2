"""The saturated (pseudo-)adiabat and the adiabatic liquid water content, vectorised over profiles.

Plain SI arrays (Pa, K) with the vertical ``level`` axis last and any leading dimensions. The moist adiabat is
integrated in ln p with the profile's own pressure levels (a loop over levels, never over profiles); for
the diagnostics the adiabats are tabulated once and looked up, which needs no loop at all.
MetPy's ``moist_lapse`` is the reference this is checked against in ``tests/test_microphysics.py``.
"""

from __future__ import annotations

import functools

import numpy as np

from icing.physics import thermo
from icing.physics.jit import jitable

__all__ = ["LV", "saturation_vapor_pressure_bolton", "saturation_mixing_ratio_bolton", "moist_adiabat_tables",
           "table_lookup", "parcel_in_layer",
           "wet_bulb_potential_temperature_saturated", "moist_adiabat_temperature_from_theta_w",
           "moist_lapse_rate_lnp", "moist_adiabat_step", "moist_adiabat_temperature",
           "adiabatic_liquid_water_content", "adiabatic_lwc_from_bases"]

LV = 2.50084e6  # J/kg, latent heat of vaporisation at 0 degC (as MetPy's constant)


@jitable
def saturation_vapor_pressure_bolton(temperature):
    """Saturation vapour pressure over liquid water (Pa), Bolton (1980), Mon. Wea. Rev. 108, 1046-1053, eq. 10.

    .. math:: e_s = 611.2 \\exp\\left(\\frac{17.67 (T - 273.15)}{T - 29.65}\\right)

    Bolton states 0.1 % from -35 to 35 degC; against MetPy (Ambaum 2020) it is within 0.5 % from -40 to
    35 degC (tests). One exponential, so it is the one used in the moist adiabat.
    """
    return 611.2 * np.exp(17.67 * (temperature - 273.15) / (temperature - 29.65))


@jitable
def saturation_mixing_ratio_bolton(pressure, temperature):
    """Saturation mixing ratio over water (kg/kg) with the Bolton (1980) vapour pressure."""
    es = saturation_vapor_pressure_bolton(temperature)
    return thermo.EPSILON * es / np.maximum(pressure - es, 1e-3)


def moist_lapse_rate_lnp(pressure, temperature):
    """Rate of change of temperature with ln p along the pseudo-adiabat, dT/dln p (K).

    .. math:: \\frac{dT}{d\\ln p} = \\frac{R_d T + L_v r_s}{c_{pd} + L_v^2 r_s \\varepsilon / (R_d T^2)}

    Saturation over liquid water (Bolton 1980), latent heat constant at its 0 degC value. This is the pseudo-adiabatic
    lapse rate of Bakhshaii and Stull (2013) and of MetPy's ``moist_lapse`` (AMS Glossary of Meteorology,
    "pseudoadiabatic lapse rate"), written per unit ln p. Valid for tropospheric air, about 200-320 K.
    """
    t = np.asarray(temperature, dtype=float)
    rs = saturation_mixing_ratio_bolton(np.asarray(pressure, dtype=float), t)
    return (thermo.RD * t + LV * rs) / (thermo.CP_D + LV * LV * rs * thermo.EPSILON / (thermo.RD * t * t))


def moist_adiabat_step(p0, t0, p1, max_step=0.08):
    """Temperature (K) at pressure ``p1`` (Pa) on the moist adiabat through (``p0``, ``t0``).

    Midpoint (second-order Runge-Kutta) steps in ln p, as many equal steps as keep each within
    ``max_step`` in ln p (0.08 is about 20 hPa at 250 hPa, 80 hPa at 1000 hPa). Against MetPy's adaptive
    ``moist_lapse`` this stays within 0.05 K from 1000 to 250 hPa (tests/test_microphysics.py).
    """
    x0 = np.log(p0)
    span = np.log(p1) - x0
    finite = span[np.isfinite(span)] if np.ndim(span) else np.array([span])
    substeps = max(1, int(np.ceil(np.max(np.abs(finite), initial=0.0) / max_step)))
    h = span / substeps
    t = np.asarray(t0, dtype=float)
    x = x0
    for _ in range(substeps):
        k1 = moist_lapse_rate_lnp(np.exp(x), t)
        t = t + h * moist_lapse_rate_lnp(np.exp(x + 0.5 * h), t + 0.5 * h * k1)
        x = x + h
    return t


def moist_adiabat_temperature(pressure, base_pressure, base_temperature, max_step=0.08):
    """Parcel temperature (K) along the moist adiabat from a base, at every pressure (Pa) of a profile.

    ``pressure`` is (..., level) with pressure decreasing along the last axis; ``base_pressure`` and
    ``base_temperature`` are (...). Levels below the base (higher pressure) are NaN.
    """
    p = np.asarray(pressure, dtype=float)
    pb = np.asarray(base_pressure, dtype=float)[..., None]
    tb = np.asarray(base_temperature, dtype=float)[..., None]
    out = np.full(np.broadcast_shapes(p.shape, pb.shape), np.nan)
    p = np.broadcast_to(p, out.shape)
    prev_p = np.broadcast_to(pb, out.shape[:-1] + (1,))[..., 0]
    prev_t = np.broadcast_to(tb, out.shape[:-1] + (1,))[..., 0]
    for k in range(p.shape[-1]):
        above = p[..., k] <= prev_p
        t_k = moist_adiabat_step(prev_p, prev_t, np.where(above, p[..., k], prev_p), max_step)
        out[..., k] = np.where(above, t_k, np.nan)
        prev_p = np.where(above, p[..., k], prev_p)
        prev_t = np.where(above, t_k, prev_t)
    return out


@jitable
def adiabatic_liquid_water_content(pressure, parcel_temperature, total_water):
    """Adiabatic liquid water content (kg/m3) of a saturated parcel.

    .. math:: \\mathrm{LWC_{ad}} = \\rho_d \\, \\max(r_t - r_s(p, T_p), 0), \\quad
              \\rho_d = (p - e_s(T_p)) / (R_d T_p)

    where ``total_water`` :math:`r_t` is the saturation mixing ratio at the cloud base (kg/kg, from
    :func:`saturation_mixing_ratio_bolton`, the same formula as here so that LWC is zero at the base) and
    :math:`T_p` the parcel temperature on the moist adiabat. All condensate is counted as liquid here; the
    phase split is applied by the caller (Hu et al. 2010). Any textbook derivation, e.g. Rogers and Yau
    (1989), *A Short Course in Cloud Physics*, ch. 2.
    """
    es = saturation_vapor_pressure_bolton(parcel_temperature)
    rho_d = (pressure - es) / (thermo.RD * parcel_temperature)
    rs = thermo.EPSILON * es / np.maximum(pressure - es, 1e-3)
    return rho_d * np.maximum(total_water - rs, 0.0)


# Moist adiabats tabulated once: parcel temperature T(theta_w, ln p) every 0.5 K and 0.01 in ln p, built with
# moist_adiabat_step in steps of 0.005 in ln p, and its inverse theta_w(T, ln p). Bilinear look-ups in these
# tables reproduce the direct integration to about 0.01 K and need no loop over levels.
_TW = np.arange(200.0, 340.01, 0.5)  # K, wet-bulb potential temperature (the adiabat's T at 1000 hPa)
_LNP = np.arange(np.log(110000.0), np.log(5000.0) - 1e-9, -0.01)  # ln Pa, decreasing
_TT = np.arange(150.0, 345.01, 0.5)  # K, temperature axis of the inverse table


@functools.lru_cache(maxsize=1)
def _tables():
    k0 = int(np.argmin(np.abs(_LNP - np.log(100000.0))))
    tab = np.empty((_TW.size, _LNP.size))
    t = _TW.copy()
    t0 = moist_adiabat_step(np.full(_TW.size, 100000.0), t, np.full(_TW.size, np.exp(_LNP[k0])), 0.001)
    tab[:, k0] = t0
    t = t0
    for k in range(k0 + 1, _LNP.size):  # upward
        t = moist_adiabat_step(np.exp(_LNP[k - 1]), t, np.exp(_LNP[k]), 0.005)
        tab[:, k] = t
    t = t0
    for k in range(k0 - 1, -1, -1):  # downward, to 1100 hPa
        t = moist_adiabat_step(np.exp(_LNP[k + 1]), t, np.exp(_LNP[k]), 0.005)
        tab[:, k] = t
    inv = np.empty((_TT.size, _LNP.size))
    for k in range(_LNP.size):
        inv[:, k] = np.interp(_TT, tab[:, k], _TW)
    return tab, inv


@functools.lru_cache(maxsize=1)
def moist_adiabat_tables():
    """The tabulated moist adiabats in the form the column kernels read: ``(table, tw_axis, inverse,
    tt_axis, lnp_axis)``: ``table`` T(theta_w, ln p) and ``inverse`` theta_w(T, ln p) raveled (C order), each
    axis as (first value, step, size)."""
    tab, inv = _tables()
    axis = lambda a: np.array([a[0], a[1] - a[0], a.size], dtype=float)  # noqa: E731
    return (np.ascontiguousarray(tab).ravel(), axis(_TW), np.ascontiguousarray(inv).ravel(), axis(_TT),
            axis(_LNP))


@jitable
def table_lookup(flat, axis0, value, lnp_axis, lnp):
    """Bilinear interpolation at (``value``, ``lnp``) in a table over (axis0, ln p) raveled to ``flat``;
    axes as (first, step, size) (:func:`moist_adiabat_tables`). Inputs are held to the table's range; a NaN
    input gives NaN (never an index outside the table). Scalars; compiled in the column kernels."""
    if not (np.isfinite(value) and np.isfinite(lnp)):
        return np.nan
    f0 = min(max((value - axis0[0]) / axis0[1], 0.0), axis0[2] - 1.000001)
    f1 = min(max((lnp - lnp_axis[0]) / lnp_axis[1], 0.0), lnp_axis[2] - 1.000001)
    i0 = int(f0)
    i1 = int(f1)
    w0 = f0 - i0
    w1 = f1 - i1
    ncol = np.int64(lnp_axis[2])
    k = i0 * ncol + i1
    a = flat[k] * (1.0 - w1) + flat[k + 1] * w1
    b = flat[k + ncol] * (1.0 - w1) + flat[k + ncol + 1] * w1
    return a * (1.0 - w0) + b * w0


@jitable
def parcel_in_layer(p, lnp, t, start, end, tables, parcel_temperature, lwc_adiabatic):
    """The parcel of one cloud layer (levels ``start``..``end`` of a column, pressure decreasing): its
    temperature (K) on the moist adiabat through the base, where it starts saturated at the air's
    temperature, and its adiabatic LWC (kg/m3, :func:`adiabatic_liquid_water_content` with the base's
    saturation mixing ratio as total water), written into ``parcel_temperature`` and ``lwc_adiabatic``.
    The adiabat is looked up in :func:`moist_adiabat_tables`. Returns the largest excess of the parcel over
    the air temperature in the layer (K), which tells convective from stratiform cloud."""
    tab, tab_ax, inv, inv_ax, lnp_ax = tables
    tb = t[start]
    tw = table_lookup(inv, inv_ax, tb, lnp_ax, lnp[start])  # wet-bulb potential temperature of the base
    rt = saturation_mixing_ratio_bolton(p[start], tb)
    excess = -np.inf
    for k in range(start, end + 1):
        tp = tb if k == start else table_lookup(tab, tab_ax, tw, lnp_ax, lnp[k])
        parcel_temperature[k] = tp
        lwc_adiabatic[k] = adiabatic_liquid_water_content(p[k], tp, rt)
        if tp - t[k] > excess:
            excess = tp - t[k]
    return excess


def _lookup_many(flat, axis0, values, lnp_axis, lnp):
    out = np.empty(values.size)
    for i in range(values.size):
        out[i] = table_lookup(flat, axis0, values[i], lnp_axis, lnp[i])
    return out


def _parcels(p, t, in_cloud, tables, tp, lwc):
    lnp = np.log(p)
    for i in range(p.shape[0]):
        k = 0
        n = p.shape[1]
        while k < n:
            if in_cloud[i, k]:
                s = k
                while k + 1 < n and in_cloud[i, k + 1]:
                    k += 1
                parcel_in_layer(p[i], lnp[i], t[i], s, k, tables, tp[i], lwc[i])
            k += 1


@functools.lru_cache(maxsize=1)
def _compiled():
    from icing.physics.jit import jit

    return jit(_lookup_many), jit(_parcels)


def _lookup(which, values, pressure):
    tab, tw_ax, inv, tt_ax, lnp_ax = moist_adiabat_tables()
    flat, axis = (inv, tt_ax) if which == "inverse" else (tab, tw_ax)
    v, p = np.broadcast_arrays(np.asarray(values, dtype=float), np.asarray(pressure, dtype=float))
    with np.errstate(invalid="ignore", divide="ignore"):
        lnp = np.log(p)
    out = _compiled()[0](flat, axis, np.ascontiguousarray(v).ravel(), lnp_ax, np.ascontiguousarray(lnp).ravel())
    return out.reshape(v.shape) if v.ndim else float(out[0])


def wet_bulb_potential_temperature_saturated(pressure, temperature):
    """Wet-bulb potential temperature (K) of saturated air: the 1000 hPa temperature of its moist adiabat.

    From the tabulated pseudo-adiabats of :func:`moist_lapse_rate_lnp`; valid for 150-345 K, 50-1100 hPa.
    """
    return _lookup("inverse", temperature, pressure)


def moist_adiabat_temperature_from_theta_w(pressure, theta_w):
    """Temperature (K) on the moist adiabat of wet-bulb potential temperature ``theta_w`` at ``pressure``."""
    return _lookup("table", theta_w, pressure)


def adiabatic_lwc_from_bases(pressure, temperature, in_cloud):
    """Adiabatic LWC (kg/m3) and parcel temperature (K) in every cloud layer, each from its own base.

    Parameters
    ----------
    pressure, temperature : array_like (..., level)
        Pa and K, pressure decreasing along the last axis.
    in_cloud : array_like of bool (..., level)
        Cloud levels; each run of cloud levels is a layer whose lowest level is its base, where the parcel
        starts saturated at the environmental temperature.

    Returns
    -------
    lwc_ad, parcel_temperature : ndarray (..., level)
        Zero and NaN outside cloud.

    Notes
    -----
    :func:`parcel_in_layer` for every layer of every profile (the function the diagnosis kernel uses).
    """
    p, t, c = np.broadcast_arrays(np.asarray(pressure, dtype=float), np.asarray(temperature, dtype=float),
                                  np.asarray(in_cloud, dtype=bool))
    shape = p.shape
    n = shape[-1]
    tp = np.full((int(np.prod(shape[:-1])), n), np.nan)
    lwc = np.zeros(tp.shape)
    _compiled()[1](np.ascontiguousarray(p).reshape(-1, n), np.ascontiguousarray(t).reshape(-1, n),
                   np.ascontiguousarray(c).reshape(-1, n), moist_adiabat_tables(), tp, lwc)
    return lwc.reshape(shape), tp.reshape(shape)

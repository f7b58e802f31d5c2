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

__all__ = ["LV", "saturation_vapor_pressure_bolton", "saturation_mixing_ratio_bolton",
           "wet_bulb_potential_temperature_saturated", "moist_adiabat_temperature_from_theta_w",
           "moist_lapse_rate_lnp", "moist_adiabat_step", "moist_adiabat_temperature",
           "adiabatic_liquid_water_content", "adiabatic_lwc_from_bases"]

LV = 2.50084e6  # J/kg, latent heat of vaporisation at 0 degC (as MetPy's constant)


def saturation_vapor_pressure_bolton(temperature):
    """Saturation vapour pressure over liquid water (Pa), Bolton (1980), Mon. Wea. Rev. 108, 1046-1053, eq. 10.

    .. math:: e_s = 611.2 \\exp\\left(\\frac{17.67 (T - 273.15)}{T - 29.65}\\right)

    Bolton states 0.1 % from -35 to 35 degC; against MetPy (Ambaum 2020) it is within 0.5 % from -40 to
    35 degC (tests). One exponential, so it is the one used in the moist adiabat.
    """
    t = np.asarray(temperature, dtype=float)
    return 611.2 * np.exp(17.67 * (t - 273.15) / (t - 29.65))


def saturation_mixing_ratio_bolton(pressure, temperature):
    """Saturation mixing ratio over water (kg/kg) with the Bolton (1980) vapour pressure."""
    es = saturation_vapor_pressure_bolton(temperature)
    return thermo.EPSILON * es / np.maximum(np.asarray(pressure, dtype=float) - es, 1e-3)


def moist_lapse_rate_lnp(pressure, temperature):
    """Rate of change of temperature with ln p along the pseudo-adiabat, dT/dln p (K).

    .. math:: \\frac{dT}{d\\ln p} = \\frac{R_d T + L_v r_s}{c_{pd} + L_v^2 r_s \\varepsilon / (R_d T^2)}

    Saturation over liquid water (Bolton 1980), latent heat constant at its 0 degC value. This is the pseudo-adiabatic
    lapse rate of Bakhshaii and Stull (2013) and of MetPy's ``moist_lapse`` (AMS Glossary of Meteorology,
    "pseudoadiabatic lapse rate"), written per unit ln p. Valid for tropospheric air, about 200-320 K.
    """
    rs = saturation_mixing_ratio_bolton(pressure, temperature)
    t = np.asarray(temperature, dtype=float)
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
    p = np.asarray(pressure, dtype=float)
    tp = np.asarray(parcel_temperature, dtype=float)
    es = saturation_vapor_pressure_bolton(tp)
    rho_d = (p - es) / (thermo.RD * tp)
    rs = thermo.EPSILON * es / np.maximum(p - es, 1e-3)
    return rho_d * np.maximum(np.asarray(total_water, dtype=float) - rs, 0.0)


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


def _bilinear(table, axis0, values0, lnp):
    """Bilinear interpolation in a (axis0, _LNP) table; inputs are clipped to the table's range; a NaN input
    gives NaN."""
    f0 = np.clip((values0 - axis0[0]) / (axis0[1] - axis0[0]), 0.0, axis0.size - 1.000001)
    f1 = np.clip((lnp - _LNP[0]) / (_LNP[1] - _LNP[0]), 0.0, _LNP.size - 1.000001)
    nan = ~(np.isfinite(f0) & np.isfinite(f1))
    if nan.any():  # (a level without pressure, say): look up row 0 there and blank the result below
        f0 = np.where(nan, 0.0, f0)
        f1 = np.where(nan, 0.0, f1)
    i0 = f0.astype(np.intp)
    i1 = f1.astype(np.intp)
    w0 = f0 - i0
    w1 = f1 - i1
    ncol = table.shape[1]
    flat = table.ravel()
    k = i0 * ncol + i1  # flat index of table[i0, i1]; np.take is faster than 2-D fancy indexing
    a = np.take(flat, k) * (1.0 - w1) + np.take(flat, k + 1) * w1
    b = np.take(flat, k + ncol) * (1.0 - w1) + np.take(flat, k + ncol + 1) * w1
    out = a * (1.0 - w0) + b * w0
    return np.where(nan, np.nan, out) if nan.any() else out


def wet_bulb_potential_temperature_saturated(pressure, temperature):
    """Wet-bulb potential temperature (K) of saturated air: the 1000 hPa temperature of its moist adiabat.

    From the tabulated pseudo-adiabats of :func:`moist_lapse_rate_lnp`; valid for 150-345 K, 50-1100 hPa.
    """
    _, inv = _tables()
    return _bilinear(inv, _TT, np.asarray(temperature, dtype=float), np.log(np.asarray(pressure, dtype=float)))


def moist_adiabat_temperature_from_theta_w(pressure, theta_w):
    """Temperature (K) on the moist adiabat of wet-bulb potential temperature ``theta_w`` at ``pressure``."""
    tab, _ = _tables()
    return _bilinear(tab, _TW, np.asarray(theta_w, dtype=float), np.log(np.asarray(pressure, dtype=float)))


def adiabatic_lwc_from_bases(pressure, temperature, in_cloud, *, log_pressure=None):
    """Adiabatic LWC (kg/m3) and parcel temperature (K) in every cloud layer, each from its own base.

    Parameters
    ----------
    pressure, temperature : array_like (..., level)
        Pa and K, pressure decreasing along the last axis.
    in_cloud : array_like of bool (..., level)
        Cloud levels; each run of cloud levels is a layer whose lowest level is its base, where the parcel
        starts saturated at the environmental temperature.
    log_pressure : array_like (..., level), optional
        ``ln(pressure)`` if the caller has it already (saves recomputing it).

    Returns
    -------
    lwc_ad, parcel_temperature : ndarray (..., level)
        Zero and NaN outside cloud.

    Notes
    -----
    The parcel of each layer follows the moist adiabat through its base, looked up in the tabulated
    adiabats (no loop over levels or profiles); the total water is the base's saturation mixing ratio.
    """
    p = np.asarray(pressure, dtype=float)
    t = np.asarray(temperature, dtype=float)
    c = np.asarray(in_cloud, dtype=bool)
    shape = p.shape
    p2, t2, c2 = p.reshape(-1, shape[-1]), t.reshape(-1, shape[-1]), c.reshape(-1, shape[-1])
    prev = np.zeros_like(c2)
    prev[:, 1:] = c2[:, :-1]
    base = (c2 & ~prev).ravel()
    idx = np.flatnonzero(c2.ravel())
    if idx.size == 0:
        return np.zeros(shape), np.full(shape, np.nan)
    is_base = base[idx]
    # Run id of every cloud level (runs are contiguous in flat order); numpy sums bytes into int32 far
    # faster than booleans into int64.
    run = np.cumsum(is_base.view(np.uint8), dtype=np.int32 if is_base.size < 2**31 - 1 else np.int64) - 1
    bidx = idx[is_base]
    pf, tf = p2.ravel(), t2.ravel()
    lnp = np.log(pf[idx]) if log_pressure is None else np.asarray(log_pressure, dtype=float).ravel()[idx]
    pb, tb = pf[bidx], tf[bidx]
    _, inv = _tables()
    tw_base = _bilinear(inv, _TT, tb, lnp[is_base])  # wet_bulb_potential_temperature_saturated
    rt_base = saturation_mixing_ratio_bolton(pb, tb)
    pc = pf[idx]
    tab, _ = _tables()
    tp_c = _bilinear(tab, _TW, tw_base[run], lnp)  # moist_adiabat_temperature_from_theta_w
    # At the base itself the parcel is the environment (removes the table's small round trip).
    tp_c = np.where(is_base, tf[idx], tp_c)
    lwc_c = adiabatic_liquid_water_content(pc, tp_c, rt_base[run])
    tp = np.full(p2.size, np.nan)
    lwc = np.zeros(p2.size)
    tp[idx] = tp_c
    lwc[idx] = lwc_c
    return lwc.reshape(shape), tp.reshape(shape)

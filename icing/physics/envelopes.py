"""Certification reference conditions: 14 CFR Part 25 Appendix C (cloud) and Appendix O (large drops).

These say whether a diagnosed condition lies inside the envelope aircraft are certified against. Being
"within" does not make a condition safe for a given aircraft, and "beyond" is a caution, not a verdict:
advisory only; defer to the aircraft's approved manuals and to official aviation weather products.

Sources
-------
14 CFR Part 25 Appendix C, Part I (continuous maximum: figures 1-3, 17.4 nmi; intermittent maximum:
figures 4-6, 2.6 nmi) and Part II (takeoff maximum icing). The continuous-maximum values at MVD 15, 25 and
40 um are those tabulated from figure 1 in FAA AC 20-73A (Table 6) after NACA TN-1855. 14 CFR Part 25
Appendix O (freezing drizzle and freezing rain).

Not implemented, for want of a text source we could check: the horizontal-extent factor curves (figures 3
and 6), the altitude-temperature shapes of figures 2 and 5 (only their ranges are used) and the LWC curves
of the intermittent maximum (figure 4). Because of the last, :func:`appendix_c_status` compares LWC with
the continuous maximum only, which errs on the side of "beyond".
"""

from __future__ import annotations

import numpy as np

from icing.units import to_si as _to_si
from icing.units import ureg

__all__ = [
    "intensity_for_conditions",
    "CONTINUOUS_MAX_MVD_UM", "CONTINUOUS_MAX_TEMPERATURE_C", "CONTINUOUS_MAX_LWC_G_M3", "APPENDIX_C",
    "APPENDIX_O", "appendix_c_continuous_max_lwc", "continuous_max_lwc_si", "appendix_c_status",
    "appendix_o_status", "appendix_o_subset",
]

# Appendix C figure 1 (continuous maximum, 17.4 nmi), tabulated: rows are temperatures, columns MVDs.
CONTINUOUS_MAX_MVD_UM = np.array([15.0, 25.0, 40.0])
CONTINUOUS_MAX_TEMPERATURE_C = np.array([-30.0, -20.0, -10.0, 0.0])
CONTINUOUS_MAX_LWC_G_M3 = np.array([
    [0.20, 0.10, 0.04],  # -30 deg C
    [0.30, 0.15, 0.06],  # -20 deg C
    [0.60, 0.30, 0.10],  # -10 deg C
    [0.80, 0.50, 0.15],  # 0 deg C
])

APPENDIX_C = {
    "continuous_max": {"reference_extent_nmi": 17.4, "altitude_ft": (0.0, 22000.0),
                       "temperature_c": (-30.0, 0.0), "mvd_um": (15.0, 40.0)},
    # Ranges from the figure captions and axes, from memory; the LWC curves are not implemented.
    "intermittent_max": {"reference_extent_nmi": 2.6, "altitude_ft": (4000.0, 22000.0),
                         "temperature_c": (-40.0, 0.0), "mvd_um": (15.0, 50.0)},
    # Part II: takeoff maximum icing, from the surface to 1,500 ft above the takeoff surface.
    "takeoff_max": {"lwc_g_m3": 0.35, "mvd_um": 20.0, "temperature_c": -9.0, "height_agl_ft": 1500.0},
}

APPENDIX_O = {
    "mvd_split_um": 40.0,  # each condition has an MVD < 40 um and an MVD > 40 um distribution
    "freezing_drizzle": {"code": 1, "largest_drop_um": (100.0, 500.0), "altitude_ft": (0.0, 22000.0)},
    "freezing_rain": {"code": 2, "largest_drop_um": (500.0, np.inf), "altitude_ft": (0.0, 12000.0)},
}


def continuous_max_lwc_si(mvd_um, temperature_c):
    """Appendix C continuous-maximum LWC (g/m3, 17.4 nmi) at MVD (um) and temperature (deg C), vectorised.

    14 CFR Part 25 Appendix C figure 1, from its tabulated points (MVD 15, 25, 40 um at 0, -10, -20, -30
    deg C; FAA AC 20-73A Table 6). Between the points: log LWC linear in MVD along each temperature curve
    (the curves fall roughly exponentially with MVD), then LWC linear in temperature between the curves.
    NaN outside 15-40 um or -30 to 0 deg C: the figure says nothing there.
    """
    mvd, tc = np.broadcast_arrays(np.asarray(mvd_um, dtype=float), np.asarray(temperature_c, dtype=float))
    m, t = mvd.ravel(), tc.ravel()
    xm, xt = CONTINUOUS_MAX_MVD_UM, CONTINUOUS_MAX_TEMPERATURE_C
    logs = np.log(CONTINUOUS_MAX_LWC_G_M3)
    with np.errstate(invalid="ignore"):
        j = np.clip(np.searchsorted(xm, m, side="right") - 1, 0, len(xm) - 2)
        wm = (m - xm[j]) / (xm[j + 1] - xm[j])
        curves = np.exp(logs[:, j] * (1 - wm) + logs[:, j + 1] * wm)  # (4, n): each temperature curve at m
        i = np.clip(np.searchsorted(xt, t, side="right") - 1, 0, len(xt) - 2)
        wt = (t - xt[i]) / (xt[i + 1] - xt[i])
        cols = np.arange(m.size)
        lwc = (curves[i, cols] * (1 - wt) + curves[i + 1, cols] * wt).reshape(mvd.shape)
    inside = (mvd >= xm[0]) & (mvd <= xm[-1]) & (tc >= xt[0]) & (tc <= xt[-1])
    return np.where(inside, lwc, np.nan)


def appendix_c_continuous_max_lwc(mvd, temperature):
    """Appendix C continuous-maximum liquid water content (Quantity, g/m3) for the 17.4 nmi reference extent.

    Parameters
    ----------
    mvd : pint.Quantity
        Median volume (mean effective) drop diameter, 15-40 um.
    temperature : pint.Quantity
        Ambient air temperature, -30 to 0 deg C.

    Returns
    -------
    pint.Quantity
        g/m3 from 14 CFR Part 25 Appendix C figure 1 (see :func:`continuous_max_lwc_si`); NaN outside the
        figure.

    Raises
    ------
    icing.errors.UnitError
        If an argument has the wrong dimension; the message names it.
    """
    mvd_um = _to_si(mvd, "micrometer", name="mvd")
    tc = _to_si(temperature, "degC", name="temperature")
    return ureg.Quantity(continuous_max_lwc_si(mvd_um, tc), "g/m^3")


def appendix_c_status(lwc_g_m3, mvd_um, temperature_c, altitude_ft):
    """Where a condition stands against Appendix C, vectorised: 'within', 'beyond', 'n/a' or 'unknown'.

    * 'n/a': no supercooled liquid (LWC zero or below, or air at or above 0 deg C);
    * 'within': pressure altitude up to 22,000 ft, -30 to 0 deg C, MVD up to 40 um and LWC at or under the
      continuous maximum of figure 1 (an MVD under 15 um is held to the 15 um value: our choice; altitude
      below sea level counts as sea level);
    * 'beyond': supercooled liquid outside that (colder, higher, larger drops or more water);
    * 'unknown': an input needed for the answer is NaN (unknown is never read as "n/a").

    Only the continuous maximum is used (see the module notes): a short burst of convective cloud inside the
    intermittent maximum reads 'beyond'.
    """
    w, d, tc, alt = np.broadcast_arrays(*(np.asarray(x, dtype=float) for x in
                                          (lwc_g_m3, mvd_um, temperature_c, altitude_ft)))
    cont = APPENDIX_C["continuous_max"]
    with np.errstate(invalid="ignore"):
        limit = continuous_max_lwc_si(np.clip(d, cont["mvd_um"][0], cont["mvd_um"][1]),
                                      np.clip(tc, cont["temperature_c"][0], cont["temperature_c"][1]))
        no_liquid = (w <= 0.0) | (tc >= 0.0)
        inside = ((alt <= cont["altitude_ft"][1]) & (tc >= cont["temperature_c"][0]) & (d <= cont["mvd_um"][1])
                  & (d > 0) & (w <= limit))
    known = np.isfinite(w) & np.isfinite(d) & np.isfinite(tc) & np.isfinite(alt)
    out = np.where(inside, "within", "beyond").astype(object)
    out = np.where(known, out, "unknown")
    out = np.where(no_liquid, "n/a", out)
    return out.astype(str)


def _large_drop_codes(large_drop_code):
    """Codes 0/1/2 (NaN -> -1) from ints, floats or the words 'none', 'drizzle', 'rain'."""
    a = np.asarray(large_drop_code)
    if a.dtype.kind in "USO":
        words = {"none": 0, "drizzle": 1, "freezing_drizzle": 1, "rain": 2, "freezing_rain": 2}
        flat = [words.get(str(x).strip().lower(), -1) for x in a.ravel()]  # labels, not the hot path
        return np.array(flat, dtype=int).reshape(a.shape)
    f = a.astype(float)
    return np.where(np.isin(f, (0.0, 1.0, 2.0)), np.nan_to_num(f, nan=-1.0), -1.0).astype(int)


def appendix_o_status(large_drop_code, altitude_ft):
    """Where a large-drop condition stands against Appendix O: 'n/a', 'within', 'beyond' or 'unknown'.

    ``large_drop_code``: 0 none, 1 freezing drizzle, 2 freezing rain (or those words). Freezing drizzle is
    within from 0 to 22,000 ft pressure altitude, freezing rain from 0 to 12,000 ft (14 CFR Part 25
    Appendix O, Part I); above that, beyond. Altitude below sea level counts as sea level. 'unknown' for a
    NaN or unrecognised code, or a NaN altitude with large drops present. The temperature limits of
    Appendix O's altitude-temperature figures are not applied.
    """
    code = _large_drop_codes(large_drop_code)
    alt = np.asarray(altitude_ft, dtype=float)
    code, alt = np.broadcast_arrays(code, alt)
    top = np.where(code == 1, APPENDIX_O["freezing_drizzle"]["altitude_ft"][1],
                   APPENDIX_O["freezing_rain"]["altitude_ft"][1])
    with np.errstate(invalid="ignore"):
        status = np.where(alt <= top, "within", "beyond").astype(object)
    status = np.where(np.isnan(alt), "unknown", status)
    status = np.where(code == 0, "n/a", status)
    status = np.where(code < 0, "unknown", status)
    return status.astype(str)


def appendix_o_subset(mvd_um):
    """Appendix O distribution a large-drop condition falls in: 'mvd<40' or 'mvd>40' (NaN -> 'unknown')."""
    d = np.asarray(mvd_um, dtype=float)
    with np.errstate(invalid="ignore"):
        out = np.where(d < APPENDIX_O["mvd_split_um"], "mvd<40", "mvd>40").astype(object)
    return np.where(np.isnan(d), "unknown", out).astype(str)


def intensity_for_conditions(rate_code, lwc_g_m3, mvd_um, temperature_c, large_drop, icing_certified):
    """Intensity codes (0 none .. 4 severe, -1 unknown) from the accretion rate's code, held to the trade's
    definitions of the words.

    The US Aeronautical Information Manual defines the words by their effect: severe is icing the aircraft's
    ice protection cannot control. The ice protection of an aircraft certified for flight in icing is designed
    for the 14 CFR Part 25 Appendix C envelopes (25.1419). So, for a certified aircraft (``icing_certified``),
    conditions within the continuous maximum (LWC at or under it at the level's temperature and MVD, MVD up to
    40 um) and without large drops read at most moderate (3), whatever the rate on the small reference body;
    liquid above the continuous maximum, drops larger than 40 um or supercooled large drops (``large_drop`` 1
    or 2, Appendix O) read at least moderate where ice grows, for any aircraft; below 0 degC supercooled large
    drops read at least moderate even without cloud water (freezing rain in clear air). Between, the rate's word
    stands (trace < 1/4, light 1/4-1, moderate 1-3, severe > 3 in/h on the reference body: see
    :data:`icing.physics.accretion.INTENSITY_NOTE`). The words never fall as LWC rises: the rate rises with
    it, and leaving the envelope only lifts the cap and sets the floor. Temperatures colder than -30 degC
    are held to the envelope's -30 degC (the figure ends there; the cold alone is no reason for a worse word).
    """
    code = np.asarray(rate_code).astype(np.int8)
    shape = np.broadcast_shapes(code.shape, *(np.shape(x) for x in (lwc_g_m3, mvd_um, temperature_c, large_drop)))
    out = np.array(np.broadcast_to(code, shape))
    # Supercooled large drops ice whatever the cloud water (freezing rain falls through clear air too): where
    # they are, below 0 degC, a known word is at least moderate.
    with np.errstate(invalid="ignore"):  # (NaN compares False: unknown drops or temperature change nothing)
        in_large = (np.asarray(large_drop) > 0) & (np.asarray(temperature_c) <= 0.0) & (out >= 0)
    if in_large.any():
        out = np.where(in_large, np.maximum(out, 3), out).astype(np.int8)
    growing = np.flatnonzero(out >= 1)  # only where ice grows can the word change (a few levels of a grid)
    if growing.size == 0:
        return out
    w, d, tc, large = (np.broadcast_to(np.asarray(x, dtype=float), shape).ravel()[growing]
                       for x in (lwc_g_m3, mvd_um, temperature_c, large_drop))
    cont = APPENDIX_C["continuous_max"]
    with np.errstate(invalid="ignore"):
        limit = continuous_max_lwc_si(np.clip(d, cont["mvd_um"][0], cont["mvd_um"][1]),
                                      np.clip(tc, cont["temperature_c"][0], cont["temperature_c"][1]))
        above = (w > limit) | (d > cont["mvd_um"][1])
    large = np.nan_to_num(large) > 0
    c = out.ravel()[growing]
    c = np.where(above | large, np.maximum(c, 3), c)
    if icing_certified:
        within = ~above & ~large & np.isfinite(w) & np.isfinite(d) & np.isfinite(tc)
        c = np.where(within, np.minimum(c, 3), c)
    out.ravel()[growing] = c
    return out.astype(np.int8)

"""Cloud microphysics on plain SI arrays: liquid fraction, sub-adiabatic LWC, droplet size.

Every function broadcasts over any shape. The published sources are named in each docstring; the values we
chose without a source are marked "common practice" or "our own choice".
"""

from __future__ import annotations

import numpy as np
from scipy import special

from icing.errors import ConfigError
from icing.physics import thermo
from icing.physics.jit import jitable

__all__ = [
    "HOMOGENEOUS_FREEZING_K", "SUBADIABATIC_FACTOR", "DROPLET_NUMBER", "SPECTRAL_SHAPE_K", "RHO_WATER",
    "liquid_fraction", "check_cold_limit", "adiabatic_fraction", "subadiabatic_factor", "subadiabatic_factors",
    "cloud_kind_factor", "droplet_number_concentration",
    "mean_volume_diameter", "liquid_water_at_mean_volume_diameter", "mvd_to_mean_volume_ratio", "spectral_shape_k",
    "median_volume_diameter",
]

HOMOGENEOUS_FREEZING_K = 224.8  # K: pure water can stay liquid down to about here (homogeneous nucleation)
RHO_WATER = 1000.0  # kg/m3

# Constant ratios of the cloud's liquid water content to the adiabatic value, by cloud kind, for users who pass
# them as stratiform_factor / convective_factor (the default is the depth profile of adiabatic_fraction).
#   stratiform 0.8: non-drizzling stratocumulus are close to adiabatic; Wood (2012, Mon. Wea. Rev. 140,
#     2373-2423, section 3) reviews observed adiabaticity of about 0.6-0.9 (from memory).
#   convective 0.4: cumulus liquid water falls well below adiabatic through entrainment; Warner (1955, Tellus
#     7, 449-457; 1970, J. Atmos. Sci. 27, 1035-1040) found a few tenths of adiabatic a kilometre or more
#     above cloud base (from memory).
SUBADIABATIC_FACTOR = {"stratiform": 0.8, "convective": 0.4}

# Cloud droplet number concentration (per m3).
#   supercooled (the default): about 200 /cm3 in supercooled frontal stratiform cloud, from two published
#     aircraft climatologies of such cloud: Korolev et al. (2003), Q. J. R. Meteorol. Soc. 129, 39-65, found
#     mean volume diameters of 10-12 um in its liquid-phase cloud, and Korolev et al. (2007), Q. J. R. Meteorol.
#     Soc. 133, 1693-1699, an average LWC of 0.14 g/m3 in thick supercooled layers; N = 6 LWC / (pi rho_w D_v^3)
#     gives 155-270 /cm3 for those diameters, about 200 for 11 um (our derivation from their abstracts).
#   marine about 75 /cm3, continental about 290 /cm3: Miles, Verlinde and Clothiaux (2000), J. Atmos. Sci. 57,
#     295-311, averages of (mostly warm) stratiform cloud observations (from memory).
DROPLET_NUMBER = {"supercooled": 200e6, "marine": 75e6, "continental": 290e6}
DEFAULT_AIRMASS = "supercooled"

# Martin, Johnson and Spice (1994), J. Atmos. Sci. 51, 1823-1842: r_v^3 = k r_e^3 with k = 0.80 in maritime
# and 0.67 in continental airmass (from memory). We read k as fixing the shape of a gamma size distribution;
# supercooled frontal cloud takes the continental (broader) shape, our own choice.
SPECTRAL_SHAPE_K = {"supercooled": 0.67, "marine": 0.80, "continental": 0.67}


@jitable
def liquid_fraction(temperature, cold_limit=233.15):
    """Fraction of cloud condensate that is liquid, by temperature (0-1).

    Hu et al. (2010), J. Geophys. Res. 115, D00H34, eqs. (1) and (4), a fit to CALIOP cloud-phase statistics:

    .. math:: f = 1 / (1 + e^{-p(T)}), \\quad p = 7.6725 + 1.0118 T + 0.1422 T^2 + 0.0106 T^3
              + 3.39\\times10^{-4} T^4 + 3.95\\times10^{-6} T^5

    with T in degC, fitted for -40 to 0 degC. Above 0 degC the fraction is 1; colder than ``cold_limit``
    (K) it is 0. NaN temperatures give NaN. Pure arithmetic (the two limits select by multiplying with 0/1
    flags), so this one definition serves floats, numpy arrays and the compiled column kernels.
    """
    tc = np.minimum(np.maximum(temperature - thermo.T0, -40.0), 0.0)
    poly = 7.6725 + tc * (1.0118 + tc * (0.1422 + tc * (0.0106 + tc * (3.39e-4 + tc * 3.95e-6))))
    warm = temperature > thermo.T0
    cold = temperature < cold_limit
    return 1.0 / (1.0 + np.exp(-poly)) * (1.0 - warm) * (1.0 - cold) + warm


def check_cold_limit(cold_limit: float) -> float:
    """Return the cold limit of supercooled liquid (K) after checking it is physically possible.

    Raises
    ------
    ConfigError
        If it is colder than the 224.8 K homogeneous-nucleation limit of pure water, or not below 0 degC.
    """
    c = float(cold_limit)
    if not np.isfinite(c) or c < HOMOGENEOUS_FREEZING_K:
        raise ConfigError(f"cold_limit {c - thermo.T0:.1f} degC is colder than the homogeneous-nucleation limit "
                          f"of pure water ({HOMOGENEOUS_FREEZING_K - thermo.T0:.2f} degC); no supercooled liquid "
                          "exists there")
    if c >= thermo.T0:
        raise ConfigError(f"cold_limit {c - thermo.T0:.1f} degC must be below 0 degC")
    return c


def subadiabatic_factor(cloud_kind, stratiform=None, convective=None):
    """Ratio of cloud LWC to adiabatic LWC for cloud kind codes (1 stratiform, 2 convective, else 0).

    Defaults are :data:`SUBADIABATIC_FACTOR` (stratiform 0.8 after Wood 2012, convective 0.4 after Warner
    1955/1970; both from memory). :func:`cloud_kind_factor` is the same with both factors given.
    """
    return cloud_kind_factor(np.asarray(cloud_kind), *subadiabatic_factors(stratiform, convective))


def subadiabatic_factors(stratiform=None, convective=None):
    """The (stratiform, convective) factors, each :data:`SUBADIABATIC_FACTOR`'s value where not given."""
    return (SUBADIABATIC_FACTOR["stratiform"] if stratiform is None else float(stratiform),
            SUBADIABATIC_FACTOR["convective"] if convective is None else float(convective))


@jitable
@jitable
def adiabatic_fraction(height_above_base):
    """Ratio of a cloud's liquid water content to the adiabatic value at a height above the cloud base (m).

    .. math:: \\mathrm{LWC} / \\mathrm{LWC_{ad}} = 1.239 - 0.145 \\ln \\Delta h, \\quad \\Delta h
              \\text{ in m, held to } [0, 1]

    Karstens, Simmer and Ruprecht (1994), Meteorol. Atmos. Phys. 54, 157-171, their fit to the cloud
    measurements of Warner (1955, Tellus 7, 449-457), used since in retrievals of liquid-water profiles from
    microwave radiometers (coefficients from memory). It is 1 near the base, about 0.57 at 100 m, 0.24 at
    1 km, 0.14 at 2 km and 0 from about 5 km up: entrainment, precipitation and ice take more of the water
    the deeper a parcel rises. Fitted to convective cloud; layer cloud is closer to adiabatic in its lowest
    few hundred metres and often drier higher up, so an LWC from a sounding alone is uncertain by a factor of
    two either way. Floats, arrays and the compiled kernels alike.
    """
    f = 1.239 - 0.145 * np.log(np.maximum(height_above_base, 1.0))
    return np.minimum(np.maximum(f, 0.0), 1.0)


@jitable
def cloud_kind_factor(cloud_kind, stratiform, convective):
    """``stratiform`` for cloud kind 1, ``convective`` for kind 2, 0 otherwise (floats, arrays, compiled)."""
    return stratiform * (cloud_kind == 1) + convective * (cloud_kind == 2)


def droplet_number_concentration(airmass) -> float:
    """Droplet number concentration (per m3) for ``"supercooled"`` (stratiform icing cloud, the default),
    ``"marine"`` or ``"continental"`` air (:data:`DROPLET_NUMBER`), or a number in per cm3."""
    if isinstance(airmass, str):
        try:
            return DROPLET_NUMBER[airmass.lower()]
        except KeyError:
            raise ConfigError(f"airmass {airmass!r} is none of {sorted(DROPLET_NUMBER)}") from None
    n = float(airmass) * 1e6
    if not n > 0:
        raise ConfigError(f"droplet number concentration {airmass!r} /cm3 must be positive")
    return n


def _shape_from_k(k):
    """Gamma shape mu with (mu+1)(mu+2)/(mu+3)^2 = k, the ratio r_v^3 / r_e^3 of a gamma distribution."""
    # (1-k) mu^2 + (3-6k) mu + (2-9k) = 0, positive root.
    a, b, c = 1.0 - k, 3.0 - 6.0 * k, 2.0 - 9.0 * k
    return (-b + np.sqrt(b * b - 4.0 * a * c)) / (2.0 * a)


def spectral_shape_k(airmass=DEFAULT_AIRMASS) -> float:
    """The ratio k = r_v^3 / r_e^3 of the droplet spectrum (:data:`SPECTRAL_SHAPE_K`, Martin et al. 1994) for
    a named airmass; any other airmass (a droplet number) takes the continental value."""
    key = airmass.lower() if isinstance(airmass, str) and airmass.lower() in SPECTRAL_SHAPE_K else "continental"
    return SPECTRAL_SHAPE_K[key]


def mvd_to_mean_volume_ratio(airmass=DEFAULT_AIRMASS):
    """Median volume diameter over mean volume diameter for the airmass's droplet spectrum.

    For a gamma number distribution n(D) ~ D^mu exp(-lambda D) the mass is distributed as D^(mu+3), so the
    median volume diameter is the median of a gamma(mu+4) variable, ``gammaincinv(mu + 4, 0.5) / lambda``,
    while the mean volume diameter is ``(Gamma(mu+4)/Gamma(mu+1))**(1/3) / lambda``. The shape mu follows
    from the Martin et al. (1994) ratio k (0.80 marine, 0.67 continental): mu = 11.3 and 5.4, ratios 1.13
    and 1.24. A string other than the two airmasses takes the continental shape.
    """
    mu = _shape_from_k(spectral_shape_k(airmass))
    mean_vol = np.exp((special.gammaln(mu + 4.0) - special.gammaln(mu + 1.0)) / 3.0)
    return float(special.gammaincinv(mu + 4.0, 0.5) / mean_vol)


@jitable
def mean_volume_diameter(lwc, number_concentration):
    """Mean volume diameter (m) from LWC (kg/m3) and droplet number (per m3).

    .. math:: \\mathrm{LWC} = \\frac{\\pi}{6} \\rho_w N D_v^3

    (definition of the mean volume diameter; e.g. Rogers and Yau 1989, ch. 5). Pure arithmetic: zero LWC
    gives zero; :func:`median_volume_diameter` gives NaN where there is no liquid.
    """
    return np.cbrt(6.0 * lwc / (np.pi * RHO_WATER * number_concentration))


@jitable
def liquid_water_at_mean_volume_diameter(diameter, number_concentration):
    """LWC (kg/m3) at which droplets of ``number_concentration`` per m3 have the mean volume diameter
    ``diameter`` (m): the same definition as :func:`mean_volume_diameter`, solved for the LWC (no cube root,
    for thresholds compared many times a column)."""
    return np.pi / 6.0 * RHO_WATER * number_concentration * diameter**3


def median_volume_diameter(lwc, airmass=DEFAULT_AIRMASS, number_concentration=None):
    """Median volume diameter (m) of the droplet spectrum from LWC (kg/m3) and the airmass.

    The mean volume diameter from the assumed number concentration (:data:`DROPLET_NUMBER`, or
    ``number_concentration`` per m3) times the spectrum-shape ratio of :func:`mvd_to_mean_volume_ratio`.
    Valid for cloud droplets (MVD below about 50 um); NaN where there is no liquid.
    """
    n = droplet_number_concentration(airmass) if number_concentration is None else float(number_concentration)
    w = np.asarray(lwc, dtype=float)
    with np.errstate(invalid="ignore"):
        return np.where(w > 0.0, mean_volume_diameter(w, n) * mvd_to_mean_volume_ratio(airmass), np.nan)

"""Microphysics and the moist adiabat against outside references (each test names its source)."""

import metpy.calc as mpcalc
import numpy as np
import pytest
from metpy.units import units
from numpy.testing import assert_allclose
from scipy import integrate

from icing.errors import ConfigError
from icing.physics import adiabat, microphysics, thermo
from icing.physics.diagnose import diagnose_arrays


@pytest.mark.parametrize(("t_c", "expected"), [(0.0, 1.0), (-10.0, 0.985), (-20.0, 0.753), (-30.0, 0.091)])
def test_liquid_fraction_hu_2010(t_c, expected):
    """Liquid fraction at the check values of the Hu et al. (2010) fit (eq. 4 in eq. 1), DESIGN.md table."""
    got = microphysics.liquid_fraction(t_c + 273.15)
    assert_allclose(got, expected, atol=0.0015 if t_c < 0 else 0.002)


def test_liquid_fraction_limits():
    """Above 0 degC all liquid; colder than the cold limit none (the definition of the cold limit)."""
    assert microphysics.liquid_fraction(280.0) == 1.0
    assert microphysics.liquid_fraction(230.0, cold_limit=233.15) == 0.0
    assert microphysics.liquid_fraction(235.0, cold_limit=233.15) > 0.0
    assert np.isnan(microphysics.liquid_fraction(np.nan))


def test_cold_limit_refused_below_homogeneous_nucleation():
    """Pure water cannot stay liquid below about 224.8 K (homogeneous nucleation; DESIGN.md, facts of the trade)."""
    with pytest.raises(ConfigError, match="homogeneous"):
        microphysics.check_cold_limit(224.0)
    assert microphysics.check_cold_limit(224.8) == 224.8
    with pytest.raises(ConfigError):
        microphysics.check_cold_limit(275.0)
    p = np.array([[100000.0, 90000.0]])
    with pytest.raises(ConfigError):
        diagnose_arrays(p, p * 0 + 270, p * 0 + 265, np.array([[0.0, 900.0]]), cold_limit=220.0)


@pytest.mark.parametrize(("t_c", "p_hpa", "gradient"), [(10.0, 950.0, 2.1), (0.0, 900.0, 1.6), (-10.0, 700.0, 1.0)])
def test_adiabatic_lwc_gradient(t_c, p_hpa, gradient):
    """Adiabatic LWC gradient in the first 200 m above cloud base, g/m3 per km, against the moist-adiabatic
    hand estimates of DESIGN.md (+-10 %)."""
    p0, t0 = p_hpa * 100.0, t_c + 273.15
    p = p0 * np.exp(-np.array([0.0, 100.0, 200.0]) * thermo.G0 / (thermo.RD * t0))
    t_env = np.full(3, t0)  # environment temperature only sets the base; the parcel follows the adiabat
    lwc, tp = adiabat.adiabatic_lwc_from_bases(p[None], t_env[None], np.ones((1, 3), bool))
    z = thermo.hypsometric_heights(p, tp[0])
    slope = np.polyfit(z, lwc[0] * 1000.0, 1)[0] * 1000.0
    assert_allclose(slope, gradient, rtol=0.10)


@pytest.mark.parametrize(("p_base", "t_base"), [(950.0, 12.0), (900.0, 0.0), (800.0, -8.0), (700.0, -15.0)])
def test_moist_adiabat_against_metpy(p_base, t_base):
    """Parcel temperature along the moist adiabat on the same base and pressures as MetPy's moist_lapse."""
    p = np.linspace(p_base, p_base - 400.0, 17)
    ref = mpcalc.moist_lapse(p * units.hPa, t_base * units.degC).to("K").magnitude
    got = adiabat.moist_adiabat_temperature(p * 100.0, p_base * 100.0, t_base + 273.15)
    assert_allclose(got, ref, atol=0.05)


@pytest.mark.parametrize(("p_base", "t_base"), [(1000.0, 25.0), (850.0, 5.0), (700.0, -12.0), (500.0, -30.0)])
def test_tabulated_parcel_against_metpy(p_base, t_base):
    """The parcel the diagnostics follow (tabulated moist adiabats) against MetPy's moist_lapse, same base."""
    p = np.linspace(p_base, 250.0, 25)
    ref = mpcalc.moist_lapse(p * units.hPa, t_base * units.degC).to("K").magnitude
    _, tp = adiabat.adiabatic_lwc_from_bases((p * 100.0)[None], np.full((1, p.size), t_base + 273.15),
                                             np.ones((1, p.size), bool))
    assert_allclose(tp[0], ref, atol=0.05)


def test_moist_adiabat_coarse_levels_against_metpy():
    """Mandatory levels only (steps up to 200 hPa): substeps keep the adiabat within 0.06 K of MetPy."""
    p = np.array([1000.0, 925.0, 850.0, 700.0, 500.0, 400.0, 300.0, 250.0])
    ref = mpcalc.moist_lapse(p * units.hPa, 20.0 * units.degC).to("K").magnitude
    got = adiabat.moist_adiabat_temperature(p * 100.0, 100000.0, 293.15)
    assert_allclose(got, ref, atol=0.06)


def test_adiabatic_lwc_against_metpy():
    """Adiabatic LWC from a base: MetPy's moist_lapse, saturation_mixing_ratio and density give the same."""
    p = np.linspace(900.0, 600.0, 13)
    t_base = -2.0
    tp = mpcalc.moist_lapse(p * units.hPa, t_base * units.degC)
    rs = mpcalc.saturation_mixing_ratio(p * units.hPa, tp).to("kg/kg").magnitude
    rs0 = rs[0]
    e = mpcalc.saturation_vapor_pressure(tp)
    rho_dry = ((p * units.hPa - e) / (units.Quantity(287.04749, "J/kg/K") * tp)).to("kg/m^3").magnitude
    ref = rho_dry * (rs0 - rs)
    lwc, _ = adiabat.adiabatic_lwc_from_bases((p * 100.0)[None], np.full((1, 13), t_base + 273.15),
                                              np.ones((1, 13), bool))
    assert_allclose(lwc[0], ref, rtol=0.01, atol=2e-6)


def test_adiabatic_lwc_restarts_at_each_base():
    """Each cloud layer starts from zero liquid at its own base (definition of the adiabatic profile)."""
    p = np.linspace(95000.0, 60000.0, 15)[None]
    t = np.linspace(275.0, 255.0, 15)[None]
    cloud = np.zeros((1, 15), bool)
    cloud[0, 2:6] = True
    cloud[0, 9:13] = True
    lwc, _ = adiabat.adiabatic_lwc_from_bases(p, t, cloud)
    assert lwc[0, 2] == 0.0 and lwc[0, 9] == 0.0
    assert np.all(np.diff(lwc[0, 2:6]) > 0) and np.all(np.diff(lwc[0, 9:13]) > 0)
    assert np.all(lwc[0, ~cloud[0]] == 0.0)


def _gamma_moments(mu):
    """Mean volume and median volume diameters of a gamma spectrum with lambda = 1, by numerical integration
    (scipy.integrate), independent of the closed forms used in the library."""
    n = lambda d: d**mu * np.exp(-d)  # noqa: E731
    m0 = integrate.quad(n, 0, np.inf)[0]
    m3 = integrate.quad(lambda d: d**3 * n(d), 0, np.inf)[0]
    m2 = integrate.quad(lambda d: d**2 * n(d), 0, np.inf)[0]
    dv = (m3 / m0) ** (1 / 3)
    d_eff = m3 / m2
    half = lambda x: integrate.quad(lambda d: d**3 * n(d), 0, x)[0] - 0.5 * m3  # noqa: E731
    from scipy.optimize import brentq

    mvd = brentq(half, 1e-3, 200.0)
    return dv, d_eff, mvd


@pytest.mark.parametrize("airmass", ["marine", "continental"])
def test_mvd_shape_factor(airmass):
    """The spectrum shape reproduces the Martin et al. (1994) ratio k = r_v^3 / r_e^3 (0.80 marine, 0.67
    continental, from memory), and MVD / D_v comes out of a numerical integration of that gamma spectrum."""
    mu = microphysics._shape_from_k(microphysics.SPECTRAL_SHAPE_K[airmass])
    dv, d_eff, mvd = _gamma_moments(mu)
    assert_allclose((dv / d_eff) ** 3, microphysics.SPECTRAL_SHAPE_K[airmass], rtol=1e-6)
    assert_allclose(microphysics.mvd_to_mean_volume_ratio(airmass), mvd / dv, rtol=1e-4)


def test_mvd_from_lwc_and_number():
    """LWC = (pi/6) rho_w N Dv^3 (DESIGN.md) with N 290 /cm3 continental and 75 /cm3 marine (Miles et al.
    2000, from memory): the diameter gives back the LWC, and marine drops are larger."""
    lwc = 0.3e-3  # kg/m3
    dv = microphysics.mean_volume_diameter(lwc, 290e6)
    assert_allclose(np.pi / 6 * 1000.0 * 290e6 * dv**3, lwc, rtol=1e-12)
    cont = microphysics.median_volume_diameter(lwc, "continental")
    mar = microphysics.median_volume_diameter(lwc, "marine")
    # Hand value: Dv = (6 * 3e-4 / (pi * 1000 * 2.9e8))**(1/3) = 12.6 um; MVD = 1.24 Dv.
    assert_allclose(cont * 1e6, (6 * 3e-4 / (np.pi * 1000 * 2.9e8)) ** (1 / 3) * 1e6 * 1.235, rtol=0.01)
    assert mar > cont
    assert np.isnan(microphysics.median_volume_diameter(0.0))
    # the same definition solved for the LWC (used for the warm-rain threshold) gives the LWC back
    assert_allclose(microphysics.liquid_water_at_mean_volume_diameter(dv, 290e6), lwc, rtol=1e-12)


def test_subadiabatic_factors():
    """Factors by kind: stratiform 0.8 (Wood 2012 review, from memory) above convective 0.4 (Warner 1955,
    1970, from memory); no cloud 0."""
    assert_allclose(microphysics.subadiabatic_factor(np.array([0, 1, 2])), [0.0, 0.8, 0.4])
    assert_allclose(microphysics.subadiabatic_factor(np.array([1, 2]), 0.6, 0.3), [0.6, 0.3])
    with pytest.raises(ConfigError):
        microphysics.droplet_number_concentration("lunar")


def test_bolton_vapour_pressure_against_metpy():
    """Bolton (1980) eq. 10, used in the moist-adiabat loop, against MetPy's saturation_vapor_pressure
    (Ambaum 2020) from -40 to 35 degC: within 0.5 % (Bolton states 0.1 % against the formulation he fitted;
    MetPy's differs from it by a few tenths of a per cent, which is what the 0.5 % allows)."""
    t = np.arange(-40.0, 35.1, 5.0)
    ref = mpcalc.saturation_vapor_pressure(t * units.degC).to("Pa").magnitude
    got = adiabat.saturation_vapor_pressure_bolton(t + 273.15)
    assert_allclose(got, ref, rtol=5e-3)


def test_adiabatic_fraction_follows_the_published_profile():
    """Karstens, Simmer and Ruprecht (1994) fit to Warner's (1955) cloud measurements, LWC/LWC_ad =
    1.239 - 0.145 ln(dh / 1 m) (coefficients from memory), recomputed by hand: 0.571 at 100 m, 0.237 at 1 km,
    0.137 at 2 km; held to 1 near the base and to 0 from exp(1.239 / 0.145) = 5.2 km up; never rising with
    height."""
    dh = np.array([0.0, 1.0, 100.0, 1000.0, 2000.0, 5000.0, 6000.0])
    got = microphysics.adiabatic_fraction(dh)
    hand = [1.0, 1.0, 1.239 - 0.145 * 4.60517, 1.239 - 0.145 * 6.90776, 1.239 - 0.145 * 7.60090,
            1.239 - 0.145 * 8.51719, 0.0]
    assert_allclose(got, hand, atol=1e-4)
    assert_allclose(got[2:5], [0.571, 0.237, 0.137], atol=1e-3)
    fine = microphysics.adiabatic_fraction(np.linspace(0.0, 8000.0, 801))
    assert np.all(np.diff(fine) <= 0.0)
    assert microphysics.adiabatic_fraction(1000.0) == pytest.approx(got[3])  # floats as arrays


def test_default_droplet_number_matches_supercooled_stratiform_measurements():
    """The default droplet number (200 per cm3, "supercooled") against two aircraft climatologies of supercooled
    frontal stratiform cloud: at the average LWC of thick supercooled layers, 0.14 g/m3 (Korolev et al. 2007,
    Q. J. R. Meteorol. Soc. 133, 1693-1699), the mean volume diameter lies within the 10-12 um measured in
    liquid-phase cloud (Korolev et al. 2003, Q. J. R. Meteorol. Soc. 129, 39-65; both from their abstracts),
    while the warm-stratus continental value (290) falls below that range and the marine one (75) above it; the
    median volume diameter lies within the 12-25 um that is common in stratiform icing cloud (DESIGN.md, a fact
    of the trade)."""
    lwc = 0.14e-3  # kg/m3
    dv = {k: microphysics.mean_volume_diameter(lwc, microphysics.droplet_number_concentration(k)) * 1e6
          for k in ("supercooled", "continental", "marine")}
    assert microphysics.DEFAULT_AIRMASS == "supercooled"
    assert 10.0 <= dv["supercooled"] <= 12.0
    assert dv["continental"] < 10.0 and dv["marine"] > 12.0
    assert 12.0 <= float(microphysics.median_volume_diameter(lwc)) * 1e6 <= 25.0

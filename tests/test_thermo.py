"""Thermodynamics against published tables and against MetPy."""

import metpy.calc as mpcalc
import numpy as np
import pytest
from metpy.units import units
from numpy.testing import assert_allclose

from icing.physics import thermo

# Goff-Gratch values as tabulated in the Smithsonian Meteorological Tables (hPa), taken from memory via
# ../shared/DESIGN.md; Murphy and Koop (2005) agree with them to about 1e-3 relative.
GOFF_GRATCH = [  # degC, over water, over ice
    (0.0, 6.1078, 6.1071),
    (-10.0, 2.8627, 2.5989),
    (-20.0, 1.2540, 1.0324),
    (-30.0, 0.5088, 0.3801),
    (-40.0, 0.1891, 0.1284),
]


@pytest.mark.parametrize("t_c, ew, ei", GOFF_GRATCH)
def test_saturation_vapor_pressure_against_goff_gratch(t_c, ew, ei):
    """Against the Goff-Gratch / Smithsonian Meteorological Tables values (from memory)."""
    t = t_c + 273.15
    assert_allclose(thermo.saturation_vapor_pressure_water(t) / 100.0, ew, rtol=2e-3)
    assert_allclose(thermo.saturation_vapor_pressure_ice(t) / 100.0, ei, rtol=1e-3)


def test_saturation_vapor_pressure_water_against_metpy():
    """Against MetPy's saturation_vapor_pressure (Ambaum 2020) over 233-313 K."""
    t = np.linspace(233.15, 313.15, 81)
    ref = mpcalc.saturation_vapor_pressure(t * units.K).m_as("Pa")
    # Ambaum's closed form assumes constant heat capacities; it departs from Murphy-Koop by ~0.4 % at 233 K.
    assert_allclose(thermo.saturation_vapor_pressure_water(t), ref, rtol=5e-3)


def test_saturation_vapor_pressure_ice_against_metpy():
    """Against MetPy's saturation_vapor_pressure(phase='solid') over 213-273 K."""
    t = np.linspace(213.15, 273.15, 61)
    ref = mpcalc.saturation_vapor_pressure(t * units.K, phase="solid").m_as("Pa")
    # Same closed form over ice: about 1 % from Murphy-Koop at 213 K, closer near 0 degC.
    assert_allclose(thermo.saturation_vapor_pressure_ice(t), ref, rtol=1.2e-2)


def test_ice_below_water_below_freezing():
    """Over ice the saturation pressure is lower than over supercooled water (thermodynamics of the trade)."""
    t = np.linspace(230.0, 272.0, 50)
    assert np.all(thermo.saturation_vapor_pressure_ice(t) < thermo.saturation_vapor_pressure_water(t))


def test_relative_humidity_tables_reproduce_murphy_koop():
    """The tabulated saturation pressures behind relative humidity reproduce Murphy and Koop (2005) eqs. (7) and
    (10), evaluated directly, to 1e-8 relative from 150 to 340 K: inside the tables (cubic interpolation) and
    outside them (the formulas). NaN gives NaN."""
    rng = np.random.default_rng(11)
    t = np.concatenate([rng.uniform(150.0, 340.0, 200_000), [160.0, 330.0 - 1e-9, 330.0, 159.99]])
    td = np.concatenate([t[:100_000], t[100_000:] - rng.uniform(0.0, 60.0, t.size - 100_000)])
    ew_td = np.exp(thermo.ln_saturation_vapor_pressure_water(td, np.log(td)))
    rw = ew_td / np.exp(thermo.ln_saturation_vapor_pressure_water(t, np.log(t)))
    ri = ew_td / np.exp(thermo.ln_saturation_vapor_pressure_ice(t, np.log(t)))
    assert_allclose(thermo.relative_humidity_water(t, td), rw, rtol=1e-8)
    assert_allclose(thermo.relative_humidity_ice(t, td), ri, rtol=1e-8)
    assert np.isnan(thermo.relative_humidity_water(np.nan, 250.0))
    assert np.isnan(thermo.relative_humidity_ice(260.0, np.nan))


def test_relative_humidity_and_dewpoint_against_metpy():
    """RH from dewpoint and dewpoint from RH against MetPy on a grid of values."""
    t = np.array([-35.0, -20.0, -5.0, 0.0, 10.0, 25.0]) + 273.15
    td = t - np.array([0.0, 1.0, 3.0, 8.0, 15.0, 20.0])
    rh = thermo.relative_humidity_water(t, td)
    ref = mpcalc.relative_humidity_from_dewpoint(t * units.K, td * units.K).m_as("")
    assert_allclose(rh, ref, rtol=3e-3)
    td_back = thermo.dewpoint_from_relative_humidity(t, rh)
    assert_allclose(td_back, td, atol=1e-6)  # our own inverse is exact
    ref_td = mpcalc.dewpoint_from_relative_humidity(t * units.K, rh * units("")).m_as("K")
    assert_allclose(td_back, ref_td, atol=0.15)


def test_saturation_mixing_ratio_against_metpy():
    """Saturation mixing ratio against MetPy at several pressures and temperatures."""
    p = np.array([1000.0, 850.0, 700.0, 500.0]) * 100
    t = np.array([15.0, 5.0, -5.0, -20.0]) + 273.15
    ref = mpcalc.saturation_mixing_ratio(p * units.Pa, t * units.K).m_as("")
    assert_allclose(thermo.saturation_mixing_ratio(p, t), ref, rtol=5e-3)


# US Standard Atmosphere 1976: geopotential km -> (K, Pa), from its tables (values in ../shared/DESIGN.md).
US1976 = [(0, 288.15, 101325), (1, 281.65, 89875), (2, 275.15, 79495), (3, 268.65, 70109), (5, 255.65, 54020),
          (8, 236.15, 35600), (10, 223.15, 26436), (11, 216.65, 22632)]


@pytest.mark.parametrize("km, t_k, p_pa", US1976)
def test_standard_atmosphere_against_us1976(km, t_k, p_pa):
    """Against the US Standard Atmosphere 1976 table."""
    assert_allclose(thermo.standard_atmosphere_temperature(km * 1000.0), t_k, atol=0.01)
    assert_allclose(thermo.standard_atmosphere_pressure(km * 1000.0), p_pa, rtol=2e-5)
    assert_allclose(thermo.standard_atmosphere_height(p_pa), km * 1000.0, atol=2.0)


def test_standard_atmosphere_against_metpy():
    """Against MetPy's height_to_pressure_std (the 1976 troposphere) below 11 km.

    MetPy takes the sea-level temperature as 288 K rather than 288.15 K, hence the 1e-3 tolerance.
    """
    h = np.linspace(0, 10500, 22)
    ref = mpcalc.height_to_pressure_std(h * units.m).m_as("Pa")
    assert_allclose(thermo.standard_atmosphere_pressure(h), ref, rtol=1.5e-3)


@pytest.mark.parametrize("fl, hpa", [(50, 843.1), (100, 696.8), (180, 506.0)])
def test_flight_level_pressure(fl, hpa):
    """FL050, FL100, FL180 against the ICAO / US 1976 standard atmosphere tables (843.1, 696.8, 506.0 hPa)."""
    assert_allclose(thermo.flight_level_to_pressure(fl) / 100.0, hpa, atol=0.1)
    assert_allclose(thermo.pressure_altitude_ft(hpa * 100.0), fl * 100.0, atol=5.0)


def test_hypsometric_thickness_against_metpy():
    """Layer thickness by the hypsometric equation against MetPy's thickness_hydrostatic."""
    p = np.array([1000.0, 925.0, 850.0, 700.0, 500.0]) * 100
    t = np.array([12.0, 8.0, 4.0, -6.0, -22.0]) + 273.15
    td = t - np.array([2.0, 2.0, 3.0, 6.0, 10.0])
    z = thermo.hypsometric_heights(p, t, td)
    w = mpcalc.mixing_ratio_from_relative_humidity(p * units.Pa, t * units.K,
                                                   mpcalc.relative_humidity_from_dewpoint(t * units.K,
                                                                                          td * units.K))
    ref = mpcalc.thickness_hydrostatic(p * units.Pa, t * units.K, mixing_ratio=w).m_as("m")
    assert_allclose(z[-1], ref, rtol=2e-3)


def test_vectorised_over_leading_dims():
    """Functions broadcast over leading dimensions (level last)."""
    p = np.tile(np.array([1000.0, 850.0, 700.0]) * 100, (4, 3, 1))
    t = np.full_like(p, 270.0)
    z = thermo.hypsometric_heights(p, t, anchor_height=np.zeros((4, 3)))
    assert z.shape == (4, 3, 3)
    x = thermo.height_at_pressure(np.full((4, 3, 1), 800e2), p, z)
    assert x.shape == (4, 3, 1) and np.all(np.isfinite(x))


def test_interp_outside_range_is_nan():
    """Interpolation never extrapolates: outside the profile the answer is unknown (NaN)."""
    out = thermo.interp_last_axis(np.array([-1.0, 0.5, 3.0]), np.array([0.0, 1.0, 2.0]), np.array([0.0, 1.0, 4.0]))
    assert np.isnan(out[0]) and np.isnan(out[2]) and out[1] == pytest.approx(0.5)


def test_speed_of_sound_and_calibrated_to_true_airspeed():
    """Speed of sound sqrt(gamma R T): 340.29 m/s at 288.15 K and 295.07 m/s at 216.65 K (US Standard
    Atmosphere 1976 tables, from memory). Calibrated airspeed equals true airspeed at sea level in the standard
    atmosphere (the definition of calibrated airspeed); 250 kt calibrated is about 288-289 kt true at 10,000 ft
    (flight-computer tables, from memory)."""
    assert_allclose(thermo.speed_of_sound(288.15), 340.29, atol=0.01)
    assert_allclose(thermo.speed_of_sound(216.65), 295.07, atol=0.01)
    kt = 1852.0 / 3600.0
    assert_allclose(thermo.true_airspeed_from_calibrated(250 * kt, 101325.0, 288.15), 250 * kt, rtol=1e-12)
    p10 = thermo.pressure_from_pressure_altitude_ft(10000.0)
    t10 = thermo.standard_atmosphere_temperature(10000.0 * 0.3048)
    assert_allclose(thermo.true_airspeed_from_calibrated(250 * kt, p10, t10) / kt, 288.5, atol=1.0)

"""Tests of icing.physics.envelopes against 14 CFR Part 25 Appendices C and O."""

import numpy as np
import pytest
from numpy.testing import assert_allclose

from icing.errors import UnitError
from icing.physics import envelopes as env
from icing.units import ureg

# FAA AC 20-73A Table 6 (after NACA TN-1855): Appendix C figure 1, continuous maximum, 17.4 nmi, g/m3.
CONTINUOUS_MAX_POINTS = [
    (15, 0, 0.80), (15, -10, 0.60), (15, -20, 0.30), (15, -30, 0.20),
    (25, 0, 0.50), (25, -10, 0.30), (25, -20, 0.15), (25, -30, 0.10),
    (40, 0, 0.15), (40, -10, 0.10), (40, -20, 0.06), (40, -30, 0.04),
]


@pytest.mark.parametrize(("mvd", "tc", "lwc"), CONTINUOUS_MAX_POINTS)
def test_continuous_max_points(mvd, tc, lwc):
    """14 CFR 25 Appendix C figure 1 points (FAA AC 20-73A Table 6; NACA TN-1855)."""
    got = env.appendix_c_continuous_max_lwc(mvd * ureg.micrometer, tc * ureg.degC)
    assert_allclose(got.m_as("g/m^3"), lwc, rtol=1e-9)


@pytest.mark.parametrize("temperature", [-10 * ureg.degC, 263.15 * ureg.K, 14.0 * ureg.degF])
def test_continuous_max_unit_invariance(temperature):
    """-10 deg C = 263.15 K = 14 deg F; 25 um = 0.025 mm: Appendix C figure 1 gives 0.30 g/m3."""
    got = env.appendix_c_continuous_max_lwc(0.025 * ureg.mm, temperature)
    assert_allclose(got.m_as("kg/m^3"), 0.30e-3, rtol=1e-9)


def test_continuous_max_between_curves_is_bracketed():
    """Appendix C figure 1: LWC falls with MVD and rises with temperature, so interpolated values lie between
    the tabulated neighbours; nothing is given outside 15-40 um or -30 to 0 deg C."""
    mid = env.continuous_max_lwc_si(20.0, -5.0)
    assert 0.30 < mid < 0.80
    assert env.continuous_max_lwc_si(20.0, 0.0) > mid > env.continuous_max_lwc_si(20.0, -10.0)
    grid = env.continuous_max_lwc_si(np.linspace(15, 40, 26)[None, :], np.linspace(-30, 0, 31)[:, None])
    assert np.all(np.diff(grid, axis=1) < 0) and np.all(np.diff(grid, axis=0) > 0)
    assert np.isnan(env.continuous_max_lwc_si(45.0, -10.0)) and np.isnan(env.continuous_max_lwc_si(20.0, -35.0))


def test_continuous_max_wrong_unit():
    with pytest.raises(UnitError, match="mvd"):
        env.appendix_c_continuous_max_lwc(20 * ureg.K, -10 * ureg.degC)
    with pytest.raises(UnitError, match="temperature"):
        env.appendix_c_continuous_max_lwc(20 * ureg.um, -10)


def test_appendix_c_reference_values():
    """14 CFR 25 Appendix C rule text: reference extents 17.4 and 2.6 nmi; takeoff maximum 0.35 g/m3, 20 um,
    -9 deg C to 1,500 ft; continuous maximum sea level to 22,000 ft, intermittent 4,000-22,000 ft (figure
    captions, from memory)."""
    assert env.APPENDIX_C["continuous_max"]["reference_extent_nmi"] == 17.4
    assert env.APPENDIX_C["intermittent_max"]["reference_extent_nmi"] == 2.6
    assert env.APPENDIX_C["takeoff_max"] == {"lwc_g_m3": 0.35, "mvd_um": 20.0, "temperature_c": -9.0,
                                             "height_agl_ft": 1500.0}
    assert env.APPENDIX_C["continuous_max"]["altitude_ft"] == (0.0, 22000.0)
    assert env.APPENDIX_C["intermittent_max"]["altitude_ft"] == (4000.0, 22000.0)


def test_appendix_c_status():
    """Appendix C figure 1 and its 0-22,000 ft range: within at or under the curve, beyond over it, beyond for
    drops over 40 um, colder than -30 deg C or above 22,000 ft; n/a without supercooled liquid; NaN unknown."""
    cases = [
        # lwc, mvd, degC, ft, expected
        (0.79, 15, -0.01, 5000, "within"),  # just under 0.80 (0 deg C itself is not supercooled)
        (0.81, 15, -0.01, 5000, "beyond"),
        (0.29, 25, -10, 10000, "within"),
        (0.31, 25, -10, 10000, "beyond"),
        (0.05, 45, -10, 10000, "beyond"),  # larger drops than figure 1
        (0.05, 20, -35, 10000, "beyond"),  # colder than figure 1
        (0.05, 20, -10, 23000, "beyond"),  # above 22,000 ft
        (0.05, 20, -10, -300, "within"),  # below sea level counts as sea level
        (0.0, 20, -10, 10000, "n/a"),
        (0.5, 20, 3, 10000, "n/a"),
        (np.nan, 20, -10, 10000, "unknown"),
        (0.1, np.nan, -10, 10000, "unknown"),
        (0.1, 20, np.nan, 10000, "unknown"),
        (0.1, 20, -10, np.nan, "unknown"),
    ]
    w, d, t, a, want = (list(c) for c in zip(*cases, strict=True))
    assert list(env.appendix_c_status(w, d, t, a)) == want


def test_appendix_c_status_broadcasts():
    out = env.appendix_c_status(np.full((2, 3), 0.12), 20.0, np.array([-5.0, -15.0, -25.0]), 8000.0)
    assert out.shape == (2, 3) and list(out[0]) == ["within", "within", "within"]


def test_appendix_o_status():
    """14 CFR 25 Appendix O: freezing drizzle 0-22,000 ft, freezing rain 0-12,000 ft pressure altitude."""
    codes = [0, 1, 1, 1, 2, 2, 2, np.nan, 7, 1]
    alt = [5000, 0, 22000, 22100, 12000, 12100, 5000, 5000, 5000, np.nan]
    want = ["n/a", "within", "within", "beyond", "within", "beyond", "within", "unknown", "unknown", "unknown"]
    assert list(env.appendix_o_status(codes, alt)) == want
    assert list(env.appendix_o_status(["none", "drizzle", "rain"], [1000, 15000, 15000])) == ["n/a", "within",
                                                                                              "beyond"]


def test_appendix_o_mvd_split_and_drop_sizes():
    """14 CFR 25 Appendix O: distributions split at MVD 40 um; drizzle largest drops 100-500 um, rain > 500 um."""
    assert list(env.appendix_o_subset([20.0, 39.9, 40.0, 120.0, np.nan])) == ["mvd<40", "mvd<40", "mvd>40",
                                                                              "mvd>40", "unknown"]
    assert env.APPENDIX_O["freezing_drizzle"]["largest_drop_um"] == (100.0, 500.0)
    assert env.APPENDIX_O["freezing_rain"]["largest_drop_um"][0] == 500.0


def test_words_within_the_continuous_maximum_read_at_most_moderate_for_certified_aircraft():
    """The trade defines severe by effect: icing the ice protection cannot control (US Aeronautical Information
    Manual, ch. 7); ice protection of aircraft certified for icing is designed for the Appendix C envelopes
    (14 CFR 25.1419). At 0.3 g/m3, 15.5 um, -16 degC (inside the continuous maximum: AC 20-73A Table 6 gives
    0.60 at -10 and 0.30 at -20 degC for 15 um) the regional-jet preset's rate on its reference body is severe,
    yet the word is moderate for it, and stays severe for an aircraft not certified for icing."""
    from icing.flight.aircraft import get_aircraft
    from icing.physics.accretion import accretion_core, intensity_code

    jet = get_aircraft("regional-jet")
    rate = accretion_core(0.3e-3, 15.5e-6, jet.speed_ms("cruise"), 273.15 - 16.0, 65000.0,
                          jet.body_diameter_m)["thickness_rate"]
    code = intensity_code(rate)
    assert int(code) == 4  # severe by the rate scale alone
    assert env.appendix_c_status(0.3, 15.5, -16.0, 12000.0) == "within"
    assert int(env.intensity_for_conditions(code, 0.3, 15.5, -16.0, 0, icing_certified=True)) == 3
    assert int(env.intensity_for_conditions(code, 0.3, 15.5, -16.0, 0, icing_certified=False)) == 4


@pytest.mark.parametrize(("lwc", "mvd", "large"), [(0.7, 15.0, 0), (0.2, 45.0, 0), (0.2, 20.0, 1), (0.2, 20.0, 2)])
def test_beyond_the_envelope_or_with_large_drops_at_least_moderate(lwc, mvd, large):
    """Above the continuous maximum (0.60 g/m3 at -10 degC, 15 um: AC 20-73A Table 6), with drops beyond its
    40 um, or with supercooled large drops (14 CFR Part 25 Appendix O), ice protection designed for Appendix C
    may not cope: a growing accretion reads at least moderate; unknown stays unknown. Without cloud water none
    stays none, but supercooled large drops below 0 degC ice by themselves (freezing drizzle and freezing rain,
    Appendix O; freezing rain falls through clear air): there none reads moderate too, and above 0 degC it
    stays none."""
    for certified in (True, False):
        assert int(env.intensity_for_conditions(1, lwc, mvd, -10.0, large, certified)) == 3
        assert int(env.intensity_for_conditions(4, lwc, mvd, -10.0, large, certified)) == 4
        assert int(env.intensity_for_conditions(0, lwc, mvd, -10.0, large, certified)) == (3 if large else 0)
        assert int(env.intensity_for_conditions(0, lwc, mvd, 2.0, large, certified)) == 0
        assert int(env.intensity_for_conditions(-1, lwc, mvd, -10.0, large, certified)) == -1


@pytest.mark.parametrize("preset", ["light-piston", "turboprop", "regional-jet"])
def test_words_never_fall_as_lwc_rises(preset):
    """A word of the trade never falls as the liquid water rises (the AIM's words grow with the hazard), for
    every preset from 0.01 to 1.5 g/m3 at -10 degC and 20 um: the rate grows with LWC (Makkonen 2000) and
    leaving the envelope only lifts the cap and sets the floor."""
    from icing.flight.aircraft import get_aircraft
    from icing.physics.accretion import accretion_core, intensity_code

    ac = get_aircraft(preset)
    lwc = np.linspace(0.01, 1.5, 300)
    rate = accretion_core(lwc * 1e-3, np.full(lwc.size, 20e-6), ac.speed_ms("cruise"), np.full(lwc.size, 263.15),
                          np.full(lwc.size, 70000.0), ac.body_diameter_m)["thickness_rate"]
    words = env.intensity_for_conditions(intensity_code(rate), lwc, 20.0, -10.0, 0, ac.icing_certified)
    assert np.all(np.diff(words.astype(int)) >= 0)
    grows = (rate > 0) & (lwc > 0.5)  # above the 0.43 g/m3 continuous maximum at -10 degC, 20 um (interpolated)
    assert np.all(words[grows] >= 3)  # (a fast jet's leading edge may stay above 0 degC: no ice, no word)

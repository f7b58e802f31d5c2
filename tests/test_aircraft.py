"""Tests of icing.flight.aircraft: presets, TOML files, overrides and typed errors. The presets are invented generic
classes, so no physics is checked against them; unit conversions are checked against the exact definitions
(1 kt = 1852/3600 m/s, 1 ft = 0.3048 m)."""

import dataclasses

import numpy as np
import pytest

from icing.errors import ConfigError, UnitError
from icing.flight.aircraft import PRESETS, Aircraft, get_aircraft
from icing.units import ureg


def test_presets_exist_and_are_valid():
    assert set(PRESETS) == {"light-piston", "turboprop", "regional-jet"}
    for name, ac in PRESETS.items():
        assert ac.name == name and "representative" in ac.description
        assert ac.tas_climb_kt < ac.tas_cruise_kt
        assert 0.002 <= ac.body_diameter_m <= 2.0
    assert get_aircraft("turboprop") is PRESETS["turboprop"]


def test_aircraft_is_frozen():
    with pytest.raises(dataclasses.FrozenInstanceError):
        PRESETS["turboprop"].tas_cruise_kt = 100.0


def test_speed_ms_exact_knot():
    """1 kt = 1852/3600 m/s exactly (international nautical mile)."""
    ac = get_aircraft("turboprop", tas_cruise_kt=180)
    assert ac.speed_ms("cruise") == pytest.approx(92.6, rel=1e-12)
    with pytest.raises(ConfigError, match="phase"):
        ac.speed_ms("taxi")


def test_overrides_and_quantities():
    """A Quantity is converted to the field's unit: 100 m/s = 194.384 kt; 10 m/s = 1968.5 ft/min."""
    ac = get_aircraft("regional-jet", tas_cruise_kt=100 * ureg("m/s"), climb_rate_fpm=10 * ureg("m/s"))
    assert ac.tas_cruise_kt == pytest.approx(100 * 3600 / 1852, rel=1e-9)
    assert ac.climb_rate_fpm == pytest.approx(10 * 60 / 0.3048, rel=1e-9)
    assert ac.tas_climb_kt == PRESETS["regional-jet"].tas_climb_kt
    assert get_aircraft(ac) is ac


@pytest.mark.parametrize(("field", "value", "error"), [
    ("tas_cruise_kt", -5.0, ConfigError),
    ("tas_cruise_kt", float("nan"), ConfigError),
    ("tas_cruise_kt", 5000.0, ConfigError),
    ("tas_cruise_kt", "fast", ConfigError),
    ("tas_cruise_kt", True, ConfigError),
    ("body_diameter_m", 0.0, ConfigError),
    ("climb_rate_fpm", 0.0, ConfigError),
    ("name", "  ", ConfigError),
    ("tas_cruise_kt", 200 * ureg.m, UnitError),
])
def test_nonsense_is_rejected_naming_the_field(field, value, error):
    with pytest.raises(error, match=field):
        get_aircraft("turboprop", **{field: value})


def test_unknown_preset_and_override():
    with pytest.raises(ConfigError, match="presets are"):
        get_aircraft("jumbo")
    with pytest.raises(ConfigError, match="wingspan"):
        get_aircraft("turboprop", wingspan=30)
    with pytest.raises(ConfigError):
        get_aircraft(42)


def test_toml_with_base(tmp_path):
    path = tmp_path / "survey.toml"
    path.write_text('base = "turboprop"\nname = "survey"\ntas_cruise_kt = 210\n')
    ac = get_aircraft(path)
    assert ac.name == "survey" and ac.tas_cruise_kt == 210.0
    assert ac.body_diameter_m == PRESETS["turboprop"].body_diameter_m
    assert get_aircraft(str(path), tas_cruise_kt=220).tas_cruise_kt == 220.0


def test_toml_chain_and_full(tmp_path):
    full = tmp_path / "full.toml"
    full.write_text("\n".join([
        'name = "full"', 'description = "all keys"', "tas_climb_kt = 90", "tas_cruise_kt = 120",
        "tas_descent_kt = 130", "climb_rate_fpm = 600", "descent_rate_fpm = 500", "body_diameter_m = 0.04"]))
    child = tmp_path / "child.toml"
    child.write_text('base = "full.toml"\ntas_cruise_kt = 125\n')
    ac = get_aircraft(child)
    assert ac.tas_cruise_kt == 125.0 and ac.tas_climb_kt == 90.0 and ac.name == "child"


@pytest.mark.parametrize(("text", "match"), [
    ('base = "turboprop"\ntas_cruise_kt = -3\n', "tas_cruise_kt"),
    ('base = "turboprop"\nwing = 3\n', "wing"),
    ('name = "x"\n', "description"),
    ('base = "airship"\n', "airship"),
    ('base = "turboprop"\ntas_cruise_kt = "fast"\n', "tas_cruise_kt"),
])
def test_toml_errors_name_file_and_key(tmp_path, text, match):
    path = tmp_path / "bad.toml"
    path.write_text(text)
    with pytest.raises(ConfigError, match=match) as info:
        get_aircraft(path)
    assert "bad.toml" in str(info.value)


def test_toml_syntax_error_has_line(tmp_path):
    path = tmp_path / "broken.toml"
    path.write_text('base = "turboprop"\ntas_cruise_kt = = 3\n')
    with pytest.raises(ConfigError) as info:
        get_aircraft(path)
    assert info.value.line == 2 and "broken.toml" in str(info.value)


def test_toml_missing_file_and_loop(tmp_path):
    with pytest.raises(ConfigError, match="not found"):
        get_aircraft(tmp_path / "none.toml")
    a = tmp_path / "a.toml"
    a.write_text('base = "a.toml"\n')
    with pytest.raises(ConfigError, match="loop"):
        get_aircraft(a)


def test_aircraft_direct_construction_validates():
    with pytest.raises(ConfigError, match="body_diameter_m"):
        Aircraft("x", "y", 90, 120, 130, 600, 500, 5.0)


@pytest.mark.parametrize("name", ["light-piston", "turboprop", "regional-jet"])
def test_presets_fly_no_more_than_250_kt_indicated_below_10000_ft(name):
    """14 CFR 91.117(a) (and ICAO Annex 11, Appendix 4): at most 250 kt indicated airspeed below 10,000 ft MSL.
    Every preset's true airspeed in every phase stays at or under the true airspeed of 250 kt calibrated there
    (standard atmosphere), and grows with altitude as its indicated airspeed stays put."""
    from icing.physics import thermo

    ac = get_aircraft(name)
    alt = np.arange(0.0, 10000.0, 250.0)
    p = thermo.pressure_from_pressure_altitude_ft(alt)
    limit = thermo.true_airspeed_from_calibrated(250 * 1852 / 3600, p, thermo.standard_atmosphere_temperature(
        thermo.standard_atmosphere_height(p)))
    for phase in ("climb", "cruise", "descent"):
        tas = ac.true_airspeed_ms(phase, alt)
        assert np.all(tas <= limit * (1 + 1e-12)), phase
        assert np.all(np.diff(tas) >= 0), phase


def test_jet_cruise_held_to_its_mach_limit_and_slow_below_10000_ft():
    """The regional jet flies 290 kt indicated and at most Mach 0.78: at FL350 that is 0.78 of the speed of
    sound there (296.5 m/s at -54.3 degC, US Standard Atmosphere 1976), and at 8,000 ft no more than 250 kt
    indicated (14 CFR 91.117(a)), about 280 kt true, not the 440 kt of its nominal cruise."""
    from icing.physics import thermo

    jet = get_aircraft("regional-jet")
    t35 = thermo.standard_atmosphere_temperature(35000 * 0.3048)
    np.testing.assert_allclose(jet.true_airspeed_ms("cruise", 35000.0), 0.78 * thermo.speed_of_sound(t35), rtol=1e-9)
    assert 270 <= jet.true_airspeed_ms("descent", 8000.0) / (1852 / 3600) <= 285

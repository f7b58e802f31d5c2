"""Aircraft performance for route screening: speeds, climb and descent rates and the reference body.

The presets are generic classes with our own names and plausible round numbers; they describe no real
type. Their ``body_diameter_m`` is a representative reference cylinder for the accretion model (a
stand-in for a leading edge), not the geometry of any real airframe. For a real aircraft, use the numbers
from its approved flight manual in a TOML file:

.. code-block:: toml

    base = "turboprop"          # optional: start from a preset
    name = "our-survey-aircraft"
    tas_cruise_kt = 210
    ias_cruise_kt = 170         # optional: indicated airspeeds by phase (ias_climb_kt, ias_descent_kt too)
    body_diameter_m = 0.07
    icing_certified = true      # ice protection approved for flight in icing (Part 25 Appendix C)
"""

from __future__ import annotations

import dataclasses
import math
import re
import tomllib
from dataclasses import dataclass
from pathlib import Path

from icing.errors import ConfigError, UnitError

__all__ = ["Aircraft", "PRESETS", "get_aircraft", "SPEED_LIMIT_KT", "SPEED_LIMIT_BELOW_FT"]

# field -> (unit of a plain number, lowest, highest): sanity limits for subsonic piston, turboprop and jet
# aircraft, so that a typo (knots typed as m/s, feet as metres) fails loudly.
_LIMITS = {
    "tas_climb_kt": ("knot", 30.0, 600.0),
    "tas_cruise_kt": ("knot", 30.0, 600.0),
    "tas_descent_kt": ("knot", 30.0, 600.0),
    "climb_rate_fpm": ("ft/min", 50.0, 10000.0),
    "descent_rate_fpm": ("ft/min", 50.0, 10000.0),
    "body_diameter_m": ("m", 0.002, 2.0),
    "ias_climb_kt": ("knot", 30.0, 450.0),
    "ias_cruise_kt": ("knot", 30.0, 450.0),
    "ias_descent_kt": ("knot", 30.0, 450.0),
    "mach_limit": ("dimensionless", 0.1, 0.95),
}
_OPTIONAL = ("ias_climb_kt", "ias_cruise_kt", "ias_descent_kt", "mach_limit")
# 14 CFR 91.117(a) (and ICAO Annex 11, Appendix 4, for most classes of airspace): no more than 250 kt
# indicated airspeed below 10,000 ft above mean sea level.
SPEED_LIMIT_KT = 250.0
SPEED_LIMIT_BELOW_FT = 10000.0


@dataclass(frozen=True)
class Aircraft:
    """Performance of one aircraft (or a class of them) for route screening.

    Parameters
    ----------
    name, description : str
    tas_climb_kt, tas_cruise_kt, tas_descent_kt : float
        True airspeeds in knots (a pint Quantity of speed is converted).
    climb_rate_fpm, descent_rate_fpm : float
        Vertical speeds in feet per minute, positive numbers (a Quantity is converted).
    body_diameter_m : float
        Diameter of the reference cylinder for the accretion model, m (a Quantity is converted).
    ias_climb_kt, ias_cruise_kt, ias_descent_kt : float, optional
        Indicated (calibrated) airspeeds flown in each phase, knots. Where given, the true airspeed at each
        altitude follows from them in the standard atmosphere (:meth:`true_airspeed_ms`); the ``tas_*`` values
        then stand for the typical cruise and are used where no altitude is known (a model grid's potential).
    mach_limit : float, optional
        Highest Mach number flown (a jet's cruise Mach): the true airspeed is held to it at every altitude.
    icing_certified : bool
        Whether the aircraft is certified for flight in icing conditions (its ice protection designed for the
        14 CFR Part 25 Appendix C envelopes, 25.1419): intensity words within the continuous maximum then go
        no higher than moderate (see :func:`icing.physics.envelopes.intensity_for_conditions`).

    Raises
    ------
    icing.errors.ConfigError
        If a value is not a finite number or is outside the plausible range; the message names the field.
    icing.errors.UnitError
        If a Quantity of the wrong dimension is given.
    """

    name: str
    description: str
    tas_climb_kt: float
    tas_cruise_kt: float
    tas_descent_kt: float
    climb_rate_fpm: float
    descent_rate_fpm: float
    body_diameter_m: float
    icing_certified: bool = False
    ias_climb_kt: float | None = None
    ias_cruise_kt: float | None = None
    ias_descent_kt: float | None = None
    mach_limit: float | None = None

    def __post_init__(self):
        for field in ("name", "description"):
            if not isinstance(getattr(self, field), str):
                raise ConfigError(f"{field}: must be text, got {getattr(self, field)!r}")
        if not self.name.strip():
            raise ConfigError("name: must not be empty")
        if not isinstance(self.icing_certified, bool):
            raise ConfigError(f"icing_certified: must be true or false, got {self.icing_certified!r}")
        for field, (unit, lo, hi) in _LIMITS.items():
            value = getattr(self, field)
            if value is None and field in _OPTIONAL:
                continue
            if isinstance(value, bool):
                raise ConfigError(f"{field}: must be a number, got {value!r}")
            if isinstance(value, int | float):
                number = float(value)
            else:  # a Quantity (pint, and MetPy's registry with it, loads only when one is given)
                from icing.units import to_si, ureg

                if not isinstance(value, ureg.Quantity):
                    raise ConfigError(f"{field}: must be a number, got {value!r}")
                number = float(to_si(value, unit, name=field, default_unit=unit))
            if not math.isfinite(number) or not lo <= number <= hi:
                raise ConfigError(f"{field}: {number:g} is outside the plausible range {lo:g}-{hi:g} {unit}")
            object.__setattr__(self, field, number)

    def true_airspeed_ms(self, phase: str, altitude_ft):
        """True airspeed (m/s) flown in a phase ('climb', 'cruise' or 'descent') at altitudes (ft, taken as
        pressure altitudes in the standard atmosphere).

        The phase's indicated (calibrated) airspeed where the aircraft has one, else its ``tas_*`` value;
        below 10,000 ft no more than 250 kt indicated (14 CFR 91.117(a); ICAO Annex 11, Appendix 4), and never
        above ``mach_limit``. Calibrated to true by
        :func:`icing.physics.thermo.true_airspeed_from_calibrated`.
        """
        import numpy as np

        from icing.physics import thermo

        alt = np.asarray(altitude_ft, dtype=float)
        p = thermo.pressure_from_pressure_altitude_ft(alt)
        temp = thermo.standard_atmosphere_temperature(thermo.standard_atmosphere_height(p))
        kt = 1852.0 / 3600.0
        ias = {"climb": self.ias_climb_kt, "cruise": self.ias_cruise_kt, "descent": self.ias_descent_kt}[phase] \
            if phase in ("climb", "cruise", "descent") else self.speed_ms(phase)
        limit = thermo.true_airspeed_from_calibrated(SPEED_LIMIT_KT * kt, p, temp)
        if ias is not None:
            tas = thermo.true_airspeed_from_calibrated(ias * kt, p, temp)
        else:
            tas = np.full(alt.shape, self.speed_ms(phase))
        tas = np.where(alt < SPEED_LIMIT_BELOW_FT, np.minimum(tas, limit), tas)
        if self.mach_limit is not None:
            tas = np.minimum(tas, self.mach_limit * thermo.speed_of_sound(temp))
        return tas if tas.ndim else float(tas)

    def speed_ms(self, phase: str) -> float:
        """True airspeed in m/s for the phase 'climb', 'cruise' or 'descent'."""
        try:
            kt = {"climb": self.tas_climb_kt, "cruise": self.tas_cruise_kt, "descent": self.tas_descent_kt}[phase]
        except KeyError:
            raise ConfigError(f"phase: must be 'climb', 'cruise' or 'descent', got {phase!r}") from None
        return kt * 1852.0 / 3600.0


PRESETS = {
    "light-piston": Aircraft(
        name="light-piston", description="generic single-engine piston aeroplane (representative numbers)",
        tas_climb_kt=85.0, tas_cruise_kt=135.0, tas_descent_kt=140.0, climb_rate_fpm=700.0,
        descent_rate_fpm=500.0, body_diameter_m=0.05, ias_climb_kt=80.0, ias_cruise_kt=120.0,
        ias_descent_kt=130.0),
    "turboprop": Aircraft(
        name="turboprop", description="generic twin turboprop (representative numbers)",
        tas_climb_kt=180.0, tas_cruise_kt=270.0, tas_descent_kt=250.0, climb_rate_fpm=1500.0,
        descent_rate_fpm=1500.0, body_diameter_m=0.08, icing_certified=True, ias_climb_kt=170.0,
        ias_cruise_kt=210.0, ias_descent_kt=240.0),
    "regional-jet": Aircraft(
        name="regional-jet", description="generic twin-jet regional airliner (representative numbers)",
        tas_climb_kt=300.0, tas_cruise_kt=440.0, tas_descent_kt=320.0, climb_rate_fpm=2500.0,
        descent_rate_fpm=2000.0, body_diameter_m=0.10, icing_certified=True, ias_climb_kt=280.0,
        ias_cruise_kt=290.0, ias_descent_kt=290.0, mach_limit=0.78),
}

_FIELDS = tuple(f.name for f in dataclasses.fields(Aircraft))


def _preset(name, file=None):
    try:
        return PRESETS[name]
    except KeyError:
        raise ConfigError(f"unknown aircraft {name!r}; presets are {', '.join(PRESETS)}, or give a TOML file",
                          file=file) from None


def _toml_line(exc) -> int | None:
    line = getattr(exc, "lineno", None)
    if line is None:
        m = re.search(r"line (\d+)", str(exc))
        line = int(m.group(1)) if m else None
    return line


def _read_toml(path: Path, seen=()) -> Aircraft:
    if path.resolve() in seen:
        raise ConfigError("base: files inherit from each other in a loop", file=path)
    try:
        with path.open("rb") as fh:
            data = tomllib.load(fh)
    except FileNotFoundError:
        raise ConfigError("file not found", file=path) from None
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"not valid TOML: {exc}", file=path, line=_toml_line(exc)) from None
    base_name = data.pop("base", None)
    unknown = sorted(set(data) - set(_FIELDS))
    if unknown:
        raise ConfigError(f"key {unknown[0]!r}: unknown; the keys are base, {', '.join(_FIELDS)}", file=path)
    if base_name is None:
        missing = [f for f in _FIELDS if f not in data and f != "icing_certified" and f not in _OPTIONAL]
        if missing:
            raise ConfigError(f"key {missing[0]!r}: missing (or give base = a preset to inherit from)", file=path)
        base = None
    elif not isinstance(base_name, str):
        raise ConfigError(f"key 'base': must be a preset name or a TOML path, got {base_name!r}", file=path)
    elif base_name in PRESETS:
        base = PRESETS[base_name]
    elif base_name.endswith(".toml"):
        base = _read_toml((path.parent / base_name), seen + (path.resolve(),))
    else:
        base = _preset(base_name, file=path)
    try:
        if base is None:
            return Aircraft(**data)
        data.setdefault("name", path.stem)
        return dataclasses.replace(base, **data)
    except (ConfigError, UnitError) as exc:
        raise ConfigError(f"key {str(exc).split(':', 1)[0]!r}: {str(exc).split(':', 1)[-1].strip()}",
                          file=path) from None


def get_aircraft(aircraft, **overrides) -> Aircraft:
    """The aircraft to screen a route for.

    Parameters
    ----------
    aircraft : str, os.PathLike or Aircraft
        A preset name (``"light-piston"``, ``"turboprop"``, ``"regional-jet"``), the path of a TOML file
        whose keys are the :class:`Aircraft` fields (with an optional ``base = "<preset or file>"`` to
        inherit from), or an :class:`Aircraft`.
    **overrides
        Field values that replace those of the aircraft, for example ``tas_cruise_kt=210``.

    Raises
    ------
    icing.errors.ConfigError
        Unknown preset, unreadable file, unknown or missing key, or a value out of range; the message names
        the file and the key.
    """
    if isinstance(aircraft, Aircraft):
        base = aircraft
    elif isinstance(aircraft, str) and aircraft in PRESETS:
        base = PRESETS[aircraft]
    elif isinstance(aircraft, Path) or (isinstance(aircraft, str) and (aircraft.endswith(".toml")
                                                                      or Path(aircraft).is_file())):
        base = _read_toml(Path(aircraft))
    elif isinstance(aircraft, str):
        base = _preset(aircraft)
    else:
        raise ConfigError(f"aircraft: give a preset name, a TOML path or an Aircraft, got {aircraft!r}")
    unknown = sorted(set(overrides) - set(_FIELDS))
    if unknown:
        raise ConfigError(f"override {unknown[0]!r}: unknown; the fields are {', '.join(_FIELDS)}")
    return dataclasses.replace(base, **overrides) if overrides else base

"""Units: the one pint registry (MetPy's) and the aviation spellings people type.

Public functions take pint Quantities (or plain numbers in the documented unit) and convert once to SI with
:func:`to_si`; the physics inside works on plain floats.
"""

from __future__ import annotations

import re

import numpy as np
from metpy.units import units as ureg

from icing.errors import UnitError

__all__ = ["ureg", "Quantity", "to_si", "dataarray_to_unit", "linear_conversion", "parse_unit", "parse_altitude",
           "parse_speed", "FT", "KT", "NMI"]

Quantity = ureg.Quantity

FT = 0.3048  # m per international foot (exact)
KT = 1852.0 / 3600.0  # m/s per knot (exact)
NMI = 1852.0  # m per nautical mile (exact)

# Spellings seen in sounding tables and spreadsheets, mapped to pint unit strings.
_ALIASES = {
    "hpa": "hPa", "mb": "hPa", "mbar": "hPa", "millibar": "hPa", "pa": "Pa", "kpa": "kPa", "inhg": "inHg",
    "m": "m", "meter": "m", "metre": "m", "meters": "m", "metres": "m", "gpm": "m", "km": "km",
    "ft": "ft", "feet": "ft", "foot": "ft", "dam": "dam", "gpdam": "dam",
    "c": "degC", "degc": "degC", "°c": "degC", "deg c": "degC", "celsius": "degC", "deg_c": "degC",
    "k": "K", "kelvin": "K",
    "f": "degF", "degf": "degF", "°f": "degF", "fahrenheit": "degF", "deg_f": "degF",
    "%": "percent", "percent": "percent", "pct": "percent", "1": "dimensionless", "fraction": "dimensionless",
    "kt": "knot", "kts": "knot", "knot": "knot", "knots": "knot", "kn": "knot",
    "m/s": "m/s", "mps": "m/s", "ms-1": "m/s", "m s-1": "m/s", "km/h": "km/h", "kmh": "km/h", "mph": "mph",
    "deg": "degree", "degree": "degree", "degrees": "degree", "°": "degree", "degrees_north": "degree",
    "degrees_east": "degree",
    "g/m3": "g/m^3", "g m-3": "g/m^3", "gm-3": "g/m^3", "g/m^3": "g/m^3", "kg/m3": "kg/m^3", "kg m-3": "kg/m^3",
    "g/kg": "g/kg", "kg/kg": "kg/kg",
    # more spellings seen in spreadsheet headers
    "hectopascal": "hPa", "hectopascals": "hPa", "millibars": "hPa", "mbars": "hPa", "pascal": "Pa", "pascals": "Pa",
    "m asl": "m", "m msl": "m", "masl": "m", "m_asl": "m", "m_msl": "m", "gpm msl": "m", "ft msl": "ft",
    "ft asl": "ft", "ft_msl": "ft", "metres msl": "m", "meters msl": "m",
    "degrees c": "degC", "degrees_c": "degC", "degree c": "degC", "degree_c": "degC", "degrees celsius": "degC",
    "degree_celsius": "degC", "degrees_celsius": "degC", "ºc": "degC", "℃": "degC", "°k": "K", "kelvins": "K",
    "degrees f": "degF", "degrees_f": "degF", "ºf": "degF", "℉": "degF",
    "%rh": "percent", "% rh": "percent", "m/sec": "m/s", "m s^-1": "m/s", "meters/second": "m/s",
    "metres/second": "m/s", "knts": "knot", "g/m³": "g/m^3", "deg true": "degree", "degrees true": "degree",
    "deg_true": "degree",
}


def parse_unit(text: str):
    """Return the pint unit for a unit spelling from a file header (``hPa``, ``mb``, ``degC``, ``kt`` ...).

    Raises
    ------
    UnitError
        If the spelling is not known to the alias table or to pint.
    """
    key = text.strip().lower()
    name = _ALIASES.get(key)
    if name is None:
        try:
            return ureg.Unit(text.strip())
        except Exception as exc:  # pint raises several types for unknown names
            raise UnitError(f"unknown unit {text.strip()!r}") from exc
    return ureg.Unit(name)


def to_si(value, unit: str, name: str = "value", default_unit: str | None = None) -> np.ndarray:
    """Convert a Quantity (or plain number in ``default_unit``) to a float array in ``unit``.

    Parameters
    ----------
    value : pint.Quantity or array_like
        The quantity. A plain number is taken to be in ``default_unit`` when one is given; otherwise a
        plain number is an error, so that a unit is never guessed.
    unit : str
        The unit wanted, for example ``"K"``, ``"Pa"``, ``"m/s"``.
    name : str
        The argument name, used in the error message.
    """
    if isinstance(value, ureg.Quantity):
        try:
            return np.asarray(value.to(unit).magnitude, dtype=float)
        except Exception as exc:
            raise UnitError(
                f"{name}: wanted a quantity convertible to {unit} ({ureg.Unit(unit).dimensionality}), "
                f"got {value.units:~} ({value.dimensionality})"
            ) from exc
    if default_unit is None:
        raise UnitError(f"{name}: a pint Quantity is needed (for example 250 * units.knot), got a plain number")
    return np.asarray(Quantity(np.asarray(value, dtype=float), default_unit).to(unit).magnitude, dtype=float)


def linear_conversion(da, unit: str) -> tuple[float, float]:
    """``(scale, offset)`` that take a DataArray's values from its ``units`` attribute to ``unit``
    (``value * scale + offset``); only linear conversions such as degC to K or hPa to Pa.

    Raises
    ------
    UnitError
        If the DataArray has no ``units`` attribute or its unit does not convert to ``unit``.
    """
    src = da.attrs.get("units")
    if src is None:
        raise UnitError(f"variable {da.name!r} has no units attribute")
    try:
        a = Quantity(0.0, src).to(unit).magnitude
        b = Quantity(1.0, src).to(unit).magnitude - a
    except Exception as exc:
        raise UnitError(f"variable {da.name!r}: cannot convert {src!r} to {unit}") from exc
    return float(b), float(a)


def dataarray_to_unit(da, unit: str):
    """A (possibly dask-backed) DataArray converted from its ``units`` attribute to ``unit``.

    Only linear conversions (a scale and an offset, as degC to K or hPa to Pa, see :func:`linear_conversion`),
    applied lazily; the DataArray comes back unchanged when no conversion is needed.
    """
    scale, offset = linear_conversion(da, unit)
    return da if (scale, offset) == (1.0, 0.0) else da * scale + offset


_FL = re.compile(r"^\s*FL\s*(\d{1,3})\s*$", re.IGNORECASE)
_ALT = re.compile(r"^\s*([-+]?\d+(?:\.\d*)?)\s*(ft|feet|m)?\s*$", re.IGNORECASE)


def parse_altitude(text) -> tuple[float, bool]:
    """Parse an altitude as people write it on a flight plan.

    ``"FL140"`` is a flight level (pressure altitude 14,000 ft); ``"9000"`` or ``"9000 ft"`` is feet above
    mean sea level; ``"2500 m"`` is metres above mean sea level.

    Returns
    -------
    (feet, is_flight_level)
        The altitude in feet and whether it is a pressure altitude (flight level).

    Raises
    ------
    UnitError
        If the text is neither form.
    """
    if isinstance(text, int | float | np.floating | np.integer):
        return float(text), False
    s = str(text)
    m = _FL.match(s)
    if m:
        return float(m.group(1)) * 100.0, True
    m = _ALT.match(s)
    if m:
        v = float(m.group(1))
        if (m.group(2) or "ft").lower() == "m":
            v = v / FT
        return v, False
    raise UnitError(f"altitude {s!r} is neither a flight level like FL140 nor feet like 9000")


def parse_speed(text) -> float:
    """Parse a speed such as ``"250"`` (knots), ``"250 kt"`` or ``"130 m/s"``; return knots."""
    if isinstance(text, int | float | np.floating | np.integer):
        return float(text)
    m = re.match(r"^\s*([-+]?\d+(?:\.\d*)?)\s*([a-zA-Z/ ]*)\s*$", str(text))
    if not m:
        raise UnitError(f"speed {text!r} is not a number with an optional unit")
    v = float(m.group(1))
    u = m.group(2).strip() or "kt"
    return float(Quantity(v, parse_unit(u)).to("knot").magnitude)

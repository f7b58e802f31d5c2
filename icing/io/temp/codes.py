"""Code tables of the upper-air codes (WMO-No. 306, Manual on Codes, Volume I.1, Part A): one small function
each, the unit of every test against the Manual, and a cache of every reading of a five-character group.

Regulation numbers, code table 1734 (Id), code table 1845 (im) and the height windows are from memory of
WMO-No. 306; code table 0777 and the sign-by-parity rule for temperatures are its well-known forms.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["KNOT", "STD_A", "STD_C", "ID_A", "ID_C", "ID_AMBIGUOUS_A", "decode_temperature",
           "decode_dewpoint_depression", "decode_wind", "decode_standard_height", "decode_position",
           "decode_mobile_elevation", "surface_pressure", "is_section", "INFO", "nan"]

nan = np.nan
KNOT = 1852.0 / 3600.0  # m/s per knot (exact)

# Standard isobaric surfaces of Parts A and C (FM 35 regulation 35.2.2; FM 32 for PILOT): indicator -> hPa.
STD_A = [("00", 1000.0), ("92", 925.0), ("85", 850.0), ("70", 700.0), ("50", 500.0), ("40", 400.0),
         ("30", 300.0), ("25", 250.0), ("20", 200.0), ("15", 150.0), ("10", 100.0)]
STD_C = [("70", 70.0), ("50", 50.0), ("30", 30.0), ("20", 20.0), ("10", 10.0)]
# Id (code table 1734): the last standard surface with a wind group, by its hundreds (Part A) or tens (Part C)
# of hPa; "/" means no standard surface carries wind.
ID_A = {"0": 1000.0, "9": 925.0, "8": 850.0, "7": 700.0, "5": 500.0, "4": 400.0, "3": 300.0, "2": 200.0,
        "1": 100.0}
ID_C = {"7": 70.0, "5": 50.0, "3": 30.0, "2": 20.0, "1": 10.0}
# Two surfaces share a digit: 2 is 250 or 200 hPa, 1 is 150 or 100 hPa. The first of the pair surely has a
# wind group, the second may; the sequence of standard-level indicators decides (see standard.py).
ID_AMBIGUOUS_A = {"2": (250.0, 200.0), "1": (150.0, 100.0)}

# Heights hhh drop the leading digits (regulation 35.2.2.x): metres up to 700 hPa, decametres above. The
# height is the one in [low, low + 1000 units) ending in hhh, the window chosen by climatology so that
# every surface's plausible range fits (850 hPa: +1000 m; 700 hPa: +2000 m for hhh >= 500 else +3000 m;
# 500 and 400 hPa: hhh dam; 300 and 250 hPa: +1000 dam below hhh 500; 200-100 hPa: +1000 dam).
HEIGHT_RULE = {  # hPa: (unit in m, lower end of the window in m)
    925.0: (1.0, 100.0), 850.0: (1.0, 1000.0), 700.0: (1.0, 2500.0), 500.0: (10.0, 0.0),
    400.0: (10.0, 0.0), 300.0: (10.0, 5000.0), 250.0: (10.0, 5000.0), 200.0: (10.0, 5000.0),
    150.0: (10.0, 5000.0), 100.0: (10.0, 10000.0), 70.0: (10.0, 13000.0), 50.0: (10.0, 15000.0),
    30.0: (10.0, 18000.0), 20.0: (10.0, 20000.0), 10.0: (10.0, 25000.0),
}


def decode_temperature(group: str) -> float:
    """Air temperature (degC) from the first three characters TTTa of a TTTaDD group.

    WMO-No. 306, FM 35, code for TTTa (regulation 35.2.2 / 12.2.1.1 convention): TT whole degrees, Ta the
    tenths; an even tenths digit means a positive (or zero) temperature, an odd one a negative temperature.
    Returns NaN for slashes; raises ValueError for anything else that is not three digits.
    """
    s = group[:3]
    if s == "///":
        return np.nan
    if not s.isdigit():
        raise ValueError(f"temperature {s!r} is not three digits")
    tenths = int(s[2])
    value = int(s[:2]) + tenths / 10.0
    return -value if tenths % 2 else value


def decode_dewpoint_depression(dd: str) -> float:
    """Dewpoint depression (K) from DD, WMO-No. 306 code table 0777.

    00-50: tenths of a degree, 0.0-5.0; 51-55: not used (ValueError); 56-99: whole degrees, DD - 50, so
    6-49 K. ``//`` is missing (NaN).
    """
    if dd == "//":
        return np.nan
    if not dd.isdigit() or len(dd) != 2:
        raise ValueError(f"dewpoint depression {dd!r} is not two digits")
    v = int(dd)
    if v <= 50:
        return v / 10.0
    if v <= 55:
        raise ValueError(f"dewpoint depression {dd} is not used in code table 0777")
    return float(v - 50)


def decode_wind(group: str, knots: bool) -> tuple[float, float]:
    """(direction deg, speed m/s) from a dddff wind group, WMO-No. 306 FM 35 (regulation 35.2.2 and the
    dddff convention of the Manual on Codes).

    dd is the direction in tens of degrees; the units digit of the direction (0 or 5) is added to the
    hundreds digit of the speed, so a third digit of 5-9 means direction +5 and speed (digit - 5) * 100 +
    ff; 0-4 means speed digit * 100 + ff. Speeds are in knots or m/s per the day group (YY + 50 = knots).
    ``/////`` is missing (NaN, NaN); a direction above 360 raises ValueError.
    """
    if group == "/////":
        return np.nan, np.nan
    if not group.isdigit():
        raise ValueError(f"wind group {group!r} is not five digits")
    x = int(group[2])
    direction = int(group[:2]) * 10 + (5 if x >= 5 else 0)
    speed = (x % 5) * 100 + int(group[3:])
    if direction > 360:
        raise ValueError(f"wind direction {direction} deg above 360")
    if direction == 0 and speed != 0:
        raise ValueError("wind direction 000 with a non-zero speed")
    return float(direction), speed * (KNOT if knots else 1.0)


def decode_standard_height(pressure_hpa: float, hhh: str) -> float:
    """Geopotential height (m) of a standard isobaric surface from its three-digit hhh, WMO-No. 306 FM 35
    regulation 35.2.2 (heights of standard surfaces with leading digits omitted).

    1000 hPa: metres, with 500 added to the absolute value of a negative height (hhh 500-999 are negative
    heights). 925-700 hPa: metres; 500 hPa and above: decametres; the omitted leading digits are restored
    by the climatological window of each surface (see ``HEIGHT_RULE``). ``///`` is NaN.
    """
    if hhh == "///":
        return np.nan
    if not hhh.isdigit():
        raise ValueError(f"height {hhh!r} is not three digits")
    v = int(hhh)
    if pressure_hpa == 1000.0:
        return float(v) if v < 500 else -float(v - 500)
    unit, low = HEIGHT_RULE[pressure_hpa]
    span = 1000.0 * unit
    h = v * unit
    return float(h + span * math.ceil((low - h) / span))


def decode_position(la_group: str, lo_group: str) -> tuple[float, float]:
    """(latitude, longitude) in degrees from the groups 99LaLaLa QcLoLoLoLo of TEMP SHIP, TEMP DROP, TEMP
    MOBIL and PILOT SHIP/MOBIL (WMO-No. 306 FM 36/37/38 and FM 33/34, section 1).

    LaLaLa: latitude in tenths of a degree; LoLoLoLo: longitude in tenths of a degree; Qc (code table 3333):
    1 north/east, 3 south/east, 5 south/west, 7 north/west. Raises ValueError for anything else.
    """
    if len(la_group) != 5 or la_group[:2] != "99" or not la_group[2:].isdigit():
        raise ValueError(f"latitude group {la_group!r} is not 99LaLaLa")
    if len(lo_group) != 5 or not lo_group.isdigit() or lo_group[0] not in "1357":
        raise ValueError(f"longitude group {lo_group!r} is not QcLoLoLoLo with Qc 1, 3, 5 or 7")
    lat, lon = int(la_group[2:]) / 10.0, int(lo_group[1:]) / 10.0
    if lat > 90.0 or lon > 180.0:
        raise ValueError(f"position {lat:g} {lon:g} out of range")
    qc = lo_group[0]
    return (-lat if qc in "35" else lat), (-lon if qc in "57" else lon)


def decode_mobile_elevation(group: str) -> float:
    """Station elevation (m) from h0h0h0h0im of TEMP MOBIL / PILOT MOBIL (WMO-No. 306 FM 38 and FM 34,
    section 1; code table 1845 for im, from memory: 1-4 metres, 5-8 feet, the figure within each being the
    confidence). ``////`` is NaN; raises ValueError for other content."""
    if len(group) != 5:
        raise ValueError(f"elevation group {group!r} is not five characters")
    if group[:4] == "////":
        return np.nan
    if not group.isdigit() or group[4] not in "12345678":
        raise ValueError(f"elevation group {group!r} is not h0h0h0h0im with im 1-8")
    h = float(int(group[:4]))
    return h if group[4] in "1234" else h * 0.3048


def surface_pressure(ppp: str) -> float:
    """Pressure (hPa) from a three-digit PPP in whole hPa with the thousands digit omitted."""
    v = int(ppp)
    return float(v + 1000 if v < 100 else v)


def is_section(tok):
    """Section indicators 21212, 31313, 41414, the regional 51515 ... 59595 (not 50505: a 500 hPa height of
    5050 m is written 50505) and the regional 61616 and 62626 of TEMP DROP."""
    if tok in ("21212", "31313", "41414", "61616", "62626"):
        return True
    return tok[0] == "5" and tok[1] != "0" and tok[:2] * 2 + tok[0] == tok


class GroupInfo(dict):
    """Every reading of a group, worked out once per distinct group of a file (groups repeat a lot):
    (temperature, its error, depression, its error, direction, speed in report units, wind error,
    PPP as int or -1, plausible as TTTaDD, plausible as dddff, section indicator, PPP as hPa with the
    thousands digit restored or None, PPP as tenths of hPa or None)."""

    def __missing__(self, tok):
        try:
            t, t_err = decode_temperature(tok), None
        except ValueError as exc:
            t, t_err = np.nan, str(exc)
        try:
            dd, dd_err = decode_dewpoint_depression(tok[3:]), None
        except ValueError as exc:
            dd, dd_err = np.nan, str(exc)
        try:
            wd, ws = decode_wind(tok, False)
            w_err = None
        except ValueError as exc:
            wd, ws, w_err = np.nan, np.nan, str(exc)
        ppp = int(tok[2:]) if tok[2:].isdigit() else -1
        plausible_t = tok == "/////" or (t_err is None and (dd_err is None or tok[3:] == "//"))
        plausible_t = plausible_t and not (tok[3:].isdigit() and 51 <= int(tok[3:]) <= 55)
        plausible_w = w_err is None or (tok.isdigit() and int(tok[:2]) * 10 + (5 if int(tok[2]) >= 5 else 0) <= 360)
        p_whole = float(ppp + 1000 if ppp < 100 else ppp) if ppp >= 0 else None
        p_tenths = ppp / 10.0 if ppp > 0 else None
        info = (t, t_err, dd, dd_err, wd, ws, w_err, ppp, plausible_t, plausible_w, is_section(tok), p_whole,
                p_tenths)
        self[tok] = info
        return info


INFO = GroupInfo()  # shared by all decodes; bounded by clearing when large (see ascents.decode_temp_arrays)

"""Routes as filed: Item 15 (route) of the ICAO flight plan, with a user's table of named points.

The rules are those of ICAO Doc 4444 (PANS-ATM), Appendix 2, "Instructions for the completion of the flight
plan form", Item 15 (written from memory of the document; the paragraph letters below follow it):

* 15 (a) cruising speed, the first group: ``N`` and 4 figures (knots), ``M`` and 3 figures (true Mach number in
  hundredths), ``K`` and 4 figures (km/h);
* 15 (b) cruising level, written right after the speed: ``F`` and 3 figures (flight level), ``A`` and 3 figures
  (altitude in hundreds of feet), ``S`` and 4 figures (standard metric level in tens of metres), ``M`` and 4
  figures (altitude in tens of metres), or ``VFR``;
* 15 (c) the route, elements separated by spaces:

  - (c) 1 an ATS route designator, 2 to 7 characters (``UL975``, ``A1``, departure and arrival routes too);
  - (c) 2 a significant point: a coded designator of 2 to 5 characters, degrees only (``46N078W``, 7
    characters), degrees and minutes (``4620N07805W``, 11 characters), or a bearing and distance from a named
    point (``DUB180040``: the point, 3 figures of bearing in degrees magnetic, 3 figures of distance in NM);
  - (c) 3 a change of speed or level at a point: the point, ``/``, then both speed and level
    (``LN/N0284A045``, ``46N078W/M082F330``), even when only one of them changes;
  - (c) 4 a change of flight rules: the point (or the point with its change of speed and level), a space, then
    ``VFR`` or ``IFR``;
  - (c) 5 cruise climb: ``C/``, the point, ``/``, the speed and two levels or a level and ``PLUS``;
  - ``DCT`` between successive points off the ATS routes, except where both points are defined by geographical
    coordinates or by bearing and distance.

What this reader does with them (our choices):

* every point becomes a :class:`FiledPoint` (a route waypoint) named by its text (a coordinate group keeps its
  text as its name); altitudes come from the levels (``F`` and ``S`` are pressure altitudes, ``flight_level``
  true; ``A`` and ``M`` are altitudes above mean sea level);
* a change at a point is planned to *commence* there: the leg after the point flies the new speed (the point's
  ``speed_kt``), and the point keeps the old level, so the leg after it climbs or descends to the new one (as
  :func:`icing.flight.route.plan_geometry` flies a leg between two altitudes);
* speeds in knots; a Mach number is converted with the speed of sound at the level in the US Standard
  Atmosphere 1976 (the level taken as a pressure altitude), km/h by 1.852 km per NM;
* a ``VFR`` level gives no altitude to screen at and is refused; changes of flight rules are kept in the route's
  notes; cruise climb is refused (give the levels as changes of level instead);
* ATS route designators are refused unless the waypoint table lists the points along them (column ``airway``);
* a bearing is magnetic: it is turned to true with the reference point's ``variation`` (degrees, east positive)
  from the waypoint table, or, without one, taken as true, and the route's notes say so.

Every token that cannot be read is a :class:`~icing.errors.RouteFormatError` naming the source, the line, the
column (1-based character position) and the reason.
"""

from __future__ import annotations

import csv
import math
import re
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from pyproj import Geod

from icing.errors import RouteFormatError
from icing.physics.thermo import speed_of_sound, standard_atmosphere_temperature
from icing.units import FT, KT, NMI

__all__ = ["read_item15", "format_item15", "sniff_item15", "read_waypoints", "WaypointTable", "FiledPoint",
           "FiledRoute", "speed_level_group", "DEFAULT_ALTITUDE_LIMITS_FT", "DEFAULT_SPEED_LIMITS_KT"]

# This module sits below icing.flight.route (read_route calls it), so it builds plain points, not Routes, and
# keeps its own handle on the same ellipsoid.
_GEOD = Geod(ellps="WGS84")
# The limits of icing.flight.route (ALTITUDE_LIMITS_FT, SPEED_LIMITS_KT), which read_route passes in.
DEFAULT_ALTITUDE_LIMITS_FT = (-2000.0, 60000.0)
DEFAULT_SPEED_LIMITS_KT = (40.0, 700.0)

# 15 (a) and (b): speed and level, one group without a space (Doc 4444 App. 2, Item 15 (a), (b); from memory).
_SPEED = r"(?P<speed>N[0-9]{4}|M[0-9]{3}|K[0-9]{4})"
_LEVEL = r"(?P<level>F[0-9]{3}|A[0-9]{3}|S[0-9]{4}|M[0-9]{4}|VFR)"
_SPEED_LEVEL = re.compile(_SPEED + _LEVEL)
# 15 (c) 2: degrees only (7 characters), degrees and minutes (11 characters).
_DEG = re.compile(r"(?P<la>[0-9]{2})(?P<ns>[NS])(?P<lo>[0-9]{3})(?P<ew>[EW])")
_DEG_MIN = re.compile(r"(?P<la>[0-9]{2})(?P<lam>[0-9]{2})(?P<ns>[NS])(?P<lo>[0-9]{3})(?P<lom>[0-9]{2})(?P<ew>[EW])")
# Bearing (3 figures, degrees) and distance (3 figures, NM) from a coded designator.
_BEARING = re.compile(r"(?P<ref>[A-Z]{2,5})(?P<brg>[0-9]{3})(?P<dist>[0-9]{3})")
_CODED = re.compile(r"[A-Z]{2,5}")
# 15 (c) 1: an ATS route designator, 2 to 7 characters with at least one figure (departure and arrival routes
# alike, such as a five-letter point followed by a figure and a letter).
_AIRWAY = re.compile(r"(?=[A-Z0-9]*[0-9])[A-Z0-9]{2,7}")
_M_TO_KMH = 3.6


# ----------------------------------------------------------------------------------------------------------------
# The waypoint table

@dataclass
class WaypointTable:
    """Named points for Item 15 routes.

    Attributes
    ----------
    points : dict
        Name (upper case) -> (latitude, longitude) in degrees.
    variation : dict
        Name -> magnetic variation at the point, degrees, east positive (for bearings from the point).
    airways : dict
        ATS route designator -> the names of its points in order.
    source : str
        The file read (or ``"<mapping>"``).
    notes : list of str
        Columns of the file that were ignored.
    """

    points: dict[str, tuple[float, float]]
    variation: dict[str, float] = field(default_factory=dict)
    airways: dict[str, list[str]] = field(default_factory=dict)
    source: str = "<mapping>"
    notes: list[str] = field(default_factory=list)


_TABLE_COLUMNS = ("name", "latitude", "longitude", "variation", "airway")


def read_waypoints(path) -> WaypointTable:
    """Read a waypoint table: a CSV with the header ``name,latitude,longitude`` (any order, any case).

    Optional columns: ``variation`` (magnetic variation at the point, degrees, east positive: a bearing from the
    point in degrees magnetic is turned to true by adding it) and ``airway`` (an ATS route designator: the rows
    of one airway, in file order, are its points in order; a point on several airways has one row each, at the
    same position). Lines starting with ``#`` are comments; other columns are listed in the table's notes.

    Raises
    ------
    RouteFormatError
        Naming the file and line: no header, a missing column, a bad number, a name defined twice at two
        different positions.
    """
    path = Path(path)
    if not path.is_file():
        raise RouteFormatError("no such waypoint table" if not path.exists() else "not a regular file", file=path)
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise RouteFormatError(f"cannot be read: {exc.strerror or exc}", file=path) from None
    if raw.startswith((b"\xff\xfe", b"\xfe\xff")):
        text = raw.decode("utf-16", errors="replace")
    else:
        text = raw.decode("utf-8-sig", errors="replace")
    if "\x00" in text:
        raise RouteFormatError("not a text file (contains NUL bytes)", file=path)
    lines = [(i, s) for i, s in enumerate(text.splitlines(), 1) if s.strip() and not s.lstrip().startswith("#")]
    if not lines:
        raise RouteFormatError("waypoint table is empty: want a header name,latitude,longitude", file=path, line=1)
    rows = []
    try:
        for no, s in lines:
            rows.append((no, [c.strip() for c in next(csv.reader([s], skipinitialspace=True), [])]))
    except csv.Error as exc:
        raise RouteFormatError(f"waypoint table: {exc}", file=path, line=no) from None
    hno, cols = rows[0]
    cols = [c.lower() for c in cols]
    for need in ("name", "latitude", "longitude"):
        if need not in cols:
            raise RouteFormatError(f"waypoint table: missing column {need!r} (header must be "
                                   "name,latitude,longitude[,variation][,airway])", file=path, line=hno)
    dup = sorted({c for c in cols if cols.count(c) > 1})
    if dup:
        raise RouteFormatError(f"waypoint table: column {dup[0]!r} appears twice", file=path, line=hno)
    table = WaypointTable({}, source=str(path))
    table.notes = [f"{path.name}: column {c!r} ignored (known columns: {', '.join(_TABLE_COLUMNS)})"
                   for c in cols if c not in _TABLE_COLUMNS]
    first_line = {}
    for no, cells in rows[1:]:
        if len(cells) != len(cols):
            raise RouteFormatError(f"waypoint table: {len(cells)} cells for {len(cols)} columns", file=path,
                                   line=no)
        row = dict(zip(cols, cells, strict=True))
        try:
            lat, lon = float(row["latitude"]), float(row["longitude"])
            var = float(row["variation"]) if row.get("variation") else None
        except ValueError:
            raise RouteFormatError("waypoint table: latitude, longitude or variation is not a number", file=path,
                                   line=no) from None
        _add_point(table, row["name"], lat, lon, var, path, no, first_line)
        awy = (row.get("airway") or "").strip().upper()
        if awy:
            if not re.fullmatch(r"[A-Z0-9]{2,7}", awy):
                raise RouteFormatError(f"waypoint table: airway {row['airway']!r} is not an ATS route designator "
                                       "(2 to 7 letters and figures)", file=path, line=no)
            table.airways.setdefault(awy, []).append(row["name"].strip().upper())
    return table


def _add_point(table, name, lat, lon, var, file, line, first_line):
    key = str(name).strip().upper()
    if not re.fullmatch(r"[A-Z0-9]{1,11}", key):
        raise RouteFormatError(f"waypoint table: name {name!r} must be 1 to 11 letters and figures", file=file,
                               line=line)
    if not (math.isfinite(lat) and -90.0 <= lat <= 90.0 and math.isfinite(lon) and -180.0 <= lon <= 360.0):
        raise RouteFormatError(f"waypoint table: {key} position {lat}, {lon} outside -90..90, -180..360",
                               file=file, line=line)
    if var is not None and not (math.isfinite(var) and -180.0 <= var <= 180.0):
        raise RouteFormatError(f"waypoint table: {key} variation {var} outside -180..180 degrees", file=file,
                               line=line)
    old = table.points.get(key)
    if old is not None:
        if abs(old[0] - lat) > 1e-9 or abs((old[1] - lon + 180.0) % 360.0 - 180.0) > 1e-9:
            at = f" (line {first_line[key]})" if first_line.get(key) else ""
            raise RouteFormatError(f"waypoint table: {key} defined twice at different positions{at}", file=file,
                                   line=line)
        if var is not None and table.variation.get(key, var) != var:
            raise RouteFormatError(f"waypoint table: {key} given two different variations", file=file, line=line)
    table.points[key] = (float(lat), float(lon))
    first_line.setdefault(key, line)
    if var is not None:
        table.variation[key] = float(var)


def _table(waypoints) -> WaypointTable:
    if waypoints is None:
        return WaypointTable({})
    if isinstance(waypoints, WaypointTable):
        return waypoints
    if isinstance(waypoints, str | Path):
        return read_waypoints(waypoints)
    if not isinstance(waypoints, Mapping):
        raise TypeError(f"waypoints must be a mapping name -> (lat, lon), a WaypointTable or a CSV path, not "
                        f"{type(waypoints).__name__}")
    table = WaypointTable({})
    for name, pos in waypoints.items():
        try:
            lat, lon = (float(v) for v in pos)
        except (TypeError, ValueError):
            raise RouteFormatError(f"waypoint table: {name!r} needs (latitude, longitude), got {pos!r}",
                                   file="<mapping>") from None
        _add_point(table, name, lat, lon, None, "<mapping>", None, {})
    return table


# ----------------------------------------------------------------------------------------------------------------
# Tokens

@dataclass(frozen=True)
class _Token:
    text: str
    line: int
    column: int


def _tokens(text: str) -> list[_Token]:
    """Whitespace-separated tokens with their line and 1-based column; ``#`` lines are comments."""
    out = []
    for no, s in enumerate(text.splitlines(), 1):
        if s.lstrip().startswith("#"):
            continue
        out += [_Token(m.group(0).upper(), no, m.start() + 1) for m in re.finditer(r"\S+", s)]
    return out


def sniff_item15(text) -> bool:
    """Whether a text is an Item 15 route: its first token (after ``#`` comment lines) is a speed and level
    group such as ``N0250F140``."""
    if isinstance(text, bytes):
        text = text.decode("utf-8-sig", errors="replace")
    for s in str(text).splitlines():
        if not s.strip() or s.lstrip().startswith("#"):
            continue
        first = s.split()[0].upper()
        return bool(_SPEED_LEVEL.fullmatch(first))
    return False


# ----------------------------------------------------------------------------------------------------------------
# Speed and level

def _level_ft(level: str) -> tuple[float, bool]:
    """(altitude ft, is a pressure altitude) of a level group; Doc 4444 App. 2, Item 15 (b)."""
    kind, n = level[0], int(level[1:])
    if kind == "F":
        return n * 100.0, True
    if kind == "A":
        return n * 100.0, False
    if kind == "S":  # standard metric level, tens of metres (a pressure altitude)
        return n * 10.0 / FT, True
    return n * 10.0 / FT, False  # "M": altitude, tens of metres


def _speed_kt(speed: str, altitude_ft: float) -> float:
    """True airspeed (kt) of a speed group; Doc 4444 App. 2, Item 15 (a).

    A Mach number is multiplied by the speed of sound at the level in the US Standard Atmosphere 1976 (the
    level as a geopotential height of the standard atmosphere, i.e. a pressure altitude).
    """
    kind, n = speed[0], int(speed[1:])
    if kind == "N":
        return float(n)
    if kind == "K":
        return n / _M_TO_KMH / KT
    a = float(speed_of_sound(standard_atmosphere_temperature(altitude_ft * FT)))
    return n / 100.0 * a / KT


@dataclass(frozen=True)
class _Level:
    speed_kt: float
    altitude_ft: float
    flight_level: bool


def _speed_level(tok: _Token, text: str, src, limits, column_offset=0) -> _Level:
    col = tok.column + column_offset
    m = _SPEED_LEVEL.fullmatch(text)
    if not m:
        raise RouteFormatError(f"{text!r} is not a speed and level group (like N0250F140: N and 4 figures knots, "
                               "M and 3 figures Mach, K and 4 figures km/h; then F or A and 3 figures, S or M and 4 "
                               "figures; Doc 4444 App. 2 Item 15 (a), (b))", file=src, line=tok.line, column=col)
    if m["level"] == "VFR":
        raise RouteFormatError(f"{text}: a VFR cruising level gives no altitude to screen at: give a level such as "
                               f"{m['speed']}A045", file=src, line=tok.line, column=col)
    alt, fl = _level_ft(m["level"])
    lo, hi = limits[0]
    if not lo <= alt <= hi:
        raise RouteFormatError(f"{text}: level {m['level']} is {alt:.0f} ft, outside {lo:.0f}..{hi:.0f} ft",
                               file=src, line=tok.line, column=col + len(m["speed"]))
    spd = _speed_kt(m["speed"], alt)
    lo, hi = limits[1]
    if not lo <= spd <= hi:
        raise RouteFormatError(f"{text}: speed {m['speed']} is {spd:.0f} kt, outside {lo:.0f}..{hi:.0f} kt",
                               file=src, line=tok.line, column=col)
    return _Level(spd, alt, fl)


def speed_level_group(speed_kt: float, altitude_ft: float, flight_level: bool) -> str:
    """The Item 15 speed and level group of a true airspeed (kt, written as ``N`` and whole knots) and a level.

    A flight level in whole hundreds of feet is ``F``, else a whole ten metres ``S``; an altitude in whole
    hundreds of feet is ``A``, else a whole ten metres ``M``. Anything else cannot be written and raises
    :class:`~icing.errors.RouteFormatError`.
    """
    if speed_kt is None or not np.isfinite(speed_kt):
        raise RouteFormatError("an Item 15 route needs a speed at every point but the last (speed_kt)")
    kt = round(float(speed_kt))
    if not 0 <= kt <= 9999:
        raise RouteFormatError(f"speed {speed_kt} kt does not fit N and 4 figures")
    hundreds = altitude_ft / 100.0
    tens_m = altitude_ft * FT / 10.0
    if abs(hundreds - round(hundreds)) < 1e-6 and 0 <= round(hundreds) <= 999:
        level = f"{'F' if flight_level else 'A'}{round(hundreds):03d}"
    elif abs(tens_m - round(tens_m)) < 1e-6 and 0 <= round(tens_m) <= 9999:
        level = f"{'S' if flight_level else 'M'}{round(tens_m):04d}"
    else:
        raise RouteFormatError(f"altitude {altitude_ft:.2f} ft is neither whole hundreds of feet nor whole tens of "
                               "metres: it cannot be written as an Item 15 level")
    return f"N{kt:04d}{level}"


# ----------------------------------------------------------------------------------------------------------------
# Points

@dataclass(frozen=True)
class _Point:
    name: str
    latitude: float
    longitude: float
    kind: str  # "coded", "coordinates", "bearing"


def _coordinates(text: str):
    """(lat, lon) of a coordinate group, None if the text is not one, or a reason string if it is out of range."""
    m = _DEG_MIN.fullmatch(text)
    if m:
        la, lam, lo, lom = int(m["la"]), int(m["lam"]), int(m["lo"]), int(m["lom"])
    else:
        m = _DEG.fullmatch(text)
        if not m:
            return None
        la, lam, lo, lom = int(m["la"]), 0, int(m["lo"]), 0
    if lam > 59 or lom > 59:
        return "minutes must be 00..59"
    lat, lon = la + lam / 60.0, lo + lom / 60.0
    if lat > 90.0:
        return "latitude beyond 90 degrees"
    if lon > 180.0:
        return "longitude beyond 180 degrees"
    return (-lat if m["ns"] == "S" else lat), (-lon if m["ew"] == "W" else lon)


def _point(tok: _Token, text: str, table: WaypointTable, src, notes: list[str]) -> _Point:
    """A significant point, Doc 4444 App. 2, Item 15 (c) 2."""
    where = {"file": src, "line": tok.line, "column": tok.column}
    if text in table.points:
        lat, lon = table.points[text]
        return _Point(text, lat, lon, "coded")
    pos = _coordinates(text)
    if isinstance(pos, str):
        raise RouteFormatError(f"{text}: {pos}", **where)
    if pos is not None:
        return _Point(text, pos[0], pos[1], "coordinates")
    m = _BEARING.fullmatch(text)
    if m:
        ref, brg, dist = m["ref"], int(m["brg"]), int(m["dist"])
        if ref not in table.points:
            raise RouteFormatError(f"{text}: reference point {ref} is not in the waypoint table (--waypoints)",
                                   **where)
        if brg > 360:
            raise RouteFormatError(f"{text}: bearing {m['brg']} beyond 360 degrees", **where)
        lat0, lon0 = table.points[ref]
        var = table.variation.get(ref)
        if var is None:
            notes.append(f"{text}: bearing {brg:03d} taken as true: no magnetic variation for {ref} in the waypoint "
                         "table (the point moves sideways by the distance times the variation in radians)")
            var = 0.0
        lon, lat, _ = _GEOD.fwd(lon0, lat0, (brg + var) % 360.0, dist * NMI)
        return _Point(text, float(lat), float(lon), "bearing")
    if _CODED.fullmatch(text):
        raise RouteFormatError(f"point {text} is not in the waypoint table (--waypoints)", **where)
    if text == "C" or text.startswith("C/"):
        raise RouteFormatError(f"{text}: cruise climb (Doc 4444 App. 2 Item 15 (c) 5) is not supported: give the "
                               "levels as changes of speed and level at points (like ALDRN/N0250F160)", **where)
    if _AIRWAY.fullmatch(text):
        raise RouteFormatError(f"airway {text} is not supported; give the points along it, or define them in "
                               "--waypoints", **where)
    raise RouteFormatError(f"{text!r} is not an Item 15 route element (a point, DCT, an airway, point/speed "
                           "level, VFR or IFR)", **where)


# ----------------------------------------------------------------------------------------------------------------
# Parsing

@dataclass(frozen=True)
class FiledPoint:
    """A point of a filed route: its name (the token's point text), position (deg), the level at the point (ft,
    a pressure altitude when ``flight_level``), the true airspeed of the leg after it (kt), and where its token
    stands in the text (1-based line and column). The first six fields are those of
    :class:`icing.flight.route.Waypoint`, in its order."""

    name: str
    latitude: float
    longitude: float
    altitude_ft: float
    flight_level: bool
    speed_kt: float
    line: int
    column: int


@dataclass
class FiledRoute:
    """The points of an Item 15 route, in order, and what the reader noted (flight-rule changes, bearings taken
    as true, a change at the last point, columns of the waypoint table ignored)."""

    points: list[FiledPoint]
    notes: list[str]
    source: str


def read_item15(text: str, waypoints=None, *, source: str = "<string>",
                altitude_limits_ft=DEFAULT_ALTITUDE_LIMITS_FT,
                speed_limits_kt=DEFAULT_SPEED_LIMITS_KT) -> FiledRoute:
    """Read an ICAO flight-plan route (Item 15) into its points.

    :func:`icing.flight.route.parse_item15` and :func:`icing.flight.route.read_route` make a
    :class:`~icing.flight.route.Route` of them (Item 15 carries no time: the departure is given there).

    Parameters
    ----------
    text : str
        The route: its first group the speed and level (``N0250F140``), then points, ``DCT``, changes of speed
        and level (``ALDRN/N0280F160``), ``VFR``/``IFR``; over one or more lines; lines starting with ``#`` are
        comments; letters of either case; a leading ``-`` (the field separator of an ICAO message) is skipped.
    waypoints : mapping, WaypointTable or path, optional
        Named points: ``{name: (lat, lon)}``, a :class:`WaypointTable`, or a CSV read by
        :func:`read_waypoints`.
    source : str
        The name errors give as the file.
    altitude_limits_ft, speed_limits_kt : (low, high)
        Levels and speeds outside are refused at their token.

    Raises
    ------
    RouteFormatError
        For a token that breaks the rules, naming the source, line, column and reason.
    """
    limits = (altitude_limits_ft, speed_limits_kt)
    src = source
    table = _table(waypoints)
    notes = list(table.notes)
    toks = _tokens(text)
    if not toks:
        raise RouteFormatError("the route is empty: want a speed and level group (like N0250F140) and points",
                               file=src, line=1)
    if toks[0].text.startswith("-") and len(toks[0].text) > 1:  # the field separator of an ICAO message
        toks[0] = _Token(toks[0].text[1:], toks[0].line, toks[0].column + 1)
    level = _speed_level(toks[0], toks[0].text, src, limits)
    # Each point with the speed in force after it and the level at it, and its token.
    pts: list[tuple[_Point, _Level, _Token]] = []
    prev, prev_kind = toks[0].text, "start"  # the last element: "start", "point", "rules", "dct", "airway"
    pending_airway = None
    for tok in toks[1:]:
        t = tok.text
        where = {"file": src, "line": tok.line, "column": tok.column}
        if t == "DCT":
            if prev_kind in ("dct", "airway"):
                raise RouteFormatError(f"DCT after {prev}: DCT must stand between two points", **where)
            prev, prev_kind = t, "dct"
            continue
        if t in ("VFR", "IFR"):
            if prev_kind != "point":
                raise RouteFormatError(f"{t}: a change of flight rules must follow a point (Doc 4444 App. 2 Item 15 "
                                       "(c) 4)", **where)
            notes.append(f"flight rules change to {t} at {pts[-1][0].name}")
            prev, prev_kind = t, "rules"
            continue
        if _SPEED_LEVEL.fullmatch(t):
            raise RouteFormatError(f"{t}: a speed and level group stands first, or after a point and '/' (like "
                                   f"ALDRN/{t}; Doc 4444 App. 2 Item 15 (c) 3)", **where)
        if t in table.airways and t not in table.points:
            if prev_kind not in ("point", "rules"):
                raise RouteFormatError(f"airway {t} must follow a point (where the flight joins it)", **where)
            pending_airway = (t, tok)
            prev, prev_kind = t, "airway"
            continue
        new_level = None
        ptext = t
        if "/" in t and not t.startswith("C/"):
            ptext, _, group = t.partition("/")
            if not ptext:
                raise RouteFormatError(f"{t}: a change of speed and level needs its point before the '/'", **where)
            new_level = _speed_level(tok, group, src, limits, column_offset=len(ptext) + 1)
        p = _point(tok, ptext, table, src, notes)
        if prev_kind in ("point", "rules") and (pts[-1][0].kind == "coded" or p.kind == "coded"):
            raise RouteFormatError(f"{pts[-1][0].name} {p.name}: put DCT (or an airway) between two points unless "
                                   "both are coordinates or bearing and distance (Doc 4444 App. 2 Item 15 (c))",
                                   **where)
        if prev_kind == "airway":
            pts += [(q, level, pending_airway[1]) for q in _along(pending_airway, pts[-1][0], p, table, src)]
            pending_airway = None
        # A change commences at its point: the leg after it flies the new speed; the point keeps the old level.
        at = level
        if new_level is not None:
            level = new_level
        pts.append((p, _Level(level.speed_kt, at.altitude_ft, at.flight_level), tok))
        prev, prev_kind = p.name, "point"
    for (a, _, _), (b, _, tok) in zip(pts[:-1], pts[1:], strict=True):
        _check_leg(a, b, tok, src)
    last = toks[-1]
    if prev_kind in ("dct", "airway"):
        raise RouteFormatError(f"the route ends with {prev}: it must end with a point", file=src, line=last.line,
                               column=last.column)
    if len(pts) < 2:
        raise RouteFormatError(f"the route has {len(pts)} point{'s' if len(pts) != 1 else ''}: a route needs at "
                               "least two", file=src, line=last.line, column=last.column)
    if (level.altitude_ft, level.flight_level) != (pts[-1][1].altitude_ft, pts[-1][1].flight_level):
        notes.append(f"the change of level at the last point {pts[-1][0].name} is not flown: the route ends there")
    return FiledRoute([FiledPoint(p.name, p.latitude, p.longitude, lv.altitude_ft, lv.flight_level, lv.speed_kt,
                                  tok.line, tok.column) for p, lv, tok in pts], notes, src)


def _check_leg(a: _Point, b: _Point, tok: _Token, src):
    _, _, d = _GEOD.inv(a.longitude, a.latitude, b.longitude, b.latitude)
    if not d >= 1.0:
        raise RouteFormatError(f"{b.name} is at the same position as {a.name}: a leg needs a length", file=src,
                               line=tok.line, column=tok.column)


def _along(airway, a: _Point, b: _Point, table: WaypointTable, src) -> list[_Point]:
    """The points of an airway strictly between ``a`` and ``b`` (either direction), from the waypoint table."""
    name, tok = airway
    seq = table.airways[name]
    where = {"file": src, "line": tok.line, "column": tok.column}
    for p in (a, b):
        if p.name not in seq:
            raise RouteFormatError(f"airway {name}: {p.name} is not on it in the waypoint table ({table.source})",
                                   **where)
    i, j = seq.index(a.name), seq.index(b.name)
    if i == j:
        raise RouteFormatError(f"airway {name} from {a.name} to itself", **where)
    mid = seq[i + 1:j] if i < j else seq[j + 1:i][::-1]
    return [_Point(n, *table.points[n], "coded") for n in mid]


# ----------------------------------------------------------------------------------------------------------------
# Writing

def _coordinate_text(lat: float, lon: float) -> str:
    """Degrees and minutes (11 characters), rounded to the minute."""
    lon = (lon + 180.0) % 360.0 - 180.0 if lon != 180.0 else lon
    la, lo = round(abs(lat) * 60.0), round(abs(lon) * 60.0)
    return f"{la // 60:02d}{la % 60:02d}{'S' if lat < 0 else 'N'}{lo // 60:03d}{lo % 60:02d}{'W' if lon < 0 else 'E'}"


def _point_text(w, names: bool) -> tuple[str, str]:
    """(text, kind) of a waypoint: its name when that is a point of Item 15, else its coordinates."""
    name = str(w.name).strip().upper()
    pos = _coordinates(name)
    if isinstance(pos, tuple):
        same = abs(pos[0] - w.latitude) < 1e-9 and abs((pos[1] - w.longitude + 180.0) % 360.0 - 180.0) < 1e-9
        if same:
            return name, "coordinates"
    elif names and _BEARING.fullmatch(name):
        return name, "bearing"
    elif names and re.fullmatch(r"[A-Z0-9]{1,11}", name) and name not in ("DCT", "VFR", "IFR", "C") \
            and not _SPEED_LEVEL.fullmatch(name):
        return name, "coded"
    return _coordinate_text(w.latitude, w.longitude), "coordinates"


def format_item15(route, *, speed_kt: float | None = None, names: bool = True) -> str:
    """Write a route as Item 15 text, the inverse of :func:`parse_item15`.

    Named waypoints are written by name (parse the text again with the same waypoint table); a coordinate
    group that names its own position is written as it is; any other waypoint (or every one, with
    ``names=False``) as degrees and minutes, rounded to the minute. ``DCT`` stands between two points unless both
    are coordinates or bearing and distance. Speeds are written in whole knots (``N``), levels as ``F``/``A``
    (whole hundreds of feet) or ``S``/``M`` (whole tens of metres); a change is written at the point where the
    speed of the next leg or the level of the next point changes. Changes of flight rules (kept only in the
    notes) are not written.

    Parameters
    ----------
    route : icing.flight.route.Route, FiledRoute, or a list of waypoints
        Anything with ``waypoints`` (or ``points``), or the list itself, of objects with ``name``, ``latitude``,
        ``longitude``, ``altitude_ft``, ``flight_level`` and ``speed_kt``.
    speed_kt : float, optional
        The speed of waypoints without one (routes read from files without speeds).
    names : bool
        Write named points by name (default) or every point as coordinates.

    Raises
    ------
    RouteFormatError
        If a waypoint but the last has no speed, or an altitude is not a whole level.
    """
    wps = list(getattr(route, "waypoints", getattr(route, "points", route)))
    if len(wps) < 2:
        raise RouteFormatError("a route needs at least two waypoints", file=getattr(route, "source", None) or None)

    def speed(w):
        return w.speed_kt if w.speed_kt is not None else speed_kt

    i = 0
    try:
        out = [speed_level_group(speed(wps[0]), wps[0].altitude_ft, wps[0].flight_level)]
        in_force = out[0]
        prev_kind = None
        for i, w in enumerate(wps):
            text, kind = _point_text(w, names)
            if prev_kind is not None and (prev_kind == "coded" or kind == "coded"):
                out.append("DCT")
            if i + 1 < len(wps):
                nxt = wps[i + 1]
                group = speed_level_group(speed(w), nxt.altitude_ft, nxt.flight_level)
            elif speed(w) is not None:  # a change of speed at the last point (its level is the one in force)
                group = speed_level_group(speed(w), w.altitude_ft, w.flight_level)
            else:
                group = in_force
            if group != in_force:
                text = f"{text}/{group}"
                in_force = group
            out.append(text)
            prev_kind = kind
    except RouteFormatError as exc:
        raise RouteFormatError(f"waypoint {i + 1} ({wps[i].name}): {exc.reason}",
                               file=getattr(route, "source", None) or None) from None
    return " ".join(out)

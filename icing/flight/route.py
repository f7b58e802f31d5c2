"""Routes and 4-D trajectories: waypoints, great-circle geometry, climb/cruise/descent, time samples.

Geometry is on the WGS 84 ellipsoid with :class:`pyproj.Geod` (geodesics, so routes across the antimeridian
and near the poles work). Along each leg the aircraft climbs at its climb rate right after the waypoint, or
descends at its descent rate so as to arrive at the next waypoint's altitude, and otherwise flies level.
"""

from __future__ import annotations

import csv
import json
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np
import pandas as pd
from pint.errors import PintError
from pyproj import Geod

from icing.errors import RouteFormatError, UnitError
from icing.flight.item15 import read_item15, sniff_item15
from icing.units import FT, KT, parse_altitude, parse_speed

__all__ = ["Waypoint", "Route", "read_route", "parse_item15", "trajectory", "plan_geometry", "wind_points",
           "timed_samples",
           "timed_arrays", "GEOD",
           "DEFAULT_TRANSITION_FT"]

GEOD = Geod(ellps="WGS84")
DEFAULT_TRANSITION_FT = 18000.0  # altitudes at or above this are flown as pressure altitude (flight levels)


@dataclass(frozen=True)
class Waypoint:
    """A point of the planned route: position (deg), altitude (ft MSL or a flight level), optional speed and
    time."""

    name: str
    latitude: float
    longitude: float
    altitude_ft: float
    flight_level: bool = False
    speed_kt: float | None = None
    time: pd.Timestamp | None = None

    @property
    def altitude_label(self) -> str:
        return f"FL{self.altitude_ft / 100:03.0f}" if self.flight_level else f"{self.altitude_ft:.0f} ft"


@dataclass
class Route:
    """An ordered list of waypoints and a departure time (UTC).

    ``departure`` given explicitly wins over the route's own times: when the first waypoint has a time too, every
    waypoint time is moved by the same amount (so the timed legs keep their durations) and a note in
    :attr:`notes` says so. Without ``departure`` the first waypoint's time is the departure; a route with
    neither is refused.

    Attributes
    ----------
    notes : list of str
        What the reader ignored or decided (unknown columns or properties, route times moved to a departure
        given); shown in the assessment's summary (``summary["notes"]``).
    """

    waypoints: list[Waypoint]
    departure: pd.Timestamp | None = None
    name: str = ""
    source: str = ""
    notes: list[str] = field(default_factory=list)

    def __post_init__(self):
        file = self.source or None
        if len(self.waypoints) < 2:
            raise RouteFormatError("a route needs at least two waypoints", file=file)
        for i, w in enumerate(self.waypoints):
            _check_waypoint(w, file, None, f"waypoint {i + 1} ({w.name}): ")
        _check_sequence(self.waypoints, file)
        first = self.waypoints[0].time
        given = None if self.departure is None else _checked_time(self.departure, file, None, "departure")
        if given is None and first is None:
            raise RouteFormatError("no departure time: give a time at the first waypoint or a departure", file=file)
        if given is not None and first is not None and given != _utc(first):
            shift = given - _utc(first)
            self.waypoints = [w if w.time is None else replace(w, time=_utc(w.time) + shift)
                              for w in self.waypoints]
            for i, w in enumerate(self.waypoints):
                if w.time is not None:
                    _checked_time(w.time, file, None, f"waypoint {i + 1} ({w.name}) time moved to the departure")
            hours = shift / pd.Timedelta(hours=1)
            self.notes.append(f"departure {_iso(given)} given: the route's own times (first {_iso(_utc(first))}) "
                              f"moved by {hours:+.2f} h")
        self.departure = given if given is not None else _utc(first)

    @classmethod
    def from_points(cls, points, departure=None, name=""):
        """Build a route from ``(name, lat, lon, altitude)`` tuples; altitude like ``"FL140"`` or ``9000``."""
        wps = []
        for i, p in enumerate(points):
            try:
                alt, fl = parse_altitude(p[3])
                lat, lon = float(p[1]), float(p[2])
            except (UnitError, ValueError, TypeError, IndexError) as exc:
                raise RouteFormatError(f"point {i + 1}: {exc}") from None
            wps.append(Waypoint(str(p[0]), lat, lon, alt, fl))
        return cls(wps, departure=departure, name=name)

    def leg_distances_m(self) -> np.ndarray:
        lat = np.array([w.latitude for w in self.waypoints])
        lon = np.array([w.longitude for w in self.waypoints])
        _, _, d = GEOD.inv(lon[:-1], lat[:-1], lon[1:], lat[1:])
        return np.asarray(d, dtype=float)


# Physical and aircraft limits of a waypoint (common practice, our choice): the lowest land surface is about
# 1,400 ft below sea level and the highest flight levels of civil aircraft are near FL600.
ALTITUDE_LIMITS_FT = (-2000.0, 60000.0)
SPEED_LIMITS_KT = (40.0, 700.0)
# Times a route may carry: sounding archives begin in the 20th century, and pandas' nanosecond times end in 2262.
TIME_LIMITS = (pd.Timestamp("1900-01-01T00:00Z"), pd.Timestamp("2200-01-01T00:00Z"))


def _utc(t) -> pd.Timestamp:
    ts = pd.Timestamp(t)
    ts = ts.tz_localize("UTC") if ts.tzinfo is None else ts.tz_convert("UTC")
    return ts.as_unit("ns")


def _iso(ts) -> str:
    return ts.strftime("%Y-%m-%dT%H:%M:%SZ")


def _checked_time(value, file, line, what):
    """A UTC Timestamp from ISO 8601 text (or a time object), within :data:`TIME_LIMITS`."""
    if isinstance(value, bool | int | float | np.integer | np.floating):
        raise RouteFormatError(f"{what} {value!r} is not an ISO 8601 time (like 2026-01-15T06:00Z)", file=file,
                               line=line)
    try:
        ts = pd.Timestamp(value)
        if ts is pd.NaT or pd.isna(ts):
            raise ValueError
        ts = ts.tz_localize("UTC") if ts.tzinfo is None else ts.tz_convert("UTC")
    except (ValueError, TypeError, OverflowError, pd.errors.OutOfBoundsDatetime):
        raise RouteFormatError(f"{what} {value!r} is not an ISO 8601 time (like 2026-01-15T06:00Z)", file=file,
                               line=line) from None
    lo, hi = TIME_LIMITS
    if not lo <= ts < hi:
        raise RouteFormatError(f"{what} {value!r} outside the years {lo.year}-{hi.year - 1}", file=file, line=line)
    return ts.as_unit("ns")


def _check_position(lat, lon, file, line, where=""):
    if not np.isfinite(lat) or not -90.0 <= lat <= 90.0:
        raise RouteFormatError(f"{where}latitude {lat} outside -90..90", file=file, line=line)
    # East longitudes 180..360 are the same places (the 0..360 convention of many model grids).
    if not np.isfinite(lon) or not -180.0 <= lon <= 360.0:
        raise RouteFormatError(f"{where}longitude {lon} outside -180..360", file=file, line=line)


def _check_altitude(alt_ft, file, line, where=""):
    lo, hi = ALTITUDE_LIMITS_FT
    if not np.isfinite(alt_ft) or not lo <= alt_ft <= hi:
        raise RouteFormatError(f"{where}altitude {alt_ft:.0f} ft outside {lo:.0f}..{hi:.0f} ft", file=file,
                               line=line)


def _check_waypoint(w: Waypoint, file, line, where=""):
    _check_position(w.latitude, w.longitude, file, line, where)
    _check_altitude(w.altitude_ft, file, line, where)
    lo, hi = SPEED_LIMITS_KT
    if w.speed_kt is not None and (not np.isfinite(w.speed_kt) or not lo <= w.speed_kt <= hi):
        raise RouteFormatError(f"{where}speed {w.speed_kt:.0f} kt outside {lo:.0f}..{hi:.0f} kt", file=file,
                               line=line)
    if w.time is not None:
        _checked_time(w.time, file, line, f"{where}time")


def _check_sequence(wps, file, lines=None):
    """Legs need a length, and times along the route must increase; ``lines`` (one per waypoint) locate errors."""
    def line(k):
        return None if lines is None else lines[k]

    for i, (a, b) in enumerate(zip(wps[:-1], wps[1:], strict=True)):
        if _same_place(a, b):
            raise RouteFormatError(f"waypoints {i + 1} ({a.name}) and {i + 2} ({b.name}) are at the same "
                                   "position: a leg needs a length", file=file, line=line(i + 1))
    timed = [(i, _utc(w.time)) for i, w in enumerate(wps) if w.time is not None]
    for (i, a), (j, b) in zip(timed[:-1], timed[1:], strict=True):
        if not b > a:
            raise RouteFormatError(f"waypoint {j + 1} ({wps[j].name}) time {_iso(b)} is not after "
                                   f"waypoint {i + 1} ({wps[i].name}) time {_iso(a)}", file=file, line=line(j))


def _same_place(a: Waypoint, b: Waypoint) -> bool:
    _, _, d = GEOD.inv(a.longitude, a.latitude, b.longitude, b.latitude)
    return not d >= 1.0  # under a metre (or not a number)


def parse_item15(text, waypoints=None, *, departure=None, source="<string>", name="") -> Route:
    """A route from ICAO flight-plan Item 15 text (``N0250F140 ALDRN DCT 5130N00010W ...``) and a table of named
    points (``{name: (lat, lon)}`` or a CSV ``name,latitude,longitude``); see :mod:`icing.flight.item15` for the
    rules. Item 15 carries no time, so ``departure`` is needed.

    Raises
    ------
    RouteFormatError
        Naming ``source``, the line and column of the token and the reason.
    """
    filed = read_item15(text, waypoints, source=source, altitude_limits_ft=ALTITUDE_LIMITS_FT,
                        speed_limits_kt=SPEED_LIMITS_KT)
    if departure is None:
        raise RouteFormatError("an ICAO route (Item 15) carries no time: give the departure (on the command line "
                               "--departure, e.g. --departure 2026-01-15T05:00Z)", file=source)
    wps = [Waypoint(p.name, p.latitude, p.longitude, p.altitude_ft, p.flight_level, p.speed_kt)
           for p in filed.points]
    return Route(wps, departure=departure, name=name, source=source, notes=filed.notes)


def read_route(path, departure=None, waypoints=None) -> Route:
    """Read a route from a CSV of waypoints or a GeoJSON LineString with Z.

    CSV header: ``name,latitude,longitude,altitude`` and optional ``speed_kt`` and ``time`` columns (any order,
    any case; other columns are ignored and listed in the route's ``notes``); cells separated by commas, or by
    semicolons or tabs when the header has no comma; UTF-8 with or without a byte-order mark (or UTF-16 with
    one), any line ends; lines starting with ``#`` are comments. Altitude as feet MSL (``9000``), ``2500 m``
    or a flight level (``FL140``), within -2,000..60,000 ft; speed 40..700 kt; time ISO 8601 (UTC unless it
    says otherwise).

    GeoJSON (RFC 7946): a FeatureCollection with exactly one LineString feature, a Feature, or a bare
    LineString; coordinates ``[lon, lat, altitude_m]`` (altitude in metres MSL), optional properties ``names``
    (one per coordinate), ``flight_levels`` (one boolean per coordinate: the altitude is a pressure altitude)
    and ``departure`` (ISO 8601); other properties are listed in the notes.

    ``departure`` (ISO 8601 or a time), when given, is the departure whatever the file says: a departure in the
    file (GeoJSON property) is replaced, and waypoint times (CSV) are all moved by the same amount so that the
    timed legs keep their durations; the route's ``notes`` say so. Without it the file's own first time is the
    departure, and a file without one is refused.

    ICAO flight-plan route (Item 15 of ICAO Doc 4444 Appendix 2): a text file whose first group is the speed and
    level (``N0250F140 ALDRN DCT 5130N00010W ...``), read by :func:`parse_item15`; ``waypoints`` (a CSV
    ``name,latitude,longitude`` or a mapping name -> (lat, lon)) gives the named points, and ``departure`` is
    needed (Item 15 carries no time).

    Raises
    ------
    RouteFormatError
        For anything that cannot be read, naming the file, the line (CSV, Item 15: and column) or the feature and
        coordinate (GeoJSON), and the reason.
    """
    path = Path(path)
    if not path.exists():
        raise RouteFormatError("no such route file", file=path)
    if not path.is_file():
        raise RouteFormatError("is a directory, not a route file" if path.is_dir() else "not a regular file",
                               file=path)
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise RouteFormatError(f"cannot be read: {exc.strerror or exc}", file=path) from None
    text = _decode(raw)
    if not text.strip():
        raise RouteFormatError("route file is empty", file=path, line=1)
    if "\x00" in text:
        raise RouteFormatError("not a text file (contains NUL bytes)", file=path)
    if departure is not None:
        departure = _checked_time(departure, None, None, "departure")
    if text.lstrip().startswith(("{", "[")):
        return _read_geojson(text, path, departure)
    if sniff_item15(text):
        return parse_item15(text, waypoints, departure=departure, source=str(path), name=path.stem)
    return _read_csv(text, path, departure)


def _decode(raw: bytes) -> str:
    if raw.startswith((b"\xff\xfe", b"\xfe\xff")):
        return raw.decode("utf-16", errors="replace")
    return raw.decode("utf-8-sig", errors="replace")


_CSV_COLUMNS = ("name", "latitude", "longitude", "altitude", "speed_kt", "time")


def _split(line: str, sep: str) -> list[str]:
    cells = next(csv.reader([line], delimiter=sep, skipinitialspace=True), [])
    return [c.strip() for c in cells]


def _read_csv(text, path, departure):
    lines = [(i, s) for i, s in enumerate(text.splitlines(), 1) if s.strip() and not s.lstrip().startswith("#")]
    if not lines:
        raise RouteFormatError("no header row", file=path, line=1)
    hno, header = lines[0]
    sep = "," if "," in header else ";" if ";" in header else "\t" if "\t" in header else ","
    try:
        cols = [c.lower() for c in _split(header, sep)]
    except csv.Error as exc:
        raise RouteFormatError(f"header: {exc}", file=path, line=hno) from None
    for need in ("name", "latitude", "longitude", "altitude"):
        if need not in cols:
            raise RouteFormatError(f"missing column {need!r} (header must be name,latitude,longitude,altitude"
                                   "[,speed_kt][,time])", file=path, line=hno)
    dup = sorted({c for c in cols if cols.count(c) > 1 and c})
    if dup:
        raise RouteFormatError(f"column {dup[0]!r} appears twice", file=path, line=hno)
    notes = [f"{path.name}: column {c!r} ignored (known columns: {', '.join(_CSV_COLUMNS)})"
             for c in cols if c not in _CSV_COLUMNS]
    wps, nos = [], []
    for no, s in lines[1:]:
        try:
            cells = _split(s, sep)
        except csv.Error as exc:
            raise RouteFormatError(str(exc), file=path, line=no) from None
        if len(cells) != len(cols):
            raise RouteFormatError(f"{len(cells)} cells for {len(cols)} columns", file=path, line=no)
        row = dict(zip(cols, cells, strict=True))
        try:
            lat, lon = float(row["latitude"]), float(row["longitude"])
        except ValueError:
            raise RouteFormatError("latitude/longitude is not a number", file=path, line=no) from None
        _check_position(lat, lon, path, no)
        try:
            alt, fl = parse_altitude(row["altitude"])
            spd = parse_speed(row["speed_kt"]) if row.get("speed_kt") else None
        except (UnitError, ValueError) as exc:
            raise RouteFormatError(str(exc), file=path, line=no) from None
        except (PintError, TypeError, AttributeError):  # a unit pint knows but not a speed, or none it knows
            raise RouteFormatError(f"speed {row['speed_kt']!r} is not a speed (like 250, 250 kt or 130 m/s)",
                                   file=path, line=no) from None
        t = _checked_time(row["time"], path, no, "time") if row.get("time") else None
        wp = Waypoint(row["name"] or f"WP{len(wps) + 1}", lat, lon, alt, fl, spd, t)
        _check_waypoint(wp, path, no)
        wps.append(wp)
        nos.append(no)
    _check_sequence(wps, path, nos)
    return _route(wps, departure, path, notes)


def _route(wps, departure, path, notes):
    """The Route of a reader; its own checks (count, legs, departure) name the file."""
    return Route(wps, departure=departure, name=path.stem, source=str(path), notes=notes)


def _number(v) -> bool:
    if not isinstance(v, int | float) or isinstance(v, bool):
        return False
    try:
        return bool(np.isfinite(float(v)))
    except OverflowError:  # an integer too large for a float
        return False


def _read_geojson(text, path, departure):
    try:
        obj = json.loads(text)
    except json.JSONDecodeError as exc:
        raise RouteFormatError(f"invalid JSON: {exc.msg}", file=path, line=exc.lineno, column=exc.colno) from None
    except RecursionError:
        raise RouteFormatError("invalid JSON: nested too deeply", file=path) from None
    if not isinstance(obj, dict):
        raise RouteFormatError("GeoJSON must be an object (a FeatureCollection, Feature or LineString)", file=path)
    kind = obj.get("type")
    if kind == "FeatureCollection" or "features" in obj:
        feats = obj.get("features")
        if not isinstance(feats, list):
            raise RouteFormatError(f"'features' must be a list, not {type(feats).__name__}", file=path)
    elif kind == "LineString":
        feats = [{"type": "Feature", "geometry": obj, "properties": {}}]
    else:
        feats = [obj]
    found = []
    for i, f in enumerate(feats):
        if not isinstance(f, dict):
            raise RouteFormatError(f"feature {i}: must be an object, not {type(f).__name__}", file=path)
        geom = f.get("geometry")
        if geom is None:
            continue
        if not isinstance(geom, dict):
            raise RouteFormatError(f"feature {i}: 'geometry' must be an object, not {type(geom).__name__}",
                                   file=path)
        if geom.get("type") == "LineString":
            found.append(i)
    if len(found) != 1:
        raise RouteFormatError(f"expected exactly one LineString feature, found {len(found)}", file=path)
    fi = found[0]
    feat = feats[fi]
    where = f"feature {fi}: "
    coords = feat["geometry"].get("coordinates")
    if not isinstance(coords, list):
        raise RouteFormatError(f"{where}'coordinates' must be a list of [lon, lat, altitude_m], not "
                               f"{type(coords).__name__}", file=path)
    props = feat.get("properties")
    if props is None:
        props = {}
    if not isinstance(props, dict):
        raise RouteFormatError(f"{where}'properties' must be an object, not {type(props).__name__}", file=path)
    n = len(coords)
    names = _per_point(props, "names", n, where, path, lambda v: isinstance(v, str | int) and not isinstance(v, bool),
                       "a name (text)")
    fls = _per_point(props, "flight_levels", n, where, path, lambda v: isinstance(v, bool), "true or false")
    notes = [f"{path.name}: {where}property {k!r} ignored (known: names, flight_levels, departure)"
             for k in props if k not in ("names", "flight_levels", "departure")]
    wps = []
    for i, c in enumerate(coords):
        at = f"{where}coordinate {i + 1}: "
        if not isinstance(c, list) or len(c) < 3:
            raise RouteFormatError(f"{at}need [lon, lat, altitude_m], got {json.dumps(c)[:60]}", file=path)
        if not all(_number(v) for v in c[:3]):
            raise RouteFormatError(f"{at}longitude, latitude and altitude must be finite numbers, got "
                                   f"{json.dumps(c[:3])[:60]}", file=path)
        lon, lat, z = (float(v) for v in c[:3])
        _check_position(lat, lon, path, None, at)
        alt_ft = z / FT
        _check_altitude(alt_ft, path, None, at)
        name = str(names[i]) if names is not None else f"WP{i + 1}"
        wps.append(Waypoint(name, lat, lon, alt_ft, bool(fls[i]) if fls is not None else False))
    dep = props.get("departure")
    if dep is not None:
        if not isinstance(dep, str):
            raise RouteFormatError(f"{where}property 'departure' must be ISO 8601 text, not {type(dep).__name__}",
                                   file=path)
        dep = _checked_time(dep, path, None, f"{where}property departure")
        # An explicit departure argument wins over the file's own (as for CSV waypoint times), with a note.
        if departure is None:
            departure = dep
        elif departure != dep:
            notes.append(f"departure {_iso(departure)} given: the file's departure {_iso(dep)} not used")
    return _route(wps, departure, path, notes)


def _per_point(props, key, n, where, path, ok, what):
    """A property with one value per coordinate (None when absent)."""
    v = props.get(key)
    if v is None:
        return None
    if not isinstance(v, list):
        raise RouteFormatError(f"{where}property {key!r} must be a list, not {type(v).__name__}", file=path)
    if len(v) != n:
        raise RouteFormatError(f"{where}property {key!r} has {len(v)} values for {n} coordinates", file=path)
    for i, x in enumerate(v):
        if not ok(x):
            raise RouteFormatError(f"{where}property {key!r} value {i + 1} must be {what}, got {json.dumps(x)[:40]}",
                                   file=path)
    return v


def trajectory(route: Route, aircraft, step_s: float = 60.0, wind_along_track=None,
               transition_ft: float = DEFAULT_TRANSITION_FT) -> pd.DataFrame:
    """Sample the 4-D trajectory of a route at a fixed time step.

    Each leg (waypoint to waypoint) is cut into intervals of at most ``step_s`` seconds; a sample stands at the
    middle of each interval and carries its duration, so the exposure times of a leg add up exactly.

    Parameters
    ----------
    route : Route
    aircraft : icing.flight.aircraft.Aircraft
        True airspeeds (climb, cruise, descent) and vertical rates.
    step_s : float
        Time step, seconds (default one minute).
    wind_along_track : callable, optional
        ``f(lat, lon, time_s, altitude_ft, flight_level, azimuth_deg) -> m/s``, the tail-wind component (NaN
        where unknown; ``time_s`` is seconds since 1970 UTC). Ground speed is the true airspeed plus this
        component; unknown wind counts as calm.
    transition_ft : float
        On a leg between a flight level and an altitude in feet, altitudes at or above this are pressure
        altitudes.

    Returns
    -------
    pandas.DataFrame
        One row a sample: ``leg`` (0-based), ``time`` (UTC), ``time_s`` (seconds since 1970), ``duration_s``,
        ``latitude``, ``longitude``, ``altitude_ft``, ``flight_level`` (bool), ``phase`` (climb/cruise/descent),
        ``tas_ms``, ``ground_speed_ms``, ``distance_m`` (along the route, at the sample).
    """
    geo = plan_geometry(route, aircraft, transition_ft)
    wind = None
    if wind_along_track is not None:
        wp = wind_points(geo)
        wind = wind_along_track(wp["latitude"], wp["longitude"], wp["time_s"], wp["altitude_ft"],
                                wp["flight_level"], wp["azimuth"])
    return timed_samples(geo, step_s, wind)


def plan_geometry(route: Route, aircraft, transition_ft: float = DEFAULT_TRANSITION_FT) -> dict:
    """The route on a fine distance grid (at most 500 m apart): position, altitude, phase, true airspeed.

    The vertical profile depends only on distance: climb right after a waypoint at the climb rate and climb
    speed; descent timed to arrive at the next waypoint's altitude; level flight otherwise. If a leg is too
    short for the change, the altitude changes steadily over the whole leg.
    """
    wps = route.waypoints
    legs = route.leg_distances_m()
    az, _, _ = GEOD.inv([w.longitude for w in wps[:-1]], [w.latitude for w in wps[:-1]],
                        [w.longitude for w in wps[1:]], [w.latitude for w in wps[1:]])
    az = np.atleast_1d(az)
    parts = []
    dist0 = 0.0
    for k in range(len(wps) - 1):
        a, b, dist = wps[k], wps[k + 1], float(legs[k])
        n_fine = max(int(np.ceil(dist / 500.0)), 2)
        s = np.linspace(0.0, dist, n_fine + 1)
        s_mid = 0.5 * (s[1:] + s[:-1])
        dz = b.altitude_ft - a.altitude_ft
        phase = np.zeros(s_mid.size, dtype=np.int8)  # 0 cruise, 1 climb, 2 descent
        alt = np.full(s_mid.size, a.altitude_ft)
        mid_alt = a.altitude_ft + 0.5 * dz  # the climb or descent covers ground at its mean true airspeed
        if dz > 0:
            change = dz / (aircraft.climb_rate_fpm / 60.0) * aircraft.true_airspeed_ms("climb", mid_alt)
            frac = np.clip(s_mid / change, 0.0, 1.0) if change < dist else s_mid / dist
            alt = a.altitude_ft + dz * frac
            phase[frac < 1.0] = 1
        elif dz < 0:
            change = -dz / (aircraft.descent_rate_fpm / 60.0) * aircraft.true_airspeed_ms("descent", mid_alt)
            start = max(dist - change, 0.0)
            frac = np.clip((s_mid - start) / max(dist - start, 1e-9), 0.0, 1.0)
            alt = a.altitude_ft + dz * frac
            phase[frac > 0.0] = 2
        # true airspeeds by altitude from the aircraft's schedule (a waypoint's own speed is flown as given)
        cruise = np.full(s_mid.size, a.speed_kt * KT) if a.speed_kt else aircraft.true_airspeed_ms("cruise", alt)
        tas = np.choose(phase, [cruise, aircraft.true_airspeed_ms("climb", alt),
                                aircraft.true_airspeed_ms("descent", alt)])
        if a.flight_level and b.flight_level:
            fl = np.ones(s_mid.size, dtype=bool)
        elif not a.flight_level and not b.flight_level:
            fl = np.zeros(s_mid.size, dtype=bool)
        else:  # flown at the flight level while level at it, and at or above the transition altitude
            fl_alt = a.altitude_ft if a.flight_level else b.altitude_ft
            fl = (alt >= transition_ft) | (np.abs(alt - fl_alt) < 1.0)
        fixed = None
        if a.time is not None and b.time is not None:
            total = (b.time - a.time).total_seconds()
            if total <= 0:
                raise RouteFormatError(f"waypoint {b.name} time is not after {a.name}", file=route.source or None)
            fixed = total
        parts.append({"s": s, "s_mid": s_mid, "alt": alt, "phase": phase, "tas": tas, "fl": fl, "az": az[k],
                      "a": a, "dist": dist, "dist0": dist0, "fixed_s": fixed})
        dist0 += dist
    return {"route": route, "legs": parts, "t0": route.departure.value / 1e9}


def _wind_point_count(dist_m, spacing_m=10000.0):
    """How many wind points :func:`wind_points` puts on a leg of this length (both ends included)."""
    return max(int(np.ceil(dist_m / spacing_m)), 1) + 1


def wind_points(geo: dict, spacing_m: float = 10000.0) -> dict:
    """Points (about every 10 km) where the along-track wind is wanted, with times estimated from TAS."""
    out = {k: [] for k in ("latitude", "longitude", "time_s", "altitude_ft", "flight_level", "azimuth", "leg")}
    t = geo["t0"]
    for k, leg in enumerate(geo["legs"]):
        n = _wind_point_count(leg["dist"], spacing_m)
        sw = np.linspace(0.0, leg["dist"], n)
        t_fine = np.concatenate([[0.0], np.cumsum(np.diff(leg["s"]) / leg["tas"])])
        lon, lat, _ = GEOD.fwd(np.full(n, leg["a"].longitude), np.full(n, leg["a"].latitude),
                               np.full(n, leg["az"]), sw)
        out["latitude"].append(np.asarray(lat))
        out["longitude"].append(np.asarray(lon))
        out["time_s"].append(t + np.interp(sw, leg["s"], t_fine))
        out["altitude_ft"].append(np.interp(sw, leg["s_mid"], leg["alt"]))
        out["flight_level"].append(leg["fl"][np.clip(np.searchsorted(leg["s_mid"], sw), 0, leg["fl"].size - 1)])
        out["azimuth"].append(np.full(n, leg["az"]))
        out["leg"].append(np.full(n, k))
        t += t_fine[-1]
    return {k: np.concatenate(v) for k, v in out.items()}


def timed_samples(geo: dict, step_s: float = 60.0, wind=None) -> pd.DataFrame:
    """Samples at a fixed time step from a planned geometry and (optionally) along-track winds at
    :func:`wind_points` (m/s, NaN unknown), as a DataFrame (see :func:`trajectory` for the columns)."""
    out = pd.DataFrame(timed_arrays(geo, step_s, wind))
    out["phase"] = np.array(["cruise", "climb", "descent"])[out["phase"].to_numpy()]
    out.insert(1, "time", pd.to_datetime(out["time_s"], unit="s", utc=True))
    return out


def timed_arrays(geo: dict, step_s: float = 60.0, wind=None) -> dict:
    """As :func:`timed_samples`, as a dict of numpy arrays (``phase`` coded 0 cruise, 1 climb, 2 descent)."""
    cols = {k: [] for k in ("leg", "time_s", "duration_s", "latitude", "longitude", "altitude_ft", "flight_level",
                            "phase", "tas_ms", "ground_speed_ms", "distance_m")}
    t0 = geo["t0"]
    start = 0
    if wind is not None:
        wind = np.asarray(wind, dtype=float)
    for k, leg in enumerate(geo["legs"]):
        s, s_mid, tas = leg["s"], leg["s_mid"], leg["tas"]
        ds = np.diff(s)
        if leg["fixed_s"] is not None:
            gs = np.full_like(tas, leg["dist"] / leg["fixed_s"])  # times at both ends fix the mean speed
        elif wind is not None:
            n = _wind_point_count(leg["dist"])
            ws = wind[start:start + n]
            start += n
            sw = np.linspace(0.0, leg["dist"], n)
            ok = np.isfinite(ws)
            w_mid = np.interp(s_mid, sw[ok], ws[ok]) if ok.any() else np.zeros_like(s_mid)
            gs = np.maximum(tas + w_mid, 0.3 * tas)  # head wind above 70 % of TAS is treated as a data error
        else:
            gs = tas
        t_fine = np.concatenate([[0.0], np.cumsum(ds / gs)])
        total = t_fine[-1]
        n = max(int(np.ceil(total / step_s - 1e-9)), 1)
        edges = np.linspace(0.0, total, n + 1)
        mids = 0.5 * (edges[1:] + edges[:-1])
        s_at = np.interp(mids, t_fine, s)
        idx = np.clip(np.searchsorted(s, s_at) - 1, 0, s_mid.size - 1)
        lon, lat, _ = GEOD.fwd(np.full(n, leg["a"].longitude), np.full(n, leg["a"].latitude),
                               np.full(n, leg["az"]), s_at)
        cols["leg"].append(np.full(n, k))
        cols["time_s"].append(t0 + mids)
        cols["duration_s"].append(np.diff(edges))
        cols["latitude"].append(np.asarray(lat))
        cols["longitude"].append(((np.asarray(lon) + 180.0) % 360.0) - 180.0)
        cols["altitude_ft"].append(np.interp(s_at, s_mid, leg["alt"]))
        cols["flight_level"].append(leg["fl"][idx])
        cols["phase"].append(leg["phase"][idx])
        cols["tas_ms"].append(tas[idx])
        cols["ground_speed_ms"].append(gs[idx])
        cols["distance_m"].append(leg["dist0"] + s_at)
        t0 += total
    return {k: np.concatenate(v) for k, v in cols.items()}


"""Routes and 4-D trajectories: waypoints, great-circle geometry, climb/cruise/descent, time samples.

Geometry is on the WGS 84 ellipsoid with :class:`pyproj.Geod` (geodesics, so routes across the antimeridian
and near the poles work). Along each leg the aircraft climbs at its climb rate right after the waypoint, or
descends at its descent rate so as to arrive at the next waypoint's altitude, and otherwise flies level.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd
from pyproj import Geod

from icing.errors import RouteFormatError, UnitError
from icing.units import FT, KT, parse_altitude, parse_speed

__all__ = ["Waypoint", "Route", "read_route", "trajectory", "plan_geometry", "wind_points", "timed_samples",
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
    """An ordered list of waypoints and a departure time (UTC)."""

    waypoints: list[Waypoint]
    departure: pd.Timestamp | None = None
    name: str = ""
    source: str = ""
    notes: list[str] = field(default_factory=list)

    def __post_init__(self):
        if len(self.waypoints) < 2:
            raise RouteFormatError("a route needs at least two waypoints", file=self.source or None)
        if self.departure is None:
            self.departure = self.waypoints[0].time
        if self.departure is None:
            raise RouteFormatError("no departure time: give a time at the first waypoint or a departure",
                                   file=self.source or None)
        self.departure = _utc(self.departure)

    @classmethod
    def from_points(cls, points, departure=None, name=""):
        """Build a route from ``(name, lat, lon, altitude)`` tuples; altitude like ``"FL140"`` or ``9000``."""
        wps = []
        for p in points:
            alt, fl = parse_altitude(p[3])
            wps.append(Waypoint(str(p[0]), float(p[1]), float(p[2]), alt, fl))
        return cls(wps, departure=None if departure is None else _utc(departure), name=name)

    def leg_distances_m(self) -> np.ndarray:
        lat = np.array([w.latitude for w in self.waypoints])
        lon = np.array([w.longitude for w in self.waypoints])
        _, _, d = GEOD.inv(lon[:-1], lat[:-1], lon[1:], lat[1:])
        return np.asarray(d, dtype=float)


def _utc(t) -> pd.Timestamp:
    ts = pd.Timestamp(t)
    return ts.tz_localize("UTC") if ts.tzinfo is None else ts.tz_convert("UTC")


def _check_position(lat, lon, file, line):
    if not (-90.0 <= lat <= 90.0):
        raise RouteFormatError(f"latitude {lat} outside -90..90", file=file, line=line)
    if not (-180.0 <= lon <= 360.0):
        raise RouteFormatError(f"longitude {lon} outside -180..360", file=file, line=line)


def read_route(path, departure=None) -> Route:
    """Read a route from a CSV of waypoints or a GeoJSON LineString with Z.

    CSV header: ``name,latitude,longitude,altitude`` and optional ``speed_kt`` and ``time`` columns; altitude
    as feet MSL (``9000``) or a flight level (``FL140``); time ISO 8601 UTC, needed at the first waypoint unless
    ``departure`` is given. GeoJSON: a Feature or FeatureCollection with one LineString whose coordinates are
    ``[lon, lat, altitude_m]`` (RFC 7946 order, altitude in metres), with optional properties ``names``,
    ``departure`` and ``flight_levels`` (a list of booleans).
    """
    path = Path(path)
    if not path.exists():
        raise RouteFormatError("no such route file", file=path)
    text = path.read_text(errors="replace")
    if not text.strip():
        raise RouteFormatError("route file is empty", file=path, line=1)
    if text.lstrip().startswith("{"):
        route = _read_geojson(text, path, departure)
    else:
        route = _read_csv(text, path, departure)
    return route


def _read_csv(text, path, departure):
    lines = [(i, s) for i, s in enumerate(text.splitlines(), 1) if s.strip() and not s.lstrip().startswith("#")]
    if not lines:
        raise RouteFormatError("no header row", file=path, line=1)
    hno, header = lines[0]
    cols = [c.strip().lower() for c in header.split(",")]
    for need in ("name", "latitude", "longitude", "altitude"):
        if need not in cols:
            raise RouteFormatError(f"missing column {need!r} (header must be name,latitude,longitude,altitude"
                                   "[,speed_kt][,time])", file=path, line=hno)
    known = {"name", "latitude", "longitude", "altitude", "speed_kt", "time"}
    notes = [f"column {c!r} ignored" for c in cols if c not in known]
    wps = []
    for no, s in lines[1:]:
        cells = [c.strip() for c in s.split(",")]
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
        except UnitError as exc:
            raise RouteFormatError(str(exc), file=path, line=no) from None
        if not -2000 <= alt <= 60000:
            raise RouteFormatError(f"altitude {alt:.0f} ft outside -2000..60000 ft", file=path, line=no)
        if spd is not None and not 40 <= spd <= 700:
            raise RouteFormatError(f"speed {spd:.0f} kt outside 40..700 kt", file=path, line=no)
        t = None
        if row.get("time"):
            try:
                t = _utc(row["time"])
            except (ValueError, TypeError):
                raise RouteFormatError(f"time {row['time']!r} is not ISO 8601", file=path, line=no) from None
        wps.append(Waypoint(row["name"] or f"WP{len(wps) + 1}", lat, lon, alt, fl, spd, t))
    if departure is not None:
        try:
            departure = _utc(departure)
        except (ValueError, TypeError):
            raise RouteFormatError(f"departure {departure!r} is not ISO 8601") from None
    return Route(wps, departure=departure, name=path.stem, source=str(path), notes=notes)


def _read_geojson(text, path, departure):
    try:
        obj = json.loads(text)
    except json.JSONDecodeError as exc:
        raise RouteFormatError(f"invalid JSON: {exc.msg}", file=path, line=exc.lineno, column=exc.colno) from None
    feats = obj.get("features", [obj]) if isinstance(obj, dict) else []
    lines = [f for f in feats if isinstance(f, dict) and (f.get("geometry") or {}).get("type") == "LineString"]
    if len(lines) != 1:
        raise RouteFormatError(f"expected exactly one LineString feature, found {len(lines)}", file=path)
    feat = lines[0]
    coords = feat["geometry"].get("coordinates") or []
    props = feat.get("properties") or {}
    names = props.get("names") or [f"WP{i + 1}" for i in range(len(coords))]
    fls = props.get("flight_levels") or [False] * len(coords)
    wps = []
    for i, c in enumerate(coords):
        if len(c) < 3:
            raise RouteFormatError(f"coordinate {i + 1} has no altitude (need [lon, lat, altitude_m])", file=path)
        lon, lat, z = (float(v) for v in c[:3])
        _check_position(lat, lon, path, None)
        wps.append(Waypoint(str(names[i]), lat, lon, z / FT, bool(fls[i])))
    dep = departure or props.get("departure")
    return Route(wps, departure=None if dep is None else _utc(dep), name=path.stem, source=str(path))


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
        tas_cruise = (a.speed_kt or aircraft.tas_cruise_kt) * KT
        dz = b.altitude_ft - a.altitude_ft
        phase = np.zeros(s_mid.size, dtype=np.int8)  # 0 cruise, 1 climb, 2 descent
        alt = np.full(s_mid.size, a.altitude_ft)
        if dz > 0:
            change = dz / (aircraft.climb_rate_fpm / 60.0) * aircraft.tas_climb_kt * KT
            frac = np.clip(s_mid / change, 0.0, 1.0) if change < dist else s_mid / dist
            alt = a.altitude_ft + dz * frac
            phase[frac < 1.0] = 1
        elif dz < 0:
            change = -dz / (aircraft.descent_rate_fpm / 60.0) * aircraft.tas_descent_kt * KT
            start = max(dist - change, 0.0)
            frac = np.clip((s_mid - start) / max(dist - start, 1e-9), 0.0, 1.0)
            alt = a.altitude_ft + dz * frac
            phase[frac > 0.0] = 2
        tas = np.choose(phase, [tas_cruise, aircraft.tas_climb_kt * KT, aircraft.tas_descent_kt * KT])
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


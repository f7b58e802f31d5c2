"""Routes and trajectories: geodesic geometry checked against pyproj, file parsing, vertical profile."""

import json

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose
from pyproj import Geod

from icing.errors import RouteFormatError
from icing.flight.aircraft import Aircraft
from icing.flight.route import Route, Waypoint, read_route, trajectory
from icing.units import KT, NMI

WGS84 = Geod(ellps="WGS84")
PLANE = Aircraft(tas_climb_kt=160.0, tas_cruise_kt=240.0, tas_descent_kt=220.0, climb_rate_fpm=1000.0,
                 descent_rate_fpm=1500.0, body_diameter_m=0.05, name="test", description="constant true airspeeds")


def level_route(points, alt="FL120"):
    return Route.from_points([(f"P{i}", la, lo, alt) for i, (la, lo) in enumerate(points)],
                             departure="2026-01-15T06:00Z")


@pytest.mark.parametrize("points", [
    [(50.0, 170.0), (52.0, -170.0)],           # across the antimeridian eastbound
    [(-40.0, -175.0), (-35.0, 178.0)],          # across it westbound, southern hemisphere
    [(80.0, 0.0), (85.0, 180.0)],               # over the North Pole region
])
def test_distances_and_positions_on_the_geodesic(points):
    """Leg length equals pyproj's WGS 84 geodesic; every sample lies on it (d(A,S)+d(S,B) = d(A,B))."""
    r = level_route(points)
    (la1, lo1), (la2, lo2) = points
    _, _, ref = WGS84.inv(lo1, la1, lo2, la2)
    assert_allclose(r.leg_distances_m()[0], ref, rtol=1e-12)
    tr = trajectory(r, PLANE)
    _, _, d1 = WGS84.inv(np.full(len(tr), lo1), np.full(len(tr), la1), tr["longitude"], tr["latitude"])
    _, _, d2 = WGS84.inv(tr["longitude"], tr["latitude"], np.full(len(tr), lo2), np.full(len(tr), la2))
    assert_allclose(d1 + d2, ref, atol=1.0)
    assert tr["longitude"].between(-180, 180).all()
    # Level, no wind: flight time is distance / TAS (kinematics).
    assert_allclose(tr["duration_s"].sum(), ref / (240.0 * KT), rtol=1e-9)


def test_one_minute_samples_add_up():
    """Samples are at most one step long and their durations add to the flight time."""
    tr = trajectory(level_route([(52.0, -34.0), (53.0, -31.0), (54.0, -28.0)]), PLANE, step_s=60.0)
    assert (tr["duration_s"] <= 60.0 + 1e-9).all()
    assert tr["time"].is_monotonic_increasing


def test_climb_then_cruise_and_descent_to_arrive():
    """Climb at the climb rate right after the waypoint; descent timed to arrive at the next altitude."""
    r = Route.from_points([("A", 52.0, -34.0, 1000), ("B", 53.5, -30.0, "FL120"), ("C", 55.0, -26.0, 2000)],
                          departure="2026-01-15T06:00Z")
    tr = trajectory(r, PLANE, step_s=30.0)
    leg0 = tr[tr["leg"] == 0]
    climb = leg0[leg0["phase"] == "climb"]
    # Time to climb 11,000 ft at 1000 ft/min is 11 minutes (kinematics).
    assert_allclose(climb["duration_s"].sum() / 60.0, 11.0, atol=0.6)
    leg1 = tr[tr["leg"] == 1]
    assert leg1["altitude_ft"].iloc[-1] < 2500 and leg1["phase"].iloc[-1] == "descent"
    assert leg1["phase"].iloc[0] == "cruise"


def test_times_at_waypoints_fix_the_speed():
    """Times given at both ends of a leg fix its flight time exactly (kinematics)."""
    r = Route([Waypoint("A", 52.0, -34.0, 10000.0, True, time=pd.Timestamp("2026-01-15T06:00Z")),
               Waypoint("B", 53.0, -31.0, 10000.0, True, time=pd.Timestamp("2026-01-15T07:00Z"))])
    tr = trajectory(r, PLANE)
    assert_allclose(tr["duration_s"].sum(), 3600.0, rtol=1e-9)


def test_read_csv_route(tmp_path):
    p = tmp_path / "r.csv"
    p.write_text("name,latitude,longitude,altitude,speed_kt,time\nA,52,-34,9000,210,2026-01-15T06:00Z\n"
                 "B,53,-31,FL140,,\n")
    r = read_route(p)
    assert r.waypoints[0].altitude_ft == 9000 and not r.waypoints[0].flight_level
    assert r.waypoints[1].altitude_ft == 14000 and r.waypoints[1].flight_level
    assert r.waypoints[0].speed_kt == 210
    assert_allclose(r.leg_distances_m().sum() / NMI, WGS84.inv(-34, 52, -31, 53)[2] / NMI)


def test_read_geojson_route(tmp_path):
    p = tmp_path / "r.geojson"
    p.write_text('{"type":"Feature","properties":{"departure":"2026-01-15T06:00Z","names":["A","B"]},'
                 '"geometry":{"type":"LineString","coordinates":[[-34,52,3000],[-31,53,3000]]}}')
    r = read_route(p)
    assert [w.name for w in r.waypoints] == ["A", "B"]
    assert_allclose(r.waypoints[0].altitude_ft, 3000 / 0.3048)


@pytest.mark.parametrize("text, match, line", [
    ("name,latitude,longitude\nA,52,-34\n", "missing column 'altitude'", 1),
    ("name,latitude,longitude,altitude\nA,52,-34,FL1200\nB,53,-31,FL100\n", "altitude", 2),
    ("name,latitude,longitude,altitude\nA,95,-34,FL100\nB,53,-31,FL100\n", "latitude", 2),
    ("name,latitude,longitude,altitude\nA,x,-34,FL100\n", "not a number", 2),
    ("name,latitude,longitude,altitude\nA,52,-34,FL100\nB,53,-31,FL100\n", "no departure time", None),
])
def test_bad_routes(tmp_path, text, match, line):
    p = tmp_path / "bad.csv"
    p.write_text(text)
    with pytest.raises(RouteFormatError, match=match) as e:
        read_route(p)
    assert e.value.line == line
    assert "bad.csv" in str(e.value)


# ----------------------------------------------------------------------------------- readers check what they accept
GOOD_LINE = '"geometry":{"type":"LineString","coordinates":[[-34,52,3000],[-31,53,3000]]}'


def geojson(props='{"departure":"2026-01-15T06:00Z"}', geometry=GOOD_LINE):
    return '{"type":"Feature","properties":' + props + "," + geometry + "}"


@pytest.mark.parametrize("text, match", [
    (geojson(geometry='"geometry":"LineString"'), "'geometry' must be an object"),
    ('{"type":"FeatureCollection","features":3}', "'features' must be a list"),
    (geojson(geometry='"geometry":{"type":"LineString","coordinates":"52,-34"}'), "'coordinates' must be a list"),
    (geojson(geometry='"geometry":{"type":"LineString","coordinates":[[-34,52,3000],7]}'), "coordinate 2"),
    (geojson(geometry='"geometry":{"type":"LineString","coordinates":[[-34,52,"high"],[-31,53,3000]]}'),
     "finite numbers"),
    (geojson('{"departure":"2026-01-15T06:00Z","names":["A"]}'), "'names' has 1 values for 2 coordinates"),
    (geojson('{"departure":"2026-01-15T06:00Z","flight_levels":[true]}'), "'flight_levels' has 1 values"),
    (geojson('{"departure":"2026-01-15T06:00Z","flight_levels":[1,0]}'), "true or false"),
    (geojson('{"departure":"next tuesday"}'), "not an ISO 8601 time"),
    (geojson('{"departure":"2626-01-15T06:00Z"}'), "outside the years"),
    (geojson('{"departure":20260115}'), "ISO 8601 text"),
    # 1,000 km is far above any aircraft (and above the atmosphere the soundings describe).
    (geojson(geometry='"geometry":{"type":"LineString","coordinates":[[-34,52,1000000],[-31,53,3000]]}'),
     "altitude"),
    (geojson(geometry='"geometry":{"type":"LineString","coordinates":[[-34,95,3000],[-31,53,3000]]}'), "latitude"),
    (geojson(geometry='"geometry":{"type":"LineString","coordinates":[[-34,52,3000],[-34,52,3000]]}'),
     "same position"),
    ("[1, 2, 3]", "must be an object"),
    ('{"type":"Feature","properties":{},"geometry":null}', "exactly one LineString"),
])
def test_bad_geojson_routes_are_typed_errors(tmp_path, text, match):
    """Every malformed GeoJSON route (RFC 7946: a position is [longitude, latitude, altitude]) is refused with a
    RouteFormatError that names the file and the reason, never a bare traceback."""
    p = tmp_path / "bad.geojson"
    p.write_text(text)
    with pytest.raises(RouteFormatError, match=match) as e:
        read_route(p)
    assert e.value.file == str(p)


@pytest.mark.parametrize("text, match, line", [
    ("name,latitude,longitude,altitude,time\nA,52,-34,FL100,2626-01-15T06:00Z\nB,53,-31,FL100,\n",
     "outside the years", 2),
    ("name,latitude,longitude,altitude,time\nA,52,-34,FL100,soon\nB,53,-31,FL100,\n", "not an ISO 8601", 2),
    ("name,latitude,longitude,altitude,time\nA,52,-34,FL100,2026-01-15T06:00Z\nB,53,-31,3300000,\n",
     "altitude", 3),
    ("name,latitude,longitude,altitude,speed_kt,time\nA,52,-34,FL100,2000,2026-01-15T06:00Z\nB,53,-31,FL100,,\n",
     "speed", 2),
    ("name,latitude,longitude,altitude,speed_kt,time\nA,52,-34,FL100,5 m,2026-01-15T06:00Z\nB,53,-31,FL100,,\n",
     "not a speed", 2),
    ("name,latitude,longitude,altitude,speed_kt,time\nA,52,-34,FL100,9 parsecs,2026-01-15T06:00Z\n", "speed", 2),
    ("name,latitude,longitude,altitude,altitude\nA,52,-34,FL100,FL100\n", "appears twice", 1),
    ("name,latitude,longitude,altitude,time\nA,52,-34,FL100,2026-01-15T07:00Z\nB,53,-31,FL100,"
     "2026-01-15T06:00Z\n", "is not after", 3),
    ("name,latitude,longitude,altitude\nA,52,-34,FL100\n\nB,52,-34,FL120\n", "same position", 4),
])
def test_more_bad_csv_routes(tmp_path, text, match, line):
    p = tmp_path / "bad.csv"
    p.write_text(text)
    with pytest.raises(RouteFormatError, match=match) as e:
        read_route(p)
    assert e.value.line == line and e.value.file == str(p)


def test_a_directory_is_not_a_route(tmp_path):
    with pytest.raises(RouteFormatError, match="directory") as e:
        read_route(tmp_path)
    assert e.value.file == str(tmp_path)


def test_bad_departure_argument_is_a_route_error(tmp_path):
    p = tmp_path / "r.csv"
    p.write_text("name,latitude,longitude,altitude\nA,52,-34,9000\nB,53,-31,FL140\n")
    for bad in ("2626-01-15T06:00Z", "tomorrow", 12):
        with pytest.raises(RouteFormatError, match="departure"):
            read_route(p, departure=bad)


def test_spreadsheet_csv_with_bom_crlf_and_quotes_reads(tmp_path):
    """UTF-8 with a byte-order mark and CRLF line ends (as spreadsheets save CSV; RFC 4180 uses CRLF and
    double quotes) reads like the plain file; so do semicolon separators and UTF-16 with a BOM."""
    plain = "name,latitude,longitude,altitude,time\nA,52,-34,9000,2026-01-15T06:00Z\nB,53,-31,FL140,\n"
    ref = read_route(_write(tmp_path / "plain.csv", plain.encode()))
    variants = {
        "bom_crlf.csv": ("\ufeff" + plain.replace("\n", "\r\n")).encode("utf-8"),
        "quoted.csv": (b'"name","latitude","longitude","altitude","time"\r\n"A","52","-34","9000",'
                       b'"2026-01-15T06:00Z"\r\n"B","53","-31","FL140",""\r\n'),
        "semicolon.csv": plain.replace(",", ";").encode(),
        "utf16.csv": plain.replace("\n", "\r\n").encode("utf-16"),
    }
    for name, raw in variants.items():
        r = read_route(_write(tmp_path / name, raw))
        assert [w.name for w in r.waypoints] == ["A", "B"], name
        assert [(w.latitude, w.longitude, w.altitude_ft, w.flight_level) for w in r.waypoints] == \
            [(w.latitude, w.longitude, w.altitude_ft, w.flight_level) for w in ref.waypoints], name
        assert r.departure == ref.departure, name


def _write(path, raw):
    path.write_bytes(raw)
    return path


def test_unknown_columns_and_properties_are_noted(tmp_path):
    """Nothing is ignored silently: unknown CSV columns and GeoJSON properties are listed in the notes."""
    c = _write(tmp_path / "r.csv", b"name,latitude,longitude,altitude,remark\nA,52,-34,9000,x\nB,53,-31,FL140,y\n")
    r = read_route(c, departure="2026-01-15T06:00Z")
    assert any("'remark'" in n and "ignored" in n for n in r.notes)
    g = _write(tmp_path / "r.geojson", geojson('{"departure":"2026-01-15T06:00Z","stroke":"red"}').encode())
    assert any("'stroke'" in n for n in read_route(g).notes)


def test_departure_argument_wins_and_says_so(tmp_path):
    """A departure given explicitly is the departure: used when the route has no time, and when it has one,
    every waypoint time moves by the same amount (timed legs keep their durations) with a note."""
    timed = _write(tmp_path / "t.csv", b"name,latitude,longitude,altitude,time\nA,52,-34,9000,2026-01-15T06:00Z\n"
                   b"B,53,-31,FL140,2026-01-15T07:10Z\nC,54,-28,FL140,\n")
    own = read_route(timed)
    assert own.departure == pd.Timestamp("2026-01-15T06:00Z") and not own.notes
    moved = read_route(timed, departure="2026-01-16T12:00Z")
    assert moved.departure == pd.Timestamp("2026-01-16T12:00Z")
    assert moved.waypoints[1].time == pd.Timestamp("2026-01-16T13:10Z")
    assert any("moved by +30.00 h" in n for n in moved.notes)
    untimed = _write(tmp_path / "u.csv", b"name,latitude,longitude,altitude\nA,52,-34,9000\nB,53,-31,FL140\n")
    r = read_route(untimed, departure="2026-01-15T09:00Z")
    assert r.departure == pd.Timestamp("2026-01-15T09:00Z") and not r.notes
    g = _write(tmp_path / "r.geojson", geojson().encode())
    rg = read_route(g, departure="2026-01-15T09:00Z")
    assert rg.departure == pd.Timestamp("2026-01-15T09:00Z") and any("not used" in n for n in rg.notes)
    # The same rule for a Route built in code.
    rc = Route([Waypoint("A", 52.0, -34.0, 9000.0, time=pd.Timestamp("2026-01-15T06:00Z")),
                Waypoint("B", 53.0, -31.0, 9000.0)], departure="2026-01-15T08:00Z")
    assert rc.departure == pd.Timestamp("2026-01-15T08:00Z") and rc.notes


def test_bare_linestring_and_feature_collection_read(tmp_path):
    """RFC 7946 allows a geometry object alone and a FeatureCollection; both give the same route."""
    coords = [[-34, 52, 3000], [-31, 53, 3000]]
    bare = _write(tmp_path / "bare.geojson", json.dumps({"type": "LineString", "coordinates": coords}).encode())
    coll = _write(tmp_path / "coll.geojson", json.dumps({"type": "FeatureCollection", "features": [
        {"type": "Feature", "properties": {"name": "x"}, "geometry": {"type": "Point", "coordinates": [0, 0]}},
        {"type": "Feature", "properties": {"flight_levels": [True, True]},
         "geometry": {"type": "LineString", "coordinates": coords}}]}).encode())
    a = read_route(bare, departure="2026-01-15T06:00Z")
    b = read_route(coll, departure="2026-01-15T06:00Z")
    assert_allclose(a.leg_distances_m(), b.leg_distances_m(), rtol=1e-12)
    assert all(w.flight_level for w in b.waypoints) and not any(w.flight_level for w in a.waypoints)

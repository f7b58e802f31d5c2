"""Routes and trajectories: geodesic geometry checked against pyproj, file parsing, vertical profile."""

from types import SimpleNamespace

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose
from pyproj import Geod

from icing.errors import RouteFormatError
from icing.flight.route import Route, Waypoint, read_route, trajectory
from icing.units import KT, NMI

WGS84 = Geod(ellps="WGS84")
PLANE = SimpleNamespace(tas_climb_kt=160.0, tas_cruise_kt=240.0, tas_descent_kt=220.0, climb_rate_fpm=1000.0,
                        descent_rate_fpm=1500.0, body_diameter_m=0.05, name="test")


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

"""Fuzzing the route readers (hypothesis): CSV and GeoJSON routes built from valid, damaged and random parts.

Property: every input gives either a clean Route (at least two waypoints, every position on the globe, every
altitude within -2,000..60,000 ft, a UTC departure within the accepted years, and a trajectory that can be
flown and sampled) or a RouteFormatError that names the file: never another exception (project rule: bad input
gets a typed error naming the file, line and reason). Formats: RFC 4180 (CSV), RFC 7946 (GeoJSON).
"""

import itertools
import json

import numpy as np
import pandas as pd
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from icing.errors import RouteFormatError
from icing.flight.aircraft import Aircraft
from icing.flight.route import ALTITUDE_LIMITS_FT, TIME_LIMITS, Route, plan_geometry, read_route, timed_arrays

PLANE = Aircraft(tas_climb_kt=160.0, tas_cruise_kt=240.0, tas_descent_kt=220.0, climb_rate_fpm=1000.0,
                 descent_rate_fpm=1500.0, body_diameter_m=0.05, name="fuzz", description="constant true airspeeds")
COUNTER = itertools.count()
SETTINGS = settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])

good_lat = st.floats(-89.0, 89.0).map(lambda v: f"{v:.4f}")
good_lon = st.floats(-180.0, 360.0).map(lambda v: f"{v:.4f}")
bad_number = st.one_of(st.floats(allow_nan=True, allow_infinity=True).map(repr), st.integers(-400, 400).map(str),
                       st.sampled_from(["", "52,5", "N52", "1e999"]))
altitudes = st.one_of(st.integers(0, 600).map(lambda n: f"FL{n:03d}"), st.integers(-2000, 60000).map(str),
                      st.integers(-600, 18000).map(lambda n: f"{n} m"))
bad_altitude = st.one_of(st.integers(601, 999).map(lambda n: f"FL{n}"), st.integers(60001, 10**7).map(str),
                         st.sampled_from(["", "FL", "high", "1e9", "-3000"]))
times = st.datetimes(min_value=pd.Timestamp("1900-01-01").to_pydatetime(),
                     max_value=pd.Timestamp("2199-01-01").to_pydatetime()).map(lambda t: t.isoformat() + "Z")
bad_time = st.one_of(st.datetimes(min_value=pd.Timestamp("1000-01-01").to_pydatetime()).map(lambda t: t.isoformat()),
                     st.sampled_from(["2626-01-15T06:00Z", "2026-02-30T00:00Z", "noon", "NaT", "1850-01-01"]))
speeds = st.one_of(st.just(""), st.integers(40, 700).map(str), st.sampled_from(["250 kt", "130 m/s"]))
bad_speed = st.one_of(st.integers(-10, 39).map(str), st.integers(701, 10**6).map(str),
                      st.sampled_from(["5 m", "x", "250 furlongs", "-250 kt"]))
junk = st.text(alphabet=st.characters(blacklist_categories=("Cs",)), max_size=12)
names = st.text(alphabet="ABCDEFGHIJ", max_size=5)
good_cells = {"name": names, "latitude": good_lat, "longitude": good_lon, "altitude": altitudes,
              "speed_kt": speeds, "time": st.one_of(st.just(""), times)}
# Cells of a damaged file: valid or damaged (hypothesis picks among the branches).
cells = {"name": st.one_of(names, junk), "latitude": st.one_of(good_lat, bad_number),
         "longitude": st.one_of(good_lon, bad_number), "altitude": st.one_of(altitudes, bad_altitude),
         "speed_kt": st.one_of(speeds, bad_speed), "time": st.one_of(st.just(""), times, bad_time)}


@st.composite
def headers(draw):
    if draw(st.integers(0, 5)) == 0:  # a random header
        return draw(st.lists(st.sampled_from([*cells, "remark", "Latitude", "", "lat"]), min_size=1, max_size=8))
    cols = ["name", "latitude", "longitude", "altitude"]
    cols += draw(st.lists(st.sampled_from(["speed_kt", "time", "remark"]), unique=True, max_size=3))
    cols = draw(st.permutations(cols))
    return [c.upper() if draw(st.booleans()) else c for c in cols]


@st.composite
def csv_routes(draw):
    cols = draw(headers())
    sep = draw(st.sampled_from([",", ";", "\t"]))
    end = draw(st.sampled_from(["\n", "\r\n", "\r"]))
    rows = [sep.join(cols)]
    damaged = draw(st.booleans())
    pool = cells if damaged else good_cells
    for _ in range(draw(st.integers(1, 5))):
        row = [draw(pool.get(c.lower(), junk)) for c in cols]
        if damaged and draw(st.integers(0, 3)) == 0 and row:  # a cell too many or too few, or junk in a cell
            k = draw(st.integers(0, len(row) - 1))
            row = draw(st.sampled_from([row[:k], row + ["x"], row[:k] + [draw(junk)] + row[k + 1:]]))
        rows.append(sep.join(row))
    if draw(st.booleans()):
        rows.insert(draw(st.integers(0, len(rows))), "# a comment")
    text = end.join(rows) + end
    encoding = draw(st.sampled_from(["utf-8", "utf-8-sig", "utf-16"]))
    return text.encode(encoding, errors="replace")


json_values = st.recursive(st.none() | st.booleans() | st.floats() | st.integers() | junk,
                           lambda inner: st.lists(inner, max_size=4) | st.dictionaries(junk, inner, max_size=4),
                           max_leaves=12)
good_coordinates = st.lists(st.tuples(st.floats(-180, 180), st.floats(-90, 90), st.floats(-600, 18000)).map(list),
                            min_size=2, max_size=5)
coordinates = st.one_of(
    good_coordinates, good_coordinates,
    st.lists(st.lists(st.one_of(st.floats(-200, 200), st.floats(-500, 30000)), min_size=2, max_size=4),
             max_size=5),
    json_values)


@st.composite
def geojson_routes(draw):
    coords = draw(coordinates)
    n = len(coords) if isinstance(coords, list) else 2
    props = {}
    if draw(st.booleans()):
        props["names"] = draw(st.one_of(st.lists(names, min_size=n, max_size=n),
                                        st.lists(names, min_size=n, max_size=n), json_values))
    if draw(st.booleans()):
        props["flight_levels"] = draw(st.one_of(st.lists(st.booleans(), min_size=n, max_size=n),
                                                st.lists(st.booleans(), min_size=n, max_size=n), json_values))
    if draw(st.booleans()):
        props["departure"] = draw(st.one_of(times, times, bad_time, json_values))
    if draw(st.integers(0, 3)) == 0:
        props[draw(junk)] = draw(json_values)
    line = {"type": "LineString", "coordinates": coords}
    geometry = draw(st.one_of(st.just(line), st.just(line), json_values))
    feature = {"type": "Feature", "properties": draw(st.one_of(st.just(props), st.just(props), json_values)),
               "geometry": geometry}
    obj = draw(st.sampled_from(["feature", "collection", "bare", "feature", "junk"]))
    if obj == "collection":
        doc = {"type": "FeatureCollection", "features": draw(st.one_of(st.just([feature]), json_values))}
    elif obj == "bare":
        doc = geometry
    elif obj == "junk":
        doc = draw(json_values)
    else:
        doc = feature
    text = json.dumps(doc, allow_nan=True)
    if draw(st.integers(0, 4)) == 0:  # damaged text
        k = draw(st.integers(0, len(text)))
        text = text[:k] + draw(st.sampled_from(["", "}", "[", ",", "\x00", "NaN"])) + text[k + 1:]
    return text.encode("utf-8", errors="replace")


def check(path, departure):
    """The property: a clean Route that flies, or a RouteFormatError naming the file."""
    try:
        route = read_route(path, departure=departure)
    except RouteFormatError as exc:
        assert exc.file == str(path), exc
        assert exc.reason
        return
    assert isinstance(route, Route) and len(route.waypoints) >= 2
    for w in route.waypoints:
        assert -90.0 <= w.latitude <= 90.0 and -180.0 <= w.longitude <= 360.0
        assert ALTITUDE_LIMITS_FT[0] <= w.altitude_ft <= ALTITUDE_LIMITS_FT[1]
    assert route.departure.tzname() == "UTC" and TIME_LIMITS[0] <= route.departure < TIME_LIMITS[1]
    arrays = timed_arrays(plan_geometry(route, PLANE), step_s=900.0)
    assert np.isfinite(arrays["time_s"]).all() and (arrays["duration_s"] >= 0).all()
    assert np.isfinite(arrays["latitude"]).all() and np.isfinite(arrays["altitude_ft"]).all()


@SETTINGS
@given(raw=csv_routes(), departure=st.one_of(st.none(), st.just("2026-01-15T06:00Z")))
def test_csv_routes_read_or_fail_cleanly(tmp_path, raw, departure):
    path = tmp_path / f"fuzz{next(COUNTER)}.csv"
    path.write_bytes(raw)
    check(path, departure)


@SETTINGS
@given(raw=geojson_routes(), departure=st.one_of(st.none(), st.just("2026-01-15T06:00Z")))
def test_geojson_routes_read_or_fail_cleanly(tmp_path, raw, departure):
    path = tmp_path / f"fuzz{next(COUNTER)}.geojson"
    path.write_bytes(raw)
    check(path, departure)


@SETTINGS
@given(raw=st.binary(max_size=200))
def test_random_bytes_read_or_fail_cleanly(tmp_path, raw):
    path = tmp_path / f"fuzz{next(COUNTER)}.route"
    path.write_bytes(raw)
    check(path, "2026-01-15T06:00Z")

"""Fuzzing the Item 15 route reader (hypothesis): routes built from the elements of ICAO Doc 4444 (PANS-ATM),
Appendix 2, Item 15 (a) speed, (b) level, (c) route (rules from memory), valid, damaged and random.

Properties: every text gives either a Route that can be flown and sampled or a RouteFormatError naming the
source (project rule: bad input gets a typed error naming the file, line and reason), never another exception;
a route that reads is written back by format_item15 into text that reads to the same route (speeds within half
a knot, since the writer uses whole knots). Point names and positions are invented.
"""

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

import icing.flight.route as route_module
from icing.errors import RouteFormatError
from icing.flight.aircraft import Aircraft
from icing.flight.item15 import WaypointTable, format_item15, read_item15
from icing.flight.route import ALTITUDE_LIMITS_FT, SPEED_LIMITS_KT, Route, Waypoint, plan_geometry, timed_arrays

PLANE = Aircraft(tas_climb_kt=160.0, tas_cruise_kt=240.0, tas_descent_kt=220.0, climb_rate_fpm=1000.0,
                 descent_rate_fpm=1500.0, body_diameter_m=0.05, name="fuzz", description="constant true airspeeds")
TABLE = WaypointTable({"ALDRN": (47.25, -31.5), "BRIXO": (48.0, -30.0), "CORVU": (49.5, -28.25),
                       "DAVLE": (50.75, -27.0), "EP": (-12.5, 179.5), "WP1": (60.0, 10.0)},
                      variation={"BRIXO": 8.5},
                      airways={"QX12": ["ALDRN", "BRIXO", "CORVU", "DAVLE"]})


def _as_route(text, waypoints, *, departure, source):
    """As icing.flight.route.parse_item15 (which runs instead once wired in)."""
    filed = read_item15(text, waypoints, source=source, altitude_limits_ft=ALTITUDE_LIMITS_FT,
                        speed_limits_kt=SPEED_LIMITS_KT)
    wps = [Waypoint(p.name, p.latitude, p.longitude, p.altitude_ft, p.flight_level, p.speed_kt)
           for p in filed.points]
    return Route(wps, departure=departure, source=source, notes=filed.notes)


parse_item15 = getattr(route_module, "parse_item15", _as_route)
SETTINGS = settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
SOURCE = "fuzz-route.txt"

speeds = st.one_of(st.integers(40, 700).map(lambda n: f"N{n:04d}"), st.integers(10, 99).map(lambda n: f"M{n:03d}"),
                   st.integers(80, 1290).map(lambda n: f"K{n:04d}"))
levels = st.one_of(st.integers(0, 600).map(lambda n: f"F{n:03d}"), st.integers(0, 600).map(lambda n: f"A{n:03d}"),
                   st.integers(0, 1800).map(lambda n: f"S{n:04d}"), st.integers(0, 1800).map(lambda n: f"M{n:04d}"))
bad_groups = st.one_of(st.integers(0, 9999).map(lambda n: f"N{n:04d}F{n % 1000:03d}"),
                       st.sampled_from(["N0250VFR", "M999F999", "K9999M9999", "N025F140", "F140", "N0000A000"]))
groups = st.builds(lambda s, lv: s + lv, speeds, levels)
coords7 = st.builds(lambda la, ns, lo, ew: f"{la:02d}{ns}{lo:03d}{ew}", st.integers(0, 90), st.sampled_from("NS"),
                    st.integers(0, 180), st.sampled_from("EW"))
coords11 = st.builds(lambda la, lam, ns, lo, lom, ew: f"{la:02d}{lam:02d}{ns}{lo:03d}{lom:02d}{ew}",
                     st.integers(0, 89), st.integers(0, 59), st.sampled_from("NS"), st.integers(0, 179),
                     st.integers(0, 59), st.sampled_from("EW"))
bad_coords = st.builds(lambda la, lam, ns, lo, lom, ew: f"{la:02d}{lam:02d}{ns}{lo:03d}{lom:02d}{ew}",
                       st.integers(0, 99), st.integers(0, 99), st.sampled_from("NS"), st.integers(0, 999),
                       st.integers(0, 99), st.sampled_from("EW"))
named = st.sampled_from(sorted(TABLE.points))
bearing = st.builds(lambda p, b, d: f"{p}{b:03d}{d:03d}", st.sampled_from(["ALDRN", "BRIXO", "XYZZY"]),
                    st.integers(0, 400), st.integers(0, 999))
points = st.one_of(named, coords7, coords11, bearing, bad_coords, st.sampled_from(["ZULUX", "UL975", "A1", "C"]))
changes = st.builds(lambda p, g: f"{p}/{g}", points, st.one_of(groups, bad_groups))
junk = st.text(alphabet=st.characters(blacklist_categories=("Cs",), blacklist_characters="\x00"), max_size=10)
words = st.sampled_from(["DCT", "DCT", "VFR", "IFR", "QX12", "/", "C/48N050W/M082F290PLUS"])
elements = st.one_of(points, changes, words, junk)


@st.composite
def route_texts(draw):
    first = draw(st.one_of(groups, groups, bad_groups, junk))
    body = draw(st.lists(elements, min_size=0, max_size=10))
    seps = [draw(st.sampled_from([" ", "  ", "\n", "\t", "\r\n"])) for _ in body]
    return first + "".join(s + e for s, e in zip(seps, body, strict=True))


@st.composite
def valid_route_texts(draw):
    """Routes following the rules: DCT wherever a named point meets another point."""
    out = [draw(groups)]
    prev_named = None
    n = draw(st.integers(2, 8))
    for _ in range(n):
        p = draw(st.one_of(named, coords7, coords11))
        is_named = p in TABLE.points
        if prev_named is not None and (prev_named or is_named):
            out.append("DCT")
        if draw(st.integers(0, 3)) == 0:
            p = f"{p}/{draw(groups)}"
        out.append(p)
        prev_named = is_named
    return " ".join(out)


def check_outcome(text):
    try:
        r = parse_item15(text, TABLE, departure="2026-01-15T05:00Z", source=SOURCE)
    except RouteFormatError as exc:
        assert exc.file == SOURCE
        assert exc.reason
        return None
    assert isinstance(r, Route) and len(r.waypoints) >= 2
    geo = plan_geometry(r, PLANE)
    arrays = timed_arrays(geo, 300.0)
    assert (arrays["duration_s"] > 0).all()
    return r


@SETTINGS
@given(route_texts())
def test_any_text_is_a_route_or_a_typed_error(text):
    check_outcome(text)


@SETTINGS
@given(valid_route_texts())
def test_routes_that_read_round_trip(text):
    r1 = check_outcome(text)
    if r1 is None:  # a valid form may still break a limit (speed, altitude, a leg of no length)
        return
    out = format_item15(r1)
    r2 = parse_item15(out, TABLE, departure="2026-01-15T05:00Z", source=SOURCE)
    assert [w.name for w in r1.waypoints] == [w.name for w in r2.waypoints]
    for u, v in zip(r1.waypoints, r2.waypoints, strict=True):
        assert_allclose([u.latitude, u.longitude, u.altitude_ft], [v.latitude, v.longitude, v.altitude_ft],
                        rtol=1e-12, atol=1e-9)
        assert u.flight_level is v.flight_level
        assert_allclose(u.speed_kt, v.speed_kt, atol=0.5)
    assert format_item15(r2) == out

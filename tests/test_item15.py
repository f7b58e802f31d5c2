"""Routes as filed: ICAO flight-plan Item 15 parsed against the rules of ICAO Doc 4444 (PANS-ATM), Appendix 2,
Item 15 (paragraphs (a) speed, (b) level, (c) route; the rules written from memory of the document).

Every point name and position here is invented (no real aid, airport or route); the check values come from
the document's rules, exact unit definitions (1 NM = 1852 m, 1 ft = 0.3048 m), the US Standard Atmosphere 1976
and pyproj's WGS 84 geodesic.
"""

import math

import pytest
from numpy.testing import assert_allclose
from pyproj import Geod

import icing.flight.route as route_module
from icing.errors import RouteFormatError
from icing.flight.aircraft import Aircraft
from icing.flight.item15 import (
    DEFAULT_ALTITUDE_LIMITS_FT,
    DEFAULT_SPEED_LIMITS_KT,
    WaypointTable,
    format_item15,
    read_item15,
    read_waypoints,
    sniff_item15,
    speed_level_group,
)
from icing.flight.route import ALTITUDE_LIMITS_FT, SPEED_LIMITS_KT, Route, Waypoint, trajectory


def _as_route(text, waypoints=None, *, departure=None, source="<string>", name=""):
    """The Route of an Item 15 text, as icing.flight.route.parse_item15 makes it (this stands in until that is
    wired in; the tests then run through it)."""
    filed = read_item15(text, waypoints, source=source, altitude_limits_ft=ALTITUDE_LIMITS_FT,
                        speed_limits_kt=SPEED_LIMITS_KT)
    wps = [Waypoint(p.name, p.latitude, p.longitude, p.altitude_ft, p.flight_level, p.speed_kt)
           for p in filed.points]
    return Route(wps, departure=departure, name=name, source=source, notes=filed.notes)


parse_item15 = getattr(route_module, "parse_item15", _as_route)

DEP = "2026-01-15T05:00Z"
# Invented points of an invented region.
TABLE = {"ALDRN": (47.25, -31.5), "BRIXO": (48.0, -30.0), "CORVU": (49.5, -28.25), "DAVLE": (50.75, -27.0),
         "EP": (48.6, -29.1)}
WGS84 = Geod(ellps="WGS84")
PLANE = Aircraft(tas_climb_kt=160.0, tas_cruise_kt=240.0, tas_descent_kt=220.0, climb_rate_fpm=1000.0,
                 descent_rate_fpm=1500.0, body_diameter_m=0.05, name="test", description="constant true airspeeds")


def parse(text, table=TABLE, **kw):
    kw.setdefault("departure", DEP)
    return parse_item15(text, table, **kw)


def error(text, table=TABLE, **kw) -> RouteFormatError:
    kw.setdefault("source", "plan.txt")
    with pytest.raises(RouteFormatError) as info:
        parse(text, table, **kw)
    assert info.value.file == "plan.txt"
    return info.value


# ---------------------------------------------------------------------------------------------------------------
# Item 15 (a) and (b): speed and level

@pytest.mark.parametrize(("group", "kt"), [
    ("N0250F140", 250.0),                      # N: knots, 4 figures
    ("K0463F140", 463.0 / 1.852),               # K: km/h, 4 figures; 1 NM = 1852 m (exact)
])
def test_speed_groups_in_knots_and_kmh(group, kt):
    """Doc 4444 App. 2 Item 15 (a): N and 4 figures knots, K and 4 figures km/h (1 kt = 1.852 km/h exactly)."""
    r = parse(f"{group} ALDRN DCT BRIXO")
    assert_allclose([w.speed_kt for w in r.waypoints], kt, rtol=1e-12)


def test_mach_above_the_tropopause_uses_the_standard_speed_of_sound():
    """Doc 4444 App. 2 Item 15 (a): M and 3 figures, hundredths of Mach. At FL400 (12,192 m, isothermal layer of
    the US Standard Atmosphere 1976, 216.65 K) the speed of sound is 295.07 m/s (US 1976 tables, from memory):
    M080 is 0.80 x 295.07 m/s."""
    r = parse("M080F400 ALDRN DCT BRIXO")
    assert_allclose(r.waypoints[0].speed_kt, 0.80 * 295.07 / (1852.0 / 3600.0), rtol=1e-4)


def test_mach_below_the_tropopause_by_the_lapse_rate():
    """M050 at A100: the standard temperature at 3048 m is 288.15 - 6.5 K/km x 3.048 km (US 1976), and the speed
    of sound sqrt(1.4 x 287.053 x T) (ideal gas, US 1976 constants), recomputed here."""
    t = 288.15 - 6.5 * 3.048
    a = math.sqrt(1.4 * 287.05287 * t)
    r = parse("M050A100 ALDRN DCT BRIXO")
    assert_allclose(r.waypoints[0].speed_kt, 0.5 * a * 3600.0 / 1852.0, rtol=1e-6)


@pytest.mark.parametrize(("level", "ft", "fl"), [
    ("F140", 14000.0, True),                     # flight level, 3 figures, hundreds of feet of pressure altitude
    ("A045", 4500.0, False),                     # altitude, 3 figures, hundreds of feet
    ("S1130", 11300.0 / 0.3048, True),           # standard metric level, 4 figures, tens of metres
    ("M0840", 8400.0 / 0.3048, False),           # altitude, 4 figures, tens of metres
])
def test_level_groups(level, ft, fl):
    """Doc 4444 App. 2 Item 15 (b); 1 ft = 0.3048 m exactly."""
    r = parse(f"N0300{level} ALDRN DCT BRIXO")
    for w in r.waypoints:
        assert_allclose(w.altitude_ft, ft, rtol=1e-12)
        assert w.flight_level is fl


def test_vfr_level_is_refused_for_want_of_an_altitude():
    e = error("N0120VFR ALDRN DCT BRIXO")
    assert "VFR" in e.reason and "no altitude" in e.reason and (e.line, e.column) == (1, 1)


@pytest.mark.parametrize("group", ["N250F140", "N0250F14", "N0250", "F140", "M82F350", "K0463X140", "N0250F140X",
                                   "M0820F350"])
def test_malformed_speed_level_groups(group):
    """The groups have fixed lengths (Doc 4444 App. 2 Item 15 (a), (b)): anything else is refused at column 1."""
    e = error(f"{group} ALDRN DCT BRIXO")
    assert (e.line, e.column) == (1, 1)


@pytest.mark.parametrize(("group", "what"), [("N0010F140", "speed"), ("N0250F990", "level"),
                                             ("M300F350", "speed")])
def test_speeds_and_levels_outside_the_route_limits(group, what):
    e = error(f"{group} ALDRN DCT BRIXO")
    assert what in e.reason


# ---------------------------------------------------------------------------------------------------------------
# Item 15 (c) 2: significant points

@pytest.mark.parametrize(("token", "lat", "lon"), [
    ("46N078W", 46.0, -78.0),                    # degrees only, 7 characters
    ("4620N07805W", 46 + 20 / 60, -(78 + 5 / 60)),   # degrees and minutes, 11 characters
    ("05S010E", -5.0, 10.0),
    ("0030S17959E", -0.5, 179 + 59 / 60),
    ("90N000E", 90.0, 0.0),
])
def test_coordinate_points(token, lat, lon):
    """Doc 4444 App. 2 Item 15 (c) 2: latitude 2 figures (+2 of minutes) and N/S, longitude 3 figures (+2) and
    E/W; the group keeps its text as the waypoint's name."""
    r = parse(f"N0250F140 {token} DCT ALDRN")
    w = r.waypoints[0]
    assert w.name == token
    assert_allclose([w.latitude, w.longitude], [lat, lon], atol=1e-12)


@pytest.mark.parametrize(("token", "why"), [("4660N07805W", "minutes"), ("4620N07860W", "minutes"),
                                            ("91N000E", "latitude"), ("9001N00000E", "latitude"),
                                            ("00N181E", "longitude"), ("0000N18001W", "longitude")])
def test_coordinates_out_of_range(token, why):
    e = error(f"N0250F140 ALDRN DCT {token}")
    assert why in e.reason and e.column == len("N0250F140 ALDRN DCT ") + 1


def test_bearing_and_distance_against_the_geodesic():
    """Doc 4444 App. 2 Item 15 (c) 2: point, 3 figures of bearing (degrees magnetic), 3 figures of distance (NM);
    with the table's magnetic variation (east positive: true = magnetic + variation) the point lies on the WGS 84
    geodesic (pyproj) from the reference point."""
    table = WaypointTable(dict(TABLE), variation={"BRIXO": -12.0})
    r = parse("N0250F140 ALDRN DCT BRIXO DCT BRIXO180040", table)
    lon, lat, _ = WGS84.fwd(TABLE["BRIXO"][1], TABLE["BRIXO"][0], 168.0, 40 * 1852.0)
    w = r.waypoints[-1]
    assert w.name == "BRIXO180040"
    assert_allclose([w.latitude, w.longitude], [lat, lon], atol=1e-9)
    assert not any("taken as true" in n for n in r.notes)


def test_bearing_without_variation_is_taken_as_true_with_a_note():
    r = parse("N0250F140 ALDRN DCT BRIXO270100")
    lon, lat, _ = WGS84.fwd(TABLE["BRIXO"][1], TABLE["BRIXO"][0], 270.0, 100 * 1852.0)
    assert_allclose([r.waypoints[-1].latitude, r.waypoints[-1].longitude], [lat, lon], atol=1e-9)
    assert any("BRIXO270100" in n and "taken as true" in n for n in r.notes)


def test_bearing_errors():
    assert "not in the waypoint table" in error("N0250F140 ALDRN DCT XYZZY090010").reason
    assert "bearing" in error("N0250F140 ALDRN DCT BRIXO361010").reason


def test_named_point_not_in_the_table():
    e = error("N0250F140 ALDRN DCT ZULUX")
    assert e.reason == "point ZULUX is not in the waypoint table (--waypoints)"
    assert (e.line, e.column) == (1, 21)


def test_dct_between_named_points_and_not_between_coordinates():
    """Doc 4444 App. 2 Item 15 (c): DCT between successive points unless both are geographical coordinates or
    bearing and distance."""
    assert len(parse("N0250F140 47N030W 48N029W 4830N02830W BRIXO180040 DCT ALDRN").waypoints) == 5
    e = error("N0250F140 ALDRN BRIXO")
    assert "DCT" in e.reason and e.column == 17
    e = error("N0250F140 ALDRN 48N029W")
    assert "DCT" in e.reason
    assert parse("N0250F140 DCT ALDRN DCT BRIXO").waypoints[0].name == "ALDRN"   # DCT may lead to the first point


@pytest.mark.parametrize(("text", "column", "what"), [
    ("N0250F140 ALDRN DCT DCT BRIXO", 21, "DCT"),
    ("N0250F140 ALDRN DCT", 17, "ends with DCT"),
    ("N0250F140 ALDRN", 11, "at least two"),
    ("N0250F140", 1, "at least two"),
    ("N0250F140 ALDRN DCT ALDRN", 21, "same position"),
    ("N0250F140 ALDRN DCT BRIXO N0300F160", 27, "speed and level group stands first"),
    ("N0250F140 ALDRN DCT BR-XO", 21, "not an Item 15 route element"),
])
def test_sequence_errors_name_line_and_column(text, column, what):
    e = error(text)
    assert (e.line, e.column) == (1, column) and what in e.reason


def test_errors_on_later_lines_and_message_field_separator():
    """A route may run over lines (as in an ICAO message, where '-' opens the field); line and column point at
    the token."""
    r = parse("-N0250F140 ALDRN\n  DCT BRIXO")
    assert [w.name for w in r.waypoints] == ["ALDRN", "BRIXO"]
    e = error("# plan of the day\nN0250F140 ALDRN\n  DCT BRIXO UQ123 CORVU")
    assert (e.line, e.column) == (3, 13)
    assert str(e).startswith("plan.txt, line 3, column 13: ")


# ---------------------------------------------------------------------------------------------------------------
# Item 15 (c) 1, 3, 4, 5: airways, changes of speed and level, flight rules, cruise climb

@pytest.mark.parametrize("airway", ["UL975", "A1", "QX12", "ALDRN1A"])
def test_airways_are_refused_with_the_way_out(airway):
    """Doc 4444 App. 2 Item 15 (c) 1: an ATS route designator has 2 to 7 characters."""
    e = error(f"N0250F140 ALDRN {airway} BRIXO")
    assert e.reason == (f"airway {airway} is not supported; give the points along it, or define them in "
                        "--waypoints")
    assert e.column == 17


def test_airway_defined_in_the_table_is_flown_along_its_points(tmp_path):
    """Points along an airway from the table, in either direction, strictly between the entry and exit."""
    f = tmp_path / "points.csv"
    f.write_text("name,latitude,longitude,airway\nALDRN,47.25,-31.5,QX12\nBRIXO,48.0,-30.0,QX12\n"
                 "CORVU,49.5,-28.25,QX12\nDAVLE,50.75,-27.0,QX12\nDAVLE,50.75,-27.0,\n")
    r = parse("N0250F140 ALDRN QX12 DAVLE", f)
    assert [w.name for w in r.waypoints] == ["ALDRN", "BRIXO", "CORVU", "DAVLE"]
    r = parse("N0250F140 DAVLE QX12 BRIXO DCT 48N032W", f)
    assert [w.name for w in r.waypoints] == ["DAVLE", "CORVU", "BRIXO", "48N032W"]
    e = error("N0250F140 ALDRN QX12 46N030W", f)
    assert "46N030W is not on it" in e.reason


def test_change_of_speed_and_level_commences_at_its_point():
    """Doc 4444 App. 2 Item 15 (c) 3: point/speed level, both always given. The change commences at the point:
    the leg after it flies the new speed and ends at the new level."""
    r = parse("N0250F140 ALDRN DCT BRIXO/N0280F180 DCT CORVU DCT 49N027W/K0400A090 49N026W")
    got = [(w.name, w.speed_kt, w.altitude_ft, w.flight_level) for w in r.waypoints]
    assert got[:4] == [("ALDRN", 250.0, 14000.0, True), ("BRIXO", 280.0, 14000.0, True),
                       ("CORVU", 280.0, 18000.0, True), ("49N027W", pytest.approx(400 / 1.852), 18000.0, True)]
    assert got[4][2:] == (9000.0, False)
    tr = trajectory(r, PLANE, step_s=30.0)
    assert tr.loc[tr["leg"] == 1, "phase"].iloc[0] == "climb"          # climbs right after BRIXO
    assert tr.loc[tr["leg"] == 0, "altitude_ft"].eq(14000.0).all()


def test_change_of_speed_and_level_at_the_first_and_last_points():
    r = parse("N0250F140 ALDRN/N0300F160 DCT BRIXO DCT CORVU/N0200F100")
    assert [(w.speed_kt, w.altitude_ft) for w in r.waypoints] == [(300.0, 14000.0), (300.0, 16000.0),
                                                                  (200.0, 16000.0)]
    assert any("last point CORVU" in n and "not flown" in n for n in r.notes)


def test_change_group_errors_point_inside_the_token():
    e = error("N0250F140 ALDRN DCT BRIXO/N0280F18 DCT CORVU")
    assert e.column == len("N0250F140 ALDRN DCT BRIXO/") + 1
    assert "speed and level group" in e.reason
    assert "point before" in error("N0250F140 ALDRN DCT /N0280F180 DCT CORVU").reason


def test_flight_rules_changes_are_noted():
    """Doc 4444 App. 2 Item 15 (c) 4: the point, a space, VFR or IFR."""
    r = parse("N0120A045 ALDRN VFR DCT BRIXO/N0130A055 IFR DCT CORVU")
    assert "flight rules change to VFR at ALDRN" in r.notes
    assert "flight rules change to IFR at BRIXO" in r.notes
    assert "follow a point" in error("N0120A045 VFR ALDRN DCT BRIXO").reason
    assert "DCT" in error("N0120A045 ALDRN VFR BRIXO").reason


@pytest.mark.parametrize("token", ["C/48N050W/M082F290F350", "C/48N050W/M082F290PLUS"])
def test_cruise_climb_is_refused(token):
    """Doc 4444 App. 2 Item 15 (c) 5: C/point/speed levels."""
    e = error(f"N0450F290 ALDRN DCT {token} DCT BRIXO")
    assert "cruise climb" in e.reason and e.column == 21


def test_limits_are_those_of_routes():
    assert DEFAULT_ALTITUDE_LIMITS_FT == ALTITUDE_LIMITS_FT and DEFAULT_SPEED_LIMITS_KT == SPEED_LIMITS_KT


def test_points_know_where_their_tokens_stand():
    filed = read_item15("N0250F140 ALDRN\n DCT BRIXO/N0300F150 DCT 48N029W", TABLE)
    assert [(p.name, p.line, p.column) for p in filed.points] == [("ALDRN", 1, 11), ("BRIXO", 2, 6),
                                                                  ("48N029W", 2, 26)]


def test_departure_is_needed():
    e = error("N0250F140 ALDRN DCT BRIXO", departure=None)
    assert "departure" in e.reason
    r = parse("n0250f140 aldrn dct brixo", departure="2026-01-15T07:30Z")
    assert str(r.departure) == "2026-01-15 07:30:00+00:00"


def test_sniff():
    assert sniff_item15("N0250F140 ALDRN DCT BRIXO")
    assert sniff_item15("# a route\n\nM082F350 46N030W 47N029W\n")
    assert sniff_item15(b"K0463S1130 ALDRN")
    assert not sniff_item15("name,latitude,longitude,altitude\nA,1,2,FL100\n")
    assert not sniff_item15('{"type": "LineString"}')
    assert not sniff_item15("")


# ---------------------------------------------------------------------------------------------------------------
# The waypoint table

def test_waypoint_table_csv(tmp_path):
    f = tmp_path / "pts.csv"
    f.write_text("\ufeff# invented points\nName,Latitude,Longitude,Variation,remark\nALDRN,47.25,-31.5,-14.5,x\n"
                 "brixo,48.0,-30.0,,y\n")
    t = read_waypoints(f)
    assert t.points == {"ALDRN": (47.25, -31.5), "BRIXO": (48.0, -30.0)}
    assert t.variation == {"ALDRN": -14.5}
    assert any("remark" in n for n in t.notes)
    r = parse("N0250F140 ALDRN DCT BRIXO", str(f))
    assert any("remark" in n for n in r.notes)


@pytest.mark.parametrize(("text", "line", "what"), [
    ("", 1, "empty"),
    ("name,lat,lon\nA,1,2\n", 1, "missing column 'latitude'"),
    ("name,latitude,longitude\nALDRN,47,x\n", 2, "not a number"),
    ("name,latitude,longitude\nALDRN,97,1\n", 2, "outside"),
    ("name,latitude,longitude\nALDRN,47,1\n\nALDRN,48,1\n", 4, "defined twice"),
    ("name,latitude,longitude\nALDRN,47\n", 2, "cells"),
    ("name,latitude,longitude\nAL DRN,47,1\n", 2, "name"),
    ("name,latitude,longitude,name\nA,1,2,B\n", 1, "twice"),
])
def test_waypoint_table_errors_name_file_and_line(tmp_path, text, line, what):
    f = tmp_path / "pts.csv"
    f.write_text(text)
    with pytest.raises(RouteFormatError) as info:
        read_waypoints(f)
    assert info.value.file == str(f) and info.value.line == line and what in info.value.reason


def test_waypoint_table_missing_file(tmp_path):
    with pytest.raises(RouteFormatError, match="no such waypoint table"):
        parse("N0250F140 ALDRN DCT BRIXO", tmp_path / "none.csv")


# ---------------------------------------------------------------------------------------------------------------
# Round trips

ROUTES = [
    "N0250F140 ALDRN DCT BRIXO DCT CORVU",
    "N0250F140 DCT ALDRN DCT BRIXO/N0280F180 DCT 4930N02800W 50N027W DCT DAVLE",
    "M078F350 46N030W 4630N02900W 47N028W/M080F370 48N027W",
    "K0463S1130 ALDRN DCT BRIXO/K0500S1190 DCT CORVU",
    "N0180A045 ALDRN DCT EP/N0180M0150 DCT BRIXO090030 DCT DAVLE",
    "N0250F140 ALDRN/N0300F160 DCT BRIXO DCT CORVU/N0200F160",
    "N0120A045 ALDRN VFR DCT BRIXO/N0130A055 IFR DCT CORVU",
]


def same_route(a: Route, b: Route, speed_atol=0.0):
    assert [w.name for w in a.waypoints] == [w.name for w in b.waypoints]
    for u, v in zip(a.waypoints, b.waypoints, strict=True):
        assert_allclose([u.latitude, u.longitude, u.altitude_ft], [v.latitude, v.longitude, v.altitude_ft],
                        rtol=1e-12, atol=1e-9)
        assert u.flight_level is v.flight_level
        assert_allclose(u.speed_kt, v.speed_kt, atol=speed_atol)
    assert a.departure == b.departure


@pytest.mark.parametrize("text", ROUTES)
def test_parse_format_parse(text):
    """parse -> format -> parse gives the same route (speeds written in whole knots: within half a knot), and
    writing is then stable."""
    r1 = parse(text)
    out = format_item15(r1)
    assert sniff_item15(out)
    r2 = parse(out)
    same_route(r1, r2, speed_atol=0.5)
    assert format_item15(r2) == out
    same_route(r2, parse(format_item15(r2)))


def test_format_writes_what_was_read():
    """A route in knots with whole levels is written back token for token (a leading DCT, flight-rule changes and
    the speed of the first group when the first point changes it aside)."""
    for text in [ROUTES[0], ROUTES[1].replace("F140 DCT ", "F140 "),
                 "N0250F140 ALDRN DCT BRIXO/N0250F180 DCT CORVU/N0200F180"]:
        assert format_item15(parse(text)) == text


def test_format_a_route_from_points_as_coordinates():
    r = Route.from_points([("Start point", 47.25, -31.5, 9000), ("END", 48.5, -30.0, "FL120")], departure=DEP)
    out = format_item15(r, speed_kt=210)
    assert out == "N0210A090 4715N03130W/N0210F120 DCT END"
    assert format_item15(r, speed_kt=210, names=False) == "N0210A090 4715N03130W/N0210F120 4830N03000W"
    with pytest.raises(RouteFormatError, match="speed"):
        format_item15(r)
    odd = Route.from_points([("A", 47.0, -31.0, 9050), ("B", 48.0, -30.0, 9000)], departure=DEP)
    with pytest.raises(RouteFormatError, match="9050"):
        format_item15(odd, speed_kt=200)


def test_speed_level_group_levels():
    """Whole hundreds of feet as F/A, whole tens of metres as S/M (Doc 4444 App. 2 Item 15 (b))."""
    assert speed_level_group(250.4, 14000.0, True) == "N0250F140"
    assert speed_level_group(250.6, 4500.0, False) == "N0251A045"
    assert speed_level_group(480.0, 11300.0 / 0.3048, True) == "N0480S1130"
    assert speed_level_group(200.0, 8400.0 / 0.3048, False) == "N0200M0840"


# ---------------------------------------------------------------------------------------------------------------
# read_route (runs once icing.flight.route.parse_item15 is wired in)

@pytest.mark.skipif(not hasattr(route_module, "parse_item15"), reason="read_route does not read Item 15 yet")
def test_read_route_reads_an_item15_file(tmp_path):
    """A text file whose first group is a speed and level (Doc 4444 App. 2 Item 15 (a), (b)) is read as Item 15,
    with named points from a CSV; errors name the file, line and column."""
    pts = tmp_path / "points.csv"
    pts.write_text("name,latitude,longitude\n" + "".join(f"{k},{v[0]},{v[1]}\n" for k, v in TABLE.items()))
    plan = tmp_path / "plan.txt"
    plan.write_text("# filed\nN0250F140 ALDRN DCT BRIXO/N0280F180\n DCT 49N029W\n")
    r = route_module.read_route(plan, departure=DEP, waypoints=pts)
    assert [w.name for w in r.waypoints] == ["ALDRN", "BRIXO", "49N029W"]
    assert r.source == str(plan) and r.name == "plan"
    same_route(r, parse(plan.read_text()))
    plan.write_text("N0250F140 ALDRN UL975 BRIXO\n")
    with pytest.raises(RouteFormatError) as info:
        route_module.read_route(plan, departure=DEP, waypoints=pts)
    assert (info.value.file, info.value.line, info.value.column) == (str(plan), 1, 17)
    assert "airway UL975 is not supported" in info.value.reason

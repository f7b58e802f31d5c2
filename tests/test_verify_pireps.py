"""Pilot reports (UA/UUA): reading the encoded fields by the rules of the US pilot-report format.

The rules (FAA Order JO 7110.10, Flight Services, and the Aeronautical Information Manual, chapter 7, "Pilot
weather reports", both from memory): ``UA`` routine, ``UUA`` urgent; mandatory ``/OV`` (a fix, a fix with
bearing and distance as six digits, or latitude/longitude), ``/TM`` (hhmm UTC), ``/FL`` (three digits, hundreds
of feet, or UNKN, DURC, DURD), ``/TP`` (type, UNKN if not known); optional ``/SK``, ``/WX``, ``/TA`` (degrees
Celsius, M for minus), ``/WV``, ``/TB``, ``/IC`` (NEG, TRACE, LGT, MOD, SEV, ranges, and RIME, CLR, MXD), ``/RM``
last. Every report below is written by us from those rules, at invented fixes and places (no real report).
"""

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose
from pyproj import Geod

from icing.errors import IcingError
from icing.verify.pireps import PirepFormatError, parse_pirep, parse_pireps, read_pireps

FIXES = {"QXV": (50.0, -20.0), "ZUPRO": (-33.5, 151.25)}  # invented fixes


def test_routine_report_with_coordinates():
    """A routine report at latitude/longitude in degrees and minutes (4530N07315W is 45.5 N, 73.25 W), its time on
    the given date, FL080 = 8,000 ft, M04 = -4 degC, a range LGT-MOD of rime."""
    r = parse_pirep("UA /OV 4530N07315W/TM 1522/FL080/TP XX10/SK OVC030-TOP095/TA M04/IC LGT-MOD RIME/RM ICE BLO "
                    "FL090", date="2026-01-15")
    assert r["kind"] == "UA" and r["station"] is None
    assert_allclose([r["latitude"], r["longitude"]], [45.5, -73.25], rtol=0, atol=1e-12)
    assert r["time"] == np.datetime64("2026-01-15T15:22:00")
    assert r["flight_level"] == 80.0 and r["altitude_ft"] == 8000.0
    assert r["temperature_c"] == -4.0
    assert r["aircraft_type"] == "XX10" and r["sky"] == "OVC030-TOP095"
    assert r["icing"] is True and r["intensity"] == "moderate" and r["intensity_low"] == "light"
    assert r["ice_type"] == "rime"
    assert r["remarks"] == "ICE BLO FL090"  # /RM is the last field, text to the end


def test_urgent_report_from_a_fix_with_bearing_and_distance():
    """UUA with a station prefix; /OV QXV090025 is 25 NM on bearing 090 from fix QXV: the position is checked
    against pyproj's geodesic on WGS84 (bearing taken as true with magnetic_variation 0)."""
    r = parse_pirep("QXV UUA /OV QXV090025/TM 0005/FL120/TP UNKN/TA 02/IC SEV CLR", date="2026-02-03",
                    waypoints=FIXES)
    assert r["kind"] == "UUA" and r["station"] == "QXV"
    az, _, dist = Geod(ellps="WGS84").inv(-20.0, 50.0, r["longitude"], r["latitude"])
    assert_allclose(dist, 25 * 1852.0, rtol=1e-9)  # 1 NM = 1852 m exactly
    assert_allclose(az, 90.0, atol=1e-9)
    assert r["temperature_c"] == 2.0 and r["intensity"] == "severe" and r["ice_type"] == "glaze"
    assert r["time"] == np.datetime64("2026-02-03T00:05:00")


def test_magnetic_variation_turns_the_bearing():
    """A bearing from a fix is magnetic in the format: with 10 degrees east variation, 350 magnetic is 360 true,
    due north of the fix (true = magnetic + east variation, the navigator's rule)."""
    r = parse_pirep("UA /OV ZUPRO350010/TM 2359/FL050/TP XX10/IC TRACE", date="2026-03-01", waypoints=FIXES,
                    magnetic_variation=10.0)
    assert_allclose(r["longitude"], 151.25, atol=1e-9)
    assert r["latitude"] > -33.5
    assert r["intensity"] == "trace"


@pytest.mark.parametrize(("group", "icing", "word", "kind"), [
    ("NEG", False, "none", None), ("NEGclr", False, "none", None), ("TRACE RIME", True, "trace", "rime"),
    ("TRC", True, "trace", None), ("LGT MXD", True, "light", "mixed"), ("MOD CLR", True, "moderate", "glaze"),
    ("SEV RIME 060-080", True, "severe", "rime"), ("TRACE-LGT", True, "light", None), ("RIME", True, None, "rime"),
])
def test_icing_groups(group, icing, word, kind):
    """The /IC words of the format (NEG, TRACE, LGT, MOD, SEV, ranges; RIME, CLR, MXD); a null report is observed
    no icing; a type without a word is icing of unknown intensity."""
    r = parse_pirep(f"UA /OV 4000N01000E/TM 1200/FL100/TP XX10/IC {group}", date="2026-01-15")
    assert r["icing"] is icing and r["intensity"] == word and r["ice_type"] == kind


@pytest.mark.parametrize("level", ["UNKN", "DURC", "DURD"])
def test_unknown_flight_level(level):
    """UNKN, DURC, DURD carry no level: NaN, never a guess."""
    r = parse_pirep(f"UA /OV 4000N01000E/TM 1200/FL{level}/TP XX10/IC MOD", date="2026-01-15")
    assert np.isnan(r["flight_level"])


def test_report_without_icing_field_says_nothing_about_icing():
    r = parse_pirep("UA /OV 4000N01000E/TM 1200/FL100/TP XX10/TB LGT", date="2026-01-15")
    assert r["icing"] is None and r["intensity"] is None


@pytest.mark.parametrize(("text", "words"), [
    ("UA /TM 1200/FL100/TP XX10/IC MOD", "/OV"),
    ("UA /OV 4000N01000E/FL100/TP XX10/IC MOD", "/TM"),
    ("UA /OV 4000N01000E/TM 1200/TP XX10/IC MOD", "/FL"),
    ("UA /OV 4000N01000E/TM 1200/FL100/IC MOD", "/TP"),
    ("UA /OV 4000N01000E/TM 2460/FL100/TP XX10/IC MOD", "not a time of day"),
    ("UA /OV 4000N01000E/TM 1200/FL8000/TP XX10/IC MOD", "three digits"),
    ("UA /OV 4000N01000E/TM 1200/FL100/TP XX10/TA COLD/IC MOD", "/TA"),
    ("UA /OV 4000N01000E/TM 1200/FL100/TP XX10/IC BAD", "no intensity"),
    ("UA /OV 4000N01000E/TM 1200/FL100/TP XX10/IC NEG RIME", "NEG"),
    ("UA /OV 4075N01000E/TM 1200/FL100/TP XX10/IC MOD", "out of range"),
    ("UA /OV QXV-ZUPRO/TM 1200/FL100/TP XX10/IC MOD", "route"),
    ("UA /OV NOFIX/TM 1200/FL100/TP XX10/IC MOD", "not in the waypoint table"),
    ("UA /OV QXV/TM 1200/TM 1300/FL100/TP XX10/IC MOD", "twice"),
    ("SA /OV QXV/TM 1200/FL100/TP XX10/IC MOD", "UA or UUA"),
])
def test_bad_reports_raise_a_typed_error_naming_file_line_and_reason(text, words):
    """Bad input: a PirepFormatError (an IcingError) with the file, the line and the reason."""
    with pytest.raises(PirepFormatError) as err:
        parse_pirep(text, date="2026-01-15", waypoints=FIXES, file="reports.txt", line=7)
    assert isinstance(err.value, IcingError)
    assert words in str(err.value) and "reports.txt" in str(err.value) and "line 7" in str(err.value)


def test_a_fix_without_a_waypoint_table_is_refused():
    with pytest.raises(PirepFormatError, match="waypoint table"):
        parse_pirep("UA /OV QXV/TM 1200/FL100/TP XX10/IC MOD")


def test_several_reports_skipped_ones_recorded(tmp_path):
    """One report a line or separated by '='; a bad report is skipped with its line and reason recorded (never
    silently), or raised with errors='raise'."""
    text = ("UA /OV QXV/TM 1200/FL100/TP XX10/IC MOD RIME=UUA /OV QXV045010/TM 1210/FL090/TP XX10/IC SEV\n"
            "\n"
            "UA /OV QXV/TM 9999/FL100/TP XX10/IC NEG\n"
            "UA /OV 5000N02000W/TM 1230/FL060/TP XX10/IC NEG\n")
    frame = parse_pireps(text, "2026-01-15", FIXES, file="r.txt")
    assert list(frame["line"]) == [1, 1, 4]
    assert list(frame["kind"]) == ["UA", "UUA", "UA"]
    assert frame["icing"].tolist() == [True, True, False]
    assert str(frame["time"].dt.tz) == "UTC"
    assert frame["intensity"].cat.ordered and frame["intensity"].iloc[1] > frame["intensity"].iloc[0]
    (skip,) = frame.attrs["skipped"]
    assert skip["line"] == 3 and "time" in skip["reason"] and skip["file"] == "r.txt"
    with pytest.raises(PirepFormatError, match="line 3"):
        parse_pireps(text, "2026-01-15", FIXES, file="r.txt", errors="raise")
    with pytest.raises(PirepFormatError, match="no readable pilot report"):
        parse_pireps("nothing here\nUA /OV\n", "2026-01-15")


def test_read_from_files_with_a_waypoint_table(tmp_path):
    """A waypoint table name,latitude,longitude (header optional) and a report file."""
    wp = tmp_path / "fixes.csv"
    wp.write_text("name,latitude,longitude\nqxv,50.0,-20.0\nZUPRO,-33.5,151.25\n")
    rp = tmp_path / "reports.txt"
    rp.write_text("UA /OV QXV/TM 0600/FL080/TP XX10/TA M08/IC LGT RIME\n"
                  "UA /OV ZUPRO180005/TM 0610/FL040/TP XX10/IC NEG\n")
    frame = read_pireps(rp, date="2026-01-15", waypoints=wp)
    assert len(frame) == 2 and frame["file"].iloc[0] == str(rp)
    assert_allclose(frame[["latitude", "longitude"]].iloc[0], [50.0, -20.0])
    assert frame["latitude"].iloc[1] < -33.5
    assert frame["time"].iloc[1] == pd.Timestamp("2026-01-15T06:10Z")


@pytest.mark.parametrize(("content", "line"), [
    ("name,latitude,longitude\nQXV,50,-20\nQXV,51,-20\n", 3),  # one name at two places
    ("QXV,50,-20\n", 1),  # no header
    ("name,latitude,longitude\nQXV,95,-20\n", 2),
    ("name,latitude,longitude\nQXV,abc,-20\n", 2),
])
def test_bad_waypoint_tables(tmp_path, content, line):
    """The waypoint table is the project's one (icing.flight.item15): its typed errors name the file and line."""
    p = tmp_path / "wp.csv"
    p.write_text(content)
    with pytest.raises(IcingError) as err:
        read_pireps(_reports(tmp_path), date="2026-01-15", waypoints=p)
    assert err.value.line == line and err.value.file == str(p)


def _reports(tmp_path):
    rp = tmp_path / "reports.txt"
    rp.write_text("UA /OV QXV/TM 0600/FL080/TP XX10/IC LGT\n")
    return rp


def test_variation_from_the_waypoint_table(tmp_path):
    """A fix's variation in the table (10 degrees east) turns 350 magnetic to 360 true: due north of the fix;
    without a variation the bearing is taken as true and the report's notes say so."""
    wp = tmp_path / "fixes.csv"
    wp.write_text("name,latitude,longitude,variation\nQXV,50.0,-20.0,10\nZUPRO,-33.5,151.25,\n")
    rp = tmp_path / "reports.txt"
    rp.write_text("UA /OV QXV350010/TM 0600/FL080/TP XX10/IC NEG\nUA /OV ZUPRO350010/TM 0600/FL080/TP XX10/IC NEG\n")
    frame = read_pireps(rp, date="2026-01-15", waypoints=wp)
    assert_allclose(frame["longitude"].iloc[0], -20.0, atol=1e-9)
    assert frame["latitude"].iloc[0] > 50.0 and frame["notes"].iloc[0] == ""
    assert "taken as true" in frame["notes"].iloc[1] and frame["longitude"].iloc[1] < 151.25


def test_sky_layers_with_slashes_and_an_icing_layer():
    """Written after the layout of the format's examples (our own fixes and values): no space after UA, sky layers
    separated by '/' inside /SK (/OVC072 is no /OV field), a one-digit /TA, wind and turbulence groups, an icing
    layer 072-089 (7,200 to 8,900 ft) in /IC."""
    r = parse_pirep("UA/OV QXV 180020/TM 1800/FL120/TP XX90/SK BKN018-TOP055/OVC072-TOP089/CLR ABV/TA M7/WV 08021"
                    "/TB LGT 055-072/IC LGT-MOD RIME 072-089", date="2026-01-15", waypoints=FIXES)
    assert r["sky"] == "BKN018-TOP055/OVC072-TOP089/CLR ABV"
    assert r["temperature_c"] == -7.0 and r["flight_level"] == 120.0
    assert (r["icing_base_fl"], r["icing_top_fl"]) == (72.0, 89.0)
    assert r["intensity"] == "moderate" and r["ice_type"] == "rime"
    assert r["latitude"] < 50.0 and abs(r["longitude"] + 20.0) < 1e-6  # 20 NM due south of QXV

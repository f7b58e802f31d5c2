"""TEMP SHIP, TEMP DROP, TEMP MOBIL and PILOT reports, and the wind-by-height parts of a TEMP ascent, against
the code forms of WMO-No. 306 (Manual on Codes, Vol. I.1, Part A): FM 36, 37, 38 (section 1 with the call
sign D....D, the position 99LaLaLa QcLoLoLoLo MMMULaULo and, for MOBIL, h0h0h0h0im) and FM 32 (PILOT: 44nP1P1 /
55nP1P1 winds at standard surfaces, 9tnu1u2u3 winds by altitude in units of 300 m).

The code forms are from memory of WMO-No. 306 (the primary text was not at hand): the section-1 layouts,
code table 3333 (Qc: 1 N/E, 3 S/E, 5 S/W, 7 N/W), code table 1845 (im: 1-4 metres, 5-8 feet) and the 300 m
unit of the PILOT altitudes are "from memory" in that sense. Expected values are worked by hand from those
rules; the reports are our own, written from the rules with invented stations and call signs.
"""

import sys
import warnings
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

sys.path.insert(0, str(Path(__file__).parent))

from encoders import decode_one, value_at_pressure  # noqa: E402

from icing.errors import IcingWarning, SoundingFormatError  # noqa: E402
from icing.io import reader_for, temp  # noqa: E402

KNOT = 1852.0 / 3600.0
FOOT = 0.3048  # m per international foot (exact)

# Our own Part A of a land ascent (station 00101, day 15, 00 UTC, knots, Id = 1: winds up to 100 hPa).
BODY_A = """99012 04456 27010 00094 04256 27512
92728 02057 28015 85456 03462 28520 70065 08160 29030 50570 20569 30535
40737 28966 30540 30927 34371 31040 25040 43556 30560 20180 52960 29555
15370 56164 27540 10650 62760 26530 88220 56757 30545 77999="""
BODY_B = "00012 04456 11950 04656 22880 03462 33700 08160 44500 20569="
PART_A = "TTAA 65001 00101 " + BODY_A
PART_B = "TTBB 6500/ 00101 " + BODY_B


_at = value_at_pressure
_one = decode_one


# --- section 1 of the ship, drop and mobile forms ---------------------------------------------------------

@pytest.mark.parametrize("la, lo, lat, lon", [
    ("99512", "10253", 51.2, 25.3), ("99512", "30253", -51.2, 25.3), ("99512", "50253", -51.2, -25.3),
    ("99512", "71799", 51.2, -179.9), ("99000", "10000", 0.0, 0.0),
])
def test_position_groups_code_table_3333(la, lo, lat, lon):
    """WMO-No. 306 FM 36/37/38 section 1: LaLaLa and LoLoLoLo in tenths of a degree; quadrant Qc (code table
    3333, from memory) 1 north/east, 3 south/east, 5 south/west, 7 north/west."""
    assert_allclose(temp.decode_position(la, lo), (lat, lon))


@pytest.mark.parametrize("la, lo", [("99912", "10253"), ("99512", "20253"), ("98512", "10253"), ("99512", "11853")])
def test_position_groups_out_of_code(la, lo):
    """Latitude above 90, a quadrant figure not in code table 3333, a group without 99, longitude above 180."""
    with pytest.raises(ValueError):
        temp.decode_position(la, lo)


def test_temp_ship_part_a_and_b():
    """FM 36 TEMP SHIP, section 1: UUAA D....D YYGGId 99LaLaLa QcLoLoLoLo MMMULaULo, then the sections of
    FM 35. Position 99334 50217: 33.4 S 21.7 W (Qc 5); ULa 3, ULo 1 are the units digits of 33 and 21. The
    ship's own position is used (no station list needed); the launch is at sea level."""
    text = ("UUAA ZQXA7 65001 99334 50217 ///31 " + BODY_A + "\nUUBB ZQXA7 6500/ 99334 50217 ///31 " + BODY_B)
    ds = _one(text)
    assert ds.attrs["station"] == "ZQXA7" and ds.attrs["temp_form"] == "TEMP SHIP"
    assert_allclose([ds.attrs["latitude"], ds.attrs["longitude"], ds.attrs["elevation"]], [-33.4, -21.7, 0.0])
    assert ds.attrs["temp_parts"] == "AB"
    assert_allclose(_at(ds, 850, "height"), 1456.0)  # 85456: 1456 m (FM 35 regulation 35.2.2)
    assert_allclose(_at(ds, 950, "temperature"), 4.6)  # from UUBB
    assert not [e for e in ds.attrs["quality"] if e["action"] == "skipped"]


def test_temp_ship_call_sign_after_the_day_group_and_marsden_mismatch():
    """Liberal reading of FM 36 section 1: the call sign also accepted after YYGGId; a Marsden-square group
    whose units digits do not match the position is read past and recorded."""
    ds = _one("UUAA 65001 ZQXA7 99334 50217 12345 " + BODY_A)
    assert ds.attrs["station"] == "ZQXA7"
    assert_allclose(_at(ds, 700, "temperature"), -8.1)
    assert any("MMMULaULo" in e["reason"] for e in ds.attrs["quality"])


def test_temp_drop_has_no_call_sign():
    """FM 37 TEMP DROP, section 1: XXAA YYGGId 99LaLaLa QcLoLoLoLo MMMULaULo (no D....D): 24.1 N 70.8 W
    (Qc 7). The sonde falls to the sea surface, 1012 hPa."""
    ds = _one("XXAA 65001 99241 70708 ///40 " + BODY_A)
    assert ds.attrs["temp_form"] == "TEMP DROP"
    assert_allclose([ds.attrs["latitude"], ds.attrs["longitude"]], [24.1, -70.8])
    assert_allclose(_at(ds, 1012, "temperature"), 4.4)
    assert_allclose(_at(ds, 100, "wind_speed"), 30 * KNOT)


@pytest.mark.parametrize("group, elevation", [("02031", 203.0), ("06665", 666 * FOOT), ("01234", 123.0)])
def test_temp_mobil_station_elevation(group, elevation):
    """FM 38 TEMP MOBIL, section 1 ends with h0h0h0h0im: the station's elevation, im (code table 1845, from
    memory) 1-4 in metres, 5-8 in feet. The elevation is the surface height of the ascent."""
    body = "99968 04456 27010 00/// ///// ///// 92728 02057 28015 85456 03462 28520 70065 08160 29030 77999="
    ds = _one(f"IIAA MOB9 65007 99600 10055 ///05 {group} " + body)
    assert ds.attrs["temp_form"] == "TEMP MOBIL"
    assert_allclose(ds.attrs["elevation"], elevation, rtol=1e-9)
    assert_allclose(_at(ds, 968, "height"), elevation, rtol=1e-9)
    assert_allclose([ds.attrs["latitude"], ds.attrs["longitude"]], [60.0, 5.5])


def test_ship_nil_report_names_the_call_sign():
    """A NIL ship report (FM 36 with NIL after section 1) is a report with no data, named by its call sign."""
    with pytest.raises(SoundingFormatError, match="only NIL"):
        temp.decode_temp("UUAA ZQXA7 65001 99334 50217 ///31 NIL=", source="nil.txt")


# --- PILOT and winds by altitude -----------------------------------------------------------------------

def test_pilot_part_a_winds_at_standard_surfaces_merge_with_temp():
    """FM 32 PILOT Part A section 2: 44nP1P1 then n wind groups for n consecutive standard surfaces from P1P1
    (44300: three surfaces from 1000 hPa; 44270: two from 700 hPa). A standard surface already carrying a
    TEMP wind keeps it; the PILOT wind fills a surface whose TEMP wind is missing."""
    part_a = PART_A.replace("70065 08160 29030", "70065 08160 /////")
    pilot = "PPAA 6500/ 00101 44300 27512 28015 28520 44270 29535 30535="
    ds = _one(part_a + "\n" + pilot)
    assert ds.attrs["wind_parts"] == "A" and ds.attrs["temp_parts"] == "A"
    assert_allclose(_at(ds, 700, "wind_direction"), 295.0)  # 29535: 295 deg, 35 kt
    assert_allclose(_at(ds, 700, "wind_speed"), 35 * KNOT)
    assert_allclose(_at(ds, 925, "wind_speed"), 15 * KNOT)
    assert_allclose(_at(ds, 700, "temperature"), -8.1)


def test_pilot_part_b_winds_by_altitude():
    """FM 32 PILOT Part B section 4 (the wind-by-height part PPBB of a TEMP ascent): 9tnu1u2u3 then a wind
    for each altitude, altitude (10 tn + u) x 300 m (from memory); 90012: 0 (the surface), 300, 600 m;
    90346: 900, 1200, 1800 m. Each wind gets the pressure at its altitude by log-pressure interpolation in
    the ascent's heights; check against that interpolation between the reported standard surfaces 925 hPa
    (728 m) and 850 hPa (1456 m) worked here, to 1 hPa (the significant levels between carry hypsometric
    heights, common practice)."""
    ppbb = "PPBB 6500/ 00101 90012 27010 27515 28020 90346 28525 29030 30040="
    ds = _one(PART_A + "\n" + PART_B + "\n" + ppbb)
    assert ds.attrs["wind_parts"] == "B"
    z = ds["height"].values
    for alt, ws_kt in ((900.0, 25), (1200.0, 30)):
        i = np.flatnonzero(np.isclose(z, alt))
        assert i.size == 1
        p_expected = np.exp(np.interp(alt, [728.0, 1456.0], np.log([925.0, 850.0])))
        assert_allclose(ds["pressure"].values[i[0]], p_expected, atol=1.0)
        assert_allclose(ds["wind_speed"].values[i[0]], ws_kt * KNOT)
    assert_allclose(_at(ds, 1012, "wind_speed"), 10 * KNOT)  # altitude 0: the surface wind, equal to TTAA's
    quality = ds.attrs["quality"]
    assert not [e for e in quality if e["action"] in ("merged", "skipped") and e.get("variable") == "wind_speed"]


def test_wind_above_the_temperature_ascent_is_recorded_on_its_ascent():
    """A wind at an altitude the temperature parts do not reach has no pressure: it is skipped, and the
    note is on its own ascent (station 00101), not on another station's profile."""
    other = PART_A.replace("00101", "00102")
    ppbb = "PPBB 6500/ 00101 90012 27010 27515 28020 9705/ 30040 31045="  # 70, 75 x 300 m: 21, 22.5 km
    a, b = temp.decode_temp(other + "\n" + PART_A + "\n" + ppbb)
    assert a.attrs["station"] == "00102" and b.attrs["station"] == "00101"
    notes = [e for e in b.attrs["quality"] if "outside the heights" in e["reason"]]
    assert len(notes) == 2 and notes[0]["line"] == 9  # PPBB is on line 9 of the text
    assert not any("altitude" in e["reason"] for e in a.attrs["quality"])


def test_pilot_21212_winds_by_pressure():
    """FM 32 Part B may give significant winds by pressure after 21212 (nnPPP ddfff), as TEMP Part B."""
    ds = _one(PART_A + "\nPPBB 6500/ 00101 21212 11960 27520 22880 28525=")
    assert_allclose(_at(ds, 960, "wind_direction"), 275.0)
    assert_allclose(_at(ds, 880, "wind_speed"), 25 * KNOT)


def test_pilot_only_ascent_is_named_in_a_warning_not_put_on_another_profile():
    """A PILOT ascent with no temperature parts makes no profile (no temperatures): a warning names its
    station; the profile of the other station carries no note about it."""
    text = PART_A + "\nPPBB 6500/ 00177 90012 27010 27515 28020="
    with pytest.warns(IcingWarning, match="00177"):
        (ds,) = temp.decode_temp(text)
    assert ds.attrs["station"] == "00101"
    assert not any("00177" in str(e) for e in ds.attrs["quality"])
    with pytest.raises(SoundingFormatError, match="PILOT 00177"):
        temp.decode_temp("PPBB 6500/ 00177 90012 27010 27515 28020=", source="pilot.txt")


def test_pilot_file_is_sniffed(tmp_path):
    """A file that opens with a PILOT or ship part is taken for TEMP/PILOT text by the sniffer."""
    for text in ("PPBB 6500/ 00101 90012 27010 27515 28020=\n" + PART_A,
                 "UUAA ZQXA7 65001 99334 50217 ///31 " + BODY_A, "uuaa 65001 zqxa7 99334 50217 ///31 " + BODY_A,
                 "XXAA 65001 99241 70708 ///40 " + BODY_A, "IIAA MOB9 65007 99600 10055 ///05 02031 " + BODY_A):
        path = tmp_path / "x.txt"
        path.write_text(text)
        assert reader_for(path).FORMAT == "temp"


def test_mixed_forms_in_one_bulletin_give_one_profile_each():
    """Land, ship and drop reports in one text: each ascent its own profile and its own quality record."""
    text = "\n".join([PART_A, "UUAA ZQXA7 65001 99334 50217 ///31 " + BODY_A.replace("20569", "20553"),
                      "XXAA 65001 99241 70708 ///40 " + BODY_A])
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        profiles = temp.decode_temp(text)
    assert [p.attrs["temp_form"] for p in profiles] == ["TEMP", "TEMP SHIP", "TEMP DROP"]
    bad = [[e for e in p.attrs["quality"] if "0777" in e["reason"]] for p in profiles]
    assert [len(b) for b in bad] == [0, 1, 0]  # DD 53 (code table 0777: not used) only in the ship's report


def test_ships_without_call_sign_are_told_apart_by_position():
    """FM 36: a ship that gives "SHIP" for D....D (no call sign) is one ascent per position, so two such
    ships at the same hour are not merged into one profile."""
    body = "99012 04456 27010 00094 04256 27512 92728 02057 28015 85456 03462 28520 70065 08160 29030="
    a, b = temp.decode_temp(f"UUAA SHIP 65001 99334 50217 ///31 {body}\nUUAA SHIP 65001 99412 50217 ///11 {body}")
    assert (a.attrs["latitude"], b.attrs["latitude"]) == (-33.4, -41.2)


PART_C = ("TTCC 65001 00101 70860 61962 29040 50075 59768 28535 30390 57560 27030 20650 55964 26025 10100 "
          "51166 25020 88999 77999=")


def test_pilot_altitudes_of_100_units_and_more():
    """PPDD ``1tnu1u2u3``: altitudes of 100 units and more (100 + 10 tn + u; common practice of decoders of
    real bulletins, from memory): 1000/ is 100 x 300 m = 30 km, which lies between the Part C surfaces 20 hPa
    (26500 m, 20650) and 10 hPa (31000 m, 10100) with no level between them, so its pressure is the
    log-pressure interpolation between those two, worked here."""
    ds = _one(PART_A + "\n" + PART_C + "\nPPDD 6500/ 00101 1000/ 27020=")
    i = np.flatnonzero(np.isclose(ds["height"].values, 30000.0))
    assert i.size == 1
    p_expected = np.exp(np.interp(30000.0, [26500.0, 31000.0], np.log([20.0, 10.0])))
    assert_allclose(ds["pressure"].values[i[0]], p_expected, atol=0.05)  # pressure kept to 0.1 hPa
    assert_allclose(ds["wind_speed"].values[i[0]], 20 * KNOT)


def test_altitude_unit_of_1000_feet():
    """Where the PILOT altitude unit is taken as 1000 ft (304.8 m, exact foot), ``altitude_unit=304.8`` puts
    90346's winds at 914.4, 1219.2 and 1828.8 m; a unit that is no length is a typed error."""
    ds = _one(PART_A + "\nPPBB 6500/ 00101 90346 28525 29030 30040=", altitude_unit=304.8)
    for alt in (3 * 304.8, 4 * 304.8, 6 * 304.8):
        assert np.isclose(ds["height"].values, alt).sum() == 1
    with pytest.raises(SoundingFormatError, match="altitude_unit"):
        temp.decode_temp(PART_A, altitude_unit="ft")

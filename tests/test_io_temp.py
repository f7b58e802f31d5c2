"""FM 35 TEMP decoder against the code tables and regulations of WMO-No. 306 (Manual on Codes, Vol. I.1).

The expected values below are worked by hand from the code definitions (cited beside each check), not taken
from the decoder. The code rules are from memory of WMO-No. 306 (the primary text was not at hand): regulation
numbers, code table 1734 (Id; 0 = 1000 hPa and 9 = 925 hPa in particular) and the height windows that restore
omitted leading digits are "from memory" in that sense; code table 0777 and the TTTa parity rule are the
well-known forms. The reports are invented (stations of block 00).
"""

import sys
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

sys.path.insert(0, str(Path(__file__).parent))

from icing.errors import SoundingFormatError  # noqa: E402
from icing.io import reader_for, temp  # noqa: E402

KNOT = 1852.0 / 3600.0

PART_A = """TTAA 65001 00101 99012 04456 27010 00094 04256 27512
92728 02057 28015 85456 03462 28520 70065 08160 29030 50570 20569 30535
40737 28966 30540 30927 34371 31040 25040 43556 30560 20180 52960 29555
15370 56164 27540 10650 62760 26530 88220 56757 30545 77230 30615 41211
31313 58708 82330 51515 10164 00096="""
PART_B = """TTBB 65000 00101 00012 04456 11950 04656 22850 03462
33700 08160 44500 20569 21212 00012 27010 11880 28520 22500 30535
31313 58708 82330="""
PART_C = """TTCC 65001 00101 70860 61962 29040 50075 59768 28535 30390 57560 27030
20650 55964 26025 10100 51166 25020 88850 60560 28540 77999="""
PART_D = "TTDD 6500/ 00101 11975 61163 22700 61962 33425 58566="
ALL_PARTS = "\n".join([PART_A, PART_B, PART_C, PART_D])


def _profile(text, **kw):
    profiles = temp.decode_temp(text, **kw)
    assert len(profiles) == 1
    return profiles[0]


def _at(ds, p, name):
    idx = np.flatnonzero(np.isclose(ds["pressure"].values, p))
    assert idx.size == 1, f"no level at {p} hPa"
    return float(ds[name].values[idx[0]])


# --- code-table unit checks ---------------------------------------------------------------------------

@pytest.mark.parametrize("group, expected", [
    ("124", 12.4), ("123", -12.3), ("000", 0.0), ("001", -0.1), ("350", 35.0), ("569", -56.9), ("///", np.nan),
])
def test_temperature_sign_by_tenths_parity(group, expected):
    """WMO-No. 306 FM 35, TTTa: even tenths digit positive, odd tenths digit negative."""
    assert_allclose(temp.decode_temperature(group + "00"), expected, equal_nan=True)


@pytest.mark.parametrize("dd, expected", [
    ("00", 0.0), ("07", 0.7), ("50", 5.0),  # 00-50: tenths of a degree
    ("56", 6.0), ("60", 10.0), ("99", 49.0),  # 56-99: whole degrees, DD - 50
    ("//", np.nan),
])
def test_dewpoint_depression_table_0777(dd, expected):
    """WMO-No. 306 code table 0777: 00-50 tenths, 56-99 whole degrees minus 50."""
    assert_allclose(temp.decode_dewpoint_depression(dd), expected, equal_nan=True)


@pytest.mark.parametrize("dd", ["51", "52", "53", "54", "55"])
def test_dewpoint_depression_unused_codes(dd):
    """WMO-No. 306 code table 0777: code figures 51-55 are not used."""
    with pytest.raises(ValueError):
        temp.decode_dewpoint_depression(dd)


@pytest.mark.parametrize("group, knots, direction, speed", [
    ("27010", True, 270.0, 10 * KNOT),
    ("27515", True, 275.0, 15 * KNOT),  # direction ending in 5: 5 added to the hundreds digit of speed
    ("27115", True, 270.0, 115 * KNOT),  # speed >= 100: hundreds digit in the third place
    ("27615", True, 275.0, 115 * KNOT),  # both: 5 + 1
    ("09705", False, 95.0, 205.0),  # 500 + 200 added, in m/s (day group < 50)
    ("36000", True, 360.0, 0.0),
    ("/////", True, np.nan, np.nan),
])
def test_wind_group(group, knots, direction, speed):
    """WMO-No. 306 FM 35 dddff: direction to 5 deg, units digit of direction added to the speed's hundreds;
    knots when 50 is added to the day YY (regulation 35.2.1 / code for YY)."""
    d, s = temp.decode_wind(group, knots)
    assert_allclose([d, s], [direction, speed], equal_nan=True)


def test_wind_direction_above_360_is_rejected():
    """WMO-No. 306 code table 0877: directions are 0-360 deg; 37x is not a direction."""
    with pytest.raises(ValueError):
        temp.decode_wind("37010", True)


@pytest.mark.parametrize("p, hhh, height", [
    (1000.0, "094", 94.0), (1000.0, "000", 0.0), (1000.0, "512", -12.0), (1000.0, "650", -150.0),
    (925.0, "745", 745.0), (925.0, "050", 1050.0),
    (850.0, "456", 1456.0), (850.0, "010", 1010.0),
    (700.0, "065", 3065.0), (700.0, "980", 2980.0),
    (500.0, "570", 5700.0), (400.0, "737", 7370.0),
    (300.0, "927", 9270.0), (300.0, "012", 10120.0), (250.0, "040", 10400.0), (250.0, "985", 9850.0),
    (200.0, "180", 11800.0), (150.0, "370", 13700.0), (100.0, "650", 16500.0),
    (70.0, "860", 18600.0), (50.0, "075", 20750.0), (30.0, "390", 23900.0), (20.0, "650", 26500.0),
    (10.0, "100", 31000.0),
])
def test_standard_surface_heights(p, hhh, height):
    """WMO-No. 306 FM 35 regulation 35.2.2: 1000 hPa in metres with 500 added to negative heights; 850 hPa
    +1000 m; 700 hPa +2000 or +3000 m; 500-400 hPa in decametres; 300 hPa and above with 1000 dam added
    where the leading digit is dropped; Part C in decametres."""
    assert_allclose(temp.decode_standard_height(p, hhh), height)


# --- whole reports -------------------------------------------------------------------------------------

def test_part_a_worked_by_hand():
    """Part A decoded by hand from WMO-No. 306 FM 35: 99012 = surface 1012 hPa; 00094 = 1000 hPa at 94 m;
    YY = 65 means day 15 with speeds in knots; Id = 1: winds up to 100 hPa (code table 1734); tropopause
    88220 and maximum wind 77230 in whole hPa (sections 3 and 4)."""
    ds = _profile(PART_A, reference_time="2026-01-15")
    assert ds.attrs["time"] == "2026-01-15T00:00:00Z"
    assert ds.attrs["station"] == "00101"
    assert_allclose(ds["pressure"].values[0], 1012.0)
    assert_allclose(_at(ds, 1012, "temperature"), 4.4)
    assert_allclose(_at(ds, 1012, "dewpoint"), 4.4 - 6.0)  # DD 56: 6 K (table 0777)
    assert_allclose(_at(ds, 1012, "wind_speed"), 10 * KNOT)
    assert_allclose(_at(ds, 1000, "height"), 94.0)
    assert_allclose(_at(ds, 850, "height"), 1456.0)
    assert_allclose(_at(ds, 700, "height"), 3065.0)
    assert_allclose(_at(ds, 700, "temperature"), -8.1)
    assert_allclose(_at(ds, 500, "dewpoint"), -20.5 - 19.0)  # DD 69: 19 K
    assert_allclose(_at(ds, 100, "height"), 16500.0)
    assert_allclose(_at(ds, 100, "wind_direction"), 265.0)
    assert_allclose(_at(ds, 100, "wind_speed"), 30 * KNOT)
    assert_allclose(_at(ds, 220, "temperature"), -56.7)
    assert_allclose(_at(ds, 220, "dewpoint"), -56.7 - 7.0)
    assert_allclose(_at(ds, 230, "wind_direction"), 305.0)
    assert_allclose(_at(ds, 230, "wind_speed"), 115 * KNOT)  # 30615: 305 deg, 100 + 15 kt
    reasons = " ".join(e["reason"] for e in ds.attrs["quality"] if e["action"] == "skipped")
    assert "wind-shear" in reasons and "31313" in reasons and "51515" in reasons


def test_sections_not_used_are_recorded_not_errors():
    """WMO-No. 306 FM 35 sections 7 (31313), 8 (41414, cloud data) and 9/10 (regional 5xxxx groups) are
    skipped, each with a quality entry naming its line; the levels before them decode."""
    text = PART_B.replace("31313 58708 82330=", "31313 58708 82330 41414 45658 52525 10125=")
    ds = _profile(text)
    skipped = {e["group"].split()[0]: e for e in ds.attrs["quality"] if e["action"] == "skipped"}
    assert set(skipped) >= {"31313", "41414", "52525"}
    assert skipped["41414"]["line"] == 3 and skipped["41414"]["group"] == "41414 45658"
    assert_allclose(_at(ds, 700, "temperature"), -8.1)


def test_groups_that_look_like_section_indicators():
    """50505 is the 500 hPa surface at 5050 m (regional indicators are 51515-59595), and 55555 in Part B is
    the level nn = 55 at 555 hPa when it stands where that level is due (WMO-No. 306 FM 35, from memory)."""
    ds = _profile(PART_A.replace("50570 20569", "50505 20569"))
    assert_allclose(_at(ds, 500, "height"), 5050.0)
    assert_allclose(_at(ds, 100, "temperature"), -62.7)
    text = ("TTBB 65000 00101 00012 04456 11950 04656 22850 03462 33700 08160 44600 12360 55555 16756 "
            "66500 20569 55555 10164=")
    ds = _profile(text)
    assert_allclose(_at(ds, 555, "temperature"), -16.7)
    assert_allclose(_at(ds, 500, "temperature"), -20.5)
    assert any(e["group"].startswith("55555 10164") for e in ds.attrs["quality"] if e["action"] == "skipped")


def test_id_cuts_off_winds():
    """WMO-No. 306 code table 1734: Id = 7 in Part A makes 700 hPa the last standard surface with a wind
    group; the surfaces above carry PPhhh TTTaDD only. A surface below the station (1000 hPa under a
    950 hPa surface) is not a measurement."""
    text = ("TTAA 65007 00102 99950 00456 18010 00/// ///// ///// 92620 01057 19015 85250 04462 20020 "
            "70880 10160 21030 50550 22569 40710 30966 30910 40371 25020 45556 20160 53960 15360 57164 "
            "10640 63760 88999 77999=")
    ds = _profile(text)
    assert_allclose(_at(ds, 700, "wind_speed"), 30 * KNOT)
    for p in (500, 400, 300, 250, 200, 150, 100):
        assert np.isnan(_at(ds, p, "wind_speed"))
    assert_allclose(_at(ds, 400, "temperature"), -30.9)
    assert_allclose(_at(ds, 100, "temperature"), -63.7)
    assert_allclose(_at(ds, 100, "height"), 16400.0)
    assert 1000.0 not in ds["pressure"].values
    assert any("below the surface" in e["reason"] for e in ds.attrs["quality"])


def test_negative_1000_hpa_height_metres_per_second_and_slashes():
    """WMO-No. 306 FM 35: 00512 is 1000 hPa at -12 m (500 added to a negative height); YY = 06 < 50 means
    m/s; ///// is a missing group and TTTa// a temperature without dewpoint."""
    text = ("TTAA 06001 00103 99030 10456 09005 00512 09856 09510 92625 ///// 10015 85320 034// 11020 "
            "70900 08160 12025 50540 20569 13030 40700 28966 14035 30900 34371 15040 25020 43556 16045 "
            "20170 52960 17050 15360 56164 18055 10620 62760 19060 88999 77999=")
    ds = _profile(text)
    assert_allclose(_at(ds, 1000, "height"), -12.0)
    assert_allclose(_at(ds, 1000, "wind_speed"), 10.0)  # m/s
    assert_allclose(_at(ds, 925, "height"), 625.0)
    assert np.isnan(_at(ds, 925, "temperature"))
    assert_allclose(_at(ds, 850, "height"), 1320.0)
    assert_allclose(_at(ds, 850, "temperature"), 3.4)
    assert_allclose(_at(ds, 850, "wind_speed"), 20.0)
    assert_allclose(_at(ds, 300, "height"), 9000.0)
    assert_allclose(_at(ds, 250, "height"), 10200.0)
    assert_allclose(_at(ds, 100, "height"), 16200.0)
    assert_allclose(_at(ds, 100, "wind_speed"), 60.0)
    assert _at(ds, 1030, "height") < -12.0  # surface below the 1000 hPa surface, filled hypsometrically


def test_parts_merged_into_one_ascent():
    """Parts A-D of one ascent (same station, day, hour) merge by pressure; Part C heights in decametres and
    its tropopause 88850 in tenths of hPa (85.0 hPa); Part D 11975 = 97.5 hPa (WMO-No. 306 FM 35,
    regulations for Parts C and D)."""
    ds = _profile(ALL_PARTS, reference_time="2026-01-15T06:00")
    assert ds.attrs["temp_parts"] == "ACBD"
    p = ds["pressure"].values
    assert np.all(np.diff(p) < 0)
    for level in (1012, 1000, 950, 925, 880, 850, 700, 500, 400, 300, 250, 230, 220, 200, 150, 100, 97.5, 85,
                  70, 50, 42.5, 30, 20, 10):
        assert np.isclose(p, level).sum() == 1, level
    assert_allclose(_at(ds, 85, "temperature"), -60.5)
    assert_allclose(_at(ds, 97.5, "temperature"), -61.1)
    assert_allclose(_at(ds, 42.5, "dewpoint"), -58.5 - 16.0)
    assert_allclose(_at(ds, 20, "height"), 26500.0)
    assert_allclose(_at(ds, 10, "wind_speed"), 20 * KNOT)
    assert_allclose(_at(ds, 880, "wind_direction"), 285.0)  # 21212 significant wind level
    assert np.isnan(_at(ds, 880, "temperature"))
    assert_allclose(_at(ds, 950, "temperature"), 4.6)


def test_significant_level_height_is_hypsometric():
    """The 950 hPa significant level (Part B, no height reported) lies where the hypsometric equation puts
    it between the 1000 and 925 hPa standard heights; reference: MetPy thickness_hydrostatic over the
    1000-950 hPa layer from the reported temperatures and dewpoints."""
    import metpy.calc as mpcalc
    from metpy.units import units

    ds = _profile(ALL_PARTS)
    sel = [float(v) for v in (1000, 950)]
    t = [_at(ds, v, "temperature") for v in sel] * units.degC
    td = [_at(ds, v, "dewpoint") for v in sel] * units.degC
    w = mpcalc.mixing_ratio_from_relative_humidity(sel * units.hPa, t,
                                                   mpcalc.relative_humidity_from_dewpoint(t, td))
    dz = mpcalc.thickness_hydrostatic(sel * units.hPa, t, mixing_ratio=w).m_as("m")
    # The 925 hPa height of the report is consistent with its temperatures (to the metre it is coded in).
    assert_allclose(_at(ds, 950, "height"), 94.0 + dz, atol=1.0)


def test_bulletin_headings_lowercase_wrapping_and_several_reports(tmp_path):
    """Optional WMO bulletin headings (TTAAii CCCC YYGGgg, ZCZC/NNNN), lowercase, stray spaces and reports
    wrapped over lines; two stations in one file give two profiles."""
    other = PART_A.replace("00101", "00104").replace("99012 04456", "99015 04604")
    text = ("ZCZC 001\r\nUSXX01 XXXX 150000\r\n" + ALL_PARTS.lower().replace("85456", "85  456") + "\n\n"
            "USXX02 XXXX 150000 RRA\n" + other.replace(" ", "   ") + "\nNNNN\n")
    path = tmp_path / "bulletin.txt"
    path.write_text(text)
    assert reader_for(path).FORMAT == "temp"
    profiles = temp.read(path)
    assert [p.attrs["station"] for p in profiles] == ["00101", "00104"]
    assert_allclose(_at(profiles[1], 1015, "temperature"), 4.6)
    assert_allclose(_at(profiles[1], 1015, "dewpoint"), 4.6 - 0.4)  # DD 04: tenths (table 0777)
    assert profiles[0].attrs["source"] == str(path)


def test_split_group_and_bad_group_recorded_with_position():
    """A group split by a stray space is joined and recorded; an undecodable group (DD 53, not used in table
    0777) is skipped with its line and column, not fatal."""
    text = PART_A.replace("85456", "85 456").replace("20569 30535", "20553 30535")
    ds = _profile(text)
    assert_allclose(_at(ds, 850, "height"), 1456.0)
    assert np.isnan(_at(ds, 500, "dewpoint")) and _at(ds, 500, "temperature") == -20.5
    split = [e for e in ds.attrs["quality"] if "split" in e["reason"]]
    bad = [e for e in ds.attrs["quality"] if "0777" in e["reason"]]
    assert split and split[0]["line"] == 2 and split[0]["column"] == 19
    assert bad and bad[0]["line"] == 2 and bad[0]["group"] == "20553"


def test_missing_group_does_not_shift_levels():
    """A deleted wind group in Part A or a deleted TTTaDD in Part B must not shift the following levels
    (WMO-No. 306 FM 35 group order): what is left decodes as in the complete report."""
    full = _profile(ALL_PARTS)
    cut = _profile(ALL_PARTS.replace("28520 70065", "70065").replace("22850 03462 ", "22850 "))
    for p in (700, 500, 100, 700, 500):
        assert_allclose(_at(cut, p, "temperature"), _at(full, p, "temperature"))
    assert_allclose(_at(cut, 700, "height"), 3065.0)
    assert np.isclose(cut["pressure"].values, 950).any()


def test_nil_reports():
    """A NIL report is recorded; a file of NIL reports only is an error naming the file."""
    ds = _profile(PART_A + "\nTTBB 65000 00101 NIL=\n")
    assert any(e["action"] == "nil" for e in ds.attrs["quality"])
    with pytest.raises(SoundingFormatError, match="only NIL"):
        temp.decode_temp("TTAA 65001 00101 NIL=\nTTBB 65000 00101 NIL=", source="nil.txt")


def test_no_report_is_an_error_with_file():
    with pytest.raises(SoundingFormatError, match="nothing.txt"):
        temp.decode_temp("HELLO WORLD 12345", source="nothing.txt")


def test_station_table_gives_position_and_surface_height():
    """Latitude, longitude and elevation come from the station table; the elevation is the surface height."""
    ds = _profile(ALL_PARTS, stations={"00101": (51.25, -7.5, 120.0)})
    assert ds.attrs["latitude"] == 51.25 and ds.attrs["longitude"] == -7.5
    assert_allclose(_at(ds, 1012, "height"), 120.0)


def test_station_csv_next_to_file(tmp_path):
    (tmp_path / "stations.csv").write_text("station,name,latitude,longitude,elevation_m\n"
                                           "00101,Test Hill,50.0,10.0,25\n")
    path = tmp_path / "a.txt"
    path.write_text(PART_A)
    ds = temp.read(path)[0]
    assert ds.attrs["latitude"] == 50.0 and ds.attrs["elevation"] == 25.0


# --- the demo scenario -----------------------------------------------------------------------------------

DEMO = Path(__file__).parents[1] / "sample_soundings"
FORMATS = DEMO / "formats"


@pytest.mark.skipif(not (FORMATS / "scenario_temp.txt").exists(), reason="demo TEMP file not generated")
def test_demo_temp_matches_demo_csv():
    """sample_soundings/scenario_temp.txt decodes to the profiles of the CSV versions within the precision of
    the code (WMO-No. 306 FM 35): temperature 0.1 degC; dewpoint 0.1 degC plus the table 0777 resolution
    (0.1 K to 5 K, 1 K above); standard heights 1 m (1000-700 hPa) or 10 m (above); wind 5 deg, 1 kt.
    Significant-level heights are not coded in TEMP: they are computed hypsometrically, and agree with the
    CSV heights to 10 m (a tolerance of common practice, no published source). A CSV level whose dewpoint
    depression lies outside 0-49 K has no TEMP dewpoint (table 0777 has no figure for it)."""
    from icing.io import table

    csv_profiles = {}
    for path in sorted(DEMO.glob("S*_*_*.csv")):
        for ds in table.read(path):
            csv_profiles[(ds.attrs["station"], ds.attrs["time"])] = ds
    decoded = temp.read(FORMATS / "scenario_temp.txt", reference_time="2026-01-15T12:00")
    assert len(decoded) == len(csv_profiles) == 10
    for ds in decoded:
        ref = csv_profiles[(ds.attrs["station"], ds.attrs["time"])]
        assert ds.attrs["latitude"] == ref.attrs["latitude"] and ds.attrs["elevation"] == ref.attrs["elevation"]
        p = ds["pressure"].values
        assert_allclose(p, ref["pressure"].values)
        t, t_ref = ds["temperature"].values, ref["temperature"].values
        assert np.array_equal(np.isnan(t), np.isnan(t_ref))
        assert np.nanmax(np.abs(t - t_ref)) <= 0.1 + 1e-9
        td, td_ref = ds["dewpoint"].values, ref["dewpoint"].values
        dd = t_ref - td_ref
        codable = np.isfinite(dd) & (dd >= 0.0) & (dd <= 49.5)
        assert np.array_equal(np.isfinite(td), codable)
        tol = 0.1 + np.where(dd[codable] <= 5.05, 0.05, 0.5)
        assert np.all(np.abs(td[codable] - td_ref[codable]) <= tol + 1e-9)
        std = np.isin(p, [1000, 925, 850, 700, 500, 400, 300, 250, 200, 150, 100])
        h, h_ref = ds["height"].values, ref["height"].values
        h_tol = np.where(std, np.where(p >= 700, 0.5, 5.0), 10.0)
        filled_in_csv = (ref["qc_flag"].values & 1).astype(bool)  # a CSV height filled by the checks
        h_tol = np.where(filled_in_csv, 10.0, h_tol)
        assert np.all(np.abs(h - h_ref) <= h_tol + 1e-9), np.abs(h - h_ref).max()
        assert np.nanmax(np.abs(ds["wind_speed"].values - ref["wind_speed"].values)) <= 0.5 * KNOT + 1e-9
        assert np.nanmax(np.abs(ds["wind_direction"].values - ref["wind_direction"].values)) <= 2.5


def test_repeated_level_keeps_part_a_value_and_records_conflict():
    """A level repeated in Parts A and B (here 500 hPa in 21212 with another wind) keeps the standard-level
    value, and the conflict is recorded; no value is averaged into one the report never spelled."""
    text = PART_A + "\n" + PART_B.replace("22500 30535", "22500 30035")
    ds = _profile(text)
    assert_allclose(_at(ds, 500, "wind_direction"), 305.0)
    conflict = [e for e in ds.attrs["quality"] if e["action"] == "merged" and e.get("variable") == "wind_direction"]
    assert conflict and conflict[0]["line"] == 7 and conflict[0]["pressure_hpa"] == 500.0

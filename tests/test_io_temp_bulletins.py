"""TEMP as it arrives over the GTS: framing, bulletin headings, corrections and retards, the Id ambiguity,
and reports that are not tidy (WMO-No. 306 FM 35; WMO-No. 386 Manual on the GTS for the framing).

From memory of the Manuals (primary texts not at hand): a message is framed by SOH ... ETX (or ZCZC ...
NNNN) with a channel sequence number; its abbreviated heading is T1T2A1A2ii CCCC YYGGgg with an optional
BBB: CCx a correction (x = A, B, ... for the first, second ... correction), RRx a delayed (retard)
report, AAx an amendment. Code table 1734: Id, the last standard surface with a wind group, by the hundreds
digit of its pressure in hPa in Part A, so 2 stands for 250 or 200 hPa and 1 for 150 or 100 hPa. The reports
are our own, written from the rules with invented stations.
"""

import sys
import warnings
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

sys.path.insert(0, str(Path(__file__).parent))

from encoders import decode_one, value_at_pressure  # noqa: E402

from icing.errors import IcingWarning  # noqa: E402
from icing.io import reader_for, temp  # noqa: E402

KNOT = 1852.0 / 3600.0
HEAD_A = "TTAA 65001 00101"
BODY_A = ("99012 04456 27010 00094 04256 27512 92728 02057 28015 85456 03462 28520 70065 08160 29030 "
          "50570 20569 30535 40737 28966 30540 30927 34371 31040 25040 43556 30560 20180 52960 29555 "
          "15370 56164 27540 10650 62760 26530 88220 56757 30545 77999=")
PART_A = f"{HEAD_A} {BODY_A}"
PART_B = "TTBB 6500/ 00101 00012 04456 11950 04656 22880 03462 33700 08160=\n"


_at = value_at_pressure
_one = decode_one


# --- framing ----------------------------------------------------------------------------------------------

@pytest.mark.parametrize("before", ["\x1e", "\x02", "\x01", "\x0b\x0b", "\r\r\n\x1f"])
def test_control_characters_just_before_the_part_identifier(tmp_path, before):
    """A control character right before TTAA (framing left in the text) neither hides the report from the
    sniffer nor from the decoder."""
    path = tmp_path / "b.txt"
    path.write_bytes((before + PART_A).encode("latin-1"))
    assert reader_for(path).FORMAT == "temp"
    (ds,) = temp.read(path)
    assert_allclose(_at(ds, 700, "temperature"), -8.1)


def test_full_gts_framing_is_skipped_wherever_it_stands():
    """SOH, sequence number, heading with BBB and national identifiers, ETX; a second message framed by
    ZCZC/NNNN on the same lines as its reports; no '=' after the last report of a message. Nothing of the
    framing lands in a quality record."""
    text = ("\x01\r\r\n123\r\r\nUSXX01 XXXX 150000 RRA 1234 5678\r\r\n" + PART_A.replace("=", "") + "\r\r\n\x03"
            "ZCZC 456 " + PART_B.replace("00101", "00102").replace("=\n", "") + " NNNN\n"
            "ZCZC 457\nUSXX02 XXXX 150000\n" + PART_A.replace("00101", "00102") + "\nNNNN\n")
    profiles = temp.decode_temp(text)
    assert [p.attrs["station"] for p in profiles] == ["00101", "00102"]
    assert profiles[1].attrs["temp_parts"] == "AB"
    for ds in profiles:
        assert not [e for e in ds.attrs["quality"] if e["action"] == "skipped"], ds.attrs["quality"]


def test_line_wraps_spaces_and_slashes_anywhere():
    """Line wraps between any groups, runs of spaces, '/' groups, a report with no '=' and no NIL (section 1
    only): the data decode as in the tidy report; the empty report is a warning naming its station."""
    tidy = _one(PART_A)
    wrapped = "\n".join(PART_A.replace("=", "").split(" ")).replace("\n92728", "   \n\n 92728")
    wrapped = wrapped.replace("04256", "/////")
    with pytest.warns(IcingWarning, match="00109"):
        ds = _one(wrapped + "\nTTAA 65001 00109\n")
    for p in (850, 700, 500, 100):
        assert_allclose(_at(ds, p, "temperature"), _at(tidy, p, "temperature"))
    assert np.isnan(_at(ds, 1000, "temperature"))


# --- corrections and retards ----------------------------------------------------------------------------

def _bulletin(bbb, text):
    return f"USXX01 XXXX 150000 {bbb}\n{text}\n".replace("  \n", "\n")


def test_correction_replaces_the_report_it_corrects_in_either_order():
    """BBB = CCA: the corrected TTAA replaces the original of the same station, day and hour (700 hPa
    temperature 08160 = -8.1 corrected to 08360 = -8.3), whether it comes after or before the original; the
    record of the ascent says what was superseded."""
    original = _bulletin("", PART_A)
    corrected = _bulletin("CCA", PART_A.replace("70065 08160", "70065 08360"))
    for text in (original + corrected, corrected + original):
        ds = _one(text)
        assert_allclose(_at(ds, 700, "temperature"), -8.3)
        sup = [e for e in ds.attrs["quality"] if e["action"] == "superseded"]
        assert len(sup) == 1 and "CCA" in sup[0]["reason"]
        assert not [e for e in ds.attrs["quality"] if e["action"] == "merged"]


def test_second_correction_wins_and_retard_completes():
    """CCB supersedes CCA and the original; an RRA bulletin (a delayed Part B) adds its levels to the same
    ascent; a correction marked inside the report ("TTAA CCA ...") counts like one in the heading."""
    text = (_bulletin("", PART_A) + _bulletin("CCB", PART_A.replace("08160", "08560"))
            + _bulletin("CCA", PART_A.replace("08160", "08360")) + _bulletin("RRA", PART_B))
    ds = _one(text)
    assert_allclose(_at(ds, 700, "temperature"), -8.5)
    assert ds.attrs["temp_parts"] == "AB" and np.isclose(ds["pressure"].values, 950).any()
    assert len([e for e in ds.attrs["quality"] if e["action"] == "superseded"]) == 2
    inline = PART_A + "\n" + PART_A.replace(HEAD_A, "TTAA CCA 65001 00101").replace("08160", "08360")
    assert_allclose(_at(_one(inline), 700, "temperature"), -8.3)


def test_correction_of_one_station_leaves_another_alone():
    """A CCA bulletin for station 00102 does not touch station 00101's report."""
    other = PART_A.replace("00101", "00102")
    text = _bulletin("", PART_A + "\n" + other) + _bulletin("CCA", other.replace("08160", "08360"))
    a, b = temp.decode_temp(text)
    assert_allclose(_at(a, 700, "temperature"), -8.1)
    assert_allclose(_at(b, 700, "temperature"), -8.3)
    assert not [e for e in a.attrs["quality"] if e["action"] == "superseded"]


# --- the Id ambiguity (code table 1734) --------------------------------------------------------------------

def test_id_2_names_250_hpa_as_last_wind_level():
    """Id = 2 with winds up to 250 hPa only: 200, 150 and 100 hPa carry PPhhh TTTaDD (no wind) and are kept
    with their temperatures, with no note of a missing group (FM 35, code table 1734)."""
    text = PART_A.replace("65001", "65002").replace("52960 29555", "52960").replace("56164 27540", "56164") \
        .replace("62760 26530", "62760")
    ds = _one(text)
    assert_allclose(_at(ds, 250, "wind_speed"), 60 * KNOT)
    for p, t in ((200, -52.9), (150, -56.1), (100, -62.7)):
        assert_allclose(_at(ds, p, "temperature"), t)
        assert np.isnan(_at(ds, p, "wind_speed"))
    assert_allclose(_at(ds, 100, "height"), 16500.0)
    assert not [e for e in ds.attrs["quality"] if "group" in e["reason"] and "missing" in e["reason"]]


def test_id_2_names_200_hpa_and_id_1_names_150_hpa():
    """The same digit for the other surface of each pair: Id = 2 with a wind at 200 hPa, Id = 1 with the
    last wind at 150 hPa; decided by the standard-level indicator that follows (FM 35, code table 1734)."""
    ds = _one(PART_A.replace("65001", "65002").replace("56164 27540", "56164").replace("62760 26530", "62760"))
    assert_allclose(_at(ds, 200, "wind_speed"), 55 * KNOT)
    assert np.isnan(_at(ds, 150, "wind_speed")) and _at(ds, 150, "temperature") == -56.1
    ds = _one(PART_A.replace("62760 26530", "62760"))
    assert_allclose(_at(ds, 150, "wind_direction"), 275.0)
    assert np.isnan(_at(ds, 100, "wind_speed")) and _at(ds, 100, "temperature") == -62.7
    assert not [e for e in ds.attrs["quality"] if "missing" in e["reason"]]


# --- every skipped group on its own ascent -------------------------------------------------------------

def test_skipped_groups_land_on_their_own_ascent():
    """A bad group and a stray token in station 00102's report are recorded on 00102's profile with their
    line, never on 00101's."""
    other = PART_A.replace("00101", "00102").replace("85456 03462", "85456 034X2")
    a, b = temp.decode_temp(PART_A + "\n" + other)
    assert not [e for e in a.attrs["quality"] if e["action"] == "skipped"]
    bad = [e for e in b.attrs["quality"] if e["action"] == "skipped" and "034X2" in e.get("group", "")]
    assert bad and bad[0]["line"] == 2


def test_no_warning_for_a_clean_bulletin():
    """A clean bulletin of two stations raises no warning."""
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert len(temp.decode_temp(PART_A + "\n" + PART_A.replace("00101", "00102"))) == 2


def test_later_report_without_part_identifier_in_a_bulletin():
    """Liberal reading: a report after '=' in the same bulletin that starts with the same YYGG but no TTAA
    is read as TTAA like the one before it, with a note; in another bulletin it is not."""
    second = BODY_A.replace("99012", "99015")
    text = f"USXX01 XXXX 150000\n{PART_A}\n65001 00102 {second}\n"
    a, b = temp.decode_temp(text)
    assert b.attrs["station"] == "00102" and _at(b, 1015, "temperature") == 4.4
    assert any("without part identifier" in e["reason"] for e in b.attrs["quality"])
    text = f"USXX01 XXXX 150000\n{PART_A}\nUSXX02 XXXX 150000\n65001 00102 {second}\n"
    (a,) = temp.decode_temp(text)
    assert a.attrs["station"] == "00101"


def test_drop_regional_sections_recorded_as_one_group_each():
    """TEMP DROP (FM 37) regional sections 61616 (aircraft, mission) and 62626 (remarks in plain language)
    are skipped, each in one quality entry holding its groups, on the drop's own ascent."""
    text = ("XXAA 65001 99241 70708 ///40 99012 04456 27010 00094 04256 27512 92728 02057 28015 85456 03462 "
            "28520 70065 08160 29030 31313 09608 81400 61616 ZZ999 0615A INVNT OB 04 62626 SPL 2411N07049W "
            "1403 MBL WND 27010=")
    (ds,) = temp.decode_temp(text)
    sections = {e["group"].split()[0]: e for e in ds.attrs["quality"] if e["action"] == "skipped"}
    assert sections["61616"]["group"] == "61616 ZZ999 0615A INVNT OB 04"
    assert sections["62626"]["group"].endswith("MBL WND 27010")
    assert_allclose(_at(ds, 700, "temperature"), -8.1)


def test_report_with_a_bad_day_group_is_recorded_on_its_station():
    """A part whose day group cannot be read (YY 99 - 50 = day 49) is skipped; its record goes on the profile
    of its own station (00102), not on the first profile of the file."""
    other = PART_A.replace("00101", "00102")
    a, b = temp.decode_temp(PART_A + "\n" + other + "\nTTBB 9900/ 00102 00012 04456 11950 04656=")
    assert not any("day" in e["reason"] and "range" in e["reason"] for e in a.attrs["quality"])
    assert any("out of range" in e["reason"] and e["line"] == 3 for e in b.attrs["quality"])


def test_archive_separators_are_framing():
    """Separator lines of stored bulletin files (****nnnnnnnnnn****) are framing, not stray text."""
    (ds,) = temp.decode_temp("****0000012345****\n" + PART_A + "\n****0000012346****\n")
    assert not [e for e in ds.attrs["quality"] if e["action"] == "skipped"]


def test_heading_inside_a_line_is_framing():
    """A bulletin heading that does not start its own line (text joined without line ends) is framing too."""
    (a, b) = temp.decode_temp(PART_A + " USXX02 XXXX 150000 RRA " + PART_A.replace("00101", "00102"))
    assert not [e for e in b.attrs["quality"] if e["action"] == "skipped"]

"""Station lists for TEMP positions: our CSV form, CSVs as users keep them, and the IGRA v2 station list
(fixed columns ID 1-11, LATITUDE 13-20, LONGITUDE 22-30, ELEVATION 32-37, STATE 39-40, NAME 42-71, FSTYEAR
73-76, LSTYEAR 78-81, NOBS 83-88, per the IGRA v2 station-list format description of NOAA NCEI, from
memory; -998.8 marks an unknown elevation). Stations are invented (block 00, country code ZZ)."""

import sys
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

sys.path.insert(0, str(Path(__file__).parent))

from icing.errors import IcingWarning, SoundingFormatError  # noqa: E402
from icing.io import read_profiles, temp  # noqa: E402
from icing.io.stations import parse_stations, read_stations  # noqa: E402

PART_A = ("TTAA 65001 00101 99012 04456 27010 00094 04256 27512 92728 02057 28015 85456 03462 28520 "
          "70065 08160 29030 77999=")


def igra_line(sid, lat, lon, elev, name, state=""):
    """One line of the IGRA v2 station list in its fixed columns (written from the format description)."""
    return f"{sid:11s} {lat:8.4f} {lon:9.4f} {elev:6.1f} {state:2s} {name:30s} {1990:4d} {2026:4d} {1234:6d}"


def test_igra_station_list_columns():
    """IGRA v2 station list: the fixed columns give ID, latitude, longitude and elevation; a WMO station
    (network code M, ID ..M000nnnnn) is found by its five-digit index number as TEMP spells it; -998.8 is an
    unknown elevation."""
    text = "\n".join([igra_line("ZZM00000101", 51.25, -7.5, 120.0, "INVENTED HILL"),
                      igra_line("ZZM00000103", -5.125, 170.0, -998.8, "INVENTED REEF"),
                      igra_line("ZZXUAINV001", 60.0, 5.0, -998.8, "INVENTED MOBILE")])
    line = text.splitlines()[0]
    assert line[12:20].strip() == "51.2500" and line[21:30].strip() == "-7.5000" and line[31:37] == " 120.0"
    st = parse_stations(text)
    assert_allclose(st["00101"], (51.25, -7.5, 120.0))
    assert st["ZZM00000101"] == st["00101"]
    assert st["00103"].latitude == -5.125 and np.isnan(st["00103"].elevation)
    assert "ZZXUAINV001" in st and "00001" not in st
    assert st.names["00101"] == "INVENTED HILL"


def test_igra_station_list_bad_line_names_line():
    text = igra_line("ZZM00000101", 51.25, -7.5, 120.0, "X") + "\nthis is not a station line\n"
    with pytest.raises(SoundingFormatError) as err:
        parse_stations(text, source="list.txt")
    assert err.value.line == 2


@pytest.mark.parametrize("text", [
    "station,name,latitude,longitude,elevation_m\n00101,Invented Hill,51.25,-7.5,120\n",
    "# our stations\nID;Lat;Lon;Elevation\n101;51.25;-7.5;120\n",  # index number that lost its zeros
    "wmo\tlat\tlon\theight\n00101\t51.25\t352.5\t120\n",  # longitude 0-360
])
def test_csv_station_lists(text):
    """CSVs as users keep them: column names and delimiters vary; longitudes east of 180 are wrapped."""
    st = parse_stations(text)
    assert_allclose(st["00101"], (51.25, -7.5, 120.0))


def test_csv_without_position_columns_is_an_error():
    with pytest.raises(SoundingFormatError, match="no latitude"):
        parse_stations("station,name,elevation\n00101,x,3\n", source="s.csv")


def test_csv_bad_latitude_names_line():
    with pytest.raises(SoundingFormatError) as err:
        parse_stations("station,latitude,longitude\n00101,51,1\n00102,95,1\n", source="s.csv")
    assert err.value.line == 3 and "latitude" in err.value.reason


def test_stations_option_takes_igra_list(tmp_path):
    """``stations=`` (CLI ``--stations``) accepts the IGRA v2 station list: position and surface height."""
    path = tmp_path / "igra2-station-list.txt"
    path.write_text(igra_line("ZZM00000101", 51.25, -7.5, 120.0, "INVENTED HILL") + "\n")
    sounding = tmp_path / "a.txt"
    sounding.write_text(PART_A)
    (ds,) = read_profiles(sounding, stations=str(path))
    assert (ds.attrs["latitude"], ds.attrs["longitude"], ds.attrs["elevation"]) == (51.25, -7.5, 120.0)
    assert_allclose(ds["height"].values[0], 120.0)
    assert read_stations(path)["00101"].elevation == 120.0


def test_station_missing_from_the_list_is_named():
    """A station not in the list: a warning names it, and its profile says so in a quality note."""
    with pytest.warns(IcingWarning, match="00101"):
        (ds,) = temp.decode_temp(PART_A, stations={"00999": (1.0, 2.0, 3.0)})
    assert np.isnan(ds.attrs["latitude"])
    assert any("00101 is not in the station list" in e["reason"] for e in ds.attrs["quality"])


def test_ship_position_from_its_report_not_the_list():
    """A ship's position comes from its own section 1 (FM 36), even when a station list is given."""
    ship = PART_A.replace("TTAA 65001 00101", "UUAA ZQXA7 65001 99334 50217 ///31")
    (ds,) = temp.decode_temp(ship, stations={"ZQXA7": (1.0, 2.0, 3.0)})
    assert (ds.attrs["latitude"], ds.attrs["longitude"]) == (-33.4, -21.7)

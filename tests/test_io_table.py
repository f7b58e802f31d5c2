"""The delimited-table reader: layout, unit spellings, and bad input as typed errors."""

from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

import icing
from icing.errors import IcingError, SoundingFormatError

SAMPLES = Path(__file__).parents[1] / "sample_soundings"

GOOD = """# station: 00999
# latitude: 50.5
# longitude: -30.25
# elevation_m: 20
# time: 2026-01-15T00:00:00Z
pressure_hPa,height_m,temperature_degC,dewpoint_degC,wind_direction_deg,wind_speed_kt
1000,20,10.0,8.0,240,10
850,1450,2.0,0.0,250,25
700,2950,-8.0,-12.0,260,40
500,5550,-25.0,-35.0,270,60
"""


def write(tmp_path, text, name="s.csv", mode="w"):
    p = tmp_path / name
    if mode == "wb":
        p.write_bytes(text)
    else:
        p.write_text(text)
    return p


def test_reads_layout_and_metadata(tmp_path):
    ds = icing.read_sounding(write(tmp_path, GOOD))
    assert ds.attrs["station"] == "00999"
    assert ds.attrs["latitude"] == 50.5 and ds.attrs["time"] == "2026-01-15T00:00:00Z"
    assert_allclose(ds["wind_speed"].values[1], 25 * 0.514444, rtol=1e-5)  # knots to m/s (exact factor)
    assert ds.attrs["quality"] == []


@pytest.mark.parametrize("header, factor_p, convert_t", [
    ("pressure_Pa,height_ft,temperature_K,dewpoint_K", 100.0, lambda t: t + 273.15),
    ("pressure [mb],height [m],temperature [degF],dewpoint [degF]", 1.0, lambda t: t * 1.8 + 32),
    ("p (hPa)\theight (m)\ttemperature (C)\tdewpoint (C)", 1.0, lambda t: t),
])
def test_unit_spellings(tmp_path, header, factor_p, convert_t):
    """The same sounding in other unit spellings reads to the same profile."""
    rows = [(1000, 20, 10.0, 8.0), (850, 1450, 2.0, 0.0), (700, 2950, -8.0, -12.0)]
    delim = "\t" if "\t" in header else ","
    hf = 1 / 0.3048 if "ft" in header else 1.0
    lines = [header] + [delim.join(f"{v:.6f}" for v in (p * factor_p, z * hf, convert_t(t), convert_t(td)))
                        for p, z, t, td in rows]
    ds = icing.read_sounding(write(tmp_path, "\n".join(lines) + "\n"))
    assert_allclose(ds["pressure"].values, [1000, 850, 700])
    assert_allclose(ds["temperature"].values, [10.0, 2.0, -8.0], atol=1e-6)
    assert_allclose(ds["height"].values, [20, 1450, 2950], atol=1e-4)


def test_empty_file(tmp_path):
    with pytest.raises(SoundingFormatError, match="empty") as e:
        icing.read_sounding(write(tmp_path, ""))
    assert e.value.file.endswith("s.csv") and e.value.line == 1


def test_binary_file(tmp_path):
    with pytest.raises(SoundingFormatError, match="binary") as e:
        icing.read_sounding(write(tmp_path, b"\x00\x01\x02GARBAGE\xff" * 50, name="x.bin", mode="wb"))
    assert e.value.file.endswith("x.bin")


def test_missing_column(tmp_path):
    text = GOOD.replace("temperature_degC,", "").replace(",10.0,", ",").replace(",2.0,", ",")
    text = text.replace(",-8.0,", ",").replace(",-25.0,", ",")
    with pytest.raises(SoundingFormatError, match="missing column: temperature") as e:
        icing.read_sounding(write(tmp_path, text))
    assert e.value.line == 6


def test_text_in_number_field(tmp_path):
    with pytest.raises(SoundingFormatError, match="'abc' is not a number") as e:
        icing.read_sounding(write(tmp_path, GOOD.replace("850,1450,2.0", "850,1450,abc")))
    assert e.value.line == 8 and e.value.column == "temperature_degC"
    assert "line 8" in str(e.value) and "s.csv" in str(e.value)


def test_kelvin_labelled_degc(tmp_path):
    text = GOOD
    for t in ("10.0", "2.0", "-8.0", "-25.0"):
        text = text.replace(f",{t},", f",{float(t) + 273.15:.2f},")
    with pytest.raises(SoundingFormatError, match="kelvin") as e:
        icing.read_sounding(write(tmp_path, text))
    assert e.value.line == 6 and e.value.column == "temperature_degC"


def test_unknown_unit(tmp_path):
    with pytest.raises(SoundingFormatError, match="unknown unit|does not fit"):
        icing.read_sounding(write(tmp_path, GOOD.replace("temperature_degC", "temperature_furlongs")))


def test_no_unit(tmp_path):
    with pytest.raises(SoundingFormatError, match="no unit"):
        icing.read_sounding(write(tmp_path, GOOD.replace("temperature_degC", "temperature")))


def test_unknown_column_recorded(tmp_path):
    """A column the reader does not know is reported in the quality record, not silently dropped."""
    text = GOOD.replace("wind_speed_kt", "wind_speed_kt,ozone_ppb")
    ds = icing.read_sounding(write(tmp_path, "\n".join(
        line + (",1" if line and line[0].isdigit() else "") for line in text.splitlines()) + "\n"))
    assert any("ozone_ppb" in e["reason"] for e in ds.attrs["quality"])


def test_missing_file():
    with pytest.raises(IcingError, match="no such file"):
        icing.read_sounding("/nonexistent/sounding.csv")


def test_sample_with_faults_records_every_problem():
    """The demo file with faults: each fault is caught and recorded (the scenario's intent)."""
    ds = icing.read_sounding(SAMPLES / "S5_00105_2026011500.csv")
    actions = [e["action"] for e in ds.attrs["quality"]]
    for a in ("merged", "removed", "dropped", "filled"):
        assert a in actions
    assert np.all(np.diff(ds["height"].values) > 0)


# --- header spellings, units, text encodings (issue 15) ----------------------------------------------------

ROWS = GOOD.split("pressure_hPa,height_m,temperature_degC,dewpoint_degC,wind_direction_deg,wind_speed_kt\n")[1]
META = GOOD.split("pressure_hPa")[0]


def _same_as_good(ds):
    assert_allclose(ds["pressure"].values, [1000, 850, 700, 500])
    assert_allclose(ds["temperature"].values, [10.0, 2.0, -8.0, -25.0])
    assert_allclose(ds["dewpoint"].values, [8.0, 0.0, -12.0, -35.0])
    assert_allclose(ds["wind_speed"].values, np.array([10, 25, 40, 60]) * 1852 / 3600, rtol=1e-12)


@pytest.mark.parametrize("header", [
    "pressure (hPa),height [m],Temperature [°C],dew point temperature_C,wind direction (deg),wind speed_kt",
    "Pressure hPa,Height m,Temp C,Dew Point C,Wind Direction deg,Wind Speed kt",
    "pres_mb,hght_m,temp_degC,dwpt_degC,drct_deg,sknt_knot",
])
def test_header_names_with_spaces_and_units_anywhere(tmp_path, header):
    """Names with spaces; units in brackets, parentheses, after an underscore or a space (issue 15 contract)."""
    _same_as_good(icing.read_sounding(write(tmp_path, META + header + "\n" + ROWS)))


def test_units_argument_for_a_header_without_units(tmp_path):
    """units= (variable -> unit) on read_sounding and read_soundings gives the units a header leaves out."""
    path = write(tmp_path, META + "pressure,height,temperature,dewpoint,wind_direction,wind_speed\n" + ROWS)
    units = {"pressure": "hPa", "height": "m", "temperature": "degC", "dewpoint": "degC", "wind_direction": "deg",
             "wind_speed": "kt"}
    with pytest.raises(SoundingFormatError, match="no unit"):
        icing.read_sounding(path)
    _same_as_good(icing.read_sounding(path, units=units))
    many = icing.read_soundings([path], units=units)
    assert_allclose(many["temperature"].values[0], [10.0, 2.0, -8.0, -25.0])
    kelvin = write(tmp_path, META + "pressure_hPa,temperature\n1000,283.15\n850,275.15\n", name="k.csv")
    assert_allclose(icing.read_sounding(kelvin, units={"temperature": "K"})["temperature"].values, [10.0, 2.0],
                    atol=1e-9)  # K to degC: + 273.15 exactly (SI definition)


def test_units_argument_that_contradicts_the_header(tmp_path):
    with pytest.raises(SoundingFormatError, match="units= gives") as e:
        icing.read_sounding(write(tmp_path, GOOD), units={"temperature": "K"})
    assert e.value.column == "temperature_degC"


def test_second_header_row_of_units(tmp_path):
    text = META + "pressure,height,temperature,dewpoint,wind_direction,wind_speed\nhPa,m,C,C,deg,kt\n" + ROWS
    _same_as_good(icing.read_sounding(write(tmp_path, text)))


@pytest.mark.parametrize("transform, note", [
    (lambda t: ("\ufeff" + t).encode(), None),
    (lambda t: t.replace("\n", "\r\n").encode(), None),
    (lambda t: t.replace("\n", "\r").encode(), None),
    (lambda t: t.encode("utf-16"), None),
    (lambda t: t.replace("temperature_degC", "temperature_°C").encode("latin-1"), "Latin-1"),
    (lambda t: (t.replace("850,", "850\x0c,").replace("700,2950", "700,29\x0050") + "\x1a").encode(), "control"),
])
def test_text_as_users_write_it(tmp_path, transform, note):
    """Byte-order marks, CRLF/CR line ends, UTF-16, Latin-1 and stray control characters read as the plain
    file does; what was changed is noted (common practice of spreadsheet exports)."""
    ds = icing.read_sounding(write(tmp_path, transform(GOOD), mode="wb"))
    _same_as_good(ds)
    notes = " ".join(e["reason"] for e in ds.attrs["quality"])
    assert (note or "") in notes and (note is not None or notes == "")


def test_decimal_comma_in_a_semicolon_table(tmp_path):
    text = GOOD.replace(",", ";").replace("10.0", "10,0").replace("-8.0", "\u22128,0")
    ds = icing.read_sounding(write(tmp_path, text))
    _same_as_good(ds)
    assert any("decimal comma" in e["reason"] for e in ds.attrs["quality"])


@pytest.mark.parametrize("cell", ["1" * 300_000, '"' + "9" * 300_000 + '"', "0." + "0" * 299_998 + "1"])
def test_cell_of_300000_digits_is_a_typed_error(tmp_path, cell):
    with pytest.raises(SoundingFormatError, match="300,0") as e:
        icing.read_sounding(write(tmp_path, GOOD.replace("850,1450,2.0", "850,1450," + cell)))
    assert e.value.line == 8 and e.value.column == "temperature_degC" and e.value.file.endswith("s.csv")


# --- physical ranges and unit mistakes (issue 16) -----------------------------------------------------------

def test_level_below_the_ground_is_left_out_with_a_note(tmp_path):
    """A station at 1500 m: the 1000 hPa row (reported at 110 m, or without height) is under the ground."""
    text = GOOD.replace("elevation_m: 20", "elevation_m: 1500").replace("850,1450,", "850,1500,")
    for row in ("1000,110,", "1000,,"):
        ds = icing.read_sounding(write(tmp_path, text.replace("1000,20,", row)))
        assert_allclose(ds["pressure"].values, [850, 700, 500])
        entry = next(e for e in ds.attrs["quality"] if "below the ground" in e["reason"])
        assert entry["line"] == 7 and entry["action"] == "dropped"


@pytest.mark.parametrize("old, new, pattern", [
    ("pressure_hPa", "pressure_Pa", "hPa labelled Pa"),
    ("pressure_hPa", "pressure_kPa", "Pa but are labelled kPa|look like Pa"),
    ("temperature_degC", "temperature_K", "look like degC but are labelled K"),
    ("dewpoint_degC", "dewpoint_K", "look like degC but are labelled K"),
])
def test_unit_that_does_not_fit_the_values_is_named(tmp_path, old, new, pattern):
    with pytest.raises(SoundingFormatError, match=pattern) as e:
        icing.read_sounding(write(tmp_path, GOOD.replace(old, new)))
    assert e.value.column == new and e.value.line == 6


def test_heights_in_feet_labelled_metres(tmp_path):
    """Reported thickness 3.28 times the hypsometric one: feet labelled m (1 ft = 0.3048 m exactly)."""
    text = GOOD
    for z in (1450, 2950, 5550):
        text = text.replace(f",{z},", f",{round(z / 0.3048)},")
    with pytest.raises(IcingError, match="feet labelled m") as e:
        icing.read_sounding(write(tmp_path, text))
    assert "s.csv" in str(e.value)


@pytest.mark.parametrize("row, reason", [
    ("850,1450,inf", "temperature inf"),
    ("4067,1450,2.0", "pressure 4067 hPa outside"),
    ("1e308,1450,2.0", "pressure 1e+308 hPa outside"),
    ("850,1e9,2.0", "height 1000000000 m outside"),
])
def test_values_out_of_range_are_dropped_with_a_note(tmp_path, row, reason):
    """Limits (our design, common practice): pressure 1-1100 hPa, temperature -100..60 degC, heights
    -500..50000 m; nothing out of range is kept, and never as the surface."""
    ds = icing.read_sounding(write(tmp_path, GOOD.replace("850,1450,2.0", row)))
    entry = next(e for e in ds.attrs["quality"] if reason in e["reason"])
    assert entry["line"] == 8
    assert ds["pressure"].values[0] == 1000.0 and np.all(np.isfinite(ds["pressure"].values))
    t = ds["temperature"].values
    assert np.all(~np.isfinite(t) | ((t >= -100) & (t <= 60))) and not np.any(np.isinf(t))
    assert np.all(np.diff(ds["height"].values) > 0)


@pytest.mark.parametrize("line, text", [("# latitude: 50.5", "# latitude: 95"),
                                        ("# longitude: -30.25", "# longitude: 400"),
                                        ("# elevation_m: 20", "# elevation_m: 1e308"),
                                        ("# time: 2026-01-15T00:00:00Z", "# time: yesterday-ish")])
def test_metadata_out_of_range_names_its_line(tmp_path, line, text):
    with pytest.raises(SoundingFormatError) as e:
        icing.read_sounding(write(tmp_path, GOOD.replace(line, text)))
    assert e.value.line == GOOD.splitlines().index(line) + 1


def test_longitude_0_360_is_normalised(tmp_path):
    ds = icing.read_sounding(write(tmp_path, GOOD.replace("longitude: -30.25", "longitude: 329.75")))
    assert ds.attrs["longitude"] == -30.25


def test_heights_above_ground_level(tmp_path):
    """A height column in m AGL gets the station elevation added (heights are above mean sea level inside)."""
    text = GOOD.replace("height_m", "height (m AGL)")
    for z in (20, 1450, 2950, 5550):
        text = text.replace(f",{z},", f",{z - 20},")
    ds = icing.read_sounding(write(tmp_path, text))
    assert_allclose(ds["height"].values, [20, 1450, 2950, 5550])
    with pytest.raises(SoundingFormatError, match="station elevation"):
        icing.read_sounding(write(tmp_path, text.replace("# elevation_m: 20\n", "")))


@pytest.mark.parametrize("line, elevation", [("# elevation_ft: 4921.26", 1500.0), ("# elevation: 1500 m", 1500.0),
                                             ("# altitude: 1.5 km", 1500.0)])
def test_station_elevation_in_other_units(tmp_path, line, elevation):
    """1 ft = 0.3048 m exactly; the elevation decides which levels are below the ground."""
    text = GOOD.replace("# elevation_m: 20", line).replace("850,1450,", "850,1500,")
    ds = icing.read_sounding(write(tmp_path, text))
    assert_allclose(ds.attrs["elevation"], elevation, atol=1e-3)
    assert ds["pressure"].values[0] == 850.0


def test_unknown_metadata_is_noted(tmp_path):
    ds = icing.read_sounding(write(tmp_path, "# operator: nobody\n" + GOOD))
    assert any("operator" in e["reason"] and e["line"] == 1 for e in ds.attrs["quality"])

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

"""read_soundings: many files of any format into one Dataset along ``profile``."""

from pathlib import Path

import numpy as np
import pytest

import icing
from icing.errors import SoundingFormatError

SAMPLES = Path(__file__).parents[1] / "sample_soundings"


def test_directory_of_mixed_formats():
    """The demo folder (CSV and netCDF of each ascent) reads into one padded collection; the model grid in its
    subfolder and the station table are not taken for soundings."""
    ds = icing.read_soundings(SAMPLES)
    assert "profile" in ds.dims and ds.sizes["profile"] == 20  # 10 ascents x (CSV, netCDF)
    assert set(ds["format"].values) == {"table", "netcdf"}
    assert np.isfinite(ds["latitude"].values).all() and not np.isnat(ds["time"].values).any()
    assert any(e.get("profile") is not None for e in ds.attrs["quality"])


def test_temp_with_options_and_csv_together():
    """Options reach only the readers that take them: TEMP gets the month, the CSV reader nothing."""
    ds = icing.read_soundings([SAMPLES / "formats" / "scenario_temp.txt", SAMPLES / "S1_00101_2026011500.csv"],
                              reference_time="2026-01-15")
    assert ds.sizes["profile"] == 11
    assert not np.isnat(ds["time"].values).any()


def test_bad_file_is_named():
    with pytest.raises(SoundingFormatError) as e:
        icing.read_soundings([SAMPLES / "S1_00101_2026011500.csv", SAMPLES / "demo_route.csv"])
    assert "demo_route.csv" in str(e.value)


def test_units_option_reaches_only_the_readers_that_take_it(tmp_path):
    """units= is given to the table reader for a header without units; the TEMP reader does not get it."""
    text = (SAMPLES / "S1_00101_2026011500.csv").read_text()
    lines = text.splitlines()
    k = next(i for i, ln in enumerate(lines) if ln.startswith("pressure"))
    lines[k] = "pressure,height,temperature,dewpoint,wind_direction,wind_speed"
    (tmp_path / "bare.csv").write_text("\n".join(lines) + "\n")
    units = {"pressure": "hPa", "height": "m", "temperature": "degC", "dewpoint": "degC", "wind_direction": "deg",
             "wind_speed": "kt"}
    ds = icing.read_soundings([tmp_path / "bare.csv", SAMPLES / "S1_00101_2026011500.csv",
                               SAMPLES / "formats" / "scenario_temp.txt"], units=units, reference_time="2026-01-15")
    np.testing.assert_array_equal(ds["temperature"].values[0], ds["temperature"].values[1])

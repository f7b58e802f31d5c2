"""GRIB2 model input (icing.io.model.read_model through cfgrib), on GRIB2 files written here with ecCodes.

The fields are invented smooth functions of level, latitude, longitude and step on small grids laid out as
real GRIB usually is (latitudes north to south, longitudes 0..360 east). The checks are against things outside
the project: the values handed to ecCodes (within the precision of 24-bit simple packing, GRIB2 data
representation template 5.0), ecCodes' own per-point ``latitudes`` / ``longitudes`` / values, MetPy
(dewpoint from relative humidity and from specific humidity, dry-air density), the WMO geopotential metre
(geopotential / standard gravity 9.80665 m s-2) and pandas for the valid times (reference time + step).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

# ecCodes (under cfgrib) must be loaded after PROJ (pyproj), or the interpreter crashes (see icing.io.bufr).
pytest.importorskip("pyproj")
pytest.importorskip("cfgrib")
import eccodes  # noqa: E402  (after pyproj, on purpose)
import metpy.calc as mpcalc  # noqa: E402
from metpy.units import units  # noqa: E402

from icing.errors import SoundingFormatError  # noqa: E402
from icing.io.model import read_model  # noqa: E402

G0 = 9.80665  # m s-2, standard gravity (3rd CGPM 1901; the WMO geopotential metre)
LEVELS = (1000, 925, 850, 700, 500)  # hPa
LATS = (60.0, 59.5, 59.0)  # north to south, as GRIB usually scans (jScansPositively=0)
LONS = (350.0, 351.0, 352.0, 353.0)  # 0..360 east, west of Greenwich
REF = pd.Timestamp("2026-01-15T00:00")


def _t(k, lev, lat, lon):
    """Invented temperature (K): colder aloft, northward, with the step."""
    return 290.0 - 0.045 * (1000.0 - lev) - 0.8 * (lat - 59.0) + 0.1 * (lon % 360.0 - 350.0) - 0.5 * k


def _r(k, lev, lat, lon):
    """Invented relative humidity (%), 35..95."""
    return 35.0 + 0.1 * (lev - 500.0) + 3.0 * (lat - 59.0) + 1.5 * (lon % 360.0 - 350.0) + 2.0 * k


def _gh(k, lev, lat, lon):
    """Invented geopotential height (gpm), increasing upward."""
    return 8000.0 * np.log(1013.0 / lev) + 5.0 * (lat - 59.0) + 0.5 * k


def _q(k, lev, lat, lon):
    """Invented specific humidity (kg/kg), sub-saturated."""
    return (1.0e-3 + 4.0e-3 * (lev - 500.0) / 500.0) * (1.0 + 0.02 * (lat - 59.0)) * (1.0 - 0.02 * k)


def _clw(k, lev, lat, lon):
    """Invented cloud liquid mixing ratio (kg/kg)."""
    return 1.0e-4 * (1.0 + np.sin(lev / 100.0)) + 1.0e-5 * (lon % 360.0 - 350.0)


FIELDS = {"t": _t, "r": _r, "gh": _gh, "z": lambda *a: _gh(*a) * G0, "q": _q, "clwmr": _clw}


def _write(path, names, *, steps=(0, 6), runs=(0,), levels=LEVELS, lats=LATS, lons=LONS, i_neg=False,
           type_of_level="isobaricInhPa"):
    """Write one GRIB2 message per field, run, step and level from ecCodes' regular_ll_pl_grib2 sample."""
    lat2, lon2 = np.meshgrid(np.asarray(lats), np.asarray(lons), indexing="ij")  # rows: lat, columns: lon
    with open(path, "wb") as fh:
        for run in runs:
            for k, step in enumerate(steps):
                for name in names:
                    for lev in levels:
                        h = eccodes.codes_grib_new_from_samples("regular_ll_pl_grib2")
                        try:
                            eccodes.codes_set(h, "centre", 255)  # "missing": no real producing centre
                            eccodes.codes_set(h, "dataDate", int(REF.strftime("%Y%m%d")))
                            eccodes.codes_set(h, "dataTime", run * 100)
                            eccodes.codes_set(h, "stepUnits", 1)
                            eccodes.codes_set(h, "step", step)
                            eccodes.codes_set(h, "typeOfLevel", type_of_level)
                            if type_of_level == "isobaricInhPa":
                                eccodes.codes_set(h, "level", lev)
                            eccodes.codes_set(h, "shortName", name)
                            eccodes.codes_set(h, "Ni", len(lons))
                            eccodes.codes_set(h, "Nj", len(lats))
                            eccodes.codes_set(h, "iScansNegatively", int(i_neg))
                            eccodes.codes_set(h, "jScansPositively", int(lats[-1] > lats[0]))
                            eccodes.codes_set(h, "latitudeOfFirstGridPointInDegrees", lats[0])
                            eccodes.codes_set(h, "latitudeOfLastGridPointInDegrees", lats[-1])
                            eccodes.codes_set(h, "longitudeOfFirstGridPointInDegrees", lons[0])
                            eccodes.codes_set(h, "longitudeOfLastGridPointInDegrees", lons[-1])
                            eccodes.codes_set(h, "iDirectionIncrementInDegrees", abs(lons[1] - lons[0]) % 360.0)
                            eccodes.codes_set(h, "jDirectionIncrementInDegrees", abs(lats[1] - lats[0]))
                            eccodes.codes_set(h, "bitsPerValue", 24)
                            values = FIELDS.get(name, _t)(k + run // 6, lev, lat2, lon2)
                            eccodes.codes_set_values(h, values.ravel())
                            eccodes.codes_write(h, fh)
                        finally:
                            eccodes.codes_release(h)
    return Path(path)


def _expected(name, k, lats, lons, levels=LEVELS):
    """The field as written, on axes (latitude, longitude, level) in the given coordinate order."""
    lat3, lon3, lev3 = np.meshgrid(np.asarray(lats), np.asarray(lons), np.asarray(levels, float), indexing="ij")
    return FIELDS[name](k, lev3, lat3, lon3)


def _packing_atol(name, k=0):
    """Largest error of 24-bit simple packing of the field: its range / 2**24 (GRIB2 template 5.0)."""
    v = _expected(name, k, LATS, LONS)
    return float(v.max() - v.min()) / 2**24 + 1e-12


def _no_index_files(*dirs):
    for d in dirs:
        assert not list(Path(d).glob("*.idx")), f"cfgrib index file written into {d}"


def test_temperature_rh_geopotential_and_axes(tmp_path):
    """t (K), r (%), z (m2 s-2) with two steps: canonical dims, valid times, latitudes increasing, longitudes
    in -180..180, temperature in degC, RH as written, height = z / 9.80665, dewpoint as MetPy's."""
    path = _write(tmp_path / "fields.grib2", ("t", "r", "z"))
    m = read_model(path)
    assert m.attrs["format"] == "model-grib2" and m.attrs["source"] == str(path)
    assert m["temperature"].dims == ("time", "latitude", "longitude", "level")
    np.testing.assert_array_equal(m["time"].values, (REF + pd.to_timedelta([0, 6], "h")).values)
    np.testing.assert_array_equal(m["latitude"].values, sorted(LATS))
    np.testing.assert_array_equal(m["longitude"].values, [-10.0, -9.0, -8.0, -7.0])
    np.testing.assert_array_equal(m["pressure"].values, LEVELS)
    lats, lons = m["latitude"].values, m["longitude"].values
    for k in range(2):
        t = _expected("t", k, lats, lons)
        rh = _expected("r", k, lats, lons)
        np.testing.assert_allclose(m["temperature"].values[k], t - 273.15, atol=_packing_atol("t") + 1e-4)
        np.testing.assert_allclose(m["relative_humidity"].values[k], rh, atol=_packing_atol("r") + 1e-4)
        np.testing.assert_allclose(m["height"].values[k], _expected("z", k, lats, lons) / G0,
                                   atol=_packing_atol("z") / G0 + 1e-3)
        ref = mpcalc.dewpoint_from_relative_humidity(t * units.K, rh * units.percent).m_as("degC")
        np.testing.assert_allclose(m["dewpoint"].values[k], ref, atol=0.05)  # MetPy: Bolton; ours: Murphy-Koop
    reasons = " ".join(e["reason"] for e in m.attrs["quality"])
    for part in ("valid time", "latitudes reversed", "longitudes from", "geopotential divided"):
        assert part in reasons, part
    assert m["latitude"].attrs.get("stored_direction") is None  # cfgrib's "decreasing" no longer holds
    _no_index_files(tmp_path, Path.cwd())


def test_geopotential_height_specific_humidity_and_cloud_liquid(tmp_path):
    """gh (gpm) is the height as written; dewpoint from q as MetPy's dewpoint_from_specific_humidity; cloud
    liquid from clwmr times the dry-air density of MetPy's density (mixing ratio 0), within the 1 % the module
    neglects."""
    path = _write(tmp_path / "q.grib2", ("t", "q", "gh", "clwmr"), steps=(3,))
    m = read_model(path)
    np.testing.assert_array_equal(m["time"].values, [(REF + pd.Timedelta(3, "h")).to_datetime64()])
    lats, lons = m["latitude"].values, m["longitude"].values
    t = _expected("t", 0, lats, lons)
    np.testing.assert_allclose(m["height"].values[0], _expected("gh", 0, lats, lons),
                               atol=_packing_atol("gh") + 1e-3)
    p = np.asarray(LEVELS, float) * units.hPa
    q = _expected("q", 0, lats, lons) * units("kg/kg")
    ref = mpcalc.dewpoint_from_specific_humidity(p, q).m_as("degC")
    np.testing.assert_allclose(m["dewpoint"].values[0], ref, atol=0.15)  # Bolton vs Murphy-Koop inversions
    rho = mpcalc.density(p, t * units.K, 0.0 * units("kg/kg")).m_as("kg/m^3")
    np.testing.assert_allclose(m["cloud_liquid"].values[0], _expected("clwmr", 0, lats, lons) * rho * 1000.0,
                               rtol=1e-4)


@pytest.mark.parametrize(("lons", "i_neg"), [((358.0, 359.0, 0.0, 1.0), False),   # written 358 -> 1 E
                                             ((20.0, 19.0, 18.0, 17.0), True),    # scanned east to west
                                             ((179.0, 180.0, 181.0, 182.0), False)])  # across 180
def test_each_value_at_the_point_eccodes_gives(tmp_path, lons, i_neg):
    """Every temperature sits at the latitude/longitude ecCodes itself reports for that value (its
    ``latitudes``/``longitudes`` iterator), also where cfgrib's own coordinates are in another order."""
    path = _write(tmp_path / "grid.grib2", ("t", "r"), steps=(0,), levels=(850, 700), lons=lons, i_neg=i_neg)
    m = read_model(path)
    lon_out = m["longitude"].values
    assert np.all(np.diff(lon_out) > 0) and np.all(np.diff(m["latitude"].values) > 0)
    with open(path, "rb") as fh:
        h = eccodes.codes_grib_new_from_file(fh)
        try:
            level = eccodes.codes_get(h, "level")
            plat = eccodes.codes_get_array(h, "latitudes")
            plon = eccodes.codes_get_array(h, "longitudes")
            vals = eccodes.codes_get_values(h)
        finally:
            eccodes.codes_release(h)
    k = int(np.flatnonzero(m["pressure"].values == level)[0])
    for la, lo, v in zip(plat, plon, vals, strict=True):
        j = int(np.flatnonzero(np.isclose(m["latitude"].values, la))[0])
        d = (lon_out - lo) % 360.0
        i = int(np.flatnonzero(np.isclose(np.minimum(d, 360.0 - d), 0.0))[0])
        assert m["temperature"].values[0, j, i, k] == pytest.approx(v - 273.15, abs=1e-4), (la, lo)


def test_several_runs_and_steps_fold_into_sorted_valid_times(tmp_path):
    """Two runs (00 and 12 UTC) x two steps (0, 6 h): four valid times, increasing."""
    path = _write(tmp_path / "runs.grib2", ("t", "r"), runs=(0, 12), steps=(0, 6), levels=(850, 700))
    m = read_model(path)
    want = pd.to_datetime(["2026-01-15T00", "2026-01-15T06", "2026-01-15T12", "2026-01-15T18"])
    np.testing.assert_array_equal(m["time"].values, want.values)
    # run 12 step 6 was written with the offset k = 1 + 12 // 6 = 3
    lats, lons = m["latitude"].values, m["longitude"].values
    np.testing.assert_allclose(m["temperature"].values[3], _expected("t", 3, lats, lons, (850, 700)) - 273.15,
                               atol=1e-4)


def test_lazy_read_matches_eager(tmp_path):
    """chunks={} gives dask arrays, level in one chunk, with the same values."""
    path = _write(tmp_path / "lazy.grib2", ("t", "r", "gh"))
    lazy, eager = read_model(path, chunks={}), read_model(path)
    assert lazy["temperature"].chunks is not None and eager["temperature"].chunks is None
    for name in ("temperature", "dewpoint", "relative_humidity", "height"):
        np.testing.assert_array_equal(lazy[name].values, eager[name].values, err_msg=name)


def _raises(path, *words):
    with pytest.raises(SoundingFormatError) as info:
        read_model(path)
    text = str(info.value)
    assert info.value.file == str(path) and str(path) in text
    for w in words:
        assert w in text, (w, text)


def test_missing_temperature_is_a_typed_error(tmp_path):
    _raises(_write(tmp_path / "no_t.grib2", ("r", "gh")), "no temperature")


def test_no_isobaric_levels_is_a_typed_error(tmp_path):
    _raises(_write(tmp_path / "sfc.grib2", ("t", "r"), levels=(0,), type_of_level="surface"),
            "no GRIB fields on isobaric levels")


def test_repeated_valid_time_is_a_typed_error(tmp_path):
    """Runs 00 and 06 UTC with steps 0 and 6 h both give 06 UTC: which to use is the user's choice."""
    _raises(_write(tmp_path / "overlap.grib2", ("t", "r"), runs=(0, 6), steps=(0, 6), levels=(850, 700)),
            "occurs more than once")


def test_fields_on_different_levels_are_an_error_not_dropped(tmp_path):
    """cfgrib by default logs and leaves out a field that does not fit the others; read_model refuses."""
    a = _write(tmp_path / "a.grib2", ("t",), levels=(850, 700, 500))
    b = _write(tmp_path / "b.grib2", ("r",), levels=(850, 700))
    both = tmp_path / "both.grib2"
    both.write_bytes(a.read_bytes() + b.read_bytes())
    _raises(both, "cannot read as GRIB2", "do not form one grid")


def test_truncated_file_is_an_error(tmp_path):
    path = _write(tmp_path / "cut.grib2", ("t", "r"))
    data = path.read_bytes()
    path.write_bytes(data[: len(data) - 100])
    _raises(path, "cannot read as GRIB2")
    _no_index_files(tmp_path)

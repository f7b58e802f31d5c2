"""The canonical profile builder and its quality checks."""

import metpy.calc as mpcalc
import numpy as np
import pint
import pytest
from metpy.units import units
from numpy.testing import assert_allclose

from icing.errors import ProfileQualityError
from icing.profile import QC_FLAGS, build_profile, stack_profiles

P = np.array([1000.0, 925.0, 850.0, 700.0, 500.0])
T = np.array([10.0, 6.0, 2.0, -8.0, -25.0])
TD = np.array([8.0, 4.0, 0.0, -12.0, -35.0])


def test_canonical_variables_have_pint_units_and_standard_names():
    """Every variable's units attribute parses with pint (MetPy's quantify works); CF standard names set."""
    ds = build_profile(P, T, dewpoint=TD, height=[100, 760, 1450, 2950, 5500])
    q = ds.metpy.quantify()
    assert isinstance(q["temperature"].data, pint.Quantity)
    for name, std in [("pressure", "air_pressure"), ("temperature", "air_temperature"),
                      ("dewpoint", "dew_point_temperature"), ("height", "geopotential_height")]:
        assert ds[name].attrs["standard_name"] == std


def test_dewpoint_derived_from_rh_matches_metpy():
    """A missing dewpoint is derived from RH; checked against MetPy's dewpoint_from_relative_humidity."""
    rh = np.array([90.0, 80.0, 95.0, 60.0, 40.0])
    ds = build_profile(P, T, relative_humidity=rh)
    ref = mpcalc.dewpoint_from_relative_humidity(T * units.degC, rh * units.percent).m_as("degC")
    assert_allclose(ds["dewpoint"].values, ref, atol=0.15)
    assert np.all(ds["qc_flag"].values & QC_FLAGS["dewpoint_derived"])


def test_rh_derived_from_dewpoint_matches_metpy():
    """A missing RH is derived from dewpoint; checked against MetPy's relative_humidity_from_dewpoint."""
    ds = build_profile(P, T, dewpoint=TD)
    ref = mpcalc.relative_humidity_from_dewpoint(T * units.degC, TD * units.degC).m_as("percent")
    assert_allclose(ds["relative_humidity"].values, ref, rtol=5e-3)


def test_sorted_by_decreasing_pressure_and_recorded():
    """Levels given top-down come out surface first; the reordering is recorded (common practice)."""
    ds = build_profile(P[::-1], T[::-1], dewpoint=TD[::-1])
    assert np.all(np.diff(ds["pressure"].values) < 0)
    assert any(e["action"] == "reordered" for e in ds.attrs["quality"])


def test_heights_filled_hypsometrically_match_metpy_thickness():
    """Missing heights are filled by the hypsometric equation (checked against MetPy's thickness)."""
    ds = build_profile(P, T, dewpoint=TD, height=[100.0, np.nan, np.nan, np.nan, np.nan])
    w = mpcalc.mixing_ratio_from_relative_humidity(P * units.hPa, T * units.degC,
                                                   mpcalc.relative_humidity_from_dewpoint(T * units.degC,
                                                                                          TD * units.degC))
    ref = mpcalc.thickness_hydrostatic(P * units.hPa, T * units.degC, mixing_ratio=w).m_as("m")
    assert_allclose(ds["height"].values[-1] - 100.0, ref, rtol=2e-3)
    filled = [e for e in ds.attrs["quality"] if e["action"] == "filled"]
    assert len(filled) == 4


def test_bad_values_removed_and_recorded():
    """Out-of-range values are removed and each is recorded with its reason (project policy)."""
    ds = build_profile([1000, 850, 700, 500, -5], [10, 75, -8, -25, -30], dewpoint=[8, 0, -2, -35, -40],
                       lines=[10, 11, 12, 13, 14])
    reasons = {(e.get("line"), e["action"]) for e in ds.attrs["quality"]}
    assert (11, "removed") in reasons  # temperature 75 degC
    assert (12, "removed") in reasons  # dewpoint 6 degC above temperature
    assert (14, "dropped") in reasons  # negative pressure
    assert ds.sizes["level"] == 4
    assert np.isnan(ds["temperature"].values[1])


def test_dewpoint_slightly_above_temperature_clipped():
    """A dewpoint above temperature by rounding (<= 1 degC) is set to the temperature and recorded."""
    ds = build_profile([1000, 850], [5.0, 0.0], dewpoint=[5.4, -1.0])
    assert ds["dewpoint"].values[0] == 5.0
    assert ds.attrs["quality"][0]["action"] == "changed"


def test_duplicate_levels_merged():
    """Two rows at the same pressure become one level; the duplicate is recorded."""
    ds = build_profile([1000, 850, 850, 700], [10, 2, 2.0, -8], dewpoint=[8, 0, 0, -12])
    assert ds.sizes["level"] == 3
    assert any(e["action"] == "merged" for e in ds.attrs["quality"])


def test_too_few_levels():
    with pytest.raises(ProfileQualityError, match="levels with a usable temperature"):
        build_profile([1000.0], [10.0])


def test_kelvin_under_degc_label():
    """Temperatures all above 150 labelled degC are kelvin: the error suggests the unit."""
    with pytest.raises(ProfileQualityError, match="kelvin"):
        build_profile(P, T + 273.15)


def test_quantities_in_any_unit():
    """Quantities in Pa and K give the same profile as plain hPa and degC."""
    a = build_profile(P, T, dewpoint=TD)
    b = build_profile(P * 100 * units.Pa, (T + 273.15) * units.K, dewpoint=(TD * 1.8 + 32) * units.degF)
    for name in ("pressure", "temperature", "dewpoint", "height"):
        assert_allclose(a[name].values, b[name].values, rtol=1e-9, atol=1e-9)


def test_stack_profiles_pads_levels():
    a = build_profile(P, T, dewpoint=TD, station="A", time="2026-01-15T00:00Z")
    b = build_profile(P[:3], T[:3], dewpoint=TD[:3], station="B", time="2026-01-15T12:00Z")
    s = stack_profiles([a, b])
    assert s.sizes == {"profile": 2, "level": 5}
    assert np.isnan(s["temperature"].values[1, 3])
    assert list(s["station"].values) == ["A", "B"]


# --- validation of every level (issue 16) --------------------------------------------------------------------

Z = np.array([100.0, 760.0, 1450.0, 2950.0, 5500.0])


def _thickness(p_bottom, p_top):
    """Hypsometric thickness (m) of the P/T/TD profile between two of its pressures, by MetPy."""
    sel = (P <= p_bottom) & (P >= p_top)
    rh = mpcalc.relative_humidity_from_dewpoint(T[sel] * units.degC, TD[sel] * units.degC)
    w = mpcalc.mixing_ratio_from_relative_humidity(P[sel] * units.hPa, T[sel] * units.degC, rh)
    return mpcalc.thickness_hydrostatic(P[sel] * units.hPa, T[sel] * units.degC, mixing_ratio=w).m_as("m")


def test_infinite_and_out_of_range_values_never_kept():
    """inf temperature removed; pressures 4067 hPa and 1e308 dropped, never the surface (limits: our design)."""
    ds = build_profile([4067.0, 1e308, 1000, 850, 700], [5.0, 5.0, np.inf, 2.0, -8.0],
                       dewpoint=[1.0, 1.0, 1.0, 0.0, -12.0], lines=[1, 2, 3, 4, 5])
    assert ds["pressure"].values[0] == 1000.0
    assert np.isnan(ds["temperature"].values[0])
    reasons = [(e.get("line"), e["reason"]) for e in ds.attrs["quality"]]
    for line, text in ((1, "pressure 4067 hPa"), (2, "pressure 1e+308 hPa"), (3, "temperature inf degC")):
        assert any(ln == line and text in r for ln, r in reasons), text


def test_station_position_checked_and_longitude_normalised():
    with pytest.raises(ProfileQualityError, match="latitude 91"):
        build_profile(P, T, latitude=91.0, source="x.csv")
    with pytest.raises(ProfileQualityError, match="longitude") as e:
        build_profile(P, T, longitude=np.inf, source="x.csv")
    assert e.value.file == "x.csv"
    ds = build_profile(P, T, longitude=350.0)
    assert ds.attrs["longitude"] == -10.0 and any("0..360" in q["reason"] for q in ds.attrs["quality"])


def test_corrupted_surface_height_removes_only_itself():
    """One corrupted height at the surface must not throw away the heights above it (longest rising run);
    the refilled surface height agrees with MetPy's hypsometric thickness below 925 hPa."""
    z = Z.copy()
    z[0] = 9999.0
    ds = build_profile(P, T, dewpoint=TD, height=z, lines=[1, 2, 3, 4, 5])
    assert_allclose(ds["height"].values[1:], Z[1:])
    assert_allclose(ds["height"].values[0], Z[1] - _thickness(1000, 925), atol=1.0)
    assert any(e.get("line") == 1 and e["action"] == "removed" for e in ds.attrs["quality"])


def test_height_that_still_rises_but_contradicts_the_thickness_is_removed():
    """5400 m at 700 hPa stays below 5500 m at 500 hPa but is ~2.4 km off the hypsometric thickness (MetPy)."""
    z = Z.copy()
    z[3] = 5400.0
    ds = build_profile(P, T, dewpoint=TD, height=z)
    assert np.all(np.diff(ds["height"].values) > 0)
    assert_allclose(ds["height"].values[3], Z[2] + _thickness(850, 700), rtol=0.02)
    assert any("disagrees with the hypsometric thickness" in e["reason"] for e in ds.attrs["quality"])


@pytest.mark.parametrize("factor, what", [(1 / 0.3048, "feet labelled m"), (0.001, "km labelled m")])
def test_heights_in_the_wrong_unit_are_named(factor, what):
    """Reported thickness a fixed multiple of the hypsometric one: the unit slip is named (1 ft = 0.3048 m)."""
    with pytest.raises(ProfileQualityError, match=what):
        build_profile(P, T, dewpoint=TD, height=Z * factor)


def test_level_below_the_ground_dropped():
    """Station elevation 1500 m: a level reported at 100 m, or without height at a higher pressure than the
    level at the ground, is under the ground; each is recorded."""
    ds = build_profile(P, T, dewpoint=TD, height=[100.0, np.nan, 1500.0, 2950.0, 5500.0], elevation=1500.0,
                       lines=[1, 2, 3, 4, 5])
    assert_allclose(ds["pressure"].values, [850, 700, 500])
    dropped = {e["line"] for e in ds.attrs["quality"] if "below the ground" in e["reason"]}
    assert dropped == {1, 2}


@pytest.mark.parametrize("kwargs, pattern", [
    ({"pressure": P * 100 * units.hPa}, "look like Pa"),
    ({"pressure": P * units.Pa}, "hPa labelled Pa"),
    ({"pressure": P / 100 * units.hPa}, "100 times too small"),
    ({"temperature": T * units.K}, "look like degC but are labelled K"),
    ({"relative_humidity": np.array([0.9, 0.8, 0.95, 0.6, 0.4])}, "fraction"),
])
def test_unit_slips_are_typed_errors(kwargs, pattern):
    args = {"pressure": P, "temperature": T} | kwargs
    with pytest.raises(ProfileQualityError, match=pattern):
        build_profile(args.pop("pressure"), args.pop("temperature"), **args)


def test_quality_record_stays_bounded_for_long_faulty_input():
    """Millions of faulty rows must not make millions of entries: beyond 1000, one summary entry."""
    n = 5000
    p = np.linspace(1000, 100, n)
    ds = build_profile(p, np.full(n, -10.0), dewpoint=np.full(n, np.inf))
    removed = [e for e in ds.attrs["quality"] if e.get("variable") == "dewpoint"]
    assert len(removed) <= 1001 and sum(e.get("count", 1) for e in removed) == n


def test_below_the_ground_without_any_height():
    """No height reported: a level at a pressure far above the US Standard Atmosphere 1976 pressure of the
    station elevation (845.6 hPa at 1500 m) plus a 90 hPa margin (our design) is under the ground."""
    ds = build_profile(P, T, dewpoint=TD, elevation=1500.0, lines=[1, 2, 3, 4, 5])
    assert ds["pressure"].values[0] == 925.0
    assert [e["line"] for e in ds.attrs["quality"] if "below the ground" in e["reason"]] == [1]


def test_percent_labelled_as_a_fraction():
    with pytest.raises(ProfileQualityError, match="percent labelled as a fraction"):
        build_profile(P, T, relative_humidity=np.array([90.0, 80, 95, 60, 40]) * units.dimensionless)


def test_stacking_keeps_other_per_level_variables():
    """stack_profiles keeps a reader's extra per-level variables (a high-resolution ascent's record time and
    drift, WMO BUFR descriptors 0 04 086 and 0 05 015/0 06 015), padded with NaN where a profile has none:
    nothing a reader kept is dropped silently (project rule)."""
    from icing.profile import stack_profiles

    a = build_profile([1000.0, 900.0, 800.0], [5.0, 0.0, -5.0], dewpoint=[2.0, -1.0, -8.0], station="A")
    b = build_profile([1000.0, 850.0], [4.0, -2.0], dewpoint=[1.0, -4.0], station="B")
    a["elapsed_time"] = ("level", np.array([0.0, 240.0, 480.0]), {"units": "s"})
    both = stack_profiles([a, b])
    assert "elapsed_time" in both and both["elapsed_time"].attrs["units"] == "s"
    np.testing.assert_array_equal(both["elapsed_time"].values[0], [0.0, 240.0, 480.0])
    assert np.isnan(both["elapsed_time"].values[1]).all()

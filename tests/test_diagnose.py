"""The diagnostics chain on profile Datasets: contract, units, model cloud water, missing data, dask, and the
demo scenario (invented data: used to show the chain behaves as the scenario intends, never as check values)."""

import glob
import os
import warnings

import numpy as np
import pytest
from numpy.testing import assert_allclose, assert_array_equal

import icing
from icing.errors import ConfigError, ProfileQualityError
from icing.physics.diagnose import LEVEL_OUTPUTS, PROFILE_OUTPUTS, diagnose, diagnose_arrays
from icing.physics.layers import SUPERCOOLED_COLUMNS, cloud_layers, freezing_levels, supercooled_layers
from icing.profile import build_profile, stack_profiles
from icing.units import ureg

P = np.array([1000, 975, 950, 925, 900, 875, 850, 825, 800, 775, 750, 725, 700, 650, 600, 550, 500, 400, 300.0])
T = np.array([2, 0.5, -1, -2.5, -4, -5.5, -7, -8.5, -10, -11.5, -13, -12, -13, -17, -21, -25, -30, -42, -55.0])
DEP = np.array([3, 3, 2, 0.5, 0.1, 0.1, 0.1, 0.1, 0.1, 0.1, 0.1, 8, 10, 15, 15, 15, 15, 15, 15.0])


def _deck(**kw):
    """A supercooled stratiform deck 925-750 hPa (constructed for the tests)."""
    return build_profile(P, T, dewpoint=T - DEP, station="T1", **kw)


def test_dataset_contract():
    """Every diagnostic is there with units/long_name, codes carry flag_values/flag_meanings, and the attrs
    carry the cold limit, airmass, LWC source, caution and the input's quality record."""
    prof = _deck()
    ds = diagnose(prof)
    for name in LEVEL_OUTPUTS:
        assert ds[name].dims == ("level",), name
        assert "long_name" in ds[name].attrs
    for name in PROFILE_OUTPUTS:
        assert ds[name].dims == ()
    for name in ("large_drop", "cloud_kind", "precipitation_type"):
        assert ds[name].dtype == np.int8 and "flag_meanings" in ds[name].attrs
    assert ds["lwc"].attrs["units"] == "g/m^3" and ds["mvd"].attrs["units"] == "micrometer"
    for name in ("pressure", "height", "temperature", "dewpoint", "qc_flag"):
        assert_array_equal(ds[name].values, prof[name].values)
    assert ds.attrs["cold_limit"] == -40.0 and ds.attrs["airmass"] == "supercooled"  # the default (issue 14)
    assert ds.attrs["lwc_source"] == "adiabatic"
    assert "not a certified forecast" in ds.attrs["caution"]
    assert ds.attrs["quality"] == prof.attrs["quality"] and ds.attrs["station"] == "T1"
    assert ds["supercooled"].any() and ds["valid"].all()


def test_cold_limit_as_quantity_and_refused_below_homogeneous_limit():
    """A Quantity and a plain degC float give the same; -50 degC is colder than the 224.8 K homogeneous-
    nucleation limit of pure water (DESIGN.md, facts of the trade) and is refused."""
    prof = _deck()
    a = diagnose(prof, cold_limit=-20.0)
    b = diagnose(prof, cold_limit=ureg.Quantity(253.15, "K"))
    assert_array_equal(a["supercooled"].values, b["supercooled"].values)
    assert not (a["supercooled"] & (a["temperature"] < -20.0)).any()
    with pytest.raises(ConfigError, match="homogeneous"):
        diagnose(prof, cold_limit=-50.0)
    with pytest.raises(ConfigError, match="unknown"):
        diagnose(prof, min_RH=(1, 2, 3, 4))


def test_airmass_changes_droplet_size_only():
    """Marine air (fewer droplets, 75 vs 290 /cm3, Miles et al. 2000 from memory) gives larger MVD for the
    same LWC: MVD scales as N^(-1/3) times the spectrum-shape ratio."""
    prof = _deck()
    cont, mar = diagnose(prof, airmass="continental"), diagnose(prof, airmass="marine")
    assert_allclose(cont["lwc"].values, mar["lwc"].values)
    wet = cont["lwc"].values > 0
    from icing.physics.microphysics import mvd_to_mean_volume_ratio

    expected = (290.0 / 75.0) ** (1 / 3) * mvd_to_mean_volume_ratio("marine") / mvd_to_mean_volume_ratio("continental")
    assert_allclose(mar["mvd"].values[wet] / cont["mvd"].values[wet], expected, rtol=1e-9)
    assert mar.attrs["airmass"] == "marine"


def test_model_cloud_liquid_used_and_said():
    """Where the source gives cloud liquid water it is the LWC, and the Dataset says so."""
    cl = np.where((P <= 900) & (P >= 750), 0.25, 0.0)
    ds = diagnose(_deck(cloud_liquid=cl))
    assert ds.attrs["lwc_source"] == "model cloud liquid"
    inside = ds["in_cloud"].values
    assert_allclose(ds["lwc"].values[inside & (cl > 0)], 0.25)
    assert (ds["lwc"].values[~inside] == 0).all()


def test_missing_humidity_is_not_cloud_free():
    """Levels without humidity are valid=False; with humidity missing and no cloud found the precipitation
    type is unknown (-1), not none (project rule: unknown is never safe)."""
    dry_t = T.copy()
    td = T - 20.0
    td[12:] = np.nan
    ds = diagnose(build_profile(P, dry_t, dewpoint=td))
    assert not ds["valid"].values[12:].any() and ds["valid"].values[:12].all()
    assert int(ds["precipitation_type"]) == -1
    # A gap inside the deck is bridged (interpolated) and reported in the layer table.
    td = T - DEP
    td[7] = np.nan
    prof = build_profile(P, T, dewpoint=td)
    table = supercooled_layers(prof)
    assert len(table) == 1 and "without temperature or humidity" in table["quality"][0]


def test_layer_tables():
    """Column sets as in DESIGN.md; feet are metres / 0.3048 (international foot); filled heights show in
    the quality text."""
    prof = _deck()
    sc = supercooled_layers(prof)
    assert list(sc.columns) == SUPERCOOLED_COLUMNS and len(sc) == 1
    row = sc.iloc[0]
    assert_allclose(row["base_height_ft"], row["base_height_m"] / 0.3048)
    assert_allclose(row["thickness_m"], row["top_height_m"] - row["base_height_m"])
    assert -40.0 <= row["top_temperature_c"] <= row["base_temperature_c"] <= 0.0
    # Topped at -13 degC (drizzle at most possible down to -15 degC, after the -12 degC case of Cober et al.
    # 1996) and 1.6 km deep: adiabatic growth brings the default 200 droplets per cm3 within the uncertainty of
    # the 14 um coalescence size (Freud and Rosenfeld 2012).
    assert row["kind"] == "stratiform" and row["large_drop"] == "drizzle"
    assert row["large_drop_potential"] == "possible"
    assert row["large_drop_reason"].startswith("warm-rain process")
    assert "height filled" in row["quality"]
    assert row["max_lwc_g_m3"] > 0 and 5.0 < row["mvd_um"] < 50.0
    cl = cloud_layers(prof)
    assert len(cl) == 1 and cl["supercooled_levels"][0] >= 1
    fl = freezing_levels(prof)
    assert len(fl) == 1 and fl["direction"][0] == "cooling upward"
    with pytest.raises(ProfileQualityError):
        supercooled_layers(stack_profiles([prof, prof]))


def test_stacked_profiles_keep_dims_and_match_single():
    """Leading dims and coords survive; each stacked profile diagnoses as it does alone (padding is NaN)."""
    a = _deck()
    b = build_profile(P[:12], T[:12] + 3.0, dewpoint=T[:12] - 1.0)
    both = stack_profiles([a, b])
    ds = diagnose(both)
    assert ds["lwc"].dims == ("profile", "level") and ds["precipitation_type"].dims == ("profile",)
    assert_array_equal(ds["profile"].values, both["profile"].values)
    for i, single in enumerate((a, b)):
        one = diagnose(single)
        nl = single.sizes["level"]
        for name in ("in_cloud", "supercooled", "large_drop", "cloud_kind"):
            assert_array_equal(ds[name].values[i, :nl], one[name].values, err_msg=name)
        assert_allclose(ds["lwc"].values[i, :nl], one["lwc"].values)
        assert int(ds["precipitation_type"][i]) == int(one["precipitation_type"])
    assert not ds["valid"].values[1, 12:].any()
    assert "latitude" in ds and ds["latitude"].dims == ("profile",)


def test_dask_stays_lazy_and_matches():
    """apply_ufunc with dask='parallelized': chunked input gives a lazy result equal to the numpy one."""
    pytest.importorskip("dask")
    both = stack_profiles([_deck(), _deck()])
    lazy = diagnose(both.chunk({"profile": 1}))
    assert lazy["lwc"].chunks is not None
    assert_allclose(lazy["lwc"].compute().values, diagnose(both)["lwc"].values)


def test_arrays_any_leading_shape():
    """The numpy core takes any leading dimensions."""
    p = np.broadcast_to(P * 100.0, (2, 3, P.size))
    t = np.broadcast_to(T + 273.15, p.shape)
    td = np.broadcast_to(T - DEP + 273.15, p.shape)
    z = np.broadcast_to(_deck()["height"].values, p.shape)
    out = diagnose_arrays(p, t, td, z)
    assert out["lwc"].shape == (2, 3, P.size) and out["precipitation_type"].shape == (2, 3)
    assert (out["supercooled"] == out["supercooled"][0, 0]).all()


# ----------------------------------------------------------------------------------- demo scenario

DEMO = os.path.join(os.path.dirname(__file__), "..", "sample_soundings")


def _demo(station, hour="00"):
    files = glob.glob(os.path.join(DEMO, f"*_{station}_20260115{hour}.csv"))
    if not files:
        pytest.skip("demo soundings not present")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        profs = icing.read_sounding(files[0])
    return profs[0] if isinstance(profs, list) else profs


def test_demo_stratiform_deck():
    """Station 00101 is meant to show a deep supercooled stratiform deck (saturated about 900-620 hPa between
    -2 and -17 degC): one supercooled layer, stratiform, no large drops, below 0 degC throughout."""
    table = supercooled_layers(_demo("00101"))
    assert len(table) == 1
    row = table.iloc[0]
    assert row["kind"] == "stratiform" and row["large_drop"] == "none"
    assert row["thickness_m"] > 2000.0 and -20.0 < row["top_temperature_c"] < -10.0
    assert row["max_lwc_g_m3"] > 0.1


def test_demo_freezing_rain_below_warm_nose():
    """Station 00102 is meant to show a warm layer aloft (+3 degC near 800 hPa) over a cold surface layer:
    two freezing levels, a warm layer aloft, freezing rain (possibly with pellets) at the surface and
    rain-size supercooled drops in the cold layer under the nose."""
    prof = _demo("00102")
    ds = diagnose(prof)
    assert int(ds["freezing_level_count"]) == 2
    assert ds["warm_layer_aloft"].values[np.isclose(ds["pressure"].values, 800.0)].all()
    assert icing.physics.layers.PRECIPITATION_TYPES[int(ds["precipitation_type"])] in (
        "freezing_rain", "freezing_rain_and_ice_pellets")
    below_nose = (ds["temperature"].values <= 0) & (ds["pressure"].values > 850)
    assert (ds["large_drop"].values[below_nose] == 2).all()
    fl = freezing_levels(prof)
    assert list(fl["direction"]) == ["warming upward", "cooling upward"]


def test_demo_convective():
    """Station 00103 is meant to be convective (steep lapse rate, moist to 500 hPa): the cloud is classed
    convective and gets the smaller sub-adiabatic factor."""
    table = supercooled_layers(_demo("00103"))
    assert len(table) >= 1 and (table["kind"] == "convective").all()


def test_demo_dry_case():
    """Station 00104 is meant to be dry and cold: no cloud, no supercooled layer, no precipitation, and every
    level had its data (so 'no cloud' is a finding, not a gap)."""
    prof = _demo("00104")
    ds = diagnose(prof)
    assert not ds["in_cloud"].any() and not ds["supercooled"].any() and ds["valid"].all()
    assert int(ds["precipitation_type"]) == 0
    assert len(supercooled_layers(prof)) == 0 and len(cloud_layers(prof)) == 0


def test_demo_quality_flows_through():
    """Station 00105 has faults the checks catch: the layer table says which levels were filled or changed."""
    prof = _demo("00105")
    assert prof.attrs["quality"]
    table = supercooled_layers(prof)
    assert len(table) >= 1 and table["quality"].str.len().max() > 0
    assert diagnose(prof).attrs["quality"] == prof.attrs["quality"]


def test_package_level_call_after_submodule_import():
    """``icing.diagnose(ds)`` (the public function) works after ``import icing.physics.diagnose``."""
    import icing.physics.diagnose  # noqa: F401

    ds = icing.diagnose(_deck())
    assert "supercooled" in ds and callable(icing.diagnose)


def _stratiform_deck():
    """A saturated stratiform deck from 800 to 3,500 m, 0 degC at the ground, -5 to -23 degC in the deck, dry
    above and below (constructed for the test, the situation the calibration issue describes)."""
    from icing.physics import thermo

    z = np.arange(0.0, 6001.0, 100.0)
    t = np.where(z < 800, -5.0 * z / 800, -5.0 - 18.0 * (z - 800) / 2700)
    t = np.where(z > 3500, -23.0 - 6.5e-3 * (z - 3500), t)
    td = np.where((z >= 800) & (z <= 3500), t, t - 8.0)
    return build_profile(thermo.standard_atmosphere_pressure(z) / 100.0, t, dewpoint=td, height=z, station="T9")


def test_stratiform_lwc_from_a_sounding_is_as_measured_in_such_cloud():
    """LWC of a deep supercooled stratiform deck from the sounding alone sits where aircraft measure it, not
    at the certification envelope: measured supercooled stratiform LWC averages about 0.1-0.2 g/m3 and rarely
    exceeds the Appendix C continuous maximum (Cober et al. 2001, J. Appl. Meteor. 40; from memory). Checked:
    median 0.1-0.3 g/m3 (the measured mean with the factor-of-two uncertainty of a sounding-only estimate on
    its upper side), every level below the continuous maximum at its temperature and MVD (FAA AC 20-73A
    Table 6), and far below the adiabatic value high in the deck (Karstens et al. 1994: a quarter of it 1 km
    above the base, from memory)."""
    from icing.physics.envelopes import continuous_max_lwc_si

    ds = diagnose(_stratiform_deck())
    sc = ds["supercooled"].values & (ds["lwc"].values > 0)
    assert sc.sum() >= 20
    lwc, mvd, t = ds["lwc"].values[sc], ds["mvd"].values[sc], ds["temperature"].values[sc]
    assert 0.1 <= np.median(lwc) <= 0.3
    assert np.all(lwc < continuous_max_lwc_si(np.clip(mvd, 15, 40), np.clip(t, -30, 0)))
    assert np.all((mvd > 5.0) & (mvd < 25.0))  # stratiform icing cloud: MVD mostly 12-25 um (DESIGN.md)
    constant = diagnose(_stratiform_deck(), stratiform_factor=1.0, convective_factor=1.0)  # adiabatic
    assert constant["lwc"].values[sc].max() > 4 * lwc.max()

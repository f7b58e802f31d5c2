"""Property tests of the diagnostics on random profiles (hypothesis): physical bounds, consistency between
fields, and invariance to units, level order and vectorisation."""

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose, assert_array_equal

from icing.physics import thermo
from icing.physics.diagnose import LEVEL_OUTPUTS, PROFILE_OUTPUTS, diagnose, diagnose_arrays
from icing.profile import build_profile, stack_profiles

DEPRESSIONS = [0.0, 0.05, 0.3, 1.0, 3.0, 8.0, 15.0]


@st.composite
def profiles(draw, min_levels=6, max_levels=30):
    """Pressure (hPa), temperature and dewpoint (degC): random lapse rates with inversions and warm noses,
    and bands of saturated and dry air. Temperatures sit on a 0.1 degC grid offset by 0.05 so that none is
    exactly 0 degC or the cold limit (a unit round trip must not move a level across a threshold)."""
    n = draw(st.integers(min_levels, max_levels))
    p0 = draw(st.floats(960.0, 1030.0))
    top = draw(st.floats(250.0, 500.0))
    p = np.exp(np.linspace(np.log(p0), np.log(top), n))
    t0 = draw(st.integers(-250, 200)) / 10.0
    steps = np.array(draw(st.lists(st.integers(-40, 120), min_size=n - 1, max_size=n - 1))) / 10.0
    t = np.round(np.concatenate([[t0], t0 - np.cumsum(steps)]), 1) + 0.05
    t = np.clip(t, -85.0, 45.0)
    dep = np.array(draw(st.lists(st.sampled_from(DEPRESSIONS), min_size=n, max_size=n)))
    return p, t, t - dep


def _si(prof):
    return (prof["pressure"].values * 100.0, prof["temperature"].values + thermo.T0,
            prof["dewpoint"].values + thermo.T0, prof["height"].values)


SETTINGS = settings(max_examples=40, deadline=None)


@SETTINGS
@given(profiles(), st.floats(-40.0, -20.0))
def test_physical_bounds_and_consistency(prof, cold_c):
    """No supercooled level warmer than 0 degC or colder than the cold limit; every supercooled level is in
    cloud; LWC is zero outside cloud and never negative; MVD only where there is liquid; fractions in 0-1;
    warm layers aloft are above 0 degC."""
    p, t, td = prof
    out = diagnose_arrays(*_si(build_profile(p, t, dewpoint=td)), cold_limit=cold_c + thermo.T0)
    tk = t + thermo.T0
    sc = out["supercooled"]
    assert (tk[sc] <= thermo.T0).all() and (tk[sc] >= cold_c + thermo.T0).all()
    assert not (sc & ~out["in_cloud"]).any()
    assert (out["lwc"][~out["in_cloud"]] == 0.0).all() and (out["lwc"] >= 0).all()
    assert np.isnan(out["mvd"][out["lwc"] == 0]).all() and np.isfinite(out["mvd"][out["lwc"] > 0]).all()
    assert ((out["liquid_fraction"] >= 0) & (out["liquid_fraction"] <= 1)).all()
    assert (tk[out["warm_layer_aloft"]] > thermo.T0).all()
    assert set(np.unique(out["large_drop"])) <= {0, 1, 2}
    assert (out["cloud_kind"][~out["in_cloud"]] == 0).all() and (out["cloud_kind"][out["in_cloud"]] > 0).all()
    assert int(out["freezing_level_count"]) == int(np.count_nonzero(np.diff(tk > thermo.T0)))


@SETTINGS
@given(profiles(), st.floats(0.1, 0.9), st.floats(0.05, 0.5))
def test_lwc_grows_with_subadiabatic_factor(prof, factor, extra):
    """A larger sub-adiabatic factor raises LWC wherever there is liquid (LWC is proportional to it)."""
    p, t, td = prof
    si = _si(build_profile(p, t, dewpoint=td))
    lo = diagnose_arrays(*si, stratiform_factor=factor, convective_factor=factor / 2)
    hi = diagnose_arrays(*si, stratiform_factor=factor + extra, convective_factor=(factor + extra) / 2)
    assert (hi["lwc"] >= lo["lwc"] - 1e-12).all()
    assert (hi["lwc"][lo["lwc"] > 0] > lo["lwc"][lo["lwc"] > 0]).all()


def _same(a, b):
    for name in LEVEL_OUTPUTS + PROFILE_OUTPUTS:
        x, y = np.asarray(a[name]), np.asarray(b[name])
        if x.dtype.kind == "f":
            assert_allclose(x, y, rtol=1e-9, atol=1e-9, equal_nan=True, err_msg=name)
        else:
            assert_array_equal(x, y, err_msg=name)


@SETTINGS
@given(profiles())
def test_units_do_not_matter(prof):
    """The same profile in Pa, K, degF and ft gives the same diagnostics as in hPa, degC and m."""
    p, t, td = prof
    ds = build_profile(p, t, dewpoint=td)
    alt = ds.copy()
    alt["pressure"] = (("level",), ds["pressure"].values * 100.0, {"units": "Pa"})
    alt["temperature"] = (("level",), ds["temperature"].values + 273.15, {"units": "K"})
    alt["dewpoint"] = (("level",), ds["dewpoint"].values * 1.8 + 32.0, {"units": "degF"})
    alt["height"] = (("level",), ds["height"].values / 0.3048, {"units": "ft"})
    a, b = diagnose(ds), diagnose(alt)
    _same({k: a[k].values for k in a.data_vars}, {k: b[k].values for k in b.data_vars})


@SETTINGS
@given(profiles())
def test_level_order_does_not_matter(prof):
    """Levels given top first give the same diagnostics, in the order given."""
    p, t, td = prof
    si = _si(build_profile(p, t, dewpoint=td))
    a = diagnose_arrays(*si)
    b = diagnose_arrays(*(x[::-1] for x in si))
    _same(a, {k: (v[::-1] if np.ndim(v) else v) for k, v in b.items()})


@settings(max_examples=15, deadline=None)
@given(st.lists(profiles(), min_size=2, max_size=4))
def test_vectorised_equals_one_by_one(profs):
    """Stacked profiles (padded with NaN to the longest) diagnose as each does alone."""
    built = [build_profile(p, t, dewpoint=td) for p, t, td in profs]
    stacked = diagnose(stack_profiles(built))
    for i, one in enumerate(built):
        single = diagnose(one)
        nl = one.sizes["level"]
        _same({k: single[k].values for k in LEVEL_OUTPUTS + PROFILE_OUTPUTS},
              {k: (stacked[k].values[i, :nl] if k in LEVEL_OUTPUTS else stacked[k].values[i])
               for k in LEVEL_OUTPUTS + PROFILE_OUTPUTS})

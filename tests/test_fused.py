"""The fused numba engine (icing.physics.fused) against the numpy engine it mirrors.

The numpy chain is the reference here: its physics is checked against published values and MetPy in
test_layers.py, test_microphysics.py, test_diagnose.py and test_accretion.py. These tests only check that the
compiled column loop computes the same thing (the issue asks for both engines with the same results): flags
and codes equal, numbers equal to rounding (numba's exp/log and numpy's SIMD versions may differ in the last
bit). The columns are random and made to reach every branch: moist layers of any depth, warm layers aloft,
missing levels inside and at the ends, model cloud liquid, levels out of pressure order.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

pytest.importorskip("numba")

from icing.errors import ConfigError  # noqa: E402
from icing.grid import grid_core  # noqa: E402
from icing.physics import fused, thermo  # noqa: E402
from icing.physics.diagnose import FUSED_MIN_POINTS, diagnose_arrays  # noqa: E402

LEVELS_HPA = np.array([1000, 975, 950, 925, 900, 875, 850, 825, 800, 775, 750, 700, 650, 600, 550, 500, 450, 400,
                       350, 300, 250, 200], float)


def columns(n_profiles, seed, gaps=True, levels=LEVELS_HPA):
    """Random columns (Pa, K, K, m) around the US 1976 standard atmosphere, with moist layers, warm noses
    aloft and, optionally, missing values."""
    rng = np.random.default_rng(seed)
    p = np.broadcast_to(levels * 100.0, (n_profiles, levels.size)).copy()
    z_std = thermo.standard_atmosphere_height(p)
    t = thermo.standard_atmosphere_temperature(z_std) + rng.normal(-8.0, 8.0, (n_profiles, 1))
    t += rng.normal(0.0, 0.6, t.shape)
    nose = rng.random(n_profiles) < 0.35  # a warm layer aloft over cold air near the ground
    centre = rng.uniform(700.0, 900.0, n_profiles)[:, None]
    t += np.where(nose[:, None], rng.uniform(4.0, 12.0, (n_profiles, 1)) *
                  np.exp(-((levels - centre) / 60.0) ** 2), 0.0)
    depression = rng.uniform(0.0, 25.0, (n_profiles, 1)) * np.ones(levels.size)
    for _ in range(2):  # up to two moist layers per column
        lo = rng.integers(0, levels.size, n_profiles)[:, None]
        depth = rng.integers(1, 9, n_profiles)[:, None]
        k = np.arange(levels.size)
        moist = (k >= lo) & (k < lo + depth) & (rng.random((n_profiles, 1)) < 0.8)
        depression = np.where(moist, rng.uniform(0.0, 1.2, (n_profiles, levels.size)), depression)
    td = t - depression
    z = z_std + rng.normal(0.0, 30.0, (n_profiles, 1))
    if gaps:
        for a, share in ((t, 0.03), (td, 0.05), (z, 0.02)):
            a[rng.random(a.shape) < share] = np.nan
        pad = rng.random(n_profiles) < 0.1  # padded tops and missing bottoms
        t[pad, -3:] = np.nan
        td[pad, -3:] = np.nan
        z[pad, -3:] = np.nan
        low = rng.random(n_profiles) < 0.05
        t[low, :2] = np.nan
    return p, t, td, z


def assert_same(a, b):
    assert set(a) == set(b)
    for name in a:
        x, y = np.asarray(a[name]), np.asarray(b[name])
        assert x.shape == y.shape and x.dtype == y.dtype, name
        if x.dtype.kind == "f":
            np.testing.assert_allclose(y, x, rtol=1e-9, atol=1e-9, equal_nan=True, err_msg=name)
        else:
            mismatch = int(np.count_nonzero(x != y))
            assert mismatch == 0, f"{name}: {mismatch} of {x.size} differ"


def both(*arrays, **kwargs):
    return (diagnose_arrays(*arrays, engine="numpy", **kwargs), diagnose_arrays(*arrays, engine="numba", **kwargs))


def test_engines_agree_on_random_columns():
    """Random columns with gaps: every output the same (the numpy chain is the reference)."""
    p, t, td, z = columns(3000, seed=1)
    a, b = both(p, t, td, z, threads=1)
    assert_same(a, b)
    # the columns reach the branches that matter
    assert b["supercooled"].any() and (b["cloud_kind"] == 2).any() and (b["large_drop"] == 2).any()
    assert (b["large_drop"] == 1).any() and (b["precipitation_type"] == -1).any()
    assert len(np.unique(b["precipitation_type"])) >= 5


def test_engines_agree_with_threads_and_shared_pressure():
    """Blocks on several threads, and one pressure row for every column (a model grid), as one thread."""
    p, t, td, z = columns(5000, seed=2, gaps=False)
    one = diagnose_arrays(p[0], t, td, z, engine="numba", threads=1)
    assert_same(diagnose_arrays(p, t, td, z, engine="numpy", threads=1), one)
    assert_same(one, diagnose_arrays(p[0], t, td, z, engine="numba", threads=3))


def test_engines_agree_with_model_cloud_liquid():
    p, t, td, z = columns(2000, seed=3)
    rng = np.random.default_rng(30)
    cl = np.where(rng.random(t.shape) < 0.3, rng.uniform(0.0, 6e-4, t.shape), 0.0)
    cl[rng.random(t.shape) < 0.2] = np.nan  # model cloud missing at some levels: the adiabatic estimate there
    a, b = both(p, t, td, z, cl, threads=1)
    assert_same(a, b)


@pytest.mark.parametrize("kwargs", [
    {"airmass": "marine"},
    {"airmass": 150.0, "cold_limit": 238.15},
    {"liquid_rh": 96.0, "stratiform_cap": False},
    {"stratiform_factor": 0.6, "convective_factor": 0.3, "convective_excess_k": 0.2},
    {"min_rh": (90.0, 88.0, 85.0, 70.0), "merge_gap_m": 500.0, "melting_area_aloft": 5.0},
])
def test_engines_agree_with_settings(kwargs):
    p, t, td, z = columns(1500, seed=4)
    assert_same(*both(p, t, td, z, threads=1, **kwargs))


def test_engines_agree_where_pressure_is_missing():
    """Levels without a pressure (NaN) but with temperature and dewpoint: not valid, no crash, same results."""
    p, t, td, z = columns(800, seed=10, gaps=False)
    rng = np.random.default_rng(100)
    p[rng.random(p.shape) < 0.05] = np.nan
    a, b = both(p, t, td, z, threads=1)
    assert_same(a, b)
    assert not b["valid"][~np.isfinite(p)].any()


def test_engines_agree_on_levels_out_of_order():
    """Shuffled levels are sorted inside and the results put back: the same either way."""
    p, t, td, z = columns(1500, seed=5)
    order = np.random.default_rng(50).permutation(LEVELS_HPA.size)
    a, b = both(p[:, order], t[:, order], td[:, order], z[:, order], threads=1)
    assert_same(a, b)


def test_grid_core_engines_agree():
    """The whole grid chain with an aircraft: summaries, accretion potential, intensities, column maxima."""
    p, t, td, z = columns(4000, seed=6)
    shape = (2, 50, 40, LEVELS_HPA.size)
    args = (LEVELS_HPA * 100.0, t.reshape(shape), td.reshape(shape), z.reshape(shape))
    kw = {"airspeed": 120.0, "body_diameter": 0.08}
    a = grid_core(*args, engine="numpy", **kw)
    b = grid_core(*args, engine="numba", **kw)
    assert_same(a, b)
    assert (b["max_potential_intensity"] >= 3).any() and (b["max_potential_intensity"] == -1).any()
    assert np.isfinite(b["freezing_levels"][..., 1]).any()


def test_auto_uses_numba_for_large_inputs_only(monkeypatch):
    from icing.physics import diagnose as dg

    p, t, td, z = columns(10, seed=7)
    small = dg._chain(p, t, td, z, None, cold_limit=233.15, airmass="continental", threads=1, engine="auto",
                      summaries=False, thresholds={})
    assert small[1] is False and t.size < FUSED_MIN_POINTS
    p, t, td, z = columns(FUSED_MIN_POINTS // LEVELS_HPA.size + 1, seed=7)
    big = dg._chain(p, t, td, z, None, cold_limit=233.15, airmass="continental", threads=1, engine="auto",
                    summaries=False, thresholds={})
    assert big[1] is True
    monkeypatch.setenv("ICING_ENGINE", "numpy")
    forced = dg._chain(p, t, td, z, None, cold_limit=233.15, airmass="continental", threads=1, engine=None,
                       summaries=False, thresholds={})
    assert forced[1] is False


def test_engine_errors(monkeypatch):
    p, t, td, z = columns(5, seed=8)
    with pytest.raises(ConfigError, match="engine"):
        diagnose_arrays(p, t, td, z, engine="fortran")
    monkeypatch.setattr(fused, "available", lambda: False)
    with pytest.raises(ConfigError, match="numba"):
        diagnose_arrays(p, t, td, z, engine="numba")
    auto = diagnose_arrays(p, t, td, z, engine="auto")  # falls back to numpy without numba
    assert auto["lwc"].shape == t.shape


@pytest.mark.parametrize("engine", ["numpy", "numba"])
def test_threshold_tables_must_match_the_heights(engine):
    """The RH thresholds are one value per height of the Zhang et al. table (the kernel reads four)."""
    p, t, td, z = columns(5, seed=9)
    for bad in ((90.0, 88.0, 85.0), (90.0, np.nan, 85.0, 70.0), 90.0):
        with pytest.raises(ConfigError, match="min_rh"):
            diagnose_arrays(p, t, td, z, engine=engine, min_rh=bad)


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 30), gaps=st.booleans())
def test_engines_agree_property(seed, n, gaps):
    """Any random collection of columns: the same results (property test)."""
    p, t, td, z = columns(n, seed=seed, gaps=gaps)
    assert_same(*both(p, t, td, z, threads=1))

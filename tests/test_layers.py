"""Cloud layers, freezing levels and precipitation type against published thresholds (each test names its
source)."""

import metpy.calc as mpcalc
import numpy as np
import pytest
from metpy.units import units
from numpy.testing import assert_allclose
from scipy.optimize import brentq

from icing.physics import cloud, layers, precipitation, thermo
from icing.physics.diagnose import diagnose_arrays
from icing.profile import build_profile

# ---------------------------------------------------------------- Zhang et al. (2010) cloud thresholds


@pytest.mark.parametrize(("z_km", "min_rh", "max_rh", "inter_rh"),
                         [(0, 92, 95, 84), (2, 90, 93, 82), (6, 88, 90, 78), (12, 75, 80, 70)])
def test_zhang_thresholds_table(z_km, min_rh, max_rh, inter_rh):
    """min-RH, max-RH and inter-RH at 0, 2, 6 and 12 km: Zhang et al. (2010), Table 1 (inter-RH at 2 km
    from memory: the paper steps there)."""
    z = z_km * 1000.0
    assert_allclose(layers.zhang_thresholds(z, layers.ZHANG_MIN_RH), min_rh)
    assert_allclose(layers.zhang_thresholds(z, layers.ZHANG_MAX_RH), max_rh)
    assert_allclose(layers.zhang_thresholds(z, layers.ZHANG_INTER_RH), inter_rh)


def test_zhang_thresholds_between_and_above():
    """Linear between the tabulated heights and constant above 12 km (Zhang et al. 2010, Table 1)."""
    assert_allclose(layers.zhang_thresholds(1000.0), 91.0)
    assert_allclose(layers.zhang_thresholds(15000.0), 75.0)


Z = np.arange(0.0, 10000.0, 50.0)


def _mask(rh):
    c, _ = cloud.cloud_mask(Z[None], np.asarray(rh, float)[None])
    return c[0]


def _band(lo, hi, value, base=50.0):
    rh = np.full(Z.shape, base)
    rh[(Z >= lo) & (Z <= hi)] = value
    return rh


def test_cloud_needs_max_rh():
    """A moist layer is cloud only if its largest RH exceeds max-RH at its base (Zhang et al. 2010, step 4):
    at 1 km min-RH is 91 % and max-RH 94 %."""
    assert _mask(_band(1000, 1500, 96)).sum() == 11
    assert _mask(_band(1000, 1500, 92.5)).sum() == 0


def test_close_layers_merge():
    """Layers closer than 300 m are one layer, farther ones are not unless the gap stays above inter-RH
    (Zhang et al. 2010, step 6)."""
    rh = np.maximum(_band(1000, 1500, 96), _band(1700, 2200, 96))
    c = _mask(rh)
    assert c[(Z >= 1000) & (Z <= 2200)].all()
    rh = np.maximum(_band(1000, 1500, 96), _band(2500, 3000, 96))
    c = _mask(rh)
    assert not c[(Z > 1500) & (Z < 2500)].any() and c[Z == 2500].all()
    rh = np.maximum(np.maximum(_band(1000, 1500, 96), _band(2100, 2600, 96)), _band(1550, 2050, 88))
    c = _mask(rh)  # gap of 600 m but RH 88 % > inter-RH (about 82 %) all through it
    assert c[(Z >= 1000) & (Z <= 2600)].all()


def test_near_surface_rules():
    """Moist layers based below 120 m and thinner than 400 m are dropped; no cloud below 280 m (Zhang et al.
    2010, steps 3 and 5)."""
    assert _mask(_band(0, 200, 98)).sum() == 0
    c = _mask(_band(0, 800, 98))
    assert c.any() and Z[c].min() >= 280.0


def test_thin_cloud_dropped():
    """Clouds thinner than 61 m above 2 km are dropped (Zhang et al. 2010, step 7); one moist level at 5 km
    spans about 16 m between the interpolated crossings, three levels about 116 m."""
    assert _mask(_band(5000, 5000, 96)).sum() == 0
    assert _mask(_band(5000, 5100, 96)).sum() == 3


# ---------------------------------------------------------------- Bourgouin (2000) precipitation type

P_HPA = np.arange(1000.0, 449.0, -25.0)


def _column(nodes_p, nodes_t, cloud=(700.0, 500.0), dry=5.0):
    """Levels every 25 hPa, temperature piecewise linear in ln p through the nodes; saturated between the
    cloud pressures and ``dry`` K of dewpoint depression elsewhere."""
    x = -np.log(P_HPA)
    t = np.interp(x, -np.log(np.asarray(nodes_p)), np.asarray(nodes_t))
    td = np.where((P_HPA <= cloud[0]) & (P_HPA >= cloud[1]), t, t - dry)
    tk, tdk, pa = t + 273.15, td + 273.15, P_HPA * 100.0
    z = thermo.hypsometric_heights(pa, tk, tdk, anchor_height=np.array(0.0))
    return pa, tk, tdk, z


def _reference_area(nodes_p, nodes_t, p_lo, p_hi):
    """Energy area between p_lo and p_hi (hPa) from MetPy's potential_temperature on a fine grid:
    cp * integral |T - 0 degC| d ln theta (Bourgouin 2000, eq. 1)."""
    pf = np.exp(np.linspace(np.log(p_lo), np.log(p_hi), 4001))
    tf = np.interp(-np.log(pf), -np.log(np.asarray(nodes_p)), np.asarray(nodes_t))
    theta = mpcalc.potential_temperature(pf * units.hPa, tf * units.degC).magnitude
    return float(1004.6662 * np.abs(np.trapezoid(np.abs(tf), np.log(theta))))


def _warm_nose(ts, tw):
    """Cold surface layer (ts at 1000 hPa to 0 at 900), warm nose (peak tw at 850, 0 at 800), cold above."""
    return [1000, 900, 850, 800, 700, 600, 500, 450], [ts, 0.0, tw, 0.0, -8.0, -15.0, -23.0, -27.0]


def _ptype(nodes):
    out = diagnose_arrays(*_column(*nodes))
    return int(out["precipitation_type"]), out


def test_energy_area_against_metpy():
    """Layer areas summed from our per-level areas equal the fine-grid MetPy integral (Bourgouin 2000 eq. 1)."""
    nodes = _warm_nose(-4.0, 3.0)
    pa, tk, _, _ = _column(*nodes)
    a = precipitation.energy_area_by_level(pa[None], tk[None])[0]
    warm = tk > 273.15
    assert_allclose(a[warm].sum(), _reference_area(*nodes, 900, 800), rtol=0.02)
    cold_low = (P_HPA >= 900) & ~warm
    assert_allclose(a[cold_low].sum(), _reference_area(*nodes, 1000, 900), rtol=0.02)


def _solve(fn, target, lo, hi):
    return brentq(lambda v: fn(v) - target, lo, hi)


def test_bourgouin_melting_threshold():
    """A warm layer aloft with PA < 2 J/kg leaves snow; above it the snow melts and, over a shallow cold
    layer, arrives as freezing rain (Bourgouin 2000)."""
    tw = _solve(lambda v: _reference_area(*_warm_nose(-1.0, v), 900, 800), 2.0, 0.01, 5.0)
    code, out = _ptype(_warm_nose(-1.0, 0.7 * tw))
    assert code == 1 and not (out["large_drop"] == 2).any()
    code, out = _ptype(_warm_nose(-1.0, 1.4 * tw))
    assert code == 3
    assert (out["large_drop"][P_HPA > 900] == 2).all()


@pytest.mark.parametrize(("where", "expected"), [("below_46", 3), ("between", 5), ("above_66", 4)])
def test_bourgouin_refreezing_thresholds(where, expected):
    """Cold surface layer under a warm layer aloft: NA < 46 + 0.66 PA freezing rain, NA > 66 + 0.66 PA ice
    pellets, a mix in between (Bourgouin 2000). Areas from the MetPy fine-grid integral; 15 % margins."""
    tw = 3.0
    pa = _reference_area(*_warm_nose(-3.0, tw), 900, 800)
    lo, hi = 46.0 + 0.66 * pa, 66.0 + 0.66 * pa
    target = {"below_46": 0.85 * lo, "between": 0.5 * (lo + hi), "above_66": 1.15 * hi}[where]
    ts = _solve(lambda v: _reference_area(*_warm_nose(v, tw), 1000, 900), target, -40.0, -0.01)
    code, out = _ptype(_warm_nose(ts, tw))
    assert code == expected
    # Melted precipitation falls into the cold layer as supercooled drops: through all of it where Bourgouin's
    # outcome is freezing rain or the mix; where it is ice pellets the drops have refrozen before the ground.
    cold = P_HPA > 900
    assert out["large_drop"][P_HPA == 900 + 25][0] == 2  # the top of the cold layer: still liquid
    if expected == 4:
        assert out["large_drop"][P_HPA == 1000][0] == 0
    else:
        assert (out["large_drop"][cold] == 2).all()
    assert bool(out["warm_layer_aloft"][P_HPA == 850][0])


def test_shallow_warm_nose_over_deep_cold_layer_gives_pellets_not_freezing_rain_at_the_ground():
    """A shallow warm nose (+1 degC, about 200 m) over a deep cold layer (about -5 degC over 1.9 km) under a
    precipitating deck: Bourgouin (2000) gives ice pellets (NA far above 66 + 0.66 PA), so supercooled rain
    may be met only in the top of the cold layer, never near the ground (the case of the calibration issue)."""
    nodes = ([1000, 825, 800, 785, 700, 600, 500, 450], [-5.0, -5.0, 1.0, 0.0, -8.0, -15.0, -23.0, -27.0])
    code, out = _ptype(nodes)
    assert code == 4
    assert not (out["large_drop"][P_HPA >= 900] == 2).any()



def _warm_surface(ts):
    return [1000, 900, 800, 700, 600, 500, 450], [ts, 0.0, -6.0, -12.0, -18.0, -24.0, -28.0]


@pytest.mark.parametrize(("where", "expected"), [("below", 1), ("between", 6), ("above", 2)])
def test_bourgouin_surface_warm_layer(where, expected):
    """Snow into a warm surface layer: PA < 5.6 J/kg snow, PA > 13.2 J/kg rain, rain and snow between
    (Bourgouin 2000)."""
    target = {"below": 0.7 * 5.6, "between": 0.5 * (5.6 + 13.2), "above": 1.3 * 13.2}[where]
    ts = _solve(lambda v: _reference_area(*_warm_surface(v), 1000, 900), target, 0.01, 20.0)
    code, out = _ptype(_warm_surface(ts))
    assert code == expected
    assert not (out["large_drop"] == 2).any()
    assert not out["warm_layer_aloft"].any()


def test_no_cloud_no_precipitation_and_unknown_without_humidity():
    """No cloud: type 'none'; humidity missing somewhere and no cloud found: 'unknown', never 'none'
    (project rule: unknown is never safe)."""
    pa, tk, tdk, z = _column(*_warm_nose(-3.0, 3.0), cloud=(0.0, 0.0), dry=15.0)
    assert int(diagnose_arrays(pa, tk, tdk, z)["precipitation_type"]) == 0
    tdk = tdk.copy()
    tdk[-3:] = np.nan
    out = diagnose_arrays(pa, tk, tdk, z)
    assert int(out["precipitation_type"]) == -1
    assert not out["valid"][-3:].any()


# ---------------------------------------------------------------- freezing levels, warm layers, drizzle


def test_every_freezing_level():
    """Every 0 degC crossing is found, with its direction (definition: the levels where T = 0 degC)."""
    nodes = ([1000, 950, 900, 850, 800, 700, 500, 450], [3.0, -2.0, -3.0, 2.0, -1.0, -10.0, -24.0, -28.0])
    pa, tk, tdk, z = _column(*nodes)
    out = diagnose_arrays(pa, tk, tdk, z)
    assert int(out["freezing_level_count"]) == 3
    prof = build_profile(pa / 100.0, tk - 273.15, dewpoint=tdk - 273.15, height=z)
    fl = layers.freezing_levels(prof)
    assert list(fl["direction"]) == ["cooling upward", "warming upward", "cooling upward"]
    assert_allclose(fl["height_ft"], fl["height_m"] / 0.3048)
    # Linear interpolation between levels: check the lowest crossing by hand.
    k = int(np.flatnonzero((tk[:-1] > 273.15) & (tk[1:] <= 273.15))[0])
    frac = (0.0 - (tk[k] - 273.15)) / (tk[k + 1] - tk[k])
    assert_allclose(fl["height_m"][0], z[k] + frac * (z[k + 1] - z[k]))
    assert_allclose(P_HPA[out["warm_layer_aloft"]], [850.0, 825.0])


def test_freezing_drizzle_case_of_cober_isaac_strapp_1996():
    """The documented case of drizzle grown by condensation and collision-coalescence below 0 degC (Cober, Isaac
    and Strapp 1996, J. Appl. Meteor. 35, 2250-2260, from the abstract): a stratiform deck about 1,100 m deep
    (base -7.5 degC, top -12 degC) with 21 droplets per cm3 and a droplet median volume diameter of 29 um. Our
    chain, given only that sounding and that droplet number, reads drizzle possible in the deck (its top is
    colder than the -10 degC of Huffman and Norman 1988, so not "likely") with the warm-rain process as the
    reason, and an MVD near the top within 20 % of the measured 29 um. With continental droplets (290 per cm3,
    Miles et al. 2000) the same deck grows no drizzle: many small drops do not coalesce (Rasmussen et al. 2002)."""
    nodes = ([1000, 850, 750, 600, 450], [-1.0, -7.5, -12.0, -20.0, -32.0])
    pa, tk, tdk, z = _column(*nodes, cloud=(850.0, 750.0))
    out = diagnose_arrays(pa, tk, tdk, z, airmass=21)
    deck = out["in_cloud"]
    assert 900.0 < np.ptp(z[deck]) < 1200.0
    assert (out["large_drop"][deck] == 1).all() and (out["large_drop_potential"][deck] == 1).all()
    assert (out["large_drop_reason"][deck] == 1).all()
    assert_allclose(np.nanmax(out["mvd"][deck]), 29.0, rtol=0.2)
    out = diagnose_arrays(pa, tk, tdk, z, airmass="continental")
    assert not out["large_drop"].any() and not out["large_drop_potential"].any()


def test_thin_supercooled_stratus_grows_no_drizzle():
    """A 400 m stratus topped at -5.5 degC with nothing above it (the case of the calibration issue), in
    continental air (290 droplets per cm3, Miles et al. 2000): its droplets stay well below the 14 um effective
    radius at which coalescence starts (Freud and Rosenfeld 2012), so neither freezing drizzle nor
    precipitation is diagnosed. (With 75 per cm3 of marine air the same deck comes within the uncertainty of
    that size and reads drizzle "possible".)"""
    nodes = ([1000, 950, 900, 800, 700, 600, 450], [-1.0, -3.2, -5.5, -9.0, -15.0, -22.0, -33.0])
    pa, tk, tdk, z = _column(*nodes, cloud=(950.0, 900.0), dry=8.0)
    out = diagnose_arrays(pa, tk, tdk, z, airmass="continental")
    deck = out["in_cloud"]
    assert deck.any() and np.ptp(z[deck]) < 500.0
    assert not out["large_drop"].any()
    assert int(out["precipitation_type"]) == 0
    marine = diagnose_arrays(pa, tk, tdk, z, airmass="marine")
    assert marine["large_drop_potential"].max() <= 1


def test_deep_warm_topped_marine_deck_drizzles_and_cold_topped_deck_snows():
    """A deep supercooled deck topped at -6 degC in clean marine air (75 droplets per cm3, Miles et al. 2000):
    with the adiabatic water its droplets reach the coalescence size (Freud and Rosenfeld 2012), with the
    sub-adiabatic estimate they do not, so freezing drizzle is possible, from the deck down through the
    sub-freezing air below it (Huffman and Norman 1988; Rauber et al. 2000). Topped at -16 degC instead, the
    deck makes ice and snows, and no drizzle is diagnosed."""
    nodes = ([1000, 900, 800, 700, 600, 500, 450], [-1.0, -2.5, -4.0, -6.0, -16.0, -24.0, -28.0])
    pa, tk, tdk, z = _column(*nodes, cloud=(950.0, 700.0))
    out = diagnose_arrays(pa, tk, tdk, z, airmass="marine")
    assert int(out["precipitation_type"]) == 8
    deck = out["in_cloud"]
    assert (out["large_drop"][P_HPA >= 700] == 1).all()
    assert (out["large_drop_potential"][deck] == 1).all() and (out["large_drop_reason"][deck] == 1).all()
    pa, tk, tdk, z = _column(*nodes, cloud=(950.0, 600.0))
    out = diagnose_arrays(pa, tk, tdk, z, airmass="marine")
    assert int(out["precipitation_type"]) == 1
    assert not out["large_drop"].any()


def test_dry_column_with_a_warm_nose_has_no_large_drops():
    """A warm nose aloft over cold air with no cloud above it: nothing falls, so nothing melts or refreezes
    (Bourgouin 2000 types precipitation that falls; without a source there is none) and no level reads
    supercooled rain or drizzle, while the warm layer aloft is still reported."""
    nodes = _warm_nose(-4.0, 3.0)
    pa, tk, tdk, z = _column(*nodes, cloud=(0.0, 0.0), dry=15.0)
    out = diagnose_arrays(pa, tk, tdk, z)
    assert int(out["precipitation_type"]) == 0
    assert not (out["large_drop"] > 0).any()
    assert out["warm_layer_aloft"].any()


def test_snow_sublimating_in_a_deep_dry_layer_never_reaches_the_warm_nose():
    """Snow from a cold-topped deck falls towards a warm nose over a cold surface layer. Through moist air it
    reaches the nose, melts and refreezes below (Bourgouin 2000: freezing rain or the mix; supercooled rain
    below the nose). Through 2-3 km of air 20 K drier than saturation it sublimates first (diffusional
    growth reversed, Rogers and Yau 1989 eq. 9.4, for a large aggregate of Locatelli and Hobbs 1974: about
    1.5-2 km of fall at 40 % RH over ice): nothing reaches the nose, so no precipitation type and no large drops
    (virga under a dry layer: common practice)."""
    nodes = _warm_nose(-4.0, 3.0)
    code, out = _ptype_with(nodes, cloud=(775.0, 450.0), dry=5.0)
    assert code in (3, 5)
    assert (out["large_drop"][P_HPA > 900] == 2).all() and (out["large_drop_reason"][P_HPA > 900] == 2).all()
    code, out = _ptype_with(nodes, cloud=(575.0, 450.0), dry=20.0)
    assert code == 0
    assert not out["large_drop"].any() and not out["large_drop_potential"].any()
    assert out["warm_layer_aloft"].any()


def _ptype_with(nodes, **kw):
    out = diagnose_arrays(*_column(*nodes, **kw))
    return int(out["precipitation_type"]), out


def test_snow_survival_distance_falls_with_dryness():
    """The sublimation distance of the representative snowflake shrinks as the air dries and is unbounded at
    ice saturation (diffusional growth, Rogers and Yau 1989 eq. 9.4: the rate is proportional to 1 - S_i)."""
    d = [precipitation.snow_survival_distance(263.15, 70000.0, rh) for rh in (100.0, 80.0, 60.0, 40.0)]
    assert d[0] == np.inf and d[1] > d[2] > d[3] > 500.0


def test_threshold_interpolation_equals_numpy_interp():
    """The column kernels' table interpolation (cloud.interp and the walked cloud.interp_from) equals
    numpy.interp exactly, at random heights in any order, at the nodes, beyond both ends and for NaN and inf."""
    xp = np.asarray(cloud.ZHANG_HEIGHTS_M, dtype=float)
    fp = np.asarray(cloud.ZHANG_MIN_RH, dtype=float)
    rng = np.random.default_rng(3)
    x = np.concatenate([rng.uniform(-1000.0, 15000.0, 2000), np.sort(rng.uniform(0.0, 14000.0, 500)), xp,
                        [np.nan, np.inf, -np.inf]])
    j = 0
    for v in x:
        walked, j = cloud.interp_from(v, xp, fp, j)
        ref = np.interp(v, xp, fp)
        assert walked == ref or (np.isnan(walked) and np.isnan(ref)), v
        one = cloud.interp(v, xp, fp)
        assert one == ref or (np.isnan(one) and np.isnan(ref)), v

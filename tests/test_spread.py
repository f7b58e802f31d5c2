"""How sure: the spread ensemble (icing.flight.spread) against the deterministic chain and published method."""

import json
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose, assert_array_equal

from icing.errors import ConfigError
from icing.flight.assess import assess_route
from icing.flight.route import Route
from icing.flight.sources import SoundingSource
from icing.flight.spread import (
    ASSUMPTIONS,
    DISTANCE_FLOOR_M,
    SPREAD_COLUMNS,
    draw_members,
    member_weights,
    resolve_ranges,
)
from icing.profile import build_profile

DEMO_MODEL = Path(__file__).parents[1] / "sample_soundings" / "model" / "demo_model.nc"
P = np.array([1000.0, 950.0, 900.0, 850.0, 800.0, 750.0, 700.0, 650.0, 600.0, 500.0, 400.0, 300.0])
ZERO = {a.name: 0 for a in ASSUMPTIONS}


def stratus(station, lat, lon, time, t_sfc=2.0, dd_cloud=0.2):
    """A moist layer 900-650 hPa, about -6 to -17 degC, dry above and below (constructed)."""
    t = t_sfc + np.array([0.0, -3.0, -8.0, -10.0, -12.0, -14.0, -16.0, -18.0, -21.0, -28.0, -38.0, -50.0])
    dd = np.array([8.0, 8.0, dd_cloud, dd_cloud, dd_cloud, dd_cloud, dd_cloud, dd_cloud, 15.0, 20.0, 20.0, 20.0])
    return build_profile(P, t, dewpoint=t - dd, station=station, latitude=lat, longitude=lon, elevation=0.0,
                         time=time)


def profiles(**kw):
    return [stratus("T1", 50.0, -20.0, "2026-01-15T00:00Z", **kw), stratus("T1", 50.0, -20.0, "2026-01-15T12:00Z",
                                                                           t_sfc=0.0, **kw),
            stratus("T2", 51.0, -17.0, "2026-01-15T00:00Z", **kw), stratus("T2", 51.0, -17.0, "2026-01-15T12:00Z",
                                                                           **kw)]


@pytest.fixture(scope="module")
def source():
    return SoundingSource(profiles())


def route(points, fl, dep="2026-01-15T04:00Z"):
    return Route.from_points([(f"W{i}", la, lo, fl) for i, (la, lo) in enumerate(points)], departure=dep)


# The second leg runs far from both stations: no data there (unknown, never safe).
ROUTE_PTS = [(50.0, -20.0), (51.0, -17.0), (50.5, -19.0), (58.0, 0.0), (59.0, 3.0)]


def shares_of(intensity):
    """The shares the deterministic answer implies: 1 where its word is at that level or worse (unknown ranks
    above severe in the segment table), else 0."""
    return {k: (intensity >= lvl).astype(float).to_numpy() for k, lvl in
            (("p_light", "light"), ("p_moderate", "moderate"), ("p_severe", "severe"))}


@pytest.mark.parametrize("fl", ["FL060", "FL080", "FL120"])
def test_zero_ranges_equal_the_deterministic_answer(source, fl):
    """Issue 18: with every range zero each member is the deterministic chain, so the shares are its words
    (0 or 1) and both accretion percentiles its accretion, exactly (NaN where no data)."""
    rt = route(ROUTE_PTS, fl)
    det = assess_route(rt, source, "turboprop")
    ens = assess_route(rt, source, "turboprop", spread=ZERO, members=7, seed=3)
    seg = ens.segments
    assert list(seg.columns[-len(SPREAD_COLUMNS):]) == SPREAD_COLUMNS
    for k, v in shares_of(det.segments["intensity"]).items():
        assert_array_equal(seg[k].to_numpy(), v, err_msg=k)
    assert_array_equal(seg["accretion_p10_mm"].to_numpy(), det.segments["accretion_mm"].to_numpy())
    assert_array_equal(seg["accretion_p90_mm"].to_numpy(), det.segments["accretion_mm"].to_numpy())
    # the deterministic columns are untouched by the ensemble
    assert det.segments.equals(seg.drop(columns=SPREAD_COLUMNS))
    assert set(seg["spread_driver"]) <= {"none", "unknown"}
    assert ens.summary["spread"]["members"] == 7 and ens.summary["spread"]["seed"] == 3


def test_missing_data_is_never_safe(source):
    """A segment without data counts as reaching every intensity in every member (p_* = 1) and its accretion
    range is unknown; the route totals are unknown too."""
    ens = assess_route(route(ROUTE_PTS, "FL080"), source, "turboprop", spread=True, members=10)
    seg = ens.segments
    miss = seg["data"] == "missing"
    assert miss.any()
    assert (seg.loc[miss, ["p_light", "p_moderate", "p_severe"]] == 1.0).all().all()
    assert seg.loc[miss, ["accretion_p10_mm", "accretion_p90_mm"]].isna().all().all()
    assert (seg.loc[miss, "spread_driver"] == "unknown").all()
    s = ens.summary["spread"]
    assert s["p_severe"] == 1.0 and np.isnan(s["accretion_p90_mm"]) and s["members_with_unknown"] == 10
    d = json.loads(ens.to_json())  # RFC 8259: unknown is null, never NaN
    assert d["segments"][int(np.flatnonzero(miss)[0])]["accretion_p10_mm"] is None
    assert d["summary"]["spread"]["accretion_p90_mm"] is None


def test_shares_and_percentiles_are_ordered(source):
    """p_light >= p_moderate >= p_severe, all in 0-1; p10 <= deterministic range <= p90 where known."""
    ens = assess_route(route(ROUTE_PTS[:3], "FL080"), source, "turboprop", spread=True)
    seg = ens.segments
    assert ((seg["p_light"] >= seg["p_moderate"]) & (seg["p_moderate"] >= seg["p_severe"])).all()
    assert seg[["p_light", "p_moderate", "p_severe"]].apply(lambda c: c.between(0, 1)).all().all()
    assert (seg["accretion_p10_mm"] <= seg["accretion_p90_mm"]).all()
    assert set(seg["spread_driver"]) <= {a.name for a in ASSUMPTIONS} | {"none"}


def test_same_seed_same_answer_and_seed_matters(source):
    """The ensemble is seeded: the same seed gives the same table, another seed other draws."""
    rt = route(ROUTE_PTS[:3], "FL080")
    a = assess_route(rt, source, spread=True, members=12, seed=5).segments
    b = assess_route(rt, source, spread=True, members=12, seed=5).segments
    assert a.equals(b)
    d0, d1 = draw_members(12, 5), draw_members(12, 6)
    assert not np.array_equal(d0["lwc_factor"], d1["lwc_factor"])


def near_threshold(station, lat, lon, time):
    """A layer 850-700 hPa near -3 to -7 degC whose RH over water is about 88 %, so that its RH over ice
    (about 91-94 %) sits at the Zhang et al. (2010) thresholds near 1.5-3 km (min about 90, max about 93):
    a layer the published thresholds barely call cloud or not. Dewpoints from MetPy (reference library)."""
    from metpy.calc import dewpoint_from_relative_humidity
    from metpy.units import units

    t = np.array([4.0, 1.0, -1.0, -3.0, -5.0, -7.0, -9.0, -12.0, -15.0, -22.0, -32.0, -45.0])
    rh = np.array([60.0, 60.0, 70.0, 88.0, 88.0, 88.0, 70.0, 50.0, 40.0, 30.0, 30.0, 30.0])
    td = dewpoint_from_relative_humidity(t * units.degC, rh * units.percent).m_as("degC")
    return build_profile(P, t, dewpoint=td, station=station, latitude=lat, longitude=lon, elevation=0.0,
                         time=time)


def test_wetter_cloud_threshold_raises_the_shares():
    """Zhang et al. (2010): a moist layer is cloud when its RH reaches the min threshold and its largest RH
    exceeds the max threshold at its base; lowering the thresholds (a wetter reading) turns a near-threshold
    layer into supercooled cloud, so the shares and accretion rise (never fall) as the shift goes down."""
    src = SoundingSource([near_threshold("N1", 50.0, -20.0, "2026-01-15T00:00Z"),
                          near_threshold("N2", 51.0, -17.0, "2026-01-15T00:00Z")])
    rt = route([(50.0, -20.0), (51.0, -17.0)], "FL080", dep="2026-01-15T01:00Z")
    out = []
    for shift in (-4.0, -2.0, 0.0, 2.0, 4.0):
        seg = assess_route(rt, src, spread={**ZERO, "rh_threshold_shift": (shift, shift)}, members=3).segments
        out.append((seg["p_light"].iloc[0], seg["accretion_p90_mm"].iloc[0]))
    p = np.array(out)
    assert np.all(np.diff(p[:, 0]) <= 0) and np.all(np.diff(p[:, 1]) <= 1e-12)
    assert p[0, 1] > p[-1, 1] and p[0, 0] > p[-1, 0]  # the range matters for this layer


def test_more_droplets_smaller_drops_less_ice(source):
    """More droplets for the same LWC: a smaller MVD (LWC = pi/6 rho_w N D^3), a smaller collision efficiency
    (Langmuir and Blodgett 1946: it grows with the inertia parameter K ~ d^2) and so less accretion."""
    rt = route(ROUTE_PTS[:2], "FL080")
    acc = [assess_route(rt, source, spread={**ZERO, "droplet_number_factor": (f, f)}, members=2)
           .segments["accretion_p90_mm"].iloc[0] for f in (0.5, 1.0, 2.0)]
    assert acc[0] > acc[1] > acc[2] > 0


def test_lwc_factor_is_held_to_the_adiabatic_value():
    """The adiabatic LWC is an upper bound (moist-adiabatic theory): a huge multiplier on the sub-adiabatic
    profile gives exactly the chain's answer with constant factors of 1 (the adiabatic LWC), not more."""
    rt = route(ROUTE_PTS[:2], "FL080")
    big = assess_route(rt, profiles(), spread={**ZERO, "lwc_factor": (100.0, 100.0)}, members=2).segments
    adiabatic = assess_route(rt, profiles(), stratiform_factor=1.0, convective_factor=1.0).segments
    det = assess_route(rt, profiles()).segments
    assert_allclose(big["accretion_p10_mm"].to_numpy(), adiabatic["accretion_mm"].to_numpy(), rtol=1e-9)
    assert (adiabatic["accretion_mm"] > det["accretion_mm"]).all()


def test_latin_hypercube_uses_every_stratum_once():
    """McKay, Beckman and Conover (1979): each of the M equal-probability strata of every range holds exactly
    one draw; log-uniform factors are strata of the logarithm."""
    m = 30
    d = draw_members(m, seed=11)
    rng = resolve_ranges()
    for a in ASSUMPTIONS:
        lo, hi = rng[a.name]
        x = d[a.name]
        u = (np.log(x / lo) / np.log(hi / lo)) if a.distribution == "log-uniform" else (x - lo) / (hi - lo)
        assert_array_equal(np.sort(np.floor(u * m)), np.arange(m), err_msg=a.name)
    z = draw_members(5, 0, ZERO)
    for a in ASSUMPTIONS:
        assert_array_equal(z[a.name], np.full(5, a.default))


def test_member_weights_inverse_distance_power():
    """Shepard (1968): weights proportional to distance^-p; the source's own power is 2 with distances floored at
    10 km (README), so a member's power p re-weights to max(d, 10 km)^-p, computed here by hand."""
    src = SoundingSource([stratus("A", 50.0, -20.0, "2026-01-15T00:00Z"),
                          stratus("B", 50.0, -18.0, "2026-01-15T00:00Z"),
                          stratus("C", 51.0, -19.0, "2026-01-15T00:00Z")])
    lat, lon = np.array([50.0, 50.4, 50.02]), np.array([-19.0, -19.5, -20.0])
    w, dist = src.weights(lat, lon, np.full(3, np.datetime64("2026-01-15T02:00", "s").astype(np.int64), float))
    assert member_weights(w, dist, np.arange(3)) is w
    for p in (1.0, 2.0, 3.0):
        want = np.maximum(dist, 1.0e4) ** -p
        want /= want.sum(axis=1, keepdims=True)
        assert_allclose(member_weights(w, dist, np.arange(3), distance_power=p + 1e-15), want, rtol=1e-9)
    assert DISTANCE_FLOOR_M == 1.0e4


def test_member_weights_nearest_time():
    """time_nearest 1 gives a station's whole weight to the report nearer in time; 0.5 halves the way from the
    linear weights (3 h after 00Z between 00Z and 12Z reports: linear 0.75/0.25, by hand)."""
    src = SoundingSource([stratus("A", 50.0, -20.0, "2026-01-15T00:00Z"),
                          stratus("A", 50.0, -20.0, "2026-01-15T12:00Z")])
    t = np.array([np.datetime64("2026-01-15T03:00", "s").astype(np.int64)], float)
    w, dist = src.weights(np.array([50.0]), np.array([-20.0]), t)
    assert_allclose(w, [[0.75, 0.25]])
    sites = np.array([0, 0])
    assert_allclose(member_weights(w, dist, sites, time_nearest=1.0), [[1.0, 0.0]])
    assert_allclose(member_weights(w, dist, sites, time_nearest=0.5), [[0.875, 0.125]])


def test_bad_spread_options_are_refused(source):
    rt = route(ROUTE_PTS[:2], "FL080")
    with pytest.raises(ConfigError, match="members"):
        assess_route(rt, source, spread=True, members=0)
    with pytest.raises(ConfigError, match="seed"):
        assess_route(rt, source, spread=True, seed=-1)
    with pytest.raises(ConfigError, match="unknown spread assumption"):
        assess_route(rt, source, spread={"rh_shift": (0, 1)})
    with pytest.raises(ConfigError, match="factor"):
        resolve_ranges({"lwc_factor": (0.0, 2.0)})


def test_without_spread_nothing_changes(source):
    """spread=False (the default) adds no column and no summary key."""
    res = assess_route(route(ROUTE_PTS[:2], "FL080"), source)
    assert not set(SPREAD_COLUMNS) & set(res.segments.columns) and "spread" not in res.summary


def test_summary_lists_the_ranges_and_caution(source):
    s = assess_route(route(ROUTE_PTS[:3], "FL080"), source, spread=True, members=8).summary["spread"]
    assert set(s["assumptions"]) == {a.name for a in ASSUMPTIONS}
    assert all(v["source"] for v in s["assumptions"].values())
    assert "ADVISORY ONLY" in s["caution"]
    assert 0.0 <= s["p_severe"] <= s["p_moderate"] <= s["p_light"] <= 1.0
    assert s["accretion_p10_mm"] <= s["accretion_p50_mm"] <= s["accretion_p90_mm"]


# --- reports --------------------------------------------------------------------------------------------------

def figure_texts(fig):
    return [t.get_text() for t in fig.findobj(lambda a: hasattr(a, "get_text"))]


def test_text_table_shows_the_spread_and_is_unchanged_without(source):
    """Project rule (unknown never safe; the caution on every output): the terminal table gains the share at
    moderate or worse and the accretion range only with the spread columns."""
    from icing.report.text import segment_table

    rt = route(ROUTE_PTS, "FL080")
    plain = segment_table(assess_route(rt, source))
    text = segment_table(assess_route(rt, source, spread=True, members=6))
    assert "mod+ %" not in plain and "How sure" not in plain
    assert "mod+ %" in text and "mm 10-90" in text and "How sure: 6 members" in text
    assert text.count("ADVISORY ONLY") == 2
    assert "UNKNOWN (a member has a segment without data)" in text  # the missing leg makes the total unknown


def test_html_report_has_the_fourth_figure(source, tmp_path):
    from icing.report.html import write_html

    rt = route(ROUTE_PTS, "FL080")
    with_spread = write_html(assess_route(rt, source, spread=True, members=6), tmp_path / "a", soundings=False)
    without = write_html(assess_route(rt, source), tmp_path / "b", soundings=False)
    assert "how_sure.png" in {p.name for p in with_spread}
    assert "how_sure.png" not in {p.name for p in without}
    page = (tmp_path / "a" / "report.html").read_text(encoding="utf-8")
    assert "How sure" in page and "moderate+ share" in page and "ADVISORY ONLY" in page


def test_spread_figure_marks_missing_and_carries_the_caution(source):
    from icing.report.spread_figure import spread_figure

    fig = spread_figure(assess_route(route(ROUTE_PTS, "FL080"), source, spread=True, members=6))
    texts = figure_texts(fig)
    assert any("ADVISORY ONLY" in t for t in texts)
    assert sum("no data:\nunknown" in t for t in texts) == 2  # both panels of the segment without data
    with pytest.raises(Exception, match="spread=True"):
        spread_figure(assess_route(route(ROUTE_PTS[:2], "FL080"), source))


def test_result_repr_says_how_sure(source):
    """The Assessment's short view names the spread when there is one (and unknown stays unknown)."""
    res = assess_route(route(ROUTE_PTS, "FL080"), source, spread=True, members=6)
    text = repr(res)
    assert "how sure:" in text and "100% of 6 members moderate or worse" in text and "accretion range unknown" in text
    assert "how sure" not in repr(assess_route(route(ROUTE_PTS[:2], "FL080"), source))


# --- a model ensemble -------------------------------------------------------------------------------------------

@pytest.fixture(scope="module")
def ensemble_file(tmp_path_factory):
    """Three members along a CF ``realization`` dimension built from the demo model grid (our own scenario):
    the run itself, a drier copy (relative humidity halved: no cloud) and the run again."""
    import xarray as xr

    ds = xr.open_dataset(DEMO_MODEL).load()
    dry = ds.copy()
    dry["hur"] = ds["hur"] * 0.5
    ens = xr.concat([ds, dry, ds], dim="realization").assign_coords(realization=[0, 1, 2])
    path = tmp_path_factory.mktemp("ens") / "ensemble.nc"
    ens.to_netcdf(path)
    return path


def demo_route():
    return Route.from_points([("ALDRN", 52.05, -34.10, "FL080"), ("BRNCK", 53.00, -31.00, "FL080"),
                              ("CULLN", 54.00, -28.00, "FL080")], departure="2026-01-15T05:00Z")


def test_model_ensemble_members_are_the_ensemble(ensemble_file):
    """A model file with a member dimension is an ensemble as it stands (issue 18): each member screened alone
    (a GridSource of that member) gives the intensity and accretion the ensemble's shares and percentiles are
    made of; without spread the ensemble screens as its first member."""
    import xarray as xr

    from icing.flight.gridsource import GridSource
    from icing.flight.spread import ModelEnsemble
    from icing.io.model import normalise_model

    ens_src = ModelEnsemble(ensemble_file)
    assert len(ens_src.members) == 3 and ens_src.member_dim == "realization"
    rt = demo_route()
    raw = xr.open_dataset(ensemble_file).load()
    singles = [assess_route(rt, GridSource(normalise_model(raw.isel(realization=i)))) for i in range(3)]
    ens = assess_route(rt, ens_src, spread=True)
    plain = assess_route(rt, ens_src)
    assert plain.segments.equals(singles[0].segments)
    for k, lvl in (("p_light", "light"), ("p_moderate", "moderate"), ("p_severe", "severe")):
        want = np.mean([(s.segments["intensity"] >= lvl).to_numpy() for s in singles], axis=0)
        assert_allclose(ens.segments[k].to_numpy(), want, rtol=1e-12, err_msg=k)
    acc = np.array([s.segments["accretion_mm"].to_numpy() for s in singles])
    assert_allclose(ens.segments["accretion_p10_mm"].to_numpy(), np.percentile(acc, 10, axis=0), rtol=1e-12)
    assert_allclose(ens.segments["accretion_p90_mm"].to_numpy(), np.percentile(acc, 90, axis=0), rtol=1e-12)
    assert (acc[1] == 0).all() and (acc[0] > 0).any()  # the dry member has no ice, the run has some
    assert set(ens.segments["spread_driver"]) <= {"model_member", "none"}
    s = ens.summary["spread"]
    assert s["members"] == 3 and s["model_members"] == ["0", "1", "2"] and s["assumptions"] == {}


def test_model_without_members_is_refused(tmp_path):
    from icing.flight.spread import ModelEnsemble

    with pytest.raises(ConfigError, match="ensemble-member dimension"):
        ModelEnsemble(DEMO_MODEL)
    from icing.flight.gridsource import GridSource

    with pytest.raises(ConfigError, match="not spread yet"):
        assess_route(demo_route(), GridSource(DEMO_MODEL), spread=True)

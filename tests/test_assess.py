"""Route assessment: segment table contract, unknown data, hand-checked accretion, invariances."""

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

import icing
from icing.flight.aircraft import get_aircraft
from icing.flight.assess import SEGMENT_COLUMNS, assess_route, assess_routes
from icing.flight.route import Route
from icing.flight.sources import SoundingSource
from icing.profile import build_profile

SAMPLES = Path(__file__).parents[1] / "sample_soundings"
P = np.array([1000.0, 950.0, 900.0, 850.0, 800.0, 750.0, 700.0, 650.0, 600.0, 500.0, 400.0, 300.0])


def stratus(station, lat, lon, time, t_sfc=2.0):
    """A saturated layer 900-650 hPa, cold (about -6 to -17 degC), dry above and below (constructed)."""
    t = t_sfc + np.array([0.0, -3.0, -8.0, -10.0, -12.0, -14.0, -16.0, -18.0, -21.0, -28.0, -38.0, -50.0])
    dd = np.array([8.0, 8.0, 0.2, 0.2, 0.2, 0.2, 0.2, 0.2, 15.0, 20.0, 20.0, 20.0])
    return build_profile(P, t, dewpoint=t - dd, station=station, latitude=lat, longitude=lon, elevation=0.0,
                         time=time)


@pytest.fixture(scope="module")
def source():
    return SoundingSource([stratus("T1", 50.0, -20.0, "2026-01-15T00:00Z"),
                           stratus("T1", 50.0, -20.0, "2026-01-15T12:00Z"),
                           stratus("T2", 51.0, -17.0, "2026-01-15T00:00Z"),
                           stratus("T2", 51.0, -17.0, "2026-01-15T12:00Z")])


def level(points, fl, dep="2026-01-15T06:00Z"):
    return Route.from_points([(f"W{i}", la, lo, fl) for i, (la, lo) in enumerate(points)], departure=dep)


def test_segment_columns_and_json_keys(source):
    """The segment table has the contract's columns in order; JSON has segments, summary, caution."""
    res = assess_route(level([(50.0, -20.0), (51.0, -17.0)], "FL080"), source, "turboprop")
    assert list(res.segments.columns[: len(SEGMENT_COLUMNS)]) == SEGMENT_COLUMNS
    d = json.loads(res.to_json())
    assert set(d) == {"segments", "summary", "caution"}
    assert "ADVISORY ONLY" in d["caution"] and d["summary"]["caution"] == d["caution"]
    assert d["segments"][0]["segment"] == 1


def test_in_cloud_segment_ices_and_above_cloud_does_not(source):
    """FL080 (about 750 hPa) is inside the saturated layer: ice; FL200 (about 466 hPa) is dry: none."""
    inside = assess_route(level([(50.0, -20.0), (51.0, -17.0)], "FL080"), source, "turboprop")
    above = assess_route(level([(50.0, -20.0), (51.0, -17.0)], "FL200"), source, "turboprop")
    s_in, s_up = inside.segments.iloc[0], above.segments.iloc[0]
    assert s_in["icing_minutes"] > 0 and s_in["accretion_mm"] > 0 and s_in["intensity"] != "none"
    assert s_in["data"] == "ok"
    assert s_up["icing_minutes"] == 0 and s_up["intensity"] == "none" and s_up["data"] == "ok"


def test_no_data_is_never_none(source):
    """A segment far from every sounding has data 'missing' and intensity 'unknown' (never 'none')."""
    res = assess_route(level([(50.0, -20.0), (51.0, -17.0), (58.0, 0.0)], "FL200"), source, "turboprop")
    far = res.segments.iloc[1]
    assert far["data"] in ("missing", "partial")
    assert far["intensity"] == "unknown"
    assert res.summary["data_complete"] is False


def test_hand_check_rime_segment(source):
    """One sample's growth recomputed by hand from the published formulas.

    Makkonen (2000): dM/dt = E n w v D; in dry growth (rime) n = 1, and the leading-edge thickness rate is
    E w v / rho. E from the Finstad, Lozowski and Gates (1988) fit with K = rho_w d^2 v / (9 mu D),
    phi = Re^2 / K, Re = rho_a v d / mu, written out here; mu from Sutherland's law as in the US Standard
    Atmosphere 1976 (beta 1.458e-6, S 110.4 K).
    """
    ac = get_aircraft("light-piston")
    res = assess_route(level([(50.0, -20.0), (51.0, -17.0)], "FL060"), source, ac)
    rime = res.samples[res.samples["ice_type"] == "rime"]
    assert len(rime) > 0, "at about -10 degC near the layer base the growth is dry (rime)"
    smp = rime.iloc[len(rime) // 2]
    t = smp["temperature_c"] + 273.15
    p = smp["pressure_hpa"] * 100.0
    d, v, dd, w = smp["mvd_um"] * 1e-6, smp["tas_ms"], ac.body_diameter_m, smp["lwc_g_m3"] / 1000.0
    mu = 1.458e-6 * t**1.5 / (t + 110.4)
    rho_a = p / (287.05 * t)
    k = 1000.0 * d**2 * v / (9 * mu * dd)
    re = rho_a * v * d / mu
    phi = re**2 / k
    a = 1.066 * k**-0.00616 * np.exp(-1.103 * k**-0.688)
    b = 3.641 * k**-0.498 * np.exp(-1.497 * k**-0.694)
    c = 0.00637 * (phi - 100.0) ** 0.381
    e = a - 0.028 - c * (b - 0.0454)
    core = icing.physics.accretion.accretion_core(w, d, v, t, p, dd)
    rho = core["ice_density"]
    assert_allclose(smp["rate_mm_per_h"], e * w * v / rho * 1000.0 * 3600.0, rtol=0.02)
    assert_allclose(smp["accretion_mm"], smp["rate_mm_per_h"] * smp["duration_s"] / 3600.0, rtol=1e-12)


def test_segment_totals_are_sample_sums(source):
    """Segment totals are the sums of their samples (internal consistency of the aggregation)."""
    res = assess_route(level([(50.0, -20.0), (50.6, -18.5), (51.0, -17.0)], "FL080"), source, "turboprop")
    for k, row in res.segments.iterrows():
        leg = res.samples[res.samples["leg"] == k]
        assert_allclose(row["accretion_mm"], np.nansum(leg["accretion_mm"]), rtol=1e-9)
        assert_allclose(row["icing_minutes"], leg["duration_s"][leg["in_icing"]].sum() / 60.0, rtol=1e-9)
    assert_allclose(res.summary["total_accretion_mm"], res.segments["accretion_mm"].sum())


def test_waypoint_on_the_great_circle_leaves_totals(source):
    """Inserting a waypoint on the geodesic of a level segment leaves the totals unchanged (within the
    one-minute sampling)."""
    from pyproj import Geod

    g = Geod(ellps="WGS84")
    lon_m, lat_m = g.npts(-20.0, 50.0, -17.0, 51.0, 1)[0]
    a = assess_route(level([(50.0, -20.0), (51.0, -17.0)], "FL080"), source, "turboprop")
    b = assess_route(level([(50.0, -20.0), (lat_m, lon_m), (51.0, -17.0)], "FL080"), source, "turboprop")
    assert_allclose(b.summary["total_accretion_mm"], a.summary["total_accretion_mm"], rtol=0.03)
    assert_allclose(b.summary["total_icing_minutes"], a.summary["total_icing_minutes"], rtol=0.03)


def test_alternatives_offer_a_better_altitude(source):
    """Inside the layer, some offered altitude gives less ice than the plan (it exits the layer)."""
    res = assess_route(level([(50.0, -20.0), (51.0, -17.0)], "FL080"), source, "turboprop")
    seg = res.segments.iloc[0]
    assert seg["best_accretion_mm"] < seg["accretion_mm"]
    assert seg["best_altitude_ft"] != seg["altitude_ft_max"]


def test_demo_scenario():
    """The demo: ice where the scenario puts supercooled cloud (climb out of Aldren Point through the deep deck),
    freezing rain possible near Brannock, the dry Dunmarrow leg cleaner, data gaps flagged."""
    res = assess_route(SAMPLES / "demo_route.csv", sorted(SAMPLES.glob("S?_*.csv")), "turboprop")
    seg = res.segments
    assert seg.loc[0, "icing_minutes"] > 5 and seg.loc[0, "intensity"] not in ("none", "unknown")
    assert (seg["large_drops"] == "rain").any()
    assert res.summary["total_accretion_mm"] > 0
    assert set(seg["data"]) <= {"ok", "partial", "missing"}


# ------------------------------------------------------------------------------- unknown is unknown in every column
def test_no_valid_sounding_leaves_every_column_unknown(source):
    """Departing two days after the last report (beyond max_age_hours): every segment is missing and says so in
    every column, and the totals and worst segment are unknown, never 0 mm or 'none' (project rule)."""
    res = assess_route(level([(50.0, -20.0), (50.6, -18.5), (51.0, -17.0)], "FL080", dep="2026-01-17T12:00Z"),
                       source, "turboprop")
    seg = res.segments
    assert (seg["data"] == "missing").all() and (seg["intensity"] == "unknown").all()
    for col in ("icing_minutes", "max_rate_mm_per_h", "accretion_mm", "warm_surface_minutes", "max_lwc_g_m3",
                "mvd_um"):
        assert seg[col].isna().all(), col
    assert seg["ice_type"].isna().all() and seg["large_drops"].isna().all()
    assert (seg["appendix_c"] == "unknown").all() and (seg["appendix_o"] == "unknown").all()
    s = res.summary
    assert np.isnan(s["total_icing_minutes"]) and np.isnan(s["total_accretion_mm"])
    assert s["worst_segment"] is None and s["worst_intensity"] == "unknown" and s["data_complete"] is False
    d = json.loads(res.to_json())
    assert d["summary"]["total_accretion_mm"] is None and d["segments"][0]["accretion_mm"] is None
    assert d["segments"][0]["ice_type"] is None and d["segments"][0]["intensity"] == "unknown"
    assert "unknown" in repr(res)


def test_partial_segment_is_a_lower_bound(source):
    """A segment leaving the stations' reach has partial data: its values are lower bounds (lower_bound True)
    and the totals say so; with a missing segment as well the totals become unknown."""
    res = assess_route(level([(50.0, -20.0), (51.0, -17.0), (55.0, -10.0)], "FL080"), source, "turboprop")
    seg = res.segments
    assert (seg["lower_bound"] == (seg["data"] == "partial")).all()
    assert seg["lower_bound"].any()
    if (seg["data"] == "missing").any():
        assert np.isnan(res.summary["total_accretion_mm"])
        assert res.summary["worst_intensity"] == "unknown" and res.summary["worst_segment"] is None
        assert res.summary["worst_known_segment"] == 1  # the in-cloud first segment, known to ice
    else:
        assert res.summary["totals_lower_bound"] is True


# ------------------------------------------------------------------------------------- a library like its neighbours
GOLDEN_DTYPES = {
    "segment": "int64", "start": "text", "end": "text", "start_time": "datetime64[ns, UTC]",
    "end_time": "datetime64[ns, UTC]", "distance_nm": "float64", "altitude_ft_min": "float64",
    "altitude_ft_max": "float64", "icing_minutes": "float64", "max_rate_mm_per_h": "float64",
    "accretion_mm": "float64", "intensity": "category", "ice_type": "category", "large_drops": "category",
    "data": "category", "sources": "text", "warm_surface_minutes": "float64", "max_lwc_g_m3": "float64",
    "mvd_um": "float64", "min_temperature_c": "float64", "freezing_level_ft": "float64",
    "supercooled_top_ft": "float64", "appendix_c": "text", "appendix_o": "text", "data_distance_km": "float64",
    "data_age_h": "float64", "best_altitude_ft": "float64", "best_accretion_mm": "float64", "lower_bound": "bool",
}


def test_segment_dtypes_golden(source):
    """The segment table's dtypes (the documented contract of assess_route): times tz-aware UTC, words as
    ordered categoricals, numbers float64, lower_bound bool."""
    from icing.flight.assess import EXTRA_COLUMNS

    for dep in ("2026-01-15T06:00Z", "2026-01-17T12:00Z"):  # with data and without: the same dtypes
        seg = assess_route(level([(50.0, -20.0), (51.0, -17.0)], "FL080", dep=dep), source, "turboprop").segments
        assert list(seg.columns) == SEGMENT_COLUMNS + EXTRA_COLUMNS
        for col, want in GOLDEN_DTYPES.items():
            got = seg[col].dtype
            if want == "text":
                assert pd.api.types.is_string_dtype(got), (col, got)
                assert all(isinstance(v, str) for v in seg[col]), col
            else:
                assert str(got) == want, (col, got)
    cats = {"intensity": ["none", "trace", "light", "moderate", "severe", "unknown"],
            "ice_type": ["none", "rime", "mixed", "glaze"], "large_drops": ["none", "drizzle", "rain"],
            "data": ["ok", "partial", "missing"]}
    for col, want in cats.items():
        assert seg[col].cat.ordered and list(seg[col].cat.categories) == want, col


def test_intensity_orders_and_compares():
    """Intensity words sort in the trade's order (trace < light < moderate < severe: US Aeronautical Information
    Manual, chapter 7, from memory), with unknown above severe so that a filter for the worst never drops a
    segment without data."""
    from icing.flight.assess import INTENSITY_DTYPE

    s = pd.Series(["severe", "unknown", "none", "light", "trace", "moderate"], dtype=INTENSITY_DTYPE)
    assert s.sort_values().tolist() == ["none", "trace", "light", "moderate", "severe", "unknown"]
    assert (s >= "moderate").tolist() == [True, True, False, False, False, True]
    assert s.max() == "unknown"


def test_times_are_utc_and_json_iso(source):
    """start_time/end_time are tz-aware UTC; JSON gives ISO 8601 text with Z (RFC 3339 profile)."""
    res = assess_route(level([(50.0, -20.0), (51.0, -17.0)], "FL080"), source, "turboprop")
    seg = res.segments
    assert seg["start_time"].iloc[0] == pd.Timestamp("2026-01-15T06:00Z")
    assert (seg["end_time"] > seg["start_time"]).all()
    rec = json.loads(res.to_json())["segments"][0]
    assert rec["start_time"] == "2026-01-15T06:00:00Z"
    assert pd.Timestamp(rec["end_time"]) == seg["end_time"].iloc[0]


def test_unknown_keyword_is_a_type_error(source):
    """As for any Python function, an unknown keyword raises TypeError (it was silently ignored); so do source
    options given with a source already built, which would have no effect."""
    route = level([(50.0, -20.0), (51.0, -17.0)], "FL080")
    with pytest.raises(TypeError, match="sprd"):
        assess_route(route, source, "turboprop", sprd=True)
    with pytest.raises(TypeError, match="sprd"):
        assess_routes([route], source, "turboprop", sprd=True)
    with pytest.raises(TypeError, match="max_distance_km"):
        assess_route(route, source, "turboprop", max_distance_km=100.0)


def test_repr_is_short_and_html_has_the_caution(source):
    """repr names route, aircraft, totals, worst segment and data status in a few lines, never the samples."""
    res = assess_route(level([(50.0, -20.0), (51.0, -17.0)], "FL080"), source, "turboprop")
    text = repr(res)
    assert len(text.splitlines()) <= 12 and "turboprop" in text and "worst" in text and "ADVISORY" in text
    assert str(res.samples["latitude"].iloc[3]) not in text
    page = res._repr_html_()
    assert "ADVISORY ONLY" in page and "<table" in page


def test_route_notes_reach_the_summary(tmp_path, source):
    """What the route reader ignored (an unknown column) is carried into the result's summary."""
    p = tmp_path / "r.csv"
    p.write_text("name,latitude,longitude,altitude,remark\nA,50,-20,FL080,x\nB,51,-17,FL080,y\n")
    res = assess_route(p, source, "turboprop", departure="2026-01-15T06:00Z")
    assert any("remark" in n for n in res.summary["notes"])
    assert "remark" in repr(res)


def test_departure_overrides_a_route_object(source):
    """departure= applies to a Route object as to a file (it was ignored for Route objects)."""
    route = level([(50.0, -20.0), (51.0, -17.0)], "FL080")
    res = assess_route(route, source, "turboprop", departure="2026-01-15T09:00Z")
    assert res.summary["departure"] == "2026-01-15T09:00:00Z"
    assert res.segments["start_time"].iloc[0] == pd.Timestamp("2026-01-15T09:00Z")


def test_alternatives_respect_the_minimum_altitude(source):
    """An alternative is never offered below the minimum altitude the user gives (this tool knows neither
    terrain nor airspace: common practice of route planning, no published source): at FL080 in the deck with
    the minimum at 12,000 ft only the climbs remain, and with it above every offset only the plan itself."""
    route = level([(50.0, -20.0), (51.0, -17.0)], "FL080")
    res = assess_route(route, source, "turboprop", min_altitude_ft=12000.0)
    best = res.segments["best_altitude_ft"].dropna()
    assert (best >= 12000.0).all()
    none = assess_route(route, source, "turboprop", min_altitude_ft=40000.0)
    assert (none.segments["best_altitude_ft"] == 8000.0).all()
    assert none.alternatives.loc[none.alternatives["offset_ft"] != 0, "accretion_mm"].isna().all()


def test_jet_descending_through_a_deck_below_10000_ft_collects_ice(source):
    """A jet descending from FL200 through the supercooled deck (about 3,000-11,000 ft here) flies at most
    250 kt indicated below 10,000 ft (14 CFR 91.117(a)), about 260-290 kt true: slow enough that kinetic
    heating (V^2 / 2 c_p, about 10 K at 145 m/s: the energy equation, DESIGN.md) leaves the leading edge below
    0 degC in -8 to -17 degC air, so it collects ice there."""
    route = Route.from_points([("TOP", 50.0, -20.0, "FL200"), ("LOW", 51.0, -17.0, 3000.0)],
                              departure="2026-01-15T06:00Z")
    res = assess_route(route, source, "regional-jet")
    smp = res.samples
    low = smp["altitude_ft"] < 10000
    assert (smp.loc[low, "tas_ms"] < 152.0).all()  # below 10,000 ft: at most ~295 kt true
    assert res.segments.loc[0, "icing_minutes"] > 0 and res.segments.loc[0, "accretion_mm"] > 0

"""Route assessment: segment table contract, unknown data, hand-checked accretion, invariances."""

import json
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose

import icing
from icing.flight.aircraft import get_aircraft
from icing.flight.assess import SEGMENT_COLUMNS, assess_route
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

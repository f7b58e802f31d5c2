"""GeoJSON of the segments against the rules of RFC 7946 (The GeoJSON Format, IETF 2016)."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from test_report_plots import synthetic_assessment

from icing import CAUTION
from icing.report.files import segments_geojson

# A route across the antimeridian (RFC 7946 section 3.1.9) and one at ordinary longitudes.
PACIFIC = [("WWWWW", 52.0, 176.0), ("XXXXX", 53.0, 179.5), ("YYYYY", 53.5, -177.0), ("ZZZZZ", 54.0, -174.0)]


def check_position(pos):
    """RFC 7946 section 3.1.1: two or three numbers, longitude first, in WGS84 degrees."""
    assert isinstance(pos, list) and len(pos) in (2, 3)
    assert all(isinstance(v, int | float) and not isinstance(v, bool) and math.isfinite(v) for v in pos)
    lon, lat = pos[0], pos[1]
    assert -180.0 <= lon <= 180.0 and -90.0 <= lat <= 90.0


def check_geometry(g):
    assert set(g) == {"type", "coordinates"}  # no other members on a geometry here
    if g["type"] == "LineString":  # 3.1.4: two or more positions
        lines = [g["coordinates"]]
    else:
        assert g["type"] == "MultiLineString"  # 3.1.5
        lines = g["coordinates"]
    for line in lines:
        assert len(line) >= 2
        for pos in line:
            check_position(pos)
        for a, b in zip(line[:-1], line[1:], strict=True):
            assert abs(b[0] - a[0]) <= 180.0  # 3.1.9: a line is cut at the antimeridian, never wraps
    return lines


def check_collection(fc):
    """3.3 FeatureCollection with a ``features`` array; 3.2 each a Feature with geometry and properties."""
    assert fc["type"] == "FeatureCollection"
    assert isinstance(fc["features"], list)
    assert "crs" not in fc  # 4: no crs member; WGS84 is implied
    for f in fc["features"]:
        assert f["type"] == "Feature"
        assert "geometry" in f and "properties" in f
        assert f["properties"] is None or isinstance(f["properties"], dict)
        check_geometry(f["geometry"])
    # RFC 7946 section 1.4 / RFC 8259: JSON text, so no NaN or Infinity anywhere.
    json.dumps(fc, allow_nan=False)


@pytest.fixture(scope="module")
def plain():
    a = synthetic_assessment()
    return a, segments_geojson(a)


def test_structure_follows_rfc7946(plain):
    _, fc = plain
    check_collection(fc)


def test_one_feature_per_segment_with_its_properties(plain):
    a, fc = plain
    assert len(fc["features"]) == len(a.segments)
    for f, row in zip(fc["features"], a.segments.to_dict(orient="records"), strict=True):
        p = f["properties"]
        assert set(p) == set(a.segments.columns)
        assert p["segment"] == row["segment"] and p["start"] == row["start"] and p["data"] == row["data"]
        for k, v in row.items():
            if isinstance(v, float) and math.isnan(v):
                assert p[k] is None  # missing stays missing (null), never a made-up number
    assert fc["properties"]["caution"] == CAUTION


def test_coordinate_order_is_longitude_latitude(plain):
    """Positions are [lon, lat, altitude_m] (RFC 7946 3.1.1), matching the samples of each segment in order."""
    a, fc = plain
    for f in fc["features"]:
        leg = a.samples[a.samples["leg"] == f["properties"]["segment"] - 1]
        coords = np.array(f["geometry"]["coordinates"])
        np.testing.assert_allclose(coords[:, 0], leg["longitude"], atol=1e-6)
        np.testing.assert_allclose(coords[:, 1], leg["latitude"], atol=1e-6)
        np.testing.assert_allclose(coords[:, 2], leg["altitude_ft"] * 0.3048, atol=0.06)  # ft is 0.3048 m exactly


def test_antimeridian_crossing_is_split():
    """A segment crossing 180 deg becomes a MultiLineString whose parts meet at +180 and -180 (3.1.9)."""
    a = synthetic_assessment(PACIFIC, gap=False)
    fc = segments_geojson(a)
    check_collection(fc)
    kinds = [f["geometry"]["type"] for f in fc["features"]]
    assert kinds.count("MultiLineString") == 1
    f = fc["features"][kinds.index("MultiLineString")]
    first, second = f["geometry"]["coordinates"]
    assert abs(first[-1][0]) == 180.0 and second[0][0] == -first[-1][0]
    assert first[-1][1] == pytest.approx(second[0][1])
    assert first[0][0] > 0 and second[-1][0] < 0


def test_text_round_trip(plain):
    """The collection written as JSON text (as write_reports writes it) parses back the same and still valid."""
    _, fc = plain
    back = json.loads(json.dumps(fc, indent=1, allow_nan=False))
    check_collection(back)
    assert back == fc


def test_segment_lines_start_and_end_at_their_waypoints():
    """Each segment's line runs from its start waypoint to its end waypoint (RFC 7946 order [lon, lat, alt m];
    altitude ft x 0.3048 exactly), so consecutive features meet."""
    from pathlib import Path

    from icing.flight.assess import assess_route
    from icing.report.files import segments_geojson

    samples = Path(__file__).parents[1] / "sample_soundings"
    res = assess_route(samples / "demo_route.csv", sorted(samples.glob("S?_*.csv")), "turboprop")
    feats = segments_geojson(res)["features"]
    wps = res.route.waypoints
    for k, f in enumerate(feats):
        c = f["geometry"]["coordinates"]
        assert c[0][:2] == [round(wps[k].longitude, 6), round(wps[k].latitude, 6)]
        assert c[-1][:2] == [round(wps[k + 1].longitude, 6), round(wps[k + 1].latitude, 6)]
        assert abs(c[0][2] - wps[k].altitude_ft * 0.3048) < 0.06
    for a, b in zip(feats[:-1], feats[1:], strict=True):
        assert a["geometry"]["coordinates"][-1] == b["geometry"]["coordinates"][0]

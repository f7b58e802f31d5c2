"""Golden values of the machine-readable formats: CSV (RFC 4180), JSON (RFC 8259), text; fixed decimals, no
scientific notation, unknown as an empty cell / null / dash, times ISO 8601 UTC.

The segment table here has the dtypes the route assessment is moving to (times as datetime64[ns, UTC], words as
ordered Categoricals, details of a segment without data missing), so the reports are checked against them.
"""

from __future__ import annotations

import csv
import io
import json
import re

import numpy as np
import pandas as pd
import pytest
from test_report_plots import synthetic_assessment

from icing.report.files import assessment_json, segments_csv, segments_geojson
from icing.report.tables import KT_PER_MS, decimals, format_number, frame_to_csv
from icing.report.text import segment_table

SCI = re.compile(r"\d[eE][+-]?\d")


def typed_assessment():
    """The synthetic assessment with the segment table's new dtypes and a missing segment's details unknown."""
    a = synthetic_assessment()
    seg = a.segments.copy()
    seg["start_time"] = pd.to_datetime(["2030-02-01T06:00:00Z", "2030-02-01T06:31:07Z", "2030-02-01T07:02:59Z"])
    seg["end_time"] = pd.to_datetime(["2030-02-01T06:31:07Z", "2030-02-01T07:02:59Z", "2030-02-01T07:40:00Z"])
    words = {"intensity": ["none", "trace", "light", "moderate", "severe", "unknown"],
             "ice_type": ["none", "rime", "mixed", "glaze"], "large_drops": ["none", "drizzle", "rain"],
             "data": ["ok", "partial", "missing"]}
    seg.loc[1, ["ice_type", "large_drops"]] = None
    seg.loc[1, ["data", "intensity"]] = ["missing", "unknown"]
    seg.loc[1, ["max_lwc_g_m3", "mvd_um", "min_temperature_c", "accretion_mm", "max_rate_mm_per_h"]] = np.nan
    seg.loc[0, "altitude_ft_max"] = 12876.4  # was written 1.288e+04
    seg.loc[0, "accretion_mm"] = 3.3306690738754696e-16  # was written 3.33e-16
    seg.loc[2, "min_temperature_c"] = -0.04  # rounds to 0.0, never "-0.0"
    for c, cats in words.items():
        seg[c] = pd.Categorical(seg[c], categories=cats, ordered=True)
    a.segments = seg
    return a


@pytest.fixture(scope="module")
def typed():
    return typed_assessment()


def test_decimals_by_unit():
    """Common practice of the trade (no published source): feet and flight levels whole, nautical miles,
    hPa, degC to a tenth, LWC to hundredths; the unit is read from the column name."""
    assert [decimals(c) for c in ("altitude_ft_min", "distance_nm", "base_pressure_hpa", "min_temperature_c",
                                  "max_lwc_g_m3", "mvd_um", "accretion_mm", "data_age_h")] == [0, 1, 1, 1, 2, 1, 2, 1]
    assert format_number(12876.4, 0) == "12876" and format_number(-0.04, 1) == "0.0"
    assert format_number(3.33e-16, 2) == "0.00" and format_number(np.nan, 1, missing="-") == "-"
    assert format_number(12876.4, 0, grouping=True) == "12,876"


def test_knot_definition():
    """1 international nautical mile = 1852 m exactly (1929); 1 kt = 1852/3600 m/s: 6.2 m/s is 12.05 kt."""
    np.testing.assert_allclose(6.2 * KT_PER_MS, 12.052, rtol=1e-4)


def test_segments_csv_golden(typed):
    """RFC 4180 rows, fixed decimals per unit, empty cells for unknown, ISO 8601 UTC times, no 'e' notation."""
    text = segments_csv(typed)
    assert text.startswith("# ADVISORY ONLY")
    body = text.split("\n", 1)[1]
    assert not SCI.search(body)
    rows = list(csv.DictReader(io.StringIO(body)))
    assert len(rows) == 3
    r0, r1, r2 = rows
    assert r0["altitude_ft_max"] == "12876" and r0["altitude_ft_min"].isdigit()
    assert r0["accretion_mm"] == "0.00"
    assert r0["start_time"] == "2030-02-01T06:00:00Z" and r1["end_time"] == "2030-02-01T07:02:59Z"
    assert r1["data"] == "missing" and r1["intensity"] == "unknown"
    assert r1["ice_type"] == "" and r1["max_lwc_g_m3"] == "" and r1["mvd_um"] == ""
    assert r2["min_temperature_c"] == "0.0"
    assert re.fullmatch(r"\d+\.\d", r0["distance_nm"]) and re.fullmatch(r"\d+\.\d\d", r0["max_lwc_g_m3"])
    assert "nan" not in body.lower().replace("unknown", "")


def test_assessment_json_golden(typed):
    """RFC 8259: no NaN; unknown is null; numbers are numbers, words strings, times ISO UTC strings."""
    data = json.loads(assessment_json(typed))  # json.loads accepts NaN: check the text too
    text = assessment_json(typed)
    assert "NaN" not in text and "Infinity" not in text and not SCI.search(text)
    s0, s1 = data["segments"][0], data["segments"][1]
    assert s0["altitude_ft_max"] == 12876.0 and isinstance(s0["segment"], int)
    assert s0["start_time"] == "2030-02-01T06:00:00Z"
    assert s1["ice_type"] is None and s1["max_lwc_g_m3"] is None and s1["intensity"] == "unknown"
    assert isinstance(s0["intensity"], str) and isinstance(s0["distance_nm"], float)
    assert data["caution"].startswith("ADVISORY ONLY")


def test_geojson_properties_take_the_new_dtypes(typed):
    """GeoJSON (RFC 7946) properties: same values as the JSON report (times as strings, unknown null)."""
    fc = json.loads(json.dumps(segments_geojson(typed), allow_nan=False))
    p = fc["features"][1]["properties"]
    assert p["start_time"] == "2030-02-01T06:31:07Z" and p["ice_type"] is None


def test_text_table_dashes_for_unknown(typed):
    """The terminal table: a dash for unknown details, UNKNOWN in capitals, HH:MM from datetime64 times."""
    text = segment_table(typed)
    line = next(x for x in text.splitlines() if x.startswith("2 "))
    assert "UNKNOWN" in line and "missing" in line and "06:31" in line
    cells = line.split()
    assert cells[6:9] == ["-", "-", "-"], cells  # minutes, max rate, accretion: unknown, never 0
    assert not SCI.search(text)


def test_frame_to_csv_layers_like():
    """A layer table as 'icing layers --format csv' writes it: 3.33e-16 degC is 0.0, heights whole feet."""
    t = pd.DataFrame({"station": ["00101"], "base_height_ft": [2088.8013998250217],
                      "base_temperature_c": [3.3306690738754696e-16], "max_lwc_g_m3": [0.5869325273670253],
                      "kind": ["stratiform"], "quality": [None]})
    rows = list(csv.reader(io.StringIO(frame_to_csv(t))))
    assert rows[1] == ["00101", "2089", "0.0", "0.59", "stratiform", ""]

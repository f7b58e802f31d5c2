"""Machine-readable reports: segment CSV, full JSON, GeoJSON (RFC 7946), and the report folder."""

from __future__ import annotations

import json
from pathlib import Path

from icing import CAUTION
from icing.report.tables import frame_records, frame_to_csv, json_value
from icing.units import FT

__all__ = ["segments_csv", "segments_geojson", "assessment_dict", "assessment_json", "write_reports"]


def segments_csv(assessment) -> str:
    """The segment table as CSV, the caution in a leading comment line.

    Fixed decimals by the unit in each column name (:func:`icing.report.tables.decimals`), never scientific
    notation; an unknown value is an empty cell; times are ISO 8601 UTC (``Z``)."""
    return frame_to_csv(assessment.segments, comment=CAUTION)


def _clean(v, column=""):
    return json_value(v, column)


def assessment_dict(assessment) -> dict:
    """The caution, the summary and the segments as JSON-ready values (unknown is ``None``, times ISO UTC)."""
    summary = {k: json_value(v, k) for k, v in assessment.summary.items()}
    return {"caution": assessment.caution or CAUTION, "summary": summary,
            "segments": frame_records(assessment.segments)}


def assessment_json(assessment, indent=2) -> str:
    """The result as JSON (RFC 8259: unknown numbers are null, never NaN; fixed decimals per unit)."""
    return json.dumps(assessment_dict(assessment), indent=indent, allow_nan=False)


def _lon180(lon):
    return ((float(lon) + 180.0) % 360.0) - 180.0


def _split_antimeridian(coords):
    """Split a line where it crosses the antimeridian (RFC 7946 section 3.1.9)."""
    parts = [[coords[0]]]
    for a, b in zip(coords[:-1], coords[1:], strict=True):
        if abs(b[0] - a[0]) > 180.0:
            # Interpolate the crossing latitude and close one part at +-180, open the next at -+180.
            b0 = b[0] + (360.0 if b[0] < a[0] else -360.0)
            f = ((180.0 if b0 > a[0] else -180.0) - a[0]) / (b0 - a[0])
            lat = a[1] + f * (b[1] - a[1])
            alt = a[2] + f * (b[2] - a[2])
            edge = 180.0 if b0 > a[0] else -180.0
            parts[-1].append([edge, lat, alt])
            parts.append([[-edge, lat, alt]])
        parts[-1].append(b)
    return parts


def segments_geojson(assessment) -> dict:
    """A FeatureCollection with one LineString (MultiLineString across the antimeridian) per segment.

    Positions are ``[longitude, latitude, altitude_m]`` (RFC 7946 order; altitude in metres, as flown: MSL or
    pressure altitude as the segment's ``flight_level`` says). Properties are the segment table's columns.
    """
    smp = assessment.samples
    feats = []
    for row in frame_records(assessment.segments):
        leg = smp[smp["leg"] == row["segment"] - 1]
        coords = [[round(float(lo), 6), round(float(la), 6), round(float(z) * FT, 1)]
                  for lo, la, z in zip(leg["longitude"], leg["latitude"], leg["altitude_ft"], strict=True)]
        route = getattr(assessment, "route", None)
        if route is not None:  # run the line from waypoint to waypoint, not from sample to sample
            k = int(row["segment"]) - 1
            a, b = route.waypoints[k], route.waypoints[k + 1]
            coords = ([[round(_lon180(a.longitude), 6), round(a.latitude, 6), round(a.altitude_ft * FT, 1)]]
                      + coords + [[round(_lon180(b.longitude), 6), round(b.latitude, 6), round(b.altitude_ft * FT, 1)]])
        if len(coords) == 1:
            coords = coords * 2
        parts = _split_antimeridian(coords)
        geom = ({"type": "LineString", "coordinates": parts[0]} if len(parts) == 1
                else {"type": "MultiLineString", "coordinates": parts})
        props = dict(row)
        feats.append({"type": "Feature", "geometry": geom, "properties": props})
    return {"type": "FeatureCollection", "features": feats,
            "properties": {"caution": CAUTION, "summary": {k: _clean(v, k) for k, v in assessment.summary.items()}}}


def write_reports(assessment, out_dir, source=None, progress=None) -> list[Path]:
    """Write segments.csv, assessment.json, segments.geojson (and report.html with plots when available).

    ``source`` (the atmosphere source) lets the HTML report draw the layers along the route and the soundings;
    ``progress(done, total, what)`` is called as each figure is drawn.
    """
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    written = []
    p = out / "segments.csv"
    p.write_text(segments_csv(assessment))
    written.append(p)
    p = out / "assessment.json"
    p.write_text(assessment_json(assessment))
    written.append(p)
    p = out / "segments.geojson"
    p.write_text(json.dumps(segments_geojson(assessment), indent=1))
    written.append(p)
    try:
        from icing.report.html import write_html
    except ImportError:
        return written
    written.extend(write_html(assessment, out, source, progress=progress))
    return written

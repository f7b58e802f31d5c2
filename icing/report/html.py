"""A single self-contained HTML report: caution first, summary, plots embedded, segment table, sources.

The page has no external reference (no scripts, fonts, style sheets or images from the network): the images are
embedded as base64 ``data:`` URLs, so the file opens in any browser offline and can be mailed as one file.
"""

from __future__ import annotations

import base64
import html
import io
import math
from pathlib import Path

import numpy as np

from icing import CAUTION

__all__ = ["write_html", "report_html", "SEGMENT_HEADINGS"]

SEGMENT_HEADINGS = {
    "segment": "#", "start": "from", "end": "to", "start_time": "start (UTC)", "end_time": "end (UTC)",
    "distance_nm": "distance (nm)", "altitude_ft_min": "lowest (ft)", "altitude_ft_max": "highest (ft)",
    "icing_minutes": "minutes in icing", "max_rate_mm_per_h": "max rate (mm/h)", "accretion_mm": "accretion (mm)",
    "intensity": "intensity", "ice_type": "ice type", "large_drops": "large drops", "data": "data",
    "max_lwc_g_m3": "max LWC (g/m³)", "mvd_um": "MVD (µm)", "min_temperature_c": "coldest (°C)",
    "freezing_level_ft": "freezing level (ft)", "supercooled_top_ft": "supercooled top (ft)",
    "appendix_c": "App. C", "appendix_o": "App. O", "data_distance_km": "data distance (km)",
    "data_age_h": "data age (h)", "best_altitude_ft": "best altitude (ft)", "best_accretion_mm": "best accretion (mm)",
    "sources": "sources",
}
_STYLE = """
body{font-family:system-ui,-apple-system,"Segoe UI",Roboto,Helvetica,Arial,sans-serif;margin:1.2em auto;
max-width:1250px;padding:0 1em;color:#1d1d1d;line-height:1.4}
h1{font-size:1.5em;margin:.3em 0}h2{font-size:1.15em;margin-top:1.6em;border-bottom:1px solid #ccc}
.caution{border:2px solid #7a4fa3;background:#f5f0fa;padding:.7em 1em;font-weight:600}
.gaps{border:2px solid #5a5a5a;padding:.6em 1em;background:repeating-linear-gradient(45deg,#fff,#fff 8px,#eee 8px,
#eee 16px);font-weight:600}
table{border-collapse:collapse;font-size:.85em;margin:.5em 0}th,td{border:1px solid #ccc;padding:.25em .45em;
text-align:right;vertical-align:top}th{background:#eef1f7}td.t{text-align:left}
tr.partial td{background:#f7f7f7}tr.missing td{background:repeating-linear-gradient(45deg,#fff,#fff 6px,#e6e6e6 6px,
#e6e6e6 12px)}
.i-severe{background:#2f0d63;color:#fff}.i-moderate{background:#5b4bb7;color:#fff}.i-light{background:#6f8fd8}
.i-trace{background:#a9c4eb}.i-unknown{background:#4d4d4d;color:#fff}
img{max-width:100%;height:auto;border:1px solid #ddd;margin:.4em 0}dl{display:grid;grid-template-columns:max-content
auto;gap:.15em 1em}dt{font-weight:600}dd{margin:0}.small{font-size:.8em;color:#444}
"""


def _e(v) -> str:
    return html.escape(str(v), quote=True)


def _fmt(v, col=""):
    if isinstance(v, bool | np.bool_):
        return "yes" if v else "no"
    if v is None or (isinstance(v, float | np.floating) and math.isnan(v)):
        return "–"
    if isinstance(v, float | np.floating):
        if col.endswith("_ft") or col in ("altitude_ft_min", "altitude_ft_max"):
            return f"{v:,.0f}"
        return f"{v:.2f}" if abs(v) < 10 else f"{v:.1f}"
    return str(v)


def _png_data(fig) -> tuple[str, bytes]:
    from icing.report.plots import DPI

    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=DPI)
    raw = buf.getvalue()
    return "data:image/png;base64," + base64.b64encode(raw).decode("ascii"), raw


def _haversine_km(lat1, lon1, lat2, lon2):
    from icing.flight.sources import EARTH_RADIUS_M

    p1, p2 = np.radians(lat1), np.radians(lat2)
    a = np.sin((p2 - p1) / 2) ** 2 + np.cos(p1) * np.cos(p2) * np.sin(np.radians(lon2 - lon1) / 2) ** 2
    return 2 * EARTH_RADIUS_M / 1000.0 * np.arcsin(np.sqrt(np.clip(a, 0.0, 1.0)))


def _used_labels(assessment) -> list[str]:
    seen = []
    for s in assessment.segments["sources"].fillna(""):
        for lab in str(s).split(";"):
            lab = lab.strip()
            if lab and lab not in seen:
                seen.append(lab)
    return seen


def _segments_using(assessment, label):
    return ", ".join(str(r.segment) for r in assessment.segments.itertuples() if label in str(r.sources).split(";"))


def _is_soundings(source) -> bool:
    """A set of soundings: one label, station, position and time per report."""
    return source is not None and all(hasattr(source, k) for k in ("labels", "station", "latitude", "longitude",
                                                                    "time_s")) \
        and np.shape(source.latitude) == np.shape(source.labels)


def source_rows(assessment, source=None) -> list[dict]:
    """One row per report: label, used by which segments, nearest distance to the route (km), age (h).

    With a set of soundings: every report it holds, its distance to the nearest flight-path sample and its time
    from the flight-path sample nearest in time. With a model grid: one row per grid time and its age. Without a
    source: the labels named in the segment table.
    """
    used = _used_labels(assessment)
    smp = assessment.samples
    rows = []
    if _is_soundings(source) and len(smp):
        lat, lon = smp["latitude"].to_numpy(float), smp["longitude"].to_numpy(float)
        ts = smp["time_s"].to_numpy(float)
        for j, label in enumerate(source.labels):
            d = _haversine_km(lat, lon, source.latitude[j], source.longitude[j])
            age = np.abs(ts - source.time_s[j]) / 3600.0
            rows.append({"label": str(label), "used_by": _segments_using(assessment, str(label)),
                         "distance_km": float(d.min()), "age_h": float(age.min()),
                         "file": str(source.profiles["source"].values[j]) if "source" in source.profiles else ""})
        return rows
    if source is not None and hasattr(source, "labels") and hasattr(source, "time_s") and len(smp):
        # A model grid: one row per analysis or forecast time; the route lies inside the grid or has no data.
        ts = smp["time_s"].to_numpy(float)
        for label, t in zip(source.labels, np.asarray(source.time_s, float), strict=False):
            rows.append({"label": str(label), "used_by": _segments_using(assessment, str(label)),
                         "distance_km": np.nan, "age_h": float(np.abs(ts - t).min() / 3600.0),
                         "file": str(getattr(getattr(source, "model", None), "attrs", {}).get("source", ""))})
        return rows
    for label in used:
        rows.append({"label": label, "used_by": _segments_using(assessment, label), "distance_km": np.nan,
                     "age_h": np.nan, "file": ""})
    return rows


def report_html(assessment, images: dict[str, str], source=None) -> str:
    """The report page as a string; ``images`` maps a caption to a ``data:`` URL."""
    s = assessment.summary
    seg = assessment.segments
    out = ["<!DOCTYPE html>", '<html lang="en">', "<head>", '<meta charset="utf-8">',
           '<meta name="viewport" content="width=device-width, initial-scale=1">',
           f"<title>Icing screening: {_e(s.get('route', 'route'))}</title>", f"<style>{_STYLE}</style>", "</head>",
           "<body>", f'<p class="caution" id="caution">{_e(assessment.caution or CAUTION)}</p>',
           f"<h1>Icing screening of route {_e(s.get('route', ''))}</h1>"]
    n_miss, n_part = s.get("segments_missing_data", 0), s.get("segments_partial_data", 0)
    if n_miss or n_part:
        out.append(f'<p class="gaps">DATA GAPS: {int(n_miss)} segment(s) without data and {int(n_part)} with partial '
                   "data. Icing there is UNKNOWN, not absent; hatched areas in the plots mark where.</p>")
    out.append("<h2>Summary</h2><dl>")
    words = [("route", "route"), ("departure", "departure (UTC)"), ("aircraft", "aircraft"),
             ("reference_body_diameter_m", "reference body diameter (m)"), ("segments", "segments"),
             ("total_icing_minutes", "minutes in icing"),
             ("total_accretion_mm", "accretion on the reference body (mm)"),
             ("worst_segment", "worst segment"), ("worst_intensity", "worst intensity"),
             ("best_altitude_plan_accretion_mm", "accretion flying each segment's best altitude (mm)"),
             ("data_complete", "data complete"), ("time_step_s", "time step (s)")]
    for key, word in words:
        if key not in s:
            continue
        value = _fmt(s[key])
        if key == "worst_segment" and s[key] is not None and (seg["segment"] == s[key]).any():
            r = seg[seg["segment"] == s[key]].iloc[0]
            value = f"{s[key]} ({r['start']}-{r['end']})"
        elif key == "worst_segment" and s[key] is None:
            value = "none with icing found" if s.get("worst_intensity") == "none" else "–"
        elif key == "best_altitude_plan_accretion_mm" and value == "–":
            value = "– (a segment has no alternative altitude with full data)"
        out.append(f"<dt>{_e(word)}</dt><dd>{_e(value)}</dd>")
    out.append("</dl>")
    if s.get("intensity_note"):
        out.append(f'<p class="small">{_e(s["intensity_note"])}</p>')
    out.append("<h2>Segments</h2>")
    cols = [c for c in SEGMENT_HEADINGS if c in seg.columns]
    out.append('<table id="segments"><thead><tr>' + "".join(f"<th>{_e(SEGMENT_HEADINGS[c])}</th>" for c in cols)
               + "</tr></thead><tbody>")
    for row in seg.to_dict(orient="records"):
        cells = []
        for c in cols:
            v = row[c]
            if c == "sources":
                v = "; ".join(x for x in str(v).split(";") if x)
            cls = "t" if isinstance(v, str) else ""
            if c == "intensity":
                cls += f" i-{_e(v)}"
            cells.append(f'<td class="{cls.strip()}">{_e(_fmt(v, c))}</td>')
        out.append(f'<tr class="{_e(row.get("data", ""))}" data-segment="{_e(row["segment"])}">' + "".join(cells)
                   + "</tr>")
    out.append("</tbody></table>")
    out.append('<p class="small">Intensity and accretion are for the aircraft\'s reference body at the planned '
               "true airspeed. &ldquo;partial&rdquo; data: the values are a lower bound. App. C / App. O: whether "
               "the conditions are within the 14 CFR Part 25 Appendix C / O envelopes.</p>")
    out.append("<h2>Plots</h2>")
    for caption, url in images.items():
        out.append(f'<figure><img src="{url}" alt="{_e(caption)}"><figcaption class="small">{_e(caption)}'
                   "</figcaption></figure>")
    out.append("<h2>Sources used</h2>")
    rows = source_rows(assessment, source)
    if rows:
        out.append('<table id="sources"><thead><tr><th>report</th><th>used by segments</th><th>nearest distance to '
                   "the route (km)</th><th>age at the nearest flight time (h)</th><th>file</th></tr></thead><tbody>")
        for r in rows:
            out.append(f'<tr><td class="t">{_e(r["label"])}</td><td class="t">{_e(r["used_by"] or "not used")}</td>'
                       f'<td>{_e(_fmt(r["distance_km"]))}</td><td>{_e(_fmt(r["age_h"]))}</td>'
                       f'<td class="t">{_e(r["file"])}</td></tr>')
        out.append("</tbody></table>")
        if source is None:
            out.append('<p class="small">Per segment, the farthest and oldest data used are in the segment table '
                       "(data distance, data age).</p>")
    else:
        out.append("<p>No source had data along this route: icing is UNKNOWN along all of it.</p>")
    out.append(f'<p class="caution">{_e(assessment.caution or CAUTION)}</p>')
    out.append("</body></html>")
    return "\n".join(out)


def _sounding_choices(assessment, source):
    """Per station used, the report nearest in time to the route's middle (index into the source)."""
    used = set(_used_labels(assessment))
    smp = assessment.samples
    mid = float(np.median(smp["time_s"].to_numpy(float))) if len(smp) else 0.0
    best = {}
    for j, label in enumerate(source.labels):
        if str(label) not in used:
            continue
        st = str(source.station[j])
        dt = abs(source.time_s[j] - mid)
        if st not in best or dt < best[st][0]:
            best[st] = (dt, j)
    return [j for _, j in sorted(best.values(), key=lambda t: t[1])]


def write_html(assessment, out_dir, source=None, *, soundings=True, progress=None) -> list[Path]:
    """Write report.html (self-contained) and its PNGs into ``out_dir``; returns the paths written.

    Parameters
    ----------
    assessment : icing.flight.assess.Assessment
    out_dir : path of a folder (created if needed)
    source : atmosphere source, optional
        Used for the layers of the cross-section, the sources table (distance and age of each report) and, with
        ``soundings``, one sounding diagram per station used. Defaults to ``assessment.source`` if present.
    progress : callable, optional
        Called as ``progress(done, total, what)`` as each figure is drawn (for a progress bar).
    """
    from icing.report.plots import cross_section_figure, segment_chart_figure, sounding_figure

    source = source if source is not None else getattr(assessment, "source", None)
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    written, images = [], {}
    jobs = [("cross_section.png", "Route cross-section: distance against altitude, the flight path coloured by "
             "accretion rate; hatched: no data (unknown, not clear air).",
             lambda: cross_section_figure(assessment, source)),
            ("segment_chart.png", "Per segment: accretion and minutes in icing, plan against best alternative "
             "altitude.", lambda: segment_chart_figure(assessment))]
    if soundings and _is_soundings(source) and hasattr(source, "diagnostics"):
        for j in _sounding_choices(assessment, source):
            label = str(source.labels[j])
            name = "sounding_" + "".join(ch if ch.isalnum() else "_" for ch in label).strip("_") + ".png"
            jobs.append((name, f"Sounding {label}: supercooled layers shaded, LWC and MVD beside.",
                         lambda j=j, label=label: sounding_figure(source.diagnostics.isel(profile=j),
                                                                  title=f"Sounding {label}")))
    for k, (name, caption, make) in enumerate(jobs):
        if progress is not None:
            progress(k, len(jobs), f"drawing {name}")
        url, raw = _png_data(make())
        p = out / name
        p.write_bytes(raw)
        written.append(p)
        images[caption] = url
    if progress is not None:
        progress(len(jobs), len(jobs), "report.html")
    page = out / "report.html"
    page.write_text(report_html(assessment, images, source), encoding="utf-8")
    return [page, *written]

"""A single self-contained HTML report: caution first, summary, plots embedded, segment table, sources.

The page has no external reference (no scripts, fonts, style sheets or images from the network): the images are
embedded as base64 ``data:`` URLs, so the file opens in any browser offline and can be mailed as one file.
"""

from __future__ import annotations

import base64
import html
import io
from pathlib import Path

import numpy as np

from icing import CAUTION

__all__ = ["write_html", "report_html", "SEGMENT_HEADINGS"]

SEGMENT_HEADINGS = {
    "segment": "#", "start": "from", "end": "to", "start_time": "start (UTC)", "end_time": "end (UTC)",
    "distance_nm": "distance (nm)", "altitude_ft_min": "lowest (ft)", "altitude_ft_max": "highest (ft)",
    "icing_minutes": "minutes in icing", "max_rate_mm_per_h": "max rate (mm/h)", "accretion_mm": "accretion (mm)",
    "intensity": "intensity", "ice_type": "ice type", "large_drops": "large drops", "data": "data",
    "warm_surface_minutes": "minutes with the leading edge above 0 °C",
    "max_lwc_g_m3": "max LWC (g/m³)", "mvd_um": "MVD (µm)", "min_temperature_c": "coldest (°C)",
    "freezing_level_ft": "freezing level (ft)", "supercooled_top_ft": "supercooled top (ft)",
    "appendix_c": "14 CFR 25 Appendix C", "appendix_o": "14 CFR 25 Appendix O",
    "data_distance_km": "farthest data used (km)", "data_age_h": "oldest data used (h)",
    "best_altitude_ft": "best altitude (ft)", "best_accretion_mm": "accretion at the best altitude (mm)",
    "sources": "reports used",
    "p_light": "share of members light or worse", "p_moderate": "share of members moderate or worse",
    "p_severe": "share of members severe or worse", "accretion_p10_mm": "accretion, 10th percentile of members (mm)",
    "accretion_p90_mm": "accretion, 90th percentile of members (mm)",
    "spread_driver": "assumption that moves the accretion most",
    "large_drop_potential": "supercooled large drops", "large_drop_reason": "why large drops",
}
# The compact table: where (from, to, altitudes), when (times), how bad (minutes, accretion, intensity, type,
# large drops), how sure (data). Everything else folds into the row's details.
COMPACT = ["segment", "start", "end", "start_time", "altitude_ft_min", "icing_minutes", "accretion_mm",
           "intensity", "ice_type", "large_drops", "data"]
DETAILS = ["large_drop_potential", "large_drop_reason", "distance_nm", "max_rate_mm_per_h", "max_lwc_g_m3",
           "mvd_um", "min_temperature_c", "freezing_level_ft", "supercooled_top_ft", "warm_surface_minutes",
           "appendix_c", "appendix_o", "data_distance_km", "data_age_h", "best_altitude_ft",
           "best_accretion_mm", "sources", "p_light", "p_moderate", "p_severe", "accretion_p10_mm",
           "accretion_p90_mm", "spread_driver"]
# With the spread ensemble (assess_route(spread=True)) the compact table also shows how sure: the share of members
# at moderate or worse and the 10th-90th percentile range of accretion.
SPREAD_COLUMNS = ("p_light", "p_moderate", "p_severe", "accretion_p10_mm", "accretion_p90_mm", "spread_driver")
INTENSITY_WORDS = ("none", "trace", "light", "moderate", "severe", "unknown")
DATA_WORDS = ("ok", "partial", "missing")

# Our own colours. Every status has a word as well as a colour; text on each badge keeps a contrast ratio of at
# least 4.5:1 (WCAG 2.1, success criterion 1.4.3; tests/test_report_browser.py measures it in a browser).
# Unknown and missing data are amber and black, the loudest colours on the page: they never fade.
_STYLE = """
:root{--ink:#1b1b1b;--muted:#4a4a4a;--rule:#c9ccd3;--head:#e9ecf3;--amber:#ffc933}
*{box-sizing:border-box}
body{font-family:system-ui,-apple-system,"Segoe UI",Roboto,Helvetica,Arial,sans-serif;margin:0 auto;
max-width:1240px;padding:.6em 1em 2em;color:var(--ink);line-height:1.35;font-size:15px}
.caution{border:2px solid #6b3fa0;background:#f4eefb;padding:.45em .8em;margin:0 0 .5em;font-size:.9em}
.caution b{color:#4b2380}
h1{font-size:1.35em;margin:.2em 0 .1em}h2{font-size:1.1em;margin:1.2em 0 .4em;border-bottom:1px solid var(--rule)}
.meta{margin:0 0 .6em;color:var(--muted)}
.glance{display:flex;flex-wrap:wrap;gap:.5em;margin:.4em 0 .6em}
.card{border:1px solid var(--rule);border-radius:6px;padding:.35em .7em;min-width:9em;background:#fafbfd}
.card .k{display:block;font-size:.75em;color:var(--muted);text-transform:uppercase;letter-spacing:.04em}
.card b{font-size:1.1em}
.gaps{border:3px solid #1b1b1b;background:var(--amber);color:#1b1b1b;padding:.45em .8em;font-weight:600;
margin:.4em 0}
table{border-collapse:collapse;margin:.3em 0}
th,td{border:1px solid var(--rule);padding:.3em .5em;text-align:right;vertical-align:middle;white-space:nowrap}
th{background:var(--head);font-size:.85em}
td.t,th.t{text-align:left}
#segments{font-size:.95em}
#segments tr.more td{border-top:0;padding:.1em .5em .35em;text-align:left;white-space:normal;background:#fcfcfd}
#segments tr.seg td{border-bottom:0}
tr.r-missing td,tr.r-partial td{background:#fff7dc}
tr.r-missing td:first-child,tr.r-partial td:first-child{box-shadow:inset 6px 0 0 #1b1b1b}
details summary{cursor:pointer;color:var(--muted);font-size:.85em}
details[open] summary{color:var(--ink)}
dl.det{display:grid;grid-template-columns:max-content 1fr;gap:.1em 1em;margin:.3em 0 .2em;font-size:.85em}
dl.det dt{color:var(--muted)}dl.det dd{margin:0}
.badge{display:inline-block;min-width:5.2em;text-align:center;padding:.12em .45em;border-radius:4px;font-weight:700;
border:2px solid transparent;font-size:.9em}
.i-none{background:#e6efe8;color:#173b27;border-color:#b9cfbf}
.i-trace{background:#d4e4f6;color:#0c2540}
.i-light{background:#98bde9;color:#0c2540}
.i-moderate{background:#3a57bd;color:#fff}
.i-severe{background:#2b0e5c;color:#fff}
.i-unknown{background:var(--amber);color:#1b1b1b;border:2px dashed #1b1b1b}
.d-ok{background:#fff;color:#1f5130;border-color:#8fb59b}
.d-partial{background:#ffe7a3;color:#3a2800;border-color:#1b1b1b}
.d-missing{background:#1b1b1b;color:var(--amber)}
.key{font-size:.82em;color:var(--muted);margin:.2em 0 .6em;line-height:2}
.key .badge{min-width:0;font-size:.95em}
.wide{overflow-x:auto;max-width:100%}
#sources td.file{white-space:normal;word-break:break-all;text-align:left}
figure{margin:.6em 0}
img{max-width:100%;height:auto;border:1px solid #ddd}
dl.summary{display:grid;grid-template-columns:max-content auto;gap:.15em 1em}dl.summary dt{font-weight:600}
dl.summary dd{margin:0}.small{font-size:.82em;color:var(--muted)}
@media (max-width:760px){
body{font-size:14px;padding:.4em .5em}
#segments,#segments tbody{display:block}#segments thead{display:none}
#segments tr.seg{display:flex;flex-wrap:wrap;gap:.15em .8em;border:1px solid var(--rule);border-bottom:0;
padding:.35em .5em;margin-top:.5em}
#segments tr.seg td{display:block;border:0;padding:0;text-align:left}
#segments tr.seg td::before{content:attr(data-label) ": ";color:var(--muted);font-size:.8em}
#segments tr.seg td.st{order:-1}#segments tr.seg td.id{order:-2;font-weight:700}
.glance{display:grid;grid-template-columns:1fr 1fr}.card{min-width:0}
#segments tr.more{display:block;border:1px solid var(--rule);border-top:0}#segments tr.more td{display:block;border:0}
tr.r-missing td:first-child,tr.r-partial td:first-child{box-shadow:none}
#segments tr.r-missing,#segments tr.r-partial{border-left:6px solid #1b1b1b;background:#fff7dc}
#segments tr.r-missing td,#segments tr.r-partial td{background:none}
}
@page{size:landscape;margin:10mm}
@media print{
body{max-width:none;padding:0;font-size:9pt}
.caution{border-width:1.5pt}
.glance .card{padding:.2em .5em}
#segments tr.more{display:none}
#segments tr.seg td{border-bottom:1px solid var(--rule)}
.badge,.gaps,.caution,th{-webkit-print-color-adjust:exact;print-color-adjust:exact}
figure{break-inside:avoid}img{max-height:120mm;width:auto}
h2{break-after:avoid}
.noprint{display:none}
}
"""


def _e(v) -> str:
    return html.escape(str(v), quote=True)


def _missing(v) -> bool:
    from icing.report.tables import is_missing

    return is_missing(v)


def _fmt(v, col="", unknown="–"):
    """A value for people: fixed decimals by the column's unit, thousands grouped, ``unknown`` when missing."""
    from icing.report.tables import format_value

    if isinstance(v, bool | np.bool_):
        return "yes" if v else "no"
    return format_value(v, col, missing=unknown, grouping=True)


def _word(v, default="unknown") -> str:
    return default if _missing(v) else str(v)


def _hhmm(v) -> str:
    from icing.report.tables import iso_utc

    return "unknown" if _missing(v) else iso_utc(v)[11:16]


def _intensity_badge(word, data) -> str:
    word = _word(word)
    cls = word if word in INTENSITY_WORDS else "unknown"
    if word == "unknown":
        return '<span class="badge i-unknown" title="no usable data: icing unknown, not absent">UNKNOWN</span>'
    shown = word.upper() if word in ("moderate", "severe") else word
    if _word(data) == "partial":
        return (f'<span class="badge i-{cls}" title="at least {_e(word)}: found in the part with data; the rest '
                f'is unknown">{_e(shown)}*</span>')
    return f'<span class="badge i-{cls}">{_e(shown)}</span>'


def _data_badge(data) -> str:
    word = _word(data, "missing")
    cls = word if word in DATA_WORDS else "missing"
    title = {"ok": "complete data along the segment", "partial": "data along part of the segment only: the "
             "values are a lower bound", "missing": "no usable data: icing unknown, not absent"}[cls]
    return f'<span class="badge d-{cls}" title="{_e(title)}">{_e(word.upper() if cls == "missing" else word)}</span>'


def _altitudes(lo, hi) -> str:
    if _missing(lo) and _missing(hi):
        return "unknown"
    if _missing(lo) or _missing(hi) or abs(float(hi) - float(lo)) < 50:
        return _fmt(hi if _missing(lo) else lo, "altitude_ft")
    return f"{_fmt(lo, 'altitude_ft')}–{_fmt(hi, 'altitude_ft')}"


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
    for s in assessment.segments["sources"].astype(object).fillna(""):
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


def _glance(assessment) -> list[str]:
    """Key figures: worst intensity (where), minutes in icing, accretion, data status (how sure)."""
    s, seg = assessment.summary, assessment.segments
    worst = _word(s.get("worst_intensity"))
    where = ""
    ws = s.get("worst_segment")
    if not _missing(ws) and (seg["segment"] == ws).any():
        r = seg[seg["segment"] == ws].iloc[0]
        where = f" segment {int(ws)}, {_word(r['start'], '?')}–{_word(r['end'], '?')}"
    data = seg["data"].astype(object).where(seg["data"].notna(), "missing")
    counts = {w: int((data == w).sum()) for w in DATA_WORDS}
    body = s.get("reference_body_diameter_m")
    body_txt = "" if _missing(body) else f" on the {float(body) * 1000:.0f} mm reference body"
    partial = counts["partial"] > 0 and counts["missing"] == 0  # totals are lower bounds (unknown with a gap)
    unknown = f" · {counts['missing']} segment{'s' if counts['missing'] != 1 else ''} unknown" \
        if counts["missing"] else ""
    cards = [("worst", _intensity_badge(worst, "ok") + _e(where + unknown)),
             ("in icing", ("at least " if partial else "")
              + f"<b>{_e(_fmt(s.get('total_icing_minutes'), 'icing_minutes', 'unknown'))} min</b>"),
             ("accretion", ("at least " if partial else "")
              + f"<b>{_e(_fmt(s.get('total_accretion_mm'), 'accretion_mm', 'unknown'))} mm</b>" + _e(body_txt)),
             ("data (segments)", " ".join(f'{_data_badge(w)}&nbsp;{counts[w]}' for w in DATA_WORDS if counts[w]))]
    best = s.get("best_altitude_plan_accretion_mm")
    cards.append(("at the best altitudes", f"<b>{_e(_fmt(best, 'accretion_mm'))} mm</b>"
                  if not _missing(best) else "n/a: a segment has no alternative with full data"))
    cards += _spread_card(s)
    notes = [f"<li>{_e(n)}</li>" for n in s.get("notes") or []]
    return ['<section class="glance" aria-label="at a glance">'] + [
        f'<div class="card"><span class="k">{_e(k)}</span>{v}</div>' for k, v in cards] + ["</section>"] + (
        ['<ul class="notes" aria-label="notes">'] + notes + ["</ul>"] if notes else [])


def _large_drops_text(row) -> str:
    """The kind of supercooled large drops with their grade where there are any: "rain, likely"."""
    kind = _word(row.get("large_drops"))
    grade = row.get("large_drop_potential")
    if kind in ("none", "unknown") or _missing(grade) or str(grade) == "none":
        return kind
    return f"{kind}, {grade}"


def _detail_items(row) -> list[tuple[str, str]]:
    items = []
    for c in DETAILS:
        if c not in row:
            continue
        v = row[c]
        if c in ("p_light", "p_moderate", "p_severe"):
            text = "unknown" if _missing(v) else f"{100 * float(v):.0f} %"
        elif c == "sources":
            labels = [x.strip() for x in str(v).split(";") if x.strip()] if not _missing(v) else []
            text = ", ".join(labels) if labels else "none (no usable data)"
        else:
            text = _fmt(v, c, "unknown")
        items.append((SEGMENT_HEADINGS.get(c, c), text))
    return items


def _digest(row) -> str:
    """One line folded above a row's details: how sure (data used) and what else there is."""
    parts = []
    src = row.get("sources")
    n = len([x for x in str(src).split(";") if x.strip()]) if not _missing(src) else 0
    parts.append(f"{n} report{'s' if n != 1 else ''} used" if n else "no report used")
    if not _missing(row.get("data_distance_km")):
        parts.append(f"data within {_fmt(row['data_distance_km'], 'data_distance_km')} km, "
                     f"{_fmt(row.get('data_age_h'), 'data_age_h', 'unknown')} h old")
    if not _missing(row.get("best_altitude_ft")):
        parts.append(f"best altitude {_fmt(row['best_altitude_ft'], 'best_altitude_ft')} ft "
                     f"({_fmt(row.get('best_accretion_mm'), 'best_accretion_mm', 'unknown')} mm)")
    return " · ".join(parts)


def _segment_table(assessment) -> list[str]:
    seg = assessment.segments
    heads = [("#", ""), ("from", "t"), ("to", "t"), ("time (UTC)", "t"), ("altitude (ft)", ""),
             ("minutes in icing", ""), ("accretion (mm)", ""), ("intensity", "t"), ("ice type", "t"),
             ("large drops", "t"), ("data", "t")]
    spread = all(c in seg for c in SPREAD_COLUMNS)
    if spread:
        heads[8:8] = [("moderate+ share", ""), ("10–90 % (mm)", "")]
    out = ['<table id="segments"><thead><tr>' + "".join(f'<th class="{c}">{_e(h)}</th>' for h, c in heads)
           + "</tr></thead><tbody>"]
    for row in seg.to_dict(orient="records"):
        data = _word(row.get("data"), "missing")
        word = _word(row.get("intensity"))
        when = f"{_hhmm(row.get('start_time'))}–{_hhmm(row.get('end_time'))}"
        partial = data == "partial"
        blank = data == "missing"  # nothing known there: never a 0 that reads as clear air
        cells = [("#", _e(row["segment"]), "id"), ("from", _e(_word(row.get("start"), "?")), "t id"),
                 ("to", _e(_word(row.get("end"), "?")), "t id"), ("time UTC", _e(when), "t"),
                 ("altitude ft", _e(_altitudes(row.get("altitude_ft_min"), row.get("altitude_ft_max"))), ""),
                 ("minutes in icing", "unknown" if blank else _e(_fmt(row.get("icing_minutes"), "icing_minutes",
                                                                      "unknown")) + ("*" if partial else ""), ""),
                 ("accretion mm", "unknown" if blank else _e(_fmt(row.get("accretion_mm"), "accretion_mm", "unknown"))
                  + ("*" if partial else ""), ""),
                 ("intensity", _intensity_badge(word, data), "t st")]
        if spread:
            cells += [("moderate or worse", _e(_share(row.get("p_moderate"))), ""),
                      ("accretion 10-90 % mm", "unknown" if blank else _e(_range(row)), "")]
        cells += [("ice type", _e(_word(row.get("ice_type"))), "t"),
                 ("large drops", _e(_large_drops_text(row)), "t"),
                 ("data", _data_badge(data), "t st")]
        out.append(f'<tr class="seg r-{_e(data)}" data-segment="{_e(row["segment"])}" data-data="{_e(data)}" '
                   f'data-intensity="{_e(word)}">'
                   + "".join(f'<td class="{c}" data-label="{_e(lab)}">{v}</td>' for lab, v, c in cells) + "</tr>")
        det = "".join(f"<dt>{_e(k)}</dt><dd>{_e(v)}</dd>" for k, v in _detail_items(row))
        out.append(f'<tr class="more"><td colspan="{len(heads)}"><details><summary>details of segment '
                   f'{_e(row["segment"])}: {_e(_digest(row))}</summary><dl class="det">{det}</dl></details>'
                   "</td></tr>")
    out.append("</tbody></table>")
    key = " ".join(_intensity_badge(w, "ok") for w in INTENSITY_WORDS)
    out.append(f'<p class="key">intensity: {key} · data: {_data_badge("ok")} {_data_badge("partial")} '
               f'{_data_badge("missing")} · * at least this much: found in the part of the segment with data, '
               "the rest unknown.</p>")
    return out


def _share(v) -> str:
    return "unknown" if _missing(v) else f"{100 * float(v):.0f} %"


def _range(row) -> str:
    lo, hi = row.get("accretion_p10_mm"), row.get("accretion_p90_mm")
    if _missing(lo) or _missing(hi):
        return "unknown"
    star = "*" if _word(row.get("data"), "missing") == "partial" else ""
    return f"{_fmt(lo, 'accretion_mm')}–{_fmt(hi, 'accretion_mm')}{star}"


def _spread_card(s) -> list[tuple[str, str]]:
    sp = s.get("spread")
    if not isinstance(sp, dict):
        return []
    lo, hi = sp.get("accretion_p10_mm"), sp.get("accretion_p90_mm")
    rng = "unknown (a member has no data)" if _missing(lo) or _missing(hi) else \
        f"{_fmt(lo, 'accretion_mm')}–{_fmt(hi, 'accretion_mm')} mm"
    return [("how sure", f"<b>{_e(_share(sp.get('p_moderate')))}</b> of {_e(sp.get('members', '?'))} members "
             f"moderate or worse; accretion {_e(rng)} (10–90 %); moved most by {_e(sp.get('driver', '?'))}")]


def report_html(assessment, images: dict[str, str], source=None) -> str:
    """The report page as a string; ``images`` maps a caption to a ``data:`` URL.

    One screen answers where, when, how bad and how sure: the caution, the key figures, a compact segment table
    (details folded per row), then the figures, the summary and the sources. Statuses read as words and as
    colours; unknown and partial data stand out. ``@media print`` lays it out for an A4 or letter landscape page.
    """
    from icing.report.tables import iso_utc

    s = assessment.summary
    seg = assessment.segments
    caution = _e(assessment.caution or CAUTION)
    first, _, rest = caution.partition(":")
    caution_html = f"<b>{first}:</b>{rest}" if rest else caution
    dep = s.get("departure")
    total_nm = float(np.nansum(seg["distance_nm"].to_numpy(float))) if "distance_nm" in seg and len(seg) else None
    meta = [f"departure {iso_utc(dep).replace('T', ' ').replace(':00Z', ' UTC')}" if not _missing(dep) else None,
            f"aircraft {s['aircraft']}" if s.get("aircraft") else None,
            f"{len(seg)} segment{'s' if len(seg) != 1 else ''}",
            f"{total_nm:,.0f} nm" if total_nm else None]
    out = ["<!DOCTYPE html>", '<html lang="en">', "<head>", '<meta charset="utf-8">',
           '<meta name="viewport" content="width=device-width, initial-scale=1">',
           f"<title>Icing screening: {_e(s.get('route', 'route'))}</title>", f"<style>{_STYLE}</style>", "</head>",
           "<body>", f'<p class="caution" id="caution" role="note">{caution_html}</p>',
           f"<h1>Icing screening of route {_e(s.get('route', ''))}</h1>",
           f'<p class="meta">{_e(" · ".join(m for m in meta if m))}</p>']
    out += _glance(assessment)
    data = seg["data"].astype(object).where(seg["data"].notna(), "missing")  # the table is the truth
    n_miss, n_part = int((data == "missing").sum()), int((data == "partial").sum())
    if n_miss or n_part:
        out.append(f'<p class="gaps" id="gaps">DATA GAPS: {int(n_miss)} segment(s) without data and {int(n_part)} '
                   "with partial data. Icing there is UNKNOWN, not absent; hatched areas in the figures mark "
                   "where.</p>")
    out.append("<h2>Segments</h2>")
    out += _segment_table(assessment)
    out.append('<p class="small">Intensity and accretion are for the aircraft\'s reference body at the planned '
               "true airspeed. Appendix C / O in the details: whether the conditions are within the 14 CFR Part 25 "
               "Appendix C / O envelopes.</p>")
    out.append("<h2>Figures</h2>")
    for caption, url in images.items():
        out.append(f'<figure><img src="{url}" alt="{_e(caption)}"><figcaption class="small">{_e(caption)}'
                   "</figcaption></figure>")
    out.append('<h2>Summary</h2><dl class="summary">')
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
        value = _fmt(s[key], key)
        if key == "worst_segment" and not _missing(s[key]) and (seg["segment"] == s[key]).any():
            r = seg[seg["segment"] == s[key]].iloc[0]
            value = f"{s[key]} ({r['start']}-{r['end']})"
        elif key == "worst_segment" and _missing(s[key]):
            value = "none with icing found" if s.get("worst_intensity") == "none" else "–"
        elif key == "best_altitude_plan_accretion_mm" and value == "–":
            value = "– (a segment has no alternative altitude with full data)"
        out.append(f"<dt>{_e(word)}</dt><dd>{_e(value)}</dd>")
    out.append("</dl>")
    if s.get("intensity_note"):
        out.append(f'<p class="small">{_e(s["intensity_note"])}</p>')
    out.append("<h2>Sources used</h2>")
    rows = source_rows(assessment, source)
    if rows:
        out.append('<div class="wide"><table id="sources"><thead><tr><th class="t">report</th><th class="t">used by '
                   "segments</th><th>nearest distance to the route (km)</th><th>age at the nearest flight time (h)"
                   '</th><th class="t">file</th></tr></thead><tbody>')
        for r in rows:
            out.append(f'<tr><td class="t">{_e(r["label"])}</td><td class="t">{_e(r["used_by"] or "not used")}</td>'
                       f'<td>{_e(_fmt(r["distance_km"], "distance_km"))}</td>'
                       f'<td>{_e(_fmt(r["age_h"], "age_h"))}</td>'
                       f'<td class="file">{_e(r["file"])}</td></tr>')
        out.append("</tbody></table></div>")
        if source is None:
            out.append('<p class="small">Per segment, the farthest and oldest data used are in the details of each '
                       "row of the segment table.</p>")
    else:
        out.append("<p>No source had data along this route: icing is UNKNOWN along all of it.</p>")
    out.append(f'<p class="caution">{caution_html}</p>')
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
    jobs = [("cross_section.png", "Route cross-section: distance and clock time (UTC) against altitude and flight "
             "level, the flight path coloured by accretion rate; hatched: no data (unknown, not clear air).",
             lambda: cross_section_figure(assessment, source)),
            ("segment_chart.png", "Per segment: accretion and minutes in icing, plan against best alternative "
             "altitude.", lambda: segment_chart_figure(assessment))]
    from icing.report.spread_figure import has_spread, spread_figure

    if has_spread(assessment):
        jobs.append(("how_sure.png", "How sure: per segment the share of ensemble members at light, moderate and "
                     "severe or worse, and the 10th-90th percentile of accretion with the chain's own answer; "
                     "hatched: no data (unknown, not clear air).", lambda: spread_figure(assessment)))
    if soundings and _is_soundings(source) and hasattr(source, "diagnostics"):
        used = set(_used_labels(assessment))
        profiles = getattr(source, "profiles", None)

        def profile(k):
            return profiles.isel(profile=k) if profiles is not None and "profile" in getattr(profiles, "dims", {}) \
                else None

        for j in _sounding_choices(assessment, source):
            label = str(source.labels[j])
            others = [k for k in range(len(source.labels)) if k != j and str(source.station[k]) ==
                      str(source.station[j]) and str(source.labels[k]) in used]
            name = "sounding_" + "".join(ch if ch.isalnum() else "_" for ch in label).strip("_") + ".png"
            also = [str(source.labels[k]) for k in others]
            caption = (f"Sounding {label}: supercooled layers shaded, LWC and MVD beside, wind barbs in knots, "
                       "flight levels and heights (ft) on the right"
                       + (f"; also used by the route, dashed: {', '.join(also)}." if also else "."))
            jobs.append((name, caption, lambda j=j, label=label, others=others: sounding_figure(
                source.diagnostics.isel(profile=j), title=f"Sounding {label}", wind=profile(j),
                others=[(str(source.labels[k]), source.diagnostics.isel(profile=k)) for k in others])))
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

"""The terminal table of a route assessment, with the caution above and below it."""

from __future__ import annotations

import textwrap

from icing import CAUTION
from icing.report.tables import format_number, is_missing, iso_utc


def _num(v, places=1, none="-"):
    """Fixed decimals with thousands separators; a dash for unknown."""
    return format_number(v, places, grouping=True, missing=none)


def _alt(lo, hi):
    if is_missing(lo) or is_missing(hi):
        return _num(hi if is_missing(lo) else lo, 0)
    if abs(hi - lo) < 50:
        return _num(lo, 0)
    return f"{_num(lo, 0)}-{_num(hi, 0)}"


def _word(v, none="-"):
    return none if is_missing(v) else str(v)


def _hhmm(t):
    """HH:MM of a time (ISO string, pandas/numpy time); a dash when unknown."""
    return "-" if is_missing(t) else iso_utc(t)[11:16]


def _intensity(word, data):
    word = _word(word, "unknown")
    shown = word.upper() if word in ("moderate", "severe", "unknown") else word
    return shown + "*" if _word(data) == "partial" and word != "unknown" else shown


SPREAD_COLUMNS = ("p_light", "p_moderate", "p_severe", "accretion_p10_mm", "accretion_p90_mm", "spread_driver")


def _share(v):
    return "-" if is_missing(v) else f"{100 * float(v):.0f}%"


def _spread_cells(r, partial):
    """How sure (with the spread ensemble): share of members at moderate or worse, accretion 10-90 % range."""
    lo, hi = r.accretion_p10_mm, r.accretion_p90_mm
    rng = "-" if is_missing(lo) or is_missing(hi) else f"{_num(lo)}-{_num(hi)}" + ("*" if partial else "")
    return [_share(r.p_moderate), rng]


def _spread_lines(s):
    sp = s.get("spread")
    if not isinstance(sp, dict):
        return []
    lo, hi = sp.get("accretion_p10_mm"), sp.get("accretion_p90_mm")
    rng = "UNKNOWN (a member has a segment without data)" if is_missing(lo) or is_missing(hi) else \
        f"{_num(lo)}-{_num(hi)} mm"
    who = f"{sp.get('members')} model ensemble members" if sp.get("model_members") else \
        f"{sp.get('members')} members (seed {sp.get('seed')}) across the chain's assumptions"
    return [f"How sure: {who}: "
            f"{_share(sp.get('p_light'))} light or worse, {_share(sp.get('p_moderate'))} moderate or worse, "
            f"{_share(sp.get('p_severe'))} severe; total accretion {rng} (10th-90th percentile); moved most by "
            f"{sp.get('driver')}. 'mod+ %' is the share of members at moderate or worse (a member without data "
            "counts at every intensity), 'mm 10-90' the range of the segment's accretion."]


def segment_table(assessment) -> str:
    """A fixed-width table, one line a segment, then the summary and the caution.

    With the spread ensemble (``assess_route(..., spread=True)``) two columns follow the intensity: the share of
    members at moderate or worse and the 10th-90th percentile of accretion; without it the table is unchanged.
    """
    seg = assessment.segments
    s = assessment.summary
    spread = all(c in seg for c in SPREAD_COLUMNS)
    head = ["#", "from", "to", "start UTC", "nm", "altitude ft", "icing min", "max mm/h", "ice mm", "intensity",
            "type", "large drops", "data", "best alt ft", "best mm"]
    if spread:
        head[10:10] = ["mod+ %", "mm 10-90"]
    rows = []
    for r in seg.itertuples():
        blank = _word(r.data, "missing") == "missing"  # nothing known there: a dash, never a 0 that reads as clear
        extra = _spread_cells(r, _word(r.data) == "partial") if spread else []
        rows.append([str(r.segment), _word(r.start), _word(r.end), _hhmm(r.start_time), _num(r.distance_nm, 0),
                     _alt(r.altitude_ft_min, r.altitude_ft_max), "-" if blank else _num(r.icing_minutes, 0),
                     "-" if blank else _num(r.max_rate_mm_per_h), "-" if blank else _num(r.accretion_mm),
                     _intensity(r.intensity, r.data), *extra,
                     _word(r.ice_type), _word(r.large_drops), _word(r.data, "missing"),
                     _num(r.best_altitude_ft, 0), _num(r.best_accretion_mm)])
    widths = [max(len(h), *(len(row[i]) for row in rows)) if rows else len(h) for i, h in enumerate(head)]
    wrap = "\n".join(textwrap.wrap(CAUTION, 100))
    out = [wrap, "", f"Route {s['route']}  departure {iso_utc(s['departure'])}  aircraft {s['aircraft']} "
           f"(reference body {s['reference_body_diameter_m'] * 1000:.0f} mm)", ""]
    out.append("  ".join(h.ljust(w) for h, w in zip(head, widths, strict=True)))
    out.append("  ".join("-" * w for w in widths))
    for row in rows:
        out.append("  ".join(c.ljust(w) for c, w in zip(row, widths, strict=True)))
    out.append("")
    if is_missing(s.get("total_icing_minutes")):  # a segment without data: the totals are unknown
        known = s.get("worst_known_segment")
        out.append("Total in icing: UNKNOWN (a segment has no data); worst: unknown"
                   + (f"; worst where data exist: segment {known} ({s.get('worst_known_intensity')})"
                      if known else "") + ".")
    else:
        bound = "at least " if s.get("totals_lower_bound") else ""
        out.append(f"Total in icing: {bound}{_num(s.get('total_icing_minutes'), 0)} min; total accretion "
                   f"{bound}{_num(s.get('total_accretion_mm'))} mm on the reference body; worst: "
                   + (f"segment {s['worst_segment']} ({s['worst_intensity']})" if s["worst_segment"] else
                      s["worst_intensity"]) + ".")
    out += _spread_lines(s)
    for note in s.get("notes") or []:
        out.append(f"Note: {note}")
    best = s.get("best_altitude_plan_accretion_mm")
    offs = s.get("alternative_offsets_ft") or [0.0]
    span = f"{min(offs):+,.0f} to {max(offs):+,.0f} ft"
    if not is_missing(best):
        out.append(f"Flying each segment at its best altitude (of the offsets tried, {span}) would give "
                   f"{_num(best)} mm.")
    else:
        out.append(f"Best altitudes: 'best alt ft' and 'best mm' give, per segment, the offset ({span}) "
                   "with the least ice and complete data ('-' where none has complete data).")
    if s["segments_missing_data"] or s["segments_partial_data"]:
        out.append(f"DATA GAPS: {s['segments_missing_data']} segment(s) without data and "
                   f"{s['segments_partial_data']} with partial data: icing there is UNKNOWN, not absent; "
                   "* marks an intensity found in the part with data (at least that). 'icing inspect' shows "
                   "what the quality checks removed from each sounding.")
    drops = seg["large_drops"].astype(object)
    if (drops.notna() & (drops != "none")).any():
        why = ""
        if "large_drop_potential" in seg and "large_drop_reason" in seg:
            parts = [f"Segment {r.segment}: {r.large_drops} {r.large_drop_potential} ({r.large_drop_reason})"
                     for r in seg.itertuples() if not is_missing(r.large_drops) and str(r.large_drops) != "none"
                     and not is_missing(r.large_drop_potential)]
            why = " " + "; ".join(parts) + "." if parts else ""
        out.append("Supercooled large drops (freezing drizzle or rain) are beyond what the droplet-size model "
                   "above covers; see the large drops column." + why)
    if "warm_surface_minutes" in seg and (seg["warm_surface_minutes"] > 0).any():
        mins = seg["warm_surface_minutes"].sum()
        out.append(f"For {_num(mins, 0)} of the minutes in supercooled liquid the air's heating of the leading edge "
                   "keeps it above 0 degC: no ice grows there, but the water can run back and freeze behind it.")
    out.append(s["intensity_note"])
    out.append("")
    out.append(wrap)
    return "\n".join(out)

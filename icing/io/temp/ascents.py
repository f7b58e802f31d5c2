"""From text to ascents: each part decoded by its form, corrections and retards applied, and the parts of one
ascent (same station or call sign, day and hour) merged by pressure."""

from __future__ import annotations

import gc

import numpy as np
import pandas as pd

from icing.io.temp.codes import INFO
from icing.io.temp.framing import FORM_NAMES, KINDS, clean_groups, resolve_columns, section_one, skip, split_reports
from icing.io.temp.framing import tokens as text_tokens
from icing.io.temp.levels import Levels
from icing.io.temp.pilot import ALTITUDE_UNIT_M, decode_pilot_heights, decode_pilot_standard
from icing.io.temp.significant import decode_significant, skip_sections
from icing.io.temp.standard import decode_standard

__all__ = ["decode_temp_arrays", "valid_time", "merge_repeated_levels"]

# Merge order: temperature parts before wind-only parts; standard levels (A, C) before significant (B, D).
_PART_ORDER = {"A": 0, "C": 1, "B": 2, "D": 3}
_COLUMN_NAMES = ("pressure", "height", "temperature", "dewpoint", "wind_direction", "wind_speed")


def _decode_report(rep, altitude_unit):
    """Decode one part into its Levels (None for NIL), or False when section 1 cannot be read (recorded)."""
    name = rep.ident
    start = section_one(rep)
    if start is None:
        return False
    if rep.dirty:
        clean_groups(rep, start)
    toks = rep.tokens
    if any(t[0] == "NIL" for t in toks[start:start + 2]):
        rep.records.append({"level": None, "action": "nil", "reason": f"NIL report ({name}): no data",
                            "line": int(rep.line), "_k": int(rep.column), "part": name})
        return None
    levels = Levels()
    body = toks[start:]
    knots = rep.knots
    if KINDS[rep.kind][1]:
        if rep.part in ("A", "C"):
            i = decode_standard(rep, body, knots, levels)
        else:
            i = decode_significant(rep, body, 0, knots, levels, wind=False)
            if i < len(body) and body[i][0] == "21212":
                i = decode_significant(rep, body, i + 1, knots, levels, wind=True)
    elif rep.part in ("A", "C"):
        i = decode_pilot_standard(rep, body, knots, levels)
    else:
        i = decode_pilot_heights(rep, body, knots, levels, altitude_unit)
    skip_sections(rep, body, i)
    return levels


def valid_time(day, hour, reference):
    """The valid time of an ascent from its day and hour and a reference time in (or a day after) its month."""
    if reference is None:
        return None
    ref = pd.Timestamp(reference)
    if ref.tzinfo is not None:
        ref = ref.tz_convert("UTC").tz_localize(None)
    for months_back in (0, 1, 2):
        base = (ref.to_period("M") - months_back).to_timestamp()
        try:
            t = base.replace(day=day, hour=hour)
        except ValueError:
            continue
        if t <= ref + pd.Timedelta(days=1):
            return t
    return None


def merge_repeated_levels(rows):
    """One level per pressure, sorted by decreasing pressure: the first finite value of each variable in
    part order (A, C, B, D of the temperature parts, then the wind-only parts).

    A level repeated in several parts (the surface in A and B, a standard surface in 21212, a maximum-wind
    level on a standard surface) normally carries the same values; where they differ, the earlier part's
    value is kept (standard levels before significant ones) and the conflict is recorded. No value is
    averaged, so every value of the profile is one the report spelled. Plain Python: a profile has tens of
    levels, too few for numpy calls to pay.
    """
    merged, source, records = {}, {}, []
    for row in rows:
        p = row[0]
        cur = merged.get(p)
        if cur is None:
            merged[p] = row  # a tuple until a repeat needs it changed
            continue
        if p not in source:
            cur = merged[p] = list(cur)
            source[p] = [cur[6]] * 7
        src = source[p]
        for c in range(1, 6):
            v = row[c]
            if v != v:  # NaN
                continue
            old = cur[c]
            if old != old:
                cur[c] = v
                src[c] = row[6]
            elif abs(old - v) > 1e-6:
                records.append({"level": None, "action": "merged", "variable": _COLUMN_NAMES[c],
                                "pressure_hpa": float(p), "line": int(row[6]),
                                "reason": f"{p:g} hPa repeated with {_COLUMN_NAMES[c]} {v:g} (line {int(row[6])}) "
                                f"against {old:g} (line {int(src[c])}); kept {old:g}, from the part decoded "
                                "first (A, C, B, D)"})
    keys = sorted(merged, reverse=True)
    return np.array([merged[k] for k in keys], dtype=float).reshape(-1, 7), records


def _choose_reports(reports):
    """The reports of one part identifier of one ascent that count, and the records of those superseded.

    A correction (BBB ``CCx``, or an amendment ``AAx``) replaces every uncorrected report of the same part and
    every earlier correction (the highest letter wins, then the later in the file); retards (``RRx``) and
    repeats without a correction are kept and merged (their values normally agree; conflicts are recorded).
    """
    corrections = [r for r in reports if r[0].bbb[:2] in ("CC", "AA")]
    if not corrections:
        return reports, []
    best = max(corrections, key=lambda r: (r[0].bbb[2], r[0].order))
    records = []
    for r in reports:
        if r is best:
            continue
        rep = r[0]
        what = f"correction {rep.bbb}" if rep.bbb else "report"
        records.append({"level": None, "action": "superseded", "line": int(rep.line), "_k": int(rep.column),
                        "part": rep.ident, "reason": f"{rep.ident} {what} of line {rep.line} replaced by its "
                        f"correction {best[0].bbb} (line {best[0].line})"})
    return [best], records


def decode_temp_arrays(text: str, source: str = "<string>", reference_time=None, altitude_unit=ALTITUDE_UNIT_M):
    """Decode TEMP and PILOT text into merged ascents of plain arrays (the fast path, no Dataset built).

    Returns ``(ascents, records)``: ``ascents`` is a list of dicts with keys ``station``, ``day``, ``hour``,
    ``time`` (a Timestamp or None), ``form`` (TEMP, TEMP SHIP, TEMP DROP, TEMP MOBIL, PILOT ...),
    ``parts`` (the letters of the temperature parts seen), ``wind_parts`` (the letters of the PILOT parts),
    ``latitude``, ``longitude``, ``elevation`` (from the report for ship, drop and mobile forms, else NaN),
    ``surface_pressure`` (hPa), the float arrays ``pressure`` (hPa), ``height`` (m, NaN where not
    reported), ``temperature``, ``dewpoint`` (degC), ``wind_direction`` (deg), ``wind_speed`` (m/s), the int
    array ``line``, ``wind_by_height`` (a list of (height m above sea level or None for the surface,
    direction, speed, line, token index) of the winds reported by altitude, which need the ascent's pressure-height
    relation), ``quality`` (the skipped groups of its parts) and ``n_reports``; ``records`` lists what
    belongs to no ascent (undecodable reports, stray text). Levels are sorted by decreasing pressure, one
    per pressure: a level repeated in several parts keeps the first finite value of each variable in the
    order A, C, B, D (conflicts recorded). ``altitude_unit`` is the unit (m) of the PILOT altitudes
    9tnu1u2u3 (300 m in WMO-No. 306 FM 32, from memory; 304.8 where the practice is 1000 ft).

    The cyclic garbage collector is paused meanwhile: decoding makes many small tuples and no cycles, and
    the collector would otherwise walk them again and again.
    """
    enabled = gc.isenabled()
    gc.disable()
    try:
        return _decode_arrays(text, reference_time, float(altitude_unit))
    finally:
        if enabled:
            gc.enable()


def _decode_arrays(text, reference_time, altitude_unit):
    if len(INFO) > 200_000:  # the cache of group readings must not grow without bound
        INFO.clear()
    toks, lines, headings = text_tokens(text)
    reports, stray = split_reports(toks, headings)
    loose = []
    if stray:
        loose.append(skip(stray[0][1], stray[0][2], " ".join(s[0] for s in stray[:20]),
                          "text after the last report"))
    ascents = {}
    for rep in reports:
        levels = _decode_report(rep, altitude_unit)
        if levels is False:
            loose += [dict(e, station=rep.station) if rep.station else e for e in rep.records]
            continue
        key = (rep.station, rep.day, rep.hour)
        asc = ascents.get(key)
        if asc is None:
            asc = ascents[key] = {"reports": {}, "quality": [], "nil": [], "kinds": []}
        if rep.kind not in asc["kinds"]:
            asc["kinds"].append(rep.kind)
        if levels is None:
            asc["nil"] += rep.records
            continue
        asc["reports"].setdefault(rep.ident, []).append((rep, levels))
    result = []
    for (station, day, hour), asc in ascents.items():
        quality = []
        chosen = []
        for reps in asc["reports"].values():
            keep, superseded = _choose_reports(reps)
            quality += superseded
            for rep, _ in reps:
                quality += rep.records
            chosen += keep
        chosen.sort(key=lambda r: (not KINDS[r[0].kind][1], _PART_ORDER[r[0].part], r[0].order))
        if not chosen:
            result.append({"station": station, "day": day, "hour": hour, "nil_only": True,
                           "form": FORM_NAMES[asc["kinds"][0]], "quality": asc["nil"] + quality})
            continue
        rows, by_height = [], []
        surface = lat = lon = elev = np.nan
        for rep, lv in chosen:
            if not np.isfinite(surface):
                surface = lv.surface
            if not np.isfinite(lat) and np.isfinite(rep.latitude):
                lat, lon = rep.latitude, rep.longitude
            if not np.isfinite(elev) and np.isfinite(rep.elevation):
                elev = rep.elevation
            rows += lv.rows
            by_height += lv.by_height
        arr, merged = merge_repeated_levels(rows)
        cols = arr.T
        temp_kinds = [k for k in asc["kinds"] if KINDS[k][1]]
        form = FORM_NAMES[temp_kinds[0] if temp_kinds else asc["kinds"][0]]
        result.append({
            "station": station, "day": day, "hour": hour, "time": valid_time(day, hour, reference_time),
            "form": form, "nil_only": False,
            "parts": "".join(r.part for r, _ in chosen if KINDS[r.kind][1]),
            "wind_parts": "".join(r.part for r, _ in chosen if not KINDS[r.kind][1]),
            "latitude": lat, "longitude": lon, "elevation": elev,
            "pressure": np.asarray(cols[0], dtype=float), "height": np.asarray(cols[1], dtype=float),
            "temperature": np.asarray(cols[2], dtype=float), "dewpoint": np.asarray(cols[3], dtype=float),
            "wind_direction": np.asarray(cols[4], dtype=float), "wind_speed": np.asarray(cols[5], dtype=float),
            "line": np.asarray(cols[6], dtype=int), "wind_by_height": by_height,
            "surface_pressure": surface, "quality": asc["nil"] + quality + merged, "n_reports": len(chosen),
        })
    resolve_columns(loose, lines)
    for asc in result:
        resolve_columns(asc["quality"], lines)
    return [a for a in result if not a["nil_only"]], loose + [
        dict(e, station=a["station"]) for a in result if a["nil_only"] for e in a["quality"]]

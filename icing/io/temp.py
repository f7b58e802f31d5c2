"""Reader for FM 35 TEMP upper-air reports (WMO-No. 306, Manual on Codes, Volume I.1, Part A: alphanumeric codes).

Parts A, B, C and D (``TTAA``, ``TTBB``, ``TTCC``, ``TTDD``) of each ascent are decoded group by group into
plain arrays (:func:`decode_temp_arrays`, the fast path), the parts of one ascent (same station, day and hour)
are merged by pressure, and one canonical profile is built per ascent with
:func:`icing.profile.build_profile`. A group that cannot be decoded, or a section this reader does not use
(31313, 41414, regional 5xxxx groups), is skipped and listed in the profile's ``quality`` record with its
line and column; it is never fatal. Heights of significant levels (Parts B and D report none) are computed
by the hypsometric equation between the reported standard-level heights (done by ``build_profile``).

TEMP gives the day and hour only; pass ``reference_time`` (any date in the month of the ascent, or just
after it) to get full valid times. Station positions come from ``stations`` (a mapping
``{"00101": (lat, lon, elevation_m)}`` or the path of a CSV with columns
``station,name,latitude,longitude,elevation_m``); :func:`read` also uses a ``stations.csv`` lying next to
the file. Without one, position is NaN.

The regulation numbers cited below, code table 1734 (Id) and the height windows are from memory of
WMO-No. 306; code table 0777 and the sign-by-parity rule for temperatures are its well-known forms.
"""

from __future__ import annotations

import csv
import gc
import math
import re
from pathlib import Path

import numpy as np
import pandas as pd

from icing.errors import ProfileQualityError, SoundingFormatError
from icing.io import file_bytes
from icing.profile import build_profile

__all__ = ["FORMAT", "sniff", "read", "decode_temp", "decode_temp_arrays", "read_stations",
           "decode_temperature", "decode_dewpoint_depression", "decode_wind", "decode_standard_height"]

FORMAT = "temp"
KNOT = 1852.0 / 3600.0  # m/s per knot (exact)

_PARTS = {"TTAA": "A", "TTBB": "B", "TTCC": "C", "TTDD": "D"}
# Standard isobaric surfaces of Parts A and C (WMO-No. 306, FM 35, regulation 35.2.2): indicator -> hPa.
_STD_A = [("00", 1000.0), ("92", 925.0), ("85", 850.0), ("70", 700.0), ("50", 500.0), ("40", 400.0),
          ("30", 300.0), ("25", 250.0), ("20", 200.0), ("15", 150.0), ("10", 100.0)]
_STD_C = [("70", 70.0), ("50", 50.0), ("30", 30.0), ("20", 20.0), ("10", 10.0)]
# Id (code table 1734): the last standard surface with a wind group. Part A: hundreds of hPa (0 = 1000 hPa);
# Part C: tens of hPa. "/" means no standard surface carries wind.
_ID_A = {"0": 1000.0, "9": 925.0, "8": 850.0, "7": 700.0, "5": 500.0, "4": 400.0, "3": 300.0, "2": 200.0,
         "1": 100.0}
# Indicators that may follow the standard surface k: a later surface or sections 3-4 (88, 77, 66).
_LATER_A = [frozenset([ind for ind, _ in _STD_A[k:]] + ["88", "77", "66"]) for k in range(len(_STD_A) + 1)]
_LATER_C = [frozenset([ind for ind, _ in _STD_C[k:]] + ["88", "77", "66"]) for k in range(len(_STD_C) + 1)]
_INDEX_A = {ind: j for j, (ind, _) in enumerate(_STD_A)}
_INDEX_C = {ind: j for j, (ind, _) in enumerate(_STD_C)}
_ID_C = {"7": 70.0, "5": 50.0, "3": 30.0, "2": 20.0, "1": 10.0}
# Heights hhh drop the leading digits (regulation 35.2.2.x): metres up to 700 hPa, decametres above. The
# height is the one in [low, low + 1000 units) ending in hhh, the window chosen by climatology so that
# every surface's plausible range fits (850 hPa: +1000 m; 700 hPa: +2000 m for hhh >= 500 else +3000 m;
# 500 and 400 hPa: hhh dam; 300 and 250 hPa: +1000 dam below hhh 500; 200-100 hPa: +1000 dam).
_HEIGHT_RULE = {  # hPa: (unit in m, lower end of the window in m)
    925.0: (1.0, 100.0), 850.0: (1.0, 1000.0), 700.0: (1.0, 2500.0), 500.0: (10.0, 0.0),
    400.0: (10.0, 0.0), 300.0: (10.0, 5000.0), 250.0: (10.0, 5000.0), 200.0: (10.0, 5000.0),
    150.0: (10.0, 5000.0), 100.0: (10.0, 10000.0), 70.0: (10.0, 13000.0), 50.0: (10.0, 15000.0),
    30.0: (10.0, 18000.0), 20.0: (10.0, 20000.0), 10.0: (10.0, 25000.0),
}
_GROUP = re.compile(r"^[0-9/]{5}$")
_CHARS = "0123456789/"
_HEADING = re.compile(r"^[ \t]*(?:[A-Z]{4}\d{2}[ \t]+[A-Z]{4}[ \t]+\d{6}(?:[ \t]+[A-Z]{3})?|ZCZC.*|NNNN|\d{3,5})"
                      r"[ \t]*$", re.MULTILINE)
_TOKEN = re.compile(r"[^\s=]+|=")
_SNIFF = re.compile(rb"(?:^|[\s=])TT(?:AA|BB|CC|DD)\s+[0-9/]{5}\s+\d{5}", re.IGNORECASE)


# ---------------------------------------------------------------------------------------------------------
# Code tables: one small function each, the unit of every test against WMO-No. 306.

def decode_temperature(group: str) -> float:
    """Air temperature (degC) from the first three characters TTTa of a TTTaDD group.

    WMO-No. 306, FM 35, code for TTTa (regulation 35.2.2 / 12.2.1.1 convention): TT whole degrees, Ta the
    tenths; an even tenths digit means a positive (or zero) temperature, an odd one a negative temperature.
    Returns NaN for slashes; raises ValueError for anything else that is not three digits.
    """
    s = group[:3]
    if s == "///":
        return np.nan
    if not s.isdigit():
        raise ValueError(f"temperature {s!r} is not three digits")
    tenths = int(s[2])
    value = int(s[:2]) + tenths / 10.0
    return -value if tenths % 2 else value


def decode_dewpoint_depression(dd: str) -> float:
    """Dewpoint depression (K) from DD, WMO-No. 306 code table 0777.

    00-50: tenths of a degree, 0.0-5.0; 51-55: not used (ValueError); 56-99: whole degrees, DD - 50, so
    6-49 K. ``//`` is missing (NaN).
    """
    if dd == "//":
        return np.nan
    if not dd.isdigit() or len(dd) != 2:
        raise ValueError(f"dewpoint depression {dd!r} is not two digits")
    v = int(dd)
    if v <= 50:
        return v / 10.0
    if v <= 55:
        raise ValueError(f"dewpoint depression {dd} is not used in code table 0777")
    return float(v - 50)


def decode_wind(group: str, knots: bool) -> tuple[float, float]:
    """(direction deg, speed m/s) from a dddff wind group, WMO-No. 306 FM 35 (regulation 35.2.2 and the
    dddff convention of the Manual on Codes).

    dd is the direction in tens of degrees; the units digit of the direction (0 or 5) is added to the
    hundreds digit of the speed, so a third digit of 5-9 means direction +5 and speed (digit - 5) * 100 +
    ff; 0-4 means speed digit * 100 + ff. Speeds are in knots or m/s per the day group (YY + 50 = knots).
    ``/////`` is missing (NaN, NaN); a direction above 360 raises ValueError.
    """
    if group == "/////":
        return np.nan, np.nan
    if not group.isdigit():
        raise ValueError(f"wind group {group!r} is not five digits")
    x = int(group[2])
    direction = int(group[:2]) * 10 + (5 if x >= 5 else 0)
    speed = (x % 5) * 100 + int(group[3:])
    if direction > 360:
        raise ValueError(f"wind direction {direction} deg above 360")
    if direction == 0 and speed != 0:
        raise ValueError("wind direction 000 with a non-zero speed")
    return float(direction), speed * (KNOT if knots else 1.0)


def decode_standard_height(pressure_hpa: float, hhh: str) -> float:
    """Geopotential height (m) of a standard isobaric surface from its three-digit hhh, WMO-No. 306 FM 35
    regulation 35.2.2 (heights of standard surfaces with leading digits omitted).

    1000 hPa: metres, with 500 added to the absolute value of a negative height (hhh 500-999 are negative
    heights). 925-700 hPa: metres; 500 hPa and above: decametres; the omitted leading digits are restored
    by the climatological window of each surface (see ``_HEIGHT_RULE``). ``///`` is NaN.
    """
    if hhh == "///":
        return np.nan
    if not hhh.isdigit():
        raise ValueError(f"height {hhh!r} is not three digits")
    v = int(hhh)
    if pressure_hpa == 1000.0:
        return float(v) if v < 500 else -float(v - 500)
    unit, low = _HEIGHT_RULE[pressure_hpa]
    span = 1000.0 * unit
    h = v * unit
    return float(h + span * math.ceil((low - h) / span))


def _surface_pressure(ppp: str) -> float:
    """Pressure (hPa) from a three-digit PPP in whole hPa with the thousands digit omitted."""
    v = int(ppp)
    return float(v + 1000 if v < 100 else v)


# ---------------------------------------------------------------------------------------------------------
# Tokens and reports

class _Report:
    __slots__ = ("part", "tokens", "line", "column", "records", "dirty")

    def __init__(self, part, line, column):
        self.part, self.line, self.column = part, line, column
        self.dirty = False  # holds a token that is not a five-character group
        self.tokens = []  # (text, line, column)
        self.records = []


def _tokens(text):
    """Upper-cased tokens of the text as (token, 1-based line, index of the token in its line), and the
    lines; bulletin headings are blanked. Columns are worked out only for the groups that get recorded."""
    text = text.upper().replace("\r", " ").replace("\x01", " ").replace("\x03", " ").replace("\x1e", " ")
    text = _HEADING.sub(lambda m: " " * len(m.group()), text)
    lines = text.split("\n")
    out = []
    append = out.append
    for ln, line in enumerate(lines, 1):
        if "=" in line:
            line = line.replace("=", " = ")
        for k, tok in enumerate(line.split()):
            append((tok, ln, k))
    return out, lines


def _resolve_columns(records, lines):
    """Turn the token index kept in each record into a 1-based character column."""
    cache = {}
    for e in records:
        k = e.pop("_k", None)
        if k is None or e.get("line") is None:
            continue
        ln = e["line"]
        if ln not in cache:
            cache[ln] = [m.start() + 1 for m in _TOKEN.finditer(lines[ln - 1])] if ln <= len(lines) else []
        starts = cache[ln]
        e["column"] = starts[k] if k < len(starts) else None


def _split_reports(tokens):
    """Group tokens into reports: a part identifier starts one, '=' or the next identifier ends it."""
    reports, stray, cur = [], [], None
    parts, chars = _PARTS, _CHARS
    for item in tokens:
        tok = item[0]
        if cur is not None and len(tok) == 5 and not tok.strip(chars):
            cur.tokens.append(item)
        elif tok in parts:
            if cur is not None:
                reports.append(cur)
            cur = _Report(parts[tok], item[1], item[2])
            if stray:
                cur.records.append(_skip(stray[0][1], stray[0][2], " ".join(s[0] for s in stray),
                                         "text outside any TEMP report (before its part identifier)"))
                stray = []
        elif tok == "=":
            if cur is not None:
                reports.append(cur)
                cur = None
        elif cur is None:
            stray.append(item)
        else:
            cur.tokens.append(item)
            cur.dirty = True
    if cur is not None:
        reports.append(cur)
    return reports, stray


def _skip(line, k, group, reason, part=None):
    """A quality entry for a skipped group at token ``k`` of ``line`` (the column is filled in later)."""
    entry = {"level": None, "action": "skipped", "reason": reason, "line": int(line), "_k": int(k),
             "group": group}
    if part:
        entry["part"] = part
    return entry


def _clean_groups(rep):
    """Join groups split by a stray space; record and drop groups that are not five digits or slashes."""
    toks, out, i = rep.tokens, [], 0
    name = "TT" + rep.part * 2
    while i < len(toks):
        tok, ln, col = toks[i]
        if (len(tok) == 5 and not tok.strip(_CHARS)) or tok == "NIL":
            out.append(toks[i])
            i += 1
            continue
        if (len(tok) < 5 and i + 1 < len(toks) and len(tok) + len(toks[i + 1][0]) == 5
                and _GROUP.match(tok + toks[i + 1][0])):
            joined = tok + toks[i + 1][0]
            rep.records.append(_skip(ln, col, f"{tok} {toks[i + 1][0]}",
                                     f"group split by a space, read as {joined}", name))
            out.append((joined, ln, col))
            i += 2
            continue
        rep.records.append(_skip(ln, col, tok, "not a five-character group of digits or slashes", name))
        i += 1
    rep.tokens = out


# ---------------------------------------------------------------------------------------------------------
# Parts

class _Levels:
    """Decoded levels of one part as parallel lists (the fast path: plain floats, no Dataset)."""

    __slots__ = ("rows", "surface")

    def __init__(self):
        self.surface = np.nan
        self.rows = []  # (pressure, height, temperature, dewpoint, direction, speed, line)

    def add(self, p, z=np.nan, t=np.nan, td=np.nan, wd=np.nan, ws=np.nan, line=-1):
        self.rows.append((p, z, t, td, wd, ws, line))


def _is_section(tok):
    """Section indicators 21212, 31313, 41414 and the regional 51515 ... 59595 (not 50505: a 500 hPa
    height of 5050 m is written 50505)."""
    return tok in ("21212", "31313", "41414") or (tok[0] == "5" and tok[1] != "0" and tok[:2] * 2 + tok[0] == tok)


class _Info(dict):
    """Every reading of a group, worked out once per distinct group of a file (groups repeat a lot):
    (temperature, its error, depression, its error, direction, speed in report units, wind error,
    PPP as int or -1, plausible as TTTaDD, plausible as dddff, section indicator, PPP as hPa with the
    thousands digit restored or None, PPP as tenths of hPa or None)."""

    def __missing__(self, tok):
        try:
            t, t_err = decode_temperature(tok), None
        except ValueError as exc:
            t, t_err = np.nan, str(exc)
        try:
            dd, dd_err = decode_dewpoint_depression(tok[3:]), None
        except ValueError as exc:
            dd, dd_err = np.nan, str(exc)
        try:
            wd, ws = decode_wind(tok, False)
            w_err = None
        except ValueError as exc:
            wd, ws, w_err = np.nan, np.nan, str(exc)
        ppp = int(tok[2:]) if tok[2:].isdigit() else -1
        plausible_t = tok == "/////" or (t_err is None and (dd_err is None or tok[3:] == "//"))
        plausible_t = plausible_t and not (tok[3:].isdigit() and 51 <= int(tok[3:]) <= 55)
        plausible_w = w_err is None or (tok.isdigit() and int(tok[:2]) * 10 + (5 if int(tok[2]) >= 5 else 0) <= 360)
        p_whole = float(ppp + 1000 if ppp < 100 else ppp) if ppp >= 0 else None
        p_tenths = ppp / 10.0 if ppp > 0 else None
        info = (t, t_err, dd, dd_err, wd, ws, w_err, ppp, plausible_t, plausible_w, _is_section(tok), p_whole,
                p_tenths)
        self[tok] = info
        return info


_INFO = _Info()  # shared by all decodes; bounded by clearing when large (see decode_temp_arrays)


def _what(what, p):
    return what if p is None else f"{p:g} hPa {what}"


def _temp_group(tok, ln, col, rep, name, what, p=None):
    """(t, td) from TTTaDD, recording what cannot be decoded (the message is only formatted then)."""
    t, t_err, dd, dd_err = _INFO[tok][:4]
    if t_err is not None:
        rep.records.append(_skip(ln, col, tok, f"{_what(what, p)}: {t_err}", name))
        return nan, nan
    if dd_err is not None:
        rep.records.append(_skip(ln, col, tok, f"{_what(what, p)}: {dd_err}; dewpoint dropped", name))
    return t, t - dd


def _wind_group(tok, ln, col, rep, name, knots, what, p=None):
    info = _INFO[tok]
    if info[6] is not None:
        rep.records.append(_skip(ln, col, tok, f"{_what(what, p)}: {info[6]}", name))
        return nan, nan
    return info[4], info[5] * KNOT if knots else info[5]


def _plausible_temp(tok):
    return _INFO[tok][8]


def _plausible_wind(tok):
    return _INFO[tok][9]


def _decode_standard(rep, body, knots, id_p, levels, tenths):
    """Section 2 (surface and standard surfaces) and sections 3-4 (tropopause, maximum wind) of Part A or C."""
    name = "TT" + rep.part * 2
    std = _STD_A if rep.part == "A" else _STD_C
    n, i, k = len(body), 0, 0
    surface_p = np.inf

    later = _LATER_A if rep.part == "A" else _LATER_C
    index = _INDEX_A if rep.part == "A" else _INDEX_C

    def follows(pos, k_next):
        if pos >= n:
            return True
        tok = body[pos][0]
        return tok[:2] in later[k_next] or _INFO[tok][10]

    if rep.part == "A" and n and body[0][0][:2] == "99":
        tok, ln, col = body[0]
        ok = n >= 3 and tok[2:].isdigit()
        if ok:
            surface_p = _surface_pressure(tok[2:])
            t, td = _temp_group(*body[1], rep, name, "surface temperature")
            wd, ws = _wind_group(*body[2], rep, name, knots, "surface wind")
            levels.add(surface_p, np.nan, t, td, wd, ws, ln)
            levels.surface = surface_p
            i = 3
        else:
            rep.records.append(_skip(ln, col, tok, "surface group 99PPP without a pressure", name))
            i = 1
    while i < n:
        tok, ln, col = body[i]
        ind = tok[:2]
        if ind in ("88", "77", "66") or _is_section(tok):
            break
        j = index.get(ind)
        if j is None or j < k:
            rep.records.append(_skip(ln, col, tok, "not the indicator of a standard isobaric surface expected "
                                     "here", name))
            i += 1
            continue
        p = std[j][1]
        want = 3 if p >= id_p else 2
        size = None
        for s in (want, 5 - want):  # the expected group count first, then one group more or less
            if i + s > n or not _plausible_temp(body[i + 1][0]):
                continue
            if s == 3 and not _plausible_wind(body[i + 2][0]):
                continue
            if follows(i + s, j + 1):
                size = s
                break
        if size is None:
            size = min(want, n - i)
        if size < want:
            rep.records.append(_skip(ln, col, tok, f"{p:g} hPa level has {size - 1} data group(s) where "
                                     f"{want - 1} were expected; a group is missing", name))
        elif size > want:
            rep.records.append(_skip(ln, col, tok, f"{p:g} hPa level has a wind group although it is above "
                                     "the last level with winds (Id); read as wind", name))
        try:
            z = decode_standard_height(p, tok[2:])
        except ValueError as exc:
            rep.records.append(_skip(ln, col, tok, f"{p:g} hPa height: {exc}", name))
            z = np.nan
        t = td = wd = ws = nan
        if size >= 2:
            dinf = _INFO[body[i + 1][0]]
            if dinf[1] is None and dinf[3] is None:  # the common case inline; _temp_group records the rest
                t, td = dinf[0], dinf[0] - dinf[2]
            else:
                t, td = _temp_group(*body[i + 1], rep, name, "temperature", p)
        if size >= 3:
            dinf = _INFO[body[i + 2][0]]
            if dinf[6] is None:
                wd, ws = dinf[4], dinf[5] * KNOT if knots else dinf[5]
            else:
                wd, ws = _wind_group(*body[i + 2], rep, name, knots, "wind", p)
        if p > surface_p:
            if np.isfinite(t) or np.isfinite(ws):
                rep.records.append(_skip(ln, col, tok, f"{p:g} hPa is below the surface "
                                         f"({surface_p:g} hPa) but carries data; dropped", name))
            else:
                rep.records.append(_skip(ln, col, tok, f"{p:g} hPa is below the surface ({surface_p:g} hPa); "
                                         "its extrapolated height is not a measurement", name))
        else:
            levels.add(p, z, t, td, wd, ws, ln)
        k = j + 1
        i += size
    # Sections 3 and 4: tropopause 88PPP TTTaDD dddff, maximum wind 77PPP/66PPP dddff (4vbvbvava).
    while i < n:
        tok, ln, col = body[i]
        ind = tok[:2]
        if ind == "88" or ind in ("77", "66"):
            if tok[2:] == "999":
                i += 1
                continue
            if not tok[2:].isdigit() or int(tok[2:]) == 0:
                rep.records.append(_skip(ln, col, tok, "tropopause or maximum-wind pressure not decodable",
                                         name))
                i += 1
                continue
            p = int(tok[2:]) / 10.0 if tenths else float(int(tok[2:]))
            if ind == "88":
                if i + 2 >= n:
                    rep.records.append(_skip(ln, col, tok, "tropopause group cut short", name))
                    break
                t, td = _temp_group(*body[i + 1], rep, name, "tropopause temperature")
                wd, ws = _wind_group(*body[i + 2], rep, name, knots, "tropopause wind")
                if p < surface_p:
                    levels.add(p, np.nan, t, td, wd, ws, ln)
                else:
                    rep.records.append(_skip(ln, col, tok, f"tropopause at {p:g} hPa not above the surface "
                                             f"({surface_p:g} hPa); dropped", name))
                i += 3
            else:
                if i + 1 >= n:
                    rep.records.append(_skip(ln, col, tok, "maximum-wind group cut short", name))
                    break
                wd, ws = _wind_group(*body[i + 1], rep, name, knots, "maximum wind")
                if p < surface_p:
                    levels.add(p, np.nan, np.nan, np.nan, wd, ws, ln)
                else:
                    rep.records.append(_skip(ln, col, tok, f"maximum wind at {p:g} hPa not above the surface "
                                             f"({surface_p:g} hPa); dropped", name))
                i += 2
                if i < n and body[i][0][0] == "4" and not _is_section(body[i][0]):
                    rep.records.append(_skip(body[i][1], body[i][2], body[i][0],
                                             "wind-shear group 4vbvbvava (vertical wind shear) not used", name))
                    i += 1
            continue
        break
    return i


_NN = ["11", "22", "33", "44", "55", "66", "77", "88", "99"]


def _decode_significant(rep, body, start, knots, levels, tenths, wind):
    """nnPPP + TTTaDD (or dddff after 21212) pairs of Parts B and D; returns the index after them.

    nn runs 00 (surface, Part B only), 11, 22, ... 99, 11, ... and PPP decreases upward (regulation
    35.2.3). A pair is taken only where nn, the pressure order and the group after it agree, so that a
    missing group shifts nothing: the groups out of place are recorded and skipped.
    """
    name = "TT" + rep.part * 2
    what = "significant wind level" if wind else "significant level"
    n, i = len(body), start
    last_p = np.inf
    allowed = ("00", "11")

    info = _INFO
    data_ok = 9 if wind else 8
    pk = 12 if tenths else 11  # index of the pressure reading in the group info
    toks = [b[0] for b in body]
    rows = levels.rows
    while i < n:
        tok = toks[i]
        inf = info[tok]
        # 55555 is both the regional section indicator and the level nn = 55 at 555 hPa: a level if it fits.
        maybe_section = inf[10]
        if maybe_section and not (tok == "55555" and "55" in allowed):
            break
        nn = tok[:2]
        p = inf[pk] if nn in allowed else None
        if p is not None and not (p < last_p and i + 1 < n and info[toks[i + 1]][data_ok]):
            p = None
        if p is not None and i + 2 < n:
            nxt = toks[i + 2]
            ninf = info[nxt]
            following = _NEXT_NN.get(nn, "11")
            p2 = ninf[pk]
            if not (ninf[10] or (nxt[:2] == following and p2 is not None and p2 < p)):
                # The group after the pair is not the next level: accept unless the data group itself looks
                # like the next level (then this level lost its data group; pairing would shift the rest).
                dat = toks[i + 1]
                p1 = info[dat][pk]
                if dat[:2] == following and p1 is not None and p1 < p:
                    p = None
        if p is None and maybe_section:
            break
        if p is None:
            _, ln, col = body[i]
            rep.records.append(_skip(ln, col, tok, f"group out of place in the {what}s (expected nnPPP "
                                     "then a data group); skipped", name))
            if len(allowed) < 4:
                allowed = allowed + (_next_nn(allowed[-1]),)
            i += 1
            continue
        ln = body[i][1]
        dinf = info[toks[i + 1]]
        if wind:
            if dinf[6] is None:  # the common case inline; _wind_group records the rest
                wd, ws = dinf[4], dinf[5] * KNOT if knots else dinf[5]
            else:
                wd, ws = _wind_group(*body[i + 1], rep, name, knots, "significant-level wind")
            rows.append((p, nan, nan, nan, wd, ws, ln))
        else:
            if dinf[1] is None and dinf[3] is None:
                t, td = dinf[0], dinf[0] - dinf[2]
            else:
                t, td = _temp_group(*body[i + 1], rep, name, "significant-level temperature")
            rows.append((p, nan, t, td, nan, nan, ln))
        if nn == "00":
            levels.surface = p
        last_p = p
        allowed = (_NEXT_NN.get(nn, "11"),)
        i += 2
    return i


def _next_nn(nn):
    return "11" if nn in ("00", "99") or nn not in _NN else _NN[_NN.index(nn) + 1]


_NEXT_NN = {nn: _next_nn(nn) for nn in ["00"] + _NN}
nan = np.nan


def _skip_sections(rep, body, i):
    """Record sections 7-10 (31313, 41414, regional 5xxxx) and anything left, as skipped groups."""
    name = "TT" + rep.part * 2
    n = len(body)
    reasons = {"31313": "section 31313 (sonde, system and launch time) not used",
               "41414": "section 41414 (cloud data) not used", "21212": "section 21212 out of place"}
    while i < n:
        tok, ln, col = body[i]
        j = i + 1
        while j < n and not _is_section(body[j][0]):
            j += 1
        if _is_section(tok):
            reason = reasons.get(tok, f"regional section {tok} not used")
        else:
            reason = "groups after the last section this reader decodes"
        rep.records.append(_skip(ln, col, " ".join(b[0] for b in body[i:j]), reason, name))
        i = j


def _decode_report(rep, reference):
    """Decode one part into (key, levels, knots, meta) or None (NIL / undecodable; recorded)."""
    name = "TT" + rep.part * 2
    if rep.dirty:
        _clean_groups(rep)
    toks = rep.tokens
    if any(t[0] == "NIL" for t in toks[:3]):
        rep.records.append({"level": None, "action": "nil", "reason": f"NIL report ({name}): no data",
                            "line": int(rep.line), "_k": int(rep.column), "part": name})
        ok = len(toks) >= 2 and toks[0][0][:4].isdigit() and toks[1][0].isdigit()
        if not ok:
            return None
        yy = int(toks[0][0][:2])
        return (toks[1][0], yy - 50 if yy > 50 else yy, int(toks[0][0][2:4])), None
    if len(toks) < 2:
        rep.records.append(_skip(rep.line, rep.column, name, "report has no section 1 (YYGGI and IIiii)", name))
        return None
    (g1, ln1, c1), (g2, _, _) = toks[0], toks[1]
    if not (g1[:4].isdigit() and g2.isdigit()):
        rep.records.append(_skip(ln1, c1, f"{g1} {g2}", "section 1 is not YYGGI IIiii digits; report skipped",
                                 name))
        return None
    yy, gg = int(g1[:2]), int(g1[2:4])
    knots = yy > 50
    day = yy - 50 if knots else yy
    if not (1 <= day <= 31 and 0 <= gg <= 23):
        rep.records.append(_skip(ln1, c1, g1, f"day {day} or hour {gg} out of range; report skipped", name))
        return None
    station = g2
    key = (station, day, gg)
    levels = _Levels()
    body = toks[2:]
    if rep.part in ("A", "C"):
        ind = g1[4]
        table = _ID_A if rep.part == "A" else _ID_C
        if ind == "/":
            id_p = np.inf
        elif ind in table:
            id_p = table[ind]
        else:
            rep.records.append(_skip(ln1, c1, g1, f"Id {ind!r} not in code table 1734; no winds assumed",
                                     name))
            id_p = np.inf
        i = _decode_standard(rep, body, knots, id_p, levels, tenths=rep.part == "C")
    else:
        i = _decode_significant(rep, body, 0, knots, levels, tenths=rep.part == "D", wind=False)
        if i < len(body) and body[i][0] == "21212":
            i = _decode_significant(rep, body, i + 1, knots, levels, tenths=rep.part == "D", wind=True)
    _skip_sections(rep, body, i)
    return key, levels


def _valid_time(day, hour, reference):
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


_COLUMN_NAMES = ("pressure", "height", "temperature", "dewpoint", "wind_direction", "wind_speed")


def _merge_repeated_levels(rows):
    """One level per pressure, sorted by decreasing pressure: the first finite value of each variable in
    part order (A, C, B, D).

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


def decode_temp_arrays(text: str, source: str = "<string>", reference_time=None):
    """Decode TEMP text into merged ascents of plain arrays (the fast path, no Dataset built).

    Returns ``(ascents, records)``: ``ascents`` is a list of dicts with keys ``station``, ``day``, ``hour``,
    ``time`` (a Timestamp or None), ``parts`` (the part letters seen), ``surface_pressure`` (hPa), the float
    arrays ``pressure`` (hPa), ``height`` (m, NaN where not reported), ``temperature``, ``dewpoint`` (degC),
    ``wind_direction`` (deg), ``wind_speed`` (m/s), the int array ``line``, ``quality`` (the skipped groups
    of its parts) and ``n_reports``; ``records`` lists what belongs to no ascent (NIL reports, undecodable
    reports, stray text). Levels are sorted by decreasing pressure, one per pressure: a level repeated in
several parts keeps the first finite value of each variable in the order A, C, B, D (conflicts recorded).

    The cyclic garbage collector is paused meanwhile: decoding makes many small tuples and no cycles, and
    the collector would otherwise walk them again and again.
    """
    enabled = gc.isenabled()
    gc.disable()
    try:
        return _decode_arrays(text, source, reference_time)
    finally:
        if enabled:
            gc.enable()


def _decode_arrays(text, source, reference_time):
    if len(_INFO) > 200_000:  # the cache of group readings must not grow without bound
        _INFO.clear()
    tokens, lines = _tokens(text)
    reports, stray = _split_reports(tokens)
    loose = []
    if stray:
        loose.append(_skip(stray[0][1], stray[0][2], " ".join(s[0] for s in stray[:20]),
                           "text after the last TEMP report"))
    ascents = {}
    for rep in reports:
        out = _decode_report(rep, reference_time)
        if out is None:
            loose += rep.records
            continue
        key, levels = out
        asc = ascents.get(key)
        if asc is None:
            asc = ascents[key] = {"parts": {}, "quality": [], "nil": []}
        if levels is None:
            asc["nil"] += rep.records
            continue
        asc["quality"] += rep.records
        asc["parts"].setdefault(rep.part, []).append(levels)
    result = []
    order = {"A": 0, "C": 1, "B": 2, "D": 3}  # standard levels first: they win where pressures repeat
    for (station, day, hour), asc in ascents.items():
        parts = sorted(asc["parts"].items(), key=lambda kv: order[kv[0]])
        if not parts:
            loose += asc["nil"]
            continue
        rows = []
        surface = np.nan
        for _, lvls in parts:
            for lv in lvls:
                if not np.isfinite(surface):
                    surface = lv.surface
                rows += lv.rows
        arr, merged = _merge_repeated_levels(rows)
        cols = dict(zip(("p", "z", "t", "td", "wd", "ws", "line"), arr.T, strict=True))
        result.append({
            "station": station, "day": day, "hour": hour, "time": _valid_time(day, hour, reference_time),
            "parts": "".join(p for p, _ in parts), "pressure": np.asarray(cols["p"], dtype=float),
            "height": np.asarray(cols["z"], dtype=float), "temperature": np.asarray(cols["t"], dtype=float),
            "dewpoint": np.asarray(cols["td"], dtype=float),
            "wind_direction": np.asarray(cols["wd"], dtype=float),
            "wind_speed": np.asarray(cols["ws"], dtype=float), "line": np.asarray(cols["line"], dtype=int),
            "surface_pressure": surface, "quality": asc["nil"] + asc["quality"] + merged,
            "n_reports": sum(len(v) for _, v in parts),
        })
    _resolve_columns(loose, lines)
    for asc in result:
        _resolve_columns(asc["quality"], lines)
    return result, loose


# ---------------------------------------------------------------------------------------------------------
# Stations, profiles, the reader interface

def read_stations(path) -> dict:
    """Station table from a CSV with columns station,name,latitude,longitude,elevation_m."""
    out = {}
    with open(path, newline="", encoding="utf-8") as fh:
        rows = csv.DictReader(line for line in fh if not line.startswith("#"))
        for n, row in enumerate(rows, start=2):
            try:
                out[row["station"].strip()] = (float(row["latitude"]), float(row["longitude"]),
                                               float(row["elevation_m"]) if row.get("elevation_m") else np.nan)
            except (KeyError, TypeError, ValueError) as exc:
                raise SoundingFormatError(f"station table row not station,name,latitude,longitude,"
                                          f"elevation_m: {exc}", file=path, line=n) from exc
    return out


def decode_temp(text: str, source: str = "<string>", stations=None, reference_time=None) -> list:
    """Decode TEMP text (any number of reports, parts A-D, optional bulletin headings) into profiles.

    Parameters
    ----------
    text : str
        The reports.
    source : str
        Name used in the profiles' ``source`` attribute and in error messages.
    stations : mapping or path, optional
        ``{"00101": (latitude, longitude, elevation_m)}`` or a station CSV; elevation anchors the surface.
    reference_time : datetime-like, optional
        A time in (or within a day after) the month of the ascents; TEMP itself gives day and hour only.

    Returns
    -------
    list of xarray.Dataset
        One canonical profile per ascent, with every skipped group in ``attrs["quality"]``.

    Raises
    ------
    SoundingFormatError
        The text holds no TEMP report, only NIL reports, or no ascent with two usable levels.
    """
    if stations is not None and not hasattr(stations, "get"):
        stations = read_stations(stations)
    stations = stations or {}
    ascents, loose = decode_temp_arrays(text, source, reference_time)
    profiles = []
    for asc in ascents:
        lat, lon, elev = stations.get(asc["station"], (np.nan, np.nan, np.nan))
        z = asc["height"]
        quality = list(asc["quality"])
        if np.isfinite(elev) and np.isfinite(asc["surface_pressure"]):
            z = np.where((asc["pressure"] == asc["surface_pressure"]) & ~np.isfinite(z), elev, z)
        if reference_time is None:
            quality.append({"level": None, "action": "note", "reason": f"valid time unknown: TEMP gives day "
                            f"{asc['day']} hour {asc['hour']:02d} UTC only (pass reference_time)"})
        try:
            ds = build_profile(asc["pressure"], asc["temperature"], height=z, dewpoint=asc["dewpoint"],
                               wind_speed=asc["wind_speed"], wind_direction=asc["wind_direction"],
                               station=asc["station"], latitude=lat, longitude=lon, elevation=elev,
                               time=asc["time"], source=source, format=FORMAT, lines=asc["line"],
                               quality=quality)
        except ProfileQualityError as exc:
            loose.append({"level": None, "action": "skipped", "station": asc["station"],
                          "reason": f"ascent {asc['station']} day {asc['day']} {asc['hour']:02d} UTC "
                          f"(parts {asc['parts']}): {exc.reason}"})
            continue
        ds.attrs["temp_parts"] = asc["parts"]
        profiles.append(ds)
    if not profiles:
        if any(e.get("action") == "nil" for e in loose) and all(
                e.get("action") in ("nil", "note") for e in loose):
            raise SoundingFormatError("the file holds only NIL TEMP reports (no data)", file=source)
        reasons = "; ".join(e["reason"] for e in loose[:3]) or "no TTAA/TTBB/TTCC/TTDD report found"
        first = next((e for e in loose if e.get("line")), {})
        raise SoundingFormatError(f"no decodable TEMP ascent: {reasons}", file=source, line=first.get("line"),
                                  column=first.get("column"))
    if loose:
        profiles[0].attrs["quality"] = list(profiles[0].attrs["quality"]) + [
            dict(e, scope="file") for e in loose]
    return profiles


def sniff(head: bytes, path) -> bool:
    """True if the start of the file holds a TEMP part identifier followed by section 1."""
    return b"\x00" not in head and _SNIFF.search(head) is not None


def read(path, stations=None, reference_time=None, **options) -> list:
    """Every ascent in a TEMP file as a canonical profile (see :func:`decode_temp`).

    A ``stations.csv`` next to the file is used when ``stations`` is not given.
    """
    path = Path(path)
    raw = file_bytes(path, "TEMP", options)
    if b"\x00" in raw:
        raise SoundingFormatError("binary data in a TEMP text file", file=path)
    text = raw.decode("latin-1")
    if stations is None and (path.parent / "stations.csv").exists():
        stations = path.parent / "stations.csv"
    return decode_temp(text, source=str(path), stations=stations, reference_time=reference_time)

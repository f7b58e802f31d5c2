"""GTS framing, bulletin headings and the splitting of text into reports, with section 1 of every form.

What arrives over the GTS is wrapped: SOH/ETX control characters, ``ZCZC nnn`` ... ``NNNN``, a channel
sequence number on its own line, and the abbreviated heading ``TTAAii CCCC YYGGgg [BBB]`` (WMO-No. 386,
Manual on the GTS, from memory), sometimes followed by national identifiers on the same line. All of it is
skipped wherever it stands; a heading's BBB (``CCx`` correction, ``RRx`` retard, ``AAx`` amendment) is kept
with every report of its bulletin, since it decides what supersedes what (see ascents.py).

Part identifiers MiMiMjMj (WMO-No. 306, FM 32-38, section 1): TT land TEMP, UU TEMP SHIP, XX TEMP DROP, II
TEMP MOBIL; PP land PILOT, QQ PILOT SHIP, EE PILOT MOBIL; then AA, BB, CC, DD for Parts A-D.
"""

from __future__ import annotations

import bisect
import re

from icing.io.temp.codes import decode_mobile_elevation, decode_position, is_section, nan

__all__ = ["KINDS", "FORM_NAMES", "Report", "tokens", "split_reports", "skip", "resolve_columns",
           "clean_groups", "section_one"]

# MiMi -> (form name, has temperature, carries a position, carries an elevation, call sign before YYGG)
KINDS = {"TT": ("TEMP", True), "UU": ("TEMP SHIP", True), "XX": ("TEMP DROP", True), "II": ("TEMP MOBIL", True),
         "PP": ("PILOT", False), "QQ": ("PILOT SHIP", False), "EE": ("PILOT MOBIL", False)}
FORM_NAMES = {k: v[0] for k, v in KINDS.items()}
PART_IDS = {m + p * 2: (m, p) for m in KINDS for p in "ABCD"}
CHARS = "0123456789/"
_BBB = re.compile(r"^(?:CC|RR|AA|PA|PB|PC)[A-Z]$")
# The heading line T1T2A1A2ii CCCC YYGGgg [BBB] [national identifiers...] (only ASCII letters and digits).
_HEADING = re.compile(r"(?m)^[ \t=]*[A-Z]{4}\d{2}[ \t]+[A-Z]{4}[ \t]+\d{6}\b([^\n]*)$")
_PART_IN_LINE = re.compile(r"\b(?:TT|UU|XX|II|PP|QQ|EE)(?:AA|BB|CC|DD)\b")
_FRAMING = re.compile(r"ZCZC(?:[ \t]*\d{1,5}\b)?|NNNN")
_SEQUENCE = re.compile(r"(?m)^[ \t]*(?:\d{3}|\*{4}\d{4,12}\*{4})[ \t]*$")  # channel numbers, ****nnnn****
# Control characters: SOH and ETX end a message (read as '='); the others are spaces.
_CONTROL = {c: " " for c in range(32) if c != 10}
_CONTROL.update({1: "=", 3: "=", 4: "="})
_TOKEN = re.compile(r"[^\s=]+|=")
_FREE_TEXT_SECTIONS = {"61616": "regional section 61616 (aircraft and mission) not used",
                       "62626": "regional section 62626 (drop remarks) not used"}


class Report:
    """The tokens of one part as it stands in the text, and what section 1 said."""

    __slots__ = ("kind", "part", "ident", "tokens", "line", "column", "records", "dirty", "bbb", "station",
                 "day", "hour", "knots", "indicator", "latitude", "longitude", "elevation", "order")

    def __init__(self, ident, line, column, bbb, order):
        self.kind, self.part = PART_IDS[ident]
        self.ident = ident
        self.line, self.column, self.bbb, self.order = line, column, bbb, order
        self.dirty = False  # holds a token that is not a five-character group
        self.tokens = []  # (text, line, index of the token in its line)
        self.records = []
        self.station = None
        self.latitude = self.longitude = self.elevation = nan


def tokens(text):
    """Upper-cased tokens of the text as (token, 1-based line, index of the token in its line), the lines,
    and the bulletin headings as a sorted list of (line, BBB or "") with GTS framing blanked."""
    text = text.upper().translate(_CONTROL)
    headings = []
    if "\n" in text or _HEADING.search(text):
        def heading(m):
            rest = m.group(1)
            part = _PART_IN_LINE.search(rest)
            line = text.count("\n", 0, m.start()) + 1
            national = rest[:part.start()] if part else rest
            bbb = next((w for w in national.split() if _BBB.match(w)), "")
            headings.append((line, bbb))
            keep = rest[part.start():] if part else ""
            # The heading ends any report before it ('=' at its start); a report on the same line stays.
            return "=" + " " * (len(m.group()) - 1 - len(keep)) + keep
        text = _HEADING.sub(heading, text)
        text = _SEQUENCE.sub(lambda m: " " * len(m.group()), text)
    if "ZCZC" in text or "NNNN" in text:
        text = _FRAMING.sub(lambda m: "=" + " " * (len(m.group()) - 1), text)
    lines = text.split("\n")
    out = []
    append = out.append
    for ln, line in enumerate(lines, 1):
        if "=" in line:
            line = line.replace("=", " = ")
        for k, tok in enumerate(line.split()):
            append((tok, ln, k))
    return out, lines, headings


def resolve_columns(records, lines):
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


def skip(line, k, group, reason, part=None):
    """A quality entry for a skipped group at token ``k`` of ``line`` (the column is filled in later)."""
    entry = {"level": None, "action": "skipped", "reason": reason, "line": int(line), "_k": int(k),
             "group": group}
    if part:
        entry["part"] = part
    return entry


def split_reports(toks, headings):
    """Group tokens into reports: a part identifier starts one, '=' or the next identifier ends it. Text
    outside any report is returned as ``stray`` (recorded by the caller)."""
    reports, stray, cur = [], [], None
    parts, chars = PART_IDS, CHARS
    head_lines = [h[0] for h in headings]
    last = None  # the land report just ended: (identifier, YYGG, bulletin number)
    for item in toks:
        tok = item[0]
        if cur is not None and len(tok) == 5 and not tok.strip(chars):
            cur.tokens.append(item)
        elif (cur is None and last is not None and len(tok) == 5 and tok[:4] == last[1]
              and bisect.bisect_right(head_lines, item[1]) == last[2]):
            # A later report of the same bulletin written without its part identifier (same YYGG).
            cur = Report(last[0], item[1], item[2], reports[-1].bbb, len(reports))
            cur.records.append({"level": None, "action": "note", "line": int(item[1]), "_k": int(item[2]),
                                "reason": f"report without part identifier: read as {last[0]} like the report "
                                "before it in the bulletin"})
            cur.tokens.append(item)
        elif tok in parts:
            if cur is not None:
                reports.append(cur)
            bbb = ""
            if head_lines:
                j = bisect.bisect_right(head_lines, item[1]) - 1
                bbb = headings[j][1] if j >= 0 else ""
            cur = Report(tok, item[1], item[2], bbb, len(reports))
            stray = _without_headings(stray)
            if stray:
                cur.records.append(skip(stray[0][1], stray[0][2], " ".join(s[0] for s in stray[:20]),
                                        "text outside any report (before its part identifier)"))
                stray = []
        elif tok == "=":
            if cur is not None:
                reports.append(cur)
                first = cur.tokens[0][0] if cur.tokens else ""
                last = None
                if cur.kind in ("TT", "PP") and len(first) == 5 and first[:4].isdigit():
                    last = (cur.ident, first[:4], bisect.bisect_right(head_lines, cur.line))
                cur = None
        elif cur is None:
            stray.append(item)
        elif not cur.tokens and _BBB.match(tok):  # "TTAA CCA 65001 ...": a correction marked in the report
            cur.bbb = tok
        else:
            cur.tokens.append(item)
            cur.dirty = True
    if cur is not None:
        reports.append(cur)
    return reports, _without_headings(stray)


_HEADING_TOKENS = (re.compile(r"^[A-Z]{4}\d{2}$"), re.compile(r"^[A-Z]{4}$"), re.compile(r"^\d{6}$"))


def _without_headings(stray):
    """Stray tokens less abbreviated headings T1T2A1A2ii CCCC YYGGgg [BBB] standing inside a line (framing)."""
    out, i, n = [], 0, len(stray)
    while i < n:
        if i + 2 < n and all(rx.match(stray[i + k][0]) for k, rx in enumerate(_HEADING_TOKENS)):
            i += 3
            if i < n and _BBB.match(stray[i][0]):
                i += 1
            continue
        out.append(stray[i])
        i += 1
    return out


def clean_groups(rep, start=0):
    """Join groups split by a stray space; record and drop groups that are not five digits or slashes."""
    toks, out, i = rep.tokens, rep.tokens[:start], start
    name = rep.ident
    while i < len(toks):
        tok, ln, col = toks[i]
        if tok in _FREE_TEXT_SECTIONS:  # regional sections of plain-language groups: one record for all
            j = i + 1
            while j < len(toks) and not (len(toks[j][0]) == 5 and is_section(toks[j][0])):
                j += 1
            rep.records.append(skip(ln, col, " ".join(t[0] for t in toks[i:j]), _FREE_TEXT_SECTIONS[tok], name))
            i = j
            continue
        if (len(tok) == 5 and not tok.strip(CHARS)) or tok == "NIL":
            out.append(toks[i])
            i += 1
            continue
        if (len(tok) < 5 and i + 1 < len(toks) and len(tok) + len(toks[i + 1][0]) == 5
                and not (tok + toks[i + 1][0]).strip(CHARS)):
            joined = tok + toks[i + 1][0]
            rep.records.append(skip(ln, col, f"{tok} {toks[i + 1][0]}", f"group split by a space, read as {joined}",
                                    name))
            out.append((joined, ln, col))
            i += 2
            continue
        rep.records.append(skip(ln, col, tok, "not a five-character group of digits or slashes", name))
        i += 1
    rep.tokens = out


def _day_hour(tok):
    """(day, hour, knots) from YYGG of a YYGGId / YYGGa4 group, or None."""
    if len(tok) != 5 or not tok[:4].isdigit():
        return None
    yy, gg = int(tok[:2]), int(tok[2:4])
    knots = yy > 50
    day = yy - 50 if knots else yy
    if not (1 <= day <= 31 and 0 <= gg <= 23):
        return None
    return day, gg, knots


def _is_position(tok):
    return len(tok) == 5 and tok[:2] == "99" and tok[2:].isdigit()


# How the body of each part begins (to tell a Marsden-square group that does not match from the body).
_BODY_START = {}
for _m in KINDS:
    _temp = KINDS[_m][1]
    _BODY_START.update({(_m, "A"): ("99", "00", "92", "85") if _temp else ("44", "55"),
                        (_m, "C"): ("70", "50") if _temp else ("44", "55"),
                        (_m, "B"): ("00", "11") if _temp else ("9", "21212"),
                        (_m, "D"): ("11",) if _temp else ("9", "21212")})


def _is_marsden(tok, lat, lon):
    """True for MMMULaULo whose units digits match the position (ULa, ULo: units of the whole degrees)."""
    return (len(tok) == 5 and (tok[:3].isdigit() or tok[:3] == "///") and tok[3] == str(int(abs(lat)) % 10)
            and tok[4] == str(int(abs(lon)) % 10))


def section_one(rep):
    """Read section 1 of a report into ``rep``; returns the index of the first token after it, or None
    (recorded) when it cannot be read.

    Land (TT, PP; FM 35, FM 32): YYGGId IIiii. Ship (UU, QQ; FM 36, FM 33) and mobile (II, EE; FM 38,
    FM 34): D....D YYGGId 99LaLaLa QcLoLoLoLo MMMULaULo, mobile adding h0h0h0h0im; the call sign is also
    accepted after YYGGId. Drop (XX, FM 37): YYGGId 99LaLaLa QcLoLoLoLo MMMULaULo, no call sign.
    """
    toks, name = rep.tokens, rep.ident
    if not toks:
        rep.records.append(skip(rep.line, rep.column, name, "report has no section 1", name))
        return None
    if rep.kind in ("TT", "PP"):
        if len(toks) < 2:
            rep.records.append(skip(rep.line, rep.column, name, "report has no section 1 (YYGGId and IIiii)",
                                    name))
            return None
        (g1, ln1, c1), (g2, _, _) = toks[0], toks[1]
        if not (len(g1) == 5 and g1[:4].isdigit() and len(g2) == 5 and g2.isdigit()):
            rep.records.append(skip(ln1, c1, f"{g1} {g2}", "section 1 is not YYGGId IIiii digits; report skipped",
                                    name))
            return None
        rep.station = g2  # known even when the day group is bad, so its record goes to its own ascent
        dh = _day_hour(g1)
        if dh is None:
            rep.records.append(skip(ln1, c1, g1, f"day or hour of {g1} out of range; report skipped", name))
            return None
        rep.day, rep.hour, rep.knots = dh
        rep.indicator, rep.station = g1[4], g2
        return 2
    # Ship, mobile and drop forms: find YYGG, the call sign and the position among the first groups.
    texts = [t[0] for t in toks[:4]]
    layouts = [(0, None, 1), (0, 1, 2), (1, 0, 2)] if rep.kind == "XX" else [(1, 0, 2), (0, 1, 2), (0, None, 1)]
    for iy, ic, ip in layouts:
        if ip + 1 < len(texts) and _day_hour(texts[iy]) and _is_position(texts[ip]) and (
                ic is None or not _is_position(texts[ic])):
            break
    else:
        if rep.tokens and "NIL" in texts:
            iy = next((k for k, t in enumerate(texts) if _day_hour(t)), None)
            if iy is not None:
                rep.day, rep.hour, rep.knots = _day_hour(texts[iy])
                rep.indicator = texts[iy][4]
                rep.station = next((t for k, t in enumerate(texts) if k != iy and t != "NIL"), None)
                return texts.index("NIL")
        ln, col = toks[0][1], toks[0][2]
        rep.records.append(skip(ln, col, " ".join(texts), f"section 1 of {FORM_NAMES[rep.kind]} not found "
                                "(YYGGId, call sign, 99LaLaLa QcLoLoLoLo); report skipped", name))
        return None
    rep.day, rep.hour, rep.knots = _day_hour(texts[iy])
    rep.indicator = texts[iy][4]
    ln, col = toks[ip][1], toks[ip][2]
    try:
        rep.latitude, rep.longitude = decode_position(texts[ip], texts[ip + 1])
    except ValueError as exc:
        rep.records.append(skip(ln, col, f"{texts[ip]} {texts[ip + 1]}", f"position: {exc}", name))
    i = ip + 2
    # MMMULaULo (Marsden square and units of position) repeats the position: read past it.
    if i < len(toks):
        tok, ln, col = toks[i]
        if rep.latitude == rep.latitude and _is_marsden(tok, rep.latitude, rep.longitude):
            i += 1
        elif (len(tok) == 5 and tok[:3].isdigit() and not tok.startswith(_BODY_START[rep.kind, rep.part])
              and i + 1 < len(toks) and toks[i + 1][0].startswith(_BODY_START[rep.kind, rep.part])):
            rep.records.append(skip(ln, col, tok, "MMMULaULo does not match the position; read past", name))
            i += 1
    if rep.kind in ("II", "EE") and i < len(toks):
        tok, ln, col = toks[i]
        try:
            rep.elevation = decode_mobile_elevation(tok)
            i += 1
        except ValueError as exc:
            rep.records.append(skip(ln, col, tok, f"station elevation h0h0h0h0im: {exc}", name))
            if not tok.startswith("99"):
                i += 1
    if ic is not None and texts[ic] != "SHIP":  # "SHIP" stands for a call sign not given
        rep.station = texts[ic]
    else:
        rep.station = f"{rep.kind}{texts[ip][2:]}{texts[ip + 1]}"  # a drop has no call sign: its position
    if rep.kind in ("UU", "QQ") and rep.elevation != rep.elevation:
        rep.elevation = 0.0  # launched at sea level (common practice; the code gives no height for a ship)
    return i

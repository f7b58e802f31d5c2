"""Parts A and C of TEMP (and its SHIP, DROP and MOBIL forms): section 2 (surface and standard isobaric
surfaces) and sections 3-4 (tropopause, maximum wind), WMO-No. 306 FM 35 regulations 35.2.2-35.2.4 (from
memory), the same in FM 36, 37 and 38."""

from __future__ import annotations

import numpy as np

from icing.io.temp.codes import (
    ID_A,
    ID_AMBIGUOUS_A,
    ID_C,
    INFO,
    KNOT,
    STD_A,
    STD_C,
    decode_standard_height,
    is_section,
    nan,
    surface_pressure,
)
from icing.io.temp.framing import skip
from icing.io.temp.levels import temp_group, wind_group

__all__ = ["decode_standard", "wind_limits", "decode_max_wind_sections"]

_INDEX_A = {ind: j for j, (ind, _) in enumerate(STD_A)}
_INDEX_C = {ind: j for j, (ind, _) in enumerate(STD_C)}
_AFTER_STANDARD = ("88", "77", "66")


def wind_limits(rep, line, column):
    """(sure, maybe): standard surfaces at or below ``sure`` hPa carry a wind group; the one at ``maybe`` may
    (Id names two surfaces by one digit: 2 is 250 or 200 hPa, 1 is 150 or 100 hPa, code table 1734)."""
    ind = rep.indicator
    if ind == "/":
        return np.inf, None
    if rep.part == "A" and ind in ID_AMBIGUOUS_A:
        return ID_AMBIGUOUS_A[ind]
    table = ID_A if rep.part == "A" else ID_C
    if ind in table:
        return table[ind], None
    rep.records.append(skip(line, column, rep.indicator, f"Id {ind!r} not in code table 1734; no winds assumed",
                            rep.ident))
    return np.inf, None


def decode_standard(rep, body, knots, levels):
    """Section 2 of Part A or C, then sections 3 and 4; returns the index of the first group not used.

    The number of groups of each surface (PPhhh TTTaDD, plus dddff down to the surface named by Id) is
    checked against the sequence of standard-level indicators: of the counts possible at a surface, the one
    after which the next indicator stands is taken, so that a missing or extra group shifts nothing and Id's
    shared digits (250/200, 150/100 hPa) resolve themselves.
    """
    name = rep.ident
    tenths = rep.part == "C"
    std = STD_A if rep.part == "A" else STD_C
    index = _INDEX_A if rep.part == "A" else _INDEX_C
    sure, maybe = wind_limits(rep, rep.line, rep.column)
    n, i, k = len(body), 0, 0
    surface_p = np.inf
    info = INFO

    def score(pos, k_next):
        """2: the next standard surface or the end of section 2 stands at pos; 1: a later surface; 0: not."""
        if pos >= n:
            return 2
        tok = body[pos][0]
        ind = tok[:2]
        if ind in _AFTER_STANDARD or info[tok][10]:
            return 2
        j = index.get(ind)
        if j is None or j < k_next:
            return 0
        return 2 if j == k_next else 1

    if rep.part == "A" and n and body[0][0][:2] == "99":
        tok, ln, col = body[0]
        if n >= 3 and tok[2:].isdigit():
            surface_p = surface_pressure(tok[2:])
            t, td = temp_group(*body[1], rep, name, "surface temperature")
            wd, ws = wind_group(*body[2], rep, name, knots, "surface wind")
            levels.add(surface_p, np.nan, t, td, wd, ws, ln)
            levels.surface = surface_p
            i = 3
        else:
            rep.records.append(skip(ln, col, tok, "surface group 99PPP without a pressure", name))
            i = 1
    while i < n:
        tok, ln, col = body[i]
        ind = tok[:2]
        if ind in _AFTER_STANDARD or info[tok][10]:
            break
        j = index.get(ind)
        if j is None or j < k:
            rep.records.append(skip(ln, col, tok, "not the indicator of a standard isobaric surface expected "
                                    "here", name))
            i += 1
            continue
        p = std[j][1]
        if p == maybe:
            choices = (3, 2)  # either is what Id says
        else:
            choices = (3, 2) if p >= sure else (2, 3)
        want = choices[0]
        best, best_score = None, -1
        for s in choices:  # the expected group count first, then one group more or less
            if i + s > n or not info[body[i + 1][0]][8]:
                continue
            if s == 3 and not info[body[i + 2][0]][9]:
                continue
            sc = score(i + s, j + 1)
            if sc > best_score:
                best, best_score = s, sc
        size = best if best_score > 0 else min(want, n - i)
        if p != maybe:
            if size < want:
                rep.records.append(skip(ln, col, tok, f"{p:g} hPa level has {size - 1} data group(s) where "
                                        f"{want - 1} were expected; a group is missing", name))
            elif size > want:
                rep.records.append(skip(ln, col, tok, f"{p:g} hPa level has a wind group although it is above "
                                        "the last level with winds (Id); read as wind", name))
        try:
            z = decode_standard_height(p, tok[2:])
        except ValueError as exc:
            rep.records.append(skip(ln, col, tok, f"{p:g} hPa height: {exc}", name))
            z = np.nan
        t = td = wd = ws = nan
        if size >= 2:
            dinf = info[body[i + 1][0]]
            if dinf[1] is None and dinf[3] is None:  # the common case inline; temp_group records the rest
                t, td = dinf[0], dinf[0] - dinf[2]
            else:
                t, td = temp_group(*body[i + 1], rep, name, "temperature", p)
        if size >= 3:
            dinf = info[body[i + 2][0]]
            if dinf[6] is None:
                wd, ws = dinf[4], dinf[5] * KNOT if knots else dinf[5]
            else:
                wd, ws = wind_group(*body[i + 2], rep, name, knots, "wind", p)
        if p > surface_p:
            if np.isfinite(t) or np.isfinite(ws):
                rep.records.append(skip(ln, col, tok, f"{p:g} hPa is below the surface "
                                        f"({surface_p:g} hPa) but carries data; dropped", name))
            else:
                rep.records.append(skip(ln, col, tok, f"{p:g} hPa is below the surface ({surface_p:g} hPa); "
                                        "its extrapolated height is not a measurement", name))
        else:
            levels.add(p, z, t, td, wd, ws, ln)
        k = j + 1
        i += size
    return decode_max_wind_sections(rep, body, i, knots, levels, surface_p, tenths, tropopause=True)


def decode_max_wind_sections(rep, body, i, knots, levels, surface_p, tenths, tropopause):
    """Sections 3 and 4: tropopause 88PPP TTTaDD dddff (TEMP only), maximum wind 77PPP/66PPP dddff with an
    optional wind-shear group 4vbvbvava. Pressures in whole hPa (Parts A) or tenths (Parts C)."""
    name = rep.ident
    n = len(body)
    while i < n:
        tok, ln, col = body[i]
        ind = tok[:2]
        if (ind == "88" and tropopause) or ind in ("77", "66"):
            if tok[2:] == "999":
                i += 1
                continue
            if not tok[2:].isdigit() or int(tok[2:]) == 0:
                rep.records.append(skip(ln, col, tok, "tropopause or maximum-wind pressure not decodable", name))
                i += 1
                continue
            p = int(tok[2:]) / 10.0 if tenths else float(int(tok[2:]))
            if ind == "88":
                if i + 2 >= n:
                    rep.records.append(skip(ln, col, tok, "tropopause group cut short", name))
                    break
                t, td = temp_group(*body[i + 1], rep, name, "tropopause temperature")
                wd, ws = wind_group(*body[i + 2], rep, name, knots, "tropopause wind")
                if p < surface_p:
                    levels.add(p, np.nan, t, td, wd, ws, ln)
                else:
                    rep.records.append(skip(ln, col, tok, f"tropopause at {p:g} hPa not above the surface "
                                            f"({surface_p:g} hPa); dropped", name))
                i += 3
            else:
                if i + 1 >= n:
                    rep.records.append(skip(ln, col, tok, "maximum-wind group cut short", name))
                    break
                wd, ws = wind_group(*body[i + 1], rep, name, knots, "maximum wind")
                if p < surface_p:
                    levels.add(p, np.nan, np.nan, np.nan, wd, ws, ln)
                else:
                    rep.records.append(skip(ln, col, tok, f"maximum wind at {p:g} hPa not above the surface "
                                            f"({surface_p:g} hPa); dropped", name))
                i += 2
                if i < n and body[i][0][0] == "4" and not is_section(body[i][0]):
                    rep.records.append(skip(body[i][1], body[i][2], body[i][0],
                                            "wind-shear group 4vbvbvava (vertical wind shear) not used", name))
                    i += 1
            continue
        break
    return i

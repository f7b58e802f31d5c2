"""Parts B and D: significant levels nnPPP TTTaDD (section 5), significant wind levels after 21212
(section 6) and the sections this reader does not use (31313, 41414, regional groups), WMO-No. 306 FM 35
regulation 35.2.3 (from memory); the same in FM 36-38 and, for 21212, in PILOT (FM 32-34)."""

from __future__ import annotations

import numpy as np

from icing.io.temp.codes import INFO, KNOT, is_section, nan
from icing.io.temp.framing import skip
from icing.io.temp.levels import temp_group, wind_group

__all__ = ["decode_significant", "skip_sections"]

_NN = ["11", "22", "33", "44", "55", "66", "77", "88", "99"]


def _next_nn(nn):
    return "11" if nn in ("00", "99") or nn not in _NN else _NN[_NN.index(nn) + 1]


_NEXT_NN = {nn: _next_nn(nn) for nn in ["00"] + _NN}


def decode_significant(rep, body, start, knots, levels, wind):
    """nnPPP + TTTaDD (or dddff after 21212) pairs of Parts B and D; returns the index after them.

    nn runs 00 (surface, Part B only), 11, 22, ... 99, 11, ... and PPP decreases upward. A pair is taken only
    where nn, the pressure order and the group after it agree, so that a missing group shifts nothing: the
    groups out of place are recorded and skipped.
    """
    name = rep.ident
    tenths = rep.part == "D"
    what = "significant wind level" if wind else "significant level"
    n, i = len(body), start
    last_p = np.inf
    allowed = ("00", "11")

    info = INFO
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
            rep.records.append(skip(ln, col, tok, f"group out of place in the {what}s (expected nnPPP "
                                    "then a data group); skipped", name))
            if len(allowed) < 4:
                allowed = allowed + (_next_nn(allowed[-1]),)
            i += 1
            continue
        ln = body[i][1]
        dinf = info[toks[i + 1]]
        if wind:
            if dinf[6] is None:  # the common case inline; wind_group records the rest
                wd, ws = dinf[4], dinf[5] * KNOT if knots else dinf[5]
            else:
                wd, ws = wind_group(*body[i + 1], rep, name, knots, "significant-level wind")
            rows.append((p, nan, nan, nan, wd, ws, ln))
        else:
            if dinf[1] is None and dinf[3] is None:
                t, td = dinf[0], dinf[0] - dinf[2]
            else:
                t, td = temp_group(*body[i + 1], rep, name, "significant-level temperature")
            rows.append((p, nan, t, td, nan, nan, ln))
        if nn == "00":
            levels.surface = p
        last_p = p
        allowed = (_NEXT_NN.get(nn, "11"),)
        i += 2
    return i


_REASONS = {"31313": "section 31313 (sonde, system and launch time) not used",
            "41414": "section 41414 (cloud data) not used", "21212": "section 21212 out of place",
            "61616": "regional section 61616 (aircraft and mission) not used",
            "62626": "regional section 62626 (drop remarks) not used"}


def skip_sections(rep, body, i):
    """Record sections 7-10 (31313, 41414, regional 5xxxx/6xxxx) and anything left, as skipped groups."""
    name = rep.ident
    n = len(body)
    while i < n:
        tok, ln, col = body[i]
        j = i + 1
        while j < n and not is_section(body[j][0]):
            j += 1
        if is_section(tok):
            reason = _REASONS.get(tok, f"regional section {tok} not used")
        else:
            reason = "groups after the last section this reader decodes"
        rep.records.append(skip(ln, col, " ".join(b[0] for b in body[i:j]), reason, name))
        i = j

"""PILOT (FM 32), PILOT SHIP (FM 33) and PILOT MOBIL (FM 34) parts, which are also how TEMP reports winds by
height (PPBB, PPDD beside TTAA/TTBB of the same ascent). WMO-No. 306, from memory:

* Parts A and C, section 2: ``44nP1P1`` (pressure measured) or ``55nP1P1`` (pressure from standard
  altitudes), then ``n`` wind groups ddfff for ``n`` consecutive standard isobaric surfaces from ``P1P1`` (the
  indicators of FM 35: 00 1000 hPa ... 10 100 hPa in Part A; 70 ... 10 = 70 ... 10 hPa in Part C).
* Sections 3 and 4: maximum wind ``77PmPmPm``/``66PmPmPm`` ddfff (4vbvbvava) as in TEMP, or by altitude
  ``7HmHmHmHm`` (not used here, recorded).
* Parts B and D, section 4: ``9tnu1u2u3`` then one ddfff for each of up to three altitudes, altitude =
  (10 tn + u) x 300 m above sea level (regulation 32.3.1, from memory), altitude 0 being the station's
  surface; ``1tnu1u2u3`` for altitudes of 100 units and more (100 + 10 tn + u; as decoders of real
  bulletins read it, common practice); or ``21212`` nnPPP ddfff pairs by pressure as in TEMP. Some
  national practice counts the unit as 1000 ft (304.8 m): pass ``altitude_unit=304.8`` to the reader.
"""

from __future__ import annotations

from icing.io.temp.codes import INFO, KNOT, STD_A, STD_C, is_section
from icing.io.temp.framing import skip
from icing.io.temp.levels import wind_group
from icing.io.temp.significant import decode_significant
from icing.io.temp.standard import decode_max_wind_sections

__all__ = ["decode_pilot_standard", "decode_pilot_heights", "ALTITUDE_UNIT_M"]

ALTITUDE_UNIT_M = 300.0  # unit of the altitudes of 9tnu1u2u3 (WMO-No. 306 FM 32, from memory)
_INDEX_A = {ind: j for j, (ind, _) in enumerate(STD_A)}
_INDEX_C = {ind: j for j, (ind, _) in enumerate(STD_C)}


def decode_pilot_standard(rep, body, knots, levels):
    """Section 2 (winds at standard surfaces) and sections 3-4 of PILOT Part A or C; the index after them."""
    name = rep.ident
    std = STD_A if rep.part == "A" else STD_C
    index = _INDEX_A if rep.part == "A" else _INDEX_C
    n, i = len(body), 0
    info = INFO
    while i < n:
        tok, ln, col = body[i]
        if info[tok][10]:
            break
        head = tok[:2]
        if head in ("44", "55") and tok[2].isdigit() and tok[3:] in index:
            count, j0 = int(tok[2]), index[tok[3:]]
            i += 1
            for m in range(count):
                if i >= n or not info[body[i][0]][9] or (body[i][0][:2] in ("44", "55")
                                                          and body[i][0][3:] in index):
                    rep.records.append(skip(ln, col, tok, f"{head}nP1P1 announces {count} wind groups, "
                                            f"{m} found", name))
                    break
                if j0 + m >= len(std):
                    rep.records.append(skip(body[i][1], body[i][2], body[i][0], "wind group beyond the last "
                                            "standard surface of this part", name))
                    i += 1
                    continue
                p = std[j0 + m][1]
                dinf = info[body[i][0]]
                if dinf[6] is None:
                    wd, ws = dinf[4], dinf[5] * KNOT if knots else dinf[5]
                else:
                    wd, ws = wind_group(*body[i], rep, name, knots, "wind", p)
                levels.add(p, wd=wd, ws=ws, line=body[i][1])
                i += 1
            continue
        if head in ("77", "66"):
            j = decode_max_wind_sections(rep, body, i, knots, levels, float("inf"), rep.part == "C",
                                         tropopause=False)
            if j > i:
                i = j
                continue
        if tok[0] == "7" and tok[1:].isdigit():
            j = i + 2 if i + 1 < n else i + 1
            if j < n and body[j][0][0] == "4" and not is_section(body[j][0]):
                j += 1
            rep.records.append(skip(ln, col, " ".join(b[0] for b in body[i:j]),
                                    "maximum wind by altitude 7HmHmHmHm not used", name))
            i = j
            continue
        rep.records.append(skip(ln, col, tok, "group out of place in the winds at standard surfaces "
                                "(expected 44nP1P1 or 55nP1P1 and its wind groups); skipped", name))
        i += 1
    return i


def decode_pilot_heights(rep, body, knots, levels, unit=ALTITUDE_UNIT_M):
    """Section 4 of PILOT Part B or D (winds at altitudes, and 21212 winds by pressure); the index after it."""
    name = rep.ident
    n, i = len(body), 0
    info = INFO
    while i < n:
        tok, ln, col = body[i]
        if tok == "21212":
            i = decode_significant(rep, body, i + 1, knots, levels, wind=True)
            continue
        if info[tok][10]:
            break
        if tok[0] in "91":
            base = 100 if tok[0] == "1" else 0
            tn, units = tok[1], [u for u in tok[2:] if u != "/"]
            if not tn.isdigit() or not all(u.isdigit() for u in units) or not units:
                rep.records.append(skip(ln, col, tok, "altitude group 9tnu1u2u3 not decodable; its winds are "
                                        "skipped", name))
                i += 1
                while i < n and body[i][0][0] not in "91" and not info[body[i][0]][10]:
                    rep.records.append(skip(body[i][1], body[i][2], body[i][0], "wind of an undecodable "
                                            "altitude group", name))
                    i += 1
                continue
            i += 1
            for u in units:
                alt = base + 10 * int(tn) + int(u)
                if i >= n or not info[body[i][0]][9]:
                    rep.records.append(skip(ln, col, tok, f"altitude group announces {len(units)} winds, fewer "
                                            "found", name))
                    break
                wd, ws = wind_group(*body[i], rep, name, knots, f"wind at altitude {alt * unit:g} m")
                z = None if alt == 0 else alt * unit
                levels.by_height.append((z, wd, ws, body[i][1], body[i][2]))
                i += 1
            continue
        rep.records.append(skip(ln, col, tok, "group out of place in the winds by altitude (expected "
                                "9tnu1u2u3 and its wind groups); skipped", name))
        i += 1
    return i

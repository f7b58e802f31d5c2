"""What a decoded part holds: levels by pressure as plain tuples (the fast path), and wind levels by height
(PILOT and the wind-by-height parts of TEMP), which get their pressure only when merged with the
temperature parts of the same ascent."""

from __future__ import annotations

import numpy as np

from icing.io.temp.codes import INFO, KNOT, nan
from icing.io.temp.framing import skip

__all__ = ["Levels", "temp_group", "wind_group"]


class Levels:
    """Decoded levels of one part as parallel lists (plain floats, no Dataset)."""

    __slots__ = ("rows", "surface", "by_height")

    def __init__(self):
        self.surface = np.nan
        self.rows = []  # (pressure, height, temperature, dewpoint, direction, speed, line)
        self.by_height = []  # (height above sea level m or None for the surface, direction, speed, line, k)

    def add(self, p, z=np.nan, t=np.nan, td=np.nan, wd=np.nan, ws=np.nan, line=-1):
        self.rows.append((p, z, t, td, wd, ws, line))


def _what(what, p):
    return what if p is None else f"{p:g} hPa {what}"


def temp_group(tok, ln, col, rep, name, what, p=None):
    """(t, td) from TTTaDD, recording what cannot be decoded (the message is only formatted then)."""
    t, t_err, dd, dd_err = INFO[tok][:4]
    if t_err is not None:
        rep.records.append(skip(ln, col, tok, f"{_what(what, p)}: {t_err}", name))
        return nan, nan
    if dd_err is not None:
        rep.records.append(skip(ln, col, tok, f"{_what(what, p)}: {dd_err}; dewpoint dropped", name))
    return t, t - dd


def wind_group(tok, ln, col, rep, name, knots, what, p=None):
    """(direction, speed m/s) from dddff, recording what cannot be decoded."""
    info = INFO[tok]
    if info[6] is not None:
        rep.records.append(skip(ln, col, tok, f"{_what(what, p)}: {info[6]}", name))
        return nan, nan
    return info[4], info[5] * KNOT if knots else info[5]

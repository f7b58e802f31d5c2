"""Reader for IGRA v2 station files (Integrated Global Radiosonde Archive, version 2; Durre et al. 2016,
NOAA NCEI, "Integrated Global Radiosonde Archive (IGRA) Version 2 data format description").

A file holds many soundings; each starts with a header record (``#`` in column 1) followed by NUMLEV
fixed-column data records. Records are parsed by column position only (never by splitting on spaces); the
positions below are from memory of the format description:

======== ======= =========================================================
header   columns data record
======== ======= =========================================================
ID       2-12    LVLTYP1 1, LVLTYP2 2, ETIME 4-8, PRESS 10-15 (Pa), PFLAG 16
YEAR     14-17   GPH 17-21 (m), ZFLAG 22, TEMP 23-27 (tenths degC), TFLAG 28
MONTH    19-20   RH 29-33 (tenths %), DPDP 35-39 (tenths K)
DAY      22-23   WDIR 41-45 (deg), WSPD 47-51 (tenths m/s)
HOUR     25-26   (99 missing)
RELTIME  28-31   (HHMM, 9999 missing)
NUMLEV   33-36
LAT, LON 56-62, 64-71 (1e-4 deg)
======== ======= =========================================================

-9999 is a missing value and -8888 a value removed by IGRA's quality control: the quality record keeps
them apart (every -8888 value is listed; -9999 values are counted per variable with their lines).

IGRA v2 *derived-parameter* files ("IGRA v2 derived parameters format description", NOAA NCEI; positions from
memory of that description, checked against an independent reader's column table) are recognised by their
longer records (header 157 columns, data 151) and read: header ID 2-12, YEAR 14-17, MONTH 19-20, DAY 22-23,
HOUR 25-26, RELTIME 28-31, NUMLEV 32-36 (no latitude or longitude: the position is unknown); data PRESS 1-7
(Pa), REPGPH 9-15 and CALCGPH 17-23 (m; the reported height, else IGRA's calculated one, with a note), TEMP
25-31 (tenths of K), REPRH 89-95 and CALCRH 97-103 (tenths of %; reported, else calculated), UWND 113-119 and
VWND 129-135 (tenths of m/s). -99999 / -9999 are missing, -88888 / -8888 removed by IGRA's quality control.
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pandas as pd

from icing.errors import ProfileQualityError, SoundingFormatError
from icing.io import file_bytes
from icing.profile import build_profile, check_temperature_unit

__all__ = ["FORMAT", "sniff", "read", "decode_igra", "MISSING", "REMOVED"]

FORMAT = "igra"
MISSING = -9999
REMOVED = -8888
_HEADER = re.compile(r"#[A-Z0-9]{11} [ 0-9]{4} [ 0-9]{2} [ 0-9]{2} [ 0-9]{2} [ 0-9]{4} [ 0-9]{4}")
# name: (first column, last column), 1-based inclusive, from the IGRA v2 format description.
_DATA_FIELDS = {"lvltyp1": (1, 1), "lvltyp2": (2, 2), "etime": (4, 8), "press": (10, 15), "gph": (17, 21),
                "temp": (23, 27), "rh": (29, 33), "dpdp": (35, 39), "wdir": (41, 45), "wspd": (47, 51)}
_HEADER_FIELDS = {"year": (14, 17), "month": (19, 20), "day": (22, 23), "hour": (25, 26),
                  "reltime": (28, 31), "numlev": (33, 36), "lat": (56, 62), "lon": (64, 71)}
_VARIABLE_OF = {"press": "pressure", "gph": "height", "temp": "temperature", "rh": "relative_humidity",
                "dpdp": "dewpoint", "wdir": "wind_direction", "wspd": "wind_speed", "repgph": "height",
                "calcgph": "height", "reprh": "relative_humidity", "calcrh": "relative_humidity",
                "uwnd": "wind_speed", "vwnd": "wind_speed"}


# Derived-parameter files: name: (first column, last column), 1-based inclusive.
_DERIVED_HEADER = {"year": (14, 17), "month": (19, 20), "day": (22, 23), "hour": (25, 26), "reltime": (28, 31),
                   "numlev": (32, 36)}
_DERIVED_FIELDS = {"press": (1, 7), "repgph": (9, 15), "calcgph": (17, 23), "temp": (25, 31), "reprh": (89, 95),
                   "calcrh": (97, 103), "uwnd": (113, 119), "vwnd": (129, 135)}
_DERIVED_WIDTH = 100  # a header or data record longer than this is of the derived-parameter layout
_MISSING_CODES = (-9999, -99999)
_TRAILING_CONTROL = re.compile(r"[\x00-\x08\x0b-\x1f\x7f]+\s*$")
_REMOVED_CODES = (-8888, -88888)


def sniff(head: bytes, path) -> bool:
    """True if the file starts with an IGRA v2 header record."""
    try:
        first = head.removeprefix(b"\xef\xbb\xbf").decode("ascii").splitlines()[0]
    except (UnicodeDecodeError, IndexError):
        return False
    return _HEADER.match(first) is not None


def _field(line, first, last):
    return line[first - 1:last]


def _parse_header(line, lineno, path, derived=False):
    """Header fields as ints (None where blank); SoundingFormatError if the record is not a header."""
    if not _HEADER.match(line) and not (derived and _HEADER.match(line[:31] + " " + line[32:])):
        raise SoundingFormatError("not an IGRA v2 header record (#ID YEAR MONTH DAY HOUR RELTIME NUMLEV ...)",
                                  file=path, line=lineno, column=1)
    out = {"id": line[1:12]}
    for name, (a, b) in (_DERIVED_HEADER if derived else _HEADER_FIELDS).items():
        s = _field(line, a, b).strip()
        try:
            out[name] = int(s) if s else None
        except ValueError:
            raise SoundingFormatError(f"header field {name.upper()} {s!r} is not an integer", file=path,
                                      line=lineno, column=a) from None
    if derived:
        out["lat"] = out["lon"] = None
    return out


def _is_derived(lines, h_idx, stop):
    """Does the sounding at header line ``h_idx`` use the derived-parameter layout (longer records)?"""
    if len(lines[h_idx].rstrip()) > _DERIVED_WIDTH:
        return True
    first = next((ln for ln in lines[h_idx + 1: stop] if ln.strip()), "")
    return len(first.rstrip()) > _DERIVED_WIDTH


def _data_block(lines, linenos, quality, fields=None):
    """Integer arrays of the data records (fixed columns); an unreadable record is recorded and skipped."""
    fields = fields or _DATA_FIELDS
    width = max(b for _, b in fields.values())
    n = len(lines)
    out = {k: np.full(n, MISSING, dtype=np.int64) for k in fields}
    ok = np.ones(n, dtype=bool)
    padded = [ln.ljust(width) for ln in lines]
    for name, (a, b) in fields.items():
        col = [p[a - 1:b] for p in padded]
        try:
            out[name] = np.array(col).astype(np.int64)
        except ValueError:  # find the bad records one by one: rare, so no hurry
            for i, s in enumerate(col):
                try:
                    out[name][i] = int(s)
                except ValueError:
                    ok[i] = False
                    quality.append({"level": None, "action": "skipped", "line": int(linenos[i]), "column": a,
                                    "reason": f"{name.upper()} field (columns {a}-{b}) {s.strip()!r} is not an "
                                    "integer; record skipped"})
    return out, ok


def _scaled(raw, scale, name, lines, quality):
    """Float values from raw integers; -9999 and -8888 become NaN and are recorded apart."""
    values = raw.astype(float) * scale
    removed = np.isin(raw, _REMOVED_CODES)
    missing = np.isin(raw, _MISSING_CODES)
    variable = _VARIABLE_OF[name]
    for i in np.flatnonzero(removed):
        quality.append({"level": None, "action": "removed", "variable": variable, "line": int(lines[i]),
                        "code": REMOVED, "reason": f"{variable} removed by the IGRA quality control (-8888)"})
    if missing.any():
        quality.append({"level": None, "action": "missing", "variable": variable, "code": MISSING,
                        "count": int(missing.sum()), "lines": [int(x) for x in lines[missing]],
                        "reason": f"{variable} missing (-9999) at {int(missing.sum())} level(s)"})
    values[removed | missing] = np.nan
    return values


def _sounding_time(h):
    hour = h["hour"]
    minute = 0
    if hour is None or hour == 99:
        rel = h["reltime"]
        if rel is None or rel == 9999 or rel // 100 > 23:
            return None
        hour, minute = rel // 100, (rel % 100 if rel % 100 < 60 else 0)
    try:
        return pd.Timestamp(year=h["year"], month=h["month"], day=h["day"], hour=hour, minute=minute)
    except (TypeError, ValueError):
        return None


def _utc(t):
    if t is None:
        return None
    ts = pd.Timestamp(t)
    return ts if ts.tzinfo is None else ts.tz_convert("UTC").tz_localize(None)


def decode_igra(text: str, source: str = "<string>", start=None, end=None) -> list:
    """Decode IGRA v2 station-file text into canonical profiles, optionally only those in [start, end].

    Raises
    ------
    SoundingFormatError
        No header record, a malformed header, or no sounding with two usable levels in the time range.
    """
    start, end = _utc(start), _utc(end)
    # Records end at line feeds only (str.splitlines would also split at form feeds and other controls).
    lines = text.lstrip("\ufeff").replace("\r\n", "\n").replace("\r", "\n").split("\n")
    # Control characters trailing a record (a DOS end-of-file mark, a form feed) are no content.
    trailing = [i for i, ln in enumerate(lines) if _TRAILING_CONTROL.search(ln)]
    for i in trailing:
        lines[i] = _TRAILING_CONTROL.sub("", lines[i])
    heads = [i for i, ln in enumerate(lines) if ln.startswith("#")]
    if not heads:
        raise SoundingFormatError("no IGRA v2 header record (a line starting with #)", file=source, line=1)
    loose = []
    if trailing:
        loose.append({"level": None, "action": "changed", "line": trailing[0] + 1,
                      "reason": f"control characters removed from the end of {len(trailing)} line(s)"})
    if heads[0] > 0 and any(ln.strip() for ln in lines[: heads[0]]):
        loose.append({"level": None, "action": "skipped", "line": 1,
                      "reason": f"{heads[0]} line(s) before the first header record"})
    profiles, failures = [], []
    bounds = heads[1:] + [len(lines)]
    for h_idx, stop in zip(heads, bounds, strict=True):
        derived = _is_derived(lines, h_idx, stop)
        header = _parse_header(lines[h_idx], h_idx + 1, source, derived)
        time = _sounding_time(header)
        if time is not None and ((start is not None and time < start) or (end is not None and time > end)):
            continue
        quality = []
        if time is None:
            quality.append({"level": None, "action": "note", "line": h_idx + 1,
                            "reason": "sounding time not decodable from YEAR MONTH DAY HOUR/RELTIME"})
            if start is not None or end is not None:
                continue
        block = lines[h_idx + 1: stop]
        linenos = np.arange(h_idx + 2, h_idx + 2 + len(block))
        blank = np.array([not ln.strip() for ln in block], dtype=bool)
        if header["numlev"] is not None and header["numlev"] != int((~blank).sum()):
            quality.append({"level": None, "action": "note", "line": h_idx + 1, "column": 33,
                            "reason": f"NUMLEV says {header['numlev']} levels, {int((~blank).sum())} records "
                            "follow"})
        block = [b for b, e in zip(block, blank, strict=True) if not e]
        linenos = linenos[~blank]
        if derived:
            try:
                ds = _derived_profile(block, linenos, header, time, quality, source)
            except ProfileQualityError as exc:
                failures.append({"level": None, "action": "skipped", "line": h_idx + 1,
                                 "reason": f"sounding at line {h_idx + 1}: {exc.reason}"})
                continue
            profiles.append(ds)
            continue
        raw, ok = _data_block(block, linenos, quality)
        raw = {k: v[ok] for k, v in raw.items()}
        linenos = linenos[ok]
        non_pressure = raw["lvltyp1"] == 3
        for ln in linenos[non_pressure]:
            quality.append({"level": None, "action": "skipped", "line": int(ln),
                            "reason": "non-pressure level (LVLTYP1 = 3): wind by height without pressure"})
        keep = ~non_pressure
        raw = {k: v[keep] for k, v in raw.items()}
        linenos = linenos[keep]
        p = _scaled(raw["press"], 0.01, "press", linenos, quality)
        z = _scaled(raw["gph"], 1.0, "gph", linenos, quality)
        t = _scaled(raw["temp"], 0.1, "temp", linenos, quality)
        rh = _scaled(raw["rh"], 0.1, "rh", linenos, quality)
        dpd = _scaled(raw["dpdp"], 0.1, "dpdp", linenos, quality)
        wd = _scaled(raw["wdir"], 1.0, "wdir", linenos, quality)
        ws = _scaled(raw["wspd"], 0.1, "wspd", linenos, quality)
        surface = np.flatnonzero(raw["lvltyp2"] == 1)
        elevation = float(z[surface[0]]) if surface.size and np.isfinite(z[surface[0]]) else np.nan
        lat = header["lat"] / 1e4 if header["lat"] not in (None, -99999, -999999) else np.nan
        lon = header["lon"] / 1e4 if header["lon"] not in (None, -99999, -999999) else np.nan
        try:
            ds = build_profile(p, t, height=z, dewpoint=t - dpd,
                               relative_humidity=rh if np.isfinite(rh).any() else None,
                               wind_speed=ws, wind_direction=wd, station=header["id"].strip(), latitude=lat,
                               longitude=lon, elevation=elevation, time=time, source=source, format=FORMAT,
                               lines=linenos, quality=quality)
        except ProfileQualityError as exc:
            failures.append({"level": None, "action": "skipped", "line": h_idx + 1,
                             "reason": f"sounding at line {h_idx + 1}: {exc.reason}"})
            continue
        profiles.append(ds)
    if not profiles:
        if not failures:
            raise SoundingFormatError("no IGRA sounding in the requested time range" if (start or end) else
                                      "no IGRA sounding in the file", file=source)
        raise SoundingFormatError(f"no usable IGRA sounding: {failures[0]['reason']}", file=source,
                                  line=failures[0]["line"])
    if loose or failures:
        profiles[0].attrs["quality"] = list(profiles[0].attrs["quality"]) + [
            dict(e, scope="file") for e in loose + failures]
    return profiles


def _derived_profile(block, linenos, header, time, quality, source):
    """One sounding of a derived-parameter file as a profile (see the module notes for the columns)."""
    quality.append({"level": None, "action": "note", "reason": "IGRA v2 derived-parameter record: pressure, "
                    "height, temperature, relative humidity and wind read; the derived quantities are not used; "
                    "the file gives no station position"})
    raw, ok = _data_block(block, linenos, quality, _DERIVED_FIELDS)
    raw = {k: v[ok] for k, v in raw.items()}
    linenos = linenos[ok]
    p = _scaled(raw["press"], 0.01, "press", linenos, quality)
    rep = _scaled(raw["repgph"], 1.0, "repgph", linenos, [])
    calc = _scaled(raw["calcgph"], 1.0, "calcgph", linenos, [])
    z = np.where(np.isfinite(rep), rep, calc)
    from_calc = ~np.isfinite(rep) & np.isfinite(calc)
    if from_calc.any():
        quality.append({"level": None, "action": "filled", "variable": "height", "count": int(from_calc.sum()),
                        "lines": [int(x) for x in linenos[from_calc]],
                        "reason": "height not reported: IGRA's calculated height (CALCGPH) used"})
    tk = _scaled(raw["temp"], 0.1, "temp", linenos, quality)
    try:
        check_temperature_unit(tk, "K", name="TEMP (tenths of K in the derived-parameter layout)")
    except ProfileQualityError as exc:
        raise ProfileQualityError(exc.reason) from None
    reprh = _scaled(raw["reprh"], 0.1, "reprh", linenos, quality)
    calcrh = _scaled(raw["calcrh"], 0.1, "calcrh", linenos, [])
    rh = np.where(np.isfinite(reprh), reprh, calcrh)
    u = _scaled(raw["uwnd"], 0.1, "uwnd", linenos, [])
    v = _scaled(raw["vwnd"], 0.1, "vwnd", linenos, [])
    ws = np.hypot(u, v)
    wd = np.where(ws > 0, np.degrees(np.arctan2(-u, -v)) % 360.0, 0.0)
    wd[~np.isfinite(ws)] = np.nan
    return build_profile(p, tk - 273.15, height=z, relative_humidity=rh if np.isfinite(rh).any() else None,
                         wind_speed=ws, wind_direction=wd, station=header["id"].strip(), time=time, source=source,
                         format=FORMAT, lines=linenos, quality=quality)


def read(path, start=None, end=None, **options) -> list:
    """Every sounding of an IGRA v2 station file (or those with start <= time <= end) as profiles."""
    path = Path(path)
    raw = file_bytes(path, "IGRA", options).removeprefix(b"\xef\xbb\xbf")  # a UTF-8 byte-order mark
    try:
        text = raw.decode("ascii")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise SoundingFormatError("non-ASCII byte in an IGRA file", file=path, line=line) from None
    return decode_igra(text, source=str(path), start=start, end=end)

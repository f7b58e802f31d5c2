"""Station lists: where a land station that reports only its index number stands.

Two forms users already have are read:

* a CSV with a header naming at least the station, latitude and longitude columns (our own form is
  ``station,name,latitude,longitude,elevation_m``; ``id``/``wmo``/``index`` for the station, ``lat``/``lon``,
  ``elevation``/``elev``/``height``/``altitude`` are understood too; lines starting with ``#`` are comments);
* the IGRA v2 station list (``igra2-station-list.txt``; IGRA v2 station-list format description, NOAA NCEI,
  from memory): fixed columns ID 1-11, LATITUDE 13-20, LONGITUDE 22-30, ELEVATION 32-37, STATE 39-40,
  NAME 42-71, FSTYEAR 73-76, LSTYEAR 78-81, NOBS 83-88. Elevations -998.8 and -999.9 mean unknown. A WMO
  station's ID is its country code, the network code ``M`` and its index number (``..M000nnnnn``), so it
  is listed under both its IGRA ID and its five-digit index number.
"""

from __future__ import annotations

import csv
import io
import re
from pathlib import Path
from typing import NamedTuple

import numpy as np

from icing.errors import SoundingFormatError

__all__ = ["Station", "StationList", "read_stations", "parse_stations"]


class Station(NamedTuple):
    """Position of a station: latitude and longitude (deg), elevation (m above mean sea level, NaN unknown)."""

    latitude: float
    longitude: float
    elevation: float


class StationList(dict):
    """``{station: Station}`` with the stations' names in ``names``."""

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        self.names = {}


_IGRA_LINE = re.compile(r"^[A-Z]{2}[A-Z0-9]{9} +-?\d{1,2}\.\d{4} +-?\d{1,3}\.\d{4}(?: |$)")
_ALIASES = {
    "station": ("station", "id", "station_id", "wmo", "wmo_id", "index", "iiiii", "icao", "call_sign"),
    "latitude": ("latitude", "lat", "latitude_deg"),
    "longitude": ("longitude", "lon", "long", "longitude_deg"),
    "elevation": ("elevation_m", "elevation", "elev", "height", "altitude", "height_m", "altitude_m"),
    "name": ("name", "station_name"),
}


def read_stations(path) -> StationList:
    """Station list from a file: a CSV with a header, or the IGRA v2 station list (sniffed).

    Raises
    ------
    SoundingFormatError
        A file that cannot be read, has no station, latitude and longitude columns, or a row whose values
        are not numbers in range (naming the file and line).
    """
    try:
        text = Path(path).read_text(encoding="utf-8", errors="replace")
    except OSError as exc:
        raise SoundingFormatError(f"cannot read station list: {exc.strerror}", file=path) from exc
    return parse_stations(text, source=str(path))


def parse_stations(text: str, source: str = "<string>") -> StationList:
    """Station list from its text (see :func:`read_stations`)."""
    first = next((ln for ln in text.splitlines() if ln.strip() and not ln.startswith("#")), "")
    if _IGRA_LINE.match(first):
        return _igra(text, source)
    return _csv(text, source)


def _number(value, what, lo, hi, source, line):
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise SoundingFormatError(f"station list: {what} {value!r} is not a number", file=source,
                                  line=line) from None
    if not lo <= v <= hi:
        raise SoundingFormatError(f"station list: {what} {v:g} outside {lo:g}..{hi:g}", file=source, line=line)
    return v


def _igra(text, source):
    out = StationList()
    for n, line in enumerate(text.splitlines(), 1):
        if not line.strip():
            continue
        if len(line) < 30 or not _IGRA_LINE.match(line):
            raise SoundingFormatError("IGRA v2 station list: line is not ID, LATITUDE, LONGITUDE, ELEVATION in "
                                      "fixed columns", file=source, line=n, column=1)
        sid = line[0:11].strip()
        lat = _number(line[12:20], "latitude", -90.0, 90.0, source, n)
        lon = _number(line[21:30], "longitude", -180.0, 360.0, source, n)
        lon = lon - 360.0 if lon > 180.0 else lon
        elev_text = line[31:37].strip()
        elev = float(elev_text) if re.fullmatch(r"-?\d+(\.\d*)?", elev_text or "x") else np.nan
        if elev <= -998.0:  # -998.8 and -999.9: elevation unknown (ship, mobile or not given)
            elev = np.nan
        st = Station(lat, lon, elev)
        name = line[41:71].strip()
        out[sid] = st
        out.names[sid] = name
        if sid[2] == "M" and sid[3:6] == "000" and sid[6:].isdigit():
            out.setdefault(sid[6:], st)  # the WMO index number as TEMP spells it
            out.names.setdefault(sid[6:], name)
    if not out:
        raise SoundingFormatError("IGRA v2 station list holds no station", file=source)
    return out


def _csv(text, source):
    lines = [ln for ln in text.splitlines() if not ln.startswith("#")]
    sample = "\n".join(lines[:5])
    try:
        dialect = csv.Sniffer().sniff(sample, delimiters=",;\t")
    except csv.Error:
        dialect = csv.excel
    reader = csv.reader(io.StringIO("\n".join(lines)), dialect)
    try:
        header = [h.strip().lower() for h in next(reader)]
    except StopIteration:
        raise SoundingFormatError("station list is empty", file=source) from None
    cols = {}
    for key, names in _ALIASES.items():
        cols[key] = next((header.index(nm) for nm in names if nm in header), None)
    need = [k for k in ("station", "latitude", "longitude") if cols[k] is None]
    if need:
        raise SoundingFormatError(f"station list has no {', '.join(need)} column (header: {', '.join(header)}); "
                                  "expected station,name,latitude,longitude,elevation_m or an IGRA v2 station "
                                  "list", file=source, line=1)
    # Line numbers of the file (comments are not rows but count as lines).
    numbers = [k for k, ln in enumerate(text.splitlines(), 1) if not ln.startswith("#")]
    out = StationList()
    for r, row in enumerate(reader, 1):
        n = numbers[r] if r < len(numbers) else None
        if not row or not any(c.strip() for c in row):
            continue
        if len(row) < len(header):
            row = row + [""] * (len(header) - len(row))
        sid = row[cols["station"]].strip()
        if not sid:
            raise SoundingFormatError("station list row without a station", file=source, line=n)
        lat = _number(row[cols["latitude"]].strip(), "latitude", -90.0, 90.0, source, n)
        lon = _number(row[cols["longitude"]].strip(), "longitude", -180.0, 360.0, source, n)
        lon = lon - 360.0 if lon > 180.0 else lon
        e = row[cols["elevation"]].strip() if cols["elevation"] is not None else ""
        elev = _number(e, "elevation", -500.0, 9000.0, source, n) if e else np.nan
        out[sid] = Station(lat, lon, elev)
        if sid.isdigit() and len(sid) < 5:
            out.setdefault(sid.zfill(5), out[sid])  # index numbers that lost their leading zeros in a spreadsheet
        if cols["name"] is not None:
            out.names[sid] = row[cols["name"]].strip()
    return out

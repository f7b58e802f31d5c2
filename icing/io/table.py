"""Delimited-text soundings (CSV, TSV, semicolon) in the project's own spreadsheet layout.

Layout (documented in the README)::

    # station: 00101
    # name: Port Aldren
    # latitude: 52.10
    # longitude: -34.80
    # elevation_m: 12
    # time: 2026-01-15T00:00:00Z
    pressure_hPa,height_m,temperature_degC,dewpoint_degC,wind_direction_deg,wind_speed_kt
    1013,12,4.2,3.1,220,15

Comment lines start with ``#``; ``# key: value`` lines give metadata. The header names each column as
``variable_unit`` (``variable [unit]`` and ``variable (unit)`` work too). Empty cells, ``NA``, ``nan`` and
``-9999`` are missing. Unknown columns are reported in the quality record, never silently used or dropped.
"""

from __future__ import annotations

import csv
import io
import re

import numpy as np

from icing.errors import ProfileQualityError, SoundingFormatError, UnitError
from icing.io import file_bytes
from icing.profile import VARIABLES, build_profile, check_temperature_unit
from icing.units import Quantity, parse_unit

FORMAT = "table"

_NAMES = {
    "pressure": "pressure", "pres": "pressure", "p": "pressure", "press": "pressure",
    "height": "height", "hght": "height", "altitude": "height", "z": "height", "geopotential_height": "height",
    "temperature": "temperature", "temp": "temperature", "t": "temperature", "air_temperature": "temperature",
    "dewpoint": "dewpoint", "dew_point": "dewpoint", "dwpt": "dewpoint", "td": "dewpoint",
    "dewpoint_temperature": "dewpoint",
    "relative_humidity": "relative_humidity", "rh": "relative_humidity", "relh": "relative_humidity",
    "humidity": "relative_humidity",
    "wind_speed": "wind_speed", "speed": "wind_speed", "sknt": "wind_speed", "wspd": "wind_speed",
    "wind_direction": "wind_direction", "direction": "wind_direction", "drct": "wind_direction",
    "wdir": "wind_direction",
    "cloud_liquid": "cloud_liquid", "lwc": "cloud_liquid", "cloud_water": "cloud_liquid",
}
_MISSING = {"", "na", "nan", "n/a", "-9999", "-9999.0", "//", "///", "-"}
_META_FLOAT = {"latitude": "latitude", "lat": "latitude", "longitude": "longitude", "lon": "longitude",
               "elevation_m": "elevation", "elevation": "elevation"}


def sniff(head: bytes, path) -> bool:
    """A text file whose first non-comment line names a pressure column and at least one other."""
    if b"\x00" in head:
        return False
    try:
        text = head.decode("utf-8-sig")
    except UnicodeDecodeError:
        return False
    for line in text.splitlines():
        s = line.strip()
        if not s or s.startswith("#"):
            continue
        cells = [c.strip().lower() for c in re.split(r"[,;\t]", s)]
        return len(cells) >= 2 and any(_split_header(c)[0] == "pressure" for c in cells)
    return False


def _split_header(cell: str):
    """(canonical variable or None, unit text or None) from a header cell."""
    c = cell.strip()
    m = re.match(r"^(.*?)\s*[\[(]\s*(.*?)\s*[\])]\s*$", c)
    if m:
        name, unit = m.group(1), m.group(2)
    else:
        name, unit = c, None
    key = name.strip().lower().replace(" ", "_").replace("-", "_")
    if key in _NAMES:
        return _NAMES[key], unit
    if unit is None:  # variable_unit: try every split point from the right
        parts = key.split("_")
        for k in range(len(parts) - 1, 0, -1):
            head = "_".join(parts[:k])
            if head in _NAMES:
                # keep the unit's original spelling (case matters for some units)
                return _NAMES[head], c.strip()[len(head) + 1:]
    return None, unit


def read(path, **options):
    """Read a delimited sounding table into a one-element list of profiles.

    Raises
    ------
    SoundingFormatError
        Empty or binary file, no header, no pressure or temperature column, unknown unit, text in a number
        field, a row with too many cells, a temperature column in kelvin labelled degC.
    """
    raw = file_bytes(path, "table")
    if b"\x00" in raw[:8192]:
        raise SoundingFormatError("binary file, not a delimited text table", file=path, line=1)
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise SoundingFormatError("not UTF-8 text", file=path, line=line) from exc
    lines = text.splitlines()
    if not any(s.strip() for s in lines):
        raise SoundingFormatError("file is empty", file=path, line=1)
    meta, header_no = {}, None
    for no, line in enumerate(lines, 1):
        s = line.strip()
        if not s:
            continue
        if s.startswith("#"):
            m = re.match(r"^#\s*([A-Za-z_]+)\s*:\s*(.*?)\s*$", s)
            if m:
                meta[m.group(1).lower()] = (m.group(2), no)
            continue
        header_no = no
        break
    if header_no is None:
        raise SoundingFormatError("no header row (only comments)", file=path, line=len(lines))
    delim = max(",;\t", key=lambda d: lines[header_no - 1].count(d))
    header = next(csv.reader([lines[header_no - 1]], delimiter=delim))
    columns, quality = {}, []
    for j, cell in enumerate(header):
        var, unit_text = _split_header(cell)
        if var is None:
            quality.append({"level": None, "action": "ignored", "line": header_no,
                            "reason": f"column {j + 1} {cell.strip()!r} is not a known variable"})
            continue
        if var in columns:
            raise SoundingFormatError(f"two columns for {var}", file=path, line=header_no, column=cell.strip())
        if unit_text is None or not unit_text.strip():
            raise SoundingFormatError(f"column {cell.strip()!r} has no unit (write it as {var}_"
                                      f"{VARIABLES[var][0].replace('degree', 'deg')})", file=path,
                                      line=header_no, column=cell.strip())
        try:
            unit = parse_unit(unit_text)
        except UnitError as exc:
            raise SoundingFormatError(str(exc), file=path, line=header_no, column=cell.strip()) from exc
        if not (Quantity(1.0, unit).dimensionality == Quantity(1.0, VARIABLES[var][0]).dimensionality):
            raise SoundingFormatError(f"unit {unit_text!r} does not fit {var}", file=path, line=header_no,
                                      column=cell.strip())
        columns[var] = (j, unit, cell.strip())
    for need in ("pressure", "temperature"):
        if need not in columns:
            raise SoundingFormatError(f"missing column: {need}", file=path, line=header_no)
    values = {v: [] for v in columns}
    row_lines = []
    for no in range(header_no + 1, len(lines) + 1):
        s = lines[no - 1].strip()
        if not s or s.startswith("#"):
            continue
        cells = next(csv.reader([lines[no - 1]], delimiter=delim))
        if len(cells) > len(header):
            raise SoundingFormatError(f"{len(cells)} cells for {len(header)} columns", file=path, line=no)
        for var, (j, _, name) in columns.items():
            c = cells[j].strip() if j < len(cells) else ""
            if c.lower() in _MISSING:
                values[var].append(np.nan)
                continue
            try:
                values[var].append(float(c))
            except ValueError:
                raise SoundingFormatError(f"{c!r} is not a number", file=path, line=no, column=name) from None
        row_lines.append(no)
    if not row_lines:
        raise SoundingFormatError("header but no data rows", file=path, line=header_no)
    kwargs = {}
    for var, (_, unit, name) in columns.items():
        arr = np.asarray(values[var], dtype=float)
        if var == "temperature" or var == "dewpoint":
            try:
                check_temperature_unit(arr, str(unit), name=var, file=path, line=header_no, column=name)
            except ProfileQualityError as exc:
                raise SoundingFormatError(exc.reason, file=path, line=header_no, column=name) from None
        kwargs[var] = Quantity(arr, unit)
    md = {}
    for key, (val, no) in meta.items():
        if key in _META_FLOAT:
            try:
                md[_META_FLOAT[key]] = float(val)
            except ValueError:
                raise SoundingFormatError(f"{key} {val!r} is not a number", file=path, line=no) from None
        elif key == "time":
            md["time"] = val
        elif key in ("station", "id"):
            md["station"] = val
    t = kwargs.pop("temperature")
    p = kwargs.pop("pressure")
    try:
        prof = build_profile(p, t, **kwargs, **md, source=str(path), format=FORMAT, lines=row_lines,
                             quality=quality)
    except ProfileQualityError as exc:
        raise ProfileQualityError(exc.reason, file=path, line=exc.line, column=exc.column) from None
    except ValueError as exc:  # an unparseable time
        raise SoundingFormatError(f"bad metadata: {exc}", file=path, line=meta.get("time", ("", None))[1]) \
            from None
    if "name" in meta:
        prof.attrs["name"] = meta["name"][0]
    for key, (val, _) in meta.items():
        if key.startswith("scenario"):
            prof.attrs["scenario"] = val
    return [prof]


def write(profile, path_or_buffer=None) -> str:
    """Write a single profile in this layout; return the text (and write it when a path is given)."""
    buf = io.StringIO()
    for key in ("station", "name", "latitude", "longitude", "elevation", "time"):
        if key in profile.attrs and profile.attrs[key] not in ("", None):
            buf.write(f"# {'elevation_m' if key == 'elevation' else key}: {profile.attrs[key]}\n")
    names = [n for n in VARIABLES if n in profile]
    units = {"degree": "deg", "percent": "percent", "g/m^3": "g/m3"}
    buf.write(",".join(f"{n}_{units.get(VARIABLES[n][0], VARIABLES[n][0])}" for n in names) + "\n")
    for i in range(profile.sizes["level"]):
        buf.write(",".join("" if not np.isfinite(profile[n].values[i]) else f"{profile[n].values[i]:.6g}"
                           for n in names) + "\n")
    text = buf.getvalue()
    if path_or_buffer is not None:
        with open(path_or_buffer, "w") as fh:
            fh.write(text)
    return text

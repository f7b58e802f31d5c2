"""Delimited-text soundings (CSV, TSV, semicolon, whitespace) in the project's own spreadsheet layout.

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
``variable_unit``, ``variable [unit]``, ``variable (unit)`` or ``variable unit``; names may contain spaces
(``dew point temperature_C``). A header without units takes them from a second header row of units only, or
from the ``units=`` argument (a mapping variable -> unit). Empty cells, ``NA``, ``nan`` and ``-9999`` are
missing. Unknown columns are reported in the quality record, never silently used or dropped.

Text as users write it: a UTF-8 byte-order mark, CRLF or CR line ends, UTF-16 with a byte-order mark, Latin-1
text (with a note), a Unicode minus sign, a decimal comma in semicolon- or tab-separated files, and stray
control characters (removed, with a note) all read. The file is read line by line into typed arrays, so memory
stays near the size of the numbers (8 bytes a value), not of the text.
"""

from __future__ import annotations

import codecs
import csv
import io
import re
from array import array

import numpy as np
import pandas as pd

from icing.errors import ProfileQualityError, SoundingFormatError, UnitError
from icing.profile import ELEVATION_RANGE, VARIABLES, build_profile, check_pressure_unit, check_temperature_unit
from icing.units import Quantity, parse_unit

__all__ = ["FORMAT", "sniff", "read", "write"]

FORMAT = "table"

_NAMES = {
    "pressure": "pressure", "pres": "pressure", "p": "pressure", "press": "pressure", "air_pressure": "pressure",
    "pressure_level": "pressure", "prs": "pressure",
    "height": "height", "hght": "height", "altitude": "height", "z": "height", "geopotential_height": "height",
    "gph": "height", "gpm": "height", "geopotential_altitude": "height", "height_msl": "height",
    "temperature": "temperature", "temp": "temperature", "t": "temperature", "air_temperature": "temperature",
    "air_temp": "temperature", "tmp": "temperature", "tt": "temperature",
    "dewpoint": "dewpoint", "dew_point": "dewpoint", "dwpt": "dewpoint", "td": "dewpoint",
    "dewpoint_temperature": "dewpoint", "dew_point_temperature": "dewpoint", "dewpt": "dewpoint",
    "dew_pt": "dewpoint", "dew": "dewpoint",
    "relative_humidity": "relative_humidity", "rh": "relative_humidity", "relh": "relative_humidity",
    "humidity": "relative_humidity", "rel_humidity": "relative_humidity", "hur": "relative_humidity",
    "wind_speed": "wind_speed", "speed": "wind_speed", "sknt": "wind_speed", "wspd": "wind_speed",
    "windspeed": "wind_speed", "ff": "wind_speed",
    "wind_direction": "wind_direction", "direction": "wind_direction", "drct": "wind_direction",
    "wdir": "wind_direction", "wind_from_direction": "wind_direction", "winddirection": "wind_direction",
    "dd": "wind_direction",
    "cloud_liquid": "cloud_liquid", "lwc": "cloud_liquid", "cloud_water": "cloud_liquid",
    "cloud_liquid_water": "cloud_liquid",
}
_MISSING = {"", "na", "nan", "n/a", "-9999", "-9999.0", "-9999.9", "-99999", "//", "///", "-", "--", "null",
            "none", "missing", "m"}
_META_FLOAT = {"latitude": "latitude", "lat": "latitude", "longitude": "longitude", "lon": "longitude",
               "elevation_m": "elevation", "elevation": "elevation", "elev": "elevation"}
_META_RANGE = {"latitude": (-90.0, 90.0), "longitude": (-180.0, 360.0), "elevation": ELEVATION_RANGE}
_CONTROL = re.compile(r"[\x00-\x08\x0b\x0c\x0e-\x1f\x7f\x85\u200b-\u200d\u2028\u2029\u2060\ufeff]")
_MINUS = str.maketrans({"\u2212": "-", "\u2013": "-", "\u00a0": " ", "\u202f": " "})
_DECIMAL_COMMA = re.compile(r"^[-+]?\d*,\d+(?:[eE][-+]?\d+)?$")
MAX_CELL = 64  # characters: a longer number cell is corrupt (doubles carry 17 significant digits)
_CHUNK = 1 << 16  # values per array growth step (the arrays grow; nothing is held as text)


def _decode_head(head: bytes):
    """Text of the start of a file in the encoding the reader will use, or None for binary data."""
    if head.startswith((codecs.BOM_UTF16_LE, codecs.BOM_UTF16_BE)):
        text = head.decode("utf-16", errors="ignore")
    elif _binary(head):
        return None
    else:
        head = head.replace(b"\x00", b"")
        try:
            text = head.decode("utf-8-sig")
        except UnicodeDecodeError as exc:
            if exc.start >= len(head) - 3:  # a multi-byte character cut by the end of the head
                text = head[: exc.start].decode("utf-8-sig")
            else:
                text = head.decode("latin-1")
    return text.replace("\r\n", "\n").replace("\r", "\n")


def _binary(head: bytes) -> bool:
    """More than a stray NUL byte or two: binary data, not text with a control character in it."""
    return head.count(b"\x00") > 2 + len(head) // 200


def _split(line: str, delim):
    if delim is None:
        return line.split()
    if '"' in line:
        try:
            return next(csv.reader([line], delimiter=delim))
        except (csv.Error, StopIteration):
            return line.split(delim)
    return line.split(delim)


def _delimiter(line: str):
    counts = {d: line.count(d) for d in ",;\t"}
    best = max(counts, key=counts.get)
    return best if counts[best] else None


def sniff(head: bytes, path) -> bool:
    """A text file whose first non-comment line names a pressure column and at least one other."""
    text = _decode_head(head)
    if text is None:
        return False
    for line in text.split("\n"):
        s = _CONTROL.sub("", line).strip()
        if not s or s.startswith("#"):
            continue
        cells = [c.strip().lower() for c in _split(s, _delimiter(s))]
        return len(cells) >= 2 and any(_split_header(c)[0] == "pressure" for c in cells)
    return False


def _split_header(cell: str):
    """(canonical variable or None, unit text or None) from a header cell."""
    c = cell.strip().translate(_MINUS).strip()
    m = re.match(r"^(.*?)\s*[\[(]\s*(.*?)\s*[\])]\s*$", c)
    if m:
        name, unit = m.group(1), m.group(2)
    else:
        name, unit = c, None
    key = re.sub(r"[\s\-]+", "_", name.strip().lower()).strip("_")
    if key in _NAMES:
        return _NAMES[key], unit
    if unit is None:  # "variable_unit" or "variable unit": try every split point from the right
        spaced = re.sub(r"[\s\-]", "_", c.lower())  # one character for one, so the unit keeps its place
        parts = spaced.split("_")
        for k in range(len(parts) - 1, 0, -1):
            head = "_".join(parts[:k])
            if head in _NAMES:
                # keep the unit's original spelling (case matters for some units)
                return _NAMES[head], c[len(head) + 1:].strip(" _")
    return None, unit


class _Text:
    """Lines of a text file, one at a time, with their numbers, cleaned of control characters (recorded)."""

    def __init__(self, path, raw_head: bytes, quality):
        self.path, self.quality = path, quality
        self.cleaned, self.first_cleaned = 0, None
        if raw_head.startswith((codecs.BOM_UTF16_LE, codecs.BOM_UTF16_BE)):
            self.encoding = "utf-16"
        else:
            self.encoding = "utf-8-sig"
            if _binary(raw_head):
                raise SoundingFormatError("binary file, not a delimited text table", file=path, line=1)

    def lines(self):
        try:
            yield from self._lines(self.encoding)
        except _Restart:
            self.quality.append({"level": None, "action": "note", "reason": "file is not UTF-8: read as Latin-1 "
                                 "(ISO 8859-1)"})
            self.cleaned, self.first_cleaned = 0, None
            yield from self._lines("latin-1", restarted=True)

    def _lines(self, encoding, restarted=False):
        no = 0
        try:
            with open(self.path, encoding=encoding, errors="strict", newline=None) as fh:
                for line in fh:
                    no += 1
                    if restarted and no <= self.skip:
                        continue
                    line = line.rstrip("\n")
                    if no == 1:
                        line = line.lstrip("\ufeff")  # a byte-order mark is no content
                    if _CONTROL.search(line):
                        line = self._clean(line, no)
                    yield no, line
        except UnicodeDecodeError:
            if encoding == "utf-8-sig" and not restarted:
                self.skip = no  # lines already given out were valid UTF-8 and read the same in Latin-1
                raise _Restart() from None
            raise SoundingFormatError("cannot decode the text", file=self.path, line=no + 1) from None
        except OSError as exc:
            raise SoundingFormatError(f"cannot read: {exc.strerror}", file=self.path) from None

    def _clean(self, line, no):
        n = len(_CONTROL.findall(line))
        self.cleaned += n
        if self.first_cleaned is None:
            self.first_cleaned = no
        return _CONTROL.sub("", line)

    def note(self):
        if self.cleaned:
            self.quality.append({"level": None, "action": "changed", "line": self.first_cleaned,
                                 "reason": f"{self.cleaned} stray control character(s) removed (first at line "
                                 f"{self.first_cleaned})"})


class _Restart(Exception):
    pass


def _number(cell: str, delim, path, no, name, notes):
    """A float from a cell; NaN for a missing marker; SoundingFormatError for text."""
    c = cell.strip()
    if len(c) > MAX_CELL:  # checked before parsing: Python would read 300,000 digits as inf
        raise SoundingFormatError(f"a cell of {len(c):,} characters is not a number of this table (at most "
                                  f"{MAX_CELL})", file=path, line=no, column=name)
    if "_" not in c:  # Python would read 1_000 as 1000: no spreadsheet writes that
        try:
            return float(c)
        except ValueError:
            pass
    low = c.lower()
    if low in _MISSING:
        return np.nan
    d = c.translate(_MINUS).replace(" ", "").replace("_", "x")
    if delim != "," and _DECIMAL_COMMA.match(d):
        notes["decimal comma"] = notes.get("decimal comma", no)
        d = d.replace(",", ".")
    try:
        v = float(d)
    except ValueError:
        raise SoundingFormatError(f"{c[:40]!r} is not a number", file=path, line=no, column=name) from None
    if d != c:
        notes.setdefault("unicode", no)
    return v


def read(path, units=None, **options):
    """Read a delimited sounding table into a one-element list of profiles.

    Parameters
    ----------
    path : str or path-like
    units : mapping, optional
        Units of columns whose header gives none, by variable (``{"temperature": "degC", "pressure": "hPa"}``)
        or by header name. A unit given both ways must agree.

    Raises
    ------
    SoundingFormatError
        Empty or binary file, no header, no pressure or temperature column, unknown unit, a unit that does not
        fit the values (kelvin labelled degC, hPa labelled Pa...), text in a number field, a row with too many
        cells, metadata out of range.
    ProfileQualityError
        Too few usable levels (see :func:`icing.profile.build_profile`).
    """
    if options:
        raise SoundingFormatError(f"unknown table reader option(s): {', '.join(options)}", file=path)
    raw_head = _head(path)
    if not raw_head.strip(b" \t\r\n\x00\xef\xbb\xbf\xff\xfe"):
        raise SoundingFormatError("file is empty", file=path, line=1)
    quality = []
    text = _Text(path, raw_head, quality)
    units = _units_option(units, path)
    lines = text.lines()
    meta, header, header_no = {}, None, None
    for no, line in lines:
        s = line.strip()
        if not s:
            continue
        if s.startswith("#"):
            m = re.match(r"^#\s*([A-Za-z_ ]+?)\s*[:=]\s*(.*?)\s*$", s)
            if m:
                key = m.group(1).lower().replace(" ", "_")
                if key in meta and meta[key][0] != m.group(2):
                    raise SoundingFormatError(f"two values for {key}: {meta[key][0][:40]!r} (line {meta[key][1]}) "
                                              f"and {m.group(2)[:40]!r}", file=path, line=no)
                meta[key] = (m.group(2), no)
            continue
        header_no, header = no, s
        break
    if header is None:
        raise SoundingFormatError("no header row (only comments)" if meta else "file is empty", file=path,
                                  line=max(1, header_no or 1))
    delim = _delimiter(header)
    cells = [c.strip() for c in _split(header, delim)]
    parsed = [_split_header(c) for c in cells]
    first_row = None
    if not any(u for _, u in parsed) and not units:
        # A second header row of units only ("hPa, m, C, ..."): take it.
        for no, line in lines:
            s = line.strip()
            if not s or s.startswith("#"):
                continue
            unit_cells = [c.strip().strip("[]()") for c in _split(s, delim)]
            if len(unit_cells) == len(cells) and all(_is_unit(u) or not u for u in unit_cells) and \
                    any(_is_unit(u) for u in unit_cells):
                parsed = [(v, u or None) for (v, _), u in zip(parsed, unit_cells, strict=True)]
            else:
                first_row = (no, line)
            break
    columns, above_ground = {}, set()
    for j, (cell, (var, unit_text)) in enumerate(zip(cells, parsed, strict=True)):
        if var is None:
            if cell:
                quality.append({"level": None, "action": "ignored", "line": header_no,
                                "reason": f"column {j + 1} {cell!r} is not a known variable"})
            continue
        if var in columns:
            raise SoundingFormatError(f"two columns for {var}", file=path, line=header_no, column=cell)
        option = units.get(var, units.get(cell.lower()))
        if option is not None and unit_text and parse_unit_or_none(unit_text) != parse_unit_or_none(option):
            raise SoundingFormatError(f"column {cell!r} says {unit_text!r} but units= gives {option!r}",
                                      file=path, line=header_no, column=cell)
        unit_text = unit_text or option
        if unit_text is None or not str(unit_text).strip():
            raise SoundingFormatError(f"column {cell!r} has no unit (write it as {var}_"
                                      f"{VARIABLES[var][0].replace('degree', 'deg')}, or pass units="
                                      f"{{'{var}': '{VARIABLES[var][0]}'}})", file=path, line=header_no,
                                      column=cell)
        agl = re.match(r"^(.*?)[\s_]*(?:agl|above[\s_]+ground(?:[\s_]+level)?)$", str(unit_text).strip(), re.I)
        if agl and var == "height":
            above_ground.add(cell)
            unit_text = agl.group(1) or "m"
        try:
            unit = parse_unit(str(unit_text))
        except UnitError as exc:
            raise SoundingFormatError(str(exc), file=path, line=header_no, column=cell) from None
        if var == "relative_humidity" and unit == parse_unit("1"):
            pass  # a fraction: converted to percent below
        elif Quantity(1.0, unit).dimensionality != Quantity(1.0, VARIABLES[var][0]).dimensionality:
            raise SoundingFormatError(f"unit {unit_text!r} does not fit {var}", file=path, line=header_no,
                                      column=cell)
        columns[var] = (j, unit, cell)
    for need in ("pressure", "temperature"):
        if need not in columns:
            raise SoundingFormatError(f"missing column: {need}", file=path, line=header_no)
    values, row_lines, notes = _rows(path, lines, first_row, columns, len(cells), delim)
    text.note()
    for what, no in notes.items():
        quality.append({"level": None, "action": "changed", "line": no, "reason": {
            "decimal comma": "decimal commas read as decimal points",
            "unicode": "Unicode minus signs or spaces in numbers read as ASCII"}[what]})
    if row_lines.size == 0:
        raise SoundingFormatError("header but no data rows", file=path, line=header_no)
    kwargs = {}
    for var, (_, unit, name) in columns.items():
        arr = values[var]
        try:
            if var in ("temperature", "dewpoint"):
                check_temperature_unit(arr, str(unit), name=var)
            if var == "relative_humidity" and unit == parse_unit("1"):
                arr = arr * 100.0
            elif unit != parse_unit(VARIABLES[var][0]):
                arr = np.asarray(Quantity(arr, unit).to(VARIABLES[var][0]).magnitude, dtype=float)
            if var == "pressure":
                check_pressure_unit(arr, f"{unit:~}")
        except ProfileQualityError as exc:
            raise SoundingFormatError(exc.reason, file=path, line=header_no, column=name) from None
        kwargs[var] = arr
        values[var] = None  # the converted copy replaces the read one (memory)
    md = _metadata(meta, path, quality)
    if above_ground and "height" in kwargs:
        if not np.isfinite(md.get("elevation", np.nan)):
            raise SoundingFormatError("heights above ground level need the station elevation (# elevation_m: ...)",
                                      file=path, line=header_no, column=columns["height"][2])
        kwargs["height"] += md["elevation"]
        quality.append({"level": None, "action": "changed", "variable": "height", "line": header_no,
                        "reason": f"heights above ground level: station elevation {md['elevation']:g} m added"})
    t = kwargs.pop("temperature")
    p = kwargs.pop("pressure")
    prof = build_profile(p, t, **kwargs, **md, source=str(path), format=FORMAT, lines=row_lines, quality=quality,
                         copy=False)
    if "name" in meta:
        prof.attrs["name"] = meta["name"][0]
    for key, (val, _) in meta.items():
        if key.startswith("scenario"):
            prof.attrs["scenario"] = val
    return [prof]


def _head(path):
    """The first 8 KB of the file (SoundingFormatError if it cannot be read)."""
    try:
        with open(path, "rb") as fh:
            return fh.read(8192)
    except OSError as exc:
        raise SoundingFormatError(f"cannot read: {exc.strerror}", file=path) from None


def parse_unit_or_none(text):
    try:
        return parse_unit(str(text))
    except UnitError:
        return None


def _is_unit(text):
    t = text.strip()
    if not t:
        return False
    try:
        float(t)
        return False
    except ValueError:
        return parse_unit_or_none(t) is not None


def _units_option(units, path):
    if units is None:
        return {}
    if not hasattr(units, "items"):
        raise SoundingFormatError(f"units= must be a mapping variable -> unit, got {type(units).__name__}", file=path)
    out = {}
    for k, v in units.items():
        key = str(k).strip().lower()
        var = _NAMES.get(key.replace(" ", "_"), None)
        if parse_unit_or_none(v) is None:
            raise SoundingFormatError(f"units=: unknown unit {v!r} for {k!r}", file=path)
        out[var or key] = str(v)
    return out


def _rows(path, lines, first_row, columns, ncells, delim):
    """Typed arrays of the data rows (one per column) and their line numbers, read line by line.

    Rows go through in blocks: a block is parsed at C speed by pandas; a block it refuses (text in a number
    field, a decimal comma, too many cells) is parsed again row by row to find and name the cell.
    """
    cols = [(var, j, name) for var, (j, _, name) in columns.items()]
    store = {var: array("d") for var, _, _ in cols}
    row_lines = array("q")
    notes = {}
    block, block_lines = [], []
    longest = ncells * (MAX_CELL + 2)

    def rows():
        if first_row is not None:
            yield first_row
        yield from lines

    def flush():
        if not block:
            return
        simple = max(map(len, block)) <= longest and (
            all(s.count(delim) < ncells for s in block) if delim else all(len(s.split()) <= ncells for s in block))
        parsed = _parse_block(block, cols, ncells, delim) if simple else None
        if parsed is None:
            for no, s in zip(block_lines, block, strict=True):
                cells = _split(s, delim)
                if len(cells) > ncells and any(c.strip() for c in cells[ncells:]):
                    raise SoundingFormatError(f"{len(cells)} cells for {ncells} columns", file=path, line=no)
                for var, j, name in cols:
                    store[var].append(_number(cells[j] if j < len(cells) else "", delim, path, no, name, notes))
        else:
            for var, _, _ in cols:
                store[var].extend(parsed[var])
        row_lines.extend(block_lines)
        block.clear()
        block_lines.clear()

    for no, line in rows():
        s = line.strip()
        if not s or s[0] == "#":
            continue
        block.append(s)
        block_lines.append(no)
        if len(block) >= _CHUNK:
            flush()
    flush()
    values = {var: np.frombuffer(a, dtype=float) if len(a) else np.zeros(0) for var, a in store.items()}
    return values, np.frombuffer(row_lines, dtype=np.int64) if len(row_lines) else np.zeros(0, int), notes


def _parse_block(block, cols, ncells, delim):
    """{variable: float array} for a block of data rows by pandas' C parser, or None if it refuses any row."""
    try:
        frame = pd.read_csv(io.StringIO("\n".join(block)), sep=r"\s+" if delim is None else delim, header=None,
                            names=list(range(max(ncells, 1))), usecols=[j for _, j, _ in cols], dtype=float,
                            na_values=sorted(_MISSING), keep_default_na=False, skipinitialspace=True,
                            skip_blank_lines=False, engine="c", quotechar='"',
                            index_col=False)
    except (ValueError, pd.errors.ParserError, OverflowError):
        return None
    if len(frame) != len(block):
        return None
    return {var: frame[j].to_numpy(dtype=float) for var, j, _ in cols}


_META_TIME = {"time", "valid_time", "datetime", "date_time", "launch_time", "date"}
_META_STATION = {"station", "id", "station_id", "wmo_id", "site", "station_name_id"}
_META_VALUE = re.compile(r"^\s*([-+\u2212]?[\d.]+(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")
_META_KNOWN = {"name", "scenario", "station_name", "comment", "source", "note", "notes", "title"}
_META_NUMBER = re.compile(r"^(latitude|lat|longitude|lon|elevation|elev|altitude|station_elevation|"
                          r"station_altitude|height_of_station)(?:_(.+))?$")


def _metadata(meta, path, quality=None):
    """Station metadata from ``# key: value`` lines: position (degrees), elevation (m, or in the unit after an
    underscore or in the value, as ``elevation_ft: 4900`` or ``elevation: 1500 m``), valid time, station."""
    md, seen = {}, {}
    for key, (val, no) in meta.items():
        m = _META_NUMBER.match(key)
        if m:
            base = m.group(1)
            name = "latitude" if base.startswith("lat") else "longitude" if base.startswith("lon") else "elevation"
            if name in seen:
                raise SoundingFormatError(f"{name} given twice (lines {seen[name]} and {no})", file=path, line=no)
            seen[name] = no
            if val.strip().lower() in _MISSING - {"m"}:
                continue  # unknown, said so
            num = _META_VALUE.match(val) if len(val) <= MAX_CELL else None
            unit_text = (num.group(2) if num and num.group(2) else None) or m.group(2)
            try:
                v = float(num.group(1).translate(_MINUS)) if num else None
            except ValueError:
                v = None
            if v is None or not np.isfinite(v):
                raise SoundingFormatError(f"{key} {val[:40]!r} is not a number", file=path, line=no)
            if unit_text and name == "elevation":
                unit = parse_unit_or_none(unit_text)
                if unit is None or Quantity(1.0, unit).dimensionality != Quantity(1.0, "m").dimensionality:
                    raise SoundingFormatError(f"{key}: unit {unit_text!r} is not a length", file=path, line=no)
                v = float(Quantity(v, unit).to("m").magnitude)
            elif unit_text and name != "elevation" and unit_text.lower() not in (
                    "deg", "degree", "degrees", "°", "degrees_north", "degrees_east", "n", "e", "deg_n", "deg_e"):
                raise SoundingFormatError(f"{key}: unit {unit_text!r} is not degrees", file=path, line=no)
            lo, hi = _META_RANGE[name]
            if not lo <= v <= hi:
                raise SoundingFormatError(f"{key} {v:g} outside {lo:g}..{hi:g}", file=path, line=no)
            md[name] = v
        elif key in _META_TIME:
            if "time" in md:
                raise SoundingFormatError(f"two times ({key} and another)", file=path, line=no)
            try:
                ts = pd.Timestamp(val)
                if ts is pd.NaT:
                    raise ValueError("empty")
            except (ValueError, TypeError, OverflowError) as exc:
                raise SoundingFormatError(f"time {val[:40]!r} is not a date and time ({exc})", file=path,
                                          line=no) from None
            md["time"] = val
        elif key in _META_STATION:
            md["station"] = val
        elif quality is not None and key not in _META_KNOWN and not key.startswith("scenario"):
            quality.append({"level": None, "action": "ignored", "line": no,
                            "reason": f"metadata {key!r} is not used"})
    return md


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

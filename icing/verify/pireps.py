"""Pilot reports in the encoded form of the trade: ``UA`` (routine) and ``UUA`` (urgent).

The layout follows the US pilot-report format (FAA Order JO 7110.10, Flight Services, and the Aeronautical
Information Manual, chapter 7, "Pilot weather reports": the order of the fields and their contents, from
memory)::

    [station] UA /OV location /TM hhmm /FL fff /TP type [/SK sky] [/WX weather] [/TA tt] [/WV wind]
                 [/TB turbulence] [/IC icing] [/RM remarks]

``/OV``, ``/TM``, ``/FL`` and ``/TP`` are mandatory (``/TP UNKN`` where the type is not known). What we read:

* ``/OV``: a fix (a name in the user's waypoint table, see :func:`read_waypoints`), a fix with a 6-digit bearing
  (degrees, magnetic in the format) and distance (nautical miles) from it (``ABC090025``), or latitude and
  longitude in degrees and minutes (``4530N07315W``, ``45N073W``). A route between two fixes (``ABC-DEF``) is
  refused: it is no single place. The bearing is turned to a true bearing by the fix's ``variation`` in the
  table, else by ``magnetic_variation`` (degrees, east positive: true = magnetic + variation; default 0, the
  bearing taken as true, with a note).
* ``/TM``: the time in UTC, ``hhmm``; the date comes from the ``date`` argument (the report carries none).
* ``/FL``: three digits, hundreds of feet (``080`` is 8,000 ft); ``UNKN``, ``DURC`` (during climb), ``DURD``
  (during descent) have no level: flight level NaN. A range ``060-080`` gives its middle.
* ``/TA``: temperature in whole degrees Celsius, ``M`` for minus (``M04`` is -4 degC).
* ``/IC``: intensity ``NEG``, ``TRACE`` (``TRC``), ``LGT``, ``MOD``, ``SEV`` (``HVY``, an older word, read as
  severe), a range such as ``LGT-MOD`` (``intensity`` is the higher word, ``intensity_low`` the lower: a range
  cannot be ruled out at its upper end), and the type ``RIME``, ``CLR`` (clear ice, our ``glaze``), ``MXD``
  (mixed); a layer ``fff-fff`` (e.g. ``LGT RIME 060-080``) gives ``icing_base_fl`` and ``icing_top_fl``.
  ``NEGclr`` (no icing, in clear air) is a null report. A null report (``NEG``) is observed no icing.
* ``/SK``, ``/WX``, ``/WV``, ``/TB`` are kept as text; ``/RM`` is the rest of the report, as text.

Reports are one per line, or separated by ``=`` (as in a bulletin). A report that cannot be read raises
:class:`PirepFormatError` naming the file, line and reason, or, with ``errors="skip"``, is listed with that
reason in ``reports.attrs["skipped"]`` (never dropped silently).
"""

from __future__ import annotations

import datetime as _dt
import re
from pathlib import Path

import numpy as np

from icing.errors import LocatedError

__all__ = ["PirepFormatError", "parse_pirep", "parse_pireps", "read_pireps", "read_waypoints", "icing_layer",
           "INTENSITY_ORDER", "REPORT_COLUMNS"]

INTENSITY_ORDER = ("none", "trace", "light", "moderate", "severe")
_INTENSITY_WORDS = {"NEG": "none", "NEGCLR": "none", "NONE": "none", "TRACE": "trace", "TRC": "trace",
                    "LGT": "light", "MOD": "moderate", "SEV": "severe", "HVY": "severe"}
_TYPE_WORDS = {"RIME": "rime", "CLR": "glaze", "CLEAR": "glaze", "MXD": "mixed", "MIXED": "mixed"}
_FIELDS = ("OV", "TM", "FL", "TP", "SK", "WX", "TA", "WV", "TB", "IC", "RM")
_MANDATORY = ("OV", "TM", "FL", "TP")
_HEADER = re.compile(r"^\s*(?:(?P<station>[A-Z0-9]{3,4})\s+)?(?P<kind>UUA|UA)(?=\s|/|$)\s*(?P<rest>.*)$", re.S | re.I)
# A field code not run into a longer word (/ICE is no field), except the level words written after /FL.
_FIELD_MARK = re.compile(r"/\s*(OV|TM|FL|TP|SK|WX|TA|WV|TB|IC)(?:(?<=FL)(?=UNKN|DURC|DURD)|(?![A-Z]))", re.I)
_REMARK = re.compile(r"/\s*RM(?![A-Z])", re.I)
_LATLON = re.compile(r"^([0-9]{2})([0-9]{2})?([NS])\s*([0-9]{3})([0-9]{2})?([EW])$")
_FIX_OFFSET = re.compile(r"^([A-Z0-9]{1,11}?)\s*([0-9]{3})([0-9]{3})$")
NM = 1852.0  # m per nautical mile (exact, by definition)

REPORT_COLUMNS = ["file", "line", "kind", "station", "location", "latitude", "longitude", "time", "flight_level",
                  "altitude_ft", "aircraft_type", "sky", "temperature_c", "icing", "intensity", "intensity_low",
                  "ice_type", "icing_base_fl", "icing_top_fl", "icing_text", "remarks", "notes", "text"]


class PirepFormatError(LocatedError, ValueError):
    """A pilot report (or a waypoint table) cannot be read: a missing mandatory field, an unknown fix, a bad
    time, level, temperature or icing group."""


# ------------------------------------------------------------------------------------------------ waypoints
def read_waypoints(path):
    """The user's waypoint table, read by the project's one reader of it
    (:func:`icing.flight.item15.read_waypoints`: a CSV with the header ``name,latitude,longitude`` and optional
    ``variation``, magnetic, degrees east positive, used for bearings from the point). Errors are its
    :class:`~icing.errors.RouteFormatError` naming the file and line."""
    from icing.flight.item15 import read_waypoints as read_table

    return read_table(path)


def _table(waypoints):
    """(points, variations) from a waypoint table, a ``{name: (lat, lon)}`` dict or None."""
    if waypoints is None:
        return {}, {}
    if hasattr(waypoints, "points"):
        return dict(waypoints.points), dict(getattr(waypoints, "variation", {}) or {})
    return {str(k).upper(): v for k, v in dict(waypoints).items()}, {}


# ------------------------------------------------------------------------------------------------ fields
def _location(value, waypoints, magnetic_variation, notes):
    v = " ".join(value.upper().split())
    if not v:
        raise ValueError("/OV is empty")
    if "-" in v:
        raise ValueError(f"/OV {value.strip()} is a route between fixes, not one place")
    m = _LATLON.match(v)
    if m:
        lat = int(m[1]) + (int(m[2]) / 60.0 if m[2] else 0.0)
        lon = int(m[4]) + (int(m[5]) / 60.0 if m[5] else 0.0)
        if (m[2] and int(m[2]) >= 60) or (m[5] and int(m[5]) >= 60) or lat > 90 or lon > 180:
            raise ValueError(f"/OV {v}: latitude or longitude out of range")
        return (-lat if m[3] == "S" else lat), (-lon if m[6] == "W" else lon)
    points, variations = _table(waypoints)
    if v.replace(" ", "") in points:
        return points[v.replace(" ", "")]
    m = _FIX_OFFSET.match(v)
    if m and m[1] in points:
        bearing, dist_nm = int(m[2]), int(m[3])
        if bearing > 360:
            raise ValueError(f"/OV {v}: bearing {bearing:03d} is over 360 degrees")
        lat0, lon0 = points[m[1]]
        if dist_nm == 0:
            return lat0, lon0
        from pyproj import Geod

        var = variations.get(m[1])
        if var is None:
            var = magnetic_variation
            if var == 0.0:
                notes.append(f"bearing {bearing:03d} from {m[1]} taken as true (no magnetic variation given)")
        lon1, lat1, _ = Geod(ellps="WGS84").fwd(lon0, lat0, (bearing + var) % 360.0, dist_nm * NM)
        return float(lat1), float(lon1)
    fix = m[1] if m else v
    if not points:
        raise ValueError(f"/OV {v}: a fix needs a waypoint table (name,latitude,longitude)")
    raise ValueError(f"/OV {v}: fix {fix} is not in the waypoint table")


def _time(value, date):
    v = value.strip()
    if not re.fullmatch(r"[0-9]{4}", v):
        raise ValueError(f"/TM {v!r} is not four digits hhmm (UTC)")
    hh, mm = int(v[:2]), int(v[2:])
    if hh > 23 or mm > 59:
        raise ValueError(f"/TM {v}: not a time of day")
    if date is None:
        return np.datetime64("NaT", "s"), v
    return np.datetime64(f"{date.isoformat()}T{hh:02d}:{mm:02d}", "s"), v


def _flight_level(value):
    v = value.strip().upper()
    if v in ("UNKN", "DURC", "DURD"):
        return np.nan
    if re.fullmatch(r"[0-9]{3}", v):
        return float(v)
    m = re.fullmatch(r"([0-9]{3})\s*-\s*([0-9]{3})", v)
    if m:
        lo, hi = sorted((float(m[1]), float(m[2])))
        return (lo + hi) / 2.0
    raise ValueError(f"/FL {value.strip()!r} is not three digits (hundreds of feet), a range fff-fff or UNKN")


def _temperature(value):
    v = value.strip().upper()
    m = re.fullmatch(r"(M|-|PS|\+)?([0-9]{1,2})", v)
    if not m:
        raise ValueError(f"/TA {value.strip()!r} is not a temperature in whole degrees Celsius (M for minus)")
    t = float(m[2])
    return -t if m[1] in ("M", "-") else t


def icing_layer(value):
    """(base, top) flight levels of an icing layer written in /IC as ``fff-fff`` (hundreds of feet), NaN if
    none."""
    m = re.search(r"(?<![0-9])([0-9]{3})-([0-9]{3})(?![0-9])", str(value))
    if not m:
        return np.nan, np.nan
    lo, hi = sorted((float(m[1]), float(m[2])))
    return lo, hi


def _icing(value):
    """(icing observed: bool, intensity, lower intensity, ice type) from the /IC text."""
    v = value.strip().upper()
    if not v:
        raise ValueError("/IC is empty")
    intensities, kind = [], None
    for tok in re.split(r"[\s,]+", v):
        words = tok.split("-")
        if all(w in _INTENSITY_WORDS for w in words) and not intensities:
            intensities = [_INTENSITY_WORDS[w] for w in words]
        elif tok in _TYPE_WORDS and kind is None:
            kind = _TYPE_WORDS[tok]
    if not intensities and kind is None:
        raise ValueError(f"/IC {value.strip()!r}: no intensity (NEG, TRACE, LGT, MOD, SEV) or type (RIME, CLR, MXD)")
    if not intensities:  # a type without a word: icing, intensity not given
        return True, None, None, kind
    ranks = sorted(INTENSITY_ORDER.index(w) for w in intensities)
    hi, lo = INTENSITY_ORDER[ranks[-1]], INTENSITY_ORDER[ranks[0]]
    if hi == "none" and kind is not None:
        raise ValueError(f"/IC {value.strip()!r}: no icing (NEG) with an ice type")
    return hi != "none", hi, lo, kind


def _as_date(date):
    if date is None:
        return None
    if isinstance(date, _dt.datetime):
        return date.date()
    if isinstance(date, _dt.date):
        return date
    try:
        return np.datetime64(str(date).rstrip("Z"), "D").astype(object)
    except ValueError:
        raise PirepFormatError(f"date {date!r} is not an ISO date (YYYY-MM-DD)") from None


def _split_fields(rest):
    rm = _REMARK.search(rest)
    head, remark = (rest[: rm.start()], rest[rm.end():].strip()) if rm else (rest, None)
    marks = list(_FIELD_MARK.finditer(head))
    before = head[: marks[0].start()] if marks else head
    if before.strip():
        raise ValueError(f"text {before.strip()!r} before the first field")
    fields = {}
    for i, m in enumerate(marks):
        end = marks[i + 1].start() if i + 1 < len(marks) else len(head)
        code = m[1].upper()
        if code in fields:
            raise ValueError(f"field /{code} given twice")
        fields[code] = head[m.end():end].strip()
    if remark is not None:
        fields["RM"] = remark
    return fields


def parse_pirep(text, date=None, waypoints=None, *, file=None, line=None, magnetic_variation=0.0) -> dict:
    """One pilot report as a dict with the keys of :data:`REPORT_COLUMNS`.

    Parameters
    ----------
    text : str
        The report, e.g. ``"UA /OV 4530N07315W/TM 1522/FL080/TP PC12/TA M04/IC LGT RIME"``.
    date : str, datetime.date or datetime, optional
        The UTC date of the report (``/TM`` gives only hhmm). Without it ``time`` is NaT.
    waypoints : WaypointTable or dict, optional
        A waypoint table (:func:`read_waypoints`; its ``variation`` of a fix turns bearings from it to true) or a
        ``{fix: (latitude, longitude)}`` dict, for positions given by a fix.
    file, line : optional
        Where the report came from, for error messages and the ``file``/``line`` keys.
    magnetic_variation : float
        Degrees east (positive) added to a bearing from a fix that has no variation in the table, to make it
        true; default 0 (the bearing is then taken as true and the report's ``notes`` say so).

    Raises
    ------
    PirepFormatError
        Not a ``UA``/``UUA`` report, a mandatory field missing (``/OV``, ``/TM``, ``/FL``, ``/TP``), a field given
        twice, or a field that cannot be read; the message names the file, line and field.
    """
    raw = str(text).strip()
    m = _HEADER.match(raw)
    if not m:
        raise PirepFormatError("not a pilot report: no UA or UUA at the start", file=file, line=line)
    rest = raw[m.start("rest"):]
    try:
        fields = _split_fields(rest)
        missing = [f"/{c}" for c in _MANDATORY if c not in fields]
        if missing:
            raise ValueError(f"missing mandatory field{'s' if len(missing) > 1 else ''} {', '.join(missing)}")
        notes = []
        lat, lon = _location(fields["OV"], waypoints, float(magnetic_variation), notes)
        time, _ = _time(fields["TM"], _as_date(date))
        fl = _flight_level(fields["FL"])
        if not fields["TP"]:
            raise ValueError("/TP is empty (UNKN where the type is not known)")
        temp = _temperature(fields["TA"]) if fields.get("TA") else np.nan
        if "IC" in fields:
            icing, intensity, low, kind = _icing(fields["IC"])
            layer = icing_layer(fields["IC"])
        else:
            icing, intensity, low, kind = None, None, None, None
            layer = (np.nan, np.nan)
    except ValueError as exc:
        raise PirepFormatError(str(exc), file=file, line=line) from None
    return {"file": None if file is None else str(file), "line": line, "kind": m["kind"].upper(),
            "station": None if m["station"] is None else m["station"].upper(),
            "location": " ".join(fields["OV"].split()).upper(), "latitude": float(lat), "longitude": float(lon),
            "time": time, "flight_level": fl, "altitude_ft": fl * 100.0, "aircraft_type": fields["TP"],
            "sky": fields.get("SK"), "temperature_c": temp, "icing": icing, "intensity": intensity,
            "intensity_low": low, "ice_type": kind, "icing_base_fl": layer[0], "icing_top_fl": layer[1],
            "icing_text": fields.get("IC"), "remarks": fields.get("RM"), "notes": "; ".join(notes),
            "text": raw}


def _chunks(text):
    """(line number, report text) for every report: one a line, or several separated by '='."""
    for n, raw in enumerate(text.splitlines(), start=1):
        for part in raw.split("="):
            if part.strip():
                yield n, part.strip()


def parse_pireps(text, date=None, waypoints=None, *, file=None, errors="skip", magnetic_variation=0.0):
    """Every report of a text as a DataFrame (one row a report, :data:`REPORT_COLUMNS`).

    ``errors="skip"`` (default) lists each report that cannot be read in ``frame.attrs["skipped"]`` (dicts
    with ``file``, ``line``, ``reason``, ``text``); ``errors="raise"`` raises its :class:`PirepFormatError`.
    A text without any readable report raises :class:`PirepFormatError` either way.
    """
    import pandas as pd

    if errors not in ("skip", "raise"):
        raise ValueError(f"errors must be 'skip' or 'raise', not {errors!r}")
    rows, skipped = [], []
    for n, chunk in _chunks(text):
        try:
            rows.append(parse_pirep(chunk, date, waypoints, file=file, line=n, magnetic_variation=magnetic_variation))
        except PirepFormatError as exc:
            if errors == "raise":
                raise
            skipped.append({"file": None if file is None else str(file), "line": n, "reason": exc.reason,
                            "text": chunk})
    if not rows:
        why = f" ({len(skipped)} skipped; first: line {skipped[0]['line']}: {skipped[0]['reason']})" if skipped else ""
        raise PirepFormatError(f"no readable pilot report{why}", file=file)
    frame = pd.DataFrame(rows, columns=REPORT_COLUMNS)
    frame["time"] = pd.to_datetime(frame["time"]).dt.tz_localize("UTC")
    frame["icing"] = frame["icing"].astype("boolean")
    cat = pd.CategoricalDtype(list(INTENSITY_ORDER), ordered=True)
    frame["intensity"] = frame["intensity"].astype(cat)
    frame["intensity_low"] = frame["intensity_low"].astype(cat)
    frame.attrs["skipped"] = skipped
    return frame


def read_pireps(path, date=None, waypoints=None, *, errors="skip", magnetic_variation=0.0):
    """Pilot reports from a text file (see :func:`parse_pireps`). ``waypoints`` is a waypoint table, a dict or
    the path of a waypoint table (:func:`read_waypoints`)."""
    path = Path(path)
    if isinstance(waypoints, str) or hasattr(waypoints, "__fspath__"):
        waypoints = read_waypoints(waypoints)
    try:
        text = path.read_text(encoding="utf-8-sig")
    except (OSError, UnicodeDecodeError) as exc:
        raise PirepFormatError(f"cannot read the reports: {exc}", file=path) from None
    return parse_pireps(text, date, waypoints, file=path, errors=errors, magnetic_variation=magnetic_variation)

"""Reader for upper-air reports in the traditional alphanumeric codes (WMO-No. 306, Manual on Codes, Volume
I.1, Part A): TEMP (FM 35), TEMP SHIP (FM 36), TEMP DROP (FM 37), TEMP MOBIL (FM 38), and PILOT (FM 32) with its
SHIP and MOBIL forms (FM 33, FM 34), also as the wind-by-height parts (PPBB, PPDD) of a TEMP ascent.

The work is split by concern:

* :mod:`~icing.io.temp.framing`: GTS framing and bulletin headings skipped, text split into reports, section 1
  of every form (index number, or call sign and position, and for MOBIL the station's elevation);
* :mod:`~icing.io.temp.codes`: the code tables (temperature, dewpoint depression, wind, heights, position);
* :mod:`~icing.io.temp.standard`: Parts A and C (standard isobaric surfaces, tropopause, maximum wind);
* :mod:`~icing.io.temp.significant`: Parts B and D (significant levels, 21212 winds, sections not used);
* :mod:`~icing.io.temp.pilot`: PILOT parts (winds at standard surfaces, winds by altitude);
* :mod:`~icing.io.temp.ascents`: corrections (CCx) and retards (RRx), the parts of one ascent merged;
* this module: profiles built with :func:`icing.profile.build_profile`, positions from a station list
  (:mod:`icing.io.stations`), the reader interface (``FORMAT``, ``sniff``, ``read``).

A group that cannot be decoded, or a section this reader does not use, is skipped and listed in the quality
record of its own ascent with its line and column; it is never fatal. Heights of significant levels are
computed by the hypsometric equation between the reported standard-level heights (``build_profile``);
winds reported by altitude get their pressure from the ascent's own heights (interpolated in ln p).

TEMP gives the day and hour only; pass ``reference_time`` (any date in the month of the ascent, or just
after it) to get full valid times. Land stations' positions come from ``stations`` (a mapping
``{"00101": (lat, lon, elevation_m)}``, or the path of a station CSV or an IGRA v2 station list; see
:func:`icing.io.stations.read_stations`); :func:`read` also uses a ``stations.csv`` lying next to the file.
Ship, drop and mobile reports carry their own position. A station missing from a given list is named in a
quality note and an :class:`icing.errors.IcingWarning`.
"""

from __future__ import annotations

import re
import warnings
from pathlib import Path

import numpy as np

from icing.errors import IcingWarning, ProfileQualityError, SoundingFormatError
from icing.io import file_bytes
from icing.io.stations import read_stations
from icing.io.temp.ascents import decode_temp_arrays, merge_repeated_levels
from icing.io.temp.codes import (
    decode_dewpoint_depression,
    decode_position,
    decode_standard_height,
    decode_temperature,
    decode_wind,
)
from icing.io.temp.pilot import ALTITUDE_UNIT_M
from icing.profile import build_profile

__all__ = ["FORMAT", "sniff", "read", "decode_temp", "decode_temp_arrays", "read_stations",
           "decode_temperature", "decode_dewpoint_depression", "decode_wind", "decode_standard_height",
           "decode_position"]

FORMAT = "temp"
_SNIFF = re.compile(rb"(?:^|[\s=\x01-\x1f])(?:TT|UU|XX|II|PP|QQ|EE)(?:AA|BB|CC|DD)\s+(?:(?:CC|RR|AA)[A-Z]\s+)?"
                    rb"(?:[0-9/]{5}\s+[0-9]{5}|[0-9A-Z]{3,9}\s+[0-9/]{5}\s+99[0-9]{3}|[0-9/]{5}\s+99[0-9]{3}"
                    rb"|[0-9/]{5}\s+[0-9A-Z]{3,9}\s+99[0-9]{3})",
                    re.IGNORECASE)
_LAND_FORMS = ("TEMP", "PILOT")


def _winds_by_height(asc, ds, quality):
    """Rows (pressure, height, nan, nan, direction, speed, line) for the winds reported by altitude, their
    pressure interpolated in ln p at their height within the ascent's heights; others recorded."""
    z, p = ds["height"].values, ds["pressure"].values
    ok = np.isfinite(z) & np.isfinite(p)
    z, lnp = z[ok], np.log(p[ok])
    rows = []
    for height, wd, ws, line, _ in asc["wind_by_height"]:
        if height is None:  # altitude 0: the station's surface
            ps = asc["surface_pressure"] if np.isfinite(asc["surface_pressure"]) else (p[0] if p.size else np.nan)
            if np.isfinite(ps):
                rows.append((float(ps), np.nan, np.nan, np.nan, wd, ws, line))
            else:
                quality.append({"level": None, "action": "skipped", "line": int(line),
                                "reason": "surface wind by altitude: no surface pressure in this ascent"})
            continue
        if z.size < 2 or not z[0] <= height <= z[-1]:
            top = f" ({z[0]:.0f}-{z[-1]:.0f} m)" if z.size else ""
            quality.append({"level": None, "action": "skipped", "line": int(line),
                            "reason": f"wind at altitude {height:g} m lies outside the heights of the "
                            f"temperature ascent{top}: no pressure for it"})
            continue
        pz = float(np.exp(np.interp(height, z, lnp)))
        # (to 0.001 hPa, a few decimetres even at 10 hPa: rounding to 0.1 hPa would merge a wind 10 m above a
        # standard level aloft with that level)
        rows.append((round(pz, 3), float(height), np.nan, np.nan, wd, ws, line))
    return rows


def _position(asc, stations, quality, missing):
    """(lat, lon, elevation) of an ascent: the report's own for ship, drop and mobile forms, else the list's."""
    lat, lon, elev = asc["latitude"], asc["longitude"], asc["elevation"]
    if np.isfinite(lat):
        quality.append({"level": None, "action": "note", "reason": f"{asc['form']}: position "
                        f"{lat:.1f}, {lon:.1f} from the report's own section 1"})
        return lat, lon, elev
    if stations is None:
        quality.append({"level": None, "action": "note", "reason": f"position of station {asc['station']} "
                        "unknown: TEMP gives the index number only (pass a station list)"})
        return np.nan, np.nan, elev
    entry = stations.get(asc["station"])
    if entry is None:
        quality.append({"level": None, "action": "note", "reason": f"station {asc['station']} is not in the "
                        "station list: position and elevation unknown"})
        missing.append(asc["station"])
        return np.nan, np.nan, elev
    lat, lon, e = entry[:3]
    return lat, lon, (e if np.isfinite(e) else elev)


def decode_temp(text: str, source: str = "<string>", stations=None, reference_time=None,
                altitude_unit=ALTITUDE_UNIT_M) -> list:
    """Decode TEMP and PILOT text (any number of reports of any form, parts A-D, with GTS framing) into profiles.

    Parameters
    ----------
    text : str
        The reports.
    source : str
        Name used in the profiles' ``source`` attribute and in error messages.
    stations : mapping or path, optional
        ``{"00101": (latitude, longitude, elevation_m)}``, or a station CSV or IGRA v2 station list; the
        elevation anchors the surface. Ship, drop and mobile reports carry their own position.
    reference_time : datetime-like, optional
        A time in (or within a day after) the month of the ascents; TEMP itself gives day and hour only.
    altitude_unit : float
        Unit (m) of the altitudes of PILOT winds by altitude (9tnu1u2u3): 300 m after WMO-No. 306 FM 32
        (from memory); 304.8 for feeds that count it as 1000 ft.

    Returns
    -------
    list of xarray.Dataset
        One canonical profile per ascent with temperatures, with every skipped group in ``attrs["quality"]``.
        Attributes ``temp_form``, ``temp_parts`` (the TEMP parts merged) and ``wind_parts`` (PILOT parts).

    Raises
    ------
    SoundingFormatError
        The text holds no report, only NIL reports, or no ascent with two usable temperatures.

    Warns
    -----
    IcingWarning
        A station missing from the given station list; an ascent that gives no profile (wind only, NIL
        only, or too few temperatures), naming its station.
    """
    if stations is not None and not hasattr(stations, "get"):
        stations = read_stations(stations)
    if not (isinstance(altitude_unit, int | float) and 1.0 <= altitude_unit <= 2000.0):
        raise SoundingFormatError(f"altitude_unit {altitude_unit!r} is not a length in metres (300 or 304.8)",
                                  file=source)
    ascents, loose = decode_temp_arrays(text, source, reference_time, altitude_unit)
    profiles, orphans, missing = [], [], []
    for asc in ascents:
        quality = list(asc["quality"])
        lat, lon, elev = _position(asc, stations, quality, missing)
        z = asc["height"]
        if np.isfinite(elev) and np.isfinite(asc["surface_pressure"]):
            z = np.where((asc["pressure"] == asc["surface_pressure"]) & ~np.isfinite(z), elev, z)
        if reference_time is None:
            quality.append({"level": None, "action": "note", "reason": f"valid time unknown: the report gives day "
                            f"{asc['day']} hour {asc['hour']:02d} UTC only (pass reference_time)"})
        arrays = (asc["pressure"], asc["temperature"], z, asc["dewpoint"], asc["wind_speed"],
                  asc["wind_direction"], asc["line"])
        meta = dict(station=asc["station"], latitude=lat, longitude=lon, elevation=elev, time=asc["time"],
                    source=source, format=FORMAT)
        try:
            ds = _build(arrays, meta, quality)
            if asc["wind_by_height"]:
                n0 = len(quality)
                extra = _winds_by_height(asc, ds, quality)
                if not extra:
                    ds.attrs["quality"] = list(ds.attrs["quality"]) + quality[n0:]
                else:
                    base = np.column_stack([asc["pressure"], z, asc["temperature"], asc["dewpoint"],
                                            asc["wind_direction"], asc["wind_speed"], asc["line"]])
                    arr, merged = merge_repeated_levels([tuple(r) for r in base] + extra)
                    quality += merged
                    arrays = (arr[:, 0], arr[:, 2], arr[:, 1], arr[:, 3], arr[:, 5], arr[:, 4],
                              arr[:, 6].astype(int))
                    ds = _build(arrays, meta, quality)
        except ProfileQualityError as exc:
            orphans.append(f"{asc['form']} {asc['station']} day {asc['day']} {asc['hour']:02d} UTC (parts "
                           f"{asc['parts'] or '-'}, wind parts {asc['wind_parts'] or '-'}): {exc.reason}")
            continue
        ds.attrs["temp_form"] = asc["form"]
        ds.attrs["temp_parts"] = asc["parts"]
        ds.attrs["wind_parts"] = asc["wind_parts"]
        profiles.append(ds)
    if missing:
        warnings.warn(f"{source}: station(s) not in the station list, position unknown: "
                      f"{', '.join(sorted(set(missing)))}", IcingWarning, stacklevel=2)
    if not profiles:
        if loose and all(e.get("action") in ("nil", "note") for e in loose) and not orphans:
            raise SoundingFormatError("the file holds only NIL reports (no data)", file=source)
        reasons = "; ".join(orphans[:2] + [e["reason"] for e in loose[:3]]) or "no TEMP or PILOT report found"
        first = next((e for e in loose if e.get("line")), {})
        raise SoundingFormatError(f"no decodable TEMP ascent: {reasons}", file=source, line=first.get("line"),
                                  column=first.get("column"))
    # What belongs to a station (a NIL report, a report whose day group is bad) goes on that station's
    # profile; a station with no profile is named in a warning, never put on another station's profile.
    by_station = {}
    for ds in profiles:
        by_station.setdefault(ds.attrs["station"], ds)
    unplaced = {}
    for e in loose:
        st = e.get("station")
        if not st:
            continue
        ds = by_station.get(st)
        if ds is not None:
            ds.attrs["quality"] = list(ds.attrs["quality"]) + [dict(e, scope="station")]
        else:
            unplaced.setdefault(st, []).append(e["reason"])
    what = orphans + [f"station {st}: {'; '.join(dict.fromkeys(r))}" for st, r in unplaced.items()]
    if what:
        warnings.warn(f"{source}: no profile for {len(what)} ascent(s): {'; '.join(what)}", IcingWarning,
                      stacklevel=2)
    general = [dict(e, scope="file") for e in loose if not e.get("station")]
    if general:
        profiles[0].attrs["quality"] = list(profiles[0].attrs["quality"]) + general
    return profiles


def _build(arrays, meta, quality):
    p, t, z, td, ws, wd, lines = arrays
    return build_profile(p, t, height=z, dewpoint=td, wind_speed=ws, wind_direction=wd, lines=lines,
                         quality=list(quality), **meta)


def sniff(head: bytes, path) -> bool:
    """True if the start of the file holds a TEMP or PILOT part identifier followed by its section 1."""
    return b"\x00" not in head and _SNIFF.search(head) is not None


def read(path, stations=None, reference_time=None, altitude_unit=ALTITUDE_UNIT_M, **options) -> list:
    """Every ascent in a TEMP/PILOT file as a canonical profile (see :func:`decode_temp`).

    A ``stations.csv`` next to the file is used when ``stations`` is not given.
    """
    path = Path(path)
    raw = file_bytes(path, "TEMP", options)
    if b"\x00" in raw:
        raise SoundingFormatError("binary data in a TEMP text file", file=path)
    text = raw.decode("latin-1")
    if stations is None and (path.parent / "stations.csv").exists():
        stations = path.parent / "stations.csv"
    return decode_temp(text, source=str(path), stations=stations, reference_time=reference_time,
                       altitude_unit=altitude_unit)

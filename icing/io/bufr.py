"""Reader for radiosonde reports in WMO FM 94 BUFR, through ecCodes' Python bindings (``eccodes``).

Every ascent ecCodes decodes comes back: every subset of every message, compressed or not, of the WMO
radiosonde templates in use (3 09 052 TEMP, 3 09 056 descent, 3 09 057 high resolution, and the sequences of
reports converted from TEMP text: 3 09 007 land, 3 09 196 TEMP SHIP, 3 09 198 TEMP MOBIL). The data are walked
by descriptor (:mod:`icing.io.bufr_walk`): each delayed replication is a block of levels of its own, so a
wind-shear block (0 11 061 / 0 11 062) or any other extra block never shifts the levels of another.

Per ascent: station (block and station number 0 01 001 / 0 01 002; else the ship or mobile identifier
0 01 011; else the WIGOS identifier 0 01 125-0 01 128; else an aircraft or observer identifier), launch time
(0 04 001-0 04 006), position (0 05 001 / 0 06 001) and station height (0 07 030, else 0 07 001, else
0 07 007). Per level: pressure (0 07 004, Pa), geopotential height (0 10 009 gpm, or geopotential 0 10 008 /
0 10 003 in m2/s2 divided by standard gravity 9.80665), temperature and dewpoint (0 12 101 / 0 12 103 or
0 12 001 / 0 12 003, K), relative humidity (0 13 003), wind (0 11 001 / 0 11 002), the vertical sounding
significance (0 08 042, or 0 08 001 mapped onto it) as ``vertical_significance``, and where reported the time
since launch (0 04 086) as ``elapsed_time`` and the displacement from the launch point (0 05 015 / 0 06 015)
as ``latitude_displacement`` / ``longitude_displacement`` with the position ``level_latitude`` /
``level_longitude``. For BUFR, the ``line`` of a quality entry is the level's record number (its repetition
in the subset, 1-based), and ``bufr_message`` / ``bufr_subset`` say where the ascent is.

Records that share a reported pressure (high-resolution records 2 s apart differ by less than the 10 Pa
resolution of 0 07 004) but differ in another value are kept, each with its own values: their pressures are
spread in record order within half the resolution (±5 Pa), so the later record of an ascent is the higher,
and each change is in the quality record. A message that is not an upper-air sounding is refused with that
reason (:class:`~icing.errors.SoundingFormatError` naming the file and message number) when the file holds no
sounding; in a file that also holds soundings it is skipped and recorded.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from icing.errors import ProfileQualityError, SoundingFormatError

__all__ = ["FORMAT", "sniff", "read", "SIGNIFICANCE_BITS", "G0", "PRESSURE_RESOLUTION_HPA"]

FORMAT = "bufr"
T0 = 273.15
G0 = 9.80665  # standard gravity, m/s2 (WMO-No. 8; geopotential / G0 = geopotential height in gpm)
PRESSURE_RESOLUTION_HPA = 0.1  # Table B 0 07 004: Pa at scale -1, i.e. 10 Pa steps (WMO-No. 306 Vol. I.2)
# Flag table 0 08 042 (18 bits; bit 1 is the most significant), WMO-No. 306 Vol. I.2 (from memory).
SIGNIFICANCE_BITS = {"surface": 1 << 17, "standard_level": 1 << 16, "tropopause": 1 << 15,
                     "maximum_wind": 1 << 14, "significant_temperature": 1 << 13,
                     "significant_humidity": 1 << 12, "significant_wind": 1 << 11}
# Flag table 0 08 001 (7 bits, bit 1 = 64: surface, standard level, tropopause, maximum wind, significant
# temperature and/or humidity, significant wind; from memory) onto the bits of 0 08 042.
_SIG_008001 = {64: SIGNIFICANCE_BITS["surface"], 32: SIGNIFICANCE_BITS["standard_level"],
               16: SIGNIFICANCE_BITS["tropopause"], 8: SIGNIFICANCE_BITS["maximum_wind"],
               4: SIGNIFICANCE_BITS["significant_temperature"], 2: SIGNIFICANCE_BITS["significant_wind"]}
_HEIGHT_GPM = ("nonCoordinateGeopotentialHeight", "geopotentialHeight")
_GEOPOTENTIAL = ("nonCoordinateGeopotential", "geopotential")
_ELEVATION = ("heightOfStationGroundAboveMeanSeaLevel", "heightOfStation", "heightOfBarometerAboveMeanSeaLevel",
              "height")
_IDENTIFIERS = ("shipOrMobileLandStationIdentifier", "aircraftRegistrationNumberOrOtherIdentification",
                "aircraftFlightNumber", "stationOrSiteName", "observerIdentification")
_WIGOS = ("wigosIdentifierSeries", "wigosIssuerOfIdentifier", "wigosIssueNumber", "wigosLocalIdentifierCharacter")


def _eccodes():
    """Import eccodes (optional); PROJ (pyproj) is loaded first because loading it after the eccodes wheel's
    bundled libraries crashes the interpreter at exit in some builds (seen with eccodes 2.50)."""
    try:
        import pyproj  # noqa: F401
    except ImportError:
        pass
    try:
        import eccodes
    except ImportError as exc:
        raise SoundingFormatError("reading BUFR needs the optional eccodes package: pip install "
                                  "'icing[bufr]'") from exc
    return eccodes


def sniff(head: bytes, path) -> bool:
    """True if a BUFR message (``BUFR``, a 3-byte length, edition 2-4) starts within the first 200 bytes,
    after at most an optional bulletin heading of printable characters."""
    at = head.find(b"BUFR", 0, 200)
    if at < 0 or len(head) < at + 8 or head[at + 7] not in (2, 3, 4):
        return False
    return all(32 <= c < 127 or c in (1, 3, 10, 13) for c in head[:at])


def _template(ec, h):
    try:
        desc = [int(d) for d in ec.codes_get_array(h, "unexpandedDescriptors")]
    except ec.GribInternalError:
        return ""
    return " ".join(f"{d // 100000} {d // 1000 % 100:02d} {d % 1000:03d}" for d in desc[:3]) + (
        " ..." if len(desc) > 3 else "")


def _station(sub, values, s):
    """Station identifier: WMO block and station number, else ship/mobile/aircraft identifier, else WIGOS."""
    head = sub.header

    def num(name):
        return values.value(name, head[name], s) if name in head else np.nan

    block, number = num("blockNumber"), num("stationNumber")
    if np.isfinite(block) and np.isfinite(number):
        return f"{int(block):02d}{int(number):03d}"
    for name in _IDENTIFIERS:
        if name in head:
            text = values.text(name, head[name], s)
            if text:
                return text
    wigos = [num(n) if n != "wigosLocalIdentifierCharacter" else None for n in _WIGOS]
    local = values.text(_WIGOS[3], head[_WIGOS[3]], s) if _WIGOS[3] in head else ""
    if local and all(v is not None and np.isfinite(v) for v in wigos[:3]):
        return f"{int(wigos[0])}-{int(wigos[1])}-{int(wigos[2])}-{local}"
    if np.isfinite(number):
        return f"{int(number):03d}"
    return ""


def _launch_time(sub, values, s):
    head = sub.header
    parts = {}
    for name in ("year", "month", "day", "hour", "minute", "second"):
        v = values.value(name, head[name], s) if name in head else np.nan
        parts[name] = v
    try:
        if not all(np.isfinite(parts[k]) for k in ("year", "month", "day", "hour")):
            return None
        minute = int(parts["minute"]) if np.isfinite(parts["minute"]) else 0
        second = parts["second"] if np.isfinite(parts["second"]) else 0.0
        return pd.Timestamp(year=int(parts["year"]), month=int(parts["month"]), day=int(parts["day"]),
                            hour=int(parts["hour"]), minute=minute) + pd.Timedelta(seconds=float(second))
    except (TypeError, ValueError, OverflowError):
        return None


def _text(v):
    return f"{v:g}" if np.isfinite(v) else "missing"


def _levels(sub, values, s):
    """Arrays of every level of the subset's level blocks, in record order, and quality notes of the rest."""
    cols = {k: [] for k in ("pressure", "height", "temperature", "dewpoint", "relative_humidity", "wind_speed",
                            "wind_direction", "significance", "elapsed_time", "dlat", "dlon")}
    notes = []

    def get(rep, name):
        return values.value(name, rep[name], s) if name in rep else np.nan

    for block in sub.blocks:
        kind = block.kind
        if block.note:
            notes.append(f"block of {', '.join(block.names)}: {block.note}")
        if kind == "wind_shear":
            for rep in block.reps:
                p = get(rep, "pressure") / 100.0
                below = get(rep, "absoluteWindShearIn1KmLayerBelow")
                above = get(rep, "absoluteWindShearIn1KmLayerAbove")
                notes.append(("wind_shear", p, f"wind-shear group (0 11 061 / 0 11 062: {_text(below)} / "
                              f"{_text(above)} m/s in the 1 km below / above): not a profile variable"))
            continue
        if kind != "levels":
            if set(block.names) & {"pressure", *_HEIGHT_GPM}:
                notes.append(f"block of {len(block.reps)} repetitions of {', '.join(block.names)} without "
                             "temperature, humidity or wind: not read as levels")
            continue
        for rep in block.reps:
            cols["pressure"].append(get(rep, "pressure") / 100.0)
            z = next((get(rep, n) for n in _HEIGHT_GPM if n in rep), np.nan)
            if not np.isfinite(z):
                z = next((get(rep, n) / G0 for n in _GEOPOTENTIAL if n in rep), np.nan)
            cols["height"].append(z)
            cols["temperature"].append(get(rep, "airTemperature") - T0)
            cols["dewpoint"].append(get(rep, "dewpointTemperature") - T0)
            cols["relative_humidity"].append(get(rep, "relativeHumidity"))
            cols["wind_speed"].append(get(rep, "windSpeed"))
            cols["wind_direction"].append(get(rep, "windDirection"))
            sig = get(rep, "extendedVerticalSoundingSignificance")
            if not np.isfinite(sig) and "verticalSoundingSignificance" in rep:
                old = get(rep, "verticalSoundingSignificance")
                sig = float(sum(v for k, v in _SIG_008001.items() if int(old) & k)) if np.isfinite(old) else np.nan
            cols["significance"].append(sig)
            cols["elapsed_time"].append(get(rep, "timePeriod"))
            cols["dlat"].append(get(rep, "latitudeDisplacement"))
            cols["dlon"].append(get(rep, "longitudeDisplacement"))
    return {k: np.asarray(v, dtype=float) for k, v in cols.items()}, notes


def _spread_duplicates(lev, where):
    """Give records that share a reported pressure but differ in another value their own pressure.

    The records of a group keep their order: for an ascent (pressure falling with record number) the later
    record gets the lower pressure, all within half the 10 Pa resolution of 0 07 004 around the reported value.
    Records that agree in every value (the significance flags aside) are left for
    :func:`icing.profile.build_profile` to merge.
    Returns the new pressures and the quality entries.
    """
    p = lev["pressure"].copy()
    fin = np.flatnonzero(np.isfinite(p))
    entries = []
    if fin.size < 2:
        return p, entries
    # Ascent or descent from the first and last records' pressures (or heights, where these are equal).
    ascent = p[fin[0]] > p[fin[-1]]
    if p[fin[0]] == p[fin[-1]]:
        z = lev["height"][np.isfinite(lev["height"])]
        ascent = z.size < 2 or z[0] <= z[-1]
    values, inverse, counts = np.unique(p[fin], return_inverse=True, return_counts=True)
    names = [k for k in lev if k not in ("pressure", "significance")]  # flags of merged records are OR-ed
    for g in np.flatnonzero(counts > 1):
        idx = fin[inverse == g]
        agree = True
        for k in names:
            col = lev[k][idx]
            f = col[np.isfinite(col)]
            if f.size and np.ptp(f) > 1e-9:
                agree = False
                break
        if agree:
            continue
        m = idx.size
        step = PRESSURE_RESOLUTION_HPA * (0.5 - (np.arange(m) + 0.5) / m)
        p[idx] = values[g] + (step if ascent else -step)
        for i in idx:
            entries.append({"level": None, "line": int(i) + 1, "pressure_hpa": round(float(values[g]), 2),
                            "action": "changed", "variable": "pressure",
                            "reason": f"{where}: record {i + 1} shares the reported pressure {values[g]:g} hPa "
                            f"with records {', '.join(str(int(x) + 1) for x in idx if x != i)} but not their "
                            f"other values; set to {p[i]:.3f} hPa by record order (within half the 10 Pa "
                            "resolution)"})
    return p, entries


def _subset_profile(sub, values, source, message, template):
    from icing.profile import build_profile

    s = sub.number - 1
    where = f"message {message} subset {sub.number}"
    head = sub.header
    quality = []
    station = _station(sub, values, s)
    time = _launch_time(sub, values, s)
    if time is None:
        quality.append({"level": None, "action": "note", "reason": f"{where}: launch time missing or not "
                        "decodable"})

    def num(names):
        for n in names:
            if n in head:
                v = values.value(n, head[n], s)
                if np.isfinite(v):
                    return v
        return np.nan

    # Rounded to the 1e-5 degree of Table B 0 05 001 / 0 06 001: decoding leaves float noise (-90.00000000000001).
    # 0 07 007 (height of release) is the station height only for an ascent: in a descent (3 09 056, with
    # a coordinate significance, 0 08 091 from memory) it is where the descent starts.
    heights = _ELEVATION if "coordinatesSignificance" not in head else _ELEVATION[:-1]
    lat, lon, elevation = round(num(("latitude",)), 5), round(num(("longitude",)), 5), num(heights)
    lev, notes = _levels(sub, values, s)
    for note in notes:
        if isinstance(note, tuple):
            quality.append({"level": None, "pressure_hpa": None if not np.isfinite(note[1])
                            else round(float(note[1]), 2), "action": "skipped", "reason": f"{where}: {note[2]}"})
        else:
            quality.append({"level": None, "action": "skipped", "reason": f"{where}: {note}"})
    if sub.trailer:
        quality.append({"level": None, "action": "note", "reason": f"{where}: elements after a data operator "
                        f"(quality information or substituted values: {', '.join(sub.trailer[:6])}"
                        f"{' ...' if len(sub.trailer) > 6 else ''}) are not applied; the reported values are "
                        "kept"})
    n = lev["pressure"].size
    if n == 0:
        raise ProfileQualityError(f"{where}: no levels (no replicated pressure or height with temperature, "
                                  "humidity or wind)")
    pressure, changes = _spread_duplicates(lev, where)
    quality += changes
    present = {k: (lev[k] if np.isfinite(lev[k]).any() else None) for k in
               ("dewpoint", "relative_humidity", "wind_speed", "wind_direction")}
    if present["dewpoint"] is None and present["relative_humidity"] is None:
        present["dewpoint"] = lev["dewpoint"]
    ds = build_profile(pressure, lev["temperature"], height=lev["height"], dewpoint=present["dewpoint"],
                       relative_humidity=present["relative_humidity"], wind_speed=present["wind_speed"],
                       wind_direction=present["wind_direction"], station=station, latitude=lat, longitude=lon,
                       elevation=elevation, time=time, source=source, format=FORMAT,
                       lines=np.arange(1, n + 1), quality=quality)
    _add_level_variables(ds, pressure, lev, lat, lon)
    ds.attrs["bufr_message"] = message
    ds.attrs["bufr_subset"] = sub.number
    ds.attrs["bufr_template"] = template
    return ds


def _add_level_variables(ds, pressure, lev, lat, lon):
    """Per-level BUFR values that the canonical profile has no slot for, on the output levels.

    Each output level takes the records with its pressure (records merged by build_profile agree in these
    values, or have different pressures after :func:`_spread_duplicates`); the significance flags are OR-ed.
    """
    out_p = ds["pressure"].values
    nlev = out_p.size
    fin = np.flatnonzero(np.isfinite(pressure))
    # Output level of each record (pressures are unique after _spread_duplicates, or agree where merged).
    pos = np.searchsorted(-out_p, -pressure[fin] - 1e-9)
    ok = (pos < nlev) & (np.abs(out_p[np.minimum(pos, nlev - 1)] - pressure[fin]) < 1e-9)
    rec, lev_of = fin[ok], pos[ok]
    first = np.full(nlev, pressure.size)
    np.minimum.at(first, lev_of, rec)  # the first record of each output level
    first[first == pressure.size] = -1
    flags = np.zeros(nlev, dtype=np.int64)
    sig = lev["significance"][rec]
    good = np.isfinite(sig)
    np.bitwise_or.at(flags, lev_of[good], sig[good].astype(np.int64))
    ds["vertical_significance"] = ("level", flags, {
        "long_name": "extended vertical sounding significance (BUFR flag table 0 08 042)",
        "flag_masks": np.array(list(SIGNIFICANCE_BITS.values()), dtype=np.int64),
        "flag_meanings": " ".join(SIGNIFICANCE_BITS)})
    ds["bufr_record"] = ("level", first + 1, {"long_name": "record number of the level in its BUFR subset "
                                                           "(first record where several were merged; 0: none)"})

    def pick(col):
        out = np.full(nlev, np.nan)
        ok = first >= 0
        out[ok] = col[first[ok]]
        return out

    if np.isfinite(lev["elapsed_time"]).any():
        ds["elapsed_time"] = ("level", pick(lev["elapsed_time"]), {
            "units": "s", "long_name": "time since launch (BUFR 0 04 086)"})
    if np.isfinite(lev["dlat"]).any() or np.isfinite(lev["dlon"]).any():
        dlat, dlon = pick(lev["dlat"]), pick(lev["dlon"])
        ds["latitude_displacement"] = ("level", dlat, {"units": "degree_north", "long_name":
                                                       "latitude displacement from the launch site (0 05 015)"})
        ds["longitude_displacement"] = ("level", dlon, {"units": "degree_east", "long_name":
                                                        "longitude displacement from the launch site (0 06 015)"})
        ds["level_latitude"] = ("level", lat + dlat, {"units": "degree_north", "standard_name": "latitude",
                                                      "long_name": "latitude of the sonde at the level"})
        ds["level_longitude"] = ("level", (lon + dlon + 180.0) % 360.0 - 180.0, {
            "units": "degree_east", "standard_name": "longitude", "long_name": "longitude of the sonde at the level"})


def read(path, **options) -> list:
    """Every radiosonde ascent (subset) of every BUFR message in the file, as canonical profiles.

    Raises
    ------
    SoundingFormatError
        The file holds no decodable upper-air sounding (naming the message and the reason).
    """
    from icing.io.bufr_walk import message_subsets

    path = Path(path)
    if options:
        raise SoundingFormatError(f"unknown BUFR reader option(s): {', '.join(options)}", file=path)
    ec = _eccodes()
    profiles, skipped, refused = [], [], []
    message = 0
    try:
        fh = open(path, "rb")
    except OSError as exc:
        raise SoundingFormatError(f"cannot read: {exc.strerror}", file=path) from exc
    with fh:
        while True:
            try:
                h = ec.codes_bufr_new_from_file(fh)
            except ec.GribInternalError as exc:
                skipped.append({"level": None, "action": "skipped", "reason": f"message {message + 1}: not "
                                f"decodable ({exc}); rest of the file not read"})
                break
            if h is None:
                break
            message += 1
            try:
                profiles += _message_profiles(ec, h, message, str(path), skipped, refused, message_subsets)
            except ec.GribInternalError as exc:
                skipped.append({"level": None, "action": "skipped",
                                "reason": f"message {message}: ecCodes cannot decode it ({exc})"})
            finally:
                ec.codes_release(h)
    if not profiles:
        if refused and len(refused) == message:
            raise SoundingFormatError(refused[0], file=path)
        reason = skipped[0]["reason"] if skipped else (refused[0] if refused else "no BUFR message in the file")
        raise SoundingFormatError(f"no radiosonde profile decoded: {reason}", file=path)
    skipped += [{"level": None, "action": "skipped", "reason": r} for r in refused]
    if skipped:
        profiles[0].attrs["quality"] = list(profiles[0].attrs["quality"]) + [dict(e, scope="file")
                                                                             for e in skipped]
    return profiles


def _message_profiles(ec, h, message, source, skipped, refused, message_subsets):
    ec.codes_set(h, "skipExtraKeyAttributes", 1)
    ec.codes_set(h, "unpack", 1)
    nsub = int(ec.codes_get(h, "numberOfSubsets"))
    compressed = bool(ec.codes_get(h, "compressedData"))
    template = _template(ec, h)
    subsets, values = message_subsets(ec, h, nsub, compressed)
    if len(subsets) != nsub:  # never seen; guards the split of an uncompressed message at subsetNumber keys
        skipped.append({"level": None, "action": "skipped", "reason": f"message {message}: {nsub} subsets in "
                        f"section 3 but the elements of {len(subsets)} decoded; message not read"})
        return []
    if not any(b.kind == "levels" for sub in subsets for b in sub.blocks):
        try:
            category = int(ec.codes_get(h, "dataCategory"))
        except ec.GribInternalError:
            category = -1
        if category == 2 and template.startswith("3 09"):
            for sub in subsets:
                skipped.append({"level": None, "action": "skipped", "reason": f"message {message} subset "
                                f"{sub.number} (template {template}): an upper-air sounding with no levels"})
            return []
        refused.append(f"message {message}: not an upper-air sounding (BUFR data category {category}, "
                       f"template {template or 'unknown'}): no replicated pressure or height levels with "
                       "temperature, humidity or wind")
        return []
    out = []
    for sub in subsets:
        try:
            out.append(_subset_profile(sub, values, source, message, template))
        except (ProfileQualityError, SoundingFormatError) as exc:
            reason = exc.reason if hasattr(exc, "reason") else str(exc)
            if not reason.startswith("message "):
                reason = f"message {message} subset {sub.number}: {reason}"
            skipped.append({"level": None, "action": "skipped", "reason": reason})
    return out

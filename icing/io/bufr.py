"""Reader for radiosonde reports in WMO FM 94 BUFR (the TEMP sequence, e.g. 3 09 052), through eccodes.

eccodes is an optional extra (``pip install icing[bufr]``; its wheel carries the library). Every subset of
every message becomes one profile: station (block and station number, 0 01 001 / 0 01 002), launch time
(0 04 001-0 04 006), position (0 05 001 / 0 06 001), station height (0 07 030), and per level pressure
(0 07 004, Pa), geopotential height (0 10 009, gpm), temperature and dewpoint (0 12 101 / 0 12 103, K), wind
direction and speed (0 11 001 / 0 11 002) and the extended vertical sounding significance (flag table
0 08 042), kept as the ``vertical_significance`` variable. A message that eccodes cannot decode is recorded
and skipped; a file with none decodable raises :class:`~icing.errors.SoundingFormatError`.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from icing.errors import ProfileQualityError, SoundingFormatError
from icing.profile import build_profile

__all__ = ["FORMAT", "sniff", "read", "SIGNIFICANCE_BITS"]

FORMAT = "bufr"
T0 = 273.15
# Flag table 0 08 042 (18 bits; bit 1 is the most significant), WMO-No. 306 Vol. I.2 (from memory).
SIGNIFICANCE_BITS = {"surface": 1 << 17, "standard_level": 1 << 16, "tropopause": 1 << 15,
                     "maximum_wind": 1 << 14, "significant_temperature": 1 << 13,
                     "significant_humidity": 1 << 12, "significant_wind": 1 << 11}
_LEVEL_KEYS = {"pressure": "pressure", "height": "nonCoordinateGeopotentialHeight",
               "temperature": "airTemperature", "dewpoint": "dewpointTemperature",
               "wind_direction": "windDirection", "wind_speed": "windSpeed",
               "significance": "extendedVerticalSoundingSignificance"}


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


def _get(ec, h, key, subset, nsub, array=True):
    name = key if nsub == 1 else f"/subsetNumber={subset}/{key}"
    try:
        if array:
            v = np.asarray(ec.codes_get_array(h, name), dtype=float)
        else:
            v = float(ec.codes_get(h, name))
    except ec.KeyValueNotFoundError:
        return None
    missing = (v == ec.CODES_MISSING_DOUBLE) | (v == ec.CODES_MISSING_LONG) | (np.abs(v) >= 1e99)
    if array:
        return np.where(missing, np.nan, v)
    return np.nan if missing else v


def _subset_profile(ec, h, subset, nsub, source, message):
    quality = []
    meta = {k: _get(ec, h, k, subset, nsub, array=False) for k in
            ("blockNumber", "stationNumber", "year", "month", "day", "hour", "minute", "second", "latitude",
             "longitude", "heightOfStationGroundAboveMeanSeaLevel")}
    block, number = meta["blockNumber"], meta["stationNumber"]
    station = (f"{int(block):02d}{int(number):03d}" if block is not None and number is not None
               and np.isfinite(block) and np.isfinite(number) else "")
    minute = meta["minute"]
    minute = int(minute) if minute is not None and np.isfinite(minute) else 0
    try:
        time = pd.Timestamp(year=int(meta["year"]), month=int(meta["month"]), day=int(meta["day"]),
                            hour=int(meta["hour"]), minute=minute)
    except (TypeError, ValueError):
        time = None
        quality.append({"level": None, "action": "note", "reason": f"message {message} subset {subset}: launch "
                        "time missing or not decodable"})
    levels = {}
    for name, key in _LEVEL_KEYS.items():
        levels[name] = _get(ec, h, key, subset, nsub)
    if levels["pressure"] is None or levels["pressure"].size == 0:
        raise SoundingFormatError(f"message {message} subset {subset}: no pressure levels (not a TEMP "
                                  "sequence)", file=source)
    n = levels["pressure"].size
    for name, v in levels.items():
        if v is None or v.size != n:
            if name != "significance":
                quality.append({"level": None, "action": "note", "variable": name,
                                "reason": f"message {message} subset {subset}: no {name} values"})
            levels[name] = np.full(n, np.nan)
    sig = levels["significance"]
    ds = build_profile(levels["pressure"] / 100.0, levels["temperature"] - T0, height=levels["height"],
                       dewpoint=levels["dewpoint"] - T0, wind_speed=levels["wind_speed"],
                       wind_direction=levels["wind_direction"], station=station,
                       latitude=meta["latitude"] if meta["latitude"] is not None else np.nan,
                       longitude=meta["longitude"] if meta["longitude"] is not None else np.nan,
                       elevation=meta["heightOfStationGroundAboveMeanSeaLevel"]
                       if meta["heightOfStationGroundAboveMeanSeaLevel"] is not None else np.nan,
                       time=time, source=source, format=FORMAT, quality=quality)
    # Significance flags of every input level with the pressure of each output level, OR-ed together.
    p_in = levels["pressure"] / 100.0
    flags = np.zeros(ds.sizes["level"], dtype=np.int64)
    for j, p in enumerate(ds["pressure"].values):
        same = np.isclose(p_in, p) & np.isfinite(sig)
        flags[j] = int(np.bitwise_or.reduce(sig[same].astype(np.int64))) if same.any() else 0
    ds["vertical_significance"] = ("level", flags, {
        "long_name": "extended vertical sounding significance (BUFR flag table 0 08 042)",
        "flag_masks": np.array(list(SIGNIFICANCE_BITS.values()), dtype=np.int64),
        "flag_meanings": " ".join(SIGNIFICANCE_BITS)})
    ds.attrs["bufr_message"] = message
    ds.attrs["bufr_subset"] = subset
    return ds


def read(path, **options) -> list:
    """Every radiosonde subset of every BUFR message in the file, as canonical profiles."""
    path = Path(path)
    if options:
        raise SoundingFormatError(f"unknown BUFR reader option(s): {', '.join(options)}", file=path)
    ec = _eccodes()
    profiles, skipped = [], []
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
                ec.codes_set(h, "unpack", 1)
                nsub = int(ec.codes_get(h, "numberOfSubsets"))
                for subset in range(1, nsub + 1):
                    try:
                        profiles.append(_subset_profile(ec, h, subset, nsub, str(path), message))
                    except (ProfileQualityError, SoundingFormatError) as exc:
                        skipped.append({"level": None, "action": "skipped",
                                        "reason": f"message {message} subset {subset}: {exc.reason}"})
            except ec.GribInternalError as exc:
                skipped.append({"level": None, "action": "skipped",
                                "reason": f"message {message}: eccodes cannot decode it ({exc})"})
            finally:
                ec.codes_release(h)
    if not profiles:
        reason = skipped[0]["reason"] if skipped else "no BUFR message in the file"
        raise SoundingFormatError(f"no radiosonde profile decoded: {reason}", file=path)
    if skipped:
        profiles[0].attrs["quality"] = list(profiles[0].attrs["quality"]) + [dict(e, scope="file")
                                                                             for e in skipped]
    return profiles

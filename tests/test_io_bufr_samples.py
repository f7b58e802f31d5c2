"""BUFR reader on real radiosonde files (tests/data/bufr, see its README for where each comes from), compared
with ecCodes' own decoding of the same bytes.

The reference reads each message the plain way a general-purpose ecCodes-based reader does: one ascent per
subset; its levels are the first N values of each level element, N the first level replication factor
(0 31 002 in 3 09 052/057, 0 31 001 in 3 09 007/196/198); geopotential height is 0 10 009 in gpm, or 0 10 008
in m2/s2 divided by standard gravity 9.80665 (WMO-No. 8). Every reference ascent must come back with every
value: pressure within half the 10 Pa resolution of 0 07 004, temperature, dewpoint and wind as decoded,
height within 2 m of the reported geopotential height; a value or level the profile checks take out must
be in the quality record under that level's record number.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pyproj  # noqa: F401  (PROJ must be loaded before the eccodes wheel's libraries, see icing.io.bufr)
import pytest

ec = pytest.importorskip("eccodes")

from icing.io import bufr, read_profiles, reader_for  # noqa: E402

DATA = Path(__file__).parent / "data" / "bufr"
G0 = 9.80665
T0 = 273.15
FILES = sorted(p.name for p in DATA.glob("*.bufr"))


def _get(h, key):
    try:
        v = float(ec.codes_get_double(h, key))
    except ec.GribInternalError:
        return np.nan
    return np.nan if abs(v) >= 1e99 or v == ec.CODES_MISSING_LONG else v


def _array(h, name, n):
    try:
        v = np.asarray(ec.codes_get_double_array(h, name), dtype=float)[:n]
    except ec.GribInternalError:
        return np.full(n, np.nan)
    v = np.where((np.abs(v) >= 1e99) | (v == ec.CODES_MISSING_LONG), np.nan, v)
    return np.concatenate([v, np.full(n - v.size, np.nan)])


def reference(path):
    """Each ascent of the file as ecCodes decodes it (the samples are single-subset messages)."""
    out = []
    with open(path, "rb") as fh:
        while (h := ec.codes_bufr_new_from_file(fh)) is not None:
            try:
                ec.codes_set(h, "unpack", 1)
                assert ec.codes_get(h, "numberOfSubsets") == 1
                # The level replication: 0 31 001 in the old sequences (a 0 31 002 there counts a bitmap of
                # the quality operator), 0 31 002 in 3 09 052/056/057.
                old = int(ec.codes_get_array(h, "unexpandedDescriptors")[0]) in (309007, 309196, 309198)
                n = int(_get(h, "#1#delayedDescriptorReplicationFactor" if old
                             else "#1#extendedDelayedDescriptorReplicationFactor"))
                z = _array(h, "nonCoordinateGeopotentialHeight", n)
                if np.isnan(z).all():
                    z = _array(h, "nonCoordinateGeopotential", n) / G0
                block, number = _get(h, "#1#blockNumber"), _get(h, "#1#stationNumber")
                try:
                    ship = ec.codes_get_string(h, "#1#shipOrMobileLandStationIdentifier").strip()
                except ec.GribInternalError:
                    ship = ""
                elev = _get(h, "#1#heightOfStationGroundAboveMeanSeaLevel")
                if np.isnan(elev):
                    elev = _get(h, "#1#heightOfStation")
                out.append({
                    "station": f"{int(block):02d}{int(number):03d}" if np.isfinite(block) else ship,
                    "time": tuple(_get(h, f"#1#{k}") for k in ("year", "month", "day", "hour", "minute")),
                    "lat": _get(h, "#1#latitude"), "lon": _get(h, "#1#longitude"), "elev": elev,
                    "pressure": _array(h, "pressure", n) / 100.0, "height": z,
                    "temperature": _array(h, "airTemperature", n) - T0,
                    "dewpoint": _array(h, "dewpointTemperature", n) - T0,
                    "wind_speed": _array(h, "windSpeed", n), "wind_direction": _array(h, "windDirection", n)})
            finally:
                ec.codes_release(h)
    return out


def compare(ds, ref):
    """Every reference value is in the profile, or its removal is in the quality record. Returns counts of the
    values kept and the values explained, per variable."""
    q = ds.attrs["quality"]
    dropped = {e["line"] for e in q if "line" in e and e["action"] == "dropped"}
    touched = {(e["line"], e.get("variable")) for e in q if "line" in e}
    p_out = ds["pressure"].values
    first = ds["bufr_record"].values
    kept = dict.fromkeys(("temperature", "dewpoint", "wind_speed", "wind_direction", "height"), 0)
    explained = dict(kept)
    for r in range(1, ref["pressure"].size + 1):
        pr = ref["pressure"][r - 1]
        j = np.flatnonzero(first == r)
        if j.size == 0:  # merged into an earlier record with the same pressure and values
            j = np.flatnonzero(np.abs(p_out - pr) < 1e-6)
        if j.size == 0:
            assert r in dropped, f"record {r} ({pr} hPa) is neither in the profile nor in the quality record"
            continue
        j = j[0]
        assert abs(p_out[j] - pr) <= 0.05 + 1e-9, (r, p_out[j], pr)
        for name, tol in (("temperature", 1e-6), ("dewpoint", 1e-6), ("wind_speed", 1e-6),
                          ("wind_direction", 1e-6), ("height", 2.0)):
            want = ref[name][r - 1]
            if not np.isfinite(want):
                continue
            got = ds[name].values[j] if name in ds else np.nan
            if np.isfinite(got) and abs(got - want) <= tol:
                kept[name] += 1
            else:
                assert (r, name) in touched, f"record {r} {name}: {got} in the profile, {want} in the file"
                explained[name] += 1
    return kept, explained


@pytest.mark.parametrize("name", FILES)
def test_every_ascent_comes_back_with_its_values(name):
    """Against ecCodes' decoding: as many profiles as ascents, in order, with station, launch time, position,
    station height and every level value (module docstring)."""
    path = DATA / name
    assert reader_for(path).FORMAT == "bufr"
    refs = reference(path)
    profiles = bufr.read(path)
    assert len(profiles) == len(refs)
    for k, (ds, ref) in enumerate(zip(profiles, refs, strict=True)):
        assert ds.attrs["bufr_message"] == k + 1
        assert ds.attrs["station"] == ref["station"] != ""
        y, mo, d, hh, mi = (int(v) for v in ref["time"])
        assert ds.attrs["time"].startswith(f"{y:04d}-{mo:02d}-{d:02d}T{hh:02d}:{mi:02d}")
        assert ds.attrs["latitude"] == pytest.approx(ref["lat"], abs=1e-5)
        assert ds.attrs["longitude"] == pytest.approx(ref["lon"], abs=1e-5)
        if np.isfinite(ref["elev"]):
            assert ds.attrs["elevation"] == ref["elev"]
        kept, explained = compare(ds, ref)
        # The checks of build_profile may take out a few values (a height that does not increase upward, a
        # level under the ground); never most of them.
        for var in kept:
            assert explained[var] <= max(2, 0.05 * (kept[var] + explained[var])), (var, kept, explained)


def test_wind_shear_blocks_do_not_lose_ascents():
    """3 09 007 with a wind-shear block (one more pressure than temperatures): all 4 ascents, not 1, and each
    wind-shear group in the quality record with its pressure."""
    profiles = bufr.read(DATA / "temp_101.bufr")
    assert len(profiles) == 4
    assert [p.sizes["level"] for p in profiles] == [75, 91, 77, 88]
    shear = [e for e in profiles[0].attrs["quality"] if "wind-shear group" in e["reason"]]
    assert len(shear) == 1 and shear[0]["pressure_hpa"] == 316.0  # 0 07 004 of the group: 31600 Pa


@pytest.mark.parametrize(("name", "station", "template"), [("temp_102.bufr", "ASDE3", "3 09 196"),
                                                           ("temp_106.bufr", "HYME2", "3 09 198")])
def test_ship_and_mobile_identifiers_and_heights(name, station, template):
    """TEMP SHIP and TEMP MOBIL: the 0 01 011 identifier, the reported geopotential (0 10 008 / g) as height,
    not a hypsometric fill, at every level that reports one (all but the ones the height check removed)."""
    (ds,) = bufr.read(DATA / name)
    (ref,) = reference(DATA / name)
    assert ds.attrs["station"] == station and ds.attrs["bufr_template"].startswith(template)
    reported = np.isfinite(ref["height"])
    rec = ds["bufr_record"].values
    z = np.array([ds["height"].values[np.flatnonzero(rec == r + 1)[0]] for r in np.flatnonzero(reported)])
    diff = np.abs(z - ref["height"][reported])
    assert np.median(diff) <= 1.0
    assert np.count_nonzero(diff > 2.0) <= 2


def test_high_resolution_repeated_pressures_keep_every_temperature():
    """3 09 052 at 2-second resolution: 2,742 records, of which many share a pressure at the 10 Pa resolution;
    every record is a level with its own temperature, time and height (none removed as a conflict)."""
    (ds,) = bufr.read(DATA / "IUSK73_AMMC_040000.bufr")
    (ref,) = reference(DATA / "IUSK73_AMMC_040000.bufr")
    kept, explained = compare(ds, ref)
    assert kept["temperature"] == np.count_nonzero(np.isfinite(ref["temperature"])) == 2741
    assert explained["temperature"] == 0
    assert not [e for e in ds.attrs["quality"] if e.get("variable") == "temperature"]
    with_t = np.isfinite(ds["temperature"].values)
    elapsed = ds["elapsed_time"].values[with_t]
    assert np.all(np.isfinite(elapsed)) and np.all(np.diff(elapsed) >= 0)  # each record its own time, in order
    assert np.all(np.diff(ds["pressure"].values) < 0)


def test_associated_field_and_extra_descriptors():
    """3 09 052 behind an associated-field operator (2 04 004) and with descriptors after it: same levels as
    ecCodes decodes; the descriptors outside the sequence do not become levels."""
    for name in ("uegabe.bufr", "IUSK73_AMMC_182300.bufr"):
        (ds,) = read_profiles(DATA / name)
        (ref,) = reference(DATA / name)
        assert ds.sizes["level"] <= ref["pressure"].size
        assert set(ds["bufr_record"].values) <= set(range(1, ref["pressure"].size + 1))

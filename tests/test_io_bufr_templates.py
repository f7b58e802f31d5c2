"""BUFR reader on messages written by ecCodes' own encoder, one per WMO radiosonde template.

The reference is ecCodes (the BUFR library of the WMO members' centres, on PyPI as ``eccodes``): its encoder
builds each template from ``unexpandedDescriptors`` (3 09 052 TEMP, 3 09 056 descent, 3 09 057 high
resolution; 3 09 007, 3 09 196 TEMP SHIP and 3 09 198 TEMP MOBIL as converted from TEMP text), compressed and
uncompressed, with several subsets and a wind-shear block (3 03 051, or 1 04 000 0 31 001 0 07 004 0 08 001
0 11 061 0 11 062 after the old templates), and the reader must give back every ascent with its values within
the Table B precision of each element (WMO-No. 306 Vol. I.2: 0 07 004 10 Pa, 0 12 101 0.01 K, 0 12 001
0.1 K, 0 11 002 0.1 m/s, 0 10 009 1 gpm, 0 10 008 10 m2/s2 from memory for the old templates).

The module also holds the test encoder (``encode``) that tests/properties/test_bufr_fuzz.py uses.
"""

from __future__ import annotations

import numpy as np
import pyproj  # noqa: F401  (PROJ must be loaded before the eccodes wheel's libraries, see icing.io.bufr)
import pytest
from numpy.testing import assert_allclose

ec = pytest.importorskip("eccodes")

from icing.errors import SoundingFormatError  # noqa: E402
from icing.io import bufr, read_profiles  # noqa: E402

T0 = 273.15
G0 = 9.80665  # standard gravity (WMO-No. 8), geopotential = G0 * geopotential height
SFC, STD, MAXW, SIGT, SIGW = (bufr.SIGNIFICANCE_BITS[k] for k in ("surface", "standard_level", "maximum_wind",
                                                                 "significant_temperature", "significant_wind"))
OLD = (309007, 309196, 309198)  # sequences of reports converted from TEMP text
NEW = (309052, 309056, 309057)


def _missing(v):
    v = np.asarray(v, dtype=float)
    return np.where(np.isfinite(v), v, ec.CODES_MISSING_DOUBLE)


def ascent(station=101, hour=0, shift=0.0, nlev=7, shear=1, descent=False, ship=None):
    """One invented ascent (test data only): levels in SI units as BUFR carries them."""
    p = np.linspace(101000.0, 30000.0, nlev).round(-1)
    z = np.linspace(20.0, 9100.0, nlev).round()
    t = np.linspace(8.0, -45.0, nlev) + T0 + shift
    td = t - np.linspace(1.0, 20.0, nlev)
    td[nlev // 2] = np.nan
    sig = np.zeros(nlev, dtype=int)
    sig[0], sig[1], sig[-1] = SFC, STD, SIGT | MAXW
    lev = {"pressure": p, "height": z, "temperature": t.round(2), "dewpoint": td.round(2),
           "wind_direction": np.linspace(200.0, 290.0, nlev).round(), "wind_speed": np.linspace(3.0, 41.0, nlev),
           "significance": sig, "time": np.arange(nlev) * 60.0,
           "dlat": np.linspace(0.0, 0.2, nlev).round(5), "dlon": np.linspace(0.0, 0.35, nlev).round(5)}
    if descent:
        lev = {k: v[::-1].copy() for k, v in lev.items()}
        lev["time"] = np.arange(nlev) * 30.0
    return {"block": 0, "station": station, "ship": ship, "time": (2026, 1, 15, hour, 5, 30), "lat": 52.0,
            "lon": -34.0, "elev": 15.0, "levels": lev,
            "shear": [(p[-2], 2.5, 4.0)][:shear] if shear else []}


def _old_sig(sig):
    """0 08 042 bits to the 7-bit flag table 0 08 001 (surface 64, standard 32, tropopause 16, maximum wind
    8, significant temperature 4, significant wind 2; from memory)."""
    out = np.zeros(len(sig), dtype=int)
    for new, old in ((SFC, 64), (STD, 32), (MAXW, 8), (SIGT, 4), (SIGW, 2)):
        out |= np.where(np.asarray(sig) & new, old, 0)
    return out


def _columns(template, s):
    """name -> values of one subset in data order (levels, then the wind-shear group)."""
    lev, shear = s["levels"], s["shear"]
    ps = [x[0] for x in shear]
    nsh = len(shear)
    nan = [np.nan] * nsh
    if template in OLD:
        return {"pressure": np.r_[lev["pressure"], ps],
                "verticalSoundingSignificance": np.r_[_old_sig(lev["significance"]), [8] * nsh],
                "nonCoordinateGeopotential": lev["height"] * G0, "airTemperature": lev["temperature"],
                "dewpointTemperature": lev["dewpoint"], "windDirection": lev["wind_direction"],
                "windSpeed": lev["wind_speed"], "absoluteWindShearIn1KmLayerBelow": [x[1] for x in shear],
                "absoluteWindShearIn1KmLayerAbove": [x[2] for x in shear]}
    return {"timePeriod": np.r_[lev["time"], nan], "extendedVerticalSoundingSignificance":
            np.r_[lev["significance"], [MAXW] * nsh], "pressure": np.r_[lev["pressure"], ps],
            "nonCoordinateGeopotentialHeight": lev["height"], "latitudeDisplacement": np.r_[lev["dlat"], nan],
            "longitudeDisplacement": np.r_[lev["dlon"], nan], "airTemperature": lev["temperature"],
            "dewpointTemperature": lev["dewpoint"], "windDirection": lev["wind_direction"],
            "windSpeed": lev["wind_speed"], "absoluteWindShearIn1KmLayerBelow": [x[1] for x in shear],
            "absoluteWindShearIn1KmLayerAbove": [x[2] for x in shear]}


def _header(template, s):
    y, mo, d, h, mi, sec = s["time"]
    head = {"year": y, "month": mo, "day": d, "hour": h, "minute": mi, "latitude": s["lat"], "longitude": s["lon"]}
    if template not in OLD:
        head["second"] = sec
    if template in (309007, *NEW):
        head.update(blockNumber=s["block"], stationNumber=s["station"])
    if template in OLD:
        head["heightOfStation"] = s["elev"]
    elif template == 309056:
        head["height"] = 25000  # where the descent starts (0 07 007), not the station
    else:
        head["heightOfStationGroundAboveMeanSeaLevel"] = s["elev"]
    return head


def encode(fh, template, subsets, compressed=False):
    """Write one message of ``template`` with these subsets (ecCodes' encoder, BUFR edition 4)."""
    h = ec.codes_bufr_new_from_samples("BUFR4")
    try:
        # 3 09 196 and 3 09 198 come from the local tables of the centre that wrote the sample files
        # (tests/data/bufr, centre 98 of Common Code Table C-11); ecCodes resolves them only under that code.
        centre = 98 if template in OLD else 255
        for key, value in (("edition", 4), ("masterTableNumber", 0), ("bufrHeaderCentre", centre),
                           ("dataCategory", 2), ("internationalDataSubCategory", 4),
                           ("masterTablesVersionNumber", 31), ("localTablesVersionNumber", 0),
                           ("typicalYear", 2026), ("typicalMonth", 1), ("typicalDay", 15), ("typicalHour", 0),
                           ("typicalMinute", 0), ("numberOfSubsets", len(subsets)), ("observedData", 1),
                           ("compressedData", int(compressed))):
            ec.codes_set(h, key, value)
        nlev = [s["levels"]["pressure"].size for s in subsets]
        nsh = [len(s["shear"]) for s in subsets]
        if template in OLD:
            ec.codes_set_array(h, "inputDelayedDescriptorReplicationFactor",
                               [v for pair in zip(nlev, nsh, strict=True) for v in pair])
            ec.codes_set_array(h, "unexpandedDescriptors", [template, 104000, 31001, 7004, 8001, 11061, 11062])
        else:
            ec.codes_set_array(h, "inputExtendedDelayedDescriptorReplicationFactor", nlev)
            ec.codes_set_array(h, "inputDelayedDescriptorReplicationFactor", nsh)
            ec.codes_set_array(h, "unexpandedDescriptors", [template])
        heads = [_header(template, s) for s in subsets]
        wigos = [s.get("wigos") for s in subsets]
        cols = [_columns(template, s) for s in subsets]
        ships = [s["ship"] or "" for s in subsets]
        if compressed:  # one value per subset for each ranked element
            for key in heads[0]:
                ec.codes_set_array(h, f"#1#{key}", _missing([hd[key] for hd in heads]))
            if template in (309196, 309198) or template in NEW:
                ec.codes_set_string_array(h, "#1#shipOrMobileLandStationIdentifier", ships)
            for name in cols[0]:
                for r in range(len(cols[0][name])):
                    ec.codes_set_array(h, f"#{r + 1}#{name}", _missing([c[name][r] for c in cols]))
        else:
            for key in heads[0]:
                ec.codes_set_array(h, key, _missing([hd[key] for hd in heads]))
            if template in (309196, 309198) or template in NEW:
                ec.codes_set_string_array(h, "shipOrMobileLandStationIdentifier", ships)
            if template in NEW and any(wigos):
                for k, key in enumerate(("wigosIdentifierSeries", "wigosIssuerOfIdentifier", "wigosIssueNumber")):
                    ec.codes_set_array(h, key, [w[k] for w in wigos])
                ec.codes_set_string_array(h, "wigosLocalIdentifierCharacter", [w[3] for w in wigos])
            for name in cols[0]:
                values = np.concatenate([np.asarray(c[name], float) for c in cols])
                if values.size:  # no wind-shear group in any subset: nothing to set
                    ec.codes_set_array(h, name, _missing(values))
        ec.codes_set(h, "pack", 1)
        ec.codes_write(h, fh)
    finally:
        ec.codes_release(h)


def write(path, template, messages, compressed=False):
    with open(path, "wb") as fh:
        for subsets in messages:
            encode(fh, template, subsets, compressed)
    return path


def check_ascent(ds, src, template):
    """The profile has every level of ``src`` with its values within the Table B precision."""
    lev = src["levels"]
    order = np.argsort(-lev["pressure"])
    assert ds.sizes["level"] == lev["pressure"].size
    assert_allclose(ds["pressure"].values, lev["pressure"][order] / 100.0, atol=1e-9)
    old = template in OLD
    assert_allclose(ds["temperature"].values, lev["temperature"][order] - T0, atol=0.051 if old else 0.006)
    td = lev["dewpoint"][order] - T0
    assert np.array_equal(np.isnan(ds["dewpoint"].values), np.isnan(td))
    assert_allclose(ds["dewpoint"].values, td, atol=0.051 if old else 0.006, equal_nan=True)
    assert_allclose(ds["wind_speed"].values, lev["wind_speed"][order], atol=0.051 if not old else 0.51)
    assert_allclose(ds["wind_direction"].values, lev["wind_direction"][order], atol=0.5)
    # 0 10 009 at 1 gpm; 0 10 008 at 10 m2/s2 is 1.02 gpm: the reported height, not a hypsometric fill.
    assert_allclose(ds["height"].values, lev["height"][order], atol=1.1 if old else 0.51)
    assert not any(e.get("variable") == "height" for e in ds.attrs["quality"])
    sig = ds["vertical_significance"].values
    assert sig[0] & SFC and sig[1] & STD and sig[-1] & MAXW and sig[-1] & SIGT
    if not old:
        assert_allclose(ds["elapsed_time"].values, lev["time"][order])
        assert_allclose(ds["latitude_displacement"].values, lev["dlat"][order], atol=1e-5)
        assert_allclose(ds["level_longitude"].values, src["lon"] + lev["dlon"][order], atol=1e-5)
    shear = [e for e in ds.attrs["quality"] if "wind-shear" in e["reason"]]
    assert len(shear) == len(src["shear"])
    for e, (p, below, above) in zip(shear, src["shear"], strict=True):
        assert e["pressure_hpa"] == pytest.approx(p / 100.0)
        assert f"{below:g} / {above:g} m/s" in e["reason"]


def _station(src, template):
    if template in (309196, 309198):
        return src["ship"]
    return f"{src['block']:02d}{src['station']:03d}"


@pytest.mark.parametrize("compressed", [False, True], ids=["uncompressed", "compressed"])
@pytest.mark.parametrize("template", [309052, 309056, 309057, 309007, 309196, 309198])
def test_every_template_several_subsets_with_wind_shear(tmp_path, template, compressed):
    """Three ascents in one message and one in a second: every ascent back, in order, with its values,
    identifiers, station height, launch position and time; the wind-shear group does not shift the levels."""
    descent = template == 309056
    ships = ("SHIP1", "SHIP2", "SHIP3", "SHIP4") if template in (309196, 309198) else (None,) * 4
    first = [ascent(101 + k, 0, shift=k, descent=descent, ship=ships[k]) for k in range(3)]
    second = [ascent(104, 12, shift=-2.0, descent=descent, ship=ships[3])]
    path = write(tmp_path / f"t{template}.bufr", template, [first, second], compressed)
    profiles = bufr.read(path)
    assert len(profiles) == 4
    for ds, src, (msg, sub) in zip(profiles, first + second, [(1, 1), (1, 2), (1, 3), (2, 1)], strict=True):
        assert (ds.attrs["bufr_message"], ds.attrs["bufr_subset"]) == (msg, sub)
        assert ds.attrs["station"] == _station(src, template)
        assert ds.attrs["time"] == f"2026-01-15T{src['time'][3]:02d}:05:{30 if template in NEW else 0:02d}Z"
        assert_allclose([ds.attrs["latitude"], ds.attrs["longitude"]], [52.0, -34.0])
        if template == 309056:
            assert np.isnan(ds.attrs["elevation"])  # 0 07 007 of a descent is where it starts
        else:
            assert ds.attrs["elevation"] == 15.0
        assert ds.attrs["bufr_template"].startswith(f"{template // 100000} {template // 1000 % 100:02d}")
        check_ascent(ds, src, template)


def test_levels_of_different_counts_per_subset(tmp_path):
    """Uncompressed subsets may replicate differently: 4, 9 and 6 levels, with 0, 2 and 1 wind-shear groups."""
    subs = [ascent(1, nlev=4, shear=0), ascent(2, nlev=9, shear=1), ascent(3, nlev=6, shear=1)]
    subs[1]["shear"] = subs[1]["shear"] + [(40000.0, 1.0, 7.5)]
    profiles = bufr.read(write(tmp_path / "mixed.bufr", 309052, [subs]))
    assert [p.sizes["level"] for p in profiles] == [4, 9, 6]
    for ds, src in zip(profiles, subs, strict=True):
        check_ascent(ds, src, 309052)


def test_high_resolution_records_sharing_a_pressure_are_all_kept(tmp_path):
    """2-second records whose pressures repeat at the 10 Pa resolution of 0 07 004 keep their own time,
    height, temperature and position: none is merged away or blanked, and each change of pressure stays
    within half the resolution (5 Pa) and in record order (later record, lower pressure)."""
    src = ascent(7, nlev=12, shear=0)
    lev = src["levels"]
    lev["pressure"] = np.array([1010, 1009, 1009, 1009, 1008, 1007, 1007, 1006, 1005, 1004, 1003, 1002]) * 100.0
    lev["height"] = 15.0 + np.arange(12) * 3.0
    lev["time"] = np.arange(12) * 2.0
    lev["temperature"] = (8.0 - np.arange(12) * 0.02 + T0).round(2)
    lev["dewpoint"] = lev["temperature"] - 1.0
    path = write(tmp_path / "hires.bufr", 309057, [[src]])
    (ds,) = bufr.read(path)
    assert ds.sizes["level"] == 12
    assert_allclose(ds["pressure"].values, lev["pressure"] / 100.0, atol=0.05)
    assert np.all(np.diff(ds["pressure"].values) < 0)
    assert_allclose(ds["height"].values, lev["height"], atol=0.5)
    assert_allclose(ds["elapsed_time"].values, lev["time"])
    assert_allclose(ds["temperature"].values, lev["temperature"] - T0, atol=0.006)
    assert list(ds["bufr_record"].values) == list(range(1, 13))
    changed = [e for e in ds.attrs["quality"] if e["action"] == "changed" and e.get("variable") == "pressure"]
    assert sorted(e["line"] for e in changed) == [2, 3, 4, 6, 7]
    assert not [e for e in ds.attrs["quality"] if e["action"] in ("removed", "merged", "dropped")]


def test_identical_repeated_level_is_merged_with_its_flags(tmp_path):
    """A level reported twice with the same values (a standard level that is also a significant level) is one
    level, its significance flags OR-ed, and the merge is in the quality record."""
    src = ascent(8, nlev=6, shear=0)
    lev = src["levels"]
    for k in lev:
        lev[k] = np.insert(lev[k], 3, lev[k][2])
    lev["significance"][2], lev["significance"][3] = STD, SIGT
    (ds,) = bufr.read(write(tmp_path / "rep.bufr", 309052, [[src]]))
    assert ds.sizes["level"] == 6
    assert ds["vertical_significance"].values[2] == STD | SIGT
    assert [e["line"] for e in ds.attrs["quality"] if e["action"] == "merged"] == [4]


def test_not_an_upper_air_message_is_refused(tmp_path):
    """A surface report (data category 0) is not a sounding: a SoundingFormatError naming the file and message."""
    h = ec.codes_bufr_new_from_samples("BUFR4")
    ec.codes_set(h, "dataCategory", 0)
    ec.codes_set(h, "masterTablesVersionNumber", 31)
    ec.codes_set_array(h, "unexpandedDescriptors", [1001, 1002, 4001, 4002, 4003, 4004, 10004, 12101])
    ec.codes_set(h, "#1#airTemperature", 280.0)
    ec.codes_set(h, "pack", 1)
    path = tmp_path / "synop.bufr"
    with open(path, "wb") as fh:
        ec.codes_write(h, fh)
    ec.codes_release(h)
    with pytest.raises(SoundingFormatError, match=r"synop\.bufr.*message 1: not an upper-air sounding"):
        bufr.read(path)
    # Beside a sounding it is skipped and recorded, the sounding read.
    mixed = tmp_path / "mixed.bufr"
    mixed.write_bytes(path.read_bytes() + write(tmp_path / "a.bufr", 309052, [[ascent(5)]]).read_bytes())
    (ds,) = read_profiles(mixed)
    assert any("message 1: not an upper-air sounding" in e["reason"] for e in ds.attrs["quality"])


def test_ascent_without_temperatures_is_recorded(tmp_path):
    """An ascent with winds only cannot be a profile: the file error (or, beside others, the quality record)
    names its message and subset."""
    src = ascent(9, shear=0)
    src["levels"]["temperature"][:] = np.nan
    src["levels"]["dewpoint"][:] = np.nan
    good = ascent(10)
    (ds,) = bufr.read(write(tmp_path / "w.bufr", 309052, [[src, good]]))
    assert ds.attrs["station"] == "00010"
    assert any(e["reason"].startswith("message 1 subset 1: only 0 levels") for e in ds.attrs["quality"])


def test_import_icing_does_not_import_eccodes():
    """The reader imports eccodes only when it reads (``import icing`` stays light)."""
    import subprocess
    import sys

    code = "import sys, icing, icing.io, icing.io.bufr, icing.io.bufr_walk; print('eccodes' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"


def test_wigos_identifier_when_there_is_no_wmo_number(tmp_path):
    """3 09 057 without block and station number: the station is the WIGOS identifier (0 01 125-0 01 128,
    written series-issuer-issue-local as WMO-No. 1160 spells it, from memory)."""
    src = ascent(1, shear=0)
    src["block"] = src["station"] = np.nan
    src["wigos"] = (0, 20000, 0, "VARROW1")
    (ds,) = bufr.read(write(tmp_path / "w.bufr", 309057, [[src]]))
    assert ds.attrs["station"] == "0-20000-0-VARROW1"


def test_old_significance_flags_are_mapped():
    """0 08 001 (7 bits) onto 0 08 042: the real 3 09 007 sample's surface level reads 68 = surface (64) and
    significant temperature (4); its 1000 hPa level 32 = standard level."""
    from pathlib import Path

    (ds, *_) = bufr.read(Path(__file__).parent / "data" / "bufr" / "temp_101.bufr")
    sig = ds["vertical_significance"].values
    assert sig[0] == SFC | SIGT
    assert sig[ds["bufr_record"].values == 3][0] == STD

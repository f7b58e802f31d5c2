"""Fuzzing the pilot-report reader (hypothesis).

Properties: (1) any text gives either reports or a PirepFormatError naming the reason: never another exception
(project rule: bad input gets a typed error); every chunk of the text that looks like a report is either read or
listed in ``attrs["skipped"]`` with its line (nothing dropped silently). (2) A report encoded from random values by
the format's rules (FAA Order JO 7110.10 / AIM chapter 7, from memory: /OV ddmmNdddmmW, /TM hhmm, /FL fff, /TA
with M for minus, /IC words and types) reads back to those values.
"""

import numpy as np
import pandas as pd
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from icing.verify.pireps import INTENSITY_ORDER, PirepFormatError, parse_pirep, parse_pireps

SETTINGS = settings(max_examples=200, deadline=None)
FIXES = {"QXV": (50.0, -20.0), "ZUPRO": (-33.5, 151.25)}  # invented fixes

WORDS = {"none": "NEG", "trace": "TRACE", "light": "LGT", "moderate": "MOD", "severe": "SEV"}
TYPES = {"rime": "RIME", "glaze": "CLR", "mixed": "MXD"}

pieces = st.sampled_from(["UA", "UUA", " ", "/", "/OV", "/TM", "/FL", "/TP", "/TA", "/IC", "/RM", "/SK", "QXV",
                          "QXV090025", "ZUPRO", "4530N07315W", "9999N99999W", "1200", "2561", "080", "UNKN", "M04",
                          "NEG", "LGT-MOD", "RIME", "CLR", "MXD", "SEV", "=", "\n", "-", "XX10", "ß", "٣", "\t"])
texts = st.one_of(st.text(max_size=120), st.lists(pieces, max_size=40).map("".join))


@SETTINGS
@given(texts)
def test_any_text_reads_or_raises_a_typed_error(text):
    try:
        frame = parse_pireps(text, "2026-01-15", FIXES, file="fuzz.txt")
    except PirepFormatError as exc:
        assert exc.reason and exc.file == "fuzz.txt"
        return
    chunks = sum(1 for line in text.splitlines() for part in line.split("=") if part.strip())
    assert len(frame) + len(frame.attrs["skipped"]) == chunks
    for sk in frame.attrs["skipped"]:
        assert sk["reason"] and sk["line"] >= 1
    assert frame["latitude"].between(-90, 90).all() and frame["longitude"].between(-180, 180).all()
    assert frame["time"].notna().all()
    assert (frame["flight_level"].isna() | (frame["flight_level"] >= 0)).all()


@SETTINGS
@given(st.text(max_size=60))
def test_one_report_reads_or_raises_a_typed_error(text):
    try:
        parse_pirep(text, "2026-01-15", FIXES)
    except PirepFormatError as exc:
        assert exc.reason


@SETTINGS
@given(lat_d=st.integers(0, 89), lat_m=st.integers(0, 59), ns=st.sampled_from("NS"), lon_d=st.integers(0, 179),
       lon_m=st.integers(0, 59), ew=st.sampled_from("EW"), hh=st.integers(0, 23), mm=st.integers(0, 59),
       fl=st.integers(0, 450), ta=st.integers(-60, 40), low=st.sampled_from(INTENSITY_ORDER[1:]),
       high=st.sampled_from(INTENSITY_ORDER[1:]), kind=st.sampled_from([None, *TYPES]), urgent=st.booleans(),
       null=st.booleans(), remark=st.text("ABCXYZ /-0123", max_size=20))
def test_encoded_report_reads_back(lat_d, lat_m, ns, lon_d, lon_m, ew, hh, mm, fl, ta, low, high, kind, urgent, null,
                                   remark):
    lo, hi = sorted((low, high), key=INTENSITY_ORDER.index)
    words = WORDS[lo] if lo == hi else f"{WORDS[lo]}-{WORDS[hi]}"
    ic = "NEG" if null else words + (f" {TYPES[kind]}" if kind else "")
    t = f"M{-ta:02d}" if ta < 0 else f"{ta:02d}"
    text = (f"{'UUA' if urgent else 'UA'} /OV {lat_d:02d}{lat_m:02d}{ns}{lon_d:03d}{lon_m:02d}{ew}/TM {hh:02d}{mm:02d}"
            f"/FL{fl:03d}/TP XX10/TA {t}/IC {ic}/RM {remark}")
    r = parse_pirep(text, "2026-01-15")
    assert r["kind"] == ("UUA" if urgent else "UA")
    lat = (lat_d + lat_m / 60) * (-1 if ns == "S" else 1)
    lon = (lon_d + lon_m / 60) * (-1 if ew == "W" else 1)
    assert_allclose([r["latitude"], r["longitude"]], [lat, lon], rtol=0, atol=1e-12)
    assert pd.Timestamp(r["time"]) == pd.Timestamp(f"2026-01-15T{hh:02d}:{mm:02d}")
    assert r["flight_level"] == fl and r["temperature_c"] == ta
    assert r["remarks"] == remark.strip()
    if null:
        assert r["icing"] is False and r["intensity"] == "none"
    else:
        assert r["icing"] is True and r["intensity"] == hi and r["intensity_low"] == lo
        assert r["ice_type"] == kind
    assert np.isfinite(r["latitude"])

"""Fuzzing the TEMP decoder: random truncations, deletions and character swaps of valid reports.

Properties: (1) nothing but SoundingFormatError is ever raised; (2) no level is invented: every decoded
pressure is spelled by a group of the damaged text read as a pressure (standard-surface indicator, 99PPP,
nnPPP in whole or tenths of hPa, 88PPP/77PPP), and every decoded temperature by a group's TTTa (WMO-No. 306
FM 35); (3) a truncated report decodes to a subset of the complete report, level for level; (4) any form
(TEMP SHIP, DROP, MOBIL, PILOT parts, GTS framing, corrections) damaged or not, and text of random tokens,
gives profiles or a SoundingFormatError naming the file (never another exception), and every quality entry
points at a line of the text.
"""

import sys
import warnings
from pathlib import Path

import numpy as np
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

sys.path.insert(0, str(Path(__file__).parents[1]))

import encoders  # noqa: E402

from icing.errors import IcingWarning, SoundingFormatError  # noqa: E402
from icing.io import temp  # noqa: E402

STD = {"00": 1000.0, "92": 925.0, "85": 850.0, "70": 700.0, "50": 500.0, "40": 400.0, "30": 300.0,
       "25": 250.0, "20": 200.0, "15": 150.0, "10": 100.0}
STD_C = {"70": 70.0, "50": 50.0, "30": 30.0, "20": 20.0, "10": 10.0}


def _groups(text):
    """The five-character groups of the text, and those the decoder makes by joining a group split by a
    stray space (two neighbours whose lengths add up to five)."""
    tokens = text.upper().replace("=", " ").split()
    joined = [a + b for a, b in zip(tokens, tokens[1:], strict=False) if len(a) < 5 and len(a) + len(b) == 5]
    return [t for t in tokens if len(t) == 5] + joined


def pressure_candidates(text):
    """Every pressure (hPa) any group of the text could stand for."""
    out = set(STD.values()) | set(STD_C.values())
    for g in _groups(text):
        if g[2:].isdigit():
            v = int(g[2:])
            out |= {float(v), float(v + 1000), v / 10.0}
    return out


def temperature_candidates(text):
    """Every temperature (degC) the TTTa of any group of the text could stand for."""
    out = set()
    for g in _groups(text):
        try:
            out.add(round(temp.decode_temperature(g), 1))
        except ValueError:
            pass
    return out


def _decode(text):
    """Profiles of the text, or [] for a typed error naming the file; warnings (IcingWarning, about ascents
    that give no profile) are allowed and silenced. Any other exception fails the calling test."""
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", IcingWarning)
            return temp.decode_temp(text, source="fuzz.txt")
    except SoundingFormatError as exc:
        assert exc.file is not None and "fuzz.txt" in str(exc)
        return []


_report = st.builds(lambda prof, knots: encoders.encode_temp(prof, station="00103", knots=knots),
                    encoders.soundings().filter(encoders.within_height_windows), st.booleans())


@st.composite
def damaged(draw):
    text = draw(_report)
    kind = draw(st.sampled_from(["truncate", "delete", "swap", "delete_group"]))
    n = len(text)
    if kind == "truncate":
        cut = draw(st.integers(0, n))
        return kind, text, text[:cut]
    if kind == "delete":
        a = draw(st.integers(0, n - 1))
        b = draw(st.integers(a + 1, min(n, a + 8)))
        return kind, text, text[:a] + text[b:]
    if kind == "swap":
        out = list(text)
        for _ in range(draw(st.integers(1, 4))):
            i, j = draw(st.integers(0, n - 1)), draw(st.integers(0, n - 1))
            out[i], out[j] = out[j], out[i]
        return kind, text, "".join(out)
    groups = text.split(" ")
    k = draw(st.integers(0, len(groups) - 1))
    return kind, text, " ".join(groups[:k] + groups[k + 1:])


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow,
                                                                  HealthCheck.filter_too_much])
@given(case=damaged())
def test_damaged_reports_never_crash_or_invent_levels(case):
    kind, original, text = case
    profiles = _decode(text)  # anything but SoundingFormatError propagates and fails the test
    pc = pressure_candidates(text)
    tc = temperature_candidates(text)
    for ds in profiles:
        for p in ds["pressure"].values:
            assert any(abs(p - c) < 1e-6 for c in pc), f"pressure {p} not in the text"
        for t in ds["temperature"].values[np.isfinite(ds["temperature"].values)]:
            assert round(float(t), 1) in tc, f"temperature {t} not in the text"


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow,
                                                                 HealthCheck.filter_too_much])
@given(text=_report, frac=st.floats(0.0, 1.0))
def test_truncated_report_is_a_subset(text, frac):
    (full,) = _decode(text)
    cut = _decode(text[: int(len(text) * frac)])
    assume(cut)
    (ds,) = cut
    fp = full["pressure"].values
    for i, p in enumerate(ds["pressure"].values):
        j = np.flatnonzero(np.isclose(fp, p))
        assert j.size == 1, f"level {p} hPa not in the complete report"
        t, tf = ds["temperature"].values[i], full["temperature"].values[j[0]]
        # 1e-9: levels repeated across parts are merged by build_profile as a mean of equal values.
        assert np.isnan(t) or abs(t - tf) <= 1e-9
        w, wf = ds["wind_speed"].values[i], full["wind_speed"].values[j[0]]
        assert np.isnan(w) or abs(w - wf) <= 1e-9


# --- every form, framing and random text ------------------------------------------------------------------

_FORM = st.sampled_from([
    dict(form="TT"), dict(form="UU", station="ZQXA7", position=(-33.4, -21.7)),
    dict(form="XX", station="", position=(24.1, -70.8)),
    dict(form="II", station="MOB9", position=(60.0, 5.5), elevation=40.0)])
_FRAMES = st.sampled_from([("", ""), ("\x01\r\r\n123\r\r\nUSXX01 XXXX 150000\r\r\n", "\r\r\n\x03"),
                           ("ZCZC 001\nUSXX01 XXXX 150000 CCA\n", "\nNNNN\n"), ("\x1e", "")])


@st.composite
def _any_form(draw):
    prof = draw(encoders.soundings().filter(encoders.within_height_windows))
    form = dict(draw(_FORM))
    if form["form"] == "TT":
        form["station"] = "00103"
    text = encoders.encode_temp(prof, knots=draw(st.booleans()), **form)
    if draw(st.booleans()):
        text += encoders.encode_pilot_heights([0.0, 300.0, 600.0, 3000.0, 6000.0], [270.0] * 5, [5.0] * 5,
                                              station=form.get("station") or "00103")
    head, tail = draw(_FRAMES)
    return head + text + tail


def _check_clean(text, profiles):
    n_lines = text.count("\n") + 1
    for ds in profiles:
        for e in ds.attrs["quality"]:
            assert isinstance(e.get("reason"), str)
            if e.get("line") is not None:
                assert 1 <= e["line"] <= n_lines, e


@settings(max_examples=120, deadline=None, suppress_health_check=[HealthCheck.too_slow,
                                                                  HealthCheck.filter_too_much])
@given(text=_any_form(), cut=st.integers(0, 4000), drop=st.integers(0, 400), junk=st.text(
    alphabet="0123456789/ =\nTAUXIPBCDN\x01\x03", max_size=12))
def test_every_form_damaged_gives_profiles_or_a_typed_error(text, cut, drop, junk):
    """Ship, drop, mobile and land forms, with PPBB and framing, cut and with junk spliced in: profiles
    or a SoundingFormatError naming the file; quality entries point inside the text."""
    for damaged_text in (text, text[:cut], text[:drop] + junk + text[drop + len(junk):]):
        _check_clean(damaged_text, _decode(damaged_text))


_WORDS = st.sampled_from(["TTAA", "TTBB", "TTCC", "TTDD", "UUAA", "XXBB", "IIAA", "PPBB", "PPAA", "QQDD",
                          "65001", "6500/", "00101", "99012", "99334", "50217", "///31", "00094", "85456",
                          "21212", "31313", "41414", "51515", "88999", "77999", "90012", "44300", "NIL", "=",
                          "\n", "CCA", "RRB", "/////", "27010", "04456", "ZCZC", "NNNN", "USXX01 XXXX 150000",
                          "\x01", "\x03", "9705/", "11950", "22880"])


@settings(max_examples=200, deadline=None)
@given(words=st.lists(_WORDS, max_size=80))
def test_random_tokens_never_crash(words):
    """Any sequence of the code's own groups and framing: profiles or a typed error, nothing else."""
    text = " ".join(words)
    _check_clean(text, _decode(text))

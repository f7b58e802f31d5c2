"""Matching pilot reports to a constructed sounding: reports inside and outside a supercooled layer give the
expected contingency table; unknown data are never counted as a correct no-icing.

The sounding is constructed (as in tests/test_assess.py): saturated from 900 to 650 hPa at about -6 to -16 degC
(supercooled liquid possible by definition: in cloud and below 0 degC), dry above and below. FL080 is about
753 hPa and FL200 about 466 hPa in the standard atmosphere (ICAO / US 1976 tables, checked in
tests/test_thermo.py): inside the layer and in the dry air above it. Reports are written by us at an invented
place (no real report).
"""

import numpy as np
import pytest
from numpy.testing import assert_allclose

from icing.flight.sources import SoundingSource
from icing.profile import build_profile
from icing.verify.match import verify_reports
from icing.verify.pireps import parse_pireps

P = np.array([1000.0, 950.0, 900.0, 850.0, 800.0, 750.0, 700.0, 650.0, 600.0, 500.0, 400.0, 300.0])
DATE = "2026-01-15"


def stratus(station, lat, lon, time, top=None):
    """Saturated 900-650 hPa, cold, dry above and below (constructed); ``top`` cuts the sounding (hPa)."""
    t = 2.0 + np.array([0.0, -3.0, -8.0, -10.0, -12.0, -14.0, -16.0, -18.0, -21.0, -28.0, -38.0, -50.0])
    dd = np.array([8.0, 8.0, 0.2, 0.2, 0.2, 0.2, 0.2, 0.2, 15.0, 20.0, 20.0, 20.0])
    keep = slice(None) if top is None else P >= top
    return build_profile(P[keep], t[keep], dewpoint=(t - dd)[keep], station=station, latitude=lat, longitude=lon,
                         elevation=0.0, time=time)


@pytest.fixture(scope="module")
def source():
    return SoundingSource([stratus("T1", 50.0, -20.0, f"{DATE}T00:00Z"), stratus("T1", 50.0, -20.0, f"{DATE}T12:00Z")])


REPORTS = """UA /OV 5000N02000W/TM 0600/FL080/TP XX10/TA M12/IC LGT RIME
UA /OV 5000N02000W/TM 0600/FL200/TP XX10/IC NEG
UA /OV 5000N02000W/TM 0600/FL080/TP XX10/IC NEG
UUA /OV 5000N02000W/TM 0600/FL200/TP XX10/IC MOD RIME
UA /OV 3000N02000W/TM 0600/FL080/TP XX10/IC NEG
UA /OV 5000N02000W/TM 0600/FL080/TP XX10/TB LGT
UA /OV 5000N02000W/TM 0600/FLUNKN/TP XX10/IC MOD
"""


def test_hits_false_alarms_misses_and_correct_negatives(source):
    """Inside the layer with icing reported: a hit; above it with NEG: a correct negative; inside with NEG: a
    false alarm; above with MOD: a miss. Far from any data: unknown, not counted (never a correct no-icing);
    without /IC or without a level: unusable, with the reason."""
    reports = parse_pireps(REPORTS, DATE)
    res = verify_reports(reports, source)
    m = res.matches
    assert (res.table.a, res.table.b, res.table.c, res.table.d) == (1, 1, 1, 1)
    assert list(m["forecast"].iloc[:4]) == [True, False, True, False]
    assert list(m["data"].astype(str)) == ["ok"] * 4 + ["missing", "unusable", "unusable"]
    assert m["forecast"].iloc[4] is pd_na() and not m["counted"].iloc[4]
    assert "no data" in m["reason"].iloc[4]
    assert "/IC" in m["reason"].iloc[5] and "flight level" in m["reason"].iloc[6]
    assert res.scores["unknown"] == 1 and res.scores["unusable"] == 2 and res.scores["reports"] == 7
    assert_allclose([res.scores["pod"], res.scores["far"], res.scores["csi"], res.scores["tss"]],
                    [0.5, 0.5, 1 / 3, 0.0], rtol=1e-12)  # by hand from (1, 1, 1, 1)
    # FL080 in the standard atmosphere troposphere, by hand: 1013.25 (1 - 0.0065 h / 288.15)^5.25588, h = 2438.4 m
    assert_allclose(m["pressure_hpa"].iloc[0], 1013.25 * (1 - 0.0065 * 2438.4 / 288.15) ** 5.25588, rtol=1e-4)
    # intensity: the hit and the false alarm have a forecast word above none; where no icing is diagnosed, none
    assert (m["forecast_intensity"].iloc[:1] > "none").all() and m["forecast_intensity"].iloc[1] == "none"
    assert res.intensity_table.to_numpy().sum() == 4
    frame, scores = res  # unpacks as (matches, scores)
    assert scores is res.scores and frame is m
    text = res.to_text()
    assert "POD 0.500" in text and "ADVISORY ONLY" in text


def pd_na():
    import pandas as pd

    return pd.NA


def test_partial_data_without_icing_is_unknown(source):
    """Two stations, one cut at 600 hPa: at FL200 only one has data (coverage below 1) and it shows no
    supercooled liquid, which cannot rule icing out: unknown, not counted, though the report is NEG."""
    two = SoundingSource([stratus("T1", 50.0, -20.0, f"{DATE}T00:00Z"), stratus("T1", 50.0, -20.0, f"{DATE}T12:00Z"),
                          stratus("T2", 51.0, -17.0, f"{DATE}T00:00Z", top=600.0),
                          stratus("T2", 51.0, -17.0, f"{DATE}T12:00Z", top=600.0)])
    reports = parse_pireps("UA /OV 5030N01830W/TM 0600/FL200/TP XX10/IC NEG\n"
                           "UA /OV 5030N01830W/TM 0600/FL080/TP XX10/IC LGT\n", DATE)
    res = verify_reports(reports, two)
    m = res.matches
    assert m["data"].iloc[0] == "partial" and not m["counted"].iloc[0] and 0 < m["coverage"].iloc[0] < 1
    assert m["data"].iloc[1] == "ok" and m["counted"].iloc[1]
    assert (res.table.a, res.table.b, res.table.c, res.table.d) == (1, 0, 0, 0)


def test_reports_too_far_in_time_are_stale(source):
    """max_minutes: a report 6 h from the nearest sounding is unknown with max_minutes=60, known at 30 min."""
    reports = parse_pireps("UA /OV 5000N02000W/TM 0600/FL080/TP XX10/IC LGT\n"
                           "UA /OV 5000N02000W/TM 0030/FL080/TP XX10/IC LGT\n", DATE)
    res = verify_reports(reports, source, max_minutes=60)
    assert list(res.matches["data"].astype(str)) == ["stale", "ok"]
    assert res.table.n == 1 and "min from the report" in res.matches["reason"].iloc[0]
    with pytest.raises(ValueError):
        verify_reports(reports, source, max_minutes=float("nan"))


class SharesSource:
    """A source that adds invented p_* shares to the sounding source's samples (to test the wiring only)."""

    def __init__(self, inner):
        self.inner = inner

    def sample(self, latitude, longitude, time, pressure=None, height=None):
        out = self.inner.sample(latitude, longitude, time, pressure=pressure, height=height)
        n = np.size(latitude)
        out["p_icing"] = np.full(n, 0.7)
        out["p_moderate"] = np.full(n, 0.2)
        return out


def test_reliability_of_shares(source):
    """p_icing against observed icing, p_moderate against a reported MOD: one bin each, with the observed
    frequency of the four usable reports with data (2 of 4 icing, 1 of 4 moderate: counted by hand)."""
    res = verify_reports(parse_pireps(REPORTS, DATE), SharesSource(source), bins=10)
    assert set(res.reliability) == {"p_icing", "p_moderate"}
    ri = res.reliability["p_icing"]
    row = ri[ri["count"] > 0].iloc[0]
    assert row["count"] == 4 and row["lower"] <= 0.7 < row["upper"]
    assert_allclose(row["observed_frequency"], 0.5, rtol=1e-12)
    rm = res.reliability["p_moderate"]
    assert_allclose(rm.loc[rm["count"] > 0, "observed_frequency"].iloc[0], 0.25, rtol=1e-12)
    assert "p_icing" in res.matches.columns


def test_files_written(source, tmp_path):
    """matches.csv (one row a report), scores.json (NaN as null, the caution) and the reliability diagram."""
    import json

    res = verify_reports(parse_pireps(REPORTS, DATE), SharesSource(source))
    paths = res.write(tmp_path / "out")
    assert [p.name for p in paths] == ["matches.csv", "scores.json", "reliability.png"]
    d = json.loads(paths[1].read_text())
    assert d["scores"]["hits"] == 1 and "ADVISORY ONLY" in d["caution"]
    assert d["scores"]["intensity"]["gerrity"] is None or np.isfinite(d["scores"]["intensity"]["gerrity"])
    assert paths[2].stat().st_size > 0


def test_level_from_the_icing_layer_when_the_flight_level_is_unknown(source):
    """/FL DURD with /IC LGT RIME 070-090: the report sits at the layer's middle, FL080, inside the supercooled
    layer (a hit), and the reason says where its level came from."""
    res = verify_reports(parse_pireps("UA /OV 5000N02000W/TM 0600/FL DURD/TP XX10/IC LGT RIME 070-090\n", DATE),
                         source)
    m = res.matches.iloc[0]
    assert m["flight_level"] == 80.0 and m["counted"] and res.table.a == 1
    assert "icing layer" in m["reason"]


def test_spread_shares_at_reports(source):
    """With spread=True every usable report gets the shares of the assumption ensemble (as assess_route's):
    in the supercooled layer (FL080) some members find icing, in the dry air 15-20 K below saturation above it
    (FL200) none does, whatever the cloud threshold within its +-4 % range (Zhang et al. 2010 thresholds); the
    shares are ordered (light >= moderate >= severe) and each has its reliability table against reported
    intensities at that word or worse (Wilks 2011, ch. 8)."""
    reports = parse_pireps(REPORTS, DATE)
    res = verify_reports(reports, source, spread=True, members=8, seed=1)
    m = res.matches
    inside = (m["flight_level"] == 80) & (m["data"].astype(str) == "ok")
    above = (m["flight_level"] == 200) & (m["data"].astype(str) == "ok")
    assert (m.loc[inside, "p_light"] > 0).all() and (m.loc[above, "p_light"] == 0).all()
    ok = m["data"].astype(str) == "ok"
    assert (m.loc[ok, "p_light"] >= m.loc[ok, "p_moderate"]).all()
    assert (m.loc[ok, "p_moderate"] >= m.loc[ok, "p_severe"]).all()
    assert {"p_light", "p_moderate", "p_severe"} <= set(res.reliability)
    # without data every member is unknown and counts at every intensity (never safe); unusable: no share
    missing = m["data"].astype(str) == "missing"
    assert (m.loc[missing, ["p_light", "p_moderate", "p_severe"]] == 1.0).all().all()
    assert m.loc[m["data"].astype(str) == "unusable", "p_light"].isna().all()

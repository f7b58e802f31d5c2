"""When to go: the departure window (icing.flight.departures) and its reports (icing.report.departures).

The atmosphere is constructed: two stations with reports at 00 UTC and 12 UTC. At 00 UTC both hold a layer
saturated from 900 to 650 hPa at about -6 to -17 degC: saturated air there is cloud by the relative-humidity
thresholds of Zhang et al. (2010) (over ice below 0 degC, icing.physics.cloud), and cloud between 0 degC and the
cold limit is supercooled liquid (liquid fraction after Hu et al. 2010), which a cylinder collects and freezes
(Makkonen 2000). At 12 UTC the same temperatures are dry (dewpoint depression 15 K and more, relative humidity
far under every Zhang threshold): no cloud, no supercooled liquid, no ice. Between the reports the source weights
them linearly in time (README, "How soundings are matched to the route"), so a later departure meets less liquid,
and the departure at 12 UTC none: that departure is clearly the best. Reports count up to 12 h from a sample
(``max_age_hours``); a departure whose flight falls beyond that has no data.

Check values come from that physics (ice or none, more or less) or from equality with the single-run path
(:func:`icing.flight.assess.assess_route`), never from invented numbers.
"""

from __future__ import annotations

import datetime as dt
import json

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from icing import CAUTION
from icing.errors import IcingError, RouteFormatError
from icing.flight.assess import assess_route
from icing.flight.departures import (
    DEPARTURE_COLUMNS,
    MAX_DEPARTURES,
    departure_table,
    departure_times,
    parse_departures,
    parse_step,
    screen_departures,
)
from icing.flight.route import Route
from icing.flight.sources import SoundingSource
from icing.profile import build_profile

P = np.array([1000.0, 950.0, 900.0, 850.0, 800.0, 750.0, 700.0, 650.0, 600.0, 500.0, 400.0, 300.0])
T_OFFSETS = np.array([0.0, -3.0, -8.0, -10.0, -12.0, -14.0, -16.0, -18.0, -21.0, -28.0, -38.0, -50.0])
STATIONS = (("D1", 50.0, -20.0), ("D2", 51.0, -17.0))


def profile(station, lat, lon, time, saturated):
    """Temperatures 2 degC at 1000 hPa falling to -50 degC at 300 hPa; saturated (dewpoint depression 0.2 K)
    from 900 to 650 hPa, or dry (15 K and more) everywhere (constructed)."""
    t = 2.0 + T_OFFSETS
    dd = (np.array([8.0, 8.0, 0.2, 0.2, 0.2, 0.2, 0.2, 0.2, 15.0, 20.0, 20.0, 20.0]) if saturated
          else np.array([15.0, 15.0, 15.0, 15.0, 15.0, 15.0, 15.0, 15.0, 20.0, 20.0, 20.0, 20.0]))
    return build_profile(P, t, dewpoint=t - dd, station=station, latitude=lat, longitude=lon, elevation=0.0,
                         time=time)


@pytest.fixture(scope="module")
def source():
    """Cloud at 00 UTC, dry at 12 UTC, at both stations."""
    return SoundingSource([profile(s, la, lo, t, sat) for s, la, lo in STATIONS
                           for t, sat in (("2026-01-15T00:00Z", True), ("2026-01-15T12:00Z", False))])


def route(dep="2026-01-15T00:00Z"):
    """FL080 (about 750 hPa, inside the 00 UTC layer) from station D1 to D2."""
    return Route.from_points([("AAAA", 50.0, -20.0, "FL080"), ("BBBB", 51.0, -17.0, "FL080")], departure=dep)


@pytest.fixture(scope="module")
def window(source):
    """00 to 12 UTC every 3 h."""
    return screen_departures(route(), source, "turboprop", start="2026-01-15T00:00Z", end="2026-01-15T12:00Z",
                             step="PT3H")


# ------------------------------------------------------------------------------------------ the best window
def test_best_window_is_the_dry_report_time(window):
    """The departure at 12 UTC meets the dry report only (no cloud by Zhang et al. 2010: no supercooled liquid,
    no ice) and is the one best; earlier departures meet the linearly weighted cloud of 00 UTC, more of it the
    earlier they leave."""
    assert list(window.columns) == DEPARTURE_COLUMNS
    assert list(window["departure"]) == list(pd.date_range("2026-01-15T00:00Z", "2026-01-15T12:00Z", freq="3h"))
    assert (window["data"] == "ok").all()
    best = window[window["best"]]
    assert list(best["departure"]) == [pd.Timestamp("2026-01-15T12:00Z")]
    assert best["worst_intensity"].iloc[0] == "none" and best["total_accretion_mm"].iloc[0] == 0.0
    assert best["total_icing_minutes"].iloc[0] == 0.0 and best["rank"].iloc[0] == 1
    icy = window.iloc[:-1]
    assert (icy["total_accretion_mm"] > 0).all() and (icy["worst_intensity"] > "none").all()
    # less liquid the later the departure (linear weighting in time), so less ice and a higher (worse) rank
    assert (np.diff(window["total_accretion_mm"].to_numpy()) < 0).all()
    assert list(window["rank"]) == [5, 4, 3, 2, 1]
    assert window.attrs["caution"] == CAUTION
    assert "least total accretion" in window.attrs["best_rule"]


def test_dtypes_and_attrs(window):
    """The documented dtypes: UTC times, the ordered intensity and data categoricals of the segment table."""
    from icing.flight.assess import DATA_DTYPE, INTENSITY_DTYPE

    assert str(window["departure"].dtype) == "datetime64[ns, UTC]"
    assert str(window["arrival"].dtype) == "datetime64[ns, UTC]"
    assert window["worst_intensity"].dtype == INTENSITY_DTYPE and window["data"].dtype == DATA_DTYPE
    assert window["best"].dtype == bool and window["totals_lower_bound"].dtype == bool
    assert (window["arrival"] > window["departure"]).all()
    assert window.attrs["step"] == "PT3H" and window.attrs["start"] == "2026-01-15T00:00:00Z"
    assert window.attrs["data_times"] == ["2026-01-15T00:00:00Z", "2026-01-15T12:00:00Z"]
    assert all(v is False for v in window["large_drops"])  # complete data, no precipitation in either report


def test_departure_beyond_the_data_is_missing_and_never_best(source):
    """Reports count up to 12 h from a sample: a flight at 06 UTC next day is 18 h after the last report, so it
    has no data (missing, unknown, NaN totals) and is never best; the departures at 12 and 18 UTC meet the dry
    report alone, tie (none, 0 mm) and are both best; the one at 00 UTC next day leaves the window within its
    flight and is not complete either."""
    t = screen_departures(route(), source, "turboprop", start="2026-01-15T12:00Z", end="2026-01-16T06:00Z",
                          step="6h")
    last = t.iloc[-1]
    assert last["data"] == "missing" and last["worst_intensity"] == "unknown"
    assert np.isnan(last["total_accretion_mm"]) and np.isnan(last["total_icing_minutes"])
    assert not last["best"] and last["rank"] is None and last["large_drops"] is None
    assert last["worst_segment"] is None and last["worst_leg"] is None
    assert t.iloc[2]["data"] != "ok" and not t.iloc[2]["best"]
    assert list(t["best"]) == [True, True, False, False]
    assert any("tie" in n for n in t.attrs["notes"])
    assert any("not ranked" in n for n in t.attrs["notes"])


def test_no_complete_data_marks_no_best(source):
    """A window wholly after the data: every departure missing, none best, and the notes say so."""
    t = screen_departures(route(), source, "turboprop", start="2026-01-16T06:00Z", end="2026-01-16T08:00Z",
                          step="PT1H")
    assert (t["data"] == "missing").all() and not t["best"].any()
    assert all(r is None for r in t["rank"])
    assert any("none is marked best" in n for n in t.attrs["notes"])


# ------------------------------------------------------------------------------ the same chain as assess_route
def _same_as_single_run(row, res):
    s = res.summary
    assert row["departure"] == pd.Timestamp(s["departure"])
    assert_allclose(row["total_accretion_mm"], s["total_accretion_mm"], rtol=1e-12)
    assert_allclose(row["total_icing_minutes"], s["total_icing_minutes"], rtol=1e-12)
    assert row["worst_intensity"] == s["worst_intensity"] and row["worst_segment"] == s["worst_segment"]
    assert row["arrival"] == res.segments["end_time"].iloc[-1]


def test_one_departure_equals_assess_route(source):
    """A window of one departure (start == end) gives assess_route's totals at that departure."""
    t = screen_departures(route(), source, "turboprop", start="2026-01-15T05:00Z", end="2026-01-15T05:00Z",
                          step="PT30M")
    assert len(t) == 1 and t["best"].iloc[0]  # complete data and alone: the best of its window
    _same_as_single_run(t.iloc[0], assess_route(route(), source, "turboprop", departure="2026-01-15T05:00Z"))


def test_each_departure_of_a_window_equals_assess_route(window, source):
    """Screening all departures in one vectorised pass gives each one the totals of its own single run."""
    for k in (0, 2):
        dep = window["departure"].iloc[k]
        _same_as_single_run(window.iloc[k], assess_route(route(), source, "turboprop", departure=dep))


def test_route_file_times_move_with_each_departure(tmp_path, source):
    """A route file with its own times: each departure moves them as assess_route(departure=...) does."""
    path = tmp_path / "r.csv"
    path.write_text("name,latitude,longitude,altitude,time\nAAAA,50.0,-20.0,FL080,2026-01-15T04:00Z\n"
                    "BBBB,51.0,-17.0,FL080,\n")
    t = screen_departures(path, source, "turboprop", start="2026-01-15T02:00Z", end="2026-01-15T03:00Z",
                          step="30min")
    assert len(t) == 3
    _same_as_single_run(t.iloc[1], assess_route(path, source, "turboprop", departure="2026-01-15T02:30Z"))
    assert any("move with each departure" in n for n in t.attrs["notes"])


def test_model_times_outside_the_grid_are_missing():
    """A model grid covers only its own times (GridSource, time tolerance 0): a departure after the last model
    time is missing, never best (on the demo grid; the check is the documented behaviour, not a value)."""
    from pathlib import Path

    from icing.flight.gridsource import GridSource

    samples = Path(__file__).parents[1] / "sample_soundings"
    grid = GridSource(samples / "model" / "demo_model.nc")
    last = pd.Timestamp(grid.times[-1], tz="UTC")
    t = screen_departures(samples / "demo_route.csv", grid, "turboprop", start=last - pd.Timedelta(hours=4),
                          end=last + pd.Timedelta(hours=1), step="PT1H")
    after = t[t["departure"] >= last]
    assert (after["data"] == "missing").all() and not after["best"].any()


# ------------------------------------------------------------------------------------------- the best rule
def _fake(dep, intensity, acc, minutes, data="ok", drops="none"):
    """An assessment-like object with one segment (only what departure_table reads)."""
    from types import SimpleNamespace

    from icing.flight.assess import DATA_DTYPE, INTENSITY_DTYPE, LARGE_DROPS_DTYPE

    t0 = pd.Timestamp(dep)
    seg = pd.DataFrame({"start": ["A"], "end": ["B"], "end_time": [t0 + pd.Timedelta(hours=1)],
                        "data": pd.Categorical([data], dtype=DATA_DTYPE),
                        "intensity": pd.Categorical([intensity], dtype=INTENSITY_DTYPE),
                        "large_drops": pd.Categorical([None if data == "missing" else drops],
                                                      dtype=LARGE_DROPS_DTYPE),
                        "data_age_h": [1.0]})
    missing = data == "missing"
    summary = {"departure": t0.strftime("%Y-%m-%dT%H:%M:%SZ"), "total_accretion_mm": np.nan if missing else acc,
               "total_icing_minutes": np.nan if missing else minutes, "worst_intensity": intensity,
               "worst_segment": None if missing or intensity == "none" else 1,
               "segments_missing_data": int(missing), "segments_partial_data": int(data == "partial"),
               "totals_lower_bound": data == "partial"}
    return SimpleNamespace(summary=summary, segments=seg)


def test_best_rule_intensity_then_large_drops_then_accretion_then_minutes():
    """The documented order (BEST_RULE): a lower worst intensity wins over less accretion; without large drops
    wins over with; then accretion, then minutes; equal as shown (0.01 mm, 0.1 min) is a tie, all best; a
    partial departure with less ice is never best (unknown is never safe)."""
    rows = [_fake("2026-01-15T00:00Z", "moderate", 1.0, 10.0),
            _fake("2026-01-15T01:00Z", "light", 5.0, 40.0, drops="drizzle"),
            _fake("2026-01-15T02:00Z", "light", 6.0, 40.0),
            _fake("2026-01-15T03:00Z", "light", 6.001, 30.0),
            _fake("2026-01-15T04:00Z", "light", 6.004, 30.04),
            _fake("2026-01-15T05:00Z", "trace", 0.1, 5.0, data="partial"),
            _fake("2026-01-15T06:00Z", "unknown", 0.0, 0.0, data="missing")]
    t = departure_table(rows)
    assert list(t["best"]) == [False, False, False, True, True, False, False]
    assert list(t["rank"]) == [4, 3, 2, 1, 1, None, None]
    assert list(t["large_drops"]) == [False, True, False, False, False, None, None]  # partial: unknown
    assert any("2 departures tie" in n for n in t.attrs["notes"])


# -------------------------------------------------------------------------------------------- the window
def test_step_forms():
    """ISO 8601 durations (ISO 8601-1:2019 durations, section number from memory: PnW, PnDTnHnMnS; months and
    years have no fixed length and are refused) and pandas' offset spelling (number and unit)."""
    assert parse_step("PT30M") == pd.Timedelta(minutes=30)
    assert parse_step("PT1H30M") == pd.Timedelta(minutes=90)
    assert parse_step("P1DT2H") == pd.Timedelta(hours=26)
    assert parse_step("P1W") == pd.Timedelta(days=7)
    assert parse_step("pt45s") == pd.Timedelta(seconds=45)
    assert parse_step("30min") == pd.Timedelta(minutes=30)
    assert parse_step("2h") == pd.Timedelta(hours=2)
    assert parse_step(dt.timedelta(minutes=20)) == pd.Timedelta(minutes=20)


@pytest.mark.parametrize("step, words", [
    ("P1M", "months and years"), ("P1Y", "months and years"), ("30", "not a duration"),
    ("soon", "not a duration"), ("-PT30M", "not a duration"), ("PT0M", "longer than zero"),
    ("PT", "not a duration"), ("PT1.5H", "not a duration"), (30, "not a duration"), (None, "not a duration"),
    (dt.timedelta(0), "longer than zero"),
])
def test_bad_step_is_a_typed_error(step, words):
    with pytest.raises(RouteFormatError, match=words) as err:
        parse_step(step)
    assert isinstance(err.value, IcingError) and "departures:" in str(err.value)


def test_departure_times():
    """start, start + step, ... up to end, end included on the step; a time without a zone is UTC."""
    t = departure_times("2026-01-15T06:00Z", "2026-01-15T07:00Z", "PT30M")
    assert list(t) == [pd.Timestamp(f"2026-01-15T{h}Z") for h in ("06:00", "06:30", "07:00")]
    assert list(departure_times("2026-01-15T06:00", "2026-01-15T07:10Z", "PT30M")) == list(t)
    assert list(departure_times("2026-01-15T08:00+02:00", "2026-01-15T06:00Z", "1h")) == [t[0]]
    assert len(departure_times("2026-01-15T00:00Z", "2026-01-15T00:00Z", "PT1H")) == 1


@pytest.mark.parametrize("start, end, step, words", [
    ("2026-01-15T12:00Z", "2026-01-15T06:00Z", "PT1H", "before start"),
    ("soon", "2026-01-15T06:00Z", "PT1H", "start 'soon' is not an ISO 8601 time"),
    ("2026-01-15T06:00Z", 12, "PT1H", "end 12 is not an ISO 8601 time"),
    ("2026-01-15T00:00Z", "2026-01-20T00:00Z", "PT1M", f"at most {MAX_DEPARTURES}"),
])
def test_bad_window_is_a_typed_error(start, end, step, words):
    with pytest.raises(RouteFormatError, match=words):
        departure_times(start, end, step)


def test_parse_departures():
    start, end, step = parse_departures("2026-12-03T06:00Z/2026-12-03T12:00Z/PT30M")
    assert (start, end, step) == (pd.Timestamp("2026-12-03T06:00Z"), pd.Timestamp("2026-12-03T12:00Z"),
                                  pd.Timedelta(minutes=30))
    assert parse_departures("2026-12-03T06:00Z/2026-12-03T12:00Z/30min")[2] == pd.Timedelta(minutes=30)
    for bad in ("2026-12-03T06:00Z/2026-12-03T12:00Z", "a/b/c/d", ""):
        with pytest.raises(RouteFormatError, match="START/END/STEP"):
            parse_departures(bad)


def test_bad_window_fails_before_the_soundings_are_read(tmp_path):
    """The window is checked first: a bad step is reported even with soundings that do not exist."""
    with pytest.raises(RouteFormatError, match="step"):
        screen_departures(route(), [tmp_path / "none.csv"], start="2026-01-15T00:00Z", end="2026-01-15T01:00Z",
                          step="P1M")


# ------------------------------------------------------------------------------------------------ reports
def test_reports_show_unknown_and_the_caution(source, tmp_path):
    """Text, CSV, JSON and figure: the caution in each; a missing departure is a dash/empty/null and hatched,
    never a zero; the best departure is marked."""
    from icing.report.departures import (
        departures_csv,
        departures_dict,
        departures_figure,
        departures_text,
        write_departure_reports,
    )
    from icing.report.plots import MISSING_HATCH

    t = screen_departures(route(), source, "turboprop", start="2026-01-15T06:00Z", end="2026-01-16T06:00Z",
                          step="PT6H")
    text = departures_text(t)
    assert text.startswith("ADVISORY ONLY") and text.rstrip().endswith("local regulations.")
    lines = {ln[:16]: ln for ln in text.splitlines() if ln.startswith("2026-")}
    assert "BEST" in lines["2026-01-15 12:00"] and "BEST" not in lines["2026-01-15 06:00"]
    assert "UNKNOWN" in lines["2026-01-16 06:00"] and "missing" in lines["2026-01-16 06:00"]
    assert "0.00" not in lines["2026-01-16 06:00"]
    csv_text = departures_csv(t)
    assert csv_text.startswith("# ADVISORY ONLY")
    last = csv_text.strip().splitlines()[-1].split(",")
    head = csv_text.splitlines()[1].split(",")
    assert last[head.index("total_accretion_mm")] == "" and last[head.index("worst_intensity")] == "unknown"
    d = json.loads(json.dumps(departures_dict(t), allow_nan=False))
    assert d["caution"] == CAUTION and d["departures"][-1]["total_accretion_mm"] is None
    assert d["departures"][-1]["best"] is False and d["window"]["step"] == "PT6H"
    fig = departures_figure(t)
    texts = [x.get_text() for x in fig.texts]
    assert any(x.startswith("ADVISORY ONLY") for x in texts)
    top = fig.axes[0]
    x_last = top.patches[-1].get_x() + top.patches[-1].get_width() / 2
    bars = [p for p in top.patches if abs(p.get_x() + p.get_width() / 2 - x_last) < 1e-9]
    assert bars and all(p.get_hatch() == MISSING_HATCH and p.get_height() == top.get_ylim()[1] for p in bars)
    written = write_departure_reports(t, tmp_path / "out")
    assert sorted(p.name for p in written) == ["departures.csv", "departures.json", "departures.png"]
    assert (tmp_path / "out" / "departures.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # ISO/IEC 15948

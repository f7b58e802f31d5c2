"""Property tests of the departure window (hypothesis): unknown is never best; the window holds every step."""

import pandas as pd
from hypothesis import given, settings
from hypothesis import strategies as st
from one_report import SOURCE  # (the test's own folder, on sys.path under pytest)

from icing.flight.departures import screen_departures
from icing.flight.route import Route

ROUTE = Route.from_points([("A", 50.0, -20.5, "FL080"), ("B", 50.8, -19.0, "FL080")], departure="2026-01-15T06:00Z")
STEPS = {"PT20M": 20, "PT1H": 60, "90min": 90, "PT2H": 120}  # minutes


@settings(max_examples=15, deadline=None)
@given(st.integers(-10 * 60, 10 * 60), st.integers(0, 12 * 60), st.sampled_from(sorted(STEPS)))
def test_unknown_is_never_best(start_min, length_min, step):
    """Every departure of the window is there (start, start + step, ... <= end); a best departure has complete
    data and the lowest rank; a departure without complete data has no rank; a missing one has unknown totals and
    intensity; some departure is best exactly when some has complete data (project rule: unknown is never safe)."""
    start = pd.Timestamp("2026-01-15T06:00Z") + pd.Timedelta(minutes=start_min)
    end = start + pd.Timedelta(minutes=length_min)
    t = screen_departures(ROUTE, SOURCE, "turboprop", start=start, end=end, step=step)
    td = pd.Timedelta(minutes=STEPS[step])
    assert len(t) == length_min // STEPS[step] + 1
    assert (t["departure"] == [start + k * td for k in range(len(t))]).all()
    ok = (t["data"] == "ok").to_numpy()
    best = t["best"].to_numpy()
    assert not (best & ~ok).any()
    assert best.any() == ok.any()
    assert all((r is None) == (not k) for r, k in zip(t["rank"], ok, strict=True))
    if best.any():
        assert set(t.loc[best, "rank"]) == {1}
    miss = (t["data"] == "missing").to_numpy()
    assert t.loc[miss, "total_accretion_mm"].isna().all() and (t.loc[miss, "worst_intensity"] == "unknown").all()

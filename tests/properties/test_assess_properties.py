"""Property tests of the route scorer (hypothesis): unknown is never safe; totals add up."""

import numpy as np
import pandas as pd
from hypothesis import given, settings
from hypothesis import strategies as st
from one_report import SOURCE  # (the test's own folder, on sys.path under pytest)

from icing.flight.assess import assess_route
from icing.flight.route import Route


@settings(max_examples=15, deadline=None)
@given(st.floats(45.0, 56.0), st.floats(-30.0, -10.0), st.floats(45.0, 56.0), st.floats(-30.0, -10.0),
       st.integers(30, 200), st.integers(-12, 12))
def test_no_data_never_reads_none(lat1, lon1, lat2, lon2, fl, hours):
    """Wherever a sample has no matching data its rate is unknown (NaN), and a segment with any such sample is
    never 'none'; a segment without any data is 'unknown' (project rule: unknown is never safe)."""
    if abs(lat1 - lat2) + abs(lon1 - lon2) < 0.3:
        lat2 += 0.5
    dep = np.datetime64("2026-01-15T06:00") + np.timedelta64(hours, "h")
    route = Route.from_points([("A", lat1, lon1, f"FL{fl:03d}"), ("B", lat2, lon2, f"FL{fl:03d}")],
                              departure=str(dep))
    res = assess_route(route, SOURCE, "turboprop")
    smp = res.samples
    assert np.isnan(smp.loc[smp["coverage"] <= 0, "rate_mm_per_h"]).all()
    for _, seg in res.segments.iterrows():
        leg = smp[smp["leg"] == seg["segment"] - 1]
        if (leg["coverage"] < 0.999).any():
            assert seg["intensity"] != "none"
            assert seg["data"] in ("partial", "missing")
        if (leg["coverage"] <= 0).all():
            assert seg["intensity"] == "unknown" and seg["data"] == "missing"
            # Unknown in every column: no zero minutes, no 'none' ice type or large drops.
            assert np.isnan(seg["icing_minutes"]) and np.isnan(seg["accretion_mm"])
            assert pd.isna(seg["ice_type"]) and pd.isna(seg["large_drops"])
        assert seg["lower_bound"] == (seg["data"] == "partial")
    if (res.segments["data"] == "missing").any():  # a segment without data leaves the totals unknown
        assert np.isnan(res.summary["total_icing_minutes"]) and np.isnan(res.summary["total_accretion_mm"])
        assert res.summary["worst_intensity"] == "unknown" and res.summary["worst_segment"] is None
    else:
        assert np.isclose(res.summary["total_icing_minutes"], res.segments["icing_minutes"].sum())

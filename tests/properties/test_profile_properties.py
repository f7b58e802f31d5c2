"""Property tests of the profile builder (hypothesis)."""

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st
from metpy.units import units
from numpy.testing import assert_allclose

from icing.profile import build_profile


@st.composite
def raw_profiles(draw):
    n = draw(st.integers(3, 25))
    p = np.sort(np.array(draw(st.lists(st.floats(150, 1050), min_size=n, max_size=n, unique=True))))[::-1]
    t = np.array(draw(st.lists(st.floats(-80, 40), min_size=n, max_size=n)))
    dd = np.array(draw(st.lists(st.floats(0, 30), min_size=n, max_size=n)))
    return np.round(p, 1), np.round(t, 1), np.round(t - dd, 1)


@settings(max_examples=40, deadline=None)
@given(raw_profiles(), st.randoms(use_true_random=False))
def test_units_and_order_do_not_matter(prof, rnd):
    """hPa/Pa, degC/K and any level order give the same canonical Dataset (project contract)."""
    p, t, td = prof
    a = build_profile(p, t, dewpoint=td)
    order = list(range(p.size))
    rnd.shuffle(order)
    b = build_profile(p[order] * 100 * units.Pa, (t[order] + 273.15) * units.K,
                      dewpoint=(td[order] + 273.15) * units.K)
    for name in ("pressure", "temperature", "dewpoint", "relative_humidity", "height"):
        assert_allclose(a[name].values, b[name].values, rtol=1e-9, atol=1e-7, equal_nan=True)


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(st.floats(-100, 1100), st.floats(-150, 90), st.floats(-150, 90)), min_size=2,
                max_size=20))
def test_every_input_level_is_kept_or_recorded(rows):
    """Every input level is in the profile or named in the quality record (nothing lost silently)."""
    p = np.round([r[0] for r in rows], 0)
    t = [r[1] for r in rows]
    td = [r[2] for r in rows]
    lines = list(range(1, len(rows) + 1))
    try:
        ds = build_profile(p, t, dewpoint=td, lines=lines)
    except Exception as exc:  # too few usable levels is a typed, explained error
        from icing.errors import ProfileQualityError
        assert isinstance(exc, ProfileQualityError)
        return
    kept = set(np.round(ds["pressure"].values, 6))
    recorded = {e.get("line") for e in ds.attrs["quality"] if e["action"] in ("dropped", "merged")}
    for line, pi in zip(lines, p, strict=True):
        assert round(float(pi), 6) in kept or line in recorded

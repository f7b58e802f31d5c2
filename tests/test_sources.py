"""Soundings as an atmosphere source: matching in space and time, vertical interpolation, no-data handling."""

import numpy as np
import pytest
from numpy.testing import assert_allclose
from pyproj import Geod

from icing.flight.sources import SoundingSource
from icing.profile import build_profile

P = np.array([1000.0, 925.0, 850.0, 700.0, 600.0, 500.0, 400.0, 300.0])


def prof(station, lat, lon, time, t_offset=0.0, moist=True):
    t = np.array([8.0, 3.0, -1.0, -9.0, -16.0, -24.0, -34.0, -47.0]) + t_offset
    dd = np.array([1.0, 0.5, 0.2, 0.2, 0.3, 15.0, 20.0, 20.0]) if moist else np.full(P.size, 20.0)
    return build_profile(P, t, dewpoint=t - dd, station=station, latitude=lat, longitude=lon, elevation=0.0,
                         time=time, wind_speed=np.full(P.size, 10.0), wind_direction=np.full(P.size, 270.0))


@pytest.fixture(scope="module")
def source():
    return SoundingSource([prof("A", 52.0, -30.0, "2026-01-15T00:00Z"), prof("A", 52.0, -30.0, "2026-01-15T12:00Z",
                                                                             t_offset=2.0),
                           prof("B", 54.0, -30.0, "2026-01-15T00:00Z", moist=False)], max_distance_km=300)


def t64(s):
    return np.array([np.datetime64(s, "s")])


@pytest.fixture(scope="module")
def one_station():
    return SoundingSource([prof("A", 52.0, -30.0, "2026-01-15T00:00Z"),
                           prof("A", 52.0, -30.0, "2026-01-15T12:00Z", t_offset=2.0)])


def test_weight_one_at_the_report_time(one_station):
    w, _ = one_station.weights([52.1], [-30.0], t64("2026-01-15T00:00").astype(float))
    assert_allclose(w[0], [1.0, 0.0], atol=1e-12)


def test_linear_in_time_between_reports(one_station):
    """Halfway between two reports of one station: weights 0.5 and 0.5 (the documented scheme)."""
    w, _ = one_station.weights([52.0], [-30.0], t64("2026-01-15T06:00").astype(float))
    assert_allclose(w[0], [0.5, 0.5], atol=1e-12)
    s = one_station.sample([52.0], [-30.0], t64("2026-01-15T06:00"), pressure=[850e2])
    assert_allclose(s["temperature"], [0.0], atol=1e-9)  # -1 and +1 degC at 850 hPa, averaged


def test_inverse_distance_squared_between_stations(source):
    """Between two stations the weights go as 1/d^2 (the documented scheme); distances on the sphere."""
    lat = 52.5
    w, d = source.weights([lat], [-30.0], t64("2026-01-15T00:00").astype(float))
    da, db = d[0, 0], d[0, 2]
    assert_allclose(w[0, 0] / w[0, 2], (db / da) ** 2, rtol=1e-9)
    ref = Geod(ellps="WGS84").inv(-30.0, lat, -30.0, 52.0)[2]
    assert_allclose(da, ref, rtol=5e-3)  # sphere vs ellipsoid (pyproj), within 0.5 %


def test_outside_coverage_is_no_data(source):
    """Far from every station, or long after every report, coverage is 0 (unknown, not clear air)."""
    far = source.sample([40.0], [-30.0], t64("2026-01-15T00:00"), pressure=[700e2])
    late = source.sample([52.0], [-30.0], t64("2026-01-17T00:00"), pressure=[700e2])
    above = source.sample([52.0], [-30.0], t64("2026-01-15T00:00"), pressure=[150e2])
    for s in (far, late, above):
        assert s["coverage"][0] == 0.0
        assert np.isnan(s["lwc"][0])


def test_height_and_pressure_agree(one_station):
    """A sample given by height samples the same air as one given by the profile's pressure there."""
    d = one_station.diagnostics
    z850 = float(d["height"].values[0, 2])
    a = one_station.sample([52.0], [-30.0], t64("2026-01-15T00:00"), pressure=[850e2])
    b = one_station.sample([52.0], [-30.0], t64("2026-01-15T00:00"), height=[z850])
    assert_allclose(a["temperature"], b["temperature"], atol=1e-9)
    assert_allclose(b["pressure"], [850e2], rtol=1e-9)


def test_unknown_source_options_are_refused(demo_model):
    """No option is dropped silently: an unknown keyword to a grid source is a TypeError, and an unknown
    diagnosis parameter to a sounding source a ConfigError (both name it)."""
    from icing.errors import ConfigError
    from icing.flight.gridsource import GridSource

    with pytest.raises(TypeError, match="sprd"):
        GridSource(demo_model, sprd=True)
    with pytest.raises(ConfigError, match="sprd"):
        SoundingSource([prof("A", 52.0, -30.0, "2026-01-15T00:00Z")], sprd=True)


@pytest.mark.parametrize("option", [{"max_distance_km": -5.0}, {"max_distance_km": float("nan")},
                                    {"max_age_hours": "12"}, {"max_stations": 0}, {"max_stations": 2.5}])
def test_bad_matching_options_are_refused(option):
    """A NaN or negative radius would silently match nothing (every sample unknown): a ConfigError instead."""
    from icing.errors import ConfigError

    with pytest.raises(ConfigError, match=next(iter(option))):
        SoundingSource([prof("A", 52.0, -30.0, "2026-01-15T00:00Z")], **option)

"""Round trip: random plausible soundings written as TEMP by the test-only encoder decode back within the
precision of the code (WMO-No. 306 FM 35): temperature to 0.1 degC (tenths digit, sign in its parity);
dewpoint depression to the resolution of code table 0777 (0.1 K up to 5 K, 1 K above); standard heights to
the metre (1000-700 hPa) or decametre (500 hPa and above); pressure in whole hPa (Parts A, B) or tenths of
hPa (Parts C, D); wind direction to 5 deg and speed to one unit (kt or m/s).
"""

import sys
from pathlib import Path

import numpy as np
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

sys.path.insert(0, str(Path(__file__).parents[1]))

import encoders  # noqa: E402

from icing.io import temp  # noqa: E402

KNOT = 1852.0 / 3600.0


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(prof=encoders.soundings(), knots=st.booleans(), id_a=st.sampled_from([1000.0, 850.0, 700.0, 500.0, 300.0,
                                                                            200.0, 100.0]),
       id_c=st.sampled_from([70.0, 30.0, 10.0]), day=st.integers(1, 31), hour=st.integers(0, 23))
def test_temp_round_trip(prof, knots, id_a, id_c, day, hour):
    assume(encoders.within_height_windows(prof))
    text = encoders.encode_temp(prof, station="00105", day=day, hour=hour, knots=knots, wind_top_a=id_a,
                                wind_top_c=id_c)
    (ds,) = temp.decode_temp(text)
    assert ds.attrs["station"] == "00105"
    p_in, p_out = prof["pressure"], ds["pressure"].values
    assert np.array_equal(np.sort(p_in), np.sort(p_out)), "levels lost or invented"
    order = np.argsort(-p_in)
    p_in = p_in[order]
    get = {k: np.asarray(prof[k])[order] for k in ("height", "temperature", "dewpoint", "wind_direction",
                                                   "wind_speed")}
    out = {k: ds[k].values for k in ("height", "temperature", "dewpoint", "wind_direction", "wind_speed")}
    t_err = np.abs(out["temperature"] - get["temperature"])
    assert np.all(t_err <= 0.1 + 1e-9), t_err.max()
    dd = get["temperature"] - get["dewpoint"]
    dd_tol = np.where(dd < 5.05, 0.05, 0.5)  # table 0777 resolution
    assert np.all(np.abs(out["dewpoint"] - get["dewpoint"]) <= 0.1 + dd_tol + 1e-9)
    std = np.isfinite(get["height"])
    h_tol = np.where(p_in >= 700.0, 0.5, 5.0)
    assert np.all(np.abs(out["height"][std] - get["height"][std]) <= h_tol[std] + 1e-9)
    unit = KNOT if knots else 1.0
    has_wind = np.isfinite(out["wind_speed"])
    # Wind groups exist at the surface, at standard surfaces up to Id, and at 21212 significant levels.
    is_std = np.isin(p_in, list(encoders.STANDARD))
    expect_wind = ~is_std | ((p_in >= 100.0) & (p_in >= id_a)) | ((p_in < 100.0) & (p_in >= id_c))
    expect_wind[0] = True
    assert np.array_equal(has_wind, expect_wind)
    assert np.all(np.abs(out["wind_speed"][has_wind] - get["wind_speed"][has_wind]) <= 0.5 * unit + 1e-9)
    moving = has_wind & (out["wind_speed"] > 0)
    ddir = np.abs((out["wind_direction"][moving] - get["wind_direction"][moving] + 180.0) % 360.0 - 180.0)
    assert np.all(ddir <= 2.5 + 1e-9)


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(profs=st.lists(encoders.soundings(), min_size=1, max_size=3), hour0=st.integers(0, 11))
def test_igra_round_trip(profs, hour0):
    """IGRA v2 format description (Durre et al. 2016): pressure in whole Pa, temperature and dewpoint
    depression in tenths of degC, wind speed in tenths of m/s, direction in whole degrees, GPH in metres."""
    from icing.io import igra

    times = [np.datetime64("2026-01-15T00:00") + np.timedelta64(hour0 + 12 * k, "h") for k in range(len(profs))]
    text = encoders.encode_igra([(t, 52.0, -34.0, p) for t, p in zip(times, profs, strict=True)])
    out = igra.decode_igra(text)
    assert len(out) == len(profs)
    for ds, prof in zip(out, profs, strict=True):
        order = np.argsort(-prof["pressure"])
        assert np.allclose(ds["pressure"].values, np.round(prof["pressure"][order] * 100) / 100, atol=1e-9)
        assert np.all(np.abs(ds["temperature"].values - prof["temperature"][order]) <= 0.05 + 1e-9)
        assert np.all(np.abs(ds["dewpoint"].values - prof["dewpoint"][order]) <= 0.1 + 1e-9)
        std = np.isfinite(prof["height"][order])
        assert np.all(np.abs(ds["height"].values[std] - prof["height"][order][std]) <= 0.5 + 1e-9)
        assert np.all(np.abs(ds["wind_speed"].values - prof["wind_speed"][order]) <= 0.05 + 1e-9)
        ddir = np.abs((ds["wind_direction"].values - prof["wind_direction"][order] + 180.0) % 360.0 - 180.0)
        assert np.all(ddir <= 0.5 + 1e-9)
    # Selecting by time range returns exactly the soundings inside it.
    sel = igra.decode_igra(text, start=times[0], end=times[0])
    assert [d.attrs["time"] for d in sel] == [out[0].attrs["time"]]


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(prof=encoders.soundings(), form=st.sampled_from(["UU", "XX", "II"]), feet=st.booleans(),
       lat=st.floats(-89.9, 89.9), lon=st.floats(-179.9, 179.9), elevation=st.integers(0, 100))
def test_ship_drop_mobil_round_trip(prof, form, feet, lat, lon, elevation):
    """TEMP SHIP, DROP and MOBIL (WMO-No. 306 FM 36, 37, 38) decode to the same levels and values as the land
    form of the same ascent; the position to its tenth of a degree (LaLaLa, LoLoLoLo); the MOBIL elevation
    to the metre or foot it is coded in (h0h0h0h0im, code table 1845 from memory)."""
    assume(encoders.within_height_windows(prof))
    (ds,) = temp.decode_temp(encoders.encode_temp(prof, station="ZQXA7", form=form, position=(lat, lon),
                                                  elevation=float(elevation), feet=feet))
    # The land form with the same station elevation (a ship launches at sea level; a drop has none).
    elev = {"UU": 0.0, "XX": np.nan, "II": ds.attrs["elevation"]}[form]
    land = temp.decode_temp(encoders.encode_temp(prof, station="00105"), stations={"00105": (lat, lon, elev)})[0]
    assert abs(ds.attrs["latitude"] - lat) <= 0.05 + 1e-9 and abs(ds.attrs["longitude"] - lon) <= 0.05 + 1e-9
    if form == "II":
        assert abs(ds.attrs["elevation"] - elevation) <= (0.5 * 0.3048 if feet else 0.5) + 1e-9
    for name in ("pressure", "height", "temperature", "dewpoint", "wind_speed", "wind_direction"):
        np.testing.assert_array_equal(ds[name].values, land[name].values)


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(prof=encoders.soundings(), n=st.integers(1, 12), knots=st.booleans(), data=st.data())
def test_winds_by_altitude_round_trip(prof, n, knots, data):
    """PPBB winds by altitude (FM 32 section 4, 9tnu1u2u3, 300 m units, from memory) beside TTAA/TTBB: each
    wind comes back at its altitude, to one unit of speed and 5 deg of direction, at the pressure that
    log-pressure interpolation in the ascent's true heights gives, within 0.5 % (the decoded ascent's heights
    of significant levels are hypsometric from coded temperatures, common practice)."""
    assume(encoders.within_height_windows(prof))
    ztrue = prof["true_height"]
    top = min(int(ztrue[-1] // 300.0) - 1, 99)  # tn is one digit: altitudes up to 99 units
    units = sorted(data.draw(st.sets(st.integers(1, top), min_size=n, max_size=n)))
    alts = [u * 300.0 for u in units if ztrue[0] < u * 300.0 < ztrue[-1]]
    assume(alts)
    wd = data.draw(st.lists(st.integers(1, 72), min_size=len(alts), max_size=len(alts)))
    ws = data.draw(st.lists(st.integers(1, 99), min_size=len(alts), max_size=len(alts)))
    unit = KNOT if knots else 1.0
    # The temperature parts carry no wind, so that a wind by altitude that falls on a level they report
    # (a standard height in whole decametres) meets no other value for it.
    prof = dict(prof, wind_speed=np.full(prof["pressure"].size, np.nan))
    text = encoders.encode_temp(prof, station="00105", knots=knots) + encoders.encode_pilot_heights(
        alts, [5.0 * d for d in wd], [s * unit for s in ws], station="00105", knots=knots)
    (ds,) = temp.decode_temp(text)
    assert ds.attrs["wind_parts"] == "B"
    z, p = ds["height"].values, ds["pressure"].values
    for alt, d, s in zip(alts, wd, ws, strict=True):
        i = np.flatnonzero(np.isclose(z, alt, atol=1e-6))
        assert i.size == 1, f"wind at {alt} m lost"
        p_true = np.exp(np.interp(alt, ztrue, np.log(prof["pressure"])))
        np.testing.assert_allclose(p[i[0]], p_true, rtol=5e-3)
        np.testing.assert_allclose(ds["wind_speed"].values[i[0]], s * unit, atol=0.5 * unit + 1e-9)
        np.testing.assert_allclose(ds["wind_direction"].values[i[0]], 5.0 * d, atol=1e-9)

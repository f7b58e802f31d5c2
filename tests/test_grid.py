"""Grid diagnostics (icing.grid) and the model grid as an atmosphere source (icing.flight.gridsource).

The references here are outside the grid code: the soundings path (icing.flight.sources.SoundingSource over
icing.physics.diagnose.diagnose) for the same columns, scipy's RegularGridInterpolator for the 4-D interpolation,
hand-worked linear interpolation for freezing levels, and dask's own schedulers against each other.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import xarray as xr

from icing.cli import build_parser
from icing.errors import ConfigError
from icing.flight.gridsource import GridSource
from icing.flight.sources import SoundingSource
from icing.grid import chunk_model, column_summaries, diagnose_grid, grid_main
from icing.io import read_profiles
from icing.io.model import read_model
from icing.physics import thermo
from icing.profile import stack_profiles

ROOT = Path(__file__).parents[1]
SAMPLES = ROOT / "sample_soundings"
SOUNDINGS = sorted(SAMPLES.glob("S*_*.csv"))
LEVEL_FIELDS = ("rh_water", "rh_ice", "in_cloud", "supercooled", "liquid_fraction", "lwc", "mvd", "large_drop",
                "warm_layer_aloft", "cloud_kind", "valid")


def _synthetic(nt=2, ny=6, nx=7, seed=0):
    """A small random grid: standard-atmosphere temperatures with noise and patchy saturation."""
    rng = np.random.default_rng(seed)
    lev = np.array([1000, 950, 900, 850, 800, 750, 700, 650, 600, 500, 400, 300, 200.0])
    z = thermo.standard_atmosphere_height(lev * 100)
    shape = (nt, ny, nx, lev.size)
    t = thermo.standard_atmosphere_temperature(z) - thermo.T0 - 8 + rng.normal(0, 2, shape)
    td = t - np.abs(rng.normal(0, 2, shape)) * (rng.random(shape) > 0.4)
    dims = ("time", "latitude", "longitude", "level")
    return xr.Dataset(
        {"pressure": ("level", lev, {"units": "hPa"}), "temperature": (dims, t, {"units": "degC"}),
         "dewpoint": (dims, td, {"units": "degC"}),
         "height": (dims, np.broadcast_to(z, shape) + rng.normal(0, 5, shape), {"units": "m"})},
        coords={"time": pd.date_range("2026-01-15", periods=nt, freq="6h").values,
                "latitude": np.linspace(50.0, 52.5, ny), "longitude": np.linspace(-30.0, -27.0, nx),
                "level": np.arange(lev.size)})


def test_dask_equals_eager():
    """The lazy dask result (one dask.array.blockwise task a chunk) equals the eager numpy result on the same
    field."""
    pytest.importorskip("dask")
    ds = _synthetic()
    eager = diagnose_grid(ds, "turboprop")
    lazy = diagnose_grid(chunk_model(ds, 200), "turboprop")
    assert lazy["lwc"].chunks is not None and lazy["temperature"].data.npartitions > 1
    xr.testing.assert_identical(eager, lazy.compute())


def test_chunk_model_even_tiles():
    """chunk_model splits latitude and longitude into tiles of even sizes (within one column of each other), as
    many as bring them nearest the square tile of the requested points, one time a chunk, all levels in one
    chunk (structural: no physics)."""
    pytest.importorskip("dask")
    ds = _synthetic(nt=2, ny=6, nx=7)
    chunks = chunk_model(ds, 13 * 9)["temperature"].chunks  # 9 columns a chunk: tiles of about 3 x 3
    assert chunks[0] == (1, 1) and chunks[3] == (13,)
    assert chunks[1] == (3, 3) and chunks[2] == (4, 3)  # 7 columns: two tiles of 4 and 3, not 3 + 3 + 1


def test_distributed_equals_threaded():
    """A dask.distributed LocalCluster run equals the threaded-scheduler run."""
    pytest.importorskip("distributed")
    from icing.grid import scheduler

    ds = diagnose_grid(chunk_model(_synthetic(seed=3), 300), "turboprop")
    with scheduler() as none:
        assert none is None
        threaded = ds.compute()
    with scheduler(workers=1, processes=False) as client:
        assert client is not None
        distributed = client.compute(ds).result()
    xr.testing.assert_identical(threaded, distributed)


def _sounding_grid():
    """A grid whose columns are the demo soundings: column (time, j, i) is station j at that time."""
    profs = [p for f in SOUNDINGS for p in read_profiles(f)]
    st = stack_profiles(profs)
    stations = sorted(set(st["station"].values))
    lat = np.array([float(st["latitude"].values[list(st["station"].values).index(s)]) for s in stations])
    lon = np.array([float(st["longitude"].values[list(st["station"].values).index(s)]) for s in stations])
    times = np.unique(st["time"].values)
    nlev = st.sizes["level"]
    shape = (times.size, lat.size, lon.size, nlev)
    arrays = {k: np.full(shape, np.nan) for k in ("pressure", "temperature", "dewpoint", "height", "wind_speed",
                                                  "wind_direction")}
    for k_prof in range(st.sizes["profile"]):
        j = stations.index(st["station"].values[k_prof])
        k = int(np.flatnonzero(times == st["time"].values[k_prof])[0])
        for name in arrays:
            arrays[name][k, j, :, :] = st[name].values[k_prof]
    dims = ("time", "latitude", "longitude", "level")
    ds = xr.Dataset({name: (dims, arrays[name], dict(st[name].attrs)) for name in arrays},
                    coords={"time": times.astype("datetime64[ns]"), "latitude": lat, "longitude": np.sort(lon),
                            "level": np.arange(nlev)})
    return profs, st, stations, ds


def test_sounding_columns_give_the_soundings_diagnostics():
    """A grid whose columns are the demo soundings gives the same diagnostics and the same samples as the
    soundings path (SoundingSource, one station per sample) at the stations."""
    profs, st, stations, grid = _sounding_grid()
    snd = SoundingSource(profs, max_stations=1)
    gsrc = GridSource(grid)
    for k_prof in range(st.sizes["profile"]):
        j = stations.index(st["station"].values[k_prof])
        k = int(np.flatnonzero(grid["time"].values == st["time"].values[k_prof])[0])
        i = int(np.flatnonzero(np.isclose(grid["longitude"].values, float(st["longitude"].values[k_prof])))[0])
        col = gsrc.diagnostics.isel(time=k, latitude=j, longitude=i)
        for name in LEVEL_FIELDS:
            np.testing.assert_array_equal(np.asarray(col[name].values, float),
                                          np.asarray(snd.diagnostics[name].values[k_prof], float), err_msg=name)
        for name in ("precipitation_type", "freezing_level_count"):
            assert int(col[name]) == int(snd.diagnostics[name].values[k_prof])
    # Samples at each station, at both report times and half way between, at flight levels and at heights.
    lat = np.repeat(grid["latitude"].values, 3 * 6)
    lon = np.repeat(np.sort(np.array([float(st["longitude"].values[list(st["station"].values).index(s)])
                                      for s in stations])), 3 * 6)
    hours = np.tile(np.repeat(np.array([0, 6, 12]), 6), len(stations))
    times = np.datetime64("2026-01-15T00:00:00") + hours.astype("timedelta64[h]")
    fl = np.tile(np.array([30.0, 60, 90, 120, 160, 250]), 3 * len(stations))
    pressure = thermo.flight_level_to_pressure(fl)
    height = np.where(fl > 100, np.nan, fl * 100 * 0.3048)
    pressure = np.where(fl > 100, pressure, np.nan)
    a = snd.sample(lat, lon, times, pressure=pressure, height=height)
    b = gsrc.sample(lat, lon, times, pressure=pressure, height=height)
    assert (b["coverage"] > 0).any()
    for name in ("coverage", "temperature", "pressure", "lwc", "mvd", "supercooled", "in_cloud", "rh_water",
                 "large_drop", "freezing_level_m", "supercooled_top_m", "wind_u", "wind_v", "age_h"):
        np.testing.assert_allclose(b[name], a[name], rtol=1e-9, atol=1e-9, equal_nan=True, err_msg=name)


def test_interpolation_matches_scipy():
    """Bilinear in latitude/longitude, linear in time and in ln p: scipy's RegularGridInterpolator ("linear",
    multilinear on the same axes) is the reference."""
    from scipy.interpolate import RegularGridInterpolator

    ds = _synthetic(nt=3, ny=5, nx=6, seed=7)
    src = GridSource(ds)
    rng = np.random.default_rng(1)
    n = 200
    lat = rng.uniform(50.0, 52.5, n)
    lon = rng.uniform(-30.0, -27.0, n)
    hours = rng.uniform(0, 12, n)
    p = np.exp(rng.uniform(np.log(21000.0), np.log(99000.0), n))
    times = np.datetime64("2026-01-15T00:00:00") + (hours * 3600).astype("timedelta64[s]")
    out = src.sample(lat, lon, times, pressure=p)
    t_h = (ds["time"].values - ds["time"].values[0]) / np.timedelta64(1, "h")
    ref = RegularGridInterpolator((t_h, ds["latitude"].values, ds["longitude"].values,
                                   -np.log(ds["pressure"].values * 100)), ds["temperature"].values)
    expected = ref(np.column_stack([(times - ds["time"].values[0]) / np.timedelta64(1, "h"),
                                    lat, lon, -np.log(p)]))
    ok = out["coverage"] >= 0.999
    assert ok.sum() > n / 2  # the random dewpoint gaps make a few corners invalid, not most
    np.testing.assert_allclose(out["temperature"][ok], expected[ok], rtol=0, atol=1e-9)


def test_outside_the_grid_is_unknown():
    """Outside the domain, time range or levels the coverage is 0 and nothing reads as "no icing"."""
    src = GridSource(_synthetic())
    t0 = np.datetime64("2026-01-15T03:00:00")
    lat = np.array([51.0, 49.0, 51.0, 51.0, 51.0])
    lon = np.array([-28.0, -28.0, -28.0, -28.0, 150.0])
    times = np.array([t0, t0, t0 + np.timedelta64(12, "h"), t0, t0])
    p = np.array([70000.0, 70000.0, 70000.0, 10000.0, 70000.0])
    out = src.sample(lat, lon, times, pressure=p)
    assert out["coverage"][0] > 0
    np.testing.assert_array_equal(out["coverage"][1:], 0.0)
    assert np.isnan(out["lwc"][1:]).all() and np.isnan(out["temperature"][1:]).all()
    assert not out["used"][1:].any()
    assert out["used"].shape == (5, src.labels.size)


def test_freezing_levels_by_hand():
    """Crossings of 0 degC by linear interpolation in height, worked by hand: T = 5, 1, -3, 2, -4 degC at 0,
    1000, ..., 4000 m crosses at 1000 + 1/4 km, 2000 + 3/5 km and 3000 + 2/6 km."""
    t = np.array([[5.0, 1.0, -3.0, 2.0, -4.0]]) + thermo.T0
    z = np.array([[0.0, 1000.0, 2000.0, 3000.0, 4000.0]])
    sc = np.array([[False, False, True, False, True]])
    s = column_summaries(t, z, sc, np.ones_like(sc))
    np.testing.assert_allclose(s["freezing_levels"][0], [1250.0, 2600.0, 3000 + 2000 / 6], rtol=1e-12)
    assert s["freezing_level_m"][0] == pytest.approx(1250.0)
    assert s["supercooled_base_m"][0] == 2000.0 and s["supercooled_top_m"][0] == 4000.0
    cold = column_summaries(t - 10.0, z, sc, np.ones_like(sc))  # sub-freezing at the ground: the surface
    assert cold["freezing_level_m"][0] == 0.0


def test_longitude_conventions_and_latitude_order_give_the_same_route(tmp_path, demo_model):
    """The demo file (latitudes north to south, longitudes 0..360), the same fields rewritten south to north in
    -180..180, and the route typed with 0..360 longitudes give the same segment table; two routes screened in
    one call give what each gives alone."""
    from icing.flight.assess import assess_route, assess_routes
    from icing.flight.route import read_route

    path = demo_model
    raw = xr.open_dataset(path, engine="h5netcdf").load()
    flipped = raw.isel(latitude=slice(None, None, -1)).assign_coords(longitude=raw["longitude"].values - 360.0)
    flipped.to_netcdf(tmp_path / "flipped.nc", engine="h5netcdf")
    route = read_route(SAMPLES / "demo_route.csv")
    text = (SAMPLES / "demo_route.csv").read_text().splitlines()
    rows = [text[0], text[1]] + [
        ",".join(c if k != 2 else f"{float(c) + 360.0:.2f}" for k, c in enumerate(line.split(",")))
        for line in text[2:] if line.strip()]
    (tmp_path / "route360.csv").write_text("\n".join(rows) + "\n")
    route360 = read_route(tmp_path / "route360.csv")
    a = assess_route(route, GridSource(path), "turboprop").segments
    b = assess_route(route, GridSource(tmp_path / "flipped.nc"), "turboprop").segments
    c = assess_route(route360, GridSource(path), "turboprop").segments
    assert (a["data"] == "ok").all()
    pd.testing.assert_frame_equal(a, b)
    num = [k for k in a.columns if a[k].dtype.kind == "f"]
    pd.testing.assert_frame_equal(a[num], c[num], rtol=1e-6)
    assert (a["intensity"] == c["intensity"]).all()
    both = assess_routes([route, route360], GridSource(path), "turboprop")  # many routes, one sample call
    pd.testing.assert_frame_equal(both[0].segments, a)
    pd.testing.assert_frame_equal(both[1].segments[num], c[num], rtol=1e-9)


def test_grid_command_writes_the_potential(tmp_path, capsys, demo_model):
    """`icing grid FIELDS --aircraft NAME --out FILE` writes the level fields and the 2-D summaries."""
    pytest.importorskip("dask")
    path = demo_model
    parser = build_parser()
    args = parser.parse_args(["grid", str(path), "--aircraft", "turboprop", "--out", str(tmp_path / "out.nc"),
                              "--chunk-points", "100000", "--quiet"])
    assert grid_main(args) == 0
    with xr.open_dataset(tmp_path / "out.nc", engine="h5netcdf") as res:
        assert {"potential_rate", "max_potential_intensity", "freezing_level_m", "supercooled_top_m",
                "lwc"} <= set(res.data_vars)
        assert res["max_potential_intensity"].dims == ("time", "latitude", "longitude")
        expected = diagnose_grid(read_model(path), "turboprop")
        np.testing.assert_array_equal(res["max_potential_intensity"].values,
                                      expected["max_potential_intensity"].values)
    assert "wrote" in capsys.readouterr().out


def test_grid_command_without_dask_reads_eagerly(tmp_path, capsys, monkeypatch, demo_model):
    """Without dask installed (a plain `pip install .`) `icing grid` reads the file whole, says so, and writes
    the same potential as the chunked run."""
    import icing.grid.diagnosis as grid

    monkeypatch.setattr(grid, "_have_dask", lambda: False)
    parser = build_parser()
    args = parser.parse_args(["grid", str(demo_model), "--out", str(tmp_path / "eager.nc"), "--quiet"])
    assert grid_main(args) == 0
    err = capsys.readouterr().err
    assert "dask is not installed" in err and "numpy in this process" in err
    with xr.open_dataset(tmp_path / "eager.nc", engine="h5netcdf") as res:
        expected = diagnose_grid(read_model(demo_model), "turboprop")
        for name in ("max_potential_intensity", "freezing_level_m", "lwc"):
            np.testing.assert_array_equal(res[name].values, expected[name].values)


def test_outputs_subset_equals_the_full_result(tmp_path, capsys, demo_model):
    """`outputs=` computes only the named fields, with the values of the full run; `--summary-only` writes the
    column summaries alone; an unknown name is a ConfigError."""
    pytest.importorskip("dask")
    model = chunk_model(read_model(demo_model), 5_000)
    full = diagnose_grid(model, "turboprop").compute()
    names = ["max_potential_intensity", "freezing_levels", "supercooled_top_m"]
    part = diagnose_grid(model, "turboprop", outputs=names)
    assert not {"lwc", "potential_rate", "rh_water"} & set(part.data_vars)
    part = part.compute()
    # Floating-point fields to rounding (chunking may change the order of a compiler's floating-point work),
    # codes exactly.
    for name in names:
        np.testing.assert_allclose(part[name].values, full[name].values, rtol=1e-12, atol=0.0)
    one = diagnose_grid(model, "turboprop", outputs=["max_potential_rate"]).compute()  # no crossing dimension
    np.testing.assert_allclose(one["max_potential_rate"].values, full["max_potential_rate"].values, rtol=1e-12)
    eager = diagnose_grid(read_model(demo_model), "turboprop", outputs=["max_potential_rate"])
    np.testing.assert_allclose(eager["max_potential_rate"].values, full["max_potential_rate"].values, rtol=1e-12)
    with pytest.raises(ConfigError, match="unknown grid output"):
        diagnose_grid(model, "turboprop", outputs=["icing_everywhere"])
    parser = build_parser()
    args = parser.parse_args(["grid", str(demo_model), "--out", str(tmp_path / "s.nc"), "--summary-only",
                              "--quiet"])
    assert grid_main(args) == 0
    with xr.open_dataset(tmp_path / "s.nc", engine="h5netcdf") as res:
        assert "lwc" not in res and "level" not in res["max_potential_intensity"].dims
        np.testing.assert_array_equal(res["max_potential_intensity"].values, full["max_potential_intensity"].values)


def test_lazy_source_samples_like_the_eager_one():
    """A dask-backed grid samples exactly like the same grid in memory, computing only the columns it needs;
    many routes' samples go in one call (here 300 points in batches of 64)."""
    pytest.importorskip("dask")
    ds = _synthetic(nt=3, ny=6, nx=7, seed=11)
    eager = GridSource(ds)
    lazy = GridSource(chunk_model(ds, 300), batch=64)
    rng = np.random.default_rng(5)
    n = 300
    lat, lon = rng.uniform(50.0, 51.0, n), rng.uniform(-30.0, -29.0, n)
    times = np.datetime64("2026-01-15T00:00:00") + rng.uniform(0, 12 * 3600, n).astype("timedelta64[s]")
    p = rng.uniform(30000.0, 95000.0, n)
    z = np.where(rng.random(n) > 0.5, rng.uniform(500.0, 6000.0, n), np.nan)
    p = np.where(np.isfinite(z), np.nan, p)
    a = eager.sample(lat, lon, times, pressure=p, height=z)
    b = lazy.sample(lat, lon, times, pressure=p, height=z)
    for name in a:
        np.testing.assert_array_equal(np.asarray(b[name]), np.asarray(a[name]), err_msg=name)
    assert 0 < lazy._store["lnp"].shape[0] < ds.sizes["time"] * ds.sizes["latitude"] * ds.sizes["longitude"]


def test_global_grid_wraps_around_the_antimeridian():
    """On a global grid a sample between the last and the first longitude is interpolated across the seam, as
    scipy's RegularGridInterpolator does on the grid with its first column repeated at +360 degrees; samples
    given in either longitude convention agree."""
    from scipy.interpolate import RegularGridInterpolator

    ds = _synthetic(nt=1, ny=4, nx=8, seed=2).assign_coords(longitude=np.arange(0.0, 360.0, 45.0))
    src = GridSource(ds)
    lon = np.array([350.0, -10.0, 337.5, 0.0, 22.5])
    lat = np.full(lon.size, 51.2)
    t = np.full(lon.size, ds["time"].values[0]).astype("datetime64[s]")
    p = np.full(lon.size, 60000.0)
    out = src.sample(lat, lon, t, pressure=p)
    ext = ds.isel(longitude=list(range(8)) + [0])
    ref = RegularGridInterpolator((ds["latitude"].values, np.append(ds["longitude"].values, 360.0),
                                   -np.log(ds["pressure"].values * 100)), ext["temperature"].values[0])
    expected = ref(np.column_stack([lat, np.mod(lon, 360.0), -np.log(p)]))
    ok = out["coverage"] >= 0.999
    assert ok[:2].all()
    np.testing.assert_allclose(out["temperature"][ok], expected[ok], atol=1e-9)
    assert out["temperature"][0] == pytest.approx(out["temperature"][1], abs=1e-9)


def test_time_tolerance():
    """Without a tolerance a sample after the last model time is outside the grid; with one it uses that time."""
    ds = _synthetic(nt=2, seed=4)
    late = np.array([ds["time"].values[-1] + np.timedelta64(2, "h")]).astype("datetime64[s]")
    strict = GridSource(ds).sample([51.0], [-28.5], late, pressure=[70000.0])
    loose = GridSource(ds, time_tolerance_hours=3).sample([51.0], [-28.5], late, pressure=[70000.0])
    at_end = GridSource(ds).sample([51.0], [-28.5], late - np.timedelta64(2, "h"), pressure=[70000.0])
    assert strict["coverage"][0] == 0.0
    assert loose["temperature"][0] == pytest.approx(at_end["temperature"][0], abs=1e-12)
    assert loose["age_h"][0] == pytest.approx(2.0)


@pytest.mark.filterwarnings("ignore::DeprecationWarning")  # the checker's own deprecated IOOS SOS plug-ins
def test_grid_file_follows_the_cf_conventions(tmp_path, demo_model):
    """`icing grid --out` writes what the CF conventions allow (IOOS compliance-checker's CF-1.8 suite, PyPI
    compliance-checker): no high-priority finding; no diagnostic inherits the pressure's standard_name or unit;
    flags and booleans carry no units. The one medium finding left is CF 2.4's recommended T, Z, Y, X order:
    our level index is last on purpose (one column in one chunk), and CF recommends rather than requires it."""
    import json

    runner = pytest.importorskip("compliance_checker.runner")
    runner.CheckSuite().load_all_available_checkers()
    args = build_parser().parse_args(["grid", str(demo_model), "--out", str(tmp_path / "g.nc"), "--quiet"])
    assert grid_main(args) == 0
    out = tmp_path / "g.json"
    runner.ComplianceChecker.run_checker(str(tmp_path / "g.nc"), ["cf:1.8"], 0, "strict", output_filename=str(out),
                                         output_format="json")
    report = json.loads(out.read_text())["cf:1.8"]
    assert report["high_count"] == 0, report["high_priorities"]
    with xr.open_dataset(tmp_path / "g.nc", engine="h5netcdf") as ds:
        for name in ("lwc", "in_cloud", "supercooled", "large_drop", "potential_intensity", "valid", "rh_water"):
            assert ds[name].attrs.get("standard_name") != "air_pressure", name
        for name in ("in_cloud", "large_drop", "potential_intensity", "max_potential_intensity"):
            assert "units" not in ds[name].attrs, name

"""Zarr output of the grid chain (icing.grid.write_grid and ``icing grid --out FILE.zarr``).

The references are outside the grid code: xarray's own netCDF round trip through h5netcdf (the file format
the rest of the grid tests already read back), xarray's in-memory result of the same Dataset, and the CF
conventions' flag attributes (CF 1.11, section 3.5 "Flags": ``flag_values`` of the variable's own type with
a matching blank-separated ``flag_meanings``). Zarr stores attributes as JSON, so a ``flag_values`` array
comes back as a list of plain integers (zarr v3 spec, "attributes": JSON object); its values are checked,
its integer type only in the netCDF file.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
import xarray as xr

from icing import CAUTION
from icing.cli import build_parser
from icing.grid import chunk_model, diagnose_grid, grid_main, write_grid
from icing.io.model import read_model

pytest.importorskip("zarr")
# zarr's own note that consolidated metadata (xarray's default when writing) is outside the zarr v3 spec
pytestmark = pytest.mark.filterwarnings("ignore:Consolidated metadata is currently not part:UserWarning")


def _flagged(ds):
    return [v for v in ds.data_vars if "flag_values" in ds[v].attrs]


@pytest.mark.parametrize("chunked", [False, True], ids=["eager", "dask"])
def test_zarr_round_trip_equals_netcdf_round_trip(tmp_path, demo_model, chunked):
    """A diagnosed grid written to .zarr and to .nc reads back the same: every variable with the in-memory
    values and dtype (bool flags as bool, int8 codes as int8), the flag attributes of CF section 3.5, the
    units and long names, the caution and the quality record."""
    if chunked:
        pytest.importorskip("dask")
        model = chunk_model(read_model(demo_model, chunks={}), 10000)
    else:
        model = read_model(demo_model)
    ds = diagnose_grid(model, "turboprop")
    assert (ds["lwc"].chunks is not None) == chunked
    if chunked:
        assert ds["lwc"].data.npartitions > 1
    expected = ds.compute()
    z_path = write_grid(ds, tmp_path / "grid.zarr", progress=False)
    n_path = write_grid(ds, tmp_path / "grid.nc", progress=False)
    assert z_path.is_dir() and n_path.is_file()
    with xr.open_zarr(z_path) as zs, xr.open_dataset(n_path, engine="h5netcdf") as ns:
        z, n = zs.load(), ns.load()
    assert set(z.data_vars) == set(n.data_vars) == set(expected.data_vars)
    assert set(z.coords) == set(n.coords) == set(expected.coords)
    for name in list(expected.data_vars) + list(expected.coords):
        want = expected[name]
        for got, fmt in ((z[name], "zarr"), (n[name], "netCDF")):
            assert got.dims == want.dims, (fmt, name)
            assert got.dtype == want.dtype, (fmt, name, got.dtype, want.dtype)
            np.testing.assert_array_equal(got.values, want.values, err_msg=f"{fmt} {name}")
        for key in ("units", "long_name"):
            assert z[name].attrs.get(key) == n[name].attrs.get(key) == want.attrs.get(key), (name, key)
    flagged = _flagged(expected)
    assert {"potential_intensity", "ice_type", "max_potential_intensity"} <= set(flagged)
    assert set(_flagged(z)) == set(_flagged(n)) == set(flagged)
    for name in flagged:
        want = expected[name].attrs
        meanings = want["flag_meanings"].split()
        assert len(meanings) == len(want["flag_values"])
        for got in (z[name].attrs, n[name].attrs):
            np.testing.assert_array_equal(np.asarray(got["flag_values"]), np.asarray(want["flag_values"]))
            assert got["flag_meanings"] == want["flag_meanings"]
        assert n[name].attrs["flag_values"].dtype == n[name].dtype  # CF 3.5: the variable's own type
        assert set(np.unique(z[name].values)) <= set(np.asarray(want["flag_values"]).tolist())
    for got in (z.attrs, n.attrs):
        assert got["caution"] == CAUTION
        assert json.loads(got["quality_json"]) == list(expected.attrs["quality"])
        assert got["aircraft"] == expected.attrs["aircraft"]
        assert got["cold_limit"] == expected.attrs["cold_limit"]
    if chunked:  # xarray writes one zarr chunk per dask chunk (xarray docs, "Writing to Zarr: chunk sizes")
        with xr.open_zarr(z_path) as zs:
            assert zs["lwc"].encoding["chunks"] == tuple(c[0] for c in ds["lwc"].chunks)


def test_grid_command_writes_zarr(tmp_path, capsys, demo_model):
    """`icing grid FIELDS --aircraft NAME --out FILE.zarr` writes a zarr store with the level fields and the 2-D
    summaries that equals the netCDF output of the same command (read back by xarray)."""
    pytest.importorskip("dask")
    parser = build_parser()
    outs = {}
    for suffix in (".zarr", ".nc"):
        args = parser.parse_args(["grid", str(demo_model), "--aircraft", "turboprop", "--out",
                                  str(tmp_path / f"out{suffix}"), "--chunk-points", "100000", "--quiet"])
        assert grid_main(args) == 0
        assert f"wrote {tmp_path / f'out{suffix}'}" in capsys.readouterr().out
        outs[suffix] = tmp_path / f"out{suffix}"
    assert outs[".zarr"].is_dir()
    with xr.open_zarr(outs[".zarr"]) as zs, xr.open_dataset(outs[".nc"], engine="h5netcdf") as ns:
        z, n = zs.load(), ns.load()
    assert {"potential_rate", "max_potential_intensity", "freezing_level_m", "supercooled_top_m",
            "lwc"} <= set(z.data_vars)
    assert z["max_potential_intensity"].dims == ("time", "latitude", "longitude")
    assert z.attrs["caution"] == CAUTION
    xr.testing.assert_equal(z, n)
    for name in z.data_vars:
        assert z[name].dtype == n[name].dtype, name

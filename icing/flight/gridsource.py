"""A model grid as an atmosphere source: the same ``sample`` as :class:`icing.flight.sources.SoundingSource`.

The grid is diagnosed once (:func:`icing.grid.diagnose_grid`, lazily when the grid is dask-backed: only the
chunks a route touches are ever computed, and each is computed once) and the diagnostics are interpolated at
the trajectory samples:

* time: linear between the two model times that bracket the sample (within ``time_tolerance_hours`` of the
  first or last time, that time alone);
* space: bilinear in latitude and longitude between the four surrounding grid columns (longitudes in either
  convention; a global grid wraps around);
* vertical: linear in ln p between the two levels that bracket the sample in each column; a sample given as a
  height (ft MSL) finds its pressure in each column's own height-pressure relation.

A corner column whose bracketing levels are not both valid (missing, below the ground) contributes nothing,
and ``coverage`` is the share of the interpolation weight that had valid data: 1 inside the grid with valid
data, 0 outside the grid's domain, time range or levels. Outside the grid icing is unknown, never "none".
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import xarray as xr

from icing.errors import IcingError
from icing.flight.sources import EARTH_RADIUS_M
from icing.physics.layers import CLOUD_DEFAULTS

__all__ = ["GridSource"]

_LEVEL_FIELDS = ("temperature", "height", "lwc", "mvd", "rh_water", "supercooled", "in_cloud", "valid",
                 "large_drop", "large_drop_potential", "large_drop_reason")
_COLUMN_FIELDS = ("freezing_level_m", "supercooled_top_m")
_EPS = 1e-9


def _haversine(lat1, lon1, lat2, lon2):
    p1, p2 = np.radians(lat1), np.radians(lat2)
    a = (np.sin((p2 - p1) / 2) ** 2
         + np.cos(p1) * np.cos(p2) * np.sin(np.radians(lon2 - lon1) / 2) ** 2)
    return 2 * EARTH_RADIUS_M * np.arcsin(np.sqrt(np.clip(a, 0.0, 1.0)))


def _bracket(axis, x, tol=0.0):
    """Lower index, weight of the upper neighbour and inside-mask of points x on an increasing 1-D axis."""
    n = axis.size
    inside = (x >= axis[0] - tol - _EPS) & (x <= axis[-1] + tol + _EPS)
    if n == 1:
        return np.zeros(x.shape, int), np.zeros(x.shape), inside
    xc = np.clip(x, axis[0], axis[-1])
    lo = np.clip(np.searchsorted(axis, xc, side="right") - 1, 0, n - 2)
    w = (xc - axis[lo]) / (axis[lo + 1] - axis[lo])
    return lo, np.clip(w, 0.0, 1.0), inside


class GridSource:
    """Gridded model fields as an atmosphere source for :func:`icing.flight.assess.assess_route`.

    Parameters
    ----------
    model : xarray.Dataset or path
        A gridded profile Dataset (:func:`icing.io.model.read_model`) or the path of a model file.
    chunks : dict or "auto", optional
        When ``model`` is a path: read it lazily with these chunks (see :func:`icing.grid.chunk_model`).
    time_tolerance_hours : float
        Samples up to this long before the first or after the last model time use that time (default 0:
        outside the time range is outside the grid).
    cold_limit, airmass, thresholds :
        Passed to :func:`icing.grid.diagnose_grid`.
    """

    kind = "model"

    def __init__(self, model, *, chunks=None, time_tolerance_hours=0.0, batch=4096, **diagnose_options):
        from icing.grid import diagnose_grid

        if isinstance(model, str | Path):
            from icing.io.model import read_model

            model = read_model(model, chunks=chunks)
        for c in ("time", "latitude", "longitude", "level"):
            if c not in model.dims:
                raise IcingError(f"a model grid needs the dimension {c!r}; it has {tuple(model.dims)}")
        model = model.transpose(*[d for d in ("time", "latitude", "longitude", "level") if d in model.dims])
        if model.chunks and len(model.chunks.get("level", ())) > 1:
            model = model.chunk({"level": -1})  # every level of a column in one chunk
        keys = {"cold_limit", "airmass"} | set(CLOUD_DEFAULTS)
        unknown = sorted(set(diagnose_options) - keys)
        if unknown:  # never drop an option silently
            raise TypeError(f"GridSource() got an unexpected keyword argument {unknown[0]!r} (options: chunks, "
                            "time_tolerance_hours, batch, cold_limit, airmass and the cloud thresholds)")
        options = dict(diagnose_options)
        self.model = model
        self.diagnostics = diagnose_grid(model, None, **options)
        self.latitude = model["latitude"].values.astype(float)
        self.longitude = model["longitude"].values.astype(float)
        self.times = model["time"].values.astype("datetime64[s]")
        self.time_s = self.times.astype(np.int64).astype(float)
        if np.any(np.diff(self.latitude) <= 0) or np.any(np.diff(self.longitude) <= 0) or \
                np.any(np.diff(self.time_s) <= 0):
            raise IcingError("model grid coordinates must increase (read it with icing.io.model.read_model)")
        self.time_tolerance_s = float(time_tolerance_hours) * 3600.0
        self.batch = int(batch)
        step = np.min(np.diff(self.longitude)) if self.longitude.size > 1 else 0.0
        self.periodic = self.longitude.size > 2 and self.longitude.size * step >= 360.0 - 1e-6
        name = model.attrs.get("name") or Path(str(model.attrs.get("source", "") or "model")).stem or "model"
        self.labels = np.array([f"{name} {pd.Timestamp(t):%Y-%m-%d %H}Z" for t in self.times])
        self._lazy = bool(self.diagnostics["temperature"].chunks) or bool(self.diagnostics["lwc"].chunks)
        self._store = None
        self._slot = None
        if not self._lazy:
            self._store = self._columns(self.diagnostics)
        else:
            self._slot = np.full((self.times.size, self.latitude.size, self.longitude.size), -1, dtype=np.int64)

    # --- columns ------------------------------------------------------------------------------------------

    def _columns(self, d):
        """Flat (column, level) numpy arrays of what sampling needs, from a (sub)grid of diagnostics."""
        nlev = d.sizes["level"]
        shape = (d.sizes["time"], d.sizes["latitude"], d.sizes["longitude"])
        cols = {}
        p = np.broadcast_to(np.asarray(d["pressure"].values, dtype=float) * 100.0 if d["pressure"].ndim == 1 else
                            d["pressure"].transpose("time", "latitude", "longitude", "level").values * 100.0,
                            shape + (nlev,))
        with np.errstate(divide="ignore", invalid="ignore"):
            cols["lnp"] = -np.log(p).reshape(-1, nlev)
        for name in _LEVEL_FIELDS:
            cols[name] = np.asarray(d[name].values, dtype=float).reshape(-1, nlev)
        cols["lwc"] = np.nan_to_num(cols["lwc"])
        cols["mvd"] = np.nan_to_num(cols["mvd"])
        for name in ("large_drop", "large_drop_potential", "large_drop_reason"):
            cols[name] = np.nan_to_num(cols[name])
        if "wind_speed" in d and "wind_direction" in d:
            spd = np.asarray(d["wind_speed"].values, dtype=float).reshape(-1, nlev)
            dirn = np.radians(np.asarray(d["wind_direction"].values, dtype=float).reshape(-1, nlev))
            cols["wind_u"] = -spd * np.sin(dirn)
            cols["wind_v"] = -spd * np.cos(dirn)
        for name in _COLUMN_FIELDS:
            cols[name] = np.asarray(d[name].values, dtype=float).reshape(-1)
        return cols

    def _gather(self, kt, jy, ix):
        """Column rows (into the store) of grid columns (kt, jy, ix); computes the lazy chunks not yet seen."""
        if not self._lazy:
            return np.ravel_multi_index((kt, jy, ix), (self.times.size, self.latitude.size, self.longitude.size))
        need = self._slot[kt, jy, ix] < 0
        if need.any():
            ut, uj, ui = (np.unique(a[need]) for a in (kt, jy, ix))
            names = [n for n in (*_LEVEL_FIELDS, *_COLUMN_FIELDS, "pressure", "wind_speed", "wind_direction")
                     if n in self.diagnostics]
            sub = self.diagnostics[names].isel(time=ut, latitude=uj, longitude=ui).compute()
            new = self._columns(sub)
            grid_t, grid_j, grid_i = np.meshgrid(ut, uj, ui, indexing="ij")
            fresh = self._slot[grid_t, grid_j, grid_i] < 0  # keep the first copy of a column seen twice
            start = 0 if self._store is None else self._store["lnp"].shape[0]
            rows = np.flatnonzero(fresh.ravel())
            if self._store is None:
                self._store = {k: v[rows] for k, v in new.items()}
            else:
                self._store = {k: np.concatenate([self._store[k], new[k][rows]]) for k in self._store}
            self._slot[grid_t.ravel()[rows], grid_j.ravel()[rows], grid_i.ravel()[rows]] = start + np.arange(
                rows.size)
        return self._slot[kt, jy, ix]

    # --- sampling -----------------------------------------------------------------------------------------

    def sample(self, latitude, longitude, time, pressure=None, height=None):
        """Diagnostics at sample points: the same arguments and output keys as
        :meth:`icing.flight.sources.SoundingSource.sample`, with ``used`` of shape (samples, model times)."""
        from icing.flight.sources import sample_points

        lat, lon, ts, p_in, z_in = sample_points(latitude, longitude, time, pressure, height)
        n = lat.size
        parts = [self._sample(lat[s], lon[s], ts[s], p_in[s], z_in[s])
                 for s in (slice(i, i + self.batch) for i in range(0, max(n, 1), self.batch))]
        return {k: np.concatenate([p[k] for p in parts]) for k in parts[0]}

    def _horizontal(self, lat, lon, ts):
        """Corner indices (S, 8) and weights (S, 8); weights 0 outside the grid."""
        kt, wt, in_t = _bracket(self.time_s, ts, self.time_tolerance_s)
        jy, wy, in_y = _bracket(self.latitude, lat)
        lon0 = self.longitude[0]
        x = lon0 + np.mod(lon - lon0, 360.0)
        x = np.where(np.abs(x - lon0 - 360.0) < 1e-9, lon0, x)
        nx = self.longitude.size
        if self.periodic:
            axis = np.append(self.longitude, lon0 + 360.0)
            ix, wx, in_x = _bracket(axis, x)
            ix1 = (ix + 1) % nx
        else:
            ix, wx, in_x = _bracket(self.longitude, x)
            ix1 = np.minimum(ix + 1, nx - 1)
        kt1 = np.minimum(kt + 1, self.time_s.size - 1)
        jy1 = np.minimum(jy + 1, self.latitude.size - 1)
        inside = in_t & in_y & in_x
        ks = np.stack([kt, kt1], axis=-1)
        js = np.stack([jy, jy1], axis=-1)
        is_ = np.stack([ix, ix1], axis=-1)
        wk = np.stack([1 - wt, wt], axis=-1)
        wj = np.stack([1 - wy, wy], axis=-1)
        wi = np.stack([1 - wx, wx], axis=-1)
        K = np.repeat(ks, 4, axis=1)
        J = np.tile(np.repeat(js, 2, axis=1), (1, 2))
        Ii = np.tile(is_, (1, 4))
        W = (np.repeat(wk, 4, axis=1) * np.tile(np.repeat(wj, 2, axis=1), (1, 2)) * np.tile(wi, (1, 4)))
        W = np.where(inside[:, None], W, 0.0)
        return K, J, Ii, W

    def _sample(self, lat, lon, ts, p_in, z_in):
        n = lat.size
        K, J, Ii, W = self._horizontal(lat, lon, ts)
        rows = self._gather(K.ravel(), J.ravel(), Ii.ravel()).reshape(K.shape)  # (S, 8)
        st = self._store
        lnp = st["lnp"][rows]  # (S, 8, L)
        x = np.broadcast_to(np.where(np.isfinite(p_in) & (p_in > 0), -np.log(np.where(p_in > 0, p_in, 1.0)),
                                     np.nan)[:, None], K.shape).copy()
        zrows = ~np.isfinite(x)
        if zrows.any():
            from icing.physics.thermo import interp_last_axis

            zc = st["height"][rows]
            xz = interp_last_axis(z_in[:, None, None] * np.ones(K.shape + (1,)), zc, lnp)[..., 0]
            x = np.where(zrows, xz, x)
        fin = np.isfinite(lnp)
        nfin = fin.sum(axis=-1)
        big = np.where(fin, lnp, np.inf)
        k = (big <= x[..., None]).sum(axis=-1)
        lo = np.clip(k - 1, 0, np.maximum(nfin - 2, 0))
        hi = np.minimum(lo + 1, lnp.shape[-1] - 1)
        x0 = np.take_along_axis(big, lo[..., None], -1)[..., 0]
        x1 = np.take_along_axis(big, hi[..., None], -1)[..., 0]
        inside = np.isfinite(x) & (nfin >= 2) & (x >= x0 - _EPS) & (x <= x1 + _EPS)
        with np.errstate(invalid="ignore", divide="ignore"):
            f = np.where(inside & (x1 > x0), (x - x0) / (x1 - x0), 0.0)
        f = np.clip(f, 0.0, 1.0)

        def lvl(name):
            v = st[name][rows]
            a = np.take_along_axis(v, lo[..., None], -1)[..., 0]
            b = np.take_along_axis(v, hi[..., None], -1)[..., 0]
            return a, b, a * (1 - f) + b * f

        va, vb, _ = lvl("valid")
        ok = inside & (np.minimum(va, vb) > 0.5)
        ww = np.where(ok, W, 0.0)
        covered = ww.sum(axis=1)
        norm = np.where(covered > 0, covered, np.nan)
        out = {}
        with np.errstate(invalid="ignore", divide="ignore"):
            for name in ("temperature", "supercooled", "in_cloud", "rh_water"):
                out[name] = np.sum(ww * np.nan_to_num(lvl(name)[2]), axis=1) / norm
            lwc = lvl("lwc")[2]
            out["lwc"] = np.sum(ww * lwc, axis=1) / norm
            s_lwc = np.sum(ww * lwc, axis=1)
            out["mvd"] = np.where(s_lwc > 0, np.sum(ww * lwc * lvl("mvd")[2], axis=1) / np.where(s_lwc > 0, s_lwc,
                                                                                                    1.0), np.nan)
            out["pressure"] = np.sum(ww * np.exp(-np.where(ok, x, 0.0)), axis=1) / norm
            la, lb, _ = lvl("large_drop")
            out["large_drop"] = np.where(covered > 0, np.max(np.where(ww > 0, np.maximum(la, lb), 0.0), axis=1),
                                         np.nan)
            # the largest potential, with the reason where it is largest (potential x 4 + reason, as integers)
            pa_, pb_, _ = lvl("large_drop_potential")
            ra_, rb_, _ = lvl("large_drop_reason")
            code = np.max(np.where(ww > 0, np.maximum(4 * pa_ + ra_, 4 * pb_ + rb_), 0.0), axis=1)
            out["large_drop_potential"] = np.where(covered > 0, code // 4, np.nan)
            out["large_drop_reason"] = np.where(covered > 0, code % 4, np.nan)
            for name in ("wind_u", "wind_v"):
                if name in st:
                    v = lvl(name)[2]
                    wok = np.where(np.isfinite(v) & inside, W, 0.0)
                    tot = wok.sum(axis=1)
                    out[name] = np.where(tot > 0, np.sum(wok * np.nan_to_num(v), axis=1) / np.where(tot > 0, tot, 1),
                                         np.nan)
                else:
                    out[name] = np.full(n, np.nan)
            for name in _COLUMN_FIELDS:
                v = st[name][rows]
                wv = np.where(np.isfinite(v), W, 0.0)
                tot = wv.sum(axis=1)
                out[name] = np.where(tot > 0, np.sum(wv * np.nan_to_num(v), axis=1) / np.where(tot > 0, tot, 1),
                                     np.nan)
        used_w = ww > 0
        clat = self.latitude[J]
        clon = self.longitude[Ii]
        dist = np.where(used_w, _haversine(lat[:, None], lon[:, None], clat, clon), np.inf).min(axis=1)
        age = np.where(used_w, np.abs(ts[:, None] - self.time_s[K]) / 3600.0, np.inf).min(axis=1)
        out["coverage"] = np.where(covered > 1.0 - 1e-9, 1.0, covered)
        out["distance_km"] = np.where(np.isfinite(dist), dist / 1000.0, np.nan)
        out["age_h"] = np.where(np.isfinite(age), age, np.nan)
        used = np.zeros((n, self.times.size), dtype=bool)
        np.logical_or.at(used, (np.repeat(np.arange(n), K.shape[1]), K.ravel()), used_w.ravel())
        out["used"] = used
        return out

    def to_dataset(self) -> xr.Dataset:
        """The (lazy) diagnosed grid."""
        return self.diagnostics

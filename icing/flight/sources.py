"""Atmosphere sources: where a route gets its atmosphere from.

:class:`SoundingSource` holds a set of soundings, diagnoses each once (:func:`icing.physics.diagnose.diagnose`) and
samples the diagnostics at any number of points (latitude, longitude, time, and pressure or height).

Matching scheme (documented in the README):

* Space: stations within ``max_distance_km`` of the sample, at most ``max_stations`` nearest, weighted by
  inverse distance squared (distance floored at 10 km) on a sphere of radius 6371.0088 km (IUGG mean radius;
  the great-circle distance differs from the ellipsoidal one by under 0.5 %, fine for weighting).
* Time: for each station, the two reports that bracket the sample's time, weighted linearly in time; a report
  more than ``max_age_hours`` from the sample is not used; if only one side is within the window, it alone.
* Vertical: linear in ln p between the two levels bracketing the sample; a flight level maps to pressure by the
  standard atmosphere, an altitude in feet MSL to pressure by each profile's own height-pressure relation.
  A sample above or below a profile's levels, or between levels without humidity, gets nothing from it.

A sample no profile covers has ``coverage`` 0: its icing is unknown, never "none".
"""

from __future__ import annotations

import numpy as np
import xarray as xr

from icing.errors import ConfigError, IcingError
from icing.profile import stack_profiles

__all__ = ["SoundingSource", "EARTH_RADIUS_M", "DISTANCE_POWER", "DISTANCE_FLOOR_M", "sample_points"]

EARTH_RADIUS_M = 6371008.8  # IUGG mean Earth radius
# Stations weigh by inverse distance to this power, distances floored at this (a station at a sample's place
# does not take all the weight); our own choice, common practice of inverse-distance weighting.
DISTANCE_POWER = 2.0
DISTANCE_FLOOR_M = 1.0e4


def sample_points(latitude, longitude, time, pressure=None, height=None):
    """The arguments of a source's ``sample`` as flat float arrays: lat, lon (deg), time (s since 1970),
    pressure (Pa) and height (m), NaN where not given."""
    lat = np.atleast_1d(np.asarray(latitude, dtype=float))
    lon = np.atleast_1d(np.asarray(longitude, dtype=float))
    ts = np.atleast_1d(np.asarray(time, dtype="datetime64[s]")).astype(np.int64).astype(float)
    n = lat.size
    p_in = np.full(n, np.nan) if pressure is None else np.broadcast_to(np.asarray(pressure, float), (n,))
    z_in = np.full(n, np.nan) if height is None else np.broadcast_to(np.asarray(height, float), (n,))
    return lat, lon, ts, p_in, z_in


def _check_matching(max_distance_km, max_age_hours, max_stations):
    """Matching options must be usable numbers: a NaN or negative radius would silently match nothing."""
    for name, value, low in (("max_distance_km", max_distance_km, 0.0), ("max_age_hours", max_age_hours, 0.0),
                             ("max_stations", max_stations, 1)):
        try:
            ok = isinstance(value, int | float | np.integer | np.floating) and not isinstance(value, bool) \
                and np.isfinite(value) and value >= low
        except TypeError:
            ok = False
        if not ok:
            raise ConfigError(f"{name} must be a number of at least {low}, not {value!r}")
    if int(max_stations) != max_stations:
        raise ConfigError(f"max_stations must be a whole number, not {max_stations!r}")


def _haversine(lat1, lon1, lat2, lon2):
    p1, p2 = np.radians(lat1), np.radians(lat2)
    dphi = p2 - p1
    dlmb = np.radians(lon2 - lon1)
    a = np.sin(dphi / 2) ** 2 + np.cos(p1) * np.cos(p2) * np.sin(dlmb / 2) ** 2
    return 2 * EARTH_RADIUS_M * np.arcsin(np.sqrt(np.clip(a, 0.0, 1.0)))


class SoundingSource:
    """A set of soundings as an atmosphere source.

    Parameters
    ----------
    profiles : list of profile Datasets, or a stacked Dataset with a ``profile`` dimension
    max_distance_km : float
        Stations farther than this from a sample are not used (default 300 km).
    max_age_hours : float
        Reports farther than this in time from a sample are not used (default 12 h).
    max_stations : int
        At most this many nearest stations contribute to a sample (default 3).
    diagnose_options : dict
        Passed to :func:`icing.physics.diagnose.diagnose` (cold limit, airmass, thresholds).
    """

    kind = "soundings"

    def __init__(self, profiles, *, max_distance_km=300.0, max_age_hours=12.0, max_stations=3,
                 **diagnose_options):
        from icing.physics.diagnose import diagnose

        self.notes = []
        if isinstance(profiles, xr.Dataset) and "profile" in profiles.dims:
            stacked = profiles
        else:
            profiles = list(profiles) if not isinstance(profiles, xr.Dataset) else [profiles]
            if not profiles:
                raise IcingError("no soundings given")
            profiles = self._unique(profiles)
            stacked = stack_profiles(profiles)
        lat = stacked["latitude"].values.astype(float)
        lon = stacked["longitude"].values.astype(float)
        times = stacked["time"].values.astype("datetime64[s]")
        bad = [f"{s} ({src})" for s, src, a, b, t in zip(stacked["station"].values, stacked["source"].values, lat, lon,
                                                       times, strict=True)
               if not (np.isfinite(a) and np.isfinite(b)) or np.isnat(t)]
        if bad:
            raise IcingError("soundings without a position or a full valid time cannot be matched to a route: "
                             f"{', '.join(bad[:5])}{' ...' if len(bad) > 5 else ''} (a station table gives "
                             "positions; TEMP reports carry only day and hour, so give the month)")
        self.profiles = stacked
        _check_matching(max_distance_km, max_age_hours, max_stations)
        self.max_distance_m = float(max_distance_km) * 1000.0
        self.max_age_s = float(max_age_hours) * 3600.0
        self.max_stations = int(max_stations)
        self.diagnose_options = dict(diagnose_options)
        self.diagnostics = diagnose(stacked, **diagnose_options)
        self.latitude, self.longitude = lat, lon
        self.time_s = times.astype(np.int64).astype(float)
        self.station = np.array([str(s) for s in stacked["station"].values])
        keys = [f"{s}@{a:.3f},{b:.3f}" for s, a, b in zip(self.station, lat, lon, strict=True)]
        self._site_keys, self._site_of = np.unique(keys, return_inverse=True)
        self.labels = np.array([f"{s} {str(t)[:13].replace('T', ' ')}Z" for s, t in zip(self.station, times,
                                                                                          strict=True)])
        self._prepare_columns()

    def _unique(self, profiles):
        """Keep one profile per station and valid time (the same ascent read from two files or formats)."""
        seen, out = {}, []
        for p in profiles:
            key = (str(p.attrs.get("station", "")), str(p.attrs.get("time", "")))
            if key[0] and key[1] and key in seen:
                self.notes.append(f"{p.attrs.get('source', '?')}: station {key[0]} at {key[1]} already read from "
                                  f"{seen[key]}; the duplicate is not used")
                continue
            seen[key] = p.attrs.get("source", "?")
            out.append(p)
        return out

    def _prepare_columns(self):
        d = self.diagnostics
        n = d.sizes["profile"]
        fields = {name: np.asarray(d[name].values, dtype=float) for name in (
            "height", "temperature", "lwc", "mvd", "rh_water", "supercooled", "in_cloud", "valid", "large_drop",
            "warm_layer_aloft")}
        # Unknown (NaN) as 0 once here for all profiles rather than at every sampling: LWC and MVD (none),
        # validity (not valid), the fields averaged over the matched reports (read only where the levels are
        # valid) and the large drops (none where unknown); the large-drop potential and its reason in one
        # number, potential x 4 + reason (as integers).
        def zero_nan(v):
            return np.where(np.isfinite(v), v, 0.0)

        for name in ("lwc", "mvd", "valid", "large_drop"):
            fields[name] = zero_nan(fields[name])
        for name in ("temperature", "supercooled", "in_cloud", "rh_water"):
            fields[name + "_or_0"] = zero_nan(fields[name])
        fields["large_code"] = 4 * zero_nan(np.asarray(d["large_drop_potential"].values, dtype=float)) + zero_nan(
            np.asarray(d["large_drop_reason"].values, dtype=float))
        for name in ("wind_speed", "wind_direction"):
            if name in self.profiles:
                fields[name] = np.asarray(self.profiles[name].values, dtype=float)
        pressure = np.asarray(d["pressure"].values, dtype=float) * 100.0
        self._cols = []
        for j in range(n):
            ok = np.isfinite(pressure[j])
            col = {"lnp": -np.log(pressure[j][ok])}
            for name, v in fields.items():
                col[name] = v[j][ok]
            col.update(self._column_scalars(col))
            self._cols.append(col)

    @staticmethod
    def _column_scalars(col):
        """Lowest freezing level and top of the highest supercooled layer of one profile (m)."""
        t, z = col["temperature"], col["height"]
        fin = np.isfinite(t) & np.isfinite(z)
        t, z = t[fin], z[fin]
        fz = np.nan
        if t.size and t[0] <= 0.0:
            fz = z[0]  # sub-freezing at the ground: the freezing level is the surface
        else:
            cross = np.flatnonzero((t[:-1] > 0.0) & (t[1:] <= 0.0))
            if cross.size:
                i = cross[0]
                fz = z[i] + (z[i + 1] - z[i]) * t[i] / (t[i] - t[i + 1])
        sc = col["supercooled"][fin] > 0.5
        top = z[np.flatnonzero(sc)[-1]] if sc.any() else np.nan
        return {"freezing_level_m": fz, "supercooled_top_m": top, "any_valid": bool(np.any(col["valid"] > 0.5))}

    def weights(self, latitude, longitude, time_s):
        """(samples, profiles) matching weights (rows sum to 1 where covered) and distances (m) to stations."""
        lat = np.asarray(latitude, dtype=float)
        lon = np.asarray(longitude, dtype=float)
        ts = np.asarray(time_s, dtype=float)
        n_s, n_p = lat.size, self.latitude.size
        n_site = self._site_keys.size
        site_lat = np.zeros(n_site)
        site_lon = np.zeros(n_site)
        site_lat[self._site_of] = self.latitude
        site_lon[self._site_of] = self.longitude
        dist = _haversine(lat[:, None], lon[:, None], site_lat[None, :], site_lon[None, :])  # (S, sites)
        w_space = np.where(dist <= self.max_distance_m, 1.0 / np.maximum(dist, DISTANCE_FLOOR_M) ** DISTANCE_POWER,
                           0.0)
        if n_site > self.max_stations:
            rank = np.argsort(np.argsort(dist, axis=1), axis=1)
            w_space = np.where(rank < self.max_stations, w_space, 0.0)
        w_time = np.zeros((n_s, n_p))
        for s in range(n_site):
            js = np.flatnonzero(self._site_of == s)
            js = js[np.argsort(self.time_s[js])]
            tj = self.time_s[js]
            k = np.searchsorted(tj, ts, side="right")  # tj[k-1] <= ts < tj[k]
            before = np.clip(k - 1, 0, js.size - 1)
            after = np.clip(k, 0, js.size - 1)
            has_b = (k >= 1) & (ts - tj[before] <= self.max_age_s)
            has_a = (k < js.size) & (tj[after] - ts <= self.max_age_s)
            span = np.maximum(tj[after] - tj[before], 1.0)
            both = has_a & has_b
            wa = np.where(both, (ts - tj[before]) / span, np.where(has_a, 1.0, 0.0))
            wb = np.where(both, 1.0 - wa, np.where(has_b, 1.0, 0.0))
            rows = np.arange(n_s)
            # Each statement touches every row once, so plain fancy-index addition is exact here.
            w_time[rows, js[before]] += wb
            w_time[rows, js[after]] += wa
        w = w_time * w_space[:, self._site_of]
        tot = w.sum(axis=1, keepdims=True)
        w = np.where(tot > 0, w / np.where(tot > 0, tot, 1.0), 0.0)
        return w, dist[:, self._site_of]

    def sample(self, latitude, longitude, time, pressure=None, height=None, weights=None):
        """Diagnostics at sample points.

        Parameters
        ----------
        latitude, longitude : array_like, deg
        time : array_like of datetime64 or pandas Timestamps (UTC)
        pressure : array_like, Pa, optional
            Where finite, the sample's pressure (flight levels).
        height : array_like, m MSL, optional
            Used where ``pressure`` is NaN or not given.
        weights : tuple, optional
            The ``(weights, distances)`` of :meth:`weights` for these points, to reuse them when the same
            points are sampled at other altitudes.

        Returns
        -------
        dict of numpy arrays, one value per sample: ``coverage`` (fraction of the matching weight whose profiles
        had usable data at that altitude: 0 means no data), ``temperature`` (degC), ``pressure`` (Pa),
        ``lwc`` (g/m3), ``mvd`` (um), ``supercooled`` (0-1), ``in_cloud`` (0-1), ``large_drop`` (0, 1, 2),
        ``large_drop_potential`` (0 none, 1 possible, 2 likely) and ``large_drop_reason`` (codes of
        :data:`icing.physics.precipitation.LARGE_DROP_REASONS`, where the potential is largest),
        ``rh_water`` (%), ``wind_u``/``wind_v`` (m/s), ``freezing_level_m``, ``supercooled_top_m``,
        ``distance_km`` and ``age_h`` of the nearest data used, and ``sources`` (labels of the reports used).
        """
        lat, lon, ts, p_in, z_in = sample_points(latitude, longitude, time, pressure, height)
        n = lat.size
        w, dist = self.weights(lat, lon, ts) if weights is None else weights
        acc = {k: np.zeros(n) for k in ("temperature", "lwc", "lwc_mvd", "supercooled", "in_cloud", "rh_water",
                                        "pressure", "wind_u", "wind_v", "wind_w", "fz", "fz_w", "top", "top_w")}
        covered = np.zeros(n)
        large = np.zeros(n)
        large_code = np.zeros(n)  # largest large-drop potential x 4 + the reason where it is largest
        dist_used = np.full(n, np.inf)
        age_used = np.full(n, np.inf)
        used_mask = np.zeros((n, w.shape[1]), dtype=bool)
        for j in np.flatnonzero(w.sum(axis=0) > 0):
            rows = np.flatnonzero(w[:, j] > 0)
            col = self._cols[j]
            x = np.where(np.isfinite(p_in[rows]), -np.log(p_in[rows]), np.nan)
            zrows = ~np.isfinite(x)
            if zrows.any():
                zc = col["height"]
                okz = np.isfinite(zc)
                x[zrows] = np.interp(z_in[rows][zrows], zc[okz], col["lnp"][okz], left=np.nan, right=np.nan)
            lnp = col["lnp"]
            inside = np.isfinite(x) & (x >= lnp[0]) & (x <= lnp[-1])
            k = np.clip(np.searchsorted(lnp, np.where(inside, x, lnp[0]), side="right"), 1, lnp.size - 1)
            lo, hi = k - 1, k
            f = np.where(lnp[hi] > lnp[lo], (np.where(inside, x, lnp[0]) - lnp[lo]) / (lnp[hi] - lnp[lo]), 0.0)

            def at(name, lo=lo, hi=hi, f=f, col=col):
                v = col[name]
                return v[lo] * (1 - f) + v[hi] * f

            ok = inside & (np.minimum(col["valid"][lo], col["valid"][hi]) > 0.5)
            ww = np.where(ok, w[rows, j], 0.0)
            covered[rows] += ww
            lwc = at("lwc")
            acc["lwc"][rows] += ww * lwc
            acc["lwc_mvd"][rows] += ww * lwc * at("mvd")
            for name in ("temperature", "supercooled", "in_cloud", "rh_water"):
                acc[name][rows] += ww * at(name + "_or_0")
            acc["pressure"][rows] += ww * np.exp(-np.where(inside, x, 0.0))
            if "wind_speed" in col:
                spd, dirn = col["wind_speed"], np.radians(col["wind_direction"])
                u = -spd * np.sin(dirn)
                v = -spd * np.cos(dirn)
                uok = np.isfinite(u)
                if uok.sum() >= 2:
                    uu = np.interp(x, lnp[uok], u[uok], left=np.nan, right=np.nan)
                    vv = np.interp(x, lnp[uok], v[uok], left=np.nan, right=np.nan)
                    wok = np.isfinite(uu) & inside
                    acc["wind_u"][rows] += np.where(wok, ww * uu, 0.0)
                    acc["wind_v"][rows] += np.where(wok, ww * vv, 0.0)
                    acc["wind_w"][rows] += np.where(wok, ww, 0.0)
            ld = np.maximum(col["large_drop"][lo], col["large_drop"][hi])
            large[rows] = np.maximum(large[rows], np.where(ok, ld, 0.0))
            code = np.maximum(col["large_code"][lo], col["large_code"][hi])
            large_code[rows] = np.maximum(large_code[rows], np.where(ok, code, 0.0))
            if np.isfinite(col["freezing_level_m"]):
                acc["fz"][rows] += w[rows, j] * col["freezing_level_m"]
                acc["fz_w"][rows] += w[rows, j]
            if np.isfinite(col["supercooled_top_m"]):
                acc["top"][rows] += w[rows, j] * col["supercooled_top_m"]
                acc["top_w"][rows] += w[rows, j]
            dist_used[rows] = np.where(ok, np.minimum(dist_used[rows], dist[rows, j]), dist_used[rows])
            age = np.abs(ts[rows] - self.time_s[j]) / 3600.0
            age_used[rows] = np.where(ok, np.minimum(age_used[rows], age), age_used[rows])
            used_mask[rows, j] = ok
        with np.errstate(invalid="ignore", divide="ignore"):
            norm = np.where(covered > 0, covered, np.nan)
            out = {name: acc[name] / norm for name in ("temperature", "supercooled", "in_cloud", "rh_water",
                                                       "pressure", "lwc")}
            out["mvd"] = np.where(acc["lwc"] > 0, acc["lwc_mvd"] / np.where(acc["lwc"] > 0, acc["lwc"], 1.0), np.nan)
            out["wind_u"] = np.where(acc["wind_w"] > 0, acc["wind_u"] / acc["wind_w"], np.nan)
            out["wind_v"] = np.where(acc["wind_w"] > 0, acc["wind_v"] / acc["wind_w"], np.nan)
            out["freezing_level_m"] = np.where(acc["fz_w"] > 0, acc["fz"] / acc["fz_w"], np.nan)
            out["supercooled_top_m"] = np.where(acc["top_w"] > 0, acc["top"] / acc["top_w"], np.nan)
        out["coverage"] = covered
        out["large_drop"] = np.where(covered > 0, large, np.nan)
        out["large_drop_potential"] = np.where(covered > 0, large_code // 4, np.nan)
        out["large_drop_reason"] = np.where(covered > 0, large_code % 4, np.nan)
        out["distance_km"] = np.where(np.isfinite(dist_used), dist_used / 1000.0, np.nan)
        out["age_h"] = np.where(np.isfinite(age_used), age_used, np.nan)
        out["used"] = used_mask
        return out

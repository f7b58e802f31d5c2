"""Route assessment: per-segment icing exposure, accretion, ice type, large drops, data status, alternatives.

The flow: the route's 4-D trajectory (:mod:`icing.flight.route`) is sampled at a fixed time step; the atmosphere
source gives the diagnosed supercooled liquid (LWC, MVD, temperature) at each sample; the accretion model
(:mod:`icing.physics.accretion`) turns it into ice growth on the aircraft's reference body at the sample's true
airspeed; samples are summed per segment (waypoint to waypoint). Where the source has no usable data the
sample is unknown, and a segment with unknown samples never reports ``none``.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from icing import CAUTION
from icing.physics import thermo
from icing.units import FT, NMI

__all__ = ["assess_route", "assess_routes", "atmosphere_source", "Assessment", "SEGMENT_COLUMNS", "INTENSITIES",
           "ICE_TYPES", "LARGE_DROPS", "DATA_STATUS"]

INTENSITIES = ("none", "trace", "light", "moderate", "severe")
ICE_TYPES = ("none", "rime", "mixed", "glaze")
LARGE_DROPS = ("none", "drizzle", "rain")
DATA_STATUS = ("ok", "partial", "missing")
SEGMENT_COLUMNS = ["segment", "start", "end", "start_time", "end_time", "distance_nm", "altitude_ft_min",
                   "altitude_ft_max", "icing_minutes", "max_rate_mm_per_h", "accretion_mm", "intensity", "ice_type",
                   "large_drops", "data", "sources"]
EXTRA_COLUMNS = ["warm_surface_minutes", "max_lwc_g_m3", "mvd_um", "min_temperature_c", "freezing_level_ft",
                 "supercooled_top_ft", "appendix_c", "appendix_o", "data_distance_km", "data_age_h", "best_altitude_ft",
                 "best_accretion_mm"]
DEFAULT_OFFSETS_FT = (-6000.0, -4000.0, -2000.0, 2000.0, 4000.0, 6000.0)
MIN_ALTERNATIVE_FT = 2000.0  # alternatives below this are not offered (terrain and airspace are unknown here)
FULL = 0.999  # coverage at or above this counts as complete data


@dataclass
class Assessment:
    """The result of :func:`assess_route`: ``segments`` (one row a segment), ``summary``, ``samples``."""

    segments: pd.DataFrame
    summary: dict
    samples: pd.DataFrame
    caution: str = CAUTION
    alternatives: pd.DataFrame = field(default_factory=pd.DataFrame)
    route: object = field(default=None, repr=False)  # the icing.flight.route.Route screened
    source: object = field(default=None, repr=False)  # the atmosphere source used

    def to_dict(self) -> dict:
        seg = self.segments.copy()
        for c in ("start_time", "end_time"):
            seg[c] = seg[c].astype(str)
        records = json.loads(seg.to_json(orient="records", double_precision=6))
        summary = {k: (None if isinstance(v, float) and np.isnan(v) else v) for k, v in self.summary.items()}
        return {"caution": self.caution, "summary": summary, "segments": records}

    def to_json(self, **kw) -> str:
        """The result as JSON (RFC 8259: unknown numbers are null, never NaN)."""
        return json.dumps(self.to_dict(), indent=kw.pop("indent", 2), allow_nan=False, **kw)


def atmosphere_source(soundings, **options):
    """An atmosphere source from a source, a list of profiles, or paths/directories of sounding files.

    Options: ``max_distance_km``, ``max_age_hours``, ``max_stations``, ``cold_limit``, ``airmass`` (matching and
    diagnosis), and for readers that need them ``stations`` (a station table: positions for TEMP reports) and
    ``reference_time`` (the month and year of TEMP reports, which carry only day and hour).
    """
    if hasattr(soundings, "sample"):
        return soundings
    from icing.flight.sources import SoundingSource

    if isinstance(soundings, str) or hasattr(soundings, "__fspath__") or hasattr(soundings, "attrs"):
        soundings = [soundings]
    from icing.io import read_paths

    read_opts = {k: options[k] for k in ("stations", "reference_time") if options.get(k) is not None}
    profiles = []
    for item in soundings:
        if isinstance(item, str) or hasattr(item, "__fspath__"):
            profiles.extend(read_paths(item, **read_opts))
        else:
            profiles.append(item)
    keys = {"max_distance_km", "max_age_hours", "max_stations", "cold_limit", "airmass"}
    return SoundingSource(profiles, **{k: v for k, v in options.items() if k in keys})


def _sample_atmosphere(source, traj, offset_ft=0.0, weights=None):
    alt = np.maximum(traj["altitude_ft"].to_numpy() + offset_ft, -1000.0)
    fl = traj["flight_level"].to_numpy()
    pressure = np.where(fl, thermo.pressure_from_pressure_altitude_ft(alt), np.nan)
    height = np.where(fl, np.nan, alt * FT)
    times = traj["time_s"].to_numpy().astype("int64").astype("datetime64[s]")
    kw = {} if weights is None else {"weights": weights}
    return source.sample(traj["latitude"].to_numpy(), traj["longitude"].to_numpy(), times, pressure=pressure,
                         height=height, **kw), alt


def _accrete(atm, tas_ms, body_diameter_m):
    from icing.physics.accretion import accretion_core

    t_k = atm["temperature"] + thermo.T0
    lwc = np.where(np.isfinite(atm["lwc"]), atm["lwc"], 0.0)
    supercooled = (lwc > 0) & (atm["temperature"] < 0.0) & (np.nan_to_num(atm["supercooled"]) > 0.0)
    lwc = np.where(supercooled, lwc, 0.0)  # zero LWC is a known no-ice answer whatever the other inputs
    core = accretion_core(lwc / 1000.0, atm["mvd"] * 1e-6, tas_ms, t_k, atm["pressure"],
                          np.full_like(lwc, body_diameter_m))
    # A NaN thickness rate (inputs the model cannot use) stays unknown; it is never read as no ice.
    rate = np.where(supercooled, core["thickness_rate"], 0.0) * 1000.0 * 3600.0  # mm/h
    ice = np.clip(np.where(supercooled, np.asarray(core["ice_type"]), 0), 0, 3).astype(np.int8)
    missing = ~(atm["coverage"] > 0)
    rate = np.where(missing, np.nan, rate)
    # Supercooled drops hit the body but kinetic and aerodynamic heating keep its surface above 0 degC: no ice
    # at the leading edge, though the water may freeze further aft (runback), which this model does not follow.
    warm = supercooled & ~missing & np.asarray(core["warm_surface"], dtype=bool)
    return rate, ice, supercooled & ~missing, warm


def _intensity(rate_mm_h):
    from icing.physics.accretion import intensity_code

    return np.asarray(intensity_code(np.asarray(rate_mm_h) / 1000.0 / 3600.0))


def assess_route(route, soundings, aircraft="turboprop", *, step_s=60.0, departure=None,
                 offsets_ft=DEFAULT_OFFSETS_FT, use_winds=True, **options) -> Assessment:
    """Screen a route for airframe icing, segment by segment.

    Parameters
    ----------
    route : icing.flight.route.Route or path
        The planned route (a CSV of waypoints or GeoJSON LineString; see :func:`icing.flight.route.read_route`).
    soundings : atmosphere source, list of profiles, or paths/directories of sounding files
    aircraft : preset name, TOML path or :class:`icing.flight.aircraft.Aircraft`
    step_s : float
        Trajectory time step (s), default 60.
    offsets_ft : sequence of float
        Altitude offsets (ft) tried as alternatives, each applied to the whole route.
    use_winds : bool
        Ground speed from true airspeed plus the sounding winds where known.
    options :
        ``max_distance_km``, ``max_age_hours``, ``max_stations`` (matching), ``cold_limit``, ``airmass``
        (diagnosis), ``stations`` and ``reference_time`` (TEMP reports), ``transition_ft``.

    Returns
    -------
    Assessment
        ``segments`` with the columns of :data:`SEGMENT_COLUMNS` (then extra detail columns), ``summary`` and
        the per-sample ``samples``. ADVISORY ONLY: see :data:`icing.CAUTION`.
    """
    return assess_routes([route], soundings, aircraft, step_s=step_s, departure=departure,
                         offsets_ft=offsets_ft, use_winds=use_winds, **options)[0]


def assess_routes(routes, soundings, aircraft="turboprop", *, step_s=60.0, departure=None,
                  offsets_ft=DEFAULT_OFFSETS_FT, use_winds=True, **options) -> list[Assessment]:
    """Screen many routes against one atmosphere source in one vectorised pass (see :func:`assess_route`)."""
    from icing.flight.aircraft import get_aircraft
    from icing.flight.route import DEFAULT_TRANSITION_FT, Route, plan_geometry, read_route, timed_arrays, wind_points

    ac = get_aircraft(aircraft)
    source = atmosphere_source(soundings, **options)
    transition = options.get("transition_ft", DEFAULT_TRANSITION_FT)
    rts = [r if isinstance(r, Route) else read_route(r, departure=departure) for r in routes]
    geos = [plan_geometry(r, ac, transition) for r in rts]
    winds = [None] * len(geos)
    if use_winds:
        pts = [wind_points(g) for g in geos]
        cat = {k: np.concatenate([p[k] for p in pts]) for k in pts[0]}
        fl = cat["flight_level"]
        atm = source.sample(cat["latitude"], cat["longitude"], cat["time_s"].astype("int64").astype("datetime64[s]"),
                            pressure=np.where(fl, thermo.pressure_from_pressure_altitude_ft(cat["altitude_ft"]),
                                              np.nan),
                            height=np.where(fl, np.nan, cat["altitude_ft"] * FT))
        az = np.radians(cat["azimuth"])
        tail = atm["wind_u"] * np.sin(az) + atm["wind_v"] * np.cos(az)
        bounds = np.cumsum([0] + [p["latitude"].size for p in pts])
        winds = [tail[bounds[i]:bounds[i + 1]] for i in range(len(pts))]
    parts = [timed_arrays(g, step_s, w) for g, w in zip(geos, winds, strict=True)]
    lengths = np.array([p["leg"].size for p in parts])
    traj = pd.DataFrame({k: np.concatenate([p[k] for p in parts]) for k in parts[0]})
    traj["phase"] = np.array(["cruise", "climb", "descent"])[traj["phase"].to_numpy()]
    traj.insert(1, "time", pd.to_datetime(traj["time_s"], unit="s", utc=True))
    traj["route"] = np.repeat(np.arange(len(parts)), lengths)
    tas = traj["tas_ms"].to_numpy()
    weights = None
    if hasattr(source, "weights"):  # the horizontal match is the same at every altitude: compute it once
        weights = source.weights(traj["latitude"].to_numpy(), traj["longitude"].to_numpy(),
                                 traj["time_s"].to_numpy().astype("int64").astype(float))
    atm, _ = _sample_atmosphere(source, traj, weights=weights)
    rate, ice, icing, warm = _accrete(atm, tas, ac.body_diameter_m)
    dur = traj["duration_s"].to_numpy()
    samples = traj.assign(
        pressure_hpa=atm["pressure"] / 100.0, temperature_c=atm["temperature"], lwc_g_m3=atm["lwc"],
        mvd_um=atm["mvd"], large_drop=atm["large_drop"], coverage=atm["coverage"], in_icing=icing,
        warm_surface=warm,
        rate_mm_per_h=rate, accretion_mm=rate * dur / 3600.0, ice_type=np.asarray(ICE_TYPES)[ice],
        freezing_level_ft=atm["freezing_level_m"] / FT, supercooled_top_ft=atm["supercooled_top_m"] / FT,
        data_distance_km=atm["distance_km"], data_age_h=atm["age_h"])
    # Alternatives: the whole route shifted by each offset; per segment the least accretion with full data.
    alt_acc = {}
    for off in offsets_ft:
        a2, alt2 = _sample_atmosphere(source, traj, off, weights=weights)
        r2 = _accrete(a2, tas, ac.body_diameter_m)[0]
        acc2 = np.where((a2["coverage"] >= FULL) & (alt2 >= MIN_ALTERNATIVE_FT), r2 * dur / 3600.0, np.nan)
        alt_acc[off] = acc2
    segments, alternatives = _segment_tables(rts, samples, atm["used"], source, alt_acc, ice)
    out = []
    bounds = np.concatenate([[0], np.cumsum(lengths)])
    seg_bounds = np.concatenate([[0], np.cumsum([len(r.waypoints) - 1 for r in rts])])
    n_opt = len(offsets_ft) + 1
    samples = samples.drop(columns="route")
    alternatives = alternatives.drop(columns="_route")
    rank = {"unknown": -1, **{k: i for i, k in enumerate(INTENSITIES)}}
    cols = {"intensity": segments["intensity"].to_numpy(), "accretion_mm": segments["accretion_mm"].to_numpy(),
            "icing_minutes": segments["icing_minutes"].to_numpy(), "data": segments["data"].to_numpy(),
            "best_accretion_mm": segments["best_accretion_mm"].to_numpy()}
    cols["code"] = np.array([rank[x] for x in cols["intensity"]])
    for i, r in enumerate(rts):
        a, b = seg_bounds[i], seg_bounds[i + 1]
        seg = _view(segments, a, b)
        alts = _view(alternatives, a * n_opt, b * n_opt)
        smp = _view(samples, bounds[i], bounds[i + 1])
        summary = _summary(r, ac, {k: v[a:b] for k, v in cols.items()}, step_s)
        summary["alternative_offsets_ft"] = [float(o) for o in offsets_ft]
        out.append(Assessment(segments=seg, summary=summary, samples=smp, alternatives=alts, route=r,
                              source=source))
    return out


def _view(frame, a, b):
    """Rows a:b with a fresh 0-based index (a view under pandas copy-on-write, no data copied)."""
    out = frame.iloc[a:b]
    out.index = pd.RangeIndex(b - a)
    return out


def _reduce(ufunc, values, starts):
    return ufunc.reduceat(values, starts) if values.size else values


def _segment_tables(routes, smp, used, source, alt_acc, ice):
    """Aggregate samples into segments for all routes at once (reduceat over contiguous segment runs)."""
    from icing.physics.envelopes import appendix_c_status, appendix_o_status

    route_i = smp["route"].to_numpy()
    leg = smp["leg"].to_numpy()
    offsets = np.concatenate([[0], np.cumsum([len(r.waypoints) - 1 for r in routes])])
    gid = offsets[route_i] + leg  # global segment number, non-decreasing along the samples
    starts = np.flatnonzero(np.concatenate([[True], np.diff(gid) != 0]))
    n_seg = offsets[-1]
    if starts.size != n_seg:
        raise AssertionError("every segment must hold at least one sample")
    dur = smp["duration_s"].to_numpy()
    cov = smp["coverage"].to_numpy()
    icing = smp["in_icing"].to_numpy()
    rate = smp["rate_mm_per_h"].to_numpy()
    known = np.where(np.isfinite(rate), rate, 0.0)
    alt = smp["altitude_ft"].to_numpy()
    temp = smp["temperature_c"].to_numpy()
    lwc = np.nan_to_num(smp["lwc_g_m3"].to_numpy())
    mvd = smp["mvd_um"].to_numpy()
    codes = _intensity(rate).astype(int)
    lvl = {"n/a": 0, "within": 1, "unknown": 2, "beyond": 3}  # the larger wins within a segment
    app_c = np.asarray(appendix_c_status(lwc, mvd, temp, alt))
    app_c = np.where(icing, np.vectorize(lvl.get)(app_c), 0) if app_c.size else app_c
    ld = np.nan_to_num(smp["large_drop"].to_numpy()).astype(int)
    app_o = np.vectorize(lvl.get)(np.asarray(appendix_o_status(ld, alt))) if ld.size else ld

    def fin_max(v):
        r = _reduce(np.maximum, np.where(np.isfinite(v), v, -np.inf), starts)
        return np.where(np.isfinite(r), r, np.nan)

    def fin_mean(v):
        ok = np.isfinite(v)
        n = _reduce(np.add, ok.astype(float), starts)
        return np.where(n > 0, _reduce(np.add, np.where(ok, v, 0.0), starts) / np.where(n > 0, n, 1), np.nan)

    cov_min = _reduce(np.minimum, cov, starts)
    cov_max = _reduce(np.maximum, cov, starts)
    data = np.where(cov_min >= FULL, "ok", np.where(cov_max <= 0, "missing", "partial"))
    code = _reduce(np.maximum, codes, starts)
    intensity = np.where((data == "missing") | ((data == "partial") & (code <= 0)), "unknown",
                         np.asarray(INTENSITIES)[np.clip(code, 0, 4)])
    n_icing = _reduce(np.add, icing.astype(float), starts)
    acc = _reduce(np.add, known * dur / 3600.0, starts)
    used_seg = np.logical_or.reduceat(used, starts, axis=0) if used.size else np.zeros((n_seg, 0), bool)
    labels = getattr(source, "labels", np.array([], dtype=str))
    sources = [";".join(labels[np.flatnonzero(row)]) for row in used_seg]
    alt_max = _reduce(np.maximum, alt, starts)
    t_s = smp["time_s"].to_numpy()
    ends = np.concatenate([starts[1:], [len(smp)]]) - 1
    leg_m = np.concatenate([r.leg_distances_m() for r in routes])
    names = [(w.name, r.waypoints[k + 1].name) for r in routes for k, w in enumerate(r.waypoints[:-1])]
    # Alternatives: per segment, plan (with complete data) and each offset; best = least accretion, then nearest.
    opts = {0.0: np.where(data == "ok", acc, np.nan)}
    for off, v in alt_acc.items():
        bad = _reduce(np.add, np.isnan(v).astype(float), starts)
        opts[off] = np.where(bad > 0, np.nan, _reduce(np.add, np.nan_to_num(v), starts))
    offs = np.array(list(opts))
    mat = np.column_stack([opts[o] for o in offs])  # (segments, options)
    key = np.where(np.isnan(mat), np.inf, mat) + 1e-9 * np.abs(offs)[None, :]  # ties go to the smaller change
    best = np.argmin(key, axis=1)
    has_best = np.isfinite(mat[np.arange(n_seg), best])
    seg_route = np.repeat(np.arange(len(routes)), np.diff(offsets))
    segments = pd.DataFrame({
        "segment": leg[starts] + 1,
        "start": [a for a, _ in names], "end": [b for _, b in names],
        "start_time": [_iso_s(t) for t in t_s[starts] - dur[starts] / 2],
        "end_time": [_iso_s(t) for t in t_s[ends] + dur[ends] / 2],
        "distance_nm": leg_m / NMI,
        "altitude_ft_min": _reduce(np.minimum, alt, starts), "altitude_ft_max": alt_max,
        "icing_minutes": _reduce(np.add, dur * icing, starts) / 60.0,
        "max_rate_mm_per_h": _reduce(np.maximum, known, starts),
        "accretion_mm": acc,
        "intensity": intensity,
        "ice_type": np.asarray(ICE_TYPES)[_reduce(np.maximum, ice.astype(int), starts)],
        "large_drops": np.asarray(LARGE_DROPS)[_reduce(np.maximum, ld, starts)],
        "data": data, "sources": sources,
        "warm_surface_minutes": _reduce(np.add, dur * smp["warm_surface"].to_numpy(), starts) / 60.0,
        "max_lwc_g_m3": _reduce(np.maximum, np.where(icing, lwc, 0.0), starts),
        "mvd_um": np.where(n_icing > 0, _reduce(np.add, np.where(icing, np.nan_to_num(mvd), 0.0), starts)
                           / np.where(n_icing > 0, n_icing, 1), np.nan),
        "min_temperature_c": -fin_max(-temp),
        "freezing_level_ft": fin_mean(smp["freezing_level_ft"].to_numpy()),
        "supercooled_top_ft": fin_max(smp["supercooled_top_ft"].to_numpy()),
        "appendix_c": np.array(["n/a", "within", "unknown", "beyond"])[_reduce(np.maximum, app_c, starts)],
        "appendix_o": np.array(["n/a", "within", "unknown", "beyond"])[_reduce(np.maximum, app_o, starts)],
        "data_distance_km": fin_max(smp["data_distance_km"].to_numpy()),
        "data_age_h": fin_max(smp["data_age_h"].to_numpy()),
        "best_altitude_ft": np.where(has_best, alt_max + offs[best], np.nan),
        "best_accretion_mm": np.where(has_best, mat[np.arange(n_seg), best], np.nan),
    }, columns=SEGMENT_COLUMNS + EXTRA_COLUMNS)
    alternatives = pd.DataFrame({
        "_route": np.repeat(seg_route, offs.size), "segment": np.repeat(leg[starts] + 1, offs.size),
        "offset_ft": np.tile(offs, n_seg), "altitude_ft": (alt_max[:, None] + offs[None, :]).ravel(),
        "accretion_mm": mat.ravel()})
    return segments, alternatives


def _iso_s(t) -> str:
    return pd.Timestamp(round(float(t)), unit="s", tz="UTC").strftime("%Y-%m-%dT%H:%M:%SZ")


def _iso(ts) -> str:
    return pd.Timestamp(ts).tz_convert("UTC").round("s").strftime("%Y-%m-%dT%H:%M:%SZ")


def _summary(route, ac, seg, step_s):
    """The route summary from its segments' columns (numpy arrays)."""
    from icing.physics.accretion import INTENSITY_NOTE

    codes, acc, data, inten = seg["code"], seg["accretion_mm"], seg["data"], seg["intensity"]
    worst = None
    if codes.size and codes.max() > 0:
        cand = np.flatnonzero(codes == codes.max())
        worst = int(cand[np.argmax(acc[cand])]) + 1
    best = seg["best_accretion_mm"]
    n_missing = int((data == "missing").sum())
    n_partial = int((data == "partial").sum())
    return {
        "route": route.name, "departure": _iso(route.departure), "aircraft": ac.name,
        "reference_body_diameter_m": ac.body_diameter_m, "time_step_s": step_s,
        "segments": int(codes.size),
        "total_icing_minutes": float(seg["icing_minutes"].sum()),
        "total_accretion_mm": float(acc.sum()),
        "worst_segment": worst,
        "worst_intensity": str(inten[worst - 1]) if worst else ("unknown" if n_missing or n_partial else "none"),
        "best_altitude_plan_accretion_mm": float(best.sum()) if np.isfinite(best).all() else float("nan"),
        "segments_missing_data": n_missing, "segments_partial_data": n_partial,
        "data_complete": bool(n_missing == 0 and n_partial == 0),
        "intensity_note": INTENSITY_NOTE,
        "caution": CAUTION,
    }

"""Route assessment: per-segment icing exposure, accretion, ice type, large drops, data status, alternatives.

The flow: the route's 4-D trajectory (:mod:`icing.flight.route`) is sampled at a fixed time step; the atmosphere
source gives the diagnosed supercooled liquid (LWC, MVD, temperature) at each sample; the accretion model
(:mod:`icing.physics.accretion`) turns it into ice growth on the aircraft's reference body at the sample's true
airspeed; samples are summed per segment (waypoint to waypoint). Where the source has no usable data the
sample is unknown, and a segment with unknown samples never reports ``none``.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from icing import CAUTION
from icing.flight.result import Assessment
from icing.physics import thermo
from icing.physics.precipitation import LARGE_DROP_REASONS
from icing.units import FT, NMI

__all__ = ["assess_route", "assess_routes", "atmosphere_source", "Assessment", "SEGMENT_COLUMNS", "EXTRA_COLUMNS",
           "INTENSITIES", "ICE_TYPES", "LARGE_DROPS", "DATA_STATUS", "INTENSITY_DTYPE", "ICE_TYPE_DTYPE",
           "LARGE_DROPS_DTYPE", "LARGE_DROP_POTENTIAL_DTYPE", "DATA_DTYPE"]

INTENSITIES = ("none", "trace", "light", "moderate", "severe")
ICE_TYPES = ("none", "rime", "mixed", "glaze")
LARGE_DROPS = ("none", "drizzle", "rain")
DATA_STATUS = ("ok", "partial", "missing")
# Ordered categoricals of the segment table. ``unknown`` ranks above ``severe``: a segment without data cannot be
# ruled out, so it sorts with the worst and ``segments.intensity >= "moderate"`` selects it too (unknown is never
# safe). Ice type ranks by how wet the growth is, large drops by drop size, data by how much is missing.
INTENSITY_DTYPE = pd.CategoricalDtype([*INTENSITIES, "unknown"], ordered=True)
ICE_TYPE_DTYPE = pd.CategoricalDtype(list(ICE_TYPES), ordered=True)
LARGE_DROPS_DTYPE = pd.CategoricalDtype(list(LARGE_DROPS), ordered=True)
LARGE_DROP_POTENTIAL_DTYPE = pd.CategoricalDtype(["none", "possible", "likely"], ordered=True)
DATA_DTYPE = pd.CategoricalDtype(list(DATA_STATUS), ordered=True)
SEGMENT_COLUMNS = ["segment", "start", "end", "start_time", "end_time", "distance_nm", "altitude_ft_min",
                   "altitude_ft_max", "icing_minutes", "max_rate_mm_per_h", "accretion_mm", "intensity", "ice_type",
                   "large_drops", "data", "sources"]
EXTRA_COLUMNS = ["warm_surface_minutes", "max_lwc_g_m3", "mvd_um", "min_temperature_c", "freezing_level_ft",
                 "supercooled_top_ft", "appendix_c", "appendix_o", "data_distance_km", "data_age_h", "best_altitude_ft",
                 "best_accretion_mm", "lower_bound", "large_drop_potential", "large_drop_reason"]
DEFAULT_OFFSETS_FT = (-6000.0, -4000.0, -2000.0, 2000.0, 4000.0, 6000.0)
MIN_ALTERNATIVE_FT = 2000.0  # default lowest alternative offered (terrain and airspace are unknown here)
FULL = 0.999  # coverage at or above this counts as complete data
# Options of assess_route besides its named parameters, by where they go.
MATCH_OPTIONS = ("max_distance_km", "max_age_hours", "max_stations")
DIAGNOSE_OPTIONS = ("cold_limit", "airmass")
READ_OPTIONS = ("stations", "reference_time", "units")
ROUTE_OPTIONS = ("transition_ft", "min_altitude_ft")


def _threshold_options() -> tuple[str, ...] | None:
    """Names of the cloud thresholds the diagnosis accepts as keywords (None: the table is not found, and the
    diagnosis itself checks them)."""
    import importlib

    for module in ("icing.physics.cloud", "icing.physics.layers"):
        try:
            return tuple(importlib.import_module(module).CLOUD_DEFAULTS)
        except (ImportError, AttributeError):
            continue
    return None  # pragma: no cover


def _source_options(options=()) -> tuple[str, ...]:
    thresholds = _threshold_options()
    if thresholds is None:  # unknown table: any other name goes to the diagnosis, which refuses unknown ones
        thresholds = tuple(k for k in options if k not in ROUTE_OPTIONS)
    return (*MATCH_OPTIONS, *DIAGNOSE_OPTIONS, *READ_OPTIONS, *thresholds)


def _check_options(func, options, source_given, route_options=False):
    """Refuse option names nobody uses (a TypeError, as Python does for any unknown keyword) and source options
    given with a source already built (they would have no effect)."""
    source_keys = _source_options(options)
    allowed = (*source_keys, *ROUTE_OPTIONS) if route_options else source_keys
    unknown = sorted(k for k in options if k not in allowed)
    if unknown:
        named = (*MATCH_OPTIONS, *DIAGNOSE_OPTIONS, *READ_OPTIONS, *(ROUTE_OPTIONS if route_options else ()))
        raise TypeError(f"{func}() got an unexpected keyword argument {unknown[0]!r} (options: {', '.join(named)}, "
                        "and the cloud thresholds of icing.physics.layers.CLOUD_DEFAULTS)")
    if source_given:
        idle = sorted(k for k in options if k in source_keys and options[k] is not None)
        if idle:
            raise TypeError(f"{func}() option {idle[0]!r} has no effect on an atmosphere source that is already "
                            "built: give it when building the source (atmosphere_source, SoundingSource, GridSource)")


def atmosphere_source(soundings, **options):
    """An atmosphere source from a source, a list of profiles, or paths/directories of sounding files.

    Options: ``max_distance_km``, ``max_age_hours``, ``max_stations``, ``cold_limit``, ``airmass`` (matching and
    diagnosis), and for readers that need them ``stations`` (a station table: positions for TEMP reports) and
    ``reference_time`` (the month and year of TEMP reports, which carry only day and hour).
    """
    _check_options("atmosphere_source", options, hasattr(soundings, "sample"))
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
    keys = set(_source_options(options)) - set(READ_OPTIONS)
    return SoundingSource(profiles, **{k: v for k, v in options.items() if k in keys and v is not None})


def _sample_points(traj, offset_ft=0.0):
    """The trajectory's points as a source samples them (pressure at flight levels, else height), and altitude."""
    alt = np.maximum(traj["altitude_ft"].to_numpy() + offset_ft, -1000.0)
    fl = traj["flight_level"].to_numpy()
    return {"latitude": traj["latitude"].to_numpy(), "longitude": traj["longitude"].to_numpy(),
            "time": traj["time_s"].to_numpy().astype("int64").astype("datetime64[s]"),
            "pressure": np.where(fl, thermo.pressure_from_pressure_altitude_ft(alt), np.nan),
            "height": np.where(fl, np.nan, alt * FT)}, alt


def _sample_atmosphere(source, traj, offset_ft=0.0, weights=None):
    pts, alt = _sample_points(traj, offset_ft)
    kw = {} if weights is None else {"weights": weights}
    return source.sample(pts["latitude"], pts["longitude"], pts["time"], pressure=pts["pressure"],
                         height=pts["height"], **kw), alt


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


def _sample_codes(rate, lwc, mvd, temp, ld, icing_certified):
    """The rate's word on the reference body, held to what the words mean for this aircraft (envelopes)."""
    from icing.physics.envelopes import intensity_for_conditions

    return intensity_for_conditions(_intensity(rate), lwc, mvd, temp, ld, icing_certified).astype(int)


def _segment_intensity(codes, cov, starts):
    """Per segment: data status codes (:data:`DATA_STATUS`) and intensity codes (:data:`INTENSITY_DTYPE`;
    ``unknown`` where no data, or partial data without icing found)."""
    cov_min = _reduce(np.minimum, cov, starts)
    cov_max = _reduce(np.maximum, cov, starts)
    status = np.where(cov_min >= FULL, 0, np.where(cov_max <= 0, 2, 1))
    code = _reduce(np.maximum, codes, starts)
    missing = status == 2
    return status, np.where(missing | ((status == 1) & (code <= 0)), len(INTENSITIES), np.clip(code, 0, 4))


def member_outcome(atm, members, *, tas_ms, duration_s, starts, body_diameter_m, icing_certified):
    """Per segment of ``members`` stacked runs of the same samples: intensity codes (0-4, 5 unknown) and
    accretion (mm, NaN without data), (members, segments) each: the scoring of :func:`_segment_tables`."""
    n = tas_ms.size
    tas = np.tile(tas_ms, members)
    dur = np.tile(duration_s, members)
    starts_m = (np.asarray(starts)[None, :] + n * np.arange(members)[:, None]).ravel()
    rate, _, _, _ = _accrete(atm, tas, body_diameter_m)
    codes = _sample_codes(rate, np.nan_to_num(atm["lwc"]), atm["mvd"], atm["temperature"],
                          np.nan_to_num(atm["large_drop"]).astype(int), icing_certified)
    status, intensity = _segment_intensity(codes, atm["coverage"], starts_m)
    acc = _reduce(np.add, np.where(np.isfinite(rate), rate, 0.0) * dur / 3600.0, starts_m)
    acc = np.where(status == 2, np.nan, acc)
    return intensity.reshape(members, -1), acc.reshape(members, -1)


def _segment_starts(routes, route_i, leg):
    """First sample of each segment of all routes (samples in route and leg order)."""
    offsets = np.concatenate([[0], np.cumsum([len(r.waypoints) - 1 for r in routes])])
    gid = offsets[route_i] + leg  # global segment number, non-decreasing along the samples
    return np.flatnonzero(np.concatenate([[True], np.diff(gid) != 0])), offsets


def assess_route(route, soundings, aircraft="turboprop", *, step_s=60.0, departure=None,
                 offsets_ft=DEFAULT_OFFSETS_FT, use_winds=True, spread=False, members=30, seed=0,
                 **options) -> Assessment:
    """Screen a route for airframe icing, segment by segment.

    Parameters
    ----------
    route : icing.flight.route.Route or path
        The planned route (a CSV of waypoints or GeoJSON LineString; see :func:`icing.flight.route.read_route`).
    soundings : atmosphere source, list of profiles, or paths/directories of sounding files
    aircraft : preset name, TOML path or :class:`icing.flight.aircraft.Aircraft`
    step_s : float
        Trajectory time step (s), default 60.
    departure : str or time, optional
        ISO 8601 UTC. When given it is the departure: a route's own times are all moved by the same amount
        (timed legs keep their durations) and ``summary["notes"]`` says so; without it the route's own first time
        is used (see :class:`icing.flight.route.Route`).
    offsets_ft : sequence of float
        Altitude offsets (ft) tried as alternatives, each applied to the whole route, at the true airspeed the
        aircraft flies at that altitude. An alternative counts for a segment only with complete data, above the
        minimum altitude, and without a sample where supercooled drops hit a leading edge kept above 0 degC by
        kinetic heating (its "no ice" would hide runback ice).
    use_winds : bool
        Ground speed from true airspeed plus the sounding winds where known.
    spread : bool or dict
        True runs the chain over a seeded ensemble of its assumptions (:mod:`icing.flight.spread`; soundings
        only) and adds the columns ``p_light``, ``p_moderate``, ``p_severe``, ``accretion_p10_mm``,
        ``accretion_p90_mm``, ``spread_driver`` and ``summary["spread"]``; a dict gives the assumptions' ranges
        (name -> ``(low, high)``, or 0 for none; see :func:`icing.flight.spread.resolve_ranges`).
    members, seed : int
        Ensemble size (default 30) and the seed of its draws (default 0), used with ``spread``.
    options :
        ``max_distance_km``, ``max_age_hours``, ``max_stations`` (matching), ``cold_limit``, ``airmass`` and the
        cloud thresholds (diagnosis), ``stations`` and ``reference_time`` (TEMP reports), ``units`` (tables
        without units in the header): these build the source
        and are refused with a source already built; ``transition_ft``; ``min_altitude_ft``, the lowest
        altitude an alternative may use (default :data:`MIN_ALTERNATIVE_FT`, 2,000 ft: this tool knows neither
        terrain nor airspace, so give the route's minimum safe altitude). Any other name raises ``TypeError``.

    Returns
    -------
    Assessment
        ``segments`` (one row a segment), ``summary``, ``samples`` (one row a trajectory sample) and
        ``alternatives``. ADVISORY ONLY: see :data:`icing.CAUTION`.

    Notes
    -----
    The segment table has the columns :data:`SEGMENT_COLUMNS` then :data:`EXTRA_COLUMNS`, with these dtypes:

    * ``segment`` int64; ``start``, ``end``, ``sources`` text (``;``-separated report labels);
    * ``start_time``, ``end_time`` ``datetime64[ns, UTC]`` (to the second);
    * ``intensity`` ordered categorical :data:`INTENSITY_DTYPE`: none < trace < light < moderate < severe <
      unknown. ``unknown`` ranks above ``severe`` on purpose: where data are missing icing cannot be ruled out, so
      sorting puts such segments with the worst and ``seg.intensity >= "moderate"`` selects them as well; select
      known values with ``seg.data == "ok"``. Never null;
    * ``ice_type`` (:data:`ICE_TYPE_DTYPE`: none < rime < mixed < glaze), ``large_drops``
      (:data:`LARGE_DROPS_DTYPE`: none < drizzle < rain), ``large_drop_potential``
      (:data:`LARGE_DROP_POTENTIAL_DTYPE`: none < possible < likely; the largest along the segment), ``data``
      (:data:`DATA_DTYPE`: ok < partial < missing)
      ordered categoricals;
    * ``appendix_c``, ``appendix_o`` text (``n/a``, ``within``, ``unknown``, ``beyond``); ``large_drop_reason``
      text, why large drops are possible where their potential is largest
      (:data:`icing.physics.precipitation.LARGE_DROP_REASONS`; ``none`` without; None where data are missing);
    * ``lower_bound`` bool: True where ``data`` is ``partial``;
    * every other column float64.

    Unknown is null, never zero or ``none``. A segment whose ``data`` is ``missing`` has NaN in ``icing_minutes``,
    ``max_rate_mm_per_h``, ``accretion_mm``, ``warm_surface_minutes``, ``max_lwc_g_m3`` and ``mvd_um``, null (NaN
    category) in ``ice_type``, ``large_drops`` and ``large_drop_potential``, None in ``large_drop_reason``,
    ``unknown`` in ``intensity``, ``appendix_c`` and ``appendix_o``. A segment whose ``data`` is ``partial`` holds
    what the samples with data say: its numbers, ``ice_type``, ``large_drops`` and ``large_drop_potential`` are
    lower bounds (``lower_bound`` True), and its ``intensity`` is the worst known (``unknown`` when that is
    ``none``). ``mvd_um`` is NaN where no sample is in icing; ``min_temperature_c``, ``freezing_level_ft``,
    ``supercooled_top_ft``, ``data_distance_km``, ``data_age_h``, ``best_altitude_ft`` and ``best_accretion_mm`` are
    NaN where unknown.

    In the summary, ``total_icing_minutes``, ``total_accretion_mm`` are NaN and ``worst_segment`` None with
    ``worst_intensity`` ``unknown`` when any segment has no data (``worst_known_segment`` and
    ``worst_known_intensity`` then give the worst among the segments with data); with partial data the totals are
    lower bounds and ``totals_lower_bound`` is True. ``notes`` lists what the route reader ignored or decided.
    """
    _check_options("assess_route", options, hasattr(soundings, "sample"), route_options=True)
    return assess_routes([route], soundings, aircraft, step_s=step_s, departure=departure,
                         offsets_ft=offsets_ft, use_winds=use_winds, spread=spread, members=members, seed=seed,
                         **options)[0]


def assess_routes(routes, soundings, aircraft="turboprop", *, step_s=60.0, departure=None,
                  offsets_ft=DEFAULT_OFFSETS_FT, use_winds=True, spread=False, members=30, seed=0,
                  **options) -> list[Assessment]:
    """Screen many routes against one atmosphere source in one vectorised pass (see :func:`assess_route`)."""
    from dataclasses import replace

    from icing.flight.aircraft import get_aircraft
    from icing.flight.route import DEFAULT_TRANSITION_FT, Route, plan_geometry, read_route, timed_arrays, wind_points

    _check_options("assess_routes", options, hasattr(soundings, "sample"), route_options=True)
    ac = get_aircraft(aircraft)
    source = atmosphere_source(soundings, **{k: v for k, v in options.items() if k not in ROUTE_OPTIONS})
    transition = options.get("transition_ft", DEFAULT_TRANSITION_FT)
    rts = []
    for r in routes:
        if not isinstance(r, Route):
            r = read_route(r, departure=departure)
        elif departure is not None:  # the departure given wins over the Route's own (a note says so)
            r = replace(r, departure=departure, notes=list(r.notes))
        rts.append(r)
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
        mvd_um=atm["mvd"], large_drop=atm["large_drop"], large_drop_potential=atm["large_drop_potential"],
        large_drop_reason=atm["large_drop_reason"], coverage=atm["coverage"], in_icing=icing,
        warm_surface=warm,
        rate_mm_per_h=rate, accretion_mm=rate * dur / 3600.0,
        ice_type=pd.Categorical.from_codes(np.where(atm["coverage"] > 0, ice, -1), dtype=ICE_TYPE_DTYPE),
        freezing_level_ft=atm["freezing_level_m"] / FT, supercooled_top_ft=atm["supercooled_top_m"] / FT,
        data_distance_km=atm["distance_km"], data_age_h=atm["age_h"])
    # Alternatives: the whole route shifted by each offset; per segment the least accretion with full data.
    alt_acc = {}
    lowest = float(options.get("min_altitude_ft", MIN_ALTERNATIVE_FT))
    phase = traj["phase"].to_numpy()
    plan_alt = traj["altitude_ft"].to_numpy()
    schedule = np.empty(len(traj))
    for ph in ("cruise", "climb", "descent"):
        sel = phase == ph
        schedule[sel] = ac.true_airspeed_ms(ph, plan_alt[sel]) if sel.any() else 0.0
    for off in offsets_ft:
        a2, alt2 = _sample_atmosphere(source, traj, off, weights=weights)
        tas2 = tas.copy()  # the same schedule (or the planned speeds, scaled) at the other altitude
        for ph in ("cruise", "climb", "descent"):
            sel = phase == ph
            if sel.any():
                tas2[sel] = tas[sel] * ac.true_airspeed_ms(ph, alt2[sel]) / schedule[sel]
        r2, _, _, warm2 = _accrete(a2, tas2, ac.body_diameter_m)
        ok = (a2["coverage"] >= FULL) & (alt2 >= lowest) & ~warm2
        alt_acc[off] = np.where(ok, r2 * dur / 3600.0, np.nan)
    segments, alternatives = _segment_tables(rts, samples, atm["used"], source, alt_acc, ice,
                                             ac.icing_certified)
    ensemble = None
    if spread is not False and spread is not None:  # how sure: the chain over a seeded ensemble of assumptions
        from functools import partial

        from icing.flight.spread import route_spread

        starts, _ = _segment_starts(rts, traj["route"].to_numpy(), traj["leg"].to_numpy())
        outcome = partial(member_outcome, tas_ms=tas, duration_s=traj["duration_s"].to_numpy(), starts=starts,
                          body_diameter_m=ac.body_diameter_m, icing_certified=ac.icing_certified)
        built = hasattr(soundings, "sample")
        ensemble = route_spread(source, _sample_points(traj)[0], outcome, members=members, seed=seed,
                                ranges=spread if isinstance(spread, dict) else None, weights=weights,
                                options=None if built else {k: v for k, v in options.items()
                                                            if k in _source_options(options) and k not in
                                                            (*MATCH_OPTIONS, *READ_OPTIONS)})
        segments = segments.assign(**ensemble["columns"])
    out = []
    bounds = np.concatenate([[0], np.cumsum(lengths)])
    seg_bounds = np.concatenate([[0], np.cumsum([len(r.waypoints) - 1 for r in rts])])
    n_opt = len(offsets_ft) + 1
    samples = samples.drop(columns="route")
    alternatives = alternatives.drop(columns="_route")
    rank = {"unknown": -1, **{k: i for i, k in enumerate(INTENSITIES)}}
    cols = {"intensity": segments["intensity"].astype(str).to_numpy(),
            "accretion_mm": segments["accretion_mm"].to_numpy(),
            "icing_minutes": segments["icing_minutes"].to_numpy(), "data": segments["data"].astype(str).to_numpy(),
            "best_accretion_mm": segments["best_accretion_mm"].to_numpy()}
    cols["code"] = np.array([rank[x] for x in cols["intensity"]])
    for i, r in enumerate(rts):
        a, b = seg_bounds[i], seg_bounds[i + 1]
        seg = _view(segments, a, b)
        alts = _view(alternatives, a * n_opt, b * n_opt)
        smp = _view(samples, bounds[i], bounds[i + 1])
        summary = _summary(r, ac, {k: v[a:b] for k, v in cols.items()}, step_s)
        summary["alternative_offsets_ft"] = [float(o) for o in offsets_ft]
        if ensemble is not None:
            from icing.flight.spread import spread_summary

            summary["spread"] = spread_summary(ensemble, slice(a, b))
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


def _segment_tables(routes, smp, used, source, alt_acc, ice, icing_certified=False):
    """Aggregate samples into segments for all routes at once (reduceat over contiguous segment runs)."""
    from icing.physics.envelopes import appendix_c_status, appendix_o_status

    route_i = smp["route"].to_numpy()
    leg = smp["leg"].to_numpy()
    starts, offsets = _segment_starts(routes, route_i, leg)
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
    ld = np.nan_to_num(smp["large_drop"].to_numpy()).astype(int)
    # the largest large-drop potential of a segment, with the reason where it is largest (potential x 4 + reason)
    ld_code = _reduce(np.maximum, (4 * np.nan_to_num(smp["large_drop_potential"].to_numpy())
                                   + np.nan_to_num(smp["large_drop_reason"].to_numpy())).astype(int), starts)
    codes = _sample_codes(rate, lwc, mvd, temp, ld, icing_certified)
    lvl = {"n/a": 0, "within": 1, "unknown": 2, "beyond": 3}  # the larger wins within a segment
    app_c = np.asarray(appendix_c_status(lwc, mvd, temp, alt))
    app_c = np.where(icing, np.vectorize(lvl.get)(app_c), 0) if app_c.size else app_c
    app_o = np.vectorize(lvl.get)(np.asarray(appendix_o_status(ld, alt))) if ld.size else ld

    def fin_max(v):
        r = _reduce(np.maximum, np.where(np.isfinite(v), v, -np.inf), starts)
        return np.where(np.isfinite(r), r, np.nan)

    def fin_mean(v):
        ok = np.isfinite(v)
        n = _reduce(np.add, ok.astype(float), starts)
        return np.where(n > 0, _reduce(np.add, np.where(ok, v, 0.0), starts) / np.where(n > 0, n, 1), np.nan)

    status, intensity = _segment_intensity(codes, cov, starts)
    data = np.asarray(DATA_STATUS)[status]
    missing = status == 2
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
    envelope = np.array(["n/a", "within", "unknown", "beyond"])

    def unknown_if_missing(v):  # a segment without any data knows none of its sums and maxima
        return np.where(missing, np.nan, v)

    def category(codes_, dtype):
        return pd.Categorical.from_codes(np.where(missing, -1, codes_), dtype=dtype)

    segments = pd.DataFrame({
        "segment": (leg[starts] + 1).astype(np.int64),
        "start": [a for a, _ in names], "end": [b for _, b in names],
        "start_time": _utc_seconds(t_s[starts] - dur[starts] / 2),
        "end_time": _utc_seconds(t_s[ends] + dur[ends] / 2),
        "distance_nm": leg_m / NMI,
        "altitude_ft_min": _reduce(np.minimum, alt, starts), "altitude_ft_max": alt_max,
        "icing_minutes": unknown_if_missing(_reduce(np.add, dur * icing, starts) / 60.0),
        "max_rate_mm_per_h": unknown_if_missing(_reduce(np.maximum, known, starts)),
        "accretion_mm": unknown_if_missing(acc),
        "intensity": pd.Categorical.from_codes(intensity, dtype=INTENSITY_DTYPE),
        "ice_type": category(_reduce(np.maximum, ice.astype(int), starts), ICE_TYPE_DTYPE),
        "large_drops": category(_reduce(np.maximum, ld, starts), LARGE_DROPS_DTYPE),
        "data": pd.Categorical.from_codes(status, dtype=DATA_DTYPE), "sources": sources,
        "warm_surface_minutes": unknown_if_missing(_reduce(np.add, dur * smp["warm_surface"].to_numpy(), starts)
                                                   / 60.0),
        "max_lwc_g_m3": unknown_if_missing(_reduce(np.maximum, np.where(icing, lwc, 0.0), starts)),
        "mvd_um": np.where(n_icing > 0, _reduce(np.add, np.where(icing, np.nan_to_num(mvd), 0.0), starts)
                           / np.where(n_icing > 0, n_icing, 1), np.nan),
        "min_temperature_c": -fin_max(-temp),
        "freezing_level_ft": fin_mean(smp["freezing_level_ft"].to_numpy()),
        "supercooled_top_ft": fin_max(smp["supercooled_top_ft"].to_numpy()),
        "appendix_c": np.where(missing, "unknown", envelope[_reduce(np.maximum, app_c, starts)]),
        "appendix_o": np.where(missing, "unknown", envelope[_reduce(np.maximum, app_o, starts)]),
        "data_distance_km": fin_max(smp["data_distance_km"].to_numpy()),
        "data_age_h": fin_max(smp["data_age_h"].to_numpy()),
        "best_altitude_ft": np.where(has_best, alt_max + offs[best], np.nan),
        "best_accretion_mm": np.where(has_best, mat[np.arange(n_seg), best], np.nan),
        "lower_bound": status == 1,
        "large_drop_potential": category(ld_code // 4, LARGE_DROP_POTENTIAL_DTYPE),
        "large_drop_reason": np.where(missing, None, np.array(
            [LARGE_DROP_REASONS[int(c)] for c in ld_code % 4], dtype=object)),
    }, columns=SEGMENT_COLUMNS + EXTRA_COLUMNS)
    alternatives = pd.DataFrame({
        "_route": np.repeat(seg_route, offs.size), "segment": np.repeat(leg[starts] + 1, offs.size),
        "offset_ft": np.tile(offs, n_seg), "altitude_ft": (alt_max[:, None] + offs[None, :]).ravel(),
        "accretion_mm": mat.ravel()})
    return segments, alternatives


def _utc_seconds(t) -> pd.DatetimeIndex:
    """Seconds since 1970 as UTC times to the nearest second, ``datetime64[ns, UTC]``."""
    seconds = np.round(np.asarray(t, dtype=float)).astype(np.int64)
    return pd.DatetimeIndex(seconds.astype("datetime64[s]").astype("datetime64[ns]")).tz_localize("UTC")


def _iso(ts) -> str:
    return pd.Timestamp(ts).tz_convert("UTC").round("s").strftime("%Y-%m-%dT%H:%M:%SZ")


def _summary(route, ac, seg, step_s):
    """The route summary from its segments' columns (numpy arrays).

    Any segment without data makes the totals unknown (NaN) and the worst segment unknown (``worst_segment``
    None, ``worst_intensity`` ``unknown``; ``worst_known_*`` name the worst among the segments with data). With
    partial data the totals are lower bounds (``totals_lower_bound``).
    """
    from icing.physics.accretion import INTENSITY_NOTE

    codes, acc, data, inten = seg["code"], seg["accretion_mm"], seg["data"], seg["intensity"]
    n_missing = int((data == "missing").sum())
    n_partial = int((data == "partial").sum())
    worst_known = None
    if codes.size and codes.max() > 0:
        cand = np.flatnonzero(codes == codes.max())
        worst_known = int(cand[np.argmax(np.nan_to_num(acc[cand]))]) + 1
    worst_known_intensity = str(inten[worst_known - 1]) if worst_known else None
    if n_missing:
        worst, worst_intensity = None, "unknown"
    elif worst_known:
        worst, worst_intensity = worst_known, worst_known_intensity
    else:
        worst, worst_intensity = None, "unknown" if n_partial else "none"
    best = seg["best_accretion_mm"]
    unknown = float("nan")
    return {
        "route": route.name, "departure": _iso(route.departure), "aircraft": ac.name,
        "reference_body_diameter_m": ac.body_diameter_m, "time_step_s": step_s,
        "segments": int(codes.size),
        "total_icing_minutes": unknown if n_missing else float(np.sum(seg["icing_minutes"])),
        "total_accretion_mm": unknown if n_missing else float(np.sum(acc)),
        "totals_lower_bound": bool(n_partial and not n_missing),
        "worst_segment": worst,
        "worst_intensity": worst_intensity,
        "worst_known_segment": worst_known,
        "worst_known_intensity": worst_known_intensity,
        "best_altitude_plan_accretion_mm": float(best.sum()) if np.isfinite(best).all() else unknown,
        "segments_missing_data": n_missing, "segments_partial_data": n_partial,
        "data_complete": bool(n_missing == 0 and n_partial == 0),
        "notes": list(getattr(route, "notes", []) or []) + ([] if ac.icing_certified or not codes.size
                                                             or codes.max() <= 0 else [
            f"{ac.name} is not certified for flight in icing conditions: any supercooled liquid met on this route "
            "is beyond its approval, whatever the word; its words are those of the accretion rate alone, without "
            "the Appendix C hold of certified aircraft"]),
        "intensity_note": INTENSITY_NOTE,
        "caution": CAUTION,
    }

"""Route assessment: per-segment icing exposure, accretion, ice type, large drops, data status, alternatives.

The flow: the route's 4-D trajectory (:mod:`icing.route`) is sampled at a fixed time step; the atmosphere
source gives the diagnosed supercooled liquid (LWC, MVD, temperature) at each sample; the accretion model
(:mod:`icing.accretion`) turns it into ice growth on the aircraft's reference body at the sample's true
airspeed; samples are summed per segment (waypoint to waypoint). Where the source has no usable data the
sample is unknown, and a segment with unknown samples never reports ``none``.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from . import CAUTION, thermo
from .units import FT, NMI

__all__ = ["assess_route", "assess_routes", "Assessment", "SEGMENT_COLUMNS", "INTENSITIES", "ICE_TYPES",
           "LARGE_DROPS", "DATA_STATUS"]

INTENSITIES = ("none", "trace", "light", "moderate", "severe")
ICE_TYPES = ("none", "rime", "mixed", "glaze")
LARGE_DROPS = ("none", "drizzle", "rain")
DATA_STATUS = ("ok", "partial", "missing")
SEGMENT_COLUMNS = ["segment", "start", "end", "start_time", "end_time", "distance_nm", "altitude_ft_min",
                   "altitude_ft_max", "icing_minutes", "max_rate_mm_per_h", "accretion_mm", "intensity", "ice_type",
                   "large_drops", "data", "sources"]
EXTRA_COLUMNS = ["max_lwc_g_m3", "mvd_um", "min_temperature_c", "freezing_level_ft", "supercooled_top_ft",
                 "appendix_c", "appendix_o", "data_distance_km", "data_age_h", "best_altitude_ft",
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

    def to_dict(self) -> dict:
        seg = self.segments.copy()
        for c in ("start_time", "end_time"):
            seg[c] = seg[c].astype(str)
        records = json.loads(seg.to_json(orient="records", double_precision=6))
        return {"caution": self.caution, "summary": self.summary, "segments": records}

    def to_json(self, **kw) -> str:
        return json.dumps(self.to_dict(), indent=kw.pop("indent", 2), **kw)


def _source_of(soundings, **options):
    """An atmosphere source from a source, a list of profiles, or paths/directories of sounding files."""
    if hasattr(soundings, "sample"):
        return soundings
    from .sources import SoundingSource

    if isinstance(soundings, str) or hasattr(soundings, "__fspath__") or hasattr(soundings, "attrs"):
        soundings = [soundings]
    profiles = []
    for item in soundings:
        if isinstance(item, str) or hasattr(item, "__fspath__"):
            profiles.extend(_read_paths(item))
        else:
            profiles.append(item)
    keys = {"max_distance_km", "max_age_hours", "max_stations", "cold_limit", "airmass"}
    return SoundingSource(profiles, **{k: v for k, v in options.items() if k in keys})


def _read_paths(item):
    from pathlib import Path

    from .errors import SoundingFormatError
    from .io import read_profiles

    p = Path(item)
    if p.is_dir():
        files = sorted(f for f in p.iterdir() if f.is_file() and not f.name.startswith(".")
                       and f.suffix.lower() in (".csv", ".tsv", ".txt", ".nc", ".bufr", ".bin", ".temp", ".dat"))
        if not files:
            raise SoundingFormatError("no sounding files in this directory", file=p)
        out = []
        for f in files:
            try:
                out.extend(read_profiles(f))
            except SoundingFormatError as exc:
                if "not a known sounding format" in exc.reason:
                    continue  # e.g. a station table beside the soundings
                raise
        return out
    return read_profiles(p)


def _sample_atmosphere(source, traj, offset_ft=0.0):
    alt = np.maximum(traj["altitude_ft"].to_numpy() + offset_ft, -1000.0)
    fl = traj["flight_level"].to_numpy()
    pressure = np.where(fl, thermo.pressure_from_pressure_altitude_ft(alt), np.nan)
    height = np.where(fl, np.nan, alt * FT)
    times = traj["time_s"].to_numpy().astype("int64").astype("datetime64[s]")
    return source.sample(traj["latitude"].to_numpy(), traj["longitude"].to_numpy(), times, pressure=pressure,
                         height=height), alt


def _accrete(atm, tas_ms, body_diameter_m):
    from .accretion import accretion_core

    t_k = atm["temperature"] + thermo.T0
    lwc = np.where(np.isfinite(atm["lwc"]), atm["lwc"], 0.0)
    supercooled = (lwc > 0) & (atm["temperature"] < 0.0) & (np.nan_to_num(atm["supercooled"]) > 0.0)
    lwc = np.where(supercooled, lwc, 0.0)
    mvd = np.where(supercooled & np.isfinite(atm["mvd"]), atm["mvd"], 20.0)  # unused where lwc == 0
    p = np.where(np.isfinite(atm["pressure"]), atm["pressure"], 50000.0)
    t_safe = np.where(np.isfinite(t_k), t_k, 263.15)
    core = accretion_core(lwc / 1000.0, mvd * 1e-6, tas_ms, t_safe, p, np.full_like(lwc, body_diameter_m))
    rate = np.where(supercooled, np.nan_to_num(core["thickness_rate"]), 0.0) * 1000.0 * 3600.0  # mm/h
    ice = np.where(supercooled, np.asarray(core["ice_type"]), 0).astype(np.int8)
    missing = ~(atm["coverage"] > 0)
    rate = np.where(missing, np.nan, rate)
    return rate, ice, supercooled & ~missing


def _intensity(rate_mm_h):
    from .accretion import intensity_code

    return np.asarray(intensity_code(np.asarray(rate_mm_h) / 1000.0 / 3600.0))


def assess_route(route, soundings, aircraft="turboprop", *, step_s=60.0, departure=None,
                 offsets_ft=DEFAULT_OFFSETS_FT, use_winds=True, **options) -> Assessment:
    """Screen a route for airframe icing, segment by segment.

    Parameters
    ----------
    route : icing.route.Route or path
        The planned route (a CSV of waypoints or GeoJSON LineString; see :func:`icing.route.read_route`).
    soundings : atmosphere source, list of profiles, or paths/directories of sounding files
    aircraft : preset name, TOML path or :class:`icing.aircraft.Aircraft`
    step_s : float
        Trajectory time step (s), default 60.
    offsets_ft : sequence of float
        Altitude offsets (ft) tried as alternatives, each applied to the whole route.
    use_winds : bool
        Ground speed from true airspeed plus the sounding winds where known.
    options :
        ``max_distance_km``, ``max_age_hours``, ``max_stations`` (matching), ``cold_limit``, ``airmass``
        (diagnosis), ``transition_ft``.

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
    from .aircraft import get_aircraft
    from .route import DEFAULT_TRANSITION_FT, Route, plan_geometry, read_route, timed_samples, wind_points

    ac = get_aircraft(aircraft)
    source = _source_of(soundings, **options)
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
    trajs = [timed_samples(g, step_s, w) for g, w in zip(geos, winds, strict=True)]
    lengths = [len(t) for t in trajs]
    traj = pd.concat(trajs, ignore_index=True)
    traj["route"] = np.repeat(np.arange(len(trajs)), lengths)
    tas = traj["tas_ms"].to_numpy()
    atm, alt = _sample_atmosphere(source, traj)
    rate, ice, icing = _accrete(atm, tas, ac.body_diameter_m)
    dur = traj["duration_s"].to_numpy()
    samples = traj.assign(
        pressure_hpa=atm["pressure"] / 100.0, temperature_c=atm["temperature"], lwc_g_m3=atm["lwc"],
        mvd_um=atm["mvd"], large_drop=atm["large_drop"], coverage=atm["coverage"], in_icing=icing,
        rate_mm_per_h=rate, accretion_mm=rate * dur / 3600.0, ice_type=np.asarray(ICE_TYPES)[ice],
        freezing_level_ft=atm["freezing_level_m"] / FT, supercooled_top_ft=atm["supercooled_top_m"] / FT,
        data_distance_km=atm["distance_km"], data_age_h=atm["age_h"])
    # Alternatives: the whole route shifted by each offset; per segment the least accretion with full data.
    alt_acc = {}
    for off in offsets_ft:
        a2, alt2 = _sample_atmosphere(source, traj, off)
        r2, _, _ = _accrete(a2, tas, ac.body_diameter_m)
        cov_ok = a2["coverage"] >= FULL
        acc2 = np.where(cov_ok, r2 * dur / 3600.0, np.nan)
        acc2 = np.where(alt2 < MIN_ALTERNATIVE_FT, np.nan, acc2)
        alt_acc[off] = acc2
    used = atm["used"]
    out = []
    for i, r in enumerate(rts):
        sel = traj["route"].to_numpy() == i
        out.append(_summarise(r, ac, samples[sel].reset_index(drop=True), used[sel], source,
                              {k: v[sel] for k, v in alt_acc.items()}, step_s))
    return out


def _summarise(route, ac, smp, used, source, alt_acc, step_s):
    from .envelopes import appendix_c_status, appendix_o_status

    rows = []
    alt_rows = []
    app_c = np.asarray(appendix_c_status(smp["lwc_g_m3"].fillna(0).to_numpy(), smp["mvd_um"].fillna(0).to_numpy(),
                                         smp["temperature_c"].to_numpy(), smp["altitude_ft"].to_numpy()))
    app_c = np.where(smp["in_icing"].to_numpy(), app_c, "n/a")
    app_o = np.asarray(appendix_o_status(np.nan_to_num(smp["large_drop"].to_numpy()).astype(int),
                                         smp["altitude_ft"].to_numpy()))
    codes = _intensity(smp["rate_mm_per_h"].to_numpy())
    wps = route.waypoints
    for k in range(len(wps) - 1):
        m = smp["leg"].to_numpy() == k
        seg = smp[m]
        cov = seg["coverage"].to_numpy()
        if np.all(cov >= FULL):
            data = "ok"
        elif np.all(cov <= 0):
            data = "missing"
        else:
            data = "partial"
        icing = seg["in_icing"].to_numpy()
        rate = seg["rate_mm_per_h"].to_numpy()
        known_rate = np.where(np.isfinite(rate), rate, 0.0)
        code = int(np.max(codes[m])) if m.any() else -1
        if data == "missing" or (data == "partial" and code <= 0):
            intensity = "unknown"  # unknown is never reported as none
        else:
            intensity = INTENSITIES[max(code, 0)]
        ice_codes = [ICE_TYPES.index(x) for x in seg["ice_type"]]
        ice = ICE_TYPES[max(ice_codes)] if ice_codes else "none"
        ld = seg["large_drop"].to_numpy()
        ld_code = int(np.nanmax(ld)) if np.isfinite(ld).any() else 0
        idx = np.flatnonzero(used[m].any(axis=0))
        sources = ";".join(source.labels[idx]) if hasattr(source, "labels") else ""
        tot = {off: np.nansum(v[m]) if np.isfinite(v[m]).all() else np.nan for off, v in alt_acc.items()}
        plan_acc = float(np.sum(known_rate * seg["duration_s"].to_numpy() / 3600.0))
        options = {0.0: plan_acc if data == "ok" else np.nan, **tot}
        best_off = min((o for o in options if np.isfinite(options[o])), key=lambda o: (options[o], abs(o)),
                       default=None)
        alt_ref = float(seg["altitude_ft"].max())  # the segment's highest planned altitude, shifted by the offset
        for off, v in options.items():
            alt_rows.append({"segment": k + 1, "offset_ft": off, "altitude_ft": alt_ref + off, "accretion_mm": v})
        icing_any = icing.any()
        rows.append({
            "segment": k + 1, "start": wps[k].name, "end": wps[k + 1].name,
            "start_time": _iso(seg["time"].iloc[0] - pd.Timedelta(seconds=seg["duration_s"].iloc[0] / 2)),
            "end_time": _iso(seg["time"].iloc[-1] + pd.Timedelta(seconds=seg["duration_s"].iloc[-1] / 2)),
            "distance_nm": float(route.leg_distances_m()[k] / NMI),
            "altitude_ft_min": float(seg["altitude_ft"].min()), "altitude_ft_max": float(seg["altitude_ft"].max()),
            "icing_minutes": float(seg["duration_s"].to_numpy()[icing].sum() / 60.0),
            "max_rate_mm_per_h": float(np.max(known_rate)) if known_rate.size else 0.0,
            "accretion_mm": plan_acc,
            "intensity": intensity, "ice_type": ice, "large_drops": LARGE_DROPS[ld_code], "data": data,
            "sources": sources,
            "max_lwc_g_m3": float(np.nanmax(np.where(icing, seg["lwc_g_m3"], 0.0))) if icing_any else 0.0,
            "mvd_um": float(np.nanmean(seg["mvd_um"].to_numpy()[icing])) if icing_any else np.nan,
            "min_temperature_c": float(np.nanmin(seg["temperature_c"])) if np.isfinite(seg["temperature_c"]).any()
            else np.nan,
            "freezing_level_ft": float(np.nanmean(seg["freezing_level_ft"]))
            if np.isfinite(seg["freezing_level_ft"]).any() else np.nan,
            "supercooled_top_ft": float(np.nanmax(seg["supercooled_top_ft"]))
            if np.isfinite(seg["supercooled_top_ft"]).any() else np.nan,
            "appendix_c": "beyond" if (app_c[m] == "beyond").any() else "within" if (app_c[m] == "within").any()
            else "n/a",
            "appendix_o": "beyond" if (app_o[m] == "beyond").any() else "within" if (app_o[m] == "within").any()
            else "n/a",
            "data_distance_km": float(np.nanmax(seg["data_distance_km"]))
            if np.isfinite(seg["data_distance_km"]).any() else np.nan,
            "data_age_h": float(np.nanmax(seg["data_age_h"])) if np.isfinite(seg["data_age_h"]).any() else np.nan,
            "best_altitude_ft": alt_ref + best_off if best_off is not None else np.nan,
            "best_accretion_mm": options[best_off] if best_off is not None else np.nan,
        })
    segments = pd.DataFrame(rows, columns=SEGMENT_COLUMNS + EXTRA_COLUMNS)
    alternatives = pd.DataFrame(alt_rows)
    summary = _summary(route, ac, segments, alternatives, step_s)
    return Assessment(segments=segments, summary=summary, samples=smp, alternatives=alternatives)


def _iso(ts) -> str:
    return pd.Timestamp(ts).tz_convert("UTC").round("s").strftime("%Y-%m-%dT%H:%M:%SZ")


def _summary(route, ac, segments, alternatives, step_s):
    from .accretion import INTENSITY_NOTE

    known = segments["data"] != "missing"
    worst = None
    if len(segments):
        order = segments.assign(_c=segments["intensity"].map(
            {"unknown": -1, **{k: i for i, k in enumerate(INTENSITIES)}})).sort_values(
            ["_c", "accretion_mm"], ascending=False)
        top = order.iloc[0]
        if top["_c"] > 0:
            worst = int(top["segment"])
    best_plan = np.nan
    if len(alternatives):
        per = alternatives.dropna(subset=["accretion_mm"]).groupby("segment")["accretion_mm"].min()
        if len(per) == len(segments):
            best_plan = float(per.sum())
    n_missing = int((segments["data"] == "missing").sum())
    n_partial = int((segments["data"] == "partial").sum())
    return {
        "route": route.name, "departure": _iso(route.departure), "aircraft": ac.name,
        "reference_body_diameter_m": ac.body_diameter_m, "time_step_s": step_s,
        "segments": int(len(segments)),
        "total_icing_minutes": float(segments["icing_minutes"].sum()),
        "total_accretion_mm": float(segments["accretion_mm"].sum()),
        "worst_segment": worst,
        "worst_intensity": segments.loc[segments["segment"] == worst, "intensity"].iloc[0] if worst else
        ("unknown" if n_missing or n_partial else "none"),
        "best_altitude_plan_accretion_mm": best_plan,
        "segments_missing_data": n_missing, "segments_partial_data": n_partial,
        "data_complete": bool(known.all() and n_partial == 0),
        "intensity_note": INTENSITY_NOTE,
        "caution": CAUTION,
    }

"""Matching pilot reports to the diagnosis of an atmosphere source, and scoring the match.

Each report is matched to the source's diagnosis at its place (latitude, longitude), level (its flight level
as a pressure in the standard atmosphere, :func:`icing.physics.thermo.flight_level_to_pressure`) and time,
by the source's own ``sample`` (a :class:`icing.flight.sources.SoundingSource` or a model grid source: the
same interpolation as a route). The diagnosis says *icing* where supercooled liquid is diagnosed there
(``supercooled`` > 0, ``lwc`` > 0, below 0 degC: the same rule as the route screening), *no icing* only where the
data are complete (coverage 1) and show none, and *unknown* otherwise. Unknown is reported separately and never
counted as a correct no-icing (nor as a miss or a hit).

The forecast intensity is the word of the accretion rate on the aircraft's reference body at its true
airspeed at that level (:func:`icing.physics.accretion.accretion_core`, :func:`icing.physics.accretion.
intensity_code`), held to the trade's definitions (:func:`icing.physics.envelopes.intensity_for_conditions`),
as in the route screening.

ADVISORY ONLY: a verification against pilot reports says how the guidance did on past cases; pilot reports are
themselves subjective and biased towards where aircraft fly and towards icing (Jolliffe and Stephenson 2012
discuss such sampling), so the scores are no certification of the guidance.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from icing.errors import ConfigError
from icing.verify.pireps import INTENSITY_ORDER
from icing.verify.scores import (
    ContingencyTable,
    contingency_table,
    multicategory_scores,
    multicategory_table,
    reliability_table,
)

__all__ = ["verify_reports", "Verification", "DATA_STATUS", "MATCH_COLUMNS", "DEFAULT_MAX_MINUTES"]

# Data status of a match: complete, partly covered, no data, data too far in time, report not usable.
DATA_STATUS = ("ok", "partial", "missing", "stale", "unusable")
# Half the usual 12-hourly interval of soundings: a report between two ascents is always bracketed.
DEFAULT_MAX_MINUTES = 360.0
FULL = 0.999  # coverage at or above this counts as complete data (as the route screening)
MATCH_COLUMNS = ["line", "time", "latitude", "longitude", "flight_level", "pressure_hpa", "observed",
                 "observed_intensity", "forecast", "forecast_intensity", "data", "counted", "reason",
                 "temperature_c", "lwc_g_m3", "mvd_um", "coverage", "data_age_h", "data_distance_km"]


@dataclass
class Verification:
    """The result of :func:`verify_reports`.

    ``matches``: one row a report (:data:`MATCH_COLUMNS`, then any ``p_*`` shares of the source); ``table``: the
    2x2 :class:`~icing.verify.scores.ContingencyTable` of icing / no icing over the counted reports;
    ``intensity_table``: the 5x5 table of intensity classes (rows forecast, columns observed); ``scores``: the
    measures of both (``intensity`` holds the multi-category ones) and the counts of unknown and unusable
    reports; ``reliability``: ``{p_name: reliability table}`` for each ``p_*`` share the source gives;
    ``skipped``: reports the reader skipped (with their reasons); ``notes``; ``caution``.

    Unpacks as ``matches, scores = verify_reports(...)``.
    """

    matches: object
    table: ContingencyTable
    intensity_table: object
    scores: dict
    reliability: dict = field(default_factory=dict)
    skipped: list = field(default_factory=list)
    notes: list = field(default_factory=list)
    caution: str = ""

    def __iter__(self):
        return iter((self.matches, self.scores))

    def to_dict(self) -> dict:
        """Scores, reliability tables, skipped reports, notes and caution as JSON-ready values (NaN as None)."""

        def clean(v):
            if isinstance(v, dict):
                return {k: clean(x) for k, x in v.items()}
            if isinstance(v, list | tuple):
                return [clean(x) for x in v]
            if isinstance(v, np.generic):
                v = v.item()
            return None if isinstance(v, float) and v != v else v

        rel = {k: {"bins": t.to_dict(orient="records"), **t.attrs} for k, t in self.reliability.items()}
        return clean({"scores": self.scores, "intensity_table": self.intensity_table.to_dict(orient="index"),
                      "reliability": rel, "skipped": self.skipped, "notes": self.notes, "caution": self.caution})

    def write(self, out) -> list:
        """Write ``matches.csv`` (one row a report), ``scores.json`` (:meth:`to_dict`) and, where the source gives
        ``p_*`` shares, ``reliability.png`` (the reliability diagram) into the directory ``out``; returns the
        paths written."""
        import json
        from pathlib import Path

        out = Path(out)
        out.mkdir(parents=True, exist_ok=True)
        paths = [out / "matches.csv", out / "scores.json"]
        self.matches.to_csv(paths[0], index=False)
        paths[1].write_text(json.dumps(self.to_dict(), indent=1))
        if self.reliability:
            import matplotlib

            matplotlib.use("Agg", force=False)
            import matplotlib.pyplot as plt

            from icing.verify.scores import plot_reliability

            ax = plot_reliability(self.reliability)
            ax.set_title("Reliability of the diagnosed shares against pilot reports", fontsize="small")
            paths.append(out / "reliability.png")
            ax.figure.savefig(paths[-1], dpi=120, bbox_inches="tight")
            plt.close(ax.figure)
        return paths

    def to_text(self) -> str:
        """The tables and measures as plain text (for the command line)."""
        s = self.scores
        t = self.table

        def f(x):
            return "n/a" if x != x else f"{x:.3f}"

        lines = [f"Reports matched: {s['reports']} (counted {t.n}, unknown {s['unknown']}, "
                 f"unusable {s['unusable']}, skipped when read {len(self.skipped)})", "",
                 "Icing / no icing (rows: diagnosis; columns: pilot reports)",
                 f"{'':>14}{'observed yes':>14}{'observed no':>14}",
                 f"{'forecast yes':>14}{t.a:>14d}{t.b:>14d}", f"{'forecast no':>14}{t.c:>14d}{t.d:>14d}", "",
                 f"POD {f(t.pod)}  FAR {f(t.far)}  CSI {f(t.csi)}  TSS {f(t.tss)}  bias {f(t.bias)}  "
                 f"HSS {f(t.hss)}", "", "Intensity (rows: diagnosis; columns: pilot reports)"]
        tab = self.intensity_table
        lines.append(f"{'':>10}" + "".join(f"{c:>10}" for c in tab.columns))
        for name, row in tab.iterrows():
            lines.append(f"{name:>10}" + "".join(f"{int(v):>10d}" for v in row.to_numpy()))
        m = s["intensity"]
        lines += ["", f"proportion correct {f(m['proportion_correct'])}  HSS {f(m['hss'])}  PSS {f(m['pss'])}  "
                  f"Gerrity {f(m['gerrity'])}"]
        if m["n"] and m["gerrity"] != m["gerrity"]:
            lines.append("(Gerrity n/a: a class at an end of the scale was never reported)")
        for name, rel in self.reliability.items():
            lines += ["", f"Reliability of {name} (Brier {f(rel.attrs['brier'])})",
                      f"{'bin':>12}{'count':>8}{'forecast':>10}{'observed':>10}"]
            for _, r in rel.iterrows():
                lines.append(f"{r['lower']:>5.1f}-{r['upper']:<6.1f}{int(r['count']):>8d}"
                             f"{f(r['mean_probability']):>10}{f(r['observed_frequency']):>10}")
        for sk in self.skipped:
            where = ", ".join(x for x in (sk.get("file"), f"line {sk.get('line')}") if x)
            lines.append(f"skipped: {where}: {sk.get('reason')}")
        lines += [*self.notes, "", self.caution]
        return "\n".join(lines)


def _reports_frame(reports):
    import pandas as pd

    frame = reports if isinstance(reports, pd.DataFrame) else pd.DataFrame(list(reports))
    need = ("latitude", "longitude", "time", "flight_level", "icing", "intensity")
    missing = [c for c in need if c not in frame.columns]
    if missing:
        raise ConfigError(f"reports lack the columns {', '.join(missing)} (read them with icing.verify.read_pireps)")
    return frame


def _forecast_intensity(atm, known_icing, altitude_ft, aircraft):
    """Intensity codes (0-4, -1 unknown) where the diagnosis has icing, from the accretion rate on the
    aircraft's reference body at its cruise true airspeed at that altitude."""
    from icing.physics import thermo
    from icing.physics.accretion import accretion_core, intensity_code
    from icing.physics.envelopes import intensity_for_conditions

    n = known_icing.size
    code = np.full(n, -1, dtype=np.int8)
    idx = np.flatnonzero(known_icing)
    if idx.size == 0:
        return code
    tas = np.asarray(aircraft.true_airspeed_ms("cruise", altitude_ft[idx]), dtype=float).reshape(-1)
    t = atm["temperature"][idx]
    core = accretion_core(atm["lwc"][idx] / 1000.0, atm["mvd"][idx] * 1e-6, tas, t + thermo.T0,
                          atm["pressure"][idx], np.full(idx.size, aircraft.body_diameter_m))
    rate_code = intensity_code(core["thickness_rate"])
    large = atm.get("large_drop", np.zeros(n))[idx]
    code[idx] = intensity_for_conditions(rate_code, atm["lwc"][idx], atm["mvd"][idx], t, large,
                                         aircraft.icing_certified)
    return code


def _report_spread(source, aircraft, lat, lon, times, pressure, fl, idx, n, members, seed):
    """``p_light``, ``p_moderate``, ``p_severe`` (n,) at the usable reports ``idx``: each report one segment of a
    single sample, scored as a route's segments are (:func:`icing.flight.assess.member_outcome`)."""
    from functools import partial

    from icing.flight.assess import member_outcome
    from icing.flight.spread import LEVELS, route_spread

    points = {"latitude": lat, "longitude": lon, "time": times, "pressure": pressure,
              "height": np.full(lat.size, np.nan)}
    tas = np.asarray(aircraft.true_airspeed_ms("cruise", np.nan_to_num(fl) * 100.0), dtype=float).reshape(-1)
    outcome = partial(member_outcome, tas_ms=tas, duration_s=np.full(lat.size, 60.0), starts=np.arange(lat.size),
                      body_diameter_m=aircraft.body_diameter_m, icing_certified=aircraft.icing_certified)
    ensemble = route_spread(source, points, outcome, members=members, seed=seed)
    out = {}
    for k in LEVELS:
        full = np.full(n, np.nan)
        full[idx] = ensemble["columns"][k]
        out[k] = full
    return out


def _p_event(name, observed, observed_intensity):
    """The observed event a ``p_*`` share forecasts: ``p_icing``/``p_any`` any icing; ``p_<word>`` (trace,
    light, moderate, severe) icing reported at that word or worse (the shares of members at that intensity or
    worse of ``assess_route(spread=True)``); a null report (/IC NEG) is no event."""
    word = name[2:]
    if word in ("icing", "any"):
        return observed
    if word in INTENSITY_ORDER and word != "none":
        rank = INTENSITY_ORDER.index(word)
        return [False if o is False else (None if (w is None or w != w or w not in INTENSITY_ORDER)
                                         else INTENSITY_ORDER.index(w) >= rank)
                for o, w in zip(observed, observed_intensity, strict=True)]
    return None


def verify_reports(reports, source, aircraft=None, *, max_minutes=DEFAULT_MAX_MINUTES, bins=10, spread=False,
                   members=30, seed=0) -> Verification:
    """Verify the diagnosis of an atmosphere source against pilot reports.

    Parameters
    ----------
    reports : DataFrame or list of dicts
        Pilot reports as read by :func:`icing.verify.pireps.read_pireps` (``latitude``, ``longitude``, ``time``
        (UTC), ``flight_level``, ``icing`` (True, False for ``/IC NEG``, missing without ``/IC``), ``intensity``;
        optional ``icing_base_fl``/``icing_top_fl``: where the flight level is unknown, the middle of that layer
        is the report's level).
    source : atmosphere source
        Anything with ``sample(latitude, longitude, time, pressure=..., height=...)`` (a sounding or model
        source); build one with :func:`icing.flight.assess.atmosphere_source`.
    aircraft : preset name, TOML path or Aircraft, optional
        For the forecast intensity (the reference body and speed); default ``"turboprop"``.
    max_minutes : float
        A report whose nearest data used by the source are more than this many minutes from it in time is
        ``stale``: unknown (default :data:`DEFAULT_MAX_MINUTES`, 6 h).
    bins : int
        Number of equal probability bins of the reliability tables.
    spread, members, seed :
        With ``spread=True`` the chain also runs over the seeded ensemble of its assumptions
        (:func:`icing.flight.spread.route_spread`, as ``assess_route(spread=True)``; a
        :class:`~icing.flight.spread.ModelEnsemble` over its members) at every report, whose shares ``p_light``,
        ``p_moderate`` and ``p_severe`` (members at that intensity or worse) then go into the matches and the
        reliability tables against the reported intensities.

    Returns
    -------
    Verification
        Unpacks as ``matches, scores``. A report counts in the tables only with a known observation (an ``/IC``
        field), a known level and time, and a known diagnosis; a report with partial data counts only where the
        diagnosis already shows icing in the data it has (``partial``), as a partial segment of a route does.
    """
    import pandas as pd

    from icing import CAUTION
    from icing.flight.aircraft import get_aircraft
    from icing.physics import thermo

    if not (isinstance(max_minutes, int | float) and np.isfinite(max_minutes) and max_minutes >= 0):
        raise ConfigError(f"max_minutes must be a number of minutes >= 0, not {max_minutes!r}")
    ac = get_aircraft("turboprop" if aircraft is None else aircraft)
    frame = _reports_frame(reports)
    n = len(frame)
    lat = pd.to_numeric(frame["latitude"], errors="coerce").to_numpy(dtype=float)
    lon = pd.to_numeric(frame["longitude"], errors="coerce").to_numpy(dtype=float)
    times = pd.to_datetime(frame["time"], utc=True)
    fl = pd.to_numeric(frame["flight_level"], errors="coerce").to_numpy(dtype=float)
    # Without a flight level (UNKN, DURC, DURD) the icing layer of /IC, where given, places the report: its middle.
    from_layer = np.zeros(n, dtype=bool)
    if "icing_base_fl" in frame and "icing_top_fl" in frame:
        mid = (pd.to_numeric(frame["icing_base_fl"], errors="coerce").to_numpy(dtype=float)
               + pd.to_numeric(frame["icing_top_fl"], errors="coerce").to_numpy(dtype=float)) / 2.0
        from_layer = ~np.isfinite(fl) & np.isfinite(mid)
        fl = np.where(from_layer, mid, fl)
    observed = [None if (v is None or v is pd.NA or v != v) else bool(v) for v in frame["icing"]]
    obs_int = [None if (v is None or v is pd.NA or v != v) else str(v) for v in frame["intensity"]]

    reason = np.array([""] * n, dtype=object)
    usable = np.ones(n, dtype=bool)
    for i in range(n):
        why = []
        if observed[i] is None:
            why.append("no /IC field: the report says nothing about icing")
        if not (np.isfinite(lat[i]) and np.isfinite(lon[i])):
            why.append("no position")
        if not np.isfinite(fl[i]):
            why.append("flight level unknown")
        if pd.isna(times.iloc[i]):
            why.append("time unknown (give the date)")
        if why:
            usable[i] = False
            reason[i] = "; ".join(why)

    idx = np.flatnonzero(usable)
    atm = {}
    pressure = np.where(np.isfinite(fl), thermo.flight_level_to_pressure(np.nan_to_num(fl)), np.nan)
    if idx.size:
        t64 = times.iloc[idx].dt.tz_convert("UTC").dt.tz_localize(None).to_numpy().astype("datetime64[s]")
        sampled = source.sample(lat[idx], lon[idx], t64, pressure=pressure[idx])
        for k, v in sampled.items():
            arr = np.asarray(v)
            if arr.ndim == 1 and arr.size == idx.size and np.issubdtype(arr.dtype, np.number):
                full = np.full(n, np.nan)
                full[idx] = arr
                atm[k] = full
    for k in ("coverage", "temperature", "lwc", "mvd", "supercooled", "pressure", "age_h", "distance_km",
              "large_drop"):
        atm.setdefault(k, np.full(n, np.nan))
    atm["pressure"] = np.where(np.isfinite(atm["pressure"]), atm["pressure"], pressure)
    cov = np.nan_to_num(atm["coverage"])
    lwc = np.nan_to_num(atm["lwc"])
    cold = np.nan_to_num(atm["temperature"], nan=1.0) < 0.0
    # icing where there is supercooled cloud liquid, or supercooled large drops (freezing rain in clear air too)
    icing_here = usable & (cov > 0) & cold & (((lwc > 0) & (np.nan_to_num(atm["supercooled"]) > 0))
                                              | (np.nan_to_num(atm["large_drop"]) > 0))
    if spread and idx.size:
        atm.update(_report_spread(source, ac, lat[idx], lon[idx], t64, pressure[idx], fl[idx], idx, n, members,
                                  seed))
    stale = usable & (cov > 0) & (atm["age_h"] * 60.0 > max_minutes)
    data = np.where(~usable, "unusable", np.where(cov <= 0, "missing", np.where(
        stale, "stale", np.where(cov >= FULL, "ok", "partial"))))
    forecast = np.where(data == "stale", None, np.where(icing_here, True, np.where(data == "ok", False, None)))
    for i in np.flatnonzero(usable):
        if data[i] == "missing":
            reason[i] = "no data at the report's place, level and time"
        elif data[i] == "stale":
            reason[i] = f"nearest data {atm['age_h'][i] * 60:.0f} min from the report (more than {max_minutes:g})"
        elif data[i] == "partial" and forecast[i] is None:
            reason[i] = "partial data without supercooled liquid: no icing cannot be told"
    for i in np.flatnonzero(from_layer & usable):
        reason[i] = "; ".join(x for x in (reason[i], "level: the middle of the icing layer in /IC") if x)
    counted = np.array([forecast[i] is not None and observed[i] is not None and usable[i] for i in range(n)])

    code = _forecast_intensity(atm, icing_here & (data != "stale"), np.nan_to_num(fl) * 100.0, ac)
    fc_int = [None] * n
    for i in range(n):
        if forecast[i] is True and code[i] >= 0:
            fc_int[i] = INTENSITY_ORDER[code[i]]
        elif forecast[i] is False:
            fc_int[i] = "none"

    cat = pd.CategoricalDtype(list(INTENSITY_ORDER), ordered=True)
    matches = pd.DataFrame({
        "line": frame["line"].to_numpy() if "line" in frame else np.arange(1, n + 1),
        "time": times.reset_index(drop=True),
        "latitude": lat, "longitude": lon, "flight_level": fl, "pressure_hpa": pressure / 100.0,
        "observed": pd.array(observed, dtype="boolean"),
        "observed_intensity": pd.Categorical(obs_int, dtype=cat),
        "forecast": pd.array(list(forecast), dtype="boolean"),
        "forecast_intensity": pd.Categorical(fc_int, dtype=cat),
        "data": pd.Categorical(data, categories=list(DATA_STATUS)),
        "counted": counted, "reason": reason.astype(str),
        "temperature_c": atm["temperature"], "lwc_g_m3": np.where(np.isfinite(atm["coverage"]), atm["lwc"], np.nan),
        "mvd_um": atm["mvd"], "coverage": atm["coverage"], "data_age_h": atm["age_h"],
        "data_distance_km": atm["distance_km"]})
    p_names = sorted(k for k in atm if k.startswith("p_"))
    for k in p_names:
        matches[k] = np.where(counted | (usable & (data != "stale")), atm[k], np.nan)

    sel = counted
    table = contingency_table([observed[i] for i in np.flatnonzero(sel)], [forecast[i] for i in np.flatnonzero(sel)])
    both = [i for i in np.flatnonzero(sel) if obs_int[i] is not None and fc_int[i] is not None]
    itable = multicategory_table([obs_int[i] for i in both], [fc_int[i] for i in both], INTENSITY_ORDER)
    reliability, notes = {}, []
    for k in p_names:
        event = _p_event(k, observed, obs_int)
        if event is None:
            notes.append(f"{k}: no observed event known for this share; no reliability table")
            continue
        rows = np.flatnonzero(usable & (data != "stale") & (data != "missing"))
        reliability[k] = reliability_table(atm[k][rows], [event[i] for i in rows], bins=bins)
    scores = {**table.scores(), "intensity": multicategory_scores(itable.to_numpy()), "reports": n,
              "unknown": int(np.sum(usable & ~counted)), "unusable": int(np.sum(~usable))}
    if n and not counted.any():
        notes.append("no report could be counted: every one is unknown or unusable (see the reasons)")
    skipped = list(getattr(frame, "attrs", {}).get("skipped", []))
    return Verification(matches=matches, table=table, intensity_table=itable, scores=scores,
                        reliability=reliability, skipped=skipped, notes=notes, caution=CAUTION)

"""When to go: the same route screened for each departure time of a window, and the best window marked.

The window is ``start``, ``end`` and ``step``: departures at ``start``, ``start + step``, ... up to ``end``
(``end`` itself included when it falls on the step). The atmosphere source is built once and
:func:`icing.flight.assess.assess_routes` screens every departure in one vectorised pass: the physics is the
route assessment's own, nothing here computes ice. What the source cannot cover at a departure's times (a
departure after the last report, beyond ``max_age_hours``, or outside a model's time range) is ``missing``, and
such a departure is never the best one.
"""

from __future__ import annotations

import datetime as _dt
import re
from dataclasses import replace

import numpy as np
import pandas as pd

from icing import CAUTION
from icing.errors import RouteFormatError
from icing.flight.assess import (
    DATA_DTYPE,
    DEFAULT_OFFSETS_FT,
    INTENSITIES,
    INTENSITY_DTYPE,
    ROUTE_OPTIONS,
    assess_routes,
    atmosphere_source,
)

__all__ = ["screen_departures", "assess_departures", "departure_table", "departure_times", "parse_departures",
           "parse_step", "DEPARTURE_COLUMNS", "MAX_DEPARTURES", "BEST_RULE"]

# Columns of the departure table, in order (see screen_departures for their meaning and dtypes).
DEPARTURE_COLUMNS = ["departure", "arrival", "total_accretion_mm", "total_icing_minutes", "worst_intensity",
                     "worst_segment", "worst_leg", "large_drops", "data", "segments_missing_data",
                     "segments_partial_data", "totals_lower_bound", "max_data_age_h", "rank", "best"]
# Our own limit: a window of more departures is most likely a mistyped step (e.g. PT1M over a day); each
# departure is a whole route in the vectorised pass.
MAX_DEPARTURES = 500
BEST_RULE = ("the departures with complete data ranked by the lowest worst intensity first, then no large drops "
             "before large drops, then the least total accretion, then the fewest minutes in icing (accretion and "
             "minutes compared as the table shows them: 0.01 mm, 0.1 min); every departure tied on all four is "
             "best. A departure with missing or partial data is never best (unknown is never safe).")
# ISO 8601 durations with fixed lengths: weeks, days, hours, minutes, seconds (whole numbers). Months and years
# have no fixed length and are refused.
_ISO_DURATION = re.compile(r"P(?:(?P<w>\d+)W)?(?:(?P<d>\d+)D)?(?:T(?:(?P<h>\d+)H)?(?:(?P<m>\d+)M)?(?:(?P<s>\d+)S)?)?")
# A number and one unit, in pandas' spelling of offsets: 30min, 1h, 90s, 1d.
_OFFSET = re.compile(r"(?P<n>\d+)\s*(?P<u>s|sec|min|h|d)")
_OFFSET_SECONDS = {"s": 1, "sec": 1, "min": 60, "h": 3600, "d": 86400}


def _error(reason):
    return RouteFormatError(f"departures: {reason}")


def parse_step(step) -> pd.Timedelta:
    """The step between departures as a :class:`pandas.Timedelta`.

    Accepted: an ISO 8601 duration of weeks, days, hours, minutes and seconds in whole numbers (``PT30M``,
    ``PT1H30M``, ``P1D``); a number and a unit in pandas' offset spelling (``30min``, ``1h``, ``90s``, ``1d``);
    or a ``datetime.timedelta`` / ``pandas.Timedelta``. The step must be positive. Months and years (``P1M``,
    ``P1Y``) are refused: they have no fixed length (and pandas would read ``P1M`` as one minute).

    Raises
    ------
    RouteFormatError
        For anything else, naming the value and the forms accepted.
    """
    forms = "give an ISO 8601 duration like PT30M or PT1H, or a number and unit like 30min or 1h"
    if isinstance(step, _dt.timedelta | pd.Timedelta | np.timedelta64) and not isinstance(step, bool):
        td = pd.Timedelta(step)
    elif isinstance(step, str):
        text = step.strip()
        iso = _ISO_DURATION.fullmatch(text.upper())
        off = _OFFSET.fullmatch(text)
        if iso and any(iso.group(k) for k in "wdhms") and not text.upper().endswith("T"):
            g = {k: int(iso.group(k) or 0) for k in "wdhms"}
            td = pd.Timedelta(weeks=g["w"], days=g["d"], hours=g["h"], minutes=g["m"], seconds=g["s"])
        elif off:
            td = pd.Timedelta(seconds=int(off.group("n")) * _OFFSET_SECONDS[off.group("u")])
        elif text.upper().startswith("P") and re.search(r"\d+[YM]", text.upper()[1:].split("T")[0]):
            raise _error(f"step {step!r}: months and years have no fixed length; {forms}")
        else:
            raise _error(f"step {step!r} is not a duration; {forms}")
    else:
        raise _error(f"step {step!r} is not a duration; {forms}")
    if pd.isna(td) or td <= pd.Timedelta(0):
        raise _error(f"step {step!r} must be longer than zero; {forms}")
    return td


def _time(value, what) -> pd.Timestamp:
    """A UTC Timestamp from ISO 8601 text or a time object (a time without a zone is UTC, as in route files)."""
    example = "like 2026-01-15T06:00Z"
    if isinstance(value, bool | int | float | np.integer | np.floating) or value is None:
        raise _error(f"{what} {value!r} is not an ISO 8601 time ({example})")
    try:
        ts = pd.Timestamp(value.strip() if isinstance(value, str) else value)
        if pd.isna(ts):
            raise ValueError
        ts = ts.tz_localize("UTC") if ts.tzinfo is None else ts.tz_convert("UTC")
    except (ValueError, TypeError, OverflowError, pd.errors.OutOfBoundsDatetime):
        raise _error(f"{what} {value!r} is not an ISO 8601 time ({example})") from None
    return ts.as_unit("ns")


def departure_times(start, end, step) -> pd.DatetimeIndex:
    """The departures of a window: ``start``, ``start + step``, ... up to and including ``end``.

    ``start`` and ``end`` are ISO 8601 times (UTC unless they say otherwise; a time without a zone is UTC) or time
    objects; ``step`` as :func:`parse_step` reads it. ``end`` is a departure when it falls on the step; otherwise
    the last departure is the last one before it. ``start == end`` gives one departure.

    Raises
    ------
    RouteFormatError
        A time that is not a time, ``end`` before ``start``, a step that is not a positive duration, or more
        than :data:`MAX_DEPARTURES` departures.
    """
    t0, t1 = _time(start, "start"), _time(end, "end")
    td = parse_step(step)
    if t1 < t0:
        raise _error(f"end {t1:%Y-%m-%dT%H:%MZ} is before start {t0:%Y-%m-%dT%H:%MZ}")
    n = int((t1 - t0) // td) + 1
    if n > MAX_DEPARTURES:
        raise _error(f"{n} departures from {t0:%Y-%m-%dT%H:%MZ} to {t1:%Y-%m-%dT%H:%MZ} every "
                     f"{_duration_text(td)}: at most {MAX_DEPARTURES}; give a longer step or a shorter window")
    return pd.DatetimeIndex([t0 + k * td for k in range(n)]).as_unit("ns")


def parse_departures(text) -> tuple[pd.Timestamp, pd.Timestamp, pd.Timedelta]:
    """``START/END/STEP`` (e.g. ``2026-01-15T03:00Z/2026-01-15T09:00Z/PT30M`` or ``.../30min``) as
    ``(start, end, step)``, each checked as in :func:`departure_times`."""
    if not isinstance(text, str) or text.count("/") != 2:
        raise _error(f"{text!r}: write START/END/STEP, e.g. 2026-01-15T03:00Z/2026-01-15T09:00Z/PT30M")
    a, b, c = (x.strip() for x in text.split("/"))
    times = departure_times(a, b, c)  # checks everything, the count included
    return times[0], _time(b, "end"), parse_step(c)


def _duration_text(td: pd.Timedelta) -> str:
    """A step as an ISO 8601 duration (``PT30M``, ``P1DT2H``)."""
    s = int(td.total_seconds())
    d, s = divmod(s, 86400)
    h, s = divmod(s, 3600)
    m, s = divmod(s, 60)
    time = "".join(f"{v}{u}" for v, u in ((h, "H"), (m, "M"), (s, "S")) if v)
    return "P" + (f"{d}D" if d else "") + (f"T{time}" if time else "") if (d or time) else "PT0S"


def assess_departures(route, soundings, aircraft="turboprop", departures=(), *, waypoints=None, step_s=60.0,
                      offsets_ft=DEFAULT_OFFSETS_FT, use_winds=True, **options):
    """One :class:`icing.flight.assess.Assessment` per departure time, in the order given.

    The route (a :class:`icing.flight.route.Route` or a route file, ``waypoints`` for an ICAO Item 15 route) is
    moved to each departure as ``assess_route(..., departure=...)`` moves it (timed legs keep their durations);
    the atmosphere source is built once from ``soundings`` (see :func:`icing.flight.assess.atmosphere_source`;
    give a :class:`icing.flight.gridsource.GridSource` for a model file), and all departures are screened in one
    call of :func:`icing.flight.assess.assess_routes`. ``options`` are those of
    :func:`icing.flight.assess.assess_route`.

    Returns
    -------
    (assessments, source, notes)
        The list of assessments, the atmosphere source used and the notes of the route reader.
    """
    from icing.flight.route import Route, read_route

    times = pd.DatetimeIndex(departures)
    if times.size == 0:
        raise _error("no departure time given")
    source_opts = {k: v for k, v in options.items() if k not in ROUTE_OPTIONS}
    route_opts = {k: v for k, v in options.items() if k in ROUTE_OPTIONS}
    source = atmosphere_source(soundings, **source_opts)
    first = times[0].isoformat()
    if isinstance(route, Route):
        base = route
        if waypoints is not None:
            raise TypeError("waypoints= is for a route file (ICAO Item 15 text), not a Route already built")
    else:
        try:  # the file's own times, if it has them, move with each departure
            base = read_route(route, waypoints=waypoints)
        except RouteFormatError:  # no time in the file (or another fault, which the second reading names)
            base = read_route(route, departure=first, waypoints=waypoints)
    notes = list(base.notes)
    if base.waypoints[0].time is not None:
        notes.append(f"the route's own times (first {pd.Timestamp(base.waypoints[0].time):%Y-%m-%dT%H:%M:%SZ}) "
                     "move with each departure; timed legs keep their durations")
    routes = [replace(base, departure=t, notes=[]) for t in times]
    assessments = assess_routes(routes, source, aircraft, step_s=step_s, offsets_ft=offsets_ft, use_winds=use_winds,
                                **route_opts)
    return assessments, source, notes


def _rank_key(row) -> tuple:
    """The order of least icing (:data:`BEST_RULE`) of one departure with complete data."""
    return (INTENSITIES.index(str(row["worst_intensity"])), bool(row["large_drops"]),
            round(float(row["total_accretion_mm"]), 2), round(float(row["total_icing_minutes"]), 1))


def departure_table(assessments, notes=(), window=None) -> pd.DataFrame:
    """The departure table of :func:`screen_departures` from one assessment per departure."""
    rows = []
    for a in assessments:
        s, seg = a.summary, a.segments
        status = seg["data"].astype(str).to_numpy()
        data = "missing" if (status == "missing").any() else "partial" if (status == "partial").any() else "ok"
        drops = seg["large_drops"].astype(object)
        known_drops = drops[drops.notna()]
        if (known_drops != "none").any():
            large = True
        elif data == "ok":
            large = False
        else:
            large = None  # none where data exist, but part of the route is unknown
        worst = s.get("worst_segment")
        age = seg["data_age_h"].to_numpy(float)
        rows.append({
            "departure": pd.Timestamp(s["departure"]), "arrival": seg["end_time"].iloc[-1],
            "total_accretion_mm": float(s["total_accretion_mm"]), "total_icing_minutes": float(
                s["total_icing_minutes"]),
            "worst_intensity": s["worst_intensity"], "worst_segment": None if worst is None else int(worst),
            "worst_leg": None if worst is None else f"{seg['start'].iloc[worst - 1]}-{seg['end'].iloc[worst - 1]}",
            "large_drops": large, "data": data, "segments_missing_data": int(s["segments_missing_data"]),
            "segments_partial_data": int(s["segments_partial_data"]), "totals_lower_bound": bool(
                s["totals_lower_bound"]),
            "max_data_age_h": float(np.nanmax(age)) if np.isfinite(age).any() else float("nan"),
        })
    table = pd.DataFrame(rows, columns=[c for c in DEPARTURE_COLUMNS if c not in ("rank", "best")])
    if not rows:
        table = table.astype({"total_accretion_mm": float, "total_icing_minutes": float, "max_data_age_h": float})
    table["departure"] = pd.to_datetime(table["departure"], utc=True).dt.as_unit("ns")
    table["arrival"] = pd.to_datetime(table["arrival"], utc=True).dt.as_unit("ns")
    table["worst_intensity"] = table["worst_intensity"].astype(INTENSITY_DTYPE)
    table["data"] = table["data"].astype(DATA_DTYPE)
    for c in ("worst_segment", "worst_leg", "large_drops"):  # Python values or None (unknown), never NaN
        table[c] = pd.Series([r[c] for r in rows], index=table.index, dtype=object)
    for c in ("segments_missing_data", "segments_partial_data"):
        table[c] = table[c].astype(np.int64)
    table["totals_lower_bound"] = table["totals_lower_bound"].astype(bool)
    complete = (table["data"] == "ok").to_numpy()
    keys = {i: _rank_key(table.loc[i]) for i in table.index[complete]}
    order = sorted(set(keys.values()))
    table["rank"] = pd.Series([order.index(keys[i]) + 1 if i in keys else None for i in table.index],
                              index=table.index, dtype=object)
    table["best"] = np.array([i in keys and keys[i] == order[0] for i in table.index], dtype=bool)
    out_notes = list(dict.fromkeys(notes))
    n_best = int(table["best"].sum())
    if not len(table):
        pass
    elif not complete.any():
        out_notes.append("no departure of the window has complete data: none is marked best (icing where data are "
                         "missing is unknown, never absent)")
    elif n_best > 1:
        out_notes.append(f"{n_best} departures tie for the least icing: all are marked best")
    incomplete = int((~complete).sum())
    if incomplete and complete.any():
        out_notes.append(f"{incomplete} departure(s) without complete data are not ranked and never best")
    table.attrs = {"caution": CAUTION, "best_rule": BEST_RULE, "notes": out_notes, **(window or {})}
    return table


def screen_departures(route, soundings, aircraft="turboprop", *, start, end, step, waypoints=None, step_s=60.0,
                      offsets_ft=DEFAULT_OFFSETS_FT, use_winds=True, **options) -> pd.DataFrame:
    """Screen the same route for every departure time of a window; mark the best window.

    Parameters
    ----------
    route : icing.flight.route.Route or path
        The planned route (see :func:`icing.flight.route.read_route`; ``waypoints`` for an ICAO Item 15 route).
        Its own times, if any, move with each departure.
    soundings : atmosphere source, list of profiles, or paths/directories of sounding files
        Built once (:func:`icing.flight.assess.atmosphere_source`). To see a change with departure time it
        needs several report times (soundings) or model times (give a
        :class:`icing.flight.gridsource.GridSource` for a model file).
    aircraft : preset name, TOML path or :class:`icing.flight.aircraft.Aircraft`
    start, end : str or time
        ISO 8601, UTC unless they say otherwise (a time without a zone is UTC). ``end`` is included when it falls
        on the step.
    step : str or timedelta
        ISO 8601 duration (``PT30M``, ``PT1H``) or a number and unit (``30min``, ``1h``); see :func:`parse_step`.
    step_s, offsets_ft, use_winds, options :
        As :func:`icing.flight.assess.assess_route` (``options`` build the source, or are ``transition_ft`` and
        ``min_altitude_ft``).

    Returns
    -------
    pandas.DataFrame
        One row a departure, columns :data:`DEPARTURE_COLUMNS`. ADVISORY ONLY: ``attrs["caution"]`` holds
        :data:`icing.CAUTION`.

    Notes
    -----
    Columns and dtypes:

    * ``departure``, ``arrival`` ``datetime64[ns, UTC]`` (arrival: end of the last segment);
    * ``total_accretion_mm``, ``total_icing_minutes`` float64, the route's totals
      (:func:`icing.flight.assess.assess_route`'s summary): NaN when any segment has no data, lower bounds
      when any has only part (``totals_lower_bound``);
    * ``worst_intensity`` ordered categorical :data:`icing.flight.assess.INTENSITY_DTYPE` (none < trace < light <
      moderate < severe < unknown; ``unknown`` when any segment has no data);
    * ``worst_segment`` (int or None) and ``worst_leg`` (``"FROM-TO"`` or None): where the worst intensity is;
    * ``large_drops``: True when any segment has supercooled large drops possible (freezing drizzle or rain),
      False when none has and the data are complete, None (unknown) otherwise;
    * ``data`` ordered categorical :data:`icing.flight.assess.DATA_DTYPE`: ``missing`` if any segment has no
      data, else ``partial`` if any has only part, else ``ok``; ``segments_missing_data``,
      ``segments_partial_data`` int64; ``totals_lower_bound`` bool;
    * ``max_data_age_h`` float64: the largest time (h) between a sample and the report or model time used;
    * ``rank`` (int or None): 1 for the least icing among departures with complete data, by :data:`BEST_RULE`
      (equal keys share a rank); None for a departure without complete data;
    * ``best`` bool: rank 1. Ties are all best; with no departure of complete data none is best.

    ``attrs``: ``caution``, ``best_rule``, ``notes`` (list of text: ties, departures not ranked, what the route
    reader decided), ``route``, ``aircraft``, ``start``, ``end``, ``step`` (ISO 8601 text) and ``data_times``
    (first and last report or model time of the source, ISO 8601 text, when known).

    Raises
    ------
    RouteFormatError
        A bad window (see :func:`departure_times`) or route.
    """
    times = departure_times(start, end, step)
    assessments, source, notes = assess_departures(route, soundings, aircraft, times, waypoints=waypoints,
                                                   step_s=step_s, offsets_ft=offsets_ft, use_winds=use_winds,
                                                   **options)
    first = assessments[0].summary
    window = {"route": first.get("route", ""), "aircraft": first.get("aircraft", ""),
              "start": f"{times[0]:%Y-%m-%dT%H:%M:%SZ}", "end": f"{_time(end, 'end'):%Y-%m-%dT%H:%M:%SZ}",
              "step": _duration_text(parse_step(step))}
    t_s = np.asarray(getattr(source, "time_s", []), dtype=float)
    t_s = t_s[np.isfinite(t_s)]
    if t_s.size:
        span = [f"{pd.Timestamp(v, unit='s', tz='UTC'):%Y-%m-%dT%H:%M:%SZ}" for v in (t_s.min(), t_s.max())]
        window["data_times"] = span
        notes = [*notes, f"data times from {span[0]} to {span[1]}"]
    return departure_table(assessments, notes, window)

"""The result of a route assessment: :class:`Assessment` (segment table, summary, samples, caution).

It behaves like its neighbours in a notebook: a short ``repr`` (route, aircraft, totals, worst segment, data
status; never the samples), an HTML view (``_repr_html_``), and ``to_dict``/``to_json`` with unknown values as
JSON ``null`` and times as ISO 8601 UTC text.
"""

from __future__ import annotations

import html
import json
import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from icing import CAUTION

__all__ = ["Assessment", "json_ready"]


def json_ready(v):
    """A value as plain JSON: unknown (NaN, NA, NaT, None) is ``None``, times are ISO 8601 UTC with ``Z``,
    numpy scalars become Python numbers; lists and dicts are converted item by item."""
    if isinstance(v, dict):
        return {str(k): json_ready(x) for k, x in v.items()}
    if isinstance(v, list | tuple):
        return [json_ready(x) for x in v]
    if v is None or v is pd.NA or v is pd.NaT:
        return None
    if isinstance(v, pd.Timestamp | np.datetime64):
        ts = pd.Timestamp(v)
        if ts is pd.NaT:
            return None
        ts = ts.tz_localize("UTC") if ts.tzinfo is None else ts.tz_convert("UTC")
        return ts.strftime("%Y-%m-%dT%H:%M:%SZ")
    if isinstance(v, bool | np.bool_):
        return bool(v)
    if isinstance(v, int | np.integer):
        return int(v)
    if isinstance(v, float | np.floating):
        return None if math.isnan(v) or math.isinf(v) else float(v)
    return v


def _num(v, fmt):
    return "unknown" if v is None or (isinstance(v, float) and math.isnan(v)) else fmt.format(v)


@dataclass(repr=False)
class Assessment:
    """The result of :func:`icing.flight.assess.assess_route`.

    Attributes
    ----------
    segments : pandas.DataFrame
        One row a segment (see :func:`icing.flight.assess.assess_route` for the columns, dtypes and the null
        convention: unknown values are null, never zero or ``none``).
    summary : dict
        Route totals and status; ``total_icing_minutes``/``total_accretion_mm`` are NaN (JSON null) when any
        segment has no data, lower bounds (``totals_lower_bound``) when any has only part; ``notes`` lists what the
        route reader ignored or decided.
    samples : pandas.DataFrame
        The trajectory samples with the atmosphere and accretion at each.
    caution : str
        Advisory only: see :data:`icing.CAUTION`.
    alternatives : pandas.DataFrame
        Per segment and altitude offset, the accretion with complete data (NaN otherwise).
    """

    segments: pd.DataFrame
    summary: dict
    samples: pd.DataFrame
    caution: str = CAUTION
    alternatives: pd.DataFrame = field(default_factory=pd.DataFrame)
    route: object = None  # the icing.flight.route.Route screened
    source: object = None  # the atmosphere source used

    def to_dict(self) -> dict:
        """``caution``, ``summary`` and ``segments`` (a list of records) as plain JSON values."""
        records = [{k: json_ready(v) for k, v in row.items()} for row in self.segments.to_dict(orient="records")]
        return {"caution": self.caution, "summary": json_ready(self.summary), "segments": records}

    def to_json(self, **kw) -> str:
        """The result as JSON (RFC 8259: unknown numbers are null, never NaN)."""
        return json.dumps(self.to_dict(), indent=kw.pop("indent", 2), allow_nan=False, **kw)

    def _lines(self) -> list[tuple[str, str]]:
        s = self.summary
        n = int(s.get("segments", len(self.segments)))
        n_miss, n_part = int(s.get("segments_missing_data", 0)), int(s.get("segments_partial_data", 0))
        at_least = "at least " if s.get("totals_lower_bound") and not n_miss else ""
        if n_miss:
            data = f"{n_miss} of {n} segments without data, {n_part} partial: icing there is UNKNOWN"
        elif n_part:
            data = f"{n_part} of {n} segments with partial data: totals are lower bounds"
        else:
            data = "complete"
        worst = s.get("worst_segment")
        wi = s.get("worst_intensity", "unknown")
        if worst:
            worst_text = f"segment {worst} ({wi})"
        else:
            worst_text = str(wi)
        if s.get("worst_known_segment") and not worst:
            worst_text += f"; worst with data: segment {s['worst_known_segment']} ({s.get('worst_known_intensity')})"
        rows = [("route", f"{s.get('route', '')} ({n} segments, departure {s.get('departure', '')})"),
                ("aircraft", str(s.get("aircraft", ""))),
                ("in icing", at_least + _num(s.get("total_icing_minutes"), "{:.0f} min")),
                ("accretion", at_least + _num(s.get("total_accretion_mm"), "{:.1f} mm")),
                ("worst", worst_text), ("data", data)]
        sp = s.get("spread")
        if isinstance(sp, dict):  # the spread ensemble (assess_route(..., spread=True))
            lo, hi = _num(sp.get("accretion_p10_mm"), "{:.1f}"), _num(sp.get("accretion_p90_mm"), "{:.1f}")
            rng = "accretion range unknown (a member has no data)" if "unknown" in (lo, hi) else \
                f"accretion {lo}-{hi} mm (10-90 %)"
            rows.append(("how sure", f"{_num(sp.get('p_moderate'), '{:.0%}')} of {sp.get('members')} members "
                         f"moderate or worse; {rng}; moved most by {sp.get('driver')}"))
        for note in s.get("notes") or []:
            rows.append(("note", str(note)))
        return rows

    def __repr__(self) -> str:
        body = "\n".join(f"  {k + ':':<10} {v}" for k, v in self._lines())
        return f"<Assessment (ADVISORY ONLY)\n{body}\n  segments: .segments ({len(self.segments)} rows), " \
               f"samples: .samples ({len(self.samples)} rows)>"

    def _repr_html_(self) -> str:
        e = html.escape
        dl = "".join(f"<dt>{e(k)}</dt><dd>{e(v)}</dd>" for k, v in self._lines())
        table = self.segments.to_html(index=False, na_rep="unknown", max_rows=60, border=0,
                                      float_format=lambda v: f"{v:,.1f}")
        return (f'<div class="icing-assessment"><p><b>{e(self.caution)}</b></p><dl>{dl}</dl>{table}'
                f"<p>{len(self.samples)} trajectory samples in <code>.samples</code>.</p></div>")

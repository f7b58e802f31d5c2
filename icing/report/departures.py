"""Reports of a departure window (:func:`icing.flight.departures.screen_departures`): figure, terminal table,
CSV and JSON.

The figure shows, against departure time, the total accretion on the reference body and the worst intensity,
with the data status of each departure: missing data are hatched over the whole bar slot and marked "no data",
never drawn as a zero; partial data are a hatched lower bound. The best window is shaded. Every output carries
the caution.
"""

from __future__ import annotations

import json
import textwrap
from pathlib import Path

import numpy as np
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch

from icing import CAUTION
from icing.errors import IcingError
from icing.report.plots import (
    FIGURE_SIZES,
    MISSING_HATCH,
    PALETTE,
    PARTIAL_HATCH,
    RATE_CMAP,
    add_caution,
    new_figure,
    save_figure,
)
from icing.report.tables import format_number, frame_records, frame_to_csv, is_missing, iso_utc

__all__ = ["departures_figure", "departures_text", "departures_csv", "departures_dict", "departures_json",
           "write_departure_reports", "FIGURE_SIZE", "BEST_COLOUR"]

FIGURE_SIZE = FIGURE_SIZES["departures"]
BEST_COLOUR = "#f4d35e"  # shading of the best window, ochre (our own)
INTENSITY_ORDER = ("none", "trace", "light", "moderate", "severe", "unknown")


def _caution(table):
    return table.attrs.get("caution") or CAUTION


def _check(table):
    if table is None or not len(table):
        raise IcingError("the departure table is empty: nothing to report")
    for c in ("departure", "total_accretion_mm", "worst_intensity", "data", "best"):
        if c not in table:
            raise IcingError(f"not a departure table (no column {c!r}): use icing.flight.departures."
                             "screen_departures")


def _intensity_colour(word):
    if word in INTENSITY_ORDER[:5]:
        return RATE_CMAP.colors[INTENSITY_ORDER.index(word)]
    return PALETTE["unknown"]


def departures_figure(table) -> Figure:
    """Total accretion (mm, bars coloured by worst intensity) and worst intensity against departure time.

    Missing data: the bar slot hatched to the top and labelled "no data" (never a zero bar); partial data: the
    known part as a hatched bar, a lower bound; the best window (``best``) shaded on both panels; the caution in
    small print at the foot.
    """
    from matplotlib.dates import DateFormatter, date2num

    _check(table)
    dep = table["departure"].dt.tz_convert("UTC").dt.tz_localize(None)
    x = date2num(dep.to_numpy())
    n = x.size
    width = 0.8 * float(np.min(np.diff(x))) if n > 1 else 1.0 / 48.0
    acc = table["total_accretion_mm"].to_numpy(float)
    data = table["data"].astype(object).where(table["data"].notna(), "missing").to_numpy()
    words = table["worst_intensity"].astype(object).where(table["worst_intensity"].notna(), "unknown").to_numpy()
    best = table["best"].to_numpy(bool)
    # A departure with partial data whose known totals are unknown is drawn as missing (nothing known to show).
    missing = (data == "missing") | ~np.isfinite(acc)
    fig = new_figure("departures")
    top_ax, low_ax = fig.subplots(2, 1, sharex=True, gridspec_kw={
        "left": 0.08, "right": 0.98, "top": 0.86, "bottom": 0.24, "hspace": 0.12, "height_ratios": [3, 2]})
    known = np.where(missing, np.nan, acc)
    top = max(1.0, float(np.nanmax(known)) * 1.3) if np.isfinite(known).any() else 1.0
    for ax in (top_ax, low_ax):
        for xi in x[best]:
            ax.axvspan(xi - width * 0.62, xi + width * 0.62, color=BEST_COLOUR, alpha=0.55, lw=0, zorder=0)
        ax.grid(True, axis="y", color=PALETTE["grid"], lw=0.5, zorder=0)
    for i in range(n):
        if missing[i]:
            top_ax.bar(x[i], top, width, facecolor=PALETTE["missing_face"], edgecolor=PALETTE["missing_hatch"],
                       hatch=MISSING_HATCH, lw=0, zorder=1)
            top_ax.text(x[i], top * 0.5, "no data:\nunknown", ha="center", va="center", fontsize=7, rotation=90,
                        zorder=3, bbox={"fc": "white", "ec": "none", "alpha": 0.85, "pad": 1})
            continue
        bar = top_ax.bar(x[i], acc[i], width, color=_intensity_colour(words[i]), edgecolor=PALETTE["plan"], lw=0.6,
                         zorder=2)[0]
        if data[i] == "partial":
            bar.set_hatch(PARTIAL_HATCH)
            bar.set_edgecolor(PALETTE["partial_hatch"])
        label = ("at least\n" if data[i] == "partial" else "") + format_number(acc[i], 1)
        top_ax.text(x[i], acc[i], label, ha="center", va="bottom", fontsize=6.5 if n > 12 else 7.5, zorder=3)
    top_ax.set_ylim(0, top)
    top_ax.set_ylabel("total accretion (mm)\non the reference body")
    # Worst intensity: filled markers with complete data, hollow for a lower bound (partial), x for unknown.
    codes = np.array([INTENSITY_ORDER.index(w) if w in INTENSITY_ORDER else 5 for w in words], dtype=float)
    for i in range(n):
        colour = _intensity_colour(words[i])
        if missing[i]:
            low_ax.bar(x[i], 5.6, width, bottom=-0.3, facecolor=PALETTE["missing_face"],
                       edgecolor=PALETTE["missing_hatch"], hatch=MISSING_HATCH, lw=0, zorder=1)
            low_ax.plot(x[i], 5, marker="X", ms=9, color=PALETTE["unknown"], zorder=3, ls="none")
        elif data[i] == "partial":
            low_ax.plot(x[i], codes[i], marker="o", ms=9, mfc="white", mec=PALETTE["plan"] if codes[i] < 5 else
                        PALETTE["unknown"], mew=1.5, zorder=3, ls="none")
        else:
            low_ax.plot(x[i], codes[i], marker="o", ms=9, mfc=colour, mec=PALETTE["plan"], mew=1.0, zorder=3,
                        ls="none")
    large = np.array([v is True or v is np.True_ for v in table.get("large_drops", [None] * n)])
    if large.any():
        low_ax.plot(x[large] + width * 0.28, codes[large] + 0.38, marker="^", ms=7, color=PALETTE["warm"],
                    mec="#7a4a12", ls="none", zorder=4)
    low_ax.set_ylim(-0.5, 5.5)
    low_ax.set_yticks(range(6))
    low_ax.set_yticklabels(INTENSITY_ORDER, fontsize=8)
    low_ax.set_ylabel("worst intensity")
    every = int(np.ceil(n / 12))  # at most about a dozen labelled departures
    low_ax.set_xticks(x[::every])
    low_ax.xaxis.set_major_formatter(DateFormatter("%H:%M"))
    days = sorted({f"{t:%Y-%m-%d}" for t in dep})
    low_ax.set_xlabel(f"departure time (UTC, {' to '.join([days[0], days[-1]] if len(days) > 1 else days)})")
    low_ax.set_xlim(x.min() - width, x.max() + width)
    for label in low_ax.get_xticklabels():
        label.set_fontsize(8)
    handles = [Patch(facecolor=RATE_CMAP.colors[k], edgecolor=PALETTE["plan"], label=w)
               for k, w in enumerate(INTENSITY_ORDER[:5])]
    handles += [Patch(facecolor="white", edgecolor=PALETTE["partial_hatch"], hatch=PARTIAL_HATCH,
                      label="partial data: lower bound"),
                Patch(facecolor=PALETTE["missing_face"], edgecolor=PALETTE["missing_hatch"], hatch=MISSING_HATCH,
                      label="no data: unknown"),
                Line2D([], [], marker="o", mfc="white", mec=PALETTE["plan"], ls="none", label="at least (partial)"),
                Line2D([], [], marker="^", color=PALETTE["warm"], mec="#7a4a12", ls="none",
                       label="large drops possible"),
                Patch(color=BEST_COLOUR, alpha=0.55, label="best window")]
    fig.legend(handles=handles, loc="lower center", ncol=5, fontsize=7.5, frameon=False,
               bbox_to_anchor=(0.5, 0.065))
    a = table.attrs
    fig.suptitle(f"Departure window: {a.get('route', '')}, aircraft {a.get('aircraft', '')}", fontsize=12, x=0.08,
                 ha="left", y=0.975)
    if best.any():
        chosen = ", ".join(f"{t:%H:%M}" for t in dep[best])
        sub = f"best (shaded): {chosen} UTC, the least icing among departures with complete data"
    else:
        sub = "no departure has complete data: none is marked best (unknown is never safe)"
    fig.text(0.08, 0.915, sub, fontsize=8.5, color="#333333")
    add_caution(fig, text=_caution(table))
    return fig


def _num(v, places):
    return format_number(v, places, grouping=True, missing="-")


def _word(word, data):
    word = "unknown" if is_missing(word) else str(word)
    shown = word.upper() if word in ("moderate", "severe", "unknown") else word
    return shown + "*" if data == "partial" and word != "unknown" else shown


def departures_text(table) -> str:
    """A fixed-width table for the terminal, one line a departure, with the best window, notes and caution."""
    _check(table)
    a = table.attrs
    head = ["departure UTC", "arrival", "ice mm", "icing min", "worst", "worst leg", "large drops", "data", "rank",
            "best"]
    rows = []
    for r in table.itertuples(index=False):
        data = "missing" if is_missing(r.data) else str(r.data)
        blank = data == "missing" or is_missing(r.total_accretion_mm)
        star = "*" if data == "partial" else ""
        arrival = iso_utc(r.arrival)
        day = "" if arrival[:10] == iso_utc(r.departure)[:10] else f" ({arrival[5:10]})"
        large = getattr(r, "large_drops", None)
        leg = getattr(r, "worst_leg", None)
        rows.append([iso_utc(r.departure)[:16].replace("T", " "), arrival[11:16] + day,
                     "-" if blank else _num(r.total_accretion_mm, 2) + star,
                     "-" if blank else _num(r.total_icing_minutes, 0) + star, _word(r.worst_intensity, data),
                     "-" if is_missing(leg) else str(leg), "-" if is_missing(large) else ("yes" if large else "no"),
                     data, "-" if is_missing(getattr(r, "rank", None)) else str(int(r.rank)),
                     "BEST" if r.best else ""])
    widths = [max(len(h), *(len(row[i]) for row in rows)) for i, h in enumerate(head)]
    wrap = "\n".join(textwrap.wrap(_caution(table), 100))
    window = f"{a.get('start', '')} to {a.get('end', '')} every {a.get('step', '')}" if a.get("start") else ""
    out = [wrap, "", f"Departure window: route {a.get('route', '')}, aircraft {a.get('aircraft', '')}"
           + (f", {window}" if window else ""), ""]
    out.append("  ".join(h.ljust(w) for h, w in zip(head, widths, strict=True)).rstrip())
    out.append("  ".join("-" * w for w in widths))
    out += ["  ".join(c.ljust(w) for c, w in zip(row, widths, strict=True)).rstrip() for row in rows]
    out.append("")
    best = table["best"].to_numpy(bool)
    if best.any():
        times = ", ".join(iso_utc(t)[11:16] for t in table["departure"][best])
        out.append(f"Best window: {times} UTC (the least icing among the departures with complete data).")
    else:
        out.append("Best window: NONE marked: no departure has complete data, and unknown is never safe.")
    if a.get("best_rule"):
        out.append("\n".join(textwrap.wrap(f"Least icing: {a['best_rule']}", 100)))
    data = table["data"].astype(object)
    if (data != "ok").any():
        out.append("\n".join(textwrap.wrap("DATA GAPS: '-' and UNKNOWN mark departures with a segment without data "
                                            "(icing there is unknown, not absent); * marks a lower bound (partial "
                                            "data).", 100)))
    for note in a.get("notes") or []:
        out.append(f"Note: {note}")
    out += ["", wrap]
    return "\n".join(out)


def departures_csv(table) -> str:
    """The departure table as CSV: the caution in a leading comment line, fixed decimals, unknown empty."""
    _check(table)
    return frame_to_csv(table, comment=_caution(table))


def departures_dict(table) -> dict:
    """``caution``, ``window`` (route, aircraft, start, end, step, data times, the rule of the best, notes) and
    ``departures`` (one record a departure) as JSON-ready values (unknown is ``None``, times ISO 8601 UTC)."""
    _check(table)
    window = {k: v for k, v in table.attrs.items() if k != "caution"}
    return {"caution": _caution(table), "window": window, "departures": frame_records(table)}


def departures_json(table, indent=2) -> str:
    """The departure table as JSON (RFC 8259: unknown numbers are null, never NaN)."""
    return json.dumps(departures_dict(table), indent=indent, allow_nan=False)


def write_departure_reports(table, out_dir) -> list[Path]:
    """Write ``departures.csv``, ``departures.json`` and the figure ``departures.png`` to ``out_dir``."""
    _check(table)
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    written = []
    for name, text in (("departures.csv", departures_csv(table)), ("departures.json", departures_json(table))):
        p = out / name
        p.write_text(text, encoding="utf-8")
        written.append(p)
    written.append(save_figure(departures_figure(table), out / "departures.png"))
    return written

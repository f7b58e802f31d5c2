"""The fourth figure: how sure is this forecast (the spread ensemble of :mod:`icing.flight.spread`).

Per segment, the share of ensemble members at each intensity or worse as stacked bars, and the 10th-90th
percentile band of the segment's accretion with the deterministic answer marked. Segments without data are
hatched and say "no data: unknown" (their members count at every intensity, so the bars are never read as
clear air); segments with partial data are hatched lightly (lower bounds). The caution is printed on it.
"""

from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch

from icing.errors import IcingError
from icing.report.plots import (
    FIGURE_SIZES,
    MISSING_HATCH,
    PALETTE,
    PARTIAL_HATCH,
    RATE_COLOURS,
    add_caution,
    new_figure,
)

__all__ = ["spread_figure", "has_spread", "SPREAD_FIGURE_SIZE"]

SPREAD_FIGURE_SIZE = FIGURE_SIZES["how_sure"]
_COLUMNS = ("p_light", "p_moderate", "p_severe", "accretion_p10_mm", "accretion_p90_mm", "spread_driver")


def has_spread(assessment) -> bool:
    """True when the assessment carries the spread columns (``assess_route(..., spread=True)``)."""
    return all(c in assessment.segments for c in _COLUMNS)


def spread_figure(assessment) -> Figure:
    """How sure: per segment the shares of members at light, moderate and severe or worse (stacked bars), and
    the 10th-90th percentile band of accretion with the deterministic answer (dot).

    Raises
    ------
    IcingError
        If the assessment has no segments or was made without ``spread=True``.
    """
    seg = assessment.segments
    if seg.empty:
        raise IcingError("the assessment has no segments: nothing to draw")
    if not has_spread(assessment):
        raise IcingError("the assessment has no spread columns: screen the route with spread=True "
                         "(icing screen --spread)")
    n = len(seg)
    idx = np.arange(n)
    data = seg["data"].astype(object).where(seg["data"].notna(), "missing").to_numpy()
    p = {k: seg[k].to_numpy(float) for k in ("p_light", "p_moderate", "p_severe")}
    fig = new_figure("how_sure")
    top, bottom = fig.subplots(2, 1, sharex=True, gridspec_kw={"left": 0.08, "right": 0.98, "top": 0.86,
                                                                "bottom": 0.25, "hspace": 0.12})
    # Stacked shares: severe at the bottom, then moderate, light, and below light (none or trace) on top.
    parts = [("severe or worse", p["p_severe"], RATE_COLOURS[4]),
             ("moderate", p["p_moderate"] - p["p_severe"], RATE_COLOURS[3]),
             ("light", p["p_light"] - p["p_moderate"], RATE_COLOURS[2]),
             ("below light (none or trace)", 1.0 - p["p_light"], RATE_COLOURS[0])]
    base = np.zeros(n)
    w = 0.6
    for label, h, colour in parts:
        h = np.where(data == "missing", 0.0, np.clip(np.nan_to_num(h), 0.0, 1.0))
        bars = top.bar(idx, h, w, bottom=base, color=colour, edgecolor="white", lw=0.5, label=label, zorder=2)
        for bar, d in zip(bars, data, strict=True):
            if d == "partial":
                bar.set_hatch(PARTIAL_HATCH)
        base = base + h
    words = seg["intensity"].astype(object).where(seg["intensity"].notna(), "unknown").to_numpy()
    for i in idx:
        if data[i] == "missing":
            top.bar(i, 1.0, w + 0.1, facecolor=PALETTE["missing_face"], edgecolor=PALETTE["missing_hatch"],
                    hatch=MISSING_HATCH, lw=0, zorder=3)
            top.text(i, 0.5, "no data:\nunknown", ha="center", va="center", fontsize=8, zorder=4,
                     bbox={"fc": "white", "ec": "none", "alpha": 0.9})
            continue
        top.text(i, 1.02, f"p(moderate+) {100 * p['p_moderate'][i]:.0f} %\nchain: {words[i]}", ha="center",
                 va="bottom", fontsize=7.5)
    top.set_ylim(0, 1.22)
    top.set_yticks([0, 0.25, 0.5, 0.75, 1.0])
    top.set_yticklabels(["0", "25", "50", "75", "100"])
    top.set_ylabel("share of members (%)")
    top.grid(True, axis="y", color=PALETTE["grid"], lw=0.5, zorder=0)
    # Accretion band: 10th to 90th percentile over members; the dot is the deterministic chain's answer.
    p10, p90 = seg["accretion_p10_mm"].to_numpy(float), seg["accretion_p90_mm"].to_numpy(float)
    det = seg["accretion_mm"].to_numpy(float)
    known = np.isfinite(p10) & np.isfinite(p90)
    bottom.bar(idx[known], (p90 - p10)[known], w * 0.5, bottom=p10[known], color=PALETTE["plan"], alpha=0.35,
               zorder=2)
    bottom.scatter(idx[np.isfinite(det)], det[np.isfinite(det)], color=PALETTE["plan"], zorder=3, s=22)
    ymax = max(1.0, float(np.nanmax(np.concatenate([p90[known], det[np.isfinite(det)], [0.0]]))) * 1.25)
    bottom.set_ylim(0, ymax)
    for i in idx[known]:
        bottom.text(i + w * 0.3, p90[i], f"{p10[i]:.1f}-{p90[i]:.1f}" + ("*" if data[i] == "partial" else ""),
                    fontsize=7, va="bottom", ha="left", zorder=4)
    for i in idx[~known & (data != "missing")]:
        bottom.text(i, ymax * 0.5, "range unknown:\na member has no data", ha="center", va="center", fontsize=7)
    for i in idx[data == "missing"]:
        bottom.bar(i, ymax, w + 0.1, facecolor=PALETTE["missing_face"], edgecolor=PALETTE["missing_hatch"],
                   hatch=MISSING_HATCH, lw=0, zorder=3)
        bottom.text(i, ymax * 0.5, "no data:\nunknown", ha="center", va="center", fontsize=8, zorder=4,
                    bbox={"fc": "white", "ec": "none", "alpha": 0.9})
    bottom.set_ylabel("accretion (mm)")
    bottom.grid(True, axis="y", color=PALETTE["grid"], lw=0.5, zorder=0)
    drivers = seg["spread_driver"].astype(object).fillna("unknown").to_numpy()
    bottom.set_xticks(idx)
    bottom.set_xticklabels([f"{r.segment} {r.start}-{r.end}\nmoved most by:\n{d}" for r, d in
                            zip(seg.itertuples(), drivers, strict=True)], fontsize=7,
                           rotation=0 if n <= 6 else 45)
    handles = [Patch(color=c, label=lab) for lab, _, c in parts] + [
        Patch(color=PALETTE["plan"], alpha=0.35, label="accretion, 10th-90th percentile of members"),
        Line2D([], [], marker="o", ls="", color=PALETTE["plan"], label="the chain's own answer"),
        Patch(facecolor="white", edgecolor="#555555", hatch=PARTIAL_HATCH, label="partial data: lower bound (*)"),
        Patch(facecolor=PALETTE["missing_face"], edgecolor=PALETTE["missing_hatch"], hatch=MISSING_HATCH,
              label="no data: unknown")]
    fig.legend(handles=handles, loc="lower center", ncol=4, fontsize=7.5, frameon=False, bbox_to_anchor=(0.5, 0.045))
    s = assessment.summary
    sp = s.get("spread") or {}
    fig.suptitle(f"How sure: {s.get('route', '')}, aircraft {s.get('aircraft', '')}", fontsize=12, x=0.08,
                 ha="left", y=0.975)
    who = (f"{sp.get('members', '?')} model ensemble members" if sp.get("model_members") else
           f"{sp.get('members', '?')} members (seed {sp.get('seed', '?')}) drawn across the chain's assumptions "
           "(cloud RH thresholds, LWC factor, droplet number, cold limit, time and distance weighting)")
    fig.text(0.08, 0.915, f"{who}; a member without data counts at every intensity", fontsize=7.5, color="#444444")
    add_caution(fig)
    return fig

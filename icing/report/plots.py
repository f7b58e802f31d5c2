"""Figures of an assessment: sounding diagram, route cross-section, per-segment chart.

Every figure is drawn on matplotlib's Agg canvas (no display needed; pyplot's global backend is not touched),
in the colour scheme below, and carries the advisory caution in small print. Missing data are hatched, never
left blank, so that they cannot be read as clear air.
"""

from __future__ import annotations

import textwrap
from pathlib import Path

import matplotlib
import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.collections import LineCollection
from matplotlib.colors import BoundaryNorm, LinearSegmentedColormap, ListedColormap
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch

from icing import CAUTION
from icing.errors import IcingError
from icing.report.tables import KT_PER_MS, is_missing
from icing.units import FT, NMI

__all__ = ["PALETTE", "RATE_CMAP", "RATE_NORM", "LWC_CMAP", "FIGURE_SIZES", "DPI", "add_caution", "new_figure",
           "sounding_figure",
           "pressure_altitude_ft",
           "cross_section_figure", "segment_chart_figure", "save_figure", "plot_sounding_main"]

# Our own colour scheme.
PALETTE = {
    "temperature": "#9c2a1f",  # brick
    "dewpoint": "#3a7d44",  # forest green
    "zero": "#1d3557",  # 0 degC isotherm, navy
    "cold_limit": "#7a4fa3",  # cold-limit isotherm, violet
    "supercooled": "#a8dadc",  # supercooled layers, pale teal
    "warm": "#e9a65b",  # warm layers aloft, sand
    "missing_face": "#f2f2f2",
    "missing_hatch": "#5a5a5a",  # hatching of missing data
    "partial_hatch": "#9a9a9a",
    "lwc": "#3b4cc0",
    "mvd": "#b5446e",
    "plan": "#4a3f8c",
    "alternative": "#8fc1a9",
    "waypoint": "#444444",
    "unknown": "#4d4d4d",
    "grid": "#dddddd",
}
# Sequential blue-violet for the accretion rate, one colour per intensity word (none, trace ... severe).
RATE_COLOURS = ["#eef1f7", "#a9c4eb", "#6f8fd8", "#5b4bb7", "#2f0d63"]
RATE_CMAP = ListedColormap(RATE_COLOURS, name="icing_rate")
_IN_PER_H_MM = 25.4
# Class edges in mm/h: 0 none, then trace < 1/4 in/h, light < 1, moderate <= 3, severe above (the trade's
# words; thresholds of icing.physics.accretion.INTENSITY_THRESHOLDS_IN_PER_H, US Air Weather Service 1980 as quoted).
RATE_BOUNDS = [0.0, 1e-6, 0.25 * _IN_PER_H_MM, 1.0 * _IN_PER_H_MM, 3.0 * _IN_PER_H_MM, 1e6]
RATE_NORM = BoundaryNorm(RATE_BOUNDS, RATE_CMAP.N)
RATE_WORDS = ["none", "trace", "light", "moderate", "severe"]
LWC_CMAP = LinearSegmentedColormap.from_list("icing_lwc", ["#eaf6f6", "#a8dadc", "#2a7f86"])
FIGURE_SIZES = {"sounding": (10.0, 7.5), "cross_section": (12.0, 7.0), "segments": (11.0, 4.8),
                "how_sure": (11.0, 6.4), "departures": (11.0, 6.8)}
DPI = 100
MISSING_HATCH = "///"
PARTIAL_HATCH = ".."
FULL = 0.999  # coverage at or above this counts as complete data (as in icing.flight.assess)
SHADE_ALPHA = 0.6  # of the supercooled band on the sounding diagram


def add_caution(fig, y=0.006, text=CAUTION):
    """The caution in small print at the foot of a figure (every figure of the project carries it)."""
    fig.text(0.01, y, "\n".join(textwrap.wrap(text, 190)), fontsize=6.5, color="#333333", va="bottom",
             ha="left")


def new_figure(kind):
    """A Figure of one of :data:`FIGURE_SIZES` on the Agg canvas, not registered with pyplot: no display is
    needed, nothing is kept alive between calls, and a user's own pyplot backend (a notebook, a window) is left
    alone."""
    fig = Figure(figsize=FIGURE_SIZES[kind], dpi=DPI)
    FigureCanvasAgg(fig)
    return fig


# ------------------------------------------------------------------------------------------------ sounding
def _runs(mask):
    """(start, end) index pairs of runs of True in a 1-D mask (end inclusive)."""
    m = np.concatenate([[False], np.asarray(mask, dtype=bool), [False]])
    d = np.diff(m.astype(int))
    return list(zip(np.flatnonzero(d == 1), np.flatnonzero(d == -1) - 1, strict=True))


def _band_edges(p, lo, hi):
    """Pressures bounding levels lo..hi: half-way in ln p to the neighbouring levels (the ends at the level)."""
    lnp = np.log(p)
    bottom = p[lo] if lo == 0 else float(np.exp(0.5 * (lnp[lo] + lnp[lo - 1])))
    top = p[hi] if hi == p.size - 1 else float(np.exp(0.5 * (lnp[hi] + lnp[hi + 1])))
    return bottom, top


def _diagnostics(data, cold_limit, airmass):
    if "supercooled" in data:
        return data
    from icing.physics.diagnose import diagnose

    return diagnose(data, cold_limit=cold_limit, airmass=airmass)


def sounding_figure(diagnostics_or_profile, *, cold_limit=-40.0, airmass="supercooled", title=None,
                    top_hpa=None, wind=None, others=()) -> Figure:
    """Skew-T diagram of one sounding with its supercooled layers, and the LWC/MVD profile beside it.

    Parameters
    ----------
    diagnostics_or_profile : xarray.Dataset
        One canonical profile (diagnosed here) or its diagnostics (:func:`icing.physics.diagnose.diagnose`).
    cold_limit : float
        Cold-limit isotherm drawn and used for the diagnosis of a profile, degC (default -40).
    airmass : str or float
        Droplet number assumption for a profile's diagnosis.
    title : str, optional
        Defaults to station, name and time.
    top_hpa : float, optional
        Top of the diagram (hPa); default the top of the data, not above 100 hPa.
    wind : xarray.Dataset, optional
        A profile with ``wind_speed`` (m/s) and ``wind_direction`` (deg) on its own levels, drawn as barbs in
        knots; default the winds of the profile given, if any.
    others : sequence of (label, xarray.Dataset)
        Other reports of the same station that the route used: their temperature and dewpoint are drawn as thin
        dashed lines, labelled with their time.

    Returns
    -------
    matplotlib.figure.Figure
        Temperature, dewpoint, 0 degC and cold-limit isotherms, supercooled layers shaded, warm layers aloft
        marked, levels without usable data hatched, wind barbs (kt); LWC (g/m3) and MVD (um) against pressure,
        with the sounding's height (ft) and the flight level (ISA pressure altitude) of each pressure on the
        right.
    """
    from metpy.plots import SkewT

    if wind is None and "wind_speed" in diagnostics_or_profile:
        wind = diagnostics_or_profile
    ds = _diagnostics(diagnostics_or_profile, cold_limit, airmass)
    extra = [d for d in ds.dims if d != "level" and ds.sizes[d] > 1]
    if extra:
        raise IcingError(f"a sounding diagram is for one profile; this one has dimensions {extra}")
    ds = ds.squeeze(drop=True)
    cold = float(ds.attrs.get("cold_limit", cold_limit))
    p = ds["pressure"].values.astype(float)
    keep = np.isfinite(p)
    if keep.sum() < 2:
        raise IcingError("the sounding has fewer than two levels with pressure: nothing to draw")
    order = np.argsort(-p[keep])

    def col(name, fill=np.nan):
        if name not in ds:
            return np.full(order.size, fill)
        return ds[name].values[keep][order].astype(float)

    p = p[keep][order]
    t, td = col("temperature"), col("dewpoint")
    sc, warm = col("supercooled", 0) > 0.5, col("warm_layer_aloft", 0) > 0.5
    valid = col("valid", 1) > 0.5
    lwc, mvd = col("lwc"), col("mvd")

    fig = new_figure("sounding")
    gs = fig.add_gridspec(1, 2, width_ratios=[3.2, 1.0], left=0.07, right=0.895, top=0.86, bottom=0.2, wspace=0.06)
    skew = SkewT(fig, rotation=45, subplot=gs[0, 0], aspect="auto")
    ax = skew.ax
    bottom_p = max(1050.0, float(np.nanmax(p)) + 5) if np.nanmax(p) > 1000 else float(np.nanmax(p)) + 20
    top_p = top_hpa if top_hpa is not None else max(100.0, float(np.nanmin(p)))
    ax.set_ylim(bottom_p, top_p)
    ax.set_xlim(min(cold - 5.0, -45.0), 40.0)
    skew.plot_dry_adiabats(colors=PALETTE["grid"], linewidths=0.6, alpha=0.9)
    skew.plot_moist_adiabats(colors="#d8e6d8", linewidths=0.6, alpha=0.9)
    ax2 = fig.add_subplot(gs[0, 1])
    ax2.set_yscale("log")
    ax2.set_ylim(bottom_p, top_p)
    for a in (ax, ax2):
        for lo, hi in _runs(sc):
            b, tp = _band_edges(p, lo, hi)
            a.axhspan(b, tp, color=PALETTE["supercooled"], alpha=SHADE_ALPHA, lw=0, zorder=0.5)
        for lo, hi in _runs(warm):
            b, tp = _band_edges(p, lo, hi)
            a.axhspan(b, tp, facecolor=PALETTE["warm"], alpha=0.45, lw=0, zorder=0.6)
        for lo, hi in _runs(~valid):
            b, tp = _band_edges(p, lo, hi)
            a.axhspan(b, tp, facecolor=PALETTE["missing_face"], edgecolor=PALETTE["missing_hatch"],
                      hatch=MISSING_HATCH, lw=0, zorder=0.7)
    ax.axvline(0.0, color=PALETTE["zero"], lw=1.4, ls="-", zorder=2)
    ax.axvline(cold, color=PALETTE["cold_limit"], lw=1.4, ls="--", zorder=2)
    okt, okd = np.isfinite(t), np.isfinite(td)
    skew.plot(p[okt], t[okt], color=PALETTE["temperature"], lw=2.2, zorder=3)
    skew.plot(p[okd], td[okd], color=PALETTE["dewpoint"], lw=2.0, zorder=3)
    other_handles = []
    for k, (label, other) in enumerate(others):
        op = np.asarray(other["pressure"].values, float).ravel()
        ls = ["--", ":", "-."][k % 3]
        for name, colour in (("temperature", PALETTE["temperature"]), ("dewpoint", PALETTE["dewpoint"])):
            if name in other:
                ov = np.asarray(other[name].values, float).ravel()
                ok = np.isfinite(op) & np.isfinite(ov)
                skew.plot(op[ok], ov[ok], color=colour, lw=1.1, ls=ls, alpha=0.8, zorder=2.8)
        other_handles.append(Line2D([], [], color="#555555", lw=1.1, ls=ls, label=f"also used: {label}"))
    barbs = _wind_barbs(wind, bottom_p)
    if barbs is not None:
        skew.plot_barbs(barbs[0], barbs[1], barbs[2], length=5.5, color="#333333", xloc=0.97)
    ax.set_xlabel("temperature (°C)")
    ax.set_ylabel("pressure (hPa)")
    for lo, hi in _runs(warm):
        b, tp = _band_edges(p, lo, hi)
        ax.text(0.86, float(np.sqrt(b * tp)), "warm layer aloft", transform=ax.get_yaxis_transform(), ha="right",
                va="center", fontsize=8, color="#7a4a12", zorder=4)
    handles = [
        Line2D([], [], color=PALETTE["temperature"], lw=2.2, label="temperature"),
        Line2D([], [], color=PALETTE["dewpoint"], lw=2.0, label="dewpoint"),
        Line2D([], [], color=PALETTE["zero"], lw=1.4, label="0 °C"),
        Line2D([], [], color=PALETTE["cold_limit"], lw=1.4, ls="--", label=f"cold limit {cold:g} °C"),
        Patch(facecolor=PALETTE["supercooled"], alpha=SHADE_ALPHA, label="supercooled liquid (diagnosed levels)"),
        Patch(facecolor=PALETTE["warm"], alpha=0.45, label="warm layer aloft (above 0 °C over colder air)"),
        Patch(facecolor=PALETTE["missing_face"], edgecolor=PALETTE["missing_hatch"], hatch=MISSING_HATCH,
              label="no usable data (unknown, not clear)"),
        *other_handles,
    ]
    if barbs is not None:
        handles.append(Line2D([], [], color="#333333", lw=0, label="wind barbs in kt (full barb 10 kt, flag 50)"))
    fig.legend(handles=handles, loc="lower left", bbox_to_anchor=(0.06, 0.03), ncol=4, fontsize=7.5, frameon=False)

    okl = np.isfinite(lwc)
    ax2.plot(np.where(okl, lwc, np.nan), p, color=PALETTE["lwc"], lw=2.0)
    ax2.set_xlabel("LWC (g/m³)", color=PALETTE["lwc"])
    ax2.tick_params(axis="x", colors=PALETTE["lwc"])
    ax2.set_xlim(0.0, max(0.5, float(np.nanmax(lwc)) * 1.15) if okl.any() else 0.5)
    if not (np.nan_to_num(lwc) > 0).any():
        ax2.text(0.5, 0.5, "no liquid water\ndiagnosed", transform=ax2.transAxes, ha="center", va="center",
                 fontsize=9, color="#555555")
    ax2.yaxis.set_major_formatter(matplotlib.ticker.NullFormatter())
    ax2.yaxis.set_minor_formatter(matplotlib.ticker.NullFormatter())
    ax3 = ax2.twiny()
    okm = np.isfinite(mvd) & (np.nan_to_num(lwc) > 0)
    ax3.plot(np.where(okm, mvd, np.nan), p, color=PALETTE["mvd"], lw=1.6, ls="--")
    ax3.set_xlabel("MVD (µm)", color=PALETTE["mvd"])
    ax3.tick_params(axis="x", colors=PALETTE["mvd"])
    ax3.set_xlim(0.0, max(50.0, float(np.nanmax(mvd[okm])) * 1.15) if okm.any() else 50.0)
    ax3.set_ylim(bottom_p, top_p)
    ax2.grid(True, color=PALETTE["grid"], lw=0.5)
    _height_axis(ax2, p, col("height"), bottom_p, top_p)
    a = ds.attrs
    if title is None:
        when = str(a.get("time", ""))
        title = " ".join(str(x) for x in (a.get("station", ""), a.get("name", ""), when) if x) or "sounding"
    fig.suptitle(title, fontsize=12, x=0.07, ha="left", y=0.975)
    fig.text(0.07, 0.93, f"LWC: {a.get('lwc_source', 'diagnosed')}; supercooled between 0 °C and {cold:g} °C "
             f"in cloud; airmass {a.get('airmass', airmass)}", fontsize=8, color="#444444")
    add_caution(fig)
    return fig


# Pressure altitude in the US Standard Atmosphere 1976 troposphere: T0 288.15 K, lapse 6.5 K/km, p0 1013.25 hPa,
# g0 9.80665 m/s2, R* 8.31432 J/(mol K), M 0.0289644 kg/mol.
_ISA_T0, _ISA_LAPSE, _ISA_P0 = 288.15, 0.0065, 1013.25
_ISA_EXPONENT = 8.31432 / 0.0289644 * _ISA_LAPSE / 9.80665


def pressure_altitude_ft(pressure_hpa):
    """Pressure altitude (ft) of a pressure (hPa) in the US Standard Atmosphere 1976 (troposphere, below 11 km)."""
    p = np.asarray(pressure_hpa, dtype=float)
    return _ISA_T0 / _ISA_LAPSE * (1.0 - (p / _ISA_P0) ** _ISA_EXPONENT) / FT


STANDARD_LEVELS_HPA = (1000, 925, 850, 700, 600, 500, 400, 300, 250, 200, 150, 100)


def _height_axis(ax, p, z, bottom_p, top_p):
    """Right-hand labels at standard pressures: the flight level (ISA pressure altitude / 100 ft) and the
    sounding's own height (ft above mean sea level, interpolated in ln p between its levels)."""
    levels = np.array([x for x in STANDARD_LEVELS_HPA if top_p <= x <= bottom_p], dtype=float)
    if levels.size == 0:
        return
    labels = []
    ok = np.isfinite(p) & np.isfinite(z)
    for lev, fl in zip(levels, pressure_altitude_ft(levels) / 100.0, strict=True):
        text = f"FL{max(fl, 0):03.0f}"
        if ok.sum() >= 2 and p[ok].min() <= lev <= p[ok].max():
            height = np.interp(-np.log(lev), -np.log(p[ok]), z[ok]) / FT
            text += f"\n{height:,.0f} ft"
        labels.append(text)
    ax.yaxis.tick_right()
    ax.yaxis.set_label_position("right")
    ax.yaxis.set_major_locator(matplotlib.ticker.FixedLocator(levels))
    ax.yaxis.set_major_formatter(matplotlib.ticker.FixedFormatter(labels))
    ax.yaxis.set_minor_locator(matplotlib.ticker.NullLocator())
    ax.tick_params(axis="y", labelsize=7)
    ax.set_ylabel("flight level and height of this sounding (ft MSL)", fontsize=8)


def _wind_barbs(wind, bottom_p, min_dlnp=0.045):
    """(pressure, u, v) in knots for barbs, thinned so that barbs are at least ``min_dlnp`` apart in ln p."""
    if wind is None or "wind_speed" not in wind or "wind_direction" not in wind:
        return None
    p = np.asarray(wind["pressure"].values, float).ravel()
    spd = np.asarray(wind["wind_speed"].values, float).ravel() * KT_PER_MS
    wdir = np.radians(np.asarray(wind["wind_direction"].values, float).ravel())
    ok = np.isfinite(p) & np.isfinite(spd) & np.isfinite(wdir) & (p <= bottom_p)
    if not ok.any():
        return None
    p, spd, wdir = p[ok], spd[ok], wdir[ok]
    order = np.argsort(-p)
    keep, last = [], None
    for i in order:
        if last is None or abs(np.log(p[last]) - np.log(p[i])) >= min_dlnp:
            keep.append(i)
            last = i
    keep = np.array(keep)
    # Meteorological direction is where the wind blows from: u = -s sin(dir), v = -s cos(dir).
    return p[keep], -spd[keep] * np.sin(wdir[keep]), -spd[keep] * np.cos(wdir[keep])


# ------------------------------------------------------------------------------------------ cross-section
def _waypoint_distances_nm(assessment):
    seg = assessment.segments
    return np.concatenate([[0.0], np.cumsum(seg["distance_nm"].to_numpy(dtype=float))])


def _edges_from_centres(x):
    x = np.asarray(x, dtype=float)
    if x.size == 1:
        return np.array([x[0] - 0.5, x[0] + 0.5])
    mid = 0.5 * (x[1:] + x[:-1])
    return np.concatenate([[x[0] - (mid[0] - x[0])], mid, [x[-1] + (x[-1] - mid[-1])]])


def _source_grid(source, smp, altitudes_ft):
    """Sample the source on (altitude, along-route sample) at each sample's position and time."""
    n_z, n_x = altitudes_ft.size, len(smp)
    lat = np.broadcast_to(smp["latitude"].to_numpy(float), (n_z, n_x)).ravel()
    lon = np.broadcast_to(smp["longitude"].to_numpy(float), (n_z, n_x)).ravel()
    ts = smp["time_s"].to_numpy().astype("int64").astype("datetime64[s]")
    times = np.broadcast_to(ts, (n_z, n_x)).ravel()
    height = np.broadcast_to(altitudes_ft[:, None] * FT, (n_z, n_x)).ravel()
    out = source.sample(lat, lon, times, pressure=np.full(lat.size, np.nan), height=height)
    return {k: np.asarray(out[k], dtype=float).reshape(n_z, n_x) for k in ("coverage", "supercooled", "lwc",
                                                                          "temperature")}


def _spans(x_edges, mask):
    return [(x_edges[lo], x_edges[hi + 1]) for lo, hi in _runs(mask)]


def cross_section_figure(assessment, source=None, *, top_ft=None) -> Figure:
    """Distance along the route against altitude: supercooled layers, freezing level, the planned path.

    Parameters
    ----------
    assessment : icing.flight.assess.Assessment
    source : atmosphere source, optional
        With a source (``sample(lat, lon, time, pressure=, height=)``) the layers are sampled on a distance x
        altitude grid at the aircraft's position and time: supercooled liquid shaded by LWC, the 0 degC
        contour(s), and every cell without data hatched. Without one, the band between the lowest freezing level
        and the top of the highest supercooled layer of the samples is shaded and stretches where the flight
        path had no data are hatched over the full height.
    top_ft : float, optional
        Top of the plot (ft); default 5,000 ft above the highest of the path and the supercooled tops.

    Returns
    -------
    matplotlib.figure.Figure
        The flight path coloured by accretion rate (the trade's intensity classes), grey and dashed where the
        rate is unknown; waypoints and segments labelled; the caution in small print.
    """
    smp = assessment.samples.sort_values("distance_m").reset_index(drop=True)
    if smp.empty:
        raise IcingError("the assessment has no trajectory samples: nothing to draw")
    x = smp["distance_m"].to_numpy(float) / NMI
    alt = smp["altitude_ft"].to_numpy(float)
    fz = smp["freezing_level_ft"].to_numpy(float)
    sct = smp["supercooled_top_ft"].to_numpy(float)
    cov = smp["coverage"].to_numpy(float)
    rate = smp["rate_mm_per_h"].to_numpy(float)
    wp = _waypoint_distances_nm(assessment)
    xmax = max(float(wp[-1]), float(x.max()))
    x_edges = np.clip(_edges_from_centres(x), 0.0, xmax)
    x_edges[0], x_edges[-1] = 0.0, xmax
    if top_ft is None:
        top_ft = max(float(np.nanmax(alt)), float(np.nanmax(sct)) if np.isfinite(sct).any() else 0.0) + 5000.0
        top_ft = float(np.ceil(top_ft / 1000.0) * 1000.0)

    fig = new_figure("cross_section")
    ax = fig.add_axes([0.065, 0.3, 0.71 if source is not None else 0.75, 0.58])
    cax = fig.add_axes([0.845 if source is not None else 0.885, 0.3, 0.015, 0.58])
    ax.set_xlim(0.0, xmax)
    ax.set_ylim(0.0, top_ft)
    legend = []
    if source is not None:
        z = np.arange(0.0, top_ft + 1.0, 250.0)
        g = _source_grid(source, smp, z)
        z_edges = _edges_from_centres(z)
        sc = (g["supercooled"] > 0.5) & (g["coverage"] > 0)
        lwc = np.where(sc, np.nan_to_num(g["lwc"]), np.nan)
        mesh = ax.pcolormesh(x_edges, z_edges, np.ma.masked_invalid(lwc), cmap=LWC_CMAP, vmin=0.0,
                             vmax=max(0.5, float(np.nanmax(lwc)) if np.isfinite(lwc).any() else 0.5), zorder=1,
                             shading="flat")
        lcb = fig.colorbar(mesh, cax=fig.add_axes([0.935, 0.3, 0.015, 0.58]))
        lcb.set_label("supercooled liquid water content (g/m³)", fontsize=8)
        lcb.ax.tick_params(labelsize=7)
        legend.append(Patch(facecolor=PALETTE["supercooled"], label="supercooled liquid (shade: LWC)"))
        missing = g["coverage"] <= 0
        partial = (g["coverage"] > 0) & (g["coverage"] < FULL)
        for mask, hatch, colour in ((missing, MISSING_HATCH, PALETTE["missing_hatch"]),
                                    (partial, PARTIAL_HATCH, PALETTE["partial_hatch"])):
            if mask.any():
                ax.pcolor(x_edges, z_edges, np.ma.masked_where(~mask, np.ones_like(g["coverage"])),
                          hatch=hatch, facecolor=PALETTE["missing_face"] if hatch == MISSING_HATCH else "none",
                          edgecolor=colour, lw=0.0, zorder=1.5, cmap=ListedColormap(
                              [PALETTE["missing_face"] if hatch == MISSING_HATCH else (1, 1, 1, 0)]))
        t = np.where(g["coverage"] > 0, g["temperature"], np.nan)
        # Warm layer aloft: above 0 degC with sub-freezing air somewhere below in the same column.
        cold_below = np.maximum.accumulate(np.nan_to_num(t, nan=99.0) <= 0.0, axis=0)
        warm = (t > 0.0) & np.vstack([np.zeros((1, t.shape[1]), bool), cold_below[:-1]])
        if warm.any():
            ax.pcolormesh(x_edges, z_edges, np.ma.masked_where(~warm, np.ones_like(t)), zorder=1.2, shading="flat",
                          cmap=ListedColormap([PALETTE["warm"]]), alpha=0.6)
            legend.append(Patch(facecolor=PALETTE["warm"], alpha=0.6, label="warm layer aloft (melting; "
                                "freezing rain possible below)"))
        if np.isfinite(t).any() and np.nanmin(t) < 0 < np.nanmax(t) and t.shape[1] > 1:
            ax.contour(x, z, t, levels=[0.0], colors=PALETTE["zero"], linewidths=1.6, zorder=2)
        legend.append(Line2D([], [], color=PALETTE["zero"], lw=1.6, label="0 °C (freezing level)"))
        note = ("layers sampled from the sources at the aircraft's position and time, by height above mean sea "
                "level; flight levels are drawn at their pressure altitude")
    else:
        ok = np.isfinite(fz) & np.isfinite(sct) & (sct > fz)
        lo = np.where(ok, np.clip(fz, 0.0, None), np.nan)
        ax.fill_between(x, lo, np.where(ok, sct, np.nan), color=PALETTE["supercooled"], alpha=0.55, lw=0, zorder=1)
        ax.plot(x, np.where(np.isfinite(fz), fz, np.nan), color=PALETTE["zero"], lw=1.6, zorder=2)
        legend += [Patch(facecolor=PALETTE["supercooled"], alpha=0.55,
                         label="supercooled liquid found (lowest 0 °C to highest supercooled top)"),
                   Line2D([], [], color=PALETTE["zero"], lw=1.6, label="lowest freezing level")]
        for a, b in _spans(x_edges, cov <= 0):
            ax.axvspan(a, b, facecolor=PALETTE["missing_face"], edgecolor=PALETTE["missing_hatch"],
                       hatch=MISSING_HATCH, lw=0.0, zorder=1.5)
        for a, b in _spans(x_edges, (cov > 0) & (cov < FULL)):
            ax.axvspan(a, b, facecolor="none", edgecolor=PALETTE["partial_hatch"], hatch=PARTIAL_HATCH, lw=0.0,
                       zorder=1.5)
        note = "layers from the sources at each point of the flight path"
    legend.append(Patch(facecolor=PALETTE["missing_face"], edgecolor=PALETTE["missing_hatch"], hatch=MISSING_HATCH,
                        label="no data: icing unknown"))
    if ((cov > 0) & (cov < FULL)).any() or source is not None:
        legend.append(Patch(facecolor="white", edgecolor=PALETTE["partial_hatch"], hatch=PARTIAL_HATCH,
                            label="partial data"))

    # The flight path: a dark underlay, then colour by rate class; unknown rate grey and dashed.
    pts = np.column_stack([x, alt])
    if len(pts) > 1:
        segs = np.stack([pts[:-1], pts[1:]], axis=1)
        r = rate[:-1]
        known = np.isfinite(r)
        ax.add_collection(LineCollection(segs, colors="#111111", linewidths=5.5, zorder=3))
        lc = LineCollection(segs[known], cmap=RATE_CMAP, norm=RATE_NORM, linewidths=3.5, zorder=4)
        lc.set_array(r[known])
        ax.add_collection(lc)
        if (~known).any():
            ax.add_collection(LineCollection(segs[~known], colors="white", linewidths=3.5, zorder=4.4))
            ax.add_collection(LineCollection(segs[~known], colors=PALETTE["unknown"], linewidths=3.5,
                                             linestyles=(0, (2.0, 1.2)), zorder=4.5))
    else:
        ax.scatter(x, alt, c=np.nan_to_num(rate), cmap=RATE_CMAP, norm=RATE_NORM, zorder=4)
    legend.append(Line2D([], [], color=PALETTE["unknown"], lw=3.0, ls=(0, (2.0, 1.2)),
                             label="flight path, rate unknown"))
    cb = fig.colorbar(matplotlib.cm.ScalarMappable(norm=BoundaryNorm(np.arange(6), RATE_CMAP.N), cmap=RATE_CMAP),
                      cax=cax, ticks=np.arange(5) + 0.5)
    b = RATE_BOUNDS
    cb.ax.set_yticklabels(["none\n0", f"trace\n< {b[2]:.3g}", f"light\n{b[2]:.3g}-{b[3]:.3g}",
                           f"moderate\n{b[3]:.3g}-{b[4]:.3g}", f"severe\n> {b[4]:.3g}"], fontsize=7)
    cb.set_label("accretion rate on the reference body (mm/h)", fontsize=8)

    seg = assessment.segments
    names = [*seg["start"].astype(str).tolist(), str(seg["end"].iloc[-1])] if len(seg) else []
    for d, name in zip(wp, names, strict=False):
        ax.axvline(d, color=PALETTE["waypoint"], lw=0.8, ls=":", zorder=2.5)
        ax.annotate(name, (d, top_ft), xytext=(0, 3), textcoords="offset points", ha="center", va="bottom", fontsize=8,
                    fontweight="bold", color=PALETTE["waypoint"], annotation_clip=False)
    for k, row in enumerate(seg.itertuples()):
        mid = 0.5 * (wp[k] + wp[k + 1])
        word = "unknown" if is_missing(row.intensity) else str(row.intensity)
        status = "missing" if is_missing(row.data) else str(row.data)
        label = f"{row.segment}: {word}" + ("" if status == "ok" else f" ({status} data)")
        if "p_moderate" in seg:  # how sure (assess_route(spread=True)): share at moderate or worse, 10-90 % range
            p, lo, hi = row.p_moderate, row.accretion_p10_mm, row.accretion_p90_mm
            label += "\nmoderate+ " + ("?" if is_missing(p) else f"{100 * float(p):.0f} %")
            label += "" if is_missing(lo) or is_missing(hi) else f", {float(lo):.1f}-{float(hi):.1f} mm"
        ax.text(mid, top_ft * 0.985, label, ha="center", va="top", fontsize=8, zorder=6,
                bbox={"boxstyle": "round,pad=0.2", "fc": "white", "ec": "#999999", "alpha": 0.85})
    ax.set_xlabel("distance along the route (nm)")
    ax.set_ylabel("altitude (ft; flight levels as pressure altitude)")
    ax.yaxis.set_major_formatter(matplotlib.ticker.FuncFormatter(lambda v, _: f"{v:,.0f}"))
    ax.grid(True, color=PALETTE["grid"], lw=0.5, zorder=0)
    _time_axis(ax, x, smp["time_s"].to_numpy(float), xmax)
    fl = ax.secondary_yaxis("right", functions=(lambda v: np.asarray(v) / 100.0, lambda v: np.asarray(v) * 100.0))
    fl.yaxis.set_major_formatter(matplotlib.ticker.FuncFormatter(lambda v, _: f"FL{v:03.0f}" if v >= 0 else ""))
    fl.set_ylabel("flight level (altitude / 100 ft)", fontsize=8)
    fl.tick_params(labelsize=8)
    ax.legend(handles=legend, loc="upper left", bbox_to_anchor=(0.0, -0.3), ncol=4, fontsize=7.5, frameon=False)
    s = assessment.summary
    fig.suptitle(f"Route cross-section: {s.get('route', '')}, departure {s.get('departure', '')}, "
                 f"aircraft {s.get('aircraft', '')}", fontsize=12, x=0.065, ha="left", y=0.98)
    fig.text(0.065, 0.935, note, fontsize=8, color="#444444")
    add_caution(fig)
    return fig


def _time_axis(ax, x_nm, time_s, xmax):
    """A second x axis below the distances: the clock time (UTC) at which the aircraft passes each point."""
    import datetime as _dt

    ok = np.isfinite(x_nm) & np.isfinite(time_s)
    if ok.sum() < 2:
        return None
    x, t = x_nm[ok], time_s[ok]
    order = np.argsort(x)
    x, t = x[order], np.maximum.accumulate(t[order])
    # Extend to both ends of the route at the speed of the first and last samples.
    def slope(i, j):
        return (t[j] - t[i]) / (x[j] - x[i]) if x[j] > x[i] else 0.0
    x = np.concatenate([[0.0], x, [xmax]])
    t = np.concatenate([[t[0] - slope(0, 1) * x[1]], t, [t[-1] + slope(-2, -1) * (xmax - x[-2])]])
    keep = np.concatenate([[True], np.diff(t) > 0])
    x, t = x[keep], t[keep]
    if x.size < 2:
        return None
    t0 = t[0]
    minutes = (t - t0) / 60.0
    sec = ax.secondary_xaxis(-0.16, functions=(lambda d: np.interp(d, x, minutes),
                                               lambda m: np.interp(m, minutes, x)))
    span = minutes[-1] - minutes[0]
    step = next((s for s in (5, 10, 15, 20, 30, 60, 120, 180, 360) if span / s <= 10), 720)
    start_clock = t0 / 60.0
    first = np.ceil(start_clock / step) * step
    ticks = np.arange(first, start_clock + span + 1e-9, step) - start_clock
    sec.xaxis.set_major_locator(matplotlib.ticker.FixedLocator(ticks))

    def clock(m, _pos=None):
        when = _dt.datetime.fromtimestamp(t0 + m * 60.0, tz=_dt.UTC)
        return when.strftime("%H:%M")

    sec.xaxis.set_major_formatter(matplotlib.ticker.FuncFormatter(clock))
    day = _dt.datetime.fromtimestamp(t0, tz=_dt.UTC).strftime("%Y-%m-%d")
    sec.set_xlabel(f"time along the route (UTC, {day})", fontsize=9)
    sec.tick_params(labelsize=8)
    return sec


# ---------------------------------------------------------------------------------------- segment chart
def segment_chart_figure(assessment) -> Figure:
    """Per segment: accretion (mm) and minutes in icing, the plan against the best alternative altitude.

    Segments with partial data show the plan's known values as a lower bound (hatched, "at least"); segments
    without data are hatched over the whole bar slot and say "no data". Minutes in icing at the alternative are
    drawn when the assessment's ``alternatives`` table has an ``icing_minutes`` column; otherwise that panel
    shows the plan alone and says so.
    """
    seg = assessment.segments
    if seg.empty:
        raise IcingError("the assessment has no segments: nothing to draw")
    alts = assessment.alternatives
    n = len(seg)
    idx = np.arange(n)
    data = seg["data"].astype(object).where(seg["data"].notna(), "missing").to_numpy()
    best_alt = seg["best_altitude_ft"].to_numpy(float)
    plan_alt = np.array([_plan_altitude(alts, int(k)) for k in seg["segment"]])
    alt_minutes = len(alts) > 0 and "icing_minutes" in alts
    fig = new_figure("segments")
    axes = fig.subplots(1, 2, gridspec_kw={"left": 0.07, "right": 0.98, "top": 0.84, "bottom": 0.3, "wspace": 0.22})
    w = 0.38
    panels = [(axes[0], "accretion_mm", "accretion on the reference body (mm)", seg["best_accretion_mm"].to_numpy(
        float), "accretion"),
              (axes[1], "icing_minutes", "minutes in icing", np.array(
                  [_alt_value(alts, int(k), b - pa, "icing_minutes") for k, b, pa in
                   zip(seg["segment"], best_alt, plan_alt, strict=True)]) if alt_minutes else None, "minutes")]
    for ax, col, unit, best, what in panels:
        plan = np.where(data == "missing", 0.0, np.nan_to_num(seg[col].to_numpy(float)))
        x_plan = idx - w / 2 if best is not None else idx
        bars = ax.bar(x_plan, plan, w, color=PALETTE["plan"], zorder=2)
        for bar, d in zip(bars, data, strict=True):
            if d == "partial":
                bar.set_hatch(PARTIAL_HATCH)
                bar.set_edgecolor("white")
        if best is not None:
            ax.bar(idx + w / 2, np.nan_to_num(best), w, color=PALETTE["alternative"], zorder=2)
        top = max(1.0, float(np.nanmax(np.concatenate([plan, np.nan_to_num(best) if best is not None else []])))
                  * 1.3)
        ax.set_ylim(0, top)
        for i in idx:
            if data[i] == "missing":
                ax.bar(i, top, 2 * w + 0.1, facecolor=PALETTE["missing_face"], edgecolor=PALETTE["missing_hatch"],
                       hatch=MISSING_HATCH, lw=0, zorder=1)
                ax.text(i, top * 0.5, "no data:\nunknown", ha="center", va="center", fontsize=8, zorder=3,
                        bbox={"fc": "white", "ec": "none", "alpha": 0.9})
                continue
            ax.text(x_plan[i], plan[i], ("at least\n" if data[i] == "partial" else "") + f"{plan[i]:.0f}",
                    ha="center", va="bottom", fontsize=7, zorder=3)
            if best is None:
                continue
            if np.isfinite(best[i]) and np.isfinite(best_alt[i]):
                ax.text(i + w / 2, best[i], f"{best[i]:.0f}\nat {100 * round(best_alt[i] / 100):,.0f} ft",
                        ha="center", va="bottom", fontsize=7, zorder=3)
            else:
                ax.text(i + w / 2, 0, "no\nalternative\nwith full\ndata", ha="center", va="bottom", fontsize=6.5,
                        zorder=3, color="#444444")
        ax.set_xticks(idx)
        ax.set_xticklabels([f"{r.segment}\n{r.start}-{r.end}" for r in seg.itertuples()], fontsize=7.5,
                           rotation=0 if n <= 6 else 45)
        ax.set_ylabel(unit)
        ax.set_title(f"{what}: plan and best alternative" if best is not None else
                     f"{what}: plan (not computed at the alternatives)", fontsize=9)
        ax.grid(True, axis="y", color=PALETTE["grid"], lw=0.5, zorder=0)
    handles = [Patch(color=PALETTE["plan"], label="plan"),
               Patch(color=PALETTE["alternative"], label="best alternative altitude (labelled)"),
               Patch(facecolor=PALETTE["plan"], edgecolor="white", hatch=PARTIAL_HATCH,
                     label="partial data: lower bound"),
               Patch(facecolor=PALETTE["missing_face"], edgecolor=PALETTE["missing_hatch"], hatch=MISSING_HATCH,
                     label="no data: unknown")]
    fig.legend(handles=handles, loc="lower center", ncol=4, fontsize=8, frameon=False, bbox_to_anchor=(0.5, 0.07))
    s = assessment.summary
    fig.suptitle(f"Per segment: {s.get('route', '')}, aircraft {s.get('aircraft', '')}", fontsize=12, x=0.07,
                 ha="left", y=0.975)
    fig.text(0.07, 0.91, "best alternative: the least accretion among the whole-route altitude offsets tried, "
             "counted only with full data", fontsize=8, color="#444444")
    add_caution(fig)
    return fig


def _plan_altitude(alts, segment):
    """The segment's mean planned altitude as the alternatives table records it (offset 0), else NaN."""
    if not len(alts):
        return np.nan
    m = (alts["segment"] == segment) & (alts["offset_ft"] == 0)
    return float(alts.loc[m, "altitude_ft"].iloc[0]) if m.any() else np.nan


def _alt_value(alts, segment, offset, column):
    m = (alts["segment"] == segment) & np.isclose(alts["offset_ft"], offset, atol=1.0)
    return float(alts.loc[m, column].iloc[0]) if m.any() else np.nan


# ------------------------------------------------------------------------------------------------ output
def save_figure(fig, path) -> Path:
    """Write a figure to PNG or SVG chosen by the suffix of ``path``; returns the path."""
    path = Path(path)
    fmt = path.suffix.lower().lstrip(".")
    if fmt not in ("png", "svg"):
        raise IcingError(f"{path}: a figure is written as .png or .svg, not {path.suffix or 'no suffix'!r}")
    if not path.parent.exists():
        raise IcingError(f"{path}: the folder {path.parent} does not exist")
    fig.savefig(path, format=fmt, dpi=DPI, metadata={"Software": None} if fmt == "png" else None)
    return path


def plot_sounding_main(path, out, *, cold_limit=-40.0, airmass="supercooled", top_hpa=None, stream=None):
    """Draw every profile of a sounding file; the ``icing plot`` command.

    Parameters
    ----------
    path : path of a sounding file
    out : path (.png or .svg), or None / "-" for PNG on ``stream`` (stdout's binary buffer by default)
        A file holding several profiles gives one file each, named ``<stem>_<station>_<time><suffix>``.
    cold_limit, airmass, top_hpa : see :func:`sounding_figure`

    Returns
    -------
    list of Path written (empty when written to a stream).
    """
    import io
    import sys

    from icing.io import read_profiles

    to_stream = out is None or str(out) == "-"
    if not to_stream and Path(out).suffix.lower() not in (".png", ".svg"):
        raise IcingError(f"{out}: a figure is written as .png or .svg, not {Path(out).suffix or 'no suffix'!r}")
    if not to_stream and not Path(out).parent.exists():
        raise IcingError(f"{out}: the folder {Path(out).parent} does not exist")
    profiles = read_profiles(path)
    if to_stream:
        stream = stream if stream is not None else sys.stdout.buffer
        if hasattr(stream, "isatty") and stream.isatty():
            raise IcingError("refusing to write a PNG image to a terminal: give --out FILE.png or redirect")
        if len(profiles) > 1:
            raise IcingError(f"{path} holds {len(profiles)} profiles: give --out FILE to write one file each")
        buf = io.BytesIO()
        sounding_figure(profiles[0], cold_limit=cold_limit, airmass=airmass, top_hpa=top_hpa).savefig(
            buf, format="png", dpi=DPI)
        stream.write(buf.getvalue())
        return []
    out = Path(out)
    written = []
    for prof in profiles:
        target = out
        if len(profiles) > 1:
            a = prof.attrs
            tag = f"{a.get('station', 'x')}_{str(a.get('time', ''))[:13].replace(':', '').replace('-', '')}"
            target = out.with_name(f"{out.stem}_{tag}{out.suffix}")
        written.append(save_figure(sounding_figure(prof, cold_limit=cold_limit, airmass=airmass, top_hpa=top_hpa),
                                   target))
    return written

"""Figures: rendered with Agg to PNG; size, not blank, the caution, and hatching where the route leaves data.

The assessments here are synthetic (built below from a hand-made trajectory), so the tests do not depend on the
scenario data or on the accretion model; the sounding test reads one bundled demo sounding only as input.
"""

from __future__ import annotations

import io
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from matplotlib.backends.backend_agg import FigureCanvasAgg
from PIL import Image
from pyproj import Geod

from icing import CAUTION
from icing.errors import IcingError
from icing.flight.assess import EXTRA_COLUMNS, SEGMENT_COLUMNS, Assessment
from icing.report import plots
from icing.units import NMI

SAMPLES = Path(__file__).resolve().parents[1] / "sample_soundings"
SOUNDING = SAMPLES / "S1_00101_2026011500.csv"
WGS84 = Geod(ellps="WGS84")
WAYPOINTS = [("AAAAA", 50.0, -30.0), ("BBBBB", 50.0, -28.0), ("CCCCC", 50.0, -26.0), ("DDDDD", 50.0, -24.0)]
PER_LEG = 20


def synthetic_assessment(waypoints=WAYPOINTS, gap=True) -> Assessment:
    """A three-leg route: climb, cruise at 10,000 ft, descent; the second half of leg 2 has no data (coverage 0)
    when ``gap``; part of leg 3 has partial data. Rates span every intensity class."""
    rows = []
    seg_rows = []
    t0 = pd.Timestamp("2030-02-01T06:00:00Z")
    dist0 = 0.0
    n_leg = len(waypoints) - 1
    for k in range(n_leg):
        (na, lata, lona), (nb, latb, lonb) = waypoints[k], waypoints[k + 1]
        az, _, length = WGS84.inv(lona, lata, lonb, latb)
        f = (np.arange(PER_LEG) + 0.5) / PER_LEG
        lon, lat, _ = WGS84.fwd(np.full(PER_LEG, lona), np.full(PER_LEG, lata), np.full(PER_LEG, az), f * length)
        lon = (np.asarray(lon) + 180.0) % 360.0 - 180.0
        if k == 0:
            alt = 1000.0 + 9000.0 * f
        elif k == n_leg - 1:
            alt = 10000.0 - 8000.0 * f
        else:
            alt = np.full(PER_LEG, 10000.0)
        cov = np.ones(PER_LEG)
        if gap and k == 1:
            cov[f > 0.5] = 0.0
        if k == 2:
            cov[(f > 0.3) & (f < 0.5)] = 0.5
        rate = np.tile([0.0, 3.0, 10.0, 40.0, 100.0], PER_LEG // 5)
        rate = np.where(cov > 0, rate, np.nan)
        dur = np.full(PER_LEG, length / PER_LEG / 120.0)
        for i in range(PER_LEG):
            rows.append({
                "leg": k, "time": t0 + pd.Timedelta(seconds=float(dist0 / 120.0 + f[i] * length / 120.0)),
                "duration_s": dur[i], "latitude": float(lat[i]), "longitude": float(lon[i]), "altitude_ft": alt[i],
                "flight_level": alt[i] > 6000, "phase": "cruise", "tas_ms": 120.0, "ground_speed_ms": 120.0,
                "distance_m": dist0 + f[i] * length, "coverage": cov[i], "rate_mm_per_h": rate[i],
                "in_icing": bool(cov[i] > 0 and rate[i] > 0), "freezing_level_ft": 3000.0 if cov[i] > 0 else np.nan,
                "supercooled_top_ft": 8000.0 if cov[i] > 0 else np.nan,
                "data_distance_km": 50.0 if cov[i] > 0 else np.nan, "data_age_h": 2.0 if cov[i] > 0 else np.nan})
        status = "ok" if cov.min() >= 1 else "missing" if cov.max() <= 0 else "partial"
        acc = float(np.nansum(rate * dur / 3600.0))
        seg_rows.append({
            "segment": k + 1, "start": na, "end": nb, "start_time": "2030-02-01T06:00:00Z",
            "end_time": "2030-02-01T07:00:00Z", "distance_nm": length / NMI, "altitude_ft_min": float(alt.min()),
            "altitude_ft_max": float(alt.max()), "icing_minutes": float(dur[(rate > 0)].sum() / 60.0),
            "max_rate_mm_per_h": float(np.nanmax(rate)), "accretion_mm": acc,
            "intensity": "severe" if status == "ok" else "unknown", "ice_type": "rime", "large_drops": "none",
            "data": status, "sources": "X1 2030-02-01 00Z;X2 2030-02-01 00Z" if k < 2 else "X2 2030-02-01 00Z",
            "max_lwc_g_m3": 0.4, "mvd_um": 20.0, "min_temperature_c": -8.0, "freezing_level_ft": 3000.0,
            "supercooled_top_ft": 8000.0, "appendix_c": "within", "appendix_o": "n/a", "data_distance_km": 50.0,
            "data_age_h": 2.0, "best_altitude_ft": float(alt.mean()) + 4000.0 if status == "ok" else np.nan,
            "best_accretion_mm": acc / 3.0 if status == "ok" else np.nan})
        dist0 += length
    smp = pd.DataFrame(rows)
    smp["time_s"] = smp["time"].astype("int64") / 1e9
    smp["accretion_mm"] = smp["rate_mm_per_h"] * smp["duration_s"] / 3600.0
    for c in ("pressure_hpa", "temperature_c", "lwc_g_m3", "mvd_um", "large_drop"):
        smp[c] = np.where(smp["coverage"] > 0, 1.0, np.nan)
    smp["ice_type"] = np.where(smp["in_icing"], "rime", "none")
    seg = pd.DataFrame(seg_rows, columns=SEGMENT_COLUMNS + EXTRA_COLUMNS)
    alts = pd.DataFrame([{"segment": r["segment"], "offset_ft": o, "altitude_ft": 9000.0 + o,
                          "accretion_mm": r["accretion_mm"] / (1 + abs(o) / 1000)} for r in seg_rows
                         for o in (0.0, -2000.0, 2000.0, 4000.0)])
    summary = {"route": "synthetic", "departure": "2030-02-01T06:00:00Z", "aircraft": "test", "segments": n_leg,
               "reference_body_diameter_m": 0.05, "total_icing_minutes": float(seg["icing_minutes"].sum()),
               "total_accretion_mm": float(seg["accretion_mm"].sum()), "worst_segment": 1,
               "worst_intensity": "severe", "best_altitude_plan_accretion_mm": np.nan,
               "segments_missing_data": int((seg["data"] == "missing").sum()),
               "segments_partial_data": int((seg["data"] == "partial").sum()), "data_complete": False,
               "intensity_note": "note", "caution": CAUTION}
    return Assessment(segments=seg, summary=summary, samples=smp, alternatives=alts)


class GapSource:
    """A stand-in atmosphere source: data west of ``edge_lon`` only, a supercooled layer 1-2.5 km MSL there."""

    def __init__(self, edge_lon=-27.0):
        self.edge_lon = edge_lon

    def sample(self, latitude, longitude, time, pressure=None, height=None):
        lon = np.asarray(longitude, float)
        z = np.asarray(height, float)
        cov = np.where(lon < self.edge_lon, 1.0, 0.0)
        t = np.where(cov > 0, 10.0 - 6.5e-3 * z, np.nan)  # a standard-like lapse, for the 0 degC contour
        sc = np.where(cov > 0, ((z > 1000) & (z < 2500)).astype(float), np.nan)
        return {"coverage": cov, "supercooled": sc, "lwc": np.where(sc > 0, 0.3, 0.0), "temperature": t}


def render(fig) -> np.ndarray:
    """RGB pixels (rows from the top) exactly as a PNG of the figure would hold them."""
    canvas = FigureCanvasAgg(fig)
    canvas.draw()
    return np.asarray(canvas.buffer_rgba())[..., :3].astype(int)


def pixel_box(fig, ax, x0, x1, y0, y1):
    """Pixel index ranges (rows, columns) of a data-space box; rows counted from the top of the image."""
    (c0, r0), (c1, r1) = ax.transData.transform([(x0, y0), (x1, y1)])
    h = fig.bbox.height
    return slice(int(np.ceil(h - r1)), int(np.floor(h - r0))), slice(int(np.ceil(c0)), int(np.floor(c1)))


def hatch_fraction(img, rows, cols):
    """Fraction of pixels that are dark and grey: the missing-data hatch (#5a5a5a, antialiased)."""
    box = img[rows, cols]
    grey = (np.ptp(box, axis=-1) < 16) & (box.max(axis=-1) < 190)
    return float(grey.mean())


def assert_not_blank(png_bytes, size):
    im = Image.open(io.BytesIO(png_bytes))
    assert im.format == "PNG"
    assert im.size == size
    a = np.asarray(im.convert("RGB")).astype(int)
    assert (a.min(axis=-1) < 250).mean() > 0.05  # more than 5 % of pixels are not white
    assert len(np.unique(a.reshape(-1, 3), axis=0)) > 50


def png_bytes(fig):
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=plots.DPI)
    return buf.getvalue()


def expected_size(kind):
    w, h = plots.FIGURE_SIZES[kind]
    return round(w * plots.DPI), round(h * plots.DPI)


def has_caution(fig):
    text = " ".join(t.get_text().replace("\n", " ") for t in fig.texts)
    return CAUTION.split(":")[0] in text and "local regulations" in text


@pytest.fixture(scope="module")
def assessment():
    return synthetic_assessment()


def test_rate_classes_follow_the_intensity_thresholds():
    """Colour classes at 1/4, 1 and 3 in/h (US Air Weather Service 1980, as quoted; 25.4 mm per inch exact)."""
    from icing.physics.accretion import INTENSITY_THRESHOLDS_IN_PER_H

    assert INTENSITY_THRESHOLDS_IN_PER_H == (0.25, 1.0, 3.0)
    np.testing.assert_allclose(plots.RATE_BOUNDS[2:5], [6.35, 25.4, 76.2], rtol=1e-12)
    assert plots.RATE_CMAP.N == len(plots.RATE_WORDS) == 5


def test_cross_section_png_size_not_blank_caution(assessment):
    fig = plots.cross_section_figure(assessment)
    assert_not_blank(png_bytes(fig), expected_size("cross_section"))
    assert has_caution(fig)


@pytest.mark.parametrize("with_source", [False, True])
def test_cross_section_hatches_where_route_leaves_coverage(assessment, with_source):
    """The stretch of leg 2 without data is hatched over its height; the covered stretch of leg 1 is not."""
    fig = plots.cross_section_figure(assessment, GapSource() if with_source else None)
    img = render(fig)
    ax = fig.axes[0]
    wp = np.concatenate([[0.0], np.cumsum(assessment.segments["distance_nm"])])
    # Leg 2's second half has coverage 0 (samples) or lies east of -27 deg (source); band 11,000-13,500 ft
    # is above the path (10,000 ft) and below the segment labels.
    gap0 = wp[1] + 0.6 * (wp[2] - wp[1]) if not with_source else wp[1] + 0.62 * (wp[2] - wp[1])
    gap = pixel_box(fig, ax, gap0, wp[2] - 0.05 * (wp[2] - wp[1]), 11000, 13500)
    clear = pixel_box(fig, ax, wp[0] + 0.55 * (wp[1] - wp[0]), wp[1] - 0.1 * (wp[1] - wp[0]), 11000, 13500)
    assert hatch_fraction(img, *gap) > 0.05
    assert hatch_fraction(img, *clear) < 0.005


def test_cross_section_without_gap_has_no_hatch():
    """A route with full data everywhere draws no missing-data hatching at all."""
    a = synthetic_assessment(gap=False)
    fig = plots.cross_section_figure(a)
    ax = fig.axes[0]
    hatched = [p for p in ax.patches if p.get_hatch() == plots.MISSING_HATCH]
    assert hatched == []
    img = render(fig)
    wp = np.concatenate([[0.0], np.cumsum(a.segments["distance_nm"])])
    box = pixel_box(fig, ax, wp[1] + 0.6 * (wp[2] - wp[1]), wp[2] - 0.05 * (wp[2] - wp[1]), 11000, 13500)
    assert hatch_fraction(img, *box) < 0.005


def test_cross_section_unknown_rate_is_not_drawn_as_none(assessment):
    """Samples with unknown rate get the dashed unknown style, not the 'none' colour of the rate scale."""
    fig = plots.cross_section_figure(assessment)
    dashed = [c for c in fig.axes[0].collections if np.any([ls[1] is not None for ls in c.get_linestyles()])]
    n_unknown = int(np.isnan(assessment.samples.sort_values("distance_m")["rate_mm_per_h"].to_numpy()[:-1]).sum())
    assert n_unknown > 0
    assert sum(len(c.get_segments()) for c in dashed) == n_unknown


def test_cross_section_labels_waypoints_and_segments(assessment):
    fig = plots.cross_section_figure(assessment)
    texts = {t.get_text() for t in fig.axes[0].texts}
    for name, _, _ in WAYPOINTS:
        assert name in texts
    for k in (1, 2, 3):
        assert any(t.startswith(f"{k}: ") for t in texts)
    assert any("partial data" in t for t in texts)


def test_segment_chart_png_and_missing_segment():
    """A segment without data says "no data" and is hatched; sizes and caution as for every figure."""
    a = synthetic_assessment()
    a.segments.loc[1, "data"] = "missing"
    fig = plots.segment_chart_figure(a)
    assert_not_blank(png_bytes(fig), expected_size("segments"))
    assert has_caution(fig)
    for ax in fig.axes:
        assert any("no data" in t.get_text() for t in ax.texts)
        assert any(p.get_hatch() == plots.MISSING_HATCH for p in ax.patches)


def test_sounding_figure_shades_supercooled_levels():
    """PNG of the expected size; the supercooled band is shaded at a pressure the diagnosis calls supercooled
    and not at one it does not."""
    from icing.io import read_profiles
    from icing.physics.diagnose import diagnose

    ds = diagnose(read_profiles(SOUNDING)[0])
    fig = plots.sounding_figure(ds)
    assert has_caution(fig)
    data = png_bytes(fig)
    assert_not_blank(data, expected_size("sounding"))
    img = np.asarray(Image.open(io.BytesIO(data)).convert("RGB")).astype(int)
    p = ds["pressure"].values
    sc = ds["supercooled"].values.astype(bool)
    inside = float(p[sc][np.argmin(np.abs(p[sc] - np.median(p[sc])))])
    outside = float(p[~sc & (p < p[sc].min() - 100)][0])
    ax = next(a for a in fig.axes if a.get_xlabel().startswith("LWC"))
    x_right = ax.get_xlim()[1] * 0.97  # near the right edge: no LWC or MVD line there
    from matplotlib.colors import to_rgb

    shade = 255 - plots.SHADE_ALPHA * (255 - 255 * np.array(to_rgb(plots.PALETTE["supercooled"])))  # on white

    def looks_shaded(pressure):
        (c, r), = ax.transData.transform([(x_right, pressure)])
        px = img[int(fig.bbox.height - r), int(c)]
        return bool(np.all(np.abs(px - shade) < 14))

    assert looks_shaded(inside)
    assert not looks_shaded(outside)


def test_sounding_figure_rejects_many_profiles():
    from icing.io import read_profiles
    from icing.profile import stack_profiles

    two = stack_profiles(read_profiles(SOUNDING) + read_profiles(SAMPLES / "S2_00102_2026011500.csv"))
    with pytest.raises(IcingError, match="one profile"):
        plots.sounding_figure(two)


def test_save_figure_png_svg_and_bad_suffix(tmp_path, assessment):
    fig = plots.segment_chart_figure(assessment)
    png = plots.save_figure(fig, tmp_path / "a.png")
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (ISO/IEC 15948)
    svg = plots.save_figure(fig, tmp_path / "a.svg").read_text()
    assert "<svg" in svg and "ADVISORY" in svg
    with pytest.raises(IcingError, match=".png or .svg"):
        plots.save_figure(fig, tmp_path / "a.jpg")
    with pytest.raises(IcingError, match="does not exist"):
        plots.save_figure(fig, tmp_path / "nowhere" / "a.png")


def test_plot_sounding_main_stream_and_refusals(tmp_path):
    """PNG on a stream (the pipe case; files are written in the CLI tests), never onto a terminal."""
    buf = io.BytesIO()
    assert plots.plot_sounding_main(SOUNDING, None, stream=buf) == []
    assert Image.open(io.BytesIO(buf.getvalue())).size == expected_size("sounding")

    class Tty(io.BytesIO):
        def isatty(self):
            return True

    with pytest.raises(IcingError, match="terminal"):
        plots.plot_sounding_main(SOUNDING, "-", stream=Tty())
    with pytest.raises(IcingError, match=".png or .svg"):
        plots.plot_sounding_main(SOUNDING, tmp_path / "s.gif")


def test_route_without_any_data_is_hatched_everywhere():
    """No data anywhere: the whole cross-section is hatched and every segment bar slot says "no data"."""
    a = synthetic_assessment()
    a.samples["coverage"] = 0.0
    for c in ("rate_mm_per_h", "freezing_level_ft", "supercooled_top_ft"):
        a.samples[c] = np.nan
    a.segments["data"] = "missing"
    fig = plots.cross_section_figure(a)
    img = render(fig)
    ax = fig.axes[0]
    wp = np.concatenate([[0.0], np.cumsum(a.segments["distance_nm"])])
    for k in range(3):
        lo, hi = wp[k] + 0.2 * (wp[k + 1] - wp[k]), wp[k + 1] - 0.2 * (wp[k + 1] - wp[k])
        assert hatch_fraction(img, *pixel_box(fig, ax, lo, hi, 11000, 13500)) > 0.05
        assert hatch_fraction(img, *pixel_box(fig, ax, lo, hi, 500, 1000 if k < 2 else 1500)) > 0.05
    chart = plots.segment_chart_figure(a)
    for axc in chart.axes:
        assert sum("no data" in t.get_text() for t in axc.texts) == 3


@pytest.mark.parametrize("km, pa", [(1, 89875), (3, 70109), (5, 54020), (8, 35600), (10, 26436)])
def test_pressure_altitude_against_the_standard_atmosphere(km, pa):
    """US Standard Atmosphere 1976 (geopotential km -> Pa): the flight-level labels' pressure altitude."""
    np.testing.assert_allclose(plots.pressure_altitude_ft(pa / 100.0), km * 1000 / 0.3048, rtol=1e-3)


def test_wind_barbs_in_knots_against_metpy():
    """Barb components in knots equal MetPy's wind_components (reference library) with 1 kt = 1852/3600 m/s."""
    import xarray as xr
    from metpy.calc import wind_components
    from metpy.units import units

    p = np.array([1000.0, 990.0, 850.0, 700.0, 500.0])
    spd = np.array([6.2, 6.5, 15.0, 0.0, 30.0])  # m/s
    wdir = np.array([240.0, 245.0, 270.0, 0.0, 10.0])
    ds = xr.Dataset({"pressure": ("level", p), "wind_speed": ("level", spd), "wind_direction": ("level", wdir)})
    bp, u, v = plots._wind_barbs(ds, 1050.0)
    assert 990.0 not in bp  # thinned: closer than 0.045 in ln p to 1000 hPa
    keep = np.isin(p, bp)
    ru, rv = wind_components(spd[keep] * units("m/s"), wdir[keep] * units.deg)
    np.testing.assert_allclose(u, ru.to("knot").m, atol=1e-6)
    np.testing.assert_allclose(v, rv.to("knot").m, atol=1e-6)


def test_sounding_figure_axes_people_fly_by():
    """Right-hand labels: a flight level and the sounding's height in ft at each standard pressure; wind barbs
    drawn; other report times of the station overlaid and named in the legend."""
    from icing.io import read_profiles
    from icing.physics.diagnose import diagnose

    prof = read_profiles(SOUNDING)[0]
    other = read_profiles(SAMPLES / "S1_00101_2026011512.csv")[0]
    fig = plots.sounding_figure(prof, others=[("00101 12Z", diagnose(other))])
    ax = next(a for a in fig.axes if a.get_xlabel().startswith("LWC"))
    labels = {round(t): lab.get_text() for t, lab in zip(ax.get_yticks(), ax.get_yticklabels(), strict=True)}
    assert labels[700].startswith("FL099")  # 700 hPa is 3,012 m = 9,882 ft pressure altitude (US Std Atm 1976)
    z = prof["height"].values / 0.3048
    p = prof["pressure"].values
    expected = np.interp(-np.log(700.0), -np.log(p), z)
    shown = float(labels[700].split("\n")[1].replace(",", "").replace(" ft", ""))
    np.testing.assert_allclose(shown, expected, atol=1.0)
    skew = fig.axes[0]
    assert any(type(c).__name__ == "Barbs" for c in skew.collections)
    legend = " ".join(t.get_text() for lg in fig.legends for t in lg.get_texts())
    assert "also used: 00101 12Z" in legend and "kt" in legend


def test_cross_section_clock_time_and_flight_levels(assessment):
    """A second x axis gives the clock time (UTC) of the samples at their distance; the right axis flight
    levels (altitude / 100 ft)."""
    fig = plots.cross_section_figure(assessment)
    ax = fig.axes[0]
    secondary = [c for c in ax.child_axes if type(c).__name__ == "SecondaryAxis"]
    time_ax = next(c for c in secondary if c.get_xlabel().startswith("time along the route (UTC"))
    fl_ax = next(c for c in secondary if c.get_ylabel().startswith("flight level"))
    smp = assessment.samples.sort_values("distance_m")
    x = smp["distance_m"].to_numpy() / NMI
    t = smp["time_s"].to_numpy()
    to_minutes = time_ax._functions[0]
    mid = len(x) // 2
    np.testing.assert_allclose(to_minutes(x[mid]), (t[mid] - t[0]) / 60.0 + to_minutes(x[0]), atol=0.05)
    fig.canvas.draw()
    clock = [lab.get_text() for lab in time_ax.get_xticklabels() if lab.get_text()]
    assert clock and all(len(c) == 5 and c[2] == ":" for c in clock)
    assert fl_ax._functions[0](np.array([10000.0]))[0] == 100.0


def test_figures_take_the_new_segment_dtypes():
    """datetime64[ns, UTC] times, ordered Categoricals and a segment without data: both route figures draw, and
    the missing segment reads 'unknown (missing data)', never 'none'."""
    from test_report_tables import typed_assessment

    a = typed_assessment()
    fig = plots.cross_section_figure(a)
    texts = [t.get_text() for t in fig.axes[0].texts]
    assert "2: unknown (missing data)" in texts
    fig2 = plots.segment_chart_figure(a)
    assert any("no data" in t.get_text() for ax in fig2.axes for t in ax.texts)

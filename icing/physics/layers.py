"""Layer tables of one profile: supercooled-liquid layers, cloud layers and freezing levels.

Each function takes one canonical profile Dataset, diagnoses it (:func:`icing.physics.diagnose.diagnose`) and
returns a :class:`pandas.DataFrame`, one row a layer. The cloud thresholds they use are those of
:mod:`icing.physics.cloud` (re-exported here for the tables' users).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from icing.physics.cloud import (
    CLOUD_DEFAULTS,
    ZHANG_HEIGHTS_M,
    ZHANG_INTER_RH,
    ZHANG_MAX_RH,
    ZHANG_MIN_RH,
    zhang_thresholds,
)
from icing.physics.precipitation import LARGE_DROP_POTENTIAL, LARGE_DROP_REASONS, PRECIPITATION_TYPES
from icing.units import FT

__all__ = [
    "ZHANG_HEIGHTS_M", "ZHANG_MIN_RH", "ZHANG_MAX_RH", "ZHANG_INTER_RH", "CLOUD_DEFAULTS",
    "PRECIPITATION_TYPES", "zhang_thresholds", "supercooled_layers", "cloud_layers", "freezing_levels",
    "SUPERCOOLED_COLUMNS", "CLOUD_COLUMNS",
]


def _true_runs(mask):
    """First and last index of every run of True in a 1-D mask, and each element's run number (-1 off)."""
    m = np.concatenate([[False], np.asarray(mask, dtype=bool), [False]])
    edges = np.flatnonzero(m[1:] != m[:-1])
    starts, ends = edges[0::2], edges[1::2] - 1
    rid = np.full(m.size - 2, -1)
    for r, (s, e) in enumerate(zip(starts, ends, strict=True)):
        rid[s:e + 1] = r
    return starts, ends, rid

# --- tables for one profile ----------------------------------------------------------------------------

_FLAG_WORDS = {"height_filled": "height filled", "dewpoint_derived": "dewpoint derived from RH",
               "value_changed": "value changed by checks", "value_removed": "value removed by checks",
               "merged": "duplicate levels merged", "humidity_derived": "RH derived from dewpoint"}


def _single(profile, **params):
    from icing.physics.diagnose import diagnose

    extra = [d for d in profile.dims if d != "level" and profile.sizes[d] > 1]
    if extra:
        from icing.errors import ProfileQualityError

        raise ProfileQualityError(f"a layer table is for one profile; this one has dimensions {extra}; select "
                                  "one profile first (for example ds.isel(profile=0))")
    profile = profile.squeeze(drop=True) if extra == [] and len(profile.dims) > 1 else profile
    return diagnose(profile, **params)


def _quality_text(ds, lo, hi):
    """Words for the filled, changed or unusable levels among levels lo..hi (inclusive)."""
    from icing.profile import QC_FLAGS

    notes = []
    if "qc_flag" in ds:
        fl = ds["qc_flag"].values[lo:hi + 1].astype(int)
        for name, bit in QC_FLAGS.items():
            if name in ("humidity_derived", "dewpoint_derived"):
                continue  # the routine conversion between dewpoint and RH, not a repair
            k = int(np.count_nonzero(fl & bit))
            if k:
                notes.append(f"{_FLAG_WORDS.get(name, name)} at {k} level{'s' if k > 1 else ''}")
    bad = int(np.count_nonzero(~ds["valid"].values[lo:hi + 1]))
    if bad:
        notes.append(f"{bad} level{'s' if bad > 1 else ''} without temperature or humidity (interpolated)")
    return "; ".join(notes)


def _edges(z, lo, hi, crit):
    """Boundary heights of the run lo..hi: where a criterion flips between the run and its neighbours."""
    def between(a, b):
        for f in crit:
            fa, fb = f[a], f[b]
            if np.isfinite(fa) and np.isfinite(fb) and (fa >= 0) != (fb >= 0):
                return z[a] + fa / (fa - fb) * (z[b] - z[a])
        return 0.5 * (z[a] + z[b]) if np.isfinite(z[b]) else z[a]

    base = between(lo, lo - 1) if lo > 0 else z[lo]
    top = between(hi, hi + 1) if hi + 1 < z.size else z[hi]
    return base, top


def _layer_rows(ds, mask, crit):
    z = ds["height"].values.astype(float)
    p = ds["pressure"].values.astype(float)
    t = ds["temperature"].values.astype(float)
    ok = np.isfinite(z) & np.isfinite(p)
    rows = []
    s, e, _ = _true_runs(mask)
    for lo, hi in zip(s, e, strict=True):
        base, top = _edges(z, int(lo), int(hi), crit)
        zz, pp, tt = z[ok], np.log(p[ok]), t[ok]
        tok = np.isfinite(tt)
        rows.append({"lo": int(lo), "hi": int(hi), "base_height_m": float(base), "top_height_m": float(top),
                     "base_height_ft": float(base) / FT, "top_height_ft": float(top) / FT,
                     "base_pressure_hpa": float(np.exp(np.interp(base, zz, pp))),
                     "top_pressure_hpa": float(np.exp(np.interp(top, zz, pp))),
                     "base_temperature_c": float(np.interp(base, zz[tok], tt[tok])),
                     "top_temperature_c": float(np.interp(top, zz[tok], tt[tok])),
                     "thickness_m": float(top - base)})
    return rows


def _criteria(ds, params):
    """Height, temperature and the signed criteria whose sign flips mark layer edges."""
    z = ds["height"].values.astype(float)
    z_agl = z - z[np.isfinite(z)][0]
    t = ds["temperature"].values.astype(float)
    rh_cloud = np.where(t < 0.0, ds["rh_ice"].values, ds["rh_water"].values)
    min_rh = zhang_thresholds(z_agl, params.get("min_rh", ZHANG_MIN_RH))
    liquid_rh = params.get("liquid_rh")
    liq = min_rh if liquid_rh is None else float(liquid_rh)
    cold_c = float(ds.attrs["cold_limit"])
    return z, t, rh_cloud - min_rh, -t, t - cold_c, ds["rh_water"].values - liq


_KIND = {0: "", 1: "stratiform", 2: "convective"}
_DROP = {0: "none", 1: "drizzle", 2: "rain"}
SUPERCOOLED_COLUMNS = ["base_height_m", "top_height_m", "base_height_ft", "top_height_ft", "base_pressure_hpa",
                       "top_pressure_hpa", "base_temperature_c", "top_temperature_c", "thickness_m",
                       "max_lwc_g_m3", "mvd_um", "cloud_top_temperature_c", "kind", "large_drop",
                       "large_drop_potential", "large_drop_reason", "quality"]


def supercooled_layers(profile, **params) -> pd.DataFrame:
    """Supercooled-liquid layers of one profile, one row a layer (heights in m and ft).

    Parameters are those of :func:`icing.physics.diagnose.diagnose`. Columns: ``base_height_m``, ``top_height_m``,
    ``base_height_ft``, ``top_height_ft``, ``base_pressure_hpa``, ``top_pressure_hpa``,
    ``base_temperature_c``, ``top_temperature_c``, ``thickness_m``, ``max_lwc_g_m3``, ``mvd_um`` (at the level
    of largest LWC), ``cloud_top_temperature_c`` (of the cloud layer holding it), ``kind`` (stratiform or
    convective), ``large_drop`` (none, drizzle or rain), ``large_drop_potential`` (none, possible or likely:
    the highest in the layer), ``large_drop_reason`` (why, at the level of that potential; see
    :data:`icing.physics.precipitation.LARGE_DROP_REASONS`) and ``quality`` (filled, changed or unusable levels
    in the layer; empty if none). Layer edges are interpolated where temperature crosses 0 degC or the cold limit
    or RH crosses the cloud threshold.
    """
    ds = _single(profile, **params)
    z, t, f_cloud, f_warm, f_cold, f_liq = _criteria(ds, params)
    sc = ds["supercooled"].values.astype(bool)
    rows = _layer_rows(ds, sc, (f_warm, f_cold, f_cloud, f_liq))
    cl = ds["in_cloud"].values.astype(bool)
    cs, ce, crid = _true_runs(cl)
    out = []
    lwc, mvd = ds["lwc"].values, ds["mvd"].values
    for r in rows:
        lo, hi = r.pop("lo"), r.pop("hi")
        seg = lwc[lo:hi + 1]
        k = lo + int(np.nanargmax(seg)) if np.any(np.isfinite(seg)) else lo
        cid = crid[lo]
        top_level = int(ce[cid]) if cid >= 0 else hi
        cloud_top = _edges(z, int(cs[cid]) if cid >= 0 else lo, top_level, (f_cloud,))[1]
        ok = np.isfinite(z) & np.isfinite(t)
        r.update({"max_lwc_g_m3": float(np.nanmax(seg)) if np.any(np.isfinite(seg)) else np.nan,
                  "mvd_um": float(mvd[k]), "cloud_top_temperature_c": float(np.interp(cloud_top, z[ok], t[ok])),
                  "kind": _KIND[int(ds["cloud_kind"].values[lo:hi + 1].max())],
                  "large_drop": _DROP[int(ds["large_drop"].values[lo:hi + 1].max())],
                  **_large_drop_grade(ds, lo, hi),
                  "quality": _quality_text(ds, max(lo - 1, 0), min(hi + 1, z.size - 1))})
        out.append(r)
    return pd.DataFrame(out, columns=SUPERCOOLED_COLUMNS)


def _large_drop_grade(ds, lo, hi):
    """The largest large-drop potential of levels lo..hi and the reason at the level where it is largest."""
    pot = ds["large_drop_potential"].values[lo:hi + 1]
    k = lo + int(np.argmax(pot))
    return {"large_drop_potential": LARGE_DROP_POTENTIAL[int(pot.max())],
            "large_drop_reason": LARGE_DROP_REASONS[int(ds["large_drop_reason"].values[k])]}


CLOUD_COLUMNS = ["base_height_m", "top_height_m", "base_height_ft", "top_height_ft", "base_pressure_hpa",
                 "top_pressure_hpa", "base_temperature_c", "top_temperature_c", "thickness_m", "max_lwc_g_m3",
                 "supercooled_levels", "kind", "quality"]


def cloud_layers(profile, **params) -> pd.DataFrame:
    """Cloud layers of one profile by the Zhang et al. (2010) RH thresholds, one row a layer.

    Columns as :func:`supercooled_layers` for the geometry, plus ``max_lwc_g_m3``, ``supercooled_levels``
    (count), ``kind`` and ``quality``.
    """
    ds = _single(profile, **params)
    z, t, f_cloud, _, _, _ = _criteria(ds, params)
    cl = ds["in_cloud"].values.astype(bool)
    rows = _layer_rows(ds, cl, (f_cloud,))
    out = []
    for r in rows:
        lo, hi = r.pop("lo"), r.pop("hi")
        seg = ds["lwc"].values[lo:hi + 1]
        r.update({"max_lwc_g_m3": float(np.nanmax(seg)) if np.any(np.isfinite(seg)) else np.nan,
                  "supercooled_levels": int(ds["supercooled"].values[lo:hi + 1].sum()),
                  "kind": _KIND[int(ds["cloud_kind"].values[lo:hi + 1].max())],
                  "quality": _quality_text(ds, max(lo - 1, 0), min(hi + 1, z.size - 1))})
        out.append(r)
    return pd.DataFrame(out, columns=CLOUD_COLUMNS)


def freezing_levels(profile, **params) -> pd.DataFrame:
    """Every 0 degC crossing of one profile, lowest first.

    Columns: ``height_m``, ``height_ft``, ``pressure_hpa`` and ``direction``: ``"cooling upward"`` where the
    air above is sub-freezing (a freezing level in the usual sense) or ``"warming upward"`` (the base of a
    warm layer aloft). Levels without temperature are bridged by interpolation in ln p and the ``quality``
    column says so.
    """
    ds = _single(profile, **params)
    z = ds["height"].values.astype(float)
    p = ds["pressure"].values.astype(float)
    t = ds["temperature"].values.astype(float)
    ok = np.isfinite(t) & np.isfinite(z) & np.isfinite(p)
    idx = np.flatnonzero(ok)
    rows = []
    for a, b in zip(idx[:-1], idx[1:], strict=True):
        if (t[a] > 0.0) == (t[b] > 0.0):
            continue
        frac = (0.0 - t[a]) / (t[b] - t[a])
        h = z[a] + frac * (z[b] - z[a])
        rows.append({"height_m": float(h), "height_ft": float(h) / FT,
                     "pressure_hpa": float(np.exp(np.log(p[a]) + frac * (np.log(p[b]) - np.log(p[a])))),
                     "direction": "cooling upward" if t[a] > 0.0 else "warming upward",
                     "quality": "" if b == a + 1 else f"{b - a - 1} level(s) without temperature bridged"})
    return pd.DataFrame(rows, columns=["height_m", "height_ft", "pressure_hpa", "direction", "quality"])

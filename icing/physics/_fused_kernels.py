"""The compiled column kernels of :mod:`icing.physics.fused` (imported only when numba is installed).

Every function mirrors the numpy function named in its comment; see :mod:`icing.physics.fused` for the contract.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit, types

from icing.physics import layers, thermo

T0 = thermo.T0
RD = thermo.RD
CP_D = thermo.CP_D
EPS = thermo.EPSILON
KAPPA = layers.KAPPA
LN_T0 = float(np.log(thermo.T0))
MODEL_CLOUD_MIN = 1e-5  # as icing.physics.diagnose._MODEL_CLOUD_MIN
# Precipitation phases of icing.physics.layers.precipitation_type
_NONE, _SN, _RA, _FZRA, _PL, _FZRAPL, _RASN, _RAPL, _FZDZ, _DZ, _MELTED = 0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10


jit = njit(nogil=True, cache=True, error_model="numpy")
# One compiled signature for the entry points: inputs as read-only arrays of any layout (numpy's broadcast
# views and dask's chunks are read-only; a writable array converts to these), outputs C-contiguous.
f8, b1 = types.float64, types.boolean
ro1, ro2 = types.Array(f8, 1, "A", readonly=True), types.Array(f8, 2, "A", readonly=True)
rob2 = types.Array(b1, 2, "A", readonly=True)
w1, w2, wb2 = types.Array(f8, 1, "C"), types.Array(f8, 2, "C"), types.Array(b1, 2, "C")
wi8_1, wi8_2, wi64_1 = types.Array(types.int8, 1, "C"), types.Array(types.int8, 2, "C"), \
    types.Array(types.int64, 1, "C")
block_sig = types.void(ro2, ro2, ro2, ro2, ro2, b1, ro2, ro2, ro2, f8, ro1, ro1, ro1, ro1, ro1, f8, ro1, ro1,
                       ro1, ro1, ro1, ro1, ro1, b1, f8, f8, b1, w2, w2, wb2, wb2, w2, w2, w2, wi8_2, wb2, wi8_2,
                       wi8_1, wi64_1, w1, w2, w1, w1, wb2)
potential_sig = types.void(ro2, rob2, f8, f8, f8, f8, wi8_2, wi8_1, w1)

@jit
def ln_esw(t, lnt):
    # icing.physics.diagnose._ln_esw: ln e_w of Murphy and Koop (2005) eq. 10, tanh as 1 - 2/(exp(2u) + 1)
    inv = 1.0 / t
    th = math.exp((t - 218.8) * 0.083)
    th += 1.0
    th = -2.0 / th
    th += 1.0
    poly = -9.44523 * lnt
    poly += 53.878
    poly -= 1331.22 * inv
    poly += 0.014025 * t
    th *= poly
    out = -4.210 * lnt
    out += 54.842763
    out -= 6763.22 * inv
    out += 0.000367 * t
    return out + th

@jit
def interp(x, xp, fp):
    # np.interp at one point, numpy's algorithm (numpy/_core/src/multiarray/compiled_base.c, arr_interp)
    m = xp.size
    if x != x:
        return x
    if x < xp[0]:
        return fp[0]
    if x >= xp[m - 1]:
        return fp[m - 1]
    lo = 0
    hi = m - 1
    while hi - lo > 1:  # xp[lo] <= x < xp[hi]
        mid = (lo + hi) >> 1
        if xp[mid] <= x:
            lo = mid
        else:
            hi = mid
    if xp[lo] == x:
        return fp[lo]
    slope = (fp[lo + 1] - fp[lo]) / (xp[lo + 1] - xp[lo])
    r = slope * (x - xp[lo]) + fp[lo]
    if r != r:
        r = slope * (x - xp[lo + 1]) + fp[lo + 1]
        if r != r and fp[lo] == fp[lo + 1]:
            r = fp[lo]
    return r

@jit
def interp4(x, h0, h1, h2, h3, f0, f1, f2, f3, s0, s1, s2):
    # interp() on four points given as scalars, with the slopes computed once as numpy computes them
    # (np.interp precomputes the slopes when it has more points to evaluate than table entries)
    if x != x:
        return x
    if x < h0:
        return f0
    if x >= h3:
        return f3
    if x < h1:
        h, f, s = h0, f0, s0
    elif x < h2:
        h, f, s = h1, f1, s1
    else:
        h, f, s = h2, f2, s2
    if x == h:
        return f
    return s * (x - h) + f  # (numpy's NaN fallbacks cannot arise: finite thresholds, finite x)


@jit
def clip(x, lo, hi):  # np.clip, NaN kept
    if x < lo:
        return lo
    if x > hi:
        return hi
    return x

@jit
def fmaximum(a, b):  # np.maximum, NaN propagates
    if a != a or b != b:
        return np.nan
    return a if a >= b else b

@jit
def bilinear(flat, ncol, a0, da, na, v, l0, dl, nl, lnp):
    # icing.physics.adiabat._bilinear on a (axis, ln p) table raveled to ``flat``
    f0 = clip((v - a0) / da, 0.0, na - 1.000001)
    f1 = clip((lnp - l0) / dl, 0.0, nl - 1.000001)
    if not (np.isfinite(f0) and np.isfinite(f1)):  # a NaN input gives NaN (never an index out of the table)
        return np.nan
    i0 = int(f0)
    i1 = int(f1)
    w0 = f0 - i0
    w1 = f1 - i1
    nc = np.int64(ncol)
    k = i0 * nc + i1
    a = flat[k] * (1.0 - w1) + flat[k + 1] * w1
    b = flat[k + nc] * (1.0 - w1) + flat[k + nc + 1] * w1
    return a * (1.0 - w0) + b * w0

@jit
def bolton_es(t):  # icing.physics.adiabat.saturation_vapor_pressure_bolton
    return 611.2 * math.exp(17.67 * (t - 273.15) / (t - 29.65))

@jit
def bolton_rs(p, t):  # icing.physics.adiabat.saturation_mixing_ratio_bolton
    es = bolton_es(t)
    d = p - es
    return EPS * es / (d if d > 1e-3 else 1e-3)

@jit
def lwc_adiabatic(p, tp, rt):  # icing.physics.adiabat.adiabatic_liquid_water_content
    es = bolton_es(tp)
    rho_d = (p - es) / (RD * tp)
    d = p - es
    rs = EPS * es / (d if d > 1e-3 else 1e-3)
    x = rt - rs
    return rho_d * (x if x > 0.0 else 0.0)

@jit
def runs(mask, n, starts, ends):  # icing.physics.layers._runs for one column; returns the count
    nr = 0
    k = 0
    while k < n:
        if mask[k]:
            starts[nr] = k
            while k + 1 < n and mask[k + 1]:
                k += 1
            ends[nr] = k
            nr += 1
        k += 1
    return nr

@jit
def run_bounds(z, zb, s, e, n):  # icing.physics.layers._run_bounds
    lo = zb[s - 1] if s > 0 else np.nan
    hi = zb[e] if e < n - 1 else np.nan
    if not np.isfinite(lo):
        lo = z[s]
    if not np.isfinite(hi):
        hi = z[e]
    return lo, hi

@jit
def column(p, lnp, t, td, z, cl, has_cl, td_raw, t_raw, z_raw, cold_limit, heights, min_v, max_v, inter_v, prm,
           liquid_rh, tab, tab_ax, inv, inv_ax, lnp_ax, cap_t, cap_v, use_cap, mvd_denom, mvd_ratio,
           want_summary, n, o_rhw, o_rhi, o_cloud, o_sc, o_lf, o_lwc, o_mvd, o_large, o_warm, o_kind,
           o_lev, o_base, o_top, o_valid, scr_f, scr_i, scr_b):
    """One column (level arrays of length n, t/td/z gaps filled, td not yet held to t); returns
    (precipitation type, freezing-level count, lowest freezing level). Scratch arrays: scr_f (11, n)
    floats (row 1 holds ln p, set by the caller), scr_i (5, n) ints, scr_b (8, n) bools."""
    (min_moist_base, min_moist_thick, min_cloud_base, merge_gap, thin_low, thin_high, low_limit,
     conv_excess, f_strat, f_conv, dz_top_t, dz_min_thick, melt_aloft) = (
        prm[0], prm[1], prm[2], prm[3], prm[4], prm[5], prm[6], prm[7], prm[8], prm[9], prm[10], prm[11],
        prm[12])
    lnt, rhc, zagl, minrh, f = scr_f[0], scr_f[2], scr_f[3], scr_f[4], scr_f[5]
    zb, tpar, lwcad, area, lnth = scr_f[6], scr_f[7], scr_f[8], scr_f[9], scr_f[10]
    starts, ends, gst, gen, lid = scr_i[0], scr_i[1], scr_i[2], scr_i[3], scr_i[4]
    moist, gap, model, dz_src, fin, warm, rain2, carry_b = (scr_b[0], scr_b[1], scr_b[2], scr_b[3],
                                                            scr_b[4], scr_b[5], scr_b[6], scr_b[7])
    # --- humidity (icing.physics.diagnose._relative_humidities) and the height above the lowest level
    z0 = np.nan
    for k in range(n):
        if np.isfinite(z[k]):
            z0 = z[k]
            break
    if not np.isfinite(z0):
        z0 = z[0]
    h0, h1, h2, h3 = heights[0], heights[1], heights[2], heights[3]  # (four heights: layers.ZHANG_HEIGHTS_M)
    m0, m1, m2, m3 = min_v[0], min_v[1], min_v[2], min_v[3]
    ms0, ms1, ms2 = (m1 - m0) / (h1 - h0), (m2 - m1) / (h2 - h1), (m3 - m2) / (h3 - h2)
    all_t = True  # every level has a temperature
    any_t = False
    any_warm = False
    any_cold = False
    humidity_complete = True
    cloud = o_cloud
    for k in range(n):  # one pass: humidity, height above ground, the min-RH criterion, level flags
        tk = t[k]
        tdk = td[k]  # np.minimum(td, t): dewpoint at most the temperature, NaN if either is
        if tdk != tdk or tk != tk:
            tdk = np.nan
        elif tdk > tk:
            tdk = tk
        o_valid[k] = np.isfinite(p[k]) and np.isfinite(t_raw[k]) and np.isfinite(td_raw[k])
        lt = np.log(tk)
        lnt[k] = lt
        ltd = np.log(tdk)
        ln_e = ln_esw(tdk, ltd)
        ln_ew = ln_esw(tk, lt)
        ln_ei = 3.53068 * lt
        ln_ei += 9.550426
        ln_ei -= 5723.265 / tk
        ln_ei -= 0.00728332 * tk
        rw = math.exp(ln_e - ln_ew) * 100.0
        ri = math.exp(ln_e - ln_ei) * 100.0
        o_rhw[k] = rw
        o_rhi[k] = ri
        rc = ri if tk < T0 else rw
        rhc[k] = rc
        za = z[k] - z0
        zagl[k] = za
        mr = interp4(za, h0, h1, h2, h3, m0, m1, m2, m3, ms0, ms1, ms2)  # layers.zhang_thresholds
        minrh[k] = mr
        # cloud_mask: the min-RH criterion and its crossing height inside each interval (layers._boundaries)
        fk = rc - mr
        f[k] = fk
        moist[k] = fk >= 0.0
        if k > 0:
            f0 = f[k - 1]
            frac = f0 / (f0 - fk) if (f0 >= 0) != (fk >= 0) else 0.5
            frac = clip(frac, 0.0, 1.0)
            zb[k - 1] = zagl[k - 1] + frac * (za - zagl[k - 1])
        cloud[k] = False
        o_kind[k] = 0
        dz_src[k] = False
        model[k] = False
        ft = np.isfinite(tk)
        fin[k] = ft
        wk = ft and tk > T0
        warm[k] = wk
        all_t = all_t and ft
        any_t = any_t or ft
        any_warm = any_warm or wk
        any_cold = any_cold or (ft and not wk)
        if ft and not np.isfinite(rw):
            humidity_complete = False
    # --- cloud_mask (Zhang et al. 2010)
    nr = runs(moist, n, starts, ends)
    for r in range(nr):
        s, e = starts[r], ends[r]
        base, top = run_bounds(zagl, zb, s, e, n)
        mx = -np.inf
        for k in range(s, e + 1):
            if rhc[k] > mx:
                mx = rhc[k]
        keep = not ((base < min_moist_base) and (top - base < min_moist_thick))
        keep = keep and (mx > interp(base, heights, max_v))
        if keep:
            for k in range(s, e + 1):
                cloud[k] = zagl[k] >= min_cloud_base
    first_c = -1
    last_c = -1
    for k in range(n):
        if cloud[k]:
            if first_c < 0:
                first_c = k
            last_c = k
    for k in range(n):
        gap[k] = (not cloud[k]) and first_c >= 0 and first_c <= k and k <= last_c
    ng = runs(gap, n, gst, gen)
    for r in range(ng):
        s, e = gst[r], gen[r]
        glo, ghi = run_bounds(zagl, zb, s, e, n)
        mn = np.inf
        mxi = -np.inf
        for k in range(s, e + 1):
            if rhc[k] < mn:
                mn = rhc[k]
            v = interp(zagl[k], heights, inter_v)
            if v > mxi:
                mxi = v
        if (ghi - glo < merge_gap) or (mn > mxi):
            for k in range(s, e + 1):
                cloud[k] = True
    nr = runs(cloud, n, starts, ends)
    for r in range(nr):
        s, e = starts[r], ends[r]
        base, top = run_bounds(zagl, zb, s, e, n)
        base = fmaximum(base, min_cloud_base)
        thin = thin_low if base < low_limit else thin_high
        if not (top - base >= thin):
            for k in range(s, e + 1):
                cloud[k] = False
    # --- model cloud liquid, and cloud only where a temperature is known
    if has_cl or not all_t:
        for k in range(n):
            model[k] = has_cl and np.isfinite(cl[k])
            if model[k] and cl[k] >= MODEL_CLOUD_MIN:
                cloud[k] = True
            cloud[k] = cloud[k] and fin[k]
    # --- adiabatic LWC from each layer base (icing.physics.adiabat.adiabatic_lwc_from_bases) and cloud kind
    nr = runs(cloud, n, starts, ends)
    for r in range(nr):
        s, e = starts[r], ends[r]
        tb = t[s]
        tw = bilinear(inv, lnp_ax[2], inv_ax[0], inv_ax[1], inv_ax[2], tb, lnp_ax[0], lnp_ax[1], lnp_ax[2],
                      lnp[s])
        rt = bolton_rs(p[s], tb)
        excess = -np.inf
        for k in range(s, e + 1):
            if k == s:
                tp = tb
            else:
                tp = bilinear(tab, lnp_ax[2], tab_ax[0], tab_ax[1], tab_ax[2], tw, lnp_ax[0], lnp_ax[1],
                              lnp_ax[2], lnp[k])
            tpar[k] = tp
            lwcad[k] = lwc_adiabatic(p[k], tp, rt)
            d = tp - t[k]
            if d > excess:
                excess = d
        kind = 2 if excess > conv_excess else 1
        for k in range(s, e + 1):
            o_kind[k] = kind
    # --- supercooled levels, liquid fraction (Hu et al. 2010), LWC, the stratiform cap, MVD
    for k in range(n):
        tk = t[k]
        lrh = minrh[k] if liquid_rh != liquid_rh else liquid_rh
        if model[k]:
            liquid_ok = cl[k] >= MODEL_CLOUD_MIN
        else:
            liquid_ok = o_rhw[k] >= lrh
        sc = cloud[k] and (tk <= T0) and (tk >= cold_limit) and liquid_ok
        o_sc[k] = sc
        warm_cloud = cloud[k] and tk > T0
        if tk > T0:
            lf = 1.0
        elif tk < cold_limit:
            lf = 0.0
        elif tk != tk:
            lf = np.nan
        else:
            tc = clip(tk - T0, -40.0, 0.0)
            poly = 7.6725 + tc * (1.0118 + tc * (0.1422 + tc * (0.0106 + tc * (3.39e-4 + tc * 3.95e-6))))
            lf = 1.0 / (1.0 + math.exp(-poly))
        o_lf[k] = lf
        kd = o_kind[k]
        factor = f_strat if kd == 1 else (f_conv if kd == 2 else 0.0)
        lwc = (factor * lwcad[k] * lf if (sc or warm_cloud) else 0.0) * 1000.0
        if use_cap and kd == 1 and (not model[k]) and lwc > 0 and tk < T0:
            cap = interp(clip(tk - T0, -30.0, 0.0), cap_t, cap_v)
            lwc = lwc if lwc <= cap else cap
        if model[k]:
            lwc = cl[k] * 1000.0 if cloud[k] else 0.0
        if not np.isfinite(tk):
            lwc = np.nan
        o_lwc[k] = lwc
        if lwc > 0:
            o_mvd[k] = np.cbrt(6.0 * (lwc / 1000.0) / mvd_denom) * mvd_ratio * 1e6
        else:
            o_mvd[k] = np.nan
    # --- per cloud layer: thickness, top temperature, the precipitation source, drizzle runs
    src_level = -1
    src_phase = 0
    any_dz = False
    for r in range(nr):
        s, e = starts[r], ends[r]
        base, top = run_bounds(zagl, zb, s, e, n)
        thick = top - fmaximum(base, min_cloud_base)
        e1 = e + 1 if e < n - 1 else e
        w = (top - zagl[e]) / (zagl[e1] - zagl[e]) if e1 > e else 0.0
        t_top = t[e] + w * (t[e1] - t[e]) if (np.isfinite(w) and np.isfinite(t[e1])) else t[e]
        cold_top = t_top < dz_top_t
        deep = thick >= dz_min_thick
        if (not cold_top) and (t_top <= T0) and deep:
            any_dz = True
            for k in range(s, e + 1):
                dz_src[k] = True
        if cold_top or deep:
            src_level = e
            src_phase = _SN if cold_top else (_DZ if t_top <= T0 else _RA)
    # drizzle_below: from the sources down through contiguous sub-freezing levels
    if any_dz:
        carry = False
        for k in range(n - 1, -1, -1):
            cold = fin[k] and t[k] <= T0
            carry = (carry and cold) or (dz_src[k] and cloud[k] and cold)
            carry_b[k] = carry
    # --- precipitation type (icing.physics.layers.precipitation_type, Bourgouin 2000). Without a precipitation
    # source the phase stays "none" through every layer, so the layers are worked out only with one.
    nl = 1 if any_t else 0  # (only whether there is a layer matters without a source)
    phase = _NONE
    if src_level >= 0:
        for k in range(n):
            area[k] = 0.0
        if any_warm and any_cold:  # icing.physics.layers._energy_area
            for k in range(n):
                lnth[k] = lnt[k] - KAPPA * lnp[k]
            for k in range(n - 1):
                d0 = t[k] - T0
                d1 = t[k + 1] - T0
                if (d0 > 0) != (d1 > 0):
                    xc = lnp[k] + d0 / (d0 - d1) * (lnp[k + 1] - lnp[k])
                    lnth_c = LN_T0 - KAPPA * xc
                    low = CP_D * abs(0.5 * d0 * (lnth_c - lnth[k]))
                    up = CP_D * abs(0.5 * d1 * (lnth[k + 1] - lnth_c))
                else:
                    low = abs((d0 + d1) * 0.5 * (lnth[k + 1] - lnth[k])) * CP_D
                    up = 0.0
                area[k] += low if np.isfinite(low) else 0.0
                if np.isfinite(up):
                    area[k + 1] += up
        # warm and cold layers, bottom up: starts in gst, warm-ness and area
        nl = 0
        for k in range(n):
            if fin[k] and (k == 0 or (not fin[k - 1]) or warm[k] != warm[k - 1]):
                gst[nl] = k
                nl += 1
            lid[k] = nl - 1 if fin[k] else -1
        for j in range(nl):
            tpar[j] = 0.0  # reuse: area of layer j
        for k in range(n):
            if lid[k] >= 0:
                tpar[lid[k]] += area[k]
        src_ord = -1
        if lid[src_level] >= 0:
            src_ord = nl - 1 - lid[src_level]
        pa = 0.0
        for lay in range(nl):
            j = nl - 1 - lay
            a = tpar[j]
            w = warm[gst[j]]
            s_ = j == 0
            if src_ord == lay and phase == _NONE:
                phase = src_phase
            has_ice = phase == _SN or phase == _PL or phase == _FZRAPL
            liquid = phase == _RA or phase == _FZRA
            drizzle = phase == _DZ or phase == _FZDZ
            rain2[j] = False
            if w and not s_:
                if has_ice and a >= melt_aloft:
                    pa = a
                    phase = _MELTED
                if liquid:
                    phase = _RA
                elif drizzle:
                    phase = _DZ
            if not w:
                melted = phase == _MELTED
                rain2[j] = melted or liquid or phase == _FZRAPL
                if melted:
                    phase = _PL if a > 66.0 + 0.66 * pa else (_FZRA if a < 46.0 + 0.66 * pa else _FZRAPL)
                if liquid:
                    phase = _FZRA
                elif drizzle:
                    phase = _FZDZ
            if w and s_:
                if has_ice:
                    mixed = _RASN if phase == _SN else _RAPL
                    surf = phase if a < 5.6 else (_RA if a > 13.2 else mixed)
                    if phase == _FZRAPL:
                        surf = _RA if a > 13.2 else _RAPL
                    phase = surf
                if liquid:
                    phase = _RA
                elif drizzle:
                    phase = _DZ
    ptype = phase
    if ptype == _NONE and not humidity_complete:
        ptype = -1
    if nl == 0:
        ptype = -1
    # --- large drops, warm layers aloft, freezing-level count and (icing.grid.column_summaries, on the
    # levels as given) the column summaries, in one pass
    cold_seen = False
    fl_count = 0
    ncross = 0
    have_prev = False
    t_prev = 0.0
    z_prev = 0.0
    t_low = np.nan
    z_low = np.nan
    base = np.inf
    top = -np.inf
    any_sc = False
    if want_summary:
        for c in range(o_lev.shape[0]):
            o_lev[c] = np.nan
    for k in range(n):
        rain = src_level >= 0 and lid[k] >= 0 and (not warm[k]) and rain2[lid[k]]
        o_large[k] = 2 if rain else (1 if (any_dz and carry_b[k]) else 0)
        tk = t[k]
        o_warm[k] = tk > T0 and cold_seen
        if fin[k] and tk <= T0:
            cold_seen = True
        if k < n - 1 and fin[k] and fin[k + 1] and ((tk > T0) != (t[k + 1] > T0)):
            fl_count += 1
        if want_summary:
            zr = z_raw[k]
            if o_sc[k] and np.isfinite(zr):
                any_sc = True
                if zr < base:
                    base = zr
                if zr > top:
                    top = zr
            tr = t_raw[k] - T0
            if np.isfinite(tr) and np.isfinite(zr):
                if not have_prev:
                    t_low = tr
                    z_low = zr
                elif (t_prev > 0) != (tr > 0):
                    frac = t_prev / (t_prev - tr)
                    if ncross < o_lev.shape[0]:
                        o_lev[ncross] = z_prev + frac * (zr - z_prev)
                    ncross += 1
                have_prev = True
                t_prev = tr
                z_prev = zr
    lowest = np.nan
    if want_summary:
        lowest = z_low if t_low <= 0.0 else o_lev[0]
        o_base[0] = base if any_sc else np.nan
        o_top[0] = top if any_sc else np.nan
    return ptype, fl_count, lowest

@njit(block_sig, nogil=True, cache=True, error_model="numpy")
def block(p, t, td, z, cl, has_cl, td_raw, t_raw, z_raw, cold_limit, heights, min_v, max_v, inter_v, prm,
          liquid_rh, tab, tab_ax, inv, inv_ax, lnp_ax, cap_t, cap_v, use_cap, mvd_denom, mvd_ratio,
          want_summary, rhw, rhi, cloud, sc, lf, lwc, mvd, large, warm, kind, ptype, flc, lowest, levels,
          base, top, valid):
    npro, n = t.shape
    scr_f = np.empty((11, n))
    scr_i = np.empty((5, n), np.int64)
    scr_b = np.empty((8, n), np.bool_)
    shared_p = p.shape[0] == 1
    lnp = scr_f[1]
    if shared_p:
        lnp = np.log(p[0])
    for i in range(npro):
        ip = 0 if shared_p else i
        if not shared_p:
            for k in range(n):
                lnp[k] = np.log(p[i, k])
        ic = i if has_cl else 0
        pt, fc, lo = column(p[ip], lnp, t[i], td[i], z[i], cl[ic], has_cl, td_raw[i], t_raw[i], z_raw[i],
                            cold_limit, heights, min_v, max_v, inter_v, prm, liquid_rh, tab, tab_ax, inv,
                            inv_ax, lnp_ax, cap_t, cap_v, use_cap, mvd_denom, mvd_ratio, want_summary, n,
                            rhw[i], rhi[i], cloud[i], sc[i], lf[i], lwc[i], mvd[i], large[i], warm[i],
                            kind[i], levels[i], base[i:i + 1], top[i:i + 1], valid[i], scr_f, scr_i, scr_b)
        ptype[i] = pt
        flc[i] = fc
        lowest[i] = lo

@njit(potential_sig, nogil=True, cache=True, error_model="numpy")
def potential(rate, valid, t1, t2, t3, per_in_h, code, worst, max_rate):
    # icing.physics.accretion.intensity_code per level, and grid_core's column maximum rules
    npro, n = rate.shape
    for i in range(npro):
        w = -1
        any_valid = False
        unknown_aloft = False
        mx = np.nan
        for k in range(n):
            r = rate[i, k] / per_in_h
            c = 4 if r > t3 else (3 if r >= t2 else (2 if r >= t1 else (1 if r > 0.0 else
                                                                        (0 if r == 0.0 else -1))))
            code[i, k] = c
            if c > w:
                w = c
            if valid[i, k]:
                any_valid = True
                v = rate[i, k]
                if v == v and not (mx >= v):
                    mx = v
            elif any_valid:
                unknown_aloft = True
        if (not any_valid) or (unknown_aloft and w <= 0):
            w = -1
        worst[i] = w
        max_rate[i] = mx * 1000.0 * 3600.0


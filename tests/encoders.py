"""Test-only encoders: write profiles as TEMP (FM 35-38) and PILOT (FM 32) text and as IGRA v2 station files.

They follow WMO-No. 306 (FM 35) and the IGRA v2 format description independently of the decoders in
``icing.io`` (no code is shared), so that a round trip checks one against the other. Not part of the package.
"""

from __future__ import annotations

import numpy as np

from icing.physics import thermo

try:  # the strategies need hypothesis (a test dependency); the encoders alone do not
    from hypothesis import strategies as st
except ImportError:  # pragma: no cover
    st = None

KNOT = 1852.0 / 3600.0
STD_A = [("00", 1000.0), ("92", 925.0), ("85", 850.0), ("70", 700.0), ("50", 500.0), ("40", 400.0),
         ("30", 300.0), ("25", 250.0), ("20", 200.0), ("15", 150.0), ("10", 100.0)]
STD_C = [("70", 70.0), ("50", 50.0), ("30", 30.0), ("20", 20.0), ("10", 10.0)]
STANDARD = {p for _, p in STD_A + STD_C}
ID_A = {1000.0: "0", 925.0: "9", 850.0: "8", 700.0: "7", 500.0: "5", 400.0: "4", 300.0: "3", 200.0: "2",
        100.0: "1"}
ID_C = {70.0: "7", 50.0: "5", 30.0: "3", 20.0: "2", 10.0: "1"}
NN = ["11", "22", "33", "44", "55", "66", "77", "88", "99"]


def temperature_code(t):
    """TTTa: tenths digit even for t >= 0, odd for t < 0 (nearest such value)."""
    if not np.isfinite(t):
        return "///"
    neg = t < 0
    tenths = int(np.floor(abs(t) * 10.0 + 0.5))
    if tenths % 2 != neg:
        # Step to the neighbour of the right parity that is nearer to the true value.
        up, down = tenths + 1, tenths - 1
        tenths = up if down < 0 or abs(up - abs(t) * 10) <= abs(abs(t) * 10 - down) else down
    if tenths == 0 and neg:
        tenths = 1
    return f"{tenths:03d}"


def depression_code(dd):
    """DD of code table 0777 for a dewpoint depression in K."""
    if not np.isfinite(dd):
        return "//"
    if dd < 5.05:
        return f"{int(np.floor(dd * 10.0 + 0.5)):02d}"
    if dd < 5.5:
        return "50"
    return f"{min(int(np.floor(dd + 0.5)), 49) + 50:02d}"


def wind_code(direction, speed_ms, knots):
    if not (np.isfinite(direction) and np.isfinite(speed_ms)):
        return "/////"
    speed = int(np.floor(speed_ms / (KNOT if knots else 1.0) + 0.5))
    if speed == 0:
        return "00000"
    d = int(np.floor(direction / 5.0 + 0.5)) * 5 % 360
    d = 360 if d == 0 else d
    return f"{d // 10:02d}{(d % 10) // 5 * 5 + speed // 100}{speed % 100:02d}"


def height_code(p, h):
    if not np.isfinite(h):
        return "///"
    if p == 1000.0:
        v = int(np.floor(h + 0.5))
        return f"{500 - v:03d}" if v < 0 else f"{v:03d}"
    unit = 1.0 if p >= 700.0 else 10.0
    return f"{int(np.floor(h / unit + 0.5)) % 1000:03d}"


def _wrap(groups, width):
    lines, cur = [], ""
    for g in groups:
        if cur and len(cur) + 1 + len(g) > width:
            lines.append(cur)
            cur = g
        else:
            cur = f"{cur} {g}" if cur else g
    lines.append(cur + "=")
    return "\n".join(lines)


def position_groups(lat, lon):
    """99LaLaLa QcLoLoLoLo MMMULaULo (WMO-No. 306 FM 36-38 section 1; Qc code table 3333: 1 N/E, 3 S/E,
    5 S/W, 7 N/W). The Marsden square number MMM is written as '///' (not computed here); ULa and ULo are the
    units digits of the whole degrees."""
    qc = {(True, True): 1, (False, True): 3, (False, False): 5, (True, False): 7}[(lat >= 0, lon >= 0)]
    la, lo = int(round(abs(lat) * 10)), int(round(abs(lon) * 10))
    return [f"99{la:03d}", f"{qc}{lo:04d}", f"///{la // 10 % 10}{lo // 10 % 10}"]


def section_one(form, part, yy_group, station, position=None, elevation=None, feet=False):
    """Section 1 of one part: MiMiMjMj then YYGGId IIiii (land), D....D YYGGId and the position groups
    (ship, mobile; mobile adding h0h0h0h0im, code table 1845: 1 metres, 5 feet), or YYGGId and the position
    (drop), WMO-No. 306 FM 32-38 section 1."""
    g = [f"{form}{part * 2}"]
    if form in ("TT", "PP"):
        return g + [yy_group, station]
    if form != "XX":
        g.append(station)
    g.append(yy_group)
    g += position_groups(*position)
    if form in ("II", "EE"):
        h = elevation / 0.3048 if feet else elevation
        g.append(f"{int(round(h)):04d}{5 if feet else 1}")
    return g


def encode_temp(profile, station="00101", day=15, hour=0, knots=True, wind_top_a=100.0, wind_top_c=10.0,
                tropopause=None, max_wind=None, width=66, parts="ABCD", form="TT", position=None,
                elevation=None, feet=False):
    """TEMP text (Parts A-D) for one ascent.

    ``profile``: dict of arrays ``pressure`` (hPa, first = surface), ``height`` (m, needed at standard
    surfaces), ``temperature``, ``dewpoint`` (degC), ``wind_direction`` (deg), ``wind_speed`` (m/s).
    Standard surfaces are taken from the levels with those pressures; all other levels become Part B (at or
    above 100 hPa, whole hPa) or Part D (tenths of hPa) significant levels, with their winds in 21212.
    ``form``: TT (TEMP), UU (TEMP SHIP), XX (TEMP DROP), II (TEMP MOBIL) with ``position`` (lat, lon) and,
    for MOBIL, ``elevation`` (m; written in feet when ``feet``).
    """
    def head(part, yy_group):
        return section_one(form, part, yy_group, station, position, elevation, feet)

    p = np.asarray(profile["pressure"], dtype=float)
    get = {k: np.asarray(profile.get(k, np.full(p.size, np.nan)), dtype=float)
           for k in ("height", "temperature", "dewpoint", "wind_direction", "wind_speed")}
    yy = f"{day + 50 if knots else day:02d}{hour:02d}"
    psfc = p[0]

    def tgroup(i):
        return temperature_code(get["temperature"][i]) + depression_code(get["temperature"][i] - get["dewpoint"][i])

    def wgroup(i):
        return wind_code(get["wind_direction"][i], get["wind_speed"][i], knots)

    def find(pp):
        idx = np.flatnonzero(np.abs(p - pp) < 1e-6)
        return int(idx[0]) if idx.size else None

    out = []
    if "A" in parts:
        g = head("A", yy + ID_A.get(wind_top_a, "/")) + [f"99{int(round(psfc)) % 1000:03d}", tgroup(0),
                                                         wgroup(0)]
        for ind, ps in STD_A:
            wind = ps >= wind_top_a
            i = find(ps)
            if ps < p.min():  # above the top of the ascent: not reached, not reported
                continue
            if ps > psfc or i is None:
                g += [f"{ind}///", "/////"] + (["/////"] if wind else [])
                continue
            g += [ind + height_code(ps, get["height"][i]), tgroup(i)] + ([wgroup(i)] if wind else [])
        if tropopause is None:
            g.append("88999")
        else:
            i = find(tropopause)
            g += [f"88{int(round(tropopause)):03d}", tgroup(i), wgroup(i)]
        if max_wind is None:
            g.append("77999")
        else:
            i = find(max_wind)
            g += [f"77{int(round(max_wind)):03d}", wgroup(i)]
        out.append(_wrap(g, width))
    sig_b = [i for i in range(1, p.size) if p[i] >= 100.0 and p[i] not in STANDARD]
    sig_d = [i for i in range(p.size) if p[i] < 100.0 and p[i] not in STANDARD]
    for part, rows, first in (("B", [0] + sig_b, "00"), ("D", sig_d, "11")):
        if part not in parts or not rows:
            continue
        g = head(part, yy + "/")
        nn = first
        wind_rows = []
        for i in rows:
            ppp = f"{int(round(p[i])) % 1000:03d}" if part == "B" else f"{int(round(p[i] * 10)):03d}"
            g += [nn + ppp, tgroup(i)]
            if np.isfinite(get["wind_speed"][i]):
                wind_rows.append((i, ppp))
            nn = "11" if nn in ("00", "99") else NN[NN.index(nn) + 1]
        if wind_rows:
            g.append("21212")
            nn = first
            for i, ppp in wind_rows:
                g += [nn + ppp, wgroup(i)]
                nn = "11" if nn in ("00", "99") else NN[NN.index(nn) + 1]
        out.append(_wrap(g, width))
    if "C" in parts and any(find(ps) is not None for _, ps in STD_C):
        g = head("C", yy + ID_C.get(wind_top_c, "/"))
        for ind, ps in STD_C:
            i = find(ps)
            wind = ps >= wind_top_c
            if i is None:
                g += [f"{ind}///", "/////"] + (["/////"] if wind else [])
                continue
            g += [ind + height_code(ps, get["height"][i]), tgroup(i)] + ([wgroup(i)] if wind else [])
        g += ["88999", "77999"]
        out.append(_wrap(g, width))
    return "\n".join(out) + "\n"


def encode_pilot_heights(altitudes, directions, speeds, station="00101", day=15, hour=0, knots=True, form="PP",
                         position=None, elevation=None, width=66, part="B"):
    """PILOT Part B (or D) winds by altitude: 9tnu1u2u3 then one ddfff per altitude, altitudes in units of
    300 m (WMO-No. 306 FM 32 section 4, from memory); ``altitudes`` are whole multiples of 300 m, ascending.
    Altitudes sharing their tens digit tn go into one group, at most three a group."""
    units = [int(round(a / 300.0)) for a in altitudes]
    yy = f"{day + 50 if knots else day:02d}{hour:02d}/"
    g = section_one(form, part, yy, station, position, elevation)
    k = 0
    while k < len(units):
        tn = units[k] // 10
        run = [j for j in range(k, min(k + 3, len(units))) if units[j] // 10 == tn]
        g.append(f"9{tn}" + "".join(str(units[j] % 10) for j in run).ljust(3, "/"))
        g += [wind_code(directions[j], speeds[j], knots) for j in run]
        k = run[-1] + 1
    return _wrap(g, width) + "\n"


def encode_pilot_standard(pressures, directions, speeds, station="00101", day=15, hour=0, knots=True,
                          measured=True, width=66, part="A"):
    """PILOT Part A (or C) winds at consecutive standard surfaces: 44nP1P1 (55nP1P1 when not ``measured``)
    and n ddfff groups, n at most 3 (WMO-No. 306 FM 32 section 2, from memory)."""
    table = STD_A if part == "A" else STD_C
    ind = {p: i for i, p in table}
    yy = f"{day + 50 if knots else day:02d}{hour:02d}/"
    g = section_one("PP", part, yy, station)
    for k in range(0, len(pressures), 3):
        chunk = list(range(k, min(k + 3, len(pressures))))
        g.append(f"{44 if measured else 55}{len(chunk)}{ind[pressures[k]]}")
        g += [wind_code(directions[j], speeds[j], knots) for j in chunk]
    return _wrap(g, width) + "\n"


# ---------------------------------------------------------------------------------------------------------
# IGRA v2 (Durre et al. 2016; "IGRA v2 data format description", NOAA NCEI): header and data records.

def igra_header(station_id, time, nlev, lat, lon, p_src="", np_src=""):
    """A header record: #, ID (cols 2-12), YEAR, MONTH, DAY, HOUR, RELTIME, NUMLEV, P_SRC, NP_SRC, LAT, LON."""
    t = np.datetime64(time, "m").astype(object)
    return (f"#{station_id:<11s} {t.year:4d} {t.month:02d} {t.day:02d} {t.hour:02d} {t.hour:02d}{t.minute:02d} "
            f"{nlev:4d} {p_src:<8s} {np_src:<8s} {int(round(lat * 1e4)):7d} {int(round(lon * 1e4)):8d}")


def igra_value(v, scale, missing=-9999):
    return missing if not np.isfinite(v) else int(np.floor(v * scale + 0.5))


def igra_level(lvtyp1, lvtyp2, etime, press_pa, pflag, gph, zflag, temp10, tflag, rh10, dpdp10, wdir, wspd10):
    """A data record by column (IGRA v2 format description, data record table)."""
    return (f"{lvtyp1:1d}{lvtyp2:1d} {etime:5d} {press_pa:6d}{pflag:1s}{gph:5d}{zflag:1s}{temp10:5d}"
            f"{tflag:1s}{rh10:5d} {dpdp10:5d} {wdir:5d} {wspd10:5d}")


def encode_igra(soundings, station_id="ZZM00000101"):
    """IGRA v2 station-file text for a list of (time, lat, lon, profile dict) soundings.

    Pressure is written in Pa, temperature and dewpoint depression in tenths of degC, wind speed in tenths
    of m/s; a level whose pressure is given but not its height writes GPH -9999. ``profile`` may carry a
    ``removed`` dict {variable: bool array} whose values are written as -8888 (removed by QC).
    """
    lines = []
    for time, lat, lon, prof in soundings:
        p = np.asarray(prof["pressure"], dtype=float)
        n = p.size
        get = {k: np.asarray(prof.get(k, np.full(n, np.nan)), dtype=float)
               for k in ("height", "temperature", "dewpoint", "wind_direction", "wind_speed")}
        removed = prof.get("removed", {})
        lines.append(igra_header(station_id, time, n, lat, lon, "ncdc6310", "ncdc6310"))
        for i in range(n):
            def val(name, v, scale, i=i, removed=removed):
                if name in removed and removed[name][i]:
                    return -8888
                return igra_value(v, scale)
            std = p[i] in STANDARD
            lv1 = 2 if i > 0 and not std else 1
            lv2 = 1 if i == 0 else 0
            dpd = get["temperature"][i] - get["dewpoint"][i]
            wd = get["wind_direction"][i]
            lines.append(igra_level(
                lv1, lv2, -9999, igra_value(p[i], 100.0), "", val("height", get["height"][i], 1.0), "",
                val("temperature", get["temperature"][i], 10.0), "", -9999, val("dewpoint", dpd, 10.0),
                val("wind", wd, 1.0), val("wind", get["wind_speed"][i], 10.0)))
    return "\n".join(lines) + "\n"


def igra_derived_header(station_id, time, nlev, derived=None):
    """A derived-parameter header record ("IGRA v2 derived parameters format description"): # 1, ID 2-12,
    YEAR 14-17, MONTH 19-20, DAY 22-23, HOUR 25-26, RELTIME 28-31, NUMLEV 32-36, PW 38-43, then 19 fields of
    six columns (INVPRESS 44-49 ... CIN 152-157). ``derived``: values of those 20 fields (default -99999)."""
    t = np.datetime64(time, "m").astype(object)
    fields = list(derived) if derived is not None else [-99999] * 20
    return (f"#{station_id:<11s} {t.year:4d} {t.month:02d} {t.day:02d} {t.hour:02d} {t.hour:02d}{t.minute:02d}"
            f"{nlev:5d} " + "".join(f"{v:6d}" for v in fields))


def igra_derived_level(press_pa, repgph, calcgph, temp_k10, reprh10, calcrh10, u10, v10):
    """A derived-parameter data record: 19 fields of seven columns, one blank between (PRESS 1-7, REPGPH 9-15,
    CALCGPH 17-23, TEMP 25-31, ..., REPRH 89-95, CALCRH 97-103, ..., UWND 113-119, ..., VWND 129-135, N
    145-151); the fields this library does not read are written as -99999."""
    fields = [press_pa, repgph, calcgph, temp_k10] + [-99999] * 7 + [reprh10, calcrh10, -99999, u10, -99999,
                                                                      v10, -99999, -99999]
    return " ".join(f"{v:7d}" for v in fields)


def encode_igra_derived(soundings, station_id="ZZM00000101"):
    """IGRA v2 derived-parameter text for a list of (time, profile dict) soundings: pressure in Pa, height
    reported (REPGPH; a NaN height writes -99999 there and the ``calc_height`` value, if any, in CALCGPH),
    temperature in tenths of K, relative humidity in tenths of percent, wind components in tenths of m/s."""
    lines = []
    for time, prof in soundings:
        p = np.asarray(prof["pressure"], dtype=float)
        n = p.size
        get = {k: np.asarray(prof.get(k, np.full(n, np.nan)), dtype=float)
               for k in ("height", "calc_height", "temperature", "relative_humidity", "u", "v")}
        lines.append(igra_derived_header(station_id, time, n))
        for i in range(n):
            lines.append(igra_derived_level(
                igra_value(p[i], 100.0, -99999), igra_value(get["height"][i], 1.0, -99999),
                igra_value(get["calc_height"][i], 1.0, -99999),
                igra_value(get["temperature"][i] + 273.15, 10.0, -99999),
                igra_value(get["relative_humidity"][i], 10.0, -99999), -99999,
                igra_value(get["u"][i], 10.0, -99999), igra_value(get["v"][i], 10.0, -99999)))
    return "\n".join(lines) + "\n"


# ---------------------------------------------------------------------------------------------------------
# Random plausible soundings. Plausible means inside the climatological windows the TEMP code relies on
# (WMO-No. 306 FM 35 drops the leading digits of standard heights): surface 990-1030 hPa below 100 m,
# surface temperature -20..30 degC, tropospheric lapse rate 5.5-7.5 K/km to a tropopause at 180-300 hPa.

STD_A_P = [1000.0, 925.0, 850.0, 700.0, 500.0, 400.0, 300.0, 250.0, 200.0, 150.0, 100.0]
STD_C_P = [70.0, 50.0, 30.0, 20.0, 10.0]



def _soundings(draw):
    psfc = float(draw(st.integers(990, 1030)))
    zsfc = float(draw(st.integers(0, 100)))
    tsfc = draw(st.floats(-20.0, 30.0))
    lapse = draw(st.floats(5.5, 7.5)) / 1000.0
    ptrop = float(draw(st.integers(180, 300)))
    sig_b = draw(st.sets(st.integers(101, int(psfc) - 1), max_size=10))
    sig_d = draw(st.sets(st.integers(101, 999), max_size=4))  # tenths of hPa: 10.1-99.9 hPa
    p = sorted({psfc} | {x for x in STD_A_P if x < psfc} | set(STD_C_P) | {float(x) for x in sig_b}
               | {x / 10.0 for x in sig_d}, reverse=True)
    p = np.array(p, dtype=float)
    n = p.size
    z_std = thermo.standard_atmosphere_height(p * 100.0)
    z_trop = float(thermo.standard_atmosphere_height(ptrop * 100.0))
    zrel = z_std - z_std[0]
    t = np.where(z_std < z_trop, tsfc - lapse * zrel, tsfc - lapse * (z_trop - z_std[0]))
    noise = np.array(draw(st.lists(st.floats(-1.5, 1.5), min_size=n, max_size=n)))
    t = np.maximum(t + noise, -85.0)
    dd = np.array(draw(st.lists(st.one_of(st.floats(0.0, 5.0), st.floats(5.0, 40.0)), min_size=n, max_size=n)))
    td = t - dd
    z = thermo.hypsometric_heights(p * 100.0, t + thermo.T0, td + thermo.T0, anchor_height=zsfc)
    wd = np.array(draw(st.lists(st.floats(0.0, 359.9), min_size=n, max_size=n)))
    ws = np.array(draw(st.lists(st.floats(0.0, 110.0), min_size=n, max_size=n)))
    height = np.where(np.isin(p, list(STANDARD)), z, np.nan)
    return {"pressure": p, "height": height, "true_height": z, "temperature": t, "dewpoint": td,
            "wind_direction": wd, "wind_speed": ws, "elevation": zsfc}


soundings = st.composite(_soundings) if st is not None else None


def within_height_windows(profile):
    """True when every standard height lies in the window its code relies on (WMO-No. 306 FM 35)."""
    windows = {1000.0: (-499, 499), 925.0: (100, 1100), 850.0: (1000, 2000), 700.0: (2500, 3500)}
    for p, h in zip(profile["pressure"], profile["height"], strict=True):
        if p in windows and not windows[p][0] <= h < windows[p][1]:
            return False
    return True


def value_at_pressure(ds, p, name):
    """The value of ``name`` at the one level of ``ds`` whose pressure is ``p`` hPa (test helper)."""
    idx = np.flatnonzero(np.isclose(ds["pressure"].values, p))
    assert idx.size == 1, f"no level at {p} hPa"
    return float(ds[name].values[idx[0]])


def decode_one(text, **kw):
    """The one profile that TEMP ``text`` decodes to (test helper)."""
    from icing.io import temp

    profiles = temp.decode_temp(text, **kw)
    assert len(profiles) == 1
    return profiles[0]

"""Write the demo scenario's soundings (invented stations and weather) as CSV and netCDF.

The scenario is our own: five invented stations on the Varrow Isles, an invented island chain, sampled at two
valid times. Each sounding is defined by a few temperature and dewpoint-depression nodes in pressure; heights
come from the hypsometric equation. These are demo data, never check values for tests.

Run ``python sample_soundings/make_scenario.py`` to rewrite the files.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from icing.io import netcdf, table
from icing.physics import thermo

HERE = Path(__file__).parent
LEVELS = np.array([1000, 975, 950, 925, 900, 875, 850, 825, 800, 775, 750, 725, 700, 650, 600, 550, 500, 450,
                   400, 350, 300, 250, 200], dtype=float)

STATIONS = {  # id: (name, lat, lon, elevation m, surface pressure hPa)
    "00101": ("Aldren Point", 52.00, -34.00, 15.0, 1008.0),
    "00102": ("Brannock", 53.00, -31.00, 40.0, 1012.0),
    "00103": ("Cullin Head", 54.00, -28.00, 8.0, 1002.0),
    "00104": ("Dunmarrow", 54.80, -25.50, 120.0, 1020.0),
    "00105": ("Eskerry", 55.50, -23.00, 30.0, 1010.0),
}

# (pressure hPa, temperature degC, dewpoint depression degC) nodes; interpolated linearly in ln p.
CASES = {
    ("00101", "00"): ("deep supercooled stratiform deck: saturated 900-620 hPa between -2 and -17 C",
                      [(1008, 4.0, 1.5), (950, 1.0, 1.0), (900, -2.0, 0.2), (800, -6.5, 0.2), (700, -12.0, 0.3),
                       (620, -17.0, 0.4), (580, -19.0, 12.0), (500, -25.0, 20.0), (300, -50.0, 25.0),
                       (250, -55.0, 25.0), (200, -55.0, 25.0)]),
    ("00101", "12"): ("stratiform deck thickening and lowering: saturated 940-600 hPa",
                      [(1008, 2.5, 1.0), (940, -1.0, 0.2), (850, -4.5, 0.2), (700, -11.0, 0.2),
                       (600, -18.0, 0.4), (560, -20.0, 10.0), (500, -25.5, 18.0), (300, -50.5, 25.0),
                       (250, -55.0, 25.0), (200, -55.0, 25.0)]),
    ("00102", "00"): ("warm layer aloft (+3 C near 800 hPa) over a cold surface layer: freezing rain",
                      [(1012, -4.0, 0.5), (950, -3.0, 0.3), (900, -0.5, 0.3), (850, 2.5, 0.3), (800, 3.0, 0.3),
                       (760, 0.5, 0.3), (700, -4.0, 0.5), (600, -11.0, 1.0), (500, -20.0, 2.0),
                       (400, -31.0, 8.0), (300, -45.0, 15.0), (200, -56.0, 20.0)]),
    ("00102", "12"): ("warm layer aloft weakening (+1.5 C): freezing rain and ice pellets possible",
                      [(1012, -5.0, 0.5), (950, -4.0, 0.3), (880, -1.0, 0.3), (820, 1.5, 0.3), (780, 1.0, 0.3),
                       (740, -1.0, 0.3), (700, -4.5, 0.5), (600, -12.0, 1.0), (500, -21.0, 3.0),
                       (400, -32.0, 8.0), (300, -46.0, 15.0), (200, -56.0, 20.0)]),
    ("00103", "00"): ("convective: steep lapse rate, moist to 500 hPa, cloud tops near -25 C",
                      [(1002, 6.0, 2.0), (950, 2.0, 0.5), (900, -1.5, 0.2), (800, -8.0, 0.2), (700, -15.0, 0.3),
                       (600, -22.0, 0.5), (520, -27.0, 1.0), (480, -30.0, 15.0), (400, -38.0, 20.0),
                       (300, -50.0, 20.0), (200, -56.0, 20.0)]),
    ("00103", "12"): ("convective showers weakening: moist to 600 hPa",
                      [(1002, 5.0, 2.0), (950, 1.0, 0.8), (900, -2.5, 0.3), (800, -8.5, 0.3), (700, -15.0, 0.5),
                       (620, -21.0, 1.0), (580, -23.0, 15.0), (400, -38.5, 20.0), (300, -50.0, 20.0),
                       (200, -56.0, 20.0)]),
    ("00104", "00"): ("dry and cold: no cloud, dewpoint depressions above 10 C",
                      [(1020, -8.0, 6.0), (900, -13.0, 12.0), (800, -18.0, 15.0), (700, -24.0, 18.0),
                       (500, -38.0, 20.0), (300, -55.0, 20.0), (200, -58.0, 20.0)]),
    ("00104", "12"): ("dry and cold, a thin moist layer near 850 hPa too dry for cloud",
                      [(1020, -7.0, 5.0), (900, -12.0, 8.0), (850, -14.0, 5.0), (800, -17.0, 12.0),
                       (700, -23.0, 18.0), (500, -37.0, 20.0), (300, -55.0, 20.0), (200, -58.0, 20.0)]),
    ("00105", "00"): ("supercooled layer 850-700 hPa; the file has faults the quality checks must catch",
                      [(1010, 3.0, 2.0), (900, -1.0, 1.0), (850, -3.0, 0.3), (700, -10.0, 0.3),
                       (650, -13.0, 8.0), (500, -24.0, 15.0), (300, -48.0, 20.0), (200, -55.0, 20.0)]),
    ("00105", "12"): ("supercooled layer 880-720 hPa; the file has faults the quality checks must catch",
                      [(1010, 2.0, 1.5), (880, -1.5, 0.3), (720, -9.0, 0.3), (660, -12.5, 9.0),
                       (500, -24.5, 15.0), (300, -48.5, 20.0), (200, -55.0, 20.0)]),
}


def _profile(station, hour):
    name, lat, lon, elev, psfc = STATIONS[station]
    what, nodes = CASES[(station, hour)]
    nodes = np.array(nodes, dtype=float)
    p = np.concatenate([[psfc], LEVELS[LEVELS < psfc - 5]])
    x = -np.log(p)
    t = np.interp(x, -np.log(nodes[:, 0]), nodes[:, 1])
    dd = np.interp(x, -np.log(nodes[:, 0]), nodes[:, 2])
    td = t - dd
    z = thermo.hypsometric_heights(p * 100, t + 273.15, td + 273.15, anchor_height=np.array(elev))
    # Winds: westerly to south-westerly, strengthening with height (m/s).
    wspd = 6.0 + 30.0 * (1.0 - p / psfc) ** 0.8
    wdir = 240.0 + 30.0 * (1.0 - p / psfc)
    return dict(p=p, t=np.round(t, 1) + 0.0, td=np.round(td, 1) + 0.0, z=np.round(z), wspd=np.round(wspd / 0.514444),
                wdir=np.round(wdir / 5) * 5, meta=dict(station=station, name=name, latitude=lat, longitude=lon,
                                                        elevation=elev, time=f"2026-01-15T{hour}:00:00Z"),
                what=what)


def _csv_text(d, faults=False):
    m = d["meta"]
    out = [f"# scenario: {d['what']} (invented demo data)"]
    out += [f"# station: {m['station']}", f"# name: {m['name']}", f"# latitude: {m['latitude']:.2f}",
            f"# longitude: {m['longitude']:.2f}", f"# elevation_m: {m['elevation']:.0f}", f"# time: {m['time']}"]
    out.append("pressure_hPa,height_m,temperature_degC,dewpoint_degC,wind_direction_deg,wind_speed_kt")
    rows = []
    for i in range(d["p"].size):
        z = "" if (faults and i in (4, 5)) else f"{d['z'][i]:.0f}"  # faults: missing heights
        rows.append([f"{d['p'][i]:.0f}", z, f"{d['t'][i]:.1f}", f"{d['td'][i]:.1f}", f"{d['wdir'][i]:.0f}",
                     f"{d['wspd'][i]:.0f}"])
    if faults:
        rows.insert(3, list(rows[2]))  # a duplicated level
        rows[7][3] = f"{float(rows[7][2]) + 4.0:.1f}"  # dewpoint far above temperature
        rows[9][1] = f"{float(rows[8][1]) - 400 if rows[8][1] else 1000:.0f}"  # height lower than the level below
        rows[12][2] = "71.5"  # temperature outside the plausible range
        rows.append(["0", "", "-60.0", "", "", ""])  # a level with zero pressure
    out += [",".join(r) for r in rows]
    return "\n".join(out) + "\n"


def main():
    for (station, hour) in CASES:
        d = _profile(station, hour)
        text = _csv_text(d, faults=station == "00105")
        stem = f"S{station[-1]}_{station}_20260115{hour}"
        (HERE / f"{stem}.csv").write_text(text)
        prof = table.read(HERE / f"{stem}.csv")[0]
        netcdf.write(prof, HERE / f"{stem}.nc")
    lines = ["station,name,latitude,longitude,elevation_m"]
    lines += [f"{k},{v[0]},{v[1]:.2f},{v[2]:.2f},{v[3]:.0f}" for k, v in STATIONS.items()]
    (HERE / "stations.csv").write_text("\n".join(lines) + "\n")


if __name__ == "__main__":
    main()

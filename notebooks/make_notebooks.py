"""Build the student notebooks in this folder from the cell sources below, stored without outputs.

Run ``python notebooks/make_notebooks.py`` after editing a cell here; ``--check`` only reports whether the
stored ``.ipynb`` files still match this script (the test suite runs that check). The notebooks run on the
bundled, invented Varrow Isles scenario (``sample_soundings/``), never on real stations or real weather.
"""

from __future__ import annotations

import argparse
import sys
import textwrap
from pathlib import Path

import nbformat

HERE = Path(__file__).resolve().parent

CAUTION_MD = (
    "> **ADVISORY ONLY.** Everything here is computed guidance for learning and planning, not a certified "
    "forecast. For real flights, defer to official aviation weather products (forecasts, advisories and pilot "
    "reports), the aircraft's approved flight manual and ice-protection procedures, the operator's approved "
    "procedures and local regulations. The data are an invented scenario over the invented Varrow Isles."
)

# Finds the bundled data from wherever the notebook runs: the repository checkout, or an installed copy.
SETUP = """
%matplotlib inline
import matplotlib.pyplot as plt
import numpy as np
import pandas as pd

pd.set_option("display.max_columns", 30)
pd.set_option("display.max_colwidth", 100)
pd.set_option("display.width", 160)
pd.set_option("display.precision", 1)
"""

FIND_DATA = '''\
from pathlib import Path

import icing


def find_data(name="sample_soundings"):
    """The bundled demo-data folder: walk up from the working directory, else the installed package."""
    here = Path.cwd().resolve()
    for folder in (here, *here.parents):
        if (folder / name).is_dir():
            return folder / name
    packaged = Path(icing.__file__).resolve().parent / name
    if packaged.is_dir():
        return packaged
    raise FileNotFoundError(f"no {name!r} folder above {here} nor in the installed package")


DATA = find_data()
print("demo data in", DATA)
print(icing.CAUTION)'''


def md(text):
    return ("markdown", textwrap.dedent(text).strip("\n"))


def code(text):
    return ("code", textwrap.dedent(text).strip("\n"))


# ------------------------------------------------------------------------------------------------ notebook 1
NB1 = [
    md(f"""
    # 1. From a sounding to supercooled layers

    Airframe icing needs **supercooled liquid water**: cloud droplets that stay liquid below 0 °C and freeze
    when they hit the aircraft. A radiosonde ascent tells us temperature and humidity level by level; from it we
    can estimate where there is cloud and where that cloud can hold supercooled liquid. In this notebook you will

    1. read a TEMP report (the coded radiosonde message) and look at the profile and its quality record,
    2. find the cloud layers, the freezing levels and the supercooled layers,
    3. draw the sounding diagram (a skew-T with the supercooled layers shaded),
    4. change the humidity thresholds and the cold limit, and see what changes.

    {CAUTION_MD}

    **Published sources used here:** Zhang et al. (2010) for cloud layers from relative humidity, after Wang
    and Rossow (1995); Hu et al. (2010) for the liquid fraction of cloud by temperature; Bourgouin (2000) for
    warm layers aloft and freezing rain; WMO-No. 306 (Manual on Codes) for the TEMP code. Full references at the
    end.
    """),
    code(SETUP),
    code(FIND_DATA),
    md("""
    ## Reading a TEMP report

    A TEMP message (WMO code FM 35) comes in parts: **TTAA** holds the standard pressure surfaces (1000, 925,
    850, 700, 500 hPa ...) with their heights, **TTBB** the *significant levels* where the profile bends, without
    heights. Each group of five figures packs a value: for instance `85380 04302` reads "850 hPa, height
    1380 m, temperature -4.3 °C, dewpoint depression 0.2 K". Here are the first lines of our invented bulletin:
    """),
    code("""
    temp_file = DATA / "formats" / "scenario_temp.txt"
    print("\\n".join(temp_file.read_text().splitlines()[:8]))
    """),
    md("""
    A TEMP report gives the station number, the day and the hour, but **no month, year or position**. We give
    the month with `reference_time` (any date in the month of the ascent) and the positions with a station
    table, `stations.csv`. The decoder merges the parts of each ascent into one profile.
    """),
    code("""
    stations = pd.read_csv(DATA / "stations.csv", dtype={"station": str})
    profiles = icing.read_profiles(temp_file, stations=DATA / "stations.csv", reference_time="2026-01-15")
    pd.DataFrame([{"station": p.attrs["station"], "time": p.attrs["time"], "latitude": p.attrs["latitude"],
                   "longitude": p.attrs["longitude"], "levels": p.sizes["level"], "parts": p.attrs["temp_parts"]}
                  for p in profiles]).merge(stations[["station", "name"]], on="station")
    """),
    md("""
    ## The profile

    Take the 00 UTC ascent from Aldren Point (station 00101). The profile is an `xarray.Dataset` with one
    `level` dimension, surface first. Relative humidity is worked out from temperature and dewpoint.
    """),
    code("""
    profile = next(p for p in profiles if p.attrs["station"] == "00101" and p.attrs["time"].endswith("T00:00:00Z"))
    columns = ["pressure", "height", "temperature", "dewpoint", "relative_humidity", "wind_speed"]
    profile[columns].to_dataframe()[columns].head(16)
    """),
    md("""
    ## The quality record: nothing is dropped silently

    Every change the decoder and the checks made is written down in `profile.attrs["quality"]`, one entry per
    level, with the reason and the line of the file. For Aldren Point the entries are harmless: the heights of
    the Part B levels, which TEMP does not report, are filled in by the hypsometric equation between the
    reported standard-level heights (and a level reported in both parts would be merged and noted).
    """),
    code("""
    quality = pd.DataFrame(profile.attrs["quality"])
    print(quality["action"].value_counts().to_string())
    quality.head(6)
    """),
    md("""
    The Eskerry ascent (station 00105) has a real problem: one group decodes to a temperature of +71.6 °C at
    750 hPa, which no atmosphere has. The check removes it and says so, and layers that span the gap carry a
    note. *Unknown is never read as safe*: a level without data is not a level without cloud.
    """),
    code("""
    eskerry = next(p for p in profiles if p.attrs["station"] == "00105" and p.attrs["time"].endswith("T00:00:00Z"))
    eq = pd.DataFrame(eskerry.attrs["quality"])
    eq[eq["action"].isin(["removed", "dropped"])]
    """),
    md("""
    ## Where is the cloud?

    A radiosonde does not see cloud; it measures humidity. Zhang et al. (2010), after Wang and Rossow (1995),
    call a level *moist* when the relative humidity passes a threshold that falls with height (air aloft is
    rarely saturated in the sonde's record even inside cloud), and a moist layer *cloud* when its peak humidity
    passes a second, higher threshold. Below 0 °C humidity is taken **over ice**, since ice saturation is what
    the clouds there are near. The plot shows the thresholds against the humidity of our ascent.
    """),
    code("""
    from icing.physics import layers

    diag = icing.diagnose(profile)
    z_agl = diag["height"].values - profile.attrs["elevation"]
    zz = np.linspace(0, 12000, 100)

    fig, ax = plt.subplots(figsize=(6.5, 5.5))
    ax.plot(diag["rh_water"], z_agl / 1000, "o-", color="tab:blue", label="RH over water")
    ax.plot(diag["rh_ice"], z_agl / 1000, "s-", color="tab:cyan", label="RH over ice (below 0 °C)")
    for values, style, name in [(layers.ZHANG_MIN_RH, "--", "moist threshold"),
                                (layers.ZHANG_MAX_RH, "-", "cloud threshold (layer peak)"),
                                (layers.ZHANG_INTER_RH, ":", "joins layers")]:
        ax.plot(layers.zhang_thresholds(zz, values), zz / 1000, style, color="0.3", label=f"Zhang et al.: {name}")
    in_cloud = diag["in_cloud"].values
    ax.scatter(diag["rh_ice"].values[in_cloud], z_agl[in_cloud] / 1000, s=80, facecolors="none",
               edgecolors="k", label="levels found in cloud")
    ax.set(xlabel="relative humidity (%)", ylabel="height above ground (km)", xlim=(0, 120), ylim=(0, 10),
           title="Aldren Point 00 UTC: humidity and the cloud thresholds")
    ax.legend(loc="lower left", fontsize=8)
    ax.grid(alpha=0.3)
    """),
    md("""
    ## Cloud layers, freezing levels, supercooled layers

    Three tables, one row a layer. Heights are in metres and feet above mean sea level; layer edges are
    interpolated where the humidity crosses the threshold or the temperature crosses 0 °C.

    * **Cloud layers**: where the humidity says cloud.
    * **Freezing levels**: every 0 °C crossing. "cooling upward" is a freezing level in the usual sense;
      "warming upward" is the base of a warm layer aloft.
    * **Supercooled layers**: the part of the cloud between 0 °C and the *cold limit* (−40 °C by default: cloud
      droplets freeze on their own near −38 °C). The liquid water content (LWC) is estimated from the cloud base
      along the moist adiabat, reduced by a factor for the cloud kind and by the liquid fraction of Hu et al.
      (2010), which falls from 1 near 0 °C to nearly 0 at −30 °C as ice takes over. The median volume diameter
      (MVD) of the droplets follows from the LWC and an assumed droplet number.
    """),
    code("""
    show = ["base_height_ft", "top_height_ft", "base_temperature_c", "top_temperature_c", "thickness_m"]
    print("Cloud layers")
    display(icing.cloud_layers(profile)[show + ["kind"]].round(1))
    print("Freezing levels")
    display(icing.freezing_levels(profile)[["height_ft", "pressure_hpa", "direction"]].round(1))
    print("Supercooled layers")
    sc_layers = icing.supercooled_layers(profile)
    sc_layers[show + ["max_lwc_g_m3", "mvd_um", "kind", "large_drop"]].round(2)
    """),
    md("""
    Level by level, the same diagnosis shows how the liquid fraction and the LWC change with temperature inside
    the cloud:
    """),
    code("""
    fields = ["pressure", "height", "temperature", "rh_ice", "in_cloud", "supercooled", "liquid_fraction", "lwc",
              "mvd"]
    diag[fields].to_dataframe()[fields].iloc[2:17].round(2)
    """),
    md("""
    ## The sounding diagram

    On the skew-T, temperature (red) and dewpoint (green) lines lie close together where the air is near
    saturation. The shaded band is the supercooled layer; the 0 °C and cold-limit isotherms are drawn. The panel
    on the right gives the estimated LWC and MVD against pressure.
    """),
    code("""
    from icing.report.plots import sounding_figure

    fig = sounding_figure(diag, title="Aldren Point (00101), 2026-01-15 00 UTC, from the TEMP report")
    fig
    """),
    md("""
    ## A warm layer aloft: freezing rain

    Brannock (00102) shows the classic freezing-rain sounding: a layer warmer than 0 °C aloft over a cold layer
    near the ground. Snow falling into the warm layer melts; the drops then fall into the cold layer and become
    supercooled **large** drops, far bigger than cloud droplets, which freeze on impact and run back behind the
    protected surfaces. Bourgouin (2000) compares the *positive area* (the energy available to melt, in J/kg) of
    the warm layer with the *negative area* of the cold layer below to decide between freezing rain and ice
    pellets. Note the two freezing levels and the `large_drop` column.
    """),
    code("""
    from icing.physics.layers import PRECIPITATION_TYPES

    brannock = next(p for p in profiles if p.attrs["station"] == "00102" and p.attrs["time"].endswith("T00:00:00Z"))
    b_diag = icing.diagnose(brannock)
    print("precipitation type:", PRECIPITATION_TYPES[int(b_diag["precipitation_type"])])
    display(icing.freezing_levels(brannock)[["height_ft", "pressure_hpa", "direction"]].round(1))
    icing.supercooled_layers(brannock)[show + ["max_lwc_g_m3", "large_drop"]].round(2)
    """),
    code("""
    fig = sounding_figure(b_diag, title="Brannock (00102), 2026-01-15 00 UTC: warm layer aloft", top_hpa=400)
    fig
    """),
    md("""
    ## Change the thresholds and the cold limit

    The thresholds are choices, published ones but still choices. Here we move all the Zhang et al. humidity
    thresholds up and down by a few percent, and we move the cold limit from −40 °C to −20 °C and −10 °C (some
    forecasters treat cloud much colder than −20 °C as mostly ice). Watch the base, the top and the depth of the
    supercooled layer, at Aldren Point (a stratiform deck, top near −17 °C) and at Cullin Head (00103, convective
    cloud with a top near −27 °C).
    """),
    code("""
    cullin = next(p for p in profiles if p.attrs["station"] == "00103" and p.attrs["time"].endswith("T00:00:00Z"))
    cases = {"Aldren Point": profile, "Cullin Head": cullin}


    def shifted(values, change):
        return tuple(v + change for v in values)


    rows = []
    for where, prof in cases.items():
        for change in (-10, -5, 0, 3):
            options = {name: shifted(getattr(layers, f"ZHANG_{name.upper()}"), change)
                       for name in ("min_rh", "max_rh", "inter_rh")}
            cloud = icing.cloud_layers(prof, **options)
            sc = icing.supercooled_layers(prof, **options)
            rows.append({"station": where, "RH thresholds": f"{change:+d} %",
                         "cloud base (ft)": cloud["base_height_ft"].min(),
                         "cloud top (ft)": cloud["top_height_ft"].max(),
                         "supercooled top (ft)": sc["top_height_ft"].max(),
                         "supercooled depth (m)": sc["thickness_m"].sum()})
    pd.DataFrame(rows).round(0)
    """),
    md("""
    Lower thresholds call more of the moist air cloud, so the cloud grows at its edges; the supercooled base
    stays at the freezing level. These invented soundings dry out sharply at cloud top, so the thresholds matter
    little here; in a ragged real profile they can matter a lot. Now the cold limit:
    """),
    code("""
    rows = []
    for where, prof in cases.items():
        for cold_limit in (-40, -30, -20, -10):
            for row in icing.supercooled_layers(prof, cold_limit=cold_limit).itertuples():
                rows.append({"station": where, "cold limit (°C)": cold_limit, "base (ft)": row.base_height_ft,
                             "top (ft)": row.top_height_ft, "top temperature (°C)": row.top_temperature_c,
                             "depth (m)": row.thickness_m})
    pd.DataFrame(rows).round(1)
    """),
    md("""
    A cold limit only matters once it is warmer than the cloud top: Aldren Point's deck (top −17 °C) changes only
    at −10 °C, Cullin Head's deeper cloud (top −27 °C) already at −20 °C. The same on the sounding diagram:
    """),
    code("""
    fig = sounding_figure(cullin, cold_limit=-20.0, title="Cullin Head (00103) 00 UTC with a -20 °C cold limit")
    fig
    """),
    md("""
    ## Try it yourself

    * Read the CSV version of the same ascent, `icing.read_sounding(DATA / "S1_00101_2026011500.csv")`, and
      compare its supercooled layer with the one from the TEMP report. Why are they almost, but not exactly,
      the same? (Hint: the TEMP code rounds and drops heights of significant levels.)
    * Cullin Head (00103) has convective cloud. Compare its LWC with Aldren Point's: the adiabatic estimate is
      reduced less for stratiform cloud than for convective cloud, yet convective cloud is deeper.
    * Try `airmass="marine"` in `icing.physics.diagnose`: fewer, larger droplets for the same LWC. What happens to the
      MVD?

    ## References

    * Bourgouin, P. (2000): A method to determine precipitation types. *Weather and Forecasting* 15, 583–592.
    * Hu, Y., and co-authors (2010): Occurrence, liquid water content, and fraction of supercooled water clouds
      from combined CALIOP/IIR/MODIS measurements. *J. Geophys. Res.* 115, D00H34.
    * Wang, J. and Rossow, W. B. (1995): Determination of cloud vertical structure from upper-air observations.
      *J. Appl. Meteor.* 34, 2243–2258.
    * WMO (2011, updated): *Manual on Codes*, WMO-No. 306, Volume I.1, Part A, FM 35 TEMP.
    * Zhang, J., Chen, H., Li, Z., Fan, X., Peng, L., Yu, Y. and Cribb, M. (2010): Analysis of cloud layer
      structure in Shouxian, China using RS92 radiosonde aided by 95 GHz cloud radar. *J. Geophys. Res.* 115,
      D00K30.
    """),
]

# ------------------------------------------------------------------------------------------------ notebook 2
NB2 = [
    md(f"""
    # 2. Why drop size and speed matter

    How much ice an aircraft collects depends on more than the amount of supercooled water in the cloud. Small
    droplets follow the air as it flows round a wing and many of them miss it; large drops are too heavy to
    turn and hit it. A fast aircraft sweeps through more cloud per second, but it also heats its own surface by
    friction. And whether the water freezes on impact (rime) or flows back before it freezes (glaze) depends on
    a heat balance. This notebook looks at each piece in turn:

    1. the **collision efficiency** of a cylinder against drop size and body size, compared with the values of
       Langmuir and Blodgett (1946);
    2. the **heat balance** from rime to glaze as temperature and liquid water content change;
    3. the **accretion rate** in the certification reference clouds of 14 CFR Part 25 Appendix C.

    {CAUTION_MD}

    **Published sources used here:** Langmuir and Blodgett (1946); Finstad, Lozowski and Gates (1988);
    Messinger (1953); Makkonen (2000); Macklin (1962); 14 CFR Part 25 Appendices C and O; FAA AC 20-73A.
    """),
    code("""
    %matplotlib inline
    import matplotlib.pyplot as plt
    import numpy as np
    import pandas as pd

    pd.set_option("display.precision", 3)
    """),
    code(FIND_DATA),
    code("""
    from icing.physics import accretion, envelopes
    from icing.units import ureg

    Q = ureg.Quantity
    """),
    md("""
    ## Collision efficiency: which drops hit the wing?

    A leading edge is modelled as a circular cylinder of diameter *D*. Whether a drop of diameter *d* hits it is
    set by two numbers (Langmuir and Blodgett 1946):

    * the **inertia parameter** *K* = ρ<sub>w</sub> *d*² *v* / (9 μ *D*), with ρ<sub>w</sub> the density of
      water, *v* the airspeed and μ the viscosity of air: large drops, fast flight and thin bodies give a large
      *K* and a high catch;
    * the **range parameter** φ = Re²/*K*, with the drop's Reynolds number Re = ρ<sub>a</sub> *v* *d* / μ
      (ρ<sub>a</sub> the air density), which measures how far the drag on the drop departs from Stokes flow.

    The overall collision efficiency *E* is the fraction of the drops in the swept-out tube that hit the body.
    The library uses the fit of Finstad, Lozowski and Gates (1988) to their trajectory computations. Here is *E*
    at 100 m/s (about 195 kt) and −10 °C, 700 hPa, for a 5 mm probe, 3 cm and 8 cm bodies (the library's
    light-aircraft and turboprop reference bodies are 5 and 8 cm) and a 20 cm wing root:
    """),
    code("""
    drops_um = np.linspace(5, 60, 111)
    fig, ax = plt.subplots(figsize=(7, 4.5))
    for body_mm in (5, 30, 80, 200):
        e = icing.collision_efficiency(Q(drops_um, "micrometer"), Q(100, "m/s"), Q(body_mm, "mm"),
                                       Q(-10, "degC"), Q(700, "hPa"))
        ax.plot(drops_um, e.magnitude, label=f"body {body_mm} mm")
    ax.set(xlabel="drop diameter (µm)", ylabel="collision efficiency E",
           title="Collision efficiency of a cylinder at 100 m/s, -10 °C, 700 hPa", ylim=(0, 1.02))
    ax.axvspan(5, 50, color="0.93", zorder=0)
    ax.text(6, 0.95, "cloud droplets (< 50 µm)", fontsize=8)
    ax.legend()
    ax.grid(alpha=0.3)
    """),
    md("""
    Thin bodies catch almost everything, which is why ice appears first on small parts such as antennas, probes
    and the windscreen wiper arm. A thick wing root catches few of the small droplets.

    ### A check against the published values

    Langmuir and Blodgett tabulated *E* against *K* (their Table IV) in the limit φ → 0. The fit of
    Finstad et al. holds for φ ≥ 100 and gives slightly lower values for real flight, where φ is
    in the thousands; the library joins the two. The points are the published values, the lines the library.
    """),
    code("""
    langmuir_table_iv = pd.DataFrame({"K": [1.26, 5.04, 20.1, 125.9], "E (phi -> 0)": [0.445, 0.760, 0.928, 0.987]})
    k = np.logspace(-1, 2.3, 200)
    fig, ax = plt.subplots(figsize=(7, 4.5))
    for phi in (0, 1000, 10000):
        ax.semilogx(k, accretion.collision_efficiency_si(k, np.full_like(k, phi)), label=f"library, phi = {phi}")
    ax.semilogx(langmuir_table_iv["K"], langmuir_table_iv["E (phi -> 0)"], "ko",
                label="Langmuir and Blodgett (1946), Table IV")
    ax.set(xlabel="inertia parameter K", ylabel="collision efficiency E", ylim=(0, 1.02),
           title="E against K: the library and the published values")
    ax.legend()
    ax.grid(alpha=0.3, which="both")
    langmuir_table_iv.assign(library=accretion.collision_efficiency_si(langmuir_table_iv["K"].to_numpy(), 0.0))
    """),
    md("""
    A worked case: a 20 µm drop at 100 m/s on a 30 mm cylinder at 0 °C and 1013 hPa. By hand, with
    μ ≈ 1.72 × 10⁻⁵ Pa s, *K* = 1000 · (20 × 10⁻⁶)² · 100 / (9 · 1.72 × 10⁻⁵ · 0.03) ≈ 8.6, and φ
    comes out near 2.6 × 10³. The fit gives *E* ≈ 0.68:
    """),
    code("""
    t, p = 273.15, 101325.0
    mu = accretion.air_viscosity_si(t)
    k_case = accretion.inertia_parameter_si(20e-6, 100.0, 0.03, mu)
    phi_case = accretion.range_parameter_si(100.0, 0.03, accretion.air_density_si(p, t), mu)
    e_case = icing.collision_efficiency(Q(20, "micrometer"), Q(100, "m/s"), Q(30, "mm"), Q(0, "degC"),
                                        Q(1013.25, "hPa"))
    print(f"mu = {mu:.3e} Pa s, K = {k_case:.2f}, phi = {phi_case:.0f}, E = {e_case.magnitude:.2f}")
    """),
    md("""
    Real clouds hold a spread of sizes. Langmuir and Blodgett's distribution "D" puts the water in seven bins
    round the MVD; averaging *E* over it catches more at small MVD (the big drops of the spread still hit) and
    less at large MVD:
    """),
    code("""
    fig, ax = plt.subplots(figsize=(7, 4))
    for dist, style in (("mvd", "-"), ("langmuir_d", "--")):
        e = icing.collision_efficiency(Q(drops_um, "micrometer"), Q(100, "m/s"), Q(80, "mm"), Q(-10, "degC"),
                                       Q(700, "hPa"), distribution=dist)
        ax.plot(drops_um, e.magnitude, style, label={"mvd": "all drops at the MVD",
                                                     "langmuir_d": "Langmuir D distribution"}[dist])
    ax.set(xlabel="MVD (µm)", ylabel="collision efficiency E", title="80 mm body, 100 m/s", ylim=(0, 1))
    ax.legend()
    ax.grid(alpha=0.3)
    """),
    md("""
    ## The heat balance: rime, mixed or glaze

    Each kilogram of water that freezes releases the latent heat of fusion, 334 kJ. The surface must get rid of
    it, by convection to the cold air, by evaporation, and by warming the incoming water, while friction and the
    drops' kinetic energy add heat. Messinger (1953) wrote this balance for an unheated surface; Makkonen (2000)
    gives the form for a cylinder. The **freezing fraction** *n* is the part of the caught water that freezes on
    the spot:

    * *n* = 1, **dry growth**: every drop freezes on impact, trapping air: white, rough, brittle **rime**;
    * 0 < *n* < 1, **wet growth**: the surface sits at 0 °C, part of the water runs back before freezing: clear,
      dense **glaze** (and, in between, **mixed** ice).

    Cold air and little water give rime; air just below freezing with plenty of water gives glaze.
    """),
    code("""
    temps = np.linspace(-30, -0.5, 60)
    fig, ax = plt.subplots(figsize=(7, 4.5))
    for lwc in (0.1, 0.3, 0.6, 1.0):
        n, ts, wet = icing.freezing_fraction(Q(lwc, "g/m^3"), Q(20, "micrometer"), Q(120, "m/s"), Q(80, "mm"),
                                             Q(temps, "degC"), Q(700, "hPa"))
        ax.plot(temps, n.magnitude, label=f"LWC {lwc} g/m³")
    ax.set(xlabel="air temperature (°C)", ylabel="freezing fraction n",
           title="Freezing fraction: 20 µm drops, 120 m/s, 80 mm body, 700 hPa", ylim=(0, 1.05))
    ax.text(-29.5, 0.45, "n = 1: dry growth, rime\\nn < 1: wet growth, mixed or glaze\\n(the surface sits at 0 °C)",
            fontsize=9, bbox={"facecolor": "white", "edgecolor": "0.7"})
    ax.legend(loc="lower left")
    ax.grid(alpha=0.3)
    """),
    md("""
    The same balance over a grid of temperature and LWC gives a map of the ice type. The boundary between rime
    and wet growth moves to colder air as the LWC rises and as the aircraft flies faster (more heat from
    friction). The split of wet growth into "mixed" (*n* ≥ 0.5) and "glaze" is our convention, not a
    published rule.
    """),
    code("""
    from matplotlib.colors import BoundaryNorm, ListedColormap

    tt, ww = np.meshgrid(np.linspace(-25, -0.5, 80), np.linspace(0.05, 1.5, 60))
    fig, axes = plt.subplots(1, 2, figsize=(11, 4.4), sharey=True, layout="constrained")
    cmap = ListedColormap(["#ffffff", "#d9e6f5", "#8fb3de", "#2b5d9b"])
    norm = BoundaryNorm([-0.5, 0.5, 1.5, 2.5, 3.5], cmap.N)
    for ax, speed in zip(axes, (70, 150), strict=True):
        n, _, _ = icing.freezing_fraction(Q(ww, "g/m^3"), Q(20, "micrometer"), Q(speed, "m/s"), Q(80, "mm"),
                                          Q(tt, "degC"), Q(700, "hPa"))
        code_ = accretion.ice_type_code(n.magnitude)
        mesh = ax.pcolormesh(tt, ww, code_, cmap=cmap, norm=norm, shading="auto")
        ax.set(xlabel="air temperature (°C)", title=f"{speed} m/s ({speed * 1.944:.0f} kt)")
    axes[0].set_ylabel("liquid water content (g/m³)")
    bar = fig.colorbar(mesh, ax=axes, ticks=[0, 1, 2, 3])
    bar.ax.set_yticklabels(["none", "rime", "mixed", "glaze"])
    fig.suptitle("Ice type from the heat balance (20 µm drops, 80 mm body, 700 hPa)");
    """),
    md("""
    Look at the white band near 0 °C in the faster case: there the heating by friction and by the impact of
    the drops keeps the leading edge just above 0 °C, so nothing freezes *on the stagnation line*. That is not
    "no icing": the water runs back and can freeze further aft as runback ice, which this simple model does not
    follow (the library flags such points as `warm_surface`).
    """),
    md("""
    ## Accretion rate in the certification clouds

    Aircraft are certified for flight in icing against reference clouds: **14 CFR Part 25 Appendix C** gives,
    for stratiform cloud (the *continuous maximum*, over a reference distance of 17.4 nmi), the largest LWC to
    expect at each temperature and MVD. Appendix O adds freezing drizzle and freezing rain, whose drops are far
    larger (100–500 µm and more) and lie outside Appendix C altogether. The tabulated points of the continuous
    maximum (FAA AC 20-73A, Table 6):
    """),
    code("""
    pd.DataFrame(envelopes.CONTINUOUS_MAX_LWC_G_M3,
                 index=[f"{t:.0f} °C" for t in envelopes.CONTINUOUS_MAX_TEMPERATURE_C],
                 columns=[f"MVD {m:.0f} µm" for m in envelopes.CONTINUOUS_MAX_MVD_UM]).iloc[::-1]
    """),
    md("""
    Now the ice growth rate on the leading edge of a generic turboprop (270 kt cruise, 8 cm reference body) when
    it flies through each of these clouds. The accretion model of Makkonen (2000) is
    d*M*/d*t* = α₁ α₂ α₃ *w* *v* *D*: collision efficiency × sticking efficiency (1 for
    liquid drops) × freezing fraction × LWC × speed × body size, turned into a thickness rate with the ice
    density (Macklin 1962 for rime, 917 kg/m³ for glaze). The dashed lines are the thresholds of the intensity
    words (trace, light, moderate, severe, from the US Air Weather Service forecasters' guide of 1980 as quoted in
    later handbooks; "severe" also depends on the aircraft).
    """),
    code("""
    aircraft = icing.get_aircraft("turboprop")
    speed = Q(aircraft.tas_cruise_kt, "knot")
    temps = np.linspace(-30, -1, 59)
    fig, ax = plt.subplots(figsize=(7.5, 4.8))
    for mvd in (15, 20, 25, 40):
        lwc = envelopes.appendix_c_continuous_max_lwc(Q(mvd, "micrometer"), Q(temps, "degC"))
        _, thickness = icing.accretion_rate(lwc, Q(mvd, "micrometer"), speed, Q(aircraft.body_diameter_m, "m"),
                                            Q(temps, "degC"), Q(700, "hPa"))
        ax.plot(temps, thickness.to("mm/hour").magnitude, label=f"MVD {mvd} µm")
    for inches, word in zip(accretion.INTENSITY_THRESHOLDS_IN_PER_H, ("light", "moderate", "severe"), strict=True):
        ax.axhline(inches * 25.4, color="0.4", ls="--", lw=0.8)
        ax.text(-29.5, inches * 25.4 * 1.04, f"{word} from {inches:g} in/h", fontsize=8, color="0.3")
    ax.set(xlabel="air temperature (°C)", ylabel="ice thickness rate (mm/h)",
           title=f"Turboprop at {aircraft.tas_cruise_kt:.0f} kt in the Appendix C continuous maximum")
    ax.legend()
    ax.grid(alpha=0.3)
    """),
    md("""
    Three things stand out. First, the rate falls as the cloud gets colder, because the reference clouds hold
    less water there (the kinks at −10 °C and −20 °C come from interpolating between the tabulated
    temperatures). Second, the larger MVD curves lie **below** the small ones even though large drops are caught
    better: Appendix C's clouds with large drops hold much less water. Third, above about −11 °C the rate drops
    steeply: the surface is in wet growth and part of the water runs back unfrozen, and above about −4 °C at
    this speed the leading edge stays above 0 °C (the white band of the map above). All the rates here are far
    above the "severe" line: the continuous maximum is a design case, the worst stratiform cloud to expect, not
    a typical one.

    What does the speed do? The same cloud (MVD 20 µm, −10 °C, its continuous-maximum LWC) at different true
    airspeeds:
    """),
    code("""
    speeds_kt = np.linspace(80, 450, 60)
    lwc = envelopes.appendix_c_continuous_max_lwc(Q(20, "micrometer"), Q(-10, "degC"))
    rows = {}
    for body_mm in (30, 80):
        _, thickness = icing.accretion_rate(lwc, Q(20, "micrometer"), Q(speeds_kt, "knot"), Q(body_mm, "mm"),
                                            Q(-10, "degC"), Q(700, "hPa"))
        rows[body_mm] = thickness.to("mm/hour").magnitude
    fig, ax = plt.subplots(figsize=(7, 4))
    for body_mm, rate in rows.items():
        ax.plot(speeds_kt, rate, label=f"body {body_mm} mm")
    ax.set(xlabel="true airspeed (kt)", ylabel="ice thickness rate (mm/h)",
           title=f"MVD 20 µm, -10 °C, LWC {lwc.magnitude:.2f} g/m³ (Appendix C continuous maximum)")
    ax.legend()
    ax.grid(alpha=0.3)
    """),
    md("""
    Faster flight sweeps through more cloud each second, and a thinner body catches more of it, so the rate
    first climbs with speed. At the bend (near 220 kt here) the heat released by all that freezing water can no
    longer be carried away and the surface turns to wet growth. Beyond that, heating by friction takes over: the
    air brought to rest on the leading edge warms by about *r v*² / 2*c*<sub>p</sub>, some 18 K at 420 kt, and the
    stagnation line stays above 0 °C. That is why fast jets collect less ice in cruise than turboprops at the
    same temperature, though they still ice up in climb and descent, and runback ice can form behind the leading
    edge.

    ## Try it yourself

    * Raise the temperature in the accretion-rate plot to −2 °C and the LWC to 1 g/m³: how fast does glaze
      build on the turboprop?
    * Change the body to 200 mm (a thick wing root): how much lower is the rate? Why is a small outside-air
      temperature probe a good ice detector?
    * Freezing drizzle drops of 200 µm: what does the collision efficiency say, and why does the library warn
      that its model is not valid there (drops splash, and Appendix O, not Appendix C, describes that cloud)?

    ## References

    * FAA (1971): Advisory Circular 20-73, *Aircraft Ice Protection*, and AC 20-73A (2006), Table 6.
    * Finstad, K. J., Lozowski, E. P. and Gates, E. M. (1988): A computational investigation of water droplet
      trajectories. *J. Atmos. Oceanic Technol.* 5, 160–170.
    * Langmuir, I. and Blodgett, K. B. (1946): *A mathematical investigation of water droplet trajectories.*
      Army Air Forces Technical Report 5418.
    * Macklin, W. C. (1962): The density and structure of ice formed by accretion. *Q. J. R. Meteorol. Soc.*
      88, 30–50.
    * Makkonen, L. (2000): Models for the growth of rime, glaze, icicles and wet snow on structures. *Phil.
      Trans. R. Soc. Lond. A* 358, 2913–2939.
    * Messinger, B. L. (1953): Equilibrium temperature of an unheated icing surface as a function of air speed.
      *J. Aeronaut. Sci.* 20, 29–42.
    * US Code of Federal Regulations, 14 CFR Part 25, Appendix C (atmospheric icing conditions) and Appendix O
      (supercooled large drop icing conditions).
    """),
]

# ------------------------------------------------------------------------------------------------ notebook 3
NB3 = [
    md(f"""
    # 3. Screening a route

    A flight crosses many columns of air. To screen a route, the library follows the aircraft minute by minute
    along its planned path (positions on the WGS 84 ellipsoid, altitudes, speeds, times), asks the soundings
    nearest in space and time what the air is like at each point, runs the accretion model of notebook 2 with
    the aircraft's own speed and reference body, and adds it up per segment. It then tries the whole route at
    other altitudes. In this notebook you will look at

    1. the demo route and the soundings around it,
    2. the segment table and the route summary,
    3. the cross-section along the route,
    4. the alternative altitudes,
    5. what "no data" means, and why it is never "no icing".

    {CAUTION_MD}

    **Published sources used here:** Zhang et al. (2010) and Hu et al. (2010) for the cloud and its liquid;
    Bourgouin (2000) for freezing rain; Finstad, Lozowski and Gates (1988), Messinger (1953) and Makkonen (2000)
    for the accretion; 14 CFR Part 25 Appendices C and O for the certification envelopes.
    """),
    code(SETUP),
    code(FIND_DATA),
    md("""
    ## The route and the soundings

    The demo route flies from Port Aldren to Eskerry Field across the invented Varrow Isles, leaving at 05 UTC,
    climbing to FL120 and FL140. Five stations sent soundings at 00 and 12 UTC.
    """),
    code("""
    route_file = DATA / "demo_route.csv"
    route = icing.read_route(route_file)
    stations = pd.read_csv(DATA / "stations.csv", dtype={"station": str})
    sounding_files = sorted(DATA.glob("S?_*.csv"))
    print(f"departure {route.departure}, {len(sounding_files)} sounding files")
    pd.DataFrame([{"waypoint": w.name, "latitude": w.latitude, "longitude": w.longitude,
                   "altitude": w.altitude_label} for w in route.waypoints])
    """),
    code("""
    fig, ax = plt.subplots(figsize=(8, 4.5))
    lat = [w.latitude for w in route.waypoints]
    lon = [w.longitude for w in route.waypoints]
    ax.plot(lon, lat, "-o", color="tab:blue", label="route")
    for w in route.waypoints:
        ax.annotate(w.name, (w.longitude, w.latitude), textcoords="offset points", xytext=(4, 6), color="tab:blue")
    ax.plot(stations["longitude"], stations["latitude"], "^", color="tab:red", ms=9, label="sounding station")
    for s in stations.itertuples():
        ax.annotate(f"{s.station} {s.name}", (s.longitude, s.latitude), textcoords="offset points",
                    xytext=(4, -12), fontsize=8, color="tab:red")
    ax.set(xlabel="longitude (°)", ylabel="latitude (°)", title="Demo route over the invented Varrow Isles",
           aspect=1 / np.cos(np.radians(54)))
    ax.legend(loc="upper left")
    ax.grid(alpha=0.3)
    """),
    md("""
    ## Screening it

    `assess_route` takes the route, the soundings and an aircraft (here the generic turboprop preset: 270 kt
    cruise, 8 cm reference body). Each sample of the trajectory uses at most the three nearest stations within
    300 km, weighted by inverse distance squared, and the two reports either side of its time, weighted linearly
    in time. Reports more than 12 hours away are not used.
    """),
    code("""
    from icing.flight.sources import SoundingSource

    soundings = [p for f in sounding_files for p in icing.read_profiles(f)]
    source = SoundingSource(soundings)
    result = icing.assess_route(route, source, aircraft="turboprop")
    print(result.caution)
    """),
    md("""
    ## The segment table

    One row a segment (waypoint to waypoint). The main columns:

    * `icing_minutes`: time spent in supercooled cloud; `max_rate_mm_per_h`: the fastest ice growth on the
      reference body; `accretion_mm`: the ice built up over the segment;
    * `intensity`: trace, light, moderate or severe from the rate (or `unknown`); `ice_type`: rime, mixed or
      glaze; `large_drops`: freezing drizzle or rain possible (the Bourgouin warm-layer check);
    * `data`: `ok`, `partial` or `missing`, and `sources`: which reports were used.
    """),
    code("""
    main = ["segment", "start", "end", "distance_nm", "altitude_ft_min", "altitude_ft_max", "icing_minutes",
            "max_rate_mm_per_h", "accretion_mm", "intensity", "ice_type", "large_drops", "data"]
    result.segments[main]
    """),
    md("""
    The detail columns say *why*: the largest LWC and the MVD met, the coldest temperature, the freezing level
    and the top of the supercooled layers, and where the conditions stand against the certification envelopes
    (Appendix C for cloud, Appendix O for large drops). "beyond" is a caution, not a verdict.
    """),
    code("""
    detail = ["segment", "max_lwc_g_m3", "mvd_um", "min_temperature_c", "freezing_level_ft", "supercooled_top_ft",
              "appendix_c", "appendix_o", "data_distance_km", "data_age_h"]
    result.segments[detail]
    """),
    code("""
    summary = {k: f"{v:.3g}" if isinstance(v, float) else v for k, v in result.summary.items()
               if k not in ("caution", "intensity_note")}
    pd.Series(summary, name="route summary").to_frame()
    """),
    md("""
    `best_altitude_plan_accretion_mm` is NaN because segment 4 has no alternative altitude with full data:
    unknown, not zero (more on that below).

    Segment 1 crosses Brannock's warm layer aloft during the climb, so freezing rain is possible there
    (`large_drops` = rain): that is the most dangerous kind of icing and lies outside what most aircraft are
    certified for. Segments 2 and 3 cruise inside a deep supercooled stratiform deck.

    ## The cross-section

    Distance along the route against altitude. The shading is the supercooled liquid sampled from the soundings
    at the aircraft's position and time, the line the 0 °C level, the thick line the planned path, and hatching
    marks where there are no data.
    """),
    code("""
    from icing.report.plots import cross_section_figure, segment_chart_figure

    fig = cross_section_figure(result, source)
    fig
    """),
    md("""
    ## Alternative altitudes

    The screen flies the whole route again with offsets of ±2000, ±4000 and ±6000 ft and keeps, per segment,
    the ice built up. An empty cell means that altitude had incomplete data or lies below 2000 ft (terrain and
    airspace are not known here). The segment chart compares the plan with the best altitude found.
    """),
    code("""
    alternatives = result.alternatives.pivot(index="segment", columns="offset_ft", values="accretion_mm")
    alternatives.columns = [f"{c:+.0f} ft" for c in alternatives.columns]
    alternatives.round(1)
    """),
    code("""
    fig = segment_chart_figure(result)
    fig
    """),
    md("""
    Climbing above the deck (the +4000 ft and +6000 ft rows) nearly removes the ice on segments 2 and 3: the
    supercooled layer tops out near 13,700 ft. Whether that is possible is for the crew and air traffic control
    to decide: the screen knows nothing of the aircraft's weight, oxygen, terrain or airspace.

    ## What "no data" means

    Look at segment 4: its `data` says `partial`. The Eskerry ascents (station 00105) carry two bad values: a
    dewpoint above the temperature at 875 hPa and a temperature of +71.5 °C at 750 hPa. The checks removed them
    (here is the quality record), so near Eskerry those levels have no usable humidity or temperature, and the
    other stations are far away.
    """),
    code("""
    eskerry = next(p for p in soundings if p.attrs["station"] == "00105")
    record = pd.DataFrame(eskerry.attrs["quality"])
    record[record["action"].isin(["removed", "dropped"])][["pressure_hpa", "action", "reason"]]
    """),
    md("""
    Each trajectory sample has a `coverage`: the share of its matching weight that came from usable data. Below
    1, the sample's rate is only what the known part says, a lower bound; the rest is **unknown**. A segment
    with such samples says `partial` and can never report `none`.
    """),
    code("""
    samples = result.samples
    gaps = samples[samples["coverage"] < 0.999]
    print(f"{len(gaps)} of {len(samples)} samples lack complete data")
    gaps[["leg", "latitude", "longitude", "altitude_ft", "pressure_hpa", "coverage", "data_distance_km"]].round(2)
    """),
    md("""
    Now make it worse on purpose. With a tighter matching radius (100 km instead of 300 km) fewer stations
    reach the route, and with a departure a day later every report is too old. Watch the `data` and
    `intensity` columns: they say `missing` and `unknown`, never `none`.
    """),
    code("""
    near = icing.assess_route(route, soundings, aircraft="turboprop", max_distance_km=100)
    late = icing.assess_route(route_file, soundings, aircraft="turboprop", departure="2026-01-16T12:00:00Z")
    cols = ["segment", "icing_minutes", "accretion_mm", "intensity", "data"]
    pd.concat({"300 km (default)": result.segments[cols].set_index("segment"),
               "100 km": near.segments[cols].set_index("segment"),
               "a day late": late.segments[cols].set_index("segment")}, axis=1)
    """),
    code("""
    fig = cross_section_figure(near, SoundingSource(soundings, max_distance_km=100))
    fig
    """),
    md("""
    The hatched columns are stretches more than 100 km from every station: there the screen cannot say
    anything, and the path through them is drawn as "rate unknown". A careless reading of a blank map as
    "clear" is exactly the mistake this labelling is there to stop.
    """),
    md("""
    ## Try it yourself

    * Screen the route with `aircraft="regional-jet"` (faster, larger body) and compare the accretion.
    * Use `cold_limit=-20` in `assess_route`: which segments change, and why?
    * Read the soundings from the TEMP bulletin of notebook 1 instead of the CSV files (remember the station
      table and the month) and check that the answer is nearly the same.

    ## References

    * Bourgouin, P. (2000): A method to determine precipitation types. *Weather and Forecasting* 15, 583–592.
    * Finstad, K. J., Lozowski, E. P. and Gates, E. M. (1988): *J. Atmos. Oceanic Technol.* 5, 160–170.
    * Hu, Y., and co-authors (2010): *J. Geophys. Res.* 115, D00H34.
    * Makkonen, L. (2000): *Phil. Trans. R. Soc. Lond. A* 358, 2913–2939.
    * Messinger, B. L. (1953): *J. Aeronaut. Sci.* 20, 29–42.
    * Zhang, J., and co-authors (2010): *J. Geophys. Res.* 115, D00K30.
    * 14 CFR Part 25, Appendix C and Appendix O.
    """),
]

# ------------------------------------------------------------------------------------------------ notebook 4
NB4 = [
    md(f"""
    # 4. A model grid

    A numerical weather model gives temperature and humidity on a grid of columns, every few hours. Each column
    is diagnosed exactly as a sounding is (notebook 1), so a whole map of freezing levels and supercooled layers
    comes out at once. The demo grid is small (13 × 31 columns, 23 pressure levels, three times), but the same
    code works on a large model run because the work is split into chunks with **dask** and only done when a
    result is asked for. In this notebook you will

    1. open the synthetic model field lazily,
    2. compute the diagnostics with dask,
    3. map the freezing level and the depth of the supercooled layer,
    4. screen several routes through the grid.

    {CAUTION_MD}

    **Published sources used here:** Zhang et al. (2010) for cloud from humidity; Hu et al. (2010) for the
    liquid fraction; Bourgouin (2000) for warm layers aloft; Finstad, Lozowski and Gates (1988), Messinger
    (1953) and Makkonen (2000) for the accretion; 14 CFR Part 25 Appendix C for the reference clouds.
    """),
    code(SETUP),
    code(FIND_DATA),
    md("""
    ## Opening the field lazily

    `read_model` with `chunks` opens the netCDF file without reading the data: each variable is a dask array, a
    recipe for reading it piece by piece. The reader also normalises the layout (the file stores latitudes from
    north to south, longitudes 0–360, pressure in Pa and temperature in K) and writes what it changed into the
    quality record.
    """),
    code("""
    from icing.grid import chunk_model, diagnose_grid
    from icing.io.model import read_model

    model = chunk_model(read_model(DATA / "model" / "demo_model.nc", chunks={}))
    print(model.attrs["title"])
    temperature = model["temperature"].data
    print("temperature is a", type(temperature).__name__, "with chunks", temperature.chunksize)
    pd.DataFrame(model.attrs["quality"])[["action", "reason"]].head(6)
    """),
    md("""
    ## Diagnostics, computed lazily

    `diagnose_grid` builds the task graph of the whole diagnosis (cloud, supercooled liquid, LWC, MVD, large
    drops, freezing levels, and with an aircraft the potential ice growth rate on its reference body) without
    computing anything yet. Nothing is read until `.compute()`.
    """),
    code("""
    import dask

    diag = diagnose_grid(model, "turboprop")
    print("lazy:", type(diag["supercooled_top_m"].data).__name__,
          "with", len(dict(diag["supercooled_top_m"].__dask_graph__())), "tasks")
    with dask.config.set(scheduler="threads", num_workers=2):
        maps = diag[["freezing_level_m", "supercooled_base_m", "supercooled_top_m", "max_potential_rate",
                     "precipitation_type"]].compute()
    maps
    """),
    md("""
    ## Maps: freezing level and supercooled-layer depth

    The freezing level is the lowest 0 °C crossing in each column. The supercooled depth here is the distance
    from the lowest to the highest supercooled level of the column (any gaps inside count in): a quick way to
    see where an aircraft would have to climb a long way to get out of it. Grey columns have no supercooled
    liquid at all. Stations of the sounding network are marked for orientation.
    """),
    code("""
    stations = pd.read_csv(DATA / "stations.csv", dtype={"station": str})
    depth_m = (maps["supercooled_top_m"] - maps["supercooled_base_m"])
    time = maps["time"].values[0]
    ft = 0.3048

    fig, axes = plt.subplots(1, 2, figsize=(13, 4.6), sharey=True, layout="constrained")
    panels = [(maps["freezing_level_m"].sel(time=time) / ft, "freezing level (ft)", "viridis"),
              (depth_m.sel(time=time) / ft, "supercooled-layer depth (ft)", "Blues")]
    for ax, (field, label, cmap) in zip(axes, panels, strict=True):
        ax.set_facecolor("0.85")
        mesh = ax.pcolormesh(field["longitude"], field["latitude"], field, cmap=cmap, shading="nearest")
        fig.colorbar(mesh, ax=ax, label=label)
        ax.plot(stations["longitude"], stations["latitude"], "^", color="tab:red", ms=7)
        ax.set(xlabel="longitude (°)", title=f"{label.split(' (')[0]}, {pd.Timestamp(time):%d %b %H} UTC",
               aspect=1 / np.cos(np.radians(54)))
    axes[0].set_ylabel("latitude (°)");
    """),
    md("""
    The three model times side by side show how the pattern changes through the day. With the turboprop preset
    the grid also gives the *potential* ice growth rate: the fastest rate in each column if the aircraft flew
    through it at the worst level.
    """),
    code("""
    rate = maps["max_potential_rate"]
    fig, axes = plt.subplots(1, 3, figsize=(15, 3.9), sharey=True, layout="constrained")
    for ax, t in zip(axes, maps["time"].values, strict=True):
        mesh = ax.pcolormesh(maps["longitude"], maps["latitude"], rate.sel(time=t), cmap="Purples",
                             shading="nearest", vmin=0, vmax=float(rate.max()))
        ax.plot(stations["longitude"], stations["latitude"], "^", color="tab:red", ms=6)
        ax.set(title=f"{pd.Timestamp(t):%H} UTC", xlabel="longitude (°)", aspect=1 / np.cos(np.radians(54)))
    axes[0].set_ylabel("latitude (°)")
    fig.colorbar(mesh, ax=axes, label=f"max potential ice growth ({rate.attrs.get('units', '?')})")
    fig.suptitle("Turboprop at 270 kt: the fastest ice growth in each column");
    """),
    md("""
    ## Screening several routes through the grid

    A `GridSource` makes the grid an atmosphere source, like the soundings in notebook 3: each trajectory
    sample takes the model columns around it (interpolated in space and time). Several routes are screened in
    one vectorised pass. Outside the grid, or outside its times, a sample has no data and says so.
    """),
    code("""
    from icing.flight.assess import assess_routes
    from icing.flight.gridsource import GridSource
    from icing.flight.route import Route

    grid = GridSource(model)
    departure = "2026-01-15T05:00:00Z"
    routes = [
        icing.read_route(DATA / "demo_route.csv"),
        Route.from_points([("ALDRN", 52.05, -34.10, 100), ("BRNCK", 53.0, -31.0, "FL180"),
                           ("DUNMR", 54.8, -25.5, "FL180"), ("ESKRY", 55.45, -23.10, 1500)],
                          departure=departure, name="high, via Dunmarrow"),
        Route.from_points([("ALDRN", 52.05, -34.10, 100), ("SOUTH", 52.5, -28.0, 8000),
                           ("ESKRY", 55.45, -23.10, 1500)], departure=departure, name="low, southern"),
    ]
    results = assess_routes(routes, grid, aircraft="turboprop")
    pd.DataFrame([{"route": r.summary["route"], "segments": r.summary["segments"],
                   "icing minutes": r.summary["total_icing_minutes"], "ice (mm)": r.summary["total_accretion_mm"],
                   "worst": r.summary["worst_intensity"], "data complete": r.summary["data_complete"]}
                  for r in results])
    """),
    code("""
    from icing.report.plots import cross_section_figure

    fig = cross_section_figure(results[1], grid)
    fig
    """),
    md("""
    ## Try it yourself

    * Map the freezing level at 12 UTC, or the precipitation type (`maps["precipitation_type"]`, codes in
      `icing.physics.layers.PRECIPITATION_TYPES`): where does freezing rain appear?
    * Screen the demo route against the grid and against the soundings (notebook 3): the model blends the
      stations smoothly, so the answers differ. Which do you trust, and why should a real forecaster look at
      both?
    * Add a route that leaves the grid (say, to 60 N): what do its segments say?

    ## References

    * Bourgouin, P. (2000): *Weather and Forecasting* 15, 583–592.
    * Finstad, K. J., Lozowski, E. P. and Gates, E. M. (1988): *J. Atmos. Oceanic Technol.* 5, 160–170.
    * Hu, Y., and co-authors (2010): *J. Geophys. Res.* 115, D00H34.
    * Makkonen, L. (2000): *Phil. Trans. R. Soc. Lond. A* 358, 2913–2939.
    * Messinger, B. L. (1953): *J. Aeronaut. Sci.* 20, 29–42.
    * Zhang, J., and co-authors (2010): *J. Geophys. Res.* 115, D00K30.
    * 14 CFR Part 25, Appendix C.
    """),
]

NOTEBOOKS = {
    "01_sounding_to_supercooled_layers.ipynb": NB1,
    "02_drop_size_and_speed.ipynb": NB2,
    "03_screening_a_route.ipynb": NB3,
    "04_model_grid.ipynb": NB4,
}


def build(name: str) -> nbformat.NotebookNode:
    """The notebook ``name`` as an nbformat v4 node: no outputs, stable cell ids, the python3 kernel."""
    nb = nbformat.v4.new_notebook()
    nb.metadata = {
        "kernelspec": {"display_name": "Python 3", "language": "python", "name": "python3"},
        "language_info": {"name": "python"},
    }
    stem = name.split("_")[0]
    for i, (kind, source) in enumerate(NOTEBOOKS[name]):
        make = nbformat.v4.new_markdown_cell if kind == "markdown" else nbformat.v4.new_code_cell
        nb.cells.append(make(source, id=f"nb{stem}-{i:02d}"))
    nbformat.validate(nb)
    return nb


def render(name: str) -> str:
    return nbformat.writes(build(name)) + "\n"


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--check", action="store_true", help="only report whether the stored notebooks match")
    args = parser.parse_args(argv)
    stale = []
    for name in NOTEBOOKS:
        path = HERE / name
        text = render(name)
        if args.check:
            if not path.exists() or path.read_text(encoding="utf-8") != text:
                stale.append(name)
        else:
            path.write_text(text, encoding="utf-8")
            print("wrote", path)
    if stale:
        print("out of date (run python notebooks/make_notebooks.py):", ", ".join(stale), file=sys.stderr)
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())

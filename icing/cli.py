"""The ``icing`` command.

Exit codes: 0 ran; 2 bad input or usage (one line on stderr naming the file, line and reason); 1 internal
error (with a request to report it).
"""

from __future__ import annotations

import argparse
import sys
import textwrap
from pathlib import Path

from icing import CAUTION, __version__
from icing.errors import IcingError

EXAMPLES = {
    "screen": "examples:\n"
              "  icing screen route.csv --soundings sample_soundings/\n"
              "  icing screen route.csv --soundings a.csv b.nc --aircraft regional-jet --format json\n"
              "  icing screen route.csv --soundings dir/ --aircraft my_plane.toml --set tas_cruise_kt=210\n"
              "  icing screen route.csv --soundings temp.txt --stations stations.csv --reference-time 2026-01-15 \\\n"
              "      --departure 2026-01-15T05:00Z --out report/\n"
              "  icing screen route.csv --model sample_soundings/model/demo_model.nc --format csv > segments.csv\n"
              "  icing screen sample_soundings/demo_route.csv --model sample_soundings/model/demo_model.nc \\\n"
              "      --departures 2026-01-15T00:00Z/2026-01-15T12:00Z/PT1H --out window/",
    "demo": "examples:\n  icing demo\n  icing demo --format json\n  icing demo --out report/   "
            "(then open report/report.html)\n  icing demo --model --aircraft regional-jet",
    "layers": "examples:\n  icing layers sample_soundings/S1_00101_2026011500.csv\n"
              "  icing layers sample_soundings/ --cold-limit -30 --airmass marine --format csv > layers.csv",
    "inspect": "examples:\n  icing inspect sample_soundings/S5_00105_2026011500.csv\n"
               "  icing inspect temp.txt --stations stations.csv --reference-time 2026-01-15",
    "aircraft": "examples:\n  icing aircraft",
    "verify": "examples:\n"
              "  icing verify reports.txt --date 2026-01-15 --soundings sample_soundings/\n"
              "  icing verify reports.txt --date 2026-01-15 --waypoints fixes.csv --soundings dir/ --out out/\n"
              "  icing verify reports.txt --date 2026-01-15 --model sample_soundings/model/demo_model.nc --format json",
    "grid": "examples:\n  icing grid sample_soundings/model/demo_model.nc --aircraft turboprop --out potential.nc\n"
            "  icing grid fields_*.grib2 --aircraft regional-jet --out potential.nc --workers 2\n"
            "  icing grid big.nc --aircraft turboprop --out potential.nc --scheduler tcp://10.0.0.5:8786",
    "plot": "examples:\n  icing plot sample_soundings/S1_00101_2026011500.csv --out s1.png\n"
            "  icing plot sample_soundings/S2_00102_2026011500.csv --out s2.svg --cold-limit -30\n"
            "  icing plot sample_soundings/S1_00101_2026011500.csv > s1.png",
}
# The grid command's defaults, as in icing.grid.diagnosis (kept here so that help needs no numpy or xarray).
GRID_DEFAULT_CHUNK_POINTS = 400_000
DEFAULT_COLD_LIMIT_C = -40.0


class _Parser(argparse.ArgumentParser):
    """argparse with usage errors as one line on stderr (exit 2), pointing at --help."""

    def error(self, message):
        self.exit(2, f"icing: error: {message} (see '{self.prog} --help')\n")


class Progress:
    """A one-line progress bar on stderr, drawn only when stderr is a terminal (pipes and logs stay clean)."""

    def __init__(self, total, stream=None, width=24):
        self.stream = sys.stderr if stream is None else stream
        self.enabled = hasattr(self.stream, "isatty") and self.stream.isatty()
        self.total, self.done, self.width = max(int(total), 1), 0, width

    def __call__(self, done, total, what=""):
        """Set the position within the current stage (as write_reports' progress callback)."""
        self.show(self.done + (done / max(total, 1)), what)

    def step(self, what=""):
        self.show(self.done, what)
        self.done += 1

    def show(self, position, what=""):
        if not self.enabled:
            return
        k = round(self.width * min(position / self.total, 1.0))
        line = f"[{'#' * k}{'.' * (self.width - k)}] {what}"[:78]
        self.stream.write("\r" + line.ljust(78))
        self.stream.flush()

    def close(self):
        if self.enabled:
            self.stream.write("\r" + " " * 78 + "\r")
            self.stream.flush()


def sample_dir() -> Path:
    """The bundled demo scenario: inside the installed package, or beside it in a source checkout."""
    here = Path(__file__).resolve().parent
    for cand in (here / "sample_soundings", here.parent / "sample_soundings"):
        if (cand / "demo_route.csv").exists():
            return cand
    raise IcingError("the bundled sample soundings are not installed")


def _overrides(pairs):
    out = {}
    for p in pairs or []:
        if "=" not in p:
            raise IcingError(f"--set wants KEY=VALUE, got {p!r}")
        k, v = p.split("=", 1)
        try:
            out[k.strip()] = float(v)
        except ValueError:
            out[k.strip()] = v.strip()
    return out


def _add_reader_options(p):
    p.add_argument("--stations", metavar="FILE", help="station list giving positions to reports that carry none, "
                   "such as land TEMP and PILOT: a CSV (station,latitude,longitude[,elevation_m,name]) or the IGRA "
                   "v2 station list; e.g. --stations stations.csv")
    p.add_argument("--reference-time", metavar="ISO", help="month and year of TEMP reports, which carry only day "
                   "and hour; e.g. --reference-time 2026-01-15")
    p.add_argument("--units", action="append", metavar="VARIABLE=UNIT",
                   help="unit of a table column or netCDF variable whose header names none (repeatable); "
                   "e.g. --units temperature=degC --units pressure=hPa")


def _units_option(values):
    """``--units VARIABLE=UNIT`` options as a mapping (None without any)."""
    if not values:
        return None
    out = {}
    for item in values:
        if "=" not in item:
            raise IcingError(f"--units {item!r}: write VARIABLE=UNIT, e.g. --units temperature=degC")
        k, v = item.split("=", 1)
        out[k.strip()] = v.strip()
    return out


def _add_physics_options(p):
    p.add_argument("--cold-limit", type=float, default=DEFAULT_COLD_LIMIT_C, metavar="DEGC",
                   help="coldest temperature at which supercooled liquid is diagnosed, degC (default -40, near "
                   "homogeneous freezing); e.g. --cold-limit -30")
    p.add_argument("--airmass", choices=["supercooled", "continental", "marine"], default="supercooled",
                   help="droplet number concentration assumed for the droplet size (MVD) and for drizzle: "
                   "supercooled (about 200 per cm3, measured in supercooled stratiform cloud; the default), "
                   "continental (290: more, smaller drops) or marine (75: fewer, larger); e.g. --airmass marine")


def _add_screen_options(sp):
    sp.add_argument("--aircraft", default="turboprop", metavar="NAME_OR_TOML",
                    help="aircraft preset (see 'icing aircraft') or a TOML file of your own; default turboprop; "
                    "e.g. --aircraft regional-jet")
    sp.add_argument("--set", action="append", metavar="KEY=VALUE",
                    help="override one aircraft field (repeatable); e.g. --set tas_cruise_kt=210")
    sp.add_argument("--departure", metavar="ISO",
                    help="departure time, ISO 8601 UTC; when given it is the departure: a route's own times are "
                    "all moved by the same amount, with a note; e.g. --departure 2026-01-15T05:00Z")
    sp.add_argument("--min-altitude", type=float, default=2000.0, metavar="FT",
                    help="lowest altitude a suggested alternative may use, ft (default 2000: give the route's "
                    "minimum safe altitude, which this tool does not know); e.g. --min-altitude 4500")
    sp.add_argument("--step", type=float, default=60.0, metavar="SECONDS",
                    help="time between trajectory samples, s (default 60); e.g. --step 30")
    sp.add_argument("--max-distance", type=float, default=300.0, metavar="KM",
                    help="farthest sounding station used, km (default 300); e.g. --max-distance 200")
    sp.add_argument("--max-age", type=float, default=12.0, metavar="HOURS",
                    help="oldest report used, hours from the flight time (default 12); e.g. --max-age 6")
    _add_physics_options(sp)
    _add_reader_options(sp)
    sp.add_argument("--json", action="store_true", help="the full result as JSON (same as --format json)")
    sp.add_argument("--format", choices=["table", "json", "csv", "geojson"], default="table",
                    help="what goes to stdout: table (for people, default), json (caution, summary, segments), "
                    "csv (one row a segment) or geojson (one line a segment); e.g. --format csv")
    sp.add_argument("--out", metavar="DIR", help="also write the report files (segments.csv, assessment.json, "
                    "segments.geojson, report.html with its figures) to DIR; e.g. --out report/")
    sp.add_argument("--spread", action="store_true",
                    help="how sure: also run the chain over a seeded ensemble of its assumptions (cloud "
                    "threshold, LWC factor, droplet number, cold limit, time and distance weighting; the members "
                    "of a model ensemble file) and show per segment the share of members at light, moderate and "
                    "severe or worse and the 10-90 %% range of accretion; e.g. --spread --members 50")
    sp.add_argument("--members", type=int, default=30, metavar="N",
                    help="members of the --spread ensemble (default 30); e.g. --members 50")
    sp.add_argument("--seed", type=int, default=0, metavar="S",
                    help="seed of the --spread ensemble's draws (default 0: the same answer every run); e.g. "
                    "--seed 7")


def _add_verify_parser(sub):
    vp = _sub(sub, "verify", "verify the diagnosis against pilot reports",
              "Match each pilot report (UA/UUA; /IC NEG counts as observed no icing) to the diagnosis at its "
              "place, flight level and time, and print the contingency tables of icing / no icing and of "
              "intensity with POD, FAR, CSI and TSS (Wilks 2011, ch. 8), and the reliability of any p_* shares. "
              "A report without data is unknown, never counted as no icing.")
    vp.add_argument("reports", help="pilot reports, one a line or separated by '='; e.g. reports.txt")
    what = vp.add_mutually_exclusive_group(required=True)
    what.add_argument("--soundings", nargs="+", metavar="FILE_OR_DIR", help="sounding files or directories "
                      "(CSV, netCDF, TEMP, IGRA, BUFR); e.g. --soundings sample_soundings/")
    what.add_argument("--model", metavar="FIELDS", help="a model grid on pressure levels (netCDF) instead of "
                      "soundings; e.g. --model sample_soundings/model/demo_model.nc")
    vp.add_argument("--date", required=True, metavar="YYYY-MM-DD", help="UTC date of the reports (their /TM "
                    "gives only hhmm); e.g. --date 2026-01-15")
    vp.add_argument("--waypoints", metavar="CSV", help="fix table name,latitude,longitude[,variation] for "
                    "positions given as a fix (with bearing and distance); e.g. --waypoints fixes.csv")
    vp.add_argument("--magnetic-variation", type=float, default=0.0, metavar="DEG", help="east variation added "
                    "to bearings from fixes without one in the table (default 0); e.g. --magnetic-variation -12")
    vp.add_argument("--aircraft", default="turboprop", metavar="NAME_OR_TOML", help="aircraft for the forecast "
                    "intensity (reference body and speed; default turboprop); e.g. --aircraft regional-jet")
    vp.add_argument("--max-minutes", type=float, default=360.0, metavar="MIN", help="a report farther in time "
                    "from the nearest data used is unknown (default 360); e.g. --max-minutes 180")
    vp.add_argument("--max-distance", type=float, default=300.0, metavar="KM",
                    help="soundings farther than this are not used (default 300); e.g. --max-distance 200")
    vp.add_argument("--max-age", type=float, default=12.0, metavar="HOURS",
                    help="soundings older or newer than this are not used (default 12); e.g. --max-age 6")
    vp.add_argument("--strict", action="store_true", help="stop at the first unreadable report (default: skip "
                    "it and list it with its line and reason)")
    vp.add_argument("--format", choices=["table", "json"], default="table", help="table (default) or json; "
                    "e.g. --format json")
    vp.add_argument("--out", metavar="DIR", help="also write matches.csv, scores.json and reliability.png; "
                    "e.g. --out verification/")
    vp.add_argument("--spread", action="store_true", help="also run the seeded ensemble of the chain's "
                    "assumptions at every report (as 'icing screen --spread') and verify its shares p_light, "
                    "p_moderate, p_severe with reliability tables; e.g. --spread --members 50")
    vp.add_argument("--members", type=int, default=30, metavar="N", help="members of the --spread ensemble "
                    "(default 30); e.g. --members 50")
    vp.add_argument("--seed", type=int, default=0, metavar="S", help="seed of the --spread ensemble (default 0); "
                    "e.g. --seed 7")
    _add_reader_options(vp)
    _add_physics_options(vp)
    return vp


def _verify(args):
    import json

    from icing.verify.match import verify_reports
    from icing.verify.pireps import read_pireps

    reports = read_pireps(args.reports, date=args.date, waypoints=args.waypoints,
                          errors="raise" if args.strict else "skip", magnetic_variation=args.magnetic_variation)
    if args.model:
        from icing.flight.gridsource import GridSource

        if _has_members(args.model):
            from icing.flight.spread import ModelEnsemble

            source = ModelEnsemble(args.model, cold_limit=args.cold_limit, airmass=args.airmass)
        else:
            source = GridSource(args.model, cold_limit=args.cold_limit, airmass=args.airmass)
    else:
        from icing.flight.assess import atmosphere_source

        source = atmosphere_source(args.soundings, max_distance_km=args.max_distance, max_age_hours=args.max_age,
                                   cold_limit=args.cold_limit, airmass=args.airmass, stations=args.stations,
                                   reference_time=args.reference_time, units=_units_option(args.units))
    result = verify_reports(reports, source, args.aircraft, max_minutes=args.max_minutes, spread=args.spread,
                            members=args.members, seed=args.seed)
    if args.out:
        written = result.write(args.out)
        print(f"wrote {', '.join(str(p) for p in written)}", file=sys.stderr)
    if args.format == "json":
        print(json.dumps(result.to_dict(), indent=1))
    else:
        print(result.to_text())
    return 0


def _add_grid_parser(sub):
    """``icing grid`` (its arguments here so that help stays light; run by icing.grid.diagnosis.grid_main)."""
    gp = _sub(sub, "grid", "icing diagnostics and accretion potential over model grids",
              "Diagnose supercooled liquid and accretion potential over model grids on pressure levels and write "
              "them as a CF netCDF or zarr file.")
    gp.add_argument("fields", nargs="+", metavar="FIELDS", help="model files on pressure levels (netCDF with CF "
                    "names, or GRIB2 with cfgrib); several files are joined along time; e.g. fields_*.grib2")
    gp.add_argument("--aircraft", default="turboprop", metavar="NAME_OR_TOML",
                    help="preset name or TOML file (default turboprop); e.g. --aircraft regional-jet")
    gp.add_argument("--out", required=True, metavar="FILE", help="output .nc (netCDF4) or .zarr; "
                    "e.g. --out potential.nc")
    gp.add_argument("--airspeed", type=float, metavar="KT", help="true airspeed, kt (default: the aircraft's "
                    "cruise speed); e.g. --airspeed 180")
    _add_physics_options(gp)
    gp.add_argument("--summary-only", action="store_true", help="write only the 2-D column summaries")
    gp.add_argument("--chunk-points", type=int, default=GRID_DEFAULT_CHUNK_POINTS, metavar="N",
                    help=f"level-points per chunk (default {GRID_DEFAULT_CHUNK_POINTS}); e.g. --chunk-points 200000")
    where = gp.add_mutually_exclusive_group()
    where.add_argument("--workers", type=int, metavar="N", help="run on a dask LocalCluster of N processes; "
                       "e.g. --workers 2")
    where.add_argument("--scheduler", metavar="ADDRESS", help="run on a running dask cluster; "
                       "e.g. --scheduler tcp://10.0.0.5:8786")
    gp.add_argument("--quiet", action="store_true", help="no progress bar")
    return gp


def _sub(sub, name, help_text, description=None):
    text = (description or help_text[0].upper() + help_text[1:] + ".") + "\n\n" + CAUTION
    return sub.add_parser(name, help=help_text, description="\n".join(
                              "\n".join(textwrap.wrap(par, 100)) for par in text.split("\n")),
                          epilog=EXAMPLES[name], formatter_class=argparse.RawDescriptionHelpFormatter)


def build_parser() -> argparse.ArgumentParser:
    """The argument parser of every command (standard library only: ``icing --help`` starts fast)."""
    parser = _Parser(
        prog="icing", description="Screen a planned flight route for airframe icing from soundings.\n\n"
        + "\n".join(textwrap.wrap(CAUTION, 100)),
        epilog="run 'icing COMMAND --help' for a command's options and examples; first try:\n  icing demo\n"
               "  icing demo --out report/",
        formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--version", action="version", version=f"icing {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    sp = _sub(sub, "screen", "screen a route against soundings or a model grid",
              "Screen a planned route: per segment, the minutes in supercooled liquid, the ice accreted on the "
              "aircraft's reference body, intensity, ice type, large drops and whether the data were complete.")
    sp.add_argument("route", help="route CSV (name,latitude,longitude,altitude[,speed_kt][,time]; altitude in ft "
                    "or as FL140), GeoJSON LineString, or a text file of an ICAO route (Item 15, e.g. N0250F140 "
                    "ALDRN DCT 5130N00010W; named points from --waypoints, time from --departure); e.g. route.csv")
    sp.add_argument("--waypoints", metavar="CSV", help="named points of an ICAO route (a text file of Item 15: "
                    "N0250F140 ALDRN DCT 5130N00010W ...): CSV name,latitude,longitude[,variation][,airway]; "
                    "e.g. --waypoints points.csv")
    what = sp.add_mutually_exclusive_group(required=True)
    what.add_argument("--soundings", nargs="+", metavar="FILE_OR_DIR", help="sounding files or directories "
                      "(CSV, netCDF, TEMP, IGRA, BUFR); e.g. --soundings sample_soundings/")
    what.add_argument("--model", metavar="FIELDS", help="a model grid on pressure levels (netCDF) instead of "
                      "soundings; e.g. --model sample_soundings/model/demo_model.nc")
    _add_screen_options(sp)
    sp.add_argument("--departures", metavar="START/END/STEP",
                    help="screen the route for each departure of a window instead of one: START and END ISO 8601 "
                    "UTC, STEP an ISO 8601 duration (PT30M, PT1H) or 30min, 1h; END is included when it falls on "
                    "the step. Prints one line a departure with the best window marked (the least icing among "
                    "departures with complete data); --out writes departures.csv, departures.json and "
                    "departures.png; e.g. --departures 2026-01-15T03:00Z/2026-01-15T09:00Z/PT30M")
    dp = _sub(sub, "demo", "screen the bundled demo route against the demo soundings",
              "Screen the bundled demo route (an invented scenario) against the bundled demo soundings; takes "
              "the options of 'icing screen'.")
    _add_screen_options(dp)
    dp.add_argument("--model", action="store_const", const="demo", help="screen against the demo model grid "
                    "instead of the demo soundings; e.g. icing demo --model")
    lp = _sub(sub, "layers", "supercooled-liquid layers of soundings",
              "List the supercooled-liquid layers of each sounding: base and top (ft, hPa, degC), thickness, "
              "largest LWC, MVD, kind of cloud and large drops.")
    lp.add_argument("soundings", nargs="+", help="sounding files or directories; "
                    "e.g. sample_soundings/S1_00101_2026011500.csv")
    _add_reader_options(lp)
    _add_physics_options(lp)
    lp.add_argument("--format", choices=["table", "csv", "json"], default="table",
                    help="table (for people, default), csv or json (for programs: SI and trade units in the "
                    "column names); e.g. --format csv")
    ip = _sub(sub, "inspect", "print soundings as read and their quality records",
              "Print each sounding as read, with units (wind in knots), and its quality record: every level "
              "the checks changed or dropped, and why.")
    ip.add_argument("soundings", nargs="+", help="sounding files or directories; "
                    "e.g. sample_soundings/S5_00105_2026011500.csv")
    _add_reader_options(ip)
    _sub(sub, "aircraft", "list the aircraft presets",
         "List the aircraft presets: speeds, climb and descent rates and the reference body used for accretion.")
    pp = _sub(sub, "plot", "draw a sounding diagram (skew-T with supercooled layers, LWC and MVD)",
              "Draw a sounding diagram: skew-T with supercooled layers, wind barbs (kt), height (ft) and flight "
              "levels beside pressure, and the LWC and MVD profile.")
    pp.add_argument("sounding", help="a sounding file (a file of several profiles gives one image each); "
                    "e.g. sample_soundings/S1_00101_2026011500.csv")
    pp.add_argument("--out", metavar="FILE", help="PNG or SVG by suffix; without it a PNG goes to stdout; "
                    "e.g. --out s1.png")
    _add_physics_options(pp)
    pp.add_argument("--top", type=float, metavar="HPA", help="top of the diagram, hPa (default: top of the data); "
                    "e.g. --top 300")
    _add_verify_parser(sub)
    _add_grid_parser(sub)
    return parser


def _source(args, soundings):
    """The atmosphere source of 'icing screen': the model grid (--model) or the soundings with their options."""
    if getattr(args, "model", None):
        from icing.flight.gridsource import GridSource

        if _has_members(args.model):  # a model ensemble: its members are the members of --spread
            from icing.flight.spread import ModelEnsemble

            return ModelEnsemble(args.model, cold_limit=args.cold_limit, airmass=args.airmass)
        return GridSource(args.model, cold_limit=args.cold_limit, airmass=args.airmass)
    from icing.flight.assess import atmosphere_source

    return atmosphere_source(soundings, max_distance_km=args.max_distance, max_age_hours=args.max_age,
                             cold_limit=args.cold_limit, airmass=args.airmass, stations=args.stations,
                             reference_time=args.reference_time, units=_units_option(args.units))


def _has_members(path) -> bool:
    """Whether a netCDF model file has an ensemble-member dimension (other formats: read as one model)."""
    from pathlib import Path

    if Path(path).suffix.lower() not in (".nc", ".nc4", ".cdf", ".netcdf"):
        return False
    import xarray as xr

    from icing.flight.spread import MEMBER_DIMS

    try:
        with xr.open_dataset(path) as ds:
            return any(d in ds.dims for d in MEMBER_DIMS)
    except (OSError, ValueError):
        return False  # the model reader reports what is wrong with the file


def _screen(args, route, soundings):
    from icing.flight.aircraft import get_aircraft
    from icing.flight.assess import assess_route

    if getattr(args, "departures", None):
        return _screen_departures(args, route, soundings)
    progress = Progress(4 if args.out else 2)
    try:
        ac = get_aircraft(args.aircraft, **_overrides(args.set))
        progress.step("reading and diagnosing soundings")
        source = _source(args, soundings)
        progress.step("screening the route")
        try:
            if getattr(args, "waypoints", None):
                from icing.flight.route import read_route

                route = read_route(route, departure=args.departure, waypoints=args.waypoints)
            result = assess_route(route, source, ac, step_s=args.step, departure=args.departure,
                                  min_altitude_ft=getattr(args, "min_altitude", 2000.0),
                                  spread=getattr(args, "spread", False), members=getattr(args, "members", 30),
                                  seed=getattr(args, "seed", 0))
        except IcingError as exc:
            raise _name_option(exc, args) from None
        fmt = "json" if args.json else args.format
        if args.out:
            from icing.report.files import write_reports

            progress.step("writing reports")
            written = write_reports(result, args.out, source=source, progress=progress)
            progress.close()
            html = [p for p in written if p.suffix == ".html"]
            print(f"wrote {len(written)} files to {args.out}" + (f"; open {html[0]} in a browser" if html else ""),
                  file=sys.stderr)
    finally:
        progress.close()
    if fmt == "json":
        from icing.report.files import assessment_json

        print(assessment_json(result))
    elif fmt == "csv":
        from icing.report.files import segments_csv

        sys.stdout.write(segments_csv(result))
    elif fmt == "geojson":
        import json

        from icing.report.files import segments_geojson

        print(json.dumps(segments_geojson(result), indent=1))
    else:
        from icing.report.text import segment_table

        print(segment_table(result))
    return 0


def _departures_option(exc):
    """A window error of the library (``departures: ...``) named as the command-line option."""
    text = str(exc)
    return IcingError("--departures " + text[len("departures: "):]) if text.startswith("departures: ") else exc


def _screen_departures(args, route, soundings):
    """'icing screen ROUTE --departures START/END/STEP': the route for each departure of a window."""
    from icing.errors import RouteFormatError
    from icing.flight.aircraft import get_aircraft
    from icing.flight.departures import parse_departures, screen_departures

    if args.departure:
        raise IcingError("give --departure (one departure) or --departures (a window), not both")
    fmt = "json" if args.json else args.format
    if fmt == "geojson":
        raise IcingError("--format geojson draws the segments of one departure; with --departures give --format "
                         "table, json or csv")
    try:
        start, end, step = parse_departures(args.departures)  # before the soundings are read
    except RouteFormatError as exc:
        raise _departures_option(exc) from None
    progress = Progress(3 if args.out else 2)
    try:
        ac = get_aircraft(args.aircraft, **_overrides(args.set))
        progress.step("reading and diagnosing soundings")
        source = _source(args, soundings)
        progress.step("screening the route for each departure")
        try:
            table = screen_departures(route, source, ac, start=start, end=end, step=step,
                                      waypoints=getattr(args, "waypoints", None), step_s=args.step,
                                      min_altitude_ft=getattr(args, "min_altitude", 2000.0))
        except IcingError as exc:
            exc = _departures_option(exc)
            raise (IcingError(str(exc).replace("reference_time", "--reference-time")) if "reference_time" in
                   str(exc) else exc) from None
        if args.out:
            from icing.report.departures import write_departure_reports

            progress.step("writing reports")
            written = write_departure_reports(table, args.out)
            progress.close()
            print(f"wrote {len(written)} files to {args.out} ({', '.join(p.name for p in written)})",
                  file=sys.stderr)
    finally:
        progress.close()
    from icing.report.departures import departures_csv, departures_json, departures_text

    if fmt == "json":
        print(departures_json(table))
    elif fmt == "csv":
        sys.stdout.write(departures_csv(table))
    else:
        print(departures_text(table))
    return 0


def _name_option(exc, args):
    """The error with the command-line option to use named (the library speaks of parameters)."""
    text = str(exc)
    if "departure" in text and "--departure" not in text:
        hint = ("give the time at the first waypoint of the route or --departure, e.g. --departure "
                "2026-01-15T05:00Z" if not getattr(args, "departure", None) else
                "--departure wants ISO 8601 UTC, e.g. --departure 2026-01-15T05:00Z")
        return IcingError(f"{text.rstrip('.')}; {hint}")
    if "reference_time" in text:
        return IcingError(text.replace("reference_time", "--reference-time"))
    return exc


# Columns of 'icing layers' for people: name, heading with unit, decimals.
LAYER_COLUMNS = [("base_height_ft", "base ft", 0), ("top_height_ft", "top ft", 0),
                 ("base_pressure_hpa", "base hPa", 0), ("top_pressure_hpa", "top hPa", 0),
                 ("base_temperature_c", "base degC", 1), ("top_temperature_c", "top degC", 1),
                 ("thickness_m", "thick m", 0), ("max_lwc_g_m3", "max LWC g/m3", 2), ("mvd_um", "MVD um", 0),
                 ("kind", "kind", None), ("large_drop", "large drops", None),
                 ("large_drop_potential", "potential", None), ("quality", "quality", None)]


def _text_table(frame, spec):
    """A fixed-width table from (column, heading, decimals) triples: numbers right-aligned, a dash for unknown."""
    from icing.report.tables import format_number, is_missing

    cols = [(c, h, d) for c, h, d in spec if c in frame]
    cells = [[("-" if is_missing(v) else format_number(v, d, grouping=True)) if d is not None else
              ("-" if is_missing(v) else str(v)) for (c, _, d), v in zip(cols, row, strict=True)]
             for row in frame[[c for c, _, _ in cols]].itertuples(index=False, name=None)]
    widths = [max([len(h)] + [len(r[i]) for r in cells]) for i, (_, h, _) in enumerate(cols)]

    def line(values, numeric):
        return "  ".join(v.rjust(w) if n else v.ljust(w) for v, w, n in zip(values, widths, numeric, strict=True))

    num = [d is not None for _, _, d in cols]
    out = [line([h for _, h, _ in cols], num), line(["-" * w for w in widths], num)]
    out += [line(r, num) for r in cells]
    return "\n".join("  " + x.rstrip() for x in out)


def _layers(args):
    from icing.io import read_profiles
    from icing.physics.layers import supercooled_layers

    frames = []
    for path in args.soundings:
        for prof in read_profiles(path, stations=args.stations, reference_time=args.reference_time,
                                  units=_units_option(args.units)):
            t = supercooled_layers(prof, cold_limit=args.cold_limit, airmass=args.airmass)
            t.insert(0, "time", prof.attrs.get("time", ""))
            t.insert(0, "station", prof.attrs.get("station", ""))
            frames.append((prof, t))
    if args.format in ("csv", "json"):
        import pandas as pd

        from icing.report.tables import frame_records, frame_to_csv

        table = pd.concat([t for _, t in frames], ignore_index=True) if frames else pd.DataFrame()
        if args.format == "csv":
            sys.stdout.write(frame_to_csv(table))
        else:
            import json

            print(json.dumps(frame_records(table), indent=1, allow_nan=False))
        return 0
    print(CAUTION + "\n")
    for prof, t in frames:
        print(f"{prof.attrs.get('station', '?')} {prof.attrs.get('time', '')}  ({prof.attrs.get('source', '')})")
        if t.empty:
            print("  no supercooled-liquid layer found\n")
            continue
        print(_text_table(t, LAYER_COLUMNS))
        print()
    return 0


# Columns of 'icing inspect': variable, heading with unit, factor from the profile's unit, decimals.
INSPECT_COLUMNS = [("pressure", "pressure hPa", 1.0, 1), ("height", "height m", 1.0, 0),
                   ("height", "height ft", 1.0 / 0.3048, 0), ("temperature", "temp degC", 1.0, 1),
                   ("dewpoint", "dewpt degC", 1.0, 1), ("relative_humidity", "RH %", 1.0, 0),
                   ("wind_direction", "wind deg", 1.0, 0), ("wind_speed", "wind kt", 3600.0 / 1852.0, 0)]


def _inspect(args):
    import pandas as pd

    from icing.io import read_profiles
    from icing.profile import format_quality

    for path in args.soundings:
        for prof in read_profiles(path, stations=args.stations, reference_time=args.reference_time,
                                  units=_units_option(args.units)):
            a = prof.attrs
            print(f"{a.get('station', '?')} {a.get('name', '')} {a.get('time', '')} lat {a.get('latitude')} "
                  f"lon {a.get('longitude')} elevation {a.get('elevation')} m  [{a.get('format')}: {a.get('source')}]")
            # The profile's units attributes are the contract (hPa, m, degC, %, m/s, deg): checked, then shown
            # in the units of the trade (feet beside metres, wind in knots).
            want = {"pressure": "hPa", "height": "m", "wind_speed": "m/s"}
            for name, unit in want.items():
                got = prof[name].attrs.get("units") if name in prof else None
                if got is not None and str(got).replace(" ", "") not in (unit, unit.replace("/", " ").replace(
                        " ", ""), "meter/second" if unit == "m/s" else unit, "m s-1" if unit == "m/s" else unit):
                    print(f"  note: {name} is in {got}, shown as is")
            frame = pd.DataFrame({f"{v}|{h}": prof[v].values.astype(float) * f
                                  for v, h, f, _ in INSPECT_COLUMNS if v in prof})
            spec = [(f"{v}|{h}", h, d) for v, h, _, d in INSPECT_COLUMNS if v in prof]
            print(_text_table(frame, spec))
            q = format_quality(prof)
            print("quality record:" + ("" if q else " nothing changed or dropped"))
            for line in q:
                print("  " + line)
            print()
    return 0


def _aircraft(args):
    from icing.flight.aircraft import PRESETS

    for name, ac in PRESETS.items():
        def speed(ias, tas):
            return f"{ias:.0f} kt indicated" if ias is not None else f"{tas:.0f} kt true"

        print(f"{name:14s} {ac.description}\n{'':14s} climb {speed(ac.ias_climb_kt, ac.tas_climb_kt)} at "
              f"{ac.climb_rate_fpm:.0f} ft/min, cruise {speed(ac.ias_cruise_kt, ac.tas_cruise_kt)}"
              + (f" (at most Mach {ac.mach_limit:.2f})" if ac.mach_limit else "")
              + f", descent {speed(ac.ias_descent_kt, ac.tas_descent_kt)} at {ac.descent_rate_fpm:.0f} ft/min; "
              f"reference body {ac.body_diameter_m * 1000:.0f} mm; "
              + ("certified for icing" if ac.icing_certified else "not certified for icing"))
    print("Below 10,000 ft every aircraft flies at most 250 kt indicated (14 CFR 91.117(a)); true airspeeds follow "
          "from the indicated ones in the standard atmosphere.")
    return 0


def _plot(args):
    from icing.report.plots import plot_sounding_main

    written = plot_sounding_main(args.sounding, args.out, cold_limit=args.cold_limit, airmass=args.airmass,
                                 top_hpa=args.top)
    if written:
        print("wrote " + ", ".join(str(p) for p in written), file=sys.stderr)
    return 0


def main(argv=None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        if args.command == "screen":
            return _screen(args, args.route, args.soundings)
        if args.command == "demo":
            d = sample_dir()
            if args.model:
                args.model = d / "model" / "demo_model.nc"
            return _screen(args, d / "demo_route.csv", sorted(d.glob("S?_*.csv")))
        if args.command == "layers":
            return _layers(args)
        if args.command == "inspect":
            return _inspect(args)
        if args.command == "aircraft":
            return _aircraft(args)
        if args.command == "plot":
            return _plot(args)
        if args.command == "grid":
            from icing.grid import grid_main

            return grid_main(args)
        if args.command == "verify":
            return _verify(args)
        parser.error("give a command: screen, demo, layers, plot, inspect, aircraft, grid or verify")
    except IcingError as exc:
        import re

        # the library names its parameters; on the command line the option is --units VARIABLE=UNIT
        text = re.sub(r"units=\{'(\w+)': '([^']+)'\}", r"--units \1=\2", str(exc))
        print(f"icing: error: {text}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("icing: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return 0
    except Exception as exc:  # anything else is our bug: say so in one line, ask for a report
        print(f"icing: internal error: {type(exc).__name__}: {exc}. This is a bug in icing; please report it "
              "with the command line and input files.", file=sys.stderr)
        return 1


if __name__ == "__main__":
    sys.exit(main())

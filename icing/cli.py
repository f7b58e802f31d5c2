"""The ``icing`` command.

Exit codes: 0 ran; 2 bad input or usage (one line on stderr naming the file, line and reason); 1 internal
error (with a request to report it).
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from icing import CAUTION, __version__
from icing.errors import IcingError

EXAMPLES = {
    "screen": "examples:\n  icing screen route.csv --soundings sample_soundings/\n"
              "  icing screen route.csv --soundings a.csv b.nc --aircraft regional-jet --json\n"
              "  icing screen route.csv --soundings dir/ --aircraft my_plane.toml --set tas_cruise_kt=210",
    "demo": "examples:\n  icing demo\n  icing demo --json",
    "layers": "examples:\n  icing layers sample_soundings/S1_00101_2026011500.csv",
    "inspect": "examples:\n  icing inspect sample_soundings/S5_00105_2026011500.csv",
    "aircraft": "examples:\n  icing aircraft",
    "grid": "examples:\n  icing grid sample_soundings/model/demo_model.nc --aircraft turboprop --out grid.nc",
    "plot": "examples:\n  icing plot sample_soundings/S1_00101_2026011500.csv --out s1.png\n"
            "  icing plot sample_soundings/S2_00102_2026011500.csv --out s2.svg --cold-limit -30\n"
            "  icing plot sample_soundings/S1_00101_2026011500.csv > s1.png",
}


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
    p.add_argument("--stations", metavar="CSV", help="station table (station,name,latitude,longitude,"
                   "elevation_m) for reports without positions, such as TEMP")
    p.add_argument("--reference-time", metavar="ISO", help="month and year of TEMP reports, which carry only day "
                   "and hour (for example 2026-01-15)")


def _add_screen_options(sp):
    sp.add_argument("--aircraft", default="turboprop", help="preset name or TOML file (default turboprop)")
    sp.add_argument("--set", action="append", metavar="KEY=VALUE", help="override an aircraft field")
    sp.add_argument("--departure", help="departure time, ISO 8601 UTC (if the route has none)")
    sp.add_argument("--step", type=float, default=60.0, help="trajectory time step, s (default 60)")
    sp.add_argument("--max-distance", type=float, default=300.0, help="farthest station used, km (default 300)")
    sp.add_argument("--max-age", type=float, default=12.0, help="oldest report used, hours (default 12)")
    sp.add_argument("--cold-limit", type=float, default=-40.0, help="coldest supercooled liquid, degC (-40)")
    sp.add_argument("--airmass", choices=["continental", "marine"], default="continental",
                    help="droplet number concentration assumed for MVD (default continental)")
    _add_reader_options(sp)
    sp.add_argument("--json", action="store_true", help="the full result as JSON (same as --format json)")
    sp.add_argument("--format", choices=["table", "json", "csv", "geojson"], default="table")
    sp.add_argument("--out", metavar="DIR", help="write the report files (CSV, JSON, GeoJSON, HTML) to DIR")


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(
        prog="icing", description="Screen a planned flight route for airframe icing from soundings. " + CAUTION,
        formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--version", action="version", version=f"icing {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    sp = sub.add_parser("screen", help="screen a route against soundings", epilog=EXAMPLES["screen"],
                        formatter_class=argparse.RawDescriptionHelpFormatter)
    sp.add_argument("route", help="route CSV (name,latitude,longitude,altitude[,speed_kt][,time]) or GeoJSON")
    what = sp.add_mutually_exclusive_group(required=True)
    what.add_argument("--soundings", nargs="+", metavar="FILE_OR_DIR", help="sounding files or directories")
    what.add_argument("--model", metavar="FIELDS", help="a model grid on pressure levels (netCDF) instead")
    _add_screen_options(sp)
    dp = sub.add_parser("demo", help="screen the bundled demo route against the demo soundings",
                        epilog=EXAMPLES["demo"], formatter_class=argparse.RawDescriptionHelpFormatter)
    _add_screen_options(dp)
    dp.add_argument("--model", action="store_const", const="demo", help="screen against the demo model grid "
                    "instead of the demo soundings")
    lp = sub.add_parser("layers", help="supercooled-liquid layers of soundings", epilog=EXAMPLES["layers"],
                        formatter_class=argparse.RawDescriptionHelpFormatter)
    lp.add_argument("soundings", nargs="+")
    _add_reader_options(lp)
    lp.add_argument("--cold-limit", type=float, default=-40.0)
    lp.add_argument("--airmass", choices=["continental", "marine"], default="continental")
    lp.add_argument("--format", choices=["table", "csv", "json"], default="table")
    ip = sub.add_parser("inspect", help="print soundings as read and their quality records",
                        epilog=EXAMPLES["inspect"], formatter_class=argparse.RawDescriptionHelpFormatter)
    ip.add_argument("soundings", nargs="+")
    _add_reader_options(ip)
    sub.add_parser("aircraft", help="list the aircraft presets", epilog=EXAMPLES["aircraft"],
                   formatter_class=argparse.RawDescriptionHelpFormatter)
    pp = sub.add_parser("plot", help="draw a sounding diagram (skew-T with supercooled layers, LWC and MVD)",
                        epilog=EXAMPLES["plot"], formatter_class=argparse.RawDescriptionHelpFormatter)
    pp.add_argument("sounding", help="a sounding file (a file of several profiles gives one image each)")
    pp.add_argument("--out", metavar="FILE", help="PNG or SVG by suffix; without it a PNG goes to stdout")
    pp.add_argument("--cold-limit", type=float, default=-40.0, help="coldest supercooled liquid, degC (-40)")
    pp.add_argument("--airmass", choices=["continental", "marine"], default="continental")
    pp.add_argument("--top", type=float, metavar="HPA", help="top of the diagram, hPa (default: top of the data)")
    from icing.grid import add_grid_parser

    add_grid_parser(sub)
    return parser


def _screen(args, route, soundings):
    from icing.flight.aircraft import get_aircraft
    from icing.flight.assess import assess_route, atmosphere_source

    progress = Progress(4 if args.out else 2)
    try:
        ac = get_aircraft(args.aircraft, **_overrides(args.set))
        progress.step("reading and diagnosing soundings")
        if getattr(args, "model", None):
            from icing.flight.gridsource import GridSource

            source = GridSource(args.model, cold_limit=args.cold_limit, airmass=args.airmass)
        else:
            source = atmosphere_source(soundings, max_distance_km=args.max_distance, max_age_hours=args.max_age,
                                       cold_limit=args.cold_limit, airmass=args.airmass, stations=args.stations,
                                       reference_time=args.reference_time)
        progress.step("screening the route")
        result = assess_route(route, source, ac, step_s=args.step, departure=args.departure)
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
        print(result.to_json())
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


def _layers(args):
    from icing.io import read_profiles
    from icing.physics.layers import supercooled_layers

    frames = []
    for path in args.soundings:
        for prof in read_profiles(path, stations=args.stations, reference_time=args.reference_time):
            t = supercooled_layers(prof, cold_limit=args.cold_limit, airmass=args.airmass)
            t.insert(0, "time", prof.attrs.get("time", ""))
            t.insert(0, "station", prof.attrs.get("station", ""))
            frames.append((prof, t))
    if args.format == "csv":
        import pandas as pd

        sys.stdout.write(pd.concat([t for _, t in frames]).to_csv(index=False))
        return 0
    if args.format == "json":
        import pandas as pd

        print(pd.concat([t for _, t in frames]).to_json(orient="records", indent=1))
        return 0
    print(CAUTION + "\n")
    for prof, t in frames:
        print(f"{prof.attrs.get('station', '?')} {prof.attrs.get('time', '')}  ({prof.attrs.get('source', '')})")
        if t.empty:
            print("  no supercooled-liquid layer found\n")
            continue
        cols = [c for c in ("base_height_ft", "top_height_ft", "base_pressure_hpa", "top_pressure_hpa",
                            "base_temperature_c", "top_temperature_c", "max_lwc_g_m3", "mvd_um", "kind",
                            "large_drop", "quality") if c in t]
        print(t[cols].to_string(index=False, float_format=lambda v: f"{v:.1f}"))
        print()
    return 0


def _inspect(args):
    from icing.io import read_profiles
    from icing.profile import format_quality

    for path in args.soundings:
        for prof in read_profiles(path, stations=args.stations, reference_time=args.reference_time):
            a = prof.attrs
            print(f"{a.get('station', '?')} {a.get('name', '')} {a.get('time', '')} lat {a.get('latitude')} "
                  f"lon {a.get('longitude')} elevation {a.get('elevation')} m  [{a.get('format')}: {a.get('source')}]")
            cols = [c for c in ("pressure", "height", "temperature", "dewpoint", "relative_humidity", "wind_speed",
                                "wind_direction") if c in prof]
            print(prof[cols].to_dataframe().to_string(float_format=lambda v: f"{v:.1f}"))
            q = format_quality(prof)
            print("quality record:" + ("" if q else " nothing changed or dropped"))
            for line in q:
                print("  " + line)
            print()
    return 0


def _aircraft(args):
    from icing.flight.aircraft import PRESETS

    for name, ac in PRESETS.items():
        print(f"{name:14s} cruise {ac.tas_cruise_kt:.0f} kt, climb {ac.tas_climb_kt:.0f} kt at "
              f"{ac.climb_rate_fpm:.0f} ft/min, descent {ac.tas_descent_kt:.0f} kt at {ac.descent_rate_fpm:.0f} "
              f"ft/min, reference body {ac.body_diameter_m * 1000:.0f} mm: {ac.description}")
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
        parser.error("give a command: screen, demo, layers, plot, inspect or aircraft")
    except IcingError as exc:
        print(f"icing: error: {exc}", file=sys.stderr)
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

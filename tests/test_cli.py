"""The ``icing`` command through subprocesses: every command and format, and bad input giving one clear line.

Each new interpreter spends seconds importing the scientific stack, so: a few runs are real ``python -m
icing.cli`` processes started in parallel (a screening with its report files and its progress bar on a
pseudo-terminal, help, usage errors),
and the rest run in one more subprocess that calls :func:`icing.cli.main` once per command line exactly as
``python -m icing.cli`` does (``sys.exit(main(argv))``), with stdout, stderr and the exit code captured per
call. Exit codes: 0 ran, 2 bad input or usage, 1 our bug.
"""

from __future__ import annotations

import base64
import csv
import io
import json
import os
import pty
import re
import subprocess
import sys
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path
from types import SimpleNamespace

import pytest

SAMPLES = Path(__file__).resolve().parents[1] / "sample_soundings"
S1 = SAMPLES / "S1_00101_2026011500.csv"
ROUTE = SAMPLES / "demo_route.csv"
COMMANDS = ("screen", "demo", "layers", "plot", "inspect", "aircraft", "grid", "verify")
HEAVY = ("numpy", "pandas", "xarray", "matplotlib", "metpy", "scipy", "pint", "numba", "pyproj")
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # ISO/IEC 15948

# One interpreter, many command lines: main(argv) with fresh binary-backed stdout/stderr per call.
DRIVER = r"""
import base64, io, json, sys, traceback
from icing.cli import main
out = {}
for name, argv in json.load(sys.stdin):
    so, se = io.TextIOWrapper(io.BytesIO(), encoding="utf-8"), io.TextIOWrapper(io.BytesIO(), encoding="utf-8")
    sys.stdout, sys.stderr = so, se
    try:
        rc = main(argv)
    except SystemExit as exc:
        rc = exc.code if isinstance(exc.code, int) else (0 if exc.code is None else 1)
    except BaseException:
        se.write(traceback.format_exc())
        rc = "uncaught"
    so.flush(); se.flush()
    out[name] = {"rc": rc, "stdout": base64.b64encode(so.buffer.getvalue()).decode(),
                 "stderr": se.buffer.getvalue().decode("utf-8", "replace")}
sys.stdout, sys.stderr = sys.__stdout__, sys.__stderr__
print(json.dumps(out))
"""


def _runs(tmp: Path) -> tuple[dict, dict]:
    (tmp / "garbage.csv").write_text("this is not\na sounding at all\n")
    (tmp / "untimed_route.csv").write_text("name,latitude,longitude,altitude\nALDRN,52.05,-34.10,100\n"
                                           "BRNCK,52.6,-31.0,FL120\n")
    (tmp / "bad_route.csv").write_text("name,latitude,longitude,altitude\nAAAAA,95.0,10.0,FL100\nBBBBB,50,11,FL100\n")
    csvs = [str(p) for p in sorted(SAMPLES.glob("S?_*.csv"))]
    one_station = [str(SAMPLES / f"S2_00102_20260115{h}.csv") for h in ("00", "12")]  # one diagram to draw
    real = {
        "screen_json_out": ["screen", str(ROUTE), "--soundings", *one_station, "--format", "json", "--out",
                            str(tmp / "report")],
        "help": ["--help"],
        "bad_option": ["screen", str(ROUTE), "--soundings", str(SAMPLES), "--bogus"],
        "no_command": [],
    }
    in_one = {
        # commands and formats
        "demo_table": ["demo"],
        "demo_geojson": ["demo", "--format", "geojson"],
        "screen_csv": ["screen", str(ROUTE), "--soundings", *csvs[:4], "--format", "csv"],
        "layers_table": ["layers", str(S1)],
        "layers_csv": ["layers", str(S1), "--format", "csv"],
        "layers_json": ["layers", str(S1), "--format", "json"],
        "inspect": ["inspect", str(S1)],
        "aircraft": ["aircraft"],
        "plot_svg": ["plot", str(S1), "--out", str(tmp / "s1.svg")],
        "plot_stdout": ["plot", str(S1)],
        **{f"help_{c}": [c, "--help"] for c in COMMANDS},
        # bad usage
        "bad_number": ["demo", "--step", "abc"],
        "bad_choice": ["demo", "--format", "xml"],
        "missing_argument": ["layers"],
        # bad paths and files
        "garbage_sounding": ["layers", str(tmp / "garbage.csv")],
        "missing_route": ["screen", str(tmp / "no_such_route.csv"), "--soundings", *csvs],
        "bad_route": ["screen", str(tmp / "bad_route.csv"), "--soundings", *csvs],
        "plot_bad_suffix": ["plot", str(S1), "--out", str(tmp / "s1.jpeg")],
        "no_departure": ["screen", str(tmp / "untimed_route.csv"), "--soundings", *csvs],
        "bad_departure": ["screen", str(tmp / "untimed_route.csv"), "--soundings", *csvs, "--departure", "soon"],
    }
    return real, in_one


@pytest.fixture(scope="module")
def results(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("cli")
    real, in_one = _runs(tmp)

    def run(argv, stdin=None):
        return subprocess.run([sys.executable, *argv], capture_output=True, timeout=300, input=stdin)

    def run_on_terminal(argv):
        """stderr on a pseudo-terminal, as a user at a shell sees it (the progress bar draws only there)."""
        master, slave = pty.openpty()
        try:
            r = subprocess.run([sys.executable, *argv], stdout=subprocess.PIPE, stderr=slave, timeout=300,
                               stdin=subprocess.DEVNULL)
        finally:
            os.close(slave)
        chunks = []
        while True:
            try:
                chunk = os.read(master, 65536)
            except OSError:  # EIO once the terminal's other side is closed and drained
                break
            if not chunk:
                break
            chunks.append(chunk)
        os.close(master)
        r.stderr = b"".join(chunks)
        return r

    with ThreadPoolExecutor(max_workers=2) as pool:
        batch = pool.submit(run, ["-c", DRIVER], json.dumps(list(in_one.items())).encode())
        futures = {k: pool.submit(run_on_terminal if k == "screen_json_out" else run, ["-m", "icing.cli", *v],
                                  *([] if k == "screen_json_out" else [b""])) for k, v in real.items()}
        out = {k: f.result() for k, f in futures.items()}
        b = batch.result()
    assert b.returncode == 0, b.stderr.decode()
    for k, v in json.loads(b.stdout).items():
        out[k] = SimpleNamespace(returncode=v["rc"], stdout=base64.b64decode(v["stdout"]),
                                 stderr=v["stderr"].encode())
    out["_tmp"] = tmp
    return out


def ok(r):
    err = r.stderr.decode(errors="replace")
    assert r.returncode == 0, err
    assert "Traceback" not in err
    return r.stdout.decode(errors="replace")


def one_error_line(r, *words):
    """Exit 2, exactly one line on stderr naming the problem, no traceback, nothing on stdout."""
    err = r.stderr.decode(errors="replace")
    assert r.returncode == 2, err
    assert "Traceback" not in err
    lines = [x for x in err.splitlines() if x.strip()]
    assert len(lines) == 1, err
    assert lines[0].startswith("icing: error:"), lines[0]
    for w in words:
        assert w in lines[0], lines[0]
    assert r.stdout == b""
    return lines[0]


def test_screen_json_and_report_files(results):
    """JSON on stdout and, with --out, the report files: CSV, JSON, GeoJSON, HTML and its images."""
    data = json.loads(ok(results["screen_json_out"]))
    assert data["caution"].startswith("ADVISORY ONLY")
    assert data["segments"] and {"segment", "intensity", "data"} <= set(data["segments"][0])
    out = results["_tmp"] / "report"
    for name in ("segments.csv", "assessment.json", "segments.geojson", "report.html", "cross_section.png",
                 "segment_chart.png"):
        assert (out / name).is_file(), name
    assert (out / "cross_section.png").read_bytes()[:8] == PNG_SIGNATURE
    err = results["screen_json_out"].stderr.decode(errors="replace")
    assert "wrote" in err and "report.html" in err
    assert "\r[" in err and "#" in err  # the progress bar, drawn on the terminal
    assert "Traceback" not in err
    assert "Sounding 00102" in (out / "report.html").read_text(encoding="utf-8")  # its diagram is embedded
    assert any(seg["data"] != "ok" for seg in data["segments"])  # one station cannot cover the whole route


def test_demo_table(results):
    """The bundled demo runs (the table format, caution first)."""
    text = ok(results["demo_table"])
    assert text.startswith("ADVISORY ONLY")
    assert "ALDRN" in text and "ESKRY" in text


def test_demo_geojson(results):
    fc = json.loads(ok(results["demo_geojson"]))
    assert fc["type"] == "FeatureCollection" and len(fc["features"]) >= 1


def test_screen_csv(results):
    text = ok(results["screen_csv"])
    first, rest = text.split("\n", 1)
    assert first.startswith("# ADVISORY ONLY")
    rows = list(csv.DictReader(io.StringIO(rest)))
    assert rows and rows[0]["start"] == "ALDRN"
    assert not re.search(r"\d[eE][+-]?\d", rest)  # no scientific notation (issue 17)


def test_layers_each_format(results):
    assert "ADVISORY ONLY" in ok(results["layers_table"])
    text = ok(results["layers_csv"])
    rows = list(csv.DictReader(io.StringIO(text)))
    assert rows and "base_height_ft" in rows[0]
    assert not re.search(r"\d[eE][+-]?\d", text)  # no scientific notation (issue 17)
    assert rows[0]["base_height_ft"].isdigit() and re.fullmatch(r"-?\d+\.\d", rows[0]["base_temperature_c"])
    recs = json.loads(ok(results["layers_json"]))
    assert len(recs) == len(rows)


def test_inspect_and_aircraft(results):
    assert "quality record" in ok(results["inspect"])
    assert "turboprop" in ok(results["aircraft"])


def test_plot_svg_and_png_on_stdout(results):
    ok(results["plot_svg"])
    assert "<svg" in (results["_tmp"] / "s1.svg").read_text()
    assert results["plot_stdout"].returncode == 0, results["plot_stdout"].stderr.decode()
    assert results["plot_stdout"].stdout[:8] == PNG_SIGNATURE  # pipes: the image goes to stdout


def test_help_has_examples(results):
    assert "screen" in ok(results["help"])
    for c in COMMANDS:
        text = ok(results[f"help_{c}"])
        assert "examples:" in text and f"icing {c}" in text, c


@pytest.mark.parametrize("name, words", [
    ("no_command", ["command"]),
    ("bad_option", ["--bogus"]),
    ("bad_number", ["--step", "abc"]),
    ("bad_choice", ["--format", "xml"]),
    ("missing_argument", ["soundings"]),
])
def test_bad_usage_one_line_exit_2(results, name, words):
    one_error_line(results[name], *words)


@pytest.mark.parametrize("name, words", [
    ("missing_route", ["no_such_route.csv"]),
    ("garbage_sounding", ["garbage.csv"]),
    ("bad_route", ["bad_route.csv"]),
    ("plot_bad_suffix", [".png or .svg"]),
    ("no_departure", ["--departure", "untimed_route.csv"]),
    ("bad_departure", ["--departure", "soon"]),
])
def test_bad_input_one_line_exit_2(results, name, words):
    one_error_line(results[name], *words)


def test_inspect_shows_units_and_knots(results):
    """Every column of 'icing inspect' names its unit; wind in knots: 1 kt = 1852 m / 3600 s exactly
    (international nautical mile), so the first level's wind in the CSV, in m/s, reads as knots rounded."""
    text = ok(results["inspect"])
    head = next(line for line in text.splitlines() if "pressure" in line)
    for unit in ("pressure hPa", "height m", "height ft", "temp degC", "dewpt degC", "RH %", "wind deg", "wind kt"):
        assert unit in head, unit
    rows = [r for r in csv.reader(line for line in S1.read_text().splitlines() if not line.startswith("#"))]
    header, first = rows[0], rows[1]
    ms = float(first[header.index("wind_speed")]) if "wind_speed" in header else None
    if ms is not None:
        cells = text.splitlines()[text.splitlines().index(head) + 2].split()
        assert float(cells[-1]) == pytest.approx(ms * 3600 / 1852, abs=0.5)


def test_help_names_every_option_with_text():
    """Every command and every option has help text (argparse's own -h aside), and every option's text or its
    command's examples show it in use."""
    from icing.cli import EXAMPLES, build_parser

    parser = build_parser()
    sub = next(a for a in parser._actions if a.__class__.__name__ == "_SubParsersAction")
    assert set(sub.choices) == set(COMMANDS)
    for name, p in sub.choices.items():
        for action in p._actions:
            if action.dest == "help":
                continue
            assert action.help, f"icing {name} {action.option_strings or action.dest} has no help text"
            shown = action.option_strings[-1] if action.option_strings else ""
            assert ("e.g." in action.help or action.nargs == 0 or (shown and shown in EXAMPLES[name])
                    or action.option_strings == []), f"icing {name} {shown}: no example"


def test_help_imports_no_heavy_module():
    """'icing --help' and every 'icing COMMAND --help' parse with the standard library only (the start-up target
    of issue 13 is met by not importing the scientific stack; no timing in tests)."""
    code = ("import sys\nfrom icing.cli import main\n"
            f"for argv in (['--help'], *[[c, '--help'] for c in {COMMANDS!r}]):\n"
            "    try:\n        main(argv)\n    except SystemExit:\n        pass\n"
            f"print('HEAVY:' + ','.join(sorted(m for m in {HEAVY!r} if m in sys.modules)))")
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert r.returncode == 0, r.stderr
    assert r.stdout.strip().splitlines()[-1] == "HEAVY:"


def test_verify_command(tmp_path, capsys):
    """`icing verify` matches pilot reports (written from the FAA UA format's rules, invented places) to the
    demo soundings and prints the 2x2 table with POD, FAR, CSI and TSS (Wilks 2011, ch. 8); a null report
    (/IC NEG) counts as observed no icing; an unreadable report with --strict is a one-line error, exit 2."""
    from icing.cli import main

    reps = tmp_path / "reps.txt"
    reps.write_text("UA /OV 5300N03200W/TM 0600/FL120/TP PROP/TA M08/IC MOD RIME\n"
                    "UA /OV 5200N03400W/TM 0530/FL250/TP JET/TA M30/IC NEG\n")
    assert main(["verify", str(reps), "--date", "2026-01-15", "--soundings", str(SAMPLES), "--format", "json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert "caution" in json.dumps(out).lower() or "ADVISORY" in json.dumps(out)
    bad = tmp_path / "bad.txt"
    bad.write_text("UA /OV 5300N03200W/TM 2599/FL120/IC MOD\n")
    assert main(["verify", str(bad), "--date", "2026-01-15", "--soundings", str(SAMPLES), "--strict"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("icing: error:") and "bad.txt" in err


def test_screen_departures_window(tmp_path, capsys):
    """`icing screen ROUTE --departures START/END/STEP`: one line a departure with the caution (table), the
    same as CSV (caution comment first) and JSON, and with --out the CSV, JSON and PNG (ISO/IEC 15948 signature);
    the step as an ISO 8601 duration or as 30min. Bad windows and --departure with --departures: one line, exit 2
    (the values here are structure only: the physics is checked in tests/test_departures.py)."""
    from icing.cli import main

    model = str(SAMPLES / "model" / "demo_model.nc")
    base = ["screen", str(ROUTE), "--model", model, "--departures"]
    assert main([*base, "2026-01-15T03:00Z/2026-01-15T05:00Z/PT1H", "--out", str(tmp_path / "w")]) == 0
    out, err = capsys.readouterr()
    assert out.startswith("ADVISORY ONLY") and out.rstrip().endswith("local regulations.")
    assert sum(line.startswith("2026-01-15 0") for line in out.splitlines()) == 3
    assert "Best window" in out and "wrote 3 files" in err
    assert (tmp_path / "w" / "departures.png").read_bytes()[:8] == PNG_SIGNATURE
    assert json.loads((tmp_path / "w" / "departures.json").read_text())["caution"].startswith("ADVISORY ONLY")
    assert main([*base, "2026-01-15T03:00Z/2026-01-15T04:00Z/30min", "--format", "csv"]) == 0
    text = capsys.readouterr().out
    assert text.startswith("# ADVISORY ONLY")
    rows = list(csv.DictReader(io.StringIO(text.split("\n", 1)[1])))
    assert [r["departure"] for r in rows] == ["2026-01-15T03:00:00Z", "2026-01-15T03:30:00Z", "2026-01-15T04:00:00Z"]
    assert main([*base, "2026-01-15T03:00Z/2026-01-15T04:00Z/PT1H", "--json"]) == 0
    assert len(json.loads(capsys.readouterr().out)["departures"]) == 2
    for argv, words in (([*base, "2026-01-15T03:00Z/2026-01-15T04:00Z/P1M"], ["--departures", "P1M"]),
                        ([*base, "2026-01-15T03:00Z/soon/PT1H"], ["--departures", "soon"]),
                        ([*base, "2026-01-15T03:00Z/2026-01-15T04:00Z/PT1H", "--departure", "2026-01-15T03:00Z"],
                         ["--departure", "--departures"]),
                        ([*base, "2026-01-15T03:00Z/2026-01-15T04:00Z/PT1H", "--format", "geojson"], ["geojson"])):
        assert main(argv) == 2
        out, err = capsys.readouterr()
        lines = [x for x in err.splitlines() if x.strip()]
        assert out == "" and len(lines) == 1 and lines[0].startswith("icing: error:"), err
        assert all(w in lines[0] for w in words), lines[0]


def test_demo_spread(capsys):
    """`icing demo --spread --members 8 --seed 3 --format json`: every segment carries the shares of members at
    light, moderate and severe or worse (ordered, within 0-1) and the 10-90 % accretion range around nothing
    it contradicts (p10 <= p90); the same seed gives the same answer; a bad member count is one line, exit 2
    (structure only: the ensemble's physics is checked in tests/test_spread.py)."""
    from icing.cli import main

    args = ["demo", "--spread", "--members", "8", "--seed", "3", "--format", "json"]
    assert main(args) == 0
    first = json.loads(capsys.readouterr().out)
    segs = first["segments"]
    assert segs and "caution" in first
    for s in segs:
        p = [s["p_light"], s["p_moderate"], s["p_severe"]]
        assert all(0.0 <= v <= 1.0 for v in p) and p[0] >= p[1] >= p[2]
        if s["accretion_p10_mm"] is not None and s["accretion_p90_mm"] is not None:
            assert s["accretion_p10_mm"] <= s["accretion_p90_mm"]
    assert main(args) == 0
    assert json.loads(capsys.readouterr().out)["segments"] == segs
    assert main(["demo", "--spread", "--members", "0"]) == 2
    assert capsys.readouterr().err.startswith("icing: error:")

"""Write the demo scenario (the CSV soundings of this folder) also as FM 35 TEMP reports and as IGRA v2.

    python sample_soundings/make_formats.py

writes ``scenario_temp.txt`` (TTAA/TTBB for every station and time, under invented bulletin headings) and
``scenario_igra.txt`` (IGRA v2 records of all soundings; IGRA itself keeps one station per file). The
encoders are the test-only ones of ``tests/encoders.py``. TEMP cannot carry everything a CSV can: a level
repeated at the same pressure is written once, a level without a positive pressure is left out, and a
dewpoint above the temperature or more than 49 K below it (depressions code table 0777 has no figure for)
is written as missing. The first two are what the profile checks do to the CSV version anyway; the third
happens only where the CSV temperature is itself removed by the checks. All data are invented.
"""

from __future__ import annotations

import csv
import shutil
import sys
from pathlib import Path

import numpy as np

HERE = Path(__file__).parent
OUT = HERE / "formats"  # a subfolder, so that a directory of the CSV soundings holds each ascent once
sys.path.insert(0, str(HERE.parent / "tests"))

import encoders  # noqa: E402

KNOT = 1852.0 / 3600.0
COLUMNS = {"pressure_hPa": "pressure", "height_m": "height", "temperature_degC": "temperature",
           "dewpoint_degC": "dewpoint", "wind_direction_deg": "wind_direction", "wind_speed_kt": "wind_speed"}


def read_csv(path):
    """The raw values of a demo CSV (metadata comments, then a header row in the units the demo uses)."""
    meta, rows = {}, []
    with open(path, newline="") as fh:
        lines = [ln for ln in fh]
    body = []
    for ln in lines:
        if ln.startswith("#"):
            key, _, value = ln[1:].partition(":")
            meta[key.strip()] = value.strip()
        elif ln.strip():
            body.append(ln)
    reader = csv.DictReader(body)
    missing = set(COLUMNS) - set(reader.fieldnames)
    if missing:
        raise SystemExit(f"{path}: columns {sorted(missing)} missing")
    for row in reader:
        rows.append([float(row[c]) if row[c].strip() else np.nan for c in COLUMNS])
    arr = np.array(rows, dtype=float)
    prof = {name: arr[:, j] for j, name in enumerate(COLUMNS.values())}
    prof["wind_speed"] = prof["wind_speed"] * KNOT
    return meta, prof


def temp_ready(prof):
    """The profile as TEMP can carry it (see the module docstring)."""
    p = prof["pressure"]
    _, first = np.unique(p, return_index=True)
    keep = np.zeros(p.size, dtype=bool)
    keep[first] = True
    keep &= np.isfinite(p) & (p > 0)
    out = {k: v[keep] for k, v in prof.items()}
    order = np.argsort(-out["pressure"], kind="stable")
    out = {k: v[order] for k, v in out.items()}
    depression = out["temperature"] - out["dewpoint"]
    out["dewpoint"] = np.where((depression < 0.0) | (depression > 49.5), np.nan, out["dewpoint"])
    return out


def main():
    files = sorted(HERE.glob("S*_*_*.csv"))
    if not files:
        raise SystemExit(f"no demo CSVs in {HERE}")
    soundings = [(path, *read_csv(path)) for path in files]
    by_time = {}
    for _, meta, prof in soundings:
        by_time.setdefault(meta["time"], []).append((meta, prof))
    temp_text = []
    for time in sorted(by_time):
        day, hour = int(time[8:10]), int(time[11:13])
        temp_text.append(f"USZZ01 ZZZZ {day:02d}{hour:02d}00")
        for meta, prof in sorted(by_time[time], key=lambda mp: mp[0]["station"]):
            temp_text.append(encoders.encode_temp(temp_ready(prof), station=meta["station"], day=day, hour=hour,
                                                  knots=True, wind_top_a=100.0).rstrip("\n"))
        temp_text.append("")
    OUT.mkdir(exist_ok=True)
    shutil.copyfile(HERE / "stations.csv", OUT / "stations.csv")  # the TEMP reader looks for it beside the file
    (OUT / "scenario_temp.txt").write_text("\n".join(temp_text))
    igra = []
    for _, meta, prof in sorted(soundings, key=lambda s: (s[1]["station"], s[1]["time"])):
        igra.append(encoders.encode_igra([(np.datetime64(meta["time"].rstrip("Z")), float(meta["latitude"]),
                                           float(meta["longitude"]), prof)],
                                         station_id="ZZM000" + meta["station"]).rstrip("\n"))
    (OUT / "scenario_igra.txt").write_text("\n".join(igra) + "\n")
    print(f"wrote {OUT / 'scenario_temp.txt'} and {OUT / 'scenario_igra.txt'} from {len(files)} CSV files")


if __name__ == "__main__":
    main()

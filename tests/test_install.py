"""Install checks (issue 16): one PROJ serves pyproj in a process that also loads eccodes, and the installed
versions satisfy the bounds in pyproject.toml.

What was measured (wheels listed with ``unzip -l``, runs in a scratch venv, December 2026):

- eccodes (the Python package) up to 2.42 is a self-contained wheel (``eccodes.libs``, no PROJ). From 2.43 it
  depends on eccodeslib, which pins one eckitlib build (eccodeslib 2.48.2.27 -> eckitlib 2.2.0.27, 2.48.3.28 ->
  2.3.0.28, 2.50.0.33 -> 2.5.0.33).
- eckitlib 2.2.0.27 bundles no PROJ; every build from 2.3.0.28 to 2.5.0.33 (the newest) bundles its own libproj
  (``eckitlib.libs/libproj-*.so.25.9.8.1``, PROJ 9.8.1), which ``libeckit_geo.so`` (needed by libeccodes) links.
- pyproj 3.7.2's wheel carries another libproj (``pyproj.libs/libproj-*.so.25.9.5.1``, PROJ 9.5.1).
- eccodes loads libeccodes and its eckit libraries through findlibs. findlibs 0.1.1, 0.1.2 and 0.1.3 open them
  with ``RTLD_GLOBAL``: eckit's libproj then sits in the process's global symbol scope, pyproj's modules bind to
  it, ``pyproj.CRS.from_epsg(4326)`` fails with "no database context specified", ``pyproj.proj_version_str``
  reports 9.8.1 instead of the 9.5.1 pyproj was built with, and the process aborts at exit ("double free or
  corruption", rc 134, or a segfault): 5 of 5 runs for each of the three versions, with eccodes 2.50.1 and
  pyproj 3.7.2. findlibs 0.1.0 (default ``RTLD_LOCAL``) and 0.1.4, 0.1.5 (``RTLD_LOCAL``, with a note in their
  source about eckit and pyproj clashing) are clean: 5 of 5 runs each. pyproject.toml therefore requires
  ``findlibs>=0.1.4``.

Sources of the checks: pyproj's installation guide (a second PROJ beside the one pyproj uses causes conflicts)
and pyproj issue 368 (two PROJ builds in one process segfault); the dlopen(3) manual for RTLD_GLOBAL/RTLD_LOCAL
(a library opened RTLD_GLOBAL serves symbol look-ups of libraries loaded later); WGS 84 as the name of EPSG:4326
is from the EPSG registry. With RTLD_LOCAL two libproj files are mapped, but each user binds to its own: the test
asserts that pyproj runs on the PROJ it was compiled with and that no PROJ symbol is in the global scope.
"""

from __future__ import annotations

import importlib.metadata as metadata
import importlib.util
import json
import os
import subprocess
import sys
import tomllib
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose
from packaging.requirements import Requirement
from packaging.version import Version

ROOT = Path(__file__).parents[1]

# Runs in a fresh interpreter: the failure is a process abort at exit, which no in-process test can observe.
SCRIPT = r"""
import ctypes, json, sys
order, nc_path, bufr_path = sys.argv[1:4]
out = {}
if order == "eccodes-first":
    import eccodes
    import pyproj
    import xarray as xr
    ds = xr.open_dataset(nc_path)  # no engine: xarray tries every installed backend
else:  # engine guessing loads the installed backends (cfgrib -> eccodes) before anything imports pyproj
    import xarray as xr
    ds = xr.open_dataset(nc_path)
    out["eccodes_loaded_by_open_dataset"] = "gribapi" in sys.modules
    import eccodes
    import pyproj
out["nc_pressure"] = ds["pressure"].values.tolist()
ds.close()

# A one-subset TEMP (sequence 3 09 052) message, encoded by eccodes itself, read back by icing's BUFR reader.
levels = {"pressure": [100000.0, 85000.0, 70000.0], "nonCoordinateGeopotentialHeight": [110.0, 1420.0, 2940.0],
          "airTemperature": [278.15, 271.15, 263.15], "dewpointTemperature": [276.15, 269.15, 258.15],
          "windDirection": [240.0, 250.0, 260.0], "windSpeed": [6.0, 10.0, 15.0]}
h = eccodes.codes_bufr_new_from_samples("BUFR4")
for key, value in (("edition", 4), ("masterTableNumber", 0), ("bufrHeaderCentre", 255), ("dataCategory", 2),
                   ("internationalDataSubCategory", 4), ("masterTablesVersionNumber", 28),
                   ("localTablesVersionNumber", 0), ("typicalYear", 2026), ("typicalMonth", 1), ("typicalDay", 15),
                   ("typicalHour", 0), ("typicalMinute", 0), ("numberOfSubsets", 1), ("observedData", 1),
                   ("compressedData", 0)):
    eccodes.codes_set(h, key, value)
eccodes.codes_set_array(h, "inputExtendedDelayedDescriptorReplicationFactor", [3])
eccodes.codes_set_array(h, "inputDelayedDescriptorReplicationFactor", [0])
eccodes.codes_set_array(h, "unexpandedDescriptors", [309052])
for key, value in (("blockNumber", 0), ("stationNumber", 999), ("year", 2026), ("month", 1), ("day", 15),
                   ("hour", 0), ("minute", 0), ("second", 0)):
    eccodes.codes_set(h, key, value)
for key, value in (("latitude", 10.0), ("longitude", 20.0), ("heightOfStationGroundAboveMeanSeaLevel", 5.0)):
    eccodes.codes_set(h, key, value)
for key, values in levels.items():
    eccodes.codes_set_array(h, key, values)
eccodes.codes_set_array(h, "extendedVerticalSoundingSignificance", [1 << 16] * 3)
eccodes.codes_set(h, "pack", 1)
with open(bufr_path, "wb") as fh:
    eccodes.codes_write(h, fh)
eccodes.codes_release(h)
from icing.io import bufr
profiles = bufr.read(bufr_path)
out["bufr_profiles"] = len(profiles)
out["bufr_pressure"] = profiles[0]["pressure"].values.tolist()
out["bufr_pressure_units"] = profiles[0]["pressure"].attrs.get("units")

out["crs_name"] = pyproj.CRS.from_epsg(4326).name
out["proj_runtime"] = pyproj.proj_version_str
out["proj_compiled"] = pyproj.__proj_compiled_version__
out["proj_in_global_scope"] = hasattr(ctypes.CDLL(None), "proj_context_create")
print("RESULT " + json.dumps(out))
"""


def _profile_file(tmp_path):
    """A profile netCDF file written by icing's own writer (icing.io.netcdf.write)."""
    from icing.io import netcdf
    from icing.profile import build_profile

    profile = build_profile(np.array([1000.0, 850.0, 700.0]), np.array([5.0, -2.0, -10.0]),
                            dewpoint=np.array([3.0, -4.0, -15.0]), station="T0001")
    path = tmp_path / "profile.nc"
    netcdf.write(profile, path)
    return path, profile["pressure"].values


@pytest.mark.skipif(importlib.util.find_spec("eccodes") is None or importlib.util.find_spec("pyproj") is None,
                    reason="needs the optional eccodes package (icing[bufr]) and pyproj")
@pytest.mark.parametrize("order", ["eccodes-first", "xarray-first"])
def test_eccodes_and_pyproj_share_a_process_cleanly(tmp_path, order):
    """eccodes imported before pyproj (directly, or by an engine-less xarray.open_dataset), a BUFR read and a
    netCDF read in one interpreter: clean exit, pyproj on its own PROJ, EPSG:4326 named "WGS 84" (EPSG registry).

    Sources: pyproj installation guide and pyproj issue 368 (one PROJ per process), dlopen(3) (RTLD_GLOBAL).
    """
    nc_path, pressure = _profile_file(tmp_path)
    env = {k: v for k, v in os.environ.items() if k not in ("PROJ_DATA", "PROJ_LIB")}
    proc = subprocess.run([sys.executable, "-c", SCRIPT, order, str(nc_path), str(tmp_path / "one.bufr")],
                          cwd=ROOT, env=env, capture_output=True, text=True, timeout=300)
    detail = f"rc={proc.returncode}\nstdout:\n{proc.stdout[-2000:]}\nstderr:\n{proc.stderr[-4000:]}"
    # A clean exit: rc 134 (SIGABRT) or -6/-11 from subprocess is the double destruction of PROJ's statics.
    assert proc.returncode == 0, detail
    for sign in ("double free", "corruption", "Segmentation fault", "no database context"):
        assert sign not in proc.stderr, detail
    lines = [line for line in proc.stdout.splitlines() if line.startswith("RESULT ")]
    assert len(lines) == 1, detail
    out = json.loads(lines[0][len("RESULT "):])

    assert out["crs_name"] == "WGS 84", detail
    # pyproj bound to another library's PROJ reports that library's version at run time (9.8.1 from eckitlib
    # instead of the 9.5.1 of pyproj 3.7.2's wheel when it failed).
    assert out["proj_runtime"] == out["proj_compiled"], detail
    # A PROJ in the global scope would serve every later-loaded library's look-ups (dlopen(3), RTLD_GLOBAL).
    assert out["proj_in_global_scope"] is False, detail

    if order == "xarray-first" and importlib.util.find_spec("cfgrib") is not None:
        # Otherwise this variant no longer exercises the path of the issue (xarray loading cfgrib's backend).
        assert out["eccodes_loaded_by_open_dataset"], "engine-less open_dataset did not load eccodes"
    assert_allclose(out["nc_pressure"], pressure, rtol=0, atol=1e-9)
    assert out["bufr_profiles"] == 1
    # BUFR Table B 0 07 004 carries pressure in Pa (WMO-No. 306 Vol. I.2); the profile holds hPa.
    assert out["bufr_pressure_units"] == "hPa"
    assert_allclose(out["bufr_pressure"], [1000.0, 850.0, 700.0], rtol=0, atol=1e-6)


def _pyproject():
    return tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))["project"]


def _requirements():
    """(requirement, required) for the core dependencies (required) and every extra (checked when installed)."""
    project = _pyproject()
    reqs = [(Requirement(r), True, "") for r in project["dependencies"]]
    for extra, items in project.get("optional-dependencies", {}).items():
        reqs += [(Requirement(r), False, extra) for r in items]
    return reqs


def test_installed_versions_satisfy_the_bounds():
    """Every installed distribution named in pyproject.toml is within its bounds there (packaging's PEP 440
    specifier logic), so a stale environment cannot pass the subprocess test above by luck."""
    problems = []
    for req, required, extra in _requirements():
        if req.marker is not None and not req.marker.evaluate({"extra": extra}):
            continue
        try:
            version = metadata.version(req.name)
        except metadata.PackageNotFoundError:
            if required:
                problems.append(f"{req.name} is not installed (required: {req})")
            continue
        if not req.specifier.contains(version, prereleases=True):
            problems.append(f"{req.name} {version} does not satisfy {req}" + (f" (extra {extra})" if extra else ""))
    assert not problems, "\n".join(problems)


def test_findlibs_bound_excludes_the_global_loaders():
    """The core findlibs bound rejects the releases that open eckit's libraries RTLD_GLOBAL (0.1.1-0.1.3, read in
    their source on PyPI and reproduced above) and admits the RTLD_LOCAL ones (0.1.4, 0.1.5)."""
    (findlibs,) = [Requirement(r) for r in _pyproject()["dependencies"] if Requirement(r).name == "findlibs"]
    for bad in ("0.1.1", "0.1.2", "0.1.3"):
        assert not findlibs.specifier.contains(Version(bad)), bad
    for good in ("0.1.4", "0.1.5"):
        assert findlibs.specifier.contains(Version(good)), good

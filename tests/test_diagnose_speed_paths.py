"""The fast paths of the diagnostics give the results of the plain ones.

These are tests of equality between two ways of computing the same thing inside the project (the physics
itself is checked against published values and MetPy in test_diagnose.py, test_layers.py, test_thermo.py
and test_microphysics.py): the kernel's relative humidities (shared logarithms) against
icing.physics.thermo, the Bourgouin energy areas against a direct numpy transcription of Bourgouin (2000)
eq. 1 over every interval, the compiled kernel against the same functions run uncompiled, and the block
threads against one thread.
"""

import os
import pickle
import subprocess
import sys
import threading
from pathlib import Path

import numpy as np
import pytest
from numpy.testing import assert_allclose, assert_array_equal

from icing.errors import ConfigError
from icing.physics import diagnose as diag
from icing.physics import precipitation, thermo
from icing.physics.diagnose import diagnose_arrays


def test_relative_humidities_equal_thermo():
    """RH over water and ice of the kernel (shared logarithms) equals 100 x icing.physics.thermo.
    relative_humidity_water / _ice (Murphy and Koop 2005) to rounding, 1e-12 relative, from -90 to +45 degC;
    NaN stays NaN."""
    rng = np.random.default_rng(6)
    t = rng.uniform(183.0, 318.0, (300, 40))
    td = t - rng.uniform(0.0, 40.0, t.shape)
    td[0, :5] = np.nan
    p = np.linspace(100000.0, 20000.0, 40)
    out = diagnose_arrays(p, t, td, thermo.standard_atmosphere_height(p)[None, :] + 0.0 * t)
    known = np.isfinite(td)
    assert_allclose(out["rh_water"][known], 100.0 * thermo.relative_humidity_water(t, td)[known], rtol=1e-12)
    assert_allclose(out["rh_ice"][known], 100.0 * thermo.relative_humidity_ice(t, td)[known], rtol=1e-12)
    assert not out["valid"][0, :5].any()


def _energy_area_direct(p, t):
    """Bourgouin (2000) eq. 1 over every interval, split where T crosses 0 degC (T linear in ln p)."""
    x = np.log(p)
    with np.errstate(invalid="ignore", divide="ignore"):
        lnth = np.log(t) - thermo.KAPPA * x
        d0, d1 = t[:, :-1] - thermo.T0, t[:, 1:] - thermo.T0
        cross = (d0 > 0) != (d1 > 0)
        frac = np.where(cross, d0 / (d0 - d1), 1.0)
        xc = x[:, :-1] + frac * (x[:, 1:] - x[:, :-1])
        lnth_c = np.where(cross, np.log(thermo.T0) - thermo.KAPPA * xc, lnth[:, 1:])
        lower = thermo.CP_D * np.abs(np.where(cross, 0.5 * d0, 0.5 * (d0 + d1)) * (lnth_c - lnth[:, :-1]))
        upper = np.where(cross, thermo.CP_D * np.abs(0.5 * d1 * (lnth[:, 1:] - lnth_c)), 0.0)
    out = np.zeros(p.shape)
    out[:, :-1] += np.where(np.isfinite(lower), lower, 0.0)
    out[:, 1:] += np.where(np.isfinite(upper), upper, 0.0)
    return out


def test_energy_area_equals_direct_form():
    """The energy areas worked out only at crossings equal the direct form over every interval, with warm
    noses, several crossings, and NaN beyond the data."""
    rng = np.random.default_rng(7)
    p = np.linspace(100000.0, 30000.0, 30)[None, :] * rng.uniform(0.97, 1.03, (500, 1))
    t = 278.0 - np.cumsum(rng.uniform(-1.5, 2.5, (500, 30)), axis=1)
    t[:5, -4:] = np.nan
    assert_allclose(precipitation.energy_area_by_level(p, t), _energy_area_direct(p, t), rtol=1e-13, atol=0.0)


def _synthetic(n_profiles, seed=1):
    """Random profiles (Pa, K, K, m) with moist layers and warm noses, surface first (invented)."""
    rng = np.random.default_rng(seed)
    p = np.linspace(100000.0, 25000.0, 40)[None, :] * rng.uniform(0.97, 1.03, (n_profiles, 1))
    z_std = thermo.standard_atmosphere_height(p)
    zz = z_std - z_std[:, :1]
    t = rng.uniform(260.0, 295.0, (n_profiles, 1)) - rng.uniform(0.0045, 0.0085, (n_profiles, 1)) * zz
    t = t + rng.uniform(-2.0, 6.0, (n_profiles, 1)) * np.exp(-((zz - 1500.0) / 500.0) ** 2)
    base = rng.uniform(500.0, 6000.0, (n_profiles, 1))
    dep = np.where((zz > base) & (zz < base + 2000.0), rng.uniform(0.0, 0.3, t.shape),
                   rng.uniform(0.0, 15.0, t.shape))
    td = t - dep
    return p, t, td, thermo.hypsometric_heights(p, t, td, anchor_height=rng.uniform(0.0, 500.0, n_profiles))


def test_compiled_kernel_equals_the_functions_run_uncompiled():
    """The compiled diagnosis equals the same functions run as plain Python (numba's NUMBA_DISABLE_JIT), in a
    subprocess, on random profiles with moist layers and warm noses: flags equal, numbers to 1e-12."""
    code = (
        "import pickle, sys\n"
        f"sys.path.insert(0, {str(Path(__file__).parent)!r})\n"
        "from test_diagnose_speed_paths import _synthetic\n"
        "from icing.physics.diagnose import diagnose_arrays\n"
        "p, t, td, z = _synthetic(40, seed=5)\n"
        "sys.stdout.buffer.write(pickle.dumps(diagnose_arrays(p, t, td, z, threads=1)))\n"
    )
    env = {**os.environ, "NUMBA_DISABLE_JIT": "1"}
    plain = pickle.loads(subprocess.run([sys.executable, "-c", code], env=env, capture_output=True,
                                        check=True).stdout)
    p, t, td, z = _synthetic(40, seed=5)
    compiled = diagnose_arrays(p, t, td, z, threads=1)
    for k, v in compiled.items():
        if v.dtype.kind == "f":
            assert_allclose(v, plain[k], rtol=1e-12, atol=1e-12, equal_nan=True, err_msg=k)
        else:
            assert_array_equal(v, plain[k], err_msg=k)
    assert compiled["supercooled"].any() and (compiled["large_drop"] > 0).any()


def test_threads_do_not_change_results(monkeypatch):
    """Blocks in two threads, in one, or from a worker thread give identical results."""
    monkeypatch.setattr(diag, "_BLOCK", 64)
    p, t, td, z = _synthetic(300, seed=2)
    one = diagnose_arrays(p, t, td, z, threads=1)
    two = diagnose_arrays(p, t, td, z, threads=2)
    box = {}
    worker = threading.Thread(target=lambda: box.update(out=diagnose_arrays(p, t, td, z)))
    worker.start()
    worker.join()
    for k in one:
        assert_array_equal(one[k], two[k], err_msg=k)
        assert_array_equal(one[k], box["out"][k], err_msg=k)


def test_thread_count_rules(monkeypatch):
    """threads= wins, then ICING_DIAGNOSE_THREADS, then 1 off the main thread; bad values raise ConfigError."""
    monkeypatch.delenv(diag.THREADS_ENV, raising=False)
    assert diag._thread_count(3) == 3
    assert diag._thread_count(None) == diag._WORKERS
    box = {}
    worker = threading.Thread(target=lambda: box.update(n=diag._thread_count(None)))
    worker.start()
    worker.join()
    assert box["n"] == 1
    monkeypatch.setenv(diag.THREADS_ENV, "2")
    assert diag._thread_count(None) == 2
    monkeypatch.setenv(diag.THREADS_ENV, "many")
    with pytest.raises(ConfigError, match="ICING_DIAGNOSE_THREADS"):
        diag._thread_count(None)
    with pytest.raises(ConfigError, match="at least 1"):
        diag._thread_count(0)

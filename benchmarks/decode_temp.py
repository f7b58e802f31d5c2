"""Decoding speed of the FM 35 TEMP reader: reports per second on 10,000 reports (one core).

Writes 2,500 invented ascents of four parts each (TTAA, TTBB, TTCC, TTDD) with the test-only encoder, then
times (1) the fast path ``decode_temp_arrays`` (text to merged arrays per ascent) and (2) the full
``decode_temp`` (arrays plus one canonical profile Dataset per ascent, with its quality checks).

Run: ``python benchmarks/decode_temp.py [n_reports]``
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).parents[1] / "tests"))

import encoders  # noqa: E402

from icing.io import temp  # noqa: E402
from icing.physics import thermo  # noqa: E402


def random_ascent(rng):
    """A plausible ascent (same climatological limits as tests/encoders.soundings)."""
    psfc = float(rng.integers(990, 1031))
    sig_b = rng.choice(np.arange(101, int(psfc)), size=rng.integers(8, 25), replace=False).astype(float)
    sig_d = rng.choice(np.arange(101, 1000), size=rng.integers(2, 8), replace=False) / 10.0
    std = [p for p in encoders.STANDARD if p < psfc]
    p = np.array(sorted({psfc, *std, *sig_b, *sig_d}, reverse=True))
    z_std = thermo.standard_atmosphere_height(p * 100.0)
    z_trop = float(thermo.standard_atmosphere_height(rng.uniform(200.0, 280.0) * 100.0))
    tsfc, lapse = rng.uniform(-5.0, 25.0), rng.uniform(6.0, 7.0) / 1000.0
    t = np.where(z_std < z_trop, tsfc - lapse * (z_std - z_std[0]), tsfc - lapse * (z_trop - z_std[0]))
    t = t + rng.normal(0.0, 0.7, p.size)
    td = t - rng.uniform(0.0, 20.0, p.size)
    z = thermo.hypsometric_heights(p * 100.0, t + thermo.T0, td + thermo.T0, anchor_height=50.0)
    return {"pressure": p, "height": np.where(np.isin(p, list(encoders.STANDARD)), z, np.nan),
            "temperature": t, "dewpoint": td, "wind_direction": rng.uniform(0, 360, p.size),
            "wind_speed": rng.uniform(0, 60, p.size)}


def main(n_reports=10_000):
    rng = np.random.default_rng(20260115)
    texts = []
    for k in range(n_reports // 4):
        texts.append(encoders.encode_temp(random_ascent(rng), station=f"{k % 100000:05d}",
                                          day=1 + k // 100000 % 28, hour=k % 24))
    text = "".join(texts)
    n = text.count("=")
    rates = {}
    for label in ("first pass (cold group cache)", "second pass"):
        w0, c0 = time.perf_counter(), time.process_time()
        ascents, _ = temp.decode_temp_arrays(text)
        rates[label] = (n / (time.perf_counter() - w0), n / (time.process_time() - c0))
    w0, c0 = time.perf_counter(), time.process_time()
    profiles = temp.decode_temp(text)
    full = (n / (time.perf_counter() - w0), n / (time.process_time() - c0))
    assert len(ascents) == len(profiles) == n_reports // 4
    print(f"{n} reports ({len(profiles)} ascents, {len(text) / 1e6:.1f} MB); reports/s by wall clock and by "
          "CPU time of this process")
    for label, (wall, cpu) in rates.items():
        print(f"decode to arrays, {label}: {wall:,.0f} (wall) {cpu:,.0f} (CPU)")
    print(f"decode to profile Datasets (build_profile per ascent): {full[0]:,.0f} (wall) {full[1]:,.0f} (CPU)")
    return rates, full


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 10_000)

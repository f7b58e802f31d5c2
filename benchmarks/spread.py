"""Cost of the spread ensemble ("how sure", issue 18): a 30-member run as a ratio to one deterministic run.

Target: a 30-member ensemble costs less than 5x one run. Both are measured here, in this one process, on the same
route and the same already-built atmosphere source (reading and the first diagnosis of the soundings are left
out of both, which makes the ratio the harder one), as the median of several repeats after a warm-up (numba's
kernels load once). Run from the repository top: python benchmarks/spread.py

Where the time goes (cProfile on the demo route, 10 soundings, 30 members): about half in sampling, since each
member samples its own diagnosed soundings at the planned altitude (one ``SoundingSource.sample`` per member,
a Python loop over the soundings in use; the deterministic run samples eight times: winds, the plan and six
alternative altitudes); about a quarter in re-diagnosing the soundings (one call of the compiled kernel per
member, and a second one for members whose LWC factor is above 1, whose LWC is held to the adiabatic value: the
kernel takes one set of cloud thresholds and one droplet number per call, so members cannot share a call);
about a seventh in preparing each member's columns for sampling; the rest in re-weighting the stations and
scoring all members' samples in one vectorised accretion call. Measured ratios were 2.8-3.9x on a shared
2-core machine; after the large-drop fields joined the sampled ones the demo route rose to 6.6x, brought back to
3.7x (20 routes: 2.1x) by preparing the sources' columns for all profiles at once (the NaN handling had been
repeated for every profile and every sampling).
"""

from __future__ import annotations

import statistics
import time
from pathlib import Path

import numpy as np

from icing.flight.assess import assess_route, assess_routes, atmosphere_source
from icing.flight.route import Route

ROOT = Path(__file__).resolve().parents[1]
REPEATS = 7


def timed(func):
    func()  # warm-up
    times = []
    for _ in range(REPEATS):
        t0 = time.perf_counter()
        func()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def routes(n=20, seed=1):
    """Routes across the demo scenario's stations (invented Varrow Isles), FL080-FL140."""
    rng = np.random.default_rng(seed)
    out = []
    for _ in range(n):
        la, lo = 52.0 + rng.uniform(0, 2), -34.0 + rng.uniform(0, 4)
        fl = f"FL{int(rng.integers(80, 140)):03d}"
        out.append(Route.from_points([("A", la, lo, fl), ("B", la + 1.0, lo + 4.0, fl), ("C", la + 2.0, lo + 9.0, fl)],
                                     departure="2026-01-15T05:00Z"))
    return out


def main():
    source = atmosphere_source(sorted((ROOT / "sample_soundings").glob("S?_*.csv")))
    demo = ROOT / "sample_soundings" / "demo_route.csv"
    cases = [("demo route", lambda s: assess_route(demo, source, spread=s, members=30)),
             ("20 routes at once", lambda s: assess_routes(routes(), source, spread=s, members=30))]
    print(f"soundings: {source.profiles.sizes['profile']}, members: 30, median of {REPEATS} after a warm-up")
    for name, run in cases:
        one = timed(lambda run=run: run(False))
        ens = timed(lambda run=run: run(True))
        ratio = ens / one
        print(f"{name:18s} one run {one * 1000:7.1f} ms   30 members {ens * 1000:7.1f} ms   ratio {ratio:4.2f}x  "
              f"(target < 5x: {'met' if ratio < 5 else 'NOT met'})")


if __name__ == "__main__":
    main()

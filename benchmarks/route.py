"""Screen 1,000 routes of about 60 one-minute samples against 20 soundings; print samples per second.

Target (issue 5): the whole batch in under 5 s on a 2-core machine. Run: python benchmarks/route.py
"""

from __future__ import annotations

import time

import numpy as np

from icing.flight.assess import assess_routes
from icing.flight.route import Route
from icing.flight.sources import SoundingSource
from icing.profile import build_profile

rng = np.random.default_rng(1)
P = np.array([1000, 975, 950, 925, 900, 875, 850, 825, 800, 775, 750, 725, 700, 650, 600, 550, 500, 450, 400, 350,
              300, 250, 200], dtype=float)


def soundings(n=20):
    out = []
    for i in range(n):
        lat, lon = 50 + rng.uniform(0, 6), -36 + rng.uniform(0, 14)
        t = 6 - 0.0065 * 1000 * np.log(1000 / P) * 8.0 + rng.normal(0, 1, P.size)
        dd = np.where((P < 950) & (P > 600), rng.uniform(0, 1.0, P.size), rng.uniform(5, 20, P.size))
        out.append(build_profile(P, np.round(t, 1), dewpoint=np.round(t - dd, 1), station=f"{i:05d}", latitude=lat,
                                 longitude=lon, elevation=0.0, time=f"2026-01-15T{0 if i % 2 else 12:02d}:00Z",
                                 wind_speed=np.full(P.size, 15.0), wind_direction=np.full(P.size, 250.0)))
    return out


def routes(n=1000):
    out = []
    for _ in range(n):
        la, lo = 51 + rng.uniform(0, 4), -35 + rng.uniform(0, 10)
        la2, lo2 = la + rng.uniform(-1, 1), lo + rng.uniform(7.5, 8.5)
        fl = f"FL{int(rng.integers(60, 160)):03d}"
        out.append(Route.from_points([("A", la, lo, fl), ("B", (la + la2) / 2, (lo + lo2) / 2, fl),
                                      ("C", la2, lo2, fl)], departure="2026-01-15T05:00Z"))
    return out


def main():
    src = SoundingSource(soundings())
    rts = routes()
    t0 = time.perf_counter()
    res = assess_routes(rts, src, "turboprop")
    dt = time.perf_counter() - t0
    n = sum(len(r.samples) for r in res)
    print(f"routes: {len(rts)}, samples: {n} ({n / len(rts):.0f} per route), soundings: 20")
    print(f"time: {dt:.2f} s  samples per second: {n / dt:,.0f}  target: whole batch < 5 s -> "
          f"{'met' if dt < 5 else 'NOT met'} (ratio target/actual {5 / dt:.2f})")


if __name__ == "__main__":
    main()

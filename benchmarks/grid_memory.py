"""Peak memory of the grid chain on a lazily generated field much larger than the memory budget.

The synthetic field (our own invented fields, see ``benchmarks/grid.py``) is generated chunk by chunk inside
the dask graph, so no copy of it ever exists; the chain (diagnostics + accretion potential + summaries) runs
over every column and the 2-D summaries are streamed to a netCDF file. The resident set size of this process
(and of any worker processes) is sampled every 50 ms; the run passes when the peak stays under the budget.

Run: ``python benchmarks/grid_memory.py --gb 20`` (virtual size of the float64 inputs in GB; the default 3 GB
finishes in a few minutes on two cores).

On the threaded scheduler the script also prints how many dask graphs were computed, their tasks, and the
highest RSS when the scheduler had built its state for one (the graph materialised, ordered and its
dependency sets made): the part of the peak that grows with the number of tasks in one graph.
Measured on the 2-CPU development machine with one graph for the whole grid (8 summaries, 20 tasks per
chunk; numpy engine; RSS before the write 148-160 MB): 1 / 3 / 6 GB, 6 370 / 19 210 / 38 530 tasks, RSS at the graph's
start 206 / 255 / 339 MB, while computing 272-277 / 311-321 / 392-397 MB (flat from the first to the last
quarter of the tasks: nothing piles up while writing), peak 285 / 338 / 426 MB; a 20 GB run (about 128 000 tasks)
peaked at 844 MB. So about 4.4 kB of RSS per task (tracemalloc at 3 GB: 29 MB in dask's task objects, 20 MB in
the local scheduler's state, 17 MB in the blockwise/gufunc graph layers) on top of a constant ~60 MB working
set of the chunks in flight; MALLOC_ARENA_MAX=2 changed the 3 GB peak by 11 MB (327 MB), not its growth.
The numba engine adds a constant ~170 MB (116 MB of it loading the compiled kernels): 3 GB peak 425 MB.
With write_grid writing one graph per 256 chunks (numba engine, RSS before the write 154-195 MB): 3 GB peak
385 MB (4 graphs), 20 GB peak 493 MB (26 graphs of at most 5,049 tasks, 434 s; 844 MB with one graph).
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import threading
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))


def rss_bytes(proc):
    total = proc.memory_info().rss
    for child in proc.children(recursive=True):
        try:
            total += child.memory_info().rss
        except Exception:  # a child that just exited
            pass
    return total


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--gb", type=float, default=3.0, help="virtual size of the inputs, GB (default 3)")
    ap.add_argument("--budget-mb", type=float, default=600.0, help="peak RSS budget, MB (default 600)")
    ap.add_argument("--points", type=int, default=200_000, help="level-points per chunk (default 200000)")
    ap.add_argument("--workers", type=int, default=0, help="LocalCluster processes (default 0: threads)")
    args = ap.parse_args(argv)

    import psutil
    from dask.callbacks import Callback
    from grid import AIRCRAFT, LEVELS, region, synthetic_model

    from icing.grid import SUMMARY_OUTPUTS, diagnose_grid, scheduler, write_grid
    from icing.physics.diagnose import PROFILE_OUTPUTS

    lat, lon = region()
    per_time = 3 * lat.size * lon.size * LEVELS.size * 8  # temperature, dewpoint, height in float64
    n_times = max(int(round(args.gb * 1e9 / per_time)), 1)
    model = synthetic_model(n_times, lat, lon, points=args.points, lazy=True)
    virtual = sum(model[k].nbytes for k in ("temperature", "dewpoint", "height"))
    nlp = n_times * lat.size * lon.size * LEVELS.size
    ds = diagnose_grid(model, AIRCRAFT, outputs=list(PROFILE_OUTPUTS) + list(SUMMARY_OUTPUTS))  # as --summary-only
    summary = [n for n in ds.data_vars if "level" not in ds[n].dims]
    n_chunks = ds["max_potential_intensity"].data.npartitions
    proc = psutil.Process(os.getpid())
    base = rss_bytes(proc)
    peak = [base]
    stop = threading.Event()

    def sample():
        while not stop.is_set():
            peak[0] = max(peak[0], rss_bytes(proc))
            time.sleep(0.05)

    print(f"virtual input {virtual / 1e9:.1f} GB ({n_times} times x {lat.size} x {lon.size} x {LEVELS.size} = "
          f"{nlp / 1e6:.0f} M level-points, {n_chunks} chunks); budget {args.budget_mb:.0f} MB; "
          f"RSS before {base / 1e6:.0f} MB")
    graphs = []  # (tasks, RSS) when the threaded scheduler has built its state for a graph

    class GraphStart(Callback):
        def _start_state(self, dsk, state):
            graphs.append((len(dsk), rss_bytes(proc)))

    watcher = threading.Thread(target=sample, daemon=True)
    watcher.start()
    t0 = time.perf_counter()
    with tempfile.TemporaryDirectory() as tmp, scheduler(args.workers or None) as client, GraphStart():
        out = write_grid(ds, Path(tmp) / "summaries.nc", client=client, progress=True, variables=summary)
        size = out.stat().st_size
    dt = time.perf_counter() - t0
    stop.set()
    watcher.join()
    if graphs:  # the threaded scheduler (a distributed scheduler keeps its graph in its own process)
        total = sum(n for n, _ in graphs)
        at_start = max(r for _, r in graphs)
        print(f"{len(graphs)} dask graph(s) of {total} tasks ({total / n_chunks:.1f} per chunk), "
              f"the largest {max(n for n, _ in graphs)}; highest RSS when the scheduler started one "
              f"{at_start / 1e6:.0f} MB ({(at_start - base) / 1e6:.0f} MB above the RSS before)")
    print(f"done in {dt:.0f} s ({nlp / dt / 1e6:.2f} M level-points/s); summaries file {size / 1e6:.0f} MB")
    print(f"peak RSS {peak[0] / 1e6:.0f} MB = {peak[0] / virtual * 100:.1f} % of the virtual input; the input is "
          f"{virtual / (args.budget_mb * 1e6):.1f} x the budget; within budget: {peak[0] <= args.budget_mb * 1e6}")
    return 0 if peak[0] <= args.budget_mb * 1e6 else 1


if __name__ == "__main__":
    sys.exit(main())

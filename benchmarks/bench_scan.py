"""Benchmark: a power x waist map of the demo setup through each executor.

In one run, the same N x N map (pump power 1-100 mW x pump waist 0.3-6 mm,
log spaced) is computed

1. by one-by-one ``pumpsim.simulate`` calls in a plain loop (the baseline),
2. by ``pumpsim scan``'s machinery with the serial executor,
3. ... with a local process pool,
4. ... with a Dask local cluster on loopback (worker processes on 127.0.0.1),

and the script prints each wall time, its speed-up against the baseline, and
the largest difference between any two maps (zero: results do not depend on
the executor). The Dask cluster's start-up is timed separately.

    python benchmarks/bench_scan.py                      # 30 x 30, the demo as it is
    python benchmarks/bench_scan.py --n 6 --tolerance 1e-2   # a quick look

A 30 x 30 map at the demo's full tolerance is 900 full simulations; on a
small machine use ``--n`` and ``--tolerance`` and say so with the figures.
"""

import argparse
import os
import tempfile
import time
from pathlib import Path

import numpy as np

import pumpsim
from pumpsim.demo import demo_setup_path
from pumpsim.executors import DaskExecutor, ProcessExecutor, SerialExecutor
from pumpsim.scan import parse_axes, point_setups, scan


def baseline(setup, axes):
    shape = tuple(len(a.values) for a in axes)
    return np.array([pumpsim.simulate(s).transfer_fraction
                     for s in point_setups(setup, axes)]).reshape(shape)


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--n", type=int, default=30, help="points per axis (default 30)")
    ap.add_argument("--tolerance", type=float, help="numerics.tolerance (default: the demo's)")
    ap.add_argument("--workers", type=int, default=os.cpu_count(),
                    help="processes for the pool and the Dask cluster (default: all cores)")
    args = ap.parse_args()

    setup = pumpsim.load_setup(demo_setup_path())
    if args.tolerance is not None:
        setup = setup.with_value("numerics.tolerance", args.tolerance)
    axes = parse_axes([f"beam.pump.power_mW=1:100:{args.n}:log",
                       f"beam.pump.waist_mm=0.3:6:{args.n}:log"], setup)
    points = args.n**2
    print(f"demo setup, {args.n} x {args.n} map of pump power x pump waist = {points} "
          f"simulations, tolerance {setup.numerics.tolerance:g}, {os.cpu_count()} cores, "
          f"{args.workers} workers")

    maps, times = {}, {}
    t = time.perf_counter()
    maps["one-by-one pumpsim.simulate"] = baseline(setup, axes)
    times["one-by-one pumpsim.simulate"] = time.perf_counter() - t
    with tempfile.TemporaryDirectory() as tmp:
        runs = [("serial executor", SerialExecutor),
                (f"process pool, {args.workers} workers", lambda: ProcessExecutor(args.workers))]
        for name, make in runs:
            t = time.perf_counter()
            with make() as ex:
                maps[name] = scan(setup, axes, Path(tmp) / "map.h5", ex).fraction
            times[name] = time.perf_counter() - t
        from distributed import LocalCluster

        t = time.perf_counter()
        with LocalCluster(n_workers=args.workers, threads_per_worker=1, processes=True,
                          host="127.0.0.1", dashboard_address=None) as cluster:
            startup = time.perf_counter() - t
            name = f"dask local cluster, {args.workers} worker processes"
            t = time.perf_counter()
            with DaskExecutor(cluster.scheduler_address) as ex:
                maps[name] = scan(setup, axes, Path(tmp) / "map.h5", ex).fraction
            times[name] = time.perf_counter() - t

    base = times["one-by-one pumpsim.simulate"]
    width = max(map(len, times))
    for name, sec in times.items():
        print(f"  {name:<{width}}  {sec:9.1f} s  {sec / points:7.2f} s/point  "
              f"speed-up {base / sec:5.2f}x")
    print(f"  (Dask cluster start-up, not included above: {startup:.1f} s)")
    ref = next(iter(maps.values()))
    diff = max(float(np.max(np.abs(m - ref))) for m in maps.values())
    print(f"largest difference between any two maps: {diff:.3g}"
          + ("  (identical)" if diff == 0 else ""))


if __name__ == "__main__":
    main()

"""Benchmark: the cost estimate made before a run against the run itself.

Run from the project folder::

    python benchmarks/bench_cost.py

For a few variants of the demo (more passes, a narrower pump, more beams) it prints
what :func:`pumpsim.cost.estimate` says before anything is computed (memory, steps,
seconds at least and at most) and, for the runs short enough to finish here, the
steps, nodes and wall seconds the run took. An estimate is useful when "at least"
stays below the measured time; the ratio measured / at-least says how loose it is.
The probe is forced on (``LONG_SECONDS = 0``) so that every row has a time estimate.
"""

import time

import pumpsim
import pumpsim.cost
from pumpsim.cost import estimate
from pumpsim.model import RateModel
from pumpsim.simulate import make_propagator

VARIANTS = [  # (label, --set overrides, run it here?)
    ("demo", {}, True),
    ("pump 10 passes", {"beam.pump.passes": 10}, True),
    ("pump 30 passes", {"beam.pump.passes": 30}, True),
    ("pump waist 0.1 mm", {"beam.pump.waist_mm": 0.1}, True),
    ("pump waist 1e-4 mm", {"beam.pump.waist_mm": 1e-4}, False),
]


def main():
    pumpsim.cost.LONG_SECONDS = 0.0  # probe every variant
    base = pumpsim.load_setup("demo_data/demo_setup.toml")
    print(f"{'variant':<20} {'memory MB':>10} {'steps':>8} {'at least s':>11} {'at most s':>10}"
          f" {'run steps':>9} {'run nodes':>9} {'run s':>8} {'run/least':>9}")
    for label, overrides, run in VARIANTS:
        setup = base
        for k, v in overrides.items():
            setup = setup.with_value(k, v)
        cost = estimate(RateModel(setup), make_propagator(setup.numerics))
        low, high = cost.seconds
        row = (f"{label:<20} {cost.memory_bytes / 1e6:10.1f} {cost.steps:8d} {low:11.3g} "
               f"{high:10.3g}")
        if run:
            t0 = time.perf_counter()
            result = pumpsim.simulate(setup)
            took = time.perf_counter() - t0
            n = result.numerics
            row += f" {n.steps:9d} {n.nodes_evaluated:9d} {took:8.2f} {took / low:9.2f}"
        print(row, flush=True)


if __name__ == "__main__":
    main()

"""Cost of sublevel mode against the number of sublevels, in one run.

An invented alkali-like species (ground J=1/2, a D1-like J'=1/2 and a
D2-like J'=3/2 upper level) with nuclear spin I has 8 (2I+1) sublevels;
I = 0, 1, 5/2, 11/2 and 23/2 give 8, 24, 48, 96 and 192. A sigma+ pump on
the D2-like cycling component and a sigma+ repump on the D1-like line cross
atoms of spread speeds and angles in a 0.3 G field.

For each size:

- *rosenbrock, full*: the sparse Rosenbrock propagator (the sublevel-mode
  default) integrates ``--nodes`` nodes over the whole grid the ensemble
  would use at 16 steps per waist;
- *same slice*: both it and the dense exponential propagator (the level-mode
  default, the baseline) integrate the first ``--baseline-nodes`` nodes over
  ``--slice`` steps of that grid from where the pump reaches 1/e^2 of its
  peak, where the pumping transient makes the steps hardest; printed are the
  ratio of their times and each one's largest population error against a
  reference on a 16 times finer grid.

Times are per node and per grid step. Growth is the factor from the previous
size; the exponent ``p`` fits cost ~ N^p from 24 to 192 sublevels.

With ``--simulate`` it also times whole ``pumpsim.simulate`` runs (effusive
source at 450 K, 3 mrad divergence, tolerance 1e-3, sublevel-mode defaults)
for each size; that part takes about a quarter of an hour.

    python benchmarks/bench_sublevels.py [--nodes 64] [--baseline-nodes 64] [--slice 8] [--simulate]

BLAS runs single-threaded unless OPENBLAS_NUM_THREADS is set: on a shared
machine its threads oversubscribe the cores, which slowed 200 x 200 products
tenfold when this was written.
"""

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import argparse  # noqa: E402
import math  # noqa: E402
import time  # noqa: E402

import numpy as np  # noqa: E402

from pumpsim.scheme_file import scheme_from_document  # noqa: E402
from pumpsim.setup_file import setup_from_document  # noqa: E402
from pumpsim.solvers import ExponentialPropagator, RosenbrockPropagator  # noqa: E402
from pumpsim.solvers.rosenbrock import _Structure  # noqa: E402
from pumpsim.sparse_model import SparseRateModel  # noqa: E402

SPINS = (0.0, 1.0, 2.5, 5.5, 11.5)
PER_WAIST = 16


def species(I):
    """Scheme of the invented benchmark species with nuclear spin ``I``."""
    def hfs(A, B=0.0):
        if not I:
            return {}
        return {"hfs_A_MHz": A, **({"hfs_B_MHz": B} if B and I >= 1 else {})}

    levels = [dict(id="g", energy_cm=0.0, J=0.5, g_J=2.0, **hfs(900.0)),
              dict(id="p1", energy_cm=16000.0, J=0.5, g_J=0.667, lifetime_s=3.0e-8, **hfs(120.0)),
              dict(id="p3", energy_cm=16300.0, J=1.5, g_J=1.334, lifetime_s=2.8e-8,
                   **hfs(25.0, 4.0))]
    doc = {"species": {"name": "benchmark (invented)", "mass_u": 100.0}, "level": levels,
           "decay": [dict(upper="p1", lower="g", branching=1.0),
                     dict(upper="p3", lower="g", branching=1.0)]}
    if I:
        doc["species"]["nuclear_spin"] = I
    return scheme_from_document(doc, "benchmark")


def setup(I):
    top = I + 0.5
    beams = [dict(name="pump", transition=["g", "p3"], power_mW=2.0, waist_mm=1.0,
                  polarization="sigma+"),
             dict(name="repump", transition=["g", "p1"], power_mW=2.0, waist_mm=1.0,
                  position_mm=3.0, polarization="sigma+")]
    if I:
        beams[0]["reference_F"] = [top, top + 1]
        beams[1]["reference_F"] = [top - 1, top]
    doc = {"scheme": "benchmark.toml", "target": "g", "mode": "sublevel",
           "field": {"B_gauss": 0.3},
           "source": {"kind": "effusive", "temperature_K": 450.0,
                      "divergence_rms_mrad": 3.0, "initial": {"g": 1.0}},
           "beam": beams}
    return setup_from_document(doc, "benchmark", scheme=species(I))


def timed(propagator, problem, z):
    t = time.perf_counter()
    traj = propagator.propagate(problem, z)
    return time.perf_counter() - t, traj


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--nodes", type=int, default=64)
    ap.add_argument("--baseline-nodes", type=int, default=64)
    ap.add_argument("--slice", type=int, default=8)
    ap.add_argument("--simulate", action="store_true", help="also time whole simulations")
    args = ap.parse_args()
    rng = np.random.default_rng(1)
    v, a = rng.uniform(150, 500, args.nodes), rng.normal(0, 3e-3, args.nodes)
    y0 = np.zeros(args.nodes)
    nb = args.baseline_nodes
    print(f"full: {args.nodes} nodes, {PER_WAIST} steps per waist; same slice: {nb} nodes, "
          f"{args.slice} steps through the pump beam; times in microseconds per node-step\n")
    print(f"{'sublevels':>9} {'entries':>7} {'dense block':>11} | {'rosenbrock full':>15} "
          f"{'growth':>6} | {'rosenbrock':>10} {'exponential':>11} {'growth':>6} {'ratio':>7} "
          f"{'err ros':>8} {'err exp':>8}")
    rows = []
    for I in SPINS:
        model = SparseRateModel(setup(I))
        problem = model.problem(v, a, y0)
        structure = _Structure(problem)
        z = model.grid(PER_WAIST)
        t_full, traj = timed(RosenbrockPropagator(), problem, z)
        full = 1e6 * t_full / (args.nodes * traj.steps)
        centre = np.searchsorted(z, -1e-3)
        part = z[centre:centre + args.slice + 1]
        sub = problem.subset(slice(0, nb))
        t_r, tr = timed(RosenbrockPropagator(), sub, part)
        t_e, te = timed(ExponentialPropagator(), sub.dense(), part)
        r_slice = 1e6 * t_r / (nb * tr.steps)
        e_slice = 1e6 * t_e / (nb * (len(part) - 1))
        S = model.n_states
        fine = np.unique(np.concatenate([np.linspace(p, q, 17) for p, q in zip(part, part[1:])]))
        ref = RosenbrockPropagator().propagate(sub, fine).final[:, :S]
        err_r, err_e = (np.abs(t.final[:, :S] - ref).max() for t in (tr, te))
        block = max((b["k"] for b in structure.blocks), default=0)
        g_full = f"{full / rows[-1][1]:6.2f}" if rows else ""
        g_exp = f"{e_slice / rows[-1][3]:6.2f}" if rows else ""
        print(f"{S - 1:9d} {len(structure.entries):7d} {block:11d} | {full:15.1f} {g_full:>6} | "
              f"{r_slice:10.1f} {e_slice:11.1f} {g_exp:>6} {e_slice / r_slice:7.1f} "
              f"{err_r:8.1e} {err_e:8.1e}",
              flush=True)
        rows.append((S - 1, full, r_slice, e_slice))
    (n0, f0, _, e0), (n1, f1, _, e1) = rows[1], rows[-1]
    p_r = math.log(f1 / f0) / math.log(n1 / n0)
    p_e = math.log(e1 / e0) / math.log(n1 / n0)
    print(f"\ncost ~ N^p from {n0} to {n1} sublevels: rosenbrock p = {p_r:.2f}, "
          f"exponential p = {p_e:.2f}")
    if args.simulate:
        whole_runs()


def whole_runs():
    import pumpsim

    print(f"\nwhole simulations, tolerance 1e-3:\n{'sublevels':>9} {'seconds':>8} {'growth':>6} "
          f"{'nodes':>6} {'evaluated':>9} {'steps':>6} {'error est.':>10}")
    prev = None
    for I in SPINS:
        s = setup(I).with_value("numerics.tolerance", 1e-3)
        t = time.perf_counter()
        r = pumpsim.simulate(s)
        sec = time.perf_counter() - t
        n = r.numerics
        growth = f"{sec / prev:6.2f}" if prev else ""
        print(f"{len(r.sublevels.labels):9d} {sec:8.1f} {growth:>6} {n.nodes:6d} "
              f"{n.nodes_evaluated:9d} {n.steps:6d} {n.error_estimate['total']:10.1e}", flush=True)
        prev = sec


if __name__ == "__main__":
    main()

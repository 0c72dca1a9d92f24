"""Peak memory of a one-million-node ensemble against a 10,000-node one, in one run.

The ensemble integrator propagates nodes in chunks of ``pumpsim.ensemble.CHUNK``
so that its working set (the per-node generators, shape (n, m, m) per beam
term) does not grow with the ensemble. This script measures that:

1. *streamed*: nodes are drawn and propagated block by block through
   ``EnsembleIntegrator.evaluate`` and only running means are kept, so the
   peak must not depend on the number of nodes;
2. *kept*: all nodes go to ``EnsembleIntegrator.evaluate`` at once, as in a
   real run, which keeps every node's inputs and results (what
   ``Result.nodes`` and the HDF5 file carry); the peak grows by those
   arrays only, about 90 bytes per node here, not by the working set.

Figures: the tracemalloc peak of each phase (numpy reports its buffers to
tracemalloc) and the process's peak RSS after each phase (a high-water mark;
phases run from small to large). The scheme is invented and small (three
levels, one beam), the grid coarse (``--per-waist``): memory, not accuracy,
is measured here.

Run::

    python benchmarks/bench_memory.py                 # 1,000,000 vs 10,000 nodes
    python benchmarks/bench_memory.py --nodes 200000  # quicker
"""

import argparse
import math
import resource
import tempfile
import time
import tracemalloc
from pathlib import Path

import numpy as np

import pumpsim
from pumpsim import constants as K
from pumpsim.ensemble import CHUNK, EnsembleIntegrator
from pumpsim.model import RateModel
from pumpsim.solvers import ExponentialPropagator
from pumpsim.tomltext import dumps

BLOCK = CHUNK  # nodes drawn at a time in the streamed phase: one chunk
TEMPERATURE_K, MASS_U = 1000.0, 40.0

SCHEME = {  # invented: ground g, metastable m, excited e (500 nm line)
    "species": {"name": "Benchium (invented)", "mass_u": MASS_U},
    "level": [{"id": "g", "energy_cm": 0.0, "J": 0},
              {"id": "m", "energy_cm": 1000.0, "J": 1},
              {"id": "e", "energy_cm": 20000.0, "J": 1, "lifetime_s": 2e-8}],
    "decay": [{"upper": "e", "lower": "g", "branching": 0.6},
              {"upper": "e", "lower": "m", "branching": 0.4}],
}
SETUP = {
    "scheme": "scheme.toml", "target": "m",
    "source": {"kind": "effusive", "temperature_K": TEMPERATURE_K, "divergence_rms_mrad": 5.0,
               "width_rms_mm": 1.0, "initial": {"g": 1.0}},
    "beam": [{"name": "pump", "transition": ["g", "e"], "power_mW": 1.0, "waist_mm": 1.0}],
}


def draw(rng, n, source):
    """n nodes of the source with equal weights: flux-weighted effusive speeds
    (m v^2 / 2 kB T is Gamma(2)-distributed for a v^3 exp(-m v^2/2 kB T) flux),
    normal angles and offsets."""
    s = math.sqrt(K.kB * source.temperature / (MASS_U * K.amu))
    v = s * np.sqrt(2.0 * rng.gamma(2.0, size=n))
    a = rng.normal(0.0, source.divergence_rms, n)
    y = rng.normal(0.0, source.width_rms, n)
    return v, a, y, np.full(n, 1.0 / n)


def streamed(ens, z, n, rng):
    """Ensemble means of n nodes, drawn and propagated a block at a time."""
    total = 0.0
    for lo in range(0, n, BLOCK):
        m = min(BLOCK, n - lo)
        v, a, y, w = draw(rng, m, ens.model.setup.source)
        w *= m / n
        ev = ens.evaluate(v, a, y, w, np.zeros(m, dtype=int), 1, z)
        total = total + w @ ev.values
    return total


def kept(ens, z, n, rng):
    """Ensemble means of n nodes passed to evaluate at once (all nodes kept)."""
    v, a, y, w = draw(rng, n, ens.model.setup.source)
    ev = ens.evaluate(v, a, y, w, np.zeros(n, dtype=int), 1, z)
    per_node = sum(x.nbytes for x in (ev.v, ev.a, ev.y0, ev.weight, ev.values))
    return w @ ev.values, per_node


def measure(label, fn):
    tracemalloc.reset_peak()
    base = tracemalloc.get_traced_memory()[0]
    t0 = time.perf_counter()
    out = fn()
    seconds = time.perf_counter() - t0
    peak = tracemalloc.get_traced_memory()[1] - base
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024  # KiB on Linux
    return dict(label=label, peak=peak / 2**20, rss=rss, seconds=seconds, out=out)


def main():
    p = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    p.add_argument("--nodes", type=int, default=1_000_000)
    p.add_argument("--small", type=int, default=10_000)
    p.add_argument("--per-waist", type=int, default=1, help="grid steps per waist (coarse)")
    args = p.parse_args()

    with tempfile.TemporaryDirectory() as d:
        (Path(d) / "scheme.toml").write_text(dumps(SCHEME), encoding="utf-8")
        (Path(d) / "setup.toml").write_text(dumps(SETUP), encoding="utf-8")
        setup = pumpsim.load_setup(Path(d) / "setup.toml")
    model = RateModel(setup)
    z = model.grid(args.per_waist)
    ens = EnsembleIntegrator(model, ExponentialPropagator(), 1e-2, 10**12)
    S, size = model.n_states, model.size
    unchunked = args.nodes * size * size * 8 * (1 + len(model.terms)) / 2**20
    print(f"scheme: {len(setup.scheme.levels)} levels, {len(model.terms)} beam term, "
          f"{size} state components; grid {len(z)} points; CHUNK = {CHUNK}; "
          f"streamed blocks of {BLOCK}")
    print(f"(without chunks, the generators of {args.nodes:,} nodes alone would take "
          f"{unchunked:,.0f} MiB)")

    tracemalloc.start()
    rows = []
    for n in (args.small, args.nodes):
        rows.append(measure(f"streamed {n:>9,}", lambda n=n: streamed(ens, z, n,
                                                                    np.random.default_rng(1))))
    for n in (args.small, args.nodes):
        rows.append(measure(f"kept     {n:>9,}", lambda n=n: kept(ens, z, n,
                                                                 np.random.default_rng(1))))
    tracemalloc.stop()

    print(f"\n{'phase':<20} {'traced peak (MiB)':>18} {'process peak RSS (MiB)':>23} "
          f"{'time (s)':>9} {'transfer':>9}")
    for r in rows:
        values = r["out"][0] if isinstance(r["out"], tuple) else r["out"]
        print(f"{r['label']:<20} {r['peak']:18.1f} {r['rss']:23.1f} {r['seconds']:9.1f} "
              f"{values[model.setup.scheme.index('m')]:9.4f}")
    s_small, s_big, k_small, k_big = rows
    per_node = k_big["out"][1] / args.nodes
    print(f"\nstreamed: peak {s_big['peak']:.1f} MiB for {args.nodes:,} nodes vs "
          f"{s_small['peak']:.1f} MiB for {args.small:,} "
          f"(ratio {s_big['peak'] / s_small['peak']:.2f}; nodes ratio "
          f"{args.nodes / args.small:.0f})")
    print(f"kept:     peak {k_big['peak']:.1f} MiB vs {k_small['peak']:.1f} MiB; the kept "
          f"per-node arrays are {per_node:.0f} bytes/node = "
          f"{k_big['out'][1] / 2**20:.1f} MiB, the rest is the chunk's working set")
    print(f"process peak RSS: {s_small['rss']:.0f} MiB after {args.small:,} streamed, "
          f"{s_big['rss']:.0f} MiB after {args.nodes:,} streamed, {k_big['rss']:.0f} MiB after "
          f"{args.nodes:,} kept")


if __name__ == "__main__":
    main()

"""Density-matrix model: cost per atom of the Rb-87 D1 system against QuTiP's mesolve.

The layout of demo_data/rb87_optical_pumping.toml (sigma+ pump F=2 -> F'=2 and
repump F=1 -> F'=2 on D1, 1 G; 16 D1 sublevels and the loss sink) with a
narrower beam so that mesolve finishes in a minute. The same atoms are
integrated by pumpsim's density-matrix model (batched CF4 exponential
integrator on the reduced Liouvillian, the grid the tests use) and by
``qutip.mesolve`` on the same master equation (tests/test_coherent_qutip.py
builds it), and the populations are compared.

    python benchmarks/bench_coherent.py [ATOMS]

Needs QuTiP (the ``test`` extra).
"""

import os
import sys
import tempfile
import time
from pathlib import Path

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")  # as the engine's other benchmarks

import numpy as np  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests"))

from test_coherent import rb87_case  # noqa: E402
from test_coherent_qutip import qutip_final  # noqa: E402

from pumpsim.coherent import CoherentModel, CoherentPropagator  # noqa: E402

SPEED, WAIST = 1000.0, 0.15  # m/s, mm
GRIDS = (4, 8, 16)  # steps per waist


def main(n_atoms=2, batch=16):
    with tempfile.TemporaryDirectory() as folder:
        setup = rb87_case(Path(folder), power_mW=0.005, widths=(0.3, 0.0), group=None,
                          waist=WAIST, speed=SPEED)
    t = time.perf_counter()
    model = CoherentModel(setup)
    build = time.perf_counter() - t
    L = model.liouvillian
    S = model.n_states
    print(f"Rb-87 D1, sigma+ pump and repump, {SPEED:g} m/s, waist {WAIST:g} mm")
    print(f"states {S} (16 D1 sublevels driven), coherences kept {len(L.pairs)} of "
          f"{S * (S - 1) // 2}, real coordinates {model.size}; model built in {build * 1e3:.1f} ms")
    speeds = SPEED * np.linspace(0.9, 1.1, batch)
    zeros = np.zeros(batch)
    checked = np.linspace(0, batch - 1, n_atoms).astype(int)  # the atoms mesolve also runs
    t = time.perf_counter()
    theirs = np.array([qutip_final(model, v, atol=1e-9, rtol=1e-7) for v in speeds[checked]])
    qutip_s = (time.perf_counter() - t) / n_atoms
    print(f"mesolve: {qutip_s * 1e3:9.2f} ms per atom (atol 1e-9, rtol 1e-7), {n_atoms} atoms")
    propagator = CoherentPropagator()
    problem = model.problem(speeds, zeros, zeros)
    for per_waist in GRIDS:
        z = model.grid(per_waist)
        t = time.perf_counter()
        ours = propagator.propagate(problem, z).final[:, :S]
        ours_s = (time.perf_counter() - t) / batch
        diff = np.max(np.abs(ours[checked] - theirs))
        print(f"pumpsim, {per_waist:3d} steps per waist ({len(z) - 1} steps): "
              f"{ours_s * 1e3:8.2f} ms per atom in a batch of {batch}; largest difference "
              f"from mesolve {diff:.1e}; mesolve / pumpsim {qutip_s / ours_s:.0f}x")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 2)

"""Reference integrator: ``scipy.integrate.solve_ivp`` (Radau IIA), one node at a time.

Slow, but independent of the batched machinery; the tests and the benchmark
measure the engine against it.
"""

import numpy as np
from scipy.integrate import solve_ivp

from .base import Propagator, Trajectory


class RadauPropagator(Propagator):
    """Per-node implicit Radau IIA (order 5) with the exact Jacobian.

    Parameters
    ----------
    rtol, atol : float
        Passed to ``solve_ivp``.
    """

    name = "radau"
    batched = False

    def __init__(self, rtol=1e-8, atol=1e-12):
        self.rtol, self.atol = rtol, atol

    def propagate(self, problem, z, reducer=None):
        z = np.asarray(z, dtype=float)
        n, m = problem.y0.shape
        paths = np.empty((n, len(z), m)) if reducer is not None else None
        final = np.empty((n, m))
        steps = 0
        for i in range(n):
            base, drives = problem.base[i], problem.drives[:, i]

            def jac(zz, yy, base=base, drives=drives):
                return base + np.tensordot(problem.profiles(np.array([zz]))[:, 0], drives, axes=1)

            sol = solve_ivp(lambda zz, yy: jac(zz, yy) @ yy, (z[0], z[-1]), problem.y0[i],
                            method="Radau", t_eval=z, rtol=self.rtol, atol=self.atol, jac=jac)
            if not sol.success:
                raise RuntimeError(f"Radau failed on node {i}: {sol.message}")
            final[i] = sol.y[:, -1]
            steps = max(steps, sol.nfev)
            if paths is not None:
                paths[i] = sol.y.T
        reduced = None
        if reducer is not None:
            reduced = np.stack([reducer @ paths[:, k] for k in range(len(z))])
        return Trajectory(z, final, reduced, steps)

"""The integrator of the density-matrix model.

The rate model's fourth-order commutator-free exponential integrator
(:mod:`pumpsim.solvers.exponential`, batched over atoms, with receivers such
as photon counters outside the exponentials) with a general matrix
exponential: a Liouvillian is not a rate generator (its coherences rotate),
so the uniformised series of the rate model does not apply; scipy's
scaling-and-squaring Pade exponential does (N. J. Higham, SIAM J. Matrix
Anal. Appl. 26 (2005) 1179). Each step is exact for a constant generator,
so fast rotations (detunings, hyperfine splittings of far-off components)
cost no extra steps; only the change of the beam profiles across a step
sets the error, as in the rate model.

Why one BLAS thread: the exponentials are of matrices of a few tens of rows,
where OpenBLAS's threads cost more in waiting than they save: measured on a
shared two-core machine, 0.76 against 2.4 ms per 60 x 60 exponential, and
up to 40 times worse when the cores were busy. The engine's integrators run
in one thread by design (:mod:`pumpsim.ensemble`); the BLAS libraries are told
so for the duration of a propagation and restored after, through threadpoolctl.
"""

from scipy.linalg import expm
from threadpoolctl import ThreadpoolController

from ..solvers.exponential import ExponentialPropagator

_BLAS = ThreadpoolController()  # finds the loaded BLAS libraries once


class CoherentPropagator(ExponentialPropagator):
    """CF4 exponential integrator for density-matrix problems."""

    name = "density_matrix"
    exponential = staticmethod(expm)

    def propagate(self, problem, z, reducer=None):
        with _BLAS.limit(limits=1, user_api="blas"):
            return super().propagate(problem, z, reducer)

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
"""

from scipy.linalg import expm

from ..solvers.exponential import ExponentialPropagator


class CoherentPropagator(ExponentialPropagator):
    """CF4 exponential integrator for density-matrix problems."""

    name = "density_matrix"
    exponential = staticmethod(expm)

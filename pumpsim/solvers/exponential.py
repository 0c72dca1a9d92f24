"""Fourth-order commutator-free exponential integrator, batched over nodes.

Each step from ``z`` to ``z + h`` is the product of two matrix exponentials
of the generator sampled at the two Gauss points (S. Blanes and P. C. Moan,
"Fourth- and sixth-order commutator-free Magnus integrators for linear and
non-linear dynamical systems", Appl. Numer. Math. 56 (2006) 1519)::

    y <- exp(h (a2 A1 + a1 A2)) exp(h (a1 A1 + a2 A2)) y,
    a1 = 1/4 + sqrt(3)/6,  a2 = 1/4 - sqrt(3)/6.

Why exponentials: the decay part is integrated exactly whatever its
stiffness, and the exponential of a rate generator (non-negative
off-diagonal, zero column sums) is a stochastic matrix, so populations stay
non-negative and sum to one to round-off. The small negative weight ``a2``
could spoil that on very coarse steps; the profile weights of each factor
are therefore clipped at zero, which keeps every factor a rate generator
(the grid refinement sees any accuracy this costs).

Why the exponentials stay small: states that only receive (the ``other``
sink, photon counters, an undriven stable level) need no place in them.
With ``T`` the states that give and ``R`` the receivers, one exponential of
size ``|T| + 1``::

    exp([[h A_TT, h y_T], [0, 0]]) = [[exp(h A_TT), int_0^h exp(s A_TT) ds y_T], [0, 1]]

moves ``y_T`` and, through ``A_RT`` times the integral, fills the receivers.
States that start empty and cannot be reached stay exactly zero and are
left out altogether.

Why the populations are rescaled after each step: a very stiff exponential
needs many squarings, and each doubles the rounding error of its column sums
(up to ~1e-10 at decay rate x step = 1e6). Dividing the populations by their
sum (exactly one for the true solution) removes that drift; it changes each
population by a relative amount of the same rounding size.
"""

import math

import numpy as np

from ..expm import expm_stack
from .base import Propagator, Trajectory

A1 = 0.25 + math.sqrt(3.0) / 6.0
A2 = 0.25 - math.sqrt(3.0) / 6.0
C = math.sqrt(3.0) / 6.0


def partition(problem):
    """Indices of giving states ``T`` and receiving states ``R`` that can be populated."""
    pattern = (problem.base != 0).any(axis=0) | (problem.drives != 0).any(axis=(0, 1))
    reached = (problem.y0 != 0).any(axis=0)
    while True:
        grown = reached | pattern[:, reached].any(axis=1)
        if (grown == reached).all():
            break
        reached = grown
    gives = pattern.any(axis=0)
    return np.nonzero(reached & gives)[0], np.nonzero(reached & ~gives)[0]


def _combine(weights, pieces):
    """``weights @ pieces`` as scaled sums: a threaded BLAS would spread this product
    over every core and spend more in waiting than it saves on the engine's sizes."""
    out = pieces[0] * weights[0]
    for w, piece in zip(weights[1:], pieces[1:]):
        if w:
            out += piece * w
    return out


class ExponentialPropagator(Propagator):
    """Batched CF4 exponential integrator on a given grid (see module docstring)."""

    name = "exponential"
    batched = True
    exponential = staticmethod(expm_stack)  # of rate generators; a subclass may swap it

    def propagate(self, problem, z, reducer=None):
        z = np.asarray(z, dtype=float)
        T, R = partition(problem)
        n, r = problem.size, len(T)
        y = problem.y0.copy()
        yT = y[:, T].copy()
        # generator pieces stacked as (1 + terms, n, ., .): half the base (each of the two
        # factors carries half the constant part), then the drives
        pieces = np.concatenate([0.5 * problem.base[None], problem.drives])
        TT = pieces[:, :, T][:, :, :, T].reshape(len(pieces), -1)
        RT = pieces[:, :, R][:, :, :, T].reshape(len(pieces), -1)
        h = np.diff(z)
        mid = 0.5 * (z[:-1] + z[1:])
        f1, f2 = problem.profiles(mid - C * h), problem.profiles(mid + C * h)
        weights = (np.maximum(A1 * f1 + A2 * f2, 0.0), np.maximum(A2 * f1 + A1 * f2, 0.0))
        reduced = None
        if reducer is not None:
            reduced = np.empty((len(z), reducer.shape[0], y.shape[1]))
            reduced[0] = reducer @ y
        M = np.zeros((n, r + 1, r + 1))
        keep = problem.conserved
        total = y[:, keep].sum(axis=1) if keep is not None else None
        cT, cR = (keep[T], keep[R]) if keep is not None else (None, None)
        for j, hj in enumerate(h):
            for w in weights:
                wj = np.concatenate([[1.0], w[:, j]])
                M[:, :r, :r] = _combine(wj * hj, TT).reshape(n, r, r)
                M[:, :r, r] = yT * hj
                E = self.exponential(M)
                if len(R):
                    y[:, R] += np.einsum("nij,nj->ni", _combine(wj, RT).reshape(n, len(R), r),
                                         E[:, :r, r])
                yT = np.einsum("nij,nj->ni", E[:, :r, :r], yT)
            if keep is not None:
                drift = (yT[:, cT].sum(axis=1) + y[:, R][:, cR].sum(axis=1)) / total
                yT[:, cT] /= drift[:, None]
                y[:, R[cR]] /= drift[:, None]
            if reduced is not None:
                y[:, T] = yT
                reduced[j + 1] = reducer @ y
        y[:, T] = yT
        return Trajectory(z, y, reduced, len(h))

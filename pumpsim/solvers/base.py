"""The contract every integrator meets.

The rate equations of every ensemble node are one linear system in the
position ``z`` along the atomic beam::

    dy_n/dz = (B_n + sum_t f_t(z) D_{t,n}) y_n

``B_n`` holds what does not change along the path (spontaneous decay divided
by the node's speed), ``D_{t,n}`` the drive of term ``t`` (one pass of one
beam) at unit profile, and ``f_t(z)`` that term's profile along z. The state
``y`` holds the populations of the basis states and, after them, running
integrals (photons scattered per term), so one propagation yields both.

A :class:`Propagator` integrates all nodes together over a shared grid of
positions and returns a :class:`Trajectory`.
"""

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class LinearProblem:
    """Batched linear ODE in z.

    Parameters
    ----------
    base : ndarray, shape (n, m, m)
        ``B_n``, 1/m.
    drives : ndarray, shape (T, n, m, m)
        ``D_{t,n}``, 1/m at unit profile.
    profiles : callable
        ``profiles(z)`` for an array ``z`` of shape (k,) returns (T, k).
    y0 : ndarray, shape (n, m)
        State at the start of the grid.
    conserved : ndarray of bool, shape (m,), optional
        Components whose sum the dynamics conserves exactly (the populations). A
        propagator may project its rounding drift off this sum.
    """

    base: np.ndarray
    drives: np.ndarray
    profiles: object
    y0: np.ndarray
    conserved: np.ndarray | None = None

    @property
    def size(self):
        return self.base.shape[0]

    def generator(self, z: float, index=slice(None)):
        """The generator at one position for the nodes ``index``, shape (n, m, m)."""
        f = self.profiles(np.array([z]))[:, 0]
        return self.base[index] + np.tensordot(f, self.drives[:, index], axes=1)

    def subset(self, index) -> "LinearProblem":
        """The same problem restricted to some nodes."""
        return LinearProblem(self.base[index], self.drives[:, index], self.profiles,
                             self.y0[index], self.conserved)


@dataclass(frozen=True)
class Trajectory:
    """What a propagation returns.

    Parameters
    ----------
    z : ndarray, shape (k,)
        Grid positions, m.
    final : ndarray, shape (n, m)
        State of every node at the last grid point.
    reduced : ndarray or None, shape (k, p, m)
        ``reducer @ state`` at every grid point, when a reducer was given.
    steps : int
        Steps taken, shared by all nodes (batched methods), or the largest
        number of right-hand-side evaluations of one node (per-node methods).
    """

    z: np.ndarray
    final: np.ndarray
    reduced: np.ndarray | None
    steps: int


class Propagator:
    """Base class: integrate a :class:`LinearProblem` over a grid.

    Subclasses implement :meth:`propagate`; they must conserve the sum of
    the population components exactly when the generators' columns sum to
    zero, and stay stable however stiff the decays are.
    """

    name = "base"
    batched = True
    """Whether all nodes share one fixed grid of steps (else each adapts its own)."""

    def propagate(self, problem: LinearProblem, z: np.ndarray, reducer=None) -> Trajectory:
        """Integrate every node from ``z[0]`` to ``z[-1]``.

        Parameters
        ----------
        problem : LinearProblem
        z : ndarray, shape (k,)
            Increasing grid. Batched methods step exactly on it; adaptive
            ones report on it.
        reducer : sparse or dense matrix, shape (p, n), optional
            Applied to the node states at every grid point (weighted sums
            for ensemble means), so that per-node paths need not be kept.

        Returns
        -------
        Trajectory
        """
        raise NotImplementedError

"""The batched linear problem of :mod:`.base` stored by its non-zero pattern.

Sublevel bases have hundreds of states but each couples to a handful of
others, and every node shares the pattern; only the values differ. Storing
``(n, nnz)`` values instead of ``(n, m, m)`` matrices keeps a 200-state
problem of thousands of nodes in memory.
"""

from dataclasses import dataclass

import numpy as np

from .base import LinearProblem


@dataclass(frozen=True)
class SparseProblem:
    """``dy_n/dz = (B_n + sum_t f_t(z) D_{t,n}) y_n`` with a shared pattern.

    Parameters
    ----------
    rows, cols : ndarray of int, shape (nnz,)
        Position of each stored entry; no position appears twice.
    base : ndarray, shape (n, nnz)
        Entries of ``B_n``, 1/m.
    drives : ndarray, shape (T, n, nnz)
        Entries of ``D_{t,n}`` at unit profile, 1/m.
    profiles : callable
        ``profiles(z)`` for ``z`` of shape (k,) returns (T, k).
    y0 : ndarray, shape (n, m)
    populations : int or None
        The first ``populations`` states are populations (the rest running
        integrals): their rows of every column sum to zero and their
        off-diagonal entries are >= 0. Solvers may use it to avoid
        cancellation; ``None``: unknown.
    """

    rows: np.ndarray
    cols: np.ndarray
    base: np.ndarray
    drives: np.ndarray
    profiles: object
    y0: np.ndarray
    populations: int | None = None

    @property
    def size(self):
        """Number of nodes (as :attr:`LinearProblem.size`)."""
        return self.base.shape[0]

    @property
    def states(self):
        return self.y0.shape[1]

    def values(self, z: float, index=slice(None)) -> np.ndarray:
        """Entries of the generator at one position, shape (n, nnz)."""
        f = self.profiles(np.array([z]))[:, 0]
        out = self.base[index].copy()
        for w, d in zip(f, self.drives[:, index]):
            if w:
                out += w * d
        return out

    def subset(self, index) -> "SparseProblem":
        return SparseProblem(self.rows, self.cols, self.base[index], self.drives[:, index],
                             self.profiles, self.y0[index], self.populations)

    def dense(self) -> LinearProblem:
        """The same problem as a dense :class:`LinearProblem` (small bases only)."""
        n, m = self.y0.shape
        base = np.zeros((n, m, m))
        base[:, self.rows, self.cols] = self.base
        drives = np.zeros((len(self.drives), n, m, m))
        drives[:, :, self.rows, self.cols] = self.drives
        return LinearProblem(base, drives, self.profiles, self.y0)

    @classmethod
    def from_dense(cls, problem: LinearProblem) -> "SparseProblem":
        """The non-zero pattern (over all nodes and terms) of a dense problem."""
        used = (np.abs(problem.base).max(axis=0) > 0)
        if len(problem.drives):
            used |= np.abs(problem.drives).max(axis=(0, 1)) > 0
        rows, cols = np.nonzero(used)
        return cls(rows, cols, problem.base[:, rows, cols], problem.drives[:, :, rows, cols],
                   problem.profiles, problem.y0)

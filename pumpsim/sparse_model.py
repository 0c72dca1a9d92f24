"""The rate model assembled straight into a :class:`~pumpsim.solvers.sparse.SparseProblem`.

Same formulas as :meth:`pumpsim.model.RateModel.problem` (``model.md``), but
no ``(n, m, m)`` array is ever formed, so bases of hundreds of sublevels fit
in memory. The tests check that both give the same generator.
"""

import numpy as np
from scipy import sparse

from . import constants as K
from .model import RateModel
from .solvers.sparse import SparseProblem


class SparseRateModel(RateModel):
    """A :class:`RateModel` whose :meth:`problem` is sparse (same parameters)."""

    def __init__(self, setup, basis=None):
        super().__init__(setup, basis)
        S = self.n_states
        entries = {}

        def slot(r, c):
            return entries.setdefault((r, c), len(entries))

        d_rows, d_cols = np.nonzero(self.decay)
        self._decay_slots = np.array([slot(r, c) for r, c in zip(d_rows, d_cols)], dtype=int)
        self._decay_values = self.decay[d_rows, d_cols]
        # per term: couplings and, for each, the slots and signs of its six entries
        self._terms = []
        for t, (i, _) in enumerate(self.terms):
            cs = self.basis.couplings(self.setup.beams[i])
            acc = S + t
            slots, coef, which = [], [], []
            for c_index, c in enumerate(cs):
                lo, up, r = c.lower, c.upper, c.ratio
                for (row, col), w in (((up, lo), 1.0), ((lo, lo), -1.0), ((lo, up), r),
                                      ((up, up), -r), ((acc, lo), 1.0), ((acc, up), -r)):
                    slots.append(slot(row, col))
                    coef.append(w)
                    which.append(c_index)
            self._terms.append(dict(strength=np.array([c.strength for c in cs]),
                                    shift=np.array([c.shift for c in cs]),
                                    which=which, slots=slots, coef=coef))
        pos = np.array(list(entries.keys()), dtype=int).reshape(-1, 2)
        self._rows, self._cols = pos[:, 0], pos[:, 1]
        self.nnz = len(entries)
        for info in self._terms:  # coupling rates -> entries, as one sparse matrix
            info["scatter"] = sparse.csc_matrix(
                (info.pop("coef"), (info.pop("which"), info.pop("slots"))),
                shape=(len(info["strength"]), self.nnz))

    def rates(self, t, v, a, y0):
        """Excitation rate of every coupling of term ``t`` at unit profile,
        per metre of path, shape (n, couplings)."""
        i, sign = self.terms[t]
        b, ln, shape = self.setup.beams[i], self.lines[i], self.shapes[i]
        info = self._terms[t]
        gamma = ln.gamma(b.linewidth)
        flux = shape.peak_intensity * shape.across(y0) / (K.hbar * ln.omega * v)
        doppler = sign * ln.k * v * (np.cos(b.angle) + a * np.sin(b.angle))
        D = 2 * np.pi * (b.detuning - info["shift"])[None, :] - doppler[:, None]
        return (ln.sigma0(b.linewidth) * info["strength"][None, :]
                / (1 + (2 * D / gamma) ** 2) * flux[:, None])

    def problem(self, v, a, y0) -> SparseProblem:
        v, a, y0 = (np.asarray(x, dtype=float) for x in (v, a, y0))
        n = v.size
        base = np.zeros((n, self.nnz))
        base[:, self._decay_slots] = self._decay_values[None, :] / v[:, None]
        drives = np.zeros((len(self.terms), n, self.nnz))
        for t, info in enumerate(self._terms):
            drives[t] = (info["scatter"].T @ self.rates(t, v, a, y0).T).T
        y = np.broadcast_to(self.initial, (n, self.size)).copy()
        return SparseProblem(self._rows, self._cols, base, drives, self.profiles, y,
                             populations=self.n_states)


def solver_for(setup) -> str:
    """The integrator to use: the setup's own choice if it names one, else
    ``rosenbrock`` (this sparse model) in sublevel mode and ``exponential``
    otherwise."""
    if "solver" in setup.document.get("numerics", {}) or setup.mode != "sublevel":
        return setup.numerics.solver
    return "rosenbrock"

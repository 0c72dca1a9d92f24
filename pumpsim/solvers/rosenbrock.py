"""Rosenbrock integrator for large sparse problems, batched over nodes.

Method: RODAS4 (E. Hairer and G. Wanner, *Solving Ordinary Differential
Equations II*, 2nd ed., Springer 1996, section IV.7, coefficients of their
code RODAS): six stages, order 4, L-stable and stiffly accurate, so decays of
any stiffness are damped correctly. All six stages share one matrix
``M = I - h g J`` per step (``g = 1/4``); for a linear problem the Jacobian
``J`` is the generator at the start of the step::

    M K_i = h g [A(z + a_i h) (y + sum_j a_ij K_j) + sum_j c_ij K_j / h + h g_i A'(z) y]
    y <- y + sum_i m_i K_i

``A'(z)`` comes from the profiles by a central difference.

Why it scales: the exponential integrator works with dense ``(r, r)``
matrices per node, ``r`` the number of states, which for 200 sublevels is
hundreds of times the work of the structure actually present. Here ``M`` is
solved using that structure:

1. states that only receive (the ``other`` sink, photon counters, undriven
   stable levels) have empty columns; their rows follow from the others by
   one sparse product, and states that start empty and cannot be reached are
   left out (as in the exponential integrator);
2. among the remaining states an independent set ``F`` (no two coupled;
   chosen greedily, fastest decaying first, which in practice picks the
   excited sublevels) has a diagonal block of ``M``, eliminated exactly by a
   Schur complement;
3. the complement on the rest ``P`` (the ground and metastable sublevels,
   typically half the states or fewer) is split into its coupled blocks, and
   each is inverted densely, batched over nodes.

A step costs sparse products of the ``nnz`` couplings plus ``|P_b|^3`` per
block and node, instead of exponentials of the whole system.

Conservation: the population rows of every column of the generator sum to
zero, so every stage ``K_i`` has zero population sum and the populations sum
to one to round-off. Unlike the exponential integrator this one does not
guarantee non-negative populations on coarse steps; undershoots are of the
size of the step error, which the ensemble's grid refinement controls.
"""

import numpy as np
from scipy.sparse.csgraph import connected_components
from scipy import sparse

from .base import Propagator, Trajectory
from .sparse import SparseProblem

GAMMA = 0.25
ALPHA = (0.0, 0.386, 0.21, 0.63, 1.0, 1.0)
GAMMAS = (0.25, -0.1043, 0.1035, -0.0362, 0.0, 0.0)
_A5 = (1.221224509226641, 6.019134481288629, 12.53708332932087, -0.6878860361058950)
A = ((), (1.544,), (0.9466785280815826, 0.2557011698983284),
     (3.314825187068521, 2.896124015972201, 0.9986419139977817),
     _A5, _A5 + (1.0,))
C = ((), (-5.6688,), (-2.430093356833875, -0.2063599157091915),
     (-0.1073529058151375, -9.594562251023355, -20.47028614809616),
     (7.496443313967647, -10.24680431464352, -33.99990352819905, 11.70890893206160),
     (8.083246795921522, -7.981132988064893, -31.52159432874371, 16.31930543123136,
      -6.058818238834054))
M_WEIGHTS = _A5 + (1.0, 1.0)
FD_STEP = 1e-3  # central difference of the profiles, as a fraction of the step
BLOCK_ENTRIES = 4_000_000  # nodes are integrated in blocks of about this many stored values


class _Gather:
    """``out[:, r] = sum_e v[:, e] x[:, col_e]`` over the entries ``e`` of row ``r``."""

    def __init__(self, rows, cols, n_out):
        order = np.argsort(rows, kind="stable")
        self.order, self.cols, self.n_out = order, np.asarray(cols)[order], n_out
        self.targets, self.starts = np.unique(np.asarray(rows)[order], return_index=True)

    def __call__(self, v, x):
        out = np.zeros((x.shape[0], self.n_out))
        if len(self.order):
            out[:, self.targets] = np.add.reduceat(v[:, self.order] * x[:, self.cols],
                                                   self.starts, axis=1)
        return out


def _independent_set(states, rows, cols, stiffness):
    """Greedy maximal set of mutually uncoupled states, stiffest first."""
    neighbours = {s: set() for s in states}
    for r, c in zip(rows, cols):
        if r != c and r in neighbours and c in neighbours:
            neighbours[r].add(c)
            neighbours[c].add(r)
    chosen, blocked = [], set()
    for s in sorted(states, key=lambda s: (-stiffness[s], len(neighbours[s]), s)):
        if s not in blocked:
            chosen.append(s)
            blocked |= neighbours[s] | {s}
    return np.array(sorted(chosen), dtype=int)


class _Structure:
    """Partition of one problem's states and the index maps the solves need."""

    def __init__(self, problem: SparseProblem):
        m, rows, cols = problem.states, problem.rows, problem.cols
        gives = np.zeros(m, bool)
        gives[cols] = True
        reached = np.abs(problem.y0).max(axis=0) > 0
        while True:
            grown = reached.copy()
            grown[rows[reached[cols]]] = True
            if (grown == reached).all():
                break
            reached = grown
        keep = reached[cols]  # entries whose column can be non-zero
        self.entries = np.nonzero(keep)[0]
        rows, cols = rows[keep], cols[keep]
        self.rows, self.cols = rows, cols
        T = np.nonzero(reached & gives)[0]
        self.R = np.nonzero(reached & ~gives)[0]
        diag = rows == cols
        stiffness = np.zeros(m)
        if len(problem.base):
            stiffness[rows[diag]] = np.abs(problem.base[:, self.entries[diag]]).max(axis=0)
        self.F = _independent_set(list(T), rows, cols, stiffness)
        self.P = np.setdiff1d(T, self.F)
        local = np.full(m, -1)
        local[self.F] = np.arange(len(self.F))
        local[self.P] = np.arange(len(self.P))
        in_F, in_P = np.zeros(m, bool), np.zeros(m, bool)
        in_F[self.F], in_P[self.P] = True, True
        in_R = np.zeros(m, bool)
        in_R[self.R] = True
        self.full = _Gather(rows, cols, m)
        sel = diag & in_F[rows]
        self.diag_F, self.diag_F_pos = np.nonzero(sel)[0], local[rows[sel]]
        self.FP = np.nonzero(in_F[rows] & in_P[cols])[0]
        self.PF = np.nonzero(in_P[rows] & in_F[cols])[0]
        self.RT = np.nonzero(in_R[rows])[0]
        self.gather_FP = _Gather(local[rows[self.FP]], local[cols[self.FP]], len(self.F))
        self.gather_PF = _Gather(local[rows[self.PF]], local[cols[self.PF]], len(self.P))
        self.gather_RT = _Gather(np.searchsorted(self.R, rows[self.RT]), cols[self.RT], len(self.R))
        self._blocks(rows, cols, local, in_P)

    def _blocks(self, rows, cols, local, in_P):
        """Coupled blocks of the Schur complement on ``P`` and where its terms go."""
        nP = len(self.P)
        PP = np.nonzero(in_P[rows] & in_P[cols])[0]
        pr, pc = local[rows[PP]], local[cols[PP]]
        # the complement couples p and p' through every F state they share
        fp_by_f, pf_by_f = {}, {}
        for e, (f, p) in enumerate(zip(local[rows[self.FP]], local[cols[self.FP]])):
            fp_by_f.setdefault(f, []).append((e, p))
        for e, (p, f) in enumerate(zip(local[rows[self.PF]], local[cols[self.PF]])):
            pf_by_f.setdefault(f, []).append((e, p))
        e1, e2, ff, sr, sc = [], [], [], [], []
        for f, ins in pf_by_f.items():
            for a, p in ins:
                for b, q in fp_by_f.get(f, ()):
                    e1.append(a), e2.append(b), ff.append(f), sr.append(p), sc.append(q)
        link = sparse.coo_matrix((np.ones(len(pr) + len(sr)), (np.r_[pr, sr], np.r_[pc, sc])),
                                 shape=(nP, nP))
        n_blocks, label = connected_components(link, directed=False) if nP else (0, [])
        self.blocks = []
        for b in range(n_blocks):
            members = np.nonzero(label == b)[0]
            pos = np.full(nP, -1)
            pos[members] = np.arange(len(members))
            k = len(members)
            sel = label[pr] == b
            pp_entries, pp_flat = PP[sel], pos[pr[sel]] * k + pos[pc[sel]]
            sel = label[np.array(sr, dtype=int)] == b if sr else np.zeros(0, bool)
            flat = (pos[np.array(sr, dtype=int)[sel]] * k + pos[np.array(sc, dtype=int)[sel]]
                    if sr else np.zeros(0, int))
            order = np.argsort(flat, kind="stable")
            targets, starts = np.unique(flat[order], return_index=True)
            self.blocks.append(dict(
                members=members, k=k, pp=pp_entries, pp_flat=pp_flat,
                e1=np.array(e1, dtype=int)[sel][order], e2=np.array(e2, dtype=int)[sel][order],
                f=np.array(ff, dtype=int)[sel][order], targets=targets, starts=starts,
                diag=np.arange(k) * (k + 1)))


class RosenbrockPropagator(Propagator):
    """Batched RODAS4 on a given grid with structured sparse solves (module docstring).

    Accepts a :class:`~.sparse.SparseProblem` or a dense
    :class:`~.base.LinearProblem` (converted by its pattern).
    """

    name = "rosenbrock"
    batched = True

    def propagate(self, problem, z, reducer=None):
        if not isinstance(problem, SparseProblem):
            problem = SparseProblem.from_dense(problem)
        z = np.asarray(z, dtype=float)
        structure = _Structure(problem)
        n = problem.size
        step = max(1, BLOCK_ENTRIES // max(1, len(problem.rows) + problem.states))
        finals, reduced = [], None
        for lo in range(0, n, step):
            idx = slice(lo, min(lo + step, n))
            part = reducer[:, idx] if reducer is not None else None
            final, red = self._block(problem.subset(idx), structure, z, part)
            finals.append(final)
            if red is not None:
                reduced = red if reduced is None else reduced + red
        return Trajectory(z, np.concatenate(finals), reduced, len(z) - 1)

    def _block(self, problem, st, z, reducer):
        base = problem.base[:, st.entries]
        drives = problem.drives[:, :, st.entries]

        def values(f):
            out = base.copy()
            for w, d in zip(f, drives):
                if w:
                    out += w * d
            return out

        y = problem.y0.copy()
        reduced = None
        if reducer is not None:
            reduced = np.empty((len(z), reducer.shape[0], y.shape[1]))
            reduced[0] = reducer @ y
        for j, h in enumerate(np.diff(z)):
            z0 = z[j]
            times = np.unique(z0 + np.array(ALPHA) * h)
            eps = FD_STEP * h
            prof = problem.profiles(np.r_[times, z0 - eps, z0 + eps])
            generator = {t: values(prof[:, i]) for i, t in enumerate(times)}
            ft = st.full(values((prof[:, -1] - prof[:, -2]) / (2 * eps)) - base, y)
            solve = self._factor(st, generator[z0], h * GAMMA)
            K = []
            for i in range(6):
                Y = y.copy()
                for a, Kj in zip(A[i], K):
                    Y += a * Kj
                rhs = st.full(generator[z0 + ALPHA[i] * h], Y)
                for c, Kj in zip(C[i], K):
                    rhs += (c / h) * Kj
                if GAMMAS[i]:
                    rhs += (h * GAMMAS[i]) * ft
                K.append(solve(rhs * (h * GAMMA)))
            for w, Ki in zip(M_WEIGHTS, K):
                y += w * Ki
            if reduced is not None:
                reduced[j + 1] = reducer @ y
        return y, reduced

    @staticmethod
    def _factor(st, Jv, hg):
        """Factor ``M = I - hg J`` (J given by its stored entries); return its solver."""
        n = Jv.shape[0]
        dF = np.ones((n, len(st.F)))
        dF[:, st.diag_F_pos] -= hg * Jv[:, st.diag_F]
        MFP, MPF = -hg * Jv[:, st.FP], -hg * Jv[:, st.PF]
        inverses = []
        for b in st.blocks:
            k = b["k"]
            S = np.zeros((n, k * k))
            S[:, b["pp_flat"]] = -hg * Jv[:, b["pp"]]
            S[:, b["diag"]] += 1.0
            if len(b["e1"]):
                prod = MPF[:, b["e1"]] * MFP[:, b["e2"]] / dF[:, b["f"]]
                S[:, b["targets"]] -= np.add.reduceat(prod, b["starts"], axis=1)
            inverses.append(np.linalg.inv(S.reshape(n, k, k)))
        JRT = hg * Jv[:, st.RT]

        def solve(rhs):
            x = np.zeros_like(rhs)
            bF = rhs[:, st.F]
            rP = rhs[:, st.P] - st.gather_PF(MPF, bF / dF)
            xP = np.empty_like(rP)
            for b, inv in zip(st.blocks, inverses):
                xP[:, b["members"]] = np.einsum("nij,nj->ni", inv, rP[:, b["members"]])
            x[:, st.P] = xP
            x[:, st.F] = (bF - st.gather_FP(MFP, xP)) / dF
            if len(st.R):
                x[:, st.R] = rhs[:, st.R] + st.gather_RT(JRT, x)
            return x

        return solve

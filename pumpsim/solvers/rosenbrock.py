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

Limits: a stiff rate times the step enters the stages, so round-off grows
with it; nodes where it exceeds ``STIFF_LIMIT`` (atoms slower than a
micrometre per second, far beyond the contract's decay rate times transit
time of 1e6) are handed to the exponential integrator, exact for any rate.
The Schur complement's diagonal is formed from column sums, without
cancellation, when the problem says which states are populations.

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
from .exponential import ExponentialPropagator
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
KAPPA = 1.0  # largest change of a stiff rate within a step, relative to 1/h + the rate
STIFF_LIMIT = 1e8  # nodes with step * rate above this go to the exponential integrator
BLOCK_ENTRIES = 4_000_000  # nodes are integrated in blocks of about this many stored values


class _Gather:
    """``out[r] = sum_e v[e] x[col_e]`` over the entries ``e`` of row ``r``.

    Arrays are (entries or states, nodes): with the nodes last, every gather
    reads whole contiguous rows, and the sum over entries is one sparse
    product (an order of magnitude faster than ``np.add.reduceat`` here).
    """

    def __init__(self, entries, rows, cols, n_out):
        self.entries, self.cols = np.asarray(entries), np.asarray(cols)
        self.sum = _summing(rows, n_out)
        self.everything = np.array_equal(self.entries, np.arange(len(self.entries)))
        self._buffer = np.zeros((0, 0))

    def __call__(self, v, x):
        if not len(self.entries):
            return np.zeros((self.sum.shape[0], x.shape[1]))
        # one reused work array: fresh large temporaries are costly (page faults)
        if self._buffer.shape != (len(self.cols), x.shape[1]):
            self._buffer = np.empty((len(self.cols), x.shape[1]))
        buf = self._buffer
        np.take(x, self.cols, axis=0, out=buf)
        if self.everything and len(v) == len(self.entries):
            buf *= v
        else:
            buf *= v[self.entries]
        return self.sum @ buf


def _summing(rows, n_out):
    """Sparse (n_out, len(rows)) matrix adding term ``e`` into row ``rows[e]``."""
    rows = np.asarray(rows, dtype=int)
    return sparse.csr_matrix((np.ones(len(rows)), (rows, np.arange(len(rows)))),
                             shape=(n_out, len(rows)))


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
    """Partition of one problem's states and the index maps the solves need.

    Entry indices below refer to the kept entries (columns that can be
    non-zero), sorted by row.
    """

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
        kept = np.nonzero(reached[cols])[0]
        kept = kept[np.lexsort((cols[kept], rows[kept]))]
        self.entries = kept
        rows, cols = rows[kept], cols[kept]
        T = np.nonzero(reached & gives)[0]
        self.R = np.nonzero(reached & ~gives)[0]
        diag = rows == cols
        self.diag = np.nonzero(diag)[0]
        stiffness = np.zeros(m)
        stiffness[rows[diag]] = np.abs(problem.base[:, kept[diag]]).max(axis=0)
        self.F = _independent_set(list(T), rows, cols, stiffness)
        self.P = np.setdiff1d(T, self.F)
        local = np.full(m, -1)
        self.local = local
        local[self.F] = np.arange(len(self.F))
        local[self.P] = np.arange(len(self.P))
        in_F, in_P, in_R = (np.isin(np.arange(m), x) for x in (self.F, self.P, self.R))
        every = np.arange(len(kept))
        self.full = _Gather(every, rows, cols, m)
        sel = diag & in_F[rows]
        self.diag_F, self.diag_F_pos = np.nonzero(sel)[0], local[rows[sel]]
        FP = np.nonzero(in_F[rows] & in_P[cols])[0]
        PF = np.nonzero(in_P[rows] & in_F[cols])[0]
        RT = np.nonzero(in_R[rows])[0]
        self.gather_FP = _Gather(FP, local[rows[FP]], local[cols[FP]], len(self.F))
        self.gather_PF = _Gather(PF, local[rows[PF]], local[cols[PF]], len(self.P))
        self.gather_RT = _Gather(RT, np.searchsorted(self.R, rows[RT]), cols[RT], len(self.R))
        self._blocks(rows, cols, local, in_P, FP, PF)
        # for cancellation-free diagonals (see _factor): rates from T into population
        # receivers (the sink), summed per column, and the F -> P column weights
        self.exact = problem.populations is not None
        if self.exact:
            lost = np.nonzero(in_R[rows] & (rows < problem.populations))[0]
            self.lost, self.lost_col = lost, cols[lost]
            self.FP, self.FP_f = FP, local[rows[FP]]
            self.FP_sum = _summing(local[cols[FP]], len(self.P))

    def _blocks(self, rows, cols, local, in_P, FP, PF):
        """Coupled blocks of the Schur complement on ``P`` and where its terms go."""
        nP = len(self.P)
        PP = np.nonzero(in_P[rows] & in_P[cols])[0]
        pr, pc = local[rows[PP]], local[cols[PP]]
        # the complement couples p and p' through every F state f with
        # entries p <- f (PF) and f <- p' (FP)
        into_f = {}
        for e in FP:
            into_f.setdefault(local[rows[e]], []).append(e)
        terms = [(a, b, local[cols[a]], local[rows[a]], local[cols[b]])
                 for a in PF for b in into_f.get(local[cols[a]], ())]
        e1, e2, ff, sr, sc = (np.array(x, dtype=int) for x in zip(*terms)) if terms else (
            np.zeros(0, int),) * 5
        link = sparse.coo_matrix((np.ones(len(pr) + len(sr)), (np.r_[pr, sr], np.r_[pc, sc])),
                                 shape=(nP, nP))
        n_blocks, label = connected_components(link, directed=False) if nP else (0, None)
        self.blocks = []
        for b in range(n_blocks):
            members = np.nonzero(label == b)[0]
            pos = np.full(nP, -1)
            pos[members] = np.arange(len(members))
            k = len(members)
            mine = label[pr] == b
            sel = label[sr] == b
            self.blocks.append(dict(
                members=members, k=k, pp=PP[mine], pp_flat=pos[pr[mine]] * k + pos[pc[mine]],
                e1=e1[sel], e2=e2[sel], f=ff[sel],
                schur=_summing(pos[sr[sel]] * k + pos[sc[sel]], k * k),
                diag=np.arange(k) * (k + 1)))


def _column_sums(st, Jv, hg, dF):
    """Column sums over ``P`` of the Schur complement on ``P``, shape (|P|, nodes).

    ``M = I - hg J`` has population column sums ``c_j = 1 + hg (rate from j into
    population receivers)`` over the solved states; eliminating ``F`` keeps column
    sums ``c_q + sum_f hg J_fq c_f / d_f``, every term non-negative.
    """
    m_cols = np.zeros((len(st.local), Jv.shape[1]))
    np.add.at(m_cols, st.lost_col, hg * Jv[st.lost])
    c = 1.0 + m_cols
    cF, cP = c[st.F], c[st.P]
    return cP + st.FP_sum @ (hg * Jv[st.FP] * (cF / dF)[st.FP_f])


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
        rate = np.abs(problem.base).max(axis=1, initial=0.0)
        if problem.drives.size:
            rate = rate + np.abs(problem.drives).max(axis=(0, 2))
        extreme = rate * np.diff(z).max(initial=0.0) > STIFF_LIMIT
        if not extreme.any():
            return self._normal(problem, z, reducer)
        # far beyond the contract's stiffness: the exponential is exact for any rate
        final = np.empty(problem.y0.shape)
        reduced, steps = None, 0
        for g, nodes in enumerate((np.nonzero(~extreme)[0], np.nonzero(extreme)[0])):
            if not len(nodes):
                continue
            sub = problem.subset(nodes)
            part = reducer[:, nodes] if reducer is not None else None
            if g:
                traj = ExponentialPropagator().propagate(sub.dense(), z, part)
            else:
                traj = self._normal(sub, z, part)
            final[nodes] = traj.final
            steps = max(steps, traj.steps)
            if traj.reduced is not None:
                reduced = traj.reduced if reduced is None else reduced + traj.reduced
        return Trajectory(z, final, reduced, steps)

    def _normal(self, problem, z, reducer):
        structure = _Structure(problem)
        n = problem.size
        step = max(1, BLOCK_ENTRIES // max(1, len(problem.rows) + problem.states))
        finals, reduced, steps = [], None, 0
        for lo in range(0, n, step):
            idx = slice(lo, min(lo + step, n))
            part = reducer[:, idx] if reducer is not None else None
            final, red, taken = self._block(problem.subset(idx), structure, z, part)
            finals.append(final)
            steps = max(steps, taken)
            if red is not None:
                reduced = red if reduced is None else reduced + red
        return Trajectory(z, np.concatenate(finals), reduced, steps)

    def _block(self, problem, st, z, reducer):
        """Integrate some nodes; returns final states, reduced path and steps taken."""
        base = np.ascontiguousarray(problem.base[:, st.entries].T)
        drives = np.ascontiguousarray(problem.drives[:, :, st.entries].transpose(0, 2, 1))
        pool = [np.empty_like(base) for _ in range(len(ALPHA) + 1)]
        scratch = np.empty_like(base)

        def values(f, slot, with_base=True):
            """Generator entries for profile weights ``f``, written into a reused array."""
            out = pool[slot]
            if with_base:
                out[...] = base
            else:
                out.fill(0.0)
            for w, d in zip(f, drives):
                if w:
                    np.multiply(d, w, out=scratch)
                    out += scratch
            return out

        y = np.ascontiguousarray(problem.y0.T)
        reduced = None
        if reducer is not None:
            reduced = np.empty((len(z), reducer.shape[0], y.shape[0]))
            reduced[0] = reducer @ y.T
        diag_base, diag_drives = base[st.diag], drives[:, st.diag]
        taken = 0
        for j, H in enumerate(np.diff(z)):
            k = self._substeps(problem.profiles, diag_base, diag_drives, z[j], H)
            for z0 in z[j] + H * np.arange(k) / k:
                self._step(problem.profiles, st, values, base, y, z0, H / k)
            taken += k
            if reduced is not None:
                reduced[j + 1] = reducer @ y.T
        return y.T, reduced, taken

    def _step(self, profiles, st, values, base, y, z0, h):
        """One RODAS4 step of every node from ``z0``; updates ``y`` (states, nodes) in place."""
        times = np.unique(z0 + np.array(ALPHA) * h)
        eps = FD_STEP * h
        prof = profiles(np.r_[times, z0 - eps, z0 + eps])
        generator = {t: values(prof[:, i], i) for i, t in enumerate(times)}
        ft = st.full(values((prof[:, -1] - prof[:, -2]) / (2 * eps), len(ALPHA), False), y)
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

    @staticmethod
    def _substeps(profiles, diag_base, diag_drives, z0, h):
        """Equal substeps needed so that no stiff rate changes within one by more than
        ``KAPPA (1/h + rate)``: the Jacobian is frozen at the start of a step, and a
        beam switching on within it would otherwise be treated explicitly."""
        if not diag_drives.size:
            return 1
        f = profiles(z0 + np.array(ALPHA) * h)
        rate = np.abs(diag_base + np.tensordot(f[:, 0], diag_drives, axes=1))
        change = np.tensordot(np.abs(f - f[:, :1]).max(axis=1), np.abs(diag_drives), axes=1)
        worst = float((h * change / (1 + h * rate)).max())
        return max(1, int(np.ceil(worst / KAPPA)))

    @staticmethod
    def _factor(st, Jv, hg):
        """Factor ``M = I - hg J`` (``J`` by its kept entries, (entries, nodes));
        return its solver for right-hand sides of shape (states, nodes)."""
        n = Jv.shape[1]
        dF = np.ones((len(st.F), n))
        dF[st.diag_F_pos] -= hg * Jv[st.diag_F]
        if st.exact:
            column = _column_sums(st, Jv, hg, dF)
        inverses = []
        for b in st.blocks:
            k = b["k"]
            S = np.zeros((k * k, n))
            S[b["pp_flat"]] = -hg * Jv[b["pp"]]
            S[b["diag"]] += 1.0
            if len(b["e1"]):
                S -= b["schur"] @ ((hg * hg) * Jv[b["e1"]] * Jv[b["e2"]] / dF[b["f"]])
            if st.exact:
                # diagonal from the column sum and the (same-signed) off-diagonals, as in
                # Grassmann-Taksar-Heyman elimination: subtracting terms of size h*rate
                # would leave nothing of a unit margin for extremely stiff nodes
                S3 = S.reshape(k, k, n)
                idx = np.arange(k)
                off = S3.sum(axis=0) - S3[idx, idx]
                S3[idx, idx] = column[b["members"]] - off
            inverses.append(np.linalg.inv(S.T.reshape(n, k, k)))

        def solve(rhs):
            x = np.zeros_like(rhs)
            bF = rhs[st.F]
            rP = rhs[st.P] + hg * st.gather_PF(Jv, bF / dF)
            xP = np.empty_like(rP)
            for b, inv in zip(st.blocks, inverses):
                xP[b["members"]] = (inv @ rP[b["members"]].T[:, :, None])[:, :, 0].T
            x[st.P] = xP
            x[st.F] = (bF + hg * st.gather_FP(Jv, xP)) / dF
            if len(st.R):
                x[st.R] = rhs[st.R] + hg * st.gather_RT(Jv, x)
            return x

        return solve

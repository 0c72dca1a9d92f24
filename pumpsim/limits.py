"""The branching-limited transfer: what unlimited power and time would give.

With every beam of the setup at unlimited power, each set of levels joined by
driven lines (a *cluster*: a lower level, its upper level, and whatever else
the same lasers connect) is held in equilibrium with populations in
proportion to the degeneracies ``g`` (the stimulated-emission ratio
``g_i/g_k`` of the rate equations is detailed balance with weights ``g``).
What remains is slow: each cluster decays into others at the
population-weighted sum of its levels' spontaneous rates. With unlimited
time, that continuous-time Markov chain runs to its end. Its long-run limit
is plain absorbing-chain algebra (e.g. J. R. Norris, *Markov Chains*, 1997,
sections 1.3 and 3.5): the probability of ending in each closed class times
that class's stationary distribution. Afterwards, with the light off, the
excited levels decay.

For one driven line ``g -> e`` whose upper level decays to the target with
branching ``b_t``, back to ``g``, and to ``other`` with ``b_o``, this gives
the familiar ``b_t / (b_t + b_o)``; repumps enter as further clusters that
return atoms to the cycle.

"Unlimited time" means long compared with the lifetimes of the levels the
light excites; any other level whose decay is slow on the scale of the atoms'
flight through the setup (``G * flight time < 1``) is taken as stable, so a
metastable target with a tiny listed decay rate is not emptied.
"""

from dataclasses import dataclass

import numpy as np
from scipy.sparse import csr_matrix
from scipy.sparse.csgraph import connected_components

from .basis import LevelBasis
from .model import initial_level_populations, z_range
from .sources import speeds_of


@dataclass(frozen=True)
class BranchingLimit:
    """Where the atoms end at unlimited power and time.

    Parameters
    ----------
    fraction : float
        Final population of the target.
    final : dict
        Level id (and ``other``) -> final population.
    dark : tuple of str
        Levels other than the target and ``other`` that keep atoms: no beam
        drives them out (a repump from them would help).
    slow : tuple of str
        Levels with decays treated as stable (slow on the flight time).
    dark_why : dict or None
        Sublevel mode (:mod:`pumpsim.sublevel_limits`): dark sublevel -> why
        atoms stay there and what would move them.
    """

    fraction: float
    final: dict
    dark: tuple
    slow: tuple
    dark_why: dict = None


def long_run(Q, p0):
    """``lim_{t->inf} exp(Q t) p0`` for a rate generator.

    Parameters
    ----------
    Q : ndarray (n, n)
        ``Q[j, i]`` is the rate from state ``i`` to state ``j``; columns sum to 0.
    p0 : ndarray (n,)
        Initial distribution.

    Returns
    -------
    ndarray (n,)
    """
    Q = np.asarray(Q, dtype=float)
    n = len(Q)
    edges = (Q.T > 0) & ~np.eye(n, dtype=bool)  # edges[i, j]: a rate from i to j
    n_cls, label = connected_components(csr_matrix(edges), directed=True, connection="strong")
    closed = [c for c in range(n_cls)
              if not edges[np.ix_(label == c, label != c)].any()]
    transient = np.nonzero(~np.isin(label, closed))[0]
    out = np.zeros(n)
    for c in closed:
        members = np.nonzero(label == c)[0]
        # stationary distribution of the closed class: Q_cc pi = 0, sum pi = 1
        A = Q[np.ix_(members, members)].copy()
        A[0, :] = 1.0
        rhs = np.zeros(len(members))
        rhs[0] = 1.0
        pi = np.linalg.solve(A, rhs)
        mass = p0[members].sum()
        if len(transient):
            # h: probability that a transient start ends in class c;
            # Q_TT^T h_T = -Q_cT^T 1 (first-step analysis)
            QTT = Q[np.ix_(transient, transient)]
            into = Q[np.ix_(members, transient)].sum(axis=0)
            h = np.linalg.solve(QTT.T, -into)
            mass += p0[transient] @ h
        out[members] += mass * pi
    return out


def flight_time(setup) -> float:
    """Time for an atom at the source's mean speed to cross the integration range, s."""
    start, end = z_range(setup.numerics, setup.beams)
    return (end - start) / speeds_of(setup.source, setup.scheme.mass).mean()


def clusters(n_levels, pairs):
    """Label each level by the cluster that driven ``pairs`` (index tuples) join it to."""
    adj = np.zeros((n_levels, n_levels), dtype=bool)
    for i, k in pairs:
        adj[i, k] = adj[k, i] = True
    return connected_components(csr_matrix(adj), directed=False)[1]


def branching_limit(setup) -> BranchingLimit:
    """Final populations at unlimited power and time of every beam (module docstring).

    Parameters
    ----------
    setup : Setup

    Returns
    -------
    BranchingLimit
        In sublevel mode :func:`pumpsim.sublevel_limits.pumping_limit`'s, where
        dark sublevels set the limit.
    """
    if setup.mode == "sublevel":
        from .sublevel_limits import pumping_limit  # it builds on this module

        return pumping_limit(setup)
    scheme = setup.scheme
    ids = scheme.ids + ("other",)
    n = len(ids)
    D = LevelBasis(scheme).decay_generator()
    rates = -np.diag(D)
    lit = np.zeros(n, dtype=bool)  # upper levels of the beams: these always decay
    lit[[scheme.index(b.upper) for b in setup.beams]] = True
    slow = (rates > 0) & (rates * flight_time(setup) < 1.0) & ~lit
    D[:, slow] = 0.0
    g = np.array([lv.g for lv in scheme.levels] + [1.0])
    p0 = np.append(initial_level_populations(setup), 0.0)
    driven = [(scheme.index(b.lower), scheme.index(b.upper)) for b in setup.beams]
    label = clusters(n, driven)
    m = label.max() + 1
    # within a cluster populations go as g; member -> cluster and back
    member = np.zeros((m, n))
    member[label, np.arange(n)] = 1.0
    spread = (member * g).T / (member @ g)
    Qc = member @ D @ spread  # cluster generator
    p = spread @ long_run(Qc, member @ p0)
    p = long_run(D, p)  # light off: excited levels decay
    p = np.clip(p, 0.0, None)
    final = {lid: float(x) for lid, x in zip(ids, p)}
    drives_out = {b.lower for b in setup.beams}
    dark = tuple(lid for lid, x in final.items()
                 if x > 1e-12 and lid not in (setup.target, "other") and lid not in drives_out)
    return BranchingLimit(final[setup.target], final, dark,
                          tuple(lid for lid, s in zip(ids, slow) if s))

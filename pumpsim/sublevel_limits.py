"""Sublevel mode's limit at unlimited time: where optical pumping ends, dark states included.

Level mode's branching limit saturates every driven line; among sublevels
that is not the question. What caps a sublevel target is where the atoms end
when the light acts for as long as it likes: population collects in states
that no beam can leave (dark by polarization, or in a hyperfine level no beam
is tuned to), and more power does not change that. This module computes that
end state:

- every beam excites each sublevel pair at a rate in proportion to its
  cross-section (pair strength times ``sigma0``), the Lorentzian of its
  detuning for atoms at rest (line width with the laser's) and the beam's peak
  intensity times its passes, over the photon energy: the set beams with
  their set intensity ratios, in the weak-light regime (excited sublevels
  decay long before the next excitation; saturation and Doppler shifts are
  left out, so at high power the ratios move somewhat);
- an excited sublevel decays to completion; where it ends (the branching
  into each ground sublevel, cascades included) comes from the decay
  generator;
- a sublevel excited less than :data:`~pumpsim.sublevel_report.DARK_RELATIVE`
  times as often as the most strongly excited one is dark, as in the run's
  report, and keeps what reaches it (strictly, far off-resonant light would
  empty it after a time no atomic beam offers);
- the resulting chain among the ground sublevels (and ``other``) runs to its
  long-run limit (:func:`pumpsim.limits.long_run`), from the source's
  sublevel populations.

The answer does not depend on the overall power, only on the beams' ratios,
polarizations and detunings: it is the ceiling the dark states set.
"""

import numpy as np

from .basis import SublevelBasis
from .limits import BranchingLimit, flight_time, long_run
from .lines import line
from .model import initial_level_populations
from .sublevel_report import DARK_RELATIVE, NEEDS_POLARIZATION, NEEDS_REPUMP, rest_rates

HELD = 1e-4  # a non-target sublevel holding this much at the end is reported


def excitation_matrix(setup, basis) -> np.ndarray:
    """``X[k, i]``: weak-light excitation rate from state ``i`` to ``k``, 1/s."""
    X = np.zeros((basis.size, basis.size))
    for b in setup.beams:
        cs = basis.couplings(b)
        for c, rate in zip(cs, rest_rates(b, line(setup.scheme, b.lower, b.upper), cs)):
            X[c.upper, c.lower] += rate * b.passes
    return X


def pumping_limit(setup) -> BranchingLimit:
    """Where the atoms end after unlimited time in weak light (module docstring).

    Returns
    -------
    BranchingLimit
        ``fraction``: the target's population; ``final``: the target (under
        ``setup.target``), every other sublevel holding more than
        :data:`HELD`, and ``other``; ``dark``: those sublevels, each with why
        it holds atoms in ``dark_why``.
    """
    basis = SublevelBasis(setup.scheme, setup.magnetic_field)
    D = basis.decay_generator()
    X = excitation_matrix(setup, basis)
    out = X.sum(axis=0)
    X[:, out < DARK_RELATIVE * out.max()] = 0.0  # dark sublevels keep their atoms
    rates = -np.diag(D)
    lit = X.any(axis=1)
    slow = (rates > 0) & (rates * flight_time(setup) < 1.0) & ~lit  # stable on this flight
    D[:, slow] = 0.0
    ends = np.zeros_like(D)  # ends[:, k]: where an atom in k ends by decay alone
    for k in np.nonzero(lit)[0]:
        ends[:, k] = long_run(D, np.eye(len(D))[k])
    Q = ends @ X
    Q[np.diag_indices_from(Q)] -= X.sum(axis=0)
    p0 = long_run(D, basis.initial_state(initial_level_populations(setup)))
    p = np.clip(long_run(Q, p0), 0.0, None)
    target = setup.goal.mask(basis)
    labels = basis.labels
    bright = out.max()
    final, dark, why = {setup.target: float(p[target].sum())}, [], {}
    for s in range(basis.size - 1):
        if target[s] or p[s] <= HELD:
            continue
        final[labels[s]] = float(p[s])
        dark.append(labels[s])
        group = (basis.level_of[:-1] == basis.level_of[s]) & (basis.F[:-1] == basis.F[s])
        unreached = bool((out[:-1][group] < DARK_RELATIVE * bright).all())
        why[labels[s]] = NEEDS_REPUMP if unreached else NEEDS_POLARIZATION
    final["other"] = float(p[-1])
    return BranchingLimit(final[setup.target], final, tuple(dark),
                          tuple(lab for lab, s in zip(labels, slow) if s), why)

"""The contract of a state space.

A basis turns a scheme into states (the last one is always the ``other``
sink), a decay generator between them, and for each laser beam the list of
state pairs it drives. The solver sees only these; a sublevel-resolved basis
replaces the level basis without touching it.
"""

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class Coupling:
    """One driven pair of states.

    Parameters
    ----------
    lower, upper : int
        State indices.
    strength : float
        Absorption cross-section at line centre relative to the line's sigma0.
    ratio : float
        Stimulated emission per atom in ``upper`` relative to absorption per
        atom in ``lower`` (``g_i/g_k`` for whole levels).
    shift : float
        Resonance of this pair relative to the line, Hz (added to the line
        frequency; the atom sees detuning ``delta - shift``).
    """

    lower: int
    upper: int
    strength: float = 1.0
    ratio: float = 1.0
    shift: float = 0.0


class Basis:
    """Base class of state spaces.

    Attributes
    ----------
    labels : tuple of str
        One per state; the last is ``"other"``.
    level_of : ndarray of int
        Level index of each state (``len(scheme.levels)`` for ``other``).
    """

    labels: tuple
    level_of: np.ndarray

    @property
    def size(self) -> int:
        return len(self.labels)

    def decay_generator(self) -> np.ndarray:
        """Spontaneous decay as a rate generator, shape (S, S), 1/s.

        Column ``j`` holds the rates out of state ``j``; columns sum to zero.
        """
        raise NotImplementedError

    def couplings(self, beam) -> tuple:
        """The :class:`Coupling` list a beam drives."""
        raise NotImplementedError

    def initial_state(self, level_populations: np.ndarray) -> np.ndarray:
        """State populations, shape (S,), from level populations (levels, no sink)."""
        raise NotImplementedError

    def to_levels(self, states: np.ndarray) -> np.ndarray:
        """Sum state populations (..., S) into level populations (..., L + 1),
        the last entry being ``other``."""
        out = np.zeros(states.shape[:-1] + (int(self.level_of.max()) + 1,))
        for s, lv in enumerate(self.level_of):
            out[..., lv] += states[..., s]
        return out

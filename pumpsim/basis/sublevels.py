"""Sublevel mode: one state per magnetic sublevel, plus the ``other`` sink.

Each level splits into ``|F, m_F>`` when the scheme gives a nuclear spin,
else into ``|J, m_J>`` (the same algebra with ``I = 0``, ``F = J``). Rates
follow from the fine-structure Einstein ``A`` of each listed decay by the
Wigner-Eckart theorem (e.g. D. A. Steck, *Rubidium 87 D Line Data*, section
on transition matrix elements). With

    X = (2F+1) S_FF' (F 1 F'; m q -m')^2,   q = m' - m,
    S_FF' = (2F'+1)(2J+1) {J J' 1; F' F I}^2,

- spontaneous decay ``|F' m'> -> |F m>`` runs at ``A (g_k/g_i) X``; summed
  over the lower level's sublevels it is ``A`` for every upper sublevel,
  so each decays exactly as its level does in level mode;
- a beam drives ``|F m> -> |F' m'>`` with cross-section
  ``3 w_q X`` times the line's ``sigma0`` (``w_q``: the polarization's share
  of ``Delta m = q``), i.e. ``3 lambda^2/(2 pi) A_pair/gamma`` for the pair;
  stimulated emission per atom in the upper sublevel equals absorption per
  atom in the lower one (equal degeneracies, ratio 1);
- the pair's resonance is shifted by the hyperfine and linear Zeeman shifts
  of both sublevels (``g_F m mu_B B / h``).

For isotropic light (``w_q = 1/3``) the summed absorption rate of every lower
sublevel is the level-mode rate, and evenly filled sublevels stay evenly
filled: level mode is this basis restricted to isotropic states, which the
reduction test checks.
"""

import numpy as np

from ..angular import twice, wigner_3j_squared
from ..hyperfine import (MU_B_HZ_PER_T, f_values, g_F, hyperfine_shift, m_values,
                         reference_offset, strength_factor)
from .base import Basis, Coupling


def half(x: float) -> str:
    """``1.5 -> '3/2'``, ``-2 -> '-2'``."""
    t = twice(x)
    return str(t // 2) if t % 2 == 0 else f"{t}/2"


def signed_half(x: float) -> str:
    return ("+" if x > 0 else "") + half(x)


def sublevel_label(level_id, F, m, nuclear_spin) -> str:
    """``"5S1/2 F=2 m=+2"``, or without hyperfine structure ``"g m=-1/2"``."""
    if nuclear_spin:
        return f"{level_id} F={half(F)} m={signed_half(m)}"
    return f"{level_id} m={signed_half(m)}"


class SublevelBasis(Basis):
    """Magnetic sublevels of every level (see module docstring).

    Parameters
    ----------
    scheme : Scheme
    field : float
        Magnetic field along the quantization axis, T.

    Attributes
    ----------
    F, m : ndarray
        Quantum numbers of each state (``F = J`` without hyperfine structure);
        ``nan`` for ``other``.
    shift : ndarray
        Hyperfine plus linear Zeeman shift of each state from its level's
        centroid, Hz.
    """

    def __init__(self, scheme, field=0.0):
        self.scheme, self.field = scheme, float(field)
        I = scheme.nuclear_spin
        level_of, F_of, m_of, shift, labels = [], [], [], [], []
        for k, lv in enumerate(scheme.levels):
            for F in f_values(lv.J, I):
                hfs = hyperfine_shift(F, lv.J, I, lv.hfs_A, lv.hfs_B)
                gF = g_F(F, lv.J, I, lv.g_J or 0.0)
                for m in m_values(F):
                    level_of.append(k)
                    F_of.append(F)
                    m_of.append(m)
                    shift.append(hfs + gF * m * MU_B_HZ_PER_T * self.field)
                    labels.append(sublevel_label(lv.id, F, m, I))
        self.labels = tuple(labels) + ("other",)
        self.level_of = np.array(level_of + [len(scheme.levels)])
        self.F = np.array(F_of + [np.nan])
        self.m = np.array(m_of + [np.nan])
        self.shift = np.array(shift + [0.0])
        n_levels = len(scheme.levels) + 1
        self._summing = np.zeros((self.size, n_levels))
        self._summing[np.arange(self.size), self.level_of] = 1.0
        self._couplings = {}

    def states_of(self, level_index: int) -> np.ndarray:
        """Indices of one level's sublevels."""
        return np.nonzero(self.level_of == level_index)[0]

    def _pairs(self, lower: int, upper: int):
        """``(i, k, q, X)`` for every dipole-allowed sublevel pair of a line."""
        s, I = self.scheme, self.scheme.nuclear_spin
        J, Jp = s.levels[lower].J, s.levels[upper].J
        for i in self.states_of(lower):
            F, m = self.F[i], self.m[i]
            for k in self.states_of(upper):
                Fp, mp = self.F[k], self.m[k]
                q = mp - m
                if abs(q) > 1 or abs(F - Fp) > 1:
                    continue
                x = (twice(F) + 1) * strength_factor(J, Jp, F, Fp, I) * wigner_3j_squared(
                    F, 1, Fp, m, q, -mp)
                if x:
                    yield i, k, int(q), float(x)

    def decay_generator(self):
        s = self.scheme
        n = self.size
        G = np.zeros((n, n))
        for k, lv in enumerate(s.levels):
            ups = self.states_of(k)
            G[ups, ups] = -s.total_rate(lv.id)
            G[n - 1, ups] += s.unlisted_rate(lv.id)
            for d in s.decays_from(lv.id):
                lo = s.index(d.lower)
                ratio = lv.g / s.levels[lo].g
                for i, j, _, x in self._pairs(lo, k):
                    G[i, j] += d.rate * ratio * x
        return G

    def couplings(self, beam):
        key = (beam.lower, beam.upper, beam.polarization, beam.reference_F)
        if key not in self._couplings:
            s = self.scheme
            lo, up = s.index(beam.lower), s.index(beam.upper)
            ref = reference_offset(s, beam)
            out = []
            for i, k, q, x in self._pairs(lo, up):
                w = beam.polarization.weight(q)
                if w > 0:
                    out.append(Coupling(int(i), int(k), 3.0 * w * x, 1.0,
                                        self.shift[k] - self.shift[i] - ref))
            self._couplings[key] = tuple(out)
        return self._couplings[key]

    def initial_state(self, level_populations):
        """Each level's population shared evenly by its sublevels (an unpolarized source)."""
        p = np.asarray(level_populations, dtype=float)
        counts = np.bincount(self.level_of[:-1], minlength=len(p))
        return np.append(p[self.level_of[:-1]] / counts[self.level_of[:-1]], 0.0)

    def to_levels(self, states):
        return np.asarray(states) @ self._summing

"""The density-matrix model as the engine's batched linear problem along z.

:class:`CoherentModel` is a :class:`~pumpsim.model.RateModel` whose state
holds coherences too (layout in :mod:`.liouvillian`), so the ensemble
average, the grid, the outputs (populations, photons per pass, deflection)
and the sublevel report of the rate model apply unchanged.

Same physics inputs as the rate model:

- Rabi frequency of a pair: ``Omega^2 = strength sigma0 gamma I / (hbar omega)``
  with the rate model's coupling strength and the line's ``sigma0 gamma``
  (independent of the laser width). Where the optical coherence is damped
  fast (rate ``gamma/2``) this gives back the rate model's
  ``sigma0 strength I/(hbar omega) / (1 + (2 Delta/gamma)^2)``;
- detunings: laser, hyperfine and Zeeman shifts as in the rate model, the
  Doppler shift per beam; a beam's passes are one field of the summed
  intensity at their mean Doppler shift (zero for an even number of passes
  across the atomic beam), their photons shared equally; the rate model
  keeps them apart, which matters only when the passes' Doppler shifts differ
  by a line width;
- beam profiles along z and across (``along``, ``across``): the field goes as
  the square root of the intensity, so the drive terms' profiles are
  ``sqrt(along(z))``.

What a static Hamiltonian cannot hold enters as the rate model's own terms
(profile ``along(z)``): couplings of a pair by a second laser, far from its
resonance, and in level mode the part of stimulated emission (or
absorption) that differs between the two directions when the levels'
degeneracies differ (``ratio = g_i/g_k``). Whole levels are one state each,
so only ``min(1, ratio)`` of the coupling is coherent; with strongly damped
optical coherences the sum is the level-mode rate equations.
"""

import math

import numpy as np

from ..model import RateModel
from ..solvers.base import LinearProblem
from .frame import field_scale
from .liouvillian import Liouvillian


class CoherentModel(RateModel):
    """Density-matrix model of a setup (see module docstring).

    Parameters
    ----------
    setup : Setup
    basis : Basis, optional
    sublevel_coherences : bool
        ``False`` drops coherences within a level (see :class:`.Liouvillian`).
    """

    def __init__(self, setup, basis=None, sublevel_coherences=True):
        super().__init__(setup, basis)
        S, T = self.n_states, len(self.terms)
        self.liouvillian = L = Liouvillian(setup, self.basis, self.terms, self.decay,
                                          sublevel_coherences)
        self.size = L.size
        initial = np.zeros(self.size)
        initial[: S + T] = self.initial
        self.initial = initial
        beams = setup.beams
        self.field_scale = np.array([field_scale(setup.scheme, b) for b in beams])
        # mean wave-vector direction of the passes (+k, -k, +k, ...)
        self.direction = np.array([(b.passes % 2) / b.passes for b in beams])
        kept = {(e.beam, e.coupling.lower, e.coupling.upper): min(1.0, e.coupling.ratio)
                for e in L.frame.edges}
        self._coherent_share = [
            [(c.lower, c.upper, kept.get((i, c.lower, c.upper), 0.0))
             for c in self.basis.couplings(beams[i])] for i, _ in self.terms]
        self.has_rate_terms = bool(L.frame.incoherent) or any(
            0 < share < 1 for shares in self._coherent_share for _, _, share in shares)

    def peak_rabi(self, y0) -> np.ndarray:
        """Largest Rabi frequency of each beam at offsets ``y0``, rad/s, shape (B, n)."""
        amp = np.zeros(len(self.setup.beams))
        for e in self.liouvillian.frame.edges:
            amp[e.beam] = max(amp[e.beam], abs(e.amplitude))
        return (amp * self.field_scale)[:, None] * np.sqrt(
            np.stack([s.across(np.asarray(y0, dtype=float)) for s in self.shapes]))

    def drive_profiles(self, z):
        """Profiles of the problem's drive terms: ``sqrt(along)`` per beam, then, when
        rate terms are present, the rate model's ``along`` per pass."""
        z = np.asarray(z, dtype=float)
        field = [np.sqrt(s.along(z)) for s in self.shapes]
        parts = [np.stack(field)] if field else [np.zeros((0, z.size))]
        if self.has_rate_terms:
            parts.append(self.profiles(z))
        return np.concatenate(parts)

    def problem(self, v, a, y0) -> LinearProblem:
        v, a, y0 = (np.asarray(x, dtype=float) for x in (v, a, y0))
        L, m = self.liouvillian, self.size
        beams = self.setup.beams
        inv_v = 1.0 / v[:, None, None]
        doppler = np.array([d * ln.k * v * (math.cos(b.angle) + a * math.sin(b.angle))
                            for b, ln, d in zip(beams, self.lines, self.direction)])
        base = L.static[None] + np.tensordot(doppler.T, L.doppler, axes=1) if beams else \
            np.broadcast_to(L.static, (v.size, m, m)).copy()
        base *= inv_v
        amp = self.field_scale[:, None] * np.sqrt(
            np.stack([s.across(y0) for s in self.shapes])) if beams else np.zeros((0, v.size))
        drives = amp[:, :, None, None] * L.drive[:, None] * inv_v[None]
        if self.has_rate_terms:
            drives = np.concatenate([drives, self._rate_terms(v, a, y0)])
        y = np.broadcast_to(self.initial, (v.size, m)).copy()
        return LinearProblem(base, drives, self.drive_profiles, y, np.arange(m) < self.n_states)

    def _rate_terms(self, v, a, y0):
        """The rate model's drives less their coherent share, per pass, shape (T, n, m, m)."""
        # the rate model's problem in this model's coordinates (its first S + T)
        rates = RateModel.problem(self, v, a, y0).drives
        S = self.n_states
        for t, shares in enumerate(self._coherent_share):
            acc = S + t
            for lo, up, share in shares:
                if share:
                    sym = rates[t, :, up, lo] * share
                    for (row, col), sign in (((up, lo), 1), ((lo, lo), -1), ((lo, up), 1),
                                             ((up, up), -1), ((acc, lo), 1), ((acc, up), -1)):
                        rates[t, :, row, col] -= sign * sym
        # a state emptied incoherently at rate R loses its coherences at R/2, as under a
        # Lindblad jump sqrt(R)|to><from| (which keeps the density matrix positive)
        L = self.liouvillian
        if L.pairs:
            i, j = np.array(L.pairs).T
            k = np.array([L.index[p] for p in L.pairs])
            out = -np.diagonal(rates[:, :, :S, :S], axis1=2, axis2=3)
            damp = 0.5 * (out[:, :, i] + out[:, :, j])
            rates[:, :, k, k] -= damp
            rates[:, :, k + 1, k + 1] -= damp
        return rates

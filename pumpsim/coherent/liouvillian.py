"""The master equation in real, reduced coordinates.

``d rho/dt = -i [H, rho] + sum_L (L rho L^+ - {L^+ L, rho}/2) - (dephasing)``
(Lindblad form, e.g. H.-P. Breuer and F. Petruccione, *The Theory of Open
Quantum Systems*, 2002), with

- ``H`` diagonal in the frame of :mod:`.frame` plus ``Omega/2 (|e><g| + h.c.)``
  for every coherently driven pair;
- one jump operator ``L`` per upper hyperfine level ``F'``, lower hyperfine
  level ``F`` and polarization ``q`` of every listed decay, with the signed
  amplitudes whose squares are the rate model's sublevel decay rates (so
  Zeeman coherences pass down to the lower level where the dipole selection
  rules let them); one per state into ``other`` and per pair of whole levels
  in level mode. Decay never passes a coherence into one that rotates
  differently in the frame (secular approximation: e.g. excited Zeeman
  coherences do not feed hyperfine coherences of the ground state);
- laser phase noise as pure dephasing (:func:`.frame.noise_sources`).

Coordinates: the populations of the ``S`` states first (the rate model's
layout), then ``T`` photon counters (one per pass, as in the rate model),
then the real and imaginary parts of every coherence ``rho_ij`` (``i < j``)
that can become non-zero from a diagonal start. Only those are kept: a
closure over the couplings finds them, which is where the block structure
pays (sigma+ pump and repump on Rb-87 D1: 10 to 18 of the 136 coherences
between its 16 sublevels and the sink).
"""

import numpy as np

from ..basis import SublevelBasis
from .frame import Frame, dipole_sign, noise_sources


class Liouvillian:
    """Pieces of the generator, each a dense ``(m, m)`` array in 1/s.

    Parameters
    ----------
    setup : Setup
    basis : Basis
    terms : list of (beam index, direction)
        The rate model's terms (passes); one photon counter each.
    decay : ndarray (S, S)
        The basis's decay generator.
    sublevel_coherences : bool
        Keep coherences between states of one level (Zeeman, hyperfine and
        Raman coherences). ``False`` drops them, leaving optical coherences
        only: the comparison that tells coherent trapping from the rest.

    Attributes
    ----------
    frame : Frame
    pairs : list of (i, j)
        Coherences kept, ``i < j``; the real part of pair ``p`` is coordinate
        ``S + T + 2 p``, its imaginary part the next.
    static : ndarray (m, m)
        Frame energies at rest, decay, dephasing.
    doppler : ndarray (B, m, m)
        Generator per unit (rad/s) Doppler shift of each beam's frequency.
    drive : ndarray (B, m, m)
        Generator per beam at unit field scale (Rabi frequency ``amplitude``
        of each edge), including its photon counters.
    """

    def __init__(self, setup, basis, terms, decay, sublevel_coherences=True):
        self.frame = fr = Frame(setup, basis)
        S, B, T = basis.size, len(setup.beams), len(terms)
        self.S, self.T = S, T
        self.level_of = basis.level_of
        self.sublevel_coherences = sublevel_coherences
        G = decay
        self.out_rate = -np.diag(G)
        self.jumps = _jump_members(basis, G)
        self.noise = [(D, w) for D, w in noise_sources(setup.beams)]
        self.H = np.zeros((B, S, S))
        for e in fr.edges:
            lo, up = e.coupling.lower, e.coupling.upper
            self.H[e.beam, up, lo] = self.H[e.beam, lo, up] = 0.5 * e.amplitude
        self.pairs = self._closure()
        self.index = {p: S + T + 2 * k for k, p in enumerate(self.pairs)}
        self.size = S + T + 2 * len(self.pairs)
        self.static = self._assemble(self._static)
        self.doppler = np.stack([self._assemble(lambda a, b, k=k: self._diagonal(
            a, b, -1j * fr.potential[:, k])) for k in range(B)]) if B else np.zeros((0,) * 3)
        self.drive = np.stack([self._assemble(lambda a, b, k=k: self._commutator(
            a, b, self.H[k])) for k in range(B)]) if B else np.zeros((0,) * 3)
        passes = np.array([setup.beams[i].passes for i, _ in terms])
        for t, (i, _) in enumerate(terms):
            for e in fr.edges:
                if e.beam == i:
                    lo, up = e.coupling.lower, e.coupling.upper
                    col = self.index[(min(lo, up), max(lo, up))] + 1
                    # d rho_ee/dt = Omega Im rho_ge: net absorption, shared by the passes
                    self.drive[i, S + t, col] += e.amplitude / passes[t] * (1 if lo < up else -1)

    # -- derivative of one matrix unit |a><b| ---------------------------------
    def _allowed(self, i, j):
        c = self.frame.component
        return i == j or (c[i] == c[j] and (self.sublevel_coherences
                                             or self.level_of[i] != self.level_of[j]))

    @staticmethod
    def _diagonal(a, b, values):
        """``-i [diag, |a><b|]`` for ``values = -i diag``: one entry."""
        return {(a, b): values[a] - values[b]}

    @staticmethod
    def _commutator(a, b, H):
        """``-i [H, |a><b|]`` as ``{(row, col): value}``."""
        out = {}
        for k in np.nonzero(H[:, a])[0]:
            out[(k, b)] = out.get((k, b), 0) - 1j * H[k, a]
        for k in np.nonzero(H[b, :])[0]:
            out[(a, k)] = out.get((a, k), 0) + 1j * H[b, k]
        return out

    def _static(self, a, b):
        """Frame energies, decay (jumps and loss) and dephasing acting on ``|a><b|``."""
        fr = self.frame
        value = -1j * (fr.energy[a] - fr.energy[b]) - 0.5 * (self.out_rate[a] + self.out_rate[b])
        dp = fr.potential[a] - fr.potential[b]
        value -= sum(D * float(w @ dp) ** 2 for D, w in self.noise)
        out = {(a, b): value}
        for members in self.jumps:
            for g, amp_a in members.get(a, ()):
                for h, amp_b in members.get(b, ()):
                    if fr.same_frame(g, h, a, b):
                        out[(g, h)] = out.get((g, h), 0) + amp_a * amp_b
        return out

    def _everything(self, a, b):
        out = self._static(a, b)
        for H in self.H:
            for key, v in self._commutator(a, b, H).items():
                out[key] = out.get(key, 0) + v
        return out

    # -- which coherences, and the real generator -------------------------------
    def _closure(self):
        """Coherences reachable from a diagonal density matrix."""
        S = self.S
        seen, queue = set(), [(s, s) for s in range(S)]
        done = set(queue)
        while queue:
            a, b = queue.pop()
            for ab in ((a, b), (b, a)):
                for (x, y), v in self._everything(*ab).items():
                    key = (min(x, y), max(x, y))
                    if v != 0 and key not in done and self._allowed(*key):
                        done.add(key)
                        queue.append(key)
                        if x != y:
                            seen.add(key)
        return sorted(seen)

    def _assemble(self, derivative):
        """Real ``(m, m)`` generator of a map given on matrix units."""
        M = np.zeros((self.size, self.size))
        columns = [(s, ((s, s, 1.0),)) for s in range(self.S)]
        for (i, j), k in self.index.items():
            columns.append((k, ((i, j, 1.0), (j, i, 1.0))))
            columns.append((k + 1, ((i, j, 1j), (j, i, -1j))))
        for col, units in columns:
            total = {}
            for a, b, c in units:
                for key, v in derivative(a, b).items():
                    total[key] = total.get(key, 0) + c * v
            for (x, y), v in total.items():
                if x == y:
                    M[x, col] += v.real
                elif x < y and (x, y) in self.index:
                    r = self.index[(x, y)]
                    M[r, col] += v.real
                    M[r + 1, col] += v.imag
        return M


def _jump_members(basis, G):
    """Jump operators as ``[{upper: [(lower, amplitude), ...]}, ...]`` (see module
    docstring); ``amplitude**2`` is the decay generator's rate."""
    S = basis.size
    ops = {}
    sub = isinstance(basis, SublevelBasis)
    for e in range(S):
        for g in range(S):
            if g == e or G[g, e] <= 0:
                continue
            if sub and g != S - 1:
                key = (basis.level_of[e], basis.level_of[g], basis.F[e], basis.F[g],
                       basis.m[g] - basis.m[e])
                amp = dipole_sign(basis, g, e) * np.sqrt(G[g, e])
            else:
                key, amp = (e, g), np.sqrt(G[g, e])
            ops.setdefault(key, {}).setdefault(e, []).append((g, float(amp)))
    return list(ops.values())

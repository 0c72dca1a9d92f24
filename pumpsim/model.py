"""The rate model of a setup: everything that does not depend on the ensemble nodes.

:class:`RateModel` turns a setup and a basis into the batched
:class:`~pumpsim.solvers.base.LinearProblem` for any set of nodes
``(v, a, y0)``, places the integration grid, and turns final states into the
reported per-node quantities (level populations, photons, deflection).
All formulas are those of the physics contract (``model.md``).
"""

import math

import numpy as np

from . import constants as K
from .basis import basis_for
from .beam_shapes import shape_of
from .lines import line
from .solvers.base import LinearProblem

GAP_COARSENING = 4.0  # steps outside every beam are this much longer (decay only: exact)
# Decay-only stretches are integrated exactly whatever their steps, so their step count is
# capped: the cap only sets how finely populations are sampled there for plots.
GAP_MAX_STEPS = 64


def initial_level_populations(setup) -> np.ndarray:
    """Initial population of each level: Boltzmann ``g exp(-E/kT)`` or the explicit table."""
    scheme = setup.scheme
    if setup.source.initial == "thermal":
        kT = K.kB * setup.source.temperature
        e = np.array([lv.energy for lv in scheme.levels])
        g = np.array([lv.g for lv in scheme.levels])
        p = g * np.exp(-(e - e.min()) / kT)
        return p / p.sum()
    p = np.zeros(len(scheme.levels))
    for lid, frac in setup.source.initial:
        p[scheme.index(lid)] = frac
    return p


def z_range(numerics, beams) -> tuple:
    """Integration range along z, m: the setup's own, else the beams' extents."""
    shapes = [shape_of(b) for b in beams]
    start = numerics.start if numerics.start is not None else min(s.extent[0] for s in shapes)
    end = numerics.end if numerics.end is not None else max(s.extent[1] for s in shapes)
    return start, end


class RateModel:
    """Node-independent part of the rate equations.

    Parameters
    ----------
    setup : Setup
    basis : Basis, optional
        State space; by default the one the setup's ``mode`` names.
    """

    def __init__(self, setup, basis=None):
        self.setup = setup
        self.basis = basis if basis is not None else basis_for(setup)
        self.decay = self.basis.decay_generator()
        self.shapes = [shape_of(b) for b in setup.beams]
        self.lines = [line(setup.scheme, b.lower, b.upper) for b in setup.beams]
        # one term per pass; the wave vector alternates k, -k, k, ...
        self.terms = [(i, 1.0 if p % 2 == 0 else -1.0)
                      for i, b in enumerate(setup.beams) for p in range(b.passes)]
        self.n_states = self.basis.size
        self.size = self.n_states + len(self.terms)
        self.initial = np.zeros(self.size)
        self.initial[: self.n_states] = self.basis.initial_state(initial_level_populations(setup))
        self.z_start, self.z_end = z_range(setup.numerics, setup.beams)

    def profiles(self, z):
        """Relative intensity of every term at positions ``z``, shape (T, len(z))."""
        z = np.asarray(z, dtype=float)
        if not self.terms:
            return np.zeros((0, z.size))
        along = [s.along(z) for s in self.shapes]
        return np.stack([along[i] for i, _ in self.terms])

    def detuning(self, term, coupling, v, a):
        """Angular detuning seen by atoms of speed ``v`` and angle ``a``, rad/s."""
        i, sign = self.terms[term]
        b, ln = self.setup.beams[i], self.lines[i]
        return (2 * math.pi * (b.detuning - coupling.shift)
                - sign * ln.k * v * (math.cos(b.angle) + a * math.sin(b.angle)))

    def problem(self, v, a, y0) -> LinearProblem:
        """The batched linear problem for nodes with speeds ``v`` (m/s),
        angles ``a`` (rad) and offsets ``y0`` (m)."""
        v, a, y0 = (np.asarray(x, dtype=float) for x in (v, a, y0))
        n, S, m = v.size, self.n_states, self.size
        base = np.zeros((n, m, m))
        base[:, :S, :S] = self.decay[None] / v[:, None, None]
        drives = np.zeros((len(self.terms), n, m, m))
        for t, (i, _) in enumerate(self.terms):
            b, ln, shape = self.setup.beams[i], self.lines[i], self.shapes[i]
            gamma = ln.gamma(b.linewidth)
            flux = shape.peak_intensity * shape.across(y0) / (K.hbar * ln.omega * v)
            acc = S + t
            for c in self.basis.couplings(b):
                D = self.detuning(t, c, v, a)
                rate = ln.sigma0(b.linewidth) * c.strength / (1 + (2 * D / gamma) ** 2) * flux
                lo, up, r = c.lower, c.upper, c.ratio
                drives[t, :, up, lo] += rate
                drives[t, :, lo, lo] -= rate
                drives[t, :, lo, up] += rate * r
                drives[t, :, up, up] -= rate * r
                drives[t, :, acc, lo] += rate
                drives[t, :, acc, up] -= rate * r
        y = np.broadcast_to(self.initial, (n, m)).copy()
        return LinearProblem(base, drives, self.profiles, y, np.arange(m) < S)

    def grid(self, per_waist: float) -> np.ndarray:
        """Integration grid with ``per_waist`` steps per projected waist
        ``w_a/sin(theta)`` inside the beams, coarser between them.

        The range is cut at every beam's extent; each piece is stepped by the
        narrowest beam present there, so that a narrow beam inside a wide one
        sets the step only within its own extent.
        """
        lo, hi = self.z_start, self.z_end
        spans = [(max(s.extent[0], lo), min(s.extent[1], hi),
                  s.beam.waist / math.sin(s.beam.angle)) for s in self.shapes]
        spans = [s for s in spans if s[1] > s[0]]
        wmax = max((w for _, _, w in spans), default=(hi - lo) / 8)
        cuts = np.unique([lo, hi] + [x for a, b, _ in spans for x in (a, b)])
        points = [lo]
        for start, end in zip(cuts[:-1], cuts[1:]):
            present = [w for a, b, w in spans if a <= start and b >= end]
            step, cap = ((min(present), math.inf) if present else
                         (GAP_COARSENING * wmax, GAP_MAX_STEPS))
            k = max(1, min(cap, math.ceil((end - start) / step * per_waist)))
            points.extend(np.linspace(start, end, k + 1)[1:])
        return np.unique(np.array(points))

    def outputs(self, v, final):
        """Per-node results from final states.

        Returns
        -------
        levels : ndarray (n, L + 1)
            Level populations, last column ``other``.
        photons : ndarray (n, B)
            Net absorbed photons per beam.
        deflection : ndarray (n, B)
            Recoil deflection per beam, rad, signed along +x.
        """
        S, B = self.n_states, len(self.setup.beams)
        levels = self.basis.to_levels(final[:, :S])
        photons = np.zeros((len(v), B))
        deflection = np.zeros((len(v), B))
        for t, (i, sign) in enumerate(self.terms):
            b, ln = self.setup.beams[i], self.lines[i]
            p = final[:, S + t]
            photons[:, i] += p
            deflection[:, i] += sign * p * K.hbar * ln.k * math.sin(b.angle) / (
                self.setup.scheme.mass * np.asarray(v))
        return levels, photons, deflection

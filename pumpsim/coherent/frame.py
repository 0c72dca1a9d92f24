"""Which laser drives which pair, the rotating frame, and the lasers' phase noise.

Rotating frame. Each state ``s`` is given a frame frequency
``E_level(s)/hbar + sum_b p_s[b] w_b``, with ``w_b`` the frequency of laser
``b`` from its line's centroid and ``p_s`` a vector of whole numbers (one per
beam). A pair ``lower -> upper`` driven by beam ``b`` needs
``p_upper - p_lower = e_b``; then, in the rotating-wave approximation, its
coupling does not depend on time and the state's energy in the frame is
``2 pi shift_s - sum_b p_s[b] w_b`` (``shift_s``: hyperfine and Zeeman shift
from the level centroid, as in the rate model).

Pairs are taken most resonant first. A pair that a second beam also
drives, or whose beam would contradict the frame already built (a loop of
lasers whose frequencies do not close), cannot be held by a static
Hamiltonian: such couplings, always far from the resonance of the pair
(another laser's hyperfine component), are kept as rate-equation terms
instead (see :mod:`.model`). So are couplings detuned by more than
``FAR_OFF`` times the sum of their optical damping ``gamma/2``, peak Rabi
frequency and largest Doppler shift: their coherence follows the field
adiabatically, which is the rate equations' own assumption, and leaving
them out of the Liouvillian keeps it small and slowly rotating (for Rb-87
D1, F' = 1 under light tuned to F' = 2). Their light shift, of relative
size ``1/FAR_OFF`` of the Rabi frequency, is neglected. States that no beam connects each form their
own frame component; coherences between components are dropped (they
rotate at optical or hyperfine frequencies).

Laser line width. Each laser's phase diffuses (a Lorentzian line of FWHM
``linewidth`` gives the optical coherence a decay rate ``pi linewidth``).
Beams sharing a ``phase_group`` (sidebands of one laser, phase-locked
lasers) share a common phase noise, at the group's narrowest line width;
each beam adds its own noise for the rest of its width. A coherence
``rho_ij`` decays at ``sum_sources D (c . (p_i - p_j))^2``: optical
coherences at ``pi linewidth``, Raman coherences between two beams of one
group not at all, and between unrelated beams at ``pi`` times the sum of
their widths.
"""

import math
from dataclasses import dataclass

import numpy as np

from .. import constants as K
from ..angular import twice, wigner_3j, wigner_6j
from ..basis import SublevelBasis
from ..beam_shapes import shape_of
from ..errors import InputError
from ..hyperfine import reference_offset
from ..lines import line
from ..sources import speeds_of

FAR_OFF = 30.0


@dataclass(frozen=True)
class Edge:
    """One pair driven coherently.

    Parameters
    ----------
    beam : int
    coupling : Coupling
        The rate model's coupling (strength, ratio, shift).
    amplitude : float
        Signed Rabi frequency at unit field scale: ``sign sqrt(strength min(1, ratio))``.
    """

    beam: int
    coupling: object
    amplitude: float


def dipole_sign(basis, g, e) -> float:
    """Sign of ``<g| r_q |e>`` for a lower state ``g`` and an upper state ``e``.

    Sublevels follow D. A. Steck, *Rubidium 87 D Line Data*, eqs. (36) and
    (38): ``<F m| r_q |F' m'>`` carries ``(-1)^(F'-1+m) (F' 1 F; m' q -m)``
    and ``<F||r||F'>`` carries ``(-1)^(F'+J+1+I) {J J' 1; F' F I}``. Whole
    levels have one state each: +1.
    """
    if not isinstance(basis, SublevelBasis):
        return 1.0
    s = basis.scheme
    I = s.nuclear_spin
    J, Jp = s.levels[basis.level_of[g]].J, s.levels[basis.level_of[e]].J
    F, m, Fp, mp = basis.F[g], basis.m[g], basis.F[e], basis.m[e]
    value = wigner_3j(Fp, 1, F, mp, m - mp, -m) * wigner_6j(J, Jp, 1, Fp, F, I)
    odd = (twice(2 * Fp + m + J + I) // 2) % 2
    return math.copysign(1.0, value) * (-1.0 if odd else 1.0)


def polarization_sign(polarization, q) -> float:
    """Sign of the field's spherical component ``q``: linear light at angle ``a``
    to the axis is ``cos a e_0 + sin a (e_-1 - e_+1)/sqrt(2)`` (the x axis in
    spherical components); the other named polarizations have one component."""
    return -1.0 if polarization.kind == "linear" and q == 1 else 1.0


def field_scale(scheme, beam) -> float:
    """Rabi frequency of a unit-strength pair at the beam's peak, all passes together,
    rad/s: ``Omega^2 = passes I sigma0 gamma / (hbar omega)`` (see :mod:`.model`)."""
    ln = line(scheme, beam.lower, beam.upper)
    peak = shape_of(beam).peak_intensity
    return math.sqrt(beam.passes * peak * ln.sigma0() * ln.gamma() / (K.hbar * ln.omega))


def largest_doppler(setup, beam) -> float:
    """Largest Doppler shift of a beam over the source's speeds and 4 rms angles, rad/s."""
    lo, hi = speeds_of(setup.source, setup.scheme.mass).support()
    a = 4.0 * setup.source.divergence_rms
    k = line(setup.scheme, beam.lower, beam.upper).k
    return k * hi * (abs(math.cos(beam.angle)) + a * math.sin(beam.angle))


def laser_offset(scheme, beam) -> float:
    """Laser frequency from its line's centroid, Hz."""
    return beam.detuning + reference_offset(scheme, beam)


class Frame:
    """Driven pairs, frame components and potentials (see module docstring).

    Parameters
    ----------
    setup : Setup
    basis : Basis

    Attributes
    ----------
    edges : list of Edge
        Couplings held coherently.
    incoherent : list of (beam, Coupling)
        Couplings left to rate terms (a second laser on a pair, or one the
        frame cannot hold).
    component : ndarray of int (S,)
    potential : ndarray of int (S, B)
    energy : ndarray (S,)
        State energies in the frame at rest (no Doppler shift), rad/s.
    """

    def __init__(self, setup, basis):
        S, B = basis.size, len(setup.beams)
        scheme = setup.scheme
        sublevels = isinstance(basis, SublevelBasis)
        candidates, self.incoherent = [], []
        for b, beam in enumerate(setup.beams):
            if sublevels and beam.polarization.kind == "unpolarized" and basis.couplings(beam):
                raise InputError(
                    "the density-matrix model needs a polarization (isotropic light has no "
                    "single field to put in a Hamiltonian): pi, sigma+, sigma- or "
                    "{ linear_deg = ... }", setup.path, f"beam '{beam.name}'", "polarization")
            ln = line(scheme, beam.lower, beam.upper)
            scale = field_scale(scheme, beam)
            slack = largest_doppler(setup, beam)
            for c in basis.couplings(beam):
                detuning = 2 * math.pi * abs(beam.detuning - c.shift)
                width = 0.5 * ln.gamma(beam.linewidth) + scale * math.sqrt(c.strength) + slack
                if detuning > FAR_OFF * width:
                    self.incoherent.append((b, c))
                else:
                    candidates.append((detuning, b, c))
        candidates.sort(key=lambda x: x[0])
        comp = -np.ones(S, dtype=int)
        pot = np.zeros((S, B), dtype=int)
        driven, self.edges = set(), []
        fresh = 0
        for _, b, c in candidates:
            lo, up = c.lower, c.upper
            unit = np.zeros(B, dtype=int)
            unit[b] = 1
            if (lo, up) in driven:
                self.incoherent.append((b, c))
                continue
            if comp[lo] < 0 and comp[up] < 0:
                comp[lo] = comp[up] = fresh
                fresh += 1
                pot[up] = unit
            elif comp[up] < 0:
                comp[up], pot[up] = comp[lo], pot[lo] + unit
            elif comp[lo] < 0:
                comp[lo], pot[lo] = comp[up], pot[up] - unit
            elif comp[lo] != comp[up]:
                members = comp == comp[up]
                pot[members] += pot[lo] + unit - pot[up]
                comp[members] = comp[lo]
            elif (pot[up] - pot[lo] != unit).any():
                self.incoherent.append((b, c))
                continue
            driven.add((lo, up))
            q = 0 if not sublevels else int(round(basis.m[up] - basis.m[lo]))
            sign = dipole_sign(basis, lo, up) * polarization_sign(setup.beams[b].polarization, q)
            self.edges.append(Edge(b, c, sign * math.sqrt(c.strength * min(1.0, c.ratio))))
        for s in np.nonzero(comp < 0)[0]:
            comp[s] = fresh
            fresh += 1
        self.component, self.potential = comp, pot
        shift = basis.shift if sublevels else np.zeros(S)
        offsets = np.array([laser_offset(scheme, b) for b in setup.beams]).reshape(B)
        energy = 2 * math.pi * (shift - pot @ offsets)
        # each component's frame is fixed only up to a common frequency (no coherence
        # links components): centre it, so that nothing in the frame rotates needlessly
        for k in range(fresh):
            members = comp == k
            if members.any():  # a component number can be left unused by a merge above
                energy[members] -= energy[members].mean()
        self.energy = energy

    def same_frame(self, i, j, k, l) -> bool:
        """Whether ``rho_ij`` and ``rho_kl`` rotate alike in the frame (so that decay
        may pass one into the other: the secular approximation)."""
        c = self.component
        return (c[i] == c[j] and c[k] == c[l]
                and bool((self.potential[i] - self.potential[j]
                          == self.potential[k] - self.potential[l]).all()))


def noise_sources(beams) -> list:
    """Phase-noise sources as ``(D, weights)``: diffusion rate (1/s) and the
    beams whose phase it moves (see module docstring)."""
    B = len(beams)
    groups = {}
    for b, beam in enumerate(beams):
        groups.setdefault(beam.phase_group or ("", b), []).append(b)
    out = []
    for members in groups.values():
        common = min(beams[b].linewidth for b in members)
        w = np.zeros(B)
        w[members] = 1.0
        if common > 0:
            out.append((math.pi * common, w))
        for b in members:
            own = beams[b].linewidth - common
            if own > 0:
                out.append((math.pi * own, np.eye(B)[b]))
    return out

"""What sublevel mode adds to a result: sublevel populations along z and dark sublevels.

A sublevel is *dark* when the light can hardly excite it although its level
is the lower level of some beam: an atom parked there would, on the flux-
weighted average, be excited less than ``DARK_RELATIVE`` times as often as
one in the most strongly driven sublevel of those levels. Population that
collects there (polarization dark states such as ``|F=2, m=2>`` under
``sigma+`` light on an ``F -> F' = F`` line, or a hyperfine level no beam is
tuned to) is what a repump, another polarization or a field cures, not power.

The ``exposure`` of a sublevel is that number of excitations: the time
integral of its summed excitation rates over the whole path,
``sum_t int f_t dz * sum_c rate_c``, averaged over the ensemble nodes.
"""

from dataclasses import dataclass

import numpy as np
from scipy import sparse

from .sparse_model import SparseRateModel

DARK_RELATIVE = 0.01
EXPOSURE_POINTS = 20001  # trapezoid points for the profile integrals along z
CHUNK = 2048


@dataclass(frozen=True)
class SublevelReport:
    """Sublevel-resolved results (ensemble means).

    Parameters
    ----------
    labels : tuple of str
        Sublevel labels (``"5S1/2 F=2 m=+2"``), without ``other``.
    level_of : ndarray of int
        Level index of each sublevel.
    final : ndarray (S,)
        Population of each sublevel at the end.
    profile : ndarray (k, S)
        Populations along the result's ``z`` grid.
    exposure : ndarray (S,)
        Mean number of excitations an atom held in the sublevel would undergo.
    dark : ndarray of bool (S,)
        Dark sublevels (module docstring).
    """

    labels: tuple
    level_of: np.ndarray
    final: np.ndarray
    profile: np.ndarray
    exposure: np.ndarray
    dark: np.ndarray

    @property
    def dark_fraction(self) -> float:
        """Population in dark sublevels at the end."""
        return float(self.final[self.dark].sum())

    def populations(self) -> dict:
        return {lab: float(p) for lab, p in zip(self.labels, self.final)}

    def dark_populations(self) -> dict:
        return {lab: float(p) for lab, p, d in zip(self.labels, self.final, self.dark) if d}


def exposures(model: SparseRateModel, v, a, y0, weight) -> np.ndarray:
    """Flux-weighted mean excitations per sublevel over the whole path, shape (S,)."""
    z = np.linspace(model.z_start, model.z_end, EXPOSURE_POINTS)
    along = np.trapezoid(model.profiles(z), z, axis=1) if model.terms else np.zeros(0)
    out = np.zeros(model.n_states)
    for t, (i, _) in enumerate(model.terms):
        lower = np.array([c.lower for c in model.basis.couplings(model.setup.beams[i])], dtype=int)
        if not lower.size:
            continue
        for lo in range(0, len(v), CHUNK):
            sl = slice(lo, lo + CHUNK)
            per_coupling = weight[sl] @ model.rates(t, v[sl], a[sl], y0[sl])
            np.add.at(out, lower, along[t] * per_coupling)
    return out


def sublevel_report(model, propagator, nodes, z) -> SublevelReport:
    """Re-integrate the final quadrature nodes once, keeping every sublevel.

    Parameters
    ----------
    model : RateModel
        With a :class:`~pumpsim.basis.SublevelBasis`.
    propagator : Propagator
        The one the ensemble used, so the means match the level results.
    nodes : object
        ``v``, ``a``, ``y0``, ``weight`` of the final quadrature.
    z : ndarray
        The result's grid.
    """
    S = model.n_states
    profile = np.zeros((len(z), model.size))
    for lo in range(0, len(nodes.v), CHUNK):
        sl = slice(lo, lo + CHUNK)
        w = nodes.weight[sl]
        reducer = sparse.csr_matrix(w[None, :])
        traj = propagator.propagate(model.problem(nodes.v[sl], nodes.a[sl], nodes.y0[sl]), z,
                                    reducer)
        profile += traj.reduced[:, 0, :]
    sparse_model = model if isinstance(model, SparseRateModel) else SparseRateModel(
        model.setup, model.basis)
    exposure = exposures(sparse_model, nodes.v, nodes.a, nodes.y0, nodes.weight)[: S - 1]
    basis = model.basis
    level_of = basis.level_of[: S - 1]
    driven = np.isin(level_of, [model.setup.scheme.index(b.lower) for b in model.setup.beams])
    bright = exposure[driven].max() if driven.any() else 0.0
    dark = driven & (exposure < DARK_RELATIVE * bright)
    return SublevelReport(basis.labels[: S - 1], level_of, profile[-1, : S - 1],
                          profile[:, : S - 1], exposure, dark)


def sublevel_summary(report: SublevelReport, shown=0.001) -> list:
    """Readable lines: populated sublevels, then the dark ones and what to do."""
    lines = ["final sublevel populations (those above 0.001):"]
    for lab, p in report.populations().items():
        if p >= shown:
            lines.append(f"  {lab:<24} {p:10.6f}")
    dark = report.dark_populations()
    if not any(p >= shown for p in dark.values()):
        lines.append("dark sublevels: no population collects where the light cannot excite it")
        return lines
    lines.append(f"DARK SUBLEVELS hold {report.dark_fraction:.4f} of the atoms (excited less than "
                 f"{DARK_RELATIVE:g} times as often as the brightest sublevel):")
    for lab, p in dark.items():
        if p >= shown:
            lines.append(f"  {lab:<24} {p:10.6f}")
    lines.append("  more power will not move them. Wanted if that is the state you pump into; "
                 "otherwise add a repump or a polarization that reaches them (a transverse "
                 "field also remixes them in the lab; it is not modelled, see docs/sublevel.md)")
    return lines

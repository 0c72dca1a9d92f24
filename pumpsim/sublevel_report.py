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

from . import constants as K
from .beam_shapes import shape_of
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
    target : ndarray of bool (S,)
        Sublevels of the setup's target.
    unreached : ndarray of bool (S,)
        Dark sublevels whose whole hyperfine level is dark: no beam is tuned to
        it (a repump cures that). A dark sublevel beside bright ones of its
        hyperfine level is dark by polarization.
    saturation : dict
        Beam name -> :func:`pair_saturation` of its strongest driven pair.
    """

    labels: tuple
    level_of: np.ndarray
    final: np.ndarray
    profile: np.ndarray
    exposure: np.ndarray
    dark: np.ndarray
    target: np.ndarray
    unreached: np.ndarray
    saturation: dict

    @property
    def target_population(self) -> float:
        """Final population of the target's sublevels."""
        return float(self.final[self.target].sum())

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


PAIR_CONVENTION = ("two-level: s = I/I_sat = 2 Omega^2/Gamma^2 of the strongest driven "
                   "sublevel pair, I_sat = hbar omega Gamma/(2 sigma_pair)")
LEVEL_CONVENTION = "fine-structure level, isotropic light (level mode's I_sat)"


def rest_rates(beam, ln, couplings) -> np.ndarray:
    """Excitation rate of each coupling for atoms at rest on the beam's axis at its peak
    (one pass, weak light), 1/s: ``sigma0 strength I / (hbar omega)`` times the
    Lorentzian of the pair's detuning, as in the rate model."""
    gamma = ln.gamma(beam.linewidth)
    flux = shape_of(beam).peak_intensity / (K.hbar * ln.omega)
    return np.array([ln.sigma0(beam.linewidth) * c.strength * flux
                     / (1 + (4 * np.pi * (beam.detuning - c.shift) / gamma) ** 2)
                     for c in couplings])


def pair_saturation(model, beam_index) -> dict:
    """The sublevel pair a beam drives hardest (:func:`rest_rates`) and its saturation
    figures: its own ``I_sat`` (:meth:`~pumpsim.lines.Line.pair_saturation_intensity`)
    and ``s`` at the beam's peak intensity."""
    b, ln = model.setup.beams[beam_index], model.lines[beam_index]
    cs = model.basis.couplings(b)
    if not cs:
        return {}
    c = cs[int(np.argmax(rest_rates(b, ln, cs)))]
    isat = ln.pair_saturation_intensity(c.strength)
    lab = model.basis.labels
    return {"pair": f"{lab[c.lower]} -> {lab[c.upper]}",
            "pair_saturation_intensity_mW_cm2": isat * 0.1,
            "pair_saturation_parameter": model.shapes[beam_index].peak_intensity / isat,
            "pair_convention": PAIR_CONVENTION}


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
    F = getattr(basis, "F", level_of)[: S - 1]  # level mode has no F: one group per level
    unreached = np.array([dark[(level_of == level_of[s]) & (F == F[s])].all() and dark[s]
                          for s in range(S - 1)], dtype=bool)
    target = model.setup.goal.mask(basis)[: S - 1]
    saturation = {b.name: pair_saturation(model, i) for i, b in enumerate(model.setup.beams)}
    return SublevelReport(basis.labels[: S - 1], level_of, profile[-1, : S - 1],
                          profile[:, : S - 1], exposure, dark, target, unreached, saturation)


# what frees atoms from a dark sublevel that is not the target
NEEDS_REPUMP = "no beam is tuned to its hyperfine level: a repump would bring them back"
NEEDS_POLARIZATION = ("the light's polarization hardly excites it: another polarization "
                      "(or a second beam) would")


def dark_verdict(report, s) -> str:
    """Why sublevel ``s`` is dark and whether that is wanted."""
    if report.target[s]:
        return "the target: wanted"
    return "leak: " + (NEEDS_REPUMP if report.unreached[s] else NEEDS_POLARIZATION)


def sublevel_summary(report: SublevelReport, shown=0.001) -> list:
    """Readable lines: populated sublevels, then the dark ones, each said to be the
    target (wanted) or a leak and what cures it, then the pair saturation per beam."""
    lines = ["final sublevel populations (those above 0.001; * target):"]
    for s, (lab, p) in enumerate(report.populations().items()):
        if p >= shown:
            mark = "*" if report.target[s] else " "
            lines.append(f"  {lab:<24}{mark} {p:10.6f}")
    held = [s for s in np.nonzero(report.dark)[0] if report.final[s] >= shown]
    if not held:
        lines.append("dark sublevels: no population collects where the light cannot excite it")
    else:
        lines.append(f"DARK SUBLEVELS hold {report.dark_fraction:.4f} of the atoms (excited less "
                     f"than {DARK_RELATIVE:g} times as often as the brightest sublevel; more "
                     "power will not move them):")
        for s in held:
            lines.append(f"  {report.labels[s]:<24} {report.final[s]:10.6f}  "
                         f"{dark_verdict(report, s)}")
        if not report.target[held].all():
            lines.append("  (in the lab a field across the quantization axis also remixes "
                         "dark sublevels; it is not modelled, see docs/sublevel.md)")
    if report.saturation:
        lines.append("saturation per beam, strongest driven sublevel pair (s0 above: "
                     f"{LEVEL_CONVENTION}; here {PAIR_CONVENTION}):")
        for name, info in report.saturation.items():
            if info:
                lines.append(f"  {name:<10} {info['pair']:<44} I_sat "
                             f"{info['pair_saturation_intensity_mW_cm2']:.4g} mW/cm²  s = "
                             f"{info['pair_saturation_parameter']:.3g}")
    return lines

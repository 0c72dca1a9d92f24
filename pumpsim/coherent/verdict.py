"""Whether the rate equations can be trusted: a check on every run.

The rate equations drop every coherence. After each rate-equation run the
density-matrix model integrates a few representative atoms on the run's own
grid (slow, typical and fast; the centre and the edges of the angle and
offset spreads) and the largest difference in any state population between
the two models is reported with what it stems from:

- **coherent trapping**: coherences between states of one level (dark
  superpositions, Raman or Zeeman coherences) are at least half as large as
  the difference at the end (a dark superposition of two states holding
  ``p`` between them has a coherence up to ``p/2``, which is what the rate
  equations miss);
- **Rabi oscillation**: the optical coherences make it and the peak Rabi
  frequency exceeds their damping rate ``gamma/2``;
- **transit time**: the optical coherences make it at weaker fields: the atom
  crosses the beam before they settle (scales as ``1/v``).

When the difference exceeds the run's tolerance by more than the
density-matrix model's own grid error, the result carries a warning
pointing to ``numerics.equations = "density_matrix"``.
"""

import math
import time

import numpy as np

from ..ensemble import EnsembleIntegrator
from ..errors import InputError
from .model import CoherentModel
from .propagator import CoherentPropagator

EDGE = 2.0  # edge atoms sit at 2 rms of the angle and offset spreads


def representative_atoms(model, propagator):
    """``(v, a, y0)`` arrays of the atoms checked."""
    src = model.setup.source
    speeds = EnsembleIntegrator(model, propagator, 1.0, 1).probe_speeds()
    typical = speeds[len(speeds) // 2]
    atoms = [(v, 0.0, 0.0) for v in speeds]
    if src.divergence_rms > 0:
        atoms.append((typical, EDGE * src.divergence_rms, 0.0))
        # beams at an angle other than 90 degrees shift the two edges differently
        if any(abs(math.cos(b.angle)) > 1e-6 for b in model.setup.beams):
            atoms.append((typical, -EDGE * src.divergence_rms, 0.0))
    if src.width_rms > 0:
        atoms.append((typical, 0.0, EDGE * src.width_rms))
    return tuple(np.array(x) for x in zip(*atoms))


def halved(z):
    """The grid ``z`` with a point added in the middle of every step."""
    return np.sort(np.concatenate([z, 0.5 * (z[:-1] + z[1:])]))


def coherence_check(setup, model, propagator, z):
    """Compare the rate equations with the density-matrix model on representative atoms.

    Parameters
    ----------
    setup : Setup
    model : RateModel
        The run's model (its basis is reused).
    propagator : Propagator
        The run's integrator.
    z : ndarray
        The run's grid.

    Returns
    -------
    dict or None
        Flat, for ``numerics.coherence``: ``largest_difference``, ``grid_error`` (of
        the density-matrix model: the change when its steps are halved), ``state``,
        the atom (``speed_m_s``, ``angle_mrad``, ``offset_mm``), ``cause``,
        ``within_tolerance``, ``atoms``, ``seconds`` and, above the tolerance,
        ``warning``; ``{"skipped": reason}`` when the model does not apply;
        ``None`` when switched off or when the run is the density-matrix model.
    """
    num = setup.numerics
    if num.coherence_check == "off" or num.equations == "density_matrix" or not setup.beams:
        return None
    t0 = time.perf_counter()
    try:
        coherent = CoherentModel(setup, model.basis)
    except InputError as exc:
        return {"skipped": exc.reason}
    V, A, Y = representative_atoms(model, propagator)
    S = model.n_states
    rates = propagator.propagate(model.problem(V, A, Y), z).final[:, :S]
    # The density matrix needs finer steps than the rate equations (its optical
    # coherences follow the field on the scale 1/gamma, which a step of the rate
    # model's grid does not resolve: the error falls only about as h^1.5), so it
    # runs on the grid with every step halved, and the change from the run's grid
    # bounds its own error.
    problem = coherent.problem(V, A, Y)
    coarse = CoherentPropagator().propagate(problem, z).final[:, :S]
    final = CoherentPropagator().propagate(problem, halved(z)).final
    full = final[:, :S]
    grid_error = float(np.max(np.abs(full - coarse)))
    diff = np.abs(full - rates)
    atom, state = np.unravel_index(np.argmax(diff), diff.shape)
    largest = float(diff[atom, state])
    exceeds = largest - grid_error > num.tolerance
    out = {"largest_difference": largest, "grid_error": grid_error,
           "state": model.basis.labels[state], "speed_m_s": float(V[atom]),
           "angle_mrad": float(A[atom] * 1e3), "offset_mm": float(Y[atom] * 1e3),
           "within_tolerance": not exceeds, "atoms": int(V.size)}
    if exceeds:
        out["cause"] = _cause(setup, model, coherent, final, largest, Y)
        out["warning"] = (
            f"the rate equations may be off: a density-matrix check on {V.size} atoms differs "
            f"by {largest:.2g} in '{out['state']}' (atom at {V[atom]:.4g} m/s, "
            f"{A[atom] * 1e3:.3g} mrad, {Y[atom] * 1e3:.3g} mm), above the tolerance "
            f"{num.tolerance:g}; cause: {out['cause']}. Run with numerics.equations = "
            "\"density_matrix\" for the coherent result (docs/coherent.md)")
    else:
        out["cause"] = "none above the tolerance"
    out["seconds"] = time.perf_counter() - t0
    return out


def _cause(setup, model, coherent, final, largest, offsets):
    """The label of what makes the difference (see module docstring)."""
    L = coherent.liouvillian
    level_of = model.basis.level_of
    within = [L.index[(i, j)] for i, j in L.pairs if level_of[i] == level_of[j]]
    if within:
        size = np.hypot(final[:, within], final[:, [k + 1 for k in within]])
        if size.max() >= 0.5 * largest:
            return "coherent trapping"
    damping = np.array([0.5 * ln.gamma(b.linewidth)
                        for b, ln in zip(setup.beams, model.lines)])
    rabi = coherent.peak_rabi(offsets)
    return "Rabi oscillation" if np.max(rabi / damping[:, None]) > 1.0 else "transit time"

"""One simulation of one setup: the engine's main entry point."""

import numpy as np

from .basis import SublevelBasis
from .coherent import CoherentModel, CoherentPropagator, coherence_check
from .cost import check_cost
from .ensemble import EnsembleIntegrator
from .errors import NumericalError
from .model import RateModel
from .result import CONSERVATION_LIMIT, NumericsReport, Result
from .solvers import ExponentialPropagator, RadauPropagator, RosenbrockPropagator
from .sparse_model import SparseRateModel, solver_for
from .sublevel_report import sublevel_report


def make_propagator(numerics, solver=None):
    """The integrator a setup's numerics ask for (``solver`` overrides the name)."""
    solver = solver or numerics.solver
    if solver == "radau":
        return RadauPropagator(rtol=1e-3 * numerics.tolerance, atol=1e-5 * numerics.tolerance)
    if solver == "rosenbrock":
        return RosenbrockPropagator()
    return ExponentialPropagator()


def simulate(setup, basis=None, progress=None) -> Result:
    """Integrate the rate equations for every class of atom and average.

    Parameters
    ----------
    setup : Setup
    basis : Basis, optional
        State space (by default the one the setup's ``mode`` names).
    progress : callable, optional
        ``progress(message)`` during refinement.

    Returns
    -------
    Result
    """
    solver = solver_for(setup)
    model = (SparseRateModel if solver == "rosenbrock" else RateModel)(setup, basis)
    num = setup.numerics
    propagator = make_propagator(num, solver)
    if num.equations == "density_matrix":  # docs/coherent.md
        solver, propagator = CoherentPropagator.name, CoherentPropagator()
        model = CoherentModel(setup, model.basis)
    check_cost(model, propagator, progress)  # refuse what cannot fit; announce a long run
    ens = EnsembleIntegrator(model, propagator, num.tolerance, num.max_nodes, progress).run()
    levels = setup.scheme.ids + ("other",)
    L, B = len(levels), len(setup.beams)
    pops = ens.values[:L]
    names = [b.name for b in setup.beams]
    _check_finite(ens)
    conservation = float(np.max(np.abs(ens.nodes.values[:, :L].sum(axis=1) - 1.0)))
    report = NumericsReport(
        solver=solver, tolerance=num.tolerance, steps=len(ens.z) - 1,
        steps_per_waist=ens.per_waist, nodes=len(ens.nodes.v),
        nodes_evaluated=ens.nodes_evaluated, angle_nodes=ens.rules["angle"],
        offset_nodes=ens.rules["offset"], speed_panels=ens.rules["speed_panels"],
        error_estimate=ens.errors,
        converged=bool(ens.converged and conservation <= CONSERVATION_LIMIT),
        conservation_error=conservation, seconds=ens.seconds,
        unresolved_speed_m_s=ens.rules["unresolved_speed"], limited_by=ens.rules["limited_by"],
        coherence=coherence_check(setup, model, propagator, ens.z))
    final = {lid: float(p) for lid, p in zip(levels, pops)}
    sublevels = None
    if isinstance(model.basis, SublevelBasis):
        sublevels = sublevel_report(model, propagator, ens.nodes, ens.z)
    return Result(setup, tuple(levels), final, final[setup.target],
                  {n: float(x) for n, x in zip(names, ens.values[L:L + B])},
                  {n: float(x) for n, x in zip(names, ens.values[L + B:])},
                  ens.z, ens.profile, ens.nodes, report, sublevels)


def _check_finite(ens):
    """Refuse to report numbers from an integration that overflowed."""
    bad = ~np.isfinite(ens.nodes.values).all(axis=1)
    if bad.any() or not (np.isfinite(ens.values).all() and np.isfinite(ens.profile).all()):
        v = ens.nodes.v[bad] if bad.any() else ens.nodes.v
        raise NumericalError(
            f"the integration broke down (populations not finite at {int(bad.sum())} of "
            f"{bad.size} ensemble nodes, speeds down to {v.min():.3g} m/s): the rate "
            "equations are too stiff for the integrator at these settings; check the "
            "slowest speeds, the shortest lifetimes and the largest waists")

"""Integrators for the batched linear rate equations; see :mod:`.base`."""

from .base import LinearProblem, Propagator, Trajectory
from .exponential import ExponentialPropagator
from .radau import RadauPropagator
from .rosenbrock import RosenbrockPropagator
from .sparse import SparseProblem

PROPAGATORS = {"exponential": ExponentialPropagator, "radau": RadauPropagator,
               "rosenbrock": RosenbrockPropagator}


def get_propagator(name: str) -> Propagator:
    """The propagator registered under ``name``."""
    return PROPAGATORS[name]()


__all__ = ["LinearProblem", "Propagator", "Trajectory", "ExponentialPropagator",
           "RadauPropagator", "RosenbrockPropagator", "SparseProblem", "get_propagator",
           "PROPAGATORS"]

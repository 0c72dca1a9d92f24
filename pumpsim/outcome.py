"""The unit of work sent to executors: one setup in, its headline numbers out.

A full :class:`~pumpsim.result.Result` carries every ensemble node and the
profile along z; sizing and scans need only the numbers below, so only these
travel back from a worker process or cluster node.
"""

from dataclasses import dataclass

from .simulate import simulate


@dataclass(frozen=True)
class Outcome:
    """Headline numbers of one simulation (SI units).

    Parameters
    ----------
    transfer_fraction : float
    final_populations : dict
        Level id (and ``other``) -> fraction.
    photons_per_atom : dict
        Beam name -> photons.
    deflection : dict
        Beam name -> rad.
    error_estimate : float
        The simulation's total error estimate (population units).
    converged : bool
    seconds : float
        Wall time of the simulation on the worker (the only executor-dependent field).
    sublevel_populations : dict or None
        Sublevel mode: sublevel label -> fraction (what a sublevel target is made of).
    """

    transfer_fraction: float
    final_populations: dict
    photons_per_atom: dict
    deflection: dict
    error_estimate: float
    converged: bool
    seconds: float
    sublevel_populations: dict = None


def evaluate(setup) -> Outcome:
    """Simulate one setup and keep its headline numbers (a module-level
    function, so that every executor can pickle it)."""
    r = simulate(setup)
    return Outcome(r.transfer_fraction, dict(r.final_populations), dict(r.photons_per_atom),
                   dict(r.deflection), float(r.numerics.error_estimate["total"]),
                   bool(r.numerics.converged), float(r.numerics.seconds),
                   None if r.sublevels is None else r.sublevels.populations())

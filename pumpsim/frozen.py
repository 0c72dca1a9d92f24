"""A frozen quadrature: the same grid and rules for every evaluation of a fit.

The adaptive engine (:mod:`pumpsim.ensemble`) chooses its grid along z, its
speed panels and its angle and offset rules afresh for every setup, so a
model it computes jumps by up to its tolerance wherever a parameter change
makes it refine differently. A least-squares fit differentiates the model by
finite differences and needs it smooth. :func:`freeze` takes the grid and
rules an adaptive run settled on, and :meth:`FrozenRule.evaluate` uses them
unchanged for any nearby setup:

* the grid along z is kept as absolute positions;
* speed panels keep their absolute edges (so a velocity class that an
  angled beam selects stays resolved); two wider panels beyond the fastest
  edge, to 1.5 and 2.25 times its speed, hold the flux a hotter source puts
  there, and the weights (the source's density at the nodes) are divided by
  their sum;
* angle and offset rules keep their node counts; their nodes scale with the
  source's divergence and width.

Every node, weight and step is then a smooth function of the parameters,
and so is the model (the integrator's steps are fixed; its matrix
exponentials are exact to round-off). The price: away from the setup it was
frozen at, the rule is no longer checked against the tolerance;
:mod:`pumpsim.fit` reports how well it reproduces the adaptive engine at the
start and at the solution.
"""

from dataclasses import dataclass, replace

import numpy as np

from .quadrature import KRONROD_X
from .simulate import simulate

WIDER = (1.5, 2.25)  # extra panels beyond the fastest edge, in units of its speed


@dataclass(frozen=True)
class FrozenRule:
    """Grid and rules to evaluate every setup of a fit with.

    Parameters
    ----------
    z : tuple of float
        Grid along the atomic beam, m.
    edges : tuple of float
        Speed-panel edges, m/s; empty for a single-speed source.
    angle_nodes, offset_nodes : int
        Sizes of the inner rules.
    """

    z: tuple
    edges: tuple
    angle_nodes: int
    offset_nodes: int

    @property
    def sizes(self):
        return {"angle": self.angle_nodes, "offset": self.offset_nodes}

    def evaluate(self, setup):
        """Ensemble nodes of ``setup`` under this rule (weights summing to 1)."""
        from .probe import engine

        ens = engine(setup)
        z = np.asarray(self.z)
        rule = ens.inner_rule(self.sizes)
        if not self.edges:  # a single-speed source
            a, y, w = rule
            v = np.full(len(a), ens.speeds.single_speed)
            ev = ens.evaluate(v, a, y, w, np.zeros(len(a), dtype=int), 1, z)
        else:
            e = self.edges
            V, A, Y, WK, _, _ = ens.panel_nodes(list(zip(e[:-1], e[1:])), rule)
            ev = ens.evaluate(V, A, Y, WK, np.zeros(len(V), dtype=int), 1, z)
        return replace(ev, weight=ev.weight / ev.weight.sum())


def panel_edges(v) -> tuple:
    """The Gauss-Kronrod panels an adaptive run used, from its nodes' speeds: each
    panel holds 15 speeds ``mid + half * KRONROD_X``; ``()`` for a single speed."""
    speeds = np.unique(v)
    if speeds.size == 1:
        return ()
    if speeds.size % KRONROD_X.size:
        raise ValueError("the nodes' speeds are not whole Gauss-Kronrod panels")
    rows = speeds.reshape(-1, KRONROD_X.size)
    half = (rows[:, -1] - rows[:, 0]) / (2 * KRONROD_X[-1])
    mid = 0.5 * (rows[:, -1] + rows[:, 0])
    edges = np.unique(np.round(np.concatenate([mid - half, mid + half]), 9))
    top = edges[-1]
    return tuple(float(x) for x in np.concatenate([edges, top * np.array(WIDER)]))


def freeze(result) -> FrozenRule:
    """The grid and rules of an adaptive result, frozen."""
    n = result.numerics
    return FrozenRule(tuple(float(x) for x in result.z), panel_edges(result.nodes.v),
                      n.angle_nodes, n.offset_nodes)


def freeze_setup(setup):
    """Run ``setup`` adaptively; its frozen rule and the result (module-level: executors)."""
    result = simulate(setup)
    return freeze(result), result

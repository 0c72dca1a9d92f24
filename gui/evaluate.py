"""The quick estimate: a first answer within tens of milliseconds.

:func:`quick_estimate` runs the engine's own rate model and integrator on a
small fixed ensemble (a few speeds, angles and offsets) and a coarse grid
along z, so the window can answer a slider move at once. It makes no
accuracy promise and says so (``numerics.converged`` is False,
``numerics.solver`` names it); the converged answer comes from
:func:`pumpsim.simulate` (see :mod:`.engine_process`).

Why not ``simulate`` at a loose tolerance for the first answer: even at 1e-3,
where its adaptive rules start smallest, the engine takes tenths of a second
on the demo (270 nodes); the window shows that run as its second stage.

No Qt here; the window's worker threads call this.
"""

import math
import time

import numpy as np
from numpy.polynomial.legendre import leggauss

from pumpsim.ensemble import Evaluated
from pumpsim.model import RateModel
from pumpsim.quadrature import half_normal_rule, normal_rule
from pumpsim.result import NumericsReport, Result
from pumpsim.solvers import ExponentialPropagator
from pumpsim.sources import speeds_of

QUICK_PER_WAIST = 2  # steps per waist along z
QUICK_SPEEDS, QUICK_ANGLES, QUICK_OFFSETS = 6, 3, 2
QUICK_NAME = "quick estimate"
CDF_POINTS = 2001  # speed grid on which the flux distribution is inverted


class Superseded(Exception):
    """A newer request replaced the one being computed; drop the work."""


def speed_rule(setup, n):
    """``n`` speeds and weights for flux-weighted means over the source's speeds.

    Gauss-Legendre in the cumulative flux ``u = F(v)``:
    ``mean g = int_0^1 g(F^-1(u)) du``, so each node stands for an equal
    share of atoms whatever the distribution's shape.
    """
    speeds = speeds_of(setup.source, setup.scheme.mass)
    if speeds.single_speed is not None:
        return np.array([speeds.single_speed]), np.ones(1)
    lo, hi = speeds.support()
    v = np.linspace(lo, hi, CDF_POINTS)
    d = speeds.density(v)
    cdf = np.concatenate([[0.0], np.cumsum(0.5 * (d[1:] + d[:-1]) * np.diff(v))])
    cdf /= cdf[-1]
    u, w = leggauss(n)
    return np.interp(0.5 * (u + 1.0), cdf, v), 0.5 * w


def quick_estimate(setup) -> Result:
    """A fast, coarse result for ``setup`` (see the module docstring).

    Parameters
    ----------
    setup : Setup

    Returns
    -------
    Result
        With the same fields as :func:`pumpsim.simulate`'s; ``numerics.solver``
        is ``"quick estimate"`` and ``numerics.converged`` is False.
    """
    t0 = time.perf_counter()
    model = RateModel(setup)
    src = setup.source
    v, wv = speed_rule(setup, QUICK_SPEEDS)
    a, wa = normal_rule(QUICK_ANGLES, src.divergence_rms)
    y, wy = half_normal_rule(QUICK_OFFSETS, src.width_rms)
    V, A, Y = (g.ravel() for g in np.meshgrid(v, a, y, indexing="ij"))
    W = (wv[:, None, None] * wa[None, :, None] * wy[None, None, :]).ravel()
    z = model.grid(QUICK_PER_WAIST)
    traj = ExponentialPropagator().propagate(model.problem(V, A, Y), z, W[None, :])
    levels, photons, deflection = model.outputs(V, traj.final)
    values = np.concatenate([levels, photons, deflection], axis=1)
    profile = model.basis.to_levels(traj.reduced[:, 0, :model.n_states])
    ids = setup.scheme.ids + ("other",)
    names = [b.name for b in setup.beams]
    final = {lid: float(p) for lid, p in zip(ids, W @ levels)}
    report = NumericsReport(
        solver=QUICK_NAME, tolerance=math.nan, steps=len(z) - 1,
        steps_per_waist=QUICK_PER_WAIST, nodes=len(V), nodes_evaluated=len(V),
        angle_nodes=len(a), offset_nodes=len(y), speed_panels=0, error_estimate={},
        converged=False,
        conservation_error=float(np.max(np.abs(levels.sum(axis=1) - 1.0))),
        seconds=time.perf_counter() - t0)
    goal = setup.goal  # a sublevel target counts its sublevels of the final states
    target = final[goal.level] if goal.whole_level else float(
        W @ traj.final[:, :model.n_states][:, goal.mask(model.basis)].sum(axis=1))
    return Result(setup, ids, final, target,
                  dict(zip(names, map(float, W @ photons))),
                  dict(zip(names, map(float, W @ deflection))),
                  z, profile, Evaluated(V, A, Y, W, values, None), report)

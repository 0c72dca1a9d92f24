"""What a simulation will cost, estimated before any of it is computed.

An input can be legal value by value and still ask for more than the machine
has: a hundred passes make every node's generator a 100 x 100 matrix per
term, a waist of 0.1 um over a centimetre of path asks for a million steps.
:func:`check_cost` runs at the start of every simulation: it refuses (an
:class:`~pumpsim.errors.InputError`, exit 2) what cannot fit in memory, with
the figure and the limit, and says how long a long run will take.

Memory is counted from the arrays the engine holds at once: per chunk of
nodes, the base and drive generators with their copies in the integrator
(dense ``(terms + 1, nodes, m, m)``, or ``(terms + 1, nodes, nnz)`` for the
sparse model) and the matrix exponentials' workspace, and per grid position
the profiles and the running sums along z. Time is measured, not guessed, wherever it may be long: a few steps of the
run's own integrator on a small batch of nodes, scaled by the steps of the
first grid and the nodes of the first round (a lower bound) and of
``numerics.max_nodes`` (an upper one).
"""

import math
import os
import time
from dataclasses import dataclass

import numpy as np

from .ensemble import CHUNK, LADDERS, START_PANELS, START_PER_WAIST
from .errors import InputError
from .plausible import Notice
from .sources import speeds_of

MEMORY_SHARE = 0.5  # of the machine's RAM a single simulation may plan to use
DENSE_COPIES = 3  # problem, the integrator's stacked pieces, their sliced blocks
EXPM_COPIES = 12  # the exponentials' workspace: powers, blocks, products, (nodes, S+1, S+1)
GRID_ROWS = 4  # per term and position: the profiles at two points and two weights
PANELS_GUESS = 16  # speed panels reduced at once along z, typical of refined runs
LONG_SECONDS = 30.0  # a run expected to take at least this long is announced
PROBE_NODES, PROBE_STEPS = 128, 4
MANY_STATES, MANY_STEPS = 50, 2000  # where the long-run notice names levels, waists
PROBE_SECONDS = 0.5  # the probe's batch is made smaller where its arithmetic would take longer
# Time is measured only where it may be long: a rough figure from the arithmetic per
# node and step (the combined generator, (terms + 1) m^2 multiply-adds, and about 16
# products of states x states matrices in each exponential) at 1e9 operations per
# second, what numpy does on such small matrices, decides whether the probe runs.
SECONDS_PER_OP = 1e-9
FIRST_GRID = 2 * START_PER_WAIST  # the grid stage doubles at least once
# Before a grid is built, its steps are bounded (every beam's extent at the narrowest
# projected waist); above this bound the grid itself is not built, the bound stands in.
MAX_BOUND_STEPS = 5_000_000
GAP_STEPS = 64  # at most this many steps in each stretch between beams (decay only)


@dataclass(frozen=True)
class Cost:
    """A simulation's size and its estimated cost.

    Parameters
    ----------
    states : int
        Basis states (levels, or sublevels) plus the ``other`` sink.
    terms : int
        Drive terms: one per pass of each beam.
    steps : int
        Steps along z of the first grid (the grid stage may refine it).
    nodes_first, nodes_max : int
        Ensemble nodes of the first round, and the refinement's budget.
    memory_bytes : float
        Arrays held at once, at the first grid.
    memory_limit : float
        :data:`MEMORY_SHARE` of the machine's RAM, bytes.
    seconds_per_node_step, seconds_per_node : float or None
        Measured on a probe (``None`` if not measured): stepping, and setting
        up each node's problem.
    """

    states: int
    terms: int
    steps: int
    nodes_first: int
    nodes_max: int
    memory_bytes: float
    memory_limit: float
    seconds_per_node_step: float | None = None
    seconds_per_node: float | None = None

    @property
    def seconds(self):
        """``(at least, at most)`` seconds: first round only, and the full node budget."""
        if self.seconds_per_node_step is None:
            return None
        per = self.seconds_per_node_step * self.steps + self.seconds_per_node
        return per * self.nodes_first, per * self.nodes_max

    def to_dict(self):
        out = {"states": self.states, "terms": self.terms, "steps_first_grid": self.steps,
               "nodes_first_round": self.nodes_first, "nodes_max": self.nodes_max,
               "memory_MB": self.memory_bytes / 1e6, "memory_limit_MB": self.memory_limit / 1e6}
        if self.seconds is not None:
            out["seconds_at_least"], out["seconds_at_most"] = self.seconds
        return out


def machine_memory():
    """Physical RAM in bytes (``os.sysconf``), or ``None`` where it cannot be read."""
    try:
        return os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES")
    except (ValueError, OSError, AttributeError):
        return None


def _steps_bound(model, per_waist):
    """Most steps a grid of ``per_waist`` steps per waist can have: every beam's extent
    (within the range) at the narrowest projected waist, and capped stretches between
    beams. Cheap, and a bound whether steps follow the narrowest overlapping beam or
    each beam's own scale."""
    lo, hi = model.z_start, model.z_end
    inside = sum(max(0.0, min(s.extent[1], hi) - max(s.extent[0], lo)) for s in model.shapes)
    waists = [s.beam.waist / math.sin(s.beam.angle) for s in model.shapes]
    narrowest = min(waists, default=hi - lo)
    return math.ceil(inside / narrowest * per_waist) + GAP_STEPS * (len(model.shapes) + 1)


def _first_round_nodes(model, max_nodes):
    src, speeds = model.setup.source, speeds_of(model.setup.source, model.setup.scheme.mass)
    inner = ((LADDERS["angle"][0] if src.divergence_rms > 0 else 1)
             * (LADDERS["offset"][0] if src.width_rms > 0 else 1))
    # the first panels with Kronrod nodes (15 each) and one trial of each rule
    per_inner = 2 if speeds.single_speed is not None else START_PANELS * 15 * 2
    return min(per_inner * inner, max_nodes)


def _memory(model, steps, dense):
    """Bytes of the arrays held at once for a chunk of nodes and a grid of ``steps``."""
    m, T = model.size, len(model.terms)
    per_node = (m * m if dense else getattr(model, "nnz", m * m)) * (T + 1)
    chunk = (DENSE_COPIES * per_node + EXPM_COPIES * (model.n_states + 1) ** 2) * CHUNK * 8
    along = (steps + 1) * (GRID_ROWS * T + PANELS_GUESS * (m + len(model.setup.scheme.levels) + 1)) * 8
    return float(chunk + along)


def _gib(x):
    return f"{x / 2**30:.3g} GiB"


def estimate(model, propagator=None):
    """The :class:`Cost` of simulating ``model`` (a built, not yet run, rate model);
    with ``propagator``, the time per node and step is measured on a probe when
    an arithmetic floor says the run may be long.

    Raises
    ------
    InputError
        When the memory needed exceeds :data:`MEMORY_SHARE` of the RAM.
    """
    setup = model.setup
    ram = machine_memory() or 16 * 2**30  # unknown: assume a small workstation
    limit = MEMORY_SHARE * ram
    dense = not hasattr(model, "nnz")
    bound = _steps_bound(model, FIRST_GRID)
    grid = None if bound > MAX_BOUND_STEPS else model.grid(FIRST_GRID)
    steps = bound if grid is None else len(grid) - 1
    need = _memory(model, steps, dense)
    if need > limit:
        _refuse(setup, model, steps, need, limit)
    nodes_first = _first_round_nodes(model, setup.numerics.max_nodes)
    per_node_step = SECONDS_PER_OP * ((len(model.terms) + 1) * model.size**2 * 4
                                      + 16 * model.n_states**3)
    per = (None, None)
    if propagator is not None and per_node_step * steps * nodes_first > LONG_SECONDS / 10:
        probe_grid = grid if grid is not None else np.linspace(
            model.z_start, model.z_end, 2 + 5 * PROBE_STEPS)
        per = _probe(model, propagator, per_node_step, probe_grid)
    return Cost(model.n_states, len(model.terms), steps, nodes_first,
                max(setup.numerics.max_nodes, nodes_first), need, limit, *per)


def _refuse(setup, model, steps, need, limit):
    """Raise the InputError for a simulation over the memory limit, naming the key
    that contributes most: the beam with most passes when drive terms outnumber the
    states, the narrowest waist when the steps along z weigh most."""
    where = (setup.path, None, None)
    along_z = need - _memory(model, 0, not hasattr(model, "nnz"))
    if setup.beams and along_z > need / 2:
        b = min(setup.beams, key=lambda b: b.waist)
        where = (setup.path, f"beam '{b.name}'", "waist_mm")
    elif setup.beams and len(model.terms) > model.n_states:
        b = max(setup.beams, key=lambda b: b.passes)
        where = (setup.path, f"beam '{b.name}'", "passes")
    raise InputError(
        f"the simulation needs about {_gib(need)} of memory, over the limit {_gib(limit)} "
        f"({MEMORY_SHARE:.0%} of this machine's RAM): {model.n_states} states, "
        f"{len(model.terms)} drive terms (the passes of all beams), {steps:,} steps along z; "
        "use fewer passes, beams or levels, or wider waists", *where)


def _probe(model, propagator, rough, grid):
    """Seconds per node and step, and per node for setting up, of ``propagator`` on
    ``model``: two timed runs of a small batch of nodes at the mean speed over
    consecutive steps of the first ``grid`` (around its middle, where most beams
    overlap), of PROBE_STEPS and 4 PROBE_STEPS steps (their difference is the
    stepping alone; the longer run alone where the machine's load hides it), after
    one untimed step that warms up memory. ``rough`` (seconds per node and step
    from the arithmetic) sizes the batch."""
    speeds = speeds_of(model.setup.source, model.setup.scheme.mass)
    n = int(min(PROBE_NODES, max(2, PROBE_SECONDS / (rough * (1 + 5 * PROBE_STEPS)))))
    if not propagator.batched:
        n = 2
    v = np.full(n, speeds.single_speed or speeds.mean())
    problem = model.problem(v, np.zeros(n), np.zeros(n))
    middle = max(0, len(grid) // 2 - 2 * PROBE_STEPS)
    seconds = []
    for k in (1, PROBE_STEPS, 4 * PROBE_STEPS):  # the first only warms up (memory pages)
        z = grid[middle:middle + k + 1]
        t0 = time.perf_counter()
        propagator.propagate(problem, z)
        seconds.append((time.perf_counter() - t0) * k / max(len(z) - 1, 1))
    if seconds[2] > 1.5 * seconds[1]:
        per_step = (seconds[2] - seconds[1]) / (3 * PROBE_STEPS * n)
        return per_step, max(seconds[1] / n - PROBE_STEPS * per_step, 0.0)
    return seconds[2] / (4 * PROBE_STEPS * n), 0.0


def duration(seconds):
    """A duration in the unit that reads best."""
    if seconds < 120:
        return f"{seconds:.0f} s"
    if seconds < 7200:
        return f"{seconds / 60:.0f} min"
    if seconds < 2 * 86400:
        return f"{seconds / 3600:.1f} h"
    return f"{seconds / 86400:.0f} days"


def long_run_notice(cost):
    """A :class:`~pumpsim.plausible.Notice` when the run will be long, else ``None``."""
    if cost.seconds is None or cost.seconds[0] < LONG_SECONDS:
        return None
    low, high = cost.seconds
    advice = []  # what drives the cost here, largest first
    if cost.states > MANY_STATES:
        advice.append("fewer levels")
    if cost.terms > cost.states:
        advice.append("fewer passes or beams")
    if cost.steps > MANY_STEPS:
        advice.append("wider waists")
    advice.append("a looser numerics.tolerance")
    return Notice(
        "long-run",
        f"this run will take at least {duration(low)}, and about {duration(high)} if "
        f"refinement uses all {cost.nodes_max:,} nodes that numerics.max_nodes allows "
        f"({cost.states} states, {cost.terms} drive terms, {cost.steps:,} steps along z at the "
        f"first grid, {cost.seconds_per_node_step * 1e6:.3g} us per node and step measured "
        f"here); {', '.join(advice[:-1]) + ' or ' if len(advice) > 1 else ''}{advice[-1]} "
        "would make it faster")


def estimate_setup(setup):
    """The :class:`Cost` of simulating ``setup``, with the model and integrator
    :func:`~pumpsim.simulate.simulate` would build (for ``pumpsim check``)."""
    from .model import RateModel
    from .simulate import make_propagator
    from .sparse_model import SparseRateModel, solver_for

    solver = solver_for(setup)
    model = (SparseRateModel if solver == "rosenbrock" else RateModel)(setup)
    return estimate(model, make_propagator(setup.numerics, solver))


def check_cost(model, propagator, progress=None):
    """Refuse a simulation that cannot fit in memory; announce a long one.

    Called once at the start of :func:`~pumpsim.simulate.simulate`.

    Parameters
    ----------
    model : RateModel or SparseRateModel
    propagator : Propagator
    progress : callable, optional
        ``progress(message)`` receives the long-run notice's message.

    Returns
    -------
    Cost
    """
    cost = estimate(model, propagator)
    notice = long_run_notice(cost)
    if notice is not None and progress is not None:
        progress("WARNING: " + notice.message)
    return cost

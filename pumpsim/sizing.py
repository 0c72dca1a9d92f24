"""Sizing one beam: least power for a target fraction, best waist, a power x waist map.

Every number here comes from full simulations (:func:`pumpsim.simulate`)
run through a :class:`~pumpsim.batch.Batcher`; the searches are generators
(see :mod:`pumpsim.batch`) so independent simulations run in parallel.

- **Least power**: the transfer fraction rises monotonically with the beam's
  power. The search brackets the target ``F`` between zero power and the
  ceiling, then closes in by false position on ``u = -ln(1 - (T - T0)/span)``,
  which is proportional to power in the weak-pumping limit (``T - T0`` grows
  as ``1 - exp(-k P)``), interpolating ``ln u`` against ``ln P`` and
  safeguarded by bisection in log power. The answer is
  rounded up to :data:`POWER_DIGITS` significant figures and simulated again
  at exactly that power to confirm it.
- **Ceiling** (unlimited power, this transit): the fraction at a peak
  saturation parameter of :data:`CEILING_SATURATION`, far beyond any
  practical laser. A Gaussian beam's wings keep growing with power, so a
  literal limit does not exist; this figure is where further power no longer
  matters at the 1e-3 level for a saturated line.
- **Branching limit** (unlimited power and time): :mod:`pumpsim.limits`.
- **Best waist** at a given power: compass search in log waist (along and
  across the atomic beam) within bounds, from the best point of a coarse
  grid (simulated at a looser tolerance: it only picks the start); a step is halved when no neighbour is better. It ends with both
  neighbours on each axis no better, or at a bound, which it reports.
- **Least power over waists**: :class:`JointOptimum`.
- **Order of work** (:func:`size`): the answers that cost nothing or little
  first, each reported as soon as known, then what the rest will cost, then
  the waist searches and the map; a target out of reach at any waist within
  the bounds runs no waist search.
"""

import math
from dataclasses import dataclass, replace

import numpy as np

from .batch import Batcher, ask
from .beam_shapes import shape_of
from .errors import InputError
from .limits import branching_limit
from .lines import line
from .progress import clock
from .safety import GENERAL, cautions

CEILING_SATURATION = 1e4  # peak saturation parameter standing in for "unlimited power"
POWER_DIGITS = 4  # least power is rounded up to this many significant figures
POWER_RTOL = 1e-3  # ... after the bracket is this narrow, or T is within tol/4 of F
MAX_STEPS = 40
WAIST_GRID = 5  # coarse grid per waist axis
WAIST_RTOL = 0.02  # compass search stops at 2 % steps
# The coarse grid only picks where the compass search starts, so it runs at a looser
# tolerance (10 x, at most 1e-2): its narrow-waist corners cost the ensemble
# quadrature tens of times a simulation at the setup's waist.
GRID_TOLERANCE_FACTOR, GRID_TOLERANCE_CAP = 10.0, 1e-2
WAIST_SPAN = 3.0  # default bounds: current waist / 3 .. * 3 (see default_bounds)
JOINT_RTOL = 0.01  # joint optimum: stop when a round lowers the power by less than 1 %
JOINT_ROUNDS = 4
WARM_STEP = math.log(1.25)  # warm-started waist searches begin with 25 % steps
MAP_POWER_SPAN = 10.0  # default map: least power / 10 .. * 10
MAX_ROUNDS = 60
TYPICAL_SEARCH = 10  # simulations a least-power search usually needs (for progress only)


def with_power(setup, beam, power):
    """The setup with one beam's power (W) changed."""
    return setup.with_value(f"beam.{beam}.power_mW", power * 1e3)


def with_waists(setup, beam, along, across):
    """The setup with one beam's waists (m) changed."""
    s = setup.with_value(f"beam.{beam}.waist_mm", along * 1e3)
    return s.with_value(f"beam.{beam}.waist_across_mm", across * 1e3)


def ceiling_power(setup, beam) -> float:
    """Power (W) standing in for unlimited power: peak saturation :data:`CEILING_SATURATION`
    (or the setup's own power, if that is higher)."""
    b = setup.beam(beam)
    per_watt = shape_of(replace(b, power=1.0)).peak_intensity
    isat = line(setup.scheme, b.lower, b.upper).saturation_intensity()
    return max(CEILING_SATURATION * isat / per_watt, b.power)


def round_up(power, digits=POWER_DIGITS) -> float:
    """Power (W) rounded up to ``digits`` significant figures in mW."""
    if power <= 0:
        return 0.0
    mw = power * 1e3
    q = 10.0 ** (math.floor(math.log10(mw)) - digits + 1)
    return float(f"{math.ceil(mw / q - 1e-9) * q:.{digits}g}") * 1e-3


def shown_cautions(setup, beam, powers):
    """Cautions for every power (W) of ``beam`` that an output shows, without
    repeats, the general one last."""
    out = []
    for p in sorted({p for p in powers if p is not None}):
        out += [c for c in cautions(setup, powers={beam: p}) if c not in out and c != GENERAL]
    return out + [GENERAL]


# -- least power -------------------------------------------------------------

@dataclass(frozen=True)
class PowerSearch:
    """Outcome of :func:`least_power_search` (powers in W).

    Parameters
    ----------
    power : float or None
        Least power reaching the target fraction (rounded up), ``None`` if
        the ceiling is below it.
    outcome : Outcome or None
        The confirming simulation at ``power``.
    ceiling_power : float
    ceiling : Outcome
        Simulation at ``ceiling_power``.
    zero : Outcome
        Simulation with the beam off.
    history : tuple
        ``(power, transfer_fraction)`` of every simulation, in order.
    """

    power: float | None
    outcome: object
    ceiling_power: float
    ceiling: object
    zero: object
    history: tuple

    @property
    def reachable(self):
        return self.power is not None


def least_power_search(setup, beam, F, on_ceiling=None):
    """Search generator (see :mod:`pumpsim.batch`) for the least power of ``beam``
    that gives transfer fraction ``F``; returns a :class:`PowerSearch`.
    ``on_ceiling(ceiling_outcome, ceiling_power)`` is called as soon as the ceiling
    is known (its first step), before the search goes on."""
    tol = setup.numerics.tolerance
    pc = ceiling_power(setup, beam)
    p0 = setup.beam(beam).power
    p0 = p0 if 0 < p0 < pc else pc * 1e-3
    seen = {}

    def look(powers):
        outs = yield from ask(with_power(setup, beam, p) for p in powers)
        seen.update(zip(powers, outs))
        return outs

    ceil, zero, _ = yield from look([pc, 0.0, p0])
    if on_ceiling is not None:
        on_ceiling(ceil, pc)

    def done(power, outcome):
        return PowerSearch(power, outcome, pc, ceil, zero,
                           tuple((p, o.transfer_fraction) for p, o in seen.items()))

    if zero.transfer_fraction >= F:
        return done(0.0, zero)
    if ceil.transfer_fraction < F:
        return done(None, None)
    T0 = zero.transfer_fraction
    span = (ceil.transfer_fraction - T0) * (1 + 1e-3) + tol  # keeps u finite at the ceiling

    def u(T):
        return -math.log1p(-(T - T0) / span)

    lo = max(p for p, o in seen.items() if o.transfer_fraction < F)
    hi = min(p for p, o in seen.items() if o.transfer_fraction >= F)
    widths, last = [], None
    for _ in range(MAX_STEPS):
        u_lo, u_hi, u_F = (u(seen[lo].transfer_fraction), u(seen[hi].transfer_fraction), u(F))
        if seen[hi].transfer_fraction - F <= 0.25 * tol or (lo > 0 and hi / lo - 1 <= POWER_RTOL):
            break
        # one-sided steps: when the last one closed less than 2/3 of the gap in u
        # (deep saturation), jump a decade instead
        if lo == 0:  # u grows as P from the origin, or slower (saturation): P* <= this
            kind, gap, p = "down", u_hi - u_F, hi * u_F / u_hi
            if last and last[0] == kind and gap > last[1] / 3:
                p = min(p, 0.1 * hi)
        elif hi == pc:  # the ceiling's u is capped by span: extrapolate from lo, P* >= this
            kind, gap = "up", u_F - u_lo
            p = lo * u_F / u_lo if u_lo > 0 else 10 * lo
            if last and last[0] == kind and gap > last[1] / 3:
                p = max(p, 10 * lo)
        elif len(widths) >= 3 and widths[-1] > 0.5 * widths[-3]:  # slow: bisect
            kind, gap, p = "bisect", None, math.sqrt(lo * hi)
        else:  # false position on ln u against ln P: exact for u proportional to P
            a, b = math.log(lo), math.log(hi)
            x = a + (math.log(u_F / u_lo)) * (b - a) / math.log(u_hi / u_lo)
            kind, gap, p = "interpolate", None, math.exp(x)
        if kind in ("interpolate", "bisect"):  # stay clear of the bracket's ends
            a, b = math.log(lo), math.log(hi)
            margin = min(0.02 * (b - a), 0.005)
            p = math.exp(min(max(math.log(p), a + margin), b - margin))
        else:  # strictly inside the bracket
            p = min(max(p, lo * (1 + 0.5 * POWER_RTOL), 1e-6 * hi), 0.98 * hi)
        (out,) = yield from look([p])
        if out.transfer_fraction >= F:
            hi = p
        else:
            lo = p
        last = (kind, gap)
        if lo > 0 and hi < pc:
            widths.append(math.log(hi / lo))
    power = round_up(hi)
    (confirm,) = yield from look([power])
    return done(power, confirm)


# -- best waist --------------------------------------------------------------

@dataclass(frozen=True)
class WaistSearch:
    """Outcome of :func:`best_waist_search` (lengths in m, power in W).

    Parameters
    ----------
    power : float
    waist, waist_across : float
        Best 1/e² radii along (in the atomic-beam/laser plane) and across.
    outcome : Outcome
        Simulation at the best waists.
    at_bound : dict
        ``"along"`` and ``"across"`` -> ``"lower"``, ``"upper"`` or ``None``.
    neighbours : tuple
        ``(waist, waist_across, transfer_fraction)`` of the final neighbours,
        each no better than the optimum.
    step : float
        Final relative step of the search.
    bounds : tuple
        ``((along_low, along_high), (across_low, across_high))``.
    flat : bool
        Every neighbour is within the numerical tolerance of the optimum.
    """

    power: float
    waist: float
    waist_across: float
    outcome: object
    at_bound: dict
    neighbours: tuple
    step: float
    bounds: tuple
    flat: bool


def best_waist_search(setup, beam, power, along, across, grid=WAIST_GRID, start=None):
    """Search generator for the waists (m) of ``beam`` giving the largest transfer
    fraction at ``power`` (W), within ``along`` and ``across`` = ``(low, high)``;
    returns a :class:`WaistSearch`. ``start`` = ``(along, across)`` skips the
    coarse grid and begins the compass search there with :data:`WARM_STEP` steps."""
    base = with_power(setup, beam, power)
    tol = setup.numerics.tolerance
    rough_base = base.with_value("numerics.tolerance", max(tol, min(GRID_TOLERANCE_FACTOR * tol,
                                                                     GRID_TOLERANCE_CAP)))
    lo, hi = np.log([along[0], across[0]]), np.log([along[1], across[1]])
    seen, rough = {}, {}

    def key(x):
        return tuple(round(float(v), 12) for v in x)

    def look(points, table=seen, src=base):
        points = [key(x) for x in points]
        new = [x for x in dict.fromkeys(points) if x not in table]
        outs = yield from ask(with_waists(src, beam, math.exp(x[0]), math.exp(x[1])) for x in new)
        table.update(zip(new, outs))
        return points

    def T(x):
        return seen[x].transfer_fraction

    if start is None:
        axes = [np.linspace(lo[d], hi[d], grid) if hi[d] > lo[d] else lo[d:d + 1]
                for d in range(2)]
        coarse = yield from look([(x, y) for x in axes[0] for y in axes[1]], rough, rough_base)
        # first of equals: deterministic; then at the setup's own tolerance
        (centre,) = yield from look([max(coarse, key=lambda x: rough[x].transfer_fraction)])
        step = np.array([(hi[d] - lo[d]) / (grid - 1) for d in range(2)])
    else:
        (centre,) = yield from look([np.clip(np.log(start), lo, hi)])
        step = np.where(hi > lo, WARM_STEP, 0.0)
    smallest = math.log1p(WAIST_RTOL)
    for _ in range(MAX_ROUNDS):
        moves = [np.clip(np.array(centre) + sign * step * unit, lo, hi)
                 for unit in np.eye(2) for sign in (-1, 1)]
        looked = yield from look(moves)
        nbrs = [x for x in looked if x != centre]
        best = max(nbrs, key=T, default=centre)
        if best != centre and T(best) > T(centre):
            centre = best
            continue
        if (step <= smallest).all():
            break
        step = step / 2
    at_bound = {}
    for d, name in enumerate(("along", "across")):
        at_bound[name] = (None if hi[d] == lo[d] else "lower" if centre[d] <= lo[d] + 1e-12
                          else "upper" if centre[d] >= hi[d] - 1e-12 else None)
    return WaistSearch(power, math.exp(centre[0]), math.exp(centre[1]), seen[centre], at_bound,
                       tuple((math.exp(x[0]), math.exp(x[1]), T(x)) for x in nbrs),
                       float(np.expm1(step.max())), (tuple(along), tuple(across)),
                       all(abs(T(x) - T(centre)) <= tol for x in nbrs))


# -- least power over waists ----------------------------------------------------

@dataclass(frozen=True)
class JointOptimum:
    """Least power over waists within bounds, and the waists it needs (SI units).

    Found by alternating the two one-dimensional answers: the best waists at the
    current least power, then the least power at those waists. Each round can
    only lower the power (the new waists reach ``F`` at the old power), and at
    the joint optimum the best waists at the least power are the waists
    themselves, so the alternation stops there; it stops earlier when a round
    gains less than :data:`JOINT_RTOL`.

    Parameters
    ----------
    power : float
    waist, waist_across : float
    outcome : Outcome
        The confirming simulation at ``power`` and those waists.
    at_bound : dict
        ``"along"`` and ``"across"`` -> ``"lower"``, ``"upper"`` or ``None``.
    rounds : tuple
        ``(power, waist, waist_across)`` after each round, the start first.
    first_waist : WaistSearch
        The best waists at the starting least power (the first round).
    """

    power: float
    waist: float
    waist_across: float
    outcome: object
    at_bound: dict
    rounds: tuple
    first_waist: object


def _at_bound(value, bounds):
    lo, hi = bounds
    if hi <= lo:
        return None
    return "lower" if value <= lo * (1 + 1e-9) else "upper" if value >= hi * (1 - 1e-9) else None


def joint_search(setup, beam, F, along, across, first):
    """Search generator for the least power of ``beam`` over waists within ``along``
    and ``across`` (m); ``first`` is the :class:`PowerSearch` at the setup's own
    waists (reachable, positive power). Returns a :class:`JointOptimum`."""
    b = setup.beam(beam)
    p, wa, wc, outcome = first.power, b.waist, b.waist_across, first.outcome
    rounds, start, first_waist = [(p, wa, wc)], None, None
    tol = setup.numerics.tolerance
    for _ in range(JOINT_ROUNDS):
        ws = yield from best_waist_search(setup, beam, p, along, across, start=start)
        first_waist = first_waist or ws
        start = (ws.waist, ws.waist_across)
        if ws.outcome.transfer_fraction <= outcome.transfer_fraction + tol:
            break  # no waist does better at this power: p is already least
        moved = with_waists(with_power(setup, beam, p), beam, ws.waist, ws.waist_across)
        ps = yield from least_power_search(moved, beam, F)
        if not ps.reachable or ps.power >= p:
            break
        gained = ps.power < p * (1 - JOINT_RTOL)
        p, wa, wc, outcome = ps.power, ws.waist, ws.waist_across, ps.outcome
        rounds.append((p, wa, wc))
        if not gained:
            break
    return JointOptimum(p, wa, wc, outcome,
                        {"along": _at_bound(wa, along), "across": _at_bound(wc, across)},
                        tuple(rounds), first_waist)


# -- power x waist map ---------------------------------------------------------

def map_search(setup, beam, powers, waists, across):
    """Search generator: transfer fraction on a grid of powers (W) and waists
    along (m), the waist across held at ``across`` (m); returns an array of
    shape ``(len(waists), len(powers))``."""
    outs = yield from ask(with_waists(with_power(setup, beam, p), beam, w, across)
                          for w in waists for p in powers)
    return np.array([o.transfer_fraction for o in outs]).reshape(len(waists), len(powers))


# -- the whole answer -----------------------------------------------------------

@dataclass(frozen=True)
class Sizing:
    """Everything :func:`size` found (SI units; :meth:`to_dict` gives file units).

    Parameters
    ----------
    setup : Setup
    beam : str
    target_fraction : float
    search : PowerSearch
        At the setup's own waists.
    limit : BranchingLimit
    waist : WaistSearch or None
        Best waists at ``--power`` or the least power; ``None`` when there was no
        positive power to size the waist at, or no waist search.
    joint : JointOptimum or None
        Least power over waists within bounds; ``None`` when out of reach, or
        without a waist search.
    map : dict or None
        ``power`` (W), ``waist`` (m, along), ``across`` (m, the waist across of
        every point) and ``fraction`` (rows: waists, columns: powers).
    limited_by : str or None
        ``"branching"`` or ``"transit"`` when the target is out of reach.
    reason : str or None
        Plain words: why it is out of reach.
    simulations : int
    unconverged : int
        How many of them missed the numerical tolerance.
    cautions : list of str
    bounds : tuple
        ``((along_low, along_high), (across_low, across_high))``, m.
    """

    setup: object
    beam: str
    target_fraction: float
    search: PowerSearch
    limit: object
    waist: WaistSearch | None
    joint: JointOptimum | None
    map: dict | None
    limited_by: str | None
    reason: str | None
    simulations: int
    unconverged: int
    cautions: list
    bounds: tuple

    def to_dict(self):
        """The ``size --json`` object."""
        s, w, j, b = self.search, self.waist, self.joint, self.setup.beam(self.beam)
        out = {
            "beam": self.beam, "target": self.setup.target,
            "target_fraction": self.target_fraction,
            "power_mW": None if s.power is None else s.power * 1e3,
            "reachable": s.reachable or j is not None,
            "reachable_at_setup_waist": s.reachable,
            "confirmed_fraction": None if s.outcome is None else s.outcome.transfer_fraction,
            "ceiling": s.ceiling.transfer_fraction,
            "ceiling_power_mW": s.ceiling_power * 1e3,
            "branching_limit": self.limit.fraction,
            "branching_final_populations": dict(self.limit.final),
            "limited_by": self.limited_by, "reason": self.reason,
            "waist_mm": b.waist * 1e3, "waist_across_mm": b.waist_across * 1e3,
            "joint_power_mW": None if j is None else j.power * 1e3,
            "joint_waist_mm": None if j is None else j.waist * 1e3,
            "joint_waist_across_mm": None if j is None else j.waist_across * 1e3,
            "joint_fraction": None if j is None else j.outcome.transfer_fraction,
            "joint_at_bound": None if j is None else dict(j.at_bound),
            "joint_rounds": None if j is None else [
                {"power_mW": p * 1e3, "waist_mm": a * 1e3, "waist_across_mm": c * 1e3}
                for p, a, c in j.rounds],
            "best_waist_mm": None if w is None else w.waist * 1e3,
            "best_waist_across_mm": None if w is None else w.waist_across * 1e3,
            "best_waist_fraction": None if w is None else w.outcome.transfer_fraction,
            "best_waist_power_mW": None if w is None else w.power * 1e3,
            "best_waist_at_bound": None if w is None else dict(w.at_bound),
            "waist_bounds_mm": [[x * 1e3 for x in r] for r in self.bounds],
            "simulations": self.simulations,
            "unconverged_simulations": self.unconverged,
            "cautions": list(self.cautions),
        }
        if s.outcome is not None:
            out["photons_per_atom"] = s.outcome.photons_per_atom[self.beam]
            out["deflection_mrad"] = s.outcome.deflection[self.beam] * 1e3
        if self.map is not None:
            out["map"] = {"power_mW": [p * 1e3 for p in self.map["power"]],
                          "waist_mm": [x * 1e3 for x in self.map["waist"]],
                          "waist_across_mm": self.map["across"] * 1e3,
                          "transfer_fraction": self.map["fraction"].tolist()}
        return out


def explain(setup, beam, F, search, limit):
    """``(limited_by, reason)`` for a target that is out of reach, else ``(None, None)``."""
    if search.reachable:
        return None, None
    target = setup.target
    if F > limit.fraction:
        parts = []
        if limit.final["other"] > 1e-4:
            parts.append(f"{limit.final['other']:.1%} leak to 'other' (decays the scheme does "
                         "not list)")
        for d in limit.dark:
            parts.append(f"{limit.final[d]:.1%} end in dark level '{d}' (no beam drives it: "
                         "a repump from it would return them)")
        rest = [k for k, v in limit.final.items()
                if v > 1e-4 and k not in (target, "other") and k not in limit.dark]
        for k in rest:
            parts.append(f"{limit.final[k]:.1%} end in '{k}'")
        return "branching", (f"F = {F:g} is above the branching limit {limit.fraction:.4f}: even "
                             "at unlimited power and time " + "; ".join(parts) + ".")
    b = setup.beam(beam)
    final = search.ceiling.final_populations
    parts = []
    for k, v in sorted(final.items(), key=lambda kv: -kv[1]):
        if k == target or v < 1e-3:
            continue
        if k == b.lower:
            parts.append(f"{v:.1%} remain in '{k}', the level this beam empties (too short a "
                         f"transit through a {b.waist * 1e3:.3g} mm waist, or atoms returned "
                         "to it after the beam)")
        elif k == "other":
            parts.append(f"{v:.1%} are lost to 'other'")
        else:
            parts.append(f"{v:.1%} end in '{k}'")
    return "transit", (f"F = {F:g} is within the branching limit {limit.fraction:.4f}, but this "
                       f"transit reaches only {search.ceiling.transfer_fraction:.4f} at unlimited "
                       "power: " + "; ".join(parts) + ". A larger waist along the atomic beam, "
                       "slower atoms or more passes would help.")


def default_bounds(setup, beam):
    """Default waist bounds (m): ``((along_low, along_high), (across_low, across_high))``.

    Each waist within a factor :data:`WAIST_SPAN` of the setup's. Across, never
    below the atomic beam's rms width (when that is below the setup's own waist
    across): a narrower beam leaves most atoms in its dim wings, so it cannot
    be the least power, while such points cost the ensemble quadrature many
    more offset nodes (tens of times the simulation time).
    """
    b = setup.beam(beam)
    width = setup.source.width_rms
    across_low = b.waist_across / WAIST_SPAN
    if width > across_low:
        across_low = min(width, b.waist_across)
    return ((b.waist / WAIST_SPAN, b.waist * WAIST_SPAN),
            (across_low, b.waist_across * WAIST_SPAN))


def _bounds(given, default, name, file):
    lo, hi = given if given is not None else default
    if not (lo > 0 and hi >= lo):
        raise InputError(f"bounds must be 0 < MIN <= MAX, got {lo * 1e3:g}:{hi * 1e3:g} mm",
                         file, name)
    return (lo, hi)


def check_request(setup, beam, F):
    """Refuse a beam the setup does not have, or a target fraction outside (0, 1).

    Raises
    ------
    InputError
        Naming the command-line option at fault.
    """
    names = [b.name for b in setup.beams]
    if beam not in names:
        raise InputError(f"no beam named {beam!r} (beams: {', '.join(names) or 'none'})",
                         setup.path, "--beam")
    if not 0 < F < 1:
        raise InputError(f"the target fraction must lie between 0 and 1, got {F!r}",
                         setup.path, "--target-fraction")

def _with_point(values, x):
    """Sorted ``values`` holding ``x``: it replaces a value within 1e-6 of it (a bound
    the search reached, up to rounding) or is inserted."""
    values = np.array(values, dtype=float)
    near = np.abs(values / x - 1) <= 1e-6
    if near.any():
        values[np.argmax(near)] = x
        return values
    return np.sort(np.append(values, x))


def plan_counts(axes, map_points, joint=True):
    """Typical simulations of each stage still to come: ``(serial, parallel)`` counts,
    the first run one batch at a time, the second spread over the workers."""
    serial = TYPICAL_SEARCH
    parallel = map_points**2
    if joint and axes:
        serial += 2 * (4 * 6) + 2 * TYPICAL_SEARCH  # compass rounds and re-sized powers
        parallel += WAIST_GRID**axes
    return serial, parallel


def cost_text(seconds_each, workers, axes, map_points, joint, tolerance):
    """What the rest of a ``size`` run will cost, and how to make it cheaper."""
    serial, parallel = plan_counts(axes, map_points, joint)
    parts = []
    if joint and axes:
        parts.append(f"least power over waists (~{serial - TYPICAL_SEARCH + WAIST_GRID**axes} "
                     "simulations)")
    if map_points:
        parts.append(f"the {map_points} x {map_points} map ({map_points**2})")
    if not parts:
        return None
    total = seconds_each * (serial + parallel / max(workers, 1))
    cheaper = []
    if map_points:
        cheaper.append("--map 0 (no map) or a smaller --map N")
    if joint and axes:
        cheaper += ["--no-waist-search (least power at this waist only)",
                    "narrower --waist-range / --waist-across-range"]
    cheaper.append(f"a looser tolerance (--set numerics.tolerance={10 * tolerance:g})")
    return (f"next: {' and '.join(parts)}; about {clock(total)} at {seconds_each:.2g} s a "
            f"simulation on {workers} worker{'s' if workers != 1 else ''} (narrow waists "
            f"cost more). Cheaper: {'; '.join(cheaper)}.")


def size(setup, beam, F, executor=None, power=None, along=None, across=None,
         map_points=10, power_range=None, progress=None, report=None, waists=True) -> Sizing:
    """Size one beam of a setup for transfer fraction ``F``.

    The answers that cost nothing or little come first and are passed to
    ``report`` as soon as they are known (branching limit, ceiling, least power at
    the setup's waist, then what the rest will cost), so that stopping a long run
    loses nothing already found.

    Parameters
    ----------
    setup : Setup
    beam : str
        Name of the beam to size.
    F : float
        Target transfer fraction, 0 < F < 1.
    executor : Executor, optional
        Where simulations run (serial by default).
    power : float, optional
        Power (W) for the best-waist search; default the least power (or the
        setup's power when the target is out of reach).
    along, across : tuple, optional
        ``(low, high)`` bounds (m) on the waists; default :func:`default_bounds`.
    map_points : int
        Points per axis of the power x waist map; 0 for none.
    power_range : tuple, optional
        ``(low, high)`` powers (W) of the map; default the least power divided
        and multiplied by :data:`MAP_POWER_SPAN`, widened to the setup's power.
    progress : Progress, optional
    report : callable, optional
        Called with one line of plain text per early answer.
    waists : bool
        ``False`` skips the waist searches (least power at the setup's waist only).

    Returns
    -------
    Sizing
    """
    check_request(setup, beam, F)
    if map_points and map_points < 2:
        raise InputError("the map needs at least 2 points per axis (or 0 for none)",
                         setup.path, "--map")
    if power is not None and power < 0:
        raise InputError(f"power must be >= 0 mW, got {power * 1e3:g}", setup.path, "--power")
    if power_range is not None and not 0 < power_range[0] < power_range[1]:
        raise InputError("power range must be 0 < MIN < MAX", setup.path, "--power-range")
    report = report or (lambda text: None)
    b = setup.beam(beam)
    d_along, d_across = default_bounds(setup, beam)
    along = _bounds(along, d_along, "--waist-range", setup.path)
    across = _bounds(across, d_across, "--waist-across-range", setup.path)
    axes = sum(hi > lo for lo, hi in (along, across))
    workers = getattr(executor, "workers", 1)

    limit = branching_limit(setup)
    report(f"branching limit at unlimited power and time: {limit.fraction:.5f}")
    by_branching = F > limit.fraction
    if by_branching:
        report(f"F = {F:g} is above it: out of reach at any power and waist (no waist search)")
        waists = False
    if progress is not None:  # the plan, so that the time left is steady from the start
        progress.remaining_at_least(3 + sum(plan_counts(axes, map_points, waists)))
    batcher = Batcher(executor, progress)

    def on_ceiling(ceil, pc):
        report(f"ceiling at unlimited power, this waist and transit: {ceil.transfer_fraction:.5f}"
               f" (a limit computed at {pc * 1e3:.4g} mW, not a proposed power)")

    (search,) = batcher.drive([least_power_search(setup, beam, F, on_ceiling)])
    # time of a simulation with the beam on (the zero-power one is much quicker)
    seconds_each = float(np.mean([o.seconds for o in (search.ceiling, search.outcome)
                                  if o is not None]))
    if search.reachable:
        report(f"least power for F at this waist: {search.power * 1e3:.4g} mW "
               f"(re-simulated {search.outcome.transfer_fraction:.5f})")
    elif not by_branching:
        report(f"F = {F:g} is out of reach at this waist even at unlimited power")
    joint_start = search if search.reachable and search.power > 0 else None
    setup_start = setup  # the waists the joint search starts from
    waists = waists and axes > 0
    if waists and not search.reachable:  # transit-limited here: try the longest transit
        big = with_waists(setup, beam, along[1], across[1])
        (wide,) = batcher.drive([least_power_search(big, beam, F)])
        if wide.reachable:
            setup_start, joint_start = big, wide
            report(f"at the largest waists ({along[1] * 1e3:.3g} x {across[1] * 1e3:.3g} mm) "
                   f"F is reached with {wide.power * 1e3:.4g} mW: searching the waists")
        else:
            report(f"even at the largest waists ({along[1] * 1e3:.3g} x {across[1] * 1e3:.3g} "
                   f"mm) the ceiling is {wide.ceiling.transfer_fraction:.5f}: out of reach "
                   "within these bounds (no waist search)")
            waists = False
    cost = cost_text(seconds_each, workers, axes, map_points, waists and joint_start is not None,
                     setup.numerics.tolerance)
    if cost:
        report(cost)

    gens = []
    if waists and joint_start is not None:
        gens.append(joint_search(setup_start, beam, F, along, across, joint_start))
    proposed = search.power if search.reachable and search.power > 0 else b.power
    if waists and power is not None and power > 0:
        gens.append(best_waist_search(setup, beam, power, along, across))
    answers = batcher.drive(gens)
    joint = answers.pop(0) if waists and joint_start is not None else None
    if joint is not None:
        report(f"least power over waists: {joint.power * 1e3:.4g} mW at {joint.waist * 1e3:.4g}"
               f" mm along x {joint.waist_across * 1e3:.4g} mm across (re-simulated "
               f"{joint.outcome.transfer_fraction:.5f})")
    if waists and power is not None and power > 0:
        waist = answers.pop(0)
    elif joint is not None and joint_start is search:
        waist = joint.first_waist  # the best waists at the least power at this waist
    else:
        waist = None
    grid = None
    if map_points:
        centre = (joint.power if joint is not None else
                  proposed if proposed > 0 else search.ceiling_power * 1e-3)
        plo, phi = power_range or (centre / MAP_POWER_SPAN, centre * MAP_POWER_SPAN)
        if power_range is None and b.power > 0:  # show the setup's own operating point
            plo, phi = min(plo, b.power), max(phi, b.power)
        powers = np.geomspace(plo, phi, map_points)
        rows = np.geomspace(along[0], along[1], map_points)
        if joint is not None and plo <= joint.power <= phi:  # the optimum on the grid
            powers = _with_point(powers, joint.power)  # itself, so that the F contour
            rows = _with_point(rows, joint.waist)  # passes through its marker
        grid = {"power": powers, "waist": rows,
                "across": joint.waist_across if joint is not None else b.waist_across}
        (grid["fraction"],) = batcher.drive([map_search(setup, beam, grid["power"],
                                                        grid["waist"], grid["across"])])
    limited_by, reason = (None, None) if joint is not None else explain(
        setup, beam, F, search, limit)
    # cautions for the powers shown or proposed as operating points; the ceiling's
    # power is a numerical limit, not a proposal
    shown = [search.power, proposed, power] + (
        [joint.power] if joint is not None else []) + (
        [grid["power"][-1]] if grid is not None else [])
    return Sizing(setup, beam, F, search, limit, waist, joint, grid, limited_by, reason,
                  batcher.simulations, batcher.unconverged,
                  shown_cautions(setup, beam, shown), (along, across))

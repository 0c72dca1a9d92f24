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
  matters at the 1e-3 level for a saturated line. In sublevel mode power
  broadening can spoil a dark state (a far component comes within the
  broadened line), so the fraction may fall again at high power: there the
  ceiling is the best of :data:`SUBLEVEL_DECADES` + 1 powers a decade apart up
  to that power, and the search stays below it.
- **Branching limit** (unlimited power and time): :mod:`pumpsim.limits`.
- **Best waist** at a given power: compass search in log waist (along and
  across the atomic beam) within bounds, from the best point of a coarse
  grid; a step is halved when no neighbour is better. It ends with both
  neighbours on each axis no better, or at a bound, which it reports.
"""

import math
from dataclasses import dataclass, replace

import numpy as np

from .batch import Batcher, ask
from .beam_shapes import shape_of
from .errors import InputError
from .limits import branching_limit
from .lines import line
from .safety import GENERAL, cautions

CEILING_SATURATION = 1e4  # peak saturation parameter standing in for "unlimited power"
POWER_DIGITS = 4  # least power is rounded up to this many significant figures
POWER_RTOL = 1e-3  # ... after the bracket is this narrow, or T is within tol/4 of F
MAX_STEPS = 40
SUBLEVEL_DECADES = 6  # sublevel mode: decades below the ceiling power also tried
WAIST_GRID = 5  # coarse grid per waist axis
WAIST_RTOL = 0.02  # compass search stops at 2 % steps
WAIST_SPAN = 5.0  # default bounds: current waist / 5 .. * 5
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


def least_power_search(setup, beam, F):
    """Search generator (see :mod:`pumpsim.batch`) for the least power of ``beam``
    that gives transfer fraction ``F``; returns a :class:`PowerSearch`."""
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

    def done(power, outcome):
        return PowerSearch(power, outcome, pc, ceil, zero,
                           tuple((p, o.transfer_fraction) for p, o in seen.items()))

    if setup.mode == "sublevel":  # the fraction may fall again at high power (docstring)
        below = [pc * 10.0**-k for k in range(1, SUBLEVEL_DECADES + 1)]
        outs = yield from look(below)
        best = max(zip([ceil] + outs, [pc] + below), key=lambda x: x[0].transfer_fraction)
        if best[0].transfer_fraction > ceil.transfer_fraction:
            ceil, pc = best
    if zero.transfer_fraction >= F:
        return done(0.0, zero)
    if ceil.transfer_fraction < F:
        return done(None, None)
    T0 = zero.transfer_fraction
    span = (ceil.transfer_fraction - T0) * (1 + 1e-3) + tol  # keeps u finite at the ceiling

    def u(T):
        return -math.log1p(-(T - T0) / span)

    lo = max(p for p, o in seen.items() if o.transfer_fraction < F and p < pc)
    hi = min(p for p, o in seen.items() if o.transfer_fraction >= F and p <= pc)
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


def best_waist_search(setup, beam, power, along, across, grid=WAIST_GRID):
    """Search generator for the waists (m) of ``beam`` giving the largest transfer
    fraction at ``power`` (W), within ``along`` and ``across`` = ``(low, high)``;
    returns a :class:`WaistSearch`."""
    base = with_power(setup, beam, power)
    lo, hi = np.log([along[0], across[0]]), np.log([along[1], across[1]])
    seen = {}

    def key(x):
        return tuple(round(float(v), 12) for v in x)

    def look(points):
        points = [key(x) for x in points]
        new = [x for x in dict.fromkeys(points) if x not in seen]
        outs = yield from ask(with_waists(base, beam, math.exp(x[0]), math.exp(x[1])) for x in new)
        seen.update(zip(new, outs))
        return points

    def T(x):
        return seen[x].transfer_fraction

    axes = [np.linspace(lo[d], hi[d], grid) if hi[d] > lo[d] else lo[d:d + 1] for d in range(2)]
    coarse = yield from look([(x, y) for x in axes[0] for y in axes[1]])
    centre = max(coarse, key=T)  # first of equals: deterministic
    step = np.array([(hi[d] - lo[d]) / (grid - 1) for d in range(2)])
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
    tol = setup.numerics.tolerance
    at_bound = {}
    for d, name in enumerate(("along", "across")):
        at_bound[name] = (None if hi[d] == lo[d] else "lower" if centre[d] <= lo[d] + 1e-12
                          else "upper" if centre[d] >= hi[d] - 1e-12 else None)
    return WaistSearch(power, math.exp(centre[0]), math.exp(centre[1]), seen[centre], at_bound,
                       tuple((math.exp(x[0]), math.exp(x[1]), T(x)) for x in nbrs),
                       float(np.expm1(step.max())), (tuple(along), tuple(across)),
                       all(abs(T(x) - T(centre)) <= tol for x in nbrs))


# -- power x waist map ---------------------------------------------------------

def map_search(setup, beam, powers, waists):
    """Search generator: transfer fraction on a grid of powers (W) and waists
    along (m); returns an array of shape ``(len(waists), len(powers))``.
    ``waist_across_mm`` stays as set, or follows the waist if the setup leaves it out."""
    outs = yield from ask(with_power(setup, beam, p).with_value(f"beam.{beam}.waist_mm", w * 1e3)
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
    limit : BranchingLimit
    waist : WaistSearch or None
        ``None`` when there was no positive power to size the waist at.
    map : dict or None
        ``power`` (W), ``waist`` (m) and ``fraction`` (rows: waists, columns: powers).
    limited_by : str or None
        ``"branching"`` or ``"transit"`` when the target is out of reach.
    reason : str or None
        Plain words: why it is out of reach.
    simulations : int
    unconverged : int
        How many of them missed the numerical tolerance.
    cautions : list of str
    """

    setup: object
    beam: str
    target_fraction: float
    search: PowerSearch
    limit: object
    waist: WaistSearch | None
    map: dict | None
    limited_by: str | None
    reason: str | None
    simulations: int
    unconverged: int
    cautions: list

    def to_dict(self):
        """The ``size --json`` object."""
        s, w, b = self.search, self.waist, self.setup.beam(self.beam)
        out = {
            "beam": self.beam, "target": self.setup.target,
            "target_fraction": self.target_fraction,
            "power_mW": None if s.power is None else s.power * 1e3,
            "reachable": s.reachable,
            "confirmed_fraction": None if s.outcome is None else s.outcome.transfer_fraction,
            "ceiling": s.ceiling.transfer_fraction,
            "ceiling_power_mW": s.ceiling_power * 1e3,
            "branching_limit": self.limit.fraction,
            "branching_final_populations": dict(self.limit.final),
            "limited_by": self.limited_by, "reason": self.reason,
            "waist_mm": b.waist * 1e3, "waist_across_mm": b.waist_across * 1e3,
            "best_waist_mm": None if w is None else w.waist * 1e3,
            "best_waist_across_mm": None if w is None else w.waist_across * 1e3,
            "best_waist_fraction": None if w is None else w.outcome.transfer_fraction,
            "best_waist_power_mW": None if w is None else w.power * 1e3,
            "best_waist_at_bound": None if w is None else dict(w.at_bound),
            "best_waist_bounds_mm": None if w is None else [[x * 1e3 for x in r] for r in w.bounds],
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
            why = (limit.dark_why or {}).get(d, "no beam drives it: a repump from it would "
                                                "return them")
            kind = "sublevel" if limit.dark_why is not None else "level"
            parts.append(f"{limit.final[d]:.1%} end in dark {kind} '{d}' ({why})")
        rest = [k for k, v in limit.final.items()
                if v > 1e-4 and k not in (target, "other") and k not in limit.dark]
        for k in rest:
            parts.append(f"{limit.final[k]:.1%} end in '{k}'")
        if limit.dark_why is not None:  # sublevel mode: pumping_limit
            return "branching", (f"F = {F:g} is above the limit {limit.fraction:.4f} at unlimited "
                                 "time: however long the light acts, " + "; ".join(parts) + ".")
        return "branching", (f"F = {F:g} is above the branching limit {limit.fraction:.4f}: even "
                             "at unlimited power and time " + "; ".join(parts) + ".")
    b = setup.beam(beam)
    final = search.ceiling.final_populations
    parts = []
    sub = search.ceiling.sublevel_populations
    if sub is not None and not setup.goal.whole_level:  # where the target's level holds them
        aim = set(setup.goal.labels(setup.scheme.nuclear_spin))
        parts = [f"{v:.1%} end in '{k}'" for k, v in sorted(sub.items(), key=lambda kv: -kv[1])
                 if k not in aim and v >= 1e-3]
        final = {k: v for k, v in final.items() if k != setup.target_level}
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
    name = "the limit at unlimited time" if limit.dark_why is not None else "the branching limit"
    return "transit", (f"F = {F:g} is within {name} {limit.fraction:.4f}, but this "
                       f"transit reaches only {search.ceiling.transfer_fraction:.4f} at unlimited "
                       "power: " + "; ".join(parts) + ". A larger waist along the atomic beam, "
                       "slower atoms or more passes would help.")


def _bounds(value, given, name):
    lo, hi = given if given is not None else (value / WAIST_SPAN, value * WAIST_SPAN)
    if not (lo > 0 and hi >= lo):
        raise InputError(f"bounds must be 0 < MIN <= MAX, got {lo * 1e3:g}:{hi * 1e3:g} mm",
                         table=name)
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

def size(setup, beam, F, executor=None, power=None, along=None, across=None,
         map_points=10, power_range=None, progress=None) -> Sizing:
    """Size one beam of a setup for transfer fraction ``F``.

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
        ``(low, high)`` bounds (m) on the waists; default the current waist
        divided and multiplied by :data:`WAIST_SPAN`.
    map_points : int
        Points per axis of the power x waist map; 0 for none.
    power_range : tuple, optional
        ``(low, high)`` powers (W) of the map; default the least power divided
        and multiplied by :data:`MAP_POWER_SPAN`, widened to the setup's power.
    progress : Progress, optional

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
    b = setup.beam(beam)
    along = _bounds(b.waist, along, "--waist-range")
    across = _bounds(b.waist_across, across, "--waist-across-range")

    if progress is not None:  # a typical count, so that the time left means something
        axes = sum(hi > lo for lo, hi in (along, across))
        progress.remaining_at_least(TYPICAL_SEARCH + WAIST_GRID**axes + 4 * axes * 6
                                    + map_points**2)
    batcher = Batcher(executor, progress)
    limit = branching_limit(setup)
    (search,) = batcher.drive([least_power_search(setup, beam, F)])
    proposed = search.power if search.reachable and search.power > 0 else b.power
    wpower = proposed if power is None else power
    gens = [best_waist_search(setup, beam, wpower, along, across)] if wpower > 0 else []
    grid = None
    if map_points:
        centre = proposed if proposed > 0 else search.ceiling_power * 1e-3
        plo, phi = power_range or (centre / MAP_POWER_SPAN, centre * MAP_POWER_SPAN)
        if power_range is None and b.power > 0:  # show the setup's own operating point
            plo, phi = min(plo, b.power), max(phi, b.power)
        grid = {"power": np.geomspace(plo, phi, map_points),
                "waist": np.geomspace(along[0], along[1], map_points)}
        gens.append(map_search(setup, beam, grid["power"], grid["waist"]))
    answers = batcher.drive(gens)
    waist = answers.pop(0) if wpower > 0 else None
    if grid is not None:
        grid["fraction"] = answers.pop(0)
    limited_by, reason = explain(setup, beam, F, search, limit)
    shown = [search.power, wpower, search.ceiling_power] + (
        [grid["power"][-1]] if grid is not None else [])
    return Sizing(setup, beam, F, search, limit, waist, grid, limited_by, reason,
                  batcher.simulations, batcher.unconverged,
                  shown_cautions(setup, beam, shown))

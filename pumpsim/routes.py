"""Comparing pump routes: every line out of a beam's lower level, sized and ranked.

A *route* is the beam retuned to another line ``lower -> upper`` of the
scheme, with everything else in the setup (power aside) unchanged. Each is
sized for the same target fraction with :func:`~pumpsim.sizing.least_power_search`;
all routes' searches run in lockstep, so their simulations share the executor.

Ranking (best first), the key of :func:`rank_key`:

1. routes that reach the target fraction before those that do not;
2. among those that do, by the chosen criterion (:data:`RANK_BY`):

   - ``power`` (default): the least power first (cheaper, and safer to work
     with), then the higher ceiling, then fewer photons per atom;
   - ``photons``: fewest photons per atom at the least power first (less
     recoil heating of the atomic beam), then the least power;
   - ``deflection``: the smallest mean deflection at the least power first,
     then fewer photons, then the least power;
   - ``visible``: lines that are not ultraviolet first (visible light is seen,
     and ultraviolet optics, fibres and eyewear are harder), then the least power;

3. among those that do not, the higher ceiling first, then the higher
   branching limit.
"""

from dataclasses import dataclass

import numpy as np

from .batch import Batcher
from .errors import InputError
from .limits import branching_limit
from .lines import line
from .safety import GENERAL, VISIBLE
from .sizing import TYPICAL_SEARCH, check_request, least_power_search, shown_cautions


@dataclass(frozen=True)
class Route:
    """One candidate line for a beam (SI units; :meth:`to_dict` gives file units).

    Parameters
    ----------
    beam : str
        Name of the beam retuned.
    lower, upper : str
    wavelength : float
        m.
    sigma0 : float
        Peak cross-section with the beam's laser linewidth, m².
    branching_target, branching_other : float
        Fractions of the upper level's decays into the target and into ``other``.
    search : PowerSearch
    limit : BranchingLimit
        With this route in place of the beam's line.
    cautions : list of str
    """

    beam: str
    lower: str
    upper: str
    wavelength: float
    sigma0: float
    branching_target: float
    branching_other: float
    search: object
    limit: object
    cautions: list

    def to_dict(self):
        """One entry of ``compare --json``'s ``routes``."""
        beam, s = self.beam, self.search
        o = s.outcome
        return {
            "lower": self.lower, "upper": self.upper, "wavelength_nm": self.wavelength * 1e9,
            "sigma0_m2": self.sigma0, "branching_target": self.branching_target,
            "branching_other": self.branching_other,
            "power_mW": None if s.power is None else s.power * 1e3,
            "reachable": s.reachable,
            "confirmed_fraction": None if o is None else o.transfer_fraction,
            "ceiling": s.ceiling.transfer_fraction,
            "ceiling_power_mW": s.ceiling_power * 1e3,
            "branching_limit": self.limit.fraction,
            "photons_per_atom": None if o is None else o.photons_per_atom[beam],
            "deflection_mrad": None if o is None else o.deflection[beam] * 1e3,
            "converged": s.ceiling.converged and (o is None or o.converged),
            "cautions": list(self.cautions),
        }


RANK_BY = {"power": "least power", "photons": "fewest photons per atom",
           "deflection": "smallest deflection", "visible": "wavelength (ultraviolet last), then least power"}


def rank_key(route, by="power"):
    """Sort key, best first (module docstring); ``by`` is a key of :data:`RANK_BY`."""
    s = route.search
    if not s.reachable:
        return (1, -s.ceiling.transfer_fraction, -route.limit.fraction, 0.0, 0.0)
    photons = s.outcome.photons_per_atom[route.beam]
    if by == "photons":
        return (0, photons, s.power, 0.0, 0.0)
    if by == "deflection":
        return (0, abs(s.outcome.deflection[route.beam]), photons, s.power, 0.0)
    if by == "visible":
        return (0, int(route.wavelength < VISIBLE[0]), s.power, photons, 0.0)
    return (0, s.power, -s.ceiling.transfer_fraction, photons, 0.0)


def candidates(setup, beam):
    """Upper levels of every listed line out of the beam's lower level, in scheme order."""
    b = setup.beam(beam)
    lower = setup.scheme.level(b.lower)
    return tuple(d.upper for d in setup.scheme.decays
                 if d.lower == b.lower and setup.scheme.level(d.upper).energy > lower.energy)


def route_setup(setup, beam, upper):
    """The setup with the beam retuned to ``lower -> upper``."""
    return setup.with_value(f"beam.{beam}.transition", [setup.beam(beam).lower, upper])


def compare(setup, beam, F, executor=None, routes=None, progress=None, rank_by="power") -> list:
    """Size every route of ``beam`` for transfer fraction ``F`` and rank them.

    Parameters
    ----------
    setup : Setup
    beam : str
    F : float
        Target transfer fraction, 0 < F < 1.
    executor : Executor, optional
    routes : sequence of str, optional
        Upper levels to compare (default: all candidates).
    progress : Progress, optional
    rank_by : str
        A key of :data:`RANK_BY`.

    Returns
    -------
    list of Route
        Best first.
    """
    check_request(setup, beam, F)
    if rank_by not in RANK_BY:
        raise InputError(f"rank by one of {', '.join(RANK_BY)}, got {rank_by!r}", setup.path,
                         "--rank-by")
    every = candidates(setup, beam)
    lower = setup.beam(beam).lower
    chosen = tuple(routes) if routes else every
    for up in chosen:
        if up not in every:
            raise InputError(f"no line from '{lower}' to '{up}' in the scheme (lines: "
                             f"{', '.join(every) or 'none'})", setup.path, "--routes", level=up)
    variants = [route_setup(setup, beam, up) for up in chosen]
    if progress is not None:
        progress.remaining_at_least(TYPICAL_SEARCH * len(variants))
    searches = Batcher(executor, progress).drive(
        [least_power_search(v, beam, F) for v in variants])
    scheme, target = setup.scheme, setup.target
    out = []
    for up, v, s in zip(chosen, variants, searches):
        b = v.beam(beam)
        ln = line(scheme, lower, up)
        G = scheme.total_rate(up)
        to_target = scheme.decay(up, target)
        out.append(Route(beam, lower, up, ln.wavelength, ln.sigma0(b.linewidth),
                         (to_target.rate / G) if to_target else 0.0,
                         scheme.unlisted_rate(up) / G, s, branching_limit(v),
                         # the ceiling's power is a numerical limit, not a proposal
                         shown_cautions(v, beam, [s.power])))
    return sorted(out, key=lambda r: rank_key(r, rank_by))


def all_cautions(routes):
    """The union of the routes' cautions, the general one last."""
    out = []
    for r in routes:
        out += [c for c in r.cautions if c not in out and c != GENERAL]
    return out + [GENERAL]


CURVE_POINTS = 12


def route_curves(setup, routes, executor=None, progress=None, n=CURVE_POINTS):
    """Transfer fraction against power for each route, for plotting.

    ``n`` log-spaced powers per route from a tenth of the smallest least power
    (or 1e-5 of the ceiling power) up to 100 times the largest (or the
    ceiling power), the ceiling power itself, and the powers its search
    simulated.

    Returns
    -------
    dict
        Upper level -> ``(powers W, fractions)``, sorted by power.
    """
    from .sizing import with_power

    found = [r.search.power for r in routes if r.search.reachable and r.search.power > 0]
    lo = min(found) / 10 if found else min(r.search.ceiling_power for r in routes) * 1e-5
    hi = max(found) * 100 if found else None
    asks = {r.upper: np.append(np.geomspace(lo, min(hi or r.search.ceiling_power,
                                                    r.search.ceiling_power), n),
                               r.search.ceiling_power) for r in routes}
    flat = [with_power(route_setup(setup, r.beam, r.upper), r.beam, p)
            for r in routes for p in asks[r.upper]]
    outcomes = iter(Batcher(executor, progress).run(flat))
    curves = {}
    for r in routes:
        pts = {p: next(outcomes).transfer_fraction for p in asks[r.upper]}
        pts.update((p, t) for p, t in r.search.history if p > 0)
        ps = sorted(pts)
        curves[r.upper] = (np.array(ps), np.array([pts[p] for p in ps]))
    return curves

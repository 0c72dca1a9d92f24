"""Studies around the operating point, as plain functions (no Qt).

The window's three study views need: transfer against one beam's power,
the power x waist map, and the candidate routes (every line out of the
beam's lower level). This module is the window's whole interface to them,
so it can later be swapped for the engine's own sizing and route modules:

* :func:`power_axis`, :func:`waist_axis`: the grids, around the setup's values;
* :func:`power_changes`, :func:`map_changes`, :func:`route_changes`: for each
  grid point, the ``(key, value)`` edits to make (the ``--set`` keys);
* :func:`sweep`: evaluate every point with any evaluator, yielding results
  one by one so a caller can show them as they come and stop early;
* :func:`route_list`, :func:`least_power`: figures for the route table.
"""

from dataclasses import dataclass

import numpy as np

from pumpsim.lines import line
from pumpsim.schema import fields_of

WAIST_DECADES = 0.6  # waist grid: the set waist times 10**(-0.6 ... +0.6)
POWER_POINTS, MAP_WAISTS = 16, 8  # the map uses the power tab's powers


def _field(key):
    return next(f for f in fields_of("beam") if f.key == key)


def _grid(lo, hi, n, value):
    """``n`` log-spaced values from ``lo`` to ``hi`` and ``value``, 3 significant digits."""
    axis = np.logspace(np.log10(lo), np.log10(hi), n)
    if value > 0:
        axis = np.append(axis, value)
    return np.unique([float(f"{x:.3g}") for x in axis])


def power_axis(setup, beam, n=POWER_POINTS):
    """Powers (mW) for the curves: the power slider's whole span (widened to a
    decade either side of the set power if need be), plus the set power."""
    lo, hi = _field("power_mW").span
    p = setup.beam(beam).power * 1e3
    if p > 0:
        lo, hi = min(lo, p / 10), max(hi, p * 10)
    return _grid(lo, hi, n, p)


def waist_axis(setup, beam, n=MAP_WAISTS):
    """Waists along the atomic beam (mm) for the map: around the set waist, within the slider span."""
    lo, hi = _field("waist_mm").span
    w = setup.beam(beam).waist * 1e3
    return _grid(max(lo, w * 10**-WAIST_DECADES), min(hi, w * 10**WAIST_DECADES), n, w)


def power_changes(beam, powers):
    """One edit list per power."""
    return [[(f"beam.{beam}.power_mW", float(p))] for p in powers]


def map_changes(beam, powers, waists):
    """One edit list per (waist, power), waist-major: point ``i * len(powers) + j``."""
    return [[(f"beam.{beam}.waist_mm", float(w)), (f"beam.{beam}.power_mW", float(p))]
            for w in waists for p in powers]


def route_changes(beam, routes, powers):
    """One edit list per (route, power), route-major."""
    return [[(f"beam.{beam}.transition", [r.lower, r.upper]), (f"beam.{beam}.power_mW", float(p))]
            for r in routes for p in powers]


def sweep(setup, changes, evaluate):
    """Evaluate the setup with each list of edits applied.

    Parameters
    ----------
    setup : Setup
    changes : list of list of (str, object)
        ``--set`` keys and file-unit values per point.
    evaluate : callable
        ``evaluate(setup) -> Result``.

    Yields
    ------
    (int, Result)
        Point index and its result, in order.
    """
    for i, edits in enumerate(changes):
        s = setup
        for key, value in edits:
            s = s.with_value(key, value)
        yield i, evaluate(s)


@dataclass(frozen=True)
class Route:
    """One candidate line for a beam: its lower level to ``upper``.

    Parameters
    ----------
    lower, upper : str
    wavelength : float
        Vacuum wavelength, m.
    sigma0 : float
        Peak cross-section with the beam's laser linewidth, m^2.
    branching_target, branching_other : float
        Fractions of the upper level's decays into the setup's target and into ``other``.
    """

    lower: str
    upper: str
    wavelength: float
    sigma0: float
    branching_target: float
    branching_other: float


def route_list(setup, beam):
    """Every line of the scheme out of ``beam``'s lower level, in order of wavelength."""
    b, scheme = setup.beam(beam), setup.scheme
    out = []
    for d in scheme.decays:
        if d.lower != b.lower:
            continue
        G = scheme.total_rate(d.upper)
        to_target = scheme.decay(d.upper, setup.target)
        out.append(Route(b.lower, d.upper, d.wavelength,
                         line(scheme, b.lower, d.upper).sigma0(b.linewidth),
                         to_target.rate / G if to_target else 0.0,
                         scheme.unlisted_rate(d.upper) / G))
    return sorted(out, key=lambda r: r.wavelength)


def least_power(powers, fractions, wanted):
    """Least power on a curve that reaches ``wanted``, interpolated in log power.

    Parameters
    ----------
    powers : array, increasing, > 0
    fractions : array
        Transfer fraction at each power (NaN: not computed yet).
    wanted : float

    Returns
    -------
    float or None
        ``None`` when no computed point reaches ``wanted``.
    """
    p, f = np.asarray(powers, dtype=float), np.asarray(fractions, dtype=float)
    hit = np.nonzero(f >= wanted)[0]
    if not len(hit):
        return None
    i = hit[0]
    if i == 0 or not np.isfinite(f[i - 1]):
        return float(p[i])
    t = (wanted - f[i - 1]) / (f[i] - f[i - 1])
    return float(np.exp(np.log(p[i - 1]) + t * (np.log(p[i]) - np.log(p[i - 1]))))

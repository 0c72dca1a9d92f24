"""Flux-weighted means over speed, angle and offset, refined until converged.

The work is split in three, each with its share of the user's tolerance:

1. the integration grid along z, refined (steps per waist doubled) on a few
   probe atoms at the extremes of the ensemble until the final states stop
   changing (``ODE_SHARE``);
2. the angle and offset rules, doubled until the means stop changing
   (``INNER_SHARE``);
3. the speed panels, split where the Gauss-Kronrod difference is largest
   until the summed estimate is below ``SPEED_SHARE``. Panel edges are put
   at the speeds a beam crossing at an angle selects, so a narrow velocity
   class cannot fall between nodes.

Every evaluation integrates its nodes together in chunks of ``CHUNK``.
"""

import math
import os
import time
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, replace

import numpy as np
from scipy import sparse

from .quadrature import half_normal_rule, normal_rule, speed_panel
from .sources import speeds_of

ODE_SHARE, INNER_SHARE, SPEED_SHARE = 0.1, 0.2, 0.5
CHUNK = 2048
MAX_PER_WAIST = 1024
# Doubling the grid of a method of order p shrinks its error 2**p times, so the error of the
# finer grid is the change divided by 2**p - 1. The integrator is of order 4 on smooth
# profiles but shows order 3 in strongly saturated wings; 2**3 - 1 is the safe divisor.
GRID_ORDER_FACTOR = 7.0
ANGLE_RULES, OFFSET_RULES = (3, 6, 12, 24, 48, 96), (2, 3, 6, 12, 24, 48)
COARSE = 1e-3  # at this tolerance or looser, refinement starts from the smallest rules


def starting_point(tolerance):
    """Where refinement starts: steps per waist, first angle and offset rules (indices
    into the ladders) and speed panels. Starting small makes coarse answers cheap;
    starting one rung up saves a rung at the default tolerance, where it is always climbed."""
    if tolerance >= COARSE:
        return dict(per_waist=2, rung=0, panels=3)
    return dict(per_waist=4, rung=1, panels=6)
DEFLECTION_FLOOR = 1e-7  # rad; below this a deflection is judged absolutely
# Speed panels are not split below this fraction of the speed support. Where the source
# density stays finite at v = 0 the mean photon number and deflection of the slowest
# atoms diverge (transit time 1/v), so bisection there would never end.
NARROWEST_PANEL = 1e-6


# numpy releases the GIL inside its array loops, so threads share the batched work
WORKERS = max(1, min(4, os.cpu_count() or 1))
_POOL = None


def _pool():
    global _POOL
    if _POOL is None:
        _POOL = ThreadPoolExecutor(WORKERS, thread_name_prefix="pumpsim")
    return _POOL


@dataclass
class Evaluated:
    """Per-node values of one evaluation."""

    v: np.ndarray
    a: np.ndarray
    y0: np.ndarray
    weight: np.ndarray
    values: np.ndarray  # (n, C): level populations, photons, deflection
    profile: np.ndarray  # (groups, k, L + 1) weighted sums along the grid


@dataclass
class EnsembleAverage:
    """Ensemble means and the numerics behind them."""

    values: np.ndarray
    profile: np.ndarray
    z: np.ndarray
    nodes: Evaluated
    per_waist: float
    errors: dict
    nodes_evaluated: int
    converged: bool
    rules: dict
    seconds: float


class EnsembleIntegrator:
    """Adaptive ensemble average of one :class:`~pumpsim.model.RateModel`.

    Parameters
    ----------
    model : RateModel
    propagator : Propagator
    tolerance : float
        Absolute tolerance on populations (relative on photons and deflection).
    max_nodes : int
        Refinement stops (unconverged) rather than exceed this many nodes.
    progress : callable, optional
        ``progress(message)`` after each refinement round.
    """

    def __init__(self, model, propagator, tolerance, max_nodes, progress=None):
        self.model, self.propagator = model, propagator
        self.tol, self.max_nodes = tolerance, max_nodes
        self.progress = progress or (lambda message: None)
        self.speeds = speeds_of(model.setup.source, model.setup.scheme.mass)
        self.n_levels = len(model.setup.scheme.levels) + 1
        self.n_beams = len(model.setup.beams)
        self.evaluated = 0

    # -- evaluation ---------------------------------------------------------
    def _values(self, v, final):
        levels, photons, deflection = self.model.outputs(v, final)
        return np.concatenate([levels, photons, deflection], axis=1)

    def scale(self, values):
        """Per-component scale turning differences into tolerance units."""
        L, B = self.n_levels, self.n_beams
        s = np.ones(values.shape[-1])
        s[L:L + B] = np.maximum(1.0, np.abs(values[L:L + B]))
        s[L + B:] = np.maximum(DEFLECTION_FLOOR, np.abs(values[L + B:]))
        return s

    def evaluate(self, v, a, y0, weight, groups, n_groups, z):
        """Propagate nodes (in chunks) and return their values and grouped profiles."""
        n = len(v)
        values = np.empty((n, self.n_levels + 2 * self.n_beams))
        profile = np.zeros((n_groups, len(z), self.n_levels))
        S = self.model.n_states
        size = max(1, min(CHUNK, -(-n // WORKERS)))

        def work(sl):
            problem = self.model.problem(v[sl], a[sl], y0[sl])
            m = sl.stop - sl.start
            reducer = sparse.csr_matrix((weight[sl], (groups[sl], np.arange(m))),
                                        shape=(n_groups, m))
            traj = self.propagator.propagate(problem, z, reducer)
            values[sl] = self._values(v[sl], traj.final)
            return self.model.basis.to_levels(traj.reduced[..., :S]).transpose(1, 0, 2)

        chunks = [slice(lo, min(lo + size, n)) for lo in range(0, n, size)]
        if len(chunks) == 1 or not self.propagator.batched:
            parts = map(work, chunks)
        else:
            parts = _pool().map(work, chunks)
        for part in parts:
            profile += part
        self.evaluated += n
        return Evaluated(v, a, y0, weight, values, profile)

    # -- 1. grid along z ----------------------------------------------------
    def probe_speeds(self):
        if self.speeds.single_speed is not None:
            return np.array([self.speeds.single_speed])
        lo, hi = self.speeds.support()
        v = np.linspace(lo, hi, 4001)
        cdf = np.cumsum(self.speeds.density(v))
        cdf /= cdf[-1]
        return np.interp([1e-3, 0.5, 1 - 1e-3], cdf, v)

    def converge_grid(self):
        """Steps per waist at which probe atoms' final states agree to the ODE share."""
        src = self.model.setup.source
        v = self.probe_speeds()
        a = np.array([0.0, 2.0, -2.0]) * src.divergence_rms
        V, A = (x.ravel() for x in np.meshgrid(v, a))
        problem = self.model.problem(V, A, np.zeros_like(V))
        if not self.propagator.batched:
            return starting_point(self.tol)["per_waist"], 0.0
        per = starting_point(self.tol)["per_waist"]
        prev = self._values(V, self.propagator.propagate(problem, self.model.grid(per)).final)
        while True:
            fine = self._values(V, self.propagator.propagate(problem, self.model.grid(2 * per)).final)
            err = np.max(np.abs(fine - prev) / self.scale(fine.mean(axis=0))) / GRID_ORDER_FACTOR
            per *= 2
            self.progress(f"grid: {per} steps per waist, error estimate {err:.2g}")
            if err <= ODE_SHARE * self.tol or per >= MAX_PER_WAIST:
                return per, float(err)
            prev = fine

    # -- 2 and 3. quadrature --------------------------------------------------
    def breakpoints(self):
        """Speed-panel edges: equal panels plus the velocity classes angled beams select."""
        lo, hi = self.speeds.support()
        edges = list(np.linspace(lo, hi, starting_point(self.tol)["panels"] + 1))
        m = self.model
        for t, (i, sign) in enumerate(m.terms):
            b, ln = m.setup.beams[i], m.lines[i]
            kc = sign * ln.k * math.cos(b.angle)
            if abs(math.cos(b.angle)) < 1e-6:
                continue
            gamma = ln.gamma(b.linewidth)
            s0 = m.shapes[i].peak_intensity / ln.saturation_intensity()
            width = gamma * math.sqrt(1 + s0) / abs(kc)
            for c in m.basis.couplings(b):
                vr = 2 * math.pi * (b.detuning - c.shift) / kc
                for f in (-8, -3, -1, 0, 1, 3, 8):
                    x = vr + f * width
                    if lo < x < hi:
                        edges.append(x)
        return np.unique(edges)

    def panel_nodes(self, panels, rule):
        """All nodes of some speed panels under an inner (angle, offset) rule."""
        a_in, y_in, w_in = rule
        vs, wk, wg = zip(*(speed_panel(self.speeds, lo, hi) for lo, hi in panels))
        vs, wk, wg = np.concatenate(vs), np.concatenate(wk), np.concatenate(wg)
        k = len(a_in)
        V = np.repeat(vs, k)
        WK = np.repeat(wk, k) * np.tile(w_in, len(vs))
        WG = np.repeat(wg, k) * np.tile(w_in, len(vs))
        group = np.repeat(np.arange(len(panels)), 15 * k)
        return V, np.tile(a_in, len(vs)), np.tile(y_in, len(vs)), WK, WG, group

    def affordable(self, sizes, per_rule_node):
        """Whether evaluating ``per_rule_node`` nodes for every node of the inner rule
        ``sizes`` stays within ``max_nodes``."""
        return self.evaluated + per_rule_node * sizes["angle"] * sizes["offset"] <= self.max_nodes

    def inner_rule(self, n_angle, n_offset):
        src = self.model.setup.source
        a, wa = normal_rule(n_angle, src.divergence_rms)
        y, wy = half_normal_rule(n_offset, src.width_rms)
        A, Y = np.meshgrid(a, y, indexing="ij")
        return A.ravel(), Y.ravel(), np.outer(wa, wy).ravel()

    def gauss_total(self, panels, rule, z):
        """Ensemble mean from the 7-point Gauss nodes of each speed panel only: a cheaper
        sum for comparing angle and offset rules."""
        if self.speeds.single_speed is not None:
            a, y, w = rule
            v = np.full(len(a), self.speeds.single_speed)
            return w @ self.evaluate(v, a, y, w, np.zeros(len(a), dtype=int), 1, z).values
        V, A, Y, _, WG, _ = self.panel_nodes(panels, rule)
        keep = WG != 0
        ev = self.evaluate(V[keep], A[keep], Y[keep], WG[keep], np.zeros(keep.sum(), dtype=int), 1, z)
        return WG[keep] @ ev.values

    def run_panels(self, panels, rule, z):
        """Evaluate panels; return per-panel Kronrod values, errors, profiles and nodes."""
        if self.speeds.single_speed is not None:
            a, y, w = rule
            v = np.full(len(a), self.speeds.single_speed)
            ev = self.evaluate(v, a, y, w, np.zeros(len(a), dtype=int), 1, z)
            K = w @ ev.values
            return [dict(lo=v[0], hi=v[0], K=K, err=0.0, profile=ev.profile[0], ev=ev)]
        V, A, Y, WK, WG, group = self.panel_nodes(panels, rule)
        ev = self.evaluate(V, A, Y, WK, group, len(panels), z)
        K = sparse.csr_matrix((WK, (group, np.arange(len(V)))), shape=(len(panels), len(V))) @ ev.values
        G = sparse.csr_matrix((WG, (group, np.arange(len(V)))), shape=(len(panels), len(V))) @ ev.values
        out = []
        for p, (lo, hi) in enumerate(panels):
            sel = group == p
            sub = Evaluated(V[sel], A[sel], Y[sel], WK[sel], ev.values[sel], None)
            out.append(dict(lo=lo, hi=hi, K=K[p], G=G[p], profile=ev.profile[p], ev=sub))
        total = K.sum(axis=0)
        for rec in out:
            rec["err"] = float(np.max(np.abs(rec["K"] - rec["G"]) / self.scale(total)))
        return out

    def run(self) -> EnsembleAverage:
        t0 = time.perf_counter()
        per, ode_err = self.converge_grid()
        z = self.model.grid(per)
        src = self.model.setup.source
        rung = starting_point(self.tol)["rung"]
        sizes = {"angle": 1 if src.divergence_rms == 0 else ANGLE_RULES[rung],
                 "offset": 1 if src.width_rms == 0 else OFFSET_RULES[rung]}
        single = self.speeds.single_speed is not None
        edges = [0, 0] if single else self.breakpoints()
        panels = list(zip(edges[:-1], edges[1:]))
        recs = self.run_panels(panels, self.inner_rule(sizes["angle"], sizes["offset"]), z)
        inner_err = 0.0
        start_sizes = dict(sizes)
        current = sum(r["G"] for r in recs) if not single else recs[0]["K"]
        within_budget = True
        for dim, ladder in (("angle", ANGLE_RULES), ("offset", OFFSET_RULES)):
            if sizes[dim] == 1:
                continue
            for step, nxt in enumerate(ladder[ladder.index(sizes[dim]) + 1:]):
                trial = dict(sizes, **{dim: nxt})
                # the trial's Gauss sum, then the Kronrod run of the rule it may become;
                # the first trial always runs, as without it there is no error estimate
                if step and not self.affordable(trial, 2 if single else 22 * len(panels)):
                    within_budget = False
                    break
                value = self.gauss_total(panels, self.inner_rule(trial["angle"], trial["offset"]), z)
                err = float(np.max(np.abs(value - current) / self.scale(value)))
                self.progress(f"{dim} rule {sizes[dim]} -> {nxt} nodes: change {err:.2g}")
                if err <= 0.5 * INNER_SHARE * self.tol:
                    break
                sizes, current = trial, value
            inner_err += err
        if sizes != start_sizes:
            if self.affordable(sizes, 1 if single else 15 * len(panels)):
                recs = self.run_panels(panels, self.inner_rule(sizes["angle"], sizes["offset"]), z)
            else:  # keep the first rules' panels; the change measured says how far off
                sizes, within_budget = start_sizes, False
        rule = self.inner_rule(sizes["angle"], sizes["offset"])
        converged = (within_budget and ode_err <= ODE_SHARE * self.tol
                     and inner_err <= INNER_SHARE * self.tol)
        speed_err = sum(r["err"] for r in recs)
        narrowest = NARROWEST_PANEL * (edges[-1] - edges[0])
        stuck_at = None
        while speed_err > SPEED_SHARE * self.tol:
            limit = SPEED_SHARE * self.tol / len(recs)
            worst = max(r["err"] for r in recs)
            split = [r for r in recs if (r["err"] > limit or r["err"] == worst)
                     and r["hi"] - r["lo"] > narrowest]
            if not split:  # the error sits in panels too narrow to split again
                worst_rec = max(recs, key=lambda r: r["err"])
                stuck_at = 0.5 * (worst_rec["lo"] + worst_rec["hi"])
                converged = False
                break
            new_panels = [p for r in split for p in ((r["lo"], 0.5 * (r["lo"] + r["hi"])),
                                                      (0.5 * (r["lo"] + r["hi"]), r["hi"]))]
            if self.evaluated + len(new_panels) * 15 * len(rule[0]) > self.max_nodes:
                converged = False
                break
            keep = [r for r in recs if not any(r is s for s in split)]
            recs = sorted(keep + self.run_panels(new_panels, rule, z), key=lambda r: r["lo"])
            speed_err = sum(r["err"] for r in recs)
            self.progress(f"speeds: {len(recs)} panels, error estimate {speed_err:.2g}")
        nodes = Evaluated(*(np.concatenate([getattr(r["ev"], f) for r in recs])
                            for f in ("v", "a", "y0", "weight", "values")), None)
        # Self-normalised: the rule's own weight sum (1 to quadrature accuracy, off by
        # ~1e-11 for very narrow speed distributions) divides the sums, so that
        # populations that each node conserves stay conserved by the mean.
        total_weight = nodes.weight.sum()
        nodes = replace(nodes, weight=nodes.weight / total_weight)
        values = sum(r["K"] for r in recs) / total_weight
        profile = sum(r["profile"] for r in recs) / total_weight
        errors = {"ode": ode_err, "angle_offset": inner_err, "speed": speed_err,
                  "total": ode_err + inner_err + speed_err}
        return EnsembleAverage(values, profile, z, nodes, per, errors, self.evaluated,
                               converged and speed_err <= SPEED_SHARE * self.tol,
                               dict(sizes, speed_panels=len(recs), unresolved_speed=stuck_at),
                               time.perf_counter() - t0)

"""Flux-weighted means over speed, angle and offset, refined until converged.

The reported error estimate is the sum of three parts, and refinement goes
on until that sum is within the user's tolerance:

1. the integration grid along z, refined first (steps per waist doubled) on
   a few probe atoms at the extremes of the ensemble until their final states
   change by less than ``ODE_SHARE`` of the tolerance;
2. the angle and offset rules: each one's error is estimated by the change
   its next, doubled rule makes;
3. the speed panels: Gauss-Kronrod differences. Panel edges are put at the
   speeds a beam crossing at an angle selects, so a narrow velocity class
   cannot fall between nodes.

Parts 2 and 3 start from the smallest rules and panels; while the sum is over
the tolerance the largest of them is refined (see :class:`_Refinement`).
So no part is refined further than the whole needs: a fixed share per part
would make the default tolerance climb rules whose error is already small
next to the rest.

Every evaluation integrates its nodes together in chunks of ``CHUNK``, in
one thread: the batched array operations are small enough that threads
sharing them (measured on two cores) doubled the CPU time and gained no
wall time. Parallel work belongs a level up, in the scan executors.
"""

import math
import time
from dataclasses import dataclass, replace

import numpy as np
from scipy import sparse

from .quadrature import (NARROW_POINTS, OFFSET_SPAN, angle_rule, angle_spacing, beam_edges,
                         half_normal_rule, narrow_beam_edges, panel_rule, speed_panel)
from .sources import speeds_of

ODE_SHARE = 0.1  # of the tolerance, for the grid: refined first, on probe atoms only
CHUNK = 2048
PROBE_DIMMING = (3.0, 30.0)  # probe atoms also sit where beams are this many times dimmer
MAX_PER_WAIST = 1024
# Doubling the grid of a method of order p shrinks its error 2**p times, so the error of the
# finer grid is the change divided by 2**p - 1. The integrator is of order 4 on smooth
# profiles but shows order 3 in strongly saturated wings; 2**3 - 1 is the safe divisor.
GRID_ORDER_FACTOR = 7.0
LADDERS = {"angle": (3, 6, 12, 24, 48, 96, 192, 384, 768),
           "offset": (2, 4, 8, 16, 32, 64, 128, 256)}
# The offset-rule check on probe atoms: a fine rule of this many equal 8-point panels; a
# rung fails when it misses the fine rule by more than CHECK_FACTOR times its estimate
# plus CHECK_SLACK times the tolerance. Rules that see the feature have errors within
# about 1.1 times their estimate there (measured on the demo at 30 and 90 degrees); rules
# that both miss a narrow beam or a far knee, orders of magnitude more.
CHECK_PANELS, CHECK_FACTOR, CHECK_SLACK = 8, 2.0, 0.01
NARROW_RUNGS = 6
# The first angle rule may space its nodes this many widths (FWHM) of the narrowest
# transverse Doppler feature apart: a Lorentzian still has a tenth of its height 1.5
# widths off its centre, so that rule and the next one cannot both miss it.
FEATURE_SPACINGS = 3.0  # rungs of the offset ladder of panels around narrow beams (each halves them)
# Refinement starts from the smallest grid, rules and panels at every tolerance: each
# step up is taken only while the summed error estimate asks for it.
START_PER_WAIST, START_PANELS = 2, 3
DEFLECTION_FLOOR = 1e-7  # rad; below this a deflection is judged absolutely
# Speed panels are not split below this fraction of the speed support. Where the source
# density stays finite at v = 0 the mean photon number and deflection of the slowest
# atoms diverge (transit time 1/v), so bisection there would never end.
NARROWEST_PANEL = 1e-6


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
        src = model.setup.source
        self.offset_edges = narrow_beam_edges(src.width_rms,
                                              [b.waist_across for b in model.setup.beams])

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
        for lo in range(0, n, CHUNK):
            sl = slice(lo, min(lo + CHUNK, n))
            problem = self.model.problem(v[sl], a[sl], y0[sl])
            m = sl.stop - sl.start
            reducer = sparse.csr_matrix((weight[sl], (groups[sl], np.arange(m))),
                                        shape=(n_groups, m))
            traj = self.propagator.propagate(problem, z, reducer)
            values[sl] = self._values(v[sl], traj.final)
            profile += self.model.basis.to_levels(traj.reduced[..., :S]).transpose(1, 0, 2)
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

    def probe_offsets(self):
        """Offsets of the probe atoms: the axis, and where each beam has a third and a
        thirtieth of its peak intensity (within 4 source sigmas). Atoms on the axis
        of a saturating beam end in the same state on any grid; off the axis they
        are pumped part way, and there the grid's error shows."""
        sigma = self.model.setup.source.width_rms
        y = [0.0] + [b.waist_across * math.sqrt(0.5 * math.log(k))
                     for b in self.model.setup.beams for k in PROBE_DIMMING]
        return np.unique([x for x in y if x <= 4 * sigma])

    def converge_grid(self):
        """Steps per waist at which probe atoms' final states agree to the ODE share."""
        src = self.model.setup.source
        v = self.probe_speeds()
        a = np.array([0.0, 2.0, -2.0]) * src.divergence_rms
        V, A, Y = (x.ravel() for x in np.meshgrid(v, a, self.probe_offsets()))
        problem = self.model.problem(V, A, Y)
        if not self.propagator.batched:
            return START_PER_WAIST, 0.0
        per = START_PER_WAIST
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
        edges = list(np.linspace(lo, hi, START_PANELS + 1))
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

    def check_offset_rules(self, z):
        """Keep Gauss-Hermite offset rules only if they pass a test on probe atoms.

        Where every beam is wider across than the source, small Gauss-Hermite
        rules can still miss a saturating knee beyond their outermost node (the
        2- and 4-node rules end at 2.3 and 4.1 sigma) and agree there to round-off.
        So the probe atoms (probe speeds, on the axis in angle) are integrated over
        offsets by the first rungs and by a fine panel rule; if a rung's error
        against the fine rule is larger than the change to its next rung (its
        estimate), every rule becomes panels with edges at each beam's waist across.
        """
        src = self.model.setup.source
        sigma = src.width_rms
        if self.offset_edges is not None or sigma == 0 or not self.propagator.batched:
            return
        rungs = LADDERS["offset"][:3]
        rules = [half_normal_rule(n, sigma) for n in rungs]
        t, w = panel_rule(np.linspace(0.0, OFFSET_SPAN, CHECK_PANELS + 1), 1)
        rules.append((sigma * t, w))
        v = self.probe_speeds()
        Y = np.concatenate([y for y, _ in rules])
        V, Y = (x.ravel() for x in np.meshgrid(v, Y, indexing="ij"))
        final = self.propagator.propagate(self.model.problem(V, np.zeros_like(V), Y), z).final
        values = self._values(V, final).reshape(len(v), -1, self.n_levels + 2 * self.n_beams)
        self.evaluated += len(V)
        cuts = np.cumsum([0] + [len(y) for y, _ in rules])
        means = [np.einsum("j,sjc->sc", wr, values[:, lo:hi])
                 for (_, wr), lo, hi in zip(rules, cuts[:-1], cuts[1:])]
        scale = self.scale(means[-1].mean(axis=0))
        fine = means[-1]
        for k in range(len(rungs) - 1):
            err = np.max(np.abs(means[k] - fine) / scale)
            change = np.max(np.abs(means[k + 1] - means[k]) / scale)
            if err > CHECK_FACTOR * change + CHECK_SLACK * self.tol:
                self.offset_edges = beam_edges(sigma, [b.waist_across for b in
                                                       self.model.setup.beams])
                self.progress(f"offsets: {rungs[k]}-node rule off by {err:.2g} on probe "
                              f"atoms, its estimate {change:.2g}: panels at the beams")
                return

    def ladders(self):
        """The angle and offset rule ladders of this setup.

        Refinement trusts a rule's error only as the change its next rule makes,
        so the first rule must already see the narrowest feature: two rules that
        both miss it agree on the wrong answer. Offsets: around a beam narrower
        across than the source, panels with edges at its waist across (each rung
        halves every panel). Angles: the ladder starts at the first rule whose
        central node spacing (:func:`~pumpsim.quadrature.angle_spacing`) is within
        :data:`FEATURE_SPACINGS` widths of the narrowest transverse Doppler feature,
        the power-broadened line width
        over ``k v sin(theta)`` at the fastest probe speed; at least two rungs stay
        so that the last rule used has an estimate.
        """
        angle = LADDERS["angle"]
        feature = self.angle_feature()
        start = next((i for i, n in enumerate(angle) if angle_spacing(n) <= FEATURE_SPACINGS * feature),
                     len(angle) - 2)
        angle = angle[min(start, len(angle) - 2):]
        if self.offset_edges is None:
            return {"angle": angle, "offset": LADDERS["offset"]}
        base = NARROW_POINTS * (len(self.offset_edges) - 1)
        return {"angle": angle, "offset": tuple(base * 2 ** k for k in range(NARROW_RUNGS))}

    def angle_feature(self):
        """Narrowest transverse Doppler feature in units of the angle spread (inf if none)."""
        m, sigma = self.model, self.model.setup.source.divergence_rms
        if sigma == 0:
            return math.inf
        v = self.probe_speeds()[-1]
        widths = [math.inf]
        for i, b in enumerate(m.setup.beams):
            ln, sin = m.lines[i], abs(math.sin(b.angle))
            if sin < 1e-6:
                continue
            s0 = m.shapes[i].peak_intensity / ln.saturation_intensity()
            widths.append(ln.gamma(b.linewidth) * math.sqrt(1 + s0) / (ln.k * v * sin * sigma))
        return min(widths)

    def affordable(self, sizes, per_rule_node):
        """Whether evaluating ``per_rule_node`` nodes for every node of the inner rule
        ``sizes`` stays within ``max_nodes``."""
        return self.evaluated + per_rule_node * sizes["angle"] * sizes["offset"] <= self.max_nodes

    def inner_rule(self, sizes):
        """Product rule over angle and offset with ``sizes["angle"]`` x ``sizes["offset"]``
        nodes: ``(angles, offsets, weights)``."""
        src = self.model.setup.source
        a, wa = angle_rule(sizes["angle"], src.divergence_rms)
        if self.offset_edges is None:
            y, wy = half_normal_rule(sizes["offset"], src.width_rms)
        else:
            split = sizes["offset"] // (NARROW_POINTS * (len(self.offset_edges) - 1))
            y, wy = panel_rule(self.offset_edges, split, NARROW_POINTS)
            y = y * src.width_rms
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
        # on the coarsest grid: its error is common to the rules compared, and it is cheap
        self.check_offset_rules(self.model.grid(START_PER_WAIST))
        refine = _Refinement(self, self.model.grid(per), ode_err)
        refine.run()
        recs = refine.recs
        nodes = Evaluated(*(np.concatenate([getattr(r["ev"], f) for r in recs])
                            for f in ("v", "a", "y0", "weight", "values")), None)
        # Self-normalised: the rule's own weight sum (1 to quadrature accuracy, off by
        # ~1e-11 for very narrow speed distributions) divides the sums, so that
        # populations that each node conserves stay conserved by the mean.
        total_weight = nodes.weight.sum()
        nodes = replace(nodes, weight=nodes.weight / total_weight)
        values = sum(r["K"] for r in recs) / total_weight
        profile = sum(r["profile"] for r in recs) / total_weight
        errors = refine.errors()
        converged = errors["total"] <= self.tol
        return EnsembleAverage(values, profile, refine.z, nodes, per, errors, self.evaluated,
                               converged,
                               dict(refine.used, speed_panels=len(recs),
                                    unresolved_speed=refine.stuck_at,
                                    limited_by=None if converged else refine.limited_by),
                               time.perf_counter() - t0)


class _Refinement:
    """Steps 2 and 3 of :class:`EnsembleIntegrator` on a fixed grid.

    The reported error is the sum of three estimates: the grid's, the angle and
    offset rules' (for each, the change its next rule makes) and the speed
    panels' (Gauss-Kronrod differences). While the sum exceeds the tolerance
    the largest part is refined: an inner rule climbs its ladder, or the speed
    panels with the largest differences are halved.

    Rules are compared on the first speed panels' Gauss nodes only, whatever
    the panels have become since: a cheap sum whose speed error is the same
    for both rules compared, so that it cancels in their change. The panels
    are rerun with climbed rules only when the speed part is next in line, or
    at the end.
    """

    def __init__(self, ens, z, ode_err):
        self.ens, self.z, self.ode_err = ens, z, ode_err
        src = ens.model.setup.source
        self.single = ens.speeds.single_speed is not None
        spread = {"angle": src.divergence_rms, "offset": src.width_rms}
        self.ladders = ens.ladders()
        self.sizes = {d: 1 if spread[d] == 0 else self.ladders[d][0] for d in self.ladders}
        self.dims = [d for d in self.ladders if self.sizes[d] > 1]
        edges = [0, 0] if self.single else ens.breakpoints()
        self.recs = ens.run_panels(list(zip(edges[:-1], edges[1:])), ens.inner_rule(self.sizes), z)
        self.used = dict(self.sizes)  # the rules self.recs were run with
        self.trial_panels = [(r["lo"], r["hi"]) for r in self.recs]
        total = self.recs[0]["K"] if self.single else sum(r["G"] for r in self.recs)
        self.totals = {self._key(self.sizes): total}  # Gauss means on trial_panels
        self.change = {d: {} for d in self.dims}  # dim -> {size: change to its next rule}
        self.frozen = set()  # dims whose ladder or node budget is spent
        self.top = set()  # dims at the top of their ladder
        self.stuck_at = None
        # why refinement stopped short of the tolerance: "max_nodes", "rules" (a ladder's
        # top), "speed" (panels too narrow to split) or "grid" (finest grid reached)
        self.limited_by = None
        for d in self.dims:  # the first trial always runs: without it there is no estimate
            self._trial(d, always=True)

    # -- bookkeeping --------------------------------------------------------
    @staticmethod
    def _key(sizes):
        return sizes["angle"], sizes["offset"]

    def _total(self, sizes):
        """Gauss-node mean under inner rule ``sizes`` on the trial panels (cached)."""
        key = self._key(sizes)
        if key not in self.totals:
            rule = self.ens.inner_rule(sizes)
            self.totals[key] = self.ens.gauss_total(self.trial_panels, rule, self.z)
        return self.totals[key]

    def inner_error(self, sizes):
        return float(sum(self.change[d][sizes[d]] for d in self.dims))

    def speed_error(self):
        return sum(r["err"] for r in self.recs)

    def errors(self):
        inner = self.inner_error(self.used)
        speed = self.speed_error()
        return {"ode": self.ode_err, "angle_offset": inner, "speed": speed,
                "total": self.ode_err + inner + speed}

    # -- refinement steps -----------------------------------------------------
    def _trial(self, d, always=False):
        """Estimate the error of dim ``d``'s current rule by the change to its next one.
        Returns False (and freezes ``d``) when there is no next rule or no budget."""
        ladder, size = self.ladders[d], self.sizes[d]
        if size == ladder[-1]:
            self.frozen.add(d)
            self.top.add(d)
            return False
        trial = dict(self.sizes, **{d: ladder[ladder.index(size) + 1]})
        # the trial's Gauss sum, then the Kronrod run of the rule it may become
        per_node = 2 if self.single else 7 * len(self.trial_panels) + 15 * len(self.recs)
        if not always and not self.ens.affordable(trial, per_node):
            self.frozen.add(d)
            self.limited_by = "max_nodes"
            return False
        value, fine = self._total(self.sizes), self._total(trial)
        err = float(np.max(np.abs(fine - value) / self.ens.scale(fine)))
        self.change[d][size] = err
        self.ens.progress(f"{d} rule {size} -> {trial[d]} nodes: change {err:.2g}")
        return True

    def _climb(self, d):
        """Move dim ``d`` one rung up; then measure the other dims' changes again at the
        new rule, as a change measured beside a poor rule of ``d`` can be far off (an
        offset change measured beside a 3-node angle rule was half the true one)."""
        ladder = self.ladders[d]
        before = self.sizes[d]
        self.sizes[d] = ladder[ladder.index(before) + 1]
        if not self._trial(d):
            self.sizes[d] = before
            return
        for other in self.dims:
            if other != d and other not in self.frozen:
                self._trial(other)

    def _rerun(self):
        """Run the panels with the rules climbed to; False if that is over budget."""
        per_node = 1 if self.single else 15 * len(self.recs)
        if not self.ens.affordable(self.sizes, per_node):
            self.sizes = dict(self.used)
            self.frozen.update(self.dims)
            self.limited_by = "max_nodes"
            return False
        panels = [(r["lo"], r["hi"]) for r in self.recs]
        self.recs = self.ens.run_panels(panels, self.ens.inner_rule(self.sizes), self.z)
        self.used = dict(self.sizes)
        return True

    def _split(self, budget):
        """Halve the panels whose Gauss-Kronrod difference is largest; False when none
        can be (too narrow, or over the node budget).

        ``budget`` is what the tolerance leaves for the speed part. When the other
        parts already use it all up (they are refined in their turn, once the
        largest), the speed part is still the largest: aim at halving it."""
        recs, ens = self.recs, self.ens
        if budget <= 0:
            budget = 0.5 * self.speed_error()
        limit = budget / len(recs)
        worst = max(r["err"] for r in recs)
        narrowest = NARROWEST_PANEL * (recs[-1]["hi"] - recs[0]["lo"])
        split = [r for r in recs if (r["err"] > limit or r["err"] == worst)
                 and r["hi"] - r["lo"] > narrowest]
        if not split:  # the error sits in panels too narrow to split again
            worst_rec = max(recs, key=lambda r: r["err"])
            self.stuck_at = 0.5 * (worst_rec["lo"] + worst_rec["hi"])
            self.limited_by = "speed"
            return False
        new_panels = [p for r in split for p in ((r["lo"], 0.5 * (r["lo"] + r["hi"])),
                                                  (0.5 * (r["lo"] + r["hi"]), r["hi"]))]
        rule = ens.inner_rule(self.used)
        if ens.evaluated + len(new_panels) * 15 * len(rule[0]) > ens.max_nodes:
            self.limited_by = "max_nodes"
            return False
        keep = [r for r in recs if not any(r is s for s in split)]
        self.recs = sorted(keep + ens.run_panels(new_panels, rule, self.z), key=lambda r: r["lo"])
        ens.progress(f"speeds: {len(self.recs)} panels, error estimate {self.speed_error():.2g}")
        return True

    def run(self):
        tol = self.ens.tol
        while True:
            inner, speed = self.inner_error(self.sizes), self.speed_error()
            if self.ode_err + inner + speed <= tol:
                if self.sizes == self.used or not self._rerun():
                    return
                continue
            # Rules that can climb no further and alone exceed the tolerance cannot
            # be made up for by refining the rest: more work would only cost time.
            if self.ode_err + sum(self.change[d][self.sizes[d]] for d in self.frozen) > tol:
                self.limited_by = self._spent_reason()
                if self.sizes == self.used or not self._rerun():
                    return
                continue
            open_dims = [d for d in self.dims if d not in self.frozen]
            worst = max(open_dims, key=lambda d: self.change[d][self.sizes[d]], default=None)
            if worst is not None and self.change[worst][self.sizes[worst]] > speed:
                self._climb(worst)
            elif self.sizes != self.used:
                self._rerun()
            elif not self._split(tol - self.ode_err - inner):
                return

    def _spent_reason(self):
        """Why the frozen parts alone exceed the tolerance: the grid, a ladder's top, or
        the node budget (whichever part is largest)."""
        parts = {d: self.change[d][self.sizes[d]] for d in self.frozen}
        worst = max(parts, key=parts.get, default=None)
        if worst is None or self.ode_err >= parts[worst]:
            return "grid"
        return "rules" if worst in self.top else "max_nodes"

"""Least-squares fits of a model to measured data, with honest uncertainties.

:func:`least_squares_fit` is the general part: any model that maps parameter
vectors to predictions, minimised with ``scipy.optimize.least_squares`` (the
trust-region reflective method, which keeps parameters inside their bounds).
The Jacobian is taken by forward differences, all columns in one batch, so
that a model whose evaluations are simulations runs them through an
executor together. At the solution:

* covariance ``(J^T J)^-1`` of the weighted Jacobian ``J`` (residuals divided
  by the uncertainties); without uncertainties the data's own scatter stands
  in for them, i.e. the covariance is multiplied by chi^2 per degree of
  freedom (what ``numpy.polyfit(..., cov=True)`` does: common practice);
* standard errors, the correlation matrix, chi^2 per degree of freedom;
* a parameter the data cannot determine is flagged, never given a small
  error: one the predictions do not depend on, one in a combination the
  data cannot tell apart (a near-zero eigenvalue of ``J^T J``, after scaling
  each parameter by its size), one whose standard error exceeds its own size
  or its allowed range, and one that ended on a bound. Its standard error is
  reported as infinite where ``J^T J`` gives none.

:mod:`pumpsim.fitmodel` builds the model from a setup and measured data.
"""

from dataclasses import dataclass

import numpy as np
from scipy.optimize import least_squares

REL_STEP = 1e-6  # forward-difference step, relative to each parameter's typical size
NULL_EIGEN = 1e-10  # eigenvalues of the scaled J^T J below this share of the largest: undetermined
NULL_LOADING = 0.1  # a parameter with this much weight in such a direction is flagged
# A parameter whose change by its whole typical size moves the predictions by less than
# this many uncertainties is one the data do not depend on; it is left out of the
# covariance so that its numerical noise cannot spoil the others' errors.
INSENSITIVE = 1e-3
STRONG_CORRELATION = 0.999


@dataclass(frozen=True)
class Parameter:
    """One free parameter.

    Parameters
    ----------
    name : str
    start : float
    low, high : float
        Bounds (``-inf``/``inf`` for none).
    typical : float
        Its size, for finite-difference steps and scaling (> 0).
    """

    name: str
    start: float
    low: float = -np.inf
    high: float = np.inf
    typical: float = 1.0


@dataclass
class FitResult:
    """Best values and what the data say about them.

    ``stderr[i]`` is ``inf`` where the data fix no value; ``flags[name]`` lists
    why a parameter is not determined (empty when it is)."""

    names: list
    values: np.ndarray
    stderr: np.ndarray
    covariance: np.ndarray
    correlation: np.ndarray
    chi2: float
    dof: int
    predicted: np.ndarray
    residuals: np.ndarray  # (data - model) / uncertainty
    flags: dict
    scaled_by_scatter: bool
    evaluations: int
    success: bool
    message: str

    @property
    def chi2_per_dof(self):
        return self.chi2 / self.dof if self.dof > 0 else float("nan")

    def warnings(self):
        return [f"{n}: {why}" for n, whys in self.flags.items() for why in whys]


def least_squares_fit(model_batch, params, y, sigma=None, max_evaluations=200):
    """Fit ``model_batch`` to data ``y``.

    Parameters
    ----------
    model_batch : callable
        ``model_batch(P)`` for an array ``P`` of parameter vectors (k, p) returns
        the predictions (k, n); the rows may be computed in parallel.
    params : sequence of Parameter
    y : array (n,)
    sigma : array (n,) or None
        Standard uncertainties of ``y``; ``None``: unknown, estimated from the scatter.
    max_evaluations : int
        Most model evaluations the minimiser may ask for.

    Returns
    -------
    FitResult
    """
    y = np.asarray(y, dtype=float)
    weight = 1.0 / (np.ones_like(y) if sigma is None else np.asarray(sigma, dtype=float))
    lo = np.array([p.low for p in params], dtype=float)
    hi = np.array([p.high for p in params], dtype=float)
    typical = np.array([p.typical for p in params], dtype=float)
    cache = {}
    count = [0]

    def batch(P):
        P = np.atleast_2d(P)
        todo = [p for p in P if p.tobytes() not in cache]
        if todo:
            out = np.atleast_2d(model_batch(np.array(todo)))
            count[0] += len(todo)
            cache.update((p.tobytes(), row) for p, row in zip(todo, out))
        return np.array([cache[p.tobytes()] for p in P])

    def fun(p):
        return (batch(p)[0] - y) * weight

    def jac(p):
        steps = REL_STEP * np.maximum(np.abs(p), typical)
        shifted = np.repeat(p[None], len(p) + 1, axis=0)
        up = p + steps <= hi
        steps = np.where(up, steps, -steps)  # step inward at an upper bound
        shifted[1:] += np.diag(steps)
        rows = batch(shifted)
        return ((rows[1:] - rows[0]) / steps[:, None]).T * weight[:, None]

    p0 = np.clip([p.start for p in params], lo, hi)
    res = least_squares(fun, p0, jac=jac, bounds=(lo, hi), x_scale=typical, method="trf",
                        max_nfev=max_evaluations)
    p = res.x
    J = jac(p)
    r = fun(p)
    chi2 = float(r @ r)
    dof = len(y) - len(p)
    scaled = sigma is None
    scatter = np.sqrt(chi2 / dof) if scaled and dof > 0 else 1.0  # the data's own unit
    cov, stderr, flags = _covariance(J, typical, params, scatter)
    if scaled and dof > 0:
        cov = cov * chi2 / dof
        stderr = stderr * np.sqrt(chi2 / dof)
    _flag_errors(params, p, stderr, lo, hi, flags)
    with np.errstate(invalid="ignore", divide="ignore"):
        d = np.sqrt(np.diag(cov))
        corr = cov / np.outer(d, d)
    corr[~np.isfinite(corr)] = np.nan
    for i, a in enumerate(params):
        for j, b in enumerate(params):
            if i < j and abs(corr[i, j]) > STRONG_CORRELATION:
                for n, m in ((a.name, b.name), (b.name, a.name)):
                    flags[n].append(f"correlated {corr[i, j]:+.4f} with {m}: the data fix "
                                    "only a combination of the two")
    return FitResult([q.name for q in params], p, stderr, cov, corr, chi2, dof,
                     batch(p)[0], -r, flags, scaled, count[0], bool(res.success),
                     str(res.message))


def _covariance(J, typical, params, scatter):
    """Covariance from the weighted Jacobian, with directions the data do not constrain
    taken out (their parameters flagged, standard error infinite)."""
    n = len(params)
    flags = {q.name: [] for q in params}
    Js = J * typical  # each parameter in units of its typical size
    col = np.linalg.norm(Js, axis=0)
    deaf = col < INSENSITIVE * scatter
    Js = np.where(deaf, 0.0, Js)
    A = Js.T @ Js
    w, V = np.linalg.eigh(A)
    top = max(w.max(initial=0.0), 0.0)
    null = w <= NULL_EIGEN * top if top > 0 else np.ones(n, dtype=bool)
    stderr = np.full(n, np.inf)
    lost = np.zeros(n, dtype=bool)
    for k in np.flatnonzero(null):
        lost |= np.abs(V[:, k]) > NULL_LOADING
    for i, q in enumerate(params):
        if deaf[i] or top == 0:
            flags[q.name].append("the data do not depend on it")
        elif lost[i]:
            flags[q.name].append("the data cannot tell it apart from a change of the other "
                                 "parameters (a direction they do not constrain)")
    keep = ~null
    inv = (V[:, keep] / w[keep]) @ V[:, keep].T  # pseudo-inverse on the constrained directions
    cov = inv * np.outer(typical, typical)  # back from units of each typical size
    d = np.sqrt(np.maximum(np.diag(cov), 0.0))
    lost |= deaf
    stderr = np.where(lost, np.inf, d)
    cov[lost, :] = np.nan
    cov[:, lost] = np.nan
    for i in np.flatnonzero(lost):
        cov[i, i] = np.inf
    return cov, stderr, flags


def _flag_errors(params, p, stderr, lo, hi, flags):
    for i, q in enumerate(params):
        if flags[q.name]:
            continue
        span = hi[i] - lo[i]
        if np.isfinite(stderr[i]) and stderr[i] > max(abs(p[i]), q.typical):
            flags[q.name].append(f"standard error {stderr[i]:.3g} exceeds its own size: "
                                 "the data hardly determine it")
        elif np.isfinite(span) and stderr[i] > 0.5 * span:
            flags[q.name].append("standard error spans its allowed range")
        if p[i] <= lo[i] or p[i] >= hi[i]:
            flags[q.name].append(f"ended on its bound {p[i]:.6g}: the standard error "
                                 "assumes a free minimum and is not meaningful")

"""Matrix exponentials of many small rate generators at once.

For a Metzler matrix ``X`` (off-diagonal entries >= 0: a rate generator,
possibly with extra non-negative columns) write ``X = Z - mu I`` with
``mu = max(-diag X)``, so that ``Z >= 0`` element-wise and
``exp(X) = exp(-mu) exp(Z)``. After scaling ``X`` by ``2**-s`` so that
``mu <= THETA``, the Taylor series of ``exp(Z)`` has only non-negative terms
(uniformisation: W. K. Grassmann, "Transient solutions in Markovian queueing
systems", Comput. Oper. Res. 4 (1977) 47), so there is no cancellation, the
truncation error is below 2e-16 relative, and ``s`` squarings of a
non-negative matrix stay non-negative. Populations computed with it can
never go negative, however stiff the decays.

Vectorised over a stack: each matrix gets its own ``s``, and only those that
need it are squared. Checked against ``scipy.linalg.expm`` in the tests;
scipy's general-purpose routine costs tens of microseconds per small matrix,
this one a few.
"""

import math

import numpy as np

THETA = 1.0  # largest scaled decay rate; ||Z||_1 <= THETA, and 1/18! < 2e-16
DEGREE = 17
_COEF = [1.0 / math.factorial(k) for k in range(DEGREE + 1)]
_BLOCK = 4  # Paterson-Stockmeyer block size


_STARTS = tuple(range(0, DEGREE + 1, _BLOCK))


def _block(powers, b, m):
    """``sum_j Z^j / (b + j)!`` for ``j < _BLOCK``, from ``powers = [Z, Z^2, ...]``.

    Written as scaled sums rather than one coefficient matrix product: that
    product is large enough for a threaded BLAS to spread over every core,
    which on small stacks costs more in waiting than it saves."""
    out = powers[0] * _COEF[b + 1]
    for j in range(2, _BLOCK):
        if b + j <= DEGREE:
            out += powers[j - 1] * _COEF[b + j]
    idx = np.arange(m)
    out[:, idx, idx] += _COEF[b]
    return out


def _taylor(Z):
    """``sum_k Z^k / k!`` to DEGREE by Paterson-Stockmeyer."""
    m = Z.shape[-1]
    powers = [Z]
    for _ in range(_BLOCK - 2):
        powers.append(powers[-1] @ Z)
    top = powers[-1] @ Z
    out = _block(powers, _STARTS[-1], m)
    for b in _STARTS[-2::-1]:
        out = out @ top
        out += _block(powers, b, m)
    return out


def expm_stack(X):
    """exp of each Metzler matrix in a stack.

    Parameters
    ----------
    X : ndarray, shape (n, m, m)
        Off-diagonal entries must be >= 0 (rate generators).

    Returns
    -------
    ndarray, shape (n, m, m)
        Element-wise non-negative.
    """
    X = np.asarray(X, dtype=float)
    diag = np.einsum("nii->ni", X)
    mu = np.maximum(-diag.min(axis=1), 0.0)
    with np.errstate(divide="ignore"):
        s = np.where(mu > THETA, np.ceil(np.log2(mu / THETA)), 0.0)
    scale = np.exp2(-s)
    mu = mu * scale
    Z = X * scale[:, None, None]
    idx = np.arange(X.shape[-1])
    Z[:, idx, idx] += mu[:, None]
    np.maximum(Z, 0.0, out=Z)  # round-off only: Z is non-negative by construction
    E = _taylor(Z) * np.exp(-mu)[:, None, None]
    if not s.any():
        return E
    # square in order of decreasing s, so that each round works on a prefix
    order = np.argsort(-s, kind="stable")
    E = E[order]
    counts = np.bincount(s.astype(int), minlength=int(s.max()) + 1)
    remaining = len(s) - np.cumsum(counts)  # matrices that need more than j squarings
    for c in remaining[:-1]:
        E[:c] = E[:c] @ E[:c]
    out = np.empty_like(E)
    out[order] = E
    return out

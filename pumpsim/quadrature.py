"""Quadrature rules matched to the ensemble's distributions.

* Speeds: Gauss-Kronrod (7, 15) panels on the source's speed interval, the
  density folded into the weights (nodes and weights of QUADPACK's ``qk15``:
  R. Piessens et al., *QUADPACK*, Springer 1983).
* Angles, ``a ~ Normal(0, s)``: Gauss-Hermite (probabilists').
* Offsets, ``y0 ~ Normal(0, s)``: the positive half of a Gauss-Hermite rule
  with doubled weights, since every beam is centred on y = 0 and the
  intensity depends on ``y0**2`` only.
"""

import numpy as np
from scipy.special import roots_hermitenorm

KRONROD_X = np.array([
    -0.991455371120812639206854697526329, -0.949107912342758524526189684047851,
    -0.864864423359769072789712788640926, -0.741531185599394439863864773280788,
    -0.586087235467691130294144838258730, -0.405845151377397166906606412076961,
    -0.207784955007898467600689403773245, 0.0,
    0.207784955007898467600689403773245, 0.405845151377397166906606412076961,
    0.586087235467691130294144838258730, 0.741531185599394439863864773280788,
    0.864864423359769072789712788640926, 0.949107912342758524526189684047851,
    0.991455371120812639206854697526329])
KRONROD_W = np.array([
    0.022935322010529224963732008058970, 0.063092092629978553290700663189204,
    0.104790010322250183839876322541518, 0.140653259715525918745189590510238,
    0.169004726639267902826583426598550, 0.190350578064785409913256402421014,
    0.204432940075298892414161999234649, 0.209482141084727828012999174891714,
    0.204432940075298892414161999234649, 0.190350578064785409913256402421014,
    0.169004726639267902826583426598550, 0.140653259715525918745189590510238,
    0.104790010322250183839876322541518, 0.063092092629978553290700663189204,
    0.022935322010529224963732008058970])
GAUSS_W = np.zeros(15)  # the 7-point Gauss rule lives on the odd Kronrod nodes
GAUSS_W[1::2] = [0.129484966168869693270611432679082, 0.279705391489276667901467771423780,
                 0.381830050505118944950369775488975, 0.417959183673469387755102040816327,
                 0.381830050505118944950369775488975, 0.279705391489276667901467771423780,
                 0.129484966168869693270611432679082]


def speed_panel(speeds, lo, hi):
    """Nodes and Kronrod and Gauss weights (density included) of one panel.

    Returns
    -------
    v, w_kronrod, w_gauss : ndarray, shape (15,)
    """
    half, mid = 0.5 * (hi - lo), 0.5 * (hi + lo)
    v = mid + half * KRONROD_X
    d = speeds.density(v) * half
    return v, KRONROD_W * d, GAUSS_W * d


def normal_rule(n, sigma):
    """``n``-point Gauss-Hermite rule for ``Normal(0, sigma)``; one node at 0 if sigma is 0."""
    if sigma == 0 or n <= 1:
        return np.zeros(1), np.ones(1)
    x, w = roots_hermitenorm(n)
    return sigma * x, w / w.sum()


def half_normal_rule(n, sigma):
    """``n`` nodes on ``y >= 0`` integrating even functions against ``Normal(0, sigma)``."""
    if sigma == 0 or n <= 1:
        return np.zeros(1), np.ones(1)
    x, w = roots_hermitenorm(2 * n)
    keep = x > 0
    return sigma * x[keep], 2 * w[keep] / w.sum()

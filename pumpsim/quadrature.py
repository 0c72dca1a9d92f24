"""Quadrature rules matched to the ensemble's distributions.

* Speeds: Gauss-Kronrod (7, 15) panels on the source's speed interval, the
  density folded into the weights (nodes and weights of QUADPACK's ``qk15``:
  R. Piessens et al., *QUADPACK*, Springer 1983).
* Angles, ``a ~ Normal(0, s)``: Gauss-Hermite (probabilists').
* Offsets, ``y0 ~ Normal(0, s)``: nodes on ``y0 >= 0`` only, since every
  beam is centred on y = 0 and the intensity depends on ``y0**2`` only. Small
  rules are the positive half of a Gauss-Hermite rule with doubled weights;
  larger ones are equal Gauss-Legendre panels (see :func:`half_normal_rule`).
"""

import numpy as np
from scipy.special import roots_hermitenorm, roots_legendre

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


HERMITE_MAX = 8  # offset rules of up to this many nodes are Gauss-Hermite
PANEL_POINTS = 8  # Gauss-Legendre points per panel of the larger offset rules
OFFSET_SPAN = 6.5  # larger offset rules cover 0 <= y <= OFFSET_SPAN sigma (mass left out: 8e-11)


def half_normal_rule(n, sigma):
    """``n`` nodes on ``y >= 0`` integrating even functions against ``Normal(0, sigma)``.

    Up to :data:`HERMITE_MAX` nodes: the positive half of a ``2n``-point
    Gauss-Hermite rule. Beyond: ``n / PANEL_POINTS`` equal panels on
    ``[0, OFFSET_SPAN sigma]``, each an 8-point Gauss-Legendre rule with the
    density folded into its weights. Why: once the source is as wide as the
    pump beam, the transfer fraction against offset is flat where the pump
    saturates and then drops within a third of ``sigma`` (a knee). Gauss-Hermite
    rules spend their nodes by the density, not where the knee is, and
    converged slowly on it: error 3e-3 at 16 nodes, 1.6e-3 at 32, 8e-6 at 64;
    equal panels gave 6e-3, 7e-6 and 3e-7 (measured for 600 m/s atoms of a
    3 mm rms source crossing the demo's pump, 3 mm waist across, at right
    angles, against an 8001-point trapezoid sum).

    Parameters
    ----------
    n : int
        Number of nodes; above ``HERMITE_MAX`` a multiple of ``PANEL_POINTS``.
    sigma : float
        Standard deviation of the normal distribution.

    Returns
    -------
    y, w : ndarray
        Nodes (``y >= 0``) and weights summing to 1.
    """
    if sigma == 0 or n <= 1:
        return np.zeros(1), np.ones(1)
    if n <= HERMITE_MAX:
        x, w = roots_hermitenorm(2 * n)
        keep = x > 0
        return sigma * x[keep], 2 * w[keep] / w.sum()
    panels, rest = divmod(n, PANEL_POINTS)
    if rest:
        raise ValueError(f"an offset rule above {HERMITE_MAX} nodes needs a multiple of "
                         f"{PANEL_POINTS}, not {n}")
    x, w = roots_legendre(PANEL_POINTS)
    half = 0.5 * OFFSET_SPAN / panels
    mid = half * (2 * np.arange(panels) + 1)
    t = (mid[:, None] + half * x).ravel()  # in units of sigma
    w = (half * w * np.exp(-0.5 * t.reshape(panels, -1) ** 2)).ravel()
    return sigma * t, w / w.sum()

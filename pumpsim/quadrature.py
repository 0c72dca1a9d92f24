"""Quadrature rules matched to the ensemble's distributions.

* Speeds: Gauss-Kronrod (7, 15) panels on the source's speed interval, the
  density folded into the weights (nodes and weights of QUADPACK's ``qk15``:
  R. Piessens et al., *QUADPACK*, Springer 1983).
* Angles, ``a ~ Normal(0, s)``: Gauss-Hermite (probabilists').
* Offsets, ``y0 ~ Normal(0, s)``: nodes on ``y0 >= 0`` only, since every
  beam is centred on y = 0 and the intensity depends on ``y0**2`` only. Small
  rules are the positive half of a Gauss-Hermite rule with doubled weights;
  larger ones are equal Gauss-Legendre panels (see :func:`half_normal_rule`).
  When a beam is much narrower across than the source, every rule is a set of
  panels with edges at that beam's waist across (see :func:`narrow_beam_edges`).
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


ANGLE_HERMITE_MAX = 96  # angle rules of up to this many nodes are Gauss-Hermite


def angle_rule(n, sigma):
    """``n``-point rule for ``Normal(0, sigma)`` angles.

    Up to :data:`ANGLE_HERMITE_MAX` nodes Gauss-Hermite (:func:`normal_rule`);
    beyond, ``n / PANEL_POINTS`` equal Gauss-Legendre panels on
    ``[-OFFSET_SPAN sigma, OFFSET_SPAN sigma]``, an even number so that 0 is an
    edge. Why: a beam at right angles on resonance pumps a narrow Lorentzian
    band of angles around 0 once the transverse Doppler width exceeds the
    power-broadened line width; Gauss-Hermite rules converge on it slowly (at
    20 mrad and 96 nodes the change was still 1.4e-3), panels converge fast.
    """
    if sigma == 0 or n <= ANGLE_HERMITE_MAX:
        return normal_rule(n, sigma)
    panels, rest = divmod(n, 2 * PANEL_POINTS)
    if rest:
        raise ValueError(f"an angle rule above {ANGLE_HERMITE_MAX} nodes needs a multiple of "
                         f"{2 * PANEL_POINTS}, not {n}")
    t, w = panel_rule(np.linspace(0.0, OFFSET_SPAN, panels + 1), 1)
    return sigma * np.concatenate([-t[::-1], t]), 0.5 * np.concatenate([w[::-1], w])


def angle_spacing(n):
    """Largest node spacing near 0 of the ``n``-point :func:`angle_rule`, in sigmas:
    about pi / sqrt(n) for Gauss-Hermite rules; for panels 1.5 times the mean
    spacing (the largest gap of 8-point Gauss-Legendre nodes, 0.18 of a panel)."""
    if n <= ANGLE_HERMITE_MAX:
        return np.pi / np.sqrt(n)
    return 1.5 * 2 * OFFSET_SPAN / n


def normal_rule(n, sigma):
    """``n``-point Gauss-Hermite rule for ``Normal(0, sigma)``; one node at 0 if sigma is 0."""
    if sigma == 0 or n <= 1:
        return np.zeros(1), np.ones(1)
    x, w = roots_hermitenorm(n)
    return sigma * x, w / w.sum()


HERMITE_MAX = 8  # offset rules of up to this many nodes are Gauss-Hermite
PANEL_POINTS = 8  # Gauss-Legendre points per panel of the larger offset rules
OFFSET_SPAN = 6.5  # larger offset rules cover 0 <= y <= OFFSET_SPAN sigma (mass left out: 8e-11)
# Gauss-Hermite offset rules are trusted only while every beam is at least this many source
# sigmas wide across (1/e^2 radius): the 2-node rule's first node, 0.74 sigma, then lies
# within 1.5 waists of the axis, where the beam still has 1 % of its peak intensity.
# Narrower beams fall between the nodes of the small rules, whose changes then agree on
# the wrong answer (the unpumped one).
HERMITE_TRUST = 0.5
# Panel edges at these multiples of a narrow beam's waist across: its core, and the knee
# of a saturating beam (where s0 exp(-2 y^2 / w^2) ~ 1: 2.1 w at s0 = 1e4).
WAIST_EDGES = (0.5, 1.0, 1.5, 2.0, 3.0)
TAIL_PANELS = 2  # equal panels on [0, OFFSET_SPAN sigma] besides a narrow beam's edges
# Gauss-Legendre points per panel around narrow beams: the panels are already placed on
# the features, and on saturating knees 1e-6 to 1e6 times the saturation intensity, beams
# 0.02 to 0.45 source sigmas wide, each rule's change to the next (every panel halved)
# was within a factor 1.3 of its true error wherever that error exceeded 1e-6 (measured
# against a 4000-panel rule).
NARROW_POINTS = 4


def panel_rule(edges, split, points=PANEL_POINTS):
    """Composite Gauss-Legendre rule for a standard half-normal density.

    Every panel between consecutive ``edges`` (in units of sigma) is cut into
    ``split`` equal parts, each a ``points``-point Gauss-Legendre rule with the
    density folded into its weights.

    Returns
    -------
    t, w : ndarray
        Nodes (units of sigma) and weights summing to 1.
    """
    edges = np.asarray(edges, dtype=float)
    cuts = np.concatenate([np.linspace(lo, hi, split + 1)[:-1]
                           for lo, hi in zip(edges[:-1], edges[1:])] + [edges[-1:]])
    x, w = roots_legendre(points)
    half = 0.5 * np.diff(cuts)
    mid = 0.5 * (cuts[:-1] + cuts[1:])
    t = (mid[:, None] + half[:, None] * x).ravel()
    w = (half[:, None] * w * np.exp(-0.5 * (mid[:, None] + half[:, None] * x) ** 2)).ravel()
    return t, w / w.sum()


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
    t, w = panel_rule(np.linspace(0.0, OFFSET_SPAN, panels + 1), 1)
    return sigma * t, w


def narrow_beam_edges(sigma, waists_across):
    """Offset panel edges (units of sigma) that resolve every beam narrower across than
    :data:`HERMITE_TRUST` sigma, or ``None`` when Gauss-Hermite rules can be trusted.

    The edges are those of :data:`TAIL_PANELS` equal panels on
    ``[0, OFFSET_SPAN]`` plus :data:`WAIST_EDGES` times each narrow beam's waist
    across, so that the first rule already has nodes in every narrow beam's core.
    """
    if sigma == 0:
        return None
    if not any(w < HERMITE_TRUST * sigma for w in waists_across):
        return None
    return beam_edges(sigma, waists_across)


def beam_edges(sigma, waists_across):
    """Offset panel edges (units of sigma): :data:`TAIL_PANELS` equal panels on
    ``[0, OFFSET_SPAN]`` and :data:`WAIST_EDGES` times every beam's waist across."""
    edges = set(np.linspace(0.0, OFFSET_SPAN, TAIL_PANELS + 1))
    edges.update(f * w / sigma for w in waists_across for f in WAIST_EDGES
                 if f * w < OFFSET_SPAN * sigma)
    return np.unique(np.fromiter(edges, float))

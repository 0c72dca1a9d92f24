"""The offset and angle rules against closed forms and scipy.integrate.quad.

* Moments of the normal distribution: ``E[y^2] = s^2``, ``E[y^4] = 3 s^4``
  (any statistics handbook; e.g. Abramowitz and Stegun 26.2.11, from memory).
* A saturating knee, ``1 - exp(-x0 exp(-2 y^2 / w^2))``: the weak-pumping
  transfer at offset ``y`` from a Gaussian beam of waist ``w`` (see
  test_analytic_rates.py), averaged over ``y ~ Normal(0, s)`` by
  ``scipy.integrate.quad`` as the reference.
"""

import math

import numpy as np
import pytest
from scipy import integrate

from pumpsim import ensemble
from pumpsim.quadrature import ANGLE_HERMITE_MAX, angle_rule, half_normal_rule, normal_rule

SIGMA = 1.0  # unitless: pytest.approx's absolute floor of 1e-12 would swamp mm^4


@pytest.mark.parametrize("n", ensemble.LADDERS["offset"])
def test_offset_rules_reproduce_normal_moments(n):
    y, w = half_normal_rule(n, SIGMA)
    assert len(y) == n and np.all(y >= 0) and np.all(w > 0)
    assert w.sum() == pytest.approx(1.0, abs=1e-14)
    # Gauss-Hermite rules are exact here. The panel rules are not (measured: 6e-8 and
    # 2e-7 off with two panels), and leave out the mass beyond 6.5 sigma, which
    # alone shifts the moments by 3e-9 and 5e-8.
    assert w @ y**2 == pytest.approx(SIGMA**2, rel=1e-7)
    assert w @ y**4 == pytest.approx(3 * SIGMA**4, rel=3e-7)


@pytest.mark.parametrize("n", ensemble.LADDERS["angle"])
def test_angle_rules_reproduce_normal_moments(n):
    a, w = normal_rule(n, SIGMA)
    assert w.sum() == pytest.approx(1.0, abs=1e-14)
    assert w @ a == pytest.approx(0.0, abs=1e-15)
    assert w @ a**2 == pytest.approx(SIGMA**2, rel=1e-12)


@pytest.mark.parametrize("x0", [10.0, 1000.0])
@pytest.mark.parametrize("ratio", [0.5, 1.0, 2.0])
def test_offset_rules_converge_on_a_saturating_knee(x0, ratio):
    """Sources from half as wide as the beam's waist to twice as wide: the top rules of
    the ladder must agree with quad to 1e-6 (measured: 2e-7 at worst, 128 nodes)."""
    s, wc = ratio * 1e-3, 1e-3
    knee = lambda y: 1 - np.exp(-x0 * np.exp(-2 * y**2 / wc**2))
    density = lambda y: 2 * math.exp(-0.5 * (y / s) ** 2) / (math.sqrt(2 * math.pi) * s)
    want = integrate.quad(lambda y: density(y) * knee(y), 0, np.inf,
                          epsabs=1e-13, epsrel=1e-13, limit=200)[0]
    errors = {n: abs(w @ knee(y) - want)
              for n in ensemble.LADDERS["offset"] for y, w in [half_normal_rule(n, s)]}
    assert errors[128] < 1e-6 and errors[256] < 1e-6


def test_panel_rules_need_whole_panels():
    with pytest.raises(ValueError, match="multiple of 8"):
        half_normal_rule(12, SIGMA)


@pytest.mark.parametrize("n", [n for n in ensemble.LADDERS["angle"] if n > ANGLE_HERMITE_MAX])
def test_angle_panel_rules_reproduce_normal_moments(n):
    # The panels stop at 6.5 sigma. What the moments lose beyond (closed forms of the
    # normal tail): E[a^2] 2 phi(6.5) 6.5 + 2 Q(6.5) = 3.6e-9, E[a^4]
    # 2 phi(6.5) (6.5^3 + 3 * 6.5) + 6 Q(6.5) = 1.6e-7 (5.2e-8 of 3).
    a, w = angle_rule(n, SIGMA)
    assert w.sum() == pytest.approx(1.0, rel=1e-14)
    assert w @ a == pytest.approx(0.0, abs=1e-15 * SIGMA)
    assert w @ a**2 == pytest.approx(SIGMA**2, rel=1e-8)
    assert w @ a**4 == pytest.approx(3 * SIGMA**4, rel=1e-7)

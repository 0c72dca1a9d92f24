"""Effusive oven: flux-weighted ``f(v) ~ v^3 exp(-m v^2 / (2 kB T))``."""

import math

import numpy as np

from .. import constants as K
from .base import SpeedDistribution

TAIL_X = 31.5  # (1 + x) exp(-x) < 1e-12 beyond x = m v^2/(2 kB T) = 31.5


class Effusive(SpeedDistribution):
    """Parameters
    ----------
    temperature : float
        Source temperature, K.
    mass : float
        Atomic mass, kg.
    """

    def __init__(self, temperature, mass):
        self.sigma = math.sqrt(K.kB * temperature / mass)  # thermal speed scale, m/s

    def support(self):
        return (0.0, self.sigma * math.sqrt(2.0 * TAIL_X))

    def density(self, v):
        v = np.asarray(v, dtype=float)
        s = self.sigma
        return v**3 * np.exp(-0.5 * (v / s) ** 2) / (2.0 * s**4)

    def mean(self):
        # <v> = int v^4 e^{-v^2/2s^2} / int v^3 e^{-v^2/2s^2} = 3 sqrt(pi/2) s / 2
        return 1.5 * math.sqrt(math.pi / 2.0) * self.sigma

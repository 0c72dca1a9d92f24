"""Supersonic or buffer-gas style source: ``f(v) ~ exp(-(v - v0)^2 / (2 s^2))`` for ``v > 0``."""

import math

import numpy as np
from scipy.special import ndtr

from .base import SpeedDistribution

TAIL_SIGMAS = 7.5  # a normal tail beyond 7.5 s holds < 1e-13


class GaussianSpeeds(SpeedDistribution):
    """Parameters
    ----------
    speed : float
        Centre speed v0, m/s.
    spread : float
        rms spread s, m/s.
    """

    def __init__(self, speed, spread):
        self.v0, self.s = speed, spread
        self.norm = spread * math.sqrt(2 * math.pi) * ndtr(speed / spread)

    def support(self):
        return (max(0.0, self.v0 - TAIL_SIGMAS * self.s), self.v0 + TAIL_SIGMAS * self.s)

    def density(self, v):
        v = np.asarray(v, dtype=float)
        return np.where(v > 0, np.exp(-0.5 * ((v - self.v0) / self.s) ** 2) / self.norm, 0.0)

    def mean(self):
        a = self.v0 / self.s
        return self.v0 + self.s * math.exp(-0.5 * a * a) / (math.sqrt(2 * math.pi) * ndtr(a))

"""Elliptical Gaussian beam (1/e^2 radii w_a in the beam plane, w_c along y)."""

import math

import numpy as np

from .base import BeamShape

EXTENT_WAISTS = 4.0  # the contract's integration range: 4 w_a / sin(theta) each side


class GaussianShape(BeamShape):
    """``I = 2P/(pi w_a w_c) exp(-2 ((z - z_b) sin(theta))^2 / w_a^2) exp(-2 y0^2 / w_c^2)``."""

    @property
    def peak_intensity(self):
        b = self.beam
        return 2.0 * b.power / (math.pi * b.waist * b.waist_across)

    def along(self, z):
        b = self.beam
        u = (np.asarray(z) - b.position) * math.sin(b.angle) / b.waist
        return np.exp(-2.0 * u * u)

    def across(self, y0):
        u = np.asarray(y0) / self.beam.waist_across
        return np.exp(-2.0 * u * u)

    @property
    def extent(self):
        b = self.beam
        half = EXTENT_WAISTS * b.waist / math.sin(b.angle)
        return (b.position - half, b.position + half)

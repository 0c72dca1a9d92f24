"""Level mode: one state per fine-structure level, plus the ``other`` sink."""

import numpy as np

from ..hyperfine import reference_offset
from .base import Basis, Coupling


class LevelBasis(Basis):
    """Whole levels with evenly filled sublevels (isotropic light).

    Parameters
    ----------
    scheme : Scheme
    """

    def __init__(self, scheme):
        self.scheme = scheme
        self.labels = scheme.ids + ("other",)
        self.level_of = np.arange(len(self.labels))

    def decay_generator(self):
        s = self.scheme
        n = len(self.labels)
        G = np.zeros((n, n))
        for k, lv in enumerate(s.levels):
            total = s.total_rate(lv.id)
            G[k, k] = -total
            for d in s.decays_from(lv.id):
                G[s.index(d.lower), k] += d.rate
            G[n - 1, k] += s.unlisted_rate(lv.id)
        return G

    def couplings(self, beam):
        s = self.scheme
        gi, gk = s.level(beam.lower).g, s.level(beam.upper).g
        # a reference_F moves the laser by that component's offset from the centroid
        return (Coupling(s.index(beam.lower), s.index(beam.upper), 1.0, gi / gk,
                         -reference_offset(s, beam)),)

    def initial_state(self, level_populations):
        return np.append(np.asarray(level_populations, dtype=float), 0.0)

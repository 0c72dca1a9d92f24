"""The contract of a speed distribution.

Every distribution here is of atoms crossing a plane (flux-weighted), as the
physics contract defines. The ensemble quadrature needs the interval that
holds all but a negligible fraction of atoms and the normalised density on
it; a distribution with a single speed says so with :attr:`single_speed`.
"""

import numpy as np


class SpeedDistribution:
    """Base class of flux-weighted speed distributions."""

    single_speed = None
    """The one speed (m/s) of a monoenergetic source, else ``None``."""

    def support(self) -> tuple:
        """``(v_min, v_max)`` in m/s holding all but ~1e-12 of the flux."""
        raise NotImplementedError

    def density(self, v: np.ndarray) -> np.ndarray:
        """Normalised flux-weighted density at speeds ``v``, s/m."""
        raise NotImplementedError

    def mean(self) -> float:
        """Flux-weighted mean speed, m/s."""
        raise NotImplementedError

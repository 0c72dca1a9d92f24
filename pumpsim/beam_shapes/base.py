"""The contract of a laser beam's intensity profile.

The intensity an atom sees factorises as
``I = peak * along(z) * across(y0)``: ``along`` depends on the position along
the atomic beam, ``across`` on the atom's offset along y. The solver needs
``along`` on its grid and ``extent`` to place its grid.
"""

import numpy as np


class BeamShape:
    """Base class of intensity profiles.

    Parameters
    ----------
    beam : Beam
    """

    def __init__(self, beam):
        self.beam = beam

    @property
    def peak_intensity(self) -> float:
        """Peak intensity of one pass, W/m^2."""
        raise NotImplementedError

    def along(self, z: np.ndarray) -> np.ndarray:
        """Relative intensity on the atomic-beam axis at positions ``z`` (m)."""
        raise NotImplementedError

    def across(self, y0: np.ndarray) -> np.ndarray:
        """Relative intensity at offsets ``y0`` (m) along y."""
        raise NotImplementedError

    @property
    def extent(self) -> tuple:
        """``(start, end)`` along z outside which the beam is negligible, m."""
        raise NotImplementedError

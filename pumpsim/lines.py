"""Line properties from the physics contract: width, cross-section, saturation intensity."""

import math
from dataclasses import dataclass

from . import constants as K


@dataclass(frozen=True)
class Line:
    """A driven pair ``lower -> upper`` and what follows from the scheme.

    Parameters
    ----------
    lower, upper : str
    wavelength : float
        Vacuum wavelength, m.
    A : float
        Einstein coefficient of ``upper -> lower``, 1/s.
    g_lower, g_upper : float
        Degeneracies ``2J + 1``.
    G_lower, G_upper : float
        Total decay rates of the two levels, 1/s.
    """

    lower: str
    upper: str
    wavelength: float
    A: float
    g_lower: float
    g_upper: float
    G_lower: float
    G_upper: float

    @property
    def omega(self) -> float:
        """Angular frequency ``2 pi c / lambda``, rad/s."""
        return 2 * math.pi * K.c / self.wavelength

    @property
    def k(self) -> float:
        """Wave number ``2 pi / lambda``, 1/m."""
        return 2 * math.pi / self.wavelength

    def gamma(self, laser_linewidth=0.0) -> float:
        """Angular FWHM ``G_k + G_i + 2 pi linewidth``, rad/s (linewidth in Hz)."""
        return self.G_upper + self.G_lower + 2 * math.pi * laser_linewidth

    def sigma0(self, laser_linewidth=0.0) -> float:
        """Peak cross-section ``(g_k/g_i) lambda^2/(2 pi) A/gamma``, m^2."""
        lam = self.wavelength
        return (self.g_upper / self.g_lower) * lam**2 / (2 * math.pi) * self.A / self.gamma(laser_linewidth)

    def saturation_intensity(self) -> float:
        """``hbar omega G_k / (sigma0 (1 + g_i/g_k))`` at natural width, W/m^2: the
        whole fine-structure level under isotropic light (level mode's figure)."""
        return K.hbar * self.omega * self.G_upper / (
            self.sigma0() * (1 + self.g_lower / self.g_upper))

    def pair_saturation_intensity(self, strength) -> float:
        """Saturation intensity of one sublevel pair, W/m^2, in the two-level
        convention ``s = I/I_sat = 2 Omega^2/Gamma^2``: ``hbar omega G_k / (2 sigma)``
        with the pair's cross-section ``sigma = strength * sigma0`` at natural width
        (``strength`` as in :class:`~pumpsim.basis.Coupling`, polarization share
        included). For a closed stretched pair (``strength * sigma0 = 3 lambda^2/(2 pi)``)
        it is the cycling-transition figure ``pi h c G_k / (3 lambda^3)``; with
        ``strength = S_FF'`` it is the hyperfine component's figure under isotropic light."""
        return K.hbar * self.omega * self.G_upper / (2 * strength * self.sigma0())


def line(scheme, lower: str, upper: str) -> Line:
    """The :class:`Line` for a listed decay ``upper -> lower``."""
    d = scheme.decay(upper, lower)
    if d is None:
        raise KeyError(f"no decay {upper} -> {lower}")
    lo, up = scheme.level(lower), scheme.level(upper)
    return Line(lower, upper, d.wavelength, d.rate, lo.g, up.g,
                scheme.total_rate(lower), scheme.total_rate(upper))

"""Speed distributions of atoms leaving a source; see :mod:`.base`."""

from .base import SpeedDistribution
from .effusive import Effusive
from .gaussian import GaussianSpeeds
from .monoenergetic import Monoenergetic

__all__ = ["SpeedDistribution", "Effusive", "GaussianSpeeds", "Monoenergetic", "speeds_of"]


def speeds_of(source, mass) -> SpeedDistribution:
    """The flux-weighted speed distribution of a setup's source (mass in kg)."""
    if source.kind == "effusive":
        return Effusive(source.temperature, mass)
    if source.kind == "gaussian":
        return GaussianSpeeds(source.speed, source.speed_spread)
    return Monoenergetic(source.speed)

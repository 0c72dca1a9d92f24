"""Laser intensity profiles; see :mod:`.base`."""

from .base import BeamShape
from .gaussian import GaussianShape

__all__ = ["BeamShape", "GaussianShape", "shape_of"]


def shape_of(beam) -> BeamShape:
    """The intensity profile of a beam (Gaussian: the contract's only shape)."""
    return GaussianShape(beam)

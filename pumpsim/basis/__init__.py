"""State spaces the rate equations run in; see :mod:`.base`."""

from .base import Basis, Coupling
from .levels import LevelBasis
from .sublevels import SublevelBasis


def basis_for(setup) -> Basis:
    """The state space a setup's ``mode`` asks for."""
    if setup.mode == "sublevel":
        return SublevelBasis(setup.scheme, setup.magnetic_field)
    return LevelBasis(setup.scheme)


__all__ = ["Basis", "Coupling", "LevelBasis", "SublevelBasis", "basis_for"]

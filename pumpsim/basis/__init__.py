"""State spaces the rate equations run in; see :mod:`.base`."""

from .base import Basis, Coupling
from .levels import LevelBasis

__all__ = ["Basis", "Coupling", "LevelBasis"]

"""The density-matrix (Lindblad, optical Bloch) model of a setup.

The rate equations of :mod:`pumpsim.model` keep populations only. This
subpackage keeps the coherences too, for the same scheme, setup, basis and
ensemble:

- :mod:`.frame` decides which laser drives which pair of states and builds
  the rotating frame in which the Hamiltonian does not depend on time;
- :mod:`.liouvillian` assembles the master equation in a real, reduced
  coordinate space (only the coherences that can ever become non-zero);
- :mod:`.model` turns it into the engine's batched linear problem along z,
  so the ensemble average, outputs and reports of the rate model apply;
- :mod:`.propagator` integrates it;
- :mod:`.verdict` compares both models on a few representative atoms on
  every run (``docs/coherent.md``).
"""

from .model import CoherentModel
from .propagator import CoherentPropagator
from .verdict import coherence_check

__all__ = ["CoherentModel", "CoherentPropagator", "coherence_check"]

"""What a simulation returns."""

from dataclasses import dataclass

import numpy as np

from .beam_shapes import shape_of
from .lines import line


@dataclass(frozen=True)
class NumericsReport:
    """How a result was computed and how far to trust it.

    Parameters
    ----------
    solver : str
    tolerance : float
        Requested absolute tolerance on populations.
    steps : int
        Integration steps along z (shared by all nodes).
    steps_per_waist : float
    nodes : int
        Ensemble nodes in the final quadrature.
    nodes_evaluated : int
        Nodes integrated in all, refinement included.
    angle_nodes, offset_nodes, speed_panels : int
        Sizes of the final rules.
    error_estimate : dict
        ``ode``, ``angle_offset``, ``speed`` and ``total`` (population units).
    converged : bool
        Whether every estimate met its share of the tolerance.
    conservation_error : float
        Largest ``|sum of populations - 1|`` over nodes.
    seconds : float
        Wall time.
    """

    solver: str
    tolerance: float
    steps: int
    steps_per_waist: float
    nodes: int
    nodes_evaluated: int
    angle_nodes: int
    offset_nodes: int
    speed_panels: int
    error_estimate: dict
    converged: bool
    conservation_error: float
    seconds: float

    def to_dict(self):
        return dict(self.__dict__)


@dataclass(frozen=True)
class Result:
    """One simulation of one setup (SI units; ``to_dict`` gives file units).

    Parameters
    ----------
    setup : Setup
    levels : tuple of str
        Level ids and ``"other"``, the order of every population array.
    final_populations : dict
        Level id (and ``other``) -> ensemble-mean fraction at the end.
    transfer_fraction : float
        Final population of the target level.
    photons_per_atom : dict
        Beam name -> net absorbed photons per atom.
    deflection : dict
        Beam name -> mean recoil deflection, rad, signed along +x.
    z : ndarray (k,)
        Grid positions, m.
    profile : ndarray (k, L + 1)
        Ensemble-mean level populations along z.
    nodes : object
        Final quadrature nodes: ``v``, ``a``, ``y0``, ``weight`` and ``values``
        (levels, photons per beam, deflection per beam, per node).
    numerics : NumericsReport
    sublevels : SublevelReport or None
        Sublevel populations, along z too, and dark sublevels (sublevel mode).
    """

    setup: object
    levels: tuple
    final_populations: dict
    transfer_fraction: float
    photons_per_atom: dict
    deflection: dict
    z: np.ndarray
    profile: np.ndarray
    nodes: object
    numerics: NumericsReport
    sublevels: object = None

    def beam_summary(self):
        """Per beam: peak intensity (W/m^2) and on-resonance saturation parameter."""
        out = {}
        for b in self.setup.beams:
            peak = shape_of(b).peak_intensity
            isat = line(self.setup.scheme, b.lower, b.upper).saturation_intensity()
            out[b.name] = {"peak_intensity_mW_cm2": peak * 0.1, "saturation_parameter": peak / isat,
                           "power_mW": b.power * 1e3}
        return out

    def to_dict(self):
        """The JSON object of ``pumpsim run --json`` (file units)."""
        out = {
            "target": self.setup.target,
            "transfer_fraction": self.transfer_fraction,
            "final_populations": dict(self.final_populations),
            "photons_per_atom": dict(self.photons_per_atom),
            "deflection_mrad": {k: v * 1e3 for k, v in self.deflection.items()},
            "beams": self.beam_summary(),
            "numerics": self.numerics.to_dict(),
        }
        if self.sublevels is not None:  # sublevel mode (docs/sublevel.md)
            out["sublevel_populations"] = self.sublevels.populations()
            out["dark_fraction"] = self.sublevels.dark_fraction
            out["dark_sublevels"] = self.sublevels.dark_populations()
        return out

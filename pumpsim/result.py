"""What a simulation returns."""

from dataclasses import dataclass

import numpy as np

from .beam_shapes import shape_of
from .lines import line

CONSERVATION_LIMIT = 1e-9  # every node's populations sum to 1 within this, or the run is flagged


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
        Whether every estimate met its share of the tolerance and every node's
        populations summed to 1 within ``CONSERVATION_LIMIT``.
    conservation_error : float
        Largest ``|sum of populations - 1|`` over nodes.
    seconds : float
        Wall time.
    unresolved_speed_m_s : float or None
        Where speed refinement stopped because the panels there could not be
        narrowed further (atoms near rest whose mean photons or deflection
        diverge); ``None`` when it did not. Left out of ``to_dict`` when ``None``.
    limited_by : str or None
        Why an unconverged run stopped: ``"max_nodes"``, ``"rules"`` (the angle or
        offset ladder's largest rule), ``"speed"`` or ``"grid"``; ``None`` when
        converged. Left out of ``to_dict`` when ``None``.
    coherence : dict or None
        The density-matrix check of the rate equations (docs/coherent.md);
        ``None`` when switched off. Left out of ``to_dict`` when ``None``.
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
    unresolved_speed_m_s: float = None
    limited_by: str = None
    coherence: dict = None

    def to_dict(self):
        return {k: v for k, v in self.__dict__.items() if v is not None}

    def warnings(self):
        """Plain-words reasons the numbers are not converged, and by how much
        (an empty list when they are)."""
        out = [self.coherence["warning"]] if self.coherence and "warning" in self.coherence else []
        if self.converged:
            return out
        e = self.error_estimate
        parts = (f"ode {e['ode']:.1e}, angle/offset {e['angle_offset']:.1e}, "
                 f"speed {e['speed']:.1e}")
        hint = ("the grid along z reached its finest spacing" if self.limited_by == "grid"
                or self.limited_by is None and e["ode"] >= e["speed"]
                and e["ode"] >= e["angle_offset"] else
                "the angle or offset rules reached their largest size; loosen "
                "numerics.tolerance" if self.limited_by == "rules" else
                f"raise numerics.max_nodes (now {self.nodes_evaluated} nodes evaluated) or "
                "loosen numerics.tolerance")
        if self.unresolved_speed_m_s is not None:
            hint = (f"the speed integral does not settle near {self.unresolved_speed_m_s:.3g} "
                    "m/s: the slowest atoms dominate the mean photons or deflection (their "
                    "mean diverges when the source has atoms near rest); the populations "
                    "are not affected as much")
        if e["total"] > self.tolerance:
            out.append(f"NOT converged: error estimate {e['total']:.2e} exceeds the tolerance "
                       f"{self.tolerance:g} by {e['total'] / self.tolerance:.3g} times "
                       f"({parts}); {hint}")
        elif self.conservation_error <= CONSERVATION_LIMIT:
            out.append(f"NOT converged: refinement stopped before every part met its share of "
                       f"the tolerance {self.tolerance:g} (error estimate {e['total']:.2e}: "
                       f"{parts}); {hint}")
        if self.conservation_error > CONSERVATION_LIMIT:
            out.append(f"NOT converged: node populations sum to 1 only within "
                       f"{self.conservation_error:.1e} (limit {CONSERVATION_LIMIT:g}); the "
                       "rate equations are stiffer than the integrator handles exactly")
        return out


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

    def beam_figures(self):
        """Per beam: transit time and width, Doppler width from the divergence, line
        width, peak pumping rate, recoil velocity and the ensemble's recoil heating
        (SI units; :mod:`pumpsim.beam_figures`). With several beams, ``"all beams"``
        holds the combined heating."""
        from .beam_figures import beam_figures

        return beam_figures(self.setup, self.nodes, len(self.levels))

    def to_dict(self):
        """The JSON object of ``pumpsim run --json`` (file units)."""
        from .beam_figures import in_file_units

        out = {
            "target": self.setup.target,
            "transfer_fraction": self.transfer_fraction,
            "final_populations": dict(self.final_populations),
            "photons_per_atom": dict(self.photons_per_atom),
            "deflection_mrad": {k: v * 1e3 for k, v in self.deflection.items()},
            "beams": self.beam_summary(),
            "beam_figures": in_file_units(self.beam_figures()),
            "numerics": self.numerics.to_dict(),
        }
        if self.sublevels is not None:  # sublevel mode (docs/sublevel.md)
            out["sublevel_populations"] = self.sublevels.populations()
            out["dark_fraction"] = self.sublevels.dark_fraction
            out["dark_sublevels"] = self.sublevels.dark_populations()
        return out

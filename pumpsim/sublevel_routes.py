"""Routes of a beam in sublevel mode: line, hyperfine component and polarization.

Among whole levels a route is a line ``lower -> upper``. Among sublevels the
same line pumps into quite different states depending on the polarization
(``sigma+`` collects atoms at ``m = +F``, ``pi`` at ``m = 0`` of an
``F -> F' = F`` line, ...) and the hyperfine component the laser is tuned to
(an ``F -> F' = F`` component leaves the stretched state dark, ``F -> F+1``
cycles on it). A sublevel route is therefore a line, a component ``F -> F'``
(``reference_F``, detuning kept) and one of ``sigma+``, ``sigma-``, ``pi``.
The components start from the beam's own lower ``F`` when it names one,
else from every ``F`` of the lower level.
"""

from dataclasses import dataclass

from .hyperfine import Component, f_values
from .basis.sublevels import half

POLARIZATIONS = ("sigma+", "sigma-", "pi")


@dataclass(frozen=True)
class Variant:
    """How a route retunes the beam.

    Parameters
    ----------
    upper : str
        Upper level of the line.
    polarization : str or None
        ``None``: the beam's own (level mode).
    component : Component or None
        ``None``: the beam's own reference (level mode).
    """

    upper: str
    polarization: str | None = None
    component: Component | None = None

    @property
    def label(self) -> str:
        """``"5P1/2"`` or ``"5P1/2 F=2->F'=2 sigma+"``: unique among a beam's routes."""
        if self.component is None:
            return self.upper
        c = self.component
        return f"{self.upper} F={half(c.F)}->F'={half(c.Fp)} {self.polarization}"

    def to_dict(self) -> dict:
        if self.component is None:
            return {}
        return {"polarization": self.polarization, "reference_F": self.component.to_file()}


def variants(setup, beam, uppers) -> list:
    """Every route of ``beam`` onto the lines to ``uppers`` (module docstring); in
    level mode, or without hyperfine structure, one per line."""
    b, scheme = setup.beam(beam), setup.scheme
    I = scheme.nuclear_spin
    if setup.mode != "sublevel":
        return [Variant(up) for up in uppers]
    out = []
    J = scheme.level(b.lower).J
    lowers = (b.reference_F.F,) if b.reference_F is not None else f_values(J, I)
    for up in uppers:
        Jp = scheme.level(up).J
        comps = [Component(F, Fp) for F in lowers for Fp in f_values(Jp, I)
                 if abs(F - Fp) <= 1 and not F == Fp == 0] if I else [None]
        for comp in comps:
            out += [Variant(up, pol, comp) for pol in POLARIZATIONS]
    return out


def retuned(setup, beam, variant):
    """The setup with ``beam`` on the variant's line, component and polarization."""
    s = setup.with_value(f"beam.{beam}.transition", [setup.beam(beam).lower, variant.upper])
    if variant.polarization is not None:
        s = s.with_value(f"beam.{beam}.polarization", variant.polarization)
    if variant.component is not None:
        s = s.with_value(f"beam.{beam}.reference_F", variant.component.to_file())
    return s

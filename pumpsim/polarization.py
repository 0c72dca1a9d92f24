"""Laser polarization as intensity fractions in the spherical basis of the field axis.

The quantization axis is the magnetic field's (``[field]``). Light drives
``Delta m = q`` transitions with the fraction ``w_q`` of its intensity:

- ``"pi"``: linear along the axis, ``w_0 = 1``;
- ``"sigma+"`` / ``"sigma-"``: circular about the axis, ``w_+1 = 1`` / ``w_-1 = 1``
  (light travelling along the axis, handedness taken about the axis);
- ``{ linear_deg = a }``: linear at angle ``a`` to the axis,
  ``w_0 = cos^2 a``, ``w_+1 = w_-1 = sin^2 a / 2`` (projection of the field
  vector onto the spherical unit vectors);
- ``"unpolarized"``: the level model's isotropic light, ``w_q = 1/3`` each,
  which leaves evenly filled sublevels evenly filled. (A real unpolarized beam
  has a direction and drives ``pi`` and ``sigma`` unequally: along the axis it
  is half ``sigma+``, half ``sigma-``; describe it as two beams of half the
  power each.)

Mixing the components incoherently is the rate-equation approximation; see
``docs/sublevel.md`` for when it fails.
"""

import math
from dataclasses import dataclass

NAMED = {"pi": (0.0, 1.0, 0.0), "sigma+": (0.0, 0.0, 1.0), "sigma-": (1.0, 0.0, 0.0),
         "unpolarized": (1 / 3, 1 / 3, 1 / 3)}
CHOICES = tuple(NAMED)


@dataclass(frozen=True)
class Polarization:
    """A beam's polarization.

    Parameters
    ----------
    kind : str
        One of :data:`CHOICES` or ``"linear"``.
    angle : float
        Angle of linear polarization to the field axis, rad (``"linear"`` only).
    """

    kind: str = "unpolarized"
    angle: float = 0.0

    @property
    def weights(self) -> tuple:
        """Intensity fractions ``(w_-1, w_0, w_+1)``; they sum to 1."""
        if self.kind == "linear":
            c2 = math.cos(self.angle) ** 2
            return (0.5 * (1 - c2), c2, 0.5 * (1 - c2))
        return NAMED[self.kind]

    def weight(self, q: int) -> float:
        """Fraction of the intensity that drives ``Delta m = q``."""
        return self.weights[q + 1]

    @classmethod
    def from_file(cls, value):
        """From the file value; ``ValueError`` with a readable reason otherwise."""
        if isinstance(value, str):
            if value not in NAMED:
                raise ValueError(f"must be one of {', '.join(CHOICES)} or "
                                 f"{{ linear_deg = ... }}; got {value!r}")
            return cls(value)
        if isinstance(value, dict):
            if set(value) != {"linear_deg"}:
                raise ValueError(f"a polarization table takes only linear_deg, got {value!r}")
            a = value["linear_deg"]
            if isinstance(a, bool) or not isinstance(a, (int, float)) or not math.isfinite(a):
                raise ValueError(f"linear_deg must be a number, got {a!r}")
            return cls("linear", math.radians(a))
        raise ValueError(f"must be text or {{ linear_deg = ... }}, got {value!r}")

    def to_file(self):
        if self.kind == "linear":
            return {"linear_deg": float(f"{math.degrees(self.angle):.15g}")}
        return self.kind

"""Hyperfine levels, their shifts and g-factors, and the relative line strengths.

Standard results (e.g. D. A. Steck, *Rubidium 87 D Line Data*, sections on
hyperfine structure and the Zeeman effect; A. Corney, *Atomic and Laser
Spectroscopy*, 1977):

- ``F`` runs from ``|J - I|`` to ``J + I``.
- Hyperfine shift from the level's centroid, with ``K = F(F+1) - I(I+1) - J(J+1)``::

      dE/h = A K / 2 + B (3/2 K (K+1) - 2 I(I+1) J(J+1)) / (2I(2I-1) 2J(2J-1))

- Lande factor in LS coupling ``g_J = g_L (J(J+1) - S(S+1) + L(L+1)) / (2J(J+1))
  + g_S (J(J+1) + S(S+1) - L(L+1)) / (2J(J+1))`` with ``g_L = 1``.
- ``g_F = g_J (F(F+1) - I(I+1) + J(J+1)) / (2F(F+1))``; the nuclear term
  (``g_I``, about 1/2000 of ``g_J``) is neglected.
- Relative strength of the hyperfine component ``F -> F'`` of a ``J -> J'`` line,
  ``S_FF' = (2F'+1)(2J+1) {J J' 1; F' F I}^2``, summing to 1 over ``F'``.

Shifts are in Hz (frequency, not angular) like the file's ``hfs_A_MHz``.
"""

from dataclasses import dataclass
from fractions import Fraction

from scipy import constants as _c

from .angular import twice, wigner_6j_squared
from .errors import InputError
from .tomlread import number

G_S = -_c.physical_constants["electron g factor"][0]  # 2.0023..., CODATA via scipy
MU_B_HZ_PER_T = _c.physical_constants["Bohr magneton in Hz/T"][0]


def f_values(J, I) -> tuple:
    """Allowed ``F`` for electronic ``J`` and nuclear spin ``I``, ascending."""
    lo, hi = abs(twice(J) - twice(I)), twice(J) + twice(I)
    return tuple(k / 2 for k in range(lo, hi + 1, 2))


def m_values(F) -> tuple:
    """Magnetic quantum numbers ``-F .. F``."""
    f = twice(F)
    return tuple(k / 2 for k in range(-f, f + 1, 2))


def hyperfine_shift(F, J, I, A, B=0.0) -> float:
    """Shift of hyperfine level ``F`` from the level's centroid, Hz (``A``, ``B`` in Hz)."""
    K = F * (F + 1) - I * (I + 1) - J * (J + 1)
    shift = 0.5 * A * K
    if B and I >= 1 and J >= 1:
        shift += B * (1.5 * K * (K + 1) - 2 * I * (I + 1) * J * (J + 1)) / (
            2 * I * (2 * I - 1) * 2 * J * (2 * J - 1))
    return shift


def lande_g_J(L, S, J) -> float:
    """Lande factor of a level in LS coupling (``g_L = 1``, ``g_S`` from CODATA)."""
    if J == 0:
        return 0.0
    jj, ss, ll = J * (J + 1), S * (S + 1), L * (L + 1)
    return (jj - ss + ll) / (2 * jj) + G_S * (jj + ss - ll) / (2 * jj)


def g_F(F, J, I, g_J) -> float:
    """Hyperfine Lande factor (nuclear term neglected); 0 for ``F = 0``."""
    if F == 0:
        return 0.0
    return g_J * (F * (F + 1) - I * (I + 1) + J * (J + 1)) / (2 * F * (F + 1))


def strength_factor(J, Jp, F, Fp, I) -> Fraction:
    """Exact ``S_FF' = (2F'+1)(2J+1) {J J' 1; F' F I}^2`` of the line ``J -> J'``."""
    return (twice(Fp) + 1) * (twice(J) + 1) * wigner_6j_squared(J, Jp, 1, Fp, F, I)


def component_offset(scheme, lower, upper, F, Fp) -> float:
    """Zero-field frequency of the hyperfine component ``F -> F'`` of a line,
    relative to the line's centroid, Hz."""
    I = scheme.nuclear_spin
    lo, up = scheme.level(lower), scheme.level(upper)
    return (hyperfine_shift(Fp, up.J, I, up.hfs_A, up.hfs_B)
            - hyperfine_shift(F, lo.J, I, lo.hfs_A, lo.hfs_B))


def reference_offset(scheme, beam) -> float:
    """Where a beam's detuning is measured from, relative to the line centroid, Hz:
    its ``reference_F`` component, else the centroid itself (0)."""
    if beam.reference_F is None:
        return 0.0
    return component_offset(scheme, beam.lower, beam.upper, beam.reference_F.F,
                            beam.reference_F.Fp)


@dataclass(frozen=True)
class Component:
    """A beam's ``reference_F = [F, F']``: the hyperfine component its detuning is
    measured from. Parses and writes its own file value (see :mod:`pumpsim.schema`)."""

    F: float
    Fp: float

    @classmethod
    def from_file(cls, value):
        if (not isinstance(value, list) or len(value) != 2
                or any(isinstance(x, bool) or not isinstance(x, (int, float)) for x in value)):
            raise ValueError(f"must be [F, F'] (two numbers), got {value!r}")
        try:
            F, Fp = (twice(x) / 2 for x in value)
        except ValueError:
            raise ValueError(f"F values must be whole or half-integers, got {value!r}") from None
        if F < 0 or Fp < 0:
            raise ValueError(f"F values must be >= 0, got {value!r}")
        return cls(F, Fp)

    def to_file(self):
        return [int(x) if float(x).is_integer() else x for x in (self.F, self.Fp)]


def check_component(scheme, lower, upper, comp, fail):
    """Reject a reference component the line does not have; ``fail(message)`` raises."""
    if scheme.nuclear_spin == 0:
        fail("needs [species] nuclear_spin in the scheme (hyperfine structure)")
    for F, lid in ((comp.F, lower), (comp.Fp, upper)):
        allowed = f_values(scheme.level(lid).J, scheme.nuclear_spin)
        if F not in allowed:
            fail(f"level '{lid}' has F = {', '.join(f'{x:g}' for x in allowed)}; got {F:g}")
    if abs(comp.F - comp.Fp) > 1 or comp.F == comp.Fp == 0:
        fail(f"F = {comp.F:g} -> F' = {comp.Fp:g} is not an electric-dipole component")


LEVEL_KEYS = ("hfs_A_MHz", "hfs_B_MHz", "g_J", "L", "S")
"""Optional per-level keys of a scheme file read here."""


def read_nuclear_spin(species, file) -> float:
    """``[species] nuclear_spin`` (default 0: no hyperfine structure)."""
    if "nuclear_spin" not in species:
        return 0.0
    I = number(species, "nuclear_spin", file, "species", nonnegative=True)
    if not (2 * I).is_integer():
        raise InputError(f"must be a whole or half-integer, got {I!r}", file, "species",
                         "nuclear_spin")
    return I


def read_level_structure(raw, lid, J, I, file) -> dict:
    """Hyperfine constants (Hz) and ``g_J`` of one ``[[level]]`` table.

    Returns keyword arguments for :class:`~pumpsim.scheme.Level`: ``hfs_A``,
    ``hfs_B`` and ``g_J`` (``None`` when neither ``g_J`` nor ``L``, ``S`` are given).
    """
    out = {"hfs_A": 0.0, "hfs_B": 0.0, "g_J": None}
    for key, attr in (("hfs_A_MHz", "hfs_A"), ("hfs_B_MHz", "hfs_B")):
        if key in raw:
            out[attr] = number(raw, key, file, "level", level=lid) * 1e6
            if I == 0:
                raise InputError("hyperfine constants need [species] nuclear_spin", file,
                                 "level", key, lid)
    if out["hfs_B"] and (I < 1 or J < 1):
        raise InputError("an electric quadrupole constant needs J >= 1 and nuclear_spin >= 1",
                         file, "level", "hfs_B_MHz", lid)
    has_g, has_l, has_s = "g_J" in raw, "L" in raw, "S" in raw
    if has_g and (has_l or has_s):
        raise InputError("give either g_J or L and S, not both", file, "level", "g_J", lid)
    if has_l != has_s:
        raise InputError("L and S go together", file, "level", "S" if has_l else "L", lid)
    if has_g:
        out["g_J"] = number(raw, "g_J", file, "level", level=lid)
    elif has_l:
        L = number(raw, "L", file, "level", nonnegative=True, level=lid)
        S = number(raw, "S", file, "level", nonnegative=True, level=lid)
        if not L.is_integer():
            raise InputError(f"must be a whole number, got {L!r}", file, "level", "L", lid)
        if not (2 * S).is_integer():
            raise InputError(f"must be a whole or half-integer, got {S!r}", file, "level", "S", lid)
        if not (abs(L - S) <= J <= L + S and (L + S - J).is_integer()):
            raise InputError(f"J = {J:g} cannot arise from L = {L:g} and S = {S:g}", file,
                             "level", "J", lid)
        out["g_J"] = lande_g_J(L, S, J)
    return out


def check_zeeman_data(scheme, fail):
    """A field needs every level with ``J > 0`` to have ``g_J``; ``fail(message, level)`` raises."""
    for lv in scheme.levels:
        if lv.J > 0 and lv.g_J is None:
            fail("a magnetic field needs g_J (or L and S) on every level with J > 0", lv.id)

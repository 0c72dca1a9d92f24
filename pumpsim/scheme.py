"""A species' level scheme: levels, decays and the rates derived from them.

All values are SI: energies in joules above the lowest level, rates in 1/s,
wavelengths in metres (vacuum), masses in kilograms. Files use spectroscopic
units; :mod:`pumpsim.scheme_file` converts at the edge.
"""

from dataclasses import dataclass, field


@dataclass(frozen=True)
class Level:
    """One fine-structure level.

    Parameters
    ----------
    id : str
        Identifier used by decays, beams and the setup.
    energy : float
        Energy above the lowest level, J.
    J : float
        Total angular momentum (integer or half-integer).
    lifetime : float or None
        Radiative lifetime, s. ``None``: ``1/sum(A)`` of the listed decays
        (infinite for a level with no decays).
    label : str
        Free text shown in plots.
    hfs_A, hfs_B : float
        Magnetic dipole and electric quadrupole hyperfine constants, Hz
        (sublevel mode; 0 without hyperfine data).
    g_J : float or None
        Lande factor (sublevel mode with a field); ``None`` if not given.
    """

    id: str
    energy: float
    J: float
    lifetime: float | None = None
    label: str = ""
    hfs_A: float = 0.0
    hfs_B: float = 0.0
    g_J: float | None = None

    @property
    def g(self) -> float:
        """Degeneracy ``2J + 1``."""
        return 2.0 * self.J + 1.0


@dataclass(frozen=True)
class Decay:
    """A listed spontaneous decay channel ``upper -> lower``.

    Parameters
    ----------
    upper, lower : str
        Level ids.
    rate : float
        Einstein coefficient ``A``, 1/s.
    wavelength : float
        Vacuum wavelength of the line, m.
    """

    upper: str
    lower: str
    rate: float
    wavelength: float


@dataclass(frozen=True)
class Scheme:
    """A species: its mass, levels and listed decays.

    Parameters
    ----------
    name : str
        Species name (free text).
    mass : float
        Atomic mass, kg.
    levels : tuple of Level
    decays : tuple of Decay
    path : str or None
        File the scheme was read from.
    document : dict
        The file's TOML contents as read (file units), kept verbatim.
    nuclear_spin : float
        ``I``; with ``I > 0`` sublevel mode splits levels into ``|F, m_F>``.
    """

    name: str
    mass: float
    levels: tuple
    decays: tuple
    path: str | None = None
    document: dict = field(default_factory=dict, compare=False, repr=False)
    text: str | None = field(default=None, compare=False, repr=False)
    nuclear_spin: float = 0.0

    @property
    def ids(self) -> tuple:
        """Level ids in file order."""
        return tuple(lv.id for lv in self.levels)

    def index(self, level_id: str) -> int:
        """Position of a level in :attr:`levels`."""
        return self.ids.index(level_id)

    def level(self, level_id: str) -> Level:
        return self.levels[self.index(level_id)]

    def decays_from(self, upper: str) -> tuple:
        return tuple(d for d in self.decays if d.upper == upper)

    def decay(self, upper: str, lower: str):
        """The listed decay ``upper -> lower``, or ``None``."""
        for d in self.decays:
            if d.upper == upper and d.lower == lower:
                return d
        return None

    def total_rate(self, level_id: str) -> float:
        """Total decay rate ``G`` of a level, 1/s: ``1/lifetime`` or ``sum(A)``."""
        lv = self.level(level_id)
        if lv.lifetime is not None:
            return 1.0 / lv.lifetime
        return sum(d.rate for d in self.decays_from(level_id))

    def unlisted_rate(self, level_id: str) -> float:
        """Decay rate into the ``other`` sink, 1/s."""
        listed = sum(d.rate for d in self.decays_from(level_id))
        return max(self.total_rate(level_id) - listed, 0.0)

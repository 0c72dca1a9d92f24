"""An experiment setup: source, laser beams, target and numerics (SI units).

Built from a TOML file by :mod:`pumpsim.setup_file`; never edited in place.
:meth:`Setup.with_value` returns a new, re-validated setup with one value
changed, using the same keys as the command line's ``--set``.
"""

from dataclasses import dataclass, field

from .polarization import Polarization
from .scheme import Scheme
from .targets import parse_target


@dataclass(frozen=True)
class Source:
    """Where the atoms come from.

    Parameters
    ----------
    kind : str
        ``"effusive"``, ``"gaussian"`` or ``"monoenergetic"``.
    temperature : float or None
        Source temperature, K (effusive speeds, thermal populations).
    speed : float or None
        Centre speed (gaussian) or the speed (monoenergetic), m/s.
    speed_spread : float or None
        rms speed spread of a gaussian source, m/s.
    divergence_rms : float
        rms angle in the plane of atomic beam and lasers, rad.
    width_rms : float
        rms size of the atomic beam along y (across the lasers), m.
    flux : float or None
        Atoms per second leaving the source (docs/measurement.md).
    initial : str or tuple
        ``"thermal"`` or ``((level_id, fraction), ...)`` summing to 1.
    """

    kind: str
    temperature: float | None
    speed: float | None
    speed_spread: float | None
    divergence_rms: float
    width_rms: float
    initial: object = "thermal"
    flux: float | None = None


@dataclass(frozen=True)
class Beam:
    """One laser beam crossing the atomic beam.

    Parameters
    ----------
    name : str
    lower, upper : str
        Level ids of the line it is tuned to.
    power : float
        W, per pass.
    waist, waist_across : float
        1/e² intensity radii in the atomic-beam/laser plane (w_a) and along y (w_c), m.
    detuning : float
        Laser minus line frequency, Hz (positive: blue).
    linewidth : float
        Laser FWHM, Hz.
    position : float
        Centre on the atomic-beam axis z_b, m.
    angle : float
        Angle theta between the wave vector and +z, rad.
    passes : int
        Number of passes through the same region, alternating direction.
    polarization : Polarization
        Relative to the field axis (sublevel mode only); every pass shares it.
    reference_F : Component or None
        Hyperfine component ``F -> F'`` that ``detuning`` is measured from
        (``None``: from the line's centroid, the contract's default).
    role : str
        ``"pump"`` or ``"probe"`` (a beam whose fluorescence is detected).
    collection_sr, collection_NA, detection_efficiency : float or None
        A probe's collection (solid angle, sr, or numerical aperture) and
        detection efficiency (docs/measurement.md).
    phase_group : str or None
        Beams sharing a group are phase-related (sidebands of one laser): the
        density-matrix model keeps their Raman coherences (docs/coherent.md).
    """

    name: str
    lower: str
    upper: str
    power: float
    waist: float
    waist_across: float
    detuning: float = 0.0
    linewidth: float = 0.0
    position: float = 0.0
    angle: float = 1.5707963267948966
    passes: int = 1
    polarization: Polarization = Polarization()
    reference_F: object = None
    role: str = "pump"
    collection_sr: float | None = None
    collection_NA: float | None = None
    detection_efficiency: float | None = None
    phase_group: str | None = None


@dataclass(frozen=True)
class NextStage:
    """What the stage downstream accepts (docs/measurement.md); ``None``: no limit.

    Parameters
    ----------
    capture_speed : float or None
        Atoms slower than this are captured, m/s.
    aperture, aperture_distance : float or None
        Radius of an aperture and its distance downstream of the pump, m.
    """

    capture_speed: float | None = None
    aperture: float | None = None
    aperture_distance: float | None = None


@dataclass(frozen=True)
class Numerics:
    """How hard to work.

    Parameters
    ----------
    start, end : float or None
        Integration range along z, m (``None``: from the beams, ±4 waists).
    tolerance : float
        Absolute tolerance on every reported population.
    solver : str
        ``"exponential"`` (default), ``"rosenbrock"`` (sparse, for large
        sublevel bases) or ``"radau"`` (per-node reference).
    max_nodes : int
        Largest ensemble the adaptive quadrature may build.
    equations : str
        ``"rates"`` (default) or ``"density_matrix"`` (docs/coherent.md).
    coherence_check : str
        ``"on"``: every rate-equation run is compared with the density-matrix
        model on a few atoms; ``"off"`` skips that.
    """

    start: float | None = None
    end: float | None = None
    tolerance: float = 1e-4
    solver: str = "exponential"
    max_nodes: int = 200000
    equations: str = "rates"
    coherence_check: str = "on"


@dataclass(frozen=True)
class Setup:
    """One experiment.

    Parameters
    ----------
    scheme : Scheme
    target : str
        What the transfer fraction is the final population of: a level id, or
        in sublevel mode sublevels of one level (:mod:`pumpsim.targets`).
    source : Source
    beams : tuple of Beam
    numerics : Numerics
    path : str or None
        File it was read from.
    document : dict
        The TOML document in file units (what ``with_value`` edits and the
        writer saves).
    text : str or None
        The file's text, verbatim, for storing with results.
    mode : str
        ``"level"`` (the contract's model) or ``"sublevel"`` (docs/sublevel.md).
    magnetic_field : float
        Field along the quantization axis, T (sublevel mode).
    next_stage : NextStage
        Capture speed and aperture of the stage downstream.
    """

    scheme: Scheme
    target: str
    source: Source
    beams: tuple
    numerics: Numerics = Numerics()
    path: str | None = None
    document: dict = field(default_factory=dict, compare=False, repr=False)
    text: str | None = field(default=None, compare=False, repr=False)
    mode: str = "level"
    magnetic_field: float = 0.0
    next_stage: NextStage = NextStage()

    @property
    def goal(self):
        """The parsed :class:`~pumpsim.targets.Target`."""
        return parse_target(self.scheme, self.target)

    @property
    def target_level(self) -> str:
        """The level the target lies in (the target itself in level mode)."""
        return self.goal.level

    def beam(self, name: str) -> Beam:
        """The beam called ``name``."""
        for b in self.beams:
            if b.name == name:
                return b
        raise KeyError(name)

    def with_value(self, key: str, value) -> "Setup":
        """A new setup with one value changed, e.g.
        ``setup.with_value("beam.pump.power_mW", 25)``. Raises
        :class:`~pumpsim.errors.InputError` for a bad key or value."""
        from .setup_file import with_value

        return with_value(self, key, value)

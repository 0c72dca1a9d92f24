"""The setup's numeric and text fields, declared once as data.

The setup loader, ``--set`` overrides, the TOML writer and the desktop window
all read this table; nothing else lists the fields. Each :class:`Field` knows
its file key (unit in the suffix), the SI attribute it fills and the scale
between the two, its default, its physical bounds and how a slider should
span it.
"""

import math
from dataclasses import dataclass

from .hyperfine import Component
from .polarization import CHOICES as POLARIZATIONS
from .polarization import Polarization

REQUIRED = object()
SIMPLE = (float, int, str)


@dataclass(frozen=True)
class Field:
    """One setup value.

    Parameters
    ----------
    table : str
        ``"source"``, ``"beam"``, ``"numerics"`` or ``""`` for the top level.
    key : str
        Key in the file, unit in the suffix (``power_mW``).
    attr : str
        Attribute of the dataclass it fills (SI).
    unit : str
        Unit as shown to people (``"mW"``); ``""`` for pure numbers.
    scale : float
        SI value = file value * scale.
    kind : type
        ``float``, ``int`` or ``str``; or a class that parses its own file
        value (``kind.from_file(value)``, raising ``ValueError`` with the
        reason, and ``obj.to_file()``), for values that are lists or tables.
    default : object
        File-unit default, :data:`REQUIRED`, or ``None`` (optional, no value).
    low, high : float
        Allowed range in file units (``None``: unbounded).
    low_open : bool
        ``low`` itself is not allowed (strictly greater).
    label : str
        Plain words for the window and summaries.
    span : tuple
        Slider range in file units; ``log`` a logarithmic slider.
    choices : tuple
        Allowed strings for text fields.
    """

    table: str
    key: str
    attr: str
    unit: str
    scale: float
    kind: type
    default: object
    label: str
    low: float | None = None
    high: float | None = None
    low_open: bool = False
    span: tuple = ()
    log: bool = False
    choices: tuple = ()

    def check(self, value):
        """Return the reason ``value`` (file units) is not allowed, or ``None``."""
        if self.kind not in SIMPLE:
            try:
                self.kind.from_file(value)
            except ValueError as exc:
                return str(exc)
            return None
        if self.kind is str:
            if not isinstance(value, str):
                return f"must be text, got {type(value).__name__} {value!r}"
            if self.choices and value not in self.choices:
                return f"must be one of {', '.join(self.choices)}; got {value!r}"
            return None
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            return f"must be a number, got {type(value).__name__} {value!r}"
        if self.kind is int and not float(value).is_integer():
            return f"must be a whole number, got {value!r}"
        if not math.isfinite(value):
            return f"must be finite, got {value!r}"
        if self.low is not None:
            if self.low_open and value <= self.low:
                return f"must be > {self.low:g} {self.unit}".rstrip() + f", got {value!r}"
            if value < self.low:
                return f"must be >= {self.low:g} {self.unit}".rstrip() + f", got {value!r}"
        if self.high is not None and value > self.high:
            return f"must be <= {self.high:g} {self.unit}".rstrip() + f", got {value!r}"
        return None

    def to_si(self, value):
        if self.kind not in SIMPLE:
            return self.kind.from_file(value)
        if self.kind is str:
            return value
        if self.kind is int:
            return int(value)
        return float(value) * self.scale

    def from_si(self, value):
        """File-unit value of an SI value, rounded to 15 digits so that
        decimal values typed by a user survive a load/save round trip."""
        if value is None or self.kind is str:
            return value
        if self.kind not in SIMPLE:
            return value.to_file()
        if self.kind is int:
            return int(value)
        return float(f"{value / self.scale:.15g}")


def _f(table, key, attr, unit, scale, default, label, **kw):
    return Field(table, key, attr, unit, scale, kw.pop("kind", float), default, label, **kw)


MM, MRAD, MHZ, MW, DEG = 1e-3, 1e-3, 1e6, 1e-3, math.pi / 180.0
# Physical ranges below are generous on purpose: they keep out only values no
# experiment has (an apparatus longer than 10 m, a waist below 0.1 um, more
# than 100 kW, speeds below 1 cm/s or near c, detunings beyond an optical
# frequency), which would otherwise overflow the arithmetic or build
# absurdly long integration grids. Common practice, no source.
ROOM_MM = 1e4

SOURCE_FIELDS = (
    _f("source", "kind", "kind", "", 1, REQUIRED, "source kind", kind=str,
       choices=("effusive", "gaussian", "monoenergetic")),
    _f("source", "temperature_K", "temperature", "K", 1.0, None, "source temperature",
       low=0.1, high=1e5, span=(10.0, 3000.0)),
    _f("source", "speed_m_s", "speed", "m/s", 1.0, None, "beam speed",
       low=0.01, high=1e7, span=(10.0, 3000.0)),
    _f("source", "speed_spread_m_s", "speed_spread", "m/s", 1.0, None, "speed spread (rms)",
       low=1e-3, high=1e7, span=(1.0, 1000.0)),
    _f("source", "divergence_rms_mrad", "divergence_rms", "mrad", MRAD, 0.0,
       "divergence (rms)", low=0.0, high=500.0, span=(0.0, 50.0)),
    _f("source", "width_rms_mm", "width_rms", "mm", MM, 0.0, "beam size across laser (rms)",
       low=0.0, high=ROOM_MM, span=(0.0, 10.0)),
    # measurement (docs/measurement.md): atoms per second leaving the source
    _f("source", "flux_per_s", "flux", "atoms/s", 1.0, None, "source flux",
       low=0.0, high=1e30, span=(1e6, 1e16), log=True),
)

BEAM_FIELDS = (
    _f("beam", "power_mW", "power", "mW", MW, REQUIRED, "power",
       low=0.0, high=1e8, span=(0.01, 1000.0), log=True),
    _f("beam", "waist_mm", "waist", "mm", MM, REQUIRED, "waist along beam (1/e² radius)",
       low=1e-4, high=ROOM_MM, span=(0.05, 20.0), log=True),
    _f("beam", "waist_across_mm", "waist_across", "mm", MM, None,
       "waist across beam (1/e² radius)", low=1e-4, high=ROOM_MM, span=(0.05, 20.0),
       log=True),
    _f("beam", "detuning_MHz", "detuning", "MHz", MHZ, 0.0, "detuning (laser − line)",
       low=-1e9, high=1e9, span=(-500.0, 500.0)),
    _f("beam", "linewidth_MHz", "linewidth", "MHz", MHZ, 0.0, "laser linewidth (FWHM)",
       low=0.0, high=1e9, span=(0.0, 100.0)),
    _f("beam", "position_mm", "position", "mm", MM, 0.0, "position along atomic beam",
       low=-ROOM_MM, high=ROOM_MM, span=(-200.0, 200.0)),
    _f("beam", "angle_deg", "angle", "deg", DEG, 90.0, "crossing angle",
       low=0.001, high=179.999, span=(30.0, 150.0)),
    _f("beam", "passes", "passes", "", 1, 1, "passes", kind=int, low=1, high=100,
       span=(1, 10)),
    # sublevel mode (docs/sublevel.md); level mode ignores both
    _f("beam", "polarization", "polarization", "", 1, "unpolarized",
       "polarization (to the field axis)", kind=Polarization, choices=POLARIZATIONS),
    _f("beam", "reference_F", "reference_F", "", 1, None,
       "detuning from hyperfine line [F, F']", kind=Component),
    # measurement (docs/measurement.md): a probe's fluorescence reaches a detector
    _f("beam", "role", "role", "", 1, "pump", "role: pump (acts) or probe (is watched)",
       kind=str, choices=("pump", "probe")),
    _f("beam", "collection_sr", "collection_sr", "sr", 1.0, None,
       "probe light collected: solid angle", low=0.0, high=4 * math.pi, low_open=True,
       span=(0.01, 4 * math.pi), log=True),
    _f("beam", "collection_NA", "collection_NA", "", 1.0, None,
       "probe light collected: numerical aperture", low=0.0, high=1.0, low_open=True,
       span=(0.01, 1.0)),
    _f("beam", "detection_efficiency", "detection_efficiency", "", 1.0, None,
       "probe detection efficiency (optics and detector)", low=0.0, high=1.0, low_open=True,
       span=(0.001, 1.0), log=True),
    # density-matrix model (docs/coherent.md); the rate equations ignore it
    _f("beam", "phase_group", "phase_group", "", 1, None,
       "phase-related group (sidebands of one laser)", kind=str),
)

MODE_FIELDS = (
    _f("", "mode", "mode", "", 1, "level", "state space: whole levels or magnetic sublevels",
       kind=str, choices=("level", "sublevel")),
    _f("field", "B_gauss", "magnetic_field", "G", 1e-4, 0.0,
       "magnetic field along the quantization axis", span=(-10.0, 10.0)),
)

NUMERICS_FIELDS = (
    _f("numerics", "start_mm", "start", "mm", MM, None, "integration start",
       low=-ROOM_MM, high=ROOM_MM),
    _f("numerics", "end_mm", "end", "mm", MM, None, "integration end",
       low=-ROOM_MM, high=ROOM_MM),
    _f("numerics", "tolerance", "tolerance", "", 1.0, 1e-4,
       "absolute tolerance on populations", low=1e-9, high=0.1),
    _f("numerics", "solver", "solver", "", 1, "exponential", "integrator", kind=str,
       choices=("exponential", "radau", "rosenbrock")),
    _f("numerics", "max_nodes", "max_nodes", "", 1, 200000,
       "largest ensemble the quadrature may use", kind=int, low=1, high=100_000_000),
    # density-matrix model and the check of every run against it (docs/coherent.md)
    _f("numerics", "equations", "equations", "", 1, "rates",
       "model: rate equations or density matrix", kind=str,
       choices=("rates", "density_matrix")),
    _f("numerics", "coherence_check", "coherence_check", "", 1, "on",
       "compare with the density-matrix model on a few atoms", kind=str,
       choices=("on", "off")),
)

# measurement (docs/measurement.md): what the next stage (a trap, a slower) accepts
NEXT_STAGE_FIELDS = (
    _f("next_stage", "capture_speed_m_s", "capture_speed", "m/s", 1.0, None,
       "slowest atoms the next stage captures: below this speed", low=0.0, high=1e7,
       low_open=True, span=(1.0, 1000.0), log=True),
    _f("next_stage", "aperture_mm", "aperture", "mm", MM, None,
       "next stage's aperture (radius)", low=0.0, high=ROOM_MM, low_open=True,
       span=(0.1, 50.0), log=True),
    _f("next_stage", "aperture_distance_mm", "aperture_distance", "mm", MM, None,
       "aperture's distance downstream of the pump", low=0.0, high=ROOM_MM, low_open=True,
       span=(1.0, 2000.0), log=True),
)

FIELDS = SOURCE_FIELDS + BEAM_FIELDS + NUMERICS_FIELDS + MODE_FIELDS + NEXT_STAGE_FIELDS


def fields_of(table: str) -> tuple:
    """The declared fields of one table."""
    return tuple(f for f in FIELDS if f.table == table)

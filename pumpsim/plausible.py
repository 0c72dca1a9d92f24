"""Legal inputs that are unlikely: unit slips refused before a run, and notices.

Two kinds of finding, on purpose:

* **errors** (:class:`~pumpsim.errors.InputError`, exit 2) for a driven line no
  laser of this model drives or no atom has: a wavelength outside the optical
  range, or an Einstein ``A`` that implies an absorption oscillator strength
  far above any atomic line's. Such a run could only give a meaningless
  number, slowly; the usual cause is a unit slip, which the message names.
* **notices** (:class:`Notice`) for values real experiments can have but that
  often hide a slip: a target that decays while the atoms cross, a driven
  level that outlives the crossing, a beam far below saturation that moves
  almost nothing. The run goes on; the notice travels with its result.
"""

import math
from dataclasses import dataclass

from scipy import constants as _c

from .errors import InputError
from .lines import line
from .model import z_range
from .sources import speeds_of

OPTICAL_NM = (100.0, 20000.0)  # vacuum UV to mid infrared: the lines lasers pump
# Largest absorption oscillator strength a driven line may imply. The strongest atomic
# lines have f of about 2 (alkaline-earth resonance lines, e.g. Sr 461 nm f ~ 1.9, from
# memory) and the Thomas-Reiche-Kuhn sum rule bounds the sum over all lines by the
# number of electrons. 100 is a guard against lifetimes off by orders of magnitude (a
# unit slip), not a judgement of close calls: stiff test schemes (1 ns at 500 nm, f ~ 10)
# stay allowed. Common practice, no source.
F_MAX = 100.0
# f = (g_u / g_l) eps0 m_e c lambda^2 A / (2 pi e^2) (Na D2: 589 nm, A = 6.16e7/s,
# g_u/g_l = 2 gives 0.64; e.g. Foot, Atomic Physics, 2005, section 7.3), s/m^2
F_PER_LAMBDA2_A = _c.epsilon_0 * _c.m_e * _c.c / (2 * math.pi * _c.e**2)
# Units that energies are often typed in by mistake: cm^-1 per unit (CODATA).
ENERGY_SLIPS = (("eV", 8065.544), ("meV", 8.065544), ("THz", 33.35641),
                ("1000 cm^-1", 1000.0), ("m^-1", 0.01))
WEAK_S0 = 0.01  # a beam whose peak is below 1 % of I_sat,
FEW_PHOTONS = 1.0  # that scatters fewer photons per atom than this (pumping needs several),
SMALL_TRANSFER = 0.5  # while the transfer stays below this, gets a notice
LONG_LIVED = 100.0  # a driven upper level outliving the crossing this many times


@dataclass(frozen=True)
class Notice:
    """A warning that travels with a setup or a result.

    Parameters
    ----------
    code : str
        Stable short name for programs (``"short-lived-target"``,
        ``"long-lived-upper"``, ``"weak-beam"``, ``"long-run"``).
    message : str
        One line in plain words for people.
    key : str or None
        The ``--set`` key it concerns, if one (``target``, ``beam.pump.power_mW``).
    """

    code: str
    message: str
    key: str | None = None

    def to_dict(self):
        return {"code": self.code, "message": self.message, "key": self.key}


def _length(metres):
    """A wavelength in the unit that reads best."""
    for unit, scale in (("km", 1e3), ("m", 1.0), ("mm", 1e-3), ("um", 1e-6)):
        if metres >= scale:
            return f"{metres / scale:.4g} {unit}"
    return f"{metres * 1e9:.4g} nm"


def oscillator_strength(ln):
    """Absorption oscillator strength ``f`` of a :class:`~pumpsim.lines.Line` from its
    ``A``, wavelength and degeneracies."""
    return F_PER_LAMBDA2_A * ln.wavelength**2 * ln.A * ln.g_upper / ln.g_lower


def check_driven_line(scheme, beam_name, lower, upper, file, table):
    """Refuse a driven line outside the optical range or stronger than any atom's.

    Raises
    ------
    InputError
        Naming ``file``, ``table`` and the key ``transition`` (level ``upper``),
        with the likely unit slip.
    """
    ln = line(scheme, lower, upper)
    nm = ln.wavelength * 1e9
    where = (file, table, "transition", upper)
    if not OPTICAL_NM[0] <= nm <= OPTICAL_NM[1]:
        gap_cm = 1e7 / nm  # the energy difference as read, cm^-1
        meant = {unit: 1e7 / (gap_cm * k) for unit, k in ENERGY_SLIPS}  # nm, had it been unit
        fits = [f"{unit} (the line would be at {x:.4g} nm)" for unit, x in meant.items()
                if OPTICAL_NM[0] <= x <= OPTICAL_NM[1]]
        hint = (f"were the energies typed in {' or '.join(fits)} instead of cm^-1?" if fits else
                "check that energy_cm is in cm^-1")
        raise InputError(
            f"beam '{beam_name}' drives a line of {_length(ln.wavelength)} (from the energies "
            f"of '{lower}' and '{upper}' in the scheme), outside the optical range "
            f"{OPTICAL_NM[0]:g} nm to {OPTICAL_NM[1] / 1000:g} um; {hint}", *where)
    f = oscillator_strength(ln)
    if f > F_MAX:
        lifetime = 1.0 / scheme.total_rate(upper)
        raise InputError(
            f"beam '{beam_name}' drives a line whose A = {ln.A:.3g} 1/s at {nm:.4g} nm means an "
            f"oscillator strength f = {f:.3g}, above {F_MAX:g}, which no atomic line comes near "
            f"(the strongest have about 2): is the lifetime of '{upper}' ({lifetime:.3g} s) in "
            "seconds and A_per_s in 1/s?", *where)


def transit_time(setup):
    """Time the atoms take at their mean speed to cross the integration range, s."""
    start, end = z_range(setup.numerics, setup.beams)
    return (end - start) / speeds_of(setup.source, setup.scheme.mass).mean()


def setup_notices(setup):
    """Notices that need no run: a target that decays while the atoms cross, a
    driven upper level that outlives the crossing many times."""
    out = []
    scheme, crossing = setup.scheme, transit_time(setup)
    rate = scheme.total_rate(setup.target_level)
    if rate > 0 and 1.0 / rate < crossing:
        out.append(Notice(
            "short-lived-target",
            f"the target '{setup.target}' decays in {_seconds(1 / rate)}, faster than the atoms "
            f"cross the integration range ({_seconds(crossing)} at the mean speed): it keeps "
            "atoms only while a beam drives it, so the transfer fraction (its population at "
            "the end) stays small; is it the level you meant (usually a long-lived one)?",
            "target"))
    for b in setup.beams:
        rate = scheme.total_rate(b.upper)
        if rate > 0 and 1.0 / rate > LONG_LIVED * crossing:
            out.append(Notice(
                "long-lived-upper",
                f"beam '{b.name}' drives '{b.upper}', which lives {_seconds(1 / rate)}, "
                f"{1 / (rate * crossing):.2g} times the {_seconds(crossing)} the atoms take to "
                "cross: atoms it excites mostly leave still excited; is its lifetime_s (or "
                "A_per_s) in the right unit?", f"beam.{b.name}.transition"))
    return out


def result_notices(result):
    """Every notice of a result: :func:`setup_notices`, then one per beam far below
    saturation that scattered less than a photon per atom while the transfer stayed
    small (a power typed in W into ``power_mW``, a waist in m into ``waist_mm``)."""
    setup = result.setup
    out = setup_notices(setup)
    if result.transfer_fraction >= SMALL_TRANSFER:
        return out
    for name, info in result.beam_summary().items():
        s0, photons = info["saturation_parameter"], result.photons_per_atom[name]
        if 0 < s0 < WEAK_S0 and photons < FEW_PHOTONS:
            b = setup.beam(name)
            out.append(Notice(
                "weak-beam",
                f"beam '{name}' peaks at s0 = {s0:.2g} ({100 * s0:.2g} % of its line's "
                f"saturation intensity) and scatters {photons:.2g} photons per atom, while the "
                f"transfer into '{setup.target}' stays at {result.transfer_fraction:.2f}: is the "
                f"unit right? power_mW is in milliwatts ({b.power * 1e3:.4g} mW here; s0 = 1 "
                f"takes {b.power * 1e3 / s0:.3g} mW) and waist_mm in millimetres",
                f"beam.{name}.power_mW"))
    return out


def _seconds(t):
    for unit, scale in (("s", 1.0), ("ms", 1e-3), ("us", 1e-6), ("ns", 1e-9)):
        if t >= scale:
            return f"{t / scale:.3g} {unit}"
    return f"{t * 1e12:.3g} ps"

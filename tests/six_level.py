"""An invented six-level species with a pump and a repump, shared by the
Radau reference test and the benchmark (no number describes a real atom)."""

from builders import beam, decay, level, scheme_doc, setup_doc


def six_level_scheme():
    return scheme_doc(
        [level("g", 0, 1), level("h", 420, 1), level("m", 810, 2), level("d", 1530, 0),
         level("e", 18000, 2, 2.0e-8), level("r", 15100, 1)],
        [decay("e", "g", branching=0.50), decay("e", "h", branching=0.15),
         decay("e", "m", branching=0.25), decay("e", "d", branching=0.07),  # 3 % to other
         decay("r", "d", A_per_s=1.2e7), decay("r", "g", A_per_s=0.8e7),
         decay("r", "m", A_per_s=0.6e7)],
        mass_u=61.0, name="Testium-6 (invented)")


def six_level_setup(source, numerics=None):
    """Pump g -> e at 80 deg, two passes, detuned; repump d -> r downstream."""
    return setup_doc("m", source, [
        beam("pump", "g", "e", 4.0, 0.8, waist_across_mm=1.5, detuning_MHz=12.0,
             linewidth_MHz=0.5, angle_deg=80.0, passes=2),
        beam("repump", "d", "r", 2.0, 0.6, waist_across_mm=1.2, position_mm=3.0,
             angle_deg=95.0),
    ], numerics)

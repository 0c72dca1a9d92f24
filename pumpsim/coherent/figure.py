"""Where the rate equations hold: the run's density-matrix check against a laser's
line width and against the field, as a figure.

    python -m pumpsim.coherent.figure SETUP.toml OUT.png

For each value the setup is changed with ``Setup.with_value`` and the check
that every run makes (:func:`.verdict.coherence_check`) gives the largest
population difference between the density-matrix model and the rate
equations. The left panel gives every beam the same line width, once with
the beams phase-related (one ``phase_group``: sidebands of one laser, whose
relative phase that width does not move) and once unrelated (each its own
laser); the right panel sweeps ``[field] B_gauss`` (sublevel mode) with the
setup's own line widths, beams phase-related.
"""

import argparse
import sys

import numpy as np

from ..setup_file import load_setup
from ..simulate import make_propagator
from ..sparse_model import SparseRateModel, solver_for
from ..model import RateModel
from .verdict import coherence_check

STEPS_PER_WAIST = 16


def largest_difference(setup) -> float:
    """The run check's largest population difference for one setup."""
    solver = solver_for(setup)
    model = (SparseRateModel if solver == "rosenbrock" else RateModel)(setup)
    check = coherence_check(setup, model, make_propagator(setup.numerics, solver),
                            model.grid(STEPS_PER_WAIST))
    return check["largest_difference"]


def with_all(setup, key, value):
    """The setup with ``beam.NAME.key = value`` for every beam (``value`` may depend on
    the beam: a callable of its name)."""
    for b in setup.beams:
        setup = setup.with_value(f"beam.{b.name}.{key}", value(b.name) if callable(value)
                                 else value)
    return setup


def sweep(setup, linewidths_MHz, fields_G):
    """Differences against the line width (grouped and unrelated) and against the field."""
    grouped = with_all(setup, "phase_group", "laser")
    unrelated = with_all(setup, "phase_group", lambda name: name)
    width = {name: [largest_difference(with_all(s, "linewidth_MHz", float(w)))
                    for w in linewidths_MHz]
             for name, s in (("phase-related", grouped), ("unrelated", unrelated))}
    field = [largest_difference(grouped.with_value("field.B_gauss", float(B))) for B in fields_G]
    return width, field


def draw(path, setup, linewidths_MHz, width, fields_G, field):
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    tol = setup.numerics.tolerance
    fig, (left, right) = plt.subplots(1, 2, figsize=(10, 4), constrained_layout=True)
    for name, marker in (("phase-related", "o"), ("unrelated", "s")):
        left.loglog(linewidths_MHz, width[name], marker=marker, label=f"beams {name}")
    left.axhline(tol, color="k", ls="--", lw=1, label=f"tolerance {tol:g}")
    left.set_xlabel("laser line width, every beam (MHz)")
    left.set_ylabel("largest population difference")
    left.set_title("density matrix vs rate equations")
    left.legend()
    right.semilogy(fields_G, field, marker="o", label="beams phase-related")
    right.axhline(tol, color="k", ls="--", lw=1, label=f"tolerance {tol:g}")
    right.set_xlabel("field along the axis (G)")
    right.set_ylabel("largest population difference")
    right.set_title("the setup's line widths")
    right.legend()
    fig.savefig(path, dpi=110)


def main(argv=None):
    p = argparse.ArgumentParser(prog="python -m pumpsim.coherent.figure", description=__doc__,
                                formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("setup")
    p.add_argument("out", help="PNG file")
    args = p.parse_args(argv)
    setup = load_setup(args.setup)
    widths = np.geomspace(1e-3, 30.0, 12)
    fields = np.linspace(0.0, 5.0, 11)
    width, field = sweep(setup, widths, fields)
    draw(args.out, setup, widths, width, fields, field)
    for w, a, b in zip(widths, width["phase-related"], width["unrelated"]):
        print(f"linewidth {w:8.4g} MHz  phase-related {a:.3e}  unrelated {b:.3e}")
    for B, d in zip(fields, field):
        print(f"field {B:5.2f} G  {d:.3e}")
    return 0


if __name__ == "__main__":
    sys.exit(main())

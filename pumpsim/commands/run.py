"""``pumpsim run [SETUP]``: one simulation, a readable summary or JSON, optionally HDF5."""

from contextlib import nullcontext

from ..lines import line
from ..outpaths import OutputError, OutputLock, check_output
from ..progress import RunProgress
from ..plausible import result_notices
from ..probe import measurement_report, measurement_summary, wants_report
from ..safety import cautions
from ..simulate import simulate
from ..sublevel_report import sublevel_summary
from .common import add_setup_arguments, command_line, print_json, setup_from_args, status
from .parallel import check_plot_path

NODES_GUESS = 10_000  # ensemble nodes a run's file is sized for before the run (typical)


def add_parser(sub):
    p = sub.add_parser("run", help="simulate one setup (the bundled demo if none is given)",
                       description="Simulate one setup and print the transfer fraction, final "
                                   "populations, photons and deflection per beam.")
    add_setup_arguments(p, optional=True)
    p.add_argument("--out", metavar="FILE.h5", help="also write the full result to HDF5")
    p.add_argument("--plot", metavar="FILE", help="also draw the populations along z "
                                                   "(.png, .svg or .pdf)")
    p.set_defaults(handler=handle)


def handle(args):
    setup = setup_from_args(args)
    command = command_line()
    check_plot_path(args, setup)
    if args.out:
        check_output(args.out, file_estimate(setup), setup.path)
    with OutputLock(args.out, command, setup.path) if args.out else nullcontext():
        with RunProgress(setup.numerics.tolerance) as notes:
            result = simulate(setup, progress=notes)
            # probe signals and the next stage (docs/measurement.md)
            measured = measurement_report(result, simulate) if wants_report(setup) else None
        failed = None
        if args.out:
            from ..h5out import write_result

            try:
                write_result(args.out, result, command, measured)
            except OutputError as exc:  # the numbers are shown all the same, below
                failed = exc
    if args.plot:
        from ..plots import plot_profile

        plot_profile(result, args.plot, cautions(setup))
    show(args, setup, result, measured)
    if failed is not None:
        raise OutputError(f"{failed}; the result above was computed but not saved, and "
                          "nothing was left at that path")
    for path in (args.out, args.plot):
        if path:
            status(f"wrote {path}")
    return 0


def file_estimate(setup):
    """Bytes a run's HDF5 file may take (uncompressed nodes, a typical count)."""
    columns = len(setup.scheme.ids) + 1 + 2 * len(setup.beams) + 4
    nodes = min(setup.numerics.max_nodes, NODES_GUESS)
    return nodes * columns * 8 + 2 * len(setup.text or "") + (1 << 16)


def show(args, setup, result, measured=None):
    """The result on stdout: readable, or one JSON object."""
    warnings = cautions(setup)
    notices = result_notices(result)  # likely slips (plausible.py); also "notices" in JSON
    if args.json:
        out = result.to_dict()
        # at the top, so that a script reading transfer_fraction cannot miss them
        out["converged"] = result.numerics.converged
        out["warnings"] = result.numerics.warnings()
        out["cautions"] = warnings
        out["notices"] = [n.to_dict() for n in notices]
        if measured is not None:
            out["measurement"] = measured
        print_json(out)
        for w in warnings + ["WARNING: " + n.message for n in notices]:
            status(w)
    else:
        print(summary(result))
        if measured is not None:
            print("\n" + measurement_summary(measured))
        for n in notices:
            print("WARNING: " + n.message)
        print()
        for w in warnings:
            print("CAUTION: " + w)


def summary(result):
    """Readable multi-line summary of a result."""
    s = result.setup
    n = result.numerics
    lines = [f"setup   {s.path}", f"species {s.scheme.name}",
             f"transfer fraction into '{s.target}': {result.transfer_fraction:.4f}"
             f"  (error estimate {n.error_estimate['total']:.1e}"
             f"{'' if n.converged else ', NOT CONVERGED: see below'})", "",
             "final populations:"]
    for lid, p in result.final_populations.items():
        # a round-off undershoot (|p| ~ 1e-13) would print as "-0.000000"
        lines.append(f"  {lid:<10} {abs(p) if abs(p) < 5e-7 else p:10.6f}")
    lines += ["", f"  {'beam':<10} {'line':<12} {'λ (nm)':>9} {'power (mW)':>11} "
              f"{'peak I (mW/cm²)':>16} {'s0':>8} {'photons/atom':>13} {'deflection (mrad)':>18}"]
    info = result.beam_summary()
    for b in s.beams:
        ln = line(s.scheme, b.lower, b.upper)
        lines.append(
            f"  {b.name:<10} {b.lower + ' → ' + b.upper:<12} {ln.wavelength * 1e9:9.3f} "
            f"{b.power * 1e3:11.4g} {info[b.name]['peak_intensity_mW_cm2']:16.4g} "
            f"{info[b.name]['saturation_parameter']:8.3g} {result.photons_per_atom[b.name]:13.4f} "
            f"{result.deflection[b.name] * 1e3:18.5f}")
    lines += [""] + figures_table(result.beam_figures())
    if result.sublevels is not None:
        lines += [""] + sublevel_summary(result.sublevels)
    state = "converged" if n.converged else "NOT CONVERGED"
    lines += ["", f"numerics: {n.solver}, {n.steps} steps along z, {n.nodes} ensemble nodes "
              f"({n.nodes_evaluated} evaluated), tolerance {n.tolerance:g}, {state}, "
              f"{n.seconds:.2f} s"]
    lines += ["WARNING: " + w for w in n.warnings()]
    return "\n".join(lines)


def figures_table(figures):
    """Lines of the per-beam figures (:mod:`pumpsim.beam_figures`), one row each."""
    from ..beam_figures import UNITS

    names = list(figures)
    keys = [k for k in UNITS if any(k in figures[n] for n in names)]
    out = [f"  {'':<52}" + "".join(f"{n:>12}" for n in names)]
    for k in keys:
        scale, unit, label = UNITS[k]
        cells = "".join(f"{figures[n][k] * scale:12.4g}" if k in figures[n] else f"{'':>12}"
                        for n in names)
        out.append(f"  {label + ('' if unit == '1' else ' (' + unit + ')'):<52}{cells}")
    return out

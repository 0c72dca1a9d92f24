"""``pumpsim scan SETUP --vary KEY=START:STOP:N[:log] ... --out FILE.h5 [--resume]``:
grids to HDF5, resumable after an interruption."""

from dataclasses import replace
from pathlib import Path

from ..outpaths import check_output, written
from ..scan import disk_need, parse_axes, scan
from .common import add_setup_arguments, command_line, print_json, setup_from_args, status
from .parallel import add_batch_arguments, check_plot_path, executor_from_args, progress


def add_parser(sub):
    p = sub.add_parser(
        "scan", help="simulate a grid over any setup values and write it to HDF5",
        description="Simulate every point of an N-dimensional grid over setup values (the "
                    "keys of --set, in file units) and write the results, the axes with "
                    "their units and the inputs to an HDF5 file.")
    add_setup_arguments(p)
    p.add_argument("--vary", action="append", default=[], required=True,
                   metavar="KEY=START:STOP:N[:log]",
                   help="one axis of the grid, e.g. beam.pump.power_mW=1:100:21:log "
                        "(repeatable: one per dimension)")
    p.add_argument("--out", required=True, metavar="FILE.h5", help="HDF5 file to write")
    p.add_argument("--resume", action="store_true",
                   help="continue an interrupted scan of the same --out from the points it "
                        "kept in FILE.h5.journal (same setup, --set and --vary); without it "
                        "an unfinished scan there is started afresh")
    p.add_argument("--target-fraction", type=float, metavar="F",
                   help="draw the contour of this transfer fraction on the plot")
    add_batch_arguments(p, handle)


def handle(args):
    setup = setup_from_args(args)
    if setup.text is None and setup.path:  # keep the file verbatim even after --set
        setup = replace(setup, text=Path(setup.path).read_text(encoding="utf-8"))
    axes = parse_axes(args.vary, setup)
    check_output(args.out, disk_need(setup, axes), setup.path)
    check_plot_path(args, setup)
    with executor_from_args(args, setup.path) as ex, progress(f"scan ({ex.describe()})") as bar:
        result = scan(setup, axes, args.out, ex, bar, command_line(), resume=args.resume,
                      note=lambda line: status("pumpsim: " + line))
    if args.json:
        print_json(result.to_dict())
        for c in result.cautions:
            status("CAUTION: " + c)
    else:
        d = result.to_dict()
        print(f"wrote {d['out']}: {' × '.join(map(str, d['shape']))} grid, {d['points']} points"
              + (f" ({result.resumed} of them from the interrupted run)" if result.resumed
                 else ""))
        for a in axes:
            print(f"  {a.key} ({a.unit or 'number'}, {a.spacing}): {a.values[0]:g} to "
                  f"{a.values[-1]:g} in {len(a.values)}")
        print(f"transfer fraction into '{setup.target}': {d['transfer_fraction_min']:.5f} to "
              f"{d['transfer_fraction_max']:.5f}"
              + ("" if d["all_converged"]
                 else "  (some points NOT converged: see results/converged)"))
        print()
        for c in result.cautions:
            print("CAUTION: " + c)
    if args.plot:  # after the numbers: a figure that fails costs nothing else
        from ..plots import plot_scan

        with written(args.plot, "the figure"):
            plot_scan(result, args.plot, args.target_fraction)
        status(f"wrote {args.plot}")
    return 0

"""``pumpsim probe SETUP --detuning START:STOP:N``: the probe spectrum, pumps on and off."""

import numpy as np

from ..errors import InputError
from ..executors import SerialExecutor
from ..fitmodel import read_data
from ..probe import probes, spectrum
from ..safety import cautions
from .common import add_setup_arguments, print_json, setup_from_args, status
from .parallel import add_batch_arguments, check_plot_path, executor_from_args


def add_parser(sub):
    p = sub.add_parser("probe", help="probe signal against probe detuning, pumps on and off",
                       description="Simulate a probe beam's detected signal across its "
                                   "detuning, with the pumps on and with every non-probe beam "
                                   "off, and the pump's gain; optionally lay measured points "
                                   "over the figure.")
    add_setup_arguments(p)
    p.add_argument("--probe", metavar="NAME", help="the probe beam (default: the only one)")
    p.add_argument("--detuning", required=True, metavar="START:STOP:N",
                   help="probe detunings to simulate, MHz")
    p.add_argument("--data", metavar="DATA.csv",
                   help="measured points to draw over the figure (columns "
                        "beam.PROBE.detuning_MHz and detected_per_atom or counts_per_s, "
                        "optional uncertainty)")
    add_batch_arguments(p, handle)


def handle(args):
    setup = setup_from_args(args)
    names = [b.name for b in probes(setup)]
    probe = args.probe or (names[0] if len(names) == 1 else None)
    if probe not in names:
        raise InputError(f"choose a probe with --probe (probes: {', '.join(names) or 'none'}; "
                         "a probe is a beam with role = \"probe\")", setup.path, "--probe")
    detunings = _axis(args.detuning, setup)
    measured = _measured(args.data, setup, probe) if args.data else None
    check_plot_path(args, setup)
    with (executor_from_args(args, setup.path) if len(detunings) > 1 else SerialExecutor()) as ex:
        status(f"probe spectrum: {2 * len(detunings)} simulations on {ex.describe()}")
        out = spectrum(setup, probe, detunings, ex)
    if args.plot:
        from ..measure_plots import plot_spectrum

        plot_spectrum(out, args.plot, measured, cautions(setup))
        status(f"wrote {args.plot}")
    if args.json:
        out["cautions"] = cautions(setup)
        print_json(out)
    else:
        unit = "counts_per_s" if "counts_per_s" in out else "detected_per_atom"
        print(f"probe '{probe}': {unit.replace('_', ' ')}, pumps on and off, and the gain")
        print(f"  {'detuning (MHz)':>15} {'pumps on':>12} {'pumps off':>12} {'gain':>8}")
        for d, a, b, g in zip(out["detuning_MHz"], out[unit], out[unit + "_pumps_off"],
                              out["gain"]):
            print(f"  {d:15.4g} {a:12.4g} {b:12.4g} {g:8.4g}")
    for w in cautions(setup):
        (status if args.json else print)("CAUTION: " + w)
    return 0


def _axis(text, setup):
    parts = text.split(":")
    try:
        if len(parts) != 3:
            raise ValueError
        start, stop, n = float(parts[0]), float(parts[1]), int(parts[2])
    except ValueError:
        raise InputError(f"needs START:STOP:N (MHz), got {text!r}", setup.path,
                         "--detuning") from None
    if not 1 <= n <= 10000:
        raise InputError(f"N must be 1 to 10000, got {n}", setup.path, "--detuning")
    return np.linspace(start, stop, n)


def _measured(path, setup, probe):
    data = read_data(path, setup)
    key = f"beam.{probe}.detuning_MHz"
    if data.keys != (key,) or data.observable not in ("detected_per_atom", "counts_per_s"):
        raise InputError(f"measured points for the spectrum need the columns {key} and "
                         "detected_per_atom or counts_per_s", str(path), "header")
    return data.x[:, 0], data.y, data.sigma

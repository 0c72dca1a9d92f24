"""``pumpsim fit SETUP DATA.csv --free KEY[=LOW:HIGH] ...``: fit the model to measured data."""

from contextlib import nullcontext

import numpy as np

from ..errors import InputError
from ..fit import least_squares_fit
from ..fit_output import fit_report, write_fit
from ..measure_plots import plot_fit
from ..fitmodel import FitModel, parse_free, read_data
from ..outpaths import OutputLock, check_output
from ..probe import probes
from ..safety import cautions
from .common import add_setup_arguments, command_line, print_json, setup_from_args, status
from .parallel import add_batch_arguments, check_plot_path, executor_from_args

FROZEN_LIMIT = 0.3  # frozen rules may differ from the adaptive engine by this much of the
# uncertainty at the solution before the fit is told to be redone from there
CURVE_POINTS = 25  # the fitted curve and its band are drawn through this many conditions


def add_parser(sub):
    p = sub.add_parser("fit", help="fit setup or scheme values to measured data",
                       description="Fit numeric setup or scheme values (and a signal scale "
                                   "and background) to measured data by least squares; "
                                   "report best values, standard errors, correlations and "
                                   "chi^2 per degree of freedom.")
    add_setup_arguments(p)
    p.add_argument("data", metavar="DATA.csv",
                   help="measured data: condition column(s) named by setup keys, one measured "
                        "column (transfer_fraction, detected_per_atom, counts_per_s, gain or "
                        "captured_target_fraction), optional uncertainty")
    p.add_argument("--free", action="append", default=[], metavar="KEY[=LOW:HIGH]",
                   help="a value to fit: a setup key, decay.UPPER.LOWER.branching, "
                        "decay.UPPER.LOWER.A_per_s, level.ID.lifetime_s, scale or background "
                        "(repeatable)")
    p.add_argument("--probe", metavar="NAME", help="the probe beam measured (default: the only one)")
    p.add_argument("--out", metavar="FILE.h5", help="also write the fit, data and inputs to HDF5")
    add_batch_arguments(p, handle)


def handle(args):
    setup = setup_from_args(args)
    data = read_data(args.data, setup)
    if not args.free:
        raise InputError("give at least one --free KEY", setup.path, "--free")
    params = [parse_free(t, setup, data) for t in args.free]
    names = [p.name for p in params]
    for n in names:
        if names.count(n) > 1:
            raise InputError("freed twice", setup.path, "--free", n)
    if len(data.y) <= len(params):
        raise InputError(f"{len(data.y)} measured points cannot fit {len(params)} free values; "
                         "give more points than free values", data.path)
    probe = _probe(args, setup, data)
    check_plot_path(args, setup)
    if args.out:
        check_output(args.out, 1 << 20, setup.path)
    command = command_line()
    with OutputLock(args.out, command, setup.path) if args.out else nullcontext():
        with executor_from_args(args, setup.path) as executor:
            status(f"fit: freezing the grid and rules at the start values "
                   f"({len(data.y)} rows, adaptive engine) on {executor.describe()}")
            model = FitModel(setup, data, params, probe, executor)
            start = model.start_signal()
            params = model.linear_start()
            status("fit: least squares")
            fit = least_squares_fit(model.predict, params, data.y, data.sigma)
            status(f"fit: {fit.evaluations} model evaluations; checking the frozen rules "
                   "against the adaptive engine at the solution")
            checks = _checks(model, fit, start)
            curve = _curve(model, fit) if data.x.shape[1] == 1 else None
        report = fit_report(setup, data, fit, checks, curve)
        if checks["solution"] > FROZEN_LIMIT:
            report["warnings"].append(
                f"the frozen grid and rules differ from the adaptive engine at the solution "
                f"by {checks['solution']:.2g} of the {checks['unit']}: the values moved far "
                "from the start; fit again starting from them (--set for setup values, the "
                "scheme file for scheme values)")
        if args.out:
            write_fit(args.out, setup, data, report, command)
    if args.plot:
        plot_fit(data, report, args.plot, cautions(setup))
    if args.json:
        report["cautions"] = cautions(setup)
        print_json(report)
    else:
        print(summary(report))
    for w in cautions(setup):
        (status if args.json else print)("CAUTION: " + w)
    for path in (args.out, args.plot):
        if path:
            status(f"wrote {path}")
    return 0


def _probe(args, setup, data):
    if data.observable not in ("detected_per_atom", "counts_per_s", "gain"):
        return None
    names = [b.name for b in probes(setup)]
    if args.probe is None:
        if len(names) == 1:
            return names[0]
        raise InputError(f"choose the probe with --probe ({', '.join(names)})", setup.path,
                         "--probe")
    if args.probe not in names:
        raise InputError(f"no probe named {args.probe!r} (probes: {', '.join(names)})",
                         setup.path, "--probe")
    return args.probe


def _checks(model, fit, start):
    """How far the frozen rules are from the adaptive engine, at the start and at the
    solution, in units of the data's uncertainty (or of the model's size without one)."""
    frozen_start = model.predict(np.array([[p.start for p in model.params]]))[0]
    adaptive_best = model._signal(fit.values, [r[0] for r in model.adaptive(fit.values)])
    unit = model.data.sigma if model.data.sigma is not None else np.maximum(
        np.abs(adaptive_best), 1e-300)
    what = "uncertainty" if model.data.sigma is not None else "model value"
    return {"unit": what,
            "start": float(np.max(np.abs(frozen_start - start) / unit)),
            "solution": float(np.max(np.abs(fit.predicted - adaptive_best) / unit))}


def _curve(model, fit):
    """The model through :data:`CURVE_POINTS` conditions across the data, each with the
    nearest row's frozen rules, and its standard error from the covariance (``None``
    where a parameter is undetermined)."""
    x = model.data.x[:, 0]
    lo, hi = x.min(), x.max()
    grid = (np.geomspace(lo, hi, CURVE_POINTS) if lo > 0 and hi / lo > 10
            else np.linspace(lo, hi, CURVE_POINTS))
    rules = [model.rules[int(np.argmin(np.abs(x - g)))] for g in grid]
    p = fit.values
    steps = 1e-6 * np.maximum(np.abs(p), [q.typical for q in model.params])
    steps = np.where(p + steps <= [q.high for q in model.params], steps, -steps)
    P = np.vstack([p, p + np.diag(steps)])
    rows = model.predict(P, grid[:, None], rules)
    band = None
    if np.all(np.isfinite(fit.stderr)):
        J = ((rows[1:] - rows[0]) / steps[:, None]).T
        band = np.sqrt(np.maximum(np.einsum("ij,jk,ik->i", J, fit.covariance, J), 0.0))
    return grid, rows[0], band


def summary(report):
    lines = [f"fit of {report['observable']} in {report['data']} "
             f"({len(report['points']['measured'])} points) with {report['setup']}", ""]
    for p in report["parameters"]:
        err = f"± {p['stderr']:.3g}" if p["stderr"] is not None else "± (undetermined)"
        lines.append(f"  {p['key']:<32} {p['value']:14.6g} {err}")
    names = [p["key"] for p in report["parameters"]]
    if len(names) > 1:
        lines += ["", "correlation:"]
        for n, row in zip(names, report["correlation"]):
            lines.append(f"  {n:<32} " + " ".join(
                "     nan" if c is None else f"{c:8.3f}" for c in row))
    scatter = " (errors scaled by the scatter: no uncertainty column)" \
        if report["errors_from_scatter"] else ""
    c = report["frozen_rule_check"]
    lines += ["", f"chi^2 = {report['chi2']:.4g}, {report['dof']} degrees of freedom, "
              f"chi^2/dof = {report['chi2_per_dof']:.4g}{scatter}",
              f"frozen rules against the adaptive engine: {c['start']:.2g} (start), "
              f"{c['solution']:.2g} (solution) of the {c['unit']} at most",
              f"{report['evaluations']} model evaluations; {report['message']}"]
    lines += ["WARNING: " + w for w in report["warnings"]]
    return "\n".join(lines)

"""``pumpsim check FILE``: validate a scheme or a setup and summarise it."""

from ..beam_shapes import shape_of
from ..cost import duration, estimate_setup, long_run_notice
from ..errors import InputError
from ..lines import line
from ..model import initial_level_populations
from ..plausible import setup_notices
from ..safety import cautions
from ..scheme_file import load_scheme
from ..tomlread import read_toml
from .common import print_json, setup_from_args
from .info import format_info, scheme_info


def add_parser(sub):
    p = sub.add_parser("check", help="validate a scheme or setup file and summarise it",
                       description="Validate a scheme or setup. A setup's summary lists levels, "
                                   "lines (wavelength, cross-section, saturation intensity) and "
                                   "beams (peak intensity, saturation parameter).")
    p.add_argument("file", help="scheme or setup TOML file")
    p.add_argument("--set", action="append", default=[], metavar="KEY=VALUE",
                   help="override one setup value, as for run (repeatable)")
    p.add_argument("--json", action="store_true", help="print one JSON object on stdout")
    p.set_defaults(handler=handle)


def setup_info(setup):
    """Summary of a setup (file units)."""
    beams = []
    for b in setup.beams:
        ln = line(setup.scheme, b.lower, b.upper)
        peak = shape_of(b).peak_intensity
        beams.append({
            "name": b.name, "lower": b.lower, "upper": b.upper,
            "wavelength_nm": ln.wavelength * 1e9, "power_mW": b.power * 1e3,
            "peak_intensity_mW_cm2": peak * 0.1,
            "saturation_parameter": peak / ln.saturation_intensity(),
            "sigma0_m2": ln.sigma0(b.linewidth), "passes": b.passes})
    init = initial_level_populations(setup)
    cost = estimate_setup(setup)  # refuses (InputError) what cannot fit in memory
    notices = setup_notices(setup) + [n for n in (long_run_notice(cost),) if n is not None]
    return {"kind": "setup", "target": setup.target, "source": setup.source.kind,
            "initial_populations": dict(zip(setup.scheme.ids, map(float, init))),
            "beams": beams, "scheme": scheme_info(setup.scheme), "cost": cost.to_dict(),
            "notices": [n.to_dict() for n in notices], "cautions": cautions(setup)}


def handle(args):
    doc, _ = read_toml(args.file)
    if "species" in doc:
        if args.set:
            raise InputError("--set changes setups; this file is a scheme", args.file, "--set")
        info = dict(scheme_info(load_scheme(args.file)), kind="scheme")
        if args.json:
            print_json(info)
        else:
            print(f"{args.file}: a valid scheme\n")
            print(format_info(info))
        return 0
    args.setup = args.file
    info = setup_info(setup_from_args(args))
    if args.json:
        print_json(info)
        return 0
    print(f"{args.file}: a valid setup (target '{info['target']}', {info['source']} source)\n")
    print(format_info(info["scheme"]))
    print(f"\n  {'beam':<10} {'line':<12} {'λ (nm)':>9} {'power (mW)':>11} "
          f"{'peak I (mW/cm²)':>16} {'s0':>8} {'passes':>7}")
    for b in info["beams"]:
        print(f"  {b['name']:<10} {b['lower'] + ' → ' + b['upper']:<12} {b['wavelength_nm']:9.3f} "
              f"{b['power_mW']:11.4g} {b['peak_intensity_mW_cm2']:16.4g} "
              f"{b['saturation_parameter']:8.3g} {b['passes']:7d}")
    print("\ninitial populations: " + ", ".join(f"{k} {v:.4f}" for k, v in info["initial_populations"].items()))
    c = info["cost"]
    took = (f", at least {duration(c['seconds_at_least'])}" if "seconds_at_least" in c else "")
    print(f"size: {c['states']} states, {c['terms']} drive terms, {c['steps_first_grid']:,} steps "
          f"along z at the first grid, {c['memory_MB']:.3g} MB of memory (limit "
          f"{c['memory_limit_MB']:.3g} MB){took}")
    print()
    for n in info["notices"]:
        print("WARNING: " + n["message"])
    for w in info["cautions"]:
        print("CAUTION: " + w)
    return 0

"""``pumpsim compare SETUP --beam NAME``: every line out of the beam's lower level, ranked."""

from ..routes import RANK_BY, all_cautions, compare, route_curves
from .common import add_setup_arguments, print_json, setup_from_args, status
from .parallel import (add_batch_arguments, check_plot_path, executor_from_args,
                       pick_beam, progress)

DEFAULT_F = 0.5


def add_parser(sub):
    p = sub.add_parser(
        "compare", help="rank the pump lines a beam could use",
        description="Treat every line of the scheme out of the beam's lower level as a "
                    "route: size each for transfer fraction F at the setup's waist and rank "
                    "them (reaching F first, by least power; then by ceiling).")
    add_setup_arguments(p)
    p.add_argument("--beam", metavar="NAME", help="beam to retune (default: the only beam)")
    p.add_argument("--target-fraction", type=float, default=DEFAULT_F, metavar="F",
                   help=f"transfer fraction to size each route for (default {DEFAULT_F})")
    p.add_argument("--routes", metavar="UPPER,...",
                   help="compare only these upper levels, e.g. e1,e3")
    p.add_argument("--rank-by", choices=list(RANK_BY), default="power",
                   help="order of the routes that reach F: least power (default), fewest "
                        "photons per atom, smallest deflection, or visible lines before "
                        "ultraviolet ones")
    add_batch_arguments(p, handle)


def handle(args):
    setup = setup_from_args(args)
    beam = pick_beam(setup, args.beam)
    check_plot_path(args, setup)
    chosen = [x.strip() for x in args.routes.split(",") if x.strip()] if args.routes else None
    F = args.target_fraction
    with executor_from_args(args, setup.path) as ex, progress(f"compare ({ex.describe()})") as bar:
        routes = compare(setup, beam, F, ex, chosen, bar, args.rank_by)
        curves = route_curves(setup, routes, ex, bar) if args.plot else None
    warnings = all_cautions(routes)
    if args.plot:
        from ..plots import plot_compare

        plot_compare(setup, routes, F, curves, args.plot, args.rank_by)
    if args.json:
        print_json({"beam": beam, "lower": setup.beam(beam).lower, "target": setup.target,
                    "target_fraction": F, "rank_by": args.rank_by,
                    "routes": [r.to_dict() for r in routes],
                    "cautions": warnings})
        for c in warnings:
            status("CAUTION: " + c)
    else:
        print(summary(setup, beam, F, routes, warnings, args.rank_by))
    if args.plot:
        status(f"wrote {args.plot}")
    return 0


def summary(setup, beam, F, routes, warnings, rank_by="power"):
    """Readable table of ranked routes."""
    b = setup.beam(beam)
    out = [f"setup   {setup.path}",
           f"routes for beam '{beam}' out of '{b.lower}' into target '{setup.target}', "
           f"F = {F:g}, waist {b.waist * 1e3:.4g} × {b.waist_across * 1e3:.4g} mm", "",
           f"  {'#':>2} {'line':<10} {'λ (nm)':>8} {'σ0 (m²)':>10} {'→target':>8} "
           f"{'→other':>7} {'power (mW)':>11} {'ceiling':>8} {'limit':>7} {'photons':>8} "
           f"{'defl. (mrad)':>12}"]
    for i, r in enumerate(routes, 1):
        d = r.to_dict()
        power = f"{d['power_mW']:.4g}" if r.search.reachable else "unreachable"
        photons = "-" if d["photons_per_atom"] is None else f"{d['photons_per_atom']:.3g}"
        defl = "-" if d["deflection_mrad"] is None else f"{d['deflection_mrad']:.4g}"
        out.append(f"  {i:>2} {r.lower + ' → ' + r.upper:<10} {d['wavelength_nm']:8.2f} "
                   f"{d['sigma0_m2']:10.3g} {d['branching_target']:8.3f} "
                   f"{d['branching_other']:7.3f} {power:>11} {d['ceiling']:8.4f} "
                   f"{d['branching_limit']:7.4f} {photons:>8} {defl:>12}")
    if not all(r.to_dict()["converged"] for r in routes):
        out += ["", "WARNING: some of these simulations did not meet the numerical tolerance"]
    out += ["", "power: least power reaching F at the setup's waist (re-simulated); ceiling: "
                "unlimited power, this transit; limit: unlimited power and time.",
            f"ranked: routes reaching F first, by {RANK_BY[rank_by]}; then by ceiling. The "
            "ceiling's power is a numerical limit, not a proposed power."]
    out += [""] + ["CAUTION: " + c for c in warnings]
    return "\n".join(out)

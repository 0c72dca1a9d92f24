"""``pumpsim size SETUP --beam NAME --target-fraction F``: power and waist for a target."""

from ..lines import line
from ..sizing import size
from .common import add_setup_arguments, print_json, setup_from_args, status
from .parallel import (add_batch_arguments, check_plot_path, executor_from_args,
                       parse_range, pick_beam, progress)


def add_parser(sub):
    p = sub.add_parser(
        "size", help="least power and best waist for a target transfer fraction",
        description="Find the least power of one beam that reaches transfer fraction F at "
                    "the setup's waist, the least power over waists within bounds and the "
                    "waists it needs (each re-simulated to confirm), and the map of transfer "
                    "fraction over power and waist. Always reports the ceiling at unlimited "
                    "power for this transit and the branching limit at unlimited power and "
                    "time; these quick answers are printed on stderr as soon as known, with "
                    "what the rest will cost.")
    add_setup_arguments(p)
    p.add_argument("--beam", metavar="NAME", help="beam to size (default: the only beam)")
    p.add_argument("--target-fraction", type=float, required=True, metavar="F",
                   help="transfer fraction to reach, between 0 and 1")
    p.add_argument("--power", type=float, metavar="MW",
                   help="power for the best-waist search, mW (default: the least power found)")
    p.add_argument("--waist-range", metavar="MIN:MAX",
                   help="bounds on the waist along the atomic beam, mm (default: current / 3 "
                        "to current * 3)")
    p.add_argument("--waist-across-range", metavar="MIN:MAX",
                   help="bounds on the waist across, mm (default: current / 3 to current * 3, "
                        "but not below the atomic beam's rms width)")
    p.add_argument("--no-waist-search", action="store_true",
                   help="skip the waist searches: least power at the setup's waist, ceiling "
                        "and branching limit only (much faster)")
    p.add_argument("--map", type=int, default=10, metavar="N",
                   help="points per axis of the power x waist map (default 10; 0: no map)")
    p.add_argument("--power-range", metavar="MIN:MAX",
                   help="powers of the map, mW (default: least power / 10 to * 10, widened to "
                        "include the setup's power)")
    add_batch_arguments(p, handle)


def handle(args):
    from ..errors import InputError

    setup = setup_from_args(args)
    beam = pick_beam(setup, args.beam)
    check_plot_path(args, setup)
    if args.plot and args.map == 0:
        raise InputError("--plot draws the map: give --map N with N >= 2", setup.path, "--map")
    ranges = {key: parse_range(getattr(args, attr), option, 1e-3, setup.path)
              for key, attr, option in (("along", "waist_range", "--waist-range"),
                                        ("across", "waist_across_range", "--waist-across-range"),
                                        ("power_range", "power_range", "--power-range"))}
    with executor_from_args(args, setup.path) as ex, progress(f"size ({ex.describe()})") as bar:
        def report(text):
            if bar.tty and bar.last is not None:  # below the bar drawn in place
                status("\r\x1b[K" + text)
            else:
                status(text)

        result = size(setup, beam, args.target_fraction, ex,
                      None if args.power is None else args.power * 1e-3,
                      map_points=args.map, progress=bar, report=report,
                      waists=not args.no_waist_search, **ranges)
    if args.plot:
        from ..plots import plot_size

        plot_size(result, args.plot)
    if args.json:
        print_json(result.to_dict())
        for c in result.cautions:
            status("CAUTION: " + c)
    else:
        print(summary(result))
    if args.plot:
        status(f"wrote {args.plot}")
    return 0


def summary(r):
    """Readable summary of a :class:`~pumpsim.sizing.Sizing`."""
    setup, s, w, lim = r.setup, r.search, r.waist, r.limit
    b = setup.beam(r.beam)
    ln = line(setup.scheme, b.lower, b.upper)
    out = [f"setup   {setup.path}",
           f"beam    '{r.beam}' on {b.lower} → {b.upper} ({ln.wavelength * 1e9:.1f} nm), "
           f"waist {b.waist * 1e3:.4g} mm along × {b.waist_across * 1e3:.4g} mm across",
           f"target  '{setup.target}', F = {r.target_fraction:g}", ""]
    losses = ", ".join(f"{v:.2%} in '{k}'" for k, v in lim.final.items()
                       if k != setup.target and v > 5e-5)
    out += [f"branching limit at unlimited power and time: {lim.fraction:.5f}"
            + (f"  (the rest: {losses})" if losses else ""),
            f"ceiling at unlimited power, this waist and transit: "
            f"{s.ceiling.transfer_fraction:.5f}  (computed at {s.ceiling_power * 1e3:.4g} mW, "
            "peak saturation parameter 1e4: a numerical limit, not a proposed power)"]
    if s.reachable:
        out.append(f"least power for F at this waist: {s.power * 1e3:.4g} mW  (re-simulated: "
                   f"{s.outcome.transfer_fraction:.5f}, {s.outcome.photons_per_atom[r.beam]:.3g} "
                   f"photons per atom, deflection {s.outcome.deflection[r.beam] * 1e3:.4g} mrad)")
    elif r.joint is None:
        out.append(f"least power for F: NOT REACHABLE. {r.reason}")
    else:
        out.append("least power for F at this waist: not reachable at this waist")
    (alo, ahi), (clo, chi) = r.bounds
    bounds = f"bounds {alo * 1e3:.3g}-{ahi * 1e3:.3g} × {clo * 1e3:.3g}-{chi * 1e3:.3g} mm"
    j = r.joint
    if j is not None:
        at = [f"{k} at its {v} bound: widen the bounds to look further"
              for k, v in j.at_bound.items() if v]
        out.append(f"LEAST POWER OVER WAISTS: {j.power * 1e3:.4g} mW at {j.waist * 1e3:.4g} mm "
                   f"along × {j.waist_across * 1e3:.4g} mm across  (re-simulated: "
                   f"{j.outcome.transfer_fraction:.5f}, "
                   f"{j.outcome.photons_per_atom[r.beam]:.3g} photons per atom; "
                   + ("; ".join(at) + "; " if at else "") + bounds + ")")
    if w is not None:
        at = [f"{k} at its {v} bound" for k, v in w.at_bound.items() if v]
        note = ("; ".join(at) if at else
                "neighbours at ±{:.1%} are no better".format(w.step)) + (
            "; flat within the tolerance" if w.flat else "")
        out.append(f"best waist at {w.power * 1e3:.4g} mW: {w.waist * 1e3:.4g} mm along × "
                   f"{w.waist_across * 1e3:.4g} mm across → {w.outcome.transfer_fraction:.5f}  "
                   f"({note}; {bounds})")
    if r.map is not None:
        m = r.map
        out += ["", f"transfer fraction map, waist across {m['across'] * 1e3:.4g} mm (rows: "
                    "waist along, mm; columns: power, mW):",
                "  " + " " * 9 + "".join(f"{p * 1e3:9.3g}" for p in m["power"])]
        for wv, row in zip(m["waist"], m["fraction"]):
            out.append(f"  {wv * 1e3:9.3g}" + "".join(
                f"{t:9.4f}" if t < r.target_fraction else f"{t:8.4f}*" for t in row))
        out.append(f"  (* reaches F = {r.target_fraction:g})")
    out += ["", f"{r.simulations} simulations"]
    if r.unconverged:
        out.append(f"WARNING: {r.unconverged} of them did not meet the numerical tolerance "
                   "(see pumpsim run on such a point); treat the numbers with care")
    out += [""] + ["CAUTION: " + c for c in r.cautions]
    return "\n".join(out)

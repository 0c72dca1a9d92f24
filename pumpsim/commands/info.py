"""``pumpsim info SCHEME``: per decay its line figures, per level its lifetime."""

import textwrap

from .. import constants as K
from ..lines import line
from ..scheme_file import load_scheme
from .common import print_json


def add_parser(sub):
    p = sub.add_parser("info", help="list a scheme's lines and levels",
                       description="Per decay: wavelength, A, sigma0 and saturation intensity at "
                                   "natural width; per level: lifetime.")
    p.add_argument("scheme", help="scheme TOML file")
    p.add_argument("--json", action="store_true", help="print one JSON object on stdout")
    p.set_defaults(handler=handle)


# Which saturation intensity is printed: the rate-equation one of lines.py, for light
# that drives every sublevel pair alike (averaged over the degenerate sublevels).
ISAT_DEFINITION = (
    "I_sat is at natural width and averaged over the degenerate sublevels (isotropic light): "
    "hbar omega G_upper / (sigma0 (1 + g_lower/g_upper)); for J=0 -> J=1 that is 1.5 times "
    "the two-level value pi h c G / (3 lambda^3) quoted for a cycling transition")


def scheme_info(scheme):
    """The ``info`` JSON object (file units) of a scheme."""
    decays = []
    for d in scheme.decays:
        ln = line(scheme, d.lower, d.upper)
        decays.append({
            "lower": d.lower, "upper": d.upper, "wavelength_nm": d.wavelength * 1e9,
            "A_per_s": d.rate, "branching": d.rate / scheme.total_rate(d.upper),
            "sigma0_m2": ln.sigma0(), "isat_mW_cm2": ln.saturation_intensity() * 0.1})
    levels = []
    for lv in scheme.levels:
        G = scheme.total_rate(lv.id)
        levels.append({
            "id": lv.id, "label": lv.label, "energy_cm": lv.energy / (100 * K.h * K.c),
            "J": lv.J, "lifetime_s": (1.0 / G) if G > 0 else None,
            "branching_other": scheme.unlisted_rate(lv.id) / G if G > 0 else 0.0})
    return {"species": scheme.name, "mass_u": scheme.mass / K.amu,
            "decays": decays, "levels": levels, "isat_definition": ISAT_DEFINITION}


def format_info(info):
    out = [f"species {info['species']}, mass {info['mass_u']:.4f} u", "",
           f"  {'level':<8} {'energy (cm⁻¹)':>14} {'J':>5} {'lifetime':>12} {'to other':>9}  label"]
    for lv in info["levels"]:
        life = "stable" if lv["lifetime_s"] is None else f"{lv['lifetime_s'] * 1e9:.4g} ns"
        out.append(f"  {lv['id']:<8} {lv['energy_cm']:14.3f} {lv['J']:5.1f} {life:>12} "
                   f"{lv['branching_other']:9.3f}  {lv['label']}")
    out += ["", f"  {'line':<14} {'λ (nm)':>10} {'A (1/s)':>11} {'branching':>9} "
            f"{'σ0 (m²)':>11} {'I_sat (mW/cm²)':>15}"]
    for d in info["decays"]:
        out.append(f"  {d['upper'] + ' → ' + d['lower']:<14} {d['wavelength_nm']:10.3f} "
                   f"{d['A_per_s']:11.4g} {d['branching']:9.4f} {d['sigma0_m2']:11.4g} "
                   f"{d['isat_mW_cm2']:15.4g}")
    out += [""] + textwrap.wrap(info["isat_definition"], 90)
    return "\n".join(out)


def handle(args):
    info = scheme_info(load_scheme(args.scheme))
    if args.json:
        print_json(info)
    else:
        print(format_info(info))
    return 0


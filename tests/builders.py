"""Small scheme and setup TOML files for the tests (invented species only).

The files are written by tomlkit directly, not through ``pumpsim.tomltext``,
so that a bug there cannot hide one in the loaders. Every species is invented
("Testium"); no number describes a real atom.
"""

import tomllib
from pathlib import Path

import tomlkit


def toml_text(doc):
    """TOML for a dict of scalars, lists, sub-tables and arrays of tables (tomlkit)."""
    text = tomlkit.dumps(doc)
    assert tomllib.loads(text) == doc  # the writer round-trips what it is given
    return text


def write_toml(path, doc) -> Path:
    path = Path(path)
    path.write_text(toml_text(doc), encoding="utf-8")
    return path


def level(id, energy_cm, J, lifetime_s=None):
    d = {"id": id, "energy_cm": float(energy_cm), "J": J}
    if lifetime_s is not None:
        d["lifetime_s"] = lifetime_s
    return d


def decay(upper, lower, A_per_s=None, branching=None, wavelength_nm=None):
    d = {"upper": upper, "lower": lower}
    if A_per_s is not None:
        d["A_per_s"] = A_per_s
    if branching is not None:
        d["branching"] = branching
    if wavelength_nm is not None:
        d["wavelength_nm"] = wavelength_nm
    return d


def scheme_doc(levels, decays, mass_u=40.0, name="Testium (invented)"):
    return {"species": {"name": name, "mass_u": mass_u}, "level": levels, "decay": decays}


def beam(name, lower, upper, power_mW, waist_mm, **extra):
    return dict({"name": name, "transition": [lower, upper], "power_mW": power_mW,
                 "waist_mm": waist_mm}, **extra)


def setup_doc(target, source, beams, numerics=None, scheme="scheme.toml"):
    d = {"scheme": scheme, "target": target, "source": source, "beam": beams}
    if numerics:
        d["numerics"] = numerics
    return d


def write_case(folder, scheme, setup, name="setup.toml") -> Path:
    """Write ``scheme.toml`` and a setup naming it into ``folder``; return the setup path."""
    folder = Path(folder)
    write_toml(folder / setup.get("scheme", "scheme.toml"), scheme)
    return write_toml(folder / name, setup)

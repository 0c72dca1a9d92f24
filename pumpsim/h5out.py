"""Write a result to HDF5 (layout documented in the README).

A file is built whole in memory, then written under a temporary name, synced
and renamed (:func:`pumpsim.outpaths.commit`), so an interrupted run or a
full disk never leaves a file that looks complete, and a failed write is a
plain ``OSError`` of Python's own file I/O: the HDF5 library never sees a
disk error (it crashed the process on one). The root attribute ``complete``
is set last as a second guard.
"""

import datetime
import io

import h5py
import numpy as np

from . import __version__
from .beam_figures import UNITS as FIGURE_UNITS
from .outpaths import commit
from .setup_file import setup_to_toml

STR = h5py.string_dtype()


def _text(group, name, value):
    group.create_dataset(name, data=value if value is not None else "", dtype=STR)


def write_header(f, setup, command, kind, created=None):
    """Root attributes every file of pumpsim carries (``complete`` false until the
    writer sets it last) and the inputs it was computed from."""
    f.attrs.update(pumpsim_version=__version__, command=command, kind=kind, complete=False,
                   created_utc=created or datetime.datetime.now(datetime.timezone.utc).isoformat())
    write_inputs(f, setup)


def write_inputs(f, setup):
    """Inputs verbatim (setup and scheme files) and as run (after overrides)."""
    g = f.create_group("inputs")
    _text(g, "setup_toml", setup.text)
    _text(g, "scheme_toml", setup.scheme.text)
    _text(g, "setup_as_run_toml", setup_to_toml(setup))
    g.attrs["setup_path"] = str(setup.path or "")
    g.attrs["scheme_path"] = str(setup.scheme.path or "")


def write_sublevels(f, rep):
    """Group ``sublevels``: labels, final populations, populations along z, exposure,
    dark, and the target's sublevels."""
    g = f.create_group("sublevels")
    g.create_dataset("labels", data=list(rep.labels), dtype=STR)
    g.create_dataset("level_index", data=rep.level_of)
    g.create_dataset("final_populations", data=rep.final).attrs["units"] = "fraction"
    d = g.create_dataset("populations", data=rep.profile, compression="gzip")
    d.attrs["units"] = "fraction"
    d.attrs["axes"] = "z (profile/z_mm), sublevel"
    g.create_dataset("exposure", data=rep.exposure).attrs["units"] = "excitations per atom"
    g.create_dataset("dark", data=rep.dark)
    g.attrs["dark_fraction"] = rep.dark_fraction
    if rep.target is not None:  # which sublevels the transfer fraction counts
        g.create_dataset("target", data=rep.target)


def h5_bytes(fill) -> bytes:
    """The bytes of an HDF5 file that ``fill(f)`` writes into an open, empty ``f``."""
    buf = io.BytesIO()
    with h5py.File(buf, "w") as f:
        fill(f)
    return buf.getvalue()


def write_measurement(f, measured):
    """Group ``measurement`` (docs/measurement.md): one attribute per reported number,
    probes in subgroups ``probes/NAME``."""
    g = f.create_group("measurement")
    for name, rec in measured.get("probes", {}).items():
        g.require_group("probes").create_group(name).attrs.update(rec)
    g.create_group("next_stage").attrs.update(measured["next_stage"])


def write_result(path, result, command="", measured=None):
    """Write one simulation result to ``path`` whole, or nothing.

    Parameters
    ----------
    path : str or Path
    result : Result
    command : str
        The command line that produced it, stored as an attribute.
    measured : dict, optional
        Probe signals and the next stage (:func:`pumpsim.probe.measurement_report`).

    Raises
    ------
    OutputError
        If the file could not be written (nothing is left at ``path``).
    """
    commit(path, h5_bytes(lambda f: fill_result(f, result, command, measured)), "the result file")


def fill_result(f, result, command, measured=None):
    """The layout of a run's file (README), into the open file ``f``."""
    setup = result.setup
    beams = [b.name for b in setup.beams]
    write_header(f, setup, command, "run")
    r = f.create_group("results")
    r.attrs["target"] = setup.target
    r.attrs["transfer_fraction"] = result.transfer_fraction
    d = r.create_dataset("final_populations", data=[result.final_populations[k] for k in result.levels])
    d.attrs["levels"] = list(result.levels)
    d.attrs["units"] = "fraction"
    for name, values, unit in (
            ("photons_per_atom", [result.photons_per_atom[b] for b in beams], "photons"),
            ("deflection_mrad", [1e3 * result.deflection[b] for b in beams], "mrad")):
        d = r.create_dataset(name, data=np.array(values, dtype=float))
        d.attrs["beams"] = beams
        d.attrs["units"] = unit
    g = r.create_group("beam_figures")  # per beam (columns of attribute "beams")
    figures = result.beam_figures()
    g.attrs["beams"] = list(figures)
    for k, (scale, unit, _) in FIGURE_UNITS.items():
        g.create_dataset(k, data=[figures[n].get(k, np.nan) * scale for n in figures]
                         ).attrs["units"] = unit
    p = f.create_group("profile")
    p.create_dataset("z_mm", data=result.z * 1e3).attrs["units"] = "mm"
    d = p.create_dataset("populations", data=result.profile)
    d.attrs["levels"] = list(result.levels)
    d.attrs["units"] = "fraction"
    n = f.create_group("nodes")
    nodes, L, B = result.nodes, len(result.levels), len(beams)
    for name, data, unit in (("speed_m_s", nodes.v, "m/s"), ("angle_mrad", nodes.a * 1e3, "mrad"),
                             ("offset_mm", nodes.y0 * 1e3, "mm"), ("weight", nodes.weight, "1"),
                             ("populations", nodes.values[:, :L], "fraction"),
                             ("photons", nodes.values[:, L:L + B], "photons"),
                             ("deflection_mrad", nodes.values[:, L + B:] * 1e3, "mrad")):
        n.create_dataset(name, data=data, compression="gzip").attrs["units"] = unit
    n.attrs["levels"] = list(result.levels)
    n.attrs["beams"] = beams
    if result.sublevels is not None:  # sublevel mode (docs/sublevel.md)
        write_sublevels(f, result.sublevels)
    if measured is not None:
        write_measurement(f, measured)
    num = f.create_group("numerics")
    for k, v in result.numerics.to_dict().items():
        if isinstance(v, dict):
            for kk, vv in v.items():
                num.attrs[f"{k}.{kk}"] = vv
        else:
            num.attrs[k] = v
    f.attrs["complete"] = True

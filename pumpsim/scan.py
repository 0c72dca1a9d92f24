"""Parameter scans: N-dimensional grids over any numeric setup value, to HDF5.

An axis is written ``KEY=START:STOP:N[:log]`` with the keys of ``--set``
(file units: ``beam.pump.power_mW=1:100:21:log``). Every grid point is one
independent simulation, run through an executor and written to the file as
it finishes. The file is built under a temporary name (``FILE.partial``,
which then holds the points done so far and ``complete = False``) and renamed
when every point is in.

File layout (HDF5):

- root attributes ``kind = "scan"``, ``pumpsim_version``, ``created_utc``,
  ``command``, ``shape``, ``axes`` (keys in order), ``complete``;
- ``inputs/``: the setup and scheme files verbatim, the setup as run (after
  ``--set``), and the ``--vary`` strings (attribute ``vary``);
- ``axes/KEY``: each axis's values, a dimension scale, with ``units`` and
  ``spacing`` (``linear`` or ``log``);
- ``results/``: ``transfer_fraction`` (grid shape), ``final_populations``
  (grid + levels, attribute ``levels``), ``photons_per_atom`` and
  ``deflection_mrad`` (grid + beams, attribute ``beams``), ``error_estimate``,
  ``converged``, ``seconds`` and ``done``; grid dimensions are attached to
  the axes' scales.
"""

import datetime
import os
from dataclasses import dataclass
from itertools import product
from pathlib import Path

import h5py
import numpy as np

from . import __version__
from .errors import InputError
from .executors import SerialExecutor, imap_unordered
from .h5out import write_inputs
from .outcome import evaluate
from .safety import cautions
from .schema import FIELDS


@dataclass(frozen=True)
class Axis:
    """One scanned value.

    Parameters
    ----------
    key : str
        ``--set`` key, file units.
    values : tuple of float
        File units.
    unit : str
    log : bool
        Geometric spacing.
    text : str
        As the user wrote it.
    """

    key: str
    values: tuple
    unit: str
    log: bool
    text: str

    @property
    def spacing(self):
        return "log" if self.log else "linear"


def field_of(key):
    """The schema field behind a ``--set`` key, or ``None`` (``source.initial.LEVEL``)."""
    parts = key.split(".")
    if parts[0] == "beam" and len(parts) == 3:
        table, leaf = "beam", parts[2]
    elif len(parts) == 2:
        table, leaf = parts
    else:
        return None
    return next((f for f in FIELDS if f.table == table and f.key == leaf), None)


def current_value(setup, key):
    """The setup's own value (file units) of a ``--set`` key, or ``None`` if unset."""
    parts = key.split(".")
    if key.startswith("source.initial."):
        init = setup.source.initial
        return None if isinstance(init, str) else dict(init).get(parts[2], 0.0)
    field = field_of(key)
    owner = {"beam": lambda: setup.beam(parts[1]), "source": lambda: setup.source,
             "numerics": lambda: setup.numerics}[field.table]()
    return field.from_si(getattr(owner, field.attr))


def label_of(setup, axis):
    """Axis label in plain words with its unit."""
    parts = axis.key.split(".")
    unit = f" ({axis.unit})" if axis.unit else ""
    if axis.key.startswith("source.initial."):
        return f"initial population of '{parts[2]}'{unit}"
    field = field_of(axis.key)
    if field.table == "beam":
        return f"beam '{parts[1]}': {field.label}{unit}"
    return f"{field.table}: {field.label}{unit}"


def parse_axis(text, setup) -> Axis:
    """An :class:`Axis` from ``KEY=START:STOP:N[:log]``, checked against the setup.

    Raises
    ------
    InputError
        For a malformed axis, a non-numeric key, or a value the setup rejects.
    """
    key, sep, spec = (x.strip() for x in text.partition("="))
    where = dict(file=setup.path, table="--vary", key=key or None)
    parts = spec.split(":")
    if not sep or not key or len(parts) not in (3, 4) or (len(parts) == 4 and parts[3] != "log"):
        raise InputError(f"--vary needs KEY=START:STOP:N or KEY=START:STOP:N:log, got {text!r}",
                         **where)
    try:
        start, stop, n = float(parts[0]), float(parts[1]), int(parts[2])
    except ValueError:
        raise InputError(f"START and STOP must be numbers and N a whole number, got {spec!r}",
                         **where) from None
    if n < 1:
        raise InputError(f"N must be at least 1, got {n}", **where)
    log = len(parts) == 4
    if log and not (start > 0 and stop > 0):
        raise InputError("a log axis needs START and STOP > 0", **where)
    field = field_of(key)
    initial = key.startswith("source.initial.") and key.count(".") == 2
    if not initial and (field is None or field.kind is str):
        raise InputError("only numeric setup values can be scanned (the keys of --set)", **where)
    if n == 1:
        values = np.array([start])
    else:
        values = np.geomspace(start, stop, n) if log else np.linspace(start, stop, n)
    if field is not None and field.kind is int:
        if not all(float(v).is_integer() for v in values):
            raise InputError(f"{key} takes whole numbers; this axis gives "
                             f"{', '.join(f'{v:g}' for v in values)}", **where)
        values = values.astype(int)
    for v in values:
        setup.with_value(key, v.item())  # raises InputError naming file, table and key
    return Axis(key, tuple(v.item() for v in values), "fraction" if initial else field.unit,
                log, text)


def parse_axes(texts, setup) -> tuple:
    axes = tuple(parse_axis(t, setup) for t in texts)
    keys = [a.key for a in axes]
    for k in keys:
        if keys.count(k) > 1:
            raise InputError("the same key is varied twice", setup.path, "--vary", k)
    if not axes:
        raise InputError("give at least one --vary KEY=START:STOP:N", setup.path, "--vary")
    return axes


def point_setups(setup, axes):
    """The setup at every grid point, last axis fastest (lazily)."""
    for values in product(*(a.values for a in axes)):
        s = setup
        for a, v in zip(axes, values):
            s = s.with_value(a.key, v)
        yield s


def scan_cautions(setup, axes):
    """Cautions at the highest power each beam reaches in the scan."""
    powers = {}
    for a in axes:
        parts = a.key.split(".")
        if parts[0] == "beam" and parts[2] == "power_mW":
            powers[parts[1]] = max(a.values) * 1e-3
    return cautions(setup, powers=powers or None)


@dataclass(frozen=True)
class Scan:
    """A finished scan.

    Parameters
    ----------
    path : Path
    setup : Setup
    axes : tuple of Axis
    fraction : ndarray
        Transfer fraction on the grid.
    converged : ndarray of bool
    cautions : list of str
    """

    path: Path
    setup: object
    axes: tuple
    fraction: np.ndarray
    converged: np.ndarray
    cautions: list

    @property
    def shape(self):
        return self.fraction.shape

    def to_dict(self):
        """The ``scan --json`` object."""
        return {"out": str(self.path), "shape": list(self.shape), "points": int(self.fraction.size),
                "axes": [{"key": a.key, "unit": a.unit, "spacing": a.spacing,
                          "values": list(a.values)} for a in self.axes],
                "target": self.setup.target,
                "transfer_fraction_min": float(np.nanmin(self.fraction)),
                "transfer_fraction_max": float(np.nanmax(self.fraction)),
                "all_converged": bool(self.converged.all()),
                "cautions": list(self.cautions)}


class ScanFile:
    """The HDF5 file of a scan, filled point by point under a temporary name."""

    def __init__(self, path, setup, axes, command=""):
        self.path = Path(path)
        self.tmp = self.path.with_name(self.path.name + ".partial")
        shape = tuple(len(a.values) for a in axes)
        levels = setup.scheme.ids + ("other",)
        beams = [b.name for b in setup.beams]
        self.levels, self.beams = levels, beams
        f = self.f = h5py.File(self.tmp, "w")
        f.attrs.update(kind="scan", pumpsim_version=__version__, command=command,
                       created_utc=datetime.datetime.now(datetime.timezone.utc).isoformat(),
                       shape=shape, axes=[a.key for a in axes], complete=False)
        write_inputs(f, setup)
        f["inputs"].attrs["vary"] = [a.text for a in axes]
        scales = []
        for d, a in enumerate(axes):
            ds = f.create_dataset(f"axes/{a.key}", data=np.array(a.values))
            ds.attrs.update(units=a.unit, spacing=a.spacing, dimension=d)
            ds.make_scale(a.key)
            scales.append(ds)
        r = f.create_group("results")
        r.attrs["target"] = setup.target

        def make(name, extra=(), fill=np.nan, dtype=float, **attrs):
            ds = r.create_dataset(name, shape=shape + extra, dtype=dtype, fillvalue=fill)
            ds.attrs.update(attrs)
            for d, sc in enumerate(scales):
                ds.dims[d].attach_scale(sc)
            return ds

        self.fraction = make("transfer_fraction", units="fraction")
        self.pops = make("final_populations", (len(levels),), units="fraction", levels=list(levels))
        self.photons = make("photons_per_atom", (len(beams),), units="photons", beams=beams)
        self.defl = make("deflection_mrad", (len(beams),), units="mrad", beams=beams)
        self.error = make("error_estimate", units="fraction")
        self.conv = make("converged", fill=False, dtype=bool)
        self.secs = make("seconds", units="s")
        self.done = make("done", fill=False, dtype=bool)

    def store(self, index, o):
        """Write one point's outcome."""
        self.fraction[index] = o.transfer_fraction
        self.pops[index] = [o.final_populations[k] for k in self.levels]
        self.photons[index] = [o.photons_per_atom[b] for b in self.beams]
        self.defl[index] = [o.deflection[b] * 1e3 for b in self.beams]
        self.error[index] = o.error_estimate
        self.conv[index] = o.converged
        self.secs[index] = o.seconds
        self.done[index] = True

    def finish(self):
        """Mark complete and move into place."""
        self.f.attrs["complete"] = True
        self.f.close()
        os.replace(self.tmp, self.path)

    def abandon(self):
        """Close, leaving the ``.partial`` file with what is done."""
        self.f.close()


def scan(setup, axes, out, executor=None, progress=None, command="") -> Scan:
    """Simulate every point of a grid and write the HDF5 file.

    Parameters
    ----------
    setup : Setup
    axes : sequence of Axis
        From :func:`parse_axis`.
    out : str or Path
        The ``.h5`` file to write.
    executor : Executor, optional
        Serial by default.
    progress : Progress, optional
    command : str
        The command line, stored in the file.

    Returns
    -------
    Scan
    """
    axes = tuple(axes)
    shape = tuple(len(a.values) for a in axes)
    executor = executor or SerialExecutor()
    if progress is not None:
        progress.remaining_at_least(int(np.prod(shape)))
    fraction = np.full(shape, np.nan)
    converged = np.zeros(shape, dtype=bool)
    sink = ScanFile(out, setup, axes, command)
    try:
        for i, o in imap_unordered(executor, evaluate, point_setups(setup, axes)):
            index = np.unravel_index(i, shape)
            sink.store(index, o)
            fraction[index], converged[index] = o.transfer_fraction, o.converged
            if progress is not None:
                progress.advance()
    except BaseException:
        sink.abandon()
        raise
    sink.finish()
    return Scan(Path(out), setup, axes, fraction, converged, scan_cautions(setup, axes))

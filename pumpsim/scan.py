"""Parameter scans: N-dimensional grids over any numeric setup value, to HDF5.

An axis is written ``KEY=START:STOP:N[:log]`` with the keys of ``--set``
(file units: ``beam.pump.power_mW=1:100:21:log``). Every grid point is one
independent simulation, run through an executor.

Keeping the work of a long scan. Each finished point is appended at once, as
one JSON line, to a journal beside the output (``FILE.journal``, i.e.
``scan.h5.journal``), flushed to the operating system after every point (so
it survives the process being killed at any instant, SIGKILL included) and
fsync'd at least every :data:`~pumpsim.scan_journal.FSYNC_EVERY` seconds (so at most that much is
lost to a power cut). Its first line holds the inputs: the setup as run, the
scheme, the axes, the levels, beams and pumpsim version. HDF5 is not written
while points are computed, because a file that h5py is changing cannot
survive a kill. When every point is in, the HDF5 file is built under the
temporary name ``FILE.partial``, its root attribute ``complete`` set true,
synced to disk and renamed to ``FILE``; the journal is then deleted. If the
scan stops on an exception or Ctrl-C, ``FILE.partial`` is written with the
points done so far (``complete = False``, ``results/done``) for a look at
them; after a kill only the journal is there. ``FILE`` itself never exists
before every point is in.

``scan(..., resume=True)`` (``pumpsim scan ... --resume``) reads the journal,
ignoring a torn or garbled tail (a line cut by the kill is not a record, and
so is everything after it; the file is cut back to its last whole record),
refuses with an :class:`~pumpsim.errors.InputError` if the setup as run, the
scheme, the axes or the pumpsim version differ from this call's, and computes
only the missing points. Each point is a deterministic simulation and the
journal keeps every number exactly (JSON's shortest round-trip float
text), so the finished file holds the same values as an uninterrupted run.
Only these may differ: ``results/seconds`` (each point's own wall time),
the root attributes ``command`` (as typed, with ``--resume``) and
``points_resumed`` (points taken from the journal, 0 for a scan that ran
straight through); ``created_utc`` is the time the scan was first started.

File layout (HDF5):

- root attributes ``kind = "scan"``, ``pumpsim_version``, ``created_utc``,
  ``command``, ``shape``, ``axes`` (keys in order), ``complete``,
  ``points_resumed``;
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

import contextlib
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
from .setup_file import check_numeric_key
from .scan_journal import (Journal, Points, check_resumable, journal_header, journal_path,
                           read_journal)



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
    check_numeric_key(setup, key, "--vary")  # unknown or text keys: named, with near ones
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


def setup_at(setup, axes, values):
    """The setup at one grid point (axis values in file units)."""
    for a, v in zip(axes, values):
        setup = setup.with_value(a.key, v)
    return setup


def point_setups(setup, axes):
    """The setup at every grid point, last axis fastest (lazily)."""
    for values in product(*(a.values for a in axes)):
        yield setup_at(setup, axes, values)


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
    resumed : int
        Points taken from an interrupted run's journal (``resume=True``).
    """

    path: Path
    setup: object
    axes: tuple
    fraction: np.ndarray
    converged: np.ndarray
    cautions: list
    resumed: int = 0

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
                "points_resumed": self.resumed,
                "cautions": list(self.cautions)}



def partial_path(out) -> Path:
    """The temporary name of the HDF5 file until it is complete."""
    out = Path(out)
    return out.with_name(out.name + ".partial")


def write_scan_file(path, setup, axes, points, command, created, resumed, complete):
    """Write the HDF5 file of a scan (layout in the module docstring) in one go."""
    with h5py.File(path, "w") as f:
        f.attrs.update(kind="scan", pumpsim_version=__version__, command=command,
                       created_utc=created, shape=points.shape, axes=[a.key for a in axes],
                       complete=False, points_resumed=resumed)
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
        for name, data, attrs in (
                ("transfer_fraction", points.fraction, dict(units="fraction")),
                ("final_populations", points.pops,
                 dict(units="fraction", levels=list(points.levels))),
                ("photons_per_atom", points.photons, dict(units="photons", beams=points.beams)),
                ("deflection_mrad", points.defl * 1e3, dict(units="mrad", beams=points.beams)),
                ("error_estimate", points.error, dict(units="fraction")),
                ("converged", points.conv, {}),
                ("seconds", points.secs, dict(units="s")),
                ("done", points.done, {})):
            ds = r.create_dataset(name, data=data)
            ds.attrs.update(attrs)
            for d, sc in enumerate(scales):
                ds.dims[d].attach_scale(sc)
        f.attrs["complete"] = complete  # last: a file cut short never says complete
    if complete:  # on the disk before the rename makes it the finished file
        fd = os.open(path, os.O_RDWR)  # a writable handle: Windows syncs only those
        try:
            os.fsync(fd)
        finally:
            os.close(fd)


def scan(setup, axes, out, executor=None, progress=None, command="", resume=False,
         note=None) -> Scan:
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
    resume : bool
        Continue the interrupted scan whose journal is beside ``out``
        (module docstring); without a journal, start from the first point.
        ``False`` replaces any journal there.
    note : callable, optional
        Called with one line for the user when a journal is resumed, absent
        or replaced.

    Returns
    -------
    Scan

    Raises
    ------
    InputError
        ``resume`` with a journal written for other inputs (nothing is changed).
    """
    axes = tuple(axes)
    shape = tuple(len(a.values) for a in axes)
    note = note or (lambda line: None)
    points = Points(shape, setup.scheme.ids + ("other",), [b.name for b in setup.beams])
    jpath, tmp = journal_path(out), partial_path(out)
    created = datetime.datetime.now(datetime.timezone.utc).isoformat()
    found = read_journal(jpath) if resume else None
    if found is not None:
        header, records, length = found
        check_resumable(header, setup, axes, out)
        for r in records:
            points.put(r)
        created = header["created_utc"]
        journal = Journal.reopen(jpath, length)
        note(f"resuming the unfinished scan in {jpath}: {int(points.done.sum())} of "
             f"{points.done.size} points already done")
    else:
        if resume:
            note(f"nothing to resume ({jpath} " + ("is unreadable" if jpath.exists()
                 else "does not exist") + "): starting from the first point")
        elif jpath.exists() or tmp.exists():
            note(f"replacing the unfinished scan in {jpath if jpath.exists() else tmp} "
                 "(--resume would have continued it)")
        journal = Journal.create(jpath, journal_header(setup, axes, created))
    resumed = int(points.done.sum())
    if progress is not None:
        progress.remaining_at_least(points.done.size - resumed)
    order = []  # flat grid index of each submitted task, in submission order

    def todo():
        for i, values in enumerate(product(*(a.values for a in axes))):
            if not points.done.flat[i]:
                order.append(i)
                yield setup_at(setup, axes, values)

    try:
        for k, o in imap_unordered(executor or SerialExecutor(), evaluate, todo()):
            r = points.record(order[k], o)
            journal.write(r)
            points.put(r)
            if progress is not None:
                progress.advance()
    except BaseException:
        journal.close()
        # a readable snapshot of the points done; the journal, not this, is resumed
        with contextlib.suppress(Exception):
            write_scan_file(tmp, setup, axes, points, command, created, resumed, False)
        raise
    journal.close()
    write_scan_file(tmp, setup, axes, points, command, created, resumed, True)
    os.replace(tmp, out)
    jpath.unlink(missing_ok=True)
    return Scan(Path(out), setup, axes, points.fraction, points.conv,
                scan_cautions(setup, axes), resumed)

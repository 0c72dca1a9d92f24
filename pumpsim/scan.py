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
survive a kill. When every point is in, the HDF5 file is built in memory,
its root attribute ``complete`` set true, written as ``FILE.partial``, synced
to disk and renamed to ``FILE`` (:func:`pumpsim.outpaths.commit`); the
journal is then deleted. If that write fails (a full disk), the partial file
is removed and the journal kept, so ``--resume`` writes the file later
without computing anything. If the scan stops on an exception or Ctrl-C,
``FILE.partial`` is written with the points done so far (``complete =
False``, ``results/done``) for a look at them; after a kill only the journal
is there. ``FILE`` itself never exists before every point is in. For the
whole scan ``FILE.lock`` is held (:class:`pumpsim.outpaths.OutputLock`): a
second scan to the same ``FILE`` is refused, naming the first.

``scan(..., resume=True)`` (``pumpsim scan ... --resume``) reads the journal,
ignoring a torn tail (a line cut by the kill is not a record), refuses with
an :class:`~pumpsim.errors.InputError` if the setup as run (compared value
by value: ``20`` and ``20.0`` are the same), the scheme, the axes or the
pumpsim version differ from this call's, drops every record that is not a
whole, physical result of its grid point
(:func:`~pumpsim.scan_journal.check_record`) and computes only the missing
points. Each point is a deterministic simulation and the
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

import numpy as np

from .errors import InputError
from .executors import SerialExecutor, imap_unordered
from .h5out import h5_bytes, write_header
from .outcome import evaluate
from .outpaths import OutputError, OutputLock, commit, partial_path, size_text
from .safety import cautions
from .schema import FIELDS
from .setup_file import check_numeric_key
from .scan_journal import (Journal, Points, check_resumable, journal_header, journal_path,
                           read_journal)

RECORD_BYTES = 30  # journal bytes per number of a point (JSON text), with some room
COPIES = 3  # a grid is held in memory as arrays, as the HDF5 image and as its bytes


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
    """The axes of ``--vary`` texts; a grid larger than :func:`memory_limit` allows is
    refused before any axis is built."""
    points = np.prod([_points_asked(t) for t in texts], dtype=float)
    need, have = memory_need(setup, points), memory_limit()
    if need > have:
        raise InputError(f"a grid of {points:.3g} points needs about {size_text(need)} of "
                         f"memory, more than the {size_text(have)} (half of this machine's) a "
                         "scan may take; use fewer points or split the scan", setup.path, "--vary")
    axes = tuple(parse_axis(t, setup) for t in texts)
    keys = [a.key for a in axes]
    for k in keys:
        if keys.count(k) > 1:
            raise InputError("the same key is varied twice", setup.path, "--vary", k)
    if not axes:
        raise InputError("give at least one --vary KEY=START:STOP:N", setup.path, "--vary")
    return axes


def _points_asked(text) -> int:
    """The N of ``KEY=START:STOP:N[:log]``, or 1 where there is none to read
    (:func:`parse_axis` then says what is wrong)."""
    parts = text.partition("=")[2].split(":")
    try:
        return max(1, int(parts[2]))
    except (IndexError, ValueError):
        return 1


def numbers_per_point(setup) -> int:
    """Numbers a scan keeps per grid point (populations, photons, deflections, the rest)."""
    return len(setup.scheme.ids) + 1 + 2 * len(setup.beams) + 5


def memory_need(setup, points) -> float:
    """Bytes a scan of ``points`` grid points holds in memory at its largest."""
    return COPIES * 8.0 * numbers_per_point(setup) * points


def memory_limit() -> float:
    """Bytes a scan may take: half the machine's memory (8 GB where it cannot be read)."""
    try:
        return os.sysconf("SC_PHYS_PAGES") * os.sysconf("SC_PAGE_SIZE") / 2
    except (AttributeError, ValueError, OSError):
        return 8e9


def disk_need(setup, axes) -> float:
    """Bytes a scan's file and journal take on the disk together, at most."""
    points = np.prod([len(a.values) for a in axes], dtype=float)
    inputs = 4 * (len(setup.text or "") + len(setup.scheme.text or "")) + (1 << 16)
    return (8 + RECORD_BYTES) * numbers_per_point(setup) * points + inputs


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



def scan_bytes(setup, axes, points, command, created, resumed, complete) -> bytes:
    """The HDF5 file of a scan (layout in the module docstring), built in memory."""
    def fill(f):
        write_header(f, setup, command, "scan", created)
        f.attrs.update(shape=points.shape, axes=[a.key for a in axes], points_resumed=resumed)
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

    return h5_bytes(fill)


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
        or replaced, has records that are computed again, or is kept after a
        failure.

    Returns
    -------
    Scan

    Raises
    ------
    InputError
        ``resume`` with a journal written for other inputs (nothing is
        changed), or another process writing ``out``.
    OutputError
        The file could not be written; the journal keeps every point.
    """
    note = note or (lambda line: None)
    with OutputLock(out, command, setup.path):
        return _scan(setup, tuple(axes), Path(out), executor or SerialExecutor(), progress,
                     command, resume, note)


def _scan(setup, axes, out, executor, progress, command, resume, note):
    shape = tuple(len(a.values) for a in axes)
    points = Points(shape, setup.scheme.ids + ("other",), [b.name for b in setup.beams])
    jpath, tmp = journal_path(out), partial_path(out)
    created = datetime.datetime.now(datetime.timezone.utc).isoformat()
    found = read_journal(jpath) if resume else None
    if found is not None:
        header, records, rejected = found
        check_resumable(header, setup, axes, out)
        for r in records:
            points.put(r)
        created = header["created_utc"]
        journal = Journal.create(jpath, header, records)  # without the rejected lines
        note(f"resuming the unfinished scan in {jpath}: {len(records)} of "
             f"{points.done.size} points already done")
        if rejected:
            note(f"{rejected} line{'s' if rejected != 1 else ''} of {jpath} "
                 f"{'are' if rejected != 1 else 'is'} not a whole, physical result of its "
                 "grid point (edited or damaged?): computed again")
    else:
        if resume and jpath.exists():  # its points may be worth more than this run
            raise InputError(f"{jpath} is not a scan journal this pumpsim can read (written "
                             "by another version, or damaged); move it away, or run without "
                             "--resume to start afresh", out, "--resume")
        if resume:
            note(f"nothing to resume ({jpath} does not exist): starting from the first point")
        elif jpath.exists() or tmp.exists():
            note(f"replacing the unfinished scan in {jpath if jpath.exists() else tmp} "
                 "(--resume would have continued it)")
        journal = Journal.create(jpath, journal_header(setup, axes, created))
    resumed = int(points.done.sum())
    if progress is not None:
        progress.remaining_at_least(points.done.size - resumed)
    order = []  # (flat grid index, axis values) of each submitted task, in submission order

    def todo():
        for i, values in enumerate(product(*(a.values for a in axes))):
            if not points.done.flat[i]:
                order.append((i, values))
                yield setup_at(setup, axes, values)

    try:
        for k, o in imap_unordered(executor, evaluate, todo()):
            r = points.record(*order[k], o)
            journal.write(r)
            points.put(r)
            if progress is not None:
                progress.advance()
        journal.close()
    except BaseException as exc:
        with contextlib.suppress(OutputError):  # a full disk: the first error says it
            journal.close()
        # a readable snapshot of the points done; the journal, not this, is resumed
        with contextlib.suppress(Exception):
            _snapshot(tmp, scan_bytes(setup, axes, points, command, created, resumed, False))
        if not isinstance(exc, InputError):
            note(kept(points, jpath))
        raise
    try:
        commit(out, scan_bytes(setup, axes, points, command, created, resumed, True),
               "the scan file")
    except OutputError as exc:
        raise OutputError(f"{exc}; {kept(points, jpath)}") from None
    jpath.unlink(missing_ok=True)
    return Scan(out, setup, axes, points.fraction, points.conv,
                scan_cautions(setup, axes), resumed)


def kept(points, jpath) -> str:
    """What a stopped scan kept, and how to go on."""
    return (f"{int(points.done.sum())} of {points.done.size} points are kept in {jpath}: "
            "the same command with --resume continues")


def _snapshot(path, data):
    """Write a look at an unfinished scan; nothing is left if that fails."""
    try:
        Path(path).write_bytes(data)
    except BaseException:
        Path(path).unlink(missing_ok=True)
        raise

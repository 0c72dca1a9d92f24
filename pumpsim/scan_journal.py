"""The journal of a scan: its finished points, kept so that a killed scan can resume.

One JSON line per finished point after a header line of the inputs (see
:mod:`pumpsim.scan` for how scans use it). Every line is flushed as it is
written, so a kill loses at most the line being written, which reading ignores.

Nothing read back is trusted: a journal is plain JSON (never unpickled or
executed), and each record must be a whole, physical result of the grid point
it names (:func:`check_record`) or it is computed again. A file edited by hand,
damaged on the disk or cut short costs at most the points it spoils.
"""

import json
import math
import os
import time
import tomllib
from pathlib import Path

import numpy as np

from . import __version__
from .errors import InputError
from .outpaths import OutputError
from .setup_file import setup_to_toml

JOURNAL_FORMAT = 2  # first-line marker of a scan journal, raised if its layout changes
FSYNC_EVERY = 1.0  # s: longest a finished point waits to be forced onto the disk
SLACK = 1e-9  # populations may stray this far outside [0, 1] by round-off
SUM_SLACK = 1e-6  # and sum to 1 within this (the engine's own limit is 1e-9)
HEADER_BYTES = 64 << 20  # longest header line read (it holds the setup and scheme texts)
RECORD_BYTES = 1 << 20  # longest record line read (a few hundred bytes per level and beam)


def journal_path(out) -> Path:
    """Where the scan writing ``out`` keeps its finished points."""
    out = Path(out)
    return out.with_name(out.name + ".journal")


class Points:
    """The results of a grid in memory, filled from outcomes or journal records."""

    def __init__(self, shape, levels, beams):
        self.shape, self.levels, self.beams = shape, levels, beams
        self.fraction = np.full(shape, np.nan)
        self.pops = np.full(shape + (len(levels),), np.nan)
        self.photons = np.full(shape + (len(beams),), np.nan)
        self.defl = np.full(shape + (len(beams),), np.nan)  # rad
        self.error = np.full(shape, np.nan)
        self.conv = np.zeros(shape, dtype=bool)
        self.secs = np.full(shape, np.nan)
        self.done = np.zeros(shape, dtype=bool)

    def record(self, i, at, o) -> dict:
        """One point's outcome as the journal stores it (``i``: flat index, ``at``: its
        axis values)."""
        return {"i": int(i), "at": list(at), "transfer_fraction": float(o.transfer_fraction),
                "final_populations": [float(o.final_populations[k]) for k in self.levels],
                "photons_per_atom": [float(o.photons_per_atom[b]) for b in self.beams],
                "deflection_rad": [float(o.deflection[b]) for b in self.beams],
                "error_estimate": float(o.error_estimate), "converged": bool(o.converged),
                "seconds": float(o.seconds)}

    def put(self, r):
        """Store a record from :meth:`record`."""
        index = np.unravel_index(r["i"], self.shape)
        self.fraction[index] = r["transfer_fraction"]
        self.pops[index] = r["final_populations"]
        self.photons[index] = r["photons_per_atom"]
        self.defl[index] = r["deflection_rad"]
        self.error[index] = r["error_estimate"]
        self.conv[index] = r["converged"]
        self.secs[index] = r["seconds"]
        self.done[index] = True


def journal_header(setup, axes, created):
    """The journal's first line: everything a resumed run must agree with."""
    return {"pumpsim_scan_journal": JOURNAL_FORMAT, "pumpsim_version": __version__,
            "created_utc": created, "setup_as_run_toml": setup_to_toml(setup),
            "scheme_toml": setup.scheme.text or "",
            "axes": [{"key": a.key, "values": list(a.values), "spacing": a.spacing,
                      "text": a.text} for a in axes],
            "levels": list(setup.scheme.ids + ("other",)),
            "beams": [b.name for b in setup.beams], "target": setup.target}


class Journal:
    """An append-only file of finished points, one JSON line each, after a header line.

    Every line is flushed to the operating system as it is written, so a killed
    process loses at most the line it was writing (a torn last line, which
    :func:`read_journal` ignores); it is fsync'd to the disk at least every
    :data:`FSYNC_EVERY` seconds.
    """

    def __init__(self, path, fh):
        self.path, self.fh = Path(path), fh
        self.synced = time.monotonic()

    @classmethod
    def create(cls, path, header, records=()):
        """A journal holding ``header`` and ``records`` (replacing any file there
        only once they are on the disk)."""
        path = Path(path)
        tmp = path.with_name(path.name + ".new")
        try:
            with open(tmp, "wb") as fh:
                for obj in (header, *records):
                    fh.write(_line(obj))
                fh.flush()
                os.fsync(fh.fileno())
            os.replace(tmp, path)
            return cls(path, open(path, "ab"))
        except OSError as exc:
            tmp.unlink(missing_ok=True)
            raise _failed(path, exc) from None

    def write(self, obj):
        try:
            self.fh.write(_line(obj))
            self.fh.flush()
        except OSError as exc:
            raise _failed(self.path, exc) from None
        if time.monotonic() - self.synced >= FSYNC_EVERY:
            self.sync()

    def sync(self):
        try:
            os.fsync(self.fh.fileno())
        except OSError as exc:
            raise _failed(self.path, exc) from None
        self.synced = time.monotonic()

    def close(self):
        if not self.fh.closed:
            try:
                self.sync()
            finally:
                self.fh.close()


def _failed(path, exc):
    return OutputError(f"could not write the scan journal {path}: {exc.strerror or exc}")


def _line(obj) -> bytes:
    return json.dumps(obj, allow_nan=False).encode() + b"\n"


def _no_constant(name):
    raise ValueError(f"{name} is not a number a journal holds")


def _parse(line):
    """One JSON line, or ``None``; NaN and Infinity are refused, deep nesting too."""
    try:
        return json.loads(line, parse_constant=_no_constant)
    except (ValueError, RecursionError):
        return None


def _finite(x, lo=-math.inf, hi=math.inf) -> bool:
    return (isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x)
            and lo <= x <= hi)


def _numbers(x, n, lo=-math.inf, hi=math.inf) -> bool:
    return isinstance(x, list) and len(x) == n and all(_finite(v, lo, hi) for v in x)


def check_record(r, header) -> bool:
    """Whether a parsed line is a whole, physical result of a point of the header's grid.

    The point index must be in the grid and the record's axis values those of
    that point; populations finite, within [0, 1] and summing to 1; the
    transfer fraction the target's population; photons, deflections, the error
    estimate and the wall time finite (the last two not negative).
    """
    axes, levels, beams = header["axes"], header["levels"], header["beams"]
    shape = tuple(len(a["values"]) for a in axes)
    if not (isinstance(r, dict) and type(r.get("i")) is int
            and 0 <= r["i"] < math.prod(shape) and isinstance(r.get("converged"), bool)):
        return False
    at = [a["values"][k] for a, k in zip(axes, np.unravel_index(r["i"], shape))]
    pops = r.get("final_populations")
    return (r.get("at") == at
            and _numbers(pops, len(levels), -SLACK, 1 + SLACK)
            and abs(math.fsum(pops) - 1) <= SUM_SLACK
            and _target_ok(r.get("transfer_fraction"), pops, levels, header["target"])
            and _numbers(r.get("photons_per_atom"), len(beams))
            and _numbers(r.get("deflection_rad"), len(beams))
            and _finite(r.get("error_estimate"), 0) and _finite(r.get("seconds"), 0))


def _target_ok(fraction, pops, levels, target) -> bool:
    """A level target's fraction is its population; a sublevel target's lies within
    its level's (the level id leads the target text, pumpsim.targets)."""
    if target in levels:
        return fraction == pops[levels.index(target)]
    level = next((lv for lv in levels if target.lstrip("| ").startswith(lv + " ")), None)
    return (level is not None and _finite(fraction, -SLACK, 1 + SLACK)
            and fraction <= pops[levels.index(level)] + SLACK)


def _header_ok(h) -> bool:
    try:
        return (h["pumpsim_scan_journal"] == JOURNAL_FORMAT
                and all(isinstance(a["values"], list) and a["values"] for a in h["axes"])
                and math.prod(len(a["values"]) for a in h["axes"]) < 2 ** 62
                and all(isinstance(h[k], list) for k in ("levels", "beams"))
                and isinstance(h["target"], str) and isinstance(h["created_utc"], str))
    except (KeyError, TypeError):
        return False


def read_journal(path):
    """What an interrupted scan's journal holds.

    Parameters
    ----------
    path : str or Path

    Returns
    -------
    tuple or None
        ``(header, records, rejected)``: the header, the records that pass
        :func:`check_record` in the order written (a later record of a point
        replaces an earlier one), and how many whole lines did not (they are
        computed again); ``None`` if there is no file or no valid header line.
        A last line without its newline (cut by a kill) is not counted.
    """
    path = Path(path)
    if not path.is_file():  # missing, or a device or pipe that is no journal
        return None
    with open(path, "rb") as fh:
        first = fh.readline(HEADER_BYTES)
        header = _parse(first) if first.endswith(b"\n") else None
        if not _header_ok(header):
            return None
        records, rejected = {}, 0
        for line in _lines(fh):
            r = _parse(line)
            if check_record(r, header):
                records.pop(r["i"], None)
                records[r["i"]] = r
            else:
                rejected += 1
    return header, list(records.values()), rejected


def _lines(fh):
    """Whole lines of a record's size; a longer line is read past and given as ``b""``
    (no record), and the piece after the last newline (torn by a kill) is dropped."""
    while True:
        line = fh.readline(RECORD_BYTES)
        if not line.endswith(b"\n"):
            if len(line) < RECORD_BYTES:
                return
            while line and not line.endswith(b"\n"):
                line = fh.readline(RECORD_BYTES)
            line = b""
        yield line


def _same_values(a, b) -> bool:
    """Two TOML documents hold the same values (``20`` and ``20.0`` are one number)."""
    def canon(x):
        if isinstance(x, dict):
            return {k: canon(v) for k, v in x.items()}
        if isinstance(x, list):
            return [canon(v) for v in x]
        if isinstance(x, int) and not isinstance(x, bool):
            return float(x)
        return x

    try:
        return canon(tomllib.loads(a)) == canon(tomllib.loads(b))
    except (tomllib.TOMLDecodeError, TypeError):
        return False


def check_resumable(header, setup, axes, out):
    """Refuse to resume a journal written for other inputs.

    Raises
    ------
    InputError
        Naming ``out`` and the journal, and saying what differs.
    """
    now = journal_header(setup, axes, "")
    where = dict(file=str(out), table="--resume")
    then = header.get("axes") or []

    def grid(axes_list):
        return [(a.get("key"), a.get("values"), a.get("spacing")) for a in axes_list]

    if grid(then) != grid(now["axes"]):
        was = " ".join(str(a.get("text", a.get("key"))) for a in then)
        raise InputError(f"the unfinished scan in {journal_path(out)} has other --vary axes "
                         f"({was}) than this command ({' '.join(a.text for a in axes)}); run "
                         "without --resume to start this scan afresh", **where)
    for key, what in (("setup_as_run_toml", "setup (the file as run, with its --set values)"),
                      ("scheme_toml", "level scheme"), ("pumpsim_version", "pumpsim version")):
        same = (_same_values(header.get(key), now[key]) if key == "setup_as_run_toml"
                else header.get(key) == now[key])
        if not same:
            raise InputError(f"the unfinished scan in {journal_path(out)} was run with another "
                             f"{what}; give the same inputs to resume it, or run without "
                             "--resume to start afresh", **where)

"""The journal of a scan: its finished points, kept so that a killed scan can resume.

One JSON line per finished point after a header line of the inputs (see
:mod:`pumpsim.scan` for how scans use it). Every line is flushed as it is
written, so a kill loses at most the line being written, which reading ignores.
"""

import json
import os
import time
from pathlib import Path

import numpy as np

from . import __version__
from .errors import InputError
from .setup_file import setup_to_toml

JOURNAL_FORMAT = 1  # first-line marker of a scan journal, raised if its layout changes
FSYNC_EVERY = 1.0  # s: longest a finished point waits to be forced onto the disk


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

    def record(self, i, o) -> dict:
        """One point's outcome as the journal stores it (``i``: flat index)."""
        return {"i": int(i), "transfer_fraction": float(o.transfer_fraction),
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

    def valid(self, r) -> bool:
        """Whether a parsed journal line is a whole record of this grid."""
        return (isinstance(r, dict) and type(r.get("i")) is int
                and 0 <= r["i"] < self.done.size
                and all(isinstance(r.get(k), (int, float)) and not isinstance(r.get(k), bool)
                        for k in ("transfer_fraction", "error_estimate", "seconds"))
                and isinstance(r.get("converged"), bool)
                and all(isinstance(r.get(k), list) and len(r[k]) == n
                        and all(isinstance(x, (int, float)) for x in r[k])
                        for k, n in (("final_populations", len(self.levels)),
                                     ("photons_per_atom", len(self.beams)),
                                     ("deflection_rad", len(self.beams)))))


def journal_header(setup, axes, created):
    """The journal's first line: everything a resumed run must agree with."""
    return {"pumpsim_scan_journal": JOURNAL_FORMAT, "pumpsim_version": __version__,
            "created_utc": created, "setup_as_run_toml": setup_to_toml(setup),
            "scheme_toml": setup.scheme.text or "",
            "axes": [{"key": a.key, "values": list(a.values), "spacing": a.spacing,
                      "text": a.text} for a in axes],
            "levels": list(setup.scheme.ids + ("other",)),
            "beams": [b.name for b in setup.beams]}


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
    def create(cls, path, header):
        """A new journal holding only ``header`` (replaces any file there)."""
        j = cls(path, open(path, "wb"))
        j.write(header)
        j.sync()
        return j

    @classmethod
    def reopen(cls, path, length):
        """Continue a journal after its first ``length`` bytes (its whole records)."""
        fh = open(path, "r+b")
        fh.truncate(length)
        fh.seek(length)
        return cls(path, fh)

    def write(self, obj):
        self.fh.write(json.dumps(obj).encode() + b"\n")
        self.fh.flush()
        if time.monotonic() - self.synced >= FSYNC_EVERY:
            self.sync()

    def sync(self):
        os.fsync(self.fh.fileno())
        self.synced = time.monotonic()

    def close(self):
        if not self.fh.closed:
            self.sync()
            self.fh.close()


def read_journal(path):
    """What an interrupted scan's journal holds.

    Parameters
    ----------
    path : str or Path

    Returns
    -------
    tuple or None
        ``(header, records, length)``: the header, the whole point records in
        the order written, and the byte length of the file up to the last of
        them; ``None`` if there is no file or no whole header line. Reading
        stops at the first line that is cut short or is not a record of the
        header's grid (a line being written when the process was killed).
    """
    try:
        data = Path(path).read_bytes()
    except FileNotFoundError:
        return None
    lines = data.split(b"\n")[:-1]  # the piece after the last newline is torn or empty
    try:
        header = json.loads(lines[0])
        if header["pumpsim_scan_journal"] != JOURNAL_FORMAT:
            return None
        grid = Points(tuple(len(a["values"]) for a in header["axes"]), header["levels"],
                      header["beams"])
    except (IndexError, ValueError, KeyError, TypeError):
        return None
    records, length = [], len(lines[0]) + 1
    for line in lines[1:]:
        try:
            r = json.loads(line)
        except ValueError:
            break
        if not grid.valid(r):
            break
        records.append(r)
        length += len(line) + 1
    return header, records, length


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
        if header.get(key) != now[key]:
            raise InputError(f"the unfinished scan in {journal_path(out)} was run with another "
                             f"{what}; give the same inputs to resume it, or run without "
                             "--resume to start afresh", **where)

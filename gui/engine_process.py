"""The engine in a child process, so that a superseded run stops promptly.

The child stays warm between requests: the engine is imported once. A run
made stale by a newer request is asked to stop at its next refinement round
(the engine calls its ``progress`` callback between rounds, and the child's
callback raises once the parent has flagged the run); the same child then
takes the next request at once. Only a run that ignores the flag for
``stop_grace`` seconds (one very long round) is ended by killing the child, a
spare taking over. The window's own process also keeps its interpreter free
for drawing and for quick estimates while the engine works. Results are the
engine's own, pickled across unchanged.

No Qt here: the child imports only this module and the engine.
"""

import multiprocessing
import os
import threading
import time

import pumpsim

from .evaluate import Superseded

POLL_S = 0.02  # how often a waiting caller asks whether it was superseded
STOP_GRACE_S = 0.5  # a flagged run that has not stopped by then is killed (rounds of the
# demo at tolerance 1e-4 take up to a few tenths of a second)


class EngineFailed(RuntimeError):
    """The engine raised (message from the child) or the child died."""


class _Stopped(Exception):
    """Child side: the parent flagged the running job as stale."""


def _serve(conn, stop, nice=0):
    """Child: simulate each ``(job, setup, tolerance)`` received; answer ``(ok, result or
    message)``, ``ok`` None for a job stopped because ``stop.value`` named it. A ``nice``
    above 0 lowers the child's scheduling priority (where the system has one)."""
    if nice and hasattr(os, "nice"):
        os.nice(nice)
    while True:
        try:
            job, setup, tolerance = conn.recv()
        except (EOFError, OSError):  # the window went away
            return

        def progress(_message, job=job):
            if stop.value == job:
                raise _Stopped

        try:
            if tolerance is not None:
                setup = setup.with_value("numerics.tolerance", tolerance)
            conn.send((True, pumpsim.simulate(setup, progress=progress)))
        except _Stopped:
            conn.send((None, "stopped"))
        except Exception as exc:  # reported in the window, as words
            conn.send((False, f"{type(exc).__name__}: {exc}"))


class _Child:
    """A started child process and our end of its pipe."""

    def __init__(self, ctx, nice=0):
        self.conn, theirs = ctx.Pipe()
        self.stop = ctx.Value("q", 0, lock=False)  # the job to stop; one writer, one reader
        self.proc = ctx.Process(target=_serve, args=(theirs, self.stop, nice), daemon=True,
                                name="pumpsim-engine")
        self.proc.start()
        theirs.close()

    def end(self):
        if self.proc.is_alive():
            self.proc.kill()
        self.proc.join(1.0)
        self.conn.close()


class EngineProcess:
    """A child process serving :func:`pumpsim.simulate`, for one caller thread at a time.

    Once a run has had to be killed, a second child waits ready: killing the
    next one then costs nothing, since the following request goes straight
    to the spare while a new spare imports the engine in the background
    (about a second). Windows whose runs always stop when asked never start
    the spare.

    Parameters
    ----------
    start : bool
        Start the children now rather than at the first :meth:`simulate`.
    stop_grace : float
        Seconds a run flagged stale may take to stop before its child is killed.
    nice : int
        How much lower than the window's the children's scheduling priority is.
    """

    def __init__(self, start=True, stop_grace=STOP_GRACE_S, nice=0):
        self.nice = nice
        self._ctx = multiprocessing.get_context("spawn")  # never fork a process running Qt
        self._lock = threading.Lock()
        self.closed = False
        self.child = self.spare = None
        self.replaced = 0
        self.jobs = 0  # numbers the runs, so that a stop flag names one run only
        self.stop_grace = stop_grace
        if start:
            self._ready()

    def _ready(self):
        with self._lock:
            if self.closed:
                return
            if self.child is None:
                self.child, self.spare = self.spare or _Child(self._ctx, self.nice), None
            if self.spare is None and self.replaced:
                self.spare = _Child(self._ctx, self.nice)

    def _replace(self):
        """End the current child (its run is stale or it died) and take the spare."""
        with self._lock:
            self.child.end()
            self.child = None
            self.replaced += 1
        self._ready()

    def simulate(self, setup, superseded=lambda: False, tolerance=None):
        """:func:`pumpsim.simulate` on ``setup`` (optionally at another tolerance).

        Raises
        ------
        Superseded
            As soon as ``superseded()`` is True (the run is ended).
        EngineFailed
            With the engine's message.
        """
        if superseded() or self.closed:
            raise Superseded("before start")
        self._ready()
        child = self.child
        self.jobs += 1
        child.conn.send((self.jobs, setup, tolerance))
        kill_at = None  # set once the run is flagged stale
        while not child.conn.poll(POLL_S):
            if self.closed:
                raise Superseded("closed")
            if not child.proc.is_alive():
                self._replace()
                raise EngineFailed("the engine process stopped unexpectedly")
            if kill_at is None and superseded():
                child.stop.value = self.jobs
                kill_at = time.perf_counter() + self.stop_grace
            elif kill_at is not None and time.perf_counter() > kill_at:
                self._replace()
                raise Superseded("killed")
        try:
            ok, payload = child.conn.recv()
        except (EOFError, OSError):
            if self.closed:
                raise Superseded("closed") from None
            self._replace()
            raise EngineFailed("the engine process stopped unexpectedly") from None
        if kill_at is not None or ok is None:  # stopped, or finished after being made stale
            raise Superseded("stopped")
        if not ok:
            raise EngineFailed(payload)
        return payload

    def close(self):
        """End the children; a call waiting in :meth:`simulate` raises :class:`Superseded`."""
        with self._lock:
            self.closed = True
            for c in (self.child, self.spare):
                if c is not None:
                    c.end()

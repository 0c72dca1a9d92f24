"""The engine in a child process, so that a superseded run stops at once.

:func:`pumpsim.simulate` can only be asked to stop between its refinement
rounds, which on the demo are seconds apart. Run in a child process, a stale
run is simply ended (and a fresh process started for the next request);
the window's own process also keeps its interpreter free for drawing and
for quick estimates while the engine works. Results are the engine's own,
pickled across unchanged.

No Qt here: the child imports only this module and the engine.
"""

import multiprocessing
import threading

import pumpsim

from .evaluate import Superseded

POLL_S = 0.02  # how often a waiting caller asks whether it was superseded


class EngineFailed(RuntimeError):
    """The engine raised (message from the child) or the child died."""


def _serve(conn):
    """Child: simulate each ``(setup, tolerance)`` received; answer ``(ok, result or message)``."""
    while True:
        try:
            setup, tolerance = conn.recv()
        except (EOFError, OSError):  # the window went away
            return
        try:
            if tolerance is not None:
                setup = setup.with_value("numerics.tolerance", tolerance)
            conn.send((True, pumpsim.simulate(setup)))
        except Exception as exc:  # reported in the window, as words
            conn.send((False, f"{type(exc).__name__}: {exc}"))


class _Child:
    """A started child process and our end of its pipe."""

    def __init__(self, ctx):
        self.conn, theirs = ctx.Pipe()
        self.proc = ctx.Process(target=_serve, args=(theirs,), daemon=True, name="pumpsim-engine")
        self.proc.start()
        theirs.close()

    def end(self):
        if self.proc.is_alive():
            self.proc.kill()
        self.proc.join(1.0)
        self.conn.close()


class EngineProcess:
    """A child process serving :func:`pumpsim.simulate`, for one caller thread at a time.

    Once a run has been ended, a second child waits ready: ending the next
    superseded run then costs nothing, since the following request goes
    straight to the spare while a new spare imports the engine in the
    background (about a second). Windows whose runs are never ended never
    start the spare.

    Parameters
    ----------
    start : bool
        Start the children now rather than at the first :meth:`simulate`.
    """

    def __init__(self, start=True):
        self._ctx = multiprocessing.get_context("spawn")  # never fork a process running Qt
        self._lock = threading.Lock()
        self.closed = False
        self.child = self.spare = None
        self.replaced = 0
        if start:
            self._ready()

    def _ready(self):
        with self._lock:
            if self.closed:
                return
            if self.child is None:
                self.child, self.spare = self.spare or _Child(self._ctx), None
            if self.spare is None and self.replaced:
                self.spare = _Child(self._ctx)

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
        child.conn.send((setup, tolerance))
        while not child.conn.poll(POLL_S):
            if superseded() or self.closed:
                self._replace()
                raise Superseded("stopped")
            if not child.proc.is_alive():
                self._replace()
                raise EngineFailed("the engine process stopped unexpectedly")
        try:
            ok, payload = child.conn.recv()
        except (EOFError, OSError):
            if self.closed:
                raise Superseded("closed") from None
            self._replace()
            raise EngineFailed("the engine process stopped unexpectedly") from None
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

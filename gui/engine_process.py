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


class EngineProcess:
    """One child process serving :func:`pumpsim.simulate`, for one caller thread at a time."""

    def __init__(self):
        self._ctx = multiprocessing.get_context("spawn")  # never fork a process running Qt
        self._lock = threading.Lock()
        self.closed = False
        self._spawn()

    def _spawn(self):
        self.conn, child = self._ctx.Pipe()
        self.proc = self._ctx.Process(target=_serve, args=(child,), daemon=True,
                                      name="pumpsim-engine")
        self.proc.start()
        child.close()

    def _end(self):
        with self._lock:
            if self.proc.is_alive():
                self.proc.kill()
            self.proc.join()
            self.conn.close()
            if not self.closed:
                self._spawn()

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
        self.conn.send((setup, tolerance))
        while not self.conn.poll(POLL_S):
            if superseded() or self.closed:
                self._end()
                raise Superseded("stopped")
            if not self.proc.is_alive():
                self._end()
                raise EngineFailed("the engine process stopped unexpectedly")
        try:
            ok, payload = self.conn.recv()
        except (EOFError, OSError):
            self._end()
            if self.closed:
                raise Superseded("closed") from None
            raise EngineFailed("the engine process stopped unexpectedly") from None
        if not ok:
            raise EngineFailed(payload)
        return payload

    def close(self):
        """End the child; a call waiting in :meth:`simulate` raises :class:`Superseded`."""
        self.closed = True
        with self._lock:
            if self.proc.is_alive():
                self.proc.kill()

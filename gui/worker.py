"""Background computation: the window never computes on its own thread.

* :class:`Lane`: one worker thread with a mailbox of one. Submitting a job
  replaces any job still waiting, and tells a running job it is superseded
  (jobs ask ``superseded()`` between steps and give up), so rapid slider
  moves coalesce: the newest request wins.
* :class:`Freshness`: the generation counter that decides on the window's
  thread whether an arriving update may replace what is shown. Stale
  results never overwrite newer ones.
* :class:`LiveCompute`: the live result of the setup being edited, streamed
  in stages on two lanes: the quick estimate at once, then on the engine
  lane the engine at the setup's own tolerance, preceded by a run at a
  coarse tolerance when runs at the setup's own have proved slow.
* :class:`StudyCompute`: one lane for the study views' sweeps, which gives
  way to the live result: a study waits while a live request is being
  computed, and a study engine run that a live request interrupts is run
  again afterwards. Its engine process also runs at a lower scheduling
  priority, so what CPU the live result leaves is all a study takes.
"""

import os
import threading
import time
import traceback
from dataclasses import dataclass

from PySide6.QtCore import QObject, QThread, Signal

from .engine_process import EngineProcess
from .evaluate import Superseded, quick_estimate

STAGES = ("quick", "coarse", "engine")  # in the order a request's results arrive and rank
COARSE_TOLERANCE = 1e-3  # the engine's optional first pass
COARSE_AFTER_S = 1.0  # ...taken only once a run at the setup's tolerance took longer than this:
# the engine refines only as far as its summed error estimate asks, so for many setups
# (the demo among them) a run at 1e-4 does little more work than one at 1e-3, and a
# first pass would only delay the converged answer
ENGINE_QUIET_S = 0.05  # the engine lane starts once a request has stood this long: longer
# than the gap between moves of a drag (60 Hz, about 17 ms), short enough not to be felt;
# a run a later move makes stale stops at its next refinement round (see EngineProcess)
POLL_S = 0.005  # how often a waiting engine job asks whether it was superseded
STOP_WAIT_MS = 10_000  # closing waits this long for a lane's current step to end
STUDY_NICE = 10  # the study engine's scheduling priority below the window's (Unix nice)


def _debug_trace():
    if os.environ.get("PUMPSIM_DEBUG"):
        traceback.print_exc()


class Lane(QThread):
    """A worker thread running the newest submitted job.

    A job is ``job(superseded)``; ``superseded()`` turns True as soon as
    another job is submitted, :meth:`cancel` is called, or the lane stops.
    """

    def __init__(self, name, parent=None):
        super().__init__(parent)
        self.setObjectName(name)
        self._cond = threading.Condition()
        self._job = None
        self._token = 0
        self._stopping = False

    def submit(self, job):
        with self._cond:
            self._token += 1
            self._job = (self._token, job)
            self._cond.notify()

    def cancel(self):
        """Drop the waiting job and tell the running one to give up."""
        with self._cond:
            self._token += 1
            self._job = None

    def stop(self):
        """Finish: cancel work and wait for the thread to end."""
        with self._cond:
            self._stopping = True
            self._token += 1
            self._cond.notify()
        self.wait(STOP_WAIT_MS)

    def run(self):
        while True:
            with self._cond:
                while self._job is None and not self._stopping:
                    self._cond.wait()
                if self._stopping:
                    return
                (token, job), self._job = self._job, None
            try:
                job(lambda: self._token != token)
            except Superseded:
                pass


def wait_quiet(seconds, superseded):
    """Sleep ``seconds`` unless superseded first; True if the wait ran out undisturbed."""
    end = time.perf_counter() + seconds
    while time.perf_counter() < end:
        if superseded():
            return False
        time.sleep(0.01)
    return not superseded()


@dataclass(frozen=True)
class Update:
    """One result on its way to the window.

    Parameters
    ----------
    generation : int
        Request number (increases with every change of the setup).
    stage : str
        ``"quick"``, ``"coarse"`` (the engine at :data:`COARSE_TOLERANCE`)
        or ``"engine"`` (the engine at the setup's tolerance).
    result : Result
    requested : float
        ``time.perf_counter()`` when the change was requested.
    """

    generation: int
    stage: str
    result: object
    requested: float

    @property
    def rank(self):
        return (self.generation, STAGES.index(self.stage))


class Freshness:
    """Accept an update only if it is newer than what is shown: a later
    request, or a later stage of the same request."""

    def __init__(self):
        self.shown = (-1, -1)

    def accept(self, update) -> bool:
        if update.rank <= self.shown:
            return False
        self.shown = update.rank
        return True


class LiveCompute(QObject):
    """Streams the quick estimate and then the engine results of every request.

    The engine runs twice when the setup asks for a tolerance below
    :data:`COARSE_TOLERANCE` and the last run at the setup's own tolerance took
    longer than :data:`COARSE_AFTER_S`: first at that tolerance, a converged
    answer in a fraction of the time, then at the setup's own, which is the
    result the window calls converged and exports.

    Signals
    -------
    updated(Update)
    failed(int, str)
        Generation and a plain-words message.

    Parameters
    ----------
    quick : callable
        ``quick(setup) -> Result`` for the first stage.
    full : callable, optional
        ``full(setup, superseded) -> Result`` for the engine stages; may raise
        :class:`~pumpsim_gui.evaluate.Superseded`. Default: the engine in a
        child process (:class:`~pumpsim_gui.engine_process.EngineProcess`).
    """

    updated = Signal(object)
    failed = Signal(int, str)

    def __init__(self, quick=quick_estimate, full=None, parent=None):
        super().__init__(parent)
        self.engine = None
        if full is None:
            self.engine = EngineProcess()
            full = self.engine.simulate
        self.quick, self.full = quick, full
        self.generation = 0
        self.idle = threading.Event()  # set while no request is being computed
        self.idle.set()
        self.last_engine_s = 0.0  # engine seconds of the last run at a setup's own tolerance
        self.quick_lane, self.engine_lane = Lane("quick"), Lane("engine")
        self.quick_lane.start()
        self.engine_lane.start()

    def request(self, setup):
        """Compute ``setup``; returns its generation number."""
        self.generation += 1
        self.idle.clear()
        gen, t = self.generation, time.perf_counter()
        quick_done = threading.Event()
        self.quick_lane.submit(lambda superseded: self._quick(gen, setup, t, quick_done))
        self.engine_lane.submit(
            lambda superseded: self._engine(gen, setup, t, superseded, quick_done))
        return gen

    def _quick(self, gen, setup, t, done):
        try:
            self._emit(gen, "quick", lambda: self.quick(setup), t)
        finally:
            done.set()

    def _engine(self, gen, setup, t, superseded, quick_done):
        try:
            self._engine_stages(gen, setup, t, superseded, quick_done)
        finally:
            if gen == self.generation:  # the newest request is answered (or failed)
                self.idle.set()

    def _engine_stages(self, gen, setup, t, superseded, quick_done):
        # The quick estimate runs alone: on two cores the engine's threads would slow it
        # several times over. If the quick job was dropped, so was this one (superseded).
        while not quick_done.wait(POLL_S):
            if superseded():
                return
        if not wait_quiet(ENGINE_QUIET_S - (time.perf_counter() - t), superseded):
            return
        if setup.numerics.tolerance < COARSE_TOLERANCE and self.last_engine_s > COARSE_AFTER_S:
            coarse = setup.with_value("numerics.tolerance", COARSE_TOLERANCE)
            if self._emit(gen, "coarse", lambda: self.full(coarse, superseded), t) is None:
                return
        result = self._emit(gen, "engine", lambda: self.full(setup, superseded), t)
        if result is not None:
            self.last_engine_s = result.numerics.seconds

    def _emit(self, gen, stage, compute, t):
        """Compute and send one stage; its result, or None if it was superseded or failed."""
        try:
            result = compute()
        except Superseded:
            return None
        except Exception as exc:  # shown in the window; no traceback unless debugging
            _debug_trace()
            self.failed.emit(gen, f"{stage} computation failed: {type(exc).__name__}: {exc}")
            return None
        # Emitted even if a newer request came meanwhile: while a slider is
        # dragged every quick result is soon outdated, yet showing it beats
        # showing nothing; Freshness keeps it from replacing anything newer.
        self.updated.emit(Update(gen, stage, result, t))
        return result

    def stop(self):
        if self.engine is not None:
            self.engine.close()
        self.quick_lane.stop()
        self.engine_lane.stop()
        self.idle.set()  # nothing will be computed any more: let waiting studies end


class StudyCompute(QObject):
    """Runs one study job at a time; a new one (or :meth:`cancel`) stops the last.

    A job is ``job(emit, superseded, compute)``, ``compute`` being this object:
    its :attr:`engine` (an :class:`~pumpsim_gui.engine_process.EngineProcess`
    at lower priority), :meth:`wait_turn` and :meth:`live_busy`. Whatever the
    job passes to ``emit`` arrives on the window's thread through
    :attr:`progressed` unless it was superseded.

    Parameters
    ----------
    live_idle : threading.Event, optional
        Set while the live result is not being computed (:attr:`LiveCompute.idle`);
        studies wait for it.
    """

    progressed = Signal(object)
    failed = Signal(str)

    def __init__(self, parent=None, live_idle=None):
        super().__init__(parent)
        self.engine = EngineProcess(start=False, nice=STUDY_NICE)  # most sessions never open one
        if live_idle is None:
            live_idle = threading.Event()
            live_idle.set()
        self.live_idle = live_idle
        self.held = False  # True while a study waits for the live result
        self.lane = Lane("studies")
        self.lane.start()

    def live_busy(self):
        return not self.live_idle.is_set()

    def wait_turn(self, superseded):
        """Return once no live request is being computed.

        Raises
        ------
        Superseded
            If the study is superseded meanwhile.
        """
        if self.live_idle.is_set():
            return
        self.held = True
        try:
            while not self.live_idle.wait(POLL_S):
                if superseded():
                    raise Superseded("while the live result was computed")
        finally:
            self.held = False

    def submit(self, job):
        def run(superseded):
            def emit(payload):
                if not superseded():
                    self.progressed.emit(payload)
            try:
                job(emit, superseded, self)
            except Superseded:
                pass
            except Exception as exc:
                _debug_trace()
                self.failed.emit(f"study failed: {type(exc).__name__}: {exc}")

        self.lane.submit(run)

    def cancel(self):
        self.lane.cancel()

    def stop(self):
        self.engine.close()
        self.lane.stop()

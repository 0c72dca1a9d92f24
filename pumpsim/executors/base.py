"""The contract every executor meets, and the two ways the package uses one.

An :class:`Executor` is a ``concurrent.futures`` executor cut down to what
pumpsim needs: ``submit(fn, *args)`` returns a :class:`concurrent.futures.Future`,
``shutdown()`` releases workers, and it is a context manager. ``fn`` and its
arguments must be picklable (module-level functions, frozen setups), because
they may travel to another process or machine.

Results never depend on which executor ran them: each task is one
deterministic simulation, and callers put results back in submission order.

An executor that loses its workers (a process killed, a cluster gone) says so
with :class:`ExecutorLost` rather than leaving its caller waiting.
"""

import concurrent.futures as cf
from itertools import islice

CHECK_EVERY = 2.0  # s: how often a wait with nothing finished asks the executor's health


class ExecutorLost(RuntimeError):
    """The executor can no longer run tasks; the message says why in plain words."""


class Executor:
    """Base class; see the module docstring.

    Attributes
    ----------
    name : str
        Shown to users (``"serial"``, ``"process pool"``, ``"dask"``).
    workers : int
        How many tasks can run at once.
    """

    name = "executor"
    workers = 1

    @property
    def window(self) -> int:
        """Tasks worth keeping in flight: enough to keep every worker busy."""
        return max(16, 8 * self.workers)

    def submit(self, fn, *args) -> cf.Future:
        raise NotImplementedError

    def shutdown(self, now=False):
        """Release workers; the executor cannot be used afterwards.

        ``now``: stop tasks still running too (after an error or interruption),
        rather than waiting for them.
        """

    def check(self):
        """Raise :class:`ExecutorLost` if tasks can no longer finish (nothing by default)."""

    def describe(self) -> str:
        return f"{self.name}, {self.workers} worker{'s' if self.workers != 1 else ''}"

    def __enter__(self):
        return self

    def __exit__(self, exc_type, *exc):
        self.shutdown(now=exc_type is not None)
        return False


def imap_unordered(executor, fn, items, window=None):
    """Yield ``(index, fn(item))`` as tasks finish, keeping at most ``window``
    tasks in flight so that a huge scan never holds all its inputs at once.

    Parameters
    ----------
    executor : Executor
    fn : callable
    items : iterable
        Arguments, one per task; consumed lazily.
    window : int, optional
        Largest number of submitted, unfinished tasks (default: the
        executor's own :attr:`Executor.window`).
    """
    window = window or executor.window
    source = enumerate(items)
    pending = {executor.submit(fn, item): i for i, item in islice(source, window)}
    try:
        while pending:
            done, _ = cf.wait(pending, timeout=CHECK_EVERY, return_when=cf.FIRST_COMPLETED)
            if not done:
                executor.check()
            for fut in done:
                i = pending.pop(fut)
                yield i, _result(executor, fut)
            for i, item in islice(source, len(done)):
                pending[executor.submit(fn, item)] = i
    finally:
        for fut in pending:
            fut.cancel()


def _result(executor, fut):
    """A finished task's value; a task lost with its worker raises :class:`ExecutorLost`."""
    try:
        return fut.result()
    except (cf.CancelledError, cf.BrokenExecutor) as exc:
        executor.check()  # names the cause where the executor can tell
        if isinstance(exc, cf.BrokenExecutor):
            raise ExecutorLost("a worker process died while running a simulation (killed "
                               "from outside, or out of memory?)") from None
        raise ExecutorLost(f"the {executor.name} executor dropped a simulation") from None


def run_ordered(executor, fn, items, progress=None) -> list:
    """``[fn(item) for item in items]`` through ``executor``, in input order.

    Parameters
    ----------
    progress : Progress, optional
        Advanced by one per finished task.
    """
    items = list(items)
    out = [None] * len(items)
    for i, value in imap_unordered(executor, fn, items):
        out[i] = value
        if progress is not None:
            progress.advance()
    return out

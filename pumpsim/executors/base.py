"""The contract every executor meets, and the two ways the package uses one.

An :class:`Executor` is a ``concurrent.futures`` executor cut down to what
pumpsim needs: ``submit(fn, *args)`` returns a :class:`concurrent.futures.Future`,
``shutdown()`` releases workers, and it is a context manager. ``fn`` and its
arguments must be picklable (module-level functions, frozen setups), because
they may travel to another process or machine.

Results never depend on which executor ran them: each task is one
deterministic simulation, and callers put results back in submission order.
"""

import concurrent.futures as cf
from itertools import islice


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

    def shutdown(self):
        """Release workers; the executor cannot be used afterwards."""

    def describe(self) -> str:
        return f"{self.name}, {self.workers} worker{'s' if self.workers != 1 else ''}"

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.shutdown()
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
            done, _ = cf.wait(pending, return_when=cf.FIRST_COMPLETED)
            for fut in done:
                i = pending.pop(fut)
                yield i, fut.result()
            for i, item in islice(source, len(done)):
                pending[executor.submit(fn, item)] = i
    finally:
        for fut in pending:
            fut.cancel()


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

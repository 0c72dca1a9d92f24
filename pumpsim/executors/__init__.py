"""Where independent simulations run: in this process, a local process pool, or Dask.

Every executor has the small ``concurrent.futures`` contract of :mod:`.base`;
:func:`make_executor` picks one from the command-line choices.
"""

from .base import Executor, ExecutorLost, imap_unordered, run_ordered
from .cluster import DaskExecutor
from .process import ProcessExecutor
from .serial import SerialExecutor

__all__ = ["Executor", "ExecutorLost", "SerialExecutor", "ProcessExecutor", "DaskExecutor",
           "make_executor", "imap_unordered", "run_ordered"]


def make_executor(workers=None, scheduler=None, worker_wait=None) -> Executor:
    """The executor for the command-line options ``--workers``, ``--scheduler`` and
    ``--worker-wait``.

    Parameters
    ----------
    workers : int or None
        Local processes; ``None`` means all cores, ``1`` runs in this process.
    scheduler : str or None
        Address of a running Dask distributed scheduler (``tcp://host:8786``);
        when given, ``workers`` is ignored.
    worker_wait : float or None
        Seconds a Dask cluster may be without workers before the work stops
        (default :data:`pumpsim.executors.cluster.NO_WORKERS_TIMEOUT`).
    """
    if scheduler:
        return DaskExecutor(scheduler, worker_wait)
    if workers == 1:
        return SerialExecutor()
    return ProcessExecutor(workers)

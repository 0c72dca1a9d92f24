"""A pool of local worker processes (all cores by default)."""

import concurrent.futures as cf
import multiprocessing
import os

from .base import Executor


class ProcessExecutor(Executor):
    """Parameters
    ----------
    workers : int, optional
        Number of processes; all cores by default.

    Workers never start by a plain ``fork`` of this process: the engine runs
    threads (``pumpsim.ensemble``'s pool, the linear-algebra library's), and a
    child forked while one of them holds a lock waits on it for ever (a 30 x 30
    scan after one-by-one runs in the same process hung so). They start from a
    fresh server process (``forkserver``) where the platform has one, else by
    ``spawn``; scripts that use this executor need the usual
    ``if __name__ == "__main__":`` guard.
    """

    name = "process pool"

    def __init__(self, workers=None):
        self.workers = int(workers or os.cpu_count() or 1)
        self._pool = None  # started at the first task: bad input costs no start-up

    def submit(self, fn, *args):
        if self._pool is None:
            self._pool = cf.ProcessPoolExecutor(self.workers, mp_context=_start_method())
        return self._pool.submit(fn, *args)

    def shutdown(self):
        if self._pool is not None:
            self._pool.shutdown(wait=True, cancel_futures=True)


def _start_method():
    methods = multiprocessing.get_all_start_methods()
    return multiprocessing.get_context("forkserver" if "forkserver" in methods else "spawn")

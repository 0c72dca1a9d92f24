"""A pool of local worker processes (all cores by default)."""

import concurrent.futures as cf
import os

from .base import Executor


class ProcessExecutor(Executor):
    """Parameters
    ----------
    workers : int, optional
        Number of processes; all cores by default.

    Workers start the platform's default way (``fork`` on Linux up to Python
    3.13, ``spawn`` on macOS and Windows); scripts that use this executor need
    the usual ``if __name__ == "__main__":`` guard for ``spawn``.
    """

    name = "process pool"

    def __init__(self, workers=None):
        self.workers = int(workers or os.cpu_count() or 1)
        self._pool = None  # started at the first task: bad input costs no start-up

    def submit(self, fn, *args):
        if self._pool is None:
            self._pool = cf.ProcessPoolExecutor(self.workers)
        return self._pool.submit(fn, *args)

    def shutdown(self):
        if self._pool is not None:
            self._pool.shutdown(wait=True, cancel_futures=True)

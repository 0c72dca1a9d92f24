"""A pool of local worker processes (all cores by default).

Workers never outlive the process that started them. However the main
process ends (an exception, Ctrl-C, ``kill``, ``kill -9``, a batch system's
time limit), its workers end with it:

* a normal end or an exception shuts the pool down; a stop (Ctrl-C, SIGTERM
  turned into an exception by :mod:`pumpsim.cli`) terminates the workers at
  once rather than waiting for the simulations they are running;
* when the main process is killed outright, the pool's server process
  (``forkserver``) sees its pipe close and exits; each worker asked the kernel
  to kill it when its parent dies (Linux ``prctl(PR_SET_PDEATHSIG)``) and also
  watches its parent's pid, so it ends within :data:`WATCH_EVERY` seconds on
  other systems too;
* workers ignore SIGINT: the terminal sends Ctrl-C to every process of the
  job, and only the main process should answer (a worker's traceback is not
  for the user).
"""

import concurrent.futures as cf
import ctypes
import multiprocessing
import os
import signal
import sys
import threading
import time

from .base import Executor

WATCH_EVERY = 0.5  # s between a worker's looks at its parent
PR_SET_PDEATHSIG = 1  # linux/prctl.h


class ProcessExecutor(Executor):
    """Parameters
    ----------
    workers : int, optional
        Number of processes; all cores by default.

    Workers never start by a plain ``fork`` of this process: the engine runs
    threads (the linear-algebra library's), and a child forked while one of
    them holds a lock waits on it for ever (a 30 x 30 scan after one-by-one
    runs in the same process hung so). They start from a fresh server process
    (``forkserver``) where the platform has one, else by ``spawn``; scripts
    that use this executor need the usual ``if __name__ == "__main__":`` guard.
    """

    name = "process pool"

    def __init__(self, workers=None):
        self.workers = int(workers or os.cpu_count() or 1)
        self._pool = None  # started at the first task: bad input costs no start-up

    def submit(self, fn, *args):
        if self._pool is None:
            self._pool = cf.ProcessPoolExecutor(self.workers, mp_context=_start_method(),
                                                initializer=_worker_start,
                                                initargs=(os.getpid(),))
            future = self._pool.submit(fn, *args)  # starts the pool's manager thread
            _quiet_manager(self._pool._executor_manager_thread)
            return future
        return self._pool.submit(fn, *args)

    def shutdown(self, now=False):
        if self._pool is None:
            return
        if not now:
            self._pool.shutdown(wait=True, cancel_futures=True)
            return
        # the pool has no public way to stop running tasks before Python 3.14
        processes = list((self._pool._processes or {}).values())
        self._pool.shutdown(wait=False, cancel_futures=True)
        for p in processes:
            p.terminate()
        for p in processes:
            p.join()


def _quiet_manager(thread):
    """Keep the pool's manager thread from printing a traceback when a stop ends the
    workers: it then marks every unfinished future broken, and those already cancelled
    raise ``InvalidStateError`` in that thread (a race in Python's own
    ``concurrent.futures`` up to 3.11). Nothing is lost: those futures were cancelled,
    and the process is stopping. Other threads' errors are printed as before."""
    previous = threading.excepthook

    def hook(args):
        if args.thread is not thread or not issubclass(args.exc_type, cf.InvalidStateError):
            previous(args)

    threading.excepthook = hook


def _start_method():
    methods = multiprocessing.get_all_start_methods()
    return multiprocessing.get_context("forkserver" if "forkserver" in methods else "spawn")


def _worker_start(main):
    """Run first in each worker: leave Ctrl-C to the main process, end with the parent
    (the pool's server process, or ``main`` itself under ``spawn``) and with ``main``."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    parent = os.getppid()
    if sys.platform.startswith("linux"):
        ctypes.CDLL(None, use_errno=True).prctl(PR_SET_PDEATHSIG, signal.SIGKILL)
    if os.name == "posix":  # on Windows os.kill(pid, 0) would send Ctrl-C, not probe
        threading.Thread(target=_watch, args=(parent, main), daemon=True,
                         name="pumpsim-parent-watch").start()


def _watch(parent, main):
    """End this worker as soon as its parent is gone (it is re-parented then) or the
    main process is (a parent that died before this worker looked is caught so)."""
    try:
        while os.getppid() == parent:
            os.kill(main, 0)
            time.sleep(WATCH_EVERY)
    except (ProcessLookupError, PermissionError):  # gone, or its pid reused by another user
        pass
    os._exit(1)

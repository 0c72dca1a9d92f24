"""Run every task at once in this process: no start-up cost, no parallelism."""

import concurrent.futures as cf

from .base import Executor


class SerialExecutor(Executor):
    """Runs each task inside :meth:`submit`, returning a finished future."""

    name = "serial"
    workers = 1
    window = 1  # submitting runs the task: keep progress reports in step

    def submit(self, fn, *args):
        fut = cf.Future()
        try:
            fut.set_result(fn(*args))
        except Exception as exc:  # re-raised by fut.result(), as in any executor
            fut.set_exception(exc)
        return fut

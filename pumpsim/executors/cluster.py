"""Tasks on a Dask distributed cluster (optional extra ``pumpsim[dask]``).

Connects to a running scheduler (``dask scheduler`` on one machine,
``dask worker tcp://host:8786`` on each of the others). The workers need the
same pumpsim version installed; setups travel with their scheme, so the
workers need no access to the user's files.

Dask itself waits for ever for workers, and a lost scheduler cancels every
task without a reason; :meth:`DaskExecutor.check` turns both into an
:class:`~pumpsim.executors.base.ExecutorLost` that says what happened: the
connection to the scheduler is lost, or the cluster has had no worker for
``no_workers_timeout`` seconds (all died, or none was started).
"""

import time

from ..errors import InputError
from .base import Executor, ExecutorLost

CONNECT_TIMEOUT = "20s"
NO_WORKERS_TIMEOUT = 60.0  # s a scan waits for a cluster without workers to get one


class DaskExecutor(Executor):
    """Parameters
    ----------
    address : str or distributed.Client
        Scheduler address such as ``tcp://10.0.0.5:8786``, or a client
        already connected (which is then left open on :meth:`shutdown`).
    no_workers_timeout : float, optional
        Seconds without any worker after which :meth:`check` gives up
        (default :data:`NO_WORKERS_TIMEOUT`).
    """

    name = "dask"

    def __init__(self, address, no_workers_timeout=None):
        self.no_workers_timeout = no_workers_timeout or NO_WORKERS_TIMEOUT
        self._no_workers_since = None
        try:
            from distributed import Client
        except ImportError:
            raise InputError("--scheduler needs Dask distributed: pip install 'pumpsim[dask]'",
                             table="--scheduler") from None
        if isinstance(address, Client):
            self.client, self._own = address, False
        else:
            try:
                self.client = Client(address, timeout=CONNECT_TIMEOUT)
            except (OSError, TimeoutError) as exc:
                raise RuntimeError(f"cannot reach the Dask scheduler at {address}: {exc}") from None
            self._own = True
        # pure=False: every submission is its own task; no hashing of setups
        self._executor = self.client.get_executor(pure=False)
        self.address = self.client.scheduler.address

    @property
    def workers(self):
        threads = self.client.nthreads()
        return max(1, sum(threads.values()))

    def submit(self, fn, *args):
        return self._executor.submit(fn, *args)

    def describe(self):
        return f"dask at {self.address}, {self.workers} worker threads"

    def check(self):
        if self.client.status not in ("running", "newly-created"):
            raise ExecutorLost(f"lost the connection to the Dask scheduler at {self.address} "
                               "(it stopped, or the network between us failed)")
        if self.client.scheduler_info().get("workers"):  # refreshed by the client every 2 s
            self._no_workers_since = None
            return
        now = time.monotonic()
        if self._no_workers_since is None:
            self._no_workers_since = now
        elif now - self._no_workers_since > self.no_workers_timeout:
            raise ExecutorLost(f"the Dask cluster at {self.address} has had no workers for "
                               f"{self.no_workers_timeout:g} s (they died or were stopped, "
                               "or none was started)")

    def shutdown(self, now=False):
        if self._own:
            self.client.close()

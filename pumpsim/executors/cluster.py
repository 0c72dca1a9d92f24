"""Tasks on a Dask distributed cluster (optional extra ``pumpsim[dask]``).

Connects to a running scheduler (``dask scheduler`` on one machine,
``dask worker tcp://host:8786`` on each of the others). The workers need the
same pumpsim version installed; setups travel with their scheme, so the
workers need no access to the user's files.
"""

from ..errors import InputError
from .base import Executor

CONNECT_TIMEOUT = "20s"


class DaskExecutor(Executor):
    """Parameters
    ----------
    address : str or distributed.Client
        Scheduler address such as ``tcp://10.0.0.5:8786``, or a client
        already connected (which is then left open on :meth:`shutdown`).
    """

    name = "dask"

    def __init__(self, address):
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

    @property
    def workers(self):
        threads = self.client.nthreads()
        return max(1, sum(threads.values()))

    def submit(self, fn, *args):
        return self._executor.submit(fn, *args)

    def describe(self):
        return f"dask at {self.client.scheduler.address}, {self.workers} worker threads"

    def shutdown(self):
        if self._own:
            self.client.close()

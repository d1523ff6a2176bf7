"""Where chunked sweeps and grids run: a local process pool (default) or a Dask cluster by address.

``executor_for(scheduler=None, workers=None)`` is a context manager yielding a
``concurrent.futures.Executor`` for ``chunks.run_chunks`` (and so for ``sweep.sweep`` and
``sweep.lyapunov_grid``). With a scheduler address (``tcp://host:8786``) the chunks go to an
existing Dask distributed cluster through Dask's concurrent.futures interface
(``distributed.Client(address).get_executor()``); the cluster's workers need OrbitDesk installed.
Dask is an optional extra (``pip install orbitdesk[cluster]``).
"""

from __future__ import annotations

import contextlib
import multiprocessing
from concurrent.futures import Executor, ProcessPoolExecutor

from orbitdesk.engine.chunks import worker_count


class SchedulerError(RuntimeError):
    """The cluster cannot be reached or Dask is not installed; the message says which."""


def local_executor(workers: int | None = None) -> ProcessPoolExecutor:
    """A process pool of ``workers`` (default: the machine's cores), fresh interpreters (spawn)."""
    count = worker_count() if workers is None else int(workers)
    if count < 1:
        raise ValueError("the number of workers must be at least 1")
    return ProcessPoolExecutor(max_workers=count, mp_context=multiprocessing.get_context("spawn"))


class ClusterExecutor(Executor):
    """Dask's executor for a client, sized by the cluster's threads; shutting it down closes the client.

    Tasks are submitted as impure (``pure=False``), so a chunk submitted again after a failure
    really runs again instead of returning the cached failure."""

    def __init__(self, client, workers: int | None = None):
        self.client = client
        self._inner = client.get_executor(pure=False)
        threads = sum(client.nthreads().values()) if workers is None else int(workers)
        self._max_workers = max(1, threads)  # read by run_chunks to size its submission window

    def submit(self, fn, /, *args, **kwargs):
        return self._inner.submit(fn, *args, **kwargs)

    def shutdown(self, wait=True, *, cancel_futures=False):
        try:
            self._inner.shutdown(wait=wait and not cancel_futures)
        finally:
            self.client.close()


def cluster_executor(address: str, workers: int | None = None, timeout: float = 10.0) -> ClusterExecutor:
    """A ``ClusterExecutor`` connected to the Dask scheduler at ``address``."""
    try:
        from distributed import Client
    except ImportError:
        raise SchedulerError("running on a cluster needs Dask: pip install 'orbitdesk[cluster]'") from None
    try:
        client = Client(address, timeout=timeout)
    except (OSError, TimeoutError) as err:
        raise SchedulerError(f"cannot reach the Dask scheduler at {address}: {err}") from None
    return ClusterExecutor(client, workers)


@contextlib.contextmanager
def executor_for(scheduler: str | None = None, workers: int | None = None):
    """The executor for a command: a Dask cluster at ``scheduler`` or a local pool of ``workers``."""
    executor = cluster_executor(scheduler, workers) if scheduler else local_executor(workers)
    try:
        yield executor
    finally:
        executor.shutdown(wait=True, cancel_futures=True)

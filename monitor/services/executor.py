"""Where the expensive work runs: in this process, in a local process pool, or on a Dask cluster.

One small seam used by the services (trend fits, power replicates)::

    with open_runner(workers=4) as runner:                  # local process pool
    with open_runner(cluster="tcp://10.0.0.5:8786") as runner:   # a Dask distributed scheduler
        results = runner.map(task_function, tasks)          # results in the order of the tasks

A task is a top-level function and plain values (frames, numbers, text): the data of a task are sent to
the worker that runs it once, never a database connection.  Workers only compute and return; the
process that submitted the work is the only one that writes to the database.  The order of results is
the order of the tasks whatever the order the workers finish in, and every random draw is seeded from the
task itself, so the numbers do not depend on the number of workers.

``runner.executor`` is a ``concurrent.futures.Executor`` (a process pool, or Dask's executor view of its
client) for stages that take one, such as the power study.
"""

from __future__ import annotations

import contextlib
import multiprocessing
import os
import threading
from collections.abc import Callable, Iterator, Sequence
from concurrent.futures import Executor, ProcessPoolExecutor
from dataclasses import dataclass, field
from typing import Any

from monitor.errors import InputError, InputProblem, MonitorError


def default_workers() -> int:
    """The cores this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # not on Linux
        return max(1, os.cpu_count() or 1)


def _pool_context():
    # fork starts workers at once and needs no importable __main__ (scripts without a main guard work);
    # the workers never use the parent's database connections (they exit without closing them).  A process
    # running other threads (a Dask client, a web server) is not forked (a copy would hold their locks):
    # its workers start from a fork server instead.
    methods = multiprocessing.get_all_start_methods()
    if "fork" in methods and threading.active_count() == 1:
        return multiprocessing.get_context("fork")
    return multiprocessing.get_context("forkserver" if "forkserver" in methods else "spawn")


@dataclass
class Runner:
    """Runs tasks in order: serially (workers=1), in a process pool, or on a Dask client."""

    workers: int
    cluster: str | None = None
    _pool: ProcessPoolExecutor | None = field(default=None, repr=False)
    _client: Any = field(default=None, repr=False)

    @property
    def description(self) -> str:
        if self._client is not None:
            n = len(self._client.scheduler_info().get("workers", {}))
            return f"Dask cluster {self.cluster} ({n} worker{'s' if n != 1 else ''})"
        return f"{self.workers} local process{'es' if self.workers != 1 else ''}"

    def cluster_workers(self) -> int:
        """How many workers the cluster has now (0 without a cluster)."""
        if self._client is None:
            return 0
        return len(self._client.scheduler_info().get("workers", {}))

    @property
    def executor(self) -> Executor | None:
        """A ``concurrent.futures.Executor`` for stages that take one (None: run in this process)."""
        if self._client is not None:
            return self._client.get_executor(pure=False)
        if self.workers > 1:
            return self._local_pool()
        return None

    def _local_pool(self) -> ProcessPoolExecutor:
        if self._pool is None:
            self._pool = ProcessPoolExecutor(max_workers=self.workers, mp_context=_pool_context())
        return self._pool

    def map(self, function: Callable[[Any], Any], tasks: Sequence[Any],
            progress: Callable[[int, int], None] | None = None) -> list[Any]:
        """``[function(t) for t in tasks]``, computed where this runner computes, in the order of ``tasks``."""
        tasks = list(tasks)
        total = len(tasks)
        if progress:
            progress(0, total)
        if not tasks:
            return []
        if self._client is not None:
            return self._map_dask(function, tasks, progress)
        if self.workers == 1 or total == 1:
            out = []
            for i, task in enumerate(tasks):
                out.append(function(task))
                if progress:
                    progress(i + 1, total)
            return out
        pool = self._local_pool()
        futures = [pool.submit(function, task) for task in tasks]
        out = []
        for i, future in enumerate(futures):
            out.append(future.result())
            if progress:
                progress(i + 1, total)
        return out

    def _map_dask(self, function, tasks, progress):
        client = self._client
        # the data go to the cluster once each, as scattered objects, not inside the task graph
        data = client.scatter(tasks)
        futures = client.map(function, data, pure=False)
        out = []
        for i, future in enumerate(futures):
            out.append(future.result())
            if progress:
                progress(i + 1, len(tasks))
        return out

    def close(self) -> None:
        if self._pool is not None:
            self._pool.shutdown(wait=True, cancel_futures=True)
            self._pool = None
        if self._client is not None:
            self._client.close()
            self._client = None


@contextlib.contextmanager
def open_runner(workers: int | None = None, cluster: str | None = None) -> Iterator[Runner]:
    """A runner for the duration of a ``with`` block.

    Parameters
    ----------
    workers : int, optional
        Local processes; default the cores this process may use.  1 runs everything in this process.
    cluster : str, optional
        Address of a Dask distributed scheduler (``tcp://host:8786``); then ``workers`` is ignored and the
        cluster's workers run the tasks.
    """
    if workers is not None and int(workers) < 1:
        raise InputError(InputProblem("--workers", None, None, workers, "a whole number of at least 1"))
    runner = Runner(workers=default_workers() if workers is None else int(workers), cluster=cluster)
    if cluster:
        runner._client = _connect(cluster)
    try:
        yield runner
    finally:
        runner.close()


#: how long to wait for a Dask scheduler to answer before the address is refused (a busy scheduler on a
#: shared network can take seconds; a wrong address is refused when this runs out)
CONNECT_TIMEOUT = "20s"


def _connect(address: str):
    try:
        from distributed import Client
    except ImportError as exc:  # pragma: no cover - the extra is part of the test install
        raise MonitorError("running on a cluster needs Dask's distributed package: "
                           "pip install 'monitor[cluster]'") from exc
    try:
        return Client(address, timeout=CONNECT_TIMEOUT, set_as_default=False)
    except (OSError, TimeoutError, ValueError) as exc:
        raise InputError(InputProblem("--cluster", None, None, address,
                                      f"the address of a running Dask scheduler, e.g. tcp://host:8786 ({exc})")) from None

"""Executors: run point tasks somewhere and yield their records as they finish.

Both executors have one method, ``run(tasks) -> Iterator[PointRecord]``, and keep a bounded
number of points in flight (one per local worker plus one queued; twice the Dask worker
threads), so a long sweep never floods memory and a dying local worker can only have held the
points in flight.

- :class:`LocalPool`: a ``concurrent.futures.ProcessPoolExecutor`` (``forkserver`` start on
  Linux). Workers ignore SIGINT; the coordinator handles Ctrl-C by dropping the points in flight
  whole. If a worker process dies, the pool is rebuilt and the points in flight run again (the
  pool cannot tell which worker held which point, so every point in flight is charged); a point
  charged :data:`MAX_ATTEMPTS` times is recorded as failed.
- :class:`DaskPool`: a Dask distributed scheduler (``--cluster ADDRESS``) or a LocalCluster
  (``--cluster local:N``). Dask itself reruns a point whose worker died, up to its
  ``allowed-failures`` setting; after that the point is recorded as failed. Dask is the optional
  ``cluster`` extra and is imported only here, lazily.

Every point runs :func:`netsim.sweep.worker.execute`, which never raises for the point's own
error, so the results depend only on the task (data and seed), never on the executor.
"""

from __future__ import annotations

import multiprocessing
import os
import signal
import sys
import uuid
from collections import deque
from collections.abc import Generator, Iterable, Iterator
from concurrent.futures import FIRST_COMPLETED, Future, ProcessPoolExecutor, wait
from concurrent.futures.process import BrokenProcessPool
from typing import Any

from netsim.errors import ParameterError
from netsim.sweep.store import PointRecord
from netsim.sweep.worker import PointFunction, PointTask, execute, utc_now

__all__ = ["MAX_ATTEMPTS", "DaskPool", "LocalPool", "default_workers", "make_executor"]

#: A point whose worker dies this many times is recorded as failed.
MAX_ATTEMPTS = 3


def default_workers() -> int:
    """The number of cores this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # not on Linux
        return max(1, os.cpu_count() or 1)


def _ignore_sigint() -> None:
    signal.signal(signal.SIGINT, signal.SIG_IGN)


def _lost(task: PointTask, why: str) -> PointRecord:
    now = utc_now()
    return PointRecord(task.point_id, "failed", now, now, 0.0, why)


class LocalPool:
    """Run points in local worker processes."""

    def __init__(self, function: PointFunction, workers: int | None = None) -> None:
        self.function = function
        self.workers = workers or default_workers()
        if sys.platform.startswith("linux"):
            self._context = multiprocessing.get_context("forkserver")
            # Workers fork from a server that has already imported the worker code and numpy.
            self._context.set_forkserver_preload(["netsim.sweep.worker", "numpy"])
        else:
            self._context = multiprocessing.get_context("spawn")

    def run(self, tasks: Iterable[PointTask]) -> Generator[PointRecord, None, None]:
        """Yield one record per task, in completion order."""
        queue: deque[PointTask] = deque()
        source = iter(tasks)
        deaths: dict[str, int] = {}
        while True:
            pool = ProcessPoolExecutor(self.workers, mp_context=self._context, initializer=_ignore_sigint)
            try:
                finished = yield from self._drive(pool, queue, source, deaths)
            finally:
                _stop(pool)
            if finished:
                return

    def _drive(self, pool: ProcessPoolExecutor, queue: deque[PointTask], source: Iterator[PointTask],
               deaths: dict[str, int]) -> Generator[PointRecord, None, bool]:
        in_flight: dict[Future[PointRecord], PointTask] = {}
        while True:
            while len(in_flight) < self.workers + 1:
                task = queue.popleft() if queue else next(source, None)
                if task is None:
                    break
                in_flight[pool.submit(execute, self.function, task)] = task
            if not in_flight:
                return True
            done, _ = wait(in_flight, return_when=FIRST_COMPLETED)
            for future in done:
                task = in_flight.pop(future)
                try:
                    record = future.result()
                except BrokenProcessPool:
                    in_flight[future] = task
                    yield from _salvage(in_flight, queue, deaths)
                    return False
                yield record


def _salvage(in_flight: dict[Future[PointRecord], PointTask], queue: deque[PointTask],
             deaths: dict[str, int]) -> Iterator[PointRecord]:
    """After a worker died: keep finished results; run the other points again (or fail them
    after MAX_ATTEMPTS deaths)."""
    for future, task in list(in_flight.items()):
        if future.done() and not future.cancelled() and future.exception() is None:
            yield future.result()
            continue
        deaths[task.point_id] = deaths.get(task.point_id, 0) + 1
        if deaths[task.point_id] >= MAX_ATTEMPTS:
            yield _lost(task, f"WorkerDied: the worker process died {MAX_ATTEMPTS} times while holding this point")
        else:
            queue.append(task)


def _stop(pool: ProcessPoolExecutor) -> None:
    """Shut a pool down now: cancel queued points and end the workers (points in flight are dropped)."""
    processes = list(getattr(pool, "_processes", {}).values())
    pool.shutdown(wait=False, cancel_futures=True)
    for process in processes:
        if process.is_alive():
            process.terminate()
    for process in processes:
        process.join(timeout=5)


def _import_distributed() -> Any:
    try:
        import distributed
    except ImportError:
        raise ParameterError("--cluster", "(Dask not installed)",
                             "the 'cluster' extra: pip install 'netsim[cluster]'") from None
    return distributed


def _parse_cluster(address: str) -> tuple[str, int | None]:
    if address.startswith("local:"):
        count = address[len("local:"):]
        if not count.isdigit() or not 1 <= int(count) <= 1024:
            raise ParameterError("--cluster", address, "local:N with N an integer in [1, 1024], or a scheduler address")
        return "local", int(count)
    if not address.strip():
        raise ParameterError("--cluster", address, "local:N or a scheduler address such as tcp://host:8786")
    return address, None


class DaskPool:
    """Run points on a Dask distributed cluster (an address, or ``local:N`` for a LocalCluster)."""

    def __init__(self, function: PointFunction, address: str) -> None:
        self.function = function
        self.address, self.local_workers = _parse_cluster(address)
        self._distributed = _import_distributed()

    def _client(self) -> tuple[Any, Any]:
        dist = self._distributed
        if self.local_workers is not None:
            cluster = dist.LocalCluster(n_workers=self.local_workers, threads_per_worker=1, processes=True,
                                        dashboard_address=None, silence_logs=40)
            return dist.Client(cluster), cluster
        try:
            return dist.Client(self.address, timeout=30), None
        except (OSError, TimeoutError) as exc:
            raise ParameterError("--cluster", self.address, f"a reachable Dask scheduler ({exc})") from None

    def run(self, tasks: Iterable[PointTask]) -> Generator[PointRecord, None, None]:
        """Yield one record per task, in completion order."""
        client, cluster = self._client()
        try:
            yield from self._drive(client, iter(tasks))
        finally:
            client.close()
            if cluster is not None:
                cluster.close()

    def _drive(self, client: Any, source: Iterator[PointTask]) -> Iterator[PointRecord]:
        limit = 2 * max(1, sum(w.get("nthreads", 1) for w in client.scheduler_info()["workers"].values()))
        tag = uuid.uuid4().hex[:8]
        futures: dict[Any, PointTask] = {}
        completed = self._distributed.as_completed()

        def submit() -> None:
            task = next(source, None)
            if task is not None:
                future = client.submit(execute, self.function, task, pure=False,
                                       key=f"netsim-point-{task.point_id[:16]}-{tag}")
                futures[future] = task
                completed.add(future)

        for _ in range(limit):
            submit()
        try:
            for future in completed:
                task = futures.pop(future)
                yield self._record(future, task)
                submit()
        finally:
            client.cancel(list(futures))

    def _record(self, future: Any, task: PointTask) -> PointRecord:
        try:
            return future.result()
        except self._distributed.KilledWorker as exc:
            return _lost(task, f"WorkerDied: Dask lost the workers running this point ({exc})")


def make_executor(function: PointFunction, workers: int | None = None,
                  cluster: str | None = None) -> LocalPool | DaskPool:
    """A :class:`DaskPool` if ``cluster`` is given, else a :class:`LocalPool`."""
    if workers is not None and (isinstance(workers, bool) or workers < 1):
        raise ParameterError("--workers", workers, "an integer >= 1")
    if cluster is not None:
        return DaskPool(function, cluster)
    return LocalPool(function, workers)

"""Executors: run point tasks somewhere and yield their records as they finish.

Both executors have one method, ``run(tasks) -> Iterator[PointRecord]``, and keep a bounded
number of points in flight (one per local worker plus one queued; twice the Dask worker
threads), so a long sweep never floods memory and a dying local worker can only have held the
points in flight.

- :class:`LocalPool`: a ``concurrent.futures.ProcessPoolExecutor`` (``forkserver`` start on
  Linux). Workers ignore SIGINT; the coordinator handles Ctrl-C by dropping the points in flight
  whole (a Ctrl-C while a worker is being started waits until the pool has recorded it, so the
  pool ends every worker it started). Workers report each point's start on a queue. If a worker process dies, the pool is
  rebuilt and the points in flight run again. The pool cannot tell which running point killed
  its worker, so when several were running they run again one at a time; a point whose worker
  dies while it runs alone is charged, and after :data:`MAX_ATTEMPTS` charges it is recorded as
  failed. A point blocked outside Python (where the in-worker time-out cannot reach
  it) is failed once it has run ``--point-timeout-s`` plus :data:`HARD_TIMEOUT_GRACE_S`, and the
  pool is restarted.
- :class:`DaskPool`: a Dask distributed scheduler (``--cluster ADDRESS``) or a LocalCluster
  (``--cluster local:N``). Dask itself reruns a point whose worker died, up to its
  ``allowed-failures`` setting; after that the point is recorded as failed. Only the in-worker
  time-out applies (a Dask worker thread cannot be stopped from outside). Dask is the optional
  ``cluster`` extra and is imported only here, lazily.

Every point runs :func:`netsim.sweep.worker.execute`, which never raises for the point's own
error, so the results depend only on the task (data and seed), never on the executor.
"""

from __future__ import annotations

import contextlib
import multiprocessing
import os
import re
import signal
import sys
import threading
import time
import uuid
from collections import deque
from collections.abc import Generator, Iterable, Iterator
from concurrent.futures import FIRST_COMPLETED, Future, ProcessPoolExecutor, wait
from concurrent.futures.process import BrokenProcessPool
from typing import Any

from netsim.interrupts import interrupt_deferred as _interrupt_deferred
from netsim.errors import ParameterError
from netsim.sweep.store import PointRecord
from netsim.sweep.worker import PointFunction, PointTask, execute, utc_now

__all__ = ["MAX_ATTEMPTS", "DaskPool", "LocalPool", "default_workers", "make_executor", "parse_cluster"]

#: A point whose worker dies this many times is recorded as failed.
MAX_ATTEMPTS = 3
#: A local point still running this long after its time-out is stuck outside Python (where the
#: in-worker time-out cannot reach it): it is failed and its pool restarted.
HARD_TIMEOUT_GRACE_S = 2.0
_POLL_S = 0.5


def default_workers() -> int:
    """The number of cores this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # not on Linux
        return max(1, os.cpu_count() or 1)


#: In a worker process: where it reports "point X started at time T" (None elsewhere).
_STARTED: Any = None


def _init_worker(started: Any, coordinator_pid: int) -> None:
    """Worker initializer: leave Ctrl-C to the coordinator; remember the start-report queue;
    exit when the coordinator is gone (killed), so no orphan keeps computing."""
    global _STARTED
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    _STARTED = started
    threading.Thread(target=_watch, args=(coordinator_pid,), daemon=True, name="netsim-watch").start()


def _start_forkserver() -> None:
    """Start the fork server with SIGINT ignored, so that it and every worker forked from it
    ignore Ctrl-C from their first instruction (an ignored signal stays ignored across exec, and
    Python then installs no KeyboardInterrupt handler), not only once the pool initializer has
    run: a Ctrl-C while the server imports numpy or a worker starts prints no traceback. The
    coordinator blocks SIGINT meanwhile (Linux keeps a blocked signal pending even while it is
    ignored), so a Ctrl-C in that moment still reaches it once the handler is restored."""
    from multiprocessing import forkserver

    if threading.current_thread() is not threading.main_thread():
        forkserver.ensure_running()  # signal dispositions can only be changed in the main thread
        return
    signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGINT})
    previous = signal.signal(signal.SIGINT, signal.SIG_IGN)
    try:
        forkserver.ensure_running()
    finally:
        signal.signal(signal.SIGINT, previous)
        signal.pthread_sigmask(signal.SIG_UNBLOCK, {signal.SIGINT})


def _watch(pid: int) -> None:
    while True:
        time.sleep(_POLL_S)
        try:
            os.kill(pid, 0)
        except ProcessLookupError:
            os._exit(0)
        except PermissionError:  # the pid now belongs to another user's process
            os._exit(0)


def _run_point(function: PointFunction, task: PointTask) -> PointRecord:
    """In a worker: report the start (synchronously, so a crash cannot lose it), then run."""
    if _STARTED is not None:
        _STARTED.put((task.point_id, time.time()))
    return execute(function, task)


def _lost(task: PointTask, why: str) -> PointRecord:
    now = utc_now()
    return PointRecord(task.point_id, "failed", now, now, 0.0, why)


def _finished(future: Future[PointRecord]) -> bool:
    return future.done() and not future.cancelled() and future.exception() is None


class LocalPool:
    """Run points in local worker processes."""

    def __init__(self, function: PointFunction, workers: int | None = None) -> None:
        self.function = function
        self.workers = workers or default_workers()
        if sys.platform.startswith("linux"):
            self._context = multiprocessing.get_context("forkserver")
            # Workers fork from a server that has already imported the worker code and numpy.
            self._context.set_forkserver_preload(["netsim.sweep.worker", "numpy"])
            _start_forkserver()
        else:
            self._context = multiprocessing.get_context("spawn")

    def run(self, tasks: Iterable[PointTask]) -> Generator[PointRecord, None, None]:
        """Yield one record per task, in completion order."""
        backlog = _Backlog(iter(tasks))
        while True:
            started = self._context.SimpleQueue()
            pool = ProcessPoolExecutor(self.workers, mp_context=self._context, initializer=_init_worker,
                                       initargs=(started, os.getpid()))
            try:
                finished = yield from _PoolRound(self, pool, started, backlog).drive()
            finally:
                _stop(pool)
                started.close()
            if finished:
                return


class _Backlog:
    """Points still to run, across pool restarts.

    ``suspects`` were running when a worker died together with other started points; they run
    one at a time (nothing else in flight) until each either finishes or kills its worker alone,
    which is the only death charged to a point.
    """

    def __init__(self, source: Iterator[PointTask]) -> None:
        self.source = source
        self.queue: deque[PointTask] = deque()
        self.suspects: deque[PointTask] = deque()
        self.deaths: dict[str, int] = {}

    def next_task(self, isolate: bool) -> PointTask | None:
        if self.suspects:
            return self.suspects.popleft() if not isolate else None
        return self.queue.popleft() if self.queue else next(self.source, None)

    def give_back(self, task: PointTask, suspect: bool) -> None:
        (self.suspects if suspect else self.queue).appendleft(task)


class _PoolRound:
    """One pool's life: it ends when the tasks run out, a worker dies, or a point is stuck."""

    def __init__(self, owner: LocalPool, pool: ProcessPoolExecutor, started: Any, backlog: _Backlog) -> None:
        self.owner, self.pool, self.started_queue, self.backlog = owner, pool, started, backlog
        self.in_flight: dict[Future[PointRecord], PointTask] = {}
        self.started: dict[str, float] = {}
        self.isolating = False

    def drive(self) -> Generator[PointRecord, None, bool]:
        """Yield records; return True when every task is done, False to restart the pool."""
        while True:
            if not self._fill():
                yield from self._salvage()
                return False
            if not self.in_flight:
                return True
            done, _ = wait(self.in_flight, timeout=_POLL_S, return_when=FIRST_COMPLETED)
            for future in done:
                task = self.in_flight.pop(future)
                try:
                    record = future.result()
                except BrokenProcessPool:
                    self.in_flight[future] = task
                    yield from self._salvage()
                    return False
                yield record
            self._drain()
            stuck = [f for f, t in self.in_flight.items() if self._overdue(t)]
            if stuck:
                yield from self._abandon(stuck)
                return False

    def _fill(self) -> bool:
        """Submit points up to the limit (a suspect only alone); False if the pool broke meanwhile."""
        while len(self.in_flight) < self.owner.workers + 1:
            if self.isolating and self.in_flight:
                return True
            self.isolating = bool(self.backlog.suspects)
            task = self.backlog.next_task(isolate=self.isolating and bool(self.in_flight))
            if task is None:
                return True
            try:
                with _interrupt_deferred():  # submit may start a worker (see netsim.interrupts)
                    self.in_flight[self.pool.submit(_run_point, self.owner.function, task)] = task
            except BrokenProcessPool:
                self.backlog.give_back(task, self.isolating)
                return False
        return True

    def _drain(self) -> None:
        while not self.started_queue.empty():
            point_id, when = self.started_queue.get()
            self.started[point_id] = when

    def _overdue(self, task: PointTask) -> bool:
        """Started, and still running well past its time-out (blocked outside Python)."""
        began = self.started.get(task.point_id)
        if task.timeout_s is None or began is None:
            return False
        return time.time() - began > task.timeout_s + HARD_TIMEOUT_GRACE_S

    def _abandon(self, stuck: list[Future[PointRecord]]) -> Iterator[PointRecord]:
        """Fail the stuck points (the pool is then stopped); keep finished results; requeue the rest."""
        for future, task in list(self.in_flight.items()):
            if future in stuck:
                yield _lost(task, f"PointTimeout: the point ran longer than --point-timeout-s {task.timeout_s:g} "
                                  "and did not respond; its worker was stopped")
            elif _finished(future):
                yield future.result()
            else:
                self.backlog.queue.append(task)

    def _salvage(self) -> Iterator[PointRecord]:
        """After a worker died: keep finished results and run the other points again. A point that
        was the only one running is charged the death (failed after MAX_ATTEMPTS); several
        running points become suspects, run alone next."""
        self._drain()
        unfinished = []
        for future, task in self.in_flight.items():
            if _finished(future):
                yield future.result()
            else:
                unfinished.append(task)
        running = [t for t in unfinished if t.point_id in self.started]
        for task in unfinished:
            if task not in running:
                self.backlog.queue.appendleft(task)
        if len(running) == 1:
            yield from self._charge(running[0])
        else:
            self.backlog.suspects.extend(running)

    def _charge(self, task: PointTask) -> Iterator[PointRecord]:
        deaths = self.backlog.deaths
        deaths[task.point_id] = deaths.get(task.point_id, 0) + 1
        if deaths[task.point_id] >= MAX_ATTEMPTS:
            yield _lost(task, f"WorkerDied: the worker process died {MAX_ATTEMPTS} times while running this point")
        else:
            self.backlog.suspects.append(task)


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


#: Schemes of a Dask scheduler address (Dask's communication back-ends).
CLUSTER_SCHEMES = ("tcp", "tls", "ws", "wss", "ucx")
#: Dask's default scheduler port, used when an address names none.
DEFAULT_SCHEDULER_PORT = 8786
#: How long to wait for a scheduler to answer before refusing its address.
CONNECT_TIMEOUT_S = 10.0
_CLUSTER_ALLOWED = ("local:N with N in [1, 1024], or a scheduler address SCHEME://HOST:PORT (scheme "
                    + ", ".join(CLUSTER_SCHEMES) + "; port 1-65535), e.g. tcp://10.0.0.5:8786")
_HOST_PORT = re.compile(r"(?:\[(?P<ip6>[0-9A-Fa-f:.]+)\]|(?P<host>[A-Za-z0-9](?:[A-Za-z0-9._-]{0,252}[A-Za-z0-9])?))"
                        r"(?::(?P<port>[0-9]{1,5}))?")


def parse_cluster(address: str) -> tuple[str, int | None]:
    """``("local", N)`` for ``local:N``, else ``(normalised address, None)``; the scheme, host and
    port are checked here, before Dask sees them (a ParameterError naming ``--cluster``)."""
    if address.startswith("local:"):
        count = address[len("local:"):]
        if not count.isdigit() or not 1 <= int(count) <= 1024:
            raise ParameterError("--cluster", address, _CLUSTER_ALLOWED)
        return "local", int(count)
    scheme, sep, rest = address.partition("://")
    if not sep:
        scheme, rest = "tcp", address
    match = _HOST_PORT.fullmatch(rest)
    if scheme not in CLUSTER_SCHEMES or match is None:
        raise ParameterError("--cluster", address, _CLUSTER_ALLOWED)
    port = int(match["port"]) if match["port"] else DEFAULT_SCHEDULER_PORT
    if not 1 <= port <= 65535:
        raise ParameterError("--cluster", address, _CLUSTER_ALLOWED)
    host = f"[{match['ip6']}]" if match["ip6"] else match["host"]
    return f"{scheme}://{host}:{port}", None


class DaskPool:
    """Run points on a Dask distributed cluster (an address, or ``local:N`` for a LocalCluster)."""

    def __init__(self, function: PointFunction, address: str) -> None:
        self.function = function
        self.address, self.local_workers = parse_cluster(address)
        self._distributed = _import_distributed()
        self._connected: tuple[Any, Any] | None = None

    def connect(self) -> None:
        """Connect now (a one-line ParameterError if the scheduler does not answer), so that a
        wrong address is refused before the store is touched; :meth:`run` then uses this client."""
        if self._connected is None:
            self._connected = self._client()

    def close(self) -> None:
        """Close a connection :meth:`connect` made that no run used (nothing was left to run)."""
        if self._connected is not None:
            client, cluster = self._connected
            self._connected = None
            client.close()
            if cluster is not None:
                cluster.close()

    def _client(self) -> tuple[Any, Any]:
        dist = self._distributed
        if self.local_workers is not None:
            cluster = dist.LocalCluster(n_workers=self.local_workers, threads_per_worker=1, processes=True,
                                        dashboard_address=None, silence_logs=40)
            return dist.Client(cluster), cluster
        try:
            with _quiet_dask_logs():
                return dist.Client(self.address, timeout=CONNECT_TIMEOUT_S), None
        except Exception as exc:  # any failure to connect (refused, time-out, handshake) is one line
            reason = " ".join(str(exc).split())[:120] or type(exc).__name__
            raise ParameterError("--cluster", self.address, f"a Dask scheduler that answers within "
                                                            f"{CONNECT_TIMEOUT_S:g} s ({reason})") from None

    def run(self, tasks: Iterable[PointTask]) -> Generator[PointRecord, None, None]:
        """Yield one record per task, in completion order."""
        client, cluster = self._connected or self._client()
        self._connected = None
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


@contextlib.contextmanager
def _quiet_dask_logs() -> Iterator[None]:
    """Dask logs its own connection errors; the command says it in one line instead."""
    import logging

    loggers = [logging.getLogger(name) for name in ("distributed", "distributed.client", "distributed.comm.tcp",
                                                     "distributed.core")]
    levels = [logger.level for logger in loggers]
    for logger in loggers:
        logger.setLevel(logging.CRITICAL)
    try:
        yield
    finally:
        for logger, level in zip(loggers, levels):
            logger.setLevel(level)


def make_executor(function: PointFunction, workers: int | None = None,
                  cluster: str | None = None) -> LocalPool | DaskPool:
    """A :class:`DaskPool` if ``cluster`` is given, else a :class:`LocalPool`."""
    if workers is not None and (isinstance(workers, bool) or workers < 1):
        raise ParameterError("--workers", workers, "an integer >= 1")
    if cluster is not None:
        return DaskPool(function, cluster)
    return LocalPool(function, workers)

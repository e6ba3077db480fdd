"""Where the heavy work runs: on this machine's cores (default), in this process only, or on
a Dask cluster.

The kriging cuts its targets into tiles (:mod:`aquitardmap.geostat.kriging`), and every tile is an
independent task ``fn(shared, item)``: ``shared`` is the same for all tasks of a call (the
prepared data), ``item`` is the tile. A *runner* maps such tasks and returns the results in
order. The default runner (``mode = "local"``) hands the tasks of a call to a pool of worker
processes forked from this one, one per core (``workers`` caps them; ``workers = 1`` runs
them in this process, as ``mode = "single"`` does); it needs nothing beyond the core
dependencies. The Dask runner sends ``shared`` once to every worker and the
tiles as tasks, to local worker processes or to an existing cluster's scheduler; it needs the
optional ``dask`` extra (``pip install "aquitardmap[dask]"``). A task's numbers do not depend
on where it runs, so both give identical results (given the same package versions on every
worker).

A run opens its runner with :func:`compute_session` and hands it to the kriging functions
in a :class:`~aquitardmap.geostat.context.KrigingContext`; a call given no context runs in
this process.
"""

from __future__ import annotations

import os
import pickle
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from typing import Any, Protocol

from aquitardmap.config.settings import ComputeSettings
from aquitardmap.errors import InputError, Problem

#: Cells (or target points) per tile when no session says otherwise.
DEFAULT_TILE_CELLS = 65_536
#: How long to try to reach a Dask scheduler before giving up.
SCHEDULER_TIMEOUT = "20s"


class Runner(Protocol):
    """Maps independent tasks ``fn(shared, item)`` over ``items``; results in order."""

    name: str
    tile_cells: int

    def map(self, fn: Callable[[Any, Any], Any], shared: Any, items: Sequence[Any]
            ) -> Iterator[Any]: ...


class SerialRunner:
    """Runs every task in this process, one after another (the default)."""

    name = "single"

    def __init__(self, tile_cells: int = DEFAULT_TILE_CELLS) -> None:
        self.tile_cells = int(tile_cells)

    def map(self, fn: Callable[[Any, Any], Any], shared: Any, items: Sequence[Any]
            ) -> Iterator[Any]:
        for item in items:
            yield fn(shared, item)


# The shared data of the current call, in a worker process: (token, object).
_WORKER_SHARED: tuple[int, Any] = (-1, None)


def _pool_task(token: int, blob: bytes, fn: Callable[[Any, Any], Any], item: Any) -> Any:
    """One task in a worker process: ``shared`` is unpickled once per call and worker."""
    global _WORKER_SHARED
    if _WORKER_SHARED[0] != token:
        _WORKER_SHARED = (token, None)  # drop the previous call's data first
        _WORKER_SHARED = (token, pickle.loads(blob))
    return fn(_WORKER_SHARED[1], item)


def _worker_start() -> None:
    """A worker process computes one task at a time on one core: numerical libraries there
    use one thread each (the pool is the parallelism)."""
    from threadpoolctl import threadpool_limits

    threadpool_limits(1)


def available_cores() -> int:
    """The CPU cores this process may run on (its affinity where the system tells it)."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not on Linux
        return max(1, os.cpu_count() or 1)


class PoolRunner:
    """Runs the tasks of a call on a pool of worker processes on this machine (the default,
    ``mode = "local"``). Each task is the same function on the same data as in this
    process, so the numbers are identical to :class:`SerialRunner`'s. A call of one task
    runs in this process (starting work elsewhere would cost more than it saves); the pool
    starts at the first call of several tasks and lives until the session ends. Worker
    processes are forked where the system can (they start in milliseconds and share the
    parent's memory until they write), else spawned."""

    name = "local"

    def __init__(self, workers: int = 0, tile_cells: int = DEFAULT_TILE_CELLS) -> None:
        self.workers = int(workers) or available_cores()
        self.tile_cells = int(tile_cells)
        self._pool: Any = None
        self._token = 0

    def _executor(self) -> Any:
        if self._pool is None:
            import multiprocessing
            from concurrent.futures import ProcessPoolExecutor

            methods = multiprocessing.get_all_start_methods()
            ctx = multiprocessing.get_context("fork" if "fork" in methods else "spawn")
            self._pool = ProcessPoolExecutor(self.workers, mp_context=ctx,
                                             initializer=_worker_start)
        return self._pool

    def map(self, fn: Callable[[Any, Any], Any], shared: Any, items: Sequence[Any]
            ) -> Iterator[Any]:
        items = list(items)
        if self.workers <= 1 or len(items) <= 1:
            for item in items:
                yield fn(shared, item)
            return
        self._token += 1
        blob = pickle.dumps(shared, protocol=pickle.HIGHEST_PROTOCOL)
        pool = self._executor()
        futures = [pool.submit(_pool_task, self._token, blob, fn, it) for it in items]
        try:
            for i, fut in enumerate(futures):
                yield fut.result()
                futures[i] = None
        finally:
            for f in futures:
                if f is not None:
                    f.cancel()

    def close(self) -> None:
        """Stop the worker processes."""
        if self._pool is not None:
            self._pool.shutdown(wait=True, cancel_futures=True)
            self._pool = None


class DaskRunner:
    """Runs tasks on a Dask ``distributed.Client``: ``shared`` is scattered once to every
    worker, each item becomes a task, results are gathered in order as they are needed. A
    single task runs in this process (the same function, so the same numbers)."""

    name = "dask"

    def __init__(self, client: Any, tile_cells: int = DEFAULT_TILE_CELLS) -> None:
        self.client = client
        self.tile_cells = int(tile_cells)

    def map(self, fn: Callable[[Any, Any], Any], shared: Any, items: Sequence[Any]
            ) -> Iterator[Any]:
        items = list(items)
        if not items:
            return
        if len(items) == 1:  # one tile: sending it away costs more than it saves
            yield fn(shared, items[0])
            return
        shared_f = self.client.scatter(shared, broadcast=True, hash=False)
        item_f = self.client.scatter(items, hash=False)
        futures = [self.client.submit(fn, shared_f, it, pure=False) for it in item_f]
        del item_f
        try:
            for i, fut in enumerate(futures):
                yield fut.result()
                futures[i] = None  # release the result on the cluster once it is here
        finally:
            self.client.cancel([f for f in futures if f is not None])


@contextmanager
def compute_session(settings: ComputeSettings | None = None) -> Iterator[Runner]:
    """Open the runner that ``settings`` (``[compute]`` of project.toml) asks for, yield it
    for the ``with`` block, and shut it down afterwards.

    ``mode = "local"`` (default): a pool of ``workers`` processes on this machine (0: one
    per core; 1: in this process). ``mode = "single"``: in this process. ``mode =
    "dask"``: connect to ``scheduler`` when given, else start ``workers`` local worker
    processes (0: one per CPU core) with one thread each, and close them at the end.

    Raises:
        InputError: when Dask is asked for but not installed, or the scheduler cannot be
            reached.
    """
    settings = settings or ComputeSettings()
    if settings.mode == "local":
        runner = PoolRunner(settings.workers, settings.tile_cells)
        if runner.workers > 1:
            try:
                yield runner
            finally:
                runner.close()
            return
    if settings.mode != "dask":
        yield SerialRunner(settings.tile_cells)
        return
    try:
        from distributed import Client, LocalCluster
    except ImportError:
        raise InputError([Problem("project.toml", 0, 0, "[compute] mode = \"dask\" needs "
                                  "Dask: pip install \"aquitardmap[dask]\"")]) from None
    cluster = None
    try:
        if settings.scheduler:
            client = Client(settings.scheduler, timeout=SCHEDULER_TIMEOUT)
        else:
            n = settings.workers or os.cpu_count() or 1
            cluster = LocalCluster(n_workers=n, threads_per_worker=1, processes=True,
                                   dashboard_address=None)
            client = Client(cluster)
    except OSError as exc:
        if cluster is not None:
            cluster.close()
        raise InputError([Problem("project.toml", 0, 0, "cannot reach the Dask scheduler "
                                  f"at {settings.scheduler!r}: {exc}")]) from None
    try:
        yield DaskRunner(client, settings.tile_cells)
    finally:
        client.close()
        if cluster is not None:
            cluster.close()


def describe(runner: Runner) -> dict[str, Any]:
    """What a run used, for the summary: runner, tile size, kriging engine, workers."""
    from aquitardmap.geostat.localkrige import numba_available

    out: dict[str, Any] = {"mode": runner.name, "tile_cells": runner.tile_cells,
                           "kriging_engine": "compiled (numba)" if numba_available()
                           else "numpy"}
    if isinstance(runner, PoolRunner):
        out["workers"] = runner.workers
    client = getattr(runner, "client", None)
    if client is not None:
        info = client.scheduler_info()
        out["scheduler"] = client.scheduler.address
        out["workers"] = len(info.get("workers", {}))
    return out

"""Where the heavy work runs: in this process (default) or on a Dask cluster.

The kriging cuts its targets into tiles (:mod:`aquitardmap.geostat.kriging`), and every tile is an
independent task ``fn(shared, item)``: ``shared`` is the same for all tasks of a call (the
prepared data), ``item`` is the tile. A *runner* maps such tasks and returns the results in
order. The default runner runs them one after another in this process and needs nothing
beyond the core dependencies. The Dask runner sends ``shared`` once to every worker and the
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

    ``mode = "single"``: in this process. ``mode = "dask"``: connect to ``scheduler`` when
    given, else start ``workers`` local worker processes (0: one per CPU core) with one
    thread each, and close them at the end.

    Raises:
        InputError: when Dask is asked for but not installed, or the scheduler cannot be
            reached.
    """
    settings = settings or ComputeSettings()
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
    client = getattr(runner, "client", None)
    if client is not None:
        info = client.scheduler_info()
        out["scheduler"] = client.scheduler.address
        out["workers"] = len(info.get("workers", {}))
    return out

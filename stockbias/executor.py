"""Where independent pieces of work run: in this process, on local worker processes, or on
a Dask cluster.

Every executor has one method, ``map(fn, tasks, progress)``: it calls ``fn(task)`` for each
task and returns the results in the order of ``tasks``, whatever order they finished in,
so a caller that adds the results up gets the same answer on every executor.  ``fn`` must be
a module-level function and the tasks picklable (they travel to other processes).
``progress`` is called with each finished task's index.

Dask's ``distributed`` is an optional extra (``pip install 'stockbias[cluster]'``) and is
imported only when a cluster address is given.
"""

from __future__ import annotations

import os
from collections.abc import Callable, Sequence
from typing import Any, Protocol, TypeVar

from .errors import InputError

__all__ = ["DaskCluster", "Executor", "InProcess", "LocalProcesses", "cpu_count", "make_executor"]

T = TypeVar("T")
R = TypeVar("R")
Progress = Callable[[int], None] | None


class Executor(Protocol):
    """Runs ``fn`` over ``tasks``, results in task order."""

    workers: int
    name: str

    def map(self, fn: Callable[[Any], R], tasks: Sequence[Any],
            progress: Progress = None) -> list[R]: ...


def cpu_count() -> int:
    """The cores this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not Linux
        return max(1, os.cpu_count() or 1)


class InProcess:
    """Everything in the calling process, one task after the other."""

    workers = 1
    name = "this process"

    def map(self, fn: Callable[[Any], R], tasks: Sequence[Any],
            progress: Progress = None) -> list[R]:
        out = []
        for i, task in enumerate(tasks):
            out.append(fn(task))
            if progress is not None:
                progress(i)
        return out


class LocalProcesses:
    """``workers`` fresh worker processes on this machine (started with ``spawn``: no state of
    the caller is inherited, and no threads are forked)."""

    def __init__(self, workers: int) -> None:
        if workers < 1:
            raise InputError("the number of workers must be at least 1", column="--workers",
                             text=str(workers))
        self.workers = int(workers)
        self.name = f"{self.workers} local worker processes"

    def map(self, fn: Callable[[Any], R], tasks: Sequence[Any],
            progress: Progress = None) -> list[R]:
        if self.workers == 1 or len(tasks) <= 1:
            return InProcess().map(fn, tasks, progress)
        import multiprocessing
        from concurrent.futures import ProcessPoolExecutor, as_completed

        ctx = multiprocessing.get_context("spawn")
        out: list[Any] = [None] * len(tasks)
        with ProcessPoolExecutor(max_workers=min(self.workers, len(tasks)),
                                 mp_context=ctx) as pool:
            futures = {pool.submit(fn, task): i for i, task in enumerate(tasks)}
            for fut in as_completed(futures):
                i = futures[fut]
                out[i] = fut.result()
                if progress is not None:
                    progress(i)
        return out


class DaskCluster:
    """The workers of a running Dask ``distributed`` scheduler at ``address``
    (``tcp://HOST:PORT``)."""

    def __init__(self, address: str) -> None:
        try:
            from distributed import Client
        except ImportError as exc:
            raise InputError("--cluster needs Dask's distributed package: pip install "
                             "'stockbias[cluster]'", column="--cluster", text=address) from exc
        try:
            self.client = Client(address, timeout=10, set_as_default=False)
        except (OSError, TimeoutError) as exc:
            raise InputError(f"no Dask scheduler answers at {address} ({exc})",
                             column="--cluster", text=address) from exc
        self.workers = max(1, len(self.client.scheduler_info().get("workers", {})))
        self.name = f"the Dask cluster at {address} ({self.workers} workers)"

    def map(self, fn: Callable[[Any], R], tasks: Sequence[Any],
            progress: Progress = None) -> list[R]:
        futures = self.client.map(fn, list(tasks), pure=False)
        out = []
        for i, fut in enumerate(futures):  # in task order: the progress counts what is done
            out.append(fut.result())
            if progress is not None:
                progress(i)
            fut.release()
        return out

    def close(self) -> None:
        """Disconnect from the scheduler (the cluster keeps running)."""
        self.client.close()


def make_executor(workers: int | None = None, cluster: str | None = None) -> Executor:
    """The executor the options ask for: a cluster address wins; else ``workers`` local
    processes (default: every core; 1 runs in this process)."""
    if cluster:
        if not cluster.startswith("tcp://") or ":" not in cluster[6:]:
            raise InputError("a cluster address reads tcp://HOST:PORT", column="--cluster",
                             text=cluster)
        return DaskCluster(cluster)
    n = cpu_count() if workers is None or workers == 0 else int(workers)
    return InProcess() if n == 1 else LocalProcesses(n)

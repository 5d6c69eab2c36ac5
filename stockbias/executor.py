"""Where independent pieces of work run: in this process, on local worker processes, or on
a Dask cluster.

Every executor has ``imap(fn, tasks)``: it calls ``fn(task)`` for each task and yields the
results in the order of ``tasks``, whatever order they finished in, with only a few tasks
in flight per worker (so a million tasks never hold a million results); ``map`` collects
them.  A caller that adds the results up gets the same answer on every executor.  ``fn``
must be a module-level function and the tasks picklable (they travel to other processes).

Dask's ``distributed`` is an optional extra (``pip install 'stockbias[cluster]'``) and is
imported only when a cluster address is given.
"""

from __future__ import annotations

import os
from abc import ABC, abstractmethod
from collections import deque
from collections.abc import Callable, Iterator, Sequence
from typing import Any, Protocol, TypeVar

from .errors import InputError

__all__ = ["DaskCluster", "Executor", "InProcess", "LocalProcesses", "cpu_count", "make_executor"]

T = TypeVar("T")
R = TypeVar("R")


class Executor(Protocol):
    """Runs ``fn`` over ``tasks``; results come back in task order."""

    workers: int
    name: str

    def imap(self, fn: Callable[[Any], R], tasks: Sequence[Any]) -> Iterator[R]: ...

    def map(self, fn: Callable[[Any], R], tasks: Sequence[Any]) -> list[R]: ...


def cpu_count() -> int:
    """The cores this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not Linux
        return max(1, os.cpu_count() or 1)


class _Base(ABC):
    """``map`` from ``imap``."""

    @abstractmethod
    def imap(self, fn: Callable[[Any], R], tasks: Sequence[Any]) -> Iterator[R]:
        """Results in task order."""

    def map(self, fn: Callable[[Any], R], tasks: Sequence[Any]) -> list[R]:
        """Every result, in task order."""
        return list(self.imap(fn, tasks))


class InProcess(_Base):
    """Everything in the calling process, one task after the other."""

    workers = 1
    name = "this process"

    def imap(self, fn: Callable[[Any], R], tasks: Sequence[Any]) -> Iterator[R]:
        """Results in task order, each computed when it is asked for."""
        for task in tasks:
            yield fn(task)


def _windowed(submit: Callable[[Any], Any], result: Callable[[Any], R], tasks: Sequence[Any],
              window: int) -> Iterator[R]:
    """Results in task order with at most ``window`` tasks submitted and not yet taken, so
    memory holds a few results whatever the number of tasks."""
    pending: deque[Any] = deque()
    it = iter(tasks)
    for task in it:
        pending.append(submit(task))
        if len(pending) >= window:
            break
    while pending:
        fut = pending.popleft()
        for task in it:
            pending.append(submit(task))
            break
        yield result(fut)


class LocalProcesses(_Base):
    """``workers`` fresh worker processes on this machine (started with ``spawn``: no state of
    the caller is inherited, and no threads are forked)."""

    def __init__(self, workers: int) -> None:
        if workers < 1:
            raise InputError("the number of workers must be at least 1", column="--workers",
                             text=str(workers))
        self.workers = int(workers)
        self.name = f"{self.workers} local worker processes"

    def imap(self, fn: Callable[[Any], R], tasks: Sequence[Any]) -> Iterator[R]:
        """Results in task order; at most 4 tasks per worker in flight."""
        if self.workers == 1 or len(tasks) <= 1:
            yield from InProcess().imap(fn, tasks)
            return
        import multiprocessing
        from concurrent.futures import ProcessPoolExecutor

        ctx = multiprocessing.get_context("spawn")
        with ProcessPoolExecutor(max_workers=min(self.workers, len(tasks)),
                                 mp_context=ctx) as pool:
            yield from _windowed(lambda t: pool.submit(fn, t), lambda f: f.result(), tasks,
                                 4 * self.workers)


class DaskCluster(_Base):
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

    def imap(self, fn: Callable[[Any], R], tasks: Sequence[Any]) -> Iterator[R]:
        """Results in task order; at most 4 tasks per worker in flight."""
        def take(fut: Any) -> R:
            out = fut.result()
            fut.release()
            return out  # type: ignore[no-any-return]

        yield from _windowed(lambda t: self.client.submit(fn, t, pure=False), take, tasks,
                             4 * self.workers)

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

"""Executors: where tasks run. Serial, joblib (loky processes) or Dask distributed.

Every executor is a context manager with two methods:

``as_completed(fn, items)``
    yields ``fn(item)`` for every item, in the order the results arrive;
``map(fn, items)``
    the same results as a list in input order.

Workers only compute; they never open the store. The job runner consumes
``as_completed`` in the main process and commits each result in one store transaction
as it arrives, so a crash loses only the tasks in flight (the store is single-writer by
design: its copy-on-write transactions and writer lock allow one writing process).

Only this module (and nothing in the numerical stages) imports joblib or dask.
"""

from __future__ import annotations

import logging
import os
from typing import Any, Callable, Iterable, Iterator

from maasscomp.config import ExecutorConfig
from maasscomp.errors import InputError


class SerialExecutor:
    """Run tasks one after the other in this process."""

    name = "serial"

    def __init__(self) -> None:
        self.workers = 1

    def __enter__(self) -> "SerialExecutor":
        return self

    def __exit__(self, *exc: Any) -> None:
        pass

    def as_completed(self, fn: Callable, items: Iterable) -> Iterator:
        for it in items:
            yield fn(it)

    def map(self, fn: Callable, items: Iterable) -> list:
        return [fn(it) for it in items]


class JoblibExecutor:
    """Worker processes on this machine through joblib's loky backend.

    Loky limits the BLAS threads of each worker to cores / workers, so two workers on two
    cores do not oversubscribe.
    """

    name = "joblib"

    def __init__(self, workers: int) -> None:
        if workers < 1:
            raise InputError(f"workers={workers!r} is not allowed; use an integer >= 1")
        self.workers = workers

    def __enter__(self) -> "JoblibExecutor":
        return self

    def __exit__(self, *exc: Any) -> None:
        pass

    def _parallel(self, return_as: str):
        from joblib import Parallel

        # batch_size=1: tasks take seconds, and results must come back one by one
        return Parallel(n_jobs=self.workers, backend="loky", return_as=return_as,
                        batch_size=1, pre_dispatch="2*n_jobs")

    def as_completed(self, fn: Callable, items: Iterable) -> Iterator:
        from joblib import delayed

        items = list(items)
        if not items:
            return iter(())
        return iter(self._parallel("generator_unordered")(delayed(fn)(it) for it in items))

    def map(self, fn: Callable, items: Iterable) -> list:
        from joblib import delayed

        items = list(items)
        if not items:
            return []
        return self._parallel("list")(delayed(fn)(it) for it in items)


class DaskExecutor:
    """A Dask distributed cluster: a LocalCluster of worker processes, or a running
    scheduler given by its address (workers there need maasscomp installed).

    Parameters
    ----------
    workers : int
        Worker processes of the local cluster (ignored with ``address``).
    address : str, optional
        Scheduler address, e.g. ``tcp://10.0.0.5:8786``.
    memory_limit_gb : float, optional
        Memory limit of each local worker.
    processes : bool
        Local workers as processes (default) or as threads of this process.
    connect_timeout : float
        Seconds to wait for the scheduler at ``address``.
    """

    name = "dask"

    def __init__(self, workers: int, address: str | None = None,
                 memory_limit_gb: float | None = None, processes: bool = True,
                 connect_timeout: float = 15.0) -> None:
        if workers < 1:
            raise InputError(f"workers={workers!r} is not allowed; use an integer >= 1")
        self.workers = workers
        self.address = address
        self.memory_limit_gb = memory_limit_gb
        self.processes = processes
        self.connect_timeout = connect_timeout
        self.client = None
        self.cluster = None

    def __enter__(self) -> "DaskExecutor":
        from distributed import Client, LocalCluster

        if self.address:
            try:
                self.client = Client(self.address, timeout=f"{self.connect_timeout}s")
            except (OSError, TimeoutError) as exc:
                raise InputError(
                    f"[executor] address={self.address!r}: cannot reach a Dask scheduler there "
                    f"({exc}); start one (dask scheduler) or remove the address to use a local "
                    "cluster") from None
            self.workers = max(1, sum(w.get("nthreads", 1) for w in
                                      self.client.scheduler_info().get("workers", {}).values()))
        else:
            kw: dict[str, Any] = {}
            if self.memory_limit_gb:
                kw["memory_limit"] = int(self.memory_limit_gb * 2**30)
            self.cluster = LocalCluster(n_workers=self.workers, threads_per_worker=1,
                                        processes=self.processes, dashboard_address=None,
                                        silence_logs=logging.ERROR, **kw)
            self.client = Client(self.cluster)
        return self

    def __exit__(self, *exc: Any) -> None:
        if self.client is not None:
            self.client.close()
            self.client = None
        if self.cluster is not None:
            self.cluster.close()
            self.cluster = None

    def as_completed(self, fn: Callable, items: Iterable) -> Iterator:
        from distributed import as_completed

        if self.client is None:
            raise RuntimeError("use DaskExecutor inside a 'with' block")
        futures = [self.client.submit(fn, it, pure=False) for it in items]
        try:
            for fut in as_completed(futures):
                res = fut.result()
                fut.release()
                yield res
        finally:
            pending = [f for f in futures if not f.done()]
            if pending:
                self.client.cancel(pending)

    def map(self, fn: Callable, items: Iterable) -> list:
        if self.client is None:
            raise RuntimeError("use DaskExecutor inside a 'with' block")
        futures = self.client.map(fn, list(items), pure=False)
        return self.client.gather(futures)


def make_executor(cfg: ExecutorConfig, *, processes: bool = True):
    """The executor named by ``[executor] backend`` (not yet entered)."""
    if cfg.backend == "serial":
        return SerialExecutor()
    if cfg.backend == "joblib":
        return JoblibExecutor(cfg.workers)
    if cfg.backend == "dask":
        return DaskExecutor(cfg.workers, cfg.address, cfg.memory_limit_gb, processes=processes)
    raise InputError(f"backend {cfg.backend!r} is not allowed; use serial, joblib or dask")


def cpu_count() -> int:
    """Cores this process may use."""
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # pragma: no cover - non-Linux
        return os.cpu_count() or 1

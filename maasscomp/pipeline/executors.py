"""Executors: where tasks run. Serial, joblib (loky processes) or Dask distributed.

Every executor is a context manager with two methods:

``as_completed(fn, items)``
    yields ``fn(item)`` for every item, in the order the results arrive;
``map(fn, items)``
    the same results as a list in input order.

Workers only compute; they never open the store. The job runner consumes
``as_completed`` in the main process and commits each result in one store transaction
as it arrives, so a crash loses only the tasks in flight (the store is single-writer by
design: its append-only commits and writer lock allow one writing process).

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


#: Name of the thread that ends a worker process when the main process dies.
_WATCH_THREAD = "maasscomp-parent-watch"


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def start_parent_watch(main_pid: int, interval: float = 0.5) -> None:
    """In a worker process: end this process within ``interval`` seconds of the death of
    the main process (``main_pid``) or of its own parent.

    A worker killed this way loses only the task it was computing, which the main process
    could not have stored anyway; without it a worker of a killed run computes on for
    minutes.  Idempotent per process (one watch thread); a no-op in the main process.
    """
    import threading
    import time

    if os.getpid() == main_pid or any(t.name == _WATCH_THREAD for t in threading.enumerate()):
        return
    ppid = os.getppid()

    def watch() -> None:
        while True:
            time.sleep(interval)
            if os.getppid() != ppid or not _alive(main_pid):
                os._exit(70)

    threading.Thread(target=watch, name=_WATCH_THREAD, daemon=True).start()


class _Watched:
    """``fn`` wrapped so that the worker running it watches the main process."""

    def __init__(self, fn: Callable, main_pid: int) -> None:
        self.fn = fn
        self.main_pid = main_pid

    def __call__(self, item: Any) -> Any:
        start_parent_watch(self.main_pid)
        return self.fn(item)


class JoblibExecutor:
    """Worker processes on this machine through joblib's loky process pool.

    BLAS threads of each worker are limited to cores / workers, so two workers on two cores
    do not oversubscribe.  At most ``2 * workers`` tasks are queued at a time, so an
    interruption leaves little queued work; leaving the ``with`` block on an exception
    (an interrupt, a failed commit) kills the workers at once, and a worker ends by itself
    when the main process dies (:func:`start_parent_watch`).
    """

    name = "joblib"

    def __init__(self, workers: int) -> None:
        if workers < 1:
            raise InputError(f"workers={workers!r} is not allowed; use an integer >= 1")
        self.workers = workers
        self._pool = None

    def __enter__(self) -> "JoblibExecutor":
        from joblib.externals.loky import get_reusable_executor

        threads = str(max(1, cpu_count() // self.workers))
        env = {k: threads for k in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS",
                                    "NUMBA_NUM_THREADS")}
        self._pool = get_reusable_executor(max_workers=self.workers, timeout=60, env=env)
        return self

    def __exit__(self, exc_type: Any, *exc: Any) -> None:
        pool, self._pool = self._pool, None
        if pool is not None and exc_type is not None:
            pool.shutdown(wait=False, kill_workers=True)

    def _submit_all(self, fn: Callable, items: list) -> Iterator:
        from concurrent.futures import FIRST_COMPLETED, wait

        if self._pool is None:
            raise RuntimeError("use JoblibExecutor inside a 'with' block")
        task = _Watched(fn, os.getpid())
        todo = list(enumerate(items))[::-1]
        running: dict = {}
        try:
            while todo or running:
                while todo and len(running) < 2 * self.workers:
                    i, it = todo.pop()
                    running[self._pool.submit(task, it)] = i
                done, _ = wait(list(running), return_when=FIRST_COMPLETED)
                for fut in done:
                    i = running.pop(fut)
                    yield i, fut.result()
        finally:
            for fut in running:
                fut.cancel()

    def as_completed(self, fn: Callable, items: Iterable) -> Iterator:
        for _, res in self._submit_all(fn, list(items)):
            yield res

    def map(self, fn: Callable, items: Iterable) -> list:
        items = list(items)
        out: list = [None] * len(items)
        for i, res in self._submit_all(fn, items):
            out[i] = res
        return out


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
            if self.processes:
                from maasscomp.pipeline._dask_watch import register_parent_watch

                register_parent_watch(self.client, os.getpid())
        return self

    def __exit__(self, *exc: Any) -> None:
        if self.client is not None:
            self.client.close()
            self.client = None
        if self.cluster is not None:
            self.cluster.close(timeout=10)
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


def probe_dask_scheduler(address: str, timeout: float = 15.0) -> None:
    """Raise InputError unless a Dask scheduler answers at ``address`` within ``timeout`` s.

    A Dask peer greets every new connection at once with a framed handshake message (an
    8-byte total length, an 8-byte frame count and the frame lengths, little-endian; the
    TCP comm of ``distributed``).  So: nothing listening, no answer, silence, or a greeting
    that is not such a frame (an HTTP or SSH server, say) each get their own message, and
    the Dask client is never pointed at a service that would make it wait or read garbage
    as frame lengths.  For ``tls://`` only the TCP connection is checked (the greeting is
    encrypted).
    """
    import socket
    import struct
    import time

    from maasscomp.config import parse_dask_address

    scheme, host, port = parse_dask_address(address)
    where = f"[executor] address={address!r}"
    deadline = time.monotonic() + timeout
    try:
        infos = socket.getaddrinfo(host, port, type=socket.SOCK_STREAM)
    except socket.gaierror as exc:
        raise InputError(f"{where}: host {host!r} is unknown ({exc.strerror}); check the name") from None
    last: Exception | None = None
    sock = None
    for family, stype, proto, _, sa in infos:
        left = deadline - time.monotonic()
        if left <= 0:
            break
        s = socket.socket(family, stype, proto)
        s.settimeout(left)
        try:
            s.connect(sa)
            sock = s
            break
        except OSError as exc:
            last = exc
            s.close()
    if sock is None:
        if isinstance(last, ConnectionRefusedError):
            raise InputError(f"{where}: nothing listens at {host}:{port} (connection refused); "
                             "start the scheduler (dask scheduler) or fix the address") from None
        if isinstance(last, (socket.timeout, TimeoutError)) or last is None:
            raise InputError(f"{where}: no answer from {host}:{port} within {timeout:g} s (host "
                             "down, a firewall, or a slow network); check the address") from None
        raise InputError(f"{where}: cannot connect to {host}:{port} "
                         f"({getattr(last, 'strerror', None) or last})") from None
    try:
        if scheme == "tls":
            return
        head = b""
        while len(head) < 16:
            left = deadline - time.monotonic()
            if left <= 0:
                break
            sock.settimeout(left)
            try:
                chunk = sock.recv(16 - len(head))
            except (socket.timeout, TimeoutError):
                break
            except OSError as exc:
                raise InputError(f"{where}: the connection to {host}:{port} failed "
                                 f"({exc.strerror or exc})") from None
            if not chunk:
                break
            head += chunk
    finally:
        sock.close()
    if not head:
        raise InputError(f"{where}: the service at {host}:{port} accepted the connection but "
                         f"sent nothing within {timeout:g} s; a Dask scheduler greets at once, so "
                         "this is not a Dask scheduler (or it is too overloaded to answer)")
    ok = len(head) == 16
    if ok:
        total, nframes = struct.unpack("<QQ", head)
        ok = 1 <= nframes <= 64 and 8 + 8 * nframes <= total <= 2**26
    if not ok:
        shown = head.decode("ascii", "replace").strip() or head.hex()
        raise InputError(f"{where}: the service at {host}:{port} is not a Dask scheduler (it "
                         f"answered {shown[:40]!r})")


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

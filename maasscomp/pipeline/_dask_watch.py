"""Local Dask workers and nannies end when the main process dies (imported only with Dask)."""

from __future__ import annotations

from distributed.diagnostics.plugin import NannyPlugin, WorkerPlugin

from maasscomp.pipeline.executors import start_parent_watch


class _NannyWatch(NannyPlugin):
    def __init__(self, main_pid: int) -> None:
        self.main_pid = main_pid

    def setup(self, nanny) -> None:
        start_parent_watch(self.main_pid)


class _WorkerWatch(WorkerPlugin):
    def __init__(self, main_pid: int) -> None:
        self.main_pid = main_pid

    def setup(self, worker) -> None:
        start_parent_watch(self.main_pid)


def register_parent_watch(client, main_pid: int) -> None:
    """Make every nanny and worker process of a local cluster watch ``main_pid``."""
    client.register_plugin(_NannyWatch(main_pid), name="maasscomp-nanny-watch")
    client.register_plugin(_WorkerWatch(main_pid), name="maasscomp-worker-watch")

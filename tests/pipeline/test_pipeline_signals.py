"""SIGTERM stops a run like Ctrl-C (message, exit 143, resumable); worker processes end
within 10 s when the main process dies, also by SIGKILL (joblib/loky and local Dask)."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from maasscomp.config import load
from maasscomp.errors import StoreError
from maasscomp.pipeline.job import run_job
from maasscomp.store import Store

from tests.pipeline.pipeline_helpers import REPO, write_config

WINDOW = (9.3, 12.4)  # 13 chunks of 0.25, each a second or more of work
N_TASKS = 13


def _done(path: Path, run: str) -> int:
    try:
        with Store.open(path, "r") as st:
            return len(st.done_tasks(run))
    except StoreError:  # not created yet
        return 0


def _descendants(pid: int) -> set[int]:
    """Every live process below ``pid`` (from /proc)."""
    children: dict[int, list[int]] = {}
    for d in Path("/proc").iterdir():
        if not d.name.isdigit():
            continue
        try:
            fields = (d / "stat").read_text().rsplit(")", 1)[1].split()
        except OSError:
            continue
        children.setdefault(int(fields[1]), []).append(int(d.name))
    out, todo = set(), [pid]
    while todo:
        for c in children.get(todo.pop(), []):
            out.add(c)
            todo.append(c)
    return out


def _alive(pids: set[int]) -> set[int]:
    out = set()
    for p in pids:
        try:
            state = Path(f"/proc/{p}/stat").read_text().rsplit(")", 1)[1].split()[0]
        except OSError:
            continue
        if state != "Z":
            out.add(p)
    return out


def _start(tmp_path: Path, backend: str, name: str) -> tuple[subprocess.Popen, Path, Path]:
    cfg = write_config(tmp_path / "c.toml", output="s.h5", R=WINDOW, chunk_width=0.25,
                       name=name, backend=backend, workers=2)
    env = dict(os.environ, PYTHONPATH=str(REPO) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    proc = subprocess.Popen([sys.executable, "-m", "maasscomp", "run", str(cfg), "-q"],
                            cwd=tmp_path, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    return proc, cfg, tmp_path / "s.h5"


def _wait_for_progress(proc, store: Path, name: str, n: int) -> None:
    deadline = time.monotonic() + 240
    while _done(store, name) < n:
        assert proc.poll() is None, proc.communicate()
        assert time.monotonic() < deadline, "the run made no progress"
        time.sleep(0.05)


def _assert_gone_within(pids: set[int], seconds: float) -> float:
    t0 = time.monotonic()
    while _alive(pids):
        assert time.monotonic() - t0 < seconds, f"workers {_alive(pids)} still run"
        time.sleep(0.1)
    return time.monotonic() - t0


def test_sigterm_stops_the_run_resumably(tmp_path, monkeypatch):
    proc, cfg, store = _start(tmp_path, "joblib", "term")
    try:
        _wait_for_progress(proc, store, "term", 2)
        workers = _descendants(proc.pid)
        assert workers, "no worker processes found"
        proc.send_signal(signal.SIGTERM)
        _, err = proc.communicate(timeout=60)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
    assert proc.returncode == 143, err
    err = err.decode()
    assert "terminated (SIGTERM); finished tasks are stored, rerun to resume" in err
    assert "Traceback" not in err
    assert "terminated (SIGTERM)" in (tmp_path / "s.h5.log").read_text()
    _assert_gone_within(workers, 10)
    n_before = _done(store, "term")
    assert 2 <= n_before < N_TASKS
    monkeypatch.chdir(tmp_path)
    resumed = run_job(load(cfg), quiet=True)
    assert resumed.ok and resumed.tasks_skipped == n_before
    assert resumed.tasks_run == N_TASKS - n_before


@pytest.mark.parametrize("backend", ["joblib", pytest.param("dask", marks=pytest.mark.slow)])
def test_workers_end_when_the_main_process_is_killed(tmp_path, backend):
    proc, _, store = _start(tmp_path, backend, "orphans")
    try:
        _wait_for_progress(proc, store, "orphans", 2)
        workers = _descendants(proc.pid)
        assert len(workers) >= 2, "no worker processes found"
        os.kill(proc.pid, signal.SIGKILL)
        proc.wait()
        took = _assert_gone_within(workers, 10)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
        for p in _alive(_descendants(os.getpid()) & workers):
            os.kill(p, signal.SIGKILL)
    print(f"{backend}: {len(workers)} worker processes gone {took:.1f} s after SIGKILL",
          file=sys.stderr)

"""A sweep killed with SIGKILL part-way resumes to the store an uninterrupted run makes."""

from __future__ import annotations

import os
import random
import signal
import subprocess
import sys
import time

import h5py

from maasscomp.config import load
from maasscomp.errors import StoreError
from maasscomp.pipeline.job import run_job
from maasscomp.store import Store

from tests.pipeline.pipeline_helpers import (REPO, assert_same_content, published_level1_R,
                                             store_content, write_config)

WINDOW = (9.3, 12.4)  # 13 chunks: [9.3, 9.5], [9.5, 9.75], ..., [12.25, 12.4]
N_TASKS = 13


def _done(path) -> int:
    try:
        with Store.open(path, "r") as st:
            return len(st.done_tasks("killme"))
    except StoreError:  # not created yet
        return 0


def test_sigkill_then_rerun_gives_the_uninterrupted_store(tmp_path, monkeypatch):
    ref_dir = tmp_path / "ref"
    ref_dir.mkdir()
    ref_cfg = load(write_config(ref_dir / "c.toml", output=str(ref_dir / "s.h5"), R=WINDOW,
                                chunk_width=0.25, name="killme"))
    ref = run_job(ref_cfg, quiet=True)
    assert ref.ok and ref.tasks_total == N_TASKS

    cfg_path = write_config(tmp_path / "c.toml", output="s.h5", R=WINDOW, chunk_width=0.25,
                            name="killme")
    store = tmp_path / "s.h5"
    env = dict(os.environ, PYTHONPATH=str(REPO) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    proc = subprocess.Popen([sys.executable, "-m", "maasscomp", "run", str(cfg_path), "-q"],
                            cwd=tmp_path, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    try:
        deadline = time.monotonic() + 120
        while _done(store) < 2:
            assert proc.poll() is None, proc.communicate()
            assert time.monotonic() < deadline, "the sweep made no progress"
            time.sleep(0.02)
        time.sleep(random.uniform(0.0, 0.2))  # kill at an arbitrary point of the next task
        os.kill(proc.pid, signal.SIGKILL)
    finally:
        proc.wait()
    assert proc.returncode == -signal.SIGKILL
    n_before = _done(store)
    assert 2 <= n_before < N_TASKS, "the kill came after the sweep had finished"

    with h5py.File(store, "r") as h:  # a plain HDF5 reader opens it cleanly
        assert h.attrs["format"] == "maasscomp-store"

    monkeypatch.chdir(tmp_path)  # the config's output path is relative to the working directory
    resumed = run_job(load(cfg_path), quiet=True)
    assert resumed.ok
    assert resumed.tasks_skipped == n_before and resumed.tasks_run == N_TASKS - n_before

    assert_same_content(store_content(ref_cfg.job.output), store_content(store))
    with Store.open(ref_cfg.job.output, "r") as st:
        ref_done = set(st.done_tasks("killme"))
    with Store.open(store, "r") as st:
        assert set(st.done_tasks("killme")) == ref_done and len(ref_done) == N_TASKS
        Rs = sorted(st.get(k).R for k in st.keys())
    # the published odd forms of the window, each exactly once
    # (data/reference/maass_level1_published.csv: F. Chamizo's table; see the file header)
    pub = [R for parity, R, _ in published_level1_R().values()
           if parity == "odd" and WINDOW[0] <= R <= WINDOW[1]]
    assert len(pub) == 2 and len(Rs) == 2
    for R, p in zip(Rs, sorted(pub)):
        assert abs(R - p) < 1e-10
    # no temporary file of the killed writer is left beside the store
    assert not [p.name for p in tmp_path.iterdir() if ".tmp." in p.name]

"""kill -9 at random moments leaves a readable store with a prefix of complete forms."""

from __future__ import annotations

import os
import random
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

import maasscomp
from maasscomp.store import Store
from tests.store.store_form_factory import assert_forms_equal, indexed_form

ROOT = Path(maasscomp.__file__).resolve().parents[1]
WRITER = Path(__file__).with_name("store_crash_writer.py")


def _start_writer(path: Path, start: int, batch: int, compact_every: int = 0) -> subprocess.Popen:
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    proc = subprocess.Popen([sys.executable, str(WRITER), str(path), str(start), str(batch),
                             str(10**9), str(compact_every)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, env=env, cwd=ROOT)
    line = proc.stdout.readline()
    if line.strip() != b"ready":
        proc.kill()
        raise AssertionError(f"writer did not start: {line!r} {proc.stderr.read()!r}")
    return proc


def _check_prefix(path: Path, batch: int, at_least: int) -> int:
    with Store.open(path, "r") as st:
        keys = st.keys(order="written")
        n = len(keys)
        assert n >= at_least, "committed forms were lost"
        assert n % batch == 0, f"a transaction of {batch} forms was torn: {n} forms stored"
        for i, k in enumerate(keys):
            assert_forms_equal(st.get(k), indexed_form(i))
        done = st.done_tasks("crash")
        assert set(done) == {f"task{i}" for i in range(0, n, batch)}
        for i in range(0, n, batch):
            assert done[f"task{i}"] == keys[i:i + batch]
        for i, k in enumerate(keys):
            if "scan" in st.attachments(k):
                assert i % 2 == 0 and i % batch == 0
                assert st.get_attachment(k, "scan")["i"] == i
    return n


@pytest.mark.parametrize("batch,compact_every", [(1, 0), (7, 0), (7, 2)],
                         ids=["txn1", "txn7", "txn7-compacting"])
def test_sigkill_at_random_moments_keeps_a_complete_prefix(tmp_path, batch, compact_every):
    """Also with compactions (a new file renamed over the store) every second transaction:
    a kill inside one leaves the old file or the new one, never a mix."""
    rnd = random.Random(1234 + batch + compact_every)
    path = tmp_path / "crash.h5"
    n = 0
    kills = 0
    for _ in range(5):
        proc = _start_writer(path, n, batch, compact_every)
        deadline = time.monotonic() + rnd.uniform(0.0, 0.4)
        while time.monotonic() < deadline:
            # readers in this process while the writer commits: each sees a whole snapshot
            n = _check_prefix(path, batch, n)
        if proc.poll() is not None:  # pragma: no cover - the writer never stops by itself
            raise AssertionError(f"writer exited early: {proc.stderr.read()!r}")
        proc.send_signal(signal.SIGKILL)
        proc.wait()
        proc.stdout.close()
        proc.stderr.close()
        kills += 1
        n = _check_prefix(path, batch, n)
        print(f"kill {kills}: {n} forms", file=sys.stderr)
    assert kills == 5
    assert n > 0, "no transaction committed in 5 runs; the test did not exercise anything"
    # a stale temporary of the last kill may remain; the next writer removes it
    with Store.open(path, "a", create=True) as st:
        assert len(st) == n
    assert not [p for p in tmp_path.iterdir() if ".tmp." in p.name]

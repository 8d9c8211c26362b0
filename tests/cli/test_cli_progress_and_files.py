"""Progress bars only on a terminal (a redirected log gets no carriage returns; --progress
forces them, --no-progress and -q suppress them), the writer's lock file removed on close,
and the advice printed for windows Weyl's law still flags."""

from __future__ import annotations

import os
import subprocess
import sys
import threading
import time
from pathlib import Path

import pytest

from maasscomp.errors import StoreError
from maasscomp.store import Store
from tests.pipeline.pipeline_helpers import write_config

REPO = Path(__file__).resolve().parents[2]


@pytest.fixture(scope="module")
def job(tmp_path_factory):
    d = tmp_path_factory.mktemp("progress")
    return d, write_config(d / "c.toml", output=str(d / "s.h5"), R=(9.45, 9.6), name="bars")


def _run(job, *flags):
    d, cfg = job
    env = dict(os.environ, PYTHONPATH=str(REPO))
    # bytes, not text: universal newlines would turn a carriage return into a newline
    r = subprocess.run([sys.executable, "-m", "maasscomp", "run", str(cfg), *flags], cwd=d, env=env,
                       capture_output=True, timeout=600)
    return subprocess.CompletedProcess(r.args, r.returncode, r.stdout.decode(), r.stderr.decode())


def test_redirected_output_has_no_carriage_returns(job):
    r = _run(job)  # stderr is a pipe, not a terminal
    assert r.returncode == 0, r.stderr
    assert "\r" not in r.stderr and "\r" not in r.stdout
    assert "1 forms of this config" in r.stdout
    forced = _run(job, "--progress")  # resumes: every task done, the bar still drawn
    assert forced.returncode == 0 and "\r" in forced.stderr and "search:" in forced.stderr
    off = _run(job, "--no-progress")
    assert off.returncode == 0 and "\r" not in off.stderr
    d, _ = job
    assert sorted(p.name for p in d.iterdir()) == ["c.toml", "s.h5", "s.h5.log"]  # no lock file left


def test_lock_file_is_removed_and_a_waiting_writer_takes_over(tmp_path):
    """A writer waiting for the lock gets it when the holder closes (and removes the file);
    while it writes, a third writer is refused; after it closes no lock file is left."""
    p = tmp_path / "s.h5"
    first = Store.open(p, "a", create=True)
    got = {}

    def wait():
        got["store"] = Store.open(p, "a", lock_timeout=20.0)

    t = threading.Thread(target=wait)
    t.start()
    time.sleep(0.3)
    assert "store" not in got
    first.close()
    t.join(20)
    second = got["store"]
    assert (tmp_path / "s.h5.lock").exists()
    with pytest.raises(StoreError, match="open for writing by another process"):
        Store.open(p, "a")
    second.close()
    assert sorted(x.name for x in tmp_path.iterdir()) == ["s.h5"]


class _W:
    def __init__(self, lo, hi, found, expected):
        self.T_lo, self.T_hi, self.found, self.expected = lo, hi, found, expected


def test_advice_for_flagged_windows_says_what_to_do():
    from maasscomp.pipeline.job import completeness_advice

    upper, lower, inner = completeness_advice(
        11, 20.0, 30.0, [_W(28.0, 30.0, 3, 5.1), _W(20.0, 22.0, 3, 4.0), _W(24.0, 26.0, 2, 4.2)], None)
    assert "upper edge" in upper and "extend the window to R_max = 35 (R_max + 5)" in upper
    assert "lower edge" in lower and "R_min = 15 (R_min - 5)" in lower
    assert "probably missing" in inner and "[search] step = 0.05" in inner and "complete_search(gamma0(11), 24, 26)" in inner
    for line in (upper, lower, inner):
        assert "np.float64" not in line and "rerun" in line or "complete_search" in line

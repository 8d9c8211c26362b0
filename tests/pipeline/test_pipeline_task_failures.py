"""A task that fails is reported with its reason, is not marked done, and the rerun redoes
only that task."""

from __future__ import annotations

from maasscomp.cli import main
from maasscomp.config import load
from maasscomp.errors import ConvergenceError
from maasscomp.pipeline import tasks as T
from maasscomp.pipeline.job import run_job
from maasscomp.store import Store

from tests.pipeline.pipeline_helpers import write_config


def test_failed_task_is_reported_and_retried(tmp_path, monkeypatch, capsys):
    cfg_path = write_config(tmp_path / "c.toml", output=str(tmp_path / "s.h5"), R=(9.3, 9.8),
                            name="fail")
    real_run = T.SearchTask.run

    def flaky(self):
        if self.chunk.lo == 9.5:
            raise ConvergenceError("refinement did not converge near R=9.53 (test)")
        return real_run(self)

    monkeypatch.setattr(T.SearchTask, "run", flaky)
    code = main(["run", str(cfg_path)])
    cap = capsys.readouterr()
    assert code == 1
    assert "search:N=1:odd:[9.5,9.75]: ConvergenceError: refinement did not converge" in cap.out
    assert "1 task(s) failed" in cap.err and "rerun the same config" in cap.err
    log_text = (tmp_path / "s.h5.log").read_text()
    assert "Traceback" in log_text and "ConvergenceError" in log_text  # details go to the log
    with Store.open(tmp_path / "s.h5", "r") as st:
        done = st.done_tasks("fail")
        assert len(done) == 2 and "search:N=1:odd:[9.5,9.75]" not in done
        assert len(st) == 0  # the only eigenvalue, 9.5337, sits in the failed chunk

    monkeypatch.setattr(T.SearchTask, "run", real_run)
    s = run_job(load(cfg_path), quiet=True)
    assert s.ok and s.tasks_run == 1 and s.tasks_skipped == 2 and s.forms_new == 1

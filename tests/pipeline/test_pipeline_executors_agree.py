"""The same small sweep through the serial, joblib and Dask (real LocalCluster) executors
gives the same store content; executors stream results as they complete."""

from __future__ import annotations

import time

import pytest

from maasscomp.config import load
from maasscomp.pipeline.executors import DaskExecutor, JoblibExecutor, SerialExecutor
from maasscomp.pipeline.job import run_job
from maasscomp.store import Store

from tests.pipeline.pipeline_helpers import assert_same_content, store_content, write_config


def _sleep_then_return(x: float) -> float:
    time.sleep(x)
    return x


@pytest.fixture(scope="module")
def sweep_stores(tmp_path_factory):
    d = tmp_path_factory.mktemp("sweep")
    out = {}
    for backend in ("serial", "joblib", "dask"):
        cfg_path = write_config(d / f"{backend}.toml", output=str(d / f"{backend}.h5"),
                                levels="[1, 2]", parities='["even", "odd"]', R=(9.3, 9.8),
                                backend=backend, workers=2, name="sweep")
        cfg = load(cfg_path)
        summary = run_job(cfg, quiet=True)
        out[backend] = (cfg, summary)
    # an existing scheduler, reached by its address: the one line a user changes to move
    # a sweep onto a cluster (here a cluster of this process's threads behind a real TCP
    # scheduler, which the preflight probes before any work)
    from distributed import LocalCluster

    with LocalCluster(n_workers=2, threads_per_worker=1, processes=False, protocol="tcp://",
                      dashboard_address=None) as cluster:
        assert cluster.scheduler_address.startswith("tcp://")
        cfg_path = write_config(d / "address.toml", output=str(d / "address.h5"),
                                levels="[1, 2]", parities='["even", "odd"]', R=(9.3, 9.8),
                                backend="dask", workers=1, name="sweep",
                                extra=f'address = "{cluster.scheduler_address}"')
        cfg = load(cfg_path)
        out["dask-address"] = (cfg, run_job(cfg, quiet=True))
    return out


def test_every_backend_gives_the_same_store(sweep_stores):
    ref = store_content(sweep_stores["serial"][0].job.output)
    # level 1: R = 9.5337 (odd); level 2: its two oldforms (Atkin-Lehner signs + and -)
    assert [(d["level"], d["label"]) for d in ref] == [(1, "odd"), (2, "odd,2+"), (2, "odd,2-")]
    for backend in ("joblib", "dask", "dask-address"):
        cfg, summary = sweep_stores[backend]
        assert summary.ok, summary.as_text()
        assert summary.backend == backend.split("-")[0] and summary.workers == 2
        assert_same_content(ref, store_content(cfg.job.output))


def test_every_task_is_marked_done_once(sweep_stores):
    ids = None
    for backend, (cfg, summary) in sweep_stores.items():
        assert summary.tasks_total == 18 and summary.tasks_run == 18
        with Store.open(cfg.job.output, "r") as st:
            done = st.done_tasks("sweep")
            assert st.runs() == ["sweep"]
        if ids is None:
            ids = set(done)
        assert set(done) == ids and len(ids) == 18


@pytest.mark.parametrize("make", [SerialExecutor, lambda: JoblibExecutor(2),
                                  lambda: DaskExecutor(2, processes=False)])
def test_results_arrive_as_completed(make):
    with make() as ex:
        got = list(ex.as_completed(_sleep_then_return, [0.8, 0.0]))
        assert sorted(got) == [0.0, 0.8]
        if ex.workers > 1:
            assert got == [0.0, 0.8]  # the slow task does not hold back the fast ones
        assert ex.map(_sleep_then_return, [0.0, 0.1, 0.0]) == [0.0, 0.1, 0.0]


def test_joint_search_of_a_group_equals_searching_each_class():
    from maasscomp.pipeline.tasks import SearchTask, TaskGroup, chunk_window, execute, execute_group
    from maasscomp.spectrum.search import symmetry_classes
    from maasscomp.groups import gamma0

    (chunk,) = chunk_window(9.4, 9.7, 1.0)
    tasks = tuple(SearchTask(2, s.label, chunk, 1e-14, 20, 0.05) for s in symmetry_classes(gamma0(2)))
    joint = execute_group(TaskGroup(tasks))
    alone = [execute(t) for t in tasks]
    assert [o.task_id for o in joint] == [o.task_id for o in alone]
    found = 0
    for a, b in zip(joint, alone):
        assert a.ok and b.ok
        assert len(a.output.forms) == len(b.output.forms)
        for f, g in zip(a.output.forms, b.output.forms):
            assert abs(f.R - g.R) < 1e-10 and f.symmetry == g.symmetry
            found += 1
    assert found == 2  # the oldforms of R = 9.5337 from level 1, one per Atkin-Lehner sign


def test_unreachable_scheduler_is_a_clear_input_error():
    from maasscomp.errors import InputError

    ex = DaskExecutor(1, address="tcp://127.0.0.1:9", connect_timeout=1.0)
    with pytest.raises(InputError, match="cannot reach a Dask scheduler there"):
        with ex:
            pass

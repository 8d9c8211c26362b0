"""Stage: pipeline -- job configs become tasks, tasks run on an executor, results go to the store.

Public API
----------
run_job(cfg, *, quiet=False, verbose=False, show_progress=None, executor=None) -> JobSummary
    Run or resume a validated config (:func:`maasscomp.config.load`).
preflight(cfg) -> Plan
    Every check that can fail before a file is written (``maasscomp check``).
build_plan(cfg) -> Plan
    The search tasks of a config (level x symmetry class x R chunk).
SerialExecutor, JoblibExecutor, DaskExecutor, make_executor
    Executors with ``as_completed(fn, items)`` and ``map(fn, items)``.

Only this stage imports joblib and dask.
"""

from maasscomp.pipeline.executors import DaskExecutor, JoblibExecutor, SerialExecutor, make_executor
from maasscomp.pipeline.job import JobSummary, preflight, run_job
from maasscomp.pipeline.tasks import Plan, build_plan

__all__ = ["run_job", "preflight", "build_plan", "JobSummary", "Plan",
           "SerialExecutor", "JoblibExecutor", "DaskExecutor", "make_executor"]

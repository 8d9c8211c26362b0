"""Windows that Weyl's law flags are searched again, once, and the forms missing there are
found."""

from __future__ import annotations

import shutil

from maasscomp.config import load
from maasscomp.pipeline.job import run_job
from maasscomp.store import Store

from tests.pipeline.pipeline_helpers import assert_same_content, store_content, write_config


def _drop(path, lo, hi) -> int:
    with Store.open(path, "a", create=True) as st:
        keys = [k for k in st.keys() if lo < st.get(k).R < hi]
        for k in keys:
            st.delete_form(k)
    return len(keys)


def test_flagged_window_is_searched_again(tmp_path):
    # every class of level 2 (both parities, both Atkin-Lehner signs), 1 <= R <= 11
    path = write_config(tmp_path / "c.toml", output=str(tmp_path / "s.h5"), levels="[2]",
                        parities='["even", "odd"]', R=(1.0, 11.0), chunk_width=2.0, step=None,
                        name="rc")
    cfg = load(path)
    first = run_job(cfg, quiet=True)
    assert first.ok and first.rechecks_run == 0
    assert first.weyl and "no window flagged" in first.weyl[0]
    full = store_content(cfg.job.output)
    shutil.copy(cfg.job.output, tmp_path / "full.h5")

    # two neighbouring eigenvalues go missing (as if the search had not seen them)
    assert _drop(cfg.job.output, 8.0, 9.2) == 2
    off = load(path)
    from dataclasses import replace

    off = replace(off, search=replace(off.search, recheck=False))
    s_off = run_job(off, quiet=True)
    assert s_off.tasks_run == 0 and s_off.rechecks_run == 0
    assert "still flagged" in s_off.weyl[0]
    # the summary names the tests of every window; the flagged one says which test flagged it
    per_window = [ln for ln in s_off.weyl[1:] if "Turing integral" in ln]
    assert per_window and any("flagged:" in ln for ln in per_window)

    again = run_job(cfg, quiet=True)
    assert again.ok and again.tasks_run == 0
    assert again.rechecks_run == 1 and again.recheck_new == 2
    assert "no window flagged" in again.weyl[0]
    # the forms found again are the ones the first search stored (found again at other
    # heights with a finer grid: R to far better than 1e-9, coefficients to 1e-7)
    assert_same_content(full, store_content(cfg.job.output), R_tol=1e-9, c_tol=1e-7)

    # a window searched again is not searched a third time
    assert _drop(cfg.job.output, 8.0, 9.2) == 2
    third = run_job(cfg, quiet=True)
    assert third.rechecks_run == 0 and "still flagged" in third.weyl[0]
    log = (tmp_path / "s.h5.log").read_text()
    assert "flagged by Weyl's law" in log and "searched again before" in log

"""A run on a store with a damaged form computes that form again and replaces it."""

from __future__ import annotations

from maasscomp.config import load
from maasscomp.pipeline.job import run_job
from maasscomp.store import Store

from tests.pipeline.pipeline_helpers import write_config


def test_rerun_replaces_a_damaged_form(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    cfg = load(write_config(tmp_path / "c.toml", output="s.h5", R=(9.3, 9.8), name="fix"))
    assert run_job(cfg, quiet=True).ok
    store = tmp_path / "s.h5"
    with Store.open(store) as st:
        (key,) = st.keys()
        good = st.get(key)
        at = int(st._idx.buf[st._idx.pos[key]]["coeffs_at"]) + 8 * 5
    with open(store, "r+b") as fh:  # one coefficient overwritten on disk
        fh.seek(at)
        fh.write(b"\x00" * 8)
    with Store.open(store) as st:
        assert key in st.verify()
    again = run_job(cfg, quiet=True)
    assert again.ok and again.tasks_run == 1 and again.tasks_skipped == 2
    assert "damaged" in (tmp_path / "s.h5.log").read_text()
    with Store.open(store) as st:
        assert st.verify() == {} and st.keys() == [key]
        f = st.get(key)
        assert abs(f.R - good.R) < 1e-10 and abs(f.coeffs - good.coeffs).max() < 1e-8

"""The scan stage stores each form's sup-norm scan once; the report turns a store into
tables and figures."""

from __future__ import annotations

import csv

import pytest

from maasscomp.config import load
from maasscomp.errors import InputError, StoreError
from maasscomp.pipeline.job import run_job
from maasscomp.report import make_report
from maasscomp.supnorm.scan import NORM_ATTACHMENT, SCAN_ATTACHMENT
from maasscomp.store import Store

from tests.pipeline.pipeline_helpers import write_config


@pytest.fixture(scope="module")
def scanned(tmp_path_factory):
    d = tmp_path_factory.mktemp("scan")
    # both parities, so that Weyl's law (a count over all classes) applies to the window
    path = write_config(d / "c.toml", output=str(d / "s.h5"), R=(9.4, 9.7), name="scan",
                        parities='["even", "odd"]', extra_search="\n[scan]\nenabled = true\nrtol = 1e-3")
    cfg = load(path)
    first = run_job(cfg, quiet=True)
    again = run_job(cfg, quiet=True)
    return cfg, first, again


def test_each_form_is_scanned_once_and_resume_skips_it(scanned):
    from maasscomp.supnorm.scan import ScanSettings, scan_form

    cfg, first, again = scanned
    assert first.ok and first.scans_total == 1 and first.scans_run == 1
    assert again.ok and again.scans_run == 0 and again.scans_skipped == 1 and again.tasks_run == 0
    attachment, norm_attachment = SCAN_ATTACHMENT, NORM_ATTACHMENT
    with Store.open(cfg.job.output, "r") as st:
        (key,) = st.keys()
        assert st.attachments(key) == sorted([attachment, norm_attachment])
        stored = st.get_attachment(key, attachment)
        assert st.done_tasks("scan")[f"scan:{key}"] == [key]
        form = st.get(key)
    # the stored scan is the scanner's result for the stored form
    direct = scan_form(form, settings=ScanSettings(rtol=1e-3), form_key=key)
    assert stored["global_region"] == direct.global_region
    assert stored["global_value"] == pytest.approx(direct.global_value, rel=1e-12)
    assert stored["regions"]["0"]["value"] == pytest.approx(direct.omega.value, rel=1e-12)
    assert "sup-norm scans: 1 run" in first.as_text()


def test_scan_settings_change_is_refused_only_between_scanning_runs(scanned, tmp_path):
    cfg, _, _ = scanned
    text = cfg.source_path.read_text()
    changed = tmp_path / "c2.toml"
    changed.write_text(text.replace("rtol = 1e-3", "rtol = 1e-2"))
    with pytest.raises(InputError, match=r"\[scan\] rtol: 0.001 -> 0.01"):
        run_job(load(changed), quiet=True)
    # a run without scans may follow, and scanning may be turned on later with any settings
    plain = tmp_path / "plain.toml"
    write_config(plain, output=str(tmp_path / "p.h5"), R=(9.4, 9.7), name="p")
    assert run_job(load(plain), quiet=True).ok
    plain.write_text(plain.read_text().replace("[scan]\nenabled = false", "[scan]\nenabled = true\nrtol = 1e-2"))
    s = run_job(load(plain), quiet=True)
    assert s.ok and s.scans_run == 1 and s.tasks_run == 0


def test_report_folder(scanned, tmp_path):
    from maasscomp.spectrum.weyl import completeness

    cfg, _, _ = scanned
    rep = make_report(cfg.job.output, tmp_path / "rep")
    for name in ("README.md", "summary.csv", "summary.md", "weyl.csv", "weyl_N1.png", "peaks.csv", "peaks.md"):
        assert (tmp_path / "rep" / name).is_file(), name
        assert name in rep.files
    figs = [f for f in rep.files if f.endswith(".png") and "peak" in f]
    assert figs and all((tmp_path / "rep" / f).is_file() for f in figs)
    with Store.open(cfg.job.output, "r") as st:
        (key,) = st.keys()
        R = st.get(key).R
    with open(tmp_path / "rep" / "summary.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert [(r["level"], r["class"], r["forms"]) for r in rows] == [("1", "odd", "1")]
    with open(tmp_path / "rep" / "weyl.csv", newline="") as fh:
        wrows = list(csv.DictReader(fh))
    ref = completeness(1, [R], 9.4, 9.7)
    assert len(wrows) == len(ref.windows)
    for w, r in zip(ref.windows, wrows):
        assert int(r["found"]) == w.found and float(r["expected"]) == pytest.approx(w.expected, abs=1e-6)
        # every completeness test is in the table, per window
        assert float(r["turing_bound"]) == pytest.approx(w.turing_bound, abs=1e-6)
        assert float(r["turing_integral"]) == pytest.approx(w.turing_integral, abs=1e-6)
        assert int(r["missing_min"]) == w.missing_min and int(r["small_gaps"]) == w.small_gaps
        assert r["flagged"] in ("true", "false")
    with open(tmp_path / "rep" / "peaks.csv", newline="") as fh:
        (prow,) = list(csv.DictReader(fh))
    assert prow["key"] == key and float(prow["R"]) == R
    readme = (tmp_path / "rep" / "README.md").read_text()
    assert "1 forms scanned" in readme and "fingerprint" in readme and "[scan]" in readme
    assert "level 1, R in [9.4, 9.7]: 1 forms found" in readme
    assert "Turing-style integral" in readme and "What the tests can and cannot show" in readme


def test_report_of_a_store_without_runs_or_scans(tmp_path):
    from maasscomp.store import Store

    with Store.open(tmp_path / "empty.h5", "w"):
        pass
    rep = make_report(tmp_path / "empty.h5", tmp_path / "r")
    text = (tmp_path / "r" / "README.md").read_text()
    assert "holds 0 forms" in text and "(no search tasks recorded)" in text
    assert "the store holds no scans" in text
    assert "peaks.csv" not in rep.files


def test_report_of_a_missing_store_creates_nothing(tmp_path):
    with pytest.raises(StoreError, match="does not exist"):
        make_report(tmp_path / "missing.h5", tmp_path / "r")
    assert not (tmp_path / "r").exists()
